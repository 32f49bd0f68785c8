//! Free parameters as the engine sees them: a name and unit, bounds and scale, start value
//! and prior, and the map between the optimiser's unit cube and the file's units. Where a
//! value goes in a material or scenario is not known here (`case::targets`).

/// How the optimiser moves along a parameter.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Scale {
    Linear,
    /// Uniform in log10 (pre-exponential factors, absorption coefficients).
    Log,
}

/// A prior belief about a parameter, turning the fit into a maximum a posteriori estimate.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Prior {
    /// Normal with this mean and standard deviation, in the file's units.
    Normal { mean: f64, standard_deviation: f64 },
    /// Log-normal: log10 of the value is normal around log10(median) with this deviation.
    LogNormal {
        median: f64,
        standard_deviation_log10: f64,
    },
}

impl Prior {
    /// The prior's contribution to the objective, ((x − μ)/σ)² (−2 ln p up to a constant).
    pub fn penalty(&self, value: f64) -> f64 {
        self.residual(value).powi(2)
    }

    /// The standardised residual (x − μ)/σ, one extra row of the residual vector.
    pub fn residual(&self, value: f64) -> f64 {
        match *self {
            Prior::Normal {
                mean,
                standard_deviation,
            } => (value - mean) / standard_deviation,
            Prior::LogNormal {
                median,
                standard_deviation_log10,
            } => (value.max(f64::MIN_POSITIVE).log10() - median.log10()) / standard_deviation_log10,
        }
    }
}

/// A free parameter of the fit.
#[derive(Debug, Clone, PartialEq)]
pub struct FreeParameter {
    /// The path as written in the job (e.g. `component.virgin.conductivity_w_m_k`).
    pub name: String,
    /// Unit of the value, as in the file key (for screens and reports).
    pub unit: String,
    pub lower: f64,
    pub upper: f64,
    pub scale: Scale,
    pub start: f64,
    pub prior: Option<Prior>,
}

impl FreeParameter {
    /// File-unit value of unit-cube coordinate `u` (clamped to 0..1).
    pub fn from_unit(&self, u: f64) -> f64 {
        let u = u.clamp(0.0, 1.0);
        match self.scale {
            Scale::Linear => self.lower + u * (self.upper - self.lower),
            Scale::Log => {
                10f64.powf(self.lower.log10() + u * (self.upper.log10() - self.lower.log10()))
            }
        }
    }

    /// Unit-cube coordinate of a file-unit value.
    pub fn to_unit(&self, value: f64) -> f64 {
        match self.scale {
            Scale::Linear => (value - self.lower) / (self.upper - self.lower),
            Scale::Log => {
                (value.log10() - self.lower.log10()) / (self.upper.log10() - self.lower.log10())
            }
        }
    }

    /// The coordinate in which intervals are computed: the value, or log10 of it.
    pub fn to_fit_space(&self, value: f64) -> f64 {
        match self.scale {
            Scale::Linear => value,
            Scale::Log => value.log10(),
        }
    }

    pub fn from_fit_space(&self, coordinate: f64) -> f64 {
        match self.scale {
            Scale::Linear => coordinate,
            Scale::Log => 10f64.powf(coordinate),
        }
    }

    /// Width of the bounds in fit space.
    pub fn fit_space_range(&self) -> f64 {
        self.to_fit_space(self.upper) - self.to_fit_space(self.lower)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn log_scale_maps_the_unit_interval_geometrically() {
        let parameter = FreeParameter {
            name: "a".into(),
            unit: "1/s".into(),
            lower: 1e10,
            upper: 1e14,
            scale: Scale::Log,
            start: 1e12,
            prior: None,
        };
        assert!((parameter.from_unit(0.5) / 1e12 - 1.0).abs() < 1e-12);
        assert!((parameter.to_unit(1e13) - 0.75).abs() < 1e-12);
    }

    #[test]
    fn priors_penalise_by_standardised_distance() {
        let normal = Prior::Normal {
            mean: 1.0,
            standard_deviation: 0.5,
        };
        assert!((normal.penalty(2.0) - 4.0).abs() < 1e-12);
        let log_normal = Prior::LogNormal {
            median: 100.0,
            standard_deviation_log10: 0.5,
        };
        assert!((log_normal.penalty(1000.0) - 4.0).abs() < 1e-12);
    }
}
