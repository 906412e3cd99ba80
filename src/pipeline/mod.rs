//! The whole analysis as one library call: [`run`] takes a loaded study,
//! validates every section before any work ([`Plan`]), then runs ingest ->
//! climate -> mapping -> verdict -> report, passing each stage's result to the
//! next in memory. Each stage still publishes its own files atomically from
//! its result struct, so a failure part way leaves the earlier stages'
//! complete outputs and nothing half-written; no stage re-reads a file that an
//! earlier stage of the same run wrote (the standalone commands `potclim map`,
//! `potclim verdict` and `potclim report` read them back through the same
//! types instead).
//!
//! The caller watches through [`Progress`]: a stage starts, a stage ends with a
//! one-line summary, and the long counted tasks of the verdict stage (the
//! comparison grid, the imputations) report each step. The command line
//! decides what to show; this module prints nothing.

pub mod plan;

pub use plan::Plan;

use crate::climate::{ClimateError, stage::ClimateRun};
use crate::io::IoError;
use crate::io::ingest::Ingested;
use crate::io::study::Study;
use crate::model::ModelError;
use crate::model::data::{COVARIATES_FILE, PotCovariates, add_opening_drivers, assemble};
use crate::model::progress::FitProgress;
use crate::model::timings::StageTime;
use crate::model::verdict::{SensorValues, VerdictResult};
use crate::report::data::{CompartmentSize, ReportData};
use crate::spatial::geometry::Points;
use crate::spatial::stage::{MapError, MapRun};
use std::path::PathBuf;
use std::time::Instant;

/// The stages of a run, in order.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Stage {
    /// Logger exports to one audited table of readings.
    Ingest,
    /// Climate indicators per sensor.
    Climate,
    /// Indicators mapped onto the pots.
    Map,
    /// The comparison grid and the verdict.
    Verdict,
    /// The report.
    Report,
}

impl Stage {
    /// Every stage, in order.
    pub const ALL: [Stage; 5] = [Stage::Ingest, Stage::Climate, Stage::Map, Stage::Verdict, Stage::Report];

    /// 1-based position in the run.
    pub fn number(self) -> usize {
        Stage::ALL.iter().position(|s| *s == self).map_or(0, |i| i + 1)
    }

    /// The stage's name, as its standalone command is called.
    pub fn name(self) -> &'static str {
        match self {
            Stage::Ingest => "ingest",
            Stage::Climate => "climate",
            Stage::Map => "map",
            Stage::Verdict => "verdict",
            Stage::Report => "report",
        }
    }

    /// What the stage is doing, in a few words.
    pub fn doing(self) -> &'static str {
        match self {
            Stage::Ingest => "ingesting logger exports",
            Stage::Climate => "computing climate indicators",
            Stage::Map => "kriging indicators onto pots",
            Stage::Verdict => "fitting the comparison grid (ML) and deciding",
            Stage::Report => "writing the report",
        }
    }
}

impl std::fmt::Display for Stage {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.name())
    }
}

/// What a caller of [`run`] is told as the run goes. Every method has an
/// empty default; the counted tasks come through [`FitProgress`].
pub trait Progress: FitProgress {
    /// `stage` starts.
    fn stage_started(&self, stage: Stage) {
        let _ = stage;
    }
    /// `stage` ended after `seconds`; `summary` says what it did in one line.
    fn stage_finished(&self, stage: Stage, summary: &str, seconds: f64) {
        let _ = (stage, summary, seconds);
    }
}

/// A [`Progress`] that shows nothing.
impl Progress for crate::model::progress::Silent {}

/// An error of one stage, with its own typed detail (file, line, column).
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum StageError {
    /// Inputs, study file, outputs.
    #[error(transparent)]
    Io(Box<IoError>),
    /// The climate stage.
    #[error(transparent)]
    Climate(Box<ClimateError>),
    /// The mapping stage.
    #[error(transparent)]
    Map(Box<MapError>),
    /// The model and verdict stage.
    #[error(transparent)]
    Model(Box<ModelError>),
    /// Serialising the report data.
    #[error("report_data.json: {0}")]
    Json(#[from] serde_json::Error),
}

impl From<IoError> for StageError {
    fn from(e: IoError) -> Self {
        StageError::Io(Box::new(e))
    }
}
impl From<ClimateError> for StageError {
    fn from(e: ClimateError) -> Self {
        StageError::Climate(Box::new(e))
    }
}
impl From<MapError> for StageError {
    fn from(e: MapError) -> Self {
        StageError::Map(Box::new(e))
    }
}
impl From<ModelError> for StageError {
    fn from(e: ModelError) -> Self {
        StageError::Model(Box::new(e))
    }
}

/// Why a run stopped: the study is not ready (found before any work), or a
/// stage failed.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum PipelineError {
    /// The study file or a table it names is refused (nothing was run).
    #[error(transparent)]
    Plan(StageError),
    /// A stage failed; the earlier stages' outputs are complete.
    #[error("in the {stage} stage")]
    Stage {
        /// The stage.
        stage: Stage,
        /// What went wrong.
        #[source]
        source: StageError,
    },
}

/// Everything a run computed and wrote.
#[derive(Debug)]
pub struct RunResults {
    /// The validated study.
    pub plan: Plan,
    /// The ingest stage's result.
    pub ingest: Ingested,
    /// The climate stage's result.
    pub climate: ClimateRun,
    /// The mapping stage's result.
    pub map: MapRun,
    /// The verdict stage's result.
    pub verdict: VerdictResult,
    /// The repeated-scorings analysis (`None` without `[scores]`).
    pub scores: Option<crate::model::intervals::ScoresRun>,
    /// What the report shows.
    pub report: ReportData,
    /// `report.html`.
    pub report_path: PathBuf,
    /// Every published file, stage by stage.
    pub files: Vec<PathBuf>,
    /// Wall-clock seconds of the whole run.
    pub seconds: f64,
}

/// Run every stage of `study` (see the module documentation).
pub fn run(study: &Study, progress: &dyn Progress) -> Result<RunResults, PipelineError> {
    let started = chrono::Utc::now().to_rfc3339_opts(chrono::SecondsFormat::Secs, true);
    let t0 = Instant::now();
    let plan = Plan::from_study(study).map_err(PipelineError::Plan)?;
    let mut files = Vec::new();
    let mut stage_times: Vec<StageTime> = Vec::new();
    let mut timed = |stage: Stage, t: Instant| {
        stage_times.push(StageTime { stage: stage.name().to_string(), seconds: t.elapsed().as_secs_f64() })
    };

    let t = Instant::now();
    let ing = in_stage(Stage::Ingest, progress, || {
        let ing = crate::io::ingest::ingest(study)?;
        files.extend(crate::io::ingest::write_outputs(study, &ing)?);
        let flagged: usize = ing.files.iter().map(|f| f.rows_flagged).sum();
        let read: usize = ing.files.iter().map(|f| f.rows_read).sum();
        let summary = format!("ingest: {read} rows read from {} files, {flagged} flagged", ing.files.len());
        Ok((ing, summary))
    })?;

    timed(Stage::Ingest, t);
    let t = Instant::now();
    let climate = in_stage(Stage::Climate, progress, || {
        let readings_path = study.output_dir().join(crate::io::ingest::READINGS_FILE);
        let climate =
            crate::climate::stage::compute(study, plan.climate.clone(), &ing.readings, &readings_path)?;
        files.extend(crate::climate::stage::write_outputs(study, &climate)?);
        let summary = format!(
            "climate: {} indicators at {} sensors over {} days",
            climate.config.indicators.len(),
            climate.grid.sensors.len(),
            climate.calendar.days.len()
        );
        Ok((climate, summary))
    })?;

    timed(Stage::Climate, t);
    let t = Instant::now();
    let map = in_stage(Stage::Map, progress, || {
        let map = crate::spatial::stage::compute(study, &climate)?;
        files.extend(crate::spatial::stage::write_outputs(study, &map)?);
        let summary = format!("map: {} indicators onto {} pots", map.indicators.len(), map.pots.len());
        Ok((map, summary))
    })?;

    timed(Stage::Map, t);
    let verdict = in_stage(Stage::Verdict, progress, || {
        let t = Instant::now();
        let mut verdict = verdict_in_memory(study, &plan, &climate, &map, progress)?;
        stage_times
            .push(StageTime { stage: Stage::Verdict.name().to_string(), seconds: t.elapsed().as_secs_f64() });
        verdict.timings.stages = std::mem::take(&mut stage_times);
        files.extend(crate::model::verdict::write_outputs(study, &verdict)?);
        let mut summary =
            format!("verdict: {} ({} fits): {}", verdict.verdict, verdict.n_fits, verdict.reason);
        // Repeated scorings: the grid per interval, then across intervals.
        let scores = match &plan.scores {
            Some(sc) => {
                let s = crate::model::intervals::analyse_scores(
                    study,
                    sc,
                    &plan.pots,
                    &plan.model,
                    &plan.verdict,
                    &climate,
                    &map,
                );
                // A single scoring time has no interval: nothing is written,
                // so the outputs are exactly those of a study without [scores].
                if s.intervals.is_empty() {
                    summary.push_str(&format!("; repeated scorings: {}", s.notes.join("; ")));
                } else {
                    files.extend(crate::model::intervals::write_outputs(study, &s)?);
                    summary
                        .push_str(&format!("; {} interval fit(s) of repeated scorings", s.intervals.len()));
                }
                Some(s)
            }
            None => None,
        };
        Ok(((verdict, scores), summary))
    })?;
    let (verdict, scores) = verdict;

    let (report, report_files) = in_stage(Stage::Report, progress, || {
        let mut data = report_data(study, &plan, &ing, &climate, &map, &verdict, &started, t0);
        data.over_time = scores
            .as_ref()
            .and_then(|s| crate::report::over_time::from_scores(s, &indicator_units(&climate)));
        let written = write_report(study, &data)?;
        let summary =
            format!("report: {}", written.first().map(|p| p.display().to_string()).unwrap_or_default());
        Ok(((data, written), summary))
    })?;
    let report_path = report_files.first().cloned().unwrap_or_default();
    files.extend(report_files);
    Ok(RunResults {
        plan,
        ingest: ing,
        climate,
        map,
        verdict,
        scores,
        report,
        report_path,
        files,
        seconds: t0.elapsed().as_secs_f64(),
    })
}

/// Run one stage between its progress calls; an error is tagged with the stage.
fn in_stage<T>(
    stage: Stage,
    progress: &dyn Progress,
    f: impl FnOnce() -> Result<(T, String), StageError>,
) -> Result<T, PipelineError> {
    progress.stage_started(stage);
    let t = Instant::now();
    let (value, summary) = f().map_err(|source| PipelineError::Stage { stage, source })?;
    progress.stage_finished(stage, &summary, t.elapsed().as_secs_f64());
    Ok(value)
}

/// The verdict stage on the results in memory: the model data from the pot
/// table and the mapping result, the sensor values of the climate result.
/// Writes nothing (also used by the power study, [`crate::planner::power`]).
pub fn verdict_in_memory(
    study: &Study,
    plan: &Plan,
    climate: &ClimateRun,
    map: &MapRun,
    progress: &dyn Progress,
) -> Result<VerdictResult, StageError> {
    let cov = PotCovariates::from_map(&study.output_dir().join(COVARIATES_FILE), map);
    let mut spec = plan.model.clone();
    let mut data = assemble(&plan.pots, &spec, Some(&cov), &cov.path)?;
    if let Some(moved) = &map.moves {
        data.paths = Some(crate::model::data::paths_in_memory(moved, &map.pots, &data.pots));
    }
    let added = add_opening_drivers(study, &mut spec, &mut data);
    let sensor_values = sensor_values(plan, climate);
    let window_ses = crate::model::data::window_ses(&plan.pots, &data, &cov);
    let mut r = crate::model::verdict::verdict_on(
        &data,
        &spec,
        &added,
        &sensor_values,
        &window_ses,
        &plan.verdict,
        progress,
    )?;
    r.headline = Some(crate::model::verdict::headline(&r, &data, Some(&cov)));
    Ok(r)
}

/// Each indicator's value per sensor over the study period, with the
/// sensors' positions: the climate result in memory, as
/// `sensor_indicators.csv` holds it. Sensors without a value are left out.
pub fn sensor_values(plan: &Plan, climate: &ClimateRun) -> Vec<SensorValues> {
    let index = plan.sensors.index();
    climate
        .config
        .indicators
        .iter()
        .enumerate()
        .map(|(i, ind)| {
            let mut points = Points { ids: vec![], x: vec![], y: vec![] };
            let mut values = Vec::new();
            for (j, id) in climate.grid.sensors.iter().enumerate() {
                let (Some(v), Some(&k)) = (climate.study[i][j].value, index.get(id.as_str())) else {
                    continue;
                };
                points.ids.push(id.clone());
                points.x.push(plan.sensors.x[k]);
                points.y.push(plan.sensors.y[k]);
                values.push(v);
            }
            SensorValues { name: ind.name.clone(), points, values }
        })
        .collect()
}

/// Each indicator's name and unit, as the report labels them.
fn indicator_units(climate: &ClimateRun) -> Vec<(String, String)> {
    climate.config.indicators.iter().map(|i| (i.name.clone(), i.unit().to_string())).collect()
}

/// The report's data from the stages' results.
#[allow(clippy::too_many_arguments)]
fn report_data(
    study: &Study,
    plan: &Plan,
    ing: &Ingested,
    climate: &ClimateRun,
    map: &MapRun,
    verdict: &VerdictResult,
    started: &str,
    t0: Instant,
) -> ReportData {
    let spec = &plan.model;
    let trait_unit = spec.trait_unit.as_deref();
    let driver_names: Vec<String> = verdict.drivers.iter().map(|d| d.name.clone()).collect();
    let units = crate::report::assemble::units(trait_unit, &climate.config.indicators, &driver_names);
    let mut data = ReportData {
        title: study.spec.study.title.clone(),
        compartment: study.spec.compartment.map(|c| CompartmentSize { length: c.length, width: c.width }),
        layout: Some(crate::report::assemble::layout(
            study,
            &plan.pots,
            Some(&plan.sensors),
            Some(spec.trait_column.as_str()),
            trait_unit,
            &spec.factors,
        )),
        climate: Some(crate::report::assemble::climate(ing, climate, map)),
        moves: map.moves.as_ref().map(|m| crate::report::moves::from_map(map, m)),
        variograms: crate::report::assemble::variograms(map),
        ..Default::default()
    };
    if let Some(l) = data.layout.as_mut() {
        crate::report::assemble::mark_silent(l, climate);
    }
    let (vsection, models, means, residual_variograms) =
        crate::report::from_verdict::to_report(verdict, &units);
    data.adjusted_means_unit = units.trait_unit.clone();
    let mut vsection = vsection;
    vsection.map_warnings = crate::report::assemble::fallback_warnings(map);
    data.verdict = Some(vsection);
    data.models = Some(models);
    data.adjusted_means = means;
    data.variograms.extend(residual_variograms);
    data.provenance = Some(crate::report::assemble::provenance(
        study,
        Some(ing),
        started,
        Some(t0.elapsed().as_secs_f64()),
    ));
    data
}

/// Publish `report.html` and `report_data.json` together; returns their paths
/// (`report.html` first).
pub fn write_report(study: &Study, data: &ReportData) -> Result<Vec<PathBuf>, StageError> {
    let mut w = crate::io::output::StageWriter::new(&study.output_dir(), "report")?;
    w.write("report.html", crate::report::html::render_html(data).as_bytes())?;
    w.write("report_data.json", serde_json::to_string_pretty(data)?.as_bytes())?;
    Ok(w.commit()?)
}
