//! Repeated scorings, first stage: the comparison grid and verdict of
//! `model::verdict`, run on each interval's growth (`io::scores`), with every
//! indicator recomputed over that interval for each pot from the pot's own
//! mapped series (`climate::intervals`); then the second stage
//! (`model::two_stage`) across intervals, per trait and driver.
//!
//! Per interval and trait, the analysed data are built exactly as the main
//! verdict builds them (`model::data::assemble` on the pot table with the
//! growth as the trait and the interval's indicator values as mapped drivers,
//! then the openings' distances), so factors, blocks, left-out pots and the
//! refusals are the same. The differences, stated in `docs/scores.md`:
//! a climate driver constant over the interval's pots (no cold hour in a warm
//! week) is left out of that interval with a note instead of stopping the
//! run; the mapped drivers' uncertainty is not propagated (plug-in SEs; the
//! main verdict's imputations are not repeated per interval); and an interval
//! whose fit fails is reported with the error, the others still run.
//!
//! Cost: one comparison grid per interval and trait (see
//! `model::verdict::analyse`), plus the daily indicator values of every pot
//! once per indicator (as the mapping stage).

use super::data::{ModelSpec, PotCovariates, add_opening_drivers, assemble};
use super::two_stage::{Combined, combine};
use super::verdict::{DISTANCE_PREFIX, VerdictOptions, analyse};
use crate::climate::intervals::{clip, window_values};
use crate::climate::{ClimateRun, LocationSeries, calendar::local_time};
use crate::io::layout::Pots;
use crate::io::scores::{Interval, Intervals, Scores};
use crate::io::study::Study;
use crate::spatial::stage::MapRun;
use chrono::NaiveDateTime;
use serde::{Deserialize, Serialize};
use std::ops::Range;
use std::path::Path;

/// `scores_growth.csv`: per trait, interval and pot, the growth and the indicators.
pub const GROWTH_FILE: &str = "scores_growth.csv";
/// `scores_intervals.csv`: per trait and interval, the verdict.
pub const INTERVALS_FILE: &str = "scores_intervals.csv";
/// `scores_effects.csv`: per trait, interval and driver, the effect with its CI.
pub const EFFECTS_FILE: &str = "scores_effects.csv";
/// `scores_combined.csv`: per trait and driver, the second stage.
pub const COMBINED_FILE: &str = "scores_combined.csv";

/// One pot's growth and indicators over one interval.
#[derive(Clone, Debug, Serialize)]
pub struct GrowthRow {
    /// Trait column.
    pub trait_name: String,
    /// Interval number (1-based).
    pub interval: usize,
    /// Pot id.
    pub pot: String,
    /// The pot's scoring that opens the interval (local time).
    pub start: NaiveDateTime,
    /// The pot's scoring that closes it.
    pub end: NaiveDateTime,
    /// Local days whose indicators count (noon inside the interval and the pot's window).
    pub days: usize,
    /// Growth (trait units, or dimensionless for `log_ratio`); `None`: an end is missing.
    pub growth: Option<f64>,
    /// Each indicator over the interval, in `[[indicator]]` order (`None`: no valid day).
    pub indicators: Vec<Option<f64>>,
}

/// The verdict of one interval and trait.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct IntervalRow {
    /// Trait column.
    pub trait_name: String,
    /// Interval number.
    pub interval: usize,
    /// Earliest scoring opening the interval.
    pub from: NaiveDateTime,
    /// Latest scoring closing it.
    pub to: NaiveDateTime,
    /// Pots analysed.
    pub pots: usize,
    /// Pots of the pot table not analysed (unscored, or a missing growth).
    pub left_out: usize,
    /// The verdict word (`None` when the interval could not be analysed).
    pub verdict: Option<String>,
    /// The chosen model.
    pub best_model: Option<String>,
    /// Range of the chosen model's correlation, metres (ML).
    pub range: Option<f64>,
    /// Its nugget share.
    pub nugget_share: Option<f64>,
    /// The verdict's reason, or why the interval was not analysed.
    pub reason: String,
    /// Climate drivers left out of this interval because constant over its pots.
    pub constant_drivers: Vec<String>,
}

/// One driver's effect in one interval (the verdict's driver ranking).
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct EffectRow {
    /// Trait column.
    pub trait_name: String,
    /// Interval number.
    pub interval: usize,
    /// Earliest scoring opening the interval.
    pub from: NaiveDateTime,
    /// Latest scoring closing it.
    pub to: NaiveDateTime,
    /// Driver.
    pub driver: String,
    /// Effect per unit of the driver (growth units per driver unit).
    pub estimate: f64,
    /// Plug-in SE.
    pub se: f64,
    /// 95 % CI (t).
    pub ci_low: f64,
    /// Upper end.
    pub ci_high: f64,
    /// Two-sided p.
    pub p_value: f64,
    /// The model the estimate comes from.
    pub source_model: String,
}

/// The second stage for one trait and driver.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct CombinedRow {
    /// Trait column.
    pub trait_name: String,
    /// Driver.
    pub driver: String,
    /// The combination and the test.
    pub combined: Combined,
}

/// Mean of each indicator over the sensors, per local day: the
/// compartment's daily climate the report draws the effects against.
#[derive(Clone, Debug, Serialize)]
pub struct DailyClimate {
    /// Indicator name.
    pub name: String,
    /// Local days.
    pub days: Vec<chrono::NaiveDate>,
    /// Mean over sensors with a value (`None`: no sensor has one).
    pub values: Vec<Option<f64>>,
}

/// Everything the repeated-scorings analysis computed.
#[derive(Clone, Debug, Serialize)]
pub struct ScoresRun {
    /// Trait columns.
    pub traits: Vec<String>,
    /// `difference` or `log_ratio`.
    pub growth: String,
    /// `scorings`, `day` or `week`.
    pub interval_rule: String,
    /// Indicator names, in order of [`GrowthRow::indicators`].
    pub indicators: Vec<String>,
    /// Per trait, interval and pot.
    pub growth_rows: Vec<GrowthRow>,
    /// Per trait and interval.
    pub intervals: Vec<IntervalRow>,
    /// Per trait, interval and driver.
    pub effects: Vec<EffectRow>,
    /// Per trait and driver.
    pub combined: Vec<CombinedRow>,
    /// Daily climate of the compartment.
    pub daily_climate: Vec<DailyClimate>,
    /// Pot positions (id, x, y), pot-table order, for maps.
    pub positions: Vec<(String, f64, f64)>,
    /// Notes: missing cells, superseded scorings, intervals not analysed.
    pub notes: Vec<String>,
}

/// Each pot's growth window as calendar days (the mapping stage's rule).
fn pot_windows(pots: &Pots, climate: &ClimateRun) -> Vec<Range<usize>> {
    let cal = &climate.calendar;
    let start = local_time(cal.timezone, cal.start_ms);
    let end = local_time(cal.timezone, cal.start_ms + cal.step_ms * cal.n_steps as i64);
    (0..pots.ids.len())
        .map(|j| {
            let s = pots.start.as_ref().map_or(start, |v| v[j]);
            let e = pots.end.as_ref().map_or(end, |v| v[j]);
            cal.window_days(s, e)
        })
        .collect()
}

/// Per pot (pot-table order) and interval, the days that count (the
/// interval's days within the pot's own window); `None` when the pot was
/// not scored over the interval.
fn interval_spans(
    climate: &ClimateRun,
    pots: &Pots,
    intervals: &[Interval],
) -> Vec<Vec<Option<Range<usize>>>> {
    let cal = &climate.calendar;
    let own = pot_windows(pots, climate);
    (0..pots.ids.len())
        .map(|p| {
            intervals
                .iter()
                .map(|iv| {
                    let s = iv.spans.iter().find(|s| s.pot == p)?;
                    Some(clip(&cal.window_days(s.start, s.end), &own[p]))
                })
                .collect()
        })
        .collect()
}

/// For pots that move, each interval's paths: `shares[k][p]`, pot `p`'s time
/// shares of the positions over the days of interval `k` that count (the
/// rows of `W` in `W R W'` for that interval's fits, docs/spatial.md);
/// `None` when no pot moves.
#[allow(clippy::type_complexity)]
pub fn interval_shares(
    climate: &ClimateRun,
    map: &MapRun,
    pots: &Pots,
    intervals: &[Interval],
) -> Option<Vec<Vec<Vec<(usize, f64)>>>> {
    let moved = map.moves.as_ref()?;
    let cal = &climate.calendar;
    let spans = interval_spans(climate, pots, intervals);
    Some(
        (0..intervals.len())
            .map(|k| {
                (0..pots.ids.len())
                    .map(|p| {
                        let days = spans[p][k].clone().unwrap_or(0..0);
                        let steps = crate::spatial::paths::window_steps(cal, days);
                        moved.paths.shares(p, steps, cal.n_steps)
                    })
                    .collect()
            })
            .collect(),
    )
}

/// Every indicator at every pot over every interval:
/// `values[i][k][p]` for indicator `i`, interval `k`, pot `p` (pot-table order),
/// with the days counted, `days[k][p]`. Pots not scored in an interval get `None`.
#[allow(clippy::type_complexity)]
pub fn interval_indicators(
    climate: &ClimateRun,
    map: &MapRun,
    pots: &Pots,
    intervals: &[Interval],
) -> (Vec<Vec<Vec<Option<f64>>>>, Vec<Vec<usize>>) {
    let cal = &climate.calendar;
    let n_steps = cal.n_steps;
    let n_pots = map.pots.len();
    let spans = interval_spans(climate, pots, intervals);
    let days = (0..intervals.len())
        .map(|k| (0..n_pots).map(|p| spans[p][k].as_ref().map_or(0, |r| r.len())).collect())
        .collect();
    let nan = vec![f64::NAN; n_steps];
    let get = |name: &str| map.variables.iter().find(|v| v.name == name);
    let min_cov = climate.config.spec.min_coverage;
    let mut values = vec![vec![vec![None; n_pots]; intervals.len()]; climate.config.indicators.len()];
    for p in 0..n_pots {
        let windows: Vec<Range<usize>> = spans[p].iter().map(|r| r.clone().unwrap_or(0..0)).collect();
        if spans[p].iter().all(Option::is_none) {
            continue;
        }
        // DMatrix storage is column-major: pot p's series is one contiguous slice.
        let col = |name: &str| -> &[f64] {
            match get(name) {
                Some(v) => &v.mapped.as_slice()[p * n_steps..(p + 1) * n_steps],
                None => &nan,
            }
        };
        let series = LocationSeries {
            temperature: col("temperature"),
            humidity: col("humidity"),
            light: col("light"),
        };
        let t_se = get("temperature")
            .and_then(|v| v.mapped_se.as_ref())
            .map(|m| &m.as_slice()[p * n_steps..(p + 1) * n_steps]);
        for (i, ind) in climate.config.indicators.iter().enumerate() {
            let w = window_values(ind, cal, &series, t_se, min_cov, &windows);
            for k in 0..intervals.len() {
                if spans[p][k].is_some() {
                    values[i][k][p] = w[k].value;
                }
            }
        }
    }
    (values, days)
}

/// The compartment's daily climate: each indicator's daily value averaged
/// over the sensors that have one.
pub fn daily_climate(climate: &ClimateRun) -> Vec<DailyClimate> {
    climate
        .config
        .indicators
        .iter()
        .enumerate()
        .map(|(i, ind)| {
            let values = (0..climate.calendar.days.len())
                .map(|d| {
                    let v: Vec<f64> =
                        climate.daily[i].iter().filter_map(|s| s.get(d).and_then(|x| x.value)).collect();
                    (!v.is_empty()).then(|| v.iter().sum::<f64>() / v.len() as f64)
                })
                .collect();
            DailyClimate { name: ind.name.clone(), days: climate.calendar.days.clone(), values }
        })
        .collect()
}

/// Largest minus smallest finite value (0 when there are none).
fn spread(values: impl Iterator<Item = f64>) -> f64 {
    let (lo, hi) = values
        .filter(|v| v.is_finite())
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), x| (a.min(x), b.max(x)));
    if hi >= lo { hi - lo } else { 0.0 }
}

/// A column name not among `headers`: `base`, else `base_2`, ...
fn free_name(base: &str, headers: &[String]) -> String {
    let mut name = base.to_string();
    let mut k = 2;
    while headers.contains(&name) {
        name = format!("{base}_{k}");
        k += 1;
    }
    name
}

/// Run the first and second stages (see the module documentation).
/// `spec` and `opts` are the study's `[model]` and `[verdict]`.
pub fn analyse_scores(
    study: &Study,
    scores: &Scores,
    pots: &Pots,
    spec: &ModelSpec,
    opts: &VerdictOptions,
    climate: &ClimateRun,
    map: &MapRun,
) -> ScoresRun {
    let Intervals { intervals, superseded } = scores.intervals(&pots.ids);
    let mut notes = Vec::new();
    for m in &scores.missing {
        if !m.lines.is_empty() {
            let shown: Vec<String> = m.lines.iter().take(10).map(|l| l.to_string()).collect();
            notes.push(format!(
                "{}: {} missing value(s) in `{}` (line(s) {}{}); intervals starting or ending on them leave the pot out",
                scores.path.display(),
                m.lines.len(),
                m.trait_name,
                shown.join(", "),
                if m.lines.len() > 10 { ", ..." } else { "" }
            ));
        }
    }
    if !superseded.is_empty() {
        notes.push(format!(
            "{} scoring(s) replaced by a later scoring of the same pot in the same {} (first on line {})",
            superseded.len(),
            scores.rule.name(),
            superseded[0]
        ));
    }
    if intervals.is_empty() {
        notes.push(format!(
            "{} distinct scoring time(s): no interval between two scorings, nothing to analyse per interval",
            scores.n_times()
        ));
    }
    let (ind_values, days) = interval_indicators(climate, map, pots, &intervals);
    let shares = interval_shares(climate, map, pots, &intervals);
    let ind_names: Vec<String> = climate.config.indicators.iter().map(|i| i.name.clone()).collect();
    // Each indicator's largest spread over the pots of one interval: the
    // scale against which an interval's spread counts as numerically nil.
    let spreads: Vec<(String, f64)> = ind_names
        .iter()
        .enumerate()
        .map(|(i, n)| {
            let widest =
                ind_values[i].iter().map(|k| spread(k.iter().flatten().copied())).fold(0.0, f64::max);
            (n.clone(), widest)
        })
        .collect();
    let mut growth_rows = Vec::new();
    let mut rows = Vec::new();
    let mut effects = Vec::new();
    let mut combined = Vec::new();
    for (t, trait_name) in scores.traits.iter().enumerate() {
        for (k, iv) in intervals.iter().enumerate() {
            let mut growth: Vec<Option<f64>> = vec![None; pots.ids.len()];
            for s in &iv.spans {
                growth[s.pot] = s.growth[t];
                growth_rows.push(GrowthRow {
                    trait_name: trait_name.clone(),
                    interval: iv.number,
                    pot: pots.ids[s.pot].clone(),
                    start: s.start,
                    end: s.end,
                    days: days[k][s.pot],
                    growth: s.growth[t],
                    indicators: (0..ind_names.len()).map(|i| ind_values[i][k][s.pot]).collect(),
                });
            }
            let cols: Vec<(String, Vec<Option<f64>>)> =
                (0..ind_names.len()).map(|i| (ind_names[i].clone(), ind_values[i][k].clone())).collect();
            let paths = shares.as_ref().zip(map.moves.as_ref()).map(|(w, m)| {
                let pos = &m.paths.positions;
                (pos.x.as_slice(), pos.y.as_slice(), w[k].as_slice())
            });
            let (row, eff) =
                one_interval(study, pots, spec, opts, trait_name, iv, &growth, cols, &spreads, paths);
            rows.push(row);
            effects.extend(eff);
        }
        let mut drivers: Vec<String> = Vec::new();
        for e in effects.iter().filter(|e| &e.trait_name == trait_name) {
            if !drivers.contains(&e.driver) {
                drivers.push(e.driver.clone());
            }
        }
        for d in drivers {
            let pairs: Vec<(f64, f64)> = effects
                .iter()
                .filter(|e| &e.trait_name == trait_name && e.driver == d)
                .map(|e| (e.estimate, e.se))
                .collect();
            if let Some(c) = combine(&pairs) {
                combined.push(CombinedRow { trait_name: trait_name.clone(), driver: d, combined: c });
            }
        }
    }
    ScoresRun {
        traits: scores.traits.clone(),
        growth: scores.growth.name().into(),
        interval_rule: scores.rule.name().into(),
        indicators: ind_names,
        growth_rows,
        intervals: rows,
        effects,
        combined,
        daily_climate: daily_climate(climate),
        positions: (0..pots.ids.len()).map(|p| (pots.ids[p].clone(), pots.x[p], pots.y[p])).collect(),
        notes,
    }
}

/// Pots that move over one interval: the positions' x and y, and each pot's
/// time shares of them over the interval (pot-table order).
type IntervalPaths<'a> = (&'a [f64], &'a [f64], &'a [Vec<(usize, f64)>]);

/// The comparison grid on one interval's growth.
#[allow(clippy::too_many_arguments)]
fn one_interval(
    study: &Study,
    pots: &Pots,
    spec: &ModelSpec,
    opts: &VerdictOptions,
    trait_name: &str,
    iv: &Interval,
    growth: &[Option<f64>],
    cols: Vec<(String, Vec<Option<f64>>)>,
    spreads: &[(String, f64)],
    paths: Option<IntervalPaths>,
) -> (IntervalRow, Vec<EffectRow>) {
    let analysed: Vec<usize> = (0..growth.len()).filter(|&p| growth[p].is_some()).collect();
    let mut row = IntervalRow {
        trait_name: trait_name.into(),
        interval: iv.number,
        from: iv.from,
        to: iv.to,
        pots: analysed.len(),
        left_out: growth.len() - analysed.len(),
        verdict: None,
        best_model: None,
        range: None,
        nugget_share: None,
        reason: String::new(),
        constant_drivers: Vec::new(),
    };
    // The pot table with the growth as its trait column.
    let mut table = pots.table.clone();
    let gname = free_name(&format!("{trait_name}_growth"), &table.headers);
    table.headers.push(gname.clone());
    for (p, r) in table.rows.iter_mut().enumerate() {
        r.push(growth[p].map_or_else(|| "NA".to_string(), |g| g.to_string()));
    }
    let ipots = Pots { table, ..pots.clone() };
    // Climate drivers constant over the analysed pots are left out here.
    let mut ispec = ModelSpec { trait_column: gname, ..spec.clone() };
    ispec.drivers.retain(|d| {
        let Some((_, v)) = cols.iter().find(|(n, _)| n == d) else { return true };
        let vals: Vec<f64> = analysed.iter().filter_map(|&p| v[p]).collect();
        // Constant: equal to 1e-12 (relative), or a spread below one
        // millionth of the driver's widest spread over the intervals
        // (mapped cold hours of 1e-9 h in a warm week: numerically nil,
        // and a singular design if kept).
        let widest = spreads.iter().find(|(n, _)| n == d).map_or(0.0, |s| s.1);
        let constant = vals.len() == analysed.len()
            && (vals.iter().all(|x| (x - vals[0]).abs() <= 1e-12 * vals[0].abs().max(1.0))
                || spread(vals.iter().copied()) <= 1e-6 * widest);
        if constant {
            row.constant_drivers.push(d.clone());
        }
        !constant
    });
    let cov = PotCovariates {
        path: Path::new(GROWTH_FILE).to_path_buf(),
        pots: pots.ids.clone(),
        lines: None,
        columns: cols,
    };
    let result = assemble(&ipots, &ispec, Some(&cov), &cov.path).and_then(|mut data| {
        if let Some((px, py, w)) = paths {
            // Pots that move: the residual correlation over this interval's paths.
            let index: std::collections::HashMap<&str, usize> =
                pots.ids.iter().enumerate().map(|(k, id)| (id.as_str(), k)).collect();
            data.paths = Some(crate::spatial::averaged::PathShares {
                px: px.to_vec(),
                py: py.to_vec(),
                shares: data.pots.iter().map(|id| w[index[id.as_str()]].clone()).collect(),
            });
        }
        add_opening_drivers(study, &mut ispec, &mut data);
        data.drivers.retain(|(d, _)| !d.starts_with(DISTANCE_PREFIX) || ispec.drivers.contains(d));
        analyse(&data, &ispec, opts)
    });
    let mut effects = Vec::new();
    match result {
        Ok(r) => {
            let chosen = r.models.iter().find(|m| m.name == r.best_model);
            row.range = chosen.and_then(|m| m.range);
            row.nugget_share = chosen.and_then(|m| m.nugget_share);
            row.verdict = Some(r.verdict.clone());
            row.best_model = Some(r.best_model.clone());
            row.reason = r.reason.clone();
            for d in &r.drivers {
                effects.push(EffectRow {
                    trait_name: trait_name.into(),
                    interval: iv.number,
                    from: iv.from,
                    to: iv.to,
                    driver: d.name.clone(),
                    estimate: d.estimate,
                    se: d.se,
                    ci_low: d.ci_low,
                    ci_high: d.ci_high,
                    p_value: d.p_value,
                    source_model: d.source_model.clone(),
                });
            }
        }
        Err(e) => row.reason = format!("not analysed: {e}"),
    }
    if !row.constant_drivers.is_empty() {
        let list = row.constant_drivers.iter().map(|d| format!("`{d}`")).collect::<Vec<_>>().join(", ");
        let reason = row.reason.trim_end_matches('.');
        let sep = if reason.is_empty() { "" } else { "; " };
        row.reason = format!("{reason}{sep}{list} constant over the interval's pots: no effect estimable");
    }
    (row, effects)
}

fn time(t: &NaiveDateTime) -> String {
    t.format("%Y-%m-%d %H:%M").to_string()
}

/// The four tables of the repeated-scorings analysis, as
/// `(file name, bytes)`, in the order they are written.
pub fn tables(run: &ScoresRun) -> Vec<(&'static str, Vec<u8>)> {
    use crate::io::output::{CsvTable, number, opt_number};
    let mut g = CsvTable::new(
        ["trait", "interval", "pot", "start", "end", "days", "growth"]
            .into_iter()
            .map(String::from)
            .chain(run.indicators.iter().cloned()),
    );
    for r in &run.growth_rows {
        g.row(
            [
                r.trait_name.clone(),
                r.interval.to_string(),
                r.pot.clone(),
                time(&r.start),
                time(&r.end),
                r.days.to_string(),
                opt_number(r.growth),
            ]
            .into_iter()
            .chain(r.indicators.iter().map(|v| opt_number(*v))),
        );
    }
    let mut iv = CsvTable::new([
        "trait",
        "interval",
        "from",
        "to",
        "pots",
        "left_out",
        "verdict",
        "best_model",
        "range_m",
        "nugget_share",
        "constant_drivers",
        "reason",
    ]);
    for r in &run.intervals {
        iv.row([
            r.trait_name.clone(),
            r.interval.to_string(),
            time(&r.from),
            time(&r.to),
            r.pots.to_string(),
            r.left_out.to_string(),
            r.verdict.clone().unwrap_or_default(),
            r.best_model.clone().unwrap_or_default(),
            opt_number(r.range),
            opt_number(r.nugget_share),
            r.constant_drivers.join(";"),
            r.reason.clone(),
        ]);
    }
    let mut ef = CsvTable::new([
        "trait",
        "interval",
        "from",
        "to",
        "driver",
        "estimate",
        "se",
        "ci_low",
        "ci_high",
        "p_value",
        "source_model",
    ]);
    for r in &run.effects {
        ef.row([
            r.trait_name.clone(),
            r.interval.to_string(),
            time(&r.from),
            time(&r.to),
            r.driver.clone(),
            number(r.estimate),
            number(r.se),
            number(r.ci_low),
            number(r.ci_high),
            number(r.p_value),
            r.source_model.clone(),
        ]);
    }
    let mut co = CsvTable::new([
        "trait",
        "driver",
        "intervals",
        "estimate",
        "se",
        "ci_low",
        "ci_high",
        "q_statistic",
        "df",
        "p_changing",
        "i_squared",
    ]);
    for r in &run.combined {
        let c = &r.combined;
        co.row([
            r.trait_name.clone(),
            r.driver.clone(),
            c.intervals.to_string(),
            number(c.estimate),
            number(c.se),
            number(c.ci_low),
            number(c.ci_high),
            number(c.q),
            c.df.to_string(),
            number(c.p_changing),
            number(c.i_squared),
        ]);
    }
    vec![
        (GROWTH_FILE, g.into_bytes()),
        (INTERVALS_FILE, iv.into_bytes()),
        (EFFECTS_FILE, ef.into_bytes()),
        (COMBINED_FILE, co.into_bytes()),
    ]
}

/// Write the four tables into the study's output folder, together
/// (atomically); returns their paths.
pub fn write_outputs(study: &Study, run: &ScoresRun) -> crate::io::Result<Vec<std::path::PathBuf>> {
    let mut w = crate::io::output::StageWriter::new(&study.output_dir(), "scores")?;
    for (name, bytes) in tables(run) {
        w.write(name, &bytes)?;
    }
    w.commit()
}
