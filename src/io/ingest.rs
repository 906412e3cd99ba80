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

use super::clock::{Resolution, format_utc};
use super::error::{IoError, Result};
use super::layout::{load_sensors, parse_local_datetime};
use super::logs::{FileRead, Flag, LogFormat, Row, Variable, compile_logs, read_file};
use super::output::StageWriter;
use super::qc::{self, QcSettings, Reason};
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

/// Read every file of every block, in parallel over files; results in file order.
fn read_all(jobs: &[(&LogFormat, PathBuf)]) -> Result<Vec<FileRead>> {
    let n = jobs.len();
    let workers = std::thread::available_parallelism().map(|x| x.get()).unwrap_or(1).min(n).max(1);
    let next = std::sync::atomic::AtomicUsize::new(0);
    let mut slots: Vec<Option<Result<FileRead>>> = (0..n).map(|_| None).collect();
    let results = std::sync::Mutex::new(&mut slots);
    std::thread::scope(|s| {
        for _ in 0..workers {
            s.spawn(|| {
                loop {
                    let i = next.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
                    if i >= n {
                        break;
                    }
                    let (fmt, path) = &jobs[i];
                    let r = read_file(fmt, path, i as u32);
                    results.lock().unwrap_or_else(|e| e.into_inner())[i] = Some(r);
                }
            });
        }
    });
    slots.into_iter().map(|r| r.unwrap_or_else(|| unreachable!("every job ran"))).collect()
}

/// Ingest every logger export of `study` (see the module docs).
pub fn ingest(study: &Study) -> Result<Ingested> {
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
    let total: usize = reads.iter().map(|r| r.rows.len()).sum();
    let mut rows: Vec<Row> = Vec::with_capacity(total);
    let mut flags: Vec<Flag> = Vec::new();
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
        let remap = |s: u32| if s == u32::MAX { s } else { map[s as usize] };
        flags.extend(r.flags.into_iter().map(|mut f| {
            f.sensor = remap(f.sensor);
            f
        }));
        rows.extend(r.rows.into_iter().map(|mut x| {
            x.sensor = remap(x.sensor);
            x
        }));
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
    if !rows.windows(2).all(|w| (w[0].sensor, w[0].time) <= (w[1].sensor, w[1].time)) {
        rows.sort_by_key(|r| (r.sensor, r.time));
    }

    // Row rules: unknown sensor, duplicate, outside the period (compacted in place).
    let mut w = 0;
    for i in 0..rows.len() {
        let r = rows[i];
        let reason = if r.sensor as usize >= known {
            Some((Reason::UnknownSensor, Variable::Sensor, sensors[r.sensor as usize].clone()))
        } else if w > 0 && rows[w - 1].sensor == r.sensor && rows[w - 1].time == r.time {
            let prev = &rows[w - 1];
            Some((
                Reason::Duplicate,
                Variable::Row,
                format!("same instant as {}:{}", files[prev.file as usize].name, prev.line),
            ))
        } else if !period.contains(r.time) {
            Some((Reason::OutsidePeriod, Variable::Time, format_utc(r.time)))
        } else {
            None
        };
        match reason {
            Some((reason, variable, value)) => flags.push(Flag {
                file: r.file,
                line: r.line,
                sensor: r.sensor,
                time: Some(r.time),
                variable,
                value,
                reason,
            }),
            None => {
                rows[w] = r;
                w += 1;
            }
        }
    }
    rows.truncate(w);

    // Value rules and gaps per sensor, sensors spread over the cores.
    let mut segs: Vec<&mut [Row]> = Vec::new();
    let mut rest: &mut [Row] = &mut rows;
    while !rest.is_empty() {
        let s0 = rest[0].sensor;
        let n = rest.iter().position(|r| r.sensor != s0).unwrap_or(rest.len());
        let (seg, tail) = std::mem::take(&mut rest).split_at_mut(n);
        segs.push(seg);
        rest = tail;
    }
    let workers = std::thread::available_parallelism().map(|x| x.get()).unwrap_or(1).min(segs.len()).max(1);
    let mut buckets: Vec<Vec<&mut [Row]>> = (0..workers).map(|_| Vec::new()).collect();
    for (i, seg) in segs.into_iter().enumerate() {
        buckets[i % workers].push(seg);
    }
    let names = &sensors;
    let results: Vec<(Vec<Flag>, Vec<Gap>)> = std::thread::scope(|sc| {
        let handles: Vec<_> = buckets
            .into_iter()
            .map(|bucket| {
                sc.spawn(move || {
                    let (mut f, mut g) = (Vec::new(), Vec::new());
                    for seg in bucket {
                        value_rules(seg, settings, &mut f);
                        g.extend(find_gaps(seg, &names[seg[0].sensor as usize], settings.gap_factor, period));
                    }
                    (f, g)
                })
            })
            .collect();
        handles.into_iter().map(|h| h.join().unwrap_or_else(|e| std::panic::resume_unwind(e))).collect()
    });
    let mut gaps = Vec::new();
    for (f, g) in results {
        flags.extend(f);
        gaps.extend(g);
    }
    gaps.sort_by(|a, b| (&a.sensor, a.channel, a.from).cmp(&(&b.sensor, b.channel, b.from)));

    // Accounting.
    flags.sort_by_key(|x| (x.file, x.line, x.variable, x.reason));
    for r in &rows {
        if !r.flagged {
            files[r.file as usize].rows_kept += 1;
        }
    }
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

    let readings = readings_frame(&rows, &sensors).map_err(|e| IoError::Table {
        path: study.output_dir(),
        message: format!("cannot build the readings table: {e}"),
    })?;
    let span = rows.iter().map(|r| r.time).min().zip(rows.iter().map(|r| r.time).max());
    Ok(Ingested { readings, flags, files, gaps, sensors, period, span })
}

/// Range, spike and stuck rules on one sensor's rows (sorted by time).
fn value_rules(seg: &mut [Row], q: &QcSettings, flags: &mut Vec<Flag>) {
    let times: Vec<i64> = seg.iter().map(|r| r.time).collect();
    let mut cols: [Vec<f64>; 3] = std::array::from_fn(|k| seg.iter().map(|r| r.values[k]).collect());
    let mut flag = |seg: &mut [Row], i: usize, k: usize, reason: Reason, v: f64| {
        let r = &mut seg[i];
        flags.push(Flag {
            file: r.file,
            line: r.line,
            sensor: r.sensor,
            time: Some(r.time),
            variable: Variable::Channel(Channel::ALL[k]),
            value: format_value(v),
            reason,
        });
        r.values[k] = f64::NAN;
        r.flagged = true;
    };
    for (k, col) in cols.iter_mut().enumerate() {
        let (lo, hi) = q.range(k);
        for (i, v) in col.iter_mut().enumerate() {
            if !v.is_nan() && (*v < lo || *v > hi) {
                flag(seg, i, k, Reason::OutOfRange, *v);
                *v = f64::NAN;
            }
        }
        for i in qc::spikes(col, q.spike_window, q.spike_k, q.min_jump(k)) {
            flag(seg, i, k, Reason::Spike, col[i]);
            col[i] = f64::NAN;
        }
    }
    // Stuck: judged on the values left after range and spike rules; "moving"
    // asks whether another channel of the same sensor changed within the run,
    // and holds when no other channel has readings there.
    let min_ms = (q.stuck_hours * 3_600_000.0) as i64;
    let mut stuck_idx: [Vec<usize>; 3] = Default::default();
    for k in 0..3 {
        let skip = (k == 2 && q.stuck_skip_dark).then_some(0.0);
        let moving = |a: usize, b: usize| {
            let mut any_data = false;
            for (j, col) in cols.iter().enumerate() {
                if j == k {
                    continue;
                }
                let mut first: Option<f64> = None;
                for &v in &col[a..=b] {
                    if v.is_nan() {
                        continue;
                    }
                    any_data = true;
                    match first {
                        None => first = Some(v),
                        Some(f) if f != v => return true,
                        _ => {}
                    }
                }
            }
            !any_data
        };
        stuck_idx[k] = qc::stuck(&times, &cols[k], min_ms, skip, moving);
    }
    for (k, idx) in stuck_idx.iter().enumerate() {
        for &i in idx {
            flag(seg, i, k, Reason::Stuck, cols[k][i]);
        }
    }
}

fn format_value(v: f64) -> String {
    let s = format!("{v:.6}");
    let s = s.trim_end_matches('0').trim_end_matches('.');
    if s == "-0" { "0".into() } else { s.to_string() }
}

/// Gaps of each channel of one sensor: consecutive readings (non-null values)
/// further apart than `factor` logging steps, where the step is the median
/// interval between the sensor's rows; with a study period, also from its
/// start to the first reading and from the last reading to its end.
fn find_gaps(seg: &[Row], sensor: &str, factor: f64, period: Period) -> Vec<Gap> {
    let mut d: Vec<i64> = seg.windows(2).map(|w| w[1].time - w[0].time).filter(|&x| x > 0).collect();
    if d.is_empty() {
        return Vec::new();
    }
    d.sort_unstable();
    let step = d[d.len() / 2];
    let limit = (step as f64 * factor) as i64;
    let mut out = Vec::new();
    for ch in Channel::ALL {
        let k = ch.index();
        let times: Vec<i64> = seg.iter().filter(|r| !r.values[k].is_nan()).map(|r| r.time).collect();
        if times.is_empty() {
            continue;
        }
        let mut push = |from: i64, to: i64| {
            if to - from > limit {
                out.push(Gap { sensor: sensor.to_string(), channel: ch, from, to, step });
            }
        };
        if let Some(s) = period.start {
            push(s, times[0]);
        }
        for w in times.windows(2) {
            push(w[0], w[1]);
        }
        if let Some(e) = period.end {
            push(times[times.len() - 1], e);
        }
    }
    out
}

fn readings_frame(rows: &[Row], sensors: &[String]) -> PolarsResult<DataFrame> {
    // Rows come in runs of one sensor: one repeated value per run (cheap in
    // polars' string-view layout), concatenated.
    let mut sensor = StringChunked::full("sensor".into(), "", 0);
    let mut a = 0;
    while a < rows.len() {
        let s = rows[a].sensor;
        let n = rows[a..].iter().position(|r| r.sensor != s).unwrap_or(rows.len() - a);
        sensor.append(&StringChunked::full("sensor".into(), &sensors[s as usize], n))?;
        a += n;
    }
    let sensor = sensor.rechunk().into_owned();
    let time = Int64Chunked::from_vec("time".into(), rows.iter().map(|r| r.time).collect())
        .into_datetime(TimeUnit::Milliseconds, Some(TimeZone::UTC));
    let mut cols: Vec<Column> = vec![sensor.into_series().into(), time.into_series().into()];
    for ch in Channel::ALL {
        let k = ch.index();
        let v = Float64Chunked::from_iter_options(
            ch.column().into(),
            rows.iter().map(|r| {
                let x = r.values[k];
                (!x.is_nan()).then_some(x)
            }),
        );
        cols.push(v.into_series().into());
    }
    DataFrame::new(rows.len(), cols)
}

/// Write `readings.parquet`, `qc_flags.csv`, `qc_summary.csv` and `gaps.csv`
/// into the study's output folder, all published together (see
/// `io::output`). Returns the published paths.
pub fn write_outputs(study: &Study, ing: &Ingested) -> Result<Vec<PathBuf>> {
    let out = study.output_dir();
    let mut w = StageWriter::new(&out, "ingest")?;
    let werr = |p: &Path, e: &dyn std::fmt::Display| IoError::Read {
        path: p.to_path_buf(),
        source: std::io::Error::other(e.to_string()),
    };

    let p = w.path("readings.parquet");
    let f = std::fs::File::create(&p).map_err(|source| IoError::Read { path: p.clone(), source })?;
    let mut df = ing.readings.clone();
    ParquetWriter::new(f).finish(&mut df).map_err(|e| werr(&p, &e))?;

    let csv_file = |w: &mut StageWriter,
                    name: &str,
                    header: &[&str],
                    rows: &mut dyn Iterator<Item = Vec<String>>|
     -> Result<()> {
        let p = w.path(name);
        let mut c = csv::Writer::from_path(&p).map_err(|e| werr(&p, &e))?;
        c.write_record(header).map_err(|e| werr(&p, &e))?;
        for r in rows {
            c.write_record(&r).map_err(|e| werr(&p, &e))?;
        }
        c.flush().map_err(|source| IoError::Read { path: p.clone(), source })
    };

    let sensor_name = |s: u32| if s == u32::MAX { String::new() } else { ing.sensors[s as usize].clone() };
    csv_file(
        &mut w,
        "qc_flags.csv",
        &["file", "line", "sensor", "time", "variable", "value", "reason"],
        &mut ing.flags.iter().map(|f| {
            vec![
                ing.files[f.file as usize].name.clone(),
                f.line.to_string(),
                sensor_name(f.sensor),
                f.time.map(format_utc).unwrap_or_default(),
                f.variable.name().to_string(),
                f.value.clone(),
                f.reason.name().to_string(),
            ]
        }),
    )?;
    let mut header = vec!["file", "rows_read", "rows_kept", "rows_flagged"];
    header.extend(Reason::ALL.iter().map(|r| r.name()));
    csv_file(
        &mut w,
        "qc_summary.csv",
        &header,
        &mut ing.files.iter().map(|s| {
            let mut r = vec![
                s.name.clone(),
                s.rows_read.to_string(),
                s.rows_kept.to_string(),
                s.rows_flagged.to_string(),
            ];
            r.extend(s.by_reason.iter().map(|n| n.to_string()));
            r
        }),
    )?;
    csv_file(
        &mut w,
        "gaps.csv",
        &["sensor", "variable", "from", "to", "hours", "step_minutes"],
        &mut ing.gaps.iter().map(|g| {
            vec![
                g.sensor.clone(),
                g.channel.column().to_string(),
                format_utc(g.from),
                format_utc(g.to),
                format_value((g.to - g.from) as f64 / 3_600_000.0),
                format_value(g.step as f64 / 60_000.0),
            ]
        }),
    )?;
    w.commit()
}

/// Read a `readings.parquet` written by [`write_outputs`], checking its columns.
pub fn read_readings(path: &Path) -> Result<DataFrame> {
    let f = std::fs::File::open(path).map_err(|source| IoError::Read { path: path.to_path_buf(), source })?;
    let df = ParquetReader::new(f).finish().map_err(|e| IoError::Table {
        path: path.to_path_buf(),
        message: format!("not a readable parquet file: {e}"),
    })?;
    let want: [(&str, DataType); 5] = [
        ("sensor", DataType::String),
        ("time", DataType::Datetime(TimeUnit::Milliseconds, Some(TimeZone::UTC))),
        ("temperature_c", DataType::Float64),
        ("rh_pct", DataType::Float64),
        ("ppfd_umol_m2_s", DataType::Float64),
    ];
    for (name, dt) in want {
        match df.column(name) {
            Ok(c) if *c.dtype() == dt => {}
            Ok(c) => {
                return Err(IoError::Table {
                    path: path.to_path_buf(),
                    message: format!(
                        "column `{name}` is {} where {dt} is expected (run `potclim ingest` again)",
                        c.dtype()
                    ),
                });
            }
            Err(_) => {
                return Err(IoError::Table {
                    path: path.to_path_buf(),
                    message: format!(
                        "no column `{name}`; this is not a readings table written by `potclim ingest`"
                    ),
                });
            }
        }
    }
    Ok(df)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn row(t: i64, v: [f64; 3], line: u32) -> Row {
        Row { time: t, values: v, line, sensor: 0, file: 0, flagged: false }
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
        value_rules(&mut seg, &q, &mut flags);
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
        let g = find_gaps(&seg, "S", 2.0, Period::default());
        assert_eq!(g.len(), 1);
        assert_eq!((g[0].from, g[0].to, g[0].step), (7 * step, 11 * step, step));
        let p = Period { start: Some(-5 * step), end: Some(19 * step) };
        assert_eq!(find_gaps(&seg, "S", 2.0, p).len(), 2);
    }

    #[test]
    fn period_is_inclusive() {
        let p = Period { start: Some(10), end: Some(20) };
        assert!(p.contains(10) && p.contains(20) && !p.contains(9) && !p.contains(21));
        assert!(Period::default().contains(i64::MIN));
    }

    #[test]
    fn values_are_formatted_without_noise() {
        assert_eq!(format_value(20.0), "20");
        assert_eq!(format_value(-0.0000001), "0");
        assert_eq!(format_value(104.25), "104.25");
    }
}
