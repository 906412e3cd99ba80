//! Benchmark of the rows x columns likelihood: the Kronecker path (complete
//! lattice, no nugget) against the dense path (fill `V` and one dense
//! Cholesky factorisation of the same size), same parameters, same data,
//! measured in the same run; prints both times and their ratio per grid
//! size, after checking that the two log-likelihoods agree.
//!
//! Run: `cargo bench --bench rowcol` (or, with the dev profile's optimised
//! dependencies, `cargo test --bench rowcol`).

use potclim::spatial::likelihood::LikelihoodKind;
use potclim::spatial::rowcol::{Lattice, RowColParams, profiled_dense, profiled_kronecker};
use std::time::Instant;

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

fn main() {
    println!("{:>9} {:>6} {:>14} {:>14} {:>10}", "grid", "n", "kronecker_s", "dense_s", "ratio");
    for (nr, nc) in [(12usize, 10usize), (20, 20), (30, 40), (40, 50)] {
        let n = nr * nc;
        let lat = Lattice::from_indices((0..n).map(|k| k / nc).collect(), (0..n).map(|k| k % nc).collect())
            .expect("a complete lattice");
        let y: Vec<f64> = (0..n).map(|k| ((k as f64) * 0.37).sin() + 0.01 * (k / nc) as f64).collect();
        let x = vec![vec![1.0; n], (0..n).map(|k| (k % nc) as f64).collect()];
        let p = RowColParams { phi_row: 0.6, phi_col: 0.3, eta: 0.0 };
        let reps = 5;
        let mut tk = Vec::new();
        let mut td = Vec::new();
        let mut lk = 0.0;
        let mut ld = 0.0;
        for _ in 0..reps {
            let t = Instant::now();
            lk = profiled_kronecker(&lat, &p, &x, &y, LikelihoodKind::Ml).expect("kronecker").loglik;
            tk.push(t.elapsed().as_secs_f64());
            let t = Instant::now();
            ld = profiled_dense(&lat, &p, &x, &y, LikelihoodKind::Ml).expect("dense").loglik;
            td.push(t.elapsed().as_secs_f64());
        }
        assert!((lk - ld).abs() <= 1e-8 * ld.abs(), "paths disagree: {lk} vs {ld}");
        let (k, d) = (median(tk), median(td));
        println!("{:>9} {:>6} {:>14.6} {:>14.6} {:>10.1}", format!("{nr}x{nc}"), n, k, d, d / k);
    }
}
