//! One function per subcommand: the wiring between arguments, library and output.

use anyhow::{bail, Context, Result};

use emberfit::case::load_scenario;
use emberfit::export::{curves::curves_csv, write_atomically};
use emberfit::physics::{simulate as run_simulation, History};

use crate::cli::{Cli, Command, SimulateArgs};

pub fn run(cli: Cli) -> Result<()> {
    match cli.command {
        Command::Simulate(args) => simulate(args),
    }
}

fn simulate(args: SimulateArgs) -> Result<()> {
    let mut loaded = load_scenario(&args.scenario).context("loading the scenario")?;
    if let Some(flux_kw_m2) = args.flux {
        if !(0.0..=500.0).contains(&flux_kw_m2) {
            bail!("--flux must be within 0..500 kW/m², got {flux_kw_m2}");
        }
        loaded.set_constant_irradiance_w_m2(flux_kw_m2 * 1e3);
    }
    if let Some(duration_s) = args.duration {
        if !(duration_s > 0.0 && duration_s.is_finite()) {
            bail!("--duration must be > 0 s, got {duration_s}");
        }
        loaded.scenario.duration_s = duration_s;
    }
    let history = run_simulation(&loaded.scenario)
        .with_context(|| format!("simulating {}", loaded.path.display()))?;
    let has_backing = loaded.scenario.layers.iter().any(|l| !l.is_specimen);
    if let Some(out) = &args.out {
        let bytes = curves_csv(&history, has_backing).context("formatting the curves")?;
        write_atomically(out, &bytes).with_context(|| format!("writing {}", out.display()))?;
    }
    if args.json {
        println!("{}", summary_json(&history));
    } else {
        print!("{}", summary_table(&loaded.title, &history));
        if let Some(out) = &args.out {
            println!(
                "curves written to {} ({} rows)",
                out.display(),
                history.samples.len()
            );
        }
    }
    Ok(())
}

fn summary_json(history: &History) -> serde_json::Value {
    let s = &history.summary;
    serde_json::json!({
        "ignition_time_s": s.ignition_time_s,
        "flameout_time_s": s.flameout_time_s,
        "peak_hrr_kw_m2": s.peak_hrr_w_m2 * 1e-3,
        "time_to_peak_hrr_s": s.time_of_peak_hrr_s,
        "peak_mlr_g_m2s": s.peak_mlr_kg_m2_s * 1e3,
        "time_to_peak_mlr_s": s.time_of_peak_mlr_s,
        "total_heat_release_mj_m2": s.total_heat_release_j_m2 * 1e-6,
        "initial_mass_kg_m2": s.initial_mass_kg_m2,
        "mass_lost_kg_m2": s.mass_lost_kg_m2,
        "energy_balance_relative_residual": s.energy.relative_residual(),
        "mass_balance_relative_residual": s.mass.relative_residual(),
        "steps": s.n_steps,
        "rejected_steps": s.n_rejected_steps,
    })
}

fn summary_table(title: &str, history: &History) -> String {
    let s = &history.summary;
    let time = |t: Option<f64>| t.map_or("none".to_string(), |t| format!("{t:.1} s"));
    let mut out = String::new();
    out.push_str(&format!("{title}\n"));
    let rows = [
        ("ignition", time(s.ignition_time_s)),
        ("flame-out", time(s.flameout_time_s)),
        (
            "peak HRR",
            format!(
                "{:.1} kW/m² at {:.1} s",
                s.peak_hrr_w_m2 * 1e-3,
                s.time_of_peak_hrr_s
            ),
        ),
        (
            "peak MLR",
            format!(
                "{:.2} g/(m²·s) at {:.1} s",
                s.peak_mlr_kg_m2_s * 1e3,
                s.time_of_peak_mlr_s
            ),
        ),
        (
            "total heat release",
            format!("{:.2} MJ/m²", s.total_heat_release_j_m2 * 1e-6),
        ),
        (
            "mass lost",
            format!(
                "{:.3} of {:.3} kg/m² ({:.1} %)",
                s.mass_lost_kg_m2,
                s.initial_mass_kg_m2,
                100.0 * s.mass_lost_kg_m2 / s.initial_mass_kg_m2
            ),
        ),
        (
            "energy balance",
            format!("{:.1e} of absorbed energy", s.energy.relative_residual()),
        ),
        (
            "mass balance",
            format!("{:.1e} of initial mass", s.mass.relative_residual()),
        ),
        (
            "steps",
            format!(
                "{} accepted, {} retried shorter",
                s.n_steps, s.n_rejected_steps
            ),
        ),
    ];
    for (label, value) in rows {
        out.push_str(&format!("  {label:<20} {value}\n"));
    }
    out
}
