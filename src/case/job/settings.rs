//! The job's `[settings]`: the optimiser's settings and stops (one `fit::engine::EngineSettings`,
//! as the engine takes them), the output interval of the cases' runs and the curve weighting.

use toml::Spanned;

use super::{CurveWeightingFile, SettingsFile};
use crate::case::source::Source;
use crate::case::CaseError;
use crate::fit::engine::EngineSettings;

/// The seed of a job that names none.
pub const DEFAULT_SEED: u64 = 1;

/// A job's settings.
#[derive(Debug, Clone, PartialEq)]
pub struct Settings {
    /// The optimiser's settings and stops; `time` becomes `time_budget_s`. The fit's seed is
    /// `engine.seed` as read; `run` replaces it once for a `--seed` or a resumed run.
    pub engine: EngineSettings,
    /// Output interval of every case's simulation, s.
    pub output_interval_s: f64,
    /// Whether a curve from repeats weighs as its effective number of independent points
    /// (`SignalData::effective_points`) rather than as every sample.
    pub weigh_independent_points: bool,
    /// The posterior sample after the fit (`fit::posterior`); `None` when
    /// `posterior_steps` is absent or 0.
    pub posterior: Option<crate::fit::posterior::PosteriorSettings>,
}

pub(super) fn build_settings(
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
    // Each value is checked in the file's order of keys above, so the first bad one is named.
    let max_evaluations = count(&raw.max_evaluations, "max_evaluations", 5000)?;
    let target_objective = match &raw.target_objective {
        Some(v) => source.non_negative(v, "settings.target_objective")?,
        None => 0.0,
    };
    let stagnation_generations = count(&raw.stagnation_generations, "stagnation_generations", 20)?;
    let population = count(&raw.population, "population", 0)?;
    let local_max_evaluations = count(&raw.local_max_evaluations, "local_max_evaluations", 400)?;
    let local_starts = count(&raw.local_starts, "local_starts", 1)?.max(1);
    Ok(Settings {
        engine: EngineSettings {
            population,
            max_evaluations: max_evaluations as u64,
            time_budget_s: time_budget.map(|d| d.as_secs_f64()),
            target_objective,
            stagnation_generations: stagnation_generations as u64,
            seed: raw.seed.unwrap_or(DEFAULT_SEED),
            local_refinement: raw.local_refinement.unwrap_or(true),
            local_max_evaluations: local_max_evaluations as u64,
            local_starts,
        },
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
        seed: raw.seed.unwrap_or(DEFAULT_SEED),
    }))
}
