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
    let committed = tree(&demo(), &["scenario.toml", "README.md", "output"]);
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
