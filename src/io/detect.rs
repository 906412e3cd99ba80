//! Detection of an export's format: read a file's first lines and a sample
//! of its rows (the head and the tail of the file) and write a complete
//! `[[logs]]` block for it: delimiter, decimal mark, preamble and header
//! lines, time column(s) and pattern, time zone, sensor id, channel columns
//! and units, or one of the recurring layouts of [`super::layouts`].
//!
//! Every guess carries a comment saying what it was read from. What the data
//! cannot decide (day-first or month-first dates when no day exceeds 12, a
//! unit with no header word and an ambiguous range, light in lux whose
//! source is unknown, no time zone anywhere) is written as commented
//! choices and returned in [`FileGuess::undecided`], never silently chosen.
//! Files whose guesses agree are written as one block ([`group`]).
//!
//! The time patterns are tried with the reader's own parser
//! ([`TimeFormat::parse`]), so a detected pattern reads the file exactly as
//! ingestion will. Cost: O(sample cells × candidate patterns), a few
//! milliseconds per file (the sample is at most 160 KB).

use super::clock::{Stamp, TimeFormat};
use super::error::{IoError, Result};
use super::layouts::{Layout, channel_of};
use super::logs::header_offset;
use super::units::Channel;
use std::collections::BTreeSet;
use std::path::{Path, PathBuf};

/// Bytes read from the start of a file.
const HEAD_BYTES: usize = 128 * 1024;
/// Bytes read from the end of a file (later dates decide day-first or
/// month-first more often).
const TAIL_BYTES: usize = 32 * 1024;
/// Share of the sampled cells a time pattern must read (common practice:
/// a few damaged stamps are flagged later, not a reason to refuse a pattern).
const TIME_SHARE: f64 = 0.95;

/// One key of a block: its value (TOML text), or several commented choices
/// when the data cannot decide, and what it was read from.
#[derive(Debug, Clone, PartialEq)]
pub struct Entry {
    /// The key (`delimiter`, `time`, or a channel under `[logs.columns]`).
    pub key: String,
    /// The value as TOML text when decided.
    pub value: Option<String>,
    /// The choices (TOML text) when undecided.
    pub choices: Vec<String>,
    /// What the guess was read from, or why it is undecided.
    pub why: String,
}

impl Entry {
    fn decided(key: &str, value: String, why: String) -> Entry {
        Entry { key: key.into(), value: Some(value), choices: vec![], why }
    }
    fn undecided(key: &str, choices: Vec<String>, why: String) -> Entry {
        Entry { key: key.into(), value: None, choices, why }
    }
}

/// The guessed block of one file.
#[derive(Debug, Clone)]
pub struct FileGuess {
    /// The file.
    pub path: PathBuf,
    /// The recognised layout, if any.
    pub layout: Option<Layout>,
    /// Keys of `[[logs]]`, in the order written.
    pub keys: Vec<Entry>,
    /// Keys of `[logs.columns]`.
    pub columns: Vec<Entry>,
    /// Notes written as comments (columns not used, what a layout finds).
    pub notes: Vec<String>,
    /// What could not be decided, one sentence each (shown on the screen).
    pub undecided: Vec<String>,
}

impl FileGuess {
    /// The guesses that make two files one block (values and choices, not
    /// the comments, which quote each file's own values).
    fn signature(&self) -> String {
        let mut s = format!("{:?}", self.layout);
        for e in self.keys.iter().chain(&self.columns) {
            s.push_str(&format!("|{}={:?}{:?}", e.key, e.value, e.choices));
        }
        s
    }
}

/// Quote a string as TOML.
fn q(s: &str) -> String {
    toml::Value::String(s.to_string()).to_string()
}

/// The text of a sample: UTF-8 (a byte-order mark is dropped) or Latin-1.
fn decode(b: &[u8]) -> String {
    let b = b.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(b);
    match std::str::from_utf8(b) {
        Ok(s) => s.to_string(),
        Err(e) if e.error_len().is_none() => String::from_utf8_lossy(&b[..e.valid_up_to()]).into_owned(),
        Err(_) => b.iter().map(|&c| c as char).collect(),
    }
}

/// The lines of a text (`\n`, `\r\n` or lone `\r` line ends).
fn lines_of(text: &str) -> Vec<String> {
    let text = if text.contains('\n') { text.to_string() } else { text.replace('\r', "\n") };
    text.split('\n').map(|l| l.strip_suffix('\r').unwrap_or(l).to_string()).collect()
}

/// The cells of one line (quoted cells allowed), trimmed.
fn split(line: &str, delimiter: u8) -> Vec<String> {
    let mut rdr = csv::ReaderBuilder::new()
        .delimiter(delimiter)
        .has_headers(false)
        .flexible(true)
        .from_reader(line.as_bytes());
    let mut rec = csv::StringRecord::new();
    match rdr.read_record(&mut rec) {
        Ok(true) => rec.iter().map(|c| c.trim().to_string()).collect(),
        _ => vec![line.trim().to_string()],
    }
}

/// A number cell (`12.5`, `-3`, `1e3`; `12,5` with a decimal comma).
fn number(cell: &str, decimal_comma: bool) -> Option<f64> {
    let s = if decimal_comma { cell.replace(',', ".") } else { cell.to_string() };
    s.parse::<f64>().ok().filter(|x| x.is_finite())
}

/// Whether a cell looks like a number or a time stamp (digits with the
/// separators of dates and clocks).
fn datum(cell: &str) -> bool {
    cell.bytes().any(|b| b.is_ascii_digit())
        && cell.bytes().all(|b| b.is_ascii_digit() || b" -/:.,+TZAPMapm".contains(&b))
}

/// Whether a line of cells looks like a data row: at least two cells, and
/// most non-empty cells numbers or stamps.
fn data_like(cells: &[String]) -> bool {
    let filled: Vec<&String> = cells.iter().filter(|c| !c.is_empty()).collect();
    cells.len() >= 2
        && !filled.is_empty()
        && filled.iter().filter(|c| datum(c)).count() * 10 >= filled.len() * 7
}

/// Candidate date parts: (pattern, order) where order is `ymd`, `dmy`, `mdy`.
const DATES: [(&str, &str); 12] = [
    ("%Y-%m-%d", "ymd"),
    ("%Y/%m/%d", "ymd"),
    ("%Y.%m.%d", "ymd"),
    ("%d.%m.%Y", "dmy"),
    ("%d/%m/%Y", "dmy"),
    ("%m/%d/%Y", "mdy"),
    ("%d-%m-%Y", "dmy"),
    ("%m-%d-%Y", "mdy"),
    ("%d.%m.%y", "dmy"),
    ("%d/%m/%y", "dmy"),
    ("%m/%d/%y", "mdy"),
    ("%d-%m-%y", "dmy"),
];

/// Candidate time-of-day parts.
const CLOCKS: [&str; 6] = ["%H:%M:%S", "%H:%M", "%I:%M:%S %p", "%I:%M %p", "%H:%M:%S%.f", "%H.%M.%S"];

/// The day-first/month-first twin of a date part (`%d/%m/%Y` ↔ `%m/%d/%Y`).
fn twin(date: &str) -> Option<String> {
    if date.starts_with("%d") {
        Some(date.replacen("%d", "\u{1}", 1).replacen("%m", "%d", 1).replacen('\u{1}', "%m", 1))
    } else if date.starts_with("%m") {
        Some(date.replacen("%m", "\u{1}", 1).replacen("%d", "%m", 1).replacen('\u{1}', "%d", 1))
    } else {
        None
    }
}

/// Instants between 1990 and 2100 (a pattern that reads `26` as the year 26
/// does not fit).
fn plausible(ms: i64) -> bool {
    (631_152_000_000..4_102_444_800_000).contains(&ms)
}

/// The share of `cells` that `pattern` reads to a plausible instant.
fn share(pattern: &str, cells: &[String], decimal_comma: bool) -> f64 {
    let Ok(tf) = TimeFormat::compile(pattern) else { return 0.0 };
    if cells.is_empty() {
        return 0.0;
    }
    let ok = cells
        .iter()
        .filter(|c| match tf.parse(c, decimal_comma) {
            Some(Stamp::Local(t)) | Some(Stamp::Utc(t)) => plausible(t),
            None => false,
        })
        .count();
    ok as f64 / cells.len() as f64
}

/// What was found about the time column(s).
struct TimeGuess {
    /// One column, or date and time-of-day columns.
    columns: Vec<usize>,
    /// The pattern(s): one when decided, two (day-first, month-first) when not.
    patterns: Vec<String>,
    /// Why.
    why: String,
}

/// Full-stamp patterns of one column.
fn stamp_patterns() -> Vec<(String, &'static str)> {
    let mut out = vec![
        ("rfc3339".to_string(), "ymd"),
        ("%Y-%m-%d %H:%M:%S %z".to_string(), "ymd"),
        ("%Y-%m-%dT%H:%M:%S%z".to_string(), "ymd"),
    ];
    for (d, o) in DATES {
        for c in CLOCKS {
            out.push((format!("{d} {c}"), o));
            if o == "ymd" && !c.contains("%p") {
                out.push((format!("{d}T{c}"), o));
            }
        }
    }
    out
}

/// The patterns among `candidates` that read the cells, best first, with
/// day-first/month-first twins kept together.
fn fitting<'a>(
    candidates: impl Iterator<Item = (String, &'a str)>,
    cells: &[String],
    dc: bool,
) -> Vec<String> {
    candidates.filter(|(p, _)| share(p, cells, dc) >= TIME_SHARE).map(|(p, _)| p).collect()
}

/// Find the time column(s) and pattern among the data cells of `cols`.
fn find_time(header: &[String], cols: &[Vec<String>], dc: bool) -> Option<TimeGuess> {
    let stamps = stamp_patterns();
    // Unix seconds: whole numbers between 2001 and 2100.
    let unix = |cells: &[String]| {
        !cells.is_empty()
            && cells.iter().all(|c| number(c, dc).is_some_and(|x| (1e9..4.1e9).contains(&x)))
            && cells.iter().any(|c| !c.contains(['.', ',']))
    };
    for (j, cells) in cols.iter().enumerate() {
        if cells.is_empty() || !cells.iter().any(|c| c.contains([':', '-', '/', '.', 'T'])) {
            if unix(cells) && j < header.len() {
                return Some(TimeGuess {
                    columns: vec![j],
                    patterns: vec!["unix".into()],
                    why: format!("the cells of `{}` are seconds since 1970 ({}, ...)", header[j], cells[0]),
                });
            }
            continue;
        }
        let fit = fitting(stamps.iter().map(|(p, o)| (p.clone(), *o)), cells, dc);
        if let Some(first) = fit.first() {
            return Some(decide_order(vec![j], first, &fit, cells, header, dc));
        }
    }
    // Date and time of day in two neighbouring columns.
    for j in 0..cols.len().saturating_sub(1) {
        let (a, b) = (&cols[j], &cols[j + 1]);
        if a.is_empty() || b.is_empty() || a.len() != b.len() {
            continue;
        }
        let joined: Vec<String> = a.iter().zip(b).map(|(x, y)| format!("{x} {y}")).collect();
        let mut cand = Vec::new();
        for (d, o) in DATES {
            for c in CLOCKS {
                cand.push((format!("{d} {c}"), o));
            }
        }
        let fit = fitting(cand.into_iter(), &joined, dc);
        if let Some(first) = fit.first() {
            return Some(decide_order(vec![j, j + 1], first, &fit, &joined, header, dc));
        }
    }
    None
}

/// Keep the first fitting pattern, unless its day-first/month-first twin
/// fits as well: then both are choices (no day above 12 in the sample).
fn decide_order(
    columns: Vec<usize>,
    first: &str,
    fit: &[String],
    cells: &[String],
    header: &[String],
    dc: bool,
) -> TimeGuess {
    let names: Vec<String> = columns.iter().map(|&j| format!("`{}`", header[j])).collect();
    let names = names.join(" and ");
    let date = first.split([' ', 'T']).next().unwrap_or(first);
    let rest = &first[date.len()..];
    let example = cells.first().cloned().unwrap_or_default();
    if let Some(t) = twin(date) {
        let other = format!("{t}{rest}");
        // Both orders fit the share, but one reads more cells: the other
        // fails on the days above 12.
        let (a, b) = (share(first, cells, dc), share(&other, cells, dc));
        if fit.contains(&other) && b > a {
            return TimeGuess {
                columns,
                patterns: vec![other.clone()],
                why: format!(
                    "{names}: {:.0}% of {} sampled stamps read (a day above 12 fixes the order, e.g. `{}`)",
                    b * 100.0,
                    cells.len(),
                    day_above_12(&other, cells).unwrap_or(example)
                ),
            };
        }
        if fit.contains(&other) && a == b {
            let (dmy, mdy) =
                if date.starts_with("%d") { (first.to_string(), other) } else { (other, first.to_string()) };
            return TimeGuess {
                columns,
                patterns: vec![dmy, mdy],
                why: format!(
                    "{names} read as day-first and as month-first dates: no day above 12 in the {} rows sampled (e.g. `{example}`)",
                    cells.len()
                ),
            };
        }
        return TimeGuess {
            columns,
            patterns: vec![first.to_string()],
            why: format!(
                "{names}: {:.0}% of {} sampled stamps read (a day above 12 fixes the order, e.g. `{}`)",
                a * 100.0,
                cells.len(),
                day_above_12(first, cells).unwrap_or(example)
            ),
        };
    }
    TimeGuess {
        columns,
        patterns: vec![first.to_string()],
        why: format!("{names}: every sampled stamp read (e.g. `{example}`)"),
    }
}

/// A cell whose day (by `pattern`) is above 12, for the comment.
fn day_above_12(pattern: &str, cells: &[String]) -> Option<String> {
    let tf = TimeFormat::compile(pattern).ok()?;
    cells
        .iter()
        .find(|c| match tf.parse(c, false) {
            Some(Stamp::Local(t)) => {
                chrono::DateTime::from_timestamp_millis(t).is_some_and(|d| chrono::Datelike::day(&d) > 12)
            }
            _ => false,
        })
        .cloned()
}

/// Words of a header cell, lower case.
fn words(s: &str) -> Vec<String> {
    s.to_lowercase()
        .split(|c: char| !c.is_alphanumeric())
        .filter(|w| !w.is_empty())
        .map(String::from)
        .collect()
}

/// Summary of a numeric column.
#[derive(Debug, Clone, Copy)]
struct Range {
    min: f64,
    max: f64,
    median: f64,
}

fn range_of(cells: &[String], dc: bool) -> Option<Range> {
    let mut v: Vec<f64> = cells.iter().filter_map(|c| number(c, dc)).collect();
    let filled = cells.iter().filter(|c| !c.is_empty()).count();
    if v.is_empty() || v.len() * 10 < filled * 8 {
        return None;
    }
    v.sort_by(f64::total_cmp);
    Some(Range { min: v[0], max: v[v.len() - 1], median: v[v.len() / 2] })
}

/// Whether a numeric column counts rows (1, 2, 3, ... or any run of
/// consecutive whole numbers).
fn counter(cells: &[String], dc: bool) -> bool {
    let v: Vec<f64> = cells.iter().filter_map(|c| number(c, dc)).collect();
    v.len() >= 3
        && v.len() == cells.len()
        && v.iter().all(|x| x.fract() == 0.0)
        && v.windows(2).take(50).all(|w| w[1] == w[0] + 1.0)
}

fn fmt_num(x: f64) -> String {
    let s = format!("{x:.2}");
    s.trim_end_matches('0').trim_end_matches('.').to_string()
}

/// The unit of a column that names its channel by a word but not its unit,
/// decided by the values' range (ranges of a growing space, common
/// practice: air −10..45 °C, so a median of 5..40 reads °C and 41..104 °F;
/// 230..340 reads kelvin; humidity up to 1 is a fraction, up to 100 percent).
fn unit_by_range(ch: Channel, r: Range) -> std::result::Result<(&'static str, String), Vec<&'static str>> {
    let span = format!("values {}..{}", fmt_num(r.min), fmt_num(r.max));
    match ch {
        Channel::Temperature => {
            if r.min >= 230.0 && r.max <= 340.0 {
                Ok(("K", format!("{span}: a kelvin range")))
            } else if (5.0..=40.0).contains(&r.median) && r.min >= -40.0 && r.max <= 60.0 {
                Ok((
                    "degC",
                    format!(
                        "{span}: a °C range (in °F the median would be {:.0} °C)",
                        (r.median - 32.0) * 5.0 / 9.0
                    ),
                ))
            } else if (41.0..=104.0).contains(&r.median) && r.min >= -40.0 && r.max <= 140.0 {
                Ok(("degF", format!("{span}: a °F range (median {:.0} °C)", (r.median - 32.0) * 5.0 / 9.0)))
            } else {
                Err(vec!["degC", "degF", "K"])
            }
        }
        Channel::Humidity => {
            if r.min >= 0.0 && r.max <= 1.0 {
                Ok(("fraction", format!("{span}: a fraction of 1")))
            } else if r.min >= 0.0 && r.max <= 100.5 && r.max > 1.5 {
                Ok(("percent", format!("{span}: percent")))
            } else {
                Err(vec!["percent", "fraction"])
            }
        }
        Channel::Light => {
            Err(vec!["umol_m2_s", "w_m2_shortwave", "lux_sunlight", "lux_hps", "lux_white_led"])
        }
    }
}

/// Whether a header names a quantity that is not a channel (dew point,
/// battery, serial number, wet bulb, heat index, VPD, absolute humidity).
fn not_a_channel(name: &str) -> bool {
    let text = name.to_lowercase();
    ["dew", "batt", "volt", "serial", "wet", "heat index", "vpd", "abs"].iter().any(|p| text.contains(p))
}

/// The channel a header names by a word alone (no unit).
fn channel_word(name: &str) -> Option<Channel> {
    let w = words(name);
    let has = |xs: &[&str]| w.iter().any(|x| xs.contains(&x.as_str()));
    let text = name.to_lowercase();
    if not_a_channel(name) {
        return None;
    }
    if has(&["temp", "temperature", "t", "tair", "airt", "ta", "temperatur", "air"])
        || text.starts_with("temp")
        || text.starts_with("airt")
    {
        return Some(Channel::Temperature);
    }
    if has(&["rh", "hum", "humidity", "humid", "feuchte", "rf"]) || text.starts_with("humid") {
        return Some(Channel::Humidity);
    }
    if has(&[
        "light",
        "par",
        "ppfd",
        "lux",
        "lx",
        "radiation",
        "solar",
        "rad",
        "slr",
        "irradiance",
        "licht",
        "pyr",
    ]) || text.starts_with("light")
    {
        return Some(Channel::Light);
    }
    None
}

/// Preamble text naming a time zone: `Time zone: UTC+01:00`,
/// `timezone=Europe/Berlin`, `GMT-05:00`. Returns (value, line index).
fn zone_in_preamble(lines: &[String]) -> Option<(String, usize)> {
    for (i, l) in lines.iter().enumerate() {
        let low = l.to_lowercase();
        for tok in
            l.split(|c: char| c.is_whitespace() || c == ',' || c == ';' || c == '=' || c == '"' || c == '\t')
        {
            let tok = tok.trim_matches(|c: char| c == '(' || c == ')' || c == '[' || c == ']');
            if tok.contains('/') && tok.parse::<chrono_tz::Tz>().is_ok() {
                return Some((tok.to_string(), i));
            }
            if (tok.starts_with("UTC") || tok.starts_with("GMT")) && super::study::fixed_offset(tok).is_some()
            {
                return Some((tok.to_string(), i));
            }
        }
        if low.contains("zone") {
            for tok in l.split([' ', ':', '=', ',', ';', '\t']) {
                if (tok.starts_with('+') || tok.starts_with('-')) && super::study::fixed_offset(tok).is_some()
                {
                    return Some((tok.to_string(), i));
                }
            }
        }
    }
    None
}

/// Read the sample of a file: the head, and the tail when the file is longer.
fn sample(path: &Path) -> Result<(Vec<String>, Vec<String>)> {
    use std::io::{Read, Seek, SeekFrom};
    let err = |source| IoError::Read { path: path.to_path_buf(), reason: source };
    let mut f = std::fs::File::open(path).map_err(err)?;
    let len = f.metadata().map_err(err)?.len() as usize;
    let mut head = vec![0u8; len.min(HEAD_BYTES)];
    f.read_exact(&mut head).map_err(err)?;
    let mut head_lines = lines_of(&decode(&head));
    if len > HEAD_BYTES || head_lines.last().is_some_and(|l| l.is_empty()) {
        head_lines.pop(); // cut mid-line, or the nothing after the last line end
    }
    let mut tail_lines = Vec::new();
    if len > HEAD_BYTES + TAIL_BYTES {
        let mut tail = vec![0u8; TAIL_BYTES];
        f.seek(SeekFrom::Start((len - TAIL_BYTES) as u64)).map_err(err)?;
        f.read_exact(&mut tail).map_err(err)?;
        tail_lines = lines_of(&decode(&tail));
        if !tail_lines.is_empty() {
            tail_lines.remove(0); // cut mid-line
        }
        tail_lines.retain(|l| !l.trim().is_empty());
    }
    Ok((head_lines, tail_lines))
}

/// The error for a file that matches nothing: which lines were read, what
/// could not be recognised.
fn unrecognised(path: &Path, lines: &[String], what: String) -> IoError {
    let shown: Vec<String> = lines
        .iter()
        .take(8)
        .enumerate()
        .map(|(i, l)| format!("  line {}: {}", i + 1, l.chars().take(120).collect::<String>()))
        .collect();
    IoError::Table {
        path: path.to_path_buf(),
        message: format!(
            "no format recognised: {what}\nlines read (first {} of the {} sampled):\n{}\nhint: write its [[logs]] block by hand (docs/study-file.md)",
            shown.len(),
            lines.len(),
            shown.join("\n")
        ),
    }
}

/// Detect the format of one export (a workbook through its sheets: see
/// [`detect_workbook`]).
pub fn detect_file(path: &Path) -> Result<FileGuess> {
    if super::workbook::is_workbook(path) {
        return detect_workbook(path);
    }
    let (head, tail) = sample(path)?;
    detect_lines(path, &head, &tail)
}

/// Lines of a sheet's text kept for detection: the head and the tail, like
/// the byte sample of a text file.
const SHEET_HEAD_LINES: usize = 2000;
const SHEET_TAIL_LINES: usize = 500;

/// Detect a workbook: each sheet is rendered as text (`io::workbook`, ISO
/// stamps, decimal point) and detected like a text export; the first sheet
/// that reads is taken, and named in a `sheet` key when there are several.
/// The guessed tab delimiter is dropped (a workbook has cells, not a
/// delimiter), and so is a decimal mark.
pub fn detect_workbook(path: &Path) -> Result<FileGuess> {
    let names = super::workbook::sheet_names(path)?;
    let style = super::workbook::CellStyle::iso();
    let mut first_error = None;
    for name in &names {
        let sheet = super::workbook::render(path, Some(name), &style)?;
        let lines = lines_of(&decode(&sheet.text));
        let (head, tail) = if lines.len() > SHEET_HEAD_LINES + SHEET_TAIL_LINES {
            let tail: Vec<String> = lines[lines.len() - SHEET_TAIL_LINES..]
                .iter()
                .filter(|l| !l.trim().is_empty())
                .cloned()
                .collect();
            (lines[..SHEET_HEAD_LINES].to_vec(), tail)
        } else {
            (lines, Vec::new())
        };
        match detect_lines(&sheet.shown, &head, &tail) {
            Ok(mut g) => {
                g.path = path.to_path_buf();
                g.keys.retain(|e| e.key != "delimiter" && e.key != "decimal");
                if names.len() > 1 {
                    let others: Vec<&str> = names.iter().filter(|n| *n != name).map(String::as_str).collect();
                    g.keys.insert(
                        0,
                        Entry::decided(
                            "sheet",
                            q(name),
                            format!(
                                "the first of {} sheets with a readable table (others: {})",
                                names.len(),
                                others.join(", ")
                            ),
                        ),
                    );
                }
                g.notes.push(
                    "a workbook: its cells are read as they are (no delimiter or decimal mark to set)".into(),
                );
                return Ok(g);
            }
            Err(e) => {
                first_error.get_or_insert(e);
            }
        }
    }
    Err(first_error.unwrap_or_else(|| IoError::Empty {
        path: path.to_path_buf(),
        hint: Some("the workbook has no sheet".into()),
    }))
}

/// [`detect_file`] on lines already read (`head` from the start of the
/// file, `tail` from its end, data lines only).
pub fn detect_lines(path: &Path, head: &[String], tail: &[String]) -> Result<FileGuess> {
    let nonblank: Vec<usize> = (0..head.len()).filter(|&i| !head[i].trim().is_empty()).collect();
    if nonblank.len() < 2 {
        return Err(unrecognised(path, head, "fewer than two lines with text".into()));
    }
    // 1. The delimiter: the first of tab, `;`, `|`, `,` that splits the last
    //    lines of the sample into the same number (>= 2) of cells.
    let bottom: Vec<&String> = nonblank
        .iter()
        .rev()
        .take((nonblank.len() / 2).clamp(2, 50))
        .map(|&i| &head[i])
        .chain(tail.iter().rev().take(50))
        .collect();
    let mut delim = None;
    for d in [b'\t', b';', b'|', b','] {
        let counts: Vec<usize> = bottom.iter().map(|l| split(l, d).len()).collect();
        let mut freq = std::collections::BTreeMap::new();
        for c in &counts {
            *freq.entry(*c).or_insert(0usize) += 1;
        }
        let (mode, n) = freq.iter().max_by_key(|(c, n)| (**n, **c)).map(|(c, n)| (*c, *n)).unwrap_or((0, 0));
        if mode >= 2 && n * 10 >= counts.len() * 8 {
            delim = Some((d, mode, n, counts.len()));
            break;
        }
    }
    let Some((delim, width, agree, of)) = delim else {
        return Err(unrecognised(
            path,
            head,
            "no delimiter (tab, `;`, `|` or `,`) splits the last lines into the same number of cells".into(),
        ));
    };
    let dname = match delim {
        b'\t' => "tab".to_string(),
        d => (d as char).to_string(),
    };
    let cells: Vec<Vec<String>> = head.iter().map(|l| split(l, delim)).collect();
    // 2. The first data row: a data-like line followed by data-like lines.
    let is_data = |i: usize| !head[i].trim().is_empty() && data_like(&cells[i]);
    let d = nonblank
        .iter()
        .position(|&i| is_data(i) && nonblank.iter().skip_while(|&&k| k <= i).take(5).all(|&k| is_data(k)));
    let Some(d) = d.map(|p| nonblank[p]) else {
        return Err(unrecognised(
            path,
            head,
            format!("no run of data rows (numbers and time stamps split by `{dname}`)"),
        ));
    };
    // 3. The header: among the text lines just above the data, the one that
    //    names a time word above a stamp, else the topmost that is as wide
    //    as the data rows.
    let above: Vec<usize> = nonblank.iter().copied().filter(|&i| i < d).collect();
    let mut run: Vec<usize> = Vec::new();
    for &i in above.iter().rev() {
        if data_like(&cells[i]) {
            break;
        }
        run.insert(0, i);
    }
    if run.is_empty() {
        return Err(unrecognised(
            path,
            head,
            format!("no header line above the first data row (line {}); potclim needs column names", d + 1),
        ));
    }
    let time_word = |c: &String| {
        let w = words(c);
        w.iter().any(|x| {
            ["time", "date", "timestamp", "datetime", "zeit", "datum", "hora", "fecha", "heure", "tijd"]
                .contains(&x.as_str())
        }) || c.to_lowercase().contains("time")
    };
    let wide: Vec<usize> =
        run.iter().copied().filter(|&i| cells[i].len() + 1 >= width && cells[i].len() >= 2).collect();
    let h = wide
        .iter()
        .copied()
        .find(|&i| cells[i].iter().any(time_word))
        .or_else(|| wide.first().copied())
        .unwrap_or(run[run.len() - 1]);
    let header: Vec<String> = cells[h].clone();
    let after: Vec<usize> = run.iter().copied().filter(|&i| i > h).collect();
    let units_line: Option<&Vec<String>> = after.first().map(|&i| &cells[i]);
    // Data cells by column: the head's data rows and the tail's rows.
    let mut rows: Vec<Vec<String>> =
        nonblank.iter().filter(|&&i| i >= d).map(|&i| cells[i].clone()).collect();
    rows.extend(tail.iter().map(|l| split(l, delim)));
    rows.retain(|r| r.len() >= 2);
    let ncol = header.len();
    let column = |j: usize| -> Vec<String> {
        rows.iter().filter_map(|r| r.get(j)).filter(|c| !c.is_empty()).cloned().collect()
    };
    let cols: Vec<Vec<String>> = (0..ncol).map(column).collect();
    // 4. The decimal mark.
    let comma_numbers = delim != b','
        && cols.iter().flatten().any(|c| {
            let b = c.as_bytes();
            b.iter().filter(|&&x| x == b',').count() == 1
                && b.iter().all(|x| x.is_ascii_digit() || *x == b',' || *x == b'-')
                && !c.starts_with(',')
                && !c.ends_with(',')
        });
    let dc =
        comma_numbers && !cols.iter().flatten().any(|c| number(c, false).is_some_and(|x| x.fract() != 0.0));
    let mut g = FileGuess {
        path: path.to_path_buf(),
        layout: None,
        keys: vec![],
        columns: vec![],
        notes: vec![],
        undecided: vec![],
    };
    // 5. The time column(s).
    let Some(time) = find_time(&header, &cols, dc) else {
        return Err(unrecognised(
            path,
            head,
            format!(
                "header on line {}, data from line {}, but no column (or date and time pair) reads as time stamps with any known pattern (columns: {})",
                h + 1,
                d + 1,
                header.join(", ")
            ),
        ));
    };
    // 6. A recurring layout.
    let layout = recognise(&header, h, after.len(), units_line, &cols, delim, dc);
    g.layout = layout;
    let implied = layout.map(|l| l.implied());
    let first_data = d + 1;
    let explain_lines = format!(
        "header on line {}{}, data from line {first_data}",
        h + 1,
        if after.is_empty() { String::new() } else { format!(", {} non-data line(s) after it", after.len()) }
    );
    match layout {
        Some(l) => {
            g.keys.push(Entry::decided("layout", q(l.name()), format!("{explain_lines}: {}", layout_why(l))))
        }
        None => {
            g.keys.push(Entry::decided(
                "delimiter",
                q(&dname),
                format!("splits {agree} of the last {of} lines into {width} cells"),
            ));
        }
    }
    if layout.is_none() || dc {
        g.keys.push(Entry::decided(
            "decimal",
            q(if dc { "," } else { "." }),
            if dc {
                "numbers such as `12,5` with no point".into()
            } else {
                "numbers written with a point".into()
            },
        ));
    }
    if implied.is_none_or(|m| m.skip_lines != h) && (h > 0 || layout.is_some()) {
        g.keys.push(Entry::decided(
            "skip_lines",
            h.to_string(),
            format!("{h} preamble line(s) before the header"),
        ));
    } else if layout.is_none() {
        g.keys.push(Entry::decided("skip_lines", "0".into(), "the header is the first line".into()));
    }
    if implied.is_none_or(|m| m.after_header != after.len()) && !after.is_empty() {
        g.keys.push(Entry::decided(
            "lines_after_header",
            after.len().to_string(),
            format!(
                "line(s) {} between the header and the data (units, codes)",
                after.iter().map(|i| (i + 1).to_string()).collect::<Vec<_>>().join(", ")
            ),
        ));
    }
    // Time column and pattern.
    let tnames: Vec<String> = time.columns.iter().map(|&j| header[j].clone()).collect();
    let time_offset =
        tnames.iter().find_map(|n| header_offset(n).map(|(name, o)| (name.to_string(), o, n.clone())));
    let tkeys: Vec<String> = tnames
        .iter()
        .map(|n| header_offset(n).map(|(name, _)| name.to_string()).unwrap_or_else(|| n.clone()))
        .collect();
    let tvalue = if tkeys.len() == 1 {
        q(&tkeys[0])
    } else {
        format!("[{}]", tkeys.iter().map(|t| q(t)).collect::<Vec<_>>().join(", "))
    };
    if implied.is_none_or(|m| tkeys.len() != 1 || tkeys[0] != m.time) {
        g.keys.push(Entry::decided(
            "time",
            tvalue,
            format!(
                "column {} of the header",
                time.columns.iter().map(|j| (j + 1).to_string()).collect::<Vec<_>>().join(" and ")
            ),
        ));
    }
    match time.patterns.as_slice() {
        [p] => {
            if implied.is_none_or(|m| m.time_format != p) {
                g.keys.push(Entry::decided("time_format", q(p), time.why.clone()));
            } else {
                g.notes.push(format!("time format of the layout: {}", time.why));
            }
        }
        ps => {
            g.keys.push(Entry::undecided("time_format", ps.iter().map(|p| q(p)).collect(), time.why.clone()));
            g.undecided.push(format!(
                "{}: {}: keep one of the two time formats (day-first `{}` or month-first `{}`)",
                path.display(),
                time.why,
                ps[0],
                ps[1]
            ));
        }
    }
    // Time zone.
    let absolute = time.patterns.iter().all(|p| TimeFormat::compile(p).is_ok_and(|t| t.is_absolute()));
    if absolute {
        g.notes.push("time zone: the stamps carry their own offset (or are UTC seconds)".into());
    } else if let Some((_, o, cell)) = &time_offset {
        let why = format!("the offset in the time header `{cell}` ({})", offset_text(*o));
        match layout {
            Some(Layout::TitledExport) => g.notes.push(format!("time zone: {why}")),
            _ => g.keys.push(Entry::decided("timezone", q("in_header"), why)),
        }
    } else if let Some((z, i)) = zone_in_preamble(&head[..h]) {
        g.keys.push(Entry::decided("timezone", q(&z), format!("named on line {} of the preamble", i + 1)));
    } else {
        g.keys.push(Entry::undecided(
            "timezone",
            vec![q("UTC"), q("UTC+01:00")],
            "no zone or offset in the header, the preamble or the stamps; without this key the block's times are read in [study].timezone".into(),
        ));
        g.undecided.push(
            "no time zone in the header, the preamble or the stamps: the times are read in [study].timezone unless `timezone` is set (an IANA name or a fixed offset such as \"UTC+01:00\")"
                .into(),
        );
    }
    // 7. Columns that are not channels: time, counters, the sensor id.
    let mut taken: BTreeSet<usize> = time.columns.iter().copied().collect();
    for (j, c) in cols.iter().enumerate() {
        if counter(c, dc) {
            taken.insert(j);
        }
    }
    match layout {
        Some(l) => g.notes.push(format!("sensor id: {}", sensor_of_layout(l, head, h, &header, path))),
        None => {
            let idword = |n: &str| {
                let w = words(n);
                w.iter().any(|x| {
                    ["sensor", "logger", "device", "station", "probe", "id", "name", "node", "unit", "plot"]
                        .contains(&x.as_str())
                })
            };
            let text_col = |j: usize| {
                let c = &cols[j];
                !taken.contains(&j)
                    && c.len() * 100 >= rows.len() * 95
                    && c.iter().all(|x| number(x, dc).is_none())
            };
            let pick = (0..ncol)
                .find(|&j| text_col(j) && idword(&header[j]))
                .or_else(|| (0..ncol).find(|&j| text_col(j)));
            match pick {
                Some(j) => {
                    let ids: BTreeSet<&String> = cols[j].iter().collect();
                    let shown: Vec<&str> = ids.iter().take(4).map(|s| s.as_str()).collect();
                    g.keys.push(Entry::decided(
                        "sensor",
                        q(&header[j]),
                        format!("a text column with {} id(s) in the sample: {}", ids.len(), shown.join(", ")),
                    ));
                    taken.insert(j);
                }
                None => g.keys.push(Entry::decided(
                    "sensor_from",
                    q("file_stem"),
                    format!(
                        "no id column: the sensor id is the file name `{}`",
                        path.file_stem().map(|s| s.to_string_lossy().into_owned()).unwrap_or_default()
                    ),
                )),
            }
        }
    }
    // 8. Channels.
    let mut assigned: [Option<usize>; 3] = [None; 3];
    let mut unknown: Vec<(usize, Range)> = Vec::new();
    for j in 0..ncol {
        if taken.contains(&j) {
            continue;
        }
        let Some(r) = range_of(&cols[j], dc) else { continue };
        let name = &header[j];
        let unit = units_line.and_then(|u| u.get(j)).map(String::as_str);
        let span = format!("values {}..{}", fmt_num(r.min), fmt_num(r.max));
        let (ch, entry) = match channel_of(name, unit) {
            Some((ch, Some(u))) => {
                let words = match unit {
                    Some(u2) if !u2.is_empty() => format!("`{name}` with unit `{u2}`"),
                    _ => format!("`{name}`"),
                };
                let needs_key = layout.is_none() || assigned[ch.index()].is_some();
                let e = Entry::decided(
                    ch.key(),
                    channel_value(name, u),
                    format!("the header words {words}; {span}"),
                );
                if !needs_key && assigned[ch.index()].is_none() {
                    g.notes.push(format!(
                        "{}: the layout finds {} (`{name}`, {u}; {span})",
                        ch.key(),
                        ch.key()
                    ));
                    assigned[ch.index()] = Some(j);
                    continue;
                }
                (ch, e)
            }
            Some((ch, None)) => {
                let choices = ["lux_sunlight", "lux_hps", "lux_white_led"]
                    .iter()
                    .map(|u| channel_value(name, u))
                    .collect();
                let why = format!(
                    "`{name}` is light in lux ({span}); the conversion to PPFD depends on the light source: keep the line of yours"
                );
                g.undecided.push(format!("{}: column `{name}` is light in lux: choose its light source (sunlight, HPS lamps, white LEDs)", path.display()));
                (ch, Entry::undecided(ch.key(), choices, why))
            }
            None => match channel_word(name) {
                Some(ch) => match unit_by_range(ch, r) {
                    Ok((u, why)) => (
                        ch,
                        Entry::decided(
                            ch.key(),
                            channel_value(name, u),
                            format!("the word in `{name}` and {why}"),
                        ),
                    ),
                    Err(us) => {
                        let why =
                            format!("`{name}` names {} but no unit, and {span} does not decide it", ch.key());
                        g.undecided.push(format!("{}: {why}", path.display()));
                        (
                            ch,
                            Entry::undecided(
                                ch.key(),
                                us.iter().map(|u| channel_value(name, u)).collect(),
                                why,
                            ),
                        )
                    }
                },
                None => {
                    unknown.push((j, r));
                    continue;
                }
            },
        };
        if let Some(prev) = assigned[ch.index()] {
            g.notes.push(format!("`{name}` is {} too; the block uses `{}`", ch.key(), header[prev]));
            continue;
        }
        assigned[ch.index()] = Some(j);
        g.columns.push(entry);
    }
    for (j, r) in unknown {
        let name = &header[j];
        let span = format!("values {}..{}", fmt_num(r.min), fmt_num(r.max));
        if not_a_channel(name) {
            g.notes.push(format!("column `{name}` ({span}) is not a channel potclim uses"));
            continue;
        }
        let mut choices = Vec::new();
        for ch in Channel::ALL {
            if assigned[ch.index()].is_some() {
                continue;
            }
            let fits: &[&str] = match ch {
                Channel::Temperature if r.min >= -10.0 && r.max <= 50.0 => &["degC"],
                Channel::Temperature if r.min >= 14.0 && r.max <= 122.0 => &["degF"],
                Channel::Humidity if r.min >= 0.0 && r.max <= 1.0 => &["fraction"],
                Channel::Humidity if r.min >= 0.0 && r.max <= 100.0 => &["percent"],
                Channel::Light if r.min >= 0.0 && r.max <= 2500.0 => &["umol_m2_s"],
                _ => &[],
            };
            for u in fits {
                choices.push((ch, channel_value(name, u)));
            }
        }
        if choices.is_empty() {
            g.notes.push(format!("column `{name}` ({span}) is not a channel potclim uses"));
            continue;
        }
        let why = format!(
            "column `{name}` has no header word or unit, and {span} fits {}",
            choices.iter().map(|(c, _)| c.key()).collect::<Vec<_>>().join(" or ")
        );
        g.undecided.push(format!("{}: {why}; keep one line, or none if it is not a channel", path.display()));
        for (ch, v) in choices {
            g.columns.push(Entry::undecided(ch.key(), vec![v], why.clone()));
        }
    }
    if assigned.iter().all(Option::is_none)
        && g.columns.iter().all(|e| e.value.is_none())
        && g.undecided.is_empty()
    {
        return Err(unrecognised(
            path,
            head,
            format!("no temperature, humidity or light column recognised among {}", header.join(", ")),
        ));
    }
    Ok(g)
}

fn offset_text(secs: i32) -> String {
    let s = if secs < 0 { '-' } else { '+' };
    let a = secs.abs();
    format!("UTC{s}{:02}:{:02}", a / 3600, a % 3600 / 60)
}

/// `{ column = "...", unit = "..." }`.
fn channel_value(column: &str, unit: &str) -> String {
    format!("{{ column = {}, unit = {} }}", q(column), q(unit))
}

/// Which layout, if any, the file's lines show.
fn recognise(
    header: &[String],
    h: usize,
    after: usize,
    units: Option<&Vec<String>>,
    cols: &[Vec<String>],
    delim: u8,
    dc: bool,
) -> Option<Layout> {
    if delim != b',' || dc {
        return None;
    }
    let ts = header.iter().position(|c| c == "TIMESTAMP");
    if h == 1
        && after == 2
        && header.iter().any(|c| c == "RECORD")
        && ts.is_some_and(|i| units.and_then(|u| u.get(i)).map(String::as_str) == Some("TS"))
    {
        return Some(Layout::FourLineHeader);
    }
    if h == 1 && after == 0 && header.iter().any(|c| header_offset(c).is_some_and(|(n, _)| n == "Date Time"))
    {
        return Some(Layout::TitledExport);
    }
    let rowword = |s: &str| {
        ["#", "no", "no.", "nr", "index", "row", "record", "n"].contains(&s.to_lowercase().as_str())
    };
    if h == 0
        && after == 0
        && header.len() >= 3
        && header[1] == "Time"
        && !header[0].is_empty()
        && !rowword(&header[0])
        && cols.first().is_some_and(|c| counter(c, false))
    {
        return Some(Layout::NameInFirstCell);
    }
    None
}

fn layout_why(l: Layout) -> &'static str {
    match l {
        Layout::FourLineHeader => {
            "a station line, field names with TIMESTAMP and RECORD, units with TS under the time, processing codes"
        }
        Layout::TitledExport => {
            "a title line, then a header whose time column names its offset (`Date Time, GMT...`)"
        }
        Layout::NameInFirstCell => {
            "the first header cell names the sensor above a row-number column, then `Time`"
        }
    }
}

/// Where a layout finds the sensor id of this file, for the comment.
fn sensor_of_layout(l: Layout, head: &[String], h: usize, header: &[String], path: &Path) -> String {
    match l {
        Layout::FourLineHeader => {
            let station =
                head.first().map(|x| split(x, b',')).and_then(|c| c.get(1).cloned()).unwrap_or_default();
            format!("the station name `{station}` on line 1 (the layout's)")
        }
        Layout::TitledExport => match header.iter().find_map(|c| c.find("S/N").map(|_| c.clone())) {
            Some(c) => format!("the serial number in `{c}` (the layout's)"),
            None => format!(
                "no serial number in the header: the file name `{}`",
                path.file_stem().map(|s| s.to_string_lossy().into_owned()).unwrap_or_default()
            ),
        },
        Layout::NameInFirstCell => {
            format!("the first header cell `{}` on line {} (the layout's)", header[0], h + 1)
        }
    }
}

/// A group of files with one guessed block.
#[derive(Debug, Clone)]
pub struct Group {
    /// The files, sorted.
    pub files: Vec<PathBuf>,
    /// The guess of the first file (its comments quote that file).
    pub guess: FileGuess,
    /// Undecided items of every file of the group, each once.
    pub undecided: Vec<String>,
}

/// Put files with the same guesses into one group, in order of first file.
pub fn group(guesses: Vec<FileGuess>) -> Vec<Group> {
    let mut out: Vec<(String, Group)> = Vec::new();
    for g in guesses {
        let sig = g.signature();
        match out.iter_mut().find(|(s, _)| *s == sig) {
            Some((_, grp)) => {
                grp.files.push(g.path.clone());
                for u in g.undecided {
                    if !grp.undecided.contains(&u) {
                        grp.undecided.push(u);
                    }
                }
            }
            None => {
                let grp = Group { files: vec![g.path.clone()], undecided: g.undecided.clone(), guess: g };
                out.push((sig, grp));
            }
        }
    }
    out.into_iter().map(|(_, g)| g).collect()
}

/// `path` relative to `base` (both made absolute), with `..` where needed,
/// written with `/`.
pub fn relative(path: &Path, base: &Path) -> String {
    let abs = |p: &Path| std::path::absolute(p).unwrap_or_else(|_| p.to_path_buf());
    let (p, b) = (abs(path), abs(base));
    let pc: Vec<_> = p.components().collect();
    let bc: Vec<_> = b.components().collect();
    let common = pc.iter().zip(&bc).take_while(|(a, b)| a == b).count();
    let mut parts: Vec<String> = vec!["..".into(); bc.len() - common];
    parts.extend(pc[common..].iter().map(|c| c.as_os_str().to_string_lossy().into_owned()));
    parts.join("/")
}

/// The `files` value of a group: `dir/*.ext` when that glob matches exactly
/// the group's files, else the list of files.
fn files_value(files: &[PathBuf], base: &Path) -> (String, String) {
    let rel: Vec<String> = files.iter().map(|f| relative(f, base)).collect();
    let parent = files[0].parent().map(Path::to_path_buf).unwrap_or_default();
    let ext = files[0].extension().map(|e| e.to_string_lossy().into_owned());
    if files.len() > 1
        && let Some(ext) = ext
        && files.iter().all(|f| {
            f.parent() == Some(parent.as_path())
                && f.extension().map(|e| e.to_string_lossy().into_owned()).as_ref() == Some(&ext)
        })
    {
        let pat = parent.join(format!("*.{}", glob::Pattern::escape(&ext)));
        let matched: BTreeSet<PathBuf> =
            glob::glob(&glob::Pattern::escape(&parent.to_string_lossy()).to_string())
                .ok()
                .and_then(|_| {
                    glob::glob(&format!(
                        "{}/*.{}",
                        glob::Pattern::escape(&parent.to_string_lossy()),
                        glob::Pattern::escape(&ext)
                    ))
                    .ok()
                })
                .map(|it| {
                    it.filter_map(|p| p.ok())
                        .filter(|p| p.is_file())
                        .map(|p| std::path::absolute(&p).unwrap_or(p))
                        .collect()
                })
                .unwrap_or_default();
        let ours: BTreeSet<PathBuf> =
            files.iter().map(|p| std::path::absolute(p).unwrap_or_else(|_| p.clone())).collect();
        if matched == ours {
            let rel_pat = relative(&pat, base);
            let rel_dir = rel_pat
                .rsplit_once('/')
                .map(|(d, _)| glob::Pattern::escape(d))
                .map(|d| format!("{d}/"))
                .unwrap_or_default();
            return (
                format!("[{}]", q(&format!("{rel_dir}*.{}", glob::Pattern::escape(&ext)))),
                format!("every .{ext} file of the folder"),
            );
        }
    }
    let list: Vec<String> = rel.iter().map(|r| q(&glob::Pattern::escape(r))).collect();
    (format!("[{}]", list.join(", ")), String::new())
}

/// Write the `[[logs]]` block of a group; paths relative to `base` (the
/// study file's folder).
pub fn render(grp: &Group, base: &Path) -> String {
    let g = &grp.guess;
    let mut out = String::new();
    let names: Vec<String> = grp.files.iter().map(|f| relative(f, base)).collect();
    let shown = if names.len() > 4 {
        format!("{}, ... ({} files)", names[..4].join(", "), names.len())
    } else {
        names.join(", ")
    };
    out.push_str(&format!("# Detected from {shown}; comments quote {}.\n", names[0]));
    out.push_str("[[logs]]\n");
    let (files, why) = files_value(&grp.files, base);
    out.push_str(&format!(
        "files = {files}{}\n",
        if why.is_empty() { String::new() } else { format!("  # {why}") }
    ));
    let entry = |out: &mut String, e: &Entry| match &e.value {
        Some(v) => out.push_str(&format!("{} = {v}  # {}\n", e.key, e.why)),
        None => {
            out.push_str(&format!("# UNDECIDED ({}): {}\n", e.key, e.why));
            for c in &e.choices {
                out.push_str(&format!("# {} = {c}\n", e.key));
            }
        }
    };
    for e in &g.keys {
        entry(&mut out, e);
    }
    for n in &g.notes {
        out.push_str(&format!("# {n}\n"));
    }
    if !g.columns.is_empty() {
        out.push_str("[logs.columns]\n");
        let mut seen_why: Vec<&str> = Vec::new();
        for e in &g.columns {
            if e.value.is_none() && seen_why.contains(&e.why.as_str()) {
                for c in &e.choices {
                    out.push_str(&format!("# {} = {c}\n", e.key));
                }
                continue;
            }
            seen_why.push(&e.why);
            entry(&mut out, e);
        }
    }
    out
}

/// Detect every file, group them and write the blocks; files that match
/// nothing are returned as errors (the others are still written).
pub fn suggest(files: &[PathBuf], base: &Path) -> (String, Vec<Group>, Vec<IoError>) {
    let mut guesses = Vec::new();
    let mut errors = Vec::new();
    for f in files {
        match detect_file(f) {
            Ok(g) => guesses.push(g),
            Err(e) => errors.push(e),
        }
    }
    let groups = group(guesses);
    let text = groups.iter().map(|g| render(g, base)).collect::<Vec<_>>().join("\n");
    (text, groups, errors)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn guess(text: &str) -> FileGuess {
        let lines = lines_of(text);
        detect_lines(Path::new("logs/t7.csv"), &lines, &[]).unwrap()
    }

    fn key<'a>(g: &'a FileGuess, k: &str) -> Option<&'a Entry> {
        g.keys.iter().chain(&g.columns).find(|e| e.key == k)
    }

    #[test]
    fn semicolons_decimal_commas_and_a_preamble() {
        let mut t = String::from("Logger: bench 3\nSerial: 4471\n\nDate/Time;T [°C];RH [%]\n");
        for i in 0..40 {
            t.push_str(&format!(
                "{:02}.03.2026 {:02}:{:02};{},{};{},5\n",
                1 + i / 24,
                i % 24,
                0,
                18 + i % 5,
                i % 10,
                60 + i % 9
            ));
        }
        let g = guess(&t);
        assert_eq!(key(&g, "delimiter").unwrap().value.as_deref(), Some("\";\""));
        assert_eq!(key(&g, "decimal").unwrap().value.as_deref(), Some("\",\""));
        assert_eq!(key(&g, "skip_lines").unwrap().value.as_deref(), Some("3"));
        assert_eq!(key(&g, "time").unwrap().value.as_deref(), Some("\"Date/Time\""));
        // Days 1 and 2 only: day-first or month-first cannot be told.
        let tf = key(&g, "time_format").unwrap();
        assert!(
            tf.value.is_none() && tf.choices == ["\"%d.%m.%Y %H:%M\"", "\"%m.%d.%Y %H:%M\""]
                || tf.value.as_deref() == Some("\"%d.%m.%Y %H:%M\""),
            "{tf:?}"
        );
        assert!(key(&g, "temperature").unwrap().value.as_deref().unwrap().contains("degC"));
        assert!(key(&g, "humidity").unwrap().value.as_deref().unwrap().contains("percent"));
        assert_eq!(key(&g, "sensor_from").unwrap().value.as_deref(), Some("\"file_stem\""));
        assert!(key(&g, "timezone").unwrap().value.is_none(), "no zone anywhere is undecided");
    }

    #[test]
    fn day_order_undecided_until_a_day_exceeds_12() {
        let rows = |days: std::ops::Range<u32>| {
            let mut t = String::from("time,temp_c\n");
            for d in days {
                t.push_str(&format!("{d:02}/04/2026 10:00,21.5\n"));
            }
            t
        };
        let g = guess(&rows(1..12));
        let tf = key(&g, "time_format").unwrap();
        assert!(tf.value.is_none(), "{tf:?}");
        assert_eq!(tf.choices, ["\"%d/%m/%Y %H:%M\"", "\"%m/%d/%Y %H:%M\""]);
        assert!(g.undecided.iter().any(|u| u.contains("day-first")));
        let g = guess(&rows(5..20));
        assert_eq!(key(&g, "time_format").unwrap().value.as_deref(), Some("\"%d/%m/%Y %H:%M\""));
    }

    #[test]
    fn unit_without_header_word_and_ambiguous_range_is_a_choice() {
        let mut t = String::from("stamp,ch1,ch2\n");
        for i in 0..30 {
            t.push_str(&format!("2026-05-01 {:02}:00:00,{}.5,{}\n", i % 24, 40 + i % 7, 20 + i % 3));
        }
        let g = guess(&t);
        let ch: Vec<&Entry> =
            g.columns.iter().filter(|e| e.choices.iter().any(|c| c.contains("ch1"))).collect();
        assert!(ch.len() >= 2 && ch.iter().all(|e| e.value.is_none()), "{:?}", g.columns);
        assert!(g.undecided.iter().any(|u| u.contains("ch1")));
    }

    #[test]
    fn text_without_rows_is_unrecognised_with_the_lines_read() {
        let e = detect_lines(
            Path::new("notes.txt"),
            &lines_of("Some notes\nabout the greenhouse\nno data here\n"),
            &[],
        )
        .unwrap_err()
        .to_string();
        assert!(
            e.contains("notes.txt") && e.contains("line 1: Some notes") && e.contains("no delimiter"),
            "{e}"
        );
    }

    /// Seeded mutations of exports of several formats (truncated lines,
    /// stray quotes, byte-order marks, lone carriage returns, emptied
    /// cells, non-UTF-8 bytes, blank rows): detection never panics; it
    /// gives a block or an error that names the file and shows the lines
    /// read.
    #[test]
    fn mutated_exports_give_a_guess_or_a_located_error() {
        use rand::{RngExt, SeedableRng};
        let mut bases: Vec<String> = Vec::new();
        let mut a = String::from("timestamp;logger;T [°C];RH [%]\n");
        let mut b = String::from("\"Title\"\n\"#\",\"Date Time, GMT+02:00\",\"Temp, °C (S/N: 9)\"\n");
        let mut c = String::from(
            "\"F\",\"st1\"\n\"TIMESTAMP\",\"RECORD\",\"AirT_Avg\"\n\"TS\",\"RN\",\"Deg C\"\n\"\",\"\",\"Avg\"\n",
        );
        let mut d = String::from("Date\tTime\tt_air\tlux\n");
        for i in 0..40 {
            a.push_str(&format!(
                "2026-05-{:02} 10:{:02};L{};{},5;{}\n",
                1 + i / 6,
                i % 6 * 10,
                i % 2,
                15 + i % 4,
                60 + i % 9
            ));
            b.push_str(&format!(
                "{},06/{:02}/26 0{}:{:02}:00 AM,{}.5\n",
                i + 1,
                10 + i / 8,
                1 + i % 8,
                i % 4 * 15,
                20 + i % 5
            ));
            c.push_str(&format!("\"2026-05-01 {:02}:{:02}:00\",{i},{}.5\n", i / 6, i % 6 * 10, 15 + i % 4));
            d.push_str(&format!(
                "{:02}/07/2026\t{:02}:00\t{}.1\t{}\n",
                1 + i / 24,
                i % 24,
                20 + i % 3,
                i * 100
            ));
        }
        bases.extend([a, b, c, d]);
        let mut rng = rand_chacha::ChaCha20Rng::seed_from_u64(1717);
        let (mut ok, mut err) = (0, 0);
        for case in 0..2000 {
            let mut bytes = bases[case % bases.len()].clone().into_bytes();
            for _ in 0..rng.random_range(1..6) {
                let at = rng.random_range(0..=bytes.len());
                match rng.random_range(0..7) {
                    0 => bytes.truncate(at),
                    1 => bytes.insert(at, b'"'),
                    2 => bytes.splice(0..0, *b"\xEF\xBB\xBF").for_each(drop),
                    3 => bytes.insert(at, b'\r'),
                    4 => bytes.insert(at, 0xB0),
                    5 => {
                        let end = (at + rng.random_range(0..8)).min(bytes.len());
                        bytes.drain(at..end);
                    }
                    _ => bytes.splice(at..at, *b"\r\n,,\n").for_each(drop),
                }
            }
            let lines = lines_of(&decode(&bytes));
            match detect_lines(Path::new("m.csv"), &lines, &[]) {
                Ok(g) => {
                    ok += 1;
                    assert!(
                        g.keys.iter().any(|e| e.key == "time" || e.key == "layout"),
                        "case {case}: {g:?}"
                    );
                }
                Err(e) => {
                    err += 1;
                    let m = e.to_string();
                    assert!(m.contains("m.csv") && m.contains("line 1:"), "case {case}: {m}");
                }
            }
        }
        assert!(ok > 1000 && err > 10, "{ok} guessed, {err} errors");
    }

    #[test]
    fn twins_swap_day_and_month() {
        assert_eq!(twin("%d/%m/%Y").as_deref(), Some("%m/%d/%Y"));
        assert_eq!(twin("%m-%d-%y").as_deref(), Some("%d-%m-%y"));
        assert_eq!(twin("%Y-%m-%d"), None);
    }

    #[test]
    fn relative_paths_climb_when_needed() {
        assert_eq!(relative(Path::new("/a/b/logs/x.csv"), Path::new("/a/b")), "logs/x.csv");
        assert_eq!(relative(Path::new("/a/logs/x.csv"), Path::new("/a/b")), "../logs/x.csv");
    }
}
