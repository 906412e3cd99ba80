//! The residual correlation of pots that move: if an unmeasured field is
//! fixed in space, a pot accumulates its average over the positions it
//! held, so two pots are correlated as the time-share-weighted average of
//! the correlations between the positions:
//!
//! `V = (1 - eta) W R W' + eta I`
//!
//! with `W` the pots x positions matrix of time shares over each pot's
//! growth window (rows summing to 1; [`crate::spatial::paths::Paths::shares`]),
//! `R` the correlation between positions (`R_pq = rho(d_pq; range)` of any
//! family, 1 on the diagonal) and `eta` the nugget share, each pot's own
//! independent part. `W R W'` is positive semi-definite whenever `R` is
//! (`v' W R W' v = (W'v)' R (W'v)`), and `V` positive definite with a nugget.
//! With `W = I` (no pot moves) `V` is the correlation matrix of fixed pots,
//! `(1 - eta) R + eta I` ([`super::covariance::Kernel::correlation`]).
//!
//! Cost: `m^2/2` correlation evaluations for `R` (`m` positions), `O(n m k)`
//! for `R W'` and `O(n^2 k)` for `W (R W')` with `k` positions per pot, then
//! one Cholesky factorisation (`n^3/3`).
//!
//! Checked against a direct numpy computation of `W R W'`
//! (`tests/reference/averaged.py`, fixture `tests/reference/fixtures/averaged.json`).

use super::correlation::Family;
use super::covariance::{CovParams, dcorrelation_dlog_range};
use super::likelihood::{Distances, LikelihoodError, LikelihoodKind, Profiled};
use faer::Mat;

/// Per pot, its `(position, time share)` pairs; the shares of a pot sum to 1.
pub type Shares = [Vec<(usize, f64)>];

/// Pots that move as the residual model sees them: every position ever held
/// (metres) and each pot's time shares of the positions (the rows of `W`).
/// Carried by [`Distances::Averaged`], so every fit, search, bootstrap and
/// small-sample correction of fixed pots runs on them unchanged.
#[derive(Clone, Debug, PartialEq)]
pub struct PathShares {
    /// Easting of each position.
    pub px: Vec<f64>,
    /// Northing of each position.
    pub py: Vec<f64>,
    /// Per pot, its `(position, time share)` pairs.
    pub shares: Vec<Vec<(usize, f64)>>,
}

impl PathShares {
    /// Checked: finite positions, and each pot's shares non-negative, naming
    /// known positions and summing to 1 (within 1e-9).
    pub fn new(px: &[f64], py: &[f64], shares: &Shares) -> Result<PathShares, LikelihoodError> {
        if px.len() != py.len() || px.iter().chain(py).any(|v| !v.is_finite()) {
            return Err(LikelihoodError::Invalid(
                "the positions of pots that move must be pairs of finite coordinates".into(),
            ));
        }
        if let Some((i, w)) = shares.iter().enumerate().find(|(_, w)| {
            let total: f64 = w.iter().map(|s| s.1).sum();
            w.iter().any(|&(p, s)| p >= px.len() || !(s.is_finite() && s >= 0.0))
                || (total - 1.0).abs() > 1e-9
        }) {
            return Err(LikelihoodError::Invalid(format!(
                "the time shares of pot {i} ({w:?}) must be non-negative, name known positions and sum to 1"
            )));
        }
        Ok(PathShares { px: px.to_vec(), py: py.to_vec(), shares: shares.to_vec() })
    }

    /// Number of pots.
    pub fn len(&self) -> usize {
        self.shares.len()
    }

    /// True without pots.
    pub fn is_empty(&self) -> bool {
        self.shares.is_empty()
    }

    /// The distances between the positions.
    pub fn positions(&self) -> Distances {
        Distances::Coords { x: self.px.clone(), y: self.py.clone(), pairs: Default::default() }
    }

    /// `W M W'` (full, both triangles) for an `m x m` symmetric matrix `M`
    /// over the positions given by its entries `f(p, q)` (`f` is called for
    /// `q <= p` only). Cost `m^2/2` calls, `O(n m k + n^2 k)` flops with `k`
    /// positions per pot.
    fn sandwich(&self, f: impl Fn(usize, usize) -> f64) -> Mat<f64> {
        let m = self.px.len();
        let n = self.shares.len();
        let mut r = Mat::<f64>::zeros(m, m);
        for q in 0..m {
            for p in q..m {
                let v = f(p, q);
                r[(p, q)] = v;
                r[(q, p)] = v;
            }
        }
        // A = M W' (m x n): column i is sum_p w_ip M[:, p].
        let mut a = Mat::<f64>::zeros(m, n);
        for (i, w) in self.shares.iter().enumerate() {
            for &(p, s) in w {
                for q in 0..m {
                    a[(q, i)] += s * r[(q, p)];
                }
            }
        }
        let mut out = Mat::<f64>::zeros(n, n);
        for j in 0..n {
            for i in j..n {
                let v: f64 = self.shares[i].iter().map(|&(p, s)| s * a[(p, j)]).sum();
                out[(i, j)] = v;
                out[(j, i)] = v;
            }
        }
        out
    }

    fn distance(&self, p: usize, q: usize) -> f64 {
        super::geometry::distance(self.px[p], self.py[p], self.px[q], self.py[q])
    }

    /// `W R W'` of the family at `range` (full): the pots' structured
    /// correlation, below 1 on the diagonal for a pot that moved.
    pub fn structured(&self, family: Family, range: f64) -> Mat<f64> {
        self.sandwich(|p, q| if p == q { 1.0 } else { family.correlation(self.distance(p, q), range) })
    }

    /// `W D W'` (full), `D = dR/d ln range` between the positions (zero on
    /// the diagonal, [`dcorrelation_dlog_range`]).
    pub fn structured_derivative(&self, family: Family, range: f64) -> Mat<f64> {
        self.sandwich(|p, q| {
            if p == q {
                0.0
            } else {
                let d = self.distance(p, q);
                dcorrelation_dlog_range(family, d, range, family.correlation(d, range))
            }
        })
    }

    /// `V = (1 - eta) W R W' + eta I` (full).
    pub fn correlation(&self, params: &CovParams) -> Mat<f64> {
        let mut v = self.structured(params.family, params.range);
        let n = v.nrows();
        for j in 0..n {
            for i in 0..n {
                v[(i, j)] *= 1.0 - params.eta;
            }
            v[(j, j)] += params.eta;
        }
        v
    }

    /// The time-share-weighted mean distance `sum_pq w_ip w_jq d_pq` between
    /// pots `i` and `j` (for display; the correlation is [`Self::structured`]).
    pub fn mean_distance(&self, i: usize, j: usize) -> f64 {
        let mut s = 0.0;
        for &(p, a) in &self.shares[i] {
            for &(q, b) in &self.shares[j] {
                s += a * b * self.distance(p, q);
            }
        }
        s
    }

    /// Pairs `(i, j)`, `i < j`, of pots with the same shares of the same
    /// positions: their rows of `W R W'` are equal, so `V` is singular
    /// without a nugget.
    pub fn identical(&self) -> Vec<(usize, usize)> {
        let key: Vec<Vec<(usize, u64)>> = self
            .shares
            .iter()
            .map(|w| {
                let mut k: Vec<(usize, u64)> =
                    w.iter().filter(|s| s.1 > 0.0).map(|&(p, s)| (p, s.to_bits())).collect();
                k.sort_unstable();
                k
            })
            .collect();
        let mut out = Vec::new();
        for j in 0..key.len() {
            for i in 0..j {
                if key[i] == key[j] {
                    out.push((i, j));
                }
            }
        }
        out
    }
}

/// The position-averaged correlation `V = (1 - eta) W R W' + eta I` of the
/// pots, full (both triangles), for positions at `(px, py)` metres.
pub fn averaged_correlation(params: &CovParams, px: &[f64], py: &[f64], shares: &Shares) -> Mat<f64> {
    PathShares { px: px.to_vec(), py: py.to_vec(), shares: shares.to_vec() }.correlation(params)
}

/// The lower Cholesky factor of [`averaged_correlation`], with the errors of
/// [`super::likelihood::cholesky`].
pub fn averaged_cholesky(
    params: &CovParams,
    px: &[f64],
    py: &[f64],
    shares: &Shares,
) -> Result<Mat<f64>, LikelihoodError> {
    super::likelihood::cholesky(&Distances::Averaged(PathShares::new(px, py, shares)?), params)
}

/// The profiled ML or REML log-likelihood of pots that move at `params`
/// (as [`super::likelihood::profiled`], with `V` of [`averaged_correlation`]).
pub fn profiled_averaged(
    params: &CovParams,
    (px, py): (&[f64], &[f64]),
    shares: &Shares,
    x: &[Vec<f64>],
    y: &[f64],
    method: LikelihoodKind,
) -> Result<Profiled, LikelihoodError> {
    let dist = Distances::Averaged(PathShares::new(px, py, shares)?);
    super::likelihood::profiled(&dist, params, x, y, method)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::spatial::correlation::Family;
    use crate::spatial::likelihood::{Distances, cholesky, profiled};

    fn fixture() -> serde_json::Value {
        let p =
            std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/reference/fixtures/averaged.json");
        serde_json::from_str(&std::fs::read_to_string(p).unwrap()).unwrap()
    }

    fn floats(v: &serde_json::Value) -> Vec<f64> {
        v.as_array().unwrap().iter().map(|x| x.as_f64().unwrap()).collect()
    }

    /// `W R W'` with nugget against the direct numpy computation of
    /// tests/reference/averaged.py, for every family of the fixture.
    #[test]
    fn averaged_correlation_matches_numpy() {
        let f = fixture();
        let (px, py) = (floats(&f["px"]), floats(&f["py"]));
        let shares: Vec<Vec<(usize, f64)>> = f["shares"]
            .as_array()
            .unwrap()
            .iter()
            .map(|w| {
                w.as_array()
                    .unwrap()
                    .iter()
                    .map(|e| (e[0].as_u64().unwrap() as usize, e[1].as_f64().unwrap()))
                    .collect()
            })
            .collect();
        let (x, y) = (vec![vec![1.0; shares.len()], floats(&f["covariate"])], floats(&f["y"]));
        let cases = f["cases"].as_array().unwrap();
        assert!(cases.len() >= 4);
        for c in cases {
            let params = CovParams {
                family: Family::parse(c["family"].as_str().unwrap()).unwrap(),
                range: c["range"].as_f64().unwrap(),
                eta: c["eta"].as_f64().unwrap(),
            };
            let v = averaged_correlation(&params, &px, &py, &shares);
            let want: Vec<Vec<f64>> = c["v"].as_array().unwrap().iter().map(floats).collect();
            for i in 0..shares.len() {
                for j in 0..shares.len() {
                    assert!(
                        (v[(i, j)] - want[i][j]).abs() < 1e-13,
                        "{params:?} [{i},{j}] {} vs {}",
                        v[(i, j)],
                        want[i][j]
                    );
                }
            }
            for (kind, key) in [(LikelihoodKind::Ml, "ml"), (LikelihoodKind::Reml, "reml")] {
                let p = profiled_averaged(&params, (&px, &py), &shares, &x, &y, kind).unwrap();
                let want = c[key].as_f64().unwrap();
                assert!(
                    (p.loglik - want).abs() < 1e-9 * want.abs().max(1.0),
                    "{params:?} {key}: {} vs {want}",
                    p.loglik
                );
            }
        }
    }

    /// Pots that never move (`W = I`): the same likelihood as the fixed
    /// pots' model to 1e-12, for every family, with and without a nugget.
    #[test]
    fn identity_shares_reproduce_fixed_pots() {
        let px = [0.0, 1.0, 2.0, 3.0, 5.0, 8.0, 0.5, 4.0];
        let py = [0.0, 0.0, 1.0, 0.5, 2.0, 1.0, 3.0, 3.0];
        let y = [1.2, 1.9, 2.1, 3.2, 2.8, 4.5, 1.0, 3.3];
        let x = vec![vec![1.0; 8], px.to_vec()];
        let shares: Vec<Vec<(usize, f64)>> = (0..8).map(|i| vec![(i, 1.0)]).collect();
        let dist = Distances::from_coords(&px, &py).unwrap();
        for family in [Family::Exponential, Family::Gaussian, Family::Spherical, Family::Matern { nu: 1.5 }] {
            for eta in [0.0, 0.3] {
                if eta == 0.0 && family == Family::Gaussian {
                    continue; // numerically singular without a nugget at these spacings
                }
                let params = CovParams { family, range: 2.5, eta };
                for kind in [LikelihoodKind::Ml, LikelihoodKind::Reml] {
                    let a = profiled_averaged(&params, (&px, &py), &shares, &x, &y, kind).unwrap();
                    let b = profiled(&dist, &params, &x, &y, kind).unwrap();
                    assert!((a.loglik - b.loglik).abs() < 1e-12, "{params:?}: {} vs {}", a.loglik, b.loglik);
                    assert!((a.sigma2 - b.sigma2).abs() < 1e-12 * b.sigma2);
                }
                let l = averaged_cholesky(&params, &px, &py, &shares).unwrap();
                let m = cholesky(&dist, &params).unwrap();
                for i in 0..8 {
                    for j in 0..=i {
                        assert!((l[(i, j)] - m[(i, j)]).abs() < 1e-12);
                    }
                }
            }
        }
    }

    /// The search over `(range, eta)` with `W = I` finds the fixed pots'
    /// maximum (the same start grid, bounds and steps).
    #[test]
    fn identity_shares_search_finds_the_fixed_maximum() {
        use crate::spatial::likelihood::{SearchOptions, maximise, maximise_by};
        let px = [0.0, 1.0, 2.0, 3.0, 5.0, 8.0, 0.5, 4.0, 6.0, 7.5];
        let py = [0.0, 0.0, 1.0, 0.5, 2.0, 1.0, 3.0, 3.0, 0.2, 2.5];
        let y = [1.2, 1.9, 2.1, 3.2, 2.8, 4.5, 1.0, 3.3, 3.9, 4.1];
        let x = vec![vec![1.0; 10]];
        let shares: Vec<Vec<(usize, f64)>> = (0..10).map(|i| vec![(i, 1.0)]).collect();
        let dist = Distances::from_coords(&px, &py).unwrap();
        let opts = SearchOptions::default();
        let kind = LikelihoodKind::Reml;
        let a = maximise(&dist, Family::Exponential, &x, &y, kind, &opts).unwrap();
        let b = maximise_by(&dist, Family::Exponential, &opts, |p| {
            profiled_averaged(p, (&px, &py), &shares, &x, &y, kind)
        })
        .unwrap();
        assert!((a.best.loglik - b.best.loglik).abs() < 1e-9, "{} vs {}", a.best.loglik, b.best.loglik);
        assert!((a.best.params.range - b.best.params.range).abs() < 1e-6 * a.best.params.range);
    }

    /// `W D W'` is the derivative of `W R W'` in the log range (central
    /// differences, step 1e-6) for each differentiable family.
    #[test]
    fn structured_derivative_is_the_derivative() {
        let a = PathShares::new(
            &[0.0, 1.0, 2.5, 0.4],
            &[0.0, 0.5, 0.2, 2.0],
            &[vec![(0, 0.5), (1, 0.5)], vec![(1, 0.2), (2, 0.3), (3, 0.5)], vec![(3, 1.0)]],
        )
        .unwrap();
        for family in [Family::Exponential, Family::Gaussian, Family::Matern { nu: 2.5 }] {
            let lr = 1.2f64.ln();
            let h = 1e-6;
            let (up, down) = (a.structured(family, (lr + h).exp()), a.structured(family, (lr - h).exp()));
            let d = a.structured_derivative(family, lr.exp());
            for i in 0..3 {
                for j in 0..3 {
                    let fd = (up[(i, j)] - down[(i, j)]) / (2.0 * h);
                    assert!((d[(i, j)] - fd).abs() < 1e-7, "{family} [{i},{j}] {} vs {fd}", d[(i, j)]);
                }
            }
        }
        // the diagonal of a pot that moved is below 1; two pots with equal
        // shares are the only identical pair
        let s = a.structured(Family::Exponential, 1.0);
        assert!(s[(0, 0)] < 1.0 && s[(2, 2)] == 1.0);
        let twins =
            PathShares::new(&[0.0, 1.0], &[0.0, 0.0], &[vec![(0, 0.5), (1, 0.5)], vec![(1, 0.5), (0, 0.5)]])
                .unwrap();
        assert_eq!(twins.identical(), vec![(0, 1)]);
        assert!(a.identical().is_empty());
    }

    /// Two pots and two positions by hand: pot a spends 3/4 of its window at
    /// position 0 and 1/4 at 1, pot b the reverse; with `rho = r` between
    /// the positions, `(W R W')_ab = 3/16 + 3/16 + (9/16 + 1/16) r = 3/8 + 5/8 r`
    /// and `(W R W')_aa = 9/16 + 1/16 + 2 (3/16) r = 5/8 + 3/8 r`.
    #[test]
    fn two_pots_two_positions_by_hand() {
        let (px, py) = ([0.0, 2.0], [0.0, 0.0]);
        let shares = vec![vec![(0, 0.75), (1, 0.25)], vec![(0, 0.25), (1, 0.75)]];
        let params = CovParams { family: Family::Exponential, range: 2.0, eta: 0.2 };
        let r = (-1.0f64).exp();
        let v = averaged_correlation(&params, &px, &py, &shares);
        assert!((v[(0, 1)] - 0.8 * (0.375 + 0.625 * r)).abs() < 1e-15);
        assert!((v[(0, 0)] - (0.8 * (0.625 + 0.375 * r) + 0.2)).abs() < 1e-15);
        assert!((v[(1, 1)] - v[(0, 0)]).abs() < 1e-15);
        // shares that do not sum to 1 are refused
        let bad = vec![vec![(0, 0.5)], vec![(1, 1.0)]];
        assert!(averaged_cholesky(&params, &px, &py, &bad).is_err());
    }
}
