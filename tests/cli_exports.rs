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
    write(dir, "pots.csv", b"pot,x,y,genotype\np1,0,0,A\np2,1,0,B\n");
    let mut sensors = String::from("id,x,y\n");
    for (i, id) in ids.iter().enumerate() {
        sensors.push_str(&format!("{id},{i},0\n"));
    }
    write(dir, "sensors.csv", sensors.as_bytes());
    let text = format!(
        "[study]\ntitle = \"t\"\ntimezone = \"{zone}\"\noutput = \"out\"\n\n[pots]\nfile = \"pots.csv\"\nid = \"pot\"\nx = \"x\"\ny = \"y\"\n\n[sensors]\nfile = \"sensors.csv\"\nid = \"id\"\nx = \"x\"\ny = \"y\"\n\n{block}"
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

/// `n` readings every `step` minutes from the UTC instant `start`, as the
/// wall clock of `tz` shows them (IANA rules through chrono-tz), with their
/// UTC milliseconds: what a logger keeping local time writes.
fn local_series(tz: chrono_tz::Tz, start: &str, n: usize, step: i64) -> Vec<(chrono::NaiveDateTime, i64)> {
    let t0 = chrono::DateTime::parse_from_rfc3339(start).unwrap().timestamp_millis();
    (0..n as i64)
        .map(|i| {
            let ms = t0 + i * step * 60_000;
            let utc = chrono::DateTime::from_timestamp_millis(ms).unwrap();
            (utc.with_timezone(&tz).naive_local(), ms)
        })
        .collect()
}

fn ingest_ok(st: &Path) -> String {
    let (code, out, err) = run(&["ingest", st.to_str().unwrap()]);
    assert_eq!(code, 0, "{out}{err}");
    out
}

/// Separate date and time columns, a 12-hour clock, month-first dates, in
/// America/Chicago across both 2026 changes (spring forward 03-08 02:00 →
/// 03:00; fall back 11-01 02:00 → 01:00, so 01:00–01:59 shows twice).
#[test]
fn date_and_time_columns_with_a_12_hour_clock_across_northern_changes() {
    let d = tempfile::tempdir().unwrap();
    let tz = chrono_tz::America::Chicago;
    let block = "[[logs]]\nfiles = [\"logs/*.csv\"]\ntime = [\"Date\", \"Time\"]\ntime_format = \"%m/%d/%Y %I:%M:%S %p\"\ntimezone = \"America/Chicago\"\nsensor_from = \"file_stem\"\n[logs.columns]\ntemperature = { column = \"Temp (F)\", unit = \"degF\" }\n";
    let st = study(d.path(), &["north1"], "Europe/Amsterdam", block);
    let mut series = local_series(tz, "2026-03-08T05:00:00Z", 16, 30);
    series.extend(local_series(tz, "2026-11-01T04:30:00Z", 16, 30));
    let mut text = String::from("Date,Time,Temp (F)\n");
    for (i, (local, _)) in series.iter().enumerate() {
        text.push_str(&format!("{},{},{}\n", local.format("%m/%d/%Y"), local.format("%I:%M:%S %p"), 50 + i));
    }
    assert!(text.contains("11/01/2026,01:30:00 AM") && text.contains("03/08/2026,03:00:00 AM"), "{text}");
    write(d.path(), "logs/north1.csv", text.as_bytes());
    let out = ingest_ok(&st);
    assert!(out.contains("32 rows read: 32 kept as is, 0 with flags"), "{out}");
    let r = readings(d.path());
    let got: Vec<i64> = r.iter().map(|x| x.1).collect();
    let want: Vec<i64> = series.iter().map(|x| x.1).collect();
    assert_eq!(got, want);
    // 50 °F = 10 °C (the first row).
    approx::assert_abs_diff_eq!(r[0].2.unwrap(), 10.0, epsilon = 1e-12);
}

/// Day-first dates in a date column and a 24-hour time column, in
/// Australia/Sydney across both 2026 changes of the southern hemisphere
/// (daylight saving ends 04-05 03:00 → 02:00, begins 10-04 02:00 → 03:00).
#[test]
fn day_first_date_and_time_columns_across_southern_changes() {
    let d = tempfile::tempdir().unwrap();
    let tz = chrono_tz::Australia::Sydney;
    let block = "[[logs]]\nfiles = [\"logs/*.txt\"]\ndelimiter = \";\"\ndecimal = \",\"\ntime = [\"Datum\", \"Zeit\"]\ntime_format = \"%d.%m.%Y %H:%M\"\ntimezone = \"Australia/Sydney\"\nsensor = \"Fühler\"\n[logs.columns]\ntemperature = { column = \"T\", unit = \"degC\" }\n";
    let st = study(d.path(), &["S1"], "UTC", block);
    let mut series = local_series(tz, "2026-04-04T14:00:00Z", 12, 20);
    series.extend(local_series(tz, "2026-10-03T14:40:00Z", 12, 20));
    let mut text = String::from("Fühler;Datum;Zeit;T\n");
    for (i, (local, _)) in series.iter().enumerate() {
        text.push_str(&format!("S1;{};{};{},5\n", local.format("%d.%m.%Y"), local.format("%H:%M"), 20 + i));
    }
    assert!(text.contains("05.04.2026;02:20") && text.contains("04.10.2026;03:00"), "{text}");
    write(d.path(), "logs/room.txt", text.as_bytes());
    let out = ingest_ok(&st);
    assert!(out.contains("24 rows read: 24 kept as is, 0 with flags"), "{out}");
    let r = readings(d.path());
    assert_eq!(r.iter().map(|x| x.1).collect::<Vec<_>>(), series.iter().map(|x| x.1).collect::<Vec<_>>());
    approx::assert_abs_diff_eq!(r[3].2.unwrap(), 23.5, epsilon = 1e-12);
}

/// A titled, quoted export whose time column's header names the offset
/// (`Date Time, GMT+01:00`): the header's offset holds all year, so the
/// study zone's spring-forward gap does not apply; `in_header` without an
/// offset in the header is an error naming the header.
#[test]
fn offset_in_the_time_header_is_the_zone() {
    let d = tempfile::tempdir().unwrap();
    let block = "[[logs]]\nfiles = [\"logs/*.csv\"]\nskip_lines = 1\ntime = \"Date Time\"\ntime_format = \"%m/%d/%y %I:%M:%S %p\"\nsensor_from = \"file_stem\"\n[logs.columns]\ntemperature = { column = \"Temp, °C (S/N: 20871)\", unit = \"degC\" }\n";
    let st = study(d.path(), &["roof"], "Europe/Amsterdam", block);
    let mut text =
        String::from("\"Export of roof\"\n\"#\",\"Date Time, GMT+01:00\",\"Temp, °C (S/N: 20871)\"\n");
    let mut want = Vec::new();
    let t0 = chrono::NaiveDateTime::parse_from_str("2026-03-29 01:00", "%Y-%m-%d %H:%M").unwrap();
    for i in 0..8 {
        let local = t0 + chrono::Duration::minutes(30 * i);
        text.push_str(&format!("{},{},{}.25\n", i + 1, local.format("%m/%d/%y %I:%M:%S %p"), 10 + i));
        want.push(local.and_utc().timestamp_millis() - 3_600_000);
    }
    write(d.path(), "logs/roof.csv", text.as_bytes());
    let out = ingest_ok(&st);
    assert!(out.contains("8 rows read: 8 kept as is, 0 with flags"), "{out}");
    let r = readings(d.path());
    assert_eq!(r.iter().map(|x| x.1).collect::<Vec<_>>(), want);
    // A fixed offset given by the block overrides the header's.
    std::fs::write(
        &st,
        std::fs::read_to_string(&st)
            .unwrap()
            .replace("skip_lines = 1\n", "skip_lines = 1\ntimezone = \"UTC-05:00\"\n"),
    )
    .unwrap();
    ingest_ok(&st);
    let r = readings(d.path());
    assert_eq!(r[0].1, want[0] + 6 * 3_600_000);
    // `in_header` with no offset in the header.
    std::fs::write(d.path().join("logs/roof.csv"), text.replace(", GMT+01:00", "")).unwrap();
    std::fs::write(&st, std::fs::read_to_string(&st).unwrap().replace("UTC-05:00", "in_header")).unwrap();
    let (code, _, err) = run(&["ingest", st.to_str().unwrap()]);
    assert_eq!(code, 1);
    assert!(err.contains("logs/roof.csv") && err.contains("line 2") && err.contains("`Date Time`"), "{err}");
}
