//! The derivative-based maximiser of the profiled (RE)ML likelihood of
//! [`crate::spatial::likelihood`], over `t = (ln range, eta)` (or `ln range`
//! alone without a nugget), with the start grid shared by several fixed parts.
//!
//! The scores and average information each step uses are computed by
//! [`super::ascent_scores`] (formulas in its module docs); the Newton steps
//! themselves live in `ascent_newton.rs` (a child module).
//!
//! # Search
//! 1. A coarse grid in two passes: practical ranges at the 2, 5, 10, 20, 35,
//!    50 and 75 % quantiles of the pairwise distances (the grid of
//!    [`crate::spatial::likelihood::maximise`]) and the geometric midpoints
//!    between them (13 ranges) at the nugget share 0.3; then, at each range
//!    that is a local maximum of that pass (within `start_gap` of the best,
//!    at most `starts`), the shares 0.05 and 0.6 (without a nugget, the 13
//!    ranges alone). 15 to 19 points where the full 13 x 3 grid had 39: at
//!    n = 1,680 a grid point costs as much as a Cholesky factorisation, and
//!    the grid was half of a fit. One factorisation per grid point serves
//!    every fixed part given (their columns are whitened by the same
//!    factor).
//! 2. From each local maximum of the grid (within `start_gap` of the best,
//!    at most `starts`), Newton steps `t <- t + H^-1 score`, the nugget share
//!    searched in `u = ln(eta + 0.01)` (a ridge where `eta` falls as
//!    `1 / range` is curved in `eta` and nearly straight in `u`), `H` the
//!    average information at the start of the run and then updated by BFGS
//!    from the scores of each accepted step (the average information alone
//!    misses part of the observed curvature: Newton then covers a fixed
//!    share of the way per step); projected on the box; a coordinate on its
//!    bound whose score points outwards is held there (an active set, and
//!    `H` restarts from the average information); a trial step is judged by
//!    its likelihood alone and scored only when accepted; after two full
//!    steps in nearly one direction that each gained at least 3/4 of the
//!    quadratic model's prediction (and a prediction above 1e-3), the
//!    doubled step is tried first (along the ridge the likelihood rises like
//!    an exponential tail and each Newton step covers about the same
//!    distance; once an expansion falls short, none in that run); a step that
//!    lowers the likelihood is cut (up
//!    to 12 times; the first cut goes to the top of the parabola through the
//!    likelihood at the start, its slope along the step and the rejected
//!    value, kept within [0.1, 0.5]). Stop when the Newton decrement `score' H^-1 score` is
//!    below `1e-10`, the step below `1e-9`, or two steps in a row gain less
//!    than `1e-9`.
//! 3. A run that does not meet the tolerance in 40 steps is polished by the
//!    Nelder–Mead simplex of [`crate::spatial::optimise`] from its end
//!    point, and reported as not converged if that fails too.
//!
//! The spherical family is differentiable in the range only once (its
//! derivative is continuous at `h = 1` but its curvature jumps at every
//! pair distance): on pots in a regular layout, where many pairs share a
//! distance, its likelihood surface is rough and has several close optima,
//! and Newton steps from the grid found lower maxima than the simplex on
//! the demo study (by 0.8 to 1.9 log-likelihood units). Its fits keep the
//! derivative-free search of [`crate::spatial::likelihood::maximise`]
//! (starts from its grid, Nelder–Mead, the best end restarted), with the
//! factorisations of that grid shared by the fixed parts as above; every
//! other family takes the Newton path.
//!
//! # The profile route (measured, not used by the fits)
//! [`maximise_profiled`] ([`super::profile_route`]) removes the nugget share from the search: at each
//! range one Householder tridiagonal reduction of `R`
//! ([`crate::spatial::spectral::Tridiagonal`]) gives the likelihood at every
//! share for `O(n p^2)`, so the share is maximised exactly (a 13-point scan
//! and Brent's search), and the range alone is searched by Brent's method
//! ([`crate::spatial::optimise::brent_min`]) between the neighbours of the
//! local maxima of the 13-range grid. It needs few evaluations (19 to 43 on
//! the fixtures, 24 to 43 on the benchmark) but one reduction costs 14 to 16
//! Choleskys (faer's reduction is half matrix-vector products), so on the
//! demo it took longer than the Newton path, and on the spherical family
//! its one-dimensional search ended at lower maxima than the simplex (by
//! 0.76 and 0.86 on two demo fits). `benches/gls.rs` prints both routes.
//!
//! A derivative evaluation costs about three factorisations (see
//! [`super::ascent_scores`]); a grid point or a rejected trial costs the fill
//! of `R` and one.

use super::correlation::Family;
use super::factor::factorisations_on_this_thread;
use super::likelihood::{
    CovParams, Distances, LikelihoodError, LikelihoodKind, Maximum, Profiled, SearchBox, SearchOptions,
    check_sizes, simplex_search, simplex_starts,
};
use super::optimise::{Budget, Simplex, Stop, nelder_mead};

pub use super::ascent_scores::{Point, Scored, Valued, point, scored, scores};

#[path = "ascent_newton.rs"]
mod newton_steps;
pub(super) use newton_steps::{Bounds, newton, params_of};

/// Maximise the profiled likelihood of `method` for each fixed part of
/// `designs` (columns of `X` each), all with the same `y`, distances and
/// family: the start grid is evaluated once per point for every design, then
/// each design is refined by Newton steps (see the module docs). The result
/// for each design is what [`crate::spatial::likelihood::maximise`] returns,
/// with its own evaluations and factorisations; the grid's shared
/// factorisations are returned beside (`(results, shared factorisations)`).
pub fn maximise_shared(
    dist: &Distances,
    family: Family,
    designs: &[&[Vec<f64>]],
    y: &[f64],
    method: LikelihoodKind,
    opts: &SearchOptions,
) -> SharedMaxima {
    let sb = match search_box_for(dist, designs, y, opts) {
        Ok(b) => b,
        Err(e) => return failed(designs.len(), e),
    };
    if family == Family::Spherical {
        // derivative-free (see the module docs), from starts whose
        // factorisations every design shares
        let f0 = factorisations_on_this_thread();
        let mut pre: Vec<Vec<Result<Profiled, LikelihoodError>>> = vec![Vec::new(); designs.len()];
        for t in simplex_starts(&sb, family) {
            let params = CovParams { family, range: t[0].exp(), eta: t.get(1).copied().unwrap_or(0.0) };
            let l = super::likelihood::cholesky(dist, &params);
            for (d, x) in designs.iter().enumerate() {
                pre[d].push(match &l {
                    Ok(l) => super::likelihood::profiled_with_factor(l.as_ref(), &params, x, y, method),
                    Err(e) => Err(e.clone()),
                });
            }
        }
        let shared = (factorisations_on_this_thread() - f0) as usize;
        let results = designs
            .iter()
            .zip(pre)
            .map(|(x, pre)| {
                simplex_search(dist, family, opts, Some(pre), |p| {
                    super::likelihood::profiled(dist, p, x, y, method)
                })
            })
            .collect();
        return (results, shared);
    }
    let dim = sb.dim;
    let eta_max = sb.hi[1];
    let bounds = Bounds { lo: sb.lo, hi: sb.hi, dim };
    // the nugget shares of the grid; the middle one is the first pass's
    let etas: Vec<f64> = if dim == 2 {
        vec![0.05f64.min(eta_max), 0.3f64.min(eta_max), 0.6f64.min(eta_max)]
    } else {
        vec![0.0]
    };
    let first_pass = if dim == 2 { 1 } else { 0 };
    let mut ranges = grid_ranges(&sb, family);
    // 1. the shared grid: one factorisation per point, every design whitened by it
    let f0 = factorisations_on_this_thread();
    let mut grid: Vec<Vec<Option<f64>>> = vec![vec![None; ranges.len() * etas.len()]; designs.len()];
    let mut best_grid: Vec<Option<Profiled>> = vec![None; designs.len()];
    let mut first_error: Option<LikelihoodError> = None;
    let mut evaluate = |ranges: &[f64], ri: usize, ei: usize, grid: &mut Vec<Vec<Option<f64>>>| {
        let params = CovParams { family, range: ranges[ri].exp(), eta: etas[ei] };
        let all = super::likelihood::cholesky(dist, &params).map(|l| {
            designs
                .iter()
                .map(|x| super::likelihood::profiled_with_factor(l.as_ref(), &params, x, y, method))
                .collect()
        });
        record_grid_point(ri * etas.len() + ei, all, grid, &mut best_grid, &mut first_error);
    };
    // the ranges at the middle share, then the other shares at the ranges
    // that are local maxima of that pass for some design (within
    // `start_gap` of its best, at most `starts` per design)
    for ri in 0..ranges.len() {
        evaluate(&ranges, ri, first_pass, &mut grid);
    }
    // A design whose best first-pass range is the grid's largest may have its
    // maximum beyond it (a long range with a nugget: the ridge along which the
    // nugget share falls as the range grows, docs/model.md): one more coarse
    // range, practical range 3 times the largest pair distance, and the
    // midpoint to it, so that the Newton steps start near the ridge's far end
    // instead of creeping along it (REML with a nugget at 480 pots: 15 -> 12
    // Newton evaluations for 2 more grid points; our choice, measured in
    // docs/model.md).
    let far = (3.0 * sb.sample[sb.sample.len() - 1] / family.practical_range(1.0))
        .clamp(sb.range.0, sb.range.1)
        .ln();
    let at_edge = grid.iter().any(|g| best_at_edge(&pass_values(g, ranges.len(), etas.len(), first_pass)));
    if at_edge && far > ranges[ranges.len() - 1] + 1e-9 {
        let last = ranges[ranges.len() - 1];
        for r in [0.5 * (last + far), far] {
            ranges.push(r);
            for g in grid.iter_mut() {
                g.extend(std::iter::repeat_n(None, etas.len()));
            }
            evaluate(&ranges, ranges.len() - 1, first_pass, &mut grid);
        }
    }
    if dim == 2 {
        let mut second: Vec<usize> = Vec::new();
        for g in &grid {
            let values = pass_values(g, ranges.len(), etas.len(), first_pass);
            let val = |ri: usize| values[ri];
            let top = values.iter().copied().fold(f64::NEG_INFINITY, f64::max);
            let mut local: Vec<usize> = (0..ranges.len())
                .filter(|&ri| {
                    let v = val(ri);
                    v.is_finite()
                        && v >= top - opts.start_gap
                        && (ri == 0 || val(ri - 1) <= v)
                        && (ri + 1 == ranges.len() || val(ri + 1) <= v)
                })
                .collect();
            local.sort_by(|&a, &b| val(b).total_cmp(&val(a)));
            local.truncate(opts.starts.max(1));
            second.extend(local);
        }
        second.sort_unstable();
        second.dedup();
        for ri in second {
            for ei in (0..etas.len()).filter(|&ei| ei != first_pass) {
                evaluate(&ranges, ri, ei, &mut grid);
            }
        }
    }
    let shared = (factorisations_on_this_thread() - f0) as usize;
    let results = designs
        .iter()
        .enumerate()
        .map(|(d, x)| {
            let Some(best0) = best_grid[d].take() else {
                return Err(first_error
                    .clone()
                    .unwrap_or(LikelihoodError::Invalid("no start point has a finite likelihood".into())));
            };
            refine(dist, family, x, y, method, opts, &bounds, (&ranges, &etas), &grid[d], best0)
        })
        .collect();
    (results, shared)
}

/// One fixed part's log-likelihoods at nugget share index `pass` of a grid
/// laid out range-major (`ranges x etas`), by range; `-inf` where a point
/// was not evaluated or failed.
fn pass_values(grid: &[Option<f64>], ranges: usize, etas: usize, pass: usize) -> Vec<f64> {
    (0..ranges).map(|ri| grid[ri * etas + pass].unwrap_or(f64::NEG_INFINITY)).collect()
}

/// Whether the best of `values` (a pass over the ranges in increasing order)
/// is the last one: the maximum may then lie beyond the grid's largest range.
fn best_at_edge(values: &[f64]) -> bool {
    let top = values.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    top.is_finite() && values.last().is_some_and(|&v| v >= top)
}

/// Record one grid point's evaluation for every fixed part (`all`, or the
/// error that stopped them all) at `index` of each part's grid, keeping
/// each part's best evaluation and the first error.
pub(super) fn record_grid_point(
    index: usize,
    all: Result<Vec<Result<Profiled, LikelihoodError>>, LikelihoodError>,
    grid: &mut [Vec<Option<f64>>],
    best: &mut [Option<Profiled>],
    first_error: &mut Option<LikelihoodError>,
) {
    match all {
        Ok(all) => {
            for (d, r) in all.into_iter().enumerate() {
                match r {
                    Ok(p) => {
                        grid[d][index] = Some(p.loglik);
                        if best[d].as_ref().is_none_or(|b| p.loglik > b.loglik) {
                            best[d] = Some(p);
                        }
                    }
                    Err(err) => {
                        first_error.get_or_insert(err);
                    }
                }
            }
        }
        Err(err) => {
            first_error.get_or_insert(err);
        }
    }
}

/// The start ranges of a search (in `ln range`): practical ranges at the 2,
/// 5, 10, 20, 35, 50 and 75 % quantiles of the pairwise distances and the
/// geometric midpoints between them (a basin between two quantiles still
/// shows as a local maximum of the grid), inside the box.
pub(super) fn grid_ranges(sb: &SearchBox, family: Family) -> Vec<f64> {
    let (sample, (lo, hi)) = (&sb.sample, sb.range);
    let unit = family.practical_range(1.0);
    let quantiles = [0.02, 0.05, 0.10, 0.20, 0.35, 0.50, 0.75];
    let coarse: Vec<f64> = quantiles
        .iter()
        .map(|q| (sample[((sample.len() - 1) as f64 * q).round() as usize] / unit).clamp(lo, hi).ln())
        .collect();
    let mut ranges: Vec<f64> = Vec::with_capacity(2 * coarse.len());
    for (k, &r) in coarse.iter().enumerate() {
        if k > 0 {
            ranges.push(0.5 * (coarse[k - 1] + r));
        }
        ranges.push(r);
    }
    ranges.dedup_by(|a, b| (*a - *b).abs() < 1e-12);
    ranges
}

/// The sizes of every design checked against `dist` and `y`, then the
/// search box of `opts`: what every search over several fixed parts starts
/// with.
pub(super) fn search_box_for(
    dist: &Distances,
    designs: &[&[Vec<f64>]],
    y: &[f64],
    opts: &SearchOptions,
) -> Result<SearchBox, LikelihoodError> {
    for x in designs {
        check_sizes(dist, x, y)?;
    }
    SearchBox::new(dist, opts)
}

/// The same error for each of `n` designs, no shared factorisation.
pub(super) fn failed(n: usize, e: LikelihoodError) -> SharedMaxima {
    ((0..n).map(|_| Err(e.clone())).collect(), 0)
}

/// Per design its maximum, and the shared factorisations.
pub type SharedMaxima = (Vec<Result<Maximum, LikelihoodError>>, usize);

pub use super::profile_route::maximise_profiled;

/// [`maximise_shared`] for one design from a known start instead of the
/// grid: Newton steps from `start` (then the simplex polish if they stop
/// short). For refits of a model on slightly changed data (the imputations),
/// where the previous optimum is the natural start; the bounds are those of
/// the full search.
pub fn maximise_from(
    dist: &Distances,
    start: CovParams,
    x: &[Vec<f64>],
    y: &[f64],
    method: LikelihoodKind,
    opts: &SearchOptions,
) -> Result<Maximum, LikelihoodError> {
    check_sizes(dist, x, y)?;
    let sb = SearchBox::new(dist, opts)?;
    let dim = sb.dim;
    let bounds = Bounds { lo: sb.lo, hi: sb.hi, dim };
    let mut t = [start.range.ln(), if dim == 2 { start.eta } else { 0.0 }];
    bounds.project(&mut t);
    let (f0, started) = (factorisations_on_this_thread(), std::time::Instant::now());
    // the first Newton evaluation is the start's (no separate one)
    let a = match ascend(dist, start.family, x, y, method, opts, &bounds, t) {
        Ok(a) => a,
        Err(e) => {
            // a start where V cannot be factorised: say so as the search would
            super::likelihood::profiled(dist, &params_of(start.family, &t, dim), x, y, method)?;
            return Err(e);
        }
    };
    let mut max = report(a.best, vec![a.end], &bounds, start.family, a.converged, a.evaluations, started);
    max.factorisations = (factorisations_on_this_thread() - f0) as usize;
    Ok(max)
}

/// The local maxima of one fixed part's grid (8-neighbourhood), within
/// `start_gap` of its best `top`, best first, at most `starts`.
pub(super) fn grid_starts(
    ranges: &[f64],
    etas: &[f64],
    grid: &[Option<f64>],
    top: f64,
    opts: &SearchOptions,
) -> Vec<[f64; 2]> {
    let (nr, ne) = (ranges.len(), etas.len());
    let val = |ri: usize, ei: usize| grid[ri * ne + ei].unwrap_or(f64::NEG_INFINITY);
    let mut starts: Vec<([f64; 2], f64)> = Vec::new();
    for (ri, &lr) in ranges.iter().enumerate() {
        for (ei, &e) in etas.iter().enumerate() {
            let v = val(ri, ei);
            if !v.is_finite() || v < top - opts.start_gap {
                continue;
            }
            let mut local = true;
            for dr in -1i64..=1 {
                for de in -1i64..=1 {
                    let (a, b) = (ri as i64 + dr, ei as i64 + de);
                    if (dr, de) != (0, 0) && a >= 0 && b >= 0 && (a as usize) < nr && (b as usize) < ne {
                        local &= val(a as usize, b as usize) <= v;
                    }
                }
            }
            if local {
                starts.push(([lr, e], v));
            }
        }
    }
    starts.sort_by(|a, b| b.1.total_cmp(&a.1));
    starts.truncate(opts.starts.max(1));
    starts.into_iter().map(|(t, _)| t).collect()
}

/// Newton runs from the local maxima of one design's grid; the simplex polish
/// where a run stops short; the report of [`Maximum`].
#[allow(clippy::too_many_arguments)]
fn refine(
    dist: &Distances,
    family: Family,
    x: &[Vec<f64>],
    y: &[f64],
    method: LikelihoodKind,
    opts: &SearchOptions,
    bounds: &Bounds,
    (ranges, etas): (&[f64], &[f64]),
    grid: &[Option<f64>],
    best0: Profiled,
) -> Result<Maximum, LikelihoodError> {
    let f0 = factorisations_on_this_thread();
    let started = std::time::Instant::now();
    let starts = grid_starts(ranges, etas, grid, best0.loglik, opts);
    let mut evaluations = grid.iter().filter(|v| v.is_some()).count();
    let mut best = best0;
    let mut converged = true;
    let mut ends: Vec<([f64; 2], f64)> = Vec::new();
    for t0 in &starts {
        let Ok(a) = ascend(dist, family, x, y, method, opts, bounds, *t0) else { continue };
        evaluations += a.evaluations;
        converged &= a.converged;
        if a.best.loglik > best.loglik {
            best = a.best;
        }
        ends.push(a.end);
    }
    let mut max = report(best, ends, bounds, family, converged, evaluations, started);
    max.factorisations = (factorisations_on_this_thread() - f0) as usize;
    Ok(max)
}

/// What one ascent from a start reached.
struct Ascent {
    /// Where it ended (search coordinates) and the log-likelihood there.
    end: ([f64; 2], f64),
    /// The best evaluation met.
    best: Profiled,
    evaluations: usize,
    converged: bool,
}

/// Newton steps from `t0`, then the simplex polish from where they stopped
/// if they stopped short.
#[allow(clippy::too_many_arguments)]
fn ascend(
    dist: &Distances,
    family: Family,
    x: &[Vec<f64>],
    y: &[f64],
    method: LikelihoodKind,
    opts: &SearchOptions,
    bounds: &Bounds,
    t0: [f64; 2],
) -> Result<Ascent, LikelihoodError> {
    let dim = bounds.dim;
    let mut value = |t: &[f64; 2]| point(dist, &params_of(family, t, dim), x, y, method);
    let mut score = |pt: Point| scores(dist, pt, x, method);
    let run = newton(&mut value, &mut score, t0, bounds, opts.decrement_tol)?;
    let mut a = Ascent {
        end: (run.t, run.best.prof.loglik),
        best: run.best.prof,
        evaluations: run.evaluations,
        converged: true,
    };
    if !run.converged {
        let evaluate = |p: &CovParams| super::likelihood::profiled(dist, p, x, y, method);
        let (m, polished, used) = polish(&evaluate, family, &run.t, bounds, (0.05, 0.015), opts.f_tol, opts);
        a.evaluations += used;
        a.converged = m.converged;
        if let Some(p) = polished
            && p.loglik > a.best.loglik
        {
            a.end = ([m.x[0], if dim == 2 { m.x[1] } else { 0.0 }], p.loglik);
            a.best = p;
        }
    }
    Ok(a)
}

/// A bounded simplex on `evaluate` from `t` with first steps `steps`: the
/// simplex's end, the best evaluation met and the evaluations used.
pub(super) fn polish(
    evaluate: &dyn Fn(&CovParams) -> Result<Profiled, LikelihoodError>,
    family: Family,
    t: &[f64; 2],
    bounds: &Bounds,
    steps: (f64, f64),
    f_tol: f64,
    opts: &SearchOptions,
) -> (super::optimise::Minimum, Option<Profiled>, usize) {
    let dim = bounds.dim;
    let mut polished: Option<Profiled> = None;
    let mut used = 0;
    let mut neg = |v: &[f64]| -> f64 {
        let t = [v[0], if dim == 2 { v[1] } else { 0.0 }];
        used += 1;
        match evaluate(&params_of(family, &t, dim)) {
            Ok(p) => {
                let l = p.loglik;
                if polished.as_ref().is_none_or(|b| l > b.loglik) {
                    polished = Some(p);
                }
                -l
            }
            Err(_) => f64::INFINITY,
        }
    };
    let m = nelder_mead(
        &mut neg,
        &t[..dim],
        &Simplex {
            step: &[steps.0, steps.1][..dim],
            bounds: Some((&bounds.lo[..dim], &bounds.hi[..dim])),
            stop: Stop::Absolute { f_tol, x_tol: opts.x_tol },
            budget: Budget::Evaluations(opts.max_evals),
        },
    );
    (m, polished, used)
}

/// The [`Maximum`] of a search: its best evaluation, the ends of its runs
/// (another optimum, the bounds it lies on), and its counts (no
/// factorisations: the caller sets them where it counts them).
pub(super) fn report(
    best: Profiled,
    ends: Vec<([f64; 2], f64)>,
    bounds: &Bounds,
    family: Family,
    converged: bool,
    evaluations: usize,
    started: std::time::Instant,
) -> Maximum {
    let dim = bounds.dim;
    let ends: Vec<(&[f64], f64)> = ends.iter().map(|(t, v)| (&t[..dim], *v)).collect();
    let (other_optimum, at_bounds) =
        SearchBox { sample: Vec::new(), lo: bounds.lo, hi: bounds.hi, dim, range: (0.0, 0.0) }
            .outcome(&best, ends, family);
    Maximum {
        best,
        converged,
        at_bounds,
        evaluations,
        factorisations: 0,
        seconds: started.elapsed().as_secs_f64(),
        range_bounds: (bounds.lo[0].exp(), bounds.hi[0].exp()),
        other_optimum,
    }
}

#[cfg(test)]
#[path = "ascent_tests.rs"]
mod tests;
