//! `potclim place PLAN`: propose positions for new loggers and name the
//! logger that could be moved at least cost (`[placement]` of a plan file,
//! `docs/planning.md`).

use crate::planner::placement::{Overrides, run as run_placement};
use crate::spatial::placement::Objective;
use anyhow::Context;
use std::path::PathBuf;

/// The long help of `potclim place`.
pub const HELP: &str = "Propose where new loggers should stand so that an indicator is known best at the pots: \
each new logger is chosen, given those before it, among a grid of candidate positions over the compartment \
(or a candidates table) as the one that lowers the mean (or the largest) kriging standard error at the pots \
most. Also costs taking each current logger away, and names the one that could be moved at least cost. \
The variogram is fitted from the study's logs by the mapping stage, or stated in the plan file for a \
compartment without logs. Writes plan.csv, plan_pots.csv and plan.html. The plan file is described in \
docs/planning.md.";

/// Arguments of `potclim place`.
#[derive(Debug, clap::Args)]
pub struct PlaceArgs {
    /// The plan file (TOML) with a `[placement]` section.
    pub plan: PathBuf,
    /// How many loggers to add (overrides `[placement] add`).
    #[arg(long, value_name = "K")]
    pub add: Option<usize>,
    /// Lower the `mean` or the `max` SE over the pots (overrides `[placement] objective`).
    #[arg(long, value_name = "WHICH", value_parser = ["mean", "max"])]
    pub objective: Option<String>,
}

/// Run `potclim place`.
pub fn run(args: PlaceArgs) -> anyhow::Result<()> {
    let plan = crate::planner::PlanFile::load(&args.plan)?;
    let over = Overrides { add: args.add, objective: args.objective.as_deref().and_then(Objective::parse) };
    let r =
        run_placement(&plan, over).with_context(|| format!("placing loggers for {}", args.plan.display()))?;
    let p = &r.page;
    let unit = p.unit.as_deref().map(|u| format!(" {u}")).unwrap_or_default();
    outln!(
        "now: {} loggers, mean SE {:.4}{unit}, largest {:.4}{unit} over {} pots",
        p.loggers.len(),
        p.mean_se_before,
        p.max_se_before,
        p.pots.len()
    );
    for (k, s) in p.added.iter().enumerate() {
        outln!(
            "add {}: {} at ({:.2}, {:.2}) m -> mean SE {:.4}{unit}, largest {:.4}{unit}",
            k + 1,
            s.id,
            s.x,
            s.y,
            s.mean_se.unwrap_or(f64::NAN),
            s.max_se.unwrap_or(f64::NAN)
        );
    }
    if let Some(id) = &p.least_cost {
        outln!("least cost to move: {id}");
    }
    outln!(
        "page: {}",
        r.files.iter().find(|f| f.ends_with("plan.html")).map_or(String::new(), |f| f.display().to_string())
    );
    Ok(())
}
