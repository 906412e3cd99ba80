//! Logger exports: one `[[logs]]` block compiled into a [`LogFormat`] (files,
//! delimiter, decimal mark, time format and zone, sensor id, channels with
//! units), and the reading of one export into time-stamped rows.
//!
//! Files are read whole and split with the csv crate, which keeps the
//! physical line of every record; messages and `qc_flags.csv` name those
//! lines (1-based, counting preamble and header). A cell that cannot be read
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

use super::clock::{LocalClock, Resolution, Stamp, TimeFormat};
use super::error::{IoError, Result, closest};
use super::qc::Reason;
use super::study::{LogSection, Study, delimiter_byte};
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
    /// Time column.
    pub time_column: String,
    /// Time format.
    pub time_format: TimeFormat,
    /// Zone of local times.
    pub timezone: chrono_tz::Tz,
    /// Sensor id source.
    pub sensor: SensorSource,
    /// Preamble lines before the header.
    pub skip_lines: usize,
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
    columns: UnitsColumns,
}
#[derive(serde::Deserialize)]
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
    let delimiter = match &log.delimiter {
        None => b',',
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
    let time_format = TimeFormat::compile(&log.time_format).map_err(|m| {
        study.invalid(
            &key("time_format"),
            m,
            Some(
                "use a chrono strftime pattern such as \"%Y-%m-%d %H:%M:%S\", or \"rfc3339\", or \"unix\""
                    .into(),
            ),
        )
    })?;
    let timezone = match &log.timezone {
        Some(tz) => super::study::parse_timezone(&study.path, &key("timezone"), tz)?,
        None => study.timezone,
    };
    let sensor = match &log.sensor {
        Some(c) => SensorSource::Column(c.clone()),
        None => SensorSource::FileStem,
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
                source: std::io::Error::other(e.to_string()),
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
        time_column: log.time.clone(),
        time_format,
        timezone,
        sensor,
        skip_lines: log.skip_lines.unwrap_or(0),
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

fn parse_number(cell: &[u8], decimal_comma: bool) -> Option<f64> {
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
    let bytes = std::fs::read(path).map_err(|source| IoError::Read { path: path.to_path_buf(), source })?;
    read_bytes(fmt, path, file, &bytes)
}

/// [`read_file`] on bytes already in memory.
pub fn read_bytes(fmt: &LogFormat, path: &Path, file: u32, bytes: &[u8]) -> Result<FileRead> {
    // Skip the preamble: `skip_lines` physical lines.
    let mut start = 0;
    for _ in 0..fmt.skip_lines {
        match bytes[start..].iter().position(|&c| c == b'\n') {
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
    let skip = fmt.skip_lines as u64;
    let mut rdr = csv::ReaderBuilder::new()
        .delimiter(fmt.delimiter)
        .has_headers(false)
        .flexible(true)
        .from_reader(&bytes[start..]);
    let mut rec = csv::ByteRecord::new();
    let mut lines = LineCounter::new(&bytes[start..]);
    let csv_err = |e: csv::Error| IoError::Table {
        path: path.to_path_buf(),
        message: match e.position() {
            Some(p) => format!("line {}: {}", p.line() + skip, e),
            None => e.to_string(),
        },
    };
    // Header: the first non-blank record.
    let header_line;
    let headers: Vec<String> = loop {
        if !rdr.read_byte_record(&mut rec).map_err(csv_err)? {
            return Err(IoError::Empty {
                path: path.to_path_buf(),
                hint: Some("the file is empty; it needs a header line and data rows".into()),
            });
        }
        if rec.iter().all(|c| trim(c).is_empty()) {
            continue;
        }
        header_line = lines.line_of(&rec) as usize + fmt.skip_lines;
        break rec.iter().map(decode).collect();
    };
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
    let time_col = column(&fmt.time_column)?;
    let sensor_col = match &fmt.sensor {
        SensorSource::Column(c) => Some(column(c)?),
        SensorSource::FileStem => None,
    };
    let mut chan_cols: [Option<(usize, Conversion)>; 3] = [None; 3];
    for ch in Channel::ALL {
        if let Some((name, conv)) = &fmt.channels[ch.index()] {
            chan_cols[ch.index()] = Some((column(name)?, *conv));
        }
    }
    let ncols = headers.len();

    let mut out = FileRead {
        rows_read: 0,
        rows: Vec::with_capacity(bytes.len() / 32),
        flags: Vec::new(),
        sensors: Vec::new(),
        first_line: Vec::new(),
    };
    let mut last_utc: Vec<Option<i64>> = Vec::new();
    let stem_sensor = match &fmt.sensor {
        SensorSource::FileStem => {
            let stem = path.file_stem().map(|s| s.to_string_lossy().into_owned()).unwrap_or_default();
            out.sensors.push(stem);
            out.first_line.push(0);
            last_utc.push(None);
            Some(0u32)
        }
        SensorSource::Column(_) => None,
    };
    let mut last_sensor: Option<(Vec<u8>, u32)> = None;
    let mut clock = LocalClock::new(fmt.timezone);
    let mut time_fail = Failures::new();
    let mut value_fail = [Failures::new(), Failures::new(), Failures::new()];
    let flag = |out: &mut FileRead, line, sensor, time, variable, value: &[u8], reason| {
        out.flags.push(Flag {
            file,
            line,
            sensor,
            time,
            variable,
            value: String::from_utf8_lossy(value).into_owned(),
            reason,
        });
    };

    // Rows in a fall-back hour read as the first pass, per sensor, until the
    // second pass confirms it: (row index, line, time cell). A first pass that
    // is never followed by a second one cannot be placed and is flagged.
    let mut pending: std::collections::BTreeMap<u32, Vec<(usize, u32, Vec<u8>)>> = Default::default();
    let mut drop_rows: Vec<usize> = Vec::new();
    let unplaced =
        |out: &mut FileRead, drop_rows: &mut Vec<usize>, sensor: u32, run: Vec<(usize, u32, Vec<u8>)>| {
            for (idx, line, cell) in run {
                flag(out, line, sensor, None, Variable::Time, &cell, Reason::AmbiguousTime);
                drop_rows.push(idx);
            }
        };

    while rdr.read_byte_record(&mut rec).map_err(csv_err)? {
        let line = (lines.line_of(&rec) + skip) as u32;
        if rec.len() <= 1 && rec.iter().all(|c| trim(c).is_empty()) {
            continue;
        }
        out.rows_read += 1;
        if rec.len() != ncols {
            let msg = format!("{} fields where the header has {ncols}", rec.len());
            flag(&mut out, line, u32::MAX, None, Variable::Row, msg.as_bytes(), Reason::MalformedRow);
            continue;
        }
        // Sensor.
        let sensor = match (stem_sensor, sensor_col) {
            (Some(s), _) => s,
            (None, Some(c)) => {
                let id = trim(&rec[c]);
                if id.is_empty() {
                    flag(&mut out, line, u32::MAX, None, Variable::Sensor, b"", Reason::MalformedRow);
                    continue;
                }
                match &last_sensor {
                    Some((b, s)) if b.as_slice() == id => *s,
                    _ => {
                        let name = decode(id);
                        let s = match out.sensors.iter().position(|x| *x == name) {
                            Some(s) => s as u32,
                            None => {
                                out.sensors.push(name);
                                out.first_line.push(line);
                                last_utc.push(None);
                                (out.sensors.len() - 1) as u32
                            }
                        };
                        last_sensor = Some((id.to_vec(), s));
                        s
                    }
                }
            }
            (None, None) => unreachable!("a sensor source is always set"),
        };
        if out.first_line[sensor as usize] == 0 {
            out.first_line[sensor as usize] = line;
        }
        // Time.
        let tcell = trim(&rec[time_col]);
        time_fail.tried += 1;
        let stamp = std::str::from_utf8(tcell).ok().and_then(|s| fmt.time_format.parse(s, fmt.decimal_comma));
        let utc = match stamp {
            None => {
                time_fail.fail(line, tcell);
                flag(&mut out, line, sensor, None, Variable::Time, tcell, Reason::UnparsableTime);
                continue;
            }
            Some(Stamp::Utc(t)) => t,
            Some(Stamp::Local(l)) => match clock.resolve(l) {
                Resolution::Single(t) => {
                    if let Some(run) = pending.remove(&sensor) {
                        unplaced(&mut out, &mut drop_rows, sensor, run);
                    }
                    t
                }
                Resolution::Nonexistent => {
                    flag(&mut out, line, sensor, None, Variable::Time, tcell, Reason::NonexistentTime);
                    continue;
                }
                Resolution::Ambiguous(early, late) => {
                    let prev = last_utc[sensor as usize];
                    match prev {
                        Some(p) if early > p => {
                            pending.entry(sensor).or_default().push((out.rows.len(), line, tcell.to_vec()));
                            early
                        }
                        Some(p) if early < p && late >= p => {
                            pending.remove(&sensor);
                            late
                        }
                        _ => {
                            flag(&mut out, line, sensor, None, Variable::Time, tcell, Reason::AmbiguousTime);
                            continue;
                        }
                    }
                }
            },
        };
        last_utc[sensor as usize] = Some(utc);
        // Values.
        let mut values = [f64::NAN; 3];
        let mut flagged = false;
        for (k, cc) in chan_cols.iter().enumerate() {
            let Some((c, conv)) = cc else { continue };
            let cell = trim(&rec[*c]);
            if is_missing(cell) {
                continue;
            }
            value_fail[k].tried += 1;
            match parse_number(cell, fmt.decimal_comma) {
                Some(x) => values[k] = conv.apply(x),
                None => {
                    value_fail[k].fail(line, cell);
                    flagged = true;
                    let var = Variable::Channel(Channel::ALL[k]);
                    flag(&mut out, line, sensor, Some(utc), var, cell, Reason::UnparsableValue);
                }
            }
        }
        out.rows.push(Row { time: utc, values, line, sensor, file, flagged });
    }
    for (sensor, run) in std::mem::take(&mut pending) {
        unplaced(&mut out, &mut drop_rows, sensor, run);
    }
    if !drop_rows.is_empty() {
        let drop: std::collections::HashSet<usize> = drop_rows.into_iter().collect();
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
            hint: Some(format!("only a header (line {header_line}) was found")),
        });
    }
    if time_fail.most() {
        let (line, value) = time_fail.first.clone().unwrap_or_default();
        return Err(IoError::BadValue {
            path: path.to_path_buf(),
            line: line as usize,
            column: fmt.time_column.clone(),
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
        let f = &value_fail[ch.index()];
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
            time_format: TimeFormat::compile(pattern).unwrap(),
            timezone: tz,
            sensor,
            skip_lines: skip,
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
}
