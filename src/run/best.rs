//! `best.toml`: the calibrated material model, the job's start material with the fitted
//! values written in and a `[calibration]` table (provenance, each value's interval and
//! warnings). Rewritten atomically whenever the best point improves, and once more at the end
//! with the intervals.
//!
//! **Invariant:** the only code in `run` that writes best.toml; the material file format itself
//! is `export::material`'s (best.toml is a material file any command reads).

use super::{io, RunDirectory, RunError};
use crate::export::material::{calibrated_material_toml, FittedValue, Provenance};
use crate::export::write_atomically;
use crate::fit::identifiability::Identifiability;
use crate::fit::job::FitJob;
use crate::fit::parameters::{apply_all, apply_to_material_all};

/// Writes `best.toml` for the point `values` (file units) of cost `cost`; `analysis` gives
/// the intervals once the fit has ended.
#[allow(clippy::too_many_arguments)]
pub fn write_best_model(
    dir: &RunDirectory,
    job: &FitJob,
    start_text: &str,
    values: &[f64],
    analysis: Option<&Identifiability>,
    cost: f64,
    provenance: &Provenance,
) -> Result<(), RunError> {
    let mut material = job.material.material.clone();
    match job.cases.iter().find_map(|case| case.cone_scenario()) {
        Some(loaded) => {
            let mut scenario = loaded.scenario.clone();
            apply_all(&job.parameters, values, &mut material, &mut scenario);
        }
        // A job of milligram cases alone has no scenario values to set.
        None => apply_to_material_all(&job.parameters, values, &mut material),
    }
    let fitted: Vec<FittedValue> = values
        .iter()
        .enumerate()
        .map(|(i, &value)| match analysis {
            Some(a) => FittedValue {
                value,
                interval_95: a.estimates[i].interval_95,
                standard_error: a.estimates[i].standard_error_fit_space,
                warnings: a.estimates[i]
                    .warnings
                    .iter()
                    .map(|w| w.to_string())
                    .collect(),
            },
            None => FittedValue {
                value,
                interval_95: (f64::NAN, f64::NAN),
                standard_error: f64::INFINITY,
                warnings: vec!["interval not yet computed (the fit is still running)".into()],
            },
        })
        .collect();
    let mut provenance = provenance.clone();
    provenance.objective = cost;
    let text = calibrated_material_toml(
        &job.material,
        start_text,
        &job.parameters,
        &fitted,
        &material,
        &provenance,
    )?;
    let path = dir.best();
    write_atomically(&path, text.as_bytes()).map_err(io("cannot write", &path))
}
