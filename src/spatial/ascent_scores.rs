//! The profiled (RE)ML likelihood of [`crate::spatial::likelihood`] at one
//! `(range, nugget share)` with its scores and average information in
//! `(ln range, eta)`: what each step of the search of [`super::ascent`] uses.
//!
//! # Derivatives
//! With `V = (1 - eta) R + eta I`, `V_l = dV/d ln a = (1 - eta) D` (`D` the
//! derivative of the correlation in the log range,
//! [`crate::spatial::covariance::dcorrelation_dlog_range`], zero diagonal) and
//! `V_e = dV/d eta = I - R`, the GLS residual `r = y - X beta`, `u = V^-1 r`,
//! `Q = r'V^-1 r`, `W = V^-1 X` and `A = X'V^-1 X`, the profiled scores are
//! (sigma² and beta profiled out; by the envelope theorem `dQ/dt_k = -u'V_k u`;
//! Harville 1977, *JASA* 72: 320-338, §3-4):
//!
//! * ML: `dl/dt_k = (n/2) u'V_k u / Q - (1/2) tr(V^-1 V_k)`;
//! * REML: `dl/dt_k = ((n-p)/2) u'V_k u / Q - (1/2) tr(V^-1 V_k) + (1/2) tr(A^-1 W'V_k W)`.
//!
//! The curvature is the average information of Gilmour, Thompson & Cullis
//! (1995, *Biometrics* 51: 1440-1450) on the full parameters
//! `(sigma2, ln a, eta)` of `Sigma = sigma2 V`: `AI_ij = (1/2) y'P Sigma_i P
//! Sigma_j P y` with `P = Sigma^-1 - Sigma^-1 X (X'Sigma^-1 X)^-1 X'Sigma^-1`,
//! which needs only whitened vectors (no products of `n x n` matrices); the
//! block of `t` with sigma² profiled is its Schur complement
//! `AI_tt - AI_ts AI_ss^-1 AI_st`. The same matrix serves ML (the scores are
//! exact, so the fixed point is the ML optimum; only the step is approximate).
//!
//! Cost of one such evaluation: the fill of `R` and `D` (`n^2/2`
//! correlations), one Cholesky factorisation (`n^3/3` flops), the inverse of
//! `V` from it (`2 n^3/3`: the traces need it entrywise) and `O(n^2 p)` for
//! the rest; [`point`] alone (a trial step) the fill of `R` and the
//! factorisation.

use super::covariance::{dcorrelation_dlog_range, fill_lower_columns};
use super::factor::{CORRELATION_MIN_DIAGONAL, Cholesky};
use super::likelihood::{
    CovParams, Distances, LikelihoodError, LikelihoodKind, Profiled, profile_whitened, stack_xy,
};
use faer::Mat;
use faer::linalg::triangular_solve::{solve_lower_triangular_in_place, solve_upper_triangular_in_place};

/// One evaluation with its scores and average information.
#[derive(Clone, Debug)]
pub struct Scored {
    /// The profiled evaluation.
    pub prof: Profiled,
    /// Scores in `(ln range, eta)`.
    pub grad: [f64; 2],
    /// Average information of `(ln range, eta)` with sigma² profiled (symmetric).
    pub info: [[f64; 2]; 2],
}

/// Symmetric product `y = S x` from the strict lower triangle of `s`
/// (the diagonal taken as zero). Cost `n^2` flops.
fn sym_offdiag_mul(s: &Mat<f64>, x: &[f64]) -> Vec<f64> {
    let n = x.len();
    let mut y = vec![0.0; n];
    for j in 0..n {
        let col = s.col_as_slice(j);
        let xj = x[j];
        let mut acc = 0.0;
        for i in j + 1..n {
            let v = col[i];
            y[i] += v * xj;
            acc += v * x[i];
        }
        y[j] += acc;
    }
    y
}

fn dot(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(u, v)| u * v).sum()
}

/// The profiled likelihood at `params` with its scores and average
/// information (see the module docs). `x` holds the columns of `X`.
pub fn scored(
    dist: &Distances,
    params: &CovParams,
    x: &[Vec<f64>],
    y: &[f64],
    method: LikelihoodKind,
) -> Result<Scored, LikelihoodError> {
    let pt = point(dist, params, x, y, method)?;
    scores(dist, pt, x, method)
}

/// One evaluation of the profiled likelihood with what its scores need:
/// `R`, the factor of `V` and the whitened columns. A trial step is judged
/// by its likelihood alone; only an accepted one pays for the scores
/// ([`scores`]: the inverse of `V`, about two more factorisations).
pub struct Point {
    /// The profiled evaluation.
    pub prof: Profiled,
    /// `R` (strict lower; for pots that move with its diagonal).
    rho: Mat<f64>,
    /// For pots that move, the diagonal of `R`.
    diag_r: Option<Vec<f64>>,
    chol: Cholesky,
    /// `L^-1 [X | y]`.
    w: Mat<f64>,
}

/// An evaluation that `newton` can judge by its log-likelihood before
/// asking for its scores.
pub trait Valued {
    /// The profiled log-likelihood.
    fn loglik(&self) -> f64;
}

impl Valued for Point {
    fn loglik(&self) -> f64 {
        self.prof.loglik
    }
}

impl Valued for Scored {
    fn loglik(&self) -> f64 {
        self.prof.loglik
    }
}

/// The likelihood at `params`, kept for [`scores`].
pub fn point(
    dist: &Distances,
    params: &CovParams,
    x: &[Vec<f64>],
    y: &[f64],
    method: LikelihoodKind,
) -> Result<Point, LikelihoodError> {
    let n = y.len();
    let (family, range, eta) = (params.family, params.range, params.eta);
    if !(range.is_finite() && range > 0.0 && (0.0..1.0).contains(&eta)) {
        return Err(LikelihoodError::Invalid(format!(
            "range {range} must be positive and nugget share {eta} in [0, 1)"
        )));
    }
    dist.keep_pairs();
    // R (strict lower, diagonal 1 implied); for pots that move, W R W' with
    // its diagonal kept apart (not 1)
    let (rho, diag_r) = match dist {
        Distances::Averaged(a) => {
            let s = a.structured(family, range);
            let diag: Vec<f64> = (0..n).map(|i| s[(i, i)]).collect();
            (s, Some(diag))
        }
        _ => {
            let mut rho = Mat::<f64>::zeros(n, n);
            dist.fill_pairs(&mut rho, |d| family.correlation(d, range));
            (rho, None)
        }
    };
    let v = Mat::from_fn(n, n, |i, j| {
        if i == j {
            diag_r.as_ref().map_or(1.0, |s| (1.0 - eta) * s[i] + eta)
        } else if i > j {
            (1.0 - eta) * rho[(i, j)]
        } else {
            0.0
        }
    });
    super::factor::count_factorisation();
    let chol = Cholesky::new(v, CORRELATION_MIN_DIAGONAL).map_err(|location| {
        LikelihoodError::NotPositiveDefinite { family: family.name(), range, eta, location }
    })?;
    let mut w = stack_xy(x, y);
    solve_lower_triangular_in_place(chol.l(), w.as_mut(), faer::Par::Seq);
    let prof = profile_whitened(&w, chol.logdet(), method, *params)?;
    Ok(Point { prof, rho, diag_r, chol, w })
}

/// The scores and average information at an evaluated [`Point`] (see the
/// module docs).
pub fn scores(
    dist: &Distances,
    pt: Point,
    x: &[Vec<f64>],
    method: LikelihoodKind,
) -> Result<Scored, LikelihoodError> {
    let Point { prof, rho, diag_r, chol, w } = pt;
    let n = rho.nrows();
    let p = x.len();
    let (family, range, eta) = (prof.params.family, prof.params.range, prof.params.eta);
    // D = dR / d ln range (strict lower; for pots that move with its diagonal)
    let (dr, diag) = match (dist, diag_r) {
        (Distances::Averaged(a), Some(s)) => {
            let d = a.structured_derivative(family, range);
            let dd: Vec<f64> = (0..n).map(|i| d[(i, i)]).collect();
            (d, Some((s, dd)))
        }
        _ => {
            let mut dr = Mat::<f64>::zeros(n, n);
            // rho of the same distance computed once more per distinct
            // distance (the same value as R's) or read from R pair by pair
            let by_distinct =
                |d: f64| dcorrelation_dlog_range(family, d, range, family.correlation(d, range));
            if !dist.fill_pairs_distinct(&mut dr, by_distinct) {
                fill_lower_columns(&mut dr, |j, col| {
                    let rc = rho.col_as_slice(j);
                    for (i, c) in col.iter_mut().enumerate().skip(j + 1) {
                        *c = dcorrelation_dlog_range(family, dist.get(i, j), range, rc[i]);
                    }
                });
            }
            (dr, None)
        }
    };
    let l = chol.l();
    // u = V^-1 r = L^-T rw
    let mut u = Mat::from_fn(n, 1, |i, _| prof.whitened[i]);
    solve_upper_triangular_in_place(l.transpose(), u.as_mut(), faer::Par::Seq);
    let u: Vec<f64> = u.col_as_slice(0).to_vec();
    let mut vinv = chol.inverse_lower();
    let xw = w.subcols(0, p).to_owned();
    if method == LikelihoodKind::Reml && p > 0 {
        // REML traces are of P = V^-1 - W A^-1 W' (W = V^-1 X = L^-T Xw):
        // tr(P V_k) = tr(V^-1 V_k) - tr(A^-1 W'V_k W), one pass over the
        // lower triangle for both k (n^2 p / 2 flops)
        let mut wm = xw.clone();
        solve_upper_triangular_in_place(l.transpose(), wm.as_mut(), faer::Par::Seq);
        let wa =
            Mat::from_fn(n, p, |i, b| (0..p).map(|a| wm[(i, a)] * prof.xtvx_inv[a * p + b]).sum::<f64>());
        for j in 0..n {
            let wj: Vec<f64> = (0..p).map(|b| wm[(j, b)]).collect();
            let col =
                vinv.col_mut(j).try_as_col_major_mut().expect("owned columns are contiguous").as_slice_mut();
            for (b, wjb) in wj.iter().enumerate() {
                let wac = wa.col_as_slice(b);
                for (c, a) in col[j..].iter_mut().zip(&wac[j..]) {
                    *c -= a * wjb;
                }
            }
        }
    }
    // traces: tr(P V_l) = 2 (1 - eta) sum_{i>j} P_ij D_ij; tr(P V_e) = -2 sum_{i>j} P_ij R_ij
    // (P = V^-1 for ML)
    let (mut tr_d, mut tr_r) = (0.0, 0.0);
    for j in 0..n {
        let (vc, dc, rc) = (vinv.col_as_slice(j), dr.col_as_slice(j), rho.col_as_slice(j));
        for i in j + 1..n {
            tr_d += vc[i] * dc[i];
            tr_r += vc[i] * rc[i];
        }
    }
    let mut traces = [2.0 * (1.0 - eta) * tr_d, -2.0 * tr_r];
    if let Some((s, d)) = &diag {
        // the diagonals of V_l = (1 - eta) D and V_e = I - R
        for i in 0..n {
            traces[0] += (1.0 - eta) * vinv[(i, i)] * d[i];
            traces[1] += vinv[(i, i)] * (1.0 - s[i]);
        }
    }
    // V_l c and V_e c
    let vl_mul = |c: &[f64]| -> Vec<f64> {
        let mut out = sym_offdiag_mul(&dr, c);
        if let Some((_, d)) = &diag {
            for i in 0..n {
                out[i] += d[i] * c[i];
            }
        }
        out.into_iter().map(|v| (1.0 - eta) * v).collect()
    };
    let ve_mul = |c: &[f64]| -> Vec<f64> {
        let mut out: Vec<f64> = sym_offdiag_mul(&rho, c).into_iter().map(|v| -v).collect();
        if let Some((s, _)) = &diag {
            for i in 0..n {
                out[i] += (1.0 - s[i]) * c[i];
            }
        }
        out
    };
    // a_k = V_k u
    let a = [vl_mul(&u), ve_mul(&u)];
    let q = prof.q;
    let c = match method {
        LikelihoodKind::Ml => n as f64,
        LikelihoodKind::Reml => (n - p) as f64,
    };
    let mut grad = [0.0; 2];
    for k in 0..2 {
        grad[k] = 0.5 * c * dot(&u, &a[k]) / q - 0.5 * traces[k];
    }
    // average information: whitened a-vectors, projected off the whitened design
    let whiten_vec = |v: &[f64]| -> Vec<f64> {
        let mut m = Mat::from_fn(n, 1, |i, _| v[i]);
        solve_lower_triangular_in_place(l, m.as_mut(), faer::Par::Seq);
        m.col_as_slice(0).to_vec()
    };
    let b: Vec<Vec<f64>> = a.iter().map(|v| whiten_vec(v)).collect();
    let project = |v: &[f64]| -> Vec<f64> {
        if p == 0 {
            return v.to_vec();
        }
        let xtv: Vec<f64> = (0..p).map(|j| dot(xw.col_as_slice(j), v)).collect();
        let coef: Vec<f64> =
            (0..p).map(|i| (0..p).map(|j| prof.xtvx_inv[i * p + j] * xtv[j]).sum()).collect();
        let mut out = v.to_vec();
        for (j, cj) in coef.iter().enumerate() {
            for (o, xv) in out.iter_mut().zip(xw.col_as_slice(j)) {
                *o -= cj * xv;
            }
        }
        out
    };
    let pb: Vec<Vec<f64>> = b.iter().map(|v| project(v)).collect();
    let s = prof.sigma2;
    let rw = &prof.whitened;
    let ai_ss = 0.5 * dot(rw, rw) / (s * s * s);
    let ai_st = [0.5 * dot(rw, &pb[0]) / (s * s), 0.5 * dot(rw, &pb[1]) / (s * s)];
    let mut info = [[0.0; 2]; 2];
    for i in 0..2 {
        for j in 0..2 {
            info[i][j] = 0.5 * dot(&b[i], &pb[j]) / s - ai_st[i] * ai_st[j] / ai_ss;
        }
    }
    let sym = 0.5 * (info[0][1] + info[1][0]);
    info[0][1] = sym;
    info[1][0] = sym;
    Ok(Scored { prof, grad, info })
}
