//! The derivative-free optimisers of the crate: Brent's line search
//! ([`brent_min`], one dimension: the nugget share and the range of the
//! profile route of [`crate::spatial::ascent::maximise_profiled`]) and a Nelder–Mead simplex
//! (Nelder & Mead 1965, *Computer Journal* 7: 308–313; coefficients:
//! reflection 1, expansion 2, contraction 0.5, shrink 0.5) that minimises,
//! optionally inside a box (trial points are projected onto it), with a
//! stopping rule and a budget chosen by the caller; and the start helper
//! that ranks a grid of start points.
//!
//! Users: the likelihood search over (ln range, nugget share)
//! ([`crate::spatial::likelihood::maximise`]: box, absolute tolerances, a
//! budget of evaluations, one restart from the end point) and the weighted
//! least-squares variogram fit ([`crate::spatial::variogram::fit_wls`]: no
//! box, the parameters clamped inside the criterion, a relative tolerance,
//! a budget of iterations, restarts until the best value stops improving;
//! Press et al. 2007, *Numerical Recipes*, §10.5, on restarting a collapsed
//! simplex).
//!
//! Each iteration sorts the simplex by value (stable: ties keep their
//! order), tests the stopping rule, then tries the reflection of the worst
//! vertex through the centroid of the others, its expansion, an outside or
//! inside contraction, and otherwise shrinks the simplex towards the best
//! vertex. Cost: one to `d + 2` evaluations per iteration in `d` dimensions.

/// When the simplex has converged.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Stop {
    /// Spread of the values `f_max - f_min <= f_tol` and largest coordinate
    /// distance to the best vertex `<= max(x_tol, 1e-12)`; or, flat to working
    /// precision, spread `<= f_tol / 1000` with coordinate distance `<= 1e-4`.
    Absolute {
        /// Tolerance on the values.
        f_tol: f64,
        /// Tolerance on the coordinates.
        x_tol: f64,
    },
    /// `|f_max - f_min| <= tol (|f_min| + tol)`.
    Relative {
        /// Relative tolerance.
        tol: f64,
    },
}

/// How much work one simplex run may do.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Budget {
    /// At most this many evaluations of `f` (the initial simplex included).
    Evaluations(usize),
    /// At most this many iterations (the initial simplex not counted).
    Iterations(usize),
}

/// Options of one simplex run.
#[derive(Clone, Copy, Debug)]
pub struct Simplex<'a> {
    /// Initial step per coordinate (the simplex is the start plus one step
    /// along each axis; a step that leaves the box is taken backwards).
    pub step: &'a [f64],
    /// Box `(lower, upper)` onto which every trial point is projected; `None`:
    /// unbounded.
    pub bounds: Option<(&'a [f64], &'a [f64])>,
    /// Stopping rule.
    pub stop: Stop,
    /// Budget.
    pub budget: Budget,
}

/// Result of one simplex run.
#[derive(Clone, Debug, PartialEq)]
pub struct Minimum {
    /// The best vertex.
    pub x: Vec<f64>,
    /// Its value.
    pub value: f64,
    /// The stopping rule was met within the budget.
    pub converged: bool,
}

/// Minimise `f` from `x0` by one Nelder–Mead run (see the module docs).
pub fn nelder_mead(f: &mut dyn FnMut(&[f64]) -> f64, x0: &[f64], opts: &Simplex<'_>) -> Minimum {
    let d = x0.len();
    let project = |v: &mut [f64]| {
        if let Some((lo, hi)) = opts.bounds {
            for k in 0..d {
                v[k] = v[k].clamp(lo[k], hi[k]);
            }
        }
    };
    let mut simplex: Vec<(Vec<f64>, f64)> = Vec::with_capacity(d + 1);
    let mut x = x0.to_vec();
    project(&mut x);
    let fx = f(&x);
    simplex.push((x.clone(), fx));
    for k in 0..d {
        let mut v = x.clone();
        v[k] += opts.step[k];
        if let Some((_, hi)) = opts.bounds
            && v[k] > hi[k]
        {
            v[k] = x[k] - opts.step[k];
        }
        project(&mut v);
        let fv = f(&v);
        simplex.push((v, fv));
    }
    let mut evals = d + 1;
    let mut iterations = 0usize;
    let mut converged = false;
    loop {
        let more = match opts.budget {
            Budget::Evaluations(max) => evals < max,
            Budget::Iterations(max) => iterations < max,
        };
        if !more {
            break;
        }
        iterations += 1;
        simplex.sort_by(|a, b| a.1.total_cmp(&b.1));
        let met = match opts.stop {
            Stop::Absolute { f_tol, x_tol } => {
                let fspread = simplex[d].1 - simplex[0].1;
                let xspread = simplex
                    .iter()
                    .skip(1)
                    .map(|(v, _)| v.iter().zip(&simplex[0].0).map(|(a, b)| (a - b).abs()).fold(0.0, f64::max))
                    .fold(0.0, f64::max);
                (fspread.is_finite() && fspread <= f_tol && xspread <= x_tol.max(1e-12))
                    || (fspread.is_finite() && fspread <= f_tol * 1e-3 && xspread <= 1e-4)
            }
            Stop::Relative { tol } => {
                let spread = (simplex[d].1 - simplex[0].1).abs();
                spread <= tol * (simplex[0].1.abs() + tol)
            }
        };
        if met {
            converged = true;
            break;
        }
        let centroid: Vec<f64> =
            (0..d).map(|k| simplex[..d].iter().map(|(v, _)| v[k]).sum::<f64>() / d as f64).collect();
        let worst = simplex[d].clone();
        let along = |t: f64| -> Vec<f64> {
            let mut v: Vec<f64> = (0..d).map(|k| centroid[k] + t * (worst.0[k] - centroid[k])).collect();
            project(&mut v);
            v
        };
        let xr = along(-1.0);
        let fr = f(&xr);
        evals += 1;
        if fr < simplex[0].1 {
            let xe = along(-2.0);
            let fe = f(&xe);
            evals += 1;
            simplex[d] = if fe < fr { (xe, fe) } else { (xr, fr) };
        } else if fr < simplex[d - 1].1 {
            simplex[d] = (xr, fr);
        } else {
            let xc = if fr < worst.1 { along(-0.5) } else { along(0.5) };
            let fc = f(&xc);
            evals += 1;
            if fc < worst.1.min(fr) {
                simplex[d] = (xc, fc);
            } else {
                let b = simplex[0].0.clone();
                for s in simplex.iter_mut().skip(1) {
                    let v: Vec<f64> = (0..d).map(|k| b[k] + 0.5 * (s.0[k] - b[k])).collect();
                    let fv = f(&v);
                    *s = (v, fv);
                    evals += 1;
                }
            }
        }
    }
    simplex.sort_by(|a, b| a.1.total_cmp(&b.1));
    let (x, value) = simplex.swap_remove(0);
    Minimum { x, value, converged }
}

/// Nelder–Mead runs restarted at the best point until a run improves the
/// best value by no more than `tol (|best| + tol)` (at most `max_runs` runs).
/// Returns the best point and value.
pub fn nelder_mead_restarted(
    f: &mut dyn FnMut(&[f64]) -> f64,
    x0: &[f64],
    opts: &Simplex<'_>,
    tol: f64,
    max_runs: usize,
) -> (Vec<f64>, f64) {
    let mut start = x0.to_vec();
    let mut best_val = f64::INFINITY;
    let mut out = start.clone();
    for _ in 0..max_runs {
        let m = nelder_mead(f, &start, opts);
        if m.value < best_val - tol * (best_val.abs() + tol) || best_val.is_infinite() {
            best_val = m.value;
            out = m.x;
            start = out.clone();
        } else {
            if m.value < best_val {
                best_val = m.value;
                out = m.x;
            }
            break;
        }
    }
    (out, best_val)
}

/// Evaluate `f` at every start point and return them with their values,
/// best (smallest) first; ties keep the given order.
pub fn ranked_starts(f: &mut dyn FnMut(&[f64]) -> f64, starts: Vec<Vec<f64>>) -> Vec<(Vec<f64>, f64)> {
    let mut out: Vec<(Vec<f64>, f64)> = starts
        .into_iter()
        .map(|t| {
            let v = f(&t);
            (t, v)
        })
        .collect();
    out.sort_by(|a, b| a.1.total_cmp(&b.1));
    out
}

/// Result of [`brent_min`].
#[derive(Clone, Copy, Debug)]
pub struct LineMinimum {
    /// Where the smallest value was found.
    pub x: f64,
    /// The smallest value.
    pub value: f64,
    /// Evaluations of `f` made (a given start not counted).
    pub evaluations: usize,
    /// The bracket shrank below the tolerance within the budget.
    pub converged: bool,
}

/// Minimise `f` on `[a, b]` by Brent's method: golden-section steps and
/// parabolic interpolation through the three best points, with the
/// safeguards of Brent (1973, *Algorithms for Minimization without
/// Derivatives*, ch. 5, procedure *localmin*). Stops when the best point
/// lies within `2 tol1` of the middle of the shrinking bracket, `tol1 =
/// sqrt(eps) |x| + tol / 3` (so `x` is known to about `tol`), or after
/// `max_evals` evaluations. `start` is an interior point with its value when
/// one is known (it saves an evaluation; else the golden point is used).
/// The ends `a` and `b` themselves are never evaluated. Finds a local
/// minimum: on a function with several, the one whose basin holds the start.
pub fn brent_min(
    f: &mut dyn FnMut(f64) -> f64,
    (a, b): (f64, f64),
    start: Option<(f64, f64)>,
    tol: f64,
    max_evals: usize,
) -> LineMinimum {
    let golden = 0.5 * (3.0 - 5f64.sqrt());
    let eps = f64::EPSILON.sqrt();
    let (mut a, mut b) = (a.min(b), a.max(b));
    let mut evaluations = 0;
    let (mut x, mut fx) = match start {
        Some((x, fx)) if x > a && x < b => (x, fx),
        _ => {
            let x = a + golden * (b - a);
            evaluations += 1;
            (x, f(x))
        }
    };
    let nan_high = |v: f64| if v.is_nan() { f64::INFINITY } else { v };
    fx = nan_high(fx);
    let (mut w, mut fw, mut v, mut fv) = (x, fx, x, fx);
    let (mut d, mut e) = (0.0f64, 0.0f64);
    let mut converged = false;
    while evaluations < max_evals {
        let xm = 0.5 * (a + b);
        let tol1 = eps * x.abs() + tol / 3.0;
        let tol2 = 2.0 * tol1;
        if (x - xm).abs() <= tol2 - 0.5 * (b - a) {
            converged = true;
            break;
        }
        let mut golden_step = true;
        if e.abs() > tol1 {
            // parabola through (v, fv), (w, fw), (x, fx)
            let r = (x - w) * (fx - fv);
            let mut q = (x - v) * (fx - fw);
            let mut p = (x - v) * q - (x - w) * r;
            q = 2.0 * (q - r);
            if q > 0.0 {
                p = -p;
            } else {
                q = -q;
            }
            let e_prev = e;
            e = d;
            if p.abs() < (0.5 * q * e_prev).abs() && p > q * (a - x) && p < q * (b - x) {
                d = p / q;
                let u = x + d;
                if u - a < tol2 || b - u < tol2 {
                    d = if xm >= x { tol1 } else { -tol1 };
                }
                golden_step = false;
            }
        }
        if golden_step {
            e = if x >= xm { a - x } else { b - x };
            d = golden * e;
        }
        let u = if d.abs() >= tol1 {
            x + d
        } else if d > 0.0 {
            x + tol1
        } else {
            x - tol1
        };
        evaluations += 1;
        let fu = nan_high(f(u));
        if fu <= fx {
            if u >= x {
                a = x;
            } else {
                b = x;
            }
            (v, fv, w, fw, x, fx) = (w, fw, x, fx, u, fu);
        } else {
            if u < x {
                a = u;
            } else {
                b = u;
            }
            if fu <= fw || w == x {
                (v, fv, w, fw) = (w, fw, u, fu);
            } else if fu <= fv || v == x || v == w {
                (v, fv) = (u, fu);
            }
        }
    }
    LineMinimum { x, value: fx, evaluations, converged }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    /// The minimum of `(x-1)^2 + (y-3)^2` inside `[0,2] x [0,2]` lies on the
    /// bound `y = 2` at value 1 (hand).
    #[test]
    fn finds_a_bounded_minimum() {
        let mut f = |v: &[f64]| (v[0] - 1.0).powi(2) + (v[1] - 3.0).powi(2);
        let m = nelder_mead(
            &mut f,
            &[0.2, 0.2],
            &Simplex {
                step: &[0.5, 0.5],
                bounds: Some((&[0.0, 0.0], &[2.0, 2.0])),
                stop: Stop::Absolute { f_tol: 1e-8, x_tol: 1e-5 },
                budget: Budget::Evaluations(400),
            },
        );
        assert!(m.converged);
        assert_relative_eq!(m.x[0], 1.0, epsilon = 1e-5);
        assert_relative_eq!(m.x[1], 2.0, epsilon = 1e-9);
        assert_relative_eq!(m.value, 1.0, epsilon = 1e-9);
    }

    /// Rosenbrock's function (minimum 0 at (1, 1); Rosenbrock 1960) from the
    /// classic start (-1.2, 1), unbounded, with restarts.
    #[test]
    fn rosenbrock_unbounded_with_restarts() {
        let mut f = |v: &[f64]| 100.0 * (v[1] - v[0] * v[0]).powi(2) + (1.0 - v[0]).powi(2);
        let (x, fx) = nelder_mead_restarted(
            &mut f,
            &[-1.2, 1.0],
            &Simplex {
                step: &[0.5, 0.5],
                bounds: None,
                stop: Stop::Relative { tol: 1e-14 },
                budget: Budget::Iterations(3000),
            },
            1e-14,
            4,
        );
        assert!(fx < 1e-12, "{fx}");
        assert_relative_eq!(x[0], 1.0, epsilon = 1e-5);
        assert_relative_eq!(x[1], 1.0, epsilon = 1e-5);
    }

    /// Brent's method finds the minimum of `(x - 0.3)^2 + 0.1 x^4` (at the
    /// root of `2 (x - 0.3) + 0.4 x^3`, by bisection below), of a function
    /// with its minimum at the bracket's end (`x` itself on `[0.5, 2]`,
    /// ending within twice `tol1` of 0.5) and of `|x - 1.2|` (not smooth:
    /// golden steps), each to its tolerance and within the budget.
    #[test]
    fn brent_finds_line_minima() {
        let (mut lo, mut hi) = (0.0f64, 1.0f64);
        for _ in 0..200 {
            let m = 0.5 * (lo + hi);
            if 2.0 * (m - 0.3) + 0.4 * m.powi(3) > 0.0 {
                hi = m;
            } else {
                lo = m;
            }
        }
        let root = 0.5 * (lo + hi);
        let m = brent_min(&mut |x| (x - 0.3).powi(2) + 0.1 * x.powi(4), (-2.0, 3.0), None, 1e-10, 100);
        assert!(m.converged);
        assert!((m.x - root).abs() < 1e-8, "{} vs {root}", m.x);
        assert!(m.evaluations < 20, "{}", m.evaluations);
        let m = brent_min(&mut |x| x, (0.5, 2.0), Some((1.0, 1.0)), 1e-9, 200);
        // within 2 tol1 of the end (tol1 = sqrt(eps) |x| + tol / 3)
        assert!(m.converged && m.x - 0.5 <= 2.0 * (f64::EPSILON.sqrt() * 0.5 + 1e-9 / 3.0), "{}", m.x);
        let m = brent_min(&mut |x| (x - 1.2).abs(), (0.0, 3.0), None, 1e-9, 200);
        assert!(m.converged && (m.x - 1.2).abs() < 1e-8, "{}", m.x);
    }

    #[test]
    fn starts_are_ranked_best_first() {
        let mut f = |v: &[f64]| (v[0] - 2.0).abs();
        let r = ranked_starts(&mut f, vec![vec![0.0], vec![2.5], vec![1.0]]);
        let xs: Vec<f64> = r.iter().map(|(t, _)| t[0]).collect();
        assert_eq!(xs, vec![2.5, 1.0, 0.0]);
    }
}
