//! The figures of the report, each a function from plain data to an SVG
//! string drawn with plotters' SVG backend. A figure carries its title and
//! axis labels (with units) beside the SVG so tests and the PNG export can
//! check and size it without parsing the drawing.
//!
//! Text drawn through plotters is XML-escaped by plotters' SVG backend itself
//! (its `escape_and_push`), so strings are handed to it raw; escaping them
//! here as well would show `&amp;lt;` on the page. Anything this module writes
//! into SVG markup by hand goes through [`super::html::escape`].
//!
//! Maps keep the compartment's aspect ratio (one metre is as long along x as
//! along y) within a height clamp, so a long, narrow house is not stretched.

use super::colour::{CATEGORICAL, Rgb, Scale, finite_extent, logger_line};
use super::data::{DailySeries, LoggerValue, MappedValue, OpeningSegment, SensorPoint, VariogramPanel};
use plotters::coord::Shift;
use plotters::prelude::*;

/// One drawn figure.
#[derive(Clone, Debug, PartialEq)]
pub struct Figure {
    /// A stable identifier, usable as a file name (`[a-z0-9_-]`).
    pub id: String,
    /// The title drawn on top of the figure.
    pub title: String,
    /// The x-axis label, with its unit.
    pub x_label: String,
    /// The y-axis label, with its unit.
    pub y_label: String,
    /// Width, pixels.
    pub width: u32,
    /// Height, pixels.
    pub height: u32,
    /// The SVG document.
    pub svg: String,
}

/// Why a figure could not be drawn.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum FigureError {
    /// The drawing backend failed.
    #[error("figure `{id}` could not be drawn: {message}")]
    Draw {
        /// The figure.
        id: String,
        /// The backend's message.
        message: String,
    },
    /// Nothing to draw.
    #[error("figure `{id}` has no data: {message}")]
    Empty {
        /// The figure.
        id: String,
        /// What is missing.
        message: String,
    },
}

pub(super) type DrawResult = Result<(), Box<dyn std::error::Error>>;

pub(super) const FONT: &str = "sans-serif";
const LEGEND_W: u32 = 134;

pub(super) fn rgb(c: Rgb) -> RGBColor {
    RGBColor(c.0, c.1, c.2)
}

/// A stable id from free text: lower-case ASCII letters and digits, other
/// characters folded to `-`.
pub fn slug(s: &str) -> String {
    let mut out = String::new();
    for c in s.chars() {
        if c.is_ascii_alphanumeric() {
            out.push(c.to_ascii_lowercase());
        } else if !out.ends_with('-') {
            out.push('-');
        }
    }
    let t = out.trim_matches('-');
    if t.is_empty() { "x".into() } else { t.to_string() }
}

pub(super) fn render(
    id: &str,
    title: &str,
    labels: (&str, &str),
    size: (u32, u32),
    body: impl FnOnce(&DrawingArea<SVGBackend<'_>, Shift>) -> DrawResult,
) -> Result<Figure, FigureError> {
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, size).into_drawing_area();
        let res = root
            .fill(&WHITE)
            .map_err(|e| e.into())
            .and_then(|_| body(&root))
            .and_then(|_| root.present().map_err(|e| e.into()));
        if let Err(e) = res {
            return Err(FigureError::Draw { id: id.to_string(), message: e.to_string() });
        }
    }
    Ok(Figure {
        id: id.to_string(),
        title: title.to_string(),
        x_label: labels.0.to_string(),
        y_label: labels.1.to_string(),
        width: size.0,
        height: size.1,
        svg,
    })
}

/// A vertical colour bar with tick labels and a label naming the quantity
/// and unit.
pub(super) fn colour_bar(area: &DrawingArea<SVGBackend<'_>, Shift>, scale: Scale, label: &str) -> DrawResult {
    let (lo, hi) = scale.bounds();
    let mut chart = ChartBuilder::on(area)
        .margin_top(40)
        .margin_bottom(50)
        .margin_right(8)
        .y_label_area_size(74)
        .build_cartesian_2d(0f64..1f64, lo..hi)?;
    chart
        .configure_mesh()
        .disable_mesh()
        .disable_x_axis()
        .y_labels(6)
        .y_desc(label)
        .label_style((FONT, 11))
        .axis_desc_style((FONT, 12))
        .draw()?;
    let steps = 64;
    chart.draw_series((0..steps).map(|k| {
        let a = lo + (hi - lo) * k as f64 / steps as f64;
        let b = lo + (hi - lo) * (k + 1) as f64 / steps as f64;
        Rectangle::new([(0.0, a), (1.0, b)], rgb(scale.colour((a + b) / 2.0)).filled())
    }))?;
    Ok(())
}

/// Everything a map of values at positions needs.
#[derive(Clone, Debug)]
pub struct MapSpec<'a> {
    /// Figure id.
    pub id: String,
    /// Figure title.
    pub title: String,
    /// `[0, length] x [0, width]`, metres; the points' extent when `None`.
    pub extent: Option<(f64, f64)>,
    /// `(x m, y m, value)`; `None` values are drawn as hollow grey marks.
    pub points: Vec<(f64, f64, Option<f64>)>,
    /// Colour scale of the values.
    pub scale: Scale,
    /// Legend label: quantity and unit (e.g. "height (cm)").
    pub legend: String,
    /// Sensors to mark (triangles with their ids).
    pub sensors: &'a [SensorPoint],
    /// Openings to mark (thick segments with their names).
    pub openings: &'a [OpeningSegment],
    /// Each sensor's own value (parallel to `sensors`), drawn as the fill of
    /// its triangle on the points' scale and written beside its id; empty:
    /// no values shown. Silent sensors are greyed out either way.
    pub sensor_values: Vec<Option<f64>>,
    /// A full-width map (760 px plot) rather than a half-width one (460 px)
    /// meant to stand beside another.
    pub wide: bool,
}

/// The plotting area of a floor-plan map, x and y in metres.
pub(super) type MapChart<'a, 'b> = ChartContext<
    'a,
    SVGBackend<'b>,
    Cartesian2d<plotters::coord::types::RangedCoordf64, plotters::coord::types::RangedCoordf64>,
>;

/// A floor-plan map: points coloured by value, sensors and openings marked,
/// and a colour bar. Axes are x and y in metres.
pub fn value_map(spec: &MapSpec<'_>) -> Result<Figure, FigureError> {
    value_map_with(spec, |_| Ok(()))
}

/// [`value_map`] with `overlay` drawn over the points, under the openings
/// and sensors.
pub(super) fn value_map_with(
    spec: &MapSpec<'_>,
    overlay: impl FnOnce(&mut MapChart<'_, '_>) -> DrawResult,
) -> Result<Figure, FigureError> {
    if spec.points.is_empty() {
        return Err(FigureError::Empty { id: spec.id.clone(), message: "no positions".into() });
    }
    let xs = spec.points.iter().map(|p| p.0).chain(spec.sensors.iter().map(|s| s.x));
    let ys = spec.points.iter().map(|p| p.1).chain(spec.sensors.iter().map(|s| s.y));
    let (x0, x1, y0, y1) = match spec.extent {
        Some((l, w)) => (0.0, l, 0.0, w),
        None => {
            let (a, b) = finite_extent(xs).unwrap_or((0.0, 1.0));
            let (c, d) = finite_extent(ys).unwrap_or((0.0, 1.0));
            let pad = 0.05 * (b - a).max(d - c).max(1.0);
            (a - pad, b + pad, c - pad, d + pad)
        }
    };
    let plot_w = if spec.wide { 760.0 } else { 460.0 };
    let plot_h = (plot_w * (y1 - y0) / (x1 - x0)).clamp(160.0, 620.0);
    let width = plot_w as u32 + 80 + LEGEND_W;
    let height = plot_h as u32 + 100;
    let n = spec.points.len() as f64;
    let radius = ((plot_w * plot_h / n).sqrt() * 0.32).clamp(2.0, 9.0) as i32;
    let (xl, yl) = ("x (m)", "y (m)");
    render(&spec.id, &spec.title, (xl, yl), (width, height), |root| {
        let (main, legend) = root.split_horizontally(width - LEGEND_W);
        let mut chart = ChartBuilder::on(&main)
            .caption(&spec.title, (FONT, 17))
            .margin(10)
            .x_label_area_size(40)
            .y_label_area_size(50)
            .build_cartesian_2d(x0..x1, y0..y1)?;
        chart
            .configure_mesh()
            .light_line_style(WHITE.mix(0.0))
            .bold_line_style(BLACK.mix(0.08))
            .x_desc(xl)
            .y_desc(yl)
            .label_style((FONT, 12))
            .axis_desc_style((FONT, 13))
            .draw()?;
        chart.draw_series(spec.points.iter().map(|&(x, y, v)| match v {
            Some(v) if v.is_finite() => Circle::new((x, y), radius, rgb(spec.scale.colour(v)).filled()),
            _ => Circle::new((x, y), radius, RGBColor(150, 150, 150).stroke_width(1)),
        }))?;
        overlay(&mut chart)?;
        for o in spec.openings {
            chart.draw_series(LineSeries::new(
                [(o.from[0], o.from[1]), (o.to[0], o.to[1])],
                ShapeStyle { color: RGBColor(0, 0, 0).to_rgba(), filled: false, stroke_width: 5 },
            ))?;
            let mid = ((o.from[0] + o.to[0]) / 2.0, (o.from[1] + o.to[1]) / 2.0);
            chart.draw_series(std::iter::once(
                EmptyElement::at(mid) + Text::new(o.name.clone(), (6, 6), (FONT, 12).into_font()),
            ))?;
        }
        let grey = RGBColor(160, 160, 160);
        chart.draw_series(spec.sensors.iter().enumerate().map(|(k, s)| {
            let value = spec.sensor_values.get(k).copied().flatten().filter(|v| v.is_finite());
            let (fill, edge, label) = if s.silent {
                (WHITE, grey, format!("{} (no readings)", s.id))
            } else if let Some(v) = value {
                (rgb(spec.scale.colour(v)), BLACK, format!("{} {}", s.id, short_number(v)))
            } else {
                (WHITE, BLACK, s.id.clone())
            };
            let style =
                if s.silent { (FONT, 11).into_font().color(&grey) } else { (FONT, 11).into_font().into() };
            EmptyElement::at((s.x, s.y))
                + TriangleMarker::new((0, 0), 8, fill.filled())
                + TriangleMarker::new((0, 0), 8, edge.stroke_width(2))
                + Text::new(label, (9, -14), style)
        }))?;
        colour_bar(&legend, spec.scale, &spec.legend)
    })
}

/// The colour scale of an indicator's map: it spans the pots' values and the
/// loggers' own values, so that a logger reading beyond every pot (a door
/// logger colder than any mapped pot) is drawn in its own colour rather than
/// clamped to the scale's end.
fn value_scale(points: &[MappedValue], sensor_values: &[Option<f64>]) -> Scale {
    Scale::sequential(points.iter().map(|p| p.value).chain(sensor_values.iter().flatten().copied()))
}

/// The map of a mapped indicator and the map of its standard error, each
/// with its own viridis scale in the indicator's unit.
pub fn indicator_maps(
    name: &str,
    unit: &str,
    points: &[MappedValue],
    extent: Option<(f64, f64)>,
    sensors: &[SensorPoint],
    openings: &[OpeningSegment],
    loggers: &[LoggerValue],
) -> Result<(Figure, Figure), FigureError> {
    let base = slug(name);
    let sensor_values: Vec<Option<f64>> =
        sensors.iter().map(|s| loggers.iter().find(|l| l.id == s.id).and_then(|l| l.value)).collect();
    let value = MapSpec {
        id: format!("indicator-{base}"),
        title: format!("{name}: kriged value at each pot"),
        extent,
        points: points.iter().map(|p| (p.x, p.y, Some(p.value))).collect(),
        scale: value_scale(points, &sensor_values),
        legend: format!("{name} ({unit})"),
        sensors,
        openings,
        sensor_values,
        wide: false,
    };
    let se = MapSpec {
        id: format!("indicator-{base}-se"),
        title: format!("{name}: standard error of the kriged value"),
        points: points.iter().map(|p| (p.x, p.y, Some(p.se))).collect(),
        scale: Scale::sequential(points.iter().map(|p| p.se)),
        legend: format!("standard error ({unit})"),
        sensor_values: Vec::new(),
        ..value.clone()
    };
    Ok((value_map(&value)?, value_map(&se)?))
}

/// Width of the key column beside a line chart, pixels: the key sits outside
/// the plot area so it never covers a line.
const KEY_W: u32 = 132;

/// One entry of a key: a line swatch (dashed or not) and its label.
struct KeyEntry {
    label: String,
    colour: RGBColor,
    dashed: bool,
}

/// Draw a key in its own column: one swatch and label per entry, top down.
fn draw_key(area: &DrawingArea<SVGBackend<'_>, Shift>, title: &str, entries: &[KeyEntry]) -> DrawResult {
    area.draw(&Text::new(title.to_string(), (4, 34), (FONT, 11).into_font().style(FontStyle::Bold)))?;
    for (k, e) in entries.iter().enumerate() {
        let y = 52 + 16 * k as i32;
        let style = e.colour.stroke_width(2);
        if e.dashed {
            area.draw(&PathElement::new(vec![(4, y), (9, y)], style))?;
            area.draw(&PathElement::new(vec![(13, y), (18, y)], style))?;
            area.draw(&PathElement::new(vec![(22, y), (26, y)], style))?;
        } else {
            area.draw(&PathElement::new(vec![(4, y), (26, y)], style))?;
        }
        area.draw(&Text::new(shorten(&e.label, 16), (32, y - 6), (FONT, 11).into_font()))?;
    }
    Ok(())
}

/// One small multiple: the daily values of every sensor for one variable.
/// `order` lists every logger of the report once: a logger's colour is its
/// place there ([`super::colour::logger_line`]), the same in every figure,
/// and no two loggers share a line style. The key stands beside the plot.
pub fn daily_series(s: &DailySeries, order: &[String]) -> Result<Figure, FigureError> {
    let id = format!("series-{}", slug(&s.variable));
    if s.days.is_empty() || s.sensors.is_empty() {
        return Err(FigureError::Empty { id, message: "no days or no sensors".into() });
    }
    let title = format!("{} per sensor and day", s.variable);
    let xl = "day (local date)".to_string();
    let yl = format!("{} ({})", s.variable, s.unit);
    let vals = s.sensors.iter().flat_map(|t| t.values.iter().flatten().copied());
    let (lo, hi) = finite_extent(vals).unwrap_or((0.0, 1.0));
    let pad = if hi > lo { (hi - lo) * 0.08 } else { 0.05 * hi.abs().max(1.0) };
    let n = s.days.len();
    let x1 = (n.max(2) - 1) as f64;
    let lines: Vec<(RGBColor, bool)> = s
        .sensors
        .iter()
        .enumerate()
        .map(|(k, t)| {
            let at = order.iter().position(|o| *o == t.sensor).unwrap_or(order.len() + k);
            let (c, dashed) = logger_line(at);
            (rgb(c), dashed)
        })
        .collect();
    let height = 300u32.max(70 + 16 * s.sensors.len() as u32);
    let width = 560 + KEY_W;
    render(&id, &title, (&xl, &yl), (width, height), |root| {
        let (main, key) = root.split_horizontally(width - KEY_W);
        let fmt = |v: &f64| {
            let k = v.round();
            if (v - k).abs() < 1e-6 && k >= 0.0 && (k as usize) < n {
                s.days[k as usize].get(5..).unwrap_or(&s.days[k as usize]).to_string()
            } else {
                String::new()
            }
        };
        let mut chart = ChartBuilder::on(&main)
            .caption(&title, (FONT, 15))
            .margin(10)
            .x_label_area_size(38)
            .y_label_area_size(55)
            .build_cartesian_2d(0f64..x1, (lo - pad)..(hi + pad))?;
        chart
            .configure_mesh()
            .light_line_style(WHITE.mix(0.0))
            .bold_line_style(BLACK.mix(0.08))
            .x_labels(n.min(8))
            .x_label_formatter(&fmt)
            .x_desc(xl.as_str())
            .y_desc(yl.as_str())
            .label_style((FONT, 11))
            .axis_desc_style((FONT, 12))
            .draw()?;
        for (t, &(col, dashed)) in s.sensors.iter().zip(&lines) {
            // Break the line at days without data rather than bridging them.
            let mut runs: Vec<Vec<(f64, f64)>> = vec![Vec::new()];
            for (d, v) in t.values.iter().enumerate().take(n) {
                match v {
                    Some(v) if v.is_finite() => runs.last_mut().expect("non-empty").push((d as f64, *v)),
                    _ => runs.push(Vec::new()),
                }
            }
            for run in runs.into_iter().filter(|r| !r.is_empty()) {
                let pts = run.clone();
                if dashed {
                    chart.draw_series(DashedLineSeries::new(run, 6, 4, col.stroke_width(2)))?;
                } else {
                    chart.draw_series(LineSeries::new(run, col.stroke_width(2)))?;
                }
                chart.draw_series(pts.into_iter().map(|p| Circle::new(p, 2, col.filled())))?;
            }
        }
        let entries: Vec<KeyEntry> = s
            .sensors
            .iter()
            .zip(&lines)
            .map(|(t, &(colour, dashed))| KeyEntry { label: t.sensor.clone(), colour, dashed })
            .collect();
        draw_key(&key, "logger", &entries)
    })
}

/// The subject of a variogram panel without its parenthetical qualifier
/// (`temperature (pooled over ...)` -> `temperature`), for a title that fits.
pub fn short_subject(subject: &str) -> &str {
    subject.split(" (").next().unwrap_or(subject)
}

/// An experimental variogram (bins as circles, area by pair count) with
/// every fitted curve and a key beside the plot; the first fit's nugget and
/// sill are marked, and its practical range when it lies within the lags
/// shown (the caption says so when it does not, see
/// [`super::html`]). Every label stays inside the plot area.
pub fn variogram(p: &VariogramPanel) -> Result<Figure, FigureError> {
    let id = format!("variogram-{}", slug(&p.subject));
    if p.bins.is_empty() {
        return Err(FigureError::Empty { id, message: "no lag bins".into() });
    }
    let title = format!("Variogram of {}", short_subject(&p.subject));
    let xl = "lag distance (m)".to_string();
    let yl = format!("semivariance ({})", p.unit);
    let curve_lag = p.fits.iter().flat_map(|f| f.curve.iter().map(|c| c[0]));
    let xmax = finite_extent(p.bins.iter().map(|b| b.lag).chain(curve_lag)).map_or(1.0, |e| e.1) * 1.05;
    let ymax = finite_extent(
        p.bins
            .iter()
            .map(|b| b.semivariance)
            .chain(p.fits.iter().map(|f| f.sill))
            .chain(p.fits.iter().flat_map(|f| f.curve.iter().map(|c| c[1]))),
    )
    .map_or(1.0, |e| e.1)
    .max(1e-12)
        * 1.15;
    let maxpairs = p.bins.iter().map(|b| b.pairs).max().unwrap_or(1).max(1) as f64;
    let key_w = if p.fits.is_empty() { 0 } else { KEY_W };
    let width = 560 + key_w;
    render(&id, &title, (&xl, &yl), (width, 340), |root| {
        let (main, key) = root.split_horizontally(width - key_w);
        let mut chart = ChartBuilder::on(&main)
            .caption(&title, (FONT, 15))
            .margin(10)
            .x_label_area_size(38)
            .y_label_area_size(60)
            .build_cartesian_2d(0f64..xmax.max(1e-9), 0f64..ymax)?;
        chart
            .configure_mesh()
            .light_line_style(WHITE.mix(0.0))
            .bold_line_style(BLACK.mix(0.08))
            .x_desc(xl.as_str())
            .y_desc(yl.as_str())
            .label_style((FONT, 11))
            .axis_desc_style((FONT, 12))
            .draw()?;
        if let Some(f) = p.fits.first() {
            let grey = RGBColor(110, 110, 110);
            let style = ShapeStyle { color: grey.to_rgba(), filled: false, stroke_width: 1 };
            // Labels sit just right of the y axis: the sill's above its line
            // (the top of the plot is 15 % above the highest value), the
            // nugget's below its own unless that would cross the x axis or
            // meet the sill's label.
            let room = |v: f64| v / ymax;
            let nugget_dy = if room(f.nugget) < 0.1 || room(f.sill) - room(f.nugget) < 0.1 { -13 } else { 3 };
            let mut marks = vec![(f.sill, "sill", -13)];
            if room(f.sill) - room(f.nugget) >= 0.06 {
                marks.push((f.nugget, "nugget", nugget_dy));
            }
            for (yv, name, dy) in marks {
                chart.draw_series(DashedLineSeries::new([(0.0, yv), (xmax, yv)], 5, 4, style))?;
                chart.draw_series(std::iter::once(
                    EmptyElement::at((0.0, yv))
                        + Text::new(format!("{name} ({})", f.family), (4, dy), (FONT, 10).into_font()),
                ))?;
            }
            let r = f.practical_range.unwrap_or(f.range);
            if r.is_finite() && r > 0.0 && r < xmax {
                let label = if f.practical_range.is_some() { "practical range" } else { "range" };
                chart.draw_series(DashedLineSeries::new([(r, 0.0), (r, ymax)], 5, 4, style))?;
                // Right of the line, or left of it near the right edge.
                let dx = if r > 0.75 * xmax { -86 } else { 4 };
                chart.draw_series(std::iter::once(
                    EmptyElement::at((r, ymax)) + Text::new(label, (dx, 4), (FONT, 10).into_font()),
                ))?;
            }
        }
        let mut entries = Vec::new();
        for (k, f) in p.fits.iter().enumerate() {
            let col = rgb(CATEGORICAL[k % CATEGORICAL.len()]);
            chart.draw_series(LineSeries::new(f.curve.iter().map(|c| (c[0], c[1])), col.stroke_width(2)))?;
            entries.push(KeyEntry { label: f.family.clone(), colour: col, dashed: false });
        }
        chart.draw_series(p.bins.iter().map(|b| {
            let r = (2.0 + 5.0 * (b.pairs as f64 / maxpairs).sqrt()) as i32;
            Circle::new((b.lag, b.semivariance), r, BLACK.stroke_width(1))
        }))?;
        if !entries.is_empty() {
            draw_key(&key, "fitted family", &entries)?;
        }
        Ok(())
    })
}

/// Shorten a long label for an axis, keeping its start and end.
fn shorten(s: &str, max: usize) -> String {
    let c: Vec<char> = s.chars().collect();
    if c.len() <= max {
        return s.to_string();
    }
    let head: String = c[..max / 2 - 1].iter().collect();
    let tail: String = c[c.len() - (max - max / 2)..].iter().collect();
    format!("{head}…{tail}")
}
#[path = "figures_models.rs"]
mod models;
pub use models::{delta_aic_bars, delta_aic_cut, models_that_matter, residual_maps};

/// A logger's value beside its id: three significant digits, never `-0`.
pub(super) fn short_number(v: f64) -> String {
    let s = if v == 0.0 {
        "0".to_string()
    } else {
        let d = (2 - v.abs().log10().floor() as i32).max(0) as usize;
        format!("{v:.d$}")
    };
    if s.trim_start_matches('-').chars().all(|c| c == '0' || c == '.') {
        s.trim_start_matches('-').into()
    } else {
        s
    }
}

#[cfg(test)]
pub(crate) mod tests {
    use super::super::data::{ComparisonRow, VariogramBin, VariogramFit};
    use super::super::xml::check_well_formed;
    use super::*;

    fn assert_figure(f: &Figure) {
        check_well_formed(&f.svg).unwrap_or_else(|e| panic!("{}: {e}", f.id));
        for s in [&f.title, &f.x_label, &f.y_label] {
            let esc = super::super::html::escape(s);
            assert!(f.svg.contains(&esc), "{}: {s:?} not drawn", f.id);
        }
        assert!(f.x_label.contains('(') && f.y_label.contains('('), "{}: labels need units", f.id);
    }

    /// A logger reading beyond every pot widens the map's scale to it (the
    /// door logger of the demo reads 375 h where the pots reach about 330 h);
    /// without logger values the scale is the pots' own.
    #[test]
    fn map_scale_spans_the_loggers_values() {
        let pots: Vec<MappedValue> = (0..5)
            .map(|i| MappedValue { x: i as f64, y: 0.0, value: 100.0 + 50.0 * i as f64, se: 1.0 })
            .collect();
        assert_eq!(value_scale(&pots, &[Some(375.0), None, Some(120.0)]).bounds(), (100.0, 375.0));
        assert_eq!(value_scale(&pots, &[Some(-5.0)]).bounds(), (-5.0, 300.0));
        assert_eq!(value_scale(&pots, &[]).bounds(), (100.0, 300.0));
    }

    /// Every text of the SVG lies inside the figure (extent estimated by
    /// [`super::super::xml::svg_texts`]).
    pub(crate) fn assert_inside(f: &Figure) {
        for t in super::super::xml::svg_texts(&f.svg) {
            assert!(
                t.left >= -1.0 && t.y >= 0.0 && t.y <= f.height as f64 && t.right <= f.width as f64 + 1.0,
                "{}: text {:?} ({} to {}, y {}) leaves the {}x{} figure",
                f.id,
                t.text,
                t.left,
                t.right,
                t.y,
                f.width,
                f.height
            );
        }
    }

    /// Twelve loggers, each line in its own colour, and the key outside the
    /// plot: right of the plot area's right edge.
    #[test]
    fn series_lines_have_distinct_colours_and_a_key_beside_the_plot() {
        let ids: Vec<String> = (1..=12).map(|k| format!("S{k:02}")).collect();
        let s = DailySeries {
            variable: "daily mean temperature".into(),
            unit: "°C".into(),
            days: vec!["2026-10-05".into(), "2026-10-06".into(), "2026-10-07".into()],
            sensors: ids
                .iter()
                .enumerate()
                .map(|(k, id)| super::super::data::SensorSeries {
                    sensor: id.clone(),
                    values: vec![Some(15.0 + k as f64 * 0.1), None, Some(16.0)],
                })
                .collect(),
        };
        let f = daily_series(&s, &ids).unwrap();
        assert_figure(&f);
        assert_inside(&f);
        let colours: Vec<String> = (0..12)
            .map(|k| {
                let c = super::super::colour::LOGGER_LINES[k];
                format!("#{:02X}{:02X}{:02X}", c.0, c.1, c.2)
            })
            .collect();
        for c in &colours {
            assert!(f.svg.contains(&format!("stroke=\"{c}\"")), "colour {c} not drawn");
        }
        let key_x = (f.width - KEY_W) as f64;
        for t in super::super::xml::svg_texts(&f.svg) {
            if ids.contains(&t.text) {
                assert!(t.left >= key_x, "{} at x {} is inside the plot", t.text, t.left);
            }
        }
    }

    #[test]
    fn the_delta_aic_chart_keeps_the_models_that_matter() {
        let row = |name: &str, d: f64, drivers: bool, corr: bool| ComparisonRow {
            name: name.into(),
            delta_aic: d,
            drivers: if drivers { vec!["cold".into()] } else { vec![] },
            correlation: corr.then(|| "exponential".into()),
            ..ComparisonRow::default()
        };
        let mut rows = vec![
            row("best", 0.0, true, true),
            row("tie", 1.5, true, true),
            row("chosen", 3.0, true, true),
            row("far", 9.0, true, true),
            row("plain", 40.0, false, false),
            row("worse plain", 41.0, false, false),
            row("drivers only", 20.0, true, false),
            row("space only", 12.0, false, true),
        ];
        for k in 0..40 {
            rows.push(row(&format!("also-ran {k}"), 50.0 + k as f64, true, true));
        }
        let names: Vec<&str> =
            models_that_matter(&rows, Some("chosen"), Some(2.0)).iter().map(|r| r.name.as_str()).collect();
        assert_eq!(names, ["best", "tie", "chosen", "space only", "drivers only", "plain"]);
        let f = delta_aic_bars(&rows, Some("chosen"), Some(2.0)).unwrap();
        assert!(!f.svg.contains("also-ran"));
        assert_inside(&f);
    }

    #[test]
    fn slugs_are_file_names() {
        assert_eq!(slug("Night cold hours (<12 °C)"), "night-cold-hours-12-c");
        assert_eq!(slug("***"), "x");
    }

    #[test]
    fn variogram_marks_nugget_sill_range() {
        let p = VariogramPanel {
            subject: "night_cold_hours".into(),
            unit: "h²".into(),
            bins: vec![
                VariogramBin { lag: 0.5, semivariance: 1.0, pairs: 30 },
                VariogramBin { lag: 1.5, semivariance: 2.0, pairs: 80 },
            ],
            fits: vec![VariogramFit {
                family: "exponential".into(),
                nugget: 0.4,
                sill: 2.2,
                range: 1.0,
                practical_range: Some(1.8),
                curve: vec![[0.0, 0.4], [1.0, 1.5], [2.0, 2.0]],
            }],
        };
        let f = variogram(&p).unwrap();
        assert_figure(&f);
        for s in ["nugget (exponential)", "sill (exponential)", "practical range", "fitted family"] {
            assert!(f.svg.contains(s), "{s}");
        }
        assert_inside(&f);
        // A practical range beyond the lags shown is not drawn (the caption
        // says so instead), so no label leaves the plot.
        let mut far = p.clone();
        far.fits[0].practical_range = Some(30.0);
        let f = variogram(&far).unwrap();
        assert!(!f.svg.contains("practical range"));
        assert_inside(&f);
        let empty = VariogramPanel { bins: vec![], ..p };
        assert!(matches!(variogram(&empty), Err(FigureError::Empty { .. })));
    }

    #[test]
    fn delta_aic_axis_is_cut_only_for_one_outlying_bar() {
        // The demo's bars: eight within 2 units, then 30.3, 57.0 and 337.0.
        let demo = [0.0, 0.3, 0.4, 0.7, 0.9, 1.3, 1.6, 2.0, 30.3, 57.0, 337.0];
        assert_eq!(delta_aic_cut(&demo, Some(4.0)), Some(71.25));
        assert_eq!(delta_aic_cut(&[0.0, 30.0, 57.0], Some(4.0)), None);
        assert_eq!(delta_aic_cut(&[0.0, 1.0, 9.0], Some(4.0)), None, "9 is within 2.5 margins");
        assert_eq!(delta_aic_cut(&[0.0], Some(4.0)), None);
        let rows: Vec<ComparisonRow> = demo
            .iter()
            .enumerate()
            .map(|(i, d)| ComparisonRow {
                name: format!("m{i}"),
                delta_aic: *d,
                // Kinds as on the demo: the eight closest with drivers and
                // correlation, then one of each other kind.
                drivers: if i < 8 || i == 9 { vec!["x".into()] } else { vec![] },
                correlation: (i <= 8).then(|| "exponential".to_string()),
                ..ComparisonRow::default()
            })
            .collect();
        let f = delta_aic_bars(&rows, Some("m1"), Some(4.0)).unwrap();
        assert!(f.svg.contains("337.0 (bar cut)"), "the cut bar is labelled");
        assert_inside(&f);
    }

    #[test]
    fn delta_aic_bars_draw_any_number_of_models() {
        let row = |name: &str, d: f64| ComparisonRow {
            name: name.into(),
            delta_aic: d,
            ..ComparisonRow::default()
        };
        for rows in [vec![row("only", 0.0)], vec![row("a", 0.0), row("b", 3.5)]] {
            let f = delta_aic_bars(&rows, Some("a"), Some(2.0)).unwrap();
            assert_figure(&f);
            for r in &rows {
                assert!(f.svg.contains(&format!(">{}\n<", r.name)) || f.svg.contains(&r.name), "{}", r.name);
            }
        }
        assert!(delta_aic_bars(&[], None, None).is_err());
    }

    #[test]
    fn names_with_markup_are_text_in_svg() {
        let sensors =
            vec![SensorPoint { id: "<script>alert(1)</script>".into(), x: 1.0, y: 1.0, silent: false }];
        let spec = MapSpec {
            id: "m".into(),
            title: "T & <b>".into(),
            extent: Some((4.0, 2.0)),
            points: vec![(0.5, 0.5, Some(1.0)), (2.0, 1.0, None)],
            scale: Scale::sequential([1.0, 2.0]),
            legend: "height (cm)".into(),
            sensors: &sensors,
            openings: &[],
            sensor_values: vec![Some(1.5)],
            wide: true,
        };
        let f = value_map(&spec).unwrap();
        assert_figure(&f);
        assert!(!f.svg.contains("<script"));
        assert!(f.svg.contains("&lt;script&gt;alert(1)&lt;/script&gt;"));
    }
}
