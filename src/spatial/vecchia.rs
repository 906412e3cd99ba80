//! The Vecchia (nearest-neighbour) approximation of the profiled Gaussian
//! likelihood of [`super::likelihood`], for studies too large for one dense
//! factorisation of `V`.
//!
//! The joint density of the observations in the max-min order
//! ([`super::vecchia_order`]) is the product of each one's density given all
//! earlier ones; the approximation conditions each on its `m` nearest
//! earlier ones `N(i)` only (Vecchia 1988, *JRSS B* 50: 297-312; the
//! nearest-neighbour Gaussian process of Datta, Banerjee, Finley & Gelfand
//! 2016, *JASA* 111: 800-812; the response-level form of Katzfuss & Guinness
//! 2021, *Statistical Science* 36: 124-141). With
//! `V = (1 - eta) R(range) + eta I` (the one kernel of
//! [`super::covariance::Kernel`]), for observation `i`:
//!
//! * `b_i = V_NN^-1 V_Ni`, `d_i = V_ii - V_iN b_i` (the conditional variance);
//! * the whitened value of a column `z` (the response and each column of
//!   `X`) is `w_i = (z_i - b_i' z_N) / sqrt(d_i)`, i.e. `w = U' z` with `U` the
//!   sparse inverse-Cholesky factor of the approximated `V` (`U U' = V~^-1`);
//! * `ln|V~| = sum_i ln d_i`.
//!
//! From `[Xw | yw]` and `ln|V~|` the profiled ML and REML log-likelihoods,
//! the GLS estimate, `(X'V~^-1 X)^-1` (hence SEs and Wald tests) and the
//! whitened residuals are computed by exactly the code of the dense path
//! (`likelihood::profile_whitened`, constants in its module docs),
//! so they all come from the same approximation. With `m = n - 1` nothing is
//! left out and the value equals the exact likelihood.
//!
//! Cost per evaluation: for each observation `m^2/2` correlation evaluations,
//! a Cholesky factorisation of the `m x m` `V_NN` (`m^3/3` flops) and
//! `m (p + 1)` for the whitening: `O(n m^3)` in all, in parallel over
//! contiguous chunks of the ordered observations (`std::thread::scope`, up
//! to 8 threads from 512 observations on, one inside
//! [`super::factor::sequential`]). Each observation's numbers are computed
//! alone and `ln|V~|` is summed in rank order afterwards, so the result does
//! not depend on the number of threads. Memory: `O(n m)` for the
//! conditioning sets and `n (p + 1)` for the whitened columns.
//!
//! A conditional variance whose square root is not above
//! [`CORRELATION_MIN_DIAGONAL`] (the tolerance of the dense factorisation)
//! is refused with the dense path's error: without a nugget, two pots at one
//! position leave the later one no variance of its own.

use super::covariance::{CovParams, Kernel};
use super::factor::{CORRELATION_MIN_DIAGONAL, FactorError, is_sequential};
use super::geometry::distance;
use super::likelihood::{
    Distances, LikelihoodError, LikelihoodKind, Maximum, Profiled, SearchOptions, check_params,
    check_sizes_n, maximise_by, profile_whitened,
};
pub use super::vecchia_order::{Conditioning, SetRule, maxmin_order};
use crate::spatial::correlation::Family;
use faer::Mat;

/// The default number of neighbours `m` of the model stage's fits.
/// Measured (`cargo bench --bench vecchia`, release build, docs/model.md
/// "Measured 2026-12-05: the accuracy target") on a regular field of 2,000
/// and 4,000 plots, at the exact ML optimum, in the form the model path
/// takes: at `m = 30` the Gaussian family without nugget (0.58 at 2,000) and
/// the Matérn 1.5 family with a nugget (0.79 at 4,000) missed the 0.5
/// log-likelihood target; at `m = 40` the exponential and Matérn 1.5
/// families with and without nugget are within 0.15 and the Gaussian
/// without nugget within 0.32, coefficients within 0.04 exact SEs, at about
/// 1.1 to 2 times the cost per evaluation of `m = 30`. The spherical family
/// and the Gaussian family with a nugget miss at every `m` measured (up to
/// 60): `crate::model::likelihood_path` keeps them exact where memory allows.
pub const DEFAULT_NEIGHBOURS: usize = 40;

/// Observations from which the evaluation is spread over threads.
const PARALLEL_FROM: usize = 512;

/// The whitened columns `[Xw | yw]` (`n x (p+1)`, rows in the max-min
/// order of `cond`) and `ln|V~|` of the Vecchia approximation at `params`.
/// `cols` holds the columns of `X` then `y`, in the observations' own order.
pub fn whiten_vecchia(
    cond: &Conditioning,
    params: &CovParams,
    cols: &[&[f64]],
) -> Result<(Mat<f64>, f64), LikelihoodError> {
    check_params(params)?;
    let n = cond.len();
    let c = cols.len();
    if cols.iter().any(|z| z.len() != n) {
        return Err(LikelihoodError::Invalid(format!("a column does not have the {n} observations")));
    }
    // columns in rank order, for locality
    let ranked: Vec<Vec<f64>> = cols.iter().map(|z| cond.order().iter().map(|&i| z[i]).collect()).collect();
    let threads = if is_sequential() || n < PARALLEL_FROM {
        1
    } else {
        std::thread::available_parallelism().map(|t| t.get()).unwrap_or(1).min(8)
    };
    let chunk = n.div_ceil(threads);
    let mut rows = vec![0.0; n * c];
    let mut logd = vec![0.0; n];
    let kernel = Kernel::correlation(params);
    let results: Vec<Result<(), LikelihoodError>> = if threads == 1 {
        vec![whiten_ranks(cond, &kernel, params, &ranked, 0, &mut rows, &mut logd)]
    } else {
        std::thread::scope(|s| {
            let handles: Vec<_> = rows
                .chunks_mut(chunk * c)
                .zip(logd.chunks_mut(chunk))
                .enumerate()
                .map(|(t, (r, l))| {
                    let ranked = &ranked;
                    let kernel = &kernel;
                    s.spawn(move || whiten_ranks(cond, kernel, params, ranked, t * chunk, r, l))
                })
                .collect();
            handles.into_iter().map(|h| h.join().expect("a whitening thread panicked")).collect()
        })
    };
    // the first failure in rank order, whatever the threads
    results.into_iter().collect::<Result<Vec<()>, _>>()?;
    let logdet: f64 = logd.iter().sum();
    Ok((Mat::from_fn(n, c, |i, j| rows[i * c + j]), logdet))
}

/// Workspace of [`conditional`], reused from one rank to the next.
#[derive(Default)]
pub(crate) struct ConditionalWork {
    /// `K_NN` and then its Cholesky factor (lower triangle, row-major).
    g: Vec<f64>,
    /// The coefficients `b_k`, in the order of `cond.set(k)`.
    pub(crate) b: Vec<f64>,
}

/// The Cholesky factor `G G' = K_NN` of a neighbour set's `q x q` covariance,
/// in place in the lower triangle of row-major `g`; a pivot whose square
/// root is NaN (negative or undefined) or not above
/// [`CORRELATION_MIN_DIAGONAL`] fails with the pot of `set` at that row and
/// the pivot.
pub(crate) fn small_cholesky(g: &mut [f64], q: usize, set: &[u32]) -> Result<(), (usize, f64)> {
    for j in 0..q {
        let d = g[j * q + j] - g[j * q..j * q + j].iter().map(|t| t * t).sum::<f64>();
        let l = d.sqrt();
        if l.is_nan() || l <= CORRELATION_MIN_DIAGONAL {
            return Err((set[j] as usize, d));
        }
        g[j * q + j] = l;
        let (head, tail) = g.split_at_mut((j + 1) * q);
        let row_j = &head[j * q..j * q + j];
        for row_i in tail.chunks_exact_mut(q) {
            let s: f64 = row_i[..j].iter().zip(row_j).map(|(a, b)| a * b).sum();
            row_i[j] = (row_i[j] - s) / l;
        }
    }
    Ok(())
}

/// The conditional of rank `k` of `cond` given its neighbour set `N(k)`
/// under `kernel`: the coefficients `b_k = K_NN^-1 K_Nk` into `work.b` and
/// the conditional variance `d_k = K_kk - K_kN b_k` returned (module docs;
/// the one computation of both Vecchia forms, this response-level one and
/// [`super::vecchia_latent`]). `K_NN` is factorised in place by an unblocked
/// Cholesky (`m` is small). A pivot, or `d_k`, whose square root is not above
/// [`CORRELATION_MIN_DIAGONAL`] (or is NaN) fails with the rank it belongs
/// to and its value.
pub(crate) fn conditional(
    cond: &Conditioning,
    kernel: &Kernel,
    k: usize,
    work: &mut ConditionalWork,
) -> Result<f64, (usize, f64)> {
    let set = cond.set(k);
    let q = set.len();
    let (xk, yk) = cond.position(k);
    let (g, v) = (&mut work.g, &mut work.b);
    g.clear();
    g.resize(q * q, 0.0);
    v.clear();
    // K_NN (lower triangle, row-major) and K_Nk, from the kept distances
    // when the conditioning has them (the same values)
    if let Some(dk) = cond.distances(k) {
        let (to_k, among) = dk.split_at(q);
        v.extend(to_k.iter().map(|&d| kernel.between(d)));
        for a in 0..q {
            g[a * q + a] = kernel.total;
            let row = &among[a * a.saturating_sub(1) / 2..][..a];
            for (gab, &d) in g[a * q..a * q + a].iter_mut().zip(row) {
                *gab = kernel.between(d);
            }
        }
    } else {
        for a in 0..q {
            let (xa, ya) = cond.position(set[a] as usize);
            v.push(kernel.between(distance(xk, yk, xa, ya)));
            g[a * q + a] = kernel.total;
            for b in 0..a {
                let (xb, yb) = cond.position(set[b] as usize);
                g[a * q + b] = kernel.between(distance(xa, ya, xb, yb));
            }
        }
    }
    // Cholesky K_NN = G G' in place (lower, row-major)
    small_cholesky(g, q, set)?;
    // G u = K_Nk (forward), d = K_kk - u'u, G' b = u (backward)
    for i in 0..q {
        let s: f64 = g[i * q..i * q + i].iter().zip(&v[..i]).map(|(a, b)| a * b).sum();
        v[i] = (v[i] - s) / g[i * q + i];
    }
    let d = kernel.total - v.iter().map(|t| t * t).sum::<f64>();
    if d.sqrt().is_nan() || d.sqrt() <= CORRELATION_MIN_DIAGONAL {
        return Err((k, d));
    }
    for i in (0..q).rev() {
        let s: f64 = (i + 1..q).map(|t| g[t * q + i] * v[t]).sum();
        v[i] = (v[i] - s) / g[i * q + i];
    }
    Ok(d)
}

/// The error of a failed [`conditional`] at `params`: the pot (original
/// index) whose pivot failed, as the dense factorisation reports it.
pub(super) fn conditional_error(
    cond: &Conditioning,
    params: &CovParams,
    (rank, pivot): (usize, f64),
) -> LikelihoodError {
    LikelihoodError::NotPositiveDefinite {
        family: params.family.name(),
        range: params.range,
        eta: params.eta,
        location: FactorError::NotPositiveDefinite {
            index: cond.order()[rank],
            pivot,
            min_diagonal: CORRELATION_MIN_DIAGONAL,
        },
    }
}

/// Whiten the ranks `k0 .. k0 + logd.len()`: row-major rows of `c` values
/// into `rows`, `ln d_k` into `logd`.
fn whiten_ranks(
    cond: &Conditioning,
    kernel: &Kernel,
    params: &CovParams,
    ranked: &[Vec<f64>],
    k0: usize,
    rows: &mut [f64],
    logd: &mut [f64],
) -> Result<(), LikelihoodError> {
    let c = ranked.len();
    let mut work = ConditionalWork::default();
    for (off, ld) in logd.iter_mut().enumerate() {
        let k = k0 + off;
        let d = conditional(cond, kernel, k, &mut work).map_err(|e| conditional_error(cond, params, e))?;
        let (set, v) = (cond.set(k), &work.b);
        let sd = d.sqrt();
        for (j, z) in ranked.iter().enumerate() {
            let pred: f64 = set.iter().zip(v).map(|(&r, b)| b * z[r as usize]).sum();
            rows[off * c + j] = (z[k] - pred) / sd;
        }
        *ld = d.ln();
    }
    Ok(())
}

/// The profiled ML or REML log-likelihood of the Vecchia approximation at
/// `params` (see the module docs), with what the GLS needs. `x` holds the
/// columns of `X`. The whitened residuals are returned in the observations'
/// own order: entry `i` is observation `i`'s residual given its neighbours,
/// divided by its conditional standard deviation (not by sigma).
pub fn profiled_vecchia(
    cond: &Conditioning,
    params: &CovParams,
    x: &[Vec<f64>],
    y: &[f64],
    method: LikelihoodKind,
) -> Result<Profiled, LikelihoodError> {
    check_sizes_n(cond.len(), x, y)?;
    let mut cols: Vec<&[f64]> = x.iter().map(Vec::as_slice).collect();
    cols.push(y);
    let (w, logdet) = whiten_vecchia(cond, params, &cols)?;
    let mut prof = profile_whitened(&w, logdet, method, *params)?;
    let mut own = vec![0.0; cond.len()];
    for (k, &i) in cond.order().iter().enumerate() {
        own[i] = prof.whitened[k];
    }
    prof.whitened = own;
    Ok(prof)
}

/// Maximise the Vecchia likelihood over `(ln range, eta)` by the search of
/// [`super::likelihood::maximise_by`] (the same starts, bounds and simplex as
/// the exact path; `dist` sets the range bounds and start ranges). The
/// `factorisations` of the result count dense factorisations only: zero here.
/// The model stage uses the derivative-based search of
/// [`super::vecchia_search`]; this simplex is its reference in tests and
/// `benches/vecchia_search.rs`.
pub fn maximise_vecchia(
    dist: &Distances,
    cond: &Conditioning,
    family: Family,
    x: &[Vec<f64>],
    y: &[f64],
    method: LikelihoodKind,
    opts: &SearchOptions,
) -> Result<Maximum, LikelihoodError> {
    check_sizes_n(cond.len(), x, y)?;
    if dist.len() != cond.len() {
        return Err(LikelihoodError::Invalid("the distances and the conditioning disagree on n".into()));
    }
    maximise_by(dist, family, opts, |p| profiled_vecchia(cond, p, x, y, method))
}

#[cfg(test)]
#[path = "vecchia_tests.rs"]
mod tests;
