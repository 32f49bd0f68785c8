//! How well each parameter is determined: the Jacobian of the standardised residuals at the
//! optimum (central differences in fit space, evaluated in parallel), the covariance of the
//! estimate, 95 % intervals, correlations and warnings.
//!
//! The covariance is the sandwich H⁺·M·H⁺ (`sandwich_covariance`): H = JᵀJ, and M the spread
//! of the score Jᵀr estimated from the residuals at the optimum, part by part (case × signal),
//! with the residuals' correlation in time taken in by a Bartlett kernel. It therefore holds
//! what the residuals show: noise of another size than σ said, a smoothed derivative, a
//! model-form misfit that lasts tens of seconds, parts that pull the parameters different
//! ways. The classical s²·(JᵀJ)⁻¹ (e.g. Bates & Watts, Nonlinear Regression Analysis, 1988)
//! assumes σ right up to one factor and independent residuals; on twin fits it gave intervals
//! that held the truth for 8 of 12 parameters (docs/predictions.md, "The covariance").
//! `residual_variance` and `effective_residuals` (n/τ per part, τ the integrated
//! autocorrelation time) are still reported as a measure of the misfit.

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
    /// trace(JᵀJ·C)/p, C the sandwich covariance, and at least 1: how much wider the intervals
    /// are than those of independent residuals of the stated σ; the posterior sample's
    /// temperature (`fit::posterior`). Where the sandwich came out narrower (residuals smaller
    /// than σ), C is scaled up to the trace 1 and this is 1.
    pub likelihood_temperature: f64,
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
    let base: Vec<f64> = raw_base.iter().zip(&root).map(|(r, f)| r * f).collect();
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
        } else {
            Ok(raw_base.clone())
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
    let parts = part_lengths(objective, n);
    let (mut covariance, singular_values, undetermined) =
        sandwich_covariance(&jacobian, &raw_base, &parts);
    let likelihood_temperature = floor_at_stated_sigma(&jacobian, &mut covariance);
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
                .map(|row| (root[row] * jacobian[(row, i)] * parameter.fit_space_range()).powi(2))
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
        likelihood_temperature,
    })
}

/// The lengths of the residual vector's parts, in order: one per case × signal, then one row
/// per prior (each its own part).
fn part_lengths<M: Model>(objective: &Objective<'_, M>, n: usize) -> Vec<usize> {
    let mut parts = Vec::new();
    let mut at = 0;
    for case in objective.data() {
        for signal in &case.signals {
            let len = signal.value.len().min(n - at);
            if len > 0 {
                parts.push(len);
            }
            at += len;
        }
    }
    parts.extend(std::iter::repeat_n(1, n - at));
    parts
}

/// Bartlett-kernel bandwidth for a part's residual series by the AR(1) plug-in rule of
/// Andrews (Econometrica 59 (1991) 817, eq. 6.4; quoted from memory):
/// L = 1.1447·(α·n)^(1/3), α = 4ρ²/((1 − ρ)²(1 + ρ)²), ρ the lag-one autocorrelation of the
/// residuals (clamped to ±0.999), L at most n − 1.
fn bartlett_bandwidth(residuals: &[f64]) -> usize {
    let n = residuals.len();
    if n < 3 {
        return 0;
    }
    let square: f64 = residuals.iter().map(|r| r * r).sum();
    if square <= 0.0 {
        return 0;
    }
    let rho =
        (residuals.windows(2).map(|w| w[0] * w[1]).sum::<f64>() / square).clamp(-0.999, 0.999);
    let alpha = 4.0 * rho * rho / ((1.0 - rho).powi(2) * (1.0 + rho).powi(2));
    let bandwidth = 1.1447 * (alpha * n as f64).cbrt();
    (bandwidth.floor() as usize).min(n - 1)
}

/// The covariance of the estimate in fit space by the sandwich H⁺·M·H⁺, H = JᵀJ the
/// Gauss–Newton matrix of the standardised residuals r and M the covariance of the score
/// Jᵀr estimated from the residuals themselves (White, Econometrica 48 (1980) 817; with
/// correlation in time, Newey & West, Econometrica 55 (1987) 703). Parts (`parts`: lengths of
/// consecutive rows) are taken as independent of each other:
/// - a part of several rows (a curve) adds Γ₀ + Σₗ wₗ(Γₗ + Γₗᵀ), Γₗ = Σₜ gₜ gₜ₊ₗᵀ, gₜ = Jₜ rₜ,
///   with Bartlett weights wₗ = 1 − l/(L + 1) and L from `bartlett_bandwidth`: a misfit that
///   lasts, noise of the wrong size, a smoothed derivative all show in it, whatever σ said;
/// - a part of one row (a scalar signal, a prior) adds JₜJₜᵀ·max(1, rₜ²): its σ is trusted
///   unless the residual says it is too small.
///
/// Unlike s²·(JᵀJ)⁻¹ this does not assume that σ is right up to one common factor, nor that
/// the residuals are independent. H⁺ is the pseudo-inverse through the SVD of J: directions
/// below 1e-10 of the largest singular value are undetermined (the parameters that load on
/// them get infinite variance). Returns the covariance, the singular values of J (largest
/// first) and which parameters are undetermined.
pub fn sandwich_covariance(
    jacobian: &DMatrix<f64>,
    residuals: &[f64],
    parts: &[usize],
) -> (DMatrix<f64>, Vec<f64>, Vec<bool>) {
    let p = jacobian.ncols();
    let svd = jacobian.clone().svd(true, true);
    let mut singular_values: Vec<f64> = svd.singular_values.iter().copied().collect();
    singular_values.sort_by(|a, b| b.total_cmp(a));
    let largest = singular_values.first().copied().unwrap_or(0.0);
    let mut bread = DMatrix::<f64>::zeros(p, p);
    let mut undetermined = vec![false; p];
    if let Some(v_t) = &svd.v_t {
        for (k, &sigma) in svd.singular_values.iter().enumerate() {
            let direction: DVector<f64> = v_t.row(k).transpose();
            if sigma > 1e-10 * largest {
                bread += (&direction * direction.transpose()) / (sigma * sigma);
            } else {
                for j in 0..p {
                    if direction[j].abs() > 1e-3 {
                        undetermined[j] = true;
                    }
                }
            }
        }
    }
    let mut meat = DMatrix::<f64>::zeros(p, p);
    let mut start = 0;
    for &len in parts {
        let rows = start..(start + len).min(residuals.len());
        start += len;
        let r = &residuals[rows.clone()];
        let scores: Vec<DVector<f64>> = rows
            .clone()
            .map(|i| jacobian.row(i).transpose() * residuals[i])
            .collect();
        if r.len() == 1 {
            let row: DVector<f64> = jacobian.row(rows.start).transpose();
            meat += (&row * row.transpose()) * r[0].powi(2).max(1.0);
            continue;
        }
        for g in &scores {
            meat += g * g.transpose();
        }
        let bandwidth = bartlett_bandwidth(r);
        for lag in 1..=bandwidth {
            let weight = 1.0 - lag as f64 / (bandwidth as f64 + 1.0);
            let mut gamma = DMatrix::<f64>::zeros(p, p);
            for t in 0..scores.len() - lag {
                gamma += &scores[t] * scores[t + lag].transpose();
            }
            meat += (&gamma + gamma.transpose()) * weight;
        }
    }
    let covariance = &bread * meat * &bread;
    (covariance, singular_values, undetermined)
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

/// trace(JᵀJ·C)/p, floored at 1: never narrower than the stated σ give. Residuals smaller than
/// σ (a curve fitted closer than its repeats scatter, a σ from three repeats that came out
/// large) do not make the parameters better known than σ says, so below 1 `covariance` is
/// scaled up to the trace 1. A trace that is not finite and positive counts as 1.
fn floor_at_stated_sigma(jacobian: &DMatrix<f64>, covariance: &mut DMatrix<f64>) -> f64 {
    let p = covariance.ncols().max(1) as f64;
    let trace = (jacobian.transpose() * jacobian * &*covariance).trace() / p;
    if !(trace.is_finite() && trace > 0.0) {
        return 1.0;
    }
    if trace < 1.0 {
        *covariance /= trace;
    }
    trace.max(1.0)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A straight line y = a + b·x fitted by least squares: J = [1, x] (the residuals are
    /// linear in a and b), e the residuals at the least-squares solution.
    fn line(x: &[f64], y: &[f64]) -> (DMatrix<f64>, Vec<f64>) {
        let n = x.len() as f64;
        let (mx, my) = (x.iter().sum::<f64>() / n, y.iter().sum::<f64>() / n);
        let sxx: f64 = x.iter().map(|x| (x - mx).powi(2)).sum();
        let sxy: f64 = x.iter().zip(y).map(|(x, y)| (x - mx) * (y - my)).sum();
        let slope = sxy / sxx;
        let intercept = my - slope * mx;
        let jacobian = DMatrix::from_fn(x.len(), 2, |i, j| if j == 0 { 1.0 } else { x[i] });
        let residuals = x
            .iter()
            .zip(y)
            .map(|(x, y)| intercept + slope * x - y)
            .collect();
        (jacobian, residuals)
    }

    #[test]
    fn independent_rows_give_whites_closed_form_for_a_straight_line() {
        // With every row its own part, M = Σ eᵢ²·xᵢxᵢᵀ and the sandwich is White's (1980)
        // heteroscedasticity-consistent covariance; for a straight line its slope variance is
        // Σ(xᵢ − x̄)²eᵢ²/Sxx² (e.g. Wooldridge, Introductory Econometrics, §8.2; quoted from
        // memory). The residuals here exceed 1, so max(1, e²) = e².
        let x = [0.0, 1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0];
        let y = [5.0, -3.0, 9.0, 1.0, 13.0, 5.0, 17.0, 9.0];
        let (jacobian, residuals) = line(&x, &y);
        assert!(residuals.iter().all(|e| e.abs() > 1.0));
        let (covariance, singular, undetermined) =
            sandwich_covariance(&jacobian, &residuals, &[1; 8]);
        let mx = x.iter().sum::<f64>() / 8.0;
        let sxx: f64 = x.iter().map(|x| (x - mx).powi(2)).sum();
        let expected: f64 = x
            .iter()
            .zip(&residuals)
            .map(|(x, e)| (x - mx).powi(2) * e * e)
            .sum::<f64>()
            / (sxx * sxx);
        assert!((covariance[(1, 1)] - expected).abs() < 1e-12 * expected);
        assert_eq!(singular.len(), 2);
        assert_eq!(undetermined, vec![false, false]);
    }

    #[test]
    fn unit_residuals_give_the_textbook_line_covariance() {
        // Rows of unit size and no lag: M = JᵀJ, so the covariance is (JᵀJ)⁻¹: the textbook
        // Var(b) = 1/Sxx, Var(a) = 1/n + x̄²/Sxx, Cov(a, b) = −x̄/Sxx for σ = 1 (any
        // regression text, e.g. Draper & Smith, Applied Regression Analysis, ch. 1).
        let x = [0.5, 1.0, 2.5, 3.0, 4.5, 6.0];
        let jacobian = DMatrix::from_fn(6, 2, |i, j| if j == 0 { 1.0 } else { x[i] });
        let residuals = [1.0, -1.0, 1.0, -1.0, 1.0, -1.0];
        let (covariance, ..) = sandwich_covariance(&jacobian, &residuals, &[1; 6]);
        let mx = x.iter().sum::<f64>() / 6.0;
        let sxx: f64 = x.iter().map(|x| (x - mx).powi(2)).sum();
        assert!((covariance[(1, 1)] - 1.0 / sxx).abs() < 1e-12);
        assert!((covariance[(0, 0)] - (1.0 / 6.0 + mx * mx / sxx)).abs() < 1e-12);
        assert!((covariance[(0, 1)] + mx / sxx).abs() < 1e-12);
    }

    #[test]
    fn residuals_smaller_than_sigma_do_not_narrow_the_interval_below_the_textbook_one() {
        // One curve part of residuals 0.1 where σ = 1 was stated: the sandwich alone would give a slope
        // variance 0.01/Sxx, a tenth of the textbook 1/Sxx (Draper & Smith, ch. 1); the floor
        // brings it back to 1/Sxx and reports the temperature 1.
        let x = [0.5, 1.0, 2.5, 3.0, 4.5, 6.0];
        let jacobian = DMatrix::from_fn(6, 2, |i, j| if j == 0 { 1.0 } else { x[i] });
        let residuals = [0.1, -0.1, 0.1, -0.1, 0.1, -0.1];
        let (mut covariance, ..) = sandwich_covariance(&jacobian, &residuals, &[6]);
        let mx = x.iter().sum::<f64>() / 6.0;
        let sxx: f64 = x.iter().map(|x| (x - mx).powi(2)).sum();
        assert!(
            covariance[(1, 1)] < 0.5 / sxx,
            "{}",
            covariance[(1, 1)] * sxx
        );
        let temperature = floor_at_stated_sigma(&jacobian, &mut covariance);
        assert_eq!(temperature, 1.0);
        assert!(
            (covariance[(1, 1)] * sxx - 1.0).abs() < 0.5,
            "{}",
            covariance[(1, 1)] * sxx
        );
        // Residuals larger than σ are kept as they are.
        let (mut wide, ..) =
            sandwich_covariance(&jacobian, &[3.0, -3.0, 3.0, -3.0, 3.0, -3.0], &[6]);
        let before = wide[(1, 1)];
        assert!(floor_at_stated_sigma(&jacobian, &mut wide) > 1.0);
        assert_eq!(wide[(1, 1)], before);
    }

    #[test]
    fn a_lasting_misfit_widens_the_interval_a_white_one_does_not() {
        // The mean of n rows (J = 1): with independent residuals of size s the variance of the
        // mean is s²/n; when the same residuals are sorted into one long run of one sign (a
        // misfit that lasts) the kernel sees the correlation and the variance grows toward
        // (Σe)²-like values, by a factor of order the run length (Newey & West 1987).
        let n = 400;
        let jacobian = DMatrix::from_element(n, 1, 1.0);
        let alternating: Vec<f64> = (0..n)
            .map(|i| if i % 2 == 0 { 2.0 } else { -2.0 })
            .collect();
        let (white, ..) = sandwich_covariance(&jacobian, &alternating, &[n]);
        let mut lasting = alternating.clone();
        lasting.sort_by(f64::total_cmp);
        let (correlated, ..) = sandwich_covariance(&jacobian, &lasting, &[n]);
        // Alternating signs: negative lag-one correlation, the kernel can only shrink M.
        assert!(white[(0, 0)] <= 4.0 / n as f64 + 1e-12);
        assert!(
            correlated[(0, 0)] > 20.0 * 4.0 / n as f64,
            "{}",
            correlated[(0, 0)]
        );
    }

    #[test]
    fn a_direction_the_data_cannot_see_is_undetermined() {
        // Two identical columns: only their sum is determined.
        let jacobian = DMatrix::from_fn(5, 2, |i, _| i as f64 + 1.0);
        let (_, singular, undetermined) = sandwich_covariance(&jacobian, &[1.0; 5], &[1; 5]);
        assert!(singular[1] < 1e-10 * singular[0]);
        assert_eq!(undetermined, vec![true, true]);
    }

    #[test]
    fn the_bandwidth_follows_the_correlation() {
        let white: Vec<f64> = (0..1000)
            .map(|i| if i % 2 == 0 { 1.0 } else { -1.0 })
            .collect();
        let smooth: Vec<f64> = (0..1000).map(|i| (i as f64 / 80.0).sin()).collect();
        // ρ = −0.999 → α ≈ 4/(4·1e-6)... clamped, but alternating signs have ρ < 0: a short
        // kernel is not asked for by positive correlation; a slow sine (ρ ≈ 0.9999) asks for
        // the longest.
        assert!(bartlett_bandwidth(&smooth) > 200);
        assert!(bartlett_bandwidth(&white) <= bartlett_bandwidth(&smooth));
        assert_eq!(bartlett_bandwidth(&[1.0, 2.0]), 0);
    }
}
