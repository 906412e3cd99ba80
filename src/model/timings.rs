//! Where a run's time goes: seconds per stage, and per fit of the verdict
//! its likelihood evaluations, dense factorisations of the `n x n`
//! covariance and seconds; the start grids shared by the fits of one error
//! model; the imputations' refits; the threads used. Written to
//! `summary.json` (`timings`) and printed by `potclim run --timings`
//! (docs/outputs.md). Plain data; the numbers are measured, never used to
//! decide anything.

use serde::Serialize;

/// Seconds of one pipeline stage.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct StageTime {
    /// Stage name (`ingest`, `climate`, `map`, `verdict`).
    pub stage: String,
    /// Wall-clock seconds.
    pub seconds: f64,
}

/// The work of one fit.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct FitTime {
    /// Model name as in `comparison.csv`.
    pub model: String,
    /// `ML` or `REML`.
    pub method: String,
    /// Likelihood evaluations (start grid points included).
    pub evaluations: usize,
    /// Dense factorisations of this fit's own (its share of a start grid is
    /// in [`Timings::shared_grids`]).
    pub factorisations: usize,
    /// Wall-clock seconds of its own work.
    pub seconds: f64,
}

/// A start grid evaluated once for the fits of every fixed part with one
/// error model.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct SharedGrid {
    /// The error model (`exponential+nugget`, ...).
    pub errors: String,
    /// Fits that shared it.
    pub fits: usize,
    /// Its dense factorisations.
    pub factorisations: usize,
    /// Its wall-clock seconds.
    pub seconds: f64,
}

/// The imputations of one mapped driver.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct ImputationTime {
    /// The driver.
    pub driver: String,
    /// REML refits on imputed values.
    pub refits: usize,
    /// Dense factorisations on the thread that ran them (kriging, chain and refits).
    pub factorisations: usize,
    /// Wall-clock seconds (kriging, chain and refits).
    pub seconds: f64,
}

/// Timings of a run (see the module docs).
#[derive(Clone, Debug, Default, Serialize, PartialEq)]
pub struct Timings {
    /// Hardware threads available to the process.
    pub threads: usize,
    /// Threads the comparison grid's fits were spread over.
    pub fit_threads: usize,
    /// Seconds per stage up to the verdict, in order (filled by a whole run;
    /// empty for the standalone `verdict`; the report stage comes after
    /// `summary.json` is written).
    pub stages: Vec<StageTime>,
    /// Every fit of the verdict: the grid's ML fits, then the REML refits.
    pub fits: Vec<FitTime>,
    /// Start grids shared by several fits.
    pub shared_grids: Vec<SharedGrid>,
    /// The imputations per mapped driver.
    pub imputations: Vec<ImputationTime>,
}

impl Timings {
    /// Dense factorisations in all: fits, shared grids and imputations.
    pub fn factorisations(&self) -> usize {
        self.fits.iter().map(|f| f.factorisations).sum::<usize>()
            + self.shared_grids.iter().map(|g| g.factorisations).sum::<usize>()
            + self.imputations.iter().map(|i| i.factorisations).sum::<usize>()
    }

    /// Likelihood evaluations of all fits.
    pub fn evaluations(&self) -> usize {
        self.fits.iter().map(|f| f.evaluations).sum()
    }

    /// The table printed by `potclim run --timings`: stages, then the fits
    /// summed by error model, the shared grids and the imputations.
    pub fn table(&self) -> String {
        let mut out = String::new();
        out.push_str(&format!(
            "timings ({} hardware threads, fits spread over {})\n",
            self.threads, self.fit_threads
        ));
        out.push_str(&format!("{:<34} {:>9}\n", "stage", "seconds"));
        for s in &self.stages {
            out.push_str(&format!("{:<34} {:>9.3}\n", s.stage, s.seconds));
        }
        out.push_str(&format!(
            "\n{:<34} {:>5} {:>11} {:>14} {:>9}\n",
            "fits by error model", "fits", "evaluations", "factorisations", "seconds"
        ));
        let mut groups: Vec<(String, usize, usize, usize, f64)> = Vec::new();
        for f in &self.fits {
            let key = format!("{} {}", f.method, f.model.split(" | ").nth(1).unwrap_or("independent"));
            match groups.iter_mut().find(|g| g.0 == key) {
                Some(g) => {
                    g.1 += 1;
                    g.2 += f.evaluations;
                    g.3 += f.factorisations;
                    g.4 += f.seconds;
                }
                None => groups.push((key, 1, f.evaluations, f.factorisations, f.seconds)),
            }
        }
        for (k, n, e, fa, s) in &groups {
            out.push_str(&format!("{k:<34} {n:>5} {e:>11} {fa:>14} {s:>9.3}\n"));
        }
        for g in &self.shared_grids {
            out.push_str(&format!(
                "{:<34} {:>5} {:>11} {:>14} {:>9.3}\n",
                format!("start grid shared: {}", g.errors),
                g.fits,
                "",
                g.factorisations,
                g.seconds
            ));
        }
        for i in &self.imputations {
            out.push_str(&format!(
                "{:<34} {:>5} {:>11} {:>14} {:>9.3}\n",
                format!("imputations: {}", i.driver),
                i.refits,
                "",
                i.factorisations,
                i.seconds
            ));
        }
        out.push_str(&format!(
            "{:<34} {:>5} {:>11} {:>14}\n",
            "total",
            self.fits.len(),
            self.evaluations(),
            self.factorisations()
        ));
        out
    }
}
