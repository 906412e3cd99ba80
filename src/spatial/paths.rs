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
}

impl MovedPots {
    /// What the moves were, for the terminal: how many pots moved among how
    /// many positions, then one line per place two pots shared at once.
    pub fn lines(&self) -> Vec<String> {
        let moved = self.paths.stays.iter().filter(|s| s.len() > 1).count();
        let mut out = vec![format!(
            "moves        {moved} of {} pots moved, {} positions mapped; {} time(s) two pots stood in one place",
            self.paths.stays.len(),
            self.paths.positions.len(),
            self.shared.len()
        )];
        out.extend(self.shared.iter().map(|w| format!("             warning: {w}")));
        out
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
mod tests {
    use super::*;
    use crate::io::moves::Move;

    fn cal(days: u32) -> Calendar {
        let t = |d: u32| chrono::NaiveDate::from_ymd_opt(2026, 3, d).unwrap().and_hms_opt(0, 0, 0).unwrap();
        Calendar::new(chrono_tz::UTC, t(1), t(1 + days), 3_600_000).unwrap()
    }

    fn mv(cal: &Calendar, hour: i64, x: f64, y: f64, line: usize) -> Move {
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

    fn two_pots() -> Points {
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
        let moved = MovedPots { paths: p, shares, shared: vec![] };
        let csv = String::from_utf8(moved.csv(&["a".into(), "b".into()])).unwrap();
        assert_eq!(
            csv,
            "pot,position,x,y,time_share\na,a,0,0,0.25\na,b,1,0,0.625\na,x=3 y=0,3,0,0.125\nb,b,1,0,0.25\nb,a,0,0,0.75\n"
        );
        assert!(moved.lines()[0].contains("2 of 2 pots moved, 3 positions"), "{:?}", moved.lines());
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
