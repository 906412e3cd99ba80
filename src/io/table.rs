//! Small delimited tables (pot and sensor tables, up to some 10^5 rows), read
//! whole with the csv crate so that every cell keeps its physical line number.
//! Logger exports, which are large, are read elsewhere (`io::logs`).

use super::error::{IoError, Result, closest};
use std::path::{Path, PathBuf};

/// A delimited text table held as strings, with the physical line of each row.
#[derive(Debug, Clone)]
pub struct Table {
    /// The file.
    pub path: PathBuf,
    /// Header names, trimmed.
    pub headers: Vec<String>,
    /// Physical line of the header (1-based).
    pub header_line: usize,
    /// Rows of trimmed cells; every row has `headers.len()` cells.
    pub rows: Vec<Vec<String>>,
    /// Physical line (1-based) of each row.
    pub lines: Vec<usize>,
}

impl Table {
    /// Read a table with a header row. Blank lines are skipped (they are not
    /// data); a row with the wrong number of fields is an error naming its line.
    pub fn read(path: &Path, delimiter: u8) -> Result<Table> {
        let bytes = std::fs::read(path)
            .map_err(|source| IoError::Read { path: path.to_path_buf(), reason: source })?;
        let mut counter = LineCounter::new(&bytes);
        let mut rdr = csv::ReaderBuilder::new()
            .delimiter(delimiter)
            .has_headers(false)
            .flexible(true)
            .from_reader(&bytes[..]);
        let mut headers: Option<(Vec<String>, usize)> = None;
        let mut rows = Vec::new();
        let mut lines = Vec::new();
        for rec in rdr.records() {
            let rec = rec.map_err(|e| csv_error(path, e))?;
            let line = counter.line_of_record(&rec) as usize;
            if rec.iter().all(|c| c.trim().is_empty()) {
                continue;
            }
            let cells: Vec<String> = rec.iter().map(|c| c.trim().to_string()).collect();
            match &headers {
                None => headers = Some((cells, line)),
                Some((h, _)) => {
                    if cells.len() != h.len() {
                        return Err(IoError::Table {
                            path: path.to_path_buf(),
                            message: format!(
                                "line {line}: {} fields where the header has {} (check the delimiter {:?})",
                                cells.len(),
                                h.len(),
                                delimiter as char
                            ),
                        });
                    }
                    rows.push(cells);
                    lines.push(line);
                }
            }
        }
        let Some((headers, header_line)) = headers else {
            return Err(IoError::Empty {
                path: path.to_path_buf(),
                hint: Some("the file is empty; it needs a header line and data rows".into()),
            });
        };
        if rows.is_empty() {
            return Err(IoError::Empty {
                path: path.to_path_buf(),
                hint: Some("only a header line was found".into()),
            });
        }
        Ok(Table { path: path.to_path_buf(), headers, header_line, rows, lines })
    }

    /// Index of column `name`, or an error listing the header and suggesting
    /// the closest name.
    pub fn column(&self, name: &str) -> Result<usize> {
        self.headers.iter().position(|h| h == name).ok_or_else(|| IoError::MissingColumn {
            path: self.path.clone(),
            line: self.header_line,
            column: name.to_string(),
            suggestion: closest(name, self.headers.iter().map(String::as_str)),
            available: self.headers.clone(),
        })
    }

    /// Number of data rows.
    pub fn len(&self) -> usize {
        self.rows.len()
    }

    /// True when there are no data rows (never, for a table from [`Table::read`]).
    pub fn is_empty(&self) -> bool {
        self.rows.is_empty()
    }

    /// The cells of column `name`.
    pub fn text(&self, name: &str) -> Result<Vec<&str>> {
        let j = self.column(name)?;
        Ok(self.rows.iter().map(|r| r[j].as_str()).collect())
    }

    /// Column `name` as finite numbers; an empty or non-numeric cell is an
    /// error naming its line and value.
    pub fn numbers(&self, name: &str) -> Result<Vec<f64>> {
        let j = self.column(name)?;
        self.rows
            .iter()
            .zip(&self.lines)
            .map(|(r, &line)| {
                let v = &r[j];
                match v.parse::<f64>() {
                    Ok(x) if x.is_finite() => Ok(x),
                    _ => Err(self.bad(line, name, v, "not a finite number", None)),
                }
            })
            .collect()
    }

    /// Column `name` as numbers where empty cells and `NA` are missing (`None`);
    /// any other non-numeric cell is an error naming its line and value.
    pub fn optional_numbers(&self, name: &str) -> Result<Vec<Option<f64>>> {
        let j = self.column(name)?;
        self.rows
            .iter()
            .zip(&self.lines)
            .map(|(r, &line)| {
                let v = r[j].as_str();
                if is_missing(v) {
                    return Ok(None);
                }
                match v.parse::<f64>() {
                    Ok(x) if x.is_finite() => Ok(Some(x)),
                    _ => Err(self.bad(
                        line,
                        name,
                        v,
                        "not a number",
                        Some("leave the cell empty or write NA for a missing value".into()),
                    )),
                }
            })
            .collect()
    }

    /// An [`IoError::BadValue`] for this table.
    pub fn bad(
        &self,
        line: usize,
        column: &str,
        value: &str,
        message: &str,
        hint: Option<String>,
    ) -> IoError {
        IoError::BadValue {
            path: self.path.clone(),
            line,
            column: column.to_string(),
            value: value.to_string(),
            message: message.to_string(),
            hint,
        }
    }
}

/// Physical line numbers of csv records. The csv crate's own positions do
/// not count the blank lines it skips, so lines are counted here from the
/// bytes: O(file size) over the whole file.
pub struct LineCounter<'a> {
    bytes: &'a [u8],
    byte: usize,
    line: u64,
}

impl<'a> LineCounter<'a> {
    /// A counter over the bytes the csv reader reads.
    pub fn new(bytes: &'a [u8]) -> LineCounter<'a> {
        LineCounter { bytes, byte: 0, line: 1 }
    }

    /// 1-based line of the record's first byte; records must come in order.
    pub fn line_of(&mut self, rec: &csv::ByteRecord) -> u64 {
        let b = rec.position().map(|p| p.byte() as usize).unwrap_or(self.byte);
        self.advance(b)
    }

    /// [`LineCounter::line_of`] for a string record.
    pub fn line_of_record(&mut self, rec: &csv::StringRecord) -> u64 {
        let b = rec.position().map(|p| p.byte() as usize).unwrap_or(self.byte);
        self.advance(b)
    }

    fn advance(&mut self, b: usize) -> u64 {
        // The reported position is where the reader started, before any
        // blank lines it skipped: step over them to the record's first byte.
        let mut b = b.min(self.bytes.len());
        while b < self.bytes.len() && (self.bytes[b] == b'\n' || self.bytes[b] == b'\r') {
            b += 1;
        }
        if b > self.byte {
            self.line += self.bytes[self.byte..b].iter().filter(|&&c| c == b'\n').count() as u64;
            self.byte = b;
        }
        self.line
    }
}

/// Cells that mean "no value": empty, `NA`, `NaN`, `null` (any case).
pub fn is_missing(v: &str) -> bool {
    let t = v.trim();
    t.is_empty()
        || t.eq_ignore_ascii_case("na")
        || t.eq_ignore_ascii_case("nan")
        || t.eq_ignore_ascii_case("null")
}

fn csv_error(path: &Path, e: csv::Error) -> IoError {
    let line = e.position().map(|p| p.line());
    match e.into_kind() {
        csv::ErrorKind::Io(source) => IoError::Read { path: path.to_path_buf(), reason: source },
        kind => IoError::Table {
            path: path.to_path_buf(),
            message: match line {
                Some(l) => format!("line {l}: {kind:?}"),
                None => format!("{kind:?}"),
            },
        },
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::io::Write;

    fn write(content: &str) -> tempfile::NamedTempFile {
        let mut f = tempfile::NamedTempFile::new().unwrap();
        f.write_all(content.as_bytes()).unwrap();
        f
    }

    #[test]
    fn lines_are_physical_and_blank_lines_skipped() {
        let f = write("id,x\n\na,1.5\nb,2\n");
        let t = Table::read(f.path(), b',').unwrap();
        assert_eq!(t.lines, vec![3, 4]);
        assert_eq!(t.numbers("x").unwrap(), vec![1.5, 2.0]);
    }

    #[test]
    fn bad_number_names_line_column_and_value() {
        let f = write("id,x\na,1.5\nb,zwei\n");
        let t = Table::read(f.path(), b',').unwrap();
        let e = t.numbers("x").unwrap_err().to_string();
        assert!(e.contains(":3:") && e.contains("`x`") && e.contains("zwei"), "{e}");
    }

    #[test]
    fn missing_column_suggests_closest() {
        let f = write("pot_id,x\na,1\n");
        let t = Table::read(f.path(), b',').unwrap();
        let e = t.column("potid").unwrap_err().to_string();
        assert!(e.contains("did you mean `pot_id`"), "{e}");
    }

    #[test]
    fn empty_and_header_only_files_are_errors() {
        assert!(matches!(Table::read(write("").path(), b','), Err(IoError::Empty { .. })));
        assert!(matches!(Table::read(write("a,b\n").path(), b','), Err(IoError::Empty { .. })));
    }

    #[test]
    fn ragged_row_is_an_error_with_line() {
        let f = write("a;b\n1;2\n3\n");
        let e = Table::read(f.path(), b';').unwrap_err().to_string();
        assert!(e.contains("line 3"), "{e}");
    }
}
