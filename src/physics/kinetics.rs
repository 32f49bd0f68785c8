//! n-th order Arrhenius rates and the implicit (backward Euler) update of component masses at a
//! given temperature (docs/physics.md §1 "Reactions"). Shared by the 1-D solver and the 0-D model.

use super::material::Material;

/// Molar gas constant, J/(mol·K) (CODATA 2018 exact value, as docs/physics.md §1 gives it).
pub const GAS_CONSTANT_J_MOL_K: f64 = 8.314462618;

/// Arrhenius rate constant k = A·exp(−E/(R·T)), 1/s.
#[inline]
pub fn rate_constant_per_s(
    pre_exponential_per_s: f64,
    activation_energy_j_mol: f64,
    temperature_k: f64,
) -> f64 {
    pre_exponential_per_s
        * (-activation_energy_j_mol / (GAS_CONSTANT_J_MOL_K * temperature_k)).exp()
}

/// Reaction rate ω = k·m·(m/m₀)^(n−1), kg/(m²·s) (or kg/s per kg when masses are normalised),
/// with the limit m → 0⁺ for the zero-order case.
#[inline]
pub fn reaction_rate(rate_constant_per_s: f64, mass: f64, reference_mass: f64, order: f64) -> f64 {
    if order == 1.0 {
        rate_constant_per_s * mass
    } else if order == 0.0 {
        if mass > 0.0 {
            rate_constant_per_s * reference_mass
        } else {
            0.0
        }
    } else if mass <= 0.0 {
        0.0
    } else {
        rate_constant_per_s * mass * (mass / reference_mass).powf(order - 1.0)
    }
}

/// Mass budget of one implicit step of the reaction network in one cell (or one 0-D sample).
#[derive(Debug, Clone, Default)]
pub struct StepMasses {
    /// Component masses at the end of the step.
    pub masses: Vec<f64>,
    /// Mass of reactant consumed by each reaction during the step.
    pub consumed: Vec<f64>,
    /// Per reaction, the fraction of its reactant's available mass left at the end of the
    /// step (1 when none was available). For a first-order reactant this is 1/(1 + Δt·Σk), the
    /// factor by which the step's consumption saturates: ∂(consumed)/∂k = consumed/k · this,
    /// which the 1-D solver uses for the temperature derivative of the reaction heat.
    pub remaining_fraction: Vec<f64>,
}

/// Advances component masses over `dt_s` at the rate constants given (one per reaction), by
/// backward Euler solved exactly per component: components are visited reactant-first, so each
/// is one monotone scalar equation, solved by safeguarded Newton iteration.
///
/// Mass is conserved to rounding by construction: each reaction's consumption is removed from
/// its reactant and split into product (ν) and gas (1 − ν).
pub fn advance_masses(
    material: &Material,
    rate_constants_per_s: &[f64],
    old_masses: &[f64],
    reference_mass: f64,
    dt_s: f64,
    out: &mut StepMasses,
) {
    let n_components = material.components.len();
    out.masses.clear();
    out.masses.resize(n_components, 0.0);
    out.consumed.clear();
    out.consumed.resize(material.reactions.len(), 0.0);
    out.remaining_fraction.clear();
    out.remaining_fraction.resize(material.reactions.len(), 1.0);
    // The common case, one first-order reaction per reactant and no reactant made by
    // another reaction: the closed form without the general bookkeeping (the same
    // operations, so the same bits, as the general path below).
    if is_simple_first_order(material) {
        advance_simple_first_order(
            material,
            rate_constants_per_s,
            old_masses,
            dt_s,
            &mut out.masses,
            &mut out.consumed,
            &mut out.remaining_fraction,
        );
        return;
    }
    // Mass produced into each component during the step, filled as reactants are solved.
    let mut produced = [0.0f64; 16];
    let mut produced_vec;
    let produced: &mut [f64] = if n_components <= produced.len() {
        &mut produced[..n_components]
    } else {
        produced_vec = vec![0.0; n_components];
        &mut produced_vec
    };
    for &component in &material.reaction_order {
        let available = old_masses[component] + produced[component];
        let consuming = || {
            material
                .reactions
                .iter()
                .enumerate()
                .filter(move |(_, r)| r.reactant == component)
        };
        if consuming().next().is_none() || available <= 0.0 {
            out.masses[component] = available.max(0.0);
            continue;
        }
        let new_mass = solve_component_mass(
            material,
            component,
            rate_constants_per_s,
            available,
            reference_mass,
            dt_s,
        );
        let mut total_consumed = 0.0;
        for (reaction_idx, reaction) in consuming() {
            let rate = reaction_rate(
                rate_constants_per_s[reaction_idx],
                new_mass,
                reference_mass,
                reaction.order,
            );
            out.consumed[reaction_idx] = rate * dt_s;
            total_consumed += rate * dt_s;
        }
        if total_consumed > available {
            // Zero-order reactions can ask for more than is left: share out what there is.
            let scale = available / total_consumed;
            for (reaction_idx, _) in consuming() {
                out.consumed[reaction_idx] *= scale;
            }
            total_consumed = available;
        }
        out.masses[component] = (available - total_consumed).max(0.0);
        let remaining = out.masses[component] / available;
        for (reaction_idx, _) in consuming() {
            out.remaining_fraction[reaction_idx] = remaining;
        }
        for (reaction_idx, reaction) in consuming() {
            if let Some(product) = reaction.product {
                produced[product] += reaction.product_yield * out.consumed[reaction_idx];
            }
        }
    }
}

/// The closed form of `advance_masses` for a material where `is_simple_first_order` holds,
/// into slices the caller owns (one entry per component in `masses`, per reaction in
/// `consumed` and `remaining_fraction`), which must hold zeros, zeros and ones on entry:
/// m = S/(1 + Δt·k) per reactant, what it loses split into product and gas. The 1-D solver
/// calls it directly for such layers (checked once per run), so a cell's evaluation skips the
/// check and the work vectors.
// Always inlined: a call of its own costs more than its loops for one or two reactions.
#[inline(always)]
pub(crate) fn advance_simple_first_order(
    material: &Material,
    rate_constants_per_s: &[f64],
    old_masses: &[f64],
    dt_s: f64,
    masses: &mut [f64],
    consumed_out: &mut [f64],
    remaining_fraction: &mut [f64],
) {
    for (reaction_idx, reaction) in material.reactions.iter().enumerate() {
        let available = old_masses[reaction.reactant];
        if available <= 0.0 {
            continue;
        }
        let k = rate_constants_per_s[reaction_idx];
        let new_mass = available / (1.0 + dt_s * k);
        let mut consumed = k * new_mass * dt_s;
        if consumed > available {
            consumed = available;
        }
        consumed_out[reaction_idx] = consumed;
        masses[reaction.reactant] = (available - consumed).max(0.0);
        remaining_fraction[reaction_idx] = masses[reaction.reactant] / available;
    }
    for (component, mass) in masses.iter_mut().enumerate() {
        if !material.reactions.iter().any(|r| r.reactant == component) {
            *mass = old_masses[component].max(0.0);
        }
    }
    for (reaction_idx, reaction) in material.reactions.iter().enumerate() {
        if let Some(product) = reaction.product {
            masses[product] += reaction.product_yield * consumed_out[reaction_idx];
        }
    }
}

/// First-order reactions only, each component the reactant of at most one and the product of
/// at most one, and no product a reactant (checked per call: a fit may change an order).
pub(crate) fn is_simple_first_order(material: &Material) -> bool {
    let reactions = &material.reactions;
    reactions.iter().enumerate().all(|(idx, r)| {
        r.order == 1.0
            && reactions.iter().enumerate().all(|(other_idx, o)| {
                r.product != Some(o.reactant)
                    && (other_idx == idx
                        || (r.reactant != o.reactant
                            && (r.product.is_none() || r.product != o.product)))
            })
    })
}

/// Solves m − S + dt·Σ_r ω_r(m) = 0 for m in [0, S] (S the available mass).
fn solve_component_mass(
    material: &Material,
    component: usize,
    rate_constants_per_s: &[f64],
    available: f64,
    reference_mass: f64,
    dt_s: f64,
) -> f64 {
    let consuming = || {
        material
            .reactions
            .iter()
            .enumerate()
            .filter(|(_, r)| r.reactant == component)
    };
    if consuming().all(|(_, r)| r.order == 1.0) {
        let total_k: f64 = consuming().map(|(idx, _)| rate_constants_per_s[idx]).sum();
        return available / (1.0 + dt_s * total_k);
    }
    let residual = |mass: f64| -> (f64, f64) {
        let mut value = mass - available;
        let mut slope = 1.0;
        for (idx, reaction) in consuming() {
            let k = rate_constants_per_s[idx];
            value += dt_s * reaction_rate(k, mass, reference_mass, reaction.order);
            if mass > 0.0 && reaction.order != 0.0 {
                slope +=
                    dt_s * reaction.order * reaction_rate(k, mass, reference_mass, reaction.order)
                        / mass;
            }
        }
        (value, slope)
    };
    let (mut lower, mut upper) = (0.0, available);
    let mut mass = available;
    for _ in 0..100 {
        let (value, slope) = residual(mass);
        if value.abs() <= 1e-15 * available.max(reference_mass) {
            return mass;
        }
        if value > 0.0 {
            upper = mass;
        } else {
            lower = mass;
        }
        let newton = mass - value / slope;
        mass = if newton > lower && newton < upper {
            newton
        } else {
            0.5 * (lower + upper)
        };
        if upper - lower <= 1e-16 * available {
            break;
        }
    }
    mass
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::physics::material::{Component, GasRelease, PropertyLaw, Reaction};

    fn component(name: &str) -> Component {
        Component {
            name: name.into(),
            density_kg_m3: 1000.0,
            conductivity_w_m_k: PropertyLaw::constant(0.2),
            specific_heat_j_kg_k: PropertyLaw::constant(1500.0),
            emissivity: 0.9,
            absorption_coefficient_per_m: None,
        }
    }

    fn reaction(
        reactant: usize,
        product: Option<usize>,
        product_yield: f64,
        order: f64,
    ) -> Reaction {
        Reaction {
            reactant,
            product,
            product_yield,
            pre_exponential_per_s: 1.0,
            activation_energy_j_mol: 0.0,
            order,
            heat_of_reaction_j_kg: 0.0,
            gas: GasRelease {
                fuel_fraction: 1.0,
                heat_of_combustion_j_kg: 0.0,
            },
        }
    }

    #[test]
    fn first_order_step_is_the_backward_euler_value() {
        let material =
            Material::new(vec![component("a")], vec![reaction(0, None, 0.0, 1.0)]).unwrap();
        let mut out = StepMasses::default();
        advance_masses(&material, &[2.0], &[1.0], 1.0, 0.5, &mut out);
        assert!((out.masses[0] - 0.5).abs() < 1e-15);
        assert!((out.consumed[0] - 0.5).abs() < 1e-15);
    }

    #[test]
    fn second_order_step_solves_the_implicit_quadratic() {
        // m − 1 + dt·k·m² = 0 with dt·k = 1: m = (√5 − 1)/2.
        let material =
            Material::new(vec![component("a")], vec![reaction(0, None, 0.0, 2.0)]).unwrap();
        let mut out = StepMasses::default();
        advance_masses(&material, &[1.0], &[1.0], 1.0, 1.0, &mut out);
        assert!((out.masses[0] - (5f64.sqrt() - 1.0) / 2.0).abs() < 1e-12);
    }

    #[test]
    fn chained_network_conserves_mass() {
        let material = Material::new(
            vec![component("a"), component("b"), component("c")],
            vec![
                reaction(0, Some(1), 0.6, 1.0),
                reaction(1, Some(2), 0.5, 1.5),
                reaction(0, None, 0.0, 0.5),
            ],
        )
        .unwrap();
        let mut out = StepMasses::default();
        let old = [0.7, 0.2, 0.1];
        advance_masses(&material, &[0.3, 2.0, 0.1], &old, 1.0, 0.8, &mut out);
        let gas: f64 = material
            .reactions
            .iter()
            .zip(&out.consumed)
            .map(|(r, c)| (1.0 - r.product_yield) * c)
            .sum();
        let total: f64 = out.masses.iter().sum::<f64>() + gas;
        assert!((total - 1.0).abs() < 1e-15, "{total}");
    }

    #[test]
    fn zero_order_reaction_stops_at_zero_mass() {
        let material =
            Material::new(vec![component("a")], vec![reaction(0, None, 0.0, 0.0)]).unwrap();
        let mut out = StepMasses::default();
        advance_masses(&material, &[10.0], &[0.3], 1.0, 1.0, &mut out);
        assert_eq!(out.masses[0], 0.0);
        assert!((out.consumed[0] - 0.3).abs() < 1e-15);
    }
}
