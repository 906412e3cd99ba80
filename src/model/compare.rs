//! Model comparison and the verdict: information criteria across a grid of
//! ML fits, Akaike weights, likelihood-ratio tests for nested pairs (with the
//! boundary correction of Self & Liang 1987), the rule that turns the
//! comparison into one of four words, and Rubin's rules for combining fits on
//! conditional simulations of a mapped driver.
//!
//! Everything here works on summaries of fitted models, so the rule is
//! testable on its own and the same for every caller. Only ML fits enter a
//! comparison: [`Candidate::new`] refuses anything else, so REML likelihoods of
//! models with different fixed effects can never be compared by accident.
//!
//! The decision rule is documented for users in `docs/verdict.md`.

use crate::spatial::likelihood::LikelihoodKind;
use serde::Serialize;
use statrs::distribution::{ChiSquared, ContinuousCDF};

/// Which kind of explanation a candidate model stands for.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Explanation {
    /// The factorial design alone with independent errors: no spatial signal.
    None,
    /// One or more microclimate drivers, independent errors.
    Covariate,
    /// Spatially correlated errors, no drivers.
    Correlation,
    /// Drivers and spatially correlated errors.
    Both,
}

impl Explanation {
    /// The verdict word.
    pub fn word(self) -> &'static str {
        match self {
            Explanation::None => "none",
            Explanation::Covariate => "covariate",
            Explanation::Correlation => "correlation",
            Explanation::Both => "both",
        }
    }

    /// Classify a model by whether it has drivers and correlated errors.
    pub fn of(has_drivers: bool, correlated: bool) -> Explanation {
        match (has_drivers, correlated) {
            (false, false) => Explanation::None,
            (true, false) => Explanation::Covariate,
            (false, true) => Explanation::Correlation,
            (true, true) => Explanation::Both,
        }
    }
}

/// Information criteria of a fit with maximised log-likelihood `l`, `k`
/// estimated parameters and `n` observations: `AIC = -2 l + 2k` (Akaike
/// 1974), `BIC = -2 l + k ln n` (Schwarz 1978), `AICc = AIC + 2k(k+1)/(n-k-1)`
/// (Hurvich & Tsai 1989; `None` when `n - k - 1 <= 0`). The one place they
/// are computed.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Criteria {
    /// AIC.
    pub aic: f64,
    /// BIC.
    pub bic: f64,
    /// AICc.
    pub aicc: Option<f64>,
}

/// [`Criteria`] of `(loglik, k, n)`.
pub fn information_criteria(loglik: f64, k: usize, n: usize) -> Criteria {
    let aic = crate::spatial::likelihood::aic(loglik, k);
    let bic = -2.0 * loglik + k as f64 * (n as f64).ln();
    let aicc = if n > k + 1 { Some(aic + 2.0 * (k * (k + 1)) as f64 / (n - k - 1) as f64) } else { None };
    Criteria { aic, bic, aicc }
}

/// One ML fit entering the comparison.
#[derive(Clone, Debug, Serialize)]
pub struct Candidate {
    /// A unique, readable name (e.g. `base+night_cold_hours | exponential+nugget`).
    pub name: String,
    /// Driver names in the fixed part (empty for the base design).
    pub drivers: Vec<String>,
    /// Correlation family name, or `None` for independent errors.
    pub correlation: Option<String>,
    /// Whether a nugget was fitted.
    pub nugget: bool,
    /// Maximised ML log-likelihood, all constants included.
    pub loglik: f64,
    /// Number of estimated parameters: beta, sigma², and each correlation
    /// parameter (range, nugget share).
    pub n_params: usize,
    /// Number of observations.
    pub n_obs: usize,
}

/// Why a candidate was refused.
#[derive(Debug, thiserror::Error, PartialEq)]
#[non_exhaustive]
pub enum CompareError {
    /// Only ML fits can be compared across fixed effects.
    #[error(
        "model `{0}` was fitted by REML; only ML fits enter the comparison (REML likelihoods of different fixed effects are likelihoods of different data)"
    )]
    NotMl(String),
    /// The candidates do not share the same observations.
    #[error(
        "model `{name}` was fitted on {n} pots where the others use {expected}; information criteria need the same pots"
    )]
    DifferentData {
        /// The model.
        name: String,
        /// Its pot count.
        n: usize,
        /// The others' pot count.
        expected: usize,
    },
    /// Nothing to compare, or a non-finite likelihood.
    #[error("{0}")]
    Invalid(String),
}

/// The structure of a candidate model: its drivers and its error model.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Shape {
    /// Driver names in the fixed part (empty for the base design).
    pub drivers: Vec<String>,
    /// Correlation family name, or `None` for independent errors.
    pub correlation: Option<String>,
    /// Whether a nugget was fitted.
    pub nugget: bool,
}

impl Candidate {
    /// Build a candidate from an ML fit. A REML fit is refused.
    pub fn new(
        name: impl Into<String>,
        method: LikelihoodKind,
        shape: Shape,
        loglik: f64,
        n_params: usize,
        n_obs: usize,
    ) -> Result<Candidate, CompareError> {
        let name = name.into();
        let Shape { drivers, correlation, nugget } = shape;
        if method != LikelihoodKind::Ml {
            return Err(CompareError::NotMl(name));
        }
        if !loglik.is_finite() {
            return Err(CompareError::Invalid(format!("model `{name}` has a non-finite log-likelihood")));
        }
        Ok(Candidate { name, drivers, correlation, nugget, loglik, n_params, n_obs })
    }

    /// Its information criteria ([`information_criteria`]).
    pub fn criteria(&self) -> Criteria {
        information_criteria(self.loglik, self.n_params, self.n_obs)
    }

    /// AIC = -2 l + 2 k (Akaike 1974).
    pub fn aic(&self) -> f64 {
        self.criteria().aic
    }

    /// BIC = -2 l + k ln n (Schwarz 1978).
    pub fn bic(&self) -> f64 {
        self.criteria().bic
    }

    /// AICc = AIC + 2k(k+1)/(n-k-1) (Hurvich & Tsai 1989); `None` when n - k - 1 <= 0.
    pub fn aicc(&self) -> Option<f64> {
        self.criteria().aicc
    }

    /// The explanation this model stands for.
    pub fn explanation(&self) -> Explanation {
        Explanation::of(!self.drivers.is_empty(), self.correlation.is_some())
    }
}

/// One row of the comparison table.
#[derive(Clone, Debug, Serialize)]
pub struct Ranked {
    /// The candidate.
    #[serde(flatten)]
    pub candidate: Candidate,
    /// AIC.
    pub aic: f64,
    /// BIC.
    pub bic: f64,
    /// AIC minus the smallest AIC.
    pub delta_aic: f64,
    /// Akaike weight `exp(-Δ/2) / Σ exp(-Δ_j/2)` (Burnham & Anderson 2002, §2.9).
    pub akaike_weight: f64,
}

/// Rank candidates by AIC, with delta-AIC and Akaike weights. All candidates
/// must share the same number of observations.
pub fn rank(cands: &[Candidate]) -> Result<Vec<Ranked>, CompareError> {
    let first = cands.first().ok_or_else(|| CompareError::Invalid("no models to compare".into()))?;
    for c in cands {
        if c.n_obs != first.n_obs {
            return Err(CompareError::DifferentData {
                name: c.name.clone(),
                n: c.n_obs,
                expected: first.n_obs,
            });
        }
    }
    let best = cands.iter().map(Candidate::aic).fold(f64::INFINITY, f64::min);
    let raw: Vec<f64> = cands.iter().map(|c| (-(c.aic() - best) / 2.0).exp()).collect();
    let total: f64 = raw.iter().sum();
    let mut out: Vec<Ranked> = cands
        .iter()
        .zip(&raw)
        .map(|(c, w)| Ranked {
            aic: c.aic(),
            bic: c.bic(),
            delta_aic: c.aic() - best,
            akaike_weight: w / total,
            candidate: c.clone(),
        })
        .collect();
    out.sort_by(|a, b| a.aic.total_cmp(&b.aic).then_with(|| a.candidate.name.cmp(&b.candidate.name)));
    Ok(out)
}

/// The null distribution of a likelihood-ratio statistic.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub enum LrtNull {
    /// Chi-square with `df` degrees of freedom (all added parameters interior).
    ChiSquare {
        /// Degrees of freedom.
        df: f64,
    },
    /// The 50:50 mixture of chi-square with `df - 1` and `df` degrees of
    /// freedom, for one added parameter on the boundary of its space
    /// (Self & Liang 1987, case of one boundary parameter; `df - 1 = 0` is a
    /// point mass at zero).
    BoundaryMixture {
        /// The larger degrees of freedom.
        df: f64,
    },
}

/// p-value of a likelihood-ratio statistic `lrt = 2 (l1 - l0) >= 0`.
///
/// Check values (../shared/REFERENCE.md §5.4, computed there): mixture p = 0.1587
/// at LRT 1.0, 0.0499 at 2.71, 0.0250 at 3.84.
pub fn lrt_p_value(lrt: f64, null: LrtNull) -> f64 {
    let lrt = lrt.max(0.0);
    let sf = |df: f64, x: f64| -> f64 {
        if df <= 0.0 {
            // Point mass at zero.
            if x > 0.0 { 0.0 } else { 1.0 }
        } else {
            1.0 - ChiSquared::new(df).expect("df > 0").cdf(x)
        }
    };
    match null {
        LrtNull::ChiSquare { df } => sf(df, lrt),
        LrtNull::BoundaryMixture { df } => 0.5 * sf(df - 1.0, lrt) + 0.5 * sf(df, lrt),
    }
}

/// The verdict: one word, the model it rests on, and why.
#[derive(Clone, Debug, Serialize)]
pub struct Verdict {
    /// `covariate`, `correlation`, `both` or `none`.
    pub verdict: Explanation,
    /// The model the verdict rests on (the simplest within the tie margin of the best).
    pub chosen: String,
    /// The model with the smallest AIC.
    pub best_by_aic: String,
    /// One sentence in plain words.
    pub reason: String,
}

/// Default tie margin in AIC units: models within 4 of the best are not
/// clearly worse than it (Burnham & Anderson 2002, §2.6: Δ ≤ 2 "substantial
/// support", 4–7 "considerably less"; from memory), and the simplest of them
/// is chosen. Why 4 and not 2: a model one parameter richer is then chosen on
/// pure noise only when its likelihood-ratio statistic exceeds 6 (χ²₁
/// probability 0.014) instead of 4 (0.046), and a study offers several such
/// routes at once (each driver, each distance, each correlation family), so at
/// 2 about one verdict in ten on pure noise was wrong in the pipeline truth
/// study (docs/verdict.md), at 4 fewer than one in twenty.
pub const DEFAULT_TIE_DELTA: f64 = 4.0;

/// Choose the verdict from ranked candidates.
///
/// Rule (`docs/verdict.md`): among the models whose AIC is within `tie_delta`
/// of the smallest, choose the one with the fewest parameters; among equals,
/// prefer the simpler explanation in the order none < covariate < correlation <
/// both, then the smaller AIC. The verdict is that model's explanation.
pub fn decide(ranked: &[Ranked], tie_delta: f64) -> Result<Verdict, CompareError> {
    let best = ranked.first().ok_or_else(|| CompareError::Invalid("no models to compare".into()))?;
    let chosen = ranked
        .iter()
        .filter(|r| r.delta_aic <= tie_delta)
        .min_by(|a, b| {
            a.candidate
                .n_params
                .cmp(&b.candidate.n_params)
                .then(a.candidate.explanation().cmp(&b.candidate.explanation()))
                .then(a.aic.total_cmp(&b.aic))
        })
        .expect("the best model is within the margin");
    let e = chosen.candidate.explanation();
    let n_drivers = chosen.candidate.drivers.len();
    let drivers = match chosen.candidate.drivers.as_slice() {
        [] => String::new(),
        [one] => format!("driver `{one}`"),
        [rest @ .., last] => format!(
            "drivers {} and `{last}`",
            rest.iter().map(|d| format!("`{d}`")).collect::<Vec<_>>().join(", ")
        ),
    };
    let (explains, them) = if n_drivers == 1 { ("explains", "it") } else { ("explain", "them") };
    let corr = chosen.candidate.correlation.clone().unwrap_or_default();
    let tie_note = if chosen.candidate.name != best.candidate.name {
        format!(
            " (the best model by AIC, `{}`, is only {:.1} AIC units better, within the tie margin of {tie_delta}, so the simpler model is preferred)",
            best.candidate.name, chosen.delta_aic
        )
    } else {
        String::new()
    };
    let runner_up = ranked
        .iter()
        .find(|r| r.candidate.explanation() != e)
        .map(|r| {
            format!(
                "; the best model of another kind, `{}`, is {:.1} AIC units behind",
                r.candidate.name,
                r.aic - chosen.aic
            )
        })
        .unwrap_or_default();
    let reason = match e {
        Explanation::None => format!(
            "Neither the microclimate drivers nor a spatial correlation of the residuals improves on the factorial model enough to matter{tie_note}{runner_up}."
        ),
        Explanation::Covariate => format!(
            "The measured {drivers} {explains} the spatial pattern: with {them} in the model, independent errors fit as well as any correlated-error model{tie_note}{runner_up}."
        ),
        Explanation::Correlation => format!(
            "An unmeasured, spatially correlated effect ({corr} correlation of the residuals) explains the pattern better than any measured driver{tie_note}{runner_up}."
        ),
        Explanation::Both => format!(
            "The measured {drivers} {explains} part of the pattern, and a spatially correlated residual ({corr}) remains beyond {them}{tie_note}{runner_up}."
        ),
    };
    Ok(Verdict {
        verdict: e,
        chosen: chosen.candidate.name.clone(),
        best_by_aic: best.candidate.name.clone(),
        reason,
    })
}

/// A scalar estimate combined over `m` imputations by Rubin's rules.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct Pooled {
    /// Mean of the estimates, `Q̄`.
    pub estimate: f64,
    /// Within-imputation variance `Ū` (mean of squared SEs).
    pub within: f64,
    /// Between-imputation variance `B` (sample variance, divisor m - 1).
    pub between: f64,
    /// Total variance `T = Ū + (1 + 1/m) B`.
    pub total: f64,
    /// `sqrt(T)`.
    pub se: f64,
    /// Degrees of freedom `(m - 1) (1 + Ū / ((1 + 1/m) B))^2` (infinite when B = 0).
    pub df: f64,
}

/// Combine `(estimate, se)` pairs from `m >= 2` fits on imputed (here:
/// conditionally simulated) data by Rubin's rules (Rubin 1987, *Multiple
/// Imputation for Nonresponse in Surveys*, §3.1).
pub fn rubin(fits: &[(f64, f64)]) -> Option<Pooled> {
    let m = fits.len();
    if m < 2 || fits.iter().any(|(e, s)| !e.is_finite() || !s.is_finite()) {
        return None;
    }
    let mf = m as f64;
    let estimate = fits.iter().map(|f| f.0).sum::<f64>() / mf;
    let within = fits.iter().map(|f| f.1 * f.1).sum::<f64>() / mf;
    let between = fits.iter().map(|f| (f.0 - estimate).powi(2)).sum::<f64>() / (mf - 1.0);
    let total = within + (1.0 + 1.0 / mf) * between;
    let df = if between > 0.0 {
        (mf - 1.0) * (1.0 + within / ((1.0 + 1.0 / mf) * between)).powi(2)
    } else {
        f64::INFINITY
    };
    Some(Pooled { estimate, within, between, total, se: total.sqrt(), df })
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_abs_diff_eq;

    fn cand(name: &str, drivers: &[&str], corr: Option<&str>, ll: f64, k: usize) -> Candidate {
        let shape = Shape {
            drivers: drivers.iter().map(|s| s.to_string()).collect(),
            correlation: corr.map(str::to_string),
            nugget: false,
        };
        Candidate::new(name, LikelihoodKind::Ml, shape, ll, k, 100).unwrap()
    }

    /// ../shared/REFERENCE.md §5.4 computed table: naive and mixture p.
    #[test]
    fn boundary_lrt_matches_reference_table() {
        let rows =
            [(1.0, 0.3173, 0.1587), (2.71, 0.0997, 0.0499), (3.84, 0.0500, 0.0250), (5.0, 0.0253, 0.0127)];
        for (lrt, naive, mix) in rows {
            assert_abs_diff_eq!(lrt_p_value(lrt, LrtNull::ChiSquare { df: 1.0 }), naive, epsilon = 1e-4);
            assert_abs_diff_eq!(lrt_p_value(lrt, LrtNull::BoundaryMixture { df: 1.0 }), mix, epsilon = 1e-4);
        }
        // ½χ²₁ + ½χ²₂ critical value 5.1384 gives p = 0.05 (same table).
        assert_abs_diff_eq!(lrt_p_value(5.1384, LrtNull::BoundaryMixture { df: 2.0 }), 0.05, epsilon = 1e-4);
    }

    /// ../shared/REFERENCE.md §5.3 computed 6-point check: OLS with k = 3,
    /// l = -2.2517: AIC 10.5034, AICc 22.5034, BIC 9.8787; the spatial model
    /// with the same l and k = 4: AIC 12.5034, AICc 52.5034, BIC 11.6705.
    #[test]
    fn information_criteria_match_reference() {
        let ols = Candidate::new("ols", LikelihoodKind::Ml, Shape::default(), -2.2517, 3, 6).unwrap();
        let sp = Candidate::new(
            "sp",
            LikelihoodKind::Ml,
            Shape { correlation: Some("exponential".into()), ..Shape::default() },
            -2.2517,
            4,
            6,
        )
        .unwrap();
        assert_abs_diff_eq!(ols.aic(), 10.5034, epsilon = 1e-4);
        assert_abs_diff_eq!(ols.aicc().unwrap(), 22.5034, epsilon = 1e-4);
        assert_abs_diff_eq!(ols.bic(), 9.8787, epsilon = 1e-4);
        assert_abs_diff_eq!(sp.aic(), 12.5034, epsilon = 1e-4);
        assert_abs_diff_eq!(sp.aicc().unwrap(), 52.5034, epsilon = 1e-4);
        assert_abs_diff_eq!(sp.bic(), 11.6705, epsilon = 1e-4);
        let tiny = Candidate::new("t", LikelihoodKind::Ml, Shape::default(), 0.0, 5, 6).unwrap();
        assert!(tiny.aicc().is_none());
    }

    #[test]
    fn reml_fits_cannot_enter_a_comparison() {
        let e = Candidate::new("m", LikelihoodKind::Reml, Shape::default(), -1.0, 2, 10).unwrap_err();
        assert_eq!(e, CompareError::NotMl("m".into()));
    }

    #[test]
    fn different_pot_sets_are_refused() {
        let a = cand("a", &[], None, -10.0, 3);
        let mut b = cand("b", &[], None, -10.0, 3);
        b.n_obs = 99;
        assert!(matches!(rank(&[a, b]), Err(CompareError::DifferentData { .. })));
    }

    /// Akaike weights by hand: Δ = (0, 2, 4) gives weights proportional to
    /// (1, e^-1, e^-2) = (0.665241, 0.244728, 0.090031).
    #[test]
    fn akaike_weights_by_hand() {
        let r = rank(&[
            cand("a", &[], None, -10.0, 3),
            cand("b", &[], None, -11.0, 3),
            cand("c", &[], None, -12.0, 3),
        ])
        .unwrap();
        let w: Vec<f64> = r.iter().map(|x| x.akaike_weight).collect();
        assert_abs_diff_eq!(w[0], 0.665241, epsilon = 1e-6);
        assert_abs_diff_eq!(w[1], 0.244728, epsilon = 1e-6);
        assert_abs_diff_eq!(w[2], 0.090031, epsilon = 1e-6);
        assert_abs_diff_eq!(r[2].delta_aic, 4.0, epsilon = 1e-12);
    }

    #[test]
    fn verdict_words_follow_the_rule() {
        let base = cand("base", &[], None, -200.0, 5);
        // A driver that gains 10 log-likelihood units: covariate.
        let drv = cand("base+cold", &["cold"], None, -190.0, 6);
        let cor = cand("base|exp", &[], Some("exponential"), -195.0, 6);
        let both = cand("base+cold|exp", &["cold"], Some("exponential"), -189.5, 7);
        let v = decide(&rank(&[base.clone(), drv.clone(), cor.clone(), both.clone()]).unwrap(), 2.0).unwrap();
        assert_eq!(v.verdict, Explanation::Covariate);
        assert_eq!(v.chosen, "base+cold");
        // Correlation clearly best.
        let cor2 = cand("base|exp", &[], Some("exponential"), -180.0, 6);
        let v = decide(&rank(&[base.clone(), drv.clone(), cor2.clone()]).unwrap(), 2.0).unwrap();
        assert_eq!(v.verdict, Explanation::Correlation);
        // Both clearly best.
        let both2 = cand("base+cold|exp", &["cold"], Some("exponential"), -170.0, 7);
        let v = decide(&rank(&[base.clone(), drv.clone(), cor2, both2]).unwrap(), 2.0).unwrap();
        assert_eq!(v.verdict, Explanation::Both);
        // Nothing gains more than the tie margin: none, and the reason says so.
        let drv_weak = cand("base+cold", &["cold"], None, -198.5, 6);
        let v = decide(&rank(&[base, drv_weak]).unwrap(), 2.0).unwrap();
        assert_eq!(v.verdict, Explanation::None);
        assert!(v.reason.contains("tie margin"), "{}", v.reason);
    }

    #[test]
    fn ties_go_to_the_simpler_explanation_at_equal_parameter_count() {
        let drv = cand("base+cold", &["cold"], None, -190.0, 6);
        let cor = cand("base|exp", &[], Some("exponential"), -189.8, 6);
        let v = decide(&rank(&[drv, cor]).unwrap(), 2.0).unwrap();
        assert_eq!(v.verdict, Explanation::Covariate);
        assert_eq!(v.best_by_aic, "base|exp");
    }

    /// Hand-worked Rubin's rules example: estimates (1.0, 1.2, 0.8, 1.1, 0.9)
    /// with SEs all 0.2. Q̄ = 1.0; Ū = 0.04; B = (0 + 0.04 + 0.04 + 0.01 +
    /// 0.01)/4 = 0.025; T = 0.04 + 1.2 * 0.025 = 0.07; SE = 0.264575;
    /// df = 4 (1 + 0.04/0.03)^2 = 4 * (7/3)^2 = 21.777...
    #[test]
    fn rubin_hand_worked() {
        let p = rubin(&[(1.0, 0.2), (1.2, 0.2), (0.8, 0.2), (1.1, 0.2), (0.9, 0.2)]).unwrap();
        assert_abs_diff_eq!(p.estimate, 1.0, epsilon = 1e-12);
        assert_abs_diff_eq!(p.within, 0.04, epsilon = 1e-12);
        assert_abs_diff_eq!(p.between, 0.025, epsilon = 1e-12);
        assert_abs_diff_eq!(p.total, 0.07, epsilon = 1e-12);
        assert_abs_diff_eq!(p.se, 0.07f64.sqrt(), epsilon = 1e-12);
        assert_abs_diff_eq!(p.df, 4.0 * (7.0f64 / 3.0).powi(2), epsilon = 1e-9);
        assert!(rubin(&[(1.0, 0.1)]).is_none());
        let same = rubin(&[(1.0, 0.1), (1.0, 0.1)]).unwrap();
        assert!(same.df.is_infinite() && same.between == 0.0);
    }
}
