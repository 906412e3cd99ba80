//! Accuracy and cost of the nearest-neighbour (Vecchia) likelihoods that the
//! model stage's neighbours path uses, against the exact dense likelihood,
//! on a simulated field of plots (50 plots per row at 1.0 m x 1.6 m, two
//! smooth driver covariates, a Matérn 1.5 residual field of range 4 m with a
//! 25 % nugget; seeded).
//!
//! For each size in `POTCLIM_BENCH_SIZES` (default `2000,4000`) and each
//! family (exponential, spherical, Gaussian, Matérn 1.5) with and without a
//! nugget:
//! 1. the exact ML fit by the exact path's search
//!    (`potclim::spatial::ascent::maximise_shared`);
//! 2. at its optimum, for every `m` of `POTCLIM_BENCH_MS` (default
//!    `10,20,30,40,60`) and each form (response-level; with a nugget also the
//!    latent form), the approximated log-likelihood's distance from the exact
//!    one (`|ll|`) and the largest driver-coefficient difference in units of
//!    its exact standard error (`b/SE`): the target is `|ll| <= 0.5`
//!    and `b/SE <= 0.2`; the row of the form the model path takes
//!    (`potclim::model::likelihood_path::latent_form`) is marked `*`;
//! 3. the fit of its own by the model path at its default
//!    (`LikelihoodPath::neighbours(..).maximise`: the Newton searches of
//!    `potclim::spatial::vecchia_search`), its maximum against the exact
//!    maximum and its coefficients in exact SEs, with its evaluations.
//!
//! Conditioning sets: the `m` nearest earlier plots (`nearest`); with
//! `POTCLIM_BENCH_RINGS=e1,e2,...` also the sets completed to the end of the
//! ring of equidistant plots the `m`-th cuts through, capped at `m + e`
//! (`rings+e`, `potclim::spatial::vecchia::SetRule::WholeRings`).
//! With `POTCLIM_BENCH_FIELD_SHARES=f1,...` the nugget rows add the latent
//! form with a share `f` of the nugget carried by the latent field
//! (`LatentVecchia::with_field_share`, rows `lat.f`).
//! `POTCLIM_BENCH_OWN_MS=m1,...` adds fits of their own at those `m` (and
//! set rules) by the same searches. `POTCLIM_BENCH_FAMILIES` (names as in
//! the study file, comma separated) restricts the families;
//! `POTCLIM_BENCH_NUGGET=0|1` to fits without / with a nugget.
//!
//! The cost: one evaluation of each form per `m` and set rule against one
//! dense fill and Cholesky (faer) of the same n in the same run, and numpy's
//! single-threaded LAPACK Cholesky (interpreter from `POTCLIM_BENCH_PYTHON`,
//! default `python3`; without numpy that column reads unavailable).
//! `POTCLIM_BENCH_SPEED=0` skips it.
//!
//! The exact fits take minutes at n = 4,000: with
//! `POTCLIM_BENCH_EXACT_CACHE=FILE` their optima (n, family, nugget, range,
//! eta) are read from FILE when there and appended when new, and the exact
//! values are recomputed at them (one dense evaluation).
//!
//! Run: `cargo bench --bench vecchia` (release profile).

use potclim::model::likelihood_path::{LikelihoodPath, latent_form};
use potclim::spatial::ascent::maximise_shared;
use potclim::spatial::correlation::Family;
use potclim::spatial::likelihood::{
    CovParams, Distances, LikelihoodKind, Maximum, Profiled, SearchOptions, cholesky, profiled,
};
use potclim::spatial::vecchia::{Conditioning, DEFAULT_NEIGHBOURS, SetRule, profiled_vecchia};
use potclim::spatial::vecchia_latent::{LatentVecchia, profiled_latent};
use potclim::spatial::vecchia_search::{maximise_latent_shared, maximise_vecchia_shared};
use std::io::Write;
use std::time::Instant;

#[path = "common/reference.rs"]
mod reference;
use reference::numpy_cholesky;
#[path = "common/plots.rs"]
mod plots;
use plots::{coef_gap, layout, response, time};

/// Plots, columns `[1, driver 1, driver 2]` and the response.
fn plots(n: usize, seed: u64) -> (Vec<f64>, Vec<f64>, Vec<Vec<f64>>, Vec<f64>) {
    let (x, y, cols) = layout(n);
    let dist = Distances::from_coords(&x, &y).unwrap();
    let z = response(seed, &dist, &cols);
    (x, y, cols, z)
}

/// One line of a fit of its own: its maximum against the exact one, its
/// coefficients in exact SEs, its parameters, evaluations and time.
fn own_fit_line(label: &str, fit: Result<Maximum, impl std::fmt::Display>, ex: &Profiled, t: Instant) {
    match fit {
        Ok(v) => println!(
            "  own fit, {label}: max - exact max {:+.4}, b/SE {:.3}, range {:.3}, eta {:.3}; {} evaluations, {:.1} s",
            v.best.loglik - ex.loglik,
            coef_gap(&v.best.beta, ex),
            v.best.params.range,
            v.best.params.eta,
            v.evaluations,
            t.elapsed().as_secs_f64()
        ),
        Err(e) => println!("  own fit, {label}: failed: {e}"),
    }
}

fn list(var: &str, default: &[usize]) -> Vec<usize> {
    match std::env::var(var) {
        Ok(v) => v.split(',').filter_map(|t| t.trim().parse().ok()).collect(),
        Err(_) => default.to_vec(),
    }
}

/// A set rule's label and rule at `m`.
fn rules(extras: &[usize], m: usize) -> Vec<(String, SetRule)> {
    let mut r = vec![("nearest".to_string(), SetRule::Nearest)];
    for &e in extras {
        r.push((format!("rings+{e}"), SetRule::WholeRings { cap: m + e }));
    }
    r
}

/// The mean set size of a conditioning.
fn mean_set(c: &Conditioning) -> f64 {
    (0..c.len()).map(|k| c.set(k).len()).sum::<usize>() as f64 / c.len() as f64
}

/// The exact optimum of (n, family, nugget) from the cache file, if there.
fn cached(path: &Option<String>, n: usize, family: Family, nugget: bool) -> Option<CovParams> {
    let text = std::fs::read_to_string(path.as_ref()?).ok()?;
    text.lines().find_map(|l| {
        let f: Vec<&str> = l.split(',').collect();
        (f.len() == 5 && f[0] == n.to_string() && f[1] == family.name() && f[2] == nugget.to_string())
            .then(|| Some(CovParams { family, range: f[3].parse().ok()?, eta: f[4].parse().ok()? }))
            .flatten()
    })
}

fn remember(path: &Option<String>, n: usize, p: &CovParams, nugget: bool) {
    if let Some(path) = path {
        let mut f = std::fs::OpenOptions::new().create(true).append(true).open(path).unwrap();
        writeln!(f, "{n},{},{nugget},{:e},{:e}", p.family.name(), p.range, p.eta).unwrap();
    }
}

/// The fit of its own on a conditioning, by the searches the model path
/// uses (the latent search where [`latent_form`] takes the latent form).
fn own_fit(
    dist: &Distances,
    cond: &Conditioning,
    family: Family,
    cols: &[Vec<f64>],
    z: &[f64],
    opts: &SearchOptions,
    share: Option<f64>,
) -> Result<Maximum, String> {
    let method = LikelihoodKind::Ml;
    let latent = opts.nugget && (share.is_some() || latent_form(&CovParams { family, range: 1.0, eta: 0.5 }));
    let (mut r, _) = if latent {
        let lat = LatentVecchia::from_conditioning(cond)
            .and_then(|l| l.with_field_share(share.unwrap_or(0.0)))
            .map_err(|e| e.to_string())?;
        maximise_latent_shared(dist, &lat, family, &[cols], z, method, opts)
    } else {
        maximise_vecchia_shared(dist, cond, family, &[cols], z, method, opts)
    };
    r.pop().unwrap().map_err(|e| e.to_string())
}

fn main() {
    let python = std::env::var("POTCLIM_BENCH_PYTHON").unwrap_or_else(|_| "python3".into());
    let threads = std::thread::available_parallelism().map(|t| t.get()).unwrap_or(1);
    let sizes = list("POTCLIM_BENCH_SIZES", &[2000, 4000]);
    let ms = list("POTCLIM_BENCH_MS", &[10, 20, 30, 40, 60]);
    let extras = list("POTCLIM_BENCH_RINGS", &[]);
    let own_ms = list("POTCLIM_BENCH_OWN_MS", &[]);
    let shares: Vec<f64> = std::env::var("POTCLIM_BENCH_FIELD_SHARES")
        .map(|v| v.split(',').filter_map(|t| t.trim().parse().ok()).collect())
        .unwrap_or_default();
    let cache = std::env::var("POTCLIM_BENCH_EXACT_CACHE").ok();
    let speed = std::env::var("POTCLIM_BENCH_SPEED").map(|v| v != "0").unwrap_or(true);
    let only: Option<Vec<String>> = std::env::var("POTCLIM_BENCH_FAMILIES")
        .ok()
        .map(|v| v.split(',').map(|s| s.trim().to_string()).collect());
    let nuggets: Vec<bool> = match std::env::var("POTCLIM_BENCH_NUGGET").as_deref() {
        Ok("0") => vec![false],
        Ok("1") => vec![true],
        _ => vec![false, true],
    };
    println!(
        "vecchia benchmark: {threads} hardware threads; the path's default m = {DEFAULT_NEIGHBOURS}; ML"
    );
    let method = LikelihoodKind::Ml;
    for &n in &sizes {
        let (x, y, cols, z) = plots(n, 20261204 + n as u64);
        let dist = Distances::from_coords(&x, &y).unwrap();
        // every (m, rule) conditioning and its latent structure
        let mut conds: Vec<(usize, String, Conditioning, Vec<LatentVecchia>)> = Vec::new();
        for &m in &ms {
            for (label, rule) in rules(&extras, m) {
                let t = Instant::now();
                let c = Conditioning::with_rule(&x, &y, m, rule).unwrap();
                let mut lat = vec![LatentVecchia::from_conditioning(&c).unwrap()];
                for &f in &shares {
                    lat.push(LatentVecchia::from_conditioning(&c).unwrap().with_field_share(f).unwrap());
                }
                println!(
                    "n = {n}, m = {m}, {label}: mean set size {:.2}; ordering, sets and latent structure {:.2} s",
                    mean_set(&c),
                    t.elapsed().as_secs_f64()
                );
                conds.push((m, label, c, lat));
            }
        }
        if speed {
            let p = CovParams { family: Family::Exponential, range: 4.0, eta: 0.25 };
            let dense = time(3, || cholesky(&dist, &p).unwrap());
            let numpy = numpy_cholesky(&python, &dist, &p, 3);
            println!();
            println!(
                "n = {n}: one evaluation at (exponential, range 4, eta 0.25); one dense fill + Cholesky (faer) {dense:.4} s; numpy Cholesky {}",
                numpy.map(|t| format!("{t:.4} s")).unwrap_or_else(|| "unavailable".into())
            );
            println!(
                "{:>4} {:<9} {:>10} {:>8} {:>8} {:>10} {:>8} {:>8}",
                "m", "sets", "resp. (s)", "/ faer", "/ numpy", "latent (s)", "/ faer", "/ numpy"
            );
            for (m, label, c, lat) in &conds {
                let tr = time(5, || profiled_vecchia(c, &p, &cols, &z, method).unwrap().loglik);
                let tl = time(5, || lat[0].evaluate(&p, &cols, &z, method, false).unwrap().loglik);
                let ratio = |t: f64| numpy.map(|r| format!("{:.3}", t / r)).unwrap_or_else(|| "-".into());
                println!(
                    "{m:>4} {label:<9} {tr:>10.4} {:>8.3} {:>8} {tl:>10.4} {:>8.3} {:>8}",
                    tr / dense,
                    ratio(tr),
                    tl / dense,
                    ratio(tl)
                );
            }
        }
        println!();
        println!(
            "n = {n}, ML; at the exact optimum: |ll - exact| and the largest driver |beta diff| / exact SE"
        );
        println!("(* = the form the model path takes; target |ll| <= 0.5 and b/SE <= 0.2)");
        for family in [Family::Exponential, Family::Spherical, Family::Gaussian, Family::Matern { nu: 1.5 }] {
            if only.as_ref().is_some_and(|o| !o.contains(&family.name())) {
                continue;
            }
            for &nugget in &nuggets {
                let label = format!("{}{}", family.name(), if nugget { "+nugget" } else { "" });
                let opts = SearchOptions { nugget, ..Default::default() };
                let t = Instant::now();
                let p = match cached(&cache, n, family, nugget) {
                    Some(p) => p,
                    None => {
                        let (mut r, _) =
                            maximise_shared(&dist, family, &[cols.as_slice()], &z, method, &opts);
                        match r.pop().unwrap() {
                            Ok(m) => {
                                remember(&cache, n, &m.best.params, nugget);
                                m.best.params
                            }
                            Err(e) => {
                                println!("{label}: exact fit failed: {e}");
                                continue;
                            }
                        }
                    }
                };
                let ex = profiled(&dist, &p, &cols, &z, method).unwrap();
                println!();
                println!(
                    "{label}: exact ll {:.3} at range {:.3}, eta {:.3} ({:.1} s)",
                    ex.loglik,
                    p.range,
                    p.eta,
                    t.elapsed().as_secs_f64()
                );
                let mut labels: Vec<String> = conds.iter().map(|c| c.1.clone()).collect();
                labels.dedup();
                labels.sort();
                labels.dedup();
                print!("  {:<9} {:<8}", "sets", "form");
                for m in &ms {
                    print!(" {:>8} {:>6}", format!("ll m={m}"), "b/SE");
                }
                println!();
                let path_latent = latent_form(&p);
                // None: response-level; Some(i): the latent form with share i (0: none)
                let forms: Vec<Option<usize>> = if nugget {
                    std::iter::once(None).chain((0..=shares.len()).map(Some)).collect()
                } else {
                    vec![None]
                };
                for rule in &labels {
                    for &form in &forms {
                        let mark =
                            if form.is_some() == path_latent && form.unwrap_or(0) == 0 { "*" } else { " " };
                        let name = match form {
                            None => "resp.".to_string(),
                            Some(0) => "lat.".to_string(),
                            Some(i) => format!("lat.{}", shares[i - 1]),
                        };
                        print!("  {rule:<9} {:<8}", format!("{name}{mark}"));
                        for (_, _, c, lat) in conds.iter().filter(|c| &c.1 == rule) {
                            let r = match form {
                                Some(i) => profiled_latent(&lat[i], &p, &cols, &z, method),
                                None => profiled_vecchia(c, &p, &cols, &z, method),
                            };
                            match r {
                                Ok(v) => print!(
                                    " {:>8.4} {:>6.3}",
                                    (v.loglik - ex.loglik).abs(),
                                    coef_gap(&v.beta, &ex)
                                ),
                                Err(_) => print!(" {:>8} {:>6}", "fails", "-"),
                            }
                        }
                        println!();
                    }
                }
                // the model path's fit of its own at its default
                let t = Instant::now();
                let path = LikelihoodPath::neighbours(&x, &y, DEFAULT_NEIGHBOURS).unwrap();
                let fit = path.maximise(&dist, family, &cols, &z, method, &opts);
                let label = match &fit {
                    Ok(v) => format!(
                        "model path (m = {DEFAULT_NEIGHBOURS}, {})",
                        path.likelihood_of(&v.best.params).name()
                    ),
                    Err(_) => "model path".to_string(),
                };
                own_fit_line(&label, fit, &ex, t);
                let own_shares: Vec<Option<f64>> = if nugget {
                    std::iter::once(None).chain(shares.iter().map(|&f| Some(f))).collect()
                } else {
                    vec![None]
                };
                for &m in &own_ms {
                    for ((rule_label, rule), share) in rules(&extras, m)
                        .into_iter()
                        .flat_map(|r| own_shares.iter().map(move |&s| (r.clone(), s)))
                    {
                        let t = Instant::now();
                        let c = Conditioning::with_rule(&x, &y, m, rule).unwrap();
                        let rule_label = match share {
                            Some(f) => format!("{rule_label}, latent share {f}"),
                            None => rule_label,
                        };
                        let fit = own_fit(&dist, &c, family, &cols, &z, &opts, share);
                        own_fit_line(&format!("m = {m}, {rule_label}"), fit, &ex, t);
                    }
                }
            }
        }
        println!();
    }
}
