//! Indicators from one location's regular series: per-day values
//! ([`daily_values`]) and their combination over a window ([`combine_window`]).
//! Both are plain Rust on slices (no polars), cheap enough to call for every
//! pot's mapped series, so that non-linear indicators (hours below, degree
//! days, VPD from mapped temperature and humidity) are computed from the
//! mapped series itself rather than by mapping a sensor summary.
//!
//! Conventions (see `docs/climate.md`):
//! * A step is *valid* for an indicator when its variable is finite and, for
//!   `period = day | night`, its day flag is known. A day is valid when its
//!   valid steps are at least `min_coverage` of the whole local day's steps.
//! * Means, minima and maxima use the valid steps of the period.
//! * Accumulated statistics (hours below/above, degree days, daily light
//!   integral) sum the valid steps of the period and scale the sum by
//!   `expected steps / valid steps` of the day, i.e. missing steps are taken
//!   to resemble the day's valid ones (a day with 95 % coverage is not
//!   reported 5 % short).
//! * Thresholds are strict: `hours_below` counts `v < threshold`,
//!   `hours_above` counts `v > threshold`.

use super::calendar::Calendar;
use super::config::{DegreeDayMethod, Indicator, Period, Statistic, Variable};
use super::exceedance::{
    capped_excess_variance, expected_capped_excess, indicator_variance, prob_above, prob_below,
};
use super::psychro::{dew_point, vapour_pressure_deficit};
use std::borrow::Cow;
use std::ops::Range;

/// One location's regular series on the calendar's grid (NaN = missing).
#[derive(Debug, Clone, Copy)]
pub struct LocationSeries<'a> {
    /// Air temperature, °C, one value per grid step.
    pub temperature: &'a [f64],
    /// Relative humidity, %, one value per grid step (all NaN if not measured).
    pub humidity: &'a [f64],
    /// PPFD, µmol m-2 s-1, one value per grid step (all NaN if not measured).
    pub light: &'a [f64],
}

impl<'a> LocationSeries<'a> {
    /// The series of `variable`; VPD (kPa) and dew point (°C) are derived
    /// step by step from temperature and humidity (FAO-56, see
    /// [`super::psychro`]). Missing inputs give NaN. Cost O(steps).
    pub fn variable(&self, variable: Variable) -> Cow<'a, [f64]> {
        let derive = |f: fn(f64, f64) -> Option<f64>| -> Cow<'a, [f64]> {
            Cow::Owned(
                self.temperature
                    .iter()
                    .zip(self.humidity)
                    .map(|(&t, &h)| f(t, h).unwrap_or(f64::NAN))
                    .collect(),
            )
        };
        match variable {
            Variable::Temperature => Cow::Borrowed(self.temperature),
            Variable::Humidity => Cow::Borrowed(self.humidity),
            Variable::Light => Cow::Borrowed(self.light),
            Variable::Vpd => derive(vapour_pressure_deficit),
            Variable::DewPoint => derive(dew_point),
        }
    }
}

/// An indicator's value on one local day.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct DayValue {
    /// The value, `None` when the day has too little data (coverage below
    /// the minimum) or the period has no step that day (e.g. a day mean on a
    /// day without light).
    pub value: Option<f64>,
    /// Valid steps / steps of the whole local day, in [0, 1].
    pub coverage: f64,
    /// The variance of the value when each step's temperature is an
    /// independent `N(mu_t, se_t^2)` ([`daily_values_expected`]): the sum of
    /// the steps' own variances times the square of the day's scale; 0
    /// without standard errors, and for the statistics that are not sums or
    /// means of steps (min, max, range, min/max degree days).
    pub own_variance: f64,
}

/// How daily values combine over a window.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Combine {
    /// Sum over the valid days (hours, degree days).
    Sum,
    /// Mean over the valid days, each day weighted equally.
    Mean,
    /// Minimum over the valid days.
    Min,
    /// Maximum over the valid days.
    Max,
}

impl Statistic {
    /// How daily values of this statistic combine over a window. Defined
    /// here, beside [`Combine`], so that `config` (which declares the
    /// statistics) does not depend on the computation: inside `climate` the
    /// dependencies run one way, `config` ← `calendar` ← `indicator`.
    pub fn combine(&self) -> Combine {
        match self {
            Statistic::Min => Combine::Min,
            Statistic::Max => Combine::Max,
            Statistic::HoursBelow { .. } | Statistic::HoursAbove { .. } | Statistic::DegreeDays { .. } => {
                Combine::Sum
            }
            Statistic::Mean
            | Statistic::MeanDailyMin
            | Statistic::MeanDailyMax
            | Statistic::MeanDailyRange
            | Statistic::DailyIntegral => Combine::Mean,
        }
    }
}

/// An indicator over a window of days.
#[derive(Debug, Clone, PartialEq)]
pub struct WindowValue {
    /// The combined value; `None` when no day of the window is valid.
    pub value: Option<f64>,
    /// Number of valid days in the window.
    pub valid_days: usize,
    /// Day indices (into [`Calendar::days`]) in the window without a value.
    pub missing_days: Vec<usize>,
}

/// Per-day values of `indicator` for one location. `series` must have
/// `calendar.n_steps` values per variable. Cost O(steps).
///
/// Per day, with `V` the valid steps of the period, `n` the day's valid steps,
/// `N` the whole local day's steps and `Δt` the step:
/// * mean / min / max over `V`; range = max − min;
/// * hours below (above) = `#{v ∈ V : v < θ (v > θ)} · Δt[h] · N/n`;
/// * degree days, integrated: `Σ_{V} max(0, min(T, cap) − base) · Δt[d] · N/n`
///   (the time integral of the capped excess over base, °C d);
///   min_max_1/2: McMaster & Wilhelm (1997) methods 1 and 2 on the day's
///   Tmax and Tmin over `V`;
/// * daily integral (light): `Σ_{V} PPFD · Δt[s] · 10⁻⁶ · N/n` mol m-2 d-1
///   (rectangle rule, REFERENCE §2.1).
pub fn daily_values(
    indicator: &Indicator,
    calendar: &Calendar,
    series: &LocationSeries,
    min_coverage: f64,
) -> Vec<DayValue> {
    daily_values_expected(indicator, calendar, series, None, min_coverage)
}

/// [`daily_values`] of a kriged location whose temperature is known only as
/// `N(mu_t, se_t^2)` at each step (`se`: the kriging standard error of the
/// temperature, nugget included; one value per grid step): the threshold
/// statistics of temperature become conditional expectations over each
/// step's predictive distribution ([`super::exceedance`]):
/// * hours below (above) = `sum_V Phi((θ - mu_t) / se_t)` (`Phi((mu_t - θ) /
///   se_t)`) `· Δt[h] · N/n`;
/// * integrated degree days = `sum_V E[(min(T, cap) - base)+] · Δt[d] · N/n`
///   with `E[(T - b)+] = se phi(z) + (mu - b) Phi(z)`, `z = (mu - b) / se`.
///
/// The day's `own_variance` treats the steps' errors as independent: the
/// Bernoulli variance `p_t (1 - p_t)` of each step's threshold indicator
/// ([`super::exceedance::indicator_variance`]), the capped excess's variance
/// ([`super::exceedance::capped_excess_variance`]), or `se_t^2` for a mean,
/// summed with the squared weights of the day's value (`(Δt · N/n)^2`, or
/// `1/count^2` for a mean).
///
/// Every other statistic, and every indicator of another variable (whose
/// standard error is not given), is computed from `mu` as by
/// [`daily_values`]; a step with `se_t = 0` or not finite counts as by
/// [`daily_values`]. `se = None` is [`daily_values`]. Cost O(steps).
pub fn daily_values_expected(
    indicator: &Indicator,
    calendar: &Calendar,
    series: &LocationSeries,
    se: Option<&[f64]>,
    min_coverage: f64,
) -> Vec<DayValue> {
    daily_values_expected_over(indicator, calendar, series, se, min_coverage, 0..calendar.day_steps.len())
}

/// [`daily_values_expected`] for the local days `days` only (element `k` is
/// day `days.start + k`): a window's indicator needs no other day.
pub fn daily_values_expected_over(
    indicator: &Indicator,
    calendar: &Calendar,
    series: &LocationSeries,
    se: Option<&[f64]>,
    min_coverage: f64,
    days: Range<usize>,
) -> Vec<DayValue> {
    let values = series.variable(indicator.variable);
    let se = se.filter(|_| indicator.variable == Variable::Temperature);
    let step_h = calendar.step_hours();
    let days = days.start.min(calendar.day_steps.len())..days.end.min(calendar.day_steps.len());
    calendar.day_steps[days.clone()]
        .iter()
        .zip(&calendar.expected_steps[days])
        .map(|(range, &expected)| {
            day_value(indicator, calendar, &values, se, range.clone(), expected, step_h, min_coverage)
        })
        .collect()
}

#[allow(clippy::too_many_arguments)]
fn day_value(
    ind: &Indicator,
    cal: &Calendar,
    values: &[f64],
    se: Option<&[f64]>,
    range: Range<usize>,
    expected: u32,
    step_h: f64,
    min_coverage: f64,
) -> DayValue {
    let mut n_valid = 0usize;
    let (mut sum, mut count, mut lo, mut hi) = (0.0f64, 0usize, f64::INFINITY, f64::NEG_INFINITY);
    let (mut acc, mut acc_var, mut sum_se2) = (0.0f64, 0.0f64, 0.0f64);
    for k in range {
        let v = values[k];
        if !v.is_finite() {
            continue;
        }
        let in_period = match (ind.period, cal.is_day[k]) {
            (Period::All, _) => true,
            (_, None) => continue,
            (Period::Day, Some(d)) => d,
            (Period::Night, Some(d)) => !d,
        };
        n_valid += 1;
        if !in_period {
            continue;
        }
        count += 1;
        sum += v;
        lo = lo.min(v);
        hi = hi.max(v);
        let s = se.map_or(0.0, |s| s[k]);
        let s = if s.is_finite() { s } else { 0.0 };
        let (e, var) = match ind.statistic {
            Statistic::HoursBelow { threshold } => {
                let p = prob_below(v, s, threshold);
                (p, indicator_variance(p))
            }
            Statistic::HoursAbove { threshold } => {
                let p = prob_above(v, s, threshold);
                (p, indicator_variance(p))
            }
            Statistic::DegreeDays { base, cap, method: DegreeDayMethod::Integrated } => {
                (expected_capped_excess(v, s, base, cap), capped_excess_variance(v, s, base, cap))
            }
            Statistic::DailyIntegral => (v, 0.0),
            _ => (0.0, 0.0),
        };
        acc += e;
        acc_var += var;
        sum_se2 += s * s;
    }
    let coverage = if expected == 0 { 0.0 } else { n_valid as f64 / f64::from(expected) };
    if n_valid == 0 || coverage < min_coverage {
        return DayValue { value: None, coverage, own_variance: 0.0 };
    }
    let scale = f64::from(expected) / n_valid as f64;
    let value = match ind.statistic {
        Statistic::HoursBelow { .. } | Statistic::HoursAbove { .. } => Some(acc * step_h * scale),
        Statistic::DailyIntegral => Some(acc * step_h * 3600.0 * 1e-6 * scale),
        Statistic::DegreeDays { method: DegreeDayMethod::Integrated, .. } => {
            Some(acc * step_h / 24.0 * scale)
        }
        _ if count == 0 => None,
        Statistic::Mean => Some(sum / count as f64),
        Statistic::Min | Statistic::MeanDailyMin => Some(lo),
        Statistic::Max | Statistic::MeanDailyMax => Some(hi),
        Statistic::MeanDailyRange => Some(hi - lo),
        Statistic::DegreeDays { base, cap, method } => Some(min_max_degree_days(hi, lo, base, cap, method)),
    };
    let own_variance = match ind.statistic {
        Statistic::HoursBelow { .. } | Statistic::HoursAbove { .. } => acc_var * (step_h * scale).powi(2),
        Statistic::DegreeDays { method: DegreeDayMethod::Integrated, .. } => {
            acc_var * (step_h / 24.0 * scale).powi(2)
        }
        Statistic::Mean if count > 0 => sum_se2 / (count * count) as f64,
        _ => 0.0,
    };
    DayValue { value, coverage, own_variance: if value.is_some() { own_variance } else { 0.0 } }
}

/// Degree days of one day from Tmax and Tmin, McMaster & Wilhelm (1997),
/// *Agric. For. Meteorol.* 87: 291–300 (REFERENCE §3):
/// * method 1: `Tmax, Tmin ← min(·, cap)`; `GDD = max(0, (Tmax + Tmin)/2 − base)`;
/// * method 2: `Tmax, Tmin ← max(·, base)`, then `← min(·, cap)`;
///   `GDD = (Tmax + Tmin)/2 − base`.
///
/// `Integrated` is not a min/max method; it is treated as method 1 here.
pub fn min_max_degree_days(
    tmax: f64,
    tmin: f64,
    base: f64,
    cap: Option<f64>,
    method: DegreeDayMethod,
) -> f64 {
    let capped = |t: f64| cap.map_or(t, |c| t.min(c));
    match method {
        DegreeDayMethod::MinMax2 => (capped(tmax.max(base)) + capped(tmin.max(base))) / 2.0 - base,
        DegreeDayMethod::MinMax1 | DegreeDayMethod::Integrated => {
            ((capped(tmax) + capped(tmin)) / 2.0 - base).max(0.0)
        }
    }
}

/// Combine per-day values over the days `window` (indices into the
/// calendar's days; see [`Calendar::window_days`]). Days without a value are
/// listed in `missing_days`, never filled: a sum covers the valid days only.
/// Cost O(days).
pub fn combine_window(daily: &[Option<f64>], window: Range<usize>, how: Combine) -> WindowValue {
    let mut missing_days = Vec::new();
    let mut valid = Vec::with_capacity(window.len());
    for d in window.clone() {
        match daily.get(d).copied().flatten() {
            Some(v) => valid.push(v),
            None => missing_days.push(d),
        }
    }
    let value = if valid.is_empty() {
        None
    } else {
        Some(match how {
            Combine::Sum => valid.iter().sum(),
            Combine::Mean => valid.iter().sum::<f64>() / valid.len() as f64,
            Combine::Min => valid.iter().copied().min_by(f64::total_cmp).expect("non-empty"),
            Combine::Max => valid.iter().copied().max_by(f64::total_cmp).expect("non-empty"),
        })
    };
    WindowValue { value, valid_days: valid.len(), missing_days }
}

/// The variance of [`combine_window`]'s value from the days' own variances
/// ([`DayValue::own_variance`], days independent given the shared part of
/// the error, see `spatial::window_se`): their sum over the window's valid
/// days for a sum, the sum over `count^2` for a mean, 0 for a minimum or
/// maximum (not a linear combination of days). Cost O(days).
pub fn combine_own_variance(daily: &[DayValue], window: Range<usize>, how: Combine) -> f64 {
    let (mut sum, mut n) = (0.0f64, 0usize);
    for d in window {
        if let Some(day) = daily.get(d).filter(|day| day.value.is_some()) {
            sum += day.own_variance;
            n += 1;
        }
    }
    match how {
        Combine::Sum => sum,
        Combine::Mean if n > 0 => sum / (n * n) as f64,
        _ => 0.0,
    }
}

/// [`daily_values`] then [`combine_window`] over `window`, for one location.
pub fn window_value(
    indicator: &Indicator,
    calendar: &Calendar,
    series: &LocationSeries,
    min_coverage: f64,
    window: Range<usize>,
) -> WindowValue {
    let daily: Vec<Option<f64>> =
        daily_values(indicator, calendar, series, min_coverage).into_iter().map(|d| d.value).collect();
    combine_window(&daily, window, indicator.statistic.combine())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::io::layout::parse_local_datetime;
    use approx::assert_abs_diff_eq;

    fn cal(days: u32, step_min: i64) -> Calendar {
        let s = parse_local_datetime("2026-03-01").unwrap();
        Calendar::new(chrono_tz::UTC, s, s + chrono::Duration::days(i64::from(days)), step_min * 60_000)
            .unwrap()
    }

    fn ind(variable: Variable, statistic: Statistic, period: Period) -> Indicator {
        Indicator { name: "x".into(), variable, statistic, period, variable_at: (1, 1), period_at: (1, 1) }
    }

    fn values(i: &Indicator, c: &Calendar, t: &[f64], h: &[f64], l: &[f64]) -> Vec<Option<f64>> {
        let s = LocationSeries { temperature: t, humidity: h, light: l };
        daily_values(i, c, &s, 0.9).into_iter().map(|d| d.value).collect()
    }

    fn nan(n: usize) -> Vec<f64> {
        vec![f64::NAN; n]
    }

    /// Hand-worked: one day at 10-minute steps, 15 °C except 8 hours
    /// (02:00–10:00, 48 steps) at 10 °C: 8.0 hours below 12 °C; with the
    /// clock night 22:00–06:00, 4 of them are at night.
    #[test]
    fn cold_hours_of_a_hand_worked_day() {
        let mut c = cal(1, 10);
        c.set_day_rule_clock(
            chrono::NaiveTime::from_hms_opt(6, 0, 0).unwrap(),
            chrono::NaiveTime::from_hms_opt(22, 0, 0).unwrap(),
        );
        let t: Vec<f64> = (0..144).map(|k| if (12..60).contains(&k) { 10.0 } else { 15.0 }).collect();
        let all = ind(Variable::Temperature, Statistic::HoursBelow { threshold: 12.0 }, Period::All);
        assert_abs_diff_eq!(values(&all, &c, &t, &nan(144), &nan(144))[0].unwrap(), 8.0, epsilon = 1e-12);
        let night = ind(Variable::Temperature, Statistic::HoursBelow { threshold: 12.0 }, Period::Night);
        assert_abs_diff_eq!(values(&night, &c, &t, &nan(144), &nan(144))[0].unwrap(), 4.0, epsilon = 1e-12);
        let above = ind(Variable::Temperature, Statistic::HoursAbove { threshold: 12.0 }, Period::Day);
        assert_abs_diff_eq!(values(&above, &c, &t, &nan(144), &nan(144))[0].unwrap(), 12.0, epsilon = 1e-12);
        // The threshold is strict: 10 °C is not below 10 °C.
        let strict = ind(Variable::Temperature, Statistic::HoursBelow { threshold: 10.0 }, Period::All);
        assert_eq!(values(&strict, &c, &t, &nan(144), &nan(144))[0], Some(0.0));
    }

    /// Issue example (REFERENCE §2.1): constant 500 µmol m-2 s-1 for 12 h and
    /// dark otherwise is 500·12·3600/10⁶ = 21.6 mol m-2 d-1. With the light
    /// rule the same day has 12 h of day.
    #[test]
    fn daily_light_integral_of_twelve_hours_at_500() {
        let mut c = cal(2, 5);
        let l: Vec<f64> =
            (0..576).map(|k| if (72..216).contains(&(k % 288)) { 500.0 } else { 0.0 }).collect();
        c.set_day_from_light(10.0, |k| std::slice::from_ref(&l[k]));
        let dli = ind(Variable::Light, Statistic::DailyIntegral, Period::All);
        let v = values(&dli, &c, &nan(576), &nan(576), &l);
        assert_abs_diff_eq!(v[0].unwrap(), 21.6, epsilon = 1e-9);
        assert_abs_diff_eq!(v[1].unwrap(), 21.6, epsilon = 1e-9);
        let w = combine_window(&v, 0..2, dli.statistic.combine());
        assert_abs_diff_eq!(w.value.unwrap(), 21.6, epsilon = 1e-9);
        assert_eq!(c.is_day.iter().take(288).filter(|d| **d == Some(true)).count(), 144);
        // REFERENCE §2.1: 400 µmol m-2 s-1 for 16 h is 23.04.
        let l16: Vec<f64> = (0..576).map(|k| if (k % 288) < 192 { 400.0 } else { 0.0 }).collect();
        assert_abs_diff_eq!(values(&dli, &c, &nan(576), &nan(576), &l16)[0].unwrap(), 23.04, epsilon = 1e-9);
    }

    /// McMaster & Wilhelm (1997) worked example of REFERENCE §3: six days
    /// (Tmax, Tmin) with Tbase 10 °C and cap 30 °C; method 1 sums 35.00,
    /// method 2 sums 38.50; with base 0 and no cap 76.0 and 81.5. Each day is
    /// 12 h at Tmax and 12 h at Tmin on an hourly grid.
    #[test]
    fn mcmaster_wilhelm_worked_example() {
        let days = [(25.0, 5.0), (12.0, -4.0), (8.0, -2.0), (35.0, 18.0), (5.0, -6.0), (33.0, 22.0)];
        let c = cal(6, 60);
        let t: Vec<f64> =
            (0..144).map(|k| if k % 24 < 12 { days[k / 24].0 } else { days[k / 24].1 }).collect();
        let sum = |base: f64, cap: Option<f64>, method| {
            let i = ind(Variable::Temperature, Statistic::DegreeDays { base, cap, method }, Period::All);
            let v = values(&i, &c, &t, &nan(144), &nan(144));
            let w = combine_window(&v, 0..6, i.statistic.combine());
            assert_eq!(w.valid_days, 6);
            (w.value.unwrap(), v)
        };
        let (m1, v1) = sum(10.0, Some(30.0), DegreeDayMethod::MinMax1);
        let (m2, v2) = sum(10.0, Some(30.0), DegreeDayMethod::MinMax2);
        assert_abs_diff_eq!(m1, 35.0, epsilon = 1e-12);
        assert_abs_diff_eq!(m2, 38.5, epsilon = 1e-12);
        let per1 = [5.0, 0.0, 0.0, 14.0, 0.0, 16.0];
        let per2 = [7.5, 1.0, 0.0, 14.0, 0.0, 16.0];
        for d in 0..6 {
            assert_abs_diff_eq!(v1[d].unwrap(), per1[d], epsilon = 1e-12);
            assert_abs_diff_eq!(v2[d].unwrap(), per2[d], epsilon = 1e-12);
        }
        assert_abs_diff_eq!(sum(0.0, None, DegreeDayMethod::MinMax1).0, 76.0, epsilon = 1e-12);
        assert_abs_diff_eq!(sum(0.0, None, DegreeDayMethod::MinMax2).0, 81.5, epsilon = 1e-12);
        // Integrated on this two-level day: half a day of each capped excess.
        // Day 1: (15 + 0)/2 = 7.5; day 4: (20 + 8)/2 = 14; day 6: (20 + 12)/2 = 16;
        // day 2: (2 + 0)/2 = 1; others 0 -> 38.5 (equals method 2 for two-level days).
        let (mi, _) = sum(10.0, Some(30.0), DegreeDayMethod::Integrated);
        assert_abs_diff_eq!(mi, 38.5, epsilon = 1e-12);
    }

    /// Hand-worked: a day of hourly temperatures 0, 1, ..., 23 °C has mean
    /// 11.5, min 0, max 23, range 23; two such days, the second shifted by
    /// +2, give window mean of daily minima 1, maxima 24, range 23, min 0,
    /// max 25.
    #[test]
    fn means_minima_maxima_and_ranges() {
        let c = cal(2, 60);
        let t: Vec<f64> = (0..48).map(|k| (k % 24) as f64 + if k >= 24 { 2.0 } else { 0.0 }).collect();
        let run = |s: Statistic| {
            let i = ind(Variable::Temperature, s, Period::All);
            let v = values(&i, &c, &t, &nan(48), &nan(48));
            (v.clone(), combine_window(&v, 0..2, s.combine()).value.unwrap())
        };
        let (v, w) = run(Statistic::Mean);
        assert_abs_diff_eq!(v[0].unwrap(), 11.5, epsilon = 1e-12);
        assert_abs_diff_eq!(w, 12.5, epsilon = 1e-12);
        assert_eq!(run(Statistic::Min).1, 0.0);
        assert_eq!(run(Statistic::Max).1, 25.0);
        assert_eq!(run(Statistic::MeanDailyMin).1, 1.0);
        assert_eq!(run(Statistic::MeanDailyMax).1, 24.0);
        assert_eq!(run(Statistic::MeanDailyRange).1, 23.0);
    }

    /// Coverage: a day with 20 % missing steps is invalid at 0.9 and
    /// reported missing; a day with 5 % missing is valid and its hours are
    /// scaled by N/n. Leading/trailing study days cut by the period count
    /// against the whole local day.
    #[test]
    fn coverage_rule_and_scaling() {
        let c = cal(3, 60);
        let mut t = vec![5.0; 72];
        for v in t.iter_mut().take(5) {
            *v = f64::NAN; // day 0: 19/24 = 0.79 < 0.9
        }
        t[30] = f64::NAN; // day 1: 23/24 = 0.958
        let i = ind(Variable::Temperature, Statistic::HoursBelow { threshold: 10.0 }, Period::All);
        let s = LocationSeries { temperature: &t, humidity: &nan(72), light: &nan(72) };
        let d = daily_values(&i, &c, &s, 0.9);
        assert_eq!(d[0].value, None);
        assert_abs_diff_eq!(d[0].coverage, 19.0 / 24.0, epsilon = 1e-12);
        assert_abs_diff_eq!(d[1].value.unwrap(), 24.0, epsilon = 1e-12);
        let daily: Vec<_> = d.iter().map(|x| x.value).collect();
        let w = combine_window(&daily, 0..3, Combine::Sum);
        assert_eq!(w.valid_days, 2);
        assert_eq!(w.missing_days, vec![0]);
        assert_abs_diff_eq!(w.value.unwrap(), 48.0, epsilon = 1e-12);
        assert_eq!(combine_window(&daily, 0..1, Combine::Mean).value, None);
    }

    /// VPD and dew point are derived per step from T and RH (REFERENCE §1.4:
    /// 25 °C, 60 % -> VPD 1.2671 kPa, dew point 16.696 °C).
    #[test]
    fn derived_humidity_variables() {
        let c = cal(1, 60);
        let t = vec![25.0; 24];
        let h = vec![60.0; 24];
        let vpd = ind(Variable::Vpd, Statistic::Mean, Period::All);
        assert_abs_diff_eq!(values(&vpd, &c, &t, &h, &nan(24))[0].unwrap(), 1.2671, epsilon = 1e-4);
        let td = ind(Variable::DewPoint, Statistic::Max, Period::All);
        assert_abs_diff_eq!(values(&td, &c, &t, &h, &nan(24))[0].unwrap(), 16.696, epsilon = 1e-3);
        // Humidity missing: no value rather than a silent NaN.
        assert_eq!(values(&vpd, &c, &t, &nan(24), &nan(24))[0], None);
    }

    #[test]
    fn day_period_without_day_steps_is_none_and_unknown_flags_are_missing() {
        let mut c = cal(1, 60);
        let dark = [0.0];
        c.set_day_from_light(10.0, |_| &dark[..]);
        let i = ind(Variable::Temperature, Statistic::Mean, Period::Day);
        assert_eq!(values(&i, &c, &[20.0; 24], &nan(24), &nan(24))[0], None);
        let i = ind(Variable::Temperature, Statistic::HoursBelow { threshold: 30.0 }, Period::Day);
        assert_eq!(values(&i, &c, &[20.0; 24], &nan(24), &nan(24))[0], Some(0.0));
        let c2 = cal(1, 60); // flags unknown
        assert_eq!(values(&i, &c2, &[20.0; 24], &nan(24), &nan(24))[0], None);
    }

    /// The expectation form against Monte Carlo draws of the conditional
    /// series: two days of 10-minute steps with kriged means near the
    /// threshold and standard errors 0.2-1.2 °C; 4000 seeded draws
    /// `T_t = mu_t + se_t e_t` are counted by the plain rule, and their mean
    /// hours below (and degree days with a cap) match the expectation within
    /// four Monte Carlo standard errors.
    #[test]
    fn expectation_matches_monte_carlo_draws() {
        use rand::{RngExt, SeedableRng};
        use rand_chacha::ChaCha8Rng;
        use rand_distr::StandardNormal;
        let c = cal(2, 10);
        let n = 288;
        let mu: Vec<f64> = (0..n).map(|k| 12.0 + 1.5 * (k as f64 / 20.0).sin()).collect();
        let se: Vec<f64> = (0..n).map(|k| 0.2 + (k % 6) as f64 * 0.2).collect();
        let hb = ind(Variable::Temperature, Statistic::HoursBelow { threshold: 12.0 }, Period::All);
        let dd = ind(
            Variable::Temperature,
            Statistic::DegreeDays { base: 11.0, cap: Some(13.0), method: DegreeDayMethod::Integrated },
            Period::All,
        );
        let (h, l) = (nan(n), nan(n));
        let s = LocationSeries { temperature: &mu, humidity: &h, light: &l };
        let mut rng = ChaCha8Rng::seed_from_u64(3);
        for i in [&hb, &dd] {
            let want: Vec<f64> =
                daily_values_expected(i, &c, &s, Some(&se), 0.9).iter().map(|d| d.value.unwrap()).collect();
            let own: Vec<f64> =
                daily_values_expected(i, &c, &s, Some(&se), 0.9).iter().map(|d| d.own_variance).collect();
            assert!(own.iter().all(|v| *v > 0.0), "{own:?}");
            let reps = 4000;
            let mut got: Vec<Vec<f64>> = vec![Vec::new(); 2];
            for _ in 0..reps {
                let t: Vec<f64> =
                    (0..n).map(|k| mu[k] + se[k] * rng.sample::<f64, _>(StandardNormal)).collect();
                for (d, v) in values(i, &c, &t, &h, &l).into_iter().enumerate() {
                    got[d].push(v.unwrap());
                }
            }
            for d in 0..2 {
                let m = got[d].iter().sum::<f64>() / reps as f64;
                let sd = (got[d].iter().map(|x| (x - m).powi(2)).sum::<f64>() / (reps - 1) as f64).sqrt();
                let tol = 4.0 * sd / (reps as f64).sqrt();
                assert!((m - want[d]).abs() <= tol, "day {d}: MC {m} vs {} (tol {tol})", want[d]);
                // The day's own variance (independent steps) against the
                // draws' variance, within four Monte Carlo SEs of a sample
                // variance, sqrt((m4 - v^2) / reps).
                let v = sd * sd;
                let m4 = got[d].iter().map(|x| (x - m).powi(4)).sum::<f64>() / reps as f64;
                let tol = 4.0 * ((m4 - v * v) / reps as f64).sqrt();
                assert!((v - own[d]).abs() <= tol, "day {d}: MC variance {v} vs {} (tol {tol})", own[d]);
            }
            // Over the two days: a sum adds the variances, a mean divides by 4.
            let days = daily_values_expected(i, &c, &s, Some(&se), 0.9);
            assert_abs_diff_eq!(combine_own_variance(&days, 0..2, Combine::Sum), own[0] + own[1]);
            assert_abs_diff_eq!(combine_own_variance(&days, 0..2, Combine::Mean), (own[0] + own[1]) / 4.0);
            // Without standard errors: the counting rule.
            assert_eq!(daily_values_expected(i, &c, &s, None, 0.9), daily_values(i, &c, &s, 0.9));
        }
    }
}
