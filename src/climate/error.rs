//! Typed errors of the climate stage. Each variant carries what a user needs
//! to fix the input: the file, line and column of a bad declaration in the
//! study file with the offending value and a hint, or the readings file and
//! what is wrong with it. Large payloads are boxed so that `Result`s stay
//! small on the happy path.

use crate::io::IoError;
use std::path::PathBuf;

/// An error of the climate stage.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum ClimateError {
    /// An error of the input stage (study file, tables, outputs).
    #[error(transparent)]
    Io(Box<IoError>),
    /// A `[climate]` or `[[indicator]]` value is well-formed TOML but not
    /// acceptable.
    #[error(transparent)]
    Declaration(Box<Declaration>),
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

/// A bad value in `[climate]` or `[[indicator]]`, with its position.
#[derive(Debug, thiserror::Error)]
#[error("{}:{line}:{column}: `{key}` = {value}: {message}{}", path.display(), hint_suffix(hint))]
pub struct Declaration {
    /// The study file.
    pub path: PathBuf,
    /// 1-based line of the value.
    pub line: usize,
    /// 1-based column of the value.
    pub column: usize,
    /// The key with its section (`indicator[2].statistic`).
    pub key: String,
    /// The offending value as written.
    pub value: String,
    /// What is wrong.
    pub message: String,
    /// How to fix it.
    pub hint: Option<String>,
}

impl From<IoError> for ClimateError {
    fn from(e: IoError) -> Self {
        ClimateError::Io(Box::new(e))
    }
}

impl From<Declaration> for ClimateError {
    fn from(d: Declaration) -> Self {
        ClimateError::Declaration(Box::new(d))
    }
}

fn hint_suffix(hint: &Option<String>) -> String {
    match hint {
        Some(h) => format!(" (hint: {h})"),
        None => String::new(),
    }
}

/// Result alias of the climate stage.
pub type Result<T> = std::result::Result<T, ClimateError>;
