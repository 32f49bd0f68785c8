//! Repeats: several reduced tests at the same conditions brought onto one time base, aligned
//! at exposure start or at ignition, with the mean and sample standard deviation per time. The
//! fit weights its residuals by that spread.
//!
//! Pure functions of [`Reduced`] curves; no I/O.

use super::oxygen::interpolate;
use super::{DataError, Notice, Reduced};

/// How repeats are lined up before averaging.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Alignment {
    /// Time from exposure start, as recorded.
    ExposureStart,
    /// Each test shifted so that its ignition falls at the mean ignition time of the set
    /// (keeps the time base physical while removing the ignition scatter).
    Ignition,
}

/// Mean and spread of one signal across repeats.
#[derive(Debug, Clone, PartialEq)]
pub struct MeanCurve {
    /// Mean per time of the tests covering it.
    pub mean: Vec<f64>,
    /// Sample standard deviation (n − 1) per time; NaN where fewer than two tests cover it.
    pub standard_deviation: Vec<f64>,
    /// Number of tests covering each time.
    pub n_tests: Vec<usize>,
}

/// Repeats on a common time base.
#[derive(Debug, Clone, PartialEq)]
pub struct RepeatSet {
    /// Common time base, s from exposure start (uniform step: the median step of the tests).
    pub time_s: Vec<f64>,
    /// HRR across tests, kW/m².
    pub hrr_kw_m2: Option<MeanCurve>,
    /// MLR across tests, g/(m²·s).
    pub mlr_g_m2s: Option<MeanCurve>,
    /// Mass across tests, g.
    pub mass_g: Option<MeanCurve>,
    /// Exposed-surface temperature across tests, K.
    pub surface_temperature_k: Option<MeanCurve>,
    /// Unexposed-face temperature across tests, K.
    pub back_temperature_k: Option<MeanCurve>,
    /// In-depth temperatures across tests, K, with their depth in mm: one per depth of the
    /// first test, averaged over the tests that measured the same depth (within
    /// `reduce::DEPTH_MATCH_MM`).
    pub in_depth_temperature_k: Vec<(f64, MeanCurve)>,
    /// Time shift applied to each test, s (zero when aligned at exposure start).
    pub shifts_s: Vec<f64>,
    /// Warnings (e.g. different irradiances in one set).
    pub notices: Vec<Notice>,
}

/// Brings `tests` onto one time base (see [`Alignment`]) and averages them per time. Each test
/// is linearly interpolated; outside its own record it does not count.
pub fn combine(tests: &[Reduced], alignment: Alignment) -> Result<RepeatSet, DataError> {
    if tests.is_empty() {
        return Err(DataError::Reduction {
            problem: "combining repeats needs at least one test, got none".to_string(),
        });
    }
    let mut notices = Vec::new();
    let flux = tests[0].irradiance_kw_m2;
    for test in tests {
        if (test.irradiance_kw_m2 - flux).abs() > 0.01 * flux.max(1.0) {
            notices.push(Notice::new(format!(
                "{}: irradiance {} kW/m² differs from the set's {flux} kW/m²",
                test.source.display(),
                test.irradiance_kw_m2
            )));
        }
    }
    let shifts_s: Vec<f64> = match alignment {
        Alignment::ExposureStart => vec![0.0; tests.len()],
        Alignment::Ignition => {
            let mut ignition_s = Vec::new();
            for test in tests {
                ignition_s.push(test.report.ignition_time_s.ok_or_else(|| {
                    DataError::Reduction {
                        problem: format!(
                            "{}: aligning at ignition needs an ignition time, and this test has \
                             none (give ignition_time_s)",
                            test.source.display()
                        ),
                    }
                })?);
            }
            let mean_s = ignition_s.iter().sum::<f64>() / ignition_s.len() as f64;
            ignition_s.iter().map(|t| mean_s - t).collect()
        }
    };
    let mut steps: Vec<f64> = tests
        .iter()
        .flat_map(|t| t.time_s.windows(2).map(|w| w[1] - w[0]))
        .collect();
    steps.sort_by(f64::total_cmp);
    let step_s = steps.get(steps.len() / 2).copied().unwrap_or(1.0);
    if step_s.is_nan() || step_s <= 0.0 {
        return Err(DataError::Reduction {
            problem: format!("repeats have no positive time step, found {step_s}"),
        });
    }
    let start_s = tests
        .iter()
        .zip(&shifts_s)
        .map(|(t, s)| t.time_s[0] + s)
        .fold(f64::INFINITY, f64::min)
        .max(0.0);
    let end_s = tests
        .iter()
        .zip(&shifts_s)
        .map(|(t, s)| t.time_s[t.time_s.len() - 1] + s)
        .fold(f64::NEG_INFINITY, f64::max);
    let n_steps = ((end_s - start_s) / step_s).floor() as usize;
    let time_s: Vec<f64> = (0..=n_steps).map(|i| start_s + i as f64 * step_s).collect();

    let curve = |pick: &dyn Fn(&Reduced) -> Option<&Vec<f64>>| -> Option<MeanCurve> {
        let available: Vec<(&Reduced, f64)> = tests
            .iter()
            .zip(&shifts_s)
            .filter(|(t, _)| pick(t).is_some())
            .map(|(t, s)| (t, *s))
            .collect();
        if available.is_empty() {
            return None;
        }
        let mut mean = Vec::with_capacity(time_s.len());
        let mut standard_deviation = Vec::with_capacity(time_s.len());
        let mut n_tests = Vec::with_capacity(time_s.len());
        for &t in &time_s {
            let values: Vec<f64> = available
                .iter()
                .filter_map(|(test, shift)| {
                    let v = interpolate(&test.time_s, pick(test)?, t - shift);
                    v.is_finite().then_some(v)
                })
                .collect();
            let n = values.len();
            let m = if n > 0 {
                values.iter().sum::<f64>() / n as f64
            } else {
                f64::NAN
            };
            let sd = if n > 1 {
                (values.iter().map(|v| (v - m).powi(2)).sum::<f64>() / (n - 1) as f64).sqrt()
            } else {
                f64::NAN
            };
            mean.push(m);
            standard_deviation.push(sd);
            n_tests.push(n);
        }
        Some(MeanCurve {
            mean,
            standard_deviation,
            n_tests,
        })
    };
    fn at_depth(test: &Reduced, depth_mm: f64) -> Option<&Vec<f64>> {
        test.in_depth_temperature_k
            .iter()
            .find(|c| (c.depth_mm - depth_mm).abs() <= super::reduce::DEPTH_MATCH_MM)
            .map(|c| &c.temperature_k)
    }
    let in_depth_temperature_k = tests[0]
        .in_depth_temperature_k
        .iter()
        .filter_map(|probe| curve(&|t| at_depth(t, probe.depth_mm)).map(|c| (probe.depth_mm, c)))
        .collect();
    Ok(RepeatSet {
        hrr_kw_m2: curve(&|t| t.hrr_kw_m2.as_ref()),
        mlr_g_m2s: curve(&|t| t.mlr_g_m2s.as_ref()),
        mass_g: curve(&|t| t.mass_g.as_ref()),
        surface_temperature_k: curve(&|t| t.surface_temperature_k.as_ref()),
        back_temperature_k: curve(&|t| t.back_temperature_k.as_ref()),
        in_depth_temperature_k,
        time_s,
        shifts_s,
        notices,
    })
}
