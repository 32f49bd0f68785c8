//! Speed of the fit (issue 4), printed as figures, not asserted:
//! 1. evaluations per second of the demo objective on 1 and 2 threads;
//! 2. time to converge on the demo twin problem (6 free parameters, 3 cases) on 2 threads;
//! 3. the optimiser comparison recorded in docs/fit-jobs.md: emberfit's differential
//!    evolution against argmin's particle swarm at the same evaluation budget, each followed
//!    by nothing (so the global searches are compared alone).
//!
//! Run with `cargo bench --bench fit`.

use std::path::Path;
use std::time::Instant;

use argmin::core::{CostFunction, Executor};
use argmin::solver::particleswarm::ParticleSwarm;
use emberfit::case::job::load_job;
use emberfit::case::model::CaseModel;
use emberfit::fit::engine::{
    initial_state, optimise, EngineSettings, EngineState, IterationReport, Observer,
};
use emberfit::fit::objective::Objective;
use rayon::prelude::*;

struct Quiet;
impl Observer for Quiet {
    fn iteration(&mut self, _: &IterationReport<'_>) {}
    fn checkpoint(&mut self, _: &EngineState) {}
    fn failure(&mut self, _: &str) {}
}

struct UnitCube<'a> {
    objective: &'a Objective<'a, CaseModel<'a>>,
}

impl CostFunction for UnitCube<'_> {
    type Param = Vec<f64>;
    type Output = f64;
    fn cost(&self, unit: &Vec<f64>) -> Result<f64, argmin::core::Error> {
        let values: Vec<f64> = self
            .objective
            .parameters()
            .iter()
            .zip(unit)
            .map(|(p, &u)| p.from_unit(u))
            .collect();
        Ok(self.objective.evaluate(&values).cost)
    }
}

fn main() {
    let job_path = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/cases/bench-fit.toml");
    let job = load_job(&job_path).unwrap_or_else(|e| panic!("bench job: {e}"));
    let model = CaseModel::new(&job);
    let objective = Objective::new(&model);
    let state = |seed| {
        initial_state(
            &job.parameters,
            &EngineSettings {
                population: 0,
                max_evaluations: 0,
                time_budget_s: None,
                target_objective: 0.0,
                stagnation_generations: 0,
                seed,
                local_refinement: false,
                local_max_evaluations: 0,
                local_starts: 1,
            },
        )
    };

    // 1. Throughput on 1 and 2 threads: the same 60 candidates.
    let candidates: Vec<Vec<f64>> = state(1)
        .population
        .iter()
        .map(|u| {
            job.parameters
                .iter()
                .zip(u)
                .map(|(p, &x)| p.from_unit(x))
                .collect()
        })
        .collect();
    let mut rates = Vec::new();
    for threads in [1, 2] {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .expect("thread pool");
        let started = Instant::now();
        pool.install(|| {
            let _: Vec<f64> = candidates
                .par_iter()
                .map(|v| objective.evaluate(v).cost)
                .collect();
        });
        let rate = candidates.len() as f64 / started.elapsed().as_secs_f64();
        println!("evaluations per second, {threads} thread(s): {rate:.1} (3 cases of 900 s each)");
        rates.push(rate);
    }
    println!("speed-up from the second core: {:.2}x", rates[1] / rates[0]);

    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(2)
        .build()
        .expect("thread pool");
    pool.install(|| {
        // 2. Time to converge (DE then Nelder–Mead, the job's settings).
        let settings = EngineSettings {
            time_budget_s: None,
            target_objective: 0.0,
            local_refinement: true,
            local_max_evaluations: 400,
            local_starts: 1,
            ..job.settings.engine.clone()
        };
        let started = Instant::now();
        let outcome = optimise(&objective, &settings, initial_state(&job.parameters, &settings), &mut Quiet);
        println!(
            "time to converge, 6 parameters, 3 cases, 2 threads: {:.1} s, {} evaluations, objective {:.4} ({})",
            started.elapsed().as_secs_f64(),
            outcome.state.evaluations,
            outcome.best.cost,
            outcome.state.stop_reason.clone().unwrap_or_default()
        );

        // 3. Global searches alone at the same budget, three seeds each.
        let budget = 1200u64;
        for seed in [1u64, 2, 3] {
            let settings = EngineSettings {
                population: 0,
                max_evaluations: budget,
                time_budget_s: None,
                target_objective: 0.0,
                stagnation_generations: 0,
                seed,
                local_refinement: false,
                local_max_evaluations: 0,
                local_starts: 1,
            };
            let started = Instant::now();
            let de = optimise(&objective, &settings, initial_state(&job.parameters, &settings), &mut Quiet);
            let de_s = started.elapsed().as_secs_f64();
            let n = job.parameters.len();
            let particles = (10 * n).max(16);
            let solver = ParticleSwarm::new((vec![0.0; n], vec![1.0; n]), particles);
            let started = Instant::now();
            let result = Executor::new(UnitCube { objective: &objective }, solver)
                .configure(|c| c.max_iters(budget / particles as u64))
                .run();
            let pso_s = started.elapsed().as_secs_f64();
            let pso_cost = result.map(|r| r.state().get_best_cost()).unwrap_or(f64::NAN);
            println!(
                "seed {seed}, {budget} evaluations: differential evolution {:.4} in {de_s:.1} s; particle swarm {pso_cost:.4} in {pso_s:.1} s",
                de.best.cost
            );
        }
    });
}
