//! The `[mapping]` section of the study file: how climate indicators are
//! mapped onto pots (method, variogram families, estimator, bins,
//! neighbourhood, drift, directional checks). Every key is documented in
//! `docs/spatial.md`; unknown keys are rejected with line and column.

use super::correlation::Family;
use super::kriging::Interpolator;
use super::variogram::{Bins, Direction, Estimator};
use crate::io::error::IoError;
use crate::io::study::Study;
use serde::Deserialize;

/// The study-file document as far as this stage reads it.
#[derive(Debug, Deserialize, Default)]
pub struct MappingDoc {
    /// `[mapping]`.
    #[serde(default)]
    pub mapping: Option<MappingSection>,
}

/// `[mapping]` as written in the study file (all keys optional).
#[derive(Debug, Clone, Deserialize, Default, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct MappingSection {
    /// `auto` (default), `ordinary`, `universal`, `external_drift`, `idw`,
    /// `nearest`.
    pub method: Option<String>,
    /// Variogram families to fit; default exponential, spherical, gaussian,
    /// matern_1.5, matern_2.5.
    pub families: Option<Vec<Family>>,
    /// Fit a nugget (default true); false fixes it at 0.
    pub nugget: Option<bool>,
    /// `matheron` (default) or `cressie_hawkins`.
    pub estimator: Option<String>,
    /// Number of equal-width lag bins (default: up to 12, see docs).
    pub bins: Option<usize>,
    /// Largest lag in metres (default half the largest sensor distance).
    pub max_lag: Option<f64>,
    /// Explicit bin edges in metres (overrides `bins` and `max_lag`).
    pub bin_edges: Option<Vec<f64>>,
    /// Moving neighbourhood: the k nearest sensors (default: all sensors).
    pub neighbours: Option<usize>,
    /// The opening whose distance is the external drift (required for
    /// `external_drift`; when set, `auto` also tries it).
    pub drift: Option<String>,
    /// Exponent of inverse-distance weighting (default 2).
    pub idw_power: Option<f64>,
    /// Directions (degrees from the x axis) of the directional variograms
    /// written for the anisotropy check (default 0, 45, 90, 135).
    pub directions: Option<Vec<f64>>,
    /// Half-width of each direction's window, degrees (default 22.5).
    pub angle_tolerance: Option<f64>,
}

/// A method request: one method, or the automatic choice.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum MethodChoice {
    /// Pick by leave-one-sensor-out cross-validation.
    Auto,
    /// This method.
    Fixed(Interpolator),
}

/// The validated `[mapping]` settings with defaults filled in.
#[derive(Clone, Debug, PartialEq)]
pub struct MappingConfig {
    /// Method or `auto`.
    pub method: MethodChoice,
    /// Families to fit.
    pub families: Vec<Family>,
    /// Fit a nugget.
    pub fit_nugget: bool,
    /// Semivariance estimator.
    pub estimator: Estimator,
    /// Number of bins, if given.
    pub bins: Option<usize>,
    /// Largest lag, if given.
    pub max_lag: Option<f64>,
    /// Explicit bins, if given.
    pub bin_edges: Option<Bins>,
    /// Moving neighbourhood size (`None`: all sensors).
    pub neighbours: Option<usize>,
    /// Opening used as external drift.
    pub drift: Option<String>,
    /// IDW exponent.
    pub idw_power: f64,
    /// Directional windows.
    pub directions: Vec<Direction>,
}

/// The default families.
pub fn default_families() -> Vec<Family> {
    vec![
        Family::Exponential,
        Family::Spherical,
        Family::Gaussian,
        Family::Matern { nu: 1.5 },
        Family::Matern { nu: 2.5 },
    ]
}

const METHODS: &[&str] = &["auto", "ordinary", "universal", "external_drift", "idw", "nearest"];

impl MappingConfig {
    /// Read and validate `[mapping]` of `study` (absent section: defaults).
    // IoError is the input stage's error type; its size is its own.
    #[allow(clippy::result_large_err)]
    pub fn from_study(study: &Study) -> Result<MappingConfig, IoError> {
        let doc: MappingDoc = study.section()?;
        MappingConfig::from_section(study, doc.mapping.unwrap_or_default())
    }

    /// Validate a parsed section; errors name the key.
    // IoError is the input stage's error type; its size is its own.
    #[allow(clippy::result_large_err)]
    pub fn from_section(study: &Study, s: MappingSection) -> Result<MappingConfig, IoError> {
        let idw_power = s.idw_power.unwrap_or(2.0);
        if !(idw_power.is_finite() && idw_power > 0.0) {
            return Err(study.invalid(
                "mapping.idw_power",
                format!("must be a positive number, got {idw_power}"),
                Some("2 is common practice".into()),
            ));
        }
        let name = s.method.as_deref().unwrap_or("auto").trim().to_ascii_lowercase();
        let method = match name.as_str() {
            "auto" => MethodChoice::Auto,
            "ordinary" => MethodChoice::Fixed(Interpolator::Ordinary),
            "universal" => MethodChoice::Fixed(Interpolator::Universal),
            "external_drift" => MethodChoice::Fixed(Interpolator::ExternalDrift),
            "idw" => MethodChoice::Fixed(Interpolator::Idw { power: idw_power }),
            "nearest" => MethodChoice::Fixed(Interpolator::Nearest),
            other => {
                let hint = crate::io::error::closest(other, METHODS.iter().copied())
                    .map(|c| format!("did you mean `{c}`?"));
                return Err(study.invalid(
                    "mapping.method",
                    format!("unknown method `{other}`; expected one of {}", METHODS.join(", ")),
                    hint,
                ));
            }
        };
        let estimator = match s.estimator.as_deref().unwrap_or("matheron") {
            "matheron" => Estimator::Matheron,
            "cressie_hawkins" => Estimator::CressieHawkins,
            other => {
                return Err(study.invalid(
                    "mapping.estimator",
                    format!("unknown estimator `{other}`"),
                    Some("use `matheron` or `cressie_hawkins`".into()),
                ));
            }
        };
        let families = s.families.unwrap_or_else(default_families);
        if families.is_empty() {
            return Err(study.invalid(
                "mapping.families",
                "needs at least one family",
                Some(format!("e.g. [\"exponential\"]; known: {}", Family::NAMES.join(", "))),
            ));
        }
        if let Some(b) = s.bins
            && b == 0
        {
            return Err(study.invalid(
                "mapping.bins",
                "must be at least 1",
                Some("12 is the default".into()),
            ));
        }
        if let Some(m) = s.max_lag
            && !(m.is_finite() && m > 0.0)
        {
            return Err(study.invalid(
                "mapping.max_lag",
                format!("must be a positive distance in metres, got {m}"),
                None,
            ));
        }
        let bin_edges = match s.bin_edges {
            Some(e) => Some(Bins::from_edges(e.clone()).map_err(|_| {
                study.invalid(
                    "mapping.bin_edges",
                    format!("{e:?} must be increasing non-negative distances in metres, at least two"),
                    Some("e.g. [0, 1, 2, 4, 8]".into()),
                )
            })?),
            None => None,
        };
        if s.neighbours == Some(0) || s.neighbours == Some(1) {
            return Err(study.invalid(
                "mapping.neighbours",
                "a neighbourhood needs at least 2 sensors",
                Some("leave it out to use every sensor".into()),
            ));
        }
        if method == MethodChoice::Fixed(Interpolator::ExternalDrift) && s.drift.is_none() {
            return Err(study.invalid(
                "mapping.drift",
                "method = \"external_drift\" needs a drift",
                Some("set drift = \"<opening name>\"".into()),
            ));
        }
        if let Some(d) = &s.drift {
            let names: Vec<&str> = study.spec.openings.iter().map(|o| o.name.as_str()).collect();
            if !names.contains(&d.as_str()) {
                let hint = crate::io::error::closest(d, names.iter().copied())
                    .map(|c| format!("did you mean `{c}`?"))
                    .or_else(|| {
                        Some(if names.is_empty() {
                            "declare the opening in [[openings]]".to_string()
                        } else {
                            format!("declared openings: {}", names.join(", "))
                        })
                    });
                return Err(study.invalid("mapping.drift", format!("no opening named `{d}`"), hint));
            }
        }
        let tol = s.angle_tolerance.unwrap_or(22.5);
        if !(tol > 0.0 && tol <= 90.0) {
            return Err(study.invalid(
                "mapping.angle_tolerance",
                format!("must be in (0, 90] degrees, got {tol}"),
                None,
            ));
        }
        let dirs = s.directions.unwrap_or_else(|| vec![0.0, 45.0, 90.0, 135.0]);
        if let Some(bad) = dirs.iter().find(|a| !a.is_finite()) {
            return Err(study.invalid(
                "mapping.directions",
                format!("angles must be numbers, got {bad}"),
                None,
            ));
        }
        Ok(MappingConfig {
            method,
            families,
            fit_nugget: s.nugget.unwrap_or(true),
            estimator,
            bins: s.bins,
            max_lag: s.max_lag,
            bin_edges,
            neighbours: s.neighbours,
            drift: s.drift,
            idw_power,
            directions: dirs.into_iter().map(|a| Direction { angle_deg: a, tolerance_deg: tol }).collect(),
        })
    }

    /// The lag bins for a sensor layout: explicit edges, else `bins` and
    /// `max_lag` with the defaults of [`Bins::default_for`].
    pub fn bins_for(&self, sensors: &super::geometry::Points) -> super::error::Result<Bins> {
        if let Some(b) = &self.bin_edges {
            return Ok(b.clone());
        }
        let def = Bins::default_for(sensors)?;
        Bins::equal(self.max_lag.unwrap_or(def.max_lag()), self.bins.unwrap_or(def.len()))
    }

    /// The candidate bins of the mapping stage's pooled variogram: the
    /// equal-width bins of [`MappingConfig::bins_for`], and unless the study
    /// sets `bins` or `bin_edges`, also bins that follow the sensor-pair
    /// distances ([`super::pair_bins::candidates`]); the stage keeps the one
    /// with the smallest leave-one-sensor-out RMSE.
    pub fn bin_candidates(&self, sensors: &super::geometry::Points) -> super::error::Result<Vec<Bins>> {
        let first = self.bins_for(sensors)?;
        if self.bin_edges.is_some() || self.bins.is_some() {
            return Ok(vec![first]);
        }
        let max_lag = first.max_lag();
        let mut out = vec![first];
        for b in super::pair_bins::candidates(sensors, max_lag) {
            if !out.contains(&b) {
                out.push(b);
            }
        }
        Ok(out)
    }

    /// The candidate methods that `auto` compares (and the baselines shown
    /// beside them): ordinary, universal, external drift (if a drift is
    /// set), IDW and nearest sensor.
    pub fn candidates(&self) -> Vec<Interpolator> {
        match self.method {
            MethodChoice::Fixed(m) => vec![m],
            MethodChoice::Auto => {
                let mut v = vec![Interpolator::Ordinary, Interpolator::Universal];
                if self.drift.is_some() {
                    v.push(Interpolator::ExternalDrift);
                }
                v.push(Interpolator::Idw { power: self.idw_power });
                v.push(Interpolator::Nearest);
                v
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::path::Path;

    const BASE: &str = r#"
[study]
title = "t"
timezone = "Europe/Amsterdam"
output = "out"

[pots]
file = "pots.csv"
id = "pot"
x = "x"
y = "y"

[[openings]]
name = "door"
from = [0.0, 0.0]
to = [0.0, 2.0]
"#;

    // IoError is the input stage's error type; its size is its own.
    #[allow(clippy::result_large_err)]
    fn cfg(extra: &str) -> Result<MappingConfig, IoError> {
        let study = Study::from_source(Path::new("dir/study.toml"), format!("{BASE}\n{extra}")).unwrap();
        MappingConfig::from_study(&study)
    }

    #[test]
    fn defaults_without_section() {
        let c = cfg("").unwrap();
        assert_eq!(c.method, MethodChoice::Auto);
        assert_eq!(c.families, default_families());
        assert!(c.fit_nugget && c.neighbours.is_none() && c.drift.is_none());
        assert_eq!(c.estimator, Estimator::Matheron);
        assert_eq!(c.directions.len(), 4);
        assert_eq!(c.candidates().len(), 4);
    }

    #[test]
    fn full_section() {
        let c = cfg(
            "[mapping]\nmethod = \"external_drift\"\nfamilies = [\"spherical\", \"matern_0.8\"]\nnugget = false\nestimator = \"cressie_hawkins\"\nbin_edges = [0, 1, 2.5]\nneighbours = 6\ndrift = \"door\"\nidw_power = 1.5\ndirections = [30]\nangle_tolerance = 15\n",
        )
        .unwrap();
        assert_eq!(c.method, MethodChoice::Fixed(Interpolator::ExternalDrift));
        assert_eq!(c.families, vec![Family::Spherical, Family::Matern { nu: 0.8 }]);
        assert!(!c.fit_nugget);
        assert_eq!(c.bin_edges.unwrap().edges, vec![0.0, 1.0, 2.5]);
        assert_eq!(c.neighbours, Some(6));
        assert_eq!(c.directions, vec![Direction { angle_deg: 30.0, tolerance_deg: 15.0 }]);
    }

    #[test]
    fn errors_name_the_key() {
        let e = cfg("[mapping]\nmethod = \"ordinnary\"\n").unwrap_err().to_string();
        assert!(e.contains("mapping.method") && e.contains("ordinnary") && e.contains("ordinary"), "{e}");
        let e = cfg("[mapping]\nmethd = \"auto\"\n").unwrap_err().to_string();
        assert!(e.contains("methd") && e.contains(":"), "{e}");
        let e = cfg("[mapping]\ndrift = \"dor\"\n").unwrap_err().to_string();
        assert!(e.contains("dor") && e.contains("door"), "{e}");
        let e = cfg("[mapping]\nmethod = \"external_drift\"\n").unwrap_err().to_string();
        assert!(e.contains("mapping.drift"), "{e}");
        let e = cfg("[mapping]\nfamilies = [\"expo\"]\n").unwrap_err().to_string();
        assert!(e.contains("expo"), "{e}");
        assert!(cfg("[mapping]\nbin_edges = [2, 1]\n").is_err());
        assert!(cfg("[mapping]\nneighbours = 1\n").is_err());
        assert!(cfg("[mapping]\nangle_tolerance = 100\n").is_err());
    }
}
