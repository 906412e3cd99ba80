//! The prepared kriging system of [`super`]: the factorised `[K F; F' 0]` of one
//! set of sensors with its drift basis and documented fallbacks, solved once and
//! reused for every block of targets, and the kriging variances.

use super::{Interpolator, Neighbours, Spec, Weights};
use crate::spatial::covariance::Kernel;
use crate::spatial::error::{Result, SpatialError};
use crate::spatial::factor::Bordered;
use crate::spatial::geometry::Points;
use crate::spatial::variogram::VariogramModel;
use faer::Mat;

/// A prepared kriging system for one set of sensors: the factorised
/// `[K F; F' 0]` with full neighbourhood ([`Bordered`]: Cholesky of `K` and
/// of the Schur complement of the drift block), solved once and reused for
/// every target block. Cost O(n^3) once, then O(n^2) per target.
pub struct System {
    sensors: Vec<usize>,
    pts: Points,
    method: Interpolator,
    pub(super) model: VariogramModel,
    drift_s: Option<Vec<f64>>,
    pub(super) lu: Option<Bordered>,
    warnings: Vec<String>,
}

/// The drift basis `f(s)` of a method at one location.
pub(super) fn basis(method: Interpolator, x: f64, y: f64, v: f64, out: &mut [f64]) {
    match method {
        Interpolator::Ordinary => out[0] = 1.0,
        Interpolator::Universal => {
            out[0] = 1.0;
            out[1] = x;
            out[2] = y;
        }
        Interpolator::ExternalDrift => {
            out[0] = 1.0;
            out[1] = v;
        }
        _ => {}
    }
}

impl System {
    /// Prepare the system of the sensors `subset` (indices into `sensors`).
    /// Documented fallbacks, each with a warning: universal kriging on
    /// collinear sensors, or with fewer than 4 sensors, and external drift
    /// that is constant over the sensors or with fewer than 3 sensors, fall
    /// back to ordinary kriging; duplicate positions with a nugget below
    /// `1e-6` of the sill get that small nugget on the diagonal so that the
    /// system stays regular (the duplicates then share the weight).
    pub fn new(sensors: &Points, subset: &[usize], spec: &Spec) -> Result<System> {
        let mut warnings = Vec::new();
        let pts = sensors.subset(subset);
        let n = pts.len();
        let mut method = spec.method;
        if n == 0 {
            return Err(SpatialError::TooFewSensors {
                method: method.name().into(),
                needed: 1,
                got: 0,
                hint: "no sensor reports here".into(),
            });
        }
        let drift_s = match (&spec.drift, method) {
            (Some(d), _) => {
                if d.at_sensors.len() != sensors.len() {
                    return Err(SpatialError::BadInput {
                        what: format!("drift `{}`", d.name),
                        message: format!("{} values for {} sensors", d.at_sensors.len(), sensors.len()),
                    });
                }
                Some(subset.iter().map(|&i| d.at_sensors[i]).collect::<Vec<_>>())
            }
            (None, Interpolator::ExternalDrift) => {
                return Err(SpatialError::BadInput {
                    what: "external_drift".into(),
                    message: "no drift variable given".into(),
                });
            }
            _ => None,
        };
        if method == Interpolator::Universal && (n < 4 || pts.collinear()) {
            warnings.push(format!(
                "universal kriging needs at least 4 sensors not all on one line ({n} here); ordinary kriging used instead"
            ));
            method = Interpolator::Ordinary;
        }
        if method == Interpolator::ExternalDrift {
            let v = drift_s.as_ref().expect("checked above");
            let (lo, hi) =
                v.iter().fold((f64::INFINITY, f64::NEG_INFINITY), |(l, h), x| (l.min(*x), h.max(*x)));
            if n < 3 || hi - lo <= 1e-9 * (hi.abs() + lo.abs()).max(1e-300) {
                warnings.push(format!(
                    "the external drift `{}` does not vary over the {n} sensors here; ordinary kriging used instead",
                    spec.drift.as_ref().map(|d| d.name.as_str()).unwrap_or("")
                ));
                method = Interpolator::Ordinary;
            }
        }
        let mut model = spec.model;
        if method.is_kriging() {
            let sill = model.sill();
            if !(sill.is_finite() && sill > 0.0 && model.range > 0.0 && model.nugget >= 0.0) {
                return Err(SpatialError::BadInput {
                    what: "variogram model".into(),
                    message: format!(
                        "nugget {}, partial sill {}, range {} must be >= 0, > 0, > 0",
                        model.nugget, model.partial_sill, model.range
                    ),
                });
            }
            if model.nugget < 1e-6 * sill && !pts.duplicates().is_empty() {
                warnings.push(format!(
                    "{} sensor pair(s) share a position; a nugget of 1e-6 of the sill keeps the kriging system regular, and they share their weight",
                    pts.duplicates().len()
                ));
                model.nugget = 1e-6 * sill;
            }
        }
        let lu = if method.is_kriging() && spec.neighbours.is_none_or(|k| k >= n) {
            Some(factor(&pts, method, &model, drift_s.as_deref())?)
        } else {
            None
        };
        Ok(System { sensors: subset.to_vec(), pts, method, model, drift_s, lu, warnings })
    }

    /// Warnings about the fallbacks taken when the system was built.
    pub fn warnings(&self) -> &[String] {
        &self.warnings
    }

    /// The method used after fallbacks.
    pub fn method(&self) -> Interpolator {
        self.method
    }

    /// Weights and variances for the targets `targets[idx]`.
    /// `drift_t` is the drift at every target (indexed like `targets`).
    pub fn weights(&self, targets: &Points, idx: std::ops::Range<usize>, spec: &Spec) -> Result<Weights> {
        let n = self.pts.len();
        let m = idx.len();
        let mut lambda = Mat::<f64>::zeros(n, m);
        let mut offset = vec![0.0; m];
        let drift_t = spec.drift.as_ref().map(|d| &d.at_targets);
        if let Some(d) = drift_t
            && d.len() != targets.len()
        {
            return Err(SpatialError::BadInput {
                what: "drift at targets".into(),
                message: format!("{} values for {} targets", d.len(), targets.len()),
            });
        }
        let variance = match self.method {
            Interpolator::Nearest | Interpolator::Idw { .. } => {
                let k = spec.neighbours.unwrap_or(n).clamp(1, n);
                let nn = Neighbours::new(&self.pts);
                for (c, t) in idx.clone().enumerate() {
                    let near = nn.nearest(
                        targets.x[t],
                        targets.y[t],
                        if self.method == Interpolator::Nearest { 1 } else { k },
                    );
                    if let Interpolator::Idw { power } = self.method {
                        if let Some(&(j, _)) =
                            near.iter().find(|(_, d)| *d <= crate::spatial::geometry::DUPLICATE_TOLERANCE)
                        {
                            lambda[(j, c)] = 1.0;
                        } else {
                            let w: Vec<f64> = near.iter().map(|(_, d)| d.powf(-power)).collect();
                            let s: f64 = w.iter().sum();
                            for ((j, _), wj) in near.iter().zip(w) {
                                lambda[(*j, c)] = wj / s;
                            }
                        }
                    } else {
                        lambda[(near[0].0, c)] = 1.0;
                    }
                }
                None
            }
            _ => {
                let mut var = vec![0.0; m];
                let kern = Kernel::from_variogram(&self.model);
                match (&self.lu, spec.neighbours) {
                    (Some(lu), _) => {
                        let p = self.method.trend_len();
                        let mut top = Mat::<f64>::zeros(n, m);
                        let mut bottom = Mat::<f64>::zeros(p, m);
                        let mut f0 = vec![0.0; p];
                        for (c, t) in idx.clone().enumerate() {
                            for r in 0..n {
                                top[(r, c)] = kern.at_distance(self.pts.dist_to(r, targets, t));
                            }
                            basis(
                                self.method,
                                targets.x[t],
                                targets.y[t],
                                drift_t.map_or(0.0, |d| d[t]),
                                &mut f0,
                            );
                            for q in 0..p {
                                bottom[(q, c)] = f0[q];
                            }
                        }
                        let (sol, mu) = lu.solve(&top, &bottom);
                        for (c, v) in var.iter_mut().enumerate() {
                            *v = clean_var(
                                kriging_variance(self.model.sill(), &sol, &mu, &top, &bottom, c),
                                self.model.sill(),
                            );
                        }
                        lambda = sol;
                    }
                    (None, k) => {
                        let k = k.unwrap_or(n).clamp(1, n);
                        let nn = Neighbours::new(&self.pts);
                        for (c, t) in idx.clone().enumerate() {
                            let near: Vec<usize> = nn
                                .nearest(targets.x[t], targets.y[t], k)
                                .into_iter()
                                .map(|(j, _)| j)
                                .collect();
                            let sub = self.pts.subset(&near);
                            let ds =
                                self.drift_s.as_ref().map(|d| near.iter().map(|&j| d[j]).collect::<Vec<_>>());
                            let mut method = self.method;
                            if (method == Interpolator::Universal && (sub.len() < 4 || sub.collinear()))
                                || (method == Interpolator::ExternalDrift
                                    && constant(ds.as_deref().unwrap_or(&[])))
                            {
                                method = Interpolator::Ordinary;
                            }
                            let lu = factor(&sub, method, &self.model, ds.as_deref())?;
                            let p = method.trend_len();
                            let top = Mat::from_fn(sub.len(), 1, |r, _| {
                                kern.at_distance(sub.dist_to(r, targets, t))
                            });
                            let mut f0 = vec![0.0; p];
                            basis(method, targets.x[t], targets.y[t], drift_t.map_or(0.0, |d| d[t]), &mut f0);
                            let bottom = Mat::from_fn(p, 1, |q, _| f0[q]);
                            let (sol, mu) = lu.solve(&top, &bottom);
                            var[c] = clean_var(
                                kriging_variance(self.model.sill(), &sol, &mu, &top, &bottom, 0),
                                self.model.sill(),
                            );
                            for (r, &j) in near.iter().enumerate() {
                                lambda[(j, c)] = sol[(r, 0)];
                            }
                        }
                    }
                }
                if let Interpolator::Simple { mean } = self.method {
                    for (c, off) in offset.iter_mut().enumerate() {
                        *off = mean * (1.0 - (0..n).map(|r| lambda[(r, c)]).sum::<f64>());
                    }
                }
                Some(var)
            }
        };
        Ok(Weights {
            sensors: self.sensors.clone(),
            lambda,
            variance,
            offset,
            method: self.method,
            warnings: self.warnings.clone(),
        })
    }

    pub(super) fn singular(&self) -> SpatialError {
        SpatialError::Singular {
            method: self.method.name().into(),
            n: self.pts.len(),
            hint: "add a nugget, or check for sensors at (nearly) the same position".into(),
        }
    }
}

fn constant(v: &[f64]) -> bool {
    let (lo, hi) = v.iter().fold((f64::INFINITY, f64::NEG_INFINITY), |(l, h), x| (l.min(*x), h.max(*x)));
    v.len() < 3 || hi - lo <= 1e-9 * (hi.abs() + lo.abs()).max(1e-300)
}

/// Round-off can make a variance of a few ulps negative at a sensor.
fn clean_var(v: f64, sill: f64) -> f64 {
    if v < 0.0 && v > -1e-9 * sill { 0.0 } else { v.max(0.0) }
}

/// Factorise `[K F; F' 0]` ([`Bordered`]): `K` the covariance of the
/// sensors ([`Kernel::from_variogram`]: the sill on the diagonal, `c rho(d)`
/// between different sensors), `F` the drift basis of `method`.
fn factor(
    pts: &Points,
    method: Interpolator,
    model: &VariogramModel,
    drift: Option<&[f64]>,
) -> Result<Bordered> {
    let n = pts.len();
    let p = method.trend_len();
    let k = Kernel::from_variogram(model).fill_lower(n, |i, j| pts.dist_to(i, pts, j));
    let mut fm = Mat::<f64>::zeros(n, p);
    let mut f = vec![0.0; p];
    for i in 0..n {
        basis(method, pts.x[i], pts.y[i], drift.map_or(0.0, |d| d[i]), &mut f);
        for q in 0..p {
            fm[(i, q)] = f[q];
        }
    }
    Bordered::new(k, fm).map_err(|e| SpatialError::Singular {
        method: method.name().into(),
        n,
        hint: format!("add a nugget, or check for sensors at (nearly) the same position ({e})"),
    })
}

/// The kriging variance of target column `c` from the solved bordered system
/// (Cressie 1993, §3.4.1): `C(0) - lambda' k - mu' f`, with `lambda`, `mu`
/// the solution for the right-hand sides `k` (`top`) and `f` (`bottom`).
/// Cost O(n + p).
fn kriging_variance(
    c0: f64,
    lambda: &Mat<f64>,
    mu: &Mat<f64>,
    top: &Mat<f64>,
    bottom: &Mat<f64>,
    c: usize,
) -> f64 {
    let mut v = c0;
    for r in 0..top.nrows() {
        v -= lambda[(r, c)] * top[(r, c)];
    }
    for q in 0..bottom.nrows() {
        v -= mu[(q, c)] * bottom[(q, c)];
    }
    v
}
