//! Test data in (src/data/): oxygen-consumption equations on hand-worked values, the
//! five-point derivative on polynomials, a synthetic cone test through the forward oxygen
//! relation, the open PMMA data (when `EMBERFIT_REFERENCE_DATA` names its folder), and broken
//! files that must give the stated error.

use std::path::{Path, PathBuf};

use emberfit::data::derivative::five_point_derivative;
use emberfit::data::ignition::{analyse, Correlation, IgnitionPoint, IgnitionSettings};
use emberfit::data::oxygen::{
    depletion_factor, exhaust_mass_flow_kg_s, hrr_general_kw, hrr_oxygen_only_kw, oxygen_for_hrr,
    AmbientGas, GasReading, AMBIENT_DRY_OXYGEN,
};
use emberfit::data::repeats::{combine, Alignment};
use emberfit::data::table::read_named_columns;
use emberfit::data::{reduce, Reduced, TestDescription};

/// The folder of the open PMMA data (MaCFP condensed-phase database, PMMA calibration data,
/// MIT licence; see its PROVENANCE.md), or `None` with a message when the variable is unset.
fn reference_data(test_name: &str) -> Option<PathBuf> {
    crate::util::reference_data(test_name)
}

/// One cone test of the PMMA set, with the conditions its tests.toml gives.
struct ConeEntry {
    file: String,
    description: TestDescription,
}

fn pmma_cone_entries(dir: &Path) -> Vec<ConeEntry> {
    let text = std::fs::read_to_string(dir.join("tests.toml")).unwrap();
    let table: toml::Table = toml::from_str(&text).unwrap();
    let mut entries = Vec::new();
    for test in table["test"].as_array().unwrap() {
        if test["kind"].as_str() != Some("cone") {
            continue;
        }
        let file = test["file"].as_str().unwrap().to_string();
        let area_m2 = test["exposed_area_m2"].as_float().unwrap();
        let flux_kw_m2 = test["heat_flux_kw_m2"].as_float().unwrap();
        let mut description = TestDescription::for_csv(&dir.join(&file), area_m2, flux_kw_m2);
        // The set's own note: lab-b's load cell weighs holder and backing too (not tared).
        description.is_mass_tared = test["mass_column"].as_str() == Some("specimen");
        entries.push(ConeEntry { file, description });
    }
    entries
}

/// Per-test check values from the set's SUMMARY.md table "Per test": file → (pHRR, t_peak,
/// t_ig, THR, q180).
fn summary_values(dir: &Path) -> Vec<(String, [f64; 5])> {
    let text = std::fs::read_to_string(dir.join("SUMMARY.md")).unwrap();
    let section = text.split("## Per test").nth(1).unwrap();
    let mut values = Vec::new();
    for line in section.lines().filter(|l| l.starts_with("| cone_")) {
        let cells: Vec<&str> = line.split('|').map(str::trim).collect();
        let number = |idx: usize| cells[idx].parse::<f64>().unwrap();
        values.push((
            cells[1].to_string(),
            [number(3), number(4), number(5), number(6), number(7)],
        ));
    }
    values
}

fn reduce_all_pmma(dir: &Path) -> Vec<(String, Reduced)> {
    pmma_cone_entries(dir)
        .into_iter()
        .map(|entry| {
            let reduced =
                reduce(&entry.description).unwrap_or_else(|err| panic!("{}: {err}", entry.file));
            (entry.file, reduced)
        })
        .collect()
}

/// MaCFP PMMA data (see PROVENANCE.md of the set): every cone file reads, and its effective
/// heat of combustion lies in the set's acceptance band 23.5 ± 2.5 kJ/g (SUMMARY.md, "Acceptance
/// criteria" of the source). Peak HRR, its time, the ignition time (same stated rule as the
/// set: 10 % of peak held for 10 s), THR and the 180 s average are compared with the set's
/// own per-test table, which was computed independently of this code.
#[test]
fn pmma_cone_files_read_and_their_heat_of_combustion_is_in_the_stated_band() {
    let Some(dir) = reference_data("pmma_cone_files_read") else {
        return;
    };
    let summary = summary_values(&dir);
    let reduced = reduce_all_pmma(&dir);
    assert_eq!(reduced.len(), 19, "the set lists 19 cone files");
    for (file, test) in &reduced {
        let report = &test.report;
        let ehc = report.effective_heat_of_combustion_mj_kg.unwrap();
        eprintln!(
            "{file}: EHC {ehc:.2} kJ/g, t_ig {:.1} s, pHRR {:.0} kW/m², THR {:.1} MJ/m², \
             mass lost {:.1} g, MLR10-90 {:.2} g/m2s, notices {}",
            report.ignition_time_s.unwrap(),
            report.peak_hrr_kw_m2.unwrap(),
            report.total_heat_release_mj_m2.unwrap(),
            report.mass_lost_g.unwrap(),
            report.avg_mlr_10_90_g_m2s.unwrap(),
            test.notices.len()
        );
        assert!((21.0..=26.0).contains(&ehc), "{file}: EHC {ehc} kJ/g");
        let name = file.trim_start_matches("cone/");
        let (_, [peak, t_peak, t_ig, thr, q180]) = summary.iter().find(|(f, _)| f == name).unwrap();
        // Rounded in the table to 1 kW/m², 1 s, 0.1 s, 0.1 MJ/m², 1 kW/m².
        assert!(
            (report.peak_hrr_kw_m2.unwrap() - peak).abs() <= 0.5,
            "{file}"
        );
        assert!(
            (report.time_to_peak_hrr_s.unwrap() - t_peak).abs() <= 0.5,
            "{file}"
        );
        assert!(
            (report.ignition_time_s.unwrap() - t_ig).abs() <= 0.05,
            "{file}"
        );
        assert!(
            (report.total_heat_release_mj_m2.unwrap() - thr).abs() <= 0.05,
            "{file}"
        );
        assert!(
            (report.avg_hrr_180_kw_m2.unwrap() - q180).abs() <= 0.5,
            "{file}"
        );
    }
}

/// MaCFP PMMA data: lab c's HRR files run about 9 s behind their own mass (the source's
/// SUMMARY.md flags HRR dipping below zero just before ignition in them, the mark of a
/// gas-analysis delay not removed; ISO 5660-1 has that delay removed from the HRR), lab d's do
/// not. `reduce` must find the lag by lining HRR up with the mass-loss rate and say so, and
/// `hrr_delay_s` must move ignition and peak earlier by the delay and silence the note.
/// Found here: 8.8–10.9 s for lab c, −1.6 to −0.5 s for lab d. A separate numpy cross-correlation
/// of the raw columns over whole-second shifts (a 5 s mean of the mass first, the record less
/// 50 s at each end) gave 8–9 s for lab c and −2 to 0 s for lab d.
#[test]
fn pmma_lab_c_hrr_runs_behind_its_mass_and_the_delay_key_moves_it_back() {
    let Some(dir) = reference_data("pmma_hrr_lag") else {
        return;
    };
    let lag_of = |reduced: &Reduced| {
        emberfit::data::lag::hrr_lag_behind_mass(
            &reduced.time_s,
            reduced.hrr_kw_m2.as_ref().unwrap(),
            reduced.mlr_g_m2s.as_ref().unwrap(),
        )
    };
    let has_lag_note = |reduced: &Reduced| {
        reduced
            .notices
            .iter()
            .any(|n| n.message.contains("behind the mass-loss rate"))
    };
    let mut checked = 0;
    for entry in pmma_cone_entries(&dir) {
        let lab_c = entry.file.contains("lab-c");
        if !(lab_c || entry.file.contains("lab-d")) {
            continue;
        }
        let reduced = reduce(&entry.description).unwrap();
        let lag = lag_of(&reduced).unwrap_or_else(|| panic!("{}: no lag found", entry.file));
        eprintln!(
            "{}: HRR lag {:.2} s, correlation {:.4}",
            entry.file, lag.seconds, lag.correlation
        );
        if lab_c {
            assert!(
                (7.5..=11.5).contains(&lag.seconds),
                "{}: {lag:?}",
                entry.file
            );
            assert!(has_lag_note(&reduced), "{}: no note", entry.file);
            let mut shifted = entry.description.clone();
            shifted.hrr_delay_s = 9.0;
            let moved = reduce(&shifted).unwrap();
            let earlier =
                reduced.report.ignition_time_s.unwrap() - moved.report.ignition_time_s.unwrap();
            assert!(
                (earlier - 9.0).abs() < 1.0,
                "{}: ignition {earlier} s earlier",
                entry.file
            );
            assert!(
                lag_of(&moved).unwrap().seconds.abs() < 2.5,
                "{}",
                entry.file
            );
            assert!(!has_lag_note(&moved), "{}", entry.file);
        } else {
            assert!(lag.seconds.abs() < 3.0, "{}: {lag:?}", entry.file);
            assert!(!has_lag_note(&reduced), "{}", entry.file);
        }
        checked += 1;
    }
    assert_eq!(checked, 13, "labs c and d have 13 cone files");
}

/// MaCFP PMMA data: the ignition analysis of the 19 cone ignition times (detected by the
/// stated rule) at 25 and 65 kW/m².
///
/// Handbook values for PMMA: thermal response parameter 274 kW·s^½/m², critical heat flux
/// 11 kW/m², ignition temperature 378 °C (Tewarson, SFPE Handbook of Fire Protection
/// Engineering, chapter on heat and products generation; quoted from memory); kρc from property
/// values 0.32 kW²·s/(m⁴·K²) (Drysdale, An Introduction to Fire Dynamics, 3rd ed., 2011; quoted
/// from memory), apparent values from ignition data being larger (common practice).
///
/// Measured here: TRP 274.6 kW·s^½/m² (thick form), apparent kρc 0.75 kW²·s/(m⁴·K²) with
/// T_ig = 378 °C; critical heat flux −1.2 (thick), 2.2 (Janssens, 95 % interval −6.8 to 11.3),
/// 17.7 (thin) kW/m², and 13.4 kW/m² from the surface balance at 378 °C. The TRP is checked to
/// a factor of two; kρc to lie between the property value and four times it. The critical
/// heat flux is a long extrapolation from two irradiances (25 and 65 kW/m²) with lab-to-lab
/// scatter, so the data do not pin it down, and the analysis must say so: the handbook value
/// must lie inside Janssens' 95 % interval, the interval must be flagged as poorly determined,
/// and the surface balance at the handbook ignition temperature must agree with the handbook
/// critical flux to within 30 %. Two irradiances cannot tell thick from thin, which the
/// analysis must also say.
#[test]
fn pmma_ignition_analysis_gives_handbook_magnitudes() {
    let Some(dir) = reference_data("pmma_ignition_analysis") else {
        return;
    };
    let points: Vec<IgnitionPoint> = reduce_all_pmma(&dir)
        .into_iter()
        .map(|(file, test)| IgnitionPoint {
            irradiance_kw_m2: test.irradiance_kw_m2,
            ignition_time_s: test.report.ignition_time_s.unwrap(),
            label: file,
        })
        .collect();
    let settings = IgnitionSettings {
        ignition_temperature_k: Some(378.0 + 273.15),
        ..IgnitionSettings::default()
    };
    let analysis = analyse(&points, &settings).unwrap();
    for fit in &analysis.fits {
        eprintln!(
            "{}: critical heat flux {:.2} kW/m², slope {:.5}, R2 {:.4}",
            fit.correlation.name(),
            fit.critical_heat_flux_kw_m2,
            fit.slope,
            fit.r_squared
        );
    }
    let trp = analysis.thermal_response_parameter_kw_s05_m2;
    let krhoc = analysis.apparent_krhoc_thick_kw2_s_m4_k2.unwrap();
    eprintln!("TRP {trp:.1} kW s^0.5/m2, apparent krhoc {krhoc:.3} kW2 s/m4 K2");
    for w in &analysis.warnings {
        eprintln!("warning: {w}");
    }
    assert!((137.0..=548.0).contains(&trp), "TRP {trp}");
    let janssens = analysis.fit(Correlation::Janssens).unwrap();
    let critical = janssens.critical_heat_flux_kw_m2;
    let [low, high] = janssens.critical_heat_flux_95_kw_m2.unwrap();
    eprintln!("Janssens critical heat flux {critical:.1} kW/m², 95 % [{low:.1}, {high:.1}]");
    assert!(
        critical > 0.0 && critical < 25.0,
        "critical heat flux {critical}"
    );
    const HANDBOOK_CRITICAL_KW_M2: f64 = 11.0;
    assert!(
        (low..=high).contains(&HANDBOOK_CRITICAL_KW_M2),
        "handbook 11 kW/m² outside [{low}, {high}]"
    );
    assert!(analysis.warnings.iter().any(|w| w
        .message
        .starts_with("the critical heat flux is poorly determined")));
    let from_balance = analysis.critical_heat_flux_from_balance_kw_m2.unwrap();
    eprintln!("critical heat flux from the balance at 378 °C: {from_balance:.1} kW/m²");
    assert!(
        (from_balance - HANDBOOK_CRITICAL_KW_M2).abs() <= 0.3 * HANDBOOK_CRITICAL_KW_M2,
        "balance {from_balance}"
    );
    assert!((0.32..=4.0 * 0.32).contains(&krhoc), "kρc {krhoc}");
    assert!(analysis
        .warnings
        .iter()
        .any(|w| w.message.contains("cannot tell")));
    assert!(analysis.warnings.iter().any(|w| w
        .message
        .starts_with("thermally_thick: the flux-axis intercept")));
}

// ---------------------------------------------------------------------------------------------
// Oxygen consumption on hand-worked values.

/// ISO 5660-1, O₂ only, worked by hand: C = 0.04, Δp = 100 Pa, T_e = 400 K give
/// ṁ_e = 0.04·√0.25 = 0.02 kg/s; X⁰ = 0.2095, X = 0.2000:
/// q̇ = 13 100 · 1.10 · 0.02 · 0.0095 / (1.105 − 0.3) = 2.73790 / 0.805 = 3.40112 kW.
#[test]
fn iso_5660_oxygen_only_equation_on_a_hand_worked_value() {
    let flow_kg_s = exhaust_mass_flow_kg_s(0.04, 100.0, 400.0);
    assert!((flow_kg_s - 0.02).abs() < 1e-15);
    let q_kw = hrr_oxygen_only_kw(flow_kg_s, 0.2095, 0.2000);
    assert!((q_kw - 3.40112).abs() < 1e-5, "{q_kw}");
}

/// Janssens, Fire Technology 27 (1991) 234–249, worked by hand (calculator): X⁰_O2 = 0.2095,
/// X⁰_CO2 = 0.0004, X⁰_H2O = 0.01, X_O2 = 0.19, X_CO2 = 0.015, X_CO = 0.0005, ṁ_e = 0.02 kg/s.
/// φ = (0.2095·0.9845 − 0.19·0.9996)/(0.2095·0.7945) = 0.0163288/0.1664478 = 0.0981014;
/// E·φ = 1285.128 kJ/kg; CO term (17 600 − 13 100)·(0.9018986/2)·0.0005/0.19 = 5.340;
/// q̇ = 1279.788 · 0.02/(1 + 0.0981014·0.105) · 1.10 · 0.99 · 0.2095 = 5.7800 kW.
#[test]
fn janssens_general_equation_on_a_hand_worked_value() {
    let ambient = AmbientGas {
        oxygen: 0.2095,
        carbon_dioxide: 0.0004,
        water: 0.01,
    };
    let reading = GasReading {
        oxygen: 0.19,
        carbon_dioxide: 0.015,
        carbon_monoxide: 0.0005,
    };
    let phi = depletion_factor(&ambient, &reading);
    assert!((phi - 0.0981014).abs() < 1e-7, "{phi}");
    let q_kw = hrr_general_kw(0.02, &ambient, &reading);
    assert!((q_kw - 5.7800).abs() < 1e-4, "{q_kw}");
}

/// docs/physics.md §4: with X_CO2 = X_CO = 0 (and no CO₂ or water in the ambient air) Janssens'
/// form reduces to the O₂-only one. ISO rounds (X⁰ + α − 1)/X⁰ = 1.5012 to 1.5, which moves the
/// result by about 0.03 % at these readings; 0.1 % bounds it.
#[test]
fn general_equation_reduces_to_oxygen_only_without_carbon_oxides() {
    let ambient = AmbientGas {
        oxygen: AMBIENT_DRY_OXYGEN,
        carbon_dioxide: 0.0,
        water: 0.0,
    };
    for oxygen in [0.205, 0.20, 0.19, 0.18, 0.16] {
        let reading = GasReading {
            oxygen,
            carbon_dioxide: 0.0,
            carbon_monoxide: 0.0,
        };
        let general = hrr_general_kw(0.024, &ambient, &reading);
        let iso = hrr_oxygen_only_kw(0.024, AMBIENT_DRY_OXYGEN, oxygen);
        assert!(
            (general - iso).abs() <= 1e-3 * iso,
            "{oxygen}: {general} vs {iso}"
        );
    }
}

// ---------------------------------------------------------------------------------------------
// Five-point derivative on polynomials.

fn polynomial(coefficients: &[f64], t: f64) -> f64 {
    coefficients.iter().rev().fold(0.0, |acc, c| acc * t + c)
}

fn polynomial_derivative(coefficients: &[f64], t: f64) -> f64 {
    coefficients
        .iter()
        .enumerate()
        .skip(1)
        .map(|(p, c)| p as f64 * c * t.powi(p as i32 - 1))
        .sum()
}

/// ISO 5660-1 five-point formulas (docs/physics.md §4) are exact for polynomials up to fourth
/// degree, at interior points and at the first two and last two points, on a uniform step and
/// on the uneven steps real loggers produce. A fifth-degree term is not differentiated exactly,
/// which shows the check can fail.
#[test]
fn five_point_derivative_is_exact_to_fourth_degree_at_every_point() {
    let uniform: Vec<f64> = (0..12).map(|i| 5.0 + 0.5 * i as f64).collect();
    let uneven: Vec<f64> = (0..12)
        .map(|i| 5.0 + 0.5 * i as f64 + 0.13 * ((i * 7) % 3) as f64)
        .collect();
    let quartic = [3.0, -1.5, 0.25, -0.04, 0.002];
    for time_s in [&uniform, &uneven] {
        for degree in 0..=4 {
            let coefficients = &quartic[..=degree];
            let values: Vec<f64> = time_s
                .iter()
                .map(|&t| polynomial(coefficients, t))
                .collect();
            let derivative = five_point_derivative(time_s, &values).unwrap();
            for (idx, (&t, d)) in time_s.iter().zip(&derivative).enumerate() {
                let exact = polynomial_derivative(coefficients, t);
                // Rounding only: values of order 10, steps of 0.5 s.
                assert!(
                    (d - exact).abs() < 1e-9,
                    "degree {degree}, point {idx}: {d} vs {exact}"
                );
            }
        }
    }
    let quintic = [0.0, 0.0, 0.0, 0.0, 0.0, 1e-3];
    let values: Vec<f64> = uniform.iter().map(|&t| polynomial(&quintic, t)).collect();
    let derivative = five_point_derivative(&uniform, &values).unwrap();
    assert!((derivative[0] - polynomial_derivative(&quintic, uniform[0])).abs() > 1e-6);
}

// ---------------------------------------------------------------------------------------------
// A synthetic test through the forward oxygen-consumption relation.

/// Known HRR per area, kW/m²: zero until 50 s, then a smooth rise (no kink: the slope is zero
/// at onset) to 600 kW/m² at 150 s and a decay.
fn known_hrr_kw_m2(t: f64) -> f64 {
    if t <= 50.0 {
        0.0
    } else {
        let x = (t - 50.0) / 100.0;
        600.0 * x * x * (2.0 * (1.0 - x)).exp()
    }
}

/// Writes a raw-signal CSV (a 60 s pre-exposure baseline, O₂ delayed by 12.5 s, exhaust
/// temperature rising with the fire, a quartic mass curve) and its TEST.toml; returns the
/// TOML's path.
fn write_synthetic_gas_test(dir: &Path) -> PathBuf {
    const AREA_M2: f64 = 0.01;
    const ORIFICE: f64 = 0.04;
    const DELAY_S: f64 = 12.5;
    let flow_at = |t: f64| {
        let q_kw = known_hrr_kw_m2(t) * AREA_M2;
        let te_k = 310.0 + 20.0 * q_kw;
        (120.0, te_k, exhaust_mass_flow_kg_s(ORIFICE, 120.0, te_k))
    };
    let mut csv = String::from("Time,O2,DPT,Te,Mass\ns,%,Pa,C,g\n");
    for row in 0..=660 {
        let file_time_s = row as f64;
        let t = file_time_s - 60.0; // exposure starts 60 s into the record
        let (dp, te_k, _) = flow_at(t);
        // The analyser reads now what left the hood DELAY_S ago.
        let t_gas = t - DELAY_S;
        let (_, _, flow_then) = flow_at(t_gas);
        let x = oxygen_for_hrr(
            flow_then,
            AMBIENT_DRY_OXYGEN,
            known_hrr_kw_m2(t_gas) * AREA_M2,
        );
        let tau = t.max(0.0) / 600.0;
        let mass_g = 70.0 - 60.0 * (2.0 * tau - tau * tau) + 3.0 * tau.powi(4);
        csv.push_str(&format!(
            "{file_time_s},{},{dp},{},{mass_g}\n",
            x * 100.0,
            te_k - 273.15
        ));
    }
    std::fs::write(dir.join("synthetic.csv"), csv).unwrap();
    let toml = "data_file = \"synthetic.csv\"\nirradiance_kw_m2 = 50\nexposed_area_m2 = 0.01\n\
                time_offset_s = -60\n[columns]\ntime = \"Time\"\nmass = \"Mass\"\noxygen = \
                \"O2\"\norifice_pressure = \"DPT\"\nexhaust_temperature = \"Te\"\n\
                [gas_analysis]\norifice_constant = 0.04\noxygen_delay_s = 12.5\n";
    std::fs::write(dir.join("synthetic.toml"), toml).unwrap();
    dir.join("synthetic.toml")
}

fn scratch_dir(name: &str) -> PathBuf {
    let dir = std::env::temp_dir().join(format!("emberfit-data-{name}-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    dir
}

/// Issue 3's check: a test built from a known HRR curve through the forward oxygen-consumption
/// relation (ISO 5660-1, inverted exactly) comes back within 0.5 % — here at every sample
/// above 10 % of the peak, and in total heat release. The delay of 12.5 s is not a whole
/// number of 1 s steps, so the shift interpolates; the measured worst error is 0.07 %.
/// The mass is a quartic in time, so the five-point MLR must match its exact derivative.
#[test]
fn synthetic_oxygen_test_returns_its_known_hrr_within_half_a_percent() {
    let dir = scratch_dir("synthetic");
    let test = TestDescription::load(&write_synthetic_gas_test(&dir)).unwrap();
    let reduced = reduce(&test).unwrap();
    let hrr = reduced.hrr_kw_m2.as_ref().unwrap();
    assert_eq!(reduced.time_s[0], 0.0, "curves start at exposure");
    let mut worst_relative = 0.0_f64;
    for (t, q) in reduced.time_s.iter().zip(hrr) {
        let known = known_hrr_kw_m2(*t);
        if known > 60.0 {
            worst_relative = worst_relative.max((q - known).abs() / known);
        }
        // Below 10 % of the peak: within 0.5 % of the peak.
        assert!((q - known).abs() <= 3.0, "t = {t}: {q} vs {known}");
    }
    eprintln!("worst relative HRR error above 10 % of peak: {worst_relative:.2e}");
    assert!(worst_relative <= 5e-3, "{worst_relative}");
    let end_s = *reduced.time_s.last().unwrap();
    let n = 20_000;
    let known_thr_mj_m2: f64 = (0..n)
        .map(|i| known_hrr_kw_m2((i as f64 + 0.5) * end_s / n as f64) * end_s / n as f64)
        .sum::<f64>()
        / 1e3;
    let thr = reduced.report.total_heat_release_mj_m2.unwrap();
    assert!(
        (thr - known_thr_mj_m2).abs() <= 5e-3 * known_thr_mj_m2,
        "{thr} vs {known_thr_mj_m2}"
    );
    // d/dt of 70 − 60(2τ − τ²) + 3τ⁴ with τ = t/600, per 0.01 m², sign flipped.
    let mlr = reduced.mlr_g_m2s.as_ref().unwrap();
    for (t, m) in reduced.time_s.iter().zip(mlr) {
        let tau = t / 600.0;
        let exact = -(-60.0 * (2.0 - 2.0 * tau) + 12.0 * tau.powi(3)) / 600.0 / 0.01;
        assert!((m - exact).abs() < 1e-6, "t = {t}: {m} vs {exact}");
    }
    assert!(reduced
        .notices
        .iter()
        .any(|n| n.message.contains("baselines only")));
    assert!(reduced
        .notices
        .iter()
        .any(|n| n.message.contains("analyser delay")));
    std::fs::remove_dir_all(&dir).ok();
}

// ---------------------------------------------------------------------------------------------
// What real files contain: repairs are made and reported.

/// A file with a byte-order mark, a units row, time in minutes, mass in kg, blank lines, a
/// missing mass value, an uneven step and a tared mass drifting below zero at the end. Each
/// repair must be reported; the values must come out in s and g. Checked by hand against the
/// file written here.
#[test]
fn a_messy_lab_file_reads_and_every_repair_is_reported() {
    let dir = scratch_dir("messy");
    let mut csv = String::from("\u{feff} Time , Mass ,HRR\n[min],[kg],[kW/m2]\n");
    for i in 0..40 {
        let t_min = i as f64 / 6.0 + if i == 20 { 0.05 } else { 0.0 }; // 10 s steps, one uneven
        let mass_kg = 0.050 - 0.0014 * i as f64; // goes below zero after 35 steps
        if i == 7 {
            csv.push_str(&format!("{t_min},,150\n")); // missing mass
        } else {
            csv.push_str(&format!(
                "{t_min},{mass_kg},{}\n",
                if i > 3 { 150.0 } else { 0.0 }
            ));
        }
        if i == 12 {
            csv.push('\n'); // a blank line in the middle
        }
    }
    csv.push_str("\n\n");
    std::fs::write(dir.join("messy.csv"), csv).unwrap();
    let test = TestDescription::for_csv(&dir.join("messy.csv"), 0.01, 35.0);
    let reduced = reduce(&test).unwrap();
    let messages: Vec<&str> = reduced.notices.iter().map(|n| n.message.as_str()).collect();
    let mentions = |words: &str| messages.iter().any(|m| m.contains(words));
    assert!(mentions("byte-order mark"), "{messages:?}");
    assert!(mentions("1 blank or no-value cells"), "{messages:?}");
    assert!(mentions("filled 1 missing values"), "{messages:?}");
    assert!(mentions("not uniform"), "{messages:?}");
    assert!(mentions("clipped to 0 g"), "{messages:?}");
    assert_eq!(reduced.time_s.len(), 40);
    assert!(
        (reduced.time_s[1] - 10.0).abs() < 1e-9,
        "minutes become seconds"
    );
    let mass = reduced.mass_g.as_ref().unwrap();
    assert!((mass[0] - 50.0).abs() < 1e-9, "kilograms become grams");
    assert!(
        (mass[7] - (50.0 - 1.4 * 7.0)).abs() < 1e-9,
        "gap filled on the straight line"
    );
    assert_eq!(mass[39], 0.0);
    // Straight-line mass loss of 1.4 g per 10 s on 0.01 m²: MLR = 14 g/(m²·s) away from the
    // clipped end and the uneven step.
    let mlr = reduced.mlr_g_m2s.as_ref().unwrap();
    assert!((mlr[5] - 14.0).abs() < 1e-6, "{}", mlr[5]);
    std::fs::remove_dir_all(&dir).ok();
}

/// A thermocouple that stops logging half-way (it came loose, or the lab logged it for part of
/// the test) keeps its own span and does not shorten the mass and HRR records: 40 rows of
/// straight-line mass loss (1.4 g per 10 s, so MLR = 14 g/(m²·s) on 0.01 m², worked by hand)
/// and a back-face reading on rows 0–19 with one gap at row 5, filled on the line between its
/// neighbours. A thermocouple column with no value at all is ignored, with a notice.
#[test]
fn a_thermocouple_that_stops_early_keeps_its_own_span() {
    let dir = scratch_dir("thermocouple-span");
    let mut csv = String::from("time,mass,hrr,back,dead\ns,g,kW/m2,K,K\n");
    for i in 0..40 {
        let back = match i {
            5 => String::new(),
            0..=19 => format!("{}", 300.0 + 2.0 * i as f64),
            _ => String::new(),
        };
        csv.push_str(&format!(
            "{},{},150,{back},\n",
            10 * i,
            60.0 - 1.4 * i as f64
        ));
    }
    std::fs::write(dir.join("loose.csv"), csv).unwrap();
    let description = dir.join("loose.toml");
    std::fs::write(
        &description,
        "data_file = \"loose.csv\"\nirradiance_kw_m2 = 35.0\nexposed_area_m2 = 0.01\n\n\
         [columns]\ntime = \"time\"\nmass = \"mass\"\nhrr = \"hrr\"\nback_temperature = \"back\"\n\
         surface_temperature = \"dead\"\n",
    )
    .unwrap();
    let reduced = reduce(&TestDescription::load(&description).unwrap()).unwrap();
    let messages: Vec<&str> = reduced.notices.iter().map(|n| n.message.as_str()).collect();
    assert_eq!(reduced.time_s.len(), 40, "{messages:?}");
    assert_eq!(reduced.time_s[39], 390.0);
    let back = reduced
        .back_temperature_k
        .as_ref()
        .expect("back temperature");
    assert!((back[5] - 310.0).abs() < 1e-9, "gap filled: {}", back[5]);
    assert!((back[19] - 338.0).abs() < 1e-9);
    assert!(back[20..].iter().all(|v| v.is_nan()), "{:?}", &back[20..]);
    assert!(
        messages
            .iter()
            .any(|m| m.contains("`back` has values from 0 s to 190 s only")),
        "{messages:?}"
    );
    assert!(reduced.surface_temperature_k.is_none());
    assert!(
        messages
            .iter()
            .any(|m| m.contains("`dead` has no value") && m.contains("ignored")),
        "{messages:?}"
    );
    let mlr = reduced.mlr_g_m2s.as_ref().unwrap();
    assert!((mlr[30] - 14.0).abs() < 1e-6, "{}", mlr[30]);
    std::fs::remove_dir_all(&dir).ok();
}

/// The milligram-scale files of the MaCFP PMMA set (TGA, DSC, MCC; see its PROVENANCE.md) read
/// with the generic column reader, by the column names tests.toml lists. As a check that the
/// numbers are read right, not just read: the TGA mass-loss-rate peak at 10 K/min lies at
/// 640 ± 7.5 K, the set's acceptance criterion (the reference data's SUMMARY.md; docs/physics.md §5). The rate is the
/// five-point derivative of the Savitzky–Golay-smoothed mass (21 points, quadratic), because
/// raw balance noise would otherwise pick a spike.
#[test]
fn pmma_milligram_scale_files_read_with_the_generic_reader() {
    let Some(dir) = reference_data("pmma_milligram_scale_files_read") else {
        return;
    };
    let text = std::fs::read_to_string(dir.join("tests.toml")).unwrap();
    let table: toml::Table = toml::from_str(&text).unwrap();
    let mut n_files = 0;
    for test in table["test"].as_array().unwrap() {
        let kind = test["kind"].as_str().unwrap();
        if !matches!(kind, "tga" | "dsc" | "mcc") {
            continue;
        }
        let file = test["file"].as_str().unwrap();
        let names: Vec<String> = test["columns"]
            .as_array()
            .unwrap()
            .iter()
            .map(|c| {
                c.as_str()
                    .unwrap()
                    .split(" [")
                    .next()
                    .unwrap()
                    .trim()
                    .to_string()
            })
            .collect();
        let name_refs: Vec<&str> = names.iter().map(String::as_str).collect();
        let read = read_named_columns(&dir.join(file), &name_refs)
            .unwrap_or_else(|err| panic!("{file}: {err}"));
        assert_eq!(read.values.len(), names.len(), "{file}");
        let n_rows = read.values[0].len();
        assert!(n_rows > 50, "{file}: {n_rows} rows");
        assert!(
            read.units.iter().all(|u| !u.is_empty()),
            "{file}: units {:?}",
            read.units
        );
        assert!(read.values[0].iter().all(|t| t.is_finite()), "{file}: time");
        n_files += 1;
        let rate = test.get("heating_rate_k_min").and_then(|r| r.as_float());
        if kind == "tga" && rate == Some(10.0) {
            let time_s = &read.values[0];
            let temperature_k = &read.values[1];
            let mass = &read.values[2];
            let smoothing = emberfit::data::derivative::Smoothing {
                window_points: 21,
                degree: 2,
            };
            let smooth =
                emberfit::data::derivative::savitzky_golay(time_s, mass, smoothing).unwrap();
            let rate = five_point_derivative(time_s, &smooth).unwrap();
            let peak_idx = (0..rate.len())
                .min_by(|&a, &b| rate[a].total_cmp(&rate[b]))
                .unwrap();
            let peak_k = temperature_k[peak_idx];
            eprintln!("{file}: mass-loss-rate peak at {peak_k:.1} K");
            assert!((peak_k - 640.0).abs() <= 7.5, "{file}: peak at {peak_k} K");
        }
    }
    assert_eq!(
        n_files, 25,
        "tests.toml lists 14 TGA, 10 DSC and 1 MCC files"
    );
}

// ---------------------------------------------------------------------------------------------
// Repeats.

fn reduced_from_curve(name: &str, time_s: Vec<f64>, hrr: Vec<f64>, ignition_s: f64) -> Reduced {
    let mut test = TestDescription::for_csv(Path::new(name), 0.01, 50.0);
    test.ignition_time_s = Some(ignition_s);
    let dir = scratch_dir(name);
    let mut csv = String::from("time,hrr\ns,kW/m2\n");
    for (t, q) in time_s.iter().zip(&hrr) {
        csv.push_str(&format!("{t},{q}\n"));
    }
    let path = dir.join(format!("{name}.csv"));
    std::fs::write(&path, csv).unwrap();
    test.data_file = path;
    test.columns.mass = None;
    let reduced = reduce(&test).unwrap();
    std::fs::remove_dir_all(&dir).ok();
    reduced
}

/// Hand-worked: three repeats with HRR 100, 200 and 300 kW/m² (flat) have mean 200 and sample
/// standard deviation 100 at every time. Three copies of one pulse, ignited 10 s apart, have
/// zero spread when aligned at ignition and a large one when aligned at exposure.
#[test]
fn repeats_give_mean_and_spread_per_time() {
    let time_s: Vec<f64> = (0..=300).map(|i| i as f64).collect();
    let flat: Vec<Reduced> = [100.0, 200.0, 300.0]
        .iter()
        .enumerate()
        .map(|(k, level)| {
            reduced_from_curve(&format!("flat{k}"), time_s.clone(), vec![*level; 301], 20.0)
        })
        .collect();
    let set = combine(&flat, Alignment::ExposureStart).unwrap();
    let hrr = set.hrr_kw_m2.as_ref().unwrap();
    for idx in 0..set.time_s.len() {
        assert!((hrr.mean[idx] - 200.0).abs() < 1e-9);
        assert!((hrr.standard_deviation[idx] - 100.0).abs() < 1e-9);
        assert_eq!(hrr.n_tests[idx], 3);
    }

    let pulse = |ignition_s: f64| -> Vec<f64> {
        time_s
            .iter()
            .map(|t| {
                let x = (t - ignition_s) / 60.0;
                if x > 0.0 {
                    500.0 * x * (1.0 - x).exp()
                } else {
                    0.0
                }
            })
            .collect()
    };
    let shifted: Vec<Reduced> = [40.0, 50.0, 60.0]
        .iter()
        .map(|t_ig| {
            reduced_from_curve(&format!("pulse{t_ig}"), time_s.clone(), pulse(*t_ig), *t_ig)
        })
        .collect();
    let at_ignition = combine(&shifted, Alignment::Ignition).unwrap();
    assert_eq!(at_ignition.shifts_s, vec![10.0, 0.0, -10.0]);
    let aligned = at_ignition.hrr_kw_m2.as_ref().unwrap();
    let at_exposure = combine(&shifted, Alignment::ExposureStart).unwrap();
    let unaligned = at_exposure.hrr_kw_m2.as_ref().unwrap();
    let idx = at_ignition.time_s.iter().position(|t| *t == 80.0).unwrap();
    assert_eq!(aligned.n_tests[idx], 3);
    assert!(aligned.standard_deviation[idx] < 1e-9);
    assert!(unaligned.standard_deviation[idx] > 10.0);
}

// ---------------------------------------------------------------------------------------------
// The commands, and broken input.

fn emberfit(args: &[&str]) -> std::process::Output {
    std::process::Command::new(env!("CARGO_BIN_EXE_emberfit"))
        .args(args)
        .output()
        .unwrap()
}

fn bad_input(name: &str) -> String {
    format!("{}/tests/bad-input/data/{name}", env!("CARGO_MANIFEST_DIR"))
}

/// `emberfit reduce TEST.toml --json --out` prints the keys issue 3 names and writes the
/// curves; the values are those of the synthetic test above (600 kW/m² peak at 150 s).
#[test]
fn reduce_command_prints_json_and_writes_curves() {
    let dir = scratch_dir("cli");
    let toml = write_synthetic_gas_test(&dir);
    let out = dir.join("reduced.csv");
    let output = emberfit(&[
        "reduce",
        toml.to_str().unwrap(),
        "--json",
        "--out",
        out.to_str().unwrap(),
    ]);
    assert!(
        output.status.success(),
        "{}",
        String::from_utf8_lossy(&output.stderr)
    );
    let json: serde_json::Value = serde_json::from_slice(&output.stdout).unwrap();
    for key in [
        "ignition_time_s",
        "peak_hrr_kw_m2",
        "time_to_peak_hrr_s",
        "total_heat_release_mj_m2",
        "mass_lost_g",
        "effective_heat_of_combustion_mj_kg",
        "avg_mlr_10_90_g_m2s",
        "avg_hrr_180_kw_m2",
    ] {
        assert!(
            json.get(key).is_some_and(|v| v.is_number()),
            "{key}: {json}"
        );
    }
    let peak = json["peak_hrr_kw_m2"].as_f64().unwrap();
    assert!((peak - 600.0).abs() < 3.0, "{peak}");
    assert_eq!(json["time_to_peak_hrr_s"].as_f64(), Some(150.0));
    let curves = std::fs::read_to_string(&out).unwrap();
    assert!(
        curves.starts_with("time_s,hrr_kw_m2,mlr_g_m2s,mass_g\n"),
        "{curves:.80}"
    );
    assert!(curves.lines().count() > 500);
    std::fs::remove_dir_all(&dir).ok();
}

/// `emberfit reduce FILE.csv --area-m2 --flux-kw-m2` with no TOML prints the table.
#[test]
fn reduce_command_takes_a_bare_csv_with_flags() {
    let dir = scratch_dir("cli-csv");
    let mut csv = String::from("time,mass,hrr\ns,g,kW/m2\n");
    for i in 0..=400 {
        let t = i as f64;
        let hrr = if t >= 30.0 { 200.0 } else { 0.0 };
        csv.push_str(&format!("{t},{},{hrr}\n", 50.0 - 0.1 * (t - 30.0).max(0.0)));
    }
    let path = dir.join("run.csv");
    std::fs::write(&path, csv).unwrap();
    let output = emberfit(&[
        "reduce",
        path.to_str().unwrap(),
        "--area-m2",
        "0.01",
        "--flux-kw-m2",
        "50",
    ]);
    assert!(
        output.status.success(),
        "{}",
        String::from_utf8_lossy(&output.stderr)
    );
    let table = String::from_utf8_lossy(&output.stdout);
    // Hand-worked: 200 kW/m² from 30 s to 400 s = 74 MJ/m², plus half a step for the jump
    // between 29 and 30 s under the trapezoid rule, 0.1 MJ/m²; the plateau's peak time is its
    // start; 0.1 g/s on 0.01 m² = 10 g/(m²·s).
    assert!(
        table.contains("total heat release                74.10 MJ/m²"),
        "{table}"
    );
    assert!(
        table.contains("time to peak HRR                  30.0 s"),
        "{table}"
    );
    assert!(
        table.contains("average MLR, 10–90 %              10.00 g/(m²·s)"),
        "{table}"
    );
    // A CSV with mass only: the HRR column is skipped, and the mass-loss estimate
    // χ·ΔH_c·MLR stands in. Its total heat per mass lost must then be χ·ΔH_c = 0.9·25 =
    // 22.5 MJ/kg (mass 60 → 33 g between 30 and 300 s, flat after); 1 % covers the smearing
    // of the five-point derivative at the two kinks.
    let mut mass_only = String::from("time,mass\ns,g\n");
    for i in 0..=400 {
        let t = i as f64;
        mass_only.push_str(&format!(
            "{t},{}\n",
            60.0 - 0.1 * (t - 30.0).clamp(0.0, 270.0)
        ));
    }
    let mass_path = dir.join("mass-only.csv");
    std::fs::write(&mass_path, mass_only).unwrap();
    let output = emberfit(&[
        "reduce",
        mass_path.to_str().unwrap(),
        "--area-m2",
        "0.01",
        "--flux-kw-m2",
        "50",
        "--heat-of-combustion-mj-kg",
        "25",
        "--combustion-efficiency",
        "0.9",
        "--json",
    ]);
    assert!(
        output.status.success(),
        "{}",
        String::from_utf8_lossy(&output.stderr)
    );
    let json: serde_json::Value = serde_json::from_slice(&output.stdout).unwrap();
    let ehc = json["effective_heat_of_combustion_mj_kg"].as_f64().unwrap();
    assert!((ehc - 22.5).abs() <= 0.01 * 22.5, "{ehc}");
    assert!(
        json["notices"].to_string().contains("mass-loss estimate"),
        "{json}"
    );
    let missing = emberfit(&["reduce", path.to_str().unwrap(), "--flux-kw-m2", "50"]);
    assert!(!missing.status.success());
    assert!(String::from_utf8_lossy(&missing.stderr).contains("needs --area-m2"));
    std::fs::remove_dir_all(&dir).ok();
}

/// `emberfit ignition` on an ignition list with points made from the thick form
/// t_ig = (TRP/(q − q_cr))², TRP = 250 kW·s^½/m², q_cr = 12 kW/m² (Drysdale 2011, shifted
/// form): both come back in the JSON.
#[test]
fn ignition_command_reads_a_list_and_prints_json() {
    let dir = scratch_dir("cli-ignition");
    let mut list = String::from("ignition_temperature_c = 350\n");
    for q in [20.0, 35.0, 50.0, 75.0] {
        let t = (250.0_f64 / (q - 12.0)).powi(2);
        list.push_str(&format!(
            "[[point]]\nirradiance_kw_m2 = {q}\nignition_time_s = {t}\n"
        ));
    }
    let path = dir.join("ignition.toml");
    std::fs::write(&path, list).unwrap();
    let output = emberfit(&["ignition", path.to_str().unwrap(), "--json"]);
    assert!(
        output.status.success(),
        "{}",
        String::from_utf8_lossy(&output.stderr)
    );
    let json: serde_json::Value = serde_json::from_slice(&output.stdout).unwrap();
    let trp = json["thermal_response_parameter_kw_s05_m2"]
        .as_f64()
        .unwrap();
    assert!((trp - 250.0).abs() < 1e-6, "{trp}");
    let thick = &json["fits"][0];
    assert_eq!(thick["correlation"], "thermally_thick");
    assert!((thick["critical_heat_flux_kw_m2"].as_f64().unwrap() - 12.0).abs() < 1e-6);
    let table = emberfit(&["ignition", path.to_str().unwrap()]);
    assert!(String::from_utf8_lossy(&table.stdout).contains("thermal response parameter"));
    std::fs::remove_dir_all(&dir).ok();
}

/// Every broken file in tests/bad-input/data/ (see its README.md) gives its stated error, with
/// file and line or key, and no panic.
#[test]
fn broken_test_files_give_the_stated_error() {
    let cases: [(&str, &str, &[&str]); 14] = [
        (
            "reduce",
            "text-in-number.toml",
            &["text-in-number.csv:5: column `Mass`: expected a number, found `abc`"],
        ),
        (
            "reduce",
            "missing-column.toml",
            &[
                "text-in-number.csv: line 1: no column named `Weight`",
                "`Mass`",
            ],
        ),
        (
            "reduce",
            "time-backwards.toml",
            &["time-backwards.csv:6: column `Time`: time runs backwards: 1.5 s after 2 s"],
        ),
        (
            "reduce",
            "wrong-unit.toml",
            &["column `Mass`: unit `K` is not a unit of mass"],
        ),
        (
            "reduce",
            "area-in-cm2.toml",
            &[
                "area-in-cm2.toml:4: `exposed_area_m2` must be in m2",
                "got 100",
            ],
        ),
        (
            "reduce",
            "unknown-key.toml",
            &["unknown-key.toml", "ignition_time", "line 4"],
        ),
        ("reduce", "empty.toml", &["empty.csv: the file is empty"]),
        (
            "reduce",
            "too-few-rows.toml",
            &["needs at least 5 usable rows, found 3"],
        ),
        (
            "reduce",
            "missing-data-file.toml",
            &["cannot read", "no-such-file.csv"],
        ),
        (
            "reduce",
            "gas-without-orifice-constant.toml",
            &["gas-without-orifice-constant.toml: `gas_analysis.orifice_constant` is missing"],
        ),
        (
            "reduce",
            "even-smoothing-window.toml",
            &["even-smoothing-window.toml:8: `processing.smoothing_window_points` must be odd"],
        ),
        (
            "reduce",
            "hrr-delay-with-gas.toml",
            &["hrr-delay-with-gas.toml:4: `hrr_delay_s` applies to a given HRR column"],
        ),
        (
            "reduce",
            "hrr-delay-in-minutes.toml",
            &["hrr-delay-in-minutes.toml:4: `hrr_delay_s` must be between 0 and 120, got 540"],
        ),
        (
            "ignition",
            "ignition-one-irradiance.toml",
            &["two or more irradiances", "50 kW/m²"],
        ),
    ];
    for (command, file, expected) in cases {
        let output = emberfit(&[command, &bad_input(file)]);
        let stderr = String::from_utf8_lossy(&output.stderr);
        assert_eq!(output.status.code(), Some(1), "{file}: {stderr}");
        assert!(!stderr.contains("panicked"), "{file}: {stderr}");
        assert!(stderr.starts_with("error: "), "{file}: {stderr}");
        for words in expected {
            assert!(
                stderr.contains(words),
                "{file}: expected `{words}` in: {stderr}"
            );
        }
    }
}

// ---------------------------------------------------------------------------------------------
// Smoke, the mass-loss estimate of HRR, smoothing, the methane calibration, Janssens' form in
// the pipeline.

/// Hand-worked smoke quantities (ISO 5660-1 definitions, docs/physics.md §4): the photometer reads
/// I = I₀·exp(−k·L) with I₀ = 100 before exposure, L = 0.11 m, and k rising linearly from 0 to
/// 0.5 1/m over 100–110 s, flat to 290 s, back to 0 at 300 s: ∫k dt = 0.5·(180 + 200)/2 =
/// 95 s/m. With V̇ = 0.024 m³/s: ∫V̇k dt = 2.28 m², total smoke release 2.28/0.01 = 228 m²/m²;
/// the mass falls linearly 50 → 10 g over 100–300 s, so the specific extinction area is
/// 2.28/0.040 = 57 m²/kg; the mean k over 0–400 s is 95/400 = 0.2375 1/m. The mass-loss HRR
/// estimate with χ = 0.9 and ΔH_c = 25 MJ/kg is 0.9·25·(0.2 g/s / 0.01 m²) = 450 kW/m², and
/// Savitzky–Golay smoothing (quadratic) leaves a straight line straight.
#[test]
fn smoke_and_mass_loss_quantities_on_hand_worked_values() {
    let dir = scratch_dir("smoke");
    let extinction = |t: f64| -> f64 {
        match t {
            t if t <= 100.0 => 0.0,
            t if t <= 110.0 => 0.05 * (t - 100.0),
            t if t <= 290.0 => 0.5,
            t if t <= 300.0 => 0.05 * (300.0 - t),
            _ => 0.0,
        }
    };
    let mut csv = String::from("t,m,light\ns,g,%\n");
    for i in -30..=400 {
        let t = i as f64;
        let mass = 50.0 - 0.2 * (t - 100.0).clamp(0.0, 200.0);
        let light = 100.0 * (-extinction(t) * 0.11).exp();
        csv.push_str(&format!("{t},{mass},{light}\n"));
    }
    std::fs::write(dir.join("smoke.csv"), csv).unwrap();
    let toml = "data_file = \"smoke.csv\"\nirradiance_kw_m2 = 35\nexposed_area_m2 = 0.01\n\
                [columns]\ntime = \"t\"\nmass = \"m\"\nsmoke_light = \"light\"\n[smoke]\n\
                path_length_m = 0.11\nduct_volume_flow_m3_s = 0.024\n[hrr_from_mass]\n\
                heat_of_combustion_mj_kg = 25\ncombustion_efficiency = 0.9\n[processing]\n\
                smoothing_window_points = 11\nsmoothing_degree = 2\n";
    std::fs::write(dir.join("smoke.toml"), toml).unwrap();
    let reduced = reduce(&TestDescription::load(&dir.join("smoke.toml")).unwrap()).unwrap();
    let r = &reduced.report;
    assert!((r.total_smoke_release_m2_m2.unwrap() - 228.0).abs() < 1e-9);
    assert!((r.avg_specific_extinction_area_m2_kg.unwrap() - 57.0).abs() < 1e-9);
    assert!((r.mean_extinction_coefficient_1_m.unwrap() - 0.2375).abs() < 1e-12);
    assert!((r.mass_lost_g.unwrap() - 40.0).abs() < 1e-9);
    let estimate = reduced.hrr_from_mass_kw_m2.as_ref().unwrap();
    let idx = reduced.time_s.iter().position(|t| *t == 200.0).unwrap();
    assert!((estimate[idx] - 450.0).abs() < 1e-6, "{}", estimate[idx]);
    assert!(reduced
        .notices
        .iter()
        .any(|n| n.message.contains("Savitzky–Golay")));
    std::fs::remove_dir_all(&dir).ok();
}

/// ISO 5660-1 calibration: a 5 kW methane burner read through an orifice of known constant
/// C = 0.0415 (O₂ made with methane's Δh_c/r₀ = 12.54 MJ/kg, delayed 10 s) must give C back
/// through `gas_analysis.methane_calibration`. The same test's O₂ reduced with Janssens' form
/// and zero CO₂ and CO must agree with the O₂-only form to 0.1 % (docs/physics.md §4).
#[test]
fn methane_calibration_run_gives_the_orifice_constant_back() {
    use emberfit::data::oxygen::{METHANE_HEAT_PER_OXYGEN_KJ_KG, OXYGEN_AIR_MOLAR_MASS_RATIO};
    let dir = scratch_dir("methane");
    let constant = 0.0415;
    let (dp_pa, te_k) = (110.0, 400.0);
    let flow = exhaust_mass_flow_kg_s(constant, dp_pa, te_k);
    let k = METHANE_HEAT_PER_OXYGEN_KJ_KG * OXYGEN_AIR_MOLAR_MASS_RATIO * flow;
    let burning = (k * AMBIENT_DRY_OXYGEN - 1.105 * 5.0) / (k - 1.5 * 5.0);
    let mut csv = String::from("time,O2,CO2,CO,dp,Te\ns,mol/mol,%,ppm,Pa,K\n");
    for i in -60..=300 {
        let t = i as f64;
        // The burner lights at 0 s; the analyser sees it 10 s later.
        let x = if t >= 10.0 {
            burning
        } else {
            AMBIENT_DRY_OXYGEN
        };
        csv.push_str(&format!("{t},{x},0,0,{dp_pa},{te_k}\n"));
    }
    std::fs::write(dir.join("methane.csv"), csv).unwrap();
    let columns = "[columns]\ntime = \"time\"\noxygen = \"O2\"\ncarbon_dioxide = \"CO2\"\n\
                   carbon_monoxide = \"CO\"\norifice_pressure = \"dp\"\nexhaust_temperature = \
                   \"Te\"\n";
    let calibration = format!(
        "data_file = \"methane.csv\"\nirradiance_kw_m2 = 0\nexposed_area_m2 = 0.01\n{columns}\
         [gas_analysis]\noxygen_delay_s = 10\nmethod = \"oxygen_only\"\n\
         [methane_burner]\nburner_hrr_kw = 5.0\nsteady_from_s = 60\nsteady_to_s = 280\n"
    );
    std::fs::write(dir.join("methane.toml"), calibration).unwrap();
    for method in ["oxygen_only", "with_carbon_oxides"] {
        let test = format!(
            "data_file = \"methane.csv\"\nirradiance_kw_m2 = 0\nexposed_area_m2 = 0.01\n\
             {columns}[gas_analysis]\nmethane_calibration = \"methane.toml\"\n\
             oxygen_delay_s = 10\nmethod = \"{method}\"\n"
        );
        std::fs::write(dir.join(format!("{method}.toml")), test).unwrap();
    }
    let only = reduce(&TestDescription::load(&dir.join("oxygen_only.toml")).unwrap()).unwrap();
    let found = only.orifice_constant.unwrap();
    assert!((found - constant).abs() < 1e-12 * constant, "{found}");
    let general =
        reduce(&TestDescription::load(&dir.join("with_carbon_oxides.toml")).unwrap()).unwrap();
    let (q_only, q_general) = (
        only.hrr_kw_m2.as_ref().unwrap()[100],
        general.hrr_kw_m2.as_ref().unwrap()[100],
    );
    // 5 kW burner, 12.54 vs 13.1 MJ/kg: 5·13.1/12.54 = 5.2233 kW on 0.01 m².
    assert!((q_only - 522.33).abs() < 0.01, "{q_only}");
    assert!(
        (q_general - q_only).abs() < 1e-3 * q_only,
        "{q_general} vs {q_only}"
    );
    std::fs::remove_dir_all(&dir).ok();
}

/// `emberfit ignition` on an ignition list naming TEST.toml files: each test's given ignition
/// time is used, tests and direct points combine, and two irradiances give the "cannot tell
/// thick from thin" warning in the JSON.
#[test]
fn ignition_command_reduces_listed_tests() {
    let dir = scratch_dir("ignition-tests");
    let mut csv = String::from("time,mass\ns,g\n");
    for i in 0..=100 {
        csv.push_str(&format!("{i},{}\n", 70.0 - 0.1 * i as f64));
    }
    std::fs::write(dir.join("run.csv"), csv).unwrap();
    for (name, flux, t_ig) in [("a", 25.0, 110.0), ("b", 25.0, 105.0), ("c", 65.0, 17.0)] {
        let test = format!(
            "data_file = \"run.csv\"\nirradiance_kw_m2 = {flux}\nexposed_area_m2 = 0.01\n\
             ignition_time_s = {t_ig}\n[columns]\ntime = \"time\"\nmass = \"mass\"\n"
        );
        std::fs::write(dir.join(format!("{name}.toml")), test).unwrap();
    }
    let list = "tests = [\"a.toml\", \"b.toml\", \"c.toml\"]\n[[point]]\nirradiance_kw_m2 = 65\n\
                ignition_time_s = 19\n";
    std::fs::write(dir.join("list.toml"), list).unwrap();
    let output = emberfit(&[
        "ignition",
        dir.join("list.toml").to_str().unwrap(),
        "--json",
    ]);
    assert!(
        output.status.success(),
        "{}",
        String::from_utf8_lossy(&output.stderr)
    );
    let json: serde_json::Value = serde_json::from_slice(&output.stdout).unwrap();
    assert_eq!(json["points"].as_array().unwrap().len(), 4);
    assert_eq!(json["n_irradiances"], 2);
    let warnings = json["warnings"].to_string();
    assert!(
        warnings.contains("cannot tell thermally thick from thin"),
        "{warnings}"
    );
    // Hand-worked thick slope through the group means: mean t^-1/2 at 25 kW/m² is
    // (110^-½ + 105^-½)/2 = 0.0964681, at 65 kW/m² (17^-½ + 19^-½)/2 = 0.2359757; TRP =
    // 40/(0.2359757 − 0.0964681) = 286.72 kW·s^½/m².
    let trp = json["thermal_response_parameter_kw_s05_m2"]
        .as_f64()
        .unwrap();
    assert!((trp - 286.72).abs() < 0.01, "{trp}");
    std::fs::remove_dir_all(&dir).ok();
}

/// Janssens' form through the whole pipeline: the hand-worked readings above (X_O2 = 19 %,
/// X_CO2 = 1.5 %, X_CO = 500 ppm after a baseline of 20.95 % and 0.04 %, ṁ_e = 0.02 kg/s,
/// X⁰_H2O = 0.01 from the relative humidity) written as a lab file in %, ppm and °C must give
/// the hand-worked 5.7800 kW, i.e. 578.00 kW/m² on 0.01 m².
#[test]
fn janssens_form_through_the_pipeline_matches_the_hand_worked_value() {
    use emberfit::data::description::saturation_vapour_pressure_pa;
    let dir = scratch_dir("janssens");
    let mut csv = String::from("t,O2,CO2,CO,dp,Te\ns,%,%,ppm,Pa,C\n");
    for i in -30..=100 {
        let (o2, co2, co) = if i < 0 {
            (20.95, 0.04, 0.0)
        } else {
            (19.0, 1.5, 500.0)
        };
        csv.push_str(&format!("{i},{o2},{co2},{co},100,{}\n", 400.0 - 273.15));
    }
    std::fs::write(dir.join("janssens.csv"), csv).unwrap();
    let humidity_pct = 100.0 * 0.01 * 101_325.0 / saturation_vapour_pressure_pa(20.0);
    let toml = format!(
        "data_file = \"janssens.csv\"\nirradiance_kw_m2 = 50\nexposed_area_m2 = 0.01\n\
         [ambient]\ntemperature_c = 20\npressure_kpa = 101.325\nrelative_humidity_pct = \
         {humidity_pct}\n[columns]\ntime = \"t\"\noxygen = \"O2\"\ncarbon_dioxide = \"CO2\"\n\
         carbon_monoxide = \"CO\"\norifice_pressure = \"dp\"\nexhaust_temperature = \"Te\"\n\
         [gas_analysis]\norifice_constant = 0.04\n"
    );
    std::fs::write(dir.join("janssens.toml"), toml).unwrap();
    let reduced = reduce(&TestDescription::load(&dir.join("janssens.toml")).unwrap()).unwrap();
    let hrr = reduced.hrr_kw_m2.as_ref().unwrap();
    let idx = reduced.time_s.iter().position(|t| *t == 50.0).unwrap();
    assert!((hrr[idx] - 578.00).abs() < 0.01, "{}", hrr[idx]);
    std::fs::remove_dir_all(&dir).ok();
}

/// The examples in docs/test-files.md are valid: the complete TEST.toml parses with the values
/// it shows, the thermocouple columns parse inside a description, and the ignition list loads.
/// Keeps the documentation from drifting.
#[test]
fn the_documented_examples_parse() {
    use emberfit::data::description::GasMethod;
    use emberfit::data::ignition::IgnitionList;
    let docs =
        std::fs::read_to_string(format!("{}/docs/test-files.md", env!("CARGO_MANIFEST_DIR")))
            .unwrap();
    let blocks: Vec<&str> = docs
        .split("```toml\n")
        .skip(1)
        .map(|b| b.split("```").next().unwrap())
        .collect();
    assert_eq!(
        blocks.len(),
        3,
        "a test description, thermocouple columns and an ignition list"
    );
    let test = TestDescription::parse(Path::new("docs/pmma.toml"), blocks[0]).unwrap();
    assert_eq!(test.exposed_area_m2, 0.0088);
    assert_eq!(test.time_offset_s, -60.0);
    assert_eq!(
        test.gas.as_ref().unwrap().method,
        GasMethod::WithCarbonOxides
    );
    assert_eq!(test.smoothing.unwrap().window_points, 11);
    // 45 % at 21 °C and 100.8 kPa: 0.45·2482 Pa/100 800 Pa = 0.0111 (Magnus form).
    assert!((test.ambient.water_mole_fraction - 0.0111).abs() < 2e-4);
    let with_thermocouples = TestDescription::parse(
        Path::new("docs/thermocouples.toml"),
        &format!(
            "data_file = \"t.csv\"\nirradiance_kw_m2 = 50\nexposed_area_m2 = 0.01\n\n[columns]\ntime = \"t\"\nmass = \"m\"\n{}",
            blocks[1]
        ),
    )
    .unwrap();
    assert!(with_thermocouples.columns.back_temperature.is_some());
    let depths: Vec<f64> = with_thermocouples
        .columns
        .in_depth_temperature
        .iter()
        .map(|c| c.depth_mm)
        .collect();
    assert_eq!(depths, [2.0, 4.0]);
    let dir = scratch_dir("docs");
    std::fs::write(dir.join("list.toml"), blocks[2]).unwrap();
    let list = IgnitionList::load(&dir.join("list.toml")).unwrap();
    assert_eq!(list.tests.len(), 3);
    assert_eq!(list.points.len(), 1);
    assert!((list.settings.ignition_temperature_k.unwrap() - 651.15).abs() < 1e-9);
    std::fs::remove_dir_all(&dir).ok();
}

/// MaCFP PMMA data, lab-d (see PROVENANCE.md of the set): five of its six cone files log two
/// thermocouples on the specimen's back surface (`cone_65kw_lab-d_2.csv` has none, and naming
/// the column there must be an error that names file, line and column). Read through a test
/// description as the back temperature and as an in-depth temperature at the specimen's full 6 mm depth, both start at room temperature
/// (the files' first readings, 297–300 K), rise by more than 150 K by the end of the test, and
/// the two thermocouples agree to within 15 K on average (their mean difference is 2–12 K in
/// the files); the three 25 kW/m² repeats combine into a mean
/// back temperature with a spread. The lab logged the thermocouples for the first 400 s only
/// (the set's tests.toml says so): the mass and HRR records still run to their end, with the
/// same report as without the thermocouple columns.
#[test]
fn pmma_lab_d_back_surface_thermocouples_read_as_temperature_signals() {
    let Some(dir) = reference_data("pmma_lab_d_back_surface_thermocouples") else {
        return;
    };
    let scratch = std::env::temp_dir().join(format!("emberfit-pmma-tc-{}", std::process::id()));
    std::fs::create_dir_all(&scratch).unwrap();
    let mut repeats_25 = Vec::new();
    for (file, flux) in [
        ("cone_25kw_lab-d_1.csv", 25.0),
        ("cone_25kw_lab-d_2.csv", 25.0),
        ("cone_25kw_lab-d_3.csv", 25.0),
        ("cone_65kw_lab-d_1.csv", 65.0),
        ("cone_65kw_lab-d_2.csv", 65.0),
        ("cone_65kw_lab-d_3.csv", 65.0),
    ] {
        let description = scratch.join(format!("{file}.toml"));
        std::fs::write(
            &description,
            format!(
                "data_file = \"{}\"\nirradiance_kw_m2 = {flux}\nexposed_area_m2 = 0.0084\nthickness_mm = 6.0\n\n\
                 [columns]\ntime = \"Time\"\nmass = \"mass\"\nhrr = \"HRR\"\n\
                 back_temperature = \"Back surface temperature 1\"\n\
                 in_depth_temperature = [{{ name = \"Back surface temperature 2\", unit = \"K\", depth_mm = 6.0 }}]\n",
                dir.join("cone").join(file).display()
            ),
        )
        .unwrap();
        let result = reduce(&TestDescription::load(&description).unwrap());
        if file == "cone_65kw_lab-d_2.csv" {
            let message = result
                .expect_err("this file has no thermocouples")
                .to_string();
            assert!(
                message.contains("line 1") && message.contains("Back surface temperature 1"),
                "{message}"
            );
            continue;
        }
        let reduced = result.unwrap_or_else(|err| panic!("{file}: {err}"));
        let back = reduced
            .back_temperature_k
            .as_ref()
            .expect("back temperature");
        let second = &reduced.in_depth_temperature_k[0];
        assert_eq!(second.depth_mm, 6.0);
        let rise = back.iter().copied().fold(f64::NEG_INFINITY, f64::max) - back[0];
        let pairs: Vec<f64> = back
            .iter()
            .zip(&second.temperature_k)
            .filter(|(a, b)| a.is_finite() && b.is_finite())
            .map(|(a, b)| (a - b).abs())
            .collect();
        let mean_difference = pairs.iter().sum::<f64>() / pairs.len() as f64;
        // The thermocouples are logged for the first 400 s (160 s at 65 kW/m²) only; they
        // must not cut the mass and HRR records short: the report is the one read without them.
        let without = scratch.join(format!("{file}-no-tc.toml"));
        let text = std::fs::read_to_string(&description).unwrap();
        let kept: Vec<&str> = text
            .lines()
            .filter(|line| !line.contains("temperature"))
            .collect();
        std::fs::write(&without, kept.join("\n")).unwrap();
        let plain = reduce(&TestDescription::load(&without).unwrap()).unwrap();
        assert_eq!(reduced.time_s, plain.time_s, "{file}");
        assert_eq!(
            reduced.report.total_heat_release_mj_m2, plain.report.total_heat_release_mj_m2,
            "{file}"
        );
        let last_reading = back.iter().rposition(|v| v.is_finite()).unwrap();
        assert!(
            reduced.time_s[last_reading] <= 401.0 && *reduced.time_s.last().unwrap() > 450.0,
            "{file}: thermocouple to {} s, record to {} s",
            reduced.time_s[last_reading],
            reduced.time_s.last().unwrap()
        );
        eprintln!(
            "{file}: back TC starts {:.1} K, rises {rise:.0} K, mean |TC1 − TC2| {mean_difference:.1} K",
            back[0]
        );
        assert!((290.0..=305.0).contains(&back[0]), "{file}: {}", back[0]);
        assert!(rise > 150.0, "{file}: rise {rise} K");
        assert!(mean_difference < 15.0, "{file}: {mean_difference} K");
        if flux == 25.0 {
            repeats_25.push(reduced);
        }
    }
    let set = combine(&repeats_25, Alignment::ExposureStart).unwrap();
    let back = set.back_temperature_k.expect("mean back temperature");
    assert!(back
        .standard_deviation
        .iter()
        .any(|s| s.is_finite() && *s > 0.0));
    assert_eq!(set.in_depth_temperature_k.len(), 1);
    let _ = std::fs::remove_dir_all(&scratch);
}
