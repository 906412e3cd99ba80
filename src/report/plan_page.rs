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
    /// What the SE is, as a noun for sentences (`kriging SE`, `window SE`).
    pub se_kind: String,
    /// How the SE was computed, in one or two sentences for the page.
    pub se_how: String,
    /// SE per pot with the current loggers.
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

fn capitalise(s: &str) -> String {
    let mut c = s.chars();
    c.next().map(|f| f.to_uppercase().chain(c).collect()).unwrap_or_default()
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
                "<p>Add {} logger(s), in this order: {}.</p>\n<p>The mean {} over the {} pots falls from {}{unit} to {}{unit}; the largest from {}{unit} to {}{unit} (chosen for the {obj} SE).</p>",
                p.added.len(),
                list.join("; "),
                escape(&p.se_kind),
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
        Some(u) => format!("{} ({u})", p.se_kind),
        None => p.se_kind.clone(),
    };
    let cap_now = format!(
        "{} of the indicator at every pot with the current loggers (triangles).",
        capitalise(&p.se_kind)
    );
    let now: Vec<SensorPoint> = p
        .loggers
        .iter()
        .map(|(id, x, y)| SensorPoint { id: id.clone(), x: *x, y: *y, silent: false })
        .collect();
    let mut after = now.clone();
    after.extend(p.added.iter().map(|s| SensorPoint {
        id: format!("+{}", s.id),
        x: s.x,
        y: s.y,
        silent: false,
    }));
    for (id, title, se, sensors, cap) in [
        ("se-now", "SE with the current loggers", &p.se_before, &now, cap_now.as_str()),
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
            sensor_values: Vec::new(),
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
        "<section id=\"how\">\n<h2>4. How this was worked out</h2>\n<table>\n<tr><th>indicator</th><td>{}{}</td></tr>\n<tr><th>kriging</th><td>{}</td></tr>\n<tr><th>variogram</th><td>{}</td></tr>\n<tr><th>variogram from</th><td>{}</td></tr>\n<tr><th>candidates</th><td>{}</td></tr>\n<tr><th>chosen for</th><td>the {obj} SE over the pots</td></tr>\n<tr><th>time</th><td>{} s</td></tr>\n</table>\n<p>Each logger is chosen, given those before it, as the candidate that lowers the {obj} SE most; the kriging variances are updated after each choice without a new solve (the kriging update equations). A greedy choice need not be the best set overall; the tests compare it with an exhaustive search on small cases. {}</p>\n</section>",
        escape(&p.indicator),
        p.unit.as_deref().map(|u| format!(" ({})", escape(u))).unwrap_or_default(),
        escape(&p.method),
        escape(&p.variogram),
        escape(&p.variogram_source),
        escape(&p.candidates),
        sig(p.seconds, 3),
        escape(&p.se_how)
    );
    foot(&mut out, "<code>plan.csv</code> and <code>plan_pots.csv</code>");
    out
}

/// One point of a power curve.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct PowerPoint {
    /// Loggers in the layout.
    pub loggers: usize,
    /// True effect of the driver (trait units per driver unit).
    pub effect: f64,
    /// Studies simulated.
    pub studies: usize,
    /// Studies that could not be analysed (left out of the shares).
    pub failed: usize,
    /// Studies whose chosen model holds the driver.
    pub found: usize,
    /// `found / (studies - failed)`: power, or the false-alarm rate at effect 0.
    pub share_found: Option<f64>,
    /// Its 95 % Monte Carlo interval (Wilson).
    pub share_interval: Option<(f64, f64)>,
    /// Studies with a CI of the driver's effect.
    pub with_ci: usize,
    /// Of those, CIs that cover the true effect.
    pub covered: usize,
    /// `covered / with_ci`.
    pub coverage: Option<f64>,
    /// Its 95 % Monte Carlo interval (Wilson).
    pub coverage_interval: Option<(f64, f64)>,
    /// Verdicts: covariate, both, correlation, none.
    pub verdicts: [usize; 4],
    /// Mean wall-clock seconds per study.
    pub mean_seconds: f64,
}

/// What `power.html` shows.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct PowerPage {
    /// Scenario title.
    pub title: String,
    /// Scenario file.
    pub scenario: String,
    /// The driver.
    pub driver: String,
    /// The trait.
    pub trait_name: String,
    /// Its unit.
    pub trait_unit: Option<String>,
    /// Pots per study.
    pub pots: usize,
    /// The draught: opening, night drop (°C), decay (m).
    pub draught: Option<(String, f64, f64)>,
    /// Studies per point.
    pub studies_per_point: usize,
    /// Seed of the first study.
    pub first_seed: u64,
    /// Worker threads.
    pub threads: usize,
    /// Every point, by logger count then effect.
    pub points: Vec<PowerPoint>,
    /// Wall-clock seconds of the whole study.
    pub seconds: f64,
}

fn share(v: Option<f64>, i: Option<(f64, f64)>) -> String {
    match (v, i) {
        (Some(v), Some((lo, hi))) => format!("{} ({}–{})", sig(v, 2), sig(lo, 2), sig(hi, 2)),
        _ => "–".into(),
    }
}

/// One line of a power chart: its label and `(x, share, low, high)` points.
type CurveGroup = (String, Vec<(f64, f64, f64, f64)>);

/// A line chart of the share found against `x`, one line per group, with
/// the Monte Carlo intervals as bars.
fn share_chart(id: &str, title: &str, x_label: &str, groups: &[CurveGroup]) -> String {
    use plotters::prelude::*;
    let xs = groups.iter().flat_map(|g| g.1.iter().map(|p| p.0));
    let (x0, x1) = super::colour::finite_extent(xs).unwrap_or((0.0, 1.0));
    let pad = if x1 > x0 { 0.05 * (x1 - x0) } else { 0.5 };
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (620, 380)).into_drawing_area();
        let drawn = (|| -> Result<(), Box<dyn std::error::Error>> {
            root.fill(&WHITE)?;
            let mut chart = ChartBuilder::on(&root)
                .caption(title, ("sans-serif", 16))
                .margin(12)
                .x_label_area_size(40)
                .y_label_area_size(52)
                .build_cartesian_2d((x0 - pad)..(x1 + pad), 0f64..1.02f64)?;
            chart
                .configure_mesh()
                .x_desc(x_label)
                .y_desc("share of studies that find the driver")
                .label_style(("sans-serif", 12))
                .draw()?;
            for (k, (name, pts)) in groups.iter().enumerate() {
                let c = super::colour::CATEGORICAL[k % super::colour::CATEGORICAL.len()];
                let colour = RGBColor(c.0, c.1, c.2);
                chart
                    .draw_series(LineSeries::new(pts.iter().map(|p| (p.0, p.1)), colour.stroke_width(2)))?
                    .label(name.clone())
                    .legend(move |(x, y)| PathElement::new([(x, y), (x + 16, y)], colour.stroke_width(2)));
                chart.draw_series(pts.iter().map(|p| Circle::new((p.0, p.1), 3, colour.filled())))?;
                for p in pts {
                    chart.draw_series(LineSeries::new([(p.0, p.2), (p.0, p.3)], colour.stroke_width(1)))?;
                }
            }
            chart
                .configure_series_labels()
                .background_style(WHITE.mix(0.9))
                .border_style(BLACK.mix(0.3))
                .label_font(("sans-serif", 12))
                .draw()?;
            root.present()?;
            Ok(())
        })();
        if let Err(e) = drawn {
            return format!(
                "<p class=\"missing\">figure `{}` could not be drawn: {}</p>\n",
                escape(id),
                escape(&e.to_string())
            );
        }
    }
    format!(
        "<figure id=\"fig-{}\">\n{}\n<figcaption>{}: dots are shares, bars their 95 % Monte Carlo intervals (Wilson).</figcaption>\n</figure>\n",
        escape(id),
        svg.trim(),
        escape(title)
    )
}

/// Render `power.html`.
pub fn render_power(p: &PowerPage) -> String {
    let mut out = String::with_capacity(64 * 1024);
    let title = if p.title.trim().is_empty() { "Untitled scenario" } else { p.title.as_str() };
    head(&mut out, title, "power");
    let _ = writeln!(
        out,
        "<p class=\"lead\">Would this layout find the effect of <code>{}</code> on <code>{}</code>?</p>\n</header>\n<main>",
        escape(&p.driver),
        escape(&p.trait_name)
    );
    let unit =
        p.trait_unit.as_deref().map(|u| format!(" {} per unit of the driver", escape(u))).unwrap_or_default();
    out.push_str("<section id=\"answer\">\n<h2>1. Answer</h2>\n<div class=\"answer\"><div>\n");
    for q in &p.points {
        let what = if q.effect == 0.0 { "false-alarm rate (no effect)" } else { "power" };
        let _ = writeln!(
            out,
            "<p>{} loggers, true effect {}{unit}: {what} {} of {} studies = {}; the CI covered the true effect in {} of {}.</p>",
            q.loggers,
            sig(q.effect, 3),
            q.found,
            q.studies - q.failed,
            share(q.share_found, q.share_interval),
            q.covered,
            q.with_ci
        );
    }
    out.push_str("<p>The verdict's rule is designed for a false-alarm rate of about 1.4 % per candidate driver (a richer model wins on noise when its likelihood-ratio statistic exceeds the tie margin + 2; docs/verdict.md).</p>\n</div></div>\n</section>\n");

    out.push_str("<section id=\"curves\">\n<h2>2. Curves</h2>\n<div class=\"figs\">\n");
    let mut counts: Vec<usize> = p.points.iter().map(|q| q.loggers).collect();
    counts.dedup();
    let mut effects: Vec<f64> = Vec::new();
    for q in &p.points {
        if !effects.contains(&q.effect) {
            effects.push(q.effect);
        }
    }
    let point = |q: &PowerPoint, x: f64| {
        q.share_found
            .map(|s| (x, s, q.share_interval.map_or(s, |i| i.0), q.share_interval.map_or(s, |i| i.1)))
    };
    if effects.len() > 1 {
        let groups: Vec<CurveGroup> = counts
            .iter()
            .map(|&k| {
                (
                    format!("{k} loggers"),
                    p.points.iter().filter(|q| q.loggers == k).filter_map(|q| point(q, q.effect)).collect(),
                )
            })
            .collect();
        out.push_str(&share_chart(
            "power-effect",
            "Power against the true effect",
            "true effect of the driver on the trait",
            &groups,
        ));
    }
    if counts.len() > 1 {
        let groups: Vec<CurveGroup> = effects
            .iter()
            .map(|&e| {
                (
                    format!("effect {}", sig(e, 3)),
                    p.points
                        .iter()
                        .filter(|q| q.effect == e)
                        .filter_map(|q| point(q, q.loggers as f64))
                        .collect(),
                )
            })
            .collect();
        out.push_str(&share_chart(
            "power-loggers",
            "Power against the number of loggers",
            "loggers (the first k of the scenario)",
            &groups,
        ));
    }
    out.push_str("</div>\n</section>\n");

    out.push_str("<section id=\"table\">\n<h2>3. Every point</h2>\n<div class=\"scroll\"><table>\n<tr><th class=\"n\">loggers</th><th class=\"n\">effect</th><th class=\"n\">studies</th><th class=\"n\">failed</th><th class=\"n\">found (95 % MC interval)</th><th class=\"n\">CI coverage (95 % MC interval)</th><th class=\"n\">covariate</th><th class=\"n\">both</th><th class=\"n\">correlation</th><th class=\"n\">none</th><th class=\"n\">s per study</th></tr>\n");
    for q in &p.points {
        let _ = writeln!(
            out,
            "<tr><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td></tr>",
            q.loggers,
            sig(q.effect, 3),
            q.studies,
            q.failed,
            share(q.share_found, q.share_interval),
            share(q.coverage, q.coverage_interval),
            q.verdicts[0],
            q.verdicts[1],
            q.verdicts[2],
            q.verdicts[3],
            sig(q.mean_seconds, 3)
        );
    }
    out.push_str("</table></div>\n</section>\n");
    let draught = p.draught.as_ref().map_or("none".into(), |(o, d, l)| {
        format!("from `{}`: {} °C at night, decay {} m", escape(o), sig(*d, 3), sig(*l, 3))
    });
    let _ = writeln!(
        out,
        "<section id=\"how\">\n<h2>4. How this was worked out</h2>\n<table>\n<tr><th>scenario</th><td>{}</td></tr>\n<tr><th>pots per study</th><td>{}</td></tr>\n<tr><th>draught</th><td>{draught}</td></tr>\n<tr><th>studies per point</th><td>{} (seeds {} to {}, the same at every point)</td></tr>\n<tr><th>threads</th><td>{}</td></tr>\n<tr><th>time</th><td>{} s</td></tr>\n</table>\n<p>Each study is simulated from the scenario with the driver's true effect set as shown, then analysed as <code>potclim run</code> does (ingest, climate, map, comparison grid and verdict). A study finds the driver when the verdict's chosen model holds it. The CI is the driver's 95 % CI with the mapped driver's uncertainty where the verdict computed it, else the plug-in CI.</p>\n</section>",
        escape(&p.scenario),
        p.pots,
        p.studies_per_point,
        p.first_seed,
        p.first_seed.wrapping_add(p.studies_per_point as u64).wrapping_sub(1),
        p.threads,
        sig(p.seconds, 3)
    );
    foot(&mut out, "<code>power.csv</code> and <code>power_studies.csv</code>");
    out
}
