//! The verdict stage's files: `summary.json` (the whole [`VerdictResult`]),
//! `comparison.csv`, `drivers.csv` and `adjusted_means.csv` (columns in
//! docs/outputs.md), written atomically into the output folder, every table
//! in the one CSV format of [`crate::io::output`].

use super::result::VerdictResult;
use crate::io::output::{CsvTable, StageWriter, number as num, opt_number as opt};
use crate::io::study::Study;
use crate::model::error::Result;
use std::path::PathBuf;

/// The whole verdict result as JSON.
pub const SUMMARY_FILE: &str = "summary.json";
/// The grid of fits, sorted by AIC.
pub const COMPARISON_FILE: &str = "comparison.csv";
/// One row per driver of the chosen model.
pub const DRIVERS_FILE: &str = "drivers.csv";
/// Adjusted and plain means per factor level.
pub const ADJUSTED_MEANS_FILE: &str = "adjusted_means.csv";

/// The columns `comparison.csv` appends after `chosen` when the grid holds a
/// rows x columns model.
pub const ROWS_COLUMNS_COLUMNS: [&str; 2] = ["row_correlation", "column_correlation"];
/// The columns `comparison.csv` appends (after those of rows x columns, if
/// any) when the grid holds a direction-dependent model.
pub const DIRECTIONAL_COLUMNS: [&str; 2] = ["direction_degrees", "range_ratio"];

/// The columns `comparison.csv` appends last when a fit used the
/// nearest-neighbour likelihood.
pub const LIKELIHOOD_COLUMNS: [&str; 2] = ["likelihood", "neighbours"];

/// Render `comparison.csv` (the grid, sorted by AIC). The columns of the
/// rows x columns and direction-dependent parameters are appended only when
/// the grid holds such a model, and those of the likelihood only when a fit
/// used the nearest-neighbour one, so that a grid without them keeps its
/// layout (docs/outputs.md).
pub fn comparison_csv(r: &VerdictResult) -> String {
    let rc = r.models.iter().any(|m| m.row_correlation.is_some());
    let dir = r.models.iter().any(|m| m.direction_degrees.is_some());
    let lik = r.models.iter().any(|m| m.likelihood.is_some());
    let mut header = vec![
        "model",
        "drivers",
        "correlation",
        "nugget",
        "loglik",
        "aic",
        "bic",
        "n_params",
        "delta_aic",
        "akaike_weight",
        "range",
        "nugget_share",
        "converged",
        "chosen",
    ];
    if rc {
        header.extend(ROWS_COLUMNS_COLUMNS);
    }
    if dir {
        header.extend(DIRECTIONAL_COLUMNS);
    }
    if lik {
        header.extend(LIKELIHOOD_COLUMNS);
    }
    let mut t = CsvTable::new(header);
    for m in &r.models {
        let mut row = vec![
            m.name.clone(),
            m.drivers.join("+"),
            m.correlation.clone(),
            m.nugget.to_string(),
            num(m.loglik),
            num(m.aic),
            num(m.bic),
            m.n_params.to_string(),
            num(m.delta_aic),
            num(m.akaike_weight),
            opt(m.range),
            opt(m.nugget_share),
            m.converged.to_string(),
            (m.name == r.best_model).to_string(),
        ];
        if rc {
            row.extend([opt(m.row_correlation), opt(m.column_correlation)]);
        }
        if dir {
            row.extend([opt(m.direction_degrees), opt(m.range_ratio)]);
        }
        if lik {
            row.extend([
                m.likelihood.clone().unwrap_or_default(),
                m.neighbours.map(|k| k.to_string()).unwrap_or_default(),
            ]);
        }
        t.row(row);
    }
    t.into_string()
}

/// Render `drivers.csv`.
pub fn drivers_csv(r: &VerdictResult) -> String {
    let mut t = CsvTable::new([
        "driver",
        "kind",
        "source_model",
        "estimate",
        "estimate_per_sd",
        "driver_sd",
        "se",
        "ci_low",
        "ci_high",
        "p_value",
        "delta_aic",
        "delta_aic_with_correlation",
        "p_independent",
        "p_with_correlation",
        "vif",
        "confounded",
        "estimate_with_mapping_uncertainty",
        "se_with_mapping_uncertainty",
        "ci_low_with_mapping_uncertainty",
        "ci_high_with_mapping_uncertainty",
        "se_small_sample",
        "df_small_sample",
        "p_small_sample",
        "ci_low_small_sample",
        "ci_high_small_sample",
        "small_sample_model",
        "smooth_share",
    ]);
    for d in &r.drivers {
        t.row([
            d.name.clone(),
            d.kind.to_string(),
            d.source_model.clone(),
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
            d.confounded.to_string(),
            opt(d.estimate_with_mapping_uncertainty),
            opt(d.se_with_mapping_uncertainty),
            opt(d.ci_low_with_mapping_uncertainty),
            opt(d.ci_high_with_mapping_uncertainty),
            opt(d.se_small_sample),
            opt(d.df_small_sample),
            opt(d.p_small_sample),
            opt(d.ci_low_small_sample),
            opt(d.ci_high_small_sample),
            d.small_sample_model.clone().unwrap_or_default(),
            opt(d.smooth_share),
        ]);
    }
    t.into_string()
}

/// Render `adjusted_means.csv`.
pub fn adjusted_means_csv(r: &VerdictResult) -> String {
    let mut t = CsvTable::new(["factor", "level", "mean", "se", "plain_mean", "plain_se", "change"]);
    for a in &r.adjusted_means {
        t.row([
            a.factor.clone(),
            a.level.clone(),
            num(a.mean),
            num(a.se),
            num(a.plain_mean),
            num(a.plain_se),
            num(a.change),
        ]);
    }
    t.into_string()
}

/// Write `summary.json`, `comparison.csv`, `drivers.csv` and
/// `adjusted_means.csv` into the output folder atomically.
pub fn write_outputs(study: &Study, r: &VerdictResult) -> Result<Vec<PathBuf>> {
    let mut w = StageWriter::new(&study.output_dir(), "verdict")?;
    let json = serde_json::to_string_pretty(r).expect("plain data serialises");
    w.write(SUMMARY_FILE, json.as_bytes())?;
    w.write(COMPARISON_FILE, comparison_csv(r).as_bytes())?;
    w.write(DRIVERS_FILE, drivers_csv(r).as_bytes())?;
    w.write(ADJUSTED_MEANS_FILE, adjusted_means_csv(r).as_bytes())?;
    Ok(w.commit()?)
}
