//! Builders shared by the integration tests: small materials and scenarios in SI units.

use emberfit::physics::material::{Component, GasRelease, Material, PropertyLaw, Reaction};
use emberfit::physics::scenario::{
    BackFace, Exposure, Flameout, IgnitionRule, Layer, Numerics, Scenario, Schedule,
};

pub const T0_K: f64 = 300.0;

/// One inert, opaque component with constant properties.
pub fn inert_material(
    conductivity_w_m_k: f64,
    density_kg_m3: f64,
    specific_heat_j_kg_k: f64,
) -> Material {
    Material::new(
        vec![Component {
            name: "solid".into(),
            density_kg_m3,
            conductivity_w_m_k: PropertyLaw::constant(conductivity_w_m_k),
            specific_heat_j_kg_k: PropertyLaw::constant(specific_heat_j_kg_k),
            emissivity: 1.0,
            absorption_coefficient_per_m: None,
        }],
        vec![],
    )
    .expect("valid inert material")
}

/// A one-step non-charring solid: virgin → gas (all fuel).
pub fn gasifying_material(
    heat_of_reaction_j_kg: f64,
    absorption_coefficient_per_m: Option<f64>,
) -> Material {
    Material::new(
        vec![Component {
            name: "virgin".into(),
            density_kg_m3: 1200.0,
            conductivity_w_m_k: PropertyLaw::constant(0.2),
            specific_heat_j_kg_k: PropertyLaw::constant(1500.0),
            emissivity: 0.95,
            absorption_coefficient_per_m,
        }],
        vec![Reaction {
            reactant: 0,
            product: None,
            product_yield: 0.0,
            pre_exponential_per_s: 8.5e12,
            activation_energy_j_mol: 1.88e5,
            order: 1.0,
            heat_of_reaction_j_kg,
            gas: GasRelease {
                fuel_fraction: 1.0,
                heat_of_combustion_j_kg: 2.4e7,
            },
        }],
    )
    .expect("valid gasifying material")
}

pub fn layer(material: Material, thickness_m: f64, n_cells: usize, is_specimen: bool) -> Layer {
    let n_components = material.components.len();
    let mut fractions = vec![0.0; n_components];
    fractions[0] = 1.0;
    Layer {
        name: if is_specimen {
            "specimen".into()
        } else {
            "backing".into()
        },
        material,
        thickness_m,
        n_cells,
        initial_mass_fractions: fractions,
        is_specimen,
        contact_resistance_m2_k_w: 0.0,
        // Uniform cells: the verification tests set their grids explicitly.
        cell_growth: 1.0,
    }
}

/// Constant irradiance, no losses at all (no re-radiation, no convection), insulated back,
/// no ignition: the setting of the analytical solutions.
pub fn loss_free(layers: Vec<Layer>, irradiance_w_m2: f64, duration_s: f64) -> Scenario {
    Scenario {
        layers,
        exposure: Exposure {
            irradiance_w_m2: Schedule::Constant(irradiance_w_m2),
            ambient_temperature_k: T0_K,
            initial_temperature_k: T0_K,
            convective_coefficient_w_m2_k: 0.0,
            flaming_convective_coefficient_w_m2_k: 0.0,
            flame_heat_flux_w_m2: 0.0,
            flame_blockage: 0.0,
            has_reradiation: false,
        },
        ignition: IgnitionRule::Never,
        flameout: Flameout {
            threshold_fuel_mass_flux_kg_m2_s: 0.0,
            may_reignite: false,
        },
        back: BackFace::Insulated,
        duration_s,
        output_interval_s: 1.0,
        probes: vec![],
        numerics: Numerics::default(),
    }
}

/// A cone-like exposure: re-radiation, h = 10 W/(m²·K), ignition at 2 g/(m²·s).
pub fn cone(layers: Vec<Layer>, irradiance_w_m2: f64, duration_s: f64) -> Scenario {
    let mut scenario = loss_free(layers, irradiance_w_m2, duration_s);
    scenario.exposure.has_reradiation = true;
    scenario.exposure.convective_coefficient_w_m2_k = 10.0;
    scenario.exposure.flaming_convective_coefficient_w_m2_k = 10.0;
    scenario.exposure.flame_heat_flux_w_m2 = 15e3;
    scenario.ignition = IgnitionRule::CriticalFuelMassFlux(2e-3);
    scenario.flameout.threshold_fuel_mass_flux_kg_m2_s = 2e-3;
    scenario
}

/// A charring solid with moisture: water → vapour (inert gas), virgin → 0.25 char + fuel gas.
/// Char density is 0.25 of virgin, so a charring cell keeps its thickness (docs/physics.md §1).
/// Kinetic and thermal values are typical of wood, quoted from memory; latent heat of water
/// 2.26 MJ/kg (steam tables).
pub fn charring_material() -> Material {
    let component = |name: &str, density_kg_m3: f64, k: f64, c: f64, emissivity: f64| Component {
        name: name.into(),
        density_kg_m3,
        conductivity_w_m_k: PropertyLaw::constant(k),
        specific_heat_j_kg_k: PropertyLaw::PowerLaw {
            value_at_reference: c,
            reference_temperature_k: 300.0,
            exponent: 0.5,
        },
        emissivity,
        absorption_coefficient_per_m: None,
    };
    Material::new(
        vec![
            component("virgin", 500.0, 0.15, 1500.0, 0.85),
            component("water", 1000.0, 0.6, 4180.0, 0.9),
            component("char", 125.0, 0.08, 1100.0, 0.95),
        ],
        vec![
            Reaction {
                reactant: 1,
                product: None,
                product_yield: 0.0,
                pre_exponential_per_s: 4.3e3,
                activation_energy_j_mol: 4.38e4,
                order: 1.0,
                heat_of_reaction_j_kg: 2.26e6,
                gas: GasRelease {
                    fuel_fraction: 0.0,
                    heat_of_combustion_j_kg: 0.0,
                },
            },
            Reaction {
                reactant: 0,
                product: Some(2),
                product_yield: 0.25,
                pre_exponential_per_s: 1.0e10,
                activation_energy_j_mol: 1.5e5,
                order: 1.0,
                heat_of_reaction_j_kg: 3.0e5,
                gas: GasRelease {
                    fuel_fraction: 1.0,
                    heat_of_combustion_j_kg: 1.3e7,
                },
            },
        ],
    )
    .expect("valid charring material")
}

/// 10 % moisture by mass in the charring material's first layer.
pub fn wet(mut layer: Layer) -> Layer {
    layer.initial_mass_fractions = vec![0.9, 0.1, 0.0];
    layer
}

/// The folder of the open PMMA data (MaCFP condensed-phase working group, PMMA calibration
/// data, MIT licence; see PROVENANCE.md inside it), named by `EMBERFIT_REFERENCE_DATA`.
/// Without it a test says so and is skipped, except under `CI=true`, where a missing or
/// unreadable folder fails the test (CI sets the path; a silent skip would pass untested).
pub fn reference_data(test_name: &str) -> Option<std::path::PathBuf> {
    let in_ci = std::env::var("CI").is_ok_and(|v| v == "true");
    match std::env::var_os("EMBERFIT_REFERENCE_DATA") {
        Some(dir) => {
            let dir = std::path::PathBuf::from(dir);
            assert!(
                !in_ci || dir.join("tests.toml").is_file(),
                "{test_name}: EMBERFIT_REFERENCE_DATA = {} has no tests.toml (CI=true)",
                dir.display()
            );
            Some(dir)
        }
        None if in_ci => {
            panic!("{test_name}: EMBERFIT_REFERENCE_DATA is not set, and CI=true needs the data")
        }
        None => {
            eprintln!("{test_name}: skipped, EMBERFIT_REFERENCE_DATA is not set");
            None
        }
    }
}

/// Whether tmux is on this machine, for the tests that drive the interface in it. Without it a
/// test says so and is skipped, except under `CI=true` (.ci/run installs tmux), where a missing
/// tmux fails the test.
pub fn tmux_available(test_name: &str) -> bool {
    let found = std::process::Command::new("tmux")
        .arg("-V")
        .output()
        .is_ok_and(|o| o.status.success());
    if !found {
        assert!(
            !std::env::var("CI").is_ok_and(|v| v == "true"),
            "{test_name}: tmux is not installed, and CI=true: the test must run"
        );
        eprintln!("{test_name}: skipped, tmux is not installed (the CI script installs it)");
    }
    found
}
