//! Accuracy and speed of the Vecchia (nearest-neighbour) likelihood of
//! `potclim::spatial::vecchia` against the exact dense likelihood, on a
//! simulated field of plots (50 plots per row at 1.0 m x 1.6 m, two smooth
//! driver covariates, a Matérn 1.5 residual field of range 4 m with a 25 %
//! nugget; seeded).
//!
//! For n = 2,000 and 4,000 and each family (exponential, spherical,
//! Gaussian, Matérn 1.5) with and without a nugget: the exact ML fit (the
//! crate's fit of a single fixed part), then at its optimum the Vecchia
//! log-likelihood's difference from the exact one and each driver
//! coefficient's difference in units of its exact standard error, for
//! m = 10, 20, 30, 40; and the Vecchia fit of its own at the default m
//! (difference of the maxima and of the coefficients). Then the time of one
//! Vecchia evaluation against one dense fill and Cholesky of the same n
//! (faer) and one LAPACK Cholesky through numpy (single-threaded), measured
//! in the same run.
//!
//! The reference interpreter is taken from `POTCLIM_BENCH_PYTHON` (default
//! `python3`); without numpy that column reads unavailable. Sizes from
//! `POTCLIM_BENCH_SIZES` (default `2000,4000`).
//!
//! Run: `cargo bench --bench vecchia`.

use potclim::spatial::ascent::maximise_shared;
use potclim::spatial::correlation::Family;
use potclim::spatial::likelihood::{CovParams, Distances, LikelihoodKind, SearchOptions, cholesky, profiled};
use potclim::spatial::vecchia::{Conditioning, DEFAULT_NEIGHBOURS, maximise_vecchia, profiled_vecchia};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};
use std::time::Instant;

#[path = "common/reference.rs"]
mod reference;
use reference::{median, numpy_cholesky};

const MS: [usize; 4] = [10, 20, 30, 40];

/// Plots, columns `[1, driver 1, driver 2]` and the response.
fn plots(n: usize, seed: u64) -> (Vec<f64>, Vec<f64>, Vec<Vec<f64>>, Vec<f64>) {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let x: Vec<f64> = (0..n).map(|i| (i % 50) as f64 * 1.0).collect();
    let y: Vec<f64> = (0..n).map(|i| (i / 50) as f64 * 1.6).collect();
    let d1: Vec<f64> = (0..n).map(|i| 0.05 * x[i] + (y[i] / 8.0).sin()).collect();
    let d2: Vec<f64> =
        (0..n).map(|i| (x[i] / 10.0).cos() + 0.02 * y[i] + 0.3 * (i % 7) as f64 / 7.0).collect();
    let dist = Distances::from_coords(&x, &y).unwrap();
    let truth = CovParams { family: Family::Matern { nu: 1.5 }, range: 4.0, eta: 0.25 };
    let l = cholesky(&dist, &truth).unwrap();
    let e: Vec<f64> = (0..n).map(|_| StandardNormal.sample(&mut rng)).collect();
    let z: Vec<f64> = (0..n)
        .map(|i| 10.0 + 0.8 * d1[i] - 0.5 * d2[i] + (0..=i).map(|j| l[(i, j)] * e[j]).sum::<f64>())
        .collect();
    (x, y, vec![vec![1.0; n], d1, d2], z)
}

/// Exact standard errors of the coefficients: `sqrt(sigma2 (X'V^-1 X)^-1_jj)`.
fn ses(r: &potclim::spatial::likelihood::Profiled) -> Vec<f64> {
    (0..r.p).map(|j| (r.sigma2 * r.xtvx_inv[j * r.p + j]).sqrt()).collect()
}

/// The largest driver-coefficient difference in units of the exact SE.
fn coef_gap(a: &[f64], exact: &potclim::spatial::likelihood::Profiled) -> f64 {
    let se = ses(exact);
    (1..exact.p).map(|j| (a[j] - exact.beta[j]).abs() / se[j]).fold(0.0, f64::max)
}

fn main() {
    let python = std::env::var("POTCLIM_BENCH_PYTHON").unwrap_or_else(|_| "python3".into());
    let threads = std::thread::available_parallelism().map(|t| t.get()).unwrap_or(1);
    let sizes: Vec<usize> = match std::env::var("POTCLIM_BENCH_SIZES") {
        Ok(v) => v.split(',').filter_map(|t| t.trim().parse().ok()).collect(),
        Err(_) => vec![2000, 4000],
    };
    println!("vecchia benchmark: {threads} hardware threads; default m = {DEFAULT_NEIGHBOURS}");
    let method = LikelihoodKind::Ml;
    for &n in &sizes {
        let (x, y, cols, z) = plots(n, 20261204 + n as u64);
        let dist = Distances::from_coords(&x, &y).unwrap();
        let mut conds = Vec::new();
        // speed first: the exact fits below take minutes at n = 4,000
        for &m in &MS {
            let t = Instant::now();
            let c = Conditioning::new(&x, &y, m).unwrap();
            println!("n = {n}: ordering and neighbour sets for m = {m}: {:.3} s", t.elapsed().as_secs_f64());
            conds.push(c);
        }
        let default = Conditioning::new(&x, &y, DEFAULT_NEIGHBOURS).unwrap();
        // speed at one parameter point
        let p = CovParams { family: Family::Exponential, range: 4.0, eta: 0.25 };
        let reps = 3;
        let mut t_dense = Vec::new();
        for _ in 0..reps {
            let t = Instant::now();
            std::hint::black_box(cholesky(&dist, &p).unwrap());
            t_dense.push(t.elapsed().as_secs_f64());
        }
        let dense = median(t_dense);
        let numpy = numpy_cholesky(&python, &dist, &p, reps);
        println!();
        println!(
            "n = {n}: one dense fill + Cholesky (faer) {dense:.4} s; numpy Cholesky {}",
            numpy.map(|t| format!("{t:.4} s")).unwrap_or_else(|| "unavailable".into())
        );
        println!("{:>4} {:>14} {:>16} {:>16}", "m", "vecchia (s)", "/ dense (faer)", "/ numpy chol");
        for c in &conds {
            let mut ts = Vec::new();
            for _ in 0..5 {
                let t = Instant::now();
                std::hint::black_box(profiled_vecchia(c, &p, &cols, &z, method).unwrap().loglik);
                ts.push(t.elapsed().as_secs_f64());
            }
            let v = median(ts);
            println!(
                "{:>4} {:>14.5} {:>16.4} {:>16}",
                c.m(),
                v,
                v / dense,
                numpy.map(|t| format!("{:.4}", v / t)).unwrap_or_else(|| "-".into())
            );
        }
        println!();
        println!(
            "n = {n}, ML; at the exact optimum: |ll diff| and largest driver |beta diff| / exact SE per m"
        );
        print!("{:<24} {:>11} {:>8} {:>6}", "family", "exact ll", "range", "eta");
        for m in MS {
            print!(" {:>9} {:>7}", format!("ll m={m}"), "b/SE");
        }
        println!(" {:>12} {:>9}", "own max diff", "own b/SE");
        for family in [Family::Exponential, Family::Spherical, Family::Gaussian, Family::Matern { nu: 1.5 }] {
            for nugget in [false, true] {
                let label = format!("{}{}", family.name(), if nugget { "+nugget" } else { "" });
                let opts = SearchOptions { nugget, ..Default::default() };
                let (mut r, _) = maximise_shared(&dist, family, &[cols.as_slice()], &z, method, &opts);
                let exact = match r.pop().unwrap() {
                    Ok(m) => m,
                    Err(e) => {
                        println!("{label:<24} exact fit failed: {e}");
                        continue;
                    }
                };
                let p = exact.best.params;
                let ex = profiled(&dist, &p, &cols, &z, method).unwrap();
                print!("{label:<24} {:>11.3} {:>8.3} {:>6.3}", ex.loglik, p.range, p.eta);
                for c in &conds {
                    match profiled_vecchia(c, &p, &cols, &z, method) {
                        Ok(v) => {
                            print!(" {:>9.4} {:>7.4}", (v.loglik - ex.loglik).abs(), coef_gap(&v.beta, &ex))
                        }
                        Err(_) => print!(" {:>9} {:>7}", "fails", "-"),
                    }
                }
                match maximise_vecchia(&dist, &default, family, &cols, &z, method, &opts) {
                    Ok(v) => println!(
                        " {:>12.4} {:>9.4}",
                        (v.best.loglik - exact.best.loglik).abs(),
                        coef_gap(&v.best.beta, &ex)
                    ),
                    Err(e) => println!(" own fit failed: {e}"),
                }
            }
        }
        println!();
    }
}
