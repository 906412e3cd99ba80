//! Fits with the residual structures that have no isotropic form: rows x
//! columns ([`crate::spatial::rowcol`]) and direction-dependent errors
//! ([`crate::spatial::anisotropy`]), both on the exact path (a part of
//! [`super`], in a file of its own).

use super::{Errors, Fit, Search, Structure, assemble};
use crate::model::design::Design;
use crate::model::error::{ModelError, Result};
use crate::spatial::anisotropy;
use crate::spatial::correlation::Family;
use crate::spatial::likelihood::{self, CovParams, Distances, LikelihoodKind, SearchOptions};
use crate::spatial::rowcol::{self, Lattice};

/// The positions of `dist` or an error naming `model` (the new structures
/// need planar coordinates, not only distances).
fn positions<'a>(model: &str, dist: &'a Distances) -> Result<(&'a [f64], &'a [f64])> {
    dist.coords().ok_or_else(|| ModelError::Likelihood {
        model: model.to_string(),
        source: likelihood::LikelihoodError::Invalid(
            "this residual structure needs the pots' x and y positions".into(),
        ),
        hint: None,
    })
}

/// The whitened solves of a fit at a given lower Cholesky factor `l`.
#[allow(clippy::too_many_arguments)]
fn finish_with_factor(
    model: &str,
    design: &Design,
    y: &[f64],
    l: &faer::Mat<f64>,
    params: CovParams,
    errors: Errors,
    method: LikelihoodKind,
    search: Search,
    structure: Structure,
) -> Result<Fit> {
    let lerr = |source| ModelError::Likelihood { model: model.to_string(), source, hint: None };
    let prof = likelihood::profiled_with_factor(l.as_ref(), &params, &design.x, y, method).map_err(lerr)?;
    let prof_sum =
        likelihood::profiled_with_factor(l.as_ref(), &params, &design.x_sum, y, method).map_err(lerr)?;
    let n = y.len();
    let mut wx = faer::Mat::from_fn(n, design.p(), |i, j| design.x[j][i]);
    likelihood::whiten(l.as_ref(), &mut wx);
    let whitened_x = (0..design.p()).map(|j| wx.col_as_slice(j).to_vec()).collect();
    let mut fit = assemble(
        design,
        y,
        method,
        errors,
        &prof,
        (prof_sum.beta.as_slice(), prof_sum.xtvx_inv.as_slice()),
        whitened_x,
        Some(search),
    );
    fit.structure = Some(structure);
    Ok(fit)
}

/// Fit with rows x columns errors ([`crate::spatial::rowcol`]) on the
/// pots' `lattice` ([`crate::model::data::ModelData::lattice`]): the search
/// uses the Kronecker path on a complete lattice without nugget, the final
/// estimates one dense factorisation.
pub fn fit_rows_columns(
    model: &str,
    design: &Design,
    y: &[f64],
    lattice: &Lattice,
    nugget: bool,
    method: LikelihoodKind,
) -> Result<Fit> {
    let lerr =
        |source, hint: Option<String>| ModelError::Likelihood { model: model.to_string(), source, hint };
    let lattice = lattice.clone();
    let t = std::time::Instant::now();
    let f0 = crate::spatial::factor::factorisations_on_this_thread();
    let max = rowcol::maximise(&lattice, &design.x, y, method, nugget, SearchOptions::default().eta_max)
        .map_err(|e| lerr(e, None))?;
    let l = rowcol::cholesky(&lattice, &max.params).map_err(|e| lerr(e, None))?;
    let search = Search {
        converged: max.converged,
        evaluations: max.evaluations,
        factorisations: (crate::spatial::factor::factorisations_on_this_thread() - f0) as usize,
        seconds: t.elapsed().as_secs_f64(),
        at_bounds: max.at_bounds.clone(),
        range_bounds: (f64::NAN, f64::NAN),
        other_optimum: None,
    };
    let params = CovParams { family: Family::Exponential, range: 1.0, eta: max.params.eta };
    finish_with_factor(
        model,
        design,
        y,
        &l,
        params,
        Errors::RowsColumns { nugget },
        method,
        search,
        Structure::RowsColumns { params: max.params, lattice },
    )
}

/// Fit with direction-dependent errors ([`crate::spatial::anisotropy`]):
/// the isotropic search, then the simplex over range, nugget share, angle
/// and ratio of ranges.
#[allow(clippy::too_many_arguments)]
pub fn fit_directional(
    model: &str,
    design: &Design,
    y: &[f64],
    dist: &Distances,
    family: Family,
    nugget: bool,
    method: LikelihoodKind,
) -> Result<Fit> {
    let lerr = |source| ModelError::Likelihood { model: model.to_string(), source, hint: None };
    let (px, py) = positions(model, dist)?;
    let t = std::time::Instant::now();
    let f0 = crate::spatial::factor::factorisations_on_this_thread();
    let opts = SearchOptions { nugget, ..SearchOptions::default() };
    let max = anisotropy::maximise((px, py), family, &design.x, y, method, &opts).map_err(lerr)?;
    let d = anisotropy::distances(px, py, &max.direction).map_err(lerr)?;
    let l = likelihood::cholesky(&d, &max.params).map_err(lerr)?;
    let search = Search {
        converged: max.converged,
        evaluations: max.evaluations,
        factorisations: (crate::spatial::factor::factorisations_on_this_thread() - f0) as usize,
        seconds: t.elapsed().as_secs_f64(),
        at_bounds: max.at_bounds.clone(),
        range_bounds: max.range_bounds,
        other_optimum: None,
    };
    finish_with_factor(
        model,
        design,
        y,
        &l,
        max.params,
        Errors::Directional { family, nugget },
        method,
        search,
        Structure::Directional { params: max.params, direction: max.direction },
    )
}
