//! `potclim verdict STUDY`: fit the comparison grid of `[model]`, decide
//! between a measured driver and a residual correlation, rank the drivers,
//! compute adjusted means and write the verdict tables.

use anyhow::Context;
use clap::Args;
use std::path::PathBuf;

/// Arguments of `potclim verdict`.
#[derive(Debug, Args)]
pub struct VerdictArgs {
    /// The study file (TOML).
    pub study: PathBuf,
}

/// Run `potclim verdict`.
pub fn run(args: VerdictArgs) -> anyhow::Result<()> {
    use crate::model::verdict::{VerdictOptions, run_verdict, write_outputs};
    let study = crate::io::study::Study::load(&args.study)
        .with_context(|| format!("loading {}", args.study.display()))?;
    let opts = VerdictOptions::from_study(&study)?;
    let r = run_verdict(&study, &opts)?;
    outln!("trait `{}`: {} pots, {} fits in {:.1} s", r.trait_name, r.n_pots, r.n_fits, r.seconds);
    for n in &r.notes {
        outln!("note: {n}");
    }
    outln!();
    outln!("{:<48} {:>10} {:>10} {:>4} {:>8} {:>7}", "model", "loglik", "AIC", "k", "dAIC", "weight");
    for m in &r.models {
        outln!(
            "{:<48} {:>10.2} {:>10.2} {:>4} {:>8.2} {:>7.3}",
            m.name,
            m.loglik,
            m.aic,
            m.n_params,
            m.delta_aic,
            m.akaike_weight
        );
    }
    if !r.drivers.is_empty() {
        outln!();
        outln!(
            "{:<24} {:>11} {:>11} {:>10} {:>10} {:>8} {:>8} {:>6}",
            "driver",
            "estimate",
            "per SD",
            "SE",
            "p",
            "dAIC",
            "dAIC|cor",
            "VIF"
        );
        for d in &r.drivers {
            outln!(
                "{:<24} {:>11.4} {:>11.4} {:>10.4} {:>10.3e} {:>8.2} {:>8} {:>6}{}",
                d.name,
                d.estimate,
                d.estimate_per_sd,
                d.se,
                d.p_value,
                d.delta_aic,
                d.delta_aic_with_correlation.map(|v| format!("{v:.2}")).unwrap_or_else(|| "-".into()),
                d.vif.map(|v| format!("{v:.2}")).unwrap_or_else(|| "-".into()),
                if d.confounded { "  spatially confounded" } else { "" }
            );
        }
    }
    if let Some(o) = &r.openings {
        outln!();
        outln!("{}", o.statement);
    }
    outln!();
    outln!("{}", r.residual_check.statement);
    outln!();
    outln!("verdict: {}", r.verdict);
    outln!("{}", r.reason);
    let files = write_outputs(&study, &r)?;
    outln!();
    for f in files {
        outln!("wrote {}", f.display());
    }
    Ok(())
}
