//! The comparison grid: which models it holds (the base design; base plus
//! each driver; base plus all climate drivers together; each with independent
//! errors and with every declared correlation family, with and without
//! nugget) and the one helper that fits any of them by ML or REML.

use super::DISTANCE_PREFIX;
use crate::model::data::{ModelData, ModelSpec};
use crate::model::design::{Design, DesignSpec};
use crate::model::error::{ModelError, Result};
use crate::model::gls::{Errors, Fit, fit_correlated, fit_independent};
use crate::spatial::likelihood::{Distances, LikelihoodKind};

pub(super) fn lerr(model: &str, e: crate::spatial::likelihood::LikelihoodError) -> ModelError {
    ModelError::Likelihood { model: model.into(), source: e, hint: None }
}

/// Name of a grid model.
pub fn model_name(drivers: &[String], errors: &Errors) -> String {
    let mut s = String::from("base");
    for d in drivers {
        s.push('+');
        s.push_str(d);
    }
    if !matches!(errors, Errors::Independent) {
        s.push_str(" | ");
        s.push_str(&errors.label());
    }
    s
}

pub(super) fn design_for(data: &ModelData, spec: &ModelSpec, drivers: &[String]) -> Result<Design> {
    Design::build(
        data,
        &DesignSpec {
            blocks: spec.blocks.clone(),
            factors: spec.factors.clone(),
            interactions: spec.interactions.clone(),
            drivers: drivers.to_vec(),
        },
    )
}

pub(super) fn fit(
    design: &Design,
    data: &ModelData,
    dist: &Distances,
    errors: Errors,
    method: LikelihoodKind,
) -> Result<Fit> {
    match errors {
        Errors::Independent => fit_independent(design, &data.response, method),
        Errors::Correlated { family, nugget } => fit_correlated(
            &model_name(&design.drivers, &errors),
            design,
            &data.response,
            dist,
            &data.pots,
            family,
            nugget,
            method,
        ),
    }
}

/// One ML fit of the grid with its shape.
pub(super) struct GridFit {
    pub(super) drivers: Vec<String>,
    pub(super) errors: Errors,
    pub(super) fit: Fit,
}

/// Fit every model of the grid by ML, in a fixed order (driver sets outer,
/// error models inner). `full` is the design with every driver (built first
/// so that collinear drivers are refused with their names). Error models left
/// out are said in `notes`. Each finished fit is a step of `progress`.
pub(super) fn fit_grid(
    data: &ModelData,
    spec: &ModelSpec,
    full: &Design,
    dist: &Distances,
    notes: &mut Vec<String>,
    progress: &dyn crate::model::progress::FitProgress,
) -> Result<Vec<GridFit>> {
    // Every driver alone; the measured climate drivers together. A distance
    // to an opening is a smooth function of position, a stand-in for any
    // smooth effect near the opening: it is compared alone (climate against
    // plain distance), never added to the climate drivers, where it would
    // compete with the correlated residual instead (docs/verdict.md).
    let mut driver_sets: Vec<Vec<String>> = vec![vec![]];
    for d in &spec.drivers {
        driver_sets.push(vec![d.clone()]);
    }
    let climate: Vec<String> =
        spec.drivers.iter().filter(|d| !d.starts_with(DISTANCE_PREFIX)).cloned().collect();
    if climate.len() > 1 {
        driver_sets.push(climate);
    }
    let mut error_models = vec![Errors::Independent];
    let coincident = !dist.coincident().is_empty();
    for &family in &spec.correlations {
        if coincident && spec.nugget {
            notes.push(format!(
                "{}: not fitted without a nugget, pots share positions (the correlation matrix would be singular)",
                family.name()
            ));
        } else {
            error_models.push(Errors::Correlated { family, nugget: false });
        }
        if spec.nugget {
            error_models.push(Errors::Correlated { family, nugget: true });
        }
    }
    let mut grid: Vec<GridFit> = Vec::new();
    let counter = crate::model::progress::Counter::begin(
        progress,
        "comparison grid (ML fits)",
        driver_sets.len() * error_models.len(),
    );
    for drivers in &driver_sets {
        let design = if drivers.len() == spec.drivers.len() && !drivers.is_empty() {
            full.clone()
        } else {
            design_for(data, spec, drivers)?
        };
        for &errors in &error_models {
            let f = fit(&design, data, dist, errors, LikelihoodKind::Ml)?;
            grid.push(GridFit { drivers: drivers.clone(), errors, fit: f });
            counter.step();
        }
    }
    Ok(grid)
}
