//! Scenario files: the specimen's layers (each naming a material file), the exposure, the
//! ignition rule, the back face, probes and numerics (docs/file-formats.md, "Scenario").

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};
use toml::Spanned;

use super::material::{build_material, MaterialFile, MaterialModel};
use super::source::Source;
use super::CaseError;
use crate::physics::scenario::{
    BackFace, Exposure, Flameout, IgnitionRule, Layer, Numerics, Probe, Scenario, Schedule,
    DEFAULT_CONVECTIVE_COEFFICIENT_W_M2_K, DEFAULT_CRITICAL_FUEL_MASS_FLUX_KG_M2_S,
};

/// Ambient temperature when the file gives none, K (20 °C, a usual laboratory condition).
pub const DEFAULT_AMBIENT_TEMPERATURE_K: f64 = 293.15;
/// Default thickness of the first (front) cell of a specimen layer, m: with the default cell
/// growth, fine enough that 4× the cells change the fit's figures by under 1 % on the
/// templates (tests/integration/numerics.rs; docs/numerics.md, "Grid").
pub const DEFAULT_SPECIMEN_FIRST_CELL_M: f64 = 5.0e-5;
/// Default thickness of the first cell of a backing layer, m (it only carries heat away).
pub const DEFAULT_BACKING_FIRST_CELL_M: f64 = 5.0e-4;
/// Largest irradiance a scenario file may give, kW/m² (the `--flux` cap; cone heaters reach
/// about 100 kW/m², furnace and jet-fire exposures a few hundred).
pub const MAX_IRRADIANCE_KW_M2: f64 = 500.0;
/// Default ratio of a layer's last cell thickness to its first: cells grow geometrically away
/// from the exposed side, where the gradients are.
pub const DEFAULT_CELL_GROWTH: f64 = 8.0;

#[derive(Debug, Clone, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ScenarioFile {
    pub title: String,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub notes: Option<String>,
    pub duration_s: Spanned<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub output_interval_s: Option<Spanned<f64>>,
    #[serde(rename = "layer")]
    pub layers: Vec<LayerFile>,
    pub exposure: ExposureFile,
    #[serde(default)]
    pub ignition: IgnitionFile,
    #[serde(default)]
    pub back: BackFile,
    #[serde(rename = "probe", default, skip_serializing_if = "Vec::is_empty")]
    pub probes: Vec<ProbeFile>,
    #[serde(default)]
    pub numerics: NumericsFile,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum LayerRole {
    Specimen,
    Backing,
}

#[derive(Debug, Clone, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct LayerFile {
    /// Path of the material file, relative to the scenario file.
    pub material: Spanned<String>,
    pub thickness_mm: Spanned<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub cells: Option<Spanned<i64>>,
    /// Thickness of the last cell over the first (1: uniform cells).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub cell_growth: Option<Spanned<f64>>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub role: Option<LayerRole>,
    /// Initial mass fractions by component name (default: all of the first component).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub composition: Option<Spanned<BTreeMap<String, f64>>>,
    /// Contact resistance between this layer and the one in front of it, m²·K/W.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub contact_resistance_m2_k_w: Option<Spanned<f64>>,
}

#[derive(Debug, Clone, Default, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ExposureFile {
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub irradiance_kw_m2: Option<Spanned<f64>>,
    /// `[[time_s, kW/m²], ...]`, linear between points.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub irradiance_table: Option<Spanned<Vec<[f64; 2]>>>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub ambient_temperature_k: Option<Spanned<f64>>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub initial_temperature_k: Option<Spanned<f64>>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub convective_coefficient_w_m2_k: Option<Spanned<f64>>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub flaming_convective_coefficient_w_m2_k: Option<Spanned<f64>>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub flame_heat_flux_kw_m2: Option<Spanned<f64>>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub flame_blockage: Option<Spanned<f64>>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub reradiation: Option<bool>,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum IgnitionKind {
    #[default]
    FuelMassFlux,
    SurfaceTemperature,
    Time,
    Never,
}

#[derive(Debug, Clone, Default, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct IgnitionFile {
    #[serde(default)]
    pub rule: IgnitionKind,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub critical_fuel_mass_flux_g_m2s: Option<Spanned<f64>>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub surface_temperature_k: Option<Spanned<f64>>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub time_s: Option<Spanned<f64>>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub flameout_fuel_mass_flux_g_m2s: Option<Spanned<f64>>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub reignition: Option<bool>,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum BackKind {
    #[default]
    Insulated,
    Ambient,
    Fixed,
}

#[derive(Debug, Clone, Default, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct BackFile {
    #[serde(default)]
    pub boundary: BackKind,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub convective_coefficient_w_m2_k: Option<Spanned<f64>>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub emissivity: Option<Spanned<f64>>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub ambient_temperature_k: Option<Spanned<f64>>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub temperature_k: Option<Spanned<f64>>,
}

#[derive(Debug, Clone, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ProbeFile {
    pub name: String,
    pub depth_mm: Spanned<f64>,
}

#[derive(Debug, Clone, Default, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct NumericsFile {
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub max_temperature_change_k: Option<Spanned<f64>>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub max_conversion_per_step: Option<Spanned<f64>>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub initial_step_s: Option<Spanned<f64>>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub max_step_s: Option<Spanned<f64>>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub min_step_s: Option<Spanned<f64>>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub iteration_tolerance_k: Option<Spanned<f64>>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub temperature_tolerance_k: Option<Spanned<f64>>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub conversion_tolerance: Option<Spanned<f64>>,
}

/// A scenario ready to run, with the files it came from.
#[derive(Debug, Clone)]
pub struct LoadedScenario {
    pub path: PathBuf,
    pub title: String,
    pub file: ScenarioFile,
    /// The material of each layer as loaded (same order as the layers).
    pub materials: Vec<MaterialModel>,
    /// Where each layer's material file is.
    pub material_paths: Vec<PathBuf>,
    pub scenario: Scenario,
}

impl LoadedScenario {
    /// Replaces the irradiance with a constant, W/m².
    pub fn set_constant_irradiance_w_m2(&mut self, irradiance_w_m2: f64) {
        self.scenario.exposure.irradiance_w_m2 = Schedule::Constant(irradiance_w_m2);
    }

    /// Gives the exposed layer (the first) a new thickness, m, and keeps its grid rule: the
    /// same first cell and growth (docs/numerics.md, "Grid"), so a thicker layer gets more
    /// cells, not coarser ones. The cell count is `cell_count_for`'s, 5..=400 (the one rule
    /// every scenario's grid follows). The fit's `thickness_mm` and `predict --thickness-mm`
    /// both come here.
    pub fn set_exposed_layer_thickness_m(&mut self, thickness_m: f64) {
        let Some(layer) = self.scenario.layers.first_mut() else {
            return;
        };
        let first_cell_m = layer
            .cell_thicknesses_m()
            .next()
            .unwrap_or(layer.thickness_m);
        layer.thickness_m = thickness_m;
        // The factor keeps the same count when the thickness is unchanged (rounding of the
        // first cell's thickness would otherwise add one).
        layer.n_cells = crate::physics::scenario::cell_count_for(
            layer.thickness_m,
            first_cell_m * (1.0 + 1e-9),
            layer.cell_growth,
        );
    }

    /// Puts `model` into every specimen layer, with the exposure values a calibrated model
    /// carries. The layers' compositions name components, so the component list must match.
    pub fn use_specimen_material(&mut self, model: &MaterialModel) -> Result<(), CaseError> {
        for (idx, layer) in self.scenario.layers.iter_mut().enumerate() {
            if !layer.is_specimen {
                continue;
            }
            let names = |m: &crate::physics::material::Material| {
                m.components
                    .iter()
                    .map(|c| c.name.clone())
                    .collect::<Vec<_>>()
            };
            if names(&layer.material) != names(&model.material) {
                return Err(CaseError::Inconsistent {
                    path: self.path.clone(),
                    problem: format!(
                        "layer {} has components [{}] but the material has [{}]",
                        idx + 1,
                        names(&layer.material).join(", "),
                        names(&model.material).join(", ")
                    ),
                });
            }
            layer.material = model.material.clone();
            self.materials[idx] = model.clone();
        }
        if let Some(calibration) = &model.file.calibration {
            apply_calibration(&mut self.scenario, &calibration.scenario);
        }
        Ok(())
    }
}

/// Reads a scenario and the material files of its layers, and validates everything.
pub fn load_scenario(path: &Path) -> Result<LoadedScenario, CaseError> {
    let source = Source::read(path)?;
    let file: ScenarioFile = source.parse()?;
    let base = path.parent().unwrap_or(Path::new("."));
    build_scenario(&source, file, base)
}

/// Applies the exposure values a calibrated material carries.
fn apply_calibration(scenario: &mut Scenario, fitted: &super::material::ScenarioCalibration) {
    if let Some(flux) = fitted.flame_heat_flux_kw_m2 {
        scenario.exposure.flame_heat_flux_w_m2 = flux * 1e3;
    }
    if let Some(blockage) = fitted.flame_blockage {
        scenario.exposure.flame_blockage = blockage;
    }
    if let Some(h) = fitted.convective_coefficient_w_m2_k {
        scenario.exposure.convective_coefficient_w_m2_k = h;
        scenario.exposure.flaming_convective_coefficient_w_m2_k = h;
    }
    if let Some(critical) = fitted.critical_fuel_mass_flux_g_m2s {
        if let IgnitionRule::CriticalFuelMassFlux(flux) = &mut scenario.ignition {
            *flux = critical * 1e-3;
        }
        scenario.flameout.threshold_fuel_mass_flux_kg_m2_s = critical * 1e-3;
    }
}

/// The `[numerics]` settings that make a run impossible or endless, refused with the key and
/// its line: the step limits must not contradict each other (`min_step_s` ≤ `max_step_s`,
/// also when only one of them is given and the other is the default), and tolerances and caps
/// must not be so small that no reasonable number of steps ends the run.
fn check_numerics(
    source: &Source,
    file: &NumericsFile,
    numerics: &Numerics,
) -> Result<(), CaseError> {
    use crate::physics::scenario::{
        MIN_CONVERSION_CAP, MIN_CONVERSION_TOLERANCE, MIN_TEMPERATURE_CHANGE_CAP_K,
        MIN_TEMPERATURE_TOLERANCE_K,
    };
    let refuse = |value: &Option<Spanned<f64>>, key: &str, problem: String| -> CaseError {
        match value {
            Some(value) => source.invalid(&value.span(), key, problem),
            None => source.inconsistent(format!("`{key}` (default) {problem}")),
        }
    };
    if numerics.min_step_s > numerics.max_step_s {
        // Name the key the user wrote; if both, the minimum.
        let (value, key) = if file.min_step_s.is_some() || file.max_step_s.is_none() {
            (&file.min_step_s, "numerics.min_step_s")
        } else {
            (&file.max_step_s, "numerics.max_step_s")
        };
        return Err(refuse(
            value,
            key,
            format!(
                "makes the shortest step ({} s) longer than the longest ({} s); min_step_s must not exceed max_step_s",
                numerics.min_step_s, numerics.max_step_s
            ),
        ));
    }
    if numerics.initial_step_s < numerics.min_step_s {
        return Err(refuse(
            &file.initial_step_s,
            "numerics.initial_step_s",
            format!(
                "({} s) is shorter than min_step_s ({} s)",
                numerics.initial_step_s, numerics.min_step_s
            ),
        ));
    }
    for (value, key, current, minimum) in [
        (
            &file.temperature_tolerance_k,
            "numerics.temperature_tolerance_k",
            numerics.temperature_tolerance_k,
            MIN_TEMPERATURE_TOLERANCE_K,
        ),
        (
            &file.conversion_tolerance,
            "numerics.conversion_tolerance",
            numerics.conversion_tolerance,
            MIN_CONVERSION_TOLERANCE,
        ),
        (
            &file.max_temperature_change_k,
            "numerics.max_temperature_change_k",
            numerics.max_temperature_change_k,
            MIN_TEMPERATURE_CHANGE_CAP_K,
        ),
        (
            &file.max_conversion_per_step,
            "numerics.max_conversion_per_step",
            numerics.max_conversion_per_step,
            MIN_CONVERSION_CAP,
        ),
    ] {
        if current < minimum {
            return Err(refuse(
                value,
                key,
                format!(
                    "must be at least {minimum}, got {current}: smaller values need so many steps that the run cannot end"
                ),
            ));
        }
    }
    Ok(())
}

fn optional(
    source: &Source,
    value: &Option<Spanned<f64>>,
    field: &str,
    default: f64,
    check: fn(&Source, &Spanned<f64>, &str) -> Result<f64, CaseError>,
) -> Result<f64, CaseError> {
    match value {
        Some(value) => check(source, value, field),
        None => Ok(default),
    }
}

fn build_scenario(
    source: &Source,
    file: ScenarioFile,
    base: &Path,
) -> Result<LoadedScenario, CaseError> {
    if file.layers.is_empty() {
        return Err(source.inconsistent("a scenario needs at least one [[layer]]"));
    }
    let mut layers = Vec::new();
    let mut materials = Vec::new();
    let mut material_paths = Vec::new();
    for (idx, raw) in file.layers.iter().enumerate() {
        let key = |field: &str| format!("layer[{idx}].{field}");
        let material_path = base.join(raw.material.get_ref());
        let material_source = Source::read(&material_path).map_err(|err| match err {
            CaseError::Read { source: io, .. } => source.invalid(
                &raw.material.span(),
                &key("material"),
                format!("cannot read {}: {io}", material_path.display()),
            ),
            other => other,
        })?;
        let material_file: MaterialFile = material_source.parse()?;
        let material = build_material(&material_source, &material_file)?;
        let thickness_m = source.positive(&raw.thickness_mm, &key("thickness_mm"))? * 1e-3;
        let role = raw.role.unwrap_or(if idx == 0 {
            LayerRole::Specimen
        } else {
            LayerRole::Backing
        });
        let cell_growth = match &raw.cell_growth {
            Some(growth) => {
                let value = *growth.get_ref();
                if !(value.is_finite() && (1.0..=100.0).contains(&value)) {
                    return Err(source.invalid(
                        &growth.span(),
                        &key("cell_growth"),
                        format!("must be within 1..100 (last cell over first), got {value}"),
                    ));
                }
                value
            }
            None => DEFAULT_CELL_GROWTH,
        };
        let n_cells = match &raw.cells {
            Some(cells) => {
                let n = *cells.get_ref();
                if !(1..=5000).contains(&n) {
                    return Err(source.invalid(
                        &cells.span(),
                        &key("cells"),
                        format!("must be within 1..5000, got {n}"),
                    ));
                }
                n as usize
            }
            None => {
                let first_cell_m = if role == LayerRole::Specimen {
                    DEFAULT_SPECIMEN_FIRST_CELL_M
                } else {
                    DEFAULT_BACKING_FIRST_CELL_M
                };
                crate::physics::scenario::cell_count_for(thickness_m, first_cell_m, cell_growth)
            }
        };
        let mut fractions = vec![0.0; material.components.len()];
        match &raw.composition {
            None => fractions[0] = 1.0,
            Some(composition) => {
                for (name, &fraction) in composition.get_ref() {
                    let Some(component_idx) = material.component_index(name) else {
                        return Err(source.invalid(
                            &composition.span(),
                            &key("composition"),
                            format!(
                                "names `{name}`, which is not a component of {}",
                                material_path.display()
                            ),
                        ));
                    };
                    if !(0.0..=1.0).contains(&fraction) {
                        return Err(source.invalid(
                            &composition.span(),
                            &key("composition"),
                            format!("fraction of `{name}` must be within 0..1, got {fraction}"),
                        ));
                    }
                    fractions[component_idx] = fraction;
                }
                let sum: f64 = fractions.iter().sum();
                if (sum - 1.0).abs() > 1e-6 {
                    return Err(source.invalid(
                        &composition.span(),
                        &key("composition"),
                        format!("mass fractions must sum to 1, got {sum}"),
                    ));
                }
            }
        }
        let contact = optional(
            source,
            &raw.contact_resistance_m2_k_w,
            &key("contact_resistance_m2_k_w"),
            0.0,
            Source::non_negative,
        )?;
        layers.push(Layer {
            name: material_file.title.clone(),
            material: material.clone(),
            thickness_m,
            n_cells,
            initial_mass_fractions: fractions,
            is_specimen: role == LayerRole::Specimen,
            contact_resistance_m2_k_w: contact,
            cell_growth,
        });
        materials.push(MaterialModel {
            file: material_file,
            material,
        });
        material_paths.push(material_path);
    }

    let exposure_file = &file.exposure;
    let irradiance_w_m2 = match (&exposure_file.irradiance_kw_m2, &exposure_file.irradiance_table) {
        (Some(value), None) => {
            let irradiance_kw_m2 = source.non_negative(value, "exposure.irradiance_kw_m2")?;
            if irradiance_kw_m2 > MAX_IRRADIANCE_KW_M2 {
                return Err(source.invalid(
                    &value.span(),
                    "exposure.irradiance_kw_m2",
                    format!("must be at most {MAX_IRRADIANCE_KW_M2} kW/m² (no fire test exposes a specimen to more), got {irradiance_kw_m2}"),
                ));
            }
            Schedule::Constant(irradiance_kw_m2 * 1e3)
        }
        (None, Some(table)) => {
            let points = table.get_ref();
            if points.is_empty() {
                return Err(source.invalid(&table.span(), "exposure.irradiance_table", "has no points"));
            }
            for window in points.windows(2) {
                if window[1][0] <= window[0][0] {
                    return Err(source.invalid(
                        &table.span(),
                        "exposure.irradiance_table",
                        format!("times must increase, got {} s after {} s", window[1][0], window[0][0]),
                    ));
                }
            }
            if let Some(point) = points.iter().find(|p| p[1] < 0.0 || !p[1].is_finite()) {
                return Err(source.invalid(
                    &table.span(),
                    "exposure.irradiance_table",
                    format!("irradiance must be ≥ 0 kW/m², got {}", point[1]),
                ));
            }
            if let Some(point) = points.iter().find(|p| p[1] > MAX_IRRADIANCE_KW_M2) {
                return Err(source.invalid(
                    &table.span(),
                    "exposure.irradiance_table",
                    format!("irradiance must be at most {MAX_IRRADIANCE_KW_M2} kW/m², got {}", point[1]),
                ));
            }
            Schedule::Table(points.iter().map(|p| (p[0], p[1] * 1e3)).collect())
        }
        (Some(_), Some(table)) => {
            return Err(source.invalid(
                &table.span(),
                "exposure.irradiance_table",
                "give either irradiance_kw_m2 or irradiance_table, not both",
            ))
        }
        (None, None) => {
            return Err(source.inconsistent(
                "[exposure] needs irradiance_kw_m2 (a constant) or irradiance_table ([[time_s, kW/m²], ...])",
            ))
        }
    };
    let ambient_k = optional(
        source,
        &exposure_file.ambient_temperature_k,
        "exposure.ambient_temperature_k",
        DEFAULT_AMBIENT_TEMPERATURE_K,
        Source::positive,
    )?;
    let h = optional(
        source,
        &exposure_file.convective_coefficient_w_m2_k,
        "exposure.convective_coefficient_w_m2_k",
        DEFAULT_CONVECTIVE_COEFFICIENT_W_M2_K,
        Source::non_negative,
    )?;
    let exposure = Exposure {
        irradiance_w_m2,
        ambient_temperature_k: ambient_k,
        initial_temperature_k: optional(
            source,
            &exposure_file.initial_temperature_k,
            "exposure.initial_temperature_k",
            ambient_k,
            Source::positive,
        )?,
        convective_coefficient_w_m2_k: h,
        flaming_convective_coefficient_w_m2_k: optional(
            source,
            &exposure_file.flaming_convective_coefficient_w_m2_k,
            "exposure.flaming_convective_coefficient_w_m2_k",
            h,
            Source::non_negative,
        )?,
        flame_heat_flux_w_m2: optional(
            source,
            &exposure_file.flame_heat_flux_kw_m2,
            "exposure.flame_heat_flux_kw_m2",
            0.0,
            Source::non_negative,
        )? * 1e3,
        flame_blockage: optional(
            source,
            &exposure_file.flame_blockage,
            "exposure.flame_blockage",
            0.0,
            Source::fraction,
        )?,
        has_reradiation: exposure_file.reradiation.unwrap_or(true),
    };

    let ignition_file = &file.ignition;
    let critical_kg_m2_s = optional(
        source,
        &ignition_file.critical_fuel_mass_flux_g_m2s,
        "ignition.critical_fuel_mass_flux_g_m2s",
        DEFAULT_CRITICAL_FUEL_MASS_FLUX_KG_M2_S * 1e3,
        Source::positive,
    )? * 1e-3;
    let required =
        |value: &Option<Spanned<f64>>,
         field: &str,
         check: fn(&Source, &Spanned<f64>, &str) -> Result<f64, CaseError>| {
            value
                .as_ref()
                .ok_or_else(|| source.inconsistent(format!("[ignition] rule needs `{field}`")))
                .and_then(|v| check(source, v, &format!("ignition.{field}")))
        };
    let ignition = match ignition_file.rule {
        IgnitionKind::FuelMassFlux => IgnitionRule::CriticalFuelMassFlux(critical_kg_m2_s),
        IgnitionKind::SurfaceTemperature => IgnitionRule::SurfaceTemperature(required(
            &ignition_file.surface_temperature_k,
            "surface_temperature_k",
            Source::positive,
        )?),
        IgnitionKind::Time => IgnitionRule::AtTime(required(
            &ignition_file.time_s,
            "time_s",
            Source::non_negative,
        )?),
        IgnitionKind::Never => IgnitionRule::Never,
    };
    let flameout = Flameout {
        threshold_fuel_mass_flux_kg_m2_s: optional(
            source,
            &ignition_file.flameout_fuel_mass_flux_g_m2s,
            "ignition.flameout_fuel_mass_flux_g_m2s",
            critical_kg_m2_s * 1e3,
            Source::non_negative,
        )? * 1e-3,
        may_reignite: ignition_file.reignition.unwrap_or(false),
    };

    let back_file = &file.back;
    let back = match back_file.boundary {
        BackKind::Insulated => BackFace::Insulated,
        BackKind::Ambient => BackFace::LossToAmbient {
            convective_coefficient_w_m2_k: optional(
                source,
                &back_file.convective_coefficient_w_m2_k,
                "back.convective_coefficient_w_m2_k",
                DEFAULT_CONVECTIVE_COEFFICIENT_W_M2_K,
                Source::non_negative,
            )?,
            emissivity: optional(
                source,
                &back_file.emissivity,
                "back.emissivity",
                0.9,
                Source::fraction,
            )?,
            ambient_temperature_k: optional(
                source,
                &back_file.ambient_temperature_k,
                "back.ambient_temperature_k",
                ambient_k,
                Source::positive,
            )?,
        },
        BackKind::Fixed => BackFace::FixedTemperature(match &back_file.temperature_k {
            Some(value) => source.positive(value, "back.temperature_k")?,
            None => {
                return Err(source.inconsistent("[back] boundary = \"fixed\" needs `temperature_k`"))
            }
        }),
    };

    let total_thickness_m: f64 = layers.iter().map(|l| l.thickness_m).sum();
    let mut probes = Vec::new();
    for (idx, raw) in file.probes.iter().enumerate() {
        let key = format!("probe[{idx}].depth_mm");
        let depth_m = source.non_negative(&raw.depth_mm, &key)? * 1e-3;
        if depth_m > total_thickness_m {
            return Err(source.invalid(
                &raw.depth_mm.span(),
                &key,
                format!("is deeper than the stack ({} mm)", total_thickness_m * 1e3),
            ));
        }
        probes.push(Probe {
            name: raw.name.clone(),
            depth_m,
        });
    }

    let defaults = Numerics::default();
    let n = &file.numerics;
    let numerics = Numerics {
        temperature_tolerance_k: optional(
            source,
            &n.temperature_tolerance_k,
            "numerics.temperature_tolerance_k",
            defaults.temperature_tolerance_k,
            Source::positive,
        )?,
        conversion_tolerance: optional(
            source,
            &n.conversion_tolerance,
            "numerics.conversion_tolerance",
            defaults.conversion_tolerance,
            Source::fraction,
        )?,
        max_temperature_change_k: optional(
            source,
            &n.max_temperature_change_k,
            "numerics.max_temperature_change_k",
            defaults.max_temperature_change_k,
            Source::positive,
        )?,
        max_conversion_per_step: optional(
            source,
            &n.max_conversion_per_step,
            "numerics.max_conversion_per_step",
            defaults.max_conversion_per_step,
            Source::fraction,
        )?,
        initial_step_s: optional(
            source,
            &n.initial_step_s,
            "numerics.initial_step_s",
            defaults.initial_step_s,
            Source::positive,
        )?,
        max_step_s: optional(
            source,
            &n.max_step_s,
            "numerics.max_step_s",
            defaults.max_step_s,
            Source::positive,
        )?,
        min_step_s: optional(
            source,
            &n.min_step_s,
            "numerics.min_step_s",
            defaults.min_step_s,
            Source::positive,
        )?,
        iteration_tolerance_k: optional(
            source,
            &n.iteration_tolerance_k,
            "numerics.iteration_tolerance_k",
            defaults.iteration_tolerance_k,
            Source::positive,
        )?,
    };
    check_numerics(source, n, &numerics)?;
    let scenario = Scenario {
        layers,
        exposure,
        ignition,
        flameout,
        back,
        duration_s: source.positive(&file.duration_s, "duration_s")?,
        output_interval_s: optional(
            source,
            &file.output_interval_s,
            "output_interval_s",
            1.0,
            Source::positive,
        )?,
        probes,
        numerics,
    };
    // A calibrated specimen material carries the exposure values fitted with it.
    let mut scenario = scenario;
    if let Some(calibration) = materials
        .iter()
        .zip(&scenario.layers)
        .find(|(_, layer)| layer.is_specimen)
        .and_then(|(model, _)| model.file.calibration.as_ref())
    {
        apply_calibration(&mut scenario, &calibration.scenario);
    }
    if let Err(size) = super::budget::check_scenario_size(&scenario) {
        use super::budget::Culprit;
        let duration_span = file.duration_s.span();
        let (span, key) = match size.culprit {
            Culprit::Duration => (duration_span, "duration_s"),
            Culprit::OutputInterval => (
                file.output_interval_s
                    .as_ref()
                    .map_or(duration_span, |v| v.span()),
                "output_interval_s",
            ),
            Culprit::MaxStep => (
                file.numerics
                    .max_step_s
                    .as_ref()
                    .map_or(duration_span, |v| v.span()),
                "numerics.max_step_s",
            ),
        };
        return Err(source.invalid(&span, key, size.problem));
    }
    scenario
        .check()
        .map_err(|err| source.inconsistent(err.to_string()))?;
    Ok(LoadedScenario {
        path: source.path.clone(),
        title: file.title.clone(),
        file,
        materials,
        material_paths,
        scenario,
    })
}
