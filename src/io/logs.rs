//! Logger exports: one `[[logs]]` block compiled into a [`LogFormat`] (files,
//! delimiter, decimal mark, time format and zone, sensor id, channels with
//! units), and the reading of one export into time-stamped rows.
//!
//! Files are read whole. Text without quote characters (nearly every logger
//! export) is split by a vectorised search for the delimiter and `\n`, which
//! counts physical lines as it goes; text with quotes (or with a `\r` that
//! does not end a line) is split by the csv crate, with the lines counted
//! from the bytes before each record. Both splitters feed one row parser and
//! give the same rows, flags and lines on the same content (tests in `logs_tests.rs`).
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

use super::clock::TimeFormat;
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

#[path = "logs_parse.rs"]
mod parse;
use parse::Parser;

#[cfg(test)]
#[path = "logs_tests.rs"]
mod tests;
