//! Input and output: the study file, the pot and sensor tables, the logger
//! exports (delimiters, decimal commas, time formats and zones, units), the
//! audited quality control of readings, and the atomic writing of output
//! folders.
//!
//! Nothing here knows about climate indicators or models; later stages read
//! their own sections of the study file through [`study::Study::section`].

// `IoError` carries path, line, column, value and hint by design (every
// message must name them), which makes it larger than clippy's default limit.
#![allow(clippy::result_large_err)]

pub mod clock;
pub mod detect;
pub mod error;
pub mod ingest;
pub mod inventory;
pub mod layout;
pub mod layouts;
pub mod logs;
pub mod moves;
pub mod output;
pub mod provenance;
pub mod qc;
#[cfg(test)]
mod robustness;
pub mod scores;
pub mod study;
pub mod table;
pub mod units;
pub mod workbook;

pub use error::{IoError, Result};
