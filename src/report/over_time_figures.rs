//! The figures of the repeated-scorings section ([`super::over_time`]):
//! the verdict per interval as a strip along time, one driver's effect per
//! interval with its 95 % interval above the compartment's daily climate,
//! and maps of growth per interval as small multiples on one colour scale.
//! Conventions as in [`super::figures`]: plotters' SVG backend, titles and
//! axis labels with units drawn inside the figure, colours from
//! [`super::colour`].

use super::colour::{CATEGORICAL, Rgb, Scale, finite_extent};
use super::figures::{DrawResult, FONT, Figure, FigureError, colour_bar, render, rgb, slug};
use super::over_time::{DailyDriver, TraitOverTime};
use chrono::{NaiveDate, NaiveDateTime};
use plotters::prelude::*;

/// Width of the colour-bar column of the growth maps, pixels.
const LEGEND_W: u32 = 134;

/// Interval number, start and end in days after the time axis's origin.
type Span = (usize, f64, f64);

/// The time axis of a trait: its first interval's start, and every
/// interval's span in days after it.
fn time_axis(t: &TraitOverTime) -> Option<(NaiveDateTime, Vec<Span>)> {
    let t0 = t.intervals.iter().map(|i| i.from).min()?;
    let days = |x: NaiveDateTime| (x - t0).num_seconds() as f64 / 86_400.0;
    Some((t0, t.intervals.iter().map(|i| (i.interval, days(i.from), days(i.to))).collect()))
}

/// Tick label of day offset `v` after `t0`: the local date `MM-DD` at whole days.
fn date_label(t0: NaiveDateTime, v: f64) -> String {
    let k = v.round();
    if (v - k).abs() > 1e-6 {
        return String::new();
    }
    (t0 + chrono::Duration::days(k as i64)).format("%m-%d").to_string()
}

/// The colour of a verdict word (`None`: not analysed, white).
pub fn verdict_colour(word: Option<&str>) -> Rgb {
    match word {
        Some("covariate") => CATEGORICAL[4],
        Some("correlation") => CATEGORICAL[2],
        Some("both") => CATEGORICAL[5],
        Some("none") => (200, 200, 200),
        Some(_) => CATEGORICAL[3],
        None => (255, 255, 255),
    }
}

/// The verdict of every interval as a block along time, with its number
/// and word inside, and a key beneath.
pub fn verdict_strip(t: &TraitOverTime) -> Result<Figure, FigureError> {
    let id = format!("verdict-strip-{}", slug(&t.trait_name));
    let Some((t0, spans)) = time_axis(t) else {
        return Err(FigureError::Empty { id, message: "no interval".into() });
    };
    let x1 = spans.iter().map(|s| s.2).fold(1.0f64, f64::max);
    let title = format!("Verdict per interval: growth of {}", t.trait_name);
    let xl = "date (local, month-day)";
    let yl = "verdict (one block per interval)";
    let (width, height) = (760u32, 190u32);
    render(&id, &title, (xl, yl), (width, height), |root| {
        let (main, key) = root.split_vertically(150);
        let fmt = |v: &f64| date_label(t0, *v);
        let mut chart = ChartBuilder::on(&main)
            .caption(&title, (FONT, 15))
            .margin(10)
            .x_label_area_size(36)
            .y_label_area_size(20)
            .build_cartesian_2d(0f64..x1, 0f64..1f64)?;
        chart
            .configure_mesh()
            .disable_y_axis()
            .disable_mesh()
            .x_labels(12)
            .x_label_formatter(&fmt)
            .x_desc(xl)
            .label_style((FONT, 11))
            .axis_desc_style((FONT, 12))
            .draw()?;
        let px_per_day = 700.0 / x1.max(1e-9);
        for (num, a, b) in &spans {
            let word = t.intervals.iter().find(|i| i.interval == *num).and_then(|i| i.verdict.as_deref());
            let c = rgb(verdict_colour(word));
            chart.draw_series(std::iter::once(Rectangle::new([(*a, 0.1), (*b, 0.9)], c.filled())))?;
            chart.draw_series(std::iter::once(Rectangle::new(
                [(*a, 0.1), (*b, 0.9)],
                RGBColor(90, 90, 90).stroke_width(1),
            )))?;
            let label = if (b - a) * px_per_day >= 90.0 {
                format!("{num}: {}", word.unwrap_or("not analysed"))
            } else {
                num.to_string()
            };
            let w = label.chars().count() as f64 * 6.0;
            let x = (a + b) / 2.0 - w / 2.0 / px_per_day;
            chart.draw_series(std::iter::once(Text::new(label, (x, 0.6), (FONT, 11).into_font())))?;
        }
        let entries = [
            ("covariate", Some("covariate")),
            ("correlation", Some("correlation")),
            ("both", Some("both")),
            ("none", Some("none")),
            ("not analysed", None),
        ];
        let mut x = 20;
        for (label, word) in entries {
            let c = rgb(verdict_colour(word));
            key.draw(&Rectangle::new([(x, 12), (x + 14, 24)], c.filled()))?;
            key.draw(&Rectangle::new([(x, 12), (x + 14, 24)], RGBColor(90, 90, 90).stroke_width(1)))?;
            key.draw(&Text::new(label.to_string(), (x + 19, 12), (FONT, 11).into_font()))?;
            x += 30 + 7 * label.len() as i32;
        }
        Ok(())
    })
}

/// One driver's effect per interval (bar at the estimate over the
/// interval's time span, its 95 % interval shaded; the combined effect as a
/// dashed line with its band) above the daily climate of the compartment
/// (`daily`: the driver's indicator averaged over the loggers, one bar per
/// local day). Both panels share the time axis.
pub fn effect_over_time(
    t: &TraitOverTime,
    driver: &str,
    driver_unit: Option<&str>,
    daily: Option<&DailyDriver>,
) -> Result<Figure, FigureError> {
    let id = format!("effect-over-time-{}-{}", slug(&t.trait_name), slug(driver));
    let rows: Vec<_> = t.effects.iter().filter(|e| e.driver == driver).collect();
    let Some((t0, spans)) = time_axis(t).filter(|_| !rows.is_empty()) else {
        return Err(FigureError::Empty { id, message: format!("no effect of {driver}") });
    };
    let x1 = spans.iter().map(|s| s.2).fold(1.0f64, f64::max);
    let combined = t.combined.iter().find(|c| c.driver == driver);
    let (lo, hi) = finite_extent(
        rows.iter()
            .flat_map(|e| [e.ci_low, e.ci_high])
            .chain(combined.iter().flat_map(|c| [c.combined.ci_low, c.combined.ci_high]))
            .chain([0.0]),
    )
    .unwrap_or((-1.0, 1.0));
    let pad = if hi > lo { 0.08 * (hi - lo) } else { 1.0 };
    let growth = t.growth_unit.clone().unwrap_or_else(|| "trait units".into());
    let dunit = driver_unit.unwrap_or("unit");
    let title = format!("Effect of {driver} on growth of {} per interval", t.trait_name);
    let xl = "date (local, month-day)".to_string();
    let yl = format!("effect ({growth} per {dunit})");
    let day_values: Vec<(f64, f64)> = daily
        .map(|d| {
            d.days
                .iter()
                .zip(&d.values)
                .filter_map(|(day, v)| {
                    let day = NaiveDate::parse_from_str(day, "%Y-%m-%d").ok()?;
                    let x = (day.and_hms_opt(0, 0, 0)? - t0).num_seconds() as f64 / 86_400.0;
                    Some((x, (*v)?)).filter(|(x, v)| *x >= -1e-9 && *x + 1.0 <= x1 + 1e-9 && v.is_finite())
                })
                .collect()
        })
        .unwrap_or_default();
    let (width, height) = (760u32, if daily.is_some() { 470u32 } else { 320 });
    render(&id, &title, (&xl, &yl), (width, height), |root| {
        let (top, bottom) =
            if daily.is_some() { root.split_vertically(300) } else { (root.clone(), root.clone()) };
        let fmt = |v: &f64| date_label(t0, *v);
        let mut chart = ChartBuilder::on(&top)
            .caption(&title, (FONT, 15))
            .margin(10)
            .x_label_area_size(if daily.is_some() { 22 } else { 38 })
            .y_label_area_size(70)
            .build_cartesian_2d(0f64..x1, (lo - pad)..(hi + pad))?;
        let mut mesh = chart.configure_mesh();
        mesh.light_line_style(WHITE.mix(0.0))
            .bold_line_style(BLACK.mix(0.08))
            .x_labels(12)
            .x_label_formatter(&fmt)
            .y_desc(yl.as_str())
            .label_style((FONT, 11))
            .axis_desc_style((FONT, 12));
        if daily.is_none() {
            mesh.x_desc(xl.as_str());
        }
        mesh.draw()?;
        let grey = ShapeStyle { color: RGBColor(90, 90, 90).to_rgba(), filled: false, stroke_width: 1 };
        chart.draw_series(DashedLineSeries::new([(0.0, 0.0), (x1, 0.0)], 4, 4, grey))?;
        let accent = rgb(CATEGORICAL[1]);
        if let Some(c) = combined.map(|c| &c.combined) {
            chart.draw_series(std::iter::once(Rectangle::new(
                [(0.0, c.ci_low), (x1, c.ci_high)],
                accent.mix(0.12).filled(),
            )))?;
            let style = ShapeStyle { color: accent.to_rgba(), filled: false, stroke_width: 2 };
            chart.draw_series(DashedLineSeries::new([(0.0, c.estimate), (x1, c.estimate)], 8, 5, style))?;
            chart.draw_series(std::iter::once(Text::new(
                format!("combined {}", super::html::sig(c.estimate, 3)),
                (x1 * 0.01, c.estimate + 0.02 * (hi - lo + 2.0 * pad)),
                (FONT, 10).into_font().color(&accent),
            )))?;
        }
        let blue = rgb(CATEGORICAL[0]);
        for e in &rows {
            let Some(&(_, a, b)) = spans.iter().find(|s| s.0 == e.interval) else { continue };
            chart.draw_series(std::iter::once(Rectangle::new(
                [(a, e.ci_low), (b, e.ci_high)],
                blue.mix(0.25).filled(),
            )))?;
            chart.draw_series(LineSeries::new([(a, e.estimate), (b, e.estimate)], blue.stroke_width(3)))?;
        }
        if let Some(d) = daily {
            let (_, vmax) = finite_extent(day_values.iter().map(|v| v.1).chain([0.0])).unwrap_or((0.0, 1.0));
            let vmin = day_values.iter().map(|v| v.1).fold(0.0f64, f64::min);
            let top_v = if vmax > vmin { vmax + 0.08 * (vmax - vmin) } else { vmin + 1.0 };
            let dl = format!("daily {} ({})", d.name, d.unit);
            let mut c2 = ChartBuilder::on(&bottom)
                .margin(10)
                .margin_top(0)
                .x_label_area_size(38)
                .y_label_area_size(70)
                .build_cartesian_2d(0f64..x1, vmin..top_v)?;
            c2.configure_mesh()
                .light_line_style(WHITE.mix(0.0))
                .bold_line_style(BLACK.mix(0.08))
                .x_labels(12)
                .x_label_formatter(&fmt)
                .x_desc(xl.as_str())
                .y_desc(dl.as_str())
                .label_style((FONT, 11))
                .axis_desc_style((FONT, 11))
                .draw()?;
            let bar = rgb(CATEGORICAL[4]);
            c2.draw_series(day_values.iter().map(|&(x, v)| {
                let mut r = Rectangle::new([(x + 0.08, vmin.min(0.0)), (x + 0.92, v)], bar.filled());
                r.set_margin(0, 0, 0, 0);
                r
            }))?;
        }
        Ok(()) as DrawResult
    })
}

/// Growth per pot in each interval: one small map per interval (title: its
/// number and dates), all on one viridis scale, with one colour bar.
pub fn growth_maps(t: &TraitOverTime, extent: Option<(f64, f64)>) -> Result<Figure, FigureError> {
    let id = format!("growth-maps-{}", slug(&t.trait_name));
    let n = t.maps.len();
    if n == 0 || t.maps.iter().all(|m| m.points.is_empty()) {
        return Err(FigureError::Empty { id, message: "no growth to map".into() });
    }
    let all = t.maps.iter().flat_map(|m| m.points.iter().filter_map(|p| p.2));
    let scale = Scale::sequential(all);
    let xs = t.maps.iter().flat_map(|m| m.points.iter().map(|p| p.0));
    let ys = t.maps.iter().flat_map(|m| m.points.iter().map(|p| p.1));
    let (x0, x1, y0, y1) = match extent {
        Some((l, w)) => (0.0, l, 0.0, w),
        None => {
            let (a, b) = finite_extent(xs).unwrap_or((0.0, 1.0));
            let (c, d) = finite_extent(ys).unwrap_or((0.0, 1.0));
            let pad = 0.05 * (b - a).max(d - c).max(1.0);
            (a - pad, b + pad, c - pad, d + pad)
        }
    };
    let cols = n.min(3);
    let rows = n.div_ceil(cols);
    let plot_w = 200.0;
    let plot_h = (plot_w * (y1 - y0) / (x1 - x0)).clamp(90.0, 260.0);
    let panel_w = plot_w as u32 + 60;
    let panel_h = plot_h as u32 + 70;
    let width = panel_w * cols as u32 + LEGEND_W;
    let height = panel_h * rows as u32 + 30;
    let growth = t.growth_unit.clone().unwrap_or_else(|| "trait units".into());
    let title = format!("Growth of {} per interval", t.trait_name);
    let (xl, yl) = ("x (m)", "y (m)");
    let npts = t.maps.iter().map(|m| m.points.len()).max().unwrap_or(1).max(1) as f64;
    let radius = ((plot_w * plot_h / npts).sqrt() * 0.3).clamp(1.5, 6.0) as i32;
    render(&id, &title, (xl, yl), (width, height), |root| {
        let (head, body) = root.split_vertically(30);
        head.draw(&Text::new(title.clone(), (10, 8), (FONT, 15).into_font()))?;
        let (grid, legend) = body.split_horizontally(width - LEGEND_W);
        let panels = grid.split_evenly((rows, cols));
        for (m, area) in t.maps.iter().zip(panels.iter()) {
            let iv = t.intervals.iter().find(|i| i.interval == m.interval);
            let dates = iv
                .map(|i| format!(" ({} to {})", i.from.format("%m-%d"), i.to.format("%m-%d")))
                .unwrap_or_default();
            let mut chart = ChartBuilder::on(area)
                .caption(format!("interval {}{dates}", m.interval), (FONT, 12))
                .margin(6)
                .x_label_area_size(28)
                .y_label_area_size(36)
                .build_cartesian_2d(x0..x1, y0..y1)?;
            chart
                .configure_mesh()
                .light_line_style(WHITE.mix(0.0))
                .bold_line_style(BLACK.mix(0.08))
                .x_labels(4)
                .y_labels(4)
                .x_desc(xl)
                .y_desc(yl)
                .label_style((FONT, 10))
                .axis_desc_style((FONT, 10))
                .draw()?;
            chart.draw_series(m.points.iter().map(|&(x, y, v)| match v {
                Some(v) if v.is_finite() => Circle::new((x, y), radius, rgb(scale.colour(v)).filled()),
                _ => Circle::new((x, y), radius, RGBColor(150, 150, 150).stroke_width(1)),
            }))?;
        }
        colour_bar(&legend, scale, &format!("growth ({growth})"))
    })
}

#[cfg(test)]
mod tests {
    use super::super::figures::tests::assert_inside;
    use super::super::over_time::GrowthMap;
    use super::super::xml::check_well_formed;
    use super::*;
    use crate::model::intervals::{CombinedRow, EffectRow, IntervalRow};

    fn sample() -> TraitOverTime {
        let at = |d: &str| NaiveDateTime::parse_from_str(&format!("{d} 00:00"), "%Y-%m-%d %H:%M").unwrap();
        let iv = |k: usize, from: &str, to: &str, word: Option<&str>| IntervalRow {
            interval: k,
            from: at(from),
            to: at(to),
            pots: 10,
            verdict: word.map(str::to_string),
            ..IntervalRow::default()
        };
        let eff = |k: usize, est: f64| EffectRow {
            interval: k,
            driver: "night_cold_hours".into(),
            estimate: est,
            se: 0.01,
            ci_low: est - 0.02,
            ci_high: est + 0.02,
            p_value: 0.01,
            source_model: "m".into(),
            ..EffectRow::default()
        };
        let combined = crate::model::two_stage::combine(&[(-0.05, 0.01), (-0.04, 0.01)]).unwrap();
        TraitOverTime {
            trait_name: "height_cm".into(),
            growth_unit: None,
            intervals: vec![
                iv(1, "2026-02-02", "2026-02-09", Some("none")),
                iv(2, "2026-02-09", "2026-02-16", Some("covariate")),
                iv(3, "2026-02-16", "2026-02-23", Some("both")),
                iv(4, "2026-02-23", "2026-03-02", None),
            ],
            effects: vec![eff(2, -0.05), eff(3, -0.04)],
            combined: vec![CombinedRow {
                trait_name: "height_cm".into(),
                driver: "night_cold_hours".into(),
                combined,
            }],
            maps: (1..=4)
                .map(|k| GrowthMap {
                    interval: k,
                    points: (0..10)
                        .map(|i| (i as f64, 1.0, (i != 3).then_some(k as f64 + i as f64)))
                        .collect(),
                })
                .collect(),
        }
    }

    #[test]
    fn the_three_figures_draw_inside_their_frames() {
        let t = sample();
        let daily = DailyDriver {
            name: "night_cold_hours".into(),
            unit: "h".into(),
            days: (2..=28).map(|d| format!("2026-02-{d:02}")).collect(),
            values: (2..=28).map(|d| Some(if (12..19).contains(&d) { 8.0 } else { 0.0 })).collect(),
        };
        let figs = [
            verdict_strip(&t).unwrap(),
            effect_over_time(&t, "night_cold_hours", Some("h"), Some(&daily)).unwrap(),
            effect_over_time(&t, "night_cold_hours", Some("h"), None).unwrap(),
            growth_maps(&t, Some((10.0, 2.0))).unwrap(),
        ];
        for f in &figs {
            check_well_formed(&f.svg).unwrap_or_else(|e| panic!("{}: {e}", f.id));
            assert_inside(f);
            assert!(f.svg.contains(&super::super::html::escape(&f.title)), "{}: title not drawn", f.id);
        }
        for s in ["2: covariate", "3: both", "4: not analysed", "1: none"] {
            assert!(figs[0].svg.contains(s), "{s}");
        }
        assert!(figs[1].svg.contains("daily night_cold_hours (h)"));
        assert!(figs[1].svg.contains("effect (trait units per h)"));
        for k in 1..=4 {
            assert!(figs[3].svg.contains(&format!("interval {k} (")), "panel {k}");
        }
        assert!(effect_over_time(&t, "other", None, None).is_err());
    }
}
