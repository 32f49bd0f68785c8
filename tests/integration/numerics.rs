//! The solver's numerics (docs/numerics.md): at the default settings the figures a fit uses
//! are converged, and the time integration shows its order in a refinement study.

use std::path::Path;

use emberfit::physics::scenario::{Scenario, Schedule};
use emberfit::physics::{simulate, History};

fn load(relative: &str) -> Scenario {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join(relative);
    match emberfit::case::load_scenario(&path) {
        Ok(loaded) => loaded.scenario,
        Err(err) => panic!("{relative}: {err}"),
    }
}

/// The same scenario with 4× the cells in every layer and every tolerance 4× tighter.
fn refined(scenario: &Scenario) -> Scenario {
    let mut fine = scenario.clone();
    for layer in &mut fine.layers {
        layer.n_cells *= 4;
    }
    let numerics = &mut fine.numerics;
    numerics.temperature_tolerance_k /= 4.0;
    numerics.conversion_tolerance /= 4.0;
    numerics.max_temperature_change_k /= 4.0;
    numerics.max_conversion_per_step /= 4.0;
    numerics.iteration_tolerance_k /= 4.0;
    fine
}

/// Ignition time, peak HRR, time to peak HRR, peak MLR, THR.
fn figures(history: &History) -> [f64; 5] {
    let s = &history.summary;
    [
        s.ignition_time_s.unwrap_or(f64::NAN),
        s.peak_hrr_w_m2,
        s.time_of_peak_hrr_s,
        s.peak_mlr_kg_m2_s,
        s.total_heat_release_j_m2,
    ]
}

const NAMES: [&str; 5] = ["t_ig", "peak HRR", "t_peak", "peak MLR", "THR"];

/// Largest relative difference of the five figures between the defaults and the refined run.
fn worst_difference(label: &str, scenario: &Scenario) -> f64 {
    let coarse = simulate(scenario).unwrap();
    let fine = simulate(&refined(scenario)).unwrap();
    let (a, b) = (figures(&coarse), figures(&fine));
    let mut worst: f64 = 0.0;
    let mut line = format!(
        "{label}: {} steps ({} retried) vs {}:",
        coarse.summary.n_steps, coarse.summary.n_rejected_steps, fine.summary.n_steps
    );
    for idx in 0..5 {
        let difference = ((a[idx] - b[idx]) / b[idx]).abs();
        worst = worst.max(difference);
        line += &format!(
            " {} {:+.3} %",
            NAMES[idx],
            100.0 * (a[idx] - b[idx]) / b[idx]
        );
    }
    eprintln!("{line}");
    worst
}

fn cases() -> Vec<(String, Scenario)> {
    let mut cases = vec![
        (
            "demo 50 kW/m2".to_string(),
            load("demo-cases/ridgeline-panel/scenario.toml"),
        ),
        (
            "thermoplastic 50 kW/m2".to_string(),
            load("tests/cases/thermoplastic-on-board.toml"),
        ),
    ];
    let board = load("tests/cases/charring-wet-board.toml");
    for flux_kw_m2 in [25.0, 50.0, 75.0] {
        let mut scenario = board.clone();
        scenario.exposure.irradiance_w_m2 = Schedule::Constant(flux_kw_m2 * 1e3);
        cases.push((format!("charring-wet 18 mm {flux_kw_m2} kW/m2"), scenario));
    }
    cases
}

/// Issue 14 item 3: at the defaults, ignition time, peak HRR, time to peak HRR, peak MLR and
/// THR are within 1 % of a run with 4× the cells and 4× tighter tolerances, for the demo, the
/// thermoplastic template and the moist charring board at 25, 50 and 75 kW/m². (A
/// self-convergence check: the refined run stands in for the exact answer.)
#[test]
fn defaults_are_within_one_percent_of_a_4x_refined_run() {
    let mut failures = Vec::new();
    for (label, scenario) in cases() {
        let worst = worst_difference(&label, &scenario);
        if worst >= 0.01 {
            failures.push(format!("{label}: {:.3} %", 100.0 * worst));
        }
    }
    assert!(failures.is_empty(), "not converged: {failures:?}");
}
