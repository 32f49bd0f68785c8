//! The long fuzz run (issue 15): `cargo bench --bench fuzz` sends 10⁵ inputs (or
//! EMBERFIT_FUZZ_INPUTS) through each TOML and CSV reader and prints the counts of accepted
//! and refused inputs, panics and hangs (per-input limit 10 s). It asserts nothing: the
//! short run in the test suite is the check; this one prints figures for docs/input-limits.md.

#[path = "../tests/fuzz/harness.rs"]
mod harness;

use std::time::{Duration, Instant};

fn main() {
    let per_reader: u64 = std::env::var("EMBERFIT_FUZZ_INPUTS")
        .ok()
        .and_then(|n| n.parse().ok())
        .unwrap_or(100_000);
    let started = Instant::now();
    let results = harness::fuzz_all(per_reader, 2026, Duration::from_secs(10));
    println!("fuzz: {per_reader} inputs per reader, seed 2026, limit 10 s per input");
    for (name, counts) in &results {
        println!(
            "  {name:<44} {:>7} inputs  {:>7} accepted  {:>7} refused  {} panics  {} hangs  slowest {:.1} ms",
            counts.inputs,
            counts.accepted,
            counts.refused,
            counts.panics.len(),
            counts.hangs.len(),
            counts.slowest.as_secs_f64() * 1e3
        );
        for problem in counts.panics.iter().chain(&counts.hangs).take(3) {
            println!("    {}", problem.lines().next().unwrap_or(""));
        }
    }
    println!("total {:.0} s", started.elapsed().as_secs_f64());
}
