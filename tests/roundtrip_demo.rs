//! Round trip: `potclim ingest` on the shipped demo study (written by
//! `potclim simulate`) recovers the true readings the simulator wrote to
//! `truth/sensor_readings.csv`, to the precision the exports print, and flags
//! exactly the faults the simulator injected (`truth/faults.csv`).

use polars::prelude::*;
use std::collections::{BTreeSet, HashMap};
use std::path::{Path, PathBuf};
use std::process::Command;

fn demo() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-data")
}

fn copy_dir(from: &Path, to: &Path) {
    std::fs::create_dir_all(to).unwrap();
    for e in std::fs::read_dir(from).unwrap() {
        let e = e.unwrap();
        let name = e.file_name();
        if name == "output" {
            continue;
        }
        let p = e.path();
        if p.is_dir() {
            copy_dir(&p, &to.join(&name));
        } else {
            std::fs::copy(&p, to.join(&name)).unwrap();
        }
    }
}

fn rows(path: &Path) -> Vec<HashMap<String, String>> {
    let mut r = csv::Reader::from_path(path).unwrap();
    let h: Vec<String> = r.headers().unwrap().iter().map(str::to_string).collect();
    r.records().map(|rec| h.iter().cloned().zip(rec.unwrap().iter().map(str::to_string)).collect()).collect()
}

#[test]
fn ingest_recovers_the_simulated_truth() {
    let dir = tempfile::tempdir().unwrap();
    copy_dir(&demo(), dir.path());
    let out = Command::new(env!("CARGO_BIN_EXE_potclim"))
        .args(["ingest", dir.path().join("study.toml").to_str().unwrap()])
        .output()
        .unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let output = dir.path().join("output");

    // Every injected fault is flagged with its reason on its line, and
    // nothing else is flagged.
    let truth: BTreeSet<(String, String, String)> = rows(&dir.path().join("truth/faults.csv"))
        .into_iter()
        .map(|r| (r["file"].clone(), r["line"].clone(), r["reason"].clone()))
        .collect();
    let flagged: BTreeSet<(String, String, String)> = rows(&output.join("qc_flags.csv"))
        .into_iter()
        .map(|r| (r["file"].clone(), r["line"].clone(), r["reason"].clone()))
        .collect();
    let missed: Vec<_> = truth.difference(&flagged).collect();
    let extra: Vec<_> = flagged.difference(&truth).collect();
    assert!(missed.is_empty(), "injected but not flagged: {missed:?}");
    assert!(extra.is_empty(), "flagged but not injected: {extra:?}");

    // The kept readings equal the true ones to the exports' printed precision:
    // °F with one decimal (0.1 °F = 0.056 °C), RH as a fraction with three
    // decimals (0.1 %) or percent with one, light as whole lux (0.0185 µmol
    // m-2 s-1 per lux, Thimijan & Heins 1983) or PPFD with one decimal.
    let df = potclim::io::ingest::read_readings(&output.join("readings.parquet")).unwrap();
    let sensor = df.column("sensor").unwrap().str().unwrap().clone();
    let time = df.column("time").unwrap().datetime().unwrap().physical().clone();
    let chans = ["temperature_c", "rh_pct", "ppfd_umol_m2_s"];
    let vals: Vec<Float64Chunked> =
        chans.iter().map(|c| df.column(c).unwrap().f64().unwrap().clone()).collect();
    let mut got: HashMap<(String, i64), [Option<f64>; 3]> = HashMap::new();
    for i in 0..df.height() {
        let key = (sensor.get(i).unwrap().to_string(), time.get(i).unwrap());
        got.insert(key, [vals[0].get(i), vals[1].get(i), vals[2].get(i)]);
    }
    let tol = [0.06, 0.11, 0.6];
    let mut compared = 0usize;
    for r in rows(&dir.path().join("truth/sensor_readings.csv")) {
        let t = chrono::DateTime::parse_from_rfc3339(&r["time"]).unwrap().timestamp_millis();
        let Some(v) = got.get(&(r["sensor"].clone(), t)) else { continue };
        for (k, c) in chans.iter().enumerate() {
            let (Some(g), Ok(w)) = (v[k], r[*c].parse::<f64>()) else { continue };
            assert!((g - w).abs() <= tol[k], "{} {} {c}: ingested {g}, true {w}", r["sensor"], r["time"]);
            compared += 1;
        }
    }
    assert!(compared > 100_000, "only {compared} values compared");
}
