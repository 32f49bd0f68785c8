//! `summary.json` (the final figures of a run) and `parameters.csv` (the fitted values and
//! intervals as a table), both written once when a run ends.
//!
//! **Invariant:** the only code that knows these two formats. [`read_summary`] is strict
//! (what `prior_from`, `predict` and `report` rely on); [`SummaryView::from_json`] is the
//! lenient reading for viewers, where every field may be missing (an older or newer run).

use std::path::Path;

use serde::{Deserialize, Serialize};

use super::progress::PartInfo;
use super::{io, RunDirectory, RunError};
use crate::export::write_atomically;

/// `summary.json`: the final figures.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct RunSummary {
    pub title: String,
    pub reason: String,
    /// False when the fit ended on its budget, its time or a stop request before the search
    /// converged (`fit::engine::convergence`): its estimate and intervals are provisional.
    #[serde(default = "converged_by_default")]
    pub converged: bool,
    /// Why the fit did not converge (absent when it did).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub not_converged_reason: Option<String>,
    pub objective: f64,
    pub parts: Vec<PartInfo>,
    pub prior_cost: f64,
    pub evaluations: u64,
    pub elapsed_s: f64,
    pub parameters: Vec<SummaryParameter>,
    pub correlation: Vec<Vec<f64>>,
    /// Covariance in fit space (the value, or log10 of it on a log scale), row-major; what
    /// `predict` draws parameter sets from. Empty when the analysis could not be done.
    #[serde(default)]
    pub covariance: Vec<Vec<f64>>,
    pub n_residuals: usize,
    /// The effective number of independent residuals the intervals are based on.
    #[serde(default)]
    pub effective_residuals: f64,
    pub residual_variance: f64,
    pub singular_values: Vec<f64>,
    /// When the identifiability analysis could not be done, why.
    pub identifiability_problem: Option<String>,
    /// trace(JᵀJ·C)/p of the sandwich covariance C (`fit::identifiability`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub likelihood_temperature: Option<f64>,
    /// The posterior sample, when the job asked for one (`settings.posterior_steps`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub posterior: Option<PosteriorInfo>,
    /// Why the sample the job asked for is absent (the fit's outputs are kept regardless).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub posterior_problem: Option<String>,
}

/// What `summary.json` says of the posterior sample; the points are in `posterior.json`
/// (`run::posterior`).
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct PosteriorInfo {
    pub file: String,
    pub walkers: usize,
    pub steps: usize,
    pub burn_in: usize,
    /// Kept points (walkers × steps after burn-in).
    pub points: usize,
    pub acceptance: f64,
    pub temperature: f64,
    /// Lowest cost any walker met (below `objective`: the optimiser had not converged).
    pub lowest_cost: f64,
    /// Set when a stop request ended the sample before `requested_steps`.
    pub stopped: bool,
    /// The steps the job asked for (absent in summaries written before it was recorded).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub requested_steps: Option<usize>,
}

/// One parameter of `summary.json`. Read through [`SummaryParameterOnDisk`], so that a
/// summary written before the posterior interval was split into `posterior_lower_95` and
/// `posterior_upper_95` (a `posterior_95` pair) still reads.
#[derive(Debug, Clone, Serialize, Deserialize)]
#[serde(from = "SummaryParameterOnDisk")]
pub struct SummaryParameter {
    pub name: String,
    pub unit: String,
    pub value: f64,
    pub lower_bound: f64,
    pub upper_bound: f64,
    pub log_scale: bool,
    pub lower_95: Option<f64>,
    pub upper_95: Option<f64>,
    pub standard_error_fit_space: Option<f64>,
    /// Composite scaled sensitivity and its rank (1 = the data see this one most).
    pub sensitivity: Option<f64>,
    pub sensitivity_rank: Option<usize>,
    pub warnings: Vec<String>,
    /// 2.5 and 97.5 % quantiles of the posterior sample (absent without one), beside the
    /// sandwich interval's `lower_95`/`upper_95`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub posterior_lower_95: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub posterior_upper_95: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub posterior_median: Option<f64>,
}

impl SummaryParameter {
    /// The posterior 95 % interval, when the summary has both ends.
    pub fn posterior_interval_95(&self) -> Option<(f64, f64)> {
        self.posterior_lower_95.zip(self.posterior_upper_95)
    }
}

/// A parameter as `summary.json` may hold it: this version's fields, or an older file's
/// `posterior_95` pair in their place.
#[derive(Deserialize)]
struct SummaryParameterOnDisk {
    name: String,
    unit: String,
    value: f64,
    lower_bound: f64,
    upper_bound: f64,
    log_scale: bool,
    lower_95: Option<f64>,
    upper_95: Option<f64>,
    standard_error_fit_space: Option<f64>,
    sensitivity: Option<f64>,
    sensitivity_rank: Option<usize>,
    warnings: Vec<String>,
    #[serde(default)]
    posterior_lower_95: Option<f64>,
    #[serde(default)]
    posterior_upper_95: Option<f64>,
    /// The older spelling: (lower, upper).
    #[serde(default)]
    posterior_95: Option<(f64, f64)>,
    #[serde(default)]
    posterior_median: Option<f64>,
}

impl From<SummaryParameterOnDisk> for SummaryParameter {
    fn from(disk: SummaryParameterOnDisk) -> Self {
        let (older_lower, older_upper) = disk.posterior_95.unzip();
        SummaryParameter {
            name: disk.name,
            unit: disk.unit,
            value: disk.value,
            lower_bound: disk.lower_bound,
            upper_bound: disk.upper_bound,
            log_scale: disk.log_scale,
            lower_95: disk.lower_95,
            upper_95: disk.upper_95,
            standard_error_fit_space: disk.standard_error_fit_space,
            sensitivity: disk.sensitivity,
            sensitivity_rank: disk.sensitivity_rank,
            warnings: disk.warnings,
            posterior_lower_95: disk.posterior_lower_95.or(older_lower),
            posterior_upper_95: disk.posterior_upper_95.or(older_upper),
            posterior_median: disk.posterior_median,
        }
    }
}

fn converged_by_default() -> bool {
    true
}

impl RunSummary {
    /// The file's bytes (pretty-printed JSON).
    pub fn to_json_bytes(&self) -> Result<Vec<u8>, serde_json::Error> {
        serde_json::to_vec_pretty(self)
    }
}

/// Reads a run's `summary.json` (e.g. for `prior_from` in a later job).
pub fn read_summary(path: &Path) -> Result<RunSummary, RunError> {
    let bytes = crate::input::read_bytes(path, crate::input::InputKind::RunFile)
        .map_err(io("cannot read", path))?;
    serde_json::from_slice(&bytes).map_err(|e| RunError::Corrupt {
        path: path.to_path_buf(),
        problem: e.to_string(),
    })
}

/// The `summary.json` beside a calibrated model (`best.toml`), when there is one that parses.
pub fn summary_beside(model_path: &Path) -> (std::path::PathBuf, Option<RunSummary>) {
    let dir = RunDirectory::new(model_path.parent().unwrap_or(Path::new(".")));
    let path = dir.summary();
    let summary = read_summary(&path).ok();
    (path, summary)
}

/// Writes `summary.json` atomically.
pub fn write_summary(dir: &RunDirectory, summary: &RunSummary) -> Result<(), RunError> {
    let bytes = summary.to_json_bytes().map_err(|e| RunError::Corrupt {
        path: dir.summary(),
        problem: e.to_string(),
    })?;
    write_atomically(&dir.summary(), &bytes).map_err(io("cannot write", &dir.summary()))
}

/// `parameters.csv`: one row per parameter (value and interval in `{:.6e}`, bounds as
/// written in the job, the scale and the warnings).
pub fn parameters_csv(parameters: &[SummaryParameter]) -> Result<Vec<u8>, csv::Error> {
    let mut writer = csv::Writer::from_writer(Vec::new());
    let fmt = |v: Option<f64>| v.map_or(String::new(), |v| format!("{v:.6e}"));
    writer.write_record([
        "parameter",
        "unit",
        "value",
        "lower_95",
        "upper_95",
        "lower_bound",
        "upper_bound",
        "scale",
        "warnings",
    ])?;
    for p in parameters {
        writer.write_record([
            p.name.clone(),
            p.unit.clone(),
            format!("{:.6e}", p.value),
            fmt(p.lower_95),
            fmt(p.upper_95),
            format!("{}", p.lower_bound),
            format!("{}", p.upper_bound),
            if p.log_scale {
                "log".into()
            } else {
                "linear".into()
            },
            p.warnings.join("; "),
        ])?;
    }
    writer
        .into_inner()
        .map_err(|e| csv::Error::from(std::io::Error::other(e.to_string())))
}

/// Writes `parameters.csv` atomically.
pub fn write_parameters_csv(
    dir: &RunDirectory,
    parameters: &[SummaryParameter],
) -> Result<(), RunError> {
    let path = dir.parameters_csv();
    let bytes = parameters_csv(parameters).map_err(|e| RunError::Corrupt {
        path: path.clone(),
        problem: e.to_string(),
    })?;
    write_atomically(&path, &bytes).map_err(io("cannot write", &path))
}

/// `summary.json` read leniently: every field may be missing (an older or newer run).
#[derive(Debug, Clone, Default, PartialEq, Deserialize)]
#[serde(default)]
pub struct SummaryView {
    pub title: Option<String>,
    pub reason: Option<String>,
    pub objective: Option<f64>,
    pub parts: Option<Vec<SummaryPart>>,
    pub prior_cost: Option<f64>,
    pub evaluations: Option<u64>,
    pub elapsed_s: Option<f64>,
    pub parameters: Option<Vec<SummaryParameterView>>,
    /// Entries are `None` where the file has `null` (a NaN).
    pub correlation: Option<Vec<Vec<Option<f64>>>>,
    pub n_residuals: Option<usize>,
    pub identifiability_problem: Option<String>,
}

#[derive(Debug, Clone, Default, PartialEq, Deserialize)]
#[serde(default)]
pub struct SummaryPart {
    pub case: String,
    pub signal: String,
    pub cost: Option<f64>,
}

#[derive(Debug, Clone, Default, PartialEq, Deserialize)]
#[serde(default)]
pub struct SummaryParameterView {
    pub name: String,
    pub unit: String,
    pub value: Option<f64>,
    pub lower_bound: Option<f64>,
    pub upper_bound: Option<f64>,
    pub log_scale: Option<bool>,
    pub lower_95: Option<f64>,
    pub upper_95: Option<f64>,
    pub posterior_lower_95: Option<f64>,
    pub posterior_upper_95: Option<f64>,
    pub posterior_median: Option<f64>,
    pub sensitivity_rank: Option<usize>,
    pub warnings: Option<Vec<String>>,
}

impl SummaryView {
    /// Reads the text of a `summary.json`; the names of the main fields it lacks come with it.
    pub fn from_json(text: &str) -> Result<(SummaryView, Vec<&'static str>), serde_json::Error> {
        let summary: SummaryView = serde_json::from_str(text)?;
        let mut missing = Vec::new();
        if summary.parameters.is_none() {
            missing.push("parameters");
        }
        if summary.correlation.is_none() {
            missing.push("correlation");
        }
        if summary.parts.is_none() {
            missing.push("parts");
        }
        if summary.objective.is_none() {
            missing.push("objective");
        }
        Ok((summary, missing))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const PARAMETER: &str = r#"{"name":"k","unit":"W/(m·K)","value":0.2,"lower_bound":0.1,"upper_bound":0.5,"log_scale":false,"lower_95":0.18,"upper_95":0.22,"standard_error_fit_space":0.01,"sensitivity":3.0,"sensitivity_rank":1,"warnings":[]"#;

    #[test]
    fn the_posterior_interval_is_written_as_two_fields_and_an_older_pair_still_reads() {
        let older: SummaryParameter = serde_json::from_str(&format!(
            "{PARAMETER},\"posterior_95\":[0.17,0.23],\"posterior_median\":0.2}}"
        ))
        .unwrap();
        assert_eq!(older.posterior_interval_95(), Some((0.17, 0.23)));
        let written = serde_json::to_string(&older).unwrap();
        assert!(written.contains("\"posterior_lower_95\":0.17,\"posterior_upper_95\":0.23"));
        assert!(!written.contains("posterior_95"), "{written}");
        let back: SummaryParameter = serde_json::from_str(&written).unwrap();
        assert_eq!(back.posterior_interval_95(), Some((0.17, 0.23)));
        assert_eq!(back.posterior_median, Some(0.2));
        let none: SummaryParameter = serde_json::from_str(&format!("{PARAMETER}}}")).unwrap();
        assert_eq!(none.posterior_interval_95(), None);
        assert!(!serde_json::to_string(&none).unwrap().contains("posterior"));
    }
}
