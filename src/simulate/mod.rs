//! Synthetic studies with known truth: layouts, designs, a physically plausible
//! climate field, logger exports with injected faults, and a trait with known
//! effects. Output is a complete study folder that the other stages read.
//!
//! [`generate`] turns a checked [`Scenario`] and a seed into the bytes of
//! every file (in a fixed order); [`run`] writes them atomically. Nothing
//! depends on thread count or hash order: every random step draws from its own
//! ChaCha20 stream (`rand_chacha`, seeded with the seed and a fixed stream
//! number per step), collections are vectors or ordered maps, and numbers are
//! printed with fixed decimals. Changing the faults therefore never changes
//! the climate or the trait, and changing the trait never changes the logs.
//!
//! Layout of the written study (all paths relative to the output folder):
//!
//! ```text
//! study.toml           the study file (loads with io::study::Study::load)
//! pots.csv             pot table: positions, factors, sowing/scoring dates, trait
//! sensors.csv          sensor table
//! logs/...             logger exports, one format per [[export]]
//! moves.csv            the move table, with `[rotation]` (see `rotation`)
//! truth/effects.json   the true effects and climate parameters
//! truth/pots.csv       climate components and indicator values at every pot
//! truth/sensors.csv    climate components at every sensor
//! truth/climate_reference.csv   the reference series on the logging grid
//! truth/sensor_readings.csv     true readings at sensors, UTC, SI units
//! truth/faults.csv     every injected fault: file,line,sensor,time_utc,variable,reason
//! truth/gaps.csv       every removed interval: sensor,from_utc,to_utc,cause
//! ```

pub mod climate;
pub mod error;
pub mod exports;
pub mod field;
pub mod growth;
pub mod rotation;
pub mod scenario;
pub mod scorings;
mod study_file;

pub use error::{Result, SimError};
pub use scenario::Scenario;

use crate::io::output::StageWriter;
use chrono::{Duration, NaiveDate, SecondsFormat};
use climate::{Components, Statistic};
use field::FieldSampler;
use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha20Rng;
use rand_distr::{Distribution, StandardNormal};
use std::fmt::Write as _;
use std::path::{Path, PathBuf};
use study_file::study_toml;

/// Random streams, one per step, so that the steps are independent.
mod stream {
    pub const DESIGN: u64 = 1;
    pub const WEATHER: u64 = 2;
    pub const CLIMATE_FIELD: u64 = 3;
    pub const SENSOR_NOISE: u64 = 4;
    pub const RESIDUAL_FIELD: u64 = 5;
    pub const TRAIT_NOISE: u64 = 6;
    pub const RESIDUAL_LATTICE: u64 = 7;
    pub const ROTATION: u64 = 8;
}

fn rng(seed: u64, stream: u64) -> ChaCha20Rng {
    let mut r = ChaCha20Rng::seed_from_u64(seed);
    r.set_stream(stream);
    r
}

/// A pot of the generated design.
#[derive(Debug, Clone)]
pub struct Pot {
    /// Identifier (`P001`, ...), in position order.
    pub id: String,
    /// Index into [`Scenario::positions`].
    pub position: usize,
    /// Level index per factor.
    pub levels: Vec<usize>,
    /// Replicate number (1-based).
    pub replicate: usize,
    /// Sowing date (window start, local midnight).
    pub sown: NaiveDate,
    /// Scoring date (window end, local midnight, exclusive).
    pub scored: NaiveDate,
}

/// Uniform integer in `0..n` (n >= 1) from a ChaCha stream, portable across
/// platforms (sampled as u64).
fn below(r: &mut ChaCha20Rng, n: usize) -> usize {
    r.random_range(0..n as u64) as usize
}

/// Fisher-Yates shuffle (Knuth, TAOCP vol. 2, Algorithm 3.4.2 P).
fn shuffle<T>(v: &mut [T], r: &mut ChaCha20Rng) {
    for i in (1..v.len()).rev() {
        let j = below(r, i + 1);
        v.swap(i, j);
    }
}

/// Randomise the design onto the layout.
///
/// Treatment combinations are enumerated with the first factor slowest;
/// each appears `replicates` times. `complete`: a random subset of positions
/// (all when the counts match) receives the shuffled units. `blocks`: bench
/// `b` holds replicates `(b-1) R/B + 1 ..= b R/B`, shuffled over a random
/// subset of its positions. Pot ids follow position order. Sowing dates go by
/// bench (blocks) or cycle over replicates (complete).
pub fn design(sc: &Scenario, seed: u64) -> Vec<Pot> {
    let d = &sc.spec.design;
    let mut r = rng(seed, stream::DESIGN);
    let sizes: Vec<usize> = d.factor.iter().map(|f| f.levels.len()).collect();
    let combos: usize = sizes.iter().product();
    let combo_levels = |mut c: usize| -> Vec<usize> {
        let mut lv = vec![0; sizes.len()];
        for k in (0..sizes.len()).rev() {
            lv[k] = c % sizes[k];
            c /= sizes[k];
        }
        lv
    };
    // (position, combo, replicate, sowing index)
    let mut assigned: Vec<(usize, usize, usize, usize)> = Vec::new();
    if d.randomisation == "blocks" {
        let nb = sc.spec.layout.benches.expect("checked");
        let per = d.replicates / nb;
        for b in 0..nb {
            let mut pos: Vec<usize> = (0..sc.positions.len())
                .filter(|&i| sc.positions[i].grid.map(|g| g.0) == Some(b + 1))
                .collect();
            shuffle(&mut pos, &mut r);
            let mut units: Vec<(usize, usize)> =
                (0..per).flat_map(|k| (0..combos).map(move |c| (c, b * per + k + 1))).collect();
            shuffle(&mut units, &mut r);
            let mut chosen: Vec<usize> = pos[..units.len()].to_vec();
            chosen.sort_unstable();
            for (p, (c, rep)) in chosen.into_iter().zip(units) {
                assigned.push((p, c, rep, b % d.sowing.len()));
            }
        }
    } else {
        let mut pos: Vec<usize> = (0..sc.positions.len()).collect();
        shuffle(&mut pos, &mut r);
        let mut units: Vec<(usize, usize)> =
            (0..d.replicates).flat_map(|k| (0..combos).map(move |c| (c, k + 1))).collect();
        shuffle(&mut units, &mut r);
        let mut chosen: Vec<usize> = pos[..units.len()].to_vec();
        chosen.sort_unstable();
        for (p, (c, rep)) in chosen.into_iter().zip(units) {
            assigned.push((p, c, rep, (rep - 1) % d.sowing.len()));
        }
    }
    assigned.sort_unstable();
    let width = assigned.len().to_string().len().max(3);
    assigned
        .into_iter()
        .enumerate()
        .map(|(i, (p, c, rep, s))| {
            let sown = sc.sowing[s];
            Pot {
                id: format!("P{:0width$}", i + 1),
                position: p,
                levels: combo_levels(c),
                replicate: rep,
                sown,
                scored: sown + Duration::days(d.growth_days as i64),
            }
        })
        .collect()
}

fn statistic(ind: &scenario::IndicatorSpec) -> Statistic {
    match ind.statistic.as_str() {
        "mean" => Statistic::Mean,
        "min" => Statistic::Min,
        "max" => Statistic::Max,
        "hours_below" => Statistic::HoursBelow(ind.threshold.unwrap_or(0.0)),
        "hours_above" => Statistic::HoursAbove(ind.threshold.unwrap_or(0.0)),
        _ => Statistic::DailyIntegral,
    }
}

/// The true values of `ind`'s variable at the reference instants `idx` at
/// a point with components `c`, and which of them its period keeps.
/// The indicator's series at the instants `idx` along a pot's path:
/// `at(i)` is the pot whose own position the pot held at instant `i`; runs
/// of instants at one position are evaluated together, in time order.
fn path_series(
    sc: &Scenario,
    reference: &climate::Reference,
    pot_c: &[Components],
    ind: &scenario::IndicatorSpec,
    idx: &[usize],
    at: impl Fn(usize) -> usize,
) -> (Vec<f64>, Vec<bool>) {
    let (mut values, mut keep) = (Vec::with_capacity(idx.len()), Vec::with_capacity(idx.len()));
    let mut a = 0;
    while a < idx.len() {
        let h = at(idx[a]);
        let b = (a..idx.len()).find(|&b| at(idx[b]) != h).unwrap_or(idx.len());
        let (v, kp) = indicator_series(sc, reference, &pot_c[h], ind, &idx[a..b]);
        values.extend(v);
        keep.extend(kp);
        a = b;
    }
    (values, keep)
}

fn indicator_series(
    sc: &Scenario,
    reference: &climate::Reference,
    c: &Components,
    ind: &scenario::IndicatorSpec,
    idx: &[usize],
) -> (Vec<f64>, Vec<bool>) {
    let ea = sc.spec.climate.vapour_pressure;
    let temp = || idx.iter().map(|&i| climate::temperature(sc, reference, c, i));
    let values: Vec<f64> = match ind.variable.as_str() {
        "temperature" => temp().collect(),
        "humidity" => temp().map(|t| climate::relative_humidity(t, ea)).collect(),
        "vpd" => temp().map(|t| (climate::saturation_vapour_pressure(t) - ea).max(0.0)).collect(),
        _ => idx.iter().map(|&i| reference.ppfd[i] * c.light).collect(),
    };
    let keep = idx
        .iter()
        .map(|&i| match ind.period.as_deref().unwrap_or("all") {
            "night" => reference.night[i],
            "day" => !reference.night[i],
            _ => true,
        })
        .collect();
    (values, keep)
}

fn q(s: &str) -> String {
    serde_json::to_string(s).expect("a string serialises")
}

fn rfc(t: chrono::DateTime<chrono::Utc>) -> String {
    t.to_rfc3339_opts(SecondsFormat::Secs, true)
}

/// Generate every file of the study: `(relative path, bytes)` in a fixed order.
pub fn generate(sc: &Scenario, seed: u64) -> Result<Vec<(String, Vec<u8>)>> {
    let spec = &sc.spec;
    let cl = &spec.climate;
    let pots = design(sc, seed);
    let n_p = pots.len();
    let pot_xy: Vec<[f64; 2]> =
        pots.iter().map(|p| [sc.positions[p.position].x, sc.positions[p.position].y]).collect();
    let sensor_xy: Vec<[f64; 2]> = spec.logger.iter().map(|l| [l.x, l.y]).collect();

    // Climate field on pots then sensors.
    let mut all_xy = pot_xy.clone();
    all_xy.extend(&sensor_xy);
    let (field_vals, field_jitter, field_neighbours) = match sc.climate_field {
        Some((fam, range, sill)) => {
            let s = FieldSampler::new(&all_xy, fam, range, sill, "climate.field")?;
            (s.draw(&mut rng(seed, stream::CLIMATE_FIELD)), s.jitter(), s.neighbours())
        }
        None => (vec![0.0; all_xy.len()], 0.0, None),
    };
    let pot_c: Vec<Components> =
        (0..n_p).map(|i| climate::components(sc, pot_xy[i], field_vals[i])).collect();
    let sen_c: Vec<Components> =
        (0..sensor_xy.len()).map(|i| climate::components(sc, sensor_xy[i], field_vals[n_p + i])).collect();

    let max_lead = spec.export.iter().map(|e| e.lead_hours).fold(0.0, f64::max);
    let lead =
        Duration::minutes(((max_lead * 60.0 / sc.step_minutes as f64).round() as i64) * sc.step_minutes);
    let reference = climate::reference(sc, lead, &mut rng(seed, stream::WEATHER));
    let ea = cl.vapour_pressure;

    // Sensor readings: true field plus noise, drawn logger by logger, instant
    // by instant, temperature / humidity / light.
    let mut noise = rng(seed, stream::SENSOR_NOISE);
    let readings: Vec<Vec<[f64; 3]>> = sen_c
        .iter()
        .map(|c| {
            (0..reference.times.len())
                .map(|i| {
                    let t = climate::temperature(sc, &reference, c, i);
                    let (et, eh, el): (f64, f64, f64) = (
                        StandardNormal.sample(&mut noise),
                        StandardNormal.sample(&mut noise),
                        StandardNormal.sample(&mut noise),
                    );
                    let rh = climate::relative_humidity(t, ea);
                    let l = reference.ppfd[i] * c.light;
                    [
                        t + cl.noise.temperature * et,
                        (rh + cl.noise.humidity * eh).clamp(0.0, 100.0),
                        (l * (1.0 + cl.noise.light * el)).max(0.0),
                    ]
                })
                .collect()
        })
        .collect();
    let ex = exports::write_exports(sc, &reference, &readings)?;

    // Pots that move (`[rotation]`): at each reference instant, the pot
    // whose own position each pot holds.
    let rotation = rotation::plan(sc, spec.rotation.as_ref(), n_p, seed)?;
    let move_utc: Vec<chrono::DateTime<chrono::Utc>> = rotation
        .as_ref()
        .map(|r| r.times.iter().map(|t| scenario::local_to_utc(sc.tz, *t)).collect())
        .unwrap_or_default();
    let holder = |pi: usize, i: usize| -> usize {
        match &rotation {
            Some(r) => match move_utc.partition_point(|m| *m <= reference.times[i]).checked_sub(1) {
                Some(k) => r.placement[k][pi],
                None => pi,
            },
            None => pi,
        }
    };
    // Indicators at every pot over its own window, from the true field
    // along the pot's path.
    let inds = &spec.trait_.indicator;
    let mut ind_vals = vec![vec![0.0; inds.len()]; n_p];
    let mut windows: Vec<Vec<usize>> = Vec::with_capacity(n_p);
    for (pi, p) in pots.iter().enumerate() {
        let w0 = scenario::local_to_utc(sc.tz, p.sown.and_hms_opt(0, 0, 0).expect("midnight"));
        let w1 = scenario::local_to_utc(sc.tz, p.scored.and_hms_opt(0, 0, 0).expect("midnight"));
        let idx: Vec<usize> = (0..reference.times.len())
            .filter(|&i| reference.times[i] >= w0 && reference.times[i] < w1)
            .collect();
        let n_days = (p.scored - p.sown).num_days() as f64;
        for (k, ind) in inds.iter().enumerate() {
            let (values, keep) = path_series(sc, &reference, &pot_c, ind, &idx, |i| holder(pi, i));
            ind_vals[pi][k] = climate::evaluate(statistic(ind), &values, &keep, sc.step_minutes, n_days)
                .ok_or_else(|| {
                    sc.bad(
                        &format!("trait.indicator[{}].period", k + 1),
                        format!("pot {} has no instant in this period of its window", p.id),
                        None,
                    )
                })?;
        }
        windows.push(idx);
    }

    // Trait.
    let t = &spec.trait_;
    let (mut resid, resid_jitter, resid_neighbours) = match sc.residual_field {
        Some((fam, range, sill)) => {
            // a direction-dependent range: the field of the stretched
            // distance is the isotropic field at the transformed positions
            let xy = match &sc.residual_direction {
                None => pot_xy.clone(),
                Some(dir) => {
                    let (xs, ys): (Vec<f64>, Vec<f64>) = pot_xy.iter().map(|p| (p[0], p[1])).unzip();
                    let (u, v) = crate::spatial::anisotropy::transform(&xs, &ys, dir);
                    u.iter().zip(&v).map(|(a, b)| [*a, *b]).collect()
                }
            };
            let f = FieldSampler::new(&xy, fam, range, sill, "trait.residual_field")?;
            (f.draw(&mut rng(seed, stream::RESIDUAL_FIELD)), f.jitter(), f.neighbours())
        }
        None => (vec![0.0; n_p], 0.0, None),
    };
    if let Some(params) = &sc.residual_lattice {
        let lattice_field = lattice_field(&sc.path, &pot_xy, params, sc.residual_lattice_sill, seed)?;
        for (r, l) in resid.iter_mut().zip(&lattice_field) {
            *r += l;
        }
    }
    // A residual field fixed in space, accumulated by a moving pot as its
    // average over the positions it held in its window (`C = W R W'`).
    if rotation.is_some() {
        let at_positions = resid.clone();
        for (pi, idx) in windows.iter().enumerate() {
            if !idx.is_empty() {
                resid[pi] = idx.iter().map(|&i| at_positions[holder(pi, i)]).sum::<f64>() / idx.len() as f64;
            }
        }
    }
    let mut tn = rng(seed, stream::TRAIT_NOISE);
    let factors = &spec.design.factor;
    let level_name = |p: &Pot, f: usize| factors[f].levels[p.levels[f]].as_str();
    let mut design_part = vec![0.0; n_p];
    let mut expected = vec![0.0; n_p];
    let mut eps = vec![0.0; n_p];
    for (pi, p) in pots.iter().enumerate() {
        let mut y = t.intercept;
        for e in &t.effect {
            let f = factors.iter().position(|f| f.name == e.factor).expect("checked");
            if level_name(p, f) == e.level {
                y += e.value;
            }
        }
        for e in &t.interaction {
            let all = e.factors.iter().zip(&e.levels).all(|(fname, lv)| {
                let f = factors.iter().position(|f| &f.name == fname).expect("checked");
                level_name(p, f) == lv
            });
            if all {
                y += e.value;
            }
        }
        design_part[pi] = y;
        for (k, ind) in inds.iter().enumerate() {
            y += ind.effect * ind_vals[pi][k];
        }
        y += resid[pi];
        expected[pi] = y;
        let e: f64 = StandardNormal.sample(&mut tn);
        eps[pi] = t.noise_sd * e;
    }
    let tdec = t.decimals.unwrap_or(1);

    let mut files: Vec<(String, Vec<u8>)> = Vec::new();
    // pots.csv
    let benches = sc.positions.first().is_some_and(|p| p.grid.is_some());
    let mut s = String::from("pot");
    if benches {
        s.push_str(",bench,row,slot");
    }
    s.push_str(",x,y");
    for f in factors {
        write!(s, ",{}", f.name).unwrap();
    }
    writeln!(s, ",replicate,sown,scored,{}", t.name).unwrap();
    for (pi, p) in pots.iter().enumerate() {
        let pos = sc.positions[p.position];
        s.push_str(&p.id);
        if let Some((b, r, sl)) = pos.grid {
            write!(s, ",{b},{r},{sl}").unwrap();
        }
        write!(s, ",{},{}", exports::fixed(pos.x, 3), exports::fixed(pos.y, 3)).unwrap();
        for f in 0..factors.len() {
            write!(s, ",{}", level_name(p, f)).unwrap();
        }
        writeln!(
            s,
            ",{},{},{},{}",
            p.replicate,
            p.sown,
            p.scored,
            exports::fixed(expected[pi] + eps[pi], tdec)
        )
        .unwrap();
    }
    files.push(("pots.csv".into(), s.into_bytes()));
    // sensors.csv
    let with_z = spec.logger.iter().all(|l| l.z.is_some());
    let mut s = String::from(if with_z { "sensor,x,y,z\n" } else { "sensor,x,y\n" });
    for l in &spec.logger {
        write!(s, "{},{},{}", l.id, exports::fixed(l.x, 3), exports::fixed(l.y, 3)).unwrap();
        if let (true, Some(z)) = (with_z, l.z) {
            write!(s, ",{}", exports::fixed(z, 3)).unwrap();
        }
        s.push('\n');
    }
    files.push(("sensors.csv".into(), s.into_bytes()));
    // moves.csv: a row each time a pot changes place.
    if let Some(r) = &rotation {
        let mut s = String::from("pot,since,x,y\n");
        let mut before: Vec<usize> = (0..n_p).collect();
        for (k, t) in r.times.iter().enumerate() {
            for (pi, p) in pots.iter().enumerate() {
                let h = r.placement[k][pi];
                if h != before[pi] {
                    let xy = pot_xy[h];
                    writeln!(
                        s,
                        "{},{},{},{}",
                        p.id,
                        t.format("%Y-%m-%d %H:%M"),
                        exports::fixed(xy[0], 3),
                        exports::fixed(xy[1], 3)
                    )
                    .unwrap();
                }
            }
            before.clone_from(&r.placement[k]);
        }
        files.push(("moves.csv".into(), s.into_bytes()));
    }
    let mut toml = study_toml(sc, seed);
    let mut scorings = Vec::new();
    if let Some(sg) = &sc.scorings {
        let (f, section) = scorings::generate(sc, sg, &pots, &pot_c, &reference, &holder, seed)?;
        toml.push_str(&section);
        scorings = f;
    }
    files.push(("study.toml".into(), toml.into_bytes()));
    files.extend(ex.files.iter().cloned());
    files.extend(scorings);

    // truth/pots.csv
    let mut s = String::from("pot,x,y,gradient_c,field_c");
    for d in &cl.draught {
        write!(s, ",draught_{}_factor", d.opening).unwrap();
    }
    s.push_str(",light_factor");
    for o in &spec.opening {
        write!(s, ",{}{}", crate::spatial::geometry::DISTANCE_PREFIX, o.name).unwrap();
    }
    for ind in inds {
        write!(s, ",{}", ind.name).unwrap();
    }
    writeln!(s, ",design_effects,residual_field,expected_{0},noise,{0}", t.name).unwrap();
    for (pi, p) in pots.iter().enumerate() {
        let c = &pot_c[pi];
        write!(
            s,
            "{},{},{},{},{}",
            p.id,
            exports::fixed(pot_xy[pi][0], 3),
            exports::fixed(pot_xy[pi][1], 3),
            exports::fixed(c.gradient, 4),
            exports::fixed(c.field, 4)
        )
        .unwrap();
        for f in &c.draught {
            write!(s, ",{}", exports::fixed(*f, 6)).unwrap();
        }
        write!(s, ",{}", exports::fixed(c.light, 6)).unwrap();
        for d in &c.distance {
            write!(s, ",{}", exports::fixed(*d, 4)).unwrap();
        }
        for v in &ind_vals[pi] {
            write!(s, ",{}", exports::fixed(*v, 4)).unwrap();
        }
        writeln!(
            s,
            ",{},{},{},{},{}",
            exports::fixed(design_part[pi], 4),
            exports::fixed(resid[pi], 4),
            exports::fixed(expected[pi], 4),
            exports::fixed(eps[pi], 4),
            exports::fixed(expected[pi] + eps[pi], tdec)
        )
        .unwrap();
    }
    files.push(("truth/pots.csv".into(), s.into_bytes()));
    // truth/sensors.csv
    let mut s = String::from("sensor,x,y,gradient_c,field_c");
    for d in &cl.draught {
        write!(s, ",draught_{}_factor", d.opening).unwrap();
    }
    s.push_str(",light_factor\n");
    for (li, l) in spec.logger.iter().enumerate() {
        let c = &sen_c[li];
        write!(
            s,
            "{},{},{},{},{}",
            l.id,
            exports::fixed(l.x, 3),
            exports::fixed(l.y, 3),
            exports::fixed(c.gradient, 4),
            exports::fixed(c.field, 4)
        )
        .unwrap();
        for f in &c.draught {
            write!(s, ",{}", exports::fixed(*f, 6)).unwrap();
        }
        writeln!(s, ",{}", exports::fixed(c.light, 6)).unwrap();
    }
    files.push(("truth/sensors.csv".into(), s.into_bytes()));
    // truth/climate_reference.csv
    let mut s =
        String::from("time_utc,time_local,night,temperature_ref_c,ppfd_ref_umol_m2_s,draught_weight\n");
    for i in 0..reference.times.len() {
        let tt = reference.times[i];
        writeln!(
            s,
            "{},{},{},{},{},{}",
            rfc(tt),
            tt.with_timezone(&sc.tz).to_rfc3339_opts(SecondsFormat::Secs, false),
            u8::from(reference.night[i]),
            exports::fixed(reference.temperature[i], 4),
            exports::fixed(reference.ppfd[i], 3),
            exports::fixed(reference.draught_weight[i], 6)
        )
        .unwrap();
    }
    files.push(("truth/climate_reference.csv".into(), s.into_bytes()));
    // truth/sensor_readings.csv
    let mut s = String::from("sensor,time,temperature_c,rh_pct,ppfd_umol_m2_s\n");
    for tr in &ex.truth {
        write!(s, "{},{}", spec.logger[tr.logger].id, rfc(tr.time)).unwrap();
        for v in tr.values {
            s.push(',');
            if let Some(v) = v {
                s.push_str(&exports::fixed(v, 4));
            }
        }
        s.push('\n');
    }
    files.push(("truth/sensor_readings.csv".into(), s.into_bytes()));
    // truth/faults.csv
    let mut s = String::from("file,line,sensor,time_utc,variable,reason\n");
    for f in &ex.faults {
        writeln!(s, "{},{},{},{},{},{}", f.file, f.line, f.sensor, rfc(f.time), f.variable, f.reason)
            .unwrap();
    }
    files.push(("truth/faults.csv".into(), s.into_bytes()));
    let mut s = String::from("sensor,from_utc,to_utc,cause\n");
    for g in &ex.gaps {
        writeln!(s, "{},{},{},{}", g.sensor, rfc(g.from), rfc(g.to), g.cause).unwrap();
    }
    files.push(("truth/gaps.csv".into(), s.into_bytes()));
    // truth/effects.json
    let effects = serde_json::json!({
        "seed": seed,
        "trait": t.name,
        "intercept": t.intercept,
        "reference_levels": factors.iter().map(|f| serde_json::json!({"factor": f.name, "level": f.levels[0]})).collect::<Vec<_>>(),
        "effects": t.effect.iter().map(|e| serde_json::json!({"factor": e.factor, "level": e.level, "value": e.value})).collect::<Vec<_>>(),
        "interactions": t.interaction.iter().map(|e| serde_json::json!({"factors": e.factors, "levels": e.levels, "value": e.value})).collect::<Vec<_>>(),
        "drivers": inds.iter().map(|i| serde_json::json!({"name": i.name, "variable": i.variable, "statistic": i.statistic, "threshold": i.threshold, "period": i.period.as_deref().unwrap_or("all"), "effect_per_unit": i.effect})).collect::<Vec<_>>(),
        "residual_field": sc.residual_field.map(|(f, r, s)| serde_json::json!({"family": f.name(), "range_m": r, "practical_range_m": f.practical_range(r), "sill": s, "jitter": resid_jitter, "drawn_with_neighbours": resid_neighbours})),
        "noise_sd": t.noise_sd,
        "climate_field": sc.climate_field.map(|(f, r, s)| serde_json::json!({"family": f.name(), "range_m": r, "practical_range_m": f.practical_range(r), "sill_c2": s, "jitter": field_jitter, "drawn_with_neighbours": field_neighbours})),
        "night": "local clock time before climate.sunrise or from climate.sunset on",
        "vapour_pressure_kpa": ea,
        "pots": n_p,
        "sensors": spec.logger.len(),
        "injected_faults": ex.faults.len(),
    });
    let mut js = serde_json::to_string_pretty(&effects).expect("json");
    js.push('\n');
    files.push(("truth/effects.json".into(), js.into_bytes()));
    Ok(files)
}

/// A rows x columns residual field at the pots: `sqrt(sill) L u` with `L`
/// the Cholesky factor of the AR(1) x AR(1) correlation on the rows and
/// columns of the pots' grid ([`crate::spatial::rowcol`]) and `u` standard
/// normal draws of its own stream. Cost `n^3/3` once.
fn lattice_field(
    path: &Path,
    pot_xy: &[[f64; 2]],
    params: &crate::spatial::rowcol::RowColParams,
    sill: f64,
    seed: u64,
) -> Result<Vec<f64>> {
    let n = pot_xy.len();
    let (xs, ys): (Vec<f64>, Vec<f64>) = pot_xy.iter().map(|p| (p[0], p[1])).unzip();
    let bad = |message: String| SimError::Scenario {
        path: path.to_path_buf(),
        key: "trait.residual_lattice".into(),
        message,
        hint: Some(
            "the pots of a bench layout stand on a grid when bench_pitch is a whole number of row_pitch"
                .into(),
        ),
    };
    let lattice = crate::spatial::rowcol::Lattice::from_coords(&xs, &ys)
        .map_err(|e| bad(format!("the pots do not stand on a grid of rows and columns: {e}")))?;
    let l = crate::spatial::rowcol::cholesky(&lattice, params).map_err(|e| bad(e.to_string()))?;
    let mut r = rng(seed, stream::RESIDUAL_LATTICE);
    let u: Vec<f64> = (0..n).map(|_| StandardNormal.sample(&mut r)).collect();
    let sd = sill.sqrt();
    Ok((0..n).map(|i| sd * (0..=i).map(|k| l[(i, k)] * u[k]).sum::<f64>()).collect())
}

/// What [`run`] wrote.
#[derive(Debug, Clone)]
pub struct Summary {
    /// Published files.
    pub files: Vec<PathBuf>,
    /// Total bytes.
    pub bytes: usize,
    /// Pots.
    pub pots: usize,
    /// Loggers.
    pub loggers: usize,
    /// Injected faults listed in `truth/faults.csv`.
    pub faults: usize,
}

/// Load `scenario`, generate with `seed` (or the scenario's `[scenario].seed`,
/// or 1), and publish every file into `out` atomically.
pub fn run(scenario: &Path, out: &Path, seed: Option<u64>) -> Result<Summary> {
    let sc = Scenario::load(scenario)?;
    let seed = seed.or(sc.spec.scenario.seed).unwrap_or(1);
    let files = generate(&sc, seed)?;
    let mut w = StageWriter::new(out, "simulate")?;
    let mut bytes = 0;
    let mut faults = 0;
    for (name, b) in &files {
        bytes += b.len();
        if name == "truth/faults.csv" {
            faults = b.iter().filter(|&&c| c == b'\n').count().saturating_sub(1);
        }
        w.write(name, b)?;
    }
    let published = w.commit()?;
    Ok(Summary {
        files: published,
        bytes,
        pots: design(&sc, seed).len(),
        loggers: sc.spec.logger.len(),
        faults,
    })
}

#[cfg(test)]
mod tests;
