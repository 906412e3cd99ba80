//! The study file of a generated study (`study.toml`): the pot, sensor and move
//! tables, a `[[logs]]` block for every export written under `logs/`, and the
//! `[climate]`, `[[indicator]]` and `[model]` sections of the scenario.

use super::{Scenario, exports, q};
use std::fmt::Write as _;

/// The study file of the generated study.
pub(super) fn study_toml(sc: &Scenario, seed: u64) -> String {
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
