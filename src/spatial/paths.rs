//! Pots along their paths: the distinct positions the pots ever held (from
//! the move table, [`crate::io::moves`]), the position each pot held at every
//! step of the regular grid, each pot's series along its path gathered from
//! the series mapped at the positions, and each pot's time shares of the
//! positions over its growth window (the rows of `W` in `C = W R W'`, the
//! residual correlation of pots that move; `docs/spatial.md`).
//!
//! Without moves the positions are the pots themselves, in pot order, and
//! every gather is skipped ([`Paths::is_fixed`]), so fixed pots give exactly
//! the values of a map onto the pots.

use super::geometry::{Origin, Points};
use crate::climate::Calendar;
use crate::io::IoError;
use crate::io::moves::{MOVE_SINCE, Moves};
use nalgebra::DMatrix;
use std::collections::HashMap;
use std::ops::Range;

/// Where every pot stood at every step.
#[derive(Debug, Clone)]
pub struct Paths {
    /// Every position ever held: the pots' own positions first (pot order),
    /// then each further place of the move table in order of first use.
    pub positions: Points,
    /// Per pot: `(first step, position)` of each stay, in step order; the
    /// first stay starts at step 0.
    pub stays: Vec<Vec<(usize, usize)>>,
}

impl Paths {
    /// The paths of pots that never move.
    pub fn fixed(pots: &Points) -> Paths {
        Paths { positions: pots.clone(), stays: (0..pots.len()).map(|j| vec![(0, j)]).collect() }
    }

    /// The paths of the move table on the calendar's steps: a row holds from
    /// the first step at or after its time. A row after the last step changes
    /// nothing; a row before the first step or after the end of the grid is
    /// an error naming the move table's line (the study period was open in
    /// `[climate]`, so the readings set it). Cost O(rows + pots).
    pub fn new(pots: &Points, moves: &Moves, cal: &Calendar) -> Result<Paths, IoError> {
        let mut ids = pots.ids.clone();
        let (mut x, mut y) = (pots.x.clone(), pots.y.clone());
        let key = |x: f64, y: f64| (x.to_bits(), y.to_bits());
        let mut index: HashMap<(u64, u64), usize> = HashMap::new();
        for j in 0..pots.len() {
            index.entry(key(pots.x[j], pots.y[j])).or_insert(j);
        }
        let end_ms = cal.time_ms(cal.n_steps);
        let mut stays = Vec::with_capacity(pots.len());
        for (j, rows) in moves.rows.iter().enumerate() {
            let mut s = vec![(0usize, j)];
            for m in rows {
                if m.since_ms < cal.start_ms || m.since_ms > end_ms {
                    return Err(IoError::BadValue {
                        path: moves.path.clone(),
                        line: m.line,
                        column: MOVE_SINCE.into(),
                        value: m.since.to_string(),
                        message: format!(
                            "the time lies outside the study period of the readings ({} to {})",
                            crate::climate::calendar::local_time(cal.timezone, cal.start_ms),
                            crate::climate::calendar::local_time(cal.timezone, end_ms)
                        ),
                        hint: Some(
                            "remove the row, or declare the period with [climate] start and end".into(),
                        ),
                    });
                }
                let p = *index.entry(key(m.x, m.y)).or_insert_with(|| {
                    ids.push(m.slot.clone().unwrap_or_else(|| format!("x={} y={}", m.x, m.y)));
                    x.push(m.x);
                    y.push(m.y);
                    ids.len() - 1
                });
                // The first step at or after the row's time.
                let k = ((m.since_ms - cal.start_ms) + cal.step_ms - 1).div_euclid(cal.step_ms) as usize;
                if k >= cal.n_steps {
                    continue;
                }
                match s.last_mut() {
                    Some(last) if last.0 == k => last.1 = p,
                    _ => s.push((k, p)),
                }
            }
            stays.push(s);
        }
        let positions = Points::new("position", ids, x, y, None, &Origin::default())
            .expect("positions were checked by the pot table and the move table");
        Ok(Paths { positions, stays })
    }

    /// Whether every pot stays at its own position all the time (the
    /// positions are then the pots).
    pub fn is_fixed(&self) -> bool {
        self.positions.len() == self.stays.len()
            && self.stays.iter().enumerate().all(|(j, s)| s.len() == 1 && s[0] == (0, j))
    }

    /// The stays of pot `j` as `(steps, position)`, `n_steps` steps in all.
    fn spans(&self, j: usize, n_steps: usize) -> impl Iterator<Item = (Range<usize>, usize)> + '_ {
        let s = &self.stays[j];
        (0..s.len()).map(move |k| (s[k].0..s.get(k + 1).map_or(n_steps, |n| n.0), s[k].1))
    }

    /// Each pot's series along its path from `m`, steps x positions:
    /// steps x pots, column `j` holding at each step the value at the
    /// position pot `j` held. Cost O(steps x pots).
    pub fn along(&self, m: &DMatrix<f64>) -> DMatrix<f64> {
        let n = m.nrows();
        let mut out = DMatrix::from_element(n, self.stays.len(), f64::NAN);
        for j in 0..self.stays.len() {
            for (steps, p) in self.spans(j, n) {
                out.column_mut(j)
                    .rows_mut(steps.start, steps.len())
                    .copy_from(&m.column(p).rows(steps.start, steps.len()));
            }
        }
        out
    }

    /// How often pot `j` changes position inside the steps `window`: the
    /// stays that begin after the window's first step and before its end at
    /// a position other than the one held before. Cost O(stays of the pot).
    pub fn moves_in(&self, j: usize, window: Range<usize>) -> usize {
        let s = &self.stays[j];
        s.windows(2).filter(|w| w[1].0 > window.start && w[1].0 < window.end && w[1].1 != w[0].1).count()
    }

    /// The positions pot `j` held during the steps `window`, in the order
    /// it held them (a return to an earlier position counts again; a stay
    /// at the position just held does not). Cost O(stays of the pot).
    pub fn sequence(&self, j: usize, window: Range<usize>) -> Vec<usize> {
        let s = &self.stays[j];
        let mut out: Vec<usize> = Vec::new();
        for (k, &(from, p)) in s.iter().enumerate() {
            let to = s.get(k + 1).map_or(usize::MAX, |n| n.0);
            if from < window.end && to > window.start && out.last() != Some(&p) {
                out.push(p);
            }
        }
        out
    }

    /// Pot `j`'s time shares of the positions over the steps `window`
    /// (each stay's steps inside the window over the window's steps), as
    /// `(position, share)` with the shares summing to 1; an empty window
    /// gives the position held at its start. Cost O(stays of the pot).
    pub fn shares(&self, j: usize, window: Range<usize>, n_steps: usize) -> Vec<(usize, f64)> {
        let mut out: Vec<(usize, usize)> = Vec::new();
        for (steps, p) in self.spans(j, n_steps) {
            let k = steps.end.min(window.end).saturating_sub(steps.start.max(window.start));
            if k == 0 {
                continue;
            }
            match out.iter_mut().find(|o| o.0 == p) {
                Some(o) => o.1 += k,
                None => out.push((p, k)),
            }
        }
        let total: usize = out.iter().map(|o| o.1).sum();
        if total == 0 {
            let at = self.spans(j, n_steps).find(|(s, _)| s.contains(&window.start)).map_or(j, |(_, p)| p);
            return vec![(at, 1.0)];
        }
        out.into_iter().map(|(p, k)| (p, k as f64 / total as f64)).collect()
    }
}

/// What the mapping stage keeps of pots that move.
#[derive(Debug, Clone)]
pub struct MovedPots {
    /// The positions and each pot's stays.
    pub paths: Paths,
    /// Per pot: its time shares of the positions over its growth window
    /// ([`Paths::shares`]), the rows of `W`.
    pub shares: Vec<Vec<(usize, f64)>>,
    /// Two pots in one place at once ([`Moves::shared`]).
    pub shared: Vec<String>,
    /// Per pot: the changes of position inside its growth window
    /// ([`Paths::moves_in`]).
    pub moves: Vec<usize>,
    /// Per position (parallel to `paths.positions`): the pot time spent
    /// there, summed over the pots' growth windows, in pot-days (a pot
    /// standing there for one day counts 1).
    pub pot_days: Vec<f64>,
    /// Per pot: its growth window, grid steps.
    pub windows: Vec<Range<usize>>,
    /// Every driver (indicators in declaration order, then
    /// `distance_<opening>`) along the paths and without moves, with its
    /// spread across pots ([`Evened`]); filled by the mapping stage.
    pub drivers: Vec<Evened>,
}

/// One driver at every pot along its path, and as it would have been had
/// the pot stayed its whole growth window at its starting (`[pots]`)
/// position, with the spread of both across the pots.
#[derive(Debug, Clone)]
pub struct Evened {
    /// Driver name (`night_cold_hours`, `distance_door`).
    pub driver: String,
    /// Its unit (`h`, `°C d`, `m`).
    pub unit: String,
    /// Per pot (pot order): along its path, as in `pot_covariates.csv`;
    /// NaN where undefined.
    pub path: Vec<f64>,
    /// Per pot: at its starting position over the same window, by the same
    /// per-location code; NaN where undefined.
    pub unmoved: Vec<f64>,
    /// The spread of `path` against that of `unmoved`.
    pub spread: Spread,
}

impl Evened {
    /// The driver `driver` (unit `unit`) with its values along the paths and
    /// without moves, per pot, and their [`Spread`].
    pub fn new(driver: &str, unit: &str, path: Vec<f64>, unmoved: Vec<f64>) -> Evened {
        Evened {
            driver: driver.to_string(),
            unit: unit.to_string(),
            spread: Spread::of(&path, &unmoved),
            path,
            unmoved,
        }
    }
}

/// The spread of a driver across the pots along their paths against the
/// spread without moves, over the pots where both values are defined (so
/// that the two spreads are taken over the same pots).
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Spread {
    /// Pots with both values.
    pub pots: usize,
    /// Standard deviation along the paths (divisor n - 1), driver unit;
    /// `None` with fewer than two pots.
    pub sd_path: Option<f64>,
    /// The same without moves.
    pub sd_unmoved: Option<f64>,
    /// `sd_path / sd_unmoved` (below 1: the moves narrowed the spread);
    /// `None` when `sd_unmoved` is 0 or undefined.
    pub sd_ratio: Option<f64>,
    /// 10th percentile along the paths ([`percentiles`]).
    pub p10_path: Option<f64>,
    /// 90th percentile along the paths.
    pub p90_path: Option<f64>,
    /// 10th percentile without moves.
    pub p10_unmoved: Option<f64>,
    /// 90th percentile without moves.
    pub p90_unmoved: Option<f64>,
    /// `(p90 - p10)` along the paths over the same without moves; `None`
    /// when the latter is 0 or undefined.
    pub range_ratio: Option<f64>,
}

impl Spread {
    /// The spread of `path` against `unmoved` (parallel per pot), over the
    /// pots where both are finite. Cost O(n log n).
    pub fn of(path: &[f64], unmoved: &[f64]) -> Spread {
        let (a, b): (Vec<f64>, Vec<f64>) = path
            .iter()
            .zip(unmoved)
            .filter(|(p, u)| p.is_finite() && u.is_finite())
            .map(|(p, u)| (*p, *u))
            .unzip();
        let ratio = |x: Option<f64>, y: Option<f64>| match (x, y) {
            (Some(x), Some(y)) if y > 0.0 => Some(x / y),
            _ => None,
        };
        let (sd_path, sd_unmoved) = (sample_sd(&a), sample_sd(&b));
        let [p10_path, p90_path] = percentiles(&a, [0.1, 0.9]).map_or([None; 2], |q| q.map(Some));
        let [p10_unmoved, p90_unmoved] = percentiles(&b, [0.1, 0.9]).map_or([None; 2], |q| q.map(Some));
        let width = |lo: Option<f64>, hi: Option<f64>| lo.zip(hi).map(|(lo, hi)| hi - lo);
        Spread {
            pots: a.len(),
            sd_path,
            sd_unmoved,
            sd_ratio: ratio(sd_path, sd_unmoved),
            p10_path,
            p90_path,
            p10_unmoved,
            p90_unmoved,
            range_ratio: ratio(width(p10_path, p90_path), width(p10_unmoved, p90_unmoved)),
        }
    }
}

/// Sample standard deviation `sqrt(sum (v - mean)^2 / (n - 1))` (two
/// passes); `None` for fewer than two values. Cost O(n).
pub fn sample_sd(v: &[f64]) -> Option<f64> {
    if v.len() < 2 {
        return None;
    }
    let mean = v.iter().sum::<f64>() / v.len() as f64;
    Some((v.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (v.len() - 1) as f64).sqrt())
}

/// The quantiles `ps` (each in 0..1) of `v` by linear interpolation between
/// the order statistics at `h = (n - 1) p` (Hyndman & Fan 1996, "Sample
/// quantiles in statistical packages", Am. Stat. 50(4), definition 7);
/// `None` for an empty slice. Sorts once: cost O(n log n).
pub fn percentiles<const K: usize>(v: &[f64], ps: [f64; K]) -> Option<[f64; K]> {
    if v.is_empty() {
        return None;
    }
    let mut sorted = v.to_vec();
    sorted.sort_by(f64::total_cmp);
    let last = sorted.len() - 1;
    Some(ps.map(|p| {
        let h = last as f64 * p.clamp(0.0, 1.0);
        let below = h.floor() as usize;
        sorted[below] + (h - below as f64) * (sorted[(below + 1).min(last)] - sorted[below])
    }))
}

impl MovedPots {
    /// The moved pots' record: the paths, each pot's time shares over its
    /// growth window `windows[j]` (steps), the shared places; the moves
    /// inside each window and the pot-days at each position are counted
    /// here (a step lasting `step_days` days). Drivers are added later.
    pub fn new(
        paths: Paths,
        shares: Vec<Vec<(usize, f64)>>,
        shared: Vec<String>,
        windows: &[Range<usize>],
        step_days: f64,
    ) -> MovedPots {
        let moves = windows.iter().enumerate().map(|(j, w)| paths.moves_in(j, w.clone())).collect();
        let mut pot_days = vec![0.0; paths.positions.len()];
        for (w, window) in shares.iter().zip(windows) {
            for &(p, share) in w {
                pot_days[p] += share * window.len() as f64 * step_days;
            }
        }
        MovedPots { paths, shares, shared, moves, pot_days, windows: windows.to_vec(), drivers: Vec::new() }
    }

    /// At most `k` pots that held the most distinct positions in their
    /// growth windows (ties in pot order; pots that never moved left out),
    /// each with the positions it held in order ([`Paths::sequence`]).
    pub fn most_travelled(&self, k: usize) -> Vec<(usize, Vec<usize>)> {
        let mut pots: Vec<usize> = (0..self.shares.len()).filter(|&j| self.shares[j].len() > 1).collect();
        pots.sort_by_key(|&j| std::cmp::Reverse(self.shares[j].len()));
        pots.truncate(k);
        pots.into_iter().map(|j| (j, self.paths.sequence(j, self.windows[j].clone()))).collect()
    }

    /// How many pots changed position in their growth window, and how many
    /// changes of position there were in all.
    pub fn moved(&self) -> (usize, usize) {
        (self.moves.iter().filter(|&&m| m > 0).count(), self.moves.iter().sum())
    }

    /// What the moves were, for the terminal: how many pots moved among how
    /// many positions, one line per driver on its spread with and without
    /// moves, then one line per place two pots shared at once.
    pub fn lines(&self) -> Vec<String> {
        let moved = self.paths.stays.iter().filter(|s| s.len() > 1).count();
        let mut out = vec![format!(
            "moves        {moved} of {} pots moved, {} positions mapped; {} time(s) two pots stood in one place",
            self.paths.stays.len(),
            self.paths.positions.len(),
            self.shared.len()
        )];
        out.extend(self.spread_lines());
        out.extend(self.shared.iter().map(|w| format!("             warning: {w}")));
        out
    }

    /// One line per driver for the terminal: its spread across the pots
    /// along the paths against without moves.
    fn spread_lines(&self) -> Vec<String> {
        let n = |v: Option<f64>| v.map_or("-".to_string(), |v| format!("{v:.4}"));
        self.drivers
            .iter()
            .map(|d| {
                let s = &d.spread;
                format!(
                    "             {}: SD across pots {} {unit} along the paths, {} {unit} without moves (ratio {})",
                    d.driver,
                    n(s.sd_path),
                    n(s.sd_unmoved),
                    n(s.sd_ratio),
                    unit = d.unit,
                )
            })
            .collect()
    }

    /// `pot_paths_exposure.csv`: one row per pot (pot-table order): its id,
    /// the positions it held and the changes of position in its growth
    /// window, then per driver its value along the path (`<driver>`) and at
    /// its starting position (`<driver>_unmoved`).
    pub fn exposure_csv(&self, pots: &[String]) -> Vec<u8> {
        let mut header = vec!["pot".to_string(), "positions".into(), "moves".into()];
        for d in &self.drivers {
            header.push(d.driver.clone());
            header.push(format!("{}_unmoved", d.driver));
        }
        let mut t = crate::io::output::CsvTable::new(header);
        for (j, pot) in pots.iter().enumerate() {
            let mut row = vec![pot.clone(), self.shares[j].len().to_string(), self.moves[j].to_string()];
            for d in &self.drivers {
                row.push(crate::io::output::number(d.path[j]));
                row.push(crate::io::output::number(d.unmoved[j]));
            }
            t.row(row);
        }
        t.into_bytes()
    }

    /// `paths_spread.csv`: one row per driver, its [`Spread`].
    pub fn spread_csv(&self) -> Vec<u8> {
        let mut t = crate::io::output::CsvTable::new([
            "driver",
            "unit",
            "pots",
            "sd_path",
            "sd_unmoved",
            "sd_ratio",
            "p10_path",
            "p90_path",
            "p10_unmoved",
            "p90_unmoved",
            "range_ratio",
        ]);
        let n = |v: Option<f64>| v.map_or(String::new(), crate::io::output::number);
        for d in &self.drivers {
            let s = &d.spread;
            t.row([
                d.driver.clone(),
                d.unit.clone(),
                s.pots.to_string(),
                n(s.sd_path),
                n(s.sd_unmoved),
                n(s.sd_ratio),
                n(s.p10_path),
                n(s.p90_path),
                n(s.p10_unmoved),
                n(s.p90_unmoved),
                n(s.range_ratio),
            ]);
        }
        t.into_bytes()
    }

    /// `pot_paths.csv`: one row per pot (pot-table order) and position it
    /// held in its growth window (in order of first stay), with the position's
    /// id (the pot whose own position it is, the slot, or `x=.. y=..`), its
    /// coordinates in metres and the pot's time share there.
    pub fn csv(&self, pots: &[String]) -> Vec<u8> {
        let mut t = crate::io::output::CsvTable::new(["pot", "position", "x", "y", "time_share"]);
        let pos = &self.paths.positions;
        for (j, w) in self.shares.iter().enumerate() {
            for &(p, share) in w {
                t.row([
                    pots[j].clone(),
                    pos.ids[p].clone(),
                    crate::io::output::number(pos.x[p]),
                    crate::io::output::number(pos.y[p]),
                    crate::io::output::number(share),
                ]);
            }
        }
        t.into_bytes()
    }
}

/// The steps of the days `days` of the calendar (contiguous).
pub fn window_steps(cal: &Calendar, days: Range<usize>) -> Range<usize> {
    if days.is_empty() {
        return 0..0;
    }
    cal.day_steps[days.start].start..cal.day_steps[days.end - 1].end
}

/// The time-share average `sum_p w_p v_p` of per-position values.
pub fn average(shares: &[(usize, f64)], at_positions: &[f64]) -> f64 {
    shares.iter().map(|&(p, w)| w * at_positions[p]).sum()
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;
    use crate::io::moves::Move;

    /// An hourly UTC calendar of `days` days from 1 March 2026.
    pub(crate) fn cal(days: u32) -> Calendar {
        let t = |d: u32| chrono::NaiveDate::from_ymd_opt(2026, 3, d).unwrap().and_hms_opt(0, 0, 0).unwrap();
        Calendar::new(chrono_tz::UTC, t(1), t(1 + days), 3_600_000).unwrap()
    }

    /// A move to `(x, y)` at `hour` hours into the calendar, from line `line`.
    pub(crate) fn mv(cal: &Calendar, hour: i64, x: f64, y: f64, line: usize) -> Move {
        let since_ms = cal.start_ms + hour * 3_600_000;
        Move {
            since_ms,
            since: crate::climate::calendar::local_time(cal.timezone, since_ms),
            x,
            y,
            slot: None,
            line,
        }
    }

    /// Pots a at (0, 0) and b at (1, 0).
    pub(crate) fn two_pots() -> Points {
        Points::new(
            "pot",
            vec!["a".into(), "b".into()],
            vec![0.0, 1.0],
            vec![0.0, 0.0],
            None,
            &Origin::default(),
        )
        .unwrap()
    }

    /// Two pots swap places after 12 of 48 hours, and pot a moves to a third
    /// place for the last 6 hours: the gathered series, the shares and the
    /// time-averaged value by hand.
    #[test]
    fn paths_gather_and_share_by_hand() {
        let c = cal(2);
        let pots = two_pots();
        let moves = Moves {
            path: "moves.csv".into(),
            rows: vec![vec![mv(&c, 12, 1.0, 0.0, 2), mv(&c, 42, 3.0, 0.0, 4)], vec![mv(&c, 12, 0.0, 0.0, 3)]],
            shared: vec![],
        };
        let p = Paths::new(&pots, &moves, &c).unwrap();
        assert!(!p.is_fixed());
        assert_eq!(p.positions.len(), 3);
        assert_eq!(p.stays, vec![vec![(0, 0), (12, 1), (42, 2)], vec![(0, 1), (12, 0)]]);
        // position k reads 10 k + step / 100
        let m = DMatrix::from_fn(48, 3, |t, k| 10.0 * k as f64 + t as f64 / 100.0);
        let a = p.along(&m);
        assert_eq!((a[(11, 0)], a[(12, 0)], a[(41, 0)], a[(42, 0)]), (0.11, 10.12, 10.41, 20.42));
        assert_eq!((a[(11, 1)], a[(12, 1)], a[(47, 1)]), (10.11, 0.12, 0.47));
        // shares over both days: a 12/48, 30/48, 6/48; b 12/48, 36/48
        let w = p.shares(0, window_steps(&c, 0..2), 48);
        assert_eq!(w, vec![(0, 0.25), (1, 0.625), (2, 0.125)]);
        assert_eq!(average(&w, &[4.0, 8.0, 16.0]), 0.25 * 4.0 + 0.625 * 8.0 + 0.125 * 16.0);
        // over the second day only: a 18/24 at 1 and 6/24 at 2
        assert_eq!(p.shares(0, window_steps(&c, 1..2), 48), vec![(1, 0.75), (2, 0.25)]);
        assert_eq!(p.shares(1, window_steps(&c, 1..2), 48), vec![(0, 1.0)]);
        // an empty window: the place held at its start
        assert_eq!(p.shares(0, 20..20, 48), vec![(1, 1.0)]);
        // pot_paths.csv of the whole period
        let shares = (0..2).map(|j| p.shares(j, window_steps(&c, 0..2), 48)).collect();
        // changes of position: a twice (hours 12 and 42), b once; in the
        // second day only, a once
        assert_eq!((p.moves_in(0, 0..48), p.moves_in(1, 0..48)), (2, 1));
        assert_eq!((p.moves_in(0, 24..48), p.moves_in(1, 24..48)), (1, 0));
        let moved = MovedPots::new(p, shares, vec![], &[0..48, 0..48], 1.0 / 24.0);
        assert_eq!(moved.moved(), (2, 3));
        // the places in the order held: a 0 -> 1 -> 2, b 1 -> 0; on the
        // second day a 1 -> 2 only; the most travelled first
        assert_eq!(
            (moved.paths.sequence(0, 0..48), moved.paths.sequence(1, 0..48)),
            (vec![0, 1, 2], vec![1, 0])
        );
        assert_eq!(moved.paths.sequence(0, 24..48), vec![1, 2]);
        assert_eq!(moved.most_travelled(12), vec![(0, vec![0, 1, 2]), (1, vec![1, 0])]);
        assert_eq!(moved.most_travelled(1), vec![(0, vec![0, 1, 2])]);
        // pot-days: at a's place 12 h of a and 36 h of b (2 d); at b's place
        // 30 h of a and 12 h of b (1.75 d); at the third place 6 h (0.25 d)
        for (got, want) in moved.pot_days.iter().zip([2.0, 1.75, 0.25]) {
            assert!((got - want).abs() < 1e-12, "{:?}", moved.pot_days);
        }
        let csv = String::from_utf8(moved.csv(&["a".into(), "b".into()])).unwrap();
        assert_eq!(
            csv,
            "pot,position,x,y,time_share\na,a,0,0,0.25\na,b,1,0,0.625\na,x=3 y=0,3,0,0.125\nb,b,1,0,0.25\nb,a,0,0,0.75\n"
        );
        assert!(moved.lines()[0].contains("2 of 2 pots moved, 3 positions"), "{:?}", moved.lines());
    }

    /// Two pots, values 12 and 36 along their paths, 48 and 0 had they
    /// stayed: by hand, the SDs (divisor n - 1) are 24/sqrt(2) and
    /// 48/sqrt(2) (ratio 1/2); the 10th-90th percentiles (definition 7,
    /// `lo + (hi - lo) p` for two values) 14.4-33.6 and 4.8-43.2 (ratio 1/2).
    /// A pot with an undefined value counts in neither spread.
    #[test]
    fn spread_with_and_without_moves_by_hand() {
        let s = Spread::of(&[12.0, 36.0, f64::NAN], &[48.0, 0.0, 5.0]);
        assert_eq!(s.pots, 2);
        let close = |a: Option<f64>, b: f64| assert!((a.unwrap() - b).abs() < 1e-12, "{a:?} against {b}");
        close(s.sd_path, 24.0 / 2f64.sqrt());
        close(s.sd_unmoved, 48.0 / 2f64.sqrt());
        close(s.sd_ratio, 0.5);
        close(s.p10_path, 14.4);
        close(s.p90_path, 33.6);
        close(s.p10_unmoved, 4.8);
        close(s.p90_unmoved, 43.2);
        close(s.range_ratio, 0.5);
        // no spread without moves: no ratio
        let flat = Spread::of(&[1.0, 2.0], &[3.0, 3.0]);
        assert_eq!((flat.sd_unmoved, flat.sd_ratio, flat.range_ratio), (Some(0.0), None, None));
        assert_eq!(Spread::of(&[1.0], &[2.0]).sd_path, None);
        // five values 1, 2, 4, 8, 16: h = 0.4 and 3.6, so 1.4 and 8 + 0.6 * 8
        // = 12.8 (definition 7 by hand); the SD from the mean 6.2: the
        // squares 27.04 + 17.64 + 4.84 + 3.24 + 96.04 = 148.8, over 4
        let [p10, p90] = percentiles(&[16.0, 2.0, 8.0, 1.0, 4.0], [0.1, 0.9]).unwrap();
        assert!((p10 - 1.4).abs() < 1e-12 && (p90 - 12.8).abs() < 1e-12, "{p10} {p90}");
        assert!((sample_sd(&[16.0, 2.0, 8.0, 1.0, 4.0]).unwrap() - 37.2f64.sqrt()).abs() < 1e-12);
        assert_eq!(percentiles(&[], [0.5]), None);
    }

    /// No move rows: the fixed paths, which gather nothing; a move whose time
    /// falls between steps holds from the next step; a row outside the grid
    /// is an error naming its line.
    #[test]
    fn fixed_paths_and_rows_outside_the_grid() {
        let c = cal(1);
        let pots = two_pots();
        let none = Moves { path: "m.csv".into(), rows: vec![vec![], vec![]], shared: vec![] };
        let p = Paths::new(&pots, &none, &c).unwrap();
        assert!(p.is_fixed());
        assert_eq!(p.stays, Paths::fixed(&pots).stays);
        let mut half = mv(&c, 3, 2.0, 0.0, 2);
        half.since_ms += 1_800_000;
        let m = Moves { path: "m.csv".into(), rows: vec![vec![half], vec![]], shared: vec![] };
        assert_eq!(Paths::new(&pots, &m, &c).unwrap().stays[0], vec![(0, 0), (4, 2)]);
        let late =
            Moves { path: "m.csv".into(), rows: vec![vec![], vec![mv(&c, 30, 2.0, 0.0, 7)]], shared: vec![] };
        let e = Paths::new(&pots, &late, &c).unwrap_err();
        let msg = format!("{e:#}");
        assert!(msg.contains("m.csv:7") && msg.contains("outside the study period"), "{msg}");
    }
}
