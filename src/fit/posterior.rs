//! A posterior sample of the parameters by the affine-invariant ensemble sampler ("stretch
//! move", Goodman & Weare, Comm. App. Math. Comp. Sci. 5 (2010) 65; the split into two halves
//! updated in turn is that of Foreman-Mackey et al., PASP 125 (2013) 306, so that each half's
//! proposals are one batch for the evaluator).
//!
//! Where the linearised covariance describes an ellipsoid at the optimum, the sample follows
//! the objective where it bends: a long curved valley (a fit at one irradiance cannot tell the
//! thermal inertia from the ignition temperature), bounds, parameters that only matter
//! together. The density, in fit space (the value, or log10 of it) and uniform inside the
//! bounds, is exp(−(data cost/T + prior cost)/2), the costs Σ r² of the objective. T is the
//! likelihood's temperature: the ratio of the sandwich covariance to (JᵀJ)⁻¹,
//! trace(JᵀJ·C)/p (`Identifiability::likelihood_temperature`), so that the residuals'
//! correlation and the misfit they show widen the sample as they widen the intervals, and a σ
//! stated larger than the residuals are (T < 1) narrows it as it narrows them (a
//! magnitude adjustment of the likelihood in the manner of Chandler & Bate, Biometrika 94
//! (2007) 167; quoted from memory).
//!
//! Deterministic: the same objective, start, seed and settings give the same sample on any
//! number of threads or ranks (the random numbers are drawn on the calling thread, in order).

use std::sync::atomic::{AtomicBool, Ordering};

use nalgebra::{DMatrix, DVector, SymmetricEigen};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::StandardNormal;
use serde::{Deserialize, Serialize};

use super::evaluator::{Costs, Evaluator};
use super::model::Model;
use super::objective::Objective;

/// Stretch scale of the move (the value Goodman & Weare recommend).
const STRETCH: f64 = 2.0;

/// How long to sample.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct PosteriorSettings {
    /// Walkers (even; at least 2·p + 2 are used).
    pub walkers: usize,
    /// Steps of every walker, burn-in included.
    pub steps: usize,
    /// Steps dropped at the start.
    pub burn_in: usize,
    pub seed: u64,
}

/// The sample and what to know about it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Posterior {
    /// Parameter names, in job order.
    pub names: Vec<String>,
    /// Kept points after burn-in, file units, walker by walker within a step.
    pub samples: Vec<Vec<f64>>,
    /// Cost of every kept point: Σ r², the priors' part times the temperature (so that
    /// cost/T tempers the data only); the objective's own cost without priors.
    pub costs: Vec<f64>,
    /// Fraction of proposals accepted after burn-in (0.2–0.5 is healthy for this move).
    pub acceptance: f64,
    pub temperature: f64,
    pub walkers: usize,
    /// Steps actually taken (fewer than asked when stopped).
    pub steps: usize,
    pub burn_in: usize,
    /// Lowest cost met (when below the optimiser's best, the optimiser had not converged).
    pub lowest_cost: f64,
    pub lowest_cost_values: Vec<f64>,
    /// Set when a stop request cut the sampling short.
    pub stopped: bool,
}

impl Posterior {
    /// The `q` quantile (0–1) of parameter `index` over the kept points (linear between order
    /// statistics); NaN when nothing was kept.
    pub fn quantile(&self, index: usize, q: f64) -> f64 {
        let mut values: Vec<f64> = self.samples.iter().map(|s| s[index]).collect();
        quantile_of(&mut values, q)
    }
}

/// The `q` quantile of `values` (sorted in place), linear between order statistics.
pub fn quantile_of(values: &mut [f64], q: f64) -> f64 {
    if values.is_empty() {
        return f64::NAN;
    }
    values.sort_by(f64::total_cmp);
    let at = q.clamp(0.0, 1.0) * (values.len() - 1) as f64;
    let (low, high) = (at.floor() as usize, at.ceil() as usize);
    values[low] + (values[high] - values[low]) * (at - low as f64)
}

#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum PosteriorError {
    #[error("the posterior sample needs burn_in ({burn_in}) below steps ({steps})")]
    Settings { steps: usize, burn_in: usize },
    #[error("no starting point of the posterior sample could be simulated: {0}")]
    NoStart(String),
}

/// What the caller is told after every step: (step, steps, acceptance so far).
pub type StepReport<'a> = dyn FnMut(usize, usize, f64) + 'a;

/// Samples the posterior of `objective` from a start around `best` (file units) spread by
/// `covariance` (fit space, p × p; non-finite or zero variances start at a tenth of the
/// range), each half-step's proposals evaluated as one batch by `evaluator`.
#[allow(clippy::too_many_arguments)]
pub fn sample<M: Model, E: Evaluator>(
    objective: &Objective<'_, M>,
    evaluator: &E,
    best: &[f64],
    covariance: &[Vec<f64>],
    temperature: f64,
    settings: &PosteriorSettings,
    stop: &AtomicBool,
    report: &mut StepReport<'_>,
) -> Result<Posterior, PosteriorError> {
    let parameters = objective.parameters();
    let space = FitSpace {
        names: parameters.iter().map(|q| q.name.clone()).collect(),
        lower: parameters.iter().map(|q| q.to_fit_space(q.lower)).collect(),
        upper: parameters.iter().map(|q| q.to_fit_space(q.upper)).collect(),
    };
    let to_values = |x: &[f64]| -> Vec<f64> {
        parameters
            .iter()
            .zip(x)
            .map(|(q, &c)| q.from_fit_space(c))
            .collect()
    };
    let centre: Vec<f64> = parameters
        .iter()
        .zip(best)
        .map(|(q, &v)| q.to_fit_space(v))
        .collect();
    let temperature = if temperature.is_finite() && temperature > 0.0 {
        temperature
    } else {
        1.0
    };
    let mut costs = |points: &[Vec<f64>]| -> Vec<(f64, Option<String>)> {
        let values: Vec<Vec<f64>> = points.iter().map(|x| to_values(x)).collect();
        evaluator
            .evaluate(&Costs(objective), &values)
            .into_iter()
            // The priors are not tempered: cost/T = data/T + priors.
            .map(|e| (e.cost + e.prior_cost * (temperature - 1.0), e.failure))
            .collect()
    };
    let mut posterior = sample_in_fit_space(
        &space,
        &centre,
        covariance,
        temperature,
        settings,
        stop,
        &mut costs,
        report,
    )?;
    for point in posterior
        .samples
        .iter_mut()
        .chain(std::iter::once(&mut posterior.lowest_cost_values))
    {
        *point = to_values(point);
    }
    Ok(posterior)
}

/// Names and bounds of the parameters in fit space.
pub struct FitSpace {
    pub names: Vec<String>,
    pub lower: Vec<f64>,
    pub upper: Vec<f64>,
}

/// Costs (Σ r²) of a batch of fit-space points, with the reason where one failed.
pub type BatchCost<'a> = dyn FnMut(&[Vec<f64>]) -> Vec<(f64, Option<String>)> + 'a;

/// The sampler on a density given by `costs` in fit space; the sample's points are fit-space
/// coordinates. `sample` is this with the objective's costs.
#[allow(clippy::too_many_arguments)]
pub fn sample_in_fit_space(
    space: &FitSpace,
    centre: &[f64],
    covariance: &[Vec<f64>],
    temperature: f64,
    settings: &PosteriorSettings,
    stop: &AtomicBool,
    costs_of: &mut BatchCost<'_>,
    report: &mut StepReport<'_>,
) -> Result<Posterior, PosteriorError> {
    if settings.burn_in >= settings.steps {
        return Err(PosteriorError::Settings {
            steps: settings.steps,
            burn_in: settings.burn_in,
        });
    }
    let (lower, upper) = (&space.lower, &space.upper);
    let p = lower.len();
    let centre = centre.to_vec();
    let walkers = {
        let w = settings.walkers.max(2 * p + 2);
        w + w % 2
    };
    let temperature = if temperature.is_finite() && temperature > 0.0 {
        temperature
    } else {
        1.0
    };
    let spread = start_spread(covariance, lower, upper);
    let mut rng = ChaCha8Rng::seed_from_u64(settings.seed);
    let log_density = |cost: f64| -> f64 {
        if cost.is_finite() && cost < super::objective::FAILED_SIMULATION_PENALTY {
            -0.5 * cost / temperature
        } else {
            f64::NEG_INFINITY
        }
    };
    // The start: the best point and draws about it, each inside the bounds.
    let mut positions: Vec<Vec<f64>> = (0..walkers)
        .map(|k| {
            if k == 0 {
                return centre.clone();
            }
            let xi: Vec<f64> = (0..p).map(|_| rng.sample(StandardNormal)).collect();
            let mut scale = 1.0;
            loop {
                let x: Vec<f64> = (0..p)
                    .map(|i| {
                        centre[i] + scale * (0..p).map(|j| spread[(i, j)] * xi[j]).sum::<f64>()
                    })
                    .collect();
                if inside(&x, lower, upper) || scale < 1e-6 {
                    break x
                        .iter()
                        .enumerate()
                        .map(|(i, &c)| c.clamp(lower[i], upper[i]))
                        .collect();
                }
                scale *= 0.5;
            }
        })
        .collect();
    let start = costs_of(&positions);
    let mut costs: Vec<f64> = start.iter().map(|e| e.0).collect();
    if !log_density(costs[0]).is_finite() {
        return Err(PosteriorError::NoStart(
            start[0]
                .1
                .clone()
                .unwrap_or_else(|| "the best point failed".into()),
        ));
    }
    // A walker whose start failed begins at the best point (the stretch moves it off).
    for k in 0..walkers {
        if !log_density(costs[k]).is_finite() {
            positions[k] = centre.clone();
            costs[k] = costs[0];
        }
    }
    let mut lowest = (costs[0], centre.clone());
    let (mut samples, mut kept_costs) = (Vec::new(), Vec::new());
    let (mut accepted, mut proposed) = (0usize, 0usize);
    let mut steps_taken = 0;
    let half = walkers / 2;
    for step in 0..settings.steps {
        if stop.load(Ordering::Relaxed) {
            break;
        }
        for first in [true, false] {
            let (moving, others) = if first {
                (0..half, half..walkers)
            } else {
                (half..walkers, 0..half)
            };
            let mut proposals = Vec::with_capacity(half);
            let mut stretches = Vec::with_capacity(half);
            for k in moving.clone() {
                let j = others.start + rng.gen_range(0..others.len());
                let u: f64 = rng.gen();
                let z = ((STRETCH - 1.0) * u + 1.0).powi(2) / STRETCH;
                let y: Vec<f64> = (0..p)
                    .map(|i| positions[j][i] + z * (positions[k][i] - positions[j][i]))
                    .collect();
                proposals.push(y);
                stretches.push(z);
            }
            let (points, indices): (Vec<Vec<f64>>, Vec<usize>) = proposals
                .iter()
                .enumerate()
                .filter(|(_, y)| inside(y, lower, upper))
                .map(|(i, y)| (y.clone(), i))
                .unzip();
            let results = if points.is_empty() {
                Vec::new()
            } else {
                costs_of(&points)
            };
            let mut new_cost = vec![f64::INFINITY; half];
            for (i, (cost, _)) in indices.into_iter().zip(results) {
                new_cost[i] = cost;
            }
            for (i, k) in moving.enumerate() {
                let u: f64 = rng.gen();
                let log_ratio = (p as f64 - 1.0) * stretches[i].ln() + log_density(new_cost[i])
                    - log_density(costs[k]);
                if step >= settings.burn_in {
                    proposed += 1;
                }
                if log_ratio.is_finite() && u.ln() < log_ratio {
                    positions[k] = proposals[i].clone();
                    costs[k] = new_cost[i];
                    if step >= settings.burn_in {
                        accepted += 1;
                    }
                    if costs[k] < lowest.0 {
                        lowest = (costs[k], positions[k].clone());
                    }
                }
            }
        }
        steps_taken = step + 1;
        if step >= settings.burn_in {
            for k in 0..walkers {
                samples.push(positions[k].clone());
                kept_costs.push(costs[k]);
            }
        }
        let acceptance = if proposed > 0 {
            accepted as f64 / proposed as f64
        } else {
            f64::NAN
        };
        report(step + 1, settings.steps, acceptance);
    }
    Ok(Posterior {
        names: space.names.clone(),
        samples,
        costs: kept_costs,
        acceptance: if proposed > 0 {
            accepted as f64 / proposed as f64
        } else {
            f64::NAN
        },
        temperature,
        walkers,
        steps: steps_taken,
        burn_in: settings.burn_in,
        lowest_cost: lowest.0,
        lowest_cost_values: lowest.1,
        stopped: steps_taken < settings.steps,
    })
}

fn inside(x: &[f64], lower: &[f64], upper: &[f64]) -> bool {
    x.iter()
        .zip(lower.iter().zip(upper))
        .all(|(&c, (&l, &u))| c >= l && c <= u)
}

/// A square root S (S·Sᵀ = C) of the start's spread: the covariance's eigen-decomposition
/// with negative eigenvalues set to zero; a parameter with a non-finite or zero variance gets
/// a tenth of its range, uncorrelated.
fn start_spread(covariance: &[Vec<f64>], lower: &[f64], upper: &[f64]) -> DMatrix<f64> {
    let p = lower.len();
    let usable = |i: usize| {
        covariance
            .get(i)
            .and_then(|row| row.get(i))
            .is_some_and(|v| v.is_finite() && *v > 0.0)
    };
    let mut c = DMatrix::<f64>::zeros(p, p);
    for i in 0..p {
        for j in 0..p {
            if usable(i) && usable(j) {
                c[(i, j)] = covariance[i][j];
            }
        }
        if !usable(i) {
            let range = upper[i] - lower[i];
            c[(i, i)] = if range.is_finite() {
                (0.1 * range).powi(2)
            } else {
                1.0
            };
        }
    }
    let eigen = SymmetricEigen::new(c);
    let roots = DVector::from_iterator(p, eigen.eigenvalues.iter().map(|v| v.max(0.0).sqrt()));
    &eigen.eigenvectors * DMatrix::from_diagonal(&roots)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Cost of a correlated two-dimensional normal: xᵀ·A·x with A the inverse covariance.
    fn gaussian(points: &[Vec<f64>], inverse: [[f64; 2]; 2]) -> Vec<(f64, Option<String>)> {
        points
            .iter()
            .map(|x| {
                let q = (0..2)
                    .map(|i| (0..2).map(|j| x[i] * inverse[i][j] * x[j]).sum::<f64>())
                    .sum::<f64>();
                (q, None)
            })
            .collect()
    }

    #[test]
    fn a_correlated_normal_is_sampled_with_its_quantiles() {
        // Covariance [[1, 0.9·2], [0.9·2, 4]] (sd 1 and 2, correlation 0.9): the 2.5 and 97.5 %
        // quantiles of the margins are ∓1.96 and ∓3.92 (the normal distribution), and at
        // temperature T the sample is that of the covariance × T.
        let (s1, s2, rho) = (1.0f64, 2.0f64, 0.9f64);
        let det = s1 * s1 * s2 * s2 * (1.0 - rho * rho);
        let inverse = [
            [s2 * s2 / det, -rho * s1 * s2 / det],
            [-rho * s1 * s2 / det, s1 * s1 / det],
        ];
        let space = FitSpace {
            names: vec!["a".into(), "b".into()],
            lower: vec![-50.0, -50.0],
            upper: vec![50.0, 50.0],
        };
        let settings = PosteriorSettings {
            walkers: 32,
            steps: 2500,
            burn_in: 300,
            seed: 7,
        };
        let no = AtomicBool::new(false);
        for temperature in [1.0, 4.0] {
            let posterior = sample_in_fit_space(
                &space,
                &[0.5, -0.5],
                &[vec![0.1, 0.0], vec![0.0, 0.1]],
                temperature,
                &settings,
                &no,
                &mut |points| gaussian(points, inverse),
                &mut |_, _, _| {},
            )
            .unwrap();
            let t = temperature.sqrt();
            for (index, sd) in [(0, s1), (1, s2)] {
                let (low, high) = (
                    posterior.quantile(index, 0.025),
                    posterior.quantile(index, 0.975),
                );
                // Monte Carlo error of a tail quantile from ~70 000 correlated points: a few %.
                assert!((low + 1.96 * sd * t).abs() < 0.12 * sd * t, "{index} {low}");
                assert!(
                    (high - 1.96 * sd * t).abs() < 0.12 * sd * t,
                    "{index} {high}"
                );
            }
            assert!(
                posterior.acceptance > 0.2 && posterior.acceptance < 0.9,
                "{}",
                posterior.acceptance
            );
        }
    }

    #[test]
    fn bounds_hold_and_the_same_seed_gives_the_same_sample() {
        // A flat density inside [0, 1]²: the sample is uniform, so its 2.5 and 97.5 %
        // quantiles are 0.025 and 0.975, and no point leaves the box.
        let space = FitSpace {
            names: vec!["a".into(), "b".into()],
            lower: vec![0.0, 0.0],
            upper: vec![1.0, 1.0],
        };
        let settings = PosteriorSettings {
            walkers: 16,
            steps: 1500,
            burn_in: 200,
            seed: 3,
        };
        let no = AtomicBool::new(false);
        let run = || {
            sample_in_fit_space(
                &space,
                &[0.5, 0.5],
                &[vec![0.01, 0.0], vec![0.0, 0.01]],
                1.0,
                &settings,
                &no,
                &mut |points| points.iter().map(|_| (0.0, None)).collect(),
                &mut |_, _, _| {},
            )
            .unwrap()
        };
        let (a, b) = (run(), run());
        assert_eq!(a, b);
        assert!(a
            .samples
            .iter()
            .flatten()
            .all(|&x| (0.0..=1.0).contains(&x)));
        assert!((a.quantile(0, 0.025) - 0.025).abs() < 0.02);
        assert!((a.quantile(1, 0.975) - 0.975).abs() < 0.02);
    }

    #[test]
    fn a_stop_request_ends_the_sample_early_and_says_so() {
        let space = FitSpace {
            names: vec!["a".into()],
            lower: vec![-1.0],
            upper: vec![1.0],
        };
        let stop = AtomicBool::new(false);
        let settings = PosteriorSettings {
            walkers: 4,
            steps: 100,
            burn_in: 5,
            seed: 1,
        };
        let posterior = sample_in_fit_space(
            &space,
            &[0.0],
            &[vec![0.01]],
            1.0,
            &settings,
            &stop,
            &mut |points| points.iter().map(|x| (x[0] * x[0], None)).collect(),
            &mut |step, _, _| {
                if step == 10 {
                    stop.store(true, Ordering::Relaxed);
                }
            },
        )
        .unwrap();
        assert!(posterior.stopped);
        assert_eq!(posterior.steps, 10);
        assert_eq!(posterior.samples.len(), 5 * posterior.walkers);
    }
}
