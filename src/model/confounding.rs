//! Spatial confounding shown: how much of each driver lies along the
//! smoothest patterns of the fitted residual field.
//!
//! A smooth driver and a spatially correlated residual compete for the same
//! variation (Hodges & Reich 2010, *The American Statistician* 64: 325-334;
//! Paciorek 2010, *Statistical Science* 25: 107-125). With the fitted
//! correlation `R` (the structured part; the nugget does not change its
//! eigenvectors) decomposed as `R = U diag(l) U'`, `l` descending, the
//! **leading eigenvectors** are the fewest `K` whose eigenvalues hold half of
//! the field's variance (`sum_{k<=K} l_k >= tr(R) / 2 = n / 2`). The
//! driver `x` is first made free of the base design (`x~` its residual from
//! the least-squares fit on the base columns: factors and blocks explain
//! their own share), and its **smooth share** is
//! `s = |U_K' x~|^2 / |x~|^2` (the fraction of its variance in that span).
//! A direction without spatial pattern would have about `K / n`.
//!
//! `s` near 1 says that, with this layout, everything the driver varies is
//! also where the residual field varies most: the data cannot tell the
//! driver's effect from a smooth unmeasured effect. The sentence threshold,
//! [`INDISTINGUISHABLE_SHARE`], is our choice (common practice has none).
//!
//! Cost: one symmetric eigendecomposition of an `n x n` matrix (about
//! `9 n^3` flops), then `O(n K)` per driver.

use crate::spatial::factor::least_squares;
use crate::spatial::likelihood::{CovParams, Distances};
use faer::{Mat, Side};
use serde::Serialize;

/// Above this smooth share a driver and the residual field are said not to
/// be distinguishable with this layout (our choice).
pub const INDISTINGUISHABLE_SHARE: f64 = 0.9;

/// The smooth share of one driver.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct SmoothShare {
    /// The driver.
    pub driver: String,
    /// Fraction of its variance (free of the base design) in the leading eigenvectors.
    pub share: f64,
    /// The fraction a direction without spatial pattern would have, `K / n`.
    pub expected_without_pattern: f64,
    /// Number of leading eigenvectors `K`.
    pub eigenvectors: usize,
    /// The error model whose correlation was used.
    pub correlation_model: String,
    /// `share >= INDISTINGUISHABLE_SHARE`.
    pub indistinguishable: bool,
}

/// The leading eigenvectors of the correlation `params` over `dist` (the
/// fewest holding half of its trace), as an `n x K` matrix.
pub fn leading_eigenvectors(dist: &Distances, params: &CovParams) -> Option<Mat<f64>> {
    let n = dist.len();
    let r = dist.correlation_lower(params.family, params.range);
    let eig = r.self_adjoint_eigen(Side::Lower).ok()?;
    let lambda: Vec<f64> = eig.S().column_vector().iter().copied().collect();
    let mut order: Vec<usize> = (0..n).collect();
    order.sort_by(|&a, &b| lambda[b].total_cmp(&lambda[a]));
    let total: f64 = lambda.iter().map(|l| l.max(0.0)).sum();
    let mut acc = 0.0;
    let mut k = 0;
    while k < n && acc < total / 2.0 {
        acc += lambda[order[k]].max(0.0);
        k += 1;
    }
    let u = eig.U();
    Some(Mat::from_fn(n, k, |i, j| u[(i, order[j])]))
}

/// The smooth share of each driver in `drivers` against the correlation
/// `params` (named `model`), with the base design's columns `base` removed
/// from each driver first.
pub fn smooth_shares(
    dist: &Distances,
    params: &CovParams,
    model: &str,
    base: &[Vec<f64>],
    drivers: &[(String, Vec<f64>)],
) -> Vec<SmoothShare> {
    let n = dist.len();
    let Some(u) = leading_eigenvectors(dist, params) else {
        return Vec::new();
    };
    let k = u.ncols();
    drivers
        .iter()
        .filter_map(|(name, v)| {
            let ls = least_squares(base, v).ok()?;
            let resid: Vec<f64> = (0..n)
                .map(|i| v[i] - base.iter().zip(&ls.beta).map(|(c, b)| c[i] * b).sum::<f64>())
                .collect();
            let norm: f64 = resid.iter().map(|r| r * r).sum();
            if norm.is_nan() || norm <= 0.0 {
                return None;
            }
            let inside: f64 = (0..k).map(|j| (0..n).map(|i| u[(i, j)] * resid[i]).sum::<f64>().powi(2)).sum();
            let share = inside / norm;
            Some(SmoothShare {
                driver: name.clone(),
                share,
                expected_without_pattern: k as f64 / n as f64,
                eigenvectors: k,
                correlation_model: model.to_string(),
                indistinguishable: share >= INDISTINGUISHABLE_SHARE,
            })
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::testdata::fixture;
    use crate::spatial::correlation::Family;
    use approx::assert_relative_eq;

    /// Against tests/reference/small_sample.py (numpy's eigh on the same
    /// bench, exponential correlation with range 0.6 m): K and the smooth
    /// shares of the smooth draught and of a checkerboard driver.
    #[test]
    fn smooth_shares_match_numpy() {
        let data = crate::model::testdata::model_data(
            "small_sample.csv",
            "trait",
            &["line"],
            &["draught"],
            Some(("x", "y")),
            &[],
        );
        let dist = Distances::from_coords(&data.x, &data.y).unwrap();
        let fx = fixture("small_sample.json");
        let want = &fx["smooth_share"];
        let params =
            CovParams { family: Family::Exponential, range: want["range"].as_f64().unwrap(), eta: 0.0 };
        let n = data.response.len();
        let base = vec![vec![1.0; n]];
        let checker: Vec<f64> = (0..n).map(|i| if (i % 7 + i / 7) % 2 == 0 { 1.0 } else { -1.0 }).collect();
        let drivers =
            vec![("draught".to_string(), data.drivers[0].1.clone()), ("checker".to_string(), checker)];
        let s = smooth_shares(&dist, &params, "m", &base, &drivers);
        assert_eq!(s[0].eigenvectors as u64, want["k"].as_u64().unwrap());
        assert_relative_eq!(s[0].share, want["draught"].as_f64().unwrap(), max_relative = 1e-9);
        assert_relative_eq!(s[1].share, want["checker"].as_f64().unwrap(), max_relative = 1e-9);
        assert!(s[0].share > s[1].share);
    }
}
