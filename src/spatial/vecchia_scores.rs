//! The scores and Fisher information of the response-level Vecchia
//! likelihood ([`super::vecchia`]) in `t = (ln range, eta)`, for the search
//! of [`super::vecchia_search`], and the evaluation of several fixed parts
//! at one set of conditionals.
//!
//! Each rank `k` (module docs of [`super::vecchia`]) has `b = K_NN^-1 K_Nk`
//! and `d = K_kk - K_kN b`. For a parameter `t_j`, with `dK` the derivative of
//! the kernel entries (`(1 - eta) D` in `ln range`, `D` the derivative of the
//! correlation in the log range,
//! [`super::covariance::dcorrelation_dlog_range`]; `-rho` in `eta`; zero on
//! the diagonal) and `r_j = dK_Nk - dK_NN b`:
//!
//! * `db_j = K_NN^-1 r_j`, `dd_j = -(dK_Nk' b + b' r_j)`;
//! * the whitened value `w = (z_k - b'z_N) / sqrt(d)` of a column `z` moves by
//!   `dw_j = -(db_j' z_N) / sqrt(d) - w dd_j / (2 d)`.
//!
//! From the whitened `[Xw | yw]`, its derivatives and `ln|V~| = sum ln d`,
//! with `Q` the whitened residual sum of squares and `A = Xw'Xw` (by the
//! envelope theorem `dQ_j = 2 r_w' (dyw_j - dXw_j beta)`, `r_w` the whitened
//! residual; Harville 1977, *JASA* 72: 320-338, §3-4):
//!
//! * ML: `dl/dt_j = -(n/2) dQ_j / Q - (1/2) sum_k dd_j / d`;
//! * REML: `dl/dt_j = -((n-p)/2) dQ_j / Q - (1/2) sum_k dd_j / d - tr(A^-1 Xw' dXw_j)`.
//!
//! The curvature is the Fisher information of the product of conditionals,
//! each `N(b'z_N, sigma2 d)`: per rank `(1/2) dd_i dd_j / d^2 + db_i' K_NN
//! db_j / d` (`K_NN db_j = r_j`, so no product with `K_NN` is formed; the
//! Fisher scoring of the Vecchia likelihood of Guinness 2021, *Statistics
//! and Computing* 31: 25), with `ln sigma2` profiled out by its Schur
//! complement (`I_tt - s s' / (2 n)`, `s_j = sum_k dd_j / d`). It is the
//! Newton metric of [`super::ascent`]'s search; only the step depends on it,
//! the fixed point is the maximum of the scores above.
//!
//! Cost of one scored evaluation: the conditionals of a plain evaluation
//! (`q^2/2` correlations, a `q x q` Cholesky) and per parameter `q^2` for
//! `dK_NN b`, two triangular solves and `q (p + 1)` for the whitening: about
//! twice a plain one at `m = 30`. Parallel over chunks of ranks like
//! [`super::vecchia::whiten_vecchia`]; every sum is taken in rank order after
//! the threads, so the result does not depend on their number.

use super::ascent::Scored;
use super::correlation::Family;
use super::covariance::{CovParams, dcorrelation_dlog_range};
use super::factor::{CORRELATION_MIN_DIAGONAL, is_sequential};
use super::likelihood::{
    LikelihoodError, LikelihoodKind, Profiled, check_params, check_sizes_n, profile_whitened,
};
use super::vecchia::{Conditioning, conditional_error, whiten_vecchia};
use faer::Mat;

/// Ranks from which a scored evaluation is spread over threads.
const PARALLEL_FROM: usize = 512;

/// One rank's numbers of a scored evaluation.
struct RankScore {
    d: f64,
    dd: [f64; 2],
    /// Information contributions `(0,0)`, `(0,1)`, `(1,1)`.
    info: [f64; 3],
}

/// Workspace of [`conditional_scored`], reused from one rank to the next.
#[derive(Default)]
struct ScoredWork {
    /// `K_NN`, then its Cholesky factor (lower, row-major).
    g: Vec<f64>,
    /// `dK_NN` per parameter (strict lower triangle, row-major).
    dk: [Vec<f64>; 2],
    /// `b`.
    b: Vec<f64>,
    /// `dK_Nk` per parameter, then `r_j`, then `db_j` (in place).
    db: [Vec<f64>; 2],
    /// `r_j` kept for the information.
    r: [Vec<f64>; 2],
}

/// The correlation `rho(d)` and its derivative in `ln range`
/// ([`dcorrelation_dlog_range`]); one exponential for the exponential and
/// Matérn 1.5 families. `rho` is [`Family::correlation`] itself, so the
/// plain and scored evaluations agree to the bit.
#[inline]
fn rho_dlog(family: Family, d: f64, range: f64) -> (f64, f64) {
    let rho = family.correlation(d, range);
    let h = d / range;
    let dl = match family {
        Family::Exponential | Family::Matern { nu: 0.5 } => h * rho,
        Family::Matern { nu: 1.5 } => {
            // s^2 e^-s = rho s^2 / (1 + s)
            let s = 3f64.sqrt() * h;
            rho * s * s / (1.0 + s)
        }
        _ => dcorrelation_dlog_range(family, d, range, rho),
    };
    (rho, dl)
}

/// Solve `G G' x = x` in place (`G` lower, row-major `q x q`).
fn chol_solve(g: &[f64], q: usize, x: &mut [f64]) {
    for i in 0..q {
        let s: f64 = g[i * q..i * q + i].iter().zip(&x[..i]).map(|(a, b)| a * b).sum();
        x[i] = (x[i] - s) / g[i * q + i];
    }
    for i in (0..q).rev() {
        let s: f64 = (i + 1..q).map(|t| g[t * q + i] * x[t]).sum();
        x[i] = (x[i] - s) / g[i * q + i];
    }
}

/// The conditional of rank `k` with its derivatives in the first `dim`
/// parameters (module docs): `b` into `w.b`, `db_j` into `w.db[j]`. Fails as
/// [`super::vecchia::conditional`] does, on the same pivots.
fn conditional_scored(
    cond: &Conditioning,
    params: &CovParams,
    dim: usize,
    k: usize,
    w: &mut ScoredWork,
) -> Result<RankScore, (usize, f64)> {
    let set = cond.set(k);
    let q = set.len();
    let (family, range, s1) = (params.family, params.range, 1.0 - params.eta);
    let ScoredWork { g, dk, b, db, r } = w;
    g.clear();
    g.resize(q * q, 0.0);
    b.clear();
    for j in 0..2 {
        dk[j].clear();
        dk[j].resize(q * q, 0.0);
        db[j].clear();
        r[j].clear();
    }
    let kept = cond.distances(k);
    let (xk, yk) = cond.position(k);
    let pos = |t: usize| cond.position(set[t] as usize);
    for a in 0..q {
        let da = match kept {
            Some(kd) => kd[a],
            None => {
                let (xa, ya) = pos(a);
                super::geometry::distance(xk, yk, xa, ya)
            }
        };
        let (rho, dl) = rho_dlog(family, da, range);
        b.push(s1 * rho);
        db[0].push(s1 * dl);
        db[1].push(-rho);
        g[a * q + a] = 1.0;
        for c in 0..a {
            let dac = match kept {
                Some(kd) => kd[q + a * a.saturating_sub(1) / 2 + c],
                None => {
                    let ((xa, ya), (xc, yc)) = (pos(a), pos(c));
                    super::geometry::distance(xa, ya, xc, yc)
                }
            };
            let (rho, dl) = rho_dlog(family, dac, range);
            g[a * q + c] = s1 * rho;
            dk[0][a * q + c] = s1 * dl;
            dk[1][a * q + c] = -rho;
        }
    }
    // Cholesky K_NN = G G' in place
    super::vecchia::small_cholesky(g, q, set)?;
    // b = K_NN^-1 K_Nk by the forward then backward solve; d from the forward half
    for i in 0..q {
        let s: f64 = g[i * q..i * q + i].iter().zip(&b[..i]).map(|(a, c)| a * c).sum();
        b[i] = (b[i] - s) / g[i * q + i];
    }
    let d = 1.0 - b.iter().map(|t| t * t).sum::<f64>();
    if d.sqrt().is_nan() || d.sqrt() <= CORRELATION_MIN_DIAGONAL {
        return Err((k, d));
    }
    for i in (0..q).rev() {
        let s: f64 = (i + 1..q).map(|t| g[t * q + i] * b[t]).sum();
        b[i] = (b[i] - s) / g[i * q + i];
    }
    let mut dd = [0.0; 2];
    for j in 0..dim {
        // r_j = dK_Nk - dK_NN b (dK_NN symmetric, zero diagonal)
        let dkj = &dk[j];
        let mut rj = db[j].clone();
        for a in 0..q {
            let row = &dkj[a * q..a * q + a];
            let mut s = 0.0;
            for (c, &v) in row.iter().enumerate() {
                s += v * b[c];
                rj[c] -= v * b[a];
            }
            rj[a] -= s;
        }
        let dkb: f64 = db[j].iter().zip(b.iter()).map(|(u, v)| u * v).sum();
        let br: f64 = b.iter().zip(&rj).map(|(u, v)| u * v).sum();
        dd[j] = -(dkb + br);
        db[j].copy_from_slice(&rj);
        chol_solve(g, q, &mut db[j]);
        r[j] = rj;
    }
    let mut info = [0.0; 3];
    let dot = |u: &[f64], v: &[f64]| -> f64 { u.iter().zip(v).map(|(a, c)| a * c).sum() };
    info[0] = 0.5 * dd[0] * dd[0] / (d * d) + dot(&db[0], &r[0]) / d;
    if dim == 2 {
        info[1] = 0.5 * dd[0] * dd[1] / (d * d) + dot(&db[0], &r[1]) / d;
        info[2] = 0.5 * dd[1] * dd[1] / (d * d) + dot(&db[1], &r[1]) / d;
    }
    Ok(RankScore { d, dd, info })
}

/// Per-rank outputs of a scored pass over ranks `k0 ..`: whitened rows and
/// their derivatives (`c` values per rank each) and six numbers per rank
/// (`ln d`, `dd_0 / d`, `dd_1 / d` and the information contributions).
struct ScoredRows<'a> {
    rows: &'a mut [f64],
    d0: &'a mut [f64],
    d1: &'a mut [f64],
    scal: &'a mut [f64],
}

fn scored_ranks(
    cond: &Conditioning,
    params: &CovParams,
    dim: usize,
    ranked: &[Vec<f64>],
    k0: usize,
    out: ScoredRows<'_>,
) -> Result<(), LikelihoodError> {
    let c = ranked.len();
    let mut w = ScoredWork::default();
    for off in 0..out.scal.len() / 6 {
        let k = k0 + off;
        let rs = conditional_scored(cond, params, dim, k, &mut w)
            .map_err(|e| conditional_error(cond, params, e))?;
        let set = cond.set(k);
        let sd = rs.d.sqrt();
        for (j, z) in ranked.iter().enumerate() {
            let mut pred = 0.0;
            let mut p0 = 0.0;
            let mut p1 = 0.0;
            for (t, &nb) in set.iter().enumerate() {
                let zv = z[nb as usize];
                pred += w.b[t] * zv;
                p0 += w.db[0][t] * zv;
                if dim == 2 {
                    p1 += w.db[1][t] * zv;
                }
            }
            let wv = (z[k] - pred) / sd;
            out.rows[off * c + j] = wv;
            out.d0[off * c + j] = -p0 / sd - 0.5 * wv * rs.dd[0] / rs.d;
            if dim == 2 {
                out.d1[off * c + j] = -p1 / sd - 0.5 * wv * rs.dd[1] / rs.d;
            }
        }
        let s = &mut out.scal[off * 6..off * 6 + 6];
        s[0] = rs.d.ln();
        s[1] = rs.dd[0] / rs.d;
        s[2] = rs.dd[1] / rs.d;
        s[3..6].copy_from_slice(&rs.info);
    }
    Ok(())
}

/// The profiled likelihood of the response-level Vecchia form at `params`
/// (the value, estimates and residuals of
/// [`super::vecchia::profiled_vecchia`], to the bit) with its scores and
/// Fisher information in `(ln range, eta)` (module docs); `dim` = 2 with a
/// nugget in the search, else 1 (the `eta` entries are then zero).
pub fn scored_vecchia(
    cond: &Conditioning,
    params: &CovParams,
    x: &[Vec<f64>],
    y: &[f64],
    method: LikelihoodKind,
    dim: usize,
) -> Result<Scored, LikelihoodError> {
    check_sizes_n(cond.len(), x, y)?;
    check_params(params)?;
    let n = cond.len();
    let p = x.len();
    let c = p + 1;
    let cols: Vec<&[f64]> = x.iter().map(Vec::as_slice).chain(std::iter::once(y)).collect();
    let ranked: Vec<Vec<f64>> = cols.iter().map(|z| cond.order().iter().map(|&i| z[i]).collect()).collect();
    let threads = if is_sequential() || n < PARALLEL_FROM {
        1
    } else {
        std::thread::available_parallelism().map(|t| t.get()).unwrap_or(1).min(8)
    };
    let chunk = n.div_ceil(threads);
    let mut rows = vec![0.0; n * c];
    let mut d0 = vec![0.0; n * c];
    let mut d1 = vec![0.0; n * c];
    let mut scal = vec![0.0; n * 6];
    let results: Vec<Result<(), LikelihoodError>> = if threads == 1 {
        let out = ScoredRows { rows: &mut rows, d0: &mut d0, d1: &mut d1, scal: &mut scal };
        vec![scored_ranks(cond, params, dim, &ranked, 0, out)]
    } else {
        std::thread::scope(|s| {
            let handles: Vec<_> = rows
                .chunks_mut(chunk * c)
                .zip(d0.chunks_mut(chunk * c))
                .zip(d1.chunks_mut(chunk * c))
                .zip(scal.chunks_mut(chunk * 6))
                .enumerate()
                .map(|(t, (((r, a), b), sc))| {
                    let ranked = &ranked;
                    let out = ScoredRows { rows: r, d0: a, d1: b, scal: sc };
                    s.spawn(move || scored_ranks(cond, params, dim, ranked, t * chunk, out))
                })
                .collect();
            handles.into_iter().map(|h| h.join().expect("a scoring thread panicked")).collect()
        })
    };
    results.into_iter().collect::<Result<Vec<()>, _>>()?;
    let mut logdet = 0.0;
    let mut sum_dd = [0.0; 2];
    let mut info_sum = [0.0; 3];
    for s in scal.chunks_exact(6) {
        logdet += s[0];
        sum_dd[0] += s[1];
        sum_dd[1] += s[2];
        for t in 0..3 {
            info_sum[t] += s[3 + t];
        }
    }
    let w = Mat::from_fn(n, c, |i, j| rows[i * c + j]);
    let mut prof = profile_whitened(&w, logdet, method, *params)?;
    // scores: dQ_j = 2 r_w'(dyw_j - dXw_j beta); the REML trace tr(A^-1 Xw'dXw_j)
    let beta = &prof.beta;
    let ainv = &prof.xtvx_inv;
    let rw = &prof.whitened;
    let mut ainv_x = vec![0.0; p];
    let mut grad = [0.0; 2];
    let nn = match method {
        LikelihoodKind::Ml => n as f64,
        LikelihoodKind::Reml => (n - p) as f64,
    };
    for (j, dw) in [&d0, &d1].into_iter().enumerate().take(dim) {
        let mut dq = 0.0;
        let mut tr = 0.0;
        for k in 0..n {
            let row = &rows[k * c..k * c + c];
            let drow = &dw[k * c..k * c + c];
            let dres = drow[p] - drow[..p].iter().zip(beta).map(|(u, v)| u * v).sum::<f64>();
            dq += 2.0 * rw[k] * dres;
            if method == LikelihoodKind::Reml {
                for (a, v) in ainv_x.iter_mut().enumerate() {
                    *v = ainv[a * p..a * p + p].iter().zip(&row[..p]).map(|(u, x)| u * x).sum();
                }
                tr += drow[..p].iter().zip(&ainv_x).map(|(u, v)| u * v).sum::<f64>();
            }
        }
        grad[j] = -0.5 * nn * dq / prof.q - 0.5 * sum_dd[j] - tr;
    }
    let i01 = info_sum[1] - sum_dd[0] * sum_dd[1] / (2.0 * nn);
    let info = [
        [info_sum[0] - sum_dd[0] * sum_dd[0] / (2.0 * nn), if dim == 2 { i01 } else { 0.0 }],
        [
            if dim == 2 { i01 } else { 0.0 },
            if dim == 2 { info_sum[2] - sum_dd[1] * sum_dd[1] / (2.0 * nn) } else { 0.0 },
        ],
    ];
    let mut own = vec![0.0; n];
    for (k, &i) in cond.order().iter().enumerate() {
        own[i] = prof.whitened[k];
    }
    prof.whitened = own;
    Ok(Scored { prof, grad, info })
}

/// The profiled likelihood of every fixed part of `designs` (columns of `X`
/// each, all with the response `y`) at `params` by the response-level form:
/// the conditionals computed once, every column whitened by them. Each
/// result equals `profiled_vecchia` of that design (to the bit). A failed
/// conditional fails all.
pub fn profiled_vecchia_many(
    cond: &Conditioning,
    params: &CovParams,
    designs: &[&[Vec<f64>]],
    y: &[f64],
    method: LikelihoodKind,
) -> Result<Vec<Result<Profiled, LikelihoodError>>, LikelihoodError> {
    for x in designs {
        check_sizes_n(cond.len(), x, y)?;
    }
    let n = cond.len();
    let mut cols: Vec<&[f64]> = designs.iter().flat_map(|x| x.iter().map(Vec::as_slice)).collect();
    cols.push(y);
    let last = cols.len() - 1;
    let (w, logdet) = whiten_vecchia(cond, params, &cols)?;
    let mut offset = 0;
    Ok(designs
        .iter()
        .map(|x| {
            let p = x.len();
            let o = offset;
            offset += p;
            let wd = Mat::from_fn(n, p + 1, |i, j| if j < p { w[(i, o + j)] } else { w[(i, last)] });
            let mut prof = profile_whitened(&wd, logdet, method, *params)?;
            let mut own = vec![0.0; n];
            for (k, &i) in cond.order().iter().enumerate() {
                own[i] = prof.whitened[k];
            }
            prof.whitened = own;
            Ok(prof)
        })
        .collect())
}

#[cfg(test)]
#[path = "vecchia_scores_tests.rs"]
pub(crate) mod tests;
