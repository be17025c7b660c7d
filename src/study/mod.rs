//! The study file: what to read, how to read it, and how to clean it.
//!
//! Configuration is built in two stages. [`raw`] holds the serde structs exactly as the
//! TOML says (no I/O, no checks). [`Study::load`] then reads the file and runs one
//! `resolve` step that checks every path, every column name against the input files'
//! headers, every unit and every enumerated choice, and yields the validated [`Study`].
//! Nothing downstream re-validates: a `Study` value is proof that the settings are usable.
//!
//! Paths in the study file are relative to the folder that holds it. The `[covariates]`
//! section is checked in its own file (`covariates.rs`) by the same `resolve` step.

mod covariates;
pub mod model;
mod raw;
pub mod report;
pub(crate) mod units;

use std::fmt;
use std::fs;
use std::path::{Path, PathBuf};

use chrono_tz::Tz;

use crate::covariates::CovariateConfig;
use crate::tracks::class::LocClass;

/// The commented template that `cairn init` writes; also the reference for every key.
pub const TEMPLATE: &str = include_str!("../../templates/study.toml");

/// Problems with the study file. Every message names the file and the key or column.
#[derive(Debug, thiserror::Error)]
pub enum StudyError {
    #[error("cannot read study file {path}: {source}")]
    Read {
        path: PathBuf,
        source: std::io::Error,
    },
    #[error("study file {path} is not valid: {message}")]
    Syntax { path: PathBuf, message: String },
    #[error("study key `{key}` = {value:?}: {reason}")]
    Quantity {
        key: String,
        value: String,
        reason: String,
    },
    #[error("study key `{key}`: {reason}")]
    Invalid { key: String, reason: String },
    #[error("input file {path} (listed in `fixes.files`) does not exist")]
    MissingInput { path: PathBuf },
    #[error(
        "input file {path}: unsupported extension; use .csv, .tsv, .txt (delimited text) or .parquet"
    )]
    UnknownFormat { path: PathBuf },
    #[error("input file {path}: cannot read its header: {reason}")]
    Header { path: PathBuf, reason: String },
    #[error(
        "input file {path}: column `{column}` (study key `fixes.columns.{key}`) is missing; \
         the file has columns: {found}{hint}"
    )]
    MissingColumn {
        path: PathBuf,
        column: String,
        key: String,
        found: String,
        hint: String,
    },
}

/// How an input file is stored.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum FileFormat {
    /// Delimited text with a header row.
    Csv,
    /// Apache Parquet.
    Parquet,
}

/// One validated input file.
#[derive(Debug, Clone, serde::Serialize)]
pub struct InputFile {
    /// Absolute or study-relative path as resolved.
    pub path: PathBuf,
    /// Storage format, from the extension.
    pub format: FileFormat,
    /// Column names as the file's header gives them (a UTF-8 byte-order mark removed).
    pub header: Vec<String>,
}

/// Where each field of a fix comes from in the input files.
#[derive(Debug, Clone, serde::Serialize)]
pub struct ColumnMap {
    pub animal: String,
    pub time: String,
    pub lon: String,
    pub lat: String,
    pub class: Option<String>,
    pub tag: Option<String>,
    pub ellipse_major: Option<String>,
    pub ellipse_minor: Option<String>,
    pub ellipse_orientation: Option<String>,
}

impl ColumnMap {
    /// `(study key, column name)` for every mapped column, in log order.
    pub fn mapped(&self) -> Vec<(&'static str, &str)> {
        let mut v = vec![
            ("animal", self.animal.as_str()),
            ("time", self.time.as_str()),
            ("lon", self.lon.as_str()),
            ("lat", self.lat.as_str()),
        ];
        let optional = [
            ("class", &self.class),
            ("tag", &self.tag),
            ("ellipse_major", &self.ellipse_major),
            ("ellipse_minor", &self.ellipse_minor),
            ("ellipse_orientation", &self.ellipse_orientation),
        ];
        for (key, col) in optional {
            if let Some(c) = col {
                v.push((key, c.as_str()));
            }
        }
        v
    }
}

/// Which outlier filter runs on each track after duplicates are resolved.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
#[serde(tag = "kind", rename_all = "kebab-case")]
pub enum SpeedFilter {
    /// Keep every valid fix.
    None,
    /// Drop fixes reachable only faster than `max_speed` from both neighbours.
    MaxSpeed { max_speed: f64 },
    /// Speed–distance–angle filter (Freitas et al. 2008).
    SpeedDistanceAngle {
        max_speed: f64,
        /// Spike distance limits, metres (first, second).
        distances: [f64; 2],
        /// Spike angle limits, degrees (first, second).
        angles: [f64; 2],
    },
}

impl fmt::Display for SpeedFilter {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            SpeedFilter::None => write!(f, "none"),
            SpeedFilter::MaxSpeed { max_speed } => write!(f, "max-speed ({max_speed:.3} m/s)"),
            SpeedFilter::SpeedDistanceAngle {
                max_speed,
                distances,
                angles,
            } => write!(
                f,
                "speed-distance-angle ({max_speed:.3} m/s; spikes {:.0} m/{:.0}°, {:.0} m/{:.0}°)",
                distances[0], angles[0], distances[1], angles[1]
            ),
        }
    }
}

/// The validated study: every path exists, every column is in every input file, every
/// quantity has a unit and a sane value.
#[derive(Debug, Clone, serde::Serialize)]
pub struct Study {
    name: String,
    source: PathBuf,
    output: PathBuf,
    inputs: Vec<InputFile>,
    columns: ColumnMap,
    delimiter: u8,
    #[serde(serialize_with = "serialize_tz")]
    timezone: Tz,
    time_format: Option<String>,
    default_class: LocClass,
    speed_filter: SpeedFilter,
    gap_s: f64,
    #[serde(skip)]
    grid: Option<crate::tracks::regular::RegularConfig>,
    grid_settings: Option<crate::tracks::regular::RegularSettings>,
    model: Option<model::ModelSettings>,
    write_csv: bool,
    covariates: CovariateConfig,
    report: report::ReportSettings,
}

fn serialize_tz<S: serde::Serializer>(tz: &Tz, s: S) -> Result<S::Ok, S::Error> {
    s.serialize_str(tz.name())
}

impl Study {
    /// Reads and validates a study file.
    ///
    /// # Errors
    /// [`StudyError`] naming the file and the key, input file or column at fault.
    pub fn load(path: &Path) -> Result<Study, StudyError> {
        let text = fs::read_to_string(path).map_err(|source| StudyError::Read {
            path: path.to_path_buf(),
            source,
        })?;
        let raw: raw::RawStudy = toml::from_str(&text).map_err(|e| StudyError::Syntax {
            path: path.to_path_buf(),
            message: e.to_string(),
        })?;
        let root = path.parent().map(Path::to_path_buf).unwrap_or_default();
        resolve(raw, path, &root)
    }

    /// The study's name, used in outputs.
    pub fn name(&self) -> &str {
        &self.name
    }
    /// The study file this was read from.
    pub fn source(&self) -> &Path {
        &self.source
    }
    /// Output folder (created on demand).
    pub fn output(&self) -> &Path {
        &self.output
    }
    /// Input files, in the order listed.
    pub fn inputs(&self) -> &[InputFile] {
        &self.inputs
    }
    /// The column mapping.
    pub fn columns(&self) -> &ColumnMap {
        &self.columns
    }
    /// Field delimiter of delimited-text inputs.
    pub fn delimiter(&self) -> u8 {
        self.delimiter
    }
    /// Zone in which timestamps without an offset are read.
    pub fn timezone(&self) -> Tz {
        self.timezone
    }
    /// A chrono format string for timestamps, when the data are not ISO 8601.
    pub fn time_format(&self) -> Option<&str> {
        self.time_format.as_deref()
    }
    /// Class given to fixes when the data carry no location class or tag type.
    pub fn default_class(&self) -> LocClass {
        self.default_class
    }
    /// The outlier filter.
    pub fn speed_filter(&self) -> SpeedFilter {
        self.speed_filter
    }
    /// Longest interval (seconds) between fixes that still joins them in one segment.
    pub fn gap_s(&self) -> f64 {
        self.gap_s
    }
    /// Smoothing onto a regular time grid, when `[grid]` is given.
    pub fn grid(&self) -> Option<&crate::tracks::regular::RegularConfig> {
        self.grid.as_ref()
    }
    /// The models to fit, when `[model]` is given.
    pub fn model(&self) -> Option<&model::ModelSettings> {
        self.model.as_ref()
    }
    /// Whether tables are also written as CSV.
    pub fn write_csv(&self) -> bool {
        self.write_csv
    }
    /// The validated `[covariates]` section (sun and calendar defaults when absent).
    pub fn covariates(&self) -> &CovariateConfig {
        &self.covariates
    }
    /// The validated `[report]` section (defaults when absent).
    pub fn report(&self) -> &report::ReportSettings {
        &self.report
    }
}

pub(crate) fn invalid(key: &str, reason: impl Into<String>) -> StudyError {
    StudyError::Invalid {
        key: key.to_string(),
        reason: reason.into(),
    }
}

fn resolve(raw: raw::RawStudy, source: &Path, root: &Path) -> Result<Study, StudyError> {
    let name = raw.study.name.trim().to_string();
    if name.is_empty() {
        return Err(invalid("study.name", "give the study a name"));
    }
    if raw.study.output.trim().is_empty() {
        return Err(invalid("study.output", "give an output folder"));
    }
    let output = root.join(raw.study.output.trim());

    let timezone: Tz = raw.fixes.timezone.parse().map_err(|_| {
        invalid(
            "fixes.timezone",
            format!(
                "unknown time zone {:?}; use an IANA name such as \"UTC\" or \"Europe/Oslo\"",
                raw.fixes.timezone
            ),
        )
    })?;
    let time_format = match raw.fixes.time_format {
        Some(f) => {
            check_time_format(&f)?;
            Some(f)
        }
        None => None,
    };
    let default_class = match raw.fixes.default_class.as_deref() {
        None => LocClass::Gps,
        Some(s) => match LocClass::parse(s) {
            Some(c) if c.is_valid() => c,
            _ => {
                return Err(invalid(
                    "fixes.default_class",
                    format!("{s:?} is not a usable location class (GPS, FGPS, 3, 2, 1, 0, A, B)"),
                ));
            }
        },
    };

    let c = raw.fixes.columns;
    let columns = ColumnMap {
        animal: c.animal,
        time: c.time,
        lon: c.lon,
        lat: c.lat,
        class: c.class,
        tag: c.tag,
        ellipse_major: c.ellipse_major,
        ellipse_minor: c.ellipse_minor,
        ellipse_orientation: c.ellipse_orientation,
    };
    let ellipse_given = [
        &columns.ellipse_major,
        &columns.ellipse_minor,
        &columns.ellipse_orientation,
    ]
    .iter()
    .filter(|c| c.is_some())
    .count();
    if ellipse_given != 0 && ellipse_given != 3 {
        return Err(invalid(
            "fixes.columns.ellipse_*",
            "give all three error-ellipse columns (ellipse_major, ellipse_minor, ellipse_orientation) or none",
        ));
    }
    for (key, col) in columns.mapped() {
        if col.trim().is_empty() {
            return Err(invalid(
                &format!("fixes.columns.{key}"),
                "empty column name",
            ));
        }
    }

    if raw.fixes.files.is_empty() {
        return Err(invalid("fixes.files", "list at least one input file"));
    }
    let mut inputs = Vec::with_capacity(raw.fixes.files.len());
    let mut delimiter_given = None;
    if let Some(d) = raw.fixes.delimiter.as_deref() {
        delimiter_given = Some(parse_delimiter(d)?);
    }
    let mut delimiter = delimiter_given.unwrap_or(b',');
    for f in &raw.fixes.files {
        let path = root.join(f);
        if !path.is_file() {
            return Err(StudyError::MissingInput { path });
        }
        let ext = path
            .extension()
            .and_then(|e| e.to_str())
            .map(str::to_ascii_lowercase)
            .unwrap_or_default();
        let format = match ext.as_str() {
            "csv" | "txt" => FileFormat::Csv,
            "tsv" => {
                if delimiter_given.is_none() {
                    delimiter = b'\t';
                }
                FileFormat::Csv
            }
            "parquet" | "pq" => FileFormat::Parquet,
            _ => return Err(StudyError::UnknownFormat { path }),
        };
        let header = match format {
            FileFormat::Csv => crate::tracks::ingest::csv_header(&path, delimiter),
            FileFormat::Parquet => crate::tracks::ingest::parquet_header(&path),
        }
        .map_err(|reason| StudyError::Header {
            path: path.clone(),
            reason,
        })?;
        for (key, col) in columns.mapped() {
            if !header.iter().any(|h| h == col) {
                let hint = if header.len() == 1 && format == FileFormat::Csv {
                    let other = [b';', b'\t', b',', b'|']
                        .into_iter()
                        .find(|d| *d != delimiter && header[0].contains(*d as char));
                    match other {
                        Some(d) => format!(
                            " (the header looks {}-delimited: set `fixes.delimiter = {:?}`)",
                            delimiter_name(d),
                            (d as char).to_string()
                        ),
                        None => String::new(),
                    }
                } else {
                    String::new()
                };
                return Err(StudyError::MissingColumn {
                    path: path.clone(),
                    column: col.to_string(),
                    key: key.to_string(),
                    found: header.join(", "),
                    hint,
                });
            }
        }
        inputs.push(InputFile {
            path,
            format,
            header,
        });
    }

    let speed_filter = resolve_filter(&raw.cleaning)?;
    let gap_s = match raw.tracks.gap.as_deref() {
        Some(g) => units::parse_duration("tracks.gap", g)?,
        None => {
            return Err(invalid(
                "tracks.gap",
                "required: the longest interval between fixes that still joins them in one \
                 segment, e.g. \"6 h\"",
            ));
        }
    };

    let grid_settings = match &raw.grid {
        Some(g) => Some(resolve_grid(g, gap_s)?),
        None => None,
    };
    let grid = match &grid_settings {
        Some(g) => Some(g.validate().map_err(|e| invalid("grid", e.to_string()))?),
        None => None,
    };

    let model = raw.model.as_ref().map(model::resolve).transpose()?;
    let covariates = covariates::resolve(raw.covariates, root)?;
    let report = report::resolve(
        raw.report,
        root,
        model
            .as_ref()
            .map(model::ModelSettings::all_labels)
            .as_deref(),
    )?;

    Ok(Study {
        name,
        source: source.to_path_buf(),
        output,
        inputs,
        columns,
        delimiter,
        timezone,
        time_format,
        default_class,
        speed_filter,
        gap_s,
        grid,
        grid_settings,
        model,
        write_csv: raw.output.csv,
        covariates,
        report,
    })
}

fn delimiter_name(d: u8) -> &'static str {
    match d {
        b';' => "semicolon",
        b'\t' => "tab",
        b',' => "comma",
        b'|' => "pipe",
        _ => "otherwise",
    }
}

fn parse_delimiter(d: &str) -> Result<u8, StudyError> {
    match d {
        "\\t" | "\t" | "tab" => Ok(b'\t'),
        s if s.len() == 1 && s.is_ascii() && s != "\"" => Ok(s.as_bytes()[0]),
        _ => Err(invalid(
            "fixes.delimiter",
            format!("{d:?} is not a single ASCII character (use \",\", \";\", \"tab\" or \"|\")"),
        )),
    }
}

fn check_time_format(f: &str) -> Result<(), StudyError> {
    use chrono::format::{Item, StrftimeItems};
    if StrftimeItems::new(f).any(|i| matches!(i, Item::Error)) {
        return Err(invalid(
            "fixes.time_format",
            format!("{f:?} is not a valid chrono/strftime format (e.g. \"%d/%m/%Y %H:%M:%S\")"),
        ));
    }
    Ok(())
}

fn resolve_filter(c: &raw::RawCleaning) -> Result<SpeedFilter, StudyError> {
    let kind = c
        .speed_filter
        .as_deref()
        .unwrap_or(if c.max_speed.is_some() {
            "speed-distance-angle"
        } else {
            "none"
        });
    let max_speed = || -> Result<f64, StudyError> {
        match c.max_speed.as_deref() {
            Some(s) => units::parse_speed("cleaning.max_speed", s),
            None => Err(invalid(
                "cleaning.max_speed",
                format!(
                    "required by speed_filter = {kind:?}: the species' sustained top speed, e.g. \"2 m/s\""
                ),
            )),
        }
    };
    match kind {
        "none" => Ok(SpeedFilter::None),
        "max-speed" => Ok(SpeedFilter::MaxSpeed {
            max_speed: max_speed()?,
        }),
        "speed-distance-angle" => {
            // Defaults 2.5 km / 5 km and 15° / 25° are the spike limits suggested by
            // Freitas et al. (2008) for Argos data (values from memory of the paper).
            let d = match &c.spike_distances {
                Some([a, b]) => [
                    units::parse_distance("cleaning.spike_distances[0]", a)?,
                    units::parse_distance("cleaning.spike_distances[1]", b)?,
                ],
                None => [2500.0, 5000.0],
            };
            let a = match &c.spike_angles {
                Some([x, y]) => [
                    units::parse_angle_deg("cleaning.spike_angles[0]", x)?,
                    units::parse_angle_deg("cleaning.spike_angles[1]", y)?,
                ],
                None => [15.0, 25.0],
            };
            Ok(SpeedFilter::SpeedDistanceAngle {
                max_speed: max_speed()?,
                distances: d,
                angles: a,
            })
        }
        other => Err(invalid(
            "cleaning.speed_filter",
            format!("{other:?} is not one of \"none\", \"max-speed\", \"speed-distance-angle\""),
        )),
    }
}

fn resolve_grid(
    g: &raw::RawGrid,
    gap_s: f64,
) -> Result<crate::tracks::regular::RegularSettings, StudyError> {
    use crate::tracks::regular::{AxisSd, OutlierSettings, RegularSettings};
    let mut s = RegularSettings {
        interval_s: units::parse_duration("grid.interval", &g.interval)?,
        gap_threshold_s: gap_s,
        estimate_error_scale: g.estimate_error_scale,
        ..RegularSettings::default()
    };
    if s.interval_s >= gap_s {
        return Err(invalid(
            "grid.interval",
            "must be shorter than tracks.gap, or no segment could hold two grid points",
        ));
    }
    if let Some(f) = &g.flag_se {
        s.se_flag_m = units::parse_distance("grid.flag_se", f)?;
    }
    match g.outlier_quantile {
        Some(q) if q > 0.5 && q < 1.0 => {
            s.outliers = Some(OutlierSettings {
                quantile: q,
                drop_and_refit: g.drop_outliers,
            });
        }
        Some(q) => {
            return Err(invalid(
                "grid.outlier_quantile",
                format!("{q} is not a probability in (0.5, 1), e.g. 0.999"),
            ));
        }
        None if g.drop_outliers => {
            return Err(invalid(
                "grid.drop_outliers",
                "needs grid.outlier_quantile, the chi-square quantile above which a fix is an outlier",
            ));
        }
        None => {}
    }
    for (code, sd) in &g.class_errors {
        let key = format!("grid.class_errors.{code}");
        // The error table has no entry for Argos Z, so `get_mut` rejects it here.
        let slot = LocClass::parse(code)
            .and_then(|c| s.class_errors.get_mut(c))
            .ok_or_else(|| {
                invalid(
                    &key,
                    "not a usable location class (GPS, FGPS, 3, 2, 1, 0, A, B)",
                )
            })?;
        let axis = match sd {
            raw::RawAxisSd::Both(d) => {
                let v = units::parse_distance(&key, d)?;
                AxisSd { x_m: v, y_m: v }
            }
            raw::RawAxisSd::Axes([x, y]) => AxisSd {
                x_m: units::parse_distance(&key, x)?,
                y_m: units::parse_distance(&key, y)?,
            },
        };
        *slot = axis;
    }
    Ok(s)
}
