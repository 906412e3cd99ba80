//! Repeated scorings of a synthetic study (`[trait.scorings]` of the
//! scenario) and the run of cold nights that gives them something to find
//! (`[[climate.spell]]`).
//!
//! Every pot is scored on the same local dates. Between scorings it grows
//! by the daily-rate model of [`super::growth`]: its rate on local day `d`
//! is `base_rate + effect · driver[p][d] + process noise`, where
//! `driver[p][d]` is one `[[trait.indicator]]` evaluated over the instants
//! of that local day at the pot, from the true climate field (the climate
//! stage's day convention: an instant belongs to the local calendar day it
//! falls in). So a cold night slows growth on its own days only.
//!
//! The truth per interval (`truth/scores_intervals.csv`) is the slope of
//! interval growth on the interval's value of the driver as the analysis
//! computes it: `effect` for a summed indicator (hours below or above a
//! threshold: growth per hour), `effect · days` for one averaged over the
//! interval's days (mean, daily light integral), and none where the driver's
//! interval value is the same at every pot (nothing can show).
//!
//! A spell lowers the reference temperature at night by `night_drop` °C
//! (weighted by the heating schedule's night weight `n(t)`, as a draught is)
//! at every instant whose local date lies in `[from, from + days)`; it draws
//! nothing at random, so adding a spell changes no other draw.
//!
//! Randomness: the growth model draws from its own seed, taken from the
//! scenario's stream 7, so scorings change nothing else in the study.

use super::climate::{self, Components, Reference};
use super::growth::{GrowthModel, simulate};
use super::scenario::{IndicatorSpec, Scenario, bad_key, parse_date};
use super::{Pot, Result, exports};
use chrono::{Duration, NaiveDate};
use rand::RngExt;
use serde::Deserialize;
use std::fmt::Write as _;
use std::path::Path;

/// Stream of the growth model's seed.
const STREAM: u64 = 7;

/// `[[climate.spell]]` as written.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SpellSpec {
    /// First local date of the spell.
    pub from: String,
    /// Number of local dates.
    pub days: u32,
    /// Cooling at night, °C (positive: colder).
    pub night_drop: f64,
}

/// A checked spell: local dates `[from, to)`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Spell {
    /// First date.
    pub from: NaiveDate,
    /// Date after the last.
    pub to: NaiveDate,
    /// Cooling at night, °C.
    pub night_drop: f64,
}

/// `[trait.scorings]` as written.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ScoringsSpec {
    /// Trait column of `scores.csv` (letters, digits, `_`).
    pub name: String,
    /// Local dates of the scorings, increasing; every pot is scored on each.
    pub dates: Vec<String>,
    /// Size at the first scoring, trait units.
    pub initial: f64,
    /// Growth per day without the driver, trait units per day.
    pub base_rate: f64,
    /// The `[[trait.indicator]]` whose daily value changes the daily rate.
    pub driver: String,
    /// Change of the daily rate per unit of the driver's daily value.
    pub effect: f64,
    /// SD of each pot's day-to-day rate variation. Default 0.
    #[serde(default)]
    pub process_sd: f64,
    /// SD of the measurement error of a scoring. Default 0.
    #[serde(default)]
    pub noise_sd: f64,
    /// Decimals printed. Default 2.
    #[serde(default)]
    pub decimals: Option<usize>,
    /// Cells left empty (not measured): `[["P007", "2026-02-16"], ...]`.
    #[serde(default)]
    pub missing: Vec<(String, String)>,
}

/// Checked scorings.
#[derive(Debug, Clone, PartialEq)]
pub struct Scorings {
    /// Scoring dates.
    pub dates: Vec<NaiveDate>,
    /// Index of the driver among `[[trait.indicator]]`.
    pub driver: usize,
    /// Missing cells: pot id and date.
    pub missing: Vec<(String, NaiveDate)>,
}

/// Check `[[climate.spell]]`: dates inside the study period, at least one
/// day, a finite drop.
pub fn check_spells(p: &Path, spells: &[SpellSpec], start: NaiveDate, end: NaiveDate) -> Result<Vec<Spell>> {
    spells
        .iter()
        .enumerate()
        .map(|(i, s)| {
            let key = |k: &str| format!("climate.spell[{}].{k}", i + 1);
            let from = parse_date(p, &key("from"), &s.from)?;
            if from < start || from >= end {
                return Err(bad_key(
                    p,
                    &key("from"),
                    format!("{from} is outside the study period {start} .. {end}"),
                    None,
                ));
            }
            if s.days == 0 {
                return Err(bad_key(p, &key("days"), "must be at least 1", None));
            }
            if !s.night_drop.is_finite() {
                return Err(bad_key(p, &key("night_drop"), "must be a number of °C", None));
            }
            Ok(Spell { from, to: from + Duration::days(s.days as i64), night_drop: s.night_drop })
        })
        .collect()
}

/// The night cooling of the spells on local date `d`, °C.
pub fn spell_drop(spells: &[Spell], d: NaiveDate) -> f64 {
    spells.iter().filter(|s| s.from <= d && d < s.to).map(|s| s.night_drop).sum()
}

/// Check `[trait.scorings]` against the indicators and the pots' windows
/// (`sowing` dates, `growth_days`): two or more increasing dates, each inside
/// every pot's window `[sown, sown + growth_days]` (both ends, as the study
/// file's `[scores]` accepts them), a summed or averaged driver, numbers.
pub fn check_scorings(
    p: &Path,
    s: Option<&ScoringsSpec>,
    indicators: &[IndicatorSpec],
    sowing: &[NaiveDate],
    growth_days: u32,
) -> Result<Option<Scorings>> {
    let Some(s) = s else { return Ok(None) };
    let key = |k: &str| format!("trait.scorings.{k}");
    if s.name.is_empty() || !s.name.chars().all(|c| c.is_ascii_alphanumeric() || c == '_') {
        return Err(bad_key(p, &key("name"), format!("`{}` must be letters, digits and `_`", s.name), None));
    }
    let dates = s.dates.iter().map(|d| parse_date(p, &key("dates"), d)).collect::<Result<Vec<_>>>()?;
    if dates.len() < 2 || dates.windows(2).any(|w| w[0] >= w[1]) {
        return Err(bad_key(
            p,
            &key("dates"),
            "needs two or more dates, each after the one before",
            Some("e.g. dates = [\"2026-02-02\", \"2026-02-09\", \"2026-02-16\"]".into()),
        ));
    }
    let first_end = sowing.iter().min().map(|d| *d + Duration::days(growth_days as i64));
    let last_start = sowing.iter().max().copied();
    for d in &dates {
        if last_start.is_some_and(|s| *d < s) || first_end.is_some_and(|e| *d > e) {
            return Err(bad_key(
                p,
                &key("dates"),
                format!("{d} is outside the growth window of some pots"),
                Some("every pot is scored on every date: keep the dates between the last sowing and the first scoring of [design]".into()),
            ));
        }
    }
    let Some(driver) = indicators.iter().position(|i| i.name == s.driver) else {
        let names: Vec<&str> = indicators.iter().map(|i| i.name.as_str()).collect();
        return Err(bad_key(
            p,
            &key("driver"),
            format!("no [[trait.indicator]] is called `{}`", s.driver),
            Some(format!("one of: {}", names.join(", "))),
        ));
    };
    if matches!(indicators[driver].statistic.as_str(), "min" | "max") {
        return Err(bad_key(
            p,
            &key("driver"),
            format!(
                "`{}` is a {} over days: growth cannot add it up day by day",
                s.driver, indicators[driver].statistic
            ),
            Some(
                "use an indicator of hours below or above a threshold, a mean or the daily light integral"
                    .into(),
            ),
        ));
    }
    for (k, v) in [("initial", s.initial), ("base_rate", s.base_rate), ("effect", s.effect)] {
        if !v.is_finite() {
            return Err(bad_key(p, &key(k), "must be a number", None));
        }
    }
    for (k, v) in [("process_sd", s.process_sd), ("noise_sd", s.noise_sd)] {
        if !(v.is_finite() && v >= 0.0) {
            return Err(bad_key(p, &key(k), "must be a standard deviation >= 0", None));
        }
    }
    let missing = s
        .missing
        .iter()
        .map(|(pot, d)| {
            let d = parse_date(p, &key("missing"), d)?;
            if !dates.contains(&d) {
                return Err(bad_key(p, &key("missing"), format!("{d} is not a scoring date"), None));
            }
            Ok((pot.clone(), d))
        })
        .collect::<Result<Vec<_>>>()?;
    Ok(Some(Scorings { dates, driver, missing }))
}

/// The driver's value at every pot on every local day from the first scoring
/// date to the day before the last, along the pot's path (`holder(p, i)`: the
/// pot whose own position pot `p` held at instant `i`; `p` itself for pots
/// that stay): `daily[p][d]`. Cost O(pots · instants).
fn daily_driver(
    sc: &Scenario,
    ind: &IndicatorSpec,
    reference: &Reference,
    pot_c: &[Components],
    holder: &dyn Fn(usize, usize) -> usize,
    first: NaiveDate,
    n_days: usize,
) -> Vec<Vec<f64>> {
    let local_day: Vec<Option<usize>> = reference
        .times
        .iter()
        .map(|t| {
            let d = (t.with_timezone(&sc.tz).date_naive() - first).num_days();
            (0..n_days as i64).contains(&d).then_some(d as usize)
        })
        .collect();
    let mut by_day: Vec<Vec<usize>> = vec![Vec::new(); n_days];
    for (i, d) in local_day.iter().enumerate() {
        if let Some(d) = d {
            by_day[*d].push(i);
        }
    }
    let stat = super::statistic(ind);
    (0..pot_c.len())
        .map(|p| {
            by_day
                .iter()
                .map(|idx| {
                    let (values, keep) = super::path_series(sc, reference, pot_c, ind, idx, |i| holder(p, i));
                    climate::evaluate(stat, &values, &keep, sc.step_minutes, 1.0).unwrap_or(0.0)
                })
                .collect()
        })
        .collect()
}

/// Files of a generated study: `(relative path, bytes)`.
type Files = Vec<(String, Vec<u8>)>;

/// The files of the scorings: `scores.csv`, `truth/scores_intervals.csv`
/// and `truth/scores_pots.csv` (see `docs/simulate.md`), and the
/// `[scores]` section of the study file.
pub fn generate(
    sc: &Scenario,
    s: &Scorings,
    pots: &[Pot],
    pot_c: &[Components],
    reference: &Reference,
    holder: &dyn Fn(usize, usize) -> usize,
    seed: u64,
) -> Result<(Files, String)> {
    let spec = sc.spec.trait_.scorings.as_ref().expect("checked scorings come from the spec");
    for (pot, _) in &s.missing {
        if !pots.iter().any(|p| &p.id == pot) {
            return Err(sc.bad(
                "trait.scorings.missing",
                format!("no pot is called `{pot}`"),
                Some(format!("pots are {} .. {}", pots[0].id, pots[pots.len() - 1].id)),
            ));
        }
    }
    let ind = &sc.spec.trait_.indicator[s.driver];
    let first = s.dates[0];
    let days: Vec<usize> = s.dates.iter().map(|d| (*d - first).num_days() as usize).collect();
    let n_days = *days.last().expect("two or more dates");
    let daily = daily_driver(sc, ind, reference, pot_c, holder, first, n_days);
    let model = GrowthModel {
        initial: spec.initial,
        base_rate: spec.base_rate,
        effect: spec.effect,
        process_sd: spec.process_sd,
        noise_sd: spec.noise_sd,
    };
    let growth_seed: u64 = super::rng(seed, STREAM).random();
    let truth = simulate(&model, &daily, &days, growth_seed);
    let dec = spec.decimals.unwrap_or(2);
    let averaged = !matches!(ind.statistic.as_str(), "hours_below" | "hours_above");

    let mut out = format!("pot,date,{}\n", spec.name);
    for (k, d) in s.dates.iter().enumerate() {
        for (p, pot) in pots.iter().enumerate() {
            let value = if s.missing.iter().any(|(id, md)| id == &pot.id && md == d) {
                String::new()
            } else {
                exports::fixed(truth.scores[p][k], dec)
            };
            writeln!(out, "{},{d},{value}", pot.id).expect("writing to a String");
        }
    }
    let mut iv = String::from("interval,from,to,days,driver,true_effect,driver_min,driver_max\n");
    for k in 0..s.dates.len() - 1 {
        let n = days[k + 1] - days[k];
        // The driver's interval value as the analysis forms it: a sum, or a mean over the days.
        let value =
            |p: usize| if averaged { truth.driver_sums[p][k] / n as f64 } else { truth.driver_sums[p][k] };
        let (lo, hi) = (0..pots.len())
            .map(value)
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| (a.min(v), b.max(v)));
        let effect = truth.interval_effect[k].map(|e| if averaged { e * n as f64 } else { e });
        writeln!(
            iv,
            "{},{},{},{n},{},{},{},{}",
            k + 1,
            s.dates[k],
            s.dates[k + 1],
            ind.name,
            effect.map(|e| exports::fixed(e, 6)).unwrap_or_default(),
            exports::fixed(lo, 4),
            exports::fixed(hi, 4)
        )
        .expect("writing to a String");
    }
    let mut tp = String::from("pot,interval,driver_value,true_growth,observed_growth\n");
    for (p, pot) in pots.iter().enumerate() {
        for k in 0..s.dates.len() - 1 {
            let n = (days[k + 1] - days[k]) as f64;
            let v = if averaged { truth.driver_sums[p][k] / n } else { truth.driver_sums[p][k] };
            writeln!(
                tp,
                "{},{},{},{},{}",
                pot.id,
                k + 1,
                exports::fixed(v, 4),
                exports::fixed(truth.sizes[p][k + 1] - truth.sizes[p][k], 4),
                exports::fixed(truth.scores[p][k + 1] - truth.scores[p][k], 4)
            )
            .expect("writing to a String");
        }
    }
    let files = vec![
        ("scores.csv".to_string(), out.into_bytes()),
        ("truth/scores_intervals.csv".to_string(), iv.into_bytes()),
        ("truth/scores_pots.csv".to_string(), tp.into_bytes()),
    ];
    let section = format!(
        "\n[scores]\nfile = \"scores.csv\"\npot = \"pot\"\ntime = \"date\"\ntraits = [{}]\n",
        serde_json::to_string(&spec.name).expect("a string serialises")
    );
    Ok((files, section))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn spells_cover_their_dates_only() {
        let d = |s: &str| NaiveDate::parse_from_str(s, "%Y-%m-%d").unwrap();
        let spells = check_spells(
            Path::new("s.toml"),
            &[SpellSpec { from: "2026-02-10".into(), days: 3, night_drop: 4.0 }],
            d("2026-02-01"),
            d("2026-03-01"),
        )
        .unwrap();
        assert_eq!(spell_drop(&spells, d("2026-02-09")), 0.0);
        assert_eq!(spell_drop(&spells, d("2026-02-10")), 4.0);
        assert_eq!(spell_drop(&spells, d("2026-02-12")), 4.0);
        assert_eq!(spell_drop(&spells, d("2026-02-13")), 0.0);
        let e = check_spells(
            Path::new("s.toml"),
            &[SpellSpec { from: "2026-03-10".into(), days: 3, night_drop: 4.0 }],
            d("2026-02-01"),
            d("2026-03-01"),
        )
        .unwrap_err()
        .to_string();
        assert!(e.contains("climate.spell[1].from") && e.contains("outside the study period"), "{e}");
    }
}
