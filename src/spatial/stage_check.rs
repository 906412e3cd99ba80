//! The mapping stage's leave-one-sensor-out pass ([`super::selfcheck`]):
//! each logger's series mapped at its position from the other loggers, the
//! indicators computed there as at a pot, the per-step calibration of the
//! window SEs ([`super::window_se`]) drawn from those left-out errors, and
//! the error moments of one indicator at one location that the stage and
//! the check share. Split from [`super::stage`], which calls it.

use super::geometry::Points;
use super::kriging::{Drift, Spec};
use super::mapping::{map_series, map_summary};
use super::stage::{OpeningDrift, VariableMap, base_variables, matrix_of};
use crate::climate::{
    ClimateRun, LocationSeries, combine_own_variance, combine_window, daily_values_expected_over,
};
use nalgebra::DMatrix;

/// A variable mapped at one location: its name, series and per-step SE.
pub(super) type LocationMap = (&'static str, Vec<f64>, Option<Vec<f64>>);

/// The spec of `spec` with sensor `k` left out: the drift at the other
/// sensors, and at sensor `k` as the target.
pub(super) fn leave_out(spec: &Spec, others: &[usize], k: usize) -> Spec {
    Spec {
        drift: spec.drift.as_ref().map(|d| Drift {
            name: d.name.clone(),
            at_sensors: others.iter().map(|&j| d.at_sensors[j]).collect(),
            at_targets: vec![d.at_sensors[k]],
        }),
        ..spec.clone()
    }
}

/// The indicator of `ind` at one location over the days `window`, from
/// its mapped series (expectation form of threshold statistics with the
/// temperature SEs `t_se`), and its variance when the steps' errors are
/// independent ([`crate::climate::combine_own_variance`]).
pub(super) fn location_value(
    ind: &crate::climate::Indicator,
    cal: &crate::climate::Calendar,
    series: &LocationSeries,
    t_se: Option<&[f64]>,
    min_cov: f64,
    window: std::ops::Range<usize>,
) -> Option<(f64, f64)> {
    // Only the window's days are computed; their indices are the window's.
    let days = daily_values_expected_over(ind, cal, series, t_se, min_cov, window.clone());
    let daily: Vec<Option<f64>> = days.iter().map(|d| d.value).collect();
    let how = ind.statistic.combine();
    let value = combine_window(&daily, 0..window.len(), how).value?;
    Some((value, combine_own_variance(&days, 0..window.len(), how)))
}

/// One kriged variable at one location: its name, mapped series and per-step SEs.
pub(super) struct KrigedAt<'a> {
    pub(super) variable: &'a str,
    pub(super) mu: &'a [f64],
    pub(super) se: &'a [f64],
    /// The factor on `se` from the per-step calibration
    /// ([`super::window_se::step_scale`]).
    pub(super) scale: f64,
}

/// The error moments ([`super::window_se::window_moments`]) of an
/// indicator of one kriged variable at one location.
pub(super) fn indicator_moments(
    ind: &crate::climate::Indicator,
    cal: &crate::climate::Calendar,
    at: &KrigedAt,
    rho: f64,
    nodes: &[(f64, f64)],
    min_cov: f64,
    window: std::ops::Range<usize>,
) -> Option<super::window_se::WindowMoments> {
    let nan = vec![f64::NAN; at.mu.len()];
    let se: Vec<f64> = at.se.iter().map(|s| s * at.scale).collect();
    super::window_se::window_moments(at.mu, &se, rho, nodes, |shifted, sd| {
        let pick = |name: &str| if at.variable == name { shifted } else { nan.as_slice() };
        let s = LocationSeries {
            temperature: pick("temperature"),
            humidity: pick("humidity"),
            light: pick("light"),
        };
        let t_se = (at.variable == "temperature").then_some(sd);
        location_value(ind, cal, &s, t_se, min_cov, window.clone())
    })
}

/// The window SE of one indicator at the pots of a map, from the pots'
/// per-step kriging errors under the indicator's calibration
/// ([`super::window_se`]): what the stage reports, and what a logger
/// placement lowers ([`super::placement::window`]).
pub(crate) struct PotWindowSe<'a> {
    pub(crate) ind: &'a crate::climate::Indicator,
    pub(crate) cal: &'a crate::climate::Calendar,
    pub(crate) variable: &'a VariableMap,
    pub(crate) calibration: super::window_se::Calibration,
    pub(crate) nodes: &'a [(f64, f64)],
    pub(crate) min_cov: f64,
}

impl PotWindowSe<'_> {
    /// The SE at pot `j` over the days `window` with every per-step SE of
    /// the pot multiplied by `ratio` (1: the map's own SE); `None` without
    /// per-step SEs or a value.
    pub(crate) fn at(&self, j: usize, window: std::ops::Range<usize>, ratio: f64) -> Option<f64> {
        let v = self.variable;
        let se_m = v.mapped_se.as_ref()?;
        let n = v.mapped.nrows();
        let c = &self.calibration;
        let at = KrigedAt {
            variable: v.name,
            mu: &v.mapped.as_slice()[j * n..(j + 1) * n],
            se: &se_m.as_slice()[j * n..(j + 1) * n],
            scale: c.step_scale * ratio,
        };
        indicator_moments(self.ind, self.cal, &at, c.share, self.nodes, self.min_cov, window)
            .map(|m| (c.inflation * m.variance()).sqrt())
    }
}

/// The single kriged variable an indicator is computed from, when it has
/// per-step SEs (temperature, humidity or light indicators mapped by a
/// kriging method; not VPD or dew point, which combine two variables).
pub(super) fn single_kriged<'a>(
    ind: &crate::climate::Indicator,
    variables: &'a [VariableMap],
) -> Option<&'a VariableMap> {
    let base = base_variables(ind.variable);
    if base.len() != 1 {
        return None;
    }
    variables.iter().find(|v| v.name == base[0] && v.mapped_se.is_some())
}

/// What the leave-one-sensor-out check found: the checks, and per indicator
/// the calibrated persistence of its per-step errors (`None`: the indicator's
/// SE comes from its kriged study-period values instead).
pub(super) struct SelfCheck {
    pub(super) checks: Vec<super::selfcheck::SensorCheck>,
    pub(super) calibration: Vec<Option<super::window_se::Calibration>>,
}

/// Leave-one-sensor-out check of every indicator at every logger
/// ([`super::selfcheck`]): the logger's series are mapped at its position from
/// the other loggers with the variable's own spec, and the indicator computed
/// over the study period as at a pot (expectation form included). For an
/// indicator of one kriged variable, the left-out errors calibrate the
/// persistent share of the per-step kriging errors
/// ([`super::window_se::calibrate`]) and the check's SE is the calibrated
/// one; otherwise the SE is that of the other loggers' study-period values
/// kriged as for the pots. A check that cannot be computed (too few other
/// loggers) is left out.
pub(super) fn self_check(
    climate: &ClimateRun,
    sensors: &Points,
    openings: &[OpeningDrift],
    variables: &[VariableMap],
    min_cov: f64,
) -> SelfCheck {
    let n = sensors.len();
    let mut nearest: Vec<Vec<String>> = vec![Vec::new(); n];
    for o in openings {
        if let Some(k) = (0..n).min_by(|&a, &b| o.at_sensors[a].total_cmp(&o.at_sensors[b])) {
            nearest[k].push(o.name.clone());
        }
    }
    let cal = &climate.calendar;
    let steps = cal.n_steps;
    let all_days = 0..cal.days.len();
    // Every variable mapped at every logger's position without it, once.
    let left_out: Vec<Vec<Option<LocationMap>>> = variables
        .iter()
        .map(|v| {
            let m = match v.name {
                "temperature" => &climate.grid.temperature,
                "humidity" => &climate.grid.humidity,
                _ => &climate.grid.light,
            };
            let series = matrix_of(m);
            (0..n)
                .map(|k| {
                    let others: Vec<usize> = (0..n).filter(|&j| j != k).collect();
                    let sub_series =
                        DMatrix::from_fn(series.nrows(), others.len(), |t, c| series[(t, others[c])]);
                    let mut out = (vec![f64::NAN; steps], None);
                    map_series(
                        &sensors.subset(&others),
                        &sub_series,
                        &sensors.subset(&[k]),
                        &leave_out(&v.spec, &others, k),
                        1,
                        |_, p, se| out = (p.to_vec(), se.map(|s| s.to_vec())),
                    )
                    .ok()
                    .map(|_| (v.name, out.0, out.1))
                })
                .collect()
        })
        .collect();
    let nodes = super::window_se::normal_nodes(super::window_se::NODES);
    let nan = vec![f64::NAN; steps];
    let mut checks = Vec::new();
    let mut calibration = Vec::new();
    for (i, ind) in climate.config.indicators.iter().enumerate() {
        let base = base_variables(ind.variable);
        let vars: Vec<usize> =
            base.iter().filter_map(|b| variables.iter().position(|v| v.name == *b)).collect();
        if vars.len() != base.len() {
            calibration.push(None);
            continue;
        }
        // (logger, observed, predicted, the left-out maps of its variables)
        let mut rows: Vec<(usize, f64, f64, Vec<&LocationMap>)> = Vec::new();
        #[allow(clippy::needless_range_loop)] // k indexes loggers in three tables
        for k in 0..n {
            let Some(observed) = climate.study[i].get(k).and_then(|w| w.value) else { continue };
            let Some(mapped) = vars.iter().map(|&v| left_out[v][k].as_ref()).collect::<Option<Vec<_>>>()
            else {
                continue;
            };
            let col =
                |name: &str| mapped.iter().find(|m| m.0 == name).map_or(nan.as_slice(), |m| m.1.as_slice());
            let t_se = mapped.iter().find(|m| m.0 == "temperature").and_then(|m| m.2.as_deref());
            let series = LocationSeries {
                temperature: col("temperature"),
                humidity: col("humidity"),
                light: col("light"),
            };
            let Some((predicted, _)) = location_value(ind, cal, &series, t_se, min_cov, all_days.clone())
            else {
                continue;
            };
            rows.push((k, observed, predicted, mapped));
        }
        // The per-step SEs' scale from the left-out loggers' per-step
        // errors in the indicator's period (`super::window_se::step_scale`).
        let scale = single_kriged(ind, variables).and_then(|v| {
            let vi = variables.iter().position(|w| w.name == v.name)?;
            let obs = matrix_of(match v.name {
                "temperature" => &climate.grid.temperature,
                "humidity" => &climate.grid.humidity,
                _ => &climate.grid.light,
            });
            let mut z2 = Vec::new();
            let mut groups: Vec<Vec<f64>> = Vec::new();
            for (k, m) in left_out[vi].iter().enumerate() {
                let Some((_, mu, Some(se))) = m else { continue };
                groups.push(Vec::new());
                for t in 0..steps {
                    let in_period = match (ind.period, cal.is_day[t]) {
                        (crate::climate::config::Period::All, _) => true,
                        (_, None) => false,
                        (crate::climate::config::Period::Day, Some(d)) => d,
                        (crate::climate::config::Period::Night, Some(d)) => !d,
                    };
                    let e = mu[t] - obs[(t, k)];
                    if in_period && e.is_finite() && se[t] > 0.0 {
                        z2.push(e * e / (se[t] * se[t]));
                        groups.last_mut().expect("pushed").push(e / se[t]);
                    }
                }
            }
            Some((super::window_se::step_scale(z2)?, super::window_se::intraclass(&groups)))
        });
        let (scale, icc) = match scale {
            Some((s, i)) => (s, i),
            None => (1.0, None),
        };
        // The calibrated persistence, for an indicator of one kriged variable.
        let variance_at = |rho: f64, m: &LocationMap| -> Option<f64> {
            let at = KrigedAt { variable: m.0, mu: &m.1, se: m.2.as_deref()?, scale };
            indicator_moments(ind, cal, &at, rho, &nodes, min_cov, all_days.clone()).map(|m| m.variance())
        };
        // The persistent share from the per-step errors; the window
        // indicator's left-out errors are the check.
        let calib = icc.map(|share| {
            let z2: Vec<f64> = rows
                .iter()
                .filter_map(|r| {
                    variance_at(share, r.3[0]).filter(|v| *v > 0.0).map(|v| (r.2 - r.1).powi(2) / v)
                })
                .collect();
            let loggers = z2.len();
            let median_z2 = super::window_se::median(z2).unwrap_or(f64::NAN);
            super::window_se::Calibration {
                share,
                inflation: super::window_se::window_inflation(median_z2, loggers),
                step_scale: scale,
                loggers,
                median_z2,
                noise: single_kriged(ind, variables).and_then(|v| v.noise).map_or(0.0, |m| m.variance),
            }
        });
        for (k, observed, predicted, mapped) in &rows {
            let se = match calib {
                Some(c) => variance_at(c.share, mapped[0]).map(|v| (c.inflation * v).sqrt()),
                None => {
                    let v0 = &variables[vars[0]];
                    let ok: Vec<usize> =
                        (0..n).filter(|&j| j != *k && climate.study[i][j].value.is_some()).collect();
                    if v0.spec.method.is_kriging() && ok.len() >= 2 {
                        let vals: Vec<f64> =
                            ok.iter().map(|&j| climate.study[i][j].value.unwrap_or(f64::NAN)).collect();
                        let target = sensors.subset(&[*k]);
                        map_summary(&sensors.subset(&ok), &vals, &target, &leave_out(&v0.spec, &ok, *k))
                            .ok()
                            .and_then(|p| p.se)
                            .map(|s| s[0])
                    } else {
                        None
                    }
                }
            };
            checks.push(super::selfcheck::SensorCheck {
                indicator: ind.name.clone(),
                sensor: climate.grid.sensors[*k].clone(),
                observed: *observed,
                predicted: *predicted,
                se,
                nearest_to: nearest[*k].clone(),
            });
        }
        calibration.push(calib);
    }
    SelfCheck { checks, calibration }
}
