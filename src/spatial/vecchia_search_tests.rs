//! Tests of the derivative-based Vecchia search: the scores against central
//! differences of the likelihood, the scored and shared evaluations against
//! the plain one, the kept neighbour distances against none, and the maxima
//! against those of the simplex search (never lower).

use super::*;
use crate::spatial::likelihood::{cholesky, maximise};
use crate::spatial::vecchia::maximise_vecchia;
use crate::spatial::vecchia_latent::maximise_latent;
use approx::assert_relative_eq;
use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};

/// Jittered bench positions, a covariate and a response drawn from the
/// model with `truth` (a Gaussian field by the dense Cholesky factor).
fn field(n: usize, seed: u64, truth: &CovParams) -> (Vec<f64>, Vec<f64>, Vec<Vec<f64>>, Vec<f64>) {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let x: Vec<f64> = (0..n).map(|i| (i % 15) as f64 * 0.4 + rng.random_range(-0.15..0.15)).collect();
    let y: Vec<f64> = (0..n).map(|i| (i / 15) as f64 * 0.4 + rng.random_range(-0.15..0.15)).collect();
    let cov: Vec<f64> = (0..n).map(|_| rng.random_range(0.0..3.0)).collect();
    let dist = Distances::from_coords(&x, &y).unwrap();
    let l = cholesky(&dist, truth).unwrap();
    let e: Vec<f64> = (0..n).map(|_| StandardNormal.sample(&mut rng)).collect();
    let z: Vec<f64> =
        (0..n).map(|i| 1.0 + 0.5 * cov[i] + (0..=i).map(|j| l[(i, j)] * e[j]).sum::<f64>()).collect();
    (x, y, vec![vec![1.0; n], cov], z)
}

fn loglik(cond: &Conditioning, p: &CovParams, xs: &[Vec<f64>], z: &[f64], method: LikelihoodKind) -> f64 {
    profiled_vecchia(cond, p, xs, z, method).unwrap().loglik
}

/// The scores equal central differences of the likelihood in `ln range` and
/// `eta` (step 1e-5), ML and REML, for the families with closed-form
/// derivatives and a general Matérn, with and without kept distances; the
/// scored value is the plain one to the bit.
#[test]
fn scores_match_central_differences() {
    let truth = CovParams { family: Family::Matern { nu: 1.5 }, range: 0.7, eta: 0.2 };
    let (x, y, xs, z) = field(150, 3, &truth);
    let cond = Conditioning::new(&x, &y, 12).unwrap();
    assert!(cond.keeps_distances());
    let bare = cond.clone().without_distance_cache();
    for family in
        [Family::Exponential, Family::Matern { nu: 1.5 }, Family::Gaussian, Family::Matern { nu: 0.8 }]
    {
        let range = if family == Family::Gaussian { 0.35 } else { 0.8 };
        for method in [LikelihoodKind::Ml, LikelihoodKind::Reml] {
            for (eta, dim) in [(0.25, 2), (0.0, 1)] {
                let p = CovParams { family, range, eta };
                let s = scored_vecchia(&cond, &p, &xs, &z, method, dim).unwrap();
                let plain = profiled_vecchia(&cond, &p, &xs, &z, method).unwrap();
                assert_eq!(s.prof.loglik.to_bits(), plain.loglik.to_bits());
                assert_eq!(s.prof.beta, plain.beta);
                assert_eq!(s.prof.whitened, plain.whitened);
                let sb = scored_vecchia(&bare, &p, &xs, &z, method, dim).unwrap();
                assert_eq!(sb.prof.loglik.to_bits(), s.prof.loglik.to_bits());
                assert_eq!(sb.grad, s.grad);
                let h: f64 = 1e-5;
                let up = CovParams { range: range * h.exp(), ..p };
                let down = CovParams { range: range * (-h).exp(), ..p };
                let fd =
                    (loglik(&cond, &up, &xs, &z, method) - loglik(&cond, &down, &xs, &z, method)) / (2.0 * h);
                assert_relative_eq!(s.grad[0], fd, epsilon = 1e-5 * fd.abs().max(1.0));
                if dim == 2 {
                    let up = CovParams { eta: eta + h, ..p };
                    let down = CovParams { eta: eta - h, ..p };
                    let fd = (loglik(&cond, &up, &xs, &z, method) - loglik(&cond, &down, &xs, &z, method))
                        / (2.0 * h);
                    assert_relative_eq!(s.grad[1], fd, epsilon = 1e-5 * fd.abs().max(1.0));
                    // the information is a positive definite metric
                    let i = s.info;
                    assert!(i[0][0] > 0.0 && i[0][0] * i[1][1] - i[0][1] * i[1][0] > 0.0, "{i:?}");
                    assert_eq!(i[0][1], i[1][0]);
                } else {
                    assert_eq!(s.grad[1], 0.0);
                    assert!(s.info[0][0] > 0.0);
                }
            }
        }
    }
}

/// Kept neighbour distances change no value: the plain evaluation with and
/// without them agrees to the bit (a rank's own distances are those the
/// evaluation computes); full sets at a few hundred points are too many to
/// keep.
#[test]
fn kept_distances_give_the_same_bits() {
    let truth = CovParams { family: Family::Exponential, range: 1.0, eta: 0.1 };
    let (x, y, xs, z) = field(600, 9, &truth);
    let cond = Conditioning::new(&x, &y, 30).unwrap();
    assert!(cond.keeps_distances());
    let bare = cond.clone().without_distance_cache();
    assert!(!bare.keeps_distances());
    for family in [Family::Exponential, Family::Spherical, Family::Matern { nu: 2.5 }] {
        let p = CovParams { family, range: 0.9, eta: 0.15 };
        let a = profiled_vecchia(&cond, &p, &xs, &z, LikelihoodKind::Reml).unwrap();
        let b = profiled_vecchia(&bare, &p, &xs, &z, LikelihoodKind::Reml).unwrap();
        assert_eq!(a.loglik.to_bits(), b.loglik.to_bits());
        assert_eq!(a.whitened, b.whitened);
    }
    // 600^3 / 6 distances with full sets: above the limit
    assert!(!Conditioning::new(&x, &y, 599).unwrap().keeps_distances());
}

/// The shared evaluation of several fixed parts equals each one's own.
#[test]
fn shared_evaluation_equals_each_own() {
    let truth = CovParams { family: Family::Exponential, range: 0.8, eta: 0.2 };
    let (x, y, xs, z) = field(200, 4, &truth);
    let cond = Conditioning::new(&x, &y, 10).unwrap();
    let one = vec![xs[0].clone()];
    let designs: Vec<&[Vec<f64>]> = vec![&xs, &one];
    let p = CovParams { family: Family::Exponential, range: 0.6, eta: 0.3 };
    let all = profiled_vecchia_many(&cond, &p, &designs, &z, LikelihoodKind::Ml).unwrap();
    for (r, x) in all.into_iter().zip(&designs) {
        let r = r.unwrap();
        let own = profiled_vecchia(&cond, &p, x, &z, LikelihoodKind::Ml).unwrap();
        assert_eq!(r.loglik.to_bits(), own.loglik.to_bits());
        assert_eq!(r.beta, own.beta);
        assert_eq!(r.whitened, own.whitened);
    }
}

/// On seeded fields of every family (the spherical one by the simplex from
/// the shared starts), ML and REML, with and without nugget, the search finds
/// a likelihood at least as high as the simplex search (within 1e-6), with
/// far fewer evaluations where Newton steps are taken.
#[test]
fn search_is_never_lower_than_the_simplex() {
    let mut newton_evals = 0;
    let mut simplex_evals = 0;
    for (seed, family, range) in [
        (11, Family::Exponential, 0.9),
        (12, Family::Matern { nu: 1.5 }, 0.6),
        (13, Family::Gaussian, 0.5),
        (14, Family::Spherical, 2.0),
    ] {
        let truth = CovParams { family, range, eta: 0.2 };
        let (x, y, xs, z) = field(300, seed, &truth);
        let dist = Distances::from_coords(&x, &y).unwrap();
        let cond = Conditioning::new(&x, &y, 15).unwrap();
        let one = vec![xs[0].clone()];
        let designs: Vec<&[Vec<f64>]> = vec![&xs, &one];
        for method in [LikelihoodKind::Ml, LikelihoodKind::Reml] {
            for nugget in [false, true] {
                let opts = SearchOptions { nugget, ..SearchOptions::default() };
                let (new, _) = maximise_vecchia_shared(&dist, &cond, family, &designs, &z, method, &opts);
                for (m, x) in new.into_iter().zip(&designs) {
                    let m = m.unwrap();
                    let old = maximise_vecchia(&dist, &cond, family, x, &z, method, &opts).unwrap();
                    assert!(
                        m.best.loglik >= old.best.loglik - 1e-6,
                        "{family:?} {method:?} nugget {nugget}: {} against the simplex's {}",
                        m.best.loglik,
                        old.best.loglik
                    );
                    // the reported best is the plain evaluation at its parameters
                    let again = profiled_vecchia(&cond, &m.best.params, x, &z, method).unwrap();
                    assert_eq!(again.loglik.to_bits(), m.best.loglik.to_bits());
                    assert_eq!(m.factorisations, 0);
                    if family != Family::Spherical {
                        newton_evals += m.evaluations;
                        simplex_evals += old.evaluations;
                    }
                }
            }
        }
    }
    assert!(2 * newton_evals < simplex_evals, "{newton_evals} evaluations against {simplex_evals}");
}

/// With full sets the search finds the exact path's maximum.
#[test]
fn maximum_with_full_sets_is_the_exact_one() {
    let truth = CovParams { family: Family::Exponential, range: 0.9, eta: 0.3 };
    let (x, y, xs, z) = field(72, 8, &truth);
    let dist = Distances::from_coords(&x, &y).unwrap();
    let cond = Conditioning::new(&x, &y, 71).unwrap();
    for nugget in [false, true] {
        let opts = SearchOptions { nugget, ..SearchOptions::default() };
        let exact = maximise(&dist, Family::Exponential, &xs, &z, LikelihoodKind::Reml, &opts).unwrap();
        let (v, _) = maximise_vecchia_shared(
            &dist,
            &cond,
            Family::Exponential,
            &[&xs],
            &z,
            LikelihoodKind::Reml,
            &opts,
        );
        let v = v.into_iter().next().unwrap().unwrap();
        assert!(v.best.loglik >= exact.best.loglik - 1e-7, "{} {}", v.best.loglik, exact.best.loglik);
        assert_relative_eq!(v.best.params.range, exact.best.params.range, max_relative = 1e-3);
    }
}

/// The latent search (response-level Newton, then the latent simplex from
/// its maximum with [`LATENT_F_TOL`]) ends within 1e-4 of the full latent
/// simplex search's maximum or above it, with fewer latent evaluations; its
/// best carries the residuals.
#[test]
fn latent_search_is_not_lower_than_the_simplex() {
    let mut new_evals = 0;
    let mut old_evals = 0;
    for (seed, family, range, eta) in [
        (21, Family::Exponential, 0.9, 0.2),
        (22, Family::Matern { nu: 1.5 }, 0.6, 0.3),
        (23, Family::Exponential, 1.5, 0.05),
        (24, Family::Matern { nu: 1.5 }, 0.4, 0.6),
    ] {
        let truth = CovParams { family, range, eta };
        let (x, y, xs, z) = field(300, seed, &truth);
        let dist = Distances::from_coords(&x, &y).unwrap();
        let lat = LatentVecchia::new(&x, &y, 15).unwrap();
        let opts = SearchOptions::default();
        for method in [LikelihoodKind::Ml, LikelihoodKind::Reml] {
            let (new, _) = maximise_latent_shared(&dist, &lat, family, &[&xs], &z, method, &opts);
            let new = new.into_iter().next().unwrap().unwrap();
            let old = maximise_latent(&dist, &lat, family, &xs, &z, method, &opts).unwrap();
            assert!(
                new.best.loglik >= old.best.loglik - 1e-4,
                "{family:?} {method:?}: {} against the simplex's {}",
                new.best.loglik,
                old.best.loglik
            );
            assert_eq!(new.best.whitened.len(), 300);
            let again = lat.evaluate(&new.best.params, &xs, &z, method, false).unwrap();
            assert_eq!(again.loglik.to_bits(), new.best.loglik.to_bits());
            new_evals += new.evaluations;
            old_evals += old.evaluations;
        }
    }
    assert!(new_evals < old_evals, "{new_evals} evaluations against {old_evals}");
}

#[test]
fn bad_input_is_refused() {
    let x = [0.0, 1.0, 2.0, 0.5];
    let y = [0.0, 0.0, 1.0, 2.0];
    let cond = Conditioning::new(&x, &y, 2).unwrap();
    let dist = Distances::from_coords(&x, &y).unwrap();
    let xs = vec![vec![1.0; 4]];
    let p = CovParams { family: Family::Exponential, range: 1.0, eta: 0.2 };
    assert!(scored_vecchia(&cond, &p, &xs, &[1.0, 2.0], LikelihoodKind::Ml, 2).is_err());
    assert!(
        scored_vecchia(&cond, &CovParams { range: -1.0, ..p }, &xs, &[1.0; 4], LikelihoodKind::Ml, 2)
            .is_err()
    );
    let short = vec![vec![1.0; 3]];
    let (r, _) = maximise_vecchia_shared(
        &dist,
        &cond,
        Family::Exponential,
        &[&short],
        &[1.0, 2.0, 3.0, 4.0],
        LikelihoodKind::Ml,
        &SearchOptions::default(),
    );
    assert!(r[0].is_err());
}
