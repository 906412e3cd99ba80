//! The mapping stage's side of an opening's drift: the method at one decay
//! length (drift-residual variogram refitted, kriging spec built), and the
//! spread of the pots' window indicators over the decay lengths that the
//! cross-validation cannot tell from the chosen one, added to the pots'
//! variances ([`super::drift`], module doc, "The decay lengths the
//! cross-validation cannot tell apart"; `docs/spatial.md`).
//!
//! Why: on a draught seen by one logger the chosen decay length fixes the
//! drift's shape on the draught's flank, where no logger stands; the pots
//! there were off by 12 h RMS against SEs of 3.6 h, while the map at the
//! other plausible lengths differs there by about as much. The mapped
//! values stay those of the chosen length; only the SEs widen. Split from
//! [`super::stage`], which calls it.

use super::config::MappingConfig;
use super::error::Result;
use super::exposure::PotSeries;
use super::geometry::Points;
use super::kriging::{Drift, Interpolator, Spec};
use super::mapping::{ModelChoice, choose_model, map_series};
use super::outputs::MappedColumn;
use super::stage::{OpeningDrift, VariableMap, range_bounds};
use super::variogram::{Bins, Detrend, Empirical, FitOptions, pooled};
use nalgebra::DMatrix;

/// The seed of the bootstrap over the folds ([`super::drift::selection_weights`]).
pub const RESAMPLE_SEED: u64 = 20_261_205;

/// What one variable's drift fits share: the sensors, the series, the
/// configuration, the data variance (for the fallback model) and the
/// smallest nugget a fit may take ([`FitOptions::nugget_floor`]).
pub(super) struct DriftFits<'a> {
    pub(super) sensors: &'a Points,
    pub(super) series: &'a DMatrix<f64>,
    pub(super) cfg: &'a MappingConfig,
    pub(super) variance: f64,
    pub(super) nugget_floor: f64,
}

impl DriftFits<'_> {
    /// The fit options of the variogram on bins `b`.
    pub(super) fn options(&self, b: &Bins) -> FitOptions {
        FitOptions {
            fit_nugget: self.cfg.fit_nugget,
            range_bounds: range_bounds(self.sensors, b),
            nugget_floor: self.nugget_floor,
        }
    }

    /// The method with opening `o`'s drift `exp(-d / l)`: the pooled
    /// variogram of the residuals from `1 + v` on bins `b`, its fitted
    /// model, and the kriging spec at the pots. `Ok(None)` when no model
    /// could be chosen.
    pub(super) fn method_at(
        &self,
        o: &OpeningDrift,
        l: f64,
        b: &Bins,
    ) -> Result<Option<(Spec, Empirical, ModelChoice)>> {
        let v = super::drift::decay(&o.at_sensors, l);
        let emp = pooled(self.sensors, self.series, b, self.cfg.estimator, None, &Detrend::Drift(v.clone()))?;
        let Ok(mc) = choose_model(&emp, &self.cfg.families, &self.options(b), self.sensors, self.variance)
        else {
            return Ok(None);
        };
        let spec = Spec {
            method: Interpolator::ExternalDrift,
            model: mc.model,
            neighbours: self.cfg.neighbours,
            drift: Some(Drift {
                name: o.name.clone(),
                at_sensors: v,
                at_targets: super::drift::decay(&o.at_pots, l),
            }),
        };
        Ok(Some((spec, emp, mc)))
    }

    /// The decay lengths the cross-validation might have chosen, with
    /// their bootstrap weights ([`super::drift::selection_weights`]) from
    /// the search's per-fold errors `folds`, and the method at each length
    /// other than `chosen` (whose map is the reported one). `None` when no
    /// weights could be formed or a method could not be fitted.
    pub(super) fn spread(
        &self,
        o: &OpeningDrift,
        b: &Bins,
        folds: &[(f64, Vec<f64>)],
        chosen: f64,
    ) -> Option<DriftLengths> {
        let weights = super::drift::selection_weights(folds, super::drift::RESAMPLES, RESAMPLE_SEED);
        let (lo, hi) = (weights.first()?.0, weights.last()?.0);
        let own = weights.iter().find(|(l, _)| *l == chosen).map_or(0.0, |w| w.1);
        let nodes = weights
            .iter()
            .filter(|(l, _)| *l != chosen)
            .map(|&(l, w)| self.method_at(o, l, b).ok().flatten().map(|m| (w, m.0)))
            .collect::<Option<Vec<(f64, Spec)>>>()?;
        Some(DriftLengths { lo, hi, chosen_weight: own, nodes })
    }
}

/// The decay lengths of the chosen drift that the cross-validation might
/// have chosen, with their weights, and the methods the pots' SEs average
/// over.
#[derive(Clone, Debug)]
pub struct DriftLengths {
    /// The shortest length with weight, metres.
    pub lo: f64,
    /// The longest, metres.
    pub hi: f64,
    /// The chosen length's own weight (its map is the reported one).
    pub chosen_weight: f64,
    /// The other lengths' weights and kriging specs.
    pub nodes: Vec<(f64, Spec)>,
}

/// What the spread over the plausible decay lengths added to one
/// indicator's SEs (`mapping_se.csv`).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SpreadAdded {
    /// The shortest plausible decay length, metres.
    pub lo: f64,
    /// The longest, metres.
    pub hi: f64,
    /// The added variance, averaged over the pots (indicator unit squared).
    pub mean_variance: f64,
}

/// Where the pots are and over which days their indicators run.
#[derive(Clone, Copy)]
pub(super) struct Context<'a> {
    /// The sensors' positions.
    pub(super) sensors: &'a Points,
    /// Every position mapped (the pots, or every position a pot holds).
    pub(super) targets: &'a Points,
    /// The study's calendar.
    pub(super) cal: &'a crate::climate::Calendar,
    /// Each pot's window of days.
    pub(super) windows: &'a [std::ops::Range<usize>],
    /// The smallest share of valid steps for a valid day.
    pub(super) min_cov: f64,
}

/// Widen the SEs of `columns` (parallel to `indicators`) whose SEs come
/// from the per-step route (`per_step[i]`) by the spread of the indicator
/// over the plausible decay lengths of its variable's drift: at each node
/// the variable's whole series is mapped onto `targets` (noise-free per-step
/// SEs, [`super::noise`]), gathered along the pots' paths by `gather`, the
/// indicator computed over each pot's window as for the reported value, and
/// `se_j^2 + spread_variance` replaces `se_j^2`
/// ([`super::drift::spread_variance`]). A pot whose spread cannot be
/// computed keeps its SE. Returns, per indicator, the plausible interval
/// and the mean added variance over the pots (`None` where nothing was
/// added). Cost per node: one map
/// of the series and one window indicator per pot.
pub(super) fn widen(
    columns: &mut [MappedColumn],
    per_step: &[bool],
    indicators: &[crate::climate::Indicator],
    variables: &[VariableMap],
    series_of: impl Fn(&str) -> DMatrix<f64>,
    gather: impl Fn(DMatrix<f64>) -> DMatrix<f64>,
    ctx: &Context,
) -> Vec<Option<SpreadAdded>> {
    let Context { sensors, targets, cal, windows, min_cov } = *ctx;
    let mut added: Vec<Option<SpreadAdded>> = vec![None; indicators.len()];
    for v in variables {
        let Some(lengths) = v.drift_lengths.as_ref().filter(|d| !d.nodes.is_empty()) else { continue };
        let which: Vec<usize> = (0..indicators.len())
            .filter(|&i| {
                per_step[i]
                    && columns[i].se.is_some()
                    && super::stage_check::single_kriged(&indicators[i], variables)
                        .is_some_and(|s| s.name == v.name)
            })
            .collect();
        if which.is_empty() {
            continue;
        }
        let series = series_of(v.name);
        // Per indicator and pot, the indicator at every node.
        let mut at_nodes: Vec<Vec<Vec<(f64, f64)>>> =
            which.iter().map(|&i| vec![Vec::new(); columns[i].value.len()]).collect();
        for (weight, spec) in &lengths.nodes {
            let steps = series.nrows();
            let mut mapped = DMatrix::<f64>::from_element(steps, targets.len(), f64::NAN);
            let mut mapped_se = DMatrix::<f64>::from_element(steps, targets.len(), f64::NAN);
            if map_series(sensors, &series, targets, spec, 256, |j, pred, se| {
                mapped.column_mut(j).copy_from_slice(pred);
                if let Some(se) = se {
                    mapped_se.column_mut(j).copy_from_slice(se);
                }
            })
            .is_err()
            {
                return added;
            }
            if let Some(me) = super::noise::measurement_error(&series, spec.model.nugget) {
                mapped_se.iter_mut().for_each(|s| *s = super::noise::noise_free_se(*s, me.variance));
            }
            let (mapped, mapped_se) = (gather(mapped), gather(mapped_se));
            let along = PotSeries::of(std::iter::once((v.name, &mapped, Some(&mapped_se))));
            for (w, &i) in which.iter().enumerate() {
                let (values, _) = along.window_values(&indicators[i], cal, windows, min_cov);
                for (j, h) in values.into_iter().enumerate() {
                    at_nodes[w][j].push((*weight, h));
                }
            }
        }
        for (w, &i) in which.iter().enumerate() {
            let c = &mut columns[i];
            let Some(se) = c.se.as_mut() else { continue };
            let (mut sum, mut count) = (0.0, 0usize);
            for (j, s) in se.iter_mut().enumerate() {
                at_nodes[w][j].push((lengths.chosen_weight, c.value[j]));
                if let Some(extra) = super::drift::spread_variance(&at_nodes[w][j], c.value[j]) {
                    *s = (*s * *s + extra).sqrt();
                    sum += extra;
                    count += 1;
                }
            }
            added[i] = (count > 0).then(|| SpreadAdded {
                lo: lengths.lo,
                hi: lengths.hi,
                mean_variance: sum / count as f64,
            });
        }
    }
    added
}
