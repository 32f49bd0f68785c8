//! The milligram-scale commands: `simulate` on a scenario with a `[programme]` (TGA, DSC,
//! MCC), and `isoconversional`.
//!
//! **Invariant:** the kinetics are `microscale`'s; output through `present::milligram`
//! (screen) and `export` (files).

use anyhow::{bail, Context, Result};

use emberfit::export::write_atomically;
use emberfit::microscale::fit::predicted_peak_temperature_k;
use emberfit::microscale::isoconversional::analyse;
use emberfit::microscale::{
    fit_single_step, load_milligram_scenario, read_thermogram, simulate_programme, zero_d_csv,
    ConversionRun,
};
use emberfit::present::milligram::{
    isoconversional_json, isoconversional_table, profile_csv, zero_d_json, zero_d_table,
    ZeroDFigures,
};

use crate::cli::{IsoconversionalArgs, SimulateArgs};

pub fn simulate(args: SimulateArgs) -> Result<()> {
    if args.flux.is_some() {
        bail!(
            "--flux does not apply to {}: it is a milligram-scale scenario (a heating \
             programme, no irradiance)",
            args.scenario.display()
        );
    }
    if args.duration.is_some() {
        bail!(
            "--duration does not apply to {}: the heating programme sets the duration",
            args.scenario.display()
        );
    }
    let mut scenario = load_milligram_scenario(&args.scenario).context("loading the scenario")?;
    if let Some(material) = &args.material {
        let model = emberfit::case::load_material(material).context("loading the material")?;
        scenario
            .use_material(material, model)
            .with_context(|| format!("using {} for the sample", material.display()))?;
    }
    let history = simulate_programme(&scenario)
        .with_context(|| format!("simulating {}", scenario.path.display()))?;
    if let Some(out) = &args.out {
        let bytes = zero_d_csv(&history).context("formatting the curves")?;
        write_atomically(out, &bytes).with_context(|| format!("writing {}", out.display()))?;
    }
    let figures = ZeroDFigures::of(&history);
    if args.json {
        println!("{}", zero_d_json(&figures, history.n_steps));
    } else {
        print!(
            "{}",
            zero_d_table(&scenario.title, &figures, history.n_steps)
        );
        if let Some(out) = &args.out {
            println!(
                "curves written to {} ({} rows)",
                out.display(),
                history.time_s.len()
            );
        }
    }
    Ok(())
}

pub fn isoconversional(args: IsoconversionalArgs) -> Result<()> {
    let is_fraction = |v: f64| (0.0..=1.0).contains(&v);
    if !(is_fraction(args.from) && is_fraction(args.to) && args.from < args.to) {
        bail!(
            "--from and --to must satisfy 0 ≤ from < to ≤ 1, got {} and {}",
            args.from,
            args.to
        );
    }
    if !(args.step > 0.0 && args.step <= args.to - args.from) {
        bail!(
            "--step must be > 0 and at most to − from ({}), got {}",
            args.to - args.from,
            args.step
        );
    }
    if !(args.max_spread > 0.0 && args.max_spread.is_finite()) {
        bail!("--max-spread must be > 0 %, got {}", args.max_spread);
    }
    let n_steps = ((args.to - args.from) / args.step + 1e-9).floor() as usize;
    let conversions: Vec<f64> = (0..=n_steps)
        .map(|idx| args.from + idx as f64 * args.step)
        .collect();
    let mut runs = Vec::with_capacity(args.files.len());
    for path in &args.files {
        let thermogram = read_thermogram(path).context("reading a run")?;
        for notice in &thermogram.notices {
            eprintln!("note: {notice}");
        }
        runs.push(ConversionRun::from_thermogram(&thermogram).context("preparing a run")?);
    }
    let report = analyse(&runs, &conversions, args.max_spread / 100.0)
        .context("isoconversional analysis")?;
    let fit = if args.fit {
        Some(fit_single_step(&runs, true).context("fitting one reaction")?)
    } else {
        None
    };
    let mut predicted = Vec::new();
    if let Some(fit) = &fit {
        for run in &runs {
            predicted.push(
                predicted_peak_temperature_k(fit, run.heating_rate_k_s)
                    .context("simulating the fitted reaction")?,
            );
        }
    }
    if let Some(out) = &args.out {
        write_atomically(out, profile_csv(&conversions, &report).as_bytes())
            .with_context(|| format!("writing {}", out.display()))?;
    }
    if args.json {
        println!(
            "{}",
            isoconversional_json(&runs, &report, fit.as_ref(), &predicted)
        );
    } else {
        print!(
            "{}",
            isoconversional_table(&runs, &report, fit.as_ref(), &predicted)
        );
    }
    for warning in &report.warnings {
        eprintln!("warning: {warning}");
    }
    Ok(())
}
