//! `potclim fit STUDY`: fit the trait models of the study's `[model]` section
//! and print the tables.

use anyhow::Context;
use clap::Args;
use potclim_model_print::print_report;
use std::path::PathBuf;

/// Arguments of `potclim fit`.
#[derive(Debug, Args)]
pub struct FitArgs {
    /// The study file (TOML).
    pub study: PathBuf,
}

/// Run `potclim fit`.
pub fn run(args: FitArgs) -> anyhow::Result<()> {
    let study = crate::io::study::Study::load(&args.study)
        .with_context(|| format!("loading {}", args.study.display()))?;
    let report = crate::model::stage::fit_study(&study)?;
    print_report(&report)?;
    let files = crate::model::stage::write_outputs(&study, &report)?;
    outln!();
    for f in files {
        outln!("wrote {}", f.display());
    }
    Ok(())
}

mod potclim_model_print {
    use crate::model::gls::Structure;
    use crate::model::stage::{FitReport, REFERENCE_DISTANCES, model_name};

    fn fmt(v: f64) -> String {
        if !v.is_finite() {
            "-".into()
        } else if v != 0.0 && (v.abs() < 1e-3 || v.abs() >= 1e6) {
            format!("{v:.3e}")
        } else {
            format!("{v:.4}")
        }
    }

    /// Print the tables of a fit report.
    pub fn print_report(r: &FitReport) -> anyhow::Result<()> {
        outln!(
            "trait `{}`: {} pots, {} coefficients",
            r.data.trait_name,
            r.data.response.len(),
            r.design.p()
        );
        for n in &r.notes {
            outln!("note: {n}");
        }
        let refs: Vec<String> = r
            .data
            .blocks
            .iter()
            .chain(&r.data.factors)
            .map(|f| format!("{} = {}", f.name, f.levels[0]))
            .collect();
        if !refs.is_empty() {
            outln!(
                "reference levels (first appearance among the analysed pots, line {}): {}",
                r.data.lines.first().copied().unwrap_or(0),
                refs.join(", ")
            );
        }
        for t in &r.counts {
            outln!();
            if t.cols_name.is_empty() {
                outln!("pots per level of {}", t.rows_name);
            } else {
                outln!("pots per combination: {} down, {} across", t.rows_name, t.cols_name);
            }
            out!("{:>14}", "");
            for c in &t.cols {
                out!(" {c:>10}");
            }
            outln!();
            for (i, row) in t.rows.iter().enumerate() {
                out!("{row:>14}");
                for c in &t.counts[i] {
                    out!(" {c:>10}");
                }
                outln!();
            }
        }
        let o = &r.ols;
        outln!();
        outln!("least squares with independent errors");
        outln!(
            "  spread left unexplained (standard deviation): {}, from {} degrees of freedom",
            fmt(o.resid_se),
            o.df_resid
        );
        outln!(
            "  share of the trait's variance explained: {} ({} once the {} coefficients are paid for)",
            fmt(o.r2),
            fmt(o.adj_r2),
            o.beta.len()
        );
        outln!(
            "{:<36} {:>12} {:>12} {:>9} {:>10}",
            "design column",
            "estimate",
            "std error",
            "t ratio",
            "p-value"
        );
        for j in 0..o.beta.len() {
            outln!(
                "{:<36} {:>12} {:>12} {:>9} {:>10}",
                o.names[j],
                fmt(o.beta[j]),
                fmt(o.se[j]),
                fmt(o.t[j]),
                fmt(o.p_value[j])
            );
        }
        for t in &r.anova {
            outln!();
            outln!("analysis of variance: {} (type {})", t.kind.describe(), t.kind.label());
            outln!(
                "{:<28} {:>15} {:>10} {:>14} {:>10} {:>10}",
                "source",
                "sum of squares",
                "deg. fr.",
                "mean square",
                "F ratio",
                "p-value"
            );
            for row in &t.rows {
                outln!(
                    "{:<28} {:>15} {:>10} {:>14} {:>10} {:>10}",
                    row.term,
                    fmt(row.sum_sq),
                    row.df,
                    fmt(row.mean_sq),
                    row.f.map(fmt).unwrap_or_default(),
                    row.p.map(fmt).unwrap_or_default()
                );
            }
        }
        outln!();
        outln!("residual covariance fits (k = coefficients + variance + range + nugget share)");
        outln!(
            "{:<24} {:>6} {:>12} {:>10} {:>10} {:>3} {:>9} {:>10} {:>10} {:>8} {:>9} {:>6}",
            "model",
            "method",
            "loglik",
            "AIC",
            "BIC",
            "k",
            "range",
            "prac.rng",
            "nugget",
            "Moran I",
            "p(Moran)",
            "conv."
        );
        for (f, m) in r.fits.iter().zip(&r.moran) {
            let (range, pr, eta) = match (&f.covariance, &f.structure) {
                (Some(c), _) => (fmt(c.params.range), fmt(c.practical_range), fmt(c.params.eta)),
                (None, Some(Structure::Directional { params, .. })) => {
                    (fmt(params.range), fmt(params.family.practical_range(params.range)), fmt(params.eta))
                }
                (None, Some(Structure::RowsColumns { params, .. })) => {
                    ("-".into(), "-".into(), fmt(params.eta))
                }
                (None, None) => ("-".into(), "-".into(), "-".into()),
            };
            outln!(
                "{:<24} {:>6} {:>12} {:>10} {:>10} {:>3} {:>9} {:>10} {:>10} {:>8} {:>9} {:>6}",
                model_name(f),
                f.method.label(),
                fmt(f.loglik),
                fmt(f.aic),
                fmt(f.bic),
                f.n_params,
                range,
                pr,
                eta,
                m.as_ref().map(|m| fmt(m.i)).unwrap_or("-".into()),
                m.as_ref().map(|m| fmt(m.p)).unwrap_or("-".into()),
                if f.converged() { "yes" } else { "NO" }
            );
            if let Some(st) = &f.structure {
                outln!("{:<24} {}", "", st.describe());
            }
            if let Some(s) = &f.search {
                if !s.at_bounds.is_empty() {
                    outln!("{:<24} estimate on a bound: {}", "", s.at_bounds.join(", "));
                }
                if let Some((p, ll)) = &s.other_optimum {
                    outln!(
                        "{:<24} another local optimum: range {} nugget share {} loglik {}",
                        "",
                        fmt(p.range),
                        fmt(p.eta),
                        fmt(*ll)
                    );
                }
            }
        }
        outln!();
        outln!(
            "correlation at reference distances (REML fits of distance families; nugget share included; rows x columns and direction-dependent fits are described above)"
        );
        out!("{:<24}", "model");
        for d in REFERENCE_DISTANCES {
            out!(" {:>8}", format!("{d} m"));
        }
        outln!();
        for f in r.fits.iter().filter(|f| {
            f.covariance.is_some() && f.method == crate::spatial::likelihood::LikelihoodKind::Reml
        }) {
            out!("{:<24}", model_name(f));
            for d in REFERENCE_DISTANCES {
                out!(" {:>8}", f.correlation_at(d).map(fmt).unwrap_or_else(|| "-".into()));
            }
            outln!();
        }
        for f in r.fits.iter().filter(|f| f.method == crate::spatial::likelihood::LikelihoodKind::Reml) {
            outln!();
            outln!("{} (REML): coefficients and marginal Wald tests", model_name(f));
            for j in 0..f.beta.len() {
                outln!(
                    "{:<36} {:>12} {:>12} {:>9} {:>10}",
                    f.names[j],
                    fmt(f.beta[j]),
                    fmt(f.se[j]),
                    fmt(f.t[j]),
                    fmt(f.p_value[j])
                );
            }
            for w in &f.wald {
                outln!(
                    "  Wald F {:<27} F({}, {}) = {:>10}  p = {}",
                    w.term,
                    w.df,
                    w.df_resid,
                    fmt(w.f),
                    fmt(w.p)
                );
            }
        }
        Ok(())
    }
}
