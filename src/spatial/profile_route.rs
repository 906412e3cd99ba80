//! The profile route for fits with a nugget, measured beside the Newton path
//! of [`super::ascent`] (`benches/gls.rs`) but not used by the fits: the
//! nugget share is removed from the search. At each range one Householder
//! tridiagonal reduction of `R` ([`crate::spatial::spectral::Tridiagonal`])
//! gives the likelihood at every share for `O(n p^2)`, so the share is
//! maximised exactly, and the range alone is searched by Brent's method
//! ([`crate::spatial::optimise::brent_min`]) between the neighbours of the
//! local maxima of the 13-range start grid of [`super::ascent`]. Why the fits
//! keep the Newton path is said in that module's docs.

use super::ascent::{SharedMaxima, failed, grid_ranges, search_box_for};
use super::correlation::Family;
use super::factor::factorisations_on_this_thread;
use super::likelihood::{
    Distances, LikelihoodError, LikelihoodKind, Maximum, Profiled, SearchBox, SearchOptions,
};
use super::optimise::{LineMinimum, brent_min};
use super::spectral::Tridiagonal;

/// The likelihood of each fixed part of `designs` maximised over the nugget
/// share in `[0, eta_max]` at the range `e^lr`: one tridiagonal reduction of
/// `R` ([`crate::spatial::spectral::Tridiagonal`]) for all of them, then the
/// exact one-dimensional maximisation of
/// [`crate::spatial::spectral::Tridiagonal::best_eta`] for each.
fn profile_at(
    dist: &Distances,
    family: Family,
    lr: f64,
    designs: &[&[Vec<f64>]],
    y: &[f64],
    method: LikelihoodKind,
    eta_max: f64,
) -> Result<Vec<Profiled>, LikelihoodError> {
    let t = Tridiagonal::new(dist, family, lr.exp(), designs, y)?;
    (0..designs.len()).map(|d| t.best_eta(d, eta_max, method)).collect()
}

/// [`super::ascent::maximise_shared`] for a fit with a nugget by the profile route: the
/// nugget share is profiled out exactly at each range (see the module docs),
/// so the search is over `ln range` alone. The start grid of the ranges is
/// reduced once per range for every fixed part (the shared factorisations,
/// each a tridiagonal reduction, returned beside the results). Measured
/// against the Newton path in `benches/gls.rs`; the fits do not use it (see
/// the module docs).
pub fn maximise_profiled(
    dist: &Distances,
    family: Family,
    designs: &[&[Vec<f64>]],
    y: &[f64],
    method: LikelihoodKind,
    opts: &SearchOptions,
) -> SharedMaxima {
    let sb = match search_box_for(dist, designs, y, &SearchOptions { nugget: true, ..opts.clone() }) {
        Ok(b) => b,
        Err(e) => return failed(designs.len(), e),
    };
    let sb = &sb;
    let ranges = grid_ranges(sb, family);
    let f0 = factorisations_on_this_thread();
    let mut grid: Vec<Vec<Option<Profiled>>> = vec![Vec::with_capacity(ranges.len()); designs.len()];
    let mut first_error: Option<LikelihoodError> = None;
    for &lr in &ranges {
        let t = Tridiagonal::new(dist, family, lr.exp(), designs, y);
        for (d, g) in grid.iter_mut().enumerate() {
            let p = match &t {
                Ok(t) => t.best_eta(d, sb.hi[1], method),
                Err(e) => Err(e.clone()),
            };
            g.push(p.map_err(|e| first_error.get_or_insert(e).clone()).ok());
        }
    }
    let shared = (factorisations_on_this_thread() - f0) as usize;
    let results = designs
        .iter()
        .zip(grid)
        .map(|(x, g)| {
            if g.iter().all(Option::is_none) {
                return Err(first_error
                    .clone()
                    .unwrap_or(LikelihoodError::Invalid("no start point has a finite likelihood".into())));
            }
            profile_refine(dist, family, x, y, method, opts, sb, &ranges, g)
        })
        .collect();
    (results, shared)
}

/// Brent's search ([`crate::spatial::optimise::brent_min`], tolerance `1e-5`
/// in `ln range`) of the nugget-profiled likelihood between the neighbours
/// of each local maximum of `grid` (the profiled values at `ranges`, in
/// increasing order; an end point's outer neighbour is the box's bound):
/// those within `start_gap` of the best, at most `starts`, best first. The
/// report of [`Maximum`]; its `evaluations` count the profiles at one range
/// (grid included), its `factorisations` the reductions made here.
#[allow(clippy::too_many_arguments)]
fn profile_refine(
    dist: &Distances,
    family: Family,
    x: &[Vec<f64>],
    y: &[f64],
    method: LikelihoodKind,
    opts: &SearchOptions,
    sb: &SearchBox,
    ranges: &[f64],
    grid: Vec<Option<Profiled>>,
) -> Result<Maximum, LikelihoodError> {
    let f0 = factorisations_on_this_thread();
    let started = std::time::Instant::now();
    let val = |k: usize| grid[k].as_ref().map_or(f64::NEG_INFINITY, |p| p.loglik);
    let nr = ranges.len();
    let Some(mut best) = grid.iter().flatten().max_by(|a, b| a.loglik.total_cmp(&b.loglik)).cloned() else {
        return Err(LikelihoodError::Invalid("no start point has a finite likelihood".into()));
    };
    let top = best.loglik;
    let mut starts: Vec<usize> = (0..nr)
        .filter(|&k| {
            let v = val(k);
            v.is_finite()
                && v >= top - opts.start_gap
                && (k == 0 || val(k - 1) <= v)
                && (k + 1 == nr || val(k + 1) <= v)
        })
        .collect();
    starts.sort_by(|&a, &b| val(b).total_cmp(&val(a)));
    starts.truncate(opts.starts.max(1));
    let mut evaluations = grid.iter().filter(|v| v.is_some()).count();
    let mut converged = true;
    let mut ends: Vec<([f64; 2], f64)> = Vec::new();
    let eta_max = sb.hi[1];
    for k in starts {
        let a = if k == 0 { sb.lo[0] } else { ranges[k - 1] };
        let b = if k + 1 == nr { sb.hi[0] } else { ranges[k + 1] };
        let eta0 = grid[k].as_ref().map_or(0.0, |p| p.params.eta);
        let mut run_best: ([f64; 2], f64) = ([ranges[k], eta0], val(k));
        let mut neg = |lr: f64| -> f64 {
            evaluations += 1;
            match profile_at(dist, family, lr, &[x], y, method, eta_max) {
                Ok(mut p) => {
                    let p = p.pop().expect("one design");
                    let v = p.loglik;
                    if v > run_best.1 {
                        run_best = ([lr, p.params.eta], v);
                    }
                    if v > best.loglik {
                        best = p;
                    }
                    -v
                }
                Err(_) => f64::INFINITY,
            }
        };
        let m = if b > a {
            brent_min(&mut neg, (a, b), Some((ranges[k], -val(k))), 1e-5, opts.max_evals.min(60))
        } else {
            LineMinimum { x: a, value: -val(k), evaluations: 0, converged: true }
        };
        converged &= m.converged;
        ends.push(run_best);
    }
    let ends: Vec<(&[f64], f64)> = ends.iter().map(|(t, v)| (&t[..], *v)).collect();
    let (other_optimum, at_bounds) = sb.outcome(&best, ends, family);
    Ok(Maximum {
        best,
        converged,
        at_bounds,
        evaluations,
        factorisations: (factorisations_on_this_thread() - f0) as usize,
        seconds: started.elapsed().as_secs_f64(),
        range_bounds: sb.range,
        other_optimum,
    })
}
