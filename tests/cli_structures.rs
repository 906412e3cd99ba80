//! Rows x columns and direction-dependent residuals through the binary:
//! `potclim simulate` generates the bench-lanes scenario
//! (tests/scenarios/bench_lanes.toml: a rows x columns residual field,
//! 0.8 along a row, 0.2 from row to row), `potclim run` fits the grid with
//! both structures declared, and `potclim fit` fits them too. Checks that
//! they enter the grid with their parameters in `comparison.csv` and
//! `models.csv`, and that the chosen structure is named in words.

use std::path::Path;
use std::process::Command;

fn potclim(args: &[&str], dir: &Path) -> String {
    let out = Command::new(env!("CARGO_BIN_EXE_potclim")).args(args).current_dir(dir).output().unwrap();
    assert!(
        out.status.success(),
        "potclim {args:?} failed:\n{}\n{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8_lossy(&out.stdout).into_owned()
}

fn column<'a>(header: &[&str], row: &'a [&'a str], name: &str) -> &'a str {
    row[header.iter().position(|h| *h == name).unwrap_or_else(|| panic!("no column {name}"))]
}

#[test]
fn bench_structures_enter_the_grid_and_are_named() {
    let dir = tempfile::tempdir().unwrap();
    let scenario = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/scenarios/bench_lanes.toml");
    potclim(&["simulate", scenario.to_str().unwrap(), "--out", "study", "--seed", "11"], dir.path());
    let study = dir.path().join("study");
    let toml = std::fs::read_to_string(study.join("study.toml")).unwrap();
    assert!(
        toml.contains("rows_columns = true") && toml.contains("directional = [\"exponential\"]"),
        "{toml}"
    );
    potclim(&["run", "study.toml"], &study);

    let out = study.join("output");
    let csv = std::fs::read_to_string(out.join("comparison.csv")).unwrap();
    let mut lines = csv.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    assert_eq!(
        &header[header.len() - 4..],
        ["row_correlation", "column_correlation", "direction_degrees", "range_ratio"]
    );
    let rows: Vec<Vec<&str>> = lines.map(|l| l.split(',').collect()).collect();
    let rc: Vec<&Vec<&str>> =
        rows.iter().filter(|r| column(&header, r, "correlation") == "rows_x_columns").collect();
    let dir_rows: Vec<&Vec<&str>> =
        rows.iter().filter(|r| column(&header, r, "correlation") == "exponential_directional").collect();
    // one per fixed part (base, base + the driver, base + the distance to the vent), no nugget
    assert_eq!((rc.len(), dir_rows.len()), (3, 3), "{csv}");
    for r in &rc {
        let along_row: f64 = column(&header, r, "column_correlation").parse().unwrap();
        let across: f64 = column(&header, r, "row_correlation").parse().unwrap();
        // truth 0.8 along a row, 0.2 from row to row (60 pots: loose bounds)
        assert!(along_row > 0.5 && along_row > across, "{csv}");
        assert_eq!(column(&header, r, "direction_degrees"), "");
    }
    for r in &dir_rows {
        let deg: f64 = column(&header, r, "direction_degrees").parse().unwrap();
        let ratio: f64 = column(&header, r, "range_ratio").parse().unwrap();
        assert!((0.0..180.0).contains(&deg) && ratio > 0.0 && ratio <= 1.0, "{csv}");
        assert!(column(&header, r, "range").parse::<f64>().unwrap() > 0.0);
    }
    // the lowest AIC belongs to a bench structure, and the verdict's
    // reason names the chosen structure in words when it is one
    let best = &rows[0];
    let kind = column(&header, best, "correlation");
    assert!(kind == "rows_x_columns" || kind == "exponential_directional", "{csv}");
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap()).unwrap();
    let chosen = summary["best_model"].as_str().unwrap();
    let reason = summary["reason"].as_str().unwrap();
    if chosen.contains("rows_x_columns") {
        assert!(reason.contains("rows x columns: neighbouring pots along a row correlate"), "{reason}");
    } else if chosen.contains("_directional") {
        assert!(reason.contains("longest practical range"), "{reason}");
    }
    let structures = summary["structures"].as_array().expect("structures in summary.json");
    assert!(structures.iter().any(|s| s["model"] == chosen || s["delta_aic"].as_f64().unwrap() <= 4.0));
    let html = std::fs::read_to_string(out.join("report.html")).unwrap();
    assert!(html.contains("Residuals along benches and lanes"), "report block missing");

    // potclim fit accepts them as well (ML and REML each)
    let printed = potclim(&["fit", "study.toml"], &study);
    assert!(printed.contains("rows x columns: row correlation"), "{printed}");
    let models = std::fs::read_to_string(out.join("models.csv")).unwrap();
    let mh: Vec<&str> = models.lines().next().unwrap().split(',').collect();
    let mrows: Vec<Vec<&str>> = models.lines().skip(1).map(|l| l.split(',').collect()).collect();
    for (label, method) in [
        ("rows_x_columns", "ML"),
        ("rows_x_columns", "REML"),
        ("exponential_directional", "ML"),
        ("exponential_directional", "REML"),
    ] {
        let r = mrows
            .iter()
            .find(|r| column(&mh, r, "model") == label && column(&mh, r, "method") == method)
            .unwrap_or_else(|| panic!("{label} {method} missing:\n{models}"));
        let filled = if label == "rows_x_columns" { "row_correlation" } else { "direction_degrees" };
        assert!(!column(&mh, r, filled).is_empty(), "{models}");
        assert!(!column(&mh, r, "partial_sill").is_empty(), "{models}");
    }
}
