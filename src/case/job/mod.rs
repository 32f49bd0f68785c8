//! The fit job file (docs/fit-jobs.md): the material and scenario a fit starts from, the free
//! parameters by path, the cases (scenario + reduced test data + signals), and the settings.
//! The raw file structs live here (children see them); each part is read by its own child:
//! `parameters`, `settings`, `cases` (cone cases), `milligram` (TGA, DSC, MCC cases),
//! `weighting` (σ and weights), `prior_from` (a prior from an earlier run's summary.json).
//! Errors name file, line and key (`CaseError`).

mod cases;
mod milligram;
mod parameters;
mod prior_from;
mod settings;
pub mod weighting;

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use serde::Deserialize;
use toml::Spanned;

pub use cases::{CaseSetup, FitCase, MilligramSetup, SignalData, SignalKind, SignalProbe};
pub use settings::{Settings, DEFAULT_SEED};
pub use weighting::effective_fraction;

use super::targets::Target;
use crate::case::material::MaterialModel;
use crate::case::source::Source;
use crate::case::{load_material, load_scenario, CaseError, LoadedScenario};
use crate::fit::parameters::FreeParameter;

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct JobFile {
    title: String,
    material: Spanned<String>,
    /// Required when the job has a cone case; a job of milligram cases alone needs none.
    scenario: Option<Spanned<String>>,
    #[serde(rename = "parameter")]
    parameters: Vec<ParameterFile>,
    #[serde(rename = "case")]
    cases: Vec<CaseFile>,
    #[serde(default)]
    settings: SettingsFile,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct ParameterFile {
    path: Spanned<String>,
    min: Spanned<f64>,
    max: Spanned<f64>,
    #[serde(default)]
    scale: Option<ScaleFile>,
    start: Option<Spanned<f64>>,
    prior: Option<PriorKind>,
    prior_mean: Option<Spanned<f64>>,
    prior_sd: Option<Spanned<f64>>,
    /// For the Arrhenius reparametrisation by peak temperature, K/min (default 10).
    reference_heating_rate_k_min: Option<Spanned<f64>>,
    /// For the reparametrisation by log10 of the rate at a temperature, K.
    reference_temperature_k: Option<Spanned<f64>>,
    #[serde(default)]
    tie: Vec<Spanned<String>>,
    /// An earlier run's summary.json whose estimate of the same path becomes a prior.
    prior_from: Option<Spanned<String>>,
}

#[derive(Debug, Clone, Copy, Deserialize)]
#[serde(rename_all = "snake_case")]
enum ScaleFile {
    Linear,
    Log,
}

#[derive(Debug, Clone, Copy, Deserialize)]
#[serde(rename_all = "snake_case")]
enum PriorKind {
    Normal,
    Lognormal,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct CaseFile {
    name: String,
    /// `"cone"` (the default) or a milligram kind, `"tga"`, `"dsc"`, `"mcc"`.
    kind: Option<Spanned<String>>,
    /// A milligram-scale scenario (heating programme, composition, numerics) for the case.
    scenario: Option<Spanned<String>>,
    tests: Vec<Spanned<String>>,
    #[serde(default)]
    align: Option<AlignFile>,
    irradiance_kw_m2: Option<Spanned<f64>>,
    thickness_mm: Option<Spanned<f64>>,
    duration_s: Option<Spanned<f64>>,
    /// Required for cone cases; a milligram case defaults to its file's signal.
    #[serde(default)]
    signals: Vec<SignalFile>,
}

#[derive(Debug, Clone, Copy, Deserialize)]
#[serde(rename_all = "snake_case")]
enum AlignFile {
    ExposureStart,
    Ignition,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct SignalFile {
    signal: Spanned<SignalKind>,
    weight: Option<Spanned<f64>>,
    window_s: Option<Spanned<[f64; 2]>>,
    /// Noise standard deviation in the signal's unit; when given it replaces the default scale.
    sigma: Option<Spanned<f64>>,
    /// For `in_depth_temperature`: the thermocouple's depth below the exposed surface, mm.
    depth_mm: Option<Spanned<f64>>,
}

impl SignalFile {
    fn kind(&self) -> SignalKind {
        *self.signal.get_ref()
    }
}

#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
struct SettingsFile {
    max_evaluations: Option<Spanned<i64>>,
    time: Option<Spanned<String>>,
    target_objective: Option<Spanned<f64>>,
    stagnation_generations: Option<Spanned<i64>>,
    population: Option<Spanned<i64>>,
    seed: Option<u64>,
    local_refinement: Option<bool>,
    local_max_evaluations: Option<Spanned<i64>>,
    local_starts: Option<Spanned<i64>>,
    output_interval_s: Option<Spanned<f64>>,
    curve_weighting: Option<CurveWeightingFile>,
    posterior_steps: Option<Spanned<i64>>,
    posterior_walkers: Option<Spanned<i64>>,
    posterior_burn_in: Option<Spanned<i64>>,
}

#[derive(Debug, Clone, Copy, Deserialize)]
#[serde(rename_all = "snake_case")]
enum CurveWeightingFile {
    IndependentPoints,
    PerSample,
}

/// A validated fit job.
#[derive(Debug, Clone)]
pub struct FitJob {
    pub path: PathBuf,
    pub title: String,
    pub material_path: PathBuf,
    pub material: MaterialModel,
    pub parameters: Vec<FreeParameter>,
    /// Where each parameter's value goes (`targets[i]`: parameter i's path, then its tied
    /// paths), through `case::targets`.
    pub targets: Vec<Vec<Target>>,
    pub cases: Vec<FitCase>,
    pub settings: Settings,
    /// Plausibility warnings on the cases' test data (see `data::plausibility`).
    pub warnings: Vec<crate::data::Notice>,
}

/// Reads a fit job, its material and scenario, and reduces every test it names.
pub fn load_job(path: &Path) -> Result<FitJob, CaseError> {
    let source = Source::read(path)?;
    let file: JobFile = source.parse()?;
    let base = path.parent().unwrap_or(Path::new("."));
    let material_path = base.join(file.material.get_ref());
    let material = load_material(&material_path).map_err(|err| match err {
        CaseError::Read { source: io, .. } => source.invalid(
            &file.material.span(),
            "material",
            format!("cannot read {}: {io}", material_path.display()),
        ),
        other => other,
    })?;
    let scenario = match &file.scenario {
        Some(scenario_file) => Some(load_job_scenario(
            &source,
            base,
            scenario_file,
            &file.material,
            &material,
        )?),
        None => None,
    };
    if file.parameters.is_empty() {
        return Err(source.inconsistent("a fit needs at least one [[parameter]]"));
    }
    check_unique_case_names(&source, &file)?;
    let mut parameters = Vec::new();
    let mut targets = Vec::new();
    for (idx, raw) in file.parameters.iter().enumerate() {
        let (parameter, parameter_targets) =
            parameters::build_parameter(&source, idx, raw, base, &material, scenario.as_ref())?;
        parameters.push(parameter);
        targets.push(parameter_targets);
    }
    parameters::check_unique_targets(&source, &file, &targets)?;
    if file.cases.is_empty() {
        return Err(source.inconsistent("a fit needs at least one [[case]]"));
    }
    let settings = settings::build_settings(&source, &file.settings, file.parameters.len())?;
    let mut cases = Vec::new();
    let mut warnings = Vec::new();
    for (idx, raw) in file.cases.iter().enumerate() {
        if let milligram::CaseKind::Milligram(declared) = milligram::case_kind(&source, idx, raw)? {
            cases.push(milligram::build_milligram_case(
                &source,
                idx,
                raw,
                declared,
                base,
                (&material_path, &material),
                settings.output_interval_s,
                &mut warnings,
            )?);
            continue;
        }
        let Some(scenario) = &scenario else {
            return Err(milligram::cone_case_without_scenario(&source, idx, raw));
        };
        milligram::check_cone_case(&source, idx, raw)?;
        cases.push(cases::build_case(
            &source,
            idx,
            raw,
            base,
            scenario,
            &settings,
            &mut warnings,
        )?);
    }
    Ok(FitJob {
        path: path.to_path_buf(),
        title: file.title,
        material_path,
        material,
        parameters,
        targets,
        cases,
        settings,
        warnings,
    })
}

/// The targets of a job file's parameters against `material` (which must have the job's
/// components and reactions, e.g. its calibrated model), without reading anything else the
/// job names: what `predict` needs of the fit job a run started with.
pub fn load_parameter_targets(
    path: &Path,
    material: &MaterialModel,
) -> Result<Vec<Vec<Target>>, CaseError> {
    let source = Source::read(path)?;
    let file: JobFile = source.parse()?;
    file.parameters
        .iter()
        .enumerate()
        .map(|(idx, raw)| parameters::parameter_targets(&source, idx, raw, material).map(|t| t.0))
        .collect()
}

/// Two cases whose names give the same curve file name (`cases/<slug>--<signal>.csv`) would
/// overwrite each other's outputs: refused, naming the line of the second `[[case]]`.
fn check_unique_case_names(source: &Source, file: &JobFile) -> Result<(), CaseError> {
    let case_lines: Vec<usize> = source
        .text
        .lines()
        .enumerate()
        .filter(|(_, line)| line.trim_start().starts_with("[[case]]"))
        .map(|(i, _)| i + 1)
        .collect();
    for (idx, case) in file.cases.iter().enumerate() {
        let slug = crate::run::slug(&case.name);
        if let Some(first) = file.cases[..idx]
            .iter()
            .position(|other| crate::run::slug(&other.name) == slug)
        {
            return Err(CaseError::Invalid {
                path: source.path.clone(),
                line: case_lines.get(idx).copied().unwrap_or(1),
                field: format!("case[{idx}].name"),
                problem: format!(
                    "`{}` gives the same output file names as case[{first}] `{}` \
                     (cases/{slug}--SIGNAL.csv); give each case its own name",
                    case.name, file.cases[first].name
                ),
            });
        }
    }
    Ok(())
}

/// Reads the job's cone scenario; its specimen layers take the job's (starting) material.
fn load_job_scenario(
    source: &Source,
    base: &Path,
    scenario_file: &Spanned<String>,
    material_file: &Spanned<String>,
    material: &MaterialModel,
) -> Result<LoadedScenario, CaseError> {
    let scenario_path = base.join(scenario_file.get_ref());
    let mut scenario = load_scenario(&scenario_path).map_err(|err| match err {
        CaseError::Read { source: io, .. } => source.invalid(
            &scenario_file.span(),
            "scenario",
            format!("cannot read {}: {io}", scenario_path.display()),
        ),
        other => other,
    })?;
    for (layer, model) in scenario
        .scenario
        .layers
        .iter_mut()
        .zip(scenario.materials.iter_mut())
    {
        if layer.is_specimen {
            if layer.material.components.len() != material.material.components.len() {
                return Err(source.invalid(
                    &material_file.span(),
                    "material",
                    format!(
                        "has {} components but the scenario's specimen layer has {}; the layer's composition needs the same components",
                        material.material.components.len(),
                        layer.material.components.len()
                    ),
                ));
            }
            layer.material = material.material.clone();
            *model = material.clone();
        }
    }
    Ok(scenario)
}

/// The names of tests and the files they read, for hashing into the run record.
pub fn data_files(job: &FitJob) -> BTreeMap<String, PathBuf> {
    let mut files = BTreeMap::new();
    files.insert("material".to_string(), job.material_path.clone());
    for case in &job.cases {
        for test in &case.test_files {
            files.insert(test.display().to_string(), test.clone());
        }
    }
    files
}
