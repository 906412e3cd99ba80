//! The plan of a run: every section of the study file parsed and validated
//! once, before any work starts. `potclim check` builds exactly this, so that
//! whatever `potclim run` would refuse, `check` refuses first, with the same
//! located message.
//!
//! What is checked here, and by whom: `[climate]` and `[[indicator]]` by
//! [`ClimateConfig::from_study`] (at least one indicator is required), `[mapping]`
//! by [`MappingConfig::from_study`], `[model]` by [`ModelSpec::from_study`] and
//! [`ModelSpec::check`] (trait, factors, blocks and drivers against the pot
//! table, the indicators and the openings), `[verdict]` by
//! [`VerdictOptions::from_study`], the pot and sensor tables by their loaders,
//! and `[report]` here (it takes no keys yet). The logger exports themselves
//! are read by ingest (and sampled by `check`), not here.

use super::StageError;
use crate::climate::ClimateConfig;
use crate::io::layout::{Pots, Sensors, load_pots, load_sensors};
use crate::io::study::Study;
use crate::model::data::{ModelData, ModelSpec};
use crate::model::verdict::{DISTANCE_PREFIX, VerdictOptions};
use crate::spatial::config::MappingConfig;

/// Every stage's configuration, validated, and the tables they share.
#[derive(Debug, Clone)]
pub struct Plan {
    /// `[climate]` and the `[[indicator]]` blocks (at least one).
    pub climate: ClimateConfig,
    /// `[mapping]` (defaults when absent).
    pub mapping: MappingConfig,
    /// `[model]`, checked against the pot table.
    pub model: ModelSpec,
    /// `[verdict]` (defaults when absent).
    pub verdict: VerdictOptions,
    /// The pot table.
    pub pots: Pots,
    /// The sensor table.
    pub sensors: Sensors,
    /// The pots the model will analyse, with the columns the pot table holds
    /// (trait, factors, blocks, pot-table drivers; mapped drivers come later).
    /// Its factors carry their reference level: the first level in the file
    /// among the analysed pots.
    pub pot_data: ModelData,
    /// The per-pot columns the mapping stage will produce ([`mapped_names`]).
    pub mapped: Vec<(String, &'static str)>,
    /// `[scores]`: the repeated scorings, validated against the pot table
    /// (`None` without the section).
    pub scores: Option<crate::io::scores::Scores>,
}

impl Plan {
    /// Parse and validate every section of `study`; the first problem is
    /// returned with its file, line and column where the text shows them. Order:
    /// the pot and sensor tables, then the sections in the order of the run.
    pub fn from_study(study: &Study) -> Result<Plan, StageError> {
        // The tables first: a file that cannot be read is the first thing to fix.
        let pots = load_pots(study)?;
        // The move table against the pot table and the declared period.
        if study.spec.pots.moves.is_some() {
            crate::io::moves::load_moves(study, &pots, &crate::io::ingest::study_period(study)?)?;
        }
        let scores = crate::io::scores::Scores::load(study, &pots)?;
        let sensors = load_sensors(study)?.ok_or_else(|| {
            study.invalid(
                "sensors",
                "there is no [sensors] table: mapping needs the loggers' positions",
                Some("add [sensors] with file, id, x and y".into()),
            )
        })?;
        let climate = ClimateConfig::from_study(study)?;
        climate.require_indicator(study)?;
        if study.spec.logs.is_empty() {
            return Err(study
                .invalid(
                    "logs",
                    "no [[logs]] block: a run needs the loggers' exports",
                    Some(
                        "add a [[logs]] block with files, time, time_format, sensor and [logs.columns]"
                            .into(),
                    ),
                )
                .into());
        }
        let mapping = MappingConfig::from_study(study)?;
        let model = ModelSpec::from_study(study)?;
        let verdict = VerdictOptions::from_study(study)?;
        check_report_section(study)?;
        let mapped = mapped_names(study, &climate);
        let names: Vec<String> = mapped.iter().map(|(n, _)| n.clone()).collect();
        let pot_data = model.check(study, &pots, &names)?;
        Ok(Plan { climate, mapping, model, verdict, pots, sensors, pot_data, mapped, scores })
    }
}

/// The per-pot columns the mapping stage will produce and a driver may name,
/// each with its source in words: every indicator, and `distance_<opening>`
/// for every opening.
pub fn mapped_names(study: &Study, climate: &ClimateConfig) -> Vec<(String, &'static str)> {
    climate
        .indicators
        .iter()
        .map(|i| (i.name.clone(), "indicator"))
        .chain(
            study
                .spec
                .openings
                .iter()
                .map(|o| (format!("{DISTANCE_PREFIX}{}", o.name), "distance to an opening")),
        )
        .collect()
}

/// `[report]` takes no keys yet: any key in it is refused at its line.
fn check_report_section(study: &Study) -> Result<(), StageError> {
    let Some(table) = &study.spec.report else { return Ok(()) };
    if let Some(key) = table.keys().next() {
        let (line, column) = study
            .source
            .lines()
            .scan(0usize, |off, l| {
                let start = *off;
                *off += l.len() + 1;
                Some((start, l))
            })
            .skip_while(|(_, l)| l.trim() != "[report]")
            .find(|(_, l)| l.trim_start().starts_with(key.as_str()))
            .map(|(start, l)| {
                crate::io::study::line_col(&study.source, start + (l.len() - l.trim_start().len()))
            })
            .unwrap_or((1, 1));
        return Err(crate::io::IoError::Toml {
            path: study.path.clone(),
            line,
            column,
            message: format!(
                "unknown key `{key}` in [report]: the section takes no keys (the report has no options yet)"
            ),
        }
        .into());
    }
    Ok(())
}
