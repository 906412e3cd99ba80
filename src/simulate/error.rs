//! Typed errors of the simulation stage. A bad scenario file names the file
//! and the key (`layout.slot_pitch`, `trait.effect[2].level`), says what is
//! wrong and, where it can, how to fix it.

use crate::io::IoError;
use std::path::PathBuf;

/// An error while reading a scenario or generating a study from it.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum SimError {
    /// A key of the scenario file has a value that cannot be used.
    #[error("{}: `{key}`: {message}{}", path.display(), hint_suffix(hint))]
    Scenario {
        /// The scenario file.
        path: PathBuf,
        /// The key, with its section (`layout.slot_pitch`, `fault[3].at`).
        key: String,
        /// What is wrong.
        message: String,
        /// How to fix it, if we can tell.
        hint: Option<String>,
    },
    /// Reading the scenario or writing the study failed (also TOML syntax
    /// and unknown-key errors, with line and column).
    /// (Boxed to keep `SimError` small.)
    #[error(transparent)]
    Io(Box<IoError>),
    /// A covariance matrix could not be factorised even with a tiny jitter.
    #[error(
        "random field `{what}`: the covariance matrix of {n} points is not positive definite{}",
        hint_suffix(hint)
    )]
    Covariance {
        /// Which field (`climate.field`, `trait.residual_field`).
        what: String,
        /// Number of points.
        n: usize,
        /// How to fix it.
        hint: Option<String>,
    },
}

impl From<IoError> for SimError {
    fn from(e: IoError) -> SimError {
        SimError::Io(Box::new(e))
    }
}

fn hint_suffix(hint: &Option<String>) -> String {
    match hint {
        Some(h) => format!(" (hint: {h})"),
        None => String::new(),
    }
}

/// Result alias of the simulation stage.
pub type Result<T> = std::result::Result<T, SimError>;
