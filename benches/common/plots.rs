//! The simulated field of plots that the nearest-neighbour benchmarks
//! (`vecchia`, `vecchia_latent`) share: 50 plots per row at 1.0 m x 1.6 m, two
//! smooth driver covariates, a Matérn 1.5 residual field of range 4 m with a
//! 25 % nugget (seeded); the driver coefficients' distance in exact standard
//! errors; and the median time of repeated runs. Included with
//! `#[path = "common/plots.rs"] mod plots;` (it uses `reference::median`).

use super::reference::median;
use potclim::spatial::correlation::Family;
use potclim::spatial::likelihood::{CovParams, Distances, Profiled, cholesky};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};
use std::time::Instant;

/// Plot positions and columns `[1, driver 1, driver 2]`.
pub fn layout(n: usize) -> (Vec<f64>, Vec<f64>, Vec<Vec<f64>>) {
    let x: Vec<f64> = (0..n).map(|i| (i % 50) as f64 * 1.0).collect();
    let y: Vec<f64> = (0..n).map(|i| (i / 50) as f64 * 1.6).collect();
    let d1: Vec<f64> = (0..n).map(|i| 0.05 * x[i] + (y[i] / 8.0).sin()).collect();
    let d2: Vec<f64> =
        (0..n).map(|i| (x[i] / 10.0).cos() + 0.02 * y[i] + 0.3 * (i % 7) as f64 / 7.0).collect();
    (x, y, vec![vec![1.0; n], d1, d2])
}

/// The response: the drivers plus a Matérn 1.5 field with a nugget, drawn
/// through the dense factor of its covariance.
pub fn response(seed: u64, dist: &Distances, cols: &[Vec<f64>]) -> Vec<f64> {
    let n = dist.len();
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let truth = CovParams { family: Family::Matern { nu: 1.5 }, range: 4.0, eta: 0.25 };
    let l = cholesky(dist, &truth).unwrap();
    let e: Vec<f64> = (0..n).map(|_| StandardNormal.sample(&mut rng)).collect();
    (0..n)
        .map(|i| 10.0 + 0.8 * cols[1][i] - 0.5 * cols[2][i] + (0..=i).map(|j| l[(i, j)] * e[j]).sum::<f64>())
        .collect()
}

/// The largest driver-coefficient difference in units of the exact SE
/// `sqrt(sigma2 (X'V^-1 X)^-1_jj)`.
pub fn coef_gap(a: &[f64], exact: &Profiled) -> f64 {
    (1..exact.p)
        .map(|j| (a[j] - exact.beta[j]).abs() / (exact.sigma2 * exact.xtvx_inv[j * exact.p + j]).sqrt())
        .fold(0.0, f64::max)
}

/// The median wall time of `reps` runs of `f`, in seconds.
pub fn time<T>(reps: usize, mut f: impl FnMut() -> T) -> f64 {
    median(
        (0..reps)
            .map(|_| {
                let t = Instant::now();
                std::hint::black_box(f());
                t.elapsed().as_secs_f64()
            })
            .collect(),
    )
}
