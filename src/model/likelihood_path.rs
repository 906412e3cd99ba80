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
//! [`crate::spatial::ascent`]). A variant (for example a latent form for fits
//! with a nugget) is one more arm of [`Likelihood`] and of the matches below.

use super::error::{ModelError, Result};
use crate::spatial::likelihood::{
    self, CovParams, Distances, LikelihoodError, LikelihoodKind, Maximum, Profiled, SearchOptions,
};
use crate::spatial::vecchia::{self, Conditioning};
use faer::Mat;

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
    },
}

impl Likelihood {
    /// `exact` or `neighbours`, as in the outputs.
    pub fn name(&self) -> &'static str {
        match self {
            Likelihood::Exact => "exact",
            Likelihood::Neighbours { .. } => "neighbours",
        }
    }

    /// The number of neighbours, when approximated.
    pub fn neighbours(&self) -> Option<usize> {
        match self {
            Likelihood::Exact => None,
            Likelihood::Neighbours { m } => Some(*m),
        }
    }

    /// In words, for notes and the report.
    pub fn describe(&self) -> String {
        match self {
            Likelihood::Exact => "the exact likelihood".into(),
            Likelihood::Neighbours { m } => {
                format!("the nearest-neighbour (Vecchia) likelihood with {m} neighbours per pot")
            }
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
/// are 0.5 to 8 units off at `m = 30`; up to 2,500 pots the exact answers are
/// kept at a cost a laptop bears.
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
    Ok(Likelihood::Neighbours { m })
}

/// The likelihood of a study's correlated fits and what it needs: for the
/// neighbours path the max-min ordering and the neighbour sets, built once.
#[derive(Clone, Debug)]
pub struct LikelihoodPath {
    likelihood: Likelihood,
    cond: Option<Conditioning>,
}

impl LikelihoodPath {
    /// The exact path.
    pub fn exact() -> LikelihoodPath {
        LikelihoodPath { likelihood: Likelihood::Exact, cond: None }
    }

    /// The neighbours path over the positions `(x, y)` with `m` neighbours.
    pub fn neighbours(
        x: &[f64],
        y: &[f64],
        m: usize,
    ) -> std::result::Result<LikelihoodPath, LikelihoodError> {
        let cond = Conditioning::new(x, y, m)?;
        Ok(LikelihoodPath { likelihood: Likelihood::Neighbours { m }, cond: Some(cond) })
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
            Likelihood::Neighbours { m } => {
                if data.paths.is_some() {
                    return Err(ModelError::Setting {
                        key: "likelihood".into(),
                        message: format!(
                            "the pots move ([pots] moves), and the nearest-neighbour likelihood is defined for pots that stand still ({n} pots)"
                        ),
                        hint: Some("set `likelihood = \"exact\"` in [model]".into()),
                    });
                }
                LikelihoodPath::neighbours(&data.x, &data.y, m).map_err(|source| ModelError::Likelihood {
                    model: "positions".into(),
                    source,
                    hint: None,
                })
            }
        }
    }

    /// The likelihood used.
    pub fn likelihood(&self) -> Likelihood {
        self.likelihood
    }

    /// True on the exact path.
    pub fn is_exact(&self) -> bool {
        self.likelihood == Likelihood::Exact
    }

    /// The profiled ML or REML log-likelihood at `params` with what the GLS
    /// needs, by this path's likelihood: the one place where the evaluation
    /// of a fit is chosen. `x` holds the columns of `X`.
    pub fn evaluate(
        &self,
        dist: &Distances,
        params: &CovParams,
        x: &[Vec<f64>],
        y: &[f64],
        method: LikelihoodKind,
    ) -> std::result::Result<Profiled, LikelihoodError> {
        match (&self.likelihood, &self.cond) {
            (Likelihood::Neighbours { .. }, Some(cond)) => {
                vecchia::profiled_vecchia(cond, params, x, y, method)
            }
            _ => likelihood::profiled(dist, params, x, y, method),
        }
    }

    /// Maximise this path's likelihood over the correlation parameters by the
    /// simplex search of [`likelihood::maximise_by`] (its starts and bounds
    /// from the pots' pair distances, `O(n)` memory) of [`Self::evaluate`].
    pub fn maximise(
        &self,
        dist: &Distances,
        family: crate::spatial::correlation::Family,
        x: &[Vec<f64>],
        y: &[f64],
        method: LikelihoodKind,
        opts: &SearchOptions,
    ) -> std::result::Result<Maximum, LikelihoodError> {
        likelihood::maximise_by(dist, family, opts, |p| self.evaluate(dist, p, x, y, method))
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
            (Likelihood::Neighbours { .. }, Some(cond)) => {
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
            Likelihood::Neighbours { m } => Some(format!(
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
        assert_eq!(choose(Setting::Auto, m, EXACT_UP_TO + 1, 1e12), Ok(Likelihood::Neighbours { m }));
        assert_eq!(choose(Setting::Neighbours, 5, 10, 1e12), Ok(Likelihood::Neighbours { m: 5 }));
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

    /// With `m = n - 1` the neighbours path's evaluation and whitened columns
    /// equal the exact path's (the Vecchia factorisation is then exact), and
    /// the whitened columns are returned in the pots' own order.
    #[test]
    fn full_neighbours_equal_the_exact_path() {
        let n = 40;
        let x: Vec<f64> = (0..n).map(|i| (i % 8) as f64 * 0.5 + 0.01 * (i as f64).sin()).collect();
        let y: Vec<f64> = (0..n).map(|i| (i / 8) as f64 * 0.4).collect();
        let cols = vec![vec![1.0; n], (0..n).map(|i| (i as f64 * 0.37).cos()).collect::<Vec<_>>()];
        let z: Vec<f64> = (0..n).map(|i| (i as f64 * 0.91).sin() + 0.1 * i as f64).collect();
        let dist = Distances::from_coords(&x, &y).unwrap();
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
        assert!(exact.dense_refused("x").is_none());
        assert!(near.dense_refused("the thing").unwrap().contains("the thing is not made"));
    }
}
