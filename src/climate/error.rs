//! Typed errors of the climate stage. Each variant carries what a user needs
//! to fix the input: the file, line and column of a bad declaration in the
//! study file with the offending value and a hint, or the readings file and
//! what is wrong with it.

use crate::io::IoError;
use std::path::PathBuf;

/// An error of the climate stage.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum ClimateError {
    /// An error of the input stage (study file, tables, outputs).
    #[error(transparent)]
    Io(#[from] IoError),
    /// A `[climate]` or `[[indicator]]` value is well-formed TOML but not
    /// acceptable.
    #[error("{}:{line}:{column}: `{key}` = {value}: {message}{}", path.display(), hint_suffix(hint))]
    Declaration {
        /// The study file.
        path: PathBuf,
        /// 1-based line of the value.
        line: usize,
        /// 1-based column of the value.
        column: usize,
        /// The key with its section (`indicator[2].statistic`).
        key: String,
        /// The offending value as written.
        value: String,
        /// What is wrong.
        message: String,
        /// How to fix it.
        hint: Option<String>,
    },
    /// The readings table is missing, unreadable or not in the expected shape.
    #[error("{}: {message}{}", path.display(), hint_suffix(hint))]
    Readings {
        /// The readings file.
        path: PathBuf,
        /// What is wrong.
        message: String,
        /// How to fix it.
        hint: Option<String>,
    },
    /// Polars failed while reading, bucketing or writing a table.
    #[error("{}: {source}", path.display())]
    Polars {
        /// The file being read or written.
        path: PathBuf,
        /// Polars' error.
        source: polars::error::PolarsError,
    },
}

fn hint_suffix(hint: &Option<String>) -> String {
    match hint {
        Some(h) => format!(" (hint: {h})"),
        None => String::new(),
    }
}

/// Result alias of the climate stage.
pub type Result<T> = std::result::Result<T, ClimateError>;
