//! Leave-one-irradiance-out on the open PMMA cone tests (MaCFP condensed-phase working group,
//! MIT licence; folder named by `EMBERFIT_REFERENCE_DATA`): for labs c and d, fit 25 kW/m² and
//! predict 65, fit 65 and predict 25, with the set-up of docs/calibration-pmma.md. Prints, per
//! held-out quantity, the repeat mean ± sd, the best fit, the parameter band and the prediction
//! band (test scatter and model error), with their widths and whether the band holds the mean.
//! Asserts nothing. Run: `EMBERFIT_REFERENCE_DATA=... cargo bench --bench leave_one_out`
//! (`EMBERFIT_LOO_ONLY=lab-c-65` for one fit, `EMBERFIT_LOO_POSTERIOR_STEPS=0` for the
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

struct Lab {
    name: &'static str,
    exposed_area_m2: f64,
    backing_conductivity_w_m_k: f64,
    mass_column: &'static str,
    /// (file, irradiance kW/m², initial mass g) from the set's tests.toml.
    tests: &'static [(&'static str, f64, f64)],
}

const LABS: [Lab; 2] = [
    Lab {
        name: "lab-c",
        exposed_area_m2: 0.00884,
        backing_conductivity_w_m_k: 0.04,
        mass_column: "Mass",
        tests: &[
            ("cone/cone_25kw_lab-c_1.csv", 25.0, 71.62),
            ("cone/cone_25kw_lab-c_2.csv", 25.0, 74.09),
            ("cone/cone_25kw_lab-c_3.csv", 25.0, 70.85),
            ("cone/cone_65kw_lab-c_1.csv", 65.0, 72.47),
            ("cone/cone_65kw_lab-c_2.csv", 65.0, 69.91),
            ("cone/cone_65kw_lab-c_3.csv", 65.0, 73.45),
            ("cone/cone_65kw_lab-c_4.csv", 65.0, 74.67),
        ],
    },
    Lab {
        name: "lab-d",
        exposed_area_m2: 0.0084,
        backing_conductivity_w_m_k: 0.16,
        mass_column: "mass",
        tests: &[
            ("cone/cone_25kw_lab-d_1.csv", 25.0, 71.44),
            ("cone/cone_25kw_lab-d_2.csv", 25.0, 71.72),
            ("cone/cone_25kw_lab-d_3.csv", 25.0, 69.88),
            ("cone/cone_65kw_lab-d_1.csv", 65.0, 69.9),
            ("cone/cone_65kw_lab-d_2.csv", 65.0, 73.72),
            ("cone/cone_65kw_lab-d_3.csv", 65.0, 69.86),
        ],
    },
];

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
            if only.as_ref().is_some_and(|o| *o != key) {
                continue;
            }
            let dir = root.join(&key);
            std::fs::create_dir_all(&dir).expect("scratch folder");
            let mut descriptions = Vec::new();
            for (file, flux, mass) in lab.tests {
                let path = dir.join(format!("{}.toml", file.replace('/', "_")));
                std::fs::write(
                    &path,
                    format!(
                        "data_file = \"{}\"\nirradiance_kw_m2 = {flux}\nexposed_area_m2 = {}\nspecimen_area_m2 = 0.01\n\
                         initial_mass_g = {mass}\nthickness_mm = 6.0\n\n[columns]\ntime = \"Time\"\nmass = \"{}\"\nhrr = \"HRR\"\n",
                        folder.join(file).display(),
                        lab.exposed_area_m2,
                        lab.mass_column
                    ),
                )
                .expect("description");
                descriptions.push((*flux, path));
            }
            std::fs::write(
                dir.join("wool.toml"),
                format!(
                    "title = \"wool (assumed density and heat capacity)\"\n[[component]]\nname = \"wool\"\n\
                     density_kg_m3 = 128.0\nconductivity_w_m_k = {}\nspecific_heat_j_kg_k = 1000.0\nemissivity = 0.9\n",
                    lab.backing_conductivity_w_m_k
                ),
            )
            .expect("wool");
            let template = manifest.join("models/pmma-on-blanket.toml");
            std::fs::write(
                dir.join("scenario.toml"),
                format!(
                    "title = \"PMMA on wool\"\nduration_s = 1000.0\n[[layer]]\nmaterial = \"{}\"\nthickness_mm = 6.0\n\
                     [[layer]]\nmaterial = \"wool.toml\"\nthickness_mm = 19.0\n[exposure]\nirradiance_kw_m2 = 25.0\n\
                     flame_heat_flux_kw_m2 = 19.6\n[back]\nboundary = \"ambient\"\n[numerics]\nmax_temperature_change_k = 2.0\n\
                     max_conversion_per_step = 0.02\nmax_step_s = 1.0\n",
                    template.display()
                ),
            )
            .expect("scenario");
            let tests: Vec<String> = descriptions
                .iter()
                .filter(|(q, _)| *q == fit_flux)
                .map(|(_, p)| format!("\"{}\"", p.display()))
                .collect();
            std::fs::write(
                dir.join("job.toml"),
                format!(
                    "title = \"{} {fit_flux} kW/m²\"\nmaterial = \"{}\"\nscenario = \"scenario.toml\"\n\
                     [[parameter]]\npath = \"component.virgin.conductivity_w_m_k\"\nmin = 0.08\nmax = 0.6\n\
                     [[parameter]]\npath = \"component.virgin.specific_heat_j_kg_k\"\nmin = 800.0\nmax = 3000.0\n\
                     [[parameter]]\npath = \"reaction.0.peak_temperature_k\"\nmin = 600.0\nmax = 700.0\n\
                     [[parameter]]\npath = \"reaction.0.heat_of_reaction_kj_kg\"\nmin = 200.0\nmax = 3000.0\n\
                     [[parameter]]\npath = \"component.virgin.absorption_per_m\"\nmin = 300.0\nmax = 100000.0\nscale = \"log\"\n\
                     [[parameter]]\npath = \"heat_of_combustion_mj_kg\"\nmin = 15.0\nmax = 32.0\n\
                     [[parameter]]\npath = \"exposure.flame_heat_flux_kw_m2\"\nmin = 0.0\nmax = 40.0\n\
                     [[case]]\nname = \"{fit_flux} kW/m²\"\ntests = [{}]\n\
                     signals = [{{ signal = \"mlr\", weight = 0.01 }}, {{ signal = \"hrr\", weight = 0.01 }}, {{ signal = \"ignition_time\" }}, \
                     {{ signal = \"peak_hrr\" }}, {{ signal = \"time_to_peak_hrr\" }}, {{ signal = \"total_heat_release\" }}]\n\
                     [settings]\nmax_evaluations = 1800\nstagnation_generations = 15\nlocal_max_evaluations = 150\nseed = 2\nposterior_steps = {posterior_steps}\nposterior_walkers = 16\nposterior_burn_in = {}\n",
                    lab.name,
                    template.display(),
                    tests.join(", "),
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
