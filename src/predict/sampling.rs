//! Draws parameter sets from a fit's uncertainty: a multivariate normal in fit space (the
//! value, or log10 of it on a log scale) with the fit's linearised covariance, truncated to the
//! fit's bounds by rejection. See docs/predictions.md for why this and not the final DE
//! population.
//!
//! Pure and seeded: the same mean, covariance, bounds and seed give the same draws.

use nalgebra::{DMatrix, DVector, SymmetricEigen};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};

/// Draws per requested sample the rejection loop may spend before giving up.
pub const MAX_DRAWS_PER_SAMPLE: usize = 1000;

/// The distribution to draw from, in fit space.
#[derive(Debug, Clone, PartialEq)]
pub struct FitSpaceNormal {
    /// Best-fit coordinates (fit space).
    pub mean: Vec<f64>,
    /// Covariance in fit space, row-major, p × p. A row and column of zeros hold that
    /// parameter at its mean.
    pub covariance: Vec<Vec<f64>>,
    /// Lower bounds in fit space (−∞ where none).
    pub lower: Vec<f64>,
    /// Upper bounds in fit space (+∞ where none).
    pub upper: Vec<f64>,
}

/// What the sampler produced.
#[derive(Debug, Clone, PartialEq)]
pub struct Draws {
    /// Accepted points, fit space.
    pub points: Vec<Vec<f64>>,
    /// Points drawn in total (accepted and rejected).
    pub n_drawn: usize,
}

/// Errors of the sampler.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum SamplingError {
    #[error("the covariance is {rows}×{columns} but there are {p} parameters")]
    Shape {
        rows: usize,
        columns: usize,
        p: usize,
    },
    #[error("the covariance has a non-finite entry")]
    NotFinite,
    #[error(
        "only {accepted} of {drawn} draws fell inside the fit's bounds; the uncertainty is \
         too wide for a band (see the parameters' warnings)"
    )]
    TooFewInside { accepted: usize, drawn: usize },
}

/// `n` points of a posterior sample (fit space), taken without replacement in an order
/// shuffled by `seed` (with replacement once `n` exceeds the sample). Pure and seeded.
pub fn from_sample(sample: &[Vec<f64>], n: usize, seed: u64) -> Draws {
    use rand::seq::SliceRandom;
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let mut order: Vec<usize> = (0..sample.len()).collect();
    order.shuffle(&mut rng);
    let points = (0..n)
        .map(|i| sample[order[i % order.len()]].clone())
        .collect();
    Draws { points, n_drawn: n }
}

/// A factor L with L·Lᵀ = C, from the symmetric eigen-decomposition; negative eigenvalues
/// (rounding in a near-singular covariance) are set to zero.
fn square_root(covariance: &[Vec<f64>]) -> Result<DMatrix<f64>, SamplingError> {
    let p = covariance.len();
    for row in covariance {
        if row.len() != p {
            return Err(SamplingError::Shape {
                rows: p,
                columns: row.len(),
                p,
            });
        }
        if row.iter().any(|v| !v.is_finite()) {
            return Err(SamplingError::NotFinite);
        }
    }
    let matrix = DMatrix::from_fn(p, p, |i, j| 0.5 * (covariance[i][j] + covariance[j][i]));
    let eigen = SymmetricEigen::new(matrix);
    let roots = DVector::from_iterator(p, eigen.eigenvalues.iter().map(|l| l.max(0.0).sqrt()));
    Ok(&eigen.eigenvectors * DMatrix::from_diagonal(&roots))
}

/// Draws `n` points inside the bounds. Rejection keeps the shape of the normal inside the box
/// (a truncated normal); clamping would pile samples up on the bounds instead.
pub fn draw(normal: &FitSpaceNormal, n: usize, seed: u64) -> Result<Draws, SamplingError> {
    let p = normal.mean.len();
    if normal.covariance.len() != p {
        return Err(SamplingError::Shape {
            rows: normal.covariance.len(),
            columns: normal.covariance.first().map_or(0, Vec::len),
            p,
        });
    }
    let root = square_root(&normal.covariance)?;
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let mut points = Vec::with_capacity(n);
    let mut n_drawn = 0;
    let max_draws = n.max(1) * MAX_DRAWS_PER_SAMPLE;
    while points.len() < n && n_drawn < max_draws {
        n_drawn += 1;
        let z = DVector::from_iterator(p, (0..p).map(|_| StandardNormal.sample(&mut rng)));
        let offset = &root * z;
        let point: Vec<f64> = (0..p).map(|i| normal.mean[i] + offset[i]).collect();
        let inside = point
            .iter()
            .zip(normal.lower.iter().zip(&normal.upper))
            .all(|(x, (lo, hi))| *x >= *lo && *x <= *hi);
        if inside {
            points.push(point);
        }
    }
    if points.len() < n {
        return Err(SamplingError::TooFewInside {
            accepted: points.len(),
            drawn: n_drawn,
        });
    }
    Ok(Draws { points, n_drawn })
}

/// The standard normal quantile z(p) for 0 < p < 1, by the rational approximation of
/// Abramowitz & Stegun, Handbook of Mathematical Functions (1964), 26.2.23 (absolute error
/// below 4.5e-4; z(0.975) = 1.960).
pub fn normal_quantile(p: f64) -> f64 {
    let p = p.clamp(1e-12, 1.0 - 1e-12);
    let (tail, sign) = if p < 0.5 { (p, -1.0) } else { (1.0 - p, 1.0) };
    let t = (-2.0 * tail.ln()).sqrt();
    let z = t
        - (2.515517 + 0.802853 * t + 0.010328 * t * t)
            / (1.0 + 1.432788 * t + 0.189269 * t * t + 0.001308 * t * t * t);
    sign * z
}

/// The value below which a fraction `q` (0..1) of `values` lies, by linear interpolation
/// between order statistics (the "type 7" rule of Hyndman & Fan, Am. Stat. 50 (1996) 361).
/// NaN for an empty slice.
pub fn quantile(sorted: &[f64], q: f64) -> f64 {
    if sorted.is_empty() {
        return f64::NAN;
    }
    let position = q.clamp(0.0, 1.0) * (sorted.len() - 1) as f64;
    let below = position.floor() as usize;
    let above = (below + 1).min(sorted.len() - 1);
    let fraction = position - below as f64;
    sorted[below] + (sorted[above] - sorted[below]) * fraction
}

#[cfg(test)]
mod tests {
    use super::*;

    fn two_parameters(correlation: f64) -> FitSpaceNormal {
        FitSpaceNormal {
            mean: vec![1.0, -2.0],
            covariance: vec![
                vec![0.04, correlation * 0.2 * 0.5],
                vec![correlation * 0.2 * 0.5, 0.25],
            ],
            lower: vec![f64::NEG_INFINITY; 2],
            upper: vec![f64::INFINITY; 2],
        }
    }

    /// The sample mean, standard deviations and correlation of 20 000 draws match the
    /// distribution's to within their sampling error (about 3/√n of each).
    #[test]
    fn draws_have_the_covariance_they_were_given() {
        let draws = draw(&two_parameters(0.8), 20_000, 5).unwrap();
        let n = draws.points.len() as f64;
        let mean = |i: usize| draws.points.iter().map(|x| x[i]).sum::<f64>() / n;
        let (m0, m1) = (mean(0), mean(1));
        let cov = |i: usize, j: usize, mi: f64, mj: f64| {
            draws
                .points
                .iter()
                .map(|x| (x[i] - mi) * (x[j] - mj))
                .sum::<f64>()
                / (n - 1.0)
        };
        let (s0, s1) = (cov(0, 0, m0, m0).sqrt(), cov(1, 1, m1, m1).sqrt());
        let r = cov(0, 1, m0, m1) / (s0 * s1);
        assert!((m0 - 1.0).abs() < 0.005, "{m0}");
        assert!((m1 + 2.0).abs() < 0.012, "{m1}");
        assert!((s0 - 0.2).abs() < 0.005, "{s0}");
        assert!((s1 - 0.5).abs() < 0.012, "{s1}");
        assert!((r - 0.8).abs() < 0.01, "{r}");
    }

    #[test]
    fn draws_stay_inside_the_bounds() {
        let mut normal = two_parameters(0.0);
        normal.lower[0] = 1.0; // half the mass of the first parameter lies below
        let draws = draw(&normal, 2000, 9).unwrap();
        assert!(draws.points.iter().all(|x| x[0] >= 1.0));
        // About half the draws were rejected.
        let acceptance = 2000.0 / draws.n_drawn as f64;
        assert!((acceptance - 0.5).abs() < 0.05, "{acceptance}");
    }

    #[test]
    fn a_zero_variance_parameter_stays_at_its_mean() {
        let normal = FitSpaceNormal {
            mean: vec![3.0, 4.0],
            covariance: vec![vec![0.0, 0.0], vec![0.0, 1.0]],
            lower: vec![f64::NEG_INFINITY; 2],
            upper: vec![f64::INFINITY; 2],
        };
        let draws = draw(&normal, 100, 1).unwrap();
        assert!(draws.points.iter().all(|x| (x[0] - 3.0).abs() < 1e-12));
    }

    #[test]
    fn an_impossible_box_is_an_error_not_a_hang() {
        let mut normal = two_parameters(0.0);
        normal.lower[0] = 100.0;
        assert!(matches!(
            draw(&normal, 10, 1),
            Err(SamplingError::TooFewInside { .. })
        ));
    }

    /// Hyndman & Fan (1996) type 7: the median of 1..4 is 2.5, the 25 % point 1.75.
    #[test]
    fn the_normal_quantile_matches_the_tables() {
        // Values from standard normal tables (e.g. Abramowitz & Stegun, table 26.5).
        assert!((normal_quantile(0.975) - 1.959964).abs() < 5e-4);
        assert!((normal_quantile(0.95) - 1.644854).abs() < 5e-4);
        assert!((normal_quantile(0.025) + 1.959964).abs() < 5e-4);
    }

    #[test]
    fn quantiles_interpolate_between_order_statistics() {
        let sorted = [1.0, 2.0, 3.0, 4.0];
        assert_eq!(quantile(&sorted, 0.5), 2.5);
        assert_eq!(quantile(&sorted, 0.25), 1.75);
        assert_eq!(quantile(&sorted, 0.0), 1.0);
        assert_eq!(quantile(&sorted, 1.0), 4.0);
    }
}
