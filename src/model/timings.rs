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

/// The parametric bootstrap of one likelihood-ratio test.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct BootstrapTime {
    /// `alternative against null`.
    pub test: String,
    /// Replicates run (each two ML refits).
    pub replicates: usize,
    /// Dense factorisations of the refits, all workers.
    pub factorisations: usize,
    /// Wall-clock seconds.
    pub seconds: f64,
}

/// One row of the printed table: label, fits, evaluations (blank where not
/// counted), factorisations, seconds (blank for the total).
type TableRow = (String, usize, Option<usize>, usize, Option<f64>);

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
    /// The parametric bootstraps of the calibration.
    pub bootstraps: Vec<BootstrapTime>,
}

impl Timings {
    /// Dense factorisations in all: fits, shared grids, imputations and
    /// bootstraps.
    pub fn factorisations(&self) -> usize {
        self.fits.iter().map(|f| f.factorisations).sum::<usize>()
            + self.shared_grids.iter().map(|g| g.factorisations).sum::<usize>()
            + self.imputations.iter().map(|i| i.factorisations).sum::<usize>()
            + self.bootstraps.iter().map(|b| b.factorisations).sum::<usize>()
    }

    /// Likelihood evaluations of all fits.
    pub fn evaluations(&self) -> usize {
        self.fits.iter().map(|f| f.evaluations).sum()
    }

    /// The table printed by `potclim run --timings`: stages, then the fits
    /// summed by error model, the shared grids, the imputations and the
    /// bootstraps (the fits column counts their replicates).
    pub fn table(&self) -> String {
        let mut out =
            format!("timings ({} hardware threads, fits spread over {})\n", self.threads, self.fit_threads);
        let w = self.stages.iter().map(|s| s.stage.len()).max().unwrap_or(0).max("stage".len());
        out.push_str(&format!("{:<w$} {:>9}\n", "stage", "seconds"));
        for s in &self.stages {
            out.push_str(&format!("{:<w$} {:>9.3}\n", s.stage, s.seconds));
        }
        // Rows: label, fits, evaluations (blank where not counted), factorisations, seconds.
        let mut rows: Vec<TableRow> = Vec::new();
        for f in &self.fits {
            let key = format!("{} {}", f.method, f.model.split(" | ").nth(1).unwrap_or("independent"));
            match rows.iter_mut().find(|g| g.0 == key) {
                Some(g) => {
                    g.1 += 1;
                    g.2 = g.2.map(|e| e + f.evaluations);
                    g.3 += f.factorisations;
                    g.4 = g.4.map(|t| t + f.seconds);
                }
                None => rows.push((key, 1, Some(f.evaluations), f.factorisations, Some(f.seconds))),
            }
        }
        for g in &self.shared_grids {
            rows.push((
                format!("start grid shared: {}", g.errors),
                g.fits,
                None,
                g.factorisations,
                Some(g.seconds),
            ));
        }
        for i in &self.imputations {
            rows.push((
                format!("imputations: {}", i.driver),
                i.refits,
                None,
                i.factorisations,
                Some(i.seconds),
            ));
        }
        for b in &self.bootstraps {
            rows.push((
                format!("bootstrap: {}", b.test),
                b.replicates,
                None,
                b.factorisations,
                Some(b.seconds),
            ));
        }
        rows.push(("total".into(), self.fits.len(), Some(self.evaluations()), self.factorisations(), None));
        let w = rows.iter().map(|r| r.0.len()).max().unwrap_or(0).max("fits by error model".len());
        out.push_str(&format!(
            "\n{:<w$} {:>5} {:>11} {:>14} {:>9}\n",
            "fits by error model", "fits", "evaluations", "factorisations", "seconds"
        ));
        for (k, n, e, fa, s) in &rows {
            let e = e.map(|e| e.to_string()).unwrap_or_default();
            let s = s.map(|s| format!("{s:.3}")).unwrap_or_default();
            out.push_str(format!("{k:<w$} {n:>5} {e:>11} {fa:>14} {s:>9}").trim_end());
            out.push('\n');
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The table sums fits by error model, and its columns line up however
    /// long a label is (a shared grid of a nugget family is the longest).
    #[test]
    fn table_sums_by_error_model_and_aligns() {
        let fit = |model: &str, e, f| FitTime {
            model: model.into(),
            method: "ML".into(),
            evaluations: e,
            factorisations: f,
            seconds: 0.5,
        };
        let t = Timings {
            threads: 2,
            fit_threads: 2,
            stages: vec![StageTime { stage: "verdict".into(), seconds: 1.0 }],
            fits: vec![fit("base | exponential+nugget", 10, 4), fit("base+d | exponential+nugget", 5, 3)],
            shared_grids: vec![SharedGrid {
                errors: "exponential+nugget".into(),
                fits: 2,
                factorisations: 39,
                seconds: 0.25,
            }],
            imputations: vec![],
            bootstraps: vec![BootstrapTime {
                test: "base+d | exponential+nugget against base | exponential+nugget".into(),
                replicates: 99,
                factorisations: 1500,
                seconds: 2.0,
            }],
        };
        let table = t.table();
        let rows: Vec<&str> = table.lines().skip_while(|l| !l.starts_with("fits by error model")).collect();
        assert_eq!(rows.len(), 5, "{table}");
        let sums: Vec<&str> = rows[1].split_whitespace().collect();
        assert_eq!(sums, ["ML", "exponential+nugget", "2", "15", "7", "1.000"]);
        // every number column ends where the header's does
        let end = rows[0].find("factorisations").unwrap() + "factorisations".len();
        for r in &rows[1..] {
            assert!(r[..end].ends_with(|c: char| c.is_ascii_digit()), "{table}");
        }
        let boot: Vec<&str> = rows[3].split_whitespace().collect();
        assert!(
            rows[3].starts_with("bootstrap: base+d") && boot.ends_with(&["99", "1500", "2.000"]),
            "{table}"
        );
        assert!(rows[4].starts_with("total") && rows[4].split_whitespace().eq(["total", "2", "15", "1546"]));
    }
}
