//! The report's section on pots that move, "Where the pots stood": its data
//! ([`MovesSection`], carried in [`super::ReportData`] and
//! `report_data.json` only when the study has a move table), its assembly
//! from the mapping stage's [`MovedPots`] (copied and labelled, nothing
//! computed), and its HTML.
//!
//! The section shows where the pots spent their growth windows (every
//! position ever held, coloured by the pot time spent there), each mapped
//! driver along the pots' paths drawn at their starting positions, and
//! whether the moves evened the drivers out: the spread across the pots with
//! and without the moves, as the mapping stage computed it
//! ([`crate::spatial::paths::Spread`]).

use super::colour::Scale;
use super::figures::{self, Figure, FigureError, MapSpec};
use super::html::{decimals_for, escape, figure_html, fixed, opt, sig};
use crate::spatial::paths::{MovedPots, Spread};
use crate::spatial::stage::MapRun;
use serde::{Deserialize, Serialize};
use std::fmt::Write as _;

/// The section's id, and its entry in the page's table of contents.
pub const SECTION_ID: &str = "moves";

/// Where the pots stood and whether the moves evened the drivers out.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct MovesSection {
    /// Pots of the pot table.
    pub pots: usize,
    /// Pots that changed position inside their growth window.
    pub pots_moved: usize,
    /// Changes of position inside the pots' growth windows, all pots together.
    pub moves: usize,
    /// Every position ever held, with the pot time spent there.
    pub positions: Vec<HeldPosition>,
    /// Per mapped indicator: each pot's value along its path, placed at its
    /// starting position.
    pub exposure: Vec<ExposureMap>,
    /// Per driver (indicators, then distances to openings): the spread
    /// across the pots along the paths and without moves.
    pub spread: Vec<SpreadRow>,
    /// The paths of at most [`PATHS_DRAWN`] pots, those that held the most
    /// distinct positions in their growth windows.
    #[serde(default)]
    pub paths: Vec<TravelledPath>,
}

/// How many pots' paths the time map draws at most.
pub const PATHS_DRAWN: usize = 12;

/// The positions one pot held in its growth window, in order.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct TravelledPath {
    /// Pot id.
    pub pot: String,
    /// `[x m, y m]` of each position, in the order held.
    pub points: Vec<[f64; 2]>,
}

/// A position some pot held.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct HeldPosition {
    /// The pot whose `[pots]` position it is, the slot id, or `x=.. y=..`.
    pub id: String,
    /// Metres.
    pub x: f64,
    /// Metres.
    pub y: f64,
    /// Pot time spent there over the pots' growth windows, pot-days (one
    /// pot standing there one day counts 1).
    pub pot_days: f64,
}

/// One indicator along the pots' paths.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct ExposureMap {
    /// Indicator name.
    pub name: String,
    /// Its unit.
    pub unit: String,
    /// `(x m, y m, value)` at each pot's starting position; `None`: undefined.
    pub points: Vec<(f64, f64, Option<f64>)>,
}

/// One driver's spread with and without the moves.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct SpreadRow {
    /// Driver name.
    pub driver: String,
    /// Its unit.
    pub unit: String,
    /// The numbers of `paths_spread.csv`.
    #[serde(flatten)]
    pub spread: Spread,
}

/// The section from the mapping stage's record of the moves.
pub fn from_map(map: &MapRun, m: &MovedPots) -> MovesSection {
    let (pots_moved, moves) = m.moved();
    let pos = &m.paths.positions;
    let start = &map.pot_points;
    let value = |v: f64| v.is_finite().then_some(v);
    MovesSection {
        pots: map.pots.len(),
        pots_moved,
        moves,
        positions: (0..pos.len())
            .map(|p| HeldPosition {
                id: pos.ids[p].clone(),
                x: pos.x[p],
                y: pos.y[p],
                pot_days: m.pot_days[p],
            })
            .collect(),
        exposure: m
            .drivers
            .iter()
            .filter(|d| map.indicators.iter().any(|c| c.name == d.driver))
            .map(|d| ExposureMap {
                name: d.driver.clone(),
                unit: d.unit.clone(),
                points: d.path.iter().enumerate().map(|(j, &v)| (start.x[j], start.y[j], value(v))).collect(),
            })
            .collect(),
        spread: m
            .drivers
            .iter()
            .map(|d| SpreadRow { driver: d.driver.clone(), unit: d.unit.clone(), spread: d.spread })
            .collect(),
        paths: m
            .most_travelled(PATHS_DRAWN)
            .into_iter()
            .map(|(j, held)| TravelledPath {
                pot: map.pots[j].clone(),
                points: held.into_iter().map(|p| [pos.x[p], pos.y[p]]).collect(),
            })
            .collect(),
    }
}

/// Where everything else on the floor plan is: the compartment, the loggers
/// and the openings.
#[derive(Clone, Copy, Debug)]
pub struct Floor<'a> {
    /// `[0, length] x [0, width]`, metres.
    pub extent: Option<(f64, f64)>,
    /// The loggers.
    pub sensors: &'a [super::data::SensorPoint],
    /// The openings.
    pub openings: &'a [super::data::OpeningSegment],
}

/// Every figure of the section, in page order, with its caption.
pub fn figures(s: &MovesSection, floor: Floor<'_>) -> Vec<(Result<Figure, FigureError>, String)> {
    let base = MapSpec {
        id: "moves-time".into(),
        title: "Time the pots spent at each position".into(),
        extent: floor.extent,
        points: s.positions.iter().map(|p| (p.x, p.y, Some(p.pot_days))).collect(),
        scale: Scale::sequential(s.positions.iter().map(|p| p.pot_days)),
        legend: "pot time (pot-days)".into(),
        sensors: floor.sensors,
        openings: floor.openings,
        sensor_values: Vec::new(),
        wide: true,
    };
    let caption = format!(
        "Seen from above. Each disc is a position some pot held, coloured by the pot time spent there over the pots' growth windows (pot-days: one pot standing there for one day counts 1). Triangles are the climate loggers, thick black lines the openings.{}",
        match s.paths.len() {
            0 => String::new(),
            n => format!(
                " Coloured lines: the paths of {n} pot(s) that held the most positions, each labelled with its pot at its starting position, an arrow on each leg pointing the way it moved."
            ),
        }
    );
    let head = arrow_head(floor.extent, &s.positions);
    let mut out = vec![(figures::value_map_with(&base, |chart| draw_paths(chart, &s.paths, head)), caption)];
    for e in &s.exposure {
        let spec = MapSpec {
            id: format!("moves-exposure-{}", figures::slug(&e.name)),
            title: format!("{}: along each pot's path", e.name),
            points: e.points.clone(),
            scale: Scale::sequential(e.points.iter().filter_map(|p| p.2)),
            legend: format!("{} ({})", e.name, e.unit),
            wide: false,
            ..base.clone()
        };
        out.push((
            figures::value_map(&spec),
            format!(
                "Each pot's <code>{}</code> over its growth window along the path it travelled, drawn at its starting position (its place in the pot table), not at the places it held. Grey rings: no value.",
                escape(&e.name)
            ),
        ));
    }
    out
}

/// The length of an arrow head, metres: 2.5 % of the floor's longer side
/// (of the positions' extent without a compartment).
fn arrow_head(extent: Option<(f64, f64)>, positions: &[HeldPosition]) -> f64 {
    let side = match extent {
        Some((l, w)) => l.max(w),
        None => {
            let span = |v: Vec<f64>| super::colour::finite_extent(v).map_or(1.0, |(a, b)| b - a);
            span(positions.iter().map(|p| p.x).collect()).max(span(positions.iter().map(|p| p.y).collect()))
        }
    };
    0.025 * side.max(1e-9)
}

/// Each path as a line in its own colour (the logger palette, in path
/// order), an arrow head of length `head` (metres) at the middle of each leg
/// pointing the way the pot moved, and the pot id at its first position.
fn draw_paths(
    chart: &mut figures::MapChart<'_, '_>,
    paths: &[TravelledPath],
    head: f64,
) -> figures::DrawResult {
    use plotters::prelude::*;
    for (k, path) in paths.iter().enumerate() {
        let (c, _) = super::colour::logger_line(k);
        let colour = RGBColor(c.0, c.1, c.2);
        let points: Vec<(f64, f64)> = path.points.iter().map(|p| (p[0], p[1])).collect();
        chart.draw_series(LineSeries::new(points.clone(), colour.stroke_width(2)))?;
        for leg in points.windows(2) {
            let ((x0, y0), (x1, y1)) = (leg[0], leg[1]);
            let length = (x1 - x0).hypot(y1 - y0);
            if length == 0.0 {
                continue;
            }
            let (ux, uy) = ((x1 - x0) / length, (y1 - y0) / length);
            let tip = ((x0 + x1) / 2.0, (y0 + y1) / 2.0);
            // two wings 25 degrees either side of the leg, pointing back
            let (c25, s25) = (25f64.to_radians().cos(), 25f64.to_radians().sin());
            let wing =
                |s: f64| (tip.0 - head * (ux * c25 - s * uy * s25), tip.1 - head * (uy * c25 + s * ux * s25));
            chart.draw_series(std::iter::once(PathElement::new(
                vec![wing(1.0), tip, wing(-1.0)],
                colour.stroke_width(2),
            )))?;
        }
        if let Some(&first) = points.first() {
            chart.draw_series(std::iter::once(
                EmptyElement::at(first)
                    + Text::new(path.pot.clone(), (4, 4), (figures::FONT, 11).into_font().color(&colour)),
            ))?;
        }
    }
    Ok(())
}

/// A change of spread within 5 % either way is called no change (a wording
/// rule, common practice).
const SAME: f64 = 0.05;

/// One sentence on a driver's spread with and without the moves.
pub fn spread_sentence(r: &SpreadRow) -> String {
    let s = &r.spread;
    let name = format!("<code>{}</code>", escape(&r.driver));
    let unit = escape(&r.unit);
    let (Some(before), Some(after)) = (s.sd_unmoved, s.sd_path) else {
        return format!(
            "The spread of {name} across pots could not be compared: fewer than two pots have a value both with and without the moves."
        );
    };
    let verb = if after < (1.0 - SAME) * before {
        "narrowed"
    } else if after > (1.0 + SAME) * before {
        "widened"
    } else {
        return format!(
            "The moves left the spread of {name} across pots about the same: a standard deviation of {} {unit} without them, {} {unit} with them.",
            sig(before, 3),
            sig(after, 3)
        );
    };
    format!(
        "The moves {verb} the spread of {name} across pots from {} to {} {unit} (standard deviation{}).",
        sig(before, 3),
        sig(after, 3),
        match s.sd_ratio {
            Some(q) => format!(", {} times the spread without moves", sig(q, 2)),
            None => String::new(),
        }
    )
}

/// The section's HTML.
pub fn section(s: &MovesSection, floor: Floor<'_>, out: &mut String) {
    let _ = writeln!(
        out,
        "<section id=\"{SECTION_ID}\">\n<h2>Where the pots stood</h2>\n<p>{} of {} pots changed position during their growth windows, {} moves in all, over {} positions. Each pot's drivers are computed along its own path: the climate at each position it held, for the time it stood there.</p>",
        s.pots_moved,
        s.pots,
        s.moves,
        s.positions.len()
    );
    let mut figs = figures(s, floor).into_iter();
    if let Some((f, c)) = figs.next() {
        out.push_str(&figure_html(f, &c));
    }
    if !s.exposure.is_empty() {
        out.push_str("<h3>The drivers along the paths</h3>\n");
        for (f, c) in figs {
            out.push_str(&figure_html(f, &c));
        }
    }
    out.push_str("<h3>Did the moves even the drivers out?</h3>\n");
    if s.spread.is_empty() {
        out.push_str("<p>No driver was mapped.</p>\n");
    } else {
        out.push_str("<p>Each driver as it was along the pots' paths, against what it would have been had every pot stayed its whole growth window at its starting position.</p>\n<ul>\n");
        for r in &s.spread {
            let _ = writeln!(out, "<li>{}</li>", spread_sentence(r));
        }
        out.push_str("</ul>\n<div class=\"scroll\"><table class=\"spread\">\n<tr><th>driver</th><th class=\"n\">SD without moves</th><th class=\"n\">SD along the paths</th><th class=\"n\">ratio</th><th class=\"n\">10th–90th percentile without moves</th><th class=\"n\">along the paths</th><th class=\"n\">ratio</th><th class=\"n\">pots</th></tr>\n");
        for r in &s.spread {
            let p = &r.spread;
            let range = |lo: Option<f64>, hi: Option<f64>| match (lo, hi) {
                // both ends with three significant digits of the width (a
                // numerically nil end reads 0, not 3e-12)
                (Some(lo), Some(hi)) => {
                    let d = decimals_for([hi - lo], 3);
                    format!("{} to {}", fixed(lo, d), fixed(hi, d))
                }
                _ => "–".into(),
            };
            let _ = writeln!(
                out,
                "<tr><td>{} ({})</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td></tr>",
                escape(&r.driver),
                escape(&r.unit),
                opt(p.sd_unmoved, |v| sig(v, 3)),
                opt(p.sd_path, |v| sig(v, 3)),
                opt(p.sd_ratio, |v| sig(v, 2)),
                range(p.p10_unmoved, p.p90_unmoved),
                range(p.p10_path, p.p90_path),
                opt(p.range_ratio, |v| sig(v, 2)),
                p.pots
            );
        }
        out.push_str("</table></div>\n");
    }
    out.push_str("</section>\n");
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::report::data::{OpeningSegment, SensorPoint};
    use crate::report::html::tests::{check_snapshot, strip_svgs};
    use crate::report::xml::check_well_formed;

    /// Three positions on a 4 m x 2 m floor, two pots that swapped, one
    /// driver narrowed, one widened, one left alone, one undefined.
    pub(crate) fn small_section() -> MovesSection {
        let row = |driver: &str, unit: &str, sd: (Option<f64>, Option<f64>), p: [f64; 4]| SpreadRow {
            driver: driver.into(),
            unit: unit.into(),
            spread: Spread {
                pots: 2,
                sd_path: sd.0,
                sd_unmoved: sd.1,
                sd_ratio: sd.0.zip(sd.1).map(|(a, b)| a / b),
                p10_path: Some(p[0]),
                p90_path: Some(p[1]),
                p10_unmoved: Some(p[2]),
                p90_unmoved: Some(p[3]),
                range_ratio: Some((p[1] - p[0]) / (p[3] - p[2])),
            },
        };
        MovesSection {
            pots: 2,
            pots_moved: 2,
            moves: 3,
            positions: vec![
                HeldPosition { id: "a".into(), x: 0.5, y: 0.5, pot_days: 2.0 },
                HeldPosition { id: "b".into(), x: 1.5, y: 0.5, pot_days: 1.75 },
                HeldPosition { id: "x=3 y=1".into(), x: 3.0, y: 1.0, pot_days: 0.25 },
            ],
            exposure: vec![ExposureMap {
                name: "night_cold_hours".into(),
                unit: "h".into(),
                points: vec![(0.5, 0.5, Some(12.0)), (1.5, 0.5, None)],
            }],
            paths: vec![TravelledPath { pot: "a".into(), points: vec![[0.5, 0.5], [1.5, 0.5], [3.0, 1.0]] }],
            spread: vec![
                row("night_cold_hours", "h", (Some(16.97), Some(33.94)), [14.4, 33.6, 4.8, 43.2]),
                row("mean_temperature", "°C", (Some(3.0), Some(2.0)), [1.0, 5.0, 2.0, 4.0]),
                row("distance_door", "m", (Some(1.02), Some(1.0)), [1.0, 2.0, 1.0, 2.0]),
                SpreadRow {
                    driver: "day_light".into(),
                    unit: "mol m-2 d-1".into(),
                    spread: Spread::of(&[1.0], &[2.0]),
                },
            ],
        }
    }

    fn floor() -> (Vec<SensorPoint>, Vec<OpeningSegment>) {
        (
            vec![SensorPoint { id: "L1".into(), x: 2.0, y: 1.0, silent: false }],
            vec![OpeningSegment { name: "door".into(), from: [0.0, 0.5], to: [0.0, 1.5] }],
        )
    }

    /// The section's text and tables against the committed snapshot
    /// (`UPDATE_SNAPSHOTS=1 cargo test --lib report::moves` rewrites it);
    /// its figures are well-formed SVG maps with the positions and the
    /// loggers drawn.
    #[test]
    fn snapshot_of_the_moves_section() {
        let (sensors, openings) = floor();
        let floor = Floor { extent: Some((4.0, 2.0)), sensors: &sensors, openings: &openings };
        let mut html = String::new();
        section(&small_section(), floor, &mut html);
        check_well_formed(&html).unwrap();
        check_snapshot("moves_section.html", &strip_svgs(&html));
        let figs = figures(&small_section(), floor);
        assert_eq!(figs.len(), 2);
        // the path of pot a is drawn in the first logger colour, three legs'
        // worth of line and two arrow heads; without paths that colour is absent
        let (c, _) = crate::report::colour::logger_line(0);
        let hex = format!("#{:02X}{:02X}{:02X}", c.0, c.1, c.2);
        let with = figs[0].0.as_ref().unwrap().svg.clone();
        assert_eq!(with.matches(&hex).count(), 4, "{hex} in {with}");
        let bare = MovesSection { paths: Vec::new(), ..small_section() };
        let without = figures(&bare, floor).remove(0).0.unwrap().svg;
        assert!(!without.contains(&hex));
        for (f, caption) in figs {
            let f = f.unwrap();
            check_well_formed(&f.svg).unwrap();
            assert!(f.svg.contains("L1") && f.svg.contains("door"), "{}", f.id);
            assert!(!caption.is_empty());
        }
    }

    /// The sentences say narrowed, widened, about the same, or cannot be
    /// compared, with the two standard deviations.
    #[test]
    fn spread_sentences() {
        let s = small_section();
        let said: Vec<String> = s.spread.iter().map(spread_sentence).collect();
        assert!(said[0].starts_with("The moves narrowed the spread of <code>night_cold_hours</code> across pots from 33.9 to 17.0 h"), "{}", said[0]);
        assert!(said[1].contains("widened") && said[1].contains("from 2.00 to 3.00 °C"), "{}", said[1]);
        assert!(said[2].contains("about the same"), "{}", said[2]);
        assert!(said[3].contains("could not be compared"), "{}", said[3]);
    }

    /// Without a move table the report data has no `moves` key at all, so
    /// `report_data.json` stays as it was; with one it round-trips.
    #[test]
    fn absent_without_moves_and_round_trips() {
        let d = crate::report::ReportData { title: "t".into(), ..Default::default() };
        assert!(!serde_json::to_string(&d).unwrap().contains("moves"));
        let page = crate::report::render_html(&d);
        assert!(!page.contains("id=\"moves\"") && !page.contains("#moves"));
        let d = crate::report::ReportData { moves: Some(small_section()), ..d };
        let text = serde_json::to_string(&d).unwrap();
        let back: crate::report::ReportData = serde_json::from_str(&text).unwrap();
        assert_eq!(back.moves, d.moves);
        let page = crate::report::render_html(&d);
        assert!(page.contains("<section id=\"moves\">") && page.contains("href=\"#moves\""));
    }
}
