//! Typed errors of the trait-model stage: what a user needs to fix the study
//! file or the tables (file, line, column, value, hint).

use crate::io::error::IoError;
use crate::spatial::likelihood::LikelihoodError;
use std::path::PathBuf;

/// An error while building or fitting a trait model.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum ModelError {
    /// Reading or validating an input failed (carries file, line, column).
    #[error(transparent)]
    Io(Box<IoError>),
    /// The `[model]` section or the data cannot make a valid design.
    #[error("{}: {message}{}", path.display(), hint_suffix(hint))]
    Design {
        /// The file concerned (study file or a table).
        path: PathBuf,
        /// What is wrong (names the columns, levels or cells).
        message: String,
        /// How to fix it.
        hint: Option<String>,
    },
    /// A spatial fit failed.
    #[error("model `{model}`: {source}{}", hint_suffix(hint))]
    Likelihood {
        /// The model that failed.
        model: String,
        /// What the likelihood engine said.
        source: LikelihoodError,
        /// How to fix it.
        hint: Option<String>,
    },
    /// The imputation of a mapped driver failed (see `docs/verdict.md`).
    #[error("driver `{driver}`: {message}{}", hint_suffix(hint))]
    Imputation {
        /// The mapped driver.
        driver: String,
        /// What went wrong.
        message: String,
        /// How to fix it.
        hint: Option<String>,
    },
    /// A least-squares fit met a column aliased with the columns before it
    /// (rank tolerance [`crate::spatial::factor::RANK_TOLERANCE`]).
    #[error(
        "{what}: column `{column}` is a linear combination of the columns before it ({remainder:e} of its length remains after projection)"
    )]
    Rank {
        /// The fit concerned.
        what: String,
        /// The aliased column.
        column: String,
        /// `|r_jj| / ||x_j||` of that column.
        remainder: f64,
    },
    /// A `[model]` setting that the analysed pots do not allow (the forced
    /// exact likelihood above its memory limit, too many neighbours).
    #[error("[model] {key}: {message}{}", hint_suffix(hint))]
    Setting {
        /// The key of `[model]`.
        key: String,
        /// What is wrong.
        message: String,
        /// How to fix it.
        hint: Option<String>,
    },
    /// Fits that must not be compared were offered for comparison.
    #[error("cannot compare these fits: {0}")]
    Comparison(String),
}

impl From<IoError> for ModelError {
    fn from(e: IoError) -> Self {
        ModelError::Io(Box::new(e))
    }
}

fn hint_suffix(hint: &Option<String>) -> String {
    match hint {
        Some(h) => format!(" (hint: {h})"),
        None => String::new(),
    }
}

/// Result alias of the stage.
pub type Result<T> = std::result::Result<T, ModelError>;
