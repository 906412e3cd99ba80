//! The maximisation of the likelihood of [`super`] over the correlation parameters:
//! the search box and options, the start grid over the distances present, and the
//! bounded simplex from the best starts with its restart.

use super::{LikelihoodError, LikelihoodKind, Profiled, check_sizes, profiled};
use crate::spatial::correlation::Family;
use crate::spatial::covariance::CovParams;
use crate::spatial::distances::Distances;
use crate::spatial::optimise::{Budget, Simplex, Stop, nelder_mead, ranked_starts};

/// Bounds and options of [`maximise`].
#[derive(Clone, Debug)]
pub struct SearchOptions {
    /// Range bounds in metres; `None`: `[min positive distance / 10, 10 x max distance]`.
    pub range_bounds: Option<(f64, f64)>,
    /// Estimate the nugget share (else `eta = 0`).
    pub nugget: bool,
    /// Upper bound of the nugget share (default 0.99).
    pub eta_max: f64,
    /// Number of best grid points to start the simplex from (default 3).
    pub starts: usize,
    /// Further starts are used only when their grid log-likelihood is within
    /// this much of the best grid point (default 10).
    pub start_gap: f64,
    /// Maximum likelihood evaluations per simplex run (default 400).
    pub max_evals: usize,
    /// Convergence: spread of the simplex log-likelihoods (default 1e-8).
    pub f_tol: f64,
    /// Convergence: spread of the simplex vertices in (ln range, eta) (default 1e-5).
    pub x_tol: f64,
    /// Convergence of the Newton steps: the Newton decrement `g' H^-1 g`,
    /// twice the gain in log-likelihood the quadratic model still predicts
    /// (default 1e-10; Boyd & Vandenberghe 2004, *Convex Optimization*,
    /// §9.5.1).
    pub decrement_tol: f64,
}

impl Default for SearchOptions {
    fn default() -> Self {
        SearchOptions {
            range_bounds: None,
            nugget: true,
            eta_max: 0.99,
            starts: 3,
            start_gap: 10.0,
            max_evals: 400,
            f_tol: 1e-8,
            x_tol: 1e-5,
            decrement_tol: 1e-10,
        }
    }
}

/// The box of a search over `(ln range, eta)` and the distances it came from.
pub(in crate::spatial) struct SearchBox {
    /// Sorted positive pairwise distances (see [`Distances::positive_sample`]).
    pub(in crate::spatial) sample: Vec<f64>,
    /// Lower bounds of `(ln range, eta)`.
    pub(in crate::spatial) lo: [f64; 2],
    /// Upper bounds of `(ln range, eta)`.
    pub(in crate::spatial) hi: [f64; 2],
    /// 2 with a nugget, else 1.
    pub(in crate::spatial) dim: usize,
    /// The range bounds in metres (`lo`, `hi` before the logarithm).
    pub(in crate::spatial) range: (f64, f64),
}

impl SearchBox {
    /// Range in `[min positive distance / 10, 10 x max distance]` (or the
    /// bounds given), eta in `[0, eta_max]` with a nugget.
    pub(in crate::spatial) fn new(
        dist: &Distances,
        opts: &SearchOptions,
    ) -> Result<SearchBox, LikelihoodError> {
        let sample = dist.positive_sample();
        if sample.is_empty() {
            return Err(LikelihoodError::Invalid("all observations are at the same position".into()));
        }
        let (lo, hi) = opts.range_bounds.unwrap_or((sample[0] / 10.0, sample[sample.len() - 1] * 10.0));
        if !(lo > 0.0 && hi > lo) {
            return Err(LikelihoodError::Invalid(format!("range bounds [{lo}, {hi}] are not valid")));
        }
        let eta_max = if opts.nugget { opts.eta_max.clamp(0.0, 0.999) } else { 0.0 };
        let dim = if opts.nugget { 2 } else { 1 };
        Ok(SearchBox { sample, lo: [lo.ln(), 0.0], hi: [hi.ln(), eta_max], dim, range: (lo, hi) })
    }

    /// Another optimum among the runs' end points `ends` (a different place,
    /// more than 1e-4 lower), and the bounds `best` lies on.
    pub(in crate::spatial) fn outcome(
        &self,
        best: &Profiled,
        mut ends: Vec<(&[f64], f64)>,
        family: Family,
    ) -> (Option<(CovParams, f64)>, Vec<&'static str>) {
        let dim = self.dim;
        ends.sort_by(|a, b| b.1.total_cmp(&a.1));
        let other_optimum = ends
            .iter()
            .skip(1)
            .find(|(t, v)| {
                (best.loglik - v) > 1e-4
                    && ((t[0] - best.params.range.ln()).abs() > 0.05
                        || (dim == 2 && (t[1] - best.params.eta).abs() > 0.02))
            })
            .map(|(t, v)| {
                (CovParams { family, range: t[0].exp(), eta: if dim == 2 { t[1] } else { 0.0 } }, *v)
            });
        let mut at_bounds = Vec::new();
        let lr = best.params.range.ln();
        let tol = 1e-4;
        if lr - self.lo[0] < tol {
            at_bounds.push("range_lower");
        }
        if self.hi[0] - lr < tol {
            at_bounds.push("range_upper");
        }
        if dim == 2 && best.params.eta < 1e-6 {
            at_bounds.push("nugget_zero");
        }
        if dim == 2 && self.hi[1] - best.params.eta < 1e-6 {
            at_bounds.push("nugget_upper");
        }
        (other_optimum, at_bounds)
    }
}

/// Result of [`maximise`].
#[derive(Clone, Debug)]
pub struct Maximum {
    /// The best evaluation found.
    pub best: Profiled,
    /// Every simplex run met the tolerance within its evaluation budget.
    pub converged: bool,
    /// The estimate lies on a bound: any of `"range_lower"`, `"range_upper"`, `"nugget_zero"`, `"nugget_upper"`.
    pub at_bounds: Vec<&'static str>,
    /// Likelihood evaluations in all (grid and search).
    pub evaluations: usize,
    /// Dense factorisations of `V` made by this search on its own (a grid
    /// shared with other fixed parts is counted apart, see
    /// [`crate::spatial::ascent::maximise_shared`]).
    pub factorisations: usize,
    /// Wall-clock seconds of this search's own work.
    pub seconds: f64,
    /// The range bounds used.
    pub range_bounds: (f64, f64),
    /// Spread between the best log-likelihood and the best of the other
    /// simplex runs that ended elsewhere (a sign of several optima), if any.
    pub other_optimum: Option<(CovParams, f64)>,
}

/// Maximise the profiled ML or REML likelihood over `(ln range, eta)` within
/// bounds (or over `ln range` alone without a nugget).
///
/// Starts: practical ranges at the 2, 5, 10, 20, 35, 50 and 75 % quantiles of
/// the pairwise distances (converted to the range parameter of `family`),
/// crossed with `eta` in {0.05, 0.3, 0.6} when a nugget is fitted. The best
/// `starts` distinct grid points each start a bounded Nelder–Mead simplex
/// (bounds kept by projecting trial points onto the box); the best of their
/// ends is restarted once with a tenth of the first steps. Points where `V`
/// is not positive definite count as `-inf`.
pub fn maximise(
    dist: &Distances,
    family: Family,
    x: &[Vec<f64>],
    y: &[f64],
    method: LikelihoodKind,
    opts: &SearchOptions,
) -> Result<Maximum, LikelihoodError> {
    check_sizes(dist, x, y)?;
    maximise_by(dist, family, opts, |params| profiled(dist, params, x, y, method))
}

/// [`maximise`] of any profiled likelihood `evaluate` of the correlation
/// parameters (for example that of pots that move,
/// [`crate::spatial::averaged::profiled_averaged`]); `dist` sets the range bounds and
/// the start ranges from its pairwise distances.
pub fn maximise_by(
    dist: &Distances,
    family: Family,
    opts: &SearchOptions,
    evaluate: impl Fn(&CovParams) -> Result<Profiled, LikelihoodError>,
) -> Result<Maximum, LikelihoodError> {
    simplex_search(dist, family, opts, None, evaluate)
}

/// The start points of the simplex search of [`maximise_by`] in `(ln range)`
/// or `(ln range, eta)`: practical ranges at the 2, 5, 10, 20, 35, 50 and
/// 75 % quantiles of the pairwise distances of `sb`, crossed with the nugget
/// shares {0.05, 0.3, 0.6} when a nugget is fitted.
pub(in crate::spatial) fn simplex_starts(sb: &SearchBox, family: Family) -> Vec<Vec<f64>> {
    let (lo, hi) = sb.range;
    let unit = family.practical_range(1.0);
    let mut starts: Vec<Vec<f64>> = Vec::new();
    for q in [0.02, 0.05, 0.10, 0.20, 0.35, 0.50, 0.75] {
        let d = sb.sample[((sb.sample.len() - 1) as f64 * q).round() as usize];
        let r = (d / unit).clamp(lo, hi).ln();
        let etas: &[f64] = if sb.dim == 2 { &[0.05, 0.3, 0.6] } else { &[0.0] };
        for &e in etas {
            starts.push(if sb.dim == 2 { vec![r, e.min(sb.hi[1])] } else { vec![r] });
        }
    }
    starts
}

/// [`maximise_by`], with the likelihood at the points of [`simplex_starts`]
/// already evaluated (`pre`, in their order) when a grid is shared by several
/// fixed parts ([`crate::spatial::ascent::maximise_shared`]); they count as
/// evaluations of this search, their factorisations do not.
pub(in crate::spatial) fn simplex_search(
    dist: &Distances,
    family: Family,
    opts: &SearchOptions,
    pre: Option<Vec<Result<Profiled, LikelihoodError>>>,
    evaluate: impl Fn(&CovParams) -> Result<Profiled, LikelihoodError>,
) -> Result<Maximum, LikelihoodError> {
    let f0 = crate::spatial::factor::factorisations_on_this_thread();
    let t0 = std::time::Instant::now();
    let sb = SearchBox::new(dist, opts)?;
    let starts = simplex_starts(&sb, family);
    let SearchBox { lo: box_lo, hi: box_hi, dim, range: (lo, hi), .. } = sb;
    struct State {
        evaluations: usize,
        best: Option<Profiled>,
        first_error: Option<LikelihoodError>,
    }
    let state = std::cell::RefCell::new(State { evaluations: 0, best: None, first_error: None });
    let record = |result: Result<Profiled, LikelihoodError>| -> f64 {
        let mut st = state.borrow_mut();
        st.evaluations += 1;
        match result {
            Ok(p) => {
                let v = p.loglik;
                if st.best.as_ref().is_none_or(|b| v > b.loglik) {
                    st.best = Some(p);
                }
                v
            }
            Err(e) => {
                if st.first_error.is_none() {
                    st.first_error = Some(e);
                }
                f64::NEG_INFINITY
            }
        }
    };
    let eval = |t: &[f64]| -> f64 {
        let params = CovParams { family, range: t[0].exp(), eta: if dim == 2 { t[1] } else { 0.0 } };
        record(evaluate(&params))
    };
    // best start first (ranked by -l, the simplex minimises)
    let ranked = match pre {
        Some(pre) => {
            let mut g: Vec<(Vec<f64>, f64)> =
                starts.into_iter().zip(pre).map(|(t, r)| (t, -record(r))).collect();
            g.sort_by(|a, b| a.1.total_cmp(&b.1));
            g
        }
        None => ranked_starts(&mut |t: &[f64]| -eval(t), starts),
    };
    let grid: Vec<(Vec<f64>, f64)> = ranked.into_iter().map(|(t, v)| (t, -v)).collect();
    // minimise -l (NaN counts as +inf)
    let mut neg = |t: &[f64]| -> f64 {
        let r = eval(t);
        if r.is_nan() { f64::INFINITY } else { -r }
    };
    if !grid[0].1.is_finite() {
        let e = state.borrow_mut().first_error.take();
        return Err(e.unwrap_or(LikelihoodError::Invalid("no start point has a finite likelihood".into())));
    }
    let mut converged = true;
    let mut ends: Vec<(Vec<f64>, f64)> = Vec::new();
    let steps = [0.5f64, 0.15];
    let mut run = |start: &[f64], scale: f64, converged: &mut bool| -> (Vec<f64>, f64) {
        let step: Vec<f64> = steps[..dim].iter().map(|s| s * scale).collect();
        let m = nelder_mead(
            &mut neg,
            start,
            &Simplex {
                step: &step,
                bounds: Some((&box_lo[..dim], &box_hi[..dim])),
                stop: Stop::Absolute { f_tol: opts.f_tol, x_tol: opts.x_tol },
                budget: Budget::Evaluations(opts.max_evals),
            },
        );
        *converged &= m.converged;
        (m.x, -m.value)
    };
    let mut taken = 0;
    for (t0, v0) in grid.iter() {
        if taken >= opts.starts.max(1) || !v0.is_finite() || (taken > 0 && *v0 < grid[0].1 - opts.start_gap) {
            break;
        }
        if ends.iter().any(|(t, _)| (t[0] - t0[0]).abs() < 1e-9 && (dim == 1 || (t[1] - t0[1]).abs() < 1e-9))
        {
            continue;
        }
        taken += 1;
        ends.push(run(t0, 1.0, &mut converged));
    }
    // the restart (a tenth of the first steps) from the best end only: on
    // the demo study it never moved an end by 1e-8, and a restart from
    // every end cost a quarter of the search
    if let Some(k) = (0..ends.len()).max_by(|&a, &b| ends[a].1.total_cmp(&ends[b].1)) {
        let again = run(&ends[k].0.clone(), 0.1, &mut converged);
        if again.1 >= ends[k].1 {
            ends[k] = again;
        }
    }
    let State { evaluations, best, .. } = state.into_inner();
    let best = best.expect("a finite grid point exists");
    let ends: Vec<(&[f64], f64)> = ends.iter().map(|(t, v)| (t.as_slice(), *v)).collect();
    let (other_optimum, at_bounds) =
        SearchBox { sample: Vec::new(), lo: box_lo, hi: box_hi, dim, range: (lo, hi) }
            .outcome(&best, ends, family);
    let factorisations = (crate::spatial::factor::factorisations_on_this_thread() - f0) as usize;
    Ok(Maximum {
        best,
        converged,
        at_bounds,
        evaluations,
        factorisations,
        seconds: t0.elapsed().as_secs_f64(),
        range_bounds: (lo, hi),
        other_optimum,
    })
}
