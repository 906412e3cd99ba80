//! The comparison grid: which models it holds (the base design; base plus
//! each driver; base plus all climate drivers together; each with independent
//! errors and with every declared correlation family, with and without
//! nugget) and the one helper that fits any of them by ML or REML.

use super::DISTANCE_PREFIX;
use crate::model::data::{ModelData, ModelSpec};
use crate::model::design::{Design, DesignSpec};
use crate::model::error::{ModelError, Result};
use crate::model::gls::{
    Errors, Fit, LikelihoodPath, fit_correlated, fit_correlated_shared, fit_directional, fit_independent,
    fit_rows_columns,
};
pub use crate::model::timings::SharedGrid;
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
    path: &LikelihoodPath,
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
            path,
        ),
        Errors::RowsColumns { nugget } => {
            let name = model_name(&design.drivers, &errors);
            let lattice = data.lattice().map_err(|e| ModelError::Likelihood {
                model: name.clone(),
                source: crate::spatial::likelihood::LikelihoodError::Invalid(format!(
                    "the pots do not stand on a grid: {e}"
                )),
                hint: Some(
                    "rows x columns needs pots on equally spaced rows and columns, or their cells named by `[pots] lattice_row` and `lattice_column`".into(),
                ),
            })?;
            fit_rows_columns(&name, design, &data.response, &lattice, nugget, method)
        }
        Errors::Directional { family, nugget } => fit_directional(
            &model_name(&design.drivers, &errors),
            design,
            &data.response,
            dist,
            family,
            nugget,
            method,
        ),
    }
}

/// Threads the grid's fits are spread over: the hardware threads (at most
/// 8), one below 64 pots where a fit takes well under a millisecond.
pub fn fit_threads(n: usize) -> usize {
    if n < 64 { 1 } else { std::thread::available_parallelism().map(|t| t.get()).unwrap_or(1).min(8) }
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
/// out are said in `notes`; the start grids shared by the fixed parts of one
/// error model are listed in `shared`. Each finished fit is a step of
/// `progress`. On the nearest-neighbour likelihood (`path`) the rows x
/// columns and direction-dependent models, which have only a dense form, are
/// left out with a note.
#[allow(clippy::too_many_arguments)]
pub(super) fn fit_grid(
    data: &ModelData,
    spec: &ModelSpec,
    full: &Design,
    dist: &Distances,
    path: &LikelihoodPath,
    notes: &mut Vec<String>,
    shared: &mut Vec<SharedGrid>,
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
    let singular = dist.singular_without_nugget();
    let coincident = singular.is_some();
    for &family in &spec.correlations {
        if let (Some(why), true) = (&singular, spec.nugget) {
            notes.push(format!("{}: not fitted without a nugget, {why}", family.name()));
        } else {
            error_models.push(Errors::Correlated { family, nugget: false });
        }
        if spec.nugget {
            error_models.push(Errors::Correlated { family, nugget: true });
        }
    }
    if path.is_exact() {
        crate::model::structures::add_to_grid(spec, data, coincident, &mut error_models, notes);
    } else if spec.rows_columns || !spec.directional.is_empty() {
        notes.push(format!(
            "rows x columns and direction-dependent errors: not fitted, they have no nearest-neighbour form and the correlated fits use {}",
            path.likelihood().describe()
        ));
    }
    let total = driver_sets.len() * error_models.len();
    let counter = crate::model::progress::Counter::begin(progress, "comparison grid (ML fits)", total);
    let designs: Vec<Design> = driver_sets
        .iter()
        .map(|drivers| {
            if drivers.len() == spec.drivers.len() && !drivers.is_empty() {
                Ok(full.clone())
            } else {
                design_for(data, spec, drivers)
            }
        })
        .collect::<Result<_>>()?;
    // One task per error model: its fits of every driver set share the
    // start grid's factorisations. Tasks run on up to `fit_threads` threads,
    // each fit single-threaded inside (threads across fits, not inside
    // factorisations of a few hundred rows); results keep the fixed order.
    let fit_threads = fit_threads(data.response.len()).min(error_models.len()).max(1);
    let next = std::sync::atomic::AtomicUsize::new(0);
    type Task = (Vec<Result<Fit>>, Option<SharedGrid>);
    let run_task = |k: usize| -> Result<Task> {
        let errors = error_models[k];
        match errors {
            Errors::Independent | Errors::RowsColumns { .. } | Errors::Directional { .. } => Ok((
                designs
                    .iter()
                    .map(|d| {
                        let f = fit(d, data, dist, errors, LikelihoodKind::Ml, path);
                        counter.step();
                        f
                    })
                    .collect(),
                None,
            )),
            Errors::Correlated { family, nugget } => {
                let names: Vec<String> = designs.iter().map(|d| model_name(&d.drivers, &errors)).collect();
                let refs: Vec<&Design> = designs.iter().collect();
                let (fits, (factorisations, seconds)) = fit_correlated_shared(
                    &names,
                    &refs,
                    &data.response,
                    dist,
                    &data.pots,
                    family,
                    nugget,
                    LikelihoodKind::Ml,
                    path,
                )?;
                for _ in &fits {
                    counter.step();
                }
                // both paths share the start grid (no dense factorisation on
                // the nearest-neighbour path)
                let grid =
                    Some(SharedGrid { errors: errors.label(), fits: fits.len(), factorisations, seconds });
                Ok((fits, grid))
            }
        }
    };
    let mut done: Vec<Option<Result<Task>>> = (0..error_models.len()).map(|_| None).collect();
    let worker = || {
        let mut mine = Vec::new();
        crate::spatial::factor::sequential(|| {
            loop {
                let k = next.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
                if k >= error_models.len() {
                    break;
                }
                mine.push((k, run_task(k)));
            }
        });
        mine
    };
    if fit_threads <= 1 {
        for (k, r) in worker() {
            done[k] = Some(r);
        }
    } else {
        std::thread::scope(|s| {
            let handles: Vec<_> = (0..fit_threads).map(|_| s.spawn(worker)).collect();
            for h in handles {
                for (k, r) in h.join().expect("a fit thread panicked") {
                    done[k] = Some(r);
                }
            }
        });
    }
    let mut per_model: Vec<std::vec::IntoIter<Result<Fit>>> = Vec::new();
    for r in done {
        let (fits, g) = r.expect("every error model was fitted")?;
        if let Some(g) = g {
            shared.push(g);
        }
        per_model.push(fits.into_iter());
    }
    let mut grid: Vec<GridFit> = Vec::new();
    for drivers in &driver_sets {
        for (k, &errors) in error_models.iter().enumerate() {
            let f = per_model[k].next().expect("one fit per driver set")?;
            grid.push(GridFit { drivers: drivers.clone(), errors, fit: f });
        }
    }
    Ok(grid)
}
