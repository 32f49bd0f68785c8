//! Zero-dimensional model of a milligram-scale test (TGA, DSC, MCC): the material's reaction
//! network at a uniform temperature that follows a programme of linear ramps and isothermal
//! holds (docs/physics.md §3). Outputs per unit initial mass: normalised mass, −dm/dt/m₀ (1/s), DSC
//! heat flow (W/g) and MCC heat release rate (W/g).
//!
//! Two integrators are offered and compared in docs/milligram-scale.md: the adaptive
//! Dormand–Prince 5(4) method of the `ode_solvers` crate, and an implicit method (backward
//! Euler through `kinetics::advance_masses`, with step doubling and Richardson extrapolation
//! for a second-order result and an error estimate). No I/O, clock, threads or randomness.

use ode_solvers::continuous_output_model::ContinuousOutputModel;
use ode_solvers::dop_shared::{IntegrationError, OutputType, System};
use ode_solvers::{DVector, Dopri5, SVector};

use super::kinetics::{advance_masses, rate_constant_per_s, reaction_rate, StepMasses};
use super::material::Material;
use super::PhysicsError;

/// Grams per kilogram: the one factor that turns W/kg of initial mass into the trade's W/g.
const KG_PER_G: f64 = 1e-3;

/// One piece of a temperature programme.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum ProgrammeSegment {
    /// Linear change at `heating_rate_k_s` (K/s, > 0 heats, < 0 cools) until
    /// `end_temperature_k` is reached.
    Ramp {
        heating_rate_k_s: f64,
        end_temperature_k: f64,
    },
    /// Constant temperature for `duration_s` seconds.
    Hold { duration_s: f64 },
}

/// A temperature programme: a start temperature, then ramps and holds in order (docs/physics.md §3,
/// T₀ + βt with isothermal holds). Checked on construction.
#[derive(Debug, Clone, PartialEq)]
pub struct TemperatureProgramme {
    start_temperature_k: f64,
    segments: Vec<ProgrammeSegment>,
    /// (start time s, start temperature K, rate K/s, end time s) of each segment.
    pieces: Vec<(f64, f64, f64, f64)>,
}

impl TemperatureProgramme {
    /// Checks the segments: positive temperatures, ramps that reach their end temperature in the
    /// direction of their rate, positive hold durations.
    pub fn new(
        start_temperature_k: f64,
        segments: Vec<ProgrammeSegment>,
    ) -> Result<Self, PhysicsError> {
        super::material::require_positive("programme start temperature", start_temperature_k)?;
        if segments.is_empty() {
            return Err(PhysicsError::invalid("programme", "has no segments"));
        }
        let mut pieces = Vec::with_capacity(segments.len());
        let (mut time_s, mut temperature_k) = (0.0, start_temperature_k);
        for (segment_idx, segment) in segments.iter().enumerate() {
            let what = format!("programme segment {}", segment_idx + 1);
            match *segment {
                ProgrammeSegment::Ramp {
                    heating_rate_k_s,
                    end_temperature_k,
                } => {
                    super::material::require_positive(
                        &format!("{what} end temperature"),
                        end_temperature_k,
                    )?;
                    let duration_s = (end_temperature_k - temperature_k) / heating_rate_k_s;
                    if !(duration_s.is_finite() && duration_s > 0.0) {
                        return Err(PhysicsError::invalid(
                            &what,
                            format!(
                                "cannot go from {temperature_k} K to {end_temperature_k} K at \
                                 {heating_rate_k_s} K/s"
                            ),
                        ));
                    }
                    pieces.push((time_s, temperature_k, heating_rate_k_s, time_s + duration_s));
                    time_s += duration_s;
                    temperature_k = end_temperature_k;
                }
                ProgrammeSegment::Hold { duration_s } => {
                    super::material::require_positive(&format!("{what} duration"), duration_s)?;
                    pieces.push((time_s, temperature_k, 0.0, time_s + duration_s));
                    time_s += duration_s;
                }
            }
        }
        Ok(TemperatureProgramme {
            start_temperature_k,
            segments,
            pieces,
        })
    }

    /// A single ramp from `start_temperature_k` to `end_temperature_k` at `heating_rate_k_s`.
    pub fn ramp(
        start_temperature_k: f64,
        heating_rate_k_s: f64,
        end_temperature_k: f64,
    ) -> Result<Self, PhysicsError> {
        Self::new(
            start_temperature_k,
            vec![ProgrammeSegment::Ramp {
                heating_rate_k_s,
                end_temperature_k,
            }],
        )
    }

    /// Temperature at the start of the programme, K.
    pub fn start_temperature_k(&self) -> f64 {
        self.start_temperature_k
    }

    /// The segments, in order.
    pub fn segments(&self) -> &[ProgrammeSegment] {
        &self.segments
    }

    /// Total duration of the programme, s.
    pub fn duration_s(&self) -> f64 {
        self.pieces.last().map_or(0.0, |piece| piece.3)
    }

    fn piece_at(&self, time_s: f64) -> &(f64, f64, f64, f64) {
        self.pieces
            .iter()
            .find(|piece| time_s < piece.3)
            .unwrap_or(&self.pieces[self.pieces.len() - 1])
    }

    /// Programme temperature at `time_s`, K (held at the end value after the last segment).
    pub fn temperature_k_at(&self, time_s: f64) -> f64 {
        let &(start_s, start_k, rate_k_s, end_s) = self.piece_at(time_s);
        start_k + rate_k_s * (time_s.min(end_s) - start_s).max(0.0)
    }

    /// Programme heating rate at `time_s`, K/s (0 after the end).
    pub fn heating_rate_k_s_at(&self, time_s: f64) -> f64 {
        let piece = self.piece_at(time_s);
        if time_s >= piece.3 {
            0.0
        } else {
            piece.2
        }
    }
}

/// How the 0-D equations are integrated in time.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Integrator {
    /// Dormand–Prince, and the implicit method instead when Dormand–Prince fails (it stops
    /// when it detects stiffness): fast on ordinary networks, robust on stiff ones.
    #[default]
    Automatic,
    /// Adaptive explicit Dormand–Prince 5(4) (`ode_solvers::Dopri5`), dense output.
    DormandPrince,
    /// Backward Euler via `kinetics::advance_masses`, adaptive by step doubling, with
    /// Richardson extrapolation (second order). Robust for stiff networks.
    Implicit,
}

/// Numerical and output settings of a 0-D run.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ZeroDSettings {
    /// Which integrator advances the masses.
    pub integrator: Integrator,
    /// Time between output rows, s (the last row falls on the end of the programme).
    pub output_interval_s: f64,
    /// Relative tolerance on the component mass fractions.
    pub relative_tolerance: f64,
    /// Absolute tolerance on the component mass fractions (per unit initial mass).
    pub absolute_tolerance: f64,
    /// Whether the DSC heat flow includes the sensible heat Σ mᵢ cᵢ(T) dT/dt.
    pub include_sensible_heat: bool,
}

impl Default for ZeroDSettings {
    /// Automatic integrator, 1 s output, tolerances 1e-8 relative and 1e-10 absolute (far
    /// within the Kissinger check's 0.1 K; see docs/milligram-scale.md), reaction heat only in
    /// the DSC signal.
    fn default() -> Self {
        ZeroDSettings {
            integrator: Integrator::Automatic,
            output_interval_s: 1.0,
            relative_tolerance: 1e-8,
            absolute_tolerance: 1e-10,
            include_sensible_heat: false,
        }
    }
}

/// Curves of a 0-D run, one entry per output time, all per unit initial mass.
#[derive(Debug, Clone, PartialEq)]
pub struct ZeroDHistory {
    /// Time from the start of the programme, s.
    pub time_s: Vec<f64>,
    /// Sample temperature, K.
    pub temperature_k: Vec<f64>,
    /// Condensed mass over initial mass, 0..1.
    pub mass_fraction: Vec<f64>,
    /// −dm/dt / m₀, 1/s.
    pub mass_loss_rate_per_s: Vec<f64>,
    /// DSC heat flow, W per g of initial mass, endothermic positive.
    pub dsc_w_g: Vec<f64>,
    /// MCC heat release rate, W per g of initial mass.
    pub mcc_w_g: Vec<f64>,
    /// Accepted integration steps (for the integrator comparison).
    pub n_steps: usize,
    /// The integrator that produced these curves (never `Automatic`).
    pub integrator: Integrator,
}

impl ZeroDHistory {
    /// Interpolated peak of the mass-loss rate: (time s, temperature K, rate 1/s), from a
    /// parabola through the largest sample and its neighbours. `None` for an empty history.
    pub fn mass_loss_rate_peak(&self) -> Option<(f64, f64, f64)> {
        let (time_s, rate) = parabolic_peak(&self.time_s, &self.mass_loss_rate_per_s)?;
        let temperature_k = interpolate(&self.time_s, &self.temperature_k, time_s);
        Some((time_s, temperature_k, rate))
    }
}

/// Peak of sampled `values` over `times`, refined by a parabola through the largest sample and
/// its two neighbours: (time, value). `None` when there are no samples.
pub fn parabolic_peak(times: &[f64], values: &[f64]) -> Option<(f64, f64)> {
    let n = times.len().min(values.len());
    let peak_idx = (0..n).max_by(|&a, &b| values[a].total_cmp(&values[b]))?;
    if peak_idx == 0 || peak_idx + 1 >= n {
        return Some((times[peak_idx], values[peak_idx]));
    }
    let (t0, t1, t2) = (times[peak_idx - 1], times[peak_idx], times[peak_idx + 1]);
    let (v0, v1, v2) = (values[peak_idx - 1], values[peak_idx], values[peak_idx + 1]);
    // Lagrange parabola through the three points; its vertex.
    let d01 = (v1 - v0) / (t1 - t0);
    let d12 = (v2 - v1) / (t2 - t1);
    let curvature = (d12 - d01) / (t2 - t0);
    if curvature >= 0.0 {
        return Some((t1, v1));
    }
    let vertex = 0.5 * (t0 + t1) - d01 / (2.0 * curvature);
    let vertex = vertex.clamp(t0, t2);
    let value = v0 + d01 * (vertex - t0) + curvature * (vertex - t0) * (vertex - t1);
    Some((vertex, value))
}

/// Linear interpolation of `values` over increasing `times` at `time`, constant outside.
pub fn interpolate(times: &[f64], values: &[f64], time: f64) -> f64 {
    let n = times.len().min(values.len());
    if n == 0 {
        return f64::NAN;
    }
    if time <= times[0] {
        return values[0];
    }
    let upper = times[..n].partition_point(|&t| t < time);
    if upper >= n {
        return values[n - 1];
    }
    let (ta, tb) = (times[upper - 1], times[upper]);
    let (va, vb) = (values[upper - 1], values[upper]);
    if tb == ta {
        vb
    } else {
        va + (vb - va) * (time - ta) / (tb - ta)
    }
}

/// Simulates the material, starting with these mass fractions of its components (summing to 1),
/// under the temperature programme. Errors name what is wrong with the inputs, or where the
/// integrator failed.
pub fn simulate_zero_d(
    material: &Material,
    initial_mass_fractions: &[f64],
    programme: &TemperatureProgramme,
    settings: &ZeroDSettings,
) -> Result<ZeroDHistory, PhysicsError> {
    check_inputs(material, initial_mass_fractions, settings)?;
    if settings.integrator == Integrator::Automatic {
        let with = |integrator| ZeroDSettings {
            integrator,
            ..*settings
        };
        // Inputs are checked, so a failure here is Dormand–Prince's (stiffness, step limit).
        return integrate(
            material,
            initial_mass_fractions,
            programme,
            &with(Integrator::DormandPrince),
        )
        .or_else(|_| {
            integrate(
                material,
                initial_mass_fractions,
                programme,
                &with(Integrator::Implicit),
            )
        });
    }
    integrate(material, initial_mass_fractions, programme, settings)
}

/// Runs one concrete integrator (`Automatic` is resolved by the caller).
fn integrate(
    material: &Material,
    initial_mass_fractions: &[f64],
    programme: &TemperatureProgramme,
    settings: &ZeroDSettings,
) -> Result<ZeroDHistory, PhysicsError> {
    // One row at the start and one per output interval of each piece (the rounding up of a
    // piece's last partial interval adds at most one per piece).
    let n_rows = (programme.duration_s() / settings.output_interval_s).min(1e7) as usize
        + programme.pieces.len()
        + 1;
    let mut history = ZeroDHistory {
        time_s: Vec::with_capacity(n_rows),
        temperature_k: Vec::with_capacity(n_rows),
        mass_fraction: Vec::with_capacity(n_rows),
        mass_loss_rate_per_s: Vec::with_capacity(n_rows),
        dsc_w_g: Vec::with_capacity(n_rows),
        mcc_w_g: Vec::with_capacity(n_rows),
        n_steps: 0,
        integrator: settings.integrator,
    };
    let mut masses = initial_mass_fractions.to_vec();
    let mut rates = vec![0.0; material.reactions.len()];
    record(
        material,
        programme,
        settings,
        0.0,
        &masses,
        &mut rates,
        &mut history,
    );
    for &(start_s, _, _, end_s) in &programme.pieces {
        let n_outputs = ((end_s - start_s) / settings.output_interval_s - 1e-9).ceil() as usize;
        let output_times: Vec<f64> = (1..=n_outputs)
            .map(|idx| (start_s + idx as f64 * settings.output_interval_s).min(end_s))
            .collect();
        match settings.integrator {
            Integrator::DormandPrince => dormand_prince_piece(
                material,
                programme,
                settings,
                start_s,
                end_s,
                &output_times,
                &mut masses,
                &mut rates,
                &mut history,
            )?,
            Integrator::Implicit | Integrator::Automatic => implicit_piece(
                material,
                programme,
                settings,
                start_s,
                &output_times,
                &mut masses,
                &mut rates,
                &mut history,
            )?,
        }
    }
    Ok(history)
}

fn check_inputs(
    material: &Material,
    initial_mass_fractions: &[f64],
    settings: &ZeroDSettings,
) -> Result<(), PhysicsError> {
    if initial_mass_fractions.len() != material.components.len() {
        return Err(PhysicsError::invalid(
            "initial mass fractions",
            format!(
                "must give one value per component ({}), got {}",
                material.components.len(),
                initial_mass_fractions.len()
            ),
        ));
    }
    for (fraction, component) in initial_mass_fractions.iter().zip(&material.components) {
        super::material::require_fraction(
            &format!("initial mass fraction of `{}`", component.name),
            *fraction,
        )?;
    }
    let total: f64 = initial_mass_fractions.iter().sum();
    if (total - 1.0).abs() > 1e-6 {
        return Err(PhysicsError::invalid(
            "initial mass fractions",
            format!("must sum to 1, got {total}"),
        ));
    }
    super::material::require_positive("output interval", settings.output_interval_s)?;
    super::material::require_positive("relative tolerance", settings.relative_tolerance)?;
    super::material::require_positive("absolute tolerance", settings.absolute_tolerance)?;
    Ok(())
}

/// Rates of every reaction at `temperature_k` for these masses, 1/s (per unit initial mass).
fn reaction_rates(material: &Material, temperature_k: f64, masses: &[f64], rates: &mut [f64]) {
    for (rate, reaction) in rates.iter_mut().zip(&material.reactions) {
        let k = rate_constant_per_s(
            reaction.pre_exponential_per_s,
            reaction.activation_energy_j_mol,
            temperature_k,
        );
        *rate = reaction_rate(k, masses[reaction.reactant].max(0.0), 1.0, reaction.order);
    }
}

fn record(
    material: &Material,
    programme: &TemperatureProgramme,
    settings: &ZeroDSettings,
    time_s: f64,
    masses: &[f64],
    rates: &mut [f64],
    history: &mut ZeroDHistory,
) {
    let temperature_k = programme.temperature_k_at(time_s);
    reaction_rates(material, temperature_k, masses, rates);
    let mut mass_loss_rate_per_s = 0.0;
    let mut reaction_heat_w_kg = 0.0;
    let mut combustion_heat_w_kg = 0.0;
    for (rate, reaction) in rates.iter().zip(&material.reactions) {
        let gas_per_s = (1.0 - reaction.product_yield) * rate;
        mass_loss_rate_per_s += gas_per_s;
        reaction_heat_w_kg += rate * reaction.heat_of_reaction_j_kg;
        combustion_heat_w_kg +=
            gas_per_s * reaction.gas.fuel_fraction * reaction.gas.heat_of_combustion_j_kg;
    }
    if settings.include_sensible_heat {
        let heating_rate_k_s = programme.heating_rate_k_s_at(time_s);
        let heat_capacity_j_kg_k: f64 = masses
            .iter()
            .zip(&material.components)
            .map(|(mass, component)| mass * component.specific_heat_j_kg_k.at(temperature_k))
            .sum();
        reaction_heat_w_kg += heat_capacity_j_kg_k * heating_rate_k_s;
    }
    history.time_s.push(time_s);
    history.temperature_k.push(temperature_k);
    history.mass_fraction.push(masses.iter().sum());
    history.mass_loss_rate_per_s.push(mass_loss_rate_per_s);
    history.dsc_w_g.push(reaction_heat_w_kg * KG_PER_G);
    history.mcc_w_g.push(combustion_heat_w_kg * KG_PER_G);
}

/// The right-hand side dm/dt of the reaction network on one linear piece of the programme.
struct NetworkOnPiece<'a> {
    material: &'a Material,
    start_s: f64,
    start_temperature_k: f64,
    heating_rate_k_s: f64,
}

impl NetworkOnPiece<'_> {
    /// dm/dt of every component at `time_s` for these masses.
    fn derivative(&self, time_s: f64, masses: &[f64], derivative: &mut [f64]) {
        let temperature_k =
            self.start_temperature_k + self.heating_rate_k_s * (time_s - self.start_s);
        derivative.fill(0.0);
        for reaction in &self.material.reactions {
            let k = rate_constant_per_s(
                reaction.pre_exponential_per_s,
                reaction.activation_energy_j_mol,
                temperature_k,
            );
            let rate = reaction_rate(k, masses[reaction.reactant].max(0.0), 1.0, reaction.order);
            derivative[reaction.reactant] -= rate;
            if let Some(product) = reaction.product {
                derivative[product] += reaction.product_yield * rate;
            }
        }
    }
}

/// The same network for each state type the integrator is instantiated with: fixed-size
/// vectors (no heap allocation inside the integrator) for up to four components, a dynamic
/// vector beyond.
macro_rules! network_system {
    ($state:ty) => {
        impl System<f64, $state> for NetworkOnPiece<'_> {
            fn system(&self, time_s: f64, masses: &$state, derivative: &mut $state) {
                self.derivative(time_s, masses.as_slice(), derivative.as_mut_slice());
            }
        }
    };
}

network_system!(SVector<f64, 1>);
network_system!(SVector<f64, 2>);
network_system!(SVector<f64, 3>);
network_system!(SVector<f64, 4>);
network_system!(DVector<f64>);

/// One Dormand–Prince piece with the state held in `$state`.
macro_rules! dormand_prince_with {
    ($name:ident, $state:ty) => {
        #[allow(clippy::too_many_arguments)]
        fn $name(
            material: &Material,
            programme: &TemperatureProgramme,
            settings: &ZeroDSettings,
            start_s: f64,
            end_s: f64,
            output_times: &[f64],
            masses: &mut [f64],
            rates: &mut [f64],
            history: &mut ZeroDHistory,
        ) -> Result<(), PhysicsError> {
            let system = NetworkOnPiece {
                material,
                start_s,
                start_temperature_k: programme.temperature_k_at(start_s),
                heating_rate_k_s: programme.heating_rate_k_s_at(start_s),
            };
            // The crate's default parameters (`Dopri5::new`: safety 0.9, β 0.04, factors
            // 0.2..10, no step limit, automatic first step), but continuous output only: the
            // rows are read from the continuous model below, so the solver's own dense rows
            // at every output interval (as many as the rows, each an interpolation and a
            // push) would be work thrown away.
            let mut solver = Dopri5::from_param(
                system,
                start_s,
                end_s,
                settings.output_interval_s,
                <$state>::from_column_slice(masses),
                settings.relative_tolerance,
                settings.absolute_tolerance,
                0.9,
                0.04,
                0.2,
                10.0,
                end_s - start_s,
                0.0,
                100_000,
                1000,
                OutputType::Continuous,
            );
            let mut dense = ContinuousOutputModel::new();
            let stats = solver
                .integrate_with_continuous_output_model(&mut dense)
                .map_err(|err| integration_failure(err, programme))?;
            history.n_steps += stats.accepted_steps as usize;
            for &time_s in output_times {
                let state = if time_s >= end_s {
                    solver.y_out().last().cloned()
                } else {
                    dense.evaluate(time_s)
                };
                let state = state.ok_or_else(|| {
                    PhysicsError::invalid(
                        "dormand–prince integration",
                        format!("has no solution at {time_s} s"),
                    )
                })?;
                for (mass, value) in masses.iter_mut().zip(state.iter()) {
                    *mass = value.max(0.0);
                }
                record(
                    material, programme, settings, time_s, masses, rates, history,
                );
            }
            Ok(())
        }
    };
}

dormand_prince_with!(dormand_prince_1, SVector<f64, 1>);
dormand_prince_with!(dormand_prince_2, SVector<f64, 2>);
dormand_prince_with!(dormand_prince_3, SVector<f64, 3>);
dormand_prince_with!(dormand_prince_4, SVector<f64, 4>);
dormand_prince_with!(dormand_prince_dynamic, DVector<f64>);

#[allow(clippy::too_many_arguments)]
fn dormand_prince_piece(
    material: &Material,
    programme: &TemperatureProgramme,
    settings: &ZeroDSettings,
    start_s: f64,
    end_s: f64,
    output_times: &[f64],
    masses: &mut [f64],
    rates: &mut [f64],
    history: &mut ZeroDHistory,
) -> Result<(), PhysicsError> {
    let piece = match masses.len() {
        1 => dormand_prince_1,
        2 => dormand_prince_2,
        3 => dormand_prince_3,
        4 => dormand_prince_4,
        _ => dormand_prince_dynamic,
    };
    piece(
        material,
        programme,
        settings,
        start_s,
        end_s,
        output_times,
        masses,
        rates,
        history,
    )
}

fn integration_failure(err: IntegrationError, programme: &TemperatureProgramme) -> PhysicsError {
    let time_s = match err {
        IntegrationError::MaxNumStepReached { x, .. }
        | IntegrationError::StepSizeUnderflow { x }
        | IntegrationError::StiffnessDetected { x } => x,
    };
    PhysicsError::invalid(
        "dormand–prince integration",
        format!(
            "failed at {time_s:.3} s ({:.2} K): {err}; use integrator = \"implicit\" or \"auto\"",
            programme.temperature_k_at(time_s)
        ),
    )
}

/// Largest number of steps of one implicit piece before giving up.
const MAX_IMPLICIT_STEPS: usize = 1_000_000;

#[allow(clippy::too_many_arguments)]
fn implicit_piece(
    material: &Material,
    programme: &TemperatureProgramme,
    settings: &ZeroDSettings,
    start_s: f64,
    output_times: &[f64],
    masses: &mut [f64],
    rates: &mut [f64],
    history: &mut ZeroDHistory,
) -> Result<(), PhysicsError> {
    let mut constants = vec![0.0; material.reactions.len()];
    let (mut coarse, mut half, mut fine) = (
        StepMasses::default(),
        StepMasses::default(),
        StepMasses::default(),
    );
    let mut extrapolated = vec![0.0; masses.len()];
    let mut time_s = start_s;
    let mut step_s = settings.output_interval_s.min(1.0);
    let mut n_steps = 0usize;
    let set_constants = |constants: &mut [f64], temperature_k: f64| {
        for (k, reaction) in constants.iter_mut().zip(&material.reactions) {
            *k = rate_constant_per_s(
                reaction.pre_exponential_per_s,
                reaction.activation_energy_j_mol,
                temperature_k,
            );
        }
    };
    for &output_s in output_times {
        while time_s < output_s {
            n_steps += 1;
            if n_steps > MAX_IMPLICIT_STEPS {
                return Err(PhysicsError::invalid(
                    "implicit integration",
                    format!(
                        "needs more than {MAX_IMPLICIT_STEPS} steps at {time_s:.3} s; loosen \
                         the tolerances"
                    ),
                ));
            }
            let is_last = time_s + step_s >= output_s;
            let dt_s = if is_last { output_s - time_s } else { step_s };
            // One step of dt, and two of dt/2; backward Euler takes the rate constants at the
            // end of each step.
            set_constants(&mut constants, programme.temperature_k_at(time_s + dt_s));
            advance_masses(material, &constants, masses, 1.0, dt_s, &mut coarse);
            set_constants(
                &mut constants,
                programme.temperature_k_at(time_s + 0.5 * dt_s),
            );
            advance_masses(material, &constants, masses, 1.0, 0.5 * dt_s, &mut half);
            set_constants(&mut constants, programme.temperature_k_at(time_s + dt_s));
            advance_masses(
                material,
                &constants,
                &half.masses,
                1.0,
                0.5 * dt_s,
                &mut fine,
            );
            let mut error = 0.0f64;
            for ((value, &fine_mass), &coarse_mass) in extrapolated
                .iter_mut()
                .zip(&fine.masses)
                .zip(&coarse.masses)
            {
                *value = (2.0 * fine_mass - coarse_mass).max(0.0);
                let scale = settings.absolute_tolerance + settings.relative_tolerance * value.abs();
                error = error.max((fine_mass - coarse_mass).abs() / scale);
            }
            // The extrapolated value is second order; |fine − coarse| estimates the error of
            // the first-order one, a safe bound. Step size ∝ error^(−1/2).
            let factor = (0.9 / error.max(1e-12).sqrt()).clamp(0.2, 4.0);
            if error <= 1.0 {
                masses.copy_from_slice(&extrapolated);
                time_s += dt_s;
                if !is_last || factor < 1.0 {
                    step_s = dt_s * factor;
                }
            } else {
                step_s = dt_s * factor;
            }
            if step_s < 1e-12 {
                return Err(PhysicsError::invalid(
                    "implicit integration",
                    format!(
                        "step size underflow at {time_s:.3} s ({:.2} K)",
                        programme.temperature_k_at(time_s)
                    ),
                ));
            }
        }
        time_s = output_s;
        record(
            material, programme, settings, time_s, masses, rates, history,
        );
    }
    history.n_steps += n_steps;
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::physics::kinetics::GAS_CONSTANT_J_MOL_K;
    use crate::physics::material::{Component, GasRelease, PropertyLaw, Reaction};

    fn component(name: &str) -> Component {
        Component {
            name: name.into(),
            density_kg_m3: 1200.0,
            conductivity_w_m_k: PropertyLaw::constant(0.2),
            specific_heat_j_kg_k: PropertyLaw::constant(1500.0),
            emissivity: 0.9,
            absorption_coefficient_per_m: None,
        }
    }

    fn first_order(
        pre_exponential_per_s: f64,
        activation_energy_j_mol: f64,
        heat_of_reaction_j_kg: f64,
    ) -> Material {
        Material::new(
            vec![component("solid")],
            vec![Reaction {
                reactant: 0,
                product: None,
                product_yield: 0.0,
                pre_exponential_per_s,
                activation_energy_j_mol,
                order: 1.0,
                heat_of_reaction_j_kg,
                gas: GasRelease {
                    fuel_fraction: 1.0,
                    heat_of_combustion_j_kg: 2.5e7,
                },
            }],
        )
        .unwrap()
    }

    /// Exact solution of an isothermal first-order reaction: m/m₀ = exp(−k t) (integrating
    /// dm/dt = −k m).
    #[test]
    fn isothermal_first_order_decay_is_exponential_with_both_integrators() {
        let material = first_order(1e10, 1.5e5, 0.0);
        let temperature_k = 600.0;
        let k = rate_constant_per_s(1e10, 1.5e5, temperature_k);
        let programme = TemperatureProgramme::new(
            temperature_k,
            vec![ProgrammeSegment::Hold {
                duration_s: 2.0 / k,
            }],
        )
        .unwrap();
        for integrator in [Integrator::DormandPrince, Integrator::Implicit] {
            let settings = ZeroDSettings {
                integrator,
                output_interval_s: 0.1 / k,
                ..ZeroDSettings::default()
            };
            let history = simulate_zero_d(&material, &[1.0], &programme, &settings).unwrap();
            for (time_s, mass) in history.time_s.iter().zip(&history.mass_fraction) {
                let exact = (-k * time_s).exp();
                assert!(
                    (mass - exact).abs() < 1e-6,
                    "{integrator:?} at {time_s}: {mass} vs {exact}"
                );
            }
        }
    }

    /// Energy bookkeeping (docs/physics.md §3): the time integral of the DSC heat flow equals ΔH times
    /// the mass reacted, and the MCC integral equals ΔH_c times the fuel released.
    #[test]
    fn dsc_and_mcc_integrals_match_the_heats_of_reaction_and_combustion() {
        let material = first_order(1e13, 2.0e5, 8.7e5);
        let programme = TemperatureProgramme::ramp(300.0, 10.0 / 60.0, 900.0).unwrap();
        let history =
            simulate_zero_d(&material, &[1.0], &programme, &ZeroDSettings::default()).unwrap();
        let trapezoid = |values: &[f64]| -> f64 {
            history
                .time_s
                .windows(2)
                .zip(values.windows(2))
                .map(|(t, v)| 0.5 * (t[1] - t[0]) * (v[0] + v[1]))
                .sum()
        };
        let reacted = 1.0 - history.mass_fraction.last().unwrap();
        assert!(reacted > 0.999);
        let dsc_j_g = trapezoid(&history.dsc_w_g);
        let mcc_j_g = trapezoid(&history.mcc_w_g);
        assert!(
            (dsc_j_g - 870.0 * reacted).abs() < 1e-3 * 870.0,
            "{dsc_j_g}"
        );
        assert!(
            (mcc_j_g - 25_000.0 * reacted).abs() < 1e-3 * 25_000.0,
            "{mcc_j_g}"
        );
    }

    /// Sensible heat of an inert sample: DSC = c·β exactly (definition of heat capacity).
    #[test]
    fn sensible_heat_of_an_inert_sample_is_specific_heat_times_heating_rate() {
        let material = Material::new(vec![component("inert")], vec![]).unwrap();
        let programme = TemperatureProgramme::ramp(300.0, 0.5, 400.0).unwrap();
        let settings = ZeroDSettings {
            include_sensible_heat: true,
            ..ZeroDSettings::default()
        };
        let history = simulate_zero_d(&material, &[1.0], &programme, &settings).unwrap();
        assert!((history.dsc_w_g[10] - 1500.0 * 0.5 * 1e-3).abs() < 1e-12);
    }

    #[test]
    fn programme_with_a_hold_keeps_its_temperature_and_resumes() {
        let programme = TemperatureProgramme::new(
            300.0,
            vec![
                ProgrammeSegment::Ramp {
                    heating_rate_k_s: 1.0,
                    end_temperature_k: 400.0,
                },
                ProgrammeSegment::Hold { duration_s: 50.0 },
                ProgrammeSegment::Ramp {
                    heating_rate_k_s: 2.0,
                    end_temperature_k: 500.0,
                },
            ],
        )
        .unwrap();
        assert_eq!(programme.duration_s(), 200.0);
        assert_eq!(programme.temperature_k_at(120.0), 400.0);
        assert_eq!(programme.heating_rate_k_s_at(120.0), 0.0);
        assert_eq!(programme.temperature_k_at(175.0), 450.0);
        assert_eq!(programme.temperature_k_at(999.0), 500.0);
    }

    #[test]
    fn a_ramp_that_never_reaches_its_end_temperature_is_rejected() {
        let err = TemperatureProgramme::ramp(500.0, 0.1, 400.0).unwrap_err();
        assert!(err.to_string().contains("400"), "{err}");
    }

    #[test]
    fn fractions_that_do_not_sum_to_one_are_rejected() {
        let material = first_order(1e10, 1.5e5, 0.0);
        let programme = TemperatureProgramme::ramp(300.0, 0.1, 400.0).unwrap();
        let err =
            simulate_zero_d(&material, &[0.7], &programme, &ZeroDSettings::default()).unwrap_err();
        assert!(err.to_string().contains("0.7"), "{err}");
    }

    /// Kissinger, H.E., Anal. Chem. 29 (1957) 1702: first-order peak at
    /// E β/(R T_p²) = A exp(−E/(R T_p)); the implicit integrator must also satisfy it.
    #[test]
    fn kissinger_1957_peak_with_the_implicit_integrator() {
        let (a, e) = (1e13, 2.0e5);
        let material = first_order(a, e, 0.0);
        let beta = 10.0 / 60.0;
        let programme = TemperatureProgramme::ramp(300.0, beta, 900.0).unwrap();
        let settings = ZeroDSettings {
            integrator: Integrator::Implicit,
            relative_tolerance: 1e-6,
            absolute_tolerance: 1e-8,
            ..ZeroDSettings::default()
        };
        let history = simulate_zero_d(&material, &[1.0], &programme, &settings).unwrap();
        let (_, peak_k, _) = history.mass_loss_rate_peak().unwrap();
        // Solve the Kissinger condition by bisection.
        let condition = |t: f64| {
            e * beta / (GAS_CONSTANT_J_MOL_K * t * t) - a * (-e / (GAS_CONSTANT_J_MOL_K * t)).exp()
        };
        let (mut low, mut high) = (400.0, 900.0);
        for _ in 0..100 {
            let mid = 0.5 * (low + high);
            if condition(mid) > 0.0 {
                low = mid;
            } else {
                high = mid;
            }
        }
        assert!((peak_k - low).abs() < 0.1, "{peak_k} vs {low}");
    }

    /// A stiff chain a → b → gas whose intermediate b decomposes ~10⁴ times faster than it
    /// forms: Dormand–Prince must stop with an error that names the implicit integrator, and
    /// the implicit one must give the quasi-steady result, where the gas comes off at the rate
    /// of the slow first step, so its peak obeys Kissinger's condition for that step
    /// (Kissinger 1957; 0.5 K allows for the small hold-up in b).
    #[test]
    fn stiff_chain_needs_the_implicit_integrator_and_follows_the_slow_step() {
        let (a1, e1) = (1e13, 2.0e5);
        let slow = |reactant, product| Reaction {
            reactant,
            product,
            product_yield: if product.is_some() { 1.0 } else { 0.0 },
            pre_exponential_per_s: a1,
            activation_energy_j_mol: e1,
            order: 1.0,
            heat_of_reaction_j_kg: 0.0,
            gas: GasRelease {
                fuel_fraction: 1.0,
                heat_of_combustion_j_kg: 0.0,
            },
        };
        let fast = Reaction {
            pre_exponential_per_s: 1e12,
            activation_energy_j_mol: 1.0e5,
            ..slow(1, None)
        };
        let material = Material::new(
            vec![component("a"), component("b")],
            vec![slow(0, Some(1)), fast],
        )
        .unwrap();
        let beta = 10.0 / 60.0;
        let programme = TemperatureProgramme::ramp(300.0, beta, 900.0).unwrap();
        let explicit_settings = ZeroDSettings {
            integrator: Integrator::DormandPrince,
            ..ZeroDSettings::default()
        };
        let explicit = simulate_zero_d(&material, &[1.0, 0.0], &programme, &explicit_settings);
        let message = match explicit {
            Ok(history) => panic!("dormand–prince ran in {} steps", history.n_steps),
            Err(err) => err.to_string(),
        };
        assert!(message.contains("implicit"), "{message}");
        let settings = ZeroDSettings {
            integrator: Integrator::Implicit,
            relative_tolerance: 1e-6,
            absolute_tolerance: 1e-8,
            ..ZeroDSettings::default()
        };
        let history = simulate_zero_d(&material, &[1.0, 0.0], &programme, &settings).unwrap();
        let (_, peak_k, _) = history.mass_loss_rate_peak().unwrap();
        let condition = |t: f64| {
            e1 * beta / (GAS_CONSTANT_J_MOL_K * t * t)
                - a1 * (-e1 / (GAS_CONSTANT_J_MOL_K * t)).exp()
        };
        let (mut low, mut high) = (400.0, 900.0);
        for _ in 0..100 {
            let mid = 0.5 * (low + high);
            if condition(mid) > 0.0 {
                low = mid;
            } else {
                high = mid;
            }
        }
        println!(
            "stiff chain: dormand–prince: {message}; implicit peak {peak_k:.3} K vs {low:.3} K, \
             {} steps",
            history.n_steps
        );
        assert!((peak_k - low).abs() < 0.5, "{peak_k} vs {low}");
        assert!(*history.mass_fraction.last().unwrap() < 1e-9);
        // The automatic choice falls back to the implicit method here.
        let automatic = simulate_zero_d(
            &material,
            &[1.0, 0.0],
            &programme,
            &ZeroDSettings::default(),
        )
        .unwrap();
        assert_eq!(automatic.integrator, Integrator::Implicit);
        let (_, automatic_peak_k, _) = automatic.mass_loss_rate_peak().unwrap();
        assert!(
            (automatic_peak_k - low).abs() < 0.5,
            "{automatic_peak_k} vs {low}"
        );
    }

    /// Linearity of first-order kinetics: five identical components decomposing independently
    /// lose mass exactly as one component does. Five components take the dynamic-vector path
    /// of the integrator, one the fixed-size path; both must agree.
    #[test]
    fn five_identical_components_lose_mass_like_one() {
        let reaction = |reactant| Reaction {
            reactant,
            product: None,
            product_yield: 0.0,
            pre_exponential_per_s: 1e13,
            activation_energy_j_mol: 2.0e5,
            order: 1.0,
            heat_of_reaction_j_kg: 0.0,
            gas: GasRelease {
                fuel_fraction: 1.0,
                heat_of_combustion_j_kg: 0.0,
            },
        };
        let names = ["a", "b", "c", "d", "e"];
        let five = Material::new(
            names.iter().map(|n| component(n)).collect(),
            (0..5).map(reaction).collect(),
        )
        .unwrap();
        let one = Material::new(vec![component("a")], vec![reaction(0)]).unwrap();
        let programme = TemperatureProgramme::ramp(300.0, 10.0 / 60.0, 900.0).unwrap();
        let settings = ZeroDSettings {
            integrator: Integrator::DormandPrince,
            ..ZeroDSettings::default()
        };
        let of_five = simulate_zero_d(&five, &[0.2; 5], &programme, &settings).unwrap();
        let of_one = simulate_zero_d(&one, &[1.0], &programme, &settings).unwrap();
        assert_eq!(of_five.time_s.len(), of_one.time_s.len());
        // The two take different steps (the error norm spans the state), so they agree to the
        // integration tolerance accumulated over the run, not to rounding.
        for (a, b) in of_five.mass_fraction.iter().zip(&of_one.mass_fraction) {
            assert!((a - b).abs() < 1e-6, "{a} vs {b}");
        }
    }

    #[test]
    fn parabolic_peak_finds_the_vertex_of_a_sampled_parabola() {
        let times: Vec<f64> = (0..10).map(f64::from).collect();
        let values: Vec<f64> = times.iter().map(|t| -(t - 4.3) * (t - 4.3)).collect();
        let (time, value) = parabolic_peak(&times, &values).unwrap();
        assert!((time - 4.3).abs() < 1e-12 && value.abs() < 1e-12);
    }
}
