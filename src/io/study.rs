//! The study file (`study.toml`): one TOML file naming every input of an
//! analysis. Paths inside it are relative to the folder of the study file.
//!
//! This module parses the sections the input stage owns (`[study]`,
//! `[compartment]`, `[pots]`, `[sensors]`, `[[logs]]`, `[[openings]]`, `[qc]`,
//! `[scores]`)
//! with unknown keys rejected. Sections owned by later stages (`[climate]`,
//! `[[indicator]]`, `[mapping]`, `[model]`, `[verdict]`, `[report]`) are
//! accepted here as opaque tables and parsed by their stage through
//! [`Study::section`], again with unknown keys rejected and with line and
//! column in the message. Any other top-level key is an error.
//!
//! The key-by-key documentation is `docs/study-file.md`; keep the two in step.

use super::error::{IoError, Result};
use serde::Deserialize;
use serde::de::DeserializeOwned;
use std::path::{Path, PathBuf};

/// The sections of the study file that the input stage owns.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct StudySpec {
    /// `[study]`.
    pub study: StudySection,
    /// `[compartment]`: the floor area the pots and sensors stand in.
    #[serde(default)]
    pub compartment: Option<Compartment>,
    /// `[pots]`.
    pub pots: PotsSection,
    /// `[sensors]`; absent when the analysis uses no loggers.
    #[serde(default)]
    pub sensors: Option<SensorsSection>,
    /// `[[logs]]`: one block per export format.
    #[serde(default)]
    pub logs: Vec<LogSection>,
    /// `[[openings]]`: doors, vents, windows, pads, as segments.
    #[serde(default)]
    pub openings: Vec<Opening>,
    /// `[scores]`: repeated scorings of traits (see `io::scores`).
    #[serde(default)]
    pub scores: Option<super::scores::ScoresSection>,
    /// `[qc]`: thresholds of the quality-control rules (see `io::qc`).
    #[serde(default)]
    pub qc: super::qc::QcSettings,
    /// Owned by `climate`.
    #[serde(default)]
    pub climate: Option<toml::Table>,
    /// Owned by `climate`.
    #[serde(default)]
    pub indicator: Option<Vec<toml::Table>>,
    /// Owned by `spatial`.
    #[serde(default)]
    pub mapping: Option<toml::Table>,
    /// Owned by `model`.
    #[serde(default)]
    pub model: Option<toml::Table>,
    /// Owned by the verdict stage.
    #[serde(default)]
    pub verdict: Option<toml::Table>,
    /// Owned by `report`.
    #[serde(default)]
    pub report: Option<toml::Table>,
}

/// `[study]`.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct StudySection {
    /// Free text shown in outputs.
    pub title: String,
    /// IANA time-zone name (e.g. `Europe/Amsterdam`) for logger times that
    /// carry no offset, and for day boundaries and clock times.
    pub timezone: String,
    /// Output folder, relative to the study file.
    pub output: String,
    /// Seed for every random step of the analysis (conditional simulation,
    /// permutation tests). Default 1.
    #[serde(default)]
    pub seed: Option<u64>,
}

/// `[compartment]`: a rectangle `[0, length] x [0, width]` in metres.
#[derive(Debug, Clone, Copy, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Compartment {
    /// Extent along x, metres.
    pub length: f64,
    /// Extent along y, metres.
    pub width: f64,
}

/// `[pots]`: the trait table and where each pot stands.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PotsSection {
    /// The table (CSV), relative to the study file.
    pub file: String,
    /// Column with the pot identifier.
    pub id: String,
    /// Column with x in metres (omit when `[pots.grid]` is given).
    #[serde(default)]
    pub x: Option<String>,
    /// Column with y in metres (omit when `[pots.grid]` is given).
    #[serde(default)]
    pub y: Option<String>,
    /// Column with the start of each pot's growth window (local date or date-time).
    #[serde(default)]
    pub start: Option<String>,
    /// Column with the end of each pot's growth window (local date or date-time).
    #[serde(default)]
    pub end: Option<String>,
    /// Field delimiter of the pot table (one character; default `,`).
    #[serde(default)]
    pub delimiter: Option<String>,
    /// Grid layout: derive x and y from bench, row and slot numbers.
    #[serde(default)]
    pub grid: Option<GridLayout>,
    /// Column with each pot's row on the lattice of the rows x columns
    /// residual model (whole numbers; give it with `lattice_column`). Without
    /// the pair, rows and columns are derived from the positions when they
    /// form an exact grid.
    #[serde(default)]
    pub lattice_row: Option<String>,
    /// Column with each pot's column on that lattice (whole numbers).
    #[serde(default)]
    pub lattice_column: Option<String>,
    /// The move table of pots that move (CSV, relative to the study file;
    /// see `io::moves`): columns `pot`, `since`, and `x`, `y` in metres or
    /// `slot` with a slot table.
    #[serde(default)]
    pub moves: Option<String>,
    /// The slot table of the move table (CSV with columns `slot`, `x`, `y`);
    /// when given, the move table names slots instead of coordinates.
    #[serde(default)]
    pub slots: Option<String>,
}

/// `[pots.grid]`: pots on benches in rows of slots. With 1-based integers
/// `bench`, `row` and `slot`:
/// `x = origin[0] + (slot - 1) * slot_pitch`,
/// `y = origin[1] + (bench - 1) * bench_pitch + (row - 1) * row_pitch`.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct GridLayout {
    /// Column with the bench number (1, 2, ...).
    pub bench: String,
    /// Column with the row number within the bench (1, 2, ...).
    pub row: String,
    /// Column with the slot number along the row (1, 2, ...).
    pub slot: String,
    /// Metres between the first rows of consecutive benches, along y.
    pub bench_pitch: f64,
    /// Metres between rows of one bench, along y.
    pub row_pitch: f64,
    /// Metres between slots of one row, along x.
    pub slot_pitch: f64,
    /// Position of bench 1, row 1, slot 1 (metres). Default `[0, 0]`.
    #[serde(default)]
    pub origin: Option<[f64; 2]>,
}

/// `[sensors]`: where each logger stands.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SensorsSection {
    /// The table (CSV), relative to the study file.
    pub file: String,
    /// Column with the sensor identifier (as it appears in the logs).
    pub id: String,
    /// Column with x in metres.
    pub x: String,
    /// Column with y in metres.
    pub y: String,
    /// Column with height in metres (kept, not used for mapping).
    #[serde(default)]
    pub z: Option<String>,
    /// Field delimiter of the sensor table (one character; default `,`).
    #[serde(default)]
    pub delimiter: Option<String>,
}

/// `[[logs]]`: one export format, matching one or more files.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct LogSection {
    /// Glob patterns, relative to the study file.
    pub files: Vec<String>,
    /// Field delimiter: one character, or `"\t"` / `"tab"`. Default `,`.
    #[serde(default)]
    pub delimiter: Option<String>,
    /// Decimal mark: `.` (default) or `,`.
    #[serde(default)]
    pub decimal: Option<String>,
    /// A recurring export layout (see `io::layouts`) that implies the other
    /// keys; each key given still overrides it.
    #[serde(default)]
    pub layout: Option<String>,
    /// Column with the time stamp, or two columns (date, then time of day)
    /// whose cells are joined with one space before `time_format` reads them.
    /// Required unless a layout implies it.
    #[serde(default)]
    pub time: Option<TimeColumns>,
    /// chrono strftime pattern, `rfc3339`, or `unix` (epoch seconds).
    /// Required unless a layout implies it.
    #[serde(default)]
    pub time_format: Option<String>,
    /// Zone of times without offset: an IANA name, a fixed offset
    /// (`UTC+01:00`, `GMT-05:00`, `+0530`), or `in_header` (the offset written
    /// in the time column's header). Default: the header's offset when it
    /// has one, else `[study].timezone`.
    #[serde(default)]
    pub timezone: Option<String>,
    /// Column with the sensor id (exclusive with `sensor_from`).
    #[serde(default)]
    pub sensor: Option<String>,
    /// `"file_stem"`: the file name without extension is the sensor id.
    #[serde(default)]
    pub sensor_from: Option<String>,
    /// Preamble lines before the header. Default 0.
    #[serde(default)]
    pub skip_lines: Option<usize>,
    /// Non-data lines between the header and the first data row (a units
    /// line, a line of processing codes). Default 0, or what the layout
    /// implies.
    #[serde(default)]
    pub lines_after_header: Option<usize>,
    /// The sheet of a workbook (`.xlsx`, `.ods`...) to read; default the
    /// only sheet. Ignored for text files.
    #[serde(default)]
    pub sheet: Option<String>,
    /// Which columns hold which channel, in which unit (with a layout, the
    /// channels not named are found by their header words).
    #[serde(default)]
    pub columns: LogColumns,
}

/// `time` of `[[logs]]`: one column, or a date column and a time column.
#[derive(Debug, Clone, Deserialize, PartialEq, Eq)]
#[serde(untagged)]
pub enum TimeColumns {
    /// One column holds date and time.
    One(String),
    /// `[date, time]`: two columns (checked to be exactly two).
    Split(Vec<String>),
}

impl TimeColumns {
    /// The column names, in order.
    pub fn names(&self) -> Vec<&str> {
        match self {
            TimeColumns::One(c) => vec![c.as_str()],
            TimeColumns::Split(v) => v.iter().map(String::as_str).collect(),
        }
    }
}

/// `[logs.columns]`.
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct LogColumns {
    /// Air temperature; units `degC`, `degF`, `K`.
    #[serde(default)]
    pub temperature: Option<ChannelColumn>,
    /// Relative humidity; units `percent`, `fraction`.
    #[serde(default)]
    pub humidity: Option<ChannelColumn>,
    /// Light; units `umol_m2_s`, `lux_sunlight`, `lux_white_led`, `lux_hps`,
    /// `w_m2_shortwave`.
    #[serde(default)]
    pub light: Option<ChannelColumn>,
}

/// `{ column = "...", unit = "..." }`.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ChannelColumn {
    /// Column name in the export.
    pub column: String,
    /// Unit name (see [`LogColumns`]).
    pub unit: String,
}

/// `[[openings]]`: a door, vent, window or pad as a segment on the floor plan.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Opening {
    /// A name made of letters, digits and `_`; the distance covariate is
    /// called `distance_<name>`.
    pub name: String,
    /// One end, `[x, y]` in metres.
    pub from: [f64; 2],
    /// The other end, `[x, y]` in metres.
    pub to: [f64; 2],
}

/// A parsed study file.
#[derive(Debug, Clone)]
pub struct Study {
    /// The study file as given.
    pub path: PathBuf,
    /// Its folder; relative paths resolve against it.
    pub dir: PathBuf,
    /// The file's text, from which later stages parse their sections.
    pub source: String,
    /// The sections owned by the input stage.
    pub spec: StudySpec,
    /// The parsed time zone of `[study].timezone`.
    pub timezone: chrono_tz::Tz,
}

impl Study {
    /// Read and validate a study file.
    pub fn load(path: &Path) -> Result<Study> {
        let source = std::fs::read_to_string(path)
            .map_err(|source| IoError::Read { path: path.to_path_buf(), reason: source })?;
        Study::from_source(path, source)
    }

    /// Parse a study file from text; `path` is used for messages and to
    /// resolve relative paths.
    pub fn from_source(path: &Path, source: String) -> Result<Study> {
        let spec: StudySpec = toml::from_str(&source).map_err(|e| toml_error(path, &source, &e))?;
        let dir = path
            .parent()
            .map(|p| if p.as_os_str().is_empty() { Path::new(".") } else { p })
            .unwrap_or(Path::new("."))
            .to_path_buf();
        let timezone = parse_timezone(path, "study.timezone", &spec.study.timezone)?;
        let study = Study { path: path.to_path_buf(), dir, source, spec, timezone };
        study.validate()?;
        Ok(study)
    }

    /// Resolve a path written in the study file.
    pub fn resolve(&self, rel: &str) -> PathBuf {
        let p = Path::new(rel);
        if p.is_absolute() { p.to_path_buf() } else { self.dir.join(p) }
    }

    /// The output folder.
    pub fn output_dir(&self) -> PathBuf {
        self.resolve(&self.spec.study.output)
    }

    /// The seed of every random step (default 1).
    pub fn seed(&self) -> u64 {
        self.spec.study.seed.unwrap_or(1)
    }

    /// Parse a section owned by a later stage. `T` is a document type whose
    /// fields are the top-level keys that stage owns (other keys are ignored at
    /// this level, so `T` must not deny unknown fields itself; its nested
    /// section types should). Errors carry the study file, line and column.
    pub fn section<T: DeserializeOwned>(&self) -> Result<T> {
        toml::from_str(&self.source).map_err(|e| toml_error(&self.path, &self.source, &e))
    }

    /// An [`IoError::Invalid`] about key `key` of this study file.
    pub fn invalid(&self, key: &str, message: impl Into<String>, hint: Option<String>) -> IoError {
        IoError::Invalid { path: self.path.clone(), key: key.to_string(), message: message.into(), hint }
    }

    /// An error about the string `value` of key `key` in section `section`
    /// (`"model"`), located at the value's line and column in the study file
    /// when the text shows it there (first quoted occurrence inside the
    /// section); otherwise an [`IoError::Invalid`] naming the key.
    pub fn invalid_value(
        &self,
        section: &str,
        key: &str,
        value: &str,
        message: impl Into<String>,
        hint: Option<String>,
    ) -> IoError {
        let message = message.into();
        match self.locate_value(section, value) {
            Some((line, column)) => IoError::Toml {
                path: self.path.clone(),
                line,
                column,
                message: format!(
                    "`{key}`: {message}{}",
                    hint.map(|h| format!(" (hint: {h})")).unwrap_or_default()
                ),
            },
            None => self.invalid(key, message, hint),
        }
    }

    /// 1-based line and column of the first `"value"` (or `'value'`) inside
    /// the table `[section]` of the source text.
    fn locate_value(&self, section: &str, value: &str) -> Option<(usize, usize)> {
        let header = format!("[{section}]");
        let mut offset = 0;
        let mut inside = false;
        for line in self.source.split_inclusive('\n') {
            let t = line.trim();
            if t.starts_with('[') {
                inside = t.starts_with(&header);
            } else if inside {
                let code = line.split('#').next().unwrap_or("");
                for q in ['"', '\''] {
                    if let Some(p) = code.find(&format!("{q}{value}{q}")) {
                        return Some(line_col(&self.source, offset + p));
                    }
                }
            }
            offset += line.len();
        }
        None
    }

    fn validate(&self) -> Result<()> {
        let s = &self.spec;
        if s.study.output.trim().is_empty() {
            return Err(self.invalid("study.output", "must name a folder", None));
        }
        if let Some(c) = s.compartment
            && !(c.length.is_finite() && c.length > 0.0 && c.width.is_finite() && c.width > 0.0)
        {
            return Err(self.invalid(
                "compartment",
                format!("length and width must be positive metres, got {} x {}", c.length, c.width),
                None,
            ));
        }
        s.qc.check().map_err(|(key, m)| self.invalid(&key, m, None))?;
        let p = &s.pots;
        match (&p.x, &p.y, &p.grid) {
            (Some(_), Some(_), None) | (None, None, Some(_)) => {}
            (_, _, Some(_)) => {
                return Err(self.invalid(
                    "pots",
                    "give either the columns `x` and `y` or a `[pots.grid]` layout, not both",
                    None,
                ));
            }
            _ => {
                return Err(self.invalid(
                    "pots",
                    "pot positions are missing",
                    Some("set `x` and `y` (column names, metres) or add a `[pots.grid]` table".into()),
                ));
            }
        }
        if p.lattice_row.is_some() != p.lattice_column.is_some() {
            return Err(self.invalid(
                if p.lattice_row.is_some() { "pots.lattice_column" } else { "pots.lattice_row" },
                "is missing: the lattice of the rows x columns model needs both a row and a column",
                Some("name both columns, e.g. lattice_row = \"row\" and lattice_column = \"slot\", or neither (then rows and columns come from the positions)".into()),
            ));
        }
        if p.slots.is_some() && p.moves.is_none() {
            return Err(self.invalid(
                "pots.slots",
                "a slot table without a move table: slots only name the places of moves",
                Some("add `moves = \"moves.csv\"` to [pots], or remove `slots`".into()),
            ));
        }
        if let Some(g) = &p.grid {
            for (k, v) in
                [("bench_pitch", g.bench_pitch), ("row_pitch", g.row_pitch), ("slot_pitch", g.slot_pitch)]
            {
                if !(v.is_finite() && v >= 0.0) {
                    return Err(self.invalid(
                        &format!("pots.grid.{k}"),
                        format!("must be a non-negative number of metres, got {v}"),
                        None,
                    ));
                }
            }
        }
        for (i, log) in s.logs.iter().enumerate() {
            let key = |k: &str| format!("logs[{}].{k}", i + 1);
            if log.files.is_empty() {
                return Err(self.invalid(&key("files"), "needs at least one glob pattern", None));
            }
            let layout = match &log.layout {
                Some(l) => Some(super::layouts::Layout::parse(l).ok_or_else(|| {
                    self.invalid(
                        &key("layout"),
                        format!("unknown layout `{l}`"),
                        Some(format!("the layouts are {}", super::layouts::Layout::names().join(", "))),
                    )
                })?),
                None => None,
            };
            if layout.is_none() {
                for (k, missing) in [("time", log.time.is_none()), ("time_format", log.time_format.is_none())]
                {
                    if missing {
                        return Err(self.invalid(
                            &key(k),
                            "is required (no `layout` implies it)",
                            Some(format!(
                                "name `{k}`, or a `layout` ({})",
                                super::layouts::Layout::names().join(", ")
                            )),
                        ));
                    }
                }
            }
            match (&log.sensor, &log.sensor_from) {
                (Some(_), None) => {}
                (None, None) if layout.is_some() => {}
                (None, Some(f)) if f == "file_stem" => {}
                (None, Some(f)) => {
                    return Err(self.invalid(
                        &key("sensor_from"),
                        format!("unknown value `{f}`"),
                        Some("the only value is \"file_stem\"".into()),
                    ));
                }
                (Some(_), Some(_)) => {
                    return Err(self.invalid(
                        &key("sensor"),
                        "give `sensor` or `sensor_from`, not both",
                        None,
                    ));
                }
                (None, None) => {
                    return Err(self.invalid(
                        &key("sensor"),
                        "no sensor id",
                        Some("name the sensor-id column with `sensor = \"...\"` or set `sensor_from = \"file_stem\"`".into()),
                    ));
                }
            }
            if let Some(tz) = &log.timezone {
                parse_log_zone(&self.path, &key("timezone"), tz)?;
            }
            if let Some(TimeColumns::Split(v)) = &log.time
                && v.len() != 2
            {
                return Err(self.invalid(
                    &key("time"),
                    format!("names {} columns; give one column, or two: [date, time of day]", v.len()),
                    Some(
                        "e.g. `time = [\"Date\", \"Time\"]` with `time_format = \"%d/%m/%Y %H:%M:%S\"`"
                            .into(),
                    ),
                ));
            }
            if let Some(d) = &log.decimal
                && d != "."
                && d != ","
            {
                return Err(self.invalid(
                    &key("decimal"),
                    format!("must be \".\" or \",\", got {d:?}"),
                    None,
                ));
            }
            if let Some(d) = &log.delimiter {
                delimiter_byte(d).map_err(|m| self.invalid(&key("delimiter"), m, None))?;
            }
            if layout.is_none()
                && log.columns.temperature.is_none()
                && log.columns.humidity.is_none()
                && log.columns.light.is_none()
            {
                return Err(self.invalid(
                    &key("columns"),
                    "maps no channel",
                    Some("add at least one of temperature, humidity, light".into()),
                ));
            }
        }
        if !s.logs.is_empty() && s.sensors.is_none() {
            return Err(self.invalid(
                "sensors",
                "logger exports are listed but there is no [sensors] table",
                Some("add [sensors] with file, id, x and y".into()),
            ));
        }
        let mut seen = std::collections::BTreeSet::new();
        for (i, o) in s.openings.iter().enumerate() {
            let key = format!("openings[{}].name", i + 1);
            if o.name.is_empty() || !o.name.chars().all(|c| c.is_ascii_alphanumeric() || c == '_') {
                return Err(self.invalid(
                    &key,
                    format!("`{}` must be letters, digits and `_`", o.name),
                    None,
                ));
            }
            if !seen.insert(o.name.clone()) {
                return Err(self.invalid(&key, format!("`{}` is used twice", o.name), None));
            }
            if !o.from.iter().chain(o.to.iter()).all(|v| v.is_finite()) {
                return Err(self.invalid(
                    &format!("openings[{}]", i + 1),
                    "coordinates must be finite numbers",
                    None,
                ));
            }
        }
        Ok(())
    }
}

#[path = "study_values.rs"]
mod values;
pub use values::{
    LogZone, delimiter_byte, fixed_offset, line_col, parse_log_zone, parse_timezone, toml_error,
};

#[cfg(test)]
mod tests {
    use super::*;

    const MINIMAL: &str = r#"
[study]
title = "t"
timezone = "Europe/Amsterdam"
output = "out"

[pots]
file = "pots.csv"
id = "pot"
x = "x"
y = "y"
"#;

    fn parse(s: &str) -> Result<Study> {
        Study::from_source(Path::new("dir/study.toml"), s.to_string())
    }

    #[test]
    fn minimal_study_parses_and_resolves_paths() {
        let st = parse(MINIMAL).unwrap();
        assert_eq!(st.resolve("pots.csv"), Path::new("dir/pots.csv"));
        assert_eq!(st.timezone, chrono_tz::Europe::Amsterdam);
        assert_eq!(st.seed(), 1);
    }

    #[test]
    fn unknown_key_names_key_file_line_and_column() {
        let bad = MINIMAL.replace("id = \"pot\"", "id = \"pot\"\nidd = 3");
        let e = parse(&bad).unwrap_err().to_string();
        assert!(e.starts_with("dir/study.toml:10:1:"), "{e}");
        assert!(e.contains("idd"), "{e}");
    }

    #[test]
    fn unknown_top_level_section_is_rejected() {
        let e = parse(&format!("{MINIMAL}\n[modle]\ntrait = \"h\"\n")).unwrap_err().to_string();
        assert!(e.contains("modle"), "{e}");
    }

    #[test]
    fn toml_syntax_error_has_line_and_column() {
        let e = parse("[study]\ntitle = \"t\ntimezone = 1\n").unwrap_err();
        match e {
            IoError::Toml { line, .. } => assert_eq!(line, 2),
            other => panic!("{other}"),
        }
    }

    #[test]
    fn misspelt_timezone_gets_suggestion() {
        let e = parse(&MINIMAL.replace("Europe/Amsterdam", "Europe/Amsterdm")).unwrap_err().to_string();
        assert!(e.contains("Europe/Amsterdam"), "{e}");
    }

    #[test]
    fn later_stage_sections_parse_through_section() {
        #[derive(Deserialize)]
        struct Doc {
            model: Option<M>,
        }
        #[derive(Deserialize)]
        #[serde(deny_unknown_fields)]
        struct M {
            #[allow(dead_code)]
            r#trait: String,
        }
        let st = parse(&format!("{MINIMAL}\n[model]\ntrait = \"h\"\n")).unwrap();
        assert!(st.section::<Doc>().unwrap().model.is_some());
        let st = parse(&format!("{MINIMAL}\n[model]\ntrat = \"h\"\n")).unwrap();
        let e = st.section::<Doc>().err().unwrap().to_string();
        assert!(e.contains("dir/study.toml:14:1") && e.contains("trat"), "{e}");
    }

    #[test]
    fn positions_must_be_columns_or_grid() {
        let e = parse(&MINIMAL.replace("x = \"x\"\n", "")).unwrap_err().to_string();
        assert!(e.contains("pots"), "{e}");
    }

    #[test]
    fn invalid_value_points_at_the_value_in_its_section() {
        let st = parse(&format!("{MINIMAL}\n[model]\ntrait = \"h\"\ndrivers = [\"cold\", \"x\"]\n")).unwrap();
        // `"x"` also appears in [pots] (line 10); inside [model] it is on line 15, column 20.
        let e = st.invalid_value("model", "model.drivers", "x", "no such driver", None).to_string();
        assert!(e.starts_with("dir/study.toml:15:20:"), "{e}");
        let e = st.invalid_value("model", "model.drivers", "nowhere", "no such driver", None).to_string();
        assert!(e.starts_with("dir/study.toml: `model.drivers`"), "{e}");
    }

    #[test]
    fn fixed_offsets_are_read_with_sign_hours_and_minutes() {
        for (t, want) in [
            ("UTC+01:00", Some(3600)),
            ("GMT-5", Some(-18000)),
            ("+0530", Some(19800)),
            ("UTC -03:30", Some(-12600)),
            ("+14:00", Some(50400)),
            ("UTC", None),
            ("Europe/Amsterdam", None),
            ("+1:5x", None),
            ("+16:00", None),
            ("+01:60", None),
        ] {
            assert_eq!(fixed_offset(t), want, "{t}");
        }
        assert_eq!(parse_log_zone(Path::new("s.toml"), "k", "in_header").unwrap(), LogZone::InHeader);
        assert_eq!(parse_log_zone(Path::new("s.toml"), "k", "GMT+02:00").unwrap(), LogZone::Fixed(7200));
        assert!(parse_log_zone(Path::new("s.toml"), "k", "Europe/Amsterdm").is_err());
    }

    #[test]
    fn line_col_counts_from_one() {
        assert_eq!(line_col("ab\ncd", 0), (1, 1));
        assert_eq!(line_col("ab\ncd", 4), (2, 2));
    }
}
