//! The fit on real, noisy data: the open PMMA cone tests of the MaCFP condensed-phase working
//! group (MIT licence; see PROVENANCE.md in the folder named by `EMBERFIT_REFERENCE_DATA`).
//! Labs c and d each ran 25 and 65 kW/m² (three or four repeats). Each lab is calibrated on
//! both irradiances together (one fit per lab, shared by the tests below through a
//! `OnceLock`), and the calibrated model must reproduce each irradiance's repeat means of
//! peak HRR, time to peak, ignition time and total heat release (issue 13; the check values
//! are the data's own report quantities, computed here by `reduce` with the rules of the set's
//! SUMMARY.md). Without the variable the tests are skipped, saying so; under `CI=true` they fail.
//! docs/calibration-pmma.md explains the set-up and the numbers.

use std::path::Path;
use std::sync::atomic::AtomicBool;
use std::sync::{Arc, OnceLock};

use emberfit::data::{reduce, TestDescription};
use emberfit::run::{run_fit, RunOptions, RunSummary};

#[path = "../shared/pmma_labs.rs"]
mod pmma_labs;

use pmma_labs::{Lab, LABS};

/// Repeat mean and sample standard deviation of one report quantity.
#[derive(Debug, Clone, Copy)]
struct Spread {
    mean: f64,
    sd: f64,
}

/// The four report quantities, measured (repeat mean ± sd) or modelled (sd 0).
#[derive(Debug, Clone, Copy)]
struct Quantities {
    peak_hrr_kw_m2: Spread,
    time_to_peak_s: Spread,
    ignition_s: Spread,
    thr_mj_m2: Spread,
}

struct Calibrated {
    summary: RunSummary,
    /// (irradiance, measured, modelled) for 25 and 65 kW/m².
    rows: Vec<(f64, Quantities, Quantities)>,
}

fn spread(values: &[f64]) -> Spread {
    let n = values.len() as f64;
    let mean = values.iter().sum::<f64>() / n;
    let sd = (values.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (n - 1.0)).sqrt();
    Spread { mean, sd }
}

fn exact(value: f64) -> Spread {
    Spread {
        mean: value,
        sd: 0.0,
    }
}

/// Fits one lab on both irradiances and simulates the calibrated model at each.
fn calibrate(folder: &Path, lab: &Lab) -> Calibrated {
    let manifest = Path::new(env!("CARGO_MANIFEST_DIR"));
    let dir =
        std::env::temp_dir().join(format!("emberfit-pmma-{}-{}", lab.name, std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).unwrap();
    let descriptions = pmma_labs::write_descriptions(&dir, folder, lab);
    let template = manifest.join("models/pmma-on-blanket.toml");
    pmma_labs::write_scenario(&dir, &template, lab, 900.0);
    let cases: String = [25.0, 65.0]
        .iter()
        .map(|flux| pmma_labs::case(lab, &descriptions, *flux))
        .collect();
    std::fs::write(
        dir.join("job.toml"),
        format!(
            "title = \"PMMA {}, 25 and 65 kW/m² repeats\"\nmaterial = \"{}\"\nscenario = \"scenario.toml\"\n\n\
             {}{cases}[settings]\nmax_evaluations = 1800\nstagnation_generations = 15\nlocal_max_evaluations = 150\nseed = 2\n",
            lab.name,
            template.display(),
            pmma_labs::PARAMETERS,
        ),
    )
    .unwrap();
    let no = Arc::new(AtomicBool::new(false));
    let options = RunOptions {
        runs_root: dir.join("runs"),
        name: Some("pmma".into()),
        resume: false,
        threads: 1,
        time_budget_s: None,
        max_evaluations: None,
        seed: None,
    };
    let report =
        run_fit(&dir.join("job.toml"), &options, no.clone(), no).expect("the PMMA fit runs");
    let best = emberfit::case::load_material(&report.directory.join("best.toml")).unwrap();
    let mut rows = Vec::new();
    for flux in [25.0, 65.0] {
        let mut values: [Vec<f64>; 4] = Default::default();
        let mut ratio = 1.0;
        for (_, path) in descriptions.iter().filter(|(q, _)| *q == flux) {
            let reduced = reduce(&TestDescription::load(path).unwrap()).unwrap();
            ratio = reduced.specimen_area_m2 / reduced.exposed_area_m2;
            let r = reduced.report;
            values[0].push(r.peak_hrr_kw_m2.unwrap());
            values[1].push(r.time_to_peak_hrr_s.unwrap());
            values[2].push(r.ignition_time_s.unwrap());
            values[3].push(r.total_heat_release_mj_m2.unwrap());
        }
        let measured = Quantities {
            peak_hrr_kw_m2: spread(&values[0]),
            time_to_peak_s: spread(&values[1]),
            ignition_s: spread(&values[2]),
            thr_mj_m2: spread(&values[3]),
        };
        let mut loaded = emberfit::case::load_scenario(&dir.join("scenario.toml")).unwrap();
        loaded.use_specimen_material(&best).unwrap();
        loaded.set_constant_irradiance_w_m2(flux * 1e3);
        let history = emberfit::physics::simulate(&loaded.scenario).unwrap();
        let peak = history
            .samples
            .iter()
            .max_by(|a, b| a.hrr_w_m2.total_cmp(&b.hrr_w_m2))
            .unwrap();
        // The shielded rim of the slab counts in the total heat release (docs/calibration-pmma.md).
        let modelled = Quantities {
            peak_hrr_kw_m2: exact(peak.hrr_w_m2 / 1e3),
            time_to_peak_s: exact(peak.time_s),
            ignition_s: exact(history.summary.ignition_time_s.unwrap_or(f64::NAN)),
            thr_mj_m2: exact(history.summary.total_heat_release_j_m2 / 1e6 * ratio),
        };
        rows.push((flux, measured, modelled));
    }
    let _ = std::fs::remove_dir_all(&dir);
    Calibrated {
        summary: report.summary,
        rows,
    }
}

fn calibrated(folder: &Path, lab_index: usize) -> &'static Calibrated {
    static FITS: [OnceLock<Calibrated>; 2] = [OnceLock::new(), OnceLock::new()];
    FITS[lab_index].get_or_init(|| calibrate(folder, &LABS[lab_index]))
}

/// Checks one lab's calibration against its repeat means: within 2 sd of the repeats, and
/// peak HRR never worse than 5 % (issue 13's criterion).
fn check_lab(test_name: &str, lab_index: usize) {
    let Some(folder) = crate::util::reference_data(test_name) else {
        return;
    };
    let fit = calibrated(&folder, lab_index);
    for p in &fit.summary.parameters {
        eprintln!(
            "{test_name}: {} = {:.5} {} 95 % {:?}..{:?} {:?}",
            p.name, p.value, p.unit, p.lower_95, p.upper_95, p.warnings
        );
    }
    let mut failures = Vec::new();
    for (flux, measured, modelled) in &fit.rows {
        let checks = [
            ("peak_hrr", measured.peak_hrr_kw_m2, modelled.peak_hrr_kw_m2),
            (
                "time_to_peak",
                measured.time_to_peak_s,
                modelled.time_to_peak_s,
            ),
            ("ignition", measured.ignition_s, modelled.ignition_s),
            ("thr", measured.thr_mj_m2, modelled.thr_mj_m2),
        ];
        for (name, data, model) in checks {
            let mut tolerance = 2.0 * data.sd;
            if name == "peak_hrr" {
                tolerance = tolerance.min(0.05 * data.mean);
            }
            let error = model.mean - data.mean;
            eprintln!(
                "{test_name} {flux} kW/m² {name}: model {:.1} vs {:.1} ± {:.1} (error {error:+.1}, allowed ±{tolerance:.1})",
                model.mean, data.mean, data.sd
            );
            if error.abs() > tolerance {
                failures.push(format!(
                    "{flux} kW/m² {name}: error {error:+.1}, allowed ±{tolerance:.1}"
                ));
            }
        }
    }
    assert!(failures.is_empty(), "{test_name}: {failures:?}");
}

/// Lab d: all eight checks at the criterion (its 65 kW/m² peak HRR was 5.6 % low
/// before the peak HRR carried weight 4; docs/calibration-pmma.md §2).
#[test]
fn pmma_lab_d_calibration_reproduces_its_25_and_65_kw_tests() {
    check_lab(
        "pmma_lab_d_calibration_reproduces_its_25_and_65_kw_tests",
        1,
    );
}

/// Lab c, with its HRR moved 9 s earlier (`hrr_delay_s`) and the flame blockage fitted: all
/// eight checks at the criterion.
#[test]
fn pmma_lab_c_calibration_reproduces_its_25_and_65_kw_tests() {
    check_lab(
        "pmma_lab_c_calibration_reproduces_its_25_and_65_kw_tests",
        0,
    );
}

/// The fit reports how it ended: with a budget this small it stops on the budget, and
/// summary.json says it did not converge, with the reason.
#[test]
fn pmma_fit_on_a_small_budget_says_it_did_not_converge() {
    let Some(folder) =
        crate::util::reference_data("pmma_fit_on_a_small_budget_says_it_did_not_converge")
    else {
        return;
    };
    let fit = calibrated(&folder, 1);
    if fit.summary.reason.contains("evaluation budget") {
        assert!(!fit.summary.converged, "{}", fit.summary.reason);
        assert!(fit
            .summary
            .not_converged_reason
            .as_deref()
            .is_some_and(|r| r.contains("evaluation budget")));
    } else {
        assert_eq!(
            fit.summary.converged,
            emberfit::fit::engine::convergence(&fit.summary.reason).is_ok()
        );
    }
    assert!(fit.summary.effective_residuals > 0.0);
    assert!((fit.summary.effective_residuals as usize) < fit.summary.n_residuals);
}
