//! The weighting of a fit's signals (docs/fit-jobs.md, "The objective"): the σ that
//! standardises each residual (a stated noise, the repeats' spread floored at 2 % of the
//! signal's scale, or the scale itself), the scale (the largest magnitude, or for a
//! temperature its rise), and the effective number of independent points of a curve from
//! repeats. Pure functions of values already reduced; `cases` and `milligram` call them.

use super::cases::{test_curve, SignalKind};
use crate::data::oxygen::interpolate;
use crate::data::repeats::RepeatSet;
use crate::data::Reduced;

/// The repeats' spread is floored at this fraction of the signal's scale, where repeats agree
/// too well for their spread to be the measurement's noise.
pub const REPEAT_SPREAD_FLOOR: f64 = 0.02;
/// σ as a fraction of the scale where no spread is known: a report quantity without repeats,
/// or a time of a curve from repeats at which the spread is not finite.
pub const FRACTION_OF_SCALE_WITHOUT_SPREAD: f64 = 0.1;
/// The smallest rise of a temperature used as its scale, K.
pub const MIN_TEMPERATURE_RISE_K: f64 = 1.0;

/// The largest absolute value (the default scale of a signal), never zero.
pub fn largest_magnitude(values: &[f64]) -> f64 {
    values
        .iter()
        .fold(0.0f64, |m, v| m.max(v.abs()))
        .max(f64::MIN_POSITIVE)
}

/// Whether a signal is an absolute temperature (its scale is its rise, not its peak).
pub fn is_temperature(kind: SignalKind) -> bool {
    matches!(
        kind,
        SignalKind::SurfaceTemperature
            | SignalKind::BackTemperature
            | SignalKind::InDepthTemperature
    )
}

/// The scale of a signal's kept values: the largest magnitude, or for a temperature its rise
/// over the window, at least 1 K (an absolute temperature's peak would make every residual
/// look small).
pub fn signal_scale(kind: SignalKind, values: &[f64]) -> f64 {
    if is_temperature(kind) {
        let (lo, hi) = values
            .iter()
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), v| {
                (lo.min(*v), hi.max(*v))
            });
        (hi - lo).max(MIN_TEMPERATURE_RISE_K)
    } else {
        largest_magnitude(values)
    }
}

/// The σ of each of `n_points` kept values and where it came from (`sigma`, `repeats`,
/// `peak`, `rise`; written into the run's curve index): the stated noise when given; else the
/// repeats' spread at each time (`spread`), floored at 2 % of `scale` (10 % of it where the
/// spread is not finite); else the scale itself, or 10 % of it for a report quantity.
pub fn sigma_policy(
    kind: SignalKind,
    stated_sigma: Option<f64>,
    spread: Option<&[f64]>,
    scale: f64,
    n_points: usize,
) -> (Vec<f64>, &'static str) {
    match (stated_sigma, spread) {
        (Some(sigma), _) => (vec![sigma; n_points], "sigma"),
        (None, Some(spread)) => (
            spread
                .iter()
                .map(|s| {
                    if s.is_finite() {
                        s.max(REPEAT_SPREAD_FLOOR * scale)
                    } else {
                        FRACTION_OF_SCALE_WITHOUT_SPREAD * scale
                    }
                })
                .collect(),
            "repeats",
        ),
        (None, None) => {
            let sigma = if kind.is_scalar() {
                FRACTION_OF_SCALE_WITHOUT_SPREAD * scale
            } else {
                scale
            };
            (
                vec![sigma; n_points],
                if is_temperature(kind) { "rise" } else { "peak" },
            )
        }
    }
}

/// A signal's weight in the objective: as given, or with `weigh_independent_points` times
/// its effective share of independent points.
pub fn weight_of_signal(
    weight: f64,
    effective_points: f64,
    n_points: f64,
    weigh_independent_points: bool,
) -> f64 {
    if weigh_independent_points {
        weight * effective_points / n_points
    } else {
        weight
    }
}

/// n_eff/n of an AR(1) series with lag-one autocorrelation ρ: (1 − ρ)/(1 + ρ) (the variance
/// inflation of a mean of correlated samples; Bartlett 1946, common practice), kept in
/// [1e-3, 1].
pub fn effective_fraction(lag_one: f64) -> f64 {
    if !lag_one.is_finite() || lag_one <= 0.0 {
        return 1.0;
    }
    let rho = lag_one.min(0.999);
    ((1.0 - rho) / (1.0 + rho)).clamp(1e-3, 1.0)
}

/// Lag-one autocorrelation of the repeats' deviations from their mean, each divided by the
/// signal's σ, pooled over the repeats, at the signal's kept times (`curve` = times, mean,
/// σ); NaN when there is nothing to pool.
pub(super) fn repeat_deviation_autocorrelation(
    reduced: &[Reduced],
    set: &RepeatSet,
    kind: SignalKind,
    depth_mm: Option<f64>,
    curve: (&[f64], &[f64], &[f64]),
) -> f64 {
    let (times_s, mean, sigma) = curve;
    let (mut lagged, mut square) = (0.0, 0.0);
    for (test, shift_s) in reduced.iter().zip(&set.shifts_s) {
        let Some(values) = test_curve(test, kind, depth_mm) else {
            continue;
        };
        let deviation: Vec<f64> = times_s
            .iter()
            .zip(mean.iter().zip(sigma))
            .map(|(&t, (&m, &s))| (interpolate(&test.time_s, values, t - shift_s) - m) / s)
            .collect();
        for pair in deviation.windows(2) {
            if pair[0].is_finite() && pair[1].is_finite() {
                lagged += pair[0] * pair[1];
                square += pair[0] * pair[0];
            }
        }
    }
    if square > 0.0 {
        lagged / square
    } else {
        f64::NAN
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Hand-worked: values −3, 5, 2 have largest magnitude 5; with no spread a curve's σ is
    /// that scale and a report quantity's is 10 % of it.
    #[test]
    fn without_a_spread_sigma_is_the_peak_or_a_tenth_of_it_for_a_report_quantity() {
        let scale = signal_scale(SignalKind::Hrr, &[-3.0, 5.0, 2.0]);
        assert_eq!(scale, 5.0);
        assert_eq!(
            sigma_policy(SignalKind::Hrr, None, None, scale, 3),
            (vec![5.0; 3], "peak")
        );
        assert_eq!(
            sigma_policy(SignalKind::PeakHrr, None, None, 250.0, 1),
            (vec![25.0], "peak")
        );
    }

    /// Hand-worked: a temperature from 300 K to 650 K has the rise 350 K as its scale (not
    /// its peak 650 K); a flat one has the 1 K minimum.
    #[test]
    fn a_temperatures_scale_is_its_rise_at_least_one_kelvin() {
        let scale = signal_scale(SignalKind::SurfaceTemperature, &[300.0, 480.0, 650.0]);
        assert_eq!(scale, 350.0);
        assert_eq!(
            sigma_policy(SignalKind::SurfaceTemperature, None, None, scale, 2),
            (vec![350.0; 2], "rise")
        );
        assert_eq!(
            signal_scale(SignalKind::BackTemperature, &[293.0, 293.2]),
            1.0
        );
    }

    /// Hand-worked with scale 200 (kW/m²): the 2 % floor is 4. Spreads 1, 4, 12 become 4, 4,
    /// 12; a NaN spread (a time only one repeat reached) becomes 10 % of the scale, 20.
    #[test]
    fn the_repeat_spread_is_floored_at_two_percent_of_the_scale() {
        let spread = [1.0, 4.0, 12.0, f64::NAN];
        let (sigma, source) = sigma_policy(SignalKind::Hrr, None, Some(&spread), 200.0, 4);
        assert_eq!(source, "repeats");
        assert_eq!(sigma, vec![4.0, 4.0, 12.0, 20.0]);
    }

    /// A stated σ wins over repeats and over the scale.
    #[test]
    fn a_stated_sigma_is_used_as_given() {
        let (sigma, source) = sigma_policy(SignalKind::Mlr, Some(0.5), Some(&[9.0, 9.0]), 20.0, 2);
        assert_eq!((sigma, source), (vec![0.5, 0.5], "sigma"));
    }

    /// Bartlett (1946) / common practice: an AR(1) series with ρ = 0.5 carries
    /// (1 − 0.5)/(1 + 0.5) = 1/3 of its points' information; ρ ≤ 0 or NaN counts every point,
    /// and ρ → 1 is held at 1e-3.
    #[test]
    fn the_effective_fraction_of_an_ar1_series() {
        assert!((effective_fraction(0.5) - 1.0 / 3.0).abs() < 1e-15);
        assert_eq!(effective_fraction(-0.2), 1.0);
        assert_eq!(effective_fraction(f64::NAN), 1.0);
        assert_eq!(effective_fraction(0.99999), 1e-3);
        // 30 points at ρ = 0.5 weigh as 10 when curves weigh as independent points.
        assert_eq!(weight_of_signal(1.0, 10.0, 30.0, true), 1.0 / 3.0);
        assert_eq!(weight_of_signal(2.0, 10.0, 30.0, false), 2.0);
    }
}
