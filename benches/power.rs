//! Benchmark of the power study: the wall-clock time of one simulated study
//! (simulate, ingest, climate, map, comparison grid and verdict, in memory)
//! of the demo scenario (480 pots, 10 loggers, 34 days at 10 min), next to
//! one `potclim run` of the shipped demo (the same size, plus its report),
//! measured in the same run; and the same with a smaller grid of models per
//! simulated study (one correlation family instead of the demo's four, and one
//! family with three imputation draws of the mapped driver instead of 20).
//!
//! Printed: seconds of one study on its worker thread and wall-clock seconds
//! per study with every core busy (one study per core), their ratio to the
//! demo run, and the projected time of the target
//! (5 effect sizes x 100 studies of 480 pots).
//!
//! Run: `cargo bench --bench power` (release profile). Seeds per setting:
//! `POTCLIM_BENCH_STUDIES` (default 2), each analysed at the five effect
//! sizes of [`EFFECTS`] (one climate and map per seed serve all five).

use potclim::io::study::Study;
use potclim::model::progress::Silent;
use potclim::planner::PlanFile;
use potclim::planner::power::{Overrides, run};
use std::path::Path;
use std::time::Instant;

fn copy_dir(from: &Path, to: &Path) {
    std::fs::create_dir_all(to).unwrap();
    for e in std::fs::read_dir(from).unwrap() {
        let p = e.unwrap().path();
        let name = p.file_name().unwrap();
        if name == "output" {
            continue;
        }
        if p.is_dir() {
            copy_dir(&p, &to.join(name));
        } else {
            std::fs::copy(&p, to.join(name)).unwrap();
        }
    }
}

/// A power run of `studies` studies on `threads` threads (`extra` adds keys
/// to `[power]`): (mean seconds of one study on its thread, wall-clock
/// seconds of the run divided by the studies).
fn per_study(dir: &Path, scenario: &Path, extra: &str, studies: usize, threads: usize) -> (f64, f64) {
    let plan = dir.join("plan.toml");
    std::fs::write(
        &plan,
        format!(
            "[power]\nscenario = \"{}\"\ndriver = \"night_cold_hours\"\neffects = {EFFECTS}\nstudies = {studies}\nseed = 1\noutput = \"power-out\"\n{extra}\n",
            scenario.display()
        ),
    )
    .unwrap();
    let plan = PlanFile::load(&plan).unwrap();
    let t = Instant::now();
    let r = run(&plan, Overrides { studies: None, threads: Some(threads) }, &|_, _| {}).unwrap();
    let failed: usize = r.page.points.iter().map(|q| q.failed).sum();
    assert_eq!(failed, 0, "a simulated study failed: {:?}", r.studies);
    let n = r.studies.len() as f64;
    let on_thread = r.studies.iter().map(|o| o.seconds).sum::<f64>() / n;
    (on_thread, t.elapsed().as_secs_f64() / n)
}

/// The effect sizes of the target's curve: each seed's climate and map
/// serve all five (`potclim::planner::power`), so the time per study is the
/// mean over a whole curve's studies.
const EFFECTS: &str = "[0.0, -0.03, -0.06, -0.09, -0.12]";

fn main() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let studies: usize =
        std::env::var("POTCLIM_BENCH_STUDIES").ok().and_then(|s| s.parse().ok()).unwrap_or(2);
    let cores = std::thread::available_parallelism().map_or(1, |t| t.get());
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();

    // Reference: one whole run of the shipped demo, in this process.
    copy_dir(&root.join("demo-data"), &d.join("demo"));
    let study = Study::load(&d.join("demo/study.toml")).unwrap();
    let t = Instant::now();
    let res = potclim::pipeline::run(&study, &Silent).unwrap();
    let demo = t.elapsed().as_secs_f64();
    println!("demo run: {demo:.2} s ({} fits, verdict {})", res.verdict.n_fits, res.verdict.verdict);

    // The demo scenario with its own grid (four families), and with one.
    let full = root.join("demo-data/scenario.toml");
    for (label, extra) in [
        ("4 families (demo grid)", ""),
        ("1 family", "correlations = [\"exponential\"]"),
        ("1 family, 3 draws", "correlations = [\"exponential\"]\ndraws = 3"),
    ] {
        let (one, all) = per_study(d, &full, extra, studies, cores);
        println!(
            "{label}: {one:.2} s per study on its thread ({:.2} x demo run); 5 x {studies} studies on {cores} threads: {all:.2} s of wall clock per study ({:.2} x demo run); 5 x 100 studies: {:.1} min",
            one / demo,
            all / demo,
            500.0 * all / 60.0
        );
    }
}
