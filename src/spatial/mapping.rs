//! Mapping of sensor time series onto pots through time, and
//! leave-one-sensor-out cross-validation with the automatic choice of method.
//!
//! Kriging weights depend only on positions and the variogram, not on the
//! data, so [`map_series`] groups the time steps by the set of sensors that
//! report, solves the kriging system once per set, and maps every step of the
//! set by one matrix product `Z_set (steps x sensors) * Lambda (sensors x
//! pots)`. Pots are processed in blocks so that memory stays
//! O(steps x block), and each pot's mapped series (with its standard-error
//! series) is handed to a callback, which computes the pot's indicators over
//! its own growth window.

use super::error::{Result, SpatialError};
use super::geometry::Points;
use super::kriging::{Interpolator, Spec, System, krige};
use faer::Mat;
use nalgebra::DMatrix;
use std::collections::BTreeMap;

/// What a mapping run did.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct MapSummary {
    /// Distinct sets of reporting sensors (kriging systems solved).
    pub sensor_sets: usize,
    /// Time steps at which no sensor reported (mapped as NaN: missing in,
    /// missing out).
    pub steps_without_data: usize,
    /// Fallback warnings, each once.
    pub warnings: Vec<String>,
}

/// Time steps grouped by the set of reporting sensors: `(sensor indices,
/// step indices)`, in order of first appearance.
pub fn sensor_sets(series: &DMatrix<f64>) -> Vec<(Vec<usize>, Vec<usize>)> {
    let mut map: BTreeMap<Vec<usize>, usize> = BTreeMap::new();
    let mut out: Vec<(Vec<usize>, Vec<usize>)> = Vec::new();
    // The step's set is built in one buffer and looked up by reference; a
    // run of steps with the same set (the usual case) skips the lookup.
    let mut set: Vec<usize> = Vec::with_capacity(series.ncols());
    let mut last: Option<usize> = None;
    for t in 0..series.nrows() {
        set.clear();
        set.extend((0..series.ncols()).filter(|&j| series[(t, j)].is_finite()));
        if set.is_empty() {
            continue;
        }
        let k = match last.filter(|&k| out[k].0 == set) {
            Some(k) => k,
            None => match map.get(set.as_slice()) {
                Some(&k) => k,
                None => {
                    map.insert(set.clone(), out.len());
                    out.push((set.clone(), Vec::new()));
                    out.len() - 1
                }
            },
        };
        out[k].1.push(t);
        last = Some(k);
    }
    out
}

/// Map a sensor series (`series`: rows = time steps, columns = sensors as in
/// `sensors`, NaN = missing) onto every target with `spec`, `block` targets at
/// a time. For each target, `each(target, values, se)` receives the mapped
/// series (one value per time step; NaN where no sensor reports) and, for the
/// kriging methods, the kriging standard error of each step (its scale is the
/// sill of `spec.model`).
///
/// Cost: per set of reporting sensors one O(n^3) factorisation, O(n^2) per
/// target for the weights, then one `steps x n x block` matrix product per
/// block: no solve per time step. Memory O(steps x (n + block)).
pub fn map_series<F>(
    sensors: &Points,
    series: &DMatrix<f64>,
    targets: &Points,
    spec: &Spec,
    block: usize,
    mut each: F,
) -> Result<MapSummary>
where
    F: FnMut(usize, &[f64], Option<&[f64]>),
{
    if series.ncols() != sensors.len() {
        return Err(SpatialError::BadInput {
            what: "sensor series".into(),
            message: format!("{} columns for {} sensors", series.ncols(), sensors.len()),
        });
    }
    let steps = series.nrows();
    let sets = sensor_sets(series);
    let mut summary = MapSummary { sensor_sets: sets.len(), ..Default::default() };
    summary.steps_without_data = steps - sets.iter().map(|s| s.1.len()).sum::<usize>();
    let mut systems = Vec::with_capacity(sets.len());
    let mut data = Vec::with_capacity(sets.len());
    for (set, ts) in &sets {
        let sys = System::new(sensors, set, spec)?;
        for w in sys.warnings() {
            if !summary.warnings.contains(w) {
                summary.warnings.push(w.clone());
            }
        }
        systems.push(sys);
        data.push(Mat::from_fn(ts.len(), set.len(), |r, c| series[(ts[r], set[c])]));
    }
    let block = block.max(1).min(targets.len().max(1));
    let kriging = spec.method.is_kriging();
    // One set of buffers for every block: a fresh `steps x block` matrix per
    // block and per sensor set costs more in the kernel's page zeroing than
    // the products themselves (measured 2026-12-05: a quarter of the demo's
    // mapping time).
    let mut pred = Mat::<f64>::zeros(steps, block);
    let mut se = kriging.then(|| Mat::<f64>::zeros(steps, block));
    let longest = sets.iter().map(|s| s.1.len()).max().unwrap_or(0);
    let mut prod = Mat::<f64>::zeros(longest, block);
    let mut start = 0;
    while start < targets.len() {
        let end = (start + block).min(targets.len());
        let m = end - start;
        pred.as_mut().fill(f64::NAN);
        if let Some(se) = se.as_mut() {
            se.as_mut().fill(f64::NAN);
        }
        for (k, sys) in systems.iter().enumerate() {
            let w = sys.weights(targets, start..end, spec)?;
            let ts = &sets[k].1;
            let prod_block = prod.as_mut().submatrix_mut(0, 0, ts.len(), m);
            faer::linalg::matmul::matmul(
                prod_block,
                faer::Accum::Replace,
                data[k].as_ref(),
                w.lambda.as_ref(),
                1.0,
                faer::Par::Seq,
            );
            for c in 0..m {
                let column = pred.col_as_slice_mut(c);
                for (r, &t) in ts.iter().enumerate() {
                    column[t] = prod[(r, c)] + w.offset[c];
                }
                if let (Some(se), Some(var)) = (se.as_mut(), w.variance.as_ref()) {
                    let s = var[c].sqrt();
                    for &t in ts {
                        se[(t, c)] = s;
                    }
                }
            }
        }
        for c in 0..m {
            each(start + c, pred.col_as_slice(c), se.as_ref().map(|s| s.col_as_slice(c)));
        }
        start = end;
    }
    Ok(summary)
}

/// Standard error of the mean of a mapped series over a window (a linear
/// window indicator such as a mean temperature or, times the step length, a
/// light integral), from the per-step standard errors `se` of the steps in
/// the window: their mean. This assumes the kriging errors of one pot are
/// perfectly correlated from step to step, which is the conservative limit
/// (an upper bound on the true SE for positively correlated errors; the
/// errors are dominated by the fixed sensor geometry, so they are strongly
/// correlated in practice). `None` for an empty window or missing SEs.
pub fn window_mean_se(se: &[f64]) -> Option<f64> {
    if se.is_empty() || se.iter().any(|s| !s.is_finite()) {
        return None;
    }
    Some(se.iter().sum::<f64>() / se.len() as f64)
}

/// Map a per-sensor summary (an indicator computed at each sensor; NaN = not
/// available) onto `targets`: the kriging weights of `spec.model`'s shape
/// (range, nugget share, typically from the pooled variogram), with the sill
/// rescaled to the summary's own profiled variance
/// ([`super::kriging::rescale_to`]), so that the standard errors are in the
/// summary's units. IDW and nearest sensor are used as they are (no SE).
pub fn map_summary(
    sensors: &Points,
    values: &[f64],
    targets: &Points,
    spec: &Spec,
) -> Result<super::kriging::Prediction> {
    if !spec.method.is_kriging() || matches!(spec.method, Interpolator::Simple { .. }) {
        return krige(sensors, values, targets, spec);
    }
    let drift = spec.drift.as_ref().map(|d| d.at_sensors.as_slice());
    let model = super::kriging::rescale_to(&spec.model, sensors, values, spec.method, drift)?;
    krige(sensors, values, targets, &Spec { model, ..spec.clone() })
}

/// Leave-one-sensor-out cross-validation of one method.
#[derive(Clone, Debug, PartialEq)]
pub struct CvScore {
    /// The method.
    pub method: Interpolator,
    /// Number of predictions compared (sensor x step).
    pub n: usize,
    /// Root mean squared error.
    pub rmse: f64,
    /// Mean error, prediction minus observation.
    pub mean_error: f64,
    /// Mean squared standardised error `mean((pred - obs)^2 / se^2)`
    /// (kriging methods; near 1 when the standard errors are honest).
    pub msse: Option<f64>,
    /// Fallback warnings met on the way.
    pub warnings: Vec<String>,
    /// For kriging with an opening as external drift: the opening and the
    /// decay length `L` (metres) of the drift `exp(-d / L)`.
    pub drift: Option<(String, f64)>,
}

impl CvScore {
    /// The method's name, with the opening and decay length of an external
    /// drift: `external_drift (door, decay length 2.91 m)`.
    pub fn label(&self) -> String {
        match &self.drift {
            Some((o, l)) => format!("{} ({o}, decay length {l:.2} m)", self.method.name()),
            None => self.method.name().to_string(),
        }
    }
}

/// Leave-one-sensor-out cross-validation of `spec` on a series (or on one
/// value per sensor: a one-row matrix): each sensor is removed in turn, the
/// remaining sensors predict it at every step where it and at least one other
/// sensor report, by the same reuse of weights per set of reporting sensors as
/// [`map_series`]. Steps where the kriging SE is zero are left out of the
/// MSSE. Returns `None` when no prediction could be made.
pub fn loso(sensors: &Points, series: &DMatrix<f64>, spec: &Spec) -> Result<Option<CvScore>> {
    let n = sensors.len();
    let (mut sum, mut sum2, mut cnt) = (0.0, 0.0, 0usize);
    let (mut z2, mut zc) = (0.0, 0usize);
    let mut warnings: Vec<String> = Vec::new();
    for i in 0..n {
        let others: Vec<usize> = (0..n).filter(|&j| j != i).collect();
        let sub = sensors.subset(&others);
        let target = sensors.subset(&[i]);
        let sub_series = DMatrix::from_fn(series.nrows(), others.len(), |t, c| {
            if series[(t, i)].is_finite() { series[(t, others[c])] } else { f64::NAN }
        });
        let cv_spec = Spec {
            drift: spec.drift.as_ref().map(|d| super::kriging::Drift {
                name: d.name.clone(),
                at_sensors: others.iter().map(|&j| d.at_sensors[j]).collect(),
                at_targets: vec![d.at_sensors[i]],
            }),
            ..spec.clone()
        };
        if series.nrows() == 1 {
            let vals: Vec<f64> = sub_series.row(0).iter().copied().collect();
            if !series[(0, i)].is_finite() || vals.iter().all(|v| !v.is_finite()) {
                continue;
            }
            let p = krige(&sub, &vals, &target, &cv_spec)?;
            let e = p.value[0] - series[(0, i)];
            sum += e;
            sum2 += e * e;
            cnt += 1;
            if let Some(se) = p.se
                && se[0] > 0.0
            {
                z2 += e * e / (se[0] * se[0]);
                zc += 1;
            }
            for w in p.warnings {
                if !warnings.contains(&w) {
                    warnings.push(w);
                }
            }
            continue;
        }
        let s = map_series(&sub, &sub_series, &target, &cv_spec, 1, |_, pred, se| {
            for t in 0..pred.len() {
                let obs = series[(t, i)];
                if pred[t].is_finite() && obs.is_finite() {
                    let e = pred[t] - obs;
                    sum += e;
                    sum2 += e * e;
                    cnt += 1;
                    if let Some(se) = se
                        && se[t] > 0.0
                    {
                        z2 += e * e / (se[t] * se[t]);
                        zc += 1;
                    }
                }
            }
        })?;
        for w in s.warnings {
            if !warnings.contains(&w) {
                warnings.push(w);
            }
        }
    }
    if cnt == 0 {
        return Ok(None);
    }
    Ok(Some(CvScore {
        method: spec.method,
        n: cnt,
        rmse: (sum2 / cnt as f64).sqrt(),
        mean_error: sum / cnt as f64,
        msse: (spec.method.is_kriging() && zc > 0).then(|| z2 / zc as f64),
        warnings,
        drift: None,
    }))
}

/// The choice of `method = "auto"`: the kriging method with the smallest
/// cross-validated RMSE (kriging methods only, because only they give every
/// pot a standard error); a method within 1 % of the best RMSE whose MSSE is
/// closer to 1 is preferred (common practice: equal accuracy, more honest
/// standard errors). Returns the index into `scores` and the reason in words.
pub fn choose(scores: &[CvScore]) -> Option<(usize, String)> {
    let kr: Vec<usize> = (0..scores.len()).filter(|&i| scores[i].method.is_kriging()).collect();
    let best = *kr.iter().min_by(|&&a, &&b| scores[a].rmse.total_cmp(&scores[b].rmse))?;
    let dev = |i: usize| scores[i].msse.map_or(f64::INFINITY, |m| (m.ln()).abs());
    let pick = *kr
        .iter()
        .filter(|&&i| scores[i].rmse <= scores[best].rmse * 1.01)
        .min_by(|&&a, &&b| dev(a).total_cmp(&dev(b)).then(scores[a].rmse.total_cmp(&scores[b].rmse)))
        .unwrap_or(&best);
    let s = &scores[pick];
    let mut why = format!(
        "{} has the smallest leave-one-sensor-out RMSE among the kriging methods ({:.4}",
        s.label(),
        s.rmse
    );
    if pick != best {
        why = format!(
            "{} is within 1 % of the smallest leave-one-sensor-out RMSE ({:.4} vs {:.4} for {}) with a mean squared standardised error closer to 1",
            s.label(),
            s.rmse,
            scores[best].rmse,
            scores[best].label()
        );
        why.push_str(&format!(" ({:.3})", s.msse.unwrap_or(f64::NAN)));
    } else {
        if let Some(m) = s.msse {
            why.push_str(&format!(", mean squared standardised error {m:.3}"));
        }
        why.push(')');
    }
    let base: Vec<&CvScore> = scores.iter().filter(|c| !c.method.is_kriging()).collect();
    if let Some(b) = base.iter().min_by(|a, b| a.rmse.total_cmp(&b.rmse)) {
        if b.rmse < s.rmse {
            why.push_str(&format!(
                "; note: the baseline {} predicts better (RMSE {:.4}) but gives no standard error",
                b.method.name(),
                b.rmse
            ));
        } else {
            why.push_str(&format!("; best baseline {} has RMSE {:.4}", b.method.name(), b.rmse));
        }
    }
    Some((pick, why))
}

/// The variogram model chosen for mapping, with every family's fit.
#[derive(Clone, Debug, PartialEq)]
pub struct ModelChoice {
    /// The model kriging uses.
    pub model: super::variogram::VariogramModel,
    /// Every family's fit (`None`: could not be fitted).
    pub fits: Vec<(super::correlation::Family, Option<super::variogram::VariogramFit>)>,
    /// The family chosen by the smallest criterion (`None`: fallback model).
    pub chosen: Option<super::correlation::Family>,
    /// Set when the documented fallback was used.
    pub warning: Option<String>,
}

/// Fit `families` to `emp` and pick the smallest Cressie criterion; when no
/// family can be fitted (fewer than three non-empty bins, e.g. too few
/// sensors), fall back to an exponential model with no nugget, range
/// parameter one third of the largest sensor distance and sill `variance`
/// (the data's variance), with a warning. One sensor, or sensors all at one
/// position, is an error ([`SpatialError::TooFewSensors`]).
pub fn choose_model(
    emp: &super::variogram::Empirical,
    families: &[super::correlation::Family],
    opts: &super::variogram::FitOptions,
    sensors: &Points,
    variance: f64,
) -> Result<ModelChoice> {
    let dmax = sensors.max_distance();
    if sensors.len() < 2 || dmax <= super::geometry::DUPLICATE_TOLERANCE {
        return Err(SpatialError::TooFewSensors {
            method: "kriging".into(),
            needed: 2,
            got: if dmax > 0.0 { sensors.len() } else { sensors.len().min(1) },
            hint: "one sensor position cannot show spatial variation; use method = \"nearest\" to give every pot that sensor's value (without a standard error)".into(),
        });
    }
    let fits = super::variogram::fit_families(emp, families, opts);
    if let Some(best) = super::variogram::best_fit(&fits) {
        let chosen = fits.iter().find(|(_, f)| *f == Some(best)).map(|(fam, _)| *fam);
        return Ok(ModelChoice { model: best.model, fits, chosen, warning: None });
    }
    if !(variance.is_finite() && variance > 0.0) {
        return Err(SpatialError::BadInput {
            what: "variogram".into(),
            message: format!(
                "no family could be fitted and the data variance is {variance}; the sensors show no variation to map"
            ),
        });
    }
    let model = super::variogram::VariogramModel {
        family: super::correlation::Family::Exponential,
        nugget: 0.0,
        partial_sill: variance,
        range: dmax / 3.0,
    };
    Ok(ModelChoice {
        model,
        fits,
        chosen: None,
        warning: Some(format!(
            "too few sensor pairs to fit a variogram ({} sensors, {} non-empty bins); using an exponential model without nugget, range parameter {:.3} m (a third of the largest sensor distance) and sill {:.4} (the data variance)",
            sensors.len(),
            emp.bins.iter().filter(|b| b.pairs > 0).count(),
            dmax / 3.0,
            variance
        )),
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::spatial::correlation::Family;
    use crate::spatial::kriging::testdata::pts;
    use crate::spatial::variogram::VariogramModel;
    use approx::assert_relative_eq;
    use rand::{RngExt, SeedableRng};
    use rand_chacha::ChaCha8Rng;
    use rand_distr::StandardNormal;

    fn spec(method: Interpolator, model: VariogramModel) -> Spec {
        Spec { method, model, neighbours: None, drift: None }
    }

    fn layout(seed: u64, n: usize) -> Points {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let xy: Vec<[f64; 2]> =
            (0..n).map(|_| [rng.random::<f64>() * 12.0, rng.random::<f64>() * 6.0]).collect();
        pts(&xy)
    }

    /// Mapping a series with missing values through reused weights equals a
    /// fresh kriging solve at every step.
    #[test]
    fn weight_reuse_equals_per_step_solves() {
        let s = layout(1, 9);
        let t = layout(2, 23);
        let m = VariogramModel {
            family: Family::Matern { nu: 2.5 },
            nugget: 0.05,
            partial_sill: 1.0,
            range: 2.0,
        };
        let mut rng = ChaCha8Rng::seed_from_u64(4);
        let series = DMatrix::from_fn(60, 9, |_, _| {
            if rng.random::<f64>() < 0.15 { f64::NAN } else { rng.sample::<f64, _>(StandardNormal) }
        });
        for method in [Interpolator::Ordinary, Interpolator::Universal, Interpolator::Idw { power: 2.0 }] {
            let sp = spec(method, m);
            let mut got = vec![vec![]; t.len()];
            let mut got_se = vec![vec![]; t.len()];
            let summary = map_series(&s, &series, &t, &sp, 5, |k, v, se| {
                got[k] = v.to_vec();
                got_se[k] = se.map(|s| s.to_vec()).unwrap_or_default();
            })
            .unwrap();
            assert!(summary.sensor_sets > 10);
            for step in 0..60 {
                let z: Vec<f64> = series.row(step).iter().copied().collect();
                let p = krige(&s, &z, &t, &sp).unwrap();
                for k in 0..t.len() {
                    assert_relative_eq!(got[k][step], p.value[k], max_relative = 1e-10, epsilon = 1e-12);
                    if let Some(se) = &p.se {
                        assert_relative_eq!(got_se[k][step], se[k], max_relative = 1e-10, epsilon = 1e-12);
                    }
                }
            }
        }
        // A step with no sensor is missing at every pot.
        let mut s2 = series.clone();
        s2.row_mut(3).fill(f64::NAN);
        let mut seen = 0;
        let summary = map_series(&s, &s2, &t, &spec(Interpolator::Ordinary, m), 64, |_, v, _| {
            assert!(v[3].is_nan());
            seen += 1;
        })
        .unwrap();
        assert_eq!((seen, summary.steps_without_data), (t.len(), 1));
    }

    /// Simulated Gaussian random fields (seeded, Cholesky of the exponential
    /// covariance with nugget over sensors and pots): against the known truth
    /// at the pots, ordinary kriging beats IDW and the nearest sensor, and the
    /// mean squared standardised error is near 1; the leave-one-sensor-out
    /// MSSE is near 1 too and `auto` picks a kriging method.
    #[test]
    fn kriging_beats_baselines_on_simulated_fields() {
        let s = layout(10, 20);
        let t = layout(11, 150);
        let m = VariogramModel { family: Family::Exponential, nugget: 0.05, partial_sill: 1.0, range: 3.0 };
        let all: Vec<(f64, f64)> =
            (0..s.len()).map(|i| (s.x[i], s.y[i])).chain((0..t.len()).map(|i| (t.x[i], t.y[i]))).collect();
        let n = all.len();
        let c = Mat::from_fn(n, n, |i, j| {
            if i == j { m.sill() } else { m.covariance((all[i].0 - all[j].0).hypot(all[i].1 - all[j].1)) }
        });
        let chol = crate::spatial::factor::Cholesky::new(c, 0.0).unwrap();
        let mut rng = ChaCha8Rng::seed_from_u64(12);
        let reps = 60;
        let mut fields = DMatrix::<f64>::zeros(reps, n);
        for r in 0..reps {
            let e = Mat::from_fn(n, 1, |_, _| rng.sample::<f64, _>(StandardNormal));
            let f = chol.l() * &e;
            for j in 0..n {
                fields[(r, j)] = 10.0 + f[(j, 0)];
            }
        }
        let sensors_series = fields.columns(0, s.len()).into_owned();
        let mut sse = [0.0; 3];
        let (mut z2, mut cnt) = (0.0, 0usize);
        for (k, method) in [Interpolator::Ordinary, Interpolator::Idw { power: 2.0 }, Interpolator::Nearest]
            .into_iter()
            .enumerate()
        {
            map_series(&s, &sensors_series, &t, &spec(method, m), 40, |pot, v, se| {
                for r in 0..reps {
                    let e = v[r] - fields[(r, s.len() + pot)];
                    sse[k] += e * e;
                    if let Some(se) = se {
                        z2 += e * e / (se[r] * se[r]);
                        cnt += 1;
                    }
                }
            })
            .unwrap();
        }
        assert!(sse[0] < 0.95 * sse[1] && sse[0] < 0.8 * sse[2], "{sse:?}");
        let msse = z2 / cnt as f64;
        assert!((msse - 1.0).abs() < 0.15, "msse {msse}");
        let scores: Vec<CvScore> = [
            Interpolator::Ordinary,
            Interpolator::Universal,
            Interpolator::Idw { power: 2.0 },
            Interpolator::Nearest,
        ]
        .into_iter()
        .map(|meth| loso(&s, &sensors_series, &spec(meth, m)).unwrap().unwrap())
        .collect();
        let cv_msse = scores[0].msse.unwrap();
        assert!((cv_msse - 1.0).abs() < 0.3, "cv msse {cv_msse}");
        assert!(scores[0].rmse < scores[3].rmse);
        assert!(scores[2].msse.is_none());
        let (pick, why) = choose(&scores).unwrap();
        assert!(scores[pick].method.is_kriging());
        assert!(why.contains(scores[pick].method.name()) && why.contains("RMSE"), "{why}");
    }

    /// Leave-one-out on a single value per sensor equals a hand loop of
    /// kriging solves.
    #[test]
    fn loso_scalar_equals_hand_loop() {
        let s = layout(21, 8);
        let z: Vec<f64> = (0..8).map(|i| (s.x[i] * 0.7).sin() + 0.1 * s.y[i]).collect();
        let m = VariogramModel { family: Family::Gaussian, nugget: 0.01, partial_sill: 0.5, range: 3.0 };
        let sc =
            loso(&s, &DMatrix::from_row_slice(1, 8, &z), &spec(Interpolator::Ordinary, m)).unwrap().unwrap();
        let (mut se2, mut me, mut z2) = (0.0, 0.0, 0.0);
        for i in 0..8 {
            let o: Vec<usize> = (0..8).filter(|&j| j != i).collect();
            let sub = s.subset(&o);
            let vals: Vec<f64> = o.iter().map(|&j| z[j]).collect();
            let p = krige(&sub, &vals, &s.subset(&[i]), &spec(Interpolator::Ordinary, m)).unwrap();
            let e = p.value[0] - z[i];
            se2 += e * e;
            me += e;
            z2 += e * e / p.se.unwrap()[0].powi(2);
        }
        assert_eq!(sc.n, 8);
        assert_relative_eq!(sc.rmse, (se2 / 8.0).sqrt(), max_relative = 1e-12);
        assert_relative_eq!(sc.mean_error, me / 8.0, max_relative = 1e-12);
        assert_relative_eq!(sc.msse.unwrap(), z2 / 8.0, max_relative = 1e-12);
    }

    /// Too few sensors: the documented fallback model with a warning; one
    /// sensor: a clear error suggesting the nearest-sensor method.
    #[test]
    fn too_few_sensors() {
        use crate::spatial::variogram::{Bins, Estimator, FitOptions, experimental};
        let s = pts(&[[0.0, 0.0], [3.0, 0.0], [0.0, 4.0]]);
        let z = [1.0, 2.0, 4.0];
        let bins = Bins::default_for(&s).unwrap();
        let e = experimental(&s, &z, &bins, Estimator::Matheron, None).unwrap();
        let c = choose_model(&e, &[Family::Exponential], &FitOptions::default(), &s, 2.0).unwrap();
        assert!(c.chosen.is_none() && c.warning.as_ref().unwrap().contains("too few"));
        assert_relative_eq!(c.model.range, 5.0 / 3.0);
        let one = pts(&[[1.0, 1.0]]);
        let err = choose_model(&e, &[Family::Exponential], &FitOptions::default(), &one, 2.0).unwrap_err();
        assert!(matches!(err, SpatialError::TooFewSensors { .. }));
        assert!(err.to_string().contains("nearest"));
        // The nearest-sensor method maps a single sensor.
        let t = pts(&[[5.0, 5.0], [0.0, 1.0]]);
        let p = krige(&one, &[7.0], &t, &spec(Interpolator::Nearest, c.model)).unwrap();
        assert_eq!(p.value, vec![7.0, 7.0]);
    }

    /// A summary mapped with the pooled shape: predictions are those of
    /// kriging with that shape, and the SE scales with the summary's units
    /// (multiplying the data by 7 multiplies value and SE by 7).
    #[test]
    fn summary_mapping_scales_with_units() {
        let s = layout(31, 12);
        let t = layout(32, 5);
        let z: Vec<f64> = (0..12).map(|i| (s.x[i] * 0.4).cos() + 0.05 * s.y[i] * s.y[i]).collect();
        let m = VariogramModel { family: Family::Exponential, nugget: 0.1, partial_sill: 0.9, range: 2.5 };
        let sp = spec(Interpolator::Ordinary, m);
        let a = map_summary(&s, &z, &t, &sp).unwrap();
        let z7: Vec<f64> = z.iter().map(|v| 7.0 * v).collect();
        let b = map_summary(&s, &z7, &t, &sp).unwrap();
        let direct = krige(&s, &z, &t, &sp).unwrap();
        for k in 0..5 {
            assert_relative_eq!(a.value[k], direct.value[k], max_relative = 1e-10);
            assert_relative_eq!(b.value[k], 7.0 * a.value[k], max_relative = 1e-10);
            assert_relative_eq!(
                b.se.as_ref().unwrap()[k],
                7.0 * a.se.as_ref().unwrap()[k],
                max_relative = 1e-10
            );
        }
    }

    #[test]
    fn window_se() {
        assert_eq!(window_mean_se(&[]), None);
        assert_eq!(window_mean_se(&[1.0, f64::NAN]), None);
        assert_relative_eq!(window_mean_se(&[1.0, 2.0, 3.0]).unwrap(), 2.0);
    }
}
