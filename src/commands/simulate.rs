//! `simulate` and `synthesize`: one scenario run, printed or turned into measured-like data.
//!
//! **Invariant:** one simulation per call, its output through `present::simulate` (screen)
//! and `export` (files); the size budget of a changed duration is `case::budget`'s.

use anyhow::{bail, Context, Result};

use emberfit::case::load_scenario;
use emberfit::export::{curves::curves_csv, write_atomically};
use emberfit::physics::simulate as run_simulation;
use emberfit::present::simulate::{exposure_text, summary_json, summary_table};

use crate::cli::{SimulateArgs, SynthesizeArgs};

pub fn synthesize(args: SynthesizeArgs) -> Result<()> {
    let mut loaded = load_scenario(&args.scenario).context("loading the scenario")?;
    if let Some(flux_kw_m2) = args.flux {
        check_flux(flux_kw_m2)?;
        loaded.set_constant_irradiance_w_m2(flux_kw_m2 * 1e3);
    }
    if let Some(duration_s) = args.duration {
        check_duration(duration_s)?;
        loaded.scenario.duration_s = duration_s;
        check_size_after_duration(&loaded.scenario)?;
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
    let most = emberfit::case::budget::MAX_DURATION_S;
    if duration_s > most {
        bail!("--duration {duration_s} s is more than {most:e} s (11.6 days), the most simulated");
    }
    Ok(())
}

/// The size check of a scenario whose duration was set by `--duration`.
fn check_size_after_duration(scenario: &emberfit::physics::Scenario) -> Result<()> {
    emberfit::case::budget::check_scenario_size(scenario)
        .map_err(|size| anyhow::anyhow!("--duration {} s: {}", scenario.duration_s, size.problem))
}

pub fn simulate(args: SimulateArgs) -> Result<()> {
    if emberfit::microscale::is_milligram_scenario(&args.scenario) {
        return super::milligram::simulate(args);
    }
    let mut loaded = load_scenario(&args.scenario).context("loading the scenario")?;
    if let Some(material) = &args.material {
        let model = emberfit::case::load_material(material).context("loading the material")?;
        loaded
            .use_specimen_material(&model)
            .with_context(|| format!("using {} for the specimen", material.display()))?;
    }
    if let Some(flux_kw_m2) = args.flux {
        check_flux(flux_kw_m2)?;
        loaded.set_constant_irradiance_w_m2(flux_kw_m2 * 1e3);
    }
    if let Some(duration_s) = args.duration {
        check_duration(duration_s)?;
        loaded.scenario.duration_s = duration_s;
        check_size_after_duration(&loaded.scenario)?;
    }
    let history = run_simulation(&loaded.scenario)
        .with_context(|| format!("simulating {}", loaded.path.display()))?;
    let has_backing = loaded.scenario.layers.iter().any(|l| !l.is_specimen);
    if let Some(out) = &args.out {
        let bytes = curves_csv(&history, has_backing).context("formatting the curves")?;
        write_atomically(out, &bytes).with_context(|| format!("writing {}", out.display()))?;
    }
    if args.json {
        println!("{}", summary_json(&history.summary));
    } else {
        let exposure = exposure_text(&loaded.scenario.exposure.irradiance_w_m2);
        print!(
            "{}",
            summary_table(
                &format!(
                    "{} — {exposure}, {:.0} s",
                    loaded.title, loaded.scenario.duration_s
                ),
                &history.summary
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
