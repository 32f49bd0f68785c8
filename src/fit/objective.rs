//! The objective: weighted least squares on residuals normalised by the repeat spread, a
//! stated noise level or the signal's peak (docs/fit-jobs.md), summed over signals and cases,
//! plus the priors. Every part is kept, not only the sum.

use serde::{Deserialize, Serialize};

use super::model::{MeasuredCase, Model, SignalCurve};
use super::parameters::FreeParameter;

/// Objective of a candidate that could not be simulated: far above any real fit, so the
/// optimiser moves away, but finite so the arithmetic stays sane.
pub const FAILED_SIMULATION_PENALTY: f64 = 1e12;

/// The cost of one signal of one case.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PartCost {
    pub case: String,
    pub signal: String,
    /// weight · Σ ((model − data)/σ)².
    pub cost: f64,
}

/// One evaluated candidate (serialisable, so another process of an MPI job can send it).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Evaluation {
    pub cost: f64,
    pub parts: Vec<PartCost>,
    /// Prior contribution (0 without priors).
    pub prior_cost: f64,
    /// Set when the simulation failed and `cost` is the penalty.
    pub failure: Option<String>,
}

/// The objective of a model: its curves against its data (`Model::data`), plus the priors.
pub struct Objective<'a, M: Model> {
    pub model: &'a M,
}

impl<'a, M: Model> Objective<'a, M> {
    pub fn new(model: &'a M) -> Self {
        Objective { model }
    }

    pub fn parameters(&self) -> &[FreeParameter] {
        self.model.parameters()
    }

    /// The measured data, per case and signal.
    pub fn data(&self) -> &[MeasuredCase] {
        self.model.data()
    }

    /// The standardised residual vector √w·(model − data)/σ over all cases and signals, then
    /// one row per prior; `None` when the simulation failed.
    pub fn residuals(&self, values: &[f64]) -> Result<Vec<f64>, String> {
        let curves = self.model.predict(values).map_err(|e| e.to_string())?;
        let mut residuals = Vec::new();
        for (case, case_curves) in self.data().iter().zip(&curves) {
            for (signal, curve) in case.signals.iter().zip(case_curves) {
                let root_weight = signal.weight.sqrt();
                for ((model, data), sigma) in
                    curve.values.iter().zip(&signal.value).zip(&signal.sigma)
                {
                    residuals.push(root_weight * (model - data) / sigma);
                }
            }
        }
        for (parameter, &value) in self.parameters().iter().zip(values) {
            if let Some(prior) = &parameter.prior {
                residuals.push(prior.residual(value));
            }
        }
        if residuals.iter().any(|r| !r.is_finite()) {
            return Err("the model gave a non-finite value".into());
        }
        Ok(residuals)
    }

    /// Evaluates a candidate; a failed simulation costs `FAILED_SIMULATION_PENALTY`.
    pub fn evaluate(&self, values: &[f64]) -> Evaluation {
        match self.model.predict(values) {
            Err(err) => self.failed(err.to_string()),
            Ok(curves) => self.score(values, &curves),
        }
    }

    fn failed(&self, message: String) -> Evaluation {
        Evaluation {
            cost: FAILED_SIMULATION_PENALTY,
            parts: Vec::new(),
            prior_cost: 0.0,
            failure: Some(message),
        }
    }

    fn score(&self, values: &[f64], curves: &[Vec<SignalCurve>]) -> Evaluation {
        let mut parts = Vec::new();
        for (case, case_curves) in self.data().iter().zip(curves) {
            for (signal, curve) in case.signals.iter().zip(case_curves) {
                let sum: f64 = curve
                    .values
                    .iter()
                    .zip(&signal.value)
                    .zip(&signal.sigma)
                    .map(|((model, data), sigma)| ((model - data) / sigma).powi(2))
                    .sum();
                parts.push(PartCost {
                    case: case.name.clone(),
                    signal: signal.label.clone(),
                    cost: signal.weight * sum,
                });
            }
        }
        let prior_cost: f64 = self
            .parameters()
            .iter()
            .zip(values)
            .filter_map(|(p, &v)| p.prior.map(|prior| prior.penalty(v)))
            .sum();
        let cost = parts.iter().map(|p| p.cost).sum::<f64>() + prior_cost;
        if !cost.is_finite() {
            return self.failed("the model gave a non-finite value".into());
        }
        Evaluation {
            cost,
            parts,
            prior_cost,
            failure: None,
        }
    }
}
