//! Pots that move through the binary: `potclim simulate` generates
//! tests/scenarios/rotating_carts.toml (150 pots shifted 37 places every
//! third day past a draughty door; night-cold effect -0.025 g per hour) with
//! its move table, `potclim run` analyses it with each pot's exposure along
//! its path, and a copy of the study that knows only each pot's final
//! position (no move table) is analysed for comparison; and over a residual
//! field fixed in space, the residual correlation along the paths is fitted.

use std::collections::HashMap;
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

/// Column `name` of a CSV file, keyed by its first column.
fn column(path: &Path, name: &str) -> HashMap<String, String> {
    let mut r = csv::Reader::from_path(path).unwrap();
    let j = r.headers().unwrap().iter().position(|h| h == name).unwrap_or_else(|| panic!("no {name}"));
    r.records().map(|rec| rec.unwrap()).map(|rec| (rec[0].to_string(), rec[j].to_string())).collect()
}

fn correlation(a: &[f64], b: &[f64]) -> f64 {
    let n = a.len() as f64;
    let (ma, mb) = (a.iter().sum::<f64>() / n, b.iter().sum::<f64>() / n);
    let cov: f64 = a.iter().zip(b).map(|(x, y)| (x - ma) * (y - mb)).sum();
    let va: f64 = a.iter().map(|x| (x - ma).powi(2)).sum();
    let vb: f64 = b.iter().map(|y| (y - mb).powi(2)).sum();
    cov / (va * vb).sqrt()
}

/// The mapped driver of a run against the truth along each pot's path.
fn mapped_vs_truth(study: &Path) -> f64 {
    let truth = column(&study.join("truth/pots.csv"), "night_cold_hours");
    let mapped = column(&study.join("output/pot_covariates.csv"), "night_cold_hours");
    let (mut a, mut b) = (Vec::new(), Vec::new());
    for (pot, t) in &truth {
        a.push(t.parse::<f64>().unwrap());
        b.push(mapped[pot].parse::<f64>().unwrap());
    }
    correlation(&a, &b)
}

/// The night-cold row of drivers.csv: (estimate, ci_low, ci_high).
fn driver_effect(study: &Path) -> (f64, f64, f64) {
    let p = study.join("output/drivers.csv");
    let get = |c: &str| column(&p, c)["night_cold_hours"].parse::<f64>().unwrap();
    (get("estimate"), get("ci_low"), get("ci_high"))
}

/// A copy of the study folder `from` (one level of subfolders) whose study
/// file has no move table: the pots stay at their pot-table positions.
fn copy_without_moves(from: &Path, to_dir: &Path) {
    std::fs::create_dir(to_dir).unwrap();
    for entry in std::fs::read_dir(from).unwrap() {
        let e = entry.unwrap();
        let to = to_dir.join(e.file_name());
        if e.file_type().unwrap().is_dir() {
            std::fs::create_dir(&to).unwrap();
            for f in std::fs::read_dir(e.path()).unwrap() {
                let f = f.unwrap();
                std::fs::copy(f.path(), to.join(f.file_name())).unwrap();
            }
        } else {
            std::fs::copy(e.path(), &to).unwrap();
        }
    }
    let toml = std::fs::read_to_string(from.join("study.toml")).unwrap();
    assert!(toml.contains("moves = \"moves.csv\"\n"));
    std::fs::write(to_dir.join("study.toml"), toml.replace("moves = \"moves.csv\"\n", "")).unwrap();
}

/// `comparison.csv`'s log-likelihood of `model`.
fn loglik(output: &Path, model: &str) -> f64 {
    column(&output.join("comparison.csv"), "loglik")[model].parse().unwrap()
}

#[test]
fn path_exposure_finds_the_draught_effect_of_pots_that_move() {
    let dir = tempfile::tempdir().unwrap();
    let scenario = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/scenarios/rotating_carts.toml");
    potclim(&["simulate", scenario.to_str().unwrap(), "--out", "study", "--seed", "3"], dir.path());
    let study = dir.path().join("study");
    let toml = std::fs::read_to_string(study.join("study.toml")).unwrap();
    assert!(toml.contains("moves = \"moves.csv\""), "{toml}");
    // four moves of every pot (days 3, 6, 9, 12 of the 14-day study)
    let moves = std::fs::read_to_string(study.join("moves.csv")).unwrap();
    assert_eq!(moves.lines().count(), 1 + 4 * 150, "{moves}");
    assert!(moves.starts_with("pot,since,x,y\n"));

    // A copy that knows only where each pot ended: its last row's position.
    let last: HashMap<String, (String, String)> = {
        let mut r = csv::Reader::from_path(study.join("moves.csv")).unwrap();
        r.records()
            .map(|rec| rec.unwrap())
            .map(|rec| (rec[0].to_string(), (rec[2].to_string(), rec[3].to_string())))
            .collect()
    };
    let final_dir = dir.path().join("final");
    copy_without_moves(&study, &final_dir);
    let pots = std::fs::read_to_string(study.join("pots.csv")).unwrap();
    let mut out = String::new();
    for (k, line) in pots.lines().enumerate() {
        let mut cells: Vec<String> = line.split(',').map(str::to_string).collect();
        if k > 0 {
            let (x, y) = last[&cells[0]].clone();
            cells[1] = x;
            cells[2] = y;
        }
        out.push_str(&cells.join(","));
        out.push('\n');
    }
    assert!(pots.starts_with("pot,x,y,"), "{pots}");
    std::fs::write(final_dir.join("pots.csv"), out).unwrap();

    let said = potclim(&["run", "study.toml"], &study);
    assert!(said.contains("150 of 150 pots moved, 150 positions mapped; 0 time(s)"), "{said}");
    let said = potclim(&["run", "study.toml"], &final_dir);
    assert!(!said.contains("pots moved"), "{said}");

    // pot_paths.csv: five places per pot in its 13-day window (moves on
    // days 3, 6, 9 and 12), three days at each of the first four and one
    // at the last
    let mut shares: HashMap<String, Vec<f64>> = HashMap::new();
    let mut r = csv::Reader::from_path(study.join("output/pot_paths.csv")).unwrap();
    assert_eq!(r.headers().unwrap().iter().collect::<Vec<_>>(), ["pot", "position", "x", "y", "time_share"]);
    for rec in r.records() {
        let rec = rec.unwrap();
        shares.entry(rec[0].to_string()).or_default().push(rec[4].parse().unwrap());
    }
    assert_eq!(shares.len(), 150);
    for (pot, w) in &shares {
        assert_eq!(w.len(), 5, "{pot}: {w:?}");
        assert!((w.iter().sum::<f64>() - 1.0).abs() < 1e-12, "{pot}: {w:?}");
        assert!((w[0] - 3.0 / 13.0).abs() < 1e-12 && (w[4] - 1.0 / 13.0).abs() < 1e-12, "{pot}: {w:?}");
    }
    assert!(!final_dir.join("output/pot_paths.csv").exists());

    let r_path = mapped_vs_truth(&study);
    let r_final = mapped_vs_truth(&final_dir);
    let (est, lo, hi) = driver_effect(&study);
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(study.join("output/summary.json")).unwrap()).unwrap();
    let verdict = summary["verdict"].as_str().unwrap().to_string();
    let final_summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(final_dir.join("output/summary.json")).unwrap())
            .unwrap();
    eprintln!(
        "path: r = {r_path:.3}, verdict {verdict}, estimate {est:.4} [{lo:.4}, {hi:.4}]; final positions: r = {r_final:.3}, verdict {}",
        final_summary["verdict"]
    );
    // the path exposure follows the truth along the path; the final
    // position alone does much worse
    assert!(r_path > 0.9, "path exposure against truth: r = {r_path}");
    assert!(r_final < r_path - 0.1, "final positions r = {r_final}, path r = {r_path}");
    // the verdict finds the driver and its CI covers the true -0.025 g per hour
    assert!(verdict == "covariate" || verdict == "both", "{verdict}: {}", summary["reason"]);
    assert!(lo <= -0.025 && -0.025 <= hi, "estimate {est} [{lo}, {hi}]");
}

/// `potclim check` reads the move table: a row naming a pot the pot table
/// does not have is refused with the file, line, column, value and a hint.
#[test]
fn check_refuses_a_bad_move_table_with_its_line() {
    let dir = tempfile::tempdir().unwrap();
    let scenario = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/scenarios/rotating_carts.toml");
    potclim(&["simulate", scenario.to_str().unwrap(), "--out", "study", "--seed", "1"], dir.path());
    let study = dir.path().join("study");
    let moves = std::fs::read_to_string(study.join("moves.csv")).unwrap();
    potclim(&["check", "study.toml"], &study);
    let mut lines: Vec<String> = moves.lines().map(str::to_string).collect();
    lines[5] = lines[5].replacen('P', "Q", 1);
    let bad_id = lines[5].split(',').next().unwrap().to_string();
    std::fs::write(study.join("moves.csv"), lines.join("\n") + "\n").unwrap();
    let out = Command::new(env!("CARGO_BIN_EXE_potclim"))
        .args(["check", "study.toml"])
        .current_dir(&study)
        .output()
        .unwrap();
    assert!(!out.status.success());
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("moves.csv:6")
            && err.contains("column `pot`")
            && err.contains(&bad_id)
            && err.contains("hint"),
        "{err}"
    );
}

/// A residual field fixed in space and pots that move (seed 3 of
/// tests/scenarios/rotating_carts_field.toml, no effect of night cold): the
/// residual correlation along the paths (`W R W'`) fits better than the same
/// family at the pots' first positions (a copy of the study without its
/// move table), and the verdict says `correlation`. The standalone `potclim verdict`, which reads
/// the paths back from pot_paths.csv, gives the run's log-likelihoods.
#[test]
fn residual_correlation_along_the_paths() {
    let dir = tempfile::tempdir().unwrap();
    let scenario = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/scenarios/rotating_carts_field.toml");
    potclim(&["simulate", scenario.to_str().unwrap(), "--out", "study", "--seed", "3"], dir.path());
    let study = dir.path().join("study");
    let still = dir.path().join("still");
    copy_without_moves(&study, &still);
    potclim(&["run", "study.toml"], &study);
    potclim(&["run", "study.toml"], &still);
    let model = "base | exponential+nugget";
    let (along, at_start) = (loglik(&study.join("output"), model), loglik(&still.join("output"), model));
    let verdict = |d: &Path| -> String {
        let s: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(d.join("output/summary.json")).unwrap()).unwrap();
        s["verdict"].as_str().unwrap().to_string()
    };
    eprintln!(
        "{model}: along the paths {along:.3}, at the first positions {at_start:.3}; verdicts {} and {}",
        verdict(&study),
        verdict(&still)
    );
    assert!(along > at_start + 3.0, "along the paths {along}, at the first positions {at_start}");
    assert_eq!(verdict(&study), "correlation");
    // the standalone verdict reads pot_paths.csv: the same fits
    let before = std::fs::read_to_string(study.join("output/comparison.csv")).unwrap();
    potclim(&["verdict", "study.toml"], &study);
    let after = loglik(&study.join("output"), model);
    assert!((after - along).abs() < 1e-9 * along.abs(), "{after} vs {along}\n{before}");
}

/// Repeated scorings of pots that move: tests/scenarios/scores_cold_spell.toml
/// (96 pots, weekly heights through a week of cold nights, daily-rate effect
/// -0.05 cm per night-cold hour) with every pot shifted 13 places every
/// second day. The simulator grows each pot on the driver along its path;
/// each interval's drivers and residual correlation follow the paths over
/// that interval. Seed 3: the cold intervals name the driver and the combined
/// effect's interval covers the truth.
#[test]
fn repeated_scorings_of_pots_that_move() {
    let dir = tempfile::tempdir().unwrap();
    let base = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/scenarios/scores_cold_spell.toml");
    let text = std::fs::read_to_string(base).unwrap()
        + "\n[rotation]\nscheme = \"shift\"\nevery_days = 2\nstep = 13\n";
    std::fs::write(dir.path().join("rotating.toml"), text).unwrap();
    potclim(&["simulate", "rotating.toml", "--out", "study", "--seed", "3"], dir.path());
    let study = dir.path().join("study");
    let said = potclim(&["run", "study.toml"], &study);
    assert!(said.contains("96 of 96 pots moved"), "{said}");
    let out = study.join("output");
    let verdicts = column(&out.join("scores_intervals.csv"), "verdict");
    let mut r = csv::Reader::from_path(out.join("scores_intervals.csv")).unwrap();
    let by_interval: Vec<(String, String)> =
        r.records().map(|x| x.unwrap()).map(|x| (x[1].to_string(), x[6].to_string())).collect();
    assert_eq!(verdicts.len(), 1, "one trait");
    assert_eq!(
        by_interval,
        [("1", "none"), ("2", "covariate"), ("3", "covariate"), ("4", "none")]
            .map(|(a, b)| (a.to_string(), b.to_string()))
    );
    let combined = |c: &str| column(&out.join("scores_combined.csv"), c)["height_cm"].parse::<f64>().unwrap();
    let (est, lo, hi) = (combined("estimate"), combined("ci_low"), combined("ci_high"));
    assert!(lo <= -0.05 && -0.05 <= hi, "combined {est} [{lo}, {hi}]");
}
