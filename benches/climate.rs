//! Benchmark of the climate stage: 60 sensors × 1 year at 5-minute logging
//! (about 6.3 million readings) built in memory, with eight indicators
//! covering every kind of statistic.
//!
//! The same readings are written as logger exports (12 CSV files of five
//! loggers each, local time of Europe/Amsterdam across both daylight-saving
//! changes of 2026, values printed to two decimals) and go through the real
//! chain. Reported, all in the same run:
//! * the ingest stage on those exports (`io::ingest::ingest` and
//!   `write_outputs`: parse, local time to UTC, QC, gaps, readings.parquet);
//! * the climate stage end to end on the ingested table (`climate::run`: read
//!   readings.parquet, regularise onto a 10-minute grid, indicators, write
//!   both outputs), and its ratio to the ingest time;
//! * the computation alone (`climate::compute` on the in-memory table);
//! * as a reference, a bare polars read of the readings written as one CSV.
//!
//! Run: `cargo bench --bench climate`.

use polars::prelude::*;
use potclim::climate::{self, ClimateConfig};
use potclim::io::study::Study;
use std::time::Instant;

const SENSORS: usize = 60;
const DAYS: i64 = 365;
const STEP_MS: i64 = 300_000;

const FILES: usize = 12;

const STUDY: &str = r#"[study]
title = "benchmark"
timezone = "Europe/Amsterdam"
output = "out"

[pots]
file = "pots.csv"
id = "pot"
x = "x"
y = "y"

[sensors]
file = "sensors.csv"
id = "sensor"
x = "x"
y = "y"

[[logs]]
files = ["logs/*.csv"]
time = "local_time"
time_format = "%Y-%m-%d %H:%M"
sensor = "logger"
[logs.columns]
temperature = { column = "air_c", unit = "degC" }
humidity = { column = "rh_pct", unit = "percent" }
light = { column = "par", unit = "umol_m2_s" }

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
            // Rounded to the two decimals the exports print, so that the
            // in-memory table and the ingested exports hold the same numbers.
            let r2 = |v: f64| (v * 100.0).round() / 100.0;
            temp.push(Some(r2(19.0 + 4.0 * season + 5.0 * diurnal + offset)));
            rh.push(Some(r2((70.0 - 15.0 * diurnal).clamp(5.0, 100.0))));
            light.push(Some(r2(if (6.0..22.0).contains(&hour) {
                300.0 + 250.0 * diurnal.max(0.0)
            } else {
                0.0
            })));
        }
    }
    climate::regular::readings_frame(sensor, time, temp, rh, light).expect("frame")
}

/// Write the readings as logger exports: `FILES` files of equal numbers of
/// loggers, rows by logger then time, local wall-clock time of the study zone
/// without offset (the fall-back hour is repeated; file order resolves it),
/// and the sensor table. Returns the bytes written.
fn write_exports(df: &DataFrame, dir: &std::path::Path) -> u64 {
    use std::io::Write;
    let tz = chrono_tz::Europe::Amsterdam;
    std::fs::create_dir_all(dir.join("logs")).expect("logs dir");
    let sensor = df.column("sensor").expect("sensor").str().expect("str").clone();
    let time = df.column("time").expect("time").datetime().expect("datetime").physical().clone();
    let col = |name: &str| df.column(name).expect("column").f64().expect("f64").clone();
    let (t, h, l) = (col("temperature_c"), col("rh_pct"), col("ppfd_umol_m2_s"));
    let per_file = SENSORS.div_ceil(FILES);
    let mut sensors_csv = String::from("sensor,x,y\n");
    for s in 0..SENSORS {
        sensors_csv.push_str(&format!("logger_{s:02},{},{}\n", (s % 10) as f64 * 2.0, (s / 10) as f64 * 1.5));
    }
    std::fs::write(dir.join("sensors.csv"), sensors_csv).expect("sensors");
    std::fs::write(dir.join("pots.csv"), "pot,x,y\np1,1,1\n").expect("pots");
    let mut writers: Vec<std::io::BufWriter<std::fs::File>> = (0..FILES)
        .map(|f| {
            let p = dir.join("logs").join(format!("export_{f:02}.csv"));
            let mut w = std::io::BufWriter::new(std::fs::File::create(p).expect("create"));
            writeln!(w, "logger,local_time,air_c,rh_pct,par").expect("write");
            w
        })
        .collect();
    let fmt = |v: Option<f64>| v.map(|x| format!("{x:.2}")).unwrap_or_default();
    for i in 0..df.height() {
        let name = sensor.get(i).expect("sensor id");
        let s: usize = name["logger_".len()..].parse().expect("logger number");
        let ms = time.get(i).expect("time");
        let local = chrono::DateTime::from_timestamp_millis(ms).expect("instant").with_timezone(&tz);
        writeln!(
            writers[s / per_file],
            "{name},{},{},{},{}",
            local.format("%Y-%m-%d %H:%M"),
            fmt(t.get(i)),
            fmt(h.get(i)),
            fmt(l.get(i))
        )
        .expect("write");
    }
    let mut bytes = 0;
    for (f, mut w) in writers.into_iter().enumerate() {
        w.flush().expect("flush");
        bytes += std::fs::metadata(dir.join("logs").join(format!("export_{f:02}.csv")))
            .map(|m| m.len())
            .unwrap_or(0);
    }
    bytes
}

fn main() {
    let dir = tempfile::tempdir().expect("temp dir");
    let study_path = dir.path().join("study.toml");
    std::fs::write(&study_path, STUDY).expect("write study");
    let t = Instant::now();
    let mut df = readings();
    println!("built {} readings in memory in {:.2} s", df.height(), t.elapsed().as_secs_f64());
    let bytes = write_exports(&df, dir.path());
    println!("wrote {FILES} logger exports, {:.1} MB", bytes as f64 / 1e6);
    let study = Study::load(&study_path).expect("study");
    let out = study.output_dir();
    std::fs::create_dir_all(&out).expect("out");

    // The in-memory table as parquet and as one CSV, for the compute-only
    // timing and the bare polars read.
    let mem_dir = dir.path().join("mem");
    std::fs::create_dir_all(&mem_dir).expect("mem");
    let parquet = mem_dir.join("readings.parquet");
    ParquetWriter::new(std::fs::File::create(&parquet).expect("create")).finish(&mut df).expect("parquet");
    let csv_path = mem_dir.join("readings.csv");
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

    // Ingest of the same data from the logger exports.
    let t = Instant::now();
    let ing = potclim::io::ingest::ingest(&study).expect("ingest");
    potclim::io::ingest::write_outputs(&study, &ing).expect("ingest outputs");
    let t_ingest = t.elapsed().as_secs_f64();
    let rows_read: usize = ing.files.iter().map(|f| f.rows_read).sum();
    assert_eq!(rows_read, df.height(), "every reading is read");
    assert_eq!(ing.readings.height(), df.height(), "no reading is dropped: {} flags", ing.flags.len());

    let t = Instant::now();
    let config = ClimateConfig::from_study(&study).expect("config");
    let run = climate::compute(&study, config, &df, &parquet).expect("compute");
    let t_compute = t.elapsed().as_secs_f64();

    let t = Instant::now();
    let (run2, _) = climate::run(&study).expect("stage");
    let t_stage = t.elapsed().as_secs_f64();
    // The ingested exports carry the same numbers as the in-memory table.
    for (s, (a, b)) in run.study.iter().zip(&run2.study).enumerate() {
        for (k, (a, b)) in a.iter().zip(b).enumerate() {
            let same = match (a.value, b.value) {
                (Some(x), Some(y)) => (x - y).abs() <= 1e-9 * x.abs().max(1.0),
                (None, None) => true,
                _ => false,
            };
            assert!(same && a.valid_days == b.valid_days, "sensor {s}, indicator {k}: {a:?} vs {b:?}");
        }
    }

    println!(
        "{} sensors x {} days, {} grid steps, {} indicators",
        run.grid.sensors.len(),
        run.calendar.days.len(),
        run.calendar.n_steps,
        run.config.indicators.len()
    );
    println!("bare polars CSV read of the readings : {t_csv:8.3} s");
    println!(
        "ingest of the same data (12 exports) : {t_ingest:8.3} s  ({:.2} x the CSV read; {} flags)",
        t_ingest / t_csv,
        ing.flags.len()
    );
    println!(
        "climate compute (in memory)          : {t_compute:8.3} s  ({:.2} x the CSV read)",
        t_compute / t_csv
    );
    println!(
        "climate stage end to end (files)     : {t_stage:8.3} s  ({:.2} x the CSV read, {:.2} x the ingest)",
        t_stage / t_csv,
        t_stage / t_ingest
    );
}
