//! Repeated scorings from a daily growth model with known truth: each pot
//! grows every day at a rate that responds to that day's climate at the pot
//! (for example, each cold-night hour slows growth on that day only), and is
//! scored on given days with measurement noise.
//!
//! Model, for pot `p` and day `d` (days counted from the first scoring):
//!
//! ```text
//! rate[p][d]  = base_rate + effect * driver[p][d] + process_sd * z[p][d]
//! size[p][s]  = initial + Σ_{d < day_s} rate[p][d]
//! score[p][s] = size[p][s] + noise_sd * e[p][s]
//! ```
//!
//! with `z` and `e` independent standard normal draws. The growth between
//! scorings `s` and `s + 1` is then `(day_{s+1} − day_s) · base_rate +
//! effect · Σ driver[p][d] + error`, so the regression of interval growth on
//! the interval's summed driver has slope `effect` in every interval where the
//! driver varies between pots, and the driver has no effect to show where it
//! is zero everywhere. [`Truth::interval_effect`] records that.
//!
//! Randomness: one ChaCha20 stream for the process noise and one for the
//! measurement noise, drawn pot by pot and day by day, so the draws never
//! depend on thread count.

use rand::SeedableRng;
use rand_chacha::ChaCha20Rng;
use rand_distr::{Distribution, StandardNormal};

/// Parameters of the daily growth model.
#[derive(Clone, Debug, PartialEq)]
pub struct GrowthModel {
    /// Size at the first scoring (trait units).
    pub initial: f64,
    /// Growth per day without the driver (trait units per day).
    pub base_rate: f64,
    /// Change of the daily rate per unit of the day's driver (trait units per
    /// driver unit): negative for cold hours that slow growth.
    pub effect: f64,
    /// SD of the day-to-day variation of each pot's rate (trait units per day).
    pub process_sd: f64,
    /// SD of the measurement error of a scoring (trait units).
    pub noise_sd: f64,
}

/// What was simulated.
#[derive(Clone, Debug, PartialEq)]
pub struct Truth {
    /// `scores[p][s]`: pot `p` at scoring `s`.
    pub scores: Vec<Vec<f64>>,
    /// `sizes[p][s]`: the same without measurement error.
    pub sizes: Vec<Vec<f64>>,
    /// `driver_sums[p][k]`: the driver summed over interval `k` (scoring `k`
    /// to `k + 1`, days `day_k .. day_{k+1}`).
    pub driver_sums: Vec<Vec<f64>>,
    /// The true slope of interval growth on the summed driver: `Some(effect)`
    /// where the driver varies between pots in interval `k`, `None` where it
    /// is the same at every pot (no effect can show).
    pub interval_effect: Vec<Option<f64>>,
}

/// Simulate scorings on `scoring_days` (strictly increasing day indices into
/// `driver[p]`, the first usually 0) of every pot from its daily driver
/// values `driver[p][d]`. Cost O(pots · days).
///
/// # Panics
/// When `scoring_days` is not strictly increasing or a pot's driver series
/// is shorter than the last scoring day.
pub fn simulate(model: &GrowthModel, driver: &[Vec<f64>], scoring_days: &[usize], seed: u64) -> Truth {
    assert!(scoring_days.windows(2).all(|w| w[0] < w[1]), "scoring days must increase");
    let last = *scoring_days.last().unwrap_or(&0);
    let mut process = ChaCha20Rng::seed_from_u64(seed);
    process.set_stream(1);
    let mut measure = ChaCha20Rng::seed_from_u64(seed);
    measure.set_stream(2);
    let mut scores = Vec::with_capacity(driver.len());
    let mut sizes = Vec::with_capacity(driver.len());
    let mut sums = Vec::with_capacity(driver.len());
    for series in driver {
        assert!(series.len() >= last, "driver series shorter than the last scoring day");
        let mut size = model.initial;
        let mut at = Vec::with_capacity(scoring_days.len());
        let mut d = 0;
        for &day in scoring_days {
            while d < day {
                let z: f64 = StandardNormal.sample(&mut process);
                size += model.base_rate + model.effect * series[d] + model.process_sd * z;
                d += 1;
            }
            at.push(size);
        }
        let observed: Vec<f64> = at
            .iter()
            .map(|s| {
                let e: f64 = StandardNormal.sample(&mut measure);
                s + model.noise_sd * e
            })
            .collect();
        sums.push(scoring_days.windows(2).map(|w| series[w[0]..w[1]].iter().sum()).collect::<Vec<f64>>());
        scores.push(observed);
        sizes.push(at);
    }
    let n_int = scoring_days.len().saturating_sub(1);
    let interval_effect = (0..n_int)
        .map(|k| {
            let first = sums.first().map(|s: &Vec<f64>| s[k]);
            let varies = sums.iter().any(|s| Some(s[k]) != first);
            varies.then_some(model.effect)
        })
        .collect();
    Truth { scores, sizes, driver_sums: sums, interval_effect }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Without noise the interval growth is exactly
    /// `days · base_rate + effect · Σ driver` (hand-computed case).
    #[test]
    fn noiseless_growth_is_the_sum_of_daily_rates() {
        let m = GrowthModel { initial: 2.0, base_rate: 1.5, effect: -0.25, process_sd: 0.0, noise_sd: 0.0 };
        let driver = vec![vec![0.0, 4.0, 2.0, 0.0, 0.0], vec![0.0, 0.0, 0.0, 0.0, 0.0]];
        let t = simulate(&m, &driver, &[0, 3, 5], 9);
        // Pot 0: days 0..3 grow 1.5·3 − 0.25·6 = 3.0; days 3..5 grow 3.0.
        assert_eq!(t.scores[0], vec![2.0, 5.0, 8.0]);
        assert_eq!(t.scores[1], vec![2.0, 6.5, 9.5]);
        assert_eq!(t.driver_sums[0], vec![6.0, 0.0]);
        assert_eq!(t.interval_effect, vec![Some(-0.25), None]);
    }

    #[test]
    fn draws_are_reproducible_and_seed_dependent() {
        let m = GrowthModel { initial: 2.0, base_rate: 1.0, effect: -0.1, process_sd: 0.2, noise_sd: 0.3 };
        let driver = vec![vec![1.0; 10]; 3];
        let a = simulate(&m, &driver, &[0, 4, 9], 5);
        assert_eq!(a, simulate(&m, &driver, &[0, 4, 9], 5));
        assert_ne!(a.scores, simulate(&m, &driver, &[0, 4, 9], 6).scores);
        // The sizes differ from the scores by the measurement error only.
        assert!(a.scores.iter().flatten().zip(a.sizes.iter().flatten()).any(|(s, z)| s != z));
    }
}
