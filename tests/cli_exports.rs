//! Logger exports as they come, through the binary: rows whose trailing
//! columns are left empty by the logger, files whose rows mostly fail (a
//! warning in `check` with cause and fix), separate date and time columns,
//! 12-hour clocks, offsets written in the time column's header.

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

fn write(dir: &Path, name: &str, text: &[u8]) -> PathBuf {
    let p = dir.join(name);
    std::fs::create_dir_all(p.parent().unwrap()).unwrap();
    std::fs::write(&p, text).unwrap();
    p
}

/// A study with two pots, the sensors `ids` and one `[[logs]]` block.
fn study(dir: &Path, ids: &[&str], zone: &str, block: &str) -> PathBuf {
    write(dir, "pots.csv", b"pot,x,y,genotype,height\np1,0,0,A,10.5\np2,1,0,B,11.0\n");
    let mut sensors = String::from("id,x,y\n");
    for (i, id) in ids.iter().enumerate() {
        sensors.push_str(&format!("{id},{i},0\n"));
    }
    write(dir, "sensors.csv", sensors.as_bytes());
    let text = format!(
        "[study]\ntitle = \"t\"\ntimezone = \"{zone}\"\noutput = \"out\"\n\n[pots]\nfile = \"pots.csv\"\nid = \"pot\"\nx = \"x\"\ny = \"y\"\n\n[sensors]\nfile = \"sensors.csv\"\nid = \"id\"\nx = \"x\"\ny = \"y\"\n\n[[indicator]]\nname = \"mean_t\"\nvariable = \"temperature\"\nstatistic = \"mean\"\n\n[model]\ntrait = \"height\"\n\n{block}"
    );
    write(dir, "study.toml", text.as_bytes())
}

/// Every reading of `readings.parquet`: (sensor, UTC ms, temperature °C).
fn readings(dir: &Path) -> Vec<(String, i64, Option<f64>)> {
    let df = potclim::io::ingest::read_readings(&dir.join("out/readings.parquet")).unwrap();
    let s = df.column("sensor").unwrap().str().unwrap().clone();
    let t = df.column("time").unwrap().to_physical_repr().i64().unwrap().clone();
    let c = df.column("temperature_c").unwrap().f64().unwrap().clone();
    (0..df.height()).map(|i| (s.get(i).unwrap().to_string(), t.get(i).unwrap(), c.get(i))).collect()
}

/// A USB logger export: 960 ten-minute readings, the serial number written
/// in the first data row only (the later rows end after the humidity cell).
fn usb_export() -> String {
    let mut t = String::from("No.,Time,Temperature(°C),Humidity(%RH),Serial No.\n");
    for i in 0..960 {
        let (d, m) = (1 + i / 144, i % 144 * 10);
        let stamp = format!("2026-04-{d:02} {:02}:{:02}:00", m / 60, m % 60);
        let temp = 18.0 + (i % 50) as f64 * 0.1;
        t.push_str(&format!("{},{stamp},{temp:.1},{:.1}", i + 1, 55.0 + (i % 7) as f64));
        if i == 0 {
            t.push_str(",SN70021");
        }
        t.push('\n');
    }
    t
}

const USB_BLOCK: &str = "[[logs]]\nfiles = [\"logs/*.csv\"]\ntime = \"Time\"\ntime_format = \"%Y-%m-%d %H:%M:%S\"\ntimezone = \"UTC\"\nsensor_from = \"file_stem\"\n[logs.columns]\ntemperature = { column = \"Temperature(°C)\", unit = \"degC\" }\nhumidity = { column = \"Humidity(%RH)\", unit = \"percent\" }\n";

#[test]
fn rows_without_the_unused_trailing_serial_cell_are_all_kept() {
    let d = tempfile::tempdir().unwrap();
    let st = study(d.path(), &["bench3"], "Europe/Amsterdam", USB_BLOCK);
    write(d.path(), "logs/bench3.csv", usb_export().as_bytes());
    let (code, out, err) = run(&["check", st.to_str().unwrap()]);
    assert_eq!(code, 0, "{out}{err}");
    assert!(out.contains("960 rows") && !out.contains("would be flagged"), "{out}");
    assert!(out.contains("ok: every input is readable"), "{out}");
    let (code, out, err) = run(&["ingest", st.to_str().unwrap()]);
    assert_eq!(code, 0, "{out}{err}");
    assert!(out.contains("960 rows read: 960 kept as is, 0 with flags"), "{out}");
    let r = readings(d.path());
    assert_eq!(r.len(), 960);
    // Line 961 of the file (the last reading, i = 959): day 1 + 959 div 144 = 7,
    // minute 10 · (959 mod 144) = 950 = 15:50 UTC; 18 + 0.1 · (959 mod 50) = 18.9 °C.
    let last = chrono::DateTime::parse_from_rfc3339("2026-04-07T15:50:00Z").unwrap().timestamp_millis();
    assert_eq!(r[959].1, last);
    approx::assert_abs_diff_eq!(r[959].2.unwrap(), 18.9, epsilon = 1e-12);
}

#[test]
fn a_row_lacking_a_used_cell_is_still_malformed_and_named() {
    let d = tempfile::tempdir().unwrap();
    let st = study(d.path(), &["bench3"], "UTC", USB_BLOCK);
    let text = "No.,Time,Temperature(°C),Humidity(%RH),Serial No.\n1,2026-04-01 00:00:00,20.5,50,SN1\n2,2026-04-01 00:10:00,20.6\n3,2026-04-01 00:20:00,20.7,51\n4,2026-04-01 00:30:00,20.8,51,,\n";
    write(d.path(), "logs/bench3.csv", text.as_bytes());
    let (code, out, err) = run(&["ingest", st.to_str().unwrap()]);
    assert_eq!(code, 0, "{out}{err}");
    assert!(out.contains("4 rows read: 3 kept as is, 1 with flags"), "{out}");
    let flags = std::fs::read_to_string(d.path().join("out/qc_flags.csv")).unwrap();
    assert!(
        flags.contains("malformed_row") && flags.contains("no cell for column `Humidity(%RH)`"),
        "{flags}"
    );
}

#[test]
fn check_warns_with_cause_and_fix_when_most_rows_fail() {
    let d = tempfile::tempdir().unwrap();
    let st = study(d.path(), &["bench3"], "UTC", USB_BLOCK);
    // Semicolons inside the rows but commas in the header: every row is one
    // field short of the humidity column.
    let mut text = String::from("No.,Time,Temperature(°C),Humidity(%RH),Serial No.\n");
    for i in 0..400 {
        text.push_str(&format!("{},2026-04-01 {:02}:{:02}:00,20.5;50\n", i + 1, i / 60 % 24, i % 60));
    }
    write(d.path(), "logs/bench3.csv", text.as_bytes());
    let (code, out, err) = run(&["check", st.to_str().unwrap()]);
    assert_eq!(code, 0, "{out}{err}");
    assert!(!out.contains("ok: every input is readable"), "{out}");
    assert!(out.contains("warning: 400 of 400 sampled rows of logs/bench3.csv would be flagged"), "{out}");
    assert!(
        out.contains("cause: 400 row(s) do not split into the header's columns (first at logs/bench3.csv:2"),
        "{out}"
    );
    assert!(out.contains("fix: check `delimiter`"), "{out}");
}
