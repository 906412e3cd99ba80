//! The answer in plain numbers: how big the effect is for a typical
//! difference of the driver across the floor, which interval to quote, how
//! sure the choice of model is, when the answer cannot be sure, and what the
//! data suggest doing next. Computed once here from the verdict's result, the
//! analysed pots and the map's standard errors, carried in
//! [`VerdictResult::headline`] to `summary.json` and the report's first screen.

use super::result::VerdictResult;
use crate::model::compare::Explanation;
use crate::model::data::{ModelData, PotCovariates};
use crate::spatial::geometry::DISTANCE_PREFIX;
use serde::{Deserialize, Serialize};

/// Lower and upper percentiles of the driver over the analysed pots that
/// define a "typical difference across the floor" (common practice: the
/// 10th to 90th percentile span ignores the extreme pots on either side).
pub const TYPICAL_SPAN: (f64, f64) = (0.10, 0.90);

/// The map's standard error is "about as large as the driver's spread" when
/// its mean over the pots is at least this fraction of the standard
/// deviation of the mapped driver across the pots (common practice: a map
/// whose error is three quarters of the differences it is meant to show
/// cannot rank the pots reliably).
pub const WEAK_MAP_RATIO: f64 = 0.75;

/// Everything the first screen says besides the verdict word.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct Headline {
    /// The effect of a typical difference of the chosen model's main driver;
    /// `None` when the chosen model has no driver.
    pub effect: Option<TypicalEffect>,
    /// How sure the choice of model is.
    pub certainty: Certainty,
    /// Reasons the answer cannot be as sure as it looks, one sentence each.
    pub warnings: Vec<String>,
    /// The best logger position to add: the analysed pot with the largest
    /// kriging standard error of the main mapped driver; `None` without a
    /// mapped driver.
    pub next_logger: Option<NextLogger>,
    /// Whether to block the next trial by distance to an opening, one
    /// sentence; `None` when no opening is declared.
    pub blocking: Option<String>,
}

/// The effect for the 10th-to-90th-percentile difference of one driver.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct TypicalEffect {
    /// The driver (the one of the chosen model whose typical difference moves
    /// the trait most).
    pub driver: String,
    /// 10th percentile of the driver over the analysed pots (driver unit).
    pub low: f64,
    /// 90th percentile (driver unit).
    pub high: f64,
    /// Change of the trait from a pot at `low` to a pot at `high` (trait unit):
    /// the recommended estimate times `high - low`.
    pub effect: f64,
    /// 95 % interval of `effect`, lower end (trait unit).
    pub ci_low: f64,
    /// Upper end.
    pub ci_high: f64,
    /// Whether the estimate and interval include the map's uncertainty
    /// (pooled over imputations); otherwise they are the plug-in ones.
    pub includes_mapping: bool,
    /// Mean kriging standard error of the driver over the analysed pots
    /// (driver unit); `None` for a distance or a pot-table column.
    pub map_se: Option<f64>,
    /// Standard deviation of the driver across the analysed pots (driver unit).
    pub driver_sd: f64,
}

/// How sure the choice of model is, by Akaike weights (Burnham & Anderson
/// 2002, §2.9–2.10: `w_i = exp(-Δ_i/2) / Σ exp(-Δ_j/2)`; the evidence ratio
/// of two models is `exp(ΔAIC/2)`).
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct Certainty {
    /// Akaike weight of the chosen model among all models of the grid.
    pub chosen_weight: f64,
    /// Summed Akaike weight of every model of the verdict's kind.
    pub kind_weight: f64,
    /// The best model of another kind.
    pub other_model: Option<String>,
    /// Its AIC minus the AIC of the best model of the verdict's kind.
    pub other_delta: Option<f64>,
    /// `exp(other_delta / 2)`: how many times more likely (in Akaike's
    /// sense) the best model of the verdict's kind is than that model.
    pub evidence_ratio: Option<f64>,
}

/// Where one extra logger would cut the map's error most (simple version:
/// at the analysed pot with the largest kriging standard error).
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct NextLogger {
    /// The driver whose map this is for.
    pub driver: String,
    /// The pot.
    pub pot: String,
    /// Its position, metres.
    pub x: f64,
    /// Its position, metres.
    pub y: f64,
    /// The kriging standard error there (driver unit).
    pub se: f64,
}

/// Percentile `p` (0..1) of `v` by linear interpolation between order
/// statistics, `h = (n - 1) p` (Hyndman & Fan 1996, definition 7; numpy's
/// default). `None` for an empty slice. Cost O(n log n).
pub fn percentile(v: &[f64], p: f64) -> Option<f64> {
    if v.is_empty() {
        return None;
    }
    let mut s = v.to_vec();
    s.sort_by(f64::total_cmp);
    let h = (s.len() - 1) as f64 * p.clamp(0.0, 1.0);
    let (lo, frac) = (h.floor() as usize, h - h.floor());
    let hi = (lo + 1).min(s.len() - 1);
    Some(s[lo] + frac * (s[hi] - s[lo]))
}

/// The headline of `r`, from the analysed pots `data` and, when the drivers
/// were mapped, their per-pot standard errors in `covariates`
/// (`<driver>_se` columns, matched by pot id).
pub fn headline(r: &VerdictResult, data: &ModelData, covariates: Option<&PotCovariates>) -> Headline {
    let se_of = |name: &str| -> Option<Vec<f64>> {
        let cov = covariates?;
        let col = cov.columns.iter().find(|(n, _)| *n == format!("{name}_se"))?;
        data.pots
            .iter()
            .map(|p| cov.pots.iter().position(|q| q == p).and_then(|i| col.1[i]))
            .collect::<Option<Vec<f64>>>()
    };
    let mut h = Headline { certainty: certainty(r), ..Headline::default() };
    // The main driver: the chosen model's driver whose typical difference
    // moves the trait most.
    let effects: Vec<TypicalEffect> = r
        .chosen_shape
        .0
        .iter()
        .filter_map(|name| {
            let values = &data.drivers.iter().find(|(n, _)| n == name)?.1;
            let d = r.drivers.iter().find(|d| &d.name == name)?;
            let (low, high) = (percentile(values, TYPICAL_SPAN.0)?, percentile(values, TYPICAL_SPAN.1)?);
            let span = high - low;
            let pooled = match (
                d.estimate_with_mapping_uncertainty,
                d.ci_low_with_mapping_uncertainty,
                d.ci_high_with_mapping_uncertainty,
            ) {
                (Some(e), Some(a), Some(b)) => Some((e, a, b)),
                _ => None,
            };
            let (est, a, b) = pooled.unwrap_or((d.estimate, d.ci_low, d.ci_high));
            let (ea, eb) = (a * span, b * span);
            let (_, sd) = super::mean_sd(values);
            Some(TypicalEffect {
                driver: name.clone(),
                low,
                high,
                effect: est * span,
                ci_low: ea.min(eb),
                ci_high: ea.max(eb),
                includes_mapping: pooled.is_some(),
                map_se: se_of(name).map(|s| s.iter().sum::<f64>() / s.len() as f64),
                driver_sd: sd,
            })
        })
        .collect();
    h.effect = effects.into_iter().max_by(|a, b| a.effect.abs().total_cmp(&b.effect.abs()));
    // Warnings.
    for name in &r.chosen_shape.0 {
        let Some(d) = r.drivers.iter().find(|d| &d.name == name) else { continue };
        if let (Some(a), Some(b)) = (d.ci_low_with_mapping_uncertainty, d.ci_high_with_mapping_uncertainty)
            && (b < d.ci_low || a > d.ci_high)
        {
            h.warnings.push(format!(
                "The two 95 % intervals of `{name}` do not overlap (treating the map as exact: {} to {}; including the map's uncertainty: {} to {}): the map of this driver is not trustworthy enough for the plug-in answer; quote the interval that includes the map's uncertainty and add loggers.",
                short(d.ci_low),
                short(d.ci_high),
                short(a),
                short(b)
            ));
        }
    }
    if let Some(e) = &h.effect
        && let Some(se) = e.map_se
        && se >= WEAK_MAP_RATIO * e.driver_sd
    {
        h.warnings.push(format!(
            "The map of `{}` is uncertain: its standard error at the pots (mean {}) is about as large as the driver's spread across the pots (standard deviation {}), so which pots had more of it is poorly known; more loggers would sharpen it.",
            e.driver,
            short(se),
            short(e.driver_sd)
        ));
    }
    // What next: the largest kriging SE of the main mapped driver.
    let mapped = h
        .effect
        .as_ref()
        .filter(|e| e.map_se.is_some())
        .map(|e| e.driver.clone())
        .or_else(|| r.chosen_shape.0.iter().find(|n| se_of(n).is_some()).cloned());
    if let Some(name) = mapped
        && let Some(se) = se_of(&name)
        && let Some((i, s)) = se.iter().enumerate().max_by(|a, b| a.1.total_cmp(b.1))
    {
        h.next_logger =
            Some(NextLogger { driver: name, pot: data.pots[i].clone(), x: data.x[i], y: data.y[i], se: *s });
    }
    h.blocking = blocking(r);
    h
}

/// Akaike weights of the chosen model and of its kind, and the evidence ratio
/// of the best model of that kind against the best model of another kind.
fn certainty(r: &VerdictResult) -> Certainty {
    let kind = |m: &super::result::ModelRow| Explanation::of(!m.drivers.is_empty(), m.correlation != "none");
    let chosen = r.models.iter().find(|m| m.name == r.best_model);
    let Some(chosen) = chosen else { return Certainty::default() };
    let k = kind(chosen);
    let kind_weight = r.models.iter().filter(|m| kind(m) == k).map(|m| m.akaike_weight).sum();
    let best_of_kind = r.models.iter().filter(|m| kind(m) == k).min_by(|a, b| a.aic.total_cmp(&b.aic));
    let other = r.models.iter().filter(|m| kind(m) != k).min_by(|a, b| a.aic.total_cmp(&b.aic));
    let delta = match (best_of_kind, other) {
        (Some(b), Some(o)) => Some(o.aic - b.aic),
        _ => None,
    };
    Certainty {
        chosen_weight: chosen.akaike_weight,
        kind_weight,
        other_model: other.map(|o| o.name.clone()),
        other_delta: delta,
        evidence_ratio: delta.map(|d| (d / 2.0).exp()),
    }
}

/// Whether blocking by distance to an opening would help the next trial: yes
/// when the distance alone improves the factorial model by more than the tie
/// margin (its ΔAIC with independent errors), no when no distance does.
fn blocking(r: &VerdictResult) -> Option<String> {
    let distances: Vec<_> = r.drivers.iter().filter(|d| d.name.starts_with(DISTANCE_PREFIX)).collect();
    let best = distances.iter().max_by(|a, b| a.delta_aic.total_cmp(&b.delta_aic))?;
    let opening = best.name.trim_start_matches(DISTANCE_PREFIX);
    Some(if best.delta_aic > r.options.tie_delta {
        format!(
            "Block the next trial by distance to the {opening}: the distance alone improves the model by {:.1} AIC units (more than the tie margin of {}), so bands of equal distance to it make fairer blocks than rows or benches.",
            best.delta_aic, r.options.tie_delta
        )
    } else {
        format!(
            "Blocking by distance to the {opening} is not supported by these data: the distance alone changes the model by {:.1} AIC units (within the tie margin of {}).",
            best.delta_aic, r.options.tie_delta
        )
    })
}

/// Four significant digits (at most), no `-0`.
fn short(v: f64) -> String {
    if v == 0.0 || !v.is_finite() {
        return if v.is_finite() { "0".into() } else { v.to_string() };
    }
    let decimals = (3 - v.abs().log10().floor() as i32).max(0) as usize;
    let s = format!("{v:.decimals$}");
    if s.trim_start_matches('-').chars().all(|c| c == '0' || c == '.') {
        s.trim_start_matches('-').into()
    } else {
        s
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// numpy 2.x `np.percentile([3, 1, 4, 1, 5, 9, 2, 6], [10, 50, 90])`
    /// (default method "linear") = [1.0, 3.5, 6.8999999999999995].
    #[test]
    fn percentile_matches_numpy_linear() {
        let v = [3.0, 1.0, 4.0, 1.0, 5.0, 9.0, 2.0, 6.0];
        assert_eq!(percentile(&v, 0.10), Some(1.0));
        assert_eq!(percentile(&v, 0.50), Some(3.5));
        assert!((percentile(&v, 0.90).unwrap() - 6.9).abs() < 1e-12);
        assert_eq!(percentile(&[], 0.5), None);
        assert_eq!(percentile(&[2.5], 0.9), Some(2.5));
    }
}
