//! One-dimensional transient conduction in an inert slab, conservative finite volumes, backward
//! Euler in time, with the exposed-face temperature taken from the face balance.

/// Why a conduction run cannot start.
#[derive(Debug, thiserror::Error, PartialEq)]
pub enum ConductionError {
    #[error("`{field}` must be > 0, got {value}")]
    NotPositive { field: &'static str, value: f64 },
    #[error("`{field}` must be >= 0, got {value}")]
    Negative { field: &'static str, value: f64 },
}

/// Rejects a value that is not finite and > 0, naming the field.
fn require_positive(field: &'static str, value: f64) -> Result<(), ConductionError> {
    if value > 0.0 && value.is_finite() {
        Ok(())
    } else {
        Err(ConductionError::NotPositive { field, value })
    }
}

/// An inert homogeneous slab with constant properties, insulated at the back.
#[derive(Debug, Clone, PartialEq)]
pub struct InertSlab {
    pub thickness_m: f64,
    pub density_kg_m3: f64,
    pub conductivity_w_m_k: f64,
    pub specific_heat_j_kg_k: f64,
    pub initial_temperature_k: f64,
    pub n_cells: usize,
}

impl InertSlab {
    fn validate(&self) -> Result<(), ConductionError> {
        for (field, value) in [
            ("thickness_m", self.thickness_m),
            ("density_kg_m3", self.density_kg_m3),
            ("conductivity_w_m_k", self.conductivity_w_m_k),
            ("specific_heat_j_kg_k", self.specific_heat_j_kg_k),
            ("initial_temperature_k", self.initial_temperature_k),
            ("n_cells", self.n_cells as f64),
        ] {
            require_positive(field, value)?;
        }
        Ok(())
    }
}

/// Temperatures of the slab after heating, K.
#[derive(Debug, Clone, PartialEq)]
pub struct SlabState {
    pub cell_temperature_k: Vec<f64>,
    pub surface_temperature_k: f64,
}

/// Solves a tridiagonal system in place (Thomas algorithm); `lower[0]` and `upper[n-1]` unused.
fn solve_tridiagonal(lower: &[f64], diagonal: &mut [f64], upper: &[f64], rhs: &mut [f64]) {
    let n = diagonal.len();
    for i in 1..n {
        let factor = lower[i] / diagonal[i - 1];
        diagonal[i] -= factor * upper[i - 1];
        rhs[i] -= factor * rhs[i - 1];
    }
    rhs[n - 1] /= diagonal[n - 1];
    for i in (0..n - 1).rev() {
        rhs[i] = (rhs[i] - upper[i] * rhs[i + 1]) / diagonal[i];
    }
}

/// Heats the slab with a constant absorbed flux at the exposed face for `duration_s`, using
/// `n_steps` backward-Euler steps. The face temperature follows from the face balance: the
/// absorbed flux equals conduction through the first half cell.
pub fn heat_with_constant_flux(
    slab: &InertSlab,
    absorbed_flux_w_m2: f64,
    duration_s: f64,
    n_steps: usize,
) -> Result<SlabState, ConductionError> {
    let face = ExposedFace {
        absorbed_flux_w_m2,
        convective_coefficient_w_m2_k: 0.0,
        // Unused without convection; the initial temperature keeps the face physically plausible.
        gas_temperature_k: slab.initial_temperature_k,
    };
    heat(slab, &face, duration_s, n_steps)
}

/// What heats the exposed face: an absorbed flux plus convection from a gas, both constant.
#[derive(Debug, Clone, PartialEq)]
pub struct ExposedFace {
    pub absorbed_flux_w_m2: f64,
    pub convective_coefficient_w_m2_k: f64,
    pub gas_temperature_k: f64,
}

/// Heats the slab through `face` for `duration_s` in `n_steps` backward-Euler steps.
///
/// The face temperature solves the face balance q + h (T_g − T_s) = 2k (T_s − T_1)/Δz, so the
/// flux into the first cell is linear in T_1 and enters the implicit system exactly.
pub fn heat(
    slab: &InertSlab,
    face: &ExposedFace,
    duration_s: f64,
    n_steps: usize,
) -> Result<SlabState, ConductionError> {
    slab.validate()?;
    require_positive("duration_s", duration_s)?;
    require_positive("n_steps", n_steps as f64)?;
    require_positive("gas_temperature_k", face.gas_temperature_k)?;
    let h = face.convective_coefficient_w_m2_k;
    if !(h >= 0.0 && h.is_finite()) {
        return Err(ConductionError::Negative {
            field: "convective_coefficient_w_m2_k",
            value: h,
        });
    }
    let absorbed_flux_w_m2 = face.absorbed_flux_w_m2;
    let n = slab.n_cells;
    let dz = slab.thickness_m / n as f64;
    let capacity = slab.density_kg_m3 * slab.specific_heat_j_kg_k * dz;
    let conductance = slab.conductivity_w_m_k / dz;
    let dt = duration_s / n_steps as f64;
    // G = 2k/Δz, the conductance of the first half cell, between the face and cell 1's centre.
    let half_cell = 2.0 * conductance;
    let mut temperature = vec![slab.initial_temperature_k; n];
    let (mut lower, mut diagonal, mut upper, mut rhs) =
        (vec![0.0; n], vec![0.0; n], vec![0.0; n], vec![0.0; n]);
    for _ in 0..n_steps {
        for j in 0..n {
            let left = if j > 0 { conductance } else { 0.0 };
            let right = if j + 1 < n { conductance } else { 0.0 };
            lower[j] = -left * dt;
            upper[j] = -right * dt;
            diagonal[j] = capacity + (left + right) * dt;
            rhs[j] = capacity * temperature[j];
        }
        // Flux into cell 1: G/(h+G) · (q + h T_g − h T_1), with G = 2k/Δz.
        let share = half_cell / (h + half_cell);
        rhs[0] += share * (absorbed_flux_w_m2 + h * face.gas_temperature_k) * dt;
        diagonal[0] += share * h * dt;
        solve_tridiagonal(&lower, &mut diagonal, &upper, &mut rhs);
        temperature.copy_from_slice(&rhs);
    }
    // Face balance q + h (T_g − T_s) = G (T_s − T_1), solved for T_s.
    let surface_temperature_k =
        (absorbed_flux_w_m2 + h * face.gas_temperature_k + half_cell * temperature[0])
            / (h + half_cell);
    Ok(SlabState {
        cell_temperature_k: temperature,
        surface_temperature_k,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn tridiagonal_solve_matches_a_hand_worked_system() {
        // [2 1 0; 1 2 1; 0 1 2] x = [4 8 8] has x = [1 2 3].
        let mut diagonal = vec![2.0, 2.0, 2.0];
        let mut rhs = vec![4.0, 8.0, 8.0];
        solve_tridiagonal(&[0.0, 1.0, 1.0], &mut diagonal, &[1.0, 1.0, 0.0], &mut rhs);
        for (x, expected) in rhs.iter().zip([1.0, 2.0, 3.0]) {
            assert!((x - expected).abs() < 1e-12);
        }
    }

    #[test]
    fn zero_steps_and_negative_convection_are_rejected_not_coerced() {
        let slab = InertSlab {
            thickness_m: 0.006,
            density_kg_m3: 1000.0,
            conductivity_w_m_k: 0.2,
            specific_heat_j_kg_k: 1500.0,
            initial_temperature_k: 300.0,
            n_cells: 10,
        };
        assert_eq!(
            heat_with_constant_flux(&slab, 1e4, 10.0, 0),
            Err(ConductionError::NotPositive {
                field: "n_steps",
                value: 0.0
            })
        );
        let face = ExposedFace {
            absorbed_flux_w_m2: 0.0,
            convective_coefficient_w_m2_k: -5.0,
            gas_temperature_k: 600.0,
        };
        assert_eq!(
            heat(&slab, &face, 10.0, 10),
            Err(ConductionError::Negative {
                field: "convective_coefficient_w_m2_k",
                value: -5.0
            })
        );
    }

    #[test]
    fn zero_thickness_is_rejected_with_the_field_name() {
        let slab = InertSlab {
            thickness_m: 0.0,
            density_kg_m3: 1000.0,
            conductivity_w_m_k: 0.2,
            specific_heat_j_kg_k: 1500.0,
            initial_temperature_k: 300.0,
            n_cells: 10,
        };
        assert_eq!(
            heat_with_constant_flux(&slab, 1e4, 10.0, 10),
            Err(ConductionError::NotPositive {
                field: "thickness_m",
                value: 0.0
            })
        );
    }
}
