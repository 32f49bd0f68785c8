//! Speed of the forward model (issue 14 item 5): the demo scenario
//! (demo-cases/ridgeline-panel/scenario.toml, 6 mm facing on 26 mm of board) at 50 kW/m²,
//! 600 s simulated, at the converged defaults; once with a fresh workspace per run
//! (`simulate`) and once with one kept across runs as a fit does (`simulate_with`); then the
//! cost at 1/2/4× the default cells to show how it grows. Prints the run's step counts and its
//! distance from a 4× refined run; then the throughput of independent runs on 1 and 2 threads
//! (each thread keeping its workspace, as a fit's workers do) with the machine's load average
//! beside it, since that figure means something only on an idle machine. Run with
//! `cargo bench --bench simulate`; goal ≤ 2 ms a run, bar ≤ 4 ms (docs/numerics.md has the
//! figures measured).

use std::path::Path;

use criterion::{criterion_group, criterion_main, Criterion};
use emberfit::case::load_scenario;
use emberfit::physics::scenario::Schedule;
use emberfit::physics::simulate;
use emberfit::physics::solver::{simulate_with, Workspace};

fn demo_scenario() -> emberfit::physics::Scenario {
    let path =
        Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-cases/ridgeline-panel/scenario.toml");
    let mut scenario = match load_scenario(&path) {
        Ok(loaded) => loaded.scenario,
        Err(err) => panic!("bench scenario: {err}"),
    };
    scenario.exposure.irradiance_w_m2 = Schedule::Constant(50e3);
    scenario.duration_s = 600.0;
    scenario
}

/// The load average line of the machine (Linux), to print beside a throughput figure.
fn load_average() -> String {
    std::fs::read_to_string("/proc/loadavg")
        .map(|text| {
            text.split_whitespace()
                .take(3)
                .collect::<Vec<_>>()
                .join(" ")
        })
        .unwrap_or_else(|_| "unknown".into())
}

/// Runs per second of `n_runs` independent demo runs on `threads` threads, each thread with
/// its own kept workspace and an equal share of the runs (as a fit's workers keep theirs).
fn throughput(scenario: &emberfit::physics::Scenario, threads: usize, n_runs: usize) -> f64 {
    let share = n_runs / threads;
    let start = std::time::Instant::now();
    std::thread::scope(|scope| {
        for _ in 0..threads {
            scope.spawn(|| {
                let mut workspace = Workspace::default();
                (0..share)
                    .map(|_| {
                        simulate_with(scenario, &mut workspace)
                            .expect("runs")
                            .summary
                            .n_steps
                    })
                    .sum::<usize>()
            });
        }
    });
    (share * threads) as f64 / start.elapsed().as_secs_f64()
}

fn median(mut values: Vec<f64>) -> f64 {
    values.sort_by(f64::total_cmp);
    values[values.len() / 2]
}

/// One and two threads measured in turn, `ROUNDS` times, so that a slow minute of a shared
/// virtual machine falls on both; prints the medians and the median of the rounds' ratios.
fn fit_throughput(scenario: &emberfit::physics::Scenario) {
    const ROUNDS: usize = 7;
    let n_runs = 1600;
    let before = load_average();
    let (mut ones, mut twos, mut ratios) = (Vec::new(), Vec::new(), Vec::new());
    for _ in 0..ROUNDS {
        let one = throughput(scenario, 1, n_runs);
        let two = throughput(scenario, 2, n_runs);
        ones.push(one);
        twos.push(two);
        ratios.push(two / one);
    }
    let spread = |values: &[f64]| {
        let low = values.iter().copied().fold(f64::INFINITY, f64::min);
        let high = values.iter().copied().fold(0.0, f64::max);
        format!("{low:.0}-{high:.0}")
    };
    println!(
        "throughput, {n_runs} demo runs, {ROUNDS} alternating rounds: 1 thread {:.0} runs/s ({}), 2 threads {:.0} runs/s ({}), median ratio {:.2} (goal >= 1.9 on an idle machine); load average before {before}, after {}",
        median(ones.clone()),
        spread(&ones),
        median(twos.clone()),
        spread(&twos),
        median(ratios),
        load_average()
    );
}

fn forward_model(c: &mut Criterion) {
    let scenario = demo_scenario();
    let history = simulate(&scenario).expect("bench scenario runs");
    let mut fine = scenario.clone();
    for layer in &mut fine.layers {
        layer.n_cells *= 4;
    }
    fine.numerics.temperature_tolerance_k /= 4.0;
    fine.numerics.conversion_tolerance /= 4.0;
    fine.numerics.max_temperature_change_k /= 4.0;
    fine.numerics.max_conversion_per_step /= 4.0;
    fine.numerics.iteration_tolerance_k /= 4.0;
    let fine_history = simulate(&fine).expect("fine run");
    let (s, f) = (&history.summary, &fine_history.summary);
    let percent = |a: f64, b: f64| 100.0 * (a - b) / b;
    println!(
        "demo 50 kW/m2, 600 s: cells {:?}, {} steps ({} retried), {} linear solves; vs 4x refined: t_ig {:+.3} %, peak HRR {:+.3} %, t_peak {:+.3} %, peak MLR {:+.3} %, THR {:+.3} %",
        scenario.layers.iter().map(|l| l.n_cells).collect::<Vec<_>>(),
        s.n_steps,
        s.n_rejected_steps,
        s.n_iterations,
        percent(s.ignition_time_s.unwrap_or(f64::NAN), f.ignition_time_s.unwrap_or(f64::NAN)),
        percent(s.peak_hrr_w_m2, f.peak_hrr_w_m2),
        percent(s.time_of_peak_hrr_s, f.time_of_peak_hrr_s),
        percent(s.peak_mlr_kg_m2_s, f.peak_mlr_kg_m2_s),
        percent(s.total_heat_release_j_m2, f.total_heat_release_j_m2),
    );
    fit_throughput(&scenario);
    c.bench_function("demo 50 kW/m2 600 s, simulate", |b| {
        b.iter(|| simulate(&scenario).expect("runs"))
    });
    let mut workspace = Workspace::default();
    c.bench_function("demo 50 kW/m2 600 s, simulate_with (kept workspace)", |b| {
        b.iter(|| simulate_with(&scenario, &mut workspace).expect("runs"))
    });
    let mut group = c.benchmark_group("cells x");
    for factor in [1, 2, 4] {
        let mut refined = scenario.clone();
        for layer in &mut refined.layers {
            layer.n_cells *= factor;
        }
        group.bench_function(format!("{factor}x default cells"), |b| {
            b.iter(|| simulate(&refined).expect("runs"))
        });
    }
    group.finish();
}

criterion_group! {
    name = benches;
    config = Criterion::default().sample_size(20).measurement_time(std::time::Duration::from_secs(4));
    targets = forward_model
}
criterion_main!(benches);
