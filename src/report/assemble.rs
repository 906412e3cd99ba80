//! Assembly of [`ReportData`] sections from the stages' results: the layout,
//! the climate (mapped surfaces, daily sensor series, QC and gaps), the
//! variograms and the provenance. It copies, labels and reshapes what the
//! stages computed and carry in their results (the count table from
//! [`crate::io::inventory::cross_tab`], the daily means in
//! [`ClimateRun::daily_means`], the fitted curves in
//! [`crate::spatial::stage::VariableMap::fit_curves`], the input digests from
//! [`crate::io::provenance`]); it computes nothing.

use super::data::*;
use crate::climate::ClimateRun;
use crate::io::ingest::Ingested;
use crate::io::layout::{Pots, Sensors};
use crate::io::study::Study;
use crate::io::units::Channel;
use crate::spatial::stage::MapRun;
use std::collections::BTreeMap;

/// The layout section: pots coloured by the trait, sensors, openings, and the
/// factor-by-factor count table of the first two factors. Without a trait
/// unit the legend says "trait unit".
pub fn layout(
    study: &Study,
    pots: &Pots,
    sensors: Option<&Sensors>,
    trait_column: Option<&str>,
    trait_unit: Option<&str>,
    factors: &[String],
) -> LayoutSection {
    let values: Option<Vec<Option<f64>>> = trait_column.and_then(|c| pots.table.optional_numbers(c).ok());
    let pts = (0..pots.ids.len())
        .map(|i| PotPoint {
            id: pots.ids[i].clone(),
            x: pots.x[i],
            y: pots.y[i],
            value: values.as_ref().and_then(|v| v[i]),
        })
        .collect();
    let sensors = sensors
        .map(|s| {
            (0..s.ids.len())
                .map(|i| SensorPoint { id: s.ids[i].clone(), x: s.x[i], y: s.y[i], silent: false })
                .collect()
        })
        .unwrap_or_default();
    let openings = study
        .spec
        .openings
        .iter()
        .map(|o| OpeningSegment { name: o.name.clone(), from: o.from, to: o.to })
        .collect();
    // Sorted levels, as `potclim check` prints its count table, so that a
    // reader finds a level where expected (the model keeps the order of first
    // appearance for its reference level).
    let counts = match factors {
        [a, b, ..] => crate::io::inventory::cross_tab(&pots.table, a, b).ok().map(|c| CountTable {
            row_factor: c.rows,
            col_factor: c.cols,
            row_levels: c.row_levels,
            col_levels: c.col_levels,
            counts: c.counts.into_iter().map(|r| r.into_iter().map(|n| n as u64).collect()).collect(),
        }),
        _ => None,
    };
    LayoutSection {
        trait_name: trait_column.unwrap_or("trait").to_string(),
        trait_unit: trait_unit.unwrap_or("trait unit").to_string(),
        pots: pts,
        sensors,
        openings,
        counts,
    }
}

/// The units of the verdict's labels: the trait's from `[model].trait_unit`;
/// each driver's from its declared indicator (hours, °C d, mol m-2 d-1, ...),
/// metres for a distance to an opening (`distance_<name>`), unknown for a
/// driver taken from a pot-table column.
pub fn units(
    trait_unit: Option<&str>,
    indicators: &[crate::climate::Indicator],
    drivers: &[String],
) -> super::from_verdict::Units {
    let drivers = drivers
        .iter()
        .filter_map(|d| {
            let unit = if d.starts_with(crate::spatial::geometry::DISTANCE_PREFIX) {
                Some("m".to_string())
            } else {
                indicators.iter().find(|i| i.name == *d).map(|i| i.unit().to_string())
            };
            unit.map(|u| (d.clone(), u))
        })
        .collect();
    super::from_verdict::Units { trait_unit: trait_unit.map(str::to_string), drivers }
}

/// The climate section: each mapped indicator with its SE, the sensors'
/// daily means per variable, the QC summary and the gaps.
pub fn climate(ing: &Ingested, climate: &ClimateRun, map: &MapRun) -> ClimateSection {
    let mut surfaces = Vec::new();
    for (k, col) in map.indicators.iter().enumerate() {
        let unit = climate.config.indicators.get(k).map(|i| i.unit().to_string()).unwrap_or_default();
        let points = (0..map.pots.len())
            .filter(|&j| col.value[j].is_finite())
            .map(|j| MappedValue {
                x: map.pot_points.x[j],
                y: map.pot_points.y[j],
                value: col.value[j],
                se: col.se.as_ref().map(|s| s[j]).filter(|s| s.is_finite()).unwrap_or(0.0),
            })
            .collect();
        surfaces.push(IndicatorSurface {
            name: col.name.clone(),
            unit,
            description: Some(if col.se.is_some() {
                let route = map.routes.get(k).and_then(|r| r.as_ref()).map(|r| format!("; {}", r.reason()));
                format!(
                    "kriged from the loggers over each pot's own growth window{}",
                    route.unwrap_or_default()
                )
            } else {
                "mapped without a standard error (the SE map shows 0)".into()
            }),
            points,
            loggers: climate
                .grid
                .sensors
                .iter()
                .enumerate()
                .map(|(j, id)| LoggerValue {
                    id: id.clone(),
                    value: climate.study.get(k).and_then(|s| s.get(j)).and_then(|w| w.value),
                })
                .collect(),
            checks: map
                .checks
                .iter()
                .filter(|c| c.indicator == col.name)
                .map(|c| LoggerCheck {
                    sensor: c.sensor.clone(),
                    observed: c.observed,
                    predicted: c.predicted,
                    se: c.se,
                    z: c.z(),
                    flagged: c.flagged(),
                    nearest_to: c.nearest_to.clone(),
                })
                .collect(),
        });
    }
    let days: Vec<String> = climate.calendar.days.iter().map(|d| d.to_string()).collect();
    let series = climate
        .daily_means
        .iter()
        .map(|m| {
            let (name, unit) = match m.channel {
                Channel::Temperature => ("temperature", "°C"),
                Channel::Humidity => ("relative humidity", "%"),
                Channel::Light => ("PPFD", "µmol m-2 s-1"),
            };
            let sensors = m
                .values
                .iter()
                .zip(&climate.grid.sensors)
                .filter(|(v, _)| v.iter().any(Option::is_some))
                .map(|(v, s)| SensorSeries { sensor: s.clone(), values: v.clone() })
                .collect();
            DailySeries {
                variable: format!("daily mean {name}"),
                unit: unit.into(),
                days: days.clone(),
                sensors,
            }
        })
        .collect();
    let qc = ing
        .files
        .iter()
        .map(|f| QcRow {
            file: f.name.clone(),
            rows_read: f.rows_read as u64,
            rows_kept: f.rows_kept as u64,
            rows_flagged: f.rows_flagged as u64,
            reasons: crate::io::qc::Reason::ALL
                .iter()
                .zip(f.by_reason.iter())
                .filter(|(_, n)| **n > 0)
                .map(|(r, n)| (r.name().to_string(), *n as u64))
                .collect::<BTreeMap<_, _>>(),
        })
        .collect();
    let fmt = |ms: i64| {
        chrono::DateTime::from_timestamp_millis(ms)
            .map(|t| t.format("%Y-%m-%d %H:%MZ").to_string())
            .unwrap_or_default()
    };
    let gaps = ing
        .gaps
        .iter()
        .map(|g| GapRow {
            sensor: g.sensor.clone(),
            variable: g.channel.to_string(),
            from: fmt(g.from),
            to: fmt(g.to),
            hours: (g.to - g.from) as f64 / 3.6e6,
        })
        .collect();
    ClimateSection { surfaces, series, qc, gaps }
}

/// One variogram panel per mapped variable: the pooled bins and every
/// family's fitted curve.
pub fn variograms(map: &MapRun) -> Vec<VariogramPanel> {
    map.variables
        .iter()
        .map(|v| {
            let bins: Vec<VariogramBin> = v
                .empirical
                .bins
                .iter()
                .filter_map(|b| {
                    let s = b.semivariance?;
                    Some(VariogramBin { lag: b.lag, semivariance: s, pairs: b.pairs as u64 })
                })
                .collect();
            let fits = v
                .fits
                .iter()
                .zip(&v.fit_curves)
                .filter_map(|((fam, f), curve)| {
                    let m = f.as_ref()?.model;
                    let curve = curve.clone()?;
                    Some(VariogramFit {
                        family: fam.name(),
                        nugget: m.nugget,
                        sill: m.sill(),
                        range: m.range,
                        practical_range: Some(m.practical_range()),
                        curve,
                    })
                })
                .collect();
            let unit = match v.name {
                "temperature" => "°C²",
                "humidity" => "%²",
                _ => "(µmol m-2 s-1)²",
            };
            VariogramPanel {
                subject: format!("{} (pooled over time steps, anomalies from each step's mean)", v.name),
                unit: unit.into(),
                bins,
                fits,
            }
        })
        .collect()
}

/// Provenance: every input file with size and SHA-256, the study file's
/// text, the tool version and seed.
pub fn provenance(study: &Study, ing: Option<&Ingested>, started: &str, seconds: Option<f64>) -> Provenance {
    let inputs = crate::io::provenance::input_files(study, ing)
        .into_iter()
        .map(|f| InputFile { path: f.path, bytes: f.bytes, sha256: f.sha256 })
        .collect();
    Provenance {
        inputs,
        study_file: study.source.clone(),
        tool_version: env!("CARGO_PKG_VERSION").to_string(),
        seed: study.seed(),
        started: started.to_string(),
        seconds,
    }
}

/// The mapping stage's warnings that weaken the answer: every variable whose
/// variogram could not be fitted and was mapped with the documented default
/// model ([`crate::spatial::mapping::choose_model`]), as the stage worded them.
pub fn fallback_warnings(map: &MapRun) -> Vec<String> {
    map.variables
        .iter()
        .filter(|v| v.chosen_family.is_none())
        .map(|v| {
            let why = v.warnings.first().map(|w| format!(" ({w})")).unwrap_or_default();
            format!(
                "The variogram of {} could not be fitted and fell back to a default model{why}: its maps, their standard errors and every effect of a driver computed from them rest on that assumption.",
                v.name
            )
        })
        .collect()
}

/// Mark the layout's sensors that have no series in the climate grid (no
/// reading in any export) as silent, so that maps grey them out.
pub fn mark_silent(layout: &mut LayoutSection, climate: &ClimateRun) {
    for s in &mut layout.sensors {
        s.silent = !climate.grid.sensors.contains(&s.id);
    }
}
