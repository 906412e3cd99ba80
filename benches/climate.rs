//! Benchmark of the climate stage: 60 sensors × 1 year at 5-minute logging
//! (about 6.3 million readings) built in memory, with eight indicators
//! covering every kind of statistic.
//!
//! Reported, all in the same run:
//! * the climate stage end to end (`climate::run`: read readings.parquet,
//!   regularise onto a 10-minute grid, indicators, write both outputs);
//! * the computation alone (`climate::compute` on the in-memory table);
//! * as a reference, a bare polars read of the same readings written as CSV.
//!
//! The ingest stage is not part of this branch, so the comparison with the
//! ingest time of the same data is left to a later run.
//!
//! Run: `cargo bench --bench climate`.

use polars::prelude::*;
use potclim::climate::{self, ClimateConfig};
use potclim::io::study::Study;
use std::time::Instant;

const SENSORS: usize = 60;
const DAYS: i64 = 365;
const STEP_MS: i64 = 300_000;

const STUDY: &str = r#"[study]
title = "benchmark"
timezone = "Europe/Amsterdam"
output = "out"

[pots]
file = "pots.csv"
id = "pot"
x = "x"
y = "y"

[climate]
start = "2026-01-01 00:00"
end = "2027-01-01 00:00"
step = "10m"

[[indicator]]
name = "night_cold_hours"
variable = "temperature"
statistic = "hours_below"
threshold = 14.0
period = "night"

[[indicator]]
name = "hot_hours"
variable = "temperature"
statistic = "hours_above"
threshold = 28.0

[[indicator]]
name = "gdd10"
variable = "temperature"
statistic = "degree_days"
base = 10.0
cap = 30.0

[[indicator]]
name = "gdd10_mw2"
variable = "temperature"
statistic = "degree_days"
base = 10.0
cap = 30.0
method = "min_max_2"

[[indicator]]
name = "dli"
variable = "light"
statistic = "daily_integral"

[[indicator]]
name = "vpd_day"
variable = "vpd"
statistic = "mean"
period = "day"

[[indicator]]
name = "dew_point_min"
variable = "dew_point"
statistic = "mean_daily_min"

[[indicator]]
name = "t_range"
variable = "temperature"
statistic = "mean_daily_range"
"#;

fn readings() -> DataFrame {
    let t0 = 1_767_222_000_000i64; // 2026-01-01 00:00 CET
    let per_sensor = (DAYS * 86_400_000 / STEP_MS) as usize;
    let n = SENSORS * per_sensor;
    let mut sensor = Vec::with_capacity(n);
    let mut time = Vec::with_capacity(n);
    let (mut temp, mut rh, mut light) = (Vec::with_capacity(n), Vec::with_capacity(n), Vec::with_capacity(n));
    for s in 0..SENSORS {
        let name = format!("logger_{s:02}");
        let offset = (s as f64 * 0.37).sin() * 1.5;
        for k in 0..per_sensor {
            // A reading lost now and then (deterministic), and a 3-hour outage per sensor.
            if (k * 7 + s * 13) % 997 == 0 || (k / 36 == 1000 + s) {
                continue;
            }
            let hour = (k as f64 * STEP_MS as f64 / 3_600_000.0) % 24.0;
            let day = k as f64 * STEP_MS as f64 / 86_400_000.0;
            let season = (2.0 * std::f64::consts::PI * (day - 100.0) / 365.0).sin();
            let diurnal = (2.0 * std::f64::consts::PI * (hour - 9.0) / 24.0).sin();
            sensor.push(name.clone());
            time.push(t0 + k as i64 * STEP_MS);
            temp.push(Some(19.0 + 4.0 * season + 5.0 * diurnal + offset));
            rh.push(Some((70.0 - 15.0 * diurnal).clamp(5.0, 100.0)));
            light.push(Some(if (6.0..22.0).contains(&hour) {
                300.0 + 250.0 * diurnal.max(0.0)
            } else {
                0.0
            }));
        }
    }
    climate::regular::readings_frame(sensor, time, temp, rh, light).expect("frame")
}

fn main() {
    let dir = tempfile::tempdir().expect("temp dir");
    let study_path = dir.path().join("study.toml");
    std::fs::write(&study_path, STUDY).expect("write study");
    let study = Study::load(&study_path).expect("study");
    let out = study.output_dir();
    std::fs::create_dir_all(&out).expect("out");

    let t = Instant::now();
    let mut df = readings();
    println!("built {} readings in memory in {:.2} s", df.height(), t.elapsed().as_secs_f64());

    let parquet = out.join("readings.parquet");
    ParquetWriter::new(std::fs::File::create(&parquet).expect("create")).finish(&mut df).expect("parquet");
    let csv_path = dir.path().join("readings.csv");
    CsvWriter::new(std::fs::File::create(&csv_path).expect("create")).finish(&mut df).expect("csv");
    println!(
        "readings.parquet {:.1} MB, readings.csv {:.1} MB",
        std::fs::metadata(&parquet).map(|m| m.len()).unwrap_or(0) as f64 / 1e6,
        std::fs::metadata(&csv_path).map(|m| m.len()).unwrap_or(0) as f64 / 1e6
    );

    let t = Instant::now();
    let csv = CsvReadOptions::default()
        .with_has_header(true)
        .try_into_reader_with_file_path(Some(csv_path.clone()))
        .expect("reader")
        .finish()
        .expect("csv read");
    let t_csv = t.elapsed().as_secs_f64();
    assert_eq!(csv.height(), df.height());

    let t = Instant::now();
    let config = ClimateConfig::from_study(&study).expect("config");
    let run = climate::compute(&study, config, &df, &parquet).expect("compute");
    let t_compute = t.elapsed().as_secs_f64();

    let t = Instant::now();
    let (run2, _) = climate::run(&study).expect("stage");
    let t_stage = t.elapsed().as_secs_f64();
    assert_eq!(run.study[0][0], run2.study[0][0]);

    println!(
        "{} sensors x {} days, {} grid steps, {} indicators",
        run.grid.sensors.len(),
        run.calendar.days.len(),
        run.calendar.n_steps,
        run.config.indicators.len()
    );
    println!("bare polars CSV read of the readings : {t_csv:8.3} s");
    println!(
        "climate compute (in memory)          : {t_compute:8.3} s  ({:.2} x the CSV read)",
        t_compute / t_csv
    );
    println!(
        "climate stage end to end (files)     : {t_stage:8.3} s  ({:.2} x the CSV read)",
        t_stage / t_csv
    );
    println!("ingest of the same data: not in this branch (to be added when the stages are merged)");
}
