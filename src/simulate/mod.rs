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

/// The study file of the generated study.
fn study_toml(sc: &Scenario, seed: u64) -> String {
    let spec = &sc.spec;
    let mut s = String::new();
    writeln!(s, "# Written by `potclim simulate` (seed {seed}). The truth behind these files is in truth/.")
        .unwrap();
    writeln!(
        s,
        "\n[study]\ntitle = {}\ntimezone = {}\noutput = {}\nseed = {seed}",
        q(&spec.scenario.title),
        q(&spec.scenario.timezone),
        q(spec.analysis.as_ref().and_then(|a| a.output.as_deref()).unwrap_or("output"))
    )
    .unwrap();
    let c = spec.compartment;
    writeln!(
        s,
        "\n[compartment]\nlength = {}\nwidth = {}",
        exports::fixed(c.length, 3),
        exports::fixed(c.width, 3)
    )
    .unwrap();
    writeln!(s, "\n[pots]\nfile = \"pots.csv\"\nid = \"pot\"\nx = \"x\"\ny = \"y\"\nstart = \"sown\"\nend = \"scored\"").unwrap();
    if spec.rotation.is_some() {
        writeln!(s, "moves = \"moves.csv\"").unwrap();
    }
    let with_z = spec.logger.iter().all(|l| l.z.is_some());
    writeln!(
        s,
        "\n[sensors]\nfile = \"sensors.csv\"\nid = \"sensor\"\nx = \"x\"\ny = \"y\"{}",
        if with_z { "\nz = \"z\"" } else { "" }
    )
    .unwrap();
    for e in &spec.export {
        let ext = e.extension.as_deref().unwrap_or("csv");
        let glob = if e.layout == "one_file" {
            format!("logs/{}.{ext}", e.name)
        } else {
            format!("logs/{}/*.{ext}", e.name)
        };
        writeln!(s, "\n[[logs]]\nfiles = [{}]", q(&glob)).unwrap();
        if let Some(form) = e.form_layout() {
            // Three lines: the layout implies the rest and finds the
            // channels by their header words, except light in lux (its
            // conversion depends on the light source: named here).
            writeln!(s, "layout = {}", q(form.name())).unwrap();
            if e.clock.as_deref() == Some("utc") && form != crate::io::layouts::Layout::TitledExport {
                writeln!(s, "timezone = \"UTC\"").unwrap();
            }
            if let Some(c) = e.columns.light.as_ref().filter(|c| c.unit.starts_with("lux")) {
                let name = exports::channel_header(Some(form), c, "");
                writeln!(s, "[logs.columns]\nlight = {{ column = {}, unit = {} }}", q(&name), q(&c.unit))
                    .unwrap();
            }
            continue;
        }
        if let Some(d) = &e.delimiter {
            writeln!(s, "delimiter = {}", q(d)).unwrap();
        }
        if let Some(d) = &e.decimal {
            writeln!(s, "decimal = {}", q(d)).unwrap();
        }
        let time = match &e.columns.time {
            Some(crate::io::study::TimeColumns::Split(v)) => {
                format!("[{}]", v.iter().map(|c| q(c)).collect::<Vec<_>>().join(", "))
            }
            Some(crate::io::study::TimeColumns::One(c)) => q(c),
            None => unreachable!("checked: the table form names its time column"),
        };
        writeln!(s, "time = {time}\ntime_format = {}", q(&e.time_format)).unwrap();
        if e.clock.as_deref() == Some("utc") && e.time_format != "rfc3339" && e.time_format != "unix" {
            writeln!(s, "timezone = \"UTC\"").unwrap();
        }
        match &e.columns.sensor {
            Some(c) => writeln!(s, "sensor = {}", q(c)).unwrap(),
            None => writeln!(s, "sensor_from = \"file_stem\"").unwrap(),
        }
        if !e.preamble.is_empty() {
            writeln!(s, "skip_lines = {}", e.preamble.len()).unwrap();
        }
        writeln!(s, "[logs.columns]").unwrap();
        for (name, ch) in [
            ("temperature", &e.columns.temperature),
            ("humidity", &e.columns.humidity),
            ("light", &e.columns.light),
        ] {
            if let Some(ch) = ch {
                writeln!(s, "{name} = {{ column = {}, unit = {} }}", q(&ch.column), q(&ch.unit)).unwrap();
            }
        }
    }
    for o in &spec.opening {
        writeln!(
            s,
            "\n[[openings]]\nname = {}\nfrom = [{}, {}]\nto = [{}, {}]",
            q(&o.name),
            exports::fixed(o.from[0], 3),
            exports::fixed(o.from[1], 3),
            exports::fixed(o.to[0], 3),
            exports::fixed(o.to[1], 3)
        )
        .unwrap();
    }
    writeln!(
        s,
        "\n[climate]\nstart = {}\nend = {}\nstep = {}",
        q(&sc.start.format("%Y-%m-%d %H:%M").to_string()),
        q(&sc.end.format("%Y-%m-%d %H:%M").to_string()),
        q(&spec.scenario.step)
    )
    .unwrap();
    for ind in &spec.trait_.indicator {
        writeln!(
            s,
            "\n[[indicator]]\nname = {}\nvariable = {}\nstatistic = {}",
            q(&ind.name),
            q(&ind.variable),
            q(&ind.statistic)
        )
        .unwrap();
        if let Some(th) = ind.threshold {
            writeln!(s, "threshold = {}", exports::fixed(th, 3)).unwrap();
        }
        writeln!(s, "period = {}", q(ind.period.as_deref().unwrap_or("all"))).unwrap();
    }
    let factors: Vec<String> = spec.design.factor.iter().map(|f| q(&f.name)).collect();
    let mut pairs = Vec::new();
    for i in 0..factors.len() {
        for j in (i + 1)..factors.len() {
            pairs.push(format!("[{}, {}]", factors[i], factors[j]));
        }
    }
    let drivers: Vec<String> = spec.trait_.indicator.iter().map(|i| q(&i.name)).collect();
    let default_corr =
        vec!["exponential".to_string(), "spherical".into(), "gaussian".into(), "matern_1.5".into()];
    let corr: Vec<String> = spec
        .analysis
        .as_ref()
        .and_then(|a| a.correlations.clone())
        .unwrap_or(default_corr)
        .iter()
        .map(|c| q(c))
        .collect();
    let nugget = spec.analysis.as_ref().and_then(|a| a.nugget).unwrap_or(true);
    // bench structures only when asked, so that other studies keep their bytes
    let mut structures = String::new();
    if spec.analysis.as_ref().and_then(|a| a.rows_columns) == Some(true) {
        structures.push_str("\nrows_columns = true");
    }
    if let Some(d) = spec.analysis.as_ref().and_then(|a| a.directional.as_ref()) {
        let names: Vec<String> = d.iter().map(|c| q(c)).collect();
        let _ = write!(structures, "\ndirectional = [{}]", names.join(", "));
    }
    writeln!(
        s,
        "\n[model]\ntrait = {}\nfactors = [{}]\ninteractions = [{}]\ndrivers = [{}]\ncorrelations = [{}]\nnugget = {nugget}{structures}",
        q(&spec.trait_.name),
        factors.join(", "),
        pairs.join(", "),
        drivers.join(", "),
        corr.join(", ")
    )
    .unwrap();
    if let Some(u) = spec.trait_.unit.as_deref().filter(|u| !u.trim().is_empty()) {
        writeln!(s, "trait_unit = {}", q(u)).unwrap();
    }
    s
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
mod tests {
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
            format!("{e}").contains("trait.residual_lattice")
                && format!("{e}").contains("not equally spaced"),
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
                    assert!(
                        (g - w).abs() <= 5.001e-5,
                        "{ch} in {unit} at {t}: read back {g}, truth table {w}"
                    );
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
}
