//! Pots that move through the binary: `potclim simulate` generates
//! tests/scenarios/rotating_carts.toml (150 pots shifted 37 places every
//! third day past a draughty door; night-cold effect -0.025 g per hour) with
//! its move table, `potclim run` analyses it with each pot's exposure along
//! its path, and a copy of the study that knows only each pot's final
//! position (no move table) is analysed for comparison, and one that knows
//! only each pot's starting position, whose drivers are those the moving
//! run reports as "without moves"; and over a residual field fixed in
//! space, the residual correlation along the paths is fitted.

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

/// Numbers of column `name`, keyed by the first column.
fn numbers(path: &Path, name: &str) -> HashMap<String, f64> {
    column(path, name).into_iter().map(|(k, v)| (k, v.parse().unwrap())).collect()
}

/// Sample SD (divisor n - 1), written out here apart from potclim's.
fn sd(v: &[f64]) -> f64 {
    let m = v.iter().sum::<f64>() / v.len() as f64;
    (v.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (v.len() - 1) as f64).sqrt()
}

/// Did the moves even the drivers out? `pot_paths_exposure.csv` holds each
/// pot's driver along its path (as `pot_covariates.csv`) and without moves,
/// which must be what a run of the same study without the move table (every
/// pot at its `[pots]` position) maps; `paths_spread.csv` holds their SDs.
/// The shift of 37 places every third day sends each pot past the door and
/// away from it: the spread of night cold hours across pots falls to about
/// a third (seed 3: SD 22.4 h against 75.4 h, ratio 0.297; distance to the
/// door 0.975 m against 2.574 m, ratio 0.379).
fn evened_against_the_unmoved_study(study: &Path, start: &Path) {
    let exposure = study.join("output/pot_paths_exposure.csv");
    let covariates = study.join("output/pot_covariates.csv");
    let unmoved_covariates = start.join("output/pot_covariates.csv");
    assert_eq!(column(&exposure, "positions").values().filter(|v| *v != "5").count(), 0);
    assert_eq!(column(&exposure, "moves").values().filter(|v| *v != "4").count(), 0);
    let spread = study.join("output/paths_spread.csv");
    for driver in ["night_cold_hours", "distance_door"] {
        let path = column(&exposure, driver);
        assert_eq!(path, column(&covariates, driver), "{driver}: along the path as pot_covariates.csv");
        let unmoved = numbers(&exposure, &format!("{driver}_unmoved"));
        let alone = numbers(&unmoved_covariates, driver);
        assert_eq!(unmoved.len(), 150);
        for (pot, v) in &unmoved {
            assert!(
                (v - alone[pot]).abs() <= 1e-9 * v.abs().max(1.0),
                "{driver} {pot}: {v} against {}",
                alone[pot]
            );
        }
        let path: Vec<f64> = path.values().map(|v| v.parse().unwrap()).collect();
        let unmoved: Vec<f64> = unmoved.values().copied().collect();
        let (sd_path, sd_unmoved) = (sd(&path), sd(&unmoved));
        let row = |c: &str| numbers(&spread, c)[driver];
        assert!((row("sd_path") - sd_path).abs() < 1e-9 * sd_path, "{driver}");
        assert!((row("sd_unmoved") - sd_unmoved).abs() < 1e-9 * sd_unmoved, "{driver}");
        assert!((row("sd_ratio") - sd_path / sd_unmoved).abs() < 1e-9, "{driver}");
        eprintln!("{driver}: SD {sd_path:.4} along the paths, {sd_unmoved:.4} without moves");
        // the rotation evens the driver out: its spread falls below half
        assert!(
            sd_path < 0.5 * sd_unmoved && row("range_ratio") < 0.5,
            "{driver}: {sd_path} against {sd_unmoved}"
        );
    }
}

/// The spread of the true night cold hours across the pots (SD, divisor
/// n - 1) along their paths (`truth/pots.csv` of the study simulated with
/// its rotation) and without moves: the same scenario and seed simulated
/// without `[rotation]`, whose loggers read the same climate, so its truth is
/// each pot's at its starting position. The simulator's truth, not
/// potclim's mapping.
fn true_spread(scenario: &str, seed: &str, study: &Path) -> (f64, f64) {
    let fixed_toml = study.with_extension("fixed.toml");
    let cut = scenario.rfind("[rotation]").expect("a [rotation] section");
    std::fs::write(&fixed_toml, &scenario[..cut]).unwrap();
    let fixed = study.with_extension("fixed");
    let parent = study.parent().unwrap();
    potclim(
        &["simulate", fixed_toml.to_str().unwrap(), "--out", fixed.to_str().unwrap(), "--seed", seed],
        parent,
    );
    let logs = |d: &Path| std::fs::read(d.join("logs/probes.csv")).unwrap();
    assert!(logs(study) == logs(&fixed), "the loggers must read the same climate with and without the moves");
    let truth = |d: &Path| {
        sd(&numbers(&d.join("truth/pots.csv"), "night_cold_hours").into_values().collect::<Vec<_>>())
    };
    (truth(study), truth(&fixed))
}

/// The measured spread of night cold hours (`paths_spread.csv`) against the
/// simulator's truth: each SD within `tol` (relative), the ratio within
/// `tol` of the true ratio.
fn spread_against_truth(study: &Path, truth: (f64, f64), tol: f64) {
    let spread = study.join("output/paths_spread.csv");
    let row = |c: &str| numbers(&spread, c)["night_cold_hours"];
    let (sd_path, sd_unmoved) = (row("sd_path"), row("sd_unmoved"));
    eprintln!(
        "night_cold_hours: SD {sd_path:.3} h along the paths (true {:.3}), {sd_unmoved:.3} h without moves (true {:.3}); ratio {:.4} (true {:.4})",
        truth.0,
        truth.1,
        sd_path / sd_unmoved,
        truth.0 / truth.1
    );
    assert!((sd_path / truth.0 - 1.0).abs() < tol, "{sd_path} against {}", truth.0);
    assert!((sd_unmoved / truth.1 - 1.0).abs() < tol, "{sd_unmoved} against {}", truth.1);
    assert!((sd_path / sd_unmoved - truth.0 / truth.1).abs() < tol, "{sd_path} / {sd_unmoved}");
}

/// A rotation that takes every pot through every lane evens the driver out:
/// rotating_carts on 13 columns of 10 pots (130 pots), every pot advanced one
/// place along the bench every day, so that in its 13-day window it stands
/// one day in each column (moving from the door to the far end and back
/// round). Seed 3: the SD of night cold hours across the pots falls from
/// 76.2 h without moves to 9.31 h along the paths (ratio 0.122; the
/// simulator's truth 76.5 and 9.83 h, ratio 0.128), that of the distance to
/// the door from 2.23 m to 0.063 m (ratio 0.028).
#[test]
fn a_rotation_through_every_lane_evens_the_spread() {
    let dir = tempfile::tempdir().unwrap();
    let scenario = std::fs::read_to_string(
        Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/scenarios/rotating_carts.toml"),
    )
    .unwrap();
    let mut lanes = scenario.clone();
    for (from, to) in [
        ("nx = 15\n", "nx = 13\n"),
        ("replicates = 15\n", "replicates = 13\n"),
        ("every_days = 3\n", "every_days = 1\n"),
        ("step = 37\n", "step = 1\n"),
    ] {
        assert_eq!(lanes.matches(from).count(), 1, "{from}");
        lanes = lanes.replace(from, to);
    }
    std::fs::write(dir.path().join("lanes.toml"), &lanes).unwrap();
    potclim(&["simulate", "lanes.toml", "--out", "study", "--seed", "3"], dir.path());
    let study = dir.path().join("study");
    potclim(&["ingest", "study.toml"], &study);
    let said = potclim(&["map", "study.toml"], &study);
    assert!(said.contains("night_cold_hours: SD across pots "), "{said}");
    let exposure = study.join("output/pot_paths_exposure.csv");
    assert_eq!(column(&exposure, "positions").len(), 130);
    assert_eq!(column(&exposure, "positions").values().filter(|v| *v != "13").count(), 0);
    assert_eq!(column(&exposure, "moves").values().filter(|v| *v != "12").count(), 0);
    spread_against_truth(&study, true_spread(&lanes, "3", &study), 0.1);
    let spread = study.join("output/paths_spread.csv");
    let ratio = |d: &str| numbers(&spread, "sd_ratio")[d];
    assert!(ratio("night_cold_hours") < 0.2, "{}", ratio("night_cold_hours"));
    assert!(ratio("distance_door") < 0.05, "{}", ratio("distance_door"));
    // Every pot's time shares are a cyclic window of 13 of the 130 places, so
    // the rows of W are linearly dependent and W R W' is singular without a
    // nugget: the verdict fits correlated errors with a nugget only, and says so.
    let said = potclim(&["verdict", "study.toml"], &study);
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(study.join("output/summary.json")).unwrap()).unwrap();
    let notes = summary.to_string();
    assert!(notes.contains("not fitted without a nugget, the pots move"), "{said}");
    let comparison = std::fs::read_to_string(study.join("output/comparison.csv")).unwrap();
    assert!(
        comparison.contains("| exponential+nugget,") && !comparison.contains("| exponential,"),
        "{comparison}"
    );
}

/// The report's section "Where the pots stood": the time-share map, the
/// exposure map, the sentence and table on the spread, the count of moves;
/// redrawn from `report_data.json` by `potclim report`; absent (section,
/// navigation and data key) without a move table.
fn where_the_pots_stood(study: &Path, without: &Path) {
    let html = std::fs::read_to_string(study.join("output/report.html")).unwrap();
    let start = html.find("<section id=\"moves\">").expect("the moves section");
    let section = &html[start..start + html[start..].find("</section>").unwrap()];
    for want in [
        "<h2>Where the pots stood</h2>",
        "150 of 150 pots changed position during their growth windows, 600 moves in all, over 150 positions",
        "id=\"fig-moves-time\"",
        "id=\"fig-moves-exposure-night-cold-hours\"",
        "drawn at its starting position",
        "The moves narrowed the spread of <code>night_cold_hours</code> across pots from 75.7 to 23.0 h",
        "<td>distance_door (m)</td>",
    ] {
        assert!(section.contains(want), "{want}\n{section}");
    }
    assert!(html.contains("href=\"#moves\""));
    let data = std::fs::read_to_string(study.join("output/report_data.json")).unwrap();
    assert!(data.contains("\"moves\": {"));
    std::fs::remove_file(study.join("output/report.html")).unwrap();
    potclim(&["report", "study.toml"], study);
    assert_eq!(std::fs::read_to_string(study.join("output/report.html")).unwrap(), html);
    let html = std::fs::read_to_string(without.join("output/report.html")).unwrap();
    assert!(!html.contains("id=\"moves\"") && !html.contains("href=\"#moves\""));
    let data = std::fs::read_to_string(without.join("output/report_data.json")).unwrap();
    assert!(!data.contains("\"moves\""));
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

    // A copy that knows only where each pot started (its `[pots]` position,
    // no move table): its drivers are those each pot would have had without
    // moves.
    let start_dir = dir.path().join("start");
    copy_without_moves(&study, &start_dir);

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
    assert!(said.contains("night_cold_hours: SD across pots "), "{said}");
    let said = potclim(&["run", "study.toml"], &final_dir);
    assert!(!said.contains("pots moved"), "{said}");
    potclim(&["run", "study.toml"], &start_dir);
    evened_against_the_unmoved_study(&study, &start_dir);
    spread_against_truth(
        &study,
        true_spread(&std::fs::read_to_string(&scenario).unwrap(), "3", &study),
        0.05,
    );
    assert!(!final_dir.join("output/paths_spread.csv").exists());
    where_the_pots_stood(&study, &final_dir);
    assert!(!final_dir.join("output/pot_paths_exposure.csv").exists());

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
