//! The optimiser: a global differential-evolution search (DE/rand-to-best/1/bin, population
//! evaluated in parallel with rayon), then a local Nelder–Mead refinement (argmin) of the best
//! member. Works in the unit cube of the free parameters (linear or log per parameter).
//!
//! Determinism: every generation draws from a ChaCha8 generator seeded by (seed, generation),
//! and the evaluator (`super::evaluator`: this process's threads, or the ranks of an MPI job)
//! returns results in population order, so neither thread nor rank timing ever picks the
//! winner and a run resumed from a checkpoint continues exactly as an uninterrupted one would.
//! The engine writes nothing itself: it reports to an `Observer`.
//! Why DE and not argmin's particle swarm: see docs/fit-jobs.md, "Choice of optimiser".

use std::sync::Mutex;
use std::time::Instant;

use argmin::core::{CostFunction, Executor};
use argmin::solver::neldermead::NelderMead;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

use super::evaluator::{Costs, Evaluator, Local};
use super::model::Model;
use super::objective::{Evaluation, Objective};
use super::parameters::FreeParameter;

/// Crossover probability of DE, a common choice (Storn & Price, J. Global Optim. 11 (1997)
/// 341–359, recommend 0.9 for non-separable problems).
const CROSSOVER_PROBABILITY: f64 = 0.9;
/// Range of the dithered DE scale factor F, drawn once per generation.
const SCALE_FACTOR_RANGE: (f64, f64) = (0.5, 0.9);
/// Relative improvement of the best cost below which a generation counts as stagnant.
const STAGNATION_RELATIVE_IMPROVEMENT: f64 = 1e-6;

/// Settings the engine needs (from the job's `[settings]` and the command line).
#[derive(Debug, Clone, PartialEq)]
pub struct EngineSettings {
    pub population: usize,
    pub max_evaluations: u64,
    pub time_budget_s: Option<f64>,
    pub target_objective: f64,
    pub stagnation_generations: u64,
    pub seed: u64,
    pub local_refinement: bool,
    pub local_max_evaluations: u64,
    /// Nelder–Mead runs from this many distinct good points of the final population (the
    /// global best first); 1 refines the global best alone.
    pub local_starts: usize,
}

impl EngineSettings {
    /// The population size for `n_params` free parameters: as set, or 10 per parameter (at
    /// least 16), a usual DE rule of thumb (Storn & Price 1997).
    pub fn population_for(&self, n_params: usize) -> usize {
        if self.population > 0 {
            self.population.max(4)
        } else {
            (10 * n_params).max(16)
        }
    }
}

/// Which stage the run is in.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Phase {
    Global,
    Local,
    Done,
}

/// Everything needed to continue a run exactly: written to the checkpoint after every
/// generation and at every change of phase (its file format is `run::checkpoint`'s).
#[derive(Debug, Clone, PartialEq)]
pub struct EngineState {
    pub phase: Phase,
    /// Completed generations (global) plus local iterations reported.
    pub iteration: u64,
    pub generation: u64,
    pub evaluations: u64,
    /// Wall-clock seconds spent before this process took over.
    pub elapsed_s: f64,
    /// Population in the unit cube, and each member's cost.
    pub population: Vec<Vec<f64>>,
    pub costs: Vec<f64>,
    pub generations_since_improvement: u64,
    /// Best point (unit cube) and cost so far.
    pub best_unit: Vec<f64>,
    pub best_cost: f64,
    /// The best point when the global stage ended: the local stage always starts here, so a
    /// run resumed during the local stage repeats it exactly.
    pub global_best: Option<(Vec<f64>, f64)>,
    /// Why the run stopped, once it has.
    pub stop_reason: Option<String>,
}

/// One line of progress.
#[derive(Debug, Clone)]
pub struct IterationReport<'a> {
    pub iteration: u64,
    pub phase: Phase,
    pub evaluations: u64,
    pub elapsed_s: f64,
    pub best_values: Vec<f64>,
    pub best: &'a Evaluation,
}

/// Receives the engine's progress; the run directory writer and the tests implement it.
pub trait Observer {
    fn iteration(&mut self, report: &IterationReport<'_>);
    fn checkpoint(&mut self, state: &EngineState);
    /// A candidate could not be simulated (it was given the penalty cost).
    fn failure(&mut self, message: &str);
    /// Polled between generations and evaluations: true asks the engine to stop cleanly.
    fn should_stop(&mut self) -> bool {
        false
    }
}

/// The result of a run.
#[derive(Debug, Clone)]
pub struct Outcome {
    pub best_values: Vec<f64>,
    pub best_unit: Vec<f64>,
    pub best: Evaluation,
    pub state: EngineState,
}

fn values_of(parameters: &[FreeParameter], unit: &[f64]) -> Vec<f64> {
    parameters
        .iter()
        .zip(unit)
        .map(|(p, &u)| p.from_unit(u))
        .collect()
}

/// A fresh state: a Latin-hypercube population with the start values as its first member.
pub fn initial_state(parameters: &[FreeParameter], settings: &EngineSettings) -> EngineState {
    let n = settings.population_for(parameters.len());
    let mut rng = ChaCha8Rng::seed_from_u64(settings.seed);
    let mut population: Vec<Vec<f64>> = (0..n).map(|_| vec![0.0; parameters.len()]).collect();
    for dim in 0..parameters.len() {
        let mut strata: Vec<usize> = (0..n).collect();
        for i in (1..n).rev() {
            strata.swap(i, rng.gen_range(0..=i));
        }
        for (member, stratum) in population.iter_mut().zip(&strata) {
            member[dim] = (*stratum as f64 + rng.gen::<f64>()) / n as f64;
        }
    }
    population[0] = parameters
        .iter()
        .map(|p| p.to_unit(p.start).clamp(0.0, 1.0))
        .collect();
    EngineState {
        phase: Phase::Global,
        iteration: 0,
        generation: 0,
        evaluations: 0,
        elapsed_s: 0.0,
        population,
        costs: Vec::new(),
        generations_since_improvement: 0,
        best_unit: Vec::new(),
        best_cost: f64::INFINITY,
        global_best: None,
        stop_reason: None,
    }
}

struct Clock {
    started: Instant,
    before_s: f64,
}

impl Clock {
    fn elapsed_s(&self) -> f64 {
        self.before_s + self.started.elapsed().as_secs_f64()
    }
}

/// Runs (or continues) the optimisation from `state`, evaluating on this process's threads.
pub fn optimise<M: Model>(
    objective: &Objective<'_, M>,
    settings: &EngineSettings,
    state: EngineState,
    observer: &mut dyn Observer,
) -> Outcome {
    optimise_on(objective, &Local, settings, state, observer)
}

/// `optimise` with each generation's population evaluated by `evaluator`.
pub fn optimise_on<M: Model, E: Evaluator>(
    objective: &Objective<'_, M>,
    evaluator: &E,
    settings: &EngineSettings,
    mut state: EngineState,
    observer: &mut dyn Observer,
) -> Outcome {
    let parameters = objective.parameters();
    let clock = Clock {
        started: Instant::now(),
        before_s: state.elapsed_s,
    };
    if state.stop_reason.as_deref() == Some(STOP_REQUESTED) {
        state.stop_reason = None;
    }
    let evaluate_all = |members: &[Vec<f64>]| -> Vec<Evaluation> {
        let values: Vec<Vec<f64>> = members.iter().map(|u| values_of(parameters, u)).collect();
        evaluator.evaluate(&Costs(objective), &values)
    };
    if state.phase == Phase::Global && state.costs.is_empty() {
        let evaluations = evaluate_all(&state.population);
        report_failures(&evaluations, observer);
        state.evaluations += evaluations.len() as u64;
        state.costs = evaluations.iter().map(|e| e.cost).collect();
        let best = argmin_index(&state.costs);
        state.best_unit = state.population[best].clone();
        state.best_cost = state.costs[best];
        state.elapsed_s = clock.elapsed_s();
        observer.iteration(&IterationReport {
            iteration: 0,
            phase: Phase::Global,
            evaluations: state.evaluations,
            elapsed_s: state.elapsed_s,
            best_values: values_of(parameters, &state.best_unit),
            best: &evaluations[best],
        });
        observer.checkpoint(&state);
    }
    while state.phase == Phase::Global {
        if let Some(reason) = stop_reason(&state, settings, &clock, observer) {
            state.stop_reason = Some(reason);
            break;
        }
        let trials = propose_generation(&state, settings.seed);
        let evaluations = evaluate_all(&trials);
        report_failures(&evaluations, observer);
        state.evaluations += evaluations.len() as u64;
        let previous_best = state.best_cost;
        for (i, (trial, evaluation)) in trials.into_iter().zip(&evaluations).enumerate() {
            if evaluation.cost <= state.costs[i] {
                state.population[i] = trial;
                state.costs[i] = evaluation.cost;
            }
        }
        let best = argmin_index(&state.costs);
        if state.costs[best] < state.best_cost {
            state.best_unit = state.population[best].clone();
            state.best_cost = state.costs[best];
        }
        if previous_best - state.best_cost > STAGNATION_RELATIVE_IMPROVEMENT * previous_best.abs() {
            state.generations_since_improvement = 0;
        } else {
            state.generations_since_improvement += 1;
        }
        state.generation += 1;
        state.iteration += 1;
        state.elapsed_s = clock.elapsed_s();
        let evaluation = match evaluations.iter().position(|e| e.cost == state.best_cost) {
            Some(i) => evaluations[i].clone(),
            // Not new this generation: evaluated again (deterministic, the same numbers).
            None => objective.evaluate(&values_of(parameters, &state.best_unit)),
        };
        observer.iteration(&IterationReport {
            iteration: state.iteration,
            phase: Phase::Global,
            evaluations: state.evaluations,
            elapsed_s: state.elapsed_s,
            best_values: values_of(parameters, &state.best_unit),
            best: &evaluation,
        });
        observer.checkpoint(&state);
    }
    let stopped_by_user =
        |state: &EngineState| state.stop_reason.as_deref() == Some(STOP_REQUESTED);
    // A stop request leaves the phase as it is, so `--resume` carries on from here.
    if state.phase == Phase::Global && !stopped_by_user(&state) {
        state.global_best = Some((state.best_unit.clone(), state.best_cost));
        state.phase = if settings.local_refinement {
            Phase::Local
        } else {
            Phase::Done
        };
        observer.checkpoint(&state);
    }
    if state.phase == Phase::Local && !stopped_by_user(&state) {
        if let Some((unit, cost)) = state.global_best.clone() {
            state.best_unit = unit;
            state.best_cost = cost;
        }
        // The starts depend only on the final population, so a run resumed during the local
        // stage repeats it exactly.
        let starts = local_starts(&state, settings.local_starts);
        let global_reason = state.stop_reason.take().unwrap_or_default();
        let mut endings = Vec::new();
        for start in &starts {
            let ending = refine_locally(objective, settings, &mut state, start, &clock, observer);
            endings.push(ending);
            if ending == LocalEnding::StoppedByRequest {
                break;
            }
        }
        let stopped = endings.last() == Some(&LocalEnding::StoppedByRequest);
        if stopped {
            state.stop_reason = Some(STOP_REQUESTED.to_string());
        } else {
            let local = describe_local_endings(&endings);
            state.stop_reason = Some(if global_reason.is_empty() {
                local
            } else {
                format!("{global_reason}; {local}")
            });
            state.phase = Phase::Done;
        }
        state.elapsed_s = clock.elapsed_s();
        observer.checkpoint(&state);
    }
    let best_values = values_of(parameters, &state.best_unit);
    let best = objective.evaluate(&best_values);
    Outcome {
        best_values,
        best_unit: state.best_unit.clone(),
        best,
        state,
    }
}

/// The reason given when the observer asked the run to stop.
pub const STOP_REQUESTED: &str = "stopped on request";

/// Whether a run that ended for `reason` (the engine's `stop_reason`) converged: the global
/// search stopped on stagnation or on the target objective, and the local refinement (when
/// there was one) converged at least once. `Err` gives the reason it did not converge (a
/// budget, the time, a stop request).
pub fn convergence(reason: &str) -> Result<(), String> {
    let global = reason.split("; ").next().unwrap_or("");
    let global_converged =
        global.starts_with("no improvement in") || global.starts_with("reached the target");
    let local_converged = match reason.find("local refinement") {
        None => true,
        Some(at) => {
            let local = &reason[at..];
            local.ends_with("converged") && !local.contains("(0 converged)")
        }
    };
    if reason.is_empty() || reason.contains(STOP_REQUESTED) {
        Err(format!(
            "not converged: {}",
            if reason.is_empty() {
                "ended early"
            } else {
                reason
            }
        ))
    } else if global_converged && local_converged {
        Ok(())
    } else {
        Err(format!("not converged: {reason}"))
    }
}

fn stop_reason(
    state: &EngineState,
    settings: &EngineSettings,
    clock: &Clock,
    observer: &mut dyn Observer,
) -> Option<String> {
    if observer.should_stop() {
        return Some(STOP_REQUESTED.to_string());
    }
    if state.best_cost <= settings.target_objective {
        return Some(format!(
            "reached the target objective {}",
            settings.target_objective
        ));
    }
    let next = state.evaluations + state.population.len() as u64;
    if next > settings.max_evaluations {
        return Some(format!(
            "reached the evaluation budget ({})",
            settings.max_evaluations
        ));
    }
    if let Some(budget) = settings.time_budget_s {
        if clock.elapsed_s() >= budget {
            return Some(format!("reached the time budget ({budget:.0} s)"));
        }
    }
    if settings.stagnation_generations > 0
        && state.generations_since_improvement >= settings.stagnation_generations
    {
        return Some(format!(
            "no improvement in {} generations",
            settings.stagnation_generations
        ));
    }
    None
}

/// DE/rand-to-best/1/bin trial vectors for the next generation.
fn propose_generation(state: &EngineState, seed: u64) -> Vec<Vec<f64>> {
    let mut rng = ChaCha8Rng::seed_from_u64(
        seed.wrapping_mul(0x9E37_79B9_7F4A_7C15) ^ (state.generation + 1),
    );
    let n = state.population.len();
    let dims = state.best_unit.len();
    let scale = rng.gen_range(SCALE_FACTOR_RANGE.0..SCALE_FACTOR_RANGE.1);
    (0..n)
        .map(|i| {
            let mut pick = || loop {
                let r = rng.gen_range(0..n);
                if r != i {
                    break r;
                }
            };
            let (r1, r2, r3) = (pick(), pick(), pick());
            let forced = rng.gen_range(0..dims.max(1));
            let target = &state.population[i];
            (0..dims)
                .map(|d| {
                    if d == forced || rng.gen::<f64>() < CROSSOVER_PROBABILITY {
                        let base = state.population[r1][d];
                        let mutant = base
                            + scale * (state.best_unit[d] - base)
                            + scale * (state.population[r2][d] - state.population[r3][d]);
                        // Out of bounds: halfway between the base and the bound it crossed.
                        if mutant < 0.0 {
                            0.5 * base
                        } else if mutant > 1.0 {
                            0.5 * (base + 1.0)
                        } else {
                            mutant
                        }
                    } else {
                        target[d]
                    }
                })
                .collect()
        })
        .collect()
}

fn argmin_index(costs: &[f64]) -> usize {
    let mut best = 0;
    for (i, &c) in costs.iter().enumerate() {
        if c < costs[best] {
            best = i;
        }
    }
    best
}

fn report_failures(evaluations: &[Evaluation], observer: &mut dyn Observer) {
    for evaluation in evaluations {
        if let Some(message) = &evaluation.failure {
            observer.failure(message);
        }
    }
}

/// The local stage's bookkeeping, shared with the argmin cost function.
struct LocalTracker<'o> {
    observer: &'o mut dyn Observer,
    evaluations: u64,
    best_unit: Vec<f64>,
    best_cost: f64,
    iteration: u64,
    stop: bool,
    stopped_by_request: bool,
    /// Evaluations at the last report, to report progress at least every 20 evaluations.
    reported_at: u64,
}

struct LocalProblem<'a, 'b, 't, 'o, M: Model> {
    objective: &'a Objective<'b, M>,
    tracker: &'t Mutex<LocalTracker<'o>>,
    budget: u64,
    evaluations_before: u64,
    elapsed: &'t Clock,
    time_budget_s: Option<f64>,
}

impl<M: Model> CostFunction for LocalProblem<'_, '_, '_, '_, M> {
    type Param = Vec<f64>;
    type Output = f64;

    fn cost(&self, unit: &Self::Param) -> Result<f64, argmin::core::Error> {
        let mut tracker = self
            .tracker
            .lock()
            .map_err(|_| argmin::core::Error::msg("progress tracker poisoned"))?;
        let out_of_time = self
            .time_budget_s
            .is_some_and(|b| self.elapsed.elapsed_s() >= b);
        let requested = tracker.observer.should_stop();
        if tracker.stop || tracker.evaluations >= self.budget || out_of_time || requested {
            // Never an error: argmin's Nelder–Mead unwraps the costs of its first simplex, so
            // an error there would be a panic. Past the budget every point costs the same
            // without a simulation, the simplex collapses and the run ends at once.
            if !tracker.stop {
                tracker.stop = true;
                tracker.stopped_by_request = requested;
            }
            return Ok(f64::MAX);
        }
        let clamped: Vec<f64> = unit.iter().map(|u| u.clamp(0.0, 1.0)).collect();
        // Leaving the box costs in proportion to how far, so the simplex turns back.
        let outside: f64 = unit
            .iter()
            .zip(&clamped)
            .map(|(u, c)| (u - c).powi(2))
            .sum();
        let parameters = self.objective.parameters();
        let values = values_of(parameters, &clamped);
        drop(tracker);
        let evaluation = self.objective.evaluate(&values);
        let mut tracker = self
            .tracker
            .lock()
            .map_err(|_| argmin::core::Error::msg("progress tracker poisoned"))?;
        tracker.evaluations += 1;
        if let Some(message) = &evaluation.failure {
            tracker.observer.failure(message);
        }
        let cost = evaluation.cost * (1.0 + 100.0 * outside);
        let improved = outside == 0.0 && evaluation.cost < tracker.best_cost;
        let relative_gain =
            (tracker.best_cost - evaluation.cost) / tracker.best_cost.abs().max(f64::MIN_POSITIVE);
        if improved {
            tracker.best_cost = evaluation.cost;
            tracker.best_unit = clamped;
        }
        // Report clear improvements at once and the rest every 20 evaluations, so the log
        // stays small.
        if improved && (relative_gain > 1e-4 || tracker.evaluations >= tracker.reported_at + 20) {
            tracker.reported_at = tracker.evaluations;
            tracker.iteration += 1;
            let report = IterationReport {
                iteration: tracker.iteration,
                phase: Phase::Local,
                evaluations: self.evaluations_before + tracker.evaluations,
                elapsed_s: self.elapsed.elapsed_s(),
                best_values: values,
                best: &evaluation,
            };
            tracker.observer.iteration(&report);
        }
        Ok(cost)
    }
}

/// How one Nelder–Mead run ended.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum LocalEnding {
    Converged,
    AtBudget,
    Ended,
    StoppedByRequest,
}

/// The points the local stage starts from: the global best, then the best members of the
/// population that lie more than 0.05 (unit-cube distance) from every start already chosen,
/// up to `n` in all.
fn local_starts(state: &EngineState, n: usize) -> Vec<Vec<f64>> {
    let mut starts = vec![state.best_unit.clone()];
    let mut order: Vec<usize> = (0..state.costs.len()).collect();
    order.sort_by(|a, b| state.costs[*a].total_cmp(&state.costs[*b]));
    for i in order {
        if starts.len() >= n.max(1) {
            break;
        }
        let member = &state.population[i];
        let distinct = starts.iter().all(|start| {
            let squared: f64 = start.iter().zip(member).map(|(a, b)| (a - b).powi(2)).sum();
            squared.sqrt() > 0.05
        });
        if distinct && state.costs[i].is_finite() {
            starts.push(member.clone());
        }
    }
    starts
}

fn describe_local_endings(endings: &[LocalEnding]) -> String {
    let last = match endings.last() {
        Some(LocalEnding::AtBudget) => "stopped at its budget",
        Some(LocalEnding::Converged) => "converged",
        _ => "ended",
    };
    if endings.len() == 1 {
        format!("local refinement {last}")
    } else {
        let converged = endings
            .iter()
            .filter(|e| **e == LocalEnding::Converged)
            .count();
        format!(
            "local refinement from {} starts ({converged} converged)",
            endings.len()
        )
    }
}

/// One Nelder–Mead run from `start`; improves `state`'s best when it finds better.
fn refine_locally<M: Model>(
    objective: &Objective<'_, M>,
    settings: &EngineSettings,
    state: &mut EngineState,
    start: &[f64],
    clock: &Clock,
    observer: &mut dyn Observer,
) -> LocalEnding {
    let dims = start.len();
    let mut simplex = vec![start.to_vec()];
    for d in 0..dims {
        let mut vertex = start.to_vec();
        vertex[d] = if vertex[d] + 0.05 <= 1.0 {
            vertex[d] + 0.05
        } else {
            vertex[d] - 0.05
        };
        simplex.push(vertex);
    }
    let tracker = Mutex::new(LocalTracker {
        observer,
        evaluations: 0,
        best_unit: state.best_unit.clone(),
        best_cost: state.best_cost,
        iteration: state.iteration,
        stop: false,
        stopped_by_request: false,
        reported_at: 0,
    });
    let problem = LocalProblem {
        objective,
        tracker: &tracker,
        budget: settings.local_max_evaluations,
        evaluations_before: state.evaluations,
        elapsed: clock,
        time_budget_s: settings.time_budget_s,
    };
    let solver = match NelderMead::new(simplex).with_sd_tolerance(1e-10) {
        Ok(solver) => solver,
        Err(_) => return LocalEnding::Ended,
    };
    let result = Executor::new(problem, solver)
        .configure(|config| config.max_iters(settings.local_max_evaluations))
        .run();
    let converged = result.is_ok();
    drop(result);
    let tracker = match tracker.into_inner() {
        Ok(tracker) => tracker,
        Err(poisoned) => poisoned.into_inner(),
    };
    state.evaluations += tracker.evaluations;
    state.iteration = tracker.iteration;
    if tracker.best_cost < state.best_cost {
        state.best_cost = tracker.best_cost;
        state.best_unit = tracker.best_unit;
    }
    if tracker.stopped_by_request {
        LocalEnding::StoppedByRequest
    } else if tracker.stop {
        LocalEnding::AtBudget
    } else if converged {
        LocalEnding::Converged
    } else {
        LocalEnding::Ended
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::fit::job::{FitCase, SignalData, SignalKind};
    use crate::fit::model::{ModelError, SignalCurve};
    use crate::fit::parameters::{FreeParameter, Scale};

    /// A fake simulator: the "curve" is a·t + b at 50 times; the data were made with
    /// (a, b) = (2, −1), so that is the known optimum.
    struct Line {
        parameters: Vec<FreeParameter>,
    }

    impl Model for Line {
        fn parameters(&self) -> &[FreeParameter] {
            &self.parameters
        }
        fn predict(&self, values: &[f64]) -> Result<Vec<Vec<SignalCurve>>, ModelError> {
            Ok(vec![vec![SignalCurve {
                values: (0..50).map(|t| values[0] * t as f64 + values[1]).collect(),
            }]])
        }
    }

    /// The line model with both coefficients free in −10..10, starting at 5.
    fn line_model() -> Line {
        Line {
            parameters: vec![
                parameter("a", -10.0, 10.0, 5.0),
                parameter("b", -10.0, 10.0, 5.0),
            ],
        }
    }

    fn parameter(name: &str, lower: f64, upper: f64, start: f64) -> FreeParameter {
        FreeParameter {
            name: name.into(),
            unit: "–".into(),
            lower,
            upper,
            scale: Scale::Linear,
            start,
            prior: None,
            targets: vec![],
        }
    }

    fn line_case() -> FitCase {
        let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
            .join("demo-cases/ridgeline-panel/scenario.toml");
        FitCase {
            name: "line".into(),
            setup: crate::fit::job::CaseSetup::Cone(Box::new(
                crate::case::load_scenario(&path).expect("demo scenario loads"),
            )),
            exposed_area_m2: 0.01,
            specimen_area_m2: 0.01,
            signals: vec![SignalData {
                kind: SignalKind::Mlr,
                weight: 1.0,
                time_s: (0..50).map(|t| t as f64).collect(),
                value: (0..50).map(|t| 2.0 * t as f64 - 1.0).collect(),
                sigma: vec![1.0; 50],
                sigma_source: "sigma",
                probe: None,
                effective_points: 50.0,
            }],
            test_files: vec![],
        }
    }

    fn settings() -> EngineSettings {
        EngineSettings {
            population: 16,
            max_evaluations: 3000,
            time_budget_s: None,
            target_objective: 0.0,
            stagnation_generations: 30,
            seed: 11,
            local_refinement: true,
            local_max_evaluations: 300,
            local_starts: 1,
        }
    }

    struct Silent {
        stop_after_checkpoints: Option<usize>,
        checkpoints: usize,
        last: Option<EngineState>,
    }

    impl Observer for Silent {
        fn iteration(&mut self, _: &IterationReport<'_>) {}
        fn checkpoint(&mut self, state: &EngineState) {
            self.checkpoints += 1;
            self.last = Some(state.clone());
        }
        fn failure(&mut self, _: &str) {}
        fn should_stop(&mut self) -> bool {
            self.stop_after_checkpoints
                .is_some_and(|n| self.checkpoints >= n)
        }
    }

    fn silent(stop_after_checkpoints: Option<usize>) -> Silent {
        Silent {
            stop_after_checkpoints,
            checkpoints: 0,
            last: None,
        }
    }

    #[test]
    fn finds_the_known_optimum_of_a_fake_model() {
        let model = line_model();
        let cases = [line_case()];
        let objective = Objective::new(&model, &cases);
        let outcome = optimise(
            &objective,
            &settings(),
            initial_state(&model.parameters, &settings()),
            &mut silent(None),
        );
        assert!(
            (outcome.best_values[0] - 2.0).abs() < 1e-4,
            "{:?}",
            outcome.best_values
        );
        assert!(
            (outcome.best_values[1] + 1.0).abs() < 1e-3,
            "{:?}",
            outcome.best_values
        );
        assert!(outcome.best.cost < 1e-5);
    }

    /// Multi-start picks the global best first, then the best members far enough from every
    /// start already chosen, and each start's Nelder–Mead run reaches the known optimum.
    #[test]
    fn multi_start_refines_from_distinct_good_members() {
        let state = EngineState {
            phase: Phase::Local,
            iteration: 0,
            generation: 0,
            evaluations: 0,
            elapsed_s: 0.0,
            population: vec![
                vec![0.50, 0.50],
                vec![0.51, 0.50],
                vec![0.90, 0.10],
                vec![0.20, 0.80],
            ],
            costs: vec![1.0, 1.1, 2.0, 3.0],
            generations_since_improvement: 0,
            best_unit: vec![0.50, 0.50],
            best_cost: 1.0,
            global_best: None,
            stop_reason: None,
        };
        // The member at 0.01 from the best is skipped; the next two are taken, by cost.
        assert_eq!(
            local_starts(&state, 3),
            vec![vec![0.50, 0.50], vec![0.90, 0.10], vec![0.20, 0.80]]
        );
        assert_eq!(local_starts(&state, 1), vec![vec![0.50, 0.50]]);

        let model = line_model();
        let cases = [line_case()];
        let objective = Objective::new(&model, &cases);
        let few_generations = EngineSettings {
            max_evaluations: 64,
            local_starts: 3,
            ..settings()
        };
        let outcome = optimise(
            &objective,
            &few_generations,
            initial_state(&model.parameters, &few_generations),
            &mut silent(None),
        );
        let reason = outcome.state.stop_reason.clone().unwrap_or_default();
        assert!(reason.contains("from 3 starts"), "{reason}");
        assert!(
            (outcome.best_values[0] - 2.0).abs() < 1e-3,
            "{:?}",
            outcome.best_values
        );
    }

    #[test]
    fn a_stopped_and_continued_run_ends_exactly_where_an_uninterrupted_one_does() {
        let model = line_model();
        let cases = [line_case()];
        let objective = Objective::new(&model, &cases);
        let whole = optimise(
            &objective,
            &settings(),
            initial_state(&model.parameters, &settings()),
            &mut silent(None),
        );
        let mut first = silent(Some(5));
        optimise(
            &objective,
            &settings(),
            initial_state(&model.parameters, &settings()),
            &mut first,
        );
        let checkpoint = first.last.expect("checkpoints were written");
        assert_eq!(checkpoint.phase, Phase::Global);
        // A copy: the round trip through the file is `run::checkpoint`'s test.
        let restored: EngineState = checkpoint.clone();
        let continued = optimise(&objective, &settings(), restored, &mut silent(None));
        assert_eq!(whole.best_values, continued.best_values);
        assert_eq!(whole.state.evaluations, continued.state.evaluations);
    }
}
