//! The CSV files of the mapping stage: `pot_covariates.csv`,
//! `variograms.csv`, `variogram_fits.csv` and `mapping_cv.csv`. Each writer
//! returns the file's bytes for [`crate::io::output::StageWriter::write`], so
//! that the stage's files are published together. Formats: `docs/spatial.md`.
//! Every table is written in the one CSV format of [`crate::io::output`]
//! (shortest round-trip numbers; an undefined value is an empty cell). The
//! stage's file names are defined here once (the `distance_` column prefix in
//! [`super::geometry`], which computes the distances).

use super::correlation::Family;
use super::error::{Result, SpatialError};
use super::geometry::DISTANCE_PREFIX;
use super::kriging::Interpolator;
use super::mapping::CvScore;
use super::variogram::{Empirical, MlFit, VariogramFit};
use super::window_se::Calibration;
use crate::io::output::{CsvTable, number, opt_number};

/// File name of the mapped drivers per pot.
pub const POT_COVARIATES_FILE: &str = "pot_covariates.csv";
/// File name of the empirical variograms and the fitted models at their lags.
pub const VARIOGRAMS_FILE: &str = "variograms.csv";
/// File name of the weighted least-squares variogram fits.
pub const VARIOGRAM_FITS_FILE: &str = "variogram_fits.csv";
/// File name of the leave-one-sensor-out scores of the mapping methods.
pub const MAPPING_CV_FILE: &str = "mapping_cv.csv";
/// File name of the maximum-likelihood variogram fits.
pub const VARIOGRAM_ML_FITS_FILE: &str = "variogram_ml_fits.csv";
/// File name of the map's self-check at every logger.
pub const MAPPING_CHECK_FILE: &str = "mapping_check.csv";
/// File name of the table that says how each indicator's standard errors were made.
pub const MAPPING_SE_FILE: &str = "mapping_se.csv";
/// File name of the time shares of the positions each moving pot held.
pub const POT_PATHS_FILE: &str = "pot_paths.csv";
/// File name of each moving pot's drivers along its path and without moves.
pub const POT_PATHS_EXPOSURE_FILE: &str = "pot_paths_exposure.csv";
/// File name of each driver's spread across pots with and without moves.
pub const PATHS_SPREAD_FILE: &str = "paths_spread.csv";

/// One indicator and family with its maximum-likelihood variogram fit
/// (`None` where the fit failed), as carried by the mapping run.
pub type MlFitRow = (String, Family, Option<MlFit>);

/// One mapped indicator: a value and (optionally) a standard error per pot.
#[derive(Clone, Debug, PartialEq)]
pub struct MappedColumn {
    /// Indicator name (`<name>` and `<name>_se` columns).
    pub name: String,
    /// Value per pot.
    pub value: Vec<f64>,
    /// Standard error per pot (`None`: the `_se` column is empty, e.g. for
    /// IDW or nearest sensor).
    pub se: Option<Vec<f64>>,
}

/// `pot_covariates.csv`: column `pot`, then `<name>` and `<name>_se` for
/// every indicator, then `distance_<opening>` for every opening (metres).
pub fn pot_covariates_csv(
    pots: &[String],
    indicators: &[MappedColumn],
    openings: &[(String, Vec<f64>)],
) -> Result<Vec<u8>> {
    let n = pots.len();
    for c in indicators {
        if c.value.len() != n || c.se.as_ref().is_some_and(|s| s.len() != n) {
            return Err(SpatialError::BadInput {
                what: format!("indicator `{}`", c.name),
                message: format!("values for {} pots expected", n),
            });
        }
    }
    for (name, d) in openings {
        if d.len() != n {
            return Err(SpatialError::BadInput {
                what: format!("{DISTANCE_PREFIX}{name}"),
                message: format!("{} values for {n} pots", d.len()),
            });
        }
    }
    let mut head = vec!["pot".to_string()];
    for c in indicators {
        head.push(c.name.clone());
        head.push(format!("{}_se", c.name));
    }
    for (name, _) in openings {
        head.push(format!("{DISTANCE_PREFIX}{name}"));
    }
    let mut w = CsvTable::new(&head);
    for i in 0..n {
        let mut r = vec![pots[i].clone()];
        for c in indicators {
            r.push(number(c.value[i]));
            r.push(opt_number(c.se.as_ref().map(|s| s[i])));
        }
        for (_, d) in openings {
            r.push(number(d[i]));
        }
        w.row(&r);
    }
    Ok(w.into_bytes())
}

/// One variogram of `variograms.csv`: the variable's name, the empirical
/// bins, and the fitted models to evaluate at the bins' lags.
pub struct VariogramTable<'a> {
    /// The variable (an indicator or a climate channel).
    pub variable: &'a str,
    /// The empirical variogram.
    pub empirical: &'a Empirical,
    /// Fitted models, one column `model_<family>` each.
    pub fits: &'a [(Family, Option<VariogramFit>)],
}

/// `variograms.csv`: one row per variable, direction and bin: `variable`,
/// `direction` (degrees, empty = omnidirectional), `tolerance`,
/// `estimator`, `bin_from`, `bin_to`, `lag`, `semivariance`, `pairs`, `steps`,
/// then `model_<family>` (the fitted model's semivariance at `lag`) for every
/// family of the first table (all tables must list the same families).
pub fn variograms_csv(tables: &[VariogramTable]) -> Result<Vec<u8>> {
    let fams: Vec<Family> = tables.first().map(|t| t.fits.iter().map(|f| f.0).collect()).unwrap_or_default();
    let mut head: Vec<String> = [
        "variable",
        "direction",
        "tolerance",
        "estimator",
        "bin_from",
        "bin_to",
        "lag",
        "semivariance",
        "pairs",
        "steps",
    ]
    .iter()
    .map(|s| s.to_string())
    .collect();
    head.extend(fams.iter().map(|f| format!("model_{}", f.name())));
    let mut w = CsvTable::new(&head);
    for t in tables {
        let tf: Vec<Family> = t.fits.iter().map(|f| f.0).collect();
        if tf != fams {
            return Err(SpatialError::BadInput {
                what: VARIOGRAMS_FILE.into(),
                message: format!("variable `{}` lists other families", t.variable),
            });
        }
        for b in &t.empirical.bins {
            let mut r = vec![
                t.variable.to_string(),
                opt_number(t.empirical.direction.map(|d| d.angle_deg)),
                opt_number(t.empirical.direction.map(|d| d.tolerance_deg)),
                t.empirical.estimator.name().to_string(),
                number(b.from),
                number(b.to),
                number(b.lag),
                opt_number(b.semivariance),
                b.pairs.to_string(),
                b.steps.to_string(),
            ];
            for (_, f) in t.fits {
                r.push(opt_number(f.map(|f| f.model.semivariance(b.lag))));
            }
            w.row(&r);
        }
    }
    Ok(w.into_bytes())
}

/// One variable of `variogram_fits.csv`: its name, every family's fit, and
/// the family chosen.
pub type FitsRow<'a> = (&'a str, &'a [(Family, Option<VariogramFit>)], Option<Family>);

/// One variable of `mapping_cv.csv`: its name, the scores of every method, and
/// the choice of `auto` (index into the scores, and the reason).
pub type CvRow<'a> = (&'a str, &'a [CvScore], Option<(usize, String)>);

/// `variogram_fits.csv`: one row per variable and family: `variable`,
/// `family`, `nugget`, `partial_sill`, `sill`, `range` (the range
/// parameter), `practical_range`, `criterion` (Cressie's WLS criterion),
/// `bins_used`, `on_bound`, `chosen`. A family that could not be fitted has
/// empty cells.
pub fn variogram_fits_csv(rows: &[FitsRow]) -> Result<Vec<u8>> {
    let mut w = CsvTable::new([
        "variable",
        "family",
        "nugget",
        "partial_sill",
        "sill",
        "range",
        "practical_range",
        "criterion",
        "bins_used",
        "on_bound",
        "chosen",
    ]);
    for (var, fits, chosen) in rows {
        for (fam, f) in fits.iter() {
            let m = f.map(|f| f.model);
            w.row([
                var.to_string(),
                fam.name(),
                opt_number(m.map(|m| m.nugget)),
                opt_number(m.map(|m| m.partial_sill)),
                opt_number(m.map(|m| m.sill())),
                opt_number(m.map(|m| m.range)),
                opt_number(m.map(|m| m.practical_range())),
                opt_number(f.map(|f| f.criterion)),
                f.map(|f| f.bins_used.to_string()).unwrap_or_default(),
                f.map(|f| f.on_bound.to_string()).unwrap_or_default(),
                (Some(*fam) == *chosen).to_string(),
            ]);
        }
    }
    Ok(w.into_bytes())
}

/// `mapping_cv.csv`: one row per variable and method: `variable`, `method`,
/// `n` (predictions compared), `rmse`, `mean_error`, `msse` (empty for IDW
/// and nearest sensor), `chosen`, `reason` (why `auto` chose it, on the
/// chosen row), `drift` (the opening whose decaying distance is the external
/// drift, else empty) and `decay_length` (its decay length `L` in metres,
/// estimated by cross-validation, else empty), `route` (`per_step`: the
/// variable's per-step series scored step by step). Then, per indicator whose
/// route was weighed ([`super::indicator_route`]), two rows with the
/// indicator's name as `variable`, scored on its left-out window values at
/// the loggers: `route` `per_step_pooled` (the map from the per-step
/// kriging, `method` as chosen above) and `indicator_variogram` (the
/// indicator kriged with its own REML variogram); `n` is the loggers
/// compared, `chosen` marks the route that maps it and `reason` says why.
pub fn mapping_cv_csv(rows: &[CvRow], routes: &[&super::indicator_route::RouteChoice]) -> Result<Vec<u8>> {
    let mut w = CsvTable::new([
        "variable",
        "method",
        "n",
        "rmse",
        "mean_error",
        "msse",
        "chosen",
        "reason",
        "drift",
        "decay_length",
        "route",
    ]);
    for (var, scores, choice) in rows {
        for (i, s) in scores.iter().enumerate() {
            let chosen = choice.as_ref().is_some_and(|(k, _)| *k == i);
            w.row([
                var.to_string(),
                s.method.name().to_string(),
                s.n.to_string(),
                number(s.rmse),
                number(s.mean_error),
                opt_number(s.msse),
                chosen.to_string(),
                if chosen { choice.as_ref().map(|c| c.1.clone()).unwrap_or_default() } else { String::new() },
                s.drift.as_ref().map(|d| d.0.clone()).unwrap_or_default(),
                opt_number(s.drift.as_ref().map(|d| d.1)),
                "per_step".to_string(),
            ]);
        }
    }
    for r in routes {
        let drift = |m: Interpolator| match (&r.drift, m) {
            (Some((o, l)), Interpolator::ExternalDrift) => [o.clone(), number(*l)],
            _ => [String::new(), String::new()],
        };
        for (route, m, s, chosen) in [
            ("per_step_pooled", r.pooled_method, &r.pooled, !r.direct_chosen),
            ("indicator_variogram", r.method, &r.direct, r.direct_chosen),
        ] {
            let [o, l] = drift(m);
            w.row([
                r.indicator.clone(),
                m.name().to_string(),
                s.n.to_string(),
                number(s.rmse),
                number(s.mean_error),
                opt_number(s.msse),
                chosen.to_string(),
                if chosen { r.reason() } else { String::new() },
                o,
                l,
                route.to_string(),
            ]);
        }
    }
    Ok(w.into_bytes())
}

/// `mapping_se.csv`: one row per indicator: `indicator`, `se_from`
/// (`per_step_errors`: the per-step kriging errors with a persistent share
/// calibrated on the left-out loggers, [`super::window_se`];
/// `kriged_window_values`: the loggers' study-period values kriged),
/// `persistent_share`, `inflation`, `loggers` (left-out loggers used),
/// `median_z2` (their median squared standardised error after calibration),
/// `noise_variance` (the readings' measurement-error variance left out of the
/// pots' SEs, [`super::noise`]).
pub fn mapping_se_csv(indicators: &[MappedColumn], window_se: &[Option<Calibration>]) -> Vec<u8> {
    let mut t = CsvTable::new([
        "indicator",
        "se_from",
        "step_se_scale",
        "persistent_share",
        "inflation",
        "loggers",
        "median_z2",
        "noise_variance",
    ]);
    for (col, c) in indicators.iter().zip(window_se) {
        let mut r = vec![col.name.clone()];
        match c {
            Some(c) => r.extend([
                "per_step_errors".to_string(),
                number(c.step_scale),
                number(c.share),
                number(c.inflation),
                c.loggers.to_string(),
                number(c.median_z2),
                number(c.noise),
            ]),
            None => r.extend([
                "kriged_window_values".to_string(),
                String::new(),
                String::new(),
                String::new(),
                String::new(),
                String::new(),
                String::new(),
            ]),
        }
        t.row(r);
    }
    t.into_bytes()
}

/// `variogram_ml_fits.csv`: one row per indicator and family, the variogram
/// fitted by maximum likelihood to the indicator's study-period values at the
/// sensors: `variable,family,nugget,partial_sill,sill,range,practical_range,
/// loglik,aic,evaluations,at_bounds` (AIC counts mean, sigma², range and, when
/// fitted, the nugget share). Empty cells where the fit failed (fewer than three
/// sensors with a value).
pub fn variogram_ml_fits_csv(fits: &[MlFitRow], nugget: bool) -> Vec<u8> {
    let mut t = CsvTable::new([
        "variable",
        "family",
        "nugget",
        "partial_sill",
        "sill",
        "range",
        "practical_range",
        "loglik",
        "aic",
        "evaluations",
        "at_bounds",
    ]);
    for (name, fam, f) in fits {
        let mut r = vec![name.clone(), fam.name()];
        match f {
            Some(f) => {
                let m = &f.model;
                // Parameters: mean, sigma², range, and the nugget share when it was estimated.
                let k = if nugget { 4 } else { 3 };
                r.extend([
                    number(m.nugget),
                    number(m.partial_sill),
                    number(m.sill()),
                    number(m.range),
                    number(m.practical_range()),
                    number(f.loglik),
                    number(super::likelihood::aic(f.loglik, k)),
                    f.evaluations.to_string(),
                    f.at_bounds.join("+"),
                ]);
            }
            None => r.extend(std::iter::repeat_n(String::new(), 9)),
        }
        t.row(r);
    }
    t.into_bytes()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::spatial::kriging::Interpolator;
    use crate::spatial::variogram::{Bins, Estimator, FitOptions, experimental, fit_families};

    fn parse(bytes: &[u8]) -> Vec<Vec<String>> {
        let mut r = csv::ReaderBuilder::new().has_headers(false).from_reader(bytes);
        r.records().map(|x| x.unwrap().iter().map(String::from).collect()).collect()
    }

    #[test]
    fn pot_covariates_layout() {
        let b = pot_covariates_csv(
            &["A1".into(), "A,2".into()],
            &[
                MappedColumn { name: "cold_hours".into(), value: vec![1.5, 2.0], se: Some(vec![0.25, 0.5]) },
                MappedColumn { name: "dli".into(), value: vec![10.0, 11.0], se: None },
            ],
            &[("door".into(), vec![3.0, 4.5])],
        )
        .unwrap();
        let rows = parse(&b);
        assert_eq!(rows[0], ["pot", "cold_hours", "cold_hours_se", "dli", "dli_se", "distance_door"]);
        assert_eq!(rows[2], ["A,2", "2", "0.5", "11", "", "4.5"]);
        assert!(
            pot_covariates_csv(
                &["A".into()],
                &[MappedColumn { name: "x".into(), value: vec![], se: None }],
                &[]
            )
            .is_err()
        );
    }

    #[test]
    fn variogram_and_cv_tables() {
        let (p, z) = crate::spatial::kriging::testdata::topo();
        let bins = Bins::equal(3.0, 3).unwrap();
        let e = experimental(&p, &z, &bins, Estimator::Matheron, None).unwrap();
        let fits = fit_families(&e, &[Family::Exponential, Family::Spherical], &FitOptions::default());
        let rows =
            parse(&variograms_csv(&[VariogramTable { variable: "z", empirical: &e, fits: &fits }]).unwrap());
        assert_eq!(rows[0].last().unwrap(), "model_spherical");
        assert_eq!(rows.len(), 4);
        assert_eq!(rows[1][8], e.bins[0].pairs.to_string());
        let m: f64 = rows[2][10].parse().unwrap();
        assert_eq!(m, fits[0].1.unwrap().model.semivariance(e.bins[1].lag));
        let rows = parse(&variogram_fits_csv(&[("z", fits.as_slice(), Some(Family::Spherical))]).unwrap());
        assert_eq!(rows[2][1], "spherical");
        assert_eq!(rows[2][10], "true");
        let scores = vec![
            CvScore {
                method: Interpolator::Ordinary,
                n: 5,
                rmse: 1.0,
                mean_error: 0.1,
                msse: Some(1.1),
                warnings: vec![],
                drift: None,
            },
            CvScore {
                method: Interpolator::Nearest,
                n: 5,
                rmse: 2.0,
                mean_error: 0.2,
                msse: None,
                warnings: vec![],
                drift: None,
            },
            CvScore {
                method: Interpolator::ExternalDrift,
                n: 5,
                rmse: 0.5,
                mean_error: 0.0,
                msse: Some(0.9),
                warnings: vec![],
                drift: Some(("door".into(), 2.5)),
            },
        ];
        let rows =
            parse(&mapping_cv_csv(&[("z", scores.as_slice(), Some((0, "because".into())))], &[]).unwrap());
        assert_eq!(rows[1], ["z", "ordinary", "5", "1", "0.1", "1.1", "true", "because", "", "", "per_step"]);
        assert_eq!(rows[2][5], "");
        assert_eq!(rows[3][8..10], ["door", "2.5"]);
    }
}
