//! The job's `[[parameter]]` tables: each path and its tied paths resolved through
//! `case::targets`, bounds and scale, the start value (read from the material or scenario
//! when not given), and the prior (stated, or `prior_from` an earlier run).

use std::path::Path;

use super::{prior_from, ParameterFile, PriorKind, ScaleFile};
use super::{JobFile, LoadedScenario};
use crate::case::material::MaterialModel;
use crate::case::source::Source;
use crate::case::targets::{parse_path, Target, DEFAULT_REFERENCE_HEATING_RATE_K_MIN};
use crate::case::CaseError;
use crate::fit::parameters::{FreeParameter, Prior, Scale};

/// A value set by two parameters (the same path twice, or a tie onto another parameter's
/// path) would be fitted twice, the last one winning: refused.
pub(super) fn check_unique_targets(
    source: &Source,
    file: &JobFile,
    targets: &[Vec<Target>],
) -> Result<(), CaseError> {
    for (idx, parameter_targets) in targets.iter().enumerate() {
        for target in parameter_targets {
            let earlier = targets[..idx]
                .iter()
                .position(|other| other.contains(target));
            let twice_here = parameter_targets.iter().filter(|t| *t == target).count() > 1;
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

/// A parameter's targets (its path, then its tied paths) and their unit, checked: every tied
/// path has the parameter's unit. The reference heating rate and temperature of the
/// Arrhenius reparametrisations are read here.
pub(super) fn parameter_targets(
    source: &Source,
    idx: usize,
    raw: &ParameterFile,
    material: &MaterialModel,
) -> Result<(Vec<Target>, &'static str), CaseError> {
    let key = |field: &str| format!("parameter[{idx}].{field}");
    let heating_rate_k_s = match &raw.reference_heating_rate_k_min {
        Some(value) => source.positive(value, &key("reference_heating_rate_k_min"))? / 60.0,
        None => DEFAULT_REFERENCE_HEATING_RATE_K_MIN / 60.0,
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
    Ok((targets, unit))
}

/// One `[[parameter]]`: its free parameter (bounds, scale, start, prior) and its targets.
pub(super) fn build_parameter(
    source: &Source,
    idx: usize,
    raw: &ParameterFile,
    base: &Path,
    material: &MaterialModel,
    scenario: Option<&LoadedScenario>,
) -> Result<(FreeParameter, Vec<Target>), CaseError> {
    let key = |field: &str| format!("parameter[{idx}].{field}");
    let path = raw.path.get_ref().trim();
    let (targets, unit) = parameter_targets(source, idx, raw, material)?;
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
    Ok((
        FreeParameter {
            name: path.to_string(),
            unit: unit.to_string(),
            lower,
            upper,
            scale,
            start,
            prior,
        },
        targets,
    ))
}
