//! The command line: the only module that knows about clap. Each subcommand
//! lives in its own file, parses its arguments into domain types, calls the
//! library and prints a short human summary. Errors from the stages are
//! printed with their full chain (`{:#}`) and mapped to exit code 1; usage
//! errors exit with 2.

use clap::{Parser, Subcommand};

mod climate;

/// Greenhouse microclimate and pot-trait analysis, from raw logger files to one report.
#[derive(Debug, Parser)]
#[command(name = "potclim", version, about, long_about = None)]
pub struct Cli {
    /// What to do.
    #[command(subcommand)]
    pub command: Command,
}

/// The subcommands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Climate indicators per sensor and local day (reads <output>/readings.parquet).
    Climate(climate::ClimateArgs),
}

/// Run the command line and return the process exit code.
pub fn main_entry() -> i32 {
    let cli = match Cli::try_parse() {
        Ok(c) => c,
        Err(e) => {
            let code = if e.use_stderr() { 2 } else { 0 };
            let _ = e.print();
            return code;
        }
    };
    match run(cli) {
        Ok(()) => 0,
        Err(e) => {
            eprintln!("error: {e:#}");
            1
        }
    }
}

/// Dispatch a parsed command line.
pub fn run(cli: Cli) -> anyhow::Result<()> {
    match cli.command {
        Command::Climate(args) => climate::run(args),
    }
}
