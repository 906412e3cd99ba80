//! `potclim power PLAN`: would this layout find the driver? A simulation
//! study: for each true effect of the driver on the trait (and each number
//! of loggers), `studies` whole studies are simulated from the scenario
//! ([`crate::simulate::generate`]) with seeds `seed, seed + 1, ...`, and each
//! is analysed as `potclim run` would (ingest, climate, map, verdict, in
//! memory; no report). Per point of the curve:
//!
//! - the share of studies whose chosen model holds the driver: the **power**
//!   for a non-zero effect, the **false-alarm rate** for a zero effect;
//! - the share whose 95 % CI of the driver's effect covers the true effect
//!   (the CI with the mapped driver's uncertainty where the verdict computed
//!   it, else the small-sample (Kenward-Roger) CI of the driver's row where
//!   its model has correlated errors, else the plug-in CI);
//! - each with a 95 % Monte Carlo interval by Wilson's score method (Wilson
//!   1927, *JASA* 22:209-212; recommended by Newcombe 1998, *Statistics in
//!   Medicine* 17:857-872), since a share of a few dozen studies is itself
//!   uncertain.
//!
//! The same seeds are used at every effect and logger count (common random
//! numbers: the curves differ only by what changed, not by the draw of the
//! climate and the residual field). Since the simulator draws the climate
//! from its own random stream, the studies of one seed and logger count
//! differ only in the trait, and their climate and map are computed once
//! for every effect size (`same_climate` checks it on the files). Studies run on all cores, one study per
//! thread at a time, each in its own work folder; the numbers do not depend on
//! the number of threads (each study's randomness is its own seed's, and the
//! results are stored by study index).
//!
//! The verdict's rule keeps the false-alarm rate of one driver low: against
//! the same error model without it, a driver wins on pure noise when its
//! likelihood-ratio statistic exceeds the tie margin + 2, which for the
//! default margin 4 has probability P(chi2_1 > 6) = 0.0143; against
//! correlated errors without it (a model of the same size) the margin does
//! not protect and the calibrated tests at 5 % decide (`docs/verdict.md`,
//! steps 5 to 8). The rate this study measures lies between the two
//! (`docs/planning.md`: 3 and 7 in 100 on the golden scenario).

use super::{PlanError, PlanFile};
use crate::io::output::{CsvTable, StageWriter, number, opt_number};
use crate::io::study::Study;
use crate::model::progress::Silent;
use crate::pipeline::{PipelineError, Plan, Stage, StageError};
use crate::report::plan_page::{PowerPage, PowerPoint};
use crate::simulate::Scenario;
use serde::Deserialize;
use std::path::{Path, PathBuf};
use std::sync::Mutex;
use std::sync::atomic::{AtomicUsize, Ordering};
use std::time::Instant;

/// File name of the power table.
pub const POWER_FILE: &str = "power.csv";
/// File name of the per-study table.
pub const POWER_STUDIES_FILE: &str = "power_studies.csv";
/// File name of the power page.
pub const POWER_PAGE: &str = "power.html";

/// `[power]` of the plan file.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PowerSection {
    /// The scenario file (layout, design, loggers, draught, residual field).
    pub scenario: String,
    /// The driver: a `[[trait.indicator]]` of the scenario.
    pub driver: String,
    /// True effects of the driver on the trait (trait units per driver unit).
    pub effects: Vec<f64>,
    /// Simulated studies per point (default 20).
    pub studies: Option<usize>,
    /// Seed of the first study (default 1).
    pub seed: Option<u64>,
    /// Logger counts: the first k loggers of the scenario (default: all).
    pub loggers: Option<Vec<usize>>,
    /// Overrides of the first `[[climate.draught]]`: size and reach.
    pub draught: Option<DraughtOverride>,
    /// Conditional simulations of the mapped driver per study (default: the
    /// verdict's own default).
    pub draws: Option<usize>,
    /// The correlation families of each simulated study's comparison grid
    /// (default: the scenario's `[analysis] correlations`); fewer families,
    /// fewer fits per study.
    pub correlations: Option<Vec<String>>,
    /// Worker threads (default: every core).
    pub threads: Option<usize>,
    /// Output folder (default `power-output`).
    pub output: Option<String>,
}

/// `[power.draught]`: the draught's size and reach in the climate.
#[derive(Debug, Clone, Copy, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct DraughtOverride {
    /// Cooling at the opening at night, °C.
    pub night_drop: Option<f64>,
    /// e-folding distance, metres.
    pub decay: Option<f64>,
}

/// Command-line overrides of `[power]`.
#[derive(Debug, Clone, Default)]
pub struct Overrides {
    /// `--studies`.
    pub studies: Option<usize>,
    /// `--threads`.
    pub threads: Option<usize>,
}

/// One simulated study's outcome.
#[derive(Clone, Debug, PartialEq)]
pub struct StudyOutcome {
    /// Loggers in the layout.
    pub loggers: usize,
    /// True effect.
    pub effect: f64,
    /// Seed.
    pub seed: u64,
    /// The verdict word, or `error`.
    pub verdict: String,
    /// Chosen model.
    pub chosen: String,
    /// The chosen model holds the driver.
    pub found: bool,
    /// The driver's estimate and 95 % CI (with mapping uncertainty where computed).
    pub estimate: Option<(f64, f64, f64)>,
    /// Seconds for this study.
    pub seconds: f64,
    /// The error, for a study that could not be analysed.
    pub error: Option<String>,
}

/// Wilson's 95 % score interval for `k` successes in `n` trials (Wilson
/// 1927): `(p + z²/2n ± z √(p(1-p)/n + z²/4n²)) / (1 + z²/n)`, `z = 1.959964`.
/// `None` for `n = 0`. Cost O(1).
///
/// ```
/// let (lo, hi) = potclim::planner::power::wilson(0, 20).unwrap();
/// assert_eq!(lo, 0.0);
/// assert!((hi - 0.1611).abs() < 1e-4);
/// ```
pub fn wilson(k: usize, n: usize) -> Option<(f64, f64)> {
    if n == 0 {
        return None;
    }
    let z = 1.959_963_984_540_054_f64;
    let (k, n) = (k as f64, n as f64);
    let p = k / n;
    let z2 = z * z;
    let centre = (p + z2 / (2.0 * n)) / (1.0 + z2 / n);
    let half = z * (p * (1.0 - p) / n + z2 / (4.0 * n * n)).sqrt() / (1.0 + z2 / n);
    Some(((centre - half).max(0.0), (centre + half).min(1.0)))
}

/// The scenario with `k` loggers (the first k; exports and faults of the
/// others dropped), the driver's effect set to `effect` and the draught
/// overridden.
fn variant(base: &Scenario, sec: &PowerSection, k: usize, effect: f64) -> Scenario {
    let (driver, draught) = (sec.driver.as_str(), sec.draught);
    let mut s = base.clone();
    if let Some(c) = &sec.correlations {
        let a = s.spec.analysis.get_or_insert(crate::simulate::scenario::AnalysisSpec {
            output: None,
            correlations: None,
            nugget: None,
            rows_columns: None,
            directional: None,
        });
        a.correlations = Some(c.clone());
    }
    s.spec.logger.truncate(k);
    s.logger_export.truncate(k);
    let mut used: Vec<usize> = s.logger_export.clone();
    used.sort_unstable();
    used.dedup();
    s.spec.export = used.iter().map(|&j| base.spec.export[j].clone()).collect();
    s.logger_export = s.logger_export.iter().map(|j| used.iter().position(|u| u == j).unwrap_or(0)).collect();
    let kept: Vec<String> = s.spec.logger.iter().map(|l| l.id.clone()).collect();
    s.spec.fault.retain(|f| kept.contains(&f.logger));
    for ind in s.spec.trait_.indicator.iter_mut().filter(|i| i.name == driver) {
        ind.effect = effect;
    }
    if let (Some(o), Some(d)) = (draught, s.spec.climate.draught.first_mut()) {
        if let Some(v) = o.night_drop {
            d.night_drop = v;
        }
        if let Some(v) = o.decay {
            d.decay = v;
        }
    }
    s
}

fn stage_err(stage: Stage, e: impl Into<StageError>) -> String {
    format!("{:#}", anyhow::Error::from(PipelineError::Stage { stage, source: e.into() }))
}

/// What one analysed study says: verdict word, chosen model, whether it
/// holds the driver, and the driver's estimate with its 95 % CI.
type Analysed = (String, String, bool, Option<(f64, f64, f64)>);

/// A generated study's files: path inside the study folder and contents.
type Files = Vec<(String, Vec<u8>)>;

/// Whether the study generated as `b` has the same climate, layout and
/// windows as the one generated as `a`, so that `a`'s climate and map serve
/// it: the files differ at most in the simulator's truth folder and in the
/// trait (the last column of `pots.csv`). With common random numbers this
/// holds for every effect size of one seed and logger count, since the
/// simulator draws the climate from its own random stream.
fn same_climate(a: &Files, b: &Files) -> bool {
    let strip = |bytes: &[u8]| -> Vec<Vec<u8>> {
        bytes
            .split(|&c| c == b'\n')
            .map(|line| match line.iter().rposition(|&c| c == b',') {
                Some(i) => line[..i].to_vec(),
                None => line.to_vec(),
            })
            .collect()
    };
    a.len() == b.len()
        && a.iter().zip(b).all(|((na, ba), (nb, bb))| {
            na == nb && (na.starts_with("truth/") || ba == bb || (na == "pots.csv" && strip(ba) == strip(bb)))
        })
}

/// Simulate one study of `sc` with `seed` into `work` (emptied first);
/// returns the generated files.
fn simulate_into(sc: &Scenario, seed: u64, work: &Path) -> Result<Files, String> {
    let files = crate::simulate::generate(sc, seed).map_err(|e| format!("{e:#}"))?;
    let _ = std::fs::remove_dir_all(work);
    for (name, bytes) in &files {
        let p = work.join(name);
        if let Some(parent) = p.parent() {
            std::fs::create_dir_all(parent).map_err(|e| format!("{}: {e}", parent.display()))?;
        }
        std::fs::write(&p, bytes).map_err(|e| format!("{}: {e}", p.display()))?;
    }
    Ok(files)
}

/// The climate and the map of a simulated study, kept for the next effect
/// size of the same seed and logger count.
type Mapped = (crate::climate::ClimateRun, crate::spatial::stage::MapRun);

/// Analyse the study simulated into `work`: ingest, climate and map (or
/// `reuse`, when the caller has checked with [`same_climate`] that they
/// serve), then the verdict. Returns the analysis and the climate and map.
fn analyse(
    work: &Path,
    driver: &str,
    draws: Option<usize>,
    reuse: Option<Mapped>,
) -> Result<(Analysed, Mapped), String> {
    let study = Study::load(&work.join("study.toml")).map_err(|e| format!("{e:#}"))?;
    let mut plan = Plan::from_study(&study).map_err(|e| format!("{:#}", anyhow::Error::from(e)))?;
    let (climate, map) = match reuse {
        Some(m) => m,
        None => {
            let ing = crate::io::ingest::ingest(&study).map_err(|e| stage_err(Stage::Ingest, e))?;
            let readings_path = study.output_dir().join(crate::io::ingest::READINGS_FILE);
            let climate =
                crate::climate::stage::compute(&study, plan.climate.clone(), &ing.readings, &readings_path)
                    .map_err(|e| stage_err(Stage::Climate, e))?;
            let map =
                crate::spatial::stage::compute(&study, &climate).map_err(|e| stage_err(Stage::Map, e))?;
            (climate, map)
        }
    };
    if let Some(d) = draws {
        plan.verdict.draws = d;
    }
    let v = crate::pipeline::verdict_in_memory(&study, &plan, &climate, &map, &Silent).map_err(|e| {
        format!("{:#}", anyhow::Error::from(PipelineError::Stage { stage: Stage::Verdict, source: e }))
    })?;
    let found = v.chosen_shape.0.iter().any(|d| d == driver);
    let est = v.drivers.iter().find(|d| d.name == driver).map(|d| {
        match (
            d.estimate_with_mapping_uncertainty,
            d.ci_low_with_mapping_uncertainty,
            d.ci_high_with_mapping_uncertainty,
        ) {
            (Some(e), Some(lo), Some(hi)) => (e, lo, hi),
            _ => match (d.ci_low_small_sample, d.ci_high_small_sample) {
                (Some(lo), Some(hi)) => (d.estimate, lo, hi),
                _ => (d.estimate, d.ci_low, d.ci_high),
            },
        }
    });
    Ok(((v.verdict.clone(), v.best_model.clone(), found, est), (climate, map)))
}

/// The outcome of `potclim power`.
#[derive(Debug)]
pub struct PowerRun {
    /// What the page and `power.csv` show.
    pub page: PowerPage,
    /// Every study.
    pub studies: Vec<StudyOutcome>,
    /// The files written, `power.csv` first.
    pub files: Vec<PathBuf>,
}

/// Run `[power]` of `plan` and write `power.csv`, `power_studies.csv` and
/// `power.html` into its output folder (atomically). `progress` is called
/// with (studies done, total) after each study.
pub fn run(
    plan: &PlanFile,
    over: Overrides,
    progress: &(dyn Fn(usize, usize) + Sync),
) -> Result<PowerRun, PlanError> {
    let t0 = Instant::now();
    let Some(sec) = &plan.power else {
        return Err(plan.invalid("power", "the plan file has no [power] section", None));
    };
    let base = Scenario::load(&plan.resolve(&sec.scenario))?;
    if !base.spec.trait_.indicator.iter().any(|i| i.name == sec.driver) {
        let names: Vec<&str> = base.spec.trait_.indicator.iter().map(|i| i.name.as_str()).collect();
        return Err(plan.invalid(
            "power.driver",
            format!("`{}` is not a [[trait.indicator]] of the scenario", sec.driver),
            Some(&format!("one of: {}", names.join(", "))),
        ));
    }
    if sec.effects.is_empty() || sec.effects.iter().any(|e| !e.is_finite()) {
        return Err(plan.invalid(
            "power.effects",
            format!("{:?}", sec.effects),
            Some("a list of numbers, e.g. [0.0, -0.05, -0.1]"),
        ));
    }
    let n_all = base.spec.logger.len();
    let counts = sec.loggers.clone().unwrap_or_else(|| vec![n_all]);
    if let Some(&bad) = counts.iter().find(|&&k| k == 0 || k > n_all) {
        return Err(plan.invalid(
            "power.loggers",
            format!("{bad} loggers: the scenario has {n_all}"),
            Some("the first k loggers of the scenario are used; 1 <= k <= the number of [[logger]] blocks"),
        ));
    }
    if let Some(d) = sec.draught {
        if base.spec.climate.draught.is_empty() {
            return Err(plan.invalid(
                "power.draught",
                "the scenario has no [[climate.draught]] to change",
                None,
            ));
        }
        if d.night_drop.is_some_and(|v| !v.is_finite())
            || d.decay.is_some_and(|v| !(v.is_finite() && v > 0.0))
        {
            return Err(plan.invalid(
                "power.draught",
                format!("{d:?}"),
                Some("night_drop a number (°C), decay > 0 (m)"),
            ));
        }
    }
    for c in sec.correlations.iter().flatten() {
        crate::spatial::correlation::Family::parse(c).map_err(|e| {
            plan.invalid("power.correlations", e, Some("exponential, spherical, gaussian or matern_<nu>"))
        })?;
    }
    if sec.draws.is_some_and(|d| d < 2) {
        return Err(plan.invalid(
            "power.draws",
            format!("{:?}", sec.draws),
            Some("at least 2 (Rubin's rules)"),
        ));
    }
    let n_studies = over.studies.or(sec.studies).unwrap_or(20);
    if n_studies == 0 {
        return Err(plan.invalid("power.studies", "0", Some("at least 1")));
    }
    let seed0 = sec.seed.unwrap_or(1);
    let threads = over
        .threads
        .or(sec.threads)
        .filter(|&t| t > 0)
        .unwrap_or_else(|| std::thread::available_parallelism().map_or(1, |t| t.get()));
    // Jobs: (logger count, replicate), each over every effect size, so that
    // one simulated climate and its map serve all effects of a seed (common
    // random numbers, [`same_climate`]). Results are stored in output order:
    // logger count, effect, replicate.
    let n_eff = sec.effects.len();
    let mut jobs = Vec::new();
    for (ci, &k) in counts.iter().enumerate() {
        let scs: Vec<Scenario> = sec.effects.iter().map(|&e| variant(&base, sec, k, e)).collect();
        let scs = std::sync::Arc::new(scs);
        for r in 0..n_studies {
            jobs.push((ci, k, r, seed0.wrapping_add(r as u64), scs.clone()));
        }
    }
    let total = jobs.len() * n_eff;
    let out = plan.resolve(sec.output.as_deref().unwrap_or("power-output"));
    let work_root = out.join(format!(".power-work-{}", std::process::id()));
    let results: Mutex<Vec<Option<StudyOutcome>>> = Mutex::new(vec![None; total]);
    let next = AtomicUsize::new(0);
    let done = AtomicUsize::new(0);
    std::thread::scope(|s| {
        for w in 0..threads.min(jobs.len()) {
            let (jobs, results, next, done, work_root) = (&jobs, &results, &next, &done, &work_root);
            s.spawn(move || {
                let work = work_root.join(format!("w{w}"));
                loop {
                    let i = next.fetch_add(1, Ordering::SeqCst);
                    let Some((ci, k, r, seed, scs)) = jobs.get(i) else { break };
                    // The first effect's files and map, for the effects after it.
                    let mut first: Option<(Files, Mapped)> = None;
                    for (ei, (sc, &e)) in scs.iter().zip(&sec.effects).enumerate() {
                        let t = Instant::now();
                        let r_one = simulate_into(sc, *seed, &work).and_then(|files| {
                            let reuse = match first.take() {
                                Some((f0, m)) if same_climate(&f0, &files) => Some((f0, m)),
                                _ => None,
                            };
                            let (f0, m) = match reuse {
                                Some((f0, m)) => (f0, Some(m)),
                                None => (files, None),
                            };
                            let (a, mapped) = analyse(&work, &sec.driver, sec.draws, m)?;
                            first = Some((f0, mapped));
                            Ok(a)
                        });
                        let mut o = StudyOutcome {
                            loggers: *k,
                            effect: e,
                            seed: *seed,
                            verdict: "error".into(),
                            chosen: String::new(),
                            found: false,
                            estimate: None,
                            seconds: t.elapsed().as_secs_f64(),
                            error: None,
                        };
                        match r_one {
                            Ok((verdict, chosen, found, est)) => {
                                (o.verdict, o.chosen, o.found, o.estimate) = (verdict, chosen, found, est)
                            }
                            Err(msg) => o.error = Some(msg),
                        }
                        if let Ok(mut g) = results.lock() {
                            g[(ci * n_eff + ei) * n_studies + r] = Some(o);
                        }
                        progress(done.fetch_add(1, Ordering::SeqCst) + 1, total);
                    }
                }
                let _ = std::fs::remove_dir_all(&work);
            });
        }
    });
    let _ = std::fs::remove_dir_all(&work_root);
    let studies: Vec<StudyOutcome> = results.into_inner().unwrap_or_default().into_iter().flatten().collect();
    let mut points = Vec::new();
    for &k in &counts {
        for &e in &sec.effects {
            let these: Vec<&StudyOutcome> =
                studies.iter().filter(|o| o.loggers == k && o.effect == e).collect();
            let ok: Vec<&&StudyOutcome> = these.iter().filter(|o| o.error.is_none()).collect();
            let found = ok.iter().filter(|o| o.found).count();
            let with_ci: Vec<&&&StudyOutcome> = ok.iter().filter(|o| o.estimate.is_some()).collect();
            let covered =
                with_ci.iter().filter(|o| o.estimate.is_some_and(|(_, lo, hi)| lo <= e && e <= hi)).count();
            let count = |w: &str| ok.iter().filter(|o| o.verdict == w).count();
            points.push(PowerPoint {
                loggers: k,
                effect: e,
                studies: these.len(),
                failed: these.len() - ok.len(),
                found,
                share_found: (!ok.is_empty()).then(|| found as f64 / ok.len() as f64),
                share_interval: wilson(found, ok.len()),
                with_ci: with_ci.len(),
                covered,
                coverage: (!with_ci.is_empty()).then(|| covered as f64 / with_ci.len() as f64),
                coverage_interval: wilson(covered, with_ci.len()),
                verdicts: [count("covariate"), count("both"), count("correlation"), count("none")],
                mean_seconds: these.iter().map(|o| o.seconds).sum::<f64>() / these.len().max(1) as f64,
            });
        }
    }
    let page = PowerPage {
        title: base.spec.scenario.title.clone(),
        scenario: plan.resolve(&sec.scenario).display().to_string(),
        driver: sec.driver.clone(),
        trait_name: base.spec.trait_.name.clone(),
        trait_unit: base.spec.trait_.unit.clone(),
        pots: crate::simulate::design(&base, seed0).len(),
        draught: base.spec.climate.draught.first().map(|d| {
            let o = sec.draught.unwrap_or(DraughtOverride { night_drop: None, decay: None });
            (d.opening.clone(), o.night_drop.unwrap_or(d.night_drop), o.decay.unwrap_or(d.decay))
        }),
        studies_per_point: n_studies,
        first_seed: seed0,
        threads,
        points,
        seconds: t0.elapsed().as_secs_f64(),
    };
    let mut w = StageWriter::new(&out, "power")?;
    w.write(POWER_FILE, &power_csv(&page))?;
    w.write(POWER_STUDIES_FILE, &studies_csv(&studies))?;
    w.write(POWER_PAGE, crate::report::plan_page::render_power(&page).as_bytes())?;
    let files = w.commit()?;
    Ok(PowerRun { page, studies, files })
}

/// `power.csv`: one row per logger count and effect (`docs/outputs.md`).
pub fn power_csv(p: &PowerPage) -> Vec<u8> {
    let mut t = CsvTable::new([
        "loggers",
        "effect",
        "studies",
        "failed",
        "found",
        "share_found",
        "share_found_low",
        "share_found_high",
        "with_ci",
        "covered",
        "coverage",
        "coverage_low",
        "coverage_high",
        "verdict_covariate",
        "verdict_both",
        "verdict_correlation",
        "verdict_none",
        "seconds_per_study",
    ]);
    for q in &p.points {
        let mut r = vec![
            q.loggers.to_string(),
            number(q.effect),
            q.studies.to_string(),
            q.failed.to_string(),
            q.found.to_string(),
            opt_number(q.share_found),
            opt_number(q.share_interval.map(|i| i.0)),
            opt_number(q.share_interval.map(|i| i.1)),
            q.with_ci.to_string(),
            q.covered.to_string(),
            opt_number(q.coverage),
            opt_number(q.coverage_interval.map(|i| i.0)),
            opt_number(q.coverage_interval.map(|i| i.1)),
        ];
        r.extend(q.verdicts.iter().map(|v| v.to_string()));
        r.push(number(q.mean_seconds));
        t.row(r);
    }
    t.into_bytes()
}

/// `power_studies.csv`: one row per simulated study.
pub fn studies_csv(studies: &[StudyOutcome]) -> Vec<u8> {
    let mut t = CsvTable::new([
        "loggers",
        "effect",
        "seed",
        "verdict",
        "chosen_model",
        "found",
        "estimate",
        "ci_low",
        "ci_high",
        "seconds",
        "error",
    ]);
    for o in studies {
        t.row([
            o.loggers.to_string(),
            number(o.effect),
            o.seed.to_string(),
            o.verdict.clone(),
            o.chosen.clone(),
            o.found.to_string(),
            opt_number(o.estimate.map(|e| e.0)),
            opt_number(o.estimate.map(|e| e.1)),
            opt_number(o.estimate.map(|e| e.2)),
            number(o.seconds),
            o.error.clone().unwrap_or_default(),
        ]);
    }
    t.into_bytes()
}

#[cfg(test)]
mod tests {
    use super::{PowerSection, variant, wilson};
    use crate::simulate::Scenario;
    use approx::assert_abs_diff_eq;

    /// One seed's studies at two effect sizes share their climate and map
    /// (only the trait column and the truth differ); two seeds do not.
    #[test]
    fn effects_of_one_seed_share_the_climate() {
        let path = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/golden/scenario.toml");
        let base = Scenario::load(std::path::Path::new(path)).unwrap();
        let sec: PowerSection =
            toml::from_str("scenario = \"x\"\ndriver = \"night_cool_hours\"\neffects = [0.0]").unwrap();
        let make = |e: f64, seed: u64| crate::simulate::generate(&variant(&base, &sec, 6, e), seed).unwrap();
        let (a, b) = (make(0.0, 3), make(-0.2, 3));
        assert_ne!(a, b, "the trait differs");
        assert!(super::same_climate(&a, &b));
        assert!(!super::same_climate(&a, &make(0.0, 4)));
        let fewer = crate::simulate::generate(&variant(&base, &sec, 3, 0.0), 3).unwrap();
        assert!(!super::same_climate(&a, &fewer));
    }

    /// The demo scenario cut to its first 4 and 7 loggers: only their exports
    /// and faults remain, the driver's effect and the draught are set, and the
    /// result still generates a study whose study file names only the kept
    /// exports.
    #[test]
    fn variants_keep_their_loggers_exports_and_faults() {
        let path = concat!(env!("CARGO_MANIFEST_DIR"), "/demo-data/scenario.toml");
        let base = Scenario::load(std::path::Path::new(path)).unwrap();
        let sec: PowerSection = toml::from_str(
            "scenario = \"x\"\ndriver = \"night_cold_hours\"\neffects = [0.0]\ndraught = { night_drop = 1.5 }\ncorrelations = [\"exponential\"]",
        )
        .unwrap();
        for (k, exports) in [(4, vec!["climate_computer"]), (7, vec!["climate_computer", "standalone"])] {
            let v = variant(&base, &sec, k, -0.05);
            assert_eq!(v.spec.logger.len(), k);
            let names: Vec<&str> = v.spec.export.iter().map(|e| e.name.as_str()).collect();
            assert_eq!(names, exports);
            for (l, &e) in v.spec.logger.iter().zip(&v.logger_export) {
                assert_eq!(l.export, v.spec.export[e].name);
            }
            let kept: Vec<&str> = v.spec.logger.iter().map(|l| l.id.as_str()).collect();
            assert!(v.spec.fault.iter().all(|f| kept.contains(&f.logger.as_str())));
            assert!(!v.spec.fault.is_empty());
            let ind = v.spec.trait_.indicator.iter().find(|i| i.name == "night_cold_hours").unwrap();
            assert_eq!(ind.effect, -0.05);
            assert_eq!(v.spec.climate.draught[0].night_drop, 1.5);
            assert_eq!(v.spec.climate.draught[0].decay, base.spec.climate.draught[0].decay);
            let files = crate::simulate::generate(&v, 3).unwrap();
            let study = &files.iter().find(|(n, _)| n == "study.toml").unwrap().1;
            let study = String::from_utf8_lossy(study);
            assert_eq!(study.matches("[[logs]]").count(), exports.len(), "{study}");
            assert!(study.contains("correlations = [\"exponential\"]"), "{study}");
        }
    }

    /// Wilson intervals against Newcombe (1998, *Statistics in Medicine*
    /// 17:857-872, Table I, method 3; values from memory, four decimals):
    /// 81/263 -> 0.2553-0.3662, 15/148 -> 0.0624-0.1605, 0/20 -> 0-0.1611,
    /// 1/29 -> 0.0061-0.1718.
    #[test]
    fn wilson_against_newcombe_table() {
        for (k, n, lo, hi) in [
            (81, 263, 0.2553, 0.3662),
            (15, 148, 0.0624, 0.1605),
            (0, 20, 0.0, 0.1611),
            (1, 29, 0.0061, 0.1718),
        ] {
            let (a, b) = wilson(k, n).unwrap();
            assert_abs_diff_eq!(a, lo, epsilon = 6e-5);
            assert_abs_diff_eq!(b, hi, epsilon = 6e-5);
        }
        assert!(wilson(0, 0).is_none());
        let (a, b) = wilson(20, 20).unwrap();
        assert_eq!(b, 1.0);
        assert_abs_diff_eq!(a, 1.0 - 0.1611, epsilon = 6e-5);
    }
}
