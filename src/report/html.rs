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
#[path = "html_verdict.rs"]
mod verdict;
use verdict::section_verdict;

#[path = "html_models.rs"]
mod models;
use models::{section_means, section_models};

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
#[path = "html_tests.rs"]
pub(crate) mod tests;
