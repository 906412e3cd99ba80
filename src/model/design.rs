//! The design matrix of a trait model: intercept, blocks, factors, their
//! interactions and numeric drivers, in treatment coding (for estimates) and
//! sum-to-zero coding (for marginal tests), with empty cells and aliased
//! columns detected and reported by name.
//!
//! Coding (see `docs/model.md`):
//! * treatment: a factor with levels `L1..Lk` (order of first appearance in
//!   the pot table) gets indicator columns for `L2..Lk`; `L1` is the reference;
//! * sum-to-zero: columns for `L1..L(k-1)`, each `+1` at its level, `-1` at
//!   `Lk`, else 0 (deviation coding; Searle 1971, *Linear Models*, §7);
//! * an interaction's columns are the products of its factors' columns;
//! * a driver is one numeric column, as given (not centred).
//!
//! Term order (which matters for the sequential ANOVA): blocks, factors, interactions, drivers.

use super::data::{FactorData, ModelData};
use super::error::{ModelError, Result};
use std::ops::Range;

/// Name of the first design column (all ones): the expected trait at the
/// reference level of every factor and block with every driver at 0.
pub const BASELINE: &str = "baseline";

/// Joins the level columns of an interaction column's factors.
pub const INTERACTION_JOIN: &str = " & ";

/// Name of the design column of level `level` of factor `factor`:
/// `factor=level` (for example `variety=Lisa`).
pub fn level_column(factor: &str, level: &str) -> String {
    format!("{factor}={level}")
}

/// What a term is.
#[derive(Clone, Debug, PartialEq)]
pub enum TermKind {
    /// The intercept.
    Intercept,
    /// A blocking factor.
    Block,
    /// A treatment factor.
    Factor,
    /// An interaction of factors (indices into [`ModelData::factors`]).
    Interaction(Vec<usize>),
    /// A numeric covariate.
    Driver,
}

/// One term of the model and its columns.
#[derive(Clone, Debug, PartialEq)]
pub struct Term {
    /// Term name: [`BASELINE`], a column name, or factors joined by `:`.
    pub name: String,
    /// What it is.
    pub kind: TermKind,
    /// Factor indices it involves (for marginality: a term is contained in an
    /// interaction whose factor set includes its own).
    pub factors: Vec<usize>,
    /// Its columns in the design matrix.
    pub columns: Range<usize>,
}

/// Which terms a design holds, by name.
#[derive(Clone, Debug, PartialEq, Default)]
pub struct DesignSpec {
    /// Blocking columns.
    pub blocks: Vec<String>,
    /// Factor columns.
    pub factors: Vec<String>,
    /// Interactions (lists of factor names).
    pub interactions: Vec<Vec<String>>,
    /// Drivers.
    pub drivers: Vec<String>,
}

/// A design matrix in both codings.
#[derive(Clone, Debug)]
pub struct Design {
    /// Terms in model order; the first is the intercept.
    pub terms: Vec<Term>,
    /// Column names in treatment coding, e.g. `accession=a2`, `accession=a2 & regime=dry`, `moisture`
    /// (see [`level_column`]).
    pub names: Vec<String>,
    /// Column names in sum-to-zero coding.
    pub sum_names: Vec<String>,
    /// Columns in treatment coding (each of length n).
    pub x: Vec<Vec<f64>>,
    /// Columns in sum-to-zero coding (same terms and column ranges).
    pub x_sum: Vec<Vec<f64>>,
    /// Drivers in the design.
    pub drivers: Vec<String>,
    /// Number of pots.
    pub n: usize,
}

impl Design {
    /// Number of columns `p`.
    pub fn p(&self) -> usize {
        self.x.len()
    }

    /// Build the design that `spec` names from `data`.
    pub fn build(data: &ModelData, spec: &DesignSpec) -> Result<Design> {
        let n = data.response.len();
        let bad = |message: String, hint: Option<String>| ModelError::Design {
            path: data.source.clone(),
            message,
            hint,
        };
        let find = |list: &[FactorData], name: &str| -> Result<usize> {
            list.iter()
                .position(|f| f.name == name)
                .ok_or_else(|| bad(format!("`{name}` is not a loaded factor"), None))
        };
        let mut terms =
            vec![Term { name: BASELINE.into(), kind: TermKind::Intercept, factors: vec![], columns: 0..1 }];
        let mut x = vec![vec![1.0; n]];
        let mut xs = vec![vec![1.0; n]];
        let mut names = vec![BASELINE.to_string()];
        let mut sum_names = vec![BASELINE.to_string()];
        let mut push = |terms: &mut Vec<Term>,
                        name: String,
                        kind: TermKind,
                        factors: Vec<usize>,
                        t: Vec<(String, Vec<f64>)>,
                        s: Vec<(String, Vec<f64>)>| {
            let start = x.len();
            for (nm, c) in t {
                names.push(nm);
                x.push(c);
            }
            for (nm, c) in s {
                sum_names.push(nm);
                xs.push(c);
            }
            terms.push(Term { name, kind, factors, columns: start..x.len() });
        };
        for b in &spec.blocks {
            let f = &data.blocks[find(&data.blocks, b)?];
            push(&mut terms, b.clone(), TermKind::Block, vec![], trt(f), sum(f));
        }
        for name in &spec.factors {
            let k = find(&data.factors, name)?;
            let f = &data.factors[k];
            push(&mut terms, name.clone(), TermKind::Factor, vec![k], trt(f), sum(f));
        }
        for inter in &spec.interactions {
            let idx: Vec<usize> = inter.iter().map(|nm| find(&data.factors, nm)).collect::<Result<_>>()?;
            for &k in &idx {
                if !spec.factors.contains(&data.factors[k].name) {
                    return Err(bad(
                        format!(
                            "interaction `{}` uses `{}`, which is not a main effect of this design",
                            inter.join(":"),
                            data.factors[k].name
                        ),
                        None,
                    ));
                }
            }
            check_cells(data, &idx)?;
            let mut t: Vec<(String, Vec<f64>)> = vec![(String::new(), vec![1.0; n])];
            let mut s: Vec<(String, Vec<f64>)> = vec![(String::new(), vec![1.0; n])];
            for &k in &idx {
                let (tk, sk) = (trt(&data.factors[k]), sum(&data.factors[k]));
                t = product(&t, &tk);
                s = product(&s, &sk);
            }
            push(&mut terms, inter.join(":"), TermKind::Interaction(idx.clone()), idx, t, s);
        }
        for d in &spec.drivers {
            let (_, v) = data
                .drivers
                .iter()
                .find(|(nm, _)| nm == d)
                .ok_or_else(|| bad(format!("driver `{d}` is not loaded"), None))?;
            push(
                &mut terms,
                d.clone(),
                TermKind::Driver,
                vec![],
                vec![(d.clone(), v.clone())],
                vec![(d.clone(), v.clone())],
            );
        }
        let p = x.len();
        if p >= n {
            return Err(bad(
                format!(
                    "the model has {p} coefficients but only {n} pots have a trait value; it needs more pots than coefficients"
                ),
                Some("drop an interaction, a factor or a driver".into()),
            ));
        }
        let aliased = aliased_columns(&x);
        if !aliased.is_empty() {
            let list: Vec<&str> = aliased.iter().map(|&j| names[j].as_str()).collect();
            return Err(bad(
                format!(
                    "aliased design columns (linear combinations of earlier columns): {}",
                    list.join(", ")
                ),
                Some(
                    "two drivers may be collinear, or a factor may be nested in a block; remove one of them"
                        .into(),
                ),
            ));
        }
        Ok(Design { terms, names, sum_names, x, x_sum: xs, drivers: spec.drivers.clone(), n })
    }
}

/// Treatment-coded columns of a factor: indicators of levels 2..k.
fn trt(f: &FactorData) -> Vec<(String, Vec<f64>)> {
    (1..f.levels.len())
        .map(|l| {
            (
                level_column(&f.name, &f.levels[l]),
                f.codes.iter().map(|&c| if c == l { 1.0 } else { 0.0 }).collect(),
            )
        })
        .collect()
}

/// Sum-to-zero columns of a factor: levels 1..k-1, `-1` at level k.
fn sum(f: &FactorData) -> Vec<(String, Vec<f64>)> {
    let k = f.levels.len();
    (0..k - 1)
        .map(|l| {
            (
                level_column(&f.name, &f.levels[l]),
                f.codes
                    .iter()
                    .map(|&c| {
                        if c == l {
                            1.0
                        } else if c == k - 1 {
                            -1.0
                        } else {
                            0.0
                        }
                    })
                    .collect(),
            )
        })
        .collect()
}

fn product(a: &[(String, Vec<f64>)], b: &[(String, Vec<f64>)]) -> Vec<(String, Vec<f64>)> {
    let mut out = Vec::with_capacity(a.len() * b.len());
    for (na, ca) in a {
        for (nb, cb) in b {
            let name = if na.is_empty() { nb.clone() } else { format!("{na}{INTERACTION_JOIN}{nb}") };
            out.push((name, ca.iter().zip(cb).map(|(u, v)| u * v).collect()));
        }
    }
    out
}

/// Every combination of the levels of `idx` must hold at least one pot.
fn check_cells(data: &ModelData, idx: &[usize]) -> Result<()> {
    let sizes: Vec<usize> = idx.iter().map(|&k| data.factors[k].levels.len()).collect();
    let total: usize = sizes.iter().product();
    let mut counts = vec![0usize; total];
    for i in 0..data.response.len() {
        let mut cell = 0;
        for (s, &k) in idx.iter().enumerate() {
            cell = cell * sizes[s] + data.factors[k].codes[i];
        }
        counts[cell] += 1;
    }
    let mut empty = Vec::new();
    for (cell, &c) in counts.iter().enumerate() {
        if c == 0 {
            let mut rem = cell;
            let mut parts = vec![String::new(); idx.len()];
            for s in (0..idx.len()).rev() {
                let f = &data.factors[idx[s]];
                parts[s] = format!("{}={}", f.name, f.levels[rem % sizes[s]]);
                rem /= sizes[s];
            }
            empty.push(parts.join(" x "));
        }
    }
    if empty.is_empty() {
        Ok(())
    } else {
        Err(ModelError::Design {
            path: data.source.clone(),
            message: format!("empty cells: no analysed pot has {}", empty.join("; ")),
            hint: Some("drop the interaction, or merge levels so that every combination holds pots".into()),
        })
    }
}

/// Indices of columns that are (numerically) linear combinations of the
/// columns before them, with the crate's one rank tolerance
/// ([`crate::spatial::factor::aliased_columns`]).
pub fn aliased_columns(x: &[Vec<f64>]) -> Vec<usize> {
    crate::spatial::factor::aliased_columns(x)
}

/// The factor-by-factor count table: for each pair of factors (and for a
/// single factor, its level counts), pots per cell.
#[derive(Clone, Debug, PartialEq)]
pub struct CountTable {
    /// Row factor name.
    pub rows_name: String,
    /// Column factor name (empty for a single factor).
    pub cols_name: String,
    /// Row levels.
    pub rows: Vec<String>,
    /// Column levels.
    pub cols: Vec<String>,
    /// Counts `[row][col]`.
    pub counts: Vec<Vec<usize>>,
}

/// Count tables of the factors: one per pair of factors, or the level counts
/// of the only factor.
pub fn count_tables(data: &ModelData) -> Vec<CountTable> {
    let f = &data.factors;
    let mut out = Vec::new();
    if f.len() == 1 {
        let mut counts = vec![vec![0usize]; f[0].levels.len()];
        for &c in &f[0].codes {
            counts[c][0] += 1;
        }
        out.push(CountTable {
            rows_name: f[0].name.clone(),
            cols_name: String::new(),
            rows: f[0].levels.clone(),
            cols: vec!["pots".into()],
            counts,
        });
    }
    for a in 0..f.len() {
        for b in a + 1..f.len() {
            let mut counts = vec![vec![0usize; f[b].levels.len()]; f[a].levels.len()];
            for i in 0..f[a].codes.len() {
                counts[f[a].codes[i]][f[b].codes[i]] += 1;
            }
            out.push(CountTable {
                rows_name: f[a].name.clone(),
                cols_name: f[b].name.clone(),
                rows: f[a].levels.clone(),
                cols: f[b].levels.clone(),
                counts,
            });
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn empty_cell_is_named() {
        // warpbreaks without R rownames 1..9 (every wool A, tension L pot)
        let drop: Vec<String> = (1..=9).map(|i| i.to_string()).collect();
        let drop: Vec<&str> = drop.iter().map(String::as_str).collect();
        let data = crate::model::testdata::model_data(
            "warpbreaks.csv",
            "breaks",
            &["wool", "tension"],
            &[],
            None,
            &drop,
        );
        let spec = DesignSpec {
            factors: vec!["wool".into(), "tension".into()],
            interactions: vec![vec!["wool".into(), "tension".into()]],
            ..Default::default()
        };
        let e = Design::build(&data, &spec).unwrap_err().to_string();
        assert!(e.contains("empty cells: no analysed pot has wool=A x tension=L"), "{e}");
        // without the interaction the design is fine
        let spec = DesignSpec { factors: vec!["wool".into(), "tension".into()], ..Default::default() };
        assert_eq!(Design::build(&data, &spec).unwrap().p(), 4);
    }

    #[test]
    fn aliasing_is_found() {
        let a = vec![1.0, 1.0, 1.0, 1.0];
        let b = vec![1.0, 2.0, 3.0, 4.0];
        let c: Vec<f64> = b.iter().map(|v| 2.0 * v - 1.0).collect();
        assert_eq!(aliased_columns(&[a, b, c]), vec![2]);
    }
}
