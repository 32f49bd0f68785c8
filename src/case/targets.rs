//! The one table of the values a fit can set: a parameter path (`component.<name>.<key>`,
//! `reaction.<index>.<key>`, `heat_of_combustion_mj_kg`, `exposure.<key>`, `ignition.<key>`)
//! ↔ the `Target` it sets ↔ the key in the material or scenario file ↔ the file's unit ↔ the
//! factor from that unit to SI. Everything that maps a path or a target goes through it:
//! `parse_path` (the job reader and `predict`), `Target::apply`/`read` (the model, the start
//! values, `best.toml`), `export::material` (which key to write) and `predict`'s drawn sets
//! (`for_each_target`, the two-pass order, written once here).
//!
//! It knows the material file's structure (`case::material`) but nothing of the fit engine:
//! a free parameter's targets travel beside it (`FitJob::targets`).

use crate::case::material::MaterialModel;
use crate::physics::kinetics::GAS_CONSTANT_J_MOL_K;
use crate::physics::material::{Material, PropertyLaw};
use crate::physics::scenario::{IgnitionRule, Scenario};

/// Reference heating rate of a `peak_temperature_k` parameter when the job gives none, K/min
/// (the job file's documented default, docs/fit-jobs.md).
pub const DEFAULT_REFERENCE_HEATING_RATE_K_MIN: f64 = 10.0;

/// Which part of a component's property law a parameter sets.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum PropertyPart {
    /// The constant, or the power law's value at its reference temperature.
    Value,
    /// The power law's exponent.
    Exponent,
    /// A factor on every value (the only way to fit a table).
    Factor,
}

/// One place a parameter value goes. Values are in the file's units (kJ/mol, MJ/kg, kW/m²,
/// g/(m²·s)); `apply` converts to SI with the table's factor.
#[derive(Debug, Clone, PartialEq)]
pub enum Target {
    Density {
        component: usize,
    },
    Conductivity {
        component: usize,
        part: PropertyPart,
    },
    SpecificHeat {
        component: usize,
        part: PropertyPart,
    },
    Emissivity {
        component: usize,
    },
    Absorption {
        component: usize,
    },
    PreExponential {
        reaction: usize,
    },
    ActivationEnergy {
        reaction: usize,
    },
    Order {
        reaction: usize,
    },
    HeatOfReaction {
        reaction: usize,
    },
    Yield {
        reaction: usize,
    },
    FuelFraction {
        reaction: usize,
    },
    /// Heat of combustion of these reactions' fuel (the material-level value reaches every
    /// reaction without its own).
    HeatOfCombustion {
        reactions: Vec<usize>,
    },
    /// Arrhenius reparametrisation: the temperature of peak rate at a reference heating rate
    /// (first-order Kissinger condition E·β/(R·T_p²) = A·exp(−E/(R·T_p))), which sets A from
    /// the reaction's current E. Applied after every direct target.
    PeakTemperature {
        reaction: usize,
        heating_rate_k_s: f64,
    },
    /// Arrhenius reparametrisation: log10 of the rate constant at a reference temperature,
    /// which sets A = k_ref·exp(E/(R·T_ref)). Applied after every direct target.
    Log10RateAt {
        reaction: usize,
        temperature_k: f64,
    },
    FlameHeatFlux,
    FlameBlockage,
    ConvectiveCoefficient,
    CriticalFuelMassFlux,
}

/// A target without its indices: the row of the table it belongs to.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Kind {
    Density,
    Conductivity,
    SpecificHeat,
    Emissivity,
    Absorption,
    PreExponential,
    ActivationEnergy,
    Order,
    HeatOfReaction,
    Yield,
    FuelFraction,
    HeatOfCombustion,
    PeakTemperature,
    Log10RateAt,
    FlameHeatFlux,
    FlameBlockage,
    ConvectiveCoefficient,
    CriticalFuelMassFlux,
}

/// Where a value lives, which is also the first segment of its path.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Place {
    /// `[[component]]` of the material file; path `component.<name>.<key>`.
    Component,
    /// `[[reaction]]` of the material file; path `reaction.<index>.<key>`.
    Reaction,
    /// `[exposure]` of the scenario; path `exposure.<key>`.
    Exposure,
    /// `[ignition]` of the scenario; path `ignition.<key>`.
    Ignition,
}

impl Place {
    /// The path's first segment, and the material file's array of tables for the first two.
    pub fn name(self) -> &'static str {
        match self {
            Place::Component => "component",
            Place::Reaction => "reaction",
            Place::Exposure => "exposure",
            Place::Ignition => "ignition",
        }
    }

    /// Whether the value lives in the cone scenario rather than in the material.
    pub fn is_scenario(self) -> bool {
        matches!(self, Place::Exposure | Place::Ignition)
    }
}

/// One row of the table.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Row {
    pub kind: Kind,
    pub place: Place,
    /// The key in the file and the last segment of the path (before a property's part).
    pub file_key: &'static str,
    /// Unit of the value in the file and in the path.
    pub unit: &'static str,
    /// SI value = file value × this.
    pub si_per_file_unit: f64,
    /// File value = SI value × this (kept beside the other factor so that reading back
    /// multiplies by the same literal the code always used, bit for bit).
    pub file_unit_per_si: f64,
    /// The key may be absent from a material file (a default applies): writing the fitted
    /// value inserts it rather than replacing a value that must be there.
    pub is_optional_in_file: bool,
}

const fn row(
    kind: Kind,
    place: Place,
    file_key: &'static str,
    unit: &'static str,
    factors: (f64, f64),
    is_optional_in_file: bool,
) -> Row {
    Row {
        kind,
        place,
        file_key,
        unit,
        si_per_file_unit: factors.0,
        file_unit_per_si: factors.1,
        is_optional_in_file,
    }
}

/// The table, one row per `Kind` in the enum's order (docs/fit-jobs.md lists the same paths
/// for users; docs/file-formats.md the keys).
#[rustfmt::skip]
pub const TABLE: [Row; 18] = [
    row(Kind::Density, Place::Component, "density_kg_m3", "kg/m³", (1.0, 1.0), false),
    row(Kind::Conductivity, Place::Component, "conductivity_w_m_k", "W/(m·K)", (1.0, 1.0), false),
    row(Kind::SpecificHeat, Place::Component, "specific_heat_j_kg_k", "J/(kg·K)", (1.0, 1.0), false),
    row(Kind::Emissivity, Place::Component, "emissivity", "–", (1.0, 1.0), false),
    row(Kind::Absorption, Place::Component, "absorption_per_m", "1/m", (1.0, 1.0), true),
    row(Kind::PreExponential, Place::Reaction, "pre_exponential_per_s", "1/s", (1.0, 1.0), false),
    row(Kind::ActivationEnergy, Place::Reaction, "activation_energy_kj_mol", "kJ/mol", (1e3, 1e-3), false),
    row(Kind::Order, Place::Reaction, "order", "–", (1.0, 1.0), true),
    row(Kind::HeatOfReaction, Place::Reaction, "heat_of_reaction_kj_kg", "kJ/kg", (1e3, 1e-3), false),
    row(Kind::Yield, Place::Reaction, "yield", "kg/kg", (1.0, 1.0), false),
    row(Kind::FuelFraction, Place::Reaction, "fuel_fraction", "–", (1.0, 1.0), true),
    row(Kind::HeatOfCombustion, Place::Reaction, "heat_of_combustion_mj_kg", "MJ/kg", (1e6, 1e-6), true),
    // The two reparametrisations of A: written back as `pre_exponential_per_s`.
    row(Kind::PeakTemperature, Place::Reaction, "peak_temperature_k", "K", (1.0, 1.0), false),
    row(Kind::Log10RateAt, Place::Reaction, "log10_rate_per_s", "log10(1/s)", (1.0, 1.0), false),
    row(Kind::FlameHeatFlux, Place::Exposure, "flame_heat_flux_kw_m2", "kW/m²", (1e3, 1e-3), false),
    row(Kind::FlameBlockage, Place::Exposure, "flame_blockage", "–", (1.0, 1.0), false),
    row(Kind::ConvectiveCoefficient, Place::Exposure, "convective_coefficient_w_m2_k", "W/(m²·K)", (1.0, 1.0), false),
    row(Kind::CriticalFuelMassFlux, Place::Ignition, "critical_fuel_mass_flux_g_m2s", "g/(m²·s)", (1e-3, 1e3), false),
];

/// The row of a kind (the table is in the enum's order; a unit test checks it).
pub fn row_of(kind: Kind) -> &'static Row {
    &TABLE[kind as usize]
}

fn row_at(place: Place, file_key: &str) -> Option<&'static Row> {
    TABLE
        .iter()
        .find(|row| row.place == place && row.file_key == file_key)
}

impl Target {
    pub fn kind(&self) -> Kind {
        match self {
            Target::Density { .. } => Kind::Density,
            Target::Conductivity { .. } => Kind::Conductivity,
            Target::SpecificHeat { .. } => Kind::SpecificHeat,
            Target::Emissivity { .. } => Kind::Emissivity,
            Target::Absorption { .. } => Kind::Absorption,
            Target::PreExponential { .. } => Kind::PreExponential,
            Target::ActivationEnergy { .. } => Kind::ActivationEnergy,
            Target::Order { .. } => Kind::Order,
            Target::HeatOfReaction { .. } => Kind::HeatOfReaction,
            Target::Yield { .. } => Kind::Yield,
            Target::FuelFraction { .. } => Kind::FuelFraction,
            Target::HeatOfCombustion { .. } => Kind::HeatOfCombustion,
            Target::PeakTemperature { .. } => Kind::PeakTemperature,
            Target::Log10RateAt { .. } => Kind::Log10RateAt,
            Target::FlameHeatFlux => Kind::FlameHeatFlux,
            Target::FlameBlockage => Kind::FlameBlockage,
            Target::ConvectiveCoefficient => Kind::ConvectiveCoefficient,
            Target::CriticalFuelMassFlux => Kind::CriticalFuelMassFlux,
        }
    }

    /// This target's row of the table.
    pub fn row(&self) -> &'static Row {
        row_of(self.kind())
    }

    /// The value's unit: the row's, or "–" for a power law's exponent and a factor.
    pub fn unit(&self) -> &'static str {
        match self {
            Target::Conductivity { part, .. } | Target::SpecificHeat { part, .. }
                if *part != PropertyPart::Value =>
            {
                "–"
            }
            _ => self.row().unit,
        }
    }

    /// Whether this target derives A from E and must be applied after the direct targets.
    pub fn is_derived(&self) -> bool {
        matches!(
            self,
            Target::PeakTemperature { .. } | Target::Log10RateAt { .. }
        )
    }

    /// Whether this target is a factor on a whole property law (`.factor`): relative to the
    /// law it was fitted on, so a value drawn around the fitted one applies as draw/fitted.
    pub fn is_factor(&self) -> bool {
        matches!(
            self,
            Target::Conductivity {
                part: PropertyPart::Factor,
                ..
            } | Target::SpecificHeat {
                part: PropertyPart::Factor,
                ..
            }
        )
    }

    /// Whether this target lives in the cone scenario (exposure and ignition values), which a
    /// milligram-scale case does not have.
    pub fn is_scenario_target(&self) -> bool {
        self.row().place.is_scenario()
    }

    /// Sets `value` (file units) into the material or the scenario.
    pub fn apply(&self, value: f64, material: &mut Material, scenario: &mut Scenario) {
        let si = value * self.row().si_per_file_unit;
        match self {
            Target::FlameHeatFlux => scenario.exposure.flame_heat_flux_w_m2 = si,
            Target::FlameBlockage => scenario.exposure.flame_blockage = si,
            Target::ConvectiveCoefficient => {
                scenario.exposure.convective_coefficient_w_m2_k = si;
                scenario.exposure.flaming_convective_coefficient_w_m2_k = si;
            }
            Target::CriticalFuelMassFlux => {
                if let IgnitionRule::CriticalFuelMassFlux(flux) = &mut scenario.ignition {
                    *flux = si;
                }
                scenario.flameout.threshold_fuel_mass_flux_kg_m2_s = si;
            }
            _ => self.apply_to_material(value, material),
        }
    }

    /// Sets `value` (file units) into the material; a scenario target is left alone (the
    /// milligram scale has no exposure to set).
    pub fn apply_to_material(&self, value: f64, material: &mut Material) {
        let si = value * self.row().si_per_file_unit;
        match self {
            Target::Density { component } => material.components[*component].density_kg_m3 = si,
            Target::Conductivity { component, part } => set_property(
                &mut material.components[*component].conductivity_w_m_k,
                *part,
                si,
            ),
            Target::SpecificHeat { component, part } => set_property(
                &mut material.components[*component].specific_heat_j_kg_k,
                *part,
                si,
            ),
            Target::Emissivity { component } => material.components[*component].emissivity = si,
            Target::Absorption { component } => {
                material.components[*component].absorption_coefficient_per_m = Some(si)
            }
            Target::PreExponential { reaction } => {
                material.reactions[*reaction].pre_exponential_per_s = si
            }
            Target::ActivationEnergy { reaction } => {
                material.reactions[*reaction].activation_energy_j_mol = si
            }
            Target::Order { reaction } => material.reactions[*reaction].order = si,
            Target::HeatOfReaction { reaction } => {
                material.reactions[*reaction].heat_of_reaction_j_kg = si
            }
            Target::Yield { reaction } => material.reactions[*reaction].product_yield = si,
            Target::FuelFraction { reaction } => {
                material.reactions[*reaction].gas.fuel_fraction = si
            }
            Target::HeatOfCombustion { reactions } => {
                for &reaction in reactions {
                    material.reactions[reaction].gas.heat_of_combustion_j_kg = si;
                }
            }
            Target::PeakTemperature {
                reaction,
                heating_rate_k_s,
            } => {
                let r = &mut material.reactions[*reaction];
                r.pre_exponential_per_s =
                    pre_exponential_from_peak(r.activation_energy_j_mol, si, *heating_rate_k_s);
            }
            Target::Log10RateAt {
                reaction,
                temperature_k,
            } => {
                let r = &mut material.reactions[*reaction];
                r.pre_exponential_per_s = 10f64.powf(si)
                    * (r.activation_energy_j_mol / (GAS_CONSTANT_J_MOL_K * temperature_k)).exp();
            }
            Target::FlameHeatFlux
            | Target::FlameBlockage
            | Target::ConvectiveCoefficient
            | Target::CriticalFuelMassFlux => {}
        }
    }

    /// Reads the value this target has in a material/scenario, in file units (the default
    /// start value).
    pub fn read(&self, material: &Material, scenario: &Scenario) -> f64 {
        let to_file = self.row().file_unit_per_si;
        match self {
            Target::FlameHeatFlux => scenario.exposure.flame_heat_flux_w_m2 * to_file,
            Target::FlameBlockage => scenario.exposure.flame_blockage * to_file,
            Target::ConvectiveCoefficient => {
                scenario.exposure.convective_coefficient_w_m2_k * to_file
            }
            Target::CriticalFuelMassFlux => {
                scenario.flameout.threshold_fuel_mass_flux_kg_m2_s * to_file
            }
            _ => self.read_material(material).unwrap_or(f64::NAN),
        }
    }

    /// Reads the value this target has in a material, in file units; `None` for a scenario
    /// target.
    pub fn read_material(&self, material: &Material) -> Option<f64> {
        let to_file = self.row().file_unit_per_si;
        let property = |law: &PropertyLaw, part: PropertyPart| match (part, law) {
            (
                PropertyPart::Value,
                PropertyLaw::PowerLaw {
                    value_at_reference, ..
                },
            ) => *value_at_reference,
            (PropertyPart::Exponent, PropertyLaw::PowerLaw { exponent, .. }) => *exponent,
            _ => 1.0,
        };
        let si = match self {
            Target::Density { component } => material.components[*component].density_kg_m3,
            Target::Conductivity { component, part } => {
                property(&material.components[*component].conductivity_w_m_k, *part)
            }
            Target::SpecificHeat { component, part } => {
                property(&material.components[*component].specific_heat_j_kg_k, *part)
            }
            Target::Emissivity { component } => material.components[*component].emissivity,
            Target::Absorption { component } => material.components[*component]
                .absorption_coefficient_per_m
                .unwrap_or(1e4),
            Target::PreExponential { reaction } => {
                material.reactions[*reaction].pre_exponential_per_s
            }
            Target::ActivationEnergy { reaction } => {
                material.reactions[*reaction].activation_energy_j_mol
            }
            Target::Order { reaction } => material.reactions[*reaction].order,
            Target::HeatOfReaction { reaction } => {
                material.reactions[*reaction].heat_of_reaction_j_kg
            }
            Target::Yield { reaction } => material.reactions[*reaction].product_yield,
            Target::FuelFraction { reaction } => material.reactions[*reaction].gas.fuel_fraction,
            Target::HeatOfCombustion { reactions } => match reactions.first() {
                Some(&r) => material.reactions[r].gas.heat_of_combustion_j_kg,
                None => return Some(0.0),
            },
            Target::PeakTemperature {
                reaction,
                heating_rate_k_s,
            } => {
                let r = &material.reactions[*reaction];
                peak_temperature_k(
                    r.pre_exponential_per_s,
                    r.activation_energy_j_mol,
                    *heating_rate_k_s,
                )
            }
            Target::Log10RateAt {
                reaction,
                temperature_k,
            } => {
                let r = &material.reactions[*reaction];
                (r.pre_exponential_per_s
                    * (-r.activation_energy_j_mol / (GAS_CONSTANT_J_MOL_K * temperature_k)).exp())
                .log10()
            }
            Target::FlameHeatFlux
            | Target::FlameBlockage
            | Target::ConvectiveCoefficient
            | Target::CriticalFuelMassFlux => return None,
        };
        Some(si * to_file)
    }
}

/// Sets one part of a property law to `value` (SI); a factor multiplies every value of the
/// law as it stands.
fn set_property(law: &mut PropertyLaw, part: PropertyPart, value: f64) {
    match (part, law) {
        (
            PropertyPart::Value,
            PropertyLaw::PowerLaw {
                value_at_reference, ..
            },
        ) => *value_at_reference = value,
        (PropertyPart::Exponent, PropertyLaw::PowerLaw { exponent, .. }) => *exponent = value,
        (PropertyPart::Factor, law) => {
            *law = match &*law {
                PropertyLaw::PowerLaw {
                    value_at_reference,
                    reference_temperature_k,
                    exponent,
                } => PropertyLaw::PowerLaw {
                    value_at_reference: value_at_reference * value,
                    reference_temperature_k: *reference_temperature_k,
                    exponent: *exponent,
                },
                PropertyLaw::Table(points) => {
                    PropertyLaw::Table(points.iter().map(|&(t, v)| (t, v * value)).collect())
                }
            }
        }
        // Paths are checked when the job is read; a table has no value or exponent.
        (_, PropertyLaw::Table(_)) => {}
    }
}

/// A from E and the peak temperature at heating rate β, by Kissinger's exact first-order
/// condition (Kissinger, Anal. Chem. 29 (1957) 1702): A = E·β/(R·T_p²)·exp(E/(R·T_p)).
pub fn pre_exponential_from_peak(
    activation_energy_j_mol: f64,
    peak_k: f64,
    heating_rate_k_s: f64,
) -> f64 {
    activation_energy_j_mol * heating_rate_k_s / (GAS_CONSTANT_J_MOL_K * peak_k * peak_k)
        * (activation_energy_j_mol / (GAS_CONSTANT_J_MOL_K * peak_k)).exp()
}

/// The peak temperature that Kissinger's first-order condition gives for (A, E, β), K, by
/// bisection on 200..2000 K.
pub fn peak_temperature_k(
    pre_exponential_per_s: f64,
    activation_energy_j_mol: f64,
    heating_rate_k_s: f64,
) -> f64 {
    let condition = |t: f64| {
        (activation_energy_j_mol * heating_rate_k_s / (GAS_CONSTANT_J_MOL_K * t * t)).ln()
            - pre_exponential_per_s.ln()
            + activation_energy_j_mol / (GAS_CONSTANT_J_MOL_K * t)
    };
    let (mut lower, mut upper) = (200.0, 2000.0);
    for _ in 0..100 {
        let middle = 0.5 * (lower + upper);
        if condition(middle) > 0.0 {
            lower = middle;
        } else {
            upper = middle;
        }
    }
    0.5 * (lower + upper)
}

/// Resolves a parameter path into its target and unit. `heating_rate_k_s` is the reference
/// heating rate of a `peak_temperature_k` path, `reference_temperature_k` that of a
/// `log10_rate_per_s` path.
pub fn parse_path(
    path: &str,
    material: &MaterialModel,
    heating_rate_k_s: f64,
    reference_temperature_k: Option<f64>,
) -> Result<(Target, &'static str), String> {
    let parts: Vec<&str> = path.split('.').collect();
    let unknown = || {
        format!(
            "`{path}` is not a parameter path; see docs/fit-jobs.md (e.g. component.<name>.conductivity_w_m_k, \
             reaction.<index>.activation_energy_kj_mol, heat_of_combustion_mj_kg, exposure.flame_heat_flux_kw_m2)"
        )
    };
    let target = match parts.as_slice() {
        ["component", name, key, rest @ ..] => {
            let c = component_index(material, name)?;
            let comp = &material.material.components[c];
            let row = row_at(Place::Component, key).ok_or_else(unknown)?;
            match (row.kind, rest) {
                (Kind::Conductivity, rest) => Target::Conductivity {
                    component: c,
                    part: property_part(&comp.conductivity_w_m_k, rest)?,
                },
                (Kind::SpecificHeat, rest) => Target::SpecificHeat {
                    component: c,
                    part: property_part(&comp.specific_heat_j_kg_k, rest)?,
                },
                (Kind::Density, []) => Target::Density { component: c },
                (Kind::Emissivity, []) => Target::Emissivity { component: c },
                (Kind::Absorption, []) => Target::Absorption { component: c },
                _ => return Err(unknown()),
            }
        }
        ["reaction", index, key] => {
            let r = reaction_index(material, index)?;
            let row = row_at(Place::Reaction, key).ok_or_else(unknown)?;
            match row.kind {
                Kind::PreExponential => Target::PreExponential { reaction: r },
                Kind::ActivationEnergy => Target::ActivationEnergy { reaction: r },
                Kind::Order => Target::Order { reaction: r },
                Kind::HeatOfReaction => Target::HeatOfReaction { reaction: r },
                Kind::Yield => Target::Yield { reaction: r },
                Kind::FuelFraction => Target::FuelFraction { reaction: r },
                Kind::HeatOfCombustion => Target::HeatOfCombustion { reactions: vec![r] },
                Kind::PeakTemperature => Target::PeakTemperature {
                    reaction: r,
                    heating_rate_k_s,
                },
                Kind::Log10RateAt => match reference_temperature_k {
                    Some(temperature_k) => Target::Log10RateAt {
                        reaction: r,
                        temperature_k,
                    },
                    None => return Err("`log10_rate_per_s` needs `reference_temperature_k`".into()),
                },
                _ => return Err(unknown()),
            }
        }
        // The material-level heat of combustion: every reaction without its own.
        [key] if *key == row_of(Kind::HeatOfCombustion).file_key => Target::HeatOfCombustion {
            reactions: reactions_without_own_heat_of_combustion(material),
        },
        [place, key] => {
            let place = [Place::Exposure, Place::Ignition]
                .into_iter()
                .find(|p| p.name() == *place)
                .ok_or_else(unknown)?;
            match row_at(place, key).ok_or_else(unknown)?.kind {
                Kind::FlameHeatFlux => Target::FlameHeatFlux,
                Kind::FlameBlockage => Target::FlameBlockage,
                Kind::ConvectiveCoefficient => Target::ConvectiveCoefficient,
                Kind::CriticalFuelMassFlux => Target::CriticalFuelMassFlux,
                _ => return Err(unknown()),
            }
        }
        _ => return Err(unknown()),
    };
    let unit = target.unit();
    Ok((target, unit))
}

/// The reactions that take the material-level `heat_of_combustion_mj_kg` (those without
/// their own), in file order.
pub fn reactions_without_own_heat_of_combustion(material: &MaterialModel) -> Vec<usize> {
    material
        .file
        .reactions
        .iter()
        .enumerate()
        .filter(|(_, r)| r.heat_of_combustion_mj_kg.is_none())
        .map(|(i, _)| i)
        .collect()
}

fn component_index(material: &MaterialModel, name: &str) -> Result<usize, String> {
    material.material.component_index(name).ok_or_else(|| {
        let names: Vec<&str> = material
            .material
            .components
            .iter()
            .map(|c| c.name.as_str())
            .collect();
        format!(
            "names no component `{name}` (components are {})",
            names.join(", ")
        )
    })
}

fn reaction_index(material: &MaterialModel, index: &str) -> Result<usize, String> {
    let n = material.material.reactions.len();
    match index.parse::<usize>() {
        Ok(i) if i < n => Ok(i),
        _ => Err(format!(
            "reaction index must be 0..{} (the order of [[reaction]] tables), got `{index}`",
            n.saturating_sub(1)
        )),
    }
}

fn property_part(law: &PropertyLaw, rest: &[&str]) -> Result<PropertyPart, String> {
    match (rest, law) {
        ([] | ["value"], PropertyLaw::PowerLaw { .. }) => Ok(PropertyPart::Value),
        (["exponent"], PropertyLaw::PowerLaw { .. }) => Ok(PropertyPart::Exponent),
        (["factor"], _) => Ok(PropertyPart::Factor),
        (_, PropertyLaw::Table(_)) => {
            Err("is a table: fit it with `.factor` (a factor on every value)".into())
        }
        _ => Err(format!(
            "ends in `{}`; a property takes `.value` (default), `.exponent` or `.factor`",
            rest.join(".")
        )),
    }
}

/// Visits every target of every parameter (`targets[i]` are parameter i's path and tied
/// paths) in the order they must be applied: direct targets first, then the Arrhenius
/// reparametrisations that depend on E. The only place that order is written.
pub fn for_each_target(targets: &[Vec<Target>], mut visit: impl FnMut(usize, &Target)) {
    for pass_derived in [false, true] {
        for (idx, parameter_targets) in targets.iter().enumerate() {
            for target in parameter_targets
                .iter()
                .filter(|t| t.is_derived() == pass_derived)
            {
                visit(idx, target);
            }
        }
    }
}

/// Applies a full parameter vector (file units) to a material only, in the order of
/// [`for_each_target`]; scenario targets are skipped (what a milligram-scale case simulates).
pub fn apply_to_material_all(targets: &[Vec<Target>], values: &[f64], material: &mut Material) {
    for_each_target(targets, |idx, target| {
        if let Some(&value) = values.get(idx) {
            target.apply_to_material(value, material)
        }
    });
}

/// Applies a full parameter vector (file units) to copies of a material and a scenario, in
/// the order of [`for_each_target`].
pub fn apply_all(
    targets: &[Vec<Target>],
    values: &[f64],
    material: &mut Material,
    scenario: &mut Scenario,
) {
    for_each_target(targets, |idx, target| {
        if let Some(&value) = values.get(idx) {
            target.apply(value, material, scenario)
        }
    });
}

#[cfg(test)]
mod tests {
    use super::*;

    fn demo_material() -> MaterialModel {
        let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR"));
        crate::case::load_material(&root.join("models/thermoplastic.toml")).unwrap()
    }

    /// Kissinger (1957): the reparametrisation and its inverse agree.
    #[test]
    fn peak_temperature_and_pre_exponential_are_inverse() {
        let beta = 10.0 / 60.0;
        let a = pre_exponential_from_peak(188e3, 640.0, beta);
        assert!((peak_temperature_k(a, 188e3, beta) - 640.0).abs() < 1e-6);
    }

    #[test]
    fn every_kind_has_its_row_and_keys_are_unique_per_place() {
        for (idx, row) in TABLE.iter().enumerate() {
            assert_eq!(row.kind as usize, idx, "{row:?}");
            assert_eq!(
                TABLE
                    .iter()
                    .filter(|r| r.place == row.place && r.file_key == row.file_key)
                    .count(),
                1,
                "{row:?}"
            );
            // The two factors are each other's inverse (to rounding).
            assert!((row.si_per_file_unit * row.file_unit_per_si - 1.0).abs() < 1e-12);
        }
    }

    /// Each path's unit and SI factor, by hand: 1 kJ/mol = 1e3 J/mol, 1 MJ/kg = 1e6 J/kg,
    /// 1 kW/m² = 1e3 W/m², 1 g/(m²·s) = 1e-3 kg/(m²·s).
    #[test]
    fn paths_parse_to_their_target_unit_and_si_factor() {
        let material = demo_material();
        let beta = 10.0 / 60.0;
        let cases = [
            ("reaction.0.activation_energy_kj_mol", "kJ/mol", 1e3),
            ("reaction.0.heat_of_reaction_kj_kg", "kJ/kg", 1e3),
            ("heat_of_combustion_mj_kg", "MJ/kg", 1e6),
            ("exposure.flame_heat_flux_kw_m2", "kW/m²", 1e3),
            ("exposure.flame_blockage", "–", 1.0),
            ("ignition.critical_fuel_mass_flux_g_m2s", "g/(m²·s)", 1e-3),
            ("exposure.convective_coefficient_w_m2_k", "W/(m²·K)", 1.0),
            ("reaction.0.peak_temperature_k", "K", 1.0),
        ];
        for (path, unit, factor) in cases {
            let (target, parsed_unit) = parse_path(path, &material, beta, None).unwrap();
            assert_eq!(parsed_unit, unit, "{path}");
            assert_eq!(target.row().si_per_file_unit, factor, "{path}");
        }
        let name = &material.material.components[0].name;
        let (target, unit) = parse_path(
            &format!("component.{name}.conductivity_w_m_k.factor"),
            &material,
            beta,
            None,
        )
        .unwrap();
        assert!(target.is_factor());
        assert_eq!(unit, "–");
        assert!(parse_path("exposure.irradiance_kw_m2", &material, beta, None).is_err());
        assert!(parse_path("component.nothing.density_kg_m3", &material, beta, None).is_err());
        assert!(parse_path("reaction.0.log10_rate_per_s", &material, beta, None).is_err());
    }

    /// Applying a value and reading it back gives the value, for every direct material path
    /// of the template: the two factors of each row undo each other.
    #[test]
    fn apply_then_read_returns_the_file_value() {
        let material = demo_material();
        let name = material.material.components[0].name.clone();
        for (path, value) in [
            (format!("component.{name}.density_kg_m3"), 1190.0),
            (format!("component.{name}.emissivity"), 0.9),
            ("reaction.0.activation_energy_kj_mol".into(), 181.5),
            ("reaction.0.heat_of_reaction_kj_kg".into(), 870.0),
            ("heat_of_combustion_mj_kg".into(), 24.5),
        ] {
            let (target, _) = parse_path(&path, &material, 10.0 / 60.0, None).unwrap();
            let mut applied = material.material.clone();
            target.apply_to_material(value, &mut applied);
            let back = target.read_material(&applied).unwrap();
            assert!((back - value).abs() <= 1e-12 * value, "{path}: {back}");
        }
    }

    /// A milligram case has no scenario: applying to the material alone sets the material
    /// targets (derived ones after E, whatever their order in the job) and leaves scenario
    /// targets out.
    #[test]
    fn applying_to_the_material_alone_skips_scenario_targets() {
        let material = crate::microscale::fit::single_step_material(1e12, 150e3, 1.0).unwrap();
        let beta = 10.0 / 60.0;
        let targets = vec![
            vec![Target::PeakTemperature {
                reaction: 0,
                heating_rate_k_s: beta,
            }],
            vec![Target::ActivationEnergy { reaction: 0 }],
            vec![Target::FlameHeatFlux],
        ];
        let mut applied = material.clone();
        apply_to_material_all(&targets, &[640.0, 180.0, 12.0], &mut applied);
        let reaction = &applied.reactions[0];
        assert_eq!(reaction.activation_energy_j_mol, 180e3);
        let peak = peak_temperature_k(reaction.pre_exponential_per_s, 180e3, beta);
        assert!((peak - 640.0).abs() < 1e-6, "{peak}");
        assert!(Target::FlameHeatFlux.is_scenario_target());
        assert_eq!(Target::FlameHeatFlux.read_material(&applied), None);
        assert_eq!(
            Target::ActivationEnergy { reaction: 0 }.read_material(&applied),
            Some(180.0)
        );
    }
}
