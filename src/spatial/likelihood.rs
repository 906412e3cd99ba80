//! The profiled Gaussian likelihood of a linear model with spatially
//! correlated errors, and its maximisation over the correlation parameters.
//!
//! Model: `y = X beta + e`, `e ~ N(0, sigma2 V)`, `V = (1 - eta) R(d; range) + eta I`,
//! with `R` a correlation family of [`crate::spatial::correlation`], `d` the
//! distances between the observations and `eta` in `[0, 1)` the nugget share
//! of the total variance `sigma2` (partial sill `(1 - eta) sigma2`, nugget
//! variance `eta sigma2`).
//!
//! With `L L' = V` (Cholesky), `Xw = L^-1 X`, `yw = L^-1 y`, the GLS estimate
//! is `beta = (Xw'Xw)^-1 Xw'yw`, the whitened residual `rw = yw - Xw beta` and
//! `Q = rw'rw = r'V^-1 r` (Aitken 1935; any regression text, e.g. Searle 1971).
//! The log-likelihoods keep **all constants** (Patterson & Thompson 1971,
//! *Biometrika* 58: 545-554; Harville 1974, *Biometrika* 61: 383-385):
//!
//! * ML, `sigma2 = Q/n` profiled:
//!   `l_ML = -(n/2) [ln(2 pi) + 1 + ln(Q/n)] - (1/2) ln|V|`
//! * REML, `sigma2 = Q/(n-p)` profiled:
//!   `l_REML = -((n-p)/2) [ln(2 pi) + 1 + ln(Q/(n-p))] - (1/2) ln|V| - (1/2) ln|X'V^-1 X|`
//!
//! **REML constant convention:** potclim's REML log-likelihood does *not* add
//! `+(1/2) ln|X'X|` (the term that turns it into the density of orthonormal
//! error contrasts). Either way REML values depend on the parameterisation of
//! `X`, which is why they are only comparable between fits with identical `X`.
//!
//! Cost of one evaluation: `n^2/2` correlation evaluations, one dense Cholesky
//! factorisation (`n^3/3` flops, blocked and multi-threaded by faer), one
//! triangular solve with `p + 1` right-hand sides (`n^2 (p+1)` flops) and
//! `O(n p^2)` for the small GLS system. Memory: one `n x n` matrix.
//!
//! The maximiser ([`maximise`]) is derivative-free (the spherical family is not
//! differentiable in the range and the range likelihood is often flat or
//! multi-modal): a start grid over the distances present, then a bounded
//! Nelder & Mead (1965, *Computer Journal* 7: 308-313) simplex from the best
//! starts; the best end is restarted once (a standard guard against the
//! simplex collapsing early; Press et al. 2007, *Numerical Recipes*, §10.5).

pub use super::covariance::CovParams;
use super::covariance::Kernel;
pub use super::factor::whiten;
use super::factor::{CORRELATION_MIN_DIAGONAL, Cholesky, FactorError, small_spd};
use super::optimise::{Budget, Simplex, Stop, nelder_mead, ranked_starts};
use crate::spatial::correlation::Family;
use faer::{Mat, MatRef};

/// Errors of the likelihood engine.
#[derive(Debug, thiserror::Error, Clone, PartialEq)]
pub enum LikelihoodError {
    /// The covariance matrix is not positive definite at these parameters.
    #[error(
        "the residual covariance ({family}, range {range}, nugget share {eta}) is not positive definite ({location}){}",
        if *eta == 0.0 { "; pots at the same position (or nearly so) make it singular without a nugget: fit with a nugget" } else { "" }
    )]
    NotPositiveDefinite {
        /// The family.
        family: String,
        /// The range parameter.
        range: f64,
        /// The nugget share.
        eta: f64,
        /// Where the factorisation failed (pivot index and value).
        location: FactorError,
    },
    /// `X'V^-1 X` is singular: the fixed-effect columns are linearly dependent.
    #[error("the fixed-effect columns are linearly dependent (X'V^-1 X is singular)")]
    SingularDesign,
    /// Inputs of inconsistent size or invalid values.
    #[error("{0}")]
    Invalid(String),
}

/// Which likelihood is maximised: the full (ML) or the restricted (REML) one.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, serde::Serialize, serde::Deserialize)]
pub enum LikelihoodKind {
    /// Maximum likelihood.
    Ml,
    /// Restricted (residual) maximum likelihood.
    Reml,
}

impl LikelihoodKind {
    /// `ML` or `REML`.
    pub fn label(&self) -> &'static str {
        match self {
            LikelihoodKind::Ml => "ML",
            LikelihoodKind::Reml => "REML",
        }
    }
}

/// Akaike's information criterion of a maximised log-likelihood with `k`
/// estimated parameters: `AIC = -2 l + 2 k` (Akaike 1974, *IEEE Transactions
/// on Automatic Control* 19: 716-723). The one definition in the crate: the
/// model comparison ([`crate::model::compare::information_criteria`]) and the
/// variogram ML fits of the mapping stage both call it.
pub fn aic(loglik: f64, k: usize) -> f64 {
    -2.0 * loglik + 2.0 * k as f64
}

pub use super::distances::Distances;

/// The lower Cholesky factor `L` of `V(params)` (`L L' = V`).
///
/// Cost: `n^2/2` correlation evaluations and `n^3/3` flops.
pub fn cholesky(dist: &Distances, params: &CovParams) -> Result<Mat<f64>, LikelihoodError> {
    check_params(params)?;
    dist.keep_pairs();
    let v = match dist {
        Distances::Averaged(a) => a.correlation(params),
        _ => dist.kernel_lower(&Kernel::correlation(params)),
    };
    factor_correlation(v, params)
}

/// Refuse a range that is not positive or a nugget share outside `[0, 1)`.
pub(super) fn check_params(params: &CovParams) -> Result<(), LikelihoodError> {
    if !(params.range.is_finite() && params.range > 0.0 && (0.0..1.0).contains(&params.eta)) {
        return Err(LikelihoodError::Invalid(format!(
            "range {} must be positive and nugget share {} in [0, 1)",
            params.range, params.eta
        )));
    }
    Ok(())
}

/// The lower Cholesky factor of the correlation matrix `v` of `params`
/// (its lower triangle is read), counted, with the failure located.
pub(super) fn factor_correlation(v: Mat<f64>, params: &CovParams) -> Result<Mat<f64>, LikelihoodError> {
    super::factor::count_factorisation();
    let c = Cholesky::new(v, CORRELATION_MIN_DIAGONAL).map_err(|location| {
        LikelihoodError::NotPositiveDefinite {
            family: params.family.name(),
            range: params.range,
            eta: params.eta,
            location,
        }
    })?;
    Ok(c.into_l())
}

/// One profiled likelihood evaluation and what the GLS needs from it.
#[derive(Clone, Debug)]
pub struct Profiled {
    /// The method.
    pub method: LikelihoodKind,
    /// The correlation parameters.
    pub params: CovParams,
    /// Profiled log-likelihood with all constants (see the module docs).
    pub loglik: f64,
    /// GLS coefficients.
    pub beta: Vec<f64>,
    /// Profiled total variance: `Q/n` (ML) or `Q/(n-p)` (REML).
    pub sigma2: f64,
    /// `Q = r'V^-1 r`.
    pub q: f64,
    /// `ln|V|`.
    pub logdet_v: f64,
    /// `ln|X'V^-1 X|`.
    pub logdet_xtvx: f64,
    /// `(X'V^-1 X)^-1`, `p x p`, row-major.
    pub xtvx_inv: Vec<f64>,
    /// Whitened residuals `L^-1 (y - X beta)` (not divided by sigma).
    pub whitened: Vec<f64>,
    /// Observations and columns.
    pub n: usize,
    /// Number of columns of `X`.
    pub p: usize,
}

/// GLS quantities from an already whitened `[Xw | yw]` (`n x (p+1)`) and `ln|V|`.
pub(super) fn profile_whitened(
    w: &Mat<f64>,
    logdet_v: f64,
    method: LikelihoodKind,
    params: CovParams,
) -> Result<Profiled, LikelihoodError> {
    let n = w.nrows();
    let p = w.ncols() - 1;
    let mut a = vec![0.0; p * p];
    let mut b = vec![0.0; p];
    let cols: Vec<&[f64]> = (0..=p).map(|j| w.col_as_slice(j)).collect();
    for i in 0..p {
        for j in 0..=i {
            let s: f64 = cols[i].iter().zip(cols[j]).map(|(u, v)| u * v).sum();
            a[i * p + j] = s;
            a[j * p + i] = s;
        }
        b[i] = cols[i].iter().zip(cols[p]).map(|(u, v)| u * v).sum();
    }
    let (inv, logdet_xtvx, beta) = gls_solve(&a, &b, p)?;
    let whitened: Vec<f64> =
        (0..n).map(|r| cols[p][r] - (0..p).map(|j| cols[j][r] * beta[j]).sum::<f64>()).collect();
    let q: f64 = whitened.iter().map(|v| v * v).sum();
    let (loglik, sigma2) = profile_loglik(n, p, q, logdet_v, logdet_xtvx, method)?;
    Ok(Profiled {
        method,
        params,
        loglik,
        beta,
        sigma2,
        q,
        logdet_v,
        logdet_xtvx,
        xtvx_inv: inv,
        whitened,
        n,
        p,
    })
}

/// The GLS normal equations `(X'V^-1 X) beta = X'V^-1 y` from their
/// `p x p` matrix `a` (row-major) and right-hand side `b`: the inverse
/// `(X'V^-1 X)^-1`, `ln|X'V^-1 X|` and `beta` (every path's one solve).
pub(super) fn gls_solve(
    a: &[f64],
    b: &[f64],
    p: usize,
) -> Result<(Vec<f64>, f64, Vec<f64>), LikelihoodError> {
    let (inv, logdet_xtvx) =
        if p == 0 { (Vec::new(), 0.0) } else { small_spd(a, p).ok_or(LikelihoodError::SingularDesign)? };
    let beta: Vec<f64> = (0..p).map(|i| (0..p).map(|j| inv[i * p + j] * b[j]).sum()).collect();
    Ok((inv, logdet_xtvx, beta))
}

/// The profiled log-likelihood and `sigma2` of the module docs from
/// `Q = r'V^-1 r`, `ln|V|` and `ln|X'V^-1 X|` (`n` observations, `p` columns):
/// the one formula of every path ([`profile_whitened`] and the cross-product
/// form of [`super::vecchia_latent`]).
pub(super) fn profile_loglik(
    n: usize,
    p: usize,
    q: f64,
    logdet_v: f64,
    logdet_xtvx: f64,
    method: LikelihoodKind,
) -> Result<(f64, f64), LikelihoodError> {
    let ln2pi = (2.0 * std::f64::consts::PI).ln();
    let (loglik, sigma2) = match method {
        LikelihoodKind::Ml => {
            let s2 = q / n as f64;
            (-(n as f64) / 2.0 * (ln2pi + 1.0 + s2.ln()) - 0.5 * logdet_v, s2)
        }
        LikelihoodKind::Reml => {
            if n <= p {
                return Err(LikelihoodError::Invalid(format!(
                    "REML needs more observations ({n}) than columns ({p})"
                )));
            }
            let m = (n - p) as f64;
            let s2 = q / m;
            (-m / 2.0 * (ln2pi + 1.0 + s2.ln()) - 0.5 * logdet_v - 0.5 * logdet_xtvx, s2)
        }
    };
    if q.is_nan() || q <= 0.0 || !loglik.is_finite() {
        return Err(LikelihoodError::Invalid(
            "the residuals are exactly zero: the model fits the data perfectly and has no likelihood maximum"
                .into(),
        ));
    }
    Ok((loglik, sigma2))
}

/// Copy `X` (`n x p`, given by columns) and `y` into one `n x (p+1)` matrix.
pub(super) fn stack_xy(x: &[Vec<f64>], y: &[f64]) -> Mat<f64> {
    let n = y.len();
    Mat::from_fn(n, x.len() + 1, |i, j| if j < x.len() { x[j][i] } else { y[i] })
}

pub(super) fn check_sizes(dist: &Distances, x: &[Vec<f64>], y: &[f64]) -> Result<(), LikelihoodError> {
    check_sizes_n(dist.len(), x, y)
}

/// [`check_sizes`] for `n` observations whatever their positions.
pub(super) fn check_sizes_n(n: usize, x: &[Vec<f64>], y: &[f64]) -> Result<(), LikelihoodError> {
    if y.len() != n || x.iter().any(|c| c.len() != n) {
        return Err(LikelihoodError::Invalid(format!("X, y and the distances disagree on n = {n}")));
    }
    if y.iter().chain(x.iter().flatten()).any(|v| !v.is_finite()) {
        return Err(LikelihoodError::Invalid("X or y holds a value that is not finite".into()));
    }
    Ok(())
}

/// The profiled ML or REML log-likelihood at `params`, with `sigma2` and
/// `beta` profiled out. `x` holds the columns of `X` (each of length `n`).
///
/// Cost: see the module docs (one Cholesky of an `n x n` matrix).
pub fn profiled(
    dist: &Distances,
    params: &CovParams,
    x: &[Vec<f64>],
    y: &[f64],
    method: LikelihoodKind,
) -> Result<Profiled, LikelihoodError> {
    check_sizes(dist, x, y)?;
    let l = cholesky(dist, params)?;
    profiled_with_factor(l.as_ref(), params, x, y, method)
}

/// [`profiled`] with a Cholesky factor already computed by [`cholesky`].
pub fn profiled_with_factor(
    l: MatRef<'_, f64>,
    params: &CovParams,
    x: &[Vec<f64>],
    y: &[f64],
    method: LikelihoodKind,
) -> Result<Profiled, LikelihoodError> {
    let n = y.len();
    let logdet_v = 2.0 * (0..n).map(|i| l[(i, i)].ln()).sum::<f64>();
    let mut w = stack_xy(x, y);
    whiten(l, &mut w);
    profile_whitened(&w, logdet_v, method, *params)
}

/// The full (not profiled) Gaussian log-density of `y ~ N(X beta, sigma2 V)`:
/// `-(n/2) ln(2 pi sigma2) - (1/2) ln|V| - (y - X beta)'V^-1(y - X beta) / (2 sigma2)`.
/// With no columns in `x` this is the zero-mean (Gaussian-process) marginal likelihood.
pub fn full_loglik(
    dist: &Distances,
    params: &CovParams,
    sigma2: f64,
    x: &[Vec<f64>],
    beta: &[f64],
    y: &[f64],
) -> Result<f64, LikelihoodError> {
    check_sizes(dist, x, y)?;
    if beta.len() != x.len() || sigma2.is_nan() || sigma2 <= 0.0 {
        return Err(LikelihoodError::Invalid("beta must match X and sigma2 be positive".into()));
    }
    let n = y.len();
    let l = cholesky(dist, params)?;
    let logdet = 2.0 * (0..n).map(|i| l[(i, i)].ln()).sum::<f64>();
    let mut r = Mat::from_fn(n, 1, |i, _| y[i] - x.iter().zip(beta).map(|(c, b)| c[i] * b).sum::<f64>());
    whiten(l.as_ref(), &mut r);
    let q: f64 = r.col_as_slice(0).iter().map(|v| v * v).sum();
    Ok(-(n as f64) / 2.0 * (2.0 * std::f64::consts::PI * sigma2).ln() - 0.5 * logdet - q / (2.0 * sigma2))
}

/// Bounds and options of [`maximise`].
#[derive(Clone, Debug)]
pub struct SearchOptions {
    /// Range bounds in metres; `None`: `[min positive distance / 10, 10 x max distance]`.
    pub range_bounds: Option<(f64, f64)>,
    /// Estimate the nugget share (else `eta = 0`).
    pub nugget: bool,
    /// Upper bound of the nugget share (default 0.99).
    pub eta_max: f64,
    /// Number of best grid points to start the simplex from (default 3).
    pub starts: usize,
    /// Further starts are used only when their grid log-likelihood is within
    /// this much of the best grid point (default 10).
    pub start_gap: f64,
    /// Maximum likelihood evaluations per simplex run (default 400).
    pub max_evals: usize,
    /// Convergence: spread of the simplex log-likelihoods (default 1e-8).
    pub f_tol: f64,
    /// Convergence: spread of the simplex vertices in (ln range, eta) (default 1e-5).
    pub x_tol: f64,
    /// Convergence of the Newton steps: the Newton decrement `g' H^-1 g`,
    /// twice the gain in log-likelihood the quadratic model still predicts
    /// (default 1e-10; Boyd & Vandenberghe 2004, *Convex Optimization*,
    /// §9.5.1).
    pub decrement_tol: f64,
}

impl Default for SearchOptions {
    fn default() -> Self {
        SearchOptions {
            range_bounds: None,
            nugget: true,
            eta_max: 0.99,
            starts: 3,
            start_gap: 10.0,
            max_evals: 400,
            f_tol: 1e-8,
            x_tol: 1e-5,
            decrement_tol: 1e-10,
        }
    }
}

/// The box of a search over `(ln range, eta)` and the distances it came from.
pub(super) struct SearchBox {
    /// Sorted positive pairwise distances (see [`Distances::positive_sample`]).
    pub(super) sample: Vec<f64>,
    /// Lower bounds of `(ln range, eta)`.
    pub(super) lo: [f64; 2],
    /// Upper bounds of `(ln range, eta)`.
    pub(super) hi: [f64; 2],
    /// 2 with a nugget, else 1.
    pub(super) dim: usize,
    /// The range bounds in metres (`lo`, `hi` before the logarithm).
    pub(super) range: (f64, f64),
}

impl SearchBox {
    /// Range in `[min positive distance / 10, 10 x max distance]` (or the
    /// bounds given), eta in `[0, eta_max]` with a nugget.
    pub(super) fn new(dist: &Distances, opts: &SearchOptions) -> Result<SearchBox, LikelihoodError> {
        let sample = dist.positive_sample();
        if sample.is_empty() {
            return Err(LikelihoodError::Invalid("all observations are at the same position".into()));
        }
        let (lo, hi) = opts.range_bounds.unwrap_or((sample[0] / 10.0, sample[sample.len() - 1] * 10.0));
        if !(lo > 0.0 && hi > lo) {
            return Err(LikelihoodError::Invalid(format!("range bounds [{lo}, {hi}] are not valid")));
        }
        let eta_max = if opts.nugget { opts.eta_max.clamp(0.0, 0.999) } else { 0.0 };
        let dim = if opts.nugget { 2 } else { 1 };
        Ok(SearchBox { sample, lo: [lo.ln(), 0.0], hi: [hi.ln(), eta_max], dim, range: (lo, hi) })
    }

    /// Another optimum among the runs' end points `ends` (a different place,
    /// more than 1e-4 lower), and the bounds `best` lies on.
    pub(super) fn outcome(
        &self,
        best: &Profiled,
        mut ends: Vec<(&[f64], f64)>,
        family: Family,
    ) -> (Option<(CovParams, f64)>, Vec<&'static str>) {
        let dim = self.dim;
        ends.sort_by(|a, b| b.1.total_cmp(&a.1));
        let other_optimum = ends
            .iter()
            .skip(1)
            .find(|(t, v)| {
                (best.loglik - v) > 1e-4
                    && ((t[0] - best.params.range.ln()).abs() > 0.05
                        || (dim == 2 && (t[1] - best.params.eta).abs() > 0.02))
            })
            .map(|(t, v)| {
                (CovParams { family, range: t[0].exp(), eta: if dim == 2 { t[1] } else { 0.0 } }, *v)
            });
        let mut at_bounds = Vec::new();
        let lr = best.params.range.ln();
        let tol = 1e-4;
        if lr - self.lo[0] < tol {
            at_bounds.push("range_lower");
        }
        if self.hi[0] - lr < tol {
            at_bounds.push("range_upper");
        }
        if dim == 2 && best.params.eta < 1e-6 {
            at_bounds.push("nugget_zero");
        }
        if dim == 2 && self.hi[1] - best.params.eta < 1e-6 {
            at_bounds.push("nugget_upper");
        }
        (other_optimum, at_bounds)
    }
}

/// Result of [`maximise`].
#[derive(Clone, Debug)]
pub struct Maximum {
    /// The best evaluation found.
    pub best: Profiled,
    /// Every simplex run met the tolerance within its evaluation budget.
    pub converged: bool,
    /// The estimate lies on a bound: any of `"range_lower"`, `"range_upper"`, `"nugget_zero"`, `"nugget_upper"`.
    pub at_bounds: Vec<&'static str>,
    /// Likelihood evaluations in all (grid and search).
    pub evaluations: usize,
    /// Dense factorisations of `V` made by this search on its own (a grid
    /// shared with other fixed parts is counted apart, see
    /// [`crate::spatial::ascent::maximise_shared`]).
    pub factorisations: usize,
    /// Wall-clock seconds of this search's own work.
    pub seconds: f64,
    /// The range bounds used.
    pub range_bounds: (f64, f64),
    /// Spread between the best log-likelihood and the best of the other
    /// simplex runs that ended elsewhere (a sign of several optima), if any.
    pub other_optimum: Option<(CovParams, f64)>,
}

/// Maximise the profiled ML or REML likelihood over `(ln range, eta)` within
/// bounds (or over `ln range` alone without a nugget).
///
/// Starts: practical ranges at the 2, 5, 10, 20, 35, 50 and 75 % quantiles of
/// the pairwise distances (converted to the range parameter of `family`),
/// crossed with `eta` in {0.05, 0.3, 0.6} when a nugget is fitted. The best
/// `starts` distinct grid points each start a bounded Nelder–Mead simplex
/// (bounds kept by projecting trial points onto the box); the best of their
/// ends is restarted once with a tenth of the first steps. Points where `V`
/// is not positive definite count as `-inf`.
pub fn maximise(
    dist: &Distances,
    family: Family,
    x: &[Vec<f64>],
    y: &[f64],
    method: LikelihoodKind,
    opts: &SearchOptions,
) -> Result<Maximum, LikelihoodError> {
    check_sizes(dist, x, y)?;
    maximise_by(dist, family, opts, |params| profiled(dist, params, x, y, method))
}

/// [`maximise`] of any profiled likelihood `evaluate` of the correlation
/// parameters (for example that of pots that move,
/// [`super::averaged::profiled_averaged`]); `dist` sets the range bounds and
/// the start ranges from its pairwise distances.
pub fn maximise_by(
    dist: &Distances,
    family: Family,
    opts: &SearchOptions,
    evaluate: impl Fn(&CovParams) -> Result<Profiled, LikelihoodError>,
) -> Result<Maximum, LikelihoodError> {
    simplex_search(dist, family, opts, None, evaluate)
}

/// The start points of the simplex search of [`maximise_by`] in `(ln range)`
/// or `(ln range, eta)`: practical ranges at the 2, 5, 10, 20, 35, 50 and
/// 75 % quantiles of the pairwise distances of `sb`, crossed with the nugget
/// shares {0.05, 0.3, 0.6} when a nugget is fitted.
pub(super) fn simplex_starts(sb: &SearchBox, family: Family) -> Vec<Vec<f64>> {
    let (lo, hi) = sb.range;
    let unit = family.practical_range(1.0);
    let mut starts: Vec<Vec<f64>> = Vec::new();
    for q in [0.02, 0.05, 0.10, 0.20, 0.35, 0.50, 0.75] {
        let d = sb.sample[((sb.sample.len() - 1) as f64 * q).round() as usize];
        let r = (d / unit).clamp(lo, hi).ln();
        let etas: &[f64] = if sb.dim == 2 { &[0.05, 0.3, 0.6] } else { &[0.0] };
        for &e in etas {
            starts.push(if sb.dim == 2 { vec![r, e.min(sb.hi[1])] } else { vec![r] });
        }
    }
    starts
}

/// [`maximise_by`], with the likelihood at the points of [`simplex_starts`]
/// already evaluated (`pre`, in their order) when a grid is shared by several
/// fixed parts ([`crate::spatial::ascent::maximise_shared`]); they count as
/// evaluations of this search, their factorisations do not.
pub(super) fn simplex_search(
    dist: &Distances,
    family: Family,
    opts: &SearchOptions,
    pre: Option<Vec<Result<Profiled, LikelihoodError>>>,
    evaluate: impl Fn(&CovParams) -> Result<Profiled, LikelihoodError>,
) -> Result<Maximum, LikelihoodError> {
    let f0 = super::factor::factorisations_on_this_thread();
    let t0 = std::time::Instant::now();
    let sb = SearchBox::new(dist, opts)?;
    let starts = simplex_starts(&sb, family);
    let SearchBox { lo: box_lo, hi: box_hi, dim, range: (lo, hi), .. } = sb;
    struct State {
        evaluations: usize,
        best: Option<Profiled>,
        first_error: Option<LikelihoodError>,
    }
    let state = std::cell::RefCell::new(State { evaluations: 0, best: None, first_error: None });
    let record = |result: Result<Profiled, LikelihoodError>| -> f64 {
        let mut st = state.borrow_mut();
        st.evaluations += 1;
        match result {
            Ok(p) => {
                let v = p.loglik;
                if st.best.as_ref().is_none_or(|b| v > b.loglik) {
                    st.best = Some(p);
                }
                v
            }
            Err(e) => {
                if st.first_error.is_none() {
                    st.first_error = Some(e);
                }
                f64::NEG_INFINITY
            }
        }
    };
    let eval = |t: &[f64]| -> f64 {
        let params = CovParams { family, range: t[0].exp(), eta: if dim == 2 { t[1] } else { 0.0 } };
        record(evaluate(&params))
    };
    // best start first (ranked by -l, the simplex minimises)
    let ranked = match pre {
        Some(pre) => {
            let mut g: Vec<(Vec<f64>, f64)> =
                starts.into_iter().zip(pre).map(|(t, r)| (t, -record(r))).collect();
            g.sort_by(|a, b| a.1.total_cmp(&b.1));
            g
        }
        None => ranked_starts(&mut |t: &[f64]| -eval(t), starts),
    };
    let grid: Vec<(Vec<f64>, f64)> = ranked.into_iter().map(|(t, v)| (t, -v)).collect();
    // minimise -l (NaN counts as +inf)
    let mut neg = |t: &[f64]| -> f64 {
        let r = eval(t);
        if r.is_nan() { f64::INFINITY } else { -r }
    };
    if !grid[0].1.is_finite() {
        let e = state.borrow_mut().first_error.take();
        return Err(e.unwrap_or(LikelihoodError::Invalid("no start point has a finite likelihood".into())));
    }
    let mut converged = true;
    let mut ends: Vec<(Vec<f64>, f64)> = Vec::new();
    let steps = [0.5f64, 0.15];
    let mut run = |start: &[f64], scale: f64, converged: &mut bool| -> (Vec<f64>, f64) {
        let step: Vec<f64> = steps[..dim].iter().map(|s| s * scale).collect();
        let m = nelder_mead(
            &mut neg,
            start,
            &Simplex {
                step: &step,
                bounds: Some((&box_lo[..dim], &box_hi[..dim])),
                stop: Stop::Absolute { f_tol: opts.f_tol, x_tol: opts.x_tol },
                budget: Budget::Evaluations(opts.max_evals),
            },
        );
        *converged &= m.converged;
        (m.x, -m.value)
    };
    let mut taken = 0;
    for (t0, v0) in grid.iter() {
        if taken >= opts.starts.max(1) || !v0.is_finite() || (taken > 0 && *v0 < grid[0].1 - opts.start_gap) {
            break;
        }
        if ends.iter().any(|(t, _)| (t[0] - t0[0]).abs() < 1e-9 && (dim == 1 || (t[1] - t0[1]).abs() < 1e-9))
        {
            continue;
        }
        taken += 1;
        ends.push(run(t0, 1.0, &mut converged));
    }
    // the restart (a tenth of the first steps) from the best end only: on
    // the demo study it never moved an end by 1e-8, and a restart from
    // every end cost a quarter of the search
    if let Some(k) = (0..ends.len()).max_by(|&a, &b| ends[a].1.total_cmp(&ends[b].1)) {
        let again = run(&ends[k].0.clone(), 0.1, &mut converged);
        if again.1 >= ends[k].1 {
            ends[k] = again;
        }
    }
    let State { evaluations, best, .. } = state.into_inner();
    let best = best.expect("a finite grid point exists");
    let ends: Vec<(&[f64], f64)> = ends.iter().map(|(t, v)| (t.as_slice(), *v)).collect();
    let (other_optimum, at_bounds) =
        SearchBox { sample: Vec::new(), lo: box_lo, hi: box_hi, dim, range: (lo, hi) }
            .outcome(&best, ends, family);
    let factorisations = (super::factor::factorisations_on_this_thread() - f0) as usize;
    Ok(Maximum {
        best,
        converged,
        at_bounds,
        evaluations,
        factorisations,
        seconds: t0.elapsed().as_secs_f64(),
        range_bounds: (lo, hi),
        other_optimum,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    /// REFERENCE.md §5.1 six-point example (values computed with numpy; the
    /// committed fixture tests/reference/fixtures/model_fixed.json holds them too).
    #[test]
    fn six_point_example() {
        let x = [0.0, 1.0, 2.0, 3.0, 5.0, 8.0];
        let y = [1.2, 1.9, 2.1, 3.2, 2.8, 4.5];
        let dist = Distances::from_coords(&x, &[0.0; 6]).unwrap();
        let p = CovParams { family: Family::Exponential, range: 1.5, eta: 0.0 };
        let xs = vec![vec![1.0; 6], x.to_vec()];
        let ml = profiled(&dist, &p, &xs, &y, LikelihoodKind::Ml).unwrap();
        assert_relative_eq!(ml.loglik, -3.366053, epsilon = 1e-6);
        assert_relative_eq!(ml.beta[0], 1.349503, epsilon = 1e-6);
        assert_relative_eq!(ml.beta[1], 0.385452, epsilon = 1e-6);
        assert_relative_eq!(ml.sigma2, 0.212718, epsilon = 1e-6);
        let reml = profiled(&dist, &p, &xs, &y, LikelihoodKind::Reml).unwrap();
        assert_relative_eq!(reml.loglik, -5.253599, epsilon = 1e-6);
        assert_relative_eq!(reml.sigma2, 0.319077, epsilon = 1e-6);
        let one = vec![vec![1.0; 6]];
        assert_relative_eq!(
            profiled(&dist, &p, &one, &y, LikelihoodKind::Ml).unwrap().loglik,
            -8.194006,
            epsilon = 1e-6
        );
        assert_relative_eq!(
            profiled(&dist, &p, &one, &y, LikelihoodKind::Reml).unwrap().loglik,
            -7.798416,
            epsilon = 1e-6
        );
        // rescaling a covariate leaves ML unchanged and moves REML by ln 10 (REFERENCE.md §5.1)
        let xs10 = vec![vec![1.0; 6], x.iter().map(|v| v / 10.0).collect()];
        assert_relative_eq!(
            profiled(&dist, &p, &xs10, &y, LikelihoodKind::Ml).unwrap().loglik,
            -3.366053,
            epsilon = 1e-6
        );
        assert_relative_eq!(
            profiled(&dist, &p, &xs10, &y, LikelihoodKind::Reml).unwrap().loglik,
            -2.951014,
            epsilon = 1e-6
        );
        // the full density at the ML estimates equals the profiled value
        let full = full_loglik(&dist, &p, ml.sigma2, &xs, &ml.beta, &y).unwrap();
        assert_relative_eq!(full, ml.loglik, epsilon = 1e-10);
    }

    #[test]
    fn duplicate_positions_are_singular_without_nugget() {
        let dist = Distances::from_coords(&[0.0, 0.0, 1.0], &[0.0, 0.0, 0.0]).unwrap();
        assert_eq!(dist.coincident(), vec![(0, 1)]);
        let p = CovParams { family: Family::Exponential, range: 1.0, eta: 0.0 };
        let e = cholesky(&dist, &p).unwrap_err();
        assert!(e.to_string().contains("fit with a nugget"), "{e}");
        assert!(cholesky(&dist, &CovParams { eta: 0.2, ..p }).is_ok());
    }

    fn fixture(name: &str) -> serde_json::Value {
        let p = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/reference/fixtures").join(name);
        serde_json::from_str(&std::fs::read_to_string(p).unwrap()).unwrap()
    }

    /// MASS topo (tests/reference/data/topo.csv): coordinates and z.
    fn topo() -> (Vec<f64>, Vec<f64>, Vec<f64>) {
        let p = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/reference/data/topo.csv");
        let mut r = csv::Reader::from_path(p).unwrap();
        let (mut x, mut y, mut z) = (vec![], vec![], vec![]);
        for rec in r.records() {
            let rec = rec.unwrap();
            x.push(rec[1].parse().unwrap());
            y.push(rec[2].parse().unwrap());
            z.push(rec[3].parse().unwrap());
        }
        (x, y, z)
    }

    fn family(name: &str) -> Family {
        Family::parse(name).unwrap()
    }

    /// Fixed-parameter ML and REML on topo (range 2, nugget share 0.1, every
    /// family, z ~ 1 and z ~ x + y) against the independent numpy computation
    /// of tests/reference/model.py; ML also against scipy's multivariate normal.
    #[test]
    fn fixed_parameters_vs_numpy_reference() {
        let (x, y, z) = topo();
        let n = z.len();
        let dist = Distances::from_coords(&x, &y).unwrap();
        for case in fixture("model_fixed.json")["topo"].as_array().unwrap() {
            let cols = if case["formula"] == "z~1" {
                vec![vec![1.0; n]]
            } else {
                vec![vec![1.0; n], x.clone(), y.clone()]
            };
            let method = if case["method"] == "ML" { LikelihoodKind::Ml } else { LikelihoodKind::Reml };
            let p = CovParams {
                family: family(case["family"].as_str().unwrap()),
                range: case["range"].as_f64().unwrap(),
                eta: case["eta"].as_f64().unwrap(),
            };
            let r = profiled(&dist, &p, &cols, &z, method).unwrap();
            let want = case["loglik"].as_f64().unwrap();
            assert_relative_eq!(r.loglik, want, max_relative = 1e-10);
            assert_relative_eq!(r.sigma2, case["sigma2"].as_f64().unwrap(), max_relative = 1e-9);
            for (b, w) in r.beta.iter().zip(case["beta"].as_array().unwrap()) {
                assert_relative_eq!(*b, w.as_f64().unwrap(), max_relative = 1e-9);
            }
            if method == LikelihoodKind::Ml {
                assert_relative_eq!(
                    r.loglik,
                    case["loglik_mvn_at_ml_sigma2"].as_f64().unwrap(),
                    max_relative = 1e-9
                );
            }
        }
        let six = &fixture("model_fixed.json")["six_point"];
        let xs = [0.0, 1.0, 2.0, 3.0, 5.0, 8.0];
        let ys = [1.2, 1.9, 2.1, 3.2, 2.8, 4.5];
        let d6 = Distances::from_coords(&xs, &[0.0; 6]).unwrap();
        let p6 = CovParams { family: Family::Exponential, range: 1.5, eta: 0.0 };
        for (m, key) in [(LikelihoodKind::Ml, "ML"), (LikelihoodKind::Reml, "REML")] {
            let r = profiled(&d6, &p6, &[vec![1.0; 6], xs.to_vec()], &ys, m).unwrap();
            assert_relative_eq!(r.loglik, six[key]["loglik"].as_f64().unwrap(), max_relative = 1e-12);
        }
    }

    /// Zero-mean likelihood against scikit-learn's log marginal likelihood
    /// (GaussianProcessRegressor with fixed Constant*Matern + White kernels; tests/reference/model.py).
    #[test]
    fn zero_mean_vs_scikit_learn() {
        let (x, y, z) = topo();
        let mean = z.iter().sum::<f64>() / z.len() as f64;
        let yc: Vec<f64> = z.iter().map(|v| v - mean).collect();
        let dist = Distances::from_coords(&x, &y).unwrap();
        for case in fixture("model_gpr.json")["cases"].as_array().unwrap() {
            let p = CovParams {
                family: family(case["family"].as_str().unwrap()),
                range: case["range"].as_f64().unwrap(),
                eta: case["eta"].as_f64().unwrap(),
            };
            let ll = full_loglik(&dist, &p, case["sigma2"].as_f64().unwrap(), &[], &[], &yc).unwrap();
            assert_relative_eq!(ll, case["lml"].as_f64().unwrap(), max_relative = 1e-9);
        }
    }

    /// GLS with a given correlation matrix against statsmodels GLS (topo, z ~ x + y,
    /// 0.9 exp(-d/2) + 0.1 I): coefficients and the log-likelihood (statsmodels' llf is
    /// the profiled ML value).
    #[test]
    fn known_correlation_vs_statsmodels_gls() {
        let (x, y, z) = topo();
        let n = z.len();
        let dist = Distances::from_coords(&x, &y).unwrap();
        let fx = fixture("model_gls_known.json");
        let p = CovParams { family: Family::Exponential, range: 2.0, eta: 0.1 };
        let r = profiled(&dist, &p, &[vec![1.0; n], x.clone(), y.clone()], &z, LikelihoodKind::Ml).unwrap();
        assert_relative_eq!(r.loglik, fx["llf"].as_f64().unwrap(), max_relative = 1e-10);
        let scale = r.q / (n - 3) as f64;
        assert_relative_eq!(scale, fx["scale"].as_f64().unwrap(), max_relative = 1e-9);
        for (j, (b, se)) in
            fx["params"].as_array().unwrap().iter().zip(fx["bse"].as_array().unwrap()).enumerate()
        {
            assert_relative_eq!(r.beta[j], b.as_f64().unwrap(), max_relative = 1e-9);
            assert_relative_eq!(
                (scale * r.xtvx_inv[j * 3 + j]).sqrt(),
                se.as_f64().unwrap(),
                max_relative = 1e-9
            );
        }
    }
}
