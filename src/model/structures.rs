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

#[cfg(test)]
mod tests {
    use crate::spatial::anisotropy;
    use crate::spatial::ascent::maximise_shared;
    use crate::spatial::correlation::Family;
    use crate::spatial::likelihood::{Distances, LikelihoodKind, SearchOptions, aic};
    use crate::spatial::rowcol::{self, Lattice};

    /// Truth study, pattern along benches: 4 benches of 3 rows x 10 slots
    /// (rows 0.6 m apart along y, slots 0.4 m apart along x), residuals
    /// correlated strongly along the benches (0.8 from slot to slot) and
    /// weakly across them (0.2 from row to row), plus a little independent
    /// noise. Over 12 seeds the ML fits with independent errors, isotropic
    /// exponential, rows x columns and direction-dependent exponential
    /// errors (no nugget) are ranked by AIC with the parameter counts of
    /// [`crate::model::gls::Errors::n_cov_params`]; the rows x columns or the
    /// direction-dependent model must win for most seeds (counts printed).
    #[test]
    fn bench_pattern_is_found_by_the_bench_structures() {
        let (nr, nc) = (12usize, 10usize);
        let n = nr * nc;
        let xs: Vec<f64> = (0..n).map(|k| (k % nc) as f64 * 0.4).collect();
        let ys: Vec<f64> = (0..n).map(|k| (k / nc) as f64 * 0.6).collect();
        let lat = Lattice::from_coords(&xs, &ys).unwrap();
        assert!(lat.is_complete());
        let dist = Distances::from_coords(&xs, &ys).unwrap();
        let x = vec![vec![1.0; n]];
        let opts = SearchOptions { nugget: false, ..SearchOptions::default() };
        let seeds = 12u64;
        let mut wins = [0usize; 4];
        for seed in 0..seeds {
            let field = rowcol::tests::simulate_field(nr, nc, 0.2, 0.8, 500 + seed);
            let noise = rowcol::tests::simulate_field(nr, nc, 0.0, 0.0, 9000 + seed);
            let y: Vec<f64> = field.iter().zip(&noise).map(|(f, e)| 10.0 + 2.0 * f + 0.3 * e).collect();
            let mean = y.iter().sum::<f64>() / n as f64;
            let rss: f64 = y.iter().map(|v| (v - mean).powi(2)).sum();
            let l_ind = -(n as f64) / 2.0 * ((2.0 * std::f64::consts::PI).ln() + 1.0 + (rss / n as f64).ln());
            let (mut iso, _) =
                maximise_shared(&dist, Family::Exponential, &[x.as_slice()], &y, LikelihoodKind::Ml, &opts);
            let l_iso = iso.pop().unwrap().unwrap().best.loglik;
            let l_rc = rowcol::maximise(&lat, &x, &y, LikelihoodKind::Ml, false, 0.99).unwrap().best.loglik;
            let l_dir =
                anisotropy::maximise((&xs, &ys), Family::Exponential, &x, &y, LikelihoodKind::Ml, &opts)
                    .unwrap()
                    .best
                    .loglik;
            let aics = [aic(l_ind, 2), aic(l_iso, 3), aic(l_rc, 4), aic(l_dir, 5)];
            let best = (0..4).min_by(|&a, &b| aics[a].total_cmp(&aics[b])).unwrap();
            wins[best] += 1;
        }
        eprintln!(
            "bench pattern over {seeds} seeds, lowest AIC: independent {}, exponential {}, rows x columns {}, exponential direction-dependent {}",
            wins[0], wins[1], wins[2], wins[3]
        );
        assert!(wins[2] + wins[3] >= 10, "{wins:?}");
    }
}
