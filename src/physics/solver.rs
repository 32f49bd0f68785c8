//! The 1-D transient conduction–pyrolysis solver (docs/physics.md §1; the numerics in
//! docs/numerics.md): conservative finite volumes on a grid stretched toward the exposed face;
//! each step is TR-BDF2 (`tr_bdf2_step`: a trapezoidal stage to t + γΔt and a BDF2 stage to
//! t + Δt, γ = 2 − √2, the mass updates limited so no mass goes negative, the embedded
//! estimate giving the local error that sets the next step), or, for materials with an
//! exothermic reaction, extrapolated backward Euler (`extrapolated_step`: one step of Δt and
//! two of Δt/2, combined as y_{Δt/2} + θ·(y_{Δt/2} − y_{Δt}), θ = 1 for second order, less
//! only where a mass would go negative, the difference of the two the local error); every
//! implicit solve is Newton's method on the non-linear terms with a tridiagonal Jacobian;
//! ignition and flame-out are located by shortening the step to them.
//!
//! Unknowns of each solve are the exposed-face temperature (a node without heat capacity whose
//! row is the face balance), the cell temperatures, and the back-face temperature. Masses are
//! advanced implicitly by `kinetics::advance_masses` at each iterate's temperatures, so each
//! cell's mass unknowns are eliminated into its temperature row (the reaction heat and its
//! slope through the Arrhenius factor, saturated by the step): the Newton iteration is on the
//! coupled temperature–conversion system of every cell.
//!
//! Exothermic reactions (docs/numerics.md, "Exothermic runaways"): a cell whose self-heating
//! slope outweighs its heat capacity over the step is past or near the fold of its implicit
//! balance, where the tangent is useless; such a cell is held, for one iteration, at the root
//! of its own non-linear balance reached first from its start temperature
//! (`first_root_from`), and the next plain Newton iteration confirms it (only a plain iteration
//! may end a solve, so the budget is that of a solved linear system). A runaway that the error
//! control would chase to ever shorter steps is let flash: a step of 20 e-folding times of the
//! runaway, offered once that is within the event tolerance (`flash_step`); a cell whose
//! exothermic reactant is used up within the step is exempt from the per-step caps (its
//! change is set by the heat released), not from the error estimate.

use super::kinetics::{
    advance_masses, advance_simple_first_order, is_simple_first_order, rate_constant_per_s,
    reaction_rate, StepMasses, GAS_CONSTANT_J_MOL_K,
};
use super::material::Material;
use super::output::{CellSnapshot, EnergyBudget, History, MassBudget, Sample, Summary};
use super::scenario::{BackFace, IgnitionRule, Numerics, Scenario, STEFAN_BOLTZMANN_W_M2_K4};
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
/// Newton iterations on the non-linear terms before a step is retried shorter.
const MAX_ITERATIONS: usize = 40;
/// A step never grows by more than this factor, nor shrinks by more on an error rejection.
const MAX_GROWTH: f64 = 2.0;
const MIN_SHRINK: f64 = 0.2;
/// Safety factor of the step controller.
const SAFETY: f64 = 0.85;
/// An event (ignition, flame-out) is located to within this fraction of the run time so far
/// (and at least `EVENT_TOLERANCE_FLOOR_S`).
const EVENT_TOLERANCE_RELATIVE: f64 = 1e-4;
const EVENT_TOLERANCE_FLOOR_S: f64 = 1e-5;
/// TR-BDF2's stage point, γ = 2 − √2 (the value for which both stages have the same
/// coefficient γΔt/2 and the scheme is L-stable).
const TR_BDF2_GAMMA: f64 = 2.0 - std::f64::consts::SQRT_2;
/// The step with which `evaluate_rates` takes the properties at the state (the masses it
/// leaves differ from the state's by k·1e-30 of themselves).
const RATE_PROBE_STEP_S: f64 = 1e-30;
/// The explicit half of TR-BDF2's trapezoidal stage may take at most this share of a
/// reactant's mass (beyond it the stage's mass update leans to backward Euler).
const EXPLICIT_SHARE: f64 = 0.5;

/// Runs the scenario to its end and returns the sampled curves and the summary.
pub fn simulate(scenario: &Scenario) -> Result<History, PhysicsError> {
    simulate_with(scenario, &mut Workspace::default())
}

/// Work arrays of the solver. A fit that runs many simulations keeps one per thread and passes
/// it to `simulate_with`, so no evaluation allocates them again; the result does not depend on
/// what the workspace held before.
#[derive(Default)]
pub struct Workspace {
    work: Work,
}

/// `simulate` with a caller-kept workspace (the same result, bit for bit).
pub fn simulate_with(
    scenario: &Scenario,
    workspace: &mut Workspace,
) -> Result<History, PhysicsError> {
    scenario.check()?;
    let mut solver = Solver::new(scenario, std::mem::take(&mut workspace.work));
    let outcome = solver.run();
    let (history, work) = solver.finish();
    workspace.work = work;
    outcome?;
    Ok(history)
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
    /// Conduction resistance from the cell's centre to either of its faces, m²·K/W.
    half_resistance_m2_k_w: f64,
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
    /// Fuel flux (instantaneous, from the state) and surface temperature at the end of the
    /// last accepted step.
    last_fuel_flux_kg_m2_s: f64,
    last_surface_temperature_k: f64,
    energy: EnergyBudget,
    initial_mass_all_kg_m2: f64,
    released_gas_kg_m2: f64,
    specimen_initial_mass_kg_m2: f64,
    /// Released so far by the specimen: gas (kg/m²), fuel (kg/m²), heat of combustion (J/m²).
    cumulative: [f64; 3],
    /// `cumulative` at each row's upper edge (the row time plus half an interval), from which
    /// the rows' interval-mean rates are made at the end.
    row_edges: Vec<[f64; 3]>,
    next_edge_s: f64,
    rate_weighted_temperature: f64,
    n_steps: usize,
    n_rejected: usize,
    n_iterations: usize,
    /// Temperature change of the last accepted step and its length, for the predictor.
    last_change_k: Vec<f64>,
    last_dt_s: f64,
    /// After a step rejected because a cell's runaway outpaces it: the step that lets that
    /// cell flash (use up its exothermic reactant within the step), tried once at this time.
    flash_dt_s: Option<f64>,
    flash_tried_at_s: f64,
    samples: Vec<Sample>,
    previous_sample: Sample,
    current_sample: Sample,
    next_output_s: f64,
    /// TR-BDF2 (every reaction endothermic or neutral) or extrapolated backward Euler (a
    /// material with an exothermic reaction, whose runaway handling is built on
    /// backward-Euler solves).
    tr_bdf2: bool,
    /// Whether the last attempt was rejected by the error control or the caps (TR-BDF2 then
    /// does not grow the step it accepts next).
    after_rejection: bool,
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
    // The full step's solution, the start state while the second half step runs, and the
    // first half step's consumption.
    full_k: Vec<f64>,
    full_masses: Vec<f64>,
    full_consumed: Vec<f64>,
    start_k: Vec<f64>,
    start_masses: Vec<f64>,
    half_consumed: Vec<f64>,
    thicknesses_m: Vec<f64>,
    /// Per cell, the temperature a runaway cell is held at in this iteration (NaN: not held).
    pinned_k: Vec<f64>,
    /// Kinetics of one cell at a trial temperature (the runaway root search).
    trial_rate_constants: Vec<f64>,
    trial_masses: StepMasses,
    /// Whether any cell's reaction-heat slope at the iterate is negative (self-heating): only
    /// then can a cell need holding or the exothermic heat check.
    any_self_heating: bool,
    /// Per layer, whether its kinetics take the first-order closed form
    /// (`kinetics::is_simple_first_order`), checked once per run.
    simple_first_order: Vec<bool>,
    /// How the next implicit solve differs from a plain backward-Euler solve (a TR-BDF2
    /// stage); all off for backward Euler.
    stage: StageTerms,
    /// The right-hand side at the start of the step (TR-BDF2's explicit half), from
    /// `evaluate_rates`: per cell the energy rate without the reaction heat (W/m²), the
    /// temperature rate (K/s) and the heat capacity (J/(m²·K)); per cell and reaction the
    /// reaction rate (kg/(m²·s)); the energy terms of those rates (W/m²).
    rate_energy_w_m2: Vec<f64>,
    rate_temperature_k_s: Vec<f64>,
    rate_capacity_j_m2_k: Vec<f64>,
    rate_reaction_kg_m2_s: Vec<f64>,
    rate_budget_w_m2: EnergyBudget,
    /// Whether the rates above are those of the current state.
    rates_valid: bool,
    /// The same rates at the end of the step just taken, from its last solved system (first
    /// same as last), and whether they were made; `accept` makes them current.
    next_energy_w_m2: Vec<f64>,
    next_temperature_k_s: Vec<f64>,
    next_capacity_j_m2_k: Vec<f64>,
    next_reaction_kg_m2_s: Vec<f64>,
    next_budget_w_m2: EnergyBudget,
    next_ready: bool,
    /// Per cell, the implicit coefficient of the mass update (s), and per cell and reaction
    /// the consumption (kg/m²) already counted before the implicit part of a stage.
    mass_dt_s: Vec<f64>,
    heat_offset_kg_m2: Vec<f64>,
    /// Per cell, the explicit weights of the two stages' mass updates (1 unless limited).
    stage_theta: Vec<f64>,
    stage_phi: Vec<f64>,
}

/// Switches of a TR-BDF2 stage in `implicit_solve`.
#[derive(Default, Clone, Copy)]
struct StageTerms {
    /// The heat capacity is the mean of the start's (`rate_capacity_j_m2_k`) and the iterate's.
    mean_capacity: bool,
    /// `rate_energy_w_m2` is added to each cell's balance (the explicit half).
    explicit_source: bool,
    /// Masses use `mass_dt_s` as their implicit coefficient, and the reaction heat counts
    /// `heat_offset_kg_m2` besides the implicit consumption.
    mass_terms: bool,
    /// The irradiance at this time instead of the step mean.
    irradiance_time_s: Option<f64>,
}

/// What one attempted step came to.
enum Attempt {
    Accepted(StepResult),
    /// Retry with this step; `converged` is false when an implicit solve failed.
    Rejected {
        retry_dt_s: f64,
        converged: bool,
    },
}

/// What the step controller weighs after an attempt: the largest estimated local errors and
/// the largest changes of a cell in the step.
struct StepMeasures {
    temperature_error_k: f64,
    /// Estimated error of a cell's mass, as a fraction of its initial mass.
    mass_error: f64,
    temperature_change_k: f64,
    /// Largest mass consumed in one cell, as a fraction of its initial mass.
    conversion: f64,
}

/// The step controller's decision, shared by both schemes.
enum StepVerdict {
    /// An estimate is not finite: the attempt failed.
    Failed,
    /// Too large an error or change: retry with this step.
    Retry { dt_s: f64 },
    /// Accepted; the next step to try.
    Accept { next_dt_s: f64 },
}

/// Compares `measures` with the tolerances and caps of `numerics` for a step of `dt_s`.
/// `root` undoes the power of Δt the error estimate grows with (`f64::sqrt` for Δt²,
/// `f64::cbrt` for Δt³); the caps' quantities grow as Δt. The step grows by at most
/// `MAX_GROWTH`, a retry shrinks it to between `MIN_SHRINK` and `SAFETY` of itself, and no
/// step leaves [min_step_s, max_step_s]; at the smallest step an attempt is accepted.
fn judge_step(
    numerics: &Numerics,
    measures: &StepMeasures,
    dt_s: f64,
    root: fn(f64) -> f64,
) -> StepVerdict {
    let error_ratio = (measures.temperature_error_k / numerics.temperature_tolerance_k)
        .max(measures.mass_error / numerics.conversion_tolerance);
    let cap_ratio = (measures.temperature_change_k / numerics.max_temperature_change_k)
        .max(measures.conversion / numerics.max_conversion_per_step);
    if !error_ratio.is_finite() || !cap_ratio.is_finite() {
        return StepVerdict::Failed;
    }
    let factor = (SAFETY / root(error_ratio))
        .min(SAFETY / cap_ratio)
        .min(MAX_GROWTH);
    if (error_ratio > 1.0 || cap_ratio > 1.0) && dt_s > numerics.min_step_s {
        return StepVerdict::Retry {
            dt_s: dt_s * factor.clamp(MIN_SHRINK, SAFETY),
        };
    }
    StepVerdict::Accept {
        next_dt_s: (dt_s * factor.max(MIN_SHRINK))
            .max(numerics.min_step_s)
            .min(numerics.max_step_s),
    }
}

/// What one accepted step contributed.
struct StepResult {
    specimen_gas_kg_m2: f64,
    specimen_fuel_kg_m2: f64,
    heat_release_j_m2: f64,
    budget: EnergyBudget,
    released_gas_kg_m2: f64,
    rate_weighted_temperature_sum: f64,
    /// The specimen's fuel release rate at the step's start, at t + γΔt and at its end
    /// (TR-BDF2 only): the shape of the release within the step for the output rows.
    fuel_rates: Option<[f64; 3]>,
}

impl<'a> Solver<'a> {
    fn new(scenario: &'a Scenario, mut work: Work) -> Self {
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
            for cell_thickness_m in layer.cell_thicknesses_m() {
                let cell_mass = cell_thickness_m / specific_volume;
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
            cumulative: [0.0; 3],
            row_edges: Vec::with_capacity(
                (scenario.duration_s / scenario.output_interval_s).min(1e7) as usize + 2,
            ),
            next_edge_s: 0.5 * scenario.output_interval_s,
            rate_weighted_temperature: 0.0,
            n_steps: 0,
            n_rejected: 0,
            n_iterations: 0,
            last_change_k: std::mem::take(&mut work.full_consumed),
            last_dt_s: 0.0,
            flash_dt_s: None,
            flash_tried_at_s: f64::NAN,
            samples: Vec::with_capacity(
                (scenario.duration_s / scenario.output_interval_s).min(1e7) as usize + 2,
            ),
            previous_sample: Sample::default(),
            current_sample: Sample::default(),
            next_output_s: 0.0,
            tr_bdf2: scenario.layers.iter().all(|layer| {
                layer
                    .material
                    .reactions
                    .iter()
                    .all(|r| r.heat_of_reaction_j_kg >= 0.0)
            }),
            after_rejection: false,
            work,
        };
        solver.work.rates_valid = false;
        solver.work.next_ready = false;
        solver.work.stage = StageTerms::default();
        solver.last_change_k.clear();
        solver.work.simple_first_order.clear();
        solver.work.simple_first_order.extend(
            scenario
                .layers
                .iter()
                .map(|layer| is_simple_first_order(&layer.material)),
        );
        if let IgnitionRule::AtTime(0.0) = scenario.ignition {
            solver.ignite(0.0);
        }
        let mut first = Sample::default();
        solver.fill_sample(0.0, None, &mut first);
        solver.samples.push(first.clone());
        solver.previous_sample = first;
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
            match self.try_step(dt_s) {
                Attempt::Accepted(result) => {
                    // An event inside the step: redo the step so it ends just past the event.
                    match self.event_inside_step(dt_s) {
                        Some(event_s) if dt_s > numerics.min_step_s => {
                            self.n_rejected += 1;
                            let tolerance_s =
                                (EVENT_TOLERANCE_RELATIVE * event_s).max(EVENT_TOLERANCE_FLOOR_S);
                            self.dt_s = (event_s - self.time_s + 0.5 * tolerance_s)
                                .max(numerics.min_step_s)
                                .min(0.5 * dt_s.max(numerics.min_step_s));
                        }
                        _ => {
                            self.accept(dt_s, result);
                            if let Some(flash_dt_s) = self.flash_dt_s.take() {
                                if flash_dt_s > self.dt_s {
                                    self.flash_tried_at_s = self.time_s;
                                    self.dt_s = flash_dt_s.min(numerics.max_step_s);
                                }
                            }
                        }
                    }
                }
                Attempt::Rejected {
                    retry_dt_s,
                    converged,
                } => {
                    self.n_rejected += 1;
                    let flash = self.flash_dt_s.take();
                    if let Some(flash_dt_s) =
                        flash.filter(|_| converged && self.flash_tried_at_s != self.time_s)
                    {
                        // A runaway the step cannot follow: let the cell flash in one step
                        // (the step is still checked by the error estimate).
                        self.flash_tried_at_s = self.time_s;
                        self.dt_s = flash_dt_s.min(numerics.max_step_s);
                        continue;
                    }
                    if dt_s <= numerics.min_step_s * (1.0 + 1e-9) {
                        return Err(self.stalled(converged));
                    }
                    self.dt_s = retry_dt_s.max(numerics.min_step_s);
                }
            }
        }
        Ok(())
    }

    /// The error when even the shortest step fails: names the time, the hottest cell and the
    /// reaction releasing or taking the most heat there.
    fn stalled(&self, converged: bool) -> PhysicsError {
        let numerics = self.scenario.numerics;
        let mut hottest = 0;
        for cell_idx in 0..self.n_cells() {
            if self.temperature_k[cell_idx + 1] > self.temperature_k[hottest + 1] {
                hottest = cell_idx;
            }
        }
        let mut detail = format!(
            "{} at a step of {} s (numerics.min_step_s); the surface is at {:.1} K",
            if converged {
                "the local error stays above the tolerance"
            } else {
                "the implicit solve does not converge"
            },
            numerics.min_step_s,
            self.temperature_k[0]
        );
        if self.n_cells() > 0 {
            let temperature_k = self.temperature_k[hottest + 1];
            let material = self.material(hottest);
            let masses = &self.masses[hottest * self.stride..];
            let strongest = material
                .reactions
                .iter()
                .enumerate()
                .map(|(idx, r)| {
                    let k = rate_constant_per_s(
                        r.pre_exponential_per_s,
                        r.activation_energy_j_mol,
                        temperature_k,
                    );
                    (
                        idx,
                        (k * masses[r.reactant] * r.heat_of_reaction_j_kg).abs(),
                        k,
                    )
                })
                .max_by(|a, b| a.1.total_cmp(&b.1));
            detail += &format!(
                "; the hottest cell is {} of {} (layer {}, {:.1} K)",
                hottest + 1,
                self.n_cells(),
                self.cell_layer[hottest] + 1,
                temperature_k
            );
            if let Some((idx, heat, k)) = strongest {
                detail += &format!(
                    ", where reaction {} (of `{}`) has a rate constant of {k:.3e} 1/s and a heat rate of {:.3e} W/m²",
                    idx + 1,
                    material.components[material.reactions[idx].reactant].name,
                    heat
                );
            }
        }
        PhysicsError::NoConvergence {
            time_s: self.time_s,
            detail,
        }
    }

    /// One step of `dt_s` (TR-BDF2, or extrapolated backward Euler for exothermic kinetics).
    /// On acceptance the new state is in `work.solution_k`, `work.new_masses` and
    /// `work.consumed`, and `self.dt_s` is the next step the error control proposes.
    fn try_step(&mut self, dt_s: f64) -> Attempt {
        let mut work = std::mem::take(&mut self.work);
        let attempt = if self.tr_bdf2 {
            self.tr_bdf2_step(&mut work, dt_s)
        } else {
            self.extrapolated_step(&mut work, dt_s)
        };
        self.work = work;
        attempt
    }

    fn extrapolated_step(&mut self, work: &mut Work, dt_s: f64) -> Attempt {
        let numerics = self.scenario.numerics;
        let n_cells = self.n_cells();
        let n_nodes = n_cells + 2;
        let failed = Attempt::Rejected {
            retry_dt_s: 0.5 * dt_s,
            converged: false,
        };
        // First guess: the last step's trend carried forward; the converged answer does not
        // depend on it.
        work.iterate_k.clear();
        work.iterate_k.extend_from_slice(&self.temperature_k);
        if self.last_change_k.len() == n_nodes && self.last_dt_s > 0.0 {
            let ratio = (dt_s / self.last_dt_s).min(2.0);
            for (guess, change) in work.iterate_k.iter_mut().zip(&self.last_change_k) {
                *guess += ratio * change;
            }
        }
        let Some(full_budget) = self.implicit_solve(work, dt_s) else {
            return failed;
        };
        work.full_k.clone_from(&work.solution_k);
        work.full_masses.clone_from(&work.new_masses);
        work.full_consumed.clone_from(&work.consumed);
        // First half step, from a guess halfway to the full step's answer.
        work.iterate_k.clear();
        work.iterate_k.extend(
            self.temperature_k
                .iter()
                .zip(&work.full_k)
                .map(|(a, b)| 0.5 * (a + b)),
        );
        let half_dt_s = 0.5 * dt_s;
        let Some(first_budget) = self.implicit_solve(work, half_dt_s) else {
            return failed;
        };
        work.half_consumed.clone_from(&work.consumed);
        // Second half step from the midpoint: the midpoint state goes into `self` for the
        // solve, the start state waits in `work.start_*`.
        std::mem::swap(&mut self.temperature_k, &mut work.solution_k);
        std::mem::swap(&mut self.masses, &mut work.new_masses);
        std::mem::swap(&mut work.start_k, &mut work.solution_k);
        std::mem::swap(&mut work.start_masses, &mut work.new_masses);
        let start_time_s = self.time_s;
        self.time_s = start_time_s + half_dt_s;
        work.iterate_k.clone_from(&work.full_k);
        let second = self.implicit_solve(work, half_dt_s);
        self.time_s = start_time_s;
        std::mem::swap(&mut self.temperature_k, &mut work.start_k);
        std::mem::swap(&mut self.masses, &mut work.start_masses);
        let Some(second_budget) = second else {
            return failed;
        };
        // Local error of the first-order solution (the two half steps) against the full step,
        // and the safety caps on what one step may change.
        let stride = self.stride;
        let (mut temperature_error, mut mass_error) = (0.0f64, 0.0f64);
        let (mut temperature_change, mut conversion) = (0.0f64, 0.0f64);
        let reaction_stride = self.reaction_stride();
        for cell_idx in 0..n_cells {
            let reference = self.reference_mass[cell_idx];
            let half = &work.new_masses[cell_idx * stride..][..stride];
            let full = &work.full_masses[cell_idx * stride..][..stride];
            let mass: f64 = half.iter().sum();
            // A cell whose exothermic reactants are used up within the step by both the full
            // step and the two half steps has flashed: its change is set by the heat released
            // (the energy balance), not by how finely the step resolves the runaway, so the
            // caps on one step's change do not apply; the error estimate still does.
            let flashed = self.has_flashed(cell_idx, half, full);
            if mass >= NEGLIGIBLE_MASS_FRACTION * reference {
                let node = cell_idx + 1;
                temperature_error =
                    temperature_error.max((work.solution_k[node] - work.full_k[node]).abs());
                if !flashed {
                    temperature_change = temperature_change
                        .max((work.solution_k[node] - self.temperature_k[node]).abs());
                }
            }
            let difference: f64 = half.iter().zip(full).map(|(a, b)| (a - b).abs()).sum();
            mass_error = mass_error.max(difference / reference);
            if !flashed {
                let consumed: f64 = (0..reaction_stride)
                    .map(|r| {
                        let idx = cell_idx * reaction_stride + r;
                        work.half_consumed[idx] + work.consumed[idx]
                    })
                    .sum();
                conversion = conversion.max(consumed / reference);
            }
        }
        let measures = StepMeasures {
            temperature_error_k: temperature_error,
            mass_error,
            temperature_change_k: temperature_change,
            conversion,
        };
        // The error of backward Euler over a step grows as Δt², the caps' quantities as Δt.
        match judge_step(&numerics, &measures, dt_s, f64::sqrt) {
            StepVerdict::Failed => return failed,
            StepVerdict::Retry { dt_s: retry_dt_s } => {
                self.flash_dt_s = self.flash_step(work, dt_s);
                return Attempt::Rejected {
                    retry_dt_s,
                    converged: true,
                };
            }
            StepVerdict::Accept { next_dt_s } => self.dt_s = next_dt_s,
        }
        self.flash_dt_s = self.flash_step(work, dt_s);
        // Richardson extrapolation y_h + θ·(y_h − y_full), θ = 1 (second order) unless that
        // would make a mass or a consumption negative (a reactant used up within the step):
        // then θ is the largest value in [0, 1] that keeps them non-negative. θ is continuous
        // in the state, so the result is a smooth function of the inputs (a fit's objective
        // has no jumps from switching the extrapolation on and off). Weights 1 + θ and −θ
        // sum to 1, so mass and energy still close.
        let mut budget = first_budget;
        budget.add(&second_budget);
        for idx in 0..work.consumed.len() {
            work.consumed[idx] += work.half_consumed[idx];
        }
        let limit = |theta: f64, half: f64, full: f64| {
            // half + θ·(half − full) ≥ 0 needs θ ≤ half / (full − half) when full > half.
            if full > half {
                theta.min((half / (full - half)).max(0.0))
            } else {
                theta
            }
        };
        let mut theta = 1.0f64;
        for (&h, &f) in work.new_masses.iter().zip(&work.full_masses) {
            theta = limit(theta, h, f);
        }
        for (&h, &f) in work.consumed.iter().zip(&work.full_consumed) {
            theta = limit(theta, h, f);
        }
        for (&h, &f) in work.solution_k.iter().zip(&work.full_k) {
            // Temperatures stay above half their first-order value.
            theta = limit(theta, 0.5 * h, f - 0.5 * h);
        }
        if theta > 0.0 {
            let combine = |half: f64, full: f64| half + theta * (half - full);
            budget = budget.extrapolated(&full_budget, theta);
            for (h, f) in work.solution_k.iter_mut().zip(&work.full_k) {
                *h = combine(*h, *f);
            }
            for (h, f) in work.new_masses.iter_mut().zip(&work.full_masses) {
                *h = combine(*h, *f).max(0.0);
            }
            for (h, f) in work.consumed.iter_mut().zip(&work.full_consumed) {
                *h = combine(*h, *f).max(0.0);
            }
        }
        Attempt::Accepted(self.step_result(work, budget))
    }

    /// One step of `dt_s` by TR-BDF2 (γ = 2 − √2): a trapezoidal stage to t + γ·Δt, then a
    /// BDF2 stage to t + Δt (docs/numerics.md, "Scheme"). With this γ both stages are
    /// backward-Euler-like solves with the same coefficient a = γ·Δt/2:
    /// stage 1  C̄·(T_γ − T_n) = a·(F_n + F_γ),  C̄ the mean of the start's and the iterate's;
    /// stage 2  C·(T_{n+1} − S) = a·F_{n+1},  S = T_n + c·(T_γ − T_n),  c = 1/(γ·(2 − γ)).
    /// Masses follow the same two stages per cell, each limited so that no mass goes negative
    /// (the trapezoidal stage is not monotone for k·Δt > 2): the explicit half of stage 1
    /// takes at most half of a reactant, the extrapolation of stage 2 at most what the
    /// mass holds, the time not covered explicitly going to the implicit part (first order
    /// in the limit). The reaction heat of each stage is ΔH times the mass
    /// it consumes, and the step's budget is stage 2's plus c times stage 1's, each taken
    /// from its solved system, so energy and mass close to rounding. The local error is the
    /// embedded estimate of Bank et al. (1985) from the rates at t, t + γΔt and t + Δt.
    fn tr_bdf2_step(&mut self, work: &mut Work, dt_s: f64) -> Attempt {
        let numerics = self.scenario.numerics;
        let n_cells = self.n_cells();
        let n_nodes = n_cells + 2;
        let stride = self.stride;
        let reaction_stride = self.reaction_stride();
        let failed = Attempt::Rejected {
            retry_dt_s: 0.5 * dt_s,
            converged: false,
        };
        let gamma = TR_BDF2_GAMMA;
        let a_s = 0.5 * gamma * dt_s;
        let extrapolation = 1.0 / (gamma * (2.0 - gamma));
        work.next_ready = false;
        if !work.rates_valid {
            self.evaluate_rates(work);
        }
        // Stage 1, trapezoidal. Start masses m* = m_n + θ·a·(dm/dt)_n per cell.
        work.stage_theta.clear();
        work.stage_theta.resize(n_cells, 1.0);
        work.mass_dt_s.clear();
        work.mass_dt_s.resize(n_cells, a_s);
        work.heat_offset_kg_m2.clear();
        work.heat_offset_kg_m2
            .resize(n_cells * reaction_stride, 0.0);
        work.start_masses.clone_from(&self.masses);
        for cell_idx in 0..n_cells {
            let material = self.material(cell_idx);
            if material.reactions.is_empty() {
                continue;
            }
            let masses = &self.masses[cell_idx * stride..][..stride];
            let rates = &work.rate_reaction_kg_m2_s[cell_idx * reaction_stride..];
            let mut theta = 1.0f64;
            for (component_idx, &mass) in masses.iter().enumerate() {
                let loss: f64 = material
                    .reactions
                    .iter()
                    .enumerate()
                    .filter(|(_, r)| r.reactant == component_idx)
                    .map(|(idx, _)| rates[idx])
                    .sum();
                if a_s * loss > EXPLICIT_SHARE * mass {
                    theta = theta.min(EXPLICIT_SHARE * mass / (a_s * loss));
                }
            }
            let start = &mut work.start_masses[cell_idx * stride..][..stride];
            for (reaction_idx, reaction) in material.reactions.iter().enumerate() {
                let taken = theta * a_s * rates[reaction_idx];
                work.heat_offset_kg_m2[cell_idx * reaction_stride + reaction_idx] = taken;
                start[reaction.reactant] -= taken;
                if let Some(product) = reaction.product {
                    start[product] += reaction.product_yield * taken;
                }
            }
            for mass in start.iter_mut() {
                *mass = mass.max(0.0);
            }
            work.stage_theta[cell_idx] = theta;
            work.mass_dt_s[cell_idx] = (2.0 - theta) * a_s;
        }
        work.iterate_k.clear();
        work.iterate_k.extend_from_slice(&self.temperature_k);
        if self.last_change_k.len() == n_nodes && self.last_dt_s > 0.0 {
            let ratio = (gamma * dt_s / self.last_dt_s).min(2.0);
            for (guess, change) in work.iterate_k.iter_mut().zip(&self.last_change_k) {
                *guess += ratio * change;
            }
        }
        let start_time_s = self.time_s;
        work.stage = StageTerms {
            mean_capacity: true,
            explicit_source: true,
            mass_terms: true,
            irradiance_time_s: Some(start_time_s + gamma * dt_s),
        };
        std::mem::swap(&mut self.masses, &mut work.start_masses);
        let first = self.implicit_solve(work, a_s);
        std::mem::swap(&mut self.masses, &mut work.start_masses);
        work.stage = StageTerms::default();
        let Some(mut first_budget) = first else {
            return failed;
        };
        // The explicit half's energy terms (its rates sum to the cells' explicit sources).
        first_budget.add_scaled(&work.rate_budget_w_m2, a_s);
        work.full_k.clone_from(&work.solution_k);
        work.full_masses.clone_from(&work.new_masses);
        // Stage 1's whole consumption, and its implicit part (for the rate at t + γΔt).
        work.half_consumed.clone_from(&work.consumed);
        work.full_consumed.clone_from(&work.consumed);
        for (total, offset) in work.full_consumed.iter_mut().zip(&work.heat_offset_kg_m2) {
            *total += offset;
        }
        // Stage 2, BDF2, from S = T_n + c·(T_γ − T_n) and masses m_n + φ·(m_γ − m_n).
        work.start_k.clear();
        work.start_k.extend(
            self.temperature_k
                .iter()
                .zip(&work.full_k)
                .map(|(start, stage)| start + extrapolation * (stage - start)),
        );
        work.stage_phi.clear();
        work.stage_phi.resize(n_cells, extrapolation);
        for cell_idx in 0..n_cells {
            let start = &self.masses[cell_idx * stride..][..stride];
            let stage = &work.full_masses[cell_idx * stride..][..stride];
            let mut phi = extrapolation;
            for (&m0, &m1) in start.iter().zip(stage) {
                // m0 + φ·(m1 − m0) ≥ 0; φ ≥ 1 since m1 ≥ 0.
                if m1 < m0 && m0 + phi * (m1 - m0) < 0.0 {
                    phi = phi.min(m0 / (m0 - m1));
                }
            }
            work.stage_phi[cell_idx] = phi;
            work.mass_dt_s[cell_idx] = dt_s * (1.0 - phi * gamma);
            for idx in 0..reaction_stride {
                let idx = cell_idx * reaction_stride + idx;
                work.heat_offset_kg_m2[idx] = (phi - extrapolation) * work.full_consumed[idx];
            }
        }
        work.start_masses.clear();
        work.start_masses
            .extend(self.masses.iter().zip(&work.full_masses).enumerate().map(
                |(idx, (m0, m1))| {
                    let phi = work.stage_phi[idx / stride];
                    (m0 + phi * (m1 - m0)).max(0.0)
                },
            ));
        work.iterate_k.clear();
        work.iterate_k.extend(
            self.temperature_k
                .iter()
                .zip(&work.full_k)
                .map(|(start, stage)| stage + (1.0 - gamma) / gamma * (stage - start)),
        );
        work.stage = StageTerms {
            mean_capacity: false,
            explicit_source: false,
            mass_terms: true,
            irradiance_time_s: Some(start_time_s + dt_s),
        };
        std::mem::swap(&mut self.temperature_k, &mut work.start_k);
        std::mem::swap(&mut self.masses, &mut work.start_masses);
        let second = self.implicit_solve(work, a_s);
        std::mem::swap(&mut self.temperature_k, &mut work.start_k);
        std::mem::swap(&mut self.masses, &mut work.start_masses);
        work.stage = StageTerms::default();
        let Some(mut budget) = second else {
            return failed;
        };
        // The rates at t + Δt as the stage-2 system has them, for the next step's explicit
        // half: energy without the reaction heat is C·(T − S)/a plus the reaction heat booked.
        work.next_energy_w_m2.clear();
        work.next_temperature_k_s.clear();
        work.next_capacity_j_m2_k.clear();
        work.next_reaction_kg_m2_s.clear();
        work.next_reaction_kg_m2_s
            .resize(n_cells * reaction_stride, 0.0);
        for cell_idx in 0..n_cells {
            let node = cell_idx + 1;
            let properties = &work.properties[cell_idx];
            let booked_w_m2 = properties.reaction_heat_w_m2
                + properties.reaction_heat_slope_w_m2_k
                    * (work.solution_k[node] - work.iterate_k[node]);
            let capacity = properties.heat_capacity_j_m2_k;
            let energy_w_m2 =
                capacity * (work.solution_k[node] - work.start_k[node]) / a_s + booked_w_m2;
            let mut heat_w_m2 = 0.0;
            for (reaction_idx, reaction) in self.material(cell_idx).reactions.iter().enumerate() {
                let idx = cell_idx * reaction_stride + reaction_idx;
                let rate = work.consumed[idx] / work.mass_dt_s[cell_idx];
                work.next_reaction_kg_m2_s[idx] = rate;
                heat_w_m2 += rate * reaction.heat_of_reaction_j_kg;
            }
            work.next_energy_w_m2.push(energy_w_m2);
            work.next_capacity_j_m2_k.push(capacity);
            work.next_temperature_k_s.push(if capacity > 0.0 {
                (energy_w_m2 - heat_w_m2) / capacity
            } else {
                0.0
            });
        }
        work.next_budget_w_m2 = EnergyBudget::default();
        work.next_budget_w_m2.add_scaled(&budget, 1.0 / a_s);
        work.next_budget_w_m2.reaction_heat_j_m2 = 0.0;
        work.next_budget_w_m2.stored_j_m2 = 0.0;
        budget.add_scaled(&first_budget, extrapolation);
        // Local error (Bank et al. 1985): 2k·Δt·(f_n/γ − f_γ/(γ(1 − γ)) + f_{n+1}/(1 − γ)),
        // k = (−3γ² + 4γ − 2)/(12(2 − γ)), a second divided difference of the rates times
        // kΔt³; and the safety caps on what one step may change.
        let k_error = (-3.0 * gamma * gamma + 4.0 * gamma - 2.0) / (12.0 * (2.0 - gamma));
        let estimate = |f0: f64, f1: f64, f2: f64| {
            (2.0 * k_error
                * dt_s
                * (f0 / gamma - f1 / (gamma * (1.0 - gamma)) + f2 / (1.0 - gamma)))
                .abs()
        };
        let (mut temperature_error, mut mass_error) = (0.0f64, 0.0f64);
        let (mut temperature_change, mut conversion) = (0.0f64, 0.0f64);
        let mut fuel_rates = [0.0f64; 3];
        for cell_idx in 0..n_cells {
            let layer = &self.scenario.layers[self.cell_layer[cell_idx]];
            if !layer.is_specimen {
                continue;
            }
            let first_dt_s = (2.0 - work.stage_theta[cell_idx]) * a_s;
            for (reaction_idx, reaction) in layer.material.reactions.iter().enumerate() {
                let idx = cell_idx * reaction_stride + reaction_idx;
                let fuel = (1.0 - reaction.product_yield) * reaction.gas.fuel_fraction;
                fuel_rates[0] += fuel * work.rate_reaction_kg_m2_s[idx];
                fuel_rates[1] += fuel * work.half_consumed[idx] / first_dt_s;
                fuel_rates[2] += fuel * work.consumed[idx] / work.mass_dt_s[cell_idx];
            }
        }
        for cell_idx in 0..n_cells {
            let reference = self.reference_mass[cell_idx];
            let mass: f64 = work.new_masses[cell_idx * stride..][..stride].iter().sum();
            let node = cell_idx + 1;
            if mass >= NEGLIGIBLE_MASS_FRACTION * reference {
                let f0 = work.rate_temperature_k_s[cell_idx];
                let f1 = (work.full_k[node] - self.temperature_k[node]) / a_s - f0;
                let f2 = (work.solution_k[node] - work.start_k[node]) / a_s;
                temperature_error = temperature_error.max(estimate(f0, f1, f2));
                temperature_change = temperature_change
                    .max((work.solution_k[node] - self.temperature_k[node]).abs());
            }
            let first_dt_s = (2.0 - work.stage_theta[cell_idx]) * a_s;
            let second_dt_s = work.mass_dt_s[cell_idx];
            let phi = work.stage_phi[cell_idx];
            let (mut difference, mut consumed_total) = (0.0, 0.0);
            for r in 0..reaction_stride {
                let idx = cell_idx * reaction_stride + r;
                difference += estimate(
                    work.rate_reaction_kg_m2_s[idx],
                    work.half_consumed[idx] / first_dt_s,
                    work.consumed[idx] / second_dt_s,
                );
                // The step's consumption: φ·(stage 1) + stage 2.
                let consumed = phi * work.full_consumed[idx] + work.consumed[idx];
                work.consumed[idx] = consumed;
                consumed_total += consumed;
            }
            mass_error = mass_error.max(difference / reference);
            conversion = conversion.max(consumed_total / reference);
        }
        let measures = StepMeasures {
            temperature_error_k: temperature_error,
            mass_error,
            temperature_change_k: temperature_change,
            conversion,
        };
        // The local error of a second-order step grows as Δt³, the caps' quantities as Δt.
        match judge_step(&numerics, &measures, dt_s, f64::cbrt) {
            StepVerdict::Failed => return failed,
            StepVerdict::Retry { dt_s: retry_dt_s } => {
                self.after_rejection = true;
                return Attempt::Rejected {
                    retry_dt_s,
                    converged: true,
                };
            }
            // Right after a rejection the step may not grow.
            StepVerdict::Accept { next_dt_s } => {
                self.dt_s = if std::mem::take(&mut self.after_rejection) {
                    next_dt_s.min(dt_s.max(numerics.min_step_s).min(numerics.max_step_s))
                } else {
                    next_dt_s
                };
            }
        }
        work.next_ready = true;
        let mut result = self.step_result(work, budget);
        result.fuel_rates = Some(fuel_rates);
        Attempt::Accepted(result)
    }

    /// The right-hand side of the semi-discrete system at the state in `self` (TR-BDF2's
    /// explicit half), into `work.rate_*`: properties and reaction rates at the state, the
    /// irradiance at this instant, and the face at the root of its own balance against the
    /// first cell (the face has no heat capacity). The first cell receives the face's net
    /// gain (absorbed − re-radiated − convected), the last cell loses the back-face flux, so
    /// the cells' energy rates sum to the absorbed minus the losses to rounding.
    fn evaluate_rates(&self, work: &mut Work) {
        let n_cells = self.n_cells();
        let reaction_stride = self.reaction_stride();
        let exposure = &self.scenario.exposure;
        work.stage = StageTerms {
            irradiance_time_s: Some(self.time_s),
            ..StageTerms::default()
        };
        work.iterate_k.clear();
        work.iterate_k.extend_from_slice(&self.temperature_k);
        // Properties at the state: a vanishing step leaves the masses as they are.
        self.evaluate_cells(work, RATE_PROBE_STEP_S);
        let face_absorbed_w_m2 = self.deposit_radiation(work, self.time_s);
        work.stage = StageTerms::default();
        let temperature_k = &self.temperature_k;
        // The face's own balance: g·(T_f − T_1) + h·(T_f − T∞) + εσ(T_f⁴ − T∞⁴) = absorbed.
        let ambient_k = exposure.ambient_temperature_k;
        let h_w_m2_k = if self.is_flaming {
            exposure.flaming_convective_coefficient_w_m2_k
        } else {
            exposure.convective_coefficient_w_m2_k
        };
        let radiating = if exposure.has_reradiation {
            work.properties[0].emissivity * STEFAN_BOLTZMANN_W_M2_K4
        } else {
            0.0
        };
        let face_conductance = 1.0 / work.properties[0].half_resistance_m2_k_w;
        let mut face_k = temperature_k[0];
        for _ in 0..30 {
            let residual = face_conductance * (face_k - temperature_k[1])
                + h_w_m2_k * (face_k - ambient_k)
                + radiating * (face_k.powi(4) - ambient_k.powi(4))
                - face_absorbed_w_m2;
            let slope = face_conductance + h_w_m2_k + 4.0 * radiating * face_k.powi(3);
            let change = residual / slope;
            face_k -= change;
            if change.is_nan() || change.abs() <= 1e-9 * face_k {
                break;
            }
        }
        let reradiated_w_m2 = radiating * (face_k.powi(4) - ambient_k.powi(4));
        let convected_w_m2 = h_w_m2_k * (face_k - ambient_k);
        work.rate_energy_w_m2.clear();
        work.rate_temperature_k_s.clear();
        work.rate_capacity_j_m2_k.clear();
        work.rate_reaction_kg_m2_s.clear();
        work.rate_reaction_kg_m2_s
            .resize(n_cells * reaction_stride, 0.0);
        let mut inflow_w_m2 = face_absorbed_w_m2 - reradiated_w_m2 - convected_w_m2;
        let mut back_loss_w_m2 = 0.0;
        for cell_idx in 0..n_cells {
            let node = cell_idx + 1;
            let (_, after) = self.cell_conductances(work, cell_idx);
            let outflow_w_m2 = after * (temperature_k[node] - temperature_k[node + 1]);
            if cell_idx + 1 == n_cells {
                back_loss_w_m2 = outflow_w_m2;
            }
            let energy_w_m2 = inflow_w_m2 - outflow_w_m2 + work.absorbed_w_m2[cell_idx];
            inflow_w_m2 = outflow_w_m2;
            let layer = &self.scenario.layers[self.cell_layer[cell_idx]];
            let masses = &self.masses[cell_idx * self.stride..];
            let mut heat_w_m2 = 0.0;
            for (reaction_idx, reaction) in layer.material.reactions.iter().enumerate() {
                let k = rate_constant_per_s(
                    reaction.pre_exponential_per_s,
                    reaction.activation_energy_j_mol,
                    temperature_k[node],
                );
                let rate = reaction_rate(
                    k,
                    masses[reaction.reactant],
                    self.reference_mass[cell_idx],
                    reaction.order,
                );
                work.rate_reaction_kg_m2_s[cell_idx * reaction_stride + reaction_idx] = rate;
                heat_w_m2 += rate * reaction.heat_of_reaction_j_kg;
            }
            let capacity = work.properties[cell_idx].heat_capacity_j_m2_k;
            work.rate_energy_w_m2.push(energy_w_m2);
            work.rate_capacity_j_m2_k.push(capacity);
            work.rate_temperature_k_s.push(if capacity > 0.0 {
                (energy_w_m2 - heat_w_m2) / capacity
            } else {
                0.0
            });
        }
        work.rate_budget_w_m2 = EnergyBudget {
            absorbed_j_m2: face_absorbed_w_m2 + work.absorbed_w_m2.iter().sum::<f64>(),
            reradiated_j_m2: reradiated_w_m2,
            convected_j_m2: convected_w_m2,
            back_loss_j_m2: back_loss_w_m2,
            ..EnergyBudget::default()
        };
        work.rates_valid = true;
    }

    /// The step that lets a runaway cell flash, when the last solve (in `work`) has a cell in a
    /// thermal runaway the step is chasing. A cell runs away when the adiabatic rise of its
    /// remaining exothermic reactant, ΔT_ad = Σ|ΔH|·m/C, exceeds ten times the Arrhenius
    /// temperature scale R·T²/E (Semenov's self-heating criterion, with a margin); the step
    /// is chasing it when the runaway's e-folding time τ = C/|∂(Σ ω ΔH)/∂T| is under ten
    /// steps. Followed to its end such a runaway needs ever shorter steps (of order 1e-12 s at
    /// the peak of a strong exotherm), though it is over within a few τ: the step returned is
    /// 20·τ, which the error estimate then checks like any other. It is offered only once 20·τ
    /// is within the event tolerance (1e-4 of the elapsed time, at least 1e-5 s), so a flash
    /// moves a cell's burn by no more than an ignition time may be off.
    fn flash_step(&self, work: &Work, dt_s: f64) -> Option<f64> {
        let mut longest: Option<f64> = None;
        for cell_idx in 0..self.n_cells() {
            let properties = &work.properties[cell_idx];
            let slope = properties.reaction_heat_slope_w_m2_k;
            let capacity = properties.heat_capacity_j_m2_k;
            if slope >= 0.0 || capacity <= 0.0 {
                continue;
            }
            let e_folding_s = capacity / -slope;
            // Flashing moves the cell's burn by up to the flash step: only when that is within
            // the event tolerance (as an ignition is located).
            let tolerance_s = (EVENT_TOLERANCE_RELATIVE * self.time_s).max(EVENT_TOLERANCE_FLOOR_S);
            if e_folding_s >= 10.0 * dt_s || 20.0 * e_folding_s > tolerance_s {
                continue;
            }
            let temperature_k = work.solution_k[cell_idx + 1];
            let masses = &work.new_masses[cell_idx * self.stride..];
            let runs_away = self.material(cell_idx).reactions.iter().any(|r| {
                let rise_k = -r.heat_of_reaction_j_kg * masses[r.reactant] / capacity;
                let scale_k = GAS_CONSTANT_J_MOL_K * temperature_k * temperature_k
                    / r.activation_energy_j_mol;
                r.heat_of_reaction_j_kg < 0.0 && rise_k > 10.0 * scale_k
            });
            if runs_away {
                let flash_s = 20.0 * e_folding_s;
                if flash_s > dt_s {
                    longest = Some(longest.map_or(flash_s, |l: f64| l.max(flash_s)));
                }
            }
        }
        longest
    }

    /// Whether every exothermic reactant of a cell that had mass at the step's start is down to
    /// under 1 % of it at the end of both the full step and the two half steps.
    fn has_flashed(&self, cell_idx: usize, half: &[f64], full: &[f64]) -> bool {
        let material = self.material(cell_idx);
        let start = &self.masses[cell_idx * self.stride..][..self.stride];
        let floor = NEGLIGIBLE_MASS_FRACTION * self.reference_mass[cell_idx];
        let mut any = false;
        for reaction in &material.reactions {
            if reaction.heat_of_reaction_j_kg >= 0.0 || start[reaction.reactant] <= floor {
                continue;
            }
            let limit = 0.01 * start[reaction.reactant];
            if half[reaction.reactant] > limit || full[reaction.reactant] > limit {
                return false;
            }
            any = true;
        }
        any
    }

    /// One backward-Euler step of `dt_s` from the state in `self`, by Newton iteration from
    /// the guess in `work.iterate_k`. The answer is in `work.solution_k`, `work.new_masses`
    /// and `work.consumed`; `None` when it does not converge.
    fn implicit_solve(&mut self, work: &mut Work, dt_s: f64) -> Option<EnergyBudget> {
        let numerics = self.scenario.numerics;
        let time_new_s = self.time_s + dt_s;
        let mut budget = EnergyBudget::default();
        let mut converged = false;
        // An iteration that held runaway cells at their own roots is followed by a plain
        // Newton iteration, which alone may end the solve (its linear system is the one whose
        // energy terms are kept, so the budget closes to rounding).
        let mut held_last = false;
        let mut force_hold = false;
        for _ in 0..MAX_ITERATIONS {
            self.n_iterations += 1;
            self.evaluate_cells(work, dt_s);
            let face_absorbed_w_m2 = self.deposit_radiation(work, time_new_s);
            let held = !held_last
                && work.any_self_heating
                && self.hold_runaway_cells(work, dt_s, force_hold);
            budget = self.assemble_and_solve(work, dt_s, face_absorbed_w_m2, held);
            let change = work
                .solution_k
                .iter()
                .zip(&work.iterate_k)
                .map(|(a, b)| (a - b).abs())
                .fold(0.0, f64::max);
            held_last = held;
            let forced = force_hold;
            force_hold = false;
            let thrown_off = !change.is_finite()
                || (work.any_self_heating && work.solution_k.iter().any(|t| *t <= 0.0));
            if thrown_off {
                if held || forced || !work.any_self_heating {
                    break;
                }
                // The tangent system of a self-heating cell past its fold sent the iterate
                // off: try again from the same iterate, holding those cells at their roots.
                force_hold = true;
                continue;
            }
            if change <= numerics.iteration_tolerance_k
                && !held
                && (!work.any_self_heating || self.exothermic_heat_is_consistent(work))
            {
                converged = true;
                break;
            }
            // T⁴ re-radiation also balances at a negative face temperature: keep the iterates
            // on the physical branch (a strongly exothermic cell can throw the guess there).
            for (value, &old) in work.solution_k.iter_mut().zip(&self.temperature_k) {
                if *value <= 0.0 {
                    *value = 0.5 * old;
                }
            }
            std::mem::swap(&mut work.iterate_k, &mut work.solution_k);
        }
        let valid = converged && work.solution_k.iter().all(|t| t.is_finite() && *t > 0.0);
        valid.then_some(budget)
    }

    /// Whether, in every cell with an exothermic slope, the linearised reaction heat the
    /// solved system books differs from the heat of the mass actually consumed (at the
    /// iterate) by under 1e-7 of it. A steep self-heating slope times the iteration tolerance
    /// would otherwise book heat no mass released (4e-5 of the total over an adiabatic
    /// runaway); endothermic cells, whose slope is mild, keep the plain tolerance.
    fn exothermic_heat_is_consistent(&self, work: &Work) -> bool {
        work.properties.iter().enumerate().all(|(cell_idx, p)| {
            let node = cell_idx + 1;
            p.reaction_heat_slope_w_m2_k >= 0.0
                || (p.reaction_heat_slope_w_m2_k * (work.solution_k[node] - work.iterate_k[node]))
                    .abs()
                    <= 1e-7 * p.reaction_heat_w_m2.abs()
        })
    }

    /// The fuel mass flux of the specimen at the state given (instantaneous rates), kg/(m²·s).
    fn fuel_flux_kg_m2_s(&self, temperature_k: &[f64], masses: &[f64]) -> f64 {
        let mut flux = 0.0;
        for cell_idx in 0..self.n_cells() {
            let layer = &self.scenario.layers[self.cell_layer[cell_idx]];
            if !layer.is_specimen {
                continue;
            }
            let cell_masses = &masses[cell_idx * self.stride..];
            for reaction in &layer.material.reactions {
                let k = rate_constant_per_s(
                    reaction.pre_exponential_per_s,
                    reaction.activation_energy_j_mol,
                    temperature_k[cell_idx + 1],
                );
                let rate = reaction_rate(
                    k,
                    cell_masses[reaction.reactant],
                    self.reference_mass[cell_idx],
                    reaction.order,
                );
                flux += rate * (1.0 - reaction.product_yield) * reaction.gas.fuel_fraction;
            }
        }
        flux
    }

    /// The quantity the flame rule watches, at the candidate state in `work`, and its level:
    /// `Some((value_before, value_after, level, upward))` when an event may happen this step.
    fn watched_crossing(&self) -> Option<(f64, f64, f64, bool)> {
        let work = &self.work;
        let may_ignite = !self.is_flaming
            && (self.ignition_time_s.is_none() || self.scenario.flameout.may_reignite);
        if may_ignite {
            match self.scenario.ignition {
                IgnitionRule::CriticalFuelMassFlux(critical) => Some((
                    self.last_fuel_flux_kg_m2_s,
                    self.fuel_flux_kg_m2_s(&work.solution_k, &work.new_masses),
                    critical,
                    true,
                )),
                IgnitionRule::SurfaceTemperature(critical_k) => Some((
                    self.last_surface_temperature_k,
                    work.solution_k[0],
                    critical_k,
                    true,
                )),
                IgnitionRule::AtTime(_) | IgnitionRule::Never => None,
            }
        } else if self.is_flaming && self.has_exceeded_flameout_threshold {
            Some((
                self.last_fuel_flux_kg_m2_s,
                self.fuel_flux_kg_m2_s(&work.solution_k, &work.new_masses),
                self.scenario.flameout.threshold_fuel_mass_flux_kg_m2_s,
                false,
            ))
        } else {
            None
        }
    }

    /// The time of an event that falls inside the candidate step of `dt_s` and not within the
    /// event tolerance of its end.
    fn event_inside_step(&self, dt_s: f64) -> Option<f64> {
        let (before, after, level, upward) = self.watched_crossing()?;
        let t0 = self.time_s;
        let t1 = t0 + dt_s;
        let event_s = if upward {
            if before >= level {
                return None;
            }
            crossing_time(t0, before, t1, after, level)?
        } else {
            if before < level {
                return None;
            }
            crossing_time(t0, -before, t1, -after, -level)?
        };
        let tolerance_s = (EVENT_TOLERANCE_RELATIVE * event_s).max(EVENT_TOLERANCE_FLOOR_S);
        (t1 - event_s > tolerance_s).then_some(event_s)
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
        work.any_self_heating = false;
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
            let consumed =
                &mut work.consumed[cell_idx * reaction_stride..][..material.reactions.len()];
            let mut properties = CellProperties::default();
            let mass_dt_s = if work.stage.mass_terms {
                work.mass_dt_s[cell_idx]
            } else {
                dt_s
            };
            if material.reactions.is_empty() {
                new.copy_from_slice(old);
            } else {
                if work.simple_first_order[self.cell_layer[cell_idx]] {
                    // The closed form straight into the cell's slots (zeroed above).
                    let remaining = &mut work.step_masses.remaining_fraction;
                    remaining.clear();
                    remaining.resize(material.reactions.len(), 1.0);
                    advance_simple_first_order(
                        material,
                        &work.rate_constants,
                        old,
                        mass_dt_s,
                        new,
                        consumed,
                        remaining,
                    );
                } else {
                    advance_masses(
                        material,
                        &work.rate_constants,
                        old,
                        self.reference_mass[cell_idx],
                        mass_dt_s,
                        &mut work.step_masses,
                    );
                    new.copy_from_slice(&work.step_masses.masses);
                    consumed.copy_from_slice(&work.step_masses.consumed);
                }
                for (reaction_idx, reaction) in material.reactions.iter().enumerate() {
                    let heat_w_m2 = consumed[reaction_idx] / dt_s * reaction.heat_of_reaction_j_kg;
                    properties.reaction_heat_w_m2 += if work.stage.mass_terms {
                        // What the stage counted before its implicit part.
                        heat_w_m2
                            + work.heat_offset_kg_m2[cell_idx * reaction_stride + reaction_idx]
                                / dt_s
                                * reaction.heat_of_reaction_j_kg
                    } else {
                        heat_w_m2
                    };
                    // Newton: ∂(heat)/∂T through k(T), with the step's saturation (a reactant
                    // used up within the step gives no more heat however hot the cell is).
                    // Negative for exothermic reactions: the diagonal weakens and a runaway is
                    // followed by shorter steps.
                    properties.reaction_heat_slope_w_m2_k += heat_w_m2
                        * reaction.activation_energy_j_mol
                        / (GAS_CONSTANT_J_MOL_K * temperature_k * temperature_k)
                        * work.step_masses.remaining_fraction[reaction_idx];
                }
            }
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
            if work.stage.mean_capacity {
                properties.heat_capacity_j_m2_k =
                    0.5 * (work.rate_capacity_j_m2_k[cell_idx] + properties.heat_capacity_j_m2_k);
            }
            properties.thickness_m = thickness_m;
            properties.half_resistance_m2_k_w =
                thickness_m.max(MIN_CELL_THICKNESS_M) / (2.0 * properties.conductivity_w_m_k);
            work.any_self_heating |= properties.reaction_heat_slope_w_m2_k < 0.0;
            work.properties[cell_idx] = properties;
        }
    }

    /// Conductances from a cell to the node before it (the face or the previous cell) and to
    /// the node after it (the next cell or the back face), W/(m²·K), at the iterate's
    /// properties: what `assemble_and_solve` puts in the cell's row.
    fn cell_conductances(&self, work: &Work, cell_idx: usize) -> (f64, f64) {
        let half_resistance = |p: &CellProperties| p.half_resistance_m2_k_w;
        let between = |a: usize| {
            let next_layer = self.cell_layer[a + 1];
            let contact = if next_layer != self.cell_layer[a] {
                self.scenario.layers[next_layer].contact_resistance_m2_k_w
            } else {
                0.0
            };
            1.0 / (half_resistance(&work.properties[a])
                + contact
                + half_resistance(&work.properties[a + 1]))
        };
        let before = if cell_idx == 0 {
            1.0 / half_resistance(&work.properties[0])
        } else {
            between(cell_idx - 1)
        };
        let after = if cell_idx + 1 < self.n_cells() {
            between(cell_idx)
        } else {
            1.0 / half_resistance(&work.properties[cell_idx])
        };
        (before, after)
    }

    /// Reaction heat sink of a cell over a step of `dt_s` ending at `temperature_k`, W/m², and
    /// its temperature derivative (the same terms `evaluate_cells` forms at the iterate).
    fn trial_reaction_heat(
        &self,
        work: &mut Work,
        cell_idx: usize,
        temperature_k: f64,
        dt_s: f64,
    ) -> (f64, f64) {
        let material = self.material(cell_idx);
        let old = &self.masses[cell_idx * self.stride..][..material.components.len()];
        work.trial_rate_constants.clear();
        work.trial_rate_constants
            .extend(material.reactions.iter().map(|r| {
                rate_constant_per_s(
                    r.pre_exponential_per_s,
                    r.activation_energy_j_mol,
                    temperature_k,
                )
            }));
        advance_masses(
            material,
            &work.trial_rate_constants,
            old,
            self.reference_mass[cell_idx],
            dt_s,
            &mut work.trial_masses,
        );
        let (mut heat, mut slope) = (0.0, 0.0);
        for (reaction_idx, reaction) in material.reactions.iter().enumerate() {
            let heat_w_m2 =
                work.trial_masses.consumed[reaction_idx] / dt_s * reaction.heat_of_reaction_j_kg;
            heat += heat_w_m2;
            slope += heat_w_m2 * reaction.activation_energy_j_mol
                / (GAS_CONSTANT_J_MOL_K * temperature_k * temperature_k)
                * work.trial_masses.remaining_fraction[reaction_idx];
        }
        (heat, slope)
    }

    /// Cells whose linearised balance at the iterate has lost its heat-capacity term to the
    /// self-heating slope of an exothermic reaction (capacity/Δt + ∂(Σ ω ΔH)/∂T below a tenth
    /// of capacity/Δt, or any negative slope when `force`) are past or near the fold of their
    /// implicit balance, where Newton's tangent points nowhere useful. Each such cell gets the
    /// root of its own non-linear balance (neighbours at the iterate) in `work.pinned_k`, which
    /// `assemble_and_solve` then holds. Returns whether any cell is held.
    fn hold_runaway_cells(&self, work: &mut Work, dt_s: f64, force: bool) -> bool {
        let n_cells = self.n_cells();
        work.pinned_k.clear();
        work.pinned_k.resize(n_cells, f64::NAN);
        let mut any = false;
        for cell_idx in 0..n_cells {
            let properties = work.properties[cell_idx];
            let capacity_rate = properties.heat_capacity_j_m2_k / dt_s;
            let slope = properties.reaction_heat_slope_w_m2_k;
            let runaway = if force {
                slope < 0.0
            } else {
                capacity_rate + slope < 0.1 * capacity_rate
            };
            if !runaway || capacity_rate <= 0.0 {
                continue;
            }
            let node = cell_idx + 1;
            let (g_before, g_after) = self.cell_conductances(work, cell_idx);
            let (t_before, t_after) = (work.iterate_k[node - 1], work.iterate_k[node + 1]);
            let absorbed = work.absorbed_w_m2[cell_idx];
            let start_k = self.temperature_k[node];
            let balance = |work: &mut Work, t: f64| {
                let (heat, heat_slope) = self.trial_reaction_heat(work, cell_idx, t, dt_s);
                (
                    capacity_rate * (t - start_k)
                        + g_before * (t - t_before)
                        + g_after * (t - t_after)
                        - absorbed
                        + heat,
                    capacity_rate + g_before + g_after + heat_slope,
                )
            };
            if let Some(root) = first_root_from(start_k, |t| balance(work, t)) {
                work.pinned_k[cell_idx] = root;
                any = true;
            }
        }
        any
    }

    /// Net irradiance on the face and its in-depth deposit; returns what is absorbed at the
    /// face itself, W/m².
    fn deposit_radiation(&self, work: &mut Work, time_s: f64) -> f64 {
        let n_cells = self.n_cells();
        work.absorbed_w_m2.clear();
        work.absorbed_w_m2.resize(n_cells, 0.0);
        let absorbed_w_m2 = self.absorbed_flux_w_m2(
            work.properties[0].emissivity,
            time_s,
            work.stage.irradiance_time_s,
        );
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

    /// Absorbed irradiance and flame flux over a step ending at `time_s` (the step mean of
    /// the irradiance), or at the instant `at_s` when given.
    fn absorbed_flux_w_m2(&self, emissivity: f64, time_s: f64, at_s: Option<f64>) -> f64 {
        let exposure = &self.scenario.exposure;
        let (flame_w_m2, transmitted) = if self.is_flaming {
            (exposure.flame_heat_flux_w_m2, 1.0 - exposure.flame_blockage)
        } else {
            (0.0, 1.0)
        };
        // The step mean of the irradiance: steps end at the table's breakpoints, so for a
        // piecewise-linear schedule this integrates the delivered energy exactly.
        let irradiance_w_m2 = match at_s {
            Some(at_s) => exposure.irradiance_w_m2.at(at_s),
            None => {
                0.5 * (exposure.irradiance_w_m2.at(self.time_s)
                    + exposure.irradiance_w_m2.at(time_s))
            }
        };
        emissivity * (transmitted * irradiance_w_m2 + flame_w_m2)
    }

    /// Builds the linearised system at the current iterate, solves it into `work.solution_k`
    /// and returns the energy terms of exactly this system, J/m² over the step.
    fn assemble_and_solve(
        &self,
        work: &mut Work,
        dt_s: f64,
        face_absorbed_w_m2: f64,
        held: bool,
    ) -> EnergyBudget {
        let exposure = &self.scenario.exposure;
        let n_cells = self.n_cells();
        let n_nodes = n_cells + 2;
        // Every entry is written below (the first row's lower and the last row's upper entry,
        // outside the matrix, as zero), so the vectors are only sized, not cleared.
        for vector in [
            &mut work.lower,
            &mut work.diagonal,
            &mut work.upper,
            &mut work.rhs,
        ] {
            vector.resize(n_nodes, 0.0);
        }
        work.lower[0] = 0.0;
        work.upper[n_nodes - 1] = 0.0;
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
        let half_resistance = |p: &CellProperties| p.half_resistance_m2_k_w;
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
            if work.stage.explicit_source {
                work.rhs[node] += work.rate_energy_w_m2[cell_idx];
            }
            if held && work.pinned_k[cell_idx].is_finite() {
                // A runaway cell held at the root of its own balance for this iteration.
                work.lower[node] = 0.0;
                work.upper[node] = 0.0;
                work.diagonal[node] = 1.0;
                work.rhs[node] = work.pinned_k[cell_idx];
            }
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
            fuel_rates: None,
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
        // The heat of combustion of all the fuel released; `accept` keeps the part released
        // while the flame was on.
        result
    }

    fn accept(&mut self, dt_s: f64, result: StepResult) {
        let mut work = std::mem::take(&mut self.work);
        // The end rates of the step become the next step's start rates unless the flame or
        // the cells change below.
        work.rates_valid = false;
        let rates_carry = std::mem::take(&mut work.next_ready);
        if rates_carry {
            std::mem::swap(&mut work.rate_energy_w_m2, &mut work.next_energy_w_m2);
            std::mem::swap(
                &mut work.rate_temperature_k_s,
                &mut work.next_temperature_k_s,
            );
            std::mem::swap(
                &mut work.rate_capacity_j_m2_k,
                &mut work.next_capacity_j_m2_k,
            );
            std::mem::swap(
                &mut work.rate_reaction_kg_m2_s,
                &mut work.next_reaction_kg_m2_s,
            );
            work.rate_budget_w_m2 = work.next_budget_w_m2;
        }
        let (flaming_before, cells_before) = (self.is_flaming, self.n_cells());
        let fuel_flux_now = self.fuel_flux_kg_m2_s(&work.solution_k, &work.new_masses);
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
        self.rate_weighted_temperature += result.rate_weighted_temperature_sum;
        // Cumulative releases, linear within the step (its rates are the step means).
        let before = self.cumulative;
        self.cumulative[0] += result.specimen_gas_kg_m2;
        self.cumulative[1] += result.specimen_fuel_kg_m2;
        // The flame's part of the step: all of it, none, or the part after an ignition or
        // before a flame-out inside the step, so the heat release is continuous in the event
        // time (the step ends within the event tolerance of it).
        let was_flaming = self.is_flaming;
        let event_s = self.update_flame(previous_time_s, fuel_flux_now);
        let flame_fraction = match (was_flaming, self.is_flaming, event_s) {
            (true, true, _) => 1.0,
            (false, true, Some(t)) => ((self.time_s - t) / dt_s).clamp(0.0, 1.0),
            (true, false, Some(t)) => ((t - previous_time_s) / dt_s).clamp(0.0, 1.0),
            (false, true, None) => 1.0,
            _ => 0.0,
        };
        self.cumulative[2] += result.heat_release_j_m2 * flame_fraction;
        let duration_s = self.scenario.duration_s;
        let interval_s = self.scenario.output_interval_s;
        while self.next_edge_s <= self.time_s * (1.0 + 1e-12)
            && self.next_edge_s <= duration_s * (1.0 + 1e-12)
        {
            let fraction = ((self.next_edge_s - previous_time_s) / dt_s).clamp(0.0, 1.0);
            let fraction = match result.fuel_rates {
                Some(rates) => release_fraction(rates, fraction),
                None => fraction,
            };
            let mut edge = [0.0; 3];
            for idx in 0..3 {
                edge[idx] = before[idx] + (self.cumulative[idx] - before[idx]) * fraction;
            }
            self.row_edges.push(edge);
            self.next_edge_s += interval_s;
        }
        self.last_fuel_flux_kg_m2_s = fuel_flux_now;
        self.last_surface_temperature_k = self.temperature_k[0];
        self.merge_burnt_cells();
        let gasification_k = (result.specimen_gas_kg_m2 > 0.0)
            .then(|| result.rate_weighted_temperature_sum / result.specimen_gas_kg_m2);
        let mut current = std::mem::take(&mut self.current_sample);
        self.fill_sample(self.time_s, gasification_k, &mut current);
        while self.next_output_s <= self.time_s * (1.0 + 1e-12)
            && self.next_output_s <= duration_s * (1.0 + 1e-12)
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
            self.next_output_s += interval_s;
        }
        std::mem::swap(&mut self.previous_sample, &mut current);
        self.current_sample = current;
        self.work.rates_valid =
            rates_carry && self.is_flaming == flaming_before && self.n_cells() == cells_before;
    }

    /// Ignition and flame-out after a step that ended at `self.time_s`; `fuel_flux` is the
    /// instantaneous fuel mass flux there. Steps are shortened to end at these events
    /// (`event_inside_step`), so the crossing found here lies within the event tolerance.
    /// Returns the time of the ignition or flame-out that happened, if one did.
    fn update_flame(&mut self, previous_time_s: f64, fuel_flux: f64) -> Option<f64> {
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
            crossing
        } else if self.is_flaming {
            let threshold = self.scenario.flameout.threshold_fuel_mass_flux_kg_m2_s;
            if fuel_flux >= threshold {
                self.has_exceeded_flameout_threshold = true;
            } else if self.has_exceeded_flameout_threshold {
                self.is_flaming = false;
                self.flameout_time_s = Some(
                    crossing_time(
                        previous_time_s,
                        -self.last_fuel_flux_kg_m2_s,
                        self.time_s,
                        -fuel_flux,
                        -threshold,
                    )
                    .unwrap_or(self.time_s),
                );
                return self.flameout_time_s;
            }
            None
        } else {
            None
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

    /// The outputs of the current state into `out` (its rates are made at the end, from the
    /// cumulative releases; see `finish`).
    fn fill_sample(&mut self, time_s: f64, gasification_k: Option<f64>, out: &mut Sample) {
        let n_cells = self.n_cells();
        let mut thicknesses = std::mem::take(&mut self.work.thicknesses_m);
        thicknesses.clear();
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
        let probes = self.scenario.probes.iter().map(|probe| {
            // Height above the (fixed) back face of the stack.
            let height = initial_total - probe.depth_m;
            if height >= total_thickness {
                return self.temperature_k[0];
            }
            let mut top = total_thickness;
            let mut above = (total_thickness, self.temperature_k[0]);
            for (thickness, &temperature_k) in thicknesses.iter().zip(&self.temperature_k[1..]) {
                let centre = top - 0.5 * thickness;
                let here = (centre, temperature_k);
                if height >= centre {
                    return interpolate_height(above, here, height);
                }
                above = here;
                top -= thickness;
            }
            interpolate_height(above, (0.0, self.temperature_k[back_node]), height)
        });
        out.probe_temperatures_k.clear();
        out.probe_temperatures_k.extend(probes);
        out.time_s = time_s;
        out.mass_kg_m2 = specimen_mass;
        out.mlr_kg_m2_s = 0.0;
        out.fuel_mlr_kg_m2_s = 0.0;
        out.hrr_w_m2 = 0.0;
        out.surface_temperature_k = self.temperature_k[0];
        out.back_temperature_k = specimen_back_k;
        out.stack_back_temperature_k = self.temperature_k[back_node];
        out.thickness_m = specimen_thickness;
        out.gasification_temperature_k = gasification_k.unwrap_or(self.temperature_k[0]);
        self.work.thicknesses_m = thicknesses;
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

    /// The rows' rates and the summary. Each row carries the interval-mean rates over the
    /// output interval centred on its time (clipped to the run): the specimen's gas, fuel and
    /// heat released over that span divided by its length, so the trapezoidal integral of the
    /// rows is the total released. The summary's peaks are the highest row and the vertex of
    /// the parabola through it and its neighbours (docs/numerics.md, "Outputs").
    fn finish(mut self) -> (History, Work) {
        let interval_s = self.scenario.output_interval_s;
        let end_s = self.time_s;
        let n_rows = self.samples.len();
        for row_idx in 0..n_rows {
            let time_s = self.samples[row_idx].time_s;
            let (lower_s, lower) = if row_idx == 0 {
                (0.0, [0.0; 3])
            } else {
                (time_s - 0.5 * interval_s, self.row_edges[row_idx - 1])
            };
            let (upper_s, upper) = match self.row_edges.get(row_idx) {
                Some(edge) => (time_s + 0.5 * interval_s, *edge),
                None => (end_s, self.cumulative),
            };
            let span_s = upper_s - lower_s;
            let rate = |idx: usize| {
                if span_s > 0.0 {
                    (upper[idx] - lower[idx]) / span_s
                } else {
                    0.0
                }
            };
            let row = &mut self.samples[row_idx];
            row.mlr_kg_m2_s = rate(0);
            row.fuel_mlr_kg_m2_s = rate(1);
            row.hrr_w_m2 = rate(2);
        }
        let peak_mlr = peak_of(&self.samples, |s| s.mlr_kg_m2_s);
        let peak_hrr = peak_of(&self.samples, |s| s.hrr_w_m2);
        let remaining_all: f64 = self.masses.iter().sum();
        let specimen_remaining = self.previous_sample.mass_kg_m2;
        let specimen_gas_total = self.specimen_initial_mass_kg_m2 - specimen_remaining;
        let summary = Summary {
            ignition_time_s: self.ignition_time_s,
            flameout_time_s: self.flameout_time_s,
            peak_hrr_w_m2: peak_hrr.0,
            time_of_peak_hrr_s: peak_hrr.1,
            peak_mlr_kg_m2_s: peak_mlr.0,
            time_of_peak_mlr_s: peak_mlr.1,
            total_heat_release_j_m2: self.cumulative[2],
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
        let mut work = std::mem::take(&mut self.work);
        // Keep the last step's change buffer with the workspace too.
        work.full_consumed = std::mem::take(&mut self.last_change_k);
        let history = History {
            final_cells,
            probe_names: self
                .scenario
                .probes
                .iter()
                .map(|p| p.name.clone())
                .collect(),
            samples: self.samples,
            summary,
        };
        (history, work)
    }
}

/// The highest value of a row quantity and its time: the vertex of the parabola through the
/// highest row and its two neighbours (rows are equally spaced), within half a row of it.
fn peak_of(samples: &[Sample], quantity: impl Fn(&Sample) -> f64) -> (f64, f64) {
    let mut best = 0;
    for (idx, sample) in samples.iter().enumerate() {
        if quantity(sample) > quantity(&samples[best]) {
            best = idx;
        }
    }
    let peak = quantity(&samples[best]);
    let mut time_s = samples[best].time_s;
    if peak > 0.0 && best > 0 && best + 1 < samples.len() {
        let (a, b, c) = (
            quantity(&samples[best - 1]),
            peak,
            quantity(&samples[best + 1]),
        );
        let spacing_s = samples[best].time_s - samples[best - 1].time_s;
        let curvature = a - 2.0 * b + c;
        if curvature < 0.0
            && (samples[best + 1].time_s - samples[best].time_s - spacing_s).abs()
                < 1e-9 * spacing_s.max(1.0)
        {
            time_s +=
                (0.5 * spacing_s * (a - c) / curvature).clamp(-0.5 * spacing_s, 0.5 * spacing_s);
        }
    }
    (peak, time_s)
}

/// The root of a cell's implicit balance F(T) = 0 reached first from the start temperature
/// `start_k` (the root the step continues to; `balance` returns F and dF/dT, F increasing
/// for large T through the heat-capacity term). With F(start) < 0 the cell heats: Newton from
/// the start climbs monotonically to the lowest root while F is concave (a self-heating
/// reaction below its turning point); if F turns down before reaching zero (dF/dT ≤ 0: the
/// reaction runs away within the step, no low root exists), the root is the one above the
/// fold, bracketed by doubling and found by bracketed Newton. With F(start) ≥ 0 the cell
/// cools and the root below is bracketed the same way. `None` when no bracket is found.
fn first_root_from(start_k: f64, mut balance: impl FnMut(f64) -> (f64, f64)) -> Option<f64> {
    let (f_start, _) = balance(start_k);
    if !f_start.is_finite() {
        return None;
    }
    if f_start == 0.0 {
        return Some(start_k);
    }
    let (mut low, mut high);
    if f_start < 0.0 {
        // Climb by Newton while F is below zero and still rising.
        let mut t = start_k;
        let mut below = start_k;
        let mut bracket = None;
        for _ in 0..60 {
            let (f, slope) = balance(t);
            if !f.is_finite() {
                return None;
            }
            if f >= 0.0 {
                bracket = Some(t);
                break;
            }
            below = t;
            if slope <= 0.0 {
                break;
            }
            let next = t - f / slope;
            if next - t <= 1e-12 * t {
                return Some(next);
            }
            t = next;
        }
        low = below;
        high = match bracket {
            Some(high) => high,
            None => {
                let mut step = 100.0;
                loop {
                    let trial = low + step;
                    let (f, _) = balance(trial);
                    if !f.is_finite() || step > 1e7 {
                        return None;
                    }
                    if f > 0.0 {
                        break trial;
                    }
                    low = trial;
                    step *= 2.0;
                }
            }
        };
    } else {
        high = start_k;
        let mut step = 10.0;
        low = loop {
            let trial = (high - step).max(1.0);
            let (f, _) = balance(trial);
            if !f.is_finite() || trial <= 1.0 {
                return None;
            }
            if f < 0.0 {
                break trial;
            }
            high = trial;
            step *= 2.0;
        };
    }
    // Bracketed Newton on [low, high] with F(low) < 0 < F(high), from the end nearer the
    // root the continuation wants (the upper end past a fold, where F is convex).
    let mut t = if f_start < 0.0 { high } else { low };
    for _ in 0..200 {
        let (f, slope) = balance(t);
        if f == 0.0 {
            return Some(t);
        }
        if f < 0.0 {
            low = t;
        } else {
            high = t;
        }
        if high - low <= 1e-12 * high {
            return Some(0.5 * (low + high));
        }
        let newton = t - f / slope;
        t = if slope > 0.0 && newton > low && newton < high {
            newton
        } else {
            0.5 * (low + high)
        };
    }
    Some(0.5 * (low + high))
}

/// The fraction of a step's release made by the fraction `s` of the step, from the release
/// rates at its start, at γ and at its end: the integral of the parabola through them,
/// normalised to 1 over the step (so the rows still sum to what the step released). Linear
/// when the parabola is not positive over the step.
fn release_fraction(rates: [f64; 3], s: f64) -> f64 {
    let g = TR_BDF2_GAMMA;
    let [r0, r1, r2] = rates;
    let c = ((r1 - r0) - g * (r2 - r0)) / (g * g - g);
    let b = r2 - r0 - c;
    let integral = |s: f64| s * (r0 + s * (0.5 * b + s * c / 3.0));
    let total = integral(1.0);
    let lowest = if c > 0.0 && -b < 2.0 * c && b < 0.0 {
        r0 - 0.25 * b * b / c
    } else {
        r0.min(r2)
    };
    if !total.is_finite() || total <= 0.0 || lowest.is_nan() || lowest < 0.0 {
        return s;
    }
    (integral(s) / total).clamp(0.0, 1.0)
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
