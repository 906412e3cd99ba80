//! `potclim map` and `potclim run` through the binary on a copy of the demo
//! study, checked against the simulator's known truth (`truth/pots.csv`).

use std::collections::HashMap;
use std::path::{Path, PathBuf};
use std::process::Command;

#[path = "common/report_checks.rs"]
mod report_checks;

fn copy_dir(from: &Path, to: &Path) {
    std::fs::create_dir_all(to).unwrap();
    for e in std::fs::read_dir(from).unwrap() {
        let e = e.unwrap();
        if e.file_name() == "output" {
            continue;
        }
        let p = e.path();
        if p.is_dir() {
            copy_dir(&p, &to.join(e.file_name()));
        } else {
            std::fs::copy(&p, to.join(e.file_name())).unwrap();
        }
    }
}

fn demo_copy() -> (tempfile::TempDir, PathBuf) {
    let d = tempfile::tempdir().unwrap();
    copy_dir(&Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-data"), d.path());
    let s = d.path().join("study.toml");
    (d, s)
}

fn potclim(args: &[&str]) -> (bool, String, String) {
    let o = Command::new(env!("CARGO_BIN_EXE_potclim")).args(args).output().unwrap();
    (o.status.success(), String::from_utf8_lossy(&o.stdout).into(), String::from_utf8_lossy(&o.stderr).into())
}

fn table(path: &Path) -> Vec<HashMap<String, String>> {
    let mut r = csv::Reader::from_path(path).unwrap();
    let h: Vec<String> = r.headers().unwrap().iter().map(str::to_string).collect();
    r.records().map(|rec| h.iter().cloned().zip(rec.unwrap().iter().map(str::to_string)).collect()).collect()
}

fn pearson(a: &[f64], b: &[f64]) -> f64 {
    let n = a.len() as f64;
    let (ma, mb) = (a.iter().sum::<f64>() / n, b.iter().sum::<f64>() / n);
    let cov: f64 = a.iter().zip(b).map(|(x, y)| (x - ma) * (y - mb)).sum();
    let va: f64 = a.iter().map(|x| (x - ma).powi(2)).sum();
    let vb: f64 = b.iter().map(|y| (y - mb).powi(2)).sum();
    cov / (va * vb).sqrt()
}

#[test]
fn map_needs_ingest_first() {
    let (_d, s) = demo_copy();
    let (ok, _, err) = potclim(&["map", s.to_str().unwrap()]);
    assert!(!ok);
    assert!(err.contains("readings.parquet") && err.contains("potclim ingest"), "{err}");
}

/// The mapped night cold hours follow the simulator's true values at the pots
/// (computed from the true field over each pot's window), and every pot has a
/// value, a positive standard error and its distance to the door.
#[test]
fn mapped_indicators_follow_the_true_field() {
    let (d, s) = demo_copy();
    let (ok, _, err) = potclim(&["ingest", s.to_str().unwrap()]);
    assert!(ok, "{err}");
    let (ok, out, err) = potclim(&["map", s.to_str().unwrap()]);
    assert!(ok, "{err}");
    assert!(out.contains("night_cold_hours"), "{out}");
    let dir = d.path().join("output");
    let cov = table(&dir.join("pot_covariates.csv"));
    assert_eq!(cov.len(), 480);
    let truth: HashMap<String, HashMap<String, String>> =
        table(&d.path().join("truth/pots.csv")).into_iter().map(|r| (r["pot"].clone(), r)).collect();
    let (mut est, mut tru, mut ses) = (Vec::new(), Vec::new(), Vec::new());
    for r in &cov {
        let v: f64 = r["night_cold_hours"].parse().unwrap();
        let se: f64 = r["night_cold_hours_se"].parse().unwrap();
        assert!(v.is_finite() && se > 0.0, "{r:?}");
        ses.push(se);
        let dist: f64 = r["distance_door"].parse().unwrap();
        let t = &truth[&r["pot"]];
        // The simulator's distance to the door segment is printed with 4 decimals.
        assert!((dist - t["distance_door"].parse::<f64>().unwrap()).abs() < 1e-3);
        est.push(v);
        tru.push(t["night_cold_hours"].parse::<f64>().unwrap());
    }
    // Accuracy against the truth (issue targets; before the openings became an
    // external drift and the threshold hours an expectation: RMSE 39.8 h,
    // r 0.848, door pots 48.6 % too low on average).
    let r = pearson(&est, &tru);
    let n = est.len() as f64;
    let rmse = (est.iter().zip(&tru).map(|(e, t)| (e - t).powi(2)).sum::<f64>() / n).sqrt();
    let mut by_door: Vec<usize> = (0..cov.len()).collect();
    let door = |k: usize| truth[&cov[k]["pot"]]["distance_door"].parse::<f64>().unwrap();
    by_door.sort_by(|&a, &b| door(a).total_cmp(&door(b)));
    let near = &by_door[..20];
    let rel = near.iter().map(|&k| (est[k] - tru[k]).abs() / tru[k]).sum::<f64>() / 20.0;
    let top = (0..est.len()).max_by(|&a, &b| est[a].total_cmp(&est[b])).unwrap();
    eprintln!(
        "night cold hours: RMSE {rmse:.2} h, r {r:.4}, door-20 mean relative error {:.1} %, largest mapped value {:.0} h at {:.2} m from the door",
        100.0 * rel,
        est[top],
        door(top)
    );
    assert!(r > 0.95, "correlation of mapped and true night cold hours {r}");
    assert!(rmse <= 20.0, "RMSE {rmse} h against the truth (target: half of the former 40 h)");
    assert!(rel <= 0.15, "door pots off by {:.1} % on average (target 15 %)", 100.0 * rel);
    assert!(door(top) < 3.0, "the coldest mapped pot is {:.2} m from the door", door(top));
    // Calibrated standard errors (issue target: mean squared standardised
    // error against the truth within 0.5-2; 0.13 with the kriged study-period
    // summary, 0.76 with the persistence tuned on the window indicator at
    // the loggers, 0.72 with the per-step scale, the intraclass persistence
    // and the steps' own Bernoulli variance).
    let msse = (0..est.len()).map(|k| ((est[k] - tru[k]) / ses[k]).powi(2)).sum::<f64>() / n;
    eprintln!("night cold hours: MSSE against the truth {msse:.3}");
    assert!((0.5..=2.0).contains(&msse), "MSSE {msse}");
    let se_file = table(&dir.join("mapping_se.csv"));
    let nch = se_file.iter().find(|r| r["indicator"] == "night_cold_hours").unwrap();
    assert_eq!(nch["se_from"], "per_step_errors", "{nch:?}");
    // ML fits on the sensors' study-period values: AIC = -2 l + 2 k with k = 4
    // (mean, sigma², range, nugget share; [mapping].nugget defaults to true).
    let ml = table(&dir.join("variogram_ml_fits.csv"));
    assert_eq!(ml.len(), 2 * 5, "two indicators x five default families");
    for r in &ml {
        let (l, aic): (f64, f64) = (r["loglik"].parse().unwrap(), r["aic"].parse().unwrap());
        assert!((aic - (-2.0 * l + 8.0)).abs() < 1e-9, "{r:?}");
    }
    for f in ["variograms.csv", "variogram_fits.csv", "mapping_cv.csv", "mapping_check.csv"] {
        assert!(dir.join(f).exists(), "{f}");
    }
    let cv = table(&dir.join("mapping_cv.csv"));
    assert!(cv.iter().any(|r| r["chosen"] == "true"), "auto chose no method");
    // Temperature: the door as an external drift, its decay length estimated
    // near the simulator's 3 m e-folding length.
    let t = cv.iter().find(|r| r["variable"] == "temperature" && r["chosen"] == "true").unwrap();
    assert_eq!((t["method"].as_str(), t["drift"].as_str()), ("external_drift", "door"), "{t:?}");
    let l: f64 = t["decay_length"].parse().unwrap();
    assert!((1.5..6.0).contains(&l), "decay length {l}");
    assert!(t["reason"].contains("decay length"), "{t:?}");
    // The map checks itself: every logger left out in turn; the logger nearest
    // the door (L01) is named, and its left-out value is lower than its own
    // reading (the door's cold is strongest there).
    let chk = table(&dir.join("mapping_check.csv"));
    // Night cold hours at all ten loggers; the light integral at the seven
    // with a light sensor (the radio nodes N08-N10 have none).
    assert_eq!(chk.len(), 10 + 7);
    let l01 = chk.iter().find(|r| r["indicator"] == "night_cold_hours" && r["sensor"] == "L01").unwrap();
    assert_eq!(l01["nearest_to_opening"], "door", "{l01:?}");
    let (obs, pred): (f64, f64) =
        (l01["observed"].parse().unwrap(), l01["predicted_without"].parse().unwrap());
    assert!(pred < obs && obs > 300.0, "{l01:?}");
    eprintln!("self-check at L01: {pred:.1} h without it, {obs:.1} h measured, flagged {}", l01["flagged"]);
}

#[test]
fn run_writes_every_stage_and_the_report() {
    let (d, s) = demo_copy();
    // Standard output is a pipe here, as in `potclim run study.toml > log.txt`:
    // the outcome is printed there, and no progress reaches standard error.
    let (ok, out, err) = potclim(&["run", s.to_str().unwrap()]);
    assert!(ok, "{err}");
    assert!(err.is_empty(), "progress drawn although standard error is not a terminal: {err}");
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(d.path().join("output/summary.json")).unwrap())
            .unwrap();
    for (label, key) in [("verdict: ", "verdict"), ("reason: ", "reason"), ("chosen model: ", "best_model")] {
        let want = format!("{label}{}", summary[key].as_str().unwrap());
        assert!(out.lines().any(|l| l == want), "`{want}` not in: {out}");
    }
    assert!(out.lines().any(|l| l.starts_with("report: ") && l.ends_with("report.html")), "{out}");
    for stage in ["ingest: ", "climate: ", "map: ", "verdict: ", "report: "] {
        assert!(out.lines().any(|l| l.starts_with(stage)), "no `{stage}` line: {out}");
    }
    let dir = d.path().join("output");
    for f in [
        "readings.parquet",
        "qc_flags.csv",
        "qc_summary.csv",
        "gaps.csv",
        "sensor_indicators.csv",
        "sensor_daily.parquet",
        "pot_covariates.csv",
        "report.html",
        "report_data.json",
    ] {
        assert!(dir.join(f).exists(), "{f} missing");
    }
    let html = std::fs::read_to_string(dir.join("report.html")).unwrap();
    for id in ["verdict", "layout", "climate", "spatial", "models", "means", "provenance"] {
        assert!(html.contains(&format!("id=\"{id}\"")), "section {id}");
    }
    // Units reach the labels: the trait's from `[model].trait_unit` (g in the
    // demo), each driver's from its indicator (night cold hours in h, the
    // daily light integral in mol m-2 d-1).
    let data: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("report_data.json")).unwrap()).unwrap();
    assert_eq!(data["verdict"]["trait_unit"], "g");
    assert_eq!(data["adjusted_means_unit"], "g");
    assert_eq!(data["layout"]["trait_unit"], "g");
    let unit_of = |name: &str| {
        data["verdict"]["drivers"].as_array().unwrap().iter().find(|d| d["name"] == name).unwrap()["unit"]
            .clone()
    };
    assert_eq!(unit_of("night_cold_hours"), "h");
    assert_eq!(unit_of("mean_dli"), "mol m-2 d-1");
    assert!(html.contains("night_cold_hours (h)"), "driver label with its unit");
    // The chosen driver's small-sample interval reaches the report as
    // summary.json has it, named by the refit it comes from.
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("summary.json")).unwrap()).unwrap();
    let in_summary =
        summary["drivers"].as_array().unwrap().iter().find(|d| d["name"] == "night_cold_hours").unwrap();
    let in_report = data["verdict"]["drivers"]
        .as_array()
        .unwrap()
        .iter()
        .find(|d| d["name"] == "night_cold_hours")
        .unwrap();
    assert_eq!(in_report["small_sample"]["ci_low"], in_summary["ci_low_small_sample"]);
    assert_eq!(in_report["small_sample"]["ci_high"], in_summary["ci_high_small_sample"]);
    assert_eq!(in_report["small_sample"]["model"], summary["best_model"]);
    assert!(html.contains("<th class=\"n\">95 % CI, small sample</th>"));
    // The design's count table: levels sorted (as `potclim check` prints
    // them), each cell the number of pots counted straight from pots.csv.
    let c = &data["layout"]["counts"];
    let levels = |k: &str| -> Vec<String> {
        c[k].as_array().unwrap().iter().map(|v| v.as_str().unwrap().to_string()).collect()
    };
    let (rl, cl) = (levels("row_levels"), levels("col_levels"));
    assert!(rl.is_sorted() && cl.is_sorted(), "{rl:?} {cl:?}");
    let pots = table(&d.path().join("pots.csv"));
    let (rf, cf) = (c["row_factor"].as_str().unwrap(), c["col_factor"].as_str().unwrap());
    for (i, a) in rl.iter().enumerate() {
        for (j, b) in cl.iter().enumerate() {
            let n = pots.iter().filter(|r| r[rf] == *a && r[cf] == *b).count();
            assert_eq!(c["counts"][i][j].as_u64(), Some(n as u64), "{a} x {b}");
        }
    }
    assert!(!html.contains("()"), "an empty unit label");
    report_checks::demo_report(&html, &data);
    // No staging folder is left behind.
    for e in std::fs::read_dir(&dir).unwrap() {
        assert!(!e.unwrap().file_name().to_string_lossy().contains("partial"));
    }
}

/// A sharp draught seen by one logger (`tests/scenarios/sharp_draught.toml`,
/// seed 1; 6 °C colder at the door at night, fading over 0.8 m): the map
/// keeps the cold spot at the door. Measured with this seed: RMSE 2.78 h
/// against a true SD of 33.7 h, the 20 pots nearest the door off by 7.2 %
/// of their true hours in total, MSSE 0.74 (seeds 1-10 in docs/spatial.md).
#[test]
fn sharp_draught_is_mapped_at_the_door() {
    let d = tempfile::tempdir().unwrap();
    let study = d.path().join("study");
    let sc = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/scenarios/sharp_draught.toml");
    let (ok, _, err) =
        potclim(&["simulate", sc.to_str().unwrap(), "--out", study.to_str().unwrap(), "--seed", "1"]);
    assert!(ok, "{err}");
    let s = study.join("study.toml");
    for cmd in ["ingest", "map"] {
        let (ok, _, err) = potclim(&[cmd, s.to_str().unwrap()]);
        assert!(ok, "{cmd}: {err}");
    }
    let cov = table(&study.join("output/pot_covariates.csv"));
    let truth: HashMap<String, HashMap<String, String>> =
        table(&study.join("truth/pots.csv")).into_iter().map(|r| (r["pot"].clone(), r)).collect();
    let num = |r: &HashMap<String, String>, c: &str| r[c].parse::<f64>().unwrap();
    let mut rows: Vec<(f64, f64, f64, f64)> = cov
        .iter()
        .map(|r| {
            let t = &truth[&r["pot"]];
            (
                num(t, "distance_door"),
                num(t, "night_cold_hours"),
                num(r, "night_cold_hours"),
                num(r, "night_cold_hours_se"),
            )
        })
        .collect();
    rows.sort_by(|a, b| a.0.total_cmp(&b.0));
    let n = rows.len() as f64;
    let rmse = (rows.iter().map(|r| (r.2 - r.1).powi(2)).sum::<f64>() / n).sqrt();
    let near = &rows[..20];
    let door20 = near.iter().map(|r| (r.2 - r.1).abs()).sum::<f64>() / near.iter().map(|r| r.1).sum::<f64>();
    let msse =
        rows.iter().map(|r| if r.2 == r.1 { 0.0 } else { ((r.2 - r.1) / r.3).powi(2) }).sum::<f64>() / n;
    eprintln!("sharp draught: RMSE {rmse:.2} h, door-20 error {:.1} %, MSSE {msse:.3}", 100.0 * door20);
    assert!(rmse < 4.0, "RMSE {rmse} h");
    assert!(door20 < 0.12, "door-20 error {door20}");
    assert!((0.5..=2.0).contains(&msse), "MSSE {msse}");
    let top = rows.iter().max_by(|a, b| a.2.total_cmp(&b.2)).unwrap();
    assert!(top.0 < 1.5, "the coldest mapped pot is {:.2} m from the door", top.0);
}

/// `tests/scenarios/truth_covariate.toml`, seed 119: kriging the night cold
/// hours directly with their own variogram (a Gaussian REML fit without
/// nugget) beat the per-step maps at the left-out loggers (1.65 h against
/// 2.44 h) but mapped 40 of the 150 pots below zero hours (down to -15.7 h,
/// RMSE 14.6 h at the pots against the simulator's truth). A map that gives
/// an impossible value is not used: the per-step route maps the indicator,
/// the reason says why, and the map follows the truth (RMSE about 1.4 h).
#[test]
fn a_direct_map_with_negative_hours_is_refused() {
    let d = tempfile::tempdir().unwrap();
    let study = d.path().join("study");
    let sc = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/scenarios/truth_covariate.toml");
    let (ok, _, err) =
        potclim(&["simulate", sc.to_str().unwrap(), "--out", study.to_str().unwrap(), "--seed", "119"]);
    assert!(ok, "{err}");
    let s = study.join("study.toml");
    let (ok, _, err) = potclim(&["ingest", s.to_str().unwrap()]);
    assert!(ok, "ingest: {err}");
    let (ok, out, err) = potclim(&["map", s.to_str().unwrap()]);
    assert!(ok, "map: {err}");
    assert!(out.contains("gave 40 of 150 pots a negative value"), "{out}");
    let cv = table(&study.join("output/mapping_cv.csv"));
    let route = |r: &str| cv.iter().find(|c| c["variable"] == "night_cold_hours" && c["route"] == r).unwrap();
    assert_eq!(route("per_step_pooled")["chosen"], "true");
    assert_eq!(route("indicator_variogram")["chosen"], "false");
    assert!(route("per_step_pooled")["reason"].contains("cannot take"));
    let cov = table(&study.join("output/pot_covariates.csv"));
    let truth: HashMap<String, f64> = table(&study.join("truth/pots.csv"))
        .into_iter()
        .map(|r| (r["pot"].clone(), r["night_cold_hours"].parse().unwrap()))
        .collect();
    let mapped: Vec<(f64, f64)> =
        cov.iter().map(|r| (r["night_cold_hours"].parse::<f64>().unwrap(), truth[&r["pot"]])).collect();
    assert!(mapped.iter().all(|(m, _)| *m >= 0.0));
    let rmse = (mapped.iter().map(|(m, t)| (m - t).powi(2)).sum::<f64>() / mapped.len() as f64).sqrt();
    assert!(rmse < 3.0, "RMSE {rmse} h");
}
