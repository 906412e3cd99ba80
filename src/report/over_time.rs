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
use super::html::{escape, figure_html, fixed, opt, p_value, rich, sig};
use crate::model::intervals::{CombinedRow, EffectRow, IntervalRow, ScoresRun};
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
    /// Unit of each driver with one (`(name, unit)`): indicators, and metres
    /// for a distance to an opening.
    #[serde(default)]
    pub driver_units: Vec<(String, String)>,
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

/// Everything shown for one trait: the model stage's rows, as written to
/// `scores_intervals.csv`, `scores_effects.csv` and `scores_combined.csv`.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct TraitOverTime {
    /// Trait column.
    pub trait_name: String,
    /// Unit of growth (`None`: trait units; `log_ratio`: dimensionless).
    #[serde(default)]
    pub growth_unit: Option<String>,
    /// One row per interval.
    pub intervals: Vec<IntervalRow>,
    /// One row per interval and driver.
    pub effects: Vec<EffectRow>,
    /// One row per driver.
    pub combined: Vec<CombinedRow>,
    /// Growth of each pot per interval, for the maps.
    pub maps: Vec<GrowthMap>,
}

impl TraitOverTime {
    /// The drivers with an effect in some interval, in order of first appearance.
    pub fn drivers(&self) -> Vec<&str> {
        let mut drivers: Vec<&str> = Vec::new();
        for e in &self.effects {
            if !drivers.contains(&e.driver.as_str()) {
                drivers.push(&e.driver);
            }
        }
        drivers
    }
}

/// Growth of every pot scored over one interval.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct GrowthMap {
    /// Interval number.
    pub interval: usize,
    /// `(x m, y m, growth)`; `None`: an end is missing.
    pub points: Vec<(f64, f64, Option<f64>)>,
}

/// A local time as the CSV files write it.
pub fn stamp(t: &chrono::NaiveDateTime) -> String {
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
            let intervals: Vec<IntervalRow> =
                run.intervals.iter().filter(|r| &r.trait_name == t).cloned().collect();
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
                effects: run.effects.iter().filter(|e| &e.trait_name == t).cloned().collect(),
                combined: run.combined.iter().filter(|c| &c.trait_name == t).cloned().collect(),
                maps,
            }
        })
        .collect();
    let mut driver_units: Vec<(String, String)> = Vec::new();
    for e in &run.effects {
        let unit = unit_of(&e.driver)
            .or_else(|| e.driver.starts_with(crate::spatial::geometry::DISTANCE_PREFIX).then(|| "m".into()));
        if let Some(u) = unit.filter(|_| !driver_units.iter().any(|(n, _)| n == &e.driver)) {
            driver_units.push((e.driver.clone(), u));
        }
    }
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
        driver_units,
        notes: run.notes.clone(),
    })
}

impl OverTimeSection {
    /// The unit of a driver, when known.
    pub fn driver_unit(&self, driver: &str) -> Option<&str> {
        self.driver_units.iter().find(|(n, _)| n == driver).map(|(_, u)| u.as_str())
    }
}

/// The section's id, and its entry in the page's table of contents.
pub const SECTION_ID: &str = "over-time";

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
        for d in t.drivers() {
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
            out.push((f::effect_over_time(t, d, s.driver_unit(d), daily), caption));
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
            let _ = write!(out, "<li>{}</li>", rich(n));
        }
        out.push_str("</ul>\n");
    }
    let mut figs = figures(s, extent).into_iter();
    for t in &s.traits {
        let unit = t.growth_unit.as_deref().unwrap_or("trait units");
        let _ = writeln!(out, "<h3>{}: growth per interval</h3>", escape(&t.trait_name));
        if let Some((f, c)) = figs.next() {
            out.push_str(&figure_html(f, &c));
        }
        out.push_str("<div class=\"scroll\"><table class=\"intervals\">\n<tr><th class=\"n\">interval</th><th>from</th><th>to</th><th class=\"n\">pots</th><th class=\"n\">left out</th><th>verdict</th><th>chosen model</th><th class=\"n\">range (m)</th><th class=\"n\">nugget share</th><th>constant drivers</th><th>why</th></tr>\n");
        for r in &t.intervals {
            let _ = writeln!(
                out,
                "<tr><td class=\"n\">{}</td><td>{}</td><td>{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td>{}</td><td><code>{}</code></td><td class=\"n\">{}</td><td class=\"n\">{}</td><td>{}</td><td>{}</td></tr>",
                r.interval,
                stamp(&r.from),
                stamp(&r.to),
                r.pots,
                r.left_out,
                escape(r.verdict.as_deref().unwrap_or("not analysed")),
                escape(r.best_model.as_deref().unwrap_or("–")),
                opt(r.range, |v| sig(v, 3)),
                opt(r.nugget_share, |v| fixed(v, 2)),
                escape(&r.constant_drivers.join(", ")),
                rich(&r.reason)
            );
        }
        out.push_str("</table></div>\n");
        for _ in t.drivers() {
            if let Some((f, c)) = figs.next() {
                out.push_str(&figure_html(f, &c));
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
                escape(&match s.driver_unit(&e.driver) {
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
                    c.combined.intervals,
                    sig(c.combined.estimate, 3),
                    sig(c.combined.se, 3),
                    sig(c.combined.ci_low, 3),
                    sig(c.combined.ci_high, 3),
                    sig(c.combined.q, 3),
                    c.combined.df,
                    p_value(Some(c.combined.p_changing)),
                    fixed(c.combined.i_squared, 2)
                );
            }
            out.push_str("</table></div>\n");
        }
        if let Some((f, c)) = figs.next() {
            out.push_str(&figure_html(f, &c));
        }
    }
    out.push_str("</section>\n");
}
