//! Tests of the latent-level Vecchia likelihood: the cross-product profile
//! against the whitened one on the dense path, full conditioning sets
//! against the exact dense likelihood (with pots at shared positions too),
//! the error as the sets grow, the numpy reference of
//! tests/reference/vecchia_latent.py, threads and bad input.

use super::*;
use crate::spatial::likelihood::{cholesky, maximise, profile_whitened, profiled, stack_xy, whiten};
use approx::assert_relative_eq;
use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};

/// Jittered bench positions (every `twin`-th pot moved onto the pot before
/// it when `twin > 0`), a covariate and a response drawn from the model
/// with `truth` (a Gaussian field by the dense Cholesky factor).
fn field(
    n: usize,
    seed: u64,
    truth: &CovParams,
    twin: usize,
) -> (Vec<f64>, Vec<f64>, Vec<Vec<f64>>, Vec<f64>) {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let mut x: Vec<f64> = (0..n).map(|i| (i % 12) as f64 * 0.4 + rng.random_range(-0.15..0.15)).collect();
    let mut y: Vec<f64> = (0..n).map(|i| (i / 12) as f64 * 0.4 + rng.random_range(-0.15..0.15)).collect();
    if twin > 0 {
        for i in (twin..n).step_by(twin) {
            (x[i], y[i]) = (x[i - 1], y[i - 1]);
        }
    }
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

fn close(a: &Profiled, b: &Profiled, tol: f64) {
    assert_relative_eq!(a.loglik, b.loglik, max_relative = tol);
    assert_relative_eq!(a.logdet_v, b.logdet_v, epsilon = tol * b.logdet_v.abs().max(1.0));
    assert_relative_eq!(a.q, b.q, max_relative = tol);
    assert_relative_eq!(a.sigma2, b.sigma2, max_relative = tol);
    assert_relative_eq!(a.logdet_xtvx, b.logdet_xtvx, epsilon = tol * b.logdet_xtvx.abs().max(1.0));
    for (u, v) in a.beta.iter().zip(&b.beta) {
        assert_relative_eq!(u, v, max_relative = tol);
    }
    for (u, v) in a.xtvx_inv.iter().zip(&b.xtvx_inv) {
        assert_relative_eq!(u, v, max_relative = tol);
    }
}

/// On the dense path the cross products of the whitened columns give the
/// whitened profile's numbers.
#[test]
fn crossproducts_give_the_whitened_profile() {
    let truth = CovParams { family: Family::Matern { nu: 1.5 }, range: 0.7, eta: 0.2 };
    let (x, y, xs, z) = field(80, 21, &truth, 0);
    let dist = Distances::from_coords(&x, &y).unwrap();
    for p in [truth, CovParams { family: Family::Exponential, range: 1.3, eta: 0.0 }] {
        let l = cholesky(&dist, &p).unwrap();
        let logdet = 2.0 * (0..80).map(|i| l[(i, i)].ln()).sum::<f64>();
        let mut w = stack_xy(&xs, &z);
        whiten(l.as_ref(), &mut w);
        let c = w.ncols();
        let cross: Vec<f64> = (0..c * c)
            .map(|t| w.col_as_slice(t / c).iter().zip(w.col_as_slice(t % c)).map(|(a, b)| a * b).sum())
            .collect();
        for method in [LikelihoodKind::Ml, LikelihoodKind::Reml] {
            let a = profile_whitened(&w, logdet, method, p).unwrap();
            let b = profile_crossproducts(&cross, 80, logdet, method, p).unwrap();
            close(&b, &a, 1e-12);
        }
    }
    assert!(profile_crossproducts(&[1.0, 2.0, 3.0], 5, 0.0, LikelihoodKind::Ml, truth).is_err());
}

/// With every earlier position as neighbour the latent form leaves nothing
/// out: the exact likelihood, ML and REML, every family, several nugget
/// shares; with pots sharing positions too.
#[test]
fn full_sets_equal_the_exact_likelihood() {
    let truth = CovParams { family: Family::Exponential, range: 0.8, eta: 0.2 };
    for twin in [0, 7] {
        let (x, y, xs, z) = field(90, 3, &truth, twin);
        let dist = Distances::from_coords(&x, &y).unwrap();
        let lat = LatentVecchia::new(&x, &y, 89).unwrap();
        assert_eq!(lat.locations(), if twin == 0 { 90 } else { 90 - 89 / 7 });
        for family in families() {
            for eta in [0.02, 0.3, 0.7] {
                let range = if family == Family::Gaussian { 0.3 } else { 0.7 };
                let p = CovParams { family, range, eta };
                for method in [LikelihoodKind::Ml, LikelihoodKind::Reml] {
                    let exact = profiled(&dist, &p, &xs, &z, method).unwrap();
                    let v = profiled_latent(&lat, &p, &xs, &z, method).unwrap();
                    close(&v, &exact, 1e-8);
                    assert_eq!(v.whitened.len(), 90);
                }
            }
        }
    }
}

/// A share of the nugget in the field leaves the model unchanged when every
/// pot has its own position: with full sets the value is the exact dense
/// likelihood for every share (and with `m = 10` it differs from the share
/// 0 value, so the share is applied); refused for pots sharing a position
/// and for a share outside `[0, 1)`.
#[test]
fn a_field_share_of_the_nugget_keeps_the_model() {
    let truth = CovParams { family: Family::Gaussian, range: 0.4, eta: 0.3 };
    let (x, y, xs, z) = field(90, 5, &truth, 0);
    let dist = Distances::from_coords(&x, &y).unwrap();
    for f in [0.0, 0.1, 0.5, 0.9] {
        let lat = LatentVecchia::new(&x, &y, 89).unwrap().with_field_share(f).unwrap();
        assert_eq!(lat.field_share(), f);
        for family in families() {
            let range = if family == Family::Gaussian { 0.3 } else { 0.7 };
            for eta in [0.05, 0.4] {
                let p = CovParams { family, range, eta };
                for method in [LikelihoodKind::Ml, LikelihoodKind::Reml] {
                    let exact = profiled(&dist, &p, &xs, &z, method).unwrap();
                    close(&profiled_latent(&lat, &p, &xs, &z, method).unwrap(), &exact, 1e-8);
                }
            }
        }
    }
    let p = CovParams { family: Family::Exponential, range: 0.7, eta: 0.3 };
    let none = LatentVecchia::new(&x, &y, 10).unwrap();
    let half = LatentVecchia::new(&x, &y, 10).unwrap().with_field_share(0.5).unwrap();
    let a = none.evaluate(&p, &xs, &z, LikelihoodKind::Ml, false).unwrap().loglik;
    let b = half.evaluate(&p, &xs, &z, LikelihoodKind::Ml, false).unwrap().loglik;
    assert!((a - b).abs() > 1e-6, "{a} {b}");
    assert!(LatentVecchia::new(&x, &y, 10).unwrap().with_field_share(1.0).is_err());
    assert!(LatentVecchia::new(&x, &y, 10).unwrap().with_field_share(-0.1).is_err());
    let (x2, y2, _, _) = field(90, 5, &truth, 7);
    assert!(LatentVecchia::new(&x2, &y2, 10).unwrap().with_field_share(0.2).is_err());
    assert!(LatentVecchia::new(&x2, &y2, 10).unwrap().with_field_share(0.0).is_ok());
}

/// The error against the exact likelihood falls as the sets grow fourfold,
/// with a nugget, for two families: summed over six parameter points around
/// the truth (at a single point the signed error can cross zero between
/// neighbouring sizes, so one point's error need not be ordered).
#[test]
fn error_falls_as_the_sets_grow() {
    for truth in [
        CovParams { family: Family::Exponential, range: 1.0, eta: 0.3 },
        CovParams { family: Family::Matern { nu: 1.5 }, range: 0.6, eta: 0.25 },
    ] {
        let (x, y, xs, z) = field(240, 11, &truth, 0);
        let dist = Distances::from_coords(&x, &y).unwrap();
        let points: Vec<CovParams> = [(0.7, 0.8), (1.0, 1.0), (1.4, 1.2)]
            .iter()
            .flat_map(|&(r, e)| {
                [0.8, 1.25].map(|s| CovParams { range: truth.range * r * s, eta: truth.eta * e, ..truth })
            })
            .collect();
        let exact: Vec<f64> = points
            .iter()
            .map(|p| profiled(&dist, p, &xs, &z, LikelihoodKind::Reml).unwrap().loglik)
            .collect();
        let errors: Vec<f64> = [1, 4, 16, 64]
            .iter()
            .map(|&m| {
                let lat = LatentVecchia::new(&x, &y, m).unwrap();
                points
                    .iter()
                    .zip(&exact)
                    .map(|(p, e)| {
                        (profiled_latent(&lat, p, &xs, &z, LikelihoodKind::Reml).unwrap().loglik - e).abs()
                    })
                    .sum::<f64>()
            })
            .collect();
        for w in errors.windows(2) {
            assert!(w[1] < w[0], "{truth:?}: {errors:?}");
        }
        assert!(errors[3] < 0.06, "{truth:?}: {errors:?}");
    }
}

/// At `eta = 0` the latent form is the response-level one; near it the two
/// meet continuously.
#[test]
fn without_nugget_it_is_the_response_level_form() {
    let truth = CovParams { family: Family::Exponential, range: 0.9, eta: 0.0 };
    let (x, y, xs, z) = field(150, 4, &truth, 0);
    let cond = Conditioning::new(&x, &y, 10).unwrap();
    let lat = LatentVecchia::from_conditioning(&cond).unwrap();
    let a = profiled_latent(&lat, &truth, &xs, &z, LikelihoodKind::Ml).unwrap();
    let b = profiled_vecchia(&cond, &truth, &xs, &z, LikelihoodKind::Ml).unwrap();
    assert_eq!(a.loglik, b.loglik);
    assert_eq!(a.whitened, b.whitened);
    let near = profiled_latent(&lat, &CovParams { eta: 1e-7, ..truth }, &xs, &z, LikelihoodKind::Ml).unwrap();
    assert!((near.loglik - a.loglik).abs() < 1e-3, "{} {}", near.loglik, a.loglik);
}

/// Pots at one position: without a nugget the exact path's refusal with its
/// hint; with one they share a latent value, as the exact path.
#[test]
fn shared_positions_need_a_nugget() {
    let x = [0.0, 1.0, 2.0, 1.0, 0.5, -0.0];
    let y = [0.0, 0.0, 1.0, 0.0, 2.0, 0.0];
    let z = [1.0, 2.0, 1.5, 2.2, 0.7, 1.1];
    let xs = vec![vec![1.0; 6]];
    let lat = LatentVecchia::new(&x, &y, 3).unwrap();
    assert_eq!(lat.locations(), 4);
    let p = CovParams { family: Family::Exponential, range: 1.0, eta: 0.0 };
    let e = profiled_latent(&lat, &p, &xs, &z, LikelihoodKind::Reml).unwrap_err();
    assert!(e.to_string().contains("fit with a nugget"), "{e}");
    let p = CovParams { eta: 0.2, ..p };
    let dist = Distances::from_coords(&x, &y).unwrap();
    let exact = profiled(&dist, &p, &xs, &z, LikelihoodKind::Reml).unwrap();
    close(&profiled_latent(&lat, &p, &xs, &z, LikelihoodKind::Reml).unwrap(), &exact, 1e-10);
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
    let lat = LatentVecchia::new(&x, &y, 15).unwrap();
    let a = profiled_latent(&lat, &truth, &xs, &z, LikelihoodKind::Ml).unwrap();
    let b = crate::spatial::factor::sequential(|| profiled_latent(&lat, &truth, &xs, &z, LikelihoodKind::Ml))
        .unwrap();
    assert_relative_eq!(a.loglik, b.loglik, max_relative = 1e-13);
    assert_eq!(a.whitened, b.whitened);
}

/// Maximised with full sets, the search finds the exact path's maximum.
#[test]
fn maximum_with_full_sets_is_the_exact_one() {
    let truth = CovParams { family: Family::Exponential, range: 0.9, eta: 0.3 };
    let (x, y, xs, z) = field(72, 8, &truth, 0);
    let dist = Distances::from_coords(&x, &y).unwrap();
    let lat = LatentVecchia::new(&x, &y, 71).unwrap();
    let opts = SearchOptions { nugget: true, ..SearchOptions::default() };
    let exact = maximise(&dist, Family::Exponential, &xs, &z, LikelihoodKind::Reml, &opts).unwrap();
    let v = maximise_latent(&dist, &lat, Family::Exponential, &xs, &z, LikelihoodKind::Reml, &opts).unwrap();
    assert_relative_eq!(v.best.loglik, exact.best.loglik, max_relative = 1e-8);
    assert_relative_eq!(v.best.params.range, exact.best.params.range, max_relative = 1e-3);
    assert_eq!(v.best.whitened.len(), 72);
    assert_eq!(v.factorisations, 0);
}

#[test]
fn bad_input_is_refused() {
    let lat = LatentVecchia::new(&[0.0, 1.0, 2.0], &[0.0; 3], 2).unwrap();
    let p = CovParams { family: Family::Exponential, range: 1.0, eta: 0.3 };
    let xs = vec![vec![1.0; 3]];
    assert!(profiled_latent(&lat, &p, &xs, &[1.0, 2.0], LikelihoodKind::Ml).is_err());
    assert!(
        profiled_latent(&lat, &CovParams { range: -1.0, ..p }, &xs, &[1.0, 2.0, 0.5], LikelihoodKind::Ml)
            .is_err()
    );
    assert!(
        profiled_latent(&lat, &CovParams { eta: 1.0, ..p }, &xs, &[1.0, 2.0, 0.5], LikelihoodKind::Ml)
            .is_err()
    );
    assert!(profiled_latent(&lat, &p, &xs, &[1.0, f64::NAN, 0.5], LikelihoodKind::Ml).is_err());
    assert!(LatentVecchia::new(&[0.0, 1.0], &[0.0, 0.0], 0).is_err());
    let pots = Conditioning::new(&[0.0, 1.0], &[0.0, 0.0], 1).unwrap();
    let locs = Conditioning::new(&[0.0, 2.0], &[0.0, 0.0], 1).unwrap();
    assert!(LatentVecchia::with_locations(pots.clone(), locs.clone(), &[0, 1]).is_err());
    assert!(LatentVecchia::with_locations(pots.clone(), locs.clone(), &[0, 0]).is_err());
    assert!(LatentVecchia::with_locations(pots, locs, &[0, 5]).is_err());
}

fn numbers(v: &serde_json::Value) -> Vec<f64> {
    v.as_array().unwrap().iter().map(|t| t.as_f64().unwrap()).collect()
}

fn indices(v: &serde_json::Value) -> Vec<usize> {
    v.as_array().unwrap().iter().map(|t| t.as_u64().unwrap() as usize).collect()
}

/// The positions' max-min order and neighbour sets against numpy's brute
/// force, and the likelihood on those sets against numpy's dense latent
/// Vecchia precision and dense marginal covariance of the pots, nine pots
/// sharing positions (tests/reference/vecchia_latent.py): seven cases, ML
/// and REML.
#[test]
fn numpy_reference() {
    let p =
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/reference/fixtures/vecchia_latent.json");
    let fx: serde_json::Value = serde_json::from_str(&std::fs::read_to_string(p).unwrap()).unwrap();
    let (lx, ly) = (numbers(&fx["location_x"]), numbers(&fx["location_y"]));
    let loc = indices(&fx["location_of"]);
    let (px, py): (Vec<f64>, Vec<f64>) = loc.iter().map(|&l| (lx[l], ly[l])).unzip();
    let n = px.len();
    let xs = vec![vec![1.0; n], numbers(&fx["covariate"])];
    let z = numbers(&fx["response"]);
    let m = fx["m"].as_u64().unwrap() as usize;
    let order = indices(&fx["order"]);
    let sets: Vec<Vec<usize>> = fx["sets"].as_array().unwrap().iter().map(indices).collect();
    let ours_locs = Conditioning::new(&lx, &ly, m).unwrap();
    assert_eq!(ours_locs.order(), order.as_slice());
    for (k, s) in sets.iter().enumerate() {
        assert_eq!(ours_locs.set(k).iter().map(|&r| r as usize).collect::<Vec<_>>(), *s, "rank {k}");
    }
    let pots = Conditioning::new(&px, &py, m).unwrap();
    let locs = Conditioning::from_parts(&lx, &ly, order, &sets).unwrap();
    let given = LatentVecchia::with_locations(pots, locs, &loc).unwrap();
    let ours = LatentVecchia::new(&px, &py, m).unwrap();
    assert_eq!(ours.locations(), lx.len());
    let dist = Distances::from_coords(&px, &py).unwrap();
    for case in fx["cases"].as_array().unwrap() {
        let p = CovParams {
            family: Family::parse(case["family"].as_str().unwrap()).unwrap(),
            range: case["range"].as_f64().unwrap(),
            eta: case["eta"].as_f64().unwrap(),
        };
        let method = if case["method"] == "ML" { LikelihoodKind::Ml } else { LikelihoodKind::Reml };
        let r = profiled_latent(&given, &p, &xs, &z, method).unwrap();
        assert_relative_eq!(r.loglik, case["loglik"].as_f64().unwrap(), max_relative = 1e-9);
        assert_relative_eq!(r.sigma2, case["sigma2"].as_f64().unwrap(), max_relative = 1e-9);
        for (a, b) in r.beta.iter().zip(numbers(&case["beta"])) {
            assert_relative_eq!(*a, b, max_relative = 1e-9);
        }
        for (a, b) in r.xtvx_inv.iter().zip(numbers(&case["xtvx_inv"])) {
            assert_relative_eq!(*a, b, max_relative = 1e-9);
        }
        // our own conditioning of the pots' positions is the same approximation
        let o = profiled_latent(&ours, &p, &xs, &z, method).unwrap();
        assert_relative_eq!(o.loglik, r.loglik, max_relative = 1e-12);
        // and the exact value of the fixture is the dense path's
        let exact = profiled(&dist, &p, &xs, &z, method).unwrap().loglik;
        assert_relative_eq!(exact, case["loglik_exact"].as_f64().unwrap(), max_relative = 1e-9);
    }
}

/// Columns with large means (a trait near 60, a driver near 50 varying by
/// 0.05) leave the latent value smooth in the parameters: along 21 ranges
/// 1e-7 apart in `ln range` it departs from the straight line through the
/// ends by less than 1e-8 (before the centring on the intercept column it
/// moved by up to 6e-6 on a 3,000-pot field of this kind), and the
/// coefficients are those of the columns as given.
#[test]
fn large_means_leave_the_value_smooth() {
    let truth = CovParams { family: Family::Exponential, range: 0.9, eta: 0.3 };
    let n = 2000;
    let (x, y, mut xs, z) = field(n, 5, &truth, 0);
    xs.push((0..n).map(|i| 50.0 + 0.05 * (x[i] * 0.3).sin() + 0.01 * y[i]).collect());
    let z: Vec<f64> = z.iter().map(|v| v + 59.0).collect();
    let lat = LatentVecchia::new(&x, &y, 30).unwrap();
    let p0 = CovParams { family: Family::Exponential, range: 0.9, eta: 0.3 };
    for method in [LikelihoodKind::Ml, LikelihoodKind::Reml] {
        let vals: Vec<f64> = (-10..=10)
            .map(|k| {
                let p = CovParams { range: p0.range * (1e-7 * k as f64).exp(), ..p0 };
                lat.evaluate(&p, &xs, &z, method, false).unwrap().loglik
            })
            .collect();
        let rough = (0..21)
            .map(|i| (vals[i] - (vals[0] + (vals[20] - vals[0]) * i as f64 / 20.0)).abs())
            .fold(0.0, f64::max);
        assert!(rough < 1e-8, "{method:?}: the latent value moves by {rough:e}");
    }
    // the intercept's coefficient and the covariance come back on the columns as given
    let a = lat.evaluate(&p0, &xs, &z, LikelihoodKind::Reml, false).unwrap();
    let z0: Vec<f64> = z.iter().map(|v| v - 59.0).collect();
    let b = lat.evaluate(&p0, &xs, &z0, LikelihoodKind::Reml, false).unwrap();
    assert_relative_eq!(a.beta[0] - 59.0, b.beta[0], epsilon = 1e-8);
    assert_relative_eq!(a.loglik, b.loglik, epsilon = 1e-8);
    for (u, v) in a.xtvx_inv.iter().zip(&b.xtvx_inv) {
        assert_relative_eq!(u, v, max_relative = 1e-8);
    }
}
