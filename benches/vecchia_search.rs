//! Speed of the nearest-neighbour (Vecchia) searches of
//! `potclim::spatial::vecchia_search` against the simplex searches they
//! replace (`maximise_vecchia`, `maximise_latent`), measured in the same run,
//! on a simulated field of plots (50 plots per row at 1.0 m x 1.0 m, two
//! smooth driver covariates, an exponential residual field of range 3 m with
//! a 30 % nugget, drawn by the dense Cholesky factor; seeded), m = 30.
//!
//! 1. One evaluation of the response-level likelihood with the neighbour
//!    distances kept by the conditioning against one that computes them
//!    again (median of 5), and one scored evaluation (value, scores and
//!    information) against one plain evaluation.
//! 2. Whole ML fits of one fixed part, exponential and Matérn 1.5, with and
//!    without nugget (the nugget fits on the latent form): evaluations,
//!    seconds, the ratio of seconds (simplex / new) and the difference of
//!    the maxima (new - simplex).
//!
//! Sizes from `POTCLIM_BENCH_SIZES` (default `3000`). Run:
//! `cargo bench --bench vecchia_search`.

use potclim::spatial::correlation::Family;
use potclim::spatial::likelihood::{CovParams, Distances, LikelihoodKind, SearchOptions, cholesky};
use potclim::spatial::vecchia::{Conditioning, DEFAULT_NEIGHBOURS, maximise_vecchia, profiled_vecchia};
use potclim::spatial::vecchia_latent::{LatentVecchia, maximise_latent};
use potclim::spatial::vecchia_search::{maximise_latent_shared, maximise_vecchia_shared, scored_vecchia};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};
use std::time::Instant;

/// The median of `v` (the upper one of an even count).
fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

/// Plots, columns `[1, driver 1, driver 2]` and the response.
fn plots(n: usize, seed: u64) -> (Vec<f64>, Vec<f64>, Vec<Vec<f64>>, Vec<f64>) {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let x: Vec<f64> = (0..n).map(|i| (i % 50) as f64).collect();
    let y: Vec<f64> = (0..n).map(|i| (i / 50) as f64).collect();
    let d1: Vec<f64> = (0..n).map(|i| 0.05 * x[i] + (y[i] / 8.0).sin()).collect();
    let d2: Vec<f64> = (0..n).map(|i| (x[i] / 10.0).cos() + 0.02 * y[i]).collect();
    let dist = Distances::from_coords(&x, &y).unwrap();
    let truth = CovParams { family: Family::Exponential, range: 3.0, eta: 0.3 };
    let l = cholesky(&dist, &truth).unwrap();
    let e: Vec<f64> = (0..n).map(|_| StandardNormal.sample(&mut rng)).collect();
    let z: Vec<f64> = (0..n)
        .map(|i| 60.0 + 0.8 * d1[i] - 0.5 * d2[i] + (0..=i).map(|j| l[(i, j)] * e[j]).sum::<f64>())
        .collect();
    (x, y, vec![vec![1.0; n], d1, d2], z)
}

fn timed<T>(f: impl FnOnce() -> T) -> (T, f64) {
    let t = Instant::now();
    let v = f();
    (v, t.elapsed().as_secs_f64())
}

fn main() {
    let sizes: Vec<usize> = match std::env::var("POTCLIM_BENCH_SIZES") {
        Ok(s) => s.split(',').filter_map(|v| v.trim().parse().ok()).collect(),
        Err(_) => vec![3000],
    };
    let m = DEFAULT_NEIGHBOURS;
    let method = LikelihoodKind::Ml;
    for n in sizes {
        let (x, y, xs, z) = plots(n, 7);
        let dist = Distances::from_coords(&x, &y).unwrap();
        let cond = Conditioning::new(&x, &y, m).unwrap();
        let bare = cond.clone().without_distance_cache();
        let p = CovParams { family: Family::Exponential, range: 3.0, eta: 0.3 };
        let kept = median(
            (0..5).map(|_| timed(|| profiled_vecchia(&cond, &p, &xs, &z, method).unwrap()).1).collect(),
        );
        let again = median(
            (0..5).map(|_| timed(|| profiled_vecchia(&bare, &p, &xs, &z, method).unwrap()).1).collect(),
        );
        let scored = median(
            (0..5).map(|_| timed(|| scored_vecchia(&cond, &p, &xs, &z, method, 2).unwrap()).1).collect(),
        );
        println!(
            "n = {n}, m = {m}: one evaluation {kept:.4} s with the neighbour distances kept, {again:.4} s computing them (ratio {:.2}); one scored evaluation {scored:.4} s ({:.2} plain ones)",
            again / kept,
            scored / kept
        );
        let lat = LatentVecchia::from_conditioning(&cond).unwrap();
        println!(
            "{:>6} {:<30} {:>10} {:>9} {:>10} {:>9} {:>8} {:>12}",
            "n", "errors", "new evals", "new (s)", "old evals", "old (s)", "ratio", "ll new-old"
        );
        for family in [Family::Exponential, Family::Matern { nu: 1.5 }] {
            for nugget in [false, true] {
                let opts = SearchOptions { nugget, ..SearchOptions::default() };
                let ((new, old), label) = if nugget {
                    (
                        (
                            timed(|| {
                                maximise_latent_shared(&dist, &lat, family, &[&xs], &z, method, &opts)
                                    .0
                                    .remove(0)
                            }),
                            timed(|| maximise_latent(&dist, &lat, family, &xs, &z, method, &opts)),
                        ),
                        format!("{}+nugget (latent)", family.name()),
                    )
                } else {
                    (
                        (
                            timed(|| {
                                maximise_vecchia_shared(&dist, &cond, family, &[&xs], &z, method, &opts)
                                    .0
                                    .remove(0)
                            }),
                            timed(|| maximise_vecchia(&dist, &cond, family, &xs, &z, method, &opts)),
                        ),
                        family.name(),
                    )
                };
                let ((a, ta), (b, tb)) = (new, old);
                let (a, b) = (a.unwrap(), b.unwrap());
                println!(
                    "{n:>6} {label:<30} {:>10} {ta:>9.2} {:>10} {tb:>9.2} {:>8.1} {:>12.2e}",
                    a.evaluations,
                    b.evaluations,
                    tb / ta,
                    a.best.loglik - b.best.loglik
                );
            }
        }
    }
}
