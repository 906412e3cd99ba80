//! The residual structures for benches and lanes in the comparison grid:
//! rows x columns ([`crate::spatial::rowcol`]) and direction-dependent
//! ranges ([`crate::spatial::anisotropy`]), declared in `[model]` by
//! `rows_columns = true` and `directional = [families]` (docs/model.md).
//! This file decides which of them enter the grid and says why one is left
//! out; the fits are in [`crate::model::gls`], their names and words in
//! [`crate::model::gls::Errors`] and [`crate::model::gls::Structure`].

use crate::model::data::{ModelData, ModelSpec};
use crate::model::gls::{Errors, Fit};
use crate::spatial::rowcol::Lattice;

/// Append the declared structures to the grid's `error_models` (each
/// without and, when `[model] nugget` allows, with a nugget, like the
/// distance families), with a note for each one left out: rows x columns
/// when the pots do not stand on an exact grid of at least 2 x 2; a
/// direction-dependent family without nugget when pots share a position.
pub fn add_to_grid(
    spec: &ModelSpec,
    data: &ModelData,
    coincident: bool,
    error_models: &mut Vec<Errors>,
    notes: &mut Vec<String>,
) {
    if spec.rows_columns {
        match Lattice::from_coords(&data.x, &data.y) {
            Err(e) => notes.push(format!("rows x columns: not fitted, the pots do not stand on a grid ({e})")),
            Ok(l) if l.n_rows < 2 || l.n_cols < 2 => notes.push(format!(
                "rows x columns: not fitted, the pots stand in {} row(s) and {} column(s) (two of each are needed)",
                l.n_rows, l.n_cols
            )),
            Ok(l) => {
                if !l.is_complete() {
                    notes.push(format!(
                        "rows x columns: the pots fill {} of the {} x {} cells of their grid (rows along y, columns along x); the gaps are handled exactly, by the general dense path",
                        l.len(),
                        l.n_rows,
                        l.n_cols
                    ));
                }
                error_models.push(Errors::RowsColumns { nugget: false });
                if spec.nugget {
                    error_models.push(Errors::RowsColumns { nugget: true });
                }
            }
        }
    }
    for &family in &spec.directional {
        if coincident && spec.nugget {
            notes.push(format!(
                "direction-dependent {}: not fitted without a nugget, pots share positions (the correlation matrix would be singular)",
                family.name()
            ));
        } else {
            error_models.push(Errors::Directional { family, nugget: false });
        }
        if spec.nugget {
            error_models.push(Errors::Directional { family, nugget: true });
        }
    }
}

/// `reason` followed by the chosen model's residual structure in plain
/// words when it is rows x columns or direction-dependent (e.g. `rows x
/// columns: row correlation 0.62, column correlation 0.31`); `reason`
/// unchanged otherwise.
pub fn with_structure(reason: &str, chosen: &Fit) -> String {
    match &chosen.structure {
        Some(s) => format!("{reason} Residual structure of the chosen model: {}.", s.describe()),
        None => reason.to_string(),
    }
}
