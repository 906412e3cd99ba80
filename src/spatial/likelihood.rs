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

#[path = "likelihood_search.rs"]
mod search;
pub use search::{Maximum, SearchOptions, maximise, maximise_by};
pub(super) use search::{SearchBox, simplex_search, simplex_starts};

#[cfg(test)]
mod tests {
    use super::*;
    use crate::spatial::correlation::Family;
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
