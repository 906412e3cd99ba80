//! Workbook exports through the binary. The workbooks under
//! `tests/reference/workbooks/` were saved by general-purpose spreadsheet
//! libraries (openpyxl, odfpy; `tests/reference/workbooks.py`), each beside a
//! CSV export of the same readings: the workbook, read with a hand-written
//! block and with the block `potclim init --logs` detects, must give exactly
//! the readings of the CSV read with a hand-written block.

use std::path::{Path, PathBuf};
use std::process::Command;

fn run(args: &[&str]) -> (i32, String, String) {
    let o = Command::new(env!("CARGO_BIN_EXE_potclim")).args(args).output().unwrap();
    (
        o.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&o.stdout).into_owned(),
        String::from_utf8_lossy(&o.stderr).into_owned(),
    )
}

fn fixture(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/reference/workbooks").join(name)
}

/// A study in `dir` whose one logger `id` is read by `logs` (the files are
/// copied to `dir/logs/`, under the name `id` plus their extension, so the
/// file stem is the sensor id).
fn study(dir: &Path, name: &str, id: &str, files: &[&str], logs: &str) -> PathBuf {
    std::fs::create_dir_all(dir.join("logs")).unwrap();
    for f in files {
        let ext = Path::new(f).extension().unwrap().to_str().unwrap();
        std::fs::copy(fixture(f), dir.join("logs").join(format!("{id}.{ext}"))).unwrap();
    }
    std::fs::write(dir.join("pots.csv"), "pot,x,y,height\np1,0,0,10.5\np2,1,0,11.0\n").unwrap();
    std::fs::write(dir.join("sensors.csv"), format!("id,x,y\n{id},0.5,0\n")).unwrap();
    let text = format!(
        "[study]\ntitle = \"t\"\ntimezone = \"Europe/Amsterdam\"\noutput = \"out_{name}\"\n\n[pots]\nfile = \"pots.csv\"\nid = \"pot\"\nx = \"x\"\ny = \"y\"\n\n[sensors]\nfile = \"sensors.csv\"\nid = \"id\"\nx = \"x\"\ny = \"y\"\n\n[climate]\nstart = \"2026-10-05 00:00\"\nend = \"2026-10-07 00:00\"\nstep = \"10m\"\n\n[[indicator]]\nname = \"mean_t\"\nvariable = \"temperature\"\nstatistic = \"mean\"\n\n[model]\ntrait = \"height\"\n\n{logs}"
    );
    let p = dir.join(format!("{name}.toml"));
    std::fs::write(&p, text).unwrap();
    p
}

type Reading = (String, i64, Option<f64>, Option<f64>);

fn readings(study: &Path, name: &str) -> Vec<Reading> {
    let (code, out, err) = run(&["ingest", study.to_str().unwrap()]);
    assert_eq!(code, 0, "{name}: {out}{err}");
    let df = potclim::io::ingest::read_readings(
        &study.parent().unwrap().join(format!("out_{name}/readings.parquet")),
    )
    .unwrap();
    let s = df.column("sensor").unwrap().str().unwrap().clone();
    let t = df.column("time").unwrap().to_physical_repr().i64().unwrap().clone();
    let f = |c: &str| df.column(c).unwrap().f64().unwrap().clone();
    let (a, b) = (f("temperature_c"), f("rh_pct"));
    (0..df.height()).map(|i| (s.get(i).unwrap().to_string(), t.get(i).unwrap(), a.get(i), b.get(i))).collect()
}

fn qc_flags(study: &Path, name: &str) -> String {
    std::fs::read_to_string(study.parent().unwrap().join(format!("out_{name}/qc_flags.csv"))).unwrap()
}

const CSV_A: &str = "[[logs]]\nfiles = [\"logs/*.csv\"]\ntime = \"Time\"\ntime_format = \"%Y-%m-%d %H:%M:%S\"\nsensor_from = \"file_stem\"\n[logs.columns]\ntemperature = { column = \"Temp (°C)\", unit = \"degC\" }\nhumidity = { column = \"RH (%)\", unit = \"percent\" }\n";

#[test]
fn an_xlsx_sheet_reads_as_its_csv_export() {
    let d = tempfile::tempdir().unwrap();
    let csv = study(&d.path().join("csv"), "csv", "A7", &["bench_a.csv"], CSV_A);
    let want = readings(&csv, "csv");
    assert_eq!(want.len(), 288);
    // A hand-written block: the sheet named, the title and blank rows skipped,
    // the time column read with a pattern of the user's choice (the date
    // cells are written with it).
    let hand = "[[logs]]\nfiles = [\"logs/*.xlsx\"]\nsheet = \"Readings\"\nskip_lines = 2\ntime = \"Time\"\ntime_format = \"%d/%m/%Y %H:%M\"\nsensor_from = \"file_stem\"\n[logs.columns]\ntemperature = { column = \"Temp (°C)\", unit = \"degC\" }\nhumidity = { column = \"RH (%)\", unit = \"percent\" }\n";
    let book = study(&d.path().join("book"), "book", "A7", &["bench_a.xlsx"], hand);
    assert_eq!(readings(&book, "book"), want);
    // The error cell is flagged as in the CSV, at its sheet row (title,
    // blank row, header, then step 40 is row 44).
    let flags = qc_flags(&book, "book");
    assert!(flags.contains("#N/A"), "{flags}");
    assert!(flags.lines().any(|l| l.contains("#N/A") && l.contains(",44,")), "{flags}");
    assert!(qc_flags(&csv, "csv").contains("#N/A"));
    // check samples the workbook and names its sheet.
    let (code, out, err) = run(&["check", book.to_str().unwrap()]);
    assert_eq!(code, 0, "{out}{err}");
    assert!(out.contains("[sheet Readings]"), "{out}");
}

#[test]
fn a_workbook_without_a_sheet_key_lists_its_sheets() {
    let d = tempfile::tempdir().unwrap();
    let block = "[[logs]]\nfiles = [\"logs/*.xlsx\"]\nskip_lines = 2\ntime = \"Time\"\ntime_format = \"%Y-%m-%d %H:%M:%S\"\nsensor_from = \"file_stem\"\n[logs.columns]\ntemperature = { column = \"Temp (°C)\", unit = \"degC\" }\n";
    let s = study(d.path(), "nosheet", "A7", &["bench_a.xlsx"], block);
    for cmd in ["check", "ingest"] {
        let (code, out, err) = run(&[cmd, s.to_str().unwrap()]);
        assert_eq!(code, 1, "{cmd}: {out}{err}");
        assert!(err.contains("A7.xlsx") && err.contains("\"Readings\", \"Notes\""), "{cmd}: {err}");
        assert!(err.contains("sheet = "), "{cmd}: {err}");
    }
    let wrong = block.replace("skip_lines", "sheet = \"Data\"\nskip_lines");
    let s = study(d.path(), "wrong", "A7", &["bench_a.xlsx"], &wrong);
    let (code, _, err) = run(&["ingest", s.to_str().unwrap()]);
    assert_eq!(code, 1);
    assert!(err.contains("no sheet \"Data\"") && err.contains("\"Readings\", \"Notes\""), "{err}");
    // A pattern with an offset cannot read zone-less date cells: said first.
    let offset = block.replace("skip_lines", "sheet = \"Readings\"\nskip_lines").replace("%S\"", "%S%z\"");
    let s = study(d.path(), "offset", "A7", &["bench_a.xlsx"], &offset);
    let (code, _, err) = run(&["ingest", s.to_str().unwrap()]);
    assert_eq!(code, 1);
    assert!(err.contains("carry no time zone"), "{err}");
}

/// The block detected for a workbook (with `init --logs`), moved into a study.
fn detected_block(dir: &Path, id: &str, file: &str) -> String {
    let ext = Path::new(file).extension().unwrap().to_str().unwrap();
    let src = dir.join("incoming");
    std::fs::create_dir_all(&src).unwrap();
    std::fs::copy(fixture(file), src.join(format!("{id}.{ext}"))).unwrap();
    let made = dir.join("gen");
    let glob = format!("{}/*.{ext}", src.display());
    let (code, out, err) = run(&["init", made.to_str().unwrap(), "--logs", &glob]);
    assert_eq!(code, 0, "{out}{err}");
    assert!(out.contains("detected 1 block(s)"), "{out}");
    let text = std::fs::read_to_string(made.join("study.toml")).unwrap();
    let doc: toml::Table = toml::from_str(&text).unwrap_or_else(|e| panic!("{e}\n{text}"));
    let mut block = doc["logs"].as_array().unwrap()[0].as_table().unwrap().clone();
    assert!(!block.contains_key("delimiter"), "a workbook has no delimiter:\n{text}");
    block.insert("files".into(), toml::Value::Array(vec![toml::Value::String(format!("logs/*.{ext}"))]));
    let mut logs = toml::Table::new();
    logs.insert("logs".into(), toml::Value::Array(vec![toml::Value::Table(block)]));
    toml::to_string(&logs).unwrap()
}

#[test]
fn detection_reads_workbooks_to_the_same_readings() {
    let d = tempfile::tempdir().unwrap();
    // xlsx: two sheets, a title row, date cells.
    let block = detected_block(&d.path().join("a"), "A7", "bench_a.xlsx");
    assert!(block.contains("sheet = \"Readings\""), "{block}");
    let csv = study(&d.path().join("a_csv"), "csv", "A7", &["bench_a.csv"], CSV_A);
    let book = study(&d.path().join("a_book"), "book", "A7", &["bench_a.xlsx"], &block);
    assert_eq!(readings(&book, "book"), readings(&csv, "csv"));

    // ods: separate date and time cells, °F, humidity as a fraction.
    let block = detected_block(&d.path().join("b"), "B2", "bench_b.ods");
    assert!(block.contains("Date") && block.contains("Time"), "{block}");
    let csv_block = "[[logs]]\nfiles = [\"logs/*.csv\"]\ntime = [\"Date\", \"Time\"]\ntime_format = \"%Y-%m-%d %H:%M:%S\"\nsensor_from = \"file_stem\"\n[logs.columns]\ntemperature = { column = \"Temperature (°F)\", unit = \"degF\" }\nhumidity = { column = \"Humidity\", unit = \"fraction\" }\n";
    let csv = study(&d.path().join("b_csv"), "csv", "B2", &["bench_b.csv"], csv_block);
    let want = readings(&csv, "csv");
    assert_eq!(want.len(), 288);
    let book = study(&d.path().join("b_book"), "book", "B2", &["bench_b.ods"], &block);
    assert_eq!(readings(&book, "book"), want);
}
