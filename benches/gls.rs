//! Benchmark of the dense likelihood path: one profiled REML evaluation
//! (fill of V, blocked Cholesky, whitening of [X | y], GLS solve) at
//! n = 500, 1000, 2000, 4000 pots, next to a LAPACK Cholesky of the same
//! matrix through numpy, measured in the same run; and whole correlated fits
//! (exponential and spherical, with and without nugget, ML and REML, a
//! three-level factor) at n = 480 and 1,680 in units of that Cholesky
//! (target: at most 40), the previous simplex search at n = 480 beside them,
//! and the cost of the devices for many nugget shares at one range (the
//! tridiagonal reduction that nugget fits use, the eigendecomposition).
//!
//! The reference interpreter is taken from `POTCLIM_BENCH_PYTHON` (default
//! `python3`); without numpy the reference is reported as unavailable.
//!
//! Run: `cargo bench --bench gls`.

use potclim::spatial::ascent::{maximise_profiled, maximise_shared};
use potclim::spatial::correlation::Family;
use potclim::spatial::likelihood::{
    CovParams, Distances, LikelihoodKind, SearchOptions, cholesky, maximise, profiled, profiled_with_factor,
};
use potclim::spatial::spectral::{Spectral, Tridiagonal};
use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use std::time::Instant;

#[path = "common/reference.rs"]
mod reference;
use reference::{median, numpy_cholesky};

fn layout(n: usize, seed: u64) -> (Vec<f64>, Vec<f64>, Vec<f64>, Vec<Vec<f64>>) {
    // pots on a jittered bench grid, 0.3 m pitch, 40 pots per row
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let mut x = Vec::with_capacity(n);
    let mut y = Vec::with_capacity(n);
    for i in 0..n {
        x.push((i % 40) as f64 * 0.3 + rng.random_range(-0.05..0.05));
        y.push((i / 40) as f64 * 0.3 + rng.random_range(-0.05..0.05));
    }
    let g: Vec<f64> = (0..n).map(|i| (i % 3) as f64).collect();
    let cols = vec![
        vec![1.0; n],
        g.iter().map(|&v| f64::from(u8::from(v == 1.0))).collect(),
        g.iter().map(|&v| f64::from(u8::from(v == 2.0))).collect(),
    ];
    let z: Vec<f64> =
        (0..n).map(|i| (x[i] / 2.0).sin() + 0.2 * y[i] + rng.random_range(-1.0..1.0) + cols[1][i]).collect();
    (x, y, z, cols)
}

fn main() {
    let python = std::env::var("POTCLIM_BENCH_PYTHON").unwrap_or_else(|_| "python3".into());
    let threads = std::thread::available_parallelism().map(|t| t.get()).unwrap_or(1);
    println!("gls benchmark: {threads} hardware threads; reference = numpy.linalg.cholesky via `{python}`");
    println!(
        "{:>6} {:>14} {:>14} {:>14} {:>16} {:>8}",
        "n", "fill+chol (s)", "chol only (s)", "eval (s)", "numpy chol (s)", "ratio"
    );
    let sizes: Vec<usize> = match std::env::var("POTCLIM_BENCH_SIZES") {
        Ok(v) => v.split(',').filter_map(|t| t.trim().parse().ok()).collect(),
        Err(_) => vec![480, 1680, 4000],
    };
    for &n in &sizes {
        let (x, y, z, cols) = layout(n, 7);
        let dist = Distances::from_coords(&x, &y).unwrap();
        let p = CovParams { family: Family::Exponential, range: 1.2, eta: 0.2 };
        let reps = if n >= 4000 { 3 } else { 5 };
        let mut t_eval = Vec::new();
        let mut t_fill_chol = Vec::new();
        let _ = profiled(&dist, &p, &cols, &z, LikelihoodKind::Reml).unwrap();
        for _ in 0..reps {
            let t = Instant::now();
            let _l = cholesky(&dist, &p).unwrap();
            t_fill_chol.push(t.elapsed().as_secs_f64());
            let t = Instant::now();
            let r = profiled(&dist, &p, &cols, &z, LikelihoodKind::Reml).unwrap();
            t_eval.push(t.elapsed().as_secs_f64());
            std::hint::black_box(r.loglik);
        }
        // factorisation alone (matrix filled beforehand)
        let mut t_chol = Vec::new();
        {
            use faer::linalg::cholesky::llt::factor::{
                LltRegularization, cholesky_in_place, cholesky_in_place_scratch,
            };
            let full = faer::Mat::from_fn(n, n, |i, j| {
                if i == j { 1.0 } else { (1.0 - p.eta) * p.family.correlation(dist.get(i, j), p.range) }
            });
            for _ in 0..reps {
                let mut m = full.clone();
                let par = faer::Par::rayon(0);
                let mut mem = faer::dyn_stack::MemBuffer::new(cholesky_in_place_scratch::<f64>(
                    n,
                    par,
                    Default::default(),
                ));
                let stack = faer::dyn_stack::MemStack::new(&mut mem);
                let t = Instant::now();
                cholesky_in_place(m.as_mut(), LltRegularization::default(), par, stack, Default::default())
                    .unwrap();
                t_chol.push(t.elapsed().as_secs_f64());
            }
        }
        let eval = median(t_eval);
        let reference = numpy_cholesky(&python, &dist, &p, reps);
        let (rs, ratio) = match reference {
            Some(r) => (format!("{r:.4}"), format!("{:.2}", eval / r)),
            None => ("unavailable".into(), "-".into()),
        };
        println!(
            "{n:>6} {:>14.4} {:>14.4} {:>14.4} {:>16} {:>8}",
            median(t_fill_chol),
            median(t_chol),
            eval,
            rs,
            ratio
        );
    }
    println!("ratio = one whole profiled evaluation / numpy Cholesky of the same matrix");
    println!();
    println!(
        "whole correlated fits (start grid, Newton steps, final estimates) in units of one numpy Cholesky"
    );
    println!(
        "{:>6} {:<22} {:>5} {:>10} {:>11} {:>14} {:>9} {:>8}",
        "n", "errors", "lik", "loglik", "evaluations", "factorisations", "fit (s)", "ratio"
    );
    for n in [480usize, 1680].into_iter().filter(|n| sizes.contains(n)) {
        let (x, y, z, cols) = layout(n, 11);
        let dist = Distances::from_coords(&x, &y).unwrap();
        let p = CovParams { family: Family::Exponential, range: 1.2, eta: 0.2 };
        let reference = numpy_cholesky(&python, &dist, &p, 5);
        for family in [Family::Exponential, Family::Spherical] {
            for nugget in [true, false] {
                for (method, profile) in [
                    (LikelihoodKind::Ml, false),
                    (LikelihoodKind::Reml, false),
                    (LikelihoodKind::Ml, true),
                    (LikelihoodKind::Reml, true),
                ] {
                    if profile && !nugget {
                        continue;
                    }
                    let opts = SearchOptions { nugget, ..Default::default() };
                    let search = if profile { maximise_profiled } else { maximise_shared };
                    let t = Instant::now();
                    let (mut r, shared) = search(&dist, family, &[cols.as_slice()], &z, method, &opts);
                    let m = r.pop().unwrap().unwrap();
                    let l = cholesky(&dist, &m.best.params).unwrap();
                    let fin = profiled_with_factor(l.as_ref(), &m.best.params, &cols, &z, method).unwrap();
                    let secs = t.elapsed().as_secs_f64();
                    std::hint::black_box(fin.loglik);
                    let ratio = reference.map(|r| format!("{:.1}", secs / r)).unwrap_or_else(|| "-".into());
                    println!(
                        "{n:>6} {:<22} {:>5} {:>10.3} {:>11} {:>14} {:>9.3} {:>8}{}",
                        format!("{}{}", family.name(), if nugget { "+nugget" } else { "" }),
                        method.label(),
                        m.best.loglik,
                        m.evaluations,
                        m.factorisations + shared + 1,
                        secs,
                        ratio,
                        if profile { "   (profile route)" } else { "" }
                    );
                }
            }
        }
        if n == 480 {
            // the previous derivative-free search, for comparison
            let t = Instant::now();
            let m = maximise(
                &dist,
                Family::Exponential,
                &cols,
                &z,
                LikelihoodKind::Reml,
                &SearchOptions { nugget: true, ..Default::default() },
            )
            .unwrap();
            let secs = t.elapsed().as_secs_f64();
            let ratio = reference.map(|r| format!("{:.1}", secs / r)).unwrap_or_else(|| "-".into());
            println!(
                "{n:>6} {:<22} {:>5} {:>10.3} {:>11} {:>14} {:>9.3} {:>8}   (simplex search)",
                "exponential+nugget", "REML", m.best.loglik, m.evaluations, m.factorisations, secs, ratio
            );
        }
        // the devices for many nugget shares at one range, in Choleskys
        let t = Instant::now();
        let tri = Tridiagonal::new(&dist, Family::Exponential, 1.2, &[cols.as_slice()], &z).unwrap();
        let reduction = t.elapsed().as_secs_f64();
        let t = Instant::now();
        let b = tri.best_eta(0, 0.99, LikelihoodKind::Reml).unwrap();
        let profile = t.elapsed().as_secs_f64();
        std::hint::black_box(b.loglik);
        let t = Instant::now();
        let sp = Spectral::new(&dist, Family::Exponential, 1.2, &cols, &z).unwrap();
        let eig = t.elapsed().as_secs_f64();
        let t = Instant::now();
        for k in 0..100 {
            std::hint::black_box(sp.profiled(0.005 + 0.009 * k as f64, LikelihoodKind::Reml).unwrap().loglik);
        }
        let per_eta = t.elapsed().as_secs_f64() / 100.0;
        if let Some(r) = reference {
            println!(
                "at n = {n}, in Choleskys: tridiagonal reduction {:.1} (with the fill of R), best nugget share at one range {:.2}; eigendecomposition {:.1}, then {:.4} per nugget share",
                reduction / r,
                profile / r,
                eig / r,
                per_eta / r,
            );
        }
    }
}
