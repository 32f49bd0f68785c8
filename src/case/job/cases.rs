//! The cases of a fit job and their signals: `SignalKind` (what can be fitted), `SignalData`
//! (one signal's data, σ and weight), `FitCase` (a cone or milligram setup and its signals),
//! and the cone case reader `build_case`: each test reduced (`data::reduce`), repeats combined
//! (`data::repeats`), each signal picked, windowed and weighted (`weighting`), an in-depth
//! temperature given a probe of the case's scenario.

use std::path::{Path, PathBuf};

use serde::Deserialize;

use super::weighting;
use super::{AlignFile, CaseFile, Settings, SignalFile};
use crate::case::source::{error_chain, Source};
use crate::case::{CaseError, LoadedScenario};
use crate::data::reduce::DEPTH_MATCH_MM;
use crate::data::repeats::{combine, Alignment, MeanCurve, RepeatSet};
use crate::data::{reduce, Reduced, TestDescription};
use crate::microscale::MeasurementKind;
use crate::physics::zero_d::{TemperatureProgramme, ZeroDSettings};

/// A measured quantity the fit can match.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum SignalKind {
    /// Mass loss rate, g/(m²·s).
    Mlr,
    /// Heat release rate, kW/m².
    Hrr,
    /// Specimen mass, g.
    Mass,
    /// Time to ignition, s.
    IgnitionTime,
    /// Peak heat release rate, kW/m² (one value per case: the repeats' mean).
    PeakHrr,
    /// Time of the peak heat release rate, s.
    TimeToPeakHrr,
    /// Total heat released over the record, MJ/m².
    TotalHeatRelease,
    /// Mean mass loss rate between 10 % and 90 % of the mass loss, g/(m²·s) (ISO 5660-1).
    AverageMlr,
    /// Exposed-surface temperature, K.
    SurfaceTemperature,
    /// Temperature of the specimen's unexposed face (at the backing), K.
    BackTemperature,
    /// Temperature at a depth below the initial exposed surface, K.
    InDepthTemperature,
    /// TGA: sample mass over its initial mass, –.
    MassFraction,
    /// DSC: heat flow per initial mass, W/g, endothermic positive.
    DscHeatFlow,
    /// MCC: heat release rate per initial mass, W/g.
    MccHrr,
}

impl SignalKind {
    pub fn name(self) -> &'static str {
        match self {
            SignalKind::Mlr => "mlr",
            SignalKind::Hrr => "hrr",
            SignalKind::Mass => "mass",
            SignalKind::IgnitionTime => "ignition_time",
            SignalKind::PeakHrr => "peak_hrr",
            SignalKind::TimeToPeakHrr => "time_to_peak_hrr",
            SignalKind::TotalHeatRelease => "total_heat_release",
            SignalKind::AverageMlr => "average_mlr",
            SignalKind::SurfaceTemperature => "surface_temperature",
            SignalKind::BackTemperature => "back_temperature",
            SignalKind::InDepthTemperature => "in_depth_temperature",
            SignalKind::MassFraction => "mass_fraction",
            SignalKind::DscHeatFlow => "dsc_heat_flow",
            SignalKind::MccHrr => "mcc_hrr",
        }
    }

    pub fn unit(self) -> &'static str {
        match self {
            SignalKind::Mlr | SignalKind::AverageMlr => "g/(m²·s)",
            SignalKind::Hrr | SignalKind::PeakHrr => "kW/m²",
            SignalKind::TimeToPeakHrr => "s",
            SignalKind::TotalHeatRelease => "MJ/m²",
            SignalKind::Mass => "g",
            SignalKind::IgnitionTime => "s",
            SignalKind::SurfaceTemperature
            | SignalKind::BackTemperature
            | SignalKind::InDepthTemperature => "K",
            SignalKind::MassFraction => "–",
            SignalKind::DscHeatFlow | SignalKind::MccHrr => "W/g",
        }
    }

    /// A test-report quantity (one value per case, the repeats' mean) rather than a curve.
    pub fn is_scalar(self) -> bool {
        matches!(
            self,
            SignalKind::IgnitionTime
                | SignalKind::PeakHrr
                | SignalKind::TimeToPeakHrr
                | SignalKind::TotalHeatRelease
                | SignalKind::AverageMlr
        )
    }

    /// This quantity in one test's report.
    pub(super) fn of_report(self, report: &crate::data::report::Report) -> Option<f64> {
        match self {
            SignalKind::IgnitionTime => report.ignition_time_s,
            SignalKind::PeakHrr => report.peak_hrr_kw_m2,
            SignalKind::TimeToPeakHrr => report.time_to_peak_hrr_s,
            SignalKind::TotalHeatRelease => report.total_heat_release_mj_m2,
            SignalKind::AverageMlr => report.avg_mlr_10_90_g_m2s,
            _ => None,
        }
    }

    /// The milligram-scale measurement this signal belongs to; `None` for a cone signal.
    pub fn milligram_kind(self) -> Option<MeasurementKind> {
        match self {
            SignalKind::MassFraction => Some(MeasurementKind::Tga),
            SignalKind::DscHeatFlow => Some(MeasurementKind::Dsc),
            SignalKind::MccHrr => Some(MeasurementKind::Mcc),
            _ => None,
        }
    }

    /// The signal a milligram-scale measurement gives.
    pub fn of_milligram(kind: MeasurementKind) -> SignalKind {
        match kind {
            MeasurementKind::Tga => SignalKind::MassFraction,
            MeasurementKind::Dsc => SignalKind::DscHeatFlow,
            MeasurementKind::Mcc => SignalKind::MccHrr,
        }
    }
}

/// Measured data of one signal, on the data's own time base.
#[derive(Debug, Clone, PartialEq)]
pub struct SignalData {
    pub kind: SignalKind,
    pub weight: f64,
    /// Times from exposure start, s (a single entry for the ignition time).
    pub time_s: Vec<f64>,
    pub value: Vec<f64>,
    /// Standard deviation used to normalise each residual, in the signal's unit.
    pub sigma: Vec<f64>,
    /// Where the normalisation came from (`repeats`, `sigma`, `peak`, `rise`).
    pub sigma_source: &'static str,
    /// For an in-depth temperature: where the model reads it.
    pub probe: Option<SignalProbe>,
    /// Effective number of independent residuals among `time_s.len()`: neighbouring samples
    /// of a curve are correlated, so a curve from repeats counts as n·(1 − ρ)/(1 + ρ) points,
    /// ρ the lag-one autocorrelation of the repeats' standardised deviations from their mean
    /// (equal to the sample count for a single test, a scalar, or a stated `sigma`). `weight`
    /// already includes the factor effective/total when `settings.curve_weighting` is
    /// `"independent_points"`.
    pub effective_points: f64,
}

/// The model side of an in-depth temperature signal.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SignalProbe {
    /// Depth below the initial exposed surface, mm.
    pub depth_mm: f64,
    /// Index of the probe in the case scenario's probes (and in each sample's
    /// `probe_temperatures_k`).
    pub index: usize,
}

impl SignalData {
    /// The signal's name in outputs: the kind, with the depth for an in-depth temperature
    /// (`in_depth_temperature_5mm`).
    pub fn label(&self) -> String {
        match self.probe {
            Some(probe) => format!("{}_{}mm", self.kind.name(), probe.depth_mm),
            None => self.kind.name().to_string(),
        }
    }
}

/// One case of the fit: what is simulated (a cone scenario with the case's irradiance and
/// thickness, or a milligram-scale run) and its data.
#[derive(Debug, Clone)]
pub struct FitCase {
    pub name: String,
    pub setup: CaseSetup,
    /// Exposed area of the cone specimen, m² (0 for a milligram case): what the measured
    /// per-area curves are per.
    pub exposed_area_m2: f64,
    /// Area of the specimen face that burns, m² (the test description's `specimen_area_m2`,
    /// else the exposed area; 0 for a milligram case).
    pub specimen_area_m2: f64,
    pub signals: Vec<SignalData>,
    /// The test descriptions and data files this case's data come from.
    pub test_files: Vec<PathBuf>,
}

impl FitCase {
    /// Burning area over the area the data are per: the model's per-area rates (per m² of
    /// specimen) times this are comparable with the data (1 unless the lab divided by an
    /// edge frame's opening while the whole slab burnt).
    pub fn area_ratio(&self) -> f64 {
        if self.exposed_area_m2 > 0.0 && self.specimen_area_m2 > 0.0 {
            self.specimen_area_m2 / self.exposed_area_m2
        } else {
            1.0
        }
    }

    /// The cone scenario, for a cone case.
    pub fn cone_scenario(&self) -> Option<&LoadedScenario> {
        match &self.setup {
            CaseSetup::Cone(scenario) => Some(scenario),
            CaseSetup::Milligram(_) => None,
        }
    }

    /// The milligram-scale run, for a milligram case.
    pub fn milligram(&self) -> Option<&MilligramSetup> {
        match &self.setup {
            CaseSetup::Cone(_) => None,
            CaseSetup::Milligram(setup) => Some(setup),
        }
    }
}

/// What a case simulates.
#[derive(Debug, Clone)]
pub enum CaseSetup {
    /// A cone test: the 1-D solver on this scenario.
    Cone(Box<LoadedScenario>),
    /// A TGA, DSC or MCC run: the 0-D model (`physics::zero_d`) of the job's material.
    Milligram(MilligramSetup),
}

/// A milligram-scale run of the 0-D model, as a case of the fit.
#[derive(Debug, Clone, PartialEq)]
pub struct MilligramSetup {
    /// What the case's file measures.
    pub kind: MeasurementKind,
    /// The heating programme, from the case's milligram scenario or fitted to the file's
    /// temperatures (`MilligramCase::from_thermogram`).
    pub programme: TemperatureProgramme,
    /// Data time at which the programme starts, s: 0 with a scenario (the file's clock is the
    /// programme's), the first data time without one.
    pub programme_start_s: f64,
    /// Initial mass fraction of each component of the job's material.
    pub initial_mass_fractions: Vec<f64>,
    /// Integrator, tolerances, output interval and the DSC sensible-heat switch.
    pub settings: ZeroDSettings,
}

/// A signal's weight (default 1) and time window `[start, end]`, s (default: all times),
/// checked; `field` names a key of this signal for errors. Cone and milligram signals share it.
pub(super) fn weight_and_window(
    source: &Source,
    raw_signal: Option<&SignalFile>,
    field: &dyn Fn(&str) -> String,
) -> Result<(f64, (f64, f64)), CaseError> {
    let weight = match raw_signal.and_then(|s| s.weight.as_ref()) {
        Some(v) => source.non_negative(v, &field("weight"))?,
        None => 1.0,
    };
    let window = match raw_signal.and_then(|s| s.window_s.as_ref()) {
        Some(w) => {
            let [a, b] = *w.get_ref();
            if b <= a {
                return Err(source.invalid(
                    &w.span(),
                    &field("window_s"),
                    format!("must be [start, end] with end > start, got [{a}, {b}]"),
                ));
            }
            (a, b)
        }
        None => (f64::NEG_INFINITY, f64::INFINITY),
    };
    Ok((weight, window))
}

/// One cone `[[case]]`: its tests reduced (and combined when repeated), the job's scenario at
/// the case's irradiance, thickness and duration, and each signal's data, σ and weight.
pub(super) fn build_case(
    source: &Source,
    idx: usize,
    raw: &CaseFile,
    base: &Path,
    scenario: &LoadedScenario,
    settings: &Settings,
    warnings: &mut Vec<crate::data::Notice>,
) -> Result<FitCase, CaseError> {
    if raw.tests.is_empty() {
        return Err(source.inconsistent(format!("case `{}` names no tests", raw.name)));
    }
    let (reduced, test_files) = reduce_tests(source, idx, raw, base, warnings)?;
    let first = &reduced[0];
    let mut case_scenario = case_conditions(
        source,
        idx,
        raw,
        scenario,
        first,
        settings.output_interval_s,
    )?;
    let repeats = combine_repeats(source, raw, &reduced)?;
    let tests = CaseTests {
        reduced: &reduced,
        repeats: repeats.as_ref(),
    };
    let mut signals = Vec::new();
    let mut latest_s: f64 = 0.0;
    for (signal_idx, raw_signal) in raw.signals.iter().enumerate() {
        let signal = build_signal(
            source,
            (idx, signal_idx),
            raw,
            raw_signal,
            &tests,
            &mut case_scenario.scenario.probes,
            settings.weigh_independent_points,
        )?;
        latest_s = latest_s.max(*signal.time_s.last().unwrap_or(&0.0));
        signals.push(signal);
    }
    if signals.is_empty() {
        return Err(source.inconsistent(format!("case `{}` matches no signals", raw.name)));
    }
    set_duration(source, idx, raw, &mut case_scenario, latest_s)?;
    Ok(FitCase {
        name: raw.name.clone(),
        setup: CaseSetup::Cone(Box::new(case_scenario)),
        exposed_area_m2: first.exposed_area_m2,
        specimen_area_m2: first.specimen_area_m2,
        signals,
        test_files,
    })
}

/// A case's reduced tests, and their mean curves when there are repeats.
struct CaseTests<'a> {
    reduced: &'a [Reduced],
    repeats: Option<&'a RepeatSet>,
}

/// Reads and reduces every test of a case; its plausibility warnings join `warnings`. Also
/// the files the data came from (each description and its data file).
fn reduce_tests(
    source: &Source,
    idx: usize,
    raw: &CaseFile,
    base: &Path,
    warnings: &mut Vec<crate::data::Notice>,
) -> Result<(Vec<Reduced>, Vec<PathBuf>), CaseError> {
    let key = |field: &str| format!("case[{idx}].{field}");
    let mut reduced = Vec::new();
    let mut test_files = Vec::new();
    for test in &raw.tests {
        let test_path = base.join(test.get_ref());
        let description = TestDescription::load(&test_path).map_err(|err| {
            source.invalid(
                &test.span(),
                &key("tests"),
                format!("cannot use {}: {}", test_path.display(), error_chain(&err)),
            )
        })?;
        let result = reduce(&description).map_err(|err| {
            source.invalid(
                &test.span(),
                &key("tests"),
                format!(
                    "cannot reduce {}: {}",
                    test_path.display(),
                    error_chain(&err)
                ),
            )
        })?;
        warnings.extend(result.notices.iter().filter(|n| n.is_warning).cloned());
        reduced.push(result);
        test_files.push(test_path);
        test_files.push(description.data_file.clone());
    }
    Ok((reduced, test_files))
}

/// The job's scenario at the case's conditions: its irradiance (else the first test's), the
/// exposed layer's thickness when given (the grid rule kept), the job's output interval.
fn case_conditions(
    source: &Source,
    idx: usize,
    raw: &CaseFile,
    scenario: &LoadedScenario,
    first: &Reduced,
    output_interval_s: f64,
) -> Result<LoadedScenario, CaseError> {
    let key = |field: &str| format!("case[{idx}].{field}");
    let mut case_scenario = scenario.clone();
    let irradiance_kw_m2 = match &raw.irradiance_kw_m2 {
        Some(v) => source.non_negative(v, &key("irradiance_kw_m2"))?,
        None => first.irradiance_kw_m2,
    };
    case_scenario.set_constant_irradiance_w_m2(irradiance_kw_m2 * 1e3);
    if let Some(v) = &raw.thickness_mm {
        let thickness_mm = source.positive(v, &key("thickness_mm"))?;
        case_scenario.set_exposed_layer_thickness_m(thickness_mm * 1e-3);
    }
    case_scenario.scenario.output_interval_s = output_interval_s;
    Ok(case_scenario)
}

/// The repeats' mean curves and spreads (aligned as the case says), or `None` for one test.
fn combine_repeats(
    source: &Source,
    raw: &CaseFile,
    reduced: &[Reduced],
) -> Result<Option<RepeatSet>, CaseError> {
    if reduced.len() < 2 {
        return Ok(None);
    }
    let alignment = match raw.align {
        Some(AlignFile::Ignition) => Alignment::Ignition,
        _ => Alignment::ExposureStart,
    };
    combine(reduced, alignment)
        .map(Some)
        .map_err(|err| source.inconsistent(format!("case `{}`: {err}", raw.name)))
}

/// One signal of a cone case: its data within the window, σ, weight and (for an in-depth
/// temperature) the probe the case's scenario gains for it. `at` is (case, signal) index.
fn build_signal(
    source: &Source,
    at: (usize, usize),
    raw: &CaseFile,
    raw_signal: &SignalFile,
    tests: &CaseTests<'_>,
    probes: &mut Vec<crate::physics::scenario::Probe>,
    weigh_independent_points: bool,
) -> Result<SignalData, CaseError> {
    let (idx, signal_idx) = at;
    let skey = |field: &str| format!("case[{idx}].signals[{signal_idx}].{field}");
    let kind = raw_signal.kind();
    let (weight, window) = weight_and_window(source, Some(raw_signal), &skey)?;
    let depth_mm = signal_depth_mm(source, raw, raw_signal, &skey)?;
    let curve = measured_curve(source, raw, raw_signal, tests, depth_mm, &skey)?;
    let kept = keep_in_window(
        kind,
        window,
        &curve.time_s,
        &curve.value,
        curve.spread.as_deref(),
    );
    if kept.time_s.is_empty() {
        return Err(source.inconsistent(format!(
            "case `{}`: signal `{}` has no data in its window",
            raw.name,
            kind.name()
        )));
    }
    let scale = weighting::signal_scale(kind, &kept.value);
    let stated_sigma = match &raw_signal.sigma {
        Some(v) => Some(source.positive(v, &skey("sigma"))?),
        None => None,
    };
    let (sigma, sigma_source) = weighting::sigma_policy(
        kind,
        stated_sigma,
        curve.spread.is_some().then_some(kept.spread.as_slice()),
        scale,
        kept.time_s.len(),
    );
    let probe = depth_mm.map(|depth_mm| SignalProbe {
        depth_mm,
        index: probe_at_depth(probes, depth_mm),
    });
    let n_points = kept.time_s.len() as f64;
    let effective_points = match (tests.repeats, sigma_source) {
        (Some(set), "repeats") if !kind.is_scalar() => {
            let lag_one = weighting::repeat_deviation_autocorrelation(
                tests.reduced,
                set,
                kind,
                depth_mm,
                (&kept.time_s, &kept.value, &sigma),
            );
            n_points * weighting::effective_fraction(lag_one)
        }
        _ => n_points,
    };
    Ok(SignalData {
        kind,
        weight: weighting::weight_of_signal(
            weight,
            effective_points,
            n_points,
            weigh_independent_points,
        ),
        time_s: kept.time_s,
        value: kept.value,
        sigma,
        sigma_source,
        probe,
        effective_points,
    })
}

/// The thermocouple depth of an in-depth temperature signal, mm: required there, refused on
/// any other signal.
fn signal_depth_mm(
    source: &Source,
    raw: &CaseFile,
    raw_signal: &SignalFile,
    skey: &dyn Fn(&str) -> String,
) -> Result<Option<f64>, CaseError> {
    match (&raw_signal.depth_mm, raw_signal.kind()) {
        (Some(v), SignalKind::InDepthTemperature) => {
            Ok(Some(source.non_negative(v, &skey("depth_mm"))?))
        }
        (Some(v), other) => Err(source.invalid(
            &v.span(),
            &skey("depth_mm"),
            format!(
                "belongs to `in_depth_temperature` signals only, not `{}`",
                other.name()
            ),
        )),
        (None, SignalKind::InDepthTemperature) => Err(source.inconsistent(format!(
            "case `{}`: signal `in_depth_temperature` needs `depth_mm`, the \
             thermocouple's depth below the exposed surface",
            raw.name
        ))),
        (None, _) => Ok(None),
    }
}

/// A signal's measured times, values and (from repeats or several tests) spread.
struct Curve {
    time_s: Vec<f64>,
    value: Vec<f64>,
    spread: Option<Vec<f64>>,
}

/// Times, values and (from repeats) spread of a signal before its window: a report
/// quantity's mean over the tests (spread: their standard deviation), a curve's repeat mean,
/// or a single test's curve.
fn measured_curve(
    source: &Source,
    raw: &CaseFile,
    raw_signal: &SignalFile,
    tests: &CaseTests<'_>,
    depth_mm: Option<f64>,
    skey: &dyn Fn(&str) -> String,
) -> Result<Curve, CaseError> {
    let kind = raw_signal.kind();
    let missing = |what: &str| {
        source.invalid(
            &raw_signal.signal.span(),
            &skey("signal"),
            format!(
                "`{}`: the test data of case `{}` have no {what}",
                kind.name(),
                raw.name
            ),
        )
    };
    let what = match depth_mm {
        Some(d) => format!("in-depth temperature at {d} mm (columns.in_depth_temperature)"),
        None => match kind {
            SignalKind::SurfaceTemperature => "surface temperature column".to_string(),
            SignalKind::BackTemperature => "back temperature column".to_string(),
            kind => kind.name().to_string(),
        },
    };
    if kind.is_scalar() {
        let values: Vec<f64> = tests
            .reduced
            .iter()
            .filter_map(|r| kind.of_report(&r.report))
            .filter(|v| v.is_finite())
            .collect();
        if values.is_empty() {
            return Err(missing(&kind.name().replace('_', " ")));
        }
        let (mean, spread) = mean_and_sample_deviation(&values);
        return Ok(Curve {
            time_s: vec![mean],
            value: vec![mean],
            spread: spread.map(|s| vec![s]),
        });
    }
    match tests.repeats {
        Some(set) => {
            let curve = repeat_curve(set, kind, depth_mm).ok_or_else(|| missing(&what))?;
            Ok(Curve {
                time_s: set.time_s.clone(),
                value: curve.mean.clone(),
                spread: Some(curve.standard_deviation.clone()),
            })
        }
        None => {
            let first = &tests.reduced[0];
            let curve = test_curve(first, kind, depth_mm).ok_or_else(|| missing(&what))?;
            Ok(Curve {
                time_s: first.time_s.clone(),
                value: curve.clone(),
                spread: None,
            })
        }
    }
}

/// The mean of the tests' values and, for two or more, their sample standard deviation
/// (n − 1 in the denominator).
fn mean_and_sample_deviation(values: &[f64]) -> (f64, Option<f64>) {
    let mean = values.iter().sum::<f64>() / values.len() as f64;
    let deviation = (values.len() > 1).then(|| {
        let var =
            values.iter().map(|t| (t - mean).powi(2)).sum::<f64>() / (values.len() - 1) as f64;
        var.sqrt()
    });
    (mean, deviation)
}

/// A signal's finite values within its window (a report quantity has no window), with the
/// spread at the same times (NaN without one).
#[derive(Debug, Default, PartialEq)]
struct Kept {
    time_s: Vec<f64>,
    value: Vec<f64>,
    spread: Vec<f64>,
}

fn keep_in_window(
    kind: SignalKind,
    (window_start, window_end): (f64, f64),
    time_s: &[f64],
    value: &[f64],
    spread: Option<&[f64]>,
) -> Kept {
    let mut kept = Kept::default();
    for (i, (&t, &v)) in time_s.iter().zip(value).enumerate() {
        let in_window = kind.is_scalar() || (t >= window_start.max(0.0) && t <= window_end);
        if in_window && v.is_finite() {
            kept.time_s.push(t);
            kept.value.push(v);
            kept.spread.push(spread.map_or(f64::NAN, |s| s[i]));
        }
    }
    kept
}

/// The index of the scenario's probe at `depth_mm` (within 0.01 mm), added when missing.
fn probe_at_depth(probes: &mut Vec<crate::physics::scenario::Probe>, depth_mm: f64) -> usize {
    match probes
        .iter()
        .position(|p| (p.depth_m - depth_mm * 1e-3).abs() <= 1e-5)
    {
        Some(index) => index,
        None => {
            probes.push(crate::physics::scenario::Probe {
                name: format!("fit_{depth_mm}mm"),
                depth_m: depth_mm * 1e-3,
            });
            probes.len() - 1
        }
    }
}

/// The case's duration (as given, else its latest data time, at least 1 s), checked against
/// the run-size budget; a run too large is named by the key that made it so.
fn set_duration(
    source: &Source,
    idx: usize,
    raw: &CaseFile,
    case_scenario: &mut LoadedScenario,
    latest_s: f64,
) -> Result<(), CaseError> {
    let key = |field: &str| format!("case[{idx}].{field}");
    case_scenario.scenario.duration_s = match &raw.duration_s {
        Some(v) => source.positive(v, &key("duration_s"))?,
        None => latest_s.max(1.0),
    };
    let Err(size) = crate::case::budget::check_scenario_size(&case_scenario.scenario) else {
        return Ok(());
    };
    // Named by the key that set the duration (or, without one, the tests whose last time set
    // it), or the job's output interval.
    let (span, field) = match (size.culprit, &raw.duration_s, raw.tests.first()) {
        (crate::case::budget::Culprit::OutputInterval, _, Some(test)) => {
            (test.span(), "settings.output_interval_s".to_string())
        }
        (_, Some(duration), _) => (duration.span(), key("duration_s")),
        (_, None, Some(test)) => (test.span(), key("tests")),
        (_, None, None) => (0..0, key("duration_s")),
    };
    Err(source.invalid(
        &span,
        &field,
        format!("case `{}`: {}", raw.name, size.problem),
    ))
}

/// The curve of a cone signal in one reduced test (`depth_mm` picks an in-depth
/// thermocouple); `None` when the test lacks it or the signal is a report quantity.
pub(super) fn test_curve(
    test: &Reduced,
    kind: SignalKind,
    depth_mm: Option<f64>,
) -> Option<&Vec<f64>> {
    match kind {
        SignalKind::Mlr => test.mlr_g_m2s.as_ref(),
        SignalKind::Hrr => test.hrr_kw_m2.as_ref(),
        SignalKind::SurfaceTemperature => test.surface_temperature_k.as_ref(),
        SignalKind::BackTemperature => test.back_temperature_k.as_ref(),
        SignalKind::InDepthTemperature => test
            .in_depth_temperature_k
            .iter()
            .find(|c| is_same_depth(c.depth_mm, depth_mm))
            .map(|c| &c.temperature_k),
        SignalKind::Mass => test.mass_g.as_ref(),
        // Report quantities are not curves (`SignalKind::is_scalar`).
        SignalKind::IgnitionTime
        | SignalKind::PeakHrr
        | SignalKind::TimeToPeakHrr
        | SignalKind::TotalHeatRelease
        | SignalKind::AverageMlr => None,
        // Refused in cone cases before this (`milligram::check_cone_case`).
        SignalKind::MassFraction | SignalKind::DscHeatFlow | SignalKind::MccHrr => None,
    }
}

/// The mean curve of a cone signal across repeats (as [`test_curve`] for one test).
fn repeat_curve(set: &RepeatSet, kind: SignalKind, depth_mm: Option<f64>) -> Option<&MeanCurve> {
    match kind {
        SignalKind::Mlr => set.mlr_g_m2s.as_ref(),
        SignalKind::Hrr => set.hrr_kw_m2.as_ref(),
        SignalKind::SurfaceTemperature => set.surface_temperature_k.as_ref(),
        SignalKind::BackTemperature => set.back_temperature_k.as_ref(),
        SignalKind::InDepthTemperature => set
            .in_depth_temperature_k
            .iter()
            .find(|(d, _)| is_same_depth(*d, depth_mm))
            .map(|(_, c)| c),
        SignalKind::Mass => set.mass_g.as_ref(),
        SignalKind::IgnitionTime
        | SignalKind::PeakHrr
        | SignalKind::TimeToPeakHrr
        | SignalKind::TotalHeatRelease
        | SignalKind::AverageMlr => None,
        SignalKind::MassFraction | SignalKind::DscHeatFlow | SignalKind::MccHrr => None,
    }
}

fn is_same_depth(depth_mm: f64, wanted_mm: Option<f64>) -> bool {
    wanted_mm.is_some_and(|w| (depth_mm - w).abs() <= DEPTH_MATCH_MM)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Hand-worked: report values 100, 110, 120 have mean 110 and sample standard deviation
    /// √((100 + 0 + 100)/2) = 10; one value has no deviation.
    #[test]
    fn a_report_quantity_is_the_tests_mean_with_their_sample_deviation() {
        assert_eq!(
            mean_and_sample_deviation(&[100.0, 110.0, 120.0]),
            (110.0, Some(10.0))
        );
        assert_eq!(mean_and_sample_deviation(&[42.0]), (42.0, None));
    }

    /// The window keeps finite values with start.max(0) ≤ t ≤ end; a report quantity has
    /// no window; the spread follows the kept times (NaN without one).
    #[test]
    fn the_window_keeps_finite_values_from_time_zero_on() {
        let time_s = [-1.0, 0.0, 1.0, 2.0, 3.0];
        let value = [5.0, 6.0, f64::NAN, 8.0, 9.0];
        let spread = [0.5, 0.6, 0.7, 0.8, 0.9];
        let kept = keep_in_window(
            SignalKind::Hrr,
            (f64::NEG_INFINITY, 2.0),
            &time_s,
            &value,
            Some(&spread),
        );
        assert_eq!(kept.time_s, vec![0.0, 2.0]);
        assert_eq!(kept.value, vec![6.0, 8.0]);
        assert_eq!(kept.spread, vec![0.6, 0.8]);
        let kept = keep_in_window(SignalKind::Mlr, (1.5, 10.0), &time_s, &value, None);
        assert_eq!(kept.time_s, vec![2.0, 3.0]);
        assert!(kept.spread.iter().all(|s| s.is_nan()));
        let kept = keep_in_window(
            SignalKind::PeakHrr,
            (100.0, 200.0),
            &[250.0],
            &[300.0],
            None,
        );
        assert_eq!(kept.value, vec![300.0]);
    }

    /// A probe within 0.01 mm of the depth is reused; another depth adds one, named by it.
    #[test]
    fn an_in_depth_signal_reuses_or_adds_a_probe() {
        let mut probes = vec![crate::physics::scenario::Probe {
            name: "tc".into(),
            depth_m: 0.005,
        }];
        assert_eq!(probe_at_depth(&mut probes, 5.005), 0);
        assert_eq!(probe_at_depth(&mut probes, 2.0), 1);
        assert_eq!(probes[1].name, "fit_2mm");
        assert_eq!(probes[1].depth_m, 0.002);
        assert_eq!(probe_at_depth(&mut probes, 2.0), 1);
    }
}
