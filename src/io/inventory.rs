//! The inventory behind `potclim check`: every input is opened and validated
//! (study file, pot table, sensor table, every logger export's header, time
//! pattern and units), but logger files are only sampled — their first and
//! last rows are parsed and their lines counted — so that checking a study is
//! quick even when ingesting it is not.

use super::error::Result;
use super::ingest::{Period, display_name, study_period};
use super::layout::{load_pots, load_sensors};
use super::logs::{LogFormat, compile_logs, read_bytes};
use super::qc::Reason;
use super::study::Study;
use super::table::{Table, is_missing};
use std::collections::{BTreeMap, BTreeSet};

/// Data rows parsed at the start and at the end of each export.
const SAMPLE_ROWS: usize = 200;

/// One export, sampled.
#[derive(Debug, Clone)]
pub struct FileInventory {
    /// Name relative to the study folder.
    pub name: String,
    /// Non-blank lines after the header (data rows, unless quoted fields
    /// span lines).
    pub lines: usize,
    /// Earliest and latest instant among the sampled rows (UTC ms).
    pub span: Option<(i64, i64)>,
    /// Sensor ids with at least one row in the file (every row's sensor
    /// cell is read, not only the sampled rows).
    pub sensors: BTreeSet<String>,
    /// Flags raised on the sampled rows.
    pub sample_flags: usize,
    /// Data rows in the sample.
    pub sample_rows: usize,
    /// Sampled rows with at least one flag.
    pub flagged_rows: usize,
    /// The most frequent reason among the sample's flags, with its count and
    /// its first flag (line, variable and value), when any row was flagged.
    pub main_cause: Option<(Reason, usize, super::logs::Flag)>,
}

impl FileInventory {
    /// Whether most sampled rows were flagged: then the block, not the data,
    /// is likely wrong, and `check` warns instead of calling the input readable.
    pub fn mostly_flagged(&self) -> bool {
        self.sample_rows > 0 && self.flagged_rows * 2 > self.sample_rows
    }

    /// The main cause of the sample's flags and how to fix the block
    /// (`block` is its 1-based number), as two sentences for `check`.
    pub fn cause_and_fix(&self, block: usize) -> Option<(String, String)> {
        use super::logs::Variable;
        let (reason, n, f) = self.main_cause.as_ref()?;
        let at = format!("{}:{}", self.name, f.line);
        let k = block;
        Some(match (reason, f.variable) {
            (Reason::MalformedRow, Variable::Sensor) => (
                format!("{n} row(s) have no sensor id (first at {at})"),
                format!(
                    "if the sensor column is filled in the first row only or not at all, take the id from elsewhere in logs[{k}]: `sensor_from = \"file_stem\"`"
                ),
            ),
            (Reason::MalformedRow, _) => (
                format!("{n} row(s) do not split into the header's columns (first at {at}: {})", f.value),
                format!(
                    "check `delimiter` and `skip_lines` of logs[{k}] (the header must be the first line after the preamble)"
                ),
            ),
            (Reason::UnparsableTime, _) => (
                format!("{n} time cell(s) do not match the pattern (first at {at}: `{}`)", f.value),
                format!("fix `time_format` of logs[{k}] to the way the file writes its times"),
            ),
            (Reason::UnparsableValue, _) => (
                format!("{n} value(s) are not numbers (first at {at}, {}: `{}`)", f.variable.name(), f.value),
                format!("check `decimal` and the channel columns of logs[{k}]"),
            ),
            (Reason::AmbiguousTime | Reason::NonexistentTime, _) => (
                format!(
                    "{n} local time(s) fall in a daylight-saving change and cannot be placed (first at {at}: `{}`)",
                    f.value
                ),
                format!(
                    "if the logger keeps one offset all year, set `timezone` of logs[{k}] to a fixed zone (\"UTC\", or \"Etc/GMT-1\" for UTC+01:00)"
                ),
            ),
            (r, _) => (
                format!("{n} flag(s) `{}` (first at {at}: {})", r.name(), f.value),
                format!("check logs[{k}] against the file"),
            ),
        })
    }
}

/// The counts of one factor column of the pot table.
#[derive(Debug, Clone)]
pub struct Factor {
    /// Column name.
    pub name: String,
    /// Levels (sorted) with their pot counts.
    pub levels: Vec<(String, usize)>,
}

/// Pots per combination of levels of two factors.
#[derive(Debug, Clone)]
pub struct CrossTab {
    /// Row factor.
    pub rows: String,
    /// Column factor.
    pub cols: String,
    /// Row levels.
    pub row_levels: Vec<String>,
    /// Column levels.
    pub col_levels: Vec<String>,
    /// `counts[i][j]`: pots with row level i and column level j.
    pub counts: Vec<Vec<usize>>,
}

/// Pots per combination of the levels of columns `rows` and `cols` of
/// `table`, with the levels of each sorted (the order `potclim check` prints
/// and the report shows). Cells count as written: a missing cell is a level
/// of its own, so the counts always add up to the table's rows. Cost
/// O(rows × levels). Errors when a column is absent.
pub fn cross_tab(table: &Table, rows: &str, cols: &str) -> Result<CrossTab> {
    let a = table.text(rows)?;
    let b = table.text(cols)?;
    let rl: Vec<String> =
        a.iter().copied().collect::<BTreeSet<&str>>().into_iter().map(str::to_string).collect();
    let cl: Vec<String> =
        b.iter().copied().collect::<BTreeSet<&str>>().into_iter().map(str::to_string).collect();
    let mut counts = vec![vec![0; cl.len()]; rl.len()];
    for (x, y) in a.iter().zip(&b) {
        let i = rl.binary_search_by(|l| l.as_str().cmp(x)).unwrap_or(0);
        let j = cl.binary_search_by(|l| l.as_str().cmp(y)).unwrap_or(0);
        counts[i][j] += 1;
    }
    Ok(CrossTab { rows: rows.to_string(), cols: cols.to_string(), row_levels: rl, col_levels: cl, counts })
}

/// What `potclim check` reports.
#[derive(Debug, Clone)]
pub struct Inventory {
    /// Pots in the pot table.
    pub pots: usize,
    /// Sensors in the sensor table, if there is one.
    pub sensors: Option<usize>,
    /// Per `[[logs]]` block, its files.
    pub logs: Vec<Vec<FileInventory>>,
    /// Sensor ids seen in the logs but absent from the sensor table.
    pub unknown_sensors: BTreeSet<String>,
    /// Sensors of the sensor table (in its order) with no row in any export:
    /// they have no readings, so nothing is mapped from them.
    pub silent_sensors: Vec<String>,
    /// The pot table's factor columns: text columns other than id and
    /// growth-window columns, with fewer levels than pots.
    pub factors: Vec<Factor>,
    /// Every pair of factors, crossed.
    pub crosstabs: Vec<CrossTab>,
    /// The study period of `[climate]`, if set.
    pub period: Period,
}

/// Validate every input of `study` and take the inventory.
pub fn inventory(study: &Study) -> Result<Inventory> {
    let pots = load_pots(study)?;
    let sensors = load_sensors(study)?;
    let period = study_period(study)?;
    let formats = compile_logs(study)?;
    let known: BTreeSet<&str> =
        sensors.as_ref().map(|s| s.ids.iter().map(String::as_str).collect()).unwrap_or_default();
    let mut logs = Vec::new();
    let mut unknown = BTreeSet::new();
    for fmt in &formats {
        let mut files = Vec::new();
        for path in &fmt.files {
            let inv = sample_file(study, fmt, path)?;
            unknown.extend(inv.sensors.iter().filter(|s| !known.contains(s.as_str())).cloned());
            files.push(inv);
        }
        logs.push(files);
    }
    let logged: BTreeSet<&str> =
        logs.iter().flatten().flat_map(|f| f.sensors.iter().map(String::as_str)).collect();
    let silent_sensors: Vec<String> = sensors
        .as_ref()
        .map(|s| s.ids.iter().filter(|id| !logged.contains(id.as_str())).cloned().collect())
        .unwrap_or_default();

    // Factor columns.
    let spec = &study.spec.pots;
    let mut skip: BTreeSet<&str> =
        [Some(&spec.id), spec.x.as_ref(), spec.y.as_ref(), spec.start.as_ref(), spec.end.as_ref()]
            .into_iter()
            .flatten()
            .map(String::as_str)
            .collect();
    if let Some(g) = &spec.grid {
        skip.extend([g.bench.as_str(), g.row.as_str(), g.slot.as_str()]);
    }
    let t = &pots.table;
    let mut factors = Vec::new();
    for (j, h) in t.headers.iter().enumerate() {
        if skip.contains(h.as_str()) {
            continue;
        }
        let cells: Vec<&str> = t.rows.iter().map(|r| r[j].as_str()).collect();
        let numeric = cells.iter().all(|c| is_missing(c) || c.parse::<f64>().is_ok());
        if numeric {
            continue;
        }
        let mut counts: BTreeMap<String, usize> = BTreeMap::new();
        for c in &cells {
            *counts.entry(c.to_string()).or_default() += 1;
        }
        if counts.len() >= t.len() {
            continue; // a label per pot, not a factor
        }
        factors.push(Factor { name: h.clone(), levels: counts.into_iter().collect() });
    }
    let mut crosstabs = Vec::new();
    for a in 0..factors.len() {
        for b in a + 1..factors.len() {
            crosstabs.push(cross_tab(t, &factors[a].name, &factors[b].name)?);
        }
    }
    Ok(Inventory {
        pots: pots.ids.len(),
        sensors: sensors.map(|s| s.ids.len()),
        logs,
        unknown_sensors: unknown,
        silent_sensors,
        factors,
        crosstabs,
        period,
    })
}

/// Parse the header and the first and last [`SAMPLE_ROWS`] rows of an export.
/// A workbook is sampled through its sheet's text (`io::workbook`).
fn sample_file(study: &Study, fmt: &LogFormat, path: &std::path::Path) -> Result<FileInventory> {
    if super::workbook::is_workbook(path) {
        let (wfmt, sheet) = super::workbook::for_block(fmt, path)?;
        let mut inv = sample_bytes(&wfmt, &sheet.shown, &sheet.text)?;
        inv.name = format!("{} [sheet {}]", display_name(study, path), sheet.sheet);
        return Ok(inv);
    }
    let bytes = std::fs::read(path)
        .map_err(|source| super::error::IoError::Read { path: path.to_path_buf(), reason: source })?;
    let mut inv = sample_bytes(fmt, path, &bytes)?;
    inv.name = display_name(study, path);
    Ok(inv)
}

/// [`sample_file`] on the bytes of a text export (`path` for messages; the
/// returned `name` is left for the caller).
fn sample_bytes(fmt: &LogFormat, path: &std::path::Path, bytes: &[u8]) -> Result<FileInventory> {
    // Split into physical lines, keeping offsets.
    let mut starts = vec![0usize];
    starts.extend(bytes.iter().enumerate().filter(|(_, c)| **c == b'\n').map(|(i, _)| i + 1));
    if *starts.last().unwrap_or(&0) >= bytes.len() {
        starts.pop();
    }
    let line_text = |i: usize| -> &[u8] {
        let a = starts[i];
        let b = starts.get(i + 1).copied().unwrap_or(bytes.len());
        &bytes[a..b]
    };
    let skip = fmt.skip_lines.min(starts.len());
    let header = (skip..starts.len()).find(|&i| !line_text(i).trim_ascii().is_empty());
    let Some(header) = header else {
        // Let the reader produce its usual "empty" error.
        read_bytes(fmt, path, 0, bytes)?;
        unreachable!("an empty file is an error");
    };
    // Lines after the header that are not data (a layout's units line).
    let header = (header..starts.len())
        .filter(|&i| !line_text(i).trim_ascii().is_empty())
        .nth(fmt.after_header)
        .unwrap_or(header);
    let data: Vec<usize> =
        (header + 1..starts.len()).filter(|&i| !line_text(i).trim_ascii().is_empty()).collect();
    let head_end = data.get(SAMPLE_ROWS).map(|&i| starts[i]).unwrap_or(bytes.len());
    let mut seen = BTreeSet::new();
    let mut span: Option<(i64, i64)> = None;
    let mut sample_flags = 0;
    let mut sample_rows = 0;
    let mut flagged_rows = 0;
    let mut causes: BTreeMap<Reason, (usize, super::logs::Flag)> = BTreeMap::new();
    let mut take = |r: super::logs::FileRead| {
        sample_rows += r.rows_read;
        let lines: BTreeSet<u32> = r.flags.iter().map(|f| f.line).collect();
        flagged_rows += lines.len();
        for f in &r.flags {
            causes.entry(f.reason).or_insert_with(|| (0, f.clone())).0 += 1;
        }
        for row in &r.rows {
            span = Some(match span {
                None => (row.time, row.time),
                Some((a, b)) => (a.min(row.time), b.max(row.time)),
            });
        }
        sample_flags += r.flags.len();
        seen.extend(r.sensors);
    };
    take(read_bytes(fmt, path, 0, &bytes[..head_end])?);
    if data.len() > SAMPLE_ROWS {
        // The tail, behind blank lines that keep its physical line numbers.
        let tail_from = data[data.len() - SAMPLE_ROWS.min(data.len() - SAMPLE_ROWS)];
        let mut tail = bytes[..starts[header + 1]].to_vec();
        tail.extend(std::iter::repeat_n(b'\n', tail_from - header - 1));
        tail.extend_from_slice(&bytes[starts[tail_from]..]);
        take(read_bytes(fmt, path, 0, &tail)?);
    }
    if let super::logs::SensorSource::Column(name) = &fmt.sensor {
        seen.extend(sensor_column_ids(fmt, name, &bytes[starts[header]..]));
    }
    let main_cause =
        causes.into_iter().max_by_key(|(r, (n, _))| (*n, std::cmp::Reverse(*r))).map(|(r, (n, f))| (r, n, f));
    Ok(FileInventory {
        name: String::new(),
        lines: data.len(),
        span,
        sensors: seen,
        sample_flags,
        sample_rows,
        flagged_rows,
        main_cause,
    })
}

/// Every distinct, non-empty id in column `name` of an export, from its
/// header line on (`text` starts at the header). Only the sensor cell of each
/// record is decoded, so a whole file is scanned quickly; a malformed record
/// ends the scan (the sampled rows report such problems with their line).
/// Cost: one pass over the bytes.
fn sensor_column_ids(fmt: &LogFormat, name: &str, text: &[u8]) -> BTreeSet<String> {
    let mut rdr = csv::ReaderBuilder::new()
        .delimiter(fmt.delimiter)
        .has_headers(false)
        .flexible(true)
        .from_reader(text);
    let mut rec = csv::ByteRecord::new();
    let cell = |b: &[u8]| {
        let b = b.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(b);
        String::from_utf8_lossy(b).trim().to_string()
    };
    let mut ids = BTreeSet::new();
    let Ok(true) = rdr.read_byte_record(&mut rec) else { return ids };
    let Some(j) = rec.iter().position(|h| cell(h) == name) else { return ids };
    while let Ok(true) = rdr.read_byte_record(&mut rec) {
        if let Some(id) = rec.get(j).map(cell).filter(|id| !id.is_empty()) {
            ids.insert(id);
        }
    }
    ids
}
