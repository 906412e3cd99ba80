//! Recurring layouts of logger exports (`layout = "..."` in `[[logs]]`):
//! what each implies (delimiter, preamble and header lines, time column and
//! pattern, where the sensor id is written), and the per-file step that reads
//! a file's first lines and turns a layout block into an ordinary
//! [`LogFormat`] — time column, channel columns with their units from the
//! header words, the sensor id — so that the rows then go through the same
//! reader as a hand-written block (no second, slower path).
//!
//! Every key the block gives overrides what the layout implies. A file whose
//! header does not fit its layout is an error that shows the lines read and
//! says what could not be recognised.

use super::error::{IoError, Result};
use super::logs::{LogFormat, SensorSource, header_offset};
use super::units::{Channel, Conversion};
use std::path::Path;

/// A recurring export layout.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Layout {
    /// Quoted CSV with four header lines: a station line (its second field
    /// is the station name, the sensor id), the field names (`TIMESTAMP`,
    /// `RECORD`, channels), their units (`TS`, `RN`, `Deg C`, `%`), and the
    /// processing codes; data from line 5.
    FourLineHeader,
    /// A title line, then a header with a row-number column, the time
    /// column with the offset in its name (`Date Time, GMT+01:00`) and
    /// channel headers with unit and serial number (`Temp, °C (S/N: 1234)`;
    /// the serial number is the sensor id, else the file name).
    TitledExport,
    /// The sensor name in the first header cell (above a row-number column),
    /// then `Time` and the channels with units in brackets; a trailing
    /// serial-number column may be filled in the first row only.
    NameInFirstCell,
}

/// What a layout implies for the keys of `[[logs]]`.
#[derive(Debug, Clone, Copy)]
pub struct Implied {
    /// Field delimiter.
    pub delimiter: u8,
    /// Lines before the header.
    pub skip_lines: usize,
    /// Non-data lines after the header (units, processing codes).
    pub after_header: usize,
    /// The time column's name (or the start of it, before an offset).
    pub time: &'static str,
    /// The time pattern.
    pub time_format: &'static str,
}

impl Layout {
    /// Every layout, in the order the docs list them.
    pub const ALL: [Layout; 3] = [Layout::FourLineHeader, Layout::TitledExport, Layout::NameInFirstCell];

    /// The name written in `layout = "..."`.
    pub fn name(self) -> &'static str {
        match self {
            Layout::FourLineHeader => "four-line-header",
            Layout::TitledExport => "titled-with-offset",
            Layout::NameInFirstCell => "name-in-first-cell",
        }
    }

    /// Every name, quoted, for messages.
    pub fn names() -> Vec<String> {
        Layout::ALL.iter().map(|l| format!("\"{}\"", l.name())).collect()
    }

    /// The layout of a name.
    pub fn parse(name: &str) -> Option<Layout> {
        Layout::ALL.into_iter().find(|l| l.name() == name.trim())
    }

    /// What the layout implies.
    pub fn implied(self) -> Implied {
        match self {
            Layout::FourLineHeader => Implied {
                delimiter: b',',
                skip_lines: 1,
                after_header: 2,
                time: "TIMESTAMP",
                time_format: "%Y-%m-%d %H:%M:%S",
            },
            Layout::TitledExport => Implied {
                delimiter: b',',
                skip_lines: 1,
                after_header: 0,
                time: "Date Time",
                time_format: "%m/%d/%y %I:%M:%S %p",
            },
            Layout::NameInFirstCell => Implied {
                delimiter: b',',
                skip_lines: 0,
                after_header: 0,
                time: "Time",
                time_format: "%Y-%m-%d %H:%M:%S",
            },
        }
    }
}

/// The channel and unit that a column's header words (and the units line,
/// when the layout has one) name, or `None`. `Some((Light, None))` is light
/// in lux, whose conversion depends on the light source and must be given.
pub fn channel_of(name: &str, unit: Option<&str>) -> Option<(Channel, Option<&'static str>)> {
    let text = format!("{} {}", name, unit.unwrap_or("")).to_lowercase();
    let words: Vec<&str> =
        text.split(|c: char| !c.is_alphanumeric() && c != '%').filter(|w| !w.is_empty()).collect();
    let has = |w: &str| words.contains(&w);
    let any = |ps: &[&str]| ps.iter().any(|p| text.contains(p));
    if any(&["dew", "batt", "volt", "serial", "wet bulb", "heat index", "vpd"]) {
        return None;
    }
    if any(&["°f", "degf", "deg f", "fahrenheit"]) {
        return Some((Channel::Temperature, Some("degF")));
    }
    if any(&["°c", "degc", "deg c", "celsius", "℃"]) {
        return Some((Channel::Temperature, Some("degC")));
    }
    let temp_word = any(&["temp", "airt"]);
    if temp_word && (has("k") || has("kelvin")) {
        return Some((Channel::Temperature, Some("K")));
    }
    if has("rh") || any(&["humid", "%rh"]) {
        if any(&["fraction", "0-1"]) {
            return Some((Channel::Humidity, Some("fraction")));
        }
        if text.contains('%') {
            return Some((Channel::Humidity, Some("percent")));
        }
        return None;
    }
    if any(&["umol", "µmol", "μmol", "ppfd"]) || has("par") {
        return Some((Channel::Light, Some("umol_m2_s")));
    }
    if any(&["w/m", "w m-2", "wm-2", "w/m²"]) && any(&["sol", "rad", "slr", "glob", "short", "w/m"]) {
        return Some((Channel::Light, Some("w_m2_shortwave")));
    }
    if has("lux") || has("lx") {
        return Some((Channel::Light, None));
    }
    None
}

/// The cells of the first `n` records of `bytes` (quoted fields allowed),
/// decoded as UTF-8 or Latin-1, with each record's physical line.
fn first_records(bytes: &[u8], delimiter: u8, n: usize) -> Vec<(usize, Vec<String>)> {
    let bytes = bytes.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(bytes);
    let mut rdr =
        csv::ReaderBuilder::new().delimiter(delimiter).has_headers(false).flexible(true).from_reader(bytes);
    let mut out = Vec::new();
    let mut rec = csv::ByteRecord::new();
    while out.len() < n {
        match rdr.read_byte_record(&mut rec) {
            Ok(true) => {}
            _ => break,
        }
        let line = rec.position().map_or(0, |p| p.line() as usize);
        let cells = rec
            .iter()
            .map(|c| match std::str::from_utf8(c) {
                Ok(s) => s.trim().to_string(),
                Err(_) => c.iter().map(|&b| b as char).collect::<String>().trim().to_string(),
            })
            .collect();
        out.push((line, cells));
    }
    out
}

/// Turn a layout block into the format of one file: read its first lines,
/// find the time column, the channels the block does not name (by header
/// words and units) and the sensor id. `fmt.layout` must be set.
pub fn resolve(fmt: &LogFormat, layout: Layout, path: &Path, bytes: &[u8]) -> Result<LogFormat> {
    let recs = first_records(bytes, fmt.delimiter, fmt.skip_lines + 1 + fmt.after_header + 1);
    let shown = || -> String {
        recs.iter()
            .take(fmt.skip_lines + 1 + fmt.after_header)
            .map(|(l, c)| format!("  line {l}: {}", c.join(" | ")))
            .collect::<Vec<_>>()
            .join("\n")
    };
    let unfit = |what: String| IoError::Table {
        path: path.to_path_buf(),
        message: format!(
            "does not fit layout \"{}\" of logs[{}]: {what}\nlines read:\n{}",
            layout.name(),
            fmt.block,
            shown()
        ),
    };
    // Records skip blank lines; the header is the first record after the
    // preamble (a blank preamble line shortens it, as in the reader).
    let header_at = recs.iter().position(|(l, _)| *l > fmt.skip_lines);
    let Some(h) = header_at else {
        return Err(unfit(format!("no header after {} preamble line(s)", fmt.skip_lines)));
    };
    let header = &recs[h].1;
    let units: Option<&Vec<String>> = match layout {
        Layout::FourLineHeader => recs.get(h + 1).map(|r| &r.1),
        _ => None,
    };
    let mut out = fmt.clone();
    out.files = Vec::new();
    out.layout = None;
    // The time column: as given, else the layout's name, possibly followed
    // by an offset in the header.
    if !header.contains(&out.time_column)
        && !header.iter().any(|c| header_offset(c).is_some_and(|(n, _)| n == out.time_column))
    {
        return Err(unfit(format!(
            "no time column `{}` in the header (line {}); set `time` to the header of the time column",
            out.time_column, recs[h].0
        )));
    }
    if layout == Layout::FourLineHeader
        && let Some(u) = units
        && let Some(i) = header.iter().position(|c| *c == out.time_column)
        && u.get(i).map(String::as_str) != Some("TS")
    {
        return Err(unfit(format!(
            "the units line (line {}) has `{}` under `{}`, not `TS`",
            recs[h + 1].0,
            u.get(i).map(String::as_str).unwrap_or(""),
            out.time_column
        )));
    }
    // Channels not named by the block.
    let mut found = 0;
    let mut lux: Option<String> = None;
    for ch in Channel::ALL {
        if out.channels[ch.index()].is_some() {
            found += 1;
            continue;
        }
        for (i, cell) in header.iter().enumerate() {
            let unit = units.and_then(|u| u.get(i)).map(String::as_str);
            match channel_of(cell, unit) {
                Some((c, Some(u))) if c == ch => {
                    let conv = Conversion::of(ch, u).unwrap_or_else(|| unreachable!("a known unit"));
                    out.channels[ch.index()] = Some((cell.clone(), conv));
                    found += 1;
                    break;
                }
                Some((c, None)) if c == ch => lux = Some(cell.clone()),
                _ => {}
            }
        }
    }
    if let Some(col) = lux
        && out.channels[Channel::Light.index()].is_none()
    {
        return Err(unfit(format!(
            "column `{col}` is light in lux, whose conversion to PPFD depends on the light source; name it: `light = {{ column = \"{col}\", unit = \"lux_sunlight\" }}` (or lux_hps, lux_white_led) under [logs.columns]"
        )));
    }
    if found == 0 {
        return Err(unfit(format!(
            "no temperature, humidity or light column recognised among the header's cells ({}); name them under [logs.columns]",
            header.join(", ")
        )));
    }
    // The sensor id.
    if fmt.sensor == SensorSource::Layout {
        let id = match layout {
            Layout::FourLineHeader => recs.first().filter(|_| h > 0).and_then(|r| r.1.get(1)).cloned(),
            Layout::TitledExport => header.iter().find_map(|c| serial_in(c)),
            Layout::NameInFirstCell => header.first().cloned(),
        };
        out.sensor = match id.filter(|s| !s.is_empty()) {
            Some(id) => SensorSource::Fixed(id),
            None if layout == Layout::TitledExport => SensorSource::FileStem,
            None => {
                return Err(unfit(
                    "no sensor name where the layout writes it; set `sensor` or `sensor_from`".to_string(),
                ));
            }
        };
    }
    Ok(out)
}

/// The serial number inside a channel header (`Temp, °C (S/N: 1234567)`).
fn serial_in(cell: &str) -> Option<String> {
    let p = cell.find("S/N")?;
    let rest = cell[p + 3..].trim_start_matches([':', ' ']);
    let id: String = rest.chars().take_while(|c| c.is_alphanumeric() || matches!(c, '-' | '_')).collect();
    (!id.is_empty()).then_some(id)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn header_words_name_channels_and_units() {
        let t = |n: &str, u: Option<&str>| channel_of(n, u);
        assert_eq!(t("Temp, °C (S/N: 20871)", None), Some((Channel::Temperature, Some("degC"))));
        assert_eq!(t("Celsius(°C)", None), Some((Channel::Temperature, Some("degC"))));
        assert_eq!(t("Fahrenheit(°F)", None), Some((Channel::Temperature, Some("degF"))));
        assert_eq!(t("AirT_Avg", Some("Deg C")), Some((Channel::Temperature, Some("degC"))));
        assert_eq!(t("Humidity(%rh)", None), Some((Channel::Humidity, Some("percent"))));
        assert_eq!(t("RH, %", None), Some((Channel::Humidity, Some("percent"))));
        assert_eq!(t("RH", Some("%")), Some((Channel::Humidity, Some("percent"))));
        assert_eq!(t("PAR_Den_Avg", Some("umol/s/m^2")), Some((Channel::Light, Some("umol_m2_s"))));
        assert_eq!(t("SlrW_Avg", Some("W/m^2")), Some((Channel::Light, Some("w_m2_shortwave"))));
        assert_eq!(t("Intensity, Lux (S/N: 1)", None), Some((Channel::Light, None)));
        assert_eq!(t("Dew Point(°C)", None), None);
        assert_eq!(t("BattV_Min", Some("Volts")), None);
        assert_eq!(t("RECORD", Some("RN")), None);
        assert_eq!(t("Serial Number", None), None);
        assert_eq!(t("Temp", None), None, "a temperature word without a unit is not decided");
    }

    #[test]
    fn serial_numbers_in_headers() {
        assert_eq!(serial_in("Temp, °C (S/N: 20871)").as_deref(), Some("20871"));
        assert_eq!(serial_in("RH, % (S/N:A-77)").as_deref(), Some("A-77"));
        assert_eq!(serial_in("Temp, °C"), None);
        assert_eq!(serial_in("Temp, °C (S/N: bay_3)").as_deref(), Some("bay_3"));
    }

    /// Seeded mutations of an export of each layout (truncated lines, stray
    /// quotes, byte-order marks, mixed line ends, emptied cells, non-UTF-8
    /// bytes): never a panic; either a located error or every data row
    /// accounted for, as a reading or as a flagged line.
    #[test]
    fn mutated_layout_exports_never_panic_and_account_for_every_row() {
        use rand::{RngExt, SeedableRng};
        let bases: [(Layout, String); 3] = [
            (Layout::FourLineHeader, {
                let mut t = String::from(
                    "\"F\",\"st1\",\"x\"\n\"TIMESTAMP\",\"RECORD\",\"AirT_Avg\",\"RH\"\n\"TS\",\"RN\",\"Deg C\",\"%\"\n\"\",\"\",\"Avg\",\"Smp\"\n",
                );
                for i in 0..30 {
                    t.push_str(&format!(
                        "\"2026-05-01 {:02}:{:02}:00\",{i},{}.5,{}\n",
                        i / 6,
                        i % 6 * 10,
                        15 + i % 4,
                        60 + i
                    ));
                }
                t
            }),
            (Layout::TitledExport, {
                let mut t = String::from("\"Title\"\n\"#\",\"Date Time, GMT+02:00\",\"Temp, °C (S/N: 9)\"\n");
                for i in 0..30 {
                    t.push_str(&format!(
                        "{},06/14/26 0{}:{:02}:00 AM,{}.5\n",
                        i + 1,
                        1 + i / 4,
                        i % 4 * 15,
                        20 + i % 5
                    ));
                }
                t
            }),
            (Layout::NameInFirstCell, {
                let mut t = String::from("s1,Time,Celsius(°C),Humidity(%rh),Serial Number\n");
                for i in 0..30 {
                    t.push_str(&format!(
                        "{},2026-07-02 {:02}:{:02}:00,{}.0,{}.5{}\n",
                        i + 1,
                        i / 4,
                        i % 4 * 15,
                        24 + i % 3,
                        40 + i % 7,
                        if i == 0 { ",SN1" } else { "" }
                    ));
                }
                t
            }),
        ];
        let mut rng = rand_chacha::ChaCha20Rng::seed_from_u64(17);
        let (mut ok, mut err) = (0, 0);
        for case in 0..3000 {
            let (layout, base) = &bases[case % 3];
            let m = layout.implied();
            let fmt = LogFormat {
                block: 1,
                delimiter: m.delimiter,
                decimal_comma: false,
                time_column: m.time.to_string(),
                clock_column: None,
                time_format: super::super::clock::TimeFormat::compile(m.time_format).unwrap(),
                zone: super::super::study::LogZone::Iana(chrono_tz::UTC),
                zone_given: false,
                sensor: SensorSource::Layout,
                skip_lines: m.skip_lines,
                after_header: m.after_header,
                layout: Some(*layout),
                sheet: None,
                channels: [None, None, None],
                files: vec![],
            };
            let mut b = base.clone().into_bytes();
            for _ in 0..rng.random_range(1..6) {
                let at = rng.random_range(0..=b.len());
                match rng.random_range(0..7) {
                    0 => b.truncate(at),
                    1 => b.insert(at, b'"'),
                    2 => b.splice(0..0, *b"\xEF\xBB\xBF").for_each(drop),
                    3 => b.insert(at, b'\r'),
                    4 => b.insert(at, 0xB0),
                    5 => {
                        let end = (at + rng.random_range(0..8)).min(b.len());
                        b.drain(at..end);
                    }
                    _ => b.splice(at..at, *b"\r\n,,\n").for_each(drop),
                }
            }
            match super::super::logs::read_bytes(&fmt, Path::new("x.csv"), 0, &b) {
                Ok(r) => {
                    ok += 1;
                    // Every data row is a reading, or dropped with exactly
                    // one flag that has no instant (time, row or sensor).
                    let dropped = r.flags.iter().filter(|f| f.time.is_none()).count();
                    assert_eq!(r.rows_read, r.rows.len() + dropped, "case {case}: {:?}", r.flags);
                }
                Err(e) => {
                    err += 1;
                    assert!(e.to_string().contains("x.csv"), "case {case}: {e}");
                }
            }
        }
        assert!(ok > 1000 && err > 10, "{ok} read, {err} errors");
    }

    #[test]
    fn names_round_trip() {
        for l in Layout::ALL {
            assert_eq!(Layout::parse(l.name()), Some(l));
        }
        assert_eq!(Layout::parse("vendor"), None);
    }
}
