//! Speed of the forward model (issue 2): the thermoplastic template, 6 mm on insulation board,
//! 50 kW/m², 600 s simulated, at the default resolution; then the cost at 30/60/120/240
//! specimen cells to show it grows linearly. Run with `cargo bench --bench simulate`.

use std::path::Path;

use criterion::{criterion_group, criterion_main, Criterion};
use emberfit::case::load_scenario;
use emberfit::physics::simulate;

fn template_scenario() -> emberfit::case::LoadedScenario {
    let path =
        Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/cases/thermoplastic-on-board.toml");
    match load_scenario(&path) {
        Ok(loaded) => loaded,
        Err(err) => panic!("bench scenario: {err}"),
    }
}

fn forward_model(c: &mut Criterion) {
    let loaded = template_scenario();
    let default_history = simulate(&loaded.scenario).expect("bench scenario runs");
    let mut fine = loaded.scenario.clone();
    fine.layers[0].n_cells *= 4;
    fine.numerics.max_temperature_change_k /= 4.0;
    fine.numerics.max_conversion_per_step /= 4.0;
    let fine_history = simulate(&fine).expect("fine run");
    let peak = default_history.summary.peak_mlr_kg_m2_s;
    let fine_peak = fine_history.summary.peak_mlr_kg_m2_s;
    println!(
        "default resolution: {} specimen cells, {} steps; peak MLR {:.3} g/m2s vs {:.3} g/m2s at 4x finer ({:+.3} %)",
        loaded.scenario.layers[0].n_cells,
        default_history.summary.n_steps,
        peak * 1e3,
        fine_peak * 1e3,
        100.0 * (peak - fine_peak) / fine_peak
    );
    c.bench_function("thermoplastic 6 mm on board, 50 kW/m2, 600 s", |b| {
        b.iter(|| simulate(&loaded.scenario).expect("runs"))
    });
    let mut group = c.benchmark_group("specimen cells");
    for n_cells in [30, 60, 120, 240] {
        let mut scenario = loaded.scenario.clone();
        scenario.layers[0].n_cells = n_cells;
        group.bench_function(format!("{n_cells} cells"), |b| {
            b.iter(|| simulate(&scenario).expect("runs"))
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
