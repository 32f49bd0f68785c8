//! Ignition across irradiances (docs/physics.md §4): straight-line fits of t_ig^(−n) against the
//! irradiance for the thermally thick form (n = ½), Janssens' form for thick solids with heat
//! losses (n = 0.547) and the thermally thin form (n = 1), giving the critical heat flux (the
//! flux-axis intercept), the thermal response parameter and the apparent kρc, with R² and a
//! warning when the data cannot tell thick from thin.
//!
//! Pure functions of (irradiance, ignition time) points. Heat fluxes in kW/m² as the trade
//! quotes them; the unit is in every name.

use std::path::{Path, PathBuf};

use serde::Deserialize;
use toml::Spanned;

use super::{reduce, DataError, Notice, TestDescription};

/// Stefan–Boltzmann constant, W/(m²·K⁴) (CODATA 2018).
const STEFAN_BOLTZMANN_W_M2_K4: f64 = 5.670374419e-8;

/// Janssens' exponent for thick solids with losses, 0.547 (Janssens, M., Fire and Materials 15
/// (1991) 151–167; docs/physics.md §4).
pub const JANSSENS_EXPONENT: f64 = 0.547;

/// Janssens' coefficient in q̇''_e = q̇''_cr·[1 + 0.73·(kρc/(h_ig²·t_ig))^0.547] (Janssens 1991;
/// quoted from memory).
pub const JANSSENS_COEFFICIENT: f64 = 0.73;

/// R² values closer than this cannot tell two forms apart (our rule of thumb: about the
/// scatter of repeat ignition times, 5–10 %).
pub const R_SQUARED_DISCRIMINATION: f64 = 0.02;

/// Lowest surface temperature at piloted ignition that is plausible for a solid fuel, K
/// (about 200 °C; polymers ignite at roughly 250–450 °C: Drysdale, An Introduction to Fire
/// Dynamics, 3rd ed., 2011, table of ignition temperatures; quoted from memory).
pub const PLAUSIBLE_IGNITION_TEMPERATURE_K: f64 = 473.15;

/// One ignition observation.
#[derive(Debug, Clone, PartialEq)]
pub struct IgnitionPoint {
    /// Irradiance, kW/m².
    pub irradiance_kw_m2: f64,
    /// Time to sustained ignition, s.
    pub ignition_time_s: f64,
    /// Where it came from (file name), for tables.
    pub label: String,
}

/// Which straight-line form.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Correlation {
    /// t_ig^(−½) linear in q̇'' (Drysdale 2011, thick, no losses).
    ThermallyThick,
    /// t_ig^(−0.547) linear in q̇'' (Janssens 1991, thick with losses).
    Janssens,
    /// t_ig^(−1) linear in q̇'' (Drysdale 2011, thin).
    ThermallyThin,
}

impl Correlation {
    /// Exponent n of t_ig^(−n).
    pub fn exponent(self) -> f64 {
        match self {
            Correlation::ThermallyThick => 0.5,
            Correlation::Janssens => JANSSENS_EXPONENT,
            Correlation::ThermallyThin => 1.0,
        }
    }

    /// Short name for tables and JSON.
    pub fn name(self) -> &'static str {
        match self {
            Correlation::ThermallyThick => "thermally_thick",
            Correlation::Janssens => "janssens",
            Correlation::ThermallyThin => "thermally_thin",
        }
    }
}

/// A least-squares line t_ig^(−n) = intercept + slope·q̇''.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CorrelationFit {
    /// Form fitted.
    pub correlation: Correlation,
    /// Slope, s^(−n) per kW/m².
    pub slope: f64,
    /// Intercept, s^(−n).
    pub intercept: f64,
    /// Flux-axis intercept −intercept/slope, the estimate of the critical heat flux, kW/m².
    pub critical_heat_flux_kw_m2: f64,
    /// Coefficient of determination of the line.
    pub r_squared: f64,
    /// 95 % interval of the critical heat flux, kW/m²: the linearised (delta-method) standard
    /// error of −intercept/slope from the line's residual scatter, times Student's t for
    /// n − 2 degrees of freedom. `None` with fewer than three points or no positive slope.
    pub critical_heat_flux_95_kw_m2: Option<[f64; 2]>,
}

/// Two-sided 95 % quantile of Student's t distribution, t(0.975, ν), by degrees of freedom
/// (NIST/SEMATECH e-Handbook of Statistical Methods, table "Critical values of the Student's t
/// distribution"; values to three decimals, quoted from memory and checked in the tests by
/// integrating the density). Between tabulated ν, linear in 1/ν; beyond 120, the normal value.
pub fn student_t_975(degrees_of_freedom: usize) -> f64 {
    const SMALL: [f64; 30] = [
        12.706, 4.303, 3.182, 2.776, 2.571, 2.447, 2.365, 2.306, 2.262, 2.228, 2.201, 2.179, 2.160,
        2.145, 2.131, 2.120, 2.110, 2.101, 2.093, 2.086, 2.080, 2.074, 2.069, 2.064, 2.060, 2.056,
        2.052, 2.048, 2.045, 2.042,
    ];
    const LARGE: [(f64, f64); 4] = [(30.0, 2.042), (40.0, 2.021), (60.0, 2.000), (120.0, 1.980)];
    match degrees_of_freedom {
        0 => f64::INFINITY,
        nu @ 1..=30 => SMALL[nu - 1],
        nu if nu >= 120 => {
            // Between 1.980 at ν = 120 and the normal 1.960 at ν = ∞, linear in 1/ν.
            1.960 + (1.980 - 1.960) * 120.0 / nu as f64
        }
        nu => {
            let inverse = 1.0 / nu as f64;
            let upper = LARGE.iter().position(|(n, _)| *n >= nu as f64).unwrap_or(3);
            let (n_low, t_low) = LARGE[upper - 1];
            let (n_high, t_high) = LARGE[upper];
            let w = (1.0 / n_low - inverse) / (1.0 / n_low - 1.0 / n_high);
            t_low + w * (t_high - t_low)
        }
    }
}

/// Settings for turning slopes into material properties.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct IgnitionSettings {
    /// Initial (ambient) temperature T₀, K.
    pub ambient_temperature_k: f64,
    /// Surface ignition temperature, K; when `None` it is estimated from Janssens' critical
    /// heat flux by the surface balance at the critical flux.
    pub ignition_temperature_k: Option<f64>,
    /// Surface emissivity for that balance.
    pub emissivity: f64,
    /// Convective coefficient for that balance, W/(m²·K) (10: common practice for the cone).
    pub convective_coefficient_w_m2_k: f64,
}

impl Default for IgnitionSettings {
    fn default() -> Self {
        IgnitionSettings {
            ambient_temperature_k: 293.15,
            ignition_temperature_k: None,
            emissivity: 1.0,
            convective_coefficient_w_m2_k: 10.0,
        }
    }
}

/// Where the ignition temperature came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum IgnitionTemperatureSource {
    /// Given by the user.
    Given,
    /// From ε·σ·(T⁴ − T₀⁴) + h·(T − T₀) = q̇''_cr with Janssens' critical heat flux.
    FromCriticalHeatFlux,
}

/// Result of the ignition analysis.
#[derive(Debug, Clone, PartialEq)]
pub struct IgnitionAnalysis {
    /// Points used.
    pub points: Vec<IgnitionPoint>,
    /// Number of distinct irradiances.
    pub n_irradiances: usize,
    /// Thick, Janssens and thin fits, in that order.
    pub fits: Vec<CorrelationFit>,
    /// Thermal response parameter TRP = 1/slope of the thick form, kW·s^½/m².
    pub thermal_response_parameter_kw_s05_m2: f64,
    /// Ignition temperature used for kρc, K, and its source.
    pub ignition_temperature: Option<(f64, IgnitionTemperatureSource)>,
    /// Apparent kρc from the TRP, (4/π)·(TRP/(T_ig − T₀))², kW²·s/(m⁴·K²).
    pub apparent_krhoc_thick_kw2_s_m4_k2: Option<f64>,
    /// Apparent kρc from Janssens' slope, h_ig²·(0.73·q̇''_cr·slope)^(−1/0.547), with
    /// h_ig = q̇''_cr/(T_ig − T₀), kW²·s/(m⁴·K²).
    pub apparent_krhoc_janssens_kw2_s_m4_k2: Option<f64>,
    /// Heat capacity per area from the thin form, ρcL = 1/(slope·(T_ig − T₀)), kJ/(m²·K).
    pub heat_capacity_per_area_thin_kj_m2_k: Option<f64>,
    /// Critical heat flux implied by a given ignition temperature through the surface balance
    /// ε·σ·(T_ig⁴ − T₀⁴) + h·(T_ig − T₀), kW/m² (common practice): a check on the
    /// extrapolated intercepts. `None` when the ignition temperature was not given.
    pub critical_heat_flux_from_balance_kw_m2: Option<f64>,
    /// Warnings: when the data cannot tell thick from thin, or an intercept is unphysical.
    pub warnings: Vec<Notice>,
}

impl IgnitionAnalysis {
    /// The fit of one form.
    pub fn fit(&self, correlation: Correlation) -> Option<&CorrelationFit> {
        self.fits.iter().find(|f| f.correlation == correlation)
    }
}

/// Least-squares straight line through (x, y): (intercept, slope, R²).
fn straight_line(x: &[f64], y: &[f64]) -> (f64, f64, f64) {
    let n = x.len() as f64;
    let mean_x = x.iter().sum::<f64>() / n;
    let mean_y = y.iter().sum::<f64>() / n;
    let sxx: f64 = x.iter().map(|v| (v - mean_x).powi(2)).sum();
    let sxy: f64 = x
        .iter()
        .zip(y)
        .map(|(a, b)| (a - mean_x) * (b - mean_y))
        .sum();
    let syy: f64 = y.iter().map(|v| (v - mean_y).powi(2)).sum();
    let slope = sxy / sxx;
    let intercept = mean_y - slope * mean_x;
    let r_squared = if syy > 0.0 {
        (sxy * sxy) / (sxx * syy)
    } else {
        1.0
    };
    (intercept, slope, r_squared)
}

/// Fits one form to the points.
pub fn fit_correlation(points: &[IgnitionPoint], correlation: Correlation) -> CorrelationFit {
    let x: Vec<f64> = points.iter().map(|p| p.irradiance_kw_m2).collect();
    let y: Vec<f64> = points
        .iter()
        .map(|p| p.ignition_time_s.powf(-correlation.exponent()))
        .collect();
    let (intercept, slope, r_squared) = straight_line(&x, &y);
    let critical_heat_flux_kw_m2 = -intercept / slope;
    let n = x.len();
    let critical_heat_flux_95_kw_m2 = (n >= 3 && slope > 0.0).then(|| {
        let mean_x = x.iter().sum::<f64>() / n as f64;
        let sxx: f64 = x.iter().map(|v| (v - mean_x).powi(2)).sum();
        let residual_variance = x
            .iter()
            .zip(&y)
            .map(|(a, b)| (b - intercept - slope * a).powi(2))
            .sum::<f64>()
            / (n - 2) as f64;
        let var_intercept = residual_variance * (1.0 / n as f64 + mean_x * mean_x / sxx);
        let var_slope = residual_variance / sxx;
        let cov = -mean_x * residual_variance / sxx;
        let x0 = critical_heat_flux_kw_m2;
        let standard_error = ((var_intercept + x0 * x0 * var_slope + 2.0 * x0 * cov)
            / (slope * slope))
            .max(0.0)
            .sqrt();
        let half = student_t_975(n - 2) * standard_error;
        [x0 - half, x0 + half]
    });
    CorrelationFit {
        correlation,
        slope,
        intercept,
        critical_heat_flux_kw_m2,
        r_squared,
        critical_heat_flux_95_kw_m2,
    }
}

/// Surface temperature at which re-radiation and convection balance `flux_kw_m2`, K (solved
/// by bisection; the balance rises monotonically with temperature).
pub fn balance_temperature_k(flux_kw_m2: f64, settings: &IgnitionSettings) -> Option<f64> {
    let t0 = settings.ambient_temperature_k;
    let loss_w_m2 = |t: f64| {
        settings.emissivity * STEFAN_BOLTZMANN_W_M2_K4 * (t.powi(4) - t0.powi(4))
            + settings.convective_coefficient_w_m2_k * (t - t0)
    };
    let target_w_m2 = flux_kw_m2 * 1e3;
    let (mut low, mut high) = (t0, 3000.0);
    if target_w_m2.is_nan() || target_w_m2 <= 0.0 || loss_w_m2(high) < target_w_m2 {
        return None;
    }
    for _ in 0..200 {
        let mid = 0.5 * (low + high);
        if loss_w_m2(mid) < target_w_m2 {
            low = mid;
        } else {
            high = mid;
        }
    }
    Some(0.5 * (low + high))
}

/// Fits the three forms and derives the properties (see [`IgnitionAnalysis`]).
pub fn analyse(
    points: &[IgnitionPoint],
    settings: &IgnitionSettings,
) -> Result<IgnitionAnalysis, DataError> {
    for point in points {
        if !(point.ignition_time_s > 0.0 && point.ignition_time_s.is_finite()) {
            return Err(DataError::Reduction {
                problem: format!(
                    "{}: ignition time must be > 0 s, got {}",
                    point.label, point.ignition_time_s
                ),
            });
        }
        if !(point.irradiance_kw_m2 > 0.0 && point.irradiance_kw_m2.is_finite()) {
            return Err(DataError::Reduction {
                problem: format!(
                    "{}: irradiance must be > 0 kW/m², got {}",
                    point.label, point.irradiance_kw_m2
                ),
            });
        }
    }
    let mut fluxes: Vec<f64> = points.iter().map(|p| p.irradiance_kw_m2).collect();
    fluxes.sort_by(f64::total_cmp);
    fluxes.dedup_by(|a, b| (*a - *b).abs() < 1e-6 * b.abs().max(1.0));
    let n_irradiances = fluxes.len();
    if n_irradiances < 2 {
        return Err(DataError::Reduction {
            problem: format!(
                "the ignition analysis needs tests at two or more irradiances, got {} test(s) at {}",
                points.len(),
                fluxes
                    .iter()
                    .map(|f| format!("{f} kW/m²"))
                    .collect::<Vec<_>>()
                    .join(", ")
            ),
        });
    }
    let fits: Vec<CorrelationFit> = [
        Correlation::ThermallyThick,
        Correlation::Janssens,
        Correlation::ThermallyThin,
    ]
    .iter()
    .map(|c| fit_correlation(points, *c))
    .collect();
    let (thick, janssens, thin) = (fits[0], fits[1], fits[2]);
    let mut warnings = Vec::new();
    if n_irradiances < 3 {
        warnings.push(Notice::new(format!(
            "only {n_irradiances} irradiances: every straight-line form passes through the group \
             means, so R² measures repeat scatter, not shape; the data cannot tell thermally \
             thick from thin (test at three or more irradiances)"
        )));
    } else if (thick.r_squared - thin.r_squared).abs() < R_SQUARED_DISCRIMINATION {
        warnings.push(Notice::new(format!(
            "R² of the thick ({:.3}) and thin ({:.3}) forms differ by less than \
             {R_SQUARED_DISCRIMINATION}: the data cannot tell thermally thick from thin",
            thick.r_squared, thin.r_squared
        )));
    }
    let lowest_flux = fluxes[0];
    for fit in &fits {
        if fit.slope.is_nan() || fit.slope <= 0.0 {
            warnings.push(Notice::new(format!(
                "{}: ignition does not get faster with irradiance (slope {:.3e}); the fit is \
                 meaningless",
                fit.correlation.name(),
                fit.slope
            )));
        } else if fit.critical_heat_flux_kw_m2 <= 0.0 {
            warnings.push(Notice::new(format!(
                "{}: the flux-axis intercept is {:.1} kW/m², not a physical critical heat flux; \
                 ignition times at low irradiance are shorter than this form predicts",
                fit.correlation.name(),
                fit.critical_heat_flux_kw_m2
            )));
        } else if fit.critical_heat_flux_kw_m2 >= lowest_flux {
            warnings.push(Notice::new(format!(
                "{}: the critical heat flux {:.1} kW/m² is not below the lowest irradiance that \
                 ignited ({lowest_flux} kW/m²)",
                fit.correlation.name(),
                fit.critical_heat_flux_kw_m2
            )));
        }
    }

    if let Some([low, high]) = janssens.critical_heat_flux_95_kw_m2 {
        if high - low > lowest_flux || low <= 0.0 {
            warnings.push(Notice::new(format!(
                "the critical heat flux is poorly determined: Janssens' form gives {:.1} kW/m² \
                 with a 95 % interval of {low:.1} to {high:.1} kW/m², an extrapolation {:.0} \
                 kW/m² below the lowest irradiance tested; test nearer the critical flux (e.g. \
                 at 15–20 kW/m²) to pin it down",
                janssens.critical_heat_flux_kw_m2,
                lowest_flux - janssens.critical_heat_flux_kw_m2.max(0.0)
            )));
        }
    }
    let thermal_response_parameter_kw_s05_m2 = 1.0 / thick.slope;
    let ignition_temperature = match settings.ignition_temperature_k {
        Some(t) => Some((t, IgnitionTemperatureSource::Given)),
        None => balance_temperature_k(janssens.critical_heat_flux_kw_m2, settings)
            .map(|t| (t, IgnitionTemperatureSource::FromCriticalHeatFlux)),
    };
    if let Some((t_ig, IgnitionTemperatureSource::FromCriticalHeatFlux)) = ignition_temperature {
        if t_ig < PLAUSIBLE_IGNITION_TEMPERATURE_K {
            warnings.push(Notice::new(format!(
                "the ignition temperature estimated from the critical heat flux is {t_ig:.0} K, \
                 implausibly low for piloted ignition of a solid; give the ignition temperature \
                 so that kρc means something"
            )));
        }
    }
    if ignition_temperature.is_none() {
        warnings.push(Notice::new(
            "no ignition temperature (give one, or the Janssens critical heat flux must be > 0): \
             kρc is not computed"
                .to_string(),
        ));
    }
    let rise_k = ignition_temperature
        .map(|(t, _)| t - settings.ambient_temperature_k)
        .filter(|dt| *dt > 0.0);
    let apparent_krhoc_thick_kw2_s_m4_k2 = rise_k
        .filter(|_| thick.slope > 0.0)
        .map(|dt| 4.0 / std::f64::consts::PI * (thermal_response_parameter_kw_s05_m2 / dt).powi(2));
    let apparent_krhoc_janssens_kw2_s_m4_k2 = rise_k
        .filter(|_| janssens.slope > 0.0 && janssens.critical_heat_flux_kw_m2 > 0.0)
        .map(|dt| {
            let q_cr = janssens.critical_heat_flux_kw_m2;
            let h_ig_kw_m2_k = q_cr / dt;
            h_ig_kw_m2_k.powi(2)
                * (JANSSENS_COEFFICIENT * q_cr * janssens.slope).powf(-1.0 / JANSSENS_EXPONENT)
        });
    let heat_capacity_per_area_thin_kj_m2_k = rise_k
        .filter(|_| thin.slope > 0.0)
        .map(|dt| 1.0 / (thin.slope * dt));
    let critical_heat_flux_from_balance_kw_m2 = settings.ignition_temperature_k.map(|t| {
        let t0 = settings.ambient_temperature_k;
        (settings.emissivity * STEFAN_BOLTZMANN_W_M2_K4 * (t.powi(4) - t0.powi(4))
            + settings.convective_coefficient_w_m2_k * (t - t0))
            / 1e3
    });
    Ok(IgnitionAnalysis {
        points: points.to_vec(),
        critical_heat_flux_from_balance_kw_m2,
        n_irradiances,
        fits,
        thermal_response_parameter_kw_s05_m2,
        ignition_temperature,
        apparent_krhoc_thick_kw2_s_m4_k2,
        apparent_krhoc_janssens_kw2_s_m4_k2,
        heat_capacity_per_area_thin_kj_m2_k,
        warnings,
    })
}

/// An ignition list TOML: tests to reduce and/or ignition points given directly, plus the
/// settings of the analysis. Keys in docs/test-files.md.
#[derive(Debug, Clone, PartialEq)]
pub struct IgnitionList {
    /// TEST.toml files, resolved against the list's folder.
    pub tests: Vec<PathBuf>,
    /// Points given directly.
    pub points: Vec<IgnitionPoint>,
    /// Analysis settings.
    pub settings: IgnitionSettings,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawIgnitionList {
    #[serde(default)]
    tests: Vec<String>,
    #[serde(default)]
    point: Vec<RawPoint>,
    ignition_temperature_c: Option<Spanned<f64>>,
    ambient_temperature_c: Option<Spanned<f64>>,
    emissivity: Option<Spanned<f64>>,
    convective_coefficient_w_m2_k: Option<Spanned<f64>>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawPoint {
    irradiance_kw_m2: Spanned<f64>,
    ignition_time_s: Spanned<f64>,
    label: Option<String>,
}

impl IgnitionList {
    /// Reads and validates an ignition list.
    pub fn load(path: &Path) -> Result<IgnitionList, DataError> {
        let text = super::read_toml_text(path)?;
        let raw: RawIgnitionList = crate::source::parse(path, &text)?;
        let spans: crate::source::Spans<'_, DataError> = crate::source::Spans::new(path, &text);
        let check = |value: &Spanned<f64>, field: &str, low: f64, high: f64| {
            spans.within(value, field, low, high)
        };
        let folder = path.parent().unwrap_or_else(|| Path::new("."));
        let mut points = Vec::new();
        for (idx, point) in raw.point.iter().enumerate() {
            let irradiance_kw_m2 = check(
                &point.irradiance_kw_m2,
                &format!("point[{idx}].irradiance_kw_m2"),
                0.1,
                200.0,
            )?;
            let ignition_time_s = check(
                &point.ignition_time_s,
                &format!("point[{idx}].ignition_time_s"),
                1e-3,
                1e6,
            )?;
            points.push(IgnitionPoint {
                irradiance_kw_m2,
                ignition_time_s,
                label: point
                    .label
                    .clone()
                    .unwrap_or_else(|| format!("{}: point[{idx}]", path.display())),
            });
        }
        if raw.tests.is_empty() && points.is_empty() {
            return Err(DataError::Missing {
                path: path.to_path_buf(),
                field: "tests".to_string(),
                problem: "and `point` are both missing: list tests or give points".to_string(),
            });
        }
        let defaults = IgnitionSettings::default();
        let settings = IgnitionSettings {
            ambient_temperature_k: match &raw.ambient_temperature_c {
                Some(v) => check(v, "ambient_temperature_c", -40.0, 60.0)? + 273.15,
                None => defaults.ambient_temperature_k,
            },
            ignition_temperature_k: raw
                .ignition_temperature_c
                .as_ref()
                .map(|v| check(v, "ignition_temperature_c", 50.0, 1500.0).map(|t| t + 273.15))
                .transpose()?,
            emissivity: match &raw.emissivity {
                Some(v) => check(v, "emissivity", 0.01, 1.0)?,
                None => defaults.emissivity,
            },
            convective_coefficient_w_m2_k: match &raw.convective_coefficient_w_m2_k {
                Some(v) => check(v, "convective_coefficient_w_m2_k", 0.0, 100.0)?,
                None => defaults.convective_coefficient_w_m2_k,
            },
        };
        Ok(IgnitionList {
            tests: raw.tests.iter().map(|t| folder.join(t)).collect(),
            points,
            settings,
        })
    }
}

/// Loads and reduces each TEST.toml and returns its ignition point (the given ignition time or
/// the detected one), with the notices of the reductions.
pub fn points_from_tests(
    paths: &[PathBuf],
) -> Result<(Vec<IgnitionPoint>, Vec<Notice>), DataError> {
    let mut points = Vec::new();
    let mut notices = Vec::new();
    for path in paths {
        let test = TestDescription::load(path)?;
        let reduced = reduce(&test)?;
        let ignition_time_s =
            reduced
                .report
                .ignition_time_s
                .ok_or_else(|| DataError::Reduction {
                    problem: format!(
                        "{}: no ignition time: none given (ignition_time_s) and none detected \
                         from HRR",
                        path.display()
                    ),
                })?;
        notices.extend(reduced.notices);
        points.push(IgnitionPoint {
            irradiance_kw_m2: test.irradiance_kw_m2,
            ignition_time_s,
            label: path.display().to_string(),
        });
    }
    Ok((points, notices))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Γ(k/2) for k ≥ 1 from Γ(½) = √π, Γ(1) = 1 and Γ(x + 1) = x·Γ(x).
    fn gamma_of_half(k: usize) -> f64 {
        let (mut x, mut value) = if k.is_multiple_of(2) {
            (1.0, 1.0)
        } else {
            (0.5, std::f64::consts::PI.sqrt())
        };
        while x < k as f64 / 2.0 - 1e-9 {
            value *= x;
            x += 1.0;
        }
        value
    }

    /// P(T ≤ t) for Student's t with ν degrees of freedom, by Simpson's rule on the density
    /// f(t) = Γ((ν+1)/2)/(√(νπ)·Γ(ν/2))·(1 + t²/ν)^(−(ν+1)/2) (the definition; any statistics
    /// text).
    fn student_t_cdf(t: f64, nu: usize) -> f64 {
        let n = nu as f64;
        let constant =
            gamma_of_half(nu + 1) / ((n * std::f64::consts::PI).sqrt() * gamma_of_half(nu));
        let density = |x: f64| constant * (1.0 + x * x / n).powf(-(n + 1.0) / 2.0);
        let steps = 20_000;
        let h = t / steps as f64;
        let mut sum = density(0.0) + density(t);
        for i in 1..steps {
            sum += density(i as f64 * h) * if i % 2 == 1 { 4.0 } else { 2.0 };
        }
        0.5 + sum * h / 3.0
    }

    /// The tabulated quantiles are where the t distribution's CDF is 0.975 (to the table's
    /// three decimals), and the interpolated ones between the table's rows nearly so.
    #[test]
    fn student_t_quantiles_match_the_distribution() {
        for nu in (1..=30).chain([35, 50, 90, 120, 200]) {
            let q = student_t_975(nu);
            let p = student_t_cdf(q, nu);
            let tolerance = if nu <= 30 || nu == 120 { 3e-4 } else { 6e-4 };
            assert!((p - 0.975).abs() < tolerance, "ν = {nu}: P(T ≤ {q}) = {p}");
        }
    }

    /// The interval of the critical heat flux covers the true value in about 95 % of repeated
    /// experiments (the definition of a 95 % interval): 2000 seeded sets of eight ignition
    /// times at 25, 35, 50 and 75 kW/m² with 8 % scatter, from a thick solid with q_cr = 12
    /// kW/m² and TRP = 300 kW·s^½/m².
    #[test]
    fn critical_heat_flux_interval_has_its_stated_coverage() {
        use rand::SeedableRng;
        use rand_distr::{Distribution, Normal};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(11);
        let scatter = Normal::new(0.0, 0.08).unwrap_or_else(|_| unreachable!());
        let mut covered = 0;
        let trials = 2000;
        for _ in 0..trials {
            let mut points = Vec::new();
            for q in [25.0, 35.0, 50.0, 75.0, 25.0, 35.0, 50.0, 75.0] {
                let t: f64 = (300.0 / (q - 12.0_f64)).powi(2);
                points.push(IgnitionPoint {
                    irradiance_kw_m2: q,
                    ignition_time_s: t * (1.0 + scatter.sample(&mut rng)),
                    label: String::new(),
                });
            }
            let fit = fit_correlation(&points, Correlation::ThermallyThick);
            let [low, high] = fit.critical_heat_flux_95_kw_m2.expect("interval");
            if (low..=high).contains(&12.0) {
                covered += 1;
            }
        }
        let coverage = covered as f64 / trials as f64;
        // Binomial sd at 95 % over 2000 trials is 0.5 %; the delta method is approximate.
        assert!((0.93..=0.98).contains(&coverage), "coverage {coverage}");
    }

    fn points_from(form: impl Fn(f64) -> f64, fluxes: &[f64]) -> Vec<IgnitionPoint> {
        fluxes
            .iter()
            .map(|&q| IgnitionPoint {
                irradiance_kw_m2: q,
                ignition_time_s: form(q),
                label: format!("{q}"),
            })
            .collect()
    }

    /// Drysdale (2011), thick, no losses: t_ig = (π/4)·kρc·ΔT²/q² in the shifted form
    /// t_ig^(−½) = (q − q_cr)/TRP. Times made from TRP = 300 kW·s^½/m² and q_cr = 10 kW/m²
    /// must give both back, with R² = 1 and kρc = (4/π)(TRP/ΔT)².
    #[test]
    fn thick_times_give_their_trp_and_critical_flux_back() {
        let points = points_from(|q| (300.0 / (q - 10.0)).powi(2), &[20.0, 35.0, 50.0, 75.0]);
        let settings = IgnitionSettings {
            ignition_temperature_k: Some(293.15 + 300.0),
            ..IgnitionSettings::default()
        };
        let analysis = analyse(&points, &settings).unwrap();
        let thick = analysis.fit(Correlation::ThermallyThick).unwrap();
        assert!((analysis.thermal_response_parameter_kw_s05_m2 - 300.0).abs() < 1e-9);
        assert!((thick.critical_heat_flux_kw_m2 - 10.0).abs() < 1e-9);
        assert!((thick.r_squared - 1.0).abs() < 1e-12);
        let krhoc = analysis.apparent_krhoc_thick_kw2_s_m4_k2.unwrap();
        assert!((krhoc - 4.0 / std::f64::consts::PI).abs() < 1e-9);
        // Four fluxes and curved thin data: thick fits better, no "cannot tell" warning.
        let thin = analysis.fit(Correlation::ThermallyThin).unwrap();
        assert!(thin.r_squared < thick.r_squared);
        assert!(!analysis
            .warnings
            .iter()
            .any(|w| w.message.contains("cannot tell")));
    }

    /// Drysdale (2011), thin: t_ig = ρcLΔT/(q − q_cr); ρcLΔT = 900 kJ/m², q_cr = 12 kW/m².
    #[test]
    fn thin_times_give_their_heat_capacity_back() {
        let points = points_from(|q| 900.0 / (q - 12.0), &[20.0, 30.0, 50.0, 70.0]);
        let settings = IgnitionSettings {
            ignition_temperature_k: Some(293.15 + 300.0),
            ..IgnitionSettings::default()
        };
        let analysis = analyse(&points, &settings).unwrap();
        let thin = analysis.fit(Correlation::ThermallyThin).unwrap();
        assert!((thin.critical_heat_flux_kw_m2 - 12.0).abs() < 1e-9);
        assert!((analysis.heat_capacity_per_area_thin_kj_m2_k.unwrap() - 3.0).abs() < 1e-9);
    }

    /// Janssens (1991): times made from q = q_cr·[1 + 0.73·(kρc/(h²t))^0.547] must give kρc
    /// back when T_ig is the one that defines h_ig = q_cr/ΔT.
    #[test]
    fn janssens_times_give_their_krhoc_back() {
        let (q_cr, dt, krhoc) = (12.0, 330.0, 0.9);
        let h = q_cr / dt;
        let time_for = |q: f64| {
            let ratio = ((q / q_cr - 1.0) / JANSSENS_COEFFICIENT).powf(1.0 / JANSSENS_EXPONENT);
            krhoc / (h * h) / ratio
        };
        let points = points_from(time_for, &[20.0, 30.0, 50.0, 75.0]);
        let settings = IgnitionSettings {
            ignition_temperature_k: Some(293.15 + dt),
            ..IgnitionSettings::default()
        };
        let analysis = analyse(&points, &settings).unwrap();
        let fit = analysis.fit(Correlation::Janssens).unwrap();
        assert!((fit.critical_heat_flux_kw_m2 - q_cr).abs() < 1e-6);
        let got = analysis.apparent_krhoc_janssens_kw2_s_m4_k2.unwrap();
        assert!((got - krhoc).abs() < 1e-6 * krhoc, "{got}");
    }

    #[test]
    fn two_irradiances_warn_that_thick_and_thin_cannot_be_told_apart() {
        let points = points_from(|q| (300.0 / (q - 10.0)).powi(2), &[25.0, 25.0, 65.0, 65.0]);
        let analysis = analyse(&points, &IgnitionSettings::default()).unwrap();
        assert!(analysis
            .warnings
            .iter()
            .any(|w| w.message.contains("cannot tell")));
    }

    #[test]
    fn one_irradiance_is_an_error() {
        let points = points_from(|_| 100.0, &[25.0, 25.0]);
        let err = analyse(&points, &IgnitionSettings::default()).unwrap_err();
        assert!(err.to_string().contains("two or more irradiances"), "{err}");
    }

    /// Black surface, h = 10 W/(m²·K), T₀ = 293.15 K: at 600 K the losses are
    /// σ(600⁴ − 293.15⁴) + 10·306.85 = 6929 + 3069 ≈ 9.998 kW/m² (hand-worked).
    #[test]
    fn the_surface_balance_inverts_the_losses() {
        let t = balance_temperature_k(9.998, &IgnitionSettings::default()).unwrap();
        assert!((t - 600.0).abs() < 0.1, "{t}");
        let points = points_from(|q| (300.0 / (q - 10.0)).powi(2), &[20.0, 50.0]);
        let settings = IgnitionSettings {
            ignition_temperature_k: Some(600.0),
            ..IgnitionSettings::default()
        };
        let analysis = analyse(&points, &settings).unwrap();
        let balance = analysis.critical_heat_flux_from_balance_kw_m2.unwrap();
        assert!((balance - 9.998).abs() < 1e-3, "{balance}");
    }
}
