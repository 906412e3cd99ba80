//! Standard errors of threshold indicators of a kriged temperature series
//! (hours below or above a threshold, integrated degree days) over a pot's
//! window, from the per-step kriging errors.
//!
//! The window indicator is a non-linear functional of the whole series, so
//! its SE is not the kriging SE of the sensors' window values (that SE comes
//! from a variogram of window sums fitted on a handful of loggers, and is the
//! same size at a pot beside a logger as far from all of them). Here the
//! error of the kriged series at a pot is taken as `e_t = sigma_t u` with one
//! standard normal `u` for all steps: the kriging errors of one pot perfectly
//! correlated through time, the conservative limit, since the error comes
//! mostly from the fixed sensor geometry (the same assumption as
//! [`super::mapping::window_mean_se`]). The indicator is recomputed on the
//! shifted series `mu_t + sigma_t u_q` at `Q` equal-probability quantiles
//! `u_q = Phi^-1((q - 1/2) / Q)` (the midpoint rule in probability, robust to
//! the indicator being a step function of `u`), and the SE is the standard
//! deviation of these values. Cost: `Q` indicator evaluations per pot,
//! O(Q steps).

use crate::climate::config::{DegreeDayMethod, Statistic, Variable};
use crate::climate::{Calendar, Indicator, LocationSeries, combine_window, daily_values};
use statrs::distribution::{ContinuousCDF, Normal};
use std::ops::Range;

/// Number of quantiles of the shared standard normal error.
pub const QUANTILES: usize = 32;

/// True for the indicators whose SE [`shifted_se`] computes: hours below,
/// hours above and integrated degree days of temperature.
pub fn applies(ind: &Indicator) -> bool {
    ind.variable == Variable::Temperature
        && matches!(
            ind.statistic,
            Statistic::HoursBelow { .. }
                | Statistic::HoursAbove { .. }
                | Statistic::DegreeDays { method: DegreeDayMethod::Integrated, .. }
        )
}

/// The equal-probability quantiles `Phi^-1((q - 1/2) / n)`, `q = 1..n`.
pub fn normal_quantiles(n: usize) -> Vec<f64> {
    let z = Normal::standard();
    (0..n).map(|q| z.inverse_cdf((q as f64 + 0.5) / n as f64)).collect()
}

/// The SE of `ind` over the days `window` at a location whose kriged
/// temperature is `mu` with per-step kriging SE `sigma` (the other
/// variables, if the indicator needed them, are not used: see [`applies`]).
/// `None` when the indicator has no value on the shifted series or `sigma`
/// is missing at a step where `mu` is not.
pub fn shifted_se(
    ind: &Indicator,
    cal: &Calendar,
    mu: &[f64],
    sigma: &[f64],
    window: Range<usize>,
    min_coverage: f64,
    quantiles: &[f64],
) -> Option<f64> {
    if mu.iter().zip(sigma).any(|(m, s)| m.is_finite() && !s.is_finite()) {
        return None;
    }
    let nan = vec![f64::NAN; mu.len()];
    let mut shifted = vec![0.0; mu.len()];
    let mut vals = Vec::with_capacity(quantiles.len());
    for &u in quantiles {
        for ((x, m), s) in shifted.iter_mut().zip(mu).zip(sigma) {
            *x = m + s * u;
        }
        let series = LocationSeries { temperature: &shifted, humidity: &nan, light: &nan };
        let daily: Vec<Option<f64>> =
            daily_values(ind, cal, &series, min_coverage).into_iter().map(|d| d.value).collect();
        vals.push(combine_window(&daily, window.clone(), ind.statistic.combine()).value?);
    }
    let n = vals.len() as f64;
    let mean = vals.iter().sum::<f64>() / n;
    Some((vals.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / n).sqrt())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::climate::config::Period;
    use crate::io::layout::parse_local_datetime;
    use approx::assert_relative_eq;

    /// The quantiles integrate the normal moments closely: mean 0 by symmetry,
    /// variance 0.961 with 32 points, within 5 % of 1 (the midpoint rule
    /// misses the tails beyond the outermost quantile, so the SE of a linear
    /// indicator comes out about 2 % small).
    #[test]
    fn quantiles_of_the_standard_normal() {
        let q = normal_quantiles(QUANTILES);
        assert_relative_eq!(q.iter().sum::<f64>(), 0.0, epsilon = 1e-9);
        let v = q.iter().map(|u| u * u).sum::<f64>() / q.len() as f64;
        assert!((v - 1.0).abs() < 0.05 && v < 1.0, "{v}");
    }

    /// A day at a constant kriged 11 °C with SE 1 °C, threshold 12 °C: the
    /// hours below are 24 h for u < 1 and 0 for u > 1, so the SE is
    /// 24 sqrt(p (1 - p)) h with p = Phi(1) = 0.8413 (up to the quantile
    /// grid: p is the share of quantiles below 1, 27/32); zero SE gives 0.
    #[test]
    fn se_of_hours_below_a_threshold() {
        let s = parse_local_datetime("2026-03-01").unwrap();
        let cal = Calendar::new(chrono_tz::UTC, s, s + chrono::Duration::days(1), 3_600_000).unwrap();
        let ind = Indicator {
            name: "x".into(),
            variable: Variable::Temperature,
            statistic: Statistic::HoursBelow { threshold: 12.0 },
            period: Period::All,
            variable_at: (1, 1),
            period_at: (1, 1),
        };
        assert!(applies(&ind));
        let q = normal_quantiles(QUANTILES);
        let below = q.iter().filter(|u| **u < 1.0).count() as f64 / q.len() as f64;
        let se = shifted_se(&ind, &cal, &[11.0; 24], &[1.0; 24], 0..1, 0.9, &q).unwrap();
        assert_relative_eq!(se, 24.0 * (below * (1.0 - below)).sqrt(), max_relative = 1e-12);
        assert!((below - 0.8413).abs() < 0.03);
        assert_eq!(shifted_se(&ind, &cal, &[11.0; 24], &[0.0; 24], 0..1, 0.9, &q), Some(0.0));
        assert_eq!(shifted_se(&ind, &cal, &[11.0; 24], &[f64::NAN; 24], 0..1, 0.9, &q), None);
    }
}
