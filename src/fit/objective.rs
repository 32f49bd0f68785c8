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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::fit::model::{MeasuredCase, MeasuredSignal, ModelError};
    use crate::fit::parameters::{Prior, Scale};

    /// A fake model with two signals: a constant c at two times, and 2·c at one; it fails
    /// for c < 0. The data and σ are chosen so that every residual is worked by hand.
    struct Constant {
        parameters: Vec<FreeParameter>,
        data: Vec<MeasuredCase>,
    }

    impl Model for Constant {
        fn parameters(&self) -> &[FreeParameter] {
            &self.parameters
        }
        fn data(&self) -> &[MeasuredCase] {
            &self.data
        }
        fn predict(&self, values: &[f64]) -> Result<Vec<Vec<SignalCurve>>, ModelError> {
            if values[0] < 0.0 {
                return Err(ModelError {
                    case: "only".into(),
                    message: "negative".into(),
                });
            }
            Ok(vec![vec![
                SignalCurve {
                    values: vec![values[0]; 2],
                },
                SignalCurve {
                    values: vec![2.0 * values[0]],
                },
            ]])
        }
    }

    fn model(prior: Option<Prior>) -> Constant {
        let signal = |label: &str, value: Vec<f64>, sigma: Vec<f64>, weight: f64| MeasuredSignal {
            label: label.into(),
            time_s: (0..value.len()).map(|t| t as f64).collect(),
            value,
            sigma,
            weight,
        };
        Constant {
            parameters: vec![FreeParameter {
                name: "c".into(),
                unit: "–".into(),
                lower: -10.0,
                upper: 10.0,
                scale: Scale::Linear,
                start: 1.0,
                prior,
            }],
            data: vec![MeasuredCase {
                name: "only".into(),
                signals: vec![
                    signal("a", vec![1.0, 3.0], vec![0.5, 2.0], 4.0),
                    signal("b", vec![5.0], vec![1.0], 1.0),
                ],
            }],
        }
    }

    #[test]
    fn residuals_and_parts_are_the_weighted_standardised_misfits() {
        // c = 2: signal a gives √4·(2 − 1)/0.5 = 4 and √4·(2 − 3)/2 = −1; signal b gives
        // (4 − 5)/1 = −1. Parts: a 4² + 1² = 17, b 1; the prior (normal, mean 1, sd 0.5) adds
        // a row (2 − 1)/0.5 = 2 and a cost of 4; the total is 17 + 1 + 4 = 22.
        let m = model(Some(Prior::Normal {
            mean: 1.0,
            standard_deviation: 0.5,
        }));
        let objective = Objective::new(&m);
        assert_eq!(
            objective.residuals(&[2.0]).unwrap(),
            vec![4.0, -1.0, -1.0, 2.0]
        );
        let evaluation = objective.evaluate(&[2.0]);
        assert_eq!(evaluation.failure, None);
        let parts: Vec<(&str, f64)> = evaluation
            .parts
            .iter()
            .map(|p| (p.signal.as_str(), p.cost))
            .collect();
        assert_eq!(parts, vec![("a", 17.0), ("b", 1.0)]);
        assert_eq!(evaluation.prior_cost, 4.0);
        assert_eq!(evaluation.cost, 22.0);
        // The cost is the sum of the squared residuals, prior row included.
        let sum: f64 = objective
            .residuals(&[2.0])
            .unwrap()
            .iter()
            .map(|r| r * r)
            .sum();
        assert_eq!(sum, evaluation.cost);
    }

    #[test]
    fn a_failed_simulation_costs_the_penalty_and_says_why() {
        let m = model(None);
        let objective = Objective::new(&m);
        let evaluation = objective.evaluate(&[-1.0]);
        assert_eq!(evaluation.cost, FAILED_SIMULATION_PENALTY);
        assert!(evaluation.failure.unwrap().contains("negative"));
        assert!(objective.residuals(&[-1.0]).is_err());
    }
}
