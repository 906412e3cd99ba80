//! `potclim climate STUDY`: climate indicators per sensor and local day, from
//! the readings table the ingest stage wrote into the output folder.

use crate::climate::stage::{self, ClimateRun};
use crate::io::study::Study;
use anyhow::Context;
use clap::Args;
use std::path::PathBuf;

/// Arguments of `potclim climate`.
#[derive(Debug, Args)]
pub struct ClimateArgs {
    /// The study file (study.toml).
    pub study: PathBuf,
}

/// Run the climate stage and print a short table.
pub fn run(args: ClimateArgs) -> anyhow::Result<()> {
    let study = Study::load(&args.study)
        .with_context(|| format!("while reading the study file {}", args.study.display()))?;
    let (run, published) = stage::run(&study).context("in the climate stage")?;
    out!("{}", summary(&run));
    for p in published {
        outln!("wrote {}", p.display());
    }
    Ok(())
}

/// The short table printed after a run: one row per indicator with its unit,
/// the range over sensors of the study-period value, and the days without a
/// value.
pub fn summary(run: &ClimateRun) -> String {
    let cal = &run.calendar;
    let mut s = format!(
        "{} sensors, {} days ({} to {}), {} steps of {} min; {} readings used",
        run.grid.sensors.len(),
        cal.days.len(),
        cal.days.first().map(|d| d.to_string()).unwrap_or_default(),
        cal.days.last().map(|d| d.to_string()).unwrap_or_default(),
        cal.n_steps,
        cal.step_ms / 60_000,
        run.report.readings_used,
    );
    if run.report.readings_outside > 0 {
        s.push_str(&format!(", {} outside the study period not used", run.report.readings_outside));
    }
    s.push('\n');
    let width = run.config.indicators.iter().map(|i| i.name.len()).max().unwrap_or(9).max(9);
    s.push_str(&format!(
        "{:<width$}  {:<12}  {:>10}  {:>10}  {:>12}\n",
        "indicator", "unit", "min", "max", "missing days"
    ));
    for (i, ind) in run.config.indicators.iter().enumerate() {
        let vals: Vec<f64> = run.study[i].iter().filter_map(|w| w.value).collect();
        let lo = vals.iter().copied().min_by(f64::total_cmp);
        let hi = vals.iter().copied().max_by(f64::total_cmp);
        let missing: usize = run.study[i].iter().map(|w| w.missing_days.len()).sum();
        let f = |v: Option<f64>| v.map(|x| format!("{x:.2}")).unwrap_or_else(|| "-".into());
        s.push_str(&format!(
            "{:<width$}  {:<12}  {:>10}  {:>10}  {:>12}\n",
            ind.name,
            ind.unit(),
            f(lo),
            f(hi),
            missing
        ));
    }
    s
}
