//! The verdict stage's files: `summary.json` (the whole [`VerdictResult`]),
//! `comparison.csv`, `drivers.csv` and `adjusted_means.csv` (columns in
//! docs/outputs.md), written atomically into the output folder.

use super::result::VerdictResult;
use crate::io::output::StageWriter;
use crate::io::study::Study;
use crate::model::error::Result;
use std::fmt::Write as _;
use std::path::PathBuf;

fn num(v: f64) -> String {
    if v.is_finite() { format!("{v:?}") } else { String::new() }
}

fn opt(v: Option<f64>) -> String {
    v.map(num).unwrap_or_default()
}

fn csv_field(s: &str) -> String {
    if s.contains([',', '"', '\n']) { format!("\"{}\"", s.replace('"', "\"\"")) } else { s.to_string() }
}

/// Render `comparison.csv` (the grid, sorted by AIC).
pub fn comparison_csv(r: &VerdictResult) -> String {
    let mut s = String::from(
        "model,drivers,correlation,nugget,loglik,aic,bic,n_params,delta_aic,akaike_weight,range,nugget_share,converged,chosen\n",
    );
    for m in &r.models {
        let _ = writeln!(
            s,
            "{},{},{},{},{},{},{},{},{},{},{},{},{},{}",
            csv_field(&m.name),
            csv_field(&m.drivers.join("+")),
            csv_field(&m.correlation),
            m.nugget,
            num(m.loglik),
            num(m.aic),
            num(m.bic),
            m.n_params,
            num(m.delta_aic),
            num(m.akaike_weight),
            opt(m.range),
            opt(m.nugget_share),
            m.converged,
            m.name == r.best_model
        );
    }
    s
}

/// Render `drivers.csv`.
pub fn drivers_csv(r: &VerdictResult) -> String {
    let mut s = String::from(
        "driver,kind,source_model,estimate,estimate_per_sd,driver_sd,se,ci_low,ci_high,p_value,delta_aic,delta_aic_with_correlation,p_independent,p_with_correlation,vif,confounded,estimate_with_mapping_uncertainty,se_with_mapping_uncertainty,ci_low_with_mapping_uncertainty,ci_high_with_mapping_uncertainty\n",
    );
    for d in &r.drivers {
        let _ = writeln!(
            s,
            "{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{}",
            csv_field(&d.name),
            d.kind,
            csv_field(&d.source_model),
            num(d.estimate),
            num(d.estimate_per_sd),
            num(d.driver_sd),
            num(d.se),
            num(d.ci_low),
            num(d.ci_high),
            num(d.p_value),
            num(d.delta_aic),
            opt(d.delta_aic_with_correlation),
            num(d.p_independent),
            opt(d.p_with_correlation),
            opt(d.vif),
            d.confounded,
            opt(d.estimate_with_mapping_uncertainty),
            opt(d.se_with_mapping_uncertainty),
            opt(d.ci_low_with_mapping_uncertainty),
            opt(d.ci_high_with_mapping_uncertainty)
        );
    }
    s
}

/// Render `adjusted_means.csv`.
pub fn adjusted_means_csv(r: &VerdictResult) -> String {
    let mut s = String::from("factor,level,mean,se,plain_mean,plain_se,change\n");
    for a in &r.adjusted_means {
        let _ = writeln!(
            s,
            "{},{},{},{},{},{},{}",
            csv_field(&a.factor),
            csv_field(&a.level),
            num(a.mean),
            num(a.se),
            num(a.plain_mean),
            num(a.plain_se),
            num(a.change)
        );
    }
    s
}

/// Write `summary.json`, `comparison.csv`, `drivers.csv` and
/// `adjusted_means.csv` into the output folder atomically.
pub fn write_outputs(study: &Study, r: &VerdictResult) -> Result<Vec<PathBuf>> {
    let mut w = StageWriter::new(&study.output_dir(), "verdict")?;
    let json = serde_json::to_string_pretty(r).expect("plain data serialises");
    w.write("summary.json", json.as_bytes())?;
    w.write("comparison.csv", comparison_csv(r).as_bytes())?;
    w.write("drivers.csv", drivers_csv(r).as_bytes())?;
    w.write("adjusted_means.csv", adjusted_means_csv(r).as_bytes())?;
    Ok(w.commit()?)
}
