//! `potclim simulate`: write a synthetic study with known truth from a
//! scenario file.

use anyhow::Context;
use std::path::PathBuf;

/// The long help of `potclim simulate`.
pub const LONG_ABOUT: &str = "Write a synthetic study with known truth from a scenario file: the pot table, the sensor \
table, logger exports in several formats with injected faults, a study.toml that the other commands read, \
and truth/ (the true climate components and indicator values at every pot, the true effects, the true \
sensor readings and every injected fault). The same scenario and seed give byte-identical files on every \
machine. Scenario keys are documented in docs/simulate.md; demo-data/scenario.toml is a full example.";

/// Arguments of `potclim simulate`.
#[derive(Debug, clap::Args)]
pub struct SimulateArgs {
    /// The scenario file (TOML).
    pub scenario: PathBuf,
    /// Output folder; created if missing, files in it are replaced.
    #[arg(long, value_name = "DIR")]
    pub out: PathBuf,
    /// Seed of every random step (default: `[scenario].seed`, else 1).
    #[arg(long, value_name = "N")]
    pub seed: Option<u64>,
}

/// Run `potclim simulate`.
pub fn run(args: SimulateArgs) -> anyhow::Result<()> {
    let s = crate::simulate::run(&args.scenario, &args.out, args.seed)
        .with_context(|| format!("simulating {}", args.scenario.display()))?;
    outln!(
        "wrote {} files ({:.1} MB) to {}: {} pots, {} loggers, {} injected faults listed in truth/faults.csv",
        s.files.len(),
        s.bytes as f64 / 1e6,
        args.out.display(),
        s.pots,
        s.loggers,
        s.faults
    );
    Ok(())
}
