//! The common time grid and its calendar: grid instants in UTC, the local
//! calendar day of every step, how many steps each local day has, and the
//! day/night flag of every step.
//!
//! Conventions (stated once, used everywhere):
//! * Step `k` is the instant `t_k = start + k·step` (UTC milliseconds) and
//!   stands for the interval `[t_k, t_k + step)`. The grid covers the study
//!   period `[start, end)`.
//! * A step belongs to the local calendar day (study time zone) of `t_k`.
//!   Days are local midnight to local midnight, so a daylight-saving day has
//!   23 or 25 hours; its expected number of steps says so.
//! * A day's coverage is its steps with data divided by the steps of the
//!   whole local day (not only those inside the study period), so a day cut by
//!   the start or end of the period is valid only if enough of it is covered.
//!
//! Nothing here depends on polars: the calendar is shared by the sensor
//! series and by every pot's mapped series.

use super::config::DayRule;
use chrono::{DateTime, Duration, NaiveDate, NaiveDateTime, TimeZone, Timelike};
use chrono_tz::Tz;
use std::ops::Range;

/// The regular grid of the study period with its local days and day flags.
#[derive(Debug, Clone)]
pub struct Calendar {
    /// First grid instant, UTC milliseconds since the epoch.
    pub start_ms: i64,
    /// Grid step, milliseconds.
    pub step_ms: i64,
    /// Number of grid steps.
    pub n_steps: usize,
    /// The study time zone.
    pub timezone: Tz,
    /// Local calendar days touched by the grid, in order.
    pub days: Vec<NaiveDate>,
    /// Local day index (into `days`) of every step.
    pub day_of_step: Vec<u32>,
    /// Steps of each day within the grid (contiguous ranges).
    pub day_steps: Vec<Range<usize>>,
    /// Steps of each whole local day (24 h, or 23/25 h on daylight-saving days).
    pub expected_steps: Vec<u32>,
    /// Day (`Some(true)`), night (`Some(false)`) or unknown (`None`, no
    /// light reading under the light rule) of every step.
    pub is_day: Vec<Option<bool>>,
}

/// Why a calendar could not be built.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum CalendarError {
    /// A local time does not exist (skipped by a daylight-saving change).
    NonexistentLocalTime(NaiveDateTime),
    /// The period is empty.
    EmptyPeriod,
}

/// The UTC instant of a local time; ambiguous times (clocks turned back) take
/// the earlier instant.
pub fn local_to_utc_ms(tz: Tz, t: NaiveDateTime) -> Option<i64> {
    tz.from_local_datetime(&t).earliest().map(|d| d.timestamp_millis())
}

/// Local midnight of `d` as UTC ms; if midnight is skipped by a
/// daylight-saving change, the first existing minute after it.
fn midnight_ms(tz: Tz, d: NaiveDate) -> i64 {
    let mut t = d.and_hms_opt(0, 0, 0).expect("midnight exists");
    for _ in 0..=180 {
        if let Some(ms) = local_to_utc_ms(tz, t) {
            return ms;
        }
        t += Duration::minutes(1);
    }
    // No zone skips more than three hours; fall back on the UTC reading.
    t.and_utc().timestamp_millis()
}

/// Local date-time of a UTC instant.
pub fn local_time(tz: Tz, ms: i64) -> NaiveDateTime {
    DateTime::from_timestamp_millis(ms).expect("in range").with_timezone(&tz).naive_local()
}

impl Calendar {
    /// Build the grid of `[start, end)` (local times of `tz`) with step
    /// `step_ms`. Day flags start as unknown; set them with
    /// [`Calendar::set_day_rule_clock`] or [`Calendar::set_day_from_light`].
    /// Cost O(steps + days).
    pub fn new(
        tz: Tz,
        start: NaiveDateTime,
        end: NaiveDateTime,
        step_ms: i64,
    ) -> Result<Calendar, CalendarError> {
        let s = local_to_utc_ms(tz, start).ok_or(CalendarError::NonexistentLocalTime(start))?;
        let e = local_to_utc_ms(tz, end).ok_or(CalendarError::NonexistentLocalTime(end))?;
        Calendar::from_utc(tz, s, e, step_ms)
    }

    /// Build the grid of `[start_ms, end_ms)` UTC instants.
    pub fn from_utc(tz: Tz, start_ms: i64, end_ms: i64, step_ms: i64) -> Result<Calendar, CalendarError> {
        if end_ms <= start_ms || step_ms <= 0 {
            return Err(CalendarError::EmptyPeriod);
        }
        let n_steps = ((end_ms - start_ms) + step_ms - 1).div_euclid(step_ms) as usize;
        let mut days = Vec::new();
        let mut day_of_step = Vec::with_capacity(n_steps);
        let mut day_steps: Vec<Range<usize>> = Vec::new();
        // Walk day by day: every step before the next local midnight belongs to the current day.
        let mut k = 0usize;
        let mut day = local_time(tz, start_ms).date();
        while k < n_steps {
            let next = midnight_ms(tz, day.succ_opt().expect("date in range"));
            let first = k;
            while k < n_steps && start_ms + (k as i64) * step_ms < next {
                day_of_step.push(days.len() as u32);
                k += 1;
            }
            if k > first {
                days.push(day);
                day_steps.push(first..k);
            }
            day = day.succ_opt().expect("date in range");
        }
        // Steps of the whole local day on the (infinite) grid: those k with
        // midnight(d) <= t_k < midnight(d+1).
        let ceil_steps = |ms: i64| {
            (ms - start_ms).div_euclid(step_ms) + i64::from((ms - start_ms).rem_euclid(step_ms) != 0)
        };
        let expected_steps = days
            .iter()
            .map(|d| {
                let a = midnight_ms(tz, *d);
                let b = midnight_ms(tz, d.succ_opt().expect("date in range"));
                (ceil_steps(b) - ceil_steps(a)) as u32
            })
            .collect();
        Ok(Calendar {
            start_ms,
            step_ms,
            n_steps,
            timezone: tz,
            days,
            day_of_step,
            day_steps,
            expected_steps,
            is_day: vec![None; n_steps],
        })
    }

    /// UTC ms of step `k`.
    pub fn time_ms(&self, k: usize) -> i64 {
        self.start_ms + (k as i64) * self.step_ms
    }

    /// Step length in hours.
    pub fn step_hours(&self) -> f64 {
        self.step_ms as f64 / 3_600_000.0
    }

    /// Flag day and night by local clock time: day when
    /// `start <= local time < end` (or, when `end < start`, outside
    /// `[end, start)`). Every flag becomes known.
    pub fn set_day_rule_clock(&mut self, start: chrono::NaiveTime, end: chrono::NaiveTime) {
        let (s, e) = (start.num_seconds_from_midnight(), end.num_seconds_from_midnight());
        for k in 0..self.n_steps {
            let t = local_time(self.timezone, self.time_ms(k)).time().num_seconds_from_midnight();
            let day = if s < e { t >= s && t < e } else { t >= s || t < e };
            self.is_day[k] = Some(day);
        }
    }

    /// Flag day and night from light: step `k` is day when the mean of
    /// `light(k)` over its finite values is at least `threshold`
    /// µmol m-2 s-1, unknown when no value is finite. One flag for the whole
    /// compartment, so that sensors and pots share the same nights.
    pub fn set_day_from_light<'a>(&mut self, threshold: f64, light: impl Fn(usize) -> &'a [f64]) {
        for k in 0..self.n_steps {
            let (mut sum, mut n) = (0.0, 0usize);
            for &v in light(k) {
                if v.is_finite() {
                    sum += v;
                    n += 1;
                }
            }
            self.is_day[k] = (n > 0).then(|| sum / n as f64 >= threshold);
        }
    }

    /// Apply a day rule; the light rule reads the light matrix row by row.
    pub fn apply_day_rule<'a>(&mut self, rule: DayRule, light: impl Fn(usize) -> &'a [f64]) {
        match rule {
            DayRule::Clock { start, end } => self.set_day_rule_clock(start, end),
            DayRule::Light { threshold } => self.set_day_from_light(threshold, light),
        }
    }

    /// Days of a window `[start, end)` in local time: day `d` is in the window
    /// when its local noon is, so a window from 2026-03-01 00:00 (or 08:00) to
    /// 2026-04-01 00:00 holds 1–31 March. Returns a range of day indices.
    pub fn window_days(&self, start: NaiveDateTime, end: NaiveDateTime) -> Range<usize> {
        let noon = |d: &NaiveDate| d.and_hms_opt(12, 0, 0).expect("noon exists");
        let a = self.days.partition_point(|d| noon(d) < start);
        let b = self.days.partition_point(|d| noon(d) < end);
        a..b.max(a)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use chrono::NaiveTime;

    fn dt(s: &str) -> NaiveDateTime {
        crate::io::layout::parse_local_datetime(s).unwrap()
    }

    #[test]
    fn plain_days_have_144_ten_minute_steps() {
        let c = Calendar::new(chrono_tz::UTC, dt("2026-03-01"), dt("2026-03-04"), 600_000).unwrap();
        assert_eq!(c.n_steps, 432);
        assert_eq!(c.days.len(), 3);
        assert_eq!(c.expected_steps, vec![144, 144, 144]);
        assert_eq!(c.day_steps[1], 144..288);
        assert_eq!(c.day_of_step[143], 0);
        assert_eq!(c.day_of_step[144], 1);
    }

    /// Europe/Amsterdam switches to summer time on 29 March 2026 (02:00 ->
    /// 03:00) and back on 25 October 2026 (03:00 -> 02:00): 23- and 25-hour
    /// days (EU rule: last Sunday of March and October, from memory).
    #[test]
    fn daylight_saving_days_have_23_and_25_hours() {
        let tz = chrono_tz::Europe::Amsterdam;
        let c = Calendar::new(tz, dt("2026-03-28"), dt("2026-03-31"), 3_600_000).unwrap();
        assert_eq!(c.expected_steps, vec![24, 23, 24]);
        assert_eq!(c.n_steps, 71);
        let c = Calendar::new(tz, dt("2026-10-24"), dt("2026-10-27"), 600_000).unwrap();
        assert_eq!(c.expected_steps, vec![144, 150, 144]);
        assert_eq!(c.day_steps[1].len(), 150);
    }

    #[test]
    fn partial_first_day_keeps_its_full_expected_steps() {
        let c = Calendar::new(chrono_tz::UTC, dt("2026-03-01 12:00"), dt("2026-03-03"), 3_600_000).unwrap();
        assert_eq!(c.day_steps[0].len(), 12);
        assert_eq!(c.expected_steps[0], 24);
    }

    #[test]
    fn clock_rule_handles_wrap_past_midnight() {
        let mut c = Calendar::new(chrono_tz::UTC, dt("2026-03-01"), dt("2026-03-02"), 3_600_000).unwrap();
        c.set_day_rule_clock(
            NaiveTime::from_hms_opt(6, 0, 0).unwrap(),
            NaiveTime::from_hms_opt(22, 0, 0).unwrap(),
        );
        assert_eq!(c.is_day.iter().filter(|f| **f == Some(true)).count(), 16);
        assert_eq!(c.is_day[6], Some(true));
        assert_eq!(c.is_day[22], Some(false));
        c.set_day_rule_clock(
            NaiveTime::from_hms_opt(20, 0, 0).unwrap(),
            NaiveTime::from_hms_opt(4, 0, 0).unwrap(),
        );
        assert_eq!(c.is_day.iter().filter(|f| **f == Some(true)).count(), 8);
        assert_eq!(c.is_day[2], Some(true));
    }

    #[test]
    fn light_rule_uses_compartment_mean_and_leaves_unknown_steps() {
        let mut c =
            Calendar::new(chrono_tz::UTC, dt("2026-03-01"), dt("2026-03-01 03:00"), 3_600_000).unwrap();
        let rows = [vec![4.0, 20.0], vec![f64::NAN, f64::NAN], vec![9.0, f64::NAN]];
        c.set_day_from_light(10.0, |k| rows[k].as_slice());
        assert_eq!(c.is_day, vec![Some(true), None, Some(false)]);
    }

    #[test]
    fn window_days_use_the_noon_rule() {
        let c = Calendar::new(chrono_tz::UTC, dt("2026-03-01"), dt("2026-03-11"), 3_600_000).unwrap();
        assert_eq!(c.window_days(dt("2026-03-02 08:00"), dt("2026-03-05")), 1..4);
        assert_eq!(c.window_days(dt("2026-03-02 13:00"), dt("2026-03-05 12:30")), 2..5);
        assert_eq!(c.window_days(dt("2026-02-01"), dt("2026-05-01")), 0..10);
        assert_eq!(c.window_days(dt("2026-05-01"), dt("2026-06-01")), 10..10);
    }

    #[test]
    fn nonexistent_start_is_an_error() {
        let e =
            Calendar::new(chrono_tz::Europe::Amsterdam, dt("2026-03-29 02:30"), dt("2026-03-30"), 600_000);
        assert!(matches!(e, Err(CalendarError::NonexistentLocalTime(_))));
    }
}
