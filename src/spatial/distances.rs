//! What the residual correlation of the observations is computed over: their
//! pairwise distances (from planar coordinates, or a given matrix), or for
//! pots that move the positions they held and their time shares
//! ([`super::averaged`]). Owns the structured correlation matrix `R` of a
//! family over them, the pairs that make it singular without a nugget
//! (found by sorting the positions, not by a loop over every pair), and the
//! sample of pair distances that sets the search's range bounds (its pairs
//! visited directly: `O(sample)` time, not `O(n^2)`).

use super::correlation::Family;
use super::covariance::{CovParams, Kernel};
use super::likelihood::LikelihoodError;
use faer::Mat;

/// Up to this many observations [`Distances::keep_pairs`] keeps the pairwise
/// distances (at 5,000 about 100 MB, half the dense covariance itself).
pub const PAIRS_KEPT_UP_TO: usize = 5_000;

/// The kept pairwise distances of [`Distances::Coords`] (strict lower
/// triangle, column by column), empty until [`Distances::keep_pairs`]; and
/// the sorted sample of [`Distances::positive_sample`] once asked for (every
/// search from a known start, a bootstrap's refits among them, needs its
/// bounds: sorting 114,960 pairs per refit cost 4 % of a power study).
#[derive(Clone, Default)]
pub struct PairCache(std::sync::OnceLock<KeptPairs>, std::sync::OnceLock<Vec<f64>>);

/// How the pairwise distances are kept: every value, or, when few distinct
/// distances repeat (pots on a regular grid), the distinct values and each
/// pair's index into them, so that a function of the distance is computed
/// once per distinct value ([`Distances::fill_pairs`]).
#[derive(Clone)]
enum KeptPairs {
    Each(Vec<f64>),
    Distinct { values: Vec<f64>, index: Vec<u32> },
}

/// The distinct-value form is kept when every distinct distance is shared by
/// this many pairs on average or more (a regular layout of 480 pots has
/// 114,960 pairs at a few thousand distances).
const PAIRS_PER_DISTINCT: usize = 8;

impl KeptPairs {
    /// Every pair's distance, then the distinct form if it pays. Distinct
    /// means bit-identical (`to_bits`), so every value read back is the
    /// computed one.
    fn new(d: Vec<f64>) -> KeptPairs {
        let limit = d.len() / PAIRS_PER_DISTINCT;
        let mut seen: std::collections::HashMap<u64, u32> = std::collections::HashMap::new();
        let mut values = Vec::new();
        let mut index = Vec::with_capacity(d.len());
        for &v in &d {
            let k = *seen.entry(v.to_bits()).or_insert_with(|| {
                values.push(v);
                (values.len() - 1) as u32
            });
            if values.len() > limit {
                return KeptPairs::Each(d);
            }
            index.push(k);
        }
        KeptPairs::Distinct { values, index }
    }

    fn get(&self, k: usize) -> f64 {
        match self {
            KeptPairs::Each(d) => d[k],
            KeptPairs::Distinct { values, index } => values[index[k] as usize],
        }
    }
}

impl std::fmt::Debug for PairCache {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self.0.get() {
            Some(KeptPairs::Each(p)) => write!(f, "{} pair distances kept", p.len()),
            Some(KeptPairs::Distinct { values, index }) => {
                write!(f, "{} pair distances kept, {} distinct", index.len(), values.len())
            }
            None => write!(f, "pair distances not kept"),
        }
    }
}

/// Position of the pair `(i, j)`, `i > j`, of `n` points in the strict lower
/// triangle stored column by column.
#[inline]
fn packed_index(n: usize, i: usize, j: usize) -> usize {
    j * (2 * n - j - 1) / 2 + (i - j - 1)
}

/// Distances between `n` observations: computed from planar coordinates on
/// the fly, or given as a full symmetric matrix; or, for pots that move, the
/// positions they held and their time shares, whose correlation is
/// `W R W'` ([`super::averaged`]) rather than a function of one distance.
#[derive(Clone, Debug)]
pub enum Distances {
    /// Planar coordinates in metres; distances are Euclidean.
    Coords {
        /// Easting.
        x: Vec<f64>,
        /// Northing.
        y: Vec<f64>,
        /// The pairwise distances, once [`Distances::keep_pairs`] has
        /// computed them.
        pairs: PairCache,
    },
    /// A full `n x n` symmetric distance matrix, row-major.
    Matrix {
        /// Number of observations.
        n: usize,
        /// `n * n` distances.
        d: Vec<f64>,
    },
    /// Pots that move: their correlation is the time-share-weighted average
    /// of the correlations between the positions they held.
    Averaged(super::averaged::PathShares),
}

impl Distances {
    /// Distances from coordinates.
    pub fn from_coords(x: &[f64], y: &[f64]) -> Result<Distances, LikelihoodError> {
        if x.len() != y.len() {
            return Err(LikelihoodError::Invalid("x and y differ in length".into()));
        }
        if x.iter().chain(y).any(|v| !v.is_finite()) {
            return Err(LikelihoodError::Invalid("a coordinate is not finite".into()));
        }
        Ok(Distances::Coords { x: x.to_vec(), y: y.to_vec(), pairs: PairCache::default() })
    }

    /// Distances from a full row-major matrix (checked: square, symmetric,
    /// zero diagonal, finite and non-negative).
    pub fn from_matrix(n: usize, d: Vec<f64>) -> Result<Distances, LikelihoodError> {
        if d.len() != n * n {
            return Err(LikelihoodError::Invalid(format!(
                "a {n} x {n} distance matrix needs {} values",
                n * n
            )));
        }
        for i in 0..n {
            for j in 0..n {
                let v = d[i * n + j];
                if !(v.is_finite() && v >= 0.0)
                    || (i == j && v != 0.0)
                    || (v - d[j * n + i]).abs() > 1e-12 * v.max(1.0)
                {
                    return Err(LikelihoodError::Invalid(format!("distance [{i}, {j}] = {v} is not valid")));
                }
            }
        }
        Ok(Distances::Matrix { n, d })
    }

    /// The planar coordinates, when the distances were made from them.
    pub fn coords(&self) -> Option<(&[f64], &[f64])> {
        match self {
            Distances::Coords { x, y, .. } => Some((x, y)),
            Distances::Matrix { .. } | Distances::Averaged(_) => None,
        }
    }

    /// Number of observations.
    pub fn len(&self) -> usize {
        match self {
            Distances::Coords { x, .. } => x.len(),
            Distances::Matrix { n, .. } => *n,
            Distances::Averaged(a) => a.len(),
        }
    }

    /// True when there are no observations.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// Distance between observations `i` and `j` (for pots that move, the
    /// time-share-weighted mean distance, [`super::averaged::PathShares::mean_distance`]:
    /// their correlation is not a function of it, see [`Distances::correlation_lower`]).
    #[inline]
    pub fn get(&self, i: usize, j: usize) -> f64 {
        match self {
            Distances::Coords { x, y, pairs } => match pairs.0.get() {
                Some(p) if i != j => p.get(packed_index(x.len(), i.max(j), i.min(j))),
                _ => super::geometry::distance(x[i], y[i], x[j], y[j]),
            },
            Distances::Matrix { n, d } => d[i * n + j],
            Distances::Averaged(a) => a.mean_distance(i, j),
        }
    }

    /// Keep the pairwise distances of coordinates in memory (`n (n - 1) / 2`
    /// values, up to [`PAIRS_KEPT_UP_TO`] observations) so that every later
    /// fill of a correlation matrix reads them instead of computing them:
    /// the same values ([`super::geometry::distance`]), computed once. The
    /// exact likelihood's searches call it; a no-op for other kinds and
    /// above the limit (the nearest-neighbour path never fills `n x n`).
    pub fn keep_pairs(&self) {
        if let Distances::Coords { x, y, pairs } = self
            && x.len() <= PAIRS_KEPT_UP_TO
        {
            pairs.0.get_or_init(|| {
                let n = x.len();
                let mut p = Vec::with_capacity(n * n.saturating_sub(1) / 2);
                for j in 0..n {
                    for i in j + 1..n {
                        p.push(super::geometry::distance(x[i], y[i], x[j], y[j]));
                    }
                }
                KeptPairs::new(p)
            });
        }
    }

    /// Fill the strict lower triangle of the `n x n` matrix `m` with
    /// `f(d_ij)`, in parallel over column blocks. With the kept distances
    /// in their distinct form `f` is computed once per distinct distance
    /// and the values gathered (the same numbers: the same `f` of the same
    /// distances); `false` (nothing filled) otherwise.
    pub fn fill_pairs_distinct(&self, m: &mut Mat<f64>, f: impl Fn(f64) -> f64) -> bool {
        let Distances::Coords { pairs, .. } = self else { return false };
        let Some(KeptPairs::Distinct { values, index }) = pairs.0.get() else { return false };
        let n = m.nrows();
        debug_assert_eq!(n, self.len(), "a fill of {n} rows over {} observations", self.len());
        let table: Vec<f64> = values.iter().map(|&d| f(d)).collect();
        super::covariance::fill_lower_columns(m, |j, col| {
            if j + 1 >= n {
                return;
            }
            let at = &index[packed_index(n, j + 1, j)..][..n - j - 1];
            for (c, &k) in col[j + 1..].iter_mut().zip(at) {
                *c = table[k as usize];
            }
        });
        true
    }

    /// Fill the strict lower triangle of `m` with `f(d_ij)`: from the
    /// distinct kept distances when there are ([`Distances::fill_pairs_distinct`]),
    /// else pair by pair. For distances, not pots that move.
    pub fn fill_pairs(&self, m: &mut Mat<f64>, f: impl Fn(f64) -> f64 + Sync) {
        if !self.fill_pairs_distinct(m, &f) {
            super::covariance::fill_lower_columns(m, |j, col| {
                for (i, c) in col.iter_mut().enumerate().skip(j + 1) {
                    *c = f(self.get(i, j));
                }
            });
        }
    }

    /// The lower triangle with the diagonal of the matrix of `kernel` over
    /// the observations (`total` on the diagonal, `between(d_ij)` below),
    /// by [`Distances::fill_pairs`]. For distances, not pots that move.
    pub fn kernel_lower(&self, kernel: &Kernel) -> Mat<f64> {
        let n = self.len();
        let mut m = Mat::<f64>::zeros(n, n);
        for i in 0..n {
            m[(i, i)] = kernel.total;
        }
        self.fill_pairs(&mut m, |d| kernel.between(d));
        m
    }

    /// The structured correlation `R` of the observations for `family` at
    /// `range` (no nugget): `rho(d_ij)` with 1 on the diagonal, or `W R W'`
    /// for pots that move (below 1 on the diagonal of a pot that moved).
    /// The lower triangle with the diagonal is filled (the upper may be
    /// zero): what [`crate::spatial::factor::Cholesky`] and faer's
    /// eigendecompositions with `Side::Lower` read.
    pub fn correlation_lower(&self, family: Family, range: f64) -> Mat<f64> {
        match self {
            Distances::Averaged(a) => a.structured(family, range),
            _ => self.kernel_lower(&Kernel::correlation(&CovParams { family, range, eta: 0.0 })),
        }
    }

    /// Why the correlation matrix can be singular without a nugget, when it
    /// can: pots at one position, or pots that move (pots that take turns at
    /// the same places have linearly dependent rows of `W`, so `W R W'` is
    /// singular; a nugget, each pot's own part, keeps `V` positive definite).
    pub fn singular_without_nugget(&self) -> Option<String> {
        if matches!(self, Distances::Averaged(_)) {
            return Some(
                "the pots move, and the correlation along paths that share places can be singular".into(),
            );
        }
        let k = self.coincident().len();
        (k > 0).then(|| {
            format!("{k} pair(s) of pots share a position and the correlation matrix would be singular")
        })
    }

    /// Pairs `(i, j)`, `i < j`, at distance zero (coincident positions; for
    /// pots that move, the same time shares of the same positions).
    pub fn coincident(&self) -> Vec<(usize, usize)> {
        if let Distances::Averaged(a) = self {
            return a.identical();
        }
        if let Distances::Coords { x, y, .. } = self {
            return coincident_positions(x, y);
        }
        let n = self.len();
        let mut out = Vec::new();
        for j in 0..n {
            for i in 0..j {
                if self.get(i, j) == 0.0 {
                    out.push((i, j));
                }
            }
        }
        out
    }

    /// Sorted positive pairwise distances; for more than 200,000 pairs a
    /// deterministic systematic subsample of about 200,000 pairs. For pots
    /// that move, those between the positions they held (the range is a
    /// property of the field over the positions).
    pub fn positive_sample(&self) -> Vec<f64> {
        match self {
            Distances::Averaged(a) => a.positions().positive_sample(),
            Distances::Coords { pairs, .. } => pairs.1.get_or_init(|| self.sample_pairs()).clone(),
            Distances::Matrix { .. } => self.sample_pairs(),
        }
    }

    /// [`Distances::positive_sample`] computed.
    fn sample_pairs(&self) -> Vec<f64> {
        let n = self.len();
        let pairs = n * n.saturating_sub(1) / 2;
        let stride = pairs.div_ceil(200_000).max(1);
        let mut out = Vec::with_capacity(pairs / stride + 1);
        // pair k = j (j - 1) / 2 + i (i < j, the order j then i): every
        // stride-th k is visited directly, O(pairs / stride) time
        let mut j = 1usize;
        for k in (0..pairs).step_by(stride) {
            while (j + 1) * j / 2 <= k {
                j += 1;
            }
            let i = k - j * (j - 1) / 2;
            let d = self.get(i, j);
            if d > 0.0 {
                out.push(d);
            }
        }
        out.sort_by(f64::total_cmp);
        out
    }
}

/// Pairs `(i, j)`, `i < j`, of equal positions, in the order `j` then `i`:
/// the points sorted by position and each run of equal ones paired, `O(n log n)`
/// plus the pairs.
fn coincident_positions(x: &[f64], y: &[f64]) -> Vec<(usize, usize)> {
    let mut idx: Vec<usize> = (0..x.len()).collect();
    idx.sort_by(|&a, &b| x[a].total_cmp(&x[b]).then(y[a].total_cmp(&y[b])).then(a.cmp(&b)));
    let mut out = Vec::new();
    let mut start = 0;
    while start < idx.len() {
        let (a, b) = (x[idx[start]], y[idx[start]]);
        let mut end = start + 1;
        // == rather than total_cmp: 0.0 and -0.0 are one position
        while end < idx.len() && x[idx[end]] == a && y[idx[end]] == b {
            end += 1;
        }
        // by index: -0.0 sorts before 0.0 inside one position
        let mut run = idx[start..end].to_vec();
        run.sort_unstable();
        for (t, &j) in run.iter().enumerate() {
            out.extend(run[..t].iter().map(|&i| (i, j)));
        }
        start = end;
    }
    out.sort_by_key(|&(i, j)| (j, i));
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Kept pair distances are the computed ones, bit for bit, in both
    /// orders of a pair, and every pair is at its packed position.
    #[test]
    fn kept_pairs_equal_the_computed_distances() {
        let n = 37;
        let x: Vec<f64> = (0..n).map(|i| ((i * 7) % 11) as f64 * 0.3 + 0.01 * i as f64).collect();
        let y: Vec<f64> = (0..n).map(|i| ((i * 5) % 13) as f64 * 0.2).collect();
        let fresh = Distances::from_coords(&x, &y).unwrap();
        let kept = Distances::from_coords(&x, &y).unwrap();
        kept.keep_pairs();
        assert!(format!("{kept:?}").contains("666 pair distances kept"));
        for i in 0..n {
            for j in 0..n {
                assert_eq!(kept.get(i, j).to_bits(), fresh.get(i, j).to_bits(), "pair ({i}, {j})");
            }
        }
    }

    /// Pots on a grid (and a few pots sharing a position): the pairs are
    /// kept as distinct distances with an index, every distance read back
    /// bit for bit as computed, and a function filled through the distinct
    /// values equals the same function pair by pair; an irregular layout
    /// keeps every value and fills pair by pair.
    #[test]
    fn distinct_pair_distances_fill_as_the_pairs_do() {
        let (nx, ny) = (24, 20);
        let mut x: Vec<f64> = (0..nx * ny).map(|i| (i % nx) as f64 * 0.35).collect();
        let mut y: Vec<f64> = (0..nx * ny).map(|i| (i / nx) as f64 * 0.6).collect();
        x.extend([0.35, 1.05]);
        y.extend([0.0, 1.2]);
        let n = x.len();
        let fresh = Distances::from_coords(&x, &y).unwrap();
        let kept = Distances::from_coords(&x, &y).unwrap();
        kept.keep_pairs();
        let said = format!(
            "{:?}",
            PairCache(
                match &kept {
                    Distances::Coords { pairs, .. } => pairs.0.clone(),
                    _ => unreachable!("made from coordinates"),
                },
                Default::default()
            )
        );
        let distinct: usize =
            said.split(", ").nth(1).and_then(|t| t.split(' ').next()?.parse().ok()).unwrap();
        assert!(
            said.starts_with(&format!("{} pair distances kept", n * (n - 1) / 2)) && distinct < 2000,
            "{said}"
        );
        let f = |d: f64| (-d / 1.7).exp() * (1.0 + d);
        let mut by_table = Mat::<f64>::zeros(n, n);
        assert!(kept.fill_pairs_distinct(&mut by_table, f));
        for i in 0..n {
            for j in 0..n {
                assert_eq!(kept.get(i, j).to_bits(), fresh.get(i, j).to_bits(), "pair ({i}, {j})");
                let want = if i > j { f(fresh.get(i, j)) } else { 0.0 };
                assert_eq!(by_table[(i, j)].to_bits(), want.to_bits(), "pair ({i}, {j})");
            }
        }
        let mut plain = Mat::<f64>::zeros(n, n);
        fresh.fill_pairs(&mut plain, f);
        assert_eq!(plain, by_table);
        // irregular: every distance its own, no distinct form
        let xr: Vec<f64> = (0..200).map(|i| (i as f64 * 0.618_034).fract() * 11.3).collect();
        let yr: Vec<f64> = (0..200).map(|i| (i as f64 * i as f64 * 0.414_214).fract() * 7.9).collect();
        let irregular = Distances::from_coords(&xr, &yr).unwrap();
        irregular.keep_pairs();
        assert!(!format!("{irregular:?}").contains("distinct"), "{irregular:?}");
        assert!(!irregular.fill_pairs_distinct(&mut Mat::<f64>::zeros(200, 200), f));
    }

    /// The sorted pairing of equal positions and the strided pair sample
    /// equal the loops over every pair (by the definition).
    #[test]
    fn coincident_pairs_and_pair_sample_equal_the_pair_loops() {
        let n = 700; // 244,650 pairs: a stride of 2
        let x: Vec<f64> = (0..n).map(|i| ((i * 7) % 23) as f64 * 0.5).collect();
        let y: Vec<f64> =
            (0..n).map(|i| if i % 5 == 0 { -0.0 } else { ((i * 3) % 31) as f64 * 0.25 }).collect();
        let d = Distances::from_coords(&x, &y).unwrap();
        let mut brute = Vec::new();
        for j in 0..n {
            for i in 0..j {
                if d.get(i, j) == 0.0 {
                    brute.push((i, j));
                }
            }
        }
        assert!(brute.len() > 100);
        assert_eq!(d.coincident(), brute);
        let pairs = n * (n - 1) / 2;
        let stride = pairs.div_ceil(200_000);
        assert_eq!(stride, 2);
        let mut want = Vec::new();
        let mut k = 0usize;
        for j in 0..n {
            for i in 0..j {
                if k.is_multiple_of(stride) && d.get(i, j) > 0.0 {
                    want.push(d.get(i, j));
                }
                k += 1;
            }
        }
        want.sort_by(f64::total_cmp);
        assert_eq!(d.positive_sample(), want);
    }
}
