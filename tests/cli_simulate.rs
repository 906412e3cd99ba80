//! `potclim simulate` through the binary: determinism, the committed demo,
//! the written study loading with the study-file parser, and clear errors
//! for bad scenario files.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::process::Command;

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_potclim"))
}

fn demo() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-data")
}

/// Every file under `dir` (relative path -> bytes), skipping `skip` names at the top.
fn tree(dir: &Path, skip: &[&str]) -> BTreeMap<String, Vec<u8>> {
    let mut out = BTreeMap::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        for e in std::fs::read_dir(&d).unwrap() {
            let p = e.unwrap().path();
            let rel = p.strip_prefix(dir).unwrap().to_string_lossy().replace('\\', "/");
            if skip.iter().any(|s| rel == *s || rel.starts_with(&format!("{s}/"))) {
                continue;
            }
            if p.is_dir() {
                stack.push(p);
            } else {
                out.insert(rel, std::fs::read(&p).unwrap());
            }
        }
    }
    out
}

fn simulate(scenario: &Path, out: &Path, seed: u64) -> std::process::Output {
    bin()
        .arg("simulate")
        .arg(scenario)
        .arg("--out")
        .arg(out)
        .arg("--seed")
        .arg(seed.to_string())
        .output()
        .unwrap()
}

#[test]
fn same_seed_same_bytes_different_seed_differs() {
    let d = tempfile::tempdir().unwrap();
    let sc = demo().join("scenario.toml");
    for (name, seed) in [("a", 11), ("b", 11), ("c", 12)] {
        let o = simulate(&sc, &d.path().join(name), seed);
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    }
    let a = tree(&d.path().join("a"), &[]);
    let b = tree(&d.path().join("b"), &[]);
    let c = tree(&d.path().join("c"), &[]);
    assert_eq!(a.keys().collect::<Vec<_>>(), b.keys().collect::<Vec<_>>());
    for (k, v) in &a {
        assert!(v == &b[k], "{k} differs between two runs with the same seed");
    }
    // A different seed changes the trait, the logs and the truth.
    for k in ["pots.csv", "logs/climate_computer.csv", "truth/pots.csv", "truth/sensor_readings.csv"] {
        assert_ne!(a[k], c[k], "{k} is the same for seeds 11 and 12");
    }
}

#[test]
fn regenerating_the_demo_gives_the_committed_bytes() {
    let d = tempfile::tempdir().unwrap();
    let o = simulate(&demo().join("scenario.toml"), d.path(), 20261005);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let fresh = tree(d.path(), &[]);
    let committed = tree(&demo(), &["scenario.toml", "README.md", "output", "plan.toml"]);
    assert_eq!(
        fresh.keys().collect::<Vec<_>>(),
        committed.keys().collect::<Vec<_>>(),
        "the demo's file list changed: regenerate it (see demo-data/README.md)"
    );
    for (k, v) in &fresh {
        assert!(
            v == &committed[k],
            "demo-data/{k} differs from a fresh run: regenerate it (see demo-data/README.md)"
        );
    }
    let total: usize = committed.values().map(Vec::len).sum();
    assert!(total < 10_000_000, "demo is {total} bytes");
}

#[test]
fn demo_study_loads_and_truth_is_consistent() {
    let st = potclim::io::study::Study::load(&demo().join("study.toml")).unwrap();
    let pots = potclim::io::layout::load_pots(&st).unwrap();
    assert_eq!(pots.ids.len(), 480);
    let sensors = potclim::io::layout::load_sensors(&st).unwrap().unwrap();
    assert_eq!(sensors.ids.len(), 10);
    assert_eq!(st.spec.logs.len(), 3);
    assert!(st.spec.logs.iter().any(|l| l.sensor_from.as_deref() == Some("file_stem")
        && l.skip_lines == Some(3)
        && l.decimal.as_deref() == Some(",")));
    // Every reason of the demo's injected faults appears.
    let faults = std::fs::read_to_string(demo().join("truth/faults.csv")).unwrap();
    assert!(faults.starts_with("file,line,sensor,time_utc,variable,reason\n"));
    for reason in [
        "stuck",
        "spike",
        "duplicate",
        "out_of_range",
        "unparsable_value",
        "unparsable_time",
        "ambiguous_time",
        "outside_period",
    ] {
        assert!(faults.lines().any(|l| l.ends_with(&format!(",{reason}"))), "no {reason} fault");
    }
    // The local-time export repeats the fall-back hour (2026-10-25, 02:00-02:59
    // local, twice) for the loggers that log through it in order.
    let l05 = std::fs::read_to_string(demo().join("logs/standalone/L05.csv")).unwrap();
    assert_eq!(l05.lines().filter(|l| l.starts_with("25.10.2026 02:10;")).count(), 2);
    let l06 = std::fs::read_to_string(demo().join("logs/standalone/L06.csv")).unwrap();
    assert_eq!(l06.lines().filter(|l| l.starts_with("25.10.2026 02:10;")).count(), 1);
    // Trait = expected + noise at the printed precision, pot by pot.
    let truth = std::fs::read_to_string(demo().join("truth/pots.csv")).unwrap();
    let header: Vec<&str> = truth.lines().next().unwrap().split(',').collect();
    let col = |n: &str| header.iter().position(|h| *h == n).unwrap();
    for l in truth.lines().skip(1) {
        let c: Vec<&str> = l.split(',').collect();
        let e: f64 = c[col("expected_shoot_fresh_weight_g")].parse().unwrap();
        let n: f64 = c[col("noise")].parse().unwrap();
        let y: f64 = c[col("shoot_fresh_weight_g")].parse().unwrap();
        assert!((e + n - y).abs() <= 0.05 + 1e-4, "{l}");
    }
}

fn write_bad(dir: &Path, from: &str, to: &str) -> PathBuf {
    let s = std::fs::read_to_string(demo().join("scenario.toml")).unwrap();
    assert!(s.contains(from), "{from}");
    let p = dir.join("scenario.toml");
    std::fs::write(&p, s.replacen(from, to, 1)).unwrap();
    p
}

#[test]
fn bad_scenarios_get_clear_errors() {
    let d = tempfile::tempdir().unwrap();
    for (from, to, expect) in [
        ("slot_pitch = 0.5", "slot_pitch = -0.5", vec!["scenario.toml", "layout.slot_pitch", "-0.5"]),
        ("replicates = 40", "replicates = 44", vec!["design.replicates", "528 pots", "480 positions"]),
        (
            "level = \"Corvo\"",
            "level = \"Crovo\"",
            vec!["trait.effect[2].level", "`Crovo`", "did you mean `Corvo`"],
        ),
        (
            "factor = \"nitrogen\"\nlevel",
            "factor = \"nitrgen\"\nlevel",
            vec!["trait.effect[6].factor", "`nitrgen`", "`nitrogen`"],
        ),
        ("growth_days = 28", "growth_days = 28\ngrowth_dayz = 1", vec!["scenario.toml:", "growth_dayz"]),
        ("logger = \"L05\"", "logger = \"L55\"", vec!["fault[2].logger", "L55"]),
        ("at = \"2026-10-18 02:30\"", "at = \"2026-10-18 02:35\"", vec!["fault[2].at", "no reading"]),
    ] {
        let p = write_bad(d.path(), from, to);
        let out = d.path().join("out");
        let o = simulate(&p, &out, 1);
        assert_eq!(o.status.code(), Some(1), "{from} -> {to}");
        let e = String::from_utf8_lossy(&o.stderr);
        for x in expect {
            assert!(e.contains(x), "expected `{x}` in: {e}");
        }
        assert!(!e.contains("panicked"), "{e}");
        // Nothing is published from a failed run.
        assert!(!out.join("study.toml").exists());
    }
}

/// An independent reading of the demo exports, driven only by the written
/// study file's `[[logs]]` blocks: local times go to UTC through chrono-tz
/// (the IANA database; a repeated fall-back time is the first pass the first
/// time it is seen and the second pass after), units through the published
/// definitions. Every reading not listed in `truth/faults.csv` must equal
/// `truth/sensor_readings.csv` within 1e-4, and every true reading must be
/// accounted for.
#[test]
fn demo_exports_read_back_to_the_true_readings() {
    use chrono::{DateTime, NaiveDateTime, TimeZone, Utc};
    use std::collections::{BTreeMap, BTreeSet};
    let st = potclim::io::study::Study::load(&demo().join("study.toml")).unwrap();
    let faults = std::fs::read_to_string(demo().join("truth/faults.csv")).unwrap();
    let mut row_faults = BTreeSet::new();
    let mut value_faults = BTreeSet::new();
    let mut row_fault_keys = BTreeSet::new();
    for l in faults.lines().skip(1) {
        let c: Vec<&str> = l.split(',').collect();
        let key = (c[0].to_string(), c[1].parse::<usize>().unwrap());
        if c[4].is_empty() {
            row_faults.insert(key);
            if c[5] != "duplicate" && c[5] != "outside_period" {
                row_fault_keys.insert((c[2].to_string(), c[3].to_string()));
            }
        } else {
            value_faults.insert((key.0, key.1, c[4].to_string()));
        }
    }
    let truth_text = std::fs::read_to_string(demo().join("truth/sensor_readings.csv")).unwrap();
    let mut truth: BTreeMap<(String, String), [Option<f64>; 3]> = BTreeMap::new();
    for l in truth_text.lines().skip(1) {
        let c: Vec<&str> = l.split(',').collect();
        let v = |s: &str| if s.is_empty() { None } else { Some(s.parse::<f64>().unwrap()) };
        truth.insert((c[0].to_string(), c[1].to_string()), [v(c[2]), v(c[3]), v(c[4])]);
    }
    let mut matched = BTreeSet::new();
    let mut compared = 0usize;
    for log in &st.spec.logs {
        let delim =
            potclim::io::study::delimiter_byte(log.delimiter.as_deref().unwrap_or(",")).unwrap() as char;
        let tz: chrono_tz::Tz = log.timezone.as_deref().map(|z| z.parse().unwrap()).unwrap_or(st.timezone);
        let mut paths: Vec<PathBuf> = Vec::new();
        for g in &log.files {
            paths.extend(glob::glob(&st.resolve(g).to_string_lossy()).unwrap().map(Result::unwrap));
        }
        paths.sort();
        assert!(!paths.is_empty());
        for path in paths {
            let rel = path.strip_prefix(&st.dir).unwrap().to_string_lossy().replace('\\', "/");
            let text = std::fs::read_to_string(&path).unwrap();
            let lines: Vec<&str> = text.lines().collect();
            let skip = log.skip_lines.unwrap_or(0);
            let header: Vec<&str> = lines[skip].split(delim).collect();
            let col = |n: &str| {
                header.iter().position(|h| *h == n).unwrap_or_else(|| panic!("{rel}: no column {n}"))
            };
            let tcol = col(log.time.as_ref().unwrap().names()[0]);
            let scol = log.sensor.as_deref().map(col);
            let chans = [&log.columns.temperature, &log.columns.humidity, &log.columns.light];
            let ccols: Vec<Option<(usize, String)>> =
                chans.iter().map(|c| c.as_ref().map(|c| (col(&c.column), c.unit.clone()))).collect();
            let mut seen_local: BTreeSet<(String, NaiveDateTime)> = BTreeSet::new();
            for (i, line) in lines.iter().enumerate().skip(skip + 1) {
                let number = i + 1;
                if row_faults.contains(&(rel.clone(), number)) {
                    continue;
                }
                let cells: Vec<&str> = line.split(delim).collect();
                let sensor = match scol {
                    Some(j) => cells[j].to_string(),
                    None => path.file_stem().unwrap().to_string_lossy().to_string(),
                };
                let t: DateTime<Utc> = if log.time_format.as_deref() == Some("rfc3339") {
                    DateTime::parse_from_rfc3339(cells[tcol]).unwrap().with_timezone(&Utc)
                } else {
                    let local =
                        NaiveDateTime::parse_from_str(cells[tcol], log.time_format.as_deref().unwrap())
                            .unwrap();
                    match tz.from_local_datetime(&local) {
                        chrono::LocalResult::Single(t) => t.with_timezone(&Utc),
                        chrono::LocalResult::Ambiguous(a, b) => {
                            if seen_local.insert((sensor.clone(), local)) {
                                a.with_timezone(&Utc)
                            } else {
                                b.with_timezone(&Utc)
                            }
                        }
                        chrono::LocalResult::None => panic!("{rel}:{number}: nonexistent local time"),
                    }
                };
                let key = (sensor.clone(), t.to_rfc3339_opts(chrono::SecondsFormat::Secs, true));
                let want =
                    truth.get(&key).unwrap_or_else(|| panic!("{rel}:{number}: no true reading for {key:?}"));
                for (k, c) in ccols.iter().enumerate() {
                    let Some((j, unit)) = c else { continue };
                    if value_faults.contains(&(
                        rel.clone(),
                        number,
                        ["temperature", "humidity", "light"][k].to_string(),
                    )) {
                        continue;
                    }
                    let raw = if log.decimal.as_deref() == Some(",") {
                        cells[*j].replace(',', ".")
                    } else {
                        cells[*j].to_string()
                    };
                    // Read as ingestion reads it (io's conversion, not the simulator's).
                    let conv = potclim::io::units::Conversion::of(potclim::io::units::Channel::ALL[k], unit)
                        .unwrap_or_else(|| panic!("{rel}: unit {unit} unknown to ingestion"));
                    let got = conv.apply(raw.parse::<f64>().unwrap());
                    let w = want[k].unwrap();
                    assert!((got - w).abs() <= 1e-4, "{rel}:{number}: {got} vs true {w}");
                    compared += 1;
                }
                assert!(matched.insert(key.clone()), "{rel}:{number}: {key:?} read twice");
            }
        }
    }
    // Every true reading was read back, or sits on a row listed as a whole-row fault.
    let missing: Vec<_> =
        truth.keys().filter(|k| !matched.contains(*k) && !row_fault_keys.contains(*k)).collect();
    assert!(missing.is_empty(), "{} true readings not found, e.g. {:?}", missing.len(), missing.first());
    assert!(compared > 100_000, "{compared}");
}
