//! `potclim power PLAN`: the power of a layout to find a driver, and the
//! false-alarm rate without one, by simulating whole studies (`[power]` of a
//! plan file, `docs/planning.md`).

use crate::planner::power::{Overrides, run as run_power};
use anyhow::Context;
use std::io::IsTerminal as _;
use std::path::PathBuf;

/// The long help of `potclim power`.
pub const HELP: &str = "Would this layout find the driver? Simulates whole studies from a scenario (layout, design, \
loggers, draught, residual field) for each true effect of the driver on the trait and each number of loggers, \
analyses each as `potclim run` does, and reports the share of studies whose chosen model holds the driver \
(the power; the false-alarm rate when the effect is 0), the coverage of the driver's 95 % CI, each with a \
95 % Monte Carlo interval, and the time it took. Studies run on every core. Writes power.csv, \
power_studies.csv and power.html. The plan file is described in docs/planning.md.";

/// Arguments of `potclim power`.
#[derive(Debug, clap::Args)]
pub struct PowerArgs {
    /// The plan file (TOML) with a `[power]` section.
    pub plan: PathBuf,
    /// Simulated studies per point (overrides `[power] studies`).
    #[arg(long, value_name = "N")]
    pub studies: Option<usize>,
    /// Worker threads (overrides `[power] threads`; default every core).
    #[arg(long, value_name = "N")]
    pub threads: Option<usize>,
}

/// Run `potclim power`.
pub fn run(args: PowerArgs) -> anyhow::Result<()> {
    let plan = crate::planner::PlanFile::load(&args.plan)?;
    let show = std::io::stderr().is_terminal();
    let progress = move |done: usize, total: usize| {
        if show {
            eprint!("\rsimulated studies: {done} of {total}");
            if done == total {
                eprintln!();
            }
        }
    };
    let over = Overrides { studies: args.studies, threads: args.threads };
    let r = run_power(&plan, over, &progress)
        .with_context(|| format!("power study of {}", args.plan.display()))?;
    let p = &r.page;
    for q in &p.points {
        let what = if q.effect == 0.0 { "false alarms" } else { "found" };
        let iv =
            q.share_interval.map_or(String::new(), |(a, b)| format!(" (95 % MC interval {a:.3}-{b:.3})"));
        let cov = q.coverage.map_or("-".into(), |c| format!("{c:.3}"));
        outln!(
            "loggers {}, effect {}: {what} {}/{}{iv}; CI coverage {cov}; {} failed",
            q.loggers,
            q.effect,
            q.found,
            q.studies - q.failed,
            q.failed
        );
    }
    let n: usize = p.points.iter().map(|q| q.studies).sum();
    outln!(
        "{n} studies of {} pots in {:.1} s on {} threads ({:.2} s per study)",
        p.pots,
        p.seconds,
        p.threads,
        p.seconds / n.max(1) as f64
    );
    outln!(
        "page: {}",
        r.files.iter().find(|f| f.ends_with("power.html")).map_or(String::new(), |f| f.display().to_string())
    );
    Ok(())
}
