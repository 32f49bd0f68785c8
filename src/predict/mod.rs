//! Predictions from a calibrated model, with the fit's uncertainty carried through: parameter
//! sets drawn from the fit's covariance (`sampling`), simulated in parallel, reduced to the
//! median and band limits of each curve and the distributions of the test-report quantities;
//! and the scores of a prediction against held-out tests (`compare`).
//!
//! Reads files (the calibrated model, the run's summary and job) but writes none: the
//! commands and `export` do. Deterministic for a given seed: rayon's ordered collect keeps the
//! sample order, so thread timing never changes a band.

pub mod compare;
pub mod sampling;

use std::path::{Path, PathBuf};

use crate::case::job::{load_job, load_parameter_targets, FitJob};
use crate::case::material::MaterialModel;
use crate::case::targets::{
    for_each_target, parse_path, Target, DEFAULT_REFERENCE_HEATING_RATE_K_MIN,
};
use crate::case::{load_material, load_scenario, CaseError, LoadedScenario};
use crate::fit::evaluator::{Evaluator, Local, Task, TaskKind};
use crate::fit::parameters::{FreeParameter, Scale};
use crate::physics::material::Material;
use crate::physics::scenario::Scenario;
use crate::physics::{simulate, History};
use crate::run::RunSummary;
use sampling::{draw, quantile, FitSpaceNormal, SamplingError};

/// Default number of parameter sets drawn for a band.
pub const DEFAULT_SAMPLES: usize = 200;
/// Default seed of the sampler.
pub const DEFAULT_SEED: u64 = 1;

/// Errors of a prediction.
#[derive(Debug, thiserror::Error)]
pub enum PredictError {
    #[error(transparent)]
    Case(#[from] CaseError),
    #[error("cannot reduce {}: {source}", path.display())]
    Data {
        path: PathBuf,
        #[source]
        source: Box<crate::data::DataError>,
    },
    #[error(
        "{} has no [calibration] table, so there is no uncertainty to draw from; \
         predict without --band, or use a fit's best.toml",
        .0.display()
    )]
    NotCalibrated(PathBuf),
    #[error("{}: calibrated parameter `{parameter}` {problem}", path.display())]
    Parameter {
        path: PathBuf,
        parameter: String,
        problem: String,
    },
    #[error("drawing parameter sets: {0}")]
    Sampling(#[from] SamplingError),
    #[error("the calibrated model cannot be simulated in this scenario: {0}")]
    Simulation(String),
    #[error(
        "every one of the {n} drawn parameter sets failed to simulate; the first said: {first}"
    )]
    AllSamplesFailed { n: usize, first: String },
    #[error("{0}")]
    Invalid(String),
}

/// Where the covariance of a calibrated model came from.
#[derive(Debug, Clone, PartialEq)]
pub enum CovarianceSource {
    /// The fit's full covariance, from the run's summary.json.
    RunSummary(PathBuf),
    /// Only the standard errors of the calibration table: correlations unknown, taken as zero
    /// (usually a wider band than the fit supports).
    StandardErrorsOnly,
}

/// A calibrated model's uncertainty: its free parameters and their covariance in fit space.
#[derive(Debug, Clone)]
pub struct Uncertainty {
    pub parameters: Vec<FreeParameter>,
    /// Where each parameter's value goes (`case::targets`), as the fit set it.
    pub targets: Vec<Vec<Target>>,
    /// Best-fit values, file units (kJ/mol, MJ/kg, kW/m²…, as in the parameter paths).
    pub values: Vec<f64>,
    /// Covariance in fit space (value, or log10 of it on a log scale), row-major.
    pub covariance: Vec<Vec<f64>>,
    pub source: CovarianceSource,
    /// The run's posterior sample (fit-space coordinates), when it has one that matches:
    /// the band's parameter sets are then taken from it instead of drawn from the covariance.
    pub posterior: Option<Vec<Vec<f64>>>,
}

/// A material model ready to predict with, and what is known of its uncertainty.
#[derive(Debug, Clone)]
pub struct CalibratedModel {
    pub path: PathBuf,
    pub model: MaterialModel,
    /// The fit job named by the calibration table, when it could be read from here.
    pub job: Option<FitJob>,
    /// `None` for a plain material model (no calibration table).
    pub uncertainty: Option<Uncertainty>,
    /// How the parameters and covariance were found, and anything to know about them.
    pub notes: Vec<String>,
}

impl CalibratedModel {
    /// Reads a material model. For a calibrated one it also reads the fit job the calibration
    /// names (for exact parameter targets and bounds) and the run's summary.json beside the
    /// file (for the covariance); each is optional, and what was missing is said in `notes`.
    pub fn load(path: &Path) -> Result<CalibratedModel, PredictError> {
        let model = load_material(path)?;
        let mut notes = Vec::new();
        let Some(calibration) = model.file.calibration.clone() else {
            return Ok(CalibratedModel {
                path: path.to_path_buf(),
                model,
                job: None,
                uncertainty: None,
                notes: vec!["not a calibrated model: no uncertainty to draw from".into()],
            });
        };
        let job = find_job(path, &calibration.job);
        // The targets as the run started: the copy of its job in the run directory beside the
        // model (read for its parameters alone, against the calibrated material, which has
        // the job's components and reactions).
        let run_dir = crate::run::RunDirectory::new(path.parent().unwrap_or(Path::new(".")));
        let run_targets = load_parameter_targets(&run_dir.job(), &model)
            .ok()
            .filter(|targets| targets.len() == calibration.parameters.len());
        match (&run_targets, &job) {
            (Some(_), _) => notes.push(format!(
                "parameters as in the run's copy of its fit job {}",
                run_dir.job().display()
            )),
            (None, Some(job)) => notes.push(format!(
                "parameters as in the fit job {}",
                job.path.display()
            )),
            (None, None) => notes.push(format!(
                "the fit job `{}` could not be read from here: parameters rebuilt from their \
                 paths (no bounds, no tied paths, peak temperatures at the default {} K/min)",
                calibration.job, DEFAULT_REFERENCE_HEATING_RATE_K_MIN
            )),
        }
        let mut parameters = Vec::new();
        let mut targets = Vec::new();
        let mut values = Vec::new();
        for (idx, entry) in calibration.parameters.iter().enumerate() {
            let from_job = job
                .as_ref()
                .filter(|j| j.parameters.get(idx).is_some_and(|p| p.name == entry.path))
                .map(|j| (j.parameters[idx].clone(), j.targets[idx].clone()));
            let (parameter, parameter_targets) = match from_job {
                Some(found) => found,
                None => rebuilt_parameter(path, &model, entry)?,
            };
            parameters.push(parameter);
            targets.push(match &run_targets {
                Some(run_targets) => run_targets[idx].clone(),
                None => parameter_targets,
            });
            values.push(entry.value);
        }
        let p = parameters.len();
        let (summary_path, summary): (PathBuf, Option<RunSummary>) =
            crate::run::summary::summary_beside(path);
        let covariance_from_summary = summary.as_ref().and_then(|s| {
            let names_match = s.parameters.len() == p
                && s.parameters
                    .iter()
                    .zip(&parameters)
                    .all(|(a, b)| a.name == b.name);
            let values_match = s
                .parameters
                .iter()
                .zip(&values)
                .all(|(a, v)| (a.value - v).abs() <= 1e-9 * v.abs().max(1e-300));
            (names_match && values_match && s.covariance.len() == p).then(|| s.covariance.clone())
        });
        let (covariance, source) = match covariance_from_summary {
            Some(c) => (c, CovarianceSource::RunSummary(summary_path)),
            None => {
                notes.push(
                    "no matching summary.json beside the model: correlations taken as zero, \
                     standard errors from the calibration table"
                        .into(),
                );
                let mut c = vec![vec![0.0; p]; p];
                for (i, entry) in calibration.parameters.iter().enumerate() {
                    c[i][i] = if entry.standard_error >= 0.0 {
                        entry.standard_error.powi(2)
                    } else {
                        f64::INFINITY
                    };
                }
                (c, CovarianceSource::StandardErrorsOnly)
            }
        };
        // An undetermined parameter (infinite or NaN variance) cannot be drawn: hold it.
        let mut covariance = covariance;
        for i in 0..p {
            if !covariance[i][i].is_finite() {
                notes.push(format!(
                    "{} is undetermined by the data: held at its fitted value in the band",
                    parameters[i].name
                ));
                covariance[i].iter_mut().for_each(|v| *v = 0.0);
                for row in covariance.iter_mut() {
                    row[i] = 0.0;
                }
            }
        }
        let posterior = summary
            .as_ref()
            .filter(|_| matches!(source, CovarianceSource::RunSummary(_)))
            .and_then(|s| s.posterior.as_ref())
            .and_then(|info| {
                let file = path.parent().unwrap_or(Path::new(".")).join(&info.file);
                match crate::run::read_posterior(&file) {
                    Ok(sample)
                        if sample.names.len() == p
                            && sample
                                .names
                                .iter()
                                .zip(&parameters)
                                .all(|(a, b)| *a == b.name)
                            && sample.samples.iter().all(|s| s.len() == p) =>
                    {
                        notes.push(format!(
                            "band parameter sets from the posterior sample {} ({} points)",
                            file.display(),
                            sample.samples.len()
                        ));
                        Some(
                            sample
                                .samples
                                .iter()
                                .map(|s| {
                                    parameters
                                        .iter()
                                        .zip(s)
                                        .map(|(q, &v)| q.to_fit_space(v))
                                        .collect()
                                })
                                .collect(),
                        )
                    }
                    Ok(_) => {
                        notes.push(format!(
                            "{} does not match the model's parameters: band drawn from the \
                             covariance",
                            file.display()
                        ));
                        None
                    }
                    Err(e) => {
                        notes.push(format!("{e}: band drawn from the covariance"));
                        None
                    }
                }
            });
        Ok(CalibratedModel {
            path: path.to_path_buf(),
            model,
            job,
            uncertainty: Some(Uncertainty {
                parameters,
                targets,
                values,
                covariance,
                source,
                posterior,
            }),
            notes,
        })
    }
}

/// The fit job a calibration names: as written (relative to the working directory, as the fit
/// was started), or relative to the model's folder.
fn find_job(model_path: &Path, job: &str) -> Option<FitJob> {
    let given = PathBuf::from(job);
    let beside = model_path.parent().unwrap_or(Path::new(".")).join(job);
    [given, beside]
        .into_iter()
        .filter(|p| p.is_file())
        .find_map(|p| load_job(&p).ok())
}

/// A parameter rebuilt from its calibration entry alone (no bounds, no tied paths; a peak
/// temperature at the job format's default reference heating rate).
fn rebuilt_parameter(
    path: &Path,
    model: &MaterialModel,
    entry: &crate::case::material::CalibratedParameter,
) -> Result<(FreeParameter, Vec<Target>), PredictError> {
    let (target, unit) = parse_path(
        &entry.path,
        model,
        DEFAULT_REFERENCE_HEATING_RATE_K_MIN / 60.0,
        None,
    )
    .map_err(|problem| PredictError::Parameter {
        path: path.to_path_buf(),
        parameter: entry.path.clone(),
        problem,
    })?;
    let scale = if entry.scale == "log" {
        Scale::Log
    } else {
        Scale::Linear
    };
    let parameter = FreeParameter {
        name: entry.path.clone(),
        unit: unit.to_string(),
        lower: if scale == Scale::Log {
            0.0
        } else {
            f64::NEG_INFINITY
        },
        upper: f64::INFINITY,
        scale,
        start: entry.value,
        prior: None,
    };
    Ok((parameter, vec![target]))
}

/// Conditions that replace the scenario's own.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct Conditions {
    /// Constant irradiance, kW/m².
    pub irradiance_kw_m2: Option<f64>,
    /// Thickness of the exposed (specimen) layer, mm; its cell size is kept.
    pub thickness_mm: Option<f64>,
    /// Simulated duration, s.
    pub duration_s: Option<f64>,
}

/// Puts the calibrated material (and the exposure values it carries) into a loaded scenario
/// and applies the conditions.
pub fn prepare_scenario(
    calibrated: &CalibratedModel,
    mut loaded: LoadedScenario,
    conditions: &Conditions,
) -> Result<Scenario, PredictError> {
    loaded.use_specimen_material(&calibrated.model)?;
    if let Some(flux) = conditions.irradiance_kw_m2 {
        if !(flux.is_finite() && (0.0..=200.0).contains(&flux)) {
            return Err(PredictError::Invalid(format!(
                "the irradiance must be within 0..200 kW/m², got {flux}"
            )));
        }
        loaded.set_constant_irradiance_w_m2(flux * 1e3);
    }
    if let Some(thickness_mm) = conditions.thickness_mm {
        if !(thickness_mm.is_finite() && thickness_mm > 0.0 && thickness_mm <= 1000.0) {
            return Err(PredictError::Invalid(format!(
                "the thickness must be > 0 and at most 1000 mm, got {thickness_mm}"
            )));
        }
        loaded.set_exposed_layer_thickness_m(thickness_mm * 1e-3);
    }
    if let Some(duration_s) = conditions.duration_s {
        if !(duration_s.is_finite() && duration_s > 0.0 && duration_s <= 1e6) {
            return Err(PredictError::Invalid(format!(
                "the duration must be > 0 and at most 1e6 s, got {duration_s}"
            )));
        }
        loaded.scenario.duration_s = duration_s;
    }
    // The same size estimate as every run (rows, memory, steps), after the overrides.
    crate::case::budget::check_scenario_size(&loaded.scenario)
        .map_err(|size| PredictError::Invalid(format!("the prediction run {}", size.problem)))?;
    loaded
        .scenario
        .check()
        .map_err(|e| PredictError::Simulation(e.to_string()))?;
    Ok(loaded.scenario)
}

/// The signals of a calibration run's `cases/` that give the four report quantities, in the
/// order of `QUANTITY_NAMES`.
const QUANTITY_SIGNALS: [&str; 4] = [
    "ignition_time",
    "peak_hrr",
    "time_to_peak_hrr",
    "total_heat_release",
];

/// Relative test scatter and relative model error of each report quantity at the calibration
/// conditions, from the run directory beside `model_path` (`cases/<case>--<signal>.csv`:
/// measured, sigma, model). `None` when no such file is there.
fn calibration_errors(model_path: &Path) -> Option<[(f64, f64); 4]> {
    let dir = crate::run::RunDirectory::new(model_path.parent()?);
    let files = crate::run::curves::case_curve_files(&dir);
    let mut found = false;
    let mut out = [(f64::NAN, f64::NAN); 4];
    for (k, signal) in QUANTITY_SIGNALS.iter().enumerate() {
        let (mut scatter, mut error, mut n) = (0.0, 0.0, 0.0);
        for (_, path) in files.iter().filter(|(stem, _)| {
            crate::run::curves::split_stem(stem).is_some_and(|(_, s)| s == *signal)
        }) {
            let Ok(text) = crate::input::read_text(path, crate::input::InputKind::RunFile) else {
                continue;
            };
            let Ok(curve) = crate::run::curves::parse_case_curve_strict(&text) else {
                continue;
            };
            for i in 0..curve.time_s.len() {
                let row = [
                    curve.time_s[i],
                    curve.measured[i],
                    curve.sigma[i],
                    curve.model[i],
                    curve.residual[i],
                ];
                let (measured, sigma, model) = (row[1], row[2], row[3]);
                if measured.abs() > 0.0 && row.iter().all(|x| x.is_finite()) {
                    scatter += (sigma / measured).powi(2);
                    error += ((model - measured) / measured).powi(2);
                    n += 1.0;
                }
            }
        }
        if n > 0.0 {
            found = true;
            out[k] = ((scatter / n).sqrt(), (error / n).sqrt());
        }
    }
    found.then_some(out)
}

/// Draws of the test scatter and model error per parameter set in the prediction band.
const ERROR_DRAWS_PER_SET: usize = 64;

/// Adds the prediction band to a quantity's distribution: every parameter set's value `v`
/// times exp(e·ε), ε standard normal, e = √(scatter² + error²) the relative test scatter and
/// model error (`errors`), `ERROR_DRAWS_PER_SET` times per set (seeded, so the band is the
/// same every time); the band is the quantiles `tail` and 1 − `tail` of that mixture. It keeps
/// the skew of the parameter sets' values (a posterior sample seldom gives a symmetric
/// ignition time) and keeps the quantity's sign. Without errors the band is left unset.
fn prediction_band(
    mut q: QuantityDistribution,
    present: &[f64],
    errors: Option<(f64, f64)>,
    tail: f64,
    seed: u64,
) -> QuantityDistribution {
    use rand::SeedableRng;
    use rand_distr::Distribution;
    let Some((scatter, error)) = errors else {
        return q;
    };
    if !(scatter.is_finite() && error.is_finite()) || present.is_empty() {
        return q;
    }
    let e = (scatter * scatter + error * error).sqrt();
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
    let mut mixture: Vec<f64> = Vec::with_capacity(present.len() * ERROR_DRAWS_PER_SET);
    for &v in present {
        for _ in 0..ERROR_DRAWS_PER_SET {
            let epsilon: f64 = rand_distr::StandardNormal.sample(&mut rng);
            mixture.push(v * (e * epsilon).exp());
        }
    }
    mixture.sort_by(f64::total_cmp);
    q.prediction_lower = quantile(&mixture, tail);
    q.prediction_upper = quantile(&mixture, 1.0 - tail);
    q.relative_test_scatter = scatter;
    q.relative_model_error = error;
    q
}

/// What a prediction does not know, in sentences: conditions outside the calibrated range
/// (irradiance, thickness of the exposed layer, and by how much), a run that ended before
/// flame-out or burnout (so time to peak and total heat release stop at its end), no ignition
/// (within how long), and a calibration that did not converge.
pub fn condition_notes(
    calibrated: &CalibratedModel,
    scenario: &Scenario,
    best: &History,
) -> Vec<String> {
    let mut notes = Vec::new();
    if let Some(calibration) = &calibrated.model.file.calibration {
        if calibration.converged == Some(false) {
            notes.push(format!(
                "the calibration did not converge ({}): its values and intervals are provisional",
                calibration
                    .not_converged_reason
                    .as_deref()
                    .unwrap_or("no reason given")
            ));
        }
    }
    if let Some(job) = &calibrated.job {
        let cone: Vec<&Scenario> = job
            .cases
            .iter()
            .filter_map(|c| c.cone_scenario())
            .map(|l| &l.scenario)
            .collect();
        let range = |pick: &dyn Fn(&Scenario) -> Option<f64>| {
            cone.iter()
                .filter_map(|s| pick(s))
                .fold(None, |r: Option<(f64, f64)>, v| {
                    Some(r.map_or((v, v), |(a, b)| (a.min(v), b.max(v))))
                })
        };
        let irradiance = |s: &Scenario| match &s.exposure.irradiance_w_m2 {
            crate::physics::scenario::Schedule::Constant(w) => Some(w / 1e3),
            crate::physics::scenario::Schedule::Table(_) => None,
        };
        let thickness = |s: &Scenario| s.layers.first().map(|l| l.thickness_m * 1e3);
        for (what, unit, pick) in [
            (
                "irradiance",
                "kW/m²",
                &irradiance as &dyn Fn(&Scenario) -> Option<f64>,
            ),
            ("thickness of the exposed layer", "mm", &thickness),
        ] {
            if let (Some((low, high)), Some(value)) = (range(pick), pick(scenario)) {
                let outside = if value < low - 1e-9 {
                    Some(low - value)
                } else if value > high + 1e-9 {
                    Some(value - high)
                } else {
                    None
                };
                if let Some(by) = outside {
                    let edge = if value < low { low } else { high };
                    notes.push(format!(
                        "the {what} {value:.3} {unit} lies outside the calibrated range \
                         {low:.3}–{high:.3} {unit}, by {by:.3} {unit} ({:.0} % of the nearest \
                         calibrated value): an extrapolation the calibration did not test; the \
                         bands may not hold the model's error there (fitted at one irradiance of \
                         the open PMMA tests, 14 of 16 held-out quantities fell inside their \
                         95 % bands; the misses are ignition times, one 45 % longer than \
                         measured: docs/calibration-pmma.md §4)",
                        100.0 * by / edge.abs().max(1e-12)
                    ));
                }
            }
        }
    }
    let end_s = best.samples.last().map_or(0.0, |s| s.time_s);
    match best.summary.ignition_time_s {
        None => notes.push(format!(
            "no ignition within the simulated {end_s:.0} s (a longer --duration may ignite)"
        )),
        Some(_) => {
            let left = if best.summary.initial_mass_kg_m2 > 0.0 {
                1.0 - best.summary.mass_lost_kg_m2 / best.summary.initial_mass_kg_m2
            } else {
                0.0
            };
            if best.summary.flameout_time_s.is_none() && left > 0.01 {
                notes.push(format!(
                    "the run ended at {end_s:.0} s while still flaming, with {:.0} % of the \
                         specimen mass left: peak HRR, time to peak and total heat release are those \
                         of the first {end_s:.0} s only (give a longer --duration)",
                    100.0 * left
                ));
            }
        }
    }
    notes
}

/// Reads a scenario file and prepares it (see [`prepare_scenario`]).
pub fn load_prepared_scenario(
    calibrated: &CalibratedModel,
    scenario_path: &Path,
    conditions: &Conditions,
) -> Result<Scenario, PredictError> {
    prepare_scenario(calibrated, load_scenario(scenario_path)?, conditions)
}

/// How to predict.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PredictionSettings {
    /// Central probability of the band, percent (e.g. 95); `None` for the best fit alone.
    pub band_percent: Option<f64>,
    /// Parameter sets drawn for the band.
    pub n_samples: usize,
    pub seed: u64,
}

impl Default for PredictionSettings {
    fn default() -> Self {
        PredictionSettings {
            band_percent: None,
            n_samples: DEFAULT_SAMPLES,
            seed: DEFAULT_SEED,
        }
    }
}

/// One output curve of a prediction, in the trade's unit.
#[derive(Debug, Clone, PartialEq)]
pub struct SignalBand {
    /// Column name with its unit, e.g. `hrr_kw_m2`.
    pub name: String,
    /// Axis label, e.g. `HRR (kW/m²)`.
    pub label: String,
    /// The best-fit model.
    pub best: Vec<f64>,
    /// Median over the drawn sets (empty without a band).
    pub median: Vec<f64>,
    pub lower: Vec<f64>,
    pub upper: Vec<f64>,
}

/// The distribution of one test-report quantity over the drawn sets.
#[derive(Debug, Clone, PartialEq)]
pub struct QuantityDistribution {
    pub name: String,
    pub unit: String,
    /// The best-fit model's value (`None`: it never ignited).
    pub best: Option<f64>,
    /// One value per successful draw (`None` where it never ignited).
    pub values: Vec<Option<f64>>,
    pub median: f64,
    pub lower: f64,
    pub upper: f64,
    pub mean: f64,
    pub standard_deviation: f64,
    /// The prediction band (test scatter and model error): the parameter band's spread
    /// combined with the repeats' relative scatter and the model's relative error at the
    /// calibration conditions, best ± z·√(sd² + (best·scatter)² + (best·error)²). NaN when the
    /// calibration run's report-quantity signals are not beside the model.
    pub prediction_lower: f64,
    pub prediction_upper: f64,
    /// Relative test-to-test scatter (repeat sd / mean) at the calibration conditions.
    pub relative_test_scatter: f64,
    /// Relative model error (RMS of (model − data)/data over the calibration cases).
    pub relative_model_error: f64,
}

impl QuantityDistribution {
    /// Draws for which the quantity does not exist (no ignition).
    pub fn n_missing(&self) -> usize {
        self.values.iter().filter(|v| v.is_none()).count()
    }
}

/// A prediction: the best fit's curves on a uniform time base, with bands when asked.
#[derive(Debug, Clone)]
pub struct Prediction {
    /// Time from exposure start, s.
    pub time_s: Vec<f64>,
    pub signals: Vec<SignalBand>,
    /// Ignition time, peak HRR, time to peak HRR, total heat release.
    pub quantities: Vec<QuantityDistribution>,
    pub best: History,
    /// Band probability, percent, when a band was computed.
    pub band_percent: Option<f64>,
    pub n_samples: usize,
    /// Draws whose simulation failed (excluded from the band).
    pub n_failed: usize,
    /// Draws rejected for lying outside the bounds.
    pub n_rejected: usize,
    pub notes: Vec<String>,
}

/// Applies one drawn parameter set (file units) to a copy of the calibrated material and
/// scenario. The calibrated model already holds the best-fit values, so a factor on a
/// property is applied as the ratio of the draw to the best value.
fn apply_draw(
    uncertainty: &Uncertainty,
    drawn: &[f64],
    material: &mut Material,
    scenario: &mut Scenario,
) {
    // In the table's order; a `.factor` target is relative to the law it was fitted on, so it
    // applies as draw/best to the calibrated material, which already carries the best factor.
    for_each_target(&uncertainty.targets, |idx, target| {
        let (Some(&value), Some(&best)) = (drawn.get(idx), uncertainty.values.get(idx)) else {
            return;
        };
        let applied = if target.is_factor() {
            value / best
        } else {
            value
        };
        target.apply(applied, material, scenario);
    });
}

/// Simulates the scenario with one drawn parameter set.
fn simulate_draw(
    uncertainty: &Uncertainty,
    scenario: &Scenario,
    drawn: &[f64],
) -> Result<History, String> {
    let mut scenario = scenario.clone();
    let Some(specimen) = scenario.layers.iter().find(|l| l.is_specimen) else {
        return Err("the scenario has no specimen layer".into());
    };
    let mut material = specimen.material.clone();
    apply_draw(uncertainty, drawn, &mut material, &mut scenario);
    let material = Material::new(material.components, material.reactions)
        .map_err(|e| format!("drawn parameters make an invalid material: {e}"))?;
    for layer in scenario.layers.iter_mut().filter(|l| l.is_specimen) {
        layer.material = material.clone();
    }
    simulate(&scenario).map_err(|e| e.to_string())
}

/// Curves of a history on the time base, in the trade's units: name, axis label, values.
fn curves_of(history: &History, time_s: &[f64]) -> Vec<(String, String, Vec<f64>)> {
    let at = |f: &dyn Fn(&crate::physics::Sample) -> f64| -> Vec<f64> {
        time_s.iter().map(|&t| history.value_at(t, f)).collect()
    };
    let mut curves = vec![
        (
            "hrr_kw_m2".to_string(),
            "HRR (kW/m²)".to_string(),
            at(&|s| s.hrr_w_m2 * 1e-3),
        ),
        (
            "mlr_g_m2s".to_string(),
            "MLR (g/(m²·s))".to_string(),
            at(&|s| s.mlr_kg_m2_s * 1e3),
        ),
        (
            "mass_kg_m2".to_string(),
            "specimen mass (kg/m²)".to_string(),
            at(&|s| s.mass_kg_m2),
        ),
        (
            "surface_temperature_k".to_string(),
            "surface temperature (K)".to_string(),
            at(&|s| s.surface_temperature_k),
        ),
        (
            "back_temperature_k".to_string(),
            "specimen back temperature (K)".to_string(),
            at(&|s| s.back_temperature_k),
        ),
    ];
    for (idx, name) in history.probe_names.iter().enumerate() {
        curves.push((
            format!("{name}_temperature_k"),
            format!("{name} temperature (K)"),
            at(&move |s| s.probe_temperatures_k.get(idx).copied().unwrap_or(f64::NAN)),
        ));
    }
    curves
}

/// Test-report quantities of a history: ignition time s, peak HRR kW/m², time to peak HRR s,
/// total heat release MJ/m² (the last three need ignition to mean anything, but the model's
/// peak and THR exist regardless; only the ignition time can be missing).
pub fn report_quantities(history: &History) -> [Option<f64>; 4] {
    let s = &history.summary;
    [
        s.ignition_time_s,
        Some(s.peak_hrr_w_m2 * 1e-3),
        Some(s.time_of_peak_hrr_s),
        Some(s.total_heat_release_j_m2 * 1e-6),
    ]
}

const QUANTITY_NAMES: [(&str, &str); 4] = [
    ("ignition time", "s"),
    ("peak HRR", "kW/m²"),
    ("time to peak HRR", "s"),
    ("total heat release", "MJ/m²"),
];

/// One drawn parameter set (fit-space coordinates) of a band, simulated in the prepared
/// scenario: the unit of work that an evaluator hands out.
pub struct BandDraw<'a> {
    uncertainty: &'a Uncertainty,
    scenario: &'a Scenario,
}

impl<'a> BandDraw<'a> {
    /// The draws of `calibrated` in `scenario`; `None` when the model has no uncertainty.
    pub fn new(calibrated: &'a CalibratedModel, scenario: &'a Scenario) -> Option<Self> {
        calibrated.uncertainty.as_ref().map(|uncertainty| BandDraw {
            uncertainty,
            scenario,
        })
    }
}

impl Task for BandDraw<'_> {
    type Output = Result<History, String>;
    const KIND: TaskKind = TaskKind::BandDraw;
    fn run(&self, point: &[f64]) -> Result<History, String> {
        let drawn: Vec<f64> = self
            .uncertainty
            .parameters
            .iter()
            .zip(point)
            .map(|(p, &x)| p.from_fit_space(x))
            .collect();
        simulate_draw(self.uncertainty, self.scenario, &drawn)
    }
}

/// Predicts the prepared scenario (see [`prepare_scenario`]) with the calibrated model; with
/// a band, draws `n_samples` parameter sets from the fit's uncertainty and simulates them in
/// parallel.
pub fn predict(
    calibrated: &CalibratedModel,
    scenario: &Scenario,
    settings: &PredictionSettings,
) -> Result<Prediction, PredictError> {
    predict_on(calibrated, scenario, settings, &Local)
}

/// `predict` with the band's drawn sets simulated by `evaluator`.
pub fn predict_on<E: Evaluator>(
    calibrated: &CalibratedModel,
    scenario: &Scenario,
    settings: &PredictionSettings,
    evaluator: &E,
) -> Result<Prediction, PredictError> {
    let best = simulate(scenario).map_err(|e| PredictError::Simulation(e.to_string()))?;
    let interval = scenario.output_interval_s.max(1e-3);
    let n_times = (scenario.duration_s / interval).floor() as usize + 1;
    let time_s: Vec<f64> = (0..n_times).map(|i| i as f64 * interval).collect();
    let best_curves = curves_of(&best, &time_s);
    let best_quantities = report_quantities(&best);
    let mut notes = calibrated.notes.clone();
    notes.extend(condition_notes(calibrated, scenario, &best));
    let empty_distribution = |k: usize| QuantityDistribution {
        name: QUANTITY_NAMES[k].0.to_string(),
        unit: QUANTITY_NAMES[k].1.to_string(),
        best: best_quantities[k],
        values: Vec::new(),
        median: f64::NAN,
        lower: f64::NAN,
        upper: f64::NAN,
        mean: f64::NAN,
        standard_deviation: f64::NAN,
        prediction_lower: f64::NAN,
        prediction_upper: f64::NAN,
        relative_test_scatter: f64::NAN,
        relative_model_error: f64::NAN,
    };
    let Some(band_percent) = settings.band_percent else {
        return Ok(Prediction {
            time_s,
            signals: best_curves
                .into_iter()
                .map(|(name, label, best)| SignalBand {
                    name,
                    label,
                    best,
                    median: Vec::new(),
                    lower: Vec::new(),
                    upper: Vec::new(),
                })
                .collect(),
            quantities: (0..4).map(empty_distribution).collect(),
            best,
            band_percent: None,
            n_samples: 0,
            n_failed: 0,
            n_rejected: 0,
            notes,
        });
    };
    if !(band_percent > 0.0 && band_percent < 100.0) {
        return Err(PredictError::Invalid(format!(
            "the band must be a percentage between 0 and 100, got {band_percent}"
        )));
    }
    if settings.n_samples < 2 {
        return Err(PredictError::Invalid(format!(
            "a band needs at least 2 samples, got {}",
            settings.n_samples
        )));
    }
    let Some(uncertainty) = &calibrated.uncertainty else {
        return Err(PredictError::NotCalibrated(calibrated.path.clone()));
    };
    let normal = FitSpaceNormal {
        mean: uncertainty
            .parameters
            .iter()
            .zip(&uncertainty.values)
            .map(|(p, &v)| p.to_fit_space(v))
            .collect(),
        covariance: uncertainty.covariance.clone(),
        lower: uncertainty
            .parameters
            .iter()
            .map(|p| p.to_fit_space(p.lower))
            .map(|v| if v.is_nan() { f64::NEG_INFINITY } else { v })
            .collect(),
        upper: uncertainty
            .parameters
            .iter()
            .map(|p| p.to_fit_space(p.upper))
            .collect(),
    };
    let draws = match &uncertainty.posterior {
        Some(sample) if !sample.is_empty() => {
            sampling::from_sample(sample, settings.n_samples, settings.seed)
        }
        _ => draw(&normal, settings.n_samples, settings.seed)?,
    };
    let n_rejected = draws.n_drawn - draws.points.len();
    let task = BandDraw {
        uncertainty,
        scenario,
    };
    let results: Vec<Result<History, String>> = evaluator.evaluate(&task, &draws.points);
    let mut histories = Vec::new();
    let mut first_failure = None;
    for result in results {
        match result {
            Ok(history) => histories.push(history),
            Err(message) => {
                first_failure.get_or_insert(message);
            }
        }
    }
    let n_failed = settings.n_samples - histories.len();
    if histories.is_empty() {
        return Err(PredictError::AllSamplesFailed {
            n: settings.n_samples,
            first: first_failure.unwrap_or_default(),
        });
    }
    if let Some(first) = first_failure {
        notes.push(format!(
            "{n_failed} of {} drawn sets failed to simulate and are left out (first: {first})",
            settings.n_samples
        ));
    }
    let tail = 0.5 * (1.0 - band_percent / 100.0);
    let sample_curves: Vec<Vec<(String, String, Vec<f64>)>> =
        histories.iter().map(|h| curves_of(h, &time_s)).collect();
    let signals = best_curves
        .into_iter()
        .enumerate()
        .map(|(k, (name, label, best))| {
            let mut median = Vec::with_capacity(time_s.len());
            let mut lower = Vec::with_capacity(time_s.len());
            let mut upper = Vec::with_capacity(time_s.len());
            let mut column = Vec::with_capacity(sample_curves.len());
            for i in 0..time_s.len() {
                column.clear();
                column.extend(
                    sample_curves
                        .iter()
                        .map(|c| c[k].2[i])
                        .filter(|v| v.is_finite()),
                );
                column.sort_by(f64::total_cmp);
                median.push(quantile(&column, 0.5));
                lower.push(quantile(&column, tail));
                upper.push(quantile(&column, 1.0 - tail));
            }
            SignalBand {
                name,
                label,
                best,
                median,
                lower,
                upper,
            }
        })
        .collect();
    let per_sample: Vec<[Option<f64>; 4]> = histories.iter().map(report_quantities).collect();
    let errors = calibration_errors(&calibrated.path);
    if errors.is_none() {
        notes.push(
            "no report-quantity signals (ignition_time, peak_hrr, time_to_peak_hrr, \
                         total_heat_release) in the calibration run's cases/: the band is the parameter band \
                         only, without test scatter or model error"
                .into(),
        );
    }
    let quantities = (0..4)
        .map(|k| {
            let values: Vec<Option<f64>> = per_sample.iter().map(|q| q[k]).collect();
            let mut present: Vec<f64> = values.iter().flatten().copied().collect();
            present.sort_by(f64::total_cmp);
            let n = present.len() as f64;
            let mean = present.iter().sum::<f64>() / n;
            let variance = present.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (n - 1.0);
            QuantityDistribution {
                values,
                median: quantile(&present, 0.5),
                lower: quantile(&present, tail),
                upper: quantile(&present, 1.0 - tail),
                mean,
                standard_deviation: variance.sqrt(),
                ..prediction_band(
                    empty_distribution(k),
                    &present,
                    errors.map(|e| e[k]),
                    tail,
                    settings.seed.wrapping_add(k as u64),
                )
            }
        })
        .collect();
    if let CovarianceSource::RunSummary(path) = &uncertainty.source {
        notes.push(format!("covariance from {}", path.display()));
    }
    Ok(Prediction {
        time_s,
        signals,
        quantities,
        best,
        band_percent: Some(band_percent),
        n_samples: histories.len(),
        n_failed,
        n_rejected,
        notes,
    })
}

/// The prediction's curves as CSV: `time_s`, then per signal its best-fit column and, with a
/// band, `_median`, `_lower`, `_upper`.
pub fn prediction_csv(prediction: &Prediction) -> String {
    let has_band = prediction.band_percent.is_some();
    let mut header = vec!["time_s".to_string()];
    for signal in &prediction.signals {
        header.push(signal.name.clone());
        if has_band {
            for part in ["median", "lower", "upper"] {
                header.push(format!("{}_{part}", signal.name));
            }
        }
    }
    let mut out = header.join(",");
    out.push('\n');
    for (i, t) in prediction.time_s.iter().enumerate() {
        let mut row = vec![format!("{t}")];
        for signal in &prediction.signals {
            row.push(number(signal.best[i]));
            if has_band {
                row.push(number(signal.median[i]));
                row.push(number(signal.lower[i]));
                row.push(number(signal.upper[i]));
            }
        }
        out.push_str(&row.join(","));
        out.push('\n');
    }
    out
}

/// The per-draw quantities as CSV: `sample,ignition_time_s,peak_hrr_kw_m2,
/// time_to_peak_hrr_s,total_heat_release_mj_m2` (blank ignition time: it never ignited).
pub fn quantities_csv(prediction: &Prediction) -> String {
    let mut out = String::from(
        "sample,ignition_time_s,peak_hrr_kw_m2,time_to_peak_hrr_s,total_heat_release_mj_m2\n",
    );
    let n = prediction.quantities.first().map_or(0, |q| q.values.len());
    for i in 0..n {
        let row: Vec<String> = prediction
            .quantities
            .iter()
            .map(|q| q.values[i].map_or(String::new(), number))
            .collect();
        out.push_str(&format!("{},{}\n", i + 1, row.join(",")));
    }
    out
}

fn number(v: f64) -> String {
    if v.is_finite() {
        format!("{v:.6}")
    } else {
        String::new()
    }
}
