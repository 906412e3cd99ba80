//! potclim: from raw greenhouse climate-logger exports and a pot trait table to
//! a verdict on whether a microclimate driver or an unexplained spatial
//! correlation explains the spatial pattern of a plant trait.
//!
//! The crate is split by stage, and dependencies flow one way:
//!
//! ```text
//! io -> climate -> spatial -> model -> report -> pipeline -> planner -> cli
//!                     \-> simulate (uses io formats and spatial covariances)
//! ```
//!
//! * [`io`] owns the study file, every input table and the audited ingestion of
//!   logger exports (units, time zones, quality control).
//! * [`climate`] owns the regular time grid, psychrometrics and the plant-relevant
//!   indicators (cold hours, degree days, daily light integral, VPD).
//! * [`spatial`] owns correlation families, variograms, kriging and the mapping
//!   of sensor series onto pots.
//! * [`model`] owns the trait models: factorial OLS/ANOVA and spatial GLS by
//!   REML and ML, and their diagnostics.
//! * [`simulate`] owns synthetic studies with known truth.
//! * [`report`] renders results; it never computes them.
//! * [`pipeline`] runs the whole analysis as one call ([`run`]): every section
//!   of the study file validated first ([`Plan`], the same code as `potclim
//!   check`), then each stage's result passed to the next in memory.
//! * [`planner`] plans the next experiment: where to put loggers, and the
//!   power of a layout to find a driver, by simulating whole studies.
//! * [`cli`] is the only module that knows about the command line.
#![warn(missing_docs)]

pub mod cli;
pub mod climate;
pub mod io;
pub mod model;
pub mod pipeline;
pub mod planner;
pub mod report;
pub mod simulate;
pub mod spatial;

pub use pipeline::{Plan, Progress, RunResults, run};
