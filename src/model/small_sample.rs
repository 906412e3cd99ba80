//! Small-sample inference for one fixed effect under a correlated residual:
//! the Kenward & Roger (1997) adjusted variance and denominator degrees of
//! freedom, with the Satterthwaite-type degrees of freedom of the plug-in
//! variance beside them.
//!
//! The plug-in covariance `Phi = (X' Sigma^-1 X)^-1` of the GLS estimate
//! treats the estimated covariance parameters as known: it is too small
//! (the estimate's variability from the covariance parameters is left out,
//! and `Phi(theta_hat)` is itself biased downwards), and a t test on
//! `n - p` df ignores how uncertain `Phi` is. With few pots and a smooth
//! driver beside a correlated residual both matter.
//!
//! Model `y = X beta + e`, `e ~ N(0, Sigma)`,
//! `Sigma = s2 [(1 - eta) R(d; a) + eta I]`, covariance parameters
//! `theta = (s2, ln a)` or `(s2, ln a, eta)` with a nugget, at their REML
//! estimates. Kenward & Roger (1997, *Biometrics* 53: 983-997, §2-4):
//!
//! * `W` = inverse of the expected REML information
//!   `I_ij = tr(P S_i P S_j) / 2`, `P = Sigma^-1 - Sigma^-1 X Phi X' Sigma^-1`,
//!   `S_i = d Sigma / d theta_i` (Harville 1977, *JASA* 72: 320-338);
//! * `P_i = X' (d Sigma^-1 / d theta_i) X = -X' Sigma^-1 S_i Sigma^-1 X`,
//!   `Q_ij = X' Sigma^-1 S_i Sigma^-1 S_j Sigma^-1 X`;
//! * `Lambda = Phi [sum_ij W_ij (Q_ij - P_i Phi P_j)] Phi`, the adjusted
//!   covariance `Phi_A = Phi + 2 Lambda`;
//! * for one coefficient `c` (`L = e_c`, `l = 1`), with
//!   `Theta = L (L' Phi_A L)^-1 L'`: `A1 = sum W_ij tr(Theta Phi P_i Phi)
//!   tr(Theta Phi P_j Phi)`, `A2 = sum W_ij tr(Theta Phi P_i Phi Theta Phi
//!   P_j Phi)`, then `B, g, c1, c2, c3, E*, V*, rho`, the denominator df
//!   `m = 4 + (l + 2) / (l rho - 1)` and the scale
//!   `lambda = m / (E* (m - 2))`; `F = lambda beta_c^2 / (Phi_A)_cc` on
//!   `(1, m)` df. For `l = 1`, `A1 = A2 = A`, and the formulas reduce
//!   exactly to `rho = (1 - A/2) / (1 - 2A)`, `m = 2 / A =
//!   2 (Phi_A)_cc^2 / var(Phi_cc)` and `lambda = 1`; the code uses this
//!   closed form.
//!
//! **First order.** The paper's `Lambda` also holds `-R_ij / 4`,
//! `R_ij = X' Sigma^-1 S_ij Sigma^-1 X` with `S_ij` the second derivative
//! of `Sigma`, which is not zero when the structure is not linear in its
//! parameters (here `ln a`). potclim leaves it out (the "first-order"
//! adjustment). With it the adjustment depends on the parametrisation and
//! can make the adjusted variance indefinite, the caveat for non-linear
//! structures that Kenward & Roger (2009, *Computational Statistics & Data
//! Analysis* 53: 2583-2595) revisit; and when the range is barely
//! identified it inflates the variance without bound (seen on
//! a simulated 60-pot bench whose REML range ran to its bound: adjusted SE
//! 0.68 with the term against 0.094 without and 0.070 plug-in). Without
//! it, the adjustment is invariant to a change of parameters (every term is
//! bilinear in first derivatives, and `W` transforms with them) and, for
//! one coefficient, is the estimator of Prasad & Rao (1990, *JASA* 85:
//! 163-171) and Harville & Jeske (1992, *JASA* 87: 724-731); page numbers
//! of these three from memory.
//!
//! `Theta` is built with the adjusted `Phi_A` (our reading of the paper's
//! "Phi replaced by its adjusted estimate"); with the plug-in `Phi` instead,
//! `m` would equal the Satterthwaite df reported beside it,
//! `2 Phi_cc^2 / (g' W g)`, `g_i = d Phi_cc / d theta_i = -(Phi P_i Phi)_cc`
//! (Giesbrecht & Burns 1985, *Biometrics* 41: 477-486).
//!
//! Checked against `tests/reference/small_sample.py` (numpy, written from
//! the paper's formulas with `P_i` by differences of numpy's inverse).
//!
//! Cost: three `n x n` inverse-sized products per covariance parameter
//! (`O(k n^3)`, `k <= 3`), one inverse; about ten factorisations' worth.
//! Memory: `k + 4` dense `n x n` matrices.

use super::error::{ModelError, Result};
use super::ols::f_p;
use crate::spatial::covariance::dcorrelation_dlog_range;
use crate::spatial::factor::{CORRELATION_MIN_DIAGONAL, Cholesky, small_spd};
use crate::spatial::likelihood::{CovParams, Distances};
use faer::Mat;
use serde::Serialize;
use statrs::distribution::{ContinuousCDF, StudentsT};

/// The small-sample inference of one coefficient.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct SmallSample {
    /// The GLS estimate.
    pub estimate: f64,
    /// Plug-in SE `sqrt(Phi_cc)` at the REML estimates.
    pub se_plugin: f64,
    /// Kenward–Roger adjusted SE `sqrt((Phi_A)_cc)`.
    pub se: f64,
    /// Kenward–Roger denominator degrees of freedom `m`.
    pub df: f64,
    /// Kenward–Roger scale `lambda` (1 for one coefficient).
    pub scale: f64,
    /// `F = lambda beta^2 / (Phi_A)_cc`.
    pub f: f64,
    /// Upper-tail p-value of `F` on `(1, m)` df.
    pub p_value: f64,
    /// 95 % CI `beta -/+ t_(m, 0.975) sqrt((Phi_A)_cc / lambda)`.
    pub ci: (f64, f64),
    /// Satterthwaite df of the plug-in variance (for comparison).
    pub satterthwaite_df: f64,
}

fn err(msg: impl Into<String>) -> ModelError {
    ModelError::Comparison(format!("small-sample correction: {}", msg.into()))
}

/// `A' B` for `n x p` and `n x q` matrices, as a row-major `p x q` Vec.
fn cross(a: &Mat<f64>, b: &Mat<f64>) -> Vec<f64> {
    let m = a.transpose() * b;
    let (p, q) = (m.nrows(), m.ncols());
    (0..p).flat_map(|i| (0..q).map(move |j| (i, j))).map(|(i, j)| m[(i, j)]).collect()
}

fn mul(a: &[f64], b: &[f64], p: usize) -> Vec<f64> {
    let mut out = vec![0.0; p * p];
    for i in 0..p {
        for k in 0..p {
            let v = a[i * p + k];
            for j in 0..p {
                out[i * p + j] += v * b[k * p + j];
            }
        }
    }
    out
}

/// The Kenward–Roger inference of coefficient `coef` of the model with
/// columns `x` (each of length `n`), response `y`, correlation `params` and
/// total variance `sigma2` (the REML estimates), `nugget` saying whether the
/// nugget share was estimated (a parameter of `theta`) or fixed at zero.
/// See the module docs for the formulas.
pub fn kenward_roger(
    dist: &Distances,
    params: CovParams,
    nugget: bool,
    sigma2: f64,
    x: &[Vec<f64>],
    y: &[f64],
    coef: usize,
) -> Result<SmallSample> {
    let n = y.len();
    let p = x.len();
    if coef >= p || dist.len() != n || n <= p || sigma2.is_nan() || sigma2 <= 0.0 {
        return Err(err("inconsistent sizes or a non-positive variance"));
    }
    let (family, a, eta) = (params.family, params.range, if nugget { params.eta } else { 0.0 });
    // R and D = dR/d ln a (zero diagonal for D); for pots that move W R W'
    // and W D W' (full, their diagonals not 1 and 0).
    let (r, d1) = match dist {
        Distances::Averaged(s) => (s.structured(family, a), s.structured_derivative(family, a)),
        _ => {
            let mut r = Mat::<f64>::identity(n, n);
            let mut d1 = Mat::<f64>::zeros(n, n);
            for j in 0..n {
                for i in 0..j {
                    let dij = dist.get(i, j);
                    let rho = family.correlation(dij, a);
                    let dr = dcorrelation_dlog_range(family, dij, a, rho);
                    r[(i, j)] = rho;
                    r[(j, i)] = rho;
                    d1[(i, j)] = dr;
                    d1[(j, i)] = dr;
                }
            }
            (r, d1)
        }
    };
    // Sigma and its inverse.
    let mut sig = Mat::<f64>::zeros(n, n);
    for j in 0..n {
        for i in 0..n {
            sig[(i, j)] = sigma2 * ((1.0 - eta) * r[(i, j)] + if i == j { eta } else { 0.0 });
        }
    }
    crate::spatial::factor::count_factorisation();
    let v = Mat::from_fn(n, n, |i, j| sig[(i, j)] / sigma2);
    let chol = Cholesky::new(v, CORRELATION_MIN_DIAGONAL)
        .map_err(|e| err(format!("the residual covariance is not positive definite ({e:?})")))?;
    let mut si = chol.inverse_lower();
    for j in 0..n {
        for i in 0..j {
            si[(j, i)] /= sigma2;
            si[(i, j)] = si[(j, i)];
        }
        si[(j, j)] /= sigma2;
    }
    let xm = Mat::from_fn(n, p, |i, j| x[j][i]);
    let wx = &si * &xm; // Sigma^-1 X
    let (phi, _) = small_spd(&cross(&xm, &wx), p).ok_or_else(|| err("X' Sigma^-1 X is singular"))?;
    let phim = Mat::from_fn(p, p, |i, j| phi[i * p + j]);
    let beta: Vec<f64> = {
        let b = wx.transpose() * Mat::from_fn(n, 1, |i, _| y[i]);
        (0..p).map(|i| (0..p).map(|j| phi[i * p + j] * b[(j, 0)]).sum()).collect()
    };
    let pm = &si - &wx * &phim * wx.transpose();
    // First derivatives S_i of Sigma in theta = (s2, ln a[, eta]).
    let mut s: Vec<Mat<f64>> = vec![
        Mat::from_fn(n, n, |i, j| sig[(i, j)] / sigma2),
        Mat::from_fn(n, n, |i, j| sigma2 * (1.0 - eta) * d1[(i, j)]),
    ];
    if nugget {
        s.push(Mat::from_fn(n, n, |i, j| sigma2 * (f64::from(u8::from(i == j)) - r[(i, j)])));
    }
    let k = s.len();
    // Expected REML information and W.
    let ps: Vec<Mat<f64>> = s.iter().map(|si_| &pm * si_).collect();
    let mut info = vec![0.0; k * k];
    for i in 0..k {
        for j in 0..=i {
            let mut t = 0.0;
            for u in 0..n {
                for v in 0..n {
                    t += ps[i][(u, v)] * ps[j][(v, u)];
                }
            }
            info[i * k + j] = 0.5 * t;
            info[j * k + i] = 0.5 * t;
        }
    }
    let (w, _) = small_spd(&info, k).ok_or_else(|| {
        err("the information of the covariance parameters is singular (a parameter is not identified)")
    })?;
    // P_i and Q_ij (first order: no R_ij, see the module docs).
    let swx: Vec<Mat<f64>> = s.iter().map(|si_| si_ * &wx).collect();
    let pi: Vec<Vec<f64>> = swx.iter().map(|m| cross(&wx, m).iter().map(|v| -v).collect()).collect();
    let si_swx: Vec<Mat<f64>> = swx.iter().map(|m| &si * m).collect();
    let mut inner = vec![0.0; p * p];
    for i in 0..k {
        for j in 0..k {
            let wij = w[i * k + j];
            let q = cross(&swx[i], &si_swx[j]);
            let ppp = mul(&mul(&pi[i], &phi, p), &pi[j], p);
            for e in 0..p * p {
                inner[e] += wij * (q[e] - ppp[e]);
            }
        }
    }
    let lambda_m = mul(&mul(&phi, &inner, p), &phi, p);
    let c = coef;
    let phi_cc = phi[c * p + c];
    let phi_a_cc = phi_cc + 2.0 * lambda_m[c * p + c];
    if phi_a_cc.is_nan() || phi_a_cc <= 0.0 {
        return Err(err("the adjusted variance is not positive"));
    }
    // a_i = (Phi P_i Phi)_cc.
    let ai: Vec<f64> = pi.iter().map(|m| mul(&mul(&phi, m, p), &phi, p)[c * p + c]).collect();
    let var_phi: f64 =
        (0..k).flat_map(|i| (0..k).map(move |j| (i, j))).map(|(i, j)| w[i * k + j] * ai[i] * ai[j]).sum();
    // Theta = e_c e_c' / (Phi_A)_cc: tr(Theta Phi P_i Phi) = a_i / (Phi_A)_cc,
    // so A1 = A2 = var(Phi_cc) / (Phi_A)_cc^2. For one coefficient (l = 1)
    // the paper's B, g, c1..c3, E*, V* and rho reduce exactly to
    // rho = (1 - A/2) / (1 - 2A), m = 2 / A and lambda = 1 (module docs);
    // the closed form avoids the removable singularities of the general
    // formulas at A = 1/2 and A = 1, which a barely identified range reaches.
    let a1 = var_phi / (phi_a_cc * phi_a_cc);
    let m = 2.0 / a1;
    let scale = 1.0;
    if !(m.is_finite() && m > 0.0) {
        return Err(err(format!("the degrees of freedom are not defined (m = {m})")));
    }
    let f = scale * beta[c] * beta[c] / phi_a_cc;
    let p_value = f_p(f, 1.0, m);
    let tq = StudentsT::new(0.0, 1.0, m).map_err(|e| err(e.to_string()))?.inverse_cdf(0.975);
    let half = tq * (phi_a_cc / scale).sqrt();
    Ok(SmallSample {
        estimate: beta[c],
        se_plugin: phi_cc.sqrt(),
        se: phi_a_cc.sqrt(),
        df: m,
        scale,
        f,
        p_value,
        ci: (beta[c] - half, beta[c] + half),
        satterthwaite_df: 2.0 * phi_cc * phi_cc / var_phi,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::design::{Design, DesignSpec};
    use crate::model::testdata::{fixture, model_data};
    use crate::spatial::correlation::Family;
    use approx::assert_relative_eq;

    /// Against tests/reference/small_sample.py (numpy, Kenward & Roger 1997
    /// written from the paper, `P_i` by differences of numpy's inverse) at
    /// the reference's REML estimates, for exponential with and without
    /// nugget and Gaussian with nugget: estimate, plug-in and adjusted SE,
    /// df, scale, p-value, CI and the Satterthwaite df.
    /// Pots that never move, given as paths (`W = I`): the same adjustment
    /// as for fixed pots to 1e-10; with moves, the adjusted SE stays above
    /// the plug-in one and the df positive.
    #[test]
    fn kenward_roger_of_paths() {
        use crate::spatial::averaged::PathShares;
        let data = model_data("small_sample.csv", "trait", &["line"], &["draught"], Some(("x", "y")), &[]);
        let spec = DesignSpec {
            factors: vec!["line".into()],
            drivers: vec!["draught".into()],
            ..Default::default()
        };
        let design = Design::build(&data, &spec).unwrap();
        let coef = design.names.iter().position(|c| c == "draught").unwrap();
        let n = data.x.len();
        let fixed = Distances::from_coords(&data.x, &data.y).unwrap();
        let still: Vec<Vec<(usize, f64)>> = (0..n).map(|i| vec![(i, 1.0)]).collect();
        let paths = Distances::Averaged(PathShares::new(&data.x, &data.y, &still).unwrap());
        let params = CovParams { family: Family::Exponential, range: 1.5, eta: 0.3 };
        let kr =
            |d: &Distances| kenward_roger(d, params, true, 2.0, &design.x, &data.response, coef).unwrap();
        let (a, b) = (kr(&fixed), kr(&paths));
        assert_relative_eq!(a.se, b.se, max_relative = 1e-10);
        assert_relative_eq!(a.df, b.df, max_relative = 1e-10);
        let moved: Vec<Vec<(usize, f64)>> = (0..n).map(|i| vec![(i, 0.6), ((i + n / 2) % n, 0.4)]).collect();
        let m = kr(&Distances::Averaged(PathShares::new(&data.x, &data.y, &moved).unwrap()));
        assert!(m.se >= m.se_plugin && m.df > 0.0 && m.df.is_finite(), "{m:?}");
    }

    #[test]
    fn kenward_roger_matches_the_numpy_reference() {
        let data = model_data("small_sample.csv", "trait", &["line"], &["draught"], Some(("x", "y")), &[]);
        let design = Design::build(
            &data,
            &DesignSpec {
                factors: vec!["line".into()],
                drivers: vec!["draught".into()],
                ..Default::default()
            },
        )
        .unwrap();
        assert_eq!(design.names.len(), 4);
        let dist = Distances::from_coords(&data.x, &data.y).unwrap();
        let fx = fixture("small_sample.json");
        for case in fx["cases"].as_array().unwrap() {
            let family = Family::parse(case["family"].as_str().unwrap()).unwrap();
            let nugget = case["nugget"].as_bool().unwrap();
            let params = CovParams {
                family,
                range: case["range"].as_f64().unwrap(),
                eta: case["eta"].as_f64().unwrap(),
            };
            let coef = design.names.iter().position(|c| c == "draught").unwrap();
            let kr = kenward_roger(
                &dist,
                params,
                nugget,
                case["sigma2"].as_f64().unwrap(),
                &design.x,
                &data.response,
                coef,
            )
            .unwrap();
            let g = |k: &str| case[k].as_f64().unwrap();
            eprintln!("{family} nugget {nugget}: {kr:?}");
            assert_relative_eq!(kr.estimate, g("beta"), max_relative = 1e-9);
            assert_relative_eq!(kr.se_plugin, g("se_plugin"), max_relative = 1e-9);
            // P_i by differences in the reference: about 1e-7 relative agreement.
            assert_relative_eq!(kr.se, g("se_adjusted"), max_relative = 1e-5);
            assert_relative_eq!(kr.df, g("df"), max_relative = 1e-4);
            assert_relative_eq!(kr.scale, g("scale"), max_relative = 1e-9);
            assert_relative_eq!(kr.p_value, g("p_value"), max_relative = 1e-4);
            let ci = case["ci"].as_array().unwrap();
            assert_relative_eq!(kr.ci.0, ci[0].as_f64().unwrap(), max_relative = 1e-5);
            assert_relative_eq!(kr.ci.1, ci[1].as_f64().unwrap(), max_relative = 1e-5);
            assert_relative_eq!(kr.satterthwaite_df, g("satterthwaite_df"), max_relative = 1e-4);
        }
    }
}
