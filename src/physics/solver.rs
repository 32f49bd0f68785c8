//! The 1-D transient conduction–pyrolysis solver (physics.md §1): conservative finite volumes,
//! backward Euler with iteration on the non-linear terms, one tridiagonal solve per iteration,
//! adaptive steps bounded by temperature change and conversion, and the events (ignition,
//! flame-out) that switch the flame on and off.
//!
//! Unknowns of each solve are the exposed-face temperature (a node without heat capacity whose
//! row is the face balance), the cell temperatures, and the back-face temperature. Masses are
//! advanced implicitly by `kinetics::advance_masses` at each iterate's temperatures.

use super::kinetics::{advance_masses, rate_constant_per_s, StepMasses, GAS_CONSTANT_J_MOL_K};
use super::material::Material;
use super::output::{CellSnapshot, EnergyBudget, History, MassBudget, Sample, Summary};
use super::scenario::{BackFace, IgnitionRule, Scenario, STEFAN_BOLTZMANN_W_M2_K4};
use super::PhysicsError;

/// Cells thinner than this use it in their conduction resistance, m; the floor has no heat
/// capacity, so it does not enter the energy balance.
const MIN_CELL_THICKNESS_M: f64 = 1e-10;
/// A cell whose condensed mass falls below this fraction of its initial mass is merged into its
/// neighbour in the same layer (conserving C·T), so burnt-away cells never stall the solver.
const MERGE_MASS_FRACTION: f64 = 1e-6;
/// Cells holding less than this fraction of their initial mass are exempt from the
/// temperature-change limit on the step: with almost no heat capacity they follow their
/// neighbours at once, like the face.
const NEGLIGIBLE_MASS_FRACTION: f64 = 1e-3;
/// Iterations on the non-linear terms before a step is retried shorter.
const MAX_ITERATIONS: usize = 40;

/// Runs the scenario to its end and returns the sampled curves and the summary.
pub fn simulate(scenario: &Scenario) -> Result<History, PhysicsError> {
    scenario.check()?;
    let mut solver = Solver::new(scenario);
    solver.run()?;
    Ok(solver.finish())
}

/// Cell properties at one iterate, all per unit exposed area.
#[derive(Debug, Clone, Copy, Default)]
struct CellProperties {
    thickness_m: f64,
    conductivity_w_m_k: f64,
    heat_capacity_j_m2_k: f64,
    emissivity: f64,
    /// `None` when any component present is opaque.
    absorption_per_m: Option<f64>,
    /// Reaction heat sink Σ ω ΔH, W/m², and its temperature derivative.
    reaction_heat_w_m2: f64,
    reaction_heat_slope_w_m2_k: f64,
}

struct Solver<'a> {
    scenario: &'a Scenario,
    /// Layer index of each cell, exposed cell first.
    cell_layer: Vec<usize>,
    /// Component masses per cell, kg/m², `stride` entries per cell.
    masses: Vec<f64>,
    stride: usize,
    /// Initial condensed mass of each cell, kg/m² (the m₀ of n-th order rates).
    reference_mass: Vec<f64>,
    /// Node temperatures: [face, cells..., back face], K.
    temperature_k: Vec<f64>,
    time_s: f64,
    dt_s: f64,
    is_flaming: bool,
    has_exceeded_flameout_threshold: bool,
    ignition_time_s: Option<f64>,
    flameout_time_s: Option<f64>,
    /// Fuel flux and surface temperature at the end of the last accepted step.
    last_fuel_flux_kg_m2_s: f64,
    last_surface_temperature_k: f64,
    energy: EnergyBudget,
    initial_mass_all_kg_m2: f64,
    released_gas_kg_m2: f64,
    specimen_initial_mass_kg_m2: f64,
    total_heat_release_j_m2: f64,
    peak_hrr: (f64, f64),
    peak_mlr: (f64, f64),
    rate_weighted_temperature: f64,
    n_steps: usize,
    n_rejected: usize,
    n_iterations: usize,
    /// Temperature change of the last accepted step and its length, for the predictor.
    last_change_k: Vec<f64>,
    last_dt_s: f64,
    samples: Vec<Sample>,
    previous_sample: Sample,
    next_output_s: f64,
    // Work arrays, reused between steps.
    work: Work,
}

#[derive(Default)]
struct Work {
    new_masses: Vec<f64>,
    consumed: Vec<f64>,
    properties: Vec<CellProperties>,
    rate_constants: Vec<f64>,
    step_masses: StepMasses,
    absorbed_w_m2: Vec<f64>,
    lower: Vec<f64>,
    diagonal: Vec<f64>,
    upper: Vec<f64>,
    rhs: Vec<f64>,
    scratch: Vec<f64>,
    iterate_k: Vec<f64>,
    solution_k: Vec<f64>,
}

/// What one accepted step contributed.
struct StepResult {
    specimen_gas_kg_m2: f64,
    specimen_fuel_kg_m2: f64,
    heat_release_j_m2: f64,
    budget: EnergyBudget,
    released_gas_kg_m2: f64,
    rate_weighted_temperature_sum: f64,
}

impl<'a> Solver<'a> {
    fn new(scenario: &'a Scenario) -> Self {
        let stride = scenario
            .layers
            .iter()
            .map(|l| l.material.components.len())
            .max()
            .unwrap_or(1);
        let mut cell_layer = Vec::new();
        let mut masses = Vec::new();
        let mut reference_mass = Vec::new();
        for (layer_idx, layer) in scenario.layers.iter().enumerate() {
            let specific_volume: f64 = layer
                .initial_mass_fractions
                .iter()
                .zip(&layer.material.components)
                .map(|(w, c)| w / c.density_kg_m3)
                .sum();
            let cell_mass = layer.thickness_m / layer.n_cells as f64 / specific_volume;
            for _ in 0..layer.n_cells {
                cell_layer.push(layer_idx);
                for component_idx in 0..stride {
                    let fraction = layer
                        .initial_mass_fractions
                        .get(component_idx)
                        .copied()
                        .unwrap_or(0.0);
                    masses.push(fraction * cell_mass);
                }
                reference_mass.push(cell_mass);
            }
        }
        let n_cells = cell_layer.len();
        let initial_temperature_k = scenario.exposure.initial_temperature_k;
        let initial_mass_all_kg_m2 = reference_mass.iter().sum();
        let specimen_initial_mass_kg_m2 = cell_layer
            .iter()
            .zip(&reference_mass)
            .filter(|(&layer, _)| scenario.layers[layer].is_specimen)
            .map(|(_, m)| m)
            .sum();
        let mut solver = Solver {
            scenario,
            cell_layer,
            masses,
            stride,
            reference_mass,
            temperature_k: vec![initial_temperature_k; n_cells + 2],
            time_s: 0.0,
            dt_s: scenario
                .numerics
                .initial_step_s
                .min(scenario.numerics.max_step_s),
            is_flaming: false,
            has_exceeded_flameout_threshold: false,
            ignition_time_s: None,
            flameout_time_s: None,
            last_fuel_flux_kg_m2_s: 0.0,
            last_surface_temperature_k: initial_temperature_k,
            energy: EnergyBudget::default(),
            initial_mass_all_kg_m2,
            released_gas_kg_m2: 0.0,
            specimen_initial_mass_kg_m2,
            total_heat_release_j_m2: 0.0,
            peak_hrr: (0.0, 0.0),
            peak_mlr: (0.0, 0.0),
            rate_weighted_temperature: 0.0,
            n_steps: 0,
            n_rejected: 0,
            n_iterations: 0,
            last_change_k: Vec::new(),
            last_dt_s: 0.0,
            samples: Vec::new(),
            previous_sample: Sample::default(),
            next_output_s: 0.0,
            work: Work::default(),
        };
        if let IgnitionRule::AtTime(0.0) = scenario.ignition {
            solver.ignite(0.0);
        }
        solver.previous_sample = solver.sample(0.0, [0.0, 0.0, 0.0], None);
        solver.samples.push(solver.previous_sample.clone());
        solver.next_output_s = scenario.output_interval_s;
        solver
    }

    fn n_cells(&self) -> usize {
        self.cell_layer.len()
    }

    fn material(&self, cell_idx: usize) -> &'a Material {
        &self.scenario.layers[self.cell_layer[cell_idx]].material
    }

    fn run(&mut self) -> Result<(), PhysicsError> {
        let duration_s = self.scenario.duration_s;
        let numerics = self.scenario.numerics;
        while self.time_s < duration_s * (1.0 - 1e-12) {
            let mut dt_s = self.dt_s.min(duration_s - self.time_s);
            if let Some(breakpoint) = self
                .scenario
                .exposure
                .irradiance_w_m2
                .next_breakpoint_after(self.time_s)
            {
                if self.time_s + dt_s > breakpoint {
                    dt_s = breakpoint - self.time_s;
                }
            }
            if let IgnitionRule::AtTime(ignition_s) = self.scenario.ignition {
                if self.ignition_time_s.is_none()
                    && self.time_s < ignition_s
                    && self.time_s + dt_s > ignition_s
                {
                    dt_s = ignition_s - self.time_s;
                }
            }
            match self.try_step(dt_s)? {
                Some(result) => self.accept(dt_s, result),
                None => {
                    self.n_rejected += 1;
                    self.dt_s = 0.5 * dt_s;
                    if self.dt_s < numerics.min_step_s {
                        return Err(PhysicsError::NoConvergence {
                            time_s: self.time_s,
                            detail: format!(
                                "time step fell below {} s (the surface is at {:.1} K)",
                                numerics.min_step_s, self.temperature_k[0]
                            ),
                        });
                    }
                }
            }
        }
        Ok(())
    }

    /// Attempts one step of `dt_s`; `None` when it must be retried shorter. On success the new
    /// state is in `work.solution_k` and `work.new_masses`.
    fn try_step(&mut self, dt_s: f64) -> Result<Option<StepResult>, PhysicsError> {
        let numerics = self.scenario.numerics;
        let n_cells = self.n_cells();
        let n_nodes = n_cells + 2;
        let time_new_s = self.time_s + dt_s;
        let mut work = std::mem::take(&mut self.work);
        // First iterate: the last step's trend carried forward (a cheap predictor that saves
        // about one iteration per step); the converged answer does not depend on it.
        work.iterate_k.clear();
        work.iterate_k.extend_from_slice(&self.temperature_k);
        if self.last_change_k.len() == n_nodes && self.last_dt_s > 0.0 {
            let ratio = (dt_s / self.last_dt_s).min(2.0);
            for (guess, change) in work.iterate_k.iter_mut().zip(&self.last_change_k) {
                *guess += ratio * change;
            }
        }
        let mut converged = false;
        let mut budget = EnergyBudget::default();
        for _ in 0..MAX_ITERATIONS {
            self.n_iterations += 1;
            self.evaluate_cells(&mut work, dt_s);
            let face_absorbed_w_m2 = self.deposit_radiation(&mut work, time_new_s);
            budget = self.assemble_and_solve(&mut work, dt_s, face_absorbed_w_m2);
            let change = work
                .solution_k
                .iter()
                .zip(&work.iterate_k)
                .map(|(a, b)| (a - b).abs())
                .fold(0.0, f64::max);
            std::mem::swap(&mut work.iterate_k, &mut work.solution_k);
            if !change.is_finite() {
                break;
            }
            if change <= numerics.iteration_tolerance_k {
                converged = true;
                break;
            }
        }
        // After the swap, `iterate_k` holds the last solution.
        std::mem::swap(&mut work.iterate_k, &mut work.solution_k);
        let outcome = if !converged || work.solution_k.iter().any(|t| !t.is_finite() || *t <= 0.0) {
            None
        } else {
            // Cells only: the face and back nodes have no heat capacity and follow at once, as
            // do cells that have lost almost all their mass.
            let mut temperature_change: f64 = 0.0;
            for cell_idx in 0..n_cells {
                let mass: f64 = work.new_masses[cell_idx * self.stride..][..self.stride]
                    .iter()
                    .sum();
                if mass >= NEGLIGIBLE_MASS_FRACTION * self.reference_mass[cell_idx] {
                    let node = cell_idx + 1;
                    temperature_change = temperature_change
                        .max((work.solution_k[node] - self.temperature_k[node]).abs());
                }
            }
            let mut conversion: f64 = 0.0;
            for cell_idx in 0..n_cells {
                let consumed: f64 = work.consumed[cell_idx * self.reaction_stride()..]
                    [..self.reaction_stride()]
                    .iter()
                    .sum();
                conversion = conversion.max(consumed / self.reference_mass[cell_idx]);
            }
            let temperature_ratio = temperature_change / numerics.max_temperature_change_k;
            let conversion_ratio = conversion / numerics.max_conversion_per_step;
            let worst = temperature_ratio.max(conversion_ratio);
            if worst > 1.0 && dt_s > numerics.min_step_s {
                None
            } else {
                let growth = if worst > 0.0 {
                    (0.9 / worst).min(2.0)
                } else {
                    2.0
                };
                self.dt_s = (dt_s * growth).clamp(numerics.min_step_s, numerics.max_step_s);
                Some(self.step_result(&work, budget))
            }
        };
        debug_assert_eq!(work.solution_k.len(), n_nodes);
        self.work = work;
        Ok(outcome)
    }

    fn reaction_stride(&self) -> usize {
        self.scenario
            .layers
            .iter()
            .map(|l| l.material.reactions.len())
            .max()
            .unwrap_or(0)
            .max(1)
    }

    /// Masses and properties of every cell at the current iterate's temperatures.
    fn evaluate_cells(&self, work: &mut Work, dt_s: f64) {
        let n_cells = self.n_cells();
        let reaction_stride = self.reaction_stride();
        // Cleared so the slots a layer's material does not use stay zero.
        work.new_masses.clear();
        work.new_masses.resize(self.masses.len(), 0.0);
        work.consumed.clear();
        work.consumed.resize(n_cells * reaction_stride, 0.0);
        work.properties.resize(n_cells, CellProperties::default());
        for cell_idx in 0..n_cells {
            let material = self.material(cell_idx);
            let temperature_k = work.iterate_k[cell_idx + 1];
            let old = &self.masses[cell_idx * self.stride..][..material.components.len()];
            work.rate_constants.clear();
            work.rate_constants
                .extend(material.reactions.iter().map(|r| {
                    rate_constant_per_s(
                        r.pre_exponential_per_s,
                        r.activation_energy_j_mol,
                        temperature_k,
                    )
                }));
            let new = &mut work.new_masses[cell_idx * self.stride..][..material.components.len()];
            let mut properties = CellProperties::default();
            if material.reactions.is_empty() {
                new.copy_from_slice(old);
            } else {
                advance_masses(
                    material,
                    &work.rate_constants,
                    old,
                    self.reference_mass[cell_idx],
                    dt_s,
                    &mut work.step_masses,
                );
                new.copy_from_slice(&work.step_masses.masses);
                for (reaction_idx, reaction) in material.reactions.iter().enumerate() {
                    let consumed = work.step_masses.consumed[reaction_idx];
                    work.consumed[cell_idx * reaction_stride + reaction_idx] = consumed;
                    let heat_w_m2 = consumed / dt_s * reaction.heat_of_reaction_j_kg;
                    properties.reaction_heat_w_m2 += heat_w_m2;
                    properties.reaction_heat_slope_w_m2_k += heat_w_m2
                        * reaction.activation_energy_j_mol
                        / (GAS_CONSTANT_J_MOL_K * temperature_k * temperature_k);
                }
            }
            // Exothermic reactions would weaken the diagonal: their heat is lagged instead.
            properties.reaction_heat_slope_w_m2_k = properties.reaction_heat_slope_w_m2_k.max(0.0);
            let new = &work.new_masses[cell_idx * self.stride..][..material.components.len()];
            let mut thickness_m = 0.0;
            let mut conductivity_volume = 0.0;
            let mut emissivity_volume = 0.0;
            let mut absorption_volume = 0.0;
            let mut is_opaque = false;
            for (component, &mass) in material.components.iter().zip(new) {
                let volume = mass / component.density_kg_m3;
                thickness_m += volume;
                conductivity_volume += volume * component.conductivity_w_m_k.at(temperature_k);
                emissivity_volume += volume * component.emissivity;
                properties.heat_capacity_j_m2_k +=
                    mass * component.specific_heat_j_kg_k.at(temperature_k);
                match component.absorption_coefficient_per_m {
                    Some(kappa) => absorption_volume += volume * kappa,
                    None if volume > 0.0 => is_opaque = true,
                    None => {}
                }
            }
            if thickness_m > 0.0 {
                properties.conductivity_w_m_k = conductivity_volume / thickness_m;
                properties.emissivity = emissivity_volume / thickness_m;
                properties.absorption_per_m =
                    (!is_opaque).then_some(absorption_volume / thickness_m);
            } else {
                // An emptied cell: properties of its first component, zero thickness.
                let first = &material.components[0];
                properties.conductivity_w_m_k = first.conductivity_w_m_k.at(temperature_k);
                properties.emissivity = first.emissivity;
                properties.absorption_per_m = first.absorption_coefficient_per_m;
            }
            properties.thickness_m = thickness_m;
            work.properties[cell_idx] = properties;
        }
    }

    /// Net irradiance on the face and its in-depth deposit; returns what is absorbed at the
    /// face itself, W/m².
    fn deposit_radiation(&self, work: &mut Work, time_s: f64) -> f64 {
        let n_cells = self.n_cells();
        work.absorbed_w_m2.clear();
        work.absorbed_w_m2.resize(n_cells, 0.0);
        let absorbed_w_m2 = self.absorbed_flux_w_m2(work.properties[0].emissivity, time_s);
        if work.properties[0].absorption_per_m.is_none() {
            return absorbed_w_m2;
        }
        let exposed_layer = self.cell_layer[0];
        let mut remaining = absorbed_w_m2;
        let mut last_cell = 0;
        for cell_idx in 0..n_cells {
            if self.cell_layer[cell_idx] != exposed_layer {
                break;
            }
            last_cell = cell_idx;
            let properties = &work.properties[cell_idx];
            let taken = match properties.absorption_per_m {
                None => remaining,
                Some(kappa) => remaining * (1.0 - (-kappa * properties.thickness_m).exp()),
            };
            work.absorbed_w_m2[cell_idx] += taken;
            remaining -= taken;
            if properties.absorption_per_m.is_none() {
                break;
            }
        }
        // What reaches the back of the exposed layer is deposited at that layer's back.
        work.absorbed_w_m2[last_cell] += remaining;
        0.0
    }

    fn absorbed_flux_w_m2(&self, emissivity: f64, time_s: f64) -> f64 {
        let exposure = &self.scenario.exposure;
        let flame_w_m2 = if self.is_flaming {
            exposure.flame_heat_flux_w_m2
        } else {
            0.0
        };
        // The step mean of the irradiance: steps end at the table's breakpoints, so for a
        // piecewise-linear schedule this integrates the delivered energy exactly.
        let irradiance_w_m2 =
            0.5 * (exposure.irradiance_w_m2.at(self.time_s) + exposure.irradiance_w_m2.at(time_s));
        emissivity * (irradiance_w_m2 + flame_w_m2)
    }

    /// Builds the linearised system at the current iterate, solves it into `work.solution_k`
    /// and returns the energy terms of exactly this system, J/m² over the step.
    fn assemble_and_solve(
        &self,
        work: &mut Work,
        dt_s: f64,
        face_absorbed_w_m2: f64,
    ) -> EnergyBudget {
        let exposure = &self.scenario.exposure;
        let n_cells = self.n_cells();
        let n_nodes = n_cells + 2;
        for vector in [
            &mut work.lower,
            &mut work.diagonal,
            &mut work.upper,
            &mut work.rhs,
        ] {
            vector.clear();
            vector.resize(n_nodes, 0.0);
        }
        let ambient_k = exposure.ambient_temperature_k;
        let h_w_m2_k = if self.is_flaming {
            exposure.flaming_convective_coefficient_w_m2_k
        } else {
            exposure.convective_coefficient_w_m2_k
        };
        let emissivity = work.properties[0].emissivity;
        let sigma = STEFAN_BOLTZMANN_W_M2_K4;
        let face_guess_k = work.iterate_k[0];
        let radiation_slope = if exposure.has_reradiation {
            4.0 * emissivity * sigma * face_guess_k.powi(3)
        } else {
            0.0
        };
        let radiation_offset = if exposure.has_reradiation {
            emissivity * sigma * (3.0 * face_guess_k.powi(4) + ambient_k.powi(4))
        } else {
            0.0
        };
        let half_resistance = |p: &CellProperties| {
            p.thickness_m.max(MIN_CELL_THICKNESS_M) / (2.0 * p.conductivity_w_m_k)
        };
        // Face node 0.
        let face_conductance = 1.0 / half_resistance(&work.properties[0]);
        work.diagonal[0] = face_conductance + h_w_m2_k + radiation_slope;
        work.upper[0] = -face_conductance;
        work.rhs[0] = face_absorbed_w_m2 + h_w_m2_k * ambient_k + radiation_offset;
        // Cells.
        let mut conductance_in = face_conductance;
        for cell_idx in 0..n_cells {
            let node = cell_idx + 1;
            let properties = &work.properties[cell_idx];
            let conductance_out = if cell_idx + 1 < n_cells {
                let next_layer = self.cell_layer[cell_idx + 1];
                let contact = if next_layer != self.cell_layer[cell_idx] {
                    self.scenario.layers[next_layer].contact_resistance_m2_k_w
                } else {
                    0.0
                };
                1.0 / (half_resistance(properties)
                    + contact
                    + half_resistance(&work.properties[cell_idx + 1]))
            } else {
                1.0 / half_resistance(properties)
            };
            let capacity_rate = properties.heat_capacity_j_m2_k / dt_s;
            let guess_k = work.iterate_k[node];
            work.lower[node] = -conductance_in;
            work.upper[node] = -conductance_out;
            work.diagonal[node] = capacity_rate
                + conductance_in
                + conductance_out
                + properties.reaction_heat_slope_w_m2_k;
            work.rhs[node] = capacity_rate * self.temperature_k[node]
                + work.absorbed_w_m2[cell_idx]
                - properties.reaction_heat_w_m2
                + properties.reaction_heat_slope_w_m2_k * guess_k;
            conductance_in = conductance_out;
        }
        // Back node.
        let back = n_nodes - 1;
        let back_conductance = conductance_in;
        let back_guess_k = work.iterate_k[back];
        let (back_slope, back_offset) = match self.scenario.back {
            BackFace::Insulated => (0.0, 0.0),
            BackFace::LossToAmbient {
                convective_coefficient_w_m2_k,
                emissivity,
                ambient_temperature_k,
            } => (
                convective_coefficient_w_m2_k + 4.0 * emissivity * sigma * back_guess_k.powi(3),
                convective_coefficient_w_m2_k * ambient_temperature_k
                    + emissivity
                        * sigma
                        * (3.0 * back_guess_k.powi(4) + ambient_temperature_k.powi(4)),
            ),
            BackFace::FixedTemperature(_) => (0.0, 0.0),
        };
        if let BackFace::FixedTemperature(fixed_k) = self.scenario.back {
            work.lower[back] = 0.0;
            work.diagonal[back] = 1.0;
            work.rhs[back] = fixed_k;
        } else {
            work.lower[back] = -back_conductance;
            work.diagonal[back] = back_conductance + back_slope;
            work.rhs[back] = back_offset;
        }
        work.solution_k.resize(n_nodes, 0.0);
        solve_tridiagonal(
            &work.lower,
            &work.diagonal,
            &work.upper,
            &work.rhs,
            &mut work.scratch,
            &mut work.solution_k,
        );

        // Energy terms of the system just solved.
        let solution = &work.solution_k;
        let face_k = solution[0];
        let mut budget = EnergyBudget {
            absorbed_j_m2: dt_s * (face_absorbed_w_m2 + work.absorbed_w_m2.iter().sum::<f64>()),
            // The linearised εσ(T_s⁴ − T∞⁴) that the face row used.
            reradiated_j_m2: dt_s * (radiation_slope * face_k - radiation_offset),
            convected_j_m2: dt_s * h_w_m2_k * (face_k - ambient_k),
            back_loss_j_m2: dt_s * back_conductance * (solution[back - 1] - solution[back]),
            ..EnergyBudget::default()
        };
        for cell_idx in 0..n_cells {
            let node = cell_idx + 1;
            let properties = &work.properties[cell_idx];
            budget.stored_j_m2 +=
                properties.heat_capacity_j_m2_k * (solution[node] - self.temperature_k[node]);
            budget.reaction_heat_j_m2 += dt_s
                * (properties.reaction_heat_w_m2
                    + properties.reaction_heat_slope_w_m2_k
                        * (solution[node] - work.iterate_k[node]));
        }
        budget
    }

    /// Fluxes and masses of the step held in `work`.
    fn step_result(&self, work: &Work, budget: EnergyBudget) -> StepResult {
        let reaction_stride = self.reaction_stride();
        let mut result = StepResult {
            specimen_gas_kg_m2: 0.0,
            specimen_fuel_kg_m2: 0.0,
            heat_release_j_m2: 0.0,
            budget,
            released_gas_kg_m2: 0.0,
            rate_weighted_temperature_sum: 0.0,
        };
        for cell_idx in 0..self.n_cells() {
            let layer = &self.scenario.layers[self.cell_layer[cell_idx]];
            for (reaction_idx, reaction) in layer.material.reactions.iter().enumerate() {
                let consumed = work.consumed[cell_idx * reaction_stride + reaction_idx];
                let gas = (1.0 - reaction.product_yield) * consumed;
                result.released_gas_kg_m2 += gas;
                if layer.is_specimen {
                    let fuel = gas * reaction.gas.fuel_fraction;
                    result.specimen_gas_kg_m2 += gas;
                    result.specimen_fuel_kg_m2 += fuel;
                    result.heat_release_j_m2 += fuel * reaction.gas.heat_of_combustion_j_kg;
                    result.rate_weighted_temperature_sum += gas * work.solution_k[cell_idx + 1];
                }
            }
        }
        if !self.is_flaming {
            result.heat_release_j_m2 = 0.0;
        }
        result
    }

    fn accept(&mut self, dt_s: f64, result: StepResult) {
        let mut work = std::mem::take(&mut self.work);
        self.last_change_k.clear();
        self.last_change_k.extend(
            work.solution_k
                .iter()
                .zip(&self.temperature_k)
                .map(|(new, old)| new - old),
        );
        self.last_dt_s = dt_s;
        std::mem::swap(&mut self.temperature_k, &mut work.solution_k);
        std::mem::swap(&mut self.masses, &mut work.new_masses);
        self.work = work;
        let previous_time_s = self.time_s;
        self.time_s += dt_s;
        self.n_steps += 1;
        self.energy.add(&result.budget);
        self.released_gas_kg_m2 += result.released_gas_kg_m2;
        self.total_heat_release_j_m2 += result.heat_release_j_m2;
        let mlr = result.specimen_gas_kg_m2 / dt_s;
        let fuel_flux = result.specimen_fuel_kg_m2 / dt_s;
        let hrr = result.heat_release_j_m2 / dt_s;
        self.rate_weighted_temperature += result.rate_weighted_temperature_sum;
        if hrr > self.peak_hrr.0 {
            self.peak_hrr = (hrr, self.time_s);
        }
        if mlr > self.peak_mlr.0 {
            self.peak_mlr = (mlr, self.time_s);
        }
        self.update_flame(previous_time_s, fuel_flux);
        self.last_fuel_flux_kg_m2_s = fuel_flux;
        self.last_surface_temperature_k = self.temperature_k[0];
        self.merge_burnt_cells();
        let gasification_k = (result.specimen_gas_kg_m2 > 0.0)
            .then(|| result.rate_weighted_temperature_sum / result.specimen_gas_kg_m2);
        let current = self.sample(self.time_s, [mlr, fuel_flux, hrr], gasification_k);
        while self.next_output_s <= self.time_s * (1.0 + 1e-12)
            && self.next_output_s <= self.scenario.duration_s * (1.0 + 1e-12)
        {
            let fraction = if self.time_s > self.previous_sample.time_s {
                ((self.next_output_s - self.previous_sample.time_s)
                    / (self.time_s - self.previous_sample.time_s))
                    .clamp(0.0, 1.0)
            } else {
                1.0
            };
            let mut row = self.previous_sample.interpolate(&current, fraction);
            row.time_s = self.next_output_s;
            self.samples.push(row);
            self.next_output_s += self.scenario.output_interval_s;
        }
        self.previous_sample = current;
    }

    /// Ignition and flame-out after a step that ended at `self.time_s`.
    fn update_flame(&mut self, previous_time_s: f64, fuel_flux: f64) {
        let may_ignite = !self.is_flaming
            && (self.ignition_time_s.is_none() || self.scenario.flameout.may_reignite);
        if may_ignite {
            let crossing = match self.scenario.ignition {
                IgnitionRule::CriticalFuelMassFlux(critical) => crossing_time(
                    previous_time_s,
                    self.last_fuel_flux_kg_m2_s,
                    self.time_s,
                    fuel_flux,
                    critical,
                ),
                IgnitionRule::SurfaceTemperature(critical_k) => crossing_time(
                    previous_time_s,
                    self.last_surface_temperature_k,
                    self.time_s,
                    self.temperature_k[0],
                    critical_k,
                ),
                IgnitionRule::AtTime(ignition_s) => (self.ignition_time_s.is_none()
                    && self.time_s >= ignition_s * (1.0 - 1e-12))
                    .then_some(ignition_s),
                IgnitionRule::Never => None,
            };
            if let Some(time_s) = crossing {
                self.ignite(time_s);
            }
        } else if self.is_flaming {
            let threshold = self.scenario.flameout.threshold_fuel_mass_flux_kg_m2_s;
            if fuel_flux >= threshold {
                self.has_exceeded_flameout_threshold = true;
            } else if self.has_exceeded_flameout_threshold {
                self.is_flaming = false;
                self.flameout_time_s = Some(self.time_s);
            }
        }
    }

    fn ignite(&mut self, time_s: f64) {
        self.is_flaming = true;
        self.has_exceeded_flameout_threshold = false;
        if self.ignition_time_s.is_none() {
            self.ignition_time_s = Some(time_s);
        }
        self.flameout_time_s = None;
    }

    /// Merges cells that have lost almost all their mass into their neighbour in the same layer.
    fn merge_burnt_cells(&mut self) {
        let mut cell_idx = 0;
        while cell_idx < self.n_cells() {
            let layer = self.cell_layer[cell_idx];
            let mass: f64 = self.masses[cell_idx * self.stride..][..self.stride]
                .iter()
                .sum();
            let neighbour =
                if cell_idx + 1 < self.n_cells() && self.cell_layer[cell_idx + 1] == layer {
                    Some(cell_idx + 1)
                } else if cell_idx > 0 && self.cell_layer[cell_idx - 1] == layer {
                    Some(cell_idx - 1)
                } else {
                    None
                };
            let is_burnt = mass < MERGE_MASS_FRACTION * self.reference_mass[cell_idx];
            match neighbour {
                Some(target) if is_burnt => self.merge_cell_into(cell_idx, target),
                None if is_burnt && cell_idx == 0 && self.n_cells() > 1 => {
                    // The exposed layer has burnt away: its last trace of mass leaves as gas
                    // and the layer behind becomes the exposed one.
                    self.released_gas_kg_m2 += mass;
                    self.remove_cell(0);
                }
                _ => cell_idx += 1,
            }
        }
    }

    fn merge_cell_into(&mut self, source: usize, target: usize) {
        let material = self.material(source);
        let heat_capacity = |solver: &Self, cell_idx: usize| -> f64 {
            let temperature_k = solver.temperature_k[cell_idx + 1];
            material
                .components
                .iter()
                .zip(&solver.masses[cell_idx * solver.stride..])
                .map(|(c, m)| m * c.specific_heat_j_kg_k.at(temperature_k))
                .sum()
        };
        let (c_source, c_target) = (heat_capacity(self, source), heat_capacity(self, target));
        let (t_source, t_target) = (
            self.temperature_k[source + 1],
            self.temperature_k[target + 1],
        );
        if c_source + c_target > 0.0 {
            self.temperature_k[target + 1] =
                (c_source * t_source + c_target * t_target) / (c_source + c_target);
        }
        for component_idx in 0..self.stride {
            self.masses[target * self.stride + component_idx] +=
                self.masses[source * self.stride + component_idx];
        }
        self.reference_mass[target] += self.reference_mass[source];
        self.remove_cell(source);
    }

    fn remove_cell(&mut self, source: usize) {
        self.last_change_k.clear();
        self.cell_layer.remove(source);
        self.reference_mass.remove(source);
        self.masses
            .drain(source * self.stride..(source + 1) * self.stride);
        self.temperature_k.remove(source + 1);
    }

    /// The outputs of the current state.
    /// `rates` are MLR, fuel MLR (kg/(m²·s)) and HRR (W/m²) of the step that ended now.
    fn sample(&self, time_s: f64, rates: [f64; 3], gasification_k: Option<f64>) -> Sample {
        let [mlr, fuel_flux, hrr] = rates;
        let n_cells = self.n_cells();
        let mut thicknesses = Vec::with_capacity(n_cells);
        let mut specimen_mass = 0.0;
        let mut specimen_thickness = 0.0;
        let mut last_specimen_cell = None;
        for cell_idx in 0..n_cells {
            let thickness = self.cell_thickness_m(cell_idx);
            if self.scenario.layers[self.cell_layer[cell_idx]].is_specimen {
                specimen_mass += self.masses[cell_idx * self.stride..][..self.stride]
                    .iter()
                    .sum::<f64>();
                specimen_thickness += thickness;
                last_specimen_cell = Some(cell_idx);
            }
            thicknesses.push(thickness);
        }
        let back_node = n_cells + 1;
        let specimen_back_k = match last_specimen_cell {
            // The specimen has burnt away entirely: its back is the exposed face.
            None => self.temperature_k[0],
            Some(a) if a + 1 < n_cells => {
                // Interface temperature from the flux through the two half-cells (and contact).
                let b = a + 1;
                let ra = thicknesses[a].max(MIN_CELL_THICKNESS_M)
                    / (2.0 * self.cell_conductivity_w_m_k(a));
                let rb = thicknesses[b].max(MIN_CELL_THICKNESS_M)
                    / (2.0 * self.cell_conductivity_w_m_k(b));
                let rc = self.scenario.layers[self.cell_layer[b]].contact_resistance_m2_k_w;
                let flux = (self.temperature_k[a + 1] - self.temperature_k[b + 1]) / (ra + rc + rb);
                self.temperature_k[a + 1] - flux * ra
            }
            Some(_) => self.temperature_k[back_node],
        };
        let total_thickness: f64 = thicknesses.iter().sum();
        let initial_total: f64 = self.scenario.layers.iter().map(|l| l.thickness_m).sum();
        let probes = self
            .scenario
            .probes
            .iter()
            .map(|probe| {
                // Height above the (fixed) back face of the stack.
                let height = initial_total - probe.depth_m;
                if height >= total_thickness {
                    return self.temperature_k[0];
                }
                let mut top = total_thickness;
                let mut above = (total_thickness, self.temperature_k[0]);
                for (thickness, &temperature_k) in thicknesses.iter().zip(&self.temperature_k[1..])
                {
                    let centre = top - 0.5 * thickness;
                    let here = (centre, temperature_k);
                    if height >= centre {
                        return interpolate_height(above, here, height);
                    }
                    above = here;
                    top -= thickness;
                }
                interpolate_height(above, (0.0, self.temperature_k[back_node]), height)
            })
            .collect();
        Sample {
            time_s,
            mass_kg_m2: specimen_mass,
            mlr_kg_m2_s: mlr,
            fuel_mlr_kg_m2_s: fuel_flux,
            hrr_w_m2: hrr,
            surface_temperature_k: self.temperature_k[0],
            back_temperature_k: specimen_back_k,
            stack_back_temperature_k: self.temperature_k[back_node],
            thickness_m: specimen_thickness,
            gasification_temperature_k: gasification_k.unwrap_or(self.temperature_k[0]),
            probe_temperatures_k: probes,
        }
    }

    /// Thickness of a cell from its component masses, m.
    fn cell_thickness_m(&self, cell_idx: usize) -> f64 {
        let material = self.material(cell_idx);
        material
            .components
            .iter()
            .zip(&self.masses[cell_idx * self.stride..])
            .map(|(c, m)| m / c.density_kg_m3)
            .sum()
    }

    /// Volume-fraction-weighted conductivity of a cell at its temperature, W/(m·K).
    fn cell_conductivity_w_m_k(&self, cell_idx: usize) -> f64 {
        let material = self.material(cell_idx);
        let temperature_k = self.temperature_k[cell_idx + 1];
        let mut thickness = 0.0;
        let mut conductivity_volume = 0.0;
        for (component, &mass) in material
            .components
            .iter()
            .zip(&self.masses[cell_idx * self.stride..])
        {
            let volume = mass / component.density_kg_m3;
            thickness += volume;
            conductivity_volume += volume * component.conductivity_w_m_k.at(temperature_k);
        }
        if thickness > 0.0 {
            conductivity_volume / thickness
        } else {
            material.components[0].conductivity_w_m_k.at(temperature_k)
        }
    }

    fn finish(self) -> History {
        let remaining_all: f64 = self.masses.iter().sum();
        let specimen_remaining = self.previous_sample.mass_kg_m2;
        let specimen_gas_total = self.specimen_initial_mass_kg_m2 - specimen_remaining;
        let summary = Summary {
            ignition_time_s: self.ignition_time_s,
            flameout_time_s: self.flameout_time_s,
            peak_hrr_w_m2: self.peak_hrr.0,
            time_of_peak_hrr_s: self.peak_hrr.1,
            peak_mlr_kg_m2_s: self.peak_mlr.0,
            time_of_peak_mlr_s: self.peak_mlr.1,
            total_heat_release_j_m2: self.total_heat_release_j_m2,
            initial_mass_kg_m2: self.specimen_initial_mass_kg_m2,
            mass_lost_kg_m2: specimen_gas_total,
            mean_gasification_temperature_k: if specimen_gas_total > 0.0 {
                Some(self.rate_weighted_temperature / specimen_gas_total)
            } else {
                None
            },
            energy: self.energy,
            mass: MassBudget {
                initial_kg_m2: self.initial_mass_all_kg_m2,
                remaining_kg_m2: remaining_all,
                released_gas_kg_m2: self.released_gas_kg_m2,
            },
            n_steps: self.n_steps,
            n_rejected_steps: self.n_rejected,
            n_iterations: self.n_iterations,
        };
        let mut depth_m = 0.0;
        let final_cells = (0..self.n_cells())
            .map(|cell_idx| {
                let material = self.material(cell_idx);
                let masses: Vec<f64> =
                    self.masses[cell_idx * self.stride..][..material.components.len()].to_vec();
                let thickness_m: f64 = masses
                    .iter()
                    .zip(&material.components)
                    .map(|(m, c)| m / c.density_kg_m3)
                    .sum();
                let snapshot = CellSnapshot {
                    layer_idx: self.cell_layer[cell_idx],
                    depth_m,
                    thickness_m,
                    temperature_k: self.temperature_k[cell_idx + 1],
                    component_masses_kg_m2: masses,
                };
                depth_m += thickness_m;
                snapshot
            })
            .collect();
        History {
            final_cells,
            probe_names: self
                .scenario
                .probes
                .iter()
                .map(|p| p.name.clone())
                .collect(),
            samples: self.samples,
            summary,
        }
    }
}

fn interpolate_height(above: (f64, f64), below: (f64, f64), height: f64) -> f64 {
    let span = above.0 - below.0;
    if span <= 0.0 {
        return above.1;
    }
    below.1 + (above.1 - below.1) * (height - below.0) / span
}

/// Time at which a quantity going from `v0` at `t0` to `v1` at `t1` reaches `level` upward.
fn crossing_time(t0: f64, v0: f64, t1: f64, v1: f64, level: f64) -> Option<f64> {
    if v1 < level {
        return None;
    }
    if v0 >= level || v1 <= v0 {
        return Some(t1);
    }
    Some(t0 + (t1 - t0) * (level - v0) / (v1 - v0))
}

/// Thomas algorithm for a tridiagonal system (`lower[0]` and `upper[n-1]` unused). The
/// matrices assembled here are diagonally dominant, so no pivoting is needed.
pub fn solve_tridiagonal(
    lower: &[f64],
    diagonal: &[f64],
    upper: &[f64],
    rhs: &[f64],
    scratch: &mut Vec<f64>,
    solution: &mut [f64],
) {
    let n = diagonal.len();
    scratch.clear();
    scratch.resize(n, 0.0);
    let mut denominator = diagonal[0];
    scratch[0] = upper[0] / denominator;
    solution[0] = rhs[0] / denominator;
    for i in 1..n {
        denominator = diagonal[i] - lower[i] * scratch[i - 1];
        scratch[i] = if i + 1 < n {
            upper[i] / denominator
        } else {
            0.0
        };
        solution[i] = (rhs[i] - lower[i] * solution[i - 1]) / denominator;
    }
    for i in (0..n - 1).rev() {
        solution[i] -= scratch[i] * solution[i + 1];
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn tridiagonal_solve_matches_a_hand_worked_system() {
        // [2 -1 0; -1 2 -1; 0 -1 2] x = [1 0 1] has x = [1 1 1].
        let mut scratch = Vec::new();
        let mut x = vec![0.0; 3];
        solve_tridiagonal(
            &[0.0, -1.0, -1.0],
            &[2.0, 2.0, 2.0],
            &[-1.0, -1.0, 0.0],
            &[1.0, 0.0, 1.0],
            &mut scratch,
            &mut x,
        );
        for value in x {
            assert!((value - 1.0).abs() < 1e-14);
        }
    }

    #[test]
    fn crossing_time_interpolates_between_steps() {
        assert_eq!(crossing_time(0.0, 0.0, 2.0, 4.0, 1.0), Some(0.5));
        assert_eq!(crossing_time(0.0, 0.0, 2.0, 0.5, 1.0), None);
    }
}
