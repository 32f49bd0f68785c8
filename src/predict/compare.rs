//! Scores a calibrated model against held-out tests: each test is reduced as the fit reduces
//! its data, simulated at the test's irradiance (and thickness, when given) for the test's
//! duration, and compared on the test-report quantities and on whole curves.
//!
//! Error conventions (docs/predictions.md): relative errors are (model − measured)/measured in
//! percent; curve errors are the root-mean-square difference at the measured times divided by
//! the measured peak (normalised RMSE, percent).

use std::path::{Path, PathBuf};

use super::{prepare_scenario, CalibratedModel, Conditions, PredictError};
use crate::case::LoadedScenario;
use crate::data::{reduce, Reduced, TestDescription};
use crate::physics::{simulate, History};

/// The four test-report quantities of one test or its prediction.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct Quantities {
    /// Time to sustained ignition, s.
    pub ignition_time_s: Option<f64>,
    /// Peak HRR, kW/m².
    pub peak_hrr_kw_m2: Option<f64>,
    /// Time of the peak HRR, s.
    pub time_to_peak_hrr_s: Option<f64>,
    /// Total heat release over the test's record, MJ/m².
    pub total_heat_release_mj_m2: Option<f64>,
}

/// The scores of one held-out test.
#[derive(Debug, Clone)]
pub struct TestScore {
    /// The test's label, or its file name.
    pub label: String,
    pub source: PathBuf,
    /// Irradiance of the test, kW/m².
    pub irradiance_kw_m2: f64,
    pub measured: Quantities,
    pub modelled: Quantities,
    /// Error in ignition time, percent of the measured value.
    pub ignition_time_error_percent: Option<f64>,
    /// Error in ignition time, s.
    pub ignition_time_error_s: Option<f64>,
    pub peak_hrr_error_percent: Option<f64>,
    pub time_to_peak_error_percent: Option<f64>,
    /// Error in time to peak HRR, s.
    pub time_to_peak_error_s: Option<f64>,
    pub total_heat_release_error_percent: Option<f64>,
    /// RMS(model − measured)/peak(measured) of the HRR curve, percent.
    pub hrr_nrmse_percent: Option<f64>,
    /// RMS(model − measured)/peak(measured) of the MLR curve, percent.
    pub mlr_nrmse_percent: Option<f64>,
}

/// A scored test with the curves behind the score (for plots).
#[derive(Debug, Clone)]
pub struct ScoredTest {
    pub score: TestScore,
    pub reduced: Reduced,
    pub history: History,
}

fn relative_percent(model: Option<f64>, measured: Option<f64>) -> Option<f64> {
    match (model, measured) {
        (Some(m), Some(d)) if d.abs() > 0.0 => Some(100.0 * (m - d) / d),
        _ => None,
    }
}

/// RMS(model − measured)/max(measured), percent, over the finite measured points.
pub fn normalised_rmse_percent(measured: &[f64], model: &[f64]) -> Option<f64> {
    let pairs: Vec<(f64, f64)> = measured
        .iter()
        .zip(model)
        .filter(|(d, m)| d.is_finite() && m.is_finite())
        .map(|(d, m)| (*d, *m))
        .collect();
    let peak = pairs.iter().fold(0.0f64, |p, (d, _)| p.max(*d));
    if pairs.is_empty() || peak <= 0.0 {
        return None;
    }
    let mean_square = pairs.iter().map(|(d, m)| (m - d).powi(2)).sum::<f64>() / pairs.len() as f64;
    Some(100.0 * mean_square.sqrt() / peak)
}

/// Trapezoidal integral of `values` over `time_s`.
fn trapezoid(time_s: &[f64], values: &[f64]) -> f64 {
    time_s
        .windows(2)
        .zip(values.windows(2))
        .map(|(t, v)| 0.5 * (v[0] + v[1]) * (t[1] - t[0]))
        .sum()
}

/// Scores one test. `base` is the scenario the tests were run in (the fit's, or one given);
/// it takes the calibrated material, the test's irradiance and thickness, and its duration.
pub fn score_test(
    calibrated: &CalibratedModel,
    base: &LoadedScenario,
    test: &TestDescription,
) -> Result<ScoredTest, PredictError> {
    let reduced = reduce(test).map_err(|source| PredictError::Data {
        path: test.source.clone(),
        source: Box::new(source),
    })?;
    let end_s = reduced.time_s.last().copied().unwrap_or(0.0).max(1.0);
    let conditions = Conditions {
        irradiance_kw_m2: Some(reduced.irradiance_kw_m2),
        thickness_mm: test.thickness_mm,
        duration_s: Some(end_s),
    };
    let scenario = prepare_scenario(calibrated, base.clone(), &conditions)?;
    let history = simulate(&scenario).map_err(|e| PredictError::Simulation(e.to_string()))?;
    // The model on the measured time base (t ≥ 0), so both sides are integrated and searched
    // for their peak on the same points.
    let times: Vec<f64> = reduced.time_s.iter().map(|t| t.max(0.0)).collect();
    let model_hrr: Vec<f64> = times
        .iter()
        .map(|&t| history.value_at(t, |s| s.hrr_w_m2) * 1e-3)
        .collect();
    let model_mlr: Vec<f64> = times
        .iter()
        .map(|&t| history.value_at(t, |s| s.mlr_kg_m2_s) * 1e3)
        .collect();
    let (peak_index, peak) =
        model_hrr
            .iter()
            .enumerate()
            .fold((0, f64::NEG_INFINITY), |best, (i, &v)| {
                if v > best.1 {
                    (i, v)
                } else {
                    best
                }
            });
    let report = &reduced.report;
    let measured = Quantities {
        ignition_time_s: report.ignition_time_s,
        peak_hrr_kw_m2: report.peak_hrr_kw_m2,
        time_to_peak_hrr_s: report.time_to_peak_hrr_s,
        total_heat_release_mj_m2: report.total_heat_release_mj_m2,
    };
    let has_hrr = reduced.hrr_kw_m2.is_some();
    let modelled = Quantities {
        ignition_time_s: history.summary.ignition_time_s,
        peak_hrr_kw_m2: has_hrr.then_some(peak),
        time_to_peak_hrr_s: has_hrr.then(|| times[peak_index]),
        total_heat_release_mj_m2: has_hrr.then(|| trapezoid(&times, &model_hrr) * 1e-3),
    };
    let difference = |m: Option<f64>, d: Option<f64>| m.zip(d).map(|(m, d)| m - d);
    let label = test.label.clone().unwrap_or_else(|| {
        test.source
            .file_name()
            .map_or_else(String::new, |n| n.to_string_lossy().into_owned())
    });
    let score = TestScore {
        label,
        source: test.source.clone(),
        irradiance_kw_m2: reduced.irradiance_kw_m2,
        measured,
        modelled,
        ignition_time_error_percent: relative_percent(
            modelled.ignition_time_s,
            measured.ignition_time_s,
        ),
        ignition_time_error_s: difference(modelled.ignition_time_s, measured.ignition_time_s),
        peak_hrr_error_percent: relative_percent(modelled.peak_hrr_kw_m2, measured.peak_hrr_kw_m2),
        time_to_peak_error_percent: relative_percent(
            modelled.time_to_peak_hrr_s,
            measured.time_to_peak_hrr_s,
        ),
        time_to_peak_error_s: difference(modelled.time_to_peak_hrr_s, measured.time_to_peak_hrr_s),
        total_heat_release_error_percent: relative_percent(
            modelled.total_heat_release_mj_m2,
            measured.total_heat_release_mj_m2,
        ),
        hrr_nrmse_percent: reduced
            .hrr_kw_m2
            .as_ref()
            .and_then(|d| normalised_rmse_percent(d, &model_hrr)),
        mlr_nrmse_percent: reduced
            .mlr_g_m2s
            .as_ref()
            .and_then(|d| normalised_rmse_percent(d, &model_mlr)),
    };
    Ok(ScoredTest {
        score,
        reduced,
        history,
    })
}

/// The scenario of the fit job a calibrated model names (its first cone case's, with the fit's
/// output interval), for `compare` without `--scenario`.
pub fn scenario_of_job(calibrated: &CalibratedModel) -> Option<LoadedScenario> {
    calibrated
        .job
        .as_ref()
        .and_then(|job| job.cases.iter().find_map(|case| case.cone_scenario()))
        .cloned()
}

/// Reads each test description and scores it.
pub fn compare_tests(
    calibrated: &CalibratedModel,
    base: &LoadedScenario,
    tests: &[PathBuf],
) -> Result<Vec<ScoredTest>, PredictError> {
    tests
        .iter()
        .map(|path: &PathBuf| {
            let description = load_description(path)?;
            score_test(calibrated, base, &description)
        })
        .collect()
}

fn load_description(path: &Path) -> Result<TestDescription, PredictError> {
    TestDescription::load(path).map_err(|source| PredictError::Data {
        path: path.to_path_buf(),
        source: Box::new(source),
    })
}

/// The scores as a table, one row per test and one column per error.
pub fn scores_table(scores: &[TestScore]) -> String {
    let cell = |v: Option<f64>, decimals: usize| match v {
        Some(v) => format!("{v:+.decimals$}"),
        None => "-".into(),
    };
    let value = |v: Option<f64>, decimals: usize| match v {
        Some(v) => format!("{v:.decimals$}"),
        None => "-".into(),
    };
    let mut out = String::new();
    for s in scores {
        out.push_str(&format!(
            "{} ({} kW/m²)\n  quantity                measured     model       error\n",
            s.label, s.irradiance_kw_m2
        ));
        let rows = [
            (
                "ignition time, s",
                value(s.measured.ignition_time_s, 1),
                value(s.modelled.ignition_time_s, 1),
                format!(
                    "{} % ({} s)",
                    cell(s.ignition_time_error_percent, 1),
                    cell(s.ignition_time_error_s, 1)
                ),
            ),
            (
                "peak HRR, kW/m²",
                value(s.measured.peak_hrr_kw_m2, 1),
                value(s.modelled.peak_hrr_kw_m2, 1),
                format!("{} %", cell(s.peak_hrr_error_percent, 1)),
            ),
            (
                "time to peak HRR, s",
                value(s.measured.time_to_peak_hrr_s, 1),
                value(s.modelled.time_to_peak_hrr_s, 1),
                format!(
                    "{} % ({} s)",
                    cell(s.time_to_peak_error_percent, 1),
                    cell(s.time_to_peak_error_s, 1)
                ),
            ),
            (
                "total heat release, MJ/m²",
                value(s.measured.total_heat_release_mj_m2, 2),
                value(s.modelled.total_heat_release_mj_m2, 2),
                format!("{} %", cell(s.total_heat_release_error_percent, 1)),
            ),
        ];
        for (name, measured, model, error) in rows {
            out.push_str(&format!(
                "  {name:<24}{measured:>9}  {model:>9}   {error}\n"
            ));
        }
        out.push_str(&format!(
            "  normalised RMSE: HRR {} %, MLR {} %\n",
            value(s.hrr_nrmse_percent, 1),
            value(s.mlr_nrmse_percent, 1)
        ));
    }
    out
}

/// The scores as JSON (an array, one object per test).
pub fn scores_json(scores: &[TestScore]) -> serde_json::Value {
    let quantities = |q: &Quantities| {
        serde_json::json!({
            "ignition_time_s": q.ignition_time_s,
            "peak_hrr_kw_m2": q.peak_hrr_kw_m2,
            "time_to_peak_hrr_s": q.time_to_peak_hrr_s,
            "total_heat_release_mj_m2": q.total_heat_release_mj_m2,
        })
    };
    serde_json::Value::Array(
        scores
            .iter()
            .map(|s| {
                serde_json::json!({
                    "label": s.label,
                    "source": s.source.display().to_string(),
                    "irradiance_kw_m2": s.irradiance_kw_m2,
                    "measured": quantities(&s.measured),
                    "model": quantities(&s.modelled),
                    "ignition_time_error_percent": s.ignition_time_error_percent,
                    "ignition_time_error_s": s.ignition_time_error_s,
                    "peak_hrr_error_percent": s.peak_hrr_error_percent,
                    "time_to_peak_error_percent": s.time_to_peak_error_percent,
                    "time_to_peak_error_s": s.time_to_peak_error_s,
                    "total_heat_release_error_percent": s.total_heat_release_error_percent,
                    "hrr_nrmse_percent": s.hrr_nrmse_percent,
                    "mlr_nrmse_percent": s.mlr_nrmse_percent,
                })
            })
            .collect(),
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A curve scored against itself has no error; against itself scaled by 1.1 its error is
    /// the RMS of 0.1·d over the peak of d (here d = 0..10, so 10 % · RMS(d)/10).
    #[test]
    fn normalised_rmse_is_zero_for_the_same_curve_and_scales_with_the_difference() {
        let d: Vec<f64> = (0..=10).map(f64::from).collect();
        assert_eq!(normalised_rmse_percent(&d, &d), Some(0.0));
        let scaled: Vec<f64> = d.iter().map(|v| 1.1 * v).collect();
        let rms = (d.iter().map(|v| (0.1 * v).powi(2)).sum::<f64>() / 11.0).sqrt();
        let expected = 100.0 * rms / 10.0;
        let got = normalised_rmse_percent(&d, &scaled).unwrap();
        assert!((got - expected).abs() < 1e-9, "{got} vs {expected}");
    }

    #[test]
    fn trapezoid_integrates_a_line_exactly() {
        let t = [0.0, 1.0, 3.0];
        let v = [0.0, 2.0, 6.0]; // v = 2t, ∫₀³ = 9
        assert!((trapezoid(&t, &v) - 9.0).abs() < 1e-12);
    }
}
