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
    print_report(&report);
    let files = crate::model::stage::write_outputs(&study, &report)?;
    println!();
    for f in files {
        println!("wrote {}", f.display());
    }
    Ok(())
}

mod potclim_model_print {
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
    pub fn print_report(r: &FitReport) {
        println!(
            "trait `{}`: {} pots, {} coefficients",
            r.data.trait_name,
            r.data.response.len(),
            r.design.p()
        );
        for n in &r.notes {
            println!("note: {n}");
        }
        for t in &r.counts {
            println!();
            println!(
                "pots per cell: {} x {}",
                t.rows_name,
                if t.cols_name.is_empty() { "count" } else { &t.cols_name }
            );
            print!("{:>14}", "");
            for c in &t.cols {
                print!(" {c:>10}");
            }
            println!();
            for (i, row) in t.rows.iter().enumerate() {
                print!("{row:>14}");
                for c in &t.counts[i] {
                    print!(" {c:>10}");
                }
                println!();
            }
        }
        let o = &r.ols;
        println!();
        println!(
            "OLS, independent errors: residual SE {} on {} df, R2 {}, adjusted R2 {}",
            fmt(o.resid_se),
            o.df_resid,
            fmt(o.r2),
            fmt(o.adj_r2)
        );
        println!("{:<36} {:>12} {:>12} {:>9} {:>10}", "column", "estimate", "SE", "t", "p");
        for j in 0..o.beta.len() {
            println!(
                "{:<36} {:>12} {:>12} {:>9} {:>10}",
                o.names[j],
                fmt(o.beta[j]),
                fmt(o.se[j]),
                fmt(o.t[j]),
                fmt(o.p_value[j])
            );
        }
        for t in &r.anova {
            println!();
            println!("ANOVA, type {} sums of squares", t.kind.label());
            println!("{:<28} {:>5} {:>14} {:>14} {:>10} {:>10}", "term", "df", "sum sq", "mean sq", "F", "p");
            for row in &t.rows {
                println!(
                    "{:<28} {:>5} {:>14} {:>14} {:>10} {:>10}",
                    row.term,
                    row.df,
                    fmt(row.sum_sq),
                    fmt(row.mean_sq),
                    row.f.map(fmt).unwrap_or_default(),
                    row.p.map(fmt).unwrap_or_default()
                );
            }
        }
        println!();
        println!("residual covariance fits (k = coefficients + variance + range + nugget share)");
        println!(
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
            let (range, pr, eta) = match &f.covariance {
                Some(c) => (fmt(c.params.range), fmt(c.practical_range), fmt(c.params.eta)),
                None => ("-".into(), "-".into(), "-".into()),
            };
            println!(
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
            if let Some(s) = &f.search {
                if !s.at_bounds.is_empty() {
                    println!("{:<24} estimate on a bound: {}", "", s.at_bounds.join(", "));
                }
                if let Some((p, ll)) = &s.other_optimum {
                    println!(
                        "{:<24} another local optimum: range {} nugget share {} loglik {}",
                        "",
                        fmt(p.range),
                        fmt(p.eta),
                        fmt(*ll)
                    );
                }
            }
        }
        println!();
        println!("correlation at reference distances (REML fits; nugget share included)");
        print!("{:<24}", "model");
        for d in REFERENCE_DISTANCES {
            print!(" {:>8}", format!("{d} m"));
        }
        println!();
        for f in r
            .fits
            .iter()
            .filter(|f| f.covariance.is_some() && f.method == crate::spatial::likelihood::Method::Reml)
        {
            print!("{:<24}", model_name(f));
            for d in REFERENCE_DISTANCES {
                print!(" {:>8}", fmt(f.correlation_at(d)));
            }
            println!();
        }
        for f in r.fits.iter().filter(|f| f.method == crate::spatial::likelihood::Method::Reml) {
            println!();
            println!("{} (REML): coefficients and marginal Wald tests", model_name(f));
            for j in 0..f.beta.len() {
                println!(
                    "{:<36} {:>12} {:>12} {:>9} {:>10}",
                    f.names[j],
                    fmt(f.beta[j]),
                    fmt(f.se[j]),
                    fmt(f.t[j]),
                    fmt(f.p_value[j])
                );
            }
            for w in &f.wald {
                println!(
                    "  Wald F {:<27} F({}, {}) = {:>10}  p = {}",
                    w.term,
                    w.df,
                    w.df_resid,
                    fmt(w.f),
                    fmt(w.p)
                );
            }
        }
    }
}
