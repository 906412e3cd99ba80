//! Planning the next experiment: where to put loggers ([`placement`],
//! `potclim place PLAN`) and whether a layout would see a draught's effect on
//! the trait ([`power`], `potclim power PLAN`).
//!
//! Both read one plan file (TOML, `docs/planning.md`) with a `[placement]`
//! and/or a `[power]` section; paths in it are relative to the plan file.
//! The plan stage sits above the pipeline: placement fits the indicator's
//! variogram through the ingest, climate and mapping stages of a study
//! (or takes it from the plan file for a compartment without logs), and the
//! power study simulates studies with [`crate::simulate`] and runs the whole
//! analysis on each. The numerical kernel of placement is
//! [`crate::spatial::placement`]; the page is [`crate::report::plan_page`].
//!
//! Files, in reading order: `mod.rs` (the plan file and the errors),
//! `placement` (the placement question on a study or a scenario), `power`
//! (the simulation study).

pub mod placement;
pub mod power;

use crate::io::IoError;
use crate::io::study::toml_error;
use serde::Deserialize;
use std::path::{Path, PathBuf};

/// An error of the planning commands.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum PlanError {
    /// Reading the plan file, a study, a table; writing outputs.
    #[error(transparent)]
    Io(#[from] Box<IoError>),
    /// A stage of the analysis of the study (or of a simulated study).
    #[error(transparent)]
    Stage(#[from] Box<crate::pipeline::PipelineError>),
    /// The placement algebra.
    #[error(transparent)]
    Spatial(#[from] crate::spatial::error::SpatialError),
    /// The scenario of a simulated study.
    #[error(transparent)]
    Simulate(#[from] Box<crate::simulate::SimError>),
    /// A key of the plan file has an unusable value.
    #[error("{}: `{key}`: {message}{}", path.display(), hint.as_ref().map(|h| format!(" (hint: {h})")).unwrap_or_default())]
    Invalid {
        /// The plan file.
        path: PathBuf,
        /// The key, e.g. `placement.indicator`.
        key: String,
        /// What is wrong, with the value.
        message: String,
        /// What to do.
        hint: Option<String>,
    },
}

impl From<IoError> for PlanError {
    fn from(e: IoError) -> Self {
        PlanError::Io(Box::new(e))
    }
}

impl From<crate::simulate::SimError> for PlanError {
    fn from(e: crate::simulate::SimError) -> Self {
        PlanError::Simulate(Box::new(e))
    }
}

impl From<crate::pipeline::PipelineError> for PlanError {
    fn from(e: crate::pipeline::PipelineError) -> Self {
        PlanError::Stage(Box::new(e))
    }
}

/// The plan file as written.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
struct PlanDoc {
    placement: Option<placement::PlacementSection>,
    power: Option<power::PowerSection>,
}

/// A parsed plan file.
#[derive(Debug, Clone)]
pub struct PlanFile {
    /// The file as given.
    pub path: PathBuf,
    /// Its folder: relative paths resolve against it.
    pub dir: PathBuf,
    /// `[placement]`, when present.
    pub placement: Option<placement::PlacementSection>,
    /// `[power]`, when present.
    pub power: Option<power::PowerSection>,
}

impl PlanFile {
    /// Read and parse a plan file (unknown keys are refused with their line
    /// and column).
    pub fn load(path: &Path) -> Result<PlanFile, PlanError> {
        let source = std::fs::read_to_string(path)
            .map_err(|source| IoError::Read { path: path.to_path_buf(), reason: source })?;
        let doc: PlanDoc = toml::from_str(&source).map_err(|e| toml_error(path, &source, &e))?;
        let dir = path
            .parent()
            .map(|p| if p.as_os_str().is_empty() { Path::new(".") } else { p })
            .unwrap_or(Path::new("."))
            .to_path_buf();
        Ok(PlanFile { path: path.to_path_buf(), dir, placement: doc.placement, power: doc.power })
    }

    /// Resolve a path written in the plan file.
    pub fn resolve(&self, rel: &str) -> PathBuf {
        let p = Path::new(rel);
        if p.is_absolute() { p.to_path_buf() } else { self.dir.join(p) }
    }

    /// A [`PlanError::Invalid`] about `key`.
    pub fn invalid(&self, key: &str, message: impl Into<String>, hint: Option<&str>) -> PlanError {
        PlanError::Invalid {
            path: self.path.clone(),
            key: key.into(),
            message: message.into(),
            hint: hint.map(str::to_string),
        }
    }
}
