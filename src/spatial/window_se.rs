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
//! indicator's error, computed by Gauss–Hermite quadrature
//! ([`normal_nodes`]); `E[H(u)]` is the indicator itself. Given `u` the
//! steps' own errors are independent, so `Var(H | u)` is the sum of the
//! steps' own variances (for hours below a threshold the Bernoulli variance
//! `p_t (1 - p_t)` of each step's indicator,
//! [`crate::climate::DayValue::own_variance`]), and the indicator's error
//! variance is the law of total variance,
//! `Var(H) = Var_u(E[H | u]) + E_u[Var(H | u)]` ([`WindowMoments`]).
//! The second term matters for a count of hours: where every step is far
//! from the threshold but a few, the shared part alone gives an SE of
//! 1e-35 h while the true count still differs from its expectation by the
//! Bernoulli spread of those few steps (a heavy tail of the mapped
//! driver's standardised errors over simulated studies before this term
//! was added).
//!
//! # Calibration
//! Both parts are estimated from the leave-one-sensor-out per-step errors
//! at the loggers (each logger's series predicted from the others, the
//! steps in the indicator's period), thousands of values:
//! * the per-step SEs are scaled so that the standardised errors `z_t,k`
//!   have the median of `z^2` of a standard normal variable ([`step_scale`];
//!   Cressie 1993, *Statistics for Spatial Data*, rev. ed., §2.6.4: the
//!   standardised cross-validation errors should be standard normal);
//! * `rho` is the intraclass correlation of the `z_t,k` grouped by logger
//!   ([`intraclass`]): the share of a step's error that a location keeps
//!   at every step.
//!
//! At a pot the per-step SEs `s_t` are those of the pot's true, noise-free
//! climate: the kriging variance less the sensors' measurement-error
//! variance ([`super::noise`]), estimated from the readings' temporal
//! structure. The calibration above (`k`, `rho`) is applied to them
//! unchanged, i.e. the standardised errors are taken to have the same
//! structure at a pot as at a left-out logger. The alternative that keeps
//! the persistent part's absolute size and takes the noise out of the own
//! part only, `own_t^2 = (1 - rho) k^2 (s_t^2 + c_ME) - c_ME`, leaves no own
//! error at pots near a logger when `k < 1` and gave SEs of zero (mapped
//! driver's MSSE infinite in 3 of 40 seeds; with the standardised form
//! 33-37 of 40 within 0.5-2, docs/spatial.md).
//!
//! The window indicator's own left-out errors at the loggers (one value per
//! logger, 10-15 values) are kept as a check (`median_z2`), not used to
//! tune both ways: tuning a scalar on the median of 15 values set the pots'
//! SEs by a factor of up to 5 either way from one simulated study to the
//! next (mapped driver's MSSE against the truth within 0.5-2 in 21-27 of 40
//! seeds), while the per-step estimates are stable (31 of 40, range
//! 0.35-1.6; docs/spatial.md). The check widens the SEs only when it
//! rejects them: when the median `z^2` of the `k` left-out loggers exceeds
//! the 95 % point of that median for honest SEs ([`median_z2_bound`]), the
//! window variances are multiplied by `median_z2 / CHI2_1_MEDIAN`
//! (`inflation`), which brings the check's median to that of `chi^2_1`.
//! The per-step scale is fitted over every step in the period, most of
//! them benign; on a 60-pot bench with six loggers and a draught that the
//! drift misses at night it shrank the SEs to 0.14 of the kriging SEs, the
//! window check gave a median `z^2` of 12.5 (z of 86 and 114 at two
//! loggers) and the mapped driver's SEs were 1.1 h against errors of
//! 13.6 h RMS; this rule widens them 5.2-fold there and leaves a study
//! whose check passes untouched (our choice, not a published rule).
//!
//! Cost per location: [`NODES`] evaluations of the indicator, each
//! O(steps); the calibration is O(steps x loggers).

/// The median of a chi-square variable with one degree of freedom,
/// `Phi^-1(0.75)^2` (Abramowitz & Stegun 1964, table 26.1:
/// `Phi^-1(0.75) = 0.6744897502`).
pub const CHI2_1_MEDIAN: f64 = 0.674_489_750_196_081_7 * 0.674_489_750_196_081_7;

/// Gauss–Hermite nodes used for the shared factor (exact for polynomials in
/// `u` up to degree 31).
pub const NODES: usize = 16;

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

/// The moments of a window indicator at one location under the one-factor
/// error model (see the module doc).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct WindowMoments {
    /// `E_u[H(u)]`, the indicator itself.
    pub value: f64,
    /// `Var_u(H(u))`, the part of the error shared by every step.
    pub persistent: f64,
    /// `E_u[Var(H | u)]`, the steps' own, independent errors.
    pub own: f64,
}

impl WindowMoments {
    /// The indicator's error variance, `persistent + own` (law of total
    /// variance).
    pub fn variance(&self) -> f64 {
        self.persistent + self.own
    }
}

/// The indicator's moments at one location ([`WindowMoments`]), for a
/// mapped series `mu` with per-step SEs `se` and the persistent share `rho`
/// in [0, 1]. `eval(shifted, sd)` computes the expectation-form indicator of
/// the series `shifted` with per-step SEs `sd` and its variance when the
/// steps' errors are independent (`(E[H | u], Var(H | u))`); steps with a
/// missing or non-finite SE are not shifted. `None` when `eval` gives no
/// value at some node. Cost: `nodes.len()` calls of `eval`.
pub fn window_moments<F>(
    mu: &[f64],
    se: &[f64],
    rho: f64,
    nodes: &[(f64, f64)],
    mut eval: F,
) -> Option<WindowMoments>
where
    F: FnMut(&[f64], &[f64]) -> Option<(f64, f64)>,
{
    let rho = rho.clamp(0.0, 1.0);
    let (a, b) = (rho.sqrt(), (1.0 - rho).sqrt());
    let sd: Vec<f64> = se.iter().map(|s| if s.is_finite() { s * b } else { 0.0 }).collect();
    let mut shifted = vec![0.0; mu.len()];
    let (mut m1, mut m2, mut own) = (0.0, 0.0, 0.0);
    for &(u, w) in nodes {
        for t in 0..mu.len() {
            let s = se.get(t).copied().filter(|s| s.is_finite()).unwrap_or(0.0);
            shifted[t] = mu[t] + s * a * u;
        }
        let (h, v) = eval(&shifted, &sd)?;
        m1 += w * h;
        m2 += w * h * h;
        own += w * v.max(0.0);
    }
    Some(WindowMoments { value: m1, persistent: (m2 - m1 * m1).max(0.0), own })
}

/// The calibration of the per-step errors behind an indicator's SEs.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Calibration {
    /// The persistent share `rho` of the per-step error variance: the
    /// intraclass correlation of the left-out loggers' standardised per-step
    /// errors ([`intraclass`]).
    pub share: f64,
    /// The factor on the window variances ([`window_inflation`]; 1: the SEs
    /// follow from the per-step calibration alone).
    pub inflation: f64,
    /// The factor on the per-step kriging SEs ([`step_scale`]; 1 when not
    /// estimated).
    pub step_scale: f64,
    /// Left-out loggers whose window indicator was checked.
    pub loggers: usize,
    /// The measurement-error variance of the readings, left out of the
    /// pots' SEs ([`super::noise`]; 0 when not estimated).
    pub noise: f64,
    /// The check: the median over those loggers of the window indicator's
    /// `z^2` under the per-step calibration, before `inflation` (near [`CHI2_1_MEDIAN`] when the
    /// window SEs are honest; with 10-15 loggers a single median varies by
    /// a factor of about 2 either way).
    pub median_z2: f64,
}

/// The median (mean of the middle two for an even count); `None` when empty.
pub fn median(mut v: Vec<f64>) -> Option<f64> {
    if v.is_empty() {
        return None;
    }
    v.sort_by(f64::total_cmp);
    let n = v.len();
    Some(if n % 2 == 1 { v[n / 2] } else { 0.5 * (v[n / 2 - 1] + v[n / 2]) })
}

/// The factor on the per-step kriging SEs that gives the left-out loggers'
/// per-step standardised errors `z_t,k^2 = (pred_t,k - obs_t,k)^2 / se_t,k^2`
/// the median of `chi^2_1`: `sqrt(median(z^2) / CHI2_1_MEDIAN)` (Cressie
/// 1993, §2.6.4, as in the module doc; the median because the per-step errors
/// are heavy-tailed: a logger at a draughty door misses by several SEs at
/// night while the others miss by a fraction of one, and the mean `z^2`
/// would widen every step's distribution for that one logger). `None` for
/// fewer than 10 values or a zero median. Cost O(n log n).
pub fn step_scale(z2: Vec<f64>) -> Option<f64> {
    if z2.len() < 10 {
        return None;
    }
    let m = median(z2)?;
    (m > 0.0 && m.is_finite()).then(|| (m / CHI2_1_MEDIAN).sqrt())
}

/// The 95 % point of the median of `k` independent `chi^2_1` values: the
/// largest median `z^2` of `k` left-out loggers that honest SEs give in 19
/// of 20 studies. For odd `k` the median is the order statistic
/// `j = (k + 1) / 2`; for even `k` the upper of the middle two, `j = k/2 + 1`
/// (at least the mean of the middle two, so the bound is conservative: it
/// rejects less often than 5 %). `P(X_(j) <= x) = P(Bin(k, F(x)) >= j)`
/// (David & Nagaraja 2003, *Order Statistics*, 3rd ed., eq. 2.1.3), solved for
/// `F` by bisection, then `x` is the `chi^2_1` quantile of `F`. `None` for
/// `k = 0`. Cost O(k) per bisection step, 60 steps.
pub fn median_z2_bound(k: usize) -> Option<f64> {
    use statrs::distribution::{ChiSquared, ContinuousCDF};
    if k == 0 {
        return None;
    }
    let j = k / 2 + 1;
    let tail = |f: f64| -> f64 {
        // P(Bin(k, f) >= j), summed term by term.
        let mut c = 1.0; // C(k, i)
        let mut total = 0.0;
        for i in 0..=k {
            if i > 0 {
                c *= (k - i + 1) as f64 / i as f64;
            }
            if i >= j {
                total += c * f.powi(i as i32) * (1.0 - f).powi((k - i) as i32);
            }
        }
        total
    };
    let (mut lo, mut hi) = (0.0, 1.0);
    for _ in 0..60 {
        let mid = 0.5 * (lo + hi);
        if tail(mid) < 0.95 { lo = mid } else { hi = mid }
    }
    ChiSquared::new(1.0).ok().map(|c| c.inverse_cdf(0.5 * (lo + hi)))
}

/// The factor on the window variances from the window check: 1 unless the
/// median `z^2` of the `k` left-out loggers exceeds [`median_z2_bound`]`(k)`,
/// then `median_z2 / CHI2_1_MEDIAN` (module docs, "Calibration"). Needs at
/// least 5 loggers (fewer: 1).
pub fn window_inflation(median_z2: f64, k: usize) -> f64 {
    match median_z2_bound(k) {
        Some(b) if k >= 5 && median_z2.is_finite() && median_z2 > b => median_z2 / CHI2_1_MEDIAN,
        _ => 1.0,
    }
}

/// The intraclass correlation of the standardised per-step errors grouped
/// by location (one group per left-out logger), by the one-way ANOVA
/// estimator `(MSB - MSW) / (MSB + (n0 - 1) MSW)` with `n0` the adjusted
/// mean group size (Searle, Casella & McCulloch 1992, *Variance
/// Components*, §3.5), clamped to [0, 1]. `None` for fewer than three groups
/// of at least two values. Cost O(values).
pub fn intraclass(groups: &[Vec<f64>]) -> Option<f64> {
    let g: Vec<&Vec<f64>> = groups.iter().filter(|g| g.len() >= 2).collect();
    let a = g.len();
    if a < 3 {
        return None;
    }
    let n: usize = g.iter().map(|g| g.len()).sum();
    let mean = g.iter().flat_map(|g| g.iter()).sum::<f64>() / n as f64;
    let (mut ssb, mut ssw) = (0.0, 0.0);
    for grp in &g {
        let m = grp.iter().sum::<f64>() / grp.len() as f64;
        ssb += grp.len() as f64 * (m - mean).powi(2);
        ssw += grp.iter().map(|x| (x - m).powi(2)).sum::<f64>();
    }
    let msb = ssb / (a - 1) as f64;
    let msw = ssw / (n - a) as f64;
    let n0 =
        (n as f64 - g.iter().map(|g| (g.len() * g.len()) as f64).sum::<f64>() / n as f64) / (a - 1) as f64;
    let r = (msb - msw) / (msb + (n0 - 1.0) * msw);
    r.is_finite().then(|| r.clamp(0.0, 1.0))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::climate::exceedance::{indicator_variance, normal_cdf, prob_below};
    use approx::assert_relative_eq;

    /// The bound on the median of `k` chi-square(1) values: for `k = 1` the
    /// 95 % point of chi-square(1), 3.841 (Abramowitz & Stegun 1964, table
    /// 26.8); for `k = 3` the median is the middle order statistic and
    /// `P(X_(2) <= x) = 3F^2 - 2F^3 = 0.95` gives `F = 0.86465` (the root of
    /// the cubic, checked here by substitution), whose chi-square(1) quantile
    /// is `Phi^-1((1 + F) / 2)^2`; and against 20,000 simulated medians of
    /// 10 values, of which about 5 % (at most, the bound being
    /// conservative for even `k`) lie above it.
    #[test]
    fn median_bound_matches_order_statistics() {
        use rand::SeedableRng;
        use rand_chacha::ChaCha8Rng;
        use rand_distr::{Distribution, StandardNormal};
        assert!((median_z2_bound(1).unwrap() - 3.841459).abs() < 1e-5);
        let f: f64 = 0.864_650_1;
        assert!((3.0 * f * f - 2.0 * f * f * f - 0.95).abs() < 1e-6);
        // Phi^-1(0.932325) = 1.49325 (inverse normal by statrs' Normal).
        use statrs::distribution::{ContinuousCDF, Normal};
        let z = Normal::new(0.0, 1.0).unwrap().inverse_cdf((1.0 + f) / 2.0);
        assert!((median_z2_bound(3).unwrap() - z * z).abs() < 1e-5);
        let b = median_z2_bound(10).unwrap();
        let mut rng = ChaCha8Rng::seed_from_u64(11);
        let runs = 20_000;
        let above = (0..runs)
            .filter(|_| {
                let v: Vec<f64> = (0..10)
                    .map(|_| {
                        let u: f64 = StandardNormal.sample(&mut rng);
                        u * u
                    })
                    .collect();
                median(v).unwrap() > b
            })
            .count() as f64
            / runs as f64;
        // Conservative for even k: at most 5 % plus 4 Monte Carlo SEs.
        assert!(above < 0.05 + 4.0 * (0.05f64 * 0.95 / runs as f64).sqrt() && above > 0.01, "{above}");
        assert_eq!(window_inflation(12.5, 6), 12.5 / CHI2_1_MEDIAN);
        assert_eq!(window_inflation(0.9, 12), 1.0);
        assert_eq!(window_inflation(50.0, 4), 1.0);
    }

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
    /// 10,010.8). And for one step the total variance is that of a
    /// Bernoulli(p) indicator, `p (1 - p)`, whatever the share.
    #[test]
    fn shared_factor_keeps_the_expectation() {
        let nodes = normal_nodes(NODES);
        let (mu, se, b) = (vec![12.4, 11.7, 12.05], vec![0.5, 0.8, 0.3], 12.0);
        let eval = |m: &[f64], s: &[f64]| {
            let p: Vec<f64> = (0..m.len()).map(|t| prob_below(m[t], s[t], b)).collect();
            Some((p.iter().sum::<f64>(), p.iter().map(|p| indicator_variance(*p)).sum::<f64>()))
        };
        let direct: f64 = (0..3).map(|t| prob_below(mu[t], se[t], b)).sum();
        // Near rho = 1 the integrand in u approaches a step and 16 nodes
        // lose accuracy (about 1 % of the sum at rho = 0.95).
        for (rho, tol) in [(0.0, 1e-12), (0.3, 2e-4), (0.7, 2e-3), (0.95, 0.03)] {
            let m = window_moments(&mu, &se, rho, &nodes, eval).unwrap();
            assert!((m.value - direct).abs() < tol, "rho {rho}: {} vs {direct}", m.value);
            assert!(m.persistent >= 0.0 && m.own >= 0.0);
        }
        let m0 = window_moments(&mu, &se, 0.0, &nodes, eval).unwrap();
        assert!(m0.persistent < 1e-12, "{m0:?}");
        let p0: f64 = (0..3).map(|t| indicator_variance(prob_below(mu[t], se[t], b))).sum();
        assert_relative_eq!(m0.own, p0, max_relative = 1e-12);
        // One step: p (1 - p) at every share (to quadrature accuracy of a
        // step function near rho = 1).
        let p = normal_cdf((b - 12.4) / 0.5);
        for rho in [0.0, 0.5, 1.0] {
            let m = window_moments(&[12.4], &[0.5], rho, &normal_nodes(64), eval).unwrap();
            assert!((m.variance() - p * (1.0 - p)).abs() < 0.02, "rho {rho}: {m:?} vs {}", p * (1.0 - p));
        }
        // A linear indicator (the mean) at rho: persistent variance rho * mean(s)^2.
        let mean = |m: &[f64], _: &[f64]| Some((m.iter().sum::<f64>() / m.len() as f64, 0.0));
        let ml = window_moments(&mu, &se, 0.4, &nodes, mean).unwrap();
        // m2 - m1^2 with m1 near 12 cancels about 1e-13 of 144.
        assert_relative_eq!(ml.persistent, 0.4 * (1.6f64 / 3.0).powi(2), max_relative = 1e-9);
    }

    /// The total variance of hours below against Monte Carlo draws of the
    /// one-factor error model itself: a 60-step series near the threshold,
    /// `T_t = mu_t + s_t (sqrt(rho) u + sqrt(1 - rho) v_t)`, counted by the
    /// plain rule; the variance of the counts matches `persistent + own`
    /// within four Monte Carlo SEs of a sample variance.
    #[test]
    fn total_variance_matches_monte_carlo() {
        use rand::{RngExt, SeedableRng};
        use rand_chacha::ChaCha8Rng;
        use rand_distr::StandardNormal;
        let n = 60;
        let b = 10.5;
        let mu: Vec<f64> = (0..n).map(|t| 10.5 + 1.2 * (t as f64 / 7.0).sin()).collect();
        let se: Vec<f64> = (0..n).map(|t| 0.2 + 0.1 * (t % 5) as f64).collect();
        let eval = |m: &[f64], s: &[f64]| {
            let p: Vec<f64> = (0..m.len()).map(|t| prob_below(m[t], s[t], b)).collect();
            Some((p.iter().sum::<f64>(), p.iter().map(|p| indicator_variance(*p)).sum::<f64>()))
        };
        let mut rng = ChaCha8Rng::seed_from_u64(11);
        let reps = 20_000;
        for rho in [0.0, 0.3, 0.8] {
            let m = window_moments(&mu, &se, rho, &normal_nodes(NODES), eval).unwrap();
            let counts: Vec<f64> = (0..reps)
                .map(|_| {
                    let u: f64 = rng.sample(StandardNormal);
                    (0..n)
                        .filter(|&t| {
                            let v: f64 = rng.sample(StandardNormal);
                            mu[t] + se[t] * (rho.sqrt() * u + (1.0 - rho).sqrt() * v) < b
                        })
                        .count() as f64
                })
                .collect();
            let r = reps as f64;
            let mean = counts.iter().sum::<f64>() / r;
            let var = counts.iter().map(|c| (c - mean).powi(2)).sum::<f64>() / (r - 1.0);
            let m4 = counts.iter().map(|c| (c - mean).powi(4)).sum::<f64>() / r;
            let tol = 4.0 * ((m4 - var * var) / r).sqrt();
            assert!((var - m.variance()).abs() <= tol, "rho {rho}: MC {var} vs {m:?} (tol {tol})");
            assert!((mean - m.value).abs() <= 4.0 * (var / r).sqrt() + 0.02, "rho {rho}: {mean} vs {m:?}");
        }
    }

    /// The ANOVA estimator of the intraclass correlation on a hand example
    /// (groups {1, 2}, {3, 4}, {5, 6}: MSB = 8, MSW = 0.5, n0 = 2, so
    /// (8 - 0.5) / (8 + 0.5) = 15/17), and on seeded draws of the
    /// exchangeable model `x = sqrt(rho) u_g + sqrt(1 - rho) v` (40 groups
    /// of 300, unequal sizes), where it recovers `rho` within 0.05 (the
    /// estimator's SE with 40 groups is about 0.03 at rho = 0.2,
    /// Searle et al. 1992 §3.5).
    #[test]
    fn intraclass_correlation() {
        let r = intraclass(&[vec![1.0, 2.0], vec![3.0, 4.0], vec![5.0, 6.0]]).unwrap();
        assert_relative_eq!(r, 15.0 / 17.0, max_relative = 1e-12);
        assert!(intraclass(&[vec![1.0, 2.0], vec![3.0, 4.0], vec![5.0]]).is_none());
        use rand::{RngExt, SeedableRng};
        use rand_chacha::ChaCha8Rng;
        use rand_distr::StandardNormal;
        let mut rng = ChaCha8Rng::seed_from_u64(5);
        for rho in [0.0f64, 0.2, 0.6] {
            let groups: Vec<Vec<f64>> = (0..40)
                .map(|g| {
                    let u: f64 = rng.sample(StandardNormal);
                    (0..250 + g * 3)
                        .map(|_| rho.sqrt() * u + (1.0 - rho).sqrt() * rng.sample::<f64, _>(StandardNormal))
                        .collect()
                })
                .collect();
            let r = intraclass(&groups).unwrap();
            assert!((r - rho).abs() < 0.05 + 0.1 * rho, "rho {rho}: {r}");
        }
        // A constant shift per group only: correlation 1.
        let r = intraclass(&[vec![1.0; 5], vec![2.0; 5], vec![4.0; 5]]).unwrap();
        assert_eq!(r, 1.0);
    }

    /// The per-step scale: errors at the normal quantiles times 2 give a
    /// scale of 2; too few values give none.
    #[test]
    fn step_scale_of_quantiles() {
        let k = 401;
        let q = |p: f64| {
            let (mut a, mut b) = (-10.0, 10.0);
            for _ in 0..200 {
                let m = 0.5 * (a + b);
                if normal_cdf(m) < p { a = m } else { b = m }
            }
            0.5 * (a + b)
        };
        let z2: Vec<f64> = (0..k).map(|i| (2.0 * q((i as f64 + 0.5) / k as f64)).powi(2)).collect();
        assert!((step_scale(z2).unwrap() - 2.0).abs() < 0.01);
        assert!(step_scale(vec![1.0; 9]).is_none());
    }
}
