//! The window indicator's own variogram as a mapping route beside the
//! pooled per-step one, and the leave-one-sensor-out choice between them.
//!
//! # The two routes
//! * *Pooled per-step* (the stage's default, [`super::stage`]): each time
//!   step is kriged with the pooled variogram of the per-step anomalies and
//!   the indicator is the expectation over each step's kriged distribution
//!   ([`crate::climate::exceedance`]), its SE from the calibrated per-step
//!   errors ([`super::window_se`]).
//! * *The indicator's own variogram* (this module): the indicator's value
//!   over the window at each logger (one number per logger) is itself the
//!   datum. A variogram is fitted to those values by restricted maximum
//!   likelihood (REML: Patterson & Thompson 1971, *Biometrika* 58: 545-554;
//!   for geostatistical models Cressie 1993, *Statistics for Spatial Data*,
//!   rev. ed., §2.6.1) with the same trend as the per-step route (a constant
//!   mean, or the chosen opening's drift `exp(-d / L)` with its decay length
//!   `L`), and the indicator is kriged directly (ordinary kriging or kriging
//!   with that external drift), the SE being the kriging SE under the fitted
//!   model. REML rather than ML because with 10-15 loggers and two trend
//!   coefficients ML's profiled variance `Q / n` is biased low by the factor
//!   `(n - p) / n` (Harville 1977, *JASA* 72: 320-338), which would narrow the
//!   SEs by the same factor.
//!
//! # What the layout can identify
//! The range is searched between bounds that keep the *practical* range (the
//! distance at which the correlation falls to 0.05, [`super::correlation::Family::practical_range`])
//! between the shortest and the largest sensor-pair distance
//! ([`identifiable_range`]): a structure shorter than every sensor pair is
//! not told apart from a nugget, a longer one not from the trend (our rule).
//! The families are the study's variogram families; the largest REML
//! log-likelihood wins (the same trend and the same number of parameters in
//! every family, so this is the AIC order too).
//!
//! # The choice
//! Both routes are scored on the left-out loggers: the pooled route by
//! the stage's leave-one-sensor-out check (each logger's series mapped from
//! the others, the indicator computed there), this route by kriging each
//! logger's value from the others **with the variogram refitted without
//! it** (the fit uses the values being predicted, so fitting once on all
//! loggers would favour it; Hastie, Tibshirani & Friedman 2009, *The
//! Elements of Statistical Learning*, 2nd ed., §7.10.2). The route with the
//! smaller RMSE of the left-out window values maps the indicator
//! (`mapping_cv.csv`, rows with `route`; the report and `potclim map` state
//! it); the direct route only when it predicted every left-out logger, and
//! it is offered only with at least [`MIN_RESIDUAL_DF`] loggers beyond the
//! trend coefficients. Cost: one REML search per family and fold, each on `n <= 15`
//! points (hundreds of `n x n` Cholesky factorisations).

use super::correlation::Family;
use super::geometry::Points;
use super::kriging::{Drift, Interpolator, Spec, krige};
use super::likelihood::{Distances, LikelihoodKind, SearchOptions, maximise};
use super::variogram::VariogramModel;

/// The bounds of the range parameter `a` of `family` that keep its practical
/// range between the shortest and the largest distance between two of
/// `points` (module doc, "What the layout can identify"); `None` with fewer
/// than two distinct positions. Cost O(n^2).
pub fn identifiable_range(points: &Points, family: Family) -> Option<(f64, f64)> {
    let (mut lo, mut hi) = (f64::INFINITY, 0.0f64);
    for i in 0..points.len() {
        for j in i + 1..points.len() {
            let d = points.dist_to(i, points, j);
            if d > 0.0 {
                lo = lo.min(d);
                hi = hi.max(d);
            }
        }
    }
    let unit = family.practical_range(1.0);
    (lo.is_finite() && hi > lo && unit > 0.0).then(|| (lo / unit, hi / unit))
}

/// A REML fit of a variogram to values at the loggers.
#[derive(Clone, Debug, PartialEq)]
pub struct IndicatorFit {
    /// The model: nugget `sigma2 eta`, partial sill `sigma2 (1 - eta)`.
    pub model: VariogramModel,
    /// The maximised REML log-likelihood (the convention of
    /// [`super::likelihood`]).
    pub loglik: f64,
    /// Bounds the estimate sits on (`range_lower`, `range_upper`,
    /// `nugget_zero`, `nugget_upper`).
    pub at_bounds: Vec<&'static str>,
}

/// Fit `family` to `values` at `points` by REML with the trend `1` (and
/// `drift`, when given, as a second column), the range within
/// [`identifiable_range`] and, when `fit_nugget`, a nugget share in
/// `[0, 0.99]`. Values that are not finite are left out. `None` with fewer
/// than `p + 2` values or when the search fails. Cost: one bounded simplex
/// search of [`maximise`].
pub fn fit_reml(
    points: &Points,
    values: &[f64],
    drift: Option<&[f64]>,
    family: Family,
    fit_nugget: bool,
) -> Option<IndicatorFit> {
    let keep: Vec<usize> = (0..values.len().min(points.len()))
        .filter(|&i| values[i].is_finite() && drift.is_none_or(|d| d.get(i).is_some_and(|v| v.is_finite())))
        .collect();
    let p = 1 + usize::from(drift.is_some());
    if keep.len() < p + 2 {
        return None;
    }
    let sub = points.subset(&keep);
    let bounds = identifiable_range(&sub, family)?;
    let dist = Distances::from_coords(&sub.x, &sub.y).ok()?;
    let z: Vec<f64> = keep.iter().map(|&i| values[i]).collect();
    let mut x = vec![vec![1.0; keep.len()]];
    if let Some(d) = drift {
        x.push(keep.iter().map(|&i| d[i]).collect());
    }
    let opts = SearchOptions { nugget: fit_nugget, range_bounds: Some(bounds), ..SearchOptions::default() };
    let m = maximise(&dist, family, &x, &z, LikelihoodKind::Reml, &opts).ok()?;
    let b = &m.best;
    Some(IndicatorFit {
        model: VariogramModel {
            family,
            nugget: b.sigma2 * b.params.eta,
            partial_sill: b.sigma2 * (1.0 - b.params.eta),
            range: b.params.range,
        },
        loglik: b.loglik,
        at_bounds: m.at_bounds,
    })
}

/// [`fit_reml`] for every family; the fit with the largest REML
/// log-likelihood (module doc). `None` when no family can be fitted.
pub fn fit_best(
    points: &Points,
    values: &[f64],
    drift: Option<&[f64]>,
    families: &[Family],
    fit_nugget: bool,
) -> Option<IndicatorFit> {
    families
        .iter()
        .filter_map(|&f| fit_reml(points, values, drift, f, fit_nugget))
        .max_by(|a, b| a.loglik.total_cmp(&b.loglik))
}

/// The kriging spec of the direct route: ordinary kriging, or kriging with
/// the external drift `drift` (its values at the sensors and at the
/// targets) under the indicator's own model.
pub fn spec(model: VariogramModel, drift: Option<Drift>, neighbours: Option<usize>) -> Spec {
    let method = if drift.is_some() { Interpolator::ExternalDrift } else { Interpolator::Ordinary };
    Spec { method, model, neighbours, drift }
}

/// One logger's value predicted from the others by the direct route.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct LeftOut {
    /// The logger (index into the sensors).
    pub sensor: usize,
    /// Its own value.
    pub observed: f64,
    /// The kriged value from the others, the variogram refitted without it.
    pub predicted: f64,
    /// The kriging SE there.
    pub se: Option<f64>,
}

/// Leave-one-sensor-out pass of the direct route over the loggers in
/// `which`: for each, the variogram is refitted to the other loggers'
/// values ([`fit_best`]) and the logger's value kriged from them (module
/// doc, "The choice"). `drift` is the drift at every sensor (`None`: a
/// constant mean). A logger whose fold cannot be fitted is left out. Cost:
/// `which.len()` times [`fit_best`].
pub fn loso(
    points: &Points,
    values: &[f64],
    drift: Option<&[f64]>,
    families: &[Family],
    fit_nugget: bool,
    which: &[usize],
) -> Vec<LeftOut> {
    let mut out = Vec::new();
    for &k in which {
        let Some(&observed) = values.get(k).filter(|v| v.is_finite()) else { continue };
        let others: Vec<usize> = (0..points.len()).filter(|&j| j != k).collect();
        let sub = points.subset(&others);
        let vals: Vec<f64> = others.iter().map(|&j| values[j]).collect();
        let d_sub: Option<Vec<f64>> = drift.map(|d| others.iter().map(|&j| d[j]).collect());
        let Some(fit) = fit_best(&sub, &vals, d_sub.as_deref(), families, fit_nugget) else { continue };
        let dr = drift.map(|d| Drift {
            name: "drift".into(),
            at_sensors: d_sub.clone().unwrap_or_default(),
            at_targets: vec![d[k]],
        });
        let Ok(p) = krige(&sub, &vals, &points.subset(&[k]), &spec(fit.model, dr, None)) else { continue };
        let predicted = p.value[0];
        if predicted.is_finite() {
            out.push(LeftOut { sensor: k, observed, predicted, se: p.se.map(|s| s[0]) });
        }
    }
    out
}

/// Root mean squared error, mean error and mean squared standardised error
/// of left-out predictions `(predicted, observed, se)`; `None` when empty.
pub fn score(rows: &[(f64, f64, Option<f64>)]) -> Option<RouteScore> {
    if rows.is_empty() {
        return None;
    }
    let n = rows.len() as f64;
    let rmse = (rows.iter().map(|(p, o, _)| (p - o).powi(2)).sum::<f64>() / n).sqrt();
    let mean_error = rows.iter().map(|(p, o, _)| p - o).sum::<f64>() / n;
    let z2: Option<Vec<f64>> =
        rows.iter().map(|(p, o, s)| s.filter(|s| *s > 0.0).map(|s| ((p - o) / s).powi(2))).collect();
    let msse = z2.map(|z| z.iter().sum::<f64>() / n);
    Some(RouteScore { n: rows.len(), rmse, mean_error, msse })
}

/// The leave-one-sensor-out score of one route for one indicator.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct RouteScore {
    /// Left-out loggers compared.
    pub n: usize,
    /// Root mean squared error of the window values, indicator unit.
    pub rmse: f64,
    /// Mean error, prediction minus observation.
    pub mean_error: f64,
    /// Mean squared standardised error (`None` when some SE is missing).
    pub msse: Option<f64>,
}

/// The choice of route for one indicator.
#[derive(Clone, Debug, PartialEq)]
pub struct RouteChoice {
    /// The indicator.
    pub indicator: String,
    /// The pooled per-step route's score.
    pub pooled: RouteScore,
    /// The per-step route's kriging method.
    pub pooled_method: Interpolator,
    /// The direct route's score.
    pub direct: RouteScore,
    /// The direct route's kriging method (ordinary or external drift).
    pub method: Interpolator,
    /// The drift: the opening and its decay length, as the per-step route
    /// chose it.
    pub drift: Option<(String, f64)>,
    /// The indicator's own variogram fitted to every logger.
    pub fit: IndicatorFit,
    /// True when the direct route maps the indicator.
    pub direct_chosen: bool,
    /// When the direct route won the left-out check but its map gave pots
    /// a value the indicator cannot take (a negative count of hours): how
    /// many of how many pots. The per-step route maps it then.
    pub impossible: Option<(usize, usize)>,
}

impl RouteChoice {
    /// One sentence: which route maps the indicator and why.
    pub fn reason(&self) -> String {
        let m = &self.fit.model;
        let variogram = format!(
            "its own {} variogram (REML; nugget {}, partial sill {}, practical range {} m)",
            m.family.name(),
            sig(m.nugget),
            sig(m.partial_sill),
            sig(m.practical_range())
        );
        let trend = match &self.drift {
            Some((o, l)) => format!(" with the opening `{o}` as external drift (decay length {} m)", sig(*l)),
            None => String::new(),
        };
        let (how, lose, w, l) = if self.direct_chosen {
            (
                format!("{} is kriged directly with {variogram}{trend}", self.indicator),
                "the per-step maps".to_string(),
                &self.direct,
                &self.pooled,
            )
        } else {
            (
                format!("{} is computed from the per-step maps (pooled per-step variogram)", self.indicator),
                format!("kriging it directly with {variogram}{trend}"),
                &self.pooled,
                &self.direct,
            )
        };
        let other = if l.n == w.n { String::new() } else { format!(" (over {} loggers)", l.n) };
        if let Some((bad, of)) = self.impossible {
            return format!(
                "{how}: kriging it directly with {variogram}{trend} had the smaller leave-one-sensor-out RMSE ({} over {} loggers against {} over {}) but gave {bad} of {of} pots a negative value, which {} cannot take",
                sig(l.rmse),
                l.n,
                sig(w.rmse),
                w.n,
                self.indicator
            );
        }
        format!(
            "{how}: leave-one-sensor-out RMSE {} over {} loggers against {}{other} for {lose}",
            sig(w.rmse),
            w.n,
            sig(l.rmse)
        )
    }
}

/// Four significant digits.
fn sig(x: f64) -> String {
    if x == 0.0 || !x.is_finite() {
        return format!("{x}");
    }
    let d = (3 - x.abs().log10().floor() as i32).max(0) as usize;
    format!("{x:.d$}")
}

/// The fewest residual degrees of freedom `n - p` (loggers less trend
/// coefficients) with which the direct route is offered: its three
/// covariance parameters (sill, range, nugget share) are fitted to one value
/// per logger, and with fewer the fit picked a smooth near-deterministic
/// model that beat the per-step route at six left-out loggers (RMSE 1.9 h
/// against 11.1 h) while its SEs at the pots were 0.65 h against errors of
/// 14 h RMS (the golden bench, `tests/golden/`; our rule, docs/spatial.md).
pub const MIN_RESIDUAL_DF: usize = 10;

/// The direct route's map of one indicator: values and SEs at the pots and
/// its left-out loggers (the map's self-check when it is chosen).
#[derive(Clone, Debug, PartialEq)]
pub struct DirectMap {
    /// The indicator at each pot over its own window.
    pub value: Vec<f64>,
    /// Its kriging SE.
    pub se: Vec<f64>,
    /// The left-out loggers.
    pub left_out: Vec<LeftOut>,
}

/// What the stage needs to weigh the two routes for one indicator.
pub(super) struct Candidate<'a> {
    /// The indicator and its position in the climate run's indicators.
    pub(super) indicator: &'a crate::climate::Indicator,
    pub(super) index: usize,
    /// The per-step route's spec (its drift, if any, is reused).
    pub(super) spec: &'a Spec,
    /// The drift's opening and decay length, as the per-step route chose it.
    pub(super) drift: Option<(String, f64)>,
    /// The stage's left-out check of the per-step route for this indicator.
    pub(super) checks: Vec<&'a super::selfcheck::SensorCheck>,
}

/// Weigh the direct route against the pooled per-step one for one
/// indicator (module doc) and, when the direct route wins, map the
/// indicator onto `pots` over each pot's window `windows[j]` (the loggers'
/// values over that window kriged; pots sharing a window share one
/// system). `None` with fewer than [`MIN_RESIDUAL_DF`] residual degrees of
/// freedom, or when the direct route cannot be fitted or scored.
pub(super) fn consider(
    c: &Candidate,
    climate: &crate::climate::ClimateRun,
    sensors: &Points,
    pots: &Points,
    windows: &[std::ops::Range<usize>],
    cfg: &super::config::MappingConfig,
) -> Option<(RouteChoice, Option<DirectMap>)> {
    let (families, fit_nugget, neighbours) = (cfg.families.as_slice(), cfg.fit_nugget, cfg.neighbours);
    let values: Vec<f64> = climate.study.get(c.index)?.iter().map(|w| w.value.unwrap_or(f64::NAN)).collect();
    let drift = c.spec.drift.as_ref();
    let at_sensors = drift.map(|d| d.at_sensors.as_slice());
    let n = values.iter().filter(|v| v.is_finite()).count();
    if n < MIN_RESIDUAL_DF + 1 + usize::from(drift.is_some()) {
        return None;
    }
    let fit = fit_best(sensors, &values, at_sensors, families, fit_nugget)?;
    // The same loggers for both routes: those the stage's check scored.
    let ids = &climate.grid.sensors;
    let which: Vec<usize> =
        c.checks.iter().filter_map(|k| ids.iter().position(|id| *id == k.sensor)).collect();
    let left_out = loso(sensors, &values, at_sensors, families, fit_nugget, &which);
    // Every left-out logger scores the per-step route; the direct route
    // must predict each of them to be chosen (a fold whose variogram cannot
    // be fitted, e.g. the other loggers all at 0 h, is a failure, not a
    // logger to drop).
    let pooled = score(&c.checks.iter().map(|k| (k.predicted, k.observed, k.se)).collect::<Vec<_>>())?;
    let direct = score(&left_out.iter().map(|l| (l.predicted, l.observed, l.se)).collect::<Vec<_>>())?;
    let complete = left_out.len() == which.len() && which.len() == c.checks.len();
    let choice = RouteChoice {
        indicator: c.indicator.name.clone(),
        pooled,
        pooled_method: c.spec.method,
        direct,
        method: if drift.is_some() { Interpolator::ExternalDrift } else { Interpolator::Ordinary },
        drift: c.drift.clone(),
        fit: fit.clone(),
        direct_chosen: complete && direct.rmse < pooled.rmse,
        impossible: None,
    };
    if !choice.direct_chosen {
        return Some((choice, None));
    }
    let how = c.indicator.statistic.combine();
    let daily = climate.daily.get(c.index)?;
    let mut value = vec![f64::NAN; pots.len()];
    let mut se = vec![f64::NAN; pots.len()];
    let mut distinct: Vec<std::ops::Range<usize>> = Vec::new();
    for w in windows {
        if !distinct.contains(w) {
            distinct.push(w.clone());
        }
    }
    for w in distinct {
        let group: Vec<usize> = (0..pots.len()).filter(|&j| windows[j] == w).collect();
        let vals: Vec<f64> = daily
            .iter()
            .map(|days| {
                let d: Vec<Option<f64>> = days.iter().map(|d| d.value).collect();
                crate::climate::combine_window(&d, w.clone(), how).value.unwrap_or(f64::NAN)
            })
            .collect();
        let dr = drift.map(|d| Drift {
            name: d.name.clone(),
            at_sensors: d.at_sensors.clone(),
            at_targets: group.iter().map(|&j| d.at_targets[j]).collect(),
        });
        let Ok(p) = krige(sensors, &vals, &pots.subset(&group), &spec(fit.model, dr, neighbours)) else {
            continue;
        };
        for (g, &j) in group.iter().enumerate() {
            value[j] = p.value[g];
            se[j] = p.se.as_ref().map_or(f64::NAN, |s| s[g]);
        }
    }
    // A linear kriging of a bounded indicator can leave its range (on the
    // mapping study a Gaussian fit without nugget mapped night cold hours
    // down to -15.7 h, RMSE 14.6 h at the pots against 1.4 h for the
    // per-step route, docs/spatial.md): such a map is not used.
    if c.indicator.statistic.never_negative() {
        let scale = values.iter().filter(|v| v.is_finite()).fold(0.0f64, |m, v| m.max(v.abs()));
        let bad = value.iter().filter(|v| **v < -1e-9 * (1.0 + scale)).count();
        if bad > 0 {
            let refused = RouteChoice { direct_chosen: false, impossible: Some((bad, pots.len())), ..choice };
            return Some((refused, None));
        }
    }
    Some((choice, Some(DirectMap { value, se, left_out })))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::spatial::geometry::Origin;

    fn fixture() -> serde_json::Value {
        let path = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/reference/fixtures/indicator_reml.json");
        serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap()
    }

    fn nums(v: &serde_json::Value) -> Vec<f64> {
        v.as_array().unwrap().iter().map(|x| x.as_f64().unwrap()).collect()
    }

    fn points(x: Vec<f64>, y: Vec<f64>) -> Points {
        let ids = (0..x.len()).map(|i| format!("L{i}")).collect();
        Points::new("sensor", ids, x, y, None, &Origin::default()).unwrap()
    }

    /// The REML fit with the door's drift against scipy
    /// (`tests/reference/indicator_reml.py`: the same profiled REML
    /// log-likelihood written in numpy, maximised by scipy's L-BFGS-B from a
    /// grid of starts within the same bounds): log-likelihood, range, nugget
    /// share and sill; with a constant mean too; and the kriged values and
    /// SEs at three targets against a direct numpy solve of the
    /// external-drift kriging system under the fitted model.
    #[test]
    fn reml_fit_matches_scipy() {
        let f = fixture();
        let pts = points(nums(&f["x"]), nums(&f["y"]));
        let z = nums(&f["z"]);
        let drift = nums(&f["drift"]);
        let (lo, hi) = identifiable_range(&pts, Family::Exponential).unwrap();
        assert!((lo - f["range_bounds"][0].as_f64().unwrap()).abs() < 1e-12);
        assert!((hi - f["range_bounds"][1].as_f64().unwrap()).abs() < 1e-12);
        for (key, d) in [("with_drift", Some(drift.as_slice())), ("constant_mean", None)] {
            let r = &f[key];
            let fit = fit_reml(&pts, &z, d, Family::Exponential, true).unwrap();
            let ll = r["loglik"].as_f64().unwrap();
            // The optimum itself: log-likelihood within 1e-4, the parameters
            // within 1 % (the likelihood is flat near its top).
            assert!((fit.loglik - ll).abs() < 1e-4, "{key}: {fit:?} vs {r}");
            let rel = |a: f64, b: f64| (a - b).abs() / b.abs().max(1e-9);
            assert!(rel(fit.model.range, r["range"].as_f64().unwrap()) < 1e-2, "{key}: {fit:?} vs {r}");
            let eta = fit.model.nugget / fit.model.sill();
            assert!((eta - r["eta"].as_f64().unwrap()).abs() < 1e-2, "{key}: {fit:?} vs {r}");
            assert!(rel(fit.model.sill(), r["sigma2"].as_f64().unwrap()) < 1e-2, "{key}: {fit:?} vs {r}");
        }
        // Kriging under the reference's fitted model against numpy.
        let r = &f["with_drift"];
        let sigma2 = r["sigma2"].as_f64().unwrap();
        let eta = r["eta"].as_f64().unwrap();
        let model = VariogramModel {
            family: Family::Exponential,
            nugget: sigma2 * eta,
            partial_sill: sigma2 * (1.0 - eta),
            range: r["range"].as_f64().unwrap(),
        };
        let targets = points(nums(&f["tx"]), nums(&f["ty"]));
        let dr = Drift { name: "door".into(), at_sensors: drift.clone(), at_targets: nums(&f["tdrift"]) };
        let p = krige(&pts, &z, &targets, &spec(model, Some(dr), None)).unwrap();
        let (want, want_se) = (nums(&r["pred"]), nums(&r["pred_se"]));
        for t in 0..want.len() {
            assert!((p.value[t] - want[t]).abs() < 1e-8 * want[t].abs().max(1.0), "{t}: {p:?}");
            let se = p.se.as_ref().unwrap()[t];
            assert!((se - want_se[t]).abs() < 1e-8 * want_se[t].max(1.0), "{t}: {se} vs {}", want_se[t]);
        }
    }

    /// The bounds follow the layout: three points at 1, 2 and sqrt(5) m
    /// from each other give practical ranges 1..sqrt(5) m, i.e. for the
    /// exponential family `a` in [1, sqrt 5] / ln 20; one position gives none.
    #[test]
    fn bounds_follow_the_pair_distances() {
        let p = points(vec![0.0, 1.0, 0.0], vec![0.0, 0.0, 2.0]);
        let (lo, hi) = identifiable_range(&p, Family::Exponential).unwrap();
        let u = 20f64.ln();
        assert!((lo - 1.0 / u).abs() < 1e-12 && (hi - 5f64.sqrt() / u).abs() < 1e-12);
        assert!(identifiable_range(&points(vec![1.0, 1.0], vec![2.0, 2.0]), Family::Exponential).is_none());
    }

    /// The left-out pass on a field that is exactly the drift plus a
    /// constant: every logger is predicted within rounding, and with a
    /// constant mean instead the errors are large; the score's arithmetic on
    /// a hand example.
    #[test]
    fn left_out_pass_and_score() {
        let x: Vec<f64> = (0..9).map(|i| (i % 3) as f64 * 2.0 + 0.3 * (i / 3) as f64).collect();
        let y: Vec<f64> = (0..9).map(|i| (i / 3) as f64 * 1.5).collect();
        let pts = points(x.clone(), y);
        let drift: Vec<f64> = x.iter().map(|x| (-x / 2.0).exp()).collect();
        // A small seeded wiggle so that the variance is not zero.
        let z: Vec<f64> =
            drift.iter().enumerate().map(|(i, d)| 10.0 + 80.0 * d + 0.01 * ((i * 7) % 5) as f64).collect();
        let all: Vec<usize> = (0..9).collect();
        let fams = [Family::Exponential];
        let with = loso(&pts, &z, Some(&drift), &fams, true, &all);
        assert_eq!(with.len(), 9);
        let rows: Vec<(f64, f64, Option<f64>)> =
            with.iter().map(|l| (l.predicted, l.observed, l.se)).collect();
        let s = score(&rows).unwrap();
        assert!(s.rmse < 0.1, "{s:?}");
        let without = loso(&pts, &z, None, &fams, true, &all);
        let rows: Vec<(f64, f64, Option<f64>)> =
            without.iter().map(|l| (l.predicted, l.observed, l.se)).collect();
        assert!(score(&rows).unwrap().rmse > 10.0 * s.rmse);
        let s = score(&[(2.0, 1.0, Some(1.0)), (0.0, 1.0, Some(2.0))]).unwrap();
        assert!((s.rmse - 1.0).abs() < 1e-15 && s.mean_error == 0.0);
        assert!((s.msse.unwrap() - 0.625).abs() < 1e-15);
        assert!(score(&[]).is_none());
    }
}
