//! The one dense factorisation path of the crate, on faer: the Cholesky
//! factor of a symmetric positive definite matrix with a located error
//! (which pivot failed and its value), whitening (a triangular solve with
//! many right-hand sides), the log-determinant and solves; and the
//! Householder QR of a design with the crate's one rank tolerance
//! ([`RANK_TOLERANCE`]).
//!
//! Everything that factorises a covariance (the likelihood, GLS, kriging,
//! the imputations and the field simulator) or a design (OLS, the aliasing
//! check of the design, variance inflation) calls this module, so that a
//! tolerance means the same thing everywhere and a failure says where it
//! happened.
//!
//! # Tolerances (stated once)
//! * A Cholesky pivot `d_j = a_jj - sum_k l_jk^2` is accepted when it is
//!   finite and the factor's diagonal `l_jj = sqrt(d_j)` is above `min_diagonal`;
//!   the caller chooses `min_diagonal` and says why (see
//!   [`CORRELATION_MIN_DIAGONAL`] and [`small_spd`]).
//! * A design column is aliased when `|r_jj| <= RANK_TOLERANCE ||x_j||`, `r_jj`
//!   the diagonal of the QR of the columns up to `j` (the length of what is
//!   left of the column after projecting out the ones before it; Björck 1996,
//!   *Numerical Methods for Least Squares Problems*, §2.4 and §2.7).

#![allow(non_snake_case)]

use faer::linalg::cholesky::llt::factor::{LltRegularization, cholesky_in_place, cholesky_in_place_scratch};
use faer::linalg::triangular_solve::{solve_lower_triangular_in_place, solve_upper_triangular_in_place};
use faer::{Mat, MatRef, Par};
use std::cell::Cell;

thread_local! {
    /// Factorisations of an observations' covariance on this thread (for the run's
    /// timing table: a fit runs on one thread, so the difference of two
    /// readings around it is its count whatever other threads do).
    static FACTORISATIONS: Cell<u64> = const { Cell::new(0) };
    /// Whether factorisations on this thread stay single-threaded (set by
    /// callers that already run one fit per thread).
    static SEQUENTIAL: Cell<bool> = const { Cell::new(false) };
}

/// Factorisations of an observations' covariance (the likelihood's `V`)
/// counted on the calling thread so far (see [`count_factorisation`]).
pub fn factorisations_on_this_thread() -> u64 {
    FACTORISATIONS.with(Cell::get)
}

/// Count one factorisation of an observations' covariance on the calling
/// thread (called by the likelihood paths, not by the small `p x p` systems).
pub fn count_factorisation() {
    FACTORISATIONS.with(|c| c.set(c.get() + 1));
}

/// Run `f` with every factorisation and whitening of the calling thread kept
/// single-threaded: for callers that spread independent fits over threads
/// (threads across fits pay; threads inside a factorisation of a few hundred
/// rows mostly wait on each other).
pub fn sequential<T>(f: impl FnOnce() -> T) -> T {
    let before = SEQUENTIAL.with(|s| s.replace(true));
    let out = f();
    SEQUENTIAL.with(|s| s.set(before));
    out
}

/// Whether the calling thread runs inside [`sequential`].
pub fn is_sequential() -> bool {
    SEQUENTIAL.with(Cell::get)
}

/// Below this order a factorisation, an inverse or a whitening runs on the
/// calling thread: measured with `cargo bench --bench gls` on the 2-core
/// machine (2026-12-05), a whole exponential fit with a nugget (ML) at
/// n = 480 took 0.138 s with its factorisations and inverses on faer's
/// thread pool and 0.080 to 0.087 s on one thread (the pool's wake-ups cost
/// more than the parallel work saved), while at n = 1,680 the pool paid
/// (1.63 against 2.05 s).
pub const PARALLEL_FROM: usize = 1_000;

/// The parallelism of a dense kernel of order `n` on the calling thread:
/// faer's thread pool from [`PARALLEL_FROM`] on unless [`sequential`] asked
/// for one thread.
fn par_for(n: usize) -> Par {
    if n < PARALLEL_FROM || SEQUENTIAL.with(Cell::get) { Par::Seq } else { Par::rayon(0) }
}

/// Smallest accepted diagonal entry `l_jj` of the factor of a correlation
/// matrix (unit diagonal): `l_jj <= 1e-7` (a pivot below `1e-14`, a hundred
/// times the double-precision epsilon) means the matrix is numerically
/// singular (common practice).
pub const CORRELATION_MIN_DIAGONAL: f64 = 1e-7;

/// Relative tolerance of [`small_spd`]: a pivot at or below `1e-11` times the
/// largest diagonal entry (or its own diagonal entry, if larger) counts as zero.
pub const SMALL_SPD_RELATIVE_PIVOT: f64 = 1e-11;

/// The rank tolerance of every least-squares fit and aliasing check: a column
/// whose remainder after projection on the earlier columns is at most `1e-9`
/// of its length is aliased (common practice for double precision designs
/// of moderate size).
pub const RANK_TOLERANCE: f64 = 1e-9;

/// Where a factorisation failed.
#[derive(Debug, Clone, Copy, PartialEq, thiserror::Error)]
pub enum FactorError {
    /// The pivot at `index` (0-based) is not positive, or its square root is
    /// not above the tolerance.
    #[error(
        "pivot {index} of the Cholesky factorisation is {pivot:e} (its square root must exceed {min_diagonal:e})"
    )]
    NotPositiveDefinite {
        /// Row and column of the failed pivot, 0-based.
        index: usize,
        /// Its value `d_j` as computed (NaN when the matrix holds a value that is not finite).
        pivot: f64,
        /// The tolerance on `sqrt(d_j)` it failed.
        min_diagonal: f64,
    },
    /// Column `index` (0-based) is aliased with the columns before it.
    #[error(
        "column {index} is a linear combination of the columns before it (|r| = {remainder:e} of its length)"
    )]
    Aliased {
        /// The aliased column, 0-based.
        index: usize,
        /// `|r_jj| / ||x_j||`.
        remainder: f64,
    },
}

/// The lower Cholesky factor `L` of an `n x n` symmetric positive definite
/// matrix `A = L L'`.
#[derive(Clone, Debug)]
pub struct Cholesky {
    l: Mat<f64>,
}

impl Cholesky {
    /// Factorise `a`, of which only the lower triangle is read (the upper
    /// triangle of the factor is zeroed). A pivot that is not positive, or
    /// whose square root `l_jj` is not above `min_diagonal`, is an error naming
    /// its index and value.
    ///
    /// Cost: `n^3/3` flops, blocked, on faer's threads from [`PARALLEL_FROM`] on.
    pub fn new(mut a: Mat<f64>, min_diagonal: f64) -> Result<Cholesky, FactorError> {
        let n = a.nrows();
        debug_assert_eq!(n, a.ncols());
        if n == 0 {
            return Ok(Cholesky { l: a });
        }
        let par = par_for(n);
        let mut mem =
            faer::dyn_stack::MemBuffer::new(cholesky_in_place_scratch::<f64>(n, par, Default::default()));
        let stack = faer::dyn_stack::MemStack::new(&mut mem);
        if let Err(faer::linalg::cholesky::llt::factor::LltError::NonPositivePivot { index }) =
            cholesky_in_place(a.as_mut(), LltRegularization::default(), par, stack, Default::default())
        {
            return Err(FactorError::NotPositiveDefinite { index, pivot: a[(index, index)], min_diagonal });
        }
        for i in 0..n {
            // l_ii^2 is the pivot d_i
            let d = a[(i, i)] * a[(i, i)];
            if a[(i, i)].is_nan() || a[(i, i)] <= min_diagonal {
                return Err(FactorError::NotPositiveDefinite { index: i, pivot: d, min_diagonal });
            }
        }
        for j in 0..n {
            for i in 0..j {
                a[(i, j)] = 0.0;
            }
        }
        Ok(Cholesky { l: a })
    }

    /// The factor `L`.
    pub fn l(&self) -> MatRef<'_, f64> {
        self.l.as_ref()
    }

    /// The factor, owned.
    pub fn into_l(self) -> Mat<f64> {
        self.l
    }

    /// Order `n`.
    pub fn dim(&self) -> usize {
        self.l.nrows()
    }

    /// `ln|A| = 2 sum ln l_ii`. Cost O(n).
    pub fn logdet(&self) -> f64 {
        2.0 * (0..self.dim()).map(|i| self.l[(i, i)].ln()).sum::<f64>()
    }

    /// Whiten in place: `B <- L^-1 B` (`B` is `n x k`). Cost `n^2 k` flops.
    pub fn whiten(&self, b: &mut Mat<f64>) {
        whiten(self.l.as_ref(), b);
    }

    /// Solve `A X = B` in place (`L^-1` then `L^-T`). Cost `2 n^2 k` flops.
    pub fn solve(&self, b: &mut Mat<f64>) {
        let par = par_for(self.dim());
        solve_lower_triangular_in_place(self.l.as_ref(), b.as_mut(), par);
        solve_upper_triangular_in_place(self.l.transpose(), b.as_mut(), par);
    }

    /// Solve `L' x = z` in place (a draw with covariance `A^-1` from standard
    /// normal `z`). Cost `n^2 k` flops.
    pub fn solve_transposed(&self, b: &mut Mat<f64>) {
        solve_upper_triangular_in_place(self.l.transpose(), b.as_mut(), Par::Seq);
    }

    /// The lower triangle of `A^-1 = L^-T L^-1` (the strict upper triangle
    /// is left zero): the triangular inverse then a triangular product,
    /// about `2 n^3 / 3` flops (twice a factorisation), on faer's threads from
    /// [`PARALLEL_FROM`] on unless [`sequential`].
    pub fn inverse_lower(&self) -> Mat<f64> {
        let n = self.dim();
        let mut out = Mat::<f64>::zeros(n, n);
        let par = par_for(n);
        let mut mem = faer::dyn_stack::MemBuffer::new(
            faer::linalg::cholesky::llt::inverse::inverse_scratch::<f64>(n, par),
        );
        let stack = faer::dyn_stack::MemStack::new(&mut mem);
        faer::linalg::cholesky::llt::inverse::inverse(out.as_mut(), self.l.as_ref(), par, stack);
        for j in 0..n {
            for i in 0..j {
                out[(i, j)] = 0.0;
            }
        }
        out
    }

    /// `A^-1`, `n x n`. Cost `n^3` flops (for small systems).
    pub fn inverse(&self) -> Mat<f64> {
        let mut inv = Mat::<f64>::identity(self.dim(), self.dim());
        self.solve(&mut inv);
        inv
    }
}

/// Solve `L Z = B` in place (`B` is `n x k`), `L` lower triangular.
pub fn whiten(l: MatRef<'_, f64>, b: &mut Mat<f64>) {
    solve_lower_triangular_in_place(l, b.as_mut(), par_for(l.nrows()));
}

/// Inverse and log-determinant of a small dense symmetric positive definite
/// `p x p` matrix (row-major) through [`Cholesky`], with the relative pivot
/// tolerance [`SMALL_SPD_RELATIVE_PIVOT`] (times the largest diagonal entry,
/// or the pivot's own diagonal entry if larger). Returns the inverse
/// (row-major) and `ln|A|`, or `None` when a pivot fails. Cost `p^3` flops.
pub fn small_spd(a: &[f64], p: usize) -> Option<(Vec<f64>, f64)> {
    let scale = (0..p).map(|i| a[i * p + i].abs()).fold(0.0, f64::max).max(f64::MIN_POSITIVE);
    let m = Mat::from_fn(p, p, |i, j| a[i * p + j]);
    let c = Cholesky::new(m, 0.0).ok()?;
    for j in 0..p {
        let d = c.l[(j, j)] * c.l[(j, j)];
        if d <= SMALL_SPD_RELATIVE_PIVOT * scale.max(a[j * p + j]) {
            return None;
        }
    }
    let inv = c.inverse();
    Some(((0..p * p).map(|k| inv[(k / p, k % p)]).collect(), c.logdet()))
}

/// The bordered (saddle-point) system of kriging with a drift,
/// `[K F; F' 0] [lambda; mu] = [k; f]`, `K` (`n x n`) symmetric positive
/// definite and `F` (`n x p`) of full column rank, solved through the
/// Cholesky factor of `K` and the Cholesky factor of the Schur complement
/// `S = F' K^-1 F` (`p x p`) of the drift block: `mu = S^-1 (F' K^-1 k - f)`,
/// `lambda = K^-1 (k - F mu)` (Cressie 1993, *Statistics for Spatial Data*,
/// §3.4.1; Chilès & Delfiner 2012, *Geostatistics*, 2nd ed., §3.4; Golub & Van
/// Loan 2013, §4.4 on block elimination). With `p = 0` it is `K lambda = k`.
///
/// Cost: `n^3/3 + 2 n^2 p` flops once, then `2 n^2 m + O(n p m)` per `m`
/// right-hand sides.
#[derive(Clone, Debug)]
pub struct Bordered {
    k: Cholesky,
    f: Mat<f64>,
    /// `K^-1 F`, `n x p`.
    kinv_f: Mat<f64>,
    /// Cholesky factor of `F' K^-1 F`.
    schur: Option<Cholesky>,
}

impl Bordered {
    /// Factorise `K` (lower triangle read) and `S = F' K^-1 F`. Any positive
    /// pivot is accepted (`min_diagonal = 0`): the callers make `K` regular
    /// with a nugget where positions coincide, and `F` is checked to have full
    /// rank before. An error locates the failed pivot (in `K`, or in `S` with
    /// index `n + j`).
    pub fn new(k: Mat<f64>, f: Mat<f64>) -> Result<Bordered, FactorError> {
        let n = k.nrows();
        let k = Cholesky::new(k, 0.0)?;
        let p = f.ncols();
        let mut kinv_f = f.clone();
        let schur = if p > 0 {
            k.solve(&mut kinv_f);
            let s = f.transpose() * &kinv_f;
            Some(Cholesky::new(s, 0.0).map_err(|e| match e {
                FactorError::NotPositiveDefinite { index, pivot, min_diagonal } => {
                    FactorError::NotPositiveDefinite { index: n + index, pivot, min_diagonal }
                }
                other => other,
            })?)
        } else {
            None
        };
        Ok(Bordered { k, f, kinv_f, schur })
    }

    /// Order of `K`.
    pub fn n(&self) -> usize {
        self.k.dim()
    }

    /// Columns of `F`.
    pub fn p(&self) -> usize {
        self.f.ncols()
    }

    /// Solve for `m` right-hand sides: `top` is `k` (`n x m`), `bottom` is `f`
    /// (`p x m`); returns `(lambda, mu)`.
    pub fn solve(&self, top: &Mat<f64>, bottom: &Mat<f64>) -> (Mat<f64>, Mat<f64>) {
        let mut a = top.clone();
        self.k.solve(&mut a);
        match &self.schur {
            None => (a, Mat::zeros(0, top.ncols())),
            Some(s) => {
                let mut mu = self.f.transpose() * &a - bottom;
                s.solve(&mut mu);
                let lambda = a - &self.kinv_f * &mu;
                (lambda, mu)
            }
        }
    }
}

/// The QR factorisation of a design: columns `x` (each of length `n`) and an
/// optional response `y` appended as the last column.
struct DesignQr {
    /// Upper triangular `R`, `(p + 1) x (p + 1)` with `y`, `p x p` without.
    r: Mat<f64>,
}

fn design_qr(x: &[&[f64]], y: Option<&[f64]>) -> DesignQr {
    let n = x.first().map_or(y.map_or(0, <[f64]>::len), |c| c.len());
    let k = x.len() + usize::from(y.is_some());
    let a = Mat::from_fn(n, k, |i, j| if j < x.len() { x[j][i] } else { y.expect("the last column")[i] });
    let qr = a.qr();
    let size = n.min(k);
    let mut r = Mat::<f64>::zeros(k, k);
    let rr = qr.thin_R();
    for i in 0..size {
        for j in i..k {
            r[(i, j)] = rr[(i, j)];
        }
    }
    DesignQr { r }
}

/// Columns of `x` (each of length `n`) that are aliased with the columns
/// before them, by [`RANK_TOLERANCE`]: the columns are taken in order, an
/// aliased column is reported and left out of the basis for the later ones.
/// Cost: one QR of `n x j` per column `j`, `O(n p^3)` in all (p is small).
pub fn aliased_columns(x: &[Vec<f64>]) -> Vec<usize> {
    let mut kept: Vec<&[f64]> = Vec::new();
    let mut out = Vec::new();
    for (j, col) in x.iter().enumerate() {
        let norm0 = col.iter().map(|a| a * a).sum::<f64>().sqrt();
        let r = design_qr(&kept, Some(col)).r;
        let k = kept.len();
        let rem = if k < col.len() { r[(k, k)].abs() } else { 0.0 };
        if norm0 == 0.0 || rem <= RANK_TOLERANCE * norm0 {
            out.push(j);
        } else {
            kept.push(col);
        }
    }
    out
}

/// A least-squares fit `y ~ X` by Householder QR of `[X | y]` (Golub & Van
/// Loan 2013, *Matrix Computations*, §5.3): `R beta = Q'y`, `RSS = r_yy^2`
/// (the last diagonal entry of `R`), `(X'X)^-1 = R^-1 R^-T`.
#[derive(Clone, Debug)]
pub struct LeastSquares {
    /// Coefficients.
    pub beta: Vec<f64>,
    /// Residual sum of squares.
    pub rss: f64,
    /// `(X'X)^-1`, `p x p`, row-major.
    pub xtx_inv: Vec<f64>,
    /// `ln|X'X| = 2 sum ln |r_jj|`.
    pub logdet_xtx: f64,
}

/// Fit `y ~ X` by least squares (`x` by columns). A column aliased with the
/// ones before it ([`RANK_TOLERANCE`], as [`aliased_columns`]) is an error
/// naming it. Cost `O(n p^2)`.
pub fn least_squares(x: &[Vec<f64>], y: &[f64]) -> Result<LeastSquares, FactorError> {
    let p = x.len();
    let n = y.len();
    let cols: Vec<&[f64]> = x.iter().map(Vec::as_slice).collect();
    let r = design_qr(&cols, Some(y)).r;
    for (j, col) in x.iter().enumerate() {
        let norm0 = col.iter().map(|a| a * a).sum::<f64>().sqrt();
        let rem = if j < n { r[(j, j)].abs() } else { 0.0 };
        if norm0 == 0.0 || rem <= RANK_TOLERANCE * norm0 {
            return Err(FactorError::Aliased {
                index: j,
                remainder: if norm0 > 0.0 { rem / norm0 } else { 0.0 },
            });
        }
    }
    let rss = if p < n { r[(p, p)] * r[(p, p)] } else { 0.0 };
    let rp = r.as_ref().submatrix(0, 0, p, p);
    let mut beta = Mat::from_fn(p, 1, |i, _| r[(i, p)]);
    solve_upper_triangular_in_place(rp, beta.as_mut(), Par::Seq);
    // R^-1 by a triangular solve on the identity, then R^-1 R^-T.
    let mut rinv = Mat::<f64>::identity(p, p);
    solve_upper_triangular_in_place(rp, rinv.as_mut(), Par::Seq);
    let inv = &rinv * rinv.transpose();
    Ok(LeastSquares {
        beta: (0..p).map(|i| beta[(i, 0)]).collect(),
        rss,
        xtx_inv: (0..p * p).map(|k| inv[(k / p, k % p)]).collect(),
        logdet_xtx: 2.0 * (0..p).map(|j| r[(j, j)].abs().ln()).sum::<f64>(),
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    /// A 3 x 3 matrix factorised by hand: `A = L L'` with
    /// `L = [[2, 0, 0], [1, 3, 0], [-1, 2, 1]]`, so `ln|A| = 2 ln 6`.
    #[test]
    fn cholesky_reconstructs_a_hand_factor() {
        let l = [[2.0, 0.0, 0.0], [1.0, 3.0, 0.0], [-1.0, 2.0, 1.0]];
        let a = Mat::from_fn(3, 3, |i, j| (0..3).map(|k| l[i][k] * l[j][k]).sum::<f64>());
        let c = Cholesky::new(a.clone(), 0.0).unwrap();
        for (i, row) in l.iter().enumerate() {
            for (j, want) in row.iter().enumerate() {
                assert_relative_eq!(c.l()[(i, j)], *want, epsilon = 1e-14);
            }
        }
        assert_relative_eq!(c.logdet(), 2.0 * 6f64.ln(), epsilon = 1e-14);
        let inv = c.inverse();
        let id = &a * &inv;
        for i in 0..3 {
            for j in 0..3 {
                assert_relative_eq!(id[(i, j)], f64::from(u8::from(i == j)), epsilon = 1e-13);
            }
        }
    }

    /// A singular correlation matrix (two equal rows) fails at pivot 1 with
    /// its value.
    #[test]
    fn failed_pivot_is_located() {
        let a = Mat::from_fn(3, 3, |i, j| if i == j || (i < 2 && j < 2) { 1.0 } else { 0.3 });
        let e = Cholesky::new(a, CORRELATION_MIN_DIAGONAL).unwrap_err();
        match e {
            FactorError::NotPositiveDefinite { index, pivot, .. } => {
                assert_eq!(index, 1);
                assert!(pivot.abs() < 1e-12, "{pivot}");
            }
            other => panic!("{other:?}"),
        }
    }

    /// The bordered solve equals a dense solve of the whole saddle-point
    /// system: ordinary kriging of the 1-D toy of REFERENCE.md §4.4
    /// (x = 0, 1, 3, target 2, C(h) = exp(-|h|)): weights 0.115704,
    /// 0.420865, 0.463430.
    #[test]
    fn bordered_solve_matches_the_toy() {
        let x = [0.0f64, 1.0, 3.0];
        let k = Mat::from_fn(3, 3, |i, j| (-(x[i] - x[j]).abs()).exp());
        let f = Mat::from_fn(3, 1, |_, _| 1.0);
        let b = Bordered::new(k, f).unwrap();
        let top = Mat::from_fn(3, 1, |i, _| (-(x[i] - 2.0f64).abs()).exp());
        let bottom = Mat::from_fn(1, 1, |_, _| 1.0);
        let (l, _) = b.solve(&top, &bottom);
        for (i, want) in [0.115704, 0.420865, 0.463430].iter().enumerate() {
            assert!((l[(i, 0)] - want).abs() < 1e-6, "{} vs {want}", l[(i, 0)]);
        }
        assert_relative_eq!(l[(0, 0)] + l[(1, 0)] + l[(2, 0)], 1.0, epsilon = 1e-14);
    }

    /// Least squares through three points (hand): y = 1, 2, 2 at x = 0, 1, 2
    /// gives beta = (7/6, 1/2), RSS = 1/6, (X'X)^-1 = [[5/6, -1/2], [-1/2, 1/2]].
    #[test]
    fn least_squares_line_through_three_points() {
        let x = vec![vec![1.0; 3], vec![0.0, 1.0, 2.0]];
        let f = least_squares(&x, &[1.0, 2.0, 2.0]).unwrap();
        assert_relative_eq!(f.beta[0], 7.0 / 6.0, epsilon = 1e-14);
        assert_relative_eq!(f.beta[1], 0.5, epsilon = 1e-14);
        assert_relative_eq!(f.rss, 1.0 / 6.0, epsilon = 1e-14);
        let want = [5.0 / 6.0, -0.5, -0.5, 0.5];
        for (a, b) in f.xtx_inv.iter().zip(want) {
            assert_relative_eq!(*a, b, epsilon = 1e-14);
        }
    }

    /// A nearly aliased column (below the rank tolerance) is an error naming
    /// it, and the aliasing check finds the same column.
    #[test]
    fn aliased_column_is_named() {
        let a = vec![1.0, 1.0, 1.0, 1.0];
        let b = vec![0.0, 1.0, 2.0, 3.0];
        let c: Vec<f64> = a.iter().zip(&b).map(|(u, v)| 2.0 * u - v + 1e-12 * v * v).collect();
        let x = vec![a, b, c];
        assert_eq!(aliased_columns(&x), vec![2]);
        match least_squares(&x, &[1.0, 2.0, 0.0, 5.0]).unwrap_err() {
            FactorError::Aliased { index, .. } => assert_eq!(index, 2),
            other => panic!("{other:?}"),
        }
    }
}
