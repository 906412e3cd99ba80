//! The spectral device for many nugget shares at one range: one
//! eigendecomposition of the correlation matrix `R = Q L Q'` gives
//! `V(eta) = (1 - eta) R + eta I = Q ((1 - eta) L + eta I) Q'` for every
//! nugget share, so that after forming `Q'X` and `Q'y` once (`O(n^2 p)`)
//! each profiled ML or REML evaluation costs `O(n p^2)`: `ln|V| = sum ln d_i`
//! and the whitened columns are `Q'X / sqrt(d)`, `Q'y / sqrt(d)` with
//! `d_i = (1 - eta) l_i + eta` (Kang et al. 2008, *Genetics* 178: 1709-1723;
//! Lippert et al. 2011, *Nature Methods* 8: 833-835).
//!
//! The likelihood values are those of [`crate::spatial::likelihood::profiled`]
//! (same constants, same conventions); the whitened residuals are in the
//! eigenbasis, not `L^-1 r`, so a fit's residuals still come from the
//! Cholesky path.
//!
//! When it pays: the eigendecomposition costs many Cholesky factorisations
//! (`benches/gls.rs` prints the measured ratio), so the device pays only when
//! more nugget shares than that ratio are needed at one range (a profile of
//! the likelihood in the nugget share, a fine grid of starts); the search of
//! [`crate::spatial::ascent`] moves the range at every step and uses the
//! Cholesky path.

use super::correlation::Family;
use super::likelihood::{CovParams, Distances, LikelihoodError, LikelihoodKind, Profiled, profile_whitened};
use faer::{Mat, Side};

/// `R = Q L Q'` at one range with `Q'X` and `Q'y` formed.
#[derive(Clone, Debug)]
pub struct Spectral {
    family: Family,
    range: f64,
    lambda: Vec<f64>,
    /// `[Q'X | Q'y]`, `n x (p + 1)`.
    rotated: Mat<f64>,
}

impl Spectral {
    /// Eigendecompose `R(range)` and rotate `[X | y]`. Cost: one symmetric
    /// eigendecomposition (about `9 n^3` flops) and `2 n^2 (p + 1)`.
    pub fn new(
        dist: &Distances,
        family: Family,
        range: f64,
        x: &[Vec<f64>],
        y: &[f64],
    ) -> Result<Spectral, LikelihoodError> {
        super::likelihood::check_sizes(dist, x, y)?;
        if !(range.is_finite() && range > 0.0) {
            return Err(LikelihoodError::Invalid(format!("range {range} must be positive")));
        }
        let n = y.len();
        let r =
            Mat::from_fn(n, n, |i, j| if i == j { 1.0 } else { family.correlation(dist.get(i, j), range) });
        let eig = r
            .self_adjoint_eigen(Side::Lower)
            .map_err(|e| LikelihoodError::Invalid(format!("eigendecomposition failed: {e:?}")))?;
        let q = eig.U();
        let lambda: Vec<f64> = eig.S().column_vector().iter().copied().collect();
        let xy = super::likelihood::stack_xy(x, y);
        let rotated = q.transpose() * &xy;
        Ok(Spectral { family, range, lambda, rotated })
    }

    /// The profiled likelihood of `method` at nugget share `eta` (same value
    /// as the Cholesky path). Cost `O(n p^2)`. Fails, like the Cholesky
    /// path, when `V` is not positive definite (an eigenvalue
    /// `(1 - eta) l_i + eta` at or below `1e-14`).
    pub fn profiled(&self, eta: f64, method: LikelihoodKind) -> Result<Profiled, LikelihoodError> {
        if !(0.0..1.0).contains(&eta) {
            return Err(LikelihoodError::Invalid(format!("nugget share {eta} must be in [0, 1)")));
        }
        let n = self.lambda.len();
        let mut logdet = 0.0;
        let mut w = self.rotated.clone();
        for i in 0..n {
            let d = (1.0 - eta) * self.lambda[i] + eta;
            if d.is_nan() || d <= 1e-14 {
                return Err(LikelihoodError::Invalid(format!(
                    "the residual covariance ({}, range {}, nugget share {eta}) is not positive definite (eigenvalue {d:e})",
                    self.family.name(),
                    self.range
                )));
            }
            logdet += d.ln();
            let s = 1.0 / d.sqrt();
            for j in 0..w.ncols() {
                w[(i, j)] *= s;
            }
        }
        profile_whitened(&w, logdet, method, CovParams { family: self.family, range: self.range, eta })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::spatial::likelihood::profiled;
    use rand::{RngExt, SeedableRng};

    /// The eigen path equals the Cholesky path to 1e-8 relative (log-likelihood,
    /// sigma², coefficients) at 20 random (range, nugget share) points per
    /// family, ML and REML.
    #[test]
    fn eigen_path_equals_cholesky_path() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(11);
        let n = 70;
        let x: Vec<f64> = (0..n).map(|_| rng.random_range(0.0..6.0)).collect();
        let yy: Vec<f64> = (0..n).map(|_| rng.random_range(0.0..4.0)).collect();
        let g: Vec<f64> = (0..n).map(|i| f64::from(u8::from(i % 2 == 0))).collect();
        let z: Vec<f64> =
            (0..n).map(|i| (x[i] * 0.7).sin() + 0.5 * g[i] + rng.random_range(-0.5..0.5)).collect();
        let dist = Distances::from_coords(&x, &yy).unwrap();
        let cols = vec![vec![1.0; n], g, yy.clone()];
        for family in [Family::Exponential, Family::Gaussian, Family::Spherical, Family::Matern { nu: 1.5 }] {
            for _ in 0..20 {
                let range = rng.random_range(0.3..3.0);
                let eta = rng.random_range(0.02..0.9);
                let s = Spectral::new(&dist, family, range, &cols, &z).unwrap();
                for method in [LikelihoodKind::Ml, LikelihoodKind::Reml] {
                    let a = s.profiled(eta, method).unwrap();
                    let b = profiled(&dist, &CovParams { family, range, eta }, &cols, &z, method).unwrap();
                    let rel = |u: f64, v: f64| (u - v).abs() / v.abs().max(1e-300);
                    assert!(
                        rel(a.loglik, b.loglik) < 1e-8,
                        "{family} {range} {eta}: {} vs {}",
                        a.loglik,
                        b.loglik
                    );
                    assert!(rel(a.sigma2, b.sigma2) < 1e-8);
                    for (u, v) in a.beta.iter().zip(&b.beta) {
                        assert!((u - v).abs() < 1e-8 * (1.0 + v.abs()));
                    }
                }
            }
        }
    }
}
