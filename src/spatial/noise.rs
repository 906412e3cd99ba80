//! The loggers' measurement-error variance: the part of the per-step
//! variogram's nugget that is sensor noise, not climate, and is therefore
//! left out of the SE of the climate at a pot.
//!
//! # Why
//! The nugget `c0` of a variogram is the sum of micro-scale variation (real
//! differences between places closer than the sensors) and measurement
//! error, `c0 = c_MS + c_ME` (Cressie 1993, *Statistics for Spatial Data*,
//! rev. ed., §2.3.1 and §3.2.1, from memory). A pot's true climate carries
//! the first, not the second: predicting the noise-free value at a place
//! that is not a sensor, the kriging weights are unchanged and the error
//! variance is the kriging variance less `c_ME` (the target's own noise is
//! independent of everything; checked against a direct computation in
//! `tests/reference/noise.py`). Counting hours below a threshold on a
//! per-step distribution that keeps the sensors' noise spreads every step
//! over the threshold, and gave the mapped driver SEs up to 1.7 times too
//! wide against the simulator's noise-free truth (docs/spatial.md).
//!
//! # Estimate
//! One logger per position cannot tell `c_MS` from `c_ME` in space, but it
//! can in time: a sensor's noise is independent from one reading to the
//! next, while a place's deviation from the room (a draught, a warm wall)
//! changes slowly. Each sensor's anomaly `a_t,k = z_t,k - mean_t` (the mean
//! over the `n_t` sensors reporting at step `t`) has the noise variance
//! `sigma^2 (1 - 1/n_t)`; its temporal semivariance at a lag of `l` steps,
//! `g(l) = E[(a_t+l,k - a_t,k)^2] / ((1 - 1/n_t) + (1 - 1/n_t+l))`, is
//! `sigma^2` plus the change of the climate anomaly over `l` steps. The
//! climate part is extrapolated to lag 0 linearly from lags 1 and 2,
//! `sigma^2 = 2 g(1) - g(2)` (a variogram's nugget as its value
//! extrapolated to the origin, Journel & Huijbregts 1978, *Mining
//! Geostatistics*, §III.B, from memory; exact when the climate part grows
//! linearly with the lag, and an underestimate when it grows faster, which
//! errs on the side of wider SEs). Each `g(l)` is estimated robustly as
//! `median(d^2) / 0.455` over every sensor and step (the median of
//! `chi^2_1` is 0.455), so that the few steps at dusk and dawn, when a
//! draught switches on or off, do not count as noise. The estimate is
//! clamped to `[0, c0]`: no more noise than nugget.
//!
//! Cost: O(steps x sensors) plus two sorts of as many values.

use super::window_se::{CHI2_1_MEDIAN, median};
use nalgebra::DMatrix;

/// The fewest squared differences behind one lag's semivariance.
pub const MIN_DIFFERENCES: usize = 30;

/// The measurement-error estimate of one variable.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct MeasurementError {
    /// `c_ME`, clamped to `[0, nugget]` (units of the variable, squared).
    pub variance: f64,
    /// The temporal semivariance of the anomalies at lag 1 step, `g(1)`.
    pub lag1: f64,
    /// The same at lag 2 steps, `g(2)`.
    pub lag2: f64,
}

/// The robust temporal semivariance `g(lag)` of the per-step anomalies of
/// `series` (steps x sensors; NaN = no reading), normalised to the noise
/// variance of one reading (module doc). `None` with fewer than
/// [`MIN_DIFFERENCES`] differences or a zero median.
pub fn anomaly_semivariance(series: &DMatrix<f64>, lag: usize) -> Option<f64> {
    let (steps, n) = series.shape();
    if lag == 0 || steps <= lag {
        return None;
    }
    // Each step's mean and count over the sensors that report.
    let stats: Vec<(f64, usize)> = (0..steps)
        .map(|t| {
            let (s, c) =
                series.row(t).iter().filter(|v| v.is_finite()).fold((0.0, 0), |(s, c), v| (s + v, c + 1));
            (if c > 0 { s / c as f64 } else { f64::NAN }, c)
        })
        .collect();
    let mut d2 = Vec::new();
    for t in 0..steps - lag {
        let ((m0, n0), (m1, n1)) = (stats[t], stats[t + lag]);
        if n0 < 2 || n1 < 2 {
            continue;
        }
        let norm = (1.0 - 1.0 / n0 as f64) + (1.0 - 1.0 / n1 as f64);
        for k in 0..n {
            let d = (series[(t + lag, k)] - m1) - (series[(t, k)] - m0);
            if d.is_finite() {
                d2.push(d * d / norm);
            }
        }
    }
    if d2.len() < MIN_DIFFERENCES {
        return None;
    }
    median(d2).map(|m| m / CHI2_1_MEDIAN).filter(|g| *g > 0.0)
}

/// The measurement-error variance `clamp(2 g(1) - g(2), 0, nugget)` (module
/// doc); `None` when either lag cannot be estimated.
pub fn measurement_error(series: &DMatrix<f64>, nugget: f64) -> Option<MeasurementError> {
    let lag1 = anomaly_semivariance(series, 1)?;
    let lag2 = anomaly_semivariance(series, 2)?;
    let variance = (2.0 * lag1 - lag2).clamp(0.0, nugget.max(0.0));
    Some(MeasurementError { variance, lag1, lag2 })
}

/// The SE of the noise-free value at a target that is not a sensor, from
/// the kriging SE `se` (which includes the nugget) and the measurement-error
/// variance `noise`: `sqrt(max(se^2 - noise, 0))` (module doc).
pub fn noise_free_se(se: f64, noise: f64) -> f64 {
    (se * se - noise).max(0.0).sqrt()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn fixture() -> serde_json::Value {
        let path = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/reference/fixtures/noise.json");
        serde_json::from_str(&std::fs::read_to_string(path).expect("noise.json")).unwrap()
    }

    fn matrix(v: &serde_json::Value) -> DMatrix<f64> {
        let rows: Vec<Vec<f64>> = v
            .as_array()
            .unwrap()
            .iter()
            .map(|r| r.as_array().unwrap().iter().map(|x| x.as_f64().unwrap_or(f64::NAN)).collect())
            .collect();
        DMatrix::from_fn(rows.len(), rows[0].len(), |i, j| rows[i][j])
    }

    /// The lag semivariances and the estimate against numpy's computation
    /// of the same definitions on a committed series with gaps
    /// (`tests/reference/noise.py`), to 1e-10 relative.
    #[test]
    fn semivariances_match_numpy() {
        let f = fixture();
        let z = matrix(&f["series"]);
        let g1 = anomaly_semivariance(&z, 1).unwrap();
        let g2 = anomaly_semivariance(&z, 2).unwrap();
        let rel = |a: f64, b: f64| ((a - b) / b).abs();
        assert!(rel(g1, f["g1"].as_f64().unwrap()) < 1e-10, "{g1} vs {}", f["g1"]);
        assert!(rel(g2, f["g2"].as_f64().unwrap()) < 1e-10, "{g2} vs {}", f["g2"]);
        let me = measurement_error(&z, 1.0).unwrap();
        assert!(rel(me.variance, f["estimate"].as_f64().unwrap()) < 1e-9);
        // Clamped to the nugget.
        assert_eq!(measurement_error(&z, 1e-4).unwrap().variance, 1e-4);
        assert!(anomaly_semivariance(&z.rows(0, 3).into_owned(), 1).is_none());
    }

    /// The noise-free kriging SE against numpy's direct error variance
    /// `Var(S(x0) - lambda' Z)` of ordinary kriging with a nugget that is
    /// part noise (`tests/reference/noise.py`).
    #[test]
    fn noise_free_se_matches_direct_variance() {
        let f = fixture();
        let k = &f["kriging"];
        let se = k["se"].as_f64().unwrap();
        let noise = k["noise"].as_f64().unwrap();
        let direct = k["noise_free_se"].as_f64().unwrap();
        assert!((noise_free_se(se, noise) - direct).abs() < 1e-12 * direct.max(1.0));
        assert_eq!(noise_free_se(0.1, 0.02), 0.0);
    }

    /// Seeded check of the estimator on its model: a slowly changing
    /// anomaly per sensor (a daily cycle of amplitude 0.5 that switches on
    /// at night, a fixed offset per place) plus white noise of SD 0.1; the
    /// estimate recovers 0.01 within 20 % (the median over 15 x 336 values
    /// has a relative SE of about 3 %; the switch at dusk and dawn biases it
    /// by a few per cent).
    #[test]
    fn recovers_white_noise_beside_slow_anomalies() {
        use rand::{RngExt, SeedableRng};
        use rand_chacha::ChaCha8Rng;
        use rand_distr::StandardNormal;
        let mut rng = ChaCha8Rng::seed_from_u64(3);
        let (steps, n) = (336, 15);
        let weather: Vec<f64> = (0..steps).map(|t| 12.0 + 3.0 * (t as f64 / 24.0).sin()).collect();
        let z = DMatrix::from_fn(steps, n, |t, k| {
            let night = if (t % 24) < 8 { 1.0 } else { 0.0 };
            let e: f64 = rng.sample(StandardNormal);
            weather[t] + 0.2 * k as f64 - 0.5 * night * (k as f64 / n as f64) + 0.1 * e
        });
        let me = measurement_error(&z, 1.0).unwrap();
        assert!((me.variance - 0.01).abs() < 0.002, "{me:?}");
        // Without noise the estimate is (almost) none of the nugget.
        let clean = DMatrix::from_fn(steps, n, |t, k| weather[t] + 0.2 * k as f64);
        assert!(measurement_error(&clean, 1.0).is_none_or(|m| m.variance < 1e-6));
    }
}
