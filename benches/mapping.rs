//! Benchmark of the mapping through time: 30 sensors x 90 days at 10-minute
//! steps (12,960 steps) onto 2,000 pots by ordinary kriging, with two sensors
//! dropping out for a while (three sets of reporting sensors), against one
//! dense solve of the same kriging system for all pots, and against solving
//! afresh at every step (timed on 50 steps, scaled up). Every pot's series
//! goes through a callback that computes an indicator (hours below 15 °C),
//! as the climate stage does.
//!
//! Run: `cargo bench --bench mapping`.

use nalgebra::DMatrix;
use potclim::spatial::correlation::Family;
use potclim::spatial::geometry::{Origin, Points};
use potclim::spatial::kriging::{Interpolator, Spec, System, krige};
use potclim::spatial::mapping::map_series;
use potclim::spatial::variogram::{VariogramModel, pairs_within};
use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use std::time::Instant;

fn points(what: &'static str, n: usize, rng: &mut ChaCha8Rng) -> Points {
    let x = (0..n).map(|_| rng.random::<f64>() * 30.0).collect();
    let y = (0..n).map(|_| rng.random::<f64>() * 10.0).collect();
    Points::new(
        what,
        (0..n).map(|i| format!("{what}{i}")).collect(),
        x,
        y,
        Some((30.0, 10.0)),
        &Origin::default(),
    )
    .unwrap()
}

fn main() {
    let mut rng = ChaCha8Rng::seed_from_u64(1);
    let (ns, np, steps) = (30, 2000, 90 * 144);
    let sensors = points("s", ns, &mut rng);
    let pots = points("p", np, &mut rng);
    let model = VariogramModel { family: Family::Exponential, nugget: 0.05, partial_sill: 1.0, range: 4.0 };
    let spec = Spec { method: Interpolator::Ordinary, model, neighbours: None, drift: None };
    let series = DMatrix::from_fn(steps, ns, |t, j| {
        if (j == 3 && (2000..2600).contains(&t)) || (j == 17 && t >= 11000) {
            f64::NAN
        } else {
            18.0 + 4.0 * ((t as f64) * std::f64::consts::TAU / 144.0).sin()
                + 0.02 * sensors.x[j]
                + 0.1 * ((t * 7 + j * 13) % 17) as f64
        }
    });

    // One dense solve of the kriging system for all pots.
    let all: Vec<usize> = (0..ns).collect();
    let reps = 20;
    let t0 = Instant::now();
    for _ in 0..reps {
        let sys = System::new(&sensors, &all, &spec).unwrap();
        std::hint::black_box(sys.weights(&pots, 0..np, &spec).unwrap());
    }
    let dense = t0.elapsed().as_secs_f64() / reps as f64;

    // The mapping through time.
    let t0 = Instant::now();
    let mut cold = vec![0.0; np];
    let summary = map_series(&sensors, &series, &pots, &spec, 256, |k, v, _se| {
        cold[k] = v.iter().filter(|x| **x < 15.0).count() as f64 / 6.0;
    })
    .unwrap();
    let total = t0.elapsed().as_secs_f64();
    std::hint::black_box(&cold);

    // Solving afresh at every step, on 50 steps.
    let k = 50;
    let t0 = Instant::now();
    for t in 0..k {
        let z: Vec<f64> = series.row(t).iter().copied().collect();
        std::hint::black_box(krige(&sensors, &z, &pots, &spec).unwrap());
    }
    let per_step = t0.elapsed().as_secs_f64() / k as f64;

    println!(
        "mapping {ns} sensors x {steps} steps onto {np} pots (ordinary kriging, {} sensor sets)",
        summary.sensor_sets
    );
    println!("  one dense solve (factorise + weights for all pots): {:.3} ms", dense * 1e3);
    println!("  whole mapping incl. per-pot indicator callback:    {:.3} s", total);
    println!("  ratio mapping / one dense solve:                   {:.1}", total / dense);
    println!(
        "  a fresh solve per step (measured on {k} steps):     {:.3} ms/step -> {:.1} s for all steps",
        per_step * 1e3,
        per_step * steps as f64
    );
    println!("  speed-up of weight reuse over per-step solves:      {:.1}x", per_step * steps as f64 / total);

    // Variogram pair search: 10,000 points, pairs within 1 m on a 30 x 10 m
    // floor, k-d tree against a scan of all pairs.
    let many = points("q", 10_000, &mut rng);
    let t0 = Instant::now();
    let found = pairs_within(&many, 1.0);
    let tree = t0.elapsed().as_secs_f64();
    let t0 = Instant::now();
    let mut brute = 0usize;
    for i in 0..many.len() {
        for j in i + 1..many.len() {
            let d = (many.x[i] - many.x[j]).hypot(many.y[i] - many.y[j]);
            if d > 0.0 && d <= 1.0 {
                brute += 1;
            }
        }
    }
    let scan = t0.elapsed().as_secs_f64();
    assert_eq!(found.len(), brute);
    println!("pair search, 10,000 points, {} pairs within 1 m:", brute);
    println!("  k-d tree {:.1} ms, all pairs {:.1} ms, ratio {:.1}x", tree * 1e3, scan * 1e3, scan / tree);
}
