//! Logger exports of a synthetic study: each `[[export]]` block of the
//! scenario is one file format (column names, delimiter, decimal mark, time
//! format and clock, units, preamble), written either as one file for all its
//! loggers or one file per logger, with the scenario's faults injected.
//!
//! Every injected fault that leaves a row in a file is listed with the file,
//! the physical line (1-based, counting preamble and header), the sensor, the
//! true UTC instant, the channel and the reason, in the vocabulary of the
//! ingestion stage's quality control. Removed rows (gaps, the lost second
//! pass of a fall-back hour) are listed as intervals instead.

use super::climate::Reference;
use super::error::Result;
use super::scenario::{ExportChannel, ExportSpec, Scenario};
use crate::io::layouts::Layout;
use crate::io::qc::Reason;
use crate::io::study::TimeColumns;
use crate::io::units::{Channel, Conversion};
use chrono::{DateTime, Duration, SecondsFormat, TimeZone, Utc};

/// Channel names in a fixed order: the keys of [`Channel::ALL`].
pub const CHANNELS: [&str; 3] = [Channel::Temperature.key(), Channel::Humidity.key(), Channel::Light.key()];

/// One injected fault that a reader of the files should flag.
#[derive(Debug, Clone, PartialEq)]
pub struct FaultRecord {
    /// Path of the export, relative to the study folder (`/` separators).
    pub file: String,
    /// Physical line, 1-based.
    pub line: usize,
    /// Sensor id.
    pub sensor: String,
    /// True UTC instant of the row.
    pub time: DateTime<Utc>,
    /// `temperature`, `humidity`, `light`, or empty for a whole-row fault.
    pub variable: String,
    /// Reason name (`spike`, `stuck`, `duplicate`, ...).
    pub reason: String,
}

/// Readings that are absent from an export.
#[derive(Debug, Clone, PartialEq)]
pub struct GapRecord {
    /// Sensor id.
    pub sensor: String,
    /// First missing instant.
    pub from: DateTime<Utc>,
    /// First instant after the gap (the next logging step).
    pub to: DateTime<Utc>,
    /// `gap` or `fallback_single_pass`.
    pub cause: String,
}

/// A true reading at a sensor: what the logger measured (true field plus
/// sensor noise), as printed in its export, converted back to SI units.
#[derive(Debug, Clone, PartialEq)]
pub struct TruthReading {
    /// Logger index.
    pub logger: usize,
    /// UTC instant.
    pub time: DateTime<Utc>,
    /// °C, % RH, µmol m-2 s-1; `None` where the export has no such channel.
    pub values: [Option<f64>; 3],
}

/// Everything the exports produce.
#[derive(Debug, Clone, Default)]
pub struct Exports {
    /// `(relative path, bytes)` in a fixed order.
    pub files: Vec<(String, Vec<u8>)>,
    /// Injected faults, sorted by file, line and variable.
    pub faults: Vec<FaultRecord>,
    /// Missing intervals.
    pub gaps: Vec<GapRecord>,
    /// True readings inside the study period, by logger then time.
    pub truth: Vec<TruthReading>,
}

/// The conversion of export unit `unit` of channel `k` (index into
/// [`CHANNELS`]) into potclim's internal unit: the one ingestion applies
/// ([`crate::io::units::Conversion::of`]), so that a simulated export reads
/// back to the value the simulator meant. Scenario checking rejects any unit
/// that ingestion does not know, so `None` here is a bug.
fn conversion(k: usize, unit: &str) -> Conversion {
    Conversion::of(Channel::ALL[k], unit)
        .expect("scenario checking admits only units that ingestion converts")
}

/// SI value -> value in export unit `unit` of channel `k`: the inverse of
/// ingestion's conversion ([`Conversion::invert`]).
pub fn to_unit(k: usize, unit: &str, si: f64) -> f64 {
    conversion(k, unit).invert(si)
}

/// Export value -> SI value, exactly as ingestion converts it
/// ([`Conversion::apply`]).
pub fn from_unit(k: usize, unit: &str, v: f64) -> f64 {
    conversion(k, unit).apply(v)
}

/// `v` with `decimals` fixed decimals and no negative zero.
pub fn fixed(v: f64, decimals: usize) -> String {
    let s = format!("{v:.decimals$}");
    if s.starts_with('-') && s[1..].chars().all(|c| c == '0' || c == '.') { s[1..].to_string() } else { s }
}

#[derive(Debug, Clone)]
struct Row {
    idx: usize,
    time_text: String,
    cells: [Option<String>; 3],
    faults: Vec<(String, Reason)>,
    copy: usize,
}

fn channel(e: &ExportSpec, k: usize) -> Option<&ExportChannel> {
    match k {
        0 => e.columns.temperature.as_ref(),
        1 => e.columns.humidity.as_ref(),
        _ => e.columns.light.as_ref(),
    }
}

/// Printed text of channel `k` and the SI value it means (what ingestion
/// reads back from that text).
fn print(k: usize, c: &ExportChannel, si: f64, comma: bool) -> (String, f64) {
    let d = c.decimals.unwrap_or(1);
    let s = fixed(to_unit(k, &c.unit, si), d);
    let back = from_unit(k, &c.unit, s.parse::<f64>().expect("a printed number parses"));
    (if comma { s.replace('.', ",") } else { s }, back)
}

/// The fixed offset (seconds east of UTC) that a titled export writes its
/// times in and names in its time header: the study zone's offset at the
/// start of the period (a logger launched then keeps that clock).
pub fn titled_offset(sc: &Scenario) -> i32 {
    use chrono::Offset;
    let (t0, _) = sc.period_utc();
    sc.tz.offset_from_utc_datetime(&t0.naive_utc()).fix().local_minus_utc()
}

fn time_text(sc: &Scenario, e: &ExportSpec, t: DateTime<Utc>) -> String {
    if e.form_layout() == Some(Layout::TitledExport) {
        let local = t.naive_utc() + Duration::seconds(i64::from(titled_offset(sc)));
        return local.format(e.pattern()).to_string();
    }
    let utc = e.clock.as_deref() == Some("utc");
    match e.pattern() {
        "unix" => t.timestamp().to_string(),
        "rfc3339" if utc => t.to_rfc3339_opts(SecondsFormat::Secs, true),
        "rfc3339" => t.with_timezone(&sc.tz).to_rfc3339_opts(SecondsFormat::Secs, false),
        f if utc => t.naive_utc().format(f).to_string(),
        f => t.with_timezone(&sc.tz).naive_local().format(f).to_string(),
    }
}

/// Whether the local time of `t` occurs twice, and `t` is the second time.
fn fold(sc: &Scenario, t: DateTime<Utc>) -> Option<bool> {
    let local = t.with_timezone(&sc.tz).naive_local();
    match sc.tz.from_local_datetime(&local) {
        chrono::LocalResult::Ambiguous(a, _) => Some(a.with_timezone(&Utc) != t),
        _ => None,
    }
}

/// A cell of an export: the one quoting rule of [`crate::io::output::field`]
/// with the export's delimiter.
fn quote(s: &str, delim: char) -> String {
    crate::io::output::field(s, delim).into_owned()
}

/// How the lines of one file are laid out: the lines before the data (a
/// preamble and the header, or a recurring layout's header lines), and the
/// cells a layout adds to each row (a row number; a serial number in the
/// first row only).
struct Form<'a> {
    layout: Option<Layout>,
    delim: char,
    sensor: &'a str,
    split_time: bool,
    head: Vec<String>,
}

/// `"cell"`, quoted whatever it holds (the four-line layout quotes every
/// header cell and time stamp).
fn quoted(s: &str) -> String {
    format!("\"{}\"", s.replace('"', "\"\""))
}

/// The unit as a layout writes it beside a channel's name: in the units line
/// of the four-line layout (`four = true`), or inside the channel header
/// otherwise. Each is a word the layout reader recognises
/// ([`crate::io::layouts::channel_of`]).
fn unit_label(unit: &str, four: bool) -> &'static str {
    match (unit, four) {
        ("degC", true) => "Deg C",
        ("degF", true) => "Deg F",
        ("degC", false) => "°C",
        ("degF", false) => "°F",
        ("K", _) => "K",
        ("percent", _) => "%",
        ("fraction", _) => "fraction",
        ("umol_m2_s", true) => "umol/s/m^2",
        ("umol_m2_s", false) => "µmol/m²/s",
        ("w_m2_shortwave", true) => "W/m^2",
        ("w_m2_shortwave", false) => "W/m²",
        _ => "lux",
    }
}

/// The header of channel `c` in a file of `layout` written by logger `sensor`.
pub fn channel_header(layout: Option<Layout>, c: &ExportChannel, sensor: &str) -> String {
    match layout {
        None | Some(Layout::FourLineHeader) => c.column.clone(),
        Some(Layout::TitledExport) => format!("{}, {} (S/N: {sensor})", c.column, unit_label(&c.unit, false)),
        Some(Layout::NameInFirstCell) => format!("{}({})", c.column, unit_label(&c.unit, false)),
    }
}

impl<'a> Form<'a> {
    fn new(sc: &Scenario, e: &ExportSpec, delim: char, sensor: &'a str) -> Form<'a> {
        let layout = e.form_layout();
        let chans: Vec<&ExportChannel> = (0..3).filter_map(|k| channel(e, k)).collect();
        let names: Vec<String> = chans.iter().map(|c| channel_header(layout, c, sensor)).collect();
        let join = |cells: Vec<String>| cells.join(&delim.to_string());
        let head = match layout {
            None => {
                let mut head: Vec<String> =
                    e.preamble.iter().map(|p| p.replace("{sensor}", sensor)).collect();
                let mut header: Vec<String> = match &e.columns.time {
                    Some(t) => t.names().into_iter().map(|n| quote(n, delim)).collect(),
                    None => Vec::new(),
                };
                if let Some(s) = &e.columns.sensor {
                    header.push(quote(s, delim));
                }
                header.extend(names.iter().map(|n| quote(n, delim)));
                head.push(join(header));
                head
            }
            Some(Layout::FourLineHeader) => {
                let implied = Layout::FourLineHeader.implied();
                let station = ["table", sensor, "greenhouse", "1"].map(quoted).to_vec();
                let mut fields = vec![quoted(implied.time), quoted("RECORD")];
                fields.extend(names.iter().map(|n| quoted(n)));
                let mut units = vec![quoted("TS"), quoted("RN")];
                units.extend(chans.iter().map(|c| quoted(unit_label(&c.unit, true))));
                let mut codes = vec![quoted(""), quoted("")];
                codes.extend(chans.iter().map(|_| quoted("Smp")));
                vec![join(station), join(fields), join(units), join(codes)]
            }
            Some(Layout::TitledExport) => {
                let off = titled_offset(sc);
                let (sign, a) = if off < 0 { ('-', -off) } else { ('+', off) };
                let time = format!("Date Time, GMT{sign}{:02}:{:02}", a / 3600, a % 3600 / 60);
                let mut header = vec![quoted("#"), quoted(&time)];
                header.extend(names.iter().map(|n| quoted(n)));
                vec![quoted(&format!("Readings of logger {sensor}")), join(header)]
            }
            Some(Layout::NameInFirstCell) => {
                let mut header = vec![quote(sensor, delim), "Time".to_string()];
                header.extend(names.iter().map(|n| quote(n, delim)));
                header.push("Serial Number".to_string());
                vec![join(header)]
            }
        };
        let split_time = matches!(e.columns.time, Some(TimeColumns::Split(_)));
        Form { layout, delim, sensor, split_time, head }
    }

    /// Cells before the time of data row `n` (0-based): a row number.
    fn lead_cells(&self, n: usize, cells: &mut Vec<String>) {
        if let Some(Layout::TitledExport | Layout::NameInFirstCell) = self.layout {
            cells.push((n + 1).to_string());
        }
    }

    /// The time cell(s) of data row `n` (after the row number of the titled
    /// and first-cell layouts; the four-line layout's record number follows).
    fn time_cells(&self, n: usize, text: &str, cells: &mut Vec<String>) {
        match self.layout {
            Some(Layout::FourLineHeader) => {
                cells.push(quoted(text));
                cells.push(n.to_string());
            }
            _ if self.split_time => match text.split_once(' ') {
                Some((date, clock)) => {
                    cells.push(quote(date, self.delim));
                    cells.push(quote(clock, self.delim));
                }
                // A fault's unreadable text has no space: the date cell
                // holds it, the time cell stays empty.
                None => {
                    cells.push(quote(text, self.delim));
                    cells.push(String::new());
                }
            },
            _ => cells.push(quote(text, self.delim)),
        }
    }

    /// Cells after the channels of data row `n`: the serial number of the
    /// first-cell layout, in the first row only.
    fn trail_cells(&self, n: usize, cells: &mut Vec<String>) {
        if self.layout == Some(Layout::NameInFirstCell) && n == 0 {
            cells.push(format!("SN-{}", self.sensor));
        }
    }
}

/// Write every export. `readings[l][i]` is the genuine SI reading of logger
/// `l` at reference index `i` (temperature, RH, PPFD).
pub fn write_exports(sc: &Scenario, r: &Reference, readings: &[Vec<[f64; 3]>]) -> Result<Exports> {
    let step = Duration::minutes(sc.step_minutes);
    let (t0, _) = sc.period_utc();
    let mut out = Exports::default();
    let mut rows_of: Vec<Vec<Row>> = Vec::new();
    for (li, lg) in sc.spec.logger.iter().enumerate() {
        let e = &sc.spec.export[sc.logger_export[li]];
        let comma = e.decimal.as_deref() == Some(",");
        let lead = (e.lead_hours * 60.0 / sc.step_minutes as f64).round() as usize;
        let first = r.first_in_period - lead.min(r.first_in_period);
        let mut rows: Vec<Row> = (first..r.times.len())
            .map(|i| {
                let mut cells = [None, None, None];
                for (k, cell) in cells.iter_mut().enumerate() {
                    if let Some(c) = channel(e, k) {
                        *cell = Some(print(k, c, readings[li][i][k], comma).0);
                    }
                }
                Row { idx: i, time_text: time_text(sc, e, r.times[i]), cells, faults: Vec::new(), copy: 0 }
            })
            .collect();
        let faults: Vec<(usize, &super::scenario::FaultSpec)> =
            sc.spec.fault.iter().enumerate().filter(|(_, f)| f.logger == lg.id).collect();
        // Removals first: gaps and the lost second pass of a fall-back hour.
        for &(fi, f) in &faults {
            let key = |k: &str| format!("fault[{}].{k}", fi + 1);
            match f.kind.as_str() {
                "gap" => {
                    let from = super::scenario::local_to_utc(
                        sc.tz,
                        sc.local_time(&key("from"), f.from.as_deref().unwrap_or(""))?,
                    );
                    let to = from + Duration::seconds((f.hours.unwrap_or(0.0) * 3600.0).round() as i64);
                    let before = rows.len();
                    let removed: Vec<DateTime<Utc>> = rows
                        .iter()
                        .filter(|w| r.times[w.idx] >= from && r.times[w.idx] < to)
                        .map(|w| r.times[w.idx])
                        .collect();
                    if removed.is_empty() {
                        return Err(sc.bad(
                            &key("from"),
                            format!("logger `{}` has no reading in this gap", lg.id),
                            Some("the gap must overlap the logging span".into()),
                        ));
                    }
                    rows.retain(|w| !(r.times[w.idx] >= from && r.times[w.idx] < to));
                    debug_assert!(rows.len() < before);
                    out.gaps.push(GapRecord {
                        sensor: lg.id.clone(),
                        from: removed[0],
                        to: *removed.last().expect("non-empty") + step,
                        cause: "gap".into(),
                    });
                }
                "fallback_single_pass" => {
                    let second: Vec<DateTime<Utc>> = rows
                        .iter()
                        .filter(|w| fold(sc, r.times[w.idx]) == Some(true))
                        .map(|w| r.times[w.idx])
                        .collect();
                    if second.is_empty() {
                        return Err(sc.bad(
                            &key("kind"),
                            format!("logger `{}` logs through no fall-back hour", lg.id),
                            Some("the study period must contain the end of daylight-saving time".into()),
                        ));
                    }
                    rows.retain(|w| fold(sc, r.times[w.idx]) != Some(true));
                    for w in rows.iter_mut().filter(|w| fold(sc, r.times[w.idx]) == Some(false)) {
                        w.faults.push((String::new(), Reason::AmbiguousTime));
                    }
                    out.gaps.push(GapRecord {
                        sensor: lg.id.clone(),
                        from: second[0],
                        to: *second.last().expect("non-empty") + step,
                        cause: "fallback_single_pass".into(),
                    });
                }
                _ => {}
            }
        }
        // Value and row faults.
        let find = |rows: &[Row], key: &str, at: &str| -> Result<usize> {
            let t = super::scenario::local_to_utc(sc.tz, sc.local_time(key, at)?);
            rows.iter().position(|w| r.times[w.idx] == t).ok_or_else(|| {
                sc.bad(key, format!("logger `{}` has no reading at {at} (outside its logging span, off the logging step, or removed by a gap)", lg.id), None)
            })
        };
        let var_index =
            |v: &Option<String>| CHANNELS.iter().position(|c| Some(*c) == v.as_deref()).expect("checked");
        let mut dups: Vec<(usize, usize)> = Vec::new();
        for &(fi, f) in &faults {
            let key = |k: &str| format!("fault[{}].{k}", fi + 1);
            let conflict = |w: &Row, var: &str| -> Result<()> {
                if w.faults.iter().any(|(v, _)| v.is_empty() || v == var)
                    || (var.is_empty() && !w.faults.is_empty())
                {
                    return Err(sc.bad(
                        &key("kind"),
                        format!("overlaps another fault of logger `{}` at {}", lg.id, r.times[w.idx]),
                        Some("move one of the faults".into()),
                    ));
                }
                if r.times[w.idx] < t0 {
                    return Err(sc.bad(
                        &key("kind"),
                        format!("lies before the study period ({})", r.times[w.idx]),
                        None,
                    ));
                }
                Ok(())
            };
            match f.kind.as_str() {
                "spike" | "out_of_range" | "unparsable_value" => {
                    let at = f.at.as_deref().unwrap_or("");
                    let j = find(&rows, &key("at"), at)?;
                    let k = var_index(&f.variable);
                    let c = channel(e, k).expect("checked");
                    conflict(&rows[j], CHANNELS[k])?;
                    let genuine = readings[li][rows[j].idx][k];
                    let (text, reason) = match f.kind.as_str() {
                        "spike" => (print(k, c, genuine + f.value.unwrap_or(0.0), comma).0, Reason::Spike),
                        "out_of_range" => (print(k, c, f.value.unwrap_or(0.0), comma).0, Reason::OutOfRange),
                        _ => (f.text.clone().unwrap_or_else(|| "ERR".into()), Reason::UnparsableValue),
                    };
                    rows[j].cells[k] = Some(text);
                    rows[j].faults.push((CHANNELS[k].to_string(), reason));
                }
                "stuck" => {
                    let from = super::scenario::local_to_utc(
                        sc.tz,
                        sc.local_time(&key("from"), f.from.as_deref().unwrap_or(""))?,
                    );
                    let to = from + Duration::seconds((f.hours.unwrap_or(0.0) * 3600.0).round() as i64);
                    let k = var_index(&f.variable);
                    let c = channel(e, k).expect("checked");
                    let js: Vec<usize> = (0..rows.len())
                        .filter(|&j| r.times[rows[j].idx] >= from && r.times[rows[j].idx] < to)
                        .collect();
                    if js.len() < 2 {
                        return Err(sc.bad(
                            &key("hours"),
                            format!("logger `{}` has fewer than two readings in this interval", lg.id),
                            None,
                        ));
                    }
                    let frozen = print(k, c, readings[li][rows[js[0]].idx][k], comma).0;
                    for &j in &js {
                        conflict(&rows[j], CHANNELS[k])?;
                        rows[j].cells[k] = Some(frozen.clone());
                        rows[j].faults.push((CHANNELS[k].to_string(), Reason::Stuck));
                    }
                }
                "unparsable_time" => {
                    let j = find(&rows, &key("at"), f.at.as_deref().unwrap_or(""))?;
                    conflict(&rows[j], "")?;
                    rows[j].time_text = f.text.clone().unwrap_or_else(|| "--".into());
                    rows[j].faults.push((String::new(), Reason::UnparsableTime));
                }
                "duplicate" => {
                    let j = find(&rows, &key("at"), f.at.as_deref().unwrap_or(""))?;
                    conflict(&rows[j], "")?;
                    dups.push((j, f.copies.unwrap_or(1).max(1)));
                }
                _ => {}
            }
        }
        for w in rows.iter_mut().filter(|w| r.times[w.idx] < t0) {
            w.faults.push((String::new(), Reason::OutsidePeriod));
        }
        // Truth: every genuine row inside the period (faulted or not).
        for w in &rows {
            if w.idx < r.first_in_period {
                continue;
            }
            let mut values = [None, None, None];
            for (k, v) in values.iter_mut().enumerate() {
                if let Some(c) = channel(e, k) {
                    *v = Some(print(k, c, readings[li][w.idx][k], comma).1);
                }
            }
            out.truth.push(TruthReading { logger: li, time: r.times[w.idx], values });
        }
        dups.sort_by_key(|d| std::cmp::Reverse(d.0));
        for (j, copies) in dups {
            for c in (1..=copies).rev() {
                let mut w = rows[j].clone();
                w.copy = c;
                w.faults = vec![(String::new(), Reason::Duplicate)];
                rows.insert(j + 1, w);
            }
        }
        rows_of.push(rows);
    }

    // Assemble files.
    for (ei, e) in sc.spec.export.iter().enumerate() {
        let delim =
            crate::io::study::delimiter_byte(e.delimiter.as_deref().unwrap_or(",")).expect("checked") as char;
        let ext = e.extension.as_deref().unwrap_or("csv");
        let loggers: Vec<usize> = (0..sc.spec.logger.len()).filter(|&l| sc.logger_export[l] == ei).collect();
        let groups: Vec<(String, Vec<usize>)> = if e.layout == "one_file" {
            vec![(format!("logs/{}.{ext}", e.name), loggers)]
        } else {
            loggers
                .iter()
                .map(|&l| (format!("logs/{}/{}.{ext}", e.name, sc.spec.logger[l].id), vec![l]))
                .collect()
        };
        for (file, ls) in groups {
            let sensor_name = if ls.len() == 1 { sc.spec.logger[ls[0]].id.as_str() } else { "" };
            let form = Form::new(sc, e, delim, sensor_name);
            let mut text = String::new();
            for line in &form.head {
                text.push_str(line);
                text.push('\n');
            }
            let mut all: Vec<(usize, usize, usize, &Row)> = Vec::new();
            for &l in &ls {
                for w in &rows_of[l] {
                    all.push((w.idx, l, w.copy, w));
                }
            }
            // Central systems write by time, then sensor; a copy follows its original.
            all.sort_by_key(|&(i, l, c, _)| (i, l, c));
            // Physical lines: the head lines, then one line per row.
            for (n, (line, (_, l, _, w))) in (form.head.len() + 1..).zip(all).enumerate() {
                let mut cells = Vec::with_capacity(8);
                form.lead_cells(n, &mut cells);
                form.time_cells(n, &w.time_text, &mut cells);
                if e.columns.sensor.is_some() {
                    cells.push(quote(&sc.spec.logger[l].id, delim));
                }
                for k in 0..3 {
                    if channel(e, k).is_some() {
                        cells.push(quote(w.cells[k].as_deref().unwrap_or(""), delim));
                    }
                }
                form.trail_cells(n, &mut cells);
                text.push_str(&cells.join(&delim.to_string()));
                text.push('\n');
                for (var, reason) in &w.faults {
                    out.faults.push(FaultRecord {
                        file: file.clone(),
                        line,
                        sensor: sc.spec.logger[l].id.clone(),
                        time: r.times[w.idx],
                        variable: var.clone(),
                        reason: reason.name().to_string(),
                    });
                }
            }
            out.files.push((file, text.into_bytes()));
        }
    }
    out.faults.sort_by(|a, b| (&a.file, a.line, &a.variable).cmp(&(&b.file, b.line, &b.variable)));
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_abs_diff_eq;

    /// °F and K against the defining relations (BIPM SI Brochure §2.3.1:
    /// T/K = t/°C + 273.15; t/°F = 9/5 t/°C + 32): 100 °C = 212 °F = 373.15 K,
    /// -40 °C = -40 °F. Lux: 10 000 lux of daylight = 185 µmol m-2 s-1, and
    /// 10 000 lux of HPS light = 122 (Thimijan & Heins 1983 via REFERENCE.md
    /// §2.2). Shortwave: 950 W m-2 ↔ 1900 µmol m-2 s-1 at io's factor 2.0.
    #[test]
    fn unit_conversions_match_definitions() {
        let (t, h, l) = (0, 1, 2);
        assert_abs_diff_eq!(to_unit(t, "degF", 100.0), 212.0, epsilon = 1e-12);
        assert_abs_diff_eq!(to_unit(t, "degF", -40.0), -40.0, epsilon = 1e-12);
        assert_abs_diff_eq!(to_unit(t, "K", 100.0), 373.15, epsilon = 1e-12);
        assert_abs_diff_eq!(from_unit(l, "lux_sunlight", 10000.0), 185.0, epsilon = 1e-9);
        assert_abs_diff_eq!(to_unit(l, "lux_hps", 122.0), 10000.0, epsilon = 1e-9);
        assert_abs_diff_eq!(to_unit(l, "w_m2_shortwave", 1900.0), 950.0, epsilon = 1e-9);
        assert_abs_diff_eq!(to_unit(h, "fraction", 55.0), 0.55, epsilon = 1e-15);
        for (k, ch) in Channel::ALL.into_iter().enumerate() {
            for u in ch.unit_names() {
                assert_abs_diff_eq!(from_unit(k, u, to_unit(k, u, 17.3)), 17.3, epsilon = 1e-9);
            }
        }
    }

    #[test]
    fn fixed_has_no_negative_zero() {
        assert_eq!(fixed(-0.01, 1), "0.0");
        assert_eq!(fixed(-0.06, 1), "-0.1");
        assert_eq!(fixed(2.25, 0), "2");
    }
}
