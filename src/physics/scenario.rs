//! What a simulation is asked to do: the specimen's layers, the exposure, ignition and
//! flame-out rules, the back face and the numerical settings (docs/physics.md §1). Validated on
//! construction by `Scenario::check`, so the solver can trust every value.

use super::material::{require_fraction, require_non_negative, require_positive, Material};
use super::PhysicsError;

/// Stefan–Boltzmann constant, W/(m²·K⁴) (CODATA 2018, as docs/physics.md §1 gives it).
pub const STEFAN_BOLTZMANN_W_M2_K4: f64 = 5.670374419e-8;

/// Convective coefficient at the exposed face, W/(m²·K); common practice for the cone
/// calorimeter, no single published source (docs/physics.md §1).
pub const DEFAULT_CONVECTIVE_COEFFICIENT_W_M2_K: f64 = 10.0;

/// Critical fuel mass flux for ignition, kg/(m²·s); about 2 g/(m²·s) is a usual default
/// (docs/physics.md §1, common practice).
pub const DEFAULT_CRITICAL_FUEL_MASS_FLUX_KG_M2_S: f64 = 2.0e-3;

/// One layer of the specimen stack, exposed face first.
#[derive(Debug, Clone, PartialEq)]
pub struct Layer {
    pub name: String,
    pub material: Material,
    pub thickness_m: f64,
    pub n_cells: usize,
    /// Initial mass fraction of each of the material's components (sums to 1).
    pub initial_mass_fractions: Vec<f64>,
    /// True for the tested material (weighed by the load cell), false for backing.
    pub is_specimen: bool,
    /// Thermal contact resistance between this layer and the one in front of it, m²·K/W.
    pub contact_resistance_m2_k_w: f64,
    /// Thickness of the layer's last (deepest) cell over its first: 1 for a uniform grid,
    /// above 1 for cells growing geometrically from the layer's front (the exposed side),
    /// where the gradients are (docs/numerics.md, "Grid").
    pub cell_growth: f64,
}

impl Layer {
    /// Initial thickness of each of the layer's cells, front first, m: a geometric series of
    /// ratio `cell_growth^(1/(n−1))` summing to the layer's thickness.
    pub fn cell_thicknesses_m(&self) -> impl Iterator<Item = f64> + '_ {
        let n = self.n_cells;
        let ratio = if n > 1 && self.cell_growth != 1.0 {
            self.cell_growth.powf(1.0 / (n - 1) as f64)
        } else {
            1.0
        };
        let first_m = if ratio == 1.0 {
            self.thickness_m / n as f64
        } else {
            self.thickness_m * (ratio - 1.0) / (ratio.powi(n as i32) - 1.0)
        };
        (0..n).map(move |idx| first_m * ratio.powi(idx as i32))
    }
}

/// A value that may change with time: constant or a (time s, value) table, linear between
/// points and constant outside them.
#[derive(Debug, Clone, PartialEq)]
pub enum Schedule {
    Constant(f64),
    Table(Vec<(f64, f64)>),
}

impl Schedule {
    /// Value at `time_s`.
    pub fn at(&self, time_s: f64) -> f64 {
        match self {
            Schedule::Constant(value) => *value,
            Schedule::Table(points) => super::material::table_value(points, time_s),
        }
    }

    /// The first table point strictly after `time_s`, where a time step should end so the
    /// solver does not step over a change of slope.
    pub fn next_breakpoint_after(&self, time_s: f64) -> Option<f64> {
        match self {
            Schedule::Constant(_) => None,
            Schedule::Table(points) => points.iter().map(|p| p.0).find(|&t| t > time_s),
        }
    }

    fn check(&self, what: &str) -> Result<(), PhysicsError> {
        match self {
            Schedule::Constant(value) => require_non_negative(what, *value),
            Schedule::Table(points) => {
                if points.is_empty() {
                    return Err(PhysicsError::invalid(what, "table has no points"));
                }
                for window in points.windows(2) {
                    if window[1].0 <= window[0].0 {
                        return Err(PhysicsError::invalid(
                            what,
                            format!(
                                "table times must increase, got {} s after {} s",
                                window[1].0, window[0].0
                            ),
                        ));
                    }
                }
                points
                    .iter()
                    .try_for_each(|p| require_non_negative(what, p.1))
            }
        }
    }
}

/// The heating of the exposed face.
#[derive(Debug, Clone, PartialEq)]
pub struct Exposure {
    /// Irradiance q_ext, W/m².
    pub irradiance_w_m2: Schedule,
    /// Ambient (gas and surroundings) temperature T∞, K.
    pub ambient_temperature_k: f64,
    /// Initial temperature of the whole stack, K.
    pub initial_temperature_k: f64,
    /// Convective coefficient before ignition, W/(m²·K).
    pub convective_coefficient_w_m2_k: f64,
    /// Convective coefficient while the flame is on, W/(m²·K).
    pub flaming_convective_coefficient_w_m2_k: f64,
    /// Flame heat flux q_flame while the flame is on, W/m².
    pub flame_heat_flux_w_m2: f64,
    /// Fraction of the irradiance the flame absorbs before it reaches the face while the flame
    /// is on, 0..1 (docs/physics.md §1 "Flame"): 0 is a transparent flame.
    pub flame_blockage: f64,
    /// Whether the face re-radiates εσ(T_s⁴ − T∞⁴); false only for loss-free verification.
    pub has_reradiation: bool,
}

/// When the specimen is declared ignited (docs/physics.md §1 "Ignition and heat release").
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum IgnitionRule {
    /// Fuel mass flux reaches this value, kg/(m²·s).
    CriticalFuelMassFlux(f64),
    /// Exposed-surface temperature reaches this value, K.
    SurfaceTemperature(f64),
    /// At this time, s (e.g. the measured one).
    AtTime(f64),
    /// Never: no flame, no HRR (a gasification or inert test).
    Never,
}

/// When an established flame goes out.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Flameout {
    /// The flame goes out when the fuel mass flux falls below this, kg/(m²·s), after having
    /// exceeded it while ignited.
    pub threshold_fuel_mass_flux_kg_m2_s: f64,
    /// Whether the ignition rule may ignite the specimen again after a flame-out.
    pub may_reignite: bool,
}

/// The far face of the stack.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum BackFace {
    Insulated,
    /// Convection and radiation to the ambient at `ambient_temperature_k`.
    LossToAmbient {
        convective_coefficient_w_m2_k: f64,
        emissivity: f64,
        ambient_temperature_k: f64,
    },
    FixedTemperature(f64),
}

/// A temperature probe at a depth measured from the initial exposed surface.
#[derive(Debug, Clone, PartialEq)]
pub struct Probe {
    pub name: String,
    pub depth_m: f64,
}

/// Step-size control and iteration tolerances (docs/numerics.md).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Numerics {
    /// Local error tolerance on cell temperatures, K per step: the step is adapted so the
    /// scheme's estimate of its local error stays below it (TR-BDF2's embedded estimate, or
    /// the difference of the full and the two half steps of extrapolated backward Euler).
    pub temperature_tolerance_k: f64,
    /// Local error tolerance on the mass of a cell, as a fraction of its initial mass.
    pub conversion_tolerance: f64,
    /// Safety cap: largest temperature change of any cell in one step, K.
    pub max_temperature_change_k: f64,
    /// Safety cap: largest mass consumed in one cell in one step, as a fraction of its initial
    /// mass.
    pub max_conversion_per_step: f64,
    /// First step, s.
    pub initial_step_s: f64,
    /// Longest step, s.
    pub max_step_s: f64,
    /// Shortest step before the solver gives up with an error, s.
    pub min_step_s: f64,
    /// Iteration on the non-linear terms stops when no temperature changes by more, K.
    pub iteration_tolerance_k: f64,
}

impl Default for Numerics {
    /// Defaults chosen so that 4× the cells and 4× tighter tolerances change the ignition
    /// time, peak HRR, its time, peak MLR and THR by less than 1 % on the templates
    /// (tests/integration/numerics.rs; docs/numerics.md).
    fn default() -> Self {
        Numerics {
            temperature_tolerance_k: 0.5,
            conversion_tolerance: 0.02,
            max_temperature_change_k: 50.0,
            max_conversion_per_step: 0.5,
            initial_step_s: 0.05,
            max_step_s: 20.0,
            min_step_s: 1e-10,
            iteration_tolerance_k: 1e-2,
        }
    }
}

/// Everything a run needs, in SI units.
#[derive(Debug, Clone, PartialEq)]
pub struct Scenario {
    pub layers: Vec<Layer>,
    pub exposure: Exposure,
    pub ignition: IgnitionRule,
    pub flameout: Flameout,
    pub back: BackFace,
    pub duration_s: f64,
    pub output_interval_s: f64,
    pub probes: Vec<Probe>,
    pub numerics: Numerics,
}

impl Scenario {
    /// Rejects inputs no real specimen or test can have, with the reason.
    pub fn check(&self) -> Result<(), PhysicsError> {
        if self.layers.is_empty() {
            return Err(PhysicsError::invalid("specimen", "has no layers"));
        }
        if !self.layers[0].is_specimen {
            return Err(PhysicsError::invalid(
                "layer 1",
                "must be specimen (the exposed layer is the tested material)",
            ));
        }
        for (layer_idx, layer) in self.layers.iter().enumerate() {
            let what = |field: &str| format!("layer {} (`{}`) {field}", layer_idx + 1, layer.name);
            require_positive(&what("thickness"), layer.thickness_m)?;
            if layer.n_cells == 0 {
                return Err(PhysicsError::invalid(
                    &what("cells"),
                    "must be at least 1, got 0",
                ));
            }
            if layer.initial_mass_fractions.len() != layer.material.components.len() {
                return Err(PhysicsError::invalid(
                    &what("composition"),
                    format!(
                        "has {} fractions for {} components",
                        layer.initial_mass_fractions.len(),
                        layer.material.components.len()
                    ),
                ));
            }
            for &fraction in &layer.initial_mass_fractions {
                require_fraction(&what("composition"), fraction)?;
            }
            let sum: f64 = layer.initial_mass_fractions.iter().sum();
            if (sum - 1.0).abs() > 1e-6 {
                return Err(PhysicsError::invalid(
                    &what("composition"),
                    format!("mass fractions must sum to 1, got {sum}"),
                ));
            }
            require_non_negative(&what("contact resistance"), layer.contact_resistance_m2_k_w)?;
            if !(layer.cell_growth.is_finite() && (1.0..=100.0).contains(&layer.cell_growth)) {
                return Err(PhysicsError::invalid(
                    &what("cell growth"),
                    format!("must be within 1..100, got {}", layer.cell_growth),
                ));
            }
            if layer.is_specimen && layer_idx > 0 && !self.layers[layer_idx - 1].is_specimen {
                return Err(PhysicsError::invalid(
                    &what("role"),
                    "specimen layers must come before backing layers",
                ));
            }
        }
        let exposure = &self.exposure;
        exposure.irradiance_w_m2.check("irradiance")?;
        require_positive("ambient temperature", exposure.ambient_temperature_k)?;
        require_positive("initial temperature", exposure.initial_temperature_k)?;
        require_non_negative(
            "convective coefficient",
            exposure.convective_coefficient_w_m2_k,
        )?;
        require_non_negative(
            "convective coefficient after ignition",
            exposure.flaming_convective_coefficient_w_m2_k,
        )?;
        require_non_negative("flame heat flux", exposure.flame_heat_flux_w_m2)?;
        require_fraction("flame blockage", exposure.flame_blockage)?;
        match self.ignition {
            IgnitionRule::CriticalFuelMassFlux(flux) => {
                require_positive("critical fuel mass flux", flux)?
            }
            IgnitionRule::SurfaceTemperature(temperature) => {
                require_positive("ignition temperature", temperature)?
            }
            IgnitionRule::AtTime(time) => require_non_negative("ignition time", time)?,
            IgnitionRule::Never => {}
        }
        require_non_negative(
            "flame-out fuel mass flux",
            self.flameout.threshold_fuel_mass_flux_kg_m2_s,
        )?;
        match self.back {
            BackFace::Insulated => {}
            BackFace::LossToAmbient {
                convective_coefficient_w_m2_k,
                emissivity,
                ambient_temperature_k,
            } => {
                require_non_negative("back convective coefficient", convective_coefficient_w_m2_k)?;
                require_fraction("back emissivity", emissivity)?;
                require_positive("back ambient temperature", ambient_temperature_k)?;
            }
            BackFace::FixedTemperature(temperature) => {
                require_positive("back temperature", temperature)?
            }
        }
        require_positive("duration", self.duration_s)?;
        require_positive("output interval", self.output_interval_s)?;
        let total_thickness_m: f64 = self.layers.iter().map(|l| l.thickness_m).sum();
        for probe in &self.probes {
            let what = format!("probe `{}` depth", probe.name);
            require_non_negative(&what, probe.depth_m)?;
            if probe.depth_m > total_thickness_m {
                return Err(PhysicsError::invalid(
                    &what,
                    format!(
                        "is {} mm, deeper than the stack ({} mm)",
                        probe.depth_m * 1e3,
                        total_thickness_m * 1e3
                    ),
                ));
            }
        }
        let numerics = &self.numerics;
        numerics.check()?;
        Ok(())
    }
}

/// The fewest cells (5..=400) for which a layer of `thickness_m` whose cells grow by
/// `cell_growth` (last over first) has a first cell no thicker than `first_cell_m`.
pub fn cell_count_for(thickness_m: f64, first_cell_m: f64, cell_growth: f64) -> usize {
    let first_of = |n: usize| {
        let ratio = if n > 1 {
            cell_growth.powf(1.0 / (n - 1) as f64)
        } else {
            1.0
        };
        if ratio == 1.0 {
            thickness_m / n as f64
        } else {
            thickness_m * (ratio - 1.0) / (ratio.powi(n as i32) - 1.0)
        }
    };
    (5..=400)
        .find(|&n| first_of(n) <= first_cell_m)
        .unwrap_or(400)
}

/// Smallest tolerances and caps the solver accepts: below them a run needs so many steps that
/// it cannot end (each step's cost is fixed, the step length scales as √tolerance).
pub const MIN_TEMPERATURE_TOLERANCE_K: f64 = 1e-4;
pub const MIN_CONVERSION_TOLERANCE: f64 = 1e-6;
pub const MIN_TEMPERATURE_CHANGE_CAP_K: f64 = 1e-2;
pub const MIN_CONVERSION_CAP: f64 = 1e-4;

impl Numerics {
    /// Rejects settings that make a run impossible (the step limits contradict each other)
    /// or endless (caps so small that no reasonable number of steps ends the run).
    pub fn check(&self) -> Result<(), PhysicsError> {
        let numerics = self;
        let at_least = |what: &str, value: f64, minimum: f64| {
            if value.is_finite() && value >= minimum {
                Ok(())
            } else {
                Err(PhysicsError::invalid(
                    what,
                    format!("must be at least {minimum}, got {value}"),
                ))
            }
        };
        at_least(
            "temperature tolerance",
            numerics.temperature_tolerance_k,
            MIN_TEMPERATURE_TOLERANCE_K,
        )?;
        at_least(
            "conversion tolerance",
            numerics.conversion_tolerance,
            MIN_CONVERSION_TOLERANCE,
        )?;
        at_least(
            "max temperature change",
            numerics.max_temperature_change_k,
            MIN_TEMPERATURE_CHANGE_CAP_K,
        )?;
        at_least(
            "max conversion per step",
            numerics.max_conversion_per_step,
            MIN_CONVERSION_CAP,
        )?;
        require_positive("max temperature change", numerics.max_temperature_change_k)?;
        require_positive("max conversion per step", numerics.max_conversion_per_step)?;
        require_positive("initial step", numerics.initial_step_s)?;
        require_positive("max step", numerics.max_step_s)?;
        require_positive("min step", numerics.min_step_s)?;
        require_positive("iteration tolerance", numerics.iteration_tolerance_k)?;
        if numerics.min_step_s > numerics.max_step_s {
            return Err(PhysicsError::invalid(
                "min step",
                format!(
                    "({} s) must not exceed the max step ({} s)",
                    numerics.min_step_s, numerics.max_step_s
                ),
            ));
        }
        Ok(())
    }
}
