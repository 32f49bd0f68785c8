//! Condensed-phase components and the reaction network that links them (docs/physics.md §1,
//! "Components" and "Reactions"). Plain validated data in SI units; no I/O.

use super::PhysicsError;

/// Reference temperature of the power-law property form, K (docs/physics.md §1).
pub const DEFAULT_REFERENCE_TEMPERATURE_K: f64 = 300.0;

/// A temperature-dependent property: a power law or a table, linear between points and
/// constant outside them (docs/physics.md §1).
#[derive(Debug, Clone, PartialEq)]
pub enum PropertyLaw {
    /// p(T) = value_at_reference · (T / reference_temperature_k)^exponent.
    PowerLaw {
        value_at_reference: f64,
        reference_temperature_k: f64,
        exponent: f64,
    },
    /// (T in K, value) points in increasing temperature.
    Table(Vec<(f64, f64)>),
}

impl PropertyLaw {
    /// A property that does not depend on temperature.
    pub fn constant(value: f64) -> Self {
        PropertyLaw::PowerLaw {
            value_at_reference: value,
            reference_temperature_k: DEFAULT_REFERENCE_TEMPERATURE_K,
            exponent: 0.0,
        }
    }

    /// Value of the property at `temperature_k`.
    #[inline]
    pub fn at(&self, temperature_k: f64) -> f64 {
        match self {
            PropertyLaw::PowerLaw {
                value_at_reference,
                reference_temperature_k,
                exponent,
            } => {
                if *exponent == 0.0 {
                    *value_at_reference
                } else {
                    value_at_reference * (temperature_k / reference_temperature_k).powf(*exponent)
                }
            }
            PropertyLaw::Table(points) => table_value(points, temperature_k),
        }
    }

    /// Integral of the property over temperature from `from_k` to `to_k` (used for the
    /// sensible heat ∫c dT of the heat-of-gasification relation), by the trapezoid rule on
    /// 200 sub-intervals; exact for constants and tables whose points fall on the sub-grid.
    pub fn integral(&self, from_k: f64, to_k: f64) -> f64 {
        const PIECES: usize = 200;
        let width = (to_k - from_k) / PIECES as f64;
        (0..PIECES)
            .map(|piece| {
                let lower = from_k + width * piece as f64;
                0.5 * width * (self.at(lower) + self.at(lower + width))
            })
            .sum()
    }

    /// Rejects non-positive values, unordered tables and non-finite exponents.
    pub fn validate(&self, what: &str) -> Result<(), PhysicsError> {
        match self {
            PropertyLaw::PowerLaw {
                value_at_reference,
                reference_temperature_k,
                exponent,
            } => {
                require_positive(what, *value_at_reference)?;
                require_positive("reference temperature", *reference_temperature_k)?;
                if !exponent.is_finite() {
                    return Err(PhysicsError::invalid(what, "exponent must be finite"));
                }
            }
            PropertyLaw::Table(points) => {
                if points.is_empty() {
                    return Err(PhysicsError::invalid(what, "table has no points"));
                }
                for window in points.windows(2) {
                    if window[1].0 <= window[0].0 {
                        return Err(PhysicsError::invalid(
                            what,
                            format!(
                                "table temperatures must increase, got {} K after {} K",
                                window[1].0, window[0].0
                            ),
                        ));
                    }
                }
                for &(temperature_k, value) in points {
                    require_positive("table temperature", temperature_k)?;
                    require_positive(what, value)?;
                }
            }
        }
        Ok(())
    }
}

/// Piecewise-linear lookup in (x, value) points with increasing x, constant outside them;
/// shared by property tables (x = temperature) and time schedules (x = time).
pub(crate) fn table_value(points: &[(f64, f64)], x: f64) -> f64 {
    let first = points[0];
    if x <= first.0 {
        return first.1;
    }
    for window in points.windows(2) {
        let (x0, v0) = window[0];
        let (x1, v1) = window[1];
        if x <= x1 {
            return v0 + (v1 - v0) * (x - x0) / (x1 - x0);
        }
    }
    points[points.len() - 1].1
}

/// One condensed component of a material.
#[derive(Debug, Clone, PartialEq)]
pub struct Component {
    pub name: String,
    /// True density, kg/m³.
    pub density_kg_m3: f64,
    /// Conductivity, W/(m·K).
    pub conductivity_w_m_k: PropertyLaw,
    /// Specific heat, J/(kg·K).
    pub specific_heat_j_kg_k: PropertyLaw,
    /// Emissivity (= absorptivity, grey surface), 0..1.
    pub emissivity: f64,
    /// Absorption coefficient, 1/m; `None` means opaque (all radiation absorbed at the face).
    pub absorption_coefficient_per_m: Option<f64>,
}

/// What the gas of a reaction is made of.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct GasRelease {
    /// Mass fraction of the released gas that is fuel, 0..1; the rest is inert.
    pub fuel_fraction: f64,
    /// Effective heat of combustion of the fuel gas, J/kg.
    pub heat_of_combustion_j_kg: f64,
}

/// a → ν·b + (1 − ν)·gas, n-th order Arrhenius (docs/physics.md §1).
#[derive(Debug, Clone, PartialEq)]
pub struct Reaction {
    /// Index of the reactant component.
    pub reactant: usize,
    /// Index of the condensed product, if any.
    pub product: Option<usize>,
    /// Condensed yield ν, kg of product per kg of reactant, 0..1 (0 when there is no product).
    pub product_yield: f64,
    /// Pre-exponential factor A, 1/s.
    pub pre_exponential_per_s: f64,
    /// Activation energy E, J/mol.
    pub activation_energy_j_mol: f64,
    /// Reaction order n (≥ 0).
    pub order: f64,
    /// Heat of reaction, J per kg of reactant consumed, positive when endothermic.
    pub heat_of_reaction_j_kg: f64,
    pub gas: GasRelease,
}

/// Components and reactions, checked: indices valid, values physical, no reaction cycles.
#[derive(Debug, Clone, PartialEq)]
pub struct Material {
    pub components: Vec<Component>,
    pub reactions: Vec<Reaction>,
    /// Components in an order where every reactant comes before its products, so an implicit
    /// mass update can visit them once each.
    pub(crate) reaction_order: Vec<usize>,
}

impl Material {
    /// Checks the parts and builds the material. Errors name the component or reaction.
    pub fn new(components: Vec<Component>, reactions: Vec<Reaction>) -> Result<Self, PhysicsError> {
        if components.is_empty() {
            return Err(PhysicsError::invalid("material", "has no components"));
        }
        for component in &components {
            let what = |field: &str| format!("component `{}` {field}", component.name);
            require_positive(&what("density"), component.density_kg_m3)?;
            component
                .conductivity_w_m_k
                .validate(&what("conductivity"))?;
            component
                .specific_heat_j_kg_k
                .validate(&what("specific heat"))?;
            require_fraction(&what("emissivity"), component.emissivity)?;
            if let Some(kappa) = component.absorption_coefficient_per_m {
                require_positive(&what("absorption coefficient"), kappa)?;
            }
        }
        for (reaction_idx, reaction) in reactions.iter().enumerate() {
            let what = |field: &str| format!("reaction {} {field}", reaction_idx + 1);
            if reaction.reactant >= components.len() {
                return Err(PhysicsError::invalid(
                    &what("reactant"),
                    "is not a component",
                ));
            }
            if let Some(product) = reaction.product {
                if product >= components.len() {
                    return Err(PhysicsError::invalid(
                        &what("product"),
                        "is not a component",
                    ));
                }
                if product == reaction.reactant {
                    return Err(PhysicsError::invalid(
                        &what("product"),
                        "is its own reactant",
                    ));
                }
            } else if reaction.product_yield != 0.0 {
                return Err(PhysicsError::invalid(
                    &what("yield"),
                    format!(
                        "must be 0 without a product, got {}",
                        reaction.product_yield
                    ),
                ));
            }
            require_fraction(&what("yield"), reaction.product_yield)?;
            require_positive(
                &what("pre-exponential factor"),
                reaction.pre_exponential_per_s,
            )?;
            require_non_negative(&what("activation energy"), reaction.activation_energy_j_mol)?;
            require_non_negative(&what("order"), reaction.order)?;
            if !reaction.heat_of_reaction_j_kg.is_finite() {
                return Err(PhysicsError::invalid(
                    &what("heat of reaction"),
                    "must be finite",
                ));
            }
            require_fraction(&what("fuel fraction"), reaction.gas.fuel_fraction)?;
            require_non_negative(
                &what("heat of combustion"),
                reaction.gas.heat_of_combustion_j_kg,
            )?;
        }
        let reaction_order = topological_order(components.len(), &reactions)?;
        Ok(Material {
            components,
            reactions,
            reaction_order,
        })
    }

    /// Index of the component with this name.
    pub fn component_index(&self, name: &str) -> Option<usize> {
        self.components.iter().position(|c| c.name == name)
    }
}

/// Orders components so that each reactant precedes its products (Kahn's algorithm); a cycle
/// (a → b → a) is rejected because the implicit mass update could not visit it once.
fn topological_order(
    n_components: usize,
    reactions: &[Reaction],
) -> Result<Vec<usize>, PhysicsError> {
    let mut incoming = vec![0usize; n_components];
    for reaction in reactions {
        if let Some(product) = reaction.product {
            incoming[product] += 1;
        }
    }
    let mut ready: Vec<usize> = (0..n_components).filter(|&c| incoming[c] == 0).collect();
    let mut order = Vec::with_capacity(n_components);
    while let Some(component) = ready.pop() {
        order.push(component);
        for reaction in reactions.iter().filter(|r| r.reactant == component) {
            if let Some(product) = reaction.product {
                incoming[product] -= 1;
                if incoming[product] == 0 {
                    ready.push(product);
                }
            }
        }
    }
    if order.len() != n_components {
        return Err(PhysicsError::invalid(
            "reactions",
            "form a cycle (a component is, through its products, its own reactant)",
        ));
    }
    Ok(order)
}

pub(crate) fn require_positive(what: &str, value: f64) -> Result<(), PhysicsError> {
    if value > 0.0 && value.is_finite() {
        Ok(())
    } else {
        Err(PhysicsError::invalid(
            what,
            format!("must be > 0, got {value}"),
        ))
    }
}

pub(crate) fn require_non_negative(what: &str, value: f64) -> Result<(), PhysicsError> {
    if value >= 0.0 && value.is_finite() {
        Ok(())
    } else {
        Err(PhysicsError::invalid(
            what,
            format!("must be ≥ 0, got {value}"),
        ))
    }
}

pub(crate) fn require_fraction(what: &str, value: f64) -> Result<(), PhysicsError> {
    if (0.0..=1.0).contains(&value) {
        Ok(())
    } else {
        Err(PhysicsError::invalid(
            what,
            format!("must be within 0..1, got {value}"),
        ))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn inert(name: &str) -> Component {
        Component {
            name: name.into(),
            density_kg_m3: 1000.0,
            conductivity_w_m_k: PropertyLaw::constant(0.2),
            specific_heat_j_kg_k: PropertyLaw::constant(1500.0),
            emissivity: 0.9,
            absorption_coefficient_per_m: None,
        }
    }

    fn reaction(reactant: usize, product: Option<usize>, product_yield: f64) -> Reaction {
        Reaction {
            reactant,
            product,
            product_yield,
            pre_exponential_per_s: 1e10,
            activation_energy_j_mol: 1.5e5,
            order: 1.0,
            heat_of_reaction_j_kg: 1e5,
            gas: GasRelease {
                fuel_fraction: 1.0,
                heat_of_combustion_j_kg: 2e7,
            },
        }
    }

    #[test]
    fn power_law_is_the_reference_value_at_the_reference_temperature() {
        let law = PropertyLaw::PowerLaw {
            value_at_reference: 2.0,
            reference_temperature_k: 300.0,
            exponent: 0.5,
        };
        assert_eq!(law.at(300.0), 2.0);
        assert!((law.at(1200.0) - 4.0).abs() < 1e-12);
    }

    #[test]
    fn table_interpolates_linearly_and_is_constant_outside() {
        let law = PropertyLaw::Table(vec![(300.0, 1.0), (500.0, 3.0)]);
        assert_eq!(law.at(200.0), 1.0);
        assert!((law.at(400.0) - 2.0).abs() < 1e-12);
        assert_eq!(law.at(900.0), 3.0);
    }

    #[test]
    fn integral_of_a_linear_table_is_the_trapezoid_area() {
        let law = PropertyLaw::Table(vec![(300.0, 1000.0), (700.0, 2000.0)]);
        assert!((law.integral(300.0, 700.0) - 400.0 * 1500.0).abs() < 1e-6);
    }

    #[test]
    fn chained_reactions_are_ordered_reactant_first() {
        let material = Material::new(
            vec![inert("c"), inert("b"), inert("a")],
            vec![reaction(1, Some(0), 0.5), reaction(2, Some(1), 0.5)],
        )
        .unwrap();
        let position = |c: usize| {
            material
                .reaction_order
                .iter()
                .position(|&x| x == c)
                .unwrap()
        };
        assert!(position(2) < position(1) && position(1) < position(0));
    }

    #[test]
    fn a_reaction_cycle_is_rejected() {
        let result = Material::new(
            vec![inert("a"), inert("b")],
            vec![reaction(0, Some(1), 0.5), reaction(1, Some(0), 0.5)],
        );
        assert!(matches!(result, Err(PhysicsError::Invalid { .. })));
    }

    #[test]
    fn yield_outside_zero_to_one_is_rejected() {
        let result = Material::new(
            vec![inert("a"), inert("b")],
            vec![reaction(0, Some(1), 1.5)],
        );
        let message = result.unwrap_err().to_string();
        assert!(
            message.contains("yield") && message.contains("1.5"),
            "{message}"
        );
    }

    #[test]
    fn negative_density_is_rejected() {
        let mut component = inert("a");
        component.density_kg_m3 = -5.0;
        let message = Material::new(vec![component], vec![])
            .unwrap_err()
            .to_string();
        assert!(
            message.contains("density") && message.contains("-5"),
            "{message}"
        );
    }
}
