//! `prior_from`: a parameter's prior taken from an earlier run's summary.json (the second step
//! of a two-step calibration, docs/fit-jobs.md): the estimate of the same path and its standard
//! error become a normal prior in fit space (on a log scale, a log-normal one).

use std::path::Path;

use toml::Spanned;

use crate::case::source::{error_chain, Source};
use crate::case::CaseError;
use crate::fit::parameters::Prior;

/// The prior that `summary_file` (relative to the job) gives the parameter `path`.
pub(super) fn prior_from_summary(
    source: &Source,
    field: &str,
    summary_file: &Spanned<String>,
    base: &Path,
    path: &str,
) -> Result<Prior, CaseError> {
    let summary_path = base.join(summary_file.get_ref());
    let invalid = |problem: String| source.invalid(&summary_file.span(), field, problem);
    let summary = crate::run::read_summary(&summary_path).map_err(|err| {
        invalid(format!(
            "cannot use {}: {}",
            summary_path.display(),
            error_chain(&err)
        ))
    })?;
    let Some(estimate) = summary.parameters.iter().find(|p| p.name == path) else {
        let names: Vec<&str> = summary.parameters.iter().map(|p| p.name.as_str()).collect();
        return Err(invalid(format!(
            "{} has no parameter `{path}` (it has {})",
            summary_path.display(),
            if names.is_empty() {
                "none".to_string()
            } else {
                names.join(", ")
            }
        )));
    };
    let standard_error = match estimate.standard_error_fit_space {
        Some(se) if se > 0.0 && se.is_finite() => se,
        _ => {
            return Err(invalid(format!(
                "{} gives `{path}` no standard error (the run's uncertainty analysis found no \
                 interval{}); fix the value instead, or give `prior_mean` and `prior_sd`",
                summary_path.display(),
                summary
                    .identifiability_problem
                    .as_ref()
                    .map_or(String::new(), |p| format!(": {p}"))
            )))
        }
    };
    if !(estimate.value.is_finite() && (!estimate.log_scale || estimate.value > 0.0)) {
        return Err(invalid(format!(
            "{} gives `{path}` the value {}, which cannot centre a prior",
            summary_path.display(),
            estimate.value
        )));
    }
    Ok(if estimate.log_scale {
        Prior::LogNormal {
            median: estimate.value,
            standard_deviation_log10: standard_error,
        }
    } else {
        Prior::Normal {
            mean: estimate.value,
            standard_deviation: standard_error,
        }
    })
}
