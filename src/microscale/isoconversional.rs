//! Model-free (isoconversional) kinetics as recommended by the ICTAC Kinetics Committee
//! (Vyazovkin et al., Thermochim. Acta 520 (2011) 1–19): Friedman, Kissinger–Akahira–Sunose and
//! Ozawa–Flynn–Wall (with Doyle's 1.052), and Kissinger's E and A from peak temperatures
//! (Kissinger, Anal. Chem. 29 (1957) 1702). Pure computation on runs already read.

use crate::physics::kinetics::GAS_CONSTANT_J_MOL_K;
use crate::physics::zero_d::parabolic_peak;

use super::files::{line_fit, MeasurementKind, Thermogram};
use super::MicroscaleError;

/// Doyle's linear approximation of the temperature integral, ln p(x) ≈ −5.331 − 1.052·x, used by
/// the Ozawa–Flynn–Wall method (Doyle, C.D., J. Appl. Polym. Sci. 6 (1962) 639; quoted from
/// memory).
pub const DOYLE_SLOPE: f64 = 1.052;

/// Relative spread of E over the analysed conversions, (max − min)/mean, above which one
/// single-step model cannot describe the data. ICTAC (Vyazovkin et al. 2011) call a variation
/// of more than 10–20 % of the mean significant (quoted from memory); the upper end is used.
pub const DEFAULT_MAX_RELATIVE_SPREAD: f64 = 0.2;

/// Conversions analysed by default: 0.1 to 0.9 in steps of 0.05.
pub fn default_conversions() -> Vec<f64> {
    (2..=18).map(|i| f64::from(i) * 0.05).collect()
}

/// One constant-heating-rate run as conversion against time and temperature.
#[derive(Debug, Clone, PartialEq)]
pub struct ConversionRun {
    /// Where the run came from, for tables.
    pub label: String,
    /// Mean heating rate over the reacting part of the run, K/s.
    pub heating_rate_k_s: f64,
    /// Time of each row, s.
    pub time_s: Vec<f64>,
    /// Sample temperature of each row, K.
    pub temperature_k: Vec<f64>,
    /// Conversion α, 0 at the start, 1 at the end.
    pub conversion: Vec<f64>,
}

impl ConversionRun {
    /// A run from normalised mass: α = (m₀ − m)/(m₀ − m_end), m₀ and m_end the means of the first
    /// and last 1 % of the rows (at least one row each), so the baseline noise averages out.
    /// The heating rate is fitted over the rows where 0.05 ≤ α ≤ 0.95.
    pub fn from_mass_fraction(
        label: &str,
        time_s: &[f64],
        temperature_k: &[f64],
        mass_fraction: &[f64],
    ) -> Result<Self, MicroscaleError> {
        let n = time_s
            .len()
            .min(temperature_k.len())
            .min(mass_fraction.len());
        let conversion = conversion_from_mass(label, &mass_fraction[..n])?;
        Self::from_conversion(label, &time_s[..n], &temperature_k[..n], conversion)
    }

    /// A run from a heat-release-rate curve (MCC), α(t) = ∫HRR dt / ∫HRR dt over the run, by
    /// the trapezoid rule; the HRR is proportional to the fuel mass-loss rate.
    pub fn from_release_rate(
        label: &str,
        time_s: &[f64],
        temperature_k: &[f64],
        release_rate: &[f64],
    ) -> Result<Self, MicroscaleError> {
        let n = time_s
            .len()
            .min(temperature_k.len())
            .min(release_rate.len());
        let conversion = conversion_from_release(label, &time_s[..n], &release_rate[..n])?;
        Self::from_conversion(label, &time_s[..n], &temperature_k[..n], conversion)
    }

    /// A run from a TGA or MCC thermogram.
    pub fn from_thermogram(run: &Thermogram) -> Result<Self, MicroscaleError> {
        let label = run.path.display().to_string();
        match run.kind {
            MeasurementKind::Tga => {
                Self::from_mass_fraction(&label, &run.time_s, &run.temperature_k, &run.values)
            }
            MeasurementKind::Mcc => {
                Self::from_release_rate(&label, &run.time_s, &run.temperature_k, &run.values)
            }
            MeasurementKind::Dsc => Err(MicroscaleError::analysis(format!(
                "{label}: isoconversional analysis needs TGA or MCC data, got DSC (its baseline \
                 and heats of reaction do not give conversion reliably)"
            ))),
        }
    }

    fn from_conversion(
        label: &str,
        time_s: &[f64],
        temperature_k: &[f64],
        conversion: Vec<f64>,
    ) -> Result<Self, MicroscaleError> {
        let reacting: Vec<usize> = (0..conversion.len())
            .filter(|&idx| (0.05..=0.95).contains(&conversion[idx]))
            .collect();
        let times: Vec<f64> = reacting.iter().map(|&idx| time_s[idx]).collect();
        let temps: Vec<f64> = reacting.iter().map(|&idx| temperature_k[idx]).collect();
        let heating_rate_k_s = line_fit(&times, &temps)
            .map(|(slope, _)| slope)
            .filter(|slope| *slope > 0.0)
            .ok_or_else(|| {
                MicroscaleError::analysis(format!(
                    "run `{label}` is not heated while it reacts (no rising temperature between \
                     5 % and 95 % conversion)"
                ))
            })?;
        Ok(ConversionRun {
            label: label.to_string(),
            heating_rate_k_s,
            time_s: time_s.to_vec(),
            temperature_k: temperature_k.to_vec(),
            conversion,
        })
    }

    /// Index of the first row at or past `target` conversion (not the first row).
    fn crossing(&self, target: f64) -> Option<usize> {
        (1..self.conversion.len()).find(|&idx| self.conversion[idx] >= target)
    }

    /// Time, temperature and rate dα/dt (1/s) where the run first reaches conversion `target`.
    /// The rate is the slope, at that time, of a least-squares parabola of α against time over
    /// the rows within ±0.02 of the target (at least two rows each side): the parabola damps
    /// sampling noise without the bias that a line has where the curve bends.
    pub fn at_conversion(&self, target: f64) -> Option<(f64, f64, f64)> {
        let idx = self.crossing(target)?;
        let (a0, a1) = (self.conversion[idx - 1], self.conversion[idx]);
        let fraction = if a1 > a0 {
            (target - a0) / (a1 - a0)
        } else {
            1.0
        };
        let lerp = |v: &[f64]| v[idx - 1] + fraction * (v[idx] - v[idx - 1]);
        let time_s = lerp(&self.time_s);
        let temperature_k = lerp(&self.temperature_k);
        let mut low = idx - 1;
        while low > 0 && self.conversion[low - 1] >= target - 0.02 {
            low -= 1;
        }
        let mut high = idx;
        while high + 1 < self.conversion.len() && self.conversion[high + 1] <= target + 0.02 {
            high += 1;
        }
        let low = low.min(idx.saturating_sub(2));
        let high = high.max((idx + 1).min(self.conversion.len() - 1));
        let rate_per_s = quadratic_slope_at(
            &self.time_s[low..=high],
            &self.conversion[low..=high],
            time_s,
        )?;
        (rate_per_s > 0.0).then_some((time_s, temperature_k, rate_per_s))
    }

    /// Rate of conversion dα/dt (1/s) at each row, by a least-squares line over a window of about
    /// `window_k` kelvin (at least ±1 row) centred on the row.
    pub fn conversion_rate_per_s(&self, window_k: f64) -> Vec<f64> {
        let n = self.time_s.len();
        let step_k = (self.temperature_k[n - 1] - self.temperature_k[0]).abs() / (n - 1) as f64;
        let half = ((0.5 * window_k / step_k.max(1e-9)).round() as usize).max(1);
        (0..n)
            .map(|idx| {
                let low = idx.saturating_sub(half);
                let high = (idx + half).min(n - 1);
                line_fit(&self.time_s[low..=high], &self.conversion[low..=high])
                    .map_or(0.0, |(slope, _)| slope)
            })
            .collect()
    }

    /// Temperature of the peak conversion rate, K: the rate smoothed over a 4 K window, then a
    /// parabola through the largest value and its neighbours.
    pub fn peak_temperature_k(&self) -> Option<f64> {
        let rate = self.conversion_rate_per_s(4.0);
        let (time_s, _) = parabolic_peak(&self.time_s, &rate)?;
        Some(crate::physics::zero_d::interpolate(
            &self.time_s,
            &self.temperature_k,
            time_s,
        ))
    }
}

/// Slope at `at` of the least-squares parabola through (x, y) (a line with three points or
/// fewer); `None` when the points do not determine it.
fn quadratic_slope_at(x: &[f64], y: &[f64], at: f64) -> Option<f64> {
    let n = x.len().min(y.len());
    if n < 4 {
        return line_fit(x, y).map(|(slope, _)| slope);
    }
    // Centre and scale x for a well-conditioned 3×3 normal system.
    let centre = x[..n].iter().sum::<f64>() / n as f64;
    let scale = x[..n]
        .iter()
        .map(|xi| (xi - centre).abs())
        .fold(0.0, f64::max);
    if scale <= 0.0 {
        return None;
    }
    let mut m = [[0.0f64; 4]; 3];
    for (xi, yi) in x[..n].iter().zip(&y[..n]) {
        let u = (xi - centre) / scale;
        let powers = [1.0, u, u * u];
        for row in 0..3 {
            for col in 0..3 {
                m[row][col] += powers[row] * powers[col];
            }
            m[row][3] += powers[row] * yi;
        }
    }
    // Gaussian elimination with partial pivoting.
    for col in 0..3 {
        let pivot = (col..3).max_by(|&a, &b| m[a][col].abs().total_cmp(&m[b][col].abs()))?;
        m.swap(col, pivot);
        if m[col][col].abs() < 1e-300 {
            return None;
        }
        let pivot_row = m[col];
        for row in m.iter_mut().skip(col + 1) {
            let factor = row[col] / pivot_row[col];
            for (value, pivot_value) in row.iter_mut().zip(&pivot_row).skip(col) {
                *value -= factor * pivot_value;
            }
        }
    }
    let mut coefficients = [0.0f64; 3];
    for row in (0..3).rev() {
        let known: f64 = (row + 1..3).map(|k| m[row][k] * coefficients[k]).sum();
        coefficients[row] = (m[row][3] - known) / m[row][row];
    }
    let u = (at - centre) / scale;
    Some((coefficients[1] + 2.0 * coefficients[2] * u) / scale)
}

/// Conversion from normalised mass: α = (m₀ − m)/(m₀ − m_end), with m₀ and m_end the means of
/// the first and last 1 % of the rows (at least one each), so baseline noise averages out.
pub(crate) fn conversion_from_mass(
    label: &str,
    mass_fraction: &[f64],
) -> Result<Vec<f64>, MicroscaleError> {
    let n = mass_fraction.len();
    let edge = (n / 100).max(1);
    if n < 3 * edge.max(2) {
        return Err(MicroscaleError::analysis(format!(
            "run `{label}` has {n} rows, too few for a conversion curve"
        )));
    }
    let start = mass_fraction[..edge].iter().sum::<f64>() / edge as f64;
    let end = mass_fraction[n - edge..].iter().sum::<f64>() / edge as f64;
    if start - end <= 0.0 {
        return Err(MicroscaleError::analysis(format!(
            "run `{label}` loses no mass (start {start:.4}, end {end:.4})"
        )));
    }
    Ok(mass_fraction
        .iter()
        .map(|m| (start - m) / (start - end))
        .collect())
}

/// Conversion from a release-rate curve: the running trapezoid integral over its total.
pub(crate) fn conversion_from_release(
    label: &str,
    time_s: &[f64],
    release_rate: &[f64],
) -> Result<Vec<f64>, MicroscaleError> {
    let n = time_s.len().min(release_rate.len());
    let mut cumulative = vec![0.0; n];
    for idx in 1..n {
        cumulative[idx] = cumulative[idx - 1]
            + 0.5 * (time_s[idx] - time_s[idx - 1]) * (release_rate[idx] + release_rate[idx - 1]);
    }
    let total = cumulative.last().copied().unwrap_or(0.0);
    if total <= 0.0 {
        return Err(MicroscaleError::analysis(format!(
            "run `{label}` releases no heat"
        )));
    }
    Ok(cumulative.iter().map(|c| c / total).collect())
}

/// An isoconversional method.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Method {
    /// ln(dα/dt) against 1/T at fixed α; slope −E/R (differential, no approximation).
    Friedman,
    /// Kissinger–Akahira–Sunose: ln(β/T²) against 1/T; slope −E/R.
    KissingerAkahiraSunose,
    /// Ozawa–Flynn–Wall: ln β against 1/T; slope −1.052·E/R (Doyle).
    OzawaFlynnWall,
}

impl Method {
    /// Short name for tables.
    pub fn name(self) -> &'static str {
        match self {
            Method::Friedman => "friedman",
            Method::KissingerAkahiraSunose => "kas",
            Method::OzawaFlynnWall => "ofw",
        }
    }
}

/// Result of one regression at one conversion.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct IsoconversionalPoint {
    /// Conversion α at which E was estimated, 0..1.
    pub conversion: f64,
    /// Activation energy, J/mol.
    pub activation_energy_j_mol: f64,
    /// Standard error of E from the regression, J/mol (NaN with two runs).
    pub standard_error_j_mol: f64,
    /// Coefficient of determination of the line, 0..1.
    pub r_squared: f64,
    /// Number of runs that reached this conversion.
    pub n_runs: usize,
}

/// A least-squares line with its quality.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LineFit {
    /// Slope of the line, in y per x.
    pub slope: f64,
    /// Intercept of the line at x = 0, in y.
    pub intercept: f64,
    /// Standard error of the slope (NaN with two points).
    pub slope_standard_error: f64,
    /// Coefficient of determination, 0..1.
    pub r_squared: f64,
}

/// Least-squares line with its standard error and R²; `None` with fewer than two distinct x.
pub fn regression(x: &[f64], y: &[f64]) -> Option<LineFit> {
    let n = x.len().min(y.len());
    let (slope, intercept) = line_fit(x, y)?;
    let mean_x = x[..n].iter().sum::<f64>() / n as f64;
    let mean_y = y[..n].iter().sum::<f64>() / n as f64;
    let (mut ss_res, mut ss_tot, mut sxx) = (0.0, 0.0, 0.0);
    for (xi, yi) in x[..n].iter().zip(&y[..n]) {
        let residual = yi - (slope * xi + intercept);
        ss_res += residual * residual;
        ss_tot += (yi - mean_y) * (yi - mean_y);
        sxx += (xi - mean_x) * (xi - mean_x);
    }
    let r_squared = if ss_tot > 0.0 {
        1.0 - ss_res / ss_tot
    } else {
        1.0
    };
    let slope_standard_error = if n > 2 {
        (ss_res / (n - 2) as f64 / sxx).sqrt()
    } else {
        f64::NAN
    };
    Some(LineFit {
        slope,
        intercept,
        slope_standard_error,
        r_squared,
    })
}

/// E against conversion by one method, over runs at different heating rates. Conversions that
/// fewer than two runs reach are left out.
pub fn activation_energy_profile(
    runs: &[ConversionRun],
    method: Method,
    conversions: &[f64],
) -> Result<Vec<IsoconversionalPoint>, MicroscaleError> {
    if runs.len() < 2 {
        return Err(MicroscaleError::analysis(format!(
            "isoconversional analysis needs runs at two or more heating rates, got {}",
            runs.len()
        )));
    }
    let mut points = Vec::with_capacity(conversions.len());
    for &conversion in conversions {
        let (mut x, mut y) = (Vec::new(), Vec::new());
        for run in runs {
            let Some((_, temperature_k, rate_per_s)) = run.at_conversion(conversion) else {
                continue;
            };
            x.push(1.0 / temperature_k);
            y.push(match method {
                Method::Friedman => rate_per_s.ln(),
                Method::KissingerAkahiraSunose => {
                    (run.heating_rate_k_s / (temperature_k * temperature_k)).ln()
                }
                Method::OzawaFlynnWall => run.heating_rate_k_s.ln(),
            });
        }
        let Some(line) = regression(&x, &y) else {
            continue;
        };
        let factor = match method {
            Method::OzawaFlynnWall => GAS_CONSTANT_J_MOL_K / DOYLE_SLOPE,
            _ => GAS_CONSTANT_J_MOL_K,
        };
        points.push(IsoconversionalPoint {
            conversion,
            activation_energy_j_mol: -line.slope * factor,
            standard_error_j_mol: line.slope_standard_error * factor,
            r_squared: line.r_squared,
            n_runs: x.len(),
        });
    }
    if points.is_empty() {
        return Err(MicroscaleError::analysis(
            "no conversion was reached by two runs at different temperatures".to_string(),
        ));
    }
    Ok(points)
}

/// Relative spread (max − min)/mean of E over a profile.
pub fn relative_spread(points: &[IsoconversionalPoint]) -> f64 {
    let energies = points.iter().map(|p| p.activation_energy_j_mol);
    let max = energies.clone().fold(f64::NEG_INFINITY, f64::max);
    let min = energies.clone().fold(f64::INFINITY, f64::min);
    let mean = energies.sum::<f64>() / points.len().max(1) as f64;
    (max - min) / mean.abs()
}

/// Kissinger's E and A from the peak temperatures at several heating rates.
#[derive(Debug, Clone, PartialEq)]
pub struct KissingerEstimate {
    /// Activation energy, J/mol.
    pub activation_energy_j_mol: f64,
    /// Pre-exponential factor for a first-order reaction, 1/s.
    pub pre_exponential_per_s: f64,
    /// Standard error of E, J/mol (NaN with two runs).
    pub standard_error_j_mol: f64,
    /// Coefficient of determination of the Kissinger line, 0..1.
    pub r_squared: f64,
    /// (heating rate K/s, peak temperature K) used.
    pub peaks: Vec<(f64, f64)>,
}

/// Kissinger (1957): ln(β/T_p²) = ln(A·R/E) − E/(R·T_p), so the slope of ln(β/T_p²) against
/// 1/T_p gives E and the intercept gives A = (E/R)·exp(intercept) (exact for first order).
pub fn kissinger(peaks: &[(f64, f64)]) -> Result<KissingerEstimate, MicroscaleError> {
    let x: Vec<f64> = peaks.iter().map(|(_, t)| 1.0 / t).collect();
    let y: Vec<f64> = peaks.iter().map(|(b, t)| (b / (t * t)).ln()).collect();
    let line = regression(&x, &y).ok_or_else(|| {
        MicroscaleError::analysis(format!(
            "kissinger's method needs peaks at two or more distinct temperatures, got {}",
            peaks.len()
        ))
    })?;
    let activation_energy_j_mol = -line.slope * GAS_CONSTANT_J_MOL_K;
    if activation_energy_j_mol <= 0.0 {
        return Err(MicroscaleError::analysis(format!(
            "kissinger's method gives a negative activation energy ({:.1} kJ/mol): peaks must \
             move to higher temperature at higher heating rate",
            activation_energy_j_mol * 1e-3
        )));
    }
    Ok(KissingerEstimate {
        activation_energy_j_mol,
        pre_exponential_per_s: activation_energy_j_mol / GAS_CONSTANT_J_MOL_K
            * line.intercept.exp(),
        standard_error_j_mol: line.slope_standard_error * GAS_CONSTANT_J_MOL_K,
        r_squared: line.r_squared,
        peaks: peaks.to_vec(),
    })
}

/// Everything `emberfit isoconversional` reports.
#[derive(Debug, Clone, PartialEq)]
pub struct IsoconversionalReport {
    /// (method, E against conversion) for Friedman, KAS and OFW.
    pub profiles: Vec<(Method, Vec<IsoconversionalPoint>)>,
    /// Kissinger's E and A from the rate-peak temperatures.
    pub kissinger: KissingerEstimate,
    /// Warnings for the reader, e.g. that E varies too much for one step.
    pub warnings: Vec<String>,
}

/// Runs the three isoconversional methods and Kissinger's on the runs, and warns when E varies
/// by more than `max_relative_spread` of its mean under any method.
pub fn analyse(
    runs: &[ConversionRun],
    conversions: &[f64],
    max_relative_spread: f64,
) -> Result<IsoconversionalReport, MicroscaleError> {
    let mut profiles = Vec::new();
    let mut warnings = Vec::new();
    for method in [
        Method::Friedman,
        Method::KissingerAkahiraSunose,
        Method::OzawaFlynnWall,
    ] {
        let points = activation_energy_profile(runs, method, conversions)?;
        let spread = relative_spread(&points);
        if spread > max_relative_spread {
            warnings.push(format!(
                "{}: E varies by {:.0} % of its mean between α = {:.2} and {:.2} (more than \
                 {:.0} %): one single-step reaction cannot describe these data; use several \
                 reactions",
                method.name(),
                100.0 * spread,
                points[0].conversion,
                points[points.len() - 1].conversion,
                100.0 * max_relative_spread
            ));
        }
        profiles.push((method, points));
    }
    let mut peaks = Vec::with_capacity(runs.len());
    for run in runs {
        let peak_k = run.peak_temperature_k().ok_or_else(|| {
            MicroscaleError::analysis(format!("run `{}` has no rate peak", run.label))
        })?;
        peaks.push((run.heating_rate_k_s, peak_k));
    }
    let kissinger = kissinger(&peaks)?;
    let mut rates: Vec<f64> = runs.iter().map(|r| r.heating_rate_k_s).collect();
    rates.sort_by(f64::total_cmp);
    if rates.windows(2).any(|w| w[1] < 1.1 * w[0]) {
        warnings.push(
            "two runs have heating rates within 10 % of each other: replicates sharpen the \
             regression, but the spread of heating rates sets its leverage"
                .to_string(),
        );
    }
    Ok(IsoconversionalReport {
        profiles,
        kissinger,
        warnings,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A straight line y = 3 − 2x is recovered exactly, with R² = 1 and zero standard error.
    #[test]
    fn regression_of_an_exact_line_is_exact() {
        let x = [1.0, 2.0, 3.0, 4.0];
        let y: Vec<f64> = x.iter().map(|v| 3.0 - 2.0 * v).collect();
        let line = regression(&x, &y).unwrap();
        assert!((line.slope + 2.0).abs() < 1e-12 && (line.intercept - 3.0).abs() < 1e-12);
        assert!((line.r_squared - 1.0).abs() < 1e-12 && line.slope_standard_error < 1e-12);
    }

    /// A constant heat release rate gives a conversion that rises linearly in time.
    #[test]
    fn constant_release_rate_gives_linear_conversion() {
        let time_s: Vec<f64> = (0..=100).map(f64::from).collect();
        let temperature_k: Vec<f64> = time_s.iter().map(|t| 400.0 + t).collect();
        let run =
            ConversionRun::from_release_rate("flat", &time_s, &temperature_k, &[5.0; 101]).unwrap();
        assert!((run.conversion[25] - 0.25).abs() < 1e-12);
        assert!((run.heating_rate_k_s - 1.0).abs() < 1e-12);
        let (_, temperature, rate) = run.at_conversion(0.5).unwrap();
        assert!((temperature - 450.0).abs() < 1e-9 && (rate - 0.01).abs() < 1e-9);
    }

    #[test]
    fn kissinger_refuses_peaks_that_move_down_with_heating_rate() {
        let message = kissinger(&[(0.1, 650.0), (0.2, 640.0)])
            .unwrap_err()
            .to_string();
        assert!(message.contains("negative activation energy"), "{message}");
    }

    #[test]
    fn one_run_is_not_enough_for_an_isoconversional_estimate() {
        let time_s: Vec<f64> = (0..=100).map(f64::from).collect();
        let temperature_k: Vec<f64> = time_s.iter().map(|t| 400.0 + t).collect();
        let run =
            ConversionRun::from_release_rate("one", &time_s, &temperature_k, &[1.0; 101]).unwrap();
        let message = activation_energy_profile(&[run], Method::Friedman, &[0.5])
            .unwrap_err()
            .to_string();
        assert!(message.contains("got 1"), "{message}");
    }
}
