//! The `[model]` section of the study file and the data it names: the trait
//! column, the factor and block columns of the pot table, and the drivers
//! (numeric pot-table columns or columns of `<output>/pot_covariates.csv`).

use super::error::{ModelError, Result};
use crate::io::error::closest;
use crate::io::layout::{Pots, load_pots};
use crate::io::study::Study;
use crate::io::table::{Table, is_missing};
use crate::model::likelihood_path::Setting;
use crate::spatial::averaged::PathShares;
use crate::spatial::correlation::Family;
use crate::spatial::geometry::DISTANCE_PREFIX;
use crate::spatial::likelihood::Distances;
use serde::Deserialize;
use std::path::{Path, PathBuf};

/// The file of mapped drivers written by the mapping stage, inside the output folder.
pub use crate::spatial::outputs::POT_COVARIATES_FILE as COVARIATES_FILE;

#[derive(Deserialize)]
struct Doc {
    model: Option<ModelSection>,
}

#[derive(Deserialize)]
#[serde(untagged)]
enum OneOrMany {
    One(String),
    Many(Vec<String>),
}

/// `[model]` as written in the study file.
#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct ModelSection {
    #[serde(rename = "trait")]
    trait_column: String,
    #[serde(default)]
    factors: Vec<String>,
    #[serde(default)]
    interactions: Vec<Vec<String>>,
    #[serde(default)]
    drivers: Vec<String>,
    blocks: Option<OneOrMany>,
    correlations: Option<Vec<String>>,
    nugget: Option<bool>,
    trait_unit: Option<String>,
    rows_columns: Option<bool>,
    directional: Option<Vec<String>>,
    likelihood: Option<String>,
    neighbours: Option<i64>,
}

/// The validated `[model]` section.
#[derive(Clone, Debug, PartialEq)]
pub struct ModelSpec {
    /// The trait (response) column of the pot table.
    pub trait_column: String,
    /// Categorical treatment columns, in the order they enter the model.
    pub factors: Vec<String>,
    /// Interactions, each a list of two or more names from `factors`.
    pub interactions: Vec<Vec<String>>,
    /// Numeric covariates.
    pub drivers: Vec<String>,
    /// Blocking columns (categorical, entered first).
    pub blocks: Vec<String>,
    /// Correlation families to fit (default: exponential).
    pub correlations: Vec<Family>,
    /// Fit each family with and without a nugget (default true); without only if false.
    pub nugget: bool,
    /// Unit of the trait (`"g"`, `"cm"`), for labels only; `None` when not given.
    pub trait_unit: Option<String>,
    /// Also fit rows x columns errors on the pots' grid (default false).
    pub rows_columns: bool,
    /// Families also fitted with a direction-dependent range (default none).
    pub directional: Vec<Family>,
    /// Which likelihood the correlated fits use (`likelihood`, default `auto`;
    /// [`crate::model::likelihood_path`]).
    pub likelihood: Setting,
    /// Neighbours per pot of the nearest-neighbour likelihood (`neighbours`,
    /// default [`crate::spatial::vecchia::DEFAULT_NEIGHBOURS`]).
    pub neighbours: usize,
}

impl ModelSpec {
    /// Read and validate `[model]` of a study file.
    pub fn from_study(study: &Study) -> Result<ModelSpec> {
        let doc: Doc = study.section()?;
        let Some(m) = doc.model else {
            return Err(study
                .invalid(
                    "model",
                    "the study file has no [model] section",
                    Some("add `[model]` with at least `trait = \"<column>\"`".into()),
                )
                .into());
        };
        let blocks = match m.blocks {
            None => Vec::new(),
            Some(OneOrMany::One(s)) => vec![s],
            Some(OneOrMany::Many(v)) => v,
        };
        let correlations = match m.correlations {
            None => vec![Family::Exponential],
            Some(v) => v
                .iter()
                .enumerate()
                .map(|(i, s)| {
                    Family::parse(s).map_err(|e| {
                        ModelError::from(study.invalid(&format!("model.correlations[{i}]"), e, None))
                    })
                })
                .collect::<Result<Vec<_>>>()?,
        };
        let directional = m
            .directional
            .iter()
            .flatten()
            .enumerate()
            .map(|(i, s)| {
                Family::parse(s).map_err(|e| {
                    ModelError::from(study.invalid(
                        &format!("model.directional[{i}]"),
                        e,
                        Some("name a distance family to fit with a direction-dependent range, e.g. directional = [\"exponential\"]".into()),
                    ))
                })
            })
            .collect::<Result<Vec<_>>>()?;
        let likelihood = match &m.likelihood {
            None => Setting::Auto,
            Some(v) => Setting::parse(v).map_err(|e| {
                ModelError::from(study.invalid_value(
                    "model",
                    "model.likelihood",
                    v,
                    e,
                    Some(format!(
                        "\"auto\" (the default) uses the exact likelihood up to {} pots and the nearest-neighbour one above",
                        crate::model::likelihood_path::EXACT_UP_TO
                    )),
                ))
            })?,
        };
        let neighbours = match m.neighbours {
            None => crate::spatial::vecchia::DEFAULT_NEIGHBOURS,
            Some(k) if k >= 1 => k as usize,
            Some(k) => {
                return Err(study
                    .invalid(
                        "model.neighbours",
                        format!("neighbours must be a whole number of at least 1, got {k}"),
                        Some(format!("the default is {}", crate::spatial::vecchia::DEFAULT_NEIGHBOURS)),
                    )
                    .into());
            }
        };
        let mut seen = std::collections::HashSet::new();
        for name in blocks.iter().chain(&m.factors).chain(&m.drivers).chain(std::iter::once(&m.trait_column))
        {
            if !seen.insert(name.as_str()) {
                return Err(study
                    .invalid(
                        "model",
                        format!("column `{name}` is named twice among trait, factors, blocks and drivers"),
                        None,
                    )
                    .into());
            }
        }
        for (i, inter) in m.interactions.iter().enumerate() {
            if inter.len() < 2 {
                return Err(study
                    .invalid(
                        &format!("model.interactions[{i}]"),
                        "an interaction lists two or more factors",
                        Some("e.g. interactions = [[\"accession\", \"regime\"]]".into()),
                    )
                    .into());
            }
            for f in inter {
                if !m.factors.contains(f) {
                    return Err(study
                        .invalid(
                            &format!("model.interactions[{i}]"),
                            format!("`{f}` is not one of the factors ({})", m.factors.join(", ")),
                            Some("list every factor of an interaction in `factors` too".into()),
                        )
                        .into());
                }
            }
        }
        Ok(ModelSpec {
            trait_column: m.trait_column,
            factors: m.factors,
            interactions: m.interactions,
            drivers: m.drivers,
            blocks,
            correlations,
            nugget: m.nugget.unwrap_or(true),
            trait_unit: m.trait_unit.map(|u| u.trim().to_string()).filter(|u| !u.is_empty()),
            rows_columns: m.rows_columns.unwrap_or(false),
            directional,
            likelihood,
            neighbours,
        })
    }
}

impl ModelSpec {
    /// Check the columns this spec names against the pot table before any
    /// work: the trait column exists and holds numbers (with at least one
    /// value), every factor and block is a column, and every driver is a
    /// numeric column of the pot table or one of `mapped` (the per-pot
    /// columns the mapping stage will produce: indicator names and
    /// `distance_<opening>`). Errors name the file and the line (the header
    /// line for a missing column, the row for a bad cell) and suggest the
    /// closest name. Then the pot-table part of the data is assembled as the
    /// model stage will (missing factor levels, single-level factors,
    /// missing or constant pot-table drivers are refused) and returned: its
    /// factors carry their reference levels.
    pub fn check(&self, study: &Study, pots: &Pots, mapped: &[String]) -> Result<ModelData> {
        let table = &pots.table;
        let column = |key: &str, name: &str| -> Result<()> {
            if table.headers.iter().any(|h| h == name) {
                return Ok(());
            }
            let hint = closest(name, table.headers.iter().map(String::as_str))
                .map(|s| format!("did you mean `{s}`?"));
            Err(study
                .invalid_value(
                    "model",
                    key,
                    name,
                    format!(
                        "`{name}` is not a column of {} (header, line {}: {})",
                        table.path.display(),
                        table.header_line,
                        table.headers.join(", ")
                    ),
                    hint,
                )
                .into())
        };
        column("model.trait", &self.trait_column)?;
        for b in &self.blocks {
            column("model.blocks", b)?;
        }
        for f in &self.factors {
            column("model.factors", f)?;
        }
        let trait_values = table.optional_numbers(&self.trait_column)?;
        if trait_values.iter().all(Option::is_none) {
            return Err(ModelError::Design {
                path: table.path.clone(),
                message: format!(
                    "the trait column `{}` has no values (every cell is empty or NA)",
                    self.trait_column
                ),
                hint: Some("name the column that holds the measured trait in `[model] trait`".into()),
            });
        }
        for d in &self.drivers {
            if table.headers.contains(d) {
                table.optional_numbers(d)?;
                continue;
            }
            if mapped.contains(d) {
                continue;
            }
            let numeric: Vec<&str> = table
                .headers
                .iter()
                .filter(|h| **h != self.trait_column)
                .filter(|h| table.optional_numbers(h).is_ok_and(|v| v.iter().any(|x| x.is_some())))
                .map(|h| h.as_str())
                .collect();
            let candidates = numeric.iter().copied().chain(mapped.iter().map(String::as_str));
            let hint = match closest(d, candidates) {
                Some(s) => format!("did you mean `{s}`?"),
                None => "a driver is a numeric column of the pot table, the name of an [[indicator]], or distance_<opening> for an [[openings]] entry".into(),
            };
            return Err(study
                .invalid_value(
                    "model",
                    "model.drivers",
                    d,
                    format!(
                        "driver `{d}` names no indicator, no opening and no column of {}; available: indicators and openings [{}], numeric pot-table columns [{}]",
                        table.path.display(),
                        mapped.join(", "),
                        numeric.join(", ")
                    ),
                    Some(hint),
                )
                .into());
        }
        let own = ModelSpec {
            drivers: self.drivers.iter().filter(|d| table.headers.contains(d)).cloned().collect(),
            ..self.clone()
        };
        let data = assemble(pots, &own, None, Path::new(COVARIATES_FILE))?;
        let n = data.response.len();
        let limit = crate::model::likelihood_path::EXACT_MEMORY_LIMIT_BYTES;
        if let Err((key, message, hint)) =
            crate::model::likelihood_path::choose(self.likelihood, self.neighbours, n, limit)
        {
            return Err(study.invalid(&format!("model.{key}"), message, Some(hint)).into());
        }
        Ok(data)
    }
}

/// One categorical column over the analysed pots.
#[derive(Clone, Debug, PartialEq)]
pub struct FactorData {
    /// Column name.
    pub name: String,
    /// Levels in order of first appearance in the pot table (the first is the reference).
    pub levels: Vec<String>,
    /// Level index of each analysed pot.
    pub codes: Vec<usize>,
}

impl FactorData {
    /// Build from cell texts (no missing values allowed).
    pub fn from_labels(name: &str, labels: &[&str]) -> FactorData {
        let mut levels: Vec<String> = Vec::new();
        let codes = labels
            .iter()
            .map(|l| match levels.iter().position(|v| v == l) {
                Some(k) => k,
                None => {
                    levels.push(l.to_string());
                    levels.len() - 1
                }
            })
            .collect();
        FactorData { name: name.into(), levels, codes }
    }
}

/// The analysed pots: response, factors, drivers and positions, aligned by row.
#[derive(Clone, Debug)]
pub struct ModelData {
    /// The pot table (for messages).
    pub source: PathBuf,
    /// Trait column name.
    pub trait_name: String,
    /// Pot ids of the analysed pots.
    pub pots: Vec<String>,
    /// Physical line of each analysed pot in the pot table.
    pub lines: Vec<usize>,
    /// Positions (metres).
    pub x: Vec<f64>,
    /// Positions (metres).
    pub y: Vec<f64>,
    /// The trait values.
    pub response: Vec<f64>,
    /// Block columns.
    pub blocks: Vec<FactorData>,
    /// Factor columns.
    pub factors: Vec<FactorData>,
    /// Driver columns.
    pub drivers: Vec<(String, Vec<f64>)>,
    /// Pots left out because their trait value is missing (id, line).
    pub excluded: Vec<(String, usize)>,
    /// Declared lattice cells `(row, column)` of the analysed pots
    /// (`[pots] lattice_row`, `lattice_column`; 0-based), `None` when not declared.
    pub cells: Option<(Vec<usize>, Vec<usize>)>,
    /// Pots that move (`[pots] moves`): the positions held and each analysed
    /// pot's time shares of them over its growth window, aligned with `pots`;
    /// `None` for pots that stand still (their positions are `x`, `y`).
    pub paths: Option<PathShares>,
}

impl ModelData {
    /// What the residual correlation is computed over: the pots' positions,
    /// or for pots that move their paths (`W R W'`, docs/spatial.md).
    pub fn distances(&self) -> std::result::Result<Distances, crate::spatial::likelihood::LikelihoodError> {
        match &self.paths {
            Some(p) => Ok(Distances::Averaged(p.clone())),
            None => Distances::from_coords(&self.x, &self.y),
        }
    }

    /// The lattice of the rows x columns residual model: the declared cells
    /// (renumbered from 0 over the analysed pots) when `[pots]` names them,
    /// else the exact grid of the positions
    /// ([`crate::spatial::rowcol::Lattice::from_coords`]). The error says why
    /// there is none.
    pub fn lattice(&self) -> std::result::Result<crate::spatial::rowcol::Lattice, String> {
        match &self.cells {
            Some((r, c)) => {
                let (r0, c0) = (r.iter().min().copied().unwrap_or(0), c.iter().min().copied().unwrap_or(0));
                crate::spatial::rowcol::Lattice::from_indices(
                    r.iter().map(|v| v - r0).collect(),
                    c.iter().map(|v| v - c0).collect(),
                )
                .map_err(|e| format!("the declared lattice columns of [pots]: {e}"))
            }
            None => crate::spatial::rowcol::Lattice::from_coords(&self.x, &self.y),
        }
    }
}

/// Per-pot values of the mapped drivers: the mapping stage's result, either
/// carried in memory ([`PotCovariates::from_map`], as `potclim run` does) or
/// read back from `<output>/pot_covariates.csv` ([`PotCovariates::read`], as
/// the standalone `potclim verdict` and `potclim fit` do). Both give the same
/// numbers: the file holds each value in its shortest round-trip decimal.
#[derive(Clone, Debug, PartialEq)]
pub struct PotCovariates {
    /// The file the values were read from, or the file the mapping stage
    /// writes them to (named in messages).
    pub path: PathBuf,
    /// Pot ids, one per row.
    pub pots: Vec<String>,
    /// Physical line of each row in the file; `None` for values in memory.
    pub lines: Option<Vec<usize>>,
    /// Columns other than `pot`: name and value per row (`None`: missing).
    pub columns: Vec<(String, Vec<Option<f64>>)>,
}

impl PotCovariates {
    /// Read `pot_covariates.csv` (column `pot`, then numeric columns; an empty
    /// cell is a missing value, any other non-number an error naming its line).
    pub fn read(path: &Path) -> Result<PotCovariates> {
        let t = Table::read(path, b',')?;
        let pots = t.text("pot")?.into_iter().map(|s| s.trim().to_string()).collect();
        let columns = t
            .headers
            .iter()
            .filter(|h| h.as_str() != "pot")
            .map(|h| Ok((h.clone(), t.optional_numbers(h)?)))
            .collect::<Result<Vec<_>>>()?;
        Ok(PotCovariates { path: path.to_path_buf(), pots, lines: Some(t.lines.clone()), columns })
    }

    /// The mapping stage's result in memory, with the columns of
    /// `pot_covariates.csv`: `<indicator>`, `<indicator>_se`, then
    /// `distance_<opening>`. A value that is not finite is missing, as an
    /// empty cell of the file is. `path` names the file for messages.
    pub fn from_map(path: &Path, map: &crate::spatial::stage::MapRun) -> PotCovariates {
        let finite =
            |v: &[f64]| -> Vec<Option<f64>> { v.iter().map(|x| x.is_finite().then_some(*x)).collect() };
        let mut columns = Vec::new();
        for c in &map.indicators {
            columns.push((c.name.clone(), finite(&c.value)));
            let se = match &c.se {
                Some(se) => finite(se),
                None => vec![None; c.value.len()],
            };
            columns.push((format!("{}_se", c.name), se));
        }
        for (name, d) in &map.distances {
            columns.push((format!("{DISTANCE_PREFIX}{name}"), finite(d)));
        }
        PotCovariates { path: path.to_path_buf(), pots: map.pots.clone(), lines: None, columns }
    }

    fn column(&self, name: &str) -> Option<&[Option<f64>]> {
        self.columns.iter().find(|(n, _)| n == name).map(|(_, v)| v.as_slice())
    }

    fn names(&self) -> impl Iterator<Item = &str> {
        self.columns.iter().map(|(n, _)| n.as_str())
    }
}

/// The mapping stage's window SEs of the mapped drivers at the analysed pots
/// (`<indicator>_se` of [`PotCovariates`], aligned with `data.pots`), for the
/// verdict stage's imputations (`model::verdict::window_prior_cov`). A driver
/// is left out when the pot table holds it itself (its values are not the
/// map's), when its `_se` column is absent, or when any analysed pot lacks a
/// finite, non-negative SE (IDW or nearest-sensor maps have none): the
/// verdict stage then falls back to its own prior and says so.
pub fn window_ses(pots: &Pots, data: &ModelData, cov: &PotCovariates) -> Vec<(String, Vec<f64>)> {
    let index: std::collections::HashMap<&str, usize> =
        cov.pots.iter().enumerate().map(|(k, id)| (id.as_str(), k)).collect();
    data.drivers
        .iter()
        .filter(|(name, _)| !pots.table.headers.contains(name))
        .filter_map(|(name, _)| {
            let se = cov.column(&format!("{name}_se"))?;
            let v = data
                .pots
                .iter()
                .map(|id| se[*index.get(id.as_str())?].filter(|v| v.is_finite() && *v >= 0.0))
                .collect::<Option<Vec<f64>>>()?;
            Some((name.clone(), v))
        })
        .collect()
}

/// Load the data that `spec` names: the pot table, and `<output>/pot_covariates.csv`
/// for drivers the pot table does not hold.
pub fn load_model_data(study: &Study, spec: &ModelSpec) -> Result<ModelData> {
    let pots = load_pots(study)?;
    let cov_path = study.output_dir().join(COVARIATES_FILE);
    let needs_cov = spec.drivers.iter().any(|d| !pots.table.headers.contains(d));
    let covariates =
        if needs_cov && cov_path.exists() { Some(PotCovariates::read(&cov_path)?) } else { None };
    let mut data = assemble(&pots, spec, covariates.as_ref(), &cov_path)?;
    if study.spec.pots.moves.is_some() {
        let path = study.output_dir().join(crate::spatial::outputs::POT_PATHS_FILE);
        if !path.exists() {
            return Err(ModelError::Design {
                path,
                message: "the pots move ([pots] moves), but their paths have not been mapped".into(),
                hint: Some("run `potclim map` first (or `potclim run`)".into()),
            });
        }
        data.paths = Some(read_paths(&path, &data.pots)?);
    }
    Ok(data)
}

/// Build [`ModelData`] from a loaded pot table and the mapped drivers, if
/// any (`cov_path` names their file in messages when there are none).
pub fn assemble(
    pots: &Pots,
    spec: &ModelSpec,
    covariates: Option<&PotCovariates>,
    cov_path: &Path,
) -> Result<ModelData> {
    let table = &pots.table;
    let path = table.path.clone();
    let values = table.optional_numbers(&spec.trait_column)?;
    let keep: Vec<usize> = (0..values.len()).filter(|&i| values[i].is_some()).collect();
    let excluded: Vec<(String, usize)> = (0..values.len())
        .filter(|&i| values[i].is_none())
        .map(|i| (pots.ids[i].clone(), table.lines[i]))
        .collect();
    if keep.is_empty() {
        return Err(ModelError::Design {
            path,
            message: format!(
                "the trait column `{}` has no values (every cell is empty or NA)",
                spec.trait_column
            ),
            hint: Some("name the column that holds the measured trait in `[model] trait`".into()),
        });
    }
    let categorical = |name: &str| -> Result<FactorData> {
        let cells = table.text(name)?;
        let j = table.column(name)?;
        for &i in &keep {
            if is_missing(cells[i]) {
                return Err(table
                    .bad(
                        table.lines[i],
                        name,
                        &table.rows[i][j],
                        "a factor level is missing",
                        Some("every analysed pot needs a level of each factor and block".into()),
                    )
                    .into());
            }
        }
        let labels: Vec<&str> = keep.iter().map(|&i| cells[i].trim()).collect();
        let f = FactorData::from_labels(name, &labels);
        if f.levels.len() < 2 {
            return Err(ModelError::Design {
                path: path.clone(),
                message: format!(
                    "factor `{name}` has a single level (`{}`) among the {} analysed pots",
                    f.levels[0],
                    keep.len()
                ),
                hint: Some("a factor needs two or more levels; remove it from `[model]`".into()),
            });
        }
        Ok(f)
    };
    let blocks = spec.blocks.iter().map(|b| categorical(b)).collect::<Result<Vec<_>>>()?;
    let factors = spec.factors.iter().map(|f| categorical(f)).collect::<Result<Vec<_>>>()?;
    let mut drivers = Vec::new();
    for d in &spec.drivers {
        let v: Vec<f64> = if table.headers.contains(d) {
            let v = table.optional_numbers(d)?;
            let j = table.column(d)?;
            keep.iter()
                .map(|&i| {
                    v[i].ok_or_else(|| {
                        ModelError::from(table.bad(
                            table.lines[i],
                            d,
                            &table.rows[i][j],
                            "a driver value is missing",
                            Some("every analysed pot needs a value of each driver".into()),
                        ))
                    })
                })
                .collect::<Result<Vec<_>>>()?
        } else if let Some((cov, v)) = covariates.and_then(|c| c.column(d).map(|v| (c, v))) {
            let index: std::collections::HashMap<&str, usize> =
                cov.pots.iter().enumerate().map(|(k, id)| (id.as_str(), k)).collect();
            keep.iter()
                .map(|&i| {
                    let id = pots.ids[i].as_str();
                    let k = *index.get(id).ok_or_else(|| ModelError::Design {
                        path: cov.path.clone(),
                        message: format!("pot `{id}` (pot table line {}) has no row", table.lines[i]),
                        hint: Some("rerun the mapping stage for the current pot table".into()),
                    })?;
                    v[k].ok_or_else(|| match &cov.lines {
                        Some(lines) => ModelError::from(crate::io::IoError::BadValue {
                            path: cov.path.clone(),
                            line: lines[k],
                            column: d.clone(),
                            value: String::new(),
                            message: "a driver value is missing".into(),
                            hint: None,
                        }),
                        None => ModelError::Design {
                            path: cov.path.clone(),
                            message: format!("driver `{d}` has no mapped value at pot `{id}`"),
                            hint: Some("the kriging of this indicator gave no finite value there; see mapping_cv.csv and the variogram fits".into()),
                        },
                    })
                })
                .collect::<Result<Vec<_>>>()?
        } else {
            return Err(unknown_driver(d, table, covariates, cov_path));
        };
        let (lo, hi) = v.iter().fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &x| (a.min(x), b.max(x)));
        if lo == hi {
            return Err(ModelError::Design {
                path: path.clone(),
                message: format!("driver `{d}` is constant ({lo}) over the analysed pots"),
                hint: Some("a constant driver cannot be estimated next to the intercept; remove it".into()),
            });
        }
        drivers.push((d.clone(), v));
    }
    Ok(ModelData {
        source: path,
        trait_name: spec.trait_column.clone(),
        pots: keep.iter().map(|&i| pots.ids[i].clone()).collect(),
        lines: keep.iter().map(|&i| table.lines[i]).collect(),
        x: keep.iter().map(|&i| pots.x[i]).collect(),
        y: keep.iter().map(|&i| pots.y[i]).collect(),
        response: keep.iter().map(|&i| values[i].expect("kept")).collect(),
        blocks,
        factors,
        drivers,
        excluded,
        cells: pots
            .cells
            .as_ref()
            .map(|(r, c)| (keep.iter().map(|&i| r[i]).collect(), keep.iter().map(|&i| c[i]).collect())),
        paths: None,
    })
}

/// The analysed pots' paths from the mapping stage in memory (as `potclim
/// run` passes them): `all` names the pots of `moved` (pot-table order).
pub fn paths_in_memory(
    moved: &crate::spatial::paths::MovedPots,
    all: &[String],
    analysed: &[String],
) -> PathShares {
    let index: std::collections::HashMap<&str, usize> =
        all.iter().enumerate().map(|(k, id)| (id.as_str(), k)).collect();
    let pos = &moved.paths.positions;
    PathShares {
        px: pos.x.clone(),
        py: pos.y.clone(),
        shares: analysed.iter().map(|id| moved.shares[index[id.as_str()]].clone()).collect(),
    }
}

/// The analysed pots' paths read back from `pot_paths.csv` (as the standalone
/// `potclim fit` and `potclim verdict` do): positions are told apart by their
/// coordinates, which the file holds in shortest round-trip decimals. A pot
/// without rows, or shares that do not sum to 1, is an error naming the file.
pub fn read_paths(path: &Path, analysed: &[String]) -> Result<PathShares> {
    let t = Table::read(path, b',')?;
    let pots = t.text("pot")?;
    let (x, y, share) = (t.numbers("x")?, t.numbers("y")?, t.numbers("time_share")?);
    let mut px: Vec<f64> = Vec::new();
    let mut py: Vec<f64> = Vec::new();
    let mut at: std::collections::HashMap<(u64, u64), usize> = std::collections::HashMap::new();
    let mut of_pot: std::collections::HashMap<&str, Vec<(usize, f64)>> = std::collections::HashMap::new();
    for k in 0..pots.len() {
        let p = *at.entry((x[k].to_bits(), y[k].to_bits())).or_insert_with(|| {
            px.push(x[k]);
            py.push(y[k]);
            px.len() - 1
        });
        of_pot.entry(pots[k].trim()).or_default().push((p, share[k]));
    }
    let mut shares = Vec::with_capacity(analysed.len());
    for id in analysed {
        let Some(w) = of_pot.remove(id.as_str()) else {
            return Err(ModelError::Design {
                path: path.to_path_buf(),
                message: format!("pot `{id}` has no row, so its path is unknown"),
                hint: Some(
                    "run `potclim map` again: it writes the paths of every pot of the pot table".into(),
                ),
            });
        };
        shares.push(w);
    }
    PathShares::new(&px, &py, &shares).map_err(|e| ModelError::Design {
        path: path.to_path_buf(),
        message: e.to_string(),
        hint: Some("run `potclim map` again to rewrite the file".into()),
    })
}

/// Every `[[openings]]` entry is a candidate driver of the verdict: its
/// distance covariate `distance_<name>` (metres from each pot to the nearest
/// point of the opening's segment, `spatial::geometry::distance_to_segment`)
/// is appended to `spec.drivers` and `data.drivers` unless the study already
/// lists it. Computed from the analysed pots' positions (for pots that move,
/// time-averaged over their paths, [`ModelData::paths`]), so it needs no
/// mapping stage. Returns the names added.
pub fn add_opening_drivers(study: &Study, spec: &mut ModelSpec, data: &mut ModelData) -> Vec<String> {
    let mut added = Vec::new();
    for o in &study.spec.openings {
        let name = format!("{DISTANCE_PREFIX}{}", o.name);
        if spec.drivers.contains(&name) || data.drivers.iter().any(|(d, _)| *d == name) {
            continue;
        }
        let to = |x: f64, y: f64| crate::spatial::geometry::distance_to_segment(x, y, o.from, o.to);
        let d: Vec<f64> = match &data.paths {
            // pots that move: the time-averaged distance (as the mapping stage's)
            Some(p) => {
                p.shares.iter().map(|w| w.iter().map(|&(k, s)| s * to(p.px[k], p.py[k])).sum()).collect()
            }
            None => data.x.iter().zip(&data.y).map(|(&x, &y)| to(x, y)).collect(),
        };
        spec.drivers.push(name.clone());
        data.drivers.push((name.clone(), d));
        added.push(name);
    }
    added
}

fn unknown_driver(d: &str, table: &Table, covariates: Option<&PotCovariates>, cov_path: &Path) -> ModelError {
    let numeric: Vec<&str> = table
        .headers
        .iter()
        .filter(|h| table.optional_numbers(h).is_ok_and(|v| v.iter().any(|x| x.is_some())))
        .map(|h| h.as_str())
        .collect();
    let mapped: Vec<&str> = covariates.map(|c| c.names().collect()).unwrap_or_default();
    let all: Vec<&str> = numeric.iter().chain(&mapped).copied().collect();
    let mut message = format!(
        "driver `{d}` is neither a column of the pot table nor of {}; available drivers: numeric pot-table columns [{}]",
        cov_path.display(),
        numeric.join(", ")
    );
    if covariates.is_some() {
        message.push_str(&format!(", mapped covariates [{}]", mapped.join(", ")));
    } else {
        message.push_str(&format!(" (no {COVARIATES_FILE} in the output folder)"));
    }
    let hint = match closest(d, all.iter().copied()) {
        Some(s) => Some(format!("did you mean `{s}`?")),
        None if covariates.is_none() => {
            Some("mapped climate drivers appear after the mapping stage has run".into())
        }
        None => None,
    };
    ModelError::Design { path: table.path.clone(), message, hint }
}
