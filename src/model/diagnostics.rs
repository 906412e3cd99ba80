//! Residual diagnostics: Moran's I of regression residuals on
//! k-nearest-neighbour weights, with the exact moments under normality for
//! residuals of a linear model (Cliff & Ord 1981, *Spatial Processes*, §8.3;
//! REFERENCE.md §6).
//!
//! For residuals `e = M eps`, `M = I - X (X'X)^-1 X'`, `k = p` columns, binary
//! weights `W` (row `i` has ones at its `k` nearest neighbours, so `W` is not
//! symmetric) and `S0 = sum w_ij`:
//!
//! * `I = (n / S0) e'We / e'e` (e not re-centred: with an intercept it has mean 0);
//! * `E[I] = (n / S0) tr(MW) / (n - p)`;
//! * `Var[I] = (n / S0)^2 [tr(MWMW') + tr((MW)^2) + (tr MW)^2] / ((n - p)(n - p + 2)) - E[I]^2`;
//! * `z = (I - E[I]) / sqrt(Var[I])`, two-sided normal p-value.
//!
//! For GLS fits the test is applied to the whitened residuals `L^-1 e` with
//! the whitened design `L^-1 X`, for which the same theory holds under the
//! fitted covariance (REFERENCE.md §6: "apply the formula to whitened residuals").
//!
//! The residual variogram is computed by the variogram code of
//! [`crate::spatial`] (see `model::stage::residual_variograms`).
//!
//! Cost: a k-d tree query per pot (`O(n log n)`) and `O(n k p + n p^2)` for the moments.

use kiddo::{ImmutableKdTree, SquaredEuclidean};
use statrs::distribution::{ContinuousCDF, Normal};
use std::num::NonZero;

/// Neighbours per pot for Moran's I (common practice for regular bench layouts: the 4 adjacent pots).
pub const MORAN_NEIGHBOURS: usize = 4;

/// k-nearest-neighbour lists (excluding the point itself). Ties at the k-th
/// distance are broken by the k-d tree's order.
pub fn knn(x: &[f64], y: &[f64], k: usize) -> Option<Vec<Vec<usize>>> {
    let n = x.len();
    if k == 0 || n <= k {
        return None;
    }
    let pts: Vec<[f64; 2]> = x.iter().zip(y).map(|(&a, &b)| [a, b]).collect();
    let tree: ImmutableKdTree<f64, 2> = ImmutableKdTree::new_from_slice(&pts).ok()?;
    let mut out = Vec::with_capacity(n);
    for (i, p) in pts.iter().enumerate() {
        let found = tree
            .query(p)
            .nearest_n::<SquaredEuclidean<f64>>(NonZero::new(k + 1).expect("k + 1 > 0"))
            .execute();
        let mut nb: Vec<(f64, usize)> =
            found.iter().map(|r| (r.distance, r.item as usize)).filter(|&(_, j)| j != i).collect();
        nb.sort_by(|a, b| a.0.total_cmp(&b.0));
        nb.truncate(k);
        out.push(nb.into_iter().map(|(_, j)| j).collect());
    }
    Some(out)
}

/// Moran's I test of regression residuals.
#[derive(Clone, Debug, PartialEq)]
pub struct MoranTest {
    /// Neighbours per pot.
    pub k: usize,
    /// Moran's I.
    pub i: f64,
    /// Its expectation under no spatial correlation.
    pub expected: f64,
    /// Its variance.
    pub variance: f64,
    /// Standardised statistic.
    pub z: f64,
    /// Two-sided normal p-value.
    pub p: f64,
}

/// Moran's I of residuals `e` of a regression on columns `x` with binary
/// `k`-nearest-neighbour weights `nb` (from [`knn`]). `None` when undefined
/// (`e` zero, `n - p < 1`, or a non-positive variance).
pub fn moran_residuals(e: &[f64], x: &[Vec<f64>], nb: &[Vec<usize>]) -> Option<MoranTest> {
    let n = e.len();
    let p = x.len();
    if n <= p + 1 || nb.len() != n {
        return None;
    }
    let k = nb.first().map(|v| v.len()).unwrap_or(0);
    let s0: f64 = nb.iter().map(|v| v.len() as f64).sum();
    if s0 == 0.0 {
        return None;
    }
    let ee: f64 = e.iter().map(|v| v * v).sum();
    if ee.is_nan() || ee <= 0.0 {
        return None;
    }
    let ewe: f64 = (0..n).map(|i| e[i] * nb[i].iter().map(|&j| e[j]).sum::<f64>()).sum();
    let i_stat = n as f64 / s0 * ewe / ee;
    // orthonormal basis Q of the columns of X (modified Gram–Schmidt): H = Q Q'
    let mut q: Vec<Vec<f64>> = Vec::new();
    for c in x {
        let mut v = c.clone();
        for b in &q {
            let d: f64 = v.iter().zip(b).map(|(a, b)| a * b).sum();
            for (vi, bi) in v.iter_mut().zip(b) {
                *vi -= d * bi;
            }
        }
        let norm = v.iter().map(|a| a * a).sum::<f64>().sqrt();
        if norm > 1e-12 {
            q.push(v.into_iter().map(|a| a / norm).collect());
        }
    }
    let r = q.len();
    // WQ and W'Q (n x r)
    let mut wq = vec![vec![0.0; n]; r];
    let mut wtq = vec![vec![0.0; n]; r];
    for c in 0..r {
        for i in 0..n {
            for &j in &nb[i] {
                wq[c][i] += q[c][j];
                wtq[c][j] += q[c][i];
            }
        }
    }
    // G = Q'WQ
    let g: Vec<f64> = (0..r)
        .flat_map(|a| {
            let (q, wq) = (&q, &wq);
            (0..r).map(move |b| q[a].iter().zip(&wq[b]).map(|(u, v)| u * v).sum::<f64>())
        })
        .collect();
    let tr_g: f64 = (0..r).map(|a| g[a * r + a]).sum();
    // traces of the weights
    let mut tr_ww = 0.0; // sum_ij w_ij w_ji
    let tr_wwt: f64 = s0; // sum_ij w_ij^2 (binary)
    for i in 0..n {
        for &j in &nb[i] {
            if nb[j].contains(&i) {
                tr_ww += 1.0;
            }
        }
    }
    let fro = |a: &Vec<Vec<f64>>| a.iter().flatten().map(|v| v * v).sum::<f64>();
    let tr_hwtw = fro(&wq); // tr(Q'W'WQ)
    let tr_hwwt = fro(&wtq); // tr(Q'WW'Q)
    let tr_hww: f64 = (0..r).map(|c| wtq[c].iter().zip(&wq[c]).map(|(u, v)| u * v).sum::<f64>()).sum(); // tr(Q'WWQ)
    let tr_ggt: f64 = g.iter().map(|v| v * v).sum();
    let tr_gg: f64 = (0..r).map(|a| (0..r).map(|b| g[a * r + b] * g[b * r + a]).sum::<f64>()).sum();
    let tr_mw = -tr_g; // tr(W) = 0
    let tr_mwmwt = tr_wwt - tr_hwtw - tr_hwwt + tr_ggt;
    let tr_mwmw = tr_ww - 2.0 * tr_hww + tr_gg;
    let m = (n - r) as f64;
    let c = n as f64 / s0;
    let expected = c * tr_mw / m;
    let variance = c * c * (tr_mwmwt + tr_mwmw + tr_mw * tr_mw) / (m * (m + 2.0)) - expected * expected;
    if variance.is_nan() || variance <= 0.0 {
        return None;
    }
    let z = (i_stat - expected) / variance.sqrt();
    let p = 2.0 * Normal::standard().sf(z.abs());
    Some(MoranTest { k, i: i_stat, expected, variance, z, p })
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    /// REFERENCE.md §6: on a rook 4x4 grid the residual formula with X = 1
    /// gives E = -1/15 and Var_N = 0.0325926 for the raw-variable moments.
    /// Rook contiguity is not kNN, so the moments are checked here on a
    /// weights list built by hand.
    #[test]
    fn rook_grid_moments() {
        let mut nb = vec![Vec::new(); 16];
        for r in 0..4i32 {
            for c in 0..4i32 {
                for (dr, dc) in [(0, 1), (1, 0), (0, -1), (-1, 0)] {
                    let (rr, cc) = (r + dr, c + dc);
                    if (0..4).contains(&rr) && (0..4).contains(&cc) {
                        nb[(r * 4 + c) as usize].push((rr * 4 + cc) as usize);
                    }
                }
            }
        }
        let e: Vec<f64> = (0..16).map(|i| ((i * 7 % 5) as f64) - 2.0).collect();
        let mean = e.iter().sum::<f64>() / 16.0;
        let e: Vec<f64> = e.iter().map(|v| v - mean).collect();
        let one = vec![vec![1.0; 16]];
        let t = moran_residuals(&e, &one, &nb).unwrap();
        assert_relative_eq!(t.expected, -1.0 / 15.0, epsilon = 1e-12);
        assert_relative_eq!(t.variance, 0.0325926, epsilon = 1e-7);
        let rowx = vec![vec![1.0; 16], (0..16).map(|i| (i / 4) as f64).collect()];
        let t = moran_residuals(&e, &rowx, &nb).unwrap();
        assert_relative_eq!(t.expected, -0.1190476, epsilon = 1e-7);
        assert_relative_eq!(t.variance, 0.0309666, epsilon = 1e-7);
    }
}

#[cfg(test)]
mod reference_tests {
    use super::*;
    use crate::model::ols::least_squares;
    use crate::model::testdata::{column, csv, fixture};
    use approx::assert_relative_eq;

    /// Moran's I of OLS residuals on 4-nearest-neighbour binary weights against
    /// esda/libpysal (tie-free points; tests/reference/model.py), and the
    /// Cliff–Ord regression moments against the numpy computation of the same script.
    #[test]
    fn moran_vs_esda() {
        let d = csv("moran_pts.csv");
        let num = |c: &str| -> Vec<f64> { column(&d, c).iter().map(|v| v.parse().unwrap()).collect() };
        let (x, y, v) = (num("x"), num("y"), num("value"));
        let n = v.len();
        let cols = vec![vec![1.0; n], x.clone(), y.clone()];
        let (beta, _, _) = least_squares(&cols, &v).unwrap();
        let e: Vec<f64> = (0..n).map(|i| v[i] - (0..3).map(|j| cols[j][i] * beta[j]).sum::<f64>()).collect();
        let fx = fixture("model_moran.json");
        let nb = knn(&x, &y, 4).unwrap();
        let t = moran_residuals(&e, &cols, &nb).unwrap();
        assert_relative_eq!(t.i, fx["I"].as_f64().unwrap(), max_relative = 1e-10);
        assert_relative_eq!(t.expected, fx["E_resid"].as_f64().unwrap(), max_relative = 1e-10);
        assert_relative_eq!(t.variance, fx["V_resid"].as_f64().unwrap(), max_relative = 1e-10);
        // with X = 1 the regression moments are esda's EI and VI_norm
        let t1 = moran_residuals(&e, &[vec![1.0; n]], &nb).unwrap();
        assert_relative_eq!(t1.expected, fx["EI_plain"].as_f64().unwrap(), max_relative = 1e-10);
        assert_relative_eq!(t1.variance, fx["VI_norm_plain"].as_f64().unwrap(), max_relative = 1e-9);
    }
}
