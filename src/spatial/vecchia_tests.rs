//! Tests of the Vecchia likelihood: against the exact dense likelihood with
//! full conditioning sets, the error as the sets grow, the numpy reference
//! of tests/reference/vecchia.py, thread independence and coincident pots.

use super::*;
use crate::spatial::likelihood::{cholesky, maximise, profiled};
use approx::assert_relative_eq;
use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};

/// Jittered bench positions, a covariate and a response drawn from the
/// model with `truth` (a Gaussian field by the dense Cholesky factor).
fn field(n: usize, seed: u64, truth: &CovParams) -> (Vec<f64>, Vec<f64>, Vec<Vec<f64>>, Vec<f64>) {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let x: Vec<f64> = (0..n).map(|i| (i % 12) as f64 * 0.4 + rng.random_range(-0.15..0.15)).collect();
    let y: Vec<f64> = (0..n).map(|i| (i / 12) as f64 * 0.4 + rng.random_range(-0.15..0.15)).collect();
    let cov: Vec<f64> = (0..n).map(|_| rng.random_range(0.0..3.0)).collect();
    let dist = Distances::from_coords(&x, &y).unwrap();
    let l = cholesky(&dist, truth).unwrap();
    let e: Vec<f64> = (0..n).map(|_| StandardNormal.sample(&mut rng)).collect();
    let z: Vec<f64> =
        (0..n).map(|i| 1.0 + 0.5 * cov[i] + (0..=i).map(|j| l[(i, j)] * e[j]).sum::<f64>()).collect();
    (x, y, vec![vec![1.0; n], cov], z)
}

fn families() -> Vec<Family> {
    vec![
        Family::Exponential,
        Family::Spherical,
        Family::Gaussian,
        Family::Matern { nu: 1.5 },
        Family::Matern { nu: 0.8 },
    ]
}

/// With every earlier observation as neighbour (m = n - 1) nothing is left
/// out: the value is the exact likelihood, ML and REML, with and without
/// nugget, every family; beta and (X'V^-1 X)^-1 too.
#[test]
fn full_sets_equal_the_exact_likelihood() {
    let truth = CovParams { family: Family::Exponential, range: 0.8, eta: 0.2 };
    let (x, y, xs, z) = field(90, 3, &truth);
    let dist = Distances::from_coords(&x, &y).unwrap();
    let cond = Conditioning::new(&x, &y, 89).unwrap();
    for family in families() {
        for eta in [0.0, 0.3] {
            // the Gaussian family without nugget is nearly singular at longer ranges
            let range = if family == Family::Gaussian { 0.3 } else { 0.7 };
            let p = CovParams { family, range, eta };
            for method in [LikelihoodKind::Ml, LikelihoodKind::Reml] {
                let exact = profiled(&dist, &p, &xs, &z, method).unwrap();
                let v = profiled_vecchia(&cond, &p, &xs, &z, method).unwrap();
                assert_relative_eq!(v.loglik, exact.loglik, max_relative = 1e-8);
                assert_relative_eq!(
                    v.logdet_v,
                    exact.logdet_v,
                    epsilon = 1e-8 * exact.logdet_v.abs().max(1.0)
                );
                assert_relative_eq!(v.q, exact.q, max_relative = 1e-8);
                for (a, b) in v.beta.iter().zip(&exact.beta) {
                    assert_relative_eq!(a, b, max_relative = 1e-8);
                }
                for (a, b) in v.xtvx_inv.iter().zip(&exact.xtvx_inv) {
                    assert_relative_eq!(a, b, max_relative = 1e-8);
                }
            }
        }
    }
}

/// On a seeded field the error against the exact likelihood falls as the
/// conditioning sets grow fourfold (from one size to the next the signed
/// error can cross zero, so neighbouring sizes need not be ordered).
#[test]
fn error_falls_as_the_sets_grow() {
    for truth in [
        CovParams { family: Family::Exponential, range: 1.0, eta: 0.0 },
        CovParams { family: Family::Matern { nu: 1.5 }, range: 0.6, eta: 0.25 },
    ] {
        let (x, y, xs, z) = field(240, 11, &truth);
        let dist = Distances::from_coords(&x, &y).unwrap();
        let exact = profiled(&dist, &truth, &xs, &z, LikelihoodKind::Reml).unwrap().loglik;
        let errors: Vec<f64> = [1, 4, 16, 64]
            .iter()
            .map(|&m| {
                let cond = Conditioning::new(&x, &y, m).unwrap();
                (profiled_vecchia(&cond, &truth, &xs, &z, LikelihoodKind::Reml).unwrap().loglik - exact).abs()
            })
            .collect();
        for w in errors.windows(2) {
            assert!(w[1] < w[0], "{truth:?}: {errors:?}");
        }
        assert!(errors[3] < 0.01, "{truth:?}: {errors:?}");
    }
}

fn fixture() -> serde_json::Value {
    let p = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/reference/fixtures/vecchia.json");
    serde_json::from_str(&std::fs::read_to_string(p).unwrap()).unwrap()
}

fn numbers(v: &serde_json::Value) -> Vec<f64> {
    v.as_array().unwrap().iter().map(|t| t.as_f64().unwrap()).collect()
}

/// The max-min order and the neighbour sets against numpy's brute force,
/// and the likelihood on those sets against numpy's dense Vecchia matrix
/// (tests/reference/vecchia.py): nine cases, ML and REML.
#[test]
fn numpy_reference() {
    let fx = fixture();
    let (x, y) = (numbers(&fx["x"]), numbers(&fx["y"]));
    let n = x.len();
    let xs = vec![vec![1.0; n], numbers(&fx["covariate"])];
    let z = numbers(&fx["response"]);
    let m = fx["m"].as_u64().unwrap() as usize;
    let order: Vec<usize> =
        fx["order"].as_array().unwrap().iter().map(|v| v.as_u64().unwrap() as usize).collect();
    let sets: Vec<Vec<usize>> = fx["sets"]
        .as_array()
        .unwrap()
        .iter()
        .map(|s| s.as_array().unwrap().iter().map(|v| v.as_u64().unwrap() as usize).collect())
        .collect();
    let ours = Conditioning::new(&x, &y, m).unwrap();
    assert_eq!(ours.order(), order.as_slice());
    for (k, s) in sets.iter().enumerate() {
        assert_eq!(ours.set(k).iter().map(|&r| r as usize).collect::<Vec<_>>(), *s, "rank {k}");
    }
    let given = Conditioning::from_parts(&x, &y, order, &sets).unwrap();
    let dist = Distances::from_coords(&x, &y).unwrap();
    for case in fx["cases"].as_array().unwrap() {
        let p = CovParams {
            family: Family::parse(case["family"].as_str().unwrap()).unwrap(),
            range: case["range"].as_f64().unwrap(),
            eta: case["eta"].as_f64().unwrap(),
        };
        let method = if case["method"] == "ML" { LikelihoodKind::Ml } else { LikelihoodKind::Reml };
        let r = profiled_vecchia(&given, &p, &xs, &z, method).unwrap();
        assert_relative_eq!(r.loglik, case["loglik"].as_f64().unwrap(), max_relative = 1e-9);
        assert_relative_eq!(r.sigma2, case["sigma2"].as_f64().unwrap(), max_relative = 1e-9);
        for (a, b) in r.beta.iter().zip(numbers(&case["beta"])) {
            assert_relative_eq!(*a, b, max_relative = 1e-9);
        }
        for (a, b) in r.xtvx_inv.iter().zip(numbers(&case["xtvx_inv"])) {
            assert_relative_eq!(*a, b, max_relative = 1e-9);
        }
        // the same family on our own conditioning is the same number
        assert_eq!(profiled_vecchia(&ours, &p, &xs, &z, method).unwrap().loglik, r.loglik);
        // and the exact value of the fixture is the dense path's
        let exact = profiled(&dist, &p, &xs, &z, method).unwrap().loglik;
        assert_relative_eq!(exact, case["loglik_exact"].as_f64().unwrap(), max_relative = 1e-9);
    }
}

/// The result does not depend on the number of threads.
#[test]
fn threads_do_not_change_the_result() {
    let truth = CovParams { family: Family::Exponential, range: 1.2, eta: 0.1 };
    let n = 700;
    let mut rng = ChaCha8Rng::seed_from_u64(5);
    let x: Vec<f64> = (0..n).map(|_| rng.random_range(0.0..20.0)).collect();
    let y: Vec<f64> = (0..n).map(|_| rng.random_range(0.0..10.0)).collect();
    let xs = vec![vec![1.0; n], x.iter().map(|v| v.sin()).collect()];
    let z: Vec<f64> = (0..n).map(|_| rng.random_range(0.0..1.0)).collect();
    let cond = Conditioning::new(&x, &y, 15).unwrap();
    let a = profiled_vecchia(&cond, &truth, &xs, &z, LikelihoodKind::Ml).unwrap();
    let b =
        crate::spatial::factor::sequential(|| profiled_vecchia(&cond, &truth, &xs, &z, LikelihoodKind::Ml))
            .unwrap();
    assert_eq!(a.loglik.to_bits(), b.loglik.to_bits());
    assert_eq!(a.whitened, b.whitened);
}

/// Two pots at one position: without a nugget the later one has no
/// conditional variance of its own, and the error is the exact path's.
#[test]
fn coincident_pots_need_a_nugget() {
    let x = [0.0, 1.0, 2.0, 1.0, 0.5];
    let y = [0.0, 0.0, 1.0, 0.0, 2.0];
    let z = [1.0, 2.0, 1.5, 2.2, 0.7];
    let xs = vec![vec![1.0; 5]];
    let cond = Conditioning::new(&x, &y, 3).unwrap();
    let p = CovParams { family: Family::Exponential, range: 1.0, eta: 0.0 };
    let e = profiled_vecchia(&cond, &p, &xs, &z, LikelihoodKind::Reml).unwrap_err();
    assert!(e.to_string().contains("fit with a nugget"), "{e}");
    let dist = Distances::from_coords(&x, &y).unwrap();
    let dense = profiled(&dist, &p, &xs, &z, LikelihoodKind::Reml).unwrap_err();
    assert!(matches!(e, LikelihoodError::NotPositiveDefinite { .. }));
    assert!(matches!(dense, LikelihoodError::NotPositiveDefinite { .. }));
    assert!(profiled_vecchia(&cond, &CovParams { eta: 0.2, ..p }, &xs, &z, LikelihoodKind::Reml).is_ok());
}

/// Maximised with full sets, the search finds the exact path's maximum.
#[test]
fn maximum_with_full_sets_is_the_exact_one() {
    let truth = CovParams { family: Family::Exponential, range: 0.9, eta: 0.3 };
    let (x, y, xs, z) = field(72, 8, &truth);
    let dist = Distances::from_coords(&x, &y).unwrap();
    let cond = Conditioning::new(&x, &y, 71).unwrap();
    for nugget in [false, true] {
        let opts = SearchOptions { nugget, ..SearchOptions::default() };
        let exact = maximise(&dist, Family::Exponential, &xs, &z, LikelihoodKind::Reml, &opts).unwrap();
        let v = maximise_vecchia(&dist, &cond, Family::Exponential, &xs, &z, LikelihoodKind::Reml, &opts)
            .unwrap();
        assert_relative_eq!(v.best.loglik, exact.best.loglik, max_relative = 1e-8);
        assert_relative_eq!(v.best.params.range, exact.best.params.range, max_relative = 1e-3);
        assert_eq!(v.factorisations, 0);
    }
}

#[test]
fn bad_input_is_refused() {
    let cond = Conditioning::new(&[0.0, 1.0, 2.0], &[0.0; 3], 2).unwrap();
    let p = CovParams { family: Family::Exponential, range: 1.0, eta: 0.0 };
    let xs = vec![vec![1.0; 3]];
    assert!(profiled_vecchia(&cond, &p, &xs, &[1.0, 2.0], LikelihoodKind::Ml).is_err());
    assert!(
        profiled_vecchia(&cond, &CovParams { range: -1.0, ..p }, &xs, &[1.0, 2.0, 0.5], LikelihoodKind::Ml)
            .is_err()
    );
    assert!(profiled_vecchia(&cond, &p, &xs, &[1.0, f64::NAN, 0.5], LikelihoodKind::Ml).is_err());
}
