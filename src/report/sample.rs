//! An invented, hand-built [`ReportData`] for looking at the page and for the
//! rendering tests: a basil cultivar trial in a growth room whose cooling pad
//! on the west wall chills the pots nearest to it. Every number here is made
//! up by simple closed-form shapes; none is the output of an analysis, and
//! nothing in the analysis reads this module.

use super::data::*;
use crate::model::compare::{Candidate, Shape, rank};
use crate::spatial::likelihood::LikelihoodKind;
use std::collections::BTreeMap;

const LENGTH: f64 = 12.0;
const WIDTH: f64 = 5.0;

/// Deterministic pseudo-noise in -1..1 from an integer (a hash, so the sample
/// needs no random number generator).
fn wiggle(k: u64) -> f64 {
    let mut z = k.wrapping_add(0x9E37_79B9_7F4A_7C15);
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^= z >> 31;
    (z >> 11) as f64 / (1u64 << 53) as f64 * 2.0 - 1.0
}

fn cold_hours(x: f64, y: f64) -> f64 {
    4.0 + 38.0 * (-x / 3.0).exp() + 1.5 * (y / WIDTH)
}

/// The invented sample report.
pub fn sample_report() -> ReportData {
    let cultivars = ["Genovese", "Thai", "Lemon", "Purple Ruffles", "Greek dwarf", "Cinnamon"];
    let feeds = ["low feed", "high feed"];
    let sensors = vec![
        SensorPoint { id: "L1 pad end".into(), x: 0.8, y: 2.5, silent: false },
        SensorPoint { id: "L2".into(), x: 4.5, y: 1.0, silent: false },
        SensorPoint { id: "L3".into(), x: 7.5, y: 4.0, silent: false },
        SensorPoint { id: "L4 fan end".into(), x: 11.2, y: 2.5, silent: false },
    ];
    let openings = vec![
        OpeningSegment { name: "cooling_pad".into(), from: [0.0, 0.5], to: [0.0, 4.5] },
        OpeningSegment { name: "door".into(), from: [12.0, 0.0], to: [12.0, 1.2] },
    ];
    let mut pots = Vec::new();
    let mut mapped = Vec::new();
    let mut before = Vec::new();
    let mut after = Vec::new();
    let mut counts = vec![vec![0u64; feeds.len()]; cultivars.len()];
    let mut k = 0u64;
    for bench in 0..4 {
        for slot in 0..24 {
            let x = 0.35 + slot as f64 * 0.48;
            let y = 0.6 + bench as f64 * 1.25;
            let c = (k as usize) % cultivars.len();
            let f = ((k / cultivars.len() as u64) % 2) as usize;
            counts[c][f] += 1;
            let cold = cold_hours(x, y);
            let resid = 2.0 * wiggle(k);
            let mass = 30.0 + 3.0 * c as f64 + 6.0 * f as f64 - 0.45 * cold + resid;
            pots.push(PotPoint {
                id: format!("P{:03}", k + 1),
                x,
                y,
                value: if k == 37 { None } else { Some(mass) },
            });
            let dmin = sensors
                .iter()
                .map(|s| ((s.x - x).powi(2) + (s.y - y).powi(2)).sqrt())
                .fold(f64::MAX, f64::min);
            mapped.push(MappedValue {
                x,
                y,
                value: cold + 0.6 * wiggle(k + 1000),
                se: 0.4 + 0.9 * dmin.min(4.0),
            });
            before.push(ResidualPoint { x, y, residual: -0.45 * (cold - 12.0) + resid });
            after.push(ResidualPoint { x, y, residual: resid });
            k += 1;
        }
    }
    let days: Vec<String> = (1..=14).map(|d| format!("2026-03-{d:02}")).collect();
    let series_of = |base: f64, amp: f64, s: usize, gap: Option<usize>| SensorSeries {
        sensor: sensors[s].id.clone(),
        values: (0..days.len())
            .map(|d| {
                if Some(d) == gap {
                    None
                } else {
                    Some(base + amp * (d as f64 / 2.3).sin() + 0.3 * wiggle((s * 100 + d) as u64))
                }
            })
            .collect(),
    };
    let temperature = DailySeries {
        variable: "daily mean temperature".into(),
        unit: "°C".into(),
        days: days.clone(),
        sensors: (0..4).map(|s| series_of(17.0 + 1.3 * s as f64, 1.2, s, (s == 2).then_some(6))).collect(),
    };
    let dli = DailySeries {
        variable: "daily light integral".into(),
        unit: "mol m⁻² d⁻¹".into(),
        days: days.clone(),
        sensors: (0..4).map(|s| series_of(14.0 + 0.4 * s as f64, 2.5, s, None)).collect(),
    };
    let exp_curve = |nugget: f64, sill: f64, range: f64| -> Vec<[f64; 2]> {
        (0..=40)
            .map(|i| {
                let h = i as f64 * 0.2;
                [h, nugget + (sill - nugget) * (1.0 - (-h / range).exp())]
            })
            .collect()
    };
    let gau_curve = |nugget: f64, sill: f64, range: f64| -> Vec<[f64; 2]> {
        (0..=40)
            .map(|i| {
                let h = i as f64 * 0.2;
                [h, nugget + (sill - nugget) * (1.0 - (-(h / range).powi(2)).exp())]
            })
            .collect()
    };
    let bins = |sill: f64, range: f64, seed: u64| -> Vec<VariogramBin> {
        (1..=12)
            .map(|i| {
                let lag = i as f64 * 0.65;
                VariogramBin {
                    lag,
                    semivariance: 0.1 * sill
                        + 0.9 * sill * (1.0 - (-lag / range).exp()) * (1.0 + 0.08 * wiggle(seed + i)),
                    pairs: 40 + 25 * i.min(6) - 3 * i.saturating_sub(6),
                }
            })
            .collect()
    };
    let comparison_rows = [
        ("base + night_cold_hours", vec!["night_cold_hours"], None, false, -241.3, 15),
        (
            "base + night_cold_hours | exponential",
            vec!["night_cold_hours"],
            Some("exponential"),
            false,
            -240.6,
            17,
        ),
        ("base + distance_cooling_pad", vec!["distance_cooling_pad"], None, false, -244.9, 15),
        ("base | exponential + nugget", vec![], Some("exponential"), true, -246.2, 17),
        ("base | gaussian", vec![], Some("gaussian"), false, -249.0, 16),
        ("base", vec![], None, false, -262.8, 14),
    ];
    // AIC, BIC, delta-AIC and Akaike weights by the model stage's own
    // ranking (the report never computes them), on 96 invented pots.
    let candidates: Vec<Candidate> = comparison_rows
        .iter()
        .map(|r| {
            let shape = Shape {
                drivers: r.1.iter().map(|s| s.to_string()).collect(),
                correlation: r.2.map(str::to_string),
                nugget: r.3,
            };
            Candidate::new(r.0, LikelihoodKind::Ml, shape, r.4, r.5, 96).expect("finite invented likelihoods")
        })
        .collect();
    let comparison = rank(&candidates)
        .expect("one data set")
        .into_iter()
        .map(|r| ComparisonRow {
            name: r.candidate.name,
            drivers: r.candidate.drivers,
            correlation: r.candidate.correlation,
            nugget: r.candidate.nugget,
            loglik: r.candidate.loglik,
            aic: r.aic,
            bic: r.bic,
            n_params: r.candidate.n_params as u64,
            delta_aic: r.delta_aic,
            akaike_weight: r.akaike_weight,
        })
        .collect();
    let mut adjusted = Vec::new();
    for (c, name) in cultivars.iter().enumerate() {
        let change = 1.8 * wiggle(500 + c as u64);
        let mean = 33.0 + 3.0 * c as f64;
        adjusted.push(AdjustedMean {
            factor: "cultivar".into(),
            level: (*name).into(),
            mean,
            se: 0.9,
            plain_mean: mean - change,
            change,
        });
    }
    for (f, name) in feeds.iter().enumerate() {
        adjusted.push(AdjustedMean {
            factor: "feed".into(),
            level: (*name).into(),
            mean: 37.0 + 6.0 * f as f64,
            se: 0.5,
            plain_mean: 37.2 + 6.0 * f as f64,
            change: -0.2,
        });
    }
    let mut reasons = BTreeMap::new();
    reasons.insert("out_of_range".to_string(), 3u64);
    reasons.insert("stuck_value".to_string(), 41u64);
    let mut reasons2 = BTreeMap::new();
    reasons2.insert("spike".to_string(), 2u64);
    ReportData {
        title: "Basil cultivars under a cooling pad, growth room 3, spring run".into(),
        compartment: Some(CompartmentSize { length: LENGTH, width: WIDTH }),
        moves: None,
        verdict: Some(VerdictSection {
            word: "covariate".into(),
            reason: "The measured driver `night_cold_hours` explains the spatial pattern: with it in the model, independent errors fit as well as any correlated-error model.".into(),
            chosen_model: "base + night_cold_hours".into(),
            best_by_aic: Some("base + night_cold_hours".into()),
            trait_unit: Some("g".into()),
            drivers: vec![
                DriverRow {
                    name: "night_cold_hours".into(),
                    unit: Some("h".into()),
                    estimate: -0.4512,
                    se: 0.0613,
                    estimate_with_mapping_uncertainty: Some(-0.4398),
                    se_with_mapping_uncertainty: Some(0.0788),
                    ci_low_with_mapping_uncertainty: Some(-0.5976),
                    ci_high_with_mapping_uncertainty: Some(-0.2820),
                    ci_low: -0.5714,
                    ci_high: -0.3310,
                    p_value: Some(2.1e-11),
                    delta_aic: Some(39.0),
                    delta_aic_with_correlation: Some(9.2),
                    vif: Some(3.1),
                    confounded: false,
                    small_sample: Some(SmallSampleRow {
                        ci_low: -0.5751,
                        ci_high: -0.3273,
                        p_value: 4.0e-10,
                        df: 138.0,
                        model: "base + night_cold_hours".into(),
                    }),
                },
                DriverRow {
                    name: "distance_cooling_pad".into(),
                    unit: Some("m".into()),
                    estimate: 0.912,
                    se: 0.151,
                    estimate_with_mapping_uncertainty: None,
                    se_with_mapping_uncertainty: None,
                    ci_low_with_mapping_uncertainty: None,
                    ci_high_with_mapping_uncertainty: None,
                    ci_low: 0.616,
                    ci_high: 1.208,
                    p_value: Some(3.4e-8),
                    delta_aic: Some(31.8),
                    delta_aic_with_correlation: Some(0.4),
                    vif: Some(3.1),
                    confounded: true,
                    small_sample: None,
                },
            ],
            cautions: vec![
                "Four loggers stood in a room of 60 m²; the mapped cold hours are uncertain far from them (see the standard-error map).".into(),
                "The cooling-pad distance explains almost as much as the measured cold; the two cannot be fully separated in this layout.".into(),
            ],
            technical_notes: vec![
                "`night_cold_hours`: refitted on 20 imputations of the mapped driver; Rubin's rules combine them.".into(),
            ],
            headline: Some(crate::model::verdict::Headline {
                effect: Some(crate::model::verdict::TypicalEffect {
                    driver: "night_cold_hours".into(),
                    low: 40.0,
                    high: 110.0,
                    effect: -30.79,
                    ci_low: -41.83,
                    ci_high: -19.74,
                    includes_mapping: true,
                    map_se: Some(9.5),
                    driver_sd: 24.0,
                }),
                certainty: crate::model::verdict::Certainty {
                    chosen_weight: 0.41,
                    kind_weight: 0.83,
                    other_model: Some("base | exponential".into()),
                    other_delta: Some(6.2),
                    evidence_ratio: Some(22.2),
                },
                warnings: vec![],
                next_logger: Some(crate::model::verdict::NextLogger {
                    driver: "night_cold_hours".into(),
                    pot: "B3-07".into(),
                    x: 9.1,
                    y: 5.4,
                    se: 17.2,
                }),
                blocking: Some("Block the next trial by distance to the cooling_pad: the distance alone improves the model by 31.0 AIC units (more than the tie margin of 4), so bands of equal distance to it make fairer blocks than rows or benches.".into()),
            }),
            map_warnings: vec![],
            structures: vec![],
        }),
        layout: Some(LayoutSection {
            trait_name: "fresh mass".into(),
            trait_unit: "g".into(),
            pots,
            sensors: sensors.clone(),
            openings,
            counts: Some(CountTable {
                row_factor: "cultivar".into(),
                col_factor: "feed".into(),
                row_levels: cultivars.iter().map(|s| s.to_string()).collect(),
                col_levels: feeds.iter().map(|s| s.to_string()).collect(),
                counts,
            }),
        }),
        climate: Some(ClimateSection {
            surfaces: vec![IndicatorSurface {
                name: "night_cold_hours".into(),
                unit: "h".into(),
                description: Some("Hours below 12 °C between dusk and dawn over each pot's growth window.".into()),
                points: mapped,
                loggers: vec![
                    LoggerValue { id: "L1 pad end".into(), value: Some(112.0) },
                    LoggerValue { id: "L2".into(), value: Some(71.0) },
                    LoggerValue { id: "L3".into(), value: Some(52.0) },
                    LoggerValue { id: "L4 fan end".into(), value: Some(38.0) },
                ],
                checks: vec![
                    LoggerCheck {
                        sensor: "L1 pad end".into(),
                        observed: 112.0,
                        predicted: 83.0,
                        se: Some(12.5),
                        z: Some(-2.32),
                        flagged: true,
                        nearest_to: vec!["cooling_pad".into()],
                    },
                    LoggerCheck {
                        sensor: "L2".into(),
                        observed: 71.0,
                        predicted: 66.5,
                        se: Some(9.0),
                        z: Some(-0.5),
                        flagged: false,
                        nearest_to: vec![],
                    },
                    LoggerCheck {
                        sensor: "L3".into(),
                        observed: 52.0,
                        predicted: 58.0,
                        se: Some(8.0),
                        z: Some(0.75),
                        flagged: false,
                        nearest_to: vec!["door".into()],
                    },
                    LoggerCheck {
                        sensor: "L4 fan end".into(),
                        observed: 38.0,
                        predicted: 47.0,
                        se: Some(10.0),
                        z: Some(0.9),
                        flagged: false,
                        nearest_to: vec![],
                    },
                ],
            }],
            series: vec![temperature, dli],
            qc: vec![
                QcRow { file: "loggers/L1.csv".into(), rows_read: 4032, rows_kept: 3988, rows_flagged: 44, reasons },
                QcRow {
                    file: "loggers/L2.csv".into(),
                    rows_read: 4032,
                    rows_kept: 4030,
                    rows_flagged: 2,
                    reasons: reasons2,
                },
                QcRow { file: "loggers/L3-L4.txt".into(), rows_read: 7776, rows_kept: 7776, rows_flagged: 0, reasons: BTreeMap::new() },
            ],
            gaps: vec![GapRow {
                sensor: "L3".into(),
                variable: "temperature".into(),
                from: "2026-03-07T00:00:00Z".into(),
                to: "2026-03-07T23:55:00Z".into(),
                hours: 24.0,
            }],
        }),
        variograms: vec![
            VariogramPanel {
                subject: "night_cold_hours".into(),
                unit: "h²".into(),
                bins: bins(60.0, 2.5, 1),
                fits: vec![
                    VariogramFit {
                        family: "exponential".into(),
                        nugget: 6.0,
                        sill: 60.0,
                        range: 2.5,
                        practical_range: Some(7.49),
                        curve: exp_curve(6.0, 60.0, 2.5),
                    },
                    VariogramFit {
                        family: "gaussian".into(),
                        nugget: 9.0,
                        sill: 57.0,
                        range: 3.1,
                        practical_range: Some(5.37),
                        curve: gau_curve(9.0, 57.0, 3.1),
                    },
                ],
            },
            VariogramPanel {
                subject: "residuals of base + night_cold_hours".into(),
                unit: "g²".into(),
                bins: (1..=12)
                    .map(|i| VariogramBin {
                        lag: i as f64 * 0.65,
                        semivariance: 1.35 * (1.0 + 0.1 * wiggle(900 + i)),
                        pairs: 40 + 25 * i.min(6),
                    })
                    .collect(),
                fits: vec![VariogramFit {
                    family: "exponential".into(),
                    nugget: 1.3,
                    sill: 1.37,
                    range: 0.3,
                    practical_range: Some(0.9),
                    curve: exp_curve(1.3, 1.37, 0.3),
                }],
            },
        ],
        models: Some(ModelsSection {
            comparison,
            anova: vec![AnovaTable {
                model: "base + night_cold_hours".into(),
                kind: Some("sequential (type I) F tests".into()),
                rows: vec![
                    AnovaRow { term: "cultivar".into(), df: 5.0, sum_sq: Some(812.4), mean_sq: Some(162.5), f: Some(120.3), p_value: Some(1e-30) },
                    AnovaRow { term: "feed".into(), df: 1.0, sum_sq: Some(864.0), mean_sq: Some(864.0), f: Some(639.6), p_value: Some(1e-30) },
                    AnovaRow { term: "cultivar:feed".into(), df: 5.0, sum_sq: Some(6.1), mean_sq: Some(1.22), f: Some(0.90), p_value: Some(0.485) },
                    AnovaRow { term: "night_cold_hours".into(), df: 1.0, sum_sq: Some(301.7), mean_sq: Some(301.7), f: Some(223.4), p_value: Some(1e-24) },
                    AnovaRow { term: "residual".into(), df: 83.0, sum_sq: Some(112.1), mean_sq: Some(1.351), f: None, p_value: None },
                ],
            }],
            residual_unit: Some("g".into()),
            residuals_before: Some(ResidualMap {
                model: "base (factorial only)".into(),
                points: before,
                moran: Some(MoranI {
                    i: 0.412,
                    expectation: -1.0 / 95.0,
                    variance: 0.0021,
                    p_value: 1e-15,
                    note: Some("inverse-distance weights within 2 m; normal approximation, one-sided".into()),
                }),
            }),
            residuals_after: Some(ResidualMap {
                model: "base + night_cold_hours".into(),
                points: after,
                moran: Some(MoranI {
                    i: -0.018,
                    expectation: -1.0 / 95.0,
                    variance: 0.0021,
                    p_value: 0.57,
                    note: Some("inverse-distance weights within 2 m; normal approximation, one-sided".into()),
                }),
            }),
            tie_margin: Some(2.0),
        }),
        adjusted_means: adjusted,
        adjusted_means_unit: Some("g".into()),
        provenance: Some(Provenance {
            inputs: vec![
                InputFile { path: "study.toml".into(), bytes: 1423, sha256: "3f1c9a0e5b7d2c4a6e8f0b1d3c5e7a9b2d4f6a8c0e1b3d5f7a9c2e4b6d8f0a1c".into() },
                InputFile { path: "pots.csv".into(), bytes: 5120, sha256: "a0b1c2d3e4f5a6b7c8d9e0f1a2b3c4d5e6f7a8b9c0d1e2f3a4b5c6d7e8f9a0b1".into() },
            ],
            study_file: "[study]\ntitle = \"Basil cultivars under a cooling pad, growth room 3, spring run\"\ntimezone = \"Europe/Berlin\"\noutput = \"out\"\nseed = 7\n".into(),
            tool_version: env!("CARGO_PKG_VERSION").into(),
            seed: 7,
            started: "2026-03-20T09:14:03Z".into(),
            seconds: Some(6.4),
        }),
        over_time: None,
    }
}
