//! What the verdict says about the chosen model: the residual check (Moran's
//! I and the variogram of the normalised residuals), the driver ranking with
//! variance inflation and the confounding rule, the openings question
//! (measured climate against plain distance) and the adjusted means.

use super::grid::{GridFit, model_name};
use super::result::{
    AdjustedMeanRow, DriverSummary, MoranSummary, OpeningsSummary, ResidualBin, ResidualCheck,
};
use super::{ALPHA, DISTANCE_PREFIX, mean_sd, t_quantile};
use crate::model::data::{ModelData, ModelSpec};
use crate::model::design::{Design, TermKind};
use crate::model::gls::{Errors, Fit};
use crate::spatial::factor::least_squares;
use crate::spatial::geometry::Points;
use crate::spatial::variogram::{Bins, Estimator, experimental};

/// The residual check of the chosen model `chosen` (named `name`).
pub(super) fn residual_check(
    data: &ModelData,
    chosen: &Fit,
    moran: Option<MoranSummary>,
    name: &str,
    replaced: &mut Vec<String>,
) -> ResidualCheck {
    // On the nearest-neighbour likelihood (a large study) the variogram is
    // taken over every k-th pot, at most RESIDUAL_VARIOGRAM_POTS of them: the
    // pairs within half the largest distance are a sizeable share of all
    // n (n - 1) / 2 pairs, held at once.
    let n = data.pots.len();
    let k = match chosen.likelihood.neighbours() {
        Some(_) if n > RESIDUAL_VARIOGRAM_POTS => n.div_ceil(RESIDUAL_VARIOGRAM_POTS),
        _ => 1,
    };
    let pick = |v: &[f64]| -> Vec<f64> { v.iter().step_by(k).copied().collect() };
    let points =
        Points { ids: data.pots.iter().step_by(k).cloned().collect(), x: pick(&data.x), y: pick(&data.y) };
    if k > 1 {
        replaced.push(format!(
            "the variogram of the normalised residuals is taken over every {k}th pot ({} of {n}): all pairs of {n} pots would not fit in memory",
            points.len()
        ));
    }
    let values = pick(&chosen.normalised);
    let variogram: Vec<ResidualBin> = Bins::default_for(&points)
        .ok()
        .and_then(|bins| experimental(&points, &values, &bins, Estimator::Matheron, None).ok())
        .map(|emp| {
            emp.bins
                .iter()
                .filter_map(|b| {
                    b.semivariance.map(|s| ResidualBin { lag: b.lag, semivariance: s, pairs: b.pairs })
                })
                .collect()
        })
        .unwrap_or_default();
    let structure_left = moran.as_ref().is_some_and(|m| m.p_value < ALPHA);
    let vg = match (variogram.first(), variogram.last()) {
        (Some(a), Some(b)) => format!(
            "; the variogram of the normalised residuals is {:.2} at {:.2} m and {:.2} at {:.2} m (about 1 at every lag when no structure is left)",
            a.semivariance, a.lag, b.semivariance, b.lag
        ),
        _ => String::new(),
    };
    let statement = match &moran {
        Some(m) if structure_left => format!(
            "Spatial structure is left in the residuals of `{name}`: Moran's I = {:.3} (expected {:.3}, p = {:.3}){vg}; the chosen model does not capture the whole pattern.",
            m.i, m.expected, m.p_value
        ),
        Some(m) => format!(
            "No spatial structure is left in the residuals of `{name}`: Moran's I = {:.3} (expected {:.3}, p = {:.3}){vg}.",
            m.i, m.expected, m.p_value
        ),
        None => format!("Moran's I of the residuals of `{name}` is undefined for these data{vg}."),
    };
    ResidualCheck { moran, variogram, structure_left, statement }
}

/// Most pots the residual variogram is taken over on the nearest-neighbour
/// likelihood (our choice: about 2 million pairs, a few tens of MB).
pub const RESIDUAL_VARIOGRAM_POTS: usize = 2_000;

/// The driver ranking: one row per loaded driver, its estimate from the chosen
/// model when it is in it (else from the single-driver fit with the chosen
/// error model, or with independent errors), its AIC gains with independent
/// errors and with the base model's best correlation, variance inflation and
/// the confounding rule (docs/verdict.md).
pub(super) fn driver_summaries(
    data: &ModelData,
    grid: &[GridFit],
    chosen: &Fit,
    chosen_errors: Errors,
    chosen_name: &str,
) -> Vec<DriverSummary> {
    let n = data.response.len();
    let best_corr: Option<Errors> = grid
        .iter()
        .filter(|g| g.drivers.is_empty() && !matches!(g.errors, Errors::Independent))
        .min_by(|a, b| a.fit.aic.total_cmp(&b.fit.aic))
        .map(|g| g.errors);
    let find = |drivers: &[String], errors: Errors| -> Option<&GridFit> {
        grid.iter().find(|g| g.drivers == drivers && g.errors == errors)
    };
    let base_ind = find(&[], Errors::Independent).expect("base model");
    let t975 = t_quantile((n - chosen.beta.len()) as f64);
    let mut drivers = Vec::new();
    for (name, values) in &data.drivers {
        let single = vec![name.clone()];
        let ind = find(&single, Errors::Independent).expect("single-driver model");
        let coef = |f: &Fit| -> (f64, f64, f64) {
            let j = f.names.iter().position(|c| c == name).expect("driver column");
            (f.beta[j], f.se[j], f.p_value[j])
        };
        let (source_model, (est, se, p), df) = if chosen.drivers.contains(name) {
            (chosen_name.to_string(), coef(chosen), (n - chosen.beta.len()) as f64)
        } else {
            let g = find(&single, chosen_errors).unwrap_or(ind);
            (model_name(&g.drivers, &g.errors), coef(&g.fit), (n - g.fit.beta.len()) as f64)
        };
        let tq = if df == (n - chosen.beta.len()) as f64 { t975 } else { t_quantile(df) };
        let (_, sd) = mean_sd(values);
        let corr = best_corr.and_then(|e| Some((find(&[], e)?, find(&single, e)?)));
        let p_ind = coef(&ind.fit).2;
        let p_corr = corr.map(|(_, g)| coef(&g.fit).2);
        let delta_ind = base_ind.fit.aic - ind.fit.aic;
        let delta_corr = corr.map(|(b, g)| b.fit.aic - g.fit.aic);
        let confounded = p_ind < ALPHA && p_corr.is_some_and(|p| p >= ALPHA);
        let others: Vec<&Vec<f64>> = data.drivers.iter().filter(|(o, _)| o != name).map(|(_, v)| v).collect();
        let vif = vif(values, &others);
        drivers.push(DriverSummary {
            name: name.clone(),
            kind: if name.starts_with(DISTANCE_PREFIX) { "distance" } else { "climate" }.into(),
            source_model,
            estimate: est,
            estimate_per_sd: est * sd,
            driver_sd: sd,
            se,
            estimate_with_mapping_uncertainty: None,
            se_with_mapping_uncertainty: None,
            ci_low_with_mapping_uncertainty: None,
            ci_high_with_mapping_uncertainty: None,
            ci_low: est - tq * se,
            ci_high: est + tq * se,
            p_value: p,
            delta_aic: delta_ind,
            delta_aic_with_correlation: delta_corr,
            p_independent: p_ind,
            p_with_correlation: p_corr,
            vif,
            confounded,
            se_small_sample: None,
            df_small_sample: None,
            p_small_sample: None,
            smooth_share: None,
            ci_low_small_sample: None,
            small_sample_model: None,
            ci_high_small_sample: None,
        });
    }
    drivers
}

/// Variance inflation of `v` against `others`: `1/(1 - R²)` of the regression
/// of `v` on an intercept and `others` (common practice; Kutner et al. 2005, §10.5).
fn vif(v: &[f64], others: &[&Vec<f64>]) -> Option<f64> {
    if others.is_empty() {
        return None;
    }
    let mut x = vec![vec![1.0; v.len()]];
    x.extend(others.iter().map(|o| (*o).clone()));
    let rss = least_squares(&x, v).ok()?.rss;
    let (m, _) = mean_sd(v);
    let tss: f64 = v.iter().map(|a| (a - m).powi(2)).sum();
    let r2 = 1.0 - rss / tss;
    (r2 < 1.0).then(|| 1.0 / (1.0 - r2))
}

/// Measured climate against plain distance (`None` without a distance driver).
pub(super) fn openings_summary(drivers: &[DriverSummary]) -> Option<OpeningsSummary> {
    let best = |kind: &str| {
        drivers.iter().filter(|d| d.kind == kind).max_by(|a, b| a.delta_aic.total_cmp(&b.delta_aic))
    };
    let (c, d) = (best("climate"), best("distance"));
    let d_ = d?;
    let statement = match c {
        None => format!(
            "Only distances to openings were offered: `{}` is the best of them (it improves AIC by {:.1} over the base model).",
            d_.name, d_.delta_aic
        ),
        Some(c) => {
            let diff = c.delta_aic - d_.delta_aic;
            if diff.abs() <= 2.0 {
                format!(
                    "The measured climate (`{}`) and the plain distance (`{}`) explain the pattern about equally well (AIC within {:.1}).",
                    c.name,
                    d_.name,
                    diff.abs()
                )
            } else if diff > 0.0 {
                format!(
                    "The measured climate (`{}`) explains the pattern better than the plain distance (`{}`), by {:.1} AIC units.",
                    c.name, d_.name, diff
                )
            } else {
                format!(
                    "The plain distance (`{}`) explains the pattern better than the measured climate (`{}`), by {:.1} AIC units: something near the opening that the loggers did not record (a draught they missed) may act on the plants.",
                    d_.name, c.name, -diff
                )
            }
        }
    };
    Some(OpeningsSummary {
        best_climate: c.map(|c| c.name.clone()),
        best_distance: Some(d_.name.clone()),
        aic_difference: c.map(|c| c.delta_aic - d_.delta_aic),
        statement,
    })
}

/// The design row of one cell: levels of every block and factor, drivers at `driver_values`.
fn cell_row(
    design: &Design,
    data: &ModelData,
    block_levels: &[usize],
    factor_levels: &[usize],
    driver_values: &[f64],
) -> Vec<f64> {
    let mut row = vec![0.0; design.p()];
    let ind = |level: usize, nlev: usize| -> Vec<f64> {
        (1..nlev).map(|l| f64::from(u8::from(l == level))).collect()
    };
    for term in &design.terms {
        let vals: Vec<f64> = match &term.kind {
            TermKind::Intercept => vec![1.0],
            TermKind::Block => {
                let b = data.blocks.iter().position(|f| f.name == term.name).expect("block");
                ind(block_levels[b], data.blocks[b].levels.len())
            }
            TermKind::Factor => {
                let k = term.factors[0];
                ind(factor_levels[k], data.factors[k].levels.len())
            }
            TermKind::Interaction(idx) => {
                let mut acc = vec![1.0];
                for &k in idx {
                    let v = ind(factor_levels[k], data.factors[k].levels.len());
                    acc = acc.iter().flat_map(|a| v.iter().map(move |b| a * b)).collect();
                }
                acc
            }
            TermKind::Driver => {
                let j = design.drivers.iter().position(|d| *d == term.name).expect("driver");
                vec![driver_values[j]]
            }
        };
        for (c, v) in term.columns.clone().zip(vals) {
            row[c] = v;
        }
    }
    row
}

/// Adjusted means (equal weights over the levels of the other factors and
/// blocks, drivers at their means over the pots): `L'beta` with `L` the mean
/// of the design rows of the cells at the level, SE `sqrt(L' Cov(beta) L)`
/// (Searle, Speed & Milliken 1980).
pub(super) fn adjusted_means(
    data: &ModelData,
    spec: &ModelSpec,
    design: &Design,
    fit: &Fit,
    plain_design: &Design,
    plain: &Fit,
) -> Vec<AdjustedMeanRow> {
    let sizes: Vec<usize> = data.blocks.iter().chain(&data.factors).map(|f| f.levels.len()).collect();
    let total: usize = sizes.iter().product();
    if total > 1_000_000 || data.factors.is_empty() {
        return Vec::new();
    }
    let nb = data.blocks.len();
    let dmeans: Vec<f64> = design
        .drivers
        .iter()
        .map(|d| mean_sd(&data.drivers.iter().find(|(n, _)| n == d).expect("driver").1).0)
        .collect();
    // Every cell: (levels, row under the chosen model, row under the plain model).
    let mut cells = Vec::with_capacity(total);
    for c in 0..total {
        let mut rem = c;
        let mut lev = vec![0; sizes.len()];
        for s in (0..sizes.len()).rev() {
            lev[s] = rem % sizes[s];
            rem /= sizes[s];
        }
        let r1 = cell_row(design, data, &lev[..nb], &lev[nb..], &dmeans);
        let r0 = cell_row(plain_design, data, &lev[..nb], &lev[nb..], &[]);
        cells.push((lev, r1, r0));
    }
    let mut groups: Vec<Vec<usize>> = (0..data.factors.len()).map(|k| vec![k]).collect();
    for inter in &spec.interactions {
        groups.push(inter.iter().filter_map(|nm| data.factors.iter().position(|f| &f.name == nm)).collect());
    }
    let estimate = |l: &[f64], f: &Fit| -> (f64, f64) {
        let p = l.len();
        let m: f64 = l.iter().zip(&f.beta).map(|(a, b)| a * b).sum();
        let mut v = 0.0;
        for i in 0..p {
            for j in 0..p {
                v += l[i] * f.cov_beta[i * p + j] * l[j];
            }
        }
        (m, v.max(0.0).sqrt())
    };
    let mut out = Vec::new();
    for g in groups {
        let gsizes: Vec<usize> = g.iter().map(|&k| data.factors[k].levels.len()).collect();
        let gtotal: usize = gsizes.iter().product();
        for combo in 0..gtotal {
            let mut rem = combo;
            let mut want = vec![0; g.len()];
            for s in (0..g.len()).rev() {
                want[s] = rem % gsizes[s];
                rem /= gsizes[s];
            }
            let sel: Vec<&(Vec<usize>, Vec<f64>, Vec<f64>)> = cells
                .iter()
                .filter(|(lev, _, _)| g.iter().zip(&want).all(|(&k, &w)| lev[nb + k] == w))
                .collect();
            let w = 1.0 / sel.len() as f64;
            let mut l1 = vec![0.0; design.p()];
            let mut l0 = vec![0.0; plain_design.p()];
            for (_, r1, r0) in &sel {
                l1.iter_mut().zip(r1).for_each(|(a, b)| *a += w * b);
                l0.iter_mut().zip(r0).for_each(|(a, b)| *a += w * b);
            }
            let (m1, s1) = estimate(&l1, fit);
            let (m0, s0) = estimate(&l0, plain);
            out.push(AdjustedMeanRow {
                factor: g.iter().map(|&k| data.factors[k].name.as_str()).collect::<Vec<_>>().join(":"),
                level: g
                    .iter()
                    .zip(&want)
                    .map(|(&k, &w)| data.factors[k].levels[w].as_str())
                    .collect::<Vec<_>>()
                    .join(":"),
                mean: m1,
                se: s1,
                plain_mean: m0,
                plain_se: s0,
                change: m1 - m0,
            });
        }
    }
    out
}
