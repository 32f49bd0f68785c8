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
        Command::Isoconversional(args) => milligram::isoconversional(args),
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
    if emberfit::microscale::is_milligram_scenario(&args.scenario) {
        return milligram::simulate(args);
    }
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

/// The milligram-scale commands: `simulate` on a scenario with a `[programme]`, and
/// `isoconversional`.
mod milligram {
    use anyhow::{bail, Context, Result};

    use emberfit::export::write_atomically;
    use emberfit::microscale::fit::predicted_peak_temperature_k;
    use emberfit::microscale::isoconversional::{analyse, IsoconversionalReport};
    use emberfit::microscale::{
        fit_single_step, load_milligram_scenario, read_thermogram, simulate_programme, zero_d_csv,
        ConversionRun, SingleStepFit,
    };
    use emberfit::physics::zero_d::ZeroDHistory;

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
        let scenario = load_milligram_scenario(&args.scenario).context("loading the scenario")?;
        let history = simulate_programme(&scenario)
            .with_context(|| format!("simulating {}", scenario.path.display()))?;
        if let Some(out) = &args.out {
            let bytes = zero_d_csv(&history).context("formatting the curves")?;
            write_atomically(out, &bytes).with_context(|| format!("writing {}", out.display()))?;
        }
        let summary = Summary::of(&history);
        if args.json {
            println!(
                "{}",
                serde_json::json!({
                    "peak_mlr_per_s": summary.peak_rate_per_s,
                    "peak_mlr_temperature_k": summary.peak_temperature_k,
                    "final_mass_fraction": summary.final_mass_fraction,
                    "dsc_heat_j_g": summary.dsc_j_g,
                    "mcc_heat_j_g": summary.mcc_j_g,
                    "steps": history.n_steps,
                })
            );
        } else {
            println!("{}", scenario.title);
            println!(
                "  {:<20} {:.3e} 1/s ({:.2} %/min) at {:.1} K",
                "peak mass-loss rate",
                summary.peak_rate_per_s,
                summary.peak_rate_per_s * 6000.0,
                summary.peak_temperature_k
            );
            println!(
                "  {:<20} {:.4}",
                "final mass fraction", summary.final_mass_fraction
            );
            println!("  {:<20} {:.1} J/g", "DSC heat", summary.dsc_j_g);
            println!(
                "  {:<20} {:.2} kJ/g",
                "MCC heat release",
                summary.mcc_j_g * 1e-3
            );
            println!("  {:<20} {}", "steps", history.n_steps);
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

    struct Summary {
        peak_rate_per_s: f64,
        peak_temperature_k: f64,
        final_mass_fraction: f64,
        dsc_j_g: f64,
        mcc_j_g: f64,
    }

    impl Summary {
        fn of(history: &ZeroDHistory) -> Self {
            let (_, peak_temperature_k, peak_rate_per_s) = history
                .mass_loss_rate_peak()
                .unwrap_or((0.0, f64::NAN, 0.0));
            let integral = |values: &[f64]| -> f64 {
                history
                    .time_s
                    .windows(2)
                    .zip(values.windows(2))
                    .map(|(t, v)| 0.5 * (t[1] - t[0]) * (v[0] + v[1]))
                    .sum()
            };
            Summary {
                peak_rate_per_s,
                peak_temperature_k,
                final_mass_fraction: history.mass_fraction.last().copied().unwrap_or(1.0),
                dsc_j_g: integral(&history.dsc_w_g),
                mcc_j_g: integral(&history.mcc_w_g),
            }
        }
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
        if args.json {
            println!("{}", report_json(&runs, &report, fit.as_ref(), &predicted));
        } else {
            print!("{}", report_table(&runs, &report, fit.as_ref(), &predicted));
        }
        for warning in &report.warnings {
            eprintln!("warning: {warning}");
        }
        Ok(())
    }

    fn report_json(
        runs: &[ConversionRun],
        report: &IsoconversionalReport,
        fit: Option<&SingleStepFit>,
        predicted: &[f64],
    ) -> serde_json::Value {
        let methods: serde_json::Map<String, serde_json::Value> = report
            .profiles
            .iter()
            .map(|(method, points)| {
                let rows: Vec<serde_json::Value> = points
                    .iter()
                    .map(|p| {
                        serde_json::json!({
                            "conversion": p.conversion,
                            "activation_energy_kj_mol": p.activation_energy_j_mol * 1e-3,
                            "standard_error_kj_mol": finite(p.standard_error_j_mol * 1e-3),
                            "r_squared": p.r_squared,
                            "runs": p.n_runs,
                        })
                    })
                    .collect();
                (method.name().to_string(), serde_json::Value::Array(rows))
            })
            .collect();
        let k = &report.kissinger;
        serde_json::json!({
            "runs": runs.iter().zip(&k.peaks).map(|(run, peak)| serde_json::json!({
                "file": run.label,
                "heating_rate_k_min": run.heating_rate_k_s * 60.0,
                "peak_temperature_k": peak.1,
            })).collect::<Vec<_>>(),
            "methods": methods,
            "kissinger": {
                "activation_energy_kj_mol": k.activation_energy_j_mol * 1e-3,
                "standard_error_kj_mol": finite(k.standard_error_j_mol * 1e-3),
                "pre_exponential_per_s": k.pre_exponential_per_s,
                "r_squared": k.r_squared,
            },
            "single_step_fit": fit.map(|f| serde_json::json!({
                "pre_exponential_per_s": f.pre_exponential_per_s,
                "activation_energy_kj_mol": f.activation_energy_j_mol * 1e-3,
                "order": f.order,
                "rms_conversion_error": f.rms_conversion_error,
                "predicted_peak_temperatures_k": predicted,
            })),
            "warnings": report.warnings,
        })
    }

    /// JSON has no NaN: a standard error that two runs cannot give becomes null.
    fn finite(value: f64) -> Option<f64> {
        value.is_finite().then_some(value)
    }

    fn report_table(
        runs: &[ConversionRun],
        report: &IsoconversionalReport,
        fit: Option<&SingleStepFit>,
        predicted: &[f64],
    ) -> String {
        let mut out = String::new();
        out.push_str("runs\n");
        for (idx, (run, peak)) in runs.iter().zip(&report.kissinger.peaks).enumerate() {
            out.push_str(&format!(
                "  {:>2}  {:>7.2} K/min  peak {:>6.1} K  {}\n",
                idx + 1,
                run.heating_rate_k_s * 60.0,
                peak.1,
                run.label
            ));
        }
        let error = |se: f64| {
            if se.is_finite() {
                format!("{:>6.1}", se * 1e-3)
            } else {
                format!("{:>6}", "-")
            }
        };
        for (method, points) in &report.profiles {
            out.push_str(&format!(
                "\n{}: E against conversion (kJ/mol, ± standard error, R²)\n",
                method.name()
            ));
            out.push_str("   alpha       E     ±      R²  runs\n");
            for p in points {
                out.push_str(&format!(
                    "  {:>6.3} {:>7.1} {} {:>7.4} {:>5}\n",
                    p.conversion,
                    p.activation_energy_j_mol * 1e-3,
                    error(p.standard_error_j_mol),
                    p.r_squared,
                    p.n_runs
                ));
            }
        }
        let k = &report.kissinger;
        out.push_str(&format!(
            "\nkissinger (peak temperatures): E {:.1} ± {} kJ/mol, A {:.3e} 1/s, R² {:.4}\n",
            k.activation_energy_j_mol * 1e-3,
            error(k.standard_error_j_mol).trim(),
            k.pre_exponential_per_s,
            k.r_squared
        ));
        if let Some(fit) = fit {
            out.push_str(&format!(
                "single-step fit: A {:.4e} 1/s, E {:.2} kJ/mol, order {:.3}, rms conversion \
                 error {:.4}\n",
                fit.pre_exponential_per_s,
                fit.activation_energy_j_mol * 1e-3,
                fit.order,
                fit.rms_conversion_error
            ));
            out.push_str(&format!(
                "  as a [[reaction]] of a material file (docs/file-formats.md):\n    \
                 pre_exponential_per_s = {:.4e}\n    activation_energy_kj_mol = {:.2}\n    \
                 order = {:.3}\n",
                fit.pre_exponential_per_s,
                fit.activation_energy_j_mol * 1e-3,
                fit.order
            ));
            for ((run, peak), model_k) in runs.iter().zip(&k.peaks).zip(predicted) {
                out.push_str(&format!(
                    "  {:>7.2} K/min  peak measured {:.1} K, model {:.1} K\n",
                    run.heating_rate_k_s * 60.0,
                    peak.1,
                    model_k
                ));
            }
        }
        out
    }
}
