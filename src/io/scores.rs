//! Repeated scorings (`[scores]` of the study file): a long table with one
//! row per pot and scoring time and one or more trait columns (projected leaf
//! area from imaging, weekly height, ...), read and validated once, and cut
//! into growth intervals.
//!
//! What is refused, with the file, the physical line, the column and the cell
//! (the same rules as the pot table, `io::layout`): a pot id that is not in
//! the pot table (with the closest id as hint), a time that is not a local
//! date or date-time, two rows for the same pot and time, a scoring outside
//! the pot's growth window (`[pots].start`/`end`, both ends included), a trait
//! cell that is not a number, and (for relative growth) a value that is not
//! positive. Empty and `NA` cells are missing values: they are counted per
//! trait and listed with their lines ([`Scores::missing`]), and an interval
//! that starts or ends on a missing value has no growth for that pot (the pot
//! is left out of that interval's fit and named there), never dropped
//! silently.
//!
//! Intervals ([`Scores::intervals`]): the scorings are grouped into bins
//! (`interval = "scorings"`: every distinct time is a bin; `"day"`: one local
//! date; `"week"`: seven local dates from the date of the first scoring),
//! each pot keeps its last scoring in each bin (the others are counted as
//! superseded), and interval `k` runs, for each pot, from its scoring in bin
//! `k` to its scoring in bin `k + 1`. Growth over the interval is the
//! difference of the two values, or the difference of their natural
//! logarithms (`growth = "log_ratio"`: relative growth over the interval,
//! whose mean per day is the relative growth rate of Hunt 1982, *Plant
//! Growth Curves*, Edward Arnold, ch. 2).
//!
//! The key-by-key documentation is `docs/scores.md`.

use super::error::{Result, closest};
use super::layout::{Pots, parse_local_datetime};
use super::study::{Study, delimiter_byte};
use super::table::{Table, is_missing};
use chrono::{NaiveDate, NaiveDateTime};
use serde::Deserialize;
use std::collections::{BTreeMap, HashMap};
use std::path::PathBuf;

/// `[scores]` as written in the study file.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ScoresSection {
    /// The long table (CSV), relative to the study file.
    pub file: String,
    /// Column with the pot id (as in the pot table).
    pub pot: String,
    /// Column with the scoring time: local date or date-time of the study's zone.
    pub time: String,
    /// Trait columns, one or more.
    pub traits: Vec<String>,
    /// Field delimiter (one character or `"tab"`; default `,`).
    #[serde(default)]
    pub delimiter: Option<String>,
    /// `"scorings"` (default), `"day"` or `"week"`.
    #[serde(default)]
    pub interval: Option<String>,
    /// `"difference"` (default) or `"log_ratio"`.
    #[serde(default)]
    pub growth: Option<String>,
}

/// How scorings are grouped into the ends of intervals.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum IntervalRule {
    /// Every distinct scoring time is an end.
    Scorings,
    /// One end per local date (the pot's last scoring of the date).
    Day,
    /// One end per seven local dates, counted from the first scoring's date.
    Week,
}

impl IntervalRule {
    /// The study-file spelling.
    pub fn name(self) -> &'static str {
        match self {
            IntervalRule::Scorings => "scorings",
            IntervalRule::Day => "day",
            IntervalRule::Week => "week",
        }
    }
}

/// Growth over an interval.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Growth {
    /// `y1 - y0`, trait units.
    Difference,
    /// `ln y1 - ln y0`, dimensionless (values must be positive).
    LogRatio,
}

impl Growth {
    /// The study-file spelling.
    pub fn name(self) -> &'static str {
        match self {
            Growth::Difference => "difference",
            Growth::LogRatio => "log_ratio",
        }
    }

    /// Growth from `a` to `b`; `None` when either is missing.
    pub fn between(self, a: Option<f64>, b: Option<f64>) -> Option<f64> {
        let (a, b) = (a?, b?);
        Some(match self {
            Growth::Difference => b - a,
            Growth::LogRatio => b.ln() - a.ln(),
        })
    }
}

/// One row of the scores table.
#[derive(Debug, Clone, PartialEq)]
pub struct ScoreRow {
    /// Index of the pot in the pot table.
    pub pot: usize,
    /// Scoring time, local time of the study.
    pub time: NaiveDateTime,
    /// Physical line in the scores table.
    pub line: usize,
    /// One value per trait (`None`: missing).
    pub values: Vec<Option<f64>>,
}

/// The missing cells of one trait.
#[derive(Debug, Clone, PartialEq)]
pub struct MissingCells {
    /// Trait column.
    pub trait_name: String,
    /// Physical lines of the missing cells.
    pub lines: Vec<usize>,
}

/// The validated scores table.
#[derive(Debug, Clone)]
pub struct Scores {
    /// The table.
    pub path: PathBuf,
    /// Trait columns, in the order of `[scores].traits`.
    pub traits: Vec<String>,
    /// Interval rule.
    pub rule: IntervalRule,
    /// Growth measure.
    pub growth: Growth,
    /// Every row, in file order.
    pub rows: Vec<ScoreRow>,
    /// Missing cells per trait (every trait listed, possibly with no line).
    pub missing: Vec<MissingCells>,
}

/// One pot's part of an interval.
#[derive(Debug, Clone, PartialEq)]
pub struct PotSpan {
    /// Index of the pot in the pot table.
    pub pot: usize,
    /// Its scoring that opens the interval.
    pub start: NaiveDateTime,
    /// Its scoring that closes the interval.
    pub end: NaiveDateTime,
    /// Lines of the two scorings in the scores table.
    pub lines: (usize, usize),
    /// Growth per trait (`None` when either end is missing).
    pub growth: Vec<Option<f64>>,
}

/// One interval between two successive bins of scorings.
#[derive(Debug, Clone, PartialEq)]
pub struct Interval {
    /// 1-based number.
    pub number: usize,
    /// Earliest start among its pots.
    pub from: NaiveDateTime,
    /// Latest end among its pots.
    pub to: NaiveDateTime,
    /// The pots scored at both ends, in pot-table order.
    pub spans: Vec<PotSpan>,
    /// Pots of the pot table scored at one end only, or at neither (ids).
    pub unscored: Vec<String>,
}

/// The intervals of a scores table and what grouping set aside.
#[derive(Debug, Clone, PartialEq)]
pub struct Intervals {
    /// The intervals, in time order.
    pub intervals: Vec<Interval>,
    /// Scorings that another scoring of the same pot later in the same bin
    /// replaced (lines), with `interval = "day"` or `"week"`.
    pub superseded: Vec<usize>,
}

impl Scores {
    /// Read and validate the table of `[scores]` against the pot table;
    /// `None` when the study has no `[scores]`.
    pub fn load(study: &Study, pots: &Pots) -> Result<Option<Scores>> {
        let Some(spec) = &study.spec.scores else { return Ok(None) };
        let rule = match spec.interval.as_deref() {
            None | Some("scorings") => IntervalRule::Scorings,
            Some("day") => IntervalRule::Day,
            Some("week") => IntervalRule::Week,
            Some(o) => {
                return Err(study.invalid_value(
                    "scores",
                    "scores.interval",
                    o,
                    format!("unknown interval `{o}`"),
                    Some("the choices are \"scorings\", \"day\" and \"week\"".into()),
                ));
            }
        };
        let growth = match spec.growth.as_deref() {
            None | Some("difference") => Growth::Difference,
            Some("log_ratio") => Growth::LogRatio,
            Some(o) => {
                return Err(study.invalid_value(
                    "scores",
                    "scores.growth",
                    o,
                    format!("unknown growth measure `{o}`"),
                    Some("the choices are \"difference\" and \"log_ratio\" (relative growth)".into()),
                ));
            }
        };
        if spec.traits.is_empty() {
            return Err(study.invalid(
                "scores.traits",
                "names no trait column",
                Some("e.g. traits = [\"leaf_area\"]".into()),
            ));
        }
        let delimiter = match &spec.delimiter {
            None => b',',
            Some(d) => delimiter_byte(d).map_err(|m| study.invalid("scores.delimiter", m, None))?,
        };
        let table = Table::read(&study.resolve(&spec.file), delimiter)?;
        read_rows(&table, spec, pots, rule, growth).map(|(rows, missing)| {
            Some(Scores {
                path: table.path.clone(),
                traits: spec.traits.clone(),
                rule,
                growth,
                rows,
                missing,
            })
        })
    }

    /// Number of distinct scoring times.
    pub fn n_times(&self) -> usize {
        let mut t: Vec<NaiveDateTime> = self.rows.iter().map(|r| r.time).collect();
        t.sort();
        t.dedup();
        t.len()
    }

    /// The intervals (see the module documentation). `pot_ids` are the pot
    /// table's ids, for [`Interval::unscored`]. Cost O(rows log rows).
    pub fn intervals(&self, pot_ids: &[String]) -> Intervals {
        let first = self.rows.iter().map(|r| r.time.date()).min();
        let bin_of = |t: NaiveDateTime| -> i64 {
            match self.rule {
                IntervalRule::Scorings => t.and_utc().timestamp_millis(),
                IntervalRule::Day => days_from(first, t.date()),
                IntervalRule::Week => days_from(first, t.date()).div_euclid(7),
            }
        };
        // Per bin and pot: the last scoring (time, then file order).
        let mut bins: BTreeMap<i64, BTreeMap<usize, &ScoreRow>> = BTreeMap::new();
        let mut superseded = Vec::new();
        for r in &self.rows {
            let slot = bins.entry(bin_of(r.time)).or_default();
            match slot.get(&r.pot) {
                Some(old) if old.time > r.time => superseded.push(r.line),
                Some(old) => {
                    superseded.push(old.line);
                    slot.insert(r.pot, r);
                }
                None => {
                    slot.insert(r.pot, r);
                }
            }
        }
        superseded.sort_unstable();
        let bins: Vec<&BTreeMap<usize, &ScoreRow>> = bins.values().collect();
        let mut intervals = Vec::new();
        for (k, pair) in bins.windows(2).enumerate() {
            let (a, b) = (pair[0], pair[1]);
            let spans: Vec<PotSpan> = a
                .iter()
                .filter_map(|(&pot, ra)| {
                    let rb = b.get(&pot)?;
                    Some(PotSpan {
                        pot,
                        start: ra.time,
                        end: rb.time,
                        lines: (ra.line, rb.line),
                        growth: (0..self.traits.len())
                            .map(|t| self.growth.between(ra.values[t], rb.values[t]))
                            .collect(),
                    })
                })
                .collect();
            let unscored = (0..pot_ids.len())
                .filter(|p| !spans.iter().any(|s| s.pot == *p))
                .map(|p| pot_ids[p].clone())
                .collect();
            let (Some(from), Some(to)) =
                (spans.iter().map(|s| s.start).min(), spans.iter().map(|s| s.end).max())
            else {
                continue;
            };
            intervals.push(Interval { number: k + 1, from, to, spans, unscored });
        }
        for (i, iv) in intervals.iter_mut().enumerate() {
            iv.number = i + 1;
        }
        Intervals { intervals, superseded }
    }
}

fn days_from(first: Option<NaiveDate>, d: NaiveDate) -> i64 {
    first.map(|f| (d - f).num_days()).unwrap_or(0)
}

type Rows = (Vec<ScoreRow>, Vec<MissingCells>);

fn read_rows(
    table: &Table,
    spec: &ScoresSection,
    pots: &Pots,
    rule: IntervalRule,
    growth: Growth,
) -> Result<Rows> {
    let _ = rule;
    let jp = table.column(&spec.pot)?;
    let jt = table.column(&spec.time)?;
    let index: HashMap<&str, usize> = pots.ids.iter().enumerate().map(|(i, s)| (s.as_str(), i)).collect();
    let mut values: Vec<Vec<Option<f64>>> = Vec::with_capacity(spec.traits.len());
    let mut missing = Vec::new();
    for t in &spec.traits {
        let v = table.optional_numbers(t)?;
        let j = table.column(t)?;
        if growth == Growth::LogRatio
            && let Some(i) = v.iter().position(|x| x.is_some_and(|x| x <= 0.0))
        {
            return Err(table.bad(
                table.lines[i],
                t,
                &table.rows[i][j],
                "relative growth needs positive values (the logarithm of this value is undefined)",
                Some(
                    "use growth = \"difference\", or leave the cell empty if the plant was not measurable"
                        .into(),
                ),
            ));
        }
        let lines = (0..v.len()).filter(|&i| v[i].is_none()).map(|i| table.lines[i]).collect();
        missing.push(MissingCells { trait_name: t.clone(), lines });
        values.push(v);
    }
    let mut rows = Vec::with_capacity(table.len());
    let mut seen: HashMap<(usize, NaiveDateTime), usize> = HashMap::new();
    for (i, r) in table.rows.iter().enumerate() {
        let line = table.lines[i];
        let id = r[jp].as_str();
        let Some(&pot) = index.get(id) else {
            let hint = match closest(id, pots.ids.iter().map(String::as_str)) {
                Some(s) => format!("did you mean `{s}`? every scored pot must be a row of the pot table"),
                None => "every scored pot must be a row of the pot table".into(),
            };
            let message = if id.is_empty() { "empty pot id" } else { "unknown pot (not in the pot table)" };
            return Err(table.bad(line, &spec.pot, id, message, Some(hint)));
        };
        let cell = r[jt].as_str();
        let time = match parse_local_datetime(cell) {
            Some(t) if !is_missing(cell) => t,
            _ => {
                return Err(table.bad(
                    line,
                    &spec.time,
                    cell,
                    "not a date",
                    Some(
                        "write a local date 2026-03-01 or date-time 2026-03-01 08:00 (the study's time zone)"
                            .into(),
                    ),
                ));
            }
        };
        if let Some(first) = seen.insert((pot, time), line) {
            return Err(table.bad(
                line,
                &spec.time,
                cell,
                &format!("pot `{id}` is scored twice at this time (first on line {first})"),
                Some("keep one row per pot and time, or correct the time".into()),
            ));
        }
        let start = pots.start.as_ref().map(|s| s[pot]);
        let end = pots.end.as_ref().map(|e| e[pot]);
        if start.is_some_and(|s| time < s) || end.is_some_and(|e| time > e) {
            let window = format!(
                "{} .. {}",
                start.map(|s| s.to_string()).unwrap_or_else(|| "open".into()),
                end.map(|e| e.to_string()).unwrap_or_else(|| "open".into())
            );
            return Err(table.bad(
                line,
                &spec.time,
                cell,
                &format!("outside the growth window of pot `{id}` ({window}, pot table line {})", pots.table.lines[pot]),
                Some("a scoring must fall within the pot's start and end (both included); check the date or the pot table".into()),
            ));
        }
        rows.push(ScoreRow { pot, time, line, values: values.iter().map(|v| v[i]).collect() });
    }
    Ok((rows, missing))
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::path::Path;

    fn study_in(dir: &Path, scores_section: &str, scores_csv: &str) -> Result<(Study, Pots)> {
        std::fs::write(
            dir.join("pots.csv"),
            "pot,x,y,sown,end\nA,0,0,2026-03-01,2026-03-20\nB,1,0,2026-03-01,2026-03-20\nC,2,0,2026-03-03,2026-03-20\n",
        )
        .unwrap();
        std::fs::write(dir.join("scores.csv"), scores_csv).unwrap();
        let src = format!(
            "[study]\ntitle = \"t\"\ntimezone = \"UTC\"\noutput = \"out\"\n\n[pots]\nfile = \"pots.csv\"\nid = \"pot\"\nx = \"x\"\ny = \"y\"\nstart = \"sown\"\nend = \"end\"\n\n[scores]\nfile = \"scores.csv\"\npot = \"pot\"\ntime = \"when\"\ntraits = [\"area\"]\n{scores_section}"
        );
        let p = dir.join("study.toml");
        std::fs::write(&p, &src).unwrap();
        let study = Study::load(&p)?;
        let pots = super::super::layout::load_pots(&study)?;
        Ok((study, pots))
    }

    fn load(section: &str, csv: &str) -> Result<Scores> {
        let dir = tempfile::tempdir().unwrap();
        let (study, pots) = study_in(dir.path(), section, csv)?;
        Scores::load(&study, &pots).map(|s| s.expect("has [scores]"))
    }

    const GOOD: &str = "pot,when,area\nA,2026-03-05,10\nB,2026-03-05,12\nC,2026-03-05,NA\nA,2026-03-12,15\nB,2026-03-12,20\nC,2026-03-12,9\nA,2026-03-19,21\nB,2026-03-19,\nC,2026-03-19,14\n";

    #[test]
    fn intervals_between_successive_scorings_with_missing_values_counted() {
        let s = load("", GOOD).unwrap();
        assert_eq!(s.n_times(), 3);
        assert_eq!(s.missing[0].lines, vec![4, 9]);
        let iv = s.intervals(&["A".into(), "B".into(), "C".into()]);
        assert_eq!(iv.intervals.len(), 2);
        let first = &iv.intervals[0];
        assert_eq!(first.spans.len(), 3);
        assert_eq!(first.spans[0].growth, vec![Some(5.0)]);
        assert_eq!(first.spans[1].growth, vec![Some(8.0)]);
        assert_eq!(first.spans[2].growth, vec![None], "C starts on a missing value");
        assert_eq!(first.spans[0].lines, (2, 5));
        let second = &iv.intervals[1];
        assert_eq!(second.spans[1].growth, vec![None], "B ends on a missing value");
        assert_eq!(second.spans[2].growth, vec![Some(5.0)]);
        assert!(iv.superseded.is_empty());
    }

    #[test]
    fn relative_growth_is_the_difference_of_logarithms() {
        let s = load("growth = \"log_ratio\"\n", GOOD).unwrap();
        let iv = s.intervals(&["A".into(), "B".into(), "C".into()]);
        let g = iv.intervals[0].spans[0].growth[0].unwrap();
        assert!((g - (15f64 / 10.0).ln()).abs() < 1e-15, "{g}");
    }

    #[test]
    fn weekly_bins_keep_the_last_scoring_of_each_pot() {
        let csv = "pot,when,area\nA,2026-03-05 08:00,10\nA,2026-03-06 08:00,11\nA,2026-03-12 08:00,15\nA,2026-03-13 08:00,16\n";
        let s = load("interval = \"week\"\n", csv).unwrap();
        let iv = s.intervals(&["A".into(), "B".into(), "C".into()]);
        assert_eq!(iv.intervals.len(), 1);
        assert_eq!(iv.intervals[0].spans[0].growth, vec![Some(5.0)]);
        assert_eq!(iv.superseded, vec![2, 4]);
        assert_eq!(iv.intervals[0].unscored, vec!["B".to_string(), "C".to_string()]);
        let s = load("interval = \"day\"\n", csv).unwrap();
        assert_eq!(s.intervals(&["A".into()]).intervals.len(), 3);
    }

    #[test]
    fn unknown_pot_duplicate_and_outside_window_are_located() {
        let e = load("", "pot,when,area\nA,2026-03-05,1\nAA,2026-03-05,1\n").unwrap_err().to_string();
        assert!(
            e.contains("scores.csv:3: column `pot`") && e.contains("`AA`") && e.contains("did you mean `A`"),
            "{e}"
        );
        let e = load("", "pot,when,area\nA,2026-03-05,1\nB,2026-03-05,1\nA,2026-03-05,2\n")
            .unwrap_err()
            .to_string();
        assert!(e.contains("scores.csv:4: column `when`") && e.contains("first on line 2"), "{e}");
        let e = load("", "pot,when,area\nC,2026-03-02,1\n").unwrap_err().to_string();
        assert!(e.contains("scores.csv:2") && e.contains("outside the growth window of pot `C`"), "{e}");
        let e = load("", "pot,when,area\nA,5 March,1\n").unwrap_err().to_string();
        assert!(e.contains("scores.csv:2: column `when`") && e.contains("not a date"), "{e}");
        let e = load("", "pot,when,area\nA,2026-03-05,tall\n").unwrap_err().to_string();
        assert!(e.contains("scores.csv:2: column `area`") && e.contains("`tall`"), "{e}");
        let e = load("growth = \"log_ratio\"\n", "pot,when,area\nA,2026-03-05,0\n").unwrap_err().to_string();
        assert!(e.contains("positive"), "{e}");
        let e = load("", "pot,when,leaf\nA,2026-03-05,1\n").unwrap_err().to_string();
        assert!(e.contains("no column `area`"), "{e}");
    }

    #[test]
    fn bad_keys_are_refused_with_their_place() {
        let dir = tempfile::tempdir().unwrap();
        let e = study_in(dir.path(), "intervall = \"day\"\n", GOOD).unwrap_err().to_string();
        assert!(e.contains("intervall"), "{e}");
        let e = load("interval = \"fortnight\"\n", GOOD).unwrap_err().to_string();
        assert!(e.contains("study.toml:19:12") && e.contains("fortnight"), "{e}");
        let e = load("growth = \"ratio\"\n", GOOD).unwrap_err().to_string();
        assert!(e.contains("log_ratio"), "{e}");
    }
}
