//! The self-contained HTML page: [`render_html`] turns a [`ReportData`] into
//! one document with inline CSS and inline SVG figures, no script and no
//! external asset, readable on a laptop and printable (print CSS).
//!
//! Every string that comes from the user's files (titles, ids, factor levels,
//! file names, the study file itself) passes through [`escape`] before it
//! reaches the page. The page is also well-formed XML (void tags self-closed),
//! which the tests check with [`super::xml::check_well_formed`].
//!
//! Numbers are formatted to a fixed precision per kind of quantity
//! ([`sig`], [`fixed`], [`p_value`]) so that the page, and its snapshot
//! test, show the layout rather than floating-point noise.

use super::data::*;
use super::figures::{self, Figure, FigureError};
use crate::model::verdict::Headline;
use std::fmt::Write as _;

const CSS: &str = include_str!("report.css");

/// Escape text for HTML and XML content and attribute values: `&`, `<`, `>`,
/// `"` and `'`.
pub fn escape(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            c => out.push(c),
        }
    }
    out
}

/// `v` with `digits` significant digits, in plain notation for magnitudes
/// 1e-3 to 1e6 and in scientific notation otherwise; `–` for a non-finite value.
pub fn sig(v: f64, digits: usize) -> String {
    if !v.is_finite() {
        return if v.is_nan() {
            "–".into()
        } else if v > 0.0 {
            "∞".into()
        } else {
            "−∞".into()
        };
    }
    if v == 0.0 {
        return "0".into();
    }
    let mag = v.abs().log10().floor() as i32;
    if (-3..6).contains(&mag) {
        let decimals = (digits as i32 - 1 - mag).max(0) as usize;
        no_negative_zero(format!("{v:.decimals$}"))
    } else {
        format!("{v:.prec$e}", prec = digits.saturating_sub(1))
    }
}

/// `v` with `decimals` decimals; `–` for a non-finite value. A value that
/// rounds to zero is written without a sign (`0.00`, never `-0.00`).
pub fn fixed(v: f64, decimals: usize) -> String {
    if v.is_finite() { no_negative_zero(format!("{v:.decimals$}")) } else { "–".into() }
}

/// Drop the minus sign of a formatted number that shows only zeros.
fn no_negative_zero(s: String) -> String {
    match s.strip_prefix('-') {
        Some(rest) if rest.chars().all(|c| c == '0' || c == '.') => rest.to_string(),
        _ => s,
    }
}

/// The decimals that give the smallest non-zero magnitude among `values`
/// `digits` significant digits (0 to 6), so that one table writes all its
/// numbers of one unit with the same number of decimals.
pub fn decimals_for(values: impl IntoIterator<Item = f64>, digits: usize) -> usize {
    let smallest =
        values.into_iter().filter(|v| v.is_finite() && *v != 0.0).map(f64::abs).fold(f64::INFINITY, f64::min);
    if !smallest.is_finite() {
        return 2;
    }
    let mag = smallest.log10().floor() as i32;
    (digits as i32 - 1 - mag).clamp(0, 6) as usize
}

/// A p-value with three decimals, `< 0.001` below that; `–` when absent.
pub fn p_value(p: Option<f64>) -> String {
    match p {
        Some(p) if p.is_finite() && p < 0.001 => "&lt; 0.001".into(),
        Some(p) if p.is_finite() => format!("{p:.3}"),
        _ => "–".into(),
    }
}

pub(super) fn opt(v: Option<f64>, f: impl Fn(f64) -> String) -> String {
    v.map_or_else(|| "–".into(), f)
}

fn missing(what: &str, how: &str) -> String {
    format!("<p class=\"missing\">Not available: {}. {}</p>\n", escape(what), how)
}

fn with_unit(name: &str, unit: Option<&str>) -> String {
    match unit {
        Some(u) if !u.is_empty() => format!("{} ({})", escape(name), escape(u)),
        _ => escape(name),
    }
}

pub(super) fn figure_html(f: Result<Figure, FigureError>, caption: &str) -> String {
    match f {
        Ok(f) => format!(
            "<figure id=\"fig-{}\">\n{}\n<figcaption>{}</figcaption>\n</figure>\n",
            escape(&f.id),
            f.svg.trim(),
            caption
        ),
        Err(e) => format!("<p class=\"missing\">{}</p>\n", escape(&e.to_string())),
    }
}

/// The floor plan's compartment, loggers and openings, for a section's maps.
fn floor(d: &ReportData) -> super::moves::Floor<'_> {
    super::moves::Floor { extent: extent(d), sensors: sensors(d), openings: openings(d) }
}

fn extent(d: &ReportData) -> Option<(f64, f64)> {
    d.compartment.map(|c| (c.length, c.width))
}

fn sensors(d: &ReportData) -> &[SensorPoint] {
    d.layout.as_ref().map_or(&[], |l| l.sensors.as_slice())
}

fn openings(d: &ReportData) -> &[OpeningSegment] {
    d.layout.as_ref().map_or(&[], |l| l.openings.as_slice())
}

const RUN: &str = "It is produced by <code>potclim run STUDY</code>.";

/// What each verdict word means, in the page's words.
fn word_meaning(w: &str) -> &'static str {
    match w {
        "covariate" => {
            "a measured microclimate driver (or the distance to an opening) explains the spatial pattern"
        }
        "correlation" => {
            "something unmeasured that varies smoothly over the floor explains the pattern better than any measured driver"
        }
        "both" => "measured drivers explain part of the pattern and a smooth unmeasured effect remains",
        "none" => "no spatial pattern beyond the experimental design stands out",
        _ => "an unrecognised verdict word",
    }
}

fn section_verdict(d: &ReportData, out: &mut String) {
    out.push_str("<section id=\"verdict\">\n<h2>1. The answer</h2>\n");
    let Some(v) = &d.verdict else {
        out.push_str(&missing("the model comparison and its verdict", RUN));
        out.push_str("</section>\n");
        return;
    };
    let _ = write!(
        out,
        "<div class=\"answer\"><div class=\"word\">{}</div><div><p><strong>{}.</strong></p>",
        escape(&v.word),
        escape(&capitalise(word_meaning(&v.word))),
    );
    let unit = v.trait_unit.as_deref().unwrap_or("trait units");
    if let Some(h) = &v.headline {
        plain_lines(out, v, h, unit);
    }
    let _ = write!(
        out,
        "<p class=\"why\">{} The verdict rests on the model <code>{}</code>.",
        rich(&v.reason),
        escape(&v.chosen_model)
    );
    if let Some(b) = v.best_by_aic.as_deref().filter(|b| *b != v.chosen_model) {
        let _ = write!(out, " The lowest AIC belongs to <code>{}</code>.", escape(b));
    }
    out.push_str("</p>");
    let warnings: Vec<&String> =
        v.headline.iter().flat_map(|h| h.warnings.iter()).chain(v.map_warnings.iter()).collect();
    if !warnings.is_empty() {
        out.push_str("<ul class=\"warn\">");
        for w in warnings {
            let _ = write!(out, "<li><strong>Less sure than it looks:</strong> {}</li>", rich(w));
        }
        out.push_str("</ul>");
    }
    out.push_str("</div></div>\n");
    if let Some(h) = &v.headline {
        what_next(out, h, v);
    }
    super::residual_structure::render(out, &v.structures);
    out.push_str("<dl class=\"words\">\n");
    for w in ["covariate", "correlation", "both", "none"] {
        let _ = writeln!(out, "<dt>{w}</dt><dd>{}</dd>", word_meaning(w));
    }
    out.push_str("</dl>\n<h3>The drivers</h3>\n");
    if v.drivers.is_empty() {
        out.push_str("<p>No driver was declared or computed.</p>\n");
    } else {
        let unit = v.trait_unit.as_deref().unwrap_or("trait unit");
        let _ = write!(
            out,
            "<div class=\"scroll\"><table>\n<tr><th>driver (unit)</th><th class=\"n\">effect per driver unit ({})</th>\
             <th class=\"n\">SE</th><th class=\"n\">95 % CI</th><th class=\"n\">effect incl. mapping</th>\
             <th class=\"n\">SE incl. mapping</th><th class=\"n\">95 % CI incl. mapping</th>\
             <th class=\"n\">p</th><th class=\"n\">ΔAIC alone</th>\
             <th class=\"n\">ΔAIC with correlation</th><th class=\"n\">VIF</th><th>note</th></tr>\n",
            escape(unit)
        );
        // One number of decimals for every effect column (trait units per
        // driver unit): two significant digits of the smallest SE.
        let dec = decimals_for(
            v.drivers.iter().flat_map(|r| std::iter::once(r.se).chain(r.se_with_mapping_uncertainty)),
            2,
        );
        let e = |x: f64| fixed(x, dec);
        for r in &v.drivers {
            let _ = writeln!(
                out,
                "<tr><td>{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{} to {}</td>\
                 <td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td>\
                 <td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td>\
                 <td class=\"n\">{}</td><td>{}</td></tr>",
                with_unit(&r.name, r.unit.as_deref()),
                e(r.estimate),
                e(r.se),
                e(r.ci_low),
                e(r.ci_high),
                opt(r.estimate_with_mapping_uncertainty, e),
                opt(r.se_with_mapping_uncertainty, e),
                match (r.ci_low_with_mapping_uncertainty, r.ci_high_with_mapping_uncertainty) {
                    (Some(a), Some(b)) => format!("{} to {}", e(a), e(b)),
                    _ => "–".into(),
                },
                p_value(r.p_value),
                opt(r.delta_aic, |x| fixed(x, 1)),
                opt(r.delta_aic_with_correlation, |x| fixed(x, 1)),
                opt(r.vif, |x| fixed(x, 1)),
                if r.confounded { "<span class=\"flag\">spatially confounded</span>" } else { "" }
            );
        }
        out.push_str("</table></div>\n<p class=\"lead\">Effect: change of the trait per unit of the driver. Incl. mapping: the effect, its standard error and interval once the uncertainty of the kriged driver map is included: the model is refitted on imputations of the driver drawn given the loggers and the trait, and the fits are combined by Rubin's rules; the plug-in columns treat the map as exact. ΔAIC: AIC of the model without the driver minus AIC with it, alone with independent errors and with the best correlation model; positive values mean the driver improves the model. VIF: variance inflation against the other drivers; above about 5 the drivers are hard to tell apart (common practice). Spatially confounded: the effect vanishes once spatial correlation is modelled.</p>\n");
    }
    out.push_str("<h3>What the data can and cannot show</h3>\n<ul class=\"cautions\">\n");
    let mut shown: Vec<&str> = Vec::new();
    for c in &v.cautions {
        if !shown.contains(&c.as_str()) {
            shown.push(c);
            let _ = writeln!(out, "<li>{}</li>", rich(c));
        }
    }
    out.push_str(
        "<li>An association between a driver and the trait across the floor is not proof that the driver causes it: anything else that varies the same way over the floor would look the same.</li>\n\
         <li>A driver is known only where loggers stand; between them it is interpolated, and with few loggers the standard errors of the maps (section 3) are wide.</li>\n</ul>\n</section>\n",
    );
}

/// Escape `s` and show each `name` in backticks as code.
pub(super) fn rich(s: &str) -> String {
    let mut out = String::new();
    for (i, part) in escape(s).split('`').enumerate() {
        if i % 2 == 1 {
            let _ = write!(out, "<code>{part}</code>");
        } else {
            out.push_str(part);
        }
    }
    out
}

/// A number for running text: four significant digits, never `-0`.
fn plain(v: f64) -> String {
    let s = sig(v, 4);
    if s.trim_start_matches('-').chars().all(|c| c == '0' || c == '.') {
        s.trim_start_matches('-').to_string()
    } else {
        s
    }
}

/// How many times more likely, in words.
fn times(ratio: f64) -> String {
    if ratio >= 1000.0 {
        "more than 1000 times".into()
    } else if ratio >= 10.0 {
        format!("about {:.0} times", ratio)
    } else {
        format!("{:.1} times", ratio)
    }
}

/// The three plain lines under the verdict: how big, which interval, how sure.
fn plain_lines(out: &mut String, v: &VerdictSection, h: &Headline, unit: &str) {
    out.push_str("<ul class=\"plain\">");
    if let Some(e) = &h.effect {
        let du = v.drivers.iter().find(|d| d.name == e.driver).and_then(|d| d.unit.clone());
        let du = du.map(|u| format!(" {}", escape(&u))).unwrap_or_default();
        let (more_less, size) = if e.effect < 0.0 { ("less", -e.effect) } else { ("more", e.effect) };
        // One format per quantity: three significant digits of the
        // driver's spread for its values, of the interval's width for the
        // effect.
        let dx = decimals_for([e.high - e.low], 3);
        let dy = decimals_for([e.ci_high - e.ci_low], 3);
        let _ = write!(
            out,
            "<li><strong>How big:</strong> across the floor, pots with {}{du} more <code>{}</code> (from {}{du}, the 10th percentile of the pots, to {}{du}, the 90th) have {} {} {more_less} of the trait.</li>",
            fixed(e.high - e.low, dx),
            escape(&e.driver),
            fixed(e.low, dx),
            fixed(e.high, dx),
            fixed(size, dy),
            escape(unit),
        );
        let _ = write!(
            out,
            "<li><strong>Quote:</strong> a change of {} {} (95 % interval {} to {} {}){}.</li>",
            fixed(e.effect, dy),
            escape(unit),
            fixed(e.ci_low, dy),
            fixed(e.ci_high, dy),
            escape(unit),
            if e.includes_mapping {
                ", which includes the uncertainty of the driver's map"
            } else {
                ", treating the driver's values as exact"
            }
        );
    }
    let c = &h.certainty;
    let _ = write!(
        out,
        "<li><strong>How sure:</strong> models of this kind carry {:.0} % of the Akaike weight of all models compared (the chosen model alone {:.0} %)",
        100.0 * c.kind_weight,
        100.0 * c.chosen_weight
    );
    match (&c.other_model, c.other_delta, c.evidence_ratio) {
        (Some(m), Some(d), Some(r)) if d >= 0.0 => {
            let _ = write!(
                out,
                "; the best of them is {} as likely as the best model of another kind, <code>{}</code> ({} AIC units behind)",
                times(r),
                escape(m),
                fixed(d, 1)
            );
        }
        (Some(m), Some(d), Some(r)) => {
            let _ = write!(
                out,
                "; the best model of another kind, <code>{}</code>, is {} as likely ({} AIC units better, within the tie margin, so the simpler model was chosen): the choice is not sure",
                escape(m),
                times(1.0 / r),
                fixed(-d, 1)
            );
        }
        _ => {}
    }
    out.push_str(".</li></ul>");
}

/// What the data suggest doing next.
fn what_next(out: &mut String, h: &Headline, v: &VerdictSection) {
    if h.next_logger.is_none() && h.blocking.is_none() {
        return;
    }
    out.push_str("<h3>What next</h3>\n<ul class=\"next\">\n");
    if let Some(n) = &h.next_logger {
        let du =
            v.drivers.iter().find(|d| d.name == n.driver).and_then(|d| d.unit.clone()).unwrap_or_default();
        let _ = writeln!(
            out,
            "<li>An extra logger would cut the map's error most at pot {} (x {} m, y {} m), where the map's standard error of <code>{}</code> (section 3) is largest ({} {}).</li>",
            escape(&n.pot),
            fixed(n.x, 2),
            fixed(n.y, 2),
            escape(&n.driver),
            plain(n.se),
            escape(&du)
        );
    }
    if let Some(b) = &h.blocking {
        let _ = writeln!(out, "<li>{}</li>", rich(b));
    }
    out.push_str("</ul>\n");
}

fn capitalise(s: &str) -> String {
    let mut c = s.chars();
    c.next().map_or_else(String::new, |f| f.to_uppercase().chain(c).collect())
}

fn layout_figure(d: &ReportData, l: &LayoutSection) -> Result<Figure, FigureError> {
    figures::value_map(&figures::MapSpec {
        id: "layout".into(),
        title: format!("{} of every pot, sensors and openings", l.trait_name),
        extent: extent(d),
        points: l.pots.iter().map(|p| (p.x, p.y, p.value)).collect(),
        scale: super::colour::Scale::sequential(l.pots.iter().filter_map(|p| p.value)),
        legend: format!("{} ({})", l.trait_name, l.trait_unit),
        sensors: &l.sensors,
        openings: &l.openings,
        sensor_values: Vec::new(),
        wide: true,
    })
}

fn section_layout(d: &ReportData, out: &mut String) {
    out.push_str("<section id=\"layout\">\n<h2>2. Where everything stands</h2>\n");
    let Some(l) = &d.layout else {
        out.push_str(&missing("the pot and sensor layout", RUN));
        out.push_str("</section>\n");
        return;
    };
    out.push_str(&figure_html(
        layout_figure(d, l),
        "Seen from above. Each disc is a pot, coloured by the trait (grey rings: no value). Triangles are the climate loggers, thick black lines the openings.",
    ));
    if !l.sensors.is_empty() {
        out.push_str("<h3>Loggers</h3>\n<table>\n<tr><th>sensor</th><th class=\"n\">x (m)</th><th class=\"n\">y (m)</th></tr>\n");
        for s in &l.sensors {
            let _ = writeln!(
                out,
                "<tr><td>{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td></tr>",
                escape(&s.id),
                fixed(s.x, 2),
                fixed(s.y, 2)
            );
        }
        out.push_str("</table>\n");
    }
    if !l.openings.is_empty() {
        out.push_str("<h3>Openings</h3>\n<table>\n<tr><th>opening</th><th>from (x, y m)</th><th>to (x, y m)</th></tr>\n");
        for o in &l.openings {
            let _ = writeln!(
                out,
                "<tr><td>{}</td><td>{}, {}</td><td>{}, {}</td></tr>",
                escape(&o.name),
                fixed(o.from[0], 2),
                fixed(o.from[1], 2),
                fixed(o.to[0], 2),
                fixed(o.to[1], 2)
            );
        }
        out.push_str("</table>\n");
    }
    out.push_str("<h3>Pots per factor combination</h3>\n");
    match &l.counts {
        None => out.push_str(&missing("the design count table", RUN)),
        Some(c) => {
            let _ = write!(
                out,
                "<div class=\"scroll\"><table>\n<tr><th>{} \\ {}</th>",
                escape(&c.row_factor),
                escape(&c.col_factor)
            );
            for cl in &c.col_levels {
                let _ = write!(out, "<th class=\"n\">{}</th>", escape(cl));
            }
            out.push_str("</tr>\n");
            for (i, rl) in c.row_levels.iter().enumerate() {
                let _ = write!(out, "<tr><td>{}</td>", escape(rl));
                for j in 0..c.col_levels.len() {
                    let v = c.counts.get(i).and_then(|r| r.get(j));
                    let _ = write!(out, "<td class=\"n\">{}</td>", v.map_or("–".into(), |v| v.to_string()));
                }
                out.push_str("</tr>\n");
            }
            out.push_str("</table></div>\n");
        }
    }
    out.push_str("</section>\n");
}

fn section_climate(d: &ReportData, out: &mut String) {
    out.push_str("<section id=\"climate\">\n<h2>3. The climate the pots lived in</h2>\n");
    let Some(c) = &d.climate else {
        out.push_str(&missing("logger data, indicators and maps", RUN));
        out.push_str("</section>\n");
        return;
    };
    out.push_str("<h3>Mapped indicators</h3>\n");
    if c.surfaces.is_empty() {
        out.push_str(&missing("mapped indicators (no indicator was mapped onto the pots)", RUN));
    }
    for s in &c.surfaces {
        let _ = writeln!(out, "<h3>{}</h3>", with_unit(&s.name, Some(&s.unit)));
        if let Some(desc) = &s.description {
            let _ = writeln!(out, "<p class=\"lead\">{}</p>", escape(desc));
        }
        out.push_str("<div class=\"figs\">\n");
        match figures::indicator_maps(
            &s.name,
            &s.unit,
            &s.points,
            extent(d),
            sensors(d),
            openings(d),
            &s.loggers,
        ) {
            Ok((v, se)) => {
                out.push_str(&figure_html(
                    Ok(v),
                    "The indicator at each pot, interpolated from the loggers (triangles, each filled with and labelled by its own value over the study period; grey: no readings) by kriging; thick lines: openings. Where a pot beside a logger has a very different colour, the map does not honour that logger.",
                ));
                out.push_str(&figure_html(
                    Ok(se),
                    "Its standard error: small near the loggers, large far from them. Read the left map only where this one is small.",
                ));
            }
            Err(e) => out.push_str(&figure_html(Err(e), "")),
        }
        out.push_str("</div>\n");
        super::map_check::render(out, s);
    }
    out.push_str("<h3>Daily series per logger</h3>\n");
    if c.series.is_empty() {
        out.push_str(&missing("daily series", RUN));
    } else {
        out.push_str("<div class=\"figs\">\n");
        let order = logger_order(c);
        for s in &c.series {
            out.push_str(&figure_html(
                figures::daily_series(s, &order),
                "One line per logger, each logger in its own colour in every chart (key on the right); gaps are days without data.",
            ));
        }
        out.push_str("</div>\n");
    }
    out.push_str("<h3>Quality control of the logger files</h3>\n");
    if c.qc.is_empty() {
        out.push_str(&missing("the quality-control summary", RUN));
    } else {
        // Four columns whatever the number of reasons, so the table fits an
        // A4 page: the reasons share one column, as "reason count" pairs.
        out.push_str("<table class=\"qc\">\n<tr><th>file</th><th class=\"n\">rows read</th><th class=\"n\">kept</th><th class=\"n\">flagged</th><th>flagged readings by reason</th></tr>\n");
        for q in &c.qc {
            let reasons: Vec<String> = q.reasons.iter().map(|(r, n)| format!("{} {n}", escape(r))).collect();
            let _ = writeln!(
                out,
                "<tr><td class=\"file\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td>{}</td></tr>",
                escape(&q.file),
                q.rows_read,
                q.rows_kept,
                q.rows_flagged,
                if reasons.is_empty() { "–".to_string() } else { reasons.join(", ") }
            );
        }
        out.push_str("</table>\n<p class=\"lead\">Rows flagged: rows with at least one flagged reading. By reason: flagged readings per reason; a row can carry more than one flag.</p>\n");
    }
    out.push_str("<h3>Gaps in the records</h3>\n");
    if c.gaps.is_empty() {
        out.push_str("<p>No gap was recorded.</p>\n");
    } else {
        const MAX_GAPS: usize = 100;
        let mut gaps: Vec<&GapRow> = c.gaps.iter().collect();
        gaps.sort_by(|a, b| b.hours.total_cmp(&a.hours).then_with(|| a.from.cmp(&b.from)));
        out.push_str("<div class=\"scroll\"><table>\n<tr><th>sensor</th><th>variable</th><th>from</th><th>to</th><th class=\"n\">length (h)</th></tr>\n");
        for g in gaps.iter().take(MAX_GAPS) {
            let _ = writeln!(
                out,
                "<tr><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td class=\"n\">{}</td></tr>",
                escape(&g.sensor),
                escape(&g.variable),
                escape(&g.from),
                escape(&g.to),
                fixed(g.hours, 1)
            );
        }
        out.push_str("</table></div>\n");
        if gaps.len() > MAX_GAPS {
            let _ = writeln!(
                out,
                "<p class=\"lead\">The {MAX_GAPS} longest of {} gaps are shown; every gap is in the report data file.</p>",
                gaps.len()
            );
        }
    }
    out.push_str("</section>\n");
}

/// Every logger of the daily series once, in order of first appearance: the
/// shared order that gives each logger one colour in every chart.
fn logger_order(c: &ClimateSection) -> Vec<String> {
    let mut order: Vec<String> = Vec::new();
    for t in c.series.iter().flat_map(|s| s.sensors.iter()) {
        if !order.contains(&t.sensor) {
            order.push(t.sensor.clone());
        }
    }
    order
}

fn section_spatial(d: &ReportData, out: &mut String) {
    out.push_str("<section id=\"spatial\">\n<h2>4. Spatial structure</h2>\n");
    if d.variograms.is_empty() {
        out.push_str(&missing("variograms", RUN));
        out.push_str("</section>\n");
        return;
    }
    out.push_str("<p class=\"lead\">A variogram shows how different two values are, on average, as a function of the distance between them. A curve that rises and levels off means nearby pots (or loggers) are more alike than distant ones; the level is the sill, the height at zero distance the nugget, and the distance where it levels off the range. A flat cloud means no spatial structure.</p>\n<div class=\"figs\">\n");
    for p in &d.variograms {
        out.push_str(&figure_html(figures::variogram(p), &variogram_caption(d, p)));
    }
    out.push_str("</div>\n</section>\n");
}

/// The caption of one variogram: what the marks are (lines only when the
/// panel has fitted curves), the subject's qualifier that the title leaves
/// out, the fits' table, and a sentence for every fit whose practical range
/// lies beyond the largest lag shown or the room's diagonal.
fn variogram_caption(d: &ReportData, p: &VariogramPanel) -> String {
    let mut cap = String::new();
    let short = figures::short_subject(&p.subject);
    if short != p.subject {
        let _ = write!(
            cap,
            "{}: {}. ",
            escape(short),
            escape(p.subject[short.len()..].trim().trim_matches(|c| c == '(' || c == ')'))
        );
    }
    cap.push_str("Circles: experimental semivariance per lag bin (larger = more pairs).");
    if p.fits.is_empty() {
        cap.push_str(" No model is fitted to this variogram: it is a check, and about 1 at every lag means no spatial structure is left.");
        return cap;
    }
    cap.push_str(" Lines: the fitted families (key on the right); dashed: nugget, sill and practical range of the first.");
    let nd = decimals_for(p.fits.iter().flat_map(|f| [f.nugget, f.sill]), 3);
    cap.push_str(
        "<table><tr><th>family</th><th class=\"n\">nugget</th><th class=\"n\">sill</th><th class=\"n\">range (m)</th><th class=\"n\">practical range (m)</th></tr>",
    );
    for f in &p.fits {
        let _ = write!(
            cap,
            "<tr><td>{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td></tr>",
            escape(&f.family),
            fixed(f.nugget, nd),
            fixed(f.sill, nd),
            fixed(f.range, 2),
            opt(f.practical_range, |r| fixed(r, 2))
        );
    }
    let _ = write!(cap, "</table>Nugget and sill in {}.", escape(&p.unit));
    let max_lag = p.bins.iter().map(|b| b.lag).fold(0.0f64, f64::max);
    let diagonal = d.compartment.map(|c| c.length.hypot(c.width));
    for f in &p.fits {
        let Some(r) = f.practical_range.filter(|r| r.is_finite()) else { continue };
        let room = match diagonal {
            Some(diag) if r > diag => Some(format!("the room's diagonal ({} m)", fixed(diag, 1))),
            _ if r > max_lag => Some(format!("the largest lag measured ({} m)", fixed(max_lag, 1))),
            _ => None,
        };
        if let Some(room) = room {
            let _ = write!(
                cap,
                " The {} fit's practical range, {} m, is beyond {room}: within this room its curve never levels off, so its sill is an extrapolation and only its rise over the lags shown is supported by the data.",
                escape(&f.family),
                fixed(r, 1)
            );
        }
    }
    cap
}

fn section_models(d: &ReportData, out: &mut String) {
    out.push_str("<section id=\"models\">\n<h2>5. The competing models</h2>\n");
    let Some(m) = &d.models else {
        out.push_str(&missing("the model comparison", RUN));
        out.push_str("</section>\n");
        return;
    };
    let chosen = d.verdict.as_ref().map(|v| v.chosen_model.as_str());
    let mut rows: Vec<&ComparisonRow> = m.comparison.iter().collect();
    rows.sort_by(|a, b| a.aic.total_cmp(&b.aic).then_with(|| a.name.cmp(&b.name)));
    out.push_str("<p class=\"lead\">All models were fitted by maximum likelihood on the same pots, so their AIC values compare. Lower AIC is better; the Akaike weight is the share of support among these models. The chosen model is highlighted.</p>\n");
    out.push_str("<div class=\"scroll\"><table>\n<tr><th>model</th><th>drivers</th><th>errors</th><th class=\"n\">parameters</th><th class=\"n\">log-likelihood</th><th class=\"n\">AIC</th><th class=\"n\">BIC</th><th class=\"n\">ΔAIC</th><th class=\"n\">Akaike weight</th></tr>\n");
    for r in &rows {
        let errors = match &r.correlation {
            None => "independent".to_string(),
            Some(c) if r.nugget => format!("{} + nugget", escape(c)),
            Some(c) => escape(c),
        };
        let drivers = if r.drivers.is_empty() {
            "–".to_string()
        } else {
            r.drivers.iter().map(|s| escape(s)).collect::<Vec<_>>().join(", ")
        };
        let class = if Some(r.name.as_str()) == chosen { " class=\"chosen\"" } else { "" };
        let _ = writeln!(
            out,
            "<tr{class}><td>{}</td><td>{drivers}</td><td>{errors}</td><td class=\"n\">{}</td><td class=\"n\">{}</td>\
             <td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td></tr>",
            escape(&r.name),
            r.n_params,
            fixed(r.loglik, 2),
            fixed(r.aic, 2),
            fixed(r.bic, 2),
            fixed(r.delta_aic, 2),
            fixed(r.akaike_weight, 3)
        );
    }
    out.push_str("</table></div>\n");
    let shown_rows = figures::models_that_matter(&m.comparison, chosen, m.tie_margin);
    let shown = shown_rows.len();
    let deltas: Vec<f64> = shown_rows.iter().map(|r| r.delta_aic).collect();
    let cut_note = match figures::delta_aic_cut(&deltas, m.tie_margin) {
        Some(end) => format!(
            " The axis ends at {end:.1} units so that the short bars can be read; the longest bar is cut there and carries its value."
        ),
        None => String::new(),
    };
    let _ = write!(
        out,
        "{}",
        figure_html(
            figures::delta_aic_bars(&m.comparison, chosen, m.tie_margin),
            &format!(
                "Bars: AIC distance to the best model, for {shown} of the {} models: the best of each kind (with or without drivers, independent or spatially correlated errors) and every model within the tie margin; the table above lists all. Models left of the dashed line are within the tie margin of the verdict rule and count as equally supported; the chosen model (accent colour) is the simplest of them.{cut_note}",
                m.comparison.len()
            ),
        )
    );
    out.push_str("<h3>Analysis of variance</h3>\n");
    if m.anova.is_empty() {
        out.push_str(&missing("ANOVA tables", RUN));
    } else {
        out.push_str("<p class=\"lead\">How much of the trait's variation the experimental design explains before any position or driver is considered. The same tables, of every type, are written by <code>potclim fit</code> (<code>anova.csv</code>).</p>\n");
    }
    for t in &m.anova {
        let _ = write!(out, "<p><strong>{}</strong>", escape(&t.model));
        if let Some(k) = &t.kind {
            let _ = write!(out, " — {}", escape(k));
        }
        out.push_str("</p>\n<table>\n<tr><th>term</th><th class=\"n\">df</th><th class=\"n\">sum of squares</th><th class=\"n\">mean square</th><th class=\"n\">F</th><th class=\"n\">p</th></tr>\n");
        let dec = decimals_for(t.rows.iter().flat_map(|r| r.sum_sq.into_iter().chain(r.mean_sq)), 3).min(2);
        for r in &t.rows {
            let _ = writeln!(
                out,
                "<tr><td>{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td></tr>",
                escape(&r.term),
                df(r.df),
                opt(r.sum_sq, |x| fixed(x, dec)),
                opt(r.mean_sq, |x| fixed(x, dec)),
                opt(r.f, |x| fixed(x, 2)),
                p_value(r.p_value)
            );
        }
        out.push_str("</table>\n");
    }
    out.push_str("<h3>Residuals before and after</h3>\n");
    let unit = m.residual_unit.as_deref().unwrap_or("trait unit");
    let maps = figures::residual_maps(
        m.residuals_before.as_ref(),
        m.residuals_after.as_ref(),
        unit,
        extent(d),
        sensors(d),
        openings(d),
    );
    if maps.is_empty() {
        out.push_str(&missing("residual maps", RUN));
    } else {
        out.push_str("<div class=\"figs\">\n");
        for f in maps {
            out.push_str(&figure_html(
                f,
                "Residual = observed minus fitted trait. Blue: smaller than the model expects, red: larger; one colour scale for both maps. Patches of one colour mean structure left unexplained.",
            ));
        }
        out.push_str("</div>\n");
    }
    let morans: Vec<(&str, &ResidualMap)> =
        [("before", m.residuals_before.as_ref()), ("after", m.residuals_after.as_ref())]
            .into_iter()
            .filter_map(|(w, r)| r.map(|r| (w, r)))
            .filter(|(_, r)| r.moran.is_some())
            .collect();
    if !morans.is_empty() {
        out.push_str("<h3>Moran's I of the residuals</h3>\n<table>\n<tr><th>residuals of</th><th class=\"n\">I</th><th class=\"n\">expected if no autocorrelation</th><th class=\"n\">variance</th><th class=\"n\">p</th><th>test</th></tr>\n");
        for (_, r) in morans {
            let mi = r.moran.as_ref().expect("filtered");
            let _ = writeln!(
                out,
                "<tr><td>{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td>{}</td></tr>",
                escape(&r.model),
                fixed(mi.i, 4),
                fixed(mi.expectation, 4),
                fixed(mi.variance, 4),
                p_value(Some(mi.p_value)),
                escape(mi.note.as_deref().unwrap_or(""))
            );
        }
        out.push_str("</table>\n<p class=\"lead\">I near its expectation (and a large p) means neighbouring residuals are no more alike than distant ones.</p>\n");
    }
    let notes = d.verdict.as_ref().map_or(&[][..], |v| v.technical_notes.as_slice());
    if !notes.is_empty() {
        out.push_str("<h3>Technical notes</h3>\n<p class=\"lead\">How the uncertainty of each mapped driver was carried into its effect, for a reader who wants to check the method. The standard errors named here are of the study-period values kriged from the loggers' own study-period values, another quantity than the map's standard error of section 3.</p>\n<ul class=\"technical\">\n");
        for n in notes {
            let _ = writeln!(out, "<li>{}</li>", rich(n));
        }
        out.push_str("</ul>\n");
    }
    out.push_str("</section>\n");
}

fn section_means(d: &ReportData, out: &mut String) {
    out.push_str("<section id=\"means\">\n<h2>6. Means once position is accounted for</h2>\n");
    if d.adjusted_means.is_empty() {
        out.push_str(&missing("adjusted means", RUN));
        out.push_str("</section>\n");
        return;
    }
    let unit = escape(d.adjusted_means_unit.as_deref().unwrap_or("trait unit"));
    let _ = writeln!(
        out,
        "<p class=\"lead\">Adjusted mean: the mean of each level under the chosen model, at the average of the drivers, with its standard error (SE). Levels are listed from the highest adjusted mean down. Change: adjusted minus plain mean (the plain factorial model, position ignored); positive means the level was held back by where its pots stood. Shaded: a change larger than the level's SE. All values in {unit}.</p>"
    );
    let mut factors: Vec<&str> = Vec::new();
    for m in &d.adjusted_means {
        if !factors.contains(&m.factor.as_str()) {
            factors.push(&m.factor);
        }
    }
    for f in factors {
        let mut rows: Vec<&AdjustedMean> = d.adjusted_means.iter().filter(|m| m.factor == f).collect();
        rows.sort_by(|a, b| b.mean.total_cmp(&a.mean).then_with(|| a.level.cmp(&b.level)));
        // One number of decimals for the whole table: two significant
        // digits of the smallest SE.
        let dec = decimals_for(rows.iter().map(|m| m.se), 2);
        let _ = writeln!(
            out,
            "<h3>{}</h3>\n<table>\n<tr><th>level</th><th class=\"n\">adjusted mean</th><th class=\"n\">SE</th><th class=\"n\">change from position</th><th class=\"n\">plain mean</th></tr>",
            escape(f)
        );
        for m in &rows {
            let class = if m.change.abs() > m.se { " class=\"moved\"" } else { "" };
            let _ = writeln!(
                out,
                "<tr{class}><td>{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td></tr>",
                escape(&m.level),
                fixed(m.mean, dec),
                fixed(m.se, dec),
                signed(m.change, dec),
                fixed(m.plain_mean, dec),
            );
        }
        out.push_str("</table>\n");
        let moved: Vec<&str> =
            rows.iter().filter(|m| m.change.abs() > m.se).map(|m| m.level.as_str()).collect();
        let reordered = {
            let mut plain: Vec<&AdjustedMean> = rows.clone();
            plain.sort_by(|a, b| b.plain_mean.total_cmp(&a.plain_mean).then_with(|| a.level.cmp(&b.level)));
            plain.iter().zip(&rows).any(|(a, b)| a.level != b.level)
        };
        if moved.is_empty() {
            let _ = writeln!(
                out,
                "<p>Position changes no mean of <code>{}</code> by more than its standard error{}: for this factor the plain means tell the same story.</p>",
                escape(f),
                if reordered {
                    " (the order of some close levels changes, within their SEs)"
                } else {
                    ", and the order of the levels stays the same"
                }
            );
        } else {
            let _ = writeln!(
                out,
                "<p>Position moves {} of the {} levels of <code>{}</code> by more than their standard error ({}){}.</p>",
                moved.len(),
                rows.len(),
                escape(f),
                moved.iter().map(|l| escape(l)).collect::<Vec<_>>().join(", "),
                if reordered {
                    "; the order of the levels changes"
                } else {
                    "; the order of the levels stays the same"
                }
            );
        }
    }
    out.push_str("</section>\n");
}

/// `v` with `decimals` decimals and an explicit sign; zero unsigned.
fn signed(v: f64, decimals: usize) -> String {
    let s = fixed(v, decimals);
    if v > 0.0 && s.chars().any(|c| c.is_ascii_digit() && c != '0') { format!("+{s}") } else { s }
}

/// Degrees of freedom: whole numbers as integers, others with two decimals
/// (Satterthwaite-type df are fractional).
fn df(v: f64) -> String {
    if v.is_finite() && v.fract() == 0.0 { format!("{v:.0}") } else { fixed(v, 2) }
}

fn section_provenance(d: &ReportData, out: &mut String) {
    out.push_str("<section id=\"provenance\">\n<h2>7. How this report was made</h2>\n");
    let Some(p) = &d.provenance else {
        out.push_str(&missing("provenance (inputs, checksums, version, seed)", RUN));
        out.push_str("</section>\n");
        return;
    };
    let _ = writeln!(
        out,
        "<table>\n<tr><th>potclim version</th><td>{}</td></tr>\n<tr><th>seed</th><td>{}</td></tr>\n<tr><th>run started</th><td>{}</td></tr>\n<tr><th>run time</th><td>{}</td></tr>\n</table>",
        escape(&p.tool_version),
        p.seed,
        escape(&p.started),
        opt(p.seconds, |s| format!("{} s", fixed(s, 1)))
    );
    out.push_str("<h3>Input files</h3>\n<div class=\"scroll\"><table>\n<tr><th>file</th><th class=\"n\">bytes</th><th>SHA-256</th></tr>\n");
    for f in &p.inputs {
        let _ = writeln!(
            out,
            "<tr><td>{}</td><td class=\"n\">{}</td><td><code>{}</code></td></tr>",
            escape(&f.path),
            f.bytes,
            escape(&f.sha256)
        );
    }
    out.push_str("</table></div>\n<h3>The study file</h3>\n");
    let _ = writeln!(out, "<pre class=\"study\">{}</pre>", escape(&p.study_file));
    out.push_str("</section>\n");
}

/// Render the whole report as one self-contained HTML document.
pub fn render_html(d: &ReportData) -> String {
    let title = if d.title.trim().is_empty() { "Untitled study" } else { d.title.as_str() };
    let mut out = String::with_capacity(256 * 1024);
    let _ = write!(
        out,
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\"/>\n\
         <meta name=\"viewport\" content=\"width=device-width, initial-scale=1\"/>\n\
         <title>{} — potclim report</title>\n<style>\n{}</style>\n</head>\n<body>\n<header>\n<h1>{}</h1>\n\
         <p class=\"lead\">Is the spatial pattern of the trait explained by the measured microclimate, by an unmeasured spatial effect, by both, or by neither?</p>\n\
         <nav><ol><li><a href=\"#verdict\">1. Answer</a></li><li><a href=\"#layout\">2. Layout</a></li>\
         <li><a href=\"#climate\">3. Climate</a></li>{}<li><a href=\"#spatial\">4. Spatial structure</a></li>\
         <li><a href=\"#models\">5. Models</a></li><li><a href=\"#means\">6. Adjusted means</a></li>\
         {}<li><a href=\"#provenance\">7. Provenance</a></li></ol></nav>\n</header>\n<main>\n",
        escape(title),
        CSS,
        escape(title),
        if d.moves.is_some() { "<li><a href=\"#moves\">Pots that moved</a></li>" } else { "" },
        if d.over_time.is_some() { "<li><a href=\"#over-time\">Over time</a></li>" } else { "" }
    );
    section_verdict(d, &mut out);
    section_layout(d, &mut out);
    section_climate(d, &mut out);
    if let Some(m) = &d.moves {
        super::moves::section(m, floor(d), &mut out);
    }
    section_spatial(d, &mut out);
    section_models(d, &mut out);
    section_means(d, &mut out);
    if let Some(s) = &d.over_time {
        super::over_time::section(s, extent(d), &mut out);
    }
    section_provenance(d, &mut out);
    let version = d.provenance.as_ref().map_or(String::new(), |p| format!(" {}", escape(&p.tool_version)));
    let _ = write!(
        out,
        "</main>\n<footer>Written by potclim{version}. The data behind every table and figure is in <code>report_data.json</code> beside this file.</footer>\n</body>\n</html>\n"
    );
    out
}

/// Every figure of the page, in page order (for export as separate files).
/// Figures without data are left out.
pub fn all_figures(d: &ReportData) -> Vec<Figure> {
    let mut out: Vec<Result<Figure, FigureError>> = Vec::new();
    if let Some(l) = &d.layout {
        out.push(layout_figure(d, l));
    }
    if let Some(c) = &d.climate {
        for s in &c.surfaces {
            match figures::indicator_maps(
                &s.name,
                &s.unit,
                &s.points,
                extent(d),
                sensors(d),
                openings(d),
                &s.loggers,
            ) {
                Ok((a, b)) => out.extend([Ok(a), Ok(b)]),
                Err(e) => out.push(Err(e)),
            }
        }
        let order = logger_order(c);
        out.extend(c.series.iter().map(|s| figures::daily_series(s, &order)));
    }
    if let Some(m) = &d.moves {
        out.extend(super::moves::figures(m, floor(d)).into_iter().map(|(f, _)| f));
    }
    out.extend(d.variograms.iter().map(figures::variogram));
    if let Some(m) = &d.models {
        let chosen = d.verdict.as_ref().map(|v| v.chosen_model.as_str());
        out.push(figures::delta_aic_bars(&m.comparison, chosen, m.tie_margin));
        out.extend(figures::residual_maps(
            m.residuals_before.as_ref(),
            m.residuals_after.as_ref(),
            m.residual_unit.as_deref().unwrap_or("trait unit"),
            extent(d),
            sensors(d),
            openings(d),
        ));
    }
    if let Some(s) = &d.over_time {
        out.extend(super::over_time::figures(s, extent(d)).into_iter().map(|(f, _)| f));
    }
    // Ids become file names: two subjects with the same slug must not
    // overwrite each other's file.
    let mut figs: Vec<Figure> = out.into_iter().filter_map(Result::ok).collect();
    let mut seen: Vec<String> = Vec::new();
    for f in &mut figs {
        let base = f.id.clone();
        let mut k = 1;
        while seen.contains(&f.id) {
            k += 1;
            f.id = format!("{base}-{k}");
        }
        seen.push(f.id.clone());
    }
    figs
}

#[cfg(test)]
pub(crate) mod tests {
    use super::super::sample::sample_report;
    use super::super::xml::check_well_formed;
    use super::*;

    const SECTIONS: [&str; 7] = ["verdict", "layout", "climate", "spatial", "models", "means", "provenance"];

    #[test]
    fn escape_covers_markup_and_quotes() {
        assert_eq!(escape(r#"<a href="x">'&'</a>"#), "&lt;a href=&quot;x&quot;&gt;&#39;&amp;&#39;&lt;/a&gt;");
        assert_eq!(escape("°C µmol m⁻²"), "°C µmol m⁻²");
    }

    #[test]
    fn numbers_have_fixed_precision() {
        assert_eq!(sig(-0.45123, 4), "-0.4512");
        assert_eq!(sig(512.6, 4), "512.6");
        assert_eq!(sig(0.0001234, 3), "1.23e-4");
        assert_eq!(sig(1234567.0, 3), "1.23e6");
        assert_eq!(sig(0.0, 3), "0");
        assert_eq!(sig(f64::NAN, 3), "–");
        assert_eq!(fixed(2.0 / 3.0, 2), "0.67");
        assert_eq!(p_value(Some(0.0004)), "&lt; 0.001");
        assert_eq!(p_value(Some(0.04567)), "0.046");
        assert_eq!(p_value(None), "–");
        assert_eq!(df(83.0), "83");
        assert_eq!(df(12.345), "12.35");
    }

    /// A sensor named like a script tag reaches the page as text only: in the
    /// logger table (our escape) and in the SVG labels (plotters' escape).
    #[test]
    fn user_strings_never_become_markup() {
        let mut d = sample_report();
        let evil = "<script>alert(1)</script>";
        d.layout.as_mut().unwrap().sensors[0].id = evil.into();
        d.title = format!("Trial & {evil}");
        d.layout.as_mut().unwrap().trait_name = "\"height\" <cm>".into();
        let page = render_html(&d);
        assert!(!page.to_lowercase().contains("<script"), "a script tag reached the page");
        let escaped = "&lt;script&gt;alert(1)&lt;/script&gt;";
        assert!(page.matches(escaped).count() >= 3, "expected the name in table, title and maps");
        assert!(page.contains("<td>&lt;script&gt;alert(1)&lt;/script&gt;</td>"));
        check_well_formed(&page).unwrap();
    }

    #[test]
    fn the_page_is_well_formed_with_every_section() {
        let page = render_html(&sample_report());
        check_well_formed(&page).unwrap();
        let mut last = 0;
        for id in SECTIONS {
            let at =
                page.find(&format!("<section id=\"{id}\">")).unwrap_or_else(|| panic!("no section {id}"));
            assert!(at > last, "section {id} out of order");
            last = at;
        }
        assert!(!page.contains("class=\"missing\""), "the full sample should have no missing section");
        assert!(!page.contains("http://") || page.matches("http://").all(|_| true));
        // Self-contained: no external references (the only URLs are the SVG namespace).
        for bad in ["<link", "<script", "src=\"", "url("] {
            assert!(!page.contains(bad), "external asset marker {bad}");
        }
    }

    #[test]
    fn every_figure_is_xml_with_title_and_labelled_axes() {
        let mut twice = sample_report();
        let v = twice.variograms[0].clone();
        twice.variograms.push(v);
        let ids: Vec<String> = all_figures(&twice).into_iter().map(|f| f.id).collect();
        assert!(ids.contains(&"variogram-night-cold-hours-2".to_string()), "{ids:?}");
        let figs = all_figures(&sample_report());
        assert_eq!(figs.len(), 10, "{:?}", figs.iter().map(|f| &f.id).collect::<Vec<_>>());
        let mut ids: Vec<&str> = figs.iter().map(|f| f.id.as_str()).collect();
        ids.sort();
        ids.dedup();
        assert_eq!(ids.len(), figs.len(), "figure ids must be unique");
        for f in &figs {
            check_well_formed(&f.svg).unwrap_or_else(|e| panic!("{}: {e}", f.id));
            for s in [&f.title, &f.x_label, &f.y_label] {
                assert!(f.svg.contains(&escape(s)), "{}: {s:?} is not drawn", f.id);
            }
            for l in [&f.x_label, &f.y_label] {
                let unit = l.rsplit_once('(').map(|(_, u)| u.trim_end_matches(')').trim());
                assert!(unit.is_some_and(|u| !u.is_empty()), "{}: axis label {l:?} has no unit", f.id);
            }
        }
    }

    #[test]
    fn missing_stages_leave_a_note_naming_the_command() {
        let page = render_html(&ReportData { title: "Empty".into(), ..ReportData::default() });
        check_well_formed(&page).unwrap();
        for id in SECTIONS {
            assert!(page.contains(&format!("<section id=\"{id}\">")), "{id}");
        }
        assert_eq!(page.matches("class=\"missing\"").count(), 7);
        assert_eq!(page.matches("potclim run STUDY").count(), 7);
    }

    #[test]
    fn report_data_round_trips_through_json() {
        let d = sample_report();
        let text = serde_json::to_string(&d).unwrap();
        let back = super::super::parse_report_data(std::path::Path::new("r.json"), &text).unwrap();
        // serde_json's default float parsing may differ in the last bit, so
        // compare the two documents with a relative tolerance on numbers.
        fn close(a: &serde_json::Value, b: &serde_json::Value) -> bool {
            use serde_json::Value::*;
            match (a, b) {
                (Number(x), Number(y)) => {
                    let (x, y) = (x.as_f64().unwrap(), y.as_f64().unwrap());
                    (x - y).abs() <= 1e-14 * x.abs().max(y.abs()).max(1.0)
                }
                (Array(x), Array(y)) => x.len() == y.len() && x.iter().zip(y).all(|(p, q)| close(p, q)),
                (Object(x), Object(y)) => {
                    x.len() == y.len() && x.iter().all(|(k, v)| y.get(k).is_some_and(|w| close(v, w)))
                }
                _ => a == b,
            }
        }
        let a: serde_json::Value = serde_json::from_str(&text).unwrap();
        let b = serde_json::to_value(&back).unwrap();
        assert!(close(&a, &b), "JSON changed on a round trip");
        assert_eq!(back.title, d.title);
        assert_eq!(back.verdict, d.verdict);
        let err = super::super::parse_report_data(std::path::Path::new("r.json"), "{\n  \"title\": 3\n}")
            .unwrap_err()
            .to_string();
        assert!(err.starts_with("r.json:2:"), "{err}");
    }

    fn small_report() -> ReportData {
        ReportData {
            title: "Snapshot study".into(),
            compartment: Some(CompartmentSize { length: 4.0, width: 2.0 }),
            verdict: Some(VerdictSection {
                word: "correlation".into(),
                reason: "An unmeasured effect explains it.".into(),
                chosen_model: "base | exponential".into(),
                best_by_aic: Some("base | exponential".into()),
                trait_unit: Some("cm".into()),
                drivers: vec![DriverRow {
                    name: "cold".into(),
                    unit: Some("h".into()),
                    estimate: -0.123456,
                    se: 0.0456789,
                    estimate_with_mapping_uncertainty: Some(-0.118765),
                    se_with_mapping_uncertainty: Some(0.0512345),
                    ci_low_with_mapping_uncertainty: Some(-0.2211),
                    ci_high_with_mapping_uncertainty: Some(-0.0164),
                    ci_low: -0.2130,
                    ci_high: -0.0339,
                    p_value: Some(0.00712),
                    delta_aic: Some(4.56789),
                    delta_aic_with_correlation: Some(-1.2345),
                    vif: Some(1.0),
                    confounded: true,
                }],
                cautions: vec!["Two loggers only.".into()],
                ..Default::default()
            }),
            models: Some(ModelsSection {
                comparison: vec![
                    ComparisonRow {
                        name: "base".into(),
                        loglik: -20.123456,
                        aic: 46.246912,
                        bic: 48.1,
                        n_params: 3,
                        delta_aic: 3.0,
                        akaike_weight: 0.18242552,
                        ..ComparisonRow::default()
                    },
                    ComparisonRow {
                        name: "base | exponential".into(),
                        correlation: Some("exponential".into()),
                        nugget: true,
                        loglik: -17.623456,
                        aic: 43.246912,
                        bic: 46.0,
                        n_params: 4,
                        delta_aic: 0.0,
                        akaike_weight: 0.81757448,
                        ..ComparisonRow::default()
                    },
                ],
                anova: vec![AnovaTable {
                    model: "base".into(),
                    kind: None,
                    rows: vec![
                        AnovaRow {
                            term: "accession".into(),
                            df: 2.0,
                            sum_sq: Some(10.5),
                            mean_sq: Some(5.25),
                            f: Some(3.27654),
                            p_value: Some(0.0712),
                        },
                        AnovaRow {
                            term: "residual".into(),
                            df: 9.0,
                            sum_sq: Some(15.04),
                            ..AnovaRow::default()
                        },
                    ],
                }],
                tie_margin: Some(2.0),
                ..ModelsSection::default()
            }),
            adjusted_means: vec![AdjustedMean {
                factor: "accession".into(),
                level: "A1".into(),
                mean: 10.0,
                se: 0.25,
                plain_mean: 9.5,
                change: 0.5,
            }],
            adjusted_means_unit: Some("cm".into()),
            ..ReportData::default()
        }
    }

    /// Replace every inline SVG by a marker naming its size, so the snapshot
    /// pins the page's text and tables; the figures have their own tests.
    pub(crate) fn strip_svgs(page: &str) -> String {
        let mut out = String::new();
        let mut rest = page;
        while let Some(a) = rest.find("<svg") {
            out.push_str(&rest[..a]);
            let end = rest[a..].find("</svg>").expect("closed svg") + a + "</svg>".len();
            let head_end = rest[a..].find('>').unwrap() + a;
            let head = &rest[a..head_end];
            let attr = |k: &str| {
                head.split(&format!("{k}=\""))
                    .nth(1)
                    .and_then(|s| s.split('"').next())
                    .unwrap_or("?")
                    .to_string()
            };
            out.push_str(&format!("<svg-figure width=\"{}\" height=\"{}\"/>", attr("width"), attr("height")));
            rest = &rest[end..];
        }
        out.push_str(rest);
        out
    }

    /// Snapshot of a small fixed report. Regenerate after an intended change
    /// with `UPDATE_SNAPSHOTS=1 cargo test --lib report::html` and review the diff.
    #[test]
    fn snapshot_of_a_small_report() {
        check_snapshot("small_report.html", &strip_svgs(&render_html(&small_report())));
    }

    /// Compare `page` with the snapshot `src/report/snapshots/<file>`
    /// (rewritten first when `UPDATE_SNAPSHOTS` is set), showing the first
    /// line that differs.
    pub(crate) fn check_snapshot(file: &str, page: &str) {
        let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("src/report/snapshots").join(file);
        if std::env::var_os("UPDATE_SNAPSHOTS").is_some() {
            std::fs::create_dir_all(path.parent().unwrap()).unwrap();
            std::fs::write(&path, page).unwrap();
        }
        let want = std::fs::read_to_string(&path).expect("snapshot missing: run with UPDATE_SNAPSHOTS=1");
        if want != page {
            let line = want.lines().zip(page.lines()).position(|(a, b)| a != b).unwrap_or(0);
            panic!(
                "snapshot differs at line {}:\n  want: {}\n  got:  {}\n(full output:\n{page})",
                line + 1,
                want.lines().nth(line).unwrap_or(""),
                page.lines().nth(line).unwrap_or("")
            );
        }
    }
}
