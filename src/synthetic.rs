//! Measured-like test data made from a simulation: what a cone calorimeter would have logged
//! for a specimen that behaves exactly like the model, with the usual imperfections added
//! (load-cell noise, HRR noise, a start-time offset). Used for the demo cases and for twin
//! experiments, where a fit must recover parameters that are known.
//!
//! Randomness comes only from a ChaCha generator seeded by the caller, so the same seed gives
//! the same data on every machine.

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, Normal};

use crate::physics::History;

/// The imperfections added to a simulated test.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct NoiseModel {
    /// Exposed area of the specimen, m² (ISO 5660-1 specimens are 100 mm × 100 mm).
    pub area_m2: f64,
    /// Standard deviation of the load cell, g (white noise per reading).
    pub mass_noise_g: f64,
    /// Standard deviation of the HRR signal, kW/m², plus a part proportional to the signal.
    pub hrr_noise_kw_m2: f64,
    pub hrr_relative_noise: f64,
    /// The logged clock starts up to this many seconds early or late (uniform), s.
    pub time_jitter_s: f64,
    /// Interval between logged rows, s.
    pub sample_interval_s: f64,
    /// Standard deviation of the surface and back-face thermocouples, K.
    pub temperature_noise_k: f64,
}

impl Default for NoiseModel {
    /// Values of the order seen in cone calorimeter logs (common practice, no single source):
    /// load cell ±0.05 g, HRR ±2 kW/m² plus 3 %, start offset up to 3 s, 1 s rows,
    /// thermocouples ±1 K.
    fn default() -> Self {
        NoiseModel {
            area_m2: 0.01,
            mass_noise_g: 0.05,
            hrr_noise_kw_m2: 2.0,
            hrr_relative_noise: 0.03,
            time_jitter_s: 3.0,
            sample_interval_s: 1.0,
            temperature_noise_k: 1.0,
        }
    }
}

/// One synthetic test as a lab would log it.
#[derive(Debug, Clone, PartialEq)]
pub struct SyntheticTest {
    /// Logged time, s (model time plus the offset).
    pub time_s: Vec<f64>,
    /// Specimen mass on the load cell, g.
    pub mass_g: Vec<f64>,
    /// Heat release rate per exposed area, kW/m².
    pub hrr_kw_m2: Vec<f64>,
    /// Exposed-surface temperature, K.
    pub surface_temperature_k: Vec<f64>,
    /// Temperature of the specimen's unexposed face (at the backing), K.
    pub back_temperature_k: Vec<f64>,
    /// The offset added to the model's clock, s.
    pub time_offset_s: f64,
    /// Ignition time as an observer would log it (model time plus offset), s.
    pub ignition_time_s: Option<f64>,
    pub initial_mass_g: f64,
}

/// Samples `history` at the noise model's interval and adds the noise.
pub fn synthesize(history: &History, noise: &NoiseModel, seed: u64) -> SyntheticTest {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let time_offset_s = if noise.time_jitter_s > 0.0 {
        rng.gen_range(-noise.time_jitter_s..=noise.time_jitter_s)
    } else {
        0.0
    };
    let standard = Normal::new(0.0, 1.0).unwrap_or_else(|_| unreachable!("unit normal is valid"));
    // The thermocouples draw from a stream of their own, so the mass and HRR noise of a seed
    // stay as they were before temperatures were logged.
    let mut thermocouple_rng = ChaCha8Rng::seed_from_u64(seed);
    thermocouple_rng.set_stream(1);
    let end_s = history.samples.last().map_or(0.0, |s| s.time_s);
    let n_rows = (end_s / noise.sample_interval_s).floor() as usize + 1;
    let mut test = SyntheticTest {
        time_s: Vec::with_capacity(n_rows),
        mass_g: Vec::with_capacity(n_rows),
        hrr_kw_m2: Vec::with_capacity(n_rows),
        surface_temperature_k: Vec::with_capacity(n_rows),
        back_temperature_k: Vec::with_capacity(n_rows),
        time_offset_s,
        ignition_time_s: history.summary.ignition_time_s.map(|t| t + time_offset_s),
        initial_mass_g: history.summary.initial_mass_kg_m2 * noise.area_m2 * 1e3,
    };
    for row in 0..n_rows {
        let model_time_s = row as f64 * noise.sample_interval_s;
        let mass_g = history.value_at(model_time_s, |s| s.mass_kg_m2) * noise.area_m2 * 1e3;
        let hrr_kw_m2 = history.value_at(model_time_s, |s| s.hrr_w_m2) * 1e-3;
        let hrr_sigma = noise.hrr_noise_kw_m2 + noise.hrr_relative_noise * hrr_kw_m2;
        test.time_s.push(model_time_s + time_offset_s);
        test.mass_g
            .push(mass_g + noise.mass_noise_g * standard.sample(&mut rng));
        test.hrr_kw_m2
            .push(hrr_kw_m2 + hrr_sigma * standard.sample(&mut rng));
        for (column, pick) in [
            (
                &mut test.surface_temperature_k,
                (|s: &crate::physics::Sample| s.surface_temperature_k) as fn(&_) -> f64,
            ),
            (&mut test.back_temperature_k, |s| s.back_temperature_k),
        ] {
            column.push(
                history.value_at(model_time_s, pick)
                    + noise.temperature_noise_k * standard.sample(&mut thermocouple_rng),
            );
        }
    }
    test
}

/// The test as CSV text:
/// `time_s,mass_g,hrr_kw_m2,surface_temperature_k,back_temperature_k`.
pub fn synthetic_csv(test: &SyntheticTest) -> Result<Vec<u8>, csv::Error> {
    let mut writer = csv::Writer::from_writer(Vec::new());
    writer.write_record([
        "time_s",
        "mass_g",
        "hrr_kw_m2",
        "surface_temperature_k",
        "back_temperature_k",
    ])?;
    for row in 0..test.time_s.len() {
        writer.write_record([
            format!("{:.2}", test.time_s[row]),
            format!("{:.3}", test.mass_g[row]),
            format!("{:.2}", test.hrr_kw_m2[row]),
            format!("{:.2}", test.surface_temperature_k[row]),
            format!("{:.2}", test.back_temperature_k[row]),
        ])?;
    }
    writer
        .into_inner()
        .map_err(|err| csv::Error::from(err.into_error()))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::physics::output::{EnergyBudget, MassBudget, Sample, Summary};

    fn flat_history(mass_kg_m2: f64, hrr_w_m2: f64) -> History {
        let samples = (0..=1000)
            .map(|t| Sample {
                time_s: t as f64,
                mass_kg_m2,
                hrr_w_m2,
                back_temperature_k: 400.0,
                ..Sample::default()
            })
            .collect();
        History {
            probe_names: vec![],
            samples,
            summary: Summary {
                ignition_time_s: Some(10.0),
                flameout_time_s: None,
                peak_hrr_w_m2: hrr_w_m2,
                time_of_peak_hrr_s: 0.0,
                peak_mlr_kg_m2_s: 0.0,
                time_of_peak_mlr_s: 0.0,
                total_heat_release_j_m2: 0.0,
                initial_mass_kg_m2: mass_kg_m2,
                mass_lost_kg_m2: 0.0,
                mean_gasification_temperature_k: None,
                energy: EnergyBudget::default(),
                mass: MassBudget::default(),
                n_steps: 0,
                n_rejected_steps: 0,
                n_iterations: 0,
            },
            final_cells: vec![],
        }
    }

    #[test]
    fn noise_has_the_stated_standard_deviations() {
        let history = flat_history(7.0, 100e3);
        let test = synthesize(&history, &NoiseModel::default(), 42);
        let stats = |values: &[f64]| {
            let mean = values.iter().sum::<f64>() / values.len() as f64;
            let var =
                values.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (values.len() - 1) as f64;
            (mean, var.sqrt())
        };
        let (mass_mean, mass_sd) = stats(&test.mass_g);
        let (hrr_mean, hrr_sd) = stats(&test.hrr_kw_m2);
        // 1001 samples: the sample SD is within about 10 % of the true one (χ² spread).
        assert!((mass_mean - 70.0).abs() < 0.01, "{mass_mean}");
        assert!((mass_sd - 0.05).abs() < 0.005, "{mass_sd}");
        assert!((hrr_mean - 100.0).abs() < 0.5, "{hrr_mean}");
        assert!((hrr_sd - 5.0).abs() < 0.5, "{hrr_sd}");
        let (back_mean, back_sd) = stats(&test.back_temperature_k);
        assert!((back_mean - 400.0).abs() < 0.2, "{back_mean}");
        assert!((back_sd - 1.0).abs() < 0.1, "{back_sd}");
        assert!(test.time_offset_s.abs() <= 3.0);
    }

    #[test]
    fn the_same_seed_gives_the_same_data() {
        let history = flat_history(7.0, 100e3);
        let noise = NoiseModel::default();
        assert_eq!(
            synthesize(&history, &noise, 7),
            synthesize(&history, &noise, 7)
        );
        assert_ne!(
            synthesize(&history, &noise, 7),
            synthesize(&history, &noise, 8)
        );
    }
}
