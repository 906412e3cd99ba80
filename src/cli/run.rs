//! `potclim run STUDY`: the whole job in one command. The work is
//! [`crate::pipeline::run`]; this file parses the arguments, shows progress
//! and prints the outcome.
//!
//! What goes where: the outcome (the verdict word, its reason, the chosen
//! model, pots left out, the report's path) goes to standard output in every
//! case, so that `potclim run study.toml > log.txt` keeps it; progress (a
//! spinner per stage, a bar with fits done of the total and the time left for
//! the comparison grid and the imputations) goes to standard error, and only
//! when standard error is a terminal.

use crate::io::study::Study;
use crate::model::progress::FitProgress;
use crate::pipeline::{Progress, RunResults, Stage};
use anyhow::Context;
use clap::Args;
use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};
use std::io::IsTerminal;
use std::path::PathBuf;
use std::sync::Mutex;
use std::time::Duration;

/// Long help of `potclim run`.
pub const HELP: &str = "Run the whole analysis of a study, from raw logger files to one report.

Every section of the study file and the pot and sensor tables are validated first (as `potclim check` does), so a mistake stops the run before any work.

Stages, each publishing its files into the output folder ([study].output):
  1. ingest   readings.parquet, qc_flags.csv, qc_summary.csv, gaps.csv
  2. climate  sensor_indicators.csv, sensor_daily.parquet
  3. map      pot_covariates.csv, variograms.csv, variogram_fits.csv, variogram_ml_fits.csv,
              mapping_cv.csv
  4. verdict  summary.json, comparison.csv, drivers.csv, adjusted_means.csv
  5. report   report.html, report_data.json

Standard output gets the outcome: one line per stage, the verdict, its reason, the chosen model, the pots left out and the report's path. Progress is drawn on standard error when it is a terminal.

Each stage can also be run alone (potclim ingest / climate / map / verdict / report).";

/// Arguments of `potclim run`.
#[derive(Debug, Args)]
pub struct RunArgs {
    /// The study file (study.toml).
    pub study: PathBuf,
    /// Do not draw progress on the terminal.
    #[arg(long)]
    pub quiet: bool,
    /// Print where the time went: seconds per stage, and per error model the
    /// fits, likelihood evaluations and covariance factorisations (also in
    /// summary.json, `timings`).
    #[arg(long)]
    pub timings: bool,
}

/// Progress on standard error: a spinner per stage, a bar per counted task.
/// Drawn only when `draw` is set (standard error is a terminal and not
/// `--quiet`); otherwise every call is a no-op.
/// Keeps each finished stage's summary line for standard output.
struct Terminal {
    draw: bool,
    stage: Mutex<Option<ProgressBar>>,
    task: Mutex<Option<ProgressBar>>,
    summaries: Mutex<Vec<String>>,
}

impl Terminal {
    fn new(draw: bool) -> Terminal {
        Terminal { draw, stage: Mutex::new(None), task: Mutex::new(None), summaries: Mutex::new(Vec::new()) }
    }

    fn bar(&self, len: Option<u64>) -> ProgressBar {
        let target = if self.draw { ProgressDrawTarget::stderr() } else { ProgressDrawTarget::hidden() };
        match len {
            Some(n) => ProgressBar::with_draw_target(Some(n), target),
            None => ProgressBar::with_draw_target(None, target),
        }
    }
}

impl FitProgress for Terminal {
    fn begin(&self, what: &str, total: usize) {
        if !self.draw {
            return;
        }
        if let Some(s) = self.stage.lock().expect("progress lock").as_ref() {
            s.set_message(what.to_string());
        }
        let b = self.bar(Some(total as u64));
        b.set_style(
            ProgressStyle::with_template("      {msg} [{bar:30}] {pos} of {len} done, about {eta} left")
                .expect("template")
                .progress_chars("=> "),
        );
        b.set_message(what.to_string());
        *self.task.lock().expect("progress lock") = Some(b);
    }

    fn step(&self) {
        if let Some(b) = self.task.lock().expect("progress lock").as_ref() {
            b.inc(1);
        }
    }

    fn end(&self) {
        if let Some(b) = self.task.lock().expect("progress lock").take() {
            b.finish_and_clear();
        }
    }
}

impl Progress for Terminal {
    fn stage_started(&self, stage: Stage) {
        if !self.draw {
            return;
        }
        let b = self.bar(None);
        b.set_style(
            ProgressStyle::with_template("{spinner} [{prefix}] {msg} ({elapsed})").expect("template"),
        );
        b.set_prefix(format!("{}/{}", stage.number(), Stage::ALL.len()));
        b.set_message(stage.doing().to_string());
        b.enable_steady_tick(Duration::from_millis(120));
        *self.stage.lock().expect("progress lock") = Some(b);
    }

    fn stage_finished(&self, _stage: Stage, summary: &str, seconds: f64) {
        if let Some(b) = self.stage.lock().expect("progress lock").take() {
            b.finish_and_clear();
        }
        self.summaries.lock().expect("progress lock").push(format!("{summary} [{seconds:.1} s]"));
    }
}

/// Run every stage and print the outcome.
pub fn run(args: RunArgs) -> anyhow::Result<()> {
    let study = Study::load(&args.study)
        .with_context(|| format!("while reading the study file {}", args.study.display()))?;
    let terminal = Terminal::new(!args.quiet && std::io::stderr().is_terminal());
    let result = crate::pipeline::run(&study, &terminal);
    // Clear whatever an error left drawn, then print the stages that finished.
    terminal.end();
    if let Some(b) = terminal.stage.lock().expect("progress lock").take() {
        b.finish_and_clear();
    }
    for line in terminal.summaries.lock().expect("progress lock").iter() {
        outln!("{line}");
    }
    let r = result?;
    print_outcome(&r)?;
    if args.timings {
        outln!();
        for line in r.verdict.timings.table().lines() {
            outln!("{line}");
        }
        outln!("whole run: {:.3} s", r.seconds);
    }
    Ok(())
}

/// The outcome on standard output, after the stage lines.
fn print_outcome(r: &RunResults) -> anyhow::Result<()> {
    let v = &r.verdict;
    if let Some(m) = &r.map.moves {
        for line in m.lines() {
            outln!("{line}");
        }
    }
    outln!();
    outln!("verdict: {}", v.verdict);
    outln!("reason: {}", v.reason);
    outln!("chosen model: {}", v.best_model);
    if !v.left_out.is_empty() {
        let list: Vec<String> = v.left_out.iter().map(|p| format!("{} (line {})", p.pot, p.line)).collect();
        outln!(
            "left out: {} pot(s) because `{}` is missing: {}",
            v.left_out.len(),
            v.trait_name,
            list.join(", ")
        );
    }
    outln!("report: {}", r.report_path.display());
    Ok(())
}
