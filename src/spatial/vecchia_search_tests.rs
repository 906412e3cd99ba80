//! Tests of the derivative-based Vecchia search: its maxima against those
//! of the simplex search (never lower) and, with full sets, the exact one.

use super::*;
use crate::spatial::likelihood::maximise;
use crate::spatial::vecchia::maximise_vecchia;
use crate::spatial::vecchia_latent::maximise_latent;
use crate::spatial::vecchia_scores::tests::field;
use approx::assert_relative_eq;

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
                    eprintln!(
                        "{family:?} {method:?} nugget {nugget}: {} evaluations ({:.6}) against the simplex's {} ({:.6})",
                        m.evaluations, m.best.loglik, old.evaluations, old.best.loglik
                    );
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
            eprintln!(
                "latent {family:?} {method:?}: {} evaluations ({:.6}) against the simplex's {} ({:.6})",
                new.evaluations, new.best.loglik, old.evaluations, old.best.loglik
            );
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
