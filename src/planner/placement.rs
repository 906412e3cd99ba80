//! `potclim place PLAN`: where the next loggers should go, and which current
//! logger could be moved at least cost, for one indicator.
//!
//! The inputs come from one of three sources, chosen by `[placement]`:
//! - `study` alone: the pots and loggers of the study, and the indicator's
//!   kriging set-up exactly as the mapping stage chose it from the study's
//!   logs (method, variogram, external drift and its decay length). With
//!   `basis = "map"` (the default) the SE lowered is the map's calibrated
//!   window SE, read from the per-step kriging variance
//!   ([`crate::spatial::placement::window`]); with `basis = "study_period"`
//!   (or where the map has no window SE) the kriging SE of the indicator's
//!   study-period values, with their sill
//!   ([`crate::spatial::kriging::rescale_to`]);
//! - `study` with `[placement.variogram]`: the study's pot and sensor tables
//!   and the stated variogram (a compartment without logs yet);
//! - `scenario` with `[placement.variogram]`: the pots and loggers of a
//!   simulator scenario (a layout still on paper).
//!
//! The answer (greedy additions, removal costs, SE per pot before and after)
//! comes from [`crate::spatial::placement::place`]; this file turns the plan
//! into its inputs and writes `plan.csv`, `plan_pots.csv` and `plan.html`
//! (`docs/outputs.md`).

use super::{PlanError, PlanFile};
use crate::io::output::{CsvTable, StageWriter, number};
use crate::io::study::Study;
use crate::pipeline::{PipelineError, Stage, StageError};
use crate::report::data::OpeningSegment;
use crate::report::plan_page::{PlacementPage, PlacementStep};
use crate::spatial::correlation::Family;
use crate::spatial::geometry::{Origin, Points, distances_to_opening};
use crate::spatial::kriging::Interpolator;
use crate::spatial::placement::window::{WindowSe, map_window_se};
use crate::spatial::placement::{
    DriftValues, KrigingSe, Objective, PotSe, Setting, candidate_grid, place, removal_variances,
};
use crate::spatial::variogram::VariogramModel;
use serde::Deserialize;
use std::path::PathBuf;
use std::time::Instant;

/// File name of the placement table.
pub const PLAN_FILE: &str = "plan.csv";
/// File name of the SE per pot before and after.
pub const PLAN_POTS_FILE: &str = "plan_pots.csv";
/// File name of the placement page.
pub const PLAN_PAGE: &str = "plan.html";

/// `[placement]` of the plan file.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PlacementSection {
    /// A study file: pots, loggers and (without `variogram`) the fitted map.
    pub study: Option<String>,
    /// A simulator scenario file: pots and loggers of a planned layout.
    pub scenario: Option<String>,
    /// The indicator whose kriging SE is to be lowered.
    pub indicator: String,
    /// Unit of the indicator (scenario and stated-variogram plans; a study's
    /// fitted map knows it).
    pub unit: Option<String>,
    /// How many loggers to add (default 3).
    pub add: Option<usize>,
    /// `mean` (default) or `max` SE over the pots.
    pub objective: Option<String>,
    /// Candidate grid spacing, metres (default 0.5).
    pub spacing: Option<f64>,
    /// A candidates table (`id,x,y`, metres) instead of the grid.
    pub candidates: Option<String>,
    /// A stated variogram instead of the one fitted from the logs.
    pub variogram: Option<StatedVariogram>,
    /// The SE to lower: `map` (the map's calibrated window SE, the default
    /// with a fitted study where the map has one) or `study_period` (the
    /// kriging SE of the indicator's study-period values).
    pub basis: Option<String>,
    /// Output folder (default `plan-output`).
    pub output: Option<String>,
}

/// `[placement.variogram]`: the indicator's variogram stated by hand.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct StatedVariogram {
    /// Correlation family (`exponential`, `spherical`, `gaussian`, `matern_<nu>`).
    pub family: String,
    /// Nugget, indicator units squared.
    pub nugget: f64,
    /// Partial sill, indicator units squared.
    pub partial_sill: f64,
    /// Range parameter, metres.
    pub range: f64,
    /// `ordinary` (default), `universal` or `simple` kriging.
    pub method: Option<String>,
}

/// Command-line overrides of `[placement]`.
#[derive(Debug, Clone, Copy, Default)]
pub struct Overrides {
    /// `--add`.
    pub add: Option<usize>,
    /// `--objective`.
    pub objective: Option<Objective>,
}

/// Everything a placement needs, resolved from the plan.
struct Inputs {
    title: String,
    unit: Option<String>,
    pots: Points,
    loggers: Points,
    setting: Setting,
    compartment: Option<(f64, f64)>,
    openings: Vec<OpeningSegment>,
    /// How the variogram was obtained, in words.
    source: String,
    /// Openings used as external drift: (name, from, to, decay length L).
    drift: Option<(String, [f64; 2], [f64; 2], f64)>,
    /// What the SE is and how it was computed ([`SeBasis`]).
    basis: SeBasis,
}

/// The standard error a placement lowers at the pots.
enum SeBasis {
    /// The kriging SE of the placement's variogram.
    Kriging { how: String },
    /// The map's calibrated window SE, tabulated against the per-step
    /// kriging variance ([`WindowSe`]).
    Window(Box<WindowSe>),
}

impl SeBasis {
    fn stated() -> SeBasis {
        SeBasis::Kriging {
            how: "The SE is the kriging SE of the indicator at each pot under the stated variogram, with the kriging conventions of the map.".into(),
        }
    }

    fn pot_se(&self) -> &dyn PotSe {
        match self {
            SeBasis::Kriging { .. } => &KrigingSe,
            SeBasis::Window(w) => w.as_ref(),
        }
    }

    fn kind(&self) -> &'static str {
        match self {
            SeBasis::Kriging { .. } => "kriging SE",
            SeBasis::Window(_) => "window SE",
        }
    }

    fn how(&self) -> String {
        match self {
            SeBasis::Kriging { how } => how.clone(),
            SeBasis::Window(_) => "The SE is the map's window SE of the indicator at each pot (the SE in the map's tables): the pot's per-step kriging errors with the map's calibrated persistence over the pot's window. A new logger lowers every per-step kriging SE of a pot by the same ratio; the window SE is tabulated against that ratio and read by interpolation. The mapped climate is kept as it is: a new logger's readings cannot be known in advance.".into(),
        }
    }
}

/// The result of `potclim place`: the page's data and the files written.
#[derive(Debug)]
pub struct PlacementRun {
    /// What the page shows (also what `plan.csv` holds).
    pub page: PlacementPage,
    /// The files written, `plan.csv` first.
    pub files: Vec<PathBuf>,
}

fn stage_err(stage: Stage, e: impl Into<StageError>) -> PlanError {
    PipelineError::Stage { stage, source: e.into() }.into()
}

fn stated_setting(plan: &PlanFile, v: &StatedVariogram) -> Result<Setting, PlanError> {
    let family = Family::parse(&v.family).map_err(|e| {
        plan.invalid("placement.variogram.family", e, Some("exponential, spherical, gaussian or matern_1.5"))
    })?;
    let model = VariogramModel { family, nugget: v.nugget, partial_sill: v.partial_sill, range: v.range };
    if !(v.nugget >= 0.0 && v.partial_sill > 0.0 && v.range > 0.0 && model.sill().is_finite()) {
        return Err(plan.invalid(
            "placement.variogram",
            format!(
                "nugget {}, partial_sill {}, range {}: need >= 0, > 0, > 0",
                v.nugget, v.partial_sill, v.range
            ),
            Some("state the indicator's variogram in its own units squared and metres"),
        ));
    }
    let method = match v.method.as_deref().unwrap_or("ordinary") {
        "ordinary" => Interpolator::Ordinary,
        "universal" => Interpolator::Universal,
        "simple" => Interpolator::Simple { mean: 0.0 },
        other => {
            return Err(plan.invalid(
                "placement.variogram.method",
                format!("`{other}` is not a kriging method here"),
                Some("ordinary, universal or simple"),
            ));
        }
    };
    Ok(Setting { method, model, drift: None })
}

fn points_of(ids: Vec<String>, xy: Vec<(f64, f64)>) -> Points {
    Points { ids, x: xy.iter().map(|p| p.0).collect(), y: xy.iter().map(|p| p.1).collect() }
}

/// The base variable whose map carries an indicator's SE (temperature for
/// VPD and dew point, as the mapping stage does).
fn base_variable(v: crate::climate::config::Variable) -> &'static str {
    use crate::climate::config::Variable;
    match v {
        Variable::Humidity => "humidity",
        Variable::Light => "light",
        Variable::Temperature | Variable::Vpd | Variable::DewPoint => "temperature",
    }
}

fn from_study(plan: &PlanFile, sec: &PlacementSection, rel: &str) -> Result<Inputs, PlanError> {
    let study = Study::load(&plan.resolve(rel))?;
    let compartment = study.spec.compartment.map(|c| (c.length, c.width));
    let openings: Vec<OpeningSegment> = study
        .spec
        .openings
        .iter()
        .map(|o| OpeningSegment { name: o.name.clone(), from: o.from, to: o.to })
        .collect();
    let title = study.spec.study.title.clone();
    if let Some(v) = &sec.variogram {
        let setting = stated_setting(plan, v)?;
        let pots_t = crate::io::layout::load_pots(&study)?;
        let pots = crate::spatial::geometry::pot_points(&pots_t, study.spec.compartment)
            .map_err(|e| stage_err(Stage::Map, crate::spatial::stage::MapError::from(e)))?;
        let sensors_t = crate::io::layout::load_sensors(&study)?.ok_or_else(|| {
            plan.invalid(
                "placement.study",
                "the study has no [sensors] table",
                Some("add [sensors] with the loggers"),
            )
        })?;
        let loggers = crate::spatial::geometry::sensor_points(&sensors_t, study.spec.compartment)
            .map_err(|e| stage_err(Stage::Map, crate::spatial::stage::MapError::from(e)))?;
        return Ok(Inputs {
            title,
            unit: sec.unit.clone(),
            pots,
            loggers,
            setting,
            compartment,
            openings,
            source: format!("stated in {}", plan.path.display()),
            drift: None,
            basis: SeBasis::stated(),
        });
    }
    // The indicator's kriging set-up as the mapping stage fits it from the logs.
    let p = crate::pipeline::Plan::from_study(&study).map_err(PipelineError::Plan)?;
    let ing = crate::io::ingest::ingest(&study).map_err(|e| stage_err(Stage::Ingest, e))?;
    let readings_path = study.output_dir().join(crate::io::ingest::READINGS_FILE);
    let climate = crate::climate::stage::compute(&study, p.climate.clone(), &ing.readings, &readings_path)
        .map_err(|e| stage_err(Stage::Climate, e))?;
    let map = crate::spatial::stage::compute(&study, &climate).map_err(|e| stage_err(Stage::Map, e))?;
    let inds = &climate.config.indicators;
    let Some(i) = inds.iter().position(|ind| ind.name == sec.indicator) else {
        let names: Vec<&str> = inds.iter().map(|ind| ind.name.as_str()).collect();
        return Err(plan.invalid(
            "placement.indicator",
            format!("`{}` is not an indicator of the study", sec.indicator),
            Some(&format!("one of: {}", names.join(", "))),
        ));
    };
    let var = base_variable(inds[i].variable);
    let Some(vm) = map.variables.iter().find(|v| v.name == var) else {
        return Err(plan.invalid("placement.indicator", format!("`{var}` was not mapped"), None));
    };
    if !vm.spec.method.is_kriging() {
        return Err(plan.invalid(
            "placement.study",
            format!("the map of {var} uses `{}`, which has no standard error", vm.spec.method.name()),
            Some("set [mapping] method to a kriging method, or state [placement.variogram]"),
        ));
    }
    let basis = sec.basis.as_deref().unwrap_or("map");
    if !matches!(basis, "map" | "study_period") {
        return Err(plan.invalid("placement.basis", format!("`{basis}`"), Some("map or study_period")));
    }
    // The opening the map uses as external drift, with its decay length.
    let mut drift = None;
    if let Some(d) = &vm.spec.drift {
        let length =
            vm.cv.iter().find_map(|c| c.drift.as_ref().filter(|(n, _)| *n == d.name).map(|(_, l)| *l));
        let opening = study.spec.openings.iter().find(|o| o.name == d.name);
        if let (Some(l), Some(o)) = (length, opening) {
            drift = Some((o.name.clone(), o.from, o.to, l));
        }
    }
    let drift_at = |idx: &[usize]| {
        vm.spec.drift.as_ref().filter(|_| drift.is_some()).map(|d| DriftValues {
            loggers: idx.iter().map(|&k| d.at_sensors[k]).collect(),
            pots: d.at_targets.clone(),
            candidates: Vec::new(),
        })
    };
    let method =
        if vm.spec.drift.is_some() && drift.is_none() { Interpolator::Ordinary } else { vm.spec.method };
    let unit = Some(inds[i].unit().to_string());
    let how = match &drift {
        Some((name, _, _, l)) => format!(
            "{} kriging with the opening `{name}` as drift (decay length {} m)",
            method.name(),
            crate::report::html::sig(*l, 3)
        ),
        None => format!("{} kriging", method.name()),
    };
    // The map's window SE, where the map has one for this indicator (not
    // for pots that move: their SE gathers several positions).
    let nodes = crate::spatial::window_se::normal_nodes(crate::spatial::window_se::NODES);
    let window =
        (basis == "map" && map.moves.is_none()).then(|| map_window_se(&climate, &map, i, &nodes)).flatten();
    if let Some(at) = window {
        let all: Vec<usize> = (0..map.sensor_points.len()).collect();
        let setting = Setting { method, model: vm.spec.model, drift: drift_at(&all) };
        let noise = vm.noise.map_or(0.0, |m| m.variance);
        // The largest ratio of per-step SEs any single removal gives a pot.
        let (current, without) = removal_variances(&setting, &map.sensor_points, &map.pot_points)?;
        let reach: Vec<f64> = (0..current.len())
            .map(|j| {
                let now = current[j] - noise;
                without
                    .iter()
                    .flatten()
                    .map(|w| if now > 0.0 { ((w[j] - noise).max(0.0) / now).sqrt() } else { 0.0 })
                    .fold(1.0, f64::max)
            })
            .collect();
        let table = WindowSe::tabulate(current, noise, &reach, at).map_err(|j| {
            plan.invalid(
                "placement.basis",
                format!(
                    "the map's window SE of `{}` could not be computed at pot `{}`",
                    sec.indicator, map.pots[j]
                ),
                Some("use `basis = \"study_period\"`"),
            )
        })?;
        let c = map.window_se[i].expect("map_window_se needs a calibration");
        return Ok(Inputs {
            title,
            unit,
            pots: map.pot_points.clone(),
            loggers: map.sensor_points.clone(),
            setting,
            compartment,
            openings,
            source: format!(
                "fitted by the mapping stage from the logs of {} ({how}; the per-step variogram of {var}; the window SEs' calibration: persistent share {}, step scale {}, measurement-error variance {})",
                study.path.display(),
                crate::report::html::sig(c.share, 3),
                crate::report::html::sig(c.step_scale, 3),
                crate::report::html::sig(noise, 3)
            ),
            drift,
            basis: SeBasis::Window(Box::new(table)),
        });
    }
    let ok: Vec<usize> =
        (0..map.sensor_points.len()).filter(|&k| climate.study[i][k].value.is_some()).collect();
    let loggers = map.sensor_points.subset(&ok);
    let vals: Vec<f64> = ok.iter().map(|&k| climate.study[i][k].value.unwrap_or(f64::NAN)).collect();
    let drift_values = drift_at(&ok);
    let model = match method {
        Interpolator::Simple { .. } => vm.spec.model,
        _ => crate::spatial::kriging::rescale_to(
            &vm.spec.model,
            &loggers,
            &vals,
            method,
            drift_values.as_ref().map(|d| d.loggers.as_slice()),
        )?,
    };
    let why = if basis == "map" {
        " The map has no window SE for this indicator (it combines two variables, the pots move, it was kriged directly with its own variogram, or its method has no SE), so the kriging SE of its study-period values is used."
    } else {
        ""
    };
    Ok(Inputs {
        title,
        unit,
        pots: map.pot_points.clone(),
        loggers,
        setting: Setting { method, model, drift: drift_values },
        compartment,
        openings,
        source: format!(
            "fitted by the mapping stage from the logs of {} ({how}; variogram shape of {var}, sill of the indicator's values at the loggers)",
            study.path.display()
        ),
        drift,
        basis: SeBasis::Kriging {
            how: format!(
                "The SE is the kriging SE of the indicator's study-period values at each pot, with the kriging conventions of the map.{why}"
            ),
        },
    })
}

fn from_scenario(plan: &PlanFile, sec: &PlacementSection, rel: &str) -> Result<Inputs, PlanError> {
    let sc = crate::simulate::Scenario::load(&plan.resolve(rel))?;
    let Some(v) = &sec.variogram else {
        return Err(plan.invalid(
            "placement.variogram",
            "a scenario has no logs to fit the indicator's variogram from",
            Some("state [placement.variogram] (family, nugget, partial_sill, range)"),
        ));
    };
    let setting = stated_setting(plan, v)?;
    let pots = crate::simulate::design(&sc, sc.spec.scenario.seed.unwrap_or(1));
    let pots = points_of(
        pots.iter().map(|p| p.id.clone()).collect(),
        pots.iter().map(|p| (sc.positions[p.position].x, sc.positions[p.position].y)).collect(),
    );
    let loggers = points_of(
        sc.spec.logger.iter().map(|l| l.id.clone()).collect(),
        sc.spec.logger.iter().map(|l| (l.x, l.y)).collect(),
    );
    Ok(Inputs {
        title: sc.spec.scenario.title.clone(),
        unit: sec.unit.clone(),
        pots,
        loggers,
        setting,
        compartment: Some((sc.spec.compartment.length, sc.spec.compartment.width)),
        openings: sc
            .spec
            .opening
            .iter()
            .map(|o| OpeningSegment { name: o.name.clone(), from: o.from, to: o.to })
            .collect(),
        source: format!("stated in {}", plan.path.display()),
        drift: None,
        basis: SeBasis::stated(),
    })
}

fn candidates(
    plan: &PlanFile,
    sec: &PlacementSection,
    inputs: &Inputs,
) -> Result<(Points, String), PlanError> {
    if let Some(rel) = &sec.candidates {
        let path = plan.resolve(rel);
        let t = crate::io::table::Table::read(&path, b',')?;
        let ids: Vec<String> = t.text("id")?.into_iter().map(str::to_string).collect();
        let (x, y) = (t.numbers("x")?, t.numbers("y")?);
        let origin = Origin { path: Some(path.clone()), lines: Some(t.lines.clone()) };
        let pts = Points::new("candidate", ids, x, y, inputs.compartment, &origin)?;
        return Ok((pts, format!("{} positions from {}", t.len(), path.display())));
    }
    let spacing = sec.spacing.unwrap_or(0.5);
    let Some((l, w)) = inputs.compartment else {
        return Err(plan.invalid(
            "placement.candidates",
            "no candidates table and no compartment to lay a grid over",
            Some("give `candidates = \"file.csv\"` (id,x,y) or a [compartment] in the study"),
        ));
    };
    if !(spacing.is_finite() && spacing > 0.0) {
        return Err(plan.invalid(
            "placement.spacing",
            format!("{spacing} is not a spacing in metres"),
            Some("e.g. 0.5"),
        ));
    }
    let g = candidate_grid(l, w, spacing)?;
    let n = g.len();
    Ok((g, format!("a grid of {n} positions every {spacing} m over the compartment")))
}

/// Answer `[placement]` of `plan` and write `plan.csv`, `plan_pots.csv` and
/// `plan.html` into its output folder (atomically).
pub fn run(plan: &PlanFile, over: Overrides) -> Result<PlacementRun, PlanError> {
    let t0 = Instant::now();
    let Some(sec) = &plan.placement else {
        return Err(plan.invalid("placement", "the plan file has no [placement] section", None));
    };
    let objective = match (over.objective, sec.objective.as_deref()) {
        (Some(o), _) => o,
        (None, None) => Objective::MeanSe,
        (None, Some(s)) => Objective::parse(s)
            .ok_or_else(|| plan.invalid("placement.objective", format!("`{s}`"), Some("mean or max")))?,
    };
    let add = over.add.or(sec.add).unwrap_or(3);
    let mut inputs = match (&sec.study, &sec.scenario) {
        (Some(s), None) => from_study(plan, sec, s)?,
        (None, Some(s)) => from_scenario(plan, sec, s)?,
        _ => {
            return Err(plan.invalid(
                "placement",
                "give exactly one of `study` and `scenario`",
                Some("`study` for a study with a pot and a sensor table, `scenario` for a layout on paper"),
            ));
        }
    };
    let (cands, cands_from) = candidates(plan, sec, &inputs)?;
    if let (Some(d), Some((_, from, to, l))) = (inputs.setting.drift.as_mut(), &inputs.drift) {
        d.candidates = crate::spatial::drift::decay(&distances_to_opening(&cands, *from, *to), *l);
    }
    let res =
        place(&inputs.setting, &inputs.loggers, &inputs.pots, &cands, add, objective, inputs.basis.pot_se())?;
    let mean = |se: &[f64]| se.iter().sum::<f64>() / se.len().max(1) as f64;
    let max = |se: &[f64]| se.iter().copied().fold(0.0, f64::max);
    let score = |(m, x): (f64, f64)| if objective == Objective::MeanSe { m } else { x };
    let steps: Vec<PlacementStep> = res
        .added
        .iter()
        .map(|a| PlacementStep {
            id: cands.ids[a.candidate].clone(),
            x: cands.x[a.candidate],
            y: cands.y[a.candidate],
            mean_se: Some(a.mean_se),
            max_se: Some(a.max_se),
        })
        .collect();
    let removals: Vec<PlacementStep> = res
        .removals
        .iter()
        .map(|r| PlacementStep {
            id: inputs.loggers.ids[r.logger].clone(),
            x: inputs.loggers.x[r.logger],
            y: inputs.loggers.y[r.logger],
            mean_se: r.se.map(|s| s.0),
            max_se: r.se.map(|s| s.1),
        })
        .collect();
    let least_cost = res
        .removals
        .iter()
        .filter_map(|r| r.se.map(|s| (r.logger, score(s))))
        .min_by(|a, b| a.1.total_cmp(&b.1).then(a.0.cmp(&b.0)))
        .map(|(i, _)| inputs.loggers.ids[i].clone());
    let m = &inputs.setting.model;
    let page = PlacementPage {
        title: inputs.title.clone(),
        indicator: sec.indicator.clone(),
        unit: inputs.unit.clone(),
        objective: objective.name().into(),
        method: inputs.setting.method.name().into(),
        variogram: format!(
            "{}, nugget {}, partial sill {}, range {} m",
            m.family.name(),
            crate::report::html::sig(m.nugget, 4),
            crate::report::html::sig(m.partial_sill, 4),
            crate::report::html::sig(m.range, 4)
        ),
        variogram_source: inputs.source.clone(),
        candidates: cands_from,
        compartment: inputs.compartment,
        openings: std::mem::take(&mut inputs.openings),
        pots: (0..inputs.pots.len())
            .map(|t| (inputs.pots.ids[t].clone(), inputs.pots.x[t], inputs.pots.y[t]))
            .collect(),
        loggers: (0..inputs.loggers.len())
            .map(|t| (inputs.loggers.ids[t].clone(), inputs.loggers.x[t], inputs.loggers.y[t]))
            .collect(),
        se_kind: inputs.basis.kind().into(),
        se_how: inputs.basis.how(),
        se_before: res.before.clone(),
        se_after: res.after.clone(),
        mean_se_before: mean(&res.before),
        max_se_before: max(&res.before),
        added: steps,
        removals,
        least_cost,
        seconds: t0.elapsed().as_secs_f64(),
    };
    let out = plan.resolve(sec.output.as_deref().unwrap_or("plan-output"));
    let mut w = StageWriter::new(&out, "place")?;
    w.write(PLAN_FILE, &plan_csv(&page))?;
    w.write(PLAN_POTS_FILE, &plan_pots_csv(&page))?;
    w.write(PLAN_PAGE, crate::report::plan_page::render_placement(&page).as_bytes())?;
    let files = w.commit()?;
    Ok(PlacementRun { page, files })
}

/// `plan.csv`: one row per action (`docs/outputs.md`): `now` (the current
/// loggers), `add` (each new logger in the order chosen, with the SEs once it
/// and those before it are added) and `remove` (each current logger taken away
/// alone). Changes are against the row before for `add`, against `now` for
/// `remove`.
pub fn plan_csv(p: &PlacementPage) -> Vec<u8> {
    let mut t = CsvTable::new([
        "action",
        "order",
        "logger",
        "x_m",
        "y_m",
        "mean_se",
        "max_se",
        "change_mean_se",
        "change_max_se",
        "least_cost",
    ]);
    t.row([
        "now".to_string(),
        "0".into(),
        String::new(),
        String::new(),
        String::new(),
        number(p.mean_se_before),
        number(p.max_se_before),
        String::new(),
        String::new(),
        String::new(),
    ]);
    let (mut pm, mut px) = (p.mean_se_before, p.max_se_before);
    for (k, s) in p.added.iter().enumerate() {
        let (m, x) = (s.mean_se.unwrap_or(f64::NAN), s.max_se.unwrap_or(f64::NAN));
        t.row([
            "add".to_string(),
            (k + 1).to_string(),
            s.id.clone(),
            number(s.x),
            number(s.y),
            number(m),
            number(x),
            number(m - pm),
            number(x - px),
            String::new(),
        ]);
        (pm, px) = (m, x);
    }
    for s in &p.removals {
        let cells = match (s.mean_se, s.max_se) {
            (Some(m), Some(x)) => {
                [number(m), number(x), number(m - p.mean_se_before), number(x - p.max_se_before)]
            }
            _ => Default::default(),
        };
        let [a, b, c, d] = cells;
        t.row([
            "remove".to_string(),
            String::new(),
            s.id.clone(),
            number(s.x),
            number(s.y),
            a,
            b,
            c,
            d,
            (p.least_cost.as_deref() == Some(s.id.as_str())).to_string(),
        ]);
    }
    t.into_bytes()
}

/// `plan_pots.csv`: `pot,x_m,y_m,se_now,se_after` (kriging SE of the
/// indicator at each pot with the current loggers, and with the added ones).
pub fn plan_pots_csv(p: &PlacementPage) -> Vec<u8> {
    let mut t = CsvTable::new(["pot", "x_m", "y_m", "se_now", "se_after"]);
    for (k, (id, x, y)) in p.pots.iter().enumerate() {
        t.row([id.clone(), number(*x), number(*y), number(p.se_before[k]), number(p.se_after[k])]);
    }
    t.into_bytes()
}
