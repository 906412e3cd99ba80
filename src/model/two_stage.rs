//! The second stage of the repeated-scorings analysis: one driver's effects on
//! growth, estimated separately in each interval by the comparison grid
//! (`model::intervals`, the first stage), combined across intervals.
//!
//! Model. Interval `k` gives an estimate `b_k` with standard error `s_k`
//! (the first stage's plug-in SE). The second stage treats them as
//! independent Gaussian observations `b_k ~ N(β_k, s_k²)` with known
//! variances and compares two models by likelihood:
//!
//! * constant effect, `β_k = β` for all k: the ML estimate is the
//!   inverse-variance weighted mean `β̂ = Σ w_k b_k / Σ w_k`, `w_k = 1/s_k²`,
//!   with `SE(β̂) = (Σ w_k)^(-1/2)` and a normal 95 % interval;
//! * changing effect, one `β_k` per interval (saturated: `β̂_k = b_k`).
//!
//! Twice the log-likelihood ratio is `Q = Σ w_k (b_k − β̂)²` (Cochran's Q,
//! Cochran 1954, *Biometrics* 10: 101–129), referred to `χ²(K − 1)`; `I² =
//! max(0, (Q − (K−1)) / Q)` says which share of the spread is beyond the SEs
//! (Higgins & Thompson 2002, *Stat. Med.* 21: 1539–1558).
//!
//! The two-stage approach (spatial correction within each unit, then a model
//! across units with the first stage's precision passed on as weights)
//! follows stage-wise analyses of trial series, Smith, Cullis & Thompson
//! (2005), *J. Agric. Sci.* 143: 449–462, with intervals in place of trials.
//!
//! Assumptions, stated in `docs/scores.md`: the SEs are taken as known (for
//! few pots the t-based first-stage SE is still only an estimate); the
//! intervals' estimates are treated as independent, although successive
//! growth increments of one pot share the scoring between them (a measurement
//! error at that scoring enters the two increments with opposite signs) and a
//! persistent spatial pattern enters all intervals; and the effects are on
//! the same scale across intervals, which holds for summed indicators (cold
//! hours, degree days, light integral: growth per unit of the sum) but not
//! for means over intervals of unequal length.

use serde::{Deserialize, Serialize};
use statrs::distribution::{ChiSquared, ContinuousCDF};

/// The second stage for one driver: the constant effect and the test of a
/// changing effect.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct Combined {
    /// Intervals combined.
    pub intervals: usize,
    /// Inverse-variance weighted mean effect.
    pub estimate: f64,
    /// Its standard error.
    pub se: f64,
    /// Normal 95 % interval, lower end.
    pub ci_low: f64,
    /// Upper end.
    pub ci_high: f64,
    /// Cochran's Q (likelihood-ratio statistic of constant against changing).
    pub q: f64,
    /// Degrees of freedom, `K − 1`.
    pub df: usize,
    /// `P(χ²(K−1) > Q)`: small when the effect changes between intervals.
    pub p_changing: f64,
    /// `I²`, share of the spread beyond the SEs (0–1).
    pub i_squared: f64,
}

/// Combine `(estimate, se)` pairs; `None` with fewer than two usable pairs
/// (a pair needs a finite estimate and a finite positive SE). Cost O(K).
///
/// ```
/// use potclim::model::two_stage::combine;
/// // Two equal-precision estimates 1 and 3: mean 2, SE 1/sqrt(2), Q = 2.
/// let c = combine(&[(1.0, 1.0), (3.0, 1.0)]).unwrap();
/// assert!((c.estimate - 2.0).abs() < 1e-15 && (c.q - 2.0).abs() < 1e-15);
/// ```
pub fn combine(pairs: &[(f64, f64)]) -> Option<Combined> {
    let ok: Vec<(f64, f64)> =
        pairs.iter().copied().filter(|(b, s)| b.is_finite() && s.is_finite() && *s > 0.0).collect();
    if ok.len() < 2 {
        return None;
    }
    let w: Vec<f64> = ok.iter().map(|(_, s)| 1.0 / (s * s)).collect();
    let sw: f64 = w.iter().sum();
    let est = ok.iter().zip(&w).map(|((b, _), w)| w * b).sum::<f64>() / sw;
    let se = sw.sqrt().recip();
    let q: f64 = ok.iter().zip(&w).map(|((b, _), w)| w * (b - est).powi(2)).sum();
    let df = ok.len() - 1;
    let p = ChiSquared::new(df as f64).map(|c| c.sf(q)).unwrap_or(f64::NAN);
    let z = 1.959_963_984_540_054;
    Some(Combined {
        intervals: ok.len(),
        estimate: est,
        se,
        ci_low: est - z * se,
        ci_high: est + z * se,
        q,
        df,
        p_changing: p,
        i_squared: if q > 0.0 { ((q - df as f64) / q).max(0.0) } else { 0.0 },
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::testdata::{fixture, floats};

    /// statsmodels' `combine_effects` (fixed effect) and scipy's χ² tail,
    /// `tests/reference/two_stage.py`.
    #[test]
    fn matches_statsmodels_fixed_effect_combination() {
        let f = fixture("two_stage.json");
        for case in ["changing", "constant"] {
            let c = &f[case];
            let pairs: Vec<(f64, f64)> = floats(&c["estimate"]).into_iter().zip(floats(&c["se"])).collect();
            let r = combine(&pairs).unwrap();
            let close = |a: f64, b: &serde_json::Value| {
                let b = b.as_f64().unwrap();
                assert!((a - b).abs() <= 1e-12 * b.abs().max(1e-3), "{case}: {a} vs {b}");
            };
            close(r.estimate, &c["pooled"]);
            close(r.se, &c["pooled_se"]);
            close(r.q, &c["q"]);
            close(r.p_changing, &c["p"]);
            close(r.ci_low, &c["ci_low"]);
            close(r.ci_high, &c["ci_high"]);
            assert_eq!(r.df as u64, c["df"].as_u64().unwrap());
        }
        let changing = combine(
            &floats(&f["changing"]["estimate"])
                .into_iter()
                .zip(floats(&f["changing"]["se"]))
                .collect::<Vec<_>>(),
        )
        .unwrap();
        assert!(changing.p_changing < 0.01 && changing.i_squared > 0.7);
    }

    #[test]
    fn fewer_than_two_usable_estimates_give_none() {
        assert!(combine(&[(1.0, 0.5)]).is_none());
        assert!(combine(&[(1.0, 0.5), (f64::NAN, 0.3), (2.0, 0.0)]).is_none());
        assert_eq!(combine(&[(1.0, 0.5), (f64::NAN, 0.3), (2.0, 0.5)]).unwrap().intervals, 2);
    }
}
