//! Material model files: components with their property laws, reactions, and the heat of
//! combustion of the fuel gas (docs/file-formats.md, "Material model").

use std::path::Path;

use serde::{Deserialize, Serialize};
use toml::Spanned;

use super::source::Source;
use super::CaseError;
use crate::physics::material::{
    Component, GasRelease, Material, PropertyLaw, Reaction, DEFAULT_REFERENCE_TEMPERATURE_K,
};

/// A material model file as written.
#[derive(Debug, Clone, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct MaterialFile {
    pub title: String,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub notes: Option<String>,
    /// Effective heat of combustion of the fuel gas, MJ/kg (combustion efficiency × net heat
    /// of combustion). Omit for a material that gives no fuel.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub heat_of_combustion_mj_kg: Option<Spanned<f64>>,
    #[serde(rename = "component")]
    pub components: Vec<ComponentFile>,
    #[serde(rename = "reaction", default, skip_serializing_if = "Vec::is_empty")]
    pub reactions: Vec<ReactionFile>,
    /// Present in a calibrated model written by a fit: provenance, intervals, and the exposure
    /// values fitted together with the material.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub calibration: Option<CalibrationFile>,
}

/// The `[calibration]` table of a calibrated model (docs/file-formats.md).
#[derive(Debug, Clone, Default, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CalibrationFile {
    pub job: String,
    pub emberfit_version: String,
    pub date: String,
    pub objective: f64,
    /// False when the fit ended before converging (a budget, its time, a stop request, or
    /// still running): the values and intervals are provisional. Absent in older files.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub converged: Option<bool>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub not_converged_reason: Option<String>,
    /// SHA-256 of every file the fit read, by path.
    #[serde(default)]
    pub data_sha256: std::collections::BTreeMap<String, String>,
    /// Exposure values fitted with the material; `simulate` and `predict` apply them to the
    /// specimen's scenario (they override the scenario's own values).
    #[serde(default)]
    pub scenario: ScenarioCalibration,
    /// Every fitted value with its 95 % interval.
    #[serde(rename = "parameter", default)]
    pub parameters: Vec<CalibratedParameter>,
}

#[derive(Debug, Clone, Default, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ScenarioCalibration {
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub flame_heat_flux_kw_m2: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub flame_blockage: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub convective_coefficient_w_m2_k: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub critical_fuel_mass_flux_g_m2s: Option<f64>,
}

#[derive(Debug, Clone, Default, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CalibratedParameter {
    pub path: String,
    pub unit: String,
    pub value: f64,
    pub lower_95: f64,
    pub upper_95: f64,
    pub scale: String,
    /// Standard error in fit space (the value, or its log10 on a log scale).
    pub standard_error: f64,
    #[serde(default)]
    pub warnings: Vec<String>,
}

#[derive(Debug, Clone, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ComponentFile {
    pub name: Spanned<String>,
    pub density_kg_m3: Spanned<f64>,
    pub conductivity_w_m_k: Spanned<PropertyFile>,
    pub specific_heat_j_kg_k: Spanned<PropertyFile>,
    pub emissivity: Spanned<f64>,
    /// In-depth absorption coefficient, 1/m; omit for an opaque component.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub absorption_per_m: Option<Spanned<f64>>,
}

/// A property: a number, a power law `{ value, exponent, reference_k }`, or a table
/// `[[T_K, value], ...]`.
#[derive(Debug, Clone, Serialize, Deserialize)]
#[serde(untagged)]
pub enum PropertyFile {
    Constant(f64),
    Table(Vec<[f64; 2]>),
    PowerLaw {
        value: f64,
        exponent: f64,
        #[serde(default, skip_serializing_if = "Option::is_none")]
        reference_k: Option<f64>,
    },
}

#[derive(Debug, Clone, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ReactionFile {
    /// Reactant component name.
    pub from: Spanned<String>,
    /// Condensed product component name; omit when the reactant turns wholly to gas.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub to: Option<Spanned<String>>,
    /// Condensed yield ν, kg of product per kg of reactant (required with `to`).
    #[serde(rename = "yield", default, skip_serializing_if = "Option::is_none")]
    pub product_yield: Option<Spanned<f64>>,
    pub pre_exponential_per_s: Spanned<f64>,
    pub activation_energy_kj_mol: Spanned<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub order: Option<Spanned<f64>>,
    /// Heat of reaction, kJ per kg of reactant, positive when endothermic.
    pub heat_of_reaction_kj_kg: Spanned<f64>,
    /// Fuel mass fraction of the released gas (default 1).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub fuel_fraction: Option<Spanned<f64>>,
    /// Heat of combustion of this reaction's fuel gas, MJ/kg (default: the material's).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub heat_of_combustion_mj_kg: Option<Spanned<f64>>,
}

/// A loaded material: the file as written (kept for export) and the validated physics.
#[derive(Debug, Clone)]
pub struct MaterialModel {
    pub file: MaterialFile,
    pub material: Material,
}

/// Reads and validates a material model file.
pub fn load_material(path: &Path) -> Result<MaterialModel, CaseError> {
    let source = Source::read(path)?;
    let file: MaterialFile = source.parse()?;
    let material = build_material(&source, &file)?;
    Ok(MaterialModel { file, material })
}

/// Parses material text that did not come from a file (tests, edited copies); `label` stands
/// in for the path in messages.
pub fn material_from_str(label: &Path, text: &str) -> Result<MaterialModel, CaseError> {
    let source = Source {
        path: label.to_path_buf(),
        text: text.to_string(),
    };
    let file: MaterialFile = source.parse()?;
    let material = build_material(&source, &file)?;
    Ok(MaterialModel { file, material })
}

/// Validates a material file's values against what is physical (spans give the lines).
pub(crate) fn build_material(source: &Source, file: &MaterialFile) -> Result<Material, CaseError> {
    if file.components.is_empty() {
        return Err(source.inconsistent("a material needs at least one [[component]]"));
    }
    let mut components = Vec::with_capacity(file.components.len());
    for (idx, raw) in file.components.iter().enumerate() {
        let key = |field: &str| format!("component[{idx}].{field}");
        let name = raw.name.get_ref().trim().to_string();
        if name.is_empty() {
            return Err(source.invalid(&raw.name.span(), &key("name"), "must not be empty"));
        }
        if components.iter().any(|c: &Component| c.name == name) {
            return Err(source.invalid(
                &raw.name.span(),
                &key("name"),
                format!("`{name}` is used twice"),
            ));
        }
        components.push(Component {
            name,
            density_kg_m3: source.positive(&raw.density_kg_m3, &key("density_kg_m3"))?,
            conductivity_w_m_k: property(
                source,
                &raw.conductivity_w_m_k,
                &key("conductivity_w_m_k"),
            )?,
            specific_heat_j_kg_k: property(
                source,
                &raw.specific_heat_j_kg_k,
                &key("specific_heat_j_kg_k"),
            )?,
            emissivity: source.fraction(&raw.emissivity, &key("emissivity"))?,
            absorption_coefficient_per_m: raw
                .absorption_per_m
                .as_ref()
                .map(|value| source.positive(value, &key("absorption_per_m")))
                .transpose()?,
        });
    }
    let material_heat_of_combustion_j_kg = file
        .heat_of_combustion_mj_kg
        .as_ref()
        .map(|value| source.non_negative(value, "heat_of_combustion_mj_kg"))
        .transpose()?
        .map(|mj_kg| mj_kg * 1e6);
    let find = |name: &Spanned<String>, field: &str| -> Result<usize, CaseError> {
        let wanted = name.get_ref().trim();
        components
            .iter()
            .position(|c| c.name == wanted)
            .ok_or_else(|| {
                let known: Vec<&str> = components.iter().map(|c| c.name.as_str()).collect();
                source.invalid(
                    &name.span(),
                    field,
                    format!(
                        "names no component: `{wanted}` (components are {})",
                        known.join(", ")
                    ),
                )
            })
    };
    let mut reactions = Vec::with_capacity(file.reactions.len());
    for (idx, raw) in file.reactions.iter().enumerate() {
        let key = |field: &str| format!("reaction[{idx}].{field}");
        let reactant = find(&raw.from, &key("from"))?;
        let product = raw.to.as_ref().map(|to| find(to, &key("to"))).transpose()?;
        if let (Some(product), Some(to)) = (product, &raw.to) {
            if product == reactant {
                return Err(source.invalid(
                    &to.span(),
                    &key("to"),
                    format!(
                        "`{}` is the reaction's own reactant (`from`); a product must be \
                         another component",
                        to.get_ref()
                    ),
                ));
            }
        }
        let product_yield = match (&product, &raw.product_yield) {
            (Some(_), Some(value)) => source.fraction(value, &key("yield"))?,
            (Some(_), None) => {
                return Err(source.invalid(
                    &raw.from.span(),
                    &key("yield"),
                    "is required when the reaction has a condensed product (`to`)",
                ))
            }
            (None, Some(value)) if *value.get_ref() != 0.0 => {
                return Err(source.invalid(
                    &value.span(),
                    &key("yield"),
                    format!(
                        "must be 0 without a product (`to`), got {}",
                        value.get_ref()
                    ),
                ))
            }
            (None, _) => 0.0,
        };
        let fuel_fraction = match &raw.fuel_fraction {
            Some(value) => source.fraction(value, &key("fuel_fraction"))?,
            None => 1.0,
        };
        let heat_of_combustion_j_kg = match &raw.heat_of_combustion_mj_kg {
            Some(value) => source.non_negative(value, &key("heat_of_combustion_mj_kg"))? * 1e6,
            None => match material_heat_of_combustion_j_kg {
                Some(value) => value,
                None if fuel_fraction > 0.0 => {
                    return Err(source.invalid(
                        &raw.from.span(),
                        &key("heat_of_combustion_mj_kg"),
                        "is needed (here or at the top of the file) because this reaction releases fuel; \
                         set fuel_fraction = 0 for an inert gas such as water vapour",
                    ))
                }
                None => 0.0,
            },
        };
        let order = match &raw.order {
            Some(value) => source.non_negative(value, &key("order"))?,
            None => 1.0,
        };
        // Plausible ranges (fitted single-step pyrolysis kinetics lie far inside both; common
        // practice, no single source): outside them the rate is either instantaneous at room
        // temperature or never reached, and the solver could only fail without naming the key.
        let pre_exponential_per_s =
            source.positive(&raw.pre_exponential_per_s, &key("pre_exponential_per_s"))?;
        if !(1e-5..=1e30).contains(&pre_exponential_per_s) {
            return Err(source.invalid(
                &raw.pre_exponential_per_s.span(),
                &key("pre_exponential_per_s"),
                format!("must be within 1e-5..1e30 1/s, got {pre_exponential_per_s:e}"),
            ));
        }
        let activation_energy_kj_mol = source.non_negative(
            &raw.activation_energy_kj_mol,
            &key("activation_energy_kj_mol"),
        )?;
        if !(1.0..=1000.0).contains(&activation_energy_kj_mol) {
            return Err(source.invalid(
                &raw.activation_energy_kj_mol.span(),
                &key("activation_energy_kj_mol"),
                format!("must be within 1..1000 kJ/mol, got {activation_energy_kj_mol}"),
            ));
        }
        reactions.push(Reaction {
            reactant,
            product,
            product_yield,
            pre_exponential_per_s,
            activation_energy_j_mol: activation_energy_kj_mol * 1e3,
            order,
            heat_of_reaction_j_kg: source
                .finite(&raw.heat_of_reaction_kj_kg, &key("heat_of_reaction_kj_kg"))?
                * 1e3,
            gas: GasRelease {
                fuel_fraction,
                heat_of_combustion_j_kg,
            },
        });
    }
    check_no_cycle(source, file, &reactions)?;
    Material::new(components, reactions).map_err(|err| source.inconsistent(err.to_string()))
}

/// A chain of reactions that leads back to its first reactant (a → b → a) cannot be advanced
/// once per step: refused, naming the components in order and the line of each reaction.
fn check_no_cycle(
    source: &Source,
    file: &MaterialFile,
    reactions: &[Reaction],
) -> Result<(), CaseError> {
    // Depth-first search over components along reactant → product edges (one per reaction);
    // `stack` holds the reactions on the current path.
    fn visit(
        component: usize,
        reactions: &[Reaction],
        state: &mut [u8],
        stack: &mut Vec<usize>,
    ) -> Option<Vec<usize>> {
        state[component] = 1;
        for (r, reaction) in reactions.iter().enumerate() {
            let (true, Some(product)) = (reaction.reactant == component, reaction.product) else {
                continue;
            };
            stack.push(r);
            if state[product] == 1 {
                // The cycle is the part of the path from the reaction leaving `product`.
                let begin = stack
                    .iter()
                    .position(|&s| reactions[s].reactant == product)
                    .unwrap_or(0);
                return Some(stack[begin..].to_vec());
            }
            if state[product] == 0 {
                if let Some(cycle) = visit(product, reactions, state, stack) {
                    return Some(cycle);
                }
            }
            stack.pop();
        }
        state[component] = 2;
        None
    }
    let n_components = reactions
        .iter()
        .flat_map(|r| [Some(r.reactant), r.product])
        .flatten()
        .max()
        .map_or(0, |m| m + 1);
    let mut state = vec![0u8; n_components];
    for component in 0..n_components {
        if state[component] != 0 {
            continue;
        }
        let mut stack = Vec::new();
        if let Some(cycle) = visit(component, reactions, &mut state, &mut stack) {
            let chain: Vec<String> = cycle
                .iter()
                .map(|&r| {
                    let raw = &file.reactions[r];
                    format!(
                        "reaction[{r}] (line {}) `{}` → `{}`",
                        source.line(&raw.from.span()),
                        raw.from.get_ref(),
                        raw.to.as_ref().map_or("", |t| t.get_ref().as_str())
                    )
                })
                .collect();
            let first = cycle[0];
            return Err(source.invalid(
                &file.reactions[first].from.span(),
                &format!("reaction[{first}].from"),
                format!(
                    "starts a cycle of reactions: {}; a component cannot be, through its \
                     products, its own reactant",
                    chain.join(", ")
                ),
            ));
        }
    }
    Ok(())
}

fn property(
    source: &Source,
    raw: &Spanned<PropertyFile>,
    key: &str,
) -> Result<PropertyLaw, CaseError> {
    let span = raw.span();
    let law = match raw.get_ref() {
        PropertyFile::Constant(value) => PropertyLaw::constant(*value),
        PropertyFile::PowerLaw {
            value,
            exponent,
            reference_k,
        } => PropertyLaw::PowerLaw {
            value_at_reference: *value,
            reference_temperature_k: reference_k.unwrap_or(DEFAULT_REFERENCE_TEMPERATURE_K),
            exponent: *exponent,
        },
        PropertyFile::Table(points) => {
            PropertyLaw::Table(points.iter().map(|p| (p[0], p[1])).collect())
        }
    };
    // The physics check says what is wrong; the span says where.
    match law.validate(key) {
        Ok(()) => Ok(law),
        Err(crate::physics::PhysicsError::Invalid { problem, .. }) => {
            Err(source.invalid(&span, key, problem))
        }
        Err(other) => Err(source.invalid(&span, key, other.to_string())),
    }
}
