//! Where to put the next loggers: greedy selection of new logger positions
//! that most reduce the kriging standard error at the pots, and the cost of
//! taking each current logger away.
//!
//! # The quantity
//! For a kriging method with trend basis `f` (none for simple kriging, `1`
//! for ordinary, `1, x, y` for universal, `1, v` for an external drift) and the
//! covariance of [`Kernel::from_variogram`], the kriging error of a point `a`
//! given the loggers `S` is `e(a) = Z(a) - lambda_a' Z(S)`. Its covariance
//! between two points `a`, `b` (Cressie 1993, *Statistics for Spatial Data*,
//! §3.4; the form used here: Chilès & Delfiner 2012, *Geostatistics*, 2nd
//! ed., §3.4.3) is
//!
//! `E(a, b) = C(a, b) - [k_a; f_a]' A^-1 [k_b; f_b]`, with
//! `A = [K F; F' 0]` the bordered kriging matrix of the loggers,
//!
//! and `E(a, a)` is the kriging variance. The nugget follows the kriging
//! convention of `docs/spatial.md`: a pot or candidate standing on a logger
//! gets the full sill from it ([`Kernel::at_distance`]).
//!
//! # Adding a logger: a rank-one update
//! Adding a logger at `s` borders `A` by one row and column. By the block
//! inverse (the Schur complement of `A` in the bordered matrix, Golub & Van
//! Loan 2013, *Matrix Computations*, 4th ed., §3.2.10 and §4.4), every error
//! covariance is updated without a new solve:
//!
//! `E'(a, b) = E(a, b) - E(a, s) E(s, b) / E(s, s)`
//!
//! (the kriging update equations of Emery 2009, *Computational Geosciences*
//! 13:269-280, and Chevalier, Ginsbourger & Emery 2014, in *mODa 10*,
//! Springer, pp. 119-127). So the kriging variance at a pot falls by
//! `E(t, s)^2 / E(s, s)`. The error covariances between the pots and every
//! candidate, and among the candidates, are kept and updated after each
//! choice: O((m + q) q) per added logger for m pots and q candidates.
//!
//! # Removing a logger: the leave-one-out identity
//! With `B = A^-1` and `lambda_t` the kriging weights of pot `t`, the
//! variance at `t` without logger `i` is `E(t, t) + lambda_ti^2 / B_ii`
//! (Dubrule 1983, *Mathematical Geology* 15:687-699, the leave-one-out
//! identity of kriging, here applied to a pot instead of the left-out
//! logger). A logger the trend cannot do without (`B_ii = 0`, e.g. the fourth
//! logger of universal kriging) is reported as not removable.
//!
//! # What it does not own
//! The variogram and the method come from the mapping stage
//! ([`super::stage`]) or from the plan file; this module only does the
//! algebra. The tests check every update against a fresh kriging solve
//! ([`super::kriging::System`]), the greedy choice against an exhaustive
//! search, and both against an independent numpy implementation
//! (`tests/reference/placement.py`).

use super::covariance::Kernel;
use super::error::{Result, SpatialError};
use super::factor::Bordered;
use super::geometry::Points;
use super::kriging::Interpolator;
use super::variogram::VariogramModel;
use faer::Mat;

pub mod window;

/// What the greedy selection minimises over the pots.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Objective {
    /// The mean kriging standard error over the pots.
    MeanSe,
    /// The largest kriging standard error at any pot.
    MaxSe,
}

impl Objective {
    /// The name as the plan file spells it.
    pub fn name(self) -> &'static str {
        match self {
            Objective::MeanSe => "mean",
            Objective::MaxSe => "max",
        }
    }

    /// Parse `mean` or `max`.
    pub fn parse(s: &str) -> Option<Objective> {
        match s {
            "mean" => Some(Objective::MeanSe),
            "max" => Some(Objective::MaxSe),
            _ => None,
        }
    }

    /// The objective of the pots' SEs.
    pub fn of_se(self, se: impl Iterator<Item = f64>) -> f64 {
        let (mut sum, mut max, mut n) = (0.0, 0.0_f64, 0usize);
        for s in se {
            sum += s;
            max = max.max(s);
            n += 1;
        }
        match self {
            Objective::MeanSe => sum / n.max(1) as f64,
            Objective::MaxSe => max,
        }
    }

    /// The objective of the pots' kriging variances read by `pot_se`.
    pub fn of_variances(self, var: &[f64], pot_se: &dyn PotSe) -> f64 {
        self.of_se(var.iter().enumerate().map(|(t, v)| pot_se.se(t, *v)))
    }
}

/// The standard error a placement lowers at a pot, as a function of the
/// pot's kriging variance under the placement's variogram.
pub trait PotSe: Sync {
    /// The SE at pot `pot` (index into the pots) whose kriging variance is
    /// `variance`.
    fn se(&self, pot: usize, variance: f64) -> f64;
}

/// The kriging SE itself, `sqrt(variance)`.
#[derive(Clone, Copy, Debug, Default)]
pub struct KrigingSe;

impl PotSe for KrigingSe {
    fn se(&self, _pot: usize, variance: f64) -> f64 {
        variance.max(0.0).sqrt()
    }
}

/// The kriging set-up of a placement problem.
#[derive(Clone, Debug)]
pub struct Setting {
    /// Simple, ordinary, universal or external-drift kriging.
    pub method: Interpolator,
    /// The variogram of the indicator (its own sill).
    pub model: VariogramModel,
    /// The external drift's value at the loggers, pots and candidates
    /// (required by [`Interpolator::ExternalDrift`], ignored otherwise).
    pub drift: Option<DriftValues>,
}

/// An external drift known everywhere a placement needs it.
#[derive(Clone, Debug, Default)]
pub struct DriftValues {
    /// At each current logger.
    pub loggers: Vec<f64>,
    /// At each pot.
    pub pots: Vec<f64>,
    /// At each candidate position.
    pub candidates: Vec<f64>,
}

/// One added logger of the greedy sequence.
#[derive(Clone, Debug, PartialEq)]
pub struct Added {
    /// Index into the candidates.
    pub candidate: usize,
    /// Mean kriging SE over the pots once it is added.
    pub mean_se: f64,
    /// Largest kriging SE over the pots once it is added.
    pub max_se: f64,
}

/// The effect of taking one current logger away.
#[derive(Clone, Debug, PartialEq)]
pub struct Removal {
    /// Index into the current loggers.
    pub logger: usize,
    /// Mean and largest kriging SE over the pots without it; `None` when the
    /// trend cannot be estimated without it.
    pub se: Option<(f64, f64)>,
}

/// The answer of [`place`].
#[derive(Clone, Debug)]
pub struct PlacementResult {
    /// Kriging SE at each pot with the current loggers.
    pub before: Vec<f64>,
    /// Kriging SE at each pot with the current and the added loggers.
    pub after: Vec<f64>,
    /// The added loggers in the order chosen.
    pub added: Vec<Added>,
    /// Every current logger, taken away alone.
    pub removals: Vec<Removal>,
}

/// Error covariances of the pots and the candidates given a set of loggers,
/// kept up to date as loggers are added ([`Tracker::add`]).
#[derive(Clone, Debug)]
pub struct Tracker {
    m: usize,
    q: usize,
    /// Kriging variance at each pot.
    var_t: Vec<f64>,
    /// `E(t, c)`, column-major: column `c` is `e_tc[c * m .. (c + 1) * m]`.
    e_tc: Vec<f64>,
    /// `E(c, d)`, q x q, column-major.
    e_cc: Vec<f64>,
    /// Candidates already added or useless (error variance ~ 0).
    spent: Vec<bool>,
    sill: f64,
}

/// Trend basis of `method` at `(x, y)` with drift value `v`.
fn trend_row(method: Interpolator, x: f64, y: f64, v: f64) -> Vec<f64> {
    match method {
        Interpolator::Ordinary => vec![1.0],
        Interpolator::Universal => vec![1.0, x, y],
        Interpolator::ExternalDrift => vec![1.0, v],
        _ => Vec::new(),
    }
}

fn check_setting(s: &Setting, loggers: &Points, pots: &Points, candidates: &Points) -> Result<()> {
    if !s.method.is_kriging() {
        return Err(SpatialError::BadInput {
            what: "placement method".into(),
            message: format!("`{}` has no standard error; use a kriging method", s.method.name()),
        });
    }
    let m = &s.model;
    if !(m.nugget >= 0.0 && m.partial_sill > 0.0 && m.range > 0.0 && m.sill().is_finite()) {
        return Err(SpatialError::BadInput {
            what: "variogram model".into(),
            message: format!(
                "nugget {}, partial sill {}, range {} must be >= 0, > 0, > 0",
                m.nugget, m.partial_sill, m.range
            ),
        });
    }
    if s.method == Interpolator::ExternalDrift {
        let Some(d) = &s.drift else {
            return Err(SpatialError::BadInput {
                what: "external drift".into(),
                message: "no drift values given".into(),
            });
        };
        if d.loggers.len() != loggers.len()
            || d.pots.len() != pots.len()
            || d.candidates.len() != candidates.len()
        {
            return Err(SpatialError::BadInput {
                what: "external drift".into(),
                message: format!(
                    "{}/{}/{} values for {} loggers, {} pots, {} candidates",
                    d.loggers.len(),
                    d.pots.len(),
                    d.candidates.len(),
                    loggers.len(),
                    pots.len(),
                    candidates.len()
                ),
            });
        }
    }
    let p = trend_row(s.method, 0.0, 0.0, 0.0).len();
    if loggers.len() < p {
        return Err(SpatialError::TooFewSensors {
            method: s.method.name().into(),
            needed: p,
            got: loggers.len(),
            hint: "state the current loggers, or plan a new compartment with `method = \"simple\"` and a known mean"
                .into(),
        });
    }
    Ok(())
}

/// The factorised kriging matrix of the loggers and the solutions for a set
/// of points: `(rhs_top, rhs_bottom, lambda, mu)`, one column per point.
struct Solved {
    top: Mat<f64>,
    bottom: Mat<f64>,
    lambda: Mat<f64>,
    mu: Mat<f64>,
}

fn factor_loggers(s: &Setting, loggers: &Points) -> Result<Option<Bordered>> {
    let n = loggers.len();
    if n == 0 {
        return Ok(None);
    }
    let kern = Kernel::from_variogram(&s.model);
    let k = kern.fill_lower(n, |i, j| loggers.dist_to(i, loggers, j));
    let drift = s.drift.as_ref().map(|d| d.loggers.as_slice());
    let p = trend_row(s.method, 0.0, 0.0, 0.0).len();
    let f = Mat::from_fn(n, p, |i, q| {
        trend_row(s.method, loggers.x[i], loggers.y[i], drift.map_or(0.0, |d| d[i]))[q]
    });
    Bordered::new(k, f).map(Some).map_err(|e| SpatialError::Singular {
        method: s.method.name().into(),
        n,
        hint: format!(
            "two loggers share a position without a nugget, or the trend cannot be estimated from these loggers ({e})"
        ),
    })
}

/// Solve the kriging system of the loggers for the points `pts` (drift
/// values `v`).
fn solve_points(
    s: &Setting,
    sys: Option<&Bordered>,
    loggers: &Points,
    pts: &Points,
    v: Option<&[f64]>,
) -> Solved {
    let kern = Kernel::from_variogram(&s.model);
    let n = loggers.len();
    let p = trend_row(s.method, 0.0, 0.0, 0.0).len();
    let top = Mat::from_fn(n, pts.len(), |r, c| kern.at_distance(loggers.dist_to(r, pts, c)));
    let bottom = Mat::from_fn(p, pts.len(), |q, c| {
        trend_row(s.method, pts.x[c], pts.y[c], v.map_or(0.0, |d| d[c]))[q]
    });
    match sys {
        Some(sys) => {
            let (lambda, mu) = sys.solve(&top, &bottom);
            Solved { top, bottom, lambda, mu }
        }
        None => Solved { lambda: Mat::zeros(0, pts.len()), mu: Mat::zeros(0, pts.len()), top, bottom },
    }
}

/// `[k_a; f_a]' A^-1 [k_b; f_b]` for column `a` of `x` and column `b` of `y`.
fn quad(x: &Solved, a: usize, y: &Solved, b: usize) -> f64 {
    let mut s = 0.0;
    for r in 0..x.lambda.nrows() {
        s += x.lambda[(r, a)] * y.top[(r, b)];
    }
    for q in 0..x.mu.nrows() {
        s += x.mu[(q, a)] * y.bottom[(q, b)];
    }
    s
}

impl Tracker {
    /// Error covariances of `pots` and `candidates` given `loggers`.
    /// Cost: O(n^3) for the loggers' system, O(n^2 (m + q)) for the
    /// solutions, O(n q (m + q)) for the covariances (n loggers, m pots, q
    /// candidates); memory O(q (m + q)).
    pub fn new(setting: &Setting, loggers: &Points, pots: &Points, candidates: &Points) -> Result<Tracker> {
        check_setting(setting, loggers, pots, candidates)?;
        let sys = factor_loggers(setting, loggers)?;
        let dv = setting.drift.as_ref().filter(|_| setting.method == Interpolator::ExternalDrift);
        let st = solve_points(setting, sys.as_ref(), loggers, pots, dv.map(|d| d.pots.as_slice()));
        let sc =
            solve_points(setting, sys.as_ref(), loggers, candidates, dv.map(|d| d.candidates.as_slice()));
        let kern = Kernel::from_variogram(&setting.model);
        let sill = setting.model.sill();
        let (m, q) = (pots.len(), candidates.len());
        let var_t: Vec<f64> = (0..m).map(|t| sill - quad(&st, t, &st, t)).collect();
        let mut e_tc = vec![0.0; m * q];
        for c in 0..q {
            for t in 0..m {
                e_tc[c * m + t] = kern.at_distance(pots.dist_to(t, candidates, c)) - quad(&st, t, &sc, c);
            }
        }
        let mut e_cc = vec![0.0; q * q];
        for c in 0..q {
            for d in 0..=c {
                let cov = if c == d { sill } else { kern.at_distance(candidates.dist_to(c, candidates, d)) };
                let e = cov - quad(&sc, c, &sc, d);
                e_cc[c * q + d] = e;
                e_cc[d * q + c] = e;
            }
        }
        let spent = (0..q).map(|c| e_cc[c * q + c] <= 1e-10 * sill).collect();
        Ok(Tracker { m, q, var_t: var_t.into_iter().map(|v| v.max(0.0)).collect(), e_tc, e_cc, spent, sill })
    }

    /// Kriging variance at each pot with the loggers added so far.
    pub fn variances(&self) -> &[f64] {
        &self.var_t
    }

    /// The SE at each pot, read by `pot_se` from its kriging variance.
    pub fn se(&self, pot_se: &dyn PotSe) -> Vec<f64> {
        self.var_t.iter().enumerate().map(|(t, v)| pot_se.se(t, *v)).collect()
    }

    /// The objective after adding candidate `c` (not yet added), or `None`
    /// when `c` was added already or stands where the field is known.
    /// Cost O(m) calls of `pot_se`.
    pub fn objective_with(&self, c: usize, objective: Objective, pot_se: &dyn PotSe) -> Option<f64> {
        if self.spent[c] {
            return None;
        }
        let v = self.e_cc[c * self.q + c];
        let col = &self.e_tc[c * self.m..(c + 1) * self.m];
        let se = self
            .var_t
            .iter()
            .zip(col)
            .enumerate()
            .map(|(t, (var, e))| pot_se.se(t, (var - e * e / v).max(0.0)));
        Some(objective.of_se(se))
    }

    /// Add candidate `s` as a logger: the rank-one update of every error
    /// covariance (module docs). Cost O((m + q) q).
    pub fn add(&mut self, s: usize) {
        let (m, q) = (self.m, self.q);
        let v = self.e_cc[s * q + s];
        if self.spent[s] || v <= 0.0 {
            self.spent[s] = true;
            return;
        }
        let es_t: Vec<f64> = self.e_tc[s * m..(s + 1) * m].to_vec();
        let es_c: Vec<f64> = self.e_cc[s * q..(s + 1) * q].to_vec();
        for (var, e) in self.var_t.iter_mut().zip(&es_t) {
            *var = (*var - e * e / v).max(0.0);
        }
        for (c, &ec) in es_c.iter().enumerate() {
            let f = ec / v;
            if f != 0.0 {
                for (x, e) in self.e_tc[c * m..(c + 1) * m].iter_mut().zip(&es_t) {
                    *x -= e * f;
                }
                for (x, e) in self.e_cc[c * q..(c + 1) * q].iter_mut().zip(&es_c) {
                    *x -= e * f;
                }
            }
        }
        for c in 0..q {
            if self.e_cc[c * q + c] <= 1e-10 * self.sill {
                self.spent[c] = true;
            }
        }
        self.spent[s] = true;
    }
}

/// Choose `k` new loggers among `candidates` one at a time, each the one
/// that most lowers `objective` given the loggers before it (greedy forward
/// selection; ties go to the lower candidate index), and cost every current
/// logger's removal. Stops early when no candidate lowers the variance any
/// more. `pot_se` reads a pot's SE from its kriging variance
/// ([`KrigingSe`] for the kriging SE itself). See the module docs for the
/// algebra and its cost.
pub fn place(
    setting: &Setting,
    loggers: &Points,
    pots: &Points,
    candidates: &Points,
    k: usize,
    objective: Objective,
    pot_se: &dyn PotSe,
) -> Result<PlacementResult> {
    let mut tr = Tracker::new(setting, loggers, pots, candidates)?;
    let before = tr.se(pot_se);
    let mut added = Vec::new();
    for _ in 0..k {
        let mut best: Option<(usize, f64)> = None;
        for c in 0..candidates.len() {
            if let Some(o) = tr.objective_with(c, objective, pot_se)
                && best.is_none_or(|(_, b)| o < b)
            {
                best = Some((c, o));
            }
        }
        let Some((c, _)) = best else { break };
        tr.add(c);
        let se = tr.se(pot_se);
        added.push(Added {
            candidate: c,
            mean_se: Objective::MeanSe.of_se(se.iter().copied()),
            max_se: Objective::MaxSe.of_se(se.iter().copied()),
        });
    }
    let removals = removal_costs(setting, loggers, pots, pot_se)?;
    Ok(PlacementResult { before, after: tr.se(pot_se), added, removals })
}

/// Kriging variances at the pots: with every current logger, then with each
/// logger taken away alone (`None` where the trend cannot do without it).
pub type RemovalVariances = (Vec<f64>, Vec<Option<Vec<f64>>>);

/// The kriging variance at each pot with the current loggers, then with
/// each current logger taken away alone (`None` where the trend cannot do
/// without it), by the leave-one-out identity of the module docs. Cost:
/// O(n^3 + n^2 m).
pub fn removal_variances(setting: &Setting, loggers: &Points, pots: &Points) -> Result<RemovalVariances> {
    let n = loggers.len();
    let empty = Points { ids: vec![], x: vec![], y: vec![] };
    let s = Setting {
        drift: setting.drift.as_ref().map(|d| DriftValues { candidates: vec![], ..d.clone() }),
        ..setting.clone()
    };
    check_setting(&s, loggers, pots, &empty)?;
    let sill = s.model.sill();
    let Some(sys) = factor_loggers(&s, loggers)? else { return Ok((vec![sill; pots.len()], Vec::new())) };
    let dv = s.drift.as_ref().filter(|_| s.method == Interpolator::ExternalDrift);
    let st = solve_points(&s, Some(&sys), loggers, pots, dv.map(|d| d.pots.as_slice()));
    let var: Vec<f64> = (0..pots.len()).map(|t| (sill - quad(&st, t, &st, t)).max(0.0)).collect();
    // Diagonal of the loggers' block of A^-1: solve for the unit vectors.
    let p = sys.p();
    let (inv, _) = sys.solve(&Mat::identity(n, n), &Mat::zeros(p, n));
    let without = (0..n)
        .map(|i| {
            let b = inv[(i, i)];
            (b.is_finite() && b > 1e-12 / sill).then(|| {
                (0..pots.len()).map(|t| var[t] + st.lambda[(i, t)] * st.lambda[(i, t)] / b).collect()
            })
        })
        .collect();
    Ok((var, without))
}

/// The SEs over the pots (read by `pot_se`) with each current logger taken
/// away alone ([`removal_variances`]).
pub fn removal_costs(
    setting: &Setting,
    loggers: &Points,
    pots: &Points,
    pot_se: &dyn PotSe,
) -> Result<Vec<Removal>> {
    let (_, without) = removal_variances(setting, loggers, pots)?;
    Ok(without
        .into_iter()
        .enumerate()
        .map(|(i, w)| Removal {
            logger: i,
            se: w.map(|w| {
                let se: Vec<f64> = w.iter().enumerate().map(|(t, v)| pot_se.se(t, *v)).collect();
                (Objective::MeanSe.of_se(se.iter().copied()), Objective::MaxSe.of_se(se.iter().copied()))
            }),
        })
        .collect())
}

/// A regular grid of candidate positions over `[0, length] x [0, width]`
/// with `spacing` metres between neighbours, half a spacing in from the
/// walls, named `g<row>_<col>` (1-based). Cost O(length width / spacing^2).
pub fn candidate_grid(length: f64, width: f64, spacing: f64) -> Result<Points> {
    if !(spacing > 0.0 && length > 0.0 && width > 0.0 && spacing.is_finite()) {
        return Err(SpatialError::BadInput {
            what: "candidate grid".into(),
            message: format!("spacing {spacing} m over {length} x {width} m: all must be > 0"),
        });
    }
    let nx = ((length / spacing).floor() as usize).max(1);
    let ny = ((width / spacing).floor() as usize).max(1);
    if nx * ny > 20_000 {
        return Err(SpatialError::BadInput {
            what: "candidate grid".into(),
            message: format!("{nx} x {ny} positions at {spacing} m; at most 20000 are allowed"),
        });
    }
    let (ox, oy) = ((length - (nx - 1) as f64 * spacing) / 2.0, (width - (ny - 1) as f64 * spacing) / 2.0);
    let mut pts = Points { ids: vec![], x: vec![], y: vec![] };
    for r in 0..ny {
        for c in 0..nx {
            pts.ids.push(format!("g{}_{}", r + 1, c + 1));
            pts.x.push(ox + c as f64 * spacing);
            pts.y.push(oy + r as f64 * spacing);
        }
    }
    Ok(pts)
}

#[cfg(test)]
mod tests;
