//! The map's calibrated window standard errors as the quantity a logger
//! placement lowers.
//!
//! The map reports the SE of a summed or averaged indicator (hours below a
//! threshold, degree days over a pot's window) from the pot's per-step
//! kriging errors with a calibrated persistence ([`crate::spatial::window_se`]).
//! Under one per-step variogram every step with the same loggers reporting
//! has the same kriging variance `v` at a pot, and the SE of the pot's true,
//! noise-free value is `sqrt(v - c_ME)` ([`crate::spatial::noise`]). A new
//! logger changes `v` at every pot (the rank-one update of
//! [`super::Tracker`]) and nothing else the window SE depends on in
//! expectation: the mapped series, the calibration and the window stay as
//! they are. So each pot's window SE is a function of one number, the ratio
//! `r = sqrt((v' - c_ME) / (v - c_ME))` by which every per-step SE of the pot
//! is multiplied, and `r = 1` gives the map's own SE.
//!
//! That function costs a window sum under Gauss–Hermite quadrature
//! (thousands of steps, 16 nodes), far too much to call for every pot and
//! candidate of a greedy search. It is tabulated per pot on a grid of
//! ratios from 0 to the largest ratio the placement can reach (1 when
//! loggers are only added; above 1 when one is taken away) and read by
//! linear interpolation ([`WindowSe`]). The interpolation error is checked
//! in the tests against direct evaluations.
//!
//! The mapped series is kept as it is: a new logger would also move the
//! map's values, which cannot be known before it has read anything. The
//! placement therefore ranks positions by the SE the map would report for
//! today's mapped climate (a design quantity with the map's calibration).

use super::PotSe;

/// Ratio grid spacing: the window SE is tabulated at `r = 0, 0.05, 0.1, ...`.
pub const RATIO_STEP: f64 = 0.05;

/// Each pot's window SE as a function of its per-step kriging variance
/// (module docs), tabulated on a grid of ratios.
#[derive(Clone, Debug)]
pub struct WindowSe {
    /// Per pot: the per-step kriging variance with the current loggers.
    current: Vec<f64>,
    /// The sensors' measurement-error variance, left out of the pots' SEs.
    noise: f64,
    /// Per pot: the window SE at ratios `0, RATIO_STEP, 2 RATIO_STEP, ...`.
    table: Vec<Vec<f64>>,
}

impl WindowSe {
    /// Tabulate `at(pot, ratio)` (the pot's window SE with every per-step SE
    /// multiplied by `ratio`) for every pot from ratio 0 to `reach[pot]`
    /// (at least 1). `current[pot]` is the pot's per-step kriging variance
    /// with the current loggers and `noise` the measurement-error variance.
    /// Runs over the pots on every core. `Err(pot)` names the first pot
    /// whose SE could not be computed.
    pub fn tabulate<F>(current: Vec<f64>, noise: f64, reach: &[f64], at: F) -> Result<WindowSe, usize>
    where
        F: Fn(usize, f64) -> Option<f64> + Sync,
    {
        let m = current.len();
        let points = |j: usize| {
            let r = reach.get(j).copied().filter(|r| r.is_finite()).unwrap_or(1.0).max(1.0);
            (r / RATIO_STEP).ceil() as usize + 1
        };
        let threads = std::thread::available_parallelism().map_or(1, |t| t.get()).clamp(1, m.max(1));
        let chunk = m.div_ceil(threads).max(1);
        let mut table: Vec<Option<Vec<f64>>> = vec![None; m];
        std::thread::scope(|scope| {
            for (k, part) in table.chunks_mut(chunk).enumerate() {
                let at = &at;
                scope.spawn(move || {
                    for (o, slot) in part.iter_mut().enumerate() {
                        let j = k * chunk + o;
                        *slot = (0..points(j)).map(|g| at(j, g as f64 * RATIO_STEP)).collect();
                    }
                });
            }
        });
        let table = table.into_iter().enumerate().map(|(j, t)| t.ok_or(j)).collect::<Result<_, _>>()?;
        Ok(WindowSe { current, noise: noise.max(0.0), table })
    }

    /// The ratio of pot `j`'s per-step SEs at kriging variance `v` to its
    /// current ones (0 when the pot has no per-step error left now).
    pub fn ratio(&self, j: usize, v: f64) -> f64 {
        let now = self.current[j] - self.noise;
        if now <= 0.0 || !now.is_finite() { 0.0 } else { ((v - self.noise).max(0.0) / now).sqrt() }
    }

    /// The tabulated SE of pot `j` at ratio `r` by linear interpolation
    /// (linear extrapolation of the last segment beyond the table).
    pub fn at_ratio(&self, j: usize, r: f64) -> f64 {
        let t = &self.table[j];
        if t.len() == 1 {
            return t[0];
        }
        let g = (r.max(0.0) / RATIO_STEP).min((t.len() - 1) as f64);
        let k = (g.floor() as usize).min(t.len() - 2);
        let f = (r.max(0.0) / RATIO_STEP) - k as f64;
        (t[k] + f * (t[k + 1] - t[k])).max(0.0)
    }
}

impl PotSe for WindowSe {
    fn se(&self, pot: usize, variance: f64) -> f64 {
        self.at_ratio(pot, self.ratio(pot, variance))
    }
}

/// The map's window SE of indicator `i` at each pot as a function of the
/// per-step ratio (`(pot, ratio) -> SE`, module docs), with the map's
/// per-step variance that ratio refers to. `None` when the map's SE of `i`
/// does not come from per-step kriging errors (VPD and dew point, which
/// combine two variables; methods without an SE; an uncalibrated indicator).
pub fn map_window_se<'a>(
    climate: &'a crate::climate::ClimateRun,
    map: &'a crate::spatial::stage::MapRun,
    i: usize,
    nodes: &'a [(f64, f64)],
) -> Option<impl Fn(usize, f64) -> Option<f64> + Sync + 'a> {
    let ind = climate.config.indicators.get(i)?;
    let calibration = (*map.window_se.get(i)?)?;
    let variable = crate::spatial::stage_check::single_kriged(ind, &map.variables)?;
    let at = crate::spatial::stage_check::PotWindowSe {
        ind,
        cal: &climate.calendar,
        variable,
        calibration,
        nodes,
        min_cov: climate.config.spec.min_coverage,
    };
    Some(move |j: usize, r: f64| at.at(j, map.windows.get(j)?.clone(), r))
}
