//! The milligram-scale commands: a 0-D run's figures (`simulate` on a `[programme]`
//! scenario), and the isoconversional report (E against conversion per method, Kissinger,
//! the optional single-step fit) as a table, JSON or CSV.
//!
//! **Invariant:** reads `physics::zero_d::ZeroDHistory` and the `microscale` results only;
//! J/mol become kJ/mol and K/s become K/min here and nowhere else on the way to the screen.

use crate::microscale::isoconversional::IsoconversionalReport;
use crate::microscale::{ConversionRun, SingleStepFit};
use crate::physics::zero_d::ZeroDHistory;

use super::finite;

/// The figures of a 0-D run.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ZeroDFigures {
    pub peak_rate_per_s: f64,
    pub peak_temperature_k: f64,
    pub final_mass_fraction: f64,
    pub dsc_j_g: f64,
    pub mcc_j_g: f64,
}

impl ZeroDFigures {
    /// Peak of −dm/dt/m₀ and its temperature, the final mass fraction, and the DSC and MCC
    /// heats per initial mass (trapezoidal integrals of the curves), J/g.
    pub fn of(history: &ZeroDHistory) -> Self {
        let (_, peak_temperature_k, peak_rate_per_s) =
            history
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
        ZeroDFigures {
            peak_rate_per_s,
            peak_temperature_k,
            final_mass_fraction: history.mass_fraction.last().copied().unwrap_or(1.0),
            dsc_j_g: integral(&history.dsc_w_g),
            mcc_j_g: integral(&history.mcc_w_g),
        }
    }
}

/// The figures as JSON.
pub fn zero_d_json(figures: &ZeroDFigures, n_steps: usize) -> serde_json::Value {
    serde_json::json!({
        "peak_mlr_per_s": figures.peak_rate_per_s,
        "peak_mlr_temperature_k": figures.peak_temperature_k,
        "final_mass_fraction": figures.final_mass_fraction,
        "dsc_heat_j_g": figures.dsc_j_g,
        "mcc_heat_j_g": figures.mcc_j_g,
        "steps": n_steps,
    })
}

/// The figures as a table under `title`: the peak rate also in %/min (× 100 × 60), the MCC
/// heat in kJ/g.
pub fn zero_d_table(title: &str, figures: &ZeroDFigures, n_steps: usize) -> String {
    let mut out = format!("{title}\n");
    out.push_str(&format!(
        "  {:<20} {:.3e} 1/s ({:.2} %/min) at {:.1} K\n",
        "peak mass-loss rate",
        figures.peak_rate_per_s,
        figures.peak_rate_per_s * 6000.0,
        figures.peak_temperature_k
    ));
    out.push_str(&format!(
        "  {:<20} {:.4}\n",
        "final mass fraction", figures.final_mass_fraction
    ));
    out.push_str(&format!(
        "  {:<20} {:.1} J/g\n",
        "DSC heat", figures.dsc_j_g
    ));
    out.push_str(&format!(
        "  {:<20} {:.2} kJ/g\n",
        "MCC heat release",
        figures.mcc_j_g * 1e-3
    ));
    out.push_str(&format!("  {:<20} {}\n", "steps", n_steps));
    out
}

pub fn isoconversional_json(
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

/// E against conversion as CSV: `conversion`, then `<method>_e_kj_mol`,
/// `<method>_se_kj_mol`, `<method>_r2` for each method; blank where a method has no value.
pub fn profile_csv(conversions: &[f64], report: &IsoconversionalReport) -> String {
    let mut out = String::from("conversion");
    for (method, _) in &report.profiles {
        let name = method.name();
        out.push_str(&format!(",{name}_e_kj_mol,{name}_se_kj_mol,{name}_r2"));
    }
    out.push('\n');
    let cell = |v: f64, decimals: usize| {
        if v.is_finite() {
            format!("{v:.decimals$}")
        } else {
            String::new()
        }
    };
    for &conversion in conversions {
        out.push_str(&format!("{conversion:.4}"));
        for (_, points) in &report.profiles {
            match points
                .iter()
                .find(|p| (p.conversion - conversion).abs() < 1e-12)
            {
                Some(p) => out.push_str(&format!(
                    ",{},{},{}",
                    cell(p.activation_energy_j_mol * 1e-3, 3),
                    cell(p.standard_error_j_mol * 1e-3, 3),
                    cell(p.r_squared, 6)
                )),
                None => out.push_str(",,,"),
            }
        }
        out.push('\n');
    }
    out
}

pub fn isoconversional_table(
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::microscale::isoconversional::{IsoconversionalPoint, KissingerEstimate, Method};
    use crate::physics::zero_d::Integrator;

    /// Three rows, 10 s apart: the DSC curve 0, 1, 1 W/g integrates (trapezoids) to
    /// 5 + 10 = 15 J/g, the MCC curve 2, 2, 2 W/g to 40 J/g = 0.04 kJ/g; the rate 0, 1e-3, 0
    /// is symmetric, so its parabola peaks at the middle row, 1e-3 1/s = 6 %/min at 310 K.
    fn history() -> ZeroDHistory {
        ZeroDHistory {
            time_s: vec![0.0, 10.0, 20.0],
            temperature_k: vec![300.0, 310.0, 320.0],
            mass_fraction: vec![1.0, 0.5, 0.25],
            mass_loss_rate_per_s: vec![0.0, 1e-3, 0.0],
            dsc_w_g: vec![0.0, 1.0, 1.0],
            mcc_w_g: vec![2.0, 2.0, 2.0],
            n_steps: 7,
            integrator: Integrator::DormandPrince,
        }
    }

    #[test]
    fn the_figures_integrate_the_curves_by_trapezoids() {
        let figures = ZeroDFigures::of(&history());
        assert!((figures.dsc_j_g - 15.0).abs() < 1e-12);
        assert!((figures.mcc_j_g - 40.0).abs() < 1e-12);
        assert_eq!(figures.final_mass_fraction, 0.25);
        assert_eq!(
            zero_d_table("TGA 10 K/min", &figures, 7),
            "TGA 10 K/min\n\
             \x20 peak mass-loss rate  1.000e-3 1/s (6.00 %/min) at 310.0 K\n\
             \x20 final mass fraction  0.2500\n\
             \x20 DSC heat             15.0 J/g\n\
             \x20 MCC heat release     0.04 kJ/g\n\
             \x20 steps                7\n"
        );
        assert_eq!(zero_d_json(&figures, 7)["steps"], 7);
    }

    fn report() -> IsoconversionalReport {
        let point = |conversion: f64, e_j_mol: f64| IsoconversionalPoint {
            conversion,
            activation_energy_j_mol: e_j_mol,
            standard_error_j_mol: f64::NAN,
            r_squared: 0.999_95,
            n_runs: 2,
        };
        IsoconversionalReport {
            profiles: vec![(Method::Friedman, vec![point(0.2, 150_000.0)])],
            kissinger: KissingerEstimate {
                activation_energy_j_mol: 160_049.0,
                pre_exponential_per_s: 1.0e12,
                standard_error_j_mol: f64::NAN,
                r_squared: 1.0,
                peaks: vec![(10.0 / 60.0, 640.0)],
            },
            warnings: vec![],
        }
    }

    #[test]
    fn the_profile_is_in_kilojoules_with_blanks_for_missing_conversions() {
        // 150 000 J/mol = 150.000 kJ/mol; no value at 0.4, and no standard error with two runs.
        assert_eq!(
            profile_csv(&[0.2, 0.4], &report()),
            "conversion,friedman_e_kj_mol,friedman_se_kj_mol,friedman_r2\n\
             0.2000,150.000,,0.999950\n\
             0.4000,,,\n"
        );
    }

    #[test]
    fn the_table_gives_the_heating_rate_in_kelvin_per_minute() {
        let runs = [ConversionRun {
            label: "tga-10.csv".into(),
            heating_rate_k_s: 10.0 / 60.0,
            time_s: vec![],
            temperature_k: vec![],
            conversion: vec![],
        }];
        let table = isoconversional_table(&runs, &report(), None, &[]);
        // 1/6 K/s × 60 = 10.00 K/min; 160 049 J/mol = 160.0 kJ/mol.
        assert!(
            table.contains("   1    10.00 K/min  peak  640.0 K  tga-10.csv\n"),
            "{table}"
        );
        assert!(
            table.contains("kissinger (peak temperatures): E 160.0 ± - kJ/mol"),
            "{table}"
        );
        let json = isoconversional_json(&runs, &report(), None, &[]);
        assert!((json["runs"][0]["heating_rate_k_min"].as_f64().unwrap() - 10.0).abs() < 1e-12);
        assert!(json["methods"]["friedman"][0]["standard_error_kj_mol"].is_null());
    }
}
