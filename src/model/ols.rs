//! Ordinary least squares with independent errors: coefficients with SE, t
//! and p, residual standard error, R² and adjusted R², and the ANOVA table
//! with sequential (type I), hierarchical (type II) and marginal (type III,
//! sum-to-zero coding) sums of squares, F and p.
//!
//! Sums of squares are differences of residual sums of squares of nested
//! fits (Searle 1987, *Linear Models for Unbalanced Data*, ch. 4; Yates 1934):
//! * type I: term `T` after the terms before it, in model order;
//! * type II: `T` after every term that does not contain it (a term contains
//!   `T` when it is an interaction whose factors include all of `T`'s);
//! * type III: `T` after all other terms, with every factor in sum-to-zero
//!   coding (the intercept row is included, as is customary).
//!
//! `F = (SS / df) / (RSS / (n - p))`, p from the F distribution (statrs).

use super::design::{Design, TermKind};
use super::error::{ModelError, Result};
use crate::spatial::factor::{FactorError, LeastSquares, least_squares};
use statrs::distribution::{ContinuousCDF, FisherSnedecor, StudentsT};

/// Least squares `y ~ X` (`x` by columns) through the crate's one QR path
/// ([`crate::spatial::factor::least_squares`], Householder QR with the one
/// rank tolerance); an aliased column is a [`ModelError::Rank`] naming it
/// (`names[j]`, or its index when no names are given).
pub fn fit_least_squares(what: &str, x: &[Vec<f64>], names: &[String], y: &[f64]) -> Result<LeastSquares> {
    least_squares(x, y).map_err(|e| match e {
        FactorError::Aliased { index, remainder } => ModelError::Rank {
            what: what.to_string(),
            column: names.get(index).cloned().unwrap_or_else(|| format!("#{}", index + 1)),
            remainder,
        },
        other => ModelError::Rank { what: what.to_string(), column: other.to_string(), remainder: f64::NAN },
    })
}

/// An OLS fit.
#[derive(Clone, Debug)]
pub struct OlsFit {
    /// Column names (treatment coding).
    pub names: Vec<String>,
    /// Coefficients.
    pub beta: Vec<f64>,
    /// Standard errors `sqrt(s^2 diag((X'X)^-1))`, `s^2 = RSS/(n-p)`.
    pub se: Vec<f64>,
    /// t statistics.
    pub t: Vec<f64>,
    /// Two-sided p-values from Student's t with `n - p` df.
    pub p_value: Vec<f64>,
    /// Residual sum of squares.
    pub rss: f64,
    /// Residual degrees of freedom `n - p`.
    pub df_resid: usize,
    /// Residual standard error `sqrt(RSS/(n-p))`.
    pub resid_se: f64,
    /// `1 - RSS/TSS` (TSS about the mean).
    pub r2: f64,
    /// `1 - (1 - R²)(n - 1)/(n - p)`.
    pub adj_r2: f64,
    /// Fitted values.
    pub fitted: Vec<f64>,
    /// Residuals `y - fitted`.
    pub residuals: Vec<f64>,
    /// `(X'X)^-1`, row-major.
    pub xtx_inv: Vec<f64>,
}

/// Two-sided t p-value.
pub(crate) fn t_p(t: f64, df: f64) -> f64 {
    let d = StudentsT::new(0.0, 1.0, df).expect("df > 0");
    2.0 * d.sf(t.abs())
}

/// Upper-tail F p-value.
pub(crate) fn f_p(f: f64, d1: f64, d2: f64) -> f64 {
    let d = FisherSnedecor::new(d1, d2).expect("df > 0");
    d.sf(f)
}

/// Fit by OLS. The design has already been checked for aliasing (with the
/// same rank tolerance) and `n > p`.
pub fn ols(design: &Design, y: &[f64]) -> Result<OlsFit> {
    let n = y.len();
    let p = design.p();
    let LeastSquares { beta, rss, xtx_inv: inv, .. } = fit_least_squares("OLS", &design.x, &design.names, y)?;
    let df = n - p;
    let s2 = rss / df as f64;
    let se: Vec<f64> = (0..p).map(|i| (s2 * inv[i * p + i]).sqrt()).collect();
    let t: Vec<f64> = beta.iter().zip(&se).map(|(b, s)| b / s).collect();
    let p_value = t.iter().map(|&t| t_p(t, df as f64)).collect();
    let fitted: Vec<f64> = (0..n).map(|i| (0..p).map(|j| design.x[j][i] * beta[j]).sum()).collect();
    let residuals: Vec<f64> = y.iter().zip(&fitted).map(|(a, b)| a - b).collect();
    let mean = y.iter().sum::<f64>() / n as f64;
    let tss: f64 = y.iter().map(|v| (v - mean) * (v - mean)).sum();
    let r2 = 1.0 - rss / tss;
    let adj_r2 = 1.0 - (1.0 - r2) * (n as f64 - 1.0) / df as f64;
    Ok(OlsFit {
        names: design.names.clone(),
        beta,
        se,
        t,
        p_value,
        rss,
        df_resid: df,
        resid_se: s2.sqrt(),
        r2,
        adj_r2,
        fitted,
        residuals,
        xtx_inv: inv,
    })
}

/// Which sums of squares.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum SsType {
    /// Type I, sequential.
    Sequential,
    /// Type II, each term after all terms not containing it.
    Hierarchical,
    /// Type III, each term after all others, sum-to-zero coding.
    Marginal,
}

impl SsType {
    /// `I`, `II` or `III`.
    pub fn label(&self) -> &'static str {
        match self {
            SsType::Sequential => "I",
            SsType::Hierarchical => "II",
            SsType::Marginal => "III",
        }
    }

    /// In words: how each term's sum of squares is taken.
    pub fn describe(&self) -> &'static str {
        match self {
            SsType::Sequential => "each term after the terms before it",
            SsType::Hierarchical => "each term after every term that does not contain it",
            SsType::Marginal => "each term after all the others, sum-to-zero coding",
        }
    }
}

/// Name of the last row of an ANOVA table: what the model leaves unexplained.
pub const RESIDUAL_TERM: &str = "remainder";

/// One ANOVA row.
#[derive(Clone, Debug, PartialEq)]
pub struct AnovaRow {
    /// Term name ([`RESIDUAL_TERM`] for the last row).
    pub term: String,
    /// Degrees of freedom.
    pub df: usize,
    /// Sum of squares.
    pub sum_sq: f64,
    /// `sum_sq / df`.
    pub mean_sq: f64,
    /// F statistic (`None` on the residual row).
    pub f: Option<f64>,
    /// p-value (`None` on the residual row).
    pub p: Option<f64>,
}

/// An ANOVA table.
#[derive(Clone, Debug)]
pub struct AnovaTable {
    /// Which sums of squares.
    pub kind: SsType,
    /// Term rows, then the residual row.
    pub rows: Vec<AnovaRow>,
}

fn rss_of(cols: &[Vec<f64>], names: &[String], keep: &[usize], y: &[f64]) -> Result<f64> {
    let sel: Vec<Vec<f64>> = keep.iter().map(|&j| cols[j].clone()).collect();
    if sel.is_empty() {
        return Ok(y.iter().map(|v| v * v).sum());
    }
    let sel_names: Vec<String> = keep.iter().map(|&j| names.get(j).cloned().unwrap_or_default()).collect();
    Ok(fit_least_squares("analysis of variance", &sel, &sel_names, y)?.rss)
}

/// The ANOVA table of `kind` for the OLS fit of `y` on `design`.
///
/// Cost: one least-squares fit per term (two for type II), each `O(n p^2)`.
pub fn anova(design: &Design, y: &[f64], kind: SsType) -> Result<AnovaTable> {
    let n = y.len();
    let p = design.p();
    let cols = if kind == SsType::Marginal { &design.x_sum } else { &design.x };
    let all: Vec<usize> = (0..p).collect();
    let names = &design.names;
    let rss_full = rss_of(cols, names, &all, y)?;
    let df_resid = n - p;
    let ms_resid = rss_full / df_resid as f64;
    let contains = |outer: &TermKind, inner: &[usize]| -> bool {
        match outer {
            TermKind::Interaction(f) => {
                !inner.is_empty() && inner.iter().all(|k| f.contains(k)) && f.len() > inner.len()
            }
            _ => false,
        }
    };
    let mut rows = Vec::new();
    let start = if kind == SsType::Marginal { 0 } else { 1 };
    for (ti, term) in design.terms.iter().enumerate().skip(start) {
        let ss = match kind {
            SsType::Sequential => {
                let before: Vec<usize> = (0..term.columns.start).collect();
                let upto: Vec<usize> = (0..term.columns.end).collect();
                rss_of(cols, names, &before, y)? - rss_of(cols, names, &upto, y)?
            }
            SsType::Hierarchical => {
                // columns of all terms that do not contain `term` (and not term itself)
                let base: Vec<usize> = design
                    .terms
                    .iter()
                    .enumerate()
                    .filter(|(k, t)| *k != ti && !contains(&t.kind, &term.factors))
                    .flat_map(|(_, t)| t.columns.clone())
                    .collect();
                let mut with = base.clone();
                with.extend(term.columns.clone());
                rss_of(cols, names, &base, y)? - rss_of(cols, names, &with, y)?
            }
            SsType::Marginal => {
                let without: Vec<usize> = all.iter().copied().filter(|j| !term.columns.contains(j)).collect();
                rss_of(cols, names, &without, y)? - rss_full
            }
        };
        let df = term.columns.len();
        let f = (ss / df as f64) / ms_resid;
        rows.push(AnovaRow {
            term: term.name.clone(),
            df,
            sum_sq: ss,
            mean_sq: ss / df as f64,
            f: Some(f),
            p: Some(f_p(f, df as f64, df_resid as f64)),
        });
    }
    rows.push(AnovaRow {
        term: RESIDUAL_TERM.into(),
        df: df_resid,
        sum_sq: rss_full,
        mean_sq: ms_resid,
        f: None,
        p: None,
    });
    Ok(AnovaTable { kind, rows })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::design::{Design, DesignSpec};
    use crate::model::testdata::{fixture, floats, model_data};
    use approx::assert_relative_eq;

    /// `C(Litter)[T.B]:C(Mother)[T.I]` -> `Litter=B & Mother=I`.
    fn own_name(sm: &str) -> String {
        if sm == "Intercept" {
            return crate::model::design::BASELINE.into();
        }
        sm.split(':')
            .map(|part| {
                let f = part.trim_start_matches("C(").split(')').next().unwrap();
                let level = part.split("[T.").nth(1).unwrap().trim_end_matches(']');
                crate::model::design::level_column(f, level)
            })
            .collect::<Vec<_>>()
            .join(crate::model::design::INTERACTION_JOIN)
    }

    fn check(case: &str, file: &str, response: &str, a: &str, b: &str, drop: &[&str]) {
        // Source: statsmodels 0.15 OLS and anova_lm (tests/reference/model.py -> model_ols.json)
        let fx = &fixture("model_ols.json")[case];
        let data = model_data(file, response, &[a, b], &[], None, drop);
        assert_eq!(data.response.len() as u64, fx["n"].as_u64().unwrap());
        let spec = DesignSpec {
            factors: vec![a.into(), b.into()],
            interactions: vec![vec![a.into(), b.into()]],
            ..Default::default()
        };
        let design = Design::build(&data, &spec).unwrap();
        let fit = ols(&design, &data.response).unwrap();
        let names: Vec<String> =
            fx["names"].as_array().unwrap().iter().map(|v| own_name(v.as_str().unwrap())).collect();
        let (params, bse, pv) = (floats(&fx["params"]), floats(&fx["bse"]), floats(&fx["pvalues"]));
        for (k, name) in names.iter().enumerate() {
            let j = fit
                .names
                .iter()
                .position(|m| m == name)
                .unwrap_or_else(|| panic!("{name} not in {:?}", fit.names));
            assert_relative_eq!(fit.beta[j], params[k], epsilon = 1e-9, max_relative = 1e-9);
            assert_relative_eq!(fit.se[j], bse[k], max_relative = 1e-9);
            assert_relative_eq!(fit.p_value[j], pv[k], epsilon = 1e-10, max_relative = 1e-6);
        }
        assert_relative_eq!(fit.resid_se, fx["resid_se"].as_f64().unwrap(), max_relative = 1e-10);
        assert_relative_eq!(fit.r2, fx["r2"].as_f64().unwrap(), max_relative = 1e-10);
        assert_relative_eq!(fit.adj_r2, fx["adj_r2"].as_f64().unwrap(), max_relative = 1e-10);
        for (kind, key) in
            [(SsType::Sequential, "type1"), (SsType::Hierarchical, "type2"), (SsType::Marginal, "type3")]
        {
            let table = anova(&design, &data.response, kind).unwrap();
            let rows = fx[key].as_array().unwrap();
            assert_eq!(table.rows.len(), rows.len(), "{case} {key}");
            for (own, r) in table.rows.iter().zip(rows) {
                assert_eq!(own.df as f64, r["df"].as_f64().unwrap(), "{case} {key} {}", own.term);
                assert_relative_eq!(own.sum_sq, r["sum_sq"].as_f64().unwrap(), max_relative = 1e-9);
                if let Some(f) = r["F"].as_f64() {
                    assert_relative_eq!(own.f.unwrap(), f, max_relative = 1e-8);
                    assert_relative_eq!(
                        own.p.unwrap(),
                        r["p"].as_f64().unwrap(),
                        epsilon = 1e-12,
                        max_relative = 1e-6
                    );
                }
            }
        }
    }

    #[test]
    fn warpbreaks_balanced_vs_statsmodels() {
        check("warpbreaks", "warpbreaks.csv", "breaks", "wool", "tension", &[]);
    }

    #[test]
    fn warpbreaks_unbalanced_vs_statsmodels() {
        check(
            "warpbreaks_unbalanced",
            "warpbreaks.csv",
            "breaks",
            "wool",
            "tension",
            &["1", "2", "3", "20", "40"],
        );
    }

    #[test]
    fn genotype_unbalanced_vs_statsmodels() {
        check("genotype", "genotype.csv", "Wt", "Litter", "Mother", &[]);
    }
}
