//! The model figures of [`super`]: which models matter, the bars of their AIC
//! differences with the tie cut, and the maps of their residuals.

use super::{FONT, Figure, FigureError, MapSpec, render, rgb, shorten, value_map};
use crate::report::colour::{CATEGORICAL, Scale};
use crate::report::data::{ComparisonRow, OpeningSegment, ResidualMap, SensorPoint};
use plotters::prelude::*;

/// The kind of explanation a model stands for: with or without drivers, with
/// independent or spatially correlated errors (the four verdict words).
fn kind(r: &ComparisonRow) -> (bool, bool) {
    (!r.drivers.is_empty(), r.correlation.is_some())
}

/// The models a reader needs on the ΔAIC chart, sorted by ΔAIC: the best
/// model of each kind (`kind`), every model within the tie margin of the
/// best, and the chosen model. The table beside it lists every model.
pub fn models_that_matter<'a>(
    rows: &'a [ComparisonRow],
    chosen: Option<&str>,
    tie_margin: Option<f64>,
) -> Vec<&'a ComparisonRow> {
    let mut sorted: Vec<&ComparisonRow> = rows.iter().collect();
    sorted.sort_by(|a, b| a.delta_aic.total_cmp(&b.delta_aic).then_with(|| a.name.cmp(&b.name)));
    let mut seen_kinds = Vec::new();
    sorted
        .into_iter()
        .filter(|r| {
            let first_of_kind = !seen_kinds.contains(&kind(r));
            if first_of_kind {
                seen_kinds.push(kind(r));
            }
            first_of_kind || tie_margin.is_some_and(|m| r.delta_aic <= m) || Some(r.name.as_str()) == chosen
        })
        .collect()
}

/// Horizontal bars of ΔAIC for the models that matter
/// ([`models_that_matter`]), best on top, the chosen model in the accent
/// colour and the tie margin as a dashed line. Model names are written in
/// full.
pub fn delta_aic_bars(
    rows: &[ComparisonRow],
    chosen: Option<&str>,
    tie_margin: Option<f64>,
) -> Result<Figure, FigureError> {
    let id = "delta-aic".to_string();
    if rows.is_empty() {
        return Err(FigureError::Empty { id, message: "no models".into() });
    }
    let sorted = models_that_matter(rows, chosen, tie_margin);
    let names: Vec<String> = sorted.iter().map(|r| shorten(&r.name, 64)).collect();
    let n = sorted.len();
    let title = "How far each model is behind the best (ΔAIC)".to_string();
    let xl = "ΔAIC (AIC units, 0 = best)".to_string();
    let yl = "model (sorted by AIC)".to_string();
    let deltas: Vec<f64> = sorted.iter().map(|r| r.delta_aic).collect();
    let (xmax, cut) = match delta_aic_cut(&deltas, tie_margin) {
        Some(end) => (end, true),
        None => (deltas.iter().copied().fold(2.5f64, f64::max) * 1.08, false),
    };
    // About 6.5 px per character at 11 px sans-serif (common practice).
    let label_w = (names.iter().map(|s| s.chars().count()).max().unwrap_or(10) as f64 * 6.5 + 24.0)
        .clamp(120.0, 440.0) as u32;
    let height = 110 + 24 * n as u32;
    let width = 380 + label_w;
    render(&id, &title, (&xl, &yl), (width, height), |root| {
        let fmt = |v: &SegmentValue<usize>| match v {
            SegmentValue::CenterOf(i) if *i < n => names[n - 1 - *i].clone(),
            _ => String::new(),
        };
        let mut chart = ChartBuilder::on(root)
            .caption(&title, (FONT, 15))
            .margin(10)
            .x_label_area_size(40)
            .y_label_area_size(label_w)
            // A discrete usize range is inclusive of its end in plotters, so
            // `0..n - 1` gives exactly n segments; a single model gets two
            // (an empty one on top) because plotters labels no segment of `0..0`.
            .build_cartesian_2d(0f64..xmax, (0usize..(n - 1).max(1)).into_segmented())?;
        chart
            .configure_mesh()
            .disable_y_mesh()
            .light_line_style(WHITE.mix(0.0))
            .bold_line_style(BLACK.mix(0.08))
            .y_labels(n.max(2))
            .y_label_formatter(&fmt)
            .x_desc(xl.as_str())
            .y_desc(yl.as_str())
            .label_style((FONT, 11))
            .axis_desc_style((FONT, 12))
            .draw()?;
        let plain = rgb(CATEGORICAL[0]);
        let accent = rgb(CATEGORICAL[1]);
        chart.draw_series(sorted.iter().enumerate().map(|(k, r)| {
            let i = n - 1 - k;
            let col = if Some(r.name.as_str()) == chosen { accent } else { plain };
            // A best model has ΔAIC 0: give it a sliver so it stays visible;
            // a bar beyond the axis stops at its end.
            let w = r.delta_aic.max(xmax * 0.004).min(xmax);
            let mut bar = Rectangle::new(
                [(0.0, SegmentValue::Exact(i)), (w, SegmentValue::Exact(i + 1))],
                col.filled(),
            );
            bar.set_margin(3, 3, 0, 0);
            bar
        }))?;
        chart.draw_series(sorted.iter().enumerate().map(|(k, r)| {
            let beyond = cut && r.delta_aic > xmax;
            let at = (r.delta_aic.max(xmax * 0.004).min(xmax), SegmentValue::CenterOf(n - 1 - k));
            // A cut bar carries its value inside its end, in white.
            let (label, offset, style) = if beyond {
                (format!("{:.1} (bar cut)", r.delta_aic), (-78, -5), (FONT, 10).into_font().color(&WHITE))
            } else {
                (format!("{:.1}", r.delta_aic), (4, -5), (FONT, 10).into_font().into())
            };
            EmptyElement::at(at) + Text::new(label, offset, style)
        }))?;
        if let Some(m) = tie_margin {
            let style = ShapeStyle { color: BLACK.to_rgba(), filled: false, stroke_width: 1 };
            chart.draw_series(DashedLineSeries::new(
                [(m, SegmentValue::Exact(0)), (m, SegmentValue::Exact(n))],
                4,
                4,
                style,
            ))?;
        }
        Ok(())
    })
}

/// Where the ΔAIC chart's axis ends when one bar would squeeze the others:
/// when the largest ΔAIC is more than twice the next, the axis ends at 1.25
/// times the next (at least 2.5 tie margins, so the margin line stands
/// clear), and the longest bar is cut there with its value written in it.
/// `None`: the axis holds every bar.
pub fn delta_aic_cut(deltas: &[f64], tie_margin: Option<f64>) -> Option<f64> {
    let mut d: Vec<f64> = deltas.iter().copied().filter(|v| v.is_finite()).collect();
    d.sort_by(|a, b| b.total_cmp(a));
    let (first, second) = (*d.first()?, *d.get(1)?);
    let end = (1.25 * second).max(2.5 * tie_margin.unwrap_or(2.0)).max(2.5);
    (first > 2.0 * second && first > end).then_some(end)
}

/// Residual maps of the plain and the chosen model on one diverging scale
/// centred at zero, shared so that colours compare across the two maps.
pub fn residual_maps(
    before: Option<&ResidualMap>,
    after: Option<&ResidualMap>,
    unit: &str,
    extent: Option<(f64, f64)>,
    sensors: &[SensorPoint],
    openings: &[OpeningSegment],
) -> Vec<Result<Figure, FigureError>> {
    let all = before.into_iter().chain(after).flat_map(|m| m.points.iter().map(|p| p.residual));
    let scale = Scale::diverging(all);
    let mut out = Vec::new();
    for (m, which) in [(before, "before"), (after, "after")] {
        let Some(m) = m else { continue };
        let spec = MapSpec {
            id: format!("residuals-{which}"),
            title: format!("Residuals of {}", m.model),
            extent,
            points: m.points.iter().map(|p| (p.x, p.y, Some(p.residual))).collect(),
            scale,
            legend: format!("residual ({unit})"),
            sensors,
            openings,
            sensor_values: Vec::new(),
            wide: false,
        };
        out.push(value_map(&spec));
    }
    out
}
