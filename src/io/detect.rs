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

use super::clock::TimeFormat;
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

#[path = "detect_time.rs"]
mod time;
use time::{find_time, zone_in_preamble};
#[path = "detect_columns.rs"]
mod columns;
use columns::{Range, channel_word, counter, fmt_num, not_a_channel, range_of, unit_by_range, words};
#[path = "detect_groups.rs"]
mod groups;
pub use groups::{Group, group, relative, render, suggest};

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

#[cfg(test)]
#[path = "detect_tests.rs"]
mod tests;
