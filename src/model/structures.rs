//! The residual structures for benches and lanes in the comparison grid:
//! rows x columns ([`crate::spatial::rowcol`]) and direction-dependent
//! ranges ([`crate::spatial::anisotropy`]), declared in `[model]` by
//! `rows_columns = true` and `directional = [families]` (docs/model.md).
//! This file decides which of them enter the grid and says why one is left
//! out, and names the fitted structures in plain words for the verdict and
//! the report ([`summarise`], with the residuals' directional variograms as
//! evidence for a direction); the fits are in [`crate::model::gls`], their
//! names in [`crate::model::gls::Errors`].

use crate::model::data::{ModelData, ModelSpec};
use crate::model::gls::{Errors, Fit, Structure};
use serde::{Deserialize, Serialize};

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
    if data.paths.is_some() && (spec.rows_columns || !spec.directional.is_empty()) {
        // Their correlation is defined between fixed cells or directions of
        // fixed pots; along paths it would need W R W' of these structures.
        notes.push(
            "rows x columns and direction-dependent errors: not fitted, the pots move ([pots] moves); the isotropic families are fitted along the paths".into(),
        );
        return;
    }
    if spec.rows_columns {
        match data.lattice() {
            Err(e) => notes.push(format!(
                "rows x columns: not fitted, the pots do not stand on a grid ({e}); name their lattice cells with `[pots] lattice_row` and `lattice_column`"
            )),
            Ok(l) if l.n_rows < 2 || l.n_cols < 2 => notes.push(format!(
                "rows x columns: not fitted, the pots stand in {} row(s) and {} column(s) (two of each are needed)",
                l.n_rows, l.n_cols
            )),
            Ok(l) => {
                if !l.is_complete() {
                    notes.push(format!(
                        "rows x columns: the pots fill {} of the {} x {} cells of their grid ({}); the gaps are handled exactly, by the general dense path",
                        l.len(),
                        l.n_rows,
                        l.n_cols,
                        if data.cells.is_some() { "declared in [pots]" } else { "rows along y, columns along x" }
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

/// Half-width (degrees) of the angular windows of the evidence variograms
/// (common practice: four windows cover the half-plane).
pub const EVIDENCE_TOLERANCE_DEG: f64 = 22.5;

/// One bin of an evidence variogram.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct EvidenceBin {
    /// Mean separation of the bin's pairs, metres.
    pub lag: f64,
    /// Matheron semivariance of the residuals, trait units squared.
    pub semivariance: f64,
    /// Pairs in the bin.
    pub pairs: usize,
}

/// A directional experimental variogram of a fit's raw residuals.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct EvidenceVariogram {
    /// `along` (the fitted direction of greatest continuity) or `across`.
    pub label: String,
    /// Central angle, degrees counter-clockwise from the x axis, `[0, 180)`.
    pub angle_deg: f64,
    /// Half-width of the angular window, degrees.
    pub tolerance_deg: f64,
    /// The bins holding pairs, by lag.
    pub bins: Vec<EvidenceBin>,
}

/// A rows x columns or direction-dependent model of the grid in plain
/// words: the chosen model, or one within the tie margin of the lowest AIC.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct StructureSummary {
    /// Grid model name.
    pub model: String,
    /// The verdict rests on this model.
    pub chosen: bool,
    /// Its AIC minus the smallest AIC of the grid.
    pub delta_aic: f64,
    /// The estimates in one sentence, e.g. "rows x columns: neighbouring
    /// pots along a row correlate 0.62, along a column 0.31".
    pub sentence: String,
    /// Rows x columns: correlation of neighbours one column apart (along a
    /// row), nugget share included: `(1 - eta) phi_c`.
    pub along_row: Option<f64>,
    /// Rows x columns: correlation of neighbours one row apart (along a
    /// column), nugget share included: `(1 - eta) phi_r`.
    pub along_column: Option<f64>,
    /// Direction-dependent: direction of greatest continuity, degrees from the x axis.
    pub direction_degrees: Option<f64>,
    /// Direction-dependent: practical range along that direction, metres.
    pub practical_range_along: Option<f64>,
    /// Direction-dependent: practical range across it, metres.
    pub practical_range_across: Option<f64>,
    /// Direction-dependent: across over along, `(0, 1]`.
    pub range_ratio: Option<f64>,
    /// Nugget share.
    pub nugget_share: f64,
    /// Direction-dependent: the experimental variograms of the model's raw
    /// residuals along and across the fitted direction (Matheron's
    /// estimator, the default bins of the layout, windows of
    /// ±[`EVIDENCE_TOLERANCE_DEG`]); empty for rows x columns.
    pub evidence: Vec<EvidenceVariogram>,
}

/// The plain-words sentence of a structure; `declared` says whether the
/// lattice comes from `[pots]` columns (else rows run along x).
pub fn sentence(structure: &Structure, declared: bool) -> String {
    match structure {
        Structure::RowsColumns { params, .. } => {
            let shared = 1.0 - params.eta;
            let axes = if declared {
                "rows and columns as numbered in the pot table"
            } else {
                "rows run along x, columns along y"
            };
            let nugget = if params.eta > 0.0 {
                format!("; a share {:.2} of the variance is the pot's own (nugget)", params.eta)
            } else {
                String::new()
            };
            format!(
                "rows x columns: neighbouring pots along a row correlate {:.2}, along a column {:.2} ({axes}){nugget}",
                shared * params.phi_col,
                shared * params.phi_row
            )
        }
        Structure::Directional { params, direction } => {
            let along = params.family.practical_range(params.range);
            let nugget = if params.eta > 0.0 {
                format!("; a share {:.2} of the variance is the pot's own (nugget)", params.eta)
            } else {
                String::new()
            };
            format!(
                "direction-dependent {}: longest practical range {:.2} m along {:.0} degrees from the x axis, {:.2} times as long across ({:.2} m){nugget}",
                params.family.name(),
                along,
                direction.degrees(),
                direction.ratio,
                along * direction.ratio
            )
        }
    }
}

/// The directional variograms of `residuals` at the pots along `angle_deg`
/// and across it (the evidence beside a direction-dependent fit). Empty when
/// the layout gives no lag bins. Cost O(n log n + pairs) per direction.
pub fn evidence(data: &ModelData, residuals: &[f64], angle_deg: f64) -> Vec<EvidenceVariogram> {
    use crate::spatial::geometry::{Origin, Points};
    use crate::spatial::variogram::{Bins, Direction, Estimator, experimental};
    let Ok(points) =
        Points::new("pot", data.pots.clone(), data.x.clone(), data.y.clone(), None, &Origin::default())
    else {
        return Vec::new();
    };
    let Ok(bins) = Bins::default_for(&points) else {
        return Vec::new();
    };
    [("along", angle_deg), ("across", (angle_deg + 90.0).rem_euclid(180.0))]
        .into_iter()
        .filter_map(|(label, a)| {
            let dir = Direction { angle_deg: a, tolerance_deg: EVIDENCE_TOLERANCE_DEG };
            let e = experimental(&points, residuals, &bins, Estimator::Matheron, Some(dir)).ok()?;
            Some(EvidenceVariogram {
                label: label.into(),
                angle_deg: a,
                tolerance_deg: EVIDENCE_TOLERANCE_DEG,
                bins: e
                    .bins
                    .iter()
                    .filter_map(|b| {
                        b.semivariance.map(|g| EvidenceBin { lag: b.lag, semivariance: g, pairs: b.pairs })
                    })
                    .collect(),
            })
        })
        .collect()
}

/// The summaries of the grid's rows x columns and direction-dependent
/// models that are chosen or within `tie_delta` AIC units of the lowest AIC
/// (`fits`: model name, ML fit, AIC minus the lowest), chosen first, then by AIC.
pub fn summarise(
    data: &ModelData,
    fits: &[(String, &Fit, f64)],
    chosen: &str,
    tie_delta: f64,
) -> Vec<StructureSummary> {
    let mut out: Vec<StructureSummary> = fits
        .iter()
        .filter(|(name, _, d)| name == chosen || *d <= tie_delta)
        .filter_map(|(name, f, d)| {
            let s = f.structure.as_ref()?;
            let mut sum = StructureSummary {
                model: name.clone(),
                chosen: name == chosen,
                delta_aic: *d,
                sentence: sentence(s, data.cells.is_some()),
                along_row: None,
                along_column: None,
                direction_degrees: None,
                practical_range_along: None,
                practical_range_across: None,
                range_ratio: None,
                nugget_share: 0.0,
                evidence: Vec::new(),
            };
            match s {
                Structure::RowsColumns { params, .. } => {
                    sum.along_row = Some((1.0 - params.eta) * params.phi_col);
                    sum.along_column = Some((1.0 - params.eta) * params.phi_row);
                    sum.nugget_share = params.eta;
                }
                Structure::Directional { params, direction } => {
                    let along = params.family.practical_range(params.range);
                    sum.direction_degrees = Some(direction.degrees());
                    sum.practical_range_along = Some(along);
                    sum.practical_range_across = Some(along * direction.ratio);
                    sum.range_ratio = Some(direction.ratio);
                    sum.nugget_share = params.eta;
                    sum.evidence = evidence(data, &f.residuals, direction.degrees());
                }
            }
            Some(sum)
        })
        .collect();
    out.sort_by(|a, b| b.chosen.cmp(&a.chosen).then(a.delta_aic.total_cmp(&b.delta_aic)));
    out
}

/// `reason` followed by the chosen model's residual structure in plain
/// words ([`sentence`]) when it is rows x columns or direction-dependent;
/// `reason` unchanged otherwise.
pub fn with_structure(reason: &str, chosen: &Fit, declared: bool) -> String {
    match &chosen.structure {
        Some(s) => format!("{reason} Residual structure of the chosen model: {}.", sentence(s, declared)),
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

    use crate::model::data::{ModelData, ModelSpec};
    use crate::model::gls::Errors;
    use crate::model::verdict::{VerdictOptions, analyse};

    /// 3 benches x 3 rows x 10 slots: slots 0.4 m apart along x, rows 0.5 m
    /// apart within a bench and benches 1.7 m apart along y (so the positions
    /// are not an equally spaced grid); residuals correlated 0.8 along the
    /// rows and 0.3 from row to row on the 9 x 10 lattice of rows and slots,
    /// a driver `cold` falling along x with a true effect of 1.5, and a
    /// little independent noise. Pots are listed in a shuffled order, so the
    /// declared cells must travel with their pots. With `declared`, the
    /// lattice cells are given as `[pots]` columns would give them.
    fn benches(declared: bool, seed: u64) -> ModelData {
        let (nr, nc) = (9usize, 10usize);
        let n = nr * nc;
        let field = rowcol::tests::simulate_field(nr, nc, 0.3, 0.8, seed);
        let noise = rowcol::tests::simulate_field(nr, nc, 0.0, 0.0, seed + 77);
        // a fixed shuffle of the cells: k -> (37 k + 11) mod n (37 is prime to 90)
        let order: Vec<usize> = (0..n).map(|k| (37 * k + 11) % n).collect();
        let (mut x, mut y, mut resp, mut cold, mut rows, mut cols) =
            (vec![], vec![], vec![], vec![], vec![], vec![]);
        for &cell in &order {
            let (r, c) = (cell / nc, cell % nc);
            let (bench, row) = (r / 3, r % 3);
            x.push(c as f64 * 0.4);
            y.push(bench as f64 * 1.7 + row as f64 * 0.5);
            let d = 3.0 - 0.25 * c as f64 + 0.1 * (r as f64).sin();
            cold.push(d);
            resp.push(10.0 + 1.5 * d + 2.0 * field[cell] + 0.3 * noise[cell]);
            rows.push(r + 1);
            cols.push(c + 1);
        }
        ModelData {
            source: "benches.csv".into(),
            trait_name: "height".into(),
            pots: (0..n).map(|i| format!("p{i}")).collect(),
            lines: (0..n).map(|i| i + 2).collect(),
            x,
            y,
            response: resp,
            blocks: vec![],
            factors: vec![],
            drivers: vec![("cold".into(), cold)],
            excluded: vec![],
            cells: declared.then_some((rows, cols)),
            paths: None,
        }
    }

    fn bench_spec(directional: bool) -> ModelSpec {
        ModelSpec {
            trait_column: "height".into(),
            factors: vec![],
            interactions: vec![],
            drivers: vec!["cold".into()],
            blocks: vec![],
            correlations: vec![Family::Exponential],
            nugget: false,
            trait_unit: None,
            rows_columns: true,
            directional: if directional { vec![Family::Exponential] } else { vec![] },
            likelihood: crate::model::likelihood_path::Setting::Auto,
            neighbours: crate::spatial::vecchia::DEFAULT_NEIGHBOURS,
        }
    }

    /// Declared lattice columns let rows x columns into the grid where the
    /// positions are not an equally spaced grid (without them the note says
    /// why it is left out and names the keys); the parameters reach
    /// `comparison.csv` in the appended columns, the verdict's reason names
    /// the structure in plain words, the calibration names the plug-in t it
    /// uses for it, and the summary carries the neighbours' correlations.
    #[test]
    fn declared_lattice_enters_the_grid_and_is_named() {
        let opts = VerdictOptions { bootstrap: 0, ..VerdictOptions::default() };
        let r = analyse(&benches(false, 3), &bench_spec(false), &opts).unwrap();
        assert!(r.models.iter().all(|m| m.row_correlation.is_none()));
        assert!(
            r.notes.iter().any(|n| n.contains("rows x columns: not fitted") && n.contains("lattice_row")),
            "{:?}",
            r.notes
        );
        let csv = crate::model::verdict::comparison_csv(&r);
        assert!(csv.lines().next().unwrap().ends_with(",converged,chosen"), "{csv}");

        let r = analyse(&benches(true, 3), &bench_spec(false), &opts).unwrap();
        let rc: Vec<_> = r.models.iter().filter(|m| m.correlation == "rows_x_columns").collect();
        assert_eq!(rc.len(), 2, "{:?}", r.models.iter().map(|m| &m.name).collect::<Vec<_>>());
        for m in &rc {
            let (pr, pc) = (m.row_correlation.unwrap(), m.column_correlation.unwrap());
            assert!(pc > 0.5 && pr < pc, "row {pr} column {pc}");
            assert_eq!(m.nugget_share, Some(0.0));
            assert_eq!(m.n_params, 1 + usize::from(!m.drivers.is_empty()) + 1 + 2);
        }
        let csv = crate::model::verdict::comparison_csv(&r);
        let header: Vec<&str> = csv.lines().next().unwrap().split(',').collect();
        assert_eq!(&header[header.len() - 2..], ["row_correlation", "column_correlation"]);
        let line = csv.lines().find(|l| l.starts_with("base+cold | rows_x_columns,")).unwrap();
        let cells: Vec<&str> = line.split(',').collect();
        let want = rc.iter().find(|m| !m.drivers.is_empty()).unwrap();
        assert_eq!(cells[cells.len() - 2].parse::<f64>().unwrap(), want.row_correlation.unwrap());
        assert_eq!(r.best_model, "base+cold | rows_x_columns", "{csv}");
        assert!(
            r.reason.contains("rows x columns: neighbouring pots along a row correlate")
                && r.reason.contains("rows and columns as numbered in the pot table"),
            "{}",
            r.reason
        );
        let s = &r.structures[0];
        assert!(s.chosen && s.model == r.best_model);
        assert_eq!(s.along_row, want.column_correlation);
        assert!(s.evidence.is_empty());
        let t = &r.calibration.steps[0].tests[0];
        assert_eq!(t.method, "plug-in t (no small-sample correction for rows x columns errors)");
        assert_eq!(t.se, t.se_plugin);
        assert!((1.0..2.0).contains(&t.estimate), "{}", t.estimate);
    }

    /// Declared cells equal to the cells the positions give yield the same
    /// fit, bit for bit, though the pots are listed out of order: the cells
    /// travel with their pots.
    #[test]
    fn declared_cells_match_the_grid_of_the_positions() {
        let mut a = benches(true, 5);
        a.y = a.cells.as_ref().unwrap().0.iter().map(|&r| r as f64 * 0.5).collect();
        let mut b = a.clone();
        b.cells = None;
        let (la, lb) = (a.lattice().unwrap(), b.lattice().unwrap());
        assert_eq!(la, lb);
        let dspec = crate::model::design::DesignSpec { drivers: vec!["cold".into()], ..Default::default() };
        let design = crate::model::design::Design::build(&a, &dspec).unwrap();
        let fa =
            crate::model::gls::fit_rows_columns("a", &design, &a.response, &la, false, LikelihoodKind::Ml)
                .unwrap();
        assert!(fa.correlation_at(1.0).is_none(), "no correlation by distance alone for rows x columns");
        assert!(fa.isotropic_or_refuse("the parametric bootstrap").unwrap_err().contains("rows x columns"));
        assert_eq!(fa.errors, Errors::RowsColumns { nugget: false });
        let fb =
            crate::model::gls::fit_rows_columns("b", &design, &b.response, &lb, false, LikelihoodKind::Ml)
                .unwrap();
        assert_eq!(fa.loglik, fb.loglik);
        // the bootstrap refuses to simulate from it rather than treat it as independent
        let dist = Distances::from_coords(&a.x, &a.y).unwrap();
        let e = crate::model::bootstrap::bootstrap_lrt(
            ("a", "b"),
            &design,
            &design,
            &fa,
            &dist,
            1.0,
            0.3,
            9,
            1,
            None,
        )
        .unwrap_err();
        assert!(format!("{e}").contains("not available for rows x columns"), "{e}");
    }

    /// A direction-dependent model in the grid: its angle and ratio reach
    /// `comparison.csv`, and its summary (chosen or within the tie margin)
    /// carries the sentence and the residual variograms along and across.
    #[test]
    fn directional_model_is_described_with_evidence() {
        let opts = VerdictOptions { bootstrap: 0, tie_delta: 1e9, ..VerdictOptions::default() };
        let r = analyse(&benches(true, 4), &bench_spec(true), &opts).unwrap();
        let csv = crate::model::verdict::comparison_csv(&r);
        let header: Vec<&str> = csv.lines().next().unwrap().split(',').collect();
        assert_eq!(
            &header[header.len() - 4..],
            ["row_correlation", "column_correlation", "direction_degrees", "range_ratio"]
        );
        let m = r.models.iter().find(|m| m.correlation == "exponential_directional").unwrap();
        let (deg, ratio) = (m.direction_degrees.unwrap(), m.range_ratio.unwrap());
        assert!((0.0..180.0).contains(&deg) && ratio > 0.0 && ratio <= 1.0);
        assert!(m.range.is_some() && m.row_correlation.is_none());
        let s = r.structures.iter().find(|s| s.model == m.name).expect("within the (wide) tie margin");
        assert!(
            s.sentence.starts_with("direction-dependent exponential: longest practical range"),
            "{}",
            s.sentence
        );
        assert_eq!(s.direction_degrees, Some(deg));
        assert_eq!(s.evidence.len(), 2);
        assert_eq!(s.evidence[0].label, "along");
        assert!((s.evidence[1].angle_deg - (deg + 90.0).rem_euclid(180.0)).abs() < 1e-12);
        assert!(s.evidence.iter().all(|e| !e.bins.is_empty()));
    }
}
