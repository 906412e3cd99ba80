//! Pots that move in a synthetic study: `[rotation]` of the scenario file
//! (docs/simulate.md). Every `every_days` days from the study start, at
//! local midnight, the pots move among the pots' own positions, so that each
//! position holds one pot at a time:
//!
//! - `scheme = "shift"`: pot `i` (in pot order, which is position order)
//!   moves to the position of pot `i + k step` (cyclic) at the `k`-th move:
//!   carts advanced along a lane, or with `step` the number of pots of a bench
//!   the benches advanced one place (two benches and `step` = half the pots:
//!   the benches swapped);
//! - `scheme = "reshuffle"`: a new random placement each time (a seeded
//!   permutation of the pots' positions from its own random stream).
//!
//! The simulator writes the move table `moves.csv` (`pot,since,x,y`, a row
//! each time a pot changes place) and `[pots] moves` in the study file, and
//! computes each pot's true indicators along its path.

use super::scenario::Scenario;
use super::{Result, rng};
use chrono::{Duration, NaiveDateTime};
use rand::RngExt;
use serde::Deserialize;

/// `[rotation]`.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RotationSpec {
    /// `"shift"` or `"reshuffle"`.
    pub scheme: String,
    /// Days between moves (a whole number from 1).
    pub every_days: i64,
    /// Positions advanced at each move (`shift` only; default 1).
    #[serde(default)]
    pub step: Option<usize>,
}

/// The checked rotation: per move, its local time and where every pot goes.
#[derive(Debug, Clone)]
pub struct Rotation {
    /// Local times of the moves, in order (`since` of the move table).
    pub times: Vec<NaiveDateTime>,
    /// `placement[k][i]`: the pot whose own position pot `i` holds after
    /// move `k`.
    pub placement: Vec<Vec<usize>>,
}

impl Rotation {
    /// The pot whose own position pot `i` holds at local time `t` (its own
    /// before the first move).
    pub fn at(&self, i: usize, t: NaiveDateTime) -> usize {
        match self.times.partition_point(|m| *m <= t).checked_sub(1) {
            Some(k) => self.placement[k][i],
            None => i,
        }
    }
}

/// Check `[rotation]` and lay out its moves for `n` pots over the study
/// period `[start, end)`; `None` without the section.
pub fn plan(sc: &Scenario, spec: Option<&RotationSpec>, n: usize, seed: u64) -> Result<Option<Rotation>> {
    let Some(r) = spec else { return Ok(None) };
    if r.every_days < 1 {
        return Err(sc.bad(
            "rotation.every_days",
            format!("must be a whole number of days from 1, got {}", r.every_days),
            None,
        ));
    }
    let step = match (r.scheme.as_str(), r.step) {
        ("shift", s) => s.unwrap_or(1),
        ("reshuffle", None) => 0,
        ("reshuffle", Some(_)) => {
            return Err(sc.bad("rotation.step", "is for scheme = \"shift\" only", None));
        }
        (other, _) => {
            return Err(sc.bad(
                "rotation.scheme",
                format!("unknown scheme `{other}`"),
                Some("write \"shift\" or \"reshuffle\"".into()),
            ));
        }
    };
    if r.scheme == "shift" && (step == 0 || step % n.max(1) == 0) {
        return Err(sc.bad(
            "rotation.step",
            format!("a shift by {step} of {n} pots moves no pot"),
            Some("choose a step between 1 and the number of pots less one".into()),
        ));
    }
    let mut shuffle = rng(seed, super::stream::ROTATION);
    let mut times = Vec::new();
    let mut placement = Vec::new();
    let mut t = sc.start + Duration::days(r.every_days);
    let mut k = 1usize;
    while t < sc.end {
        let p: Vec<usize> = if r.scheme == "shift" {
            (0..n).map(|i| (i + k * step) % n).collect()
        } else {
            let mut p: Vec<usize> = (0..n).collect();
            for i in (1..n).rev() {
                let j = shuffle.random_range(0..=i as u64) as usize;
                p.swap(i, j);
            }
            p
        };
        times.push(t);
        placement.push(p);
        t += Duration::days(r.every_days);
        k += 1;
    }
    Ok(Some(Rotation { times, placement }))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A shift by one over three pots cycles them; a reshuffle is a
    /// permutation each time; `at` picks the placement in force.
    #[test]
    fn shifts_cycle_and_reshuffles_permute() {
        let t = |d: u32| chrono::NaiveDate::from_ymd_opt(2026, 3, d).unwrap().and_hms_opt(0, 0, 0).unwrap();
        let r = Rotation { times: vec![t(8), t(15)], placement: vec![vec![1, 2, 0], vec![2, 0, 1]] };
        assert_eq!(r.at(0, t(7)), 0);
        assert_eq!(r.at(0, t(8)), 1);
        assert_eq!(r.at(2, t(20)), 1);
    }
}
