//! `potclim ingest STUDY`: clean and merge the logger exports.

use super::check::timefmt::span;
use crate::io::qc::Reason;
use anyhow::Context;
use std::path::PathBuf;

/// The long help of `potclim ingest`.
pub const HELP: &str = "Read every logger export named by the [[logs]] blocks of the study file, convert times to UTC and values to °C, % RH and µmol m⁻² s⁻¹ (PPFD), apply the quality-control rules of [qc], and write into the output folder:

  readings.parquet  one row per sensor and instant: sensor, time (UTC), temperature_c, rh_pct,
                    ppfd_umol_m2_s (null where a logger has no such channel or the value was flagged)
  qc_flags.csv      every reading not kept as is: file, line, sensor, time, variable, value, reason
  qc_summary.csv    per input file: rows_read = rows_kept + rows_flagged, and rows per reason
  gaps.csv          per sensor and channel, every interval without readings longer than
                    gap_factor (default 2) logging steps

Reasons: out_of_range, spike, stuck, duplicate, ambiguous_time, nonexistent_time, unparsable_time, unparsable_value, outside_period, unknown_sensor, malformed_row. A flagged value becomes null and the rest of its row is kept; rows without a usable time or sensor are dropped and listed. Line numbers are the files' own physical lines.

The four files appear together or not at all. Sensor ids missing from the sensor table stop the run with a list, unless --drop-unknown-sensors (or [qc] drop_unknown_sensors = true) is given. Thresholds and defaults: docs/study-file.md.";

/// Arguments of `potclim ingest`.
#[derive(Debug, clap::Args)]
pub struct IngestArgs {
    /// The study file (TOML).
    #[arg(value_name = "STUDY")]
    pub study: PathBuf,
    /// Flag and drop rows of sensors absent from the sensor table instead of stopping.
    #[arg(long)]
    pub drop_unknown_sensors: bool,
}

/// Run `potclim ingest`.
pub fn run(a: IngestArgs) -> anyhow::Result<()> {
    let mut study = crate::io::study::Study::load(&a.study)?;
    if a.drop_unknown_sensors {
        study.spec.qc.drop_unknown_sensors = true;
    }
    let ing = crate::io::ingest::ingest(&study)
        .with_context(|| format!("while ingesting {}", a.study.display()))?;
    let published = crate::io::ingest::write_outputs(&study, &ing)?;
    let read: usize = ing.files.iter().map(|f| f.rows_read).sum();
    let kept: usize = ing.files.iter().map(|f| f.rows_kept).sum();
    let flagged: usize = ing.files.iter().map(|f| f.rows_flagged).sum();
    outln!("{} file(s), {read} rows read: {kept} kept as is, {flagged} with flags", ing.files.len());
    let h = ing.readings.height();
    let sensors = ing.readings.column("sensor").ok().and_then(|c| c.n_unique().ok()).unwrap_or(0);
    outln!("readings: {h} rows from {sensors} sensor(s)");
    if let Some((lo, hi)) = ing.span {
        outln!("time span: {}", span(lo, hi));
    }
    let mut by_reason = [0usize; Reason::ALL.len()];
    for f in &ing.flags {
        by_reason[f.reason as usize] += 1;
    }
    for (r, n) in Reason::ALL.iter().zip(by_reason) {
        if n > 0 {
            outln!("  {:<17} {n} flag(s)", r.name());
        }
    }
    outln!("gaps: {}", ing.gaps.len());
    for p in published {
        outln!("wrote {}", p.display());
    }
    Ok(())
}
