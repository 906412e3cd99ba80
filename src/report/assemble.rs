//! Assembly of [`ReportData`] sections from the stages' results: the layout,
//! the climate (mapped surfaces, daily sensor series, QC and gaps), the
//! variograms and the provenance. It copies and reshapes numbers the stages
//! computed; the only arithmetic is the daily mean of the regular sensor
//! series for the small-multiple plots and the evaluation of fitted
//! variogram curves at plotting lags.

use super::data::*;
use crate::climate::ClimateRun;
use crate::io::ingest::Ingested;
use crate::io::layout::{Pots, Sensors};
use crate::io::study::Study;
use crate::spatial::stage::MapRun;
use sha2::{Digest, Sha256};
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
            (0..s.ids.len()).map(|i| SensorPoint { id: s.ids[i].clone(), x: s.x[i], y: s.y[i] }).collect()
        })
        .unwrap_or_default();
    let openings = study
        .spec
        .openings
        .iter()
        .map(|o| OpeningSegment { name: o.name.clone(), from: o.from, to: o.to })
        .collect();
    let counts = if factors.len() >= 2 {
        match (pots.table.text(&factors[0]), pots.table.text(&factors[1])) {
            (Ok(a), Ok(b)) => {
                let mut rl: Vec<String> = Vec::new();
                let mut cl: Vec<String> = Vec::new();
                for (x, y) in a.iter().zip(&b) {
                    if !rl.iter().any(|l| l == x) {
                        rl.push(x.to_string());
                    }
                    if !cl.iter().any(|l| l == y) {
                        cl.push(y.to_string());
                    }
                }
                // Sorted, as `potclim check` prints its count table, so that a
                // reader finds a level where expected (the model keeps the
                // order of first appearance for its reference level).
                rl.sort();
                cl.sort();
                let mut counts = vec![vec![0u64; cl.len()]; rl.len()];
                for (x, y) in a.iter().zip(&b) {
                    let i = rl.iter().position(|l| l == x).unwrap_or(0);
                    let j = cl.iter().position(|l| l == y).unwrap_or(0);
                    counts[i][j] += 1;
                }
                Some(CountTable {
                    row_factor: factors[0].clone(),
                    col_factor: factors[1].clone(),
                    row_levels: rl,
                    col_levels: cl,
                    counts,
                })
            }
            _ => None,
        }
    } else {
        None
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
            let unit = if d.starts_with(crate::model::verdict::DISTANCE_PREFIX) {
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
                "kriged from the loggers over each pot's own growth window".into()
            } else {
                "mapped without a standard error (the SE map shows 0)".into()
            }),
            points,
        });
    }
    let cal = &climate.calendar;
    let days: Vec<String> = cal.days.iter().map(|d| d.to_string()).collect();
    let mut series = Vec::new();
    for (name, unit, m) in [
        ("temperature", "°C", &climate.grid.temperature),
        ("relative humidity", "%", &climate.grid.humidity),
        ("PPFD", "µmol m-2 s-1", &climate.grid.light),
    ] {
        if m.all_missing() {
            continue;
        }
        let sensors = (0..m.n_cols)
            .map(|j| SensorSeries {
                sensor: climate.grid.sensors[j].clone(),
                values: cal
                    .day_steps
                    .iter()
                    .map(|r| {
                        let v: Vec<f64> = r.clone().map(|t| m.get(t, j)).filter(|v| v.is_finite()).collect();
                        (!v.is_empty()).then(|| v.iter().sum::<f64>() / v.len() as f64)
                    })
                    .collect(),
            })
            .filter(|s| s.values.iter().any(Option::is_some))
            .collect();
        series.push(DailySeries {
            variable: format!("daily mean {name}"),
            unit: unit.into(),
            days: days.clone(),
            sensors,
        });
    }
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
            let max_lag = v.empirical.bins.last().map(|b| b.to).unwrap_or(1.0);
            let fits = v
                .fits
                .iter()
                .filter_map(|(fam, f)| {
                    let m = f.as_ref()?.model;
                    let curve =
                        (0..=60).map(|k| max_lag * k as f64 / 60.0).map(|h| [h, m.semivariance(h)]).collect();
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

fn input_file(study: &Study, path: &std::path::Path) -> Option<InputFile> {
    let bytes = std::fs::read(path).ok()?;
    let shown = path.strip_prefix(&study.dir).unwrap_or(path).display().to_string();
    Some(InputFile {
        path: shown,
        bytes: bytes.len() as u64,
        sha256: Sha256::digest(&bytes).iter().map(|b| format!("{b:02x}")).collect(),
    })
}

/// Provenance: every input file with size and SHA-256, the study file's
/// text, the tool version and seed.
pub fn provenance(study: &Study, ing: Option<&Ingested>, started: &str, seconds: Option<f64>) -> Provenance {
    let mut inputs = Vec::new();
    inputs.extend(input_file(study, &study.path));
    inputs.extend(input_file(study, &study.resolve(&study.spec.pots.file)));
    if let Some(s) = &study.spec.sensors {
        inputs.extend(input_file(study, &study.resolve(&s.file)));
    }
    if let Some(ing) = ing {
        for f in &ing.files {
            inputs.extend(input_file(study, &f.path));
        }
    }
    Provenance {
        inputs,
        study_file: study.source.clone(),
        tool_version: env!("CARGO_PKG_VERSION").to_string(),
        seed: study.seed(),
        started: started.to_string(),
        seconds,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// SHA-256 of "abc": FIPS 180-2, Appendix B.1 (the standard's own example).
    #[test]
    fn input_checksum_matches_the_standard_example() {
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("study.toml");
        std::fs::write(
            &p,
            "[study]\ntitle = \"t\"\ntimezone = \"UTC\"\noutput = \"out\"\n[pots]\nfile = \"pots.csv\"\nid = \"pot\"\nx = \"x\"\ny = \"y\"\n",
        )
        .unwrap();
        let study = Study::load(&p).unwrap();
        std::fs::write(d.path().join("abc.txt"), "abc").unwrap();
        let f = input_file(&study, &d.path().join("abc.txt")).unwrap();
        assert_eq!(f.sha256, "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
        assert_eq!(f.bytes, 3);
        assert_eq!(f.path, "abc.txt");
    }
}
