//! Free parameters: where each lives in the material model or scenario (a readable path), its
//! bounds and scale, start value and prior, and the map between the optimiser's unit cube and
//! the file's units.

use crate::physics::kinetics::GAS_CONSTANT_J_MOL_K;
use crate::physics::material::{Material, PropertyLaw};
use crate::physics::scenario::Scenario;

/// How the optimiser moves along a parameter.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Scale {
    Linear,
    /// Uniform in log10 (pre-exponential factors, absorption coefficients).
    Log,
}

/// A prior belief about a parameter, turning the fit into a maximum a posteriori estimate.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Prior {
    /// Normal with this mean and standard deviation, in the file's units.
    Normal { mean: f64, standard_deviation: f64 },
    /// Log-normal: log10 of the value is normal around log10(median) with this deviation.
    LogNormal {
        median: f64,
        standard_deviation_log10: f64,
    },
}

impl Prior {
    /// The prior's contribution to the objective, ((x − μ)/σ)² (−2 ln p up to a constant).
    pub fn penalty(&self, value: f64) -> f64 {
        self.residual(value).powi(2)
    }

    /// The standardised residual (x − μ)/σ, one extra row of the residual vector.
    pub fn residual(&self, value: f64) -> f64 {
        match *self {
            Prior::Normal {
                mean,
                standard_deviation,
            } => (value - mean) / standard_deviation,
            Prior::LogNormal {
                median,
                standard_deviation_log10,
            } => (value.max(f64::MIN_POSITIVE).log10() - median.log10()) / standard_deviation_log10,
        }
    }
}

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
/// g/(m²·s)); `apply` converts to SI.
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
    ConvectiveCoefficient,
    CriticalFuelMassFlux,
}

impl Target {
    /// Whether this target derives A from E and must be applied after the direct targets.
    pub fn is_derived(&self) -> bool {
        matches!(
            self,
            Target::PeakTemperature { .. } | Target::Log10RateAt { .. }
        )
    }

    /// Whether this target lives in the cone scenario (exposure and ignition values), which a
    /// milligram-scale case does not have.
    pub fn is_scenario_target(&self) -> bool {
        matches!(
            self,
            Target::FlameHeatFlux | Target::ConvectiveCoefficient | Target::CriticalFuelMassFlux
        )
    }

    /// Sets `value` (file units) into the material or the scenario.
    pub fn apply(&self, value: f64, material: &mut Material, scenario: &mut Scenario) {
        match self {
            Target::FlameHeatFlux => scenario.exposure.flame_heat_flux_w_m2 = value * 1e3,
            Target::ConvectiveCoefficient => {
                scenario.exposure.convective_coefficient_w_m2_k = value;
                scenario.exposure.flaming_convective_coefficient_w_m2_k = value;
            }
            Target::CriticalFuelMassFlux => {
                if let crate::physics::scenario::IgnitionRule::CriticalFuelMassFlux(flux) =
                    &mut scenario.ignition
                {
                    *flux = value * 1e-3;
                }
                scenario.flameout.threshold_fuel_mass_flux_kg_m2_s = value * 1e-3;
            }
            _ => self.apply_to_material(value, material),
        }
    }

    /// Sets `value` (file units) into the material; a scenario target is left alone (the
    /// milligram scale has no exposure to set).
    pub fn apply_to_material(&self, value: f64, material: &mut Material) {
        fn set_property(
            law: &mut PropertyLaw,
            part: PropertyPart,
            value: f64,
            original: &PropertyLaw,
        ) {
            match (part, law) {
                (
                    PropertyPart::Value,
                    PropertyLaw::PowerLaw {
                        value_at_reference, ..
                    },
                ) => *value_at_reference = value,
                (PropertyPart::Exponent, PropertyLaw::PowerLaw { exponent, .. }) => {
                    *exponent = value
                }
                (PropertyPart::Factor, law) => {
                    *law = match original {
                        PropertyLaw::PowerLaw {
                            value_at_reference,
                            reference_temperature_k,
                            exponent,
                        } => PropertyLaw::PowerLaw {
                            value_at_reference: value_at_reference * value,
                            reference_temperature_k: *reference_temperature_k,
                            exponent: *exponent,
                        },
                        PropertyLaw::Table(points) => PropertyLaw::Table(
                            points.iter().map(|&(t, v)| (t, v * value)).collect(),
                        ),
                    }
                }
                // Paths are checked when the job is read; a table has no value or exponent.
                (_, PropertyLaw::Table(_)) => {}
            }
        }
        match self {
            Target::Density { component } => material.components[*component].density_kg_m3 = value,
            Target::Conductivity { component, part } => {
                let original = material.components[*component].conductivity_w_m_k.clone();
                set_property(
                    &mut material.components[*component].conductivity_w_m_k,
                    *part,
                    value,
                    &original,
                )
            }
            Target::SpecificHeat { component, part } => {
                let original = material.components[*component].specific_heat_j_kg_k.clone();
                set_property(
                    &mut material.components[*component].specific_heat_j_kg_k,
                    *part,
                    value,
                    &original,
                )
            }
            Target::Emissivity { component } => material.components[*component].emissivity = value,
            Target::Absorption { component } => {
                material.components[*component].absorption_coefficient_per_m = Some(value)
            }
            Target::PreExponential { reaction } => {
                material.reactions[*reaction].pre_exponential_per_s = value
            }
            Target::ActivationEnergy { reaction } => {
                material.reactions[*reaction].activation_energy_j_mol = value * 1e3
            }
            Target::Order { reaction } => material.reactions[*reaction].order = value,
            Target::HeatOfReaction { reaction } => {
                material.reactions[*reaction].heat_of_reaction_j_kg = value * 1e3
            }
            Target::Yield { reaction } => material.reactions[*reaction].product_yield = value,
            Target::FuelFraction { reaction } => {
                material.reactions[*reaction].gas.fuel_fraction = value
            }
            Target::HeatOfCombustion { reactions } => {
                for &reaction in reactions {
                    material.reactions[reaction].gas.heat_of_combustion_j_kg = value * 1e6;
                }
            }
            Target::PeakTemperature {
                reaction,
                heating_rate_k_s,
            } => {
                let r = &mut material.reactions[*reaction];
                r.pre_exponential_per_s =
                    pre_exponential_from_peak(r.activation_energy_j_mol, value, *heating_rate_k_s);
            }
            Target::Log10RateAt {
                reaction,
                temperature_k,
            } => {
                let r = &mut material.reactions[*reaction];
                r.pre_exponential_per_s = 10f64.powf(value)
                    * (r.activation_energy_j_mol / (GAS_CONSTANT_J_MOL_K * temperature_k)).exp();
            }
            Target::FlameHeatFlux
            | Target::ConvectiveCoefficient
            | Target::CriticalFuelMassFlux => {}
        }
    }

    /// Reads the value this target has in a material/scenario, in file units (the default
    /// start value).
    pub fn read(&self, material: &Material, scenario: &Scenario) -> f64 {
        match self {
            Target::FlameHeatFlux => scenario.exposure.flame_heat_flux_w_m2 * 1e-3,
            Target::ConvectiveCoefficient => scenario.exposure.convective_coefficient_w_m2_k,
            Target::CriticalFuelMassFlux => {
                scenario.flameout.threshold_fuel_mass_flux_kg_m2_s * 1e3
            }
            _ => self.read_material(material).unwrap_or(f64::NAN),
        }
    }

    /// Reads the value this target has in a material, in file units; `None` for a scenario
    /// target.
    pub fn read_material(&self, material: &Material) -> Option<f64> {
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
        Some(match self {
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
                material.reactions[*reaction].activation_energy_j_mol * 1e-3
            }
            Target::Order { reaction } => material.reactions[*reaction].order,
            Target::HeatOfReaction { reaction } => {
                material.reactions[*reaction].heat_of_reaction_j_kg * 1e-3
            }
            Target::Yield { reaction } => material.reactions[*reaction].product_yield,
            Target::FuelFraction { reaction } => material.reactions[*reaction].gas.fuel_fraction,
            Target::HeatOfCombustion { reactions } => reactions.first().map_or(0.0, |&r| {
                material.reactions[r].gas.heat_of_combustion_j_kg * 1e-6
            }),
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
            | Target::ConvectiveCoefficient
            | Target::CriticalFuelMassFlux => return None,
        })
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

/// A free parameter of the fit.
#[derive(Debug, Clone, PartialEq)]
pub struct FreeParameter {
    /// The path as written in the job (e.g. `component.virgin.conductivity_w_m_k`).
    pub name: String,
    /// Unit of the value, as in the file key (for screens and reports).
    pub unit: String,
    pub lower: f64,
    pub upper: f64,
    pub scale: Scale,
    pub start: f64,
    pub prior: Option<Prior>,
    /// Where the value goes: the path itself and any tied paths.
    pub targets: Vec<Target>,
}

impl FreeParameter {
    /// File-unit value of unit-cube coordinate `u` (clamped to 0..1).
    pub fn from_unit(&self, u: f64) -> f64 {
        let u = u.clamp(0.0, 1.0);
        match self.scale {
            Scale::Linear => self.lower + u * (self.upper - self.lower),
            Scale::Log => {
                10f64.powf(self.lower.log10() + u * (self.upper.log10() - self.lower.log10()))
            }
        }
    }

    /// Unit-cube coordinate of a file-unit value.
    pub fn to_unit(&self, value: f64) -> f64 {
        match self.scale {
            Scale::Linear => (value - self.lower) / (self.upper - self.lower),
            Scale::Log => {
                (value.log10() - self.lower.log10()) / (self.upper.log10() - self.lower.log10())
            }
        }
    }

    /// The coordinate in which intervals are computed: the value, or log10 of it.
    pub fn to_fit_space(&self, value: f64) -> f64 {
        match self.scale {
            Scale::Linear => value,
            Scale::Log => value.log10(),
        }
    }

    pub fn from_fit_space(&self, coordinate: f64) -> f64 {
        match self.scale {
            Scale::Linear => coordinate,
            Scale::Log => 10f64.powf(coordinate),
        }
    }

    /// Width of the bounds in fit space.
    pub fn fit_space_range(&self) -> f64 {
        self.to_fit_space(self.upper) - self.to_fit_space(self.lower)
    }
}

/// Every target of every parameter with its value, in the order they must be applied: direct
/// targets first, then the Arrhenius reparametrisations that depend on E.
fn for_each_target(
    parameters: &[FreeParameter],
    values: &[f64],
    mut apply: impl FnMut(&Target, f64),
) {
    for pass_derived in [false, true] {
        for (parameter, &value) in parameters.iter().zip(values) {
            for target in parameter
                .targets
                .iter()
                .filter(|t| t.is_derived() == pass_derived)
            {
                apply(target, value);
            }
        }
    }
}

/// Applies a full parameter vector (file units) to a material only, in the order of
/// [`apply_all`]; scenario targets are skipped (what a milligram-scale case simulates).
pub fn apply_to_material_all(
    parameters: &[FreeParameter],
    values: &[f64],
    material: &mut Material,
) {
    for_each_target(parameters, values, |target, value| {
        target.apply_to_material(value, material)
    });
}

/// Applies a full parameter vector (file units) to copies of a material and a scenario:
/// direct targets first, then the Arrhenius reparametrisations that depend on E.
pub fn apply_all(
    parameters: &[FreeParameter],
    values: &[f64],
    material: &mut Material,
    scenario: &mut Scenario,
) {
    for_each_target(parameters, values, |target, value| {
        target.apply(value, material, scenario)
    });
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Kissinger (1957): the reparametrisation and its inverse agree.
    #[test]
    fn peak_temperature_and_pre_exponential_are_inverse() {
        let beta = 10.0 / 60.0;
        let a = pre_exponential_from_peak(188e3, 640.0, beta);
        assert!((peak_temperature_k(a, 188e3, beta) - 640.0).abs() < 1e-6);
    }

    /// A milligram case has no scenario: applying to the material alone sets the material
    /// targets (derived ones after E) and leaves scenario targets out.
    #[test]
    fn applying_to_the_material_alone_skips_scenario_targets() {
        let material = crate::microscale::fit::single_step_material(1e12, 150e3, 1.0).unwrap();
        let free = |name: &str, targets: Vec<Target>| FreeParameter {
            name: name.into(),
            unit: String::new(),
            lower: 0.0,
            upper: 1e3,
            scale: Scale::Linear,
            start: 1.0,
            prior: None,
            targets,
        };
        let beta = 10.0 / 60.0;
        let parameters = vec![
            free(
                "peak",
                vec![Target::PeakTemperature {
                    reaction: 0,
                    heating_rate_k_s: beta,
                }],
            ),
            free("e", vec![Target::ActivationEnergy { reaction: 0 }]),
            free("flame", vec![Target::FlameHeatFlux]),
        ];
        let mut applied = material.clone();
        apply_to_material_all(&parameters, &[640.0, 180.0, 12.0], &mut applied);
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

    #[test]
    fn log_scale_maps_the_unit_interval_geometrically() {
        let parameter = FreeParameter {
            name: "a".into(),
            unit: "1/s".into(),
            lower: 1e10,
            upper: 1e14,
            scale: Scale::Log,
            start: 1e12,
            prior: None,
            targets: vec![],
        };
        assert!((parameter.from_unit(0.5) / 1e12 - 1.0).abs() < 1e-12);
        assert!((parameter.to_unit(1e13) - 0.75).abs() < 1e-12);
    }

    #[test]
    fn priors_penalise_by_standardised_distance() {
        let normal = Prior::Normal {
            mean: 1.0,
            standard_deviation: 0.5,
        };
        assert!((normal.penalty(2.0) - 4.0).abs() < 1e-12);
        let log_normal = Prior::LogNormal {
            median: 100.0,
            standard_deviation_log10: 0.5,
        };
        assert!((log_normal.penalty(1000.0) - 4.0).abs() < 1e-12);
    }
}
