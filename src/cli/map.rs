//! `potclim map STUDY`: every declared indicator at every pot, with standard
//! errors, from the readings table in the output folder; plus the distance of
//! every pot to every opening.

use crate::io::study::Study;
use crate::spatial::stage::{self, MapRun};
use anyhow::Context;
use clap::Args;
use std::path::PathBuf;

/// Long help of `potclim map`.
pub const HELP: &str = "Map the climate indicators onto every pot.

For each climate variable the indicators need, potclim fits the pooled variogram of the loggers' \
per-step anomalies for every family in [mapping].families, scores ordinary kriging, universal \
kriging, kriging with an external drift (when [mapping].drift names an opening), inverse-distance \
weighting and the nearest sensor by leave-one-sensor-out cross-validation, and maps the whole \
series onto every pot with the chosen method. Each pot's indicators are then computed from its own \
mapped series over its own growth window ([pots].start/end).

Reads <output>/readings.parquet (run `potclim ingest STUDY` first). Writes pot_covariates.csv, \
variograms.csv, variogram_fits.csv, variogram_ml_fits.csv, mapping_cv.csv, mapping_check.csv and mapping_se.csv into the output folder; with a move table ([pots] moves) every position \
ever held is mapped, each pot's indicators come from its series along its path, pot_paths.csv gives each \
pot's time share of each position, pot_paths_exposure.csv each pot's drivers along its path and at its starting \
position, and paths_spread.csv the spread of each driver across the pots with and without the moves.";

/// Arguments of `potclim map`.
#[derive(Debug, Args)]
pub struct MapArgs {
    /// The study file (study.toml).
    pub study: PathBuf,
}

/// Run the mapping stage and print what was chosen.
pub fn run(args: MapArgs) -> anyhow::Result<()> {
    let study = Study::load(&args.study)
        .with_context(|| format!("while reading the study file {}", args.study.display()))?;
    let (run, published) = stage::run(&study).context("in the mapping stage")?;
    out!("{}", summary(&run));
    for p in published {
        outln!("wrote {}", p.display());
    }
    Ok(())
}

/// What the mapping chose, one line per variable, then the indicators' ranges.
pub fn summary(run: &MapRun) -> String {
    let mut s = format!("{} pots, {} sensors\n", run.pots.len(), run.sensor_points.len());
    for v in &run.variables {
        let family = v.chosen_family.map(|f| f.name()).unwrap_or_else(|| "fallback".into());
        let m = &v.spec.model;
        s.push_str(&format!(
            "{:<12} {} with {} variogram (nugget {:.4}, partial sill {:.4}, range {:.3} m)\n",
            v.name,
            v.spec.method.name(),
            family,
            m.nugget,
            m.partial_sill,
            m.range
        ));
        if let Some((_, why)) = &v.choice {
            s.push_str(&format!("             {why}\n"));
        }
        for w in &v.warnings {
            s.push_str(&format!("             warning: {w}\n"));
        }
    }
    if let Some(m) = &run.moves {
        for line in m.lines() {
            s.push_str(&line);
            s.push('\n');
        }
    }
    for r in run.routes.iter().flatten() {
        s.push_str(&format!("route        {}\n", r.reason()));
    }
    for c in run.checks.iter().filter(|c| !c.nearest_to.is_empty()) {
        s.push_str(&format!(
            "check        {} at logger {} (nearest to {}): {:.4} without it, {:.4} measured{}\n",
            c.indicator,
            c.sensor,
            c.nearest_to.join(", "),
            c.predicted,
            c.observed,
            c.se.map(|se| format!(", SE {se:.4}")).unwrap_or_default()
        ));
    }
    for w in run.checks.iter().filter_map(|c| c.warning()) {
        s.push_str(&format!("             warning: {w}\n"));
    }
    for c in &run.indicators {
        let vals: Vec<f64> = c.value.iter().copied().filter(|v| v.is_finite()).collect();
        let lo = vals.iter().copied().min_by(f64::total_cmp).unwrap_or(f64::NAN);
        let hi = vals.iter().copied().max_by(f64::total_cmp).unwrap_or(f64::NAN);
        let se =
            c.se.as_ref()
                .map(|se| {
                    let f: Vec<f64> = se.iter().copied().filter(|v| v.is_finite()).collect();
                    format!("mean SE {:.3}", f.iter().sum::<f64>() / f.len().max(1) as f64)
                })
                .unwrap_or_else(|| "no SE".into());
        s.push_str(&format!(
            "{:<20} {:>10.3} .. {:<10.3} ({se}; {} of {} pots without a value)\n",
            c.name,
            lo,
            hi,
            c.value.len() - vals.len(),
            c.value.len()
        ));
    }
    s
}
