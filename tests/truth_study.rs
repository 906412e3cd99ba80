//! The truth study through the real pipeline: for each of the four truths
//! (`tests/scenarios/truth_<truth>.toml`, described in
//! `tests/scenarios/README.md`) and each seed, `potclim simulate` writes a
//! study with known truth (logger exports, pot table, `truth/`), `potclim run`
//! analyses it from the raw exports (ingest, climate indicators per pot
//! window, kriging onto the pots, the comparison grid and the verdict), and the
//! outcome is checked against the truth: the verdict word against the truth's
//! name, the 95 % CI of the driver effect (from `summary.json`) against the
//! true effect per unit (`truth/effects.json`), and the mapped driver
//! (`output/pot_covariates.csv`) against its true per-pot values
//! (`truth/pots.csv`).
//!
//! The fast tests run in CI. The full study is ignored (slow):
//!
//! ```sh
//! cargo test --test truth_study -- --ignored --nocapture                            # seeds 1..=10
//! POTCLIM_TRUTH_SEEDS=40 cargo test --test truth_study -- --ignored --nocapture     # seeds 1..=40
//! ```
//!
//! It prints one line per run and the tables of docs/verdict.md (for seeds
//! 1..=10, the issue's criterion, and for all seeds when there are more).
//! `POTCLIM_TRUTH_ONLY=covariate,both` runs only the named truths.
//! With `POTCLIM_TRUTH_KEEP=DIR` every run is kept in `DIR/<truth>_<pots>_<seed>`,
//! for the checks of `tests/scenarios/findings.py`.
//! `POTCLIM_TRUTH_LIKELIHOOD=neighbours` (or `exact`, `auto`) writes
//! `likelihood = "..."` into the simulated study's `[model]` before the run:
//! the same studies analysed with the nearest-neighbour likelihood, to
//! compare their verdicts with the exact path's.

use std::collections::HashMap;
use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::Instant;

/// The four truths; each is also the verdict word it should produce.
const TRUTHS: [&str; 4] = ["covariate", "correlation", "both", "none"];

/// The hardest case (`truth_hardest.toml`): a smooth unmeasured field, no
/// driver effect; the right verdict is `correlation`.
const HARDEST: &str = "hardest";

/// The verdict word a truth should produce.
fn expected(truth: &str) -> &str {
    if truth == HARDEST { "correlation" } else { truth }
}

/// The driver every scenario declares.
const DRIVER: &str = "night_cold_hours";

/// The scenario file of `truth` at `pots` pots (150, or 480 for the
/// `_480` files of the same area).
fn scenario_at(truth: &str, pots: usize) -> PathBuf {
    let name = if pots == 480 { format!("truth_{truth}_480.toml") } else { format!("truth_{truth}.toml") };
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/scenarios").join(name)
}

fn scenario(truth: &str) -> PathBuf {
    scenario_at(truth, 150)
}

/// Run the binary; panic with its output when it fails.
fn potclim(args: &[&str]) {
    let out = Command::new(env!("CARGO_BIN_EXE_potclim")).args(args).output().unwrap();
    assert!(
        out.status.success(),
        "potclim {} failed:\n{}\n{}",
        args.join(" "),
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
}

fn read_json(path: &Path) -> serde_json::Value {
    let text = std::fs::read_to_string(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    serde_json::from_str(&text).unwrap_or_else(|e| panic!("{}: {e}", path.display()))
}

/// Column `column` of a CSV file with a `pot` column, by pot id.
fn pot_column(path: &Path, column: &str) -> HashMap<String, f64> {
    let mut r = csv::Reader::from_path(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    let headers = r.headers().unwrap().clone();
    let pot = headers.iter().position(|h| h == "pot").expect("a pot column");
    let col = headers
        .iter()
        .position(|h| h == column)
        .unwrap_or_else(|| panic!("{} has no column {column}", path.display()));
    r.records()
        .map(|rec| {
            let rec = rec.unwrap();
            let v: f64 =
                rec[col].parse().unwrap_or_else(|e| panic!("{}: {e}: {:?}", path.display(), &rec[col]));
            (rec[pot].to_string(), v)
        })
        .collect()
}

/// What one simulated study gave, and its truth.
#[derive(Debug)]
struct Outcome {
    truth: &'static str,
    seed: u64,
    verdict: String,
    best_model: String,
    /// The chosen model contains the driver.
    driver_chosen: bool,
    /// True effect per unit (`truth/effects.json`).
    true_effect: f64,
    estimate: f64,
    se: f64,
    ci_low: f64,
    ci_high: f64,
    /// The small-sample (Kenward–Roger) 95 % CI, when the chosen model has the driver.
    ci_small: Option<(f64, f64)>,
    /// Drivers the calibration set aside.
    set_aside: Vec<String>,
    /// Bootstrap p-value of the decisive likelihood-ratio test, when run.
    bootstrap_p: Option<f64>,
    /// Smooth share of the driver (docs/verdict.md).
    smooth_share: Option<f64>,
    se_with_mapping: Option<f64>,
    /// The effect pooled over the imputations of the mapped driver (Rubin's
    /// rules) and its 95 % interval, when computed.
    pooled: Option<(f64, f64, f64)>,
    /// Pearson correlation and RMSE of the mapped driver against its true per-pot values.
    map_r: f64,
    map_rmse: f64,
    map_msse: f64,
    /// Standard deviation of the true driver over the pots.
    true_sd: f64,
    seconds: f64,
}

impl Outcome {
    fn right(&self) -> bool {
        self.verdict == expected(self.truth)
    }

    /// The right verdict, and the chosen model has the driver exactly when the
    /// truth has a driver effect (not, say, the door distance in its place).
    fn right_with_driver(&self) -> bool {
        self.right() && self.driver_chosen == (self.true_effect != 0.0)
    }

    fn covers(&self) -> bool {
        self.ci_low <= self.true_effect && self.true_effect <= self.ci_high
    }

    /// Whether the calibrated CI (small-sample when the chosen model has the
    /// driver, else the plug-in entry) covers the true effect.
    fn covers_calibrated(&self) -> bool {
        match self.ci_small {
            Some((lo, hi)) => lo <= self.true_effect && self.true_effect <= hi,
            None => self.covers(),
        }
    }

    /// Whether the interval of the pooled effect (imputations of the mapped
    /// driver given the loggers and the trait, Rubin's rules, t on Rubin's
    /// degrees of freedom) covers the true effect.
    fn covers_with_mapping(&self) -> Option<bool> {
        let (_, lo, hi) = self.pooled?;
        Some((lo..=hi).contains(&self.true_effect))
    }
}

/// Simulate `truth` with `seed` into a temporary folder, run the whole
/// pipeline on it, and read the outcome.
fn run_one(truth: &'static str, seed: u64) -> Outcome {
    run_one_at(truth, seed, 150)
}

/// [`run_one`] at `pots` pots.
fn run_one_at(truth: &'static str, seed: u64, pots: usize) -> Outcome {
    let dir = tempfile::tempdir().unwrap();
    // POTCLIM_TRUTH_KEEP=DIR keeps every run in DIR/<truth>_<pots>_<seed> (for
    // tests/scenarios/findings.py and calibration_runs.py); otherwise the run lives in a temporary folder.
    let study_dir = match std::env::var_os("POTCLIM_TRUTH_KEEP") {
        Some(keep) => {
            let d = PathBuf::from(keep).join(format!("{truth}_{pots}_{seed}"));
            if d.exists() {
                std::fs::remove_dir_all(&d).unwrap();
            }
            d
        }
        None => dir.path().join("study"),
    };
    let started = Instant::now();
    let sc = scenario_at(truth, pots);
    potclim(&[
        "simulate",
        sc.to_str().unwrap(),
        "--out",
        study_dir.to_str().unwrap(),
        "--seed",
        &seed.to_string(),
    ]);
    if let Ok(likelihood) = std::env::var("POTCLIM_TRUTH_LIKELIHOOD") {
        let path = study_dir.join("study.toml");
        let text = std::fs::read_to_string(&path).unwrap();
        assert_eq!(text.matches("\n[model]\n").count(), 1, "one [model] table in {}", path.display());
        let text = text.replace("\n[model]\n", &format!("\n[model]\nlikelihood = \"{likelihood}\"\n"));
        std::fs::write(&path, text).unwrap();
    }
    potclim(&["run", study_dir.join("study.toml").to_str().unwrap(), "--quiet"]);
    let seconds = started.elapsed().as_secs_f64();

    let summary = read_json(&study_dir.join("output/summary.json"));
    let effects = read_json(&study_dir.join("truth/effects.json"));
    let true_effect = effects["drivers"]
        .as_array()
        .unwrap()
        .iter()
        .find(|d| d["name"] == DRIVER)
        .and_then(|d| d["effect_per_unit"].as_f64())
        .expect("the driver's true effect");
    let best_model = summary["best_model"].as_str().unwrap().to_string();
    let driver_chosen = summary["models"]
        .as_array()
        .unwrap()
        .iter()
        .find(|m| m["name"] == best_model.as_str())
        .expect("the chosen model is in the grid")["drivers"]
        .as_array()
        .unwrap()
        .iter()
        .any(|d| d == DRIVER);
    let d = summary["drivers"].as_array().unwrap().iter().find(|d| d["name"] == DRIVER).expect("driver row");
    let num = |k: &str| d[k].as_f64().unwrap_or_else(|| panic!("drivers[].{k} missing in summary.json"));

    let truth_values = pot_column(&study_dir.join("truth/pots.csv"), DRIVER);
    let mapped = pot_column(&study_dir.join("output/pot_covariates.csv"), DRIVER);
    assert_eq!(truth_values.len(), mapped.len(), "every pot is mapped");
    let pairs: Vec<(f64, f64)> = truth_values.iter().map(|(p, t)| (*t, mapped[p])).collect();
    let n = pairs.len() as f64;
    let (mt, mm) = (pairs.iter().map(|p| p.0).sum::<f64>() / n, pairs.iter().map(|p| p.1).sum::<f64>() / n);
    let stt = pairs.iter().map(|p| (p.0 - mt).powi(2)).sum::<f64>();
    let smm = pairs.iter().map(|p| (p.1 - mm).powi(2)).sum::<f64>();
    let stm = pairs.iter().map(|p| (p.0 - mt) * (p.1 - mm)).sum::<f64>();
    let map_r = stm / (stt * smm).sqrt();
    let map_rmse = (pairs.iter().map(|p| (p.1 - p.0).powi(2)).sum::<f64>() / n).sqrt();
    // Mean squared standardised error of the mapped driver against its truth
    // (near 1 when the mapping SEs are honest; below 1 when they are too wide).
    let se = pot_column(&study_dir.join("output/pot_covariates.csv"), &format!("{DRIVER}_se"));
    let map_msse = truth_values.iter().map(|(p, t)| ((mapped[p] - t) / se[p]).powi(2)).sum::<f64>()
        / truth_values.len() as f64;

    Outcome {
        truth,
        seed,
        verdict: summary["verdict"].as_str().unwrap().to_string(),
        best_model,
        driver_chosen,
        true_effect,
        estimate: num("estimate"),
        se: num("se"),
        ci_low: num("ci_low"),
        ci_high: num("ci_high"),
        ci_small: match (d["ci_low_small_sample"].as_f64(), d["ci_high_small_sample"].as_f64()) {
            (Some(lo), Some(hi)) => Some((lo, hi)),
            _ => None,
        },
        set_aside: summary["calibration"]["set_aside"]
            .as_array()
            .map(|a| a.iter().filter_map(|v| v.as_str().map(String::from)).collect())
            .unwrap_or_default(),
        bootstrap_p: summary["calibration"]["steps"]
            .as_array()
            .and_then(|s| s.iter().rev().find_map(|st| st["bootstrap"]["p_value"].as_f64())),
        smooth_share: d["smooth_share"].as_f64(),
        se_with_mapping: d["se_with_mapping_uncertainty"].as_f64(),
        pooled: match (
            d["estimate_with_mapping_uncertainty"].as_f64(),
            d["ci_low_with_mapping_uncertainty"].as_f64(),
            d["ci_high_with_mapping_uncertainty"].as_f64(),
        ) {
            (Some(e), Some(lo), Some(hi)) => Some((e, lo, hi)),
            _ => None,
        },
        map_r,
        map_rmse,
        map_msse,
        true_sd: (stt / n).sqrt(),
        seconds,
    }
}

fn line(o: &Outcome) -> String {
    format!(
        "{:<11} seed {:>3}: {:<11} {} chosen `{}`; set aside {:?}, bootstrap p {}, smooth share {}; estimate {:.4} [{:.4}, {:.4}] (true {}) covers {}, small-sample {} covers {}; SE {:.4}, with mapping {}, pooled {}; mapped driver r {:.3}, RMSE {:.1} h (true SD {:.1} h), MSSE {:.2}; {:.1} s",
        o.truth,
        o.seed,
        o.verdict,
        if o.right() { "right" } else { "WRONG" },
        o.best_model,
        o.set_aside,
        o.bootstrap_p.map_or("-".to_string(), |p| format!("{p:.3}")),
        o.smooth_share.map_or("-".to_string(), |p| format!("{p:.3}")),
        o.estimate,
        o.ci_low,
        o.ci_high,
        o.true_effect,
        o.covers(),
        o.ci_small.map_or("-".to_string(), |(lo, hi)| format!("[{lo:.4}, {hi:.4}]")),
        o.covers_calibrated(),
        o.se,
        o.se_with_mapping.map_or("-".to_string(), |s| format!("{s:.4}")),
        o.pooled.map_or("-".to_string(), |(e, lo, hi)| format!(
            "{e:.4} [{lo:.4}, {hi:.4}] covers {}",
            o.covers_with_mapping().unwrap_or(false)
        )),
        o.map_r,
        o.map_rmse,
        o.true_sd,
        o.map_msse,
        o.seconds
    )
}

/// Seeds of the fast subset, chosen by a fixed rule: the two lowest seeds for
/// which all four truths were read right in the full study (docs/verdict.md):
/// the right verdict, with `night_cold_hours` in the chosen model exactly when
/// the truth has a driver effect.
/// The other seeds' wrong verdicts are counted in the full study's rates,
/// which this fast subset does not measure; it guards the pipeline against
/// regressions on clear cases. When a change to potclim changes these
/// verdicts, rerun the full study, record it, and choose again by the same
/// rule. Under the current rule (tie margin 4, a distance to an opening
/// entering alone) seed 1 reads `both` as `correlation`, and seed 2 reads
/// `covariate` as `both`, `none` as `correlation` and `both` with the door
/// distance in place of night cold hours.
const CI_SEEDS: [u64; 2] = [3, 4];

/// The fast subset (CI): for every truth and each of [`CI_SEEDS`], the
/// verdict must be right, the mapped driver must match the true one closely
/// (r > 0.98), the chosen model must contain the driver exactly when the truth
/// has a driver effect, and then its 95 % CI and the pooled 95 % interval
/// over the imputations of the mapped driver must cover the true effect.
#[test]
fn truth_verdicts_through_the_pipeline() {
    for truth in TRUTHS {
        for seed in CI_SEEDS {
            let o = run_one(truth, seed);
            println!("{}", line(&o));
            assert!(o.right(), "truth `{truth}`, seed {seed}: verdict `{}` ({})", o.verdict, o.best_model);
            assert!(o.map_r > 0.98, "truth `{truth}`, seed {seed}: mapped driver r = {:.3}", o.map_r);
            assert_eq!(
                o.driver_chosen,
                matches!(truth, "covariate" | "both"),
                "truth `{truth}`, seed {seed}: chosen `{}`",
                o.best_model
            );
            if o.driver_chosen {
                assert!(
                    o.covers(),
                    "truth `{truth}`, seed {seed}: CI [{}, {}] misses {}",
                    o.ci_low,
                    o.ci_high,
                    o.true_effect
                );
                // The pooled interval over imputations of the mapped driver
                // (given the loggers and the trait) is reported and covers too.
                assert_eq!(
                    o.covers_with_mapping(),
                    Some(true),
                    "truth `{truth}`, seed {seed}: pooled {:?} vs {}",
                    o.pooled,
                    o.true_effect
                );
            }
        }
    }
}

/// The second test under correlated errors (docs/verdict.md, step 7), on the
/// seed of the `correlation` truth where it decides: `base+night_cold_hours`
/// with independent errors wins the AIC rule (by the tie margin: the same
/// driver with exponential errors has the lower AIC) and its exact t passes,
/// but under those correlated errors (refitted by REML, Kenward-Roger) the
/// driver fails, is set aside, and the verdict is the right
/// `correlation`. Measured before the rule: `covariate` (docs/verdict.md).
#[test]
fn an_independent_choice_is_tested_again_under_correlation() {
    let dir = tempfile::tempdir().unwrap();
    let study = dir.path().join("study");
    potclim(&[
        "simulate",
        scenario("correlation").to_str().unwrap(),
        "--out",
        study.to_str().unwrap(),
        "--seed",
        "14",
    ]);
    potclim(&["run", study.join("study.toml").to_str().unwrap(), "--quiet"]);
    let summary = read_json(&study.join("output/summary.json"));
    assert_eq!(summary["verdict"], "correlation", "{}", summary["best_model"]);
    let first = &summary["calibration"]["steps"][0];
    assert_eq!(first["model"], "base+night_cold_hours", "{first}");
    let exact = first["tests"][0]["p_value"].as_f64().unwrap();
    let again = &first["tests_under_correlation"][0];
    let p_again = again["p_value"].as_f64().unwrap();
    assert!(exact < 0.05 && p_again >= 0.05, "exact t p {exact}, under correlation p {p_again}");
    assert_eq!(again["method"], "kenward-roger (first order)");
    assert!(first["correlation_check"].as_str().unwrap().starts_with("base+night_cold_hours | "), "{first}");
    assert_eq!(first["set_aside"][0], DRIVER);
    let statement = summary["calibration"]["statement"].as_str().unwrap();
    assert!(
        statement.contains("under correlated errors, which have the lower AIC with these drivers"),
        "{statement}"
    );
}

/// The test under the base model's correlation (docs/verdict.md, step 8),
/// on the study where the power study of the golden scenario found it
/// missing: its night cool hours with no effect (60 pots, 6 loggers, an
/// exponential residual field), seed 5. `base+night_cool_hours` with
/// independent errors wins the AIC rule by the tie margin and its exact t
/// passes (p = 0.006); step 7 is not needed (the driver's correlated fits
/// do not lower the AIC), but the model without drivers is best with
/// correlated errors, and under them the likelihood ratio of the driver,
/// bootstrapped, is far from significant: the driver is set aside and the
/// verdict is the right `correlation`. Measured before the rule: `covariate`.
#[test]
fn an_independent_choice_is_tested_under_the_base_correlation() {
    let dir = tempfile::tempdir().unwrap();
    let golden = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/golden/scenario.toml");
    let text = std::fs::read_to_string(&golden).unwrap();
    assert_eq!(text.matches("effect = -0.04").count(), 1, "the golden driver's effect line changed");
    let scenario = dir.path().join("no_effect.toml");
    std::fs::write(&scenario, text.replace("effect = -0.04", "effect = 0.0")).unwrap();
    let study = dir.path().join("study");
    potclim(&["simulate", scenario.to_str().unwrap(), "--out", study.to_str().unwrap(), "--seed", "5"]);
    potclim(&["run", study.join("study.toml").to_str().unwrap(), "--quiet"]);
    let summary = read_json(&study.join("output/summary.json"));
    assert_eq!(summary["verdict"], "correlation", "{}", summary["best_model"]);
    let first = &summary["calibration"]["steps"][0];
    assert_eq!(first["model"], "base+night_cool_hours", "{first}");
    let exact = first["tests"][0]["p_value"].as_f64().unwrap();
    assert!(exact < 0.05, "exact t p {exact}");
    assert!(first["tests_under_correlation"].as_array().unwrap().is_empty(), "{first}");
    let lrt = &first["lrt_under_correlation"];
    assert!(lrt["null"].as_str().unwrap().starts_with("base | "), "{lrt}");
    assert!(lrt["alternative"].as_str().unwrap().starts_with("base+night_cool_hours | "), "{lrt}");
    // far from significant: the sequential rule stops at the 5th replicate
    // reaching the statistic (docs/verdict.md, step 6), p = 5 / replicates
    let boot = &lrt["bootstrap"];
    assert_eq!(boot["requested"], 99, "{boot}");
    assert!(boot["stopped_early"].as_bool().unwrap() && boot["exceedances"] == 5, "{boot}");
    let used = boot["replicates"].as_u64().unwrap();
    assert!(used < 99 && (boot["p_value"].as_f64().unwrap() - 5.0 / used as f64).abs() < 1e-12, "{boot}");
    let p = lrt["p_value"].as_f64().unwrap();
    assert_eq!(p, lrt["bootstrap"]["p_value"].as_f64().unwrap());
    assert!(p >= 0.05, "under the base's correlation p {p}");
    assert_eq!(first["set_aside"][0], "night_cool_hours");
    let statement = summary["calibration"]["statement"].as_str().unwrap();
    assert!(statement.contains("the model without drivers has correlated errors"), "{statement}");
}

/// The four scenario files differ only in `[scenario].title` and `[trait]`,
/// so that the truths share their climate, loggers and design: the same seed
/// gives the same climate and the same mapped driver under every truth.
#[test]
fn truth_scenarios_differ_only_in_the_trait() {
    let load = |t: &str| -> toml::Table {
        let p = scenario(t);
        toml::from_str(&std::fs::read_to_string(&p).unwrap())
            .unwrap_or_else(|e| panic!("{}: {e}", p.display()))
    };
    let strip = |mut t: toml::Table| {
        t.remove("trait").expect("a [trait] table");
        t["scenario"].as_table_mut().unwrap().remove("title").expect("a title");
        t
    };
    let base = strip(load(TRUTHS[0]));
    for t in TRUTHS[1..].iter().chain(&[HARDEST]) {
        assert_eq!(
            strip(load(t)),
            base,
            "truth_{t}.toml differs from truth_{}.toml outside [trait]",
            TRUTHS[0]
        );
    }
    // The 480-pot files: each equals its 150-pot file outside the bench
    // ([layout] and [design].replicates) and the header comment.
    for t in TRUTHS {
        let p = scenario_at(t, 480);
        let mut big: toml::Table = toml::from_str(&std::fs::read_to_string(&p).unwrap())
            .unwrap_or_else(|e| panic!("{}: {e}", p.display()));
        let mut small = load(t);
        for table in [&mut big, &mut small] {
            table.remove("layout").expect("a [layout] table");
            table["design"].as_table_mut().unwrap().remove("replicates").expect("replicates");
        }
        assert_eq!(big, small, "truth_{t}_480.toml differs from truth_{t}.toml outside the bench");
    }
    // The traits themselves: the effect is zero exactly where the truth has no
    // driver, and the residual field is present exactly where it has one.
    for t in TRUTHS {
        let tr = load(t)["trait"].as_table().unwrap().clone();
        let effect = tr["indicator"].as_array().unwrap()[0]["effect"].as_float().unwrap();
        assert_eq!(effect != 0.0, matches!(t, "covariate" | "both"), "{t}: effect {effect}");
        assert_eq!(tr.contains_key("residual_field"), matches!(t, "correlation" | "both"), "{t}");
    }
}

/// Counts of one truth over a set of seeds.
#[derive(Default)]
struct Tally {
    runs: usize,
    right: usize,
    right_with_driver: usize,
    wrong: Vec<String>,
    with_driver: usize,
    covered_chosen: usize,
    covered_small: usize,
    covered_all: usize,
    set_aside: usize,
    mapping_n: usize,
    mapping_covered: usize,
    r_sum: f64,
    r_min: f64,
    rmse_sum: f64,
    rmse_max: f64,
    msse_sum: f64,
    seconds: f64,
}

impl Tally {
    fn of(outcomes: &[&Outcome]) -> Tally {
        let mut t = Tally { r_min: f64::INFINITY, ..Tally::default() };
        for o in outcomes {
            t.runs += 1;
            t.seconds += o.seconds;
            t.right_with_driver += usize::from(o.right_with_driver());
            if o.right() {
                t.right += 1;
            } else {
                t.wrong.push(format!("{} ({})", o.verdict, o.seed));
            }
            if o.driver_chosen {
                t.with_driver += 1;
                t.covered_chosen += usize::from(o.covers());
                t.covered_small += usize::from(o.covers_calibrated());
            }
            t.set_aside += usize::from(!o.set_aside.is_empty());
            t.covered_all += usize::from(o.covers());
            if let Some(c) = o.covers_with_mapping() {
                t.mapping_n += 1;
                t.mapping_covered += usize::from(c);
            }
            t.r_sum += o.map_r;
            t.r_min = t.r_min.min(o.map_r);
            t.rmse_sum += o.map_rmse;
            t.rmse_max = t.rmse_max.max(o.map_rmse);
            t.msse_sum += o.map_msse;
        }
        t
    }
}

fn load_average() -> String {
    std::fs::read_to_string("/proc/loadavg")
        .map(|s| s.split_whitespace().take(3).collect::<Vec<_>>().join(" "))
        .unwrap_or_else(|_| "n/a".into())
}

/// Wilson's 95 % interval of `k` successes in `n` trials (Wilson 1927,
/// *JASA* 22: 209-212), as "lo–hi" counts out of `n`.
fn wilson(k: usize, n: usize) -> String {
    if n == 0 {
        return "–".into();
    }
    let (k, nf, z) = (k as f64, n as f64, 1.959964f64);
    let p = k / nf;
    let centre = (p + z * z / (2.0 * nf)) / (1.0 + z * z / nf);
    let half = z * (p * (1.0 - p) / nf + z * z / (4.0 * nf * nf)).sqrt() / (1.0 + z * z / nf);
    format!("{:.0}–{:.0} %", 100.0 * (centre - half).max(0.0), 100.0 * (centre + half).min(1.0))
}

/// Print the Markdown table of docs/verdict.md for the outcomes whose seed is in `seeds`.
fn print_table(
    outcomes: &[Outcome],
    truths: &[&'static str],
    seeds: std::ops::RangeInclusive<u64>,
) -> Vec<(&'static str, Tally)> {
    println!("\nseeds {}..={}:\n", seeds.start(), seeds.end());
    println!(
        "| truth | right verdicts (95 % interval) | right, driver in the chosen model iff it has an effect | wrong: verdict (seed) | calibration set a driver aside | plug-in CI covers, chosen model has the driver | small-sample CI covers (95 % interval) | pooled CI incl. mapping covers | mapped driver r, mean (min) | s per run |"
    );
    println!("|---|---|---|---|---|---|---|---|---|---|");
    let mut out = Vec::new();
    for &truth in truths {
        let these: Vec<&Outcome> =
            outcomes.iter().filter(|o| o.truth == truth && seeds.contains(&o.seed)).collect();
        let t = Tally::of(&these);
        println!(
            "| `{truth}` | {}/{} ({}) | {}/{} | {} | {}/{} | {}/{} | {}/{} ({}) | {}/{} | {:.3} ({:.3}) | {:.1} |",
            t.right,
            t.runs,
            wilson(t.right, t.runs),
            t.right_with_driver,
            t.runs,
            if t.wrong.is_empty() { "–".to_string() } else { t.wrong.join(", ") },
            t.set_aside,
            t.runs,
            t.covered_chosen,
            t.with_driver,
            t.covered_small,
            t.with_driver,
            wilson(t.covered_small, t.with_driver),
            t.mapping_covered,
            t.mapping_n,
            t.r_sum / t.runs as f64,
            t.r_min,
            t.seconds / t.runs as f64
        );
        out.push((truth, t));
    }
    out
}

/// Print, per truth, the pooled interval incl. mapping against the plug-in one
/// over the runs that have it: coverage with its Wilson interval, the mean
/// pooled and plug-in estimates with their Monte Carlo SEs (SD over runs /
/// sqrt(runs)), and the median ratio of the pooled SE to the plug-in SE.
fn print_pooled(outcomes: &[Outcome], truths: &[&'static str]) {
    println!(
        "\n| truth | pooled CI incl. mapping covers (95 % interval) | mean pooled estimate (MC SE) | mean plug-in estimate, same runs (MC SE) | true effect | pooled SE / plug-in SE, median (range) |"
    );
    println!("|---|---|---|---|---|---|");
    let mean_mc = |v: &[f64]| -> (f64, f64) {
        let n = v.len() as f64;
        let m = v.iter().sum::<f64>() / n;
        let var = v.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (n - 1.0).max(1.0);
        (m, (var / n).sqrt())
    };
    for &truth in truths {
        let these: Vec<&Outcome> =
            outcomes.iter().filter(|o| o.truth == truth && o.pooled.is_some()).collect();
        if these.is_empty() {
            continue;
        }
        let k = these.iter().filter(|o| o.covers_with_mapping() == Some(true)).count();
        let pooled: Vec<f64> = these.iter().map(|o| o.pooled.expect("filtered").0).collect();
        let plug: Vec<f64> = these.iter().map(|o| o.estimate).collect();
        let mut ratio: Vec<f64> = these.iter().filter_map(|o| o.se_with_mapping.map(|s| s / o.se)).collect();
        ratio.sort_by(f64::total_cmp);
        let (pm, pe) = mean_mc(&pooled);
        let (qm, qe) = mean_mc(&plug);
        println!(
            "| `{truth}` | {k}/{} ({}) | {pm:.5} ({pe:.5}) | {qm:.5} ({qe:.5}) | {} | {:.2} ({:.2}–{:.2}) |",
            these.len(),
            wilson(k, these.len()),
            these[0].true_effect,
            ratio.get(ratio.len() / 2).copied().unwrap_or(f64::NAN),
            ratio.first().copied().unwrap_or(f64::NAN),
            ratio.last().copied().unwrap_or(f64::NAN),
        );
    }
}

/// The full study (slow): `POTCLIM_TRUTH_SEEDS` seeds per truth (default
/// 10, seeds 1..=N; from `POTCLIM_TRUTH_FIRST_SEED` when set), at `POTCLIM_TRUTH_POTS` pots (150, the default, or 480);
/// at 150 pots the hardest case runs too. Prints every run and the tables of
/// docs/verdict.md, then checks the targets: at least 38 in 40 right for
/// every truth (95 %), and the small-sample CI of the driver covering the
/// truth in at least 36 in 40 (90 %) of the `both` runs whose chosen model
/// has the driver. The hardest case is reported, not asserted.
#[test]
#[ignore]
fn truth_study_full() {
    let n: u64 = std::env::var("POTCLIM_TRUTH_SEEDS").ok().and_then(|s| s.parse().ok()).unwrap_or(10);
    let pots: usize = std::env::var("POTCLIM_TRUTH_POTS").ok().and_then(|s| s.parse().ok()).unwrap_or(150);
    // POTCLIM_TRUTH_FIRST_SEED=41 runs seeds 41..41+N-1: fresh seeds for a
    // rule chosen on the first forty.
    let first: u64 = std::env::var("POTCLIM_TRUTH_FIRST_SEED").ok().and_then(|s| s.parse().ok()).unwrap_or(1);
    assert!(pots == 150 || pots == 480, "POTCLIM_TRUTH_POTS is 150 or 480");
    let mut truths: Vec<&'static str> = TRUTHS.to_vec();
    if pots == 150 {
        truths.push(HARDEST);
    }
    // POTCLIM_TRUTH_ONLY=covariate,both runs only the named truths.
    if let Ok(only) = std::env::var("POTCLIM_TRUTH_ONLY") {
        let named: Vec<&str> = only.split(',').map(str::trim).collect();
        for n in &named {
            assert!(truths.contains(n), "POTCLIM_TRUTH_ONLY: `{n}` is not one of {truths:?}");
        }
        truths.retain(|t| named.contains(t));
    }
    let load_before = load_average();
    let started = Instant::now();
    let mut outcomes = Vec::new();
    for &truth in &truths {
        for seed in first..first + n {
            let o = run_one_at(truth, seed, pots);
            println!("{}", line(&o));
            outcomes.push(o);
        }
    }
    println!(
        "\n{} runs at {pots} pots in {:.0} s; load average (1, 5, 15 min) before {load_before}, after {}",
        outcomes.len(),
        started.elapsed().as_secs_f64(),
        load_average()
    );
    let mut failures = Vec::new();
    print_pooled(&outcomes, &truths);
    for (truth, t) in print_table(&outcomes, &truths, first..=first + n - 1) {
        if truth == HARDEST {
            continue;
        }
        if 20 * t.right < 19 * t.runs {
            failures.push(format!("truth `{truth}`: {} right of {} (target 95 %)", t.right, t.runs));
        }
        if truth == "both" && 10 * t.covered_small < 9 * t.with_driver {
            failures.push(format!(
                "truth `both`: small-sample CI covers {} of {} (target 90 %)",
                t.covered_small, t.with_driver
            ));
        }
    }
    assert!(failures.is_empty(), "targets missed: {failures:?}");
}
