//! The `fit` stage: load the `[model]` design, fit OLS/ANOVA and every
//! requested residual covariance by ML and REML, run the residual
//! diagnostics and write `models.csv`, `coefficients.csv`, `anova.csv`,
//! `residuals.csv` and `diagnostics.csv` atomically.

use super::data::{ModelData, ModelSpec, load_model_data};
use super::design::{CountTable, Design, DesignSpec, count_tables};
use super::diagnostics::{MORAN_NEIGHBOURS, MoranTest, knn, moran_residuals};
use super::error::Result;
use super::gls::{
    Errors, Fit, LikelihoodPath, Structure, fit_correlated, fit_directional, fit_independent,
    fit_rows_columns,
};
use super::ols::{AnovaTable, OlsFit, SsType, anova, ols};
use crate::io::output::StageWriter;
use crate::io::study::Study;
use crate::spatial::likelihood::{Distances, LikelihoodKind};
use std::fmt::Write as _;
use std::path::PathBuf;

use super::verdict::RESIDUAL_VARIOGRAM_POTS;

/// Reference distances (metres) at which the fitted correlation is reported.
pub const REFERENCE_DISTANCES: [f64; 4] = [0.5, 1.0, 2.0, 5.0];

/// Everything the `fit` stage computed.
#[derive(Debug)]
pub struct FitReport {
    /// The validated `[model]` section.
    pub spec: ModelSpec,
    /// The analysed data.
    pub data: ModelData,
    /// The design.
    pub design: Design,
    /// OLS fit.
    pub ols: OlsFit,
    /// ANOVA tables of types I, II, III.
    pub anova: Vec<AnovaTable>,
    /// Count tables.
    pub counts: Vec<CountTable>,
    /// Every fit, independent errors first, each by ML then REML.
    pub fits: Vec<Fit>,
    /// Moran's I of each fit's (whitened) residuals, aligned with `fits`.
    pub moran: Vec<Option<MoranTest>>,
    /// Experimental (Matheron) variogram of each fit's normalised residuals,
    /// aligned with `fits` (`None` when the pot layout gives no lag bins).
    pub residual_variograms: Vec<Option<crate::spatial::variogram::Empirical>>,
    /// Notes for the user (pots left out, fits skipped and why).
    pub notes: Vec<String>,
}

/// Fit every model of the study's `[model]` section.
pub fn fit_study(study: &Study) -> Result<FitReport> {
    let spec = ModelSpec::from_study(study)?;
    let data = load_model_data(study, &spec)?;
    // before any n x n allocation: a forced exact path too large is refused here
    let path = LikelihoodPath::for_data(&spec, &data)?;
    let dspec = DesignSpec {
        blocks: spec.blocks.clone(),
        factors: spec.factors.clone(),
        interactions: spec.interactions.clone(),
        drivers: spec.drivers.clone(),
    };
    let design = Design::build(&data, &dspec)?;
    let y = &data.response;
    let ols_fit = ols(&design, y)?;
    let anovas = [SsType::Sequential, SsType::Hierarchical, SsType::Marginal]
        .iter()
        .map(|&k| anova(&design, y, k))
        .collect::<Result<Vec<_>>>()?;
    let counts = count_tables(&data);
    let dist = data.distances().map_err(|e| super::error::ModelError::Likelihood {
        model: "positions".into(),
        source: e,
        hint: None,
    })?;
    let mut notes = Vec::new();
    if !data.excluded.is_empty() {
        let list: Vec<String> =
            data.excluded.iter().map(|(id, line)| format!("{id} (line {line})")).collect();
        notes.push(format!(
            "{} pot(s) left out because `{}` is missing: {}",
            data.excluded.len(),
            data.trait_name,
            list.join(", ")
        ));
    }
    if let Some(m) = path.likelihood().neighbours() {
        notes.push(format!(
            "the correlated fits use {} ({} pots, `[model] likelihood = \"{}\"`): their log-likelihoods, estimates, SEs and tests come from that approximation; rows x columns and direction-dependent errors are not fitted (no nearest-neighbour form){}",
            path.likelihood().describe(),
            data.response.len(),
            spec.likelihood.name(),
            if data.response.len() > RESIDUAL_VARIOGRAM_POTS {
                format!("; the residual variograms are taken over every {}th pot", data.response.len().div_ceil(RESIDUAL_VARIOGRAM_POTS))
            } else {
                String::new()
            }
        ));
        let _ = m;
    }
    let mut fits = Vec::new();
    for method in [LikelihoodKind::Ml, LikelihoodKind::Reml] {
        fits.push(fit_independent(&design, y, method)?);
    }
    for &family in &spec.correlations {
        let nuggets: &[bool] = if spec.nugget { &[false, true] } else { &[false] };
        for &nugget in nuggets {
            let label = Errors::Correlated { family, nugget }.label();
            if let (false, Some(why), true) = (nugget, dist.singular_without_nugget(), spec.nugget) {
                // without a nugget the covariance can be singular; the nugget fit below still runs
                notes.push(format!(
                    "{label}: not fitted, {why} without a nugget; fitted with a nugget instead"
                ));
                continue;
            }
            for method in [LikelihoodKind::Ml, LikelihoodKind::Reml] {
                fits.push(fit_correlated(
                    &label, &design, y, &dist, &data.pots, family, nugget, method, &path,
                )?);
            }
        }
    }
    if path.is_exact() {
        fit_structures(&spec, &data, &design, &dist, &mut fits, &mut notes)?;
    }
    let nb = knn(&data.x, &data.y, MORAN_NEIGHBOURS);
    let moran = fits
        .iter()
        .map(|f| nb.as_ref().and_then(|nb| moran_residuals(&f.normalised, &f.whitened_x, nb)))
        .collect();
    let stride = if path.is_exact() { 1 } else { data.response.len().div_ceil(RESIDUAL_VARIOGRAM_POTS) };
    let residual_variograms = residual_variograms(&data, &fits, stride);
    Ok(FitReport {
        spec,
        data,
        design,
        ols: ols_fit,
        anova: anovas,
        counts,
        fits,
        moran,
        residual_variograms,
        notes,
    })
}

/// The rows x columns and direction-dependent fits that `[model]` declares
/// (`rows_columns`, `directional`), each without and (with `[model] nugget`)
/// with a nugget share, by ML then REML, appended to `fits`; a structure that
/// cannot be fitted to this layout is said in `notes`, as in the verdict's
/// grid ([`crate::model::structures::add_to_grid`]).
fn fit_structures(
    spec: &ModelSpec,
    data: &ModelData,
    design: &Design,
    dist: &Distances,
    fits: &mut Vec<Fit>,
    notes: &mut Vec<String>,
) -> Result<()> {
    let mut errors = Vec::new();
    let coincident = !dist.coincident().is_empty();
    crate::model::structures::add_to_grid(spec, data, coincident, &mut errors, notes);
    let y = &data.response;
    for e in errors {
        let label = e.label();
        for method in [LikelihoodKind::Ml, LikelihoodKind::Reml] {
            fits.push(match e {
                Errors::RowsColumns { nugget } => {
                    let lattice = data.lattice().map_err(|m| super::error::ModelError::Design {
                        path: data.source.clone(),
                        message: format!("rows x columns: {m}"),
                        hint: None,
                    })?;
                    fit_rows_columns(&label, design, y, &lattice, nugget, method)?
                }
                Errors::Directional { family, nugget } => {
                    fit_directional(&label, design, y, dist, family, nugget, method)?
                }
                Errors::Independent | Errors::Correlated { .. } => {
                    unreachable!("add_to_grid adds structures only")
                }
            });
        }
    }
    Ok(())
}

/// The parameters of a rows x columns or direction-dependent fit in the
/// columns `row_correlation`, `column_correlation`, `direction_degrees`,
/// `range_ratio` (empty cells for the others).
fn structure_cells(f: &Fit) -> [String; 4] {
    match &f.structure {
        Some(Structure::RowsColumns { params, .. }) => {
            [num(params.phi_row), num(params.phi_col), String::new(), String::new()]
        }
        Some(Structure::Directional { direction, .. }) => {
            [String::new(), String::new(), num(direction.degrees()), num(direction.ratio)]
        }
        None => Default::default(),
    }
}

/// Range parameter, nugget share and practical range of a fit (the range
/// along the direction of greatest continuity for direction-dependent
/// fits; no range for rows x columns); `None` for independent errors.
fn range_eta_practical(f: &Fit) -> (Option<f64>, Option<f64>, Option<f64>) {
    match (&f.covariance, &f.structure) {
        (Some(c), _) => (Some(c.params.range), Some(c.params.eta), Some(c.practical_range)),
        (None, Some(Structure::Directional { params, .. })) => {
            (Some(params.range), Some(params.eta), Some(params.family.practical_range(params.range)))
        }
        (None, Some(Structure::RowsColumns { params, .. })) => (None, Some(params.eta), None),
        (None, None) => (None, None, None),
    }
}

/// The experimental variogram of every fit's normalised residuals at the pot
/// positions, by the one variogram implementation of [`crate::spatial`]
/// (Matheron's estimator, default bins for the layout).
pub fn residual_variograms(
    data: &ModelData,
    fits: &[Fit],
    stride: usize,
) -> Vec<Option<crate::spatial::variogram::Empirical>> {
    use crate::spatial::geometry::{Origin, Points};
    use crate::spatial::variogram::{Bins, Estimator, experimental};
    let k = stride.max(1);
    let pick = |v: &[f64]| -> Vec<f64> { v.iter().step_by(k).copied().collect() };
    let ids = data.pots.iter().step_by(k).cloned().collect();
    let Ok(points) = Points::new("pot", ids, pick(&data.x), pick(&data.y), None, &Origin::default()) else {
        return vec![None; fits.len()];
    };
    let Ok(bins) = Bins::default_for(&points) else {
        return vec![None; fits.len()];
    };
    fits.iter()
        .map(|f| experimental(&points, &pick(&f.normalised), &bins, Estimator::Matheron, None).ok())
        .collect()
}

/// `residual_variograms.csv`: the variogram of each fit's normalised
/// residuals (same layout as `variograms.csv`; `variable` is
/// `<model> <method>`).
pub fn residual_variograms_csv(r: &FitReport) -> Result<Vec<u8>> {
    use crate::spatial::outputs::{VariogramTable, variograms_csv};
    let names: Vec<String> = r
        .fits
        .iter()
        .map(|f| format!("{} {}", model_name(f), if f.method == LikelihoodKind::Ml { "ML" } else { "REML" }))
        .collect();
    let tables: Vec<VariogramTable> = r
        .fits
        .iter()
        .zip(&r.residual_variograms)
        .zip(&names)
        .filter_map(|((_, v), name)| {
            v.as_ref().map(|e| VariogramTable { variable: name, empirical: e, fits: &[] })
        })
        .collect();
    variograms_csv(&tables).map_err(|e| {
        crate::io::IoError::Table { path: RESIDUAL_VARIOGRAMS_FILE.into(), message: e.to_string() }.into()
    })
}

// Numbers and text cells in the one CSV format of `crate::io::output`.
use crate::io::output::number as num;

fn csv_field(s: &str) -> String {
    crate::io::output::field(s, ',').into_owned()
}

/// The name of a fit in the output tables: the error structure.
pub fn model_name(f: &Fit) -> String {
    f.errors.label()
}

/// Render `models.csv`.
pub fn models_csv(r: &FitReport) -> String {
    let mut s = String::from(
        "model,trait,drivers,correlation,nugget,method,loglik,aic,bic,n_params,range,partial_sill,nugget_variance,converged,row_correlation,column_correlation,direction_degrees,range_ratio\n",
    );
    for f in &r.fits {
        let (range, eta, _) = range_eta_practical(f);
        let (ps, nv) = match eta {
            Some(eta) => (num((1.0 - eta) * f.sigma2), num(eta * f.sigma2)),
            None => (String::new(), String::new()),
        };
        let range = range.map(num).unwrap_or_default();
        let _ = writeln!(
            s,
            "{},{},{},{},{},{},{},{},{},{},{},{},{},{},{}",
            csv_field(&model_name(f)),
            csv_field(&r.data.trait_name),
            csv_field(&f.drivers.join("+")),
            csv_field(&f.errors.correlation_name()),
            f.errors.has_nugget(),
            f.method.label(),
            num(f.loglik),
            num(f.aic),
            num(f.bic),
            f.n_params,
            range,
            ps,
            nv,
            f.converged(),
            structure_cells(f).join(",")
        );
    }
    s
}

/// Render `coefficients.csv`: OLS rows (model `ols`) then every fit.
pub fn coefficients_csv(r: &FitReport) -> String {
    let mut s = String::from("model,method,term,estimate,se,t,p\n");
    let o = &r.ols;
    for j in 0..o.beta.len() {
        let _ = writeln!(
            s,
            "ols,OLS,{},{},{},{},{}",
            csv_field(&o.names[j]),
            num(o.beta[j]),
            num(o.se[j]),
            num(o.t[j]),
            num(o.p_value[j])
        );
    }
    for f in &r.fits {
        for j in 0..f.beta.len() {
            let _ = writeln!(
                s,
                "{},{},{},{},{},{},{}",
                csv_field(&model_name(f)),
                f.method.label(),
                csv_field(&f.names[j]),
                num(f.beta[j]),
                num(f.se[j]),
                num(f.t[j]),
                num(f.p_value[j])
            );
        }
    }
    s
}

/// Render `anova.csv`: OLS sums of squares of types I, II, III, then the
/// marginal Wald F tests of every fit (test `wald`, no sum of squares).
/// Columns: `df` of the term, `df_remainder` (the F ratio's second degrees of
/// freedom), `sum_of_squares`, `mean_square`, `f_ratio`, `p_value`; the last
/// row of each OLS table is [`super::ols::RESIDUAL_TERM`].
pub fn anova_csv(r: &FitReport) -> String {
    let mut s =
        String::from("model,method,test,term,df,df_remainder,sum_of_squares,mean_square,f_ratio,p_value\n");
    let df_resid = r.ols.df_resid;
    for t in &r.anova {
        for row in &t.rows {
            let _ = writeln!(
                s,
                "ols,OLS,type_{},{},{},{},{},{},{},{}",
                t.kind.label(),
                csv_field(&row.term),
                row.df,
                if row.f.is_some() { df_resid.to_string() } else { String::new() },
                num(row.sum_sq),
                num(row.mean_sq),
                row.f.map(num).unwrap_or_default(),
                row.p.map(num).unwrap_or_default()
            );
        }
    }
    for f in &r.fits {
        for w in &f.wald {
            let _ = writeln!(
                s,
                "{},{},wald,{},{},{},,,{},{}",
                csv_field(&model_name(f)),
                f.method.label(),
                csv_field(&w.term),
                w.df,
                w.df_resid,
                num(w.f),
                num(w.p)
            );
        }
    }
    s
}

/// Render `residuals.csv`: one row per pot and fit.
pub fn residuals_csv(r: &FitReport) -> String {
    let mut s = String::from("model,method,pot,fitted,residual,normalised_residual\n");
    for f in &r.fits {
        let name = csv_field(&model_name(f));
        for i in 0..f.n {
            let _ = writeln!(
                s,
                "{},{},{},{},{},{}",
                name,
                f.method.label(),
                csv_field(&r.data.pots[i]),
                num(f.fitted[i]),
                num(f.residuals[i]),
                num(f.normalised[i])
            );
        }
    }
    s
}

/// Render `diagnostics.csv`: per fit, covariance details and Moran's I.
pub fn diagnostics_csv(r: &FitReport) -> String {
    let mut s = String::from(
        "model,method,sigma2,nugget_share,practical_range,aicc,evaluations,at_bounds,moran_k,moran_i,moran_expected,moran_variance,moran_z,moran_p",
    );
    for d in REFERENCE_DISTANCES {
        let _ = write!(s, ",correlation_at_{d}m");
    }
    s.push('\n');
    for (f, m) in r.fits.iter().zip(&r.moran) {
        let (_, eta, pr) = range_eta_practical(f);
        let (eta, pr) = (eta.map(num).unwrap_or_default(), pr.map(num).unwrap_or_default());
        let (ev, ab) = match &f.search {
            Some(s) => (s.evaluations.to_string(), s.at_bounds.join("+")),
            None => (String::new(), String::new()),
        };
        let moran = match m {
            Some(m) => format!(
                "{},{},{},{},{},{}",
                m.k,
                num(m.i),
                num(m.expected),
                num(m.variance),
                num(m.z),
                num(m.p)
            ),
            None => ",,,,,".into(),
        };
        let _ = write!(
            s,
            "{},{},{},{},{},{},{},{},{}",
            csv_field(&model_name(f)),
            f.method.label(),
            num(f.sigma2),
            eta,
            pr,
            f.aicc.map(num).unwrap_or_default(),
            ev,
            ab,
            moran
        );
        for d in REFERENCE_DISTANCES {
            let _ = write!(s, ",{}", f.correlation_at(d).map(num).unwrap_or_default());
        }
        s.push('\n');
    }
    s
}

/// The files of the stage, in the order [`write_outputs`] writes them.
pub const MODELS_FILE: &str = "models.csv";
/// Coefficients of OLS and of every fit.
pub const COEFFICIENTS_FILE: &str = "coefficients.csv";
/// Analysis-of-variance and Wald tables.
pub const ANOVA_FILE: &str = "anova.csv";
/// Fitted values and residuals per pot and fit.
pub const RESIDUALS_FILE: &str = "residuals.csv";
/// Residual diagnostics per fit.
pub const DIAGNOSTICS_FILE: &str = "diagnostics.csv";
/// Variograms of the normalised residuals.
pub const RESIDUAL_VARIOGRAMS_FILE: &str = "residual_variograms.csv";

/// Write every output of the stage into the study's output folder atomically.
pub fn write_outputs(study: &Study, r: &FitReport) -> Result<Vec<PathBuf>> {
    let mut w = StageWriter::new(&study.output_dir(), "fit")?;
    w.write(MODELS_FILE, models_csv(r).as_bytes())?;
    w.write(COEFFICIENTS_FILE, coefficients_csv(r).as_bytes())?;
    w.write(ANOVA_FILE, anova_csv(r).as_bytes())?;
    w.write(RESIDUALS_FILE, residuals_csv(r).as_bytes())?;
    w.write(DIAGNOSTICS_FILE, diagnostics_csv(r).as_bytes())?;
    w.write(RESIDUAL_VARIOGRAMS_FILE, &residual_variograms_csv(r)?)?;
    Ok(w.commit()?)
}
