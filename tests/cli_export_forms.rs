//! Round trip of every export form through the binary: `potclim simulate`
//! writes `tests/export_forms/scenario.toml` (the table form with a sensor
//! column, with separate date and time columns and decimal commas, with a
//! 12-hour clock; the three recurring layouts), `potclim init --logs`
//! detects each file's block, and `potclim ingest` reads the study with the
//! detected blocks and with the simulator's own (three-line layout blocks):
//! both give the same readings, equal to the simulator's truth to the
//! precision it prints, and flag exactly the injected faults.

use std::collections::{BTreeMap, BTreeSet};
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

fn scenario() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/export_forms/scenario.toml")
}

type Key = (String, i64);
type Values = [Option<f64>; 3];

/// Every reading of an output folder's `readings.parquet`.
fn readings(output: &Path) -> BTreeMap<Key, Values> {
    let df = potclim::io::ingest::read_readings(&output.join("readings.parquet")).unwrap();
    let s = df.column("sensor").unwrap().str().unwrap().clone();
    let t = df.column("time").unwrap().to_physical_repr().i64().unwrap().clone();
    let c: Vec<_> = ["temperature_c", "rh_pct", "ppfd_umol_m2_s"]
        .iter()
        .map(|n| df.column(n).unwrap().f64().unwrap().clone())
        .collect();
    let mut out = BTreeMap::new();
    for i in 0..df.height() {
        let key = (s.get(i).unwrap().to_string(), t.get(i).unwrap());
        let v = [c[0].get(i), c[1].get(i), c[2].get(i)];
        assert!(out.insert(key.clone(), v).is_none(), "two readings at {key:?}");
    }
    out
}

fn ms(rfc3339: &str) -> i64 {
    chrono::DateTime::parse_from_rfc3339(rfc3339).unwrap().timestamp_millis()
}

fn csv_rows(path: &Path) -> Vec<BTreeMap<String, String>> {
    let mut r = csv::Reader::from_path(path).unwrap();
    let h: Vec<String> = r.headers().unwrap().iter().map(str::to_string).collect();
    r.records().map(|rec| h.iter().cloned().zip(rec.unwrap().iter().map(str::to_string)).collect()).collect()
}

/// (file, line, reason) of each flag of an output folder.
fn flags(output: &Path) -> BTreeSet<(String, String, String)> {
    csv_rows(&output.join("qc_flags.csv"))
        .into_iter()
        .map(|r| (r["file"].clone(), r["line"].clone(), r["reason"].clone()))
        .collect()
}

/// The `[[logs]]` blocks `potclim init --logs` detects for the simulated
/// exports, with their `files` made relative to the simulated study.
fn detected_blocks(sim: &Path, work: &Path) -> (Vec<toml::Value>, String) {
    let det = work.join("detected");
    let globs = [format!("{}/logs/*.csv", sim.display()), format!("{}/logs/*/*", sim.display())];
    let (code, out, err) = run(&["init", det.to_str().unwrap(), "--logs", &globs[0], &globs[1]]);
    assert_eq!(code, 0, "{out}{err}");
    let text = std::fs::read_to_string(det.join("study.toml")).unwrap();
    let doc: toml::Table = toml::from_str(&text).unwrap_or_else(|e| panic!("{e}\n{text}"));
    let mut blocks = doc["logs"].as_array().unwrap().clone();
    // init writes paths (or globs) relative to its own folder, a sibling
    // of the simulated study's.
    for b in &mut blocks {
        let files = b.get_mut("files").unwrap().as_array_mut().unwrap();
        for f in files.iter_mut() {
            let rel =
                f.as_str().unwrap().strip_prefix("../sim/").unwrap_or_else(|| panic!("{f}")).to_string();
            *f = toml::Value::String(rel);
        }
    }
    (blocks, out)
}

#[test]
fn every_export_form_is_detected_and_ingested_to_the_truth() {
    let d = tempfile::tempdir().unwrap();
    let work = std::fs::canonicalize(d.path()).unwrap();
    let sim = work.join("sim");
    let (code, out, err) = run(&["simulate", scenario().to_str().unwrap(), "--out", sim.to_str().unwrap()]);
    assert_eq!(code, 0, "{out}{err}");

    // The simulator's own study: the recurring layouts in three lines.
    let study = std::fs::read_to_string(sim.join("study.toml")).unwrap();
    for form in ["four-line-header", "titled-with-offset", "name-in-first-cell"] {
        assert!(study.contains(&format!("layout = \"{form}\"")), "{study}");
    }
    let (code, out, err) = run(&["ingest", sim.join("study.toml").to_str().unwrap()]);
    assert_eq!(code, 0, "{out}{err}");
    let own = readings(&sim.join("output"));

    // The detected blocks: every layout recognised, no pattern written by hand.
    let (blocks, said) = detected_blocks(&sim, &work);
    let shown =
        toml::to_string(&toml::Table::from_iter([("logs".to_string(), toml::Value::Array(blocks.clone()))]))
            .unwrap();
    for form in ["four-line-header", "titled-with-offset", "name-in-first-cell"] {
        assert!(shown.contains(&format!("layout = \"{form}\"")), "{form}:\n{shown}\n{said}");
    }
    assert!(shown.contains("time = [\"Datum\", \"Uhrzeit\"]"), "{shown}");
    assert!(shown.contains("time_format = \"%m/%d/%Y %I:%M %p\""), "{shown}");
    // Two titled files and two first-cell files: one block each.
    assert!(said.contains("detected 6 block(s) for 8 file(s)"), "{said}");
    let mut doc: toml::Table = toml::from_str(&study).unwrap();
    doc.insert("logs".into(), toml::Value::Array(blocks));
    doc["study"].as_table_mut().unwrap().insert("output".into(), "output_detected".into());
    let detected = sim.join("detected.toml");
    std::fs::write(&detected, toml::to_string(&doc).unwrap()).unwrap();
    let (code, out, err) = run(&["check", detected.to_str().unwrap()]);
    assert_eq!(code, 0, "{out}{err}");
    assert!(out.contains("ok: every input is readable"), "{out}");
    let (code, out, err) = run(&["ingest", detected.to_str().unwrap()]);
    assert_eq!(code, 0, "{out}{err}");
    let found = readings(&sim.join("output_detected"));
    assert_eq!(found, own, "the detected blocks read other readings than the simulator's blocks");

    // Against the truth: every true reading is read back to the printed
    // precision (the truth file's 4 decimals), except the one whose time
    // cell was made unreadable; nothing else is read.
    let faults = csv_rows(&sim.join("truth/faults.csv"));
    let lost: BTreeSet<Key> = faults
        .iter()
        .filter(|f| f["reason"] == "unparsable_time")
        .map(|f| (f["sensor"].clone(), ms(&f["time_utc"])))
        .collect();
    assert_eq!(lost.len(), 1);
    let mut truth: BTreeMap<Key, Values> = BTreeMap::new();
    for r in csv_rows(&sim.join("truth/sensor_readings.csv")) {
        let v = |c: &str| r[c].parse::<f64>().ok();
        truth.insert(
            (r["sensor"].clone(), ms(&r["time"])),
            [v("temperature_c"), v("rh_pct"), v("ppfd_umol_m2_s")],
        );
    }
    let sensors: BTreeSet<&str> = truth.keys().map(|k| k.0.as_str()).collect();
    assert_eq!(sensors.len(), 9);
    let garbled: BTreeSet<Key> = faults
        .iter()
        .filter(|f| f["reason"] == "unparsable_value")
        .map(|f| (f["sensor"].clone(), ms(&f["time_utc"])))
        .collect();
    let mut compared = 0;
    for (key, want) in &truth {
        if lost.contains(key) {
            assert!(!own.contains_key(key), "{key:?}");
            continue;
        }
        let got = own.get(key).unwrap_or_else(|| panic!("no reading at {key:?}"));
        for k in 0..3 {
            match (want[k], got[k]) {
                (Some(_), None) if k == 0 && garbled.contains(key) => {}
                (Some(a), Some(b)) => {
                    assert!((a - b).abs() <= 0.5e-4 + 1e-9, "{key:?} channel {k}: {a} vs {b}")
                }
                (None, None) => {}
                (a, b) => panic!("{key:?} channel {k}: truth {a:?}, read {b:?}"),
            }
        }
        compared += 1;
    }
    assert_eq!(own.len(), compared, "readings that the truth does not have");
    assert!(compared > 9 * 1000, "{compared}");

    // Exactly the injected faults are flagged, on their lines, both ways.
    let want: BTreeSet<(String, String, String)> =
        faults.iter().map(|f| (f["file"].clone(), f["line"].clone(), f["reason"].clone())).collect();
    assert_eq!(flags(&sim.join("output")), want);
    assert_eq!(flags(&sim.join("output_detected")), want);
}

/// The scenario keys of the forms are checked with a message naming the key.
#[test]
fn export_form_keys_are_checked() {
    let d = tempfile::tempdir().unwrap();
    let base = std::fs::read_to_string(scenario()).unwrap();
    let cases = [
        ("form = \"titled-with-offset\"", "form = \"titled\"", "export[5].form"),
        (
            "form = \"four-line-header\"\n",
            "form = \"four-line-header\"\ntime_format = \"%Y-%m-%d %H:%M\"\n",
            "export[4].time_format",
        ),
        ("time = [\"Datum\", \"Uhrzeit\"]", "time = [\"Datum\"]", "export[2].columns.time"),
        ("time_format = \"%d.%m.%Y %H:%M\"", "time_format = \"%d.%m.%Y-%H:%M\"", "export[2].columns.time"),
        (
            "name = \"firstcell\"\nlayout = \"file_per_logger\"",
            "name = \"firstcell\"\nlayout = \"one_file\"",
            "export[6].layout",
        ),
    ];
    for (from, to, key) in cases {
        assert!(base.contains(from), "{from}");
        let p = d.path().join("scenario.toml");
        std::fs::write(&p, base.replacen(from, to, 1)).unwrap();
        let (code, out, err) =
            run(&["simulate", p.to_str().unwrap(), "--out", d.path().join("o").to_str().unwrap()]);
        assert_eq!(code, 1, "{to}: {out}{err}");
        assert!(err.contains(key), "{to}: {err}");
    }
}
