//! What a simulation returns: sampled curves at the output interval, the summary, and the
//! energy and mass budgets that show the run conserved both (docs/physics.md §1 "Outputs").
//! Serialisable, so that a rank of an MPI job can send a simulated band draw back.

use serde::{Deserialize, Serialize};

/// The state of the specimen at one output time, SI units.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct Sample {
    pub time_s: f64,
    /// Remaining mass of the specimen layers (backing excluded), kg/m².
    pub mass_kg_m2: f64,
    /// Mass loss rate of the specimen layers, kg/(m²·s).
    pub mlr_kg_m2_s: f64,
    /// Fuel part of the mass loss rate, kg/(m²·s).
    pub fuel_mlr_kg_m2_s: f64,
    /// Heat release rate, W/m² (zero while there is no flame).
    pub hrr_w_m2: f64,
    /// Exposed-face temperature, K.
    pub surface_temperature_k: f64,
    /// Back face of the specimen layers (the interface with the backing), K.
    pub back_temperature_k: f64,
    /// Outer back face of the whole stack, K.
    pub stack_back_temperature_k: f64,
    /// Thickness of the specimen layers, m.
    pub thickness_m: f64,
    /// Gas-release-weighted temperature of the reacting solid, K (the surface temperature
    /// while nothing gasifies).
    pub gasification_temperature_k: f64,
    /// Temperatures at the scenario's probes, K, in the scenario's order.
    pub probe_temperatures_k: Vec<f64>,
}

impl Sample {
    /// Linear interpolation between `self` (fraction 0) and `other` (fraction 1).
    pub fn interpolate(&self, other: &Sample, fraction: f64) -> Sample {
        let mix = |a: f64, b: f64| a + (b - a) * fraction;
        Sample {
            time_s: mix(self.time_s, other.time_s),
            mass_kg_m2: mix(self.mass_kg_m2, other.mass_kg_m2),
            mlr_kg_m2_s: mix(self.mlr_kg_m2_s, other.mlr_kg_m2_s),
            fuel_mlr_kg_m2_s: mix(self.fuel_mlr_kg_m2_s, other.fuel_mlr_kg_m2_s),
            hrr_w_m2: mix(self.hrr_w_m2, other.hrr_w_m2),
            surface_temperature_k: mix(self.surface_temperature_k, other.surface_temperature_k),
            back_temperature_k: mix(self.back_temperature_k, other.back_temperature_k),
            stack_back_temperature_k: mix(
                self.stack_back_temperature_k,
                other.stack_back_temperature_k,
            ),
            thickness_m: mix(self.thickness_m, other.thickness_m),
            gasification_temperature_k: mix(
                self.gasification_temperature_k,
                other.gasification_temperature_k,
            ),
            probe_temperatures_k: self
                .probe_temperatures_k
                .iter()
                .zip(&other.probe_temperatures_k)
                .map(|(a, b)| mix(*a, *b))
                .collect(),
        }
    }
}

/// Energy terms summed over the run, J/m² (docs/physics.md §1 "Numerical requirements").
#[derive(Debug, Clone, Copy, Default, PartialEq, Serialize, Deserialize)]
pub struct EnergyBudget {
    pub absorbed_j_m2: f64,
    pub reradiated_j_m2: f64,
    pub convected_j_m2: f64,
    pub back_loss_j_m2: f64,
    /// Σ ω ΔH over cells and time (positive: heat taken by endothermic reactions).
    pub reaction_heat_j_m2: f64,
    /// Σ C ΔT over cells and steps.
    pub stored_j_m2: f64,
}

impl EnergyBudget {
    pub(crate) fn add(&mut self, other: &EnergyBudget) {
        self.absorbed_j_m2 += other.absorbed_j_m2;
        self.reradiated_j_m2 += other.reradiated_j_m2;
        self.convected_j_m2 += other.convected_j_m2;
        self.back_loss_j_m2 += other.back_loss_j_m2;
        self.reaction_heat_j_m2 += other.reaction_heat_j_m2;
        self.stored_j_m2 += other.stored_j_m2;
    }

    /// self + factor·other, term by term (a TR-BDF2 step's budget is its second stage's plus
    /// a multiple of its first stage's; each closes, so the sum does).
    pub(crate) fn add_scaled(&mut self, other: &EnergyBudget, factor: f64) {
        self.absorbed_j_m2 += factor * other.absorbed_j_m2;
        self.reradiated_j_m2 += factor * other.reradiated_j_m2;
        self.convected_j_m2 += factor * other.convected_j_m2;
        self.back_loss_j_m2 += factor * other.back_loss_j_m2;
        self.reaction_heat_j_m2 += factor * other.reaction_heat_j_m2;
        self.stored_j_m2 += factor * other.stored_j_m2;
    }

    /// (1 + θ)·self − θ·full, term by term: the budget of a Richardson-extrapolated step,
    /// whose state is (1 + θ)·(two half steps) − θ·(one full step). The weights sum to 1 and
    /// each budget closes, so this one does.
    pub(crate) fn extrapolated(&self, full: &EnergyBudget, theta: f64) -> EnergyBudget {
        let mix = |half: f64, full: f64| half + theta * (half - full);
        EnergyBudget {
            absorbed_j_m2: mix(self.absorbed_j_m2, full.absorbed_j_m2),
            reradiated_j_m2: mix(self.reradiated_j_m2, full.reradiated_j_m2),
            convected_j_m2: mix(self.convected_j_m2, full.convected_j_m2),
            back_loss_j_m2: mix(self.back_loss_j_m2, full.back_loss_j_m2),
            reaction_heat_j_m2: mix(self.reaction_heat_j_m2, full.reaction_heat_j_m2),
            stored_j_m2: mix(self.stored_j_m2, full.stored_j_m2),
        }
    }

    /// absorbed − re-radiated − convected − back losses − reaction heat − stored, J/m².
    pub fn residual_j_m2(&self) -> f64 {
        self.absorbed_j_m2
            - self.reradiated_j_m2
            - self.convected_j_m2
            - self.back_loss_j_m2
            - self.reaction_heat_j_m2
            - self.stored_j_m2
    }

    /// The residual as a fraction of the absorbed energy.
    pub fn relative_residual(&self) -> f64 {
        if self.absorbed_j_m2 == 0.0 {
            self.residual_j_m2().abs()
        } else {
            (self.residual_j_m2() / self.absorbed_j_m2).abs()
        }
    }
}

/// Condensed mass of the whole stack, kg/m².
#[derive(Debug, Clone, Copy, Default, PartialEq, Serialize, Deserialize)]
pub struct MassBudget {
    pub initial_kg_m2: f64,
    pub remaining_kg_m2: f64,
    pub released_gas_kg_m2: f64,
}

impl MassBudget {
    /// |initial − remaining − released| / initial.
    pub fn relative_residual(&self) -> f64 {
        ((self.initial_kg_m2 - self.remaining_kg_m2 - self.released_gas_kg_m2) / self.initial_kg_m2)
            .abs()
    }
}

/// Figures of the whole run.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Summary {
    pub ignition_time_s: Option<f64>,
    pub flameout_time_s: Option<f64>,
    pub peak_hrr_w_m2: f64,
    pub time_of_peak_hrr_s: f64,
    pub peak_mlr_kg_m2_s: f64,
    pub time_of_peak_mlr_s: f64,
    pub total_heat_release_j_m2: f64,
    /// Initial mass of the specimen layers, kg/m².
    pub initial_mass_kg_m2: f64,
    /// Mass lost by the specimen layers, kg/m².
    pub mass_lost_kg_m2: f64,
    /// Gas-release-weighted temperature of the gasifying solid, K (the T_p of the
    /// heat-of-gasification relation, docs/physics.md §2).
    pub mean_gasification_temperature_k: Option<f64>,
    pub energy: EnergyBudget,
    pub mass: MassBudget,
    pub n_steps: usize,
    pub n_rejected_steps: usize,
    /// Linear solves, over accepted and retried steps.
    pub n_iterations: usize,
}

/// One cell of the stack at the end of the run.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CellSnapshot {
    /// Index of the cell's layer in the scenario.
    pub layer_idx: usize,
    /// Depth of the cell's front face below the current exposed surface, m.
    pub depth_m: f64,
    pub thickness_m: f64,
    pub temperature_k: f64,
    /// Mass of each of the layer material's components, kg/m².
    pub component_masses_kg_m2: Vec<f64>,
}

/// Curves at the output interval (first row at t = 0), the summary, and the final profile.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct History {
    pub probe_names: Vec<String>,
    pub samples: Vec<Sample>,
    pub summary: Summary,
    /// The cells at the end of the run, exposed cell first.
    pub final_cells: Vec<CellSnapshot>,
}

impl History {
    /// Linear interpolation of one output quantity at `time_s` (clamped to the run).
    pub fn value_at(&self, time_s: f64, quantity: impl Fn(&Sample) -> f64) -> f64 {
        let samples = &self.samples;
        let upper = samples.partition_point(|s| s.time_s < time_s);
        if upper == 0 {
            return quantity(&samples[0]);
        }
        if upper >= samples.len() {
            return quantity(&samples[samples.len() - 1]);
        }
        let (a, b) = (&samples[upper - 1], &samples[upper]);
        let fraction = (time_s - a.time_s) / (b.time_s - a.time_s);
        quantity(a) + (quantity(b) - quantity(a)) * fraction
    }
}
