//! The cost of handing out and gathering one batch over the ranks of an MPI job, with an
//! evaluation that costs next to nothing, so that the figure is the communication alone
//! (docs/cluster.md, "Measured scaling"). Prints figures and asserts nothing. Run it under the
//! launcher (`cargo bench --features mpi --bench cluster --no-run` prints the executable):
//!
//!     mpirun -n 3 --oversubscribe target/release/deps/cluster-HASH
#![cfg(feature = "mpi")]

use std::time::Instant;

use emberfit::cluster::ranks::Ranks;
use emberfit::fit::evaluator::{Evaluator, Task, TaskKind};

/// The sum of a point's coordinates: an evaluation of a few nanoseconds.
struct Sum;

impl Task for Sum {
    type Output = f64;
    const KIND: TaskKind = TaskKind::Cost;
    fn run(&self, point: &[f64]) -> f64 {
        point.iter().sum()
    }
}

fn main() {
    let ranks = match Ranks::join() {
        Ok(Some(ranks)) => ranks,
        Ok(None) => {
            println!("cluster bench: run the executable under mpirun (see its header)");
            return;
        }
        Err(err) => {
            eprintln!("cluster bench: {err}");
            std::process::exit(1);
        }
    };
    if ranks.rank() != 0 {
        if let Err(err) = ranks.serve(&[&Sum]) {
            eprintln!("cluster bench: {err}");
        }
        return;
    }
    let evaluator = ranks.distributed();
    for (population, dims) in [(24, 3), (100, 10), (1000, 10)] {
        let points: Vec<Vec<f64>> = (0..population)
            .map(|i| (0..dims).map(|d| (i * dims + d) as f64).collect())
            .collect();
        for _ in 0..50 {
            evaluator.evaluate(&Sum, &points);
        }
        let rounds = 500;
        let started = Instant::now();
        for _ in 0..rounds {
            evaluator.evaluate(&Sum, &points);
        }
        let per_batch_us = started.elapsed().as_secs_f64() / rounds as f64 * 1e6;
        println!(
            "{} ranks, batch of {population} points × {dims} values: {per_batch_us:.0} µs per batch",
            ranks.size()
        );
    }
}
