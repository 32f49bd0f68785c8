//! `CaseModel`, the fit job as a `fit::Model`: maps a parameter vector onto copies of the
//! job's material and scenarios (`case::targets`) and runs `physics::simulate` for every cone
//! case and the 0-D model `physics::zero_d` for every milligram-scale case, then reads each
//! signal off the history at its data times. The engine sees only the plain vectors of
//! `fit::model`.

use rayon::prelude::*;

use super::job::{CaseSetup, FitCase, FitJob, MilligramSetup, SignalData, SignalKind};
use super::targets::{apply_all, apply_to_material_all};
use crate::fit::model::{MeasuredCase, MeasuredSignal, Model, ModelError, SignalCurve};
use crate::fit::parameters::FreeParameter;
use crate::physics::solver::{simulate_with, Workspace};
use crate::physics::zero_d::{interpolate, simulate_zero_d, ZeroDHistory};

/// The job's cases, simulated by the 1-D solver (cone) or the 0-D model (milligram).
pub struct CaseModel<'a> {
    pub job: &'a FitJob,
    /// The cases' data as the objective sees them (`measured_case`), in the job's order.
    data: Vec<MeasuredCase>,
}

impl<'a> CaseModel<'a> {
    pub fn new(job: &'a FitJob) -> Self {
        CaseModel {
            job,
            data: job.cases.iter().map(measured_case).collect(),
        }
    }

    /// Runs one case with these parameter values; returns the full history too (for exports).
    pub fn simulate_case(
        &self,
        case: &FitCase,
        values: &[f64],
    ) -> Result<crate::physics::History, ModelError> {
        let Some(loaded) = case.cone_scenario() else {
            return Err(ModelError {
                case: case.name.clone(),
                message: "is a milligram-scale case: it runs the 0-D model, not a cone scenario"
                    .into(),
            });
        };
        let mut scenario = loaded.scenario.clone();
        let mut material = self.job.material.material.clone();
        apply_all(&self.job.targets, values, &mut material, &mut scenario);
        for layer in scenario.layers.iter_mut().filter(|l| l.is_specimen) {
            layer.material = material.clone();
        }
        check_material(case, &material)?;
        // One solver workspace per worker thread, reused by every evaluation it runs (the
        // result does not depend on it: `simulate_with` gives `simulate`'s bits).
        thread_local! {
            static WORKSPACE: std::cell::RefCell<Workspace> = std::cell::RefCell::new(Workspace::default());
        }
        WORKSPACE
            .with(|workspace| simulate_with(&scenario, &mut workspace.borrow_mut()))
            .map_err(|err| ModelError {
                case: case.name.clone(),
                message: err.to_string(),
            })
    }

    /// Runs one milligram case's 0-D model with these parameter values (the job's material
    /// with every material target applied; scenario targets do not reach it).
    pub fn simulate_milligram(
        &self,
        case: &FitCase,
        setup: &MilligramSetup,
        values: &[f64],
    ) -> Result<ZeroDHistory, ModelError> {
        let failed = |message: String| ModelError {
            case: case.name.clone(),
            message,
        };
        let mut material = self.job.material.material.clone();
        apply_to_material_all(&self.job.targets, values, &mut material);
        check_material(case, &material)?;
        simulate_zero_d(
            &material,
            &setup.initial_mass_fractions,
            &setup.programme,
            &setup.settings,
        )
        .map_err(|err| failed(err.to_string()))
    }

    /// The model at the data times of every signal of one case.
    pub fn predict_case(
        &self,
        case: &FitCase,
        values: &[f64],
    ) -> Result<Vec<SignalCurve>, ModelError> {
        match &case.setup {
            CaseSetup::Milligram(setup) => {
                let history = self.simulate_milligram(case, setup, values)?;
                Ok(case
                    .signals
                    .iter()
                    .map(|signal| SignalCurve {
                        values: milligram_model_at_data_times(
                            &history,
                            setup,
                            signal.kind,
                            &signal.time_s,
                        ),
                    })
                    .collect())
            }
            CaseSetup::Cone(_) => {
                let history = self.simulate_case(case, values)?;
                Ok(case
                    .signals
                    .iter()
                    .map(|signal| SignalCurve {
                        values: model_at_data_times(&history, case, signal),
                    })
                    .collect())
            }
        }
    }
}

/// Values inside their bounds can still be unphysical together (e.g. a yield of 1 with a
/// lighter char): the material's own validation says so, as a failure of this case.
fn check_material(
    case: &FitCase,
    material: &crate::physics::material::Material,
) -> Result<(), ModelError> {
    crate::physics::material::Material::new(material.components.clone(), material.reactions.clone())
        .map(|_| ())
        .map_err(|err| ModelError {
            case: case.name.clone(),
            message: err.to_string(),
        })
}

/// A case's signals as plain vectors (label, times, values, σ, weight).
pub fn measured_case(case: &FitCase) -> MeasuredCase {
    MeasuredCase {
        name: case.name.clone(),
        signals: case
            .signals
            .iter()
            .map(|signal| MeasuredSignal {
                label: signal.label(),
                time_s: signal.time_s.clone(),
                value: signal.value.clone(),
                sigma: signal.sigma.clone(),
                weight: signal.weight,
            })
            .collect(),
    }
}

impl Model for CaseModel<'_> {
    fn parameters(&self) -> &[FreeParameter] {
        &self.job.parameters
    }

    fn data(&self) -> &[MeasuredCase] {
        &self.data
    }

    fn predict(&self, values: &[f64]) -> Result<Vec<Vec<SignalCurve>>, ModelError> {
        self.job
            .cases
            .par_iter()
            .map(|case| self.predict_case(case, values))
            .collect()
    }
}

/// The 0-D model's value of a milligram signal at each data time (data time minus the
/// programme's start is the model's time), in the signal's unit; NaN for a cone signal, which
/// the job never pairs with a milligram case.
pub fn milligram_model_at_data_times(
    history: &ZeroDHistory,
    setup: &MilligramSetup,
    kind: SignalKind,
    times_s: &[f64],
) -> Vec<f64> {
    let curve = match kind {
        SignalKind::MassFraction => &history.mass_fraction,
        SignalKind::DscHeatFlow => &history.dsc_w_g,
        SignalKind::MccHrr => &history.mcc_w_g,
        _ => return vec![f64::NAN; times_s.len()],
    };
    times_s
        .iter()
        .map(|&t| interpolate(&history.time_s, curve, t - setup.programme_start_s))
        .collect()
}

/// The model's value of `signal` of `case` at each of its data times, in the signal's unit.
/// The 1-D model is the column under the exposed area (the data's per-area rates are per that
/// area). When the test's specimen is larger than its exposed area (a slab under an edge
/// frame), the shielded rim is outside the 1-D model: it is taken as unburnt while the column
/// burns (mass) and as releasing its energy within the record, at the same heat of combustion
/// (total heat release scaled by [`FitCase::area_ratio`]); docs/calibration-pmma.md.
pub fn model_at_data_times(
    history: &crate::physics::History,
    case: &FitCase,
    signal: &SignalData,
) -> Vec<f64> {
    let ratio = case.area_ratio();
    let area_m2 = case.exposed_area_m2;
    let rim_area_m2 = (case.specimen_area_m2 - case.exposed_area_m2).max(0.0);
    let rim_mass_g = history
        .samples
        .first()
        .map_or(0.0, |s| s.mass_kg_m2 * rim_area_m2 * 1e3);
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
        SignalKind::PeakHrr | SignalKind::TimeToPeakHrr => {
            // The largest output sample, as the data's rule takes the largest HRR sample.
            let peak = history
                .samples
                .iter()
                .fold(None::<&crate::physics::Sample>, |best, s| match best {
                    Some(b) if b.hrr_w_m2 >= s.hrr_w_m2 => Some(b),
                    _ => Some(s),
                });
            let value = match (peak, signal.kind) {
                (Some(p), SignalKind::PeakHrr) => p.hrr_w_m2 * 1e-3,
                (Some(p), _) => p.time_s,
                (None, _) => f64::NAN,
            };
            vec![value]
        }
        SignalKind::TotalHeatRelease => {
            let joules: f64 = history
                .samples
                .windows(2)
                .map(|w| 0.5 * (w[0].hrr_w_m2 + w[1].hrr_w_m2) * (w[1].time_s - w[0].time_s))
                .sum();
            vec![joules * 1e-6 * ratio]
        }
        SignalKind::AverageMlr => vec![average_mlr_10_90_g_m2s(history)],
        SignalKind::Mlr => at(&|s| s.mlr_kg_m2_s, 1e3),
        SignalKind::Hrr => at(&|s| s.hrr_w_m2, 1e-3),
        SignalKind::Mass => at(&|s| s.mass_kg_m2, area_m2 * 1e3)
            .into_iter()
            .map(|m| m + rim_mass_g)
            .collect(),
        SignalKind::SurfaceTemperature => at(&|s| s.surface_temperature_k, 1.0),
        SignalKind::BackTemperature => at(&|s| s.back_temperature_k, 1.0),
        SignalKind::InDepthTemperature => match signal.probe {
            Some(probe) => at(
                &|s| {
                    s.probe_temperatures_k
                        .get(probe.index)
                        .copied()
                        .unwrap_or(f64::NAN)
                },
                1.0,
            ),
            // The job loader always gives an in-depth signal its probe.
            None => vec![f64::NAN; signal.time_s.len()],
        },
        // Milligram signals belong to milligram cases (`milligram_model_at_data_times`).
        SignalKind::MassFraction | SignalKind::DscHeatFlow | SignalKind::MccHrr => {
            vec![f64::NAN; signal.time_s.len()]
        }
    }
}

/// The model's mean mass loss rate between 10 % and 90 % of its mass loss, g/(m²·s) (the rule
/// of ISO 5660-1 the data reduction applies); NaN when the specimen lost no mass.
pub fn average_mlr_10_90_g_m2s(history: &crate::physics::History) -> f64 {
    let (Some(first), Some(last)) = (history.samples.first(), history.samples.last()) else {
        return f64::NAN;
    };
    let lost = first.mass_kg_m2 - last.mass_kg_m2;
    if lost <= 0.0 {
        return f64::NAN;
    }
    let time_at_loss = |fraction: f64| {
        let target = first.mass_kg_m2 - fraction * lost;
        history
            .samples
            .windows(2)
            .find(|w| w[1].mass_kg_m2 <= target)
            .map(|w| {
                let span = w[0].mass_kg_m2 - w[1].mass_kg_m2;
                let part = if span > 0.0 {
                    (w[0].mass_kg_m2 - target) / span
                } else {
                    0.0
                };
                w[0].time_s + part * (w[1].time_s - w[0].time_s)
            })
    };
    match (time_at_loss(0.1), time_at_loss(0.9)) {
        (Some(t10), Some(t90)) if t90 > t10 => 0.8 * lost / (t90 - t10) * 1e3,
        _ => f64::NAN,
    }
}
