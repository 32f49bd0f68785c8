//! Property-based tests (proptest) over random but sane parameters: every run returns either
//! finite outputs that conserve mass, or a typed error, never a panic or NaN (issue 2).

use emberfit::physics::material::{Component, GasRelease, Material, PropertyLaw, Reaction};
use emberfit::physics::simulate;
use proptest::prelude::*;

use crate::util::{cone, inert_material, layer};

#[allow(clippy::too_many_arguments)]
fn material(
    conductivity: f64,
    density: f64,
    specific_heat: f64,
    exponent: f64,
    log10_a: f64,
    e_kj_mol: f64,
    heat_kj_kg: f64,
    char_yield: f64,
    absorption: Option<f64>,
) -> Material {
    let component = |name: &str, density_kg_m3: f64| Component {
        name: name.into(),
        density_kg_m3,
        conductivity_w_m_k: PropertyLaw::PowerLaw {
            value_at_reference: conductivity,
            reference_temperature_k: 300.0,
            exponent,
        },
        specific_heat_j_kg_k: PropertyLaw::constant(specific_heat),
        emissivity: 0.9,
        absorption_coefficient_per_m: absorption,
    };
    let has_char = char_yield > 0.05;
    let mut components = vec![component("virgin", density)];
    if has_char {
        components.push(component("char", density * char_yield));
    }
    Material::new(
        components,
        vec![Reaction {
            reactant: 0,
            product: has_char.then_some(1),
            product_yield: if has_char { char_yield } else { 0.0 },
            pre_exponential_per_s: 10f64.powf(log10_a),
            activation_energy_j_mol: e_kj_mol * 1e3,
            order: 1.0,
            heat_of_reaction_j_kg: heat_kj_kg * 1e3,
            gas: GasRelease {
                fuel_fraction: 1.0,
                heat_of_combustion_j_kg: 2e7,
            },
        }],
    )
    .expect("sane parameters make a valid material")
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 40, ..ProptestConfig::default() })]
    #[test]
    fn every_run_is_finite_and_conserves_mass_or_is_a_typed_error(
        conductivity in 0.05f64..1.0,
        density in 200.0f64..2500.0,
        specific_heat in 500.0f64..3000.0,
        exponent in -1.0f64..1.0,
        log10_a in 5.0f64..16.0,
        e_kj_mol in 80.0f64..250.0,
        heat_kj_kg in -500.0f64..3000.0,
        char_yield in 0.0f64..0.5,
        absorption in proptest::option::of(100.0f64..1e5),
        irradiance_kw_m2 in 0.0f64..100.0,
        thickness_mm in 0.5f64..20.0,
        n_cells in 3usize..40,
        with_backing in any::<bool>(),
    ) {
        let specimen = layer(
            material(conductivity, density, specific_heat, exponent, log10_a, e_kj_mol, heat_kj_kg, char_yield, absorption),
            thickness_mm * 1e-3,
            n_cells,
            true,
        );
        let mut layers = vec![specimen];
        if with_backing {
            layers.push(layer(inert_material(0.08, 300.0, 1000.0), 0.02, 10, false));
        }
        match simulate(&cone(layers, irradiance_kw_m2 * 1e3, 300.0)) {
            Ok(history) => {
                for sample in &history.samples {
                    prop_assert!(sample.mass_kg_m2.is_finite() && sample.mass_kg_m2 >= 0.0);
                    prop_assert!(sample.mlr_kg_m2_s.is_finite() && sample.hrr_w_m2.is_finite());
                    prop_assert!(sample.surface_temperature_k.is_finite() && sample.surface_temperature_k > 0.0);
                    prop_assert!(sample.back_temperature_k.is_finite() && sample.thickness_m.is_finite());
                }
                prop_assert!(history.summary.mass.relative_residual() < 1e-9);
                prop_assert!(history.summary.energy.relative_residual() < 1e-6);
            }
            Err(err) => prop_assert!(!err.to_string().is_empty()),
        }
    }
}
