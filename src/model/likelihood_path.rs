//! Which likelihood the correlated fits of a study use, chosen in one place:
//! the exact Gaussian likelihood (one dense factorisation of the `n x n`
//! covariance per evaluation, [`crate::spatial::likelihood`]) or the Vecchia
//! nearest-neighbour approximation ([`crate::spatial::vecchia`]: each pot
//! conditioned on its `m` nearest earlier pots in the max-min order; time
//! `O(n m^3)` and memory `O(n m)` per evaluation). Owns the `[model]` keys
//! `likelihood` and `neighbours`, the automatic threshold
//! [`EXACT_UP_TO`], the memory check of a forced exact path
//! ([`dense_bytes`]) and [`LikelihoodPath`], whose [`LikelihoodPath::evaluate`]
//! is the one function that turns correlation parameters into a profiled
//! likelihood for the searches and the final estimates of the neighbours
//! path (the exact path keeps its derivative-based search,
//! [`crate::spatial::ascent`]).
//!
//! On the neighbours path a fit with a nugget of the exponential or Matérn
//! (smoothness up to 1.5) family is evaluated by the latent-level form
//! ([`crate::spatial::vecchia_latent`]: the approximation applied to the
//! noise-free field, the nugget integrated out exactly), the others by the
//! response-level form. Measured at n = 2,000, m = 30 against the exact
//! likelihood (docs/model.md, "Large studies with a nugget"): latent 0.11 and
//! 0.34 log-likelihood units off for the exponential and Matérn 1.5 families
//! against 1.5 and 1.9 for the response-level form; for the spherical family
//! 3.4 against 1.5 and for the Gaussian 43 against 0.8, so those keep the
//! response-level form ([`Likelihood::NeighboursLatent`] is recorded per fit).
//!
//! The error models whose approximation misses the accuracy target at every
//! `m` measured ([`outside_target`]: the spherical family, and the Gaussian
//! family with a nugget; docs/model.md, "Measured 2026-12-05: the accuracy
//! target") are fitted by the exact likelihood under `likelihood = "auto"`
//! where the memory of their exact fits allows ([`exact_kept`]: up to about
//! 4,500 pots on two cores); a forced `"neighbours"` approximates them too.

use super::error::{ModelError, Result};
use crate::spatial::correlation::Family;
use crate::spatial::likelihood::{
    self, CovParams, Distances, LikelihoodError, LikelihoodKind, Maximum, Profiled, SearchOptions,
};
use crate::spatial::vecchia::{self, Conditioning};
use crate::spatial::vecchia_latent::{self, LatentVecchia};
use crate::spatial::vecchia_search;
use faer::Mat;
use std::sync::{Arc, OnceLock};

/// `[model] likelihood` as written: which likelihood the correlated fits use.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Setting {
    /// Always the exact likelihood (refused above the memory limit, [`EXACT_MEMORY_LIMIT_BYTES`]).
    Exact,
    /// Always the nearest-neighbour (Vecchia) likelihood.
    Neighbours,
    /// Exact up to [`EXACT_UP_TO`] pots, nearest-neighbour above (the default).
    Auto,
}

impl Setting {
    /// Parse the value of `[model] likelihood`.
    pub fn parse(s: &str) -> std::result::Result<Setting, String> {
        match s {
            "exact" => Ok(Setting::Exact),
            "neighbours" => Ok(Setting::Neighbours),
            "auto" => Ok(Setting::Auto),
            other => {
                Err(format!("likelihood must be \"exact\", \"neighbours\" or \"auto\", got \"{other}\""))
            }
        }
    }

    /// The value as written in the study file.
    pub fn name(&self) -> &'static str {
        match self {
            Setting::Exact => "exact",
            Setting::Neighbours => "neighbours",
            Setting::Auto => "auto",
        }
    }
}

/// The likelihood a fit used.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Likelihood {
    /// The exact Gaussian likelihood (a closed form for independent errors).
    Exact,
    /// The Vecchia approximation with `m` nearest earlier neighbours.
    Neighbours {
        /// Neighbours each pot is conditioned on.
        m: usize,
        /// The error models outside the approximation's accuracy target
        /// ([`outside_target`]) keep the exact likelihood (`auto` where
        /// memory allows, [`exact_kept`]).
        exact_kept: bool,
    },
    /// The Vecchia approximation of the noise-free field with `m` nearest
    /// earlier positions, the nugget integrated out exactly (a fit's own
    /// record; the study's path is [`Likelihood::Neighbours`]).
    NeighboursLatent {
        /// Neighbours each position is conditioned on.
        m: usize,
    },
}

impl Likelihood {
    /// `exact` or `neighbours`, as in the outputs.
    pub fn name(&self) -> &'static str {
        match self {
            Likelihood::Exact => "exact",
            Likelihood::Neighbours { .. } => "neighbours",
            Likelihood::NeighboursLatent { .. } => "neighbours_latent",
        }
    }

    /// The number of neighbours, when approximated.
    pub fn neighbours(&self) -> Option<usize> {
        match self {
            Likelihood::Exact => None,
            Likelihood::Neighbours { m, .. } | Likelihood::NeighboursLatent { m } => Some(*m),
        }
    }

    /// In words, for notes and the report.
    pub fn describe(&self) -> String {
        match self {
            Likelihood::Exact => "the exact likelihood".into(),
            Likelihood::Neighbours { m, exact_kept: false } => format!(
                "the nearest-neighbour (Vecchia) likelihood with {m} neighbours per pot (outside its accuracy target for spherical fits and Gaussian fits with a nugget: their log-likelihoods may be 1 to 6 units off, docs/model.md)"
            ),
            Likelihood::Neighbours { m, exact_kept: true } => format!(
                "the nearest-neighbour (Vecchia) likelihood with {m} neighbours per pot (the spherical fits and the Gaussian fits with a nugget keep the exact likelihood: the approximation misses its accuracy target for them)"
            ),
            Likelihood::NeighboursLatent { m } => format!(
                "the nearest-neighbour (Vecchia) likelihood of the noise-free field with {m} neighbours per position, the nugget integrated out"
            ),
        }
    }
}

/// Up to this many analysed pots `likelihood = "auto"` uses the exact
/// likelihood, above it the nearest-neighbour one. Reasoning (measured,
/// docs/model.md "Which likelihood"): the exact model stage holds about
/// [`DENSE_MATRICES`] dense `n x n` matrices of 8 bytes at its peak (the
/// grid's fits on their threads, the small-sample correction and the
/// imputations), so at 2,500 pots about 1.8 GB, inside the 2 GB a platform
/// study may take; and the exact work grows as `n^3` against `n m^3`: on the
/// 1,680-pot platform study the whole exact model stage took 549 s of CPU
/// against 294 s on the neighbours path (dev build), so the neighbours path
/// is already the cheaper one there, but its log-likelihoods with a nugget
/// were 0.5 to 8 units off at `m = 30` by the response-level form (the latent
/// form now used for the exponential and Matérn families with a nugget, and
/// `m = 40`: within 0.15 at n = 2,000 and 4,000; the spherical family and the
/// Gaussian with a nugget stay 1 to 6 off, and are kept exact above this
/// threshold where memory allows, [`exact_kept`]); up to 2,500 pots the exact
/// answers are kept at a cost a laptop bears.
pub const EXACT_UP_TO: usize = 2_500;

/// Dense `n x n` matrices of 8 bytes the exact model stage holds at its peak:
/// measured 35 on the 1,680-pot platform study with the grid's fits on two
/// threads (peak resident 909 MB against 117 MB for the same run on the
/// nearest-neighbour path, `(909 - 117) MB / (8 x 1680^2 B)`; docs/model.md
/// "Which likelihood"). Each further fit thread adds a few (its covariance,
/// factor and derivative), so on more cores this is a lower bound.
pub const DENSE_MATRICES: f64 = 36.0;

/// A forced exact path is refused when [`dense_bytes`] exceeds this: 8 GB,
/// the memory of an ordinary laptop (the tool's target machine).
pub const EXACT_MEMORY_LIMIT_BYTES: f64 = 8e9;

/// The memory the exact model stage needs at `n` pots, in bytes:
/// [`DENSE_MATRICES`] x `8 n^2`.
pub fn dense_bytes(n: usize) -> f64 {
    DENSE_MATRICES * 8.0 * (n as f64) * (n as f64)
}

/// The likelihood for `n` analysed pots under `setting` with `m` neighbours
/// (`[model] neighbours`), or why not: a forced exact path above the memory
/// limit `limit` (bytes; [`EXACT_MEMORY_LIMIT_BYTES`]), or `m` not below `n`
/// on the neighbours path. `Err` holds the key, the message and the hint.
/// Nothing is allocated: it is decided from `n` alone.
pub fn choose(
    setting: Setting,
    m: usize,
    n: usize,
    limit: f64,
) -> std::result::Result<Likelihood, (&'static str, String, String)> {
    let neighbours = match setting {
        Setting::Exact => false,
        Setting::Neighbours => true,
        Setting::Auto => n > EXACT_UP_TO,
    };
    if !neighbours {
        let need = dense_bytes(n);
        if need > limit {
            return Err((
                "likelihood",
                format!(
                    "the exact likelihood at {n} pots needs about {:.1} GB ({DENSE_MATRICES:.0} dense {n} x {n} matrices of 8 bytes), above the {:.1} GB allowed",
                    need / 1e9,
                    limit / 1e9
                ),
                format!(
                    "set `likelihood = \"neighbours\"` (or \"auto\") in [model]: the nearest-neighbour likelihood needs memory in proportion to n x {m}"
                ),
            ));
        }
        return Ok(Likelihood::Exact);
    }
    if m == 0 || m >= n {
        return Err((
            "neighbours",
            format!("neighbours = {m} must be at least 1 and below the number of analysed pots ({n})"),
            format!("the default is {}", vecchia::DEFAULT_NEIGHBOURS),
        ));
    }
    Ok(Likelihood::Neighbours { m, exact_kept: setting == Setting::Auto && exact_kept(n, fit_threads(n)) })
}

/// True for the error models whose nearest-neighbour likelihood misses the
/// accuracy target (`|log-likelihood - exact| <= 0.5` at the exact optimum)
/// at every `m` measured: the spherical family, with and without nugget
/// (1.4 to 2.8 at n = 2,000 and 4,000 for `m` from 30 to 60, in both forms:
/// its kriging weights do not fall off with distance inside the range, so
/// far neighbours matter), and the Gaussian family with a nugget (0.8 to
/// 6.1 response-level; the latent form's noise-free Gaussian field is
/// nearly singular, 18 to 306; a share of the nugget moved into the field
/// did not hold under 0.5 at every `m` either). docs/model.md, "Measured
/// 2026-12-05: the accuracy target". Of the Matérn family only smoothness
/// 1.5 was measured; the others are treated as it is.
pub fn outside_target(family: Family, nugget: bool) -> bool {
    match family {
        Family::Spherical => true,
        Family::Gaussian => nugget,
        Family::Exponential | Family::Matern { .. } => false,
    }
}

/// Dense `n x n` matrices of 8 bytes one exact fit holds at its peak on the
/// neighbours path (its search and estimates; no imputations or small-sample
/// corrections there). Measured (`benches/vecchia.rs` under
/// `/usr/bin/time -v`, n = 4,000, release build): the process peaked at 711 MB
/// with one exact Gaussian ML fit with a nugget (the exact path's search with
/// its scores) against 238 MB without it, i.e. about 4.8 matrices of 128 MB
/// above the kept pair distances; the spherical family's simplex search stayed
/// under the run's other peak (one matrix). 6 leaves room for the REML
/// fits' extra matrix (docs/model.md).
pub const EXACT_FIT_MATRICES: f64 = 6.0;

/// The memory `auto` lets the exact fits of the error models
/// [`outside_target`] take on the neighbours path: 2 GB, what a platform
/// study may take (the same budget as [`EXACT_UP_TO`]).
pub const EXACT_KEPT_BYTES: f64 = 2e9;

/// Fits the comparison grid runs at once at `n` pots (its threads: the
/// cores up to 8, one below 64 pots).
fn fit_threads(n: usize) -> usize {
    if n < 64 { 1 } else { std::thread::available_parallelism().map(|t| t.get()).unwrap_or(1).min(8) }
}

/// True when `threads` exact fits at `n` pots, [`EXACT_FIT_MATRICES`] dense
/// matrices each, fit in [`EXACT_KEPT_BYTES`]: then `auto` keeps the error
/// models [`outside_target`] exact on the neighbours path (about 4,000 pots
/// on two cores, 2,000 on eight).
pub fn exact_kept(n: usize, threads: usize) -> bool {
    threads.max(1) as f64 * EXACT_FIT_MATRICES * 8.0 * (n as f64) * (n as f64) <= EXACT_KEPT_BYTES
}

/// The likelihood of a study's correlated fits and what it needs: for the
/// neighbours path the max-min ordering and the neighbour sets, built once.
#[derive(Clone, Debug)]
pub struct LikelihoodPath {
    likelihood: Likelihood,
    cond: Option<Conditioning>,
    /// The latent-level structure (the positions' conditioning and the
    /// symbolic factorisation of `W`), built at the first fit with a nugget
    /// that uses it and shared by every later one.
    latent: OnceLock<std::result::Result<Arc<LatentVecchia>, LikelihoodError>>,
}

/// True when a fit at `params` on the neighbours path uses the latent form
/// (module docs): a nugget, and the exponential family or a Matérn of
/// smoothness up to 1.5 (the families where it was measured the better
/// form).
pub fn latent_form(params: &CovParams) -> bool {
    params.eta > 0.0 && latent_family(params.family)
}

/// The families whose nugget fits take the latent form ([`latent_form`]).
fn latent_family(family: Family) -> bool {
    match family {
        Family::Exponential => true,
        Family::Matern { nu } => nu <= 1.5,
        Family::Gaussian | Family::Spherical => false,
    }
}

impl LikelihoodPath {
    /// The exact path.
    pub fn exact() -> LikelihoodPath {
        LikelihoodPath { likelihood: Likelihood::Exact, cond: None, latent: OnceLock::new() }
    }

    /// The neighbours path over the positions `(x, y)` with `m` neighbours.
    pub fn neighbours(
        x: &[f64],
        y: &[f64],
        m: usize,
    ) -> std::result::Result<LikelihoodPath, LikelihoodError> {
        let cond = Conditioning::new(x, y, m)?;
        Ok(LikelihoodPath {
            likelihood: Likelihood::Neighbours { m, exact_kept: false },
            cond: Some(cond),
            latent: OnceLock::new(),
        })
    }

    /// This neighbours path with the error models [`outside_target`] fitted
    /// by the exact likelihood (`keep`), or all approximated.
    pub fn keeping_exact(mut self, keep: bool) -> LikelihoodPath {
        if let Likelihood::Neighbours { exact_kept, .. } = &mut self.likelihood {
            *exact_kept = keep;
        }
        self
    }

    /// True when the fits of `family` (with a nugget when `nugget`) use the
    /// exact likelihood: always on the exact path; on the neighbours path
    /// for the error models [`outside_target`] when it keeps them exact.
    pub fn exact_for(&self, family: Family, nugget: bool) -> bool {
        match self.likelihood {
            Likelihood::Exact => true,
            Likelihood::Neighbours { exact_kept, .. } => exact_kept && outside_target(family, nugget),
            Likelihood::NeighboursLatent { .. } => false,
        }
    }

    /// The path of a study's `[model]` for its analysed pots: [`choose`],
    /// then the neighbour sets when approximated. Pots that move (`W R W'`)
    /// have no nearest-neighbour form: refused on the neighbours path.
    pub fn for_data(spec: &super::data::ModelSpec, data: &super::data::ModelData) -> Result<LikelihoodPath> {
        let n = data.response.len();
        let setting_error = |(key, message, hint): (&'static str, String, String)| ModelError::Setting {
            key: key.to_string(),
            message,
            hint: Some(hint),
        };
        match choose(spec.likelihood, spec.neighbours, n, EXACT_MEMORY_LIMIT_BYTES).map_err(setting_error)? {
            Likelihood::Exact => Ok(LikelihoodPath::exact()),
            chosen @ (Likelihood::Neighbours { .. } | Likelihood::NeighboursLatent { .. }) => {
                let m = chosen.neighbours().expect("an approximated likelihood has its m");
                let exact_kept = matches!(chosen, Likelihood::Neighbours { exact_kept: true, .. });
                if data.paths.is_some() {
                    return Err(ModelError::Setting {
                        key: "likelihood".into(),
                        message: format!(
                            "the pots move ([pots] moves), and the nearest-neighbour likelihood is defined for pots that stand still ({n} pots)"
                        ),
                        hint: Some("set `likelihood = \"exact\"` in [model]".into()),
                    });
                }
                LikelihoodPath::neighbours(&data.x, &data.y, m).map(|p| p.keeping_exact(exact_kept)).map_err(
                    |source| ModelError::Likelihood { model: "positions".into(), source, hint: None },
                )
            }
        }
    }

    /// The likelihood of the study's path (`Neighbours` for the whole
    /// neighbours path; [`Self::likelihood_of`] for one fit).
    pub fn likelihood(&self) -> Likelihood {
        self.likelihood
    }

    /// The likelihood a fit at `params` is evaluated by: on the neighbours
    /// path the latent form where [`latent_form`] says so.
    pub fn likelihood_of(&self, params: &CovParams) -> Likelihood {
        self.likelihood_for(params, params.eta > 0.0)
    }

    /// The likelihood of a fit at `params` of an error model with a nugget
    /// (`nugget`) or without: [`Self::likelihood_of`], and the exact one
    /// where [`Self::exact_for`] says so.
    pub fn likelihood_for(&self, params: &CovParams, nugget: bool) -> Likelihood {
        if self.exact_for(params.family, nugget) {
            return Likelihood::Exact;
        }
        match self.likelihood {
            Likelihood::Neighbours { m, .. } if latent_form(params) => Likelihood::NeighboursLatent { m },
            other => other,
        }
    }

    /// The latent structure, built once from the pots' conditioning.
    fn latent(&self, cond: &Conditioning) -> std::result::Result<&LatentVecchia, LikelihoodError> {
        self.latent
            .get_or_init(|| LatentVecchia::from_conditioning(cond).map(Arc::new))
            .as_ref()
            .map(|l| l.as_ref())
            .map_err(Clone::clone)
    }

    /// True on the exact path.
    pub fn is_exact(&self) -> bool {
        self.likelihood == Likelihood::Exact
    }

    /// The profiled ML or REML log-likelihood at `params` with what the GLS
    /// needs, by this path's likelihood ([`Self::likelihood_of`]): the one
    /// place where the evaluation of a fit is chosen. `x` holds the columns
    /// of `X`.
    pub fn evaluate(
        &self,
        dist: &Distances,
        params: &CovParams,
        x: &[Vec<f64>],
        y: &[f64],
        method: LikelihoodKind,
    ) -> std::result::Result<Profiled, LikelihoodError> {
        match (&self.likelihood, &self.cond) {
            _ if self.exact_for(params.family, params.eta > 0.0) => {
                likelihood::profiled(dist, params, x, y, method)
            }
            (Likelihood::Neighbours { .. }, Some(cond)) if latent_form(params) => {
                vecchia_latent::profiled_latent(self.latent(cond)?, params, x, y, method)
            }
            (Likelihood::Neighbours { .. }, Some(cond)) => {
                vecchia::profiled_vecchia(cond, params, x, y, method)
            }
            _ => likelihood::profiled(dist, params, x, y, method),
        }
    }

    /// Maximise this path's likelihood over the correlation parameters: on
    /// the neighbours path the derivative-based search of
    /// [`vecchia_search::maximise_vecchia_shared`] (the simplex for the
    /// spherical family), or for a nugget search of a latent family
    /// [`vecchia_search::maximise_latent_shared`] (its evaluations at
    /// `eta = 0` are the response-level ones); on the exact path the simplex
    /// search of [`likelihood::maximise_by`] (the model stage uses
    /// [`crate::spatial::ascent`] there). Starts and bounds come from the
    /// pots' pair distances (`O(n)` memory).
    pub fn maximise(
        &self,
        dist: &Distances,
        family: crate::spatial::correlation::Family,
        x: &[Vec<f64>],
        y: &[f64],
        method: LikelihoodKind,
        opts: &SearchOptions,
    ) -> std::result::Result<Maximum, LikelihoodError> {
        let (mut all, _) = self.maximise_shared(dist, family, &[x], y, method, opts);
        all.pop().expect("one design, one maximum")
    }

    /// [`Self::maximise`] for several fixed parts with the same response and
    /// error model: on the neighbours path the start grid's conditionals are
    /// computed once for all of them. Returns each part's maximum and the
    /// seconds of the shared work.
    pub fn maximise_shared(
        &self,
        dist: &Distances,
        family: crate::spatial::correlation::Family,
        designs: &[&[Vec<f64>]],
        y: &[f64],
        method: LikelihoodKind,
        opts: &SearchOptions,
    ) -> vecchia_search::SharedSearch {
        match (&self.likelihood, &self.cond) {
            (Likelihood::Neighbours { .. }, Some(_)) if self.exact_for(family, opts.nugget) => {
                let t0 = std::time::Instant::now();
                let (maxima, _) =
                    crate::spatial::ascent::maximise_shared(dist, family, designs, y, method, opts);
                let own: f64 = maxima.iter().flatten().map(|m| m.seconds).sum();
                (maxima, (t0.elapsed().as_secs_f64() - own).max(0.0))
            }
            (Likelihood::Neighbours { .. }, Some(cond)) if opts.nugget && latent_family(family) => {
                match self.latent(cond) {
                    Ok(lat) => {
                        vecchia_search::maximise_latent_shared(dist, lat, family, designs, y, method, opts)
                    }
                    Err(e) => ((0..designs.len()).map(|_| Err(e.clone())).collect(), 0.0),
                }
            }
            (Likelihood::Neighbours { .. }, Some(cond)) => {
                vecchia_search::maximise_vecchia_shared(dist, cond, family, designs, y, method, opts)
            }
            _ => (
                designs
                    .iter()
                    .map(|x| {
                        likelihood::maximise_by(dist, family, opts, |p| {
                            likelihood::profiled(dist, p, x, y, method)
                        })
                    })
                    .collect(),
                0.0,
            ),
        }
    }

    /// The columns `x` whitened at `params` (`L^-1 X` on the exact path,
    /// `U' X` on the neighbours path), each in the pots' own order.
    pub fn whiten_columns(
        &self,
        dist: &Distances,
        params: &CovParams,
        x: &[Vec<f64>],
    ) -> std::result::Result<Vec<Vec<f64>>, LikelihoodError> {
        let n = dist.len();
        match (&self.likelihood, &self.cond) {
            (Likelihood::Neighbours { .. }, Some(cond))
                if !self.exact_for(params.family, params.eta > 0.0) =>
            {
                let cols: Vec<&[f64]> = x.iter().map(Vec::as_slice).collect();
                let (w, _) = vecchia::whiten_vecchia(cond, params, &cols)?;
                Ok((0..x.len())
                    .map(|j| {
                        let mut own = vec![0.0; n];
                        for (k, &i) in cond.order().iter().enumerate() {
                            own[i] = w[(k, j)];
                        }
                        own
                    })
                    .collect())
            }
            _ => {
                let l = likelihood::cholesky(dist, params)?;
                let mut wx = Mat::from_fn(n, x.len(), |i, j| x[j][i]);
                likelihood::whiten(l.as_ref(), &mut wx);
                Ok((0..x.len()).map(|j| wx.col_as_slice(j).to_vec()).collect())
            }
        }
    }

    /// Why a computation that needs the dense `n x n` covariance is not made
    /// on this path (`None` on the exact path): `what` names it.
    pub fn dense_refused(&self, what: &str) -> Option<String> {
        match self.likelihood {
            Likelihood::Exact => None,
            Likelihood::Neighbours { m, .. } | Likelihood::NeighboursLatent { m } => Some(format!(
                "{what} is not made under the nearest-neighbour likelihood ({m} neighbours): it needs the dense n x n covariance of the pots"
            )),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The automatic choice switches at the threshold; a forced exact path
    /// above the memory limit is refused with the memory and the key; `m`
    /// must lie in `[1, n)`.
    #[test]
    fn choice_threshold_memory_and_neighbours() {
        let m = vecchia::DEFAULT_NEIGHBOURS;
        assert_eq!(choose(Setting::Auto, m, EXACT_UP_TO, 1e12), Ok(Likelihood::Exact));
        let above = EXACT_UP_TO + 1;
        assert_eq!(
            choose(Setting::Auto, m, above, 1e12),
            Ok(Likelihood::Neighbours { m, exact_kept: exact_kept(above, fit_threads(above)) })
        );
        assert_eq!(
            choose(Setting::Neighbours, 5, 10, 1e12),
            Ok(Likelihood::Neighbours { m: 5, exact_kept: false })
        );
        // forced neighbours never keeps a family exact
        assert_eq!(
            choose(Setting::Neighbours, m, above, 1e12),
            Ok(Likelihood::Neighbours { m, exact_kept: false })
        );
        assert_eq!(choose(Setting::Exact, m, 100_000, 1e12).unwrap_err().0, "likelihood");
        // 20,000 pots forced exact: the 8 GB limit
        let (key, message, hint) = choose(Setting::Exact, m, 20_000, EXACT_MEMORY_LIMIT_BYTES).unwrap_err();
        assert_eq!(key, "likelihood");
        assert!(message.contains("20000 pots needs about 115.2 GB"), "{message}");
        assert!(hint.contains("likelihood = \"neighbours\""), "{hint}");
        // just below and above the limit
        let n_max = (EXACT_MEMORY_LIMIT_BYTES / (8.0 * DENSE_MATRICES)).sqrt().floor() as usize;
        assert!(choose(Setting::Exact, m, n_max, EXACT_MEMORY_LIMIT_BYTES).is_ok());
        assert!(choose(Setting::Exact, m, n_max + 1, EXACT_MEMORY_LIMIT_BYTES).is_err());
        assert_eq!(choose(Setting::Neighbours, 10, 10, 1e12).unwrap_err().0, "neighbours");
        assert_eq!(choose(Setting::Neighbours, 0, 10, 1e12).unwrap_err().0, "neighbours");
        assert!(Setting::parse("nearest").is_err());
        assert_eq!(Setting::parse("auto"), Ok(Setting::Auto));
    }

    /// 40 pots on a slightly perturbed 8 x 5 grid: positions, columns
    /// `[1, a smooth covariate]`, a response and their distances.
    #[allow(clippy::type_complexity)]
    fn forty_pots() -> (Vec<f64>, Vec<f64>, Vec<Vec<f64>>, Vec<f64>, Distances) {
        let n = 40;
        let x: Vec<f64> = (0..n).map(|i| (i % 8) as f64 * 0.5 + 0.01 * (i as f64).sin()).collect();
        let y: Vec<f64> = (0..n).map(|i| (i / 8) as f64 * 0.4).collect();
        let cols = vec![vec![1.0; n], (0..n).map(|i| (i as f64 * 0.37).cos()).collect::<Vec<_>>()];
        let z: Vec<f64> = (0..n).map(|i| (i as f64 * 0.91).sin() + 0.1 * i as f64).collect();
        let dist = Distances::from_coords(&x, &y).unwrap();
        (x, y, cols, z, dist)
    }

    /// With `m = n - 1` the neighbours path's evaluation and whitened columns
    /// equal the exact path's (the Vecchia factorisation is then exact), and
    /// the whitened columns are returned in the pots' own order.
    #[test]
    fn full_neighbours_equal_the_exact_path() {
        let (x, y, cols, z, dist) = forty_pots();
        let n = x.len();
        let params =
            CovParams { family: crate::spatial::correlation::Family::Exponential, range: 0.8, eta: 0.2 };
        let near = LikelihoodPath::neighbours(&x, &y, n - 1).unwrap();
        let exact = LikelihoodPath::exact();
        for method in [LikelihoodKind::Ml, LikelihoodKind::Reml] {
            let a = near.evaluate(&dist, &params, &cols, &z, method).unwrap();
            let b = exact.evaluate(&dist, &params, &cols, &z, method).unwrap();
            assert!((a.loglik - b.loglik).abs() <= 1e-10 * b.loglik.abs(), "{} {}", a.loglik, b.loglik);
            for (u, v) in a.beta.iter().zip(&b.beta) {
                assert!((u - v).abs() < 1e-9);
            }
        }
        // whitened columns: the same sum of squares and cross-products X'V^-1 X
        let wa = near.whiten_columns(&dist, &params, &cols).unwrap();
        let wb = exact.whiten_columns(&dist, &params, &cols).unwrap();
        for i in 0..2 {
            for j in 0..2 {
                let sa: f64 = wa[i].iter().zip(&wa[j]).map(|(p, q)| p * q).sum();
                let sb: f64 = wb[i].iter().zip(&wb[j]).map(|(p, q)| p * q).sum();
                assert!((sa - sb).abs() < 1e-9 * sb.abs().max(1.0), "{sa} {sb}");
            }
        }
        assert_eq!(near.likelihood_of(&params), Likelihood::NeighboursLatent { m: n - 1 });
        assert_eq!(exact.likelihood_of(&params), Likelihood::Exact);
        assert!(exact.dense_refused("x").is_none());
        assert!(near.dense_refused("the thing").unwrap().contains("the thing is not made"));
    }

    /// The neighbours path routes each evaluation by [`latent_form`]: a
    /// nugget fit of the exponential family to the latent-level form (the
    /// same value as [`LatentVecchia`] built on its own), the Gaussian
    /// family with a nugget and every fit without one to the response-level
    /// form; each fit's record says which. `m = 6` of 40 pots, so the two
    /// forms give different values and a wrong route is seen.
    #[test]
    fn nugget_fits_take_the_latent_form_by_family() {
        use crate::spatial::correlation::Family;
        let n = 40;
        let x: Vec<f64> = (0..n).map(|i| (i % 8) as f64 * 0.5 + 0.01 * (i as f64).sin()).collect();
        let y: Vec<f64> = (0..n).map(|i| (i / 8) as f64 * 0.4).collect();
        let cols = vec![vec![1.0; n]];
        let z: Vec<f64> = (0..n).map(|i| (i as f64 * 0.91).sin() + 0.1 * i as f64).collect();
        let dist = Distances::from_coords(&x, &y).unwrap();
        let m = 6;
        let near = LikelihoodPath::neighbours(&x, &y, m).unwrap();
        let latent = LatentVecchia::new(&x, &y, m).unwrap();
        let cond = Conditioning::new(&x, &y, m).unwrap();
        let method = LikelihoodKind::Reml;
        let exp = CovParams { family: Family::Exponential, range: 0.8, eta: 0.2 };
        let got = near.evaluate(&dist, &exp, &cols, &z, method).unwrap().loglik;
        let lat = latent.evaluate(&exp, &cols, &z, method, true).unwrap().loglik;
        let resp = vecchia::profiled_vecchia(&cond, &exp, &cols, &z, method).unwrap().loglik;
        assert_eq!(got, lat);
        assert!((lat - resp).abs() > 1e-6, "the two forms agree ({lat}): the test cannot tell them apart");
        assert_eq!(near.likelihood_of(&exp), Likelihood::NeighboursLatent { m });
        for params in [
            CovParams { family: Family::Gaussian, range: 0.6, eta: 0.2 },
            CovParams { family: Family::Spherical, range: 2.0, eta: 0.2 },
            CovParams { eta: 0.0, ..exp },
        ] {
            let got = near.evaluate(&dist, &params, &cols, &z, method).unwrap().loglik;
            let resp = vecchia::profiled_vecchia(&cond, &params, &cols, &z, method).unwrap().loglik;
            assert_eq!(got, resp, "{params:?}");
            assert_eq!(near.likelihood_of(&params), Likelihood::Neighbours { m, exact_kept: false });
        }
        assert!(latent_form(&CovParams { family: Family::Matern { nu: 1.5 }, range: 1.0, eta: 0.1 }));
        assert!(!latent_form(&CovParams { family: Family::Matern { nu: 2.5 }, range: 1.0, eta: 0.1 }));
        // the search ends on the latent form's value at its optimum
        let opts = SearchOptions { nugget: true, ..SearchOptions::default() };
        let best = near.maximise(&dist, Family::Exponential, &cols, &z, method, &opts).unwrap().best;
        if latent_form(&best.params) {
            let again = latent.evaluate(&best.params, &cols, &z, method, true).unwrap();
            assert_eq!(best.loglik, again.loglik);
            assert_eq!(best.whitened.len(), n);
        }
    }

    /// The memory rule of the families kept exact: `threads` fits of
    /// [`EXACT_FIT_MATRICES`] dense matrices within [`EXACT_KEPT_BYTES`]
    /// (2 GB / (2 x 6 x 8 bytes) = 4,564^2 on two cores); the error models
    /// outside the target are the spherical family and the Gaussian with a
    /// nugget.
    #[test]
    fn exact_kept_by_memory_and_family() {
        let n2 = (EXACT_KEPT_BYTES / (2.0 * EXACT_FIT_MATRICES * 8.0)).sqrt().floor() as usize;
        assert_eq!(n2, 4564);
        assert!(exact_kept(n2, 2) && !exact_kept(n2 + 1, 2));
        assert!(exact_kept(2_000, 8) && !exact_kept(2_500, 8));
        assert!(!exact_kept(20_000, 1));
        assert!(outside_target(Family::Spherical, false) && outside_target(Family::Spherical, true));
        assert!(outside_target(Family::Gaussian, true) && !outside_target(Family::Gaussian, false));
        for family in [Family::Exponential, Family::Matern { nu: 1.5 }] {
            assert!(!outside_target(family, false) && !outside_target(family, true));
        }
        assert!(
            Likelihood::Neighbours { m: 40, exact_kept: true }
                .describe()
                .contains("keep the exact likelihood")
        );
        assert!(
            Likelihood::Neighbours { m: 40, exact_kept: false }
                .describe()
                .contains("outside its accuracy target")
        );
    }

    /// A neighbours path that keeps the families outside the target exact:
    /// their evaluations, whitened columns and searches are the exact
    /// path's (the same values and maximum as the exact search of
    /// [`crate::spatial::ascent`]), recorded as exact; the other families
    /// stay approximated. `m = 6` of 40 pots, so a wrong route is seen.
    #[test]
    fn kept_families_are_fitted_exactly() {
        use crate::spatial::correlation::Family;
        let (x, y, cols, z, dist) = forty_pots();
        let kept = LikelihoodPath::neighbours(&x, &y, 6).unwrap().keeping_exact(true);
        let plain = LikelihoodPath::neighbours(&x, &y, 6).unwrap();
        let exact = LikelihoodPath::exact();
        let method = LikelihoodKind::Ml;
        for (params, nugget) in [
            (CovParams { family: Family::Spherical, range: 2.0, eta: 0.0 }, false),
            (CovParams { family: Family::Spherical, range: 2.0, eta: 0.2 }, true),
            (CovParams { family: Family::Gaussian, range: 0.6, eta: 0.2 }, true),
        ] {
            assert!(kept.exact_for(params.family, nugget) && !plain.exact_for(params.family, nugget));
            let a = kept.evaluate(&dist, &params, &cols, &z, method).unwrap().loglik;
            let b = exact.evaluate(&dist, &params, &cols, &z, method).unwrap().loglik;
            let c = plain.evaluate(&dist, &params, &cols, &z, method).unwrap().loglik;
            assert_eq!(a, b, "{params:?}");
            assert!(
                (a - c).abs() > 1e-6,
                "{params:?}: the approximation equals the exact value, the test cannot tell"
            );
            assert_eq!(
                kept.whiten_columns(&dist, &params, &cols).unwrap(),
                exact.whiten_columns(&dist, &params, &cols).unwrap()
            );
            assert_eq!(kept.likelihood_for(&params, nugget), Likelihood::Exact);
            assert_ne!(plain.likelihood_for(&params, nugget), Likelihood::Exact);
            let opts = SearchOptions { nugget, ..SearchOptions::default() };
            let got = kept.maximise(&dist, params.family, &cols, &z, method, &opts).unwrap();
            let (mut want, _) = crate::spatial::ascent::maximise_shared(
                &dist,
                params.family,
                &[cols.as_slice()],
                &z,
                method,
                &opts,
            );
            let want = want.pop().unwrap().unwrap();
            assert_eq!(got.best.loglik, want.best.loglik, "{params:?}");
        }
        for (params, nugget) in [
            (CovParams { family: Family::Gaussian, range: 0.6, eta: 0.0 }, false),
            (CovParams { family: Family::Exponential, range: 0.8, eta: 0.2 }, true),
        ] {
            assert!(!kept.exact_for(params.family, nugget));
            let a = kept.evaluate(&dist, &params, &cols, &z, method).unwrap().loglik;
            let c = plain.evaluate(&dist, &params, &cols, &z, method).unwrap().loglik;
            assert_eq!(a, c, "{params:?}");
        }
    }
}
