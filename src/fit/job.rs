//! The fit job file (docs/fit-jobs.md): the material and scenario a fit starts from, the free
//! parameters by path, the cases (scenario + reduced test data + signals), and the settings.
//! A case is a cone case or a milligram-scale one (TGA, DSC, MCC; built in `job::milligram`).

mod milligram;
mod prior_from;

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::time::Duration;

use serde::Deserialize;
use toml::Spanned;

use super::parameters::{FreeParameter, Prior, PropertyPart, Scale, Target};
use crate::case::material::MaterialModel;
use crate::case::source::{error_chain, Source};
use crate::case::{load_material, load_scenario, CaseError, LoadedScenario};
use crate::data::reduce::DEPTH_MATCH_MM;
use crate::data::repeats::{combine, Alignment, MeanCurve, RepeatSet};
use crate::data::{reduce, Reduced, TestDescription};
use crate::microscale::MeasurementKind;
use crate::physics::zero_d::{TemperatureProgramme, ZeroDSettings};

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

/// A signal's weight (default 1) and time window `[start, end]`, s (default: all times),
/// checked; `field` names a key of this signal for errors. Cone and milligram signals share it.
fn weight_and_window(
    source: &Source,
    raw_signal: Option<&SignalFile>,
    field: &dyn Fn(&str) -> String,
) -> Result<(f64, (f64, f64)), CaseError> {
    let weight = match raw_signal.and_then(|s| s.weight.as_ref()) {
        Some(v) => source.non_negative(v, &field("weight"))?,
        None => 1.0,
    };
    let window = match raw_signal.and_then(|s| s.window_s.as_ref()) {
        Some(w) => {
            let [a, b] = *w.get_ref();
            if b <= a {
                return Err(source.invalid(
                    &w.span(),
                    &field("window_s"),
                    format!("must be [start, end] with end > start, got [{a}, {b}]"),
                ));
            }
            (a, b)
        }
        None => (f64::NEG_INFINITY, f64::INFINITY),
    };
    Ok((weight, window))
}

/// The largest absolute value (the default scale of a signal), never zero.
fn largest_magnitude(values: &[f64]) -> f64 {
    values
        .iter()
        .fold(0.0f64, |m, v| m.max(v.abs()))
        .max(f64::MIN_POSITIVE)
}

/// A measured quantity the fit can match.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum SignalKind {
    /// Mass loss rate, g/(m²·s).
    Mlr,
    /// Heat release rate, kW/m².
    Hrr,
    /// Specimen mass, g.
    Mass,
    /// Time to ignition, s.
    IgnitionTime,
    /// Peak heat release rate, kW/m² (one value per case: the repeats' mean).
    PeakHrr,
    /// Time of the peak heat release rate, s.
    TimeToPeakHrr,
    /// Total heat released over the record, MJ/m².
    TotalHeatRelease,
    /// Mean mass loss rate between 10 % and 90 % of the mass loss, g/(m²·s) (ISO 5660-1).
    AverageMlr,
    /// Exposed-surface temperature, K.
    SurfaceTemperature,
    /// Temperature of the specimen's unexposed face (at the backing), K.
    BackTemperature,
    /// Temperature at a depth below the initial exposed surface, K.
    InDepthTemperature,
    /// TGA: sample mass over its initial mass, –.
    MassFraction,
    /// DSC: heat flow per initial mass, W/g, endothermic positive.
    DscHeatFlow,
    /// MCC: heat release rate per initial mass, W/g.
    MccHrr,
}

impl SignalKind {
    pub fn name(self) -> &'static str {
        match self {
            SignalKind::Mlr => "mlr",
            SignalKind::Hrr => "hrr",
            SignalKind::Mass => "mass",
            SignalKind::IgnitionTime => "ignition_time",
            SignalKind::PeakHrr => "peak_hrr",
            SignalKind::TimeToPeakHrr => "time_to_peak_hrr",
            SignalKind::TotalHeatRelease => "total_heat_release",
            SignalKind::AverageMlr => "average_mlr",
            SignalKind::SurfaceTemperature => "surface_temperature",
            SignalKind::BackTemperature => "back_temperature",
            SignalKind::InDepthTemperature => "in_depth_temperature",
            SignalKind::MassFraction => "mass_fraction",
            SignalKind::DscHeatFlow => "dsc_heat_flow",
            SignalKind::MccHrr => "mcc_hrr",
        }
    }

    pub fn unit(self) -> &'static str {
        match self {
            SignalKind::Mlr | SignalKind::AverageMlr => "g/(m²·s)",
            SignalKind::Hrr | SignalKind::PeakHrr => "kW/m²",
            SignalKind::TimeToPeakHrr => "s",
            SignalKind::TotalHeatRelease => "MJ/m²",
            SignalKind::Mass => "g",
            SignalKind::IgnitionTime => "s",
            SignalKind::SurfaceTemperature
            | SignalKind::BackTemperature
            | SignalKind::InDepthTemperature => "K",
            SignalKind::MassFraction => "–",
            SignalKind::DscHeatFlow | SignalKind::MccHrr => "W/g",
        }
    }

    /// A test-report quantity (one value per case, the repeats' mean) rather than a curve.
    pub fn is_scalar(self) -> bool {
        matches!(
            self,
            SignalKind::IgnitionTime
                | SignalKind::PeakHrr
                | SignalKind::TimeToPeakHrr
                | SignalKind::TotalHeatRelease
                | SignalKind::AverageMlr
        )
    }

    /// This quantity in one test's report.
    fn of_report(self, report: &crate::data::report::Report) -> Option<f64> {
        match self {
            SignalKind::IgnitionTime => report.ignition_time_s,
            SignalKind::PeakHrr => report.peak_hrr_kw_m2,
            SignalKind::TimeToPeakHrr => report.time_to_peak_hrr_s,
            SignalKind::TotalHeatRelease => report.total_heat_release_mj_m2,
            SignalKind::AverageMlr => report.avg_mlr_10_90_g_m2s,
            _ => None,
        }
    }

    /// The milligram-scale measurement this signal belongs to; `None` for a cone signal.
    pub fn milligram_kind(self) -> Option<MeasurementKind> {
        match self {
            SignalKind::MassFraction => Some(MeasurementKind::Tga),
            SignalKind::DscHeatFlow => Some(MeasurementKind::Dsc),
            SignalKind::MccHrr => Some(MeasurementKind::Mcc),
            _ => None,
        }
    }

    /// The signal a milligram-scale measurement gives.
    pub fn of_milligram(kind: MeasurementKind) -> SignalKind {
        match kind {
            MeasurementKind::Tga => SignalKind::MassFraction,
            MeasurementKind::Dsc => SignalKind::DscHeatFlow,
            MeasurementKind::Mcc => SignalKind::MccHrr,
        }
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

/// Measured data of one signal, on the data's own time base.
#[derive(Debug, Clone, PartialEq)]
pub struct SignalData {
    pub kind: SignalKind,
    pub weight: f64,
    /// Times from exposure start, s (a single entry for the ignition time).
    pub time_s: Vec<f64>,
    pub value: Vec<f64>,
    /// Standard deviation used to normalise each residual, in the signal's unit.
    pub sigma: Vec<f64>,
    /// Where the normalisation came from (`repeats`, `sigma`, `peak`, `rise`).
    pub sigma_source: &'static str,
    /// For an in-depth temperature: where the model reads it.
    pub probe: Option<SignalProbe>,
    /// Effective number of independent residuals among `time_s.len()`: neighbouring samples
    /// of a curve are correlated, so a curve from repeats counts as n·(1 − ρ)/(1 + ρ) points,
    /// ρ the lag-one autocorrelation of the repeats' standardised deviations from their mean
    /// (equal to the sample count for a single test, a scalar, or a stated `sigma`). `weight`
    /// already includes the factor effective/total when `settings.curve_weighting` is
    /// `"independent_points"`.
    pub effective_points: f64,
}

/// The model side of an in-depth temperature signal.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SignalProbe {
    /// Depth below the initial exposed surface, mm.
    pub depth_mm: f64,
    /// Index of the probe in the case scenario's probes (and in each sample's
    /// `probe_temperatures_k`).
    pub index: usize,
}

impl SignalData {
    /// The signal's name in outputs: the kind, with the depth for an in-depth temperature
    /// (`in_depth_temperature_5mm`).
    pub fn label(&self) -> String {
        match self.probe {
            Some(probe) => format!("{}_{}mm", self.kind.name(), probe.depth_mm),
            None => self.kind.name().to_string(),
        }
    }
}

/// One case of the fit: what is simulated (a cone scenario with the case's irradiance and
/// thickness, or a milligram-scale run) and its data.
#[derive(Debug, Clone)]
pub struct FitCase {
    pub name: String,
    pub setup: CaseSetup,
    /// Exposed area of the cone specimen, m² (0 for a milligram case): what the measured
    /// per-area curves are per.
    pub exposed_area_m2: f64,
    /// Area of the specimen face that burns, m² (the test description's `specimen_area_m2`,
    /// else the exposed area; 0 for a milligram case).
    pub specimen_area_m2: f64,
    pub signals: Vec<SignalData>,
    /// The test descriptions and data files this case's data come from.
    pub test_files: Vec<PathBuf>,
}

impl FitCase {
    /// Burning area over the area the data are per: the model's per-area rates (per m² of
    /// specimen) times this are comparable with the data (1 unless the lab divided by an
    /// edge frame's opening while the whole slab burnt).
    pub fn area_ratio(&self) -> f64 {
        if self.exposed_area_m2 > 0.0 && self.specimen_area_m2 > 0.0 {
            self.specimen_area_m2 / self.exposed_area_m2
        } else {
            1.0
        }
    }

    /// The cone scenario, for a cone case.
    pub fn cone_scenario(&self) -> Option<&LoadedScenario> {
        match &self.setup {
            CaseSetup::Cone(scenario) => Some(scenario),
            CaseSetup::Milligram(_) => None,
        }
    }

    /// The milligram-scale run, for a milligram case.
    pub fn milligram(&self) -> Option<&MilligramSetup> {
        match &self.setup {
            CaseSetup::Cone(_) => None,
            CaseSetup::Milligram(setup) => Some(setup),
        }
    }
}

/// What a case simulates.
#[derive(Debug, Clone)]
pub enum CaseSetup {
    /// A cone test: the 1-D solver on this scenario.
    Cone(Box<LoadedScenario>),
    /// A TGA, DSC or MCC run: the 0-D model (`physics::zero_d`) of the job's material.
    Milligram(MilligramSetup),
}

/// A milligram-scale run of the 0-D model, as a case of the fit.
#[derive(Debug, Clone, PartialEq)]
pub struct MilligramSetup {
    /// What the case's file measures.
    pub kind: MeasurementKind,
    /// The heating programme, from the case's milligram scenario or fitted to the file's
    /// temperatures (`MilligramCase::from_thermogram`).
    pub programme: TemperatureProgramme,
    /// Data time at which the programme starts, s: 0 with a scenario (the file's clock is the
    /// programme's), the first data time without one.
    pub programme_start_s: f64,
    /// Initial mass fraction of each component of the job's material.
    pub initial_mass_fractions: Vec<f64>,
    /// Integrator, tolerances, output interval and the DSC sensible-heat switch.
    pub settings: ZeroDSettings,
}

/// Optimiser settings and stops.
#[derive(Debug, Clone, PartialEq)]
pub struct Settings {
    pub max_evaluations: usize,
    pub time_budget: Option<Duration>,
    pub target_objective: f64,
    pub stagnation_generations: usize,
    /// Population size; 0 picks 10 per free parameter (at least 16).
    pub population: usize,
    pub seed: u64,
    pub local_refinement: bool,
    pub local_max_evaluations: usize,
    /// Nelder–Mead runs from this many distinct good points of the final population.
    pub local_starts: usize,
    pub output_interval_s: f64,
    /// Whether a curve from repeats weighs as its effective number of independent points
    /// (`SignalData::effective_points`) rather than as every sample.
    pub weigh_independent_points: bool,
    /// The posterior sample after the fit (`fit::posterior`); `None` when
    /// `posterior_steps` is absent or 0.
    pub posterior: Option<crate::fit::posterior::PosteriorSettings>,
}

/// A validated fit job.
#[derive(Debug, Clone)]
pub struct FitJob {
    pub path: PathBuf,
    pub title: String,
    pub material_path: PathBuf,
    pub material: MaterialModel,
    pub parameters: Vec<FreeParameter>,
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
    for (idx, raw) in file.parameters.iter().enumerate() {
        parameters.push(build_parameter(
            &source,
            idx,
            raw,
            base,
            &material,
            scenario.as_ref(),
        )?);
    }
    check_unique_targets(&source, &file, &parameters)?;
    if file.cases.is_empty() {
        return Err(source.inconsistent("a fit needs at least one [[case]]"));
    }
    let settings = build_settings(&source, &file.settings, file.parameters.len())?;
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
        cases.push(build_case(
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
        cases,
        settings,
        warnings,
    })
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

/// A value set by two parameters (the same path twice, or a tie onto another parameter's
/// path) would be fitted twice, the last one winning: refused.
fn check_unique_targets(
    source: &Source,
    file: &JobFile,
    parameters: &[FreeParameter],
) -> Result<(), CaseError> {
    for (idx, parameter) in parameters.iter().enumerate() {
        for target in &parameter.targets {
            let earlier = parameters[..idx]
                .iter()
                .position(|other| other.targets.contains(target));
            let twice_here = parameter.targets.iter().filter(|t| *t == target).count() > 1;
            if let Some(first) = earlier {
                return Err(source.invalid(
                    &file.parameters[idx].path.span(),
                    &format!("parameter[{idx}].path"),
                    format!(
                        "`{}` sets a value that parameter[{first}] (`{}`) sets already; \
                         each value can be fitted once",
                        file.parameters[idx].path.get_ref(),
                        file.parameters[first].path.get_ref()
                    ),
                ));
            }
            if twice_here {
                return Err(source.invalid(
                    &file.parameters[idx].path.span(),
                    &format!("parameter[{idx}].tie"),
                    "names the same value twice".to_string(),
                ));
            }
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

/// Resolves a parameter path into its targets and unit.
pub fn parse_path(
    path: &str,
    material: &MaterialModel,
    heating_rate_k_s: f64,
    reference_temperature_k: Option<f64>,
) -> Result<(Target, &'static str), String> {
    let parts: Vec<&str> = path.split('.').collect();
    let component = |name: &str| {
        material.material.component_index(name).ok_or_else(|| {
            let names: Vec<&str> = material
                .material
                .components
                .iter()
                .map(|c| c.name.as_str())
                .collect();
            format!(
                "names no component `{name}` (components are {})",
                names.join(", ")
            )
        })
    };
    let reaction = |index: &str| -> Result<usize, String> {
        let n = material.material.reactions.len();
        match index.parse::<usize>() {
            Ok(i) if i < n => Ok(i),
            _ => Err(format!(
                "reaction index must be 0..{} (the order of [[reaction]] tables), got `{index}`",
                n.saturating_sub(1)
            )),
        }
    };
    let property_part = |law: &crate::physics::material::PropertyLaw,
                         rest: &[&str]|
     -> Result<PropertyPart, String> {
        use crate::physics::material::PropertyLaw;
        match (rest, law) {
            ([] | ["value"], PropertyLaw::PowerLaw { .. }) => Ok(PropertyPart::Value),
            (["exponent"], PropertyLaw::PowerLaw { .. }) => Ok(PropertyPart::Exponent),
            (["factor"], _) => Ok(PropertyPart::Factor),
            (_, PropertyLaw::Table(_)) => {
                Err("is a table: fit it with `.factor` (a factor on every value)".into())
            }
            _ => Err(format!(
                "ends in `{}`; a property takes `.value` (default), `.exponent` or `.factor`",
                rest.join(".")
            )),
        }
    };
    let unknown = || {
        format!(
            "`{path}` is not a parameter path; see docs/fit-jobs.md (e.g. component.<name>.conductivity_w_m_k, \
             reaction.<index>.activation_energy_kj_mol, heat_of_combustion_mj_kg, exposure.flame_heat_flux_kw_m2)"
        )
    };
    Ok(match parts.as_slice() {
        ["component", name, key, rest @ ..] => {
            let c = component(name)?;
            let comp = &material.material.components[c];
            match *key {
                "density_kg_m3" if rest.is_empty() => (Target::Density { component: c }, "kg/m³"),
                "conductivity_w_m_k" => {
                    let part = property_part(&comp.conductivity_w_m_k, rest)?;
                    (
                        Target::Conductivity { component: c, part },
                        part_unit(part, "W/(m·K)"),
                    )
                }
                "specific_heat_j_kg_k" => {
                    let part = property_part(&comp.specific_heat_j_kg_k, rest)?;
                    (
                        Target::SpecificHeat { component: c, part },
                        part_unit(part, "J/(kg·K)"),
                    )
                }
                "emissivity" if rest.is_empty() => (Target::Emissivity { component: c }, "–"),
                "absorption_per_m" if rest.is_empty() => {
                    (Target::Absorption { component: c }, "1/m")
                }
                _ => return Err(unknown()),
            }
        }
        ["reaction", index, key] => {
            let r = reaction(index)?;
            match *key {
                "pre_exponential_per_s" => (Target::PreExponential { reaction: r }, "1/s"),
                "activation_energy_kj_mol" => (Target::ActivationEnergy { reaction: r }, "kJ/mol"),
                "order" => (Target::Order { reaction: r }, "–"),
                "heat_of_reaction_kj_kg" => (Target::HeatOfReaction { reaction: r }, "kJ/kg"),
                "yield" => (Target::Yield { reaction: r }, "kg/kg"),
                "fuel_fraction" => (Target::FuelFraction { reaction: r }, "–"),
                "heat_of_combustion_mj_kg" => {
                    (Target::HeatOfCombustion { reactions: vec![r] }, "MJ/kg")
                }
                "peak_temperature_k" => (
                    Target::PeakTemperature {
                        reaction: r,
                        heating_rate_k_s,
                    },
                    "K",
                ),
                "log10_rate_per_s" => match reference_temperature_k {
                    Some(temperature_k) => (
                        Target::Log10RateAt {
                            reaction: r,
                            temperature_k,
                        },
                        "log10(1/s)",
                    ),
                    None => return Err("`log10_rate_per_s` needs `reference_temperature_k`".into()),
                },
                _ => return Err(unknown()),
            }
        }
        ["heat_of_combustion_mj_kg"] => {
            let reactions: Vec<usize> = material
                .file
                .reactions
                .iter()
                .enumerate()
                .filter(|(_, r)| r.heat_of_combustion_mj_kg.is_none())
                .map(|(i, _)| i)
                .collect();
            (Target::HeatOfCombustion { reactions }, "MJ/kg")
        }
        ["exposure", "flame_heat_flux_kw_m2"] => (Target::FlameHeatFlux, "kW/m²"),
        ["exposure", "convective_coefficient_w_m2_k"] => {
            (Target::ConvectiveCoefficient, "W/(m²·K)")
        }
        ["ignition", "critical_fuel_mass_flux_g_m2s"] => (Target::CriticalFuelMassFlux, "g/(m²·s)"),
        _ => return Err(unknown()),
    })
}

fn part_unit(part: PropertyPart, unit: &'static str) -> &'static str {
    match part {
        PropertyPart::Value => unit,
        PropertyPart::Exponent | PropertyPart::Factor => "–",
    }
}

fn build_parameter(
    source: &Source,
    idx: usize,
    raw: &ParameterFile,
    base: &Path,
    material: &MaterialModel,
    scenario: Option<&LoadedScenario>,
) -> Result<FreeParameter, CaseError> {
    let key = |field: &str| format!("parameter[{idx}].{field}");
    let heating_rate_k_s = match &raw.reference_heating_rate_k_min {
        Some(value) => source.positive(value, &key("reference_heating_rate_k_min"))? / 60.0,
        None => 10.0 / 60.0,
    };
    let reference_temperature_k = raw
        .reference_temperature_k
        .as_ref()
        .map(|v| source.positive(v, &key("reference_temperature_k")))
        .transpose()?;
    let path = raw.path.get_ref().trim();
    let (target, unit) = parse_path(path, material, heating_rate_k_s, reference_temperature_k)
        .map_err(|problem| source.invalid(&raw.path.span(), &key("path"), problem))?;
    let mut targets = vec![target];
    for tie in &raw.tie {
        let (tied, tied_unit) = parse_path(
            tie.get_ref().trim(),
            material,
            heating_rate_k_s,
            reference_temperature_k,
        )
        .map_err(|problem| source.invalid(&tie.span(), &key("tie"), problem))?;
        if tied_unit != unit {
            return Err(source.invalid(
                &tie.span(),
                &key("tie"),
                format!("has unit {tied_unit}, but the parameter has unit {unit}"),
            ));
        }
        targets.push(tied);
    }
    if scenario.is_none() {
        if let Some(idx_target) = targets.iter().position(|t| t.is_scenario_target()) {
            let (span, field) = match idx_target {
                0 => (raw.path.span(), key("path")),
                k => (raw.tie[k - 1].span(), key("tie")),
            };
            return Err(source.invalid(
                &span,
                &field,
                "sets a value of the cone scenario, but the job has no `scenario` (only \
                 milligram cases); free it in a job with cone cases",
            ));
        }
    }
    let lower = source.finite(&raw.min, &key("min"))?;
    let upper = source.finite(&raw.max, &key("max"))?;
    if upper <= lower {
        return Err(source.invalid(
            &raw.max.span(),
            &key("max"),
            format!("must be above min ({lower}), got {upper}"),
        ));
    }
    let scale = match raw.scale {
        Some(ScaleFile::Log) => Scale::Log,
        Some(ScaleFile::Linear) | None => Scale::Linear,
    };
    if scale == Scale::Log && lower <= 0.0 {
        return Err(source.invalid(
            &raw.min.span(),
            &key("min"),
            format!("must be > 0 on a log scale, got {lower}"),
        ));
    }
    let start = match (&raw.start, scenario) {
        (Some(value), _) => source.finite(value, &key("start"))?,
        (None, Some(scenario)) => targets[0].read(&material.material, &scenario.scenario),
        // Scenario targets were refused above, so the material has the value.
        (None, None) => targets[0]
            .read_material(&material.material)
            .unwrap_or(f64::NAN),
    };
    if !(lower..=upper).contains(&start) {
        let span = raw.start.as_ref().map_or(raw.path.span(), |s| s.span());
        return Err(source.invalid(
            &span,
            &key("start"),
            format!("{start} lies outside the bounds {lower}..{upper} (give `start` or widen the bounds)"),
        ));
    }
    let prior = match (raw.prior, &raw.prior_from) {
        (_, Some(summary_file)) => {
            if raw.prior.is_some() || raw.prior_mean.is_some() || raw.prior_sd.is_some() {
                return Err(source.invalid(
                    &summary_file.span(),
                    &key("prior_from"),
                    "takes the prior from an earlier run: leave out `prior`, `prior_mean` and \
                     `prior_sd`",
                ));
            }
            Some(prior_from::prior_from_summary(
                source,
                &key("prior_from"),
                summary_file,
                base,
                path,
            )?)
        }
        (None, None) => None,
        (Some(kind), None) => {
            let (Some(mean), Some(sd)) = (&raw.prior_mean, &raw.prior_sd) else {
                return Err(source.invalid(
                    &raw.path.span(),
                    &key("prior"),
                    "needs `prior_mean` and `prior_sd`",
                ));
            };
            let sd_value = source.positive(sd, &key("prior_sd"))?;
            Some(match kind {
                PriorKind::Normal => Prior::Normal {
                    mean: source.finite(mean, &key("prior_mean"))?,
                    standard_deviation: sd_value,
                },
                PriorKind::Lognormal => Prior::LogNormal {
                    median: source.positive(mean, &key("prior_mean"))?,
                    standard_deviation_log10: sd_value,
                },
            })
        }
    };
    Ok(FreeParameter {
        name: path.to_string(),
        unit: unit.to_string(),
        lower,
        upper,
        scale,
        start,
        prior,
        targets,
    })
}

fn build_settings(
    source: &Source,
    raw: &SettingsFile,
    n_parameters: usize,
) -> Result<Settings, CaseError> {
    let count =
        |value: &Option<Spanned<i64>>, field: &str, default: usize| -> Result<usize, CaseError> {
            match value {
                None => Ok(default),
                Some(v) if *v.get_ref() >= 0 => Ok(*v.get_ref() as usize),
                Some(v) => Err(source.invalid(
                    &v.span(),
                    &format!("settings.{field}"),
                    format!("must be ≥ 0, got {}", v.get_ref()),
                )),
            }
        };
    let time_budget = match &raw.time {
        None => None,
        Some(text) => Some(humantime::parse_duration(text.get_ref()).map_err(|err| {
            source.invalid(
                &text.span(),
                "settings.time",
                format!("is not a duration like \"8h\" or \"90min\": {err}"),
            )
        })?),
    };
    // Values that would end a run before it starts, or leave differential evolution without
    // the four distinct members one trial vector needs.
    let at_least = |value: &Option<Spanned<i64>>, field: &str, least: i64, why: &str| match value {
        Some(v) if *v.get_ref() < least => Err(source.invalid(
            &v.span(),
            &format!("settings.{field}"),
            format!("must be at least {least} ({why}), got {}", v.get_ref()),
        )),
        _ => Ok(()),
    };
    at_least(
        &raw.max_evaluations,
        "max_evaluations",
        1,
        "0 would stop before any simulation",
    )?;
    at_least(
        &raw.population,
        "population",
        4,
        "each trial mixes four distinct members",
    )?;
    at_least(
        &raw.stagnation_generations,
        "stagnation_generations",
        1,
        "0 would stop after the first generation",
    )?;
    at_least(
        &raw.local_starts,
        "local_starts",
        1,
        "set `local_refinement = false` for none",
    )?;
    Ok(Settings {
        max_evaluations: count(&raw.max_evaluations, "max_evaluations", 5000)?,
        time_budget,
        target_objective: match &raw.target_objective {
            Some(v) => source.non_negative(v, "settings.target_objective")?,
            None => 0.0,
        },
        stagnation_generations: count(&raw.stagnation_generations, "stagnation_generations", 20)?,
        population: count(&raw.population, "population", 0)?,
        seed: raw.seed.unwrap_or(1),
        local_refinement: raw.local_refinement.unwrap_or(true),
        local_max_evaluations: count(&raw.local_max_evaluations, "local_max_evaluations", 400)?,
        local_starts: count(&raw.local_starts, "local_starts", 1)?.max(1),
        output_interval_s: match &raw.output_interval_s {
            Some(v) => source.positive(v, "settings.output_interval_s")?,
            None => 1.0,
        },
        weigh_independent_points: !matches!(
            raw.curve_weighting,
            Some(CurveWeightingFile::PerSample)
        ),
        posterior: posterior_settings(source, raw, n_parameters)?,
    })
}

/// The posterior sample's settings: `posterior_steps` (0 or absent: none), `posterior_walkers`
/// (default 4 per parameter, at least 2·p + 2, even), `posterior_burn_in` (default a third of
/// the steps, below the steps).
fn posterior_settings(
    source: &Source,
    raw: &SettingsFile,
    n_parameters: usize,
) -> Result<Option<crate::fit::posterior::PosteriorSettings>, CaseError> {
    let bounded =
        |value: &Option<Spanned<i64>>, key: &str, max: i64| -> Result<Option<usize>, CaseError> {
            match value {
                None => Ok(None),
                Some(v) if (0..=max).contains(v.get_ref()) => Ok(Some(*v.get_ref() as usize)),
                Some(v) => Err(source.invalid(
                    &v.span(),
                    &format!("settings.{key}"),
                    format!(
                        "expected a whole number from 0 to {max}, found {}",
                        v.get_ref()
                    ),
                )),
            }
        };
    let steps = bounded(&raw.posterior_steps, "posterior_steps", 100_000)?.unwrap_or(0);
    if steps == 0 {
        return Ok(None);
    }
    let minimum = 2 * n_parameters + 2;
    let walkers = bounded(&raw.posterior_walkers, "posterior_walkers", 10_000)?
        .unwrap_or(4 * n_parameters)
        .max(minimum);
    let burn_in =
        bounded(&raw.posterior_burn_in, "posterior_burn_in", 100_000)?.unwrap_or(steps / 3);
    if burn_in >= steps {
        let span = raw
            .posterior_burn_in
            .as_ref()
            .or(raw.posterior_steps.as_ref())
            .map(|v| v.span())
            .unwrap_or_default();
        return Err(source.invalid(
            &span,
            "settings.posterior_burn_in",
            format!("the burn-in ({burn_in}) must be below posterior_steps ({steps})"),
        ));
    }
    Ok(Some(crate::fit::posterior::PosteriorSettings {
        walkers: walkers + walkers % 2,
        steps,
        burn_in,
        seed: raw.seed.unwrap_or(1),
    }))
}

fn build_case(
    source: &Source,
    idx: usize,
    raw: &CaseFile,
    base: &Path,
    scenario: &LoadedScenario,
    settings: &Settings,
    warnings: &mut Vec<crate::data::Notice>,
) -> Result<FitCase, CaseError> {
    let output_interval_s = settings.output_interval_s;
    let key = |field: &str| format!("case[{idx}].{field}");
    if raw.tests.is_empty() {
        return Err(source.inconsistent(format!("case `{}` names no tests", raw.name)));
    }
    let mut reduced = Vec::new();
    let mut test_files = Vec::new();
    for test in &raw.tests {
        let test_path = base.join(test.get_ref());
        let description = TestDescription::load(&test_path).map_err(|err| {
            source.invalid(
                &test.span(),
                &key("tests"),
                format!("cannot use {}: {}", test_path.display(), error_chain(&err)),
            )
        })?;
        let result = reduce(&description).map_err(|err| {
            source.invalid(
                &test.span(),
                &key("tests"),
                format!(
                    "cannot reduce {}: {}",
                    test_path.display(),
                    error_chain(&err)
                ),
            )
        })?;
        warnings.extend(result.notices.iter().filter(|n| n.is_warning).cloned());
        reduced.push(result);
        test_files.push(test_path);
        test_files.push(description.data_file.clone());
    }
    let first = &reduced[0];
    let mut case_scenario = scenario.clone();
    let irradiance_kw_m2 = match &raw.irradiance_kw_m2 {
        Some(v) => source.non_negative(v, &key("irradiance_kw_m2"))?,
        None => first.irradiance_kw_m2,
    };
    case_scenario.set_constant_irradiance_w_m2(irradiance_kw_m2 * 1e3);
    let thickness_mm = match &raw.thickness_mm {
        Some(v) => Some(source.positive(v, &key("thickness_mm"))?),
        None => None,
    };
    if let Some(thickness_mm) = thickness_mm {
        let layer = &mut case_scenario.scenario.layers[0];
        // Keep the grid rule: the same first cell and growth (docs/numerics.md, "Grid").
        let first_cell_m = layer
            .cell_thicknesses_m()
            .next()
            .unwrap_or(layer.thickness_m);
        layer.thickness_m = thickness_mm * 1e-3;
        layer.n_cells = crate::physics::scenario::cell_count_for(
            layer.thickness_m,
            first_cell_m * (1.0 + 1e-9),
            layer.cell_growth,
        );
    }
    case_scenario.scenario.output_interval_s = output_interval_s;
    let alignment = match raw.align {
        Some(AlignFile::Ignition) => Alignment::Ignition,
        _ => Alignment::ExposureStart,
    };
    let repeats = if reduced.len() > 1 {
        Some(
            combine(&reduced, alignment)
                .map_err(|err| source.inconsistent(format!("case `{}`: {err}", raw.name)))?,
        )
    } else {
        None
    };
    let exposed_area_m2 = first.exposed_area_m2;
    let specimen_area_m2 = first.specimen_area_m2;
    let mut signals = Vec::new();
    let mut latest_s: f64 = 0.0;
    for (signal_idx, raw_signal) in raw.signals.iter().enumerate() {
        let skey = |field: &str| format!("case[{idx}].signals[{signal_idx}].{field}");
        let (weight, (window_start, window_end)) =
            weight_and_window(source, Some(raw_signal), &skey)?;
        let depth_mm = match (&raw_signal.depth_mm, raw_signal.kind()) {
            (Some(v), SignalKind::InDepthTemperature) => {
                Some(source.non_negative(v, &skey("depth_mm"))?)
            }
            (Some(v), other) => {
                return Err(source.invalid(
                    &v.span(),
                    &skey("depth_mm"),
                    format!(
                        "belongs to `in_depth_temperature` signals only, not `{}`",
                        other.name()
                    ),
                ))
            }
            (None, SignalKind::InDepthTemperature) => {
                return Err(source.inconsistent(format!(
                    "case `{}`: signal `in_depth_temperature` needs `depth_mm`, the \
                     thermocouple's depth below the exposed surface",
                    raw.name
                )))
            }
            (None, _) => None,
        };
        let what = match depth_mm {
            Some(d) => format!("in-depth temperature at {d} mm (columns.in_depth_temperature)"),
            None => match raw_signal.kind() {
                SignalKind::SurfaceTemperature => "surface temperature column".to_string(),
                SignalKind::BackTemperature => "back temperature column".to_string(),
                kind => kind.name().to_string(),
            },
        };
        let missing = |what: &str| {
            source.invalid(
                &raw_signal.signal.span(),
                &skey("signal"),
                format!(
                    "`{}`: the test data of case `{}` have no {what}",
                    raw_signal.kind().name(),
                    raw.name
                ),
            )
        };
        let (time_s, value, spread): (Vec<f64>, Vec<f64>, Option<Vec<f64>>) = match raw_signal
            .kind()
        {
            kind if kind.is_scalar() => {
                let values: Vec<f64> = reduced
                    .iter()
                    .filter_map(|r| kind.of_report(&r.report))
                    .filter(|v| v.is_finite())
                    .collect();
                if values.is_empty() {
                    return Err(missing(&kind.name().replace('_', " ")));
                }
                let mean = values.iter().sum::<f64>() / values.len() as f64;
                let spread = (values.len() > 1).then(|| {
                    let var = values.iter().map(|t| (t - mean).powi(2)).sum::<f64>()
                        / (values.len() - 1) as f64;
                    vec![var.sqrt()]
                });
                (vec![mean], vec![mean], spread)
            }
            kind => match &repeats {
                Some(set) => {
                    let curve = repeat_curve(set, kind, depth_mm).ok_or_else(|| missing(&what))?;
                    (
                        set.time_s.clone(),
                        curve.mean.clone(),
                        Some(curve.standard_deviation.clone()),
                    )
                }
                None => {
                    let curve = test_curve(first, kind, depth_mm).ok_or_else(|| missing(&what))?;
                    (first.time_s.clone(), curve.clone(), None)
                }
            },
        };
        let mut kept_time = Vec::new();
        let mut kept_value = Vec::new();
        let mut kept_spread = Vec::new();
        for (i, (&t, &v)) in time_s.iter().zip(&value).enumerate() {
            let in_window =
                raw_signal.kind().is_scalar() || (t >= window_start.max(0.0) && t <= window_end);
            if in_window && v.is_finite() {
                kept_time.push(t);
                kept_value.push(v);
                kept_spread.push(spread.as_ref().map_or(f64::NAN, |s| s[i]));
            }
        }
        if kept_time.is_empty() {
            return Err(source.inconsistent(format!(
                "case `{}`: signal `{}` has no data in its window",
                raw.name,
                raw_signal.kind().name()
            )));
        }
        // The signal's scale: its peak, or for a temperature its rise over the window (an
        // absolute temperature's peak would make every residual look small).
        let is_temperature = matches!(
            raw_signal.kind(),
            SignalKind::SurfaceTemperature
                | SignalKind::BackTemperature
                | SignalKind::InDepthTemperature
        );
        let peak = if is_temperature {
            let (lo, hi) = kept_value
                .iter()
                .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), v| {
                    (lo.min(*v), hi.max(*v))
                });
            (hi - lo).max(1.0)
        } else {
            largest_magnitude(&kept_value)
        };
        let (sigma, sigma_source) = match (&raw_signal.sigma, spread.is_some()) {
            (Some(v), _) => (
                vec![source.positive(v, &skey("sigma"))?; kept_time.len()],
                "sigma",
            ),
            (None, true) => {
                // The repeat spread, floored at 2 % of the peak where repeats agree too well.
                (
                    kept_spread
                        .iter()
                        .map(|s| {
                            if s.is_finite() {
                                s.max(0.02 * peak)
                            } else {
                                0.1 * peak
                            }
                        })
                        .collect(),
                    "repeats",
                )
            }
            (None, false) => {
                let scale = if raw_signal.kind().is_scalar() {
                    0.1 * peak
                } else {
                    peak
                };
                (
                    vec![scale; kept_time.len()],
                    if is_temperature { "rise" } else { "peak" },
                )
            }
        };
        latest_s = latest_s.max(*kept_time.last().unwrap_or(&0.0));
        // An in-depth temperature is read off a probe the case's scenario gains for it.
        let probe = match depth_mm {
            Some(depth_mm) => {
                let probes = &mut case_scenario.scenario.probes;
                let index = match probes
                    .iter()
                    .position(|p| (p.depth_m - depth_mm * 1e-3).abs() <= 1e-5)
                {
                    Some(index) => index,
                    None => {
                        probes.push(crate::physics::scenario::Probe {
                            name: format!("fit_{depth_mm}mm"),
                            depth_m: depth_mm * 1e-3,
                        });
                        probes.len() - 1
                    }
                };
                Some(SignalProbe { depth_mm, index })
            }
            None => None,
        };
        let n_points = kept_time.len() as f64;
        let effective_points = match (&repeats, sigma_source) {
            (Some(set), "repeats") if !raw_signal.kind().is_scalar() => {
                let lag_one = repeat_deviation_autocorrelation(
                    &reduced,
                    set,
                    raw_signal.kind(),
                    depth_mm,
                    (&kept_time, &kept_value, &sigma),
                );
                n_points * effective_fraction(lag_one)
            }
            _ => n_points,
        };
        let weight = if settings.weigh_independent_points {
            weight * effective_points / n_points
        } else {
            weight
        };
        signals.push(SignalData {
            kind: raw_signal.kind(),
            weight,
            time_s: kept_time,
            value: kept_value,
            sigma,
            sigma_source,
            probe,
            effective_points,
        });
    }
    if signals.is_empty() {
        return Err(source.inconsistent(format!("case `{}` matches no signals", raw.name)));
    }
    case_scenario.scenario.duration_s = match &raw.duration_s {
        Some(v) => source.positive(v, &key("duration_s"))?,
        None => latest_s.max(1.0),
    };
    if let Err(size) = crate::case::budget::check_scenario_size(&case_scenario.scenario) {
        // Named by the key that set the duration (or, without one, the tests whose last time
        // set it), or the job's output interval.
        let (span, field) = match (size.culprit, &raw.duration_s, raw.tests.first()) {
            (crate::case::budget::Culprit::OutputInterval, _, Some(test)) => {
                (test.span(), "settings.output_interval_s".to_string())
            }
            (_, Some(duration), _) => (duration.span(), key("duration_s")),
            (_, None, Some(test)) => (test.span(), key("tests")),
            (_, None, None) => (0..0, key("duration_s")),
        };
        return Err(source.invalid(
            &span,
            &field,
            format!("case `{}`: {}", raw.name, size.problem),
        ));
    }
    Ok(FitCase {
        name: raw.name.clone(),
        setup: CaseSetup::Cone(Box::new(case_scenario)),
        exposed_area_m2,
        specimen_area_m2,
        signals,
        test_files,
    })
}

/// n_eff/n of an AR(1) series with lag-one autocorrelation ρ: (1 − ρ)/(1 + ρ) (the variance
/// inflation of a mean of correlated samples; Bartlett 1946, common practice), kept in
/// [1e-3, 1].
pub fn effective_fraction(lag_one: f64) -> f64 {
    if !lag_one.is_finite() || lag_one <= 0.0 {
        return 1.0;
    }
    let rho = lag_one.min(0.999);
    ((1.0 - rho) / (1.0 + rho)).clamp(1e-3, 1.0)
}

/// Lag-one autocorrelation of the repeats' deviations from their mean, each divided by the
/// signal's σ, pooled over the repeats, at the signal's kept times (`curve` = times, mean,
/// σ); NaN when there is nothing to pool.
fn repeat_deviation_autocorrelation(
    reduced: &[Reduced],
    set: &RepeatSet,
    kind: SignalKind,
    depth_mm: Option<f64>,
    curve: (&[f64], &[f64], &[f64]),
) -> f64 {
    let (times_s, mean, sigma) = curve;
    let (mut lagged, mut square) = (0.0, 0.0);
    for (test, shift_s) in reduced.iter().zip(&set.shifts_s) {
        let Some(values) = test_curve(test, kind, depth_mm) else {
            continue;
        };
        let deviation: Vec<f64> = times_s
            .iter()
            .zip(mean.iter().zip(sigma))
            .map(|(&t, (&m, &s))| {
                (crate::data::oxygen::interpolate(&test.time_s, values, t - shift_s) - m) / s
            })
            .collect();
        for pair in deviation.windows(2) {
            if pair[0].is_finite() && pair[1].is_finite() {
                lagged += pair[0] * pair[1];
                square += pair[0] * pair[0];
            }
        }
    }
    if square > 0.0 {
        lagged / square
    } else {
        f64::NAN
    }
}

/// The curve of a cone signal in one reduced test (`depth_mm` picks an in-depth
/// thermocouple); `None` when the test lacks it or the signal is a report quantity.
fn test_curve(test: &Reduced, kind: SignalKind, depth_mm: Option<f64>) -> Option<&Vec<f64>> {
    match kind {
        SignalKind::Mlr => test.mlr_g_m2s.as_ref(),
        SignalKind::Hrr => test.hrr_kw_m2.as_ref(),
        SignalKind::SurfaceTemperature => test.surface_temperature_k.as_ref(),
        SignalKind::BackTemperature => test.back_temperature_k.as_ref(),
        SignalKind::InDepthTemperature => test
            .in_depth_temperature_k
            .iter()
            .find(|c| is_same_depth(c.depth_mm, depth_mm))
            .map(|c| &c.temperature_k),
        SignalKind::Mass => test.mass_g.as_ref(),
        // Report quantities are not curves (`SignalKind::is_scalar`).
        SignalKind::IgnitionTime
        | SignalKind::PeakHrr
        | SignalKind::TimeToPeakHrr
        | SignalKind::TotalHeatRelease
        | SignalKind::AverageMlr => None,
        // Refused in cone cases before this (`milligram::check_cone_case`).
        SignalKind::MassFraction | SignalKind::DscHeatFlow | SignalKind::MccHrr => None,
    }
}

/// The mean curve of a cone signal across repeats (as [`test_curve`] for one test).
fn repeat_curve(set: &RepeatSet, kind: SignalKind, depth_mm: Option<f64>) -> Option<&MeanCurve> {
    match kind {
        SignalKind::Mlr => set.mlr_g_m2s.as_ref(),
        SignalKind::Hrr => set.hrr_kw_m2.as_ref(),
        SignalKind::SurfaceTemperature => set.surface_temperature_k.as_ref(),
        SignalKind::BackTemperature => set.back_temperature_k.as_ref(),
        SignalKind::InDepthTemperature => set
            .in_depth_temperature_k
            .iter()
            .find(|(d, _)| is_same_depth(*d, depth_mm))
            .map(|(_, c)| c),
        SignalKind::Mass => set.mass_g.as_ref(),
        SignalKind::IgnitionTime
        | SignalKind::PeakHrr
        | SignalKind::TimeToPeakHrr
        | SignalKind::TotalHeatRelease
        | SignalKind::AverageMlr => None,
        SignalKind::MassFraction | SignalKind::DscHeatFlow | SignalKind::MccHrr => None,
    }
}

fn is_same_depth(depth_mm: f64, wanted_mm: Option<f64>) -> bool {
    wanted_mm.is_some_and(|w| (depth_mm - w).abs() <= DEPTH_MATCH_MM)
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
