//! Standard errors of window indicators (hours below a threshold over a
//! pot's growth window, degree days, window means, light integrals) from the
//! per-step kriging errors of the mapped series, calibrated by
//! leave-one-sensor-out cross-validation.
//!
//! # Why
//! A window indicator sums (or averages) hundreds of steps. Each step's
//! kriging error `e_t = T_t - mu_t` has the kriging standard error `s_t`,
//! but how much of it persists from step to step decides the error of the
//! sum: a sum of independent errors is far more precise than a sum of
//! perfectly correlated ones. Kriging the indicator's study-period values
//! at the loggers instead carries the per-step variogram's shape (its large
//! nugget share) into a quantity whose spatial structure is much smoother,
//! and gave standard errors several times too large once the map became
//! accurate (mean squared standardised error 0.003-0.13 against the
//! simulator's truth).
//!
//! # Model
//! The error of one location's series is split into a part shared by every
//! step and a part of its own:
//! `e_t = s_t (sqrt(rho) u + sqrt(1 - rho) v_t)`, `u, v_t ~ N(0, 1)`
//! independent (an exchangeable, one-factor error model; Searle, Casella &
//! McCulloch 1992, *Variance Components*, §3.2, for the intraclass
//! correlation `rho`). Given the shared factor `u`, each step is
//! `N(mu_t + s_t sqrt(rho) u, s_t^2 (1 - rho))`, so the indicator's
//! conditional expectation `H(u) = E[H | u]` is the same expectation-form
//! indicator ([`crate::climate::exceedance`]) of the shifted series with the
//! smaller per-step SE. Its variance over `u`,
//! `Var_u(H(u)) = E[H(u)^2] - E[H(u)]^2`, is the persistent part of the
//! indicator's error (law of total variance), computed by Gauss–Hermite
//! quadrature ([`normal_nodes`]); `E[H(u)]` is the indicator itself.
//! The part of its own (`Var(H | u)`, the steps' independent errors) is not
//! added: it averages out over a window, and the share `rho` is calibrated
//! on the left-out loggers with the same formula, so what it leaves out is
//! absorbed in `rho`.
//!
//! # Calibration
//! `rho` is the share of the per-step error that persists. It is chosen so
//! that the left-out loggers' standardised errors `z_k = (pred_k - obs_k) /
//! sqrt(V_k(rho))` have the median of `z^2` of a standard normal variable,
//! `chi^2_1` median 0.45494 (the standardised cross-validation errors of
//! Cressie 1993, *Statistics for Spatial Data*, rev. ed., §2.6.4, should be
//! standard normal; the median rather than the mean so that one logger that
//! the others cannot predict, typically the one at a draughty door, does
//! not set the scale for every pot: common practice for robust scale). When
//! even `rho = 1` leaves the median above 0.45494, the variances are
//! multiplied by the ratio (`inflation`).
//!
//! Cost per location and `rho`: [`NODES`] evaluations of the indicator,
//! each O(steps); the calibration bisects `rho` in [`BISECTIONS`] steps over
//! the loggers.

/// The median of a chi-square variable with one degree of freedom,
/// `Phi^-1(0.75)^2` (Abramowitz & Stegun 1964, table 26.1:
/// `Phi^-1(0.75) = 0.6744897502`).
pub const CHI2_1_MEDIAN: f64 = 0.674_489_750_196_081_7 * 0.674_489_750_196_081_7;

/// Gauss–Hermite nodes used for the shared factor (exact for polynomials in
/// `u` up to degree 31).
pub const NODES: usize = 16;

/// Bisection steps for `rho` in [0, 1] (resolution `2^-20`).
pub const BISECTIONS: usize = 20;

/// Gauss–Hermite nodes and weights for the standard normal distribution:
/// `(u_k, w_k)` with `sum_k w_k f(u_k) ~ E[f(U)]`, `U ~ N(0, 1)`, exact for
/// polynomials of degree up to `2n - 1`. The physicists' nodes `x_k` (roots
/// of `H_n`) are found by Newton's method on the normalised three-term
/// recurrence (Press et al. 2007, *Numerical Recipes*, 3rd ed., §4.6,
/// routine `gauher`), then `u = sqrt(2) x`, `w = w_x / sqrt(pi)`.
/// Cost O(n^2) per node.
pub fn normal_nodes(n: usize) -> Vec<(f64, f64)> {
    let pim4 = std::f64::consts::PI.powf(-0.25);
    let mut x = vec![0.0f64; n];
    let mut w = vec![0.0f64; n];
    let nf = n as f64;
    let mut z = 0.0f64;
    for i in 0..n.div_ceil(2) {
        z = match i {
            0 => (2.0 * nf + 1.0).sqrt() - 1.85575 * (2.0 * nf + 1.0).powf(-1.0 / 6.0),
            1 => z - 1.14 * nf.powf(0.426) / z,
            2 => 1.86 * z - 0.86 * x[0],
            3 => 1.91 * z - 0.91 * x[1],
            _ => 2.0 * z - x[i - 2],
        };
        let mut pp = 1.0;
        for _ in 0..100 {
            let (mut p1, mut p2) = (pim4, 0.0f64);
            for j in 0..n {
                let p3 = p2;
                p2 = p1;
                let jf = j as f64;
                p1 = z * (2.0 / (jf + 1.0)).sqrt() * p2 - (jf / (jf + 1.0)).sqrt() * p3;
            }
            pp = (2.0 * nf).sqrt() * p2;
            let z1 = z;
            z = z1 - p1 / pp;
            if (z - z1).abs() <= 1e-15 * z.abs().max(1.0) {
                break;
            }
        }
        x[i] = z;
        x[n - 1 - i] = -z;
        w[i] = 2.0 / (pp * pp);
        w[n - 1 - i] = w[i];
    }
    let s = std::f64::consts::PI.sqrt();
    x.iter().zip(&w).map(|(x, w)| (std::f64::consts::SQRT_2 * x, w / s)).collect()
}

/// The indicator's value and persistent error variance at one location:
/// `(E_u[H(u)], Var_u(H(u)))` (see the module doc), for a mapped series
/// `mu` with per-step SEs `se` and the persistent share `rho` in [0, 1].
/// `eval(shifted, sd)` computes the expectation-form indicator of the
/// series `shifted` with per-step SEs `sd`; steps with a missing or
/// non-finite SE are not shifted. `None` when `eval` gives no value at some
/// node. Cost: `nodes.len()` calls of `eval`.
pub fn persistent_moments<F>(
    mu: &[f64],
    se: &[f64],
    rho: f64,
    nodes: &[(f64, f64)],
    mut eval: F,
) -> Option<(f64, f64)>
where
    F: FnMut(&[f64], &[f64]) -> Option<f64>,
{
    let rho = rho.clamp(0.0, 1.0);
    let (a, b) = (rho.sqrt(), (1.0 - rho).sqrt());
    let sd: Vec<f64> = se.iter().map(|s| if s.is_finite() { s * b } else { 0.0 }).collect();
    let mut shifted = vec![0.0; mu.len()];
    let (mut m1, mut m2) = (0.0, 0.0);
    for &(u, w) in nodes {
        for t in 0..mu.len() {
            let s = se.get(t).copied().filter(|s| s.is_finite()).unwrap_or(0.0);
            shifted[t] = mu[t] + s * a * u;
        }
        let h = eval(&shifted, &sd)?;
        m1 += w * h;
        m2 += w * h * h;
    }
    Some((m1, (m2 - m1 * m1).max(0.0)))
}

/// The calibrated persistence of the per-step errors.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Calibration {
    /// The persistent share `rho` of the per-step error variance.
    pub share: f64,
    /// The factor on the variances (1 unless `rho = 1` is not enough).
    pub inflation: f64,
    /// Left-out loggers used.
    pub loggers: usize,
    /// Median of their `z^2` after calibration (`CHI2_1_MEDIAN` unless a
    /// bound was reached).
    pub median_z2: f64,
}

fn median(mut v: Vec<f64>) -> Option<f64> {
    if v.is_empty() {
        return None;
    }
    v.sort_by(f64::total_cmp);
    let n = v.len();
    Some(if n % 2 == 1 { v[n / 2] } else { 0.5 * (v[n / 2 - 1] + v[n / 2]) })
}

/// Choose `rho` (see the module doc) from the left-out loggers' errors
/// `errors[k] = pred_k - obs_k` and their persistent variances
/// `variances(rho)[k]` (`None` where a logger gives no variance). Needs at
/// least three loggers with a positive variance at `rho = 1`; `None`
/// otherwise. Cost: [`BISECTIONS`]` + 1` calls of `variances`.
pub fn calibrate<F>(errors: &[f64], mut variances: F) -> Option<Calibration>
where
    F: FnMut(f64) -> Vec<Option<f64>>,
{
    let mut med = |rho: f64| -> Option<(f64, usize)> {
        let v = variances(rho);
        let z2: Vec<f64> = errors
            .iter()
            .zip(&v)
            .filter_map(|(e, v)| match v {
                Some(v) if *v > 0.0 && e.is_finite() => Some(e * e / v),
                Some(_) if *e == 0.0 => Some(0.0),
                Some(_) => Some(f64::INFINITY),
                None => None,
            })
            .collect();
        let n = z2.len();
        median(z2).map(|m| (m, n))
    };
    let (m1, n1) = med(1.0)?;
    if n1 < 3 || !m1.is_finite() {
        return None;
    }
    if m1 >= CHI2_1_MEDIAN {
        return Some(Calibration {
            share: 1.0,
            inflation: m1 / CHI2_1_MEDIAN,
            loggers: n1,
            median_z2: CHI2_1_MEDIAN,
        });
    }
    // The median of z^2 falls as rho grows (more of the error persists over
    // the window); bisect for the crossing of the chi^2_1 median.
    let (mut lo, mut hi) = (0.0f64, 1.0f64);
    let mut at_hi = m1;
    for _ in 0..BISECTIONS {
        let mid = 0.5 * (lo + hi);
        match med(mid) {
            Some((m, _)) if m > CHI2_1_MEDIAN => lo = mid,
            Some((m, _)) => {
                hi = mid;
                at_hi = m;
            }
            None => lo = mid,
        }
    }
    Some(Calibration { share: hi, inflation: 1.0, loggers: n1, median_z2: at_hi })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::climate::exceedance::{normal_cdf, prob_below};
    use approx::assert_relative_eq;

    /// The nodes integrate the moments of the standard normal distribution
    /// exactly: 1, 0, 1, 0, 3, 15, 105 for degrees 0, 1, 2, 3, 4, 6, 8.
    #[test]
    fn nodes_reproduce_normal_moments() {
        let nodes = normal_nodes(NODES);
        let m = |k: i32| nodes.iter().map(|(u, w)| w * u.powi(k)).sum::<f64>();
        assert_relative_eq!(m(0), 1.0, epsilon = 1e-13);
        assert!(m(1).abs() < 1e-13 && m(3).abs() < 1e-12);
        assert_relative_eq!(m(2), 1.0, epsilon = 1e-12);
        assert_relative_eq!(m(4), 3.0, epsilon = 1e-11);
        assert_relative_eq!(m(6), 15.0, epsilon = 1e-10);
        assert_relative_eq!(m(8), 105.0, epsilon = 1e-9);
        let three = normal_nodes(3); // +-sqrt(3) with weight 1/6, 0 with 2/3
        assert_relative_eq!(three[0].0.abs(), 3f64.sqrt(), epsilon = 1e-13);
        assert_relative_eq!(three[1].1, 2.0 / 3.0, epsilon = 1e-13);
    }

    /// With a shared factor the expectation is unchanged (law of total
    /// expectation): `E_u[Phi((b - mu - s sqrt(rho) u) / (s sqrt(1 - rho)))]
    /// = Phi((b - mu) / s)`, the identity `E[Phi(a + c U)] = Phi(a /
    /// sqrt(1 + c^2))` (Owen 1980, *Comm. Stat. B* 9: 389-419, formula
    /// 10,010.8). And at `rho = 1` one step's variance is that of a
    /// Bernoulli(p) indicator, `p (1 - p)`.
    #[test]
    fn shared_factor_keeps_the_expectation() {
        let nodes = normal_nodes(NODES);
        let (mu, se, b) = (vec![12.4, 11.7, 12.05], vec![0.5, 0.8, 0.3], 12.0);
        let eval = |m: &[f64], s: &[f64]| Some((0..m.len()).map(|t| prob_below(m[t], s[t], b)).sum::<f64>());
        let direct: f64 = (0..3).map(|t| prob_below(mu[t], se[t], b)).sum();
        // Near rho = 1 the integrand in u approaches a step and 16 nodes
        // lose accuracy (about 1 % of the sum at rho = 0.95).
        for (rho, tol) in [(0.0, 1e-12), (0.3, 2e-4), (0.7, 2e-3), (0.95, 0.03)] {
            let (m, v) = persistent_moments(&mu, &se, rho, &nodes, eval).unwrap();
            assert!((m - direct).abs() < tol, "rho {rho}: {m} vs {direct}");
            assert!(v >= 0.0);
        }
        let (_, v0) = persistent_moments(&mu, &se, 0.0, &nodes, eval).unwrap();
        assert!(v0 < 1e-12, "{v0}");
        // One step at rho = 1: p (1 - p), to quadrature accuracy of a step function.
        let p = normal_cdf((b - 12.4) / 0.5);
        let (_, v1) = persistent_moments(&[12.4], &[0.5], 1.0, &normal_nodes(64), eval).unwrap();
        assert!((v1 - p * (1.0 - p)).abs() < 0.02, "{v1} vs {}", p * (1.0 - p));
        // A linear indicator (the mean) at rho: variance rho * mean(s)^2.
        let mean = |m: &[f64], _: &[f64]| Some(m.iter().sum::<f64>() / m.len() as f64);
        let (_, vl) = persistent_moments(&mu, &se, 0.4, &nodes, mean).unwrap();
        // m2 - m1^2 with m1 near 12 cancels about 1e-13 of 144.
        assert_relative_eq!(vl, 0.4 * (1.6f64 / 3.0).powi(2), max_relative = 1e-9);
    }

    /// Calibration recovers the persistent share of errors drawn from the
    /// model itself: many loggers whose errors are `sqrt(V_k(rho0)) z_k` with
    /// `z_k` at the normal quantiles give back `rho0`; errors larger than
    /// even `rho = 1` allows are met by inflation.
    #[test]
    fn calibration_recovers_the_share() {
        let k = 41;
        let var =
            |rho: f64| -> Vec<Option<f64>> { (0..k).map(|i| Some(rho * (1.0 + i as f64 / 10.0))).collect() };
        // z at the quantiles (i + 0.5) / k of N(0, 1), by bisection on Phi.
        let q = |p: f64| {
            let (mut a, mut b) = (-10.0, 10.0);
            for _ in 0..200 {
                let m = 0.5 * (a + b);
                if normal_cdf(m) < p { a = m } else { b = m }
            }
            0.5 * (a + b)
        };
        let rho0 = 0.37;
        let errors: Vec<f64> = (0..k)
            .map(|i| q((i as f64 + 0.5) / k as f64) * (rho0 * (1.0 + i as f64 / 10.0)).sqrt())
            .collect();
        let c = calibrate(&errors, var).unwrap();
        // The median of z^2 over 41 quantiles is that of chi^2_1 to within
        // the quantile grid.
        assert!((c.share - rho0).abs() < 0.03, "{c:?}");
        assert_eq!(c.inflation, 1.0);
        let big: Vec<f64> = errors.iter().map(|e| e * 3.0).collect();
        let c = calibrate(&big, var).unwrap();
        assert_eq!(c.share, 1.0);
        assert!((c.inflation - 9.0 * rho0).abs() < 0.3, "{c:?}");
        assert!(calibrate(&errors[..2], |_| vec![Some(1.0); 2]).is_none());
    }
}
