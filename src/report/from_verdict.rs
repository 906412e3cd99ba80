//! Conversion of the verdict stage's result ([`crate::model::verdict::VerdictResult`])
//! into the report's data types: the verdict section, the models section and
//! the adjusted means. Only copies and relabels; computes nothing new.

use super::data::{
    AdjustedMean, AnovaRow, AnovaTable, ComparisonRow, DriverRow, ModelsSection, MoranI, ResidualMap,
    ResidualPoint, SmallSampleRow, VariogramBin, VariogramPanel, VerdictSection,
};
use crate::model::verdict::{MoranSummary, VerdictResult};

fn anova(t: &crate::model::ols::AnovaTable) -> AnovaTable {
    AnovaTable {
        model: "base (the plain factorial model, independent errors, least squares)".into(),
        kind: Some(format!("type {} sums of squares: {}", t.kind.label(), t.kind.describe())),
        rows: t
            .rows
            .iter()
            .map(|r| AnovaRow {
                term: r.term.clone(),
                df: r.df as f64,
                sum_sq: Some(r.sum_sq),
                mean_sq: Some(r.mean_sq),
                f: r.f,
                p_value: r.p,
            })
            .collect(),
    }
}

fn moran(m: &MoranSummary) -> MoranI {
    MoranI {
        i: m.i,
        expectation: m.expected,
        variance: m.variance,
        p_value: m.p_value,
        note: Some(format!(
            "binary {}-nearest-neighbour weights, exact moments for regression residuals under normality, two-sided",
            m.k
        )),
    }
}

fn residual_map(
    r: &VerdictResult,
    model: &str,
    res: &[f64],
    m: Option<&MoranSummary>,
) -> Option<ResidualMap> {
    if res.len() != r.positions.len() || res.is_empty() {
        return None;
    }
    Some(ResidualMap {
        model: model.to_string(),
        points: r
            .positions
            .iter()
            .zip(res)
            .map(|((_, x, y), e)| ResidualPoint { x: *x, y: *y, residual: *e })
            .collect(),
        moran: m.map(moran),
    })
}

/// Units for the labels of the verdict's tables: the trait's (from
/// `[model].trait_unit`) and each driver's (from its indicator, `m` for a
/// distance to an opening). `None` where unknown; the report then says
/// "trait unit" rather than guess.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Units {
    /// Unit of the trait.
    pub trait_unit: Option<String>,
    /// `(driver name, unit)` for every driver whose unit is known.
    pub drivers: Vec<(String, String)>,
}

impl Units {
    /// The unit of driver `name`, if known.
    pub fn driver(&self, name: &str) -> Option<String> {
        self.drivers.iter().find(|(n, _)| n == name).map(|(_, u)| u.clone())
    }
}

/// The report sections filled from a verdict result: the verdict section,
/// the models section, the adjusted means, and the residual variogram panel
/// of the chosen model (empty when no bin was computed), labelled with
/// `units`.
pub fn to_report(
    r: &VerdictResult,
    units: &Units,
) -> (VerdictSection, ModelsSection, Vec<AdjustedMean>, Vec<VariogramPanel>) {
    // The page adds the general cautions (association is not cause, drivers
    // known only at the loggers) itself; these are the study's own.
    let mut cautions = vec![r.residual_check.statement.clone()];
    if let Some(o) = &r.openings {
        cautions.push(o.statement.clone());
    }
    for d in r.drivers.iter().filter(|d| d.confounded) {
        cautions.push(format!(
            "`{}` is spatially confounded: its effect is clear with independent errors but not once a spatial correlation is modelled.",
            d.name
        ));
    }
    // The technical notes on the imputations (chain settings, the sensor-level
    // variogram) are shown apart; the cautions say in words what they mean.
    cautions.extend(r.notes.iter().filter(|n| !r.mapping_notes.contains(n)).cloned());
    for d in r.drivers.iter().filter(|d| d.se_with_mapping_uncertainty.is_some()) {
        cautions.push(format!(
            "The effect of `{}` and its interval include the uncertainty of its map: the model was refitted on maps drawn to agree with the loggers and the trait (how: section 5, technical notes).",
            d.name
        ));
    }
    let verdict = VerdictSection {
        word: r.verdict.clone(),
        reason: r.reason.clone(),
        chosen_model: r.best_model.clone(),
        best_by_aic: (r.best_by_aic != r.best_model).then(|| r.best_by_aic.clone()),
        trait_unit: units.trait_unit.clone(),
        drivers: r
            .drivers
            .iter()
            .map(|d| DriverRow {
                name: d.name.clone(),
                unit: units.driver(&d.name),
                estimate: d.estimate,
                se: d.se,
                estimate_with_mapping_uncertainty: d.estimate_with_mapping_uncertainty,
                se_with_mapping_uncertainty: d.se_with_mapping_uncertainty,
                ci_low_with_mapping_uncertainty: d.ci_low_with_mapping_uncertainty,
                ci_high_with_mapping_uncertainty: d.ci_high_with_mapping_uncertainty,
                ci_low: d.ci_low,
                ci_high: d.ci_high,
                p_value: Some(d.p_value),
                delta_aic: Some(d.delta_aic),
                delta_aic_with_correlation: d.delta_aic_with_correlation,
                vif: d.vif,
                confounded: d.confounded,
                small_sample: match (
                    d.ci_low_small_sample,
                    d.ci_high_small_sample,
                    d.p_small_sample,
                    d.df_small_sample,
                    &d.small_sample_model,
                ) {
                    (Some(ci_low), Some(ci_high), Some(p_value), Some(df), Some(model)) => {
                        Some(SmallSampleRow { ci_low, ci_high, p_value, df, model: model.clone() })
                    }
                    _ => None,
                },
            })
            .collect(),
        cautions,
        technical_notes: r.mapping_notes.clone(),
        headline: r.headline.clone(),
        map_warnings: Vec::new(),
        structures: r.structures.clone(),
    };
    let models = ModelsSection {
        comparison: r
            .models
            .iter()
            .map(|m| ComparisonRow {
                name: m.name.clone(),
                drivers: m.drivers.clone(),
                correlation: (m.correlation != "none").then(|| m.correlation.clone()),
                nugget: m.nugget,
                loglik: m.loglik,
                aic: m.aic,
                bic: m.bic,
                n_params: m.n_params as u64,
                delta_aic: m.delta_aic,
                akaike_weight: m.akaike_weight,
            })
            .collect(),
        anova: r.plain_anova.iter().map(anova).collect(),
        residual_unit: units.trait_unit.clone(),
        residuals_before: residual_map(r, "base", &r.plain_residuals, r.plain_moran.as_ref()),
        residuals_after: residual_map(r, &r.best_model, &r.chosen_residuals, r.residual_check.moran.as_ref()),
        tie_margin: Some(r.options.tie_delta),
    };
    let means = r
        .adjusted_means
        .iter()
        .map(|a| AdjustedMean {
            factor: a.factor.clone(),
            level: a.level.clone(),
            mean: a.mean,
            se: a.se,
            plain_mean: a.plain_mean,
            change: a.change,
        })
        .collect();
    let panels = if r.residual_check.variogram.is_empty() {
        Vec::new()
    } else {
        vec![VariogramPanel {
            subject: format!("normalised residuals of {}", r.best_model),
            unit: "1".into(),
            bins: r
                .residual_check
                .variogram
                .iter()
                .map(|b| VariogramBin { lag: b.lag, semivariance: b.semivariance, pairs: b.pairs as u64 })
                .collect(),
            fits: Vec::new(),
        }]
    };
    (verdict, models, means, panels)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::verdict::{ModelRow, ResidualCheck, VerdictOptions};

    #[test]
    fn sections_carry_the_verdict_values() {
        let r = VerdictResult {
            verdict: "covariate".into(),
            reason: "why".into(),
            structures: vec![],
            best_model: "base+cold".into(),
            best_by_aic: "base+cold | exponential".into(),
            // A tie margin other than the default, so that the check below sees it passed through.
            options: VerdictOptions { tie_delta: 3.0, ..VerdictOptions::default() },
            calibration: Default::default(),
            smooth_shares: vec![],
            trait_name: "h".into(),
            n_pots: 2,
            left_out: vec![],
            models: vec![ModelRow {
                name: "base".into(),
                drivers: vec![],
                correlation: "none".into(),
                nugget: false,
                loglik: -3.0,
                aic: 10.0,
                bic: 11.0,
                n_params: 2,
                delta_aic: 0.0,
                akaike_weight: 1.0,
                range: None,
                nugget_share: None,
                converged: true,
                row_correlation: None,
                column_correlation: None,
                direction_degrees: None,
                range_ratio: None,
                likelihood: None,
                neighbours: None,
            }],
            lrts: vec![],
            chosen_coefficients: vec![],
            residual_check: ResidualCheck {
                moran: None,
                variogram: vec![],
                structure_left: false,
                statement: "none left".into(),
            },
            drivers: vec![],
            openings: None,
            adjusted_means: vec![],
            headline: None,
            notes: vec!["chain details".into(), "a pot left out".into()],
            n_fits: 1,
            seconds: 0.0,
            timings: Default::default(),
            positions: vec![("a".into(), 0.0, 0.0), ("b".into(), 1.0, 0.0)],
            plain_residuals: vec![0.5, -0.5],
            chosen_residuals: vec![0.1, -0.1],
            plain_moran: None,
            chosen_shape: (vec![], crate::model::gls::Errors::Independent),
            likelihood: None,
            plain_anova: Some(crate::model::ols::AnovaTable {
                kind: crate::model::ols::SsType::Hierarchical,
                rows: vec![crate::model::ols::AnovaRow {
                    term: "remainder".into(),
                    df: 1,
                    sum_sq: 0.5,
                    mean_sq: 0.5,
                    f: None,
                    p: None,
                }],
            }),
            mapping_notes: vec!["chain details".into()],
        };
        let units = Units { trait_unit: Some("g".into()), drivers: vec![("cold".into(), "h".into())] };
        let (v, m, means, panels) = to_report(&r, &units);
        assert_eq!(v.word, "covariate");
        assert_eq!(v.trait_unit.as_deref(), Some("g"));
        assert_eq!(m.residual_unit.as_deref(), Some("g"));
        assert_eq!(units.driver("cold").as_deref(), Some("h"));
        assert_eq!(units.driver("warm"), None);
        assert_eq!(v.best_by_aic.as_deref(), Some("base+cold | exponential"));
        assert_eq!(m.comparison[0].correlation, None);
        assert_eq!(m.tie_margin, Some(r.options.tie_delta));
        assert_eq!(m.residuals_after.unwrap().points[1].residual, -0.1);
        assert!(means.is_empty() && panels.is_empty());
        assert_eq!(v.cautions, vec!["none left".to_string(), "a pot left out".to_string()]);
        assert_eq!(v.technical_notes, vec!["chain details".to_string()]);
        assert_eq!(m.anova[0].rows[0].sum_sq, Some(0.5));
        assert!(m.anova[0].kind.as_deref().unwrap().starts_with("type II"));
    }
}
