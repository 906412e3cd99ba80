//! Checking a parsed scenario: every section in reading order, each by its own
//! function, and the names later sections refer to resolved (the export,
//! logger and fault sections in [`exports`]).

use super::{
    AnalysisSpec, ClimateSpec, CompartmentSpec, DesignSpec, FieldSpec, Header, LayoutSpec, OpeningSpec,
    Position, Scenario, ScenarioSpec, TraitSpec, bad, date,
};
use crate::io::error::closest;
use crate::io::study::parse_timezone;
use crate::simulate::error::{Result, SimError};
use crate::spatial::correlation::Family;
use chrono::{NaiveDate, NaiveDateTime, NaiveTime, TimeZone};
use std::path::Path;

#[path = "scenario_check_exports.rs"]
mod exports;
use exports::{check_exports, check_faults, check_loggers};

fn did_you_mean<'a>(name: &str, candidates: impl IntoIterator<Item = &'a str> + Clone) -> Option<String> {
    let list: Vec<&str> = candidates.clone().into_iter().collect();
    match closest(name, candidates) {
        Some(c) => Some(format!("did you mean `{c}`? (expected one of: {})", list.join(", "))),
        None => Some(format!("expected one of: {}", list.join(", "))),
    }
}

fn one_of(path: &Path, key: &str, v: &str, allowed: &[&str]) -> Result<()> {
    if allowed.contains(&v) {
        Ok(())
    } else {
        Err(bad(path, key, format!("unknown value `{v}`"), did_you_mean(v, allowed.iter().copied())))
    }
}

fn positive(path: &Path, key: &str, v: Option<f64>) -> Result<f64> {
    match v {
        Some(v) if v.is_finite() && v > 0.0 => Ok(v),
        Some(v) => Err(bad(path, key, format!("must be a positive number of metres, got {v}"), None)),
        None => Err(bad(path, key, "is missing", None)),
    }
}

fn count(path: &Path, key: &str, v: Option<usize>) -> Result<usize> {
    match v {
        Some(v) if v > 0 => Ok(v),
        Some(_) => Err(bad(path, key, "must be at least 1", None)),
        None => Err(bad(path, key, "is missing", None)),
    }
}

fn clock(path: &Path, key: &str, v: &str) -> Result<f64> {
    let t = NaiveTime::parse_from_str(v.trim(), "%H:%M").map_err(|_| {
        bad(path, key, format!("`{v}` is not a clock time"), Some("write e.g. \"07:30\"".into()))
    })?;
    use chrono::Timelike;
    Ok(t.hour() as f64 + t.minute() as f64 / 60.0)
}

fn parse_step(path: &Path, v: &str) -> Result<i64> {
    let v = v.trim();
    let minutes = if let Some(m) = v.strip_suffix('m') {
        m.parse::<i64>().ok()
    } else if let Some(h) = v.strip_suffix('h') {
        h.parse::<i64>().ok().map(|h| h * 60)
    } else {
        None
    };
    match minutes {
        Some(m) if m > 0 && 1440 % m == 0 => Ok(m),
        _ => Err(bad(
            path,
            "scenario.step",
            format!("`{v}` is not a logging interval that divides a day"),
            Some("use e.g. \"5m\", \"10m\", \"15m\", \"1h\"".into()),
        )),
    }
}

fn parse_field(path: &Path, key: &str, f: &Option<FieldSpec>) -> Result<Option<(Family, f64, f64)>> {
    let Some(f) = f else { return Ok(None) };
    let family = Family::parse(&f.family).map_err(|m| bad(path, &format!("{key}.family"), m, None))?;
    let range = positive(path, &format!("{key}.range"), Some(f.range))?;
    if !(f.sill.is_finite() && f.sill >= 0.0) {
        return Err(bad(
            path,
            &format!("{key}.sill"),
            format!("must be a variance >= 0, got {}", f.sill),
            None,
        ));
    }
    Ok(Some((family, range, f.sill)))
}

fn inside(c: &CompartmentSpec, x: f64, y: f64) -> bool {
    x.is_finite() && y.is_finite() && (0.0..=c.length).contains(&x) && (0.0..=c.width).contains(&y)
}

/// The checked `[scenario]` section: zone, period and logging step.
struct Period {
    tz: chrono_tz::Tz,
    start_d: NaiveDate,
    end_d: NaiveDate,
    start: NaiveDateTime,
    end: NaiveDateTime,
    step_minutes: i64,
}

/// Check every section in reading order, each by its own function, and
/// resolve the names that later sections refer to.
pub(super) fn check(path: &Path, spec: ScenarioSpec) -> Result<Scenario> {
    let p = path;
    let period = check_period(p, &spec.scenario)?;
    let c = spec.compartment;
    check_compartment(p, &c)?;
    let positions = check_layout(p, &spec.layout, &c)?;
    let (names, sowing) = check_design(p, &spec.design, &spec.layout, &positions, &period)?;
    let onames = check_openings(p, &spec.opening)?;
    let (sunrise_h, sunset_h, climate_field) = check_climate(p, &spec.climate, &onames)?;
    let enames = check_exports(p, &spec.export)?;
    let (lids, logger_export) = check_loggers(p, &spec, &c, &enames)?;
    check_faults(p, &spec, &lids, &logger_export)?;
    let residual_field = check_trait(p, &spec.trait_, &spec.design, &names)?;
    let (residual_direction, residual_lattice, residual_lattice_sill) =
        check_residual_structures(p, &spec.trait_, residual_field.is_some())?;
    check_analysis(p, spec.analysis.as_ref())?;
    let spells =
        crate::simulate::scorings::check_spells(p, &spec.climate.spell, period.start_d, period.end_d)?;
    let scorings = crate::simulate::scorings::check_scorings(
        p,
        spec.trait_.scorings.as_ref(),
        &spec.trait_.indicator,
        &sowing,
        spec.design.growth_days,
    )?;
    let Period { tz, start, end, step_minutes, .. } = period;
    Ok(Scenario {
        path: p.to_path_buf(),
        tz,
        start,
        end,
        step_minutes,
        sunrise_h,
        sunset_h,
        positions,
        sowing,
        climate_field,
        residual_field,
        residual_direction,
        residual_lattice,
        residual_lattice_sill,
        logger_export,
        spells,
        scorings,
        spec,
    })
}

/// `[trait.residual_direction]` (needs `[trait.residual_field]`; angle any
/// finite number of degrees, ratio in `(0, 1]`) and `[trait.residual_lattice]`
/// (correlations in `(-1, 1)`, variance >= 0).
#[allow(clippy::type_complexity)]
fn check_residual_structures(
    p: &Path,
    t: &TraitSpec,
    has_field: bool,
) -> Result<(Option<crate::spatial::anisotropy::Direction>, Option<crate::spatial::rowcol::RowColParams>, f64)>
{
    let direction = match &t.residual_direction {
        None => None,
        Some(_) if !has_field => {
            return Err(bad(
                p,
                "trait.residual_direction",
                "needs a [trait.residual_field] whose range it makes direction-dependent",
                Some("add [trait.residual_field] with family, range and sill".into()),
            ));
        }
        Some(d) => {
            if !d.angle.is_finite() {
                return Err(bad(
                    p,
                    "trait.residual_direction.angle",
                    format!("must be degrees, got {}", d.angle),
                    None,
                ));
            }
            if !(d.ratio > 0.0 && d.ratio <= 1.0) {
                return Err(bad(
                    p,
                    "trait.residual_direction.ratio",
                    format!("must lie in (0, 1], got {}", d.ratio),
                    Some("the range across the direction divided by the range along it".into()),
                ));
            }
            Some(crate::spatial::anisotropy::Direction { angle: d.angle.to_radians(), ratio: d.ratio })
        }
    };
    let (lattice, sill) = match &t.residual_lattice {
        None => (None, 0.0),
        Some(l) => {
            for (k, v) in
                [("row_correlation", l.row_correlation), ("column_correlation", l.column_correlation)]
            {
                if !(v.is_finite() && v.abs() < 1.0) {
                    return Err(bad(
                        p,
                        &format!("trait.residual_lattice.{k}"),
                        format!("must lie in (-1, 1), got {v}"),
                        None,
                    ));
                }
            }
            if !(l.sill.is_finite() && l.sill >= 0.0) {
                return Err(bad(
                    p,
                    "trait.residual_lattice.sill",
                    format!("must be a variance >= 0, got {}", l.sill),
                    None,
                ));
            }
            (
                Some(crate::spatial::rowcol::RowColParams {
                    phi_row: l.row_correlation,
                    phi_col: l.column_correlation,
                    eta: 0.0,
                }),
                l.sill,
            )
        }
    };
    Ok((direction, lattice, sill))
}

/// `[scenario]`: time zone, study period (local midnights that exist once)
/// and logging step.
fn check_period(p: &Path, sc: &Header) -> Result<Period> {
    let tz = parse_timezone(p, "scenario.timezone", &sc.timezone)?;
    let start_d = date(p, "scenario.start", &sc.start)?;
    let end_d = date(p, "scenario.end", &sc.end)?;
    if end_d <= start_d {
        return Err(bad(p, "scenario.end", "must be after scenario.start", None));
    }
    if (end_d - start_d).num_days() > 400 {
        return Err(bad(p, "scenario.end", "the study period is longer than 400 days", None));
    }
    let start = start_d.and_hms_opt(0, 0, 0).expect("midnight");
    let end = end_d.and_hms_opt(0, 0, 0).expect("midnight");
    for (k, t) in [("scenario.start", start), ("scenario.end", end)] {
        if !matches!(tz.from_local_datetime(&t), chrono::LocalResult::Single(_)) {
            return Err(bad(
                p,
                k,
                "local midnight of this day is skipped or repeated in this time zone",
                None,
            ));
        }
    }
    let step_minutes = parse_step(p, &sc.step)?;
    Ok(Period { tz, start_d, end_d, start, end, step_minutes })
}

/// `[compartment]`: positive length and width.
fn check_compartment(p: &Path, c: &CompartmentSpec) -> Result<()> {
    if !(c.length.is_finite() && c.length > 0.0 && c.width.is_finite() && c.width > 0.0) {
        return Err(bad(
            p,
            "compartment",
            format!("length and width must be positive metres, got {} x {}", c.length, c.width),
            None,
        ));
    }
    Ok(())
}

/// `[layout]`: the positions a pot can take, all inside the compartment.
fn check_layout(p: &Path, l: &LayoutSpec, c: &CompartmentSpec) -> Result<Vec<Position>> {
    let mut positions = Vec::new();
    match l.kind.as_str() {
        "benches" => {
            let nb = count(p, "layout.benches", l.benches)?;
            let nr = count(p, "layout.rows_per_bench", l.rows_per_bench)?;
            let ns = count(p, "layout.slots_per_row", l.slots_per_row)?;
            let bp = positive(p, "layout.bench_pitch", l.bench_pitch)?;
            let rp = if nr > 1 {
                positive(p, "layout.row_pitch", l.row_pitch)?
            } else {
                l.row_pitch.unwrap_or(0.0)
            };
            let sp = positive(p, "layout.slot_pitch", l.slot_pitch)?;
            if nr > 1 && (nr - 1) as f64 * rp >= bp {
                return Err(bad(
                    p,
                    "layout.row_pitch",
                    "the rows of one bench overlap the next bench",
                    Some("make rows_per_bench - 1 times row_pitch smaller than bench_pitch".into()),
                ));
            }
            let [ox, oy] = l.origin.unwrap_or([0.0, 0.0]);
            for b in 1..=nb {
                for r in 1..=nr {
                    for s in 1..=ns {
                        positions.push(Position {
                            x: ox + (s - 1) as f64 * sp,
                            y: oy + (b - 1) as f64 * bp + (r - 1) as f64 * rp,
                            grid: Some((b, r, s)),
                        });
                    }
                }
            }
        }
        "grid" => {
            let nx = count(p, "layout.nx", l.nx)?;
            let ny = count(p, "layout.ny", l.ny)?;
            let dx = positive(p, "layout.dx", l.dx)?;
            let dy = positive(p, "layout.dy", l.dy)?;
            let [ox, oy] = l.origin.unwrap_or([0.0, 0.0]);
            for j in 0..ny {
                for i in 0..nx {
                    positions.push(Position { x: ox + i as f64 * dx, y: oy + j as f64 * dy, grid: None });
                }
            }
        }
        "list" => {
            let Some(list) = &l.positions else {
                return Err(bad(
                    p,
                    "layout.positions",
                    "is missing",
                    Some("list [[x, y], ...] in metres".into()),
                ));
            };
            positions = list.iter().map(|&[x, y]| Position { x, y, grid: None }).collect();
        }
        other => {
            return Err(bad(
                p,
                "layout.kind",
                format!("unknown value `{other}`"),
                did_you_mean(other, ["benches", "grid", "list"]),
            ));
        }
    }
    for (i, q) in positions.iter().enumerate() {
        if !inside(c, q.x, q.y) {
            return Err(bad(
                p,
                "layout",
                format!(
                    "position {} at ({}, {}) lies outside the compartment {} x {} m",
                    i + 1,
                    q.x,
                    q.y,
                    c.length,
                    c.width
                ),
                Some("shrink the spacing or the counts, or move the origin".into()),
            ));
        }
    }
    Ok(positions)
}

/// `[design]`: factors and levels, replicates that fit the layout (and its
/// benches for blocks), sowing dates whose growth window lies in the period.
/// Returns the factor names and the sowing dates.
fn check_design(
    p: &Path,
    d: &DesignSpec,
    l: &LayoutSpec,
    positions: &[Position],
    period: &Period,
) -> Result<(std::collections::BTreeSet<String>, Vec<NaiveDate>)> {
    let (start_d, end_d) = (period.start_d, period.end_d);
    if d.factor.is_empty() {
        return Err(bad(p, "design.factor", "needs at least one factor", None));
    }
    let mut names = std::collections::BTreeSet::new();
    for (i, f) in d.factor.iter().enumerate() {
        let key = format!("design.factor[{}]", i + 1);
        if f.name.is_empty() || !f.name.chars().all(|c| c.is_ascii_alphanumeric() || c == '_') {
            return Err(bad(
                p,
                &format!("{key}.name"),
                format!("`{}` must be letters, digits and `_`", f.name),
                None,
            ));
        }
        if !names.insert(f.name.clone()) {
            return Err(bad(p, &format!("{key}.name"), format!("`{}` is used twice", f.name), None));
        }
        if f.levels.len() < 2 {
            return Err(bad(p, &format!("{key}.levels"), "a factor needs at least two levels", None));
        }
        let mut seen = std::collections::BTreeSet::new();
        for lv in &f.levels {
            if lv.is_empty() || lv.contains([',', '"', '\n']) || !seen.insert(lv) {
                return Err(bad(
                    p,
                    &format!("{key}.levels"),
                    format!("level `{lv}` is empty, repeated or contains a comma or quote"),
                    None,
                ));
            }
        }
    }
    if d.replicates == 0 {
        return Err(bad(p, "design.replicates", "must be at least 1", None));
    }
    let combos: usize = d.factor.iter().map(|f| f.levels.len()).product();
    let n_pots = combos * d.replicates;
    if n_pots > positions.len() {
        return Err(bad(
            p,
            "design.replicates",
            format!(
                "{combos} treatment combinations x {} replicates = {n_pots} pots, but the layout has only {} positions",
                d.replicates,
                positions.len()
            ),
            Some("add benches, slots or positions, or use fewer replicates".into()),
        ));
    }
    one_of(p, "design.randomisation", &d.randomisation, &["complete", "blocks"])?;
    if d.randomisation == "blocks" {
        let (Some(nb), "benches") = (l.benches, l.kind.as_str()) else {
            return Err(bad(
                p,
                "design.randomisation",
                "blocks are benches: it needs layout.kind = \"benches\"",
                None,
            ));
        };
        if !d.replicates.is_multiple_of(nb) {
            return Err(bad(
                p,
                "design.replicates",
                format!("{} replicates cannot be split into {nb} complete blocks (benches)", d.replicates),
                Some(format!("use a multiple of {nb}")),
            ));
        }
        let per_bench = positions.len() / nb;
        if n_pots / nb > per_bench {
            return Err(bad(
                p,
                "design.replicates",
                format!("each bench would hold {} pots but has {per_bench} positions", n_pots / nb),
                None,
            ));
        }
    }
    if d.sowing.is_empty() {
        return Err(bad(p, "design.sowing", "needs at least one sowing date", None));
    }
    let mut sowing = Vec::new();
    for (i, s) in d.sowing.iter().enumerate() {
        let sd = date(p, &format!("design.sowing[{}]", i + 1), s)?;
        let scored = sd + chrono::Duration::days(d.growth_days as i64);
        if sd < start_d || scored > end_d {
            return Err(bad(
                p,
                &format!("design.sowing[{}]", i + 1),
                format!(
                    "the growth window {sd} .. {scored} is not inside the study period {start_d} .. {end_d}"
                ),
                Some(
                    "move the sowing date or change scenario.start / scenario.end / design.growth_days"
                        .into(),
                ),
            ));
        }
        sowing.push(sd);
    }
    if d.growth_days == 0 {
        return Err(bad(p, "design.growth_days", "must be at least 1", None));
    }
    Ok((names, sowing))
}

/// `[[opening]]`: unique names and finite coordinates. Returns the names.
fn check_openings<'a>(p: &Path, opening: &'a [OpeningSpec]) -> Result<std::collections::BTreeSet<&'a str>> {
    let mut onames = std::collections::BTreeSet::new();
    for (i, o) in opening.iter().enumerate() {
        let key = format!("opening[{}]", i + 1);
        if o.name.is_empty() || !o.name.chars().all(|c| c.is_ascii_alphanumeric() || c == '_') {
            return Err(bad(
                p,
                &format!("{key}.name"),
                format!("`{}` must be letters, digits and `_`", o.name),
                None,
            ));
        }
        if !onames.insert(o.name.as_str()) {
            return Err(bad(p, &format!("{key}.name"), format!("`{}` is used twice", o.name), None));
        }
        if !o.from.iter().chain(&o.to).all(|v| v.is_finite()) {
            return Err(bad(p, &key, "coordinates must be finite numbers", None));
        }
    }
    Ok(onames)
}

/// `[climate]`: the day, plausible temperatures, light and vapour pressure,
/// draughts at known openings, shades, the field and the noise. Returns
/// sunrise and sunset (hours) and the climate field.
#[allow(clippy::type_complexity)]
fn check_climate(
    p: &Path,
    cl: &ClimateSpec,
    onames: &std::collections::BTreeSet<&str>,
) -> Result<(f64, f64, Option<(Family, f64, f64)>)> {
    let sunrise_h = clock(p, "climate.sunrise", &cl.sunrise)?;
    let sunset_h = clock(p, "climate.sunset", &cl.sunset)?;
    if sunset_h <= sunrise_h + 1.0 {
        return Err(bad(p, "climate.sunset", "must be more than an hour after climate.sunrise", None));
    }
    for (k, v) in
        [("climate.night_temperature", cl.night_temperature), ("climate.day_temperature", cl.day_temperature)]
    {
        if !(v.is_finite() && (-20.0..=45.0).contains(&v)) {
            return Err(bad(p, k, format!("{v} °C is not a plausible greenhouse temperature"), None));
        }
    }
    if !(cl.peak_ppfd.is_finite() && cl.peak_ppfd >= 0.0 && cl.peak_ppfd <= 2500.0) {
        return Err(bad(
            p,
            "climate.peak_ppfd",
            format!("{} is outside 0 .. 2500 µmol m-2 s-1", cl.peak_ppfd),
            None,
        ));
    }
    if !(cl.cloud_min > 0.0 && cl.cloud_min <= 1.0) {
        return Err(bad(p, "climate.cloud_min", "must be in (0, 1]", None));
    }
    if !(cl.weather_sd.is_finite() && cl.weather_sd >= 0.0) {
        return Err(bad(p, "climate.weather_sd", "must be >= 0", None));
    }
    if !(0.0..1.0).contains(&cl.weather_persistence) {
        return Err(bad(p, "climate.weather_persistence", "must be in [0, 1)", None));
    }
    if !(cl.vapour_pressure.is_finite() && cl.vapour_pressure > 0.0 && cl.vapour_pressure < 7.0) {
        return Err(bad(
            p,
            "climate.vapour_pressure",
            format!("{} kPa is not a plausible vapour pressure", cl.vapour_pressure),
            Some("greenhouse air holds about 0.8 .. 2.5 kPa".into()),
        ));
    }
    for (i, dr) in cl.draught.iter().enumerate() {
        let key = format!("climate.draught[{}]", i + 1);
        if !onames.contains(dr.opening.as_str()) {
            return Err(bad(
                p,
                &format!("{key}.opening"),
                format!("no [[opening]] is called `{}`", dr.opening),
                did_you_mean(&dr.opening, onames.iter().copied()),
            ));
        }
        positive(p, &format!("{key}.decay"), Some(dr.decay))?;
        if !(dr.night_drop.is_finite() && dr.day_drop.is_finite()) {
            return Err(bad(p, &key, "night_drop and day_drop must be numbers", None));
        }
    }
    for (i, s) in cl.shade.iter().enumerate() {
        let key = format!("climate.shade[{}]", i + 1);
        one_of(p, &format!("{key}.wall"), &s.wall, &["south", "north", "west", "east"])?;
        if !(0.0..1.0).contains(&s.reduction) {
            return Err(bad(p, &format!("{key}.reduction"), "must be in [0, 1)", None));
        }
        positive(p, &format!("{key}.depth"), Some(s.depth))?;
    }
    let climate_field = parse_field(p, "climate.field", &cl.field)?;
    for (k, v) in [
        ("climate.noise.temperature", cl.noise.temperature),
        ("climate.noise.humidity", cl.noise.humidity),
        ("climate.noise.light", cl.noise.light),
    ] {
        if !(v.is_finite() && v >= 0.0) {
            return Err(bad(p, k, "must be a standard deviation >= 0", None));
        }
    }
    Ok((sunrise_h, sunset_h, climate_field))
}

/// `[trait]`: its name, noise, effects and interactions of known levels,
/// climate drivers and the residual field. Returns the residual field.
fn check_trait(
    p: &Path,
    t: &TraitSpec,
    d: &DesignSpec,
    names: &std::collections::BTreeSet<String>,
) -> Result<Option<(Family, f64, f64)>> {
    if t.name.is_empty()
        || !t.name.chars().all(|c| c.is_ascii_alphanumeric() || c == '_')
        || names.contains(&t.name)
    {
        return Err(bad(
            p,
            "trait.name",
            format!("`{}` must be letters, digits and `_`, and not a factor name", t.name),
            None,
        ));
    }
    if !(t.noise_sd.is_finite() && t.noise_sd >= 0.0) {
        return Err(bad(p, "trait.noise_sd", "must be a standard deviation >= 0", None));
    }
    let level_of = |key: &str, factor: &str, level: &str| -> Result<()> {
        let Some(f) = d.factor.iter().find(|f| f.name == factor) else {
            return Err(bad(
                p,
                key,
                format!("unknown factor `{factor}`"),
                did_you_mean(factor, d.factor.iter().map(|f| f.name.as_str())),
            ));
        };
        if !f.levels.iter().any(|l| l == level) {
            return Err(bad(
                p,
                key,
                format!("factor `{factor}` has no level `{level}`"),
                did_you_mean(level, f.levels.iter().map(String::as_str)),
            ));
        }
        Ok(())
    };
    for (i, e) in t.effect.iter().enumerate() {
        let key = format!("trait.effect[{}]", i + 1);
        level_of(&format!("{key}.level"), &e.factor, &e.level).map_err(|err| match &err {
            SimError::Scenario { message, .. } if message.starts_with("unknown factor") => bad(
                p,
                &format!("{key}.factor"),
                message.clone(),
                did_you_mean(&e.factor, d.factor.iter().map(|f| f.name.as_str())),
            ),
            _ => err,
        })?;
        if d.factor.iter().any(|f| f.name == e.factor && f.levels[0] == e.level) {
            return Err(bad(
                p,
                &format!("{key}.level"),
                format!(
                    "`{}` is the reference level of `{}` (its effect is 0 by definition)",
                    e.level, e.factor
                ),
                Some("give effects of the other levels against the first".into()),
            ));
        }
    }
    for (i, e) in t.interaction.iter().enumerate() {
        let key = format!("trait.interaction[{}]", i + 1);
        if e.factors.len() < 2 || e.factors.len() != e.levels.len() {
            return Err(bad(p, &key, "needs two or more factors and one level per factor", None));
        }
        for (f, lv) in e.factors.iter().zip(&e.levels) {
            level_of(&format!("{key}.levels"), f, lv)?;
        }
    }
    let mut inames = std::collections::BTreeSet::new();
    for (i, ind) in t.indicator.iter().enumerate() {
        let key = |k: &str| format!("trait.indicator[{}].{k}", i + 1);
        if ind.name.is_empty()
            || !ind.name.chars().all(|c| c.is_ascii_alphanumeric() || c == '_')
            || !inames.insert(ind.name.clone())
        {
            return Err(bad(
                p,
                &key("name"),
                format!("`{}` must be letters, digits and `_`, and unique", ind.name),
                None,
            ));
        }
        one_of(p, &key("variable"), &ind.variable, &["temperature", "humidity", "light", "vpd"])?;
        one_of(
            p,
            &key("statistic"),
            &ind.statistic,
            &["mean", "min", "max", "hours_below", "hours_above", "daily_integral"],
        )?;
        one_of(p, &key("period"), ind.period.as_deref().unwrap_or("all"), &["all", "day", "night"])?;
        if matches!(ind.statistic.as_str(), "hours_below" | "hours_above")
            && ind.threshold.is_none_or(|v| !v.is_finite())
        {
            return Err(bad(p, &key("threshold"), format!("{} needs a threshold", ind.statistic), None));
        }
        if ind.statistic == "daily_integral"
            && (ind.variable != "light" || ind.period.as_deref().unwrap_or("all") != "all")
        {
            return Err(bad(
                p,
                &key("statistic"),
                "daily_integral is the daily light integral: variable = \"light\", period = \"all\"",
                None,
            ));
        }
        if !ind.effect.is_finite() {
            return Err(bad(p, &key("effect"), "must be a number", None));
        }
    }
    let residual_field = parse_field(p, "trait.residual_field", &t.residual_field)?;
    Ok(residual_field)
}

/// `[analysis]`: correlation families that the mapping stage knows.
fn check_analysis(p: &Path, analysis: Option<&AnalysisSpec>) -> Result<()> {
    if let Some(a) = analysis {
        for (i, f) in a.correlations.iter().flatten().enumerate() {
            Family::parse(f).map_err(|m| bad(p, &format!("analysis.correlations[{}]", i + 1), m, None))?;
        }
    }
    Ok(())
}
