//! The report's section on repeated scorings ("when did the climate act?"):
//! its data ([`OverTimeSection`], carried in [`super::ReportData`] and
//! `report_data.json` only when the study has a `[scores]` table with two or
//! more scoring times), its assembly from the model stage's
//! [`ScoresRun`] (copied and labelled, nothing computed), and its HTML.
//!
//! Per trait the section shows the verdict of every interval as a strip and a
//! table (one row per interval), each driver's effect per interval with its
//! 95 % interval drawn above the compartment's daily climate (the daily value
//! of the driver's indicator averaged over the loggers), the effects and the
//! second stage's combination as tables, and maps of growth per interval as
//! small multiples ([`super::over_time_figures`]).

use super::figures::{Figure, FigureError};
use super::html::{escape, fixed, p_value, sig};
use crate::model::intervals::ScoresRun;
use serde::{Deserialize, Serialize};
use std::fmt::Write as _;

/// The repeated-scorings section.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct OverTimeSection {
    /// `difference` or `log_ratio`.
    pub growth: String,
    /// `scorings`, `day` or `week`.
    pub interval_rule: String,
    /// One entry per trait column of `[scores]`.
    pub traits: Vec<TraitOverTime>,
    /// The compartment's daily climate per indicator.
    #[serde(default)]
    pub daily_climate: Vec<DailyDriver>,
    /// Notes of the analysis (missing cells, superseded scorings).
    #[serde(default)]
    pub notes: Vec<String>,
}

/// One indicator's daily value averaged over the loggers.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct DailyDriver {
    /// Indicator name.
    pub name: String,
    /// Its unit.
    pub unit: String,
    /// Local dates, `YYYY-MM-DD`.
    pub days: Vec<String>,
    /// Mean over the loggers with a value (`None`: none has one).
    pub values: Vec<Option<f64>>,
}

/// Everything shown for one trait.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct TraitOverTime {
    /// Trait column.
    pub trait_name: String,
    /// Unit of growth (`None`: trait units; `log_ratio`: dimensionless).
    #[serde(default)]
    pub growth_unit: Option<String>,
    /// One row per interval, as `scores_intervals.csv`.
    pub intervals: Vec<IntervalVerdict>,
    /// One row per interval and driver, as `scores_effects.csv`.
    pub effects: Vec<IntervalEffect>,
    /// One row per driver, as `scores_combined.csv`.
    pub combined: Vec<CombinedEffect>,
    /// Growth of each pot per interval, for the maps.
    pub maps: Vec<GrowthMap>,
}

/// The verdict of one interval.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct IntervalVerdict {
    /// Interval number (1-based).
    pub interval: usize,
    /// Earliest scoring opening it, local `YYYY-MM-DD HH:MM`.
    pub from: String,
    /// Latest scoring closing it.
    pub to: String,
    /// Pots analysed.
    pub pots: usize,
    /// Pots not analysed.
    pub left_out: usize,
    /// Verdict word (`None`: not analysed).
    pub verdict: Option<String>,
    /// Chosen model.
    pub best_model: Option<String>,
    /// Range of the chosen model's correlation, metres.
    pub range_m: Option<f64>,
    /// Its nugget share.
    pub nugget_share: Option<f64>,
    /// Climate drivers constant over the interval's pots.
    pub constant_drivers: Vec<String>,
    /// The verdict's reason, or why the interval was not analysed.
    pub reason: String,
}

/// One driver's effect in one interval.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct IntervalEffect {
    /// Interval number.
    pub interval: usize,
    /// Driver.
    pub driver: String,
    /// Unit of the driver.
    #[serde(default)]
    pub driver_unit: Option<String>,
    /// Effect per unit of the driver, growth units.
    pub estimate: f64,
    /// Plug-in SE.
    pub se: f64,
    /// 95 % interval.
    pub ci_low: f64,
    /// Upper end.
    pub ci_high: f64,
    /// Two-sided p.
    pub p_value: f64,
    /// The model the estimate comes from.
    pub source_model: String,
}

/// The second stage for one driver.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct CombinedEffect {
    /// Driver.
    pub driver: String,
    /// Intervals combined.
    pub intervals: usize,
    /// Inverse-variance weighted mean.
    pub estimate: f64,
    /// Its SE.
    pub se: f64,
    /// Normal 95 % interval.
    pub ci_low: f64,
    /// Upper end.
    pub ci_high: f64,
    /// Cochran's Q.
    pub q: f64,
    /// Its degrees of freedom.
    pub df: usize,
    /// P of a changing effect.
    pub p_changing: f64,
    /// I².
    pub i_squared: f64,
}

/// Growth of every pot scored over one interval.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct GrowthMap {
    /// Interval number.
    pub interval: usize,
    /// `(x m, y m, growth)`; `None`: an end is missing.
    pub points: Vec<(f64, f64, Option<f64>)>,
}

fn stamp(t: &chrono::NaiveDateTime) -> String {
    t.format("%Y-%m-%d %H:%M").to_string()
}

/// The section from the model stage's result; `units` gives each
/// indicator's unit by name. `None` when no interval was analysed (a single
/// scoring time), so that the report is then the one without `[scores]`.
pub fn from_scores(run: &ScoresRun, units: &[(String, String)]) -> Option<OverTimeSection> {
    if run.intervals.is_empty() {
        return None;
    }
    let unit_of = |name: &str| units.iter().find(|(n, _)| n == name).map(|(_, u)| u.clone());
    let xy = |pot: &str| run.positions.iter().find(|(id, _, _)| id == pot).map(|(_, x, y)| (*x, *y));
    let traits = run
        .traits
        .iter()
        .map(|t| {
            let intervals: Vec<IntervalVerdict> = run
                .intervals
                .iter()
                .filter(|r| &r.trait_name == t)
                .map(|r| IntervalVerdict {
                    interval: r.interval,
                    from: stamp(&r.from),
                    to: stamp(&r.to),
                    pots: r.pots,
                    left_out: r.left_out,
                    verdict: r.verdict.clone(),
                    best_model: r.best_model.clone(),
                    range_m: r.range,
                    nugget_share: r.nugget_share,
                    constant_drivers: r.constant_drivers.clone(),
                    reason: r.reason.clone(),
                })
                .collect();
            let effects = run
                .effects
                .iter()
                .filter(|e| &e.trait_name == t)
                .map(|e| IntervalEffect {
                    interval: e.interval,
                    driver: e.driver.clone(),
                    driver_unit: unit_of(&e.driver).or_else(|| {
                        e.driver.starts_with(crate::spatial::geometry::DISTANCE_PREFIX).then(|| "m".into())
                    }),
                    estimate: e.estimate,
                    se: e.se,
                    ci_low: e.ci_low,
                    ci_high: e.ci_high,
                    p_value: e.p_value,
                    source_model: e.source_model.clone(),
                })
                .collect();
            let combined = run
                .combined
                .iter()
                .filter(|c| &c.trait_name == t)
                .map(|c| CombinedEffect {
                    driver: c.driver.clone(),
                    intervals: c.combined.intervals,
                    estimate: c.combined.estimate,
                    se: c.combined.se,
                    ci_low: c.combined.ci_low,
                    ci_high: c.combined.ci_high,
                    q: c.combined.q,
                    df: c.combined.df,
                    p_changing: c.combined.p_changing,
                    i_squared: c.combined.i_squared,
                })
                .collect();
            let maps = intervals
                .iter()
                .map(|iv| GrowthMap {
                    interval: iv.interval,
                    points: run
                        .growth_rows
                        .iter()
                        .filter(|g| &g.trait_name == t && g.interval == iv.interval)
                        .filter_map(|g| xy(&g.pot).map(|(x, y)| (x, y, g.growth)))
                        .collect(),
                })
                .collect();
            TraitOverTime {
                trait_name: t.clone(),
                growth_unit: (run.growth == "log_ratio").then(|| "ln ratio".to_string()),
                intervals,
                effects,
                combined,
                maps,
            }
        })
        .collect();
    let daily_climate = run
        .daily_climate
        .iter()
        .map(|d| DailyDriver {
            name: d.name.clone(),
            unit: unit_of(&d.name).unwrap_or_default(),
            days: d.days.iter().map(|x| x.to_string()).collect(),
            values: d.values.clone(),
        })
        .collect();
    Some(OverTimeSection {
        growth: run.growth.clone(),
        interval_rule: run.interval_rule.clone(),
        traits,
        daily_climate,
        notes: run.notes.clone(),
    })
}

/// The section's id, and its entry in the page's table of contents.
pub const SECTION_ID: &str = "over-time";

fn figure(f: Result<Figure, FigureError>, caption: &str, out: &mut String) {
    match f {
        Ok(f) => {
            let _ = write!(
                out,
                "<figure id=\"fig-{}\">\n{}\n<figcaption>{}</figcaption>\n</figure>\n",
                escape(&f.id),
                f.svg.trim(),
                caption
            );
        }
        Err(e) => {
            let _ = writeln!(out, "<p class=\"missing\">{}</p>", escape(&e.to_string()));
        }
    }
}

fn opt(v: Option<f64>, f: impl Fn(f64) -> String) -> String {
    v.map_or_else(|| "–".into(), f)
}

/// Every figure of the section, in page order, with its caption.
pub fn figures(
    s: &OverTimeSection,
    extent: Option<(f64, f64)>,
) -> Vec<(Result<Figure, FigureError>, String)> {
    use super::over_time_figures as f;
    let mut out = Vec::new();
    for t in &s.traits {
        out.push((
            f::verdict_strip(t),
            format!(
                "The verdict for the growth of {} in each interval between scorings, in time order (interval number and verdict word in each block; white: not analysed).",
                escape(&t.trait_name)
            ),
        ));
        let mut drivers: Vec<&str> = Vec::new();
        for e in &t.effects {
            if !drivers.contains(&e.driver.as_str()) {
                drivers.push(&e.driver);
            }
        }
        for d in drivers {
            let daily = s.daily_climate.iter().find(|c| c.name == d);
            let caption = format!(
                "Effect of {d} on the growth of {tr} per interval (bar: estimate; shaded: 95 % interval; the dashed line and band: the effect combined over intervals with its 95 % interval), above {below}.",
                d = escape(d),
                tr = escape(&t.trait_name),
                below = if daily.is_some() {
                    format!("the daily value of {} averaged over the loggers", escape(d))
                } else {
                    "no daily climate (a distance to an opening has none)".to_string()
                }
            );
            out.push((f::effect_over_time(t, d, daily), caption));
        }
        out.push((
            f::growth_maps(t, extent),
            format!(
                "Growth of {} per pot in each interval, on one colour scale; hollow grey: no growth (an end missing).",
                escape(&t.trait_name)
            ),
        ));
    }
    out
}

/// The section's HTML.
pub fn section(s: &OverTimeSection, extent: Option<(f64, f64)>, out: &mut String) {
    let _ = writeln!(
        out,
        "<section id=\"{SECTION_ID}\">\n<h2>When the climate acted (repeated scorings)</h2>\n<p>Growth between successive scorings ({}; intervals: {}) is analysed interval by interval with the same comparison of models as the whole study, each pot's drivers recomputed over the interval; the effects are then combined over intervals with inverse-variance weights, and Cochran's Q tests whether the effect changes (docs/scores.md).</p>",
        escape(&s.growth),
        escape(&s.interval_rule)
    );
    if !s.notes.is_empty() {
        out.push_str("<ul class=\"notes\">");
        for n in &s.notes {
            let _ = write!(out, "<li>{}</li>", escape(n));
        }
        out.push_str("</ul>\n");
    }
    let mut figs = figures(s, extent).into_iter();
    for t in &s.traits {
        let unit = t.growth_unit.as_deref().unwrap_or("trait units");
        let _ = writeln!(out, "<h3>{}: growth per interval</h3>", escape(&t.trait_name));
        if let Some((f, c)) = figs.next() {
            figure(f, &c, out);
        }
        out.push_str("<div class=\"scroll\"><table class=\"intervals\">\n<tr><th class=\"n\">interval</th><th>from</th><th>to</th><th class=\"n\">pots</th><th class=\"n\">left out</th><th>verdict</th><th>chosen model</th><th class=\"n\">range (m)</th><th class=\"n\">nugget share</th><th>constant drivers</th><th>why</th></tr>\n");
        for r in &t.intervals {
            let _ = writeln!(
                out,
                "<tr><td class=\"n\">{}</td><td>{}</td><td>{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td>{}</td><td><code>{}</code></td><td class=\"n\">{}</td><td class=\"n\">{}</td><td>{}</td><td>{}</td></tr>",
                r.interval,
                escape(&r.from),
                escape(&r.to),
                r.pots,
                r.left_out,
                escape(r.verdict.as_deref().unwrap_or("not analysed")),
                escape(r.best_model.as_deref().unwrap_or("–")),
                opt(r.range_m, |v| sig(v, 3)),
                opt(r.nugget_share, |v| fixed(v, 2)),
                escape(&r.constant_drivers.join(", ")),
                escape(&r.reason)
            );
        }
        out.push_str("</table></div>\n");
        let mut drivers: Vec<&str> = Vec::new();
        for e in &t.effects {
            if !drivers.contains(&e.driver.as_str()) {
                drivers.push(&e.driver);
            }
        }
        for _ in &drivers {
            if let Some((f, c)) = figs.next() {
                figure(f, &c, out);
            }
        }
        let _ = writeln!(
            out,
            "<h3>{}: each driver's effect per interval</h3>\n<div class=\"scroll\"><table class=\"effects\">\n<tr><th class=\"n\">interval</th><th>driver</th><th class=\"n\">effect ({} per driver unit)</th><th class=\"n\">SE</th><th class=\"n\">95 % interval</th><th class=\"n\">p</th><th>from model</th></tr>",
            escape(&t.trait_name),
            escape(unit)
        );
        for e in &t.effects {
            let _ = writeln!(
                out,
                "<tr><td class=\"n\">{}</td><td>{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{} to {}</td><td class=\"n\">{}</td><td><code>{}</code></td></tr>",
                e.interval,
                escape(&match &e.driver_unit {
                    Some(u) => format!("{} ({u})", e.driver),
                    None => e.driver.clone(),
                }),
                sig(e.estimate, 3),
                sig(e.se, 3),
                sig(e.ci_low, 3),
                sig(e.ci_high, 3),
                p_value(Some(e.p_value)),
                escape(&e.source_model)
            );
        }
        out.push_str("</table></div>\n");
        if t.combined.is_empty() {
            out.push_str("<p>No driver has an effect in two or more intervals: nothing to combine.</p>\n");
        } else {
            let _ = writeln!(
                out,
                "<h3>{}: combined over intervals</h3>\n<div class=\"scroll\"><table class=\"combined\">\n<tr><th>driver</th><th class=\"n\">intervals</th><th class=\"n\">constant effect</th><th class=\"n\">SE</th><th class=\"n\">95 % interval</th><th class=\"n\">Q</th><th class=\"n\">df</th><th class=\"n\">p (effect changes)</th><th class=\"n\">I²</th></tr>",
                escape(&t.trait_name)
            );
            for c in &t.combined {
                let _ = writeln!(
                    out,
                    "<tr><td>{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{} to {}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td></tr>",
                    escape(&c.driver),
                    c.intervals,
                    sig(c.estimate, 3),
                    sig(c.se, 3),
                    sig(c.ci_low, 3),
                    sig(c.ci_high, 3),
                    sig(c.q, 3),
                    c.df,
                    p_value(Some(c.p_changing)),
                    fixed(c.i_squared, 2)
                );
            }
            out.push_str("</table></div>\n");
        }
        if let Some((f, c)) = figs.next() {
            figure(f, &c, out);
        }
    }
    out.push_str("</section>\n");
}
