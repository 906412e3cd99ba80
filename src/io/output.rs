//! Output of every stage: the one CSV format and the atomic publication of a
//! stage's files.
//!
//! **One CSV format** ([`CsvTable`], [`number`], [`field`]): every table
//! potclim writes (ingestion, climate, mapping, model, verdict) goes through
//! these three, so that a number or a text cell looks the same in every file:
//! * a number is written with the shortest decimal representation that reads
//!   back to the same double (Rust's `{}`; magnitudes below 1e-4 or from 1e16
//!   on in exponent form, `1.5e-7`, which every CSV reader parses); negative
//!   zero is written `0`; a missing, infinite or NaN value is an empty cell
//!   (docs/outputs.md, "Conventions");
//! * a text cell is quoted only when it holds the delimiter, a double quote or
//!   a line break, with inner double quotes doubled (RFC 4180, section 2);
//! * fields are separated by `,` and records end with `\n`.
//!
//! The simulator's logger exports are the exception on purpose: a logger
//! prints a fixed number of decimals, so they use their own fixed format, but
//! the same quoting rule ([`field`] with their delimiter).
//!
//! **Atomic publication** ([`StageWriter`]): a stage writes all its files
//! into a hidden staging folder inside the output folder, and only when every
//! file is complete are they renamed into place (a rename within one file
//! system is atomic). A stage that fails leaves the previous outputs untouched
//! and no half-written file under a final name. Dropping an uncommitted
//! [`StageWriter`] removes the staging folder.

use super::error::{IoError, Result};
use std::borrow::Cow;
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

/// A number as potclim writes it in a CSV cell: the shortest decimal that
/// reads back to the same double, in exponent form below 1e-4 or from 1e16 on
/// in magnitude; empty for NaN and ±infinity; `0` for negative zero.
///
/// ```
/// use potclim::io::output::number;
/// assert_eq!(number(0.1 + 0.2), "0.30000000000000004");
/// assert_eq!(number(2.0), "2");
/// assert_eq!(number(-1.5e-7), "-1.5e-7");
/// assert_eq!(number(f64::NAN), "");
/// ```
pub fn number(v: f64) -> String {
    if !v.is_finite() {
        return String::new();
    }
    if v == 0.0 {
        return "0".into();
    }
    let a = v.abs();
    if (1e-4..1e16).contains(&a) { format!("{v}") } else { format!("{v:e}") }
}

/// [`number`] of a value that may be undefined (`None` is an empty cell).
pub fn opt_number(v: Option<f64>) -> String {
    v.map(number).unwrap_or_default()
}

/// A text cell for a table separated by `delimiter`: quoted when it holds the
/// delimiter, a double quote, a carriage return or a line feed, with inner
/// double quotes doubled (RFC 4180, section 2); otherwise as is.
pub fn field(s: &str, delimiter: char) -> Cow<'_, str> {
    if s.contains([delimiter, '"', '\n', '\r']) {
        Cow::Owned(format!("\"{}\"", s.replace('"', "\"\"")))
    } else {
        Cow::Borrowed(s)
    }
}

/// One CSV table built in memory in potclim's single format (see the module
/// doc): a header, then records of the same width. Cells are text; format
/// numbers with [`number`] / [`opt_number`] first.
#[derive(Debug, Clone)]
pub struct CsvTable {
    text: String,
    delimiter: char,
    width: usize,
}

impl CsvTable {
    /// A comma-separated table with this header.
    pub fn new<I, S>(header: I) -> CsvTable
    where
        I: IntoIterator<Item = S>,
        S: AsRef<str>,
    {
        CsvTable::with_delimiter(',', header)
    }

    /// A table separated by `delimiter` (the simulator's logger exports).
    pub fn with_delimiter<I, S>(delimiter: char, header: I) -> CsvTable
    where
        I: IntoIterator<Item = S>,
        S: AsRef<str>,
    {
        let mut t = CsvTable { text: String::new(), delimiter, width: 0 };
        t.width = t.push(header);
        t
    }

    /// Append one record. Its width must be the header's (a writer bug
    /// otherwise; checked in debug builds).
    pub fn row<I, S>(&mut self, cells: I)
    where
        I: IntoIterator<Item = S>,
        S: AsRef<str>,
    {
        let n = self.push(cells);
        debug_assert_eq!(n, self.width, "a record of {n} fields in a table of {} columns", self.width);
    }

    fn push<I, S>(&mut self, cells: I) -> usize
    where
        I: IntoIterator<Item = S>,
        S: AsRef<str>,
    {
        let start = self.text.len();
        let mut n = 0;
        for c in cells {
            if n > 0 {
                self.text.push(self.delimiter);
            }
            let _ = write!(self.text, "{}", field(c.as_ref(), self.delimiter));
            n += 1;
        }
        // A record of one empty field would be a blank line, which readers
        // skip: write it as an empty quoted field.
        if n == 1 && self.text.len() == start {
            self.text.push_str("\"\"");
        }
        self.text.push('\n');
        n
    }

    /// The number of columns.
    pub fn width(&self) -> usize {
        self.width
    }

    /// The table's text so far.
    pub fn as_str(&self) -> &str {
        &self.text
    }

    /// The finished table as UTF-8 bytes.
    pub fn into_bytes(self) -> Vec<u8> {
        self.text.into_bytes()
    }

    /// The finished table as a string.
    pub fn into_string(self) -> String {
        self.text
    }
}

/// Collects the files of one stage and publishes them together.
#[derive(Debug)]
pub struct StageWriter {
    out: PathBuf,
    staging: PathBuf,
    files: Vec<String>,
    committed: bool,
}

impl StageWriter {
    /// Create the output folder if needed and a fresh staging folder in it,
    /// named after the stage.
    pub fn new(out: &Path, stage: &str) -> Result<StageWriter> {
        std::fs::create_dir_all(out)
            .map_err(|source| IoError::Read { path: out.to_path_buf(), reason: source })?;
        let staging = out.join(format!(".{stage}.partial-{}", std::process::id()));
        if staging.exists() {
            let _ = std::fs::remove_dir_all(&staging);
        }
        std::fs::create_dir_all(&staging)
            .map_err(|source| IoError::Read { path: staging.clone(), reason: source })?;
        Ok(StageWriter { out: out.to_path_buf(), staging, files: Vec::new(), committed: false })
    }

    /// The staging path for output file `name` (a plain file name, or a
    /// relative path such as `figures/map.svg`). Write the file there; it is
    /// published by [`StageWriter::commit`].
    pub fn path(&mut self, name: &str) -> PathBuf {
        let p = self.staging.join(name);
        if let Some(parent) = p.parent() {
            let _ = std::fs::create_dir_all(parent);
        }
        if !self.files.iter().any(|f| f == name) {
            self.files.push(name.to_string());
        }
        p
    }

    /// Write a whole file from bytes.
    pub fn write(&mut self, name: &str, bytes: &[u8]) -> Result<()> {
        let p = self.path(name);
        std::fs::write(&p, bytes).map_err(|source| IoError::Read { path: p, reason: source })
    }

    /// The folder the files will be published to.
    pub fn output_dir(&self) -> &Path {
        &self.out
    }

    /// Rename every staged file into the output folder, then remove the
    /// staging folder. Returns the published paths.
    pub fn commit(mut self) -> Result<Vec<PathBuf>> {
        let mut published = Vec::new();
        for name in &self.files {
            let from = self.staging.join(name);
            if !from.exists() {
                return Err(IoError::Table {
                    path: from,
                    message: "an output file was announced but never written".into(),
                });
            }
            let to = self.out.join(name);
            if let Some(parent) = to.parent() {
                std::fs::create_dir_all(parent)
                    .map_err(|source| IoError::Read { path: parent.to_path_buf(), reason: source })?;
            }
            std::fs::rename(&from, &to)
                .map_err(|source| IoError::Read { path: to.clone(), reason: source })?;
            published.push(to);
        }
        let _ = std::fs::remove_dir_all(&self.staging);
        self.committed = true;
        Ok(published)
    }
}

impl Drop for StageWriter {
    fn drop(&mut self) {
        if !self.committed {
            let _ = std::fs::remove_dir_all(&self.staging);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Every number written reads back to the same double (the defining
    /// property of the format), over values spanning many magnitudes from a
    /// fixed seed; and the digits are the shortest: no shorter decimal reads
    /// back (checked by rounding to one digit fewer).
    #[test]
    fn numbers_read_back_to_the_same_double_with_the_shortest_digits() {
        use rand::{RngExt, SeedableRng};
        let mut r = rand_chacha::ChaCha20Rng::seed_from_u64(1);
        for _ in 0..20_000 {
            let m: f64 = r.random::<f64>() * 2.0 - 1.0;
            let e: i32 = r.random_range(-30..30);
            let v = m * 10f64.powi(e);
            let s = number(v);
            assert_eq!(s.parse::<f64>().unwrap(), if v == 0.0 { 0.0 } else { v }, "{v} -> {s}");
            let digits: String = s.split('e').next().unwrap().chars().filter(char::is_ascii_digit).collect();
            // Significant digits: zeros at either end only place the point.
            let sig = digits.trim_start_matches('0').trim_end_matches('0').len();
            if sig > 1 {
                let shorter = format!("{:.*e}", sig - 2, v);
                assert_ne!(shorter.parse::<f64>().unwrap(), v, "{v}: {shorter} is shorter than {s}");
            }
        }
        assert_eq!(number(-0.0), "0");
        assert_eq!(number(1e16), "1e16");
        assert_eq!(number(123456.789), "123456.789");
        assert_eq!(number(0.0001), "0.0001");
        assert_eq!(number(f64::INFINITY), "");
        assert_eq!(opt_number(None), "");
    }

    /// Quoting as RFC 4180 section 2 describes: only cells with the
    /// delimiter, a quote or a line break are quoted; the csv crate (an
    /// independent reader) reads every cell back unchanged.
    #[test]
    fn cells_are_quoted_only_when_needed_and_read_back() {
        assert_eq!(field("plain", ','), "plain");
        assert_eq!(field("a,b", ','), "\"a,b\"");
        assert_eq!(field("a,b", ';'), "a,b");
        assert_eq!(field("say \"hi\"", ','), "\"say \"\"hi\"\"\"");
        let cells = ["x", "a,b", "q\"uote", "line\nbreak", "cr\rhere", ""];
        let mut t = CsvTable::new(["c1", "c2", "c3", "c4", "c5", "c6"]);
        t.row(cells);
        let mut one = CsvTable::new(["only"]);
        one.row([""]);
        assert_eq!(one.as_str(), "only\n\"\"\n");
        let mut rd = csv::Reader::from_reader(t.as_str().as_bytes());
        let rec = rd.records().next().unwrap().unwrap();
        assert_eq!(rec.iter().collect::<Vec<_>>(), cells);
        let mut rd = csv::Reader::from_reader(one.as_str().as_bytes());
        assert_eq!(rd.records().next().unwrap().unwrap().get(0), Some(""));
    }

    #[test]
    fn files_appear_only_on_commit() {
        let d = tempfile::tempdir().unwrap();
        let mut w = StageWriter::new(d.path(), "ingest").unwrap();
        w.write("a.csv", b"x\n1\n").unwrap();
        w.write("sub/b.csv", b"y\n").unwrap();
        assert!(!d.path().join("a.csv").exists());
        let published = w.commit().unwrap();
        assert_eq!(published.len(), 2);
        assert_eq!(std::fs::read_to_string(d.path().join("a.csv")).unwrap(), "x\n1\n");
        assert!(d.path().join("sub/b.csv").exists());
        let leftovers: Vec<_> = std::fs::read_dir(d.path())
            .unwrap()
            .filter(|e| e.as_ref().unwrap().file_name().to_string_lossy().starts_with('.'))
            .collect();
        assert!(leftovers.is_empty());
    }

    #[test]
    fn dropped_writer_leaves_nothing() {
        let d = tempfile::tempdir().unwrap();
        std::fs::write(d.path().join("a.csv"), "old\n").unwrap();
        {
            let mut w = StageWriter::new(d.path(), "ingest").unwrap();
            w.write("a.csv", b"new\n").unwrap();
        }
        assert_eq!(std::fs::read_to_string(d.path().join("a.csv")).unwrap(), "old\n");
        assert_eq!(std::fs::read_dir(d.path()).unwrap().count(), 1);
    }
}
