//! Tests of the Vecchia scores: against central differences of the
//! likelihood, the scored and shared evaluations against the plain one, the
//! kept neighbour distances against none, threads.

use super::*;
use crate::spatial::likelihood::{Distances, cholesky};
use crate::spatial::vecchia::profiled_vecchia;
use approx::assert_relative_eq;
use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};

/// Jittered bench positions, a covariate and a response drawn from the
/// model with `truth` (a Gaussian field by the dense Cholesky factor).
pub(crate) fn field(n: usize, seed: u64, truth: &CovParams) -> (Vec<f64>, Vec<f64>, Vec<Vec<f64>>, Vec<f64>) {
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

/// The scored evaluation does not depend on the number of threads (600
/// ranks are spread over threads unless sequential).
#[test]
fn threads_do_not_change_the_scores() {
    let truth = CovParams { family: Family::Exponential, range: 1.0, eta: 0.2 };
    let (x, y, xs, z) = field(600, 17, &truth);
    let cond = Conditioning::new(&x, &y, 20).unwrap();
    let p = CovParams { family: Family::Matern { nu: 1.5 }, range: 0.7, eta: 0.3 };
    let a = scored_vecchia(&cond, &p, &xs, &z, LikelihoodKind::Reml, 2).unwrap();
    let b =
        crate::spatial::factor::sequential(|| scored_vecchia(&cond, &p, &xs, &z, LikelihoodKind::Reml, 2))
            .unwrap();
    assert_eq!(a.prof.loglik.to_bits(), b.prof.loglik.to_bits());
    assert_eq!(a.grad, b.grad);
    assert_eq!(a.info, b.info);
}
