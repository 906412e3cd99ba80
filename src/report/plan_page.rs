//! The planning pages: `plan.html` (where to put loggers) and `power.html`
//! (would this layout see the driver). Each is one self-contained document
//! in the report's style sheet, rendered from a plain data struct filled by
//! [`crate::planner`]; nothing is computed here. Maps come from
//! [`super::figures::value_map`], text goes through [`super::html::escape`].

use super::colour::Scale;
use super::data::{OpeningSegment, SensorPoint};
use super::figures::{self, MapSpec};
use super::html::{escape, sig};
use serde::Serialize;
use std::fmt::Write as _;

const CSS: &str = include_str!("report.css");

/// A logger added or taken away, with the SEs over the pots afterwards.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct PlacementStep {
    /// Logger id (a candidate's id for an added logger).
    pub id: String,
    /// x, metres.
    pub x: f64,
    /// y, metres.
    pub y: f64,
    /// Mean kriging SE over the pots afterwards (`None`: not removable).
    pub mean_se: Option<f64>,
    /// Largest kriging SE over the pots afterwards.
    pub max_se: Option<f64>,
}

/// What `plan.html` shows.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct PlacementPage {
    /// Study or scenario title.
    pub title: String,
    /// The indicator.
    pub indicator: String,
    /// Its unit, when known.
    pub unit: Option<String>,
    /// `mean` or `max`.
    pub objective: String,
    /// Kriging method.
    pub method: String,
    /// The variogram in words (family, nugget, partial sill, range).
    pub variogram: String,
    /// Where the variogram came from.
    pub variogram_source: String,
    /// Where the candidates came from.
    pub candidates: String,
    /// `(length, width)`, metres.
    pub compartment: Option<(f64, f64)>,
    /// Openings to draw.
    pub openings: Vec<OpeningSegment>,
    /// `(id, x, y)` of every pot.
    pub pots: Vec<(String, f64, f64)>,
    /// `(id, x, y)` of every current logger.
    pub loggers: Vec<(String, f64, f64)>,
    /// Kriging SE per pot with the current loggers.
    pub se_before: Vec<f64>,
    /// Kriging SE per pot with the added loggers too.
    pub se_after: Vec<f64>,
    /// Mean SE now.
    pub mean_se_before: f64,
    /// Largest SE now.
    pub max_se_before: f64,
    /// Added loggers in the order chosen.
    pub added: Vec<PlacementStep>,
    /// Every current logger taken away alone.
    pub removals: Vec<PlacementStep>,
    /// The current logger whose removal raises the objective least.
    pub least_cost: Option<String>,
    /// Wall-clock seconds.
    pub seconds: f64,
}

fn head(out: &mut String, title: &str, what: &str) {
    let _ = write!(
        out,
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\"/>\n\
         <meta name=\"viewport\" content=\"width=device-width, initial-scale=1\"/>\n\
         <title>{} — potclim {}</title>\n<style>\n{}</style>\n</head>\n<body>\n<header>\n<h1>{}</h1>\n",
        escape(title),
        escape(what),
        CSS,
        escape(title)
    );
}

fn foot(out: &mut String, files: &str) {
    let _ = write!(
        out,
        "</main>\n<footer>Written by potclim {}. The numbers behind this page are in {files} beside this file.</footer>\n</body>\n</html>\n",
        env!("CARGO_PKG_VERSION")
    );
}

fn opt_sig(v: Option<f64>) -> String {
    v.map_or_else(|| "–".into(), |v| sig(v, 4))
}

fn signed(v: f64) -> String {
    let s = sig(v, 3);
    if v > 0.0 { format!("+{s}") } else { s }
}

/// Render `plan.html`.
pub fn render_placement(p: &PlacementPage) -> String {
    let mut out = String::with_capacity(128 * 1024);
    let title = if p.title.trim().is_empty() { "Untitled study" } else { p.title.as_str() };
    head(&mut out, title, "logger placement");
    let unit = p.unit.as_deref().map(|u| format!(" {}", escape(u))).unwrap_or_default();
    let _ = writeln!(
        out,
        "<p class=\"lead\">Where should the next loggers go so that <code>{}</code> is known best at the pots?</p>\n</header>\n<main>",
        escape(&p.indicator)
    );
    let obj = if p.objective == "max" { "largest" } else { "mean" };
    out.push_str("<section id=\"answer\">\n<h2>1. Answer</h2>\n<div class=\"answer\"><div>\n");
    match p.added.last() {
        Some(last) => {
            let list: Vec<String> = p
                .added
                .iter()
                .map(|s| format!("{} at ({}, {}) m", escape(&s.id), sig(s.x, 3), sig(s.y, 3)))
                .collect();
            let _ = writeln!(
                out,
                "<p>Add {} logger(s), in this order: {}.</p>\n<p>The mean kriging SE over the {} pots falls from {}{unit} to {}{unit}; the largest from {}{unit} to {}{unit} (chosen for the {obj} SE).</p>",
                p.added.len(),
                list.join("; "),
                p.pots.len(),
                sig(p.mean_se_before, 3),
                opt_sig(last.mean_se),
                sig(p.max_se_before, 3),
                opt_sig(last.max_se)
            );
        }
        None => out.push_str("<p>No candidate position lowers the SE at the pots (every candidate stands where the field is already known).</p>\n"),
    }
    if let Some(id) = &p.least_cost
        && let Some(r) = p.removals.iter().find(|r| &r.id == id)
    {
        let _ = writeln!(
            out,
            "<p>The current logger that could be moved at least cost is <strong>{}</strong>: without it the mean SE would be {}{unit} and the largest {}{unit}.</p>",
            escape(id),
            opt_sig(r.mean_se),
            opt_sig(r.max_se)
        );
    }
    out.push_str("</div></div>\n</section>\n");

    out.push_str("<section id=\"maps\">\n<h2>2. Standard error at the pots, now and after</h2>\n<div class=\"figs\">\n");
    let scale = Scale::sequential(p.se_before.iter().chain(&p.se_after).copied());
    let legend = match &p.unit {
        Some(u) => format!("kriging SE ({u})"),
        None => "kriging SE".into(),
    };
    let now: Vec<SensorPoint> =
        p.loggers.iter().map(|(id, x, y)| SensorPoint { id: id.clone(), x: *x, y: *y }).collect();
    let mut after = now.clone();
    after.extend(p.added.iter().map(|s| SensorPoint { id: format!("+{}", s.id), x: s.x, y: s.y }));
    for (id, title, se, sensors, cap) in [
        (
            "se-now",
            "SE with the current loggers",
            &p.se_before,
            &now,
            "Kriging SE of the indicator at every pot with the current loggers (triangles).",
        ),
        (
            "se-after",
            "SE with the added loggers",
            &p.se_after,
            &after,
            "The same with the added loggers (marked +). One colour scale for both maps.",
        ),
    ] {
        let spec = MapSpec {
            id: id.into(),
            title: title.into(),
            extent: p.compartment,
            points: p.pots.iter().zip(se.iter()).map(|((_, x, y), s)| (*x, *y, Some(*s))).collect(),
            scale,
            legend: legend.clone(),
            sensors,
            openings: &p.openings,
            wide: false,
        };
        match figures::value_map(&spec) {
            Ok(f) => {
                let _ = writeln!(
                    out,
                    "<figure id=\"fig-{}\">\n{}\n<figcaption>{cap}</figcaption>\n</figure>",
                    f.id,
                    f.svg.trim()
                );
            }
            Err(e) => {
                let _ = writeln!(out, "<p class=\"missing\">{}</p>", escape(&e.to_string()));
            }
        }
    }
    out.push_str("</div>\n</section>\n");

    out.push_str("<section id=\"steps\">\n<h2>3. Each logger added, each logger taken away</h2>\n<table>\n<tr><th>action</th><th>logger</th><th class=\"n\">x (m)</th><th class=\"n\">y (m)</th><th class=\"n\">mean SE</th><th class=\"n\">change</th><th class=\"n\">largest SE</th><th class=\"n\">change</th></tr>\n");
    let _ = writeln!(
        out,
        "<tr><td>now</td><td>{} loggers</td><td></td><td></td><td class=\"n\">{}</td><td></td><td class=\"n\">{}</td><td></td></tr>",
        p.loggers.len(),
        sig(p.mean_se_before, 4),
        sig(p.max_se_before, 4)
    );
    let (mut pm, mut px) = (p.mean_se_before, p.max_se_before);
    for (k, s) in p.added.iter().enumerate() {
        let (m, x) = (s.mean_se.unwrap_or(f64::NAN), s.max_se.unwrap_or(f64::NAN));
        let _ = writeln!(
            out,
            "<tr class=\"chosen\"><td>add {}</td><td>{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td></tr>",
            k + 1,
            escape(&s.id),
            sig(s.x, 3),
            sig(s.y, 3),
            sig(m, 4),
            signed(m - pm),
            sig(x, 4),
            signed(x - px)
        );
        (pm, px) = (m, x);
    }
    for s in &p.removals {
        let least = p.least_cost.as_deref() == Some(s.id.as_str());
        let (dm, dx) = match (s.mean_se, s.max_se) {
            (Some(m), Some(x)) => (signed(m - p.mean_se_before), signed(x - p.max_se_before)),
            _ => ("not removable".into(), String::new()),
        };
        let _ = writeln!(
            out,
            "<tr{}><td>remove</td><td>{}{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td></tr>",
            if least { " class=\"moved\"" } else { "" },
            escape(&s.id),
            if least { " (least cost)" } else { "" },
            sig(s.x, 3),
            sig(s.y, 3),
            opt_sig(s.mean_se),
            dm,
            opt_sig(s.max_se),
            dx
        );
    }
    out.push_str("</table>\n</section>\n");

    let _ = writeln!(
        out,
        "<section id=\"how\">\n<h2>4. How this was worked out</h2>\n<table>\n<tr><th>indicator</th><td>{}{}</td></tr>\n<tr><th>kriging</th><td>{}</td></tr>\n<tr><th>variogram</th><td>{}</td></tr>\n<tr><th>variogram from</th><td>{}</td></tr>\n<tr><th>candidates</th><td>{}</td></tr>\n<tr><th>chosen for</th><td>the {obj} SE over the pots</td></tr>\n<tr><th>time</th><td>{} s</td></tr>\n</table>\n<p>Each logger is chosen, given those before it, as the candidate that lowers the {obj} SE most; the kriging variances are updated after each choice without a new solve (the kriging update equations). A greedy choice need not be the best set overall; the tests compare it with an exhaustive search on small cases. The SE is that of the indicator over the study period at each pot, with the kriging conventions of the map.</p>\n</section>",
        escape(&p.indicator),
        p.unit.as_deref().map(|u| format!(" ({})", escape(u))).unwrap_or_default(),
        escape(&p.method),
        escape(&p.variogram),
        escape(&p.variogram_source),
        escape(&p.candidates),
        sig(p.seconds, 3)
    );
    foot(&mut out, "<code>plan.csv</code> and <code>plan_pots.csv</code>");
    out
}
