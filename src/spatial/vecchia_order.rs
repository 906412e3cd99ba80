//! The ordering and the conditioning sets of the Vecchia approximation
//! ([`super::vecchia`]): the max-min distance ordering of the observations
//! and, for each observation, its `m` nearest observations among those
//! ordered before it.
//!
//! # Max-min ordering (Guinness 2018, *Technometrics* 60: 415-424, §3)
//! The first observation is the one nearest the centroid of the positions;
//! each next one is the observation whose distance to the nearest already
//! ordered observation is largest (ties: the smallest index). Computed
//! exactly with a lazy max-heap of each observation's current distance to
//! the ordered set: when observation `p` is taken at distance `l_p` (the
//! largest of all), only observations closer to `p` than their current
//! distance change, and those lie within `l_p` of `p`, found by one radius
//! query of the k-d tree ([`super::geometry::PointTree`]). Cost about
//! `O(n log^2 n)` for points spread over a plane (the radius falls as
//! points are taken, so each query meets few points); memory `O(n)`.
//!
//! # Nearest previously ordered neighbours
//! Observation of rank `k` conditions on the `m` observations of rank `< k`
//! nearest to it (all of them when `k <= m`), ranked by distance and then by
//! rank (so the sets do not depend on the tree's order of ties). The tree
//! holds every observation; the previously ordered ones among the nearest
//! `K` are kept. Under the max-min ordering the `k` ordered points are
//! spread evenly, about `k/n` of any neighbourhood, so `K = 2 m n / (k + 1) + m`
//! is asked first and doubled until `m` of them are found and the farthest
//! of the `K` lies strictly beyond the `m`-th kept (no unseen point can be
//! nearer or tie; a relative margin of 1e-12 covers rounding of squared
//! against hypot distances). Where that `K` would exceed `k`, the `k` earlier points
//! are searched directly. Cost about `O(m n log n)` queries in all;
//! memory `n m` indices.
//!
//! # Distances kept
//! Every evaluation of the likelihood needs, for each rank, the distances to
//! its neighbours and among them; they do not change between evaluations.
//! When their number, `sum_k q_k (q_k + 1) / 2` for sets of size `q_k`, is at
//! most [`DISTANCE_CACHE_MAX_ENTRIES`] they are computed once here (by the
//! same [`distance`] the evaluation would call, so the values are the same
//! bits) and shared by clones; above it (full sets at a few hundred points,
//! as in the tests) each evaluation computes them again.

use super::geometry::{PointTree, distance};
use super::likelihood::LikelihoodError;
use std::cmp::Ordering;
use std::collections::BinaryHeap;
use std::sync::Arc;

/// The most distances a [`Conditioning`] keeps (8 bytes each: 128 MiB);
/// 20,000 points at `m = 30` need 9.3 million.
pub const DISTANCE_CACHE_MAX_ENTRIES: usize = 1 << 24;

/// The distances of every rank to its neighbours and among them (see the
/// module docs): rank `k` with set size `q` owns `q (q + 1) / 2` values from
/// `offsets[k]`: the `q` distances to its neighbours (in set order), then
/// the strict lower triangle among them row by row (`(a, b)`, `b < a`, at
/// `q + a (a - 1) / 2 + b`).
#[derive(Debug)]
struct DistanceCache {
    offsets: Vec<usize>,
    values: Vec<f64>,
}

/// How the conditioning set of each observation is cut from its earlier
/// neighbours ranked by distance.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum SetRule {
    /// The `m` nearest (ties at the `m`-th distance broken by rank).
    Nearest,
    /// The `m` nearest and every further earlier neighbour at the same
    /// distance as the `m`-th (relative tolerance [`RING_TOLERANCE`]), up to
    /// `cap` in all: on a regular layout the set then ends at the end of a
    /// ring of equidistant neighbours instead of cutting through it.
    WholeRings {
        /// The largest set size.
        cap: usize,
    },
}

/// Distances within this relative tolerance of the `m`-th count as the
/// same ring ([`SetRule::WholeRings`]).
pub const RING_TOLERANCE: f64 = 1e-9;

/// The max-min ordering and the conditioning sets of `n` observations.
#[derive(Clone, Debug)]
pub struct Conditioning {
    /// `order[k]` = the observation (original index) of rank `k`.
    order: Vec<usize>,
    /// Offsets into `sets`: the set of rank `k` is `sets[starts[k]..starts[k+1]]`.
    starts: Vec<usize>,
    /// Ranks of the conditioning observations, nearest first.
    sets: Vec<u32>,
    /// Positions in rank order.
    x: Vec<f64>,
    y: Vec<f64>,
    /// The set size asked for.
    m: usize,
    /// How the sets were cut.
    rule: SetRule,
    /// The neighbour distances, when kept (module docs).
    cache: Option<Arc<DistanceCache>>,
}

/// An entry of the ordering heap: an observation and its current distance
/// to the ordered set; larger distance first, then smaller index.
#[derive(Clone, Copy, PartialEq)]
struct Entry {
    d: f64,
    j: usize,
}

impl Eq for Entry {}

impl Ord for Entry {
    fn cmp(&self, other: &Self) -> Ordering {
        self.d.total_cmp(&other.d).then_with(|| other.j.cmp(&self.j))
    }
}

impl PartialOrd for Entry {
    fn partial_cmp(&self, other: &Self) -> Option<Ordering> {
        Some(self.cmp(other))
    }
}

fn check_positions(x: &[f64], y: &[f64]) -> Result<(), LikelihoodError> {
    if x.len() != y.len() {
        return Err(LikelihoodError::Invalid("x and y differ in length".into()));
    }
    if x.is_empty() {
        return Err(LikelihoodError::Invalid("no observations to order".into()));
    }
    if x.len() > u32::MAX as usize {
        return Err(LikelihoodError::Invalid(format!("{} observations are too many to order", x.len())));
    }
    if x.iter().chain(y).any(|v| !v.is_finite()) {
        return Err(LikelihoodError::Invalid("a coordinate is not finite".into()));
    }
    Ok(())
}

fn tree(x: &[f64], y: &[f64]) -> Result<PointTree, LikelihoodError> {
    PointTree::new(x, y).ok_or_else(|| LikelihoodError::Invalid("the positions cannot be indexed".into()))
}

/// The max-min distance ordering of the points `(x[i], y[i])` (see the
/// module docs): `order[k]` is the original index of rank `k`.
pub fn maxmin_order(x: &[f64], y: &[f64]) -> Result<Vec<usize>, LikelihoodError> {
    check_positions(x, y)?;
    let n = x.len();
    let (cx, cy) = (x.iter().sum::<f64>() / n as f64, y.iter().sum::<f64>() / n as f64);
    let first = (0..n)
        .min_by(|&a, &b| distance(x[a], y[a], cx, cy).total_cmp(&distance(x[b], y[b], cx, cy)))
        .expect("n >= 1");
    let tree = tree(x, y)?;
    let mut order = Vec::with_capacity(n);
    let mut taken = vec![false; n];
    let mut dmin: Vec<f64> = (0..n).map(|j| distance(x[j], y[j], x[first], y[first])).collect();
    taken[first] = true;
    order.push(first);
    let mut heap: BinaryHeap<Entry> =
        (0..n).filter(|&j| j != first).map(|j| Entry { d: dmin[j], j }).collect();
    while let Some(Entry { d, j: p }) = heap.pop() {
        // stale entries: taken, or their distance has fallen since they were pushed
        if taken[p] || d.to_bits() != dmin[p].to_bits() {
            continue;
        }
        taken[p] = true;
        order.push(p);
        if d > 0.0 {
            // a relative margin so that no point at distance just below d is
            // lost to rounding of squared against hypot distances
            let r = d * (1.0 + 1e-9);
            for j in tree.within(x[p], y[p], r * r) {
                if !taken[j] {
                    let dj = distance(x[j], y[j], x[p], y[p]);
                    if dj < dmin[j] {
                        dmin[j] = dj;
                        heap.push(Entry { d: dj, j });
                    }
                }
            }
        }
    }
    debug_assert_eq!(order.len(), n);
    Ok(order)
}

impl Conditioning {
    /// The max-min ordering of `(x, y)` and the `m` nearest previously
    /// ordered observations of each (see the module docs). `m >= 1`.
    pub fn new(x: &[f64], y: &[f64], m: usize) -> Result<Conditioning, LikelihoodError> {
        Self::with_rule(x, y, m, SetRule::Nearest)
    }

    /// [`Conditioning::new`] with the sets cut by `rule`. `m >= 1`, and a
    /// ring cap at least `m`.
    pub fn with_rule(x: &[f64], y: &[f64], m: usize, rule: SetRule) -> Result<Conditioning, LikelihoodError> {
        if m == 0 {
            return Err(LikelihoodError::Invalid("the number of neighbours must be at least 1".into()));
        }
        let cap = match rule {
            SetRule::Nearest => m,
            SetRule::WholeRings { cap } if cap >= m => cap,
            SetRule::WholeRings { cap } => {
                return Err(LikelihoodError::Invalid(format!(
                    "the ring cap ({cap}) must be at least the number of neighbours ({m})"
                )));
            }
        };
        // the search below must see every point within this factor of the m-th distance
        let reach = if cap > m { 1.0 + RING_TOLERANCE } else { 1.0 };
        let order = maxmin_order(x, y)?;
        let n = x.len();
        let xs: Vec<f64> = order.iter().map(|&i| x[i]).collect();
        let ys: Vec<f64> = order.iter().map(|&i| y[i]).collect();
        let mut rank = vec![0usize; n];
        for (k, &i) in order.iter().enumerate() {
            rank[i] = k;
        }
        let tree = tree(x, y)?;
        let mut starts = Vec::with_capacity(n + 1);
        let mut sets: Vec<u32> = Vec::with_capacity(n * m.min(n));
        starts.push(0);
        let mut cand: Vec<(f64, usize)> = Vec::new();
        for k in 0..n {
            let want = m.min(k);
            cand.clear();
            let guess = 2 * m * n / (k + 1) + m;
            if want == k || guess >= k {
                cand.extend((0..k).map(|r| (distance(xs[k], ys[k], xs[r], ys[r]), r)));
            } else {
                let mut kq = guess.min(n);
                loop {
                    let found = tree.nearest(xs[k], ys[k], kq);
                    cand.clear();
                    let mut farthest = 0.0f64;
                    for &(i, _) in &found {
                        let d = distance(xs[k], ys[k], x[i], y[i]);
                        farthest = farthest.max(d);
                        if rank[i] < k {
                            cand.push((d, rank[i]));
                        }
                    }
                    cand.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
                    if kq >= n || (cand.len() >= want && cand[want - 1].0 * reach < farthest * (1.0 - 1e-12))
                    {
                        break;
                    }
                    kq = (2 * kq).min(n);
                }
            }
            cand.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
            if cand.len() > want {
                let mut keep = want;
                if want > 0 {
                    let ring = cand[want - 1].0 * reach;
                    while keep < cand.len().min(cap) && cand[keep].0 <= ring {
                        keep += 1;
                    }
                }
                cand.truncate(keep);
            }
            sets.extend(cand.iter().map(|&(_, r)| r as u32));
            starts.push(sets.len());
        }
        Ok(Conditioning { order, starts, sets, x: xs, y: ys, m, rule, cache: None }.with_distance_cache())
    }

    /// How the sets were cut.
    pub fn rule(&self) -> SetRule {
        self.rule
    }

    /// Keep the neighbour distances when there are at most
    /// [`DISTANCE_CACHE_MAX_ENTRIES`] of them (module docs).
    fn with_distance_cache(mut self) -> Conditioning {
        let n = self.len();
        let total: usize = (0..n).map(|k| self.set(k).len()).map(|q| q * (q + 1) / 2).sum();
        if total > DISTANCE_CACHE_MAX_ENTRIES {
            return self;
        }
        let mut offsets = Vec::with_capacity(n + 1);
        let mut values = Vec::with_capacity(total);
        for k in 0..n {
            offsets.push(values.len());
            let set = self.set(k);
            let (xk, yk) = self.position(k);
            values.extend(set.iter().map(|&r| distance(xk, yk, self.x[r as usize], self.y[r as usize])));
            for a in 0..set.len() {
                let (xa, ya) = self.position(set[a] as usize);
                for &r in &set[..a] {
                    values.push(distance(xa, ya, self.x[r as usize], self.y[r as usize]));
                }
            }
        }
        offsets.push(values.len());
        self.cache = Some(Arc::new(DistanceCache { offsets, values }));
        self
    }

    /// The same conditioning without its kept distances: every evaluation
    /// computes them again (for tests and benchmarks of the cache).
    pub fn without_distance_cache(mut self) -> Conditioning {
        self.cache = None;
        self
    }

    /// True when the neighbour distances are kept.
    pub fn keeps_distances(&self) -> bool {
        self.cache.is_some()
    }

    /// The kept distances of rank `k` (module docs: `q` to its neighbours,
    /// then the strict lower triangle among them), if kept.
    #[inline]
    pub(super) fn distances(&self, k: usize) -> Option<&[f64]> {
        self.cache.as_ref().map(|c| &c.values[c.offsets[k]..c.offsets[k + 1]])
    }

    /// A conditioning given explicitly (`order[k]` the original index of rank
    /// `k`, `sets[k]` the ranks `k` conditions on, each below `k`), checked.
    /// For tests against an independent computation with the same sets.
    pub fn from_parts(
        x: &[f64],
        y: &[f64],
        order: Vec<usize>,
        sets: &[Vec<usize>],
    ) -> Result<Conditioning, LikelihoodError> {
        check_positions(x, y)?;
        let n = x.len();
        let mut seen = vec![false; n];
        if order.len() != n
            || sets.len() != n
            || order.iter().any(|&i| i >= n || std::mem::replace(&mut seen[i], true))
        {
            return Err(LikelihoodError::Invalid(
                "the order must be a permutation of the observations".into(),
            ));
        }
        let mut starts = vec![0];
        let mut flat = Vec::new();
        for (k, s) in sets.iter().enumerate() {
            if s.iter().any(|&r| r >= k) {
                return Err(LikelihoodError::Invalid(format!(
                    "rank {k} may condition on earlier ranks only"
                )));
            }
            flat.extend(s.iter().map(|&r| r as u32));
            starts.push(flat.len());
        }
        let m = sets.iter().map(Vec::len).max().unwrap_or(0);
        let xs = order.iter().map(|&i| x[i]).collect();
        let ys = order.iter().map(|&i| y[i]).collect();
        Ok(Conditioning { order, starts, sets: flat, x: xs, y: ys, m, rule: SetRule::Nearest, cache: None }
            .with_distance_cache())
    }

    /// Number of observations.
    pub fn len(&self) -> usize {
        self.order.len()
    }

    /// Always false: a conditioning holds at least one observation.
    pub fn is_empty(&self) -> bool {
        self.order.is_empty()
    }

    /// The number of neighbours asked for (the largest set size, except
    /// under [`SetRule::WholeRings`], whose sets may reach its cap).
    pub fn m(&self) -> usize {
        self.m
    }

    /// `order()[k]`: the original index of rank `k`.
    pub fn order(&self) -> &[usize] {
        &self.order
    }

    /// The ranks that rank `k` conditions on, nearest first.
    pub fn set(&self, k: usize) -> &[u32] {
        &self.sets[self.starts[k]..self.starts[k + 1]]
    }

    /// Position of rank `k`.
    #[inline]
    pub(super) fn position(&self, k: usize) -> (f64, f64) {
        (self.x[k], self.y[k])
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::{RngExt, SeedableRng};
    use rand_chacha::ChaCha8Rng;

    /// Brute force by the definition: `O(n^2)` ordering, all earlier ranks sorted.
    fn brute(x: &[f64], y: &[f64], m: usize) -> (Vec<usize>, Vec<Vec<usize>>) {
        let n = x.len();
        let (cx, cy) = (x.iter().sum::<f64>() / n as f64, y.iter().sum::<f64>() / n as f64);
        let first = (0..n)
            .min_by(|&a, &b| distance(x[a], y[a], cx, cy).total_cmp(&distance(x[b], y[b], cx, cy)))
            .unwrap();
        let mut order = vec![first];
        let mut dmin: Vec<f64> = (0..n).map(|j| distance(x[j], y[j], x[first], y[first])).collect();
        dmin[first] = f64::NEG_INFINITY;
        for _ in 1..n {
            let mut p = 0;
            for j in 0..n {
                if dmin[j] > dmin[p] {
                    p = j;
                }
            }
            order.push(p);
            for j in 0..n {
                if dmin[j] != f64::NEG_INFINITY {
                    dmin[j] = dmin[j].min(distance(x[j], y[j], x[p], y[p]));
                }
            }
            dmin[p] = f64::NEG_INFINITY;
        }
        let sets = (0..n)
            .map(|k| {
                let i = order[k];
                let mut c: Vec<(f64, usize)> =
                    (0..k).map(|r| (distance(x[i], y[i], x[order[r]], y[order[r]]), r)).collect();
                c.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
                c.into_iter().take(m).map(|(_, r)| r).collect()
            })
            .collect();
        (order, sets)
    }

    fn check_against_brute(x: &[f64], y: &[f64], m: usize) {
        let c = Conditioning::new(x, y, m).unwrap();
        let (order, sets) = brute(x, y, m);
        assert_eq!(c.order(), order.as_slice());
        for (k, s) in sets.iter().enumerate() {
            let got: Vec<usize> = c.set(k).iter().map(|&r| r as usize).collect();
            assert_eq!(&got, s, "rank {k}");
        }
    }

    #[test]
    fn scattered_points_match_the_definition() {
        let mut rng = ChaCha8Rng::seed_from_u64(41);
        let x: Vec<f64> = (0..700).map(|_| rng.random_range(0.0..20.0)).collect();
        let y: Vec<f64> = (0..700).map(|_| rng.random_range(0.0..8.0)).collect();
        for m in [1, 5, 30] {
            check_against_brute(&x, &y, m);
        }
    }

    /// A regular bench grid has many equal distances: ties broken by index
    /// (ordering) and by rank (sets), as the definition says.
    #[test]
    fn grid_with_ties_and_duplicates_match_the_definition() {
        let mut x: Vec<f64> = (0..300).map(|i| (i % 20) as f64 * 0.25).collect();
        let mut y: Vec<f64> = (0..300).map(|i| (i / 20) as f64 * 0.3).collect();
        // two pots at one position
        x.push(x[17]);
        y.push(y[17]);
        check_against_brute(&x, &y, 10);
        let c = Conditioning::new(&x, &y, 10).unwrap();
        // the twin comes last (distance 0 to the ordered set) and conditions on its twin first
        let last = c.len() - 1;
        assert!(c.order()[last] == 300 || c.order()[last] == 17);
        let twin = c.order()[c.set(last)[0] as usize];
        assert!(twin == 17 || twin == 300);
    }

    /// Whole rings: on a regular grid every set is the `m` nearest of the
    /// definition, extended by the earlier points at the `m`-th distance up
    /// to the cap (brute force over all earlier ranks), and never cut
    /// through a ring unless the cap does.
    #[test]
    fn whole_rings_complete_the_tie_ring_up_to_the_cap() {
        let x: Vec<f64> = (0..600).map(|i| (i % 30) as f64 * 1.0).collect();
        let y: Vec<f64> = (0..600).map(|i| (i / 30) as f64 * 1.6).collect();
        let (m, cap) = (10, 14);
        let c = Conditioning::with_rule(&x, &y, m, SetRule::WholeRings { cap }).unwrap();
        let plain = Conditioning::new(&x, &y, m).unwrap();
        assert_eq!(c.order(), plain.order());
        assert_eq!(c.rule(), SetRule::WholeRings { cap });
        let mut longer = 0;
        for k in 0..c.len() {
            let (xk, yk) = c.position(k);
            let mut all: Vec<(f64, usize)> = (0..k)
                .map(|r| {
                    let (xr, yr) = c.position(r);
                    (distance(xk, yk, xr, yr), r)
                })
                .collect();
            all.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
            let mut keep = m.min(k);
            if keep > 0 {
                let ring = all[keep - 1].0 * (1.0 + RING_TOLERANCE);
                while keep < all.len().min(cap) && all[keep].0 <= ring {
                    keep += 1;
                }
            }
            let want: Vec<u32> = all[..keep].iter().map(|&(_, r)| r as u32).collect();
            assert_eq!(c.set(k), want.as_slice(), "rank {k}");
            assert_eq!(&c.set(k)[..m.min(k)], plain.set(k), "rank {k}: the nearest come first");
            longer += usize::from(keep > m.min(k));
            if keep < cap && keep < all.len() && keep > 0 {
                assert!(all[keep].0 > all[keep - 1].0 * (1.0 + RING_TOLERANCE), "rank {k} cuts a ring");
            }
        }
        assert!(longer > 100, "only {longer} sets were extended: the test does not see rings");
        assert!(Conditioning::with_rule(&x, &y, m, SetRule::WholeRings { cap: m - 1 }).is_err());
    }

    #[test]
    fn bad_input_is_refused() {
        assert!(Conditioning::new(&[0.0, 1.0], &[0.0, 1.0], 0).is_err());
        assert!(Conditioning::new(&[], &[], 3).is_err());
        assert!(Conditioning::new(&[0.0, f64::NAN], &[0.0, 1.0], 3).is_err());
        assert!(Conditioning::from_parts(&[0.0, 1.0], &[0.0, 0.0], vec![0, 0], &[vec![], vec![0]]).is_err());
        assert!(Conditioning::from_parts(&[0.0, 1.0], &[0.0, 0.0], vec![1, 0], &[vec![], vec![1]]).is_err());
    }
}
