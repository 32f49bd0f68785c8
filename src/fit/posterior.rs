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
//! After every step the caller is shown the whole [`SamplerState`] (walkers, chain so far,
//! counts and the random stream's position); continued from it, the sample ends in the same
//! bits as one drawn without a break.

use std::time::Instant;

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
    /// A state to continue from that does not fit the settings (walkers, dimensions, counts).
    #[error("the posterior sample cannot continue from its saved state: {0}")]
    State(String),
}

/// Where the sampler stands after a step, all in fit space: from it, [`sample`] continues to
/// the same bits as a sample drawn without a break. Written to disk by `run::posterior`.
#[derive(Debug, Clone, PartialEq)]
pub struct SamplerState {
    /// Steps completed, burn-in included.
    pub step: usize,
    /// Every walker's position and cost (Σ r² as in [`Posterior::costs`]).
    pub positions: Vec<Vec<f64>>,
    pub costs: Vec<f64>,
    /// The points kept so far (after burn-in), walker by walker within a step, and their costs.
    pub samples: Vec<Vec<f64>>,
    pub kept_costs: Vec<f64>,
    /// Moves accepted and proposed after burn-in.
    pub accepted: usize,
    pub proposed: usize,
    /// Lowest cost met and where.
    pub lowest_cost: f64,
    pub lowest_point: Vec<f64>,
    /// Words drawn from the ChaCha8 stream seeded by `PosteriorSettings::seed`.
    pub rng_word_pos: u128,
    /// Seconds spent sampling so far, over every process that worked on this sample.
    pub elapsed_s: f64,
}

impl SamplerState {
    /// Fraction of moves accepted after burn-in; NaN before the first.
    pub fn acceptance(&self) -> f64 {
        if self.proposed > 0 {
            self.accepted as f64 / self.proposed as f64
        } else {
            f64::NAN
        }
    }

    /// Why this state cannot be continued with `settings` in `p` dimensions, if it cannot.
    fn check(&self, settings: &PosteriorSettings, walkers: usize, p: usize) -> Result<(), String> {
        let kept_steps = self.step.saturating_sub(settings.burn_in);
        let problem = if self.step > settings.steps {
            format!("it is at step {} of {}", self.step, settings.steps)
        } else if self.positions.len() != walkers || self.costs.len() != walkers {
            format!(
                "it has {} walkers, the settings {walkers}",
                self.positions.len()
            )
        } else if self
            .positions
            .iter()
            .chain(&self.samples)
            .chain(std::iter::once(&self.lowest_point))
            .any(|x| x.len() != p)
        {
            format!("a point does not have the {p} parameters")
        } else if self.samples.len() != kept_steps * walkers
            || self.kept_costs.len() != self.samples.len()
        {
            format!(
                "it holds {} kept points, and {kept_steps} steps after burn-in of {walkers} \
                 walkers make {}",
                self.samples.len(),
                kept_steps * walkers
            )
        } else if self.accepted > self.proposed {
            "more moves accepted than proposed".to_string()
        } else {
            return Ok(());
        };
        Err(problem)
    }
}

/// Told after every step; returns false to end the sample there (a stop request). The
/// sample's length, `PosteriorSettings::steps`, is the caller's.
pub type StepReport<'a> = dyn FnMut(&SamplerState) -> bool + 'a;

/// Samples the posterior of `objective` from a start around `best` (file units) spread by
/// `covariance` (fit space, p × p; non-finite or zero variances start at a tenth of the
/// range), each half-step's proposals evaluated as one batch by `evaluator`; or continues
/// from `resume`, a state `report` was shown by a sample of the same objective, start and
/// settings.
#[allow(clippy::too_many_arguments)]
pub fn sample<M: Model, E: Evaluator>(
    objective: &Objective<'_, M>,
    evaluator: &E,
    best: &[f64],
    covariance: &[Vec<f64>],
    temperature: f64,
    settings: &PosteriorSettings,
    resume: Option<SamplerState>,
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
        resume,
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
    resume: Option<SamplerState>,
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
    let mut rng = ChaCha8Rng::seed_from_u64(settings.seed);
    let log_density = |cost: f64| -> f64 {
        if cost.is_finite() && cost < super::objective::FAILED_SIMULATION_PENALTY {
            -0.5 * cost / temperature
        } else {
            f64::NEG_INFINITY
        }
    };
    let clock = Instant::now();
    let mut state = match resume {
        Some(state) => {
            state
                .check(settings, walkers, p)
                .map_err(PosteriorError::State)?;
            rng.set_word_pos(state.rng_word_pos);
            state
        }
        None => start_state(
            &centre,
            &start_spread(covariance, lower, upper),
            (lower, upper),
            walkers,
            &mut rng,
            &log_density,
            costs_of,
        )?,
    };
    let elapsed_before_s = state.elapsed_s;
    let half = walkers / 2;
    while state.step < settings.steps {
        let step = state.step;
        let positions = &mut state.positions;
        let costs = &mut state.costs;
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
                    state.proposed += 1;
                }
                if log_ratio.is_finite() && u.ln() < log_ratio {
                    positions[k] = proposals[i].clone();
                    costs[k] = new_cost[i];
                    if step >= settings.burn_in {
                        state.accepted += 1;
                    }
                    if costs[k] < state.lowest_cost {
                        state.lowest_cost = costs[k];
                        state.lowest_point = positions[k].clone();
                    }
                }
            }
        }
        if step >= settings.burn_in {
            state.samples.extend(positions.iter().cloned());
            state.kept_costs.extend(costs.iter().copied());
        }
        state.step = step + 1;
        state.rng_word_pos = rng.get_word_pos();
        state.elapsed_s = elapsed_before_s + clock.elapsed().as_secs_f64();
        if !report(&state) {
            break;
        }
    }
    Ok(Posterior {
        names: space.names.clone(),
        acceptance: state.acceptance(),
        samples: state.samples,
        costs: state.kept_costs,
        temperature,
        walkers,
        steps: state.step,
        burn_in: settings.burn_in,
        lowest_cost: state.lowest_cost,
        lowest_cost_values: state.lowest_point,
        stopped: state.step < settings.steps,
    })
}

/// The sampler's start: the best point and draws about it spread by `spread`, each inside the
/// bounds, and their costs; a walker whose start fails begins at the best point.
fn start_state(
    centre: &[f64],
    spread: &DMatrix<f64>,
    (lower, upper): (&[f64], &[f64]),
    walkers: usize,
    rng: &mut ChaCha8Rng,
    log_density: &dyn Fn(f64) -> f64,
    costs_of: &mut BatchCost<'_>,
) -> Result<SamplerState, PosteriorError> {
    let p = centre.len();
    let mut positions: Vec<Vec<f64>> = (0..walkers)
        .map(|k| {
            if k == 0 {
                return centre.to_vec();
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
            positions[k] = centre.to_vec();
            costs[k] = costs[0];
        }
    }
    Ok(SamplerState {
        step: 0,
        lowest_cost: costs[0],
        lowest_point: centre.to_vec(),
        positions,
        costs,
        samples: Vec::new(),
        kept_costs: Vec::new(),
        accepted: 0,
        proposed: 0,
        rng_word_pos: rng.get_word_pos(),
        elapsed_s: 0.0,
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
        for temperature in [1.0, 4.0] {
            let posterior = sample_in_fit_space(
                &space,
                &[0.5, -0.5],
                &[vec![0.1, 0.0], vec![0.0, 0.1]],
                temperature,
                &settings,
                None,
                &mut |points| gaussian(points, inverse),
                &mut |_| true,
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
        let run = || {
            sample_in_fit_space(
                &space,
                &[0.5, 0.5],
                &[vec![0.01, 0.0], vec![0.0, 0.01]],
                1.0,
                &settings,
                None,
                &mut |points| points.iter().map(|_| (0.0, None)).collect(),
                &mut |_| true,
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
            None,
            &mut |points| points.iter().map(|x| (x[0] * x[0], None)).collect(),
            &mut |state| state.step != 10,
        )
        .unwrap();
        assert!(posterior.stopped);
        assert_eq!(posterior.steps, 10);
        assert_eq!(posterior.samples.len(), 5 * posterior.walkers);
    }

    /// A sample stopped at any step and continued from the state it was shown ends in the same
    /// bits as one drawn without a break (the property `fit --resume` relies on), through the
    /// burn-in's end and the random stream's 64-word block boundaries alike.
    #[test]
    fn a_sample_continued_from_a_saved_state_equals_one_drawn_without_a_break() {
        let (s1, s2, rho) = (1.0f64, 0.5f64, -0.6f64);
        let det = s1 * s1 * s2 * s2 * (1.0 - rho * rho);
        let inverse = [
            [s2 * s2 / det, -rho * s1 * s2 / det],
            [-rho * s1 * s2 / det, s1 * s1 / det],
        ];
        let space = FitSpace {
            names: vec!["a".into(), "b".into()],
            lower: vec![-3.0, -3.0],
            upper: vec![3.0, 3.0],
        };
        let settings = PosteriorSettings {
            walkers: 6,
            steps: 60,
            burn_in: 20,
            seed: 11,
        };
        let run = |resume: Option<SamplerState>, stop_at: usize| {
            let mut saved = None;
            let posterior = sample_in_fit_space(
                &space,
                &[0.2, 0.1],
                &[vec![0.04, 0.0], vec![0.0, 0.04]],
                2.0,
                &settings,
                resume,
                &mut |points| gaussian(points, inverse),
                &mut |state| {
                    saved = Some(state.clone());
                    state.step != stop_at
                },
            )
            .unwrap();
            (posterior, saved)
        };
        let (whole, _) = run(None, usize::MAX);
        assert!(!whole.stopped);
        assert_eq!(whole.samples.len(), 40 * whole.walkers);
        for stop_at in [1, 19, 20, 21, 37, 59] {
            let (part, saved) = run(None, stop_at);
            assert!(part.stopped, "{stop_at}");
            let saved = saved.expect("a state after the first step");
            assert_eq!(saved.step, stop_at);
            let (continued, _) = run(Some(saved), usize::MAX);
            assert_eq!(continued.steps, whole.steps);
            assert_eq!(continued.samples, whole.samples, "stopped at {stop_at}");
            assert_eq!(continued, whole, "stopped at {stop_at}");
        }
        // A state that does not fit the settings is refused, not sampled on.
        let (_, saved) = run(None, 30);
        let mut wrong = saved.unwrap();
        wrong.samples.pop();
        assert!(matches!(
            sample_in_fit_space(
                &space,
                &[0.2, 0.1],
                &[vec![0.04, 0.0], vec![0.0, 0.04]],
                2.0,
                &settings,
                Some(wrong),
                &mut |points| gaussian(points, inverse),
                &mut |_| true,
            ),
            Err(PosteriorError::State(_))
        ));
    }
}
