//! What [`super`] writes and the later stages read: the readings table (Parquet)
//! built from its columns without copying, the quality-control flags, summary
//! and gaps files, and the reading of the readings table back.

use super::Ingested;
use crate::io::clock::format_utc;
use crate::io::error::{IoError, Result};
use crate::io::output::{CsvTable, StageWriter, number};
use crate::io::qc::Reason;
use crate::io::study::Study;
use crate::io::units::Channel;
use polars::prelude::*;
use std::path::{Path, PathBuf};

/// The readings table from its columns; `runs` gives the sensor of each
/// stretch of rows, in order. `NaN` values become nulls. Each column has one
/// chunk per run: the sensor column repeats one value per chunk (cheap in
/// polars' string-view layout), and the other columns are zero-copy slices
/// of their one buffer, so no column is copied to be concatenated.
pub(super) fn readings_frame(
    runs: &[(u32, usize)],
    times: Vec<i64>,
    values: [Vec<f64>; 3],
    sensors: &[String],
) -> PolarsResult<DataFrame> {
    let n = times.len();
    let mut sensor = StringChunked::full("sensor".into(), "", 0);
    for &(s, len) in runs {
        sensor.append(&StringChunked::full("sensor".into(), &sensors[s as usize], len))?;
    }
    let time = Int64Chunked::from_vec("time".into(), times)
        .into_datetime(TimeUnit::Milliseconds, Some(TimeZone::UTC));
    let mut cols: Vec<Column> =
        vec![sensor.into_series().into(), chunk_by_runs(time.into_series(), runs)?.into()];
    for (ch, v) in Channel::ALL.into_iter().zip(values) {
        let v = Float64Chunked::from_vec(ch.column().into(), v);
        let nan = v.is_nan();
        let v = if nan.any() { v.set(&nan, None)? } else { v };
        cols.push(chunk_by_runs(v.into_series(), runs)?.into());
    }
    DataFrame::new(n, cols)
}

/// `s` as one chunk per run (zero-copy slices).
fn chunk_by_runs(s: Series, runs: &[(u32, usize)]) -> PolarsResult<Series> {
    let Some(((_, first), rest)) = runs.split_first() else { return Ok(s) };
    let mut out = s.slice(0, *first);
    let mut offset = *first;
    for &(_, len) in rest {
        out.append(&s.slice(offset as i64, len))?;
        offset += len;
    }
    Ok(out)
}

/// The readings table (Parquet): [`write_outputs`] writes it, the climate
/// and mapping stages read it.
pub const READINGS_FILE: &str = "readings.parquet";
/// Every reading not kept as is, with its reason.
pub const QC_FLAGS_FILE: &str = "qc_flags.csv";
/// Rows read, kept and flagged per input file and reason.
pub const QC_SUMMARY_FILE: &str = "qc_summary.csv";
/// Gaps per sensor and channel.
pub const GAPS_FILE: &str = "gaps.csv";

/// Write `readings.parquet`, `qc_flags.csv`, `qc_summary.csv` and `gaps.csv`
/// into the study's output folder, all published together (see
/// `io::output`). Returns the published paths.
pub fn write_outputs(study: &Study, ing: &Ingested) -> Result<Vec<PathBuf>> {
    let out = study.output_dir();
    let mut w = StageWriter::new(&out, "ingest")?;
    let werr = |p: &Path, e: &dyn std::fmt::Display| IoError::Read {
        path: p.to_path_buf(),
        reason: std::io::Error::other(e.to_string()),
    };

    let p = w.path(READINGS_FILE);
    let f = std::fs::File::create(&p).map_err(|source| IoError::Read { path: p.clone(), reason: source })?;
    let mut df = ing.readings.clone();
    ParquetWriter::new(f).finish(&mut df).map_err(|e| werr(&p, &e))?;

    let sensor_name = |s: u32| if s == u32::MAX { String::new() } else { ing.sensors[s as usize].clone() };
    let mut t = CsvTable::new(["file", "line", "sensor", "time", "variable", "value", "reason"]);
    for f in &ing.flags {
        t.row([
            ing.files[f.file as usize].name.clone(),
            f.line.to_string(),
            sensor_name(f.sensor),
            f.time.map(format_utc).unwrap_or_default(),
            f.variable.name().to_string(),
            f.value.clone(),
            f.reason.name().to_string(),
        ]);
    }
    w.write(QC_FLAGS_FILE, &t.into_bytes())?;
    let mut header = vec!["file", "rows_read", "rows_kept", "rows_flagged"];
    header.extend(Reason::ALL.iter().map(|r| r.name()));
    let mut t = CsvTable::new(header);
    for s in &ing.files {
        let mut r = vec![
            s.name.clone(),
            s.rows_read.to_string(),
            s.rows_kept.to_string(),
            s.rows_flagged.to_string(),
        ];
        r.extend(s.by_reason.iter().map(|n| n.to_string()));
        t.row(r);
    }
    w.write(QC_SUMMARY_FILE, &t.into_bytes())?;
    let mut t = CsvTable::new(["sensor", "variable", "from", "to", "hours", "step_minutes"]);
    for g in &ing.gaps {
        t.row([
            g.sensor.clone(),
            g.channel.column().to_string(),
            format_utc(g.from),
            format_utc(g.to),
            number((g.to - g.from) as f64 / 3_600_000.0),
            number(g.step as f64 / 60_000.0),
        ]);
    }
    w.write(GAPS_FILE, &t.into_bytes())?;
    w.commit()
}

/// Read a `readings.parquet` written by [`write_outputs`], checking its columns.
pub fn read_readings(path: &Path) -> Result<DataFrame> {
    let f = std::fs::File::open(path)
        .map_err(|source| IoError::Read { path: path.to_path_buf(), reason: source })?;
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
