//! Time derivatives and smoothing of sampled signals: the five-point derivative of ISO 5660-1
//! (used for the mass-loss rate) and optional Savitzky–Golay smoothing for noisy load cells.
//!
//! Both work on non-uniform time steps: the five-point weights are those of the fourth-degree
//! Lagrange polynomial through the five nearest samples, which on a uniform step are exactly
//! the standard's central formula (−m₊₂ + 8m₊₁ − 8m₋₁ + m₋₂)/(12Δt) and its one-sided forms at
//! the first two and last two points. Pure functions, no I/O.

use super::DataError;

/// Five-point derivative dy/dt at every sample, in units of `y` per second.
///
/// Exact for polynomials up to fourth degree at every point, interior and ends (ISO 5660-1,
/// docs/physics.md §4). Needs at least five samples with strictly increasing times.
pub fn five_point_derivative(time_s: &[f64], values: &[f64]) -> Result<Vec<f64>, DataError> {
    check_samples(time_s, values, 5, "the five-point derivative")?;
    let n = time_s.len();
    let mut derivative = Vec::with_capacity(n);
    for idx in 0..n {
        let start = idx.saturating_sub(2).min(n - 5);
        let nodes = &time_s[start..start + 5];
        let weights = lagrange_derivative_weights(nodes, idx - start);
        let sum: f64 = weights
            .iter()
            .zip(&values[start..start + 5])
            .map(|(w, y)| w * y)
            .sum();
        derivative.push(sum);
    }
    Ok(derivative)
}

/// Weights w_j with Σ w_j y_j = p'(x_k), p the interpolating polynomial through the nodes.
fn lagrange_derivative_weights(nodes: &[f64], k: usize) -> Vec<f64> {
    let xk = nodes[k];
    (0..nodes.len())
        .map(|j| {
            if j == k {
                (0..nodes.len())
                    .filter(|&m| m != k)
                    .map(|m| 1.0 / (xk - nodes[m]))
                    .sum()
            } else {
                let numerator: f64 = (0..nodes.len())
                    .filter(|&m| m != j && m != k)
                    .map(|m| xk - nodes[m])
                    .product();
                let denominator: f64 = (0..nodes.len())
                    .filter(|&m| m != j)
                    .map(|m| nodes[j] - nodes[m])
                    .product();
                numerator / denominator
            }
        })
        .collect()
}

/// Savitzky–Golay smoothing settings: a least-squares polynomial of `degree` through
/// `window_points` neighbouring samples, evaluated at the centre sample.
///
/// Savitzky, A. and Golay, M.J.E., Anal. Chem. 36 (1964) 1627–1639. At the ends the first (or
/// last) full window is fitted and evaluated at the end samples, so no point is dropped.
/// Polynomials up to `degree` pass through unchanged.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Smoothing {
    /// Samples in each fit, odd and greater than `degree`.
    pub window_points: usize,
    /// Degree of the local polynomial (2 or 3 are usual).
    pub degree: usize,
}

/// Smooths `values` sampled at `time_s` (see [`Smoothing`]).
pub fn savitzky_golay(
    time_s: &[f64],
    values: &[f64],
    smoothing: Smoothing,
) -> Result<Vec<f64>, DataError> {
    let window = smoothing.window_points;
    if window.is_multiple_of(2) || window <= smoothing.degree {
        return Err(DataError::Reduction {
            problem: format!(
                "smoothing window must be odd and larger than the degree {}, got {window}",
                smoothing.degree
            ),
        });
    }
    check_samples(time_s, values, window, "smoothing")?;
    let n = time_s.len();
    let half = window / 2;
    let mut smoothed = Vec::with_capacity(n);
    for idx in 0..n {
        let start = idx.saturating_sub(half).min(n - window);
        let t = &time_s[start..start + window];
        let y = &values[start..start + window];
        let centre_s = time_s[idx];
        let scale_s = (t[window - 1] - t[0]).max(f64::MIN_POSITIVE);
        let coefficients = least_squares_polynomial(
            &t.iter()
                .map(|ti| (ti - centre_s) / scale_s)
                .collect::<Vec<_>>(),
            y,
            smoothing.degree,
        )
        .ok_or_else(|| DataError::Reduction {
            problem: format!("smoothing failed near t = {centre_s} s: the window is degenerate"),
        })?;
        // Evaluated at the centre, where the scaled abscissa is zero.
        smoothed.push(coefficients[0]);
    }
    Ok(smoothed)
}

/// Coefficients c_0..c_degree of the least-squares polynomial Σ c_p x^p, by the normal
/// equations (small and well scaled here, because x is centred and scaled to order one).
fn least_squares_polynomial(x: &[f64], y: &[f64], degree: usize) -> Option<Vec<f64>> {
    let size = degree + 1;
    let mut matrix = vec![vec![0.0; size + 1]; size];
    for (xi, yi) in x.iter().zip(y) {
        let powers: Vec<f64> = (0..=2 * degree).map(|p| xi.powi(p as i32)).collect();
        for row in 0..size {
            for col in 0..size {
                matrix[row][col] += powers[row + col];
            }
            matrix[row][size] += powers[row] * yi;
        }
    }
    solve_augmented(matrix)
}

/// Gaussian elimination with partial pivoting on an augmented matrix [A | b].
fn solve_augmented(mut matrix: Vec<Vec<f64>>) -> Option<Vec<f64>> {
    let size = matrix.len();
    for col in 0..size {
        let pivot = (col..size).max_by(|&a, &b| {
            matrix[a][col]
                .abs()
                .partial_cmp(&matrix[b][col].abs())
                .unwrap_or(std::cmp::Ordering::Equal)
        })?;
        if matrix[pivot][col].abs() < 1e-300 {
            return None;
        }
        matrix.swap(col, pivot);
        for row in col + 1..size {
            let factor = matrix[row][col] / matrix[col][col];
            let pivot_row = matrix[col].clone();
            for (entry, pivot_entry) in matrix[row].iter_mut().zip(&pivot_row).skip(col) {
                *entry -= factor * pivot_entry;
            }
        }
    }
    let mut solution = vec![0.0; size];
    for row in (0..size).rev() {
        let tail: f64 = (row + 1..size).map(|k| matrix[row][k] * solution[k]).sum();
        solution[row] = (matrix[row][size] - tail) / matrix[row][row];
    }
    Some(solution)
}

fn check_samples(
    time_s: &[f64],
    values: &[f64],
    minimum: usize,
    what: &str,
) -> Result<(), DataError> {
    if time_s.len() != values.len() {
        return Err(DataError::Reduction {
            problem: format!(
                "{what} needs as many times as values, got {} and {}",
                time_s.len(),
                values.len()
            ),
        });
    }
    if time_s.len() < minimum {
        return Err(DataError::Reduction {
            problem: format!(
                "{what} needs at least {minimum} samples, got {}",
                time_s.len()
            ),
        });
    }
    if let Some(idx) = time_s
        .windows(2)
        .position(|w| w[1].is_nan() || w[1] <= w[0])
    {
        return Err(DataError::Reduction {
            problem: format!(
                "{what} needs strictly increasing times, got {} s then {} s at samples {} and {}",
                time_s[idx],
                time_s[idx + 1],
                idx,
                idx + 1
            ),
        });
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    /// ISO 5660-1 five-point formulas written out for a uniform step Δt (central, and the
    /// one-sided forms for the first two points), to compare with the general weights.
    #[test]
    fn uniform_weights_equal_the_standard_formulas() {
        let t: Vec<f64> = (0..5).map(|i| i as f64 * 2.0).collect();
        let dt = 2.0;
        let central = lagrange_derivative_weights(&t, 2);
        let expected = [1.0, -8.0, 0.0, 8.0, -1.0].map(|w| w / (12.0 * dt));
        let first = lagrange_derivative_weights(&t, 0);
        let first_expected = [-25.0, 48.0, -36.0, 16.0, -3.0].map(|w| w / (12.0 * dt));
        let second = lagrange_derivative_weights(&t, 1);
        let second_expected = [-3.0, -10.0, 18.0, -6.0, 1.0].map(|w| w / (12.0 * dt));
        for (got, want) in central.iter().chain(&first).chain(&second).zip(
            expected
                .iter()
                .chain(&first_expected)
                .chain(&second_expected),
        ) {
            assert!((got - want).abs() < 1e-12, "{got} vs {want}");
        }
    }

    proptest::proptest! {
        /// Exactness for any quartic on any increasing grid (docs/physics.md §4 states it for the
        /// ISO formulas; the general weights keep it on uneven steps).
        #[test]
        fn any_quartic_on_any_grid_is_differentiated_exactly(
            coefficients in proptest::collection::vec(-2.0f64..2.0, 5),
            steps in proptest::collection::vec(0.2f64..2.0, 8),
        ) {
            let mut time_s = vec![0.0];
            for step in &steps {
                time_s.push(time_s[time_s.len() - 1] + step);
            }
            let values: Vec<f64> = time_s
                .iter()
                .map(|t| coefficients.iter().rev().fold(0.0, |acc, c| acc * t + c))
                .collect();
            let derivative = five_point_derivative(&time_s, &values).unwrap();
            for (t, d) in time_s.iter().zip(&derivative) {
                let exact: f64 = (1..5)
                    .map(|p| p as f64 * coefficients[p] * t.powi(p as i32 - 1))
                    .sum();
                // Values reach about 2·16⁴ ≈ 1.3e5; rounding error scales with them (≈ 1e-11).
                let tolerance = 1e-6 * (1.0 + exact.abs()) + 1e-9 * 1.3e5;
                proptest::prop_assert!(
                    (d - exact).abs() < tolerance,
                    "t = {}: {} vs {}",
                    t,
                    d,
                    exact
                );
            }
        }
    }

    #[test]
    fn savitzky_golay_keeps_a_quadratic() {
        let t: Vec<f64> = (0..30)
            .map(|i| i as f64 * 0.7 + (i % 3) as f64 * 0.1)
            .collect();
        let y: Vec<f64> = t.iter().map(|x| 3.0 - 0.2 * x + 0.05 * x * x).collect();
        let s = savitzky_golay(
            &t,
            &y,
            Smoothing {
                window_points: 7,
                degree: 2,
            },
        )
        .unwrap();
        for (a, b) in s.iter().zip(&y) {
            assert!((a - b).abs() < 1e-9 * (1.0 + b.abs()), "{a} vs {b}");
        }
    }

    #[test]
    fn too_few_samples_is_an_error_not_a_panic() {
        let err = five_point_derivative(&[0.0, 1.0, 2.0], &[1.0, 2.0, 3.0]).unwrap_err();
        assert!(err.to_string().contains("at least 5 samples"), "{err}");
    }

    #[test]
    fn repeated_times_are_an_error() {
        let t = [0.0, 1.0, 1.0, 2.0, 3.0];
        let err = five_point_derivative(&t, &[0.0; 5]).unwrap_err();
        assert!(err.to_string().contains("strictly increasing"), "{err}");
    }
}
