//! `potclim climate` through the binary: a hand-built readings table in the
//! output folder, a study with four indicators, and the files it writes.

use polars::prelude::*;
use potclim::climate::regular::readings_frame;
use std::path::Path;
use std::process::Command;

const STUDY: &str = r#"[study]
title = "bench test"
timezone = "Europe/Amsterdam"
output = "out"

[pots]
file = "pots.csv"
id = "pot"
x = "x"
y = "y"

[climate]
start = "2026-03-01 00:00"
end = "2026-03-03 00:00"
step = "10m"
day_rule = "clock"
day_start = "06:00"
day_end = "22:00"

[[indicator]]
name = "night_cold_hours"
variable = "temperature"
statistic = "hours_below"
threshold = 12.0
period = "night"

[[indicator]]
name = "dli"
variable = "light"
statistic = "daily_integral"

[[indicator]]
name = "gdd10"
variable = "temperature"
statistic = "degree_days"
base = 10.0

[[indicator]]
name = "vpd_mean"
variable = "vpd"
statistic = "mean"
"#;

/// Two sensors at 5-minute logging over 1–2 March 2026 (local, UTC+1) plus
/// an hour before and after the study period:
/// * `a`: 20 °C, 60 % RH all the time;
/// * `b`: 10 °C during the local night 22:00–06:00, 20 °C otherwise, 60 % RH;
/// * both: PPFD 500 from 06:00 to 18:00 local, 0 otherwise.
fn write_readings(out: &Path) {
    let t0 = 1_772_319_600_000i64; // 2026-02-28T23:00:00Z = 2026-03-01 00:00 CET
    let mut sensor = Vec::new();
    let mut time = Vec::new();
    let (mut temp, mut rh, mut light) = (Vec::new(), Vec::new(), Vec::new());
    for name in ["b", "a"] {
        for k in -12..(2 * 288 + 12) {
            let t = t0 + k * 300_000;
            let local_min = (k.rem_euclid(288)) * 5; // minutes after local midnight
            let night = !(360..1320).contains(&local_min);
            sensor.push(name.to_string());
            time.push(t);
            temp.push(Some(if name == "b" && night { 10.0 } else { 20.0 }));
            rh.push(Some(60.0));
            light.push(Some(if (360..1080).contains(&local_min) { 500.0 } else { 0.0 }));
        }
    }
    let mut df = readings_frame(sensor, time, temp, rh, light).unwrap();
    std::fs::create_dir_all(out).unwrap();
    let f = std::fs::File::create(out.join("readings.parquet")).unwrap();
    ParquetWriter::new(f).finish(&mut df).unwrap();
}

fn potclim(args: &[&str], dir: &Path) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_potclim")).args(args).current_dir(dir).output().unwrap()
}

fn field(rows: &[Vec<String>], header: &[String], sensor: &str, col: &str) -> String {
    let j = header.iter().position(|h| h == col).unwrap();
    rows.iter().find(|r| r[0] == sensor).unwrap()[j].clone()
}

/// Expected values, by hand: night cold hours a 0, b 8 h x 2 nights = 16;
/// DLI 500 x 12 h x 3600 / 1e6 = 21.6 mol m-2 d-1 (mean of 2 days);
/// degree days base 10: a 10 x 2 = 20, b (16 h x 10 + 8 h x 0)/24 x 2 = 13.333;
/// VPD of a at 20 °C, 60 %: 2.33828 x 0.4 = 0.93531 kPa (FAO-56 eq. 11).
#[test]
fn computes_indicators_and_writes_both_outputs() {
    let d = tempfile::tempdir().unwrap();
    std::fs::write(d.path().join("study.toml"), STUDY).unwrap();
    write_readings(&d.path().join("out"));
    let o = potclim(&["climate", "study.toml"], d.path());
    let stdout = String::from_utf8_lossy(&o.stdout);
    assert!(o.status.success(), "{}\n{}", stdout, String::from_utf8_lossy(&o.stderr));
    assert!(stdout.contains("night_cold_hours") && stdout.contains("2 sensors, 2 days"), "{stdout}");
    assert!(stdout.contains("outside the study period"), "{stdout}");

    let mut rdr = csv::Reader::from_path(d.path().join("out/sensor_indicators.csv")).unwrap();
    let header: Vec<String> = rdr.headers().unwrap().iter().map(str::to_string).collect();
    assert_eq!(
        header,
        [
            "sensor",
            "night_cold_hours",
            "night_cold_hours_days",
            "dli",
            "dli_days",
            "gdd10",
            "gdd10_days",
            "vpd_mean",
            "vpd_mean_days"
        ]
    );
    let rows: Vec<Vec<String>> =
        rdr.records().map(|r| r.unwrap().iter().map(str::to_string).collect()).collect();
    assert_eq!(rows.len(), 2);
    let num = |s: &str, c: &str| field(&rows, &header, s, c).parse::<f64>().unwrap();
    assert!((num("a", "night_cold_hours") - 0.0).abs() < 1e-9);
    assert!((num("b", "night_cold_hours") - 16.0).abs() < 1e-9);
    assert!((num("a", "dli") - 21.6).abs() < 1e-9);
    assert!((num("b", "dli") - 21.6).abs() < 1e-9);
    assert!((num("a", "gdd10") - 20.0).abs() < 1e-9);
    assert!((num("b", "gdd10") - 40.0 / 3.0).abs() < 1e-9);
    assert!((num("a", "vpd_mean") - 0.93531).abs() < 1e-5);
    assert_eq!(field(&rows, &header, "b", "gdd10_days"), "2");

    let f = std::fs::File::open(d.path().join("out/sensor_daily.parquet")).unwrap();
    let daily = ParquetReader::new(f).finish().unwrap();
    assert_eq!(daily.height(), 2 * 2 * 4);
    let names: Vec<String> = daily.get_column_names().iter().map(|s| s.to_string()).collect();
    assert_eq!(names, ["sensor", "date", "indicator", "value", "coverage", "valid"]);
    let dates = daily.column("date").unwrap().str().unwrap();
    assert_eq!(dates.get(0), Some("2026-03-01"));
    assert!(daily.column("coverage").unwrap().f64().unwrap().iter().all(|c| c == Some(1.0)));
    // No staging folder is left behind.
    let hidden = std::fs::read_dir(d.path().join("out"))
        .unwrap()
        .filter(|e| e.as_ref().unwrap().file_name().to_string_lossy().starts_with('.'))
        .count();
    assert_eq!(hidden, 0);
}

#[test]
fn missing_readings_table_says_to_run_ingest() {
    let d = tempfile::tempdir().unwrap();
    std::fs::write(d.path().join("study.toml"), STUDY).unwrap();
    let o = potclim(&["climate", "study.toml"], d.path());
    assert_eq!(o.status.code(), Some(1));
    let e = String::from_utf8_lossy(&o.stderr);
    assert!(e.contains("readings.parquet") && e.contains("potclim ingest"), "{e}");
}

#[test]
fn bad_indicator_declaration_names_file_line_and_column() {
    let d = tempfile::tempdir().unwrap();
    std::fs::write(d.path().join("study.toml"), STUDY.replace("\"daily_integral\"", "\"daily_integrl\""))
        .unwrap();
    write_readings(&d.path().join("out"));
    let o = potclim(&["climate", "study.toml"], d.path());
    assert_eq!(o.status.code(), Some(1));
    let e = String::from_utf8_lossy(&o.stderr);
    assert!(e.contains("study.toml:30:13") && e.contains("did you mean \"daily_integral\""), "{e}");
    assert!(!d.path().join("out/sensor_indicators.csv").exists());
}

#[test]
fn humidity_indicator_without_humidity_readings_is_an_error() {
    let d = tempfile::tempdir().unwrap();
    std::fs::write(d.path().join("study.toml"), STUDY).unwrap();
    let out = d.path().join("out");
    std::fs::create_dir_all(&out).unwrap();
    let n = 300;
    let mut df = readings_frame(
        vec!["a".into(); n],
        (0..n as i64).map(|k| 1_772_319_600_000 + k * 600_000).collect(),
        vec![Some(20.0); n],
        vec![None; n],
        vec![Some(0.0); n],
    )
    .unwrap();
    ParquetWriter::new(std::fs::File::create(out.join("readings.parquet")).unwrap()).finish(&mut df).unwrap();
    let o = potclim(&["climate", "study.toml"], d.path());
    assert_eq!(o.status.code(), Some(1));
    let e = String::from_utf8_lossy(&o.stderr);
    assert!(e.contains("study.toml:40:12") && e.contains("humidity"), "{e}");
}
