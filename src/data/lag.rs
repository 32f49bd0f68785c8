//! How far a test's HRR runs behind its mass-loss rate. Both follow the same burning: the
//! gases reach the analysers some seconds after the mass leaves the specimen, and ISO 5660-1
//! has that transport delay removed from the HRR. A lab file whose HRR still carries it puts
//! ignition and the peak late by the delay. The lag is the shift that best lines up HRR with the
//! mass-loss rate (largest Pearson correlation over shifts of whole samples, refined by a
//! parabola through the best three), which the reduction reports so a user can set
//! `hrr_delay_s` (docs/test-files.md).

/// Shifts tried, s: gas-transport delays are seconds to tens of seconds (common practice).
const SHIFT_RANGE_S: (f64, f64) = (-30.0, 60.0);
/// Half-width of the moving mean applied to the mass-loss rate first, s: a raw derivative of a
/// load cell is too noisy to correlate sample by sample.
const MLR_SMOOTHING_HALF_WIDTH_S: f64 = 2.5;
/// Below this correlation the two signals do not share a shape and the lag means nothing.
const MIN_CORRELATION: f64 = 0.9;

/// The best shift of HRR onto the mass-loss rate.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Lag {
    /// How late HRR runs against the mass-loss rate, s (negative: early).
    pub seconds: f64,
    /// Pearson correlation of the two at that shift.
    pub correlation: f64,
}

/// The lag of `hrr` behind `mlr`, both on `time_s` (increasing; shifts are whole multiples of
/// the mean sample interval, values between samples interpolated). `None` when the record is
/// too short (under 200 s beyond the shift range) or the best correlation is below 0.9.
pub fn hrr_lag_behind_mass(time_s: &[f64], hrr: &[f64], mlr: &[f64]) -> Option<Lag> {
    let n = time_s.len();
    if n < 20 || hrr.len() != n || mlr.len() != n {
        return None;
    }
    let span_s = time_s[n - 1] - time_s[0];
    let dt_s = span_s / (n - 1) as f64;
    if dt_s.is_nan() || dt_s <= 0.0 || span_s < 200.0 + SHIFT_RANGE_S.1 - SHIFT_RANGE_S.0 {
        return None;
    }
    let smoothed = moving_mean(time_s, mlr, MLR_SMOOTHING_HALF_WIDTH_S);
    // The window of MLR samples compared at every shift: the shifted HRR stays inside the record.
    let first = time_s.partition_point(|t| *t < time_s[0] - SHIFT_RANGE_S.0);
    let last = time_s.partition_point(|t| *t <= time_s[n - 1] - SHIFT_RANGE_S.1);
    let steps_low = (SHIFT_RANGE_S.0 / dt_s).round() as i64;
    let steps_high = (SHIFT_RANGE_S.1 / dt_s).round() as i64;
    let correlations: Vec<(f64, f64)> = (steps_low..=steps_high)
        .filter_map(|step| {
            let shift_s = step as f64 * dt_s;
            let shifted: Vec<f64> = time_s[first..last]
                .iter()
                .map(|t| interpolate(time_s, hrr, t + shift_s))
                .collect();
            pearson(&shifted, &smoothed[first..last]).map(|r| (shift_s, r))
        })
        .collect();
    let best =
        (0..correlations.len()).max_by(|a, b| correlations[*a].1.total_cmp(&correlations[*b].1))?;
    let (shift_s, r) = correlations[best];
    if r < MIN_CORRELATION {
        return None;
    }
    // Parabola through the best and its neighbours, when both exist.
    let seconds = match (best.checked_sub(1), correlations.get(best + 1)) {
        (Some(before), Some(&(_, r_after))) => {
            let r_before = correlations[before].1;
            let curvature = r_before - 2.0 * r + r_after;
            if curvature < 0.0 {
                shift_s + 0.5 * dt_s * (r_before - r_after) / curvature
            } else {
                shift_s
            }
        }
        _ => shift_s,
    };
    Some(Lag {
        seconds,
        correlation: r,
    })
}

fn moving_mean(time_s: &[f64], values: &[f64], half_width_s: f64) -> Vec<f64> {
    let mut sums = Vec::with_capacity(values.len() + 1);
    sums.push(0.0);
    for v in values {
        let finite = if v.is_finite() { *v } else { 0.0 };
        sums.push(sums[sums.len() - 1] + finite);
    }
    time_s
        .iter()
        .map(|t| {
            let lo = time_s.partition_point(|s| *s < t - half_width_s);
            let hi = time_s.partition_point(|s| *s <= t + half_width_s);
            (sums[hi] - sums[lo]) / (hi - lo).max(1) as f64
        })
        .collect()
}

fn interpolate(time_s: &[f64], values: &[f64], t: f64) -> f64 {
    let i = time_s.partition_point(|s| *s <= t);
    if i == 0 {
        return values[0];
    }
    if i >= time_s.len() {
        return values[time_s.len() - 1];
    }
    let (t0, t1) = (time_s[i - 1], time_s[i]);
    let w = if t1 > t0 { (t - t0) / (t1 - t0) } else { 0.0 };
    values[i - 1] + w * (values[i] - values[i - 1])
}

fn pearson(a: &[f64], b: &[f64]) -> Option<f64> {
    let pairs: Vec<(f64, f64)> = a
        .iter()
        .zip(b)
        .filter(|(x, y)| x.is_finite() && y.is_finite())
        .map(|(x, y)| (*x, *y))
        .collect();
    if pairs.len() < 10 {
        return None;
    }
    let n = pairs.len() as f64;
    let (mean_a, mean_b) = pairs
        .iter()
        .fold((0.0, 0.0), |(sa, sb), (x, y)| (sa + x / n, sb + y / n));
    let (mut cov, mut var_a, mut var_b) = (0.0, 0.0, 0.0);
    for (x, y) in &pairs {
        cov += (x - mean_a) * (y - mean_b);
        var_a += (x - mean_a).powi(2);
        var_b += (y - mean_b).powi(2);
    }
    (var_a > 0.0 && var_b > 0.0).then(|| cov / (var_a * var_b).sqrt())
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A burning-like pulse (rise, plateau, burnout peak, decay) on a 1 s grid.
    fn pulse(t: f64) -> f64 {
        let rise = 1.0 / (1.0 + (-(t - 100.0) / 5.0).exp());
        let peak = 2.0 * (-((t - 350.0) / 20.0).powi(2)).exp();
        let out = 1.0 / (1.0 + ((t - 400.0) / 8.0).exp());
        rise * out * (1.0 + peak)
    }

    #[test]
    fn a_known_shift_is_found_to_a_fraction_of_a_sample() {
        let time_s: Vec<f64> = (0..700).map(f64::from).collect();
        let mlr: Vec<f64> = time_s.iter().map(|t| 20.0 * pulse(*t)).collect();
        for delay_s in [0.0, 9.0, 12.4, -4.0] {
            let hrr: Vec<f64> = time_s.iter().map(|t| 480.0 * pulse(t - delay_s)).collect();
            let lag = hrr_lag_behind_mass(&time_s, &hrr, &mlr).expect("a lag");
            assert!(
                (lag.seconds - delay_s).abs() < 0.3,
                "delay {delay_s}: found {}",
                lag.seconds
            );
            assert!(lag.correlation > 0.99);
        }
    }

    #[test]
    fn unrelated_signals_give_no_lag() {
        let time_s: Vec<f64> = (0..700).map(f64::from).collect();
        let mlr: Vec<f64> = time_s.iter().map(|t| pulse(*t)).collect();
        let hrr: Vec<f64> = time_s.iter().map(|t| (t / 37.0).sin()).collect();
        assert_eq!(hrr_lag_behind_mass(&time_s, &hrr, &mlr), None);
        assert_eq!(
            hrr_lag_behind_mass(&time_s[..100], &hrr[..100], &mlr[..100]),
            None
        );
    }
}
