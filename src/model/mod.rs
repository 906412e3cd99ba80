//! Trait models: the factorial design, OLS with ANOVA tables, GLS with
//! spatially correlated residuals by REML and ML, information criteria and
//! residual diagnostics (Moran's I; the residual variogram comes from the
//! variogram code of [`crate::spatial`]).
//!
//! It uses the correlation families of [`crate::spatial::correlation`] and
//! the likelihood engine of [`crate::spatial::likelihood`]; [`compare`] turns a
//! grid of ML fits into the verdict.

pub mod bootstrap;
pub mod compare;
pub mod confounding;
pub mod data;
pub mod design;
pub mod diagnostics;
pub mod error;
pub mod gls;
pub mod imputation;
pub mod intervals;
pub mod likelihood_path;
pub mod ols;
pub mod progress;
pub mod small_sample;
pub mod stage;
pub mod structures;
pub mod timings;
pub mod two_stage;
pub mod verdict;

pub use error::ModelError;

#[cfg(test)]
pub(crate) mod testdata {
    //! Helpers for the reference tests: the committed datasets and fixtures
    //! under `tests/reference/` (see its README for their sources).
    use super::data::{FactorData, ModelData};

    /// Path under `tests/reference/`.
    pub fn path(rel: &str) -> std::path::PathBuf {
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/reference").join(rel)
    }

    /// A fixture as JSON.
    pub fn fixture(name: &str) -> serde_json::Value {
        let text = std::fs::read_to_string(path(&format!("fixtures/{name}"))).expect("fixture");
        serde_json::from_str(&text).expect("json")
    }

    /// A CSV dataset: headers and rows of text.
    pub fn csv(name: &str) -> (Vec<String>, Vec<Vec<String>>) {
        let mut r = csv::Reader::from_path(path(&format!("data/{name}"))).expect("data");
        let headers = r.headers().unwrap().iter().map(String::from).collect();
        let rows = r.records().map(|rec| rec.unwrap().iter().map(String::from).collect()).collect();
        (headers, rows)
    }

    /// One column of a CSV dataset.
    pub fn column<'a>(data: &'a (Vec<String>, Vec<Vec<String>>), name: &str) -> Vec<&'a str> {
        let j = data.0.iter().position(|h| h == name).expect("column");
        data.1.iter().map(|r| r[j].as_str()).collect()
    }

    /// Numbers of a fixture array.
    pub fn floats(v: &serde_json::Value) -> Vec<f64> {
        v.as_array().unwrap().iter().map(|x| x.as_f64().unwrap()).collect()
    }

    /// Model data from a dataset: response, factors, drivers, positions.
    pub fn model_data(
        name: &str,
        response: &str,
        factors: &[&str],
        drivers: &[&str],
        xy: Option<(&str, &str)>,
        drop_rownames: &[&str],
    ) -> ModelData {
        let d = csv(name);
        let keep: Vec<usize> = match d.0.iter().position(|h| h == "rownames") {
            Some(j) => (0..d.1.len()).filter(|&i| !drop_rownames.contains(&d.1[i][j].as_str())).collect(),
            None => (0..d.1.len()).collect(),
        };
        let col = |c: &str| -> Vec<String> {
            let v = column(&d, c);
            keep.iter().map(|&i| v[i].to_string()).collect()
        };
        let nums = |c: &str| -> Vec<f64> { col(c).iter().map(|v| v.parse().unwrap()).collect() };
        let n = keep.len();
        let (x, y) = match xy {
            Some((a, b)) => (nums(a), nums(b)),
            None => ((0..n).map(|i| i as f64).collect(), vec![0.0; n]),
        };
        ModelData {
            source: path(&format!("data/{name}")),
            trait_name: response.into(),
            pots: (0..n).map(|i| format!("r{i}")).collect(),
            lines: (0..n).map(|i| i + 2).collect(),
            x,
            y,
            response: nums(response),
            blocks: vec![],
            factors: factors
                .iter()
                .map(|f| {
                    let v = col(f);
                    let refs: Vec<&str> = v.iter().map(String::as_str).collect();
                    FactorData::from_labels(f, &refs)
                })
                .collect(),
            drivers: drivers.iter().map(|d| (d.to_string(), nums(d))).collect(),
            excluded: vec![],
            cells: None,
            paths: None,
        }
    }
}
