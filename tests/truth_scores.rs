//! Truth study of the repeated-scorings analysis on simulated scorings
//! (`potclim::simulate::growth`): pots on a bench grid, a run of cold nights
//! in the middle of the trial whose hours grow towards one end of the house
//! (the cold corner) with pot-to-pot scatter, growth slowed by each cold hour
//! on that day only. Per interval, the comparison grid (`model::verdict::analyse`)
//! is fitted to the growth with the interval's summed cold hours as driver;
//! across intervals the effects are combined (`model::two_stage::combine`).
//!
//! Checked: in intervals with cold nights the driver's 95 % CI covers the
//! true daily-rate effect at about its nominal rate (a binomial band of three
//! Monte Carlo SEs), in intervals without any the driver is constant (no
//! effect can show, and none is reported), and the combined effect covers
//! the daily-rate parameter. `fast_seeded_subset` runs in CI; the full
//! study is `cargo test --test truth_scores -- --ignored`.

use potclim::model::data::{ModelData, ModelSpec};
use potclim::model::two_stage::combine;
use potclim::model::verdict::{VerdictOptions, analyse};
use potclim::simulate::growth::{GrowthModel, simulate};
use potclim::spatial::correlation::Family;
use rand::SeedableRng;
use rand_chacha::ChaCha20Rng;
use rand_distr::{Distribution, StandardNormal};

/// The true change of the daily rate per cold hour (cm per hour).
const EFFECT: f64 = -0.08;
/// Scoring days: weekly for five weeks; cold nights on days 10–17.
const SCORINGS: [usize; 6] = [0, 7, 14, 21, 28, 35];
const COLD_DAYS: std::ops::Range<usize> = 10..18;

struct Outcome {
    /// Per cold interval: whether the CI covered the truth.
    covered: Vec<bool>,
    /// Intervals without cold hours whose driver was (correctly) constant.
    calm_constant: usize,
    /// Calm intervals.
    calm: usize,
    /// The combined effect's CI covered the truth.
    combined_covered: bool,
    /// The combined estimate.
    combined: f64,
}

fn one_seed(seed: u64) -> Outcome {
    // 6 rows x 12 slots, 0.4 m x 0.5 m.
    let (rows, slots) = (6, 12);
    let n = rows * slots;
    let x: Vec<f64> = (0..n).map(|i| (i % slots) as f64 * 0.5).collect();
    let y: Vec<f64> = (0..n).map(|i| (i / slots) as f64 * 0.4).collect();
    let mut r = ChaCha20Rng::seed_from_u64(seed);
    r.set_stream(7);
    let days = *SCORINGS.last().unwrap();
    // Cold hours per night: more towards x = 0, with scatter, never negative.
    let driver: Vec<Vec<f64>> = (0..n)
        .map(|p| {
            (0..days)
                .map(|d| {
                    let z: f64 = StandardNormal.sample(&mut r);
                    if COLD_DAYS.contains(&d) { (4.0 - 0.5 * x[p] + 0.8 * z).max(0.0) } else { 0.0 }
                })
                .collect()
        })
        .collect();
    let model =
        GrowthModel { initial: 3.0, base_rate: 0.6, effect: EFFECT, process_sd: 0.15, noise_sd: 0.25 };
    let truth = simulate(&model, &driver, &SCORINGS, seed);
    let spec = ModelSpec {
        trait_column: "growth".into(),
        factors: vec![],
        interactions: vec![],
        drivers: vec!["cold_hours".into()],
        blocks: vec![],
        correlations: vec![Family::Exponential],
        nugget: true,
        trait_unit: Some("cm".into()),
        rows_columns: false,
        directional: vec![],
        likelihood: potclim::model::likelihood_path::Setting::Auto,
        neighbours: potclim::spatial::vecchia::DEFAULT_NEIGHBOURS,
    };
    let opts = VerdictOptions { seed, ..VerdictOptions::default() };
    let mut out =
        Outcome { covered: vec![], calm_constant: 0, calm: 0, combined_covered: false, combined: f64::NAN };
    let mut pairs = Vec::new();
    for (k, te) in truth.interval_effect.iter().enumerate() {
        let sums: Vec<f64> = (0..n).map(|p| truth.driver_sums[p][k]).collect();
        let Some(te) = te else {
            out.calm += 1;
            if sums.iter().all(|s| *s == sums[0]) {
                out.calm_constant += 1;
            }
            continue;
        };
        let data = ModelData {
            source: "simulated".into(),
            trait_name: "growth".into(),
            pots: (0..n).map(|p| format!("P{p}")).collect(),
            lines: (0..n).map(|p| p + 2).collect(),
            x: x.clone(),
            y: y.clone(),
            response: (0..n).map(|p| truth.scores[p][k + 1] - truth.scores[p][k]).collect(),
            blocks: vec![],
            factors: vec![],
            drivers: vec![("cold_hours".into(), sums)],
            excluded: vec![],
            cells: None,
            paths: None,
        };
        let v = analyse(&data, &spec, &opts).expect("fit");
        let d = v.drivers.iter().find(|d| d.name == "cold_hours").expect("driver row");
        out.covered.push(d.ci_low <= *te && *te <= d.ci_high);
        pairs.push((d.estimate, d.se));
    }
    if let Some(c) = combine(&pairs) {
        out.combined = c.estimate;
        out.combined_covered = c.ci_low <= EFFECT && EFFECT <= c.ci_high;
    }
    out
}

fn study(seeds: std::ops::Range<u64>) -> (f64, usize, f64, f64) {
    let outs: Vec<Outcome> = seeds.map(one_seed).collect();
    let cis: Vec<bool> = outs.iter().flat_map(|o| o.covered.iter().copied()).collect();
    let coverage = cis.iter().filter(|c| **c).count() as f64 / cis.len() as f64;
    for o in &outs {
        assert_eq!(o.calm_constant, o.calm, "a calm interval had cold hours");
        assert!(o.calm > 0 && !o.covered.is_empty());
    }
    let combined_cov = outs.iter().filter(|o| o.combined_covered).count() as f64 / outs.len() as f64;
    let mean_combined = outs.iter().map(|o| o.combined).sum::<f64>() / outs.len() as f64;
    (coverage, cis.len(), combined_cov, mean_combined)
}

/// Coverage within three binomial Monte Carlo SEs of 95 %.
fn near_nominal(coverage: f64, n: usize) -> bool {
    let mc = (0.95 * 0.05 / n as f64).sqrt();
    (coverage - 0.95).abs() <= 3.0 * mc
}

#[test]
fn fast_seeded_subset() {
    let (cov, n, comb_cov, mean) = study(1..21);
    eprintln!(
        "scores truth (20 seeds): interval CI coverage {cov:.3} of {n}, combined coverage {comb_cov:.3}, mean combined {mean:.5} (truth {EFFECT})"
    );
    assert!(near_nominal(cov, n), "interval coverage {cov} of {n}");
    assert!(comb_cov >= 0.8, "combined coverage {comb_cov}");
    assert!((mean - EFFECT).abs() < 0.1 * EFFECT.abs(), "mean combined {mean}");
}

#[test]
#[ignore]
fn full_study() {
    let (cov, n, comb_cov, mean) = study(1..201);
    eprintln!(
        "scores truth (200 seeds): interval CI coverage {cov:.3} of {n}, combined coverage {comb_cov:.3}, mean combined {mean:.5} (truth {EFFECT})"
    );
    assert!(near_nominal(cov, n), "interval coverage {cov} of {n}");
    assert!(near_nominal(comb_cov, 200), "combined coverage {comb_cov}");
    assert!((mean - EFFECT).abs() < 0.03 * EFFECT.abs(), "mean combined {mean}");
}
