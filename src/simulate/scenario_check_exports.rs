//! Checking the `[[export]]`, `[[logger]]` and `[[fault]]` sections of a scenario:
//! the export forms and their columns and units, which logger writes which export,
//! and the keys each fault kind needs.

use super::{did_you_mean, inside, one_of};
use crate::io::layouts::Layout;
use crate::io::study::{TimeColumns, delimiter_byte};
use crate::io::units::Channel;
use crate::simulate::error::Result;
use crate::simulate::scenario::{CompartmentSpec, ExportSpec, FAULT_KINDS, ScenarioSpec, bad};
use chrono::{NaiveDate, NaiveDateTime};
use std::path::Path;

/// `[[export]]`: names, layout, delimiter and decimal mark, clock and time
/// format, lead time, columns and units (the units ingestion converts).
/// Returns the export names.
pub(super) fn check_exports<'a>(p: &Path, export: &'a [ExportSpec]) -> Result<Vec<&'a str>> {
    let mut enames = Vec::new();
    for (i, e) in export.iter().enumerate() {
        let key = |k: &str| format!("export[{}].{k}", i + 1);
        if e.name.is_empty() || !e.name.chars().all(|c| c.is_ascii_alphanumeric() || c == '_' || c == '-') {
            return Err(bad(
                p,
                &key("name"),
                format!("`{}` must be letters, digits, `_` and `-`", e.name),
                None,
            ));
        }
        if enames.contains(&e.name.as_str()) {
            return Err(bad(p, &key("name"), format!("`{}` is used twice", e.name), None));
        }
        enames.push(e.name.as_str());
        one_of(p, &key("layout"), &e.layout, &["one_file", "file_per_logger"])?;
        let mut forms = vec!["table"];
        forms.extend(Layout::ALL.iter().map(|l| l.name()));
        one_of(p, &key("form"), e.form.as_deref().unwrap_or("table"), &forms)?;
        one_of(p, &key("clock"), e.clock.as_deref().unwrap_or("local"), &["local", "utc"])?;
        match e.form_layout() {
            Some(form) => check_layout_form(p, &key, e, form)?,
            None => check_table_form(p, &key, e)?,
        }
        if !(e.lead_hours.is_finite() && e.lead_hours >= 0.0 && e.lead_hours <= 72.0) {
            return Err(bad(p, &key("lead_hours"), "must be between 0 and 72 hours", None));
        }
        let cols = &e.columns;
        if cols.temperature.is_none() && cols.humidity.is_none() && cols.light.is_none() {
            return Err(bad(p, &key("columns"), "writes no channel", None));
        }
        // The units ingestion converts, so that every simulated export reads back.
        for (ch, c) in Channel::ALL.into_iter().zip([&cols.temperature, &cols.humidity, &cols.light]) {
            if let Some(c) = c {
                one_of(p, &key(&format!("columns.{ch}.unit")), &c.unit, ch.unit_names())?;
                if c.decimals.unwrap_or(1) > 6 {
                    return Err(bad(p, &key(&format!("columns.{ch}.decimals")), "at most 6", None));
                }
            }
        }
    }
    Ok(enames)
}

/// The keys of an `[[export]]` in the table form: the time pattern (printed
/// and read back), the time column(s), delimiter and decimal mark, and the
/// sensor column that a one_file export needs.
fn check_table_form(p: &Path, key: &dyn Fn(&str) -> String, e: &ExportSpec) -> Result<()> {
    if e.time_format.is_empty() {
        return Err(bad(
            p,
            &key("time_format"),
            "is required (a chrono strftime pattern, \"rfc3339\" or \"unix\")",
            None,
        ));
    }
    match &e.columns.time {
        None => return Err(bad(p, &key("columns.time"), "is required", None)),
        Some(TimeColumns::Split(v)) => {
            if v.len() != 2 || v.iter().any(|c| c.is_empty()) {
                return Err(bad(
                    p,
                    &key("columns.time"),
                    "is one column name, or two: [date column, time column]",
                    None,
                ));
            }
            let probe =
                NaiveDate::from_ymd_opt(2026, 1, 2).and_then(|d| d.and_hms_opt(3, 4, 0)).expect("valid");
            let mut text = String::new();
            let no_space = matches!(e.time_format.as_str(), "rfc3339" | "unix") || {
                use std::fmt::Write;
                // An invalid pattern is refused below, with its own message.
                write!(text, "{}", probe.format(&e.time_format)).is_ok() && !text.contains(' ')
            };
            if no_space {
                return Err(bad(
                    p,
                    &key("columns.time"),
                    format!(
                        "separate date and time columns need a time_format with a space between date and time, not `{}`",
                        e.time_format
                    ),
                    Some("e.g. time_format = \"%d/%m/%Y %H:%M\"".into()),
                ));
            }
        }
        Some(TimeColumns::One(_)) => {}
    }
    let delim = delimiter_byte(e.delimiter.as_deref().unwrap_or(","))
        .map_err(|m| bad(p, &key("delimiter"), m, None))?;
    let dec = e.decimal.as_deref().unwrap_or(".");
    one_of(p, &key("decimal"), dec, &[".", ","])?;
    if dec == "," && delim == b',' {
        return Err(bad(
            p,
            &key("decimal"),
            "a decimal comma needs a delimiter other than `,`",
            Some("set delimiter = \";\"".into()),
        ));
    }
    if e.time_format != "rfc3339" && e.time_format != "unix" {
        let probe = NaiveDate::from_ymd_opt(2026, 1, 2).and_then(|d| d.and_hms_opt(3, 4, 0)).expect("valid");
        let mut s = String::new();
        use std::fmt::Write;
        let round_trips = write!(s, "{}", probe.format(&e.time_format)).is_ok()
            && NaiveDateTime::parse_from_str(&s, &e.time_format).ok() == Some(probe);
        if !round_trips {
            return Err(bad(
                p,
                &key("time_format"),
                format!("`{}` does not print and read back a date and time to the minute", e.time_format),
                Some("use e.g. \"%Y-%m-%d %H:%M:%S\" or \"%d.%m.%Y %H:%M\"".into()),
            ));
        }
    }
    match (e.layout.as_str(), &e.columns.sensor) {
        ("one_file", None) => {
            return Err(bad(p, &key("columns.sensor"), "a one_file export needs a sensor column", None));
        }
        ("file_per_logger", Some(_)) => {
            return Err(bad(
                p,
                &key("columns.sensor"),
                "a file_per_logger export names the sensor by its file stem; remove this key",
                None,
            ));
        }
        _ => {}
    }
    Ok(())
}

/// The keys of an `[[export]]` written in a recurring layout: one file per
/// logger (the layout writes the sensor id in its header), and none of the
/// keys the layout fixes (delimiter, decimal mark, time pattern and column,
/// preamble, sensor column). A titled export writes a serial number into
/// every channel header, so a lux channel (whose column a study block must
/// name) cannot have one name across files.
fn check_layout_form(p: &Path, key: &dyn Fn(&str) -> String, e: &ExportSpec, form: Layout) -> Result<()> {
    let fixed = |k: &str, set: bool| -> Result<()> {
        match set {
            true => {
                Err(bad(p, &key(k), format!("form \"{}\" fixes this; remove the key", form.name()), None))
            }
            false => Ok(()),
        }
    };
    fixed("delimiter", e.delimiter.is_some())?;
    fixed("decimal", e.decimal.is_some())?;
    fixed("time_format", !e.time_format.is_empty())?;
    fixed("preamble", !e.preamble.is_empty())?;
    fixed("columns.time", e.columns.time.is_some())?;
    fixed("columns.sensor", e.columns.sensor.is_some())?;
    if e.layout != "file_per_logger" {
        return Err(bad(
            p,
            &key("layout"),
            format!("form \"{}\" writes one logger per file: set layout = \"file_per_logger\"", form.name()),
            None,
        ));
    }
    if form == Layout::TitledExport && e.columns.light.as_ref().is_some_and(|c| c.unit.starts_with("lux")) {
        return Err(bad(
            p,
            &key("columns.light.unit"),
            "a titled export names each channel with its logger's serial number, so a lux channel has no one column name for the study file",
            Some("use unit = \"umol_m2_s\" or \"w_m2_shortwave\"".into()),
        ));
    }
    Ok(())
}

/// `[[logger]]`: unique ids inside the compartment, each writing a known
/// export, and every export written by some logger. Returns the ids and the
/// export index of every logger.
pub(super) fn check_loggers<'a>(
    p: &Path,
    spec: &'a ScenarioSpec,
    c: &CompartmentSpec,
    enames: &[&str],
) -> Result<(Vec<&'a str>, Vec<usize>)> {
    if spec.logger.is_empty() {
        return Err(bad(p, "logger", "needs at least one [[logger]]", None));
    }
    let mut lids: Vec<&str> = Vec::new();
    let mut logger_export = Vec::new();
    for (i, lg) in spec.logger.iter().enumerate() {
        let key = |k: &str| format!("logger[{}].{k}", i + 1);
        if lg.id.is_empty() || !lg.id.chars().all(|c| c.is_ascii_alphanumeric() || c == '_' || c == '-') {
            return Err(bad(
                p,
                &key("id"),
                format!("`{}` must be letters, digits, `_` and `-`", lg.id),
                None,
            ));
        }
        if lids.contains(&lg.id.as_str()) {
            return Err(bad(p, &key("id"), format!("`{}` is used twice", lg.id), None));
        }
        lids.push(&lg.id);
        if !inside(c, lg.x, lg.y) {
            return Err(bad(
                p,
                &key("x"),
                format!("({}, {}) lies outside the compartment", lg.x, lg.y),
                None,
            ));
        }
        match enames.iter().position(|n| *n == lg.export) {
            Some(j) => logger_export.push(j),
            None => {
                return Err(bad(
                    p,
                    &key("export"),
                    format!("no [[export]] is called `{}`", lg.export),
                    did_you_mean(&lg.export, enames.iter().copied()),
                ));
            }
        }
    }
    for (j, e) in spec.export.iter().enumerate() {
        if !logger_export.contains(&j) {
            return Err(bad(
                p,
                &format!("export[{}]", j + 1),
                format!("no logger writes export `{}`", e.name),
                None,
            ));
        }
    }
    Ok((lids, logger_export))
}

/// `[[fault]]`: kinds, loggers and the keys each kind needs (names only;
/// times are checked when the rows exist).
pub(super) fn check_faults(
    p: &Path,
    spec: &ScenarioSpec,
    lids: &[&str],
    logger_export: &[usize],
) -> Result<()> {
    for (i, f) in spec.fault.iter().enumerate() {
        let key = |k: &str| format!("fault[{}].{k}", i + 1);
        one_of(p, &key("kind"), &f.kind, FAULT_KINDS)?;
        let Some(li) = lids.iter().position(|l| *l == f.logger) else {
            return Err(bad(
                p,
                &key("logger"),
                format!("no [[logger]] is called `{}`", f.logger),
                did_you_mean(&f.logger, lids.iter().copied()),
            ));
        };
        let needs_var = matches!(f.kind.as_str(), "spike" | "stuck" | "out_of_range" | "unparsable_value");
        if needs_var {
            let Some(v) = &f.variable else {
                return Err(bad(
                    p,
                    &key("variable"),
                    format!("a {} fault needs variable = temperature | humidity | light", f.kind),
                    None,
                ));
            };
            one_of(p, &key("variable"), v, &["temperature", "humidity", "light"])?;
            let cols = &spec.export[logger_export[li]].columns;
            let has = match v.as_str() {
                "temperature" => cols.temperature.is_some(),
                "humidity" => cols.humidity.is_some(),
                _ => cols.light.is_some(),
            };
            if !has {
                return Err(bad(
                    p,
                    &key("variable"),
                    format!("logger `{}` writes no {v} channel", f.logger),
                    None,
                ));
            }
        }
        let lasting = matches!(f.kind.as_str(), "stuck" | "gap");
        if lasting {
            if f.from.is_none() {
                return Err(bad(
                    p,
                    &key("from"),
                    format!("a {} fault needs from = \"<local date-time>\"", f.kind),
                    None,
                ));
            }
            match f.hours {
                Some(h) if h > 0.0 && h.is_finite() => {}
                _ => return Err(bad(p, &key("hours"), format!("a {} fault needs hours > 0", f.kind), None)),
            }
        } else if f.kind != "fallback_single_pass" && f.at.is_none() {
            return Err(bad(
                p,
                &key("at"),
                format!("a {} fault needs at = \"<local date-time>\"", f.kind),
                None,
            ));
        }
        if matches!(f.kind.as_str(), "spike" | "out_of_range") && f.value.is_none_or(|v| !v.is_finite()) {
            return Err(bad(
                p,
                &key("value"),
                format!("a {} fault needs a numeric value (SI units)", f.kind),
                None,
            ));
        }
        if f.kind == "fallback_single_pass" {
            let e = &spec.export[logger_export[li]];
            if e.clock.as_deref().unwrap_or("local") != "local"
                || e.pattern() == "rfc3339"
                || e.pattern() == "unix"
                || e.form_layout() == Some(Layout::TitledExport)
            {
                return Err(bad(
                    p,
                    &key("kind"),
                    "fallback_single_pass needs an export on local clock time without offset",
                    None,
                ));
            }
        }
    }
    Ok(())
}
