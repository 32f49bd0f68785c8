//! A milligram-scale measurement prepared for the 0-D model (`MilligramCase`: data times,
//! measured signal, the heating programme that reproduces the file's temperature), and a
//! single-step kinetic fit of our own: Kissinger's estimate as the start, refined by
//! Nelder–Mead (argmin) on the conversion curves of several heating rates. A fit job's
//! milligram cases are simulated by `case::model`.

use argmin::core::{CostFunction, Executor, State};
use argmin::solver::neldermead::NelderMead;

use super::files::{line_fit, MeasurementKind, Thermogram};
use super::isoconversional::{
    conversion_from_mass, conversion_from_release, kissinger, ConversionRun,
};
use super::MicroscaleError;
use crate::physics::kinetics::GAS_CONSTANT_J_MOL_K;
use crate::physics::material::{Component, GasRelease, Material, PropertyLaw, Reaction};
use crate::physics::zero_d::{
    interpolate, simulate_zero_d, Integrator, ProgrammeSegment, TemperatureProgramme, ZeroDHistory,
    ZeroDSettings,
};
use crate::physics::PhysicsError;

/// One milligram-scale measurement prepared for comparison with the 0-D model.
#[derive(Debug, Clone, PartialEq)]
pub struct MilligramCase {
    /// Where the case came from (the file path), for messages.
    pub label: String,
    /// What the case measures; selects the model signal compared.
    pub kind: MeasurementKind,
    /// Data times, s, as in the file.
    pub time_s: Vec<f64>,
    /// Measured signal: TGA mass fraction, or DSC / MCC in W per g of initial mass.
    pub measured: Vec<f64>,
    /// Programme that reproduces the run's temperature; its time 0 is `time_s[0]`.
    pub programme: TemperatureProgramme,
}

impl MilligramCase {
    /// A case from a file. The programme reproduces the measured temperature over the rows
    /// where the sample reacts (TGA: 5–95 % of the mass change; MCC: of the heat released; DSC:
    /// all rows): a least-squares line of temperature against time from the first to the last
    /// data time, or, when that line changes by less than 1 K over the run, an isothermal hold
    /// at the mean temperature.
    pub fn from_thermogram(run: &Thermogram) -> Result<Self, MicroscaleError> {
        let label = run.path.display().to_string();
        let conversion = match run.kind {
            MeasurementKind::Tga => Some(conversion_from_mass(&label, &run.values)?),
            MeasurementKind::Mcc => {
                Some(conversion_from_release(&label, &run.time_s, &run.values)?)
            }
            MeasurementKind::Dsc => None,
        };
        let rows: Vec<usize> = match &conversion {
            Some(conversion) => (0..conversion.len())
                .filter(|&idx| (0.05..=0.95).contains(&conversion[idx]))
                .collect(),
            None => (0..run.time_s.len()).collect(),
        };
        let times: Vec<f64> = rows.iter().map(|&idx| run.time_s[idx]).collect();
        let temps: Vec<f64> = rows.iter().map(|&idx| run.temperature_k[idx]).collect();
        let (rate_k_s, intercept_k) = line_fit(&times, &temps).ok_or_else(|| {
            MicroscaleError::analysis(format!(
                "{label}: too few rows while the sample reacts to follow its temperature"
            ))
        })?;
        let first_s = run.time_s[0];
        let last_s = run.time_s[run.time_s.len() - 1];
        let duration_s = last_s - first_s;
        let programme = if (rate_k_s * duration_s).abs() < 1.0 {
            let mean_k = temps.iter().sum::<f64>() / temps.len() as f64;
            TemperatureProgramme::new(mean_k, vec![ProgrammeSegment::Hold { duration_s }])?
        } else {
            let start_k = intercept_k + rate_k_s * first_s;
            let end_k = intercept_k + rate_k_s * last_s;
            TemperatureProgramme::ramp(start_k, rate_k_s, end_k)?
        };
        Ok(MilligramCase {
            label,
            kind: run.kind,
            time_s: run.time_s.clone(),
            measured: run.values.clone(),
            programme,
        })
    }
}

/// A material of one component that turns wholly to gas by one n-th order reaction: the
/// single-step model of a TGA curve. Heats are zero; the component's other properties do not
/// matter at the milligram scale.
pub fn single_step_material(
    pre_exponential_per_s: f64,
    activation_energy_j_mol: f64,
    order: f64,
) -> Result<Material, PhysicsError> {
    Material::new(
        vec![Component {
            name: "sample".into(),
            density_kg_m3: 1000.0,
            conductivity_w_m_k: PropertyLaw::constant(0.2),
            specific_heat_j_kg_k: PropertyLaw::constant(1500.0),
            emissivity: 0.9,
            absorption_coefficient_per_m: None,
        }],
        vec![Reaction {
            reactant: 0,
            product: None,
            product_yield: 0.0,
            pre_exponential_per_s,
            activation_energy_j_mol,
            order,
            heat_of_reaction_j_kg: 0.0,
            gas: GasRelease {
                fuel_fraction: 1.0,
                heat_of_combustion_j_kg: 0.0,
            },
        }],
    )
}

/// Result of a single-step kinetic fit.
#[derive(Debug, Clone, PartialEq)]
pub struct SingleStepFit {
    /// Pre-exponential factor A, 1/s.
    pub pre_exponential_per_s: f64,
    /// Activation energy E, J/mol.
    pub activation_energy_j_mol: f64,
    /// Reaction order n (1 unless fitted).
    pub order: f64,
    /// Root-mean-square difference of conversion between model and data, over all runs.
    pub rms_conversion_error: f64,
    /// Kissinger's estimate that started the search: (A 1/s, E J/mol).
    pub kissinger_start: (f64, f64),
    /// Nelder–Mead iterations used.
    pub n_iterations: u64,
}

impl SingleStepFit {
    /// The fitted reaction as a material.
    pub fn material(&self) -> Result<Material, PhysicsError> {
        single_step_material(
            self.pre_exponential_per_s,
            self.activation_energy_j_mol,
            self.order,
        )
    }
}

/// Simulated TGA of a single-step material under a linear ramp at `heating_rate_k_s` from
/// `start_k` to `end_k`, with outputs every 0.25 K.
pub fn single_step_tga(
    material: &Material,
    heating_rate_k_s: f64,
    start_k: f64,
    end_k: f64,
) -> Result<ZeroDHistory, PhysicsError> {
    let programme = TemperatureProgramme::ramp(start_k, heating_rate_k_s, end_k)?;
    let settings = ZeroDSettings {
        integrator: Integrator::Automatic,
        output_interval_s: 0.25 / heating_rate_k_s,
        relative_tolerance: 1e-7,
        absolute_tolerance: 1e-9,
        include_sensible_heat: false,
    };
    simulate_zero_d(material, &[1.0], &programme, &settings)
}

/// The conversion curves being fitted, with the reference temperature that decouples ln A and E.
struct ConversionObjective<'a> {
    runs: &'a [ConversionRun],
    reference_temperature_k: f64,
    fit_order: bool,
}

impl ConversionObjective<'_> {
    /// Parameters [E in 100 kJ/mol, ln k(T_ref), (order)] to (A, E, n).
    fn kinetics(&self, params: &[f64]) -> (f64, f64, f64) {
        let activation_energy_j_mol = params[0] * 1e5;
        let pre_exponential_per_s = (params[1]
            + activation_energy_j_mol / (GAS_CONSTANT_J_MOL_K * self.reference_temperature_k))
            .exp();
        let order = if self.fit_order { params[2] } else { 1.0 };
        (pre_exponential_per_s, activation_energy_j_mol, order)
    }

    /// Mean squared conversion difference over the rows where 1 % ≤ α ≤ 99 %, all runs together;
    /// model α is compared at the measured temperatures.
    fn mean_square(&self, params: &[f64]) -> Result<f64, PhysicsError> {
        let (pre_exponential_per_s, activation_energy_j_mol, order) = self.kinetics(params);
        let is_physical = activation_energy_j_mol > 0.0
            && pre_exponential_per_s.is_finite()
            && (0.0..=4.0).contains(&order);
        if !is_physical {
            return Ok(f64::INFINITY);
        }
        let material = single_step_material(pre_exponential_per_s, activation_energy_j_mol, order)?;
        let (mut sum, mut count) = (0.0, 0usize);
        for run in self.runs {
            let rows: Vec<usize> = (0..run.conversion.len())
                .filter(|&idx| (0.01..=0.99).contains(&run.conversion[idx]))
                .collect();
            let low_k = rows
                .iter()
                .map(|&idx| run.temperature_k[idx])
                .fold(f64::INFINITY, f64::min);
            let high_k = rows
                .iter()
                .map(|&idx| run.temperature_k[idx])
                .fold(f64::NEG_INFINITY, f64::max);
            let history = single_step_tga(
                &material,
                run.heating_rate_k_s,
                low_k - 100.0,
                high_k + 20.0,
            )?;
            for &idx in &rows {
                let model_mass = interpolate(
                    &history.temperature_k,
                    &history.mass_fraction,
                    run.temperature_k[idx],
                );
                let difference = (1.0 - model_mass) - run.conversion[idx];
                sum += difference * difference;
                count += 1;
            }
        }
        Ok(sum / count.max(1) as f64)
    }
}

impl CostFunction for ConversionObjective<'_> {
    type Param = Vec<f64>;
    type Output = f64;

    fn cost(&self, params: &Self::Param) -> Result<Self::Output, argmin::core::Error> {
        // A candidate the integrator rejects is a bad candidate, not a failed fit.
        Ok(self.mean_square(params).unwrap_or(f64::INFINITY))
    }
}

/// Fits one n-th order reaction (first order unless `fit_order`) to conversion curves at two
/// or more heating rates: Kissinger's E and A from the peaks as the start, then Nelder–Mead on
/// the mean squared conversion difference, in (E, ln k at the mean peak temperature) so the
/// two parameters are nearly uncorrelated.
pub fn fit_single_step(
    runs: &[ConversionRun],
    fit_order: bool,
) -> Result<SingleStepFit, MicroscaleError> {
    let mut peaks = Vec::with_capacity(runs.len());
    for run in runs {
        let peak_k = run.peak_temperature_k().ok_or_else(|| {
            MicroscaleError::analysis(format!("run `{}` has no rate peak", run.label))
        })?;
        peaks.push((run.heating_rate_k_s, peak_k));
    }
    let start = kissinger(&peaks)?;
    let reference_temperature_k = peaks.iter().map(|p| p.1).sum::<f64>() / peaks.len() as f64;
    let objective = ConversionObjective {
        runs,
        reference_temperature_k,
        fit_order,
    };
    let e0 = start.activation_energy_j_mol * 1e-5;
    let ln_k0 = start.pre_exponential_per_s.ln()
        - start.activation_energy_j_mol / (GAS_CONSTANT_J_MOL_K * reference_temperature_k);
    let mut simplex = vec![
        vec![e0, ln_k0],
        vec![e0 * 1.1, ln_k0],
        vec![e0, ln_k0 + 0.5],
    ];
    if fit_order {
        for vertex in &mut simplex {
            vertex.push(1.0);
        }
        simplex.push(vec![e0, ln_k0, 1.3]);
    }
    let solver = NelderMead::new(simplex)
        .with_sd_tolerance(1e-12)
        .map_err(|err| MicroscaleError::analysis(format!("setting up nelder–mead: {err}")))?;
    let result = Executor::new(objective, solver)
        .configure(|state| state.max_iters(400))
        .run()
        .map_err(|err| MicroscaleError::analysis(format!("kinetic fit failed: {err}")))?;
    let state = result.state();
    let best = state
        .get_best_param()
        .cloned()
        .ok_or_else(|| MicroscaleError::analysis("kinetic fit found no parameters"))?;
    let objective = ConversionObjective {
        runs,
        reference_temperature_k,
        fit_order,
    };
    let (pre_exponential_per_s, activation_energy_j_mol, order) = objective.kinetics(&best);
    let best_cost = state.get_best_cost();
    if !best_cost.is_finite() {
        return Err(MicroscaleError::analysis(format!(
            "kinetic fit found no candidate the model could simulate (started from kissinger's \
             E = {:.1} kJ/mol, A = {:.3e} 1/s)",
            start.activation_energy_j_mol * 1e-3,
            start.pre_exponential_per_s
        )));
    }
    Ok(SingleStepFit {
        pre_exponential_per_s,
        activation_energy_j_mol,
        order,
        rms_conversion_error: best_cost.sqrt(),
        kissinger_start: (start.pre_exponential_per_s, start.activation_energy_j_mol),
        n_iterations: state.get_iter(),
    })
}

/// Peak temperature (K) of the mass-loss rate that a fitted single step predicts for a linear
/// ramp at `heating_rate_k_s` (simulated from 400 K to 900 K).
pub fn predicted_peak_temperature_k(
    fit: &SingleStepFit,
    heating_rate_k_s: f64,
) -> Result<f64, MicroscaleError> {
    let history = single_step_tga(&fit.material()?, heating_rate_k_s, 400.0, 900.0)?;
    history
        .mass_loss_rate_peak()
        .map(|(_, temperature_k, _)| temperature_k)
        .ok_or_else(|| MicroscaleError::analysis("the model gives no mass-loss peak"))
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::path::PathBuf;

    /// The 0-D model's mass fraction minus the measured one at the case's data times (the
    /// programme's time 0 is the first data time, as `from_thermogram` builds it).
    fn mass_fraction_residuals(
        material: &Material,
        case: &MilligramCase,
        settings: &ZeroDSettings,
    ) -> Vec<f64> {
        let history = simulate_zero_d(material, &[1.0], &case.programme, settings).unwrap();
        let first_s = case.time_s[0];
        case.time_s
            .iter()
            .zip(&case.measured)
            .map(|(&t, &measured)| {
                interpolate(&history.time_s, &history.mass_fraction, t - first_s) - measured
            })
            .collect()
    }

    fn tga_file(time_s: Vec<f64>, values: Vec<f64>) -> Thermogram {
        Thermogram {
            path: PathBuf::from("synthetic.csv"),
            kind: MeasurementKind::Tga,
            temperature_k: time_s.iter().map(|t| 300.0 + 0.2 * t).collect(),
            time_s,
            values,
            initial_mass_mg: Some(5.0),
            notices: Vec::new(),
        }
    }

    /// With E = 0 the rate constant is A at any temperature, so dm/dt = −A·m gives
    /// m/m₀ = exp(−A·(t − t₀)) exactly: the model curve must follow it at the data times,
    /// which start at t₀ = 40 s, not at 0 (the programme's time 0 is the first data row).
    #[test]
    fn the_model_at_data_times_follows_the_exact_decay_for_zero_activation_energy() {
        let a = 2e-3;
        let time_s: Vec<f64> = (0..400).map(|i| 40.0 + 5.0 * f64::from(i)).collect();
        let values = time_s.iter().map(|t| (-a * (t - 40.0)).exp()).collect();
        let case = MilligramCase::from_thermogram(&tga_file(time_s.clone(), values)).unwrap();
        let material = single_step_material(a, 0.0, 1.0).unwrap();
        let settings = ZeroDSettings {
            output_interval_s: 5.0,
            ..ZeroDSettings::default()
        };
        let residual = mass_fraction_residuals(&material, &case, &settings);
        assert_eq!(residual.len(), time_s.len());
        let worst = residual.iter().map(|r| r.abs()).fold(0.0, f64::max);
        assert!(worst < 1e-6, "{worst}");
    }

    /// Isothermal TGA: at constant T a first-order reaction gives m/m₀ = exp(−k·t) with
    /// k = A·exp(−E/(R·T)) (Arrhenius); the case becomes a hold at the file's temperature.
    #[test]
    fn an_isothermal_case_follows_the_exact_first_order_decay() {
        let (a, e, temperature_k) = (1e10, 1.5e5, 600.0);
        let k = crate::physics::kinetics::rate_constant_per_s(a, e, temperature_k);
        let time_s: Vec<f64> = (0..300).map(|i| 10.0 + 2.0 * f64::from(i)).collect();
        let values = time_s.iter().map(|t| (-k * (t - 10.0)).exp()).collect();
        let mut run = tga_file(time_s, values);
        run.temperature_k
            .iter_mut()
            .for_each(|t| *t = temperature_k);
        let case = MilligramCase::from_thermogram(&run).unwrap();
        assert_eq!(case.programme.heating_rate_k_s_at(50.0), 0.0);
        let material = single_step_material(a, e, 1.0).unwrap();
        let residual = mass_fraction_residuals(&material, &case, &ZeroDSettings::default());
        let worst = residual.iter().map(|r| r.abs()).fold(0.0, f64::max);
        assert!(worst < 1e-6, "{worst}");
    }
}
