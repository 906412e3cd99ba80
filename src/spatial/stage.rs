//! The mapping stage (`potclim map`): from the climate stage's regular sensor
//! series to every pot's indicator values with standard errors, plus the
//! distance of every pot to every opening.
//!
//! For each climate variable an indicator needs (temperature, humidity,
//! light; VPD and dew point need temperature and humidity):
//! 1. the pooled variogram of the per-step anomalies at the sensors (the mean
//!    removed at each step) is fitted for every configured family, and the
//!    best fit by Cressie's criterion is kept ([`super::mapping::choose_model`]);
//!    its lag bins are equal-width or follow the sensor-pair distances
//!    ([`super::pair_bins`]), whichever gives ordinary kriging the smaller
//!    leave-one-sensor-out RMSE (the external drift's decay length is searched
//!    with both when they differ);
//! 2. every candidate method is scored by leave-one-sensor-out
//!    cross-validation over all time steps, and `auto` picks one
//!    ([`super::mapping::choose`]);
//! 3. the whole series is mapped onto every pot with weights computed once per
//!    set of reporting sensors ([`super::mapping::map_series`]).
//!
//! For an indicator of one kriged variable on pots that stay put, the
//! indicator's own variogram is a second route: its values at the loggers
//! kriged directly under a REML variogram with the variable's drift
//! ([`super::indicator_route`]); the left-out loggers choose between the two
//! routes, and the chosen one gives the pots' values, SEs and the check.
//!
//! Pots that move (`[pots] moves`, [`super::paths`]): the targets of step 3
//! are every position ever held, and each pot's series is gathered from the
//! position it held at each step before anything below; without moves the
//! targets are the pots and nothing is gathered.
//!
//! Each pot's indicator is then computed from the pot's own mapped series by
//! the climate stage's per-location code (so that non-linear indicators such
//! as hours below a threshold come from the mapped series itself, not from a
//! mapped summary), per local day, and combined over the pot's own growth
//! window (`[pots].start`/`end`, else the study period).
//!
//! Standard errors of window indicators ([`super::window_se`], stated in
//! `docs/spatial.md`): each step's kriging error is split into a part shared
//! by all steps and a part of its own; the window indicator's variance is the
//! law of total variance over the two, with the per-step SEs scaled and the
//! shared share estimated from the left-out loggers' per-step errors, and the
//! window variances widened when the left-out loggers' window check rejects
//! them. At the pots the per-step SEs leave out the sensors' measurement
//! error ([`super::noise`]): a pot's true climate carries no sensor noise. An indicator the per-step route cannot handle (not a function of
//! one kriged variable) falls back to kriging its study-period values at the
//! sensors with the variable's variogram shape and their own profiled sill
//! ([`super::mapping::map_summary`]); for a summed indicator that SE is
//! scaled by the pot's share of the study period's valid days.

use super::config::{MappingConfig, MethodChoice};
use super::error::SpatialError;
use super::exposure::PotSeries;
use super::geometry::{Points, opening_distances, pot_points, sensor_points};
use super::kriging::{Drift, Interpolator, Spec};
use super::mapping::{CvScore, ModelChoice, choose, choose_model, loso, map_series, map_summary};
use super::outputs::{
    MAPPING_CHECK_FILE, MAPPING_CV_FILE, MAPPING_SE_FILE, MappedColumn, POT_COVARIATES_FILE,
    VARIOGRAM_FITS_FILE, VARIOGRAM_ML_FITS_FILE, VARIOGRAMS_FILE, mapping_cv_csv, mapping_se_csv,
    pot_covariates_csv, variogram_fits_csv, variogram_ml_fits_csv, variograms_csv,
};
use super::paths::{Evened, Paths};
use super::stage_check::{PotWindowSe, self_check, single_kriged};
use super::variogram::{Detrend, Empirical, FitOptions, VariogramFit, pooled};
use crate::climate::config::Variable;
use crate::climate::{ClimateError, ClimateRun, Combine};
use crate::io::layout::{Pots, Sensors, load_pots, load_sensors};
use crate::io::output::StageWriter;
use crate::io::study::Study;
use crate::io::{IoError, ingest};
use nalgebra::DMatrix;
use std::path::PathBuf;

/// An error of the mapping stage.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum MapError {
    /// Input error.
    #[error(transparent)]
    Io(#[from] Box<IoError>),
    /// Climate-stage error.
    #[error(transparent)]
    Climate(#[from] Box<ClimateError>),
    /// Spatial error.
    #[error("{0}")]
    Spatial(#[from] SpatialError),
    /// Something the study does not provide.
    #[error("{0}")]
    Missing(String),
}

impl From<IoError> for MapError {
    fn from(e: IoError) -> Self {
        MapError::Io(Box::new(e))
    }
}

impl From<ClimateError> for MapError {
    fn from(e: ClimateError) -> Self {
        MapError::Climate(Box::new(e))
    }
}

/// Intervals of the fitted variogram curves in [`VariableMap::fit_curves`].
pub const CURVE_STEPS: usize = 60;

/// One mapped climate variable.
#[derive(Debug, Clone)]
pub struct VariableMap {
    /// `temperature`, `humidity` or `light`.
    pub name: &'static str,
    /// Pooled omnidirectional variogram of the per-step anomalies.
    pub empirical: Empirical,
    /// Directional pooled variograms (anisotropy check).
    pub directional: Vec<Empirical>,
    /// Every family's WLS fit.
    pub fits: Vec<(crate::spatial::correlation::Family, Option<VariogramFit>)>,
    /// Every fitted family's model at [`CURVE_STEPS`]` + 1` lags from 0 to
    /// the upper edge of the last bin, `[lag m, semivariance]`; parallel to
    /// `fits` (`None` where the family could not be fitted).
    pub fit_curves: Vec<Option<Vec<[f64; 2]>>>,
    /// The family kriging uses (`None`: documented fallback).
    pub chosen_family: Option<crate::spatial::correlation::Family>,
    /// The kriging spec used to map.
    pub spec: Spec,
    /// Cross-validation score of every candidate method.
    pub cv: Vec<CvScore>,
    /// The method `auto` chose (index into `cv`) and why.
    pub choice: Option<(usize, String)>,
    /// Warnings (fallbacks).
    pub warnings: Vec<String>,
    /// Mapped series, steps x pots (NaN = no sensor reported); for pots
    /// that move, each pot's series along its path.
    pub mapped: DMatrix<f64>,
    /// Standard error of every mapped step, steps x pots (`None` for IDW and
    /// nearest sensor): of the pot's true, noise-free value, the kriging
    /// variance (nugget included) less the sensors' measurement-error
    /// variance `noise` ([`super::noise::noise_free_se`]).
    pub mapped_se: Option<DMatrix<f64>>,
    /// The sensors' measurement-error variance, estimated from the temporal
    /// structure of the readings ([`super::noise`]; `None` for IDW and
    /// nearest sensor, or when it cannot be estimated: nothing is removed).
    pub noise: Option<super::noise::MeasurementError>,
}

/// Everything `potclim map` computed.
#[derive(Debug, Clone)]
pub struct MapRun {
    /// Pot ids, in pot-table order.
    pub pots: Vec<String>,
    /// Pot positions.
    pub pot_points: Points,
    /// Sensor positions, in the climate grid's sensor order.
    pub sensor_points: Points,
    /// The mapped variables.
    pub variables: Vec<VariableMap>,
    /// Each indicator at each pot over the pot's window, with SE.
    pub indicators: Vec<MappedColumn>,
    /// `distance_<opening>` per pot, metres.
    pub distances: Vec<(String, Vec<f64>)>,
    /// Per indicator and family: the variogram fitted by maximum likelihood
    /// to the indicator's study-period values at the sensors (constant mean).
    pub ml_fits: Vec<super::outputs::MlFitRow>,
    /// Whether the ML fits estimated a nugget share (`[mapping].nugget`).
    pub ml_nugget: bool,
    /// Leave-one-sensor-out check of every indicator at every logger.
    pub checks: Vec<super::selfcheck::SensorCheck>,
    /// Per indicator (parallel to `indicators`): the calibrated persistence
    /// of the per-step kriging errors behind its SEs
    /// ([`super::window_se`]); `None` where the SEs come from the
    /// indicator's kriged study-period values.
    pub window_se: Vec<Option<super::window_se::Calibration>>,
    /// Per indicator (parallel to `indicators`): the choice between the
    /// pooled per-step route and the indicator's own variogram
    /// ([`super::indicator_route`]); `None` where it was not weighed.
    pub routes: Vec<Option<super::indicator_route::RouteChoice>>,
    /// Pots that move (`[pots] moves`): their paths and time shares; `None`
    /// without a move table. `variables[..].mapped` then holds each pot's
    /// series along its path.
    pub moves: Option<super::paths::MovedPots>,
    /// Each pot's growth window, as a range of the calendar's days.
    pub windows: Vec<std::ops::Range<usize>>,
}

pub(super) fn base_variables(v: Variable) -> &'static [&'static str] {
    match v {
        Variable::Temperature => &["temperature"],
        Variable::Humidity => &["humidity"],
        Variable::Light => &["light"],
        Variable::Vpd | Variable::DewPoint => &["temperature", "humidity"],
    }
}

pub(super) fn matrix_of(m: &crate::climate::StepMatrix) -> DMatrix<f64> {
    DMatrix::from_row_slice(m.n_steps, m.n_cols, &m.data)
}

/// Sensor positions in the order of the climate grid's sensors.
fn grid_sensor_points(study: &Study, sensors: &Sensors, grid_ids: &[String]) -> Result<Points, MapError> {
    let all = sensor_points(sensors, study.spec.compartment)?;
    let index = sensors.index();
    let mut idx = Vec::with_capacity(grid_ids.len());
    for id in grid_ids {
        match index.get(id.as_str()) {
            Some(&i) => idx.push(i),
            None => {
                return Err(MapError::Missing(format!(
                    "sensor `{id}` has readings but no position in the sensor table"
                )));
            }
        }
    }
    Ok(all.subset(&idx))
}

/// An opening as a candidate external drift: its name and the distances of
/// the sensors and the pots to it, metres.
pub(super) struct OpeningDrift {
    pub(super) name: String,
    pub(super) at_sensors: Vec<f64>,
    pub(super) at_pots: Vec<f64>,
}

/// The range bounds of the variogram fits: from 2 % of the largest lag to
/// the largest sensor-pair distance (a longer range than the layout's extent
/// cannot be told apart from a trend, so it is not identifiable).
fn range_bounds(sensors: &Points, bins: &super::variogram::Bins) -> Option<(f64, f64)> {
    let hi = sensors.max_distance();
    let lo = 0.02 * bins.max_lag();
    (hi.is_finite() && hi > lo && lo > 0.0).then_some((lo, hi))
}

fn map_variable(
    name: &'static str,
    series: DMatrix<f64>,
    sensors: &Points,
    pots: &Points,
    cfg: &MappingConfig,
    openings: &[OpeningDrift],
) -> Result<VariableMap, MapError> {
    // Variance of the anomalies, for the fallback model.
    let (mut s2, mut cnt) = (0.0, 0usize);
    for t in 0..series.nrows() {
        let row: Vec<f64> = series.row(t).iter().copied().filter(|v| v.is_finite()).collect();
        if row.len() > 1 {
            let m = row.iter().sum::<f64>() / row.len() as f64;
            s2 += row.iter().map(|v| (v - m).powi(2)).sum::<f64>();
            cnt += row.len() - 1;
        }
    }
    let variance = if cnt > 0 { s2 / cnt as f64 } else { f64::NAN };
    // The lag bins: equal widths, or bins that follow the sensor-pair
    // distances, whichever gives ordinary kriging the smaller
    // leave-one-sensor-out RMSE (`super::pair_bins`).
    let candidates = cfg.bin_candidates(sensors)?;
    let scores: Vec<Option<f64>> = if candidates.len() < 2 {
        vec![Some(0.0)]
    } else {
        candidates
            .iter()
            .map(|b| {
                let emp = pooled(sensors, &series, b, cfg.estimator, None, &Detrend::Mean).ok()?;
                let opts = FitOptions { fit_nugget: cfg.fit_nugget, range_bounds: range_bounds(sensors, b) };
                let mc = choose_model(&emp, &cfg.families, &opts, sensors, variance).ok()?;
                mc.chosen?; // the fallback model is not a fit to these bins
                let spec = Spec {
                    method: Interpolator::Ordinary,
                    model: mc.model,
                    neighbours: cfg.neighbours,
                    drift: None,
                };
                loso(sensors, &series, &spec).ok().flatten().map(|s| s.rmse)
            })
            .collect()
    };
    let bins = candidates[super::pair_bins::pick(&scores).unwrap_or(0)].clone();
    let empirical = pooled(sensors, &series, &bins, cfg.estimator, None, &Detrend::Mean)?;
    let mut directional = Vec::new();
    for d in &cfg.directions {
        directional.push(pooled(sensors, &series, &bins, cfg.estimator, Some(*d), &Detrend::Mean)?);
    }
    let opts = FitOptions { fit_nugget: cfg.fit_nugget, range_bounds: range_bounds(sensors, &bins) };
    let choice_model = choose_model(&empirical, &cfg.families, &opts, sensors, variance)?;
    let mut warnings: Vec<String> = choice_model.warning.iter().cloned().collect();
    let spec_for = |m: Interpolator| Spec {
        method: m,
        model: choice_model.model,
        neighbours: cfg.neighbours,
        drift: None,
    };
    // Every candidate: its score, the spec that maps with it, and its variogram.
    let mut cv: Vec<CvScore> = Vec::new();
    let mut specs: Vec<Spec> = Vec::new();
    let mut variograms: Vec<(Empirical, ModelChoice)> = Vec::new();
    for m in cfg.candidates() {
        if m == Interpolator::ExternalDrift {
            continue;
        }
        match loso(sensors, &series, &spec_for(m)) {
            Ok(Some(score)) => {
                cv.push(score);
                specs.push(spec_for(m));
                variograms.push((empirical.clone(), choice_model.clone()));
            }
            Ok(None) => {}
            Err(e) => warnings.push(format!("{name}: {} skipped in cross-validation: {e}", m.name())),
        }
    }
    // Openings as external drift `exp(-d / L)`, L chosen by cross-validation
    // (`super::drift`): every declared opening for `auto`, the named one for
    // `external_drift`.
    let drift_openings: Vec<&OpeningDrift> = match cfg.method {
        MethodChoice::Auto => openings.iter().collect(),
        MethodChoice::Fixed(Interpolator::ExternalDrift) => {
            openings.iter().filter(|o| cfg.drift.as_deref() == Some(o.name.as_str())).collect()
        }
        MethodChoice::Fixed(_) => Vec::new(),
    };
    for o in drift_openings {
        let grid = super::drift::length_grid(&o.at_sensors, sensors.max_distance(), 12);
        // The method at decay length `l` with the variogram fitted on bins `b`.
        let at = |l: f64, b: &super::variogram::Bins| {
            let v = super::drift::decay(&o.at_sensors, l);
            let emp = pooled(sensors, &series, b, cfg.estimator, None, &Detrend::Drift(v.clone()))?;
            let opts = FitOptions { fit_nugget: cfg.fit_nugget, range_bounds: range_bounds(sensors, b) };
            let Ok(mc) = choose_model(&emp, &cfg.families, &opts, sensors, variance) else {
                return Ok(None);
            };
            let spec = Spec {
                method: Interpolator::ExternalDrift,
                model: mc.model,
                neighbours: cfg.neighbours,
                drift: Some(Drift {
                    name: o.name.clone(),
                    at_sensors: v,
                    at_targets: super::drift::decay(&o.at_pots, l),
                }),
            };
            Ok(match loso(sensors, &series, &spec) {
                Ok(Some(mut score)) => {
                    score.drift = Some((o.name.clone(), l));
                    Some((score.rmse, (score, spec, emp, mc)))
                }
                _ => None,
            })
        };
        // The decay length is searched with the equal-width bins and, when
        // cross-validation chose others above, with those too; the smaller
        // leave-one-sensor-out RMSE is kept.
        let mut search = super::drift::search_length(&grid, 8, |l| at(l, &candidates[0]));
        if bins != candidates[0] {
            let other = super::drift::search_length(&grid, 8, |l| at(l, &bins));
            let better = match (&search, &other) {
                (Ok(Some(a)), Ok(Some(b))) => b.best.0 < a.best.0,
                (Ok(Some(_)), _) => false,
                _ => true,
            };
            if better {
                search = other;
            }
        }
        match search {
            Ok(Some(found)) => {
                let (_, (score, spec, emp, mc)) = found.best;
                cv.push(score);
                specs.push(spec);
                variograms.push((emp, mc));
            }
            Ok(None) => warnings.push(format!(
                "{name}: the opening `{}` as external drift could not be cross-validated at any decay length",
                o.name
            )),
            Err(e) => {
                warnings.push(format!("{name}: the opening `{}` as external drift skipped: {e}", o.name))
            }
        }
    }
    let choice = choose(&cv);
    let pick = match cfg.method {
        MethodChoice::Fixed(m) => (0..cv.len()).find(|&i| cv[i].method == m),
        MethodChoice::Auto => choice.as_ref().map(|c| c.0),
    };
    let (spec, (empirical, choice_model)) = match pick {
        Some(i) => (specs[i].clone(), variograms[i].clone()),
        None => match cfg.method {
            MethodChoice::Fixed(Interpolator::ExternalDrift) => {
                return Err(MapError::Missing(format!(
                    "{name}: external drift on `{}` could not be fitted at any decay length",
                    cfg.drift.clone().unwrap_or_default()
                )));
            }
            MethodChoice::Fixed(m) => (spec_for(m), (empirical, choice_model)),
            MethodChoice::Auto => (spec_for(Interpolator::Ordinary), (empirical, choice_model)),
        },
    };
    let steps = series.nrows();
    let mut mapped = DMatrix::<f64>::from_element(steps, pots.len(), f64::NAN);
    let mut mapped_se =
        spec.method.is_kriging().then(|| DMatrix::<f64>::from_element(steps, pots.len(), f64::NAN));
    let summary = map_series(sensors, &series, pots, &spec, 256, |j, pred, se| {
        mapped.column_mut(j).copy_from_slice(pred);
        if let (Some(m), Some(se)) = (mapped_se.as_mut(), se) {
            m.column_mut(j).copy_from_slice(se);
        }
    })?;
    for w in summary.warnings {
        if !warnings.contains(&w) {
            warnings.push(w);
        }
    }
    // The sensors' noise is not the pots' climate (`super::noise`).
    let noise = mapped_se.as_ref().and_then(|_| super::noise::measurement_error(&series, spec.model.nugget));
    if let (Some(me), Some(m)) = (noise, mapped_se.as_mut()) {
        m.iter_mut().for_each(|s| *s = super::noise::noise_free_se(*s, me.variance));
    }
    let max_lag = empirical.bins.last().map(|b| b.to).unwrap_or(1.0);
    let fit_curves = choice_model
        .fits
        .iter()
        .map(|(_, f)| f.as_ref().map(|f| f.model.curve(max_lag, CURVE_STEPS)))
        .collect();
    Ok(VariableMap {
        name,
        empirical,
        directional,
        fit_curves,
        fits: choice_model.fits,
        chosen_family: choice_model.chosen,
        spec,
        cv,
        choice,
        warnings,
        mapped,
        mapped_se,
        noise,
    })
}

/// Map every declared indicator onto every pot. `climate` is the climate
/// stage's result for the same study.
pub fn compute(study: &Study, climate: &ClimateRun) -> Result<MapRun, MapError> {
    let cfg = MappingConfig::from_study(study)?;
    let pots_table: Pots = load_pots(study)?;
    let sensors_table = load_sensors(study)?.ok_or_else(|| {
        MapError::Missing("mapping needs a [sensors] table with the loggers' positions".into())
    })?;
    let pots = pot_points(&pots_table, study.spec.compartment)?;
    let sensors = grid_sensor_points(study, &sensors_table, &climate.grid.sensors)?;
    let cal = &climate.calendar;
    let all_days = 0..cal.days.len();
    let windows: Vec<std::ops::Range<usize>> = (0..pots.len())
        .map(|j| match (&pots_table.start, &pots_table.end) {
            (Some(s), Some(e)) => cal.window_days(s[j], e[j]),
            (Some(s), None) => cal.window_days(s[j], cal_end(cal)),
            (None, Some(e)) => cal.window_days(cal_start(cal), e[j]),
            (None, None) => all_days.clone(),
        })
        .collect();
    // Pots that move: every position ever held is mapped (the targets), each
    // pot's series gathered along its path (`super::paths`).
    let moves = match &study.spec.pots.moves {
        Some(_) => {
            crate::io::moves::load_moves(study, &pots_table, &crate::io::ingest::study_period(study)?)?
        }
        None => None,
    };
    let paths = match &moves {
        Some(m) => Paths::new(&pots, m, cal)?,
        None => Paths::fixed(&pots),
    };
    let fixed = paths.is_fixed();
    let shares: Vec<Vec<(usize, f64)>> = (0..pots.len())
        .map(|j| paths.shares(j, super::paths::window_steps(cal, windows[j].clone()), cal.n_steps))
        .collect();
    let targets = &paths.positions;
    let distances = if fixed {
        opening_distances(&study.spec.openings, &pots)
    } else {
        // Time-averaged over each pot's growth window.
        opening_distances(&study.spec.openings, targets)
            .into_iter()
            .map(|(name, d)| (name, shares.iter().map(|w| super::paths::average(w, &d)).collect()))
            .collect()
    };
    let openings: Vec<OpeningDrift> = study
        .spec
        .openings
        .iter()
        .map(|o| OpeningDrift {
            name: o.name.clone(),
            at_sensors: super::geometry::distances_to_opening(&sensors, o.from, o.to),
            at_pots: super::geometry::distances_to_opening(targets, o.from, o.to),
        })
        .collect();
    let indicators = &climate.config.indicators;
    let mut needed: Vec<&'static str> = Vec::new();
    for ind in indicators {
        for v in base_variables(ind.variable) {
            if !needed.contains(v) {
                needed.push(v);
            }
        }
    }
    let mut variables = Vec::new();
    // With a move table: each variable's series at the pots' starting
    // positions (the first `pots` targets), for the drivers without moves.
    let mut at_start: Vec<MatrixMap> = Vec::new();
    for name in ["temperature", "humidity", "light"] {
        if !needed.contains(&name) {
            continue;
        }
        let m = match name {
            "temperature" => &climate.grid.temperature,
            "humidity" => &climate.grid.humidity,
            _ => &climate.grid.light,
        };
        let series = matrix_of(m);
        let mut v = map_variable(name, series, &sensors, targets, &cfg, &openings)?;
        if moves.is_some() {
            let first = |m: &DMatrix<f64>| m.columns(0, pots.len()).into_owned();
            at_start.push((name, first(&v.mapped), v.mapped_se.as_ref().map(first)));
        }
        if !fixed {
            v.mapped = paths.along(&v.mapped);
            v.mapped_se = v.mapped_se.map(|m| paths.along(&m));
        }
        variables.push(v);
    }
    let get = |name: &str| variables.iter().find(|v| v.name == name);
    let min_cov = climate.config.spec.min_coverage;
    let along = PotSeries::of(variables.iter().map(|v| (v.name, &v.mapped, v.mapped_se.as_ref())));
    let checked = self_check(climate, &sensors, &openings, &variables, min_cov);
    let nodes = super::window_se::normal_nodes(super::window_se::NODES);
    let mut columns = Vec::new();
    for (i, ind) in indicators.iter().enumerate() {
        let how = ind.statistic.combine();
        let (value, valid) = along.window_values(ind, cal, &windows, min_cov);
        // Standard errors: from the per-step kriging errors with their
        // calibrated persistence (`super::window_se`), else from the
        // indicator's study-period sensor values kriged.
        let base = base_variables(ind.variable)[0];
        let calibrated = checked.calibration[i].zip(single_kriged(ind, &variables));
        let se = match get(base) {
            _ if calibrated.is_some() => {
                let (calibration, variable) = calibrated.expect("checked");
                let at = PotWindowSe { ind, cal, variable, calibration, nodes: &nodes, min_cov };
                (0..pots.len()).map(|j| at.at(j, windows[j].clone(), 1.0)).collect::<Option<Vec<f64>>>()
            }
            Some(v) if v.spec.method.is_kriging() => {
                let sensor_vals: Vec<f64> =
                    climate.study[i].iter().map(|w| w.value.unwrap_or(f64::NAN)).collect();
                let sensor_days: Vec<usize> = climate.study[i].iter().map(|w| w.valid_days).collect();
                let ok: Vec<usize> = (0..sensor_vals.len()).filter(|&k| sensor_vals[k].is_finite()).collect();
                if ok.len() >= 2 {
                    let sub = sensors.subset(&ok);
                    let vals: Vec<f64> = ok.iter().map(|&k| sensor_vals[k]).collect();
                    // The same method as the map, an external drift included
                    // (its values at the sensors that have the summary).
                    let spec = Spec {
                        drift: v.spec.drift.as_ref().map(|d| Drift {
                            name: d.name.clone(),
                            at_sensors: ok.iter().map(|&k| d.at_sensors[k]).collect(),
                            at_targets: d.at_targets.clone(),
                        }),
                        ..v.spec.clone()
                    };
                    match map_summary(&sub, &vals, targets, &spec) {
                        Ok(p) => p.se.map(|se| {
                            // Along a path: the time-share average of the
                            // positions' SEs, the SE when the errors at the
                            // positions are fully correlated (an upper bound).
                            let se: Vec<f64> = if fixed {
                                se
                            } else {
                                shares.iter().map(|w| super::paths::average(w, &se)).collect()
                            };
                            let mean_days =
                                ok.iter().map(|&k| sensor_days[k] as f64).sum::<f64>() / ok.len() as f64;
                            se.iter()
                                .enumerate()
                                .map(|(j, s)| match how {
                                    Combine::Sum if mean_days > 0.0 => s * valid[j] as f64 / mean_days,
                                    _ => *s,
                                })
                                .collect()
                        }),
                        Err(_) => None,
                    }
                } else {
                    None
                }
            }
            _ => None,
        };
        columns.push(MappedColumn { name: ind.name.clone(), value, se });
    }
    // Did the moves even the drivers out? Each driver at the pots' starting
    // positions over the same windows, by the same code, beside its value
    // along the paths.
    let moved = moves.map(|m| {
        let mut moved = super::paths::MovedPots::new(
            paths,
            shares,
            m.shared,
            &windows.iter().map(|w| super::paths::window_steps(cal, w.clone())).collect::<Vec<_>>(),
            cal.step_ms as f64 / 86_400_000.0,
        );
        let start = PotSeries::of(at_start.iter().map(|(n, m, se)| (*n, m, se.as_ref())));
        let mut drivers: Vec<Evened> = indicators
            .iter()
            .zip(&columns)
            .map(|(ind, c)| {
                let unmoved = start.window_values(ind, cal, &windows, min_cov).0;
                Evened::new(&ind.name, ind.unit(), c.value.clone(), unmoved)
            })
            .collect();
        for ((name, path), (_, unmoved)) in
            distances.iter().zip(opening_distances(&study.spec.openings, &pots))
        {
            drivers.push(Evened::new(&format!("distance_{name}"), "m", path.clone(), unmoved));
        }
        moved.drivers = drivers;
        moved
    });
    let mut checks = checked.checks;
    let mut window_se = checked.calibration;
    // The indicator's own variogram as a route beside the per-step one
    // (`super::indicator_route`), for indicators of one kriged variable on
    // pots that stay put.
    let mut routes = Vec::with_capacity(indicators.len());
    for (i, ind) in indicators.iter().enumerate() {
        let route = match single_kriged(ind, &variables) {
            Some(v) if fixed && window_se[i].is_some() => {
                let drift = v.spec.drift.as_ref().and_then(|d| {
                    v.cv.iter().filter_map(|s| s.drift.clone()).find(|(name, _)| *name == d.name)
                });
                let cand = super::indicator_route::Candidate {
                    indicator: ind,
                    index: i,
                    spec: &v.spec,
                    drift,
                    checks: checks.iter().filter(|c| c.indicator == ind.name).collect(),
                };
                super::indicator_route::consider(&cand, climate, &sensors, &pots, &windows, &cfg)
            }
            _ => None,
        };
        if let Some((_, Some(direct))) = &route {
            columns[i].value = direct.value.clone();
            columns[i].se = Some(direct.se.clone());
            window_se[i] = None;
            for c in checks.iter_mut().filter(|c| c.indicator == ind.name) {
                if let Some(l) = direct.left_out.iter().find(|l| sensors.ids[l.sensor] == c.sensor) {
                    c.predicted = l.predicted;
                    c.se = l.se;
                }
            }
        }
        routes.push(route.map(|r| r.0));
    }
    let mut ml_fits = Vec::new();
    for (i, ind) in indicators.iter().enumerate() {
        let vals: Vec<f64> = climate.study[i].iter().map(|w| w.value.unwrap_or(f64::NAN)).collect();
        for &fam in &cfg.families {
            ml_fits.push((
                ind.name.clone(),
                fam,
                super::variogram::fit_ml(&sensors, &vals, fam, cfg.fit_nugget),
            ));
        }
    }
    Ok(MapRun {
        windows,
        routes,
        ml_fits,
        ml_nugget: cfg.fit_nugget,
        pots: pots_table.ids.clone(),
        pot_points: pots,
        sensor_points: sensors,
        variables,
        indicators: columns,
        distances,
        checks,
        window_se,
        moves: moved,
    })
}

/// A variable mapped at many locations: its name, series and per-step SEs
/// (steps x locations).
type MatrixMap = (&'static str, DMatrix<f64>, Option<DMatrix<f64>>);

fn cal_start(cal: &crate::climate::Calendar) -> chrono::NaiveDateTime {
    crate::climate::calendar::local_time(cal.timezone, cal.start_ms)
}

fn cal_end(cal: &crate::climate::Calendar) -> chrono::NaiveDateTime {
    crate::climate::calendar::local_time(cal.timezone, cal.start_ms + cal.step_ms * cal.n_steps as i64)
}

/// Write `pot_covariates.csv`, `variograms.csv`, `variogram_fits.csv`,
/// `mapping_cv.csv`, `variogram_ml_fits.csv` and `mapping_check.csv` (and,
/// for pots that move, `pot_paths.csv`, `pot_paths_exposure.csv` and
/// `paths_spread.csv`) into the study's output folder (atomically).
pub fn write_outputs(study: &Study, run: &MapRun) -> Result<Vec<PathBuf>, MapError> {
    let mut w = StageWriter::new(&study.output_dir(), "map")?;
    w.write(POT_COVARIATES_FILE, &pot_covariates_csv(&run.pots, &run.indicators, &run.distances)?)?;
    let mut tables = Vec::new();
    for v in &run.variables {
        tables.push(super::outputs::VariogramTable {
            variable: v.name,
            empirical: &v.empirical,
            fits: &v.fits,
        });
        for d in &v.directional {
            tables.push(super::outputs::VariogramTable { variable: v.name, empirical: d, fits: &v.fits });
        }
    }
    if !tables.is_empty() {
        w.write(VARIOGRAMS_FILE, &variograms_csv(&tables)?)?;
    }
    let fits: Vec<super::outputs::FitsRow> =
        run.variables.iter().map(|v| (v.name, v.fits.as_slice(), v.chosen_family)).collect();
    w.write(VARIOGRAM_FITS_FILE, &variogram_fits_csv(&fits)?)?;
    let cv: Vec<super::outputs::CvRow> =
        run.variables.iter().map(|v| (v.name, v.cv.as_slice(), v.choice.clone())).collect();
    let routes: Vec<&super::indicator_route::RouteChoice> = run.routes.iter().flatten().collect();
    w.write(MAPPING_CV_FILE, &mapping_cv_csv(&cv, &routes)?)?;
    w.write(VARIOGRAM_ML_FITS_FILE, &variogram_ml_fits_csv(&run.ml_fits, run.ml_nugget))?;
    w.write(MAPPING_CHECK_FILE, &super::selfcheck::mapping_check_csv(&run.checks)?)?;
    w.write(MAPPING_SE_FILE, &mapping_se_csv(&run.indicators, &run.window_se))?;
    if let Some(m) = &run.moves {
        w.write(super::outputs::POT_PATHS_FILE, &m.csv(&run.pots))?;
        w.write(super::outputs::POT_PATHS_EXPOSURE_FILE, &m.exposure_csv(&run.pots))?;
        w.write(super::outputs::PATHS_SPREAD_FILE, &m.spread_csv())?;
    }
    Ok(w.commit()?)
}

/// The whole stage from the output folder's `readings.parquet`: climate
/// series, mapping, outputs.
pub fn run(study: &Study) -> Result<(MapRun, Vec<PathBuf>), MapError> {
    let readings_path = study.output_dir().join(crate::io::ingest::READINGS_FILE);
    if !readings_path.exists() {
        return Err(MapError::Missing(format!(
            "{} does not exist; run `potclim ingest {}` first (or `potclim run`)",
            readings_path.display(),
            study.path.display()
        )));
    }
    let readings = ingest::read_readings(&readings_path)?;
    let config = crate::climate::ClimateConfig::from_study(study)?;
    let climate = crate::climate::compute(study, config, &readings, &readings_path)?;
    let run = compute(study, &climate)?;
    let files = write_outputs(study, &run)?;
    Ok((run, files))
}
