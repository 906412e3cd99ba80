//! Accuracy and speed of the latent-level Vecchia likelihood of
//! `potclim::spatial::vecchia_latent` for fits with a nugget, beside the
//! response-level form of `potclim::spatial::vecchia` and against the exact
//! dense likelihood, on the simulated field of plots of `benches/vecchia.rs`
//! (50 plots per row at 1.0 m x 1.6 m, two smooth driver covariates, a
//! Matérn 1.5 residual field of range 4 m with a 25 % nugget; the same seeds).
//!
//! For each size in `POTCLIM_BENCH_SIZES` (default `2000`) and each family
//! (exponential, spherical, Gaussian, Matérn 1.5) with a nugget: the exact
//! ML fit, then at its optimum each form's log-likelihood difference from the
//! exact one and the largest driver-coefficient difference in exact SEs for
//! m = 10, 20, 30, 40, and the latent form's own fit at m = 30 by the search
//! the model path uses (`potclim::spatial::vecchia_search::maximise_latent_shared`:
//! Newton steps from the response-level maximum). Then the time
//! of one evaluation of each form (the latent one without and with its
//! normalised residuals) against one dense fill and Cholesky (faer)
//! and one single-threaded LAPACK Cholesky through numpy of the same n in
//! the same run, and the stored entries of `W` and of its sparse factor.
//!
//! `POTCLIM_BENCH_SPEED_ONLY=1` skips the exact fits (speed table only).
//! With `POTCLIM_BENCH_LARGE=20000` (no exact fit, no numpy) only the cost
//! of building the conditioning and of one evaluation at m = 30 on a field
//! of that many plots (response drawn without a dense factor: drivers plus
//! independent noise; the cost does not depend on the values).
//!
//! With `POTCLIM_BENCH_GROWTH=600`: on a field of that many plots, at the
//! n = 2,000 optima of each family, both forms' errors as `m` grows to
//! `n - 1` (what is left at `n - 1` is rounding, not approximation).
//!
//! The reference interpreter is taken from `POTCLIM_BENCH_PYTHON` (default
//! `python3`).
//!
//! Run: `cargo bench --bench vecchia_latent` (release profile; the path's
//! default choices are measured by `benches/vecchia.rs`).

use potclim::spatial::ascent::maximise_shared;
use potclim::spatial::correlation::Family;
use potclim::spatial::likelihood::{
    CovParams, Distances, LikelihoodKind, Profiled, SearchOptions, cholesky, profiled,
};
use potclim::spatial::vecchia::{Conditioning, profiled_vecchia};
use potclim::spatial::vecchia_latent::{LatentVecchia, profiled_latent};
use potclim::spatial::vecchia_search::maximise_latent_shared;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};
use std::time::Instant;

#[path = "common/reference.rs"]
mod reference;
use reference::numpy_cholesky;
#[path = "common/plots.rs"]
mod plots;
use plots::{coef_gap, layout, response, time};

const MS: [usize; 4] = [10, 20, 30, 40];
const OWN_M: usize = 30;

fn cell(r: Result<Profiled, impl std::fmt::Display>, ex: &Profiled) -> String {
    match r {
        Ok(v) => format!(" {:>8.4} {:>6.3}", (v.loglik - ex.loglik).abs(), coef_gap(&v.beta, ex)),
        Err(_) => format!(" {:>8} {:>6}", "fails", "-"),
    }
}

fn large(n: usize) {
    let (x, y, cols) = layout(n);
    let mut rng = ChaCha8Rng::seed_from_u64(7);
    let z: Vec<f64> = (0..n)
        .map(|i| {
            10.0 + 0.8 * cols[1][i] - 0.5 * cols[2][i] + {
                let e: f64 = StandardNormal.sample(&mut rng);
                e
            }
        })
        .collect();
    let t = Instant::now();
    let lat = LatentVecchia::new(&x, &y, OWN_M).unwrap();
    let build = t.elapsed().as_secs_f64();
    let (w, f) = lat.nnz();
    let p = CovParams { family: Family::Exponential, range: 4.0, eta: 0.25 };
    let one = time(3, || profiled_latent(&lat, &p, &cols, &z, LikelihoodKind::Ml).unwrap().loglik);
    let bare = time(3, || lat.evaluate(&p, &cols, &z, LikelihoodKind::Ml, false).unwrap().loglik);
    let cond = Conditioning::new(&x, &y, OWN_M).unwrap();
    let resp = time(3, || profiled_vecchia(&cond, &p, &cols, &z, LikelihoodKind::Ml).unwrap().loglik);
    println!(
        "n = {n}, m = {OWN_M}: conditioning + symbolic factorisation {build:.2} s; nnz W (lower) {w}, \
         factor {f}; one latent evaluation {bare:.3} s ({one:.3} s with the residuals); one response-level \
         evaluation {resp:.3} s"
    );
}

/// Where the latent form's error comes from: on a smaller field, its error
/// and the response-level one's at the given parameters as `m` grows to
/// `n - 1` (where the approximation leaves nothing out, so what remains is
/// rounding).
fn growth(n: usize) {
    let (x, y, cols) = layout(n);
    let dist = Distances::from_coords(&x, &y).unwrap();
    let z = response(20261204 + n as u64, &dist, &cols);
    let ms = [10, 30, 100, 300, n - 1];
    println!("n = {n}: |ll - exact| (ML) as m grows, latent / response-level");
    for p in [
        CovParams { family: Family::Exponential, range: 6.759, eta: 0.132 },
        CovParams { family: Family::Spherical, range: 10.523, eta: 0.165 },
        CovParams { family: Family::Gaussian, range: 3.992, eta: 0.296 },
        CovParams { family: Family::Matern { nu: 1.5 }, range: 4.252, eta: 0.228 },
    ] {
        let ex = profiled(&dist, &p, &cols, &z, LikelihoodKind::Ml).unwrap();
        print!("{:<12} range {:>6.3} eta {:.3}:", p.family.name(), p.range, p.eta);
        for &m in &ms {
            let c = Conditioning::new(&x, &y, m).unwrap();
            let lat = LatentVecchia::from_conditioning(&c).unwrap();
            let d = |r: Result<Profiled, _>| {
                r.map(|v: Profiled| format!("{:.2e}", (v.loglik - ex.loglik).abs()))
                    .unwrap_or_else(|_: potclim::spatial::likelihood::LikelihoodError| "fails".into())
            };
            print!(
                "  m={m}: {} / {}",
                d(lat.evaluate(&p, &cols, &z, LikelihoodKind::Ml, false)),
                d(profiled_vecchia(&c, &p, &cols, &z, LikelihoodKind::Ml))
            );
        }
        println!();
    }
}

fn main() {
    let python = std::env::var("POTCLIM_BENCH_PYTHON").unwrap_or_else(|_| "python3".into());
    let threads = std::thread::available_parallelism().map(|t| t.get()).unwrap_or(1);
    println!("latent vecchia benchmark: {threads} hardware threads");
    if let Some(n) = std::env::var("POTCLIM_BENCH_LARGE").ok().and_then(|v| v.trim().parse().ok()) {
        large(n);
        return;
    }
    if let Some(n) = std::env::var("POTCLIM_BENCH_GROWTH").ok().and_then(|v| v.trim().parse().ok()) {
        growth(n);
        return;
    }
    let sizes: Vec<usize> = match std::env::var("POTCLIM_BENCH_SIZES") {
        Ok(v) => v.split(',').filter_map(|t| t.trim().parse().ok()).collect(),
        Err(_) => vec![2000],
    };
    let method = LikelihoodKind::Ml;
    for &n in &sizes {
        let (x, y, cols) = layout(n);
        let dist = Distances::from_coords(&x, &y).unwrap();
        let z = response(20261204 + n as u64, &dist, &cols);
        let conds: Vec<Conditioning> = MS.iter().map(|&m| Conditioning::new(&x, &y, m).unwrap()).collect();
        let lats: Vec<LatentVecchia> =
            conds.iter().map(|c| LatentVecchia::from_conditioning(c).unwrap()).collect();
        // speed at one parameter point
        let p = CovParams { family: Family::Exponential, range: 4.0, eta: 0.25 };
        let dense = time(3, || cholesky(&dist, &p).unwrap());
        let numpy = numpy_cholesky(&python, &dist, &p, 3);
        println!();
        println!(
            "n = {n}: one dense fill + Cholesky (faer) {dense:.4} s; numpy Cholesky {}",
            numpy.map(|t| format!("{t:.4} s")).unwrap_or_else(|| "unavailable".into())
        );
        println!(
            "{:>4} {:>10} {:>10} {:>10} {:>12} {:>12} {:>10} {:>10} {:>10}",
            "m",
            "latent (s)",
            "/ faer",
            "/ numpy",
            "nnz W",
            "nnz factor",
            "+resid (s)",
            "resp. (s)",
            "/ numpy"
        );
        for (c, lat) in conds.iter().zip(&lats) {
            let tl = time(5, || lat.evaluate(&p, &cols, &z, method, false).unwrap().loglik);
            let tw = time(5, || profiled_latent(lat, &p, &cols, &z, method).unwrap().loglik);
            let tr = time(5, || profiled_vecchia(c, &p, &cols, &z, method).unwrap().loglik);
            let (w, f) = lat.nnz();
            let ratio = |t: f64| numpy.map(|r| format!("{:.2}", t / r)).unwrap_or_else(|| "-".into());
            println!(
                "{:>4} {tl:>10.4} {:>10.2} {:>10} {w:>12} {f:>12} {tw:>10.4} {tr:>10.4} {:>10}",
                c.m(),
                tl / dense,
                ratio(tl),
                ratio(tr)
            );
        }
        if std::env::var_os("POTCLIM_BENCH_SPEED_ONLY").is_some() {
            continue;
        }
        println!();
        println!(
            "n = {n}, ML with nugget; at the exact optimum: |ll diff| and largest driver |beta diff| / exact SE"
        );
        print!("{:<22} {:>10} {:>7} {:>6} {:>5}", "family", "exact ll", "range", "eta", "form");
        for m in MS {
            print!(" {:>8} {:>6}", format!("ll m={m}"), "b/SE");
        }
        println!(" {:>12} {:>8}", format!("own m={OWN_M}"), "own b/SE");
        for family in [Family::Exponential, Family::Spherical, Family::Gaussian, Family::Matern { nu: 1.5 }] {
            let opts = SearchOptions { nugget: true, ..Default::default() };
            let (mut r, _) = maximise_shared(&dist, family, &[cols.as_slice()], &z, method, &opts);
            let exact = match r.pop().unwrap() {
                Ok(m) => m,
                Err(e) => {
                    println!("{:<22} exact fit failed: {e}", family.name());
                    continue;
                }
            };
            let p = exact.best.params;
            let ex = profiled(&dist, &p, &cols, &z, method).unwrap();
            let head = format!("{:<22} {:>10.3} {:>7.3} {:>6.3}", family.name(), ex.loglik, p.range, p.eta);
            let mut line = format!("{head} {:>5}", "resp.");
            for c in &conds {
                line += &cell(profiled_vecchia(c, &p, &cols, &z, method), &ex);
            }
            println!("{line}");
            let mut line = format!("{head} {:>5}", "lat.");
            for lat in &lats {
                line += &cell(profiled_latent(lat, &p, &cols, &z, method), &ex);
            }
            let own = &lats[MS.iter().position(|&m| m == OWN_M).unwrap()];
            let t = Instant::now();
            let (mut own_fit, _) =
                maximise_latent_shared(&dist, own, family, &[cols.as_slice()], &z, method, &opts);
            match own_fit.pop().expect("one design, one maximum") {
                Ok(v) => println!(
                    "{line} {:>12.4} {:>8.3}   ({} evaluations, {:.1} s)",
                    (v.best.loglik - ex.loglik).abs(),
                    coef_gap(&v.best.beta, &ex),
                    v.evaluations,
                    t.elapsed().as_secs_f64()
                ),
                Err(e) => println!("{line} own fit failed: {e}"),
            }
        }
        println!();
    }
}
