//! How well each parameter is determined: the Jacobian of the standardised residuals at the
//! optimum (central differences in fit space, evaluated in parallel), the covariance
//! s²·(JᵀJ)⁻¹ with s² = Σr²/(n − p) (the usual linearised least-squares estimate, e.g. Bates &
//! Watts, Nonlinear Regression Analysis, 1988), 95 % intervals, correlations and warnings.
//! Residuals of a curve are correlated in time (a smoothed derivative, a model-form misfit
//! that lasts tens of seconds): each part (case × signal) counts as its effective number of
//! independent residuals n/τ, τ the integrated autocorrelation time of its residuals at the
//! optimum, so s² and (JᵀJ)⁻¹ are those of n_eff independent residuals.

use nalgebra::{DMatrix, DVector};

use super::evaluator::{Evaluator, Local, Residuals};
use super::model::Model;
use super::objective::Objective;
use super::parameters::{FreeParameter, Scale};

/// Two-sided 95 % quantile of the normal distribution (the linearised intervals use it; with
/// hundreds of data points Student's t is the same to three digits).
pub const NORMAL_95: f64 = 1.959964;
/// |correlation| at or above which a pair is flagged as strongly correlated.
pub const STRONG_CORRELATION: f64 = 0.95;

/// A warning about one parameter.
#[derive(Debug, Clone, PartialEq)]
pub enum Warning {
    /// Within 1 % of the bound's range from a bound: the data push it out of the box.
    AtBound {
        which: &'static str,
    },
    StronglyCorrelated {
        with: String,
        correlation: f64,
    },
    /// Its 95 % interval is wider than its bounds, or the data do not constrain it.
    PoorlyDetermined,
}

impl std::fmt::Display for Warning {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            Warning::AtBound { which } => write!(f, "at its {which} bound"),
            Warning::StronglyCorrelated { with, correlation } => {
                write!(f, "strongly correlated with {with} ({correlation:+.2})")
            }
            Warning::PoorlyDetermined => {
                write!(f, "poorly determined (95 % interval wider than the bounds)")
            }
        }
    }
}

/// One parameter's estimate.
#[derive(Debug, Clone, PartialEq)]
pub struct Estimate {
    pub name: String,
    pub unit: String,
    pub value: f64,
    /// Standard error in fit space (the value, or log10 of it on a log scale).
    pub standard_error_fit_space: f64,
    /// 95 % interval in file units (asymmetric on a log scale).
    pub interval_95: (f64, f64),
    /// Composite scaled sensitivity: the root-mean-square change of the standardised
    /// residuals per change of the parameter across its whole bounds (after Hill & Tiedeman,
    /// Effective Groundwater Model Calibration, 2007; quoted from memory).
    pub sensitivity: f64,
    /// 1 for the parameter the data are most sensitive to.
    pub sensitivity_rank: usize,
    pub warnings: Vec<Warning>,
}

/// The identifiability analysis at the optimum.
#[derive(Debug, Clone, PartialEq)]
pub struct Identifiability {
    pub estimates: Vec<Estimate>,
    /// Correlation matrix, row-major, parameters in job order.
    pub correlation: Vec<Vec<f64>>,
    /// Covariance in fit space, row-major.
    pub covariance: Vec<Vec<f64>>,
    pub n_residuals: usize,
    /// Σ over parts of the effective number of independent residuals (≤ `n_residuals`).
    pub effective_residuals: f64,
    /// s² = Σ fₖ·r²/(n_eff − p), fₖ = n_eff/n of each residual's part.
    pub residual_variance: f64,
    /// Singular values of J, largest first (a tiny one means a direction the data cannot see).
    pub singular_values: Vec<f64>,
}

/// Errors of the analysis.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum IdentifiabilityError {
    #[error("the model failed near the optimum while estimating the Jacobian: {0}")]
    Model(String),
    #[error("{n} residuals are too few for {p} parameters")]
    TooFewResiduals { n: usize, p: usize },
}

fn with_fit_coordinate(
    parameters: &[FreeParameter],
    values: &[f64],
    index: usize,
    coordinate: f64,
) -> Vec<f64> {
    let mut shifted = values.to_vec();
    shifted[index] = parameters[index].from_fit_space(coordinate);
    shifted
}

/// Analyses the fit at `values` (file units), evaluating on this process's threads.
pub fn analyse<M: Model>(
    objective: &Objective<'_, M>,
    values: &[f64],
) -> Result<Identifiability, IdentifiabilityError> {
    analyse_on(objective, &Local, values)
}

/// `analyse` with the Jacobian's evaluations done by `evaluator`.
pub fn analyse_on<M: Model, E: Evaluator>(
    objective: &Objective<'_, M>,
    evaluator: &E,
    values: &[f64],
) -> Result<Identifiability, IdentifiabilityError> {
    let parameters = objective.parameters();
    let p = parameters.len();
    let raw_base = objective
        .residuals(values)
        .map_err(IdentifiabilityError::Model)?;
    let n = raw_base.len();
    if n <= p {
        return Err(IdentifiabilityError::TooFewResiduals { n, p });
    }
    let row_factor = part_factors(objective, &raw_base);
    let effective_residuals: f64 = row_factor.iter().sum();
    let root: Vec<f64> = row_factor.iter().map(|f| f.sqrt()).collect();
    let scale_rows =
        |r: Vec<f64>| -> Vec<f64> { r.iter().zip(&root).map(|(r, f)| r * f).collect() };
    let base = scale_rows(raw_base.clone());
    // Central differences with a step of 1e-3 of each parameter's range in fit space, kept
    // inside the bounds (one-sided at a bound). All shifted points go out as one batch.
    let stencils: Vec<(f64, f64, f64)> = parameters
        .iter()
        .zip(values)
        .map(|(parameter, &value)| {
            let x = parameter.to_fit_space(value);
            let step = 1e-3 * parameter.fit_space_range();
            let lower = parameter.to_fit_space(parameter.lower);
            let upper = parameter.to_fit_space(parameter.upper);
            (x, (x - step).max(lower), (x + step).min(upper))
        })
        .collect();
    let mut shifted = Vec::new();
    for (j, &(x, a, b)) in stencils.iter().enumerate() {
        if a < x {
            shifted.push(with_fit_coordinate(parameters, values, j, a));
        }
        if b > x {
            shifted.push(with_fit_coordinate(parameters, values, j, b));
        }
    }
    let mut results = evaluator
        .evaluate(&Residuals(objective), &shifted)
        .into_iter();
    // The residuals at one side of a stencil: the next result when that side was shifted.
    let mut next = |shifted: bool| -> Result<Vec<f64>, String> {
        if shifted {
            results
                .next()
                .unwrap_or_else(|| Err("the evaluator returned too few results".into()))
                .map(scale_rows)
        } else {
            Ok(base.clone())
        }
    };
    let columns: Vec<Result<Vec<f64>, String>> = stencils
        .iter()
        .map(|&(x, a, b)| {
            // Both sides are taken before either error is returned, so the order holds.
            let (ra, rb) = (next(a < x), next(b > x));
            let (ra, rb) = (ra?, rb?);
            Ok(ra
                .iter()
                .zip(&rb)
                .map(|(ra, rb)| (rb - ra) / (b - a))
                .collect())
        })
        .collect();
    let mut jacobian = DMatrix::<f64>::zeros(n, p);
    for (j, column) in columns.into_iter().enumerate() {
        let column = column.map_err(IdentifiabilityError::Model)?;
        for (i, value) in column.into_iter().enumerate() {
            jacobian[(i, j)] = value;
        }
    }
    let degrees_of_freedom = (effective_residuals - p as f64).max(1.0);
    let residual_variance = base.iter().map(|r| r * r).sum::<f64>() / degrees_of_freedom;
    let svd = jacobian.clone().svd(true, true);
    let mut singular_values: Vec<f64> = svd.singular_values.iter().copied().collect();
    singular_values.sort_by(|a, b| b.total_cmp(a));
    let largest = singular_values.first().copied().unwrap_or(0.0);
    // Pseudo-inverse of JᵀJ through the SVD of J; directions below 1e-10 of the largest
    // singular value are treated as undetermined (infinite variance).
    let mut covariance = DMatrix::<f64>::zeros(p, p);
    let mut undetermined = vec![false; p];
    if let Some(v_t) = &svd.v_t {
        for (k, &sigma) in svd.singular_values.iter().enumerate() {
            let direction: DVector<f64> = v_t.row(k).transpose();
            if sigma > 1e-10 * largest {
                covariance +=
                    (&direction * direction.transpose()) * (residual_variance / (sigma * sigma));
            } else {
                for j in 0..p {
                    if direction[j].abs() > 1e-3 {
                        undetermined[j] = true;
                    }
                }
            }
        }
    }
    let mut correlation = vec![vec![0.0; p]; p];
    for i in 0..p {
        for j in 0..p {
            let denominator = (covariance[(i, i)] * covariance[(j, j)]).sqrt();
            correlation[i][j] = if i == j {
                1.0
            } else if denominator > 0.0 {
                covariance[(i, j)] / denominator
            } else {
                0.0
            };
        }
    }
    let estimates = parameters
        .iter()
        .enumerate()
        .map(|(i, parameter)| {
            let standard_error = if undetermined[i] {
                f64::INFINITY
            } else {
                covariance[(i, i)].max(0.0).sqrt()
            };
            let x = parameter.to_fit_space(values[i]);
            let half = NORMAL_95 * standard_error;
            let interval_95 = if half.is_finite() {
                (
                    parameter.from_fit_space(x - half),
                    parameter.from_fit_space(x + half),
                )
            } else {
                (
                    match parameter.scale {
                        Scale::Log => 0.0,
                        Scale::Linear => f64::NEG_INFINITY,
                    },
                    f64::INFINITY,
                )
            };
            let mut warnings = Vec::new();
            let unit = parameter.to_unit(values[i]);
            if unit <= 0.01 {
                warnings.push(Warning::AtBound { which: "lower" });
            } else if unit >= 0.99 {
                warnings.push(Warning::AtBound { which: "upper" });
            }
            for (j, other) in parameters.iter().enumerate() {
                if j != i && correlation[i][j].abs() >= STRONG_CORRELATION {
                    warnings.push(Warning::StronglyCorrelated {
                        with: other.name.clone(),
                        correlation: correlation[i][j],
                    });
                }
            }
            if !half.is_finite() || 2.0 * half > parameter.fit_space_range() {
                warnings.push(Warning::PoorlyDetermined);
            }
            let sensitivity = ((0..n)
                .map(|row| (jacobian[(row, i)] * parameter.fit_space_range()).powi(2))
                .sum::<f64>()
                / n as f64)
                .sqrt();
            Estimate {
                name: parameter.name.clone(),
                unit: parameter.unit.clone(),
                value: values[i],
                standard_error_fit_space: standard_error,
                interval_95,
                sensitivity,
                sensitivity_rank: 0,
                warnings,
            }
        })
        .collect::<Vec<_>>();
    let mut order: Vec<usize> = (0..p).collect();
    order.sort_by(|&a, &b| {
        estimates[b]
            .sensitivity
            .total_cmp(&estimates[a].sensitivity)
    });
    let mut estimates = estimates;
    for (rank, &i) in order.iter().enumerate() {
        estimates[i].sensitivity_rank = rank + 1;
    }
    Ok(Identifiability {
        estimates,
        correlation,
        covariance: (0..p)
            .map(|i| (0..p).map(|j| covariance[(i, j)]).collect())
            .collect(),
        n_residuals: n,
        effective_residuals,
        residual_variance,
        singular_values,
    })
}

/// The integrated autocorrelation time τ = 1 + 2·Σₖ ρₖ of a residual series (ρₖ its
/// autocorrelation at lag k about zero), summed while ρₖ stays positive (the initial positive
/// sequence, after Geyer, Statistical Science 7 (1992) 473; common practice): n/τ independent
/// residuals. Unlike the AR(1) formula it also sees correlation that lasts a smoothing window
/// and then stops. At least 1.
fn integrated_autocorrelation_time(residuals: &[f64]) -> f64 {
    let n = residuals.len();
    let square: f64 = residuals.iter().map(|r| r * r).sum();
    if n < 3 || square <= 0.0 {
        return 1.0;
    }
    let mut tau = 1.0;
    for lag in 1..n / 2 {
        let rho = residuals[..n - lag]
            .iter()
            .zip(&residuals[lag..])
            .map(|(a, b)| a * b)
            .sum::<f64>()
            / square;
        if rho <= 0.0 {
            break;
        }
        tau += 2.0 * rho;
    }
    tau
}

/// n_eff/n for every residual row: per part (case × signal, in the objective's order), from
/// the integrated autocorrelation time of the part's residuals; 1 for a part of one residual
/// and for the prior rows.
fn part_factors<M: Model>(objective: &Objective<'_, M>, residuals: &[f64]) -> Vec<f64> {
    let mut factors = Vec::with_capacity(residuals.len());
    let mut at = 0;
    for case in objective.data() {
        for signal in &case.signals {
            let n = signal.value.len().min(residuals.len().saturating_sub(at));
            let part = &residuals[at..at + n];
            let fraction = if n > 1 {
                (1.0 / integrated_autocorrelation_time(part)).clamp(1.0 / n as f64, 1.0)
            } else {
                1.0
            };
            factors.extend(std::iter::repeat_n(fraction, n));
            at += n;
        }
    }
    factors.resize(residuals.len(), 1.0);
    factors
}
