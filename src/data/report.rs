//! Report quantities of a cone calorimeter test (ISO 5660-1 and docs/physics.md §4) from reduced
//! curves: time to ignition (given, or detected by a stated rule), peak HRR and its time, total
//! heat release, average HRR over 60/180/300 s after ignition, mass lost, average MLR between
//! 10 % and 90 % of the mass loss, effective heat of combustion, and smoke quantities.
//!
//! Pure functions of the curves; the rules each quantity follows are stated on its field.

use super::description::IgnitionRule;
use super::oxygen::interpolate;

/// Where the reported ignition time came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum IgnitionSource {
    /// Observed by the lab and given in the description.
    Given,
    /// Detected from the HRR curve by the description's [`IgnitionRule`].
    Detected,
    /// Neither given nor detectable (no HRR, or it never rose).
    Unknown,
}

/// The quantities a cone calorimeter test report carries. `None` where the test lacks the
/// signal or the record is too short.
#[derive(Debug, Clone, PartialEq)]
pub struct Report {
    /// Time to sustained ignition, s from exposure start.
    pub ignition_time_s: Option<f64>,
    /// Where `ignition_time_s` came from.
    pub ignition_source: IgnitionSource,
    /// Largest HRR sample, kW/m² (no smoothing).
    pub peak_hrr_kw_m2: Option<f64>,
    /// Time of the largest HRR sample (the first, if several are equal), s.
    pub time_to_peak_hrr_s: Option<f64>,
    /// Trapezoidal integral of HRR from exposure start to the end of the record, MJ/m²;
    /// negative samples are kept (no baseline correction beyond the lab's or ours).
    pub total_heat_release_mj_m2: Option<f64>,
    /// Mean HRR over the 60 s after ignition, kW/m².
    pub avg_hrr_60_kw_m2: Option<f64>,
    /// Mean HRR over the 180 s after ignition, kW/m².
    pub avg_hrr_180_kw_m2: Option<f64>,
    /// Mean HRR over the 300 s after ignition, kW/m².
    pub avg_hrr_300_kw_m2: Option<f64>,
    /// Specimen mass at the start, g: the description's `initial_mass_g` if given, else the
    /// start reading (see `mass_lost_g`) when the load cell is tared.
    pub initial_mass_g: Option<f64>,
    /// Mass lost, g: median of the readings before half the ignition time (the first five
    /// readings when there is no ignition time) minus the median of the last ten readings.
    /// Medians, because load cells jump when a specimen ignites or a flame flickers.
    pub mass_lost_g: Option<f64>,
    /// Mean MLR between the times at which 10 % and 90 % of the mass loss had occurred,
    /// g/(m²·s) (ISO 5660-1).
    pub avg_mlr_10_90_g_m2s: Option<f64>,
    /// Largest MLR sample, g/(m²·s).
    pub peak_mlr_g_m2s: Option<f64>,
    /// Total heat released per mass lost, THR·A/Δm, MJ/kg (= kJ/g).
    pub effective_heat_of_combustion_mj_kg: Option<f64>,
    /// Time-mean extinction coefficient over the record from exposure start, 1/m.
    pub mean_extinction_coefficient_1_m: Option<f64>,
    /// Smoke released over the record per mass lost, ∫V̇k dt/Δm, m²/kg (the mean specific
    /// extinction area).
    pub avg_specific_extinction_area_m2_kg: Option<f64>,
    /// Smoke released over the record per exposed area, ∫V̇k dt/A, m²/m².
    pub total_smoke_release_m2_m2: Option<f64>,
    /// Last time of the record, s.
    pub end_time_s: f64,
}

/// Curves and settings the report is computed from; times start at exposure (t ≥ 0).
#[derive(Debug, Clone, Copy)]
pub struct ReportInput<'a> {
    /// Time, s.
    pub time_s: &'a [f64],
    /// HRR, kW/m².
    pub hrr_kw_m2: Option<&'a [f64]>,
    /// Mass readings, g.
    pub mass_g: Option<&'a [f64]>,
    /// MLR, g/(m²·s).
    pub mlr_g_m2s: Option<&'a [f64]>,
    /// Extinction coefficient, 1/m.
    pub extinction_coefficient_1_m: Option<&'a [f64]>,
    /// Smoke production rate V̇·k, m²/s.
    pub smoke_production_m2_s: Option<&'a [f64]>,
    /// Exposed area, m².
    pub exposed_area_m2: f64,
    /// Given ignition time, s.
    pub given_ignition_time_s: Option<f64>,
    /// Given initial specimen mass, g.
    pub given_initial_mass_g: Option<f64>,
    /// Whether the mass readings are of the specimen alone; if not, the start reading is not
    /// reported as the initial specimen mass.
    pub is_mass_tared: bool,
    /// Ignition detection rule.
    pub ignition_rule: IgnitionRule,
}

/// Computes every report quantity the input allows.
pub fn compute(input: &ReportInput<'_>) -> Report {
    let time_s = input.time_s;
    let end_time_s = time_s.last().copied().unwrap_or(0.0);
    // The first sample of the largest value, so that a plateau's peak time is its start.
    let peak = input.hrr_kw_m2.and_then(|hrr| {
        hrr.iter()
            .enumerate()
            .filter(|(_, v)| v.is_finite())
            .fold(None, |best: Option<(usize, f64)>, (idx, v)| match best {
                Some((_, b)) if b >= *v => best,
                _ => Some((idx, *v)),
            })
            .map(|(idx, v)| (time_s[idx], v))
    });
    let (ignition_time_s, ignition_source) = match input.given_ignition_time_s {
        Some(t) => (Some(t), IgnitionSource::Given),
        None => match input
            .hrr_kw_m2
            .and_then(|hrr| detect_ignition_s(time_s, hrr, input.ignition_rule))
        {
            Some(t) => (Some(t), IgnitionSource::Detected),
            None => (None, IgnitionSource::Unknown),
        },
    };
    let total_heat_release_mj_m2 = input
        .hrr_kw_m2
        .map(|hrr| integrate(time_s, hrr, time_s[0], end_time_s) / 1e3);
    let average_after_ignition = |duration_s: f64| {
        let (hrr, t_ig) = (input.hrr_kw_m2?, ignition_time_s?);
        (t_ig + duration_s <= end_time_s)
            .then(|| integrate(time_s, hrr, t_ig, t_ig + duration_s) / duration_s)
    };

    let mut mass_start_g = None;
    let mut mass_lost_g = None;
    let mut avg_mlr_10_90_g_m2s = None;
    if let Some(mass) = input.mass_g {
        let before_s = ignition_time_s.map(|t| t / 2.0);
        let start_readings: Vec<f64> = match before_s {
            Some(limit) => time_s
                .iter()
                .zip(mass)
                .filter(|(t, _)| **t <= limit)
                .map(|(_, m)| *m)
                .collect(),
            None => Vec::new(),
        };
        let start_readings = if start_readings.is_empty() {
            mass.iter().take(5).copied().collect()
        } else {
            start_readings
        };
        let end_readings: Vec<f64> = mass.iter().rev().take(10).copied().collect();
        if let (Some(start), Some(end)) = (median(&start_readings), median(&end_readings)) {
            mass_start_g = Some(start);
            let lost = start - end;
            mass_lost_g = Some(lost);
            if lost > 0.0 {
                let t10 = first_time_at_or_below(time_s, mass, start - 0.1 * lost);
                let t90 = first_time_at_or_below(time_s, mass, start - 0.9 * lost);
                if let (Some(t10), Some(t90)) = (t10, t90) {
                    if t90 > t10 {
                        avg_mlr_10_90_g_m2s =
                            Some(0.8 * lost / (t90 - t10) / input.exposed_area_m2);
                    }
                }
            }
        }
    }
    let effective_heat_of_combustion_mj_kg = match (total_heat_release_mj_m2, mass_lost_g) {
        (Some(thr), Some(lost)) if lost > 0.0 => Some(thr * input.exposed_area_m2 / lost * 1e3),
        _ => None,
    };
    let peak_mlr_g_m2s = input.mlr_g_m2s.and_then(|mlr| {
        mlr.iter()
            .copied()
            .filter(|v| v.is_finite())
            .reduce(f64::max)
    });
    let duration_s = end_time_s - time_s[0];
    let mean_extinction_coefficient_1_m = input.extinction_coefficient_1_m.and_then(|k| {
        (duration_s > 0.0).then(|| integrate(time_s, k, time_s[0], end_time_s) / duration_s)
    });
    let smoke_released_m2 = input
        .smoke_production_m2_s
        .map(|s| integrate(time_s, s, time_s[0], end_time_s));
    let avg_specific_extinction_area_m2_kg = match (smoke_released_m2, mass_lost_g) {
        (Some(smoke), Some(lost)) if lost > 0.0 => Some(smoke / (lost * 1e-3)),
        _ => None,
    };
    Report {
        ignition_time_s,
        ignition_source,
        peak_hrr_kw_m2: peak.map(|p| p.1),
        time_to_peak_hrr_s: peak.map(|p| p.0),
        total_heat_release_mj_m2,
        avg_hrr_60_kw_m2: average_after_ignition(60.0),
        avg_hrr_180_kw_m2: average_after_ignition(180.0),
        avg_hrr_300_kw_m2: average_after_ignition(300.0),
        initial_mass_g: input
            .given_initial_mass_g
            .or(mass_start_g.filter(|_| input.is_mass_tared)),
        mass_lost_g,
        avg_mlr_10_90_g_m2s,
        peak_mlr_g_m2s,
        effective_heat_of_combustion_mj_kg,
        mean_extinction_coefficient_1_m,
        avg_specific_extinction_area_m2_kg,
        total_smoke_release_m2_m2: smoke_released_m2.map(|s| s / input.exposed_area_m2),
        end_time_s,
    }
}

/// First time HRR reaches `fraction_of_peak` × peak and stays at or above it for `hold_s`,
/// interpolated linearly between the samples around the crossing; s.
pub fn detect_ignition_s(time_s: &[f64], hrr_kw_m2: &[f64], rule: IgnitionRule) -> Option<f64> {
    let peak = hrr_kw_m2
        .iter()
        .copied()
        .filter(|v| v.is_finite())
        .reduce(f64::max)?;
    if peak <= 0.0 {
        return None;
    }
    let threshold = rule.fraction_of_peak * peak;
    for idx in 0..time_s.len() {
        if hrr_kw_m2[idx].is_nan() || hrr_kw_m2[idx] < threshold {
            continue;
        }
        let holds = time_s[idx..]
            .iter()
            .zip(&hrr_kw_m2[idx..])
            .take_while(|(t, _)| **t <= time_s[idx] + rule.hold_s)
            .all(|(_, v)| *v >= threshold);
        if !holds {
            continue;
        }
        if idx == 0 {
            return Some(time_s[0]);
        }
        let (t0, t1, h0, h1) = (
            time_s[idx - 1],
            time_s[idx],
            hrr_kw_m2[idx - 1],
            hrr_kw_m2[idx],
        );
        return Some(if h1 > h0 {
            t0 + (threshold - h0) / (h1 - h0) * (t1 - t0)
        } else {
            t1
        });
    }
    None
}

/// Trapezoidal integral of (time_s, values) from `from_s` to `to_s`, the end values linearly
/// interpolated; NaN samples count as zero.
pub fn integrate(time_s: &[f64], values: &[f64], from_s: f64, to_s: f64) -> f64 {
    if time_s.is_empty() || to_s <= from_s {
        return 0.0;
    }
    let value_at = |t: f64| {
        let v = interpolate(time_s, values, t);
        if v.is_finite() {
            v
        } else {
            0.0
        }
    };
    let mut points: Vec<(f64, f64)> = vec![(from_s, value_at(from_s))];
    for (t, v) in time_s.iter().zip(values) {
        if *t > from_s && *t < to_s {
            points.push((*t, if v.is_finite() { *v } else { 0.0 }));
        }
    }
    points.push((to_s, value_at(to_s)));
    points
        .windows(2)
        .map(|w| 0.5 * (w[0].1 + w[1].1) * (w[1].0 - w[0].0))
        .sum()
}

fn median(values: &[f64]) -> Option<f64> {
    let mut sorted: Vec<f64> = values.iter().copied().filter(|v| v.is_finite()).collect();
    if sorted.is_empty() {
        return None;
    }
    sorted.sort_by(f64::total_cmp);
    let mid = sorted.len() / 2;
    Some(if sorted.len().is_multiple_of(2) {
        0.5 * (sorted[mid - 1] + sorted[mid])
    } else {
        sorted[mid]
    })
}

fn first_time_at_or_below(time_s: &[f64], values: &[f64], level: f64) -> Option<f64> {
    let idx = values.iter().position(|v| *v <= level)?;
    if idx == 0 {
        return Some(time_s[0]);
    }
    let (t0, t1, v0, v1) = (time_s[idx - 1], time_s[idx], values[idx - 1], values[idx]);
    Some(if v0 > v1 {
        t0 + (v0 - level) / (v0 - v1) * (t1 - t0)
    } else {
        t1
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    const RULE: IgnitionRule = IgnitionRule {
        fraction_of_peak: 0.1,
        hold_s: 10.0,
    };

    /// Hand-worked: a trapezoid pulse 0 → 100 kW/m² over 100–110 s, flat to 200 s, down by
    /// 210 s. Area = 100·(110 + 90)/2 = 10 000 kJ/m² = 10 MJ/m²; the 10 % threshold (10 kW/m²)
    /// is crossed at 101 s.
    #[test]
    fn a_trapezoid_pulse_gives_hand_worked_quantities() {
        let time_s: Vec<f64> = (0..=300).map(|i| i as f64).collect();
        let hrr: Vec<f64> = time_s
            .iter()
            .map(|&t| match t {
                t if t < 100.0 => 0.0,
                t if t < 110.0 => 10.0 * (t - 100.0),
                t if t <= 200.0 => 100.0,
                t if t < 210.0 => 100.0 - 10.0 * (t - 200.0),
                _ => 0.0,
            })
            .collect();
        let report = compute(&ReportInput {
            time_s: &time_s,
            hrr_kw_m2: Some(&hrr),
            mass_g: None,
            mlr_g_m2s: None,
            extinction_coefficient_1_m: None,
            smoke_production_m2_s: None,
            exposed_area_m2: 0.01,
            given_ignition_time_s: None,
            given_initial_mass_g: None,
            is_mass_tared: true,
            ignition_rule: RULE,
        });
        assert!((report.total_heat_release_mj_m2.unwrap() - 10.0).abs() < 1e-9);
        assert!((report.ignition_time_s.unwrap() - 101.0).abs() < 1e-9);
        assert_eq!(report.peak_hrr_kw_m2, Some(100.0));
        // Mean over 101–161 s: the ramp from 101 to 110 s averages 55, then 100 to 161 s:
        // (9·55 + 51·100)/60 = 93.25 kW/m².
        assert!((report.avg_hrr_60_kw_m2.unwrap() - 93.25).abs() < 1e-9);
        assert_eq!(report.avg_hrr_300_kw_m2, None);
    }

    /// Hand-worked: mass falling linearly 80 → 0 g between 100 and 500 s on 0.01 m² gives
    /// MLR 0.2 g/s / 0.01 m² = 20 g/(m²·s) between 10 % and 90 % of the loss.
    #[test]
    fn a_linear_mass_loss_gives_its_slope() {
        let time_s: Vec<f64> = (0..=600).map(|i| i as f64).collect();
        let mass: Vec<f64> = time_s
            .iter()
            .map(|&t| (80.0 - 0.2 * (t - 100.0).max(0.0)).max(0.0))
            .collect();
        let report = compute(&ReportInput {
            time_s: &time_s,
            hrr_kw_m2: None,
            mass_g: Some(&mass),
            mlr_g_m2s: None,
            extinction_coefficient_1_m: None,
            smoke_production_m2_s: None,
            exposed_area_m2: 0.01,
            given_ignition_time_s: Some(100.0),
            given_initial_mass_g: None,
            is_mass_tared: true,
            ignition_rule: RULE,
        });
        assert!((report.mass_lost_g.unwrap() - 80.0).abs() < 1e-9);
        assert!((report.avg_mlr_10_90_g_m2s.unwrap() - 20.0).abs() < 1e-9);
        assert_eq!(report.ignition_source, IgnitionSource::Given);
    }

    #[test]
    fn a_brief_spike_is_not_ignition() {
        let time_s: Vec<f64> = (0..100).map(|i| i as f64).collect();
        let mut hrr = vec![0.0; 100];
        hrr[10] = 50.0; // a 1 s spike reaching the peak
        for v in hrr.iter_mut().skip(40) {
            *v = 40.0;
        }
        let t = detect_ignition_s(&time_s, &hrr, RULE).unwrap();
        assert!((t - 39.125).abs() < 1e-9, "{t}"); // 5 kW/m² crossed 1/8 of the way
    }
}
