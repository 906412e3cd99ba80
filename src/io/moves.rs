//! Pots that move: the move table named by `[pots] moves` and its optional
//! slot table `[pots] slots` (`docs/study-file.md`, "Pots that move").
//!
//! The move table has one row per move: the pot (`pot`, an id of the pot
//! table), the local time from which it holds the new position (`since`, read
//! in `[study].timezone` like every other local time of the study), and the
//! position: `x` and `y` in metres, or `slot` naming a row of the slot table
//! (`slot`, `x`, `y`). A row's position is held from its time until the
//! pot's next row; before its first row a pot stands where the pot table puts
//! it, and a pot without rows never moves.
//!
//! Checked here, each error naming the file, line, column and value with a
//! hint: unknown pots and slots, a pot's rows out of time order or two rows of
//! one pot at one time, times that are not local date-times or that the clock
//! skipped, times outside the study period of `[climate]` (when declared;
//! otherwise the mapping stage checks them against the readings' period),
//! positions outside the compartment. Two pots in one place at once is a
//! warning ([`Moves::shared`]), counted and named, not an error: a slot may
//! hold two small pots.

use super::clock::Resolution;
use super::error::{Result, edit_distance};
use super::ingest::Period;
use super::layout::{Pots, parse_local_datetime};
use super::study::Study;
use super::table::Table;
use chrono::NaiveDateTime;
use std::collections::HashMap;
use std::path::PathBuf;

/// Column of the move table with the pot id.
pub const MOVE_POT: &str = "pot";
/// Column of the move table with the local time the position is held from.
pub const MOVE_SINCE: &str = "since";
/// Column of the move table (and the slot table) with x in metres.
pub const MOVE_X: &str = "x";
/// Column of the move table (and the slot table) with y in metres.
pub const MOVE_Y: &str = "y";
/// Column of the move table (and the slot table) with the slot id.
pub const MOVE_SLOT: &str = "slot";

/// One row of the move table.
#[derive(Debug, Clone, PartialEq)]
pub struct Move {
    /// The instant the position is held from, UTC milliseconds.
    pub since_ms: i64,
    /// The same as written (local time of the study).
    pub since: NaiveDateTime,
    /// x in metres.
    pub x: f64,
    /// y in metres.
    pub y: f64,
    /// The slot named, when the table names slots.
    pub slot: Option<String>,
    /// Physical line of the row in the move table.
    pub line: usize,
}

/// The move table, checked against the pot table.
#[derive(Debug, Clone)]
pub struct Moves {
    /// The move table's path.
    pub path: PathBuf,
    /// Per pot (pot-table order): its moves in time order (empty: never moves).
    pub rows: Vec<Vec<Move>>,
    /// Two pots in one place at once: one sentence per place and pair.
    pub shared: Vec<String>,
}

impl Moves {
    /// Number of move rows.
    pub fn len(&self) -> usize {
        self.rows.iter().map(Vec::len).sum()
    }

    /// Whether no pot moves.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// The index of the row of pot `pot` in force at instant `t_ms` (the last
    /// row whose time is not after `t_ms`); `None` before its first row (the
    /// pot stands at its pot-table position). Cost O(log rows).
    pub fn row_at(&self, pot: usize, t_ms: i64) -> Option<usize> {
        let r = &self.rows[pot];
        r.partition_point(|m| m.since_ms <= t_ms).checked_sub(1)
    }
}

/// A slot of the slot table.
struct Slot {
    x: f64,
    y: f64,
}

fn in_compartment(study: &Study, x: f64, y: f64) -> bool {
    match study.spec.compartment {
        // A millimetre of slack, as for the pot and sensor tables.
        Some(c) => x >= -1e-3 && x <= c.length + 1e-3 && y >= -1e-3 && y <= c.width + 1e-3,
        None => true,
    }
}

fn outside_hint(study: &Study) -> Option<String> {
    study.spec.compartment.map(|c| {
        format!(
            "[compartment] spans x from 0 to {} m and y from 0 to {} m; check the position or the compartment",
            c.length, c.width
        )
    })
}

/// The closest of `names` to `v`, when close enough to be a likely typo.
fn closest<'a>(v: &str, names: impl Iterator<Item = &'a String>) -> Option<&'a String> {
    names.map(|n| (edit_distance(v, n), n)).filter(|(d, _)| *d <= 2).min_by_key(|(d, _)| *d).map(|(_, n)| n)
}

/// A position column's numbers, finite and inside the compartment.
fn coordinates(study: &Study, table: &Table) -> Result<Vec<(f64, f64)>> {
    let (jx, jy) = (table.column(MOVE_X)?, table.column(MOVE_Y)?);
    let number = |i: usize, j: usize, name: &str| -> Result<f64> {
        let v = &table.rows[i][j];
        v.parse::<f64>().ok().filter(|x| x.is_finite()).ok_or_else(|| {
            table.bad(
                table.lines[i],
                name,
                v,
                "not a number of metres",
                Some("write the position in metres with a decimal point, e.g. 1.25".into()),
            )
        })
    };
    let mut xs = Vec::with_capacity(table.len());
    let mut ys = Vec::with_capacity(table.len());
    for i in 0..table.len() {
        xs.push(number(i, jx, MOVE_X)?);
        ys.push(number(i, jy, MOVE_Y)?);
    }
    let mut out = Vec::with_capacity(xs.len());
    for i in 0..xs.len() {
        if !in_compartment(study, xs[i], ys[i]) {
            let name = if xs[i] < -1e-3 || study.spec.compartment.is_some_and(|c| xs[i] > c.length + 1e-3) {
                MOVE_X
            } else {
                MOVE_Y
            };
            let j = if name == MOVE_X { jx } else { jy };
            return Err(table.bad(
                table.lines[i],
                name,
                &table.rows[i][j],
                "the position lies outside the compartment",
                outside_hint(study),
            ));
        }
        out.push((xs[i], ys[i]));
    }
    Ok(out)
}

/// Read the slot table: unique ids, positions inside the compartment.
fn load_slots(study: &Study, file: &str) -> Result<(Vec<String>, HashMap<String, Slot>)> {
    let table = Table::read(&study.resolve(file), b',')?;
    let ids = table.text(MOVE_SLOT)?;
    let xy = coordinates(study, &table)?;
    let mut slots = HashMap::new();
    let mut order = Vec::new();
    let mut first: HashMap<&str, usize> = HashMap::new();
    for (i, id) in ids.iter().enumerate() {
        if id.is_empty() {
            return Err(table.bad(table.lines[i], MOVE_SLOT, id, "empty slot id", None));
        }
        if let Some(l) = first.insert(id, table.lines[i]) {
            return Err(table.bad(
                table.lines[i],
                MOVE_SLOT,
                id,
                &format!("duplicate slot id (first on line {l})"),
                Some("each slot is listed once".into()),
            ));
        }
        order.push(id.to_string());
        slots.insert(id.to_string(), Slot { x: xy[i].0, y: xy[i].1 });
    }
    Ok((order, slots))
}

/// The UTC instant of a local time of the study; ambiguous times (clocks
/// turned back) take the earlier instant.
fn instant(study: &Study, table: &Table, i: usize, j: usize) -> Result<(NaiveDateTime, i64)> {
    let v = &table.rows[i][j];
    let local = parse_local_datetime(v).ok_or_else(|| {
        table.bad(
            table.lines[i],
            MOVE_SINCE,
            v,
            "not a local date or date-time",
            Some("write e.g. 2026-03-02 08:00 (local time of [study].timezone)".into()),
        )
    })?;
    match super::clock::resolve_exact(study.timezone, local.and_utc().timestamp_millis()) {
        Resolution::Single(t) | Resolution::Ambiguous(t, _) => Ok((local, t)),
        Resolution::Nonexistent => Err(table.bad(
            table.lines[i],
            MOVE_SINCE,
            v,
            &format!("this local time does not exist in {} (the clocks skip it)", study.timezone),
            Some("choose a time outside the spring-forward hour".into()),
        )),
    }
}

/// Read and check the move table of `[pots] moves` against the pot table;
/// `None` when the key is absent. `period` is the study period of `[climate]`
/// (open ends are not checked here). Cost O(rows log rows).
pub fn load_moves(study: &Study, pots: &Pots, period: &Period) -> Result<Option<Moves>> {
    let Some(file) = &study.spec.pots.moves else { return Ok(None) };
    let path = study.resolve(file);
    let table = Table::read(&path, b',')?;
    let slots = study.spec.pots.slots.as_deref().map(|f| load_slots(study, f)).transpose()?;
    let index: HashMap<&str, usize> = pots.ids.iter().enumerate().map(|(i, s)| (s.as_str(), i)).collect();
    let jp = table.column(MOVE_POT)?;
    let jt = table.column(MOVE_SINCE)?;
    let places: Vec<(f64, f64, Option<String>)> = match &slots {
        Some((order, map)) => {
            let js = table.column(MOVE_SLOT)?;
            let mut out = Vec::with_capacity(table.len());
            for (i, row) in table.rows.iter().enumerate() {
                let id = &row[js];
                let Some(s) = map.get(id.as_str()) else {
                    let hint = match closest(id, order.iter()) {
                        Some(c) => format!("did you mean `{c}`? the slot table lists {} slots", order.len()),
                        None => {
                            format!("the slot table lists {} slots; add this one or fix the id", order.len())
                        }
                    };
                    return Err(table.bad(table.lines[i], MOVE_SLOT, id, "unknown slot", Some(hint)));
                };
                out.push((s.x, s.y, Some(id.clone())));
            }
            out
        }
        None => coordinates(study, &table)?.into_iter().map(|(x, y)| (x, y, None)).collect(),
    };
    let mut rows: Vec<Vec<Move>> = vec![Vec::new(); pots.ids.len()];
    for (i, row) in table.rows.iter().enumerate() {
        let line = table.lines[i];
        let id = &row[jp];
        let Some(&p) = index.get(id.as_str()) else {
            let hint = match closest(id, pots.ids.iter()) {
                Some(c) => format!("did you mean `{c}`? ids are compared exactly"),
                None => "every pot of the move table must be a row of the pot table".into(),
            };
            return Err(table.bad(line, MOVE_POT, id, "unknown pot", Some(hint)));
        };
        let (local, t) = instant(study, &table, i, jt)?;
        if !period.contains(t) {
            return Err(table.bad(
                line,
                MOVE_SINCE,
                &row[jt],
                "the time lies outside the study period of [climate] start and end",
                Some("a move outside the study period changes nothing that is analysed; remove the row or widen the period".into()),
            ));
        }
        if let Some(prev) = rows[p].last() {
            if prev.since_ms == t {
                return Err(table.bad(
                    line,
                    MOVE_SINCE,
                    &row[jt],
                    &format!("pot `{id}` has two rows at this time (first on line {})", prev.line),
                    Some("a pot holds one position at a time; keep one of the two rows".into()),
                ));
            }
            if prev.since_ms > t {
                return Err(table.bad(
                    line,
                    MOVE_SINCE,
                    &row[jt],
                    &format!(
                        "pot `{id}` moves here before its earlier row on line {} ({})",
                        prev.line, prev.since
                    ),
                    Some("list each pot's moves in time order".into()),
                ));
            }
        }
        let (x, y, slot) = places[i].clone();
        rows[p].push(Move { since_ms: t, since: local, x, y, slot, line });
    }
    let shared = shared_places(pots, &rows, slots.as_ref().map(|s| &s.1));
    Ok(Some(Moves { path, rows, shared }))
}

/// One stay of a pot in one place: `[from, to)` in UTC ms (open ends as
/// `i64::MIN`/`i64::MAX`), the pot, and the move row's line (`None`: the
/// pot-table position before the first move).
struct Stay {
    from: i64,
    to: i64,
    pot: usize,
    line: Option<usize>,
    since: Option<NaiveDateTime>,
}

/// Every time two pots stand in one place (same coordinates) at once, with at
/// least one of the two there by a move: one sentence each, by place then
/// time. Cost O(stays log stays).
fn shared_places(pots: &Pots, rows: &[Vec<Move>], slots: Option<&HashMap<String, Slot>>) -> Vec<String> {
    let key = |x: f64, y: f64| (x.to_bits(), y.to_bits());
    let mut by_place: HashMap<(u64, u64), Vec<Stay>> = HashMap::new();
    for (p, r) in rows.iter().enumerate() {
        let first = r.first().map_or(i64::MAX, |m| m.since_ms);
        by_place.entry(key(pots.x[p], pots.y[p])).or_default().push(Stay {
            from: i64::MIN,
            to: first,
            pot: p,
            line: None,
            since: None,
        });
        for (k, m) in r.iter().enumerate() {
            let to = r.get(k + 1).map_or(i64::MAX, |n| n.since_ms);
            by_place.entry(key(m.x, m.y)).or_default().push(Stay {
                from: m.since_ms,
                to,
                pot: p,
                line: Some(m.line),
                since: Some(m.since),
            });
        }
    }
    let slot_name: HashMap<(u64, u64), &str> =
        slots.map(|s| s.iter().map(|(id, v)| (key(v.x, v.y), id.as_str())).collect()).unwrap_or_default();
    let mut places: Vec<_> = by_place.into_iter().collect();
    places.sort_by(|a, b| {
        f64::from_bits(a.0.0)
            .total_cmp(&f64::from_bits(b.0.0))
            .then(f64::from_bits(a.0.1).total_cmp(&f64::from_bits(b.0.1)))
    });
    let mut out = Vec::new();
    for (k, mut stays) in places {
        stays.retain(|s| s.from < s.to);
        stays.sort_by_key(|s| (s.from, s.pot));
        let name = match slot_name.get(&k) {
            Some(s) => format!("slot `{s}`"),
            None => format!("the place ({}, {})", f64::from_bits(k.0), f64::from_bits(k.1)),
        };
        // The stay that reaches furthest so far.
        let mut open: Option<usize> = None;
        for i in 0..stays.len() {
            if let Some(o) = open {
                let (a, b) = (&stays[o], &stays[i]);
                if b.from < a.to && a.pot != b.pot && (a.line.is_some() || b.line.is_some()) {
                    let when = match (b.since, b.line) {
                        (Some(t), Some(l)) => format!("from {t} (move table line {l})"),
                        _ => "from the start".into(),
                    };
                    out.push(format!(
                        "{name} holds pots `{}` and `{}` at once {when}",
                        pots.ids[a.pot], pots.ids[b.pot]
                    ));
                }
                if b.to > a.to {
                    open = Some(i);
                }
            } else {
                open = Some(i);
            }
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::io::IoError;
    use crate::io::layout::load_pots;
    use std::path::Path;

    /// A study in `dir` with three pots on a 4 m x 2 m compartment, the zone
    /// `tz`, `[climate]` period keys `climate` and `[pots]` keys `keys`.
    fn study_in(dir: &Path, tz: &str, climate: &str, keys: &str, moves: &str, slots: Option<&str>) -> Study {
        std::fs::write(dir.join("pots.csv"), "pot,x,y\na,0.5,0.5\nb,1.5,0.5\nc,2.5,0.5\n").unwrap();
        std::fs::write(dir.join("moves.csv"), moves).unwrap();
        if let Some(s) = slots {
            std::fs::write(dir.join("slots.csv"), s).unwrap();
        }
        let src = format!(
            "[study]\ntitle = \"t\"\ntimezone = \"{tz}\"\noutput = \"out\"\n\n[compartment]\nlength = 4.0\nwidth = 2.0\n\n[pots]\nfile = \"pots.csv\"\nid = \"pot\"\nx = \"x\"\ny = \"y\"\nmoves = \"moves.csv\"\n{keys}\n{climate}"
        );
        let p = dir.join("study.toml");
        std::fs::write(&p, &src).unwrap();
        Study::load(&p).unwrap()
    }

    fn load(st: &Study) -> Result<Option<Moves>> {
        let pots = load_pots(st)?;
        let period = crate::io::ingest::study_period(st)?;
        load_moves(st, &pots, &period)
    }

    const PERIOD: &str = "[climate]\nstart = \"2026-03-01\"\nend = \"2026-04-01\"\n";

    /// Coordinates and slots are read, local times resolved in the study's
    /// zone (Europe/Berlin is UTC+1 in early March: 08:00 local is 07:00 UTC,
    /// from memory of the zone's rules), rows kept per pot in time order, and
    /// `row_at` picks the row in force.
    #[test]
    fn rows_are_read_per_pot_in_time_order() {
        let d = tempfile::tempdir().unwrap();
        let st = study_in(
            d.path(),
            "Europe/Berlin",
            PERIOD,
            "",
            "pot,since,x,y\na,2026-03-02 08:00,1.0,1.5\nb,2026-03-03,3.5,1.5\na,2026-03-09 08:00,0.5,0.5\n",
            None,
        );
        let m = load(&st).unwrap().unwrap();
        assert_eq!(m.len(), 3);
        assert_eq!(m.rows[0].len(), 2);
        assert!(m.rows[2].is_empty());
        let t = chrono::NaiveDate::from_ymd_opt(2026, 3, 2).unwrap().and_hms_opt(7, 0, 0).unwrap();
        assert_eq!(m.rows[0][0].since_ms, t.and_utc().timestamp_millis());
        assert_eq!((m.rows[0][0].x, m.rows[0][0].y, m.rows[0][0].line), (1.0, 1.5, 2));
        assert_eq!(m.row_at(0, m.rows[0][0].since_ms - 1), None);
        assert_eq!(m.row_at(0, m.rows[0][0].since_ms), Some(0));
        assert_eq!(m.row_at(0, m.rows[0][1].since_ms + 1), Some(1));
        assert!(m.shared.is_empty(), "{:?}", m.shared);
        // the same moves by slot
        let st = study_in(
            d.path(),
            "UTC",
            PERIOD,
            "slots = \"slots.csv\"",
            "pot,since,slot\na,2026-03-02,s2\nb,2026-03-02,s1\n",
            Some("slot,x,y\ns1,0.5,0.5\ns2,1.5,0.5\n"),
        );
        let m = load(&st).unwrap().unwrap();
        assert_eq!((m.rows[0][0].x, m.rows[0][0].slot.as_deref()), (1.5, Some("s2")));
        // a and b swap places at the same instant: no one shares
        assert!(m.shared.is_empty(), "{:?}", m.shared);
    }

    /// Every refusal names the file, line, column and value, with a hint.
    #[test]
    fn bad_rows_are_refused_with_line_column_and_value() {
        let d = tempfile::tempdir().unwrap();
        let head = "pot,since,x,y\n";
        for (body, line, column, value, words) in [
            ("a,2026-03-02,1,1\nz,2026-03-03,1,1\n", 3, "pot", "z", "unknown pot"),
            ("A,2026-03-02,1,1\n", 2, "pot", "A", "did you mean `a`"),
            (
                "a,2026-03-05,1,1\na,2026-03-02,1,1\n",
                3,
                "since",
                "2026-03-02",
                "before its earlier row on line 2",
            ),
            ("a,2026-03-05,1,1\na,2026-03-05,2,1\n", 3, "since", "2026-03-05", "two rows at this time"),
            ("a,2026-02-20,1,1\n", 2, "since", "2026-02-20", "outside the study period"),
            ("a,2026-04-03,1,1\n", 2, "since", "2026-04-03", "outside the study period"),
            ("a,next week,1,1\n", 2, "since", "next week", "not a local date"),
            ("a,2026-03-02,5.5,1\n", 2, "x", "5.5", "outside the compartment"),
            ("a,2026-03-02,1,-2\n", 2, "y", "-2", "outside the compartment"),
            ("a,2026-03-02,1,far\n", 2, "y", "far", "not a number of metres"),
        ] {
            let st = study_in(d.path(), "UTC", PERIOD, "", &format!("{head}{body}"), None);
            let e = load(&st).unwrap_err();
            let msg = format!("{e:#}");
            match &e {
                IoError::BadValue { line: l, column: c, value: v, .. } => {
                    assert_eq!((*l, c.as_str(), v.as_str()), (line, column, value), "{msg}")
                }
                other => panic!("unexpected error {other:?}"),
            }
            assert!(msg.contains("moves.csv") && msg.contains(words) && msg.contains("hint"), "{msg}");
        }
        // a time the clocks skip (Europe/Berlin springs forward at 02:00 on 29 March 2026)
        let st =
            study_in(d.path(), "Europe/Berlin", PERIOD, "", &format!("{head}a,2026-03-29 02:30,1,1\n"), None);
        let msg = format!("{:#}", load(&st).unwrap_err());
        assert!(msg.contains(":2:") && msg.contains("does not exist"), "{msg}");
        // an unknown slot, with the closest named; a duplicate slot id
        let slots = "slot,x,y\nbench1,0.5,0.5\nbench2,1.5,0.5\n";
        let st = study_in(
            d.path(),
            "UTC",
            PERIOD,
            "slots = \"slots.csv\"",
            "pot,since,slot\na,2026-03-02,bench3\n",
            Some(slots),
        );
        let msg = format!("{:#}", load(&st).unwrap_err());
        assert!(
            msg.contains("moves.csv:2") && msg.contains("`bench3`") && msg.contains("unknown slot"),
            "{msg}"
        );
        let st = study_in(
            d.path(),
            "UTC",
            PERIOD,
            "slots = \"slots.csv\"",
            "pot,since,slot\na,2026-03-02,s1\n",
            Some("slot,x,y\ns1,0.5,0.5\ns1,1.5,0.5\n"),
        );
        let msg = format!("{:#}", load(&st).unwrap_err());
        assert!(msg.contains("slots.csv:3") && msg.contains("duplicate slot"), "{msg}");
        // a move table without position columns names the missing column
        let st = study_in(d.path(), "UTC", PERIOD, "", "pot,since,where\na,2026-03-02,s1\n", None);
        let msg = format!("{:#}", load(&st).unwrap_err());
        assert!(msg.contains("no column `x`"), "{msg}");
        // a slot table without a move table is refused when the study is loaded
        std::fs::write(d.path().join("pots.csv"), "pot,x,y\na,0,0\n").unwrap();
        let src = "[study]\ntitle = \"t\"\ntimezone = \"UTC\"\noutput = \"out\"\n\n[pots]\nfile = \"pots.csv\"\nid = \"pot\"\nx = \"x\"\ny = \"y\"\nslots = \"slots.csv\"\n";
        std::fs::write(d.path().join("study.toml"), src).unwrap();
        let e = Study::load(&d.path().join("study.toml")).unwrap_err();
        assert!(format!("{e:#}").contains("pots.slots"), "{e:#}");
    }

    /// Two pots in one place at once is a warning naming the place, both pots
    /// and the line; moving into a place its pot has left is not.
    #[test]
    fn two_pots_in_one_place_are_named() {
        let d = tempfile::tempdir().unwrap();
        let slots = "slot,x,y\nhome_a,0.5,0.5\nhome_b,1.5,0.5\nfree,3.5,1.5\n";
        // c moves onto b's place while b is still there; a moves into `free`, then b joins it
        let st = study_in(
            d.path(),
            "UTC",
            PERIOD,
            "slots = \"slots.csv\"",
            "pot,since,slot\nc,2026-03-02,home_b\na,2026-03-03,free\nb,2026-03-04,free\nc,2026-03-05,home_a\n",
            Some(slots),
        );
        let m = load(&st).unwrap().unwrap();
        assert_eq!(m.shared.len(), 2, "{:?}", m.shared);
        assert!(
            m.shared
                .iter()
                .any(|s| s.contains("slot `home_b`") && s.contains("`b` and `c`") && s.contains("line 2")),
            "{:?}",
            m.shared
        );
        assert!(
            m.shared
                .iter()
                .any(|s| s.contains("slot `free`") && s.contains("`a` and `b`") && s.contains("line 4")),
            "{:?}",
            m.shared
        );
    }
}
