//! Annotation of every step with covariates: the sun, the calendar, raster layers and
//! per-animal attributes, with standardised copies kept for back-transformation.
//!
//! Each step is annotated at its start (time and position, see
//! [`crate::tracks::metrics`]). [`annotate`] returns the covariate columns in output
//! order — sun and calendar terms, then raster layers in study-file order, then animal
//! attributes, then `<name>_z` standardised columns — together with a record of every
//! cell left missing and why, and the counts that go into `prepare_summary.json`.
//!
//! How it stays fast on 10^6 steps: the sun's location-free ephemeris runs once per two
//! hours of data ([`crate::geo::sun::annotate_fixes`]); positions are projected once per
//! distinct raster coordinate system and shared by the layers in it; a class layer is
//! summarised once (the raster pre-pass: summed-area tables for a square window, per-row
//! bit planes for a circle) so a window costs four look-ups (square) or one per window
//! row (circle) ([`crate::geo::focal`]); everything per step runs on rayon's pool and lands in input
//! order, so results do not depend on the thread count. Layers are read one at a time
//! and dropped before the next, to bound memory.
//!
//! Missing values are nulls, never guesses: a location outside a raster, on nodata, a
//! class window holding only nodata, or an animal absent from the attribute table each
//! leave the cell empty and add a row to the missing log (written as
//! `covariate_missing.csv`). A layer that covers none of the steps at all is an error
//! naming the file, because it is almost always the wrong file or coordinate system.

pub mod config;
pub mod dictionary;

use std::collections::{BTreeMap, BTreeSet, HashMap};
use std::path::PathBuf;
use std::time::Instant;

use chrono::{DateTime, Datelike, TimeZone, Timelike, Utc};
use chrono_tz::Tz;
use rayon::prelude::*;
use serde::Serialize;

use config::{AttributeValues, RasterKind, RasterLayer, Seasons};
pub use config::{CovariateConfig, HourKind};

use crate::geo::focal::{ClassProportions, FocalError, FocalMiss};
use crate::geo::interp::{Missing, bilinear_many_xy};
use crate::geo::raster::{Raster, RasterData, RasterError};
use crate::geo::sun::{DielPhase, SunError, annotate_fixes};
use crate::tracks::metrics::Steps;

/// Errors that stop annotation. Each names the file or column at fault.
#[derive(Debug, thiserror::Error)]
pub enum CovariateError {
    /// A raster could not be read, is not georeferenced or uses an unsupported CRS.
    #[error("covariate layer `{layer}`: {source}")]
    Raster {
        /// Layer name.
        layer: String,
        /// The reason, naming the file.
        source: RasterError,
    },
    /// A class layer cannot be summarised (e.g. it holds floats).
    #[error("covariate layer `{layer}`: {source}")]
    Classes {
        /// Layer name.
        layer: String,
        /// The reason, naming the file.
        source: FocalError,
    },
    /// Not a single step lies inside the raster.
    #[error(
        "covariate layer `{layer}`: raster {path} covers none of the {steps} step locations \
         (tracks span longitude {lon_min:.4}..{lon_max:.4}, latitude {lat_min:.4}..{lat_max:.4}); \
         check that it is the right file and that its coordinate system is declared correctly"
    )]
    NoOverlap {
        /// Layer name.
        layer: String,
        /// The file.
        path: PathBuf,
        /// Number of steps.
        steps: usize,
        /// Bounding box of the step locations.
        lon_min: f64,
        /// Bounding box of the step locations.
        lon_max: f64,
        /// Bounding box of the step locations.
        lat_min: f64,
        /// Bounding box of the step locations.
        lat_max: f64,
    },
    /// The sun could not be computed for a step.
    #[error("sun position for step of animal {animal}: {source}")]
    Sun {
        /// Animal of the failing step.
        animal: String,
        /// The reason.
        source: SunError,
    },
    /// A column cannot be standardised.
    #[error(
        "cannot standardise `{column}` (study key `covariates.standardise`): {reason}; remove it from the list"
    )]
    Standardise {
        /// Column.
        column: String,
        /// Why.
        reason: String,
    },
}

/// Values of one covariate column; NaN marks a missing float.
#[derive(Debug, Clone, PartialEq)]
pub enum Values {
    /// Floating-point values (NaN = missing).
    Float(Vec<f64>),
    /// Integers (never missing).
    Int(Vec<i32>),
    /// Labels as codes into `levels` (`None` = missing).
    Labels {
        /// Distinct labels.
        levels: Vec<String>,
        /// Code per row.
        codes: Vec<Option<u32>>,
    },
}

impl Values {
    /// The label of row `i` for a label column.
    pub fn label(&self, i: usize) -> Option<&str> {
        match self {
            Values::Labels { levels, codes } => codes[i].map(|c| levels[c as usize].as_str()),
            _ => None,
        }
    }
    /// The value of row `i` for a float column (NaN when missing).
    pub fn float(&self, i: usize) -> Option<f64> {
        match self {
            Values::Float(v) => Some(v[i]),
            Values::Int(v) => Some(f64::from(v[i])),
            Values::Labels { .. } => None,
        }
    }
}

/// One covariate column with its dictionary entry.
#[derive(Debug, Clone, PartialEq)]
pub struct Column {
    /// Column name in `steps.parquet`.
    pub name: String,
    /// The values, one per step.
    pub values: Values,
    /// Unit ("deg", "h", "proportion", the layer's unit, "" for labels).
    pub unit: String,
    /// Where it comes from: a layer or table file, "sun" or "calendar".
    pub source: String,
    /// How it was computed from the source.
    pub transformation: String,
}

/// Why a covariate cell is missing.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum MissingReason {
    /// The step's location is outside the raster's extent.
    OutsideRaster,
    /// A raster cell the value depends on is nodata.
    Nodata,
    /// Every cell of the class window is nodata, so no proportion exists.
    WindowAllNodata,
    /// The position cannot be converted to the raster's coordinate system.
    InvalidCoordinate,
    /// The animal is not in the attribute table.
    AnimalNotInTable,
    /// The animal's cell in the attribute table is empty.
    EmptyAttribute,
}

impl MissingReason {
    /// Stable code used in tables and the summary.
    pub fn code(self) -> &'static str {
        match self {
            MissingReason::OutsideRaster => "outside_raster",
            MissingReason::Nodata => "nodata",
            MissingReason::WindowAllNodata => "window_all_nodata",
            MissingReason::InvalidCoordinate => "invalid_coordinate",
            MissingReason::AnimalNotInTable => "animal_not_in_table",
            MissingReason::EmptyAttribute => "empty_attribute",
        }
    }

    /// A sentence for the missing log, given the column's source file.
    pub fn detail(self, source: &str) -> String {
        match self {
            MissingReason::OutsideRaster => format!("location outside raster {source}"),
            MissingReason::Nodata => format!(
                "nodata in raster {source} at the location (or a neighbouring cell the interpolation needs): off the layer's domain, e.g. on land for a depth layer?"
            ),
            MissingReason::WindowAllNodata => {
                format!("every cell of {source} within the window is nodata")
            }
            MissingReason::InvalidCoordinate => {
                format!("position cannot be converted to the coordinate system of {source}")
            }
            MissingReason::AnimalNotInTable => format!("animal not listed in {source}"),
            MissingReason::EmptyAttribute => format!("the animal's cell in {source} is empty"),
        }
    }
}

/// One missing covariate cell: step row, column index into [`Annotated::columns`], reason.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct MissingCell {
    /// Step row.
    pub row: usize,
    /// Index of the column in [`Annotated::columns`].
    pub column: usize,
    /// Why.
    pub reason: MissingReason,
}

/// Mean and standard deviation used to standardise a column, over the steps' non-missing
/// values (so a per-animal attribute weighs each animal by its number of steps).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Scaling {
    /// The source column (the standardised one is `<column>_z`).
    pub column: String,
    /// Mean of the non-missing values.
    pub mean: f64,
    /// Sample standard deviation (divisor n − 1) of the non-missing values.
    pub sd: f64,
    /// Number of non-missing values.
    pub n: usize,
}

impl Scaling {
    /// Back-transform a standardised value: x = z·sd + mean.
    pub fn back(&self, z: f64) -> f64 {
        z * self.sd + self.mean
    }
}

/// The covariate part of `prepare_summary.json`.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CovariateSummary {
    /// Hour feeding the cyclic terms.
    pub hour: HourKind,
    /// "meteorological (hemisphere by latitude sign)" or "study-defined".
    pub seasons: String,
    /// Covariate columns added to the step table.
    pub columns: Vec<String>,
    /// Missing cells by column, then by reason code.
    pub missing: BTreeMap<String, BTreeMap<String, usize>>,
    /// Per class layer: codes found in the raster (not nodata) that no group lists,
    /// with their cell counts.
    pub unknown_class_codes: BTreeMap<String, BTreeMap<i64, u64>>,
    /// Animals with steps but no row in the attribute table.
    pub animals_without_attributes: Vec<String>,
    /// Ids in the attribute table without any step.
    pub attribute_ids_without_steps: Vec<String>,
    /// Mean and sd of every standardised column.
    pub standardisation: Vec<Scaling>,
}

impl CovariateSummary {
    /// Missing cells in total.
    pub fn missing_total(&self) -> usize {
        self.missing.values().flat_map(|m| m.values()).sum()
    }
}

/// Wall-clock time of each part of [`annotate`], seconds (for benchmarks; not written).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Timings {
    /// Sun position, diel phase, clock and solar hours, season.
    pub sun_calendar_s: f64,
    /// Reading raster files.
    pub raster_read_s: f64,
    /// Projecting positions into raster coordinate systems.
    pub projection_s: f64,
    /// Class-layer pre-pass (window tables and the code census).
    pub raster_prepass_s: f64,
    /// Window counts and bilinear look-ups.
    pub raster_lookup_s: f64,
    /// Attribute join and standardisation.
    pub attributes_standardise_s: f64,
}

/// Covariate columns for a step table.
#[derive(Debug, Clone)]
pub struct Annotated {
    /// Columns in output order, each with one value per step.
    pub columns: Vec<Column>,
    /// Missing cells, sorted by row then column.
    pub missing: Vec<MissingCell>,
    /// Counts for the summary.
    pub summary: CovariateSummary,
    /// How long each part took.
    pub timings: Timings,
}

impl Annotated {
    /// The column called `name`.
    pub fn column(&self, name: &str) -> Option<&Column> {
        self.columns.iter().find(|c| c.name == name)
    }
}

/// Hour of day in [0, 24) of a local time, with fractions of hours.
pub(crate) fn fractional_hour<T: Timelike>(t: &T) -> f64 {
    f64::from(t.hour())
        + f64::from(t.minute()) / 60.0
        + (f64::from(t.second()) + f64::from(t.nanosecond().min(999_999_999)) * 1e-9) / 3600.0
}

/// Meteorological season label for a month, by hemisphere.
///
/// Whole months: December–February, March–May, June–August, September–November.
/// North (latitude ≥ 0): winter, spring, summer, autumn; south (latitude < 0): the same
/// months summer, autumn, winter, spring.
///
/// # Examples
/// ```
/// use cairn::covariates::meteorological_season;
/// assert_eq!(meteorological_season(1, 60.0), "winter");
/// assert_eq!(meteorological_season(1, -33.9), "summer");
/// assert_eq!(meteorological_season(12, 0.0), "winter");
/// ```
pub fn meteorological_season(month: u32, lat: f64) -> &'static str {
    const NORTH: [&str; 4] = ["winter", "spring", "summer", "autumn"];
    const SOUTH: [&str; 4] = ["summer", "autumn", "winter", "spring"];
    let q = (month % 12) as usize / 3; // Dec, Jan, Feb → 0
    if lat < 0.0 { SOUTH[q] } else { NORTH[q] }
}

/// Cyclic encoding of an hour of day: (cos, sin) of 2π·h/24.
///
/// # Examples
/// ```
/// let (c, s) = cairn::covariates::hour_terms(6.0);
/// assert!(c.abs() < 1e-15 && (s - 1.0).abs() < 1e-15);
/// ```
pub fn hour_terms(h: f64) -> (f64, f64) {
    let a = std::f64::consts::TAU * h / 24.0;
    (a.cos(), a.sin())
}

fn labels_from(levels: &[&str], codes: Vec<Option<u32>>) -> Values {
    Values::Labels {
        levels: levels.iter().map(|s| s.to_string()).collect(),
        codes,
    }
}

/// Annotates every step with the configured covariates.
///
/// `tz` is the study's zone (`Study::timezone`): it gives the local clock hour, the day
/// of year and the date that selects the season.
///
/// # Errors
/// [`CovariateError`] when a raster cannot be read or covers no step, a class layer
/// is not categorical, the sun cannot be computed, or a column to standardise has
/// fewer than two values or no spread.
pub fn annotate(steps: &Steps, cfg: &CovariateConfig, tz: Tz) -> Result<Annotated, CovariateError> {
    let n = steps.len();
    let mut timings = Timings::default();
    let mut columns: Vec<Column> = Vec::new();
    let mut missing: Vec<MissingCell> = Vec::new();

    // Sun and calendar.
    let t0 = Instant::now();
    let times: Vec<DateTime<Utc>> = steps
        .time_us
        .par_iter()
        // Step times come from parsed timestamps, so they are always representable;
        // the fallback only keeps this total.
        .map(|&us| Utc.timestamp_micros(us).single().unwrap_or_default())
        .collect();
    let sun = annotate_fixes(&times, &steps.lon, &steps.lat, &cfg.thresholds).map_err(|e| {
        let index = match &e {
            SunError::Location { index, .. } | SunError::Time { index, .. } => *index,
            _ => 0,
        };
        let animal = steps
            .animal
            .get(index)
            .map(|&a| steps.animals[a as usize].clone())
            .unwrap_or_default();
        CovariateError::Sun { animal, source: e }
    })?;
    let season_levels: Vec<String> = match &cfg.seasons {
        Seasons::Meteorological => ["winter", "spring", "summer", "autumn"]
            .iter()
            .map(|s| s.to_string())
            .collect(),
        Seasons::Custom(t) => t.names.clone(),
    };
    // Per step: clock hour, day of year, season code.
    let calendar: Vec<(f64, i32, u32)> = (0..n)
        .into_par_iter()
        .map(|i| {
            let local = times[i].with_timezone(&tz);
            let (month, day) = (local.month(), local.day());
            let season = match &cfg.seasons {
                Seasons::Meteorological => {
                    let s = meteorological_season(month, steps.lat[i]);
                    season_levels.iter().position(|l| l == s).unwrap_or(0) as u32
                }
                Seasons::Custom(t) => config::calendar_index(month, day)
                    .map(|k| u32::from(t.by_day[k]))
                    .unwrap_or(0),
            };
            (fractional_hour(&local), local.ordinal() as i32, season)
        })
        .collect();
    let phase_code = |p: DielPhase| DielPhase::ALL.iter().position(|&q| q == p).unwrap() as u32;
    let phase_levels: Vec<&str> = DielPhase::ALL.iter().map(|p| p.label()).collect();
    let local_hour: Vec<f64> = calendar.iter().map(|c| c.0).collect();
    let solar_hour: Vec<f64> = sun.iter().map(|s| s.solar_hour).collect();
    let chosen = match cfg.hour {
        HourKind::Clock => &local_hour,
        HourKind::Solar => &solar_hour,
    };
    let (hour_cos, hour_sin): (Vec<f64>, Vec<f64>) = chosen.iter().map(|&h| hour_terms(h)).unzip();
    let tz_name = tz.name();
    let th = &cfg.thresholds;
    let sun_col = |name: &str, values, unit: &str, how: String| Column {
        name: name.to_string(),
        values,
        unit: unit.to_string(),
        source: "sun".to_string(),
        transformation: how,
    };
    let cal_col = |name: &str, values, unit: &str, how: String| Column {
        name: name.to_string(),
        values,
        unit: unit.to_string(),
        source: "calendar".to_string(),
        transformation: how,
    };
    columns.push(sun_col(
        "sun_elevation_deg",
        Values::Float(sun.iter().map(|s| s.position.elevation_deg).collect()),
        "deg",
        "geometric elevation of the sun's centre at the step's start, sea level, no refraction (NREL SPA)".into(),
    ));
    columns.push(sun_col(
        "sun_azimuth_deg",
        Values::Float(sun.iter().map(|s| s.position.azimuth_deg).collect()),
        "deg",
        "azimuth of the sun, clockwise from true north (NREL SPA)".into(),
    ));
    columns.push(sun_col(
        "diel_phase",
        labels_from(&phase_levels, sun.iter().map(|s| Some(phase_code(s.phase))).collect()),
        "",
        format!(
            "day when elevation >= {} deg; civil/nautical/astronomical twilight down to {}/{}/{} deg, dawn or dusk by whether the sun is rising; night below",
            th.day(),
            th.civil(),
            th.nautical(),
            th.astronomical()
        ),
    ));
    columns.push(cal_col(
        "local_hour",
        Values::Float(local_hour.clone()),
        "h",
        format!("wall-clock hour in {tz_name}, with fractions"),
    ));
    columns.push(sun_col(
        "solar_hour",
        Values::Float(solar_hour.clone()),
        "h",
        "local apparent solar time (12 = solar noon) from the sun's hour angle".into(),
    ));
    let hour_what = match cfg.hour {
        HourKind::Clock => format!("h = local_hour ({tz_name} clock)"),
        HourKind::Solar => "h = solar_hour (local apparent solar time)".to_string(),
    };
    let cyc_source = match cfg.hour {
        HourKind::Clock => "calendar",
        HourKind::Solar => "sun",
    };
    columns.push(Column {
        name: "hour_cos".into(),
        values: Values::Float(hour_cos),
        unit: "1".into(),
        source: cyc_source.into(),
        transformation: format!("cos(2π·h/24), {hour_what}"),
    });
    columns.push(Column {
        name: "hour_sin".into(),
        values: Values::Float(hour_sin),
        unit: "1".into(),
        source: cyc_source.into(),
        transformation: format!("sin(2π·h/24), {hour_what}"),
    });
    columns.push(cal_col(
        "day_of_year",
        Values::Int(calendar.iter().map(|c| c.1).collect()),
        "d",
        format!("day of the year of the local date in {tz_name} (1 = January 1st; 366 = December 31st of a leap year)"),
    ));
    let season_how = match &cfg.seasons {
        Seasons::Meteorological => format!(
            "meteorological season of the local date in {tz_name}: Dec–Feb, Mar–May, Jun–Aug, Sep–Nov are winter, spring, summer, autumn at latitude >= 0 and summer, autumn, winter, spring at latitude < 0"
        ),
        Seasons::Custom(_) => format!(
            "study-defined season of the local date in {tz_name} (covariates.season; 29 February goes with 28 February unless a season names it)"
        ),
    };
    columns.push(cal_col(
        "season",
        Values::Labels {
            levels: season_levels,
            codes: calendar.iter().map(|c| Some(c.2)).collect(),
        },
        "",
        season_how,
    ));
    drop(calendar);
    timings.sun_calendar_s = t0.elapsed().as_secs_f64();

    // Rasters. Positions are projected once per coordinate system.
    let mut projected: HashMap<u32, (Vec<f64>, Vec<f64>)> = HashMap::new();
    let mut unknown_class_codes = BTreeMap::new();
    for layer in &cfg.rasters {
        let t = Instant::now();
        let raster = Raster::read(&layer.path).map_err(|source| CovariateError::Raster {
            layer: layer.name.clone(),
            source,
        })?;
        timings.raster_read_s += t.elapsed().as_secs_f64();
        let t = Instant::now();
        let epsg = raster.crs().epsg();
        let (xs, ys) = projected
            .entry(epsg)
            .or_insert_with(|| raster.crs().from_lonlat_many(&steps.lon, &steps.lat));
        timings.projection_s += t.elapsed().as_secs_f64();
        let first = columns.len();
        let inside = annotate_layer(
            layer,
            &raster,
            xs,
            ys,
            first,
            &mut columns,
            &mut missing,
            &mut unknown_class_codes,
            &mut timings,
        )?;
        if inside == 0 && n > 0 {
            let fold =
                |v: &[f64], f: fn(f64, f64) -> f64, init: f64| v.iter().copied().fold(init, f);
            return Err(CovariateError::NoOverlap {
                layer: layer.name.clone(),
                path: layer.path.clone(),
                steps: n,
                lon_min: fold(&steps.lon, f64::min, f64::INFINITY),
                lon_max: fold(&steps.lon, f64::max, f64::NEG_INFINITY),
                lat_min: fold(&steps.lat, f64::min, f64::INFINITY),
                lat_max: fold(&steps.lat, f64::max, f64::NEG_INFINITY),
            });
        }
    }
    drop(projected);

    // Per-animal attributes.
    let t = Instant::now();
    let mut animals_without_attributes = Vec::new();
    let mut attribute_ids_without_steps = Vec::new();
    if let Some(table) = &cfg.animals {
        let index = table.index();
        let row_of: Vec<Option<usize>> = steps
            .animals
            .iter()
            .map(|a| index.get(a.as_str()).copied())
            .collect();
        let mut has_steps = vec![false; steps.animals.len()];
        for &a in &steps.animal {
            has_steps[a as usize] = true;
        }
        for (k, a) in steps.animals.iter().enumerate() {
            if has_steps[k] && row_of[k].is_none() {
                animals_without_attributes.push(a.clone());
            }
        }
        let with_steps: BTreeSet<&str> = steps
            .animals
            .iter()
            .enumerate()
            .filter(|(k, _)| has_steps[*k])
            .map(|(_, a)| a.as_str())
            .collect();
        attribute_ids_without_steps = table
            .ids
            .iter()
            .filter(|id| !with_steps.contains(id.as_str()))
            .cloned()
            .collect();
        let source = table
            .path
            .file_name()
            .map(|f| f.to_string_lossy().into_owned())
            .unwrap_or_default();
        for at in &table.attributes {
            let col = columns.len();
            let mut miss = |row: usize, reason| {
                missing.push(MissingCell {
                    row,
                    column: col,
                    reason,
                })
            };
            let values = match &at.values {
                AttributeValues::Numeric(v) => {
                    let mut out = Vec::with_capacity(n);
                    for (row, &a) in steps.animal.iter().enumerate() {
                        out.push(match row_of[a as usize] {
                            None => {
                                miss(row, MissingReason::AnimalNotInTable);
                                f64::NAN
                            }
                            Some(r) => v[r].unwrap_or_else(|| {
                                miss(row, MissingReason::EmptyAttribute);
                                f64::NAN
                            }),
                        });
                    }
                    Values::Float(out)
                }
                AttributeValues::Text(v) => {
                    let levels: Vec<String> = v
                        .iter()
                        .flatten()
                        .cloned()
                        .collect::<BTreeSet<_>>()
                        .into_iter()
                        .collect();
                    let code: Vec<Option<u32>> = v
                        .iter()
                        .map(|s| {
                            s.as_ref()
                                .map(|s| levels.iter().position(|l| l == s).unwrap() as u32)
                        })
                        .collect();
                    let mut out = Vec::with_capacity(n);
                    for (row, &a) in steps.animal.iter().enumerate() {
                        out.push(match row_of[a as usize] {
                            None => {
                                miss(row, MissingReason::AnimalNotInTable);
                                None
                            }
                            Some(r) => code[r].or_else(|| {
                                miss(row, MissingReason::EmptyAttribute);
                                None
                            }),
                        });
                    }
                    Values::Labels { levels, codes: out }
                }
            };
            columns.push(Column {
                name: at.name.clone(),
                values,
                unit: String::new(),
                source: source.clone(),
                transformation: format!(
                    "per-animal attribute, joined on column `{}`",
                    table.id_column
                ),
            });
        }
    }

    // Standardisation.
    let mut standardisation = Vec::with_capacity(cfg.standardise.len());
    for name in &cfg.standardise {
        let col = columns
            .iter()
            .find(|c| &c.name == name)
            .expect("validated: every standardised column exists");
        let Values::Float(v) = &col.values else {
            unreachable!("validated: only numeric columns are standardised")
        };
        let s = scaling(name, v)?;
        let z: Vec<f64> = v.par_iter().map(|&x| (x - s.mean) / s.sd).collect();
        let unit = col.unit.clone();
        let source = col.source.clone();
        columns.push(Column {
            name: format!("{name}_z"),
            values: Values::Float(z),
            unit: "sd".into(),
            source,
            transformation: format!(
                "standardised: ({name} − {}) / {} (unit of {name}: {}); back-transform {name} = z·sd + mean",
                s.mean,
                s.sd,
                if unit.is_empty() { "none" } else { &unit }
            ),
        });
        standardisation.push(s);
    }
    timings.attributes_standardise_s = t.elapsed().as_secs_f64();

    missing.par_sort_unstable_by_key(|m| (m.row, m.column));
    let mut by_column: BTreeMap<String, BTreeMap<String, usize>> = BTreeMap::new();
    for m in &missing {
        *by_column
            .entry(columns[m.column].name.clone())
            .or_default()
            .entry(m.reason.code().to_string())
            .or_default() += 1;
    }
    let summary = CovariateSummary {
        hour: cfg.hour,
        seasons: match cfg.seasons {
            Seasons::Meteorological => "meteorological (hemisphere by latitude sign)".into(),
            Seasons::Custom(_) => "study-defined".into(),
        },
        columns: columns.iter().map(|c| c.name.clone()).collect(),
        missing: by_column,
        unknown_class_codes,
        animals_without_attributes,
        attribute_ids_without_steps,
        standardisation,
    };
    Ok(Annotated {
        columns,
        missing,
        summary,
        timings,
    })
}

/// Mean and sample standard deviation of the non-missing values, summed in row order
/// so the figures do not depend on the thread count.
///
/// # Formula
/// mean = Σx / n, sd = √(Σ(x − mean)² / (n − 1)) — two passes, which avoids the
/// cancellation of the one-pass Σx² form (Chan, Golub & LeVeque 1983, *The American
/// Statistician* 37:242–247).
fn scaling(name: &str, v: &[f64]) -> Result<Scaling, CovariateError> {
    let ok = || v.iter().copied().filter(|x| !x.is_nan());
    let n = ok().count();
    if n < 2 {
        return Err(CovariateError::Standardise {
            column: name.to_string(),
            reason: format!("it has {n} non-missing value(s); at least two are needed"),
        });
    }
    let mean = ok().sum::<f64>() / n as f64;
    let sd = (ok().map(|x| (x - mean) * (x - mean)).sum::<f64>() / (n - 1) as f64).sqrt();
    if !(sd > 0.0 && sd.is_finite()) {
        return Err(CovariateError::Standardise {
            column: name.to_string(),
            reason: format!("every value equals {mean}, so it has no spread to scale by"),
        });
    }
    Ok(Scaling {
        column: name.to_string(),
        mean,
        sd,
        n,
    })
}

/// Adds one layer's columns; returns how many steps lie inside the raster.
#[allow(clippy::too_many_arguments)]
fn annotate_layer(
    layer: &RasterLayer,
    raster: &Raster,
    xs: &[f64],
    ys: &[f64],
    first: usize,
    columns: &mut Vec<Column>,
    missing: &mut Vec<MissingCell>,
    unknown: &mut BTreeMap<String, BTreeMap<i64, u64>>,
    timings: &mut Timings,
) -> Result<usize, CovariateError> {
    let n = xs.len();
    match &layer.kind {
        RasterKind::Classes {
            radius_m,
            window,
            groups,
        } => {
            let t = Instant::now();
            let cp = ClassProportions::build(raster, groups.clone(), *radius_m, *window).map_err(
                |source| CovariateError::Classes {
                    layer: layer.name.clone(),
                    source,
                },
            )?;
            let listed: BTreeSet<i64> = groups
                .iter()
                .flat_map(|g| g.codes.iter().copied())
                .collect();
            let census = code_census(raster);
            let unlisted: BTreeMap<i64, u64> = census
                .into_iter()
                .filter(|(c, _)| !listed.contains(c))
                .collect();
            if !unlisted.is_empty() {
                unknown.insert(layer.name.clone(), unlisted);
            }
            timings.raster_prepass_s += t.elapsed().as_secs_f64();
            let t = Instant::now();
            let counts = cp.counts_many_xy(xs, ys);
            let k = groups.len();
            let mut props = vec![vec![f64::NAN; n]; k];
            let mut nodata = vec![f64::NAN; n];
            let mut inside = 0;
            for (row, c) in counts.iter().enumerate() {
                let reason = match c {
                    Ok(w) => {
                        inside += 1;
                        nodata[row] = w.nodata_fraction().unwrap_or(f64::NAN);
                        if w.nodata_fraction().is_none() {
                            // An empty window (radius below half a cell): no cell centre
                            // within reach, which reads as nothing known here.
                            Some(MissingReason::WindowAllNodata)
                        } else if let Some(p0) = w.proportion(0) {
                            props[0][row] = p0;
                            for (g, col) in props.iter_mut().enumerate().skip(1) {
                                col[row] = w.proportion(g).unwrap_or(f64::NAN);
                            }
                            None
                        } else {
                            Some(MissingReason::WindowAllNodata)
                        }
                    }
                    Err(FocalMiss::OutsideRaster) => Some(MissingReason::OutsideRaster),
                    Err(FocalMiss::Coordinate) => Some(MissingReason::InvalidCoordinate),
                };
                if let Some(reason) = reason {
                    for g in 0..k {
                        missing.push(MissingCell {
                            row,
                            column: first + g,
                            reason,
                        });
                    }
                    if nodata[row].is_nan() {
                        missing.push(MissingCell {
                            row,
                            column: first + k,
                            reason,
                        });
                    }
                }
            }
            timings.raster_lookup_s += t.elapsed().as_secs_f64();
            let within = match window {
                crate::geo::focal::Window::Circle => format!("within {radius_m} m (circle)"),
                crate::geo::focal::Window::Square => {
                    format!("within a square of half-width {radius_m} m")
                }
            };
            for (g, values) in groups.iter().zip(props) {
                columns.push(Column {
                    name: format!("{}_{}", layer.name, g.name),
                    values: Values::Float(values),
                    unit: "proportion".into(),
                    source: layer.file.clone(),
                    transformation: format!(
                        "proportion of valid cells with centre {within} whose class is in {:?}",
                        g.codes
                    ),
                });
            }
            columns.push(Column {
                name: format!("{}_nodata_fraction", layer.name),
                values: Values::Float(nodata),
                unit: "proportion".into(),
                source: layer.file.clone(),
                transformation: format!("share of cells with centre {within} that are nodata"),
            });
            Ok(inside)
        }
        RasterKind::Value { unit, scale, label } => {
            let t = Instant::now();
            let vals = bilinear_many_xy(raster, xs, ys);
            let mut out = vec![f64::NAN; n];
            let mut inside = 0;
            for (row, v) in vals.into_iter().enumerate() {
                let reason = match v {
                    Ok(x) => {
                        inside += 1;
                        out[row] = x * scale;
                        continue;
                    }
                    Err(Missing::OutsideRaster) => MissingReason::OutsideRaster,
                    Err(Missing::Nodata) => {
                        inside += 1;
                        MissingReason::Nodata
                    }
                    Err(Missing::Coordinate) => MissingReason::InvalidCoordinate,
                };
                missing.push(MissingCell {
                    row,
                    column: first,
                    reason,
                });
            }
            timings.raster_lookup_s += t.elapsed().as_secs_f64();
            let scaled = if *scale == 1.0 {
                String::new()
            } else {
                format!(", stored values × {scale}")
            };
            let what = label.as_ref().map(|l| format!("{l}: ")).unwrap_or_default();
            columns.push(Column {
                name: layer.name.clone(),
                values: Values::Float(out),
                unit: unit.clone(),
                source: layer.file.clone(),
                transformation: format!(
                    "{what}bilinear interpolation between the four nearest cell centres{scaled}"
                ),
            });
            Ok(inside)
        }
    }
}

/// Cell count of every class code in an integer raster, nodata excluded (parallel
/// over chunks; counts are exact integers, so the order of summation does not matter).
fn code_census(raster: &Raster) -> BTreeMap<i64, u64> {
    const CHUNK: usize = 1 << 20;
    let nd = raster
        .nodata()
        .filter(|v| v.fract() == 0.0)
        .map(|v| v as i64);
    fn dense<T: Copy + Sync>(
        v: &[T],
        offset: i64,
        size: usize,
        key: fn(T) -> i64,
    ) -> Vec<(i64, u64)> {
        let hist = v
            .par_chunks(CHUNK)
            .map(|c| {
                let mut h = vec![0u64; size];
                for &x in c {
                    h[(key(x) + offset) as usize] += 1;
                }
                h
            })
            .reduce(
                || vec![0u64; size],
                |mut a, b| {
                    a.iter_mut().zip(b).for_each(|(x, y)| *x += y);
                    a
                },
            );
        hist.into_iter()
            .enumerate()
            .filter(|(_, c)| *c > 0)
            .map(|(k, c)| (k as i64 - offset, c))
            .collect()
    }
    let counts: Vec<(i64, u64)> = match raster.data() {
        RasterData::U8(v) => dense(v, 0, 256, i64::from),
        RasterData::U16(v) => dense(v, 0, 65_536, i64::from),
        RasterData::I16(v) => dense(v, 32_768, 65_536, i64::from),
        RasterData::I32(v) => v
            .par_chunks(CHUNK)
            .map(|c| {
                let mut h: HashMap<i64, u64> = HashMap::new();
                for &x in c {
                    *h.entry(i64::from(x)).or_default() += 1;
                }
                h
            })
            .reduce(HashMap::new, |mut a, b| {
                for (k, c) in b {
                    *a.entry(k).or_default() += c;
                }
                a
            })
            .into_iter()
            .collect(),
        // Float rasters are refused by the class pre-pass before this runs.
        RasterData::F32(_) | RasterData::F64(_) => Vec::new(),
    };
    counts.into_iter().filter(|(k, _)| Some(*k) != nd).collect()
}
