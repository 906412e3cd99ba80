//! The mapping study (slow, ignored): for seeds 1..=N of two scenarios,
//! `potclim simulate` writes a study with known truth, `potclim ingest` and
//! `potclim map` map the night cold hours onto the pots, and the map is
//! compared with the simulator's true per-pot values (`truth/pots.csv`):
//! RMSE, the error of the 20 pots nearest the door, and the mean squared
//! standardised error (MSSE) of the mapped values with their SEs.
//!
//! ```sh
//! cargo test --test map_study -- --ignored --nocapture                            # seeds 1..=10
//! POTCLIM_MAP_SEEDS=40 cargo test --test map_study -- --ignored --nocapture       # seeds 1..=40
//! ```
//!
//! `POTCLIM_MAP_FIRST_SEED=41` starts at seed 41 (fresh seeds for a rule
//! chosen on the first forty), `POTCLIM_MAP_SCENARIOS=truth` or `sharp`
//! runs one scenario, and `POTCLIM_MAP_DUMP=DIR` writes each run's pots
//! (true and mapped value, SE, distance to the door) to
//! `DIR/<scenario>_<seed>.csv` for `tests/scenarios/map_msse_spread.py`.
//!
//! Scenarios: `tests/scenarios/truth_covariate.toml` (the truth study's
//! climate and loggers; the mapped driver is the same under all four truths)
//! and `tests/scenarios/sharp_draught.toml` (a narrow draught seen by one
//! logger). One run takes about 1-3 s in the dev build. The results are in
//! docs/spatial.md.

use std::collections::HashMap;
use std::path::Path;
use std::process::Command;

fn potclim(args: &[&str]) {
    let out = Command::new(env!("CARGO_BIN_EXE_potclim")).args(args).output().unwrap();
    assert!(
        out.status.success(),
        "potclim {} failed:\n{}",
        args.join(" "),
        String::from_utf8_lossy(&out.stderr)
    );
}

/// Columns `cols` of a CSV file with a `pot` column, by pot id.
fn columns(path: &Path, cols: &[&str]) -> HashMap<String, Vec<f64>> {
    let mut r = csv::Reader::from_path(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    let h = r.headers().unwrap().clone();
    let at = |c: &str| h.iter().position(|x| x == c).unwrap_or_else(|| panic!("{}: no {c}", path.display()));
    let pot = at("pot");
    let idx: Vec<usize> = cols.iter().map(|c| at(c)).collect();
    r.records()
        .map(|rec| {
            let rec = rec.unwrap();
            (rec[pot].to_string(), idx.iter().map(|&i| rec[i].parse::<f64>().unwrap()).collect())
        })
        .collect()
}

/// One seed's map against the truth.
struct MapOutcome {
    seed: u64,
    rmse: f64,
    /// Sum of absolute errors over the sum of true values, 20 pots nearest the door.
    door20: f64,
    msse: f64,
    true_sd: f64,
    /// The indicator's route (`mapping_cv.csv`): whether the direct route
    /// (its own variogram) was chosen, and the left-out RMSE of both routes
    /// at the loggers `(per-step, direct)`.
    direct_chosen: bool,
    route_rmse: (f64, f64),
    /// Each pot's standardised error and distance to the door.
    z_by_distance: Vec<(f64, f64)>,
}

/// The two route rows of `night_cold_hours` in `mapping_cv.csv`.
fn route(path: &Path) -> (bool, (f64, f64)) {
    let mut r = csv::Reader::from_path(path).unwrap();
    let h = r.headers().unwrap().clone();
    let at = |c: &str| h.iter().position(|x| x == c).unwrap();
    let (mut chosen, mut rm) = (false, (f64::NAN, f64::NAN));
    for rec in r.records() {
        let rec = rec.unwrap();
        if &rec[at("variable")] != "night_cold_hours" {
            continue;
        }
        let rmse: f64 = rec[at("rmse")].parse().unwrap();
        match &rec[at("route")] {
            "per_step_pooled" => rm.0 = rmse,
            "indicator_variogram" => {
                rm.1 = rmse;
                chosen = &rec[at("chosen")] == "true";
            }
            _ => {}
        }
    }
    (chosen, rm)
}

fn run_one(scenario: &str, seed: u64) -> MapOutcome {
    let dir = tempfile::tempdir().unwrap();
    let study = dir.path().join("study");
    let sc = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/scenarios").join(scenario);
    potclim(&[
        "simulate",
        sc.to_str().unwrap(),
        "--out",
        study.to_str().unwrap(),
        "--seed",
        &seed.to_string(),
    ]);
    let toml = study.join("study.toml");
    potclim(&["ingest", toml.to_str().unwrap()]);
    potclim(&["map", toml.to_str().unwrap()]);
    let truth = columns(&study.join("truth/pots.csv"), &["night_cold_hours", "distance_door"]);
    let map = columns(&study.join("output/pot_covariates.csv"), &["night_cold_hours", "night_cold_hours_se"]);
    assert_eq!(truth.len(), map.len(), "every pot is mapped");
    let n = truth.len() as f64;
    let (mut sse, mut z2) = (0.0, 0.0);
    let mut z_by_distance = Vec::new();
    for (p, t) in &truth {
        let e = map[p][0] - t[0];
        sse += e * e;
        let se = map[p][1];
        let z = if e == 0.0 { 0.0 } else { e / se };
        z2 += z * z;
        z_by_distance.push((z, t[1]));
    }
    let mut pots: Vec<&String> = truth.keys().collect();
    pots.sort_by(|a, b| truth[*a][1].total_cmp(&truth[*b][1]).then(a.cmp(b)));
    let near = &pots[..20];
    let door20 = near.iter().map(|p| (map[*p][0] - truth[*p][0]).abs()).sum::<f64>()
        / near.iter().map(|p| truth[*p][0]).sum::<f64>();
    let mean = truth.values().map(|t| t[0]).sum::<f64>() / n;
    let true_sd = (truth.values().map(|t| (t[0] - mean).powi(2)).sum::<f64>() / n).sqrt();
    let (direct_chosen, route_rmse) = route(&study.join("output/mapping_cv.csv"));
    if let Ok(dump) = std::env::var("POTCLIM_MAP_DUMP") {
        // one file per run: each pot's true and mapped value, SE and distance to the door
        std::fs::create_dir_all(&dump).unwrap();
        let name = format!("{}_{seed}.csv", scenario.trim_end_matches(".toml"));
        let mut w = csv::Writer::from_path(Path::new(&dump).join(name)).unwrap();
        w.write_record(["pot", "truth", "mapped", "se", "distance_door"]).unwrap();
        for p in &pots {
            let (t, m) = (&truth[*p], &map[*p]);
            w.write_record([
                p.to_string(),
                t[0].to_string(),
                m[0].to_string(),
                m[1].to_string(),
                t[1].to_string(),
            ])
            .unwrap();
        }
        w.flush().unwrap();
    }
    MapOutcome {
        seed,
        rmse: (sse / n).sqrt(),
        door20,
        msse: z2 / n,
        true_sd,
        direct_chosen,
        route_rmse,
        z_by_distance,
    }
}

/// Seeds 1..=N of both scenarios; prints one line per run and a summary per
/// scenario. Asserts the levels recorded in docs/spatial.md as a guard
/// against regressions, loose enough for a fresh set of 40 seeds: at least
/// 65 % of the seeds with MSSE within 0.5-2 (over seeds 1-240 the rates are
/// 78 % on `truth_covariate.toml` and 90 % on `sharp_draught.toml`; the
/// issue's target is 90 % on both), at most 2.5 % above 3 (1 of 40), every
/// map finite.
#[test]
#[ignore]
fn map_study() {
    let n: u64 = std::env::var("POTCLIM_MAP_SEEDS").ok().and_then(|s| s.parse().ok()).unwrap_or(10);
    let first: u64 = std::env::var("POTCLIM_MAP_FIRST_SEED").ok().and_then(|s| s.parse().ok()).unwrap_or(1);
    let only = std::env::var("POTCLIM_MAP_SCENARIOS").ok();
    for scenario in ["truth_covariate.toml", "sharp_draught.toml"] {
        if only.as_deref().is_some_and(|o| !o.split(',').any(|x| scenario.starts_with(x.trim()))) {
            continue;
        }
        let runs: Vec<MapOutcome> = (first..first + n).map(|s| run_one(scenario, s)).collect();
        for o in &runs {
            println!(
                "{scenario} seed {:>3}: RMSE {:.2} h (true SD {:.1} h), door-20 error {:.1} %, MSSE {:.3}; left-out RMSE per-step {:.2} h, own variogram {:.2} h{}",
                o.seed,
                o.rmse,
                o.true_sd,
                100.0 * o.door20,
                o.msse,
                o.route_rmse.0,
                o.route_rmse.1,
                if o.direct_chosen { " (own variogram chosen)" } else { "" }
            );
        }
        let mut m: Vec<f64> = runs.iter().map(|o| o.msse).collect();
        m.sort_by(f64::total_cmp);
        let within = m.iter().filter(|v| (0.5..=2.0).contains(*v)).count();
        let p = within as f64 / n as f64;
        println!(
            "{scenario}: MSSE within 0.5-2 in {within}/{n} (binomial SE {:.1}), below {}, above {}; median {:.3}, range {:.3}-{:.3}; mean RMSE {:.2} h; mean door-20 error {:.1} %",
            (n as f64 * p * (1.0 - p)).sqrt(),
            m.iter().filter(|v| **v < 0.5).count(),
            m.iter().filter(|v| **v > 2.0).count(),
            m[m.len() / 2],
            m[0],
            m[m.len() - 1],
            runs.iter().map(|o| o.rmse).sum::<f64>() / n as f64,
            100.0 * runs.iter().map(|o| o.door20).sum::<f64>() / n as f64
        );
        // Calibration pooled over pot-seeds, by distance to the door: the
        // mean z² (1 when the SEs are right) and the share of |z| <= 1.96.
        let mut classes = String::new();
        for (lo, hi) in [(0.0, 1.0), (1.0, 2.0), (2.0, 4.0), (4.0, f64::INFINITY), (0.0, f64::INFINITY)] {
            let z: Vec<f64> = runs
                .iter()
                .flat_map(|o| o.z_by_distance.iter())
                .filter(|(_, d)| (lo..hi).contains(d))
                .map(|(z, _)| *z)
                .collect();
            if z.is_empty() {
                continue;
            }
            let k = z.len() as f64;
            classes += &format!(
                "; {lo}-{hi} m: {} pot-seeds, mean z² {:.3}, |z| <= 1.96 in {:.1} %",
                z.len(),
                z.iter().map(|v| v * v).sum::<f64>() / k,
                100.0 * z.iter().filter(|v| v.abs() <= 1.96).count() as f64 / k
            );
        }
        println!("{scenario}: pooled over pot-seeds by distance to the door{classes}");
        let mut own: Vec<f64> = runs.iter().map(|o| o.route_rmse.1).collect();
        own.sort_by(f64::total_cmp);
        println!(
            "{scenario}: the indicator's own variogram chosen in {}/{n}; its left-out RMSE median {:.2} h (per-step route {:.2} h)",
            runs.iter().filter(|o| o.direct_chosen).count(),
            own[own.len() / 2],
            {
                let mut p: Vec<f64> = runs.iter().map(|o| o.route_rmse.0).collect();
                p.sort_by(f64::total_cmp);
                p[p.len() / 2]
            }
        );
        assert!(m.iter().all(|v| v.is_finite()), "{scenario}: {m:?}");
        assert!(20 * within >= 13 * n as usize, "{scenario}: {within}/{n} within 0.5-2");
        let above3 = m.iter().filter(|v| **v > 3.0).count();
        assert!(40 * above3 <= (n as usize).max(40), "{scenario}: {above3} of {n} MSSEs above 3: {m:?}");
    }
}
