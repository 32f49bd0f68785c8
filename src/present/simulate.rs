//! `simulate` (a cone scenario): the run's figures as a table in trade units, or as JSON.
//!
//! **Invariant:** the only place the solver's SI summary becomes the kW/m², g/(m²·s) and
//! MJ/m² a user reads after `simulate`; it reads a `physics::output::Summary` and nothing else.

use crate::physics::output::Summary;

/// The figures as JSON, in the trade units their keys name.
pub fn summary_json(s: &Summary) -> serde_json::Value {
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

/// The figures as a table under `title`, one row each.
pub fn summary_table(title: &str, s: &Summary) -> String {
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

/// The exposure as the table's title says it: `35.0 kW/m²`, or the size of a table.
pub fn exposure_text(irradiance_w_m2: &crate::physics::scenario::Schedule) -> String {
    match irradiance_w_m2 {
        crate::physics::scenario::Schedule::Constant(q) => format!("{:.1} kW/m²", q * 1e-3),
        crate::physics::scenario::Schedule::Table(points) => {
            format!("irradiance table of {} points", points.len())
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::present::fixtures;

    /// Worked by hand: 456 789 W/m² = 456.8 kW/m²; 0.012 346 kg/(m²·s) = 12.35 g/(m²·s);
    /// 87 654 321 J/m² = 87.65 MJ/m²; 1.8 of 7.2 kg/m² is 25.0 %; the energy terms leave
    /// 1000 − 400 − 100 − 200 − 299 = 1 J/m² of 1000 absorbed (1.0e-3); the mass terms
    /// 8 − 6 − 1.996 = 0.004 of 8 kg/m² (5.0e-4).
    #[test]
    fn the_table_rounds_each_figure_in_its_trade_unit() {
        assert_eq!(
            summary_table("panel — 35.0 kW/m², 600 s", &fixtures::summary()),
            "panel — 35.0 kW/m², 600 s\n\
             \x20 ignition             12.3 s\n\
             \x20 flame-out            none\n\
             \x20 peak HRR             456.8 kW/m² at 100.0 s\n\
             \x20 peak MLR             12.35 g/(m²·s) at 99.0 s\n\
             \x20 total heat release   87.65 MJ/m²\n\
             \x20 mass lost            1.800 of 7.200 kg/m² (25.0 %)\n\
             \x20 energy balance       1.0e-3 of absorbed energy\n\
             \x20 mass balance         5.0e-4 of initial mass\n\
             \x20 steps                321 accepted, 4 retried shorter\n"
        );
    }

    #[test]
    fn the_json_converts_si_to_the_units_its_keys_name() {
        let json = summary_json(&fixtures::summary());
        let number = |key: &str| json[key].as_f64().unwrap();
        assert!((number("peak_hrr_kw_m2") - 456.789).abs() < 1e-9);
        assert!((number("peak_mlr_g_m2s") - 12.346).abs() < 1e-9);
        assert!((number("total_heat_release_mj_m2") - 87.654_321).abs() < 1e-9);
        assert!((number("energy_balance_relative_residual") - 1e-3).abs() < 1e-12);
        assert!((number("mass_balance_relative_residual") - 5e-4).abs() < 1e-12);
        assert_eq!(json["ignition_time_s"], 12.34);
        assert!(json["flameout_time_s"].is_null());
        assert_eq!(json["steps"], 321);
        assert_eq!(json["rejected_steps"], 4);
    }

    #[test]
    fn a_constant_exposure_is_shown_in_kilowatts() {
        use crate::physics::scenario::Schedule;
        assert_eq!(exposure_text(&Schedule::Constant(35_000.0)), "35.0 kW/m²");
        assert_eq!(
            exposure_text(&Schedule::Table(vec![(0.0, 1.0), (10.0, 2.0)])),
            "irradiance table of 2 points"
        );
    }
}
