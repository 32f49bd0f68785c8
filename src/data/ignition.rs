//! Ignition across irradiances (physics.md §4): straight-line fits of t_ig^(−n) against the
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
/// (1991) 151–167; physics.md §4).
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
    CorrelationFit {
        correlation,
        slope,
        intercept,
        critical_heat_flux_kw_m2: -intercept / slope,
        r_squared,
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
                    "{}: irradiance must be > 0 kW/m2, got {}",
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
                    .map(|f| format!("{f} kW/m2"))
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
                "{}: the flux-axis intercept is {:.1} kW/m2, not a physical critical heat flux; \
                 ignition times at low irradiance are shorter than this form predicts",
                fit.correlation.name(),
                fit.critical_heat_flux_kw_m2
            )));
        } else if fit.critical_heat_flux_kw_m2 >= lowest_flux {
            warnings.push(Notice::new(format!(
                "{}: the critical heat flux {:.1} kW/m2 is not below the lowest irradiance that \
                 ignited ({lowest_flux} kW/m2)",
                fit.correlation.name(),
                fit.critical_heat_flux_kw_m2
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
        let text = std::fs::read_to_string(path).map_err(|source| DataError::Read {
            path: path.to_path_buf(),
            source,
        })?;
        let raw: RawIgnitionList = toml::from_str(&text).map_err(|source| DataError::Syntax {
            path: path.to_path_buf(),
            source,
        })?;
        let line_of = |span: std::ops::Range<usize>| {
            text[..span.start.min(text.len())].matches('\n').count() + 1
        };
        let check = |value: &Spanned<f64>, field: &str, low: f64, high: f64| {
            let v = *value.get_ref();
            if (low..=high).contains(&v) {
                Ok(v)
            } else {
                Err(DataError::Invalid {
                    path: path.to_path_buf(),
                    line: line_of(value.span()),
                    field: field.to_string(),
                    problem: format!("must be between {low} and {high}, got {v}"),
                })
            }
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
