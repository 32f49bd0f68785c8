//! `predict`, `compare` and `report`: what a calibrated model says at untested conditions,
//! how it scores on held-out tests, and the report of a run.
//!
//! **Invariant:** a calibrated model is read only through `predict::CalibratedModel`, a run
//! directory only through `export::report` (which reads it through `run`); output through
//! `present::predict`.

use anyhow::{bail, Context, Result};

use emberfit::case::load_scenario;
use emberfit::export::write_atomically;
use emberfit::present;

use super::start_threads;
use crate::cli::{CompareArgs, PredictArgs, ReportArgs};

pub fn predict(args: PredictArgs) -> Result<()> {
    use emberfit::predict::{
        load_prepared_scenario, predict_on, prediction_csv, quantities_csv, BandDraw,
        CalibratedModel, Conditions, PredictionSettings,
    };
    let cluster = emberfit::cluster::Cluster::join().context("joining the MPI job")?;
    start_threads(args.threads)?;
    let calibrated =
        CalibratedModel::load(&args.calibrated).context("reading the calibrated model")?;
    let conditions = Conditions {
        irradiance_kw_m2: args.flux,
        thickness_mm: args.thickness_mm,
        duration_s: args.duration,
    };
    let scenario = load_prepared_scenario(&calibrated, &args.scenario, &conditions)
        .context("preparing the scenario")?;
    let settings = PredictionSettings {
        band_percent: args.band,
        n_samples: args.samples,
        seed: args.seed,
    };
    if cluster.is_worker() {
        let band = BandDraw::new(&calibrated, &scenario);
        return Ok(cluster.serve_band(band.as_ref())?);
    }
    let prediction = predict_on(&calibrated, &scenario, &settings, &cluster.evaluator())
        .context("predicting")?;
    if let Some(out) = &args.out {
        write_atomically(out, prediction_csv(&prediction).as_bytes())
            .with_context(|| format!("writing {}", out.display()))?;
        if prediction.band_percent.is_some() {
            let stem = out
                .file_stem()
                .map_or_else(|| "prediction".into(), |s| s.to_string_lossy().into_owned());
            let quantities = out.with_file_name(format!("{stem}-quantities.csv"));
            write_atomically(&quantities, quantities_csv(&prediction).as_bytes())
                .with_context(|| format!("writing {}", quantities.display()))?;
        }
    }
    if args.json {
        println!("{}", present::predict::prediction_json(&prediction));
        return Ok(());
    }
    for note in &prediction.notes {
        eprintln!("note: {note}");
    }
    print!(
        "{}",
        present::predict::prediction_table(&prediction, args.out.as_deref())
    );
    Ok(())
}

pub fn compare(args: CompareArgs) -> Result<()> {
    use emberfit::predict::compare::{compare_tests, scenario_of_job, scores_json, scores_table};
    use emberfit::predict::CalibratedModel;
    let calibrated =
        CalibratedModel::load(&args.calibrated).context("reading the calibrated model")?;
    let base = match &args.scenario {
        Some(path) => load_scenario(path).context("reading the scenario")?,
        None => match scenario_of_job(&calibrated) {
            Some(base) => base,
            None => bail!(
                "{} names no fit job that can be read from here; give the scenario the tests were run in with --scenario",
                args.calibrated.display()
            ),
        },
    };
    let scored = compare_tests(&calibrated, &base, &args.tests).context("scoring the tests")?;
    let scores: Vec<_> = scored.into_iter().map(|s| s.score).collect();
    if args.json {
        println!("{}", scores_json(&scores));
    } else {
        print!("{}", scores_table(&scores));
    }
    Ok(())
}

pub fn report(args: ReportArgs) -> Result<()> {
    use emberfit::export::report::{write_report, ReportOptions};
    start_threads(args.threads)?;
    if !(args.band > 0.0 && args.band < 100.0) {
        bail!(
            "--band must be a percentage between 0 and 100, got {}",
            args.band
        );
    }
    let options = ReportOptions {
        n_samples: args.samples,
        band_percent: args.band,
        held_out: args.tests.clone(),
    };
    let output = write_report(&args.run, &options)
        .with_context(|| format!("writing the report of {}", args.run.display()))?;
    for note in &output.notes {
        eprintln!("note: {note}");
    }
    println!(
        "report written to {} ({} plot files in {})",
        output.html.display(),
        output.plots.len(),
        args.run.join("plots").display()
    );
    Ok(())
}
