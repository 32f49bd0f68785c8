//! Leave-one-irradiance-out on the open PMMA cone tests (MaCFP condensed-phase working group,
//! MIT licence; folder named by `EMBERFIT_REFERENCE_DATA`): for labs c and d, fit 25 kW/m² and
//! predict 65, fit 65 and predict 25, with the set-up of docs/calibration-pmma.md. Prints, per
//! held-out quantity, the repeat mean ± sd, the best fit, the parameter band and the prediction
//! band (test scatter and model error), with their widths and whether the band holds the mean.
//! Asserts nothing. Run: `EMBERFIT_REFERENCE_DATA=... cargo bench --bench leave_one_out`
//! (`EMBERFIT_LOO_ONLY=lab-c-65` for one fit, a comma list for several, `EMBERFIT_LOO_POSTERIOR_STEPS=0` for the
//! linearised band only, `EMBERFIT_LOO_KEEP=1` to keep the run directories).

use std::path::{Path, PathBuf};
use std::sync::atomic::AtomicBool;
use std::sync::Arc;

use emberfit::data::{reduce, TestDescription};
use emberfit::predict::{
    load_prepared_scenario, predict, CalibratedModel, Conditions, PredictionSettings,
};
use emberfit::run::{run_fit, RunOptions};

/// Steps of the posterior sample after each fit (16 walkers for the 7 parameters).
const POSTERIOR_STEPS: usize = 150;

#[path = "../tests/shared/pmma_labs.rs"]
mod pmma_labs;

use pmma_labs::LABS;

fn main() {
    let Some(folder) = std::env::var_os("EMBERFIT_REFERENCE_DATA").map(PathBuf::from) else {
        println!("leave_one_out: EMBERFIT_REFERENCE_DATA is not set; nothing to run");
        return;
    };
    let manifest = Path::new(env!("CARGO_MANIFEST_DIR"));
    let root = std::env::temp_dir().join(format!("emberfit-loo-{}", std::process::id()));
    let (mut inside, mut total) = (0, 0);
    println!(
        "| lab | fit | predict | quantity | held-out mean ± sd | best | parameter band (width) | prediction band (width) | inside |"
    );
    println!("|---|---|---|---|---|---|---|---|---|");
    // EMBERFIT_LOO_ONLY=lab-c-65 runs one fit; EMBERFIT_LOO_POSTERIOR_STEPS sets the posterior
    // sample's length (0: the linearised band only).
    let only = std::env::var("EMBERFIT_LOO_ONLY").ok();
    let posterior_steps: usize = std::env::var("EMBERFIT_LOO_POSTERIOR_STEPS")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(POSTERIOR_STEPS);
    for lab in &LABS {
        for (fit_flux, held_flux) in [(25.0, 65.0), (65.0, 25.0)] {
            let key = format!("{}-{fit_flux}", lab.name);
            if only
                .as_ref()
                .is_some_and(|o| !o.split(',').any(|k| k == key))
            {
                continue;
            }
            let dir = root.join(&key);
            std::fs::create_dir_all(&dir).expect("scratch folder");
            let descriptions = pmma_labs::write_descriptions(&dir, &folder, lab);
            let template = manifest.join("models/pmma-on-blanket.toml");
            pmma_labs::write_scenario(&dir, &template, lab, 1000.0);
            std::fs::write(
                dir.join("job.toml"),
                format!(
                    "title = \"{} {fit_flux} kW/m²\"\nmaterial = \"{}\"\nscenario = \"scenario.toml\"\n{}{}\
                     [settings]\nmax_evaluations = 1800\nstagnation_generations = 15\nlocal_max_evaluations = 150\nseed = 2\n\
                     posterior_steps = {posterior_steps}\nposterior_walkers = 16\nposterior_burn_in = {}\n",
                    lab.name,
                    template.display(),
                    pmma_labs::PARAMETERS,
                    pmma_labs::case(lab, &descriptions, fit_flux),
                    posterior_steps / 3
                ),
            )
            .expect("job");
            let no = Arc::new(AtomicBool::new(false));
            let options = RunOptions {
                runs_root: dir.join("runs"),
                name: Some("fit".into()),
                resume: false,
                threads: 2,
                time_budget_s: None,
                max_evaluations: None,
                seed: None,
            };
            let report = match run_fit(&dir.join("job.toml"), &options, no.clone(), no) {
                Ok(r) => r,
                Err(e) => {
                    println!(
                        "| {} | {fit_flux} | {held_flux} | fit failed: {e} |",
                        lab.name
                    );
                    continue;
                }
            };
            let calibrated =
                CalibratedModel::load(&report.directory.join("best.toml")).expect("best.toml");
            let conditions = Conditions {
                irradiance_kw_m2: Some(held_flux),
                thickness_mm: None,
                duration_s: Some(1000.0),
            };
            let scenario =
                load_prepared_scenario(&calibrated, &dir.join("scenario.toml"), &conditions)
                    .expect("scenario");
            let settings = PredictionSettings {
                band_percent: Some(95.0),
                n_samples: 60,
                seed: 1,
            };
            let prediction = predict(&calibrated, &scenario, &settings).expect("prediction");
            let mut measured: [Vec<f64>; 4] = Default::default();
            let mut ratio = 1.0;
            for (_, path) in descriptions.iter().filter(|(q, _)| *q == held_flux) {
                let reduced = reduce(&TestDescription::load(path).expect("test")).expect("reduce");
                ratio = reduced.specimen_area_m2 / reduced.exposed_area_m2;
                let r = reduced.report;
                for (k, v) in [
                    r.ignition_time_s,
                    r.peak_hrr_kw_m2,
                    r.time_to_peak_hrr_s,
                    r.total_heat_release_mj_m2,
                ]
                .into_iter()
                .enumerate()
                {
                    measured[k].extend(v);
                }
            }
            for (k, q) in prediction.quantities.iter().enumerate() {
                let values = &measured[k];
                let n = values.len() as f64;
                let mean = values.iter().sum::<f64>() / n;
                let sd =
                    (values.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (n - 1.0)).sqrt();
                // The prediction is per m² of burning specimen; the data are per the frame
                // opening, and the rim's energy counts in THR (docs/calibration-pmma.md).
                let f = if k == 3 { ratio } else { 1.0 };
                let best = q.best.unwrap_or(f64::NAN) * f;
                let (pl, pu) = (q.prediction_lower * f, q.prediction_upper * f);
                let holds = mean >= pl && mean <= pu;
                total += 1;
                inside += usize::from(holds);
                println!(
                    "| {} | {fit_flux} | {held_flux} | {} ({}) | {mean:.1} ± {sd:.1} | {best:.1} | {:.1} … {:.1} ({:.1}) | {pl:.1} … {pu:.1} ({:.1}) | {} |",
                    lab.name,
                    q.name,
                    q.unit,
                    q.lower * f,
                    q.upper * f,
                    (q.upper - q.lower) * f,
                    pu - pl,
                    if holds { "yes" } else { "no" }
                );
            }
            for note in &prediction.notes {
                println!("  note ({} fit {fit_flux}): {note}", lab.name);
            }
        }
    }
    println!("held-out repeat means inside the 95 % prediction band: {inside} of {total}");
    if std::env::var_os("EMBERFIT_LOO_KEEP").is_some() {
        println!("run directories kept in {}", root.display());
    } else {
        let _ = std::fs::remove_dir_all(&root);
    }
}
