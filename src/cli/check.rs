//! `potclim check STUDY`: validate every input and print a short inventory.

use anyhow::Context;
use std::path::PathBuf;
use timefmt::{span, utc};

/// The long help of `potclim check`.
pub const HELP: &str = "Validate every input of a study without computing anything heavy: every section of the study file as `potclim run` reads it before any work ([climate] and at least one [[indicator]], [mapping], [model] with its trait, factors, blocks and drivers checked against the pot table, the indicators and the openings, [verdict]; unknown keys, units, time zones, time patterns), the pot table, the sensor table, and every logger export matched by the [[logs]] globs (the header's columns, the sensor ids of every row, and the first and last 200 rows parsed with the block's delimiter, decimal mark, time format and zone), then every row read and each indicator computed in memory (nothing is written), so that an indicator no sensor has on any valid day is refused here.

Prints the number of pots and sensors (and which sensors have no readings in any export), how many sensors have a value of each indicator, each export with its row count and time span, sensor ids missing from the sensor table, the trait's pots left out for a missing value, the reference level of each model factor, and the pot table's factor columns with their level counts and a count table for every pair of factors, so that an unbalanced design shows before any model is fitted.

Exits with status 1 and a message naming file, line and column at the first problem: whatever `potclim run` would refuse, `check` refuses first.";

/// Arguments of `potclim check`.
#[derive(Debug, clap::Args)]
pub struct CheckArgs {
    /// The study file (TOML).
    #[arg(value_name = "STUDY")]
    pub study: PathBuf,
    /// Instead of checking, read the exports matched by the [[logs]] globs and print a [[logs]] block for each format found (see `potclim init --logs`).
    #[arg(long)]
    pub suggest: bool,
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
    if a.suggest {
        return suggest(&study);
    }
    let plan = crate::pipeline::Plan::from_study(&study)
        .with_context(|| format!("while checking {}", a.study.display()))?;
    let inv = crate::io::inventory::inventory(&study)
        .with_context(|| format!("while checking {}", a.study.display()))?;
    outln!("study: {} ({})", study.spec.study.title, study.path.display());
    outln!("time zone: {}", study.timezone);
    outln!("pots: {}", inv.pots);
    match inv.sensors {
        Some(n) => outln!("sensors: {n} in the sensor table, {} with readings", n - inv.silent_sensors.len()),
        None => outln!("sensors: none (no [sensors] table)"),
    }
    if !inv.silent_sensors.is_empty() {
        outln!(
            "warning: no readings from {} sensor(s) of the sensor table (no row in any export): {}; nothing is mapped from them",
            inv.silent_sensors.len(),
            inv.silent_sensors.join(", ")
        );
    }
    match (inv.period.start, inv.period.end) {
        (None, None) => outln!("study period: not set ([climate] start/end)"),
        (s, e) => outln!(
            "study period: {} .. {}",
            s.map(utc).unwrap_or_else(|| "open".into()),
            e.map(utc).unwrap_or_else(|| "open".into())
        ),
    }
    let mut overall: Option<(i64, i64)> = None;
    let mut warnings = 0;
    for (i, files) in inv.logs.iter().enumerate() {
        outln!("logs[{}]: {} file(s)", i + 1, files.len());
        for f in files {
            let s = f.span.map(|(a, b)| span(a, b)).unwrap_or_else(|| "no readable time".into());
            let ids: Vec<&str> = f.sensors.iter().map(String::as_str).collect();
            let shown = if ids.len() > 6 {
                format!("{}, ... ({} ids)", ids[..6].join(", "), ids.len())
            } else {
                ids.join(", ")
            };
            outln!("  {}: {} rows, {s}, sensors: {shown}", f.name, f.lines);
            if f.sample_flags > 0 {
                outln!("    {} reading(s) in the sampled rows would be flagged", f.sample_flags);
            }
            if f.mostly_flagged() {
                warnings += 1;
                outln!(
                    "warning: {} of {} sampled rows of {} would be flagged",
                    f.flagged_rows,
                    f.sample_rows,
                    f.name
                );
                if let Some((cause, fix)) = f.cause_and_fix(i + 1) {
                    outln!("  cause: {cause}");
                    outln!("  fix: {fix}");
                }
            }
            if let Some((a, b)) = f.span {
                overall = Some(overall.map_or((a, b), |(x, y)| (x.min(a), y.max(b))));
            }
        }
    }
    if let Some((a, b)) = overall {
        outln!("time span of the logs (first and last rows): {}", span(a, b));
    }
    if !inv.unknown_sensors.is_empty() {
        let ids: Vec<&str> = inv.unknown_sensors.iter().map(String::as_str).collect();
        outln!(
            "warning: sensor id(s) in the logs but not in the sensor table: {} (ingest will stop unless [qc] drop_unknown_sensors = true)",
            ids.join(", ")
        );
    }
    if let Some(sc) = &plan.scores {
        let missing: usize = sc.missing.iter().map(|m| m.lines.len()).sum();
        let intervals = sc.intervals(&plan.pots.ids).intervals.len();
        outln!(
            "scores: {} row(s) of {} at {} time(s), traits {}, {intervals} interval(s) ({}), {missing} missing value(s)",
            sc.rows.len(),
            sc.path.display(),
            sc.n_times(),
            sc.traits.join(", "),
            sc.rule.name()
        );
        for m in sc.missing.iter().filter(|m| !m.lines.is_empty()) {
            let shown: Vec<String> = m.lines.iter().take(10).map(|l| l.to_string()).collect();
            outln!(
                "  `{}` missing on line(s) {}{}",
                m.trait_name,
                shown.join(", "),
                if m.lines.len() > 10 { ", ..." } else { "" }
            );
        }
    }
    print_model(&plan)?;
    if warnings == 0 && inv.unknown_sensors.is_empty() {
        indicators_in_memory(&study, &plan)
            .with_context(|| format!("while checking {}", a.study.display()))?;
    }
    if inv.factors.is_empty() {
        outln!("factors: none found (text columns of the pot table with repeated levels)");
    }
    for f in &inv.factors {
        let lv: Vec<String> = f.levels.iter().map(|(l, n)| format!("{l} ({n})")).collect();
        outln!("factor {}: {} levels: {}", f.name, f.levels.len(), lv.join(", "));
    }
    for t in &inv.crosstabs {
        outln!("pots by {} x {}:", t.rows, t.cols);
        let w0 =
            t.row_levels.iter().map(|l| l.chars().count()).max().unwrap_or(0).max(t.rows.chars().count());
        let widths: Vec<usize> = t.col_levels.iter().map(|l| l.chars().count().max(3)).collect();
        let mut head = format!("  {:w0$}", t.rows);
        for (l, w) in t.col_levels.iter().zip(&widths) {
            head.push_str(&format!("  {l:>w$}"));
        }
        outln!("{head}");
        for (i, rl) in t.row_levels.iter().enumerate() {
            let mut line = format!("  {rl:w0$}");
            for (j, w) in widths.iter().enumerate() {
                line.push_str(&format!("  {:>w$}", t.counts[i][j]));
            }
            outln!("{line}");
        }
    }
    if warnings > 0 {
        outln!(
            "checked with {warnings} warning(s): fix the blocks named above before ingesting, or most of those rows will be dropped"
        );
    } else {
        outln!("ok: every input is readable and every section is ready for `potclim run`");
    }
    Ok(())
}

/// The cheap part of `run` on every row: read each export in full and
/// compute the indicators in memory (nothing is written; a few tenths of a
/// second on the demo), so that an indicator no sensor has on any valid day
/// is refused here, as `run` refuses it at its climate stage, rather than
/// found only after mapping. Skipped when the sampled rows already gave a
/// warning (the blocks named there are to be fixed first).
fn indicators_in_memory(study: &crate::io::study::Study, plan: &crate::pipeline::Plan) -> anyhow::Result<()> {
    let ing = crate::io::ingest::ingest(study)?;
    let path = study.output_dir().join(crate::io::ingest::READINGS_FILE);
    let climate = crate::climate::stage::compute(study, plan.climate.clone(), &ing.readings, &path)?;
    for (i, ind) in climate.config.indicators.iter().enumerate() {
        let with = climate.study[i].iter().filter(|w| w.value.is_some()).count();
        outln!(
            "indicator {}: a value at {with} of {} sensor(s) with readings",
            ind.name,
            climate.grid.sensors.len()
        );
    }
    Ok(())
}

/// `check --suggest`: detected blocks for the files of the study's
/// `[[logs]]` globs, printed (the study file is not changed).
fn suggest(study: &crate::io::study::Study) -> anyhow::Result<()> {
    let base = study.path.parent().map(std::path::Path::to_path_buf).unwrap_or_default();
    let mut files = Vec::new();
    for (i, log) in study.spec.logs.iter().enumerate() {
        for pat in &log.files {
            let full = study.resolve(pat).to_string_lossy().into_owned();
            let found: Vec<PathBuf> = glob::glob(&full)
                .with_context(|| format!("logs[{}].files: `{pat}` is not a valid glob pattern", i + 1))?
                .filter_map(|p| p.ok())
                .filter(|p| p.is_file())
                .collect();
            if found.is_empty() {
                outln!("note: logs[{}].files: `{pat}` matches no file", i + 1);
            }
            files.extend(found);
        }
    }
    files.sort();
    files.dedup();
    if files.is_empty() {
        anyhow::bail!(
            "no export matched by the [[logs]] globs of {}; nothing to suggest",
            study.path.display()
        );
    }
    let (blocks, groups, errors) = crate::io::detect::suggest(&files, &base);
    if !groups.is_empty() {
        outln!("# Suggested [[logs]] blocks for {} (paths relative to its folder):", study.path.display());
        outln!("{}", blocks.trim_end());
        outln!();
    }
    super::init::print_detection(&groups, &errors)?;
    if !errors.is_empty() {
        anyhow::bail!("{} file(s) not recognised (named above)", errors.len());
    }
    Ok(())
}

/// What the model will analyse: the trait's pots, the pots left out, the
/// drivers by source and each factor's reference level.
fn print_model(plan: &crate::pipeline::Plan) -> anyhow::Result<()> {
    let d = &plan.pot_data;
    outln!("trait {}: {} pots with a value", d.trait_name, d.response.len());
    if !d.excluded.is_empty() {
        let list: Vec<String> = d.excluded.iter().map(|(id, line)| format!("{id} (line {line})")).collect();
        outln!(
            "note: {} pot(s) will be left out because `{}` is missing: {}",
            d.excluded.len(),
            d.trait_name,
            list.join(", ")
        );
    }
    let mapped = &plan.mapped;
    let drivers: Vec<String> = plan
        .model
        .drivers
        .iter()
        .map(|name| match mapped.iter().find(|(n, _)| n == name) {
            Some((_, kind)) => format!("{name} ({kind})"),
            None => format!("{name} (pot table)"),
        })
        .collect();
    if !drivers.is_empty() {
        outln!("drivers: {}", drivers.join(", "));
    }
    let factors: Vec<String> =
        d.blocks.iter().chain(&d.factors).map(|f| format!("{} = {}", f.name, f.levels[0])).collect();
    if let (false, Some(line)) = (factors.is_empty(), d.lines.first()) {
        outln!(
            "reference levels (first appearance among the analysed pots: pot {}, line {line}): {}",
            d.pots[0],
            factors.join(", ")
        );
    }
    Ok(())
}
