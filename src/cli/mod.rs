//! The command line: the only module that knows about clap. Each subcommand
//! lives in its own file, parses its arguments into domain types, calls the
//! library and prints a short human summary. Errors from the stages are
//! printed with their full chain (`{:#}`) and mapped to exit code 1; usage
//! errors exit with 2. Everything meant for the user's eyes or a script
//! goes to standard output through `outln!`/`out!`, which return a write
//! error instead of panicking: a reader that closes the pipe early
//! (`potclim check study.toml | head`) ends the command quietly with status 0.
//! Progress goes to standard error, and only on a terminal.

/// `println!` to standard output that returns (with `?`) the write error
/// instead of panicking; see [`main_entry`] for a closed pipe.
macro_rules! outln {
    () => {{
        use std::io::Write as _;
        writeln!(std::io::stdout().lock())?
    }};
    ($($arg:tt)*) => {{
        use std::io::Write as _;
        writeln!(std::io::stdout().lock(), $($arg)*)?
    }};
}

/// `print!` to standard output; see `outln!`.
macro_rules! out {
    ($($arg:tt)*) => {{
        use std::io::Write as _;
        write!(std::io::stdout().lock(), $($arg)*)?
    }};
}

mod simulate;

use clap::{Parser, Subcommand};

mod check;
mod climate;
mod fit;
mod ingest;
mod init;
mod map;
mod place;
mod power;
mod report;
mod run;
mod verdict;

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
    /// Write a synthetic study with known truth from a scenario file.
    #[command(long_about = simulate::LONG_ABOUT)]
    Simulate(simulate::SimulateArgs),
    /// Write a commented study-file template to start a new analysis.
    #[command(long_about = init::HELP)]
    Init(init::InitArgs),
    /// Validate every input of a study and print a short inventory.
    #[command(long_about = check::HELP)]
    Check(check::CheckArgs),
    /// Merge and clean the logger exports into one audited table of readings.
    #[command(long_about = ingest::HELP)]
    Ingest(ingest::IngestArgs),
    /// Fit the trait models of `[model]`: OLS and ANOVA, and GLS with spatially correlated residuals by ML and REML.
    Fit(fit::FitArgs),
    /// Map the climate indicators onto every pot by kriging, with standard errors.
    #[command(long_about = map::HELP)]
    Map(map::MapArgs),
    /// Run the whole analysis: ingest, climate, map, verdict and report.
    #[command(long_about = run::HELP)]
    Run(run::RunArgs),
    /// Decide between a measured climate driver and a spatially correlated residual; rank drivers; adjusted means.
    Verdict(verdict::VerdictArgs),
    /// Redraw report.html from the report_data.json of an earlier run.
    Report(report::ReportArgs),
    /// Climate indicators per sensor and local day (reads readings.parquet in the output folder).
    Climate(climate::ClimateArgs),
    /// Propose where new loggers should stand, and which logger could be moved at least cost.
    #[command(long_about = place::HELP)]
    Place(place::PlaceArgs),
    /// Would a layout find a driver? Power and false-alarm rate by simulating whole studies.
    #[command(long_about = power::HELP)]
    Power(power::PowerArgs),
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
    let result = run(cli).and_then(|()| {
        use std::io::Write as _;
        Ok(std::io::stdout().flush()?)
    });
    match result {
        Ok(()) => 0,
        Err(e) if is_broken_pipe(&e) => 0,
        Err(e) => {
            eprintln!("error: {e:#}");
            1
        }
    }
}

/// True when the error is standard output closed by its reader (`| head`):
/// not an error of potclim, so the command ends quietly with status 0.
fn is_broken_pipe(e: &anyhow::Error) -> bool {
    e.chain().any(|c| {
        c.downcast_ref::<std::io::Error>().is_some_and(|io| io.kind() == std::io::ErrorKind::BrokenPipe)
    })
}

/// Dispatch a parsed command line.
pub fn run(cli: Cli) -> anyhow::Result<()> {
    match cli.command {
        Command::Simulate(a) => simulate::run(a),
        Command::Init(a) => init::run(a),
        Command::Check(a) => check::run(a),
        Command::Ingest(a) => ingest::run(a),
        Command::Fit(args) => fit::run(args),
        Command::Map(args) => map::run(args),
        Command::Run(args) => run::run(args),
        Command::Verdict(args) => verdict::run(args),
        Command::Report(args) => report::run(args),
        Command::Climate(args) => climate::run(args),
        Command::Place(args) => place::run(args),
        Command::Power(args) => power::run(args),
    }
}
