//! Milligram-scale cases in fit jobs (issue 7; docs/fit-jobs.md): twin experiments whose data
//! are made here by the 0-D model from known values with seeded noise (the "source" of each
//! check is the twin construction itself: the truth is what made the data), a job mixing a
//! TGA and a cone case, the two-step hand-over (`best.toml` as the material, `prior_from`), the
//! bad-input messages, and the open PMMA data when `EMBERFIT_REFERENCE_DATA` names its folder.

use std::path::{Path, PathBuf};
use std::sync::atomic::AtomicBool;
use std::sync::Arc;

use emberfit::case::job::load_job;
use emberfit::case::model::CaseModel;
use emberfit::fit::objective::Objective;
use emberfit::fit::parameters::Prior;
use emberfit::physics::material::{Component, GasRelease, Material, PropertyLaw, Reaction};
use emberfit::physics::zero_d::{simulate_zero_d, TemperatureProgramme, ZeroDSettings};
use emberfit::run::{run_fit, RunOptions, RunSummary};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, Normal};

fn manifest() -> &'static Path {
    Path::new(env!("CARGO_MANIFEST_DIR"))
}

fn scratch(name: &str) -> PathBuf {
    let dir = std::env::temp_dir().join(format!("emberfit-mgfit-{name}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).expect("temp dir");
    dir
}

fn options(root: &Path, name: &str) -> RunOptions {
    RunOptions {
        runs_root: root.join("runs"),
        name: Some(name.into()),
        resume: false,
        threads: 2,
        time_budget_s: None,
        max_evaluations: None,
        seed: None,
    }
}

fn fit(job: &Path, root: &Path, name: &str) -> RunSummary {
    let no = Arc::new(AtomicBool::new(false));
    run_fit(job, &options(root, name), no.clone(), no)
        .expect("the fit runs")
        .summary
}

/// One component that turns wholly to gas by one first-order reaction.
fn single_step(
    pre_exponential_per_s: f64,
    activation_energy_j_mol: f64,
    heat_of_reaction_j_kg: f64,
    heat_of_combustion_j_kg: f64,
) -> Material {
    Material::new(
        vec![Component {
            name: "sample".into(),
            density_kg_m3: 1200.0,
            conductivity_w_m_k: PropertyLaw::constant(0.2),
            specific_heat_j_kg_k: PropertyLaw::constant(1500.0),
            emissivity: 0.9,
            absorption_coefficient_per_m: None,
        }],
        vec![Reaction {
            reactant: 0,
            product: None,
            product_yield: 0.0,
            pre_exponential_per_s,
            activation_energy_j_mol,
            order: 1.0,
            heat_of_reaction_j_kg,
            gas: GasRelease {
                fuel_fraction: 1.0,
                heat_of_combustion_j_kg,
            },
        }],
    )
    .unwrap()
}

/// The material file a twin job starts from (values in the file's units).
fn material_file(dir: &Path, a_per_s: f64, e_kj_mol: f64, dh_kj_kg: f64, hc_mj_kg: f64) {
    std::fs::write(
        dir.join("start.toml"),
        format!(
            "title = \"twin start (invented)\"\nheat_of_combustion_mj_kg = {hc_mj_kg}\n\n\
             [[component]]\nname = \"sample\"\ndensity_kg_m3 = 1200.0\nconductivity_w_m_k = 0.2\n\
             specific_heat_j_kg_k = 1500.0\nemissivity = 0.9\n\n[[reaction]]\nfrom = \"sample\"\n\
             pre_exponential_per_s = {a_per_s:e}\nactivation_energy_kj_mol = {e_kj_mol}\n\
             heat_of_reaction_kj_kg = {dh_kj_kg}\nfuel_fraction = 1.0\n"
        ),
    )
    .unwrap();
}

/// Which signal a simulated thermogram file holds, with its column name and unit.
#[derive(Clone, Copy)]
enum Written {
    /// TGA mass in % (not normalised again by the reader, so the first row's noise does not
    /// scale the whole curve).
    MassPercent,
    DscWg,
    MccWg,
}

/// Simulates a linear ramp at `rate_k_min` from 300 K to `end_k` with the 0-D model, samples it
/// every 0.5 K and writes it as a lab-style file (names row, units row) with Gaussian noise of
/// standard deviation `noise` (in the file's unit) from a seeded generator.
#[allow(clippy::too_many_arguments)]
fn write_thermogram(
    path: &Path,
    material: &Material,
    rate_k_min: f64,
    end_k: f64,
    written: Written,
    noise: f64,
    seed: u64,
) {
    let programme = TemperatureProgramme::ramp(300.0, rate_k_min / 60.0, end_k).unwrap();
    let settings = ZeroDSettings {
        output_interval_s: 30.0 / rate_k_min,
        ..ZeroDSettings::default()
    };
    let history = simulate_zero_d(material, &[1.0], &programme, &settings).unwrap();
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let normal = Normal::new(0.0, noise).unwrap();
    let (name, unit) = match written {
        Written::MassPercent => ("mass", "%"),
        Written::DscWg => ("Heat Flow", "W/g"),
        Written::MccWg => ("HRR", "W/g"),
    };
    let mut text = format!("time,Temp,{name}\n[s],[K],[{unit}]\n");
    for idx in 0..history.time_s.len() {
        let value = match written {
            Written::MassPercent => 100.0 * history.mass_fraction[idx],
            Written::DscWg => history.dsc_w_g[idx],
            Written::MccWg => history.mcc_w_g[idx],
        } + normal.sample(&mut rng);
        text.push_str(&format!(
            "{:.3},{:.3},{value:.6}\n",
            history.time_s[idx], history.temperature_k[idx]
        ));
    }
    std::fs::write(path, text).unwrap();
}

fn parameter<'a>(summary: &'a RunSummary, name: &str) -> &'a emberfit::run::SummaryParameter {
    summary
        .parameters
        .iter()
        .find(|p| p.name == name)
        .unwrap_or_else(|| panic!("no parameter {name}"))
}

/// Asserts the truth lies inside the reported 95 % interval and prints the figures.
fn assert_covers(summary: &RunSummary, name: &str, truth: f64) {
    let p = parameter(summary, name);
    let (lower, upper) = (p.lower_95.expect("interval"), p.upper_95.expect("interval"));
    println!(
        "{name}: fitted {:.6e}, truth {truth:.6e}, 95 % [{lower:.6e}, {upper:.6e}]",
        p.value
    );
    assert!(
        lower <= truth && truth <= upper,
        "{name}: truth {truth} outside [{lower}, {upper}] (fitted {})",
        p.value
    );
}

/// Twin experiment (Arrhenius kinetics; the source is the twin construction): TGA curves
/// simulated by the 0-D model at 5, 10 and 20 K/min with known A = 5e10 1/s and
/// E = 150 kJ/mol, plus 0.2 % noise, fitted together through a fit job of TGA cases alone
/// (no scenario), starting from A = 1e9 1/s and E = 130 kJ/mol: each truth lies in its
/// reported 95 % interval, and the per-case outputs carry the new signal.
#[test]
fn twin_tga_at_three_heating_rates_recovers_a_and_e_within_their_intervals() {
    let dir = scratch("tga-twin");
    let (true_a, true_e_kj) = (5e10, 150.0);
    let truth = single_step(true_a, true_e_kj * 1e3, 0.0, 2.5e7);
    for (rate, seed) in [(5.0, 5), (10.0, 10), (20.0, 20)] {
        write_thermogram(
            &dir.join(format!("tga-{rate}.csv")),
            &truth,
            rate,
            800.0,
            Written::MassPercent,
            0.2,
            seed,
        );
    }
    material_file(&dir, 1e9, 130.0, 0.0, 25.0);
    let mut job = String::from(
        "title = \"TGA twin\"\nmaterial = \"start.toml\"\n\n\
         [[parameter]]\npath = \"reaction.0.activation_energy_kj_mol\"\nmin = 100.0\nmax = 250.0\n\n\
         [[parameter]]\npath = \"reaction.0.pre_exponential_per_s\"\nmin = 1e6\nmax = 1e18\nscale = \"log\"\n\n",
    );
    for rate in [5.0, 10.0, 20.0] {
        job.push_str(&format!(
            "[[case]]\nname = \"TGA {rate} K/min\"\nkind = \"tga\"\ntests = [\"tga-{rate}.csv\"]\n\
             signals = [{{ signal = \"mass_fraction\", sigma = 0.002 }}]\n\n"
        ));
    }
    job.push_str("[settings]\nmax_evaluations = 2000\nstagnation_generations = 30\nseed = 4\n");
    let job_path = dir.join("job.toml");
    std::fs::write(&job_path, job).unwrap();
    let summary = fit(&job_path, &dir, "tga-twin");
    println!("tga twin objective {:.1}", summary.objective);
    assert_covers(&summary, "reaction.0.activation_energy_kj_mol", true_e_kj);
    assert_covers(&summary, "reaction.0.pre_exponential_per_s", true_a);
    let e = parameter(&summary, "reaction.0.activation_energy_kj_mol").value;
    assert!((e - true_e_kj).abs() <= 0.01 * true_e_kj, "{e}");
    // Every case is scored and written with the milligram signal's name.
    assert_eq!(summary.parts.len(), 3);
    assert!(summary.parts.iter().all(|p| p.signal == "mass_fraction"));
    let csv =
        std::fs::read_to_string(dir.join("runs/tga-twin/cases/tga-10-k-min--mass_fraction.csv"))
            .expect("case CSV");
    assert!(csv.starts_with("time_s,measured,sigma,model,residual\n"));
    // With the truth recovered, the residuals look like the noise: rms near 1.
    let residuals: Vec<f64> = csv
        .lines()
        .skip(1)
        .map(|l| l.rsplit(',').next().unwrap().parse().unwrap())
        .collect();
    let rms = (residuals.iter().map(|r| r * r).sum::<f64>() / residuals.len() as f64).sqrt();
    println!("tga twin 10 K/min standardised residual rms {rms:.3}");
    assert!((0.8..1.2).contains(&rms), "{rms}");
    let _ = std::fs::remove_dir_all(&dir);
}

/// Twin experiment (the source is the twin construction): with the kinetics fixed at their
/// true values, an MCC run at 60 K/min (heat release rate = gas release × heat of combustion,
/// docs/physics.md §3) and a DSC run at 10 K/min (heat flow = rate × heat of reaction) simulated
/// from Hc = 25 MJ/kg and ΔH = 800 kJ/kg, with noise, give back both heats inside their 95 %
/// intervals, fitted together in one job.
#[test]
fn twin_mcc_and_dsc_cases_recover_heats_of_combustion_and_reaction() {
    let dir = scratch("heats-twin");
    let truth = single_step(5e10, 150e3, 8e5, 2.5e7);
    write_thermogram(
        &dir.join("mcc.csv"),
        &truth,
        60.0,
        900.0,
        Written::MccWg,
        3.0,
        60,
    );
    write_thermogram(
        &dir.join("dsc.csv"),
        &truth,
        10.0,
        800.0,
        Written::DscWg,
        0.01,
        11,
    );
    material_file(&dir, 5e10, 150.0, 400.0, 18.0);
    let job = "title = \"heats twin\"\nmaterial = \"start.toml\"\n\n\
        [[parameter]]\npath = \"heat_of_combustion_mj_kg\"\nmin = 10.0\nmax = 40.0\n\n\
        [[parameter]]\npath = \"reaction.0.heat_of_reaction_kj_kg\"\nmin = 0.0\nmax = 2000.0\n\n\
        [[case]]\nname = \"MCC\"\nkind = \"mcc\"\ntests = [\"mcc.csv\"]\n\
        signals = [{ signal = \"mcc_hrr\", sigma = 3.0 }]\n\n\
        [[case]]\nname = \"DSC\"\ntests = [\"dsc.csv\"]\nkind = \"dsc\"\n\
        signals = [{ signal = \"dsc_heat_flow\", sigma = 0.01 }]\n\n\
        [settings]\nmax_evaluations = 600\nseed = 2\n";
    let job_path = dir.join("job.toml");
    std::fs::write(&job_path, job).unwrap();
    let summary = fit(&job_path, &dir, "heats");
    assert_covers(&summary, "heat_of_combustion_mj_kg", 25.0);
    assert_covers(&summary, "reaction.0.heat_of_reaction_kj_kg", 800.0);
    let signals: Vec<&str> = summary.parts.iter().map(|p| p.signal.as_str()).collect();
    assert_eq!(signals, ["mcc_hrr", "dsc_heat_flow"]);
    let _ = std::fs::remove_dir_all(&dir);
}

/// A job with a TGA case beside a cone case runs: both are scored, both get their CSV, and the
/// calibrated model is written. (A short budget: this checks the plumbing, not the optimum.)
#[test]
fn a_job_mixing_a_tga_case_and_a_cone_case_runs() {
    let dir = scratch("mixed");
    let demo = manifest().join("demo-cases/ridgeline-panel");
    let job = format!(
        "title = \"mixed\"\nmaterial = \"{demo}/material-true.toml\"\nscenario = \"{demo}/scenario.toml\"\n\n\
         [[parameter]]\npath = \"reaction.0.peak_temperature_k\"\nmin = 610.0\nmax = 660.0\n\n\
         [[parameter]]\npath = \"component.virgin.conductivity_w_m_k\"\nmin = 0.1\nmax = 0.3\n\n\
         [[case]]\nname = \"TGA 10 K/min\"\nkind = \"tga\"\ntests = [\"{demo}/tga-10k.csv\"]\n\
         signals = [{{ signal = \"mass_fraction\", sigma = 0.0005 }}]\n\n\
         [[case]]\nname = \"cone 50\"\ntests = [\"{demo}/harbour-lab-50kw.toml\"]\n\
         signals = [{{ signal = \"hrr\" }}]\n\n\
         [settings]\nmax_evaluations = 24\npopulation = 8\nlocal_refinement = false\nseed = 1\n",
        demo = demo.display()
    );
    let job_path = dir.join("job.toml");
    std::fs::write(&job_path, job).unwrap();
    let loaded = load_job(&job_path).expect("the mixed job loads");
    assert!(loaded.cases[0].milligram().is_some() && loaded.cases[0].cone_scenario().is_none());
    assert!(loaded.cases[1].cone_scenario().is_some());
    let summary = fit(&job_path, &dir, "mixed");
    let parts: Vec<(&str, &str)> = summary
        .parts
        .iter()
        .map(|p| (p.case.as_str(), p.signal.as_str()))
        .collect();
    assert_eq!(
        parts,
        [("TGA 10 K/min", "mass_fraction"), ("cone 50", "hrr")]
    );
    assert!(summary
        .parts
        .iter()
        .all(|p| p.cost.is_finite() && p.cost > 0.0));
    let run = dir.join("runs/mixed");
    assert!(run.join("cases/tga-10-k-min--mass_fraction.csv").exists());
    assert!(run.join("cases/cone-50--hrr.csv").exists());
    emberfit::case::load_material(&run.join("best.toml")).expect("best.toml loads");
    let _ = std::fs::remove_dir_all(&dir);
}

/// The two-step hand-over. Step 1 is the demo's kinetic job (invented TGA and MCC data of the
/// Ridgeline facing, demo-cases/ridgeline-panel/). Step 2 (a) loads its `best.toml` as a job's
/// material, which then holds the fitted E, A and heat of combustion as fixed values, and (b)
/// takes `prior_from` its summary.json: the prior is the estimate and standard error, and it
/// adds ((x − mean)/sd)² to the objective.
#[test]
fn prior_from_reads_a_summary_and_best_toml_serves_as_the_material() {
    let dir = scratch("two-step");
    let demo = manifest().join("demo-cases/ridgeline-panel");
    let step1 = fit(&demo.join("kinetics.toml"), &dir, "kinetics");
    let peak = parameter(&step1, "reaction.0.peak_temperature_k");
    let e = parameter(&step1, "reaction.0.activation_energy_kj_mol").value;
    let hc = parameter(&step1, "heat_of_combustion_mj_kg").value;
    let sd = peak.standard_error_fit_space.expect("standard error");
    println!(
        "kinetic step: peak {:.3} K (se {sd:.4}), E {e:.2} kJ/mol, Hc {hc:.3} MJ/kg",
        peak.value
    );
    let start = peak.value + 3.0 * sd;
    let job = format!(
        "title = \"step 2\"\nmaterial = \"runs/kinetics/best.toml\"\n\n\
         [[parameter]]\npath = \"reaction.0.peak_temperature_k\"\nmin = 600.0\nmax = 700.0\n\
         start = {start}\nprior_from = \"runs/kinetics/summary.json\"\n\n\
         [[case]]\nname = \"TGA 10 K/min\"\nkind = \"tga\"\ntests = [\"{}/tga-10k.csv\"]\n",
        demo.display()
    );
    let job_path = dir.join("step2.toml");
    std::fs::write(&job_path, job).unwrap();
    let loaded = load_job(&job_path).expect("step 2 loads");
    // (a) best.toml as the material: the kinetic results are its values.
    let reaction = &loaded.material.material.reactions[0];
    assert!((reaction.activation_energy_j_mol * 1e-3 - e).abs() < 1e-9 * e);
    assert!((reaction.gas.heat_of_combustion_j_kg * 1e-6 - hc).abs() < 1e-9 * hc);
    // (b) the prior is the earlier estimate with its standard error.
    assert_eq!(
        loaded.parameters[0].prior,
        Some(Prior::Normal {
            mean: peak.value,
            standard_deviation: sd
        })
    );
    let model = CaseModel::new(&loaded);
    let objective = Objective::new(&model);
    let evaluation = objective.evaluate(&[start]);
    println!("prior cost at 3 standard errors: {}", evaluation.prior_cost);
    assert!(
        (evaluation.prior_cost - 9.0).abs() < 1e-6,
        "{}",
        evaluation.prior_cost
    );
    let data_cost: f64 = evaluation.parts.iter().map(|p| p.cost).sum();
    assert!((evaluation.cost - data_cost - 9.0).abs() < 1e-6 * evaluation.cost.max(1.0));
    // A summary that does not exist is named with the key and line.
    let broken = std::fs::read_to_string(&job_path)
        .unwrap()
        .replace("runs/kinetics/summary.json", "runs/nowhere/summary.json");
    std::fs::write(&job_path, broken).unwrap();
    let message = load_job(&job_path).unwrap_err().to_string();
    assert!(
        message.contains("step2.toml:9: `parameter[0].prior_from`")
            && message.contains("runs/nowhere/summary.json"),
        "{message}"
    );
    let _ = std::fs::remove_dir_all(&dir);
}

fn emberfit() -> std::process::Command {
    let mut command = std::process::Command::new(env!("CARGO_BIN_EXE_emberfit"));
    command.current_dir(manifest());
    command
}

/// Each broken milligram job gives an error naming file, line and key, and starts no run.
#[test]
fn broken_milligram_jobs_name_file_line_and_key() {
    let runs = scratch("bad-milligram");
    let cases = [
        (
            "milligram-unknown-kind.toml",
            "milligram-unknown-kind.toml:12: `case[0].kind` must be \"cone\", \"tga\", \"dsc\" or \"mcc\", got \"tgaa\"",
        ),
        (
            "milligram-signal-on-cone-case.toml",
            "milligram-signal-on-cone-case.toml:16: `case[0].signals[1].signal` `mass_fraction` is a milligram-scale signal (TGA)",
        ),
        (
            "milligram-missing-file.toml",
            "milligram-missing-file.toml:13: `case[0].tests` cannot use tests/bad-input/fit/no-such-tga.csv: cannot read",
        ),
        (
            "milligram-cone-case-without-scenario.toml",
            "milligram-cone-case-without-scenario.toml:17: `scenario` is missing: case `50 kW/m²` (case[1]) is a cone case",
        ),
        (
            "milligram-wrong-kind.toml",
            "milligram-wrong-kind.toml:12: `case[0].kind` is \"dsc\", but",
        ),
        (
            "milligram-scenario-parameter.toml",
            "milligram-scenario-parameter.toml:6: `parameter[0].path` sets a value of the cone scenario",
        ),
        (
            "prior-from-unknown-parameter.toml",
            "prior-from-unknown-parameter.toml:10: `parameter[0].prior_from` tests/bad-input/fit/kinetics-summary.json has no parameter `reaction.0.heat_of_reaction_kj_kg`",
        ),
    ];
    for (file, expected) in cases {
        let path = Path::new("tests/bad-input/fit").join(file);
        let output = emberfit()
            .args(["fit", path.to_str().unwrap(), "--headless", "--runs-dir"])
            .arg(&runs)
            .output()
            .expect("emberfit runs");
        let stderr = String::from_utf8_lossy(&output.stderr);
        assert_eq!(output.status.code(), Some(1), "{file}: {stderr}");
        assert!(
            stderr.contains(expected),
            "{file}: expected `{expected}` in:\n{stderr}"
        );
    }
    assert_eq!(std::fs::read_dir(&runs).map(|d| d.count()).unwrap_or(0), 0);
}

/// Open PMMA data (MaCFP condensed-phase database, see the data's PROVENANCE.md; MIT licence),
/// through a fit job: one n-th order step (A by its peak temperature at 10 K/min, E, n) fitted
/// to lab a's 10 and 20 K/min nitrogen TGA runs (replicate 1) as two TGA cases predicts the
/// peak of the 30 K/min run within 3 K, with its own peaks in the source's bands (640 ± 7.5 K at
/// 10 K/min, 650 ± 7.5 K at 20 K/min): the checks, now through the fit job.
#[test]
fn macfp_pmma_tga_fit_job_at_two_heating_rates_predicts_the_third_peak() {
    let Some(folder) = crate::util::reference_data(
        "macfp_pmma_tga_fit_job_at_two_heating_rates_predicts_the_third_peak",
    ) else {
        return;
    };
    let dir = scratch("pmma-job");
    let tga = folder.join("tga");
    let job = format!(
        "title = \"PMMA kinetics\"\nmaterial = \"{}\"\n\n\
         [[parameter]]\npath = \"reaction.0.activation_energy_kj_mol\"\nmin = 100.0\nmax = 300.0\n\n\
         [[parameter]]\npath = \"reaction.0.peak_temperature_k\"\nmin = 600.0\nmax = 700.0\n\n\
         [[parameter]]\npath = \"reaction.0.order\"\nmin = 0.5\nmax = 2.5\n\n\
         [[case]]\nname = \"10 K/min\"\nkind = \"tga\"\ntests = [\"{}\"]\n\n\
         [[case]]\nname = \"20 K/min\"\nkind = \"tga\"\ntests = [\"{}\"]\n\n\
         [settings]\nmax_evaluations = 1500\nseed = 5\n",
        manifest().join("models/thermoplastic.toml").display(),
        tga.join("tga_n2_10k_lab-a_1.csv").display(),
        tga.join("tga_n2_20k_lab-a_1.csv").display()
    );
    let job_path = dir.join("job.toml");
    std::fs::write(&job_path, job).unwrap();
    let summary = fit(&job_path, &dir, "pmma");
    let material = emberfit::case::load_material(&dir.join("runs/pmma/best.toml"))
        .expect("best.toml loads")
        .material;
    let run_30 = emberfit::microscale::ConversionRun::from_thermogram(
        &emberfit::microscale::read_thermogram(&tga.join("tga_n2_30k_lab-a_1.csv")).unwrap(),
    )
    .unwrap();
    let measured_k = run_30.peak_temperature_k().unwrap();
    let model_peak_k = |heating_rate_k_s: f64| {
        let programme = TemperatureProgramme::ramp(400.0, heating_rate_k_s, 900.0).unwrap();
        let settings = ZeroDSettings {
            output_interval_s: 0.25 / heating_rate_k_s,
            ..ZeroDSettings::default()
        };
        let history = simulate_zero_d(&material, &[1.0], &programme, &settings).unwrap();
        history.mass_loss_rate_peak().unwrap().1
    };
    let model_k = model_peak_k(run_30.heating_rate_k_s);
    // The fitted model's own peaks at the two fitted runs' rates sit in the source's bands.
    for (file, centre_k) in [
        ("tga_n2_10k_lab-a_1.csv", 640.0),
        ("tga_n2_20k_lab-a_1.csv", 650.0),
    ] {
        let run = emberfit::microscale::ConversionRun::from_thermogram(
            &emberfit::microscale::read_thermogram(&tga.join(file)).unwrap(),
        )
        .unwrap();
        let peak_k = model_peak_k(run.heating_rate_k_s);
        println!("pmma fit job: model peak {peak_k:.1} K for {file} (band {centre_k} ± 7.5 K)");
        assert!((peak_k - centre_k).abs() <= 7.5, "{file}: {peak_k}");
    }
    let reaction = &material.reactions[0];
    println!(
        "pmma fit job (10 + 20 K/min): E {:.2} kJ/mol, A {:.4e} 1/s, n {:.3}; objective {:.3}; \
         30 K/min peak predicted {model_k:.1} K vs measured {measured_k:.1} K",
        reaction.activation_energy_j_mol * 1e-3,
        reaction.pre_exponential_per_s,
        reaction.order,
        summary.objective
    );
    assert!(
        (model_k - measured_k).abs() <= 3.0,
        "{model_k} vs {measured_k}"
    );
    let _ = std::fs::remove_dir_all(&dir);
}
