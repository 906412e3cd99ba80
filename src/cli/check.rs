//! `potclim check STUDY`: validate every input and print a short inventory.

use anyhow::Context;
use std::path::PathBuf;
use timefmt::{span, utc};

/// The long help of `potclim check`.
pub const HELP: &str = "Validate every input of a study without computing anything heavy: the study file (unknown keys, units, time zones, time patterns), the pot table, the sensor table, and every logger export matched by the [[logs]] globs (the header's columns, and the first and last 200 rows parsed with the block's delimiter, decimal mark, time format and zone).

Prints the number of pots and sensors, each export with its row count and time span, sensor ids missing from the sensor table, and the pot table's factor columns with their level counts and a count table for every pair of factors, so that an unbalanced design shows before any model is fitted.

Exits with status 1 and a message naming file, line and column at the first problem.";

/// Arguments of `potclim check`.
#[derive(Debug, clap::Args)]
pub struct CheckArgs {
    /// The study file (TOML).
    #[arg(value_name = "STUDY")]
    pub study: PathBuf,
}

/// Small formatting helpers shared by `check` and `ingest`.
pub(crate) mod timefmt {
    /// UTC milliseconds as `2026-03-01 08:00Z`.
    pub fn utc(ms: i64) -> String {
        chrono::DateTime::from_timestamp_millis(ms)
            .map(|t| t.format("%Y-%m-%d %H:%M").to_string() + "Z")
            .unwrap_or_default()
    }
    /// A span of UTC milliseconds.
    pub fn span(a: i64, b: i64) -> String {
        format!("{} .. {} ({:.1} days)", utc(a), utc(b), (b - a) as f64 / 86_400_000.0)
    }
}

/// Run `potclim check`.
pub fn run(a: CheckArgs) -> anyhow::Result<()> {
    let study = crate::io::study::Study::load(&a.study)?;
    let inv = crate::io::inventory::inventory(&study)
        .with_context(|| format!("while checking {}", a.study.display()))?;
    println!("study: {} ({})", study.spec.study.title, study.path.display());
    println!("time zone: {}", study.timezone);
    println!("pots: {}", inv.pots);
    match inv.sensors {
        Some(n) => println!("sensors: {n}"),
        None => println!("sensors: none (no [sensors] table)"),
    }
    match (inv.period.start, inv.period.end) {
        (None, None) => println!("study period: not set ([climate] start/end)"),
        (s, e) => println!(
            "study period: {} .. {}",
            s.map(utc).unwrap_or_else(|| "open".into()),
            e.map(utc).unwrap_or_else(|| "open".into())
        ),
    }
    let mut overall: Option<(i64, i64)> = None;
    let mut warnings = 0;
    for (i, files) in inv.logs.iter().enumerate() {
        println!("logs[{}]: {} file(s)", i + 1, files.len());
        for f in files {
            let s = f.span.map(|(a, b)| span(a, b)).unwrap_or_else(|| "no readable time".into());
            let ids: Vec<&str> = f.sensors.iter().map(String::as_str).collect();
            let shown = if ids.len() > 6 {
                format!("{}, ... ({} ids)", ids[..6].join(", "), ids.len())
            } else {
                ids.join(", ")
            };
            println!("  {}: {} rows, {s}, sensors: {shown}", f.name, f.lines);
            if f.sample_flags > 0 {
                println!("    {} reading(s) in the sampled rows would be flagged", f.sample_flags);
            }
            if f.mostly_flagged() {
                warnings += 1;
                println!(
                    "warning: {} of {} sampled rows of {} would be flagged",
                    f.flagged_rows, f.sample_rows, f.name
                );
                if let Some((cause, fix)) = f.cause_and_fix(i + 1) {
                    println!("  cause: {cause}");
                    println!("  fix: {fix}");
                }
            }
            if let Some((a, b)) = f.span {
                overall = Some(overall.map_or((a, b), |(x, y)| (x.min(a), y.max(b))));
            }
        }
    }
    if let Some((a, b)) = overall {
        println!("time span of the logs (first and last rows): {}", span(a, b));
    }
    if !inv.unknown_sensors.is_empty() {
        let ids: Vec<&str> = inv.unknown_sensors.iter().map(String::as_str).collect();
        println!(
            "warning: sensor id(s) in the logs but not in the sensor table: {} (ingest will stop unless [qc] drop_unknown_sensors = true)",
            ids.join(", ")
        );
    }
    if inv.factors.is_empty() {
        println!("factors: none found (text columns of the pot table with repeated levels)");
    }
    for f in &inv.factors {
        let lv: Vec<String> = f.levels.iter().map(|(l, n)| format!("{l} ({n})")).collect();
        println!("factor {}: {} levels: {}", f.name, f.levels.len(), lv.join(", "));
    }
    for t in &inv.crosstabs {
        println!("pots by {} x {}:", t.rows, t.cols);
        let w0 =
            t.row_levels.iter().map(|l| l.chars().count()).max().unwrap_or(0).max(t.rows.chars().count());
        let widths: Vec<usize> = t.col_levels.iter().map(|l| l.chars().count().max(3)).collect();
        let mut head = format!("  {:w0$}", t.rows);
        for (l, w) in t.col_levels.iter().zip(&widths) {
            head.push_str(&format!("  {l:>w$}"));
        }
        println!("{head}");
        for (i, rl) in t.row_levels.iter().enumerate() {
            let mut line = format!("  {rl:w0$}");
            for (j, w) in widths.iter().enumerate() {
                line.push_str(&format!("  {:>w$}", t.counts[i][j]));
            }
            println!("{line}");
        }
    }
    if warnings > 0 {
        println!(
            "checked with {warnings} warning(s): fix the blocks named above before ingesting, or most of those rows will be dropped"
        );
    } else {
        println!("ok: every input is readable");
    }
    Ok(())
}
