//! The validated covariate settings, as `study::resolve` builds them from `[covariates]`.
//!
//! Values of these types exist only after validation: names are unique column-safe
//! identifiers, seasons cover every day exactly once, raster files exist, the animal
//! table has been read and its ids are unique, and every standardised column exists.

use std::collections::BTreeMap;
use std::path::PathBuf;

use crate::geo::focal::{ClassGroup, Window};
use crate::geo::sun::DielThresholds;

/// Which local hour feeds the cyclic time-of-day terms.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum HourKind {
    /// Wall-clock hour in the study's time zone (`fixes.timezone`).
    Clock,
    /// Local apparent solar time at the step's longitude (12 = solar noon).
    Solar,
}

impl HourKind {
    /// The column the cyclic terms are computed from.
    pub fn column(self) -> &'static str {
        match self {
            HourKind::Clock => "local_hour",
            HourKind::Solar => "solar_hour",
        }
    }
}

/// Number of days in the leap-year calendar that season tables are defined on.
pub(crate) const CALENDAR_DAYS: usize = 366;

/// Index (0-based) of month/day in a leap-year calendar, so 02-29 has its own slot.
pub(crate) fn calendar_index(month: u32, day: u32) -> Option<usize> {
    chrono::NaiveDate::from_ymd_opt(2000, month, day).map(|d| {
        use chrono::Datelike;
        d.ordinal0() as usize
    })
}

/// How steps get a season label.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
#[serde(tag = "kind", rename_all = "lowercase")]
pub enum Seasons {
    /// Meteorological seasons of whole months (Dec–Feb, Mar–May, Jun–Aug, Sep–Nov),
    /// labelled by hemisphere from the sign of the step's latitude: north (latitude
    /// ≥ 0) winter, spring, summer, autumn; south the same months summer, autumn,
    /// winter, spring.
    Meteorological,
    /// Study-defined date ranges, applied literally in both hemispheres.
    Custom(SeasonTable),
}

/// Study-defined seasons: a label for every day of a leap-year calendar.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct SeasonTable {
    /// Season names in the order the study file lists them.
    pub names: Vec<String>,
    /// Index into `names` for each day (0 = January 1st, 59 = February 29th).
    #[serde(skip)]
    pub(crate) by_day: Vec<u8>,
}

impl SeasonTable {
    /// The season of a month/day, `None` for an impossible date.
    pub fn season_of(&self, month: u32, day: u32) -> Option<&str> {
        calendar_index(month, day).map(|i| self.names[self.by_day[i] as usize].as_str())
    }
}

/// What a raster contributes.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
#[serde(tag = "kind", rename_all = "lowercase")]
pub enum RasterKind {
    /// Integer class codes: the proportion of each group within a window.
    Classes {
        /// Window radius (circle) or half-width (square), metres.
        radius_m: f64,
        /// Window shape.
        #[serde(serialize_with = "serialize_window")]
        window: Window,
        /// Groups in the order the study file lists them.
        #[serde(serialize_with = "serialize_groups")]
        groups: Vec<ClassGroup>,
    },
    /// A continuous quantity, interpolated bilinearly and multiplied by `scale`.
    Value {
        /// Unit of the scaled value, as the study file gives it.
        unit: String,
        /// Factor applied to the stored values.
        scale: f64,
        /// Human-readable description for the column dictionary.
        label: Option<String>,
    },
}

fn serialize_window<S: serde::Serializer>(w: &Window, s: S) -> Result<S::Ok, S::Error> {
    s.serialize_str(window_name(*w))
}

fn serialize_groups<S: serde::Serializer>(g: &[ClassGroup], s: S) -> Result<S::Ok, S::Error> {
    use serde::ser::SerializeMap;
    let mut m = s.serialize_map(Some(g.len()))?;
    for group in g {
        m.serialize_entry(&group.name, &group.codes)?;
    }
    m.end()
}

/// The study-file word for a window shape.
pub fn window_name(w: Window) -> &'static str {
    match w {
        Window::Circle => "circle",
        Window::Square => "square",
    }
}

/// One raster layer.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct RasterLayer {
    /// Layer name: the value column, or the prefix of the proportion columns.
    pub name: String,
    /// The file as the study file names it (recorded as the columns' source).
    pub file: String,
    /// The GeoTIFF (resolved against the study file's folder).
    pub path: PathBuf,
    /// Classes or value.
    pub kind: RasterKind,
}

impl RasterLayer {
    /// Output columns this layer adds, in order.
    pub fn columns(&self) -> Vec<String> {
        match &self.kind {
            RasterKind::Classes { groups, .. } => groups
                .iter()
                .map(|g| format!("{}_{}", self.name, g.name))
                .chain([format!("{}_nodata_fraction", self.name)])
                .collect(),
            RasterKind::Value { .. } => vec![self.name.clone()],
        }
    }

    /// Columns eligible for standardisation (proportions and values, not nodata fractions).
    pub fn numeric_covariates(&self) -> Vec<String> {
        match &self.kind {
            RasterKind::Classes { groups, .. } => groups
                .iter()
                .map(|g| format!("{}_{}", self.name, g.name))
                .collect(),
            RasterKind::Value { .. } => vec![self.name.clone()],
        }
    }
}

/// Values of one per-animal attribute, one per row of the animal table.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
#[serde(tag = "type", content = "values", rename_all = "lowercase")]
pub enum AttributeValues {
    /// Every non-empty cell parsed as a number.
    Numeric(Vec<Option<f64>>),
    /// Text (categories such as sex or age class).
    Text(Vec<Option<String>>),
}

/// One attribute column of the animal table.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Attribute {
    /// Column name (also the output column).
    pub name: String,
    /// Values by table row.
    pub values: AttributeValues,
}

/// The per-animal attribute table, read during validation (it is small).
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct AnimalTable {
    /// The CSV file.
    pub path: PathBuf,
    /// Name of the id column.
    pub id_column: String,
    /// Animal ids by table row (unique).
    pub ids: Vec<String>,
    /// The requested attribute columns.
    pub attributes: Vec<Attribute>,
}

impl AnimalTable {
    /// Table row of each id.
    pub(crate) fn index(&self) -> BTreeMap<&str, usize> {
        self.ids
            .iter()
            .enumerate()
            .map(|(i, s)| (s.as_str(), i))
            .collect()
    }
}

/// Everything `covariates::annotate` needs besides the steps and the time zone.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct CovariateConfig {
    /// Hour feeding the cyclic terms.
    pub hour: HourKind,
    /// Diel thresholds (degrees of geometric sun elevation).
    #[serde(serialize_with = "serialize_thresholds")]
    pub thresholds: DielThresholds,
    /// Season labelling.
    pub seasons: Seasons,
    /// Raster layers in study-file order.
    pub rasters: Vec<RasterLayer>,
    /// Per-animal attributes, if any.
    pub animals: Option<AnimalTable>,
    /// Columns to standardise, in output order.
    pub standardise: Vec<String>,
}

fn serialize_thresholds<S: serde::Serializer>(t: &DielThresholds, s: S) -> Result<S::Ok, S::Error> {
    use serde::ser::SerializeMap;
    let mut m = s.serialize_map(Some(4))?;
    m.serialize_entry("day", &t.day())?;
    m.serialize_entry("civil", &t.civil())?;
    m.serialize_entry("nautical", &t.nautical())?;
    m.serialize_entry("astronomical", &t.astronomical())?;
    m.end()
}

impl Default for CovariateConfig {
    /// Sun and calendar terms only: clock hour, default thresholds, meteorological seasons.
    fn default() -> Self {
        CovariateConfig {
            hour: HourKind::Clock,
            thresholds: DielThresholds::default(),
            seasons: Seasons::Meteorological,
            rasters: Vec::new(),
            animals: None,
            standardise: Vec::new(),
        }
    }
}

/// Sun and calendar columns every annotated step table carries, in output order.
pub const SUN_CALENDAR_COLUMNS: [&str; 9] = [
    "sun_elevation_deg",
    "sun_azimuth_deg",
    "diel_phase",
    "local_hour",
    "solar_hour",
    "hour_cos",
    "hour_sin",
    "day_of_year",
    "season",
];

/// Columns of the step table before covariates (see `tracks::metrics`).
pub const STEP_COLUMNS: [&str; 10] = [
    "animal",
    "segment",
    "time_utc",
    "lon",
    "lat",
    "step_m",
    "bearing_deg",
    "turn_rad",
    "dt_s",
    "class",
];
