//! The row parser that both splitters of [`super`] feed: columns looked up in the
//! header, sensor ids, time stamps and the fall-back hour, channel values with their
//! units converted, quality flags, and the failure counts that stop a misconfigured run.

use super::{
    Cells, Failures, FileRead, Flag, LogFormat, Row, SensorSource, Variable, decode, header_offset,
    is_missing, parse_number, trim,
};
use crate::io::clock::{LocalClock, Resolution, Stamp, StampMemo};
use crate::io::error::{IoError, Result, closest};
use crate::io::qc::Reason;
use crate::io::study::LogZone;
use crate::io::units::{Channel, Conversion};
use std::path::Path;

/// Row processing shared by both splitters: columns, sensor ids, time stamps,
/// the fall-back hour, values, flags and the failure counts.
pub(super) struct Parser<'a> {
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
    pub(super) fn new<C: Cells>(
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
    pub(super) fn record<C: Cells>(&mut self, rec: &C, line: u32) {
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
    pub(super) fn finish(mut self) -> Result<FileRead> {
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
