//! Where things stand: the pot table (positions, growth windows, and every
//! other column kept for the model) and the sensor table.

use super::error::{IoError, Result};
use super::study::{Study, delimiter_byte};
use super::table::{Table, is_missing};
use chrono::{NaiveDate, NaiveDateTime};
use std::collections::HashMap;

/// The pot table with resolved positions.
#[derive(Debug, Clone)]
pub struct Pots {
    /// Pot identifiers, unique.
    pub ids: Vec<String>,
    /// x in metres.
    pub x: Vec<f64>,
    /// y in metres.
    pub y: Vec<f64>,
    /// Start of each pot's growth window (local time of the study), if given.
    pub start: Option<Vec<NaiveDateTime>>,
    /// End of each pot's growth window (local time of the study), if given.
    pub end: Option<Vec<NaiveDateTime>>,
    /// Lattice cells `(row, column)` of each pot from the declared
    /// `[pots] lattice_row` and `lattice_column` columns, 0-based (the
    /// smallest number in each column is index 0); `None` when not declared.
    pub cells: Option<(Vec<usize>, Vec<usize>)>,
    /// The whole table, for trait, factor and covariate columns.
    pub table: Table,
}

/// The cells of the declared lattice columns: each a whole number (any
/// sign; 0-based after subtracting the column's smallest value), no cell
/// empty, no two pots in one (row, column) cell. Errors name the file, line,
/// column and value. Cost O(n) with a hash set.
fn lattice_cells(table: &Table, row: &str, col: &str) -> Result<(Vec<usize>, Vec<usize>)> {
    let whole = |name: &str| -> Result<Vec<i64>> {
        let j = table.column(name)?;
        table
            .rows
            .iter()
            .zip(&table.lines)
            .map(|(r, &line)| {
                let v = r[j].trim();
                if is_missing(v) {
                    return Err(table.bad(
                        line,
                        name,
                        v,
                        "the lattice index is missing",
                        Some("every pot needs its row and column on the lattice (whole numbers)".into()),
                    ));
                }
                match v.parse::<f64>() {
                    Ok(x) if x.is_finite() && x.fract() == 0.0 && x.abs() < 1e9 => Ok(x as i64),
                    _ => Err(table.bad(
                        line,
                        name,
                        v,
                        "a lattice index must be a whole number",
                        Some("number the rows and the columns of the lattice 1, 2, 3, ...".into()),
                    )),
                }
            })
            .collect()
    };
    let (r, c) = (whole(row)?, whole(col)?);
    let base = |v: &[i64]| v.iter().copied().min().unwrap_or(0);
    let (r0, c0) = (base(&r), base(&c));
    let rows: Vec<usize> = r.iter().map(|v| (v - r0) as usize).collect();
    let cols: Vec<usize> = c.iter().map(|v| (v - c0) as usize).collect();
    let mut seen: HashMap<(usize, usize), usize> = HashMap::new();
    for i in 0..rows.len() {
        if let Some(first) = seen.insert((rows[i], cols[i]), table.lines[i]) {
            return Err(table.bad(
                table.lines[i],
                row,
                &r[i].to_string(),
                &format!(
                    "two pots in one lattice cell: {row} = {}, {col} = {} is also the cell of line {first}",
                    r[i], c[i]
                ),
                Some("each (row, column) cell of the lattice holds one pot; check the two lines".into()),
            ));
        }
    }
    Ok((rows, cols))
}

/// The sensor table.
#[derive(Debug, Clone)]
pub struct Sensors {
    /// Sensor identifiers, unique, as they appear in the logs.
    pub ids: Vec<String>,
    /// x in metres.
    pub x: Vec<f64>,
    /// y in metres.
    pub y: Vec<f64>,
    /// Height in metres, if given.
    pub z: Option<Vec<f64>>,
    /// The whole table.
    pub table: Table,
}

impl Sensors {
    /// Index of each sensor id.
    pub fn index(&self) -> HashMap<&str, usize> {
        self.ids.iter().enumerate().map(|(i, s)| (s.as_str(), i)).collect()
    }
}

fn delimiter(study: &Study, key: &str, d: &Option<String>) -> Result<u8> {
    match d {
        None => Ok(b','),
        Some(d) => delimiter_byte(d).map_err(|m| study.invalid(key, m, None)),
    }
}

fn unique_ids(table: &Table, column: &str) -> Result<Vec<String>> {
    let ids: Vec<String> = table.text(column)?.into_iter().map(str::to_string).collect();
    let mut seen: HashMap<&str, usize> = HashMap::new();
    for (i, id) in ids.iter().enumerate() {
        if id.is_empty() {
            return Err(table.bad(table.lines[i], column, id, "empty identifier", None));
        }
        if let Some(first) = seen.insert(id, table.lines[i]) {
            return Err(table.bad(
                table.lines[i],
                column,
                id,
                &format!("duplicate identifier (first on line {first})"),
                None,
            ));
        }
    }
    Ok(ids)
}

/// Parse a local date (`2026-03-01`, midnight) or date-time
/// (`2026-03-01 08:00`, `2026-03-01T08:00:00`).
pub fn parse_local_datetime(v: &str) -> Option<NaiveDateTime> {
    let v = v.trim();
    for f in ["%Y-%m-%d %H:%M:%S", "%Y-%m-%dT%H:%M:%S", "%Y-%m-%d %H:%M", "%Y-%m-%dT%H:%M"] {
        if let Ok(t) = NaiveDateTime::parse_from_str(v, f) {
            return Some(t);
        }
    }
    NaiveDate::parse_from_str(v, "%Y-%m-%d").ok().and_then(|d| d.and_hms_opt(0, 0, 0))
}

fn window_column(table: &Table, column: &str) -> Result<Vec<NaiveDateTime>> {
    let j = table.column(column)?;
    table
        .rows
        .iter()
        .zip(&table.lines)
        .map(|(r, &line)| {
            parse_local_datetime(&r[j]).ok_or_else(|| {
                table.bad(
                    line,
                    column,
                    &r[j],
                    "not a date",
                    Some("write a local date 2026-03-01 or date-time 2026-03-01 08:00".into()),
                )
            })
        })
        .collect()
}

/// Read the pot table named by `[pots]`.
pub fn load_pots(study: &Study) -> Result<Pots> {
    let spec = &study.spec.pots;
    let path = study.resolve(&spec.file);
    let table = Table::read(&path, delimiter(study, "pots.delimiter", &spec.delimiter)?)?;
    let ids = unique_ids(&table, &spec.id)?;
    let (x, y) = match (&spec.x, &spec.y, &spec.grid) {
        (Some(xc), Some(yc), _) => (table.numbers(xc)?, table.numbers(yc)?),
        (_, _, Some(g)) => {
            let index = |col: &str| -> Result<Vec<f64>> {
                let v = table.numbers(col)?;
                for (i, &k) in v.iter().enumerate() {
                    if k < 1.0 || k.fract() != 0.0 {
                        return Err(table.bad(
                            table.lines[i],
                            col,
                            &table.rows[i][table.column(col)?],
                            "grid positions are whole numbers from 1",
                            None,
                        ));
                    }
                }
                Ok(v)
            };
            let (bench, row, slot) = (index(&g.bench)?, index(&g.row)?, index(&g.slot)?);
            let [ox, oy] = g.origin.unwrap_or([0.0, 0.0]);
            let x = slot.iter().map(|s| ox + (s - 1.0) * g.slot_pitch).collect();
            let y = bench
                .iter()
                .zip(&row)
                .map(|(b, r)| oy + (b - 1.0) * g.bench_pitch + (r - 1.0) * g.row_pitch)
                .collect();
            (x, y)
        }
        _ => unreachable!("checked by Study::validate"),
    };
    let start = spec.start.as_deref().map(|c| window_column(&table, c)).transpose()?;
    let end = spec.end.as_deref().map(|c| window_column(&table, c)).transpose()?;
    if let (Some(s), Some(e)) = (&start, &end) {
        for i in 0..s.len() {
            if e[i] < s[i] {
                return Err(IoError::BadValue {
                    path: path.clone(),
                    line: table.lines[i],
                    column: spec.end.clone().unwrap_or_default(),
                    value: e[i].to_string(),
                    message: format!("the growth window ends before it starts ({})", s[i]),
                    hint: None,
                });
            }
        }
    }
    let cells = match (&spec.lattice_row, &spec.lattice_column) {
        (Some(r), Some(c)) => Some(lattice_cells(&table, r, c)?),
        _ => None,
    };
    Ok(Pots { ids, x, y, start, end, cells, table })
}

/// Read the sensor table named by `[sensors]`; `None` when there is none.
pub fn load_sensors(study: &Study) -> Result<Option<Sensors>> {
    let Some(spec) = &study.spec.sensors else {
        return Ok(None);
    };
    let path = study.resolve(&spec.file);
    let table = Table::read(&path, delimiter(study, "sensors.delimiter", &spec.delimiter)?)?;
    let ids = unique_ids(&table, &spec.id)?;
    let x = table.numbers(&spec.x)?;
    let y = table.numbers(&spec.y)?;
    let z = match &spec.z {
        Some(c) => {
            let v = table.optional_numbers(c)?;
            Some(v.into_iter().map(|o| o.unwrap_or(f64::NAN)).collect())
        }
        None => None,
    };
    Ok(Some(Sensors { ids, x, y, z, table }))
}

/// Whether a cell is a missing value (re-exported for callers of `Pots::table`).
pub fn cell_is_missing(v: &str) -> bool {
    is_missing(v)
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::path::Path;

    fn study_in(dir: &Path, pots_section: &str, pots_csv: &str) -> Study {
        std::fs::write(dir.join("pots.csv"), pots_csv).unwrap();
        let src = format!(
            "[study]\ntitle = \"t\"\ntimezone = \"UTC\"\noutput = \"out\"\n\n[pots]\nfile = \"pots.csv\"\nid = \"pot\"\n{pots_section}"
        );
        let p = dir.join("study.toml");
        std::fs::write(&p, &src).unwrap();
        Study::load(&p).unwrap()
    }

    #[test]
    fn grid_layout_derives_positions() {
        let d = tempfile::tempdir().unwrap();
        let st = study_in(
            d.path(),
            "[pots.grid]\nbench = \"b\"\nrow = \"r\"\nslot = \"s\"\nbench_pitch = 2.0\nrow_pitch = 0.5\nslot_pitch = 0.25\norigin = [1.0, 0.5]\n",
            "pot,b,r,s\np1,1,1,1\np2,2,2,3\n",
        );
        let pots = load_pots(&st).unwrap();
        assert_eq!(pots.x, vec![1.0, 1.5]);
        assert_eq!(pots.y, vec![0.5, 0.5 + 2.0 + 0.5]);
    }

    /// Declared lattice columns: read as 0-based cells (from the smallest
    /// number); a missing, fractional or text cell and two pots in one cell
    /// are errors naming the file, line, column and value.
    #[test]
    fn declared_lattice_cells_are_read_and_checked() {
        let d = tempfile::tempdir().unwrap();
        let keys = "x = \"x\"\ny = \"y\"\nlattice_row = \"lane\"\nlattice_column = \"place\"\n";
        let st = study_in(d.path(), keys, "pot,x,y,lane,place\na,0,0,2,1\nb,1,0,2,2\nc,0,1,3,1\nd,1,1,3,2\n");
        let pots = load_pots(&st).unwrap();
        assert_eq!(pots.cells, Some((vec![0, 0, 1, 1], vec![0, 1, 0, 1])));
        for (csv, line, column, value, words) in [
            ("pot,x,y,lane,place\na,0,0,1,1\nb,1,0,,2\n", 3, "lane", "", "missing"),
            ("pot,x,y,lane,place\na,0,0,1,1\nb,1,0,1,2.5\n", 3, "place", "2.5", "whole number"),
            ("pot,x,y,lane,place\na,0,0,1,1\nb,1,0,one,2\n", 3, "lane", "one", "whole number"),
            ("pot,x,y,lane,place\na,0,0,1,1\nb,1,0,2,1\nc,2,0,1,1\n", 4, "lane", "1", "line 2"),
        ] {
            let st = study_in(d.path(), keys, csv);
            let e = load_pots(&st).unwrap_err();
            let msg = format!("{e:#}");
            match &e {
                IoError::BadValue { line: l, column: c, value: v, .. } => {
                    assert_eq!((*l, c.as_str(), v.as_str()), (line, column, value), "{msg}")
                }
                other => panic!("unexpected error {other:?}"),
            }
            assert!(msg.contains("pots.csv") && msg.contains(words), "{msg}");
        }
        // one key without the other is refused when the study is loaded
        std::fs::write(d.path().join("pots.csv"), "pot,x,y,lane\na,0,0,1\n").unwrap();
        let src = "[study]\ntitle = \"t\"\ntimezone = \"UTC\"\noutput = \"out\"\n\n[pots]\nfile = \"pots.csv\"\nid = \"pot\"\nx = \"x\"\ny = \"y\"\nlattice_row = \"lane\"\n";
        std::fs::write(d.path().join("study.toml"), src).unwrap();
        let e = Study::load(&d.path().join("study.toml")).unwrap_err();
        assert!(format!("{e:#}").contains("lattice_column"), "{e:#}");
    }

    #[test]
    fn duplicate_pot_id_is_an_error_with_both_lines() {
        let d = tempfile::tempdir().unwrap();
        let st = study_in(d.path(), "x = \"x\"\ny = \"y\"\n", "pot,x,y\na,0,0\na,1,1\n");
        let e = load_pots(&st).unwrap_err().to_string();
        assert!(e.contains(":3:") && e.contains("line 2"), "{e}");
    }

    #[test]
    fn windows_parse_dates_and_reject_reversed() {
        let d = tempfile::tempdir().unwrap();
        let st = study_in(
            d.path(),
            "x = \"x\"\ny = \"y\"\nstart = \"sown\"\nend = \"scored\"\n",
            "pot,x,y,sown,scored\na,0,0,2026-03-01,2026-04-01 12:00\nb,1,1,2026-03-05,2026-03-01\n",
        );
        let e = load_pots(&st).unwrap_err().to_string();
        assert!(e.contains(":3:") && e.contains("ends before"), "{e}");
        assert_eq!(parse_local_datetime("2026-04-01 12:00").unwrap().to_string(), "2026-04-01 12:00:00");
    }
}
