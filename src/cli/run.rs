//! `potclim run STUDY`: the whole job in one command: ingest, climate
//! indicators, mapping onto pots, the model comparison and verdict, and the
//! report. Each stage publishes its own files atomically, so a failure part
//! way leaves the earlier stages' complete outputs and nothing half-written.

use crate::io::layout::{load_pots, load_sensors};
use crate::io::study::Study;
use crate::report::data::{CompartmentSize, ReportData};
use anyhow::Context;
use clap::Args;
use indicatif::{ProgressBar, ProgressStyle};
use std::path::PathBuf;
use std::time::{Duration, Instant};

/// Long help of `potclim run`.
pub const HELP: &str = "Run the whole analysis of a study, from raw logger files to one report.

Stages, each publishing its files into the output folder ([study].output):
  1. ingest   readings.parquet, qc_flags.csv, qc_summary.csv, gaps.csv
  2. climate  sensor_indicators.csv, sensor_daily.parquet
  3. map      pot_covariates.csv, variograms.csv, variogram_fits.csv, variogram_ml_fits.csv,
              mapping_cv.csv
  4. verdict  summary.json, comparison.csv, drivers.csv, adjusted_means.csv
  5. report   report.html, report_data.json

Each stage can also be run alone (potclim ingest / climate / map / verdict / report).";

/// Arguments of `potclim run`.
#[derive(Debug, Args)]
pub struct RunArgs {
    /// The study file (study.toml).
    pub study: PathBuf,
    /// Do not show progress spinners.
    #[arg(long)]
    pub quiet: bool,
}

struct Step {
    bar: Option<ProgressBar>,
    started: Instant,
}

impl Step {
    fn new(quiet: bool, n: usize, what: &str) -> Step {
        let bar = (!quiet).then(|| {
            let b = ProgressBar::new_spinner();
            b.set_style(
                ProgressStyle::with_template("{spinner} [{prefix}] {msg} ({elapsed})").expect("template"),
            );
            b.set_prefix(format!("{n}/5"));
            b.set_message(what.to_string());
            b.enable_steady_tick(Duration::from_millis(120));
            b
        });
        Step { bar, started: Instant::now() }
    }

    fn done(self, msg: String) {
        let secs = self.started.elapsed().as_secs_f64();
        match self.bar {
            Some(b) => b.finish_with_message(format!("{msg} [{secs:.1} s]")),
            None => println!("{msg} [{secs:.1} s]"),
        }
    }
}

/// Run every stage.
pub fn run(args: RunArgs) -> anyhow::Result<()> {
    let started = chrono::Utc::now().to_rfc3339_opts(chrono::SecondsFormat::Secs, true);
    let t0 = Instant::now();
    let study = Study::load(&args.study)
        .with_context(|| format!("while reading the study file {}", args.study.display()))?;

    let step = Step::new(args.quiet, 1, "ingesting logger exports");
    let ing = crate::io::ingest::ingest(&study).context("in the ingest stage")?;
    crate::io::ingest::write_outputs(&study, &ing).context("writing the ingest outputs")?;
    let flagged: usize = ing.files.iter().map(|f| f.rows_flagged).sum();
    let read: usize = ing.files.iter().map(|f| f.rows_read).sum();
    step.done(format!("ingest: {read} rows read from {} files, {flagged} flagged", ing.files.len()));

    let step = Step::new(args.quiet, 2, "computing climate indicators");
    let readings_path = study.output_dir().join("readings.parquet");
    let config = crate::climate::ClimateConfig::from_study(&study)?;
    let climate = crate::climate::compute(&study, config, &ing.readings, &readings_path)
        .context("in the climate stage")?;
    crate::climate::stage::write_outputs(&study, &climate).context("writing the climate outputs")?;
    step.done(format!(
        "climate: {} indicators at {} sensors over {} days",
        climate.config.indicators.len(),
        climate.grid.sensors.len(),
        climate.calendar.days.len()
    ));

    let step = Step::new(args.quiet, 3, "kriging indicators onto pots");
    let map = crate::spatial::stage::compute(&study, &climate).context("in the mapping stage")?;
    crate::spatial::stage::write_outputs(&study, &map).context("writing the mapping outputs")?;
    step.done(format!("map: {} indicators onto {} pots", map.indicators.len(), map.pots.len()));

    let step = Step::new(args.quiet, 4, "fitting the comparison grid (ML) and deciding");
    let opts = crate::model::verdict::VerdictOptions::from_study(&study)?;
    let verdict = crate::model::verdict::run_verdict(&study, &opts).context("in the verdict stage")?;
    crate::model::verdict::write_outputs(&study, &verdict).context("writing the verdict outputs")?;
    step.done(format!("verdict: {} ({} fits): {}", verdict.verdict, verdict.n_fits, verdict.reason));

    let step = Step::new(args.quiet, 5, "writing the report");
    let pots = load_pots(&study)?;
    let sensors = load_sensors(&study)?;
    let spec = crate::model::data::ModelSpec::from_study(&study).ok();
    let trait_unit = spec.as_ref().and_then(|s| s.trait_unit.as_deref());
    let driver_names: Vec<String> = verdict.drivers.iter().map(|d| d.name.clone()).collect();
    let units = crate::report::assemble::units(trait_unit, &climate.config.indicators, &driver_names);
    let mut data = ReportData {
        title: study.spec.study.title.clone(),
        compartment: study.spec.compartment.map(|c| CompartmentSize { length: c.length, width: c.width }),
        layout: Some(crate::report::assemble::layout(
            &study,
            &pots,
            sensors.as_ref(),
            spec.as_ref().map(|s| s.trait_column.as_str()),
            trait_unit,
            spec.as_ref().map(|s| s.factors.as_slice()).unwrap_or(&[]),
        )),
        climate: Some(crate::report::assemble::climate(&ing, &climate, &map)),
        variograms: crate::report::assemble::variograms(&map),
        ..Default::default()
    };
    let (vsection, models, means, residual_variograms) =
        crate::report::from_verdict::to_report(&verdict, &units);
    data.adjusted_means_unit = units.trait_unit.clone();
    data.verdict = Some(vsection);
    data.models = Some(models);
    data.adjusted_means = means;
    data.variograms.extend(residual_variograms);
    data.provenance = Some(crate::report::assemble::provenance(
        &study,
        Some(&ing),
        &started,
        Some(t0.elapsed().as_secs_f64()),
    ));
    let files = write_report(&study, &data)?;
    step.done(format!("report: {}", files.first().map(|p| p.display().to_string()).unwrap_or_default()));
    for f in files {
        println!("wrote {}", f.display());
    }
    Ok(())
}

/// Publish `report_data.json` and `report.html` together.
pub fn write_report(study: &Study, data: &ReportData) -> anyhow::Result<Vec<PathBuf>> {
    let mut w = crate::io::output::StageWriter::new(&study.output_dir(), "report")?;
    w.write("report.html", crate::report::html::render_html(data).as_bytes())?;
    w.write("report_data.json", serde_json::to_string_pretty(data)?.as_bytes())?;
    Ok(w.commit()?)
}
