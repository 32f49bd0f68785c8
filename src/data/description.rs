//! The test description (TEST.toml): what a data file is and how to read it. Parsed into raw
//! structs that mirror the file (keeping spans for line numbers), then validated into
//! [`TestDescription`]. Every key, its unit and default are listed in docs/test-files.md.
//!
//! Owns the file format only; it reads no data file (that is [`super::reduce`]).

use std::path::{Path, PathBuf};

use serde::Deserialize;
use toml::Spanned;

use super::derivative::Smoothing;
use super::oxygen::AMBIENT_DRY_OXYGEN;
use super::DataError;
use crate::source::Spans;

/// Sample rule for the ignition time when none is given: HRR first reaches this fraction of its
/// peak and stays at or above it for [`DEFAULT_IGNITION_HOLD_S`] (our stated rule; the same
/// rule the open PMMA data set uses in its SUMMARY.md).
pub const DEFAULT_IGNITION_FRACTION_OF_PEAK: f64 = 0.10;
/// Hold time of the ignition rule, s (see [`DEFAULT_IGNITION_FRACTION_OF_PEAK`]).
pub const DEFAULT_IGNITION_HOLD_S: f64 = 10.0;
/// Smoke photometer path length across the duct, m (0.11 m, the duct of ISO 5660-1; common
/// practice, quoted from memory).
pub const DEFAULT_SMOKE_PATH_LENGTH_M: f64 = 0.11;

/// A column of the data file: its header name and, optionally, a unit overriding the file's.
#[derive(Debug, Clone, PartialEq)]
pub struct ColumnName {
    /// Header as in the file (case and surrounding spaces ignored).
    pub name: String,
    /// Unit to use instead of the file's units row or bracket.
    pub unit: Option<String>,
    /// Whether a file without this column is an error (true: always so for columns a TEST.toml
    /// names) or simply lacks the signal (false: the default names of a bare CSV).
    pub is_required: bool,
}

impl ColumnName {
    /// A required column with the file's own unit.
    pub fn named(name: &str) -> Self {
        ColumnName {
            name: name.to_string(),
            unit: None,
            is_required: true,
        }
    }
}

/// Columns of the data file that emberfit uses; all but time are optional.
#[derive(Debug, Clone, PartialEq)]
pub struct Columns {
    /// Time since the start of the record.
    pub time: ColumnName,
    /// Load-cell mass.
    pub mass: Option<ColumnName>,
    /// Heat release rate as computed by the lab, per area (kW/m²) or total (kW).
    pub hrr: Option<ColumnName>,
    /// O₂ analyser, dry.
    pub oxygen: Option<ColumnName>,
    /// CO₂ analyser, dry.
    pub carbon_dioxide: Option<ColumnName>,
    /// CO analyser, dry.
    pub carbon_monoxide: Option<ColumnName>,
    /// Orifice-plate pressure drop.
    pub orifice_pressure: Option<ColumnName>,
    /// Exhaust gas temperature at the orifice.
    pub exhaust_temperature: Option<ColumnName>,
    /// Smoke photometer light intensity (any unit; only ratios are used).
    pub smoke_light: Option<ColumnName>,
    /// Exposed-surface temperature (e.g. a surface thermocouple or a pyrometer).
    pub surface_temperature: Option<ColumnName>,
    /// Temperature of the specimen's unexposed face (between specimen and backing).
    pub back_temperature: Option<ColumnName>,
    /// Thermocouples inside the specimen, each at a depth below the initial exposed surface.
    pub in_depth_temperature: Vec<DepthColumn>,
}

/// A temperature column measured at a depth in the specimen.
#[derive(Debug, Clone, PartialEq)]
pub struct DepthColumn {
    pub column: ColumnName,
    /// Depth below the initial exposed surface, mm.
    pub depth_mm: f64,
}

/// Ambient conditions of the test.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Ambient {
    /// Air temperature, K.
    pub temperature_k: f64,
    /// Air pressure, Pa.
    pub pressure_pa: f64,
    /// Water vapour mole fraction of the incoming air, mol/mol.
    pub water_mole_fraction: f64,
    /// Dry O₂ mole fraction used when the record has no pre-exposure baseline.
    pub oxygen: f64,
    /// Dry CO₂ mole fraction used when the record has no pre-exposure baseline.
    pub carbon_dioxide: f64,
}

/// Which oxygen-consumption equation to use.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum GasMethod {
    /// ISO 5660-1, O₂ alone.
    OxygenOnly,
    /// Janssens (1991), O₂ with CO₂ and CO.
    WithCarbonOxides,
}

/// Where the orifice constant comes from.
#[derive(Debug, Clone, PartialEq)]
pub enum OrificeConstant {
    /// Given, m^½·kg^½·K^½.
    Given(f64),
    /// From a methane calibration run described by this TOML file.
    FromCalibration(PathBuf),
    /// This description is itself the methane calibration run that finds the constant.
    ThisCalibrationRun,
}

/// Raw gas analysis settings.
#[derive(Debug, Clone, PartialEq)]
pub struct GasAnalysis {
    /// Orifice constant C or where to get it.
    pub orifice_constant: OrificeConstant,
    /// Equation to use.
    pub method: GasMethod,
    /// Delay of the O₂ analyser behind the load cell, s.
    pub oxygen_delay_s: f64,
    /// Delay of the CO₂ analyser, s.
    pub carbon_dioxide_delay_s: f64,
    /// Delay of the CO analyser, s.
    pub carbon_monoxide_delay_s: f64,
    /// Samples before this time (after the time offset) form the baseline, s.
    pub baseline_until_s: f64,
}

/// A methane burner calibration run: the description is then of the burner, not a specimen.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MethaneBurner {
    /// Heat release rate of the burner from its metered methane flow, kW.
    pub burner_hrr_kw: f64,
    /// Start of the steady part of the run, s.
    pub steady_from_s: f64,
    /// End of the steady part of the run, s.
    pub steady_to_s: f64,
}

/// Smoke photometer settings.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Smoke {
    /// Light path length across the duct, m.
    pub path_length_m: f64,
    /// Duct volume flow at the photometer, m³/s; `None` means ṁ_e/ρ_e from the orifice.
    pub duct_volume_flow_m3_s: Option<f64>,
}

/// Settings of the mass-loss estimate of HRR, χ·ΔH_c·ṁ''.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct HrrFromMass {
    /// Net heat of combustion of the volatiles, MJ/kg.
    pub heat_of_combustion_mj_kg: f64,
    /// Combustion efficiency χ, 0–1.
    pub combustion_efficiency: f64,
}

/// One layer of the specimen stack, exposed face first (for the fit; not used by reduction).
#[derive(Debug, Clone, PartialEq)]
pub struct Layer {
    /// Material in plain words.
    pub material: String,
    /// Thickness, mm.
    pub thickness_mm: f64,
    /// Density, kg/m³, when known.
    pub density_kg_m3: Option<f64>,
}

/// Rule for detecting the ignition time from the HRR curve.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct IgnitionRule {
    /// HRR threshold as a fraction of the peak HRR.
    pub fraction_of_peak: f64,
    /// Time HRR must stay at or above the threshold, s.
    pub hold_s: f64,
}

/// A validated test description. Build one with [`TestDescription::load`] or, for a bare CSV,
/// [`TestDescription::for_csv`].
#[derive(Debug, Clone, PartialEq)]
pub struct TestDescription {
    /// The TOML file (or the CSV itself when built from flags), for messages.
    pub source: PathBuf,
    /// Data file, resolved against the TOML's folder.
    pub data_file: PathBuf,
    /// Free-text label.
    pub label: Option<String>,
    /// Set irradiance, kW/m².
    pub irradiance_kw_m2: f64,
    /// Exposed specimen area that per-area values refer to, m².
    pub exposed_area_m2: f64,
    /// Area of the specimen face that burns, m², when it differs from `exposed_area_m2` (a
    /// whole 100 mm slab under an edge frame whose opening the lab divided by); `None` means
    /// the same as `exposed_area_m2`.
    pub specimen_area_m2: Option<f64>,
    /// Specimen mass before the test, g; `None` means the mass column's start.
    pub initial_mass_g: Option<f64>,
    /// Specimen thickness, mm.
    pub thickness_mm: Option<f64>,
    /// Specimen layers, exposed face first.
    pub layers: Vec<Layer>,
    /// Added to the file's times so that zero is the start of exposure, s.
    pub time_offset_s: f64,
    /// How late a given HRR column runs against the mass, s: the gas-transport delay a lab did
    /// not remove. The HRR at t is the file's value at t + this. Zero when not given; HRR
    /// computed here from the analysers uses their own delays instead.
    pub hrr_delay_s: f64,
    /// Observed time to sustained ignition, s from exposure start.
    pub ignition_time_s: Option<f64>,
    /// Whether the load cell weighs the specimen alone (tared). When false (holder and backing
    /// included) negative readings are not clipped.
    pub is_mass_tared: bool,
    /// Ambient conditions.
    pub ambient: Ambient,
    /// Column mapping.
    pub columns: Columns,
    /// Raw gas analysis, when HRR is to be computed by oxygen consumption.
    pub gas: Option<GasAnalysis>,
    /// Methane calibration run, when this description is one.
    pub methane_burner: Option<MethaneBurner>,
    /// Smoke photometer settings (used when a light column is given).
    pub smoke: Smoke,
    /// Mass-loss estimate of HRR, when asked for.
    pub hrr_from_mass: Option<HrrFromMass>,
    /// Smoothing of the mass signal before differentiation.
    pub smoothing: Option<Smoothing>,
    /// Ignition detection rule.
    pub ignition_rule: IgnitionRule,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawDescription {
    data_file: Spanned<String>,
    label: Option<String>,
    irradiance_kw_m2: Spanned<f64>,
    exposed_area_m2: Spanned<f64>,
    specimen_area_m2: Option<Spanned<f64>>,
    initial_mass_g: Option<Spanned<f64>>,
    thickness_mm: Option<Spanned<f64>>,
    #[serde(default)]
    layers: Vec<RawLayer>,
    time_offset_s: Option<Spanned<f64>>,
    hrr_delay_s: Option<Spanned<f64>>,
    ignition_time_s: Option<Spanned<f64>>,
    mass_is_tared: Option<bool>,
    #[serde(default)]
    ambient: RawAmbient,
    columns: RawColumns,
    gas_analysis: Option<RawGas>,
    methane_burner: Option<RawBurner>,
    #[serde(default)]
    smoke: RawSmoke,
    hrr_from_mass: Option<RawHrrFromMass>,
    #[serde(default)]
    processing: RawProcessing,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawLayer {
    material: String,
    thickness_mm: Spanned<f64>,
    density_kg_m3: Option<Spanned<f64>>,
}

#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawAmbient {
    temperature_c: Option<Spanned<f64>>,
    pressure_kpa: Option<Spanned<f64>>,
    relative_humidity_pct: Option<Spanned<f64>>,
    oxygen_mole_fraction: Option<Spanned<f64>>,
    carbon_dioxide_mole_fraction: Option<Spanned<f64>>,
}

#[derive(Debug, Deserialize)]
#[serde(untagged)]
enum RawColumn {
    Name(String),
    Full { name: String, unit: Option<String> },
}

impl RawColumn {
    fn into_column(self) -> ColumnName {
        match self {
            RawColumn::Name(name) => ColumnName {
                name,
                unit: None,
                is_required: true,
            },
            RawColumn::Full { name, unit } => ColumnName {
                name,
                unit,
                is_required: true,
            },
        }
    }
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawColumns {
    time: RawColumn,
    mass: Option<RawColumn>,
    hrr: Option<RawColumn>,
    oxygen: Option<RawColumn>,
    carbon_dioxide: Option<RawColumn>,
    carbon_monoxide: Option<RawColumn>,
    orifice_pressure: Option<RawColumn>,
    exhaust_temperature: Option<RawColumn>,
    smoke_light: Option<RawColumn>,
    surface_temperature: Option<RawColumn>,
    back_temperature: Option<RawColumn>,
    #[serde(default)]
    in_depth_temperature: Vec<RawDepthColumn>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawDepthColumn {
    name: String,
    unit: Option<String>,
    depth_mm: Spanned<f64>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawGas {
    orifice_constant: Option<Spanned<f64>>,
    methane_calibration: Option<String>,
    method: Option<Spanned<String>>,
    oxygen_delay_s: Option<Spanned<f64>>,
    carbon_dioxide_delay_s: Option<Spanned<f64>>,
    carbon_monoxide_delay_s: Option<Spanned<f64>>,
    baseline_until_s: Option<f64>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawBurner {
    burner_hrr_kw: Spanned<f64>,
    steady_from_s: f64,
    steady_to_s: Spanned<f64>,
}

#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawSmoke {
    path_length_m: Option<Spanned<f64>>,
    duct_volume_flow_m3_s: Option<Spanned<f64>>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawHrrFromMass {
    heat_of_combustion_mj_kg: Spanned<f64>,
    combustion_efficiency: Option<Spanned<f64>>,
}

#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawProcessing {
    smoothing_window_points: Option<Spanned<i64>>,
    smoothing_degree: Option<Spanned<i64>>,
    ignition_fraction_of_peak: Option<Spanned<f64>>,
    ignition_hold_s: Option<Spanned<f64>>,
}

/// Saturation vapour pressure of water over a flat surface, Pa, by the Magnus form
/// 610.94·exp(17.625·θ/(θ + 243.04)), θ in °C (Alduchov, O.A. and Eskridge, R.E., J. Appl.
/// Meteor. 35 (1996) 601–609; quoted from memory).
pub fn saturation_vapour_pressure_pa(temperature_c: f64) -> f64 {
    610.94 * (17.625 * temperature_c / (temperature_c + 243.04)).exp()
}

impl TestDescription {
    /// Reads and validates a TEST.toml file.
    pub fn load(path: &Path) -> Result<TestDescription, DataError> {
        let text = super::read_toml_text(path)?;
        Self::parse(path, &text)
    }

    /// Validates TEST.toml text; `path` locates the data file and appears in messages.
    pub fn parse(path: &Path, text: &str) -> Result<TestDescription, DataError> {
        let raw: RawDescription = crate::source::parse(path, text)?;
        let check: Spans<'_, DataError> = Spans::new(path, text);
        let folder = path.parent().unwrap_or_else(|| Path::new("."));

        let irradiance_kw_m2 = check.non_negative(&raw.irradiance_kw_m2, "irradiance_kw_m2")?;
        if irradiance_kw_m2 > 200.0 {
            return Err(check.invalid(
                &raw.irradiance_kw_m2.span(),
                "irradiance_kw_m2",
                format!(
                    "must be at most 200 kW/m² (cone heaters reach 100), got {irradiance_kw_m2}"
                ),
            ));
        }
        let exposed_area_m2 = check.positive(&raw.exposed_area_m2, "exposed_area_m2")?;
        if exposed_area_m2 > 1.0 {
            return Err(check.invalid(
                &raw.exposed_area_m2.span(),
                "exposed_area_m2",
                format!("must be in m2 (a cone specimen is about 0.01), got {exposed_area_m2}"),
            ));
        }
        let specimen_area_m2 = match &raw.specimen_area_m2 {
            Some(value) => {
                let area = check.positive(value, "specimen_area_m2")?;
                if area > 1.0 {
                    return Err(check.invalid(
                        &value.span(),
                        "specimen_area_m2",
                        format!("must be in m2 (a cone specimen is about 0.01), got {area}"),
                    ));
                }
                Some(area)
            }
            None => None,
        };
        let initial_mass_g = raw
            .initial_mass_g
            .as_ref()
            .map(|v| check.positive(v, "initial_mass_g"))
            .transpose()?;
        let thickness_mm = raw
            .thickness_mm
            .as_ref()
            .map(|v| check.positive(v, "thickness_mm"))
            .transpose()?;
        let ignition_time_s = raw
            .ignition_time_s
            .as_ref()
            .map(|v| check.non_negative(v, "ignition_time_s"))
            .transpose()?;
        let mut layers = Vec::new();
        for (idx, layer) in raw.layers.iter().enumerate() {
            layers.push(Layer {
                material: layer.material.clone(),
                thickness_mm: check
                    .positive(&layer.thickness_mm, &format!("layers[{idx}].thickness_mm"))?,
                density_kg_m3: layer
                    .density_kg_m3
                    .as_ref()
                    .map(|v| check.positive(v, &format!("layers[{idx}].density_kg_m3")))
                    .transpose()?,
            });
        }

        let temperature_c = match &raw.ambient.temperature_c {
            Some(v) => check.within(v, "ambient.temperature_c", -40.0, 60.0)?,
            None => 20.0,
        };
        let pressure_pa = match &raw.ambient.pressure_kpa {
            Some(v) => check.within(v, "ambient.pressure_kpa", 50.0, 120.0)? * 1e3,
            None => 101_325.0,
        };
        let water_mole_fraction = match &raw.ambient.relative_humidity_pct {
            Some(v) => {
                check.within(v, "ambient.relative_humidity_pct", 0.0, 100.0)? / 100.0
                    * saturation_vapour_pressure_pa(temperature_c)
                    / pressure_pa
            }
            None => 0.0,
        };
        let ambient = Ambient {
            temperature_k: temperature_c + 273.15,
            pressure_pa,
            water_mole_fraction,
            oxygen: match &raw.ambient.oxygen_mole_fraction {
                Some(v) => check.within(v, "ambient.oxygen_mole_fraction", 0.15, 0.25)?,
                None => AMBIENT_DRY_OXYGEN,
            },
            carbon_dioxide: match &raw.ambient.carbon_dioxide_mole_fraction {
                Some(v) => check.within(v, "ambient.carbon_dioxide_mole_fraction", 0.0, 0.01)?,
                None => 0.0,
            },
        };

        let columns = Columns {
            time: raw.columns.time.into_column(),
            mass: raw.columns.mass.map(RawColumn::into_column),
            hrr: raw.columns.hrr.map(RawColumn::into_column),
            oxygen: raw.columns.oxygen.map(RawColumn::into_column),
            carbon_dioxide: raw.columns.carbon_dioxide.map(RawColumn::into_column),
            carbon_monoxide: raw.columns.carbon_monoxide.map(RawColumn::into_column),
            orifice_pressure: raw.columns.orifice_pressure.map(RawColumn::into_column),
            exhaust_temperature: raw.columns.exhaust_temperature.map(RawColumn::into_column),
            smoke_light: raw.columns.smoke_light.map(RawColumn::into_column),
            surface_temperature: raw.columns.surface_temperature.map(RawColumn::into_column),
            back_temperature: raw.columns.back_temperature.map(RawColumn::into_column),
            in_depth_temperature: raw
                .columns
                .in_depth_temperature
                .into_iter()
                .enumerate()
                .map(|(idx, c)| {
                    let depth_mm = check.non_negative(
                        &c.depth_mm,
                        &format!("columns.in_depth_temperature[{idx}].depth_mm"),
                    )?;
                    Ok(DepthColumn {
                        column: ColumnName {
                            name: c.name,
                            unit: c.unit,
                            is_required: true,
                        },
                        depth_mm,
                    })
                })
                .collect::<Result<Vec<_>, DataError>>()?,
        };

        let gas = match &raw.gas_analysis {
            None => None,
            Some(g) => {
                let orifice_constant = match (&g.orifice_constant, &g.methane_calibration) {
                    (Some(c), None) => {
                        OrificeConstant::Given(check.positive(c, "gas_analysis.orifice_constant")?)
                    }
                    (None, Some(file)) => OrificeConstant::FromCalibration(folder.join(file)),
                    (Some(c), Some(_)) => {
                        return Err(check.invalid(
                            &c.span(),
                            "gas_analysis.orifice_constant",
                            "and `methane_calibration` are both given; keep one".to_string(),
                        ))
                    }
                    (None, None) if raw.methane_burner.is_some() => {
                        OrificeConstant::ThisCalibrationRun
                    }
                    (None, None) => {
                        return Err(DataError::Missing {
                            path: path.to_path_buf(),
                            field: "gas_analysis.orifice_constant".to_string(),
                            problem: "is missing: give it, or `methane_calibration`".to_string(),
                        })
                    }
                };
                let has_carbon_oxides =
                    columns.carbon_dioxide.is_some() && columns.carbon_monoxide.is_some();
                let method = match &g.method {
                    None if has_carbon_oxides => GasMethod::WithCarbonOxides,
                    None => GasMethod::OxygenOnly,
                    Some(m) => match m.get_ref().as_str() {
                        "oxygen_only" => GasMethod::OxygenOnly,
                        "with_carbon_oxides" if has_carbon_oxides => GasMethod::WithCarbonOxides,
                        "with_carbon_oxides" => {
                            return Err(check.invalid(
                                &m.span(),
                                "gas_analysis.method",
                                "`with_carbon_oxides` needs columns.carbon_dioxide and \
                                 columns.carbon_monoxide"
                                    .to_string(),
                            ))
                        }
                        other => {
                            return Err(check.invalid(
                                &m.span(),
                                "gas_analysis.method",
                                format!(
                                    "must be `oxygen_only` or `with_carbon_oxides`, got `{other}`"
                                ),
                            ))
                        }
                    },
                };
                let delay = |value: &Option<Spanned<f64>>, field: &str| match value {
                    Some(v) => check.within(v, field, 0.0, 120.0),
                    None => Ok(0.0),
                };
                Some(GasAnalysis {
                    orifice_constant,
                    method,
                    oxygen_delay_s: delay(&g.oxygen_delay_s, "gas_analysis.oxygen_delay_s")?,
                    carbon_dioxide_delay_s: delay(
                        &g.carbon_dioxide_delay_s,
                        "gas_analysis.carbon_dioxide_delay_s",
                    )?,
                    carbon_monoxide_delay_s: delay(
                        &g.carbon_monoxide_delay_s,
                        "gas_analysis.carbon_monoxide_delay_s",
                    )?,
                    baseline_until_s: g.baseline_until_s.unwrap_or(0.0),
                })
            }
        };
        // A gas-transport delay is at most a minute or two (ISO 5660-1 has it measured at
        // calibration; common practice puts it at 10–20 s); the same bound as the analysers'.
        let hrr_delay_s =
            match &raw.hrr_delay_s {
                Some(v) if gas.is_some() => return Err(check.invalid(
                    &v.span(),
                    "hrr_delay_s",
                    "applies to a given HRR column; HRR computed from [gas_analysis] is shifted \
                     by the analysers' own delays (oxygen_delay_s, ...)"
                        .to_string(),
                )),
                Some(v) => check.within(v, "hrr_delay_s", 0.0, 120.0)?,
                None => 0.0,
            };
        if gas.is_some() {
            for (column, key) in [
                (&columns.oxygen, "columns.oxygen"),
                (&columns.orifice_pressure, "columns.orifice_pressure"),
                (&columns.exhaust_temperature, "columns.exhaust_temperature"),
            ] {
                if column.is_none() {
                    return Err(DataError::Missing {
                        path: path.to_path_buf(),
                        field: key.to_string(),
                        problem: "is missing: [gas_analysis] needs the O2, orifice pressure and \
                                  exhaust temperature columns"
                            .to_string(),
                    });
                }
            }
        }
        if columns.mass.is_none() && columns.hrr.is_none() && gas.is_none() {
            return Err(DataError::Missing {
                path: path.to_path_buf(),
                field: "columns".to_string(),
                problem: "names no signal: give `mass`, `hrr`, or the gas columns with \
                          [gas_analysis]"
                    .to_string(),
            });
        }

        let methane_burner = match &raw.methane_burner {
            None => None,
            Some(b) => {
                if *b.steady_to_s.get_ref() <= b.steady_from_s {
                    return Err(check.invalid(
                        &b.steady_to_s.span(),
                        "methane_burner.steady_to_s",
                        format!(
                            "must be after steady_from_s = {}, got {}",
                            b.steady_from_s,
                            b.steady_to_s.get_ref()
                        ),
                    ));
                }
                Some(MethaneBurner {
                    burner_hrr_kw: check
                        .positive(&b.burner_hrr_kw, "methane_burner.burner_hrr_kw")?,
                    steady_from_s: b.steady_from_s,
                    steady_to_s: *b.steady_to_s.get_ref(),
                })
            }
        };

        let smoke = Smoke {
            path_length_m: match &raw.smoke.path_length_m {
                Some(v) => check.positive(v, "smoke.path_length_m")?,
                None => DEFAULT_SMOKE_PATH_LENGTH_M,
            },
            duct_volume_flow_m3_s: raw
                .smoke
                .duct_volume_flow_m3_s
                .as_ref()
                .map(|v| check.positive(v, "smoke.duct_volume_flow_m3_s"))
                .transpose()?,
        };

        let hrr_from_mass = match &raw.hrr_from_mass {
            None => None,
            Some(h) => Some(HrrFromMass {
                heat_of_combustion_mj_kg: check.within(
                    &h.heat_of_combustion_mj_kg,
                    "hrr_from_mass.heat_of_combustion_mj_kg",
                    1.0,
                    60.0,
                )?,
                combustion_efficiency: match &h.combustion_efficiency {
                    Some(v) => check.within(v, "hrr_from_mass.combustion_efficiency", 0.01, 1.0)?,
                    None => 1.0,
                },
            }),
        };

        let smoothing = match &raw.processing.smoothing_window_points {
            None => None,
            Some(window) => {
                let points = *window.get_ref();
                let degree = raw
                    .processing
                    .smoothing_degree
                    .as_ref()
                    .map(|d| *d.get_ref())
                    .unwrap_or(2);
                if points == 0 {
                    None
                } else if points < 3 || points % 2 == 0 || degree < 0 || points <= degree {
                    return Err(check.invalid(
                        &window.span(),
                        "processing.smoothing_window_points",
                        format!(
                            "must be odd, at least 3 and above smoothing_degree = {degree}, \
                             got {points}"
                        ),
                    ));
                } else {
                    Some(Smoothing {
                        window_points: points as usize,
                        degree: degree as usize,
                    })
                }
            }
        };
        let ignition_rule = IgnitionRule {
            fraction_of_peak: match &raw.processing.ignition_fraction_of_peak {
                Some(v) => check.within(v, "processing.ignition_fraction_of_peak", 0.001, 0.9)?,
                None => DEFAULT_IGNITION_FRACTION_OF_PEAK,
            },
            hold_s: match &raw.processing.ignition_hold_s {
                Some(v) => check.non_negative(v, "processing.ignition_hold_s")?,
                None => DEFAULT_IGNITION_HOLD_S,
            },
        };

        let data_file = raw.data_file.get_ref();
        if data_file.trim().is_empty() {
            return Err(check.invalid(&raw.data_file.span(), "data_file", "is empty".to_string()));
        }
        Ok(TestDescription {
            source: path.to_path_buf(),
            data_file: folder.join(data_file),
            label: raw.label,
            irradiance_kw_m2,
            exposed_area_m2,
            specimen_area_m2,
            initial_mass_g,
            thickness_mm,
            layers,
            // A test lasts hours at most: an offset past 1e6 s (11.6 days) is a typo, and it
            // would ask the fit for a simulation of that length.
            time_offset_s: match &raw.time_offset_s {
                Some(v) => check.within(v, "time_offset_s", -1e6, 1e6)?,
                None => 0.0,
            },
            hrr_delay_s,
            ignition_time_s,
            is_mass_tared: raw.mass_is_tared.unwrap_or(true),
            ambient,
            columns,
            gas,
            methane_burner,
            smoke,
            hrr_from_mass,
            smoothing,
            ignition_rule,
        })
    }

    /// A description for a bare CSV with columns `time`, `mass` and `hrr` (those of the last two
    /// that the file lacks are skipped), at
    /// the given irradiance and area, everything else at its default; the caller may then
    /// change fields (as the `reduce FILE.csv` flags do).
    pub fn for_csv(data_file: &Path, exposed_area_m2: f64, irradiance_kw_m2: f64) -> Self {
        TestDescription {
            source: data_file.to_path_buf(),
            data_file: data_file.to_path_buf(),
            label: None,
            irradiance_kw_m2,
            exposed_area_m2,
            specimen_area_m2: None,
            initial_mass_g: None,
            thickness_mm: None,
            layers: Vec::new(),
            time_offset_s: 0.0,
            hrr_delay_s: 0.0,
            ignition_time_s: None,
            is_mass_tared: true,
            ambient: Ambient {
                temperature_k: 293.15,
                pressure_pa: 101_325.0,
                water_mole_fraction: 0.0,
                oxygen: AMBIENT_DRY_OXYGEN,
                carbon_dioxide: 0.0,
            },
            columns: Columns {
                time: ColumnName::named("time"),
                mass: Some(ColumnName {
                    is_required: false,
                    ..ColumnName::named("mass")
                }),
                hrr: Some(ColumnName {
                    is_required: false,
                    ..ColumnName::named("hrr")
                }),
                oxygen: None,
                carbon_dioxide: None,
                carbon_monoxide: None,
                orifice_pressure: None,
                exhaust_temperature: None,
                smoke_light: None,
                surface_temperature: None,
                back_temperature: None,
                in_depth_temperature: Vec::new(),
            },
            gas: None,
            methane_burner: None,
            smoke: Smoke {
                path_length_m: DEFAULT_SMOKE_PATH_LENGTH_M,
                duct_volume_flow_m3_s: None,
            },
            hrr_from_mass: None,
            smoothing: None,
            ignition_rule: IgnitionRule {
                fraction_of_peak: DEFAULT_IGNITION_FRACTION_OF_PEAK,
                hold_s: DEFAULT_IGNITION_HOLD_S,
            },
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const MINIMAL: &str = "data_file = \"run.csv\"\nirradiance_kw_m2 = 50\nexposed_area_m2 = \
                           0.01\n[columns]\ntime = \"Time\"\nmass = { name = \"Mass\", unit = \
                           \"g\" }\n";

    #[test]
    fn a_minimal_description_takes_the_defaults() {
        let d = TestDescription::parse(Path::new("dir/test.toml"), MINIMAL).unwrap();
        assert_eq!(d.data_file, Path::new("dir/run.csv"));
        assert_eq!(d.ambient.oxygen, AMBIENT_DRY_OXYGEN);
        assert_eq!(d.columns.mass.unwrap().unit.as_deref(), Some("g"));
        assert!(d.gas.is_none());
        assert_eq!(d.ignition_rule.fraction_of_peak, 0.10);
    }

    #[test]
    fn a_negative_area_names_the_line_and_key() {
        let text = MINIMAL.replace("exposed_area_m2 = 0.01", "exposed_area_m2 = -0.01");
        let err = TestDescription::parse(Path::new("t.toml"), &text).unwrap_err();
        assert_eq!(
            err.to_string(),
            "t.toml:3: `exposed_area_m2` must be > 0, got -0.01"
        );
    }

    #[test]
    fn an_unknown_key_is_a_syntax_error() {
        let text = format!("{MINIMAL}\n[smoke]\npath_lenght_m = 0.1\n");
        let err = TestDescription::parse(Path::new("t.toml"), &text).unwrap_err();
        let chain = format!("{err}: {}", std::error::Error::source(&err).unwrap());
        assert!(chain.contains("path_lenght_m"), "{chain}");
    }

    /// Magnus form at 20 °C gives 2.34 kPa (handbook steam tables: 2.339 kPa; from memory).
    #[test]
    fn saturation_pressure_at_twenty_degrees() {
        assert!((saturation_vapour_pressure_pa(20.0) - 2339.0).abs() < 10.0);
    }
}
