//! `reduce`: a reduced cone test's report quantities as a table or JSON, and its curves as CSV.
//!
//! **Invariant:** reads a `data::Reduced` only; the quantities are already in the trade units
//! their names carry, so nothing here converts units.

use crate::data::report::IgnitionSource;
use crate::data::Reduced;

pub fn report_json(reduced: &Reduced) -> serde_json::Value {
    let r = &reduced.report;
    serde_json::json!({
        "source": reduced.source.display().to_string(),
        "irradiance_kw_m2": reduced.irradiance_kw_m2,
        "exposed_area_m2": reduced.exposed_area_m2,
        "ignition_time_s": r.ignition_time_s,
        "ignition_time_source": match r.ignition_source {
            IgnitionSource::Given => "given",
            IgnitionSource::Detected => "detected",
            IgnitionSource::Unknown => "unknown",
        },
        "peak_hrr_kw_m2": r.peak_hrr_kw_m2,
        "time_to_peak_hrr_s": r.time_to_peak_hrr_s,
        "total_heat_release_mj_m2": r.total_heat_release_mj_m2,
        "avg_hrr_60_kw_m2": r.avg_hrr_60_kw_m2,
        "avg_hrr_180_kw_m2": r.avg_hrr_180_kw_m2,
        "avg_hrr_300_kw_m2": r.avg_hrr_300_kw_m2,
        "initial_mass_g": r.initial_mass_g,
        "mass_lost_g": r.mass_lost_g,
        "avg_mlr_10_90_g_m2s": r.avg_mlr_10_90_g_m2s,
        "peak_mlr_g_m2s": r.peak_mlr_g_m2s,
        "effective_heat_of_combustion_mj_kg": r.effective_heat_of_combustion_mj_kg,
        "mean_extinction_coefficient_1_m": r.mean_extinction_coefficient_1_m,
        "avg_specific_extinction_area_m2_kg": r.avg_specific_extinction_area_m2_kg,
        "total_smoke_release_m2_m2": r.total_smoke_release_m2_m2,
        "orifice_constant": reduced.orifice_constant,
        "end_time_s": r.end_time_s,
        "n_samples": reduced.time_s.len(),
        "notices": reduced.notices.iter().map(|n| n.message.clone()).collect::<Vec<_>>(),
    })
}

pub fn report_table(reduced: &Reduced) -> String {
    let r = &reduced.report;
    let value = |v: Option<f64>, decimals: usize, unit: &str| match v {
        Some(v) => format!("{v:.decimals$} {unit}"),
        None => "-".to_string(),
    };
    let ignition_note = match r.ignition_source {
        IgnitionSource::Given => " (given)",
        IgnitionSource::Detected => " (detected: HRR held above 10 % of peak; see docs)",
        IgnitionSource::Unknown => "",
    };
    let mut rows = vec![
        (
            "time to ignition",
            format!("{}{ignition_note}", value(r.ignition_time_s, 1, "s")),
        ),
        ("peak HRR", value(r.peak_hrr_kw_m2, 1, "kW/m²")),
        ("time to peak HRR", value(r.time_to_peak_hrr_s, 1, "s")),
        (
            "total heat release",
            value(r.total_heat_release_mj_m2, 2, "MJ/m²"),
        ),
        ("average HRR, 60 s", value(r.avg_hrr_60_kw_m2, 1, "kW/m²")),
        ("average HRR, 180 s", value(r.avg_hrr_180_kw_m2, 1, "kW/m²")),
        ("average HRR, 300 s", value(r.avg_hrr_300_kw_m2, 1, "kW/m²")),
        ("initial mass", value(r.initial_mass_g, 2, "g")),
        ("mass lost", value(r.mass_lost_g, 2, "g")),
        (
            "average MLR, 10–90 %",
            value(r.avg_mlr_10_90_g_m2s, 2, "g/(m²·s)"),
        ),
        ("peak MLR", value(r.peak_mlr_g_m2s, 2, "g/(m²·s)")),
        (
            "effective heat of combustion",
            value(r.effective_heat_of_combustion_mj_kg, 2, "MJ/kg"),
        ),
    ];
    if r.mean_extinction_coefficient_1_m.is_some() {
        rows.push((
            "mean extinction coefficient",
            value(r.mean_extinction_coefficient_1_m, 3, "1/m"),
        ));
        rows.push((
            "average specific extinction area",
            value(r.avg_specific_extinction_area_m2_kg, 1, "m²/kg"),
        ));
        rows.push((
            "total smoke release",
            value(r.total_smoke_release_m2_m2, 1, "m²/m²"),
        ));
    }
    if let Some(c) = reduced.orifice_constant {
        rows.push(("orifice constant", format!("{c:.5} m^½·kg^½·K^½")));
    }
    let mut out = format!(
        "{}: {} kW/m², {} m², {} samples to {:.0} s\n",
        reduced.source.display(),
        reduced.irradiance_kw_m2,
        reduced.exposed_area_m2,
        reduced.time_s.len(),
        r.end_time_s
    );
    for (name, text) in rows {
        out.push_str(&format!("  {name:<34}{text}\n"));
    }
    out
}

/// The reduced curves as CSV: one row per sample, a column per signal the test has.
pub fn reduced_curves_csv(reduced: &Reduced) -> String {
    let mut columns: Vec<(&str, &Vec<f64>)> = vec![("time_s", &reduced.time_s)];
    let optional = [
        ("hrr_kw_m2", &reduced.hrr_kw_m2),
        ("mlr_g_m2s", &reduced.mlr_g_m2s),
        ("mass_g", &reduced.mass_g),
        ("hrr_from_mass_kw_m2", &reduced.hrr_from_mass_kw_m2),
        (
            "extinction_coefficient_1_m",
            &reduced.extinction_coefficient_1_m,
        ),
        ("smoke_production_m2_s", &reduced.smoke_production_m2_s),
    ];
    for (name, values) in optional {
        if let Some(values) = values {
            columns.push((name, values));
        }
    }
    let mut out = columns.iter().map(|c| c.0).collect::<Vec<_>>().join(",");
    out.push('\n');
    for idx in 0..reduced.time_s.len() {
        let row: Vec<String> = columns
            .iter()
            .map(|(_, values)| {
                let v = values[idx];
                if v.is_finite() {
                    format!("{v}")
                } else {
                    String::new()
                }
            })
            .collect();
        out.push_str(&row.join(","));
        out.push('\n');
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::data::report::Report;

    /// A short test with an HRR and a mass column; the figures are chosen so each rounding
    /// can be checked by hand.
    fn reduced() -> Reduced {
        Reduced {
            source: "tests/t-50.toml".into(),
            irradiance_kw_m2: 50.0,
            exposed_area_m2: 0.0088,
            specimen_area_m2: 0.0088,
            time_s: vec![0.0, 1.0, 2.0],
            hrr_kw_m2: Some(vec![0.0, 50.5, f64::NAN]),
            mass_g: Some(vec![30.0, 29.75, 29.5]),
            mlr_g_m2s: None,
            hrr_from_mass_kw_m2: None,
            extinction_coefficient_1_m: None,
            smoke_production_m2_s: None,
            surface_temperature_k: None,
            back_temperature_k: None,
            in_depth_temperature_k: vec![],
            orifice_constant: None,
            report: Report {
                ignition_time_s: Some(12.34),
                ignition_source: IgnitionSource::Given,
                peak_hrr_kw_m2: Some(123.46),
                time_to_peak_hrr_s: Some(80.0),
                total_heat_release_mj_m2: Some(45.678),
                avg_hrr_60_kw_m2: None,
                avg_hrr_180_kw_m2: None,
                avg_hrr_300_kw_m2: None,
                initial_mass_g: Some(30.0),
                mass_lost_g: Some(0.5),
                avg_mlr_10_90_g_m2s: None,
                peak_mlr_g_m2s: Some(9.999),
                effective_heat_of_combustion_mj_kg: None,
                mean_extinction_coefficient_1_m: None,
                avg_specific_extinction_area_m2_kg: None,
                total_smoke_release_m2_m2: None,
                end_time_s: 2.4,
            },
            notices: vec![crate::data::Notice::new("1 blank HRR cell")],
        }
    }

    #[test]
    fn the_curves_have_a_column_per_signal_and_blank_cells_for_missing_values() {
        assert_eq!(
            reduced_curves_csv(&reduced()),
            "time_s,hrr_kw_m2,mass_g\n0,0,30\n1,50.5,29.75\n2,,29.5\n"
        );
    }

    #[test]
    fn the_table_rounds_each_quantity_and_dashes_the_missing_ones() {
        let table = report_table(&reduced());
        let lines: Vec<&str> = table.lines().collect();
        assert_eq!(
            lines[0],
            "tests/t-50.toml: 50 kW/m², 0.0088 m², 3 samples to 2 s"
        );
        // 12.34 s to one decimal is 12.3; 123.46 kW/m² is 123.5; 45.678 MJ/m² is 45.68;
        // 9.999 g/(m²·s) to two decimals rounds up to 10.00.
        let row = |name: &str| {
            lines
                .iter()
                .find(|l| l.trim_start().starts_with(name))
                .map(|l| l[2 + 34..].to_string())
                .unwrap()
        };
        assert_eq!(row("time to ignition"), "12.3 s (given)");
        assert_eq!(row("peak HRR"), "123.5 kW/m²");
        assert_eq!(row("total heat release"), "45.68 MJ/m²");
        assert_eq!(row("average HRR, 60 s"), "-");
        assert_eq!(row("mass lost"), "0.50 g");
        assert_eq!(row("peak MLR"), "10.00 g/(m²·s)");
        assert!(!table.contains("smoke"), "no smoke rows without smoke data");
    }

    #[test]
    fn the_json_names_the_ignition_source_and_carries_the_notices() {
        let json = report_json(&reduced());
        assert_eq!(json["ignition_time_source"], "given");
        assert_eq!(json["peak_hrr_kw_m2"], 123.46);
        assert!(json["avg_hrr_60_kw_m2"].is_null());
        assert_eq!(json["n_samples"], 3);
        assert_eq!(json["notices"][0], "1 blank HRR cell");
    }
}
