//! Golden files of the verdict stage: a small study with known truth
//! (`tests/golden/scenario.toml`: 60 pots, 6 loggers, 8 days, one correlation
//! family with and without nugget) is simulated with a fixed seed, analysed
//! through the binary (`ingest`, `climate`, `map`, `verdict`), and its
//! `comparison.csv`, `drivers.csv`, `adjusted_means.csv` and `summary.json`
//! are compared with the committed files in `tests/golden/`.
//!
//! Comparison: text cells and JSON strings, booleans, keys and the layout
//! (header, row count, field count) exactly; numbers within a relative
//! tolerance of 1e-9 with an absolute floor of 1e-12 (so values at rounding
//! level, such as a p-value of 5e-16 computed as 1 − CDF, or a nugget share
//! at its bound, do not fail on the last bit). `summary.json`'s `seconds`
//! and `timings` (wall clock and work counts) are not compared. The 1e-9 is the project's bar for "the same
//! numbers" (the demo outputs are held to it too); a deliberate change of
//! method or wording shows up here and is accepted by rewriting the golden
//! files:
//!
//! ```sh
//! POTCLIM_BLESS=1 cargo test --test golden_verdict
//! ```
//!
//! then reviewing `git diff tests/golden/` and committing it with the reason.

use std::path::{Path, PathBuf};
use std::process::Command;

/// Relative tolerance for numbers.
const RTOL: f64 = 1e-9;
/// Absolute floor: magnitudes below this compare as equal.
const ATOL: f64 = 1e-12;
/// The seed of the simulation (the study's own seed follows it).
const SEED: &str = "7";
/// The files compared.
const FILES: [&str; 4] = ["comparison.csv", "drivers.csv", "adjusted_means.csv", "summary.json"];

fn golden_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/golden")
}

fn potclim(args: &[&str], dir: &Path) {
    let out = Command::new(env!("CARGO_BIN_EXE_potclim")).args(args).current_dir(dir).output().unwrap();
    assert!(
        out.status.success(),
        "potclim {args:?} failed:\n{}\n{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
}

fn numbers_agree(a: f64, b: f64) -> bool {
    a == b || (a - b).abs() <= RTOL * a.abs().max(b.abs()) + ATOL
}

/// A cell agrees when both parse as numbers that agree, or when the texts
/// are equal.
fn cells_agree(want: &str, got: &str) -> bool {
    match (want.parse::<f64>(), got.parse::<f64>()) {
        (Ok(a), Ok(b)) => numbers_agree(a, b),
        _ => want == got,
    }
}

fn compare_csv(name: &str, want: &str, got: &str) -> Vec<String> {
    let read = |t: &str| -> Vec<Vec<String>> {
        let mut r = csv::ReaderBuilder::new().has_headers(false).from_reader(t.as_bytes());
        r.records().map(|x| x.unwrap().iter().map(String::from).collect()).collect()
    };
    let (w, g) = (read(want), read(got));
    let mut errs = Vec::new();
    if w.len() != g.len() {
        errs.push(format!("{name}: {} rows expected, {} written", w.len(), g.len()));
    }
    for (i, (rw, rg)) in w.iter().zip(&g).enumerate() {
        if rw.len() != rg.len() {
            errs.push(format!("{name} line {}: {} fields expected, {} written", i + 1, rw.len(), rg.len()));
            continue;
        }
        for (j, (a, b)) in rw.iter().zip(rg).enumerate() {
            if !cells_agree(a, b) {
                errs.push(format!("{name} line {} column `{}`: expected {a:?}, got {b:?}", i + 1, w[0][j]));
            }
        }
    }
    errs
}

fn compare_json(path: &str, want: &serde_json::Value, got: &serde_json::Value, errs: &mut Vec<String>) {
    use serde_json::Value as V;
    match (want, got) {
        (V::Number(a), V::Number(b)) => {
            let (a, b) = (a.as_f64().unwrap(), b.as_f64().unwrap());
            if !numbers_agree(a, b) {
                errs.push(format!("summary.json {path}: expected {a}, got {b}"));
            }
        }
        (V::Array(a), V::Array(b)) => {
            if a.len() != b.len() {
                errs.push(format!("summary.json {path}: {} items expected, {} written", a.len(), b.len()));
            }
            for (i, (x, y)) in a.iter().zip(b).enumerate() {
                compare_json(&format!("{path}[{i}]"), x, y, errs);
            }
        }
        (V::Object(a), V::Object(b)) => {
            let keys = |o: &serde_json::Map<String, V>| -> Vec<String> {
                o.keys().filter(|k| *k != "seconds" && *k != "timings").cloned().collect()
            };
            if keys(a) != keys(b) {
                errs.push(format!("summary.json {path}: keys {:?} expected, {:?} written", keys(a), keys(b)));
            }
            for k in keys(a) {
                if let Some(y) = b.get(&k) {
                    compare_json(&format!("{path}.{k}"), &a[&k], y, errs);
                }
            }
        }
        (a, b) => {
            if a != b {
                errs.push(format!("summary.json {path}: expected {a}, got {b}"));
            }
        }
    }
}

#[test]
fn verdict_tables_match_the_golden_files() {
    let dir = tempfile::tempdir().unwrap();
    let study = dir.path().join("study");
    let scenario = golden_dir().join("scenario.toml");
    potclim(
        &["simulate", scenario.to_str().unwrap(), "--out", study.to_str().unwrap(), "--seed", SEED],
        dir.path(),
    );
    for stage in ["ingest", "climate", "map", "verdict"] {
        potclim(&[stage, "study.toml"], &study);
    }
    let out = study.join("output");
    if std::env::var_os("POTCLIM_BLESS").is_some_and(|v| v == "1") {
        for f in FILES {
            std::fs::copy(out.join(f), golden_dir().join(f)).unwrap();
        }
        eprintln!("rewrote the golden files in {}", golden_dir().display());
        return;
    }
    let mut errs = Vec::new();
    for f in FILES {
        let want = std::fs::read_to_string(golden_dir().join(f))
            .unwrap_or_else(|e| panic!("tests/golden/{f}: {e} (create it with POTCLIM_BLESS=1)"));
        let got = std::fs::read_to_string(out.join(f)).unwrap();
        if f.ends_with(".json") {
            let (w, g) = (serde_json::from_str(&want).unwrap(), serde_json::from_str(&got).unwrap());
            compare_json("", &w, &g, &mut errs);
        } else {
            errs.extend(compare_csv(f, &want, &got));
        }
    }
    assert!(
        errs.is_empty(),
        "{} difference(s) from the golden files (if intended: POTCLIM_BLESS=1 cargo test --test golden_verdict):\n{}",
        errs.len(),
        errs.join("\n")
    );
}

/// The comparison itself: a change in the 10th significant digit or of one
/// word fails; a change in the 12th digit or a p-value at rounding level
/// passes.
#[test]
fn comparison_tolerances_are_as_stated() {
    assert!(cells_agree("170.77928854189182", "170.77928854189"));
    assert!(!cells_agree("170.77928854189182", "170.779288"));
    assert!(cells_agree("4.996003610813204e-16", "5.551115123125783e-16"));
    assert!(!cells_agree("exponential", "gaussian"));
    assert!(!cells_agree("true", "false"));
    let errs = compare_csv("t.csv", "a,b\nx,1.5\n", "a,b\nx,1.6\n");
    assert_eq!(errs.len(), 1, "{errs:?}");
    let mut errs = Vec::new();
    let w = serde_json::json!({"v": 1.0, "seconds": 3.0, "s": "a"});
    let g = serde_json::json!({"v": 1.0 + 1e-12, "seconds": 9.0, "s": "a"});
    compare_json("", &w, &g, &mut errs);
    assert!(errs.is_empty(), "{errs:?}");
    compare_json("", &w, &serde_json::json!({"v": 1.001, "seconds": 3.0, "s": "a"}), &mut errs);
    assert_eq!(errs.len(), 1);
}
