//! Variogram lag bins that follow the sensor-pair distances: the mapping
//! stage's default bins for a handful of loggers.
//!
//! Equal-width bins (`Bins::equal`) suit many points; with ten loggers a
//! room's 45 pairs fall unevenly into them, and the pooled variogram was
//! fitted on three bins of 8, 8 and 11 pairs. Here the bins are cut from the
//! sorted pair distances so that every bin holds about the same number of
//! pairs, at least `min_pairs` (equal-frequency classes; Cressie 1993,
//! *Statistics for Spatial Data*, rev. ed., §2.4, recommends at least 30
//! pairs per bin for a single field, a rule for one realisation: a pooled
//! variogram averages every bin over thousands of time steps, so fewer pairs
//! per bin suffice; the count is chosen by cross-validation, docs/spatial.md).
//! A cut never separates two pairs at the same distance (a regular layout has
//! many ties): it moves to the next gap between distinct distances.
//!
//! Cost: O(p log p) for `p` pairs within the largest lag.

use super::error::{Result, SpatialError};
use super::geometry::Points;
use super::variogram::{Bins, pairs_within};

/// The smallest numbers of sensor pairs per bin offered to the mapping
/// stage's cross-validation ([`candidates`]).
pub const MIN_PAIRS: [usize; 3] = [4, 6, 8];

/// The most bins (as for equal-width bins, common practice).
pub const MAX_BINS: usize = 12;

/// Bins from 0 to `max_lag` whose edges follow the sorted distances of the
/// sensor pairs within `max_lag`: `floor(p / min_pairs)` bins (at most
/// [`MAX_BINS`]) of about `p / bins` pairs each, every cut at the midpoint
/// of the gap between two consecutive distinct distances, no bin with fewer
/// than `min_pairs` pairs (ties can make a bin larger). The last edge is
/// `max_lag`. Fewer than `min_pairs` pairs give one bin.
pub fn equal_count(points: &Points, max_lag: f64, min_pairs: usize) -> Result<Bins> {
    if !(max_lag.is_finite() && max_lag > 0.0) || min_pairs == 0 {
        return Err(SpatialError::BadInput {
            what: "variogram bins".into(),
            message: format!(
                "need a largest lag > 0 and at least one pair per bin, got max_lag = {max_lag}, min_pairs = {min_pairs}"
            ),
        });
    }
    let mut d: Vec<f64> = pairs_within(points, max_lag).into_iter().map(|p| p.2).collect();
    d.sort_by(f64::total_cmp);
    Bins::from_edges(edges_of(&d, max_lag, min_pairs))
}

/// Equal-count bins from 0 to `max_lag` for every minimum of [`MIN_PAIRS`]
/// (duplicates and single bins left out; a fit needs three bins). The
/// mapping stage scores each, beside the equal-width bins, by
/// leave-one-sensor-out cross-validation of ordinary kriging with the
/// variogram fitted on it, and keeps the smallest RMSE ([`pick`]).
pub fn candidates(points: &Points, max_lag: f64) -> Vec<Bins> {
    let mut out: Vec<Bins> = Vec::new();
    for m in MIN_PAIRS {
        if let Ok(b) = equal_count(points, max_lag, m)
            && b.len() >= 3
            && !out.contains(&b)
        {
            out.push(b);
        }
    }
    out
}

/// The index of the candidate with the smallest score (`None` scores left
/// out; ties keep the earlier candidate); `None` when none has a score.
pub fn pick(scores: &[Option<f64>]) -> Option<usize> {
    let mut best: Option<(usize, f64)> = None;
    for (i, s) in scores.iter().enumerate() {
        if let Some(s) = s.filter(|s| s.is_finite())
            && best.is_none_or(|(_, b)| s < b)
        {
            best = Some((i, s));
        }
    }
    best.map(|b| b.0)
}

/// The edges for sorted distances `d` (see [`equal_count`]).
fn edges_of(d: &[f64], max_lag: f64, min_pairs: usize) -> Vec<f64> {
    let p = d.len();
    let nb = (p / min_pairs).clamp(1, MAX_BINS);
    let mut edges = vec![0.0];
    let mut start = 0usize; // first pair of the current bin
    for b in 1..nb {
        // The target cut, then forward to the next distinct distance.
        let mut i = (b * p).div_ceil(nb).max(start + min_pairs);
        while i < p && d[i] <= d[i - 1] {
            i += 1;
        }
        // Leave at least `min_pairs` pairs for the last bin.
        if i >= p || p - i < min_pairs {
            break;
        }
        edges.push(0.5 * (d[i - 1] + d[i]));
        start = i;
    }
    edges.push(max_lag);
    edges
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Counts per bin on a hand example: 12 distinct distances and
    /// `min_pairs = 4` give three bins of four, cut halfway between the 4th
    /// and 5th and the 8th and 9th distances.
    #[test]
    fn equal_counts_on_distinct_distances() {
        let d: Vec<f64> = (1..=12).map(|k| k as f64).collect();
        assert_eq!(edges_of(&d, 12.0, 4), vec![0.0, 4.5, 8.5, 12.0]);
        // Fewer pairs than one bin: one bin.
        assert_eq!(edges_of(&d[..3], 5.0, 4), vec![0.0, 5.0]);
    }

    /// Ties stay together: a cut moves to the next distinct distance, and a
    /// last bin that would be too small is merged.
    #[test]
    fn ties_are_not_split() {
        let d = [1.0, 1.0, 1.0, 1.0, 1.0, 2.0, 2.0, 3.0, 3.0, 3.0, 4.0, 4.0];
        // p = 12, min 4: target cuts at 4 and 8 move to 5 (after the 1s)
        // and 10 (after the 3s); the last bin would hold 2 pairs: merged.
        assert_eq!(edges_of(&d, 4.5, 4), vec![0.0, 1.5, 4.5]);
        let d = [1.0, 1.0, 2.0, 2.0, 2.0, 3.0, 3.0, 4.0, 4.0, 5.0, 5.0, 5.0];
        // Cuts at 3 and 6 move to 5 (after the 2s) and at least 8, then 9
        // (after the 4s); a fourth bin would start at 12: none.
        assert_eq!(edges_of(&d, 6.0, 3), vec![0.0, 2.5, 4.5, 6.0]);
    }

    /// On ten loggers placed by hand in a 10 m x 6 m room (23 pairs within
    /// half the largest distance): with at least 4 pairs per bin, five
    /// bins, every one holding at least 4, all pairs counted; more than the
    /// three non-empty bins that equal widths give here.
    #[test]
    fn ten_loggers_give_more_than_three_bins() {
        let xy = [
            [0.6, 1.0],
            [0.6, 3.0],
            [2.3, 0.7],
            [2.1, 4.6],
            [4.2, 2.4],
            [5.9, 0.9],
            [6.3, 5.1],
            [8.1, 2.8],
            [9.4, 0.6],
            [9.2, 4.9],
        ];
        let pts = crate::spatial::kriging::testdata::pts(&xy);
        let max_lag = pts.max_distance() / 2.0;
        let pairs = pairs_within(&pts, max_lag);
        assert_eq!(pairs.len(), 23);
        let count = |bins: &Bins| {
            let mut counts = vec![0usize; bins.len()];
            for p in &pairs {
                counts[bins.bin_of(p.2).unwrap()] += 1;
            }
            counts
        };
        let bins = equal_count(&pts, max_lag, 4).unwrap();
        let counts = count(&bins);
        assert_eq!(bins.len(), 5, "{counts:?}");
        assert!(counts.iter().all(|c| *c >= 4), "{counts:?}");
        assert_eq!(counts.iter().sum::<usize>(), pairs.len());
        let equal = Bins::default_for(&pts).unwrap();
        assert_eq!(count(&equal).iter().filter(|c| **c > 0).count(), 3, "{:?}", count(&equal));
        assert!(equal_count(&pts, 0.0, 6).is_err() && equal_count(&pts, 1.0, 0).is_err());
        let c = candidates(&pts, max_lag);
        assert!(!c.is_empty() && c.iter().all(|b| b.len() >= 3));
    }

    /// The smallest score wins, ties keep the first, missing and NaN
    /// scores are skipped.
    #[test]
    fn pick_smallest_score() {
        assert_eq!(pick(&[Some(0.3), None, Some(0.2), Some(0.2)]), Some(2));
        assert_eq!(pick(&[None, Some(f64::NAN)]), None);
        assert_eq!(pick(&[Some(1.0)]), Some(0));
    }
}
