//! Experimental variograms (Matheron and Cressie–Hawkins estimators,
//! omnidirectional and directional, single time or pooled over time steps),
//! variogram models with a nugget, and their fitting by Cressie's (1985)
//! weighted least squares. Conventions: `docs/spatial.md`. The variogram
//! pooled over time steps, with the trend removed at each step, is in
//! [`super::variogram_pooled`] (re-exported here).
//!
//! A model is `gamma(h) = c0 + c (1 - rho(h; a))` for `h > 0`, `gamma(0) = 0`,
//! with `c0` the nugget, `c` the partial sill, `c0 + c` the sill and `a` the
//! range parameter of the [`Family`] (see [`crate::spatial::correlation`]).

use super::correlation::Family;
use super::error::{Result, SpatialError};
use super::geometry::{PointTree, Points};
use super::optimise::{Budget, Simplex, Stop, nelder_mead_restarted};

pub use super::variogram_pooled::{Detrend, pooled};

/// The estimator of the semivariance in a lag bin.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Estimator {
    /// Matheron (1962): `gamma(h) = 1/(2 N) sum (z_i - z_j)^2`.
    Matheron,
    /// Cressie & Hawkins (1980): `2 gamma(h) = [mean |z_i - z_j|^(1/2)]^4 /
    /// (0.457 + 0.494 / N)` (Cressie 1993, eq. 2.4.12).
    CressieHawkins,
}

impl Estimator {
    /// `matheron` or `cressie_hawkins`.
    pub fn name(&self) -> &'static str {
        match self {
            Estimator::Matheron => "matheron",
            Estimator::CressieHawkins => "cressie_hawkins",
        }
    }
}

/// A direction for a directional variogram: pairs whose separation vector
/// makes an angle within `tolerance_deg` of `angle_deg` (degrees,
/// anticlockwise from the x axis, taken modulo 180 since a pair has no sign).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Direction {
    /// Central angle, degrees from the x axis.
    pub angle_deg: f64,
    /// Half-width of the angular window, degrees (0 < tol <= 90).
    pub tolerance_deg: f64,
}

impl Direction {
    /// True when the separation `(dx, dy)` falls in this direction's window.
    pub fn contains(&self, dx: f64, dy: f64) -> bool {
        let ang = dy.atan2(dx).to_degrees().rem_euclid(180.0);
        let diff = (ang - self.angle_deg.rem_euclid(180.0)).abs();
        diff.min(180.0 - diff) <= self.tolerance_deg + 1e-12
    }
}

/// Lag bins: `edges[k] < d <= edges[k+1]`, with `edges[0] >= 0`. A pair at
/// distance zero (duplicate positions) is never counted, since `gamma(0) = 0`
/// by definition.
#[derive(Clone, Debug, PartialEq)]
pub struct Bins {
    /// Increasing bin edges in metres.
    pub edges: Vec<f64>,
}

impl Bins {
    /// Bins from user edges; they must be finite, non-negative and strictly
    /// increasing, at least two of them.
    pub fn from_edges(edges: Vec<f64>) -> Result<Bins> {
        let ok = edges.len() >= 2
            && edges.iter().all(|e| e.is_finite() && *e >= 0.0)
            && edges.windows(2).all(|w| w[0] < w[1]);
        if !ok {
            return Err(SpatialError::BadInput {
                what: "variogram bin edges".into(),
                message: format!(
                    "{edges:?} must be at least two finite, non-negative, strictly increasing distances"
                ),
            });
        }
        Ok(Bins { edges })
    }

    /// `n` equal-width bins from 0 to `max_lag`.
    pub fn equal(max_lag: f64, n: usize) -> Result<Bins> {
        if !(max_lag.is_finite() && max_lag > 0.0) || n == 0 {
            return Err(SpatialError::BadInput {
                what: "variogram bins".into(),
                message: format!(
                    "need max_lag > 0 and at least one bin, got max_lag = {max_lag}, bins = {n}"
                ),
            });
        }
        Bins::from_edges((0..=n).map(|k| max_lag * k as f64 / n as f64).collect())
    }

    /// The default bins (common practice, Journel & Huijbregts 1978, from
    /// memory): lags up to half the largest inter-point distance, in up to 12
    /// equal bins, fewer when there are few pairs so that a bin holds about 30
    /// pairs on average (at least 4 bins).
    pub fn default_for(points: &Points) -> Result<Bins> {
        let dmax = points.max_distance();
        let n = points.len();
        let pairs_within = (n * n.saturating_sub(1) / 2) as f64 * 0.6;
        let nb = ((pairs_within / 30.0).floor() as usize).clamp(4, 12);
        Bins::equal(dmax / 2.0, nb)
    }

    /// The largest lag.
    pub fn max_lag(&self) -> f64 {
        *self.edges.last().expect("at least two edges")
    }

    /// Number of bins.
    pub fn len(&self) -> usize {
        self.edges.len() - 1
    }

    /// True when there are no bins (never, for a constructed value).
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// The bin of distance `d`, if any.
    pub fn bin_of(&self, d: f64) -> Option<usize> {
        if d <= self.edges[0] || d > self.max_lag() || d <= 0.0 {
            return None;
        }
        // first edge >= d, minus one
        let k = self.edges.partition_point(|e| *e < d);
        Some(k - 1)
    }
}

/// One bin of an experimental variogram.
#[derive(Clone, Debug, PartialEq)]
pub struct VariogramBin {
    /// Lower edge (exclusive), metres.
    pub from: f64,
    /// Upper edge (inclusive), metres.
    pub to: f64,
    /// Mean distance of the pairs in the bin (the bin's lag), metres; for a
    /// pooled variogram the mean over all contributing pairs and steps.
    pub lag: f64,
    /// Estimated semivariance; `None` when the bin holds no pair.
    pub semivariance: Option<f64>,
    /// Number of pairs (for a pooled variogram: the mean number per
    /// contributing time step, rounded).
    pub pairs: usize,
    /// Time steps that contributed (1 for a single-time variogram).
    pub steps: usize,
}

/// An experimental variogram.
#[derive(Clone, Debug, PartialEq)]
pub struct Empirical {
    /// The bins, in order of lag.
    pub bins: Vec<VariogramBin>,
    /// The estimator used.
    pub estimator: Estimator,
    /// The direction, `None` for omnidirectional.
    pub direction: Option<Direction>,
}

/// All pairs `(i, j, d)`, `i < j`, of points at distance `0 < d <= max_lag`,
/// found with a k-d tree (kiddo): cost O(n log n + pairs) instead of the
/// O(n^2) of all pairs.
pub fn pairs_within(points: &Points, max_lag: f64) -> Vec<(u32, u32, f64)> {
    let n = points.len();
    if n < 2 {
        return Vec::new();
    }
    let Some(tree) = PointTree::new(&points.x, &points.y) else {
        return brute_pairs(points, max_lag);
    };
    // A hair of slack on the squared radius so that a pair exactly at the
    // maximum lag is found; the exact test below decides.
    let r2 = max_lag * max_lag * (1.0 + 1e-12);
    let mut out = Vec::new();
    for i in 0..n {
        for j in tree.within(points.x[i], points.y[i], r2) {
            if j > i {
                let d = points.dist_to(i, points, j);
                if d > 0.0 && d <= max_lag {
                    out.push((i as u32, j as u32, d));
                }
            }
        }
    }
    out.sort_unstable_by_key(|a| (a.0, a.1));
    out
}

fn brute_pairs(points: &Points, max_lag: f64) -> Vec<(u32, u32, f64)> {
    let mut out = Vec::new();
    for i in 0..points.len() {
        for j in i + 1..points.len() {
            let d = points.dist_to(i, points, j);
            if d > 0.0 && d <= max_lag {
                out.push((i as u32, j as u32, d));
            }
        }
    }
    out
}

/// Accumulates one time step's pairs into per-bin sums.
#[derive(Clone, Default)]
pub(super) struct BinAcc {
    pub(super) n: usize,
    pub(super) sum_d: f64,
    pub(super) sum_sq: f64,
    pub(super) sum_root: f64,
}

pub(super) fn finish(acc: &BinAcc, est: Estimator) -> Option<f64> {
    if acc.n == 0 {
        return None;
    }
    let n = acc.n as f64;
    Some(match est {
        Estimator::Matheron => acc.sum_sq / (2.0 * n),
        Estimator::CressieHawkins => 0.5 * (acc.sum_root / n).powi(4) / (0.457 + 0.494 / n),
    })
}

/// Experimental variogram of `values` at `points` (NaN values are left out,
/// with the points they belong to). Cost O(n log n + pairs within the maximum
/// lag).
pub fn experimental(
    points: &Points,
    values: &[f64],
    bins: &Bins,
    estimator: Estimator,
    direction: Option<Direction>,
) -> Result<Empirical> {
    if values.len() != points.len() {
        return Err(SpatialError::BadInput {
            what: "variogram values".into(),
            message: format!("{} values for {} points", values.len(), points.len()),
        });
    }
    let pairs = pairs_within(points, bins.max_lag());
    let mut acc = vec![BinAcc::default(); bins.len()];
    for &(i, j, d) in &pairs {
        let (i, j) = (i as usize, j as usize);
        let (zi, zj) = (values[i], values[j]);
        if !(zi.is_finite() && zj.is_finite()) {
            continue;
        }
        if let Some(dir) = direction
            && !dir.contains(points.x[j] - points.x[i], points.y[j] - points.y[i])
        {
            continue;
        }
        if let Some(k) = bins.bin_of(d) {
            let diff = zi - zj;
            let a = &mut acc[k];
            a.n += 1;
            a.sum_d += d;
            a.sum_sq += diff * diff;
            a.sum_root += diff.abs().sqrt();
        }
    }
    let out = acc
        .iter()
        .enumerate()
        .map(|(k, a)| VariogramBin {
            from: bins.edges[k],
            to: bins.edges[k + 1],
            lag: if a.n > 0 { a.sum_d / a.n as f64 } else { 0.5 * (bins.edges[k] + bins.edges[k + 1]) },
            semivariance: finish(a, estimator),
            pairs: a.n,
            steps: usize::from(a.n > 0),
        })
        .collect();
    Ok(Empirical { bins: out, estimator, direction })
}

/// A variogram model: nugget plus a correlation family.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct VariogramModel {
    /// The correlation family.
    pub family: Family,
    /// Nugget `c0 >= 0` (units of the variable, squared).
    pub nugget: f64,
    /// Partial sill `c > 0`.
    pub partial_sill: f64,
    /// Range parameter `a > 0`, metres (not the practical range).
    pub range: f64,
}

impl VariogramModel {
    /// `gamma(h) = c0 + c (1 - rho(h; a))` for `h > 0`, and 0 at `h = 0`.
    pub fn semivariance(&self, h: f64) -> f64 {
        if h <= 0.0 {
            0.0
        } else {
            self.nugget + self.partial_sill * (1.0 - self.family.correlation(h, self.range))
        }
    }

    /// Covariance `C(h) = c rho(h; a)` for `h > 0` and `C(0) = c0 + c`: the
    /// nugget is micro-scale variation (see `docs/spatial.md`). Distances up
    /// to [`super::geometry::DUPLICATE_TOLERANCE`] count as zero.
    #[inline]
    pub fn covariance(&self, h: f64) -> f64 {
        if h <= super::geometry::DUPLICATE_TOLERANCE {
            self.nugget + self.partial_sill
        } else {
            self.partial_sill * self.family.correlation(h, self.range)
        }
    }

    /// Covariance between two *different* sensors at distance `h`:
    /// `c rho(h; a)`, without the nugget even at `h = 0` (two loggers at one
    /// position have independent micro-scale and measurement parts).
    #[inline]
    pub fn cross_covariance(&self, h: f64) -> f64 {
        self.partial_sill * self.family.correlation(h, self.range)
    }

    /// The model at `n + 1` evenly spaced lags `h_k = k · max_lag / n`,
    /// `k = 0 ..= n`, as `[h, gamma(h)]` pairs (a curve to draw over the
    /// empirical bins). Cost O(n).
    pub fn curve(&self, max_lag: f64, n: usize) -> Vec<[f64; 2]> {
        let n = n.max(1);
        (0..=n).map(|k| max_lag * k as f64 / n as f64).map(|h| [h, self.semivariance(h)]).collect()
    }

    /// The sill `c0 + c`.
    pub fn sill(&self) -> f64 {
        self.nugget + self.partial_sill
    }

    /// The practical range: where `gamma` reaches `c0 + 0.95 c`.
    pub fn practical_range(&self) -> f64 {
        self.family.practical_range(self.range)
    }

    /// The same shape with every variance multiplied by `k > 0`: kriging
    /// weights are unchanged, variances scale by `k`.
    pub fn scaled(&self, k: f64) -> VariogramModel {
        VariogramModel { nugget: self.nugget * k, partial_sill: self.partial_sill * k, ..*self }
    }
}

/// Options of the weighted least-squares fit.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct FitOptions {
    /// Fit a nugget (else it is fixed at 0).
    pub fit_nugget: bool,
    /// Bounds of the range parameter in metres; default
    /// `[0.02 h_max, 5 h_max]` with `h_max` the largest bin lag (common
    /// practice).
    pub range_bounds: Option<(f64, f64)>,
}

impl Default for FitOptions {
    fn default() -> Self {
        FitOptions { fit_nugget: true, range_bounds: None }
    }
}

/// A fitted model and its criterion.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct VariogramFit {
    /// The fitted model.
    pub model: VariogramModel,
    /// Cressie's criterion at the optimum, `sum N_j (g_j / gamma(h_j) - 1)^2`.
    pub criterion: f64,
    /// Bins with data that entered the fit.
    pub bins_used: usize,
    /// True when a parameter sits on a bound (within 0.1 % of its width).
    pub on_bound: bool,
}

/// Cressie's (1985) weighted least-squares criterion of `model` against the
/// non-empty bins: `W = sum_j N_j [g_j / gamma(h_j) - 1]^2`, `N_j` the pair
/// count, `h_j` the bin's mean lag (Cressie 1985, *Math. Geol.* 17: 563–586).
pub fn cressie_criterion(emp: &Empirical, model: &VariogramModel) -> f64 {
    emp.bins
        .iter()
        .filter_map(|b| b.semivariance.map(|g| (b, g)))
        .map(|(b, g)| {
            let m = model.semivariance(b.lag);
            if m <= 0.0 {
                return f64::INFINITY;
            }
            b.pairs as f64 * (g / m - 1.0).powi(2)
        })
        .sum()
}

/// Fit `family` to `emp` by minimising [`cressie_criterion`] under bounds
/// (nugget in `[0, 2 g_max]`, partial sill in `[1e-9 g_max, 10 g_max]`,
/// range as in [`FitOptions`]), by Nelder–Mead (Nelder & Mead 1965,
/// *Computer J.* 7: 308–313) from 21 starts (range 0.05, 0.1, 0.25, 0.5, 1, 2
/// and 4 times `h_max`; nugget 0, 10 % or 30 % of the plateau). Returns `None` when fewer than
/// three bins hold pairs, or all semivariances are zero.
pub fn fit_wls(emp: &Empirical, family: Family, opts: &FitOptions) -> Option<VariogramFit> {
    let used: Vec<&VariogramBin> =
        emp.bins.iter().filter(|b| b.semivariance.is_some() && b.pairs > 0).collect();
    if used.len() < 3 {
        return None;
    }
    let gmax = used.iter().map(|b| b.semivariance.unwrap()).fold(0.0, f64::max);
    if gmax <= 0.0 {
        return None;
    }
    let hmax = used.iter().map(|b| b.lag).fold(0.0, f64::max);
    let (amin, amax) = opts.range_bounds.unwrap_or((0.02 * hmax, 5.0 * hmax));
    let lo = [amin.ln(), 0.0, 1e-9];
    let hi = [amax.ln(), if opts.fit_nugget { 2.0 } else { 0.0 }, 10.0];
    let clamp = |p: &[f64]| -> [f64; 3] {
        [p[0].clamp(lo[0], hi[0]), p[1].clamp(lo[1], hi[1]), p[2].clamp(lo[2], hi[2])]
    };
    let model_of = |q: [f64; 3]| VariogramModel {
        family,
        range: q[0].exp(),
        nugget: q[1] * gmax,
        partial_sill: q[2] * gmax,
    };
    let f = |p: &[f64]| cressie_criterion(emp, &model_of(clamp(p)));
    let k = used.len();
    let plateau = used[k.saturating_sub(3)..].iter().map(|b| b.semivariance.unwrap()).sum::<f64>()
        / (k - k.saturating_sub(3)) as f64
        / gmax;
    let mut best: Option<([f64; 3], f64)> = None;
    for &ra in &[0.05, 0.1, 0.25, 0.5, 1.0, 2.0, 4.0] {
        for &nf in &[0.0, 0.1, 0.3] {
            if nf > 0.0 && !opts.fit_nugget {
                continue;
            }
            let x0 = clamp(&[(ra * hmax).ln(), nf * plateau, (1.0 - nf) * plateau]);
            let scale = [0.5, 0.1 * plateau.max(0.05), 0.2 * plateau.max(0.05)];
            let (x, fx) = nelder_mead_restarted(
                &mut |p: &[f64]| f(p),
                &x0,
                &Simplex {
                    step: &scale,
                    bounds: None,
                    stop: Stop::Relative { tol: 1e-12 },
                    budget: Budget::Iterations(3000),
                },
                1e-12,
                4,
            );
            let x = clamp(&x);
            if best.is_none_or(|(_, fb)| fx < fb) {
                best = Some((x, fx));
            }
        }
    }
    let (x, fx) = best?;
    if !fx.is_finite() {
        return None;
    }
    let near = |v: f64, l: f64, h: f64| h > l && ((v - l) / (h - l) < 1e-3 || (h - v) / (h - l) < 1e-3);
    let on_bound =
        near(x[0], lo[0], hi[0]) || (opts.fit_nugget && near(x[1], lo[1], hi[1])) || near(x[2], lo[2], hi[2]);
    Some(VariogramFit { model: model_of(x), criterion: fx, bins_used: k, on_bound })
}

/// Fit every family in `families`; `None` for a family that cannot be fitted.
pub fn fit_families(
    emp: &Empirical,
    families: &[Family],
    opts: &FitOptions,
) -> Vec<(Family, Option<VariogramFit>)> {
    families.iter().map(|&fam| (fam, fit_wls(emp, fam, opts))).collect()
}

/// The family with the smallest criterion among the fitted ones.
pub fn best_fit(fits: &[(Family, Option<VariogramFit>)]) -> Option<VariogramFit> {
    fits.iter().filter_map(|(_, f)| *f).min_by(|a, b| a.criterion.total_cmp(&b.criterion))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::spatial::kriging::testdata::{fixture, nums, pts, topo};
    use approx::assert_relative_eq;
    use nalgebra::DMatrix;
    use rand::{RngExt, SeedableRng};
    use rand_chacha::ChaCha8Rng;
    use rand_distr::StandardNormal;

    fn random_points(n: usize, seed: u64) -> (Points, Vec<f64>) {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let xy: Vec<[f64; 2]> =
            (0..n).map(|_| [rng.random::<f64>() * 30.0, rng.random::<f64>() * 10.0]).collect();
        let v = (0..n).map(|i| xy[i][0] * 0.1 + rng.sample::<f64, _>(StandardNormal)).collect();
        (pts(&xy), v)
    }

    /// The k-d tree pair search finds exactly the pairs of a direct all-pairs
    /// scan, on 3,000 points.
    #[test]
    fn kd_tree_pairs_equal_all_pairs() {
        let (p, _) = random_points(3000, 7);
        let a = pairs_within(&p, 1.5);
        let b = brute_pairs(&p, 1.5);
        assert_eq!(a.len(), b.len());
        assert!(a.iter().zip(&b).all(|(x, y)| x.0 == y.0 && x.1 == y.1 && x.2 == y.2));
    }

    /// The experimental variogram equals a direct all-pairs computation
    /// written out here, omnidirectional and directional, both estimators.
    #[test]
    fn experimental_equals_direct_all_pairs() {
        let (p, v) = random_points(400, 11);
        let bins = Bins::from_edges(vec![0.3, 1.0, 2.5, 4.0, 7.5]).unwrap();
        for dir in [None, Some(Direction { angle_deg: 120.0, tolerance_deg: 30.0 })] {
            for est in [Estimator::Matheron, Estimator::CressieHawkins] {
                let e = experimental(&p, &v, &bins, est, dir).unwrap();
                for (k, b) in e.bins.iter().enumerate() {
                    let (lo, hi) = (bins.edges[k], bins.edges[k + 1]);
                    let (mut n, mut sq, mut rt, mut sd) = (0usize, 0.0, 0.0, 0.0);
                    for i in 0..p.len() {
                        for j in i + 1..p.len() {
                            let (dx, dy) = (p.x[j] - p.x[i], p.y[j] - p.y[i]);
                            let d = (dx * dx + dy * dy).sqrt();
                            let ang = dy.atan2(dx).to_degrees().rem_euclid(180.0);
                            let diff = (ang - 120.0).abs();
                            if d > lo && d <= hi && (dir.is_none() || diff.min(180.0 - diff) <= 30.0) {
                                n += 1;
                                sq += (v[i] - v[j]).powi(2);
                                rt += (v[i] - v[j]).abs().sqrt();
                                sd += d;
                            }
                        }
                    }
                    assert_eq!(b.pairs, n);
                    let want = match est {
                        Estimator::Matheron => sq / (2.0 * n as f64),
                        Estimator::CressieHawkins => {
                            0.5 * (rt / n as f64).powi(4) / (0.457 + 0.494 / n as f64)
                        }
                    };
                    assert_relative_eq!(b.semivariance.unwrap(), want, max_relative = 1e-12);
                    assert_relative_eq!(b.lag, sd / n as f64, max_relative = 1e-12);
                }
            }
        }
    }

    /// MASS topo against numpy all pairs (tests/reference/spatial.py):
    /// omnidirectional and 45° ± 22.5°, Matheron and Cressie–Hawkins.
    #[test]
    fn topo_variogram_matches_numpy() {
        let (p, z) = topo();
        let f = fixture();
        let bins = Bins::from_edges(nums(&f["edges"])).unwrap();
        for (key, dir) in
            [("omni", None), ("dir45", Some(Direction { angle_deg: 45.0, tolerance_deg: 22.5 }))]
        {
            for est in [Estimator::Matheron, Estimator::CressieHawkins] {
                let e = experimental(&p, &z, &bins, est, dir).unwrap();
                for (b, w) in e.bins.iter().zip(f[key].as_array().unwrap()) {
                    assert_eq!(b.pairs as u64, w["pairs"].as_u64().unwrap());
                    if b.pairs > 0 {
                        assert_relative_eq!(
                            b.semivariance.unwrap(),
                            w[est.name()].as_f64().unwrap(),
                            max_relative = 1e-12
                        );
                        assert_relative_eq!(b.lag, w["lag"].as_f64().unwrap(), max_relative = 1e-12);
                    }
                }
            }
        }
    }

    /// Cressie–Hawkins bias correction (../REFERENCE.md §4.2): with N = 5
    /// independent Gaussian increments of variance 2 gamma per bin, the
    /// corrected estimator is unbiased (the Monte Carlo ratio there is 0.5552
    /// against 0.457 + 0.494/5 = 0.5558), while dividing by 0.457 alone would
    /// overestimate by about 0.5558 / 0.457 = 1.216.
    #[test]
    fn cressie_hawkins_bias_correction() {
        // five far-apart pairs at distance 1: one bin with exactly 5 pairs
        let mut xy = Vec::new();
        for k in 0..5 {
            xy.push([100.0 * k as f64, 0.0]);
            xy.push([100.0 * k as f64 + 1.0, 0.0]);
        }
        let p = pts(&xy);
        let bins = Bins::from_edges(vec![0.0, 1.5]).unwrap();
        let mut rng = ChaCha8Rng::seed_from_u64(3);
        let reps = 40_000;
        let (mut ch, mut raw) = (0.0, 0.0);
        for _ in 0..reps {
            let v: Vec<f64> = (0..10).map(|_| rng.sample::<f64, _>(StandardNormal)).collect(); // gamma = 1
            let e = experimental(&p, &v, &bins, Estimator::CressieHawkins, None).unwrap();
            assert_eq!(e.bins[0].pairs, 5);
            let g = e.bins[0].semivariance.unwrap();
            ch += g;
            raw += g * (0.457 + 0.494 / 5.0) / 0.457;
        }
        let (ch, raw) = (ch / reps as f64, raw / reps as f64);
        assert!((ch - 1.0).abs() < 0.02, "corrected mean {ch}");
        assert!((raw - 1.216).abs() < 0.03, "uncorrected mean {raw}");
    }

    /// A pooled variogram of a fixed field plus a different constant at each
    /// step (removed by the per-step mean) equals the single-time variogram;
    /// missing values drop only their own pairs.
    #[test]
    fn pooled_removes_step_means() {
        let (p, v) = random_points(40, 5);
        let bins = Bins::equal(10.0, 5).unwrap();
        let single = experimental(&p, &v, &bins, Estimator::Matheron, None).unwrap();
        let series = DMatrix::from_fn(30, 40, |t, j| v[j] + 3.0 * t as f64 - 7.0);
        let pooled_v = pooled(&p, &series, &bins, Estimator::Matheron, None, &Detrend::Mean).unwrap();
        for (a, b) in single.bins.iter().zip(&pooled_v.bins) {
            assert_relative_eq!(a.semivariance.unwrap(), b.semivariance.unwrap(), max_relative = 1e-9);
            assert_eq!(a.pairs, b.pairs);
            assert_eq!(b.steps, 30);
        }
        // A plane added per step is removed by Detrend::Plane.
        let plane = DMatrix::from_fn(30, 40, |t, j| v[j] + t as f64 * (0.3 * p.x[j] - 0.2 * p.y[j]));
        let a = pooled(&p, &plane, &bins, Estimator::Matheron, None, &Detrend::Plane).unwrap();
        let b = pooled(
            &p,
            &DMatrix::from_fn(30, 40, |_, j| v[j]),
            &bins,
            Estimator::Matheron,
            None,
            &Detrend::Plane,
        )
        .unwrap();
        for (x, y) in a.bins.iter().zip(&b.bins) {
            assert_relative_eq!(x.semivariance.unwrap(), y.semivariance.unwrap(), max_relative = 1e-8);
        }
    }

    /// A model's own semivariances are fitted back exactly (criterion 0).
    #[test]
    fn fit_recovers_exact_model() {
        let truth = VariogramModel { family: Family::Spherical, nugget: 0.2, partial_sill: 1.3, range: 4.0 };
        let bins: Vec<VariogramBin> = (1..=12)
            .map(|k| {
                let h = 0.5 * k as f64;
                VariogramBin {
                    from: h - 0.25,
                    to: h + 0.25,
                    lag: h,
                    semivariance: Some(truth.semivariance(h)),
                    pairs: 40 + k,
                    steps: 1,
                }
            })
            .collect();
        let e = Empirical { bins, estimator: Estimator::Matheron, direction: None };
        let f = fit_wls(&e, Family::Spherical, &FitOptions::default()).unwrap();
        assert!(f.criterion < 1e-12, "{}", f.criterion);
        assert_relative_eq!(f.model.range, 4.0, max_relative = 1e-4);
        assert_relative_eq!(f.model.nugget, 0.2, max_relative = 1e-4);
        assert_relative_eq!(f.model.partial_sill, 1.3, max_relative = 1e-4);
    }

    /// Cressie WLS on the topo Matheron variogram against scipy.optimize
    /// (L-BFGS-B then Nelder–Mead from 300 starts, same criterion and bounds;
    /// tests/reference/spatial.py): our criterion is no worse than scipy's,
    /// and the parameters agree.
    #[test]
    fn wls_fit_matches_scipy() {
        let (p, z) = topo();
        let f = fixture();
        let bins = Bins::from_edges(nums(&f["edges"])).unwrap();
        let e = experimental(&p, &z, &bins, Estimator::Matheron, None).unwrap();
        for fam in ["exponential", "gaussian", "spherical", "matern_1.5"] {
            let want = &f["wls_fits"][fam];
            let got = fit_wls(&e, Family::parse(fam).unwrap(), &FitOptions::default()).unwrap();
            let wc = want["criterion"].as_f64().unwrap();
            assert!(got.criterion <= wc * (1.0 + 1e-6) + 1e-12, "{fam}: {} vs scipy {wc}", got.criterion);
            assert_relative_eq!(got.criterion, wc, max_relative = 1e-4, epsilon = 1e-9);
            let sill = want["nugget"].as_f64().unwrap() + want["partial_sill"].as_f64().unwrap();
            assert_relative_eq!(got.model.range, want["range"].as_f64().unwrap(), max_relative = 1e-3);
            assert!(
                (got.model.nugget - want["nugget"].as_f64().unwrap()).abs() < 1e-3 * sill,
                "{fam} nugget"
            );
            assert_relative_eq!(got.model.sill(), sill, max_relative = 1e-3);
        }
    }

    #[test]
    fn bins_and_directions() {
        assert!(Bins::from_edges(vec![1.0, 1.0]).is_err());
        assert!(Bins::equal(f64::NAN, 3).is_err());
        let b = Bins::equal(4.0, 4).unwrap();
        assert_eq!(b.bin_of(1.0), Some(0));
        assert_eq!(b.bin_of(1.0001), Some(1));
        assert_eq!(b.bin_of(4.0), Some(3));
        assert_eq!(b.bin_of(0.0), None);
        assert_eq!(b.bin_of(4.1), None);
        let d = Direction { angle_deg: 0.0, tolerance_deg: 10.0 };
        assert!(d.contains(-1.0, 0.05) && d.contains(1.0, -0.05) && !d.contains(0.0, 1.0));
    }
}

/// A variogram model fitted by maximum likelihood on the data themselves.
#[derive(Clone, Debug, PartialEq)]
pub struct MlFit {
    /// The model: `nugget = sigma² eta`, `partial_sill = sigma² (1 - eta)`.
    pub model: VariogramModel,
    /// The maximised ML log-likelihood (all constants), constant mean.
    pub loglik: f64,
    /// Likelihood evaluations used.
    pub evaluations: usize,
    /// Bounds the estimate sits on (`range_lower`, `range_upper`, `nugget_zero`, `nugget_upper`).
    pub at_bounds: Vec<&'static str>,
}

/// Fit `family` to `values` at `points` by maximum likelihood with a constant
/// mean: `z ~ N(mu 1, sigma² [(1 - eta) R(d; range) + eta I])`, with mu and
/// sigma² profiled out, by the shared likelihood engine
/// ([`super::likelihood::maximise`]; Patterson & Thompson 1971 and Harville
/// 1977 for the likelihood, REFERENCE.md §5.1). `fit_nugget = false` fixes
/// `eta = 0`. Non-finite values are left out. `None` when fewer than three
/// values remain or the engine fails (e.g. all points at one position).
pub fn fit_ml(points: &Points, values: &[f64], family: Family, fit_nugget: bool) -> Option<MlFit> {
    use super::likelihood::{Distances, LikelihoodKind, SearchOptions, maximise};
    let keep: Vec<usize> = (0..values.len().min(points.len())).filter(|&i| values[i].is_finite()).collect();
    if keep.len() < 3 {
        return None;
    }
    let x: Vec<f64> = keep.iter().map(|&i| points.x[i]).collect();
    let y: Vec<f64> = keep.iter().map(|&i| points.y[i]).collect();
    let z: Vec<f64> = keep.iter().map(|&i| values[i]).collect();
    let dist = Distances::from_coords(&x, &y).ok()?;
    let ones = vec![vec![1.0; z.len()]];
    let opts = SearchOptions { nugget: fit_nugget, ..SearchOptions::default() };
    let m = maximise(&dist, family, &ones, &z, LikelihoodKind::Ml, &opts).ok()?;
    let p = &m.best;
    Some(MlFit {
        model: VariogramModel {
            family,
            nugget: p.sigma2 * p.params.eta,
            partial_sill: p.sigma2 * (1.0 - p.params.eta),
            range: p.params.range,
        },
        loglik: p.loglik,
        evaluations: m.evaluations,
        at_bounds: m.at_bounds,
    })
}

#[cfg(test)]
mod ml_tests {
    use super::*;

    /// ../shared/CROSSCHECKS.md §4 (own numpy/scipy reference, checked there
    /// against statsmodels GLS and scikit-learn): MASS topo, z ~ 1,
    /// exponential, ML: range 6.12135275, nugget share 0 (on the bound),
    /// sigma² 4087.5937, log-likelihood -244.60061435; Gaussian ML: range
    /// 1.65822409, nugget share 0.03234512, sigma² 2927.2610, l = -243.60365738.
    #[test]
    fn ml_fit_matches_the_reference_optimum_on_topo() {
        let path = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/reference/data/topo.csv");
        let mut r = csv::Reader::from_path(path).unwrap();
        let h = r.headers().unwrap().clone();
        let col = |n: &str| h.iter().position(|c| c == n).unwrap();
        let (cx, cy, cz) = (col("x"), col("y"), col("z"));
        let (mut x, mut y, mut z) = (vec![], vec![], vec![]);
        for rec in r.records() {
            let rec = rec.unwrap();
            x.push(rec[cx].parse::<f64>().unwrap());
            y.push(rec[cy].parse::<f64>().unwrap());
            z.push(rec[cz].parse::<f64>().unwrap());
        }
        let ids = (0..x.len()).map(|i| i.to_string()).collect();
        let pts = Points::new("sensor", ids, x, y, None, &super::super::geometry::Origin::default()).unwrap();
        let f = fit_ml(&pts, &z, Family::Exponential, true).unwrap();
        assert!((f.loglik - -244.60061435).abs() < 1e-3, "{f:?}");
        assert!((f.model.range - 6.12135275).abs() / 6.12135275 < 1e-2, "{f:?}");
        assert!(f.model.nugget / f.model.sill() < 1e-3, "{f:?}");
        assert!((f.model.sill() - 4087.5937).abs() / 4087.5937 < 1e-2, "{f:?}");
        let g = fit_ml(&pts, &z, Family::Gaussian, true).unwrap();
        assert!((g.loglik - -243.60365738).abs() < 1e-3, "{g:?}");
        assert!((g.model.range - 1.65822409).abs() / 1.65822409 < 1e-2, "{g:?}");
        assert!((g.model.nugget / g.model.sill() - 0.03234512).abs() < 2e-3, "{g:?}");
        assert!(fit_ml(&pts, &z[..2], Family::Gaussian, true).is_none());
    }
}
