//! The seam between the fit and the physics: `Model` is all the engine needs from a
//! simulator, and `CaseModel` implements it by mapping a parameter vector onto the job's
//! material and scenarios and calling `physics::simulate` for every case.

use rayon::prelude::*;

use super::job::{FitCase, FitJob, SignalData, SignalKind};
use super::parameters::{apply_all, FreeParameter};
use crate::physics::simulate;

/// Model values at the data times of one signal of one case.
#[derive(Debug, Clone, PartialEq)]
pub struct SignalCurve {
    pub values: Vec<f64>,
}

/// Why a candidate could not be simulated.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[error("case `{case}`: {message}")]
pub struct ModelError {
    pub case: String,
    pub message: String,
}

/// What the fit engine needs from a simulator, and nothing more.
pub trait Model: Sync {
    /// Free parameters in vector order, with names and bounds for the log and the screen.
    fn parameters(&self) -> &[FreeParameter];
    /// Simulates one candidate (file-unit values) and returns, per case and signal, the model
    /// at the data times. Called from many threads at once.
    fn predict(&self, values: &[f64]) -> Result<Vec<Vec<SignalCurve>>, ModelError>;
}

/// The job's cases, simulated by the 1-D solver.
pub struct CaseModel<'a> {
    pub job: &'a FitJob,
}

impl<'a> CaseModel<'a> {
    pub fn new(job: &'a FitJob) -> Self {
        CaseModel { job }
    }

    /// Runs one case with these parameter values; returns the full history too (for exports).
    pub fn simulate_case(
        &self,
        case: &FitCase,
        values: &[f64],
    ) -> Result<crate::physics::History, ModelError> {
        let mut scenario = case.scenario.scenario.clone();
        let mut material = self.job.material.material.clone();
        apply_all(&self.job.parameters, values, &mut material, &mut scenario);
        for layer in scenario.layers.iter_mut().filter(|l| l.is_specimen) {
            layer.material = material.clone();
        }
        // Values inside the bounds can still be unphysical together (e.g. a yield of 1 with a
        // lighter char): the material's own check says so.
        crate::physics::material::Material::new(
            material.components.clone(),
            material.reactions.clone(),
        )
        .map_err(|err| ModelError {
            case: case.name.clone(),
            message: err.to_string(),
        })?;
        simulate(&scenario).map_err(|err| ModelError {
            case: case.name.clone(),
            message: err.to_string(),
        })
    }
}

impl Model for CaseModel<'_> {
    fn parameters(&self) -> &[FreeParameter] {
        &self.job.parameters
    }

    fn predict(&self, values: &[f64]) -> Result<Vec<Vec<SignalCurve>>, ModelError> {
        self.job
            .cases
            .par_iter()
            .map(|case| {
                let history = self.simulate_case(case, values)?;
                Ok(case
                    .signals
                    .iter()
                    .map(|signal| SignalCurve {
                        values: model_at_data_times(&history, case.exposed_area_m2, signal),
                    })
                    .collect())
            })
            .collect()
    }
}

/// The model's value of `signal` at each of its data times, in the signal's unit.
pub fn model_at_data_times(
    history: &crate::physics::History,
    area_m2: f64,
    signal: &SignalData,
) -> Vec<f64> {
    let at = |pick: &dyn Fn(&crate::physics::Sample) -> f64, factor: f64| -> Vec<f64> {
        signal
            .time_s
            .iter()
            .map(|&t| history.value_at(t, pick) * factor)
            .collect()
    };
    match signal.kind {
        SignalKind::IgnitionTime => {
            // A specimen that never ignites is scored as igniting at the end of the run.
            let end_s = history.samples.last().map_or(0.0, |s| s.time_s);
            vec![history.summary.ignition_time_s.unwrap_or(end_s)]
        }
        SignalKind::Mlr => at(&|s| s.mlr_kg_m2_s, 1e3),
        SignalKind::Hrr => at(&|s| s.hrr_w_m2, 1e-3),
        SignalKind::Mass => at(&|s| s.mass_kg_m2, area_m2 * 1e3),
        SignalKind::SurfaceTemperature => at(&|s| s.surface_temperature_k, 1.0),
        SignalKind::BackTemperature => at(&|s| s.back_temperature_k, 1.0),
        SignalKind::InDepthTemperature => match signal.probe {
            Some((_, index)) => at(
                &|s| {
                    s.probe_temperatures_k
                        .get(index)
                        .copied()
                        .unwrap_or(f64::NAN)
                },
                1.0,
            ),
            // The job loader always gives an in-depth signal its probe.
            None => vec![f64::NAN; signal.time_s.len()],
        },
    }
}
