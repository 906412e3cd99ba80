//! Logger exports: one `[[logs]]` block compiled into a [`LogFormat`] (files,
//! delimiter, decimal mark, time format and zone, sensor id, channels with
//! units), and the reading of one export into time-stamped rows.
//!
//! Files are read whole. Text without quote characters (nearly every logger
//! export) is split by a vectorised search for the delimiter and `\n`, which
//! counts physical lines as it goes; text with quotes (or with a `\r` that
//! does not end a line) is split by the csv crate, with the lines counted
//! from the bytes before each record. Both splitters feed one row parser and
//! give the same rows, flags and lines on the same content (tests below).
//! Messages and `qc_flags.csv` name physical lines (1-based, counting
//! preamble and header). A cell that cannot be read
//! flags its reading; a column that fails on most rows stops the run with an
//! error naming file, line, column, value and pattern, because then the
//! configuration (pattern, decimal mark, delimiter) is wrong, not the data.
//!
//! Ambiguous local times (the fall-back hour) are resolved by file order per
//! sensor: a run of rows in the repeated hour is the first pass when the same
//! hour follows again (the clock jumps back), and the rows after the jump are
//! the second pass. A run that is never repeated cannot be placed (the logger
//! may have skipped either pass) and is flagged `ambiguous_time`, as is a
//! repeated-hour row with no earlier reading of its sensor.

use super::clock::{LocalClock, Resolution, Stamp, StampMemo, TimeFormat};
use super::error::{IoError, Result, closest};
use super::qc::Reason;
use super::study::{LogSection, LogZone, Study, delimiter_byte};
use super::table::LineCounter;
use super::units::{Channel, Conversion};
use std::path::{Path, PathBuf};

/// Which value of a row a flag is about.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum Variable {
    /// A channel value.
    Channel(Channel),
    /// The time cell.
    Time,
    /// The sensor id.
    Sensor,
    /// The whole row.
    Row,
}

impl Variable {
    /// The name written to `qc_flags.csv`.
    pub fn name(self) -> &'static str {
        match self {
            Variable::Channel(c) => c.column(),
            Variable::Time => "time",
            Variable::Sensor => "sensor",
            Variable::Row => "row",
        }
    }
}

/// Where the sensor id of a row comes from.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum SensorSource {
    /// This column.
    Column(String),
    /// The file name without extension.
    FileStem,
    /// One id for the whole file, read from its header lines by a layout.
    Fixed(String),
    /// Where the block's layout writes it (resolved per file by
    /// [`super::layouts::resolve`]).
    Layout,
}

/// A compiled `[[logs]]` block.
#[derive(Debug, Clone)]
pub struct LogFormat {
    /// 1-based block number, for messages (`logs[2]`).
    pub block: usize,
    /// Field delimiter.
    pub delimiter: u8,
    /// Decimal mark is a comma.
    pub decimal_comma: bool,
    /// Time column (the date column when date and time are apart).
    pub time_column: String,
    /// The time-of-day column, when date and time are apart: its cell is
    /// joined to the date cell with one space before parsing.
    pub clock_column: Option<String>,
    /// Time format.
    pub time_format: TimeFormat,
    /// Zone of local times.
    pub zone: LogZone,
    /// Whether `zone` was set by the block; when not, an offset written in
    /// the time column's header takes precedence over `[study].timezone`.
    pub zone_given: bool,
    /// Sensor id source.
    pub sensor: SensorSource,
    /// Preamble lines before the header.
    pub skip_lines: usize,
    /// Non-data lines after the header (units, processing codes).
    pub after_header: usize,
    /// The block's layout, resolved per file before reading.
    pub layout: Option<super::layouts::Layout>,
    /// The sheet of a workbook file (`None`: the only sheet).
    pub sheet: Option<String>,
    /// Per channel (order of `Channel::ALL`): column name and conversion.
    pub channels: [Option<(String, Conversion)>; 3],
    /// The files matched by the globs, sorted, deduplicated.
    pub files: Vec<PathBuf>,
}

/// Compile every `[[logs]]` block of a study and expand its globs. A glob
/// that matches nothing, a unit that does not belong to its channel, a bad
/// pattern or a decimal comma with a comma delimiter is an error naming the
/// key (and for units the study file's line and column).
pub fn compile_logs(study: &Study) -> Result<Vec<LogFormat>> {
    let spans = unit_spans(study)?;
    let mut out = Vec::new();
    for (i, log) in study.spec.logs.iter().enumerate() {
        out.push(compile_block(study, i, log, spans.get(i))?);
    }
    Ok(out)
}

#[derive(serde::Deserialize)]
struct UnitsDoc {
    #[serde(default)]
    logs: Vec<UnitsBlock>,
}
#[derive(serde::Deserialize)]
struct UnitsBlock {
    #[serde(default)]
    columns: UnitsColumns,
}
#[derive(serde::Deserialize, Default)]
struct UnitsColumns {
    temperature: Option<UnitCell>,
    humidity: Option<UnitCell>,
    light: Option<UnitCell>,
}
#[derive(serde::Deserialize)]
struct UnitCell {
    unit: toml::Spanned<String>,
}

/// Byte spans of each block's unit strings, for line and column in messages.
fn unit_spans(study: &Study) -> Result<Vec<[Option<std::ops::Range<usize>>; 3]>> {
    let doc: UnitsDoc = study.section()?;
    Ok(doc
        .logs
        .into_iter()
        .map(|b| {
            let s = |c: Option<UnitCell>| c.map(|c| c.unit.span());
            [s(b.columns.temperature), s(b.columns.humidity), s(b.columns.light)]
        })
        .collect())
}

fn compile_block(
    study: &Study,
    i: usize,
    log: &LogSection,
    spans: Option<&[Option<std::ops::Range<usize>>; 3]>,
) -> Result<LogFormat> {
    let key = |k: &str| format!("logs[{}].{k}", i + 1);
    let layout = log.layout.as_deref().and_then(super::layouts::Layout::parse);
    let implied = layout.map(|l| l.implied());
    let delimiter = match &log.delimiter {
        None => implied.map_or(b',', |m| m.delimiter),
        Some(d) => delimiter_byte(d).map_err(|m| study.invalid(&key("delimiter"), m, None))?,
    };
    let decimal_comma = log.decimal.as_deref() == Some(",");
    if decimal_comma && delimiter == b',' {
        return Err(study.invalid(
            &key("decimal"),
            "a decimal comma needs a delimiter other than a comma",
            Some("exports with decimal commas usually use `delimiter = \";\"`".into()),
        ));
    }
    let pattern = match (&log.time_format, implied) {
        (Some(p), _) => p.clone(),
        (None, Some(m)) => m.time_format.to_string(),
        (None, None) => return Err(study.invalid(&key("time_format"), "is required", None)),
    };
    let time_format = TimeFormat::compile(&pattern).map_err(|m| {
        study.invalid(
            &key("time_format"),
            m,
            Some(
                "use a chrono strftime pattern such as \"%Y-%m-%d %H:%M:%S\", or \"rfc3339\", or \"unix\""
                    .into(),
            ),
        )
    })?;
    let (zone, zone_given) = match &log.timezone {
        Some(tz) => (super::study::parse_log_zone(&study.path, &key("timezone"), tz)?, true),
        None => (LogZone::Iana(study.timezone), false),
    };
    let names: Vec<String> = match (&log.time, implied) {
        (Some(t), _) => t.names().into_iter().map(String::from).collect(),
        (None, Some(m)) => vec![m.time.to_string()],
        (None, None) => return Err(study.invalid(&key("time"), "is required", None)),
    };
    let sensor = match (&log.sensor, &log.sensor_from, layout) {
        (Some(c), _, _) => SensorSource::Column(c.clone()),
        (None, None, Some(_)) => SensorSource::Layout,
        _ => SensorSource::FileStem,
    };
    let mut channels: [Option<(String, Conversion)>; 3] = [None, None, None];
    let cols = [&log.columns.temperature, &log.columns.humidity, &log.columns.light];
    for ch in Channel::ALL {
        if let Some(cc) = cols[ch.index()] {
            let conv = Conversion::of(ch, &cc.unit).ok_or_else(|| {
                let names = ch.unit_names();
                let hint = match closest(&cc.unit, names.iter().copied()) {
                    Some(s) => format!("did you mean `{s}`? the units of {ch} are {}", names.join(", ")),
                    None => format!("the units of {ch} are {}", names.join(", ")),
                };
                let message =
                    format!("`logs[{}].columns.{ch}.unit`: unknown unit `{}` ({hint})", i + 1, cc.unit);
                match spans.and_then(|s| s[ch.index()].clone()) {
                    Some(span) => {
                        let (line, column) = super::study::line_col(&study.source, span.start);
                        IoError::Toml { path: study.path.clone(), line, column, message }
                    }
                    None => study.invalid(&key(&format!("columns.{ch}.unit")), message, None),
                }
            })?;
            channels[ch.index()] = Some((cc.column.clone(), conv));
        }
    }
    let mut files = Vec::new();
    for pat in &log.files {
        let full = study.resolve(pat);
        let full_s = full.to_string_lossy().to_string();
        let paths = glob::glob(&full_s).map_err(|e| {
            study.invalid(&key("files"), format!("`{pat}` is not a valid glob pattern: {e}"), None)
        })?;
        let mut n = 0;
        for p in paths {
            let p = p.map_err(|e| IoError::Read {
                path: e.path().to_path_buf(),
                reason: std::io::Error::other(e.to_string()),
            })?;
            if p.is_file() {
                files.push(p);
                n += 1;
            }
        }
        if n == 0 {
            return Err(study.invalid(
                &key("files"),
                format!("`{pat}` matches no file (looked for {})", full.display()),
                Some(
                    "paths are relative to the folder of the study file; check the spelling and extension"
                        .into(),
                ),
            ));
        }
    }
    files.sort();
    files.dedup();
    Ok(LogFormat {
        block: i + 1,
        delimiter,
        decimal_comma,
        time_column: names.first().map(|s| s.to_string()).unwrap_or_default(),
        clock_column: names.get(1).map(|s| s.to_string()),
        time_format,
        zone,
        zone_given,
        sensor,
        skip_lines: log.skip_lines.or(implied.map(|m| m.skip_lines)).unwrap_or(0),
        after_header: log.lines_after_header.or(implied.map(|m| m.after_header)).unwrap_or(0),
        layout,
        sheet: log.sheet.clone(),
        channels,
        files,
    })
}

/// One row of an export that has an instant (it may carry flagged values).
#[derive(Debug, Clone, Copy)]
pub struct Row {
    /// UTC milliseconds.
    pub time: i64,
    /// Channel values in internal units; `NaN` = no value (absent or flagged).
    pub values: [f64; 3],
    /// Physical line.
    pub line: u32,
    /// Sensor index (local to the file until merged, then global).
    pub sensor: u32,
    /// Index of the file among all files of the run.
    pub file: u32,
    /// Whether any value of this row was flagged.
    pub flagged: bool,
}

/// One reading that was not kept as is.
#[derive(Debug, Clone, PartialEq)]
pub struct Flag {
    /// Index of the file among all files of the run.
    pub file: u32,
    /// Physical line (1-based).
    pub line: u32,
    /// Sensor index (local to the file until merged, then global);
    /// `u32::MAX` when the row has no sensor id.
    pub sensor: u32,
    /// UTC milliseconds, when known.
    pub time: Option<i64>,
    /// Which value.
    pub variable: Variable,
    /// The value: the cell text for unreadable cells, the converted value for
    /// range, spike and stuck flags, a pointer to the kept row for duplicates.
    pub value: String,
    /// Why.
    pub reason: Reason,
}

/// What reading one export gave.
#[derive(Debug, Clone)]
pub struct FileRead {
    /// Data rows (not header, preamble or blank lines).
    pub rows_read: usize,
    /// Rows with an instant.
    pub rows: Vec<Row>,
    /// Flags raised while reading.
    pub flags: Vec<Flag>,
    /// Sensor ids of the file, indexed by `Row::sensor`.
    pub sensors: Vec<String>,
    /// First line with each sensor id (same index).
    pub first_line: Vec<u32>,
}

/// Decode header text: UTF-8 (a byte-order mark is dropped), else Latin-1,
/// the usual encoding of older logger software.
fn decode(b: &[u8]) -> String {
    let b = b.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(b);
    match std::str::from_utf8(b) {
        Ok(s) => s.trim().to_string(),
        Err(_) => b.iter().map(|&c| c as char).collect::<String>().trim().to_string(),
    }
}

/// An offset from UTC written in a header cell (`Date Time, GMT+01:00`,
/// `Time (UTC-05:00)`, `Time (UTC)`): the cell's name without it, and the
/// offset in seconds east of UTC; `None` when the cell names no offset.
pub fn header_offset(cell: &str) -> Option<(&str, i32)> {
    let p = cell.find("GMT").or_else(|| cell.find("UTC"))?;
    let rest = cell[p + 3..].trim_end_matches([')', ']', ' ']);
    let secs = if rest.trim().is_empty() { 0 } else { super::study::fixed_offset(rest)? };
    let name = cell[..p].trim_end_matches([' ', ',', '(', '[', '-', ';']);
    Some((name, secs))
}

/// Read a number cell; `decimal_comma` reads `,` (and still `.`) as the
/// decimal mark. Non-finite results are `None`.
///
/// Plain decimals with at most 15 digits (`-12.5`, `0.25`, `1013`, `,5`)
/// take an exact fast path: the digits form an integer `m < 10^15 < 2^53`
/// and the `f` digits after the mark give `x = m / 10^f`, one IEEE division
/// of two exactly representable numbers (`10^f` is exact for `f <= 22`),
/// hence the correctly rounded value of the decimal: the fast path of
/// W. D. Clinger, "How to read floating point numbers accurately", PLDI 1990.
/// Rust's `str::parse::<f64>` is correctly rounded too, so both give the same
/// bits; every other cell (exponents, more digits, words) goes to it.
fn parse_number(cell: &[u8], decimal_comma: bool) -> Option<f64> {
    if let Some(x) = parse_plain_decimal(cell, decimal_comma) {
        return Some(x);
    }
    let mut buf = [0u8; 48];
    let s: &[u8] = if decimal_comma {
        if cell.len() > buf.len() {
            return None;
        }
        for (o, &c) in buf.iter_mut().zip(cell) {
            *o = if c == b',' { b'.' } else { c };
        }
        &buf[..cell.len()]
    } else {
        cell
    };
    let x: f64 = std::str::from_utf8(s).ok()?.parse().ok()?;
    x.is_finite().then_some(x)
}

/// Powers of ten that are exact in binary64 (10^0 ..= 10^15).
const POW10: [f64; 16] =
    [1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15];

/// The fast path of [`parse_number`]: an optional sign, digits with at most
/// one decimal mark, at least one and at most 15 digits; else `None`.
#[inline]
fn parse_plain_decimal(cell: &[u8], decimal_comma: bool) -> Option<f64> {
    let (neg, digits) = match cell.first()? {
        b'-' => (true, &cell[1..]),
        b'+' => (false, &cell[1..]),
        _ => (false, cell),
    };
    if digits.len() > 16 {
        return None;
    }
    let mut m: u64 = 0;
    let mut nd = 0usize;
    let mut mark: Option<usize> = None;
    for &c in digits {
        match c {
            b'0'..=b'9' => {
                m = m * 10 + u64::from(c - b'0');
                nd += 1;
            }
            b'.' if mark.is_none() => mark = Some(nd),
            b',' if decimal_comma && mark.is_none() => mark = Some(nd),
            _ => return None,
        }
    }
    if nd == 0 || nd > 15 {
        return None;
    }
    let x = m as f64 / POW10[nd - mark.unwrap_or(nd)];
    Some(if neg { -x } else { x })
}

fn trim(b: &[u8]) -> &[u8] {
    b.trim_ascii()
}

fn is_missing(b: &[u8]) -> bool {
    b.is_empty()
        || b.eq_ignore_ascii_case(b"na")
        || b.eq_ignore_ascii_case(b"nan")
        || b.eq_ignore_ascii_case(b"null")
}

struct Failures {
    count: usize,
    tried: usize,
    first: Option<(u32, String)>,
}

impl Failures {
    fn new() -> Failures {
        Failures { count: 0, tried: 0, first: None }
    }
    fn fail(&mut self, line: u32, v: &[u8]) {
        self.count += 1;
        if self.first.is_none() {
            self.first = Some((line, String::from_utf8_lossy(v).into_owned()));
        }
    }
    fn most(&self) -> bool {
        self.tried > 0 && self.count * 2 > self.tried
    }
}

/// Read one export of format `fmt`. `file` is its index in the run.
pub fn read_file(fmt: &LogFormat, path: &Path, file: u32) -> Result<FileRead> {
    read_file_with(fmt, path, file, &mut Vec::new())
}

/// [`read_file`] with a byte buffer to read the file into (its contents are
/// replaced). Reusing one buffer for several files saves allocating and
/// zeroing fresh memory for each. A workbook (see [`super::workbook`]) is
/// read through its sheet's text; messages name it `book.xlsx [sheet S]`.
pub fn read_file_with(fmt: &LogFormat, path: &Path, file: u32, buf: &mut Vec<u8>) -> Result<FileRead> {
    use std::io::Read;
    if super::workbook::is_workbook(path) {
        let (wfmt, sheet) = super::workbook::for_block(fmt, path)?;
        return read_bytes(&wfmt, &sheet.shown, file, &sheet.text);
    }
    let err = |source| IoError::Read { path: path.to_path_buf(), reason: source };
    let mut f = std::fs::File::open(path).map_err(err)?;
    buf.clear();
    if let Ok(m) = f.metadata() {
        buf.reserve(m.len() as usize);
    }
    f.read_to_end(buf).map_err(err)?;
    read_bytes(fmt, path, file, buf)
}

/// How the records of an export are split into cells.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Splitter {
    /// Lines split at `\n` and cells at the delimiter byte (the common case;
    /// see [`plain_text`]).
    Plain,
    /// The csv crate (quoted fields, stray carriage returns).
    Csv,
}

/// Whether the text after the preamble can be split without a CSV state
/// machine: it has no quote character and every `\r` ends a line (`\r\n`).
/// Then a record is a physical line and a cell is the text between two
/// delimiters, exactly as the csv crate would split it, so both splitters give
/// the same rows, flags and lines. Cost O(n) with a vectorised byte search.
pub fn plain_text(body: &[u8]) -> bool {
    memchr::memchr(b'"', body).is_none()
        && memchr::memchr_iter(b'\r', body).all(|i| body.get(i + 1) == Some(&b'\n'))
}

/// [`read_file`] on bytes already in memory.
pub fn read_bytes(fmt: &LogFormat, path: &Path, file: u32, bytes: &[u8]) -> Result<FileRead> {
    if let Some(layout) = fmt.layout {
        let resolved = super::layouts::resolve(fmt, layout, path, bytes)?;
        return read_bytes(&resolved, path, file, bytes);
    }
    let body = &bytes[preamble_end(fmt, path, bytes)?..];
    let plain = !matches!(fmt.delimiter, b'"' | b'\n' | b'\r') && plain_text(body);
    match plain {
        true => read_plain(fmt, path, file, body),
        false => read_csv(fmt, path, file, body),
    }
}

/// [`read_bytes`] with a chosen splitter. [`Splitter::Plain`] on text that is
/// not [`plain_text`] splits quoted cells wrongly; it is public so that tests
/// and benchmarks can compare the two splitters on the same text.
pub fn read_bytes_with(
    fmt: &LogFormat,
    path: &Path,
    file: u32,
    bytes: &[u8],
    splitter: Splitter,
) -> Result<FileRead> {
    let start = preamble_end(fmt, path, bytes)?;
    let body = &bytes[start..];
    match splitter {
        Splitter::Plain => read_plain(fmt, path, file, body),
        Splitter::Csv => read_csv(fmt, path, file, body),
    }
}

/// Byte offset after the `skip_lines` physical lines of the preamble.
fn preamble_end(fmt: &LogFormat, path: &Path, bytes: &[u8]) -> Result<usize> {
    let mut start = 0;
    for _ in 0..fmt.skip_lines {
        match memchr::memchr(b'\n', &bytes[start..]) {
            Some(p) => start += p + 1,
            None => {
                return Err(IoError::Empty {
                    path: path.to_path_buf(),
                    hint: Some(format!(
                        "the file has fewer lines than `skip_lines = {}` of logs[{}]",
                        fmt.skip_lines, fmt.block
                    )),
                });
            }
        }
    }
    Ok(start)
}

fn empty_file(path: &Path) -> IoError {
    IoError::Empty {
        path: path.to_path_buf(),
        hint: Some("the file is empty; it needs a header line and data rows".into()),
    }
}

/// The cells of one record, whichever splitter produced them.
trait Cells {
    fn count(&self) -> usize;
    fn cell(&self, i: usize) -> &[u8];
    fn all_blank(&self) -> bool {
        (0..self.count()).all(|i| trim(self.cell(i)).is_empty())
    }
}

impl Cells for csv::ByteRecord {
    fn count(&self) -> usize {
        self.len()
    }
    fn cell(&self, i: usize) -> &[u8] {
        self.get(i).unwrap_or_default()
    }
}

/// One line of plain text: cell `i` is `text[bounds[i]..bounds[i + 1] - 1]`
/// (each bound is one past a delimiter; the last is one past the cell end).
struct Split<'a> {
    text: &'a [u8],
    bounds: &'a [usize],
}

impl Cells for Split<'_> {
    fn count(&self) -> usize {
        self.bounds.len() - 1
    }
    #[inline]
    fn cell(&self, i: usize) -> &[u8] {
        &self.text[self.bounds[i]..self.bounds[i + 1] - 1]
    }
}

/// The csv-crate splitter: quoted cells (with delimiters, quotes or line
/// breaks inside), lone `\r` line ends. Physical lines come from
/// [`LineCounter`], which counts the `\n` bytes before each record.
fn read_csv(fmt: &LogFormat, path: &Path, file: u32, body: &[u8]) -> Result<FileRead> {
    let skip = fmt.skip_lines as u64;
    let mut rdr = csv::ReaderBuilder::new()
        .delimiter(fmt.delimiter)
        .has_headers(false)
        .flexible(true)
        .from_reader(body);
    let mut rec = csv::ByteRecord::new();
    let mut lines = LineCounter::new(body);
    let csv_err = |e: csv::Error| IoError::Table {
        path: path.to_path_buf(),
        message: match e.position() {
            Some(p) => format!("line {}: {}", p.line() + skip, e),
            None => e.to_string(),
        },
    };
    // Header: the first non-blank record.
    let mut parser = loop {
        if !rdr.read_byte_record(&mut rec).map_err(csv_err)? {
            return Err(empty_file(path));
        }
        if rec.all_blank() {
            continue;
        }
        let header_line = lines.line_of(&rec) as usize + fmt.skip_lines;
        break Parser::new(fmt, path, file, &rec, header_line, body.len())?;
    };
    while rdr.read_byte_record(&mut rec).map_err(csv_err)? {
        let line = (lines.line_of(&rec) + skip) as u32;
        parser.record(&rec, line);
    }
    parser.finish()
}

/// The plain splitter (see [`plain_text`]): one pass of a vectorised search
/// for the delimiter and `\n` over the whole text gives every cell bound and
/// every line end, so physical lines are counted as they pass. A `\r` before
/// `\n` ends the line; a UTF-8 byte-order mark at the start is skipped (as
/// the csv crate does); a last line without `\n` is a record.
fn read_plain(fmt: &LogFormat, path: &Path, file: u32, body: &[u8]) -> Result<FileRead> {
    let text = body.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(body);
    let mut records = PlainRecords::new(text, fmt.delimiter, fmt.skip_lines as u32 + 1);
    let mut bounds: Vec<usize> = Vec::with_capacity(16);
    // Header: the first non-blank line.
    let mut parser = loop {
        let Some(line) = records.next_record(&mut bounds) else {
            return Err(empty_file(path));
        };
        let cells = Split { text, bounds: &bounds };
        if !cells.all_blank() {
            break Parser::new(fmt, path, file, &cells, line as usize, text.len())?;
        }
    };
    while let Some(line) = records.next_record(&mut bounds) {
        parser.record(&Split { text, bounds: &bounds }, line);
    }
    parser.finish()
}

/// The lines of plain text as records (see [`read_plain`]).
struct PlainRecords<'h> {
    text: &'h [u8],
    hits: memchr::Memchr2<'h>,
    /// Start of the next line; past the end when done.
    start: usize,
    /// Physical line of the next line.
    line: u32,
}

impl<'h> PlainRecords<'h> {
    fn new(text: &'h [u8], delimiter: u8, first_line: u32) -> PlainRecords<'h> {
        PlainRecords { text, hits: memchr::memchr2_iter(delimiter, b'\n', text), start: 0, line: first_line }
    }

    /// Fill `bounds` (see [`Split`]) with the next line and return its
    /// physical line; `None` at the end. Every line is returned, blank ones
    /// too (the parser skips them), and a last line without `\n` when it has
    /// any byte.
    #[inline]
    fn next_record(&mut self, bounds: &mut Vec<usize>) -> Option<u32> {
        if self.start > self.text.len() {
            return None;
        }
        bounds.clear();
        bounds.push(self.start);
        let line = self.line;
        for i in self.hits.by_ref() {
            if self.text[i] == b'\n' {
                self.close(bounds, i);
                self.start = i + 1;
                self.line += 1;
                return Some(line);
            }
            bounds.push(i + 1);
        }
        let end = self.text.len();
        let any = end > self.start;
        self.start = end + 1;
        if any {
            self.close(bounds, end);
            return Some(line);
        }
        None
    }

    /// End the last cell at `end`, before a `\r` that ends the line.
    #[inline]
    fn close(&self, bounds: &mut Vec<usize>, end: usize) {
        let last = bounds[bounds.len() - 1];
        let end = if end > last && self.text[end - 1] == b'\r' { end - 1 } else { end };
        bounds.push(end + 1);
    }
}

/// Row processing shared by both splitters: columns, sensor ids, time stamps,
/// the fall-back hour, values, flags and the failure counts.
struct Parser<'a> {
    fmt: &'a LogFormat,
    path: &'a Path,
    file: u32,
    header_line: usize,
    ncols: usize,
    /// One past the last column the block uses: a row with fewer fields than
    /// the header is still complete when it has at least this many.
    need: usize,
    /// Non-data records still to pass after the header.
    skip_after: usize,
    /// The columns the block uses, by index, for messages.
    used: Vec<(usize, String)>,
    time_col: usize,
    /// The time-of-day column when date and time are apart.
    clock_col: Option<usize>,
    /// The date and time cells joined (reused buffer).
    joined: Vec<u8>,
    /// A fixed offset of local times (ms east of UTC), when the zone is one.
    fixed_offset: Option<i64>,
    sensor_col: Option<usize>,
    stem_sensor: Option<u32>,
    chan_cols: [Option<(usize, Conversion)>; 3],
    out: FileRead,
    last_utc: Vec<Option<i64>>,
    last_sensor: Option<(Vec<u8>, u32)>,
    clock: LocalClock,
    /// The last time cell's date and hour (see [`StampMemo`]).
    memo: StampMemo,
    time_fail: Failures,
    value_fail: [Failures; 3],
    /// Rows in a fall-back hour read as the first pass, per sensor, until
    /// the second pass confirms it: (row index, line, time cell). A first
    /// pass that is never followed by a second one cannot be placed and is
    /// flagged.
    pending: std::collections::BTreeMap<u32, Vec<(usize, u32, Vec<u8>)>>,
    drop_rows: Vec<usize>,
}

impl<'a> Parser<'a> {
    /// Look up the configured columns in the header record.
    fn new<C: Cells>(
        fmt: &'a LogFormat,
        path: &'a Path,
        file: u32,
        header: &C,
        header_line: usize,
        text_len: usize,
    ) -> Result<Parser<'a>> {
        let headers: Vec<String> = (0..header.count()).map(|i| decode(header.cell(i))).collect();
        let column = |name: &str| -> Result<usize> {
            headers.iter().position(|h| h == name).ok_or_else(|| {
                if headers.len() == 1 {
                    for d in [b';', b',', b'\t', b'|'] {
                        if d != fmt.delimiter && headers[0].contains(d as char) {
                            return IoError::Table {
                                path: path.to_path_buf(),
                                message: format!(
                                    "line {header_line}: the header is one field `{}`; the delimiter of logs[{}] is {:?} but the file looks {:?}-delimited (set `delimiter = \"{}\"`)",
                                    headers[0], fmt.block, fmt.delimiter as char, d as char,
                                    if d == b'\t' { "tab".to_string() } else { (d as char).to_string() }
                                ),
                            };
                        }
                    }
                }
                IoError::MissingColumn {
                    path: path.to_path_buf(),
                    line: header_line,
                    column: name.to_string(),
                    suggestion: closest(name, headers.iter().map(String::as_str)),
                    available: headers.clone(),
                }
            })
        };
        // A time column may carry the zone's offset in its header
        // (`Date Time, GMT+01:00`): it is found by its name without it.
        let time_column = |name: &str| -> Result<(usize, Option<i32>)> {
            if let Some(i) = headers.iter().position(|h| h == name) {
                return Ok((i, header_offset(&headers[i]).map(|o| o.1)));
            }
            match headers.iter().position(|h| header_offset(h).is_some_and(|(n, _)| n == name)) {
                Some(i) => Ok((i, header_offset(&headers[i]).map(|o| o.1))),
                None => column(name).map(|i| (i, None)),
            }
        };
        let (time_col, offset_a) = time_column(&fmt.time_column)?;
        let (clock_col, offset_b) = match &fmt.clock_column {
            Some(c) => {
                let (i, o) = time_column(c)?;
                (Some(i), o)
            }
            None => (None, None),
        };
        let in_header = offset_a.or(offset_b);
        let fixed_offset = match (fmt.zone, fmt.zone_given, in_header) {
            (LogZone::InHeader, _, Some(o)) | (_, false, Some(o)) => Some(i64::from(o) * 1000),
            (LogZone::InHeader, _, None) => {
                return Err(IoError::Table {
                    path: path.to_path_buf(),
                    message: format!(
                        "line {header_line}: logs[{}] takes its offset from the header (`timezone = \"in_header\"`), but the time column's header `{}` names none (such as `GMT+01:00`); set `timezone` to a zone or an offset",
                        fmt.block, headers[time_col]
                    ),
                });
            }
            (LogZone::Fixed(s), _, _) => Some(i64::from(s) * 1000),
            (LogZone::Iana(_), _, _) => None,
        };
        let tz = match fmt.zone {
            LogZone::Iana(tz) => tz,
            _ => chrono_tz::UTC,
        };
        let sensor_col = match &fmt.sensor {
            SensorSource::Column(c) => Some(column(c)?),
            _ => None,
        };
        let mut chan_cols: [Option<(usize, Conversion)>; 3] = [None; 3];
        for ch in Channel::ALL {
            if let Some((name, conv)) = &fmt.channels[ch.index()] {
                chan_cols[ch.index()] = Some((column(name)?, *conv));
            }
        }
        let mut used: Vec<(usize, String)> = vec![(time_col, fmt.time_column.clone())];
        if let (Some(c), Some(name)) = (clock_col, &fmt.clock_column) {
            used.push((c, name.clone()));
        }
        if let (Some(c), SensorSource::Column(name)) = (sensor_col, &fmt.sensor) {
            used.push((c, name.clone()));
        }
        for ch in Channel::ALL {
            if let (Some((c, _)), Some((name, _))) = (chan_cols[ch.index()], &fmt.channels[ch.index()]) {
                used.push((c, name.clone()));
            }
        }
        used.sort();
        let need = used.last().map_or(1, |u| u.0 + 1);
        let mut out = FileRead {
            rows_read: 0,
            rows: Vec::with_capacity(text_len / 32),
            flags: Vec::new(),
            sensors: Vec::new(),
            first_line: Vec::new(),
        };
        let mut last_utc: Vec<Option<i64>> = Vec::new();
        let stem_sensor = match &fmt.sensor {
            SensorSource::FileStem | SensorSource::Fixed(_) | SensorSource::Layout => {
                let id = match &fmt.sensor {
                    SensorSource::Fixed(id) => id.clone(),
                    _ => path.file_stem().map(|s| s.to_string_lossy().into_owned()).unwrap_or_default(),
                };
                out.sensors.push(id);
                out.first_line.push(0);
                last_utc.push(None);
                Some(0u32)
            }
            SensorSource::Column(_) => None,
        };
        Ok(Parser {
            fmt,
            path,
            file,
            header_line,
            ncols: headers.len(),
            need,
            skip_after: fmt.after_header,
            used,
            time_col,
            clock_col,
            joined: Vec::new(),
            fixed_offset,
            sensor_col,
            stem_sensor,
            chan_cols,
            out,
            last_utc,
            last_sensor: None,
            clock: LocalClock::new(tz),
            memo: StampMemo::default(),
            time_fail: Failures::new(),
            value_fail: [Failures::new(), Failures::new(), Failures::new()],
            pending: Default::default(),
            drop_rows: Vec::new(),
        })
    }

    fn flag(
        &mut self,
        line: u32,
        sensor: u32,
        time: Option<i64>,
        variable: Variable,
        value: &[u8],
        reason: Reason,
    ) {
        self.out.flags.push(Flag {
            file: self.file,
            line,
            sensor,
            time,
            variable,
            value: String::from_utf8_lossy(value).into_owned(),
            reason,
        });
    }

    /// Flag and drop a first-pass run of the fall-back hour that was never
    /// confirmed by a second pass.
    fn unplaced(&mut self, sensor: u32, run: Vec<(usize, u32, Vec<u8>)>) {
        for (idx, line, cell) in run {
            self.flag(line, sensor, None, Variable::Time, &cell, Reason::AmbiguousTime);
            self.drop_rows.push(idx);
        }
    }

    /// The sensor index of a row, or `None` (flagged) for an empty id.
    #[inline]
    fn sensor<C: Cells>(&mut self, rec: &C, line: u32) -> Option<u32> {
        if let Some(s) = self.stem_sensor {
            return Some(s);
        }
        let c = self.sensor_col.unwrap_or_else(|| unreachable!("a sensor source is always set"));
        let id = trim(rec.cell(c));
        if id.is_empty() {
            self.flag(line, u32::MAX, None, Variable::Sensor, b"", Reason::MalformedRow);
            return None;
        }
        if let Some((b, s)) = &self.last_sensor
            && b.as_slice() == id
        {
            return Some(*s);
        }
        let name = decode(id);
        let s = match self.out.sensors.iter().position(|x| *x == name) {
            Some(s) => s as u32,
            None => {
                self.out.sensors.push(name);
                self.out.first_line.push(line);
                self.last_utc.push(None);
                (self.out.sensors.len() - 1) as u32
            }
        };
        self.last_sensor = Some((id.to_vec(), s));
        Some(s)
    }

    /// Whether a record whose field count differs from the header's is
    /// still a complete reading: fewer fields, but a cell for every column
    /// the block uses (loggers that fill a trailing column such as a serial
    /// number in the first row only); or more fields, the extra ones blank
    /// (a delimiter at the end of the line).
    fn complete<C: Cells>(&self, rec: &C) -> bool {
        let n = rec.count();
        match n.cmp(&self.ncols) {
            std::cmp::Ordering::Less => n >= self.need,
            std::cmp::Ordering::Equal => true,
            std::cmp::Ordering::Greater => (self.ncols..n).all(|i| trim(rec.cell(i)).is_empty()),
        }
    }

    /// The instant of a time cell of `sensor` at `line`, or `None` with the
    /// row flagged (unparsable, nonexistent or ambiguous local time).
    #[inline]
    fn instant(&mut self, tcell: &[u8], sensor: u32, line: u32) -> Option<i64> {
        self.time_fail.tried += 1;
        let utc = match self.fmt.time_format.parse_bytes_memo(tcell, self.fmt.decimal_comma, &mut self.memo) {
            None => {
                self.time_fail.fail(line, tcell);
                self.flag(line, sensor, None, Variable::Time, tcell, Reason::UnparsableTime);
                return None;
            }
            Some(Stamp::Utc(t)) => t,
            Some(Stamp::Local(l)) if self.fixed_offset.is_some() => l - self.fixed_offset.unwrap_or(0),
            Some(Stamp::Local(l)) => match self.clock.resolve(l) {
                Resolution::Single(t) => {
                    if !self.pending.is_empty()
                        && let Some(run) = self.pending.remove(&sensor)
                    {
                        self.unplaced(sensor, run);
                    }
                    t
                }
                Resolution::Nonexistent => {
                    self.flag(line, sensor, None, Variable::Time, tcell, Reason::NonexistentTime);
                    return None;
                }
                Resolution::Ambiguous(early, late) => match self.last_utc[sensor as usize] {
                    Some(p) if early > p => {
                        let idx = self.out.rows.len();
                        self.pending.entry(sensor).or_default().push((idx, line, tcell.to_vec()));
                        early
                    }
                    Some(p) if early < p && late >= p => {
                        self.pending.remove(&sensor);
                        late
                    }
                    _ => {
                        self.flag(line, sensor, None, Variable::Time, tcell, Reason::AmbiguousTime);
                        return None;
                    }
                },
            },
        };
        Some(utc)
    }

    /// One data record at physical line `line`.
    #[inline]
    fn record<C: Cells>(&mut self, rec: &C, line: u32) {
        let n = rec.count();
        if n <= 1 && rec.all_blank() {
            return;
        }
        if self.skip_after > 0 {
            self.skip_after -= 1;
            return;
        }
        self.out.rows_read += 1;
        if n != self.ncols && !self.complete(rec) {
            let msg = match self.used.iter().find(|u| u.0 >= n) {
                Some((_, name)) if n < self.ncols => {
                    format!("{n} fields where the header has {}: no cell for column `{name}`", self.ncols)
                }
                _ => format!("{n} fields where the header has {}", self.ncols),
            };
            self.flag(line, u32::MAX, None, Variable::Row, msg.as_bytes(), Reason::MalformedRow);
            return;
        }
        let Some(sensor) = self.sensor(rec, line) else { return };
        if self.out.first_line[sensor as usize] == 0 {
            self.out.first_line[sensor as usize] = line;
        }
        // Time: the time cell, or the date and time cells joined by a space.
        let mut joined = std::mem::take(&mut self.joined);
        let tcell = match self.clock_col {
            Some(c) => {
                joined.clear();
                joined.extend_from_slice(trim(rec.cell(self.time_col)));
                joined.push(b' ');
                joined.extend_from_slice(trim(rec.cell(c)));
                &joined[..]
            }
            None => trim(rec.cell(self.time_col)),
        };
        let utc = self.instant(tcell, sensor, line);
        self.joined = joined;
        let Some(utc) = utc else { return };
        self.last_utc[sensor as usize] = Some(utc);
        // Values.
        let mut values = [f64::NAN; 3];
        let mut flagged = false;
        #[allow(clippy::needless_range_loop)] // k indexes four parallel arrays
        for k in 0..3 {
            let Some((c, conv)) = self.chan_cols[k] else { continue };
            let cell = trim(rec.cell(c));
            if is_missing(cell) {
                continue;
            }
            self.value_fail[k].tried += 1;
            match parse_number(cell, self.fmt.decimal_comma) {
                Some(x) => values[k] = conv.apply(x),
                None => {
                    self.value_fail[k].fail(line, cell);
                    flagged = true;
                    let var = Variable::Channel(Channel::ALL[k]);
                    self.flag(line, sensor, Some(utc), var, cell, Reason::UnparsableValue);
                }
            }
        }
        self.out.rows.push(Row { time: utc, values, line, sensor, file: self.file, flagged });
    }

    /// Settle the fall-back runs still open, then check the failure counts.
    fn finish(mut self) -> Result<FileRead> {
        for (sensor, run) in std::mem::take(&mut self.pending) {
            self.unplaced(sensor, run);
        }
        let (fmt, path) = (self.fmt, self.path);
        let mut out = self.out;
        if !self.drop_rows.is_empty() {
            let drop: std::collections::HashSet<usize> = self.drop_rows.into_iter().collect();
            out.rows = std::mem::take(&mut out.rows)
                .into_iter()
                .enumerate()
                .filter(|(i, _)| !drop.contains(i))
                .map(|(_, r)| r)
                .collect();
        }
        if out.rows_read == 0 {
            return Err(IoError::Empty {
                path: path.to_path_buf(),
                hint: Some(format!("only a header (line {}) was found", self.header_line)),
            });
        }
        let time_fail = &self.time_fail;
        if time_fail.most() {
            let (line, value) = time_fail.first.clone().unwrap_or_default();
            return Err(IoError::BadValue {
                path: path.to_path_buf(),
                line: line as usize,
                column: match &fmt.clock_column {
                    Some(c) => format!("{} + {c}", fmt.time_column),
                    None => fmt.time_column.clone(),
                },
                value,
                message: format!(
                    "{} of {} time stamps do not match the pattern `{}` of logs[{}]",
                    time_fail.count,
                    time_fail.tried,
                    fmt.time_format.describe(),
                    fmt.block
                ),
                hint: Some(
                    "fix `time_format`: chrono strftime fields such as %Y-%m-%d %H:%M:%S, %d.%m.%Y %H:%M, %m/%d/%Y %I:%M %p; or \"rfc3339\" / \"unix\"".into(),
                ),
            });
        }
        for ch in Channel::ALL {
            let f = &self.value_fail[ch.index()];
            if f.most() {
                let (line, value) = f.first.clone().unwrap_or_default();
                let name = fmt.channels[ch.index()].as_ref().map(|c| c.0.clone()).unwrap_or_default();
                return Err(IoError::BadValue {
                    path: path.to_path_buf(),
                    line: line as usize,
                    column: name,
                    value,
                    message: format!("{} of {} {ch} values are not numbers", f.count, f.tried),
                    hint: Some(if fmt.decimal_comma {
                        "logs[..].decimal is \",\"; if the file writes 21.5, set decimal = \".\"".into()
                    } else {
                        "if the file writes 21,5 set `decimal = \",\"` (and a `;` delimiter)".into()
                    }),
                });
            }
        }
        Ok(out)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn fmt(
        delim: u8,
        comma: bool,
        pattern: &str,
        tz: chrono_tz::Tz,
        sensor: SensorSource,
        skip: usize,
    ) -> LogFormat {
        LogFormat {
            block: 1,
            delimiter: delim,
            decimal_comma: comma,
            time_column: "time".into(),
            clock_column: None,
            time_format: TimeFormat::compile(pattern).unwrap(),
            zone: LogZone::Iana(tz),
            zone_given: true,
            sensor,
            skip_lines: skip,
            after_header: 0,
            layout: None,
            sheet: None,
            channels: [
                Some(("temp".into(), Conversion::of(Channel::Temperature, "degF").unwrap())),
                Some(("rh".into(), Conversion::of(Channel::Humidity, "percent").unwrap())),
                None,
            ],
            files: vec![],
        }
    }

    fn utc(s: &str) -> i64 {
        chrono::NaiveDateTime::parse_from_str(s, "%Y-%m-%d %H:%M").unwrap().and_utc().timestamp_millis()
    }

    #[test]
    fn semicolons_decimal_commas_fahrenheit_and_preamble() {
        let f = fmt(b';', true, "%d.%m.%Y %H:%M", chrono_tz::UTC, SensorSource::FileStem, 2);
        let text = "Logger export v2\nSerial: 123\ntime;temp;rh\n01.03.2026 00:00;68,0;55,5\n\n01.03.2026 00:05;50;NA\n";
        let r = read_bytes(&f, Path::new("dir/S01.csv"), 0, text.as_bytes()).unwrap();
        assert_eq!(r.sensors, vec!["S01"]);
        assert_eq!(r.rows_read, 2);
        assert_eq!(r.rows[0].line, 4);
        assert_eq!(r.rows[1].line, 6);
        approx::assert_abs_diff_eq!(r.rows[0].values[0], 20.0, epsilon = 1e-12);
        approx::assert_abs_diff_eq!(r.rows[0].values[1], 55.5, epsilon = 1e-12);
        approx::assert_abs_diff_eq!(r.rows[1].values[0], 10.0, epsilon = 1e-12);
        assert!(r.rows[1].values[1].is_nan());
        assert_eq!(r.rows[1].time, utc("2026-03-01 00:05"));
    }

    #[test]
    fn offsets_in_header_cells() {
        assert_eq!(header_offset("Date Time, GMT+01:00"), Some(("Date Time", 3600)));
        assert_eq!(header_offset("Time (UTC-05:00)"), Some(("Time", -18000)));
        assert_eq!(header_offset("Time (UTC)"), Some(("Time", 0)));
        assert_eq!(header_offset("Timestamp"), None);
        assert_eq!(header_offset("GMT offset note"), None);
    }

    #[test]
    fn single_bad_cells_are_flagged_with_line() {
        let f = fmt(b',', false, "%Y-%m-%d %H:%M", chrono_tz::UTC, SensorSource::Column("id".into()), 0);
        let text = "id,time,temp,rh\nA,2026-03-01 00:00,60,50\nA,2026-03-01 00:05,6O,50\nA,yesterday,60,50\nA,2026-03-01 00:15,61\n,2026-03-01 00:20,60,50\nB,2026-03-01 00:20,60,50\n";
        let r = read_bytes(&f, Path::new("x.csv"), 3, text.as_bytes()).unwrap();
        assert_eq!(r.rows_read, 6);
        let got: Vec<(u32, Reason, &str)> =
            r.flags.iter().map(|f| (f.line, f.reason, f.variable.name())).collect();
        assert_eq!(
            got,
            vec![
                (3, Reason::UnparsableValue, "temperature_c"),
                (4, Reason::UnparsableTime, "time"),
                (5, Reason::MalformedRow, "row"),
                (6, Reason::MalformedRow, "sensor"),
            ]
        );
        assert_eq!(r.flags[0].value, "6O");
        assert_eq!(r.sensors, vec!["A", "B"]);
        assert_eq!(r.rows.len(), 3);
        assert!(r.rows[1].flagged && r.rows[1].values[0].is_nan() && r.rows[1].values[1] == 50.0);
    }

    #[test]
    fn pattern_failing_on_most_rows_is_an_error_with_value_and_pattern() {
        let f = fmt(b',', false, "%Y-%m-%d %H:%M", chrono_tz::UTC, SensorSource::FileStem, 0);
        let text = "time,temp,rh\n01/03/2026 00:00,60,50\n01/03/2026 00:05,60,50\n";
        let e = read_bytes(&f, Path::new("x.csv"), 0, text.as_bytes()).unwrap_err().to_string();
        assert!(
            e.contains("x.csv:2") && e.contains("01/03/2026 00:00") && e.contains("%Y-%m-%d %H:%M"),
            "{e}"
        );
    }

    #[test]
    fn decimal_comma_mismatch_and_missing_column_and_wrong_delimiter() {
        let f = fmt(b';', false, "%Y-%m-%d %H:%M", chrono_tz::UTC, SensorSource::FileStem, 0);
        let text = "time;temp;rh\n2026-03-01 00:00;60,5;50,1\n";
        let e = read_bytes(&f, Path::new("x.csv"), 0, text.as_bytes()).unwrap_err().to_string();
        assert!(e.contains("x.csv:2") && e.contains("60,5") && e.contains("decimal"), "{e}");
        let e = read_bytes(&f, Path::new("x.csv"), 0, b"time;tmp;rh\n2026-03-01 00:00;1;2\n")
            .unwrap_err()
            .to_string();
        assert!(e.contains("x.csv:1") && e.contains("did you mean `tmp`"), "{e}");
        let e = read_bytes(&f, Path::new("x.csv"), 0, b"time,temp,rh\n2026-03-01 00:00,1,2\n")
            .unwrap_err()
            .to_string();
        assert!(e.contains("delimiter"), "{e}");
        assert!(matches!(read_bytes(&f, Path::new("x.csv"), 0, b""), Err(IoError::Empty { .. })));
        assert!(matches!(
            read_bytes(&f, Path::new("x.csv"), 0, b"time;temp;rh\n"),
            Err(IoError::Empty { .. })
        ));
    }

    #[test]
    fn latin1_header_and_bom_are_decoded() {
        let mut f = fmt(b';', false, "%Y-%m-%d %H:%M", chrono_tz::UTC, SensorSource::FileStem, 0);
        f.channels[0] = Some(("Temp (°C)".into(), Conversion::of(Channel::Temperature, "degC").unwrap()));
        // A UTF-8 byte-order mark before a header whose degree sign is Latin-1:
        // each cell is decoded on its own.
        let text = b"\xEF\xBB\xBFtime;Temp (\xB0C);rh\n2026-03-01 00:00;21.5;50\n";
        let r = read_bytes(&f, Path::new("x.csv"), 0, text).unwrap();
        assert_eq!(r.rows[0].values[0], 21.5);
        let text = "time;Temp (°C);rh\n2026-03-01 00:00;21.5;50\n";
        let r = read_bytes(&f, Path::new("x.csv"), 0, text.as_bytes()).unwrap();
        assert_eq!(r.rows[0].values[0], 21.5);
    }

    /// Fall-back in Europe/Amsterdam on 2026-10-25: 02:00–02:59 local happens
    /// twice (CEST, UTC+2, then CET, UTC+1; IANA tz database via chrono-tz).
    /// A 20-minute logger writes 01:40, 02:00, 02:20, 02:40, 02:00, 02:20,
    /// 02:40, 03:00; order resolves every row.
    #[test]
    fn fall_back_hour_resolved_by_order() {
        let f = fmt(b',', false, "%Y-%m-%d %H:%M", chrono_tz::Europe::Amsterdam, SensorSource::FileStem, 0);
        let mut text = String::from("time,temp,rh\n");
        for t in ["01:40", "02:00", "02:20", "02:40", "02:00", "02:20", "02:40", "03:00"] {
            text.push_str(&format!("2026-10-25 {t},60,50\n"));
        }
        let r = read_bytes(&f, Path::new("x.csv"), 0, text.as_bytes()).unwrap();
        assert!(r.flags.is_empty(), "{:?}", r.flags);
        let got: Vec<i64> = r.rows.iter().map(|x| x.time).collect();
        let want: Vec<i64> = ["23:40", "00:00", "00:20", "00:40", "01:00", "01:20", "01:40", "02:00"]
            .iter()
            .enumerate()
            .map(|(i, t)| utc(&format!("2026-10-{} {t}", if i == 0 { 24 } else { 25 })))
            .collect();
        assert_eq!(got, want);
    }

    #[test]
    fn ambiguous_first_row_and_spring_gap_are_flagged() {
        let f = fmt(b',', false, "%Y-%m-%d %H:%M", chrono_tz::America::Toronto, SensorSource::FileStem, 0);
        let text = "time,temp,rh\n2026-11-01 01:30,60,50\n2026-03-08 02:30,60,50\n2026-03-08 03:00,60,50\n";
        let r = read_bytes(&f, Path::new("x.csv"), 0, text.as_bytes()).unwrap();
        let reasons: Vec<Reason> = r.flags.iter().map(|f| f.reason).collect();
        assert_eq!(reasons, vec![Reason::AmbiguousTime, Reason::NonexistentTime]);
        assert_eq!(r.rows.len(), 1);
        assert_eq!(r.rows[0].time, utc("2026-03-08 07:00"));
    }

    /// Everything a read gives, as text (NaN prints as NaN, so missing values
    /// compare equal), or the error message.
    fn outcome(r: Result<FileRead>) -> String {
        match r {
            Ok(r) => format!(
                "read {} sensors {:?} first {:?}\nrows {:?}\nflags {:?}",
                r.rows_read, r.sensors, r.first_line, r.rows, r.flags
            ),
            Err(e) => format!("error: {e}"),
        }
    }

    fn both(f: &LogFormat, name: &str, text: &[u8]) -> (String, String) {
        let p = Path::new(name);
        (
            outcome(read_bytes_with(f, p, 2, text, Splitter::Plain)),
            outcome(read_bytes_with(f, p, 2, text, Splitter::Csv)),
        )
    }

    /// The plain splitter and the csv crate give the same rows, flags and
    /// lines on the same content: CRLF, blank and whitespace-only lines, a
    /// preamble, a byte-order mark, a last line without `\n`, a file ending
    /// in a partial row, decimal commas with semicolons, bad cells.
    #[test]
    fn plain_splitter_agrees_with_csv_crate() {
        let comma = fmt(b',', false, "%Y-%m-%d %H:%M", chrono_tz::UTC, SensorSource::Column("id".into()), 0);
        let semi = fmt(b';', true, "%d.%m.%Y %H:%M", chrono_tz::UTC, SensorSource::FileStem, 2);
        let cases: Vec<(&LogFormat, &[u8])> = vec![
            (&comma, b"id,time,temp,rh\r\nA,2026-03-01 00:00,60,50\r\n\r\nA,2026-03-01 00:05,61,51\r\n"),
            (&comma, b"\n\nid,time,temp,rh\n  \n,,,\nA,2026-03-01 00:00,60,50\nA,2026-03-01 00:05,6O,\nB,2026-03-01 00:05"),
            (&comma, b"id,time,temp,rh\nA,2026-03-01 00:00,60,50\nA,2026-03-01 00:05,61,51"),
            (&comma, b"id,time,temp,rh\nA,2026-03-01 00:00,60,50\nA,2026-03-01 00:05,61,"),
            (&comma, b"id,time,temp,rh\nA,2026-03-01 00:00,60,50\nA,2026-03-01 00:05,61,51,\n"),
            (&comma, b"\xEF\xBB\xBFid,time,temp,rh\nA , 2026-03-01 00:00 , 60 ,NA\n"),
            (&comma, b"\xEF\xBB\xBF\nid,time,temp,rh\nA,2026-03-01 00:00,60,50\n"),
            (&comma, b"id,time,temp,rh\n"),
            (&comma, b""),
            (&comma, b"id;time;temp;rh\nA;2026-03-01 00:00;60;50\n"),
            (&comma, b"id,time,tmp,rh\nA,2026-03-01 00:00,60,50\n"),
            (&comma, b"id,time,temp,rh\nA,01/03/2026,60,50\nA,02/03/2026,60,50\n"),
            (&semi, b"Logger export v2\r\nSerial: 123\r\ntime;temp;rh\r\n01.03.2026 00:00;68,0;55,5\r\n\r\n01.03.2026 00:05;50;NA\r\n01.03.2026 00:10;5,0"),
            (&semi, b"Logger \"v2\"\nSerial\ntime;temp;rh\n01.03.2026 00:00;68,0;55,5\n"),
            (&semi, b"only one line"),
            (&semi, b"a\nb\ntime;Temp (\xB0C);rh\n01.03.2026 00:00;68,0;55,5\n"),
        ];
        for (f, text) in cases {
            let (plain, csv) = both(f, "dir/S01.csv", text);
            assert_eq!(plain, csv, "{}", String::from_utf8_lossy(text));
        }
    }

    /// The fall-back hour is resolved the same way by both splitters.
    #[test]
    fn plain_splitter_agrees_on_the_fall_back_hour() {
        let f = fmt(
            b',',
            false,
            "%Y-%m-%d %H:%M",
            chrono_tz::Europe::Amsterdam,
            SensorSource::Column("id".into()),
            0,
        );
        let mut text = String::from("id,time,temp,rh\r\n");
        for (id, t) in [
            ("A", "01:40"),
            ("A", "02:00"),
            ("B", "02:20"),
            ("A", "02:40"),
            ("A", "02:00"),
            ("B", "03:00"),
            ("A", "03:00"),
        ] {
            text.push_str(&format!("{id},2026-10-25 {t},60,50\r\n"));
        }
        let (plain, csv) = both(&f, "x.csv", text.as_bytes());
        assert_eq!(plain, csv);
        assert!(plain.contains("AmbiguousTime"), "{plain}");
    }

    /// A quoted export reads like the same content without quotes: same rows,
    /// flags and lines (the quoted one goes through the csv crate).
    #[test]
    fn quoted_and_unquoted_exports_read_alike() {
        let f = fmt(b';', true, "%d.%m.%Y %H:%M", chrono_tz::UTC, SensorSource::Column("id".into()), 1);
        let plain = "Export\nid;time;temp;rh\nS1;01.03.2026 00:00;68,0;55,5\n\nS1;01.03.2026 00:05;x;50\nS2;01.03.2026 00:05;50\n";
        let quoted = "Export \"A\"\n\"id\";\"time\";\"temp\";\"rh\"\n\"S1\";\"01.03.2026 00:00\";\"68,0\";\"55,5\"\n\n\"S1\";\"01.03.2026 00:05\";\"x\";50\n\"S2\";01.03.2026 00:05;\"50\"\n";
        assert!(plain_text(plain.as_bytes()) && !plain_text(&quoted.as_bytes()[12..]));
        let p = Path::new("x.csv");
        let a = outcome(read_bytes(&f, p, 0, plain.as_bytes()));
        let b = outcome(read_bytes(&f, p, 0, quoted.as_bytes()));
        assert_eq!(a, b);
        assert!(a.contains("UnparsableValue") && a.contains("MalformedRow"), "{a}");
        // A lone carriage return is a line end for the csv crate: such text
        // is not plain, and goes to the csv crate.
        assert!(!plain_text(b"a,b\rc,d\n") && plain_text(b"a,b\r\nc,d\n"));
    }

    /// Generated messy exports (seeded): both splitters agree on every one.
    #[test]
    fn plain_splitter_agrees_with_csv_crate_on_generated_files() {
        use rand::{RngExt, SeedableRng};
        let mut rng = rand_chacha::ChaCha20Rng::seed_from_u64(20261025);
        let times = [
            "2026-10-25 01:40",
            "2026-10-25 02:00",
            "2026-10-25 02:20",
            "2026-10-25 02:40",
            "2026-10-25 03:00",
            "2026-03-29 02:30",
            "2026-03-29 03:00",
        ];
        let cells = [
            "21.5",
            "-3",
            "1e2",
            "",
            "NA",
            " 7.25 ",
            "x",
            "0.000001",
            "+4",
            ".5",
            "5.",
            "123456789012345678",
        ];
        let ids = ["A", "B", " A", "", "Ä"];
        let mut read_ok = 0;
        for case in 0..300 {
            let delim = [b',', b';', b'\t'][rng.random_range(0..3)];
            let comma = delim != b',' && rng.random_bool(0.5);
            let skip = rng.random_range(0..3);
            let by_column = rng.random_bool(0.7);
            let sensor = if by_column { SensorSource::Column("id".into()) } else { SensorSource::FileStem };
            let f = fmt(delim, comma, "%Y-%m-%d %H:%M", chrono_tz::Europe::Amsterdam, sensor, skip);
            let d = delim as char;
            let eol = |rng: &mut rand_chacha::ChaCha20Rng| if rng.random_bool(0.3) { "\r\n" } else { "\n" };
            let mut text = String::new();
            for i in 0..skip {
                text.push_str(&format!("preamble {i}{}", eol(&mut rng)));
            }
            if rng.random_bool(0.2) {
                text.push_str(eol(&mut rng));
            }
            text.push_str(&format!("id{d}time{d}temp{d}rh{}", eol(&mut rng)));
            let n = rng.random_range(0..40);
            for _ in 0..n {
                match rng.random_range(0..20) {
                    0 => text.push_str(eol(&mut rng)),
                    1 => text.push_str(&format!("  {}", eol(&mut rng))),
                    2 => text.push_str(&format!("{d}{d}{d}{}", eol(&mut rng))),
                    _ => {
                        let mut fields = vec![
                            ids[rng.random_range(0..ids.len())].to_string(),
                            times[rng.random_range(0..times.len())].to_string(),
                        ];
                        for _ in 0..2 {
                            let mut c = cells[rng.random_range(0..cells.len())].to_string();
                            if comma {
                                c = c.replace('.', ",");
                            }
                            fields.push(c);
                        }
                        let keep = match rng.random_range(0..12) {
                            0 => rng.random_range(1..4),
                            1 => 5,
                            _ => 4,
                        };
                        fields.resize(keep, "9".into());
                        text.push_str(&fields.join(&d.to_string()));
                        text.push_str(eol(&mut rng));
                    }
                }
            }
            if rng.random_bool(0.3) {
                // A last line without its line end, possibly cut short.
                let row = format!("A{d}2026-10-25 03:20{d}1");
                text.push_str(&row[..rng.random_range(0..row.len())]);
            }
            assert!(plain_text(text.as_bytes()), "case {case}");
            let (plain, csv) = both(&f, "dir/S9.csv", text.as_bytes());
            assert_eq!(plain, csv, "case {case}:\n{text}");
            read_ok += usize::from(!plain.starts_with("error"));
        }
        // Most cases read (a few stop on a column that fails on most rows).
        assert!(read_ok > 200, "{read_ok} of 300 generated files read");
    }

    /// The fast path of `parse_number` gives the bits of Rust's own
    /// correctly rounded `str::parse::<f64>` (the general-purpose parser).
    #[test]
    fn number_fast_path_matches_std_parse() {
        use rand::{RngExt, SeedableRng};
        let reference = |s: &str, comma: bool| -> Option<f64> {
            let s = if comma { s.replace(',', ".") } else { s.to_string() };
            s.parse::<f64>().ok().filter(|x| x.is_finite())
        };
        let bits = |x: Option<f64>| x.map(f64::to_bits);
        let fixed = [
            "0",
            "-0",
            "+5",
            ".5",
            "5.",
            "-.5",
            "-5.",
            ".",
            "-",
            "+",
            "",
            "1e3",
            "0001.5000",
            "1.2.3",
            "1,5",
            "-0.0",
            "999999999999999",
            "9999999999999999",
            "0.000000000000001",
            "12345678901234.5",
            "123456789012345.6",
            "inf",
            "NaN",
            "0x10",
            "1 5",
            "1_0",
            "٣",
        ];
        for s in fixed {
            for comma in [false, true] {
                assert_eq!(
                    bits(parse_number(s.as_bytes(), comma)),
                    bits(reference(s, comma)),
                    "{s:?} {comma}"
                );
            }
        }
        let mut rng = rand_chacha::ChaCha20Rng::seed_from_u64(7);
        for _ in 0..200_000 {
            let int_digits = rng.random_range(0..10);
            let frac_digits = rng.random_range(0..10);
            let mut s = String::new();
            match rng.random_range(0..4) {
                0 => s.push('-'),
                1 => s.push('+'),
                _ => {}
            }
            for _ in 0..int_digits {
                s.push(char::from(b'0' + rng.random_range(0..10u8)));
            }
            let comma = rng.random_bool(0.3);
            if frac_digits > 0 || rng.random_bool(0.1) {
                s.push(if comma { ',' } else { '.' });
            }
            for _ in 0..frac_digits {
                s.push(char::from(b'0' + rng.random_range(0..10u8)));
            }
            assert_eq!(bits(parse_number(s.as_bytes(), comma)), bits(reference(&s, comma)), "{s:?}");
        }
    }
}
