//! The rule: the grid ranked by AIC and the verdict word with its reason
//! ([`compare::decide`], rules in docs/verdict.md), the rows of
//! `comparison.csv` and the likelihood-ratio tests of nested pairs.

use super::grid::{GridFit, model_name};
use super::result::{LrtRow, ModelRow};
use crate::model::compare::{self, Candidate, LrtNull, Ranked, Shape, Verdict};
use crate::model::error::{ModelError, Result};
use crate::model::gls::{Errors, Structure};
use crate::spatial::likelihood::LikelihoodKind;

/// Rank the grid's ML fits of `n` pots by AIC and decide the verdict with the
/// tie margin `tie_delta` (AIC units).
pub(super) fn rank_and_decide(grid: &[&GridFit], n: usize, tie_delta: f64) -> Result<(Vec<Ranked>, Verdict)> {
    let cands: Vec<Candidate> = grid
        .iter()
        .map(|g| {
            Candidate::new(
                model_name(&g.drivers, &g.errors),
                LikelihoodKind::Ml,
                Shape {
                    drivers: g.drivers.clone(),
                    correlation: match g.errors {
                        Errors::Independent => None,
                        Errors::Correlated { family, .. } => Some(family.name()),
                        Errors::RowsColumns { .. } | Errors::Directional { .. } => {
                            Some(g.errors.plain_name())
                        }
                    },
                    nugget: g.errors.has_nugget(),
                },
                g.fit.loglik,
                g.fit.n_params,
                n,
            )
            .map_err(|e| ModelError::Comparison(e.to_string()))
        })
        .collect::<Result<_>>()?;
    let ranked = compare::rank(&cands).map_err(|e| ModelError::Comparison(e.to_string()))?;
    let verdict: Verdict =
        compare::decide(&ranked, tie_delta).map_err(|e| ModelError::Comparison(e.to_string()))?;
    Ok((ranked, verdict))
}

/// The rows of `comparison.csv`, in the order of `ranked`.
pub(super) fn model_rows(ranked: &[Ranked], grid: &[GridFit]) -> Vec<ModelRow> {
    // the likelihood columns only when some fit was approximated
    let approximated = grid.iter().any(|g| g.fit.likelihood.neighbours().is_some());
    ranked
        .iter()
        .map(|r| {
            let g = grid
                .iter()
                .find(|g| model_name(&g.drivers, &g.errors) == r.candidate.name)
                .expect("every candidate is a grid fit");
            let (mut range, mut nugget_share) =
                (g.fit.covariance.map(|c| c.params.range), g.fit.covariance.map(|c| c.params.eta));
            let (mut row_correlation, mut column_correlation, mut direction_degrees, mut range_ratio) =
                (None, None, None, None);
            match &g.fit.structure {
                Some(Structure::RowsColumns { params, .. }) => {
                    nugget_share = Some(params.eta);
                    row_correlation = Some(params.phi_row);
                    column_correlation = Some(params.phi_col);
                }
                Some(Structure::Directional { params, direction }) => {
                    range = Some(params.range);
                    nugget_share = Some(params.eta);
                    direction_degrees = Some(direction.degrees());
                    range_ratio = Some(direction.ratio);
                }
                None => {}
            }
            ModelRow {
                name: r.candidate.name.clone(),
                drivers: r.candidate.drivers.clone(),
                correlation: g.errors.correlation_name(),
                nugget: r.candidate.nugget,
                loglik: r.candidate.loglik,
                aic: r.aic,
                bic: r.bic,
                n_params: r.candidate.n_params,
                delta_aic: r.delta_aic,
                akaike_weight: r.akaike_weight,
                range,
                nugget_share,
                converged: g.fit.converged(),
                row_correlation,
                column_correlation,
                direction_degrees,
                range_ratio,
                likelihood: approximated.then(|| g.fit.likelihood.name().to_string()),
                neighbours: g.fit.likelihood.neighbours(),
            }
        })
        .collect()
}

/// Likelihood-ratio tests of the nested pairs of the grid (rules in docs/verdict.md).
pub(super) fn lrt_rows(grid: &[GridFit]) -> Vec<LrtRow> {
    let mut out = Vec::new();
    let mut push = |a: &GridFit, b: &GridFit, null: LrtNull, approximate: bool| {
        let stat = (2.0 * (b.fit.loglik - a.fit.loglik)).max(0.0);
        let distribution = match null {
            LrtNull::ChiSquare { df } => format!("chi2({df})"),
            LrtNull::BoundaryMixture { df } => format!("0.5 chi2({}) + 0.5 chi2({df})", df - 1.0),
        };
        out.push(LrtRow {
            null: model_name(&a.drivers, &a.errors),
            alternative: model_name(&b.drivers, &b.errors),
            statistic: stat,
            distribution,
            p_value: compare::lrt_p_value(stat, null),
            approximate,
        });
    };
    for a in grid {
        for b in grid {
            // Fixed-effect nesting under the same error model.
            if a.errors == b.errors
                && a.drivers.len() < b.drivers.len()
                && a.drivers.iter().all(|d| b.drivers.contains(d))
            {
                let df = (b.fit.beta.len() - a.fit.beta.len()) as f64;
                push(a, b, LrtNull::ChiSquare { df }, false);
            }
            if a.drivers != b.drivers {
                continue;
            }
            match (a.errors, b.errors) {
                (
                    Errors::Correlated { family: f0, nugget: false },
                    Errors::Correlated { family: f1, nugget: true },
                ) if f0 == f1 => push(a, b, LrtNull::BoundaryMixture { df: 1.0 }, false),
                (Errors::Independent, Errors::Correlated { nugget, .. }) => {
                    let d = 1.0 + f64::from(u8::from(nugget));
                    push(a, b, LrtNull::BoundaryMixture { df: d }, true)
                }
                _ => {}
            }
        }
    }
    out
}
