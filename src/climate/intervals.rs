//! Indicators over several windows of one location's series: the growth
//! intervals of repeated scorings (`io::scores`). The daily values are
//! computed once ([`super::daily_values_expected`], the same code the mapping
//! stage runs on every pot's mapped series) and combined over each window by
//! [`super::combine_window`], so an interval's value is exactly what the pot's
//! own window would give if it were that interval.
//!
//! Day convention: a window `[start, end)` holds the local days whose noon it
//! holds ([`super::Calendar::window_days`]); an interval's days are clipped to
//! the pot's growth window.

use super::indicator::{LocationSeries, WindowValue, combine_window, daily_values_expected};
use super::{Calendar, Indicator};
use std::ops::Range;

/// The days two day ranges share (empty, at `a.start`, when none).
pub fn clip(a: &Range<usize>, b: &Range<usize>) -> Range<usize> {
    let (s, e) = (a.start.max(b.start), a.end.min(b.end));
    if s < e { s..e } else { a.start..a.start }
}

/// `indicator` at one location over each of `windows` (day ranges), from
/// its series and, for threshold statistics of temperature, the per-step
/// kriging SEs `se` (expectation form, [`super::exceedance`]). Days whose
/// coverage is below `min_coverage` have no value and are listed as missing
/// in the window's result. Cost O(steps + Σ window lengths).
pub fn window_values(
    indicator: &Indicator,
    calendar: &Calendar,
    series: &LocationSeries,
    se: Option<&[f64]>,
    min_coverage: f64,
    windows: &[Range<usize>],
) -> Vec<WindowValue> {
    let daily: Vec<Option<f64>> = daily_values_expected(indicator, calendar, series, se, min_coverage)
        .into_iter()
        .map(|d| d.value)
        .collect();
    let how = indicator.statistic.combine();
    windows.iter().map(|w| combine_window(&daily, w.clone(), how)).collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn clip_keeps_the_shared_days() {
        assert_eq!(clip(&(2..10), &(5..20)), 5..10);
        assert_eq!(clip(&(5..20), &(2..10)), 5..10);
        assert!(clip(&(2..4), &(6..9)).is_empty());
    }
}
