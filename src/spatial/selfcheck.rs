//! The map checks itself: for every indicator and every logger, the
//! indicator mapped at the logger's position *without* that logger
//! (leave-one-sensor-out, the whole mapping method including its drift and
//! the expectation form of threshold indicators) against the logger's own
//! value, with the standard error the map would have given there.
//!
//! Kriging is an exact interpolator, so the map at a logger's own position
//! reproduces the logger; only the map without it tells whether the map can
//! be trusted around it. A logger whose left-out error exceeds twice its SE
//! (|z| > 2, a two-sided 95 % band under normal errors; common practice) is
//! flagged with a warning, and the logger nearest each opening, where a
//! draught is strongest and the map leans most on one logger, is named in
//! `mapping_check.csv` and in the map's summary.

use super::error::{Result, SpatialError};

/// One logger's leave-one-out check of one indicator.
#[derive(Clone, Debug, PartialEq)]
pub struct SensorCheck {
    /// The indicator.
    pub indicator: String,
    /// The logger.
    pub sensor: String,
    /// The logger's own value over the study period.
    pub observed: f64,
    /// The value mapped at the logger's position from the other loggers.
    pub predicted: f64,
    /// The standard error of that mapped value (`None` for IDW / nearest).
    pub se: Option<f64>,
    /// The openings for which this logger is the nearest one.
    pub nearest_to: Vec<String>,
}

impl SensorCheck {
    /// Prediction minus observation.
    pub fn error(&self) -> f64 {
        self.predicted - self.observed
    }

    /// The standardised error `error / se` (`None` without a positive SE).
    pub fn z(&self) -> Option<f64> {
        self.se.filter(|s| *s > 0.0).map(|s| self.error() / s)
    }

    /// True when the map without the logger disagrees with it by more than
    /// twice the SE.
    pub fn flagged(&self) -> bool {
        self.z().is_some_and(|z| z.abs() > 2.0)
    }

    /// The warning for a flagged check, else `None`.
    pub fn warning(&self) -> Option<String> {
        self.flagged().then(|| {
            format!(
                "{}: the map without logger {} gives {:.4} at its position, the logger reads {:.4} (error {:+.4}, {:.1} standard errors{}); the map may be unreliable around this logger",
                self.indicator,
                self.sensor,
                self.predicted,
                self.observed,
                self.error(),
                self.z().unwrap_or(f64::NAN).abs(),
                if self.nearest_to.is_empty() {
                    String::new()
                } else {
                    format!(", nearest logger to {}", self.nearest_to.join(", "))
                }
            )
        })
    }
}

fn num(v: Option<f64>) -> String {
    match v {
        Some(x) if x.is_finite() => format!("{x}"),
        _ => String::new(),
    }
}

/// `mapping_check.csv`: one row per indicator and logger: `indicator`,
/// `sensor`, `observed`, `predicted_without`, `error`, `se`, `z`,
/// `nearest_to_opening` (openings this logger is nearest to, `;`-separated),
/// `flagged` (`|z| > 2`).
pub fn mapping_check_csv(checks: &[SensorCheck]) -> Result<Vec<u8>> {
    let err = |e: csv::Error| SpatialError::BadInput {
        what: super::outputs::MAPPING_CHECK_FILE.into(),
        message: e.to_string(),
    };
    let mut w = csv::Writer::from_writer(Vec::new());
    w.write_record([
        "indicator",
        "sensor",
        "observed",
        "predicted_without",
        "error",
        "se",
        "z",
        "nearest_to_opening",
        "flagged",
    ])
    .map_err(err)?;
    for c in checks {
        w.write_record([
            c.indicator.clone(),
            c.sensor.clone(),
            num(Some(c.observed)),
            num(Some(c.predicted)),
            num(Some(c.error())),
            num(c.se),
            num(c.z()),
            c.nearest_to.join(";"),
            c.flagged().to_string(),
        ])
        .map_err(err)?;
    }
    w.into_inner().map_err(|e| SpatialError::BadInput {
        what: super::outputs::MAPPING_CHECK_FILE.into(),
        message: e.to_string(),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn flags_beyond_two_standard_errors() {
        let mut c = SensorCheck {
            indicator: "cold".into(),
            sensor: "L01".into(),
            observed: 300.0,
            predicted: 250.0,
            se: Some(20.0),
            nearest_to: vec!["door".into()],
        };
        assert_eq!(c.error(), -50.0);
        assert_eq!(c.z(), Some(-2.5));
        assert!(c.flagged());
        let w = c.warning().unwrap();
        assert!(w.contains("L01") && w.contains("2.5 standard errors") && w.contains("door"), "{w}");
        c.se = Some(30.0);
        assert!(!c.flagged() && c.warning().is_none());
        c.se = None;
        assert!(c.z().is_none() && !c.flagged());
        let csv = String::from_utf8(mapping_check_csv(&[c]).unwrap()).unwrap();
        assert_eq!(csv.lines().nth(1).unwrap(), "cold,L01,300,250,-50,,,door,false");
    }
}
