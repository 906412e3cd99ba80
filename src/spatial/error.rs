//! Typed errors of the spatial stage: bad sensor or pot positions, too few
//! sensors for a method, degenerate geometry, and kriging systems that cannot
//! be solved. Every variant names the offending item and value and says how to
//! fix it.

use std::path::PathBuf;

/// An error of the spatial stage.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum SpatialError {
    /// A position is NaN or infinite.
    #[error("{}{what} `{id}`: position ({x}, {y}) is not a finite number; hint: give x and y in metres", location(path, *line))]
    NonFinitePosition {
        /// The table the position came from, if known.
        path: Option<PathBuf>,
        /// Its physical line, if known.
        line: Option<usize>,
        /// "sensor" or "pot".
        what: &'static str,
        /// The identifier.
        id: String,
        /// x as given.
        x: f64,
        /// y as given.
        y: f64,
    },
    /// A position lies outside the `[compartment]` rectangle.
    #[error("{}{what} `{id}`: position ({x}, {y}) lies outside the compartment [0, {length}] x [0, {width}] m; hint: check the coordinates' origin and units, or the compartment size", location(path, *line))]
    OutsideCompartment {
        /// The table the position came from, if known.
        path: Option<PathBuf>,
        /// Its physical line, if known.
        line: Option<usize>,
        /// "sensor" or "pot".
        what: &'static str,
        /// The identifier.
        id: String,
        /// x as given.
        x: f64,
        /// y as given.
        y: f64,
        /// Compartment length (x extent), metres.
        length: f64,
        /// Compartment width (y extent), metres.
        width: f64,
    },
    /// A method needs more sensors than are available.
    #[error("{method} needs at least {needed} sensors with data, got {got}; hint: {hint}")]
    TooFewSensors {
        /// The method asked for.
        method: String,
        /// The minimum.
        needed: usize,
        /// The number available.
        got: usize,
        /// What to do instead.
        hint: String,
    },
    /// All sensors lie on one line, so a trend in x and y cannot be estimated.
    #[error(
        "all {n} sensors lie on one straight line, so a trend in both x and y cannot be estimated; hint: use method = \"ordinary\", or add a sensor off the line"
    )]
    Collinear {
        /// The number of sensors.
        n: usize,
    },
    /// The external drift does not vary between the sensors.
    #[error(
        "the external drift `{name}` takes the same value at every sensor, so its coefficient cannot be estimated; hint: use method = \"ordinary\" or a drift that varies between sensors"
    )]
    ConstantDrift {
        /// The drift's name.
        name: String,
    },
    /// The kriging system is singular (should not happen after the documented
    /// fallbacks; reported rather than panicking).
    #[error("the {method} kriging system of {n} sensors is singular; hint: {hint}")]
    Singular {
        /// The method.
        method: String,
        /// Size of the sensor set.
        n: usize,
        /// What to try.
        hint: String,
    },
    /// Input arrays disagree in length or a value is unusable.
    #[error("{what}: {message}")]
    BadInput {
        /// The argument.
        what: String,
        /// What is wrong.
        message: String,
    },
}

fn location(path: &Option<PathBuf>, line: Option<usize>) -> String {
    match (path, line) {
        (Some(p), Some(l)) => format!("{}:{l}: ", p.display()),
        (Some(p), None) => format!("{}: ", p.display()),
        _ => String::new(),
    }
}

/// Result alias of the spatial stage.
pub type Result<T> = std::result::Result<T, SpatialError>;
