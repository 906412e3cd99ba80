//! Tests of [`super`]: the scores against differences of the likelihood, the
//! searches against the simplex.

use super::*;
use crate::spatial::likelihood::profiled;

fn layout(n: usize) -> (Distances, Vec<Vec<f64>>, Vec<f64>) {
    let x: Vec<f64> = (0..n).map(|i| (i % 8) as f64 * 0.4 + 0.07 * ((i * 7) % 5) as f64).collect();
    let yy: Vec<f64> = (0..n).map(|i| (i / 8) as f64 * 0.4 + 0.05 * ((i * 3) % 7) as f64).collect();
    let g: Vec<f64> = (0..n).map(|i| f64::from(u8::from(i % 3 == 1))).collect();
    let z: Vec<f64> = (0..n)
        .map(|i| {
            (x[i] * 1.3).sin() + 0.4 * (yy[i] * 0.9).cos() + 0.3 * g[i] + 0.2 * ((i * 13) % 11) as f64 / 11.0
        })
        .collect();
    (Distances::from_coords(&x, &yy).unwrap(), vec![vec![1.0; n], g, x.clone()], z)
}

/// The analytic scores at `(ln range, eta) = t` equal central differences
/// of the profiled likelihood itself (step 1e-5); the evaluation is that
/// of `profiled` and the information diagonal positive.
fn scores_match_at(dist: &Distances, xs: &[Vec<f64>], z: &[f64], family: Family, t: (f64, f64)) {
    let (lr, eta) = t;
    for method in [LikelihoodKind::Ml, LikelihoodKind::Reml] {
        let s = scored(dist, &CovParams { family, range: lr.exp(), eta }, xs, z, method).unwrap();
        let ll = |lr: f64, eta: f64| {
            profiled(dist, &CovParams { family, range: lr.exp(), eta }, xs, z, method).unwrap().loglik
        };
        let h = 1e-5;
        let g = [
            (ll(lr + h, eta) - ll(lr - h, eta)) / (2.0 * h),
            (ll(lr, eta + h) - ll(lr, eta - h)) / (2.0 * h),
        ];
        for (k, (a, b)) in s.grad.iter().zip(g).enumerate() {
            assert!((a - b).abs() < 1e-5 * (1.0 + b.abs()), "{family} {method:?} score {k}: {a} vs {b}");
        }
        assert!((s.prof.loglik - ll(lr, eta)).abs() < 1e-12 * s.prof.loglik.abs());
        assert!(s.info[0][0] > 0.0 && s.info[1][1] > 0.0);
    }
}

/// The analytic scores equal central differences of the likelihood,
/// every family, ML and REML.
#[test]
fn scores_match_differences_of_the_likelihood() {
    let (dist, xs, z) = layout(48);
    for family in [
        Family::Exponential,
        Family::Gaussian,
        Family::Spherical,
        Family::Matern { nu: 1.5 },
        Family::Matern { nu: 0.8 },
    ] {
        scores_match_at(&dist, &xs, &z, family, (0.8f64.ln(), 0.25));
    }
}

/// The two-pass grid and the quasi-Newton steps reach the maximum that
/// the derivative-free simplex finds (within 1e-6), on a response with
/// a long-range trend (the ridge where the nugget share falls as the
/// range grows) and on one without, every family but the spherical,
/// ML and REML, with and without a nugget.
#[test]
fn quasi_newton_finds_the_simplex_maximum() {
    use crate::spatial::likelihood::maximise_by;
    let (dist, xs, z) = layout(96);
    let (x, _) = dist.coords().unwrap();
    let trended: Vec<f64> = z.iter().zip(x).map(|(v, xi)| v + 0.8 * xi).collect();
    for zz in [&z, &trended] {
        for family in [Family::Exponential, Family::Matern { nu: 1.5 }, Family::Gaussian] {
            for nugget in [false, true] {
                let opts = SearchOptions { nugget, ..SearchOptions::default() };
                for method in [LikelihoodKind::Ml, LikelihoodKind::Reml] {
                    let (newton, _) = maximise_shared(&dist, family, &[xs.as_slice()], zz, method, &opts);
                    let newton = newton.into_iter().next().unwrap().unwrap();
                    let simplex =
                        maximise_by(&dist, family, &opts, |p| profiled(&dist, p, &xs, zz, method)).unwrap();
                    assert!(
                        newton.best.loglik > simplex.best.loglik - 1e-6,
                        "{family} nugget {nugget} {method:?}: Newton {} vs simplex {}",
                        newton.best.loglik,
                        simplex.best.loglik
                    );
                }
            }
        }
    }
}

/// Pots that move: 48 pots, each half its window at its own place and
/// the rest at two others (so `W R W'` has a diagonal below 1).
fn moving(n: usize) -> (Distances, Vec<Vec<f64>>, Vec<f64>) {
    let (dist, xs, z) = layout(n);
    let (x, y) = dist.coords().unwrap();
    let shares: Vec<Vec<(usize, f64)>> =
        (0..n).map(|i| vec![(i, 0.5), ((i + 8) % n, 0.3), ((i + 17) % n, 0.2)]).collect();
    let a = crate::spatial::averaged::PathShares::new(x, y, &shares).unwrap();
    (Distances::Averaged(a), xs, z)
}

/// The scores of pots that move (`V_l` and `V_e` with their diagonals)
/// equal central differences of the profiled likelihood, ML and REML.
#[test]
fn scores_of_pots_that_move_match_differences() {
    let (dist, xs, z) = moving(48);
    for family in [Family::Exponential, Family::Gaussian, Family::Matern { nu: 1.5 }] {
        scores_match_at(&dist, &xs, &z, family, (0.9f64.ln(), 0.2));
    }
}

/// The Newton search on pots that move reaches the maximum that the
/// derivative-free simplex of `likelihood::maximise_by` finds on the same
/// likelihood (within 1e-6), with and without a nugget.
#[test]
fn newton_on_pots_that_move_finds_the_simplex_maximum() {
    use crate::spatial::likelihood::{maximise_by, profiled};
    let (dist, xs, z) = moving(48);
    for nugget in [false, true] {
        let opts = SearchOptions { nugget, ..SearchOptions::default() };
        for method in [LikelihoodKind::Ml, LikelihoodKind::Reml] {
            let (newton, _) =
                maximise_shared(&dist, Family::Exponential, &[xs.as_slice()], &z, method, &opts);
            let newton = newton.into_iter().next().unwrap().unwrap();
            let simplex =
                maximise_by(&dist, Family::Exponential, &opts, |p| profiled(&dist, p, &xs, &z, method))
                    .unwrap();
            assert!(
                newton.best.loglik > simplex.best.loglik - 1e-6,
                "nugget {nugget} {method:?}: Newton {} vs simplex {}",
                newton.best.loglik,
                simplex.best.loglik
            );
        }
    }
}

/// A search from a known start that stops at a looser Newton decrement (as
/// the bootstrap's refits do) falls short of the tight maximum by at most
/// about half the decrement, and uses fewer evaluations in all: checked
/// from the grid's maximum moved off the optimum, on the test layout and
/// its trended version, with and without a nugget.
#[test]
fn a_looser_decrement_stops_near_the_maximum() {
    let (dist, xs, z) = layout(96);
    let (x, _) = dist.coords().unwrap();
    let trended: Vec<f64> = z.iter().zip(x).map(|(v, xi)| v + 0.8 * xi).collect();
    let (mut tight_evals, mut loose_evals) = (0, 0);
    for zz in [&z, &trended] {
        for nugget in [false, true] {
            let tight = SearchOptions { nugget, ..SearchOptions::default() };
            let loose = SearchOptions { decrement_tol: 1e-5, ..tight.clone() };
            let (best, _) =
                maximise_shared(&dist, Family::Exponential, &[xs.as_slice()], zz, LikelihoodKind::Ml, &tight);
            let best = best.into_iter().next().unwrap().unwrap();
            let start = CovParams {
                range: best.best.params.range * 1.6,
                eta: if nugget { (best.best.params.eta + 0.1).min(0.9) } else { 0.0 },
                ..best.best.params
            };
            let a = maximise_from(&dist, start, &xs, zz, LikelihoodKind::Ml, &tight).unwrap();
            let b = maximise_from(&dist, start, &xs, zz, LikelihoodKind::Ml, &loose).unwrap();
            assert!(
                a.best.loglik >= b.best.loglik - 1e-9,
                "nugget {nugget}: tight {} loose {}",
                a.best.loglik,
                b.best.loglik
            );
            assert!(
                a.best.loglik - b.best.loglik < 1e-5,
                "nugget {nugget}: short by {}",
                a.best.loglik - b.best.loglik
            );
            tight_evals += a.evaluations;
            loose_evals += b.evaluations;
        }
    }
    assert!(loose_evals < tight_evals, "loose {loose_evals} against tight {tight_evals} evaluations");
}

/// The grid reaches past its edge only when a pass's best value is at its
/// largest range; and on data whose maximum lies beyond the grid (a smooth
/// surface across the whole layout that the design leaves out, with a
/// nugget) the search that extends the grid ends at the simplex's maximum.
#[test]
fn a_maximum_beyond_the_grid_is_reached() {
    use crate::spatial::likelihood::maximise_by;
    assert!(best_at_edge(&[1.0, 2.0, 3.0]));
    assert!(!best_at_edge(&[1.0, 3.0, 2.0]));
    assert!(!best_at_edge(&[f64::NEG_INFINITY; 3]));
    assert!(best_at_edge(&[1.0, f64::NEG_INFINITY, 1.0]));
    let (dist, xs, z) = layout(96);
    let (x, y) = dist.coords().unwrap();
    let surface: Vec<f64> = z.iter().zip(x.iter().zip(y)).map(|(v, (a, b))| v + 1.5 * a - 1.2 * b).collect();
    let intercept = &xs[..1];
    let opts = SearchOptions { nugget: true, ..SearchOptions::default() };
    let sb = SearchBox::new(&dist, &opts).unwrap();
    let pass: Vec<f64> = grid_ranges(&sb, Family::Exponential)
        .iter()
        .map(|r| {
            let p = CovParams { family: Family::Exponential, range: r.exp(), eta: 0.3 };
            profiled(&dist, &p, intercept, &surface, LikelihoodKind::Reml)
                .map_or(f64::NEG_INFINITY, |e| e.loglik)
        })
        .collect();
    assert!(best_at_edge(&pass), "the case must reach past the grid: {pass:?}");
    for method in [LikelihoodKind::Ml, LikelihoodKind::Reml] {
        let (newton, _) = maximise_shared(&dist, Family::Exponential, &[intercept], &surface, method, &opts);
        let newton = newton.into_iter().next().unwrap().unwrap();
        let simplex = maximise_by(&dist, Family::Exponential, &opts, |p| {
            profiled(&dist, p, intercept, &surface, method)
        })
        .unwrap();
        assert!(
            newton.best.loglik > simplex.best.loglik - 1e-6,
            "{method:?}: Newton {} vs simplex {}",
            newton.best.loglik,
            simplex.best.loglik
        );
    }
}
