//! The simulated curves as CSV, in the trade's units (docs/file-formats.md, "Output CSV").

use crate::physics::History;

/// The fixed columns, in order; probe columns `temp_<name>_k` follow, and
/// `stack_back_temp_k` when the stack has backing.
pub const CURVE_COLUMNS: [&str; 8] = [
    "time_s",
    "mass_kg_m2",
    "mlr_g_m2s",
    "fuel_mlr_g_m2s",
    "hrr_kw_m2",
    "surface_temp_k",
    "back_temp_k",
    "thickness_mm",
];

/// Renders the curves as CSV text.
pub fn curves_csv(history: &History, has_backing: bool) -> Result<Vec<u8>, csv::Error> {
    let mut writer = csv::Writer::from_writer(Vec::new());
    let mut header: Vec<String> = CURVE_COLUMNS.iter().map(|c| c.to_string()).collect();
    if has_backing {
        header.push("stack_back_temp_k".into());
    }
    header.extend(
        history
            .probe_names
            .iter()
            .map(|name| format!("temp_{name}_k")),
    );
    writer.write_record(&header)?;
    for sample in &history.samples {
        let mut row = vec![
            format!("{:.3}", sample.time_s),
            format!("{:.6}", sample.mass_kg_m2),
            format!("{:.5}", sample.mlr_kg_m2_s * 1e3),
            format!("{:.5}", sample.fuel_mlr_kg_m2_s * 1e3),
            format!("{:.4}", sample.hrr_w_m2 * 1e-3),
            format!("{:.3}", sample.surface_temperature_k),
            format!("{:.3}", sample.back_temperature_k),
            format!("{:.5}", sample.thickness_m * 1e3),
        ];
        if has_backing {
            row.push(format!("{:.3}", sample.stack_back_temperature_k));
        }
        row.extend(
            sample
                .probe_temperatures_k
                .iter()
                .map(|t| format!("{t:.3}")),
        );
        writer.write_record(&row)?;
    }
    writer
        .into_inner()
        .map_err(|err| csv::Error::from(err.into_error()))
}
