//! One function per subcommand: the wiring between arguments, library and output.

use anyhow::{bail, Context, Result};

use emberfit::case::load_scenario;
use emberfit::export::{curves::curves_csv, write_atomically};
use emberfit::physics::{simulate as run_simulation, History};

use crate::cli::{Cli, Command, SimulateArgs, SynthesizeArgs};

pub fn run(cli: Cli) -> Result<()> {
    match cli.command {
        Command::Simulate(args) => simulate(args),
        Command::Synthesize(args) => synthesize(args),
    }
}

fn synthesize(args: SynthesizeArgs) -> Result<()> {
    let mut loaded = load_scenario(&args.scenario).context("loading the scenario")?;
    if let Some(flux_kw_m2) = args.flux {
        check_flux(flux_kw_m2)?;
        loaded.set_constant_irradiance_w_m2(flux_kw_m2 * 1e3);
    }
    if let Some(duration_s) = args.duration {
        check_duration(duration_s)?;
        loaded.scenario.duration_s = duration_s;
    }
    for (name, value) in [
        ("--area-m2", args.area_m2),
        ("--mass-noise-g", args.mass_noise_g),
        ("--hrr-noise-kw-m2", args.hrr_noise_kw_m2),
        ("--time-jitter-s", args.time_jitter_s),
    ] {
        if !(value >= 0.0 && value.is_finite()) {
            bail!("{name} must be ≥ 0, got {value}");
        }
    }
    if args.area_m2 <= 0.0 {
        bail!("--area-m2 must be > 0, got {}", args.area_m2);
    }
    let history = run_simulation(&loaded.scenario)
        .with_context(|| format!("simulating {}", loaded.path.display()))?;
    let noise = emberfit::synthetic::NoiseModel {
        area_m2: args.area_m2,
        mass_noise_g: args.mass_noise_g,
        hrr_noise_kw_m2: args.hrr_noise_kw_m2,
        time_jitter_s: args.time_jitter_s,
        ..Default::default()
    };
    let test = emberfit::synthetic::synthesize(&history, &noise, args.seed);
    let bytes = emberfit::synthetic::synthetic_csv(&test).context("formatting the test data")?;
    write_atomically(&args.out, &bytes)
        .with_context(|| format!("writing {}", args.out.display()))?;
    println!(
        "{}: {} rows, initial mass {:.2} g, clock offset {:+.2} s, ignition {}",
        args.out.display(),
        test.time_s.len(),
        test.initial_mass_g,
        test.time_offset_s,
        test.ignition_time_s
            .map_or("none".into(), |t| format!("{t:.1} s (logged clock)"))
    );
    Ok(())
}

fn check_flux(flux_kw_m2: f64) -> Result<()> {
    if !(0.0..=500.0).contains(&flux_kw_m2) {
        bail!("--flux must be within 0..500 kW/m², got {flux_kw_m2}");
    }
    Ok(())
}

fn check_duration(duration_s: f64) -> Result<()> {
    if !(duration_s > 0.0 && duration_s.is_finite()) {
        bail!("--duration must be > 0 s, got {duration_s}");
    }
    Ok(())
}

fn simulate(args: SimulateArgs) -> Result<()> {
    let mut loaded = load_scenario(&args.scenario).context("loading the scenario")?;
    if let Some(flux_kw_m2) = args.flux {
        check_flux(flux_kw_m2)?;
        loaded.set_constant_irradiance_w_m2(flux_kw_m2 * 1e3);
    }
    if let Some(duration_s) = args.duration {
        check_duration(duration_s)?;
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
        let exposure = match &loaded.scenario.exposure.irradiance_w_m2 {
            emberfit::physics::scenario::Schedule::Constant(q) => format!("{:.1} kW/m²", q * 1e-3),
            emberfit::physics::scenario::Schedule::Table(points) => {
                format!("irradiance table of {} points", points.len())
            }
        };
        print!(
            "{}",
            summary_table(
                &format!(
                    "{} — {exposure}, {:.0} s",
                    loaded.title, loaded.scenario.duration_s
                ),
                &history
            )
        );
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
