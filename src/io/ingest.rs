//! The ingestion stage: every logger export of a study becomes one audited
//! table of readings, one row per sensor and instant, in UTC and internal
//! units, with every reading that was not kept as is listed with its reason.
//!
//! Steps: compile the `[[logs]]` blocks and expand their globs; read the files
//! in parallel (`io::logs`, one thread per core); map sensor ids onto the
//! sensor table (unknown ids stop the run with a list, or are flagged with
//! `qc.drop_unknown_sensors`); sort by sensor and time (stable, so the first
//! of two rows for one instant is the one kept: file order, then line order);
//! flag duplicates and readings outside the study period; run the range,
//! spike and stuck rules per sensor and channel (`io::qc`); find gaps; and
//! count, per file, rows read, kept and flagged. The accounting identity
//! `rows_read = rows_kept + rows_flagged` is checked for every file before
//! anything is returned, so a row can never vanish silently.

use super::clock::Resolution;
use super::error::{IoError, Result};
use super::layout::{load_sensors, parse_local_datetime};
use super::logs::{FileRead, Flag, LogFormat, Row, compile_logs, read_file_with};
use super::qc::Reason;
use super::study::Study;
use super::units::Channel;
use polars::prelude::*;
use std::collections::HashMap;
use std::path::{Path, PathBuf};

/// The study period from `[climate]` (`start`, `end`), UTC milliseconds,
/// both ends inclusive. Either end may be open.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub struct Period {
    /// First instant kept.
    pub start: Option<i64>,
    /// Last instant kept.
    pub end: Option<i64>,
}

impl Period {
    /// Whether instant `t` lies in the period.
    pub fn contains(&self, t: i64) -> bool {
        self.start.is_none_or(|s| t >= s) && self.end.is_none_or(|e| t <= e)
    }
}

/// One input file's accounting (a row of `qc_summary.csv`).
#[derive(Debug, Clone, PartialEq)]
pub struct FileSummary {
    /// The file as found.
    pub path: PathBuf,
    /// The file as shown: relative to the study file's folder when inside it.
    pub name: String,
    /// Data rows (not header, preamble or blank lines).
    pub rows_read: usize,
    /// Rows kept with every value as is.
    pub rows_kept: usize,
    /// Rows with at least one flag (some of their values may be kept).
    pub rows_flagged: usize,
    /// Per reason (order of [`Reason::ALL`]): rows with at least one flag of it.
    pub by_reason: [usize; Reason::ALL.len()],
}

/// An interval without readings of one channel of one sensor.
#[derive(Debug, Clone, PartialEq)]
pub struct Gap {
    /// Sensor id.
    pub sensor: String,
    /// Channel.
    pub channel: Channel,
    /// The last reading before the gap (or the period start), UTC ms.
    pub from: i64,
    /// The first reading after the gap (or the period end), UTC ms.
    pub to: i64,
    /// The sensor's logging step (median interval), ms.
    pub step: i64,
}

/// The result of ingestion.
#[derive(Debug, Clone)]
pub struct Ingested {
    /// Columns `sensor` (String), `time` (Datetime ms, UTC),
    /// `temperature_c`, `rh_pct`, `ppfd_umol_m2_s` (Float64, null where absent
    /// or flagged); sorted by sensor then time; one row per sensor and instant.
    pub readings: DataFrame,
    /// Every reading not kept as is, sorted by file and line.
    pub flags: Vec<Flag>,
    /// One entry per input file, in reading order (`Flag::file` indexes it).
    pub files: Vec<FileSummary>,
    /// Gaps, by sensor, channel and time.
    pub gaps: Vec<Gap>,
    /// Sensor ids: `Flag::sensor` indexes this list (the sensor table first,
    /// then ids only seen in the logs).
    pub sensors: Vec<String>,
    /// The study period applied.
    pub period: Period,
    /// Earliest and latest instant of the readings (UTC ms), if any.
    pub span: Option<(i64, i64)>,
}

#[derive(serde::Deserialize)]
struct PeriodDoc {
    climate: Option<PeriodKeys>,
}

#[derive(serde::Deserialize)]
struct PeriodKeys {
    start: Option<toml::Value>,
    end: Option<toml::Value>,
}

/// Read `[climate].start` and `[climate].end` (local date-times in the study
/// zone) into UTC. A time in the spring-forward gap is an error; one in the
/// fall-back hour takes its earlier instant for `start` and later for `end`.
pub fn study_period(study: &Study) -> Result<Period> {
    let doc: PeriodDoc = study.section()?;
    let Some(c) = doc.climate else {
        return Ok(Period::default());
    };
    let one = |key: &str, v: Option<toml::Value>, late: bool| -> Result<Option<i64>> {
        let Some(v) = v else { return Ok(None) };
        let text = match &v {
            toml::Value::String(s) => s.clone(),
            toml::Value::Datetime(d) => d.to_string(),
            other => other.to_string(),
        };
        let local = parse_local_datetime(&text).ok_or_else(|| {
            study.invalid(
                &format!("climate.{key}"),
                format!("`{text}` is not a local date or date-time"),
                Some("write e.g. \"2026-03-01 00:00\" (local time of [study].timezone)".into()),
            )
        })?;
        match super::clock::resolve_exact(study.timezone, local.and_utc().timestamp_millis()) {
            Resolution::Single(t) => Ok(Some(t)),
            Resolution::Ambiguous(a, b) => Ok(Some(if late { b } else { a })),
            Resolution::Nonexistent => Err(study.invalid(
                &format!("climate.{key}"),
                format!("`{text}` does not exist in {} (clocks skip it)", study.timezone),
                Some("choose a time outside the spring-forward hour".into()),
            )),
        }
    };
    let p = Period { start: one("start", c.start, false)?, end: one("end", c.end, true)? };
    if let (Some(s), Some(e)) = (p.start, p.end)
        && e < s
    {
        return Err(study.invalid("climate.end", "the study period ends before it starts", None));
    }
    Ok(p)
}

/// How a file is named in outputs: relative to the study folder when inside it.
pub fn display_name(study: &Study, path: &Path) -> String {
    path.strip_prefix(&study.dir).unwrap_or(path).to_string_lossy().replace('\\', "/")
}

/// Run `f` on every job, spread over the cores (each idle thread takes the
/// next job in order); the results come back in job order.
fn par_map<J: Send, R: Send>(jobs: Vec<J>, f: impl Fn(J) -> R + Sync) -> Vec<R> {
    par_map_with(jobs, || (), |_, j| f(j))
}

/// [`par_map`] where each worker owns a state made by `init` (a reusable
/// buffer, say) that `f` may use for every job it runs.
fn par_map_with<J: Send, R: Send, S>(
    jobs: Vec<J>,
    init: impl Fn() -> S + Sync,
    f: impl Fn(&mut S, J) -> R + Sync,
) -> Vec<R> {
    let n = jobs.len();
    let workers = std::thread::available_parallelism().map(|x| x.get()).unwrap_or(1).min(n).max(1);
    if workers == 1 {
        let mut state = init();
        return jobs.into_iter().map(|j| f(&mut state, j)).collect();
    }
    let queue = std::sync::Mutex::new(jobs.into_iter().enumerate());
    let mut out: Vec<Option<R>> = (0..n).map(|_| None).collect();
    std::thread::scope(|s| {
        let handles: Vec<_> = (0..workers)
            .map(|_| {
                s.spawn(|| {
                    let mut done = Vec::new();
                    let mut state = init();
                    loop {
                        let next = queue.lock().unwrap_or_else(|e| e.into_inner()).next();
                        let Some((i, job)) = next else { break };
                        done.push((i, f(&mut state, job)));
                    }
                    done
                })
            })
            .collect();
        for h in handles {
            for (i, r) in h.join().unwrap_or_else(|e| std::panic::resume_unwind(e)) {
                out[i] = Some(r);
            }
        }
    });
    out.into_iter().map(|r| r.unwrap_or_else(|| unreachable!("every job ran"))).collect()
}

/// Read every file of every block, in parallel over files (each worker reuses
/// one byte buffer); results in file order.
fn read_all(jobs: &[(&LogFormat, PathBuf)]) -> Result<Vec<FileRead>> {
    let idx: Vec<usize> = (0..jobs.len()).collect();
    let results = par_map_with(idx, Vec::new, |buf, i| read_file_with(jobs[i].0, &jobs[i].1, i as u32, buf));
    // A column missing from one file of a block that another file of the
    // same block has: the two files disagree, and both are named.
    if let Some(i) = results.iter().position(|r| matches!(r, Err(IoError::MissingColumn { .. })))
        && let Some(j) =
            (0..jobs.len()).find(|&j| j != i && jobs[j].0.block == jobs[i].0.block && results[j].is_ok())
        && let Err(IoError::MissingColumn { line, column, available, .. }) = &results[i]
    {
        return Err(IoError::Table {
            path: jobs[i].1.clone(),
            message: format!(
                "line {line}: no column `{column}`, which {} (matched by the same block logs[{}]) has: the two files have different headers (this one has: {}); give them separate [[logs]] blocks",
                jobs[j].1.display(),
                jobs[i].0.block,
                available.join(", ")
            ),
        });
    }
    results.into_iter().collect()
}

/// A run of consecutive rows of one sensor in a buffer of rows.
#[derive(Debug, Clone, Copy)]
struct Run {
    sensor: u32,
    start: usize,
    end: usize,
    /// Times never decrease along the run.
    sorted: bool,
}

/// Give the rows of one file their global sensor index (`map`, by local
/// index) and list its runs of one sensor. One pass.
fn remap_runs(rows: &mut [Row], map: &[u32]) -> Vec<Run> {
    let mut runs: Vec<Run> = Vec::new();
    for i in 0..rows.len() {
        let s = map[rows[i].sensor as usize];
        rows[i].sensor = s;
        match runs.last_mut() {
            Some(run) if run.sensor == s => {
                run.sorted &= rows[i - 1].time <= rows[i].time;
                run.end = i + 1;
            }
            _ => runs.push(Run { sensor: s, start: i, end: i + 1, sorted: true }),
        }
    }
    runs
}

/// Ingest every logger export of `study` (see the module docs).
///
/// The rows stay in the buffers they were read into when every sensor's rows
/// form one time-ordered run in one file (the usual export: one file per
/// logger or per group of loggers, rows in time order); otherwise all rows
/// are merged into one buffer and sorted (stable). Either way each sensor's
/// rows then form one segment, and segments are processed on all cores:
/// row rules (unknown sensor, duplicate, study period), then value rules and
/// gaps on columns written straight into the readings table.
pub fn ingest(study: &Study) -> Result<Ingested> {
    ingest_with(study, false).map(|(ing, _)| ing)
}

/// [`ingest`]; `merge` forces the merged, sorted buffer (for tests). Also
/// says whether the rows stayed in the buffers they were read into.
fn ingest_with(study: &Study, merge: bool) -> Result<(Ingested, bool)> {
    let settings = &study.spec.qc;
    settings.check().map_err(|(k, m)| study.invalid(&k, m, None))?;
    let period = study_period(study)?;
    let table = load_sensors(study)?;
    let formats = compile_logs(study)?;
    let jobs: Vec<(&LogFormat, PathBuf)> =
        formats.iter().flat_map(|f| f.files.iter().map(move |p| (f, p.clone()))).collect();
    let reads = read_all(&jobs)?;

    // Sensor ids: the table first, then unknown ids in order of appearance.
    let mut sensors: Vec<String> = table.as_ref().map(|t| t.ids.clone()).unwrap_or_default();
    let known = sensors.len();
    let mut index: HashMap<String, u32> =
        sensors.iter().enumerate().map(|(i, s)| (s.clone(), i as u32)).collect();
    let mut unknown: Vec<(String, String, u32)> = Vec::new();
    let mut files: Vec<FileSummary> = jobs
        .iter()
        .zip(&reads)
        .map(|((_, p), r)| FileSummary {
            path: p.clone(),
            name: display_name(study, p),
            rows_read: r.rows_read,
            rows_kept: 0,
            rows_flagged: 0,
            by_reason: [0; Reason::ALL.len()],
        })
        .collect();
    let mut flags: Vec<Flag> = Vec::new();
    let mut buffers: Vec<(Vec<Row>, Vec<u32>)> = Vec::with_capacity(reads.len());
    for (fi, r) in reads.into_iter().enumerate() {
        let map: Vec<u32> = r
            .sensors
            .iter()
            .zip(&r.first_line)
            .map(|(s, &line)| {
                *index.entry(s.clone()).or_insert_with(|| {
                    sensors.push(s.clone());
                    unknown.push((s.clone(), files[fi].name.clone(), line));
                    (sensors.len() - 1) as u32
                })
            })
            .collect();
        flags.extend(r.flags.into_iter().map(|mut f| {
            if f.sensor != u32::MAX {
                f.sensor = map[f.sensor as usize];
            }
            f
        }));
        buffers.push((r.rows, map));
    }
    if !unknown.is_empty() && !settings.drop_unknown_sensors {
        let list: Vec<String> = unknown.iter().map(|(s, f, l)| format!("`{s}` (first at {f}:{l})")).collect();
        let table_path = study.spec.sensors.as_ref().map(|s| study.resolve(&s.file)).unwrap_or_default();
        return Err(IoError::Table {
            path: table_path,
            message: format!(
                "{} sensor id(s) in the logs are not in the sensor table: {} (hint: add them to the table, fix the ids, or set `drop_unknown_sensors = true` in [qc] to flag and drop their rows)",
                unknown.len(),
                list.join(", ")
            ),
        });
    }

    // Order: sensor, then time; stable, so file and line order break ties.
    let mut runs: Vec<Vec<Run>> = par_map(buffers.iter_mut().collect(), |(rows, map)| remap_runs(rows, map));
    let mut buffers: Vec<Vec<Row>> = buffers.into_iter().map(|(rows, _)| rows).collect();
    let mut seen = vec![false; sensors.len()];
    let in_place = !merge
        && runs.iter().flatten().all(|r| r.sorted && !std::mem::replace(&mut seen[r.sensor as usize], true));
    if !in_place {
        let total: usize = buffers.iter().map(Vec::len).sum();
        let mut all: Vec<Row> = Vec::with_capacity(total);
        for b in buffers {
            all.extend(b);
        }
        all.sort_by_key(|r| (r.sensor, r.time));
        let identity: Vec<u32> = (0..sensors.len() as u32).collect();
        runs = vec![remap_runs(&mut all, &identity)];
        buffers = vec![all];
    }
    // One segment per sensor, in sensor order.
    let mut segs: Vec<(u32, &mut [Row])> = Vec::new();
    for (rows, runs) in buffers.iter_mut().zip(&runs) {
        let mut rest: &mut [Row] = rows;
        for run in runs {
            let (seg, tail) = std::mem::take(&mut rest).split_at_mut(run.end - run.start);
            segs.push((run.sensor, seg));
            rest = tail;
        }
    }
    segs.sort_by_key(|s| s.0);

    // Row rules: unknown sensor, duplicate, outside the period (each segment
    // compacted in place to its kept rows).
    let (names, file_names) = (&sensors, &files);
    let row_flags = par_map(segs.iter_mut().collect(), |(s, seg)| {
        let unknown = *s as usize >= known;
        row_rules(seg, unknown, &names[*s as usize], file_names, period)
    });
    let mut kept_segs: Vec<(u32, &mut [Row])> = Vec::with_capacity(segs.len());
    for ((s, seg), (kept, f)) in segs.into_iter().zip(row_flags) {
        flags.extend(f);
        if kept > 0 {
            kept_segs.push((s, &mut seg[..kept]));
        }
    }

    // Value rules and gaps per sensor, on the columns of the readings table.
    let n: usize = kept_segs.iter().map(|(_, seg)| seg.len()).sum();
    let mut times: Vec<i64> = vec![0; n];
    let mut values: [Vec<f64>; 3] = std::array::from_fn(|_| vec![0.0; n]);
    let mut parts: Vec<(&mut [Row], Columns)> = Vec::with_capacity(kept_segs.len());
    {
        let mut t_rest: &mut [i64] = &mut times;
        let [v0, v1, v2] = &mut values;
        let mut v_rest: [&mut [f64]; 3] = [v0, v1, v2];
        for (_, seg) in kept_segs.iter_mut() {
            let m = seg.len();
            let (t, tr) = std::mem::take(&mut t_rest).split_at_mut(m);
            t_rest = tr;
            let v = v_rest.each_mut().map(|r| {
                let (a, b) = std::mem::take(r).split_at_mut(m);
                *r = b;
                a
            });
            parts.push((&mut **seg, Columns { times: t, values: v }));
        }
    }
    let results = par_map(parts, |(seg, mut cols)| {
        cols.fill(seg);
        let mut f = Vec::new();
        value_rules(seg, &mut cols, settings, &mut f);
        let g = find_gaps(&cols, &names[seg[0].sensor as usize], settings.gap_factor, period);
        (f, g, kept_by_file(seg))
    });
    let mut gaps = Vec::new();
    for (f, g, kept) in results {
        flags.extend(f);
        gaps.extend(g);
        for (file, k) in kept {
            files[file as usize].rows_kept += k;
        }
    }
    gaps.sort_by(|a, b| (&a.sensor, a.channel, a.from).cmp(&(&b.sensor, b.channel, b.from)));

    // Accounting.
    flags.sort_by_key(|x| (x.file, x.line, x.variable, x.reason));
    let mut i = 0;
    while i < flags.len() {
        let (f, l) = (flags[i].file, flags[i].line);
        let mut seen = [false; Reason::ALL.len()];
        while i < flags.len() && flags[i].file == f && flags[i].line == l {
            seen[flags[i].reason as usize] = true;
            i += 1;
        }
        let s = &mut files[f as usize];
        s.rows_flagged += 1;
        for (k, hit) in seen.iter().enumerate() {
            s.by_reason[k] += usize::from(*hit);
        }
    }
    for s in &files {
        if s.rows_read != s.rows_kept + s.rows_flagged {
            return Err(IoError::Table {
                path: s.path.clone(),
                message: format!(
                    "internal accounting error: {} rows read but {} kept + {} flagged (please report this)",
                    s.rows_read, s.rows_kept, s.rows_flagged
                ),
            });
        }
    }

    let span = kept_segs
        .iter()
        .map(|(_, seg)| (seg[0].time, seg[seg.len() - 1].time))
        .reduce(|(a, b), (c, d)| (a.min(c), b.max(d)));
    let runs: Vec<(u32, usize)> = kept_segs.iter().map(|(s, seg)| (*s, seg.len())).collect();
    let readings = readings_frame(&runs, times, values, &sensors).map_err(|e| IoError::Table {
        path: study.output_dir(),
        message: format!("cannot build the readings table: {e}"),
    })?;
    Ok((Ingested { readings, flags, files, gaps, sensors, period, span }, in_place))
}

#[path = "ingest_rules.rs"]
mod rules;
use rules::{Columns, find_gaps, kept_by_file, row_rules, value_rules};

#[path = "ingest_outputs.rs"]
mod outputs;
use outputs::readings_frame;
pub use outputs::{GAPS_FILE, QC_FLAGS_FILE, QC_SUMMARY_FILE, READINGS_FILE, read_readings, write_outputs};

#[cfg(test)]
mod tests {
    use super::*;
    use crate::io::qc::QcSettings;

    fn row(t: i64, v: [f64; 3], line: u32) -> Row {
        Row { time: t, values: v, line, sensor: 0, file: 0, flagged: false }
    }

    /// Storage for the columns of `seg`.
    fn storage(seg: &[Row]) -> (Vec<i64>, [Vec<f64>; 3]) {
        (vec![0; seg.len()], std::array::from_fn(|_| vec![0.0; seg.len()]))
    }

    fn columns<'a>(seg: &[Row], t: &'a mut [i64], v: &'a mut [Vec<f64>; 3]) -> Columns<'a> {
        let [a, b, c] = v;
        let mut cols = Columns { times: t, values: [a, b, c] };
        cols.fill(seg);
        cols
    }

    #[test]
    fn value_rules_flag_range_spike_and_stuck() {
        let step = 300_000;
        let mut seg: Vec<Row> = (0..120)
            .map(|i| {
                let t = f64::from(i);
                row(i64::from(i) * step, [20.0 + 0.01 * t, 60.0, 100.0 + t], i as u32 + 2)
            })
            .collect();
        seg[5].values[1] = 104.0; // impossible RH
        seg[50].values[0] = 40.0; // spike
        let q = QcSettings::default();
        let mut flags = Vec::new();
        let (mut t, mut v) = storage(&seg);
        let mut cols = columns(&seg, &mut t, &mut v);
        value_rules(&mut seg, &mut cols, &q, &mut flags);
        assert!(cols.values[0][50].is_nan() && cols.values[1][5].is_nan() && cols.values[1][7].is_nan());
        let reasons: Vec<(u32, Reason, &str)> =
            flags.iter().map(|f| (f.line, f.reason, f.variable.name())).collect();
        assert!(reasons.contains(&(7, Reason::OutOfRange, "rh_pct")));
        assert!(reasons.contains(&(52, Reason::Spike, "temperature_c")));
        // RH constant at 60 for 10 h while temperature and light move: stuck.
        let stuck = flags.iter().filter(|f| f.reason == Reason::Stuck).count();
        assert_eq!(stuck, 119, "every RH reading left after the range flag");
        assert!(seg[50].values[0].is_nan() && seg[50].flagged);
        assert_eq!(seg[50].values[2], 150.0);
    }

    #[test]
    fn gaps_longer_than_twice_the_step() {
        let step = 600_000;
        let mut seg: Vec<Row> =
            (0..20).map(|i| row(i64::from(i) * step, [20.0, f64::NAN, f64::NAN], 0)).collect();
        seg.drain(8..11); // readings 8, 9, 10 missing: 7 -> 11 is 4 steps
        seg[2].values[0] = f64::NAN; // one missing value: 1 -> 3 is 2 steps, not a gap
        let (mut t, mut v) = storage(&seg);
        let cols = columns(&seg, &mut t, &mut v);
        let g = find_gaps(&cols, "S", 2.0, Period::default());
        assert_eq!(g.len(), 1);
        assert_eq!((g[0].from, g[0].to, g[0].step), (7 * step, 11 * step, step));
        let p = Period { start: Some(-5 * step), end: Some(19 * step) };
        assert_eq!(find_gaps(&cols, "S", 2.0, p).len(), 2);
    }

    /// A study of four loggers (S4 absent from the sensor table and dropped)
    /// in two exports; `layout` chooses how their rows are spread over the
    /// files. Five-minute readings with a spike, a duplicate row, a stuck RH
    /// channel, a gap, unreadable cells and rows outside the study period.
    fn layout_study(layout: usize) -> (tempfile::TempDir, Study) {
        let dir = tempfile::tempdir().unwrap();
        let d = dir.path();
        std::fs::create_dir_all(d.join("logs")).unwrap();
        std::fs::write(d.join("pots.csv"), "pot,x,y\np1,0,0\n").unwrap();
        std::fs::write(d.join("sensors.csv"), "id,x,y\nS1,0,0\nS2,1,0\nS3,2,0\n").unwrap();
        let rows = |s: usize| -> Vec<String> {
            (0..150)
                .filter(|&i| !(s == 2 && (60..75).contains(&i)))
                .map(|i| {
                    let min = 5 * i;
                    let t = format!("2026-03-0{} {:02}:{:02}", 1 + min / 1440, min / 60 % 24, min % 60);
                    let temp = if s == 1 && i == 40 { 35.0 } else { 18.0 + 0.1 * (i % 7) as f64 + s as f64 };
                    let rh =
                        if s == 3 && (20..100).contains(&i) { 55.0 } else { 60.0 + 0.5 * (i % 5) as f64 };
                    let rh = if s == 1 && i == 90 { "n/a".to_string() } else { format!("{rh}") };
                    format!("S{s},{t},{temp:.1},{rh}")
                })
                .collect()
        };
        let mut per: Vec<Vec<String>> = (1..=4).map(rows).collect();
        let dup = per[0][30].clone();
        per[0].insert(31, dup); // a duplicate row
        let head = "id,time,temp,rh".to_string();
        let (a, b): (Vec<String>, Vec<String>) = match layout {
            // One sorted run per sensor: S2, S1 in one file, S3, S4 in the other.
            0 => (
                per[1].iter().chain(&per[0]).cloned().collect(),
                per[2].iter().chain(&per[3]).cloned().collect(),
            ),
            // S1 split over both files.
            1 => (
                per[0][..70].iter().chain(&per[1]).cloned().collect(),
                per[0][70..].iter().chain(&per[2]).chain(&per[3]).cloned().collect(),
            ),
            // Rows interleaved and one out of time order.
            _ => {
                let mut a: Vec<String> =
                    (0..150).flat_map(|i| [&per[0], &per[1]].map(|p| p.get(i).cloned())).flatten().collect();
                a.swap(10, 30);
                (a, per[2].iter().chain(&per[3]).cloned().collect())
            }
        };
        for (name, rows) in [("a", a), ("b", b)] {
            let text = std::iter::once(&head).chain(&rows).cloned().collect::<Vec<_>>().join("\n");
            std::fs::write(d.join(format!("logs/{name}.csv")), text).unwrap();
        }
        let toml = "[study]\ntitle = \"t\"\ntimezone = \"UTC\"\noutput = \"out\"\n[pots]\nfile = \"pots.csv\"\nid = \"pot\"\nx = \"x\"\ny = \"y\"\n[sensors]\nfile = \"sensors.csv\"\nid = \"id\"\nx = \"x\"\ny = \"y\"\n[[logs]]\nfiles = [\"logs/*.csv\"]\ntime = \"time\"\ntime_format = \"%Y-%m-%d %H:%M\"\nsensor = \"id\"\n[logs.columns]\ntemperature = { column = \"temp\", unit = \"degC\" }\nhumidity = { column = \"rh\", unit = \"percent\" }\n[qc]\ndrop_unknown_sensors = true\n[climate]\nstart = \"2026-03-01 00:30\"\nend = \"2026-03-01 12:00\"\nstep = \"10min\"\n";
        std::fs::write(d.join("study.toml"), toml).unwrap();
        let study = Study::load(&d.join("study.toml")).unwrap();
        (dir, study)
    }

    /// Rows processed where they were read give exactly what the merged,
    /// stably sorted buffer gives: same table, flags, accounting and gaps.
    #[test]
    fn rows_in_place_and_merged_give_the_same_result() {
        for (layout, want_in_place) in [(0, true), (1, false), (2, false)] {
            let (_dir, study) = layout_study(layout);
            let (a, in_place) = ingest_with(&study, false).unwrap();
            let (b, merged) = ingest_with(&study, true).unwrap();
            assert_eq!((in_place, merged), (want_in_place, false), "layout {layout}");
            assert!(a.readings.equals_missing(&b.readings), "layout {layout}");
            assert_eq!(a.flags, b.flags, "layout {layout}");
            assert_eq!(a.files, b.files, "layout {layout}");
            assert_eq!(a.gaps, b.gaps, "layout {layout}");
            assert_eq!((a.span, &a.sensors), (b.span, &b.sensors), "layout {layout}");
            // Every rule fired.
            let reasons: std::collections::BTreeSet<&str> = a.flags.iter().map(|f| f.reason.name()).collect();
            for r in ["spike", "duplicate", "stuck", "unparsable_value", "outside_period", "unknown_sensor"] {
                assert!(reasons.contains(r), "layout {layout}: no {r} in {reasons:?}");
            }
            assert!(!a.gaps.is_empty(), "layout {layout}");
            let sensors = a.readings.column("sensor").unwrap().str().unwrap().clone();
            let order: Vec<&str> = sensors.iter().flatten().collect();
            assert!(order.windows(2).all(|w| w[0] <= w[1]), "layout {layout}: sorted by sensor");
        }
    }

    #[test]
    fn period_is_inclusive() {
        let p = Period { start: Some(10), end: Some(20) };
        assert!(p.contains(10) && p.contains(20) && !p.contains(9) && !p.contains(21));
        assert!(Period::default().contains(i64::MIN));
    }
}
