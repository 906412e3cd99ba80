//! The experimental variogram of a sensor series pooled over its time steps
//! ([`pooled`]): at each step the trend ([`Detrend`]) is removed by least
//! squares over the sensors that report, each lag bin's semivariance is
//! estimated from that step's pairs, and the bins are averaged over the
//! steps. The trend's basis is kept per set of reporting sensors, so a run of
//! steps with the same sensors projects without a factorisation. Split from
//! [`super::variogram`], which re-exports it.

use super::error::{Result, SpatialError};
use super::factor::RANK_TOLERANCE;
use super::geometry::Points;
use super::variogram::{BinAcc, Bins, Direction, Empirical, Estimator, VariogramBin, finish, pairs_within};
use nalgebra::DMatrix;

/// The trend removed at each time step before a pooled variogram is computed.
#[derive(Clone, Debug)]
pub enum Detrend {
    /// Subtract the step's mean over the reporting sensors.
    Mean,
    /// Subtract the step's least-squares plane `b0 + b1 x + b2 y`.
    Plane,
    /// Subtract the step's least-squares fit on `1` and the given drift
    /// values at the sensors (one value per sensor).
    Drift(Vec<f64>),
}

/// Pooled variogram of a time series at sensors (`series`: rows = time steps,
/// columns = sensors, NaN = missing): at each step the anomalies are the
/// residuals from `detrend` over the sensors that report, each bin's
/// semivariance is estimated from that step's pairs, and the result is the
/// mean over the steps at which the bin had at least one pair. Steps with
/// fewer reporting sensors than the trend has coefficients plus two are
/// skipped. Cost O(T (pairs + n p^2)).
pub fn pooled(
    points: &Points,
    series: &DMatrix<f64>,
    bins: &Bins,
    estimator: Estimator,
    direction: Option<Direction>,
    detrend: &Detrend,
) -> Result<Empirical> {
    let n = points.len();
    if series.ncols() != n {
        return Err(SpatialError::BadInput {
            what: "pooled variogram".into(),
            message: format!("series has {} columns for {} sensors", series.ncols(), n),
        });
    }
    if let Detrend::Drift(v) = detrend
        && v.len() != n
    {
        return Err(SpatialError::BadInput {
            what: "pooled variogram drift".into(),
            message: format!("{} drift values for {n} sensors", v.len()),
        });
    }
    let pairs: Vec<(usize, usize, f64, usize)> = pairs_within(points, bins.max_lag())
        .into_iter()
        .filter(|&(i, j, _)| {
            direction.is_none_or(|dir| {
                dir.contains(
                    points.x[j as usize] - points.x[i as usize],
                    points.y[j as usize] - points.y[i as usize],
                )
            })
        })
        .filter_map(|(i, j, d)| bins.bin_of(d).map(|k| (i as usize, j as usize, d, k)))
        .collect();
    let nb = bins.len();
    let mut gsum = vec![0.0; nb];
    let mut dsum = vec![0.0; nb];
    let mut npairs = vec![0usize; nb];
    let mut nsteps = vec![0usize; nb];
    let mut resid = vec![f64::NAN; n];
    let mut acc = vec![BinAcc::default(); nb];
    let mut trend = None;
    let mut z = vec![f64::NAN; n];
    for t in 0..series.nrows() {
        z.iter_mut().enumerate().for_each(|(j, v)| *v = series[(t, j)]);
        if !anomalies(points, &z, detrend, &mut trend, &mut resid) {
            continue;
        }
        acc.iter_mut().for_each(|a| *a = BinAcc::default());
        for &(i, j, d, k) in &pairs {
            let (ri, rj) = (resid[i], resid[j]);
            if ri.is_finite() && rj.is_finite() {
                let diff = ri - rj;
                let a = &mut acc[k];
                a.n += 1;
                a.sum_d += d;
                a.sum_sq += diff * diff;
                a.sum_root += diff.abs().sqrt();
            }
        }
        for k in 0..nb {
            if let Some(g) = finish(&acc[k], estimator) {
                gsum[k] += g;
                dsum[k] += acc[k].sum_d;
                npairs[k] += acc[k].n;
                nsteps[k] += 1;
            }
        }
    }
    let out = (0..nb)
        .map(|k| VariogramBin {
            from: bins.edges[k],
            to: bins.edges[k + 1],
            lag: if npairs[k] > 0 {
                dsum[k] / npairs[k] as f64
            } else {
                0.5 * (bins.edges[k] + bins.edges[k + 1])
            },
            semivariance: (nsteps[k] > 0).then(|| gsum[k] / nsteps[k] as f64),
            pairs: if nsteps[k] > 0 { (npairs[k] as f64 / nsteps[k] as f64).round() as usize } else { 0 },
            steps: nsteps[k],
        })
        .collect();
    Ok(Empirical { bins: out, estimator, direction })
}

/// The trend's columns over one set of reporting sensors as an orthonormal
/// basis (modified Gram-Schmidt, twice: Björck 1996, *Numerical Methods for
/// Least Squares Problems*, §2.4.5), each vector one value per sensor of the
/// set. A column aliased with the ones before it (a drift constant over the
/// reporting sensors; [`RANK_TOLERANCE`]) adds nothing to the span and is
/// left out, so the residuals do not change.
struct TrendBasis {
    set: Vec<usize>,
    basis: Vec<Vec<f64>>,
}

impl TrendBasis {
    fn new(points: &Points, detrend: &Detrend, set: Vec<usize>) -> Self {
        let column = |c: usize, j: usize| match (detrend, c) {
            (_, 0) => 1.0,
            (Detrend::Plane, 1) => points.x[j],
            (Detrend::Plane, _) => points.y[j],
            (Detrend::Drift(v), _) => v[j],
            (Detrend::Mean, _) => unreachable!("the mean has one column"),
        };
        let dot = |a: &[f64], b: &[f64]| a.iter().zip(b).map(|(a, b)| a * b).sum::<f64>();
        let mut basis: Vec<Vec<f64>> = Vec::with_capacity(detrend.columns());
        for c in 0..detrend.columns() {
            let mut v: Vec<f64> = set.iter().map(|&j| column(c, j)).collect();
            let norm0 = dot(&v, &v).sqrt();
            for _ in 0..2 {
                for q in &basis {
                    let d = dot(q, &v);
                    v.iter_mut().zip(q).for_each(|(v, q)| *v -= d * q);
                }
            }
            let rem = dot(&v, &v).sqrt();
            if norm0 == 0.0 || rem <= RANK_TOLERANCE * norm0 {
                continue;
            }
            v.iter_mut().for_each(|v| *v /= rem);
            basis.push(v);
        }
        TrendBasis { set, basis }
    }
}

impl Detrend {
    /// The trend's columns (coefficients) before any is found aliased.
    fn columns(&self) -> usize {
        match self {
            Detrend::Mean => 1,
            Detrend::Plane => 3,
            Detrend::Drift(_) => 2,
        }
    }
}

/// Residuals of one step from the trend (least squares on the reporting
/// sensors: `z` minus its projection on the trend's span); false when too
/// few sensors report. The basis of the last set of reporting sensors is
/// kept in `cache`, so a run of steps with the same sensors projects without
/// a factorisation (cost O(n p) per step).
fn anomalies(
    points: &Points,
    z: &[f64],
    detrend: &Detrend,
    cache: &mut Option<TrendBasis>,
    out: &mut [f64],
) -> bool {
    let reporting = |j: &usize| z[*j].is_finite();
    let count = (0..z.len()).filter(reporting).count();
    if count < detrend.columns() + 2 {
        return false;
    }
    let same = cache.as_ref().is_some_and(|c| c.set.len() == count && c.set.iter().all(reporting));
    if !same {
        *cache = Some(TrendBasis::new(points, detrend, (0..z.len()).filter(reporting).collect()));
    }
    let trend = cache.as_ref().expect("set above");
    out.iter_mut().for_each(|r| *r = f64::NAN);
    let mut resid: Vec<f64> = trend.set.iter().map(|&j| z[j]).collect();
    for q in &trend.basis {
        let d = q.iter().zip(&resid).map(|(q, r)| q * r).sum::<f64>();
        resid.iter_mut().zip(q).for_each(|(r, q)| *r -= d * q);
    }
    for (r, &j) in resid.iter().zip(&trend.set) {
        out[j] = *r;
    }
    true
}
