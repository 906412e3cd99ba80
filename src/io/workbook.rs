//! Spreadsheet workbooks (`.xlsx`, `.xlsm`, `.xlsb`, `.xls`, `.ods`) as
//! logger exports.
//!
//! A workbook's sheet is turned into the text an export of the same table
//! would be, one sheet row per line, so that every reader of a text export
//! (preamble and header lines, layouts, time columns, units, flags and the
//! accounting) reads workbooks unchanged:
//!
//! * cells are separated by a tab (a workbook has no delimiter; a tab inside
//!   a text cell becomes a space, and so does a line break, so that line `N`
//!   of the text is row `N` of the sheet);
//! * numbers are written in full (Rust's shortest round-trip form) with the
//!   block's decimal mark, so text cells typed with decimal commas still read
//!   when the block says `decimal = ","`;
//! * date and time cells (spreadsheet serial dates, or the ISO 8601 text of
//!   OpenDocument) are written with the block's own `time_format`, so the
//!   time column parses exactly as a text export's would; a date-only cell
//!   gets the pattern's date part and a time-only cell its clock part (for
//!   blocks with separate date and time columns);
//! * error cells (`#N/A`, `#DIV/0!`) keep their text, so the reading is
//!   flagged as unreadable and counted, never dropped;
//! * rows above the sheet's used range are written as blank lines.
//!
//! The sheet is the block's `sheet` key, or the only sheet; a workbook with
//! several sheets and no `sheet` key is an error that lists them. Messages
//! name the file as `book.xlsx [sheet Data]`, and their line numbers are the
//! sheet's row numbers.
//!
//! Spreadsheet serial dates count days from 1899-12-30 (or 1904-01-01 in
//! the 1904 date system) with the time of day as the fraction (ECMA-376
//! Part 1, §18.17.4); the conversion is the `calamine` crate's, rounded to
//! the millisecond. Cost: the whole sheet is decoded into memory (calamine
//! reads a sheet at once), about the size of the equivalent text twice.

use super::clock::TimeFormat;
use super::error::{IoError, Result};
use super::logs::LogFormat;
use calamine::{Data, Reader, open_workbook_auto};
use chrono::{NaiveDate, NaiveDateTime, NaiveTime};
use std::path::{Path, PathBuf};

/// File extensions read as workbooks (compared without case).
pub const EXTENSIONS: &[&str] = &["xlsx", "xlsm", "xlsb", "xls", "ods"];

/// Whether `path` names a workbook (by its extension).
pub fn is_workbook(path: &Path) -> bool {
    path.extension()
        .and_then(|e| e.to_str())
        .is_some_and(|e| EXTENSIONS.iter().any(|w| e.eq_ignore_ascii_case(w)))
}

/// How cells become text.
#[derive(Debug, Clone)]
pub struct CellStyle {
    /// Write numbers with a decimal comma.
    pub decimal_comma: bool,
    /// strftime pattern of a full date-and-time cell.
    pub stamp: String,
    /// Pattern of a date-only cell (the date part of `stamp`).
    pub date: String,
    /// Pattern of a time-only cell (the clock part of `stamp`).
    pub clock: String,
    /// Which date cells that hold a whole day are written as dates only.
    pub whole_days: WholeDays,
}

/// How a date cell that holds a whole day (serial without fraction, or an
/// OpenDocument date without a time) is written.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum WholeDays {
    /// As a full stamp (`00:00` is midnight): a block with one time column.
    Stamp,
    /// As the date part: a block with a date column and a time column.
    DatePart,
    /// As the date part in columns whose date cells all hold whole days,
    /// else as full stamps (detection, which does not know the block yet).
    ByColumn,
}

impl CellStyle {
    /// The style detection uses: decimal point, ISO 8601 stamps.
    pub fn iso() -> CellStyle {
        CellStyle::from_pattern("%Y-%m-%d %H:%M:%S", false, WholeDays::ByColumn)
    }

    /// The style of a block whose time column is read with `pattern`.
    pub fn from_pattern(pattern: &str, decimal_comma: bool, whole_days: WholeDays) -> CellStyle {
        let (date, clock) = split_pattern(pattern);
        CellStyle { decimal_comma, stamp: pattern.to_string(), date, clock, whole_days }
    }
}

/// Split a strftime pattern into its date part and its clock part at the
/// last space before the first time-of-day field (`%H %I %k %l %M %S %T %R
/// %X %p %P`); without such a space both parts are the whole pattern.
fn split_pattern(p: &str) -> (String, String) {
    let b = p.as_bytes();
    let first_time = (0..b.len().saturating_sub(1))
        .find(|&i| b[i] == b'%' && b"HIklMSTRXpP".contains(&b[i + 1]) && (i == 0 || b[i - 1] != b'%'));
    match first_time.and_then(|t| p[..t].rfind(' ')) {
        Some(s) => (p[..s].to_string(), p[s + 1..].to_string()),
        None => (p.to_string(), p.to_string()),
    }
}

/// One sheet as text.
#[derive(Debug, Clone)]
pub struct SheetText {
    /// The sheet's name.
    pub sheet: String,
    /// How the file is named in messages: `book.xlsx [sheet Data]`.
    pub shown: PathBuf,
    /// Tab-separated text, one line per sheet row.
    pub text: Vec<u8>,
}

fn open_error(path: &Path, e: impl std::fmt::Display) -> IoError {
    IoError::Table {
        path: path.to_path_buf(),
        message: format!(
            "cannot read the workbook: {e}\nhint: save it again from the spreadsheet program, or export the sheet as CSV"
        ),
    }
}

/// The sheet names of a workbook, in workbook order.
pub fn sheet_names(path: &Path) -> Result<Vec<String>> {
    let book = open_workbook_auto(path).map_err(|e| open_error(path, e))?;
    Ok(book.sheet_names())
}

/// Render sheet `sheet` (or the only sheet) of the workbook at `path`.
pub fn render(path: &Path, sheet: Option<&str>, style: &CellStyle) -> Result<SheetText> {
    let mut book = open_workbook_auto(path).map_err(|e| open_error(path, e))?;
    let names = book.sheet_names();
    let listed = || names.iter().map(|n| format!("\"{n}\"")).collect::<Vec<_>>().join(", ");
    let name = match sheet {
        Some(s) => match names.iter().find(|n| n.as_str() == s) {
            Some(n) => n.clone(),
            None => {
                return Err(IoError::Table {
                    path: path.to_path_buf(),
                    message: format!(
                        "the workbook has no sheet \"{s}\"; its sheets are {}\nhint: set `sheet` of the block to one of them",
                        listed()
                    ),
                });
            }
        },
        None => match names.as_slice() {
            [one] => one.clone(),
            [] => {
                return Err(IoError::Empty {
                    path: path.to_path_buf(),
                    hint: Some("the workbook has no sheet".into()),
                });
            }
            _ => {
                return Err(IoError::Table {
                    path: path.to_path_buf(),
                    message: format!(
                        "the workbook has {} sheets and the block names none: {}\nhint: add `sheet = \"...\"` to the block (one sheet per block; several blocks may read one workbook)",
                        names.len(),
                        listed()
                    ),
                });
            }
        },
    };
    let range = book.worksheet_range(&name).map_err(|e| open_error(path, e))?;
    let shown = PathBuf::from(format!("{} [sheet {name}]", path.display()));
    let mut text = Vec::with_capacity(range.get_size().0 * range.get_size().1 * 8);
    if let Some((row0, col0)) = range.start() {
        text.extend(std::iter::repeat_n(b'\n', row0 as usize));
        let width = range.get_size().1;
        let day_only: Vec<bool> = match style.whole_days {
            WholeDays::Stamp => vec![false; width],
            WholeDays::DatePart => vec![true; width],
            WholeDays::ByColumn => {
                let mut seen = vec![(false, true); width];
                for row in range.rows() {
                    for (j, c) in row.iter().enumerate() {
                        if let Some(whole) = whole_day(c) {
                            seen[j] = (true, seen[j].1 && whole);
                        }
                    }
                }
                seen.iter().map(|&(any, all)| any && all).collect()
            }
        };
        let mut cell = String::new();
        for row in range.rows() {
            text.extend(std::iter::repeat_n(b'\t', col0 as usize));
            for (j, c) in row.iter().enumerate() {
                if j > 0 {
                    text.push(b'\t');
                }
                cell.clear();
                write_cell(&mut cell, c, style, day_only[j]);
                text.extend(cell.bytes().map(|b| if matches!(b, b'\t' | b'\n' | b'\r') { b' ' } else { b }));
            }
            text.push(b'\n');
        }
    }
    Ok(SheetText { sheet: name, shown, text })
}

/// For a date cell: whether it holds a whole day (`None` for other cells and
/// for time-only cells).
fn whole_day(c: &Data) -> Option<bool> {
    match c {
        Data::DateTime(d) if d.is_datetime() && d.as_f64() >= 1.0 => Some(d.as_f64().fract() == 0.0),
        Data::DateTimeIso(s) => match parse_iso(s) {
            Some(Iso::Stamp(_)) => Some(false),
            Some(Iso::Date(_)) => Some(true),
            _ => None,
        },
        _ => None,
    }
}

/// Append the text of one cell; `day_only`: write a whole day as its date.
fn write_cell(out: &mut String, c: &Data, style: &CellStyle, day_only: bool) {
    use std::fmt::Write;
    match c {
        Data::Empty => {}
        Data::String(s) => out.push_str(s),
        Data::Int(i) => {
            let _ = write!(out, "{i}");
        }
        Data::Float(f) => {
            let s = format!("{f}");
            out.push_str(&if style.decimal_comma { s.replace('.', ",") } else { s });
        }
        Data::Bool(b) => out.push_str(if *b { "TRUE" } else { "FALSE" }),
        Data::Error(e) => {
            let _ = write!(out, "{e}");
        }
        Data::DateTime(d) => {
            let serial = d.as_f64();
            match d.as_datetime() {
                Some(t) if d.is_duration() || (0.0..1.0).contains(&serial) => {
                    let _ = write!(out, "{}", t.time().format(&style.clock));
                }
                Some(t) => write_stamp(out, t, day_only && serial.fract() == 0.0, style),
                None => {
                    let _ = write!(out, "{serial}");
                }
            }
        }
        Data::DateTimeIso(s) => match parse_iso(s) {
            Some(Iso::Stamp(t)) => write_stamp(out, t, false, style),
            Some(Iso::Date(d)) => write_stamp(out, d.and_time(NaiveTime::MIN), day_only, style),
            Some(Iso::Clock(t)) => {
                let _ = write!(out, "{}", t.format(&style.clock));
            }
            None => out.push_str(s),
        },
        Data::DurationIso(s) => match parse_duration(s) {
            Some(t) => {
                let _ = write!(out, "{}", t.format(&style.clock));
            }
            None => out.push_str(s),
        },
    }
}

/// A full stamp, or its date part (`date_part`: a whole day in a date
/// column beside a time column).
fn write_stamp(out: &mut String, t: NaiveDateTime, date_part: bool, style: &CellStyle) {
    use std::fmt::Write;
    let pattern = if date_part { &style.date } else { &style.stamp };
    let _ = write!(out, "{}", t.format(pattern));
}

enum Iso {
    Stamp(NaiveDateTime),
    Date(NaiveDate),
    Clock(NaiveTime),
}

/// OpenDocument date values: `2026-10-05T08:00:00`, `2026-10-05`, with
/// optional fractions of a second (ISO 8601).
fn parse_iso(s: &str) -> Option<Iso> {
    let s = s.trim();
    if let Ok(t) = NaiveDateTime::parse_from_str(s, "%Y-%m-%dT%H:%M:%S%.f") {
        return Some(Iso::Stamp(t));
    }
    if let Ok(t) = NaiveDateTime::parse_from_str(s, "%Y-%m-%dT%H:%M") {
        return Some(Iso::Stamp(t));
    }
    if let Ok(d) = NaiveDate::parse_from_str(s, "%Y-%m-%d") {
        return Some(Iso::Date(d));
    }
    NaiveTime::parse_from_str(s, "%H:%M:%S%.f").ok().map(Iso::Clock)
}

/// OpenDocument time values: ISO 8601 durations `PT08H30M00S` (fractional
/// seconds allowed), read as a time of day when under 24 hours.
fn parse_duration(s: &str) -> Option<NaiveTime> {
    let rest = s.trim().strip_prefix("PT")?;
    let (mut h, mut m, mut sec) = (0.0, 0.0, 0.0);
    let mut num = String::new();
    for ch in rest.chars() {
        match ch {
            '0'..='9' | '.' | ',' => num.push(if ch == ',' { '.' } else { ch }),
            'H' | 'M' | 'S' => {
                let v: f64 = num.parse().ok()?;
                num.clear();
                match ch {
                    'H' => h = v,
                    'M' => m = v,
                    _ => sec = v,
                }
            }
            _ => return None,
        }
    }
    let ms = ((h * 3600.0 + m * 60.0 + sec) * 1000.0).round();
    if !(0.0..86_400_000.0).contains(&ms) {
        return None;
    }
    let ms = ms as u32;
    NaiveTime::from_num_seconds_from_midnight_opt(ms / 1000, (ms % 1000) * 1_000_000)
}

/// The text of a block's workbook, and the format that reads it: the block's
/// own with a tab delimiter (cells are already apart).
pub fn for_block(fmt: &LogFormat, path: &Path) -> Result<(LogFormat, SheetText)> {
    let pattern = match &fmt.time_format {
        TimeFormat::Pattern(_) if !fmt.time_format.is_absolute() => fmt.time_format.describe(),
        _ => {
            // Date cells carry no offset: they are written as ISO local
            // times, which such a format does not read, so say it first.
            return Err(IoError::Table {
                path: path.to_path_buf(),
                message: format!(
                    "logs[{}] reads this workbook with `time_format = \"{}\"`, but spreadsheet date cells carry no time zone\nhint: use a pattern without an offset, e.g. `time_format = \"%Y-%m-%d %H:%M:%S\"`, and set `timezone`",
                    fmt.block,
                    fmt.time_format.describe()
                ),
            });
        }
    };
    let whole_days = if fmt.clock_column.is_some() { WholeDays::DatePart } else { WholeDays::Stamp };
    let style = CellStyle::from_pattern(&pattern, fmt.decimal_comma, whole_days);
    let sheet = render(path, fmt.sheet.as_deref(), &style)?;
    let mut f = fmt.clone();
    f.delimiter = b'\t';
    Ok((f, sheet))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn patterns_split_before_the_clock() {
        assert_eq!(split_pattern("%d/%m/%Y %I:%M:%S %p"), ("%d/%m/%Y".into(), "%I:%M:%S %p".into()));
        assert_eq!(split_pattern("%d %b %Y %H:%M"), ("%d %b %Y".into(), "%H:%M".into()));
        assert_eq!(split_pattern("%Y-%m-%dT%H:%M"), ("%Y-%m-%dT%H:%M".into(), "%Y-%m-%dT%H:%M".into()));
    }

    #[test]
    fn open_document_values_read() {
        let style = CellStyle::from_pattern("%d.%m.%Y %H:%M", true, WholeDays::DatePart);
        let mut s = String::new();
        write_cell(&mut s, &Data::DateTimeIso("2026-10-05T08:30:00".into()), &style, true);
        assert_eq!(s, "05.10.2026 08:30");
        s.clear();
        write_cell(&mut s, &Data::DateTimeIso("2026-10-05".into()), &style, true);
        assert_eq!(s, "05.10.2026");
        s.clear();
        write_cell(&mut s, &Data::DateTimeIso("2026-10-05".into()), &style, false);
        assert_eq!(s, "05.10.2026 00:00");
        s.clear();
        write_cell(&mut s, &Data::DurationIso("PT08H30M00S".into()), &style, false);
        assert_eq!(s, "08:30");
        s.clear();
        write_cell(&mut s, &Data::Float(12.5), &style, false);
        assert_eq!(s, "12,5");
        assert!(parse_duration("PT25H00M00S").is_none());
        assert!(parse_duration("P1DT00H").is_none());
    }

    #[test]
    fn serial_dates_follow_the_1900_system() {
        // 46299.5 days after 1899-12-30 is 2026-10-04 12:00 (the serial of a
        // date is its day count in the 1900 date system; ECMA-376 §18.17.4).
        let d = calamine::ExcelDateTime::new(46299.5, calamine::ExcelDateTimeType::DateTime, false);
        let style = CellStyle::iso();
        let mut s = String::new();
        write_cell(&mut s, &Data::DateTime(d), &style, true);
        assert_eq!(s, "2026-10-04 12:00:00");
        let t = calamine::ExcelDateTime::new(0.75, calamine::ExcelDateTimeType::DateTime, false);
        s.clear();
        write_cell(&mut s, &Data::DateTime(t), &style, false);
        assert_eq!(s, "18:00:00");
        let day = calamine::ExcelDateTime::new(46299.0, calamine::ExcelDateTimeType::DateTime, false);
        s.clear();
        write_cell(&mut s, &Data::DateTime(day), &style, true);
        assert_eq!(s, "2026-10-04");
        s.clear();
        // A midnight stamp in a one-column block stays a stamp.
        write_cell(&mut s, &Data::DateTime(day), &style, false);
        assert_eq!(s, "2026-10-04 00:00:00");
    }
}
