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
//! [`Tridiagonal`] is the same device without the eigenvectors: `R = H T H'`
//! with `T` tridiagonal, and `V(eta) = H ((1 - eta) T + eta I) H'`.
//!
//! When it pays: the eigendecomposition costs 22 to 25 Cholesky
//! factorisations and the tridiagonal reduction 14 to 16 (`benches/gls.rs`,
//! n = 480 and 1,680), so either pays only when more nugget shares than that
//! are needed at one range (a profile of the likelihood in the nugget share,
//! a fine grid of starts); the search of [`crate::spatial::ascent`] moves
//! the range at every step and uses the Cholesky path (its profile route,
//! [`crate::spatial::ascent::maximise_profiled`], is measured beside it).

use super::correlation::Family;
use super::factor::{CORRELATION_MIN_DIAGONAL, FactorError};
use super::likelihood::{CovParams, Distances, LikelihoodError, LikelihoodKind, Profiled, profile_whitened};
use super::optimise::brent_min;
use faer::dyn_stack::{MemBuffer, MemStack, StackReq};
use faer::linalg::evd::tridiag;
use faer::linalg::householder;
use faer::{Conj, Mat, Par, Side};

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
        let r = dist.correlation_lower(family, range);
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

/// `R = H T H'` at one range, `T` symmetric tridiagonal and `H` orthogonal
/// (Householder's reduction, as in Golub & Van Loan 2013, *Matrix
/// Computations*, 4th ed., §8.3.1), with `H'[X | y]` formed for one or more
/// fixed parts. Since `V(eta) = (1 - eta) R + eta I = H ((1 - eta) T + eta I) H'`,
/// the profiled ML or REML likelihood at any nugget share needs only the
/// Cholesky factor of the tridiagonal `(1 - eta) T + eta I` (`O(n)`, Golub &
/// Van Loan §4.3.6), the whitening of the rotated columns by it (`O(n p)`)
/// and the small GLS system (`O(n p^2)`): the device of
/// [`Spectral`] without the eigenvectors, whose divide-and-conquer and
/// back-transformation cost most of an eigendecomposition.
///
/// The whitened residuals of its evaluations are `L_T^-1 H' r`, an orthogonal
/// rotation of the Cholesky path's `L^-1 r` (same `Q`, same likelihood): a
/// fit's residuals still come from the Cholesky path.
#[derive(Clone, Debug)]
pub struct Tridiagonal {
    family: Family,
    range: f64,
    /// Diagonal of `T`.
    diag: Vec<f64>,
    /// Subdiagonal of `T` (`T[i + 1, i]`), `n - 1` values.
    sub: Vec<f64>,
    /// `H'[X_d | y]` for each fixed part `d`, `n x (p_d + 1)`.
    rotated: Vec<Mat<f64>>,
}

impl Tridiagonal {
    /// Fill `R(range)`, reduce it to tridiagonal form and rotate `[X_d | y]`
    /// for every fixed part of `designs`. Cost: `n^2/2` correlations, the
    /// reduction (`4 n^3 / 3` flops, half of them in matrix-vector products)
    /// and `4 n^2 (p + 1)` per fixed part. Counted as one factorisation of
    /// the observations' covariance ([`crate::spatial::factor`]).
    pub fn new(
        dist: &Distances,
        family: Family,
        range: f64,
        designs: &[&[Vec<f64>]],
        y: &[f64],
    ) -> Result<Tridiagonal, LikelihoodError> {
        for x in designs {
            super::likelihood::check_sizes(dist, x, y)?;
        }
        if !(range.is_finite() && range > 0.0) {
            return Err(LikelihoodError::Invalid(format!("range {range} must be positive")));
        }
        let n = y.len();
        let mut rotated: Vec<Mat<f64>> = designs.iter().map(|x| super::likelihood::stack_xy(x, y)).collect();
        if n == 0 {
            return Ok(Tridiagonal { family, range, diag: Vec::new(), sub: Vec::new(), rotated });
        }
        let par = if super::factor::is_sequential() { Par::Seq } else { Par::rayon(0) };
        let mut a = dist.correlation_lower(family, range);
        super::factor::count_factorisation();
        let bs = faer::linalg::qr::no_pivoting::factor::recommended_block_size::<f64>(n, n);
        let mut householder = Mat::<f64>::zeros(bs, n.saturating_sub(1));
        let cols = rotated.iter().map(|m| m.ncols()).max().unwrap_or(1);
        let mut mem = MemBuffer::new(StackReq::any_of(&[
            tridiag::tridiag_in_place_scratch::<f64>(n, par, Default::default()),
            householder::apply_block_householder_sequence_transpose_on_the_left_in_place_scratch::<f64>(
                n.saturating_sub(1),
                bs,
                cols,
            ),
        ]));
        tridiag::tridiag_in_place(
            a.as_mut(),
            householder.as_mut(),
            par,
            MemStack::new(&mut mem),
            Default::default(),
        );
        let diag: Vec<f64> = (0..n).map(|i| a[(i, i)]).collect();
        let sub: Vec<f64> = (1..n).map(|i| a[(i, i - 1)]).collect();
        if n > 1 {
            // R = Q T Q' with Q = diag(1, H_1 ... H_{n-1}) acting on rows 1.. (faer's convention)
            for w in rotated.iter_mut() {
                householder::apply_block_householder_sequence_transpose_on_the_left_in_place_with_conj(
                    a.as_ref().submatrix(1, 0, n - 1, n - 1),
                    householder.as_ref(),
                    Conj::No,
                    w.as_mut().subrows_mut(1, n - 1),
                    par,
                    MemStack::new(&mut mem),
                );
            }
        }
        Ok(Tridiagonal { family, range, diag, sub, rotated })
    }

    /// The range of `R`.
    pub fn range(&self) -> f64 {
        self.range
    }

    /// The profiled likelihood of `method` for fixed part `design` (its
    /// index in the `designs` given to [`Tridiagonal::new`]) at nugget share
    /// `eta`: the value of [`crate::spatial::likelihood::profiled`]. Cost
    /// `O(n p^2)`. Fails, like the Cholesky path, when a pivot `l_jj` of the
    /// tridiagonal factor is at or below
    /// [`crate::spatial::factor::CORRELATION_MIN_DIAGONAL`].
    pub fn profiled(
        &self,
        design: usize,
        eta: f64,
        method: LikelihoodKind,
    ) -> Result<Profiled, LikelihoodError> {
        let params = CovParams { family: self.family, range: self.range, eta };
        if !(0.0..1.0).contains(&eta) {
            return Err(LikelihoodError::Invalid(format!("nugget share {eta} must be in [0, 1)")));
        }
        let Some(rot) = self.rotated.get(design) else {
            return Err(LikelihoodError::Invalid(format!("no fixed part {design}")));
        };
        let n = self.diag.len();
        // L L' = (1 - eta) T + eta I, L lower bidiagonal: 1 / l_ii and m_i = L[i, i - 1]
        let mut inv_l = vec![0.0; n];
        let mut m = vec![0.0; n];
        let mut logdet = 0.0;
        for i in 0..n {
            let mut pivot = (1.0 - eta) * self.diag[i] + eta;
            if i > 0 {
                m[i] = (1.0 - eta) * self.sub[i - 1] * inv_l[i - 1];
                pivot -= m[i] * m[i];
            }
            let l = pivot.sqrt();
            if pivot.is_nan() || l <= CORRELATION_MIN_DIAGONAL {
                return Err(LikelihoodError::NotPositiveDefinite {
                    family: self.family.name(),
                    range: self.range,
                    eta,
                    location: FactorError::NotPositiveDefinite {
                        index: i,
                        pivot,
                        min_diagonal: CORRELATION_MIN_DIAGONAL,
                    },
                });
            }
            logdet += 2.0 * l.ln();
            inv_l[i] = 1.0 / l;
        }
        // forward substitution, column by column: z_i = (w_i - m_i z_{i-1}) / l_ii
        let mut w = rot.clone();
        for j in 0..w.ncols() {
            let c = w.col_as_slice_mut(j);
            let mut prev = 0.0;
            for ((v, &mi), &il) in c.iter_mut().zip(&m).zip(&inv_l) {
                prev = (*v - mi * prev) * il;
                *v = prev;
            }
        }
        profile_whitened(&w, logdet, method, params)
    }

    /// The nugget share in `[0, eta_max]` that maximises the profiled
    /// likelihood of `design` at this range, with its evaluation: the
    /// likelihood on 13 equally spaced shares (both ends included), then
    /// Brent's search ([`crate::spatial::optimise::brent_min`], tolerance
    /// `1e-8`) between the neighbours of each local maximum of that grid (at
    /// most four, best first). Cost: about 13 + 12 per local maximum
    /// evaluations of `O(n p^2)`. Errors when no share has a finite
    /// likelihood (the first error is returned).
    pub fn best_eta(
        &self,
        design: usize,
        eta_max: f64,
        method: LikelihoodKind,
    ) -> Result<Profiled, LikelihoodError> {
        const GRID: usize = 12;
        let etas: Vec<f64> = (0..=GRID).map(|k| eta_max * k as f64 / GRID as f64).collect();
        let mut first_error = None;
        let mut best: Option<Profiled> = None;
        let mut keep = |r: Result<Profiled, LikelihoodError>, best: &mut Option<Profiled>| -> f64 {
            match r {
                Ok(p) => {
                    let v = p.loglik;
                    if best.as_ref().is_none_or(|b| v > b.loglik) {
                        *best = Some(p);
                    }
                    v
                }
                Err(e) => {
                    first_error.get_or_insert(e);
                    f64::NEG_INFINITY
                }
            }
        };
        let values: Vec<f64> =
            etas.iter().map(|&e| keep(self.profiled(design, e, method), &mut best)).collect();
        let mut peaks: Vec<usize> = (0..etas.len())
            .filter(|&k| {
                values[k].is_finite()
                    && (k == 0 || values[k - 1] <= values[k])
                    && (k == GRID || values[k + 1] <= values[k])
            })
            .collect();
        peaks.sort_by(|&a, &b| values[b].total_cmp(&values[a]));
        peaks.truncate(4);
        for k in peaks {
            let (a, b) = (etas[k.saturating_sub(1)], etas[(k + 1).min(GRID)]);
            if b <= a {
                continue;
            }
            let mut neg = |e: f64| -keep(self.profiled(design, e, method), &mut best);
            brent_min(&mut neg, (a, b), Some((etas[k], -values[k])), 1e-8, 100);
        }
        match best {
            Some(p) => Ok(p),
            None => Err(first_error
                .unwrap_or(LikelihoodError::Invalid("no nugget share has a finite likelihood".into()))),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::spatial::likelihood::profiled;
    use rand::{RngExt, SeedableRng};

    /// The eigen path and the tridiagonal path (two fixed parts rotated by
    /// one reduction) equal the Cholesky path to 1e-8 relative
    /// (log-likelihood, sigma², ln|V|, coefficients) at 20 random (range,
    /// nugget share) points per family, ML and REML.
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
                let one = &cols[..1];
                let t = Tridiagonal::new(&dist, family, range, &[&cols, one], &z).unwrap();
                for method in [LikelihoodKind::Ml, LikelihoodKind::Reml] {
                    let b = profiled(&dist, &CovParams { family, range, eta }, &cols, &z, method).unwrap();
                    let b1 = profiled(&dist, &CovParams { family, range, eta }, one, &z, method).unwrap();
                    for (a, b) in [
                        (s.profiled(eta, method).unwrap(), &b),
                        (t.profiled(0, eta, method).unwrap(), &b),
                        (t.profiled(1, eta, method).unwrap(), &b1),
                    ] {
                        let rel = |u: f64, v: f64| (u - v).abs() / v.abs().max(1e-300);
                        assert!(
                            rel(a.loglik, b.loglik) < 1e-8,
                            "{family} {range} {eta}: {} vs {}",
                            a.loglik,
                            b.loglik
                        );
                        assert!(rel(a.sigma2, b.sigma2) < 1e-8);
                        assert!(rel(a.logdet_v, b.logdet_v) < 1e-8 || (a.logdet_v - b.logdet_v).abs() < 1e-8);
                        for (u, v) in a.beta.iter().zip(&b.beta) {
                            assert!((u - v).abs() < 1e-8 * (1.0 + v.abs()));
                        }
                    }
                }
            }
        }
    }
}

#[cfg(test)]
mod profile_tests {
    use super::*;
    use crate::spatial::likelihood::profiled;

    /// `best_eta` finds the Cholesky path's own maximum over the nugget
    /// share: no share of a fine scan (2,001 Cholesky evaluations over
    /// `[0, 0.95]`) is higher than its value, and its share lies within one
    /// scan step of the scan's best; for data with noise (an interior
    /// optimum, where the slope of the Cholesky path's likelihood is zero)
    /// and without (the optimum at `eta = 0`).
    #[test]
    fn best_eta_is_the_maximum_over_the_share() {
        let n = 60;
        let x: Vec<f64> = (0..n).map(|i| (i % 10) as f64 * 0.5).collect();
        let yy: Vec<f64> = (0..n).map(|i| (i / 10) as f64 * 0.5).collect();
        let smooth: Vec<f64> = (0..n).map(|i| (x[i] * 0.6).sin() + 0.5 * (yy[i] * 0.8).cos()).collect();
        let noise: Vec<f64> = (0..n).map(|i| (((i * 37) % 23) as f64 / 23.0 - 0.5) * 2.0).collect();
        let dist = Distances::from_coords(&x, &yy).unwrap();
        let cols = vec![vec![1.0; n], x.clone()];
        let (mut interior, mut at_zero) = (0, 0);
        for z in [smooth.iter().zip(&noise).map(|(s, e)| s + e).collect::<Vec<f64>>(), smooth.clone()] {
            for method in [LikelihoodKind::Ml, LikelihoodKind::Reml] {
                let family = Family::Exponential;
                let range = 1.5;
                let t = Tridiagonal::new(&dist, family, range, &[&cols], &z).unwrap();
                let b = t.best_eta(0, 0.95, method).unwrap();
                let scan = |eta: f64| {
                    profiled(&dist, &CovParams { family, range, eta }, &cols, &z, method).unwrap().loglik
                };
                let step = 0.95 / 2000.0;
                let (arg, top) = (0..=2000)
                    .map(|k| (step * k as f64, scan(step * k as f64)))
                    .fold((0.0, f64::NEG_INFINITY), |a, b| if b.1 > a.1 { b } else { a });
                eprintln!("{method:?}: best_eta {} ({}), scan {arg} ({top})", b.params.eta, b.loglik);
                assert!(b.loglik >= top - 1e-10, "{method:?}: {} < scan {top}", b.loglik);
                assert!((b.params.eta - arg).abs() <= step, "{method:?}: eta {} vs scan {arg}", b.params.eta);
                if arg > 0.0 {
                    interior += 1;
                    let (e, h) = (b.params.eta, 1e-5);
                    let g = (scan(e + h) - scan(e - h)) / (2.0 * h);
                    assert!(g.abs() < 1e-3, "{method:?}: slope {g} at eta {e}");
                } else {
                    at_zero += 1;
                    assert_eq!(b.params.eta, 0.0, "{method:?}");
                }
            }
        }
        assert!(interior >= 1 && at_zero >= 1, "interior {interior}, at zero {at_zero}");
    }
}
