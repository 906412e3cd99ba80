//! What the benchmarks share: the median of repeated timings, and the
//! reference they are measured against, numpy's LAPACK Cholesky of the same
//! covariance in the same run. Included by the benchmarks that compare with it (`gls`, `vecchia`, `vecchia_latent`) with
//! `#[path = "common/reference.rs"] mod reference;`.

use potclim::spatial::likelihood::{CovParams, Distances};
use std::io::Write;
use std::process::Command;

/// The median of `v` (the upper one of an even count).
pub fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

/// Time numpy.linalg.cholesky on the same matrix (written to a temp file),
/// single-threaded; returns the median of `reps` runs in seconds.
pub fn numpy_cholesky(python: &str, dist: &Distances, p: &CovParams, reps: usize) -> Option<f64> {
    let n = dist.len();
    let dir = tempfile::tempdir().ok()?;
    let path = dir.path().join("v.f64");
    let mut f = std::io::BufWriter::new(std::fs::File::create(&path).ok()?);
    for i in 0..n {
        for j in 0..n {
            let v = if i == j { 1.0 } else { (1.0 - p.eta) * p.family.correlation(dist.get(i, j), p.range) };
            f.write_all(&v.to_le_bytes()).ok()?;
        }
    }
    f.flush().ok()?;
    drop(f);
    let script = format!(
        "import numpy as np, time, sys\nV = np.fromfile(sys.argv[1], dtype='<f8').reshape({n}, {n})\nnp.linalg.cholesky(V)\nts = []\nfor _ in range({reps}):\n    t = time.perf_counter(); np.linalg.cholesky(V); ts.append(time.perf_counter() - t)\nprint(sorted(ts)[len(ts)//2])\n"
    );
    // One BLAS thread: on a loaded 2-core machine a threaded reference spins
    // and its median swings by two orders of magnitude (measured: 0.36 s
    // against 1.8 ms single-threaded at n = 480).
    let out = Command::new(python)
        .arg("-c")
        .arg(script)
        .arg(&path)
        .env("OPENBLAS_NUM_THREADS", "1")
        .env("OMP_NUM_THREADS", "1")
        .env("MKL_NUM_THREADS", "1")
        .output()
        .ok()?;
    if !out.status.success() {
        return None;
    }
    String::from_utf8_lossy(&out.stdout).trim().parse().ok()
}
