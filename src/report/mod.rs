//! Rendering of results into the self-contained HTML report. It renders; it
//! never computes.
//!
//! The contract with the analysis stages is [`data::ReportData`]: plain,
//! already-computed values for every section, serialised as
//! `report_data.json` next to `report.html`, so that `potclim report STUDY`
//! can redraw the page without re-running anything. [`html::render_html`]
//! turns it into one page with inline CSS and inline SVG figures
//! ([`figures`], drawn with plotters' SVG backend, coloured by the scales of
//! [`colour`]). [`png`] exports figures as PNG through a headless Chromium
//! when one is installed. [`xml`] is the well-formedness check the tests
//! (and the PNG export) use, and [`sample`] an invented report to look at.
//!
//! Design: one function per section and per figure, each from plain data to
//! text, so each is testable alone and a missing stage only blanks its own
//! section with a note naming what is missing and the command that makes it.

pub mod assemble;
pub mod colour;
pub mod data;
pub mod figures;
pub mod from_verdict;
pub mod html;
pub mod map_check;
pub mod moves;
pub mod over_time;
pub mod over_time_figures;
pub mod plan_page;
pub mod png;
pub mod residual_structure;
pub mod sample;
pub mod xml;

pub use data::ReportData;
pub use html::{escape, render_html};

use std::path::PathBuf;

/// Errors of the report stage.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum ReportError {
    /// A file could not be read or written.
    #[error("{path}: {source}")]
    Io {
        /// The file.
        path: PathBuf,
        /// The cause.
        source: std::io::Error,
    },
    /// `report_data.json` is not a valid report.
    #[error("{path}:{line}:{column}: {message}\n  hint: {hint}")]
    Json {
        /// The file.
        path: PathBuf,
        /// 1-based line.
        line: usize,
        /// 1-based column.
        column: usize,
        /// The parser's message (names the offending field or value).
        message: String,
        /// What to do.
        hint: String,
    },
    /// PNG export needs a headless Chromium, and none was found.
    #[error("PNG export needs Chromium, which was not found (looked for {looked})\n  hint: {hint}")]
    NoBrowser {
        /// Where we looked.
        looked: String,
        /// What to do.
        hint: String,
    },
    /// The browser ran but did not produce a PNG.
    #[error("PNG export of figure `{figure}` failed: {message}")]
    Png {
        /// The figure id.
        figure: String,
        /// What happened (exit status, stderr excerpt).
        message: String,
    },
}

/// Parse `report_data.json` text; errors carry the file, line and column.
pub fn parse_report_data(path: &std::path::Path, text: &str) -> Result<ReportData, ReportError> {
    serde_json::from_str(text).map_err(|e| ReportError::Json {
        path: path.to_path_buf(),
        line: e.line(),
        column: e.column(),
        message: e.to_string(),
        hint: "this file is written by `potclim run`; run it again, or see docs/outputs.md for its fields"
            .into(),
    })
}
