//! The seam between the fit and a simulator: `Model` is all the engine needs, over plain
//! vectors. The data a model is fitted to are numbers per case and signal (times, values, σ,
//! weight, a label for outputs); the engine never sees files, scenarios or test reductions.
//! `case::model::CaseModel` implements `Model` for a fit job; the engine's tests use small
//! fake models with a known answer.

use super::parameters::FreeParameter;

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

/// One measured signal as the objective sees it: values on their own time base, the σ that
/// standardises each residual, and a weight.
#[derive(Debug, Clone, PartialEq)]
pub struct MeasuredSignal {
    /// The signal's name in outputs (`mlr`, `in_depth_temperature_5mm`).
    pub label: String,
    /// Times of the values, s.
    pub time_s: Vec<f64>,
    pub value: Vec<f64>,
    /// Standard deviation of each value, in the value's unit (> 0).
    pub sigma: Vec<f64>,
    /// Factor on the signal's sum of squared standardised residuals.
    pub weight: f64,
}

/// The measured signals of one case, in the order of the model's curves for it.
#[derive(Debug, Clone, PartialEq)]
pub struct MeasuredCase {
    pub name: String,
    pub signals: Vec<MeasuredSignal>,
}

/// What the fit engine needs from a simulator, and nothing more.
pub trait Model: Sync {
    /// Free parameters in vector order, with names and bounds for the log and the screen.
    fn parameters(&self) -> &[FreeParameter];
    /// The data the model is compared with: per case, per signal, in the order of the curves
    /// `predict` returns.
    fn data(&self) -> &[MeasuredCase];
    /// Simulates one candidate (file-unit values) and returns, per case and signal, the model
    /// at the data times. Called from many threads at once.
    fn predict(&self, values: &[f64]) -> Result<Vec<Vec<SignalCurve>>, ModelError>;
}
