//! The derivative-based search of the Vecchia likelihoods
//! ([`super::vecchia`], [`super::vecchia_latent`]) over `t = (ln range, eta)`
//! (or `ln range` alone without a nugget), with the start grid shared by
//! several fixed parts; the scores and information it steps by are those of
//! [`super::vecchia_scores`].
//!
//! # Search
//! 1. The grid of [`super::ascent`] (13 practical ranges between the 2 % and
//!    75 % quantiles of the pair distances, crossed with nugget shares
//!    {0.05, 0.3, 0.6}); at each point the conditionals are computed once and
//!    every fixed part's columns are whitened by them.
//! 2. Newton steps with the information above from each local maximum of a
//!    fixed part's grid (within `start_gap` of its best, at most `starts`),
//!    by the one Newton routine of [`super::ascent`] (active set on the
//!    bounds, step halving, the same stopping rule); a run that stops short
//!    is polished by the simplex ([`super::optimise::nelder_mead`]).
//! 3. The spherical family keeps the simplex search of
//!    [`super::likelihood::maximise_by`] (its likelihood is rough, as on the
//!    exact path), from its start points evaluated once for every fixed part.
//!
//! # The latent form
//! Its analytic scores would need entries of `W^-1` (the derivative of
//! `ln|W|`). The latent optimum lies near the response-level one (the two
//! approximate the same likelihood, measured 0.1 to 1.9 log-likelihood units
//! apart at `m = 30`, docs/model.md), so [`maximise_latent_shared`] first
//! runs the search above on the response-level form, then Newton steps on
//! the latent form from its maximum (and from the other optimum it found, if
//! any): scores by central differences, the response-level Fisher
//! information at the start as the (fixed) metric, so each step costs
//! `2 dim + 1` latent evaluations. A run that stops short is polished by the
//! simplex. The latent log-likelihood of `n` pots is a sum with
//! cancellation (the Woodbury form, module docs of
//! [`super::vecchia_latent`]), hence the difference step
//! `LATENT_FD_STEP` and the simplex's value tolerance [`LATENT_F_TOL`].

use super::ascent::{
    Bounds, Scored, grid_ranges, grid_starts, newton, params_of, polish, record_grid_point, report,
};
use super::correlation::Family;
use super::covariance::CovParams;
use super::likelihood::{
    Distances, LikelihoodError, LikelihoodKind, Maximum, Profiled, SearchBox, SearchOptions, check_sizes_n,
    simplex_search, simplex_starts,
};
use super::vecchia::{Conditioning, profiled_vecchia};
use super::vecchia_latent::LatentVecchia;
pub use super::vecchia_scores::{profiled_vecchia_many, scored_vecchia};

/// The value tolerance of the latent form's simplex polish: the spread of
/// its vertices' log-likelihoods (the latent values' rounding, a sum over
/// `n` pots with cancellation, can keep a spread of 1e-8 from being reached
/// before the budget). The maxima of the latent search are tested to be
/// within 1e-4 of the full simplex search's or above (`vecchia_search_tests.rs`).
pub const LATENT_F_TOL: f64 = 1e-6;

/// Per fixed part its maximum, and the wall-clock seconds of the work shared
/// by all of them (the start grid).
pub type SharedSearch = (Vec<Result<Maximum, LikelihoodError>>, f64);

fn failed_all(n: usize, e: LikelihoodError) -> SharedSearch {
    ((0..n).map(|_| Err(e.clone())).collect(), 0.0)
}

/// Maximise the response-level Vecchia likelihood for each fixed part of
/// `designs` (module docs: the shared grid, then Newton steps with the
/// scores and information of [`scored_vecchia`]; the spherical family by
/// the simplex from shared start points). `dist` sets the range bounds and
/// the start ranges from its pair distances. The `factorisations` of each
/// result count dense factorisations only: zero here.
pub fn maximise_vecchia_shared(
    dist: &Distances,
    cond: &Conditioning,
    family: Family,
    designs: &[&[Vec<f64>]],
    y: &[f64],
    method: LikelihoodKind,
    opts: &SearchOptions,
) -> SharedSearch {
    let t0 = std::time::Instant::now();
    let sb = match check_all(dist, cond.len(), designs, y).and_then(|_| SearchBox::new(dist, opts)) {
        Ok(sb) => sb,
        Err(e) => return failed_all(designs.len(), e),
    };
    let dim = sb.dim;
    if family == Family::Spherical {
        let mut pre: Vec<Vec<Result<Profiled, LikelihoodError>>> = vec![Vec::new(); designs.len()];
        for t in simplex_starts(&sb, family) {
            let params = CovParams { family, range: t[0].exp(), eta: t.get(1).copied().unwrap_or(0.0) };
            match profiled_vecchia_many(cond, &params, designs, y, method) {
                Ok(all) => pre.iter_mut().zip(all).for_each(|(p, r)| p.push(r)),
                Err(e) => pre.iter_mut().for_each(|p| p.push(Err(e.clone()))),
            }
        }
        let shared = t0.elapsed().as_secs_f64();
        let results = designs
            .iter()
            .zip(pre)
            .map(|(x, pre)| {
                simplex_search(dist, family, opts, Some(pre), |p| profiled_vecchia(cond, p, x, y, method))
            })
            .collect();
        return (results, shared);
    }
    let eta_max = sb.hi[1];
    let etas: Vec<f64> = if dim == 2 {
        vec![0.05f64.min(eta_max), 0.3f64.min(eta_max), 0.6f64.min(eta_max)]
    } else {
        vec![0.0]
    };
    let ranges = grid_ranges(&sb, family);
    let mut grid: Vec<Vec<Option<f64>>> = vec![vec![None; ranges.len() * etas.len()]; designs.len()];
    let mut best_grid: Vec<Option<Profiled>> = vec![None; designs.len()];
    let mut first_error: Option<LikelihoodError> = None;
    for (ri, &lr) in ranges.iter().enumerate() {
        for (ei, &e) in etas.iter().enumerate() {
            let params = CovParams { family, range: lr.exp(), eta: e };
            let all = profiled_vecchia_many(cond, &params, designs, y, method);
            record_grid_point(ri * etas.len() + ei, all, &mut grid, &mut best_grid, &mut first_error);
        }
    }
    let shared = t0.elapsed().as_secs_f64();
    let bounds = Bounds { lo: sb.lo, hi: sb.hi, dim };
    let results = designs
        .iter()
        .enumerate()
        .map(|(d, x)| {
            let Some(best0) = best_grid[d].take() else {
                return Err(first_error
                    .clone()
                    .unwrap_or(LikelihoodError::Invalid("no start point has a finite likelihood".into())));
            };
            let starts = grid_starts(&ranges, &etas, &grid[d], best0.loglik, opts);
            let evals0 = grid[d].iter().filter(|v| v.is_some()).count();
            refine(cond, family, x, y, method, opts, &bounds, &starts, best0, evals0)
        })
        .collect();
    (results, shared)
}

fn check_all(dist: &Distances, n: usize, designs: &[&[Vec<f64>]], y: &[f64]) -> Result<(), LikelihoodError> {
    for x in designs {
        check_sizes_n(n, x, y)?;
    }
    if dist.len() != n {
        return Err(LikelihoodError::Invalid("the distances and the conditioning disagree on n".into()));
    }
    Ok(())
}

/// Newton runs from `starts` on one fixed part, the simplex polish where a
/// run stops short, and the report of [`Maximum`].
#[allow(clippy::too_many_arguments)]
fn refine(
    cond: &Conditioning,
    family: Family,
    x: &[Vec<f64>],
    y: &[f64],
    method: LikelihoodKind,
    opts: &SearchOptions,
    bounds: &Bounds,
    starts: &[[f64; 2]],
    best0: Profiled,
    evals0: usize,
) -> Result<Maximum, LikelihoodError> {
    let started = std::time::Instant::now();
    let dim = bounds.dim;
    let mut evaluations = evals0;
    let mut best = best0;
    let mut converged = true;
    let mut ends: Vec<([f64; 2], f64)> = Vec::new();
    let mut eval = |t: &[f64; 2]| scored_vecchia(cond, &params_of(family, t, dim), x, y, method, dim);
    for t0 in starts {
        let Ok(run) = newton(&mut eval, &mut |s: Scored| Ok(s), *t0, bounds, opts.decrement_tol) else {
            continue;
        };
        evaluations += run.evaluations;
        let mut end = (run.t, run.best.prof.loglik);
        if run.best.prof.loglik > best.loglik {
            best = run.best.prof.clone();
        }
        if !run.converged {
            let (m, polished, used) = polish(
                &|p: &CovParams| profiled_vecchia(cond, p, x, y, method),
                family,
                &run.t,
                bounds,
                (0.05, 0.015),
                opts.f_tol,
                opts,
            );
            evaluations += used;
            converged &= m.converged;
            if let Some(p) = polished
                && p.loglik > best.loglik
            {
                end = ([m.x[0], if dim == 2 { m.x[1] } else { 0.0 }], p.loglik);
                best = p;
            }
        }
        ends.push(end);
    }
    Ok(report(best, ends, bounds, family, converged, evaluations, started))
}

/// Newton steps per latent run before the simplex polish.
const LATENT_STEPS: usize = 15;

/// The central-difference step of the latent scores, in `ln range` and in
/// `eta`. The latent values are smooth to about 1e-10 once centred
/// ([`super::vecchia_latent`], "Rounding"), so rounding moves a score by
/// about 1e-7; the difference's own error (`h^2 / 6` times the third
/// derivative, a few thousand on 20,000 pots) is about 1e-3, well inside
/// what the Newton metric needs.
const LATENT_FD_STEP: f64 = 1e-3;

/// Stop the latent Newton steps when the decrement `g' H^-1 g` (about twice
/// the likelihood still to gain) falls below this.
const LATENT_DECREMENT_TOL: f64 = 1e-8;

/// When no step along the Newton direction (halved 8 times) raises the
/// latent likelihood and the decrement is below this (at most 1e-4 still to
/// gain), the run has met the values' rounding and counts as converged;
/// above it the simplex polishes.
const LATENT_NOISE_DECREMENT: f64 = 2e-4;

/// One latent Newton run's outcome: the best evaluation, where, whether it
/// met the tolerance, evaluations used.
struct LatentRun {
    best: Profiled,
    t: [f64; 2],
    converged: bool,
    evaluations: usize,
}

/// Newton steps on the latent form from `t0` (module docs): scores by
/// central differences of step [`LATENT_FD_STEP`] (one-sided on a bound),
/// the metric `info` (the response-level Fisher information at its
/// maximum, fixed), the active set and trust limits of [`super::ascent`],
/// a rejected step halved up to 8 times; when none is accepted the run
/// counts as converged if the decrement is below [`LATENT_NOISE_DECREMENT`].
fn latent_newton(
    evaluate: &dyn Fn(&CovParams) -> Result<Profiled, LikelihoodError>,
    family: Family,
    t0: [f64; 2],
    bounds: &Bounds,
    info: [[f64; 2]; 2],
) -> Result<LatentRun, LikelihoodError> {
    let dim = bounds.dim;
    let mut t = t0;
    bounds.project(&mut t);
    let mut evaluations = 0;
    let mut f = |t: &[f64; 2]| -> Option<Profiled> {
        evaluations += 1;
        evaluate(&params_of(family, t, dim)).ok()
    };
    let Some(mut cur) = f(&t) else {
        return Err(LikelihoodError::Invalid(
            "the latent likelihood fails at the response-level maximum".into(),
        ));
    };
    let mut converged = false;
    for _ in 0..LATENT_STEPS {
        // scores by differences
        let mut g = [0.0; 2];
        for j in 0..dim {
            let h = LATENT_FD_STEP;
            let (mut up, mut down) = (t, t);
            up[j] += h;
            down[j] -= h;
            let fu = (up[j] <= bounds.hi[j]).then(|| f(&up)).flatten().map(|p| p.loglik);
            let fd = (down[j] >= bounds.lo[j]).then(|| f(&down)).flatten().map(|p| p.loglik);
            g[j] = match (fu, fd) {
                (Some(u), Some(d)) => (u - d) / (2.0 * h),
                (Some(u), None) => (u - cur.loglik) / h,
                (None, Some(d)) => (cur.loglik - d) / h,
                (None, None) => 0.0,
            };
        }
        let free: Vec<usize> = (0..dim)
            .filter(|&k| {
                !((t[k] <= bounds.lo[k] + 1e-12 && g[k] <= 0.0)
                    || (t[k] >= bounds.hi[k] - 1e-12 && g[k] >= 0.0))
            })
            .collect();
        if free.is_empty() {
            converged = true;
            break;
        }
        let mut step = [0.0; 2];
        let h = info;
        let det = h[0][0] * h[1][1] - h[0][1] * h[1][0];
        if free.len() == 2 && h[0][0] > 0.0 && det > 1e-14 * h[0][0] * h[1][1].abs().max(1e-300) {
            step[0] = (h[1][1] * g[0] - h[0][1] * g[1]) / det;
            step[1] = (h[0][0] * g[1] - h[1][0] * g[0]) / det;
        } else {
            for &k in &free {
                step[k] = g[k] / h[k][k].abs().max(1e-8);
            }
        }
        let decrement: f64 = free.iter().map(|&k| step[k] * g[k]).sum();
        if decrement.abs() < LATENT_DECREMENT_TOL {
            converged = true;
            break;
        }
        let limits = [1.0, 0.3];
        let scale = (0..dim).map(|k| (step[k].abs() / limits[k]).max(1.0)).fold(1.0f64, f64::max);
        let mut accepted = false;
        for _ in 0..8 {
            let mut trial = [t[0] + step[0] / scale, t[1] + step[1] / scale];
            bounds.project(&mut trial);
            if (0..dim).all(|k| (trial[k] - t[k]).abs() < 1e-12) {
                break;
            }
            if let Some(p) = f(&trial)
                && p.loglik >= cur.loglik
            {
                cur = p;
                t = trial;
                accepted = true;
                break;
            }
            step[0] *= 0.5;
            step[1] *= 0.5;
        }
        if !accepted {
            converged = decrement.abs() < LATENT_NOISE_DECREMENT;
            break;
        }
    }
    Ok(LatentRun { best: cur, t, converged, evaluations })
}

/// Maximise the latent-level Vecchia likelihood for each fixed part of
/// `designs` (module docs): [`maximise_vecchia_shared`] on the pots'
/// response-level form, then Newton steps on the latent form from its
/// maximum (and its other optimum, if any) with scores by differences and
/// the response-level information as metric (`latent_newton`); a run that
/// stops short is polished by the simplex (first steps 0.05 in `ln range`,
/// 0.015 in `eta`, value tolerance [`LATENT_F_TOL`]). Residuals once, at the
/// maximum. `evaluations` counts both forms' evaluations.
pub fn maximise_latent_shared(
    dist: &Distances,
    lat: &LatentVecchia,
    family: Family,
    designs: &[&[Vec<f64>]],
    y: &[f64],
    method: LikelihoodKind,
    opts: &SearchOptions,
) -> SharedSearch {
    if let Err(e) = check_all(dist, lat.len(), designs, y) {
        return failed_all(designs.len(), e);
    }
    let (resp, shared) = maximise_vecchia_shared(dist, lat.pots(), family, designs, y, method, opts);
    let results = resp
        .into_iter()
        .zip(designs)
        .map(|(r, x)| {
            let r = r?;
            let started = std::time::Instant::now();
            let sb = SearchBox::new(dist, opts)?;
            let dim = sb.dim;
            let bounds = Bounds { lo: sb.lo, hi: sb.hi, dim };
            let evaluate = |p: &CovParams| lat.evaluate(p, x, y, method, false);
            let mut starts = vec![r.best.params];
            starts.extend(r.other_optimum.map(|(p, _)| p));
            let mut best: Option<Profiled> = None;
            let mut ends = Vec::new();
            let mut evaluations = r.evaluations;
            let mut converged = r.converged;
            for s in starts {
                let mut t = [s.range.ln(), if dim == 2 { s.eta } else { 0.0 }];
                bounds.project(&mut t);
                let info = scored_vecchia(lat.pots(), &params_of(family, &t, dim), x, y, method, dim)?.info;
                evaluations += 1;
                let Ok(run) = latent_newton(&evaluate, family, t, &bounds, info) else { continue };
                evaluations += run.evaluations;
                let mut end = (run.t, run.best);
                if !run.converged {
                    let (m, found, used) =
                        polish(&evaluate, family, &run.t, &bounds, (0.05, 0.015), LATENT_F_TOL, opts);
                    evaluations += used;
                    converged &= m.converged;
                    if let Some(p) = found
                        && p.loglik > end.1.loglik
                    {
                        end = ([m.x[0], if dim == 2 { m.x[1] } else { 0.0 }], p);
                    }
                }
                ends.push((end.0, end.1.loglik));
                if best.as_ref().is_none_or(|b| end.1.loglik > b.loglik) {
                    best = Some(end.1);
                }
            }
            let best = match best {
                Some(b) => b,
                None => lat.evaluate(&r.best.params, x, y, method, false)?,
            };
            let best = lat.evaluate(&best.params, x, y, method, true)?;
            let mut m = report(best, ends, &bounds, family, converged, evaluations, started);
            m.seconds += r.seconds;
            Ok(m)
        })
        .collect();
    (results, shared)
}

#[cfg(test)]
#[path = "vecchia_search_tests.rs"]
mod tests;
