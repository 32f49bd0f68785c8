//! `ignition`: the ignition analysis (points, the fits of each correlation, the derived
//! properties) as a table or JSON.
//!
//! **Invariant:** reads a `data::ignition::IgnitionAnalysis` only; the one unit conversion
//! made here is K to °C for the ignition temperature shown.

use crate::data::ignition::{IgnitionAnalysis, IgnitionTemperatureSource};
use crate::data::Notice;

pub fn ignition_json(analysis: &IgnitionAnalysis, notices: &[Notice]) -> serde_json::Value {
    let fits: Vec<serde_json::Value> = analysis
        .fits
        .iter()
        .map(|f| {
            serde_json::json!({
                "correlation": f.correlation.name(),
                "exponent": f.correlation.exponent(),
                "slope": f.slope,
                "intercept": f.intercept,
                "critical_heat_flux_kw_m2": f.critical_heat_flux_kw_m2,
                "critical_heat_flux_95_kw_m2": f.critical_heat_flux_95_kw_m2,
                "r_squared": f.r_squared,
            })
        })
        .collect();
    serde_json::json!({
        "points": analysis.points.iter().map(|p| serde_json::json!({
            "irradiance_kw_m2": p.irradiance_kw_m2,
            "ignition_time_s": p.ignition_time_s,
            "label": p.label,
        })).collect::<Vec<_>>(),
        "n_irradiances": analysis.n_irradiances,
        "fits": fits,
        "thermal_response_parameter_kw_s05_m2": analysis.thermal_response_parameter_kw_s05_m2,
        "ignition_temperature_k": analysis.ignition_temperature.map(|t| t.0),
        "ignition_temperature_source": analysis.ignition_temperature.map(|t| match t.1 {
            IgnitionTemperatureSource::Given => "given",
            IgnitionTemperatureSource::FromCriticalHeatFlux => "from_critical_heat_flux",
        }),
        "apparent_krhoc_thick_kw2_s_m4_k2": analysis.apparent_krhoc_thick_kw2_s_m4_k2,
        "apparent_krhoc_janssens_kw2_s_m4_k2": analysis.apparent_krhoc_janssens_kw2_s_m4_k2,
        "heat_capacity_per_area_thin_kj_m2_k": analysis.heat_capacity_per_area_thin_kj_m2_k,
        "critical_heat_flux_from_balance_kw_m2": analysis.critical_heat_flux_from_balance_kw_m2,
        "warnings": analysis.warnings.iter().map(|w| w.message.clone()).collect::<Vec<_>>(),
        "notices": notices.iter().map(|n| n.message.clone()).collect::<Vec<_>>(),
    })
}

pub fn ignition_table(analysis: &IgnitionAnalysis) -> String {
    let mut out = format!(
        "{} tests at {} irradiances\n\n  irradiance kW/m²  t_ig s  test\n",
        analysis.points.len(),
        analysis.n_irradiances
    );
    for p in &analysis.points {
        out.push_str(&format!(
            "  {:>16.1}  {:>6.1}  {}\n",
            p.irradiance_kw_m2, p.ignition_time_s, p.label
        ));
    }
    out.push_str(
        "\n  form              t_ig exponent  critical heat flux kW/m²  95 % interval        R²\n",
    );
    for f in &analysis.fits {
        let interval = match f.critical_heat_flux_95_kw_m2 {
            Some([low, high]) => format!("{low:.1} .. {high:.1}"),
            None => "–".to_string(),
        };
        out.push_str(&format!(
            "  {:<16}  {:>13.3}  {:>24.2}  {:<16}  {:>6.4}\n",
            f.correlation.name(),
            f.correlation.exponent(),
            f.critical_heat_flux_kw_m2,
            interval,
            f.r_squared
        ));
    }
    out.push_str(&format!(
        "\n  thermal response parameter (thick)   {:.1} kW·s^½/m²\n",
        analysis.thermal_response_parameter_kw_s05_m2
    ));
    if let Some((t, source)) = analysis.ignition_temperature {
        let how = match source {
            IgnitionTemperatureSource::Given => "given",
            IgnitionTemperatureSource::FromCriticalHeatFlux => {
                "from the surface balance at Janssens' critical heat flux"
            }
        };
        out.push_str(&format!(
            "  ignition temperature                 {:.0} K ({:.0} °C, {how})\n",
            t,
            t - 273.15
        ));
    }
    let optional = [
        (
            "apparent kρc (thick)",
            analysis.apparent_krhoc_thick_kw2_s_m4_k2,
            "kW²·s/(m⁴·K²)",
        ),
        (
            "apparent kρc (Janssens)",
            analysis.apparent_krhoc_janssens_kw2_s_m4_k2,
            "kW²·s/(m⁴·K²)",
        ),
        (
            "heat capacity per area (thin)",
            analysis.heat_capacity_per_area_thin_kj_m2_k,
            "kJ/(m²·K)",
        ),
        (
            "critical heat flux at T_ig (balance)",
            analysis.critical_heat_flux_from_balance_kw_m2,
            "kW/m²",
        ),
    ];
    for (name, v, unit) in optional {
        if let Some(v) = v {
            out.push_str(&format!("  {name:<37}{v:.3} {unit}\n"));
        }
    }
    for w in &analysis.warnings {
        out.push_str(&format!("warning: {w}\n"));
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::data::ignition::{Correlation, CorrelationFit, IgnitionPoint};

    fn analysis() -> IgnitionAnalysis {
        IgnitionAnalysis {
            points: vec![IgnitionPoint {
                irradiance_kw_m2: 25.0,
                ignition_time_s: 95.06,
                label: "t-25".into(),
            }],
            n_irradiances: 1,
            fits: vec![CorrelationFit {
                correlation: Correlation::ThermallyThick,
                slope: 0.004,
                intercept: -0.04,
                critical_heat_flux_kw_m2: 10.0,
                r_squared: 0.998_76,
                critical_heat_flux_95_kw_m2: Some([8.04, 11.96]),
            }],
            thermal_response_parameter_kw_s05_m2: 250.0,
            ignition_temperature: Some((573.15, IgnitionTemperatureSource::Given)),
            apparent_krhoc_thick_kw2_s_m4_k2: None,
            apparent_krhoc_janssens_kw2_s_m4_k2: None,
            heat_capacity_per_area_thin_kj_m2_k: None,
            critical_heat_flux_from_balance_kw_m2: Some(12.3456),
            warnings: vec![],
        }
    }

    #[test]
    fn the_table_shows_the_ignition_temperature_in_kelvin_and_celsius() {
        let table = ignition_table(&analysis());
        // 95.06 s to one decimal is 95.1; R² 0.99876 to four decimals is 0.9988; the interval
        // 8.04 .. 11.96 to one decimal is 8.0 .. 12.0; 573.15 K − 273.15 = 300 °C; 1/0.004 =
        // 250 kW·s^½/m² is the TRP given.
        assert!(table.starts_with("1 tests at 1 irradiances\n"));
        assert!(
            table.contains("              25.0    95.1  t-25\n"),
            "{table}"
        );
        assert!(
            table.contains(
                "  thermally_thick           0.500                     10.00  8.0 .. 12.0       0.9988\n"
            ),
            "{table}"
        );
        assert!(table.contains("(thick)   250.0 kW·s^½/m²\n"), "{table}");
        assert!(table.contains("573 K (300 °C, given)"), "{table}");
        assert!(table.contains("(balance) 12.346 kW/m²\n"), "{table}");
    }

    #[test]
    fn the_json_names_the_form_and_its_exponent() {
        let json = ignition_json(&analysis(), &[]);
        assert_eq!(json["fits"][0]["correlation"], "thermally_thick");
        assert_eq!(json["fits"][0]["exponent"], 0.5);
        assert_eq!(json["ignition_temperature_source"], "given");
        assert_eq!(json["points"][0]["label"], "t-25");
        assert!(json["apparent_krhoc_thick_kw2_s_m4_k2"].is_null());
    }
}
