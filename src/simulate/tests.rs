//! Tests of [`super`]: complete replicates in blocks, the residual structures' keys,
//! a written study that loads, every unit of every channel read back, faults at the
//! lines they changed, and the climate field's humidity and draught.

use super::*;
use crate::io::study::Study;

fn small() -> Scenario {
    Scenario::from_source(Path::new("scenario.toml"), &scenario::tests::small()).unwrap()
}

#[test]
fn blocks_hold_complete_replicates() {
    let sc = small();
    let pots = design(&sc, 7);
    assert_eq!(pots.len(), 24);
    for b in 1..=2 {
        let mut combos: Vec<Vec<usize>> = pots
            .iter()
            .filter(|p| sc.positions[p.position].grid.unwrap().0 == b)
            .map(|p| p.levels.clone())
            .collect();
        combos.sort();
        // 6 combinations x 2 replicates per bench.
        assert_eq!(combos.len(), 12);
        combos.dedup();
        assert_eq!(combos.len(), 6);
    }
}

fn residual_column(files: &[(String, Vec<u8>)]) -> Vec<String> {
    let (_, b) = files.iter().find(|(n, _)| n == "truth/pots.csv").unwrap();
    let text = String::from_utf8(b.clone()).unwrap();
    let mut lines = text.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let j = header.iter().position(|h| *h == "residual_field").unwrap();
    lines.map(|l| l.split(',').nth(j).unwrap().to_string()).collect()
}

fn with_trait_keys(extra: &str) -> Result<Scenario> {
    Scenario::from_source(Path::new("scenario.toml"), &format!("{}\n{extra}", scenario::tests::small()))
}

/// `[trait.residual_direction]` with angle 0 and ratio 1 leaves the
/// residual field exactly as without it (the stretched distance is the
/// distance); a real direction changes it; its keys and
/// `[trait.residual_lattice]` are checked with the key named. The bench
/// layout of the small scenario (benches 2 m apart, rows 0.5 m) is not
/// an equally spaced grid, so the lattice field is refused with the reason.
#[test]
fn residual_direction_and_lattice_keys() {
    let plain = residual_column(&generate(&small(), 5).unwrap());
    let same = with_trait_keys("[trait.residual_direction]\nangle = 0.0\nratio = 1.0\n").unwrap();
    assert_eq!(residual_column(&generate(&same, 5).unwrap()), plain);
    let turned = with_trait_keys("[trait.residual_direction]\nangle = 30.0\nratio = 0.3\n").unwrap();
    assert_ne!(residual_column(&generate(&turned, 5).unwrap()), plain);
    for (extra, key) in [
        ("[trait.residual_direction]\nangle = 30.0\nratio = 1.5\n", "trait.residual_direction.ratio"),
        (
            "[trait.residual_lattice]\nrow_correlation = 1.0\ncolumn_correlation = 0.5\nsill = 1.0\n",
            "trait.residual_lattice.row_correlation",
        ),
    ] {
        let e = with_trait_keys(extra).unwrap_err();
        assert!(format!("{e}").contains(key), "{e}");
    }
    let lattice = with_trait_keys(
        "[trait.residual_lattice]\nrow_correlation = 0.2\ncolumn_correlation = 0.8\nsill = 1.0\n",
    )
    .unwrap();
    let e = generate(&lattice, 5).unwrap_err();
    assert!(
        format!("{e}").contains("trait.residual_lattice") && format!("{e}").contains("not equally spaced"),
        "{e}"
    );
}

#[test]
fn written_study_loads_and_files_exist() {
    let sc = small();
    let files = generate(&sc, 3).unwrap();
    let d = tempfile::tempdir().unwrap();
    for (name, b) in &files {
        let p = d.path().join(name);
        std::fs::create_dir_all(p.parent().unwrap()).unwrap();
        std::fs::write(p, b).unwrap();
    }
    let st = Study::load(&d.path().join("study.toml")).unwrap();
    let pots = crate::io::layout::load_pots(&st).unwrap();
    assert_eq!(pots.ids.len(), 24);
    let sensors = crate::io::layout::load_sensors(&st).unwrap().unwrap();
    assert_eq!(sensors.ids, vec!["S1", "S2"]);
    for log in &st.spec.logs {
        for g in &log.files {
            let n = glob::glob(&st.resolve(g).to_string_lossy()).unwrap().count();
            assert!(n >= 1, "{g}");
        }
    }
    // Later stages' sections parse with the keys of their issues.
    #[derive(serde::Deserialize)]
    struct Doc {
        climate: Option<toml::Table>,
        indicator: Option<Vec<toml::Table>>,
        model: Option<toml::Table>,
    }
    let doc: Doc = st.section().unwrap();
    assert_eq!(doc.climate.unwrap()["step"].as_str(), Some("10m"));
    assert_eq!(doc.indicator.unwrap()[0]["statistic"].as_str(), Some("hours_below"));
    assert_eq!(doc.model.unwrap()["trait"].as_str(), Some("weight"));
}

/// Simulate the small scenario with logger S1's export rewritten to
/// write `lines` as its three channel columns, ingest it, and return S1's
/// kept readings by UTC instant (ms) with the simulator's truth
/// (`truth/sensor_readings.csv`) at the same instants.
/// One reading instant: UTC ms, the ingested values, the truth table's.
type ReadBack = (i64, [Option<f64>; 3], [Option<f64>; 3]);

fn ingest_s1(lines: [String; 3]) -> Vec<ReadBack> {
    let text = scenario::tests::small()
        .replace(r#"temperature = { column = "T", unit = "degC", decimals = 2 }"#, &lines[0])
        .replace(r#"humidity = { column = "RH", unit = "percent" }"#, &lines[1])
        .replace(r#"light = { column = "PAR", unit = "umol_m2_s", decimals = 0 }"#, &lines[2]);
    let sc = Scenario::from_source(Path::new("scenario.toml"), &text).unwrap();
    let d = tempfile::tempdir().unwrap();
    for (name, b) in generate(&sc, 11).unwrap() {
        let p = d.path().join(name);
        std::fs::create_dir_all(p.parent().unwrap()).unwrap();
        std::fs::write(p, b).unwrap();
    }
    let st = Study::load(&d.path().join("study.toml")).unwrap();
    let ing = crate::io::ingest::ingest(&st).unwrap();
    let df = &ing.readings;
    let sensor = df.column("sensor").unwrap().str().unwrap().clone();
    let time = df.column("time").unwrap().datetime().unwrap().physical().clone();
    let cols: Vec<_> = crate::io::units::Channel::ALL
        .iter()
        .map(|c| df.column(c.column()).unwrap().f64().unwrap().clone())
        .collect();
    let mut truth = std::collections::HashMap::new();
    let mut r = csv::Reader::from_path(d.path().join("truth/sensor_readings.csv")).unwrap();
    for rec in r.records() {
        let rec = rec.unwrap();
        if &rec[0] == "S1" {
            let t = chrono::DateTime::parse_from_rfc3339(&rec[1]).unwrap().timestamp_millis();
            truth.insert(t, [2, 3, 4].map(|k| rec[k].parse::<f64>().ok()));
        }
    }
    (0..df.height())
        .filter(|&i| sensor.get(i) == Some("S1"))
        .filter_map(|i| {
            let t = time.get(i).unwrap();
            let got = [0, 1, 2].map(|k| cols[k].get(i));
            truth.get(&t).map(|w| (t, got, *w))
        })
        .collect()
}

/// Every unit of every channel round-trips: a study simulated with the
/// export in that unit and ingested again gives the readings of the same
/// study written in the internal unit at six decimals, within the
/// precision the export prints (half a unit of its last decimal, times
/// the conversion's scale), and equals the simulator's truth table to
/// its four decimals. The reference of the conversions is ingestion's
/// (`io::units`, sources cited there); a simulator that printed a light
/// value in W m-2 or lux without converting it from PPFD reads back
/// wrong by the factor and fails here.
#[test]
fn every_unit_of_every_channel_reads_back() {
    use crate::io::units::{Channel, Conversion};
    let col = |ch: Channel| ["T", "RH", "PAR"][ch.index()];
    let line = |ch: Channel, unit: &str, decimals: usize| {
        format!(r#"{} = {{ column = "{}", unit = "{unit}", decimals = {decimals} }}"#, ch.key(), col(ch))
    };
    let identity = ["degC", "percent", "umol_m2_s"];
    let reference = ingest_s1(Channel::ALL.map(|ch| line(ch, identity[ch.index()], 6)));
    assert!(reference.len() > 500, "{}", reference.len());
    let by_time: std::collections::HashMap<i64, [Option<f64>; 3]> =
        reference.iter().map(|(t, v, _)| (*t, *v)).collect();
    for ch in Channel::ALL {
        for unit in ch.unit_names() {
            let decimals = 2;
            let mut lines = Channel::ALL.map(|c| line(c, identity[c.index()], 6));
            lines[ch.index()] = line(ch, unit, decimals);
            let scale = Conversion::of(ch, unit).unwrap().scale.abs();
            let tol = 0.5 * 10f64.powi(-(decimals as i32)) * scale + 1e-6;
            let mut compared = 0;
            for (t, got, truth) in ingest_s1(lines) {
                let k = ch.index();
                let (Some(g), Some(want)) = (got[k], by_time.get(&t).and_then(|v| v[k])) else {
                    continue;
                };
                assert!(
                    (g - want).abs() <= tol,
                    "{ch} in {unit} at {t}: read back {g}, meant {want} (tolerance {tol})"
                );
                let w = truth[k].expect("truth has the channel");
                assert!((g - w).abs() <= 5.001e-5, "{ch} in {unit} at {t}: read back {g}, truth table {w}");
                compared += 1;
            }
            assert!(compared > 500, "{ch} in {unit}: only {compared} readings compared");
        }
    }
}

#[test]
fn faults_point_at_the_lines_they_changed() {
    let sc = small();
    let files = generate(&sc, 3).unwrap();
    let get = |n: &str| String::from_utf8(files.iter().find(|f| f.0 == n).unwrap().1.clone()).unwrap();
    let faults = get("truth/faults.csv");
    let main = get("logs/main.csv");
    let lines: Vec<&str> = main.lines().collect();
    let mut reasons = std::collections::BTreeMap::new();
    for f in faults.lines().skip(1) {
        let c: Vec<&str> = f.split(',').collect();
        *reasons.entry(c[5].to_string()).or_insert(0) += 1;
        if c[0] == "logs/main.csv" {
            let row = lines[c[1].parse::<usize>().unwrap() - 1];
            // The UTC clock export prints the instant itself.
            let t = chrono::DateTime::parse_from_rfc3339(c[3])
                .unwrap()
                .naive_utc()
                .format("%Y-%m-%d %H:%M:%S")
                .to_string();
            assert!(row.starts_with(&t), "{row} vs {f}");
            if c[5] == "spike" {
                let v: f64 = row.split(',').nth(2).unwrap().parse().unwrap();
                assert!(v > 20.0, "{row}");
            }
        }
    }
    // 1 spike, 36 stuck (6 h at 10 min), 1 duplicate, 6 outside the period (1 h lead).
    assert_eq!(reasons.get("spike"), Some(&1));
    assert_eq!(reasons.get("stuck"), Some(&36));
    assert_eq!(reasons.get("duplicate"), Some(&1));
    assert_eq!(reasons.get("outside_period"), Some(&6));
    let gaps = get("truth/gaps.csv");
    assert!(gaps.contains("S1,2026-10-26T11:00:00Z,2026-10-26T14:00:00Z,gap"), "{gaps}");
    // The stuck rows all carry one value.
    let s2 = get("logs/eu/S2.csv");
    assert!(s2.starts_with("logger S2\nexported\nZeit;Temp_F;rF;Lux\n"), "{s2}");
    let stuck: Vec<&str> = faults.lines().filter(|l| l.contains(",stuck")).collect();
    let vals: std::collections::BTreeSet<&str> = stuck
        .iter()
        .map(|f| {
            let line: usize = f.split(',').nth(1).unwrap().parse().unwrap();
            s2.lines().nth(line - 1).unwrap().split(';').nth(2).unwrap()
        })
        .collect();
    assert_eq!(vals.len(), 1);
}

#[test]
fn rh_falls_as_temperature_rises_and_draught_cools_at_night() {
    let sc = small();
    let r = climate::reference(&sc, Duration::zero(), &mut rng(1, stream::WEATHER));
    let near = climate::components(&sc, [0.2, 1.5], 0.0);
    let far = climate::components(&sc, [5.8, 1.5], 0.0);
    let (mut night_gap, mut day_gap, mut nn, mut nd) = (0.0, 0.0, 0, 0);
    for i in 0..r.times.len() {
        let d = climate::temperature(&sc, &r, &far, i) - climate::temperature(&sc, &r, &near, i);
        if r.night[i] && r.draught_weight[i] > 0.99 {
            night_gap += d;
            nn += 1;
        } else if !r.night[i] && r.draught_weight[i] < 0.01 {
            day_gap += d;
            nd += 1;
        }
        if r.night[i] {
            assert_eq!(r.ppfd[i], 0.0);
        }
    }
    // Gradient 0.1 °C/m over 5.6 m plus the draught: 3 °C * (exp(-0.2/1.5) - exp(-5.8/1.5)) at night.
    let expect_night = 0.56 + 3.0 * ((-0.2f64 / 1.5).exp() - (-5.8f64 / 1.5).exp());
    approx::assert_abs_diff_eq!(night_gap / nn as f64, expect_night, epsilon = 0.01);
    assert!(day_gap / (nd as f64) < night_gap / nn as f64 - 1.5);
}
