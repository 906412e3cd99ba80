//! Benchmark of `potclim ingest`'s reading path against a bare polars CSV
//! read of the same files, in the same run.
//!
//! Writes 5 million rows from 60 loggers (1-minute steps, local time in
//! Europe/Amsterdam across the 2026 spring-forward transition, three
//! channels) into 12 files in a temporary folder, then times
//! (a) polars' CSV reader reading every file into a DataFrame (types
//!     inferred, no time parsing, no checks), and
//! (b) `potclim::io::ingest::ingest` (parse, local time → UTC, units, every
//!     QC rule, sort, gaps, the readings DataFrame),
//! and prints rows per second of both and the ratio of the best of several
//! alternating rounds, with each round's ratio. Target: (b) within 1.5x of
//! (a). Run with `cargo bench --profile dev --bench ingest` (ROWS=... to
//! change the size, ROUNDS=... the number of rounds): the dev profile
//! optimises every dependency (polars included) at level 3 and potclim at
//! level 1, so its ratio is a conservative one; plain `cargo bench` uses the
//! release profile, which builds every dependency afresh. Reading is spread
//! over the files (one worker per core); the last line times it on one
//! thread, for the profile.

use polars::prelude::*;
use std::io::Write;
use std::time::Instant;

fn main() {
    let rows: usize = std::env::var("ROWS").ok().and_then(|s| s.parse().ok()).unwrap_or(5_000_000);
    let sensors = 60;
    let files = 12;
    let per_sensor = rows / sensors;
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    std::fs::create_dir_all(d.join("logs")).unwrap();
    let tz = chrono_tz::Europe::Amsterdam;
    let t0 = chrono::DateTime::parse_from_rfc3339("2026-03-01T00:00:00Z").unwrap().timestamp();
    let started = Instant::now();
    // Local time stamps, formatted once and shared by every sensor.
    let stamps: Vec<String> = (0..per_sensor)
        .map(|i| {
            let t = chrono::DateTime::from_timestamp(t0 + 60 * i as i64, 0).unwrap().with_timezone(&tz);
            t.format("%Y-%m-%d %H:%M:%S").to_string()
        })
        .collect();
    let per_file = sensors / files;
    let mut bytes = 0u64;
    for f in 0..files {
        let path = d.join("logs").join(format!("export_{f:02}.csv"));
        let mut w = std::io::BufWriter::new(std::fs::File::create(&path).unwrap());
        writeln!(w, "logger,timestamp,temp_c,rh,par").unwrap();
        for s in 0..per_file {
            let id = f * per_file + s;
            for (i, st) in stamps.iter().enumerate() {
                let x = i as f64;
                let day = (x / 1440.0 * std::f64::consts::TAU).sin();
                let temp = 18.0 + 4.0 * day + 0.01 * ((i * 7 + id) % 13) as f64;
                let rh = 70.0 - 10.0 * day + 0.1 * ((i * 3 + id) % 11) as f64;
                let par = (800.0 * day).max(0.0) + ((i + id) % 5) as f64;
                writeln!(w, "S{id:02},{st},{temp:.2},{rh:.1},{par:.0}").unwrap();
            }
        }
        w.flush().unwrap();
        bytes += std::fs::metadata(&path).unwrap().len();
    }
    let total = per_sensor * sensors;
    let mut sensors_csv = String::from("id,x,y\n");
    for s in 0..sensors {
        sensors_csv.push_str(&format!("S{s:02},{},{}\n", s % 10, s / 10));
    }
    std::fs::write(d.join("sensors.csv"), sensors_csv).unwrap();
    std::fs::write(d.join("pots.csv"), "pot,x,y\np1,0,0\n").unwrap();
    std::fs::write(
        d.join("study.toml"),
        "[study]\ntitle = \"bench\"\ntimezone = \"Europe/Amsterdam\"\noutput = \"out\"\n[pots]\nfile = \"pots.csv\"\nid = \"pot\"\nx = \"x\"\ny = \"y\"\n[sensors]\nfile = \"sensors.csv\"\nid = \"id\"\nx = \"x\"\ny = \"y\"\n[[logs]]\nfiles = [\"logs/*.csv\"]\ntime = \"timestamp\"\ntime_format = \"%Y-%m-%d %H:%M:%S\"\nsensor = \"logger\"\n[logs.columns]\ntemperature = { column = \"temp_c\", unit = \"degC\" }\nhumidity = { column = \"rh\", unit = \"percent\" }\nlight = { column = \"par\", unit = \"umol_m2_s\" }\n",
    )
    .unwrap();
    println!(
        "wrote {total} rows, {sensors} sensors, {files} files, {:.0} MB in {:.1} s",
        bytes as f64 / 1e6,
        started.elapsed().as_secs_f64()
    );
    let mut paths: Vec<_> = std::fs::read_dir(d.join("logs")).unwrap().map(|e| e.unwrap().path()).collect();
    paths.sort();

    let bare = || {
        let t = Instant::now();
        let mut n = 0;
        for p in &paths {
            let df = CsvReadOptions::default()
                .with_has_header(true)
                .try_into_reader_with_file_path(Some(p.clone()))
                .unwrap()
                .finish()
                .unwrap();
            n += df.height();
        }
        assert_eq!(n, total);
        t.elapsed().as_secs_f64()
    };
    let study = potclim::io::study::Study::load(&d.join("study.toml")).unwrap();
    let ours = || {
        let t = Instant::now();
        let ing = potclim::io::ingest::ingest(&study).unwrap();
        assert_eq!(ing.files.iter().map(|f| f.rows_read).sum::<usize>(), total);
        let h = ing.readings.height();
        let s = t.elapsed().as_secs_f64();
        (s, h, ing.flags.len())
    };
    // The reading phase alone (parse, time zone, units), one thread, for the profile.
    let formats = potclim::io::logs::compile_logs(&study).unwrap();
    let t = Instant::now();
    let mut n = 0;
    for (i, p) in formats[0].files.iter().enumerate() {
        n += potclim::io::logs::read_file(&formats[0], p, i as u32).unwrap().rows.len();
    }
    let t_read = t.elapsed().as_secs_f64();
    assert_eq!(n, total);
    // Warm the page cache and the thread pool once, then alternate the two
    // ROUNDS times (default 5) and take the best of each; the per-round
    // ratios show how much a shared machine moved in between.
    let rounds: usize = std::env::var("ROUNDS").ok().and_then(|s| s.parse().ok()).unwrap_or(5);
    let _ = bare();
    let mut tb = f64::INFINITY;
    let mut tp = f64::INFINITY;
    let mut info = (0, 0);
    let mut ratios = Vec::new();
    for _ in 0..rounds {
        let b = bare();
        let (s, h, f) = ours();
        tb = tb.min(b);
        tp = tp.min(s);
        info = (h, f);
        ratios.push(s / b);
    }
    ratios.sort_by(f64::total_cmp);
    println!("bare polars CSV read : {:>7.3} s  {:>12.0} rows/s", tb, total as f64 / tb);
    println!(
        "potclim ingest       : {:>7.3} s  {:>12.0} rows/s  ({} readings, {} flags)",
        tp,
        total as f64 / tp,
        info.0,
        info.1
    );
    println!("ratio ingest / bare  : {:.2}x (best of {rounds} each; target <= 1.5x)", tp / tb);
    println!(
        "per-round ratios     : {} (median {:.2}x)",
        ratios.iter().map(|r| format!("{r:.2}")).collect::<Vec<_>>().join(" "),
        ratios[ratios.len() / 2]
    );
    println!("of which reading (1 thread, all files): {:.3} s  {:.0} rows/s", t_read, total as f64 / t_read);
}
