//! Ingest: input files (CSV or Parquet, through polars) → validated fixes + exclusions.
//!
//! Each input file is read with polars, keeping only the mapped columns. Delimited text is
//! read with every column as text so that each value can be checked on its own and a bad
//! value costs one row, not the file. Parquet columns keep their types (numbers stay
//! numbers, datetimes stay datetimes; a datetime without a time zone is a wall-clock time
//! in the study's zone).
//!
//! Per row, in this order: animal id (non-empty), time ([`super::timeparse`]), longitude
//! in [−180, 180], latitude in [−90, 90], location class / tag type
//! ([`super::class::LocClass`]), error ellipse (all three values or none; semi-axes ≥ 0 m,
//! semi-major ≥ semi-minor). The first failure sends the row to the exclusions log.
//! Argos class Z rows are read here and removed by cleaning, which logs them.
//!
//! Problems that make a whole file unusable are errors ([`IngestError`]): a file that
//! cannot be opened or parsed, a column of the wrong type (a boolean longitude column, or a
//! text column in which no value is a number).

use std::collections::HashMap;
use std::fs::File;
use std::io::{BufRead, BufReader};
use std::path::{Path, PathBuf};
use std::sync::Arc;

use polars::prelude::*;

use super::class::LocClass;
use super::exclusions::{Exclusion, Reason};
use super::timeparse::{TimeProblem, parse_time};
use crate::study::{FileFormat, InputFile, Study};

/// A usable fix. Positions are WGS84 degrees, times UTC microseconds.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Fix {
    /// Index into [`Ingested::animals`].
    pub animal: u32,
    /// UTC microseconds since 1970-01-01.
    pub time_us: i64,
    /// Longitude, degrees east.
    pub lon: f64,
    /// Latitude, degrees north.
    pub lat: f64,
    /// Location class.
    pub class: LocClass,
    /// Index into the study's input files.
    pub file: u16,
    /// Data row in that file, 1-based.
    pub row: u32,
    /// Index of the fix's error ellipse in the list that travels with it
    /// ([`Ingested::ellipses`], then [`super::clean::Track::ellipses`]), or
    /// [`NO_ELLIPSE`]. Kept out of line so that a fix is 40 bytes, not 64, when (as with
    /// GPS data) most or all fixes have no ellipse.
    pub ellipse: u32,
}

/// [`Fix::ellipse`] of a fix without an error ellipse.
pub const NO_ELLIPSE: u32 = u32::MAX;

/// An Argos error ellipse.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Ellipse {
    /// Semi-major axis, metres.
    pub semi_major: f64,
    /// Semi-minor axis, metres.
    pub semi_minor: f64,
    /// Orientation of the semi-major axis, degrees clockwise from north.
    pub orientation: f64,
}

/// The ellipse of `fix` in `ellipses` (the list its [`Fix::ellipse`] indexes), if any.
pub fn ellipse_of<'a>(fix: &Fix, ellipses: &'a [Ellipse]) -> Option<&'a Ellipse> {
    ellipses.get(fix.ellipse as usize)
}

/// Everything ingest read.
#[derive(Debug, Default)]
pub struct Ingested {
    /// Animal ids; [`Fix::animal`] indexes this list.
    pub animals: Vec<String>,
    /// Usable fixes in file order.
    pub fixes: Vec<Fix>,
    /// Error ellipses of the fixes that have one, indexed by [`Fix::ellipse`].
    pub ellipses: Vec<Ellipse>,
    /// Rows that could not be used.
    pub exclusions: Vec<Exclusion>,
    /// Data rows read per input file.
    pub rows_per_file: Vec<usize>,
}

/// A problem that makes an input file unusable.
#[derive(Debug, thiserror::Error)]
pub enum IngestError {
    #[error("input file {path}: cannot read it: {reason}")]
    Read { path: PathBuf, reason: String },
    #[error("input file {path}, column `{column}`: {reason}")]
    ColumnType {
        path: PathBuf,
        column: String,
        reason: String,
    },
    #[error(
        "input file {path}: more than {max} input files, rows or error ellipses than an index can hold"
    )]
    TooLarge { path: PathBuf, max: u64 },
}

/// Column names of a delimited-text file, from its first line (UTF-8 byte-order mark and
/// a trailing carriage return removed, double-quoted names unquoted).
///
/// # Errors
/// A message when the file cannot be read or is empty.
pub fn csv_header(path: &Path, delimiter: u8) -> Result<Vec<String>, String> {
    let f = File::open(path).map_err(|e| e.to_string())?;
    let mut line = String::new();
    BufReader::new(f)
        .read_line(&mut line)
        .map_err(|e| e.to_string())?;
    let line = line.strip_prefix('\u{feff}').unwrap_or(&line);
    let line = line.trim_end_matches(['\n', '\r']);
    if line.trim().is_empty() {
        return Err("the file is empty or its first line is blank".to_string());
    }
    Ok(split_header(line, delimiter as char))
}

fn split_header(line: &str, delim: char) -> Vec<String> {
    let mut out = Vec::new();
    let mut cur = String::new();
    let mut quoted = false;
    let mut chars = line.chars().peekable();
    while let Some(c) = chars.next() {
        match c {
            '"' if quoted && chars.peek() == Some(&'"') => {
                cur.push('"');
                chars.next();
            }
            '"' => quoted = !quoted,
            c if c == delim && !quoted => out.push(std::mem::take(&mut cur)),
            c => cur.push(c),
        }
    }
    out.push(cur);
    out.into_iter().map(|s| s.trim().to_string()).collect()
}

/// Column names of a Parquet file, from its schema.
///
/// # Errors
/// A message when the file cannot be opened or is not Parquet.
pub fn parquet_header(path: &Path) -> Result<Vec<String>, String> {
    let f = File::open(path).map_err(|e| e.to_string())?;
    let schema = ParquetReader::new(f).schema().map_err(|e| e.to_string())?;
    Ok(schema.iter_names().map(|n| n.to_string()).collect())
}

/// Reads every input file of the study.
///
/// # Errors
/// [`IngestError`] when a file cannot be read or a whole column has the wrong type.
pub fn read_fixes(study: &Study) -> Result<Ingested, IngestError> {
    let mut out = Ingested::default();
    let mut ids: HashMap<String, u32> = HashMap::new();
    if study.inputs().len() > usize::from(u16::MAX) {
        return Err(IngestError::TooLarge {
            path: study.source().to_path_buf(),
            max: u64::from(u16::MAX),
        });
    }
    for (file_index, input) in study.inputs().iter().enumerate() {
        let mut df = read_frame(study, input)?;
        // One chunk per column, converted a column at a time so that only one column is
        // ever held twice; the per-column views below then share these arrays.
        df.rechunk_mut();
        let n = read_rows(study, input, file_index as u16, &df, &mut ids, &mut out)?;
        drop(df);
        out.rows_per_file.push(n);
    }
    out.animals = vec![String::new(); ids.len()];
    for (name, i) in ids {
        out.animals[i as usize] = name;
    }
    Ok(out)
}

fn read_error(path: &Path, e: impl std::fmt::Display) -> IngestError {
    IngestError::Read {
        path: path.to_path_buf(),
        reason: e.to_string(),
    }
}

/// Reads the mapped columns of one file into a frame whose columns carry the mapped names.
fn read_frame(study: &Study, input: &InputFile) -> Result<DataFrame, IngestError> {
    let wanted: Vec<&str> = study
        .columns()
        .mapped()
        .into_iter()
        .map(|(_, c)| c)
        .collect();
    let path = &input.path;
    match input.format {
        FileFormat::Csv => {
            // Project by position (from our own header reading, which strips a byte-order
            // mark), then name the columns ourselves.
            let mut idx: Vec<usize> = Vec::with_capacity(wanted.len());
            for w in &wanted {
                let i = input.header.iter().position(|h| h == w).ok_or_else(|| {
                    IngestError::ColumnType {
                        path: path.clone(),
                        column: w.to_string(),
                        reason: "column vanished since the study was checked".to_string(),
                    }
                })?;
                if !idx.contains(&i) {
                    idx.push(i);
                }
            }
            idx.sort_unstable();
            let mut df = CsvReadOptions::default()
                .with_has_header(true)
                .with_infer_schema_length(Some(0))
                .with_projection(Some(Arc::new(idx.clone())))
                .map_parse_options(|o| {
                    o.with_separator(study.delimiter())
                        .with_truncate_ragged_lines(true)
                })
                .try_into_reader_with_file_path(Some(path.clone()))
                .map_err(|e| read_error(path, e))?
                .finish()
                .map_err(|e| read_error(path, e))?;
            let names: Vec<String> = idx.iter().map(|&i| input.header[i].clone()).collect();
            df.set_column_names(&names)
                .map_err(|e| read_error(path, e))?;
            Ok(df)
        }
        FileFormat::Parquet => {
            let f = File::open(path).map_err(|e| read_error(path, e))?;
            let mut cols: Vec<String> = wanted.iter().map(|s| s.to_string()).collect();
            cols.dedup();
            ParquetReader::new(f)
                .with_columns(Some(cols))
                .finish()
                .map_err(|e| read_error(path, e))
        }
    }
}

/// A column as one chunk, so that row `i` is a direct look-up (no chunk search, no copy of
/// the values).
fn one_chunk<T: PolarsDataType>(ca: &ChunkedArray<T>) -> ChunkedArray<T> {
    ca.rechunk().into_owned()
}

/// A text view of a column (numbers and booleans cast to text): `get(i)` is `None` for
/// null.
fn text_values(path: &Path, df: &DataFrame, name: &str) -> Result<StringChunked, IngestError> {
    let s = df
        .column(name)
        .map_err(|e| read_error(path, e))?
        .as_materialized_series();
    let cast;
    let s = match s.dtype() {
        DataType::String => s,
        d if d.is_primitive_numeric() || d.is_bool() => {
            cast = s.cast(&DataType::String).map_err(|e| read_error(path, e))?;
            &cast
        }
        other => {
            return Err(IngestError::ColumnType {
                path: path.to_path_buf(),
                column: name.to_string(),
                reason: format!("holds {other}, expected text or whole numbers"),
            });
        }
    };
    Ok(one_chunk(s.str().map_err(|e| read_error(path, e))?))
}

/// A numeric column, read per row.
enum Numbers {
    /// Typed numbers (Parquet), cast to `f64`; null is missing.
    Typed(Float64Chunked),
    /// Text (CSV): parsed per row.
    Text(StringChunked),
}

fn numeric_values(path: &Path, df: &DataFrame, name: &str) -> Result<Numbers, IngestError> {
    let s = df
        .column(name)
        .map_err(|e| read_error(path, e))?
        .as_materialized_series();
    match s.dtype() {
        DataType::String => {
            let ca = s.str().map_err(|e| read_error(path, e))?;
            // A column in which not one non-empty value is a number has the wrong type as a
            // whole (often a decimal comma or a wrong delimiter): stop with a clear error
            // instead of excluding every row.
            let mut non_empty = 0usize;
            let mut parsed = 0usize;
            let mut example = None;
            for v in ca.iter().flatten() {
                let t = v.trim();
                if t.is_empty() {
                    continue;
                }
                non_empty += 1;
                if t.parse::<f64>().is_ok() {
                    parsed += 1;
                    break;
                }
                example.get_or_insert_with(|| t.to_string());
            }
            if non_empty > 0 && parsed == 0 {
                let ex = example.unwrap_or_default();
                let hint = if ex.contains(',') {
                    " (it looks like a decimal comma: convert the file to decimal points)"
                } else {
                    ""
                };
                return Err(IngestError::ColumnType {
                    path: path.to_path_buf(),
                    column: name.to_string(),
                    reason: format!("no value is a number (first value {ex:?}){hint}"),
                });
            }
            Ok(Numbers::Text(one_chunk(ca)))
        }
        d if d.is_primitive_numeric() => {
            let c = s
                .cast(&DataType::Float64)
                .map_err(|e| read_error(path, e))?;
            let ca = c.f64().map_err(|e| read_error(path, e))?;
            Ok(Numbers::Typed(one_chunk(ca)))
        }
        other => Err(IngestError::ColumnType {
            path: path.to_path_buf(),
            column: name.to_string(),
            reason: format!("holds {other}, expected numbers"),
        }),
    }
}

impl Numbers {
    /// The value at `i`, or why it is unusable.
    fn get(&self, i: usize) -> Result<f64, (Reason, String)> {
        match self {
            Numbers::Typed(v) => match v.get(i) {
                None => Err((Reason::MissingValue, "empty".to_string())),
                Some(x) if !x.is_finite() => Err((Reason::NonFinite, x.to_string())),
                Some(x) => Ok(x),
            },
            Numbers::Text(v) => match v.get(i).map(str::trim) {
                None | Some("") => Err((Reason::MissingValue, "empty".to_string())),
                Some(t) => match t.parse::<f64>() {
                    Ok(x) if x.is_finite() => Ok(x),
                    Ok(_) => Err((Reason::NonFinite, t.to_string())),
                    Err(_) => Err((Reason::NotANumber, t.to_string())),
                },
            },
        }
    }

    fn is_empty_at(&self, i: usize) -> bool {
        match self {
            Numbers::Typed(v) => v.get(i).is_none(),
            Numbers::Text(v) => v.get(i).is_none_or(|t| t.trim().is_empty()),
        }
    }
}

/// A value of one row, or why it is unusable.
type RowValue<T> = Result<T, (Reason, String)>;

/// The time column, converted per row.
enum Times<'s> {
    /// Text, read by [`parse_time`].
    Text {
        ca: StringChunked,
        tz: chrono_tz::Tz,
        format: Option<&'s str>,
    },
    /// Datetimes as integers of `unit`; `zoned` when they are instants, otherwise
    /// wall-clock times in `tz`.
    Datetime {
        ca: Int64Chunked,
        unit: TimeUnit,
        zoned: bool,
        tz: chrono_tz::Tz,
    },
}

impl Times<'_> {
    /// UTC microseconds at row `i`, or why the row has no usable time.
    fn get(&self, i: usize) -> RowValue<i64> {
        match self {
            Times::Text { ca, tz, format } => match ca.get(i).map(str::trim) {
                None | Some("") => Err((Reason::MissingValue, "empty".to_string())),
                Some(t) => parse_time(t, *tz, *format).map_err(|p| {
                    let r = match p {
                        TimeProblem::Unparseable => Reason::UnparseableTime,
                        TimeProblem::Ambiguous => Reason::AmbiguousLocalTime,
                        TimeProblem::Nonexistent => Reason::NonexistentLocalTime,
                    };
                    (r, t.to_string())
                }),
            },
            Times::Datetime {
                ca,
                unit,
                zoned,
                tz,
            } => {
                let to_us = |v: i64| match unit {
                    TimeUnit::Nanoseconds => v.div_euclid(1000),
                    TimeUnit::Microseconds => v,
                    TimeUnit::Milliseconds => v * 1000,
                };
                match ca.get(i) {
                    None => Err((Reason::MissingValue, "empty".to_string())),
                    Some(v) if *zoned => Ok(to_us(v)),
                    Some(v) => {
                        // A datetime without a zone is wall-clock time in the study's zone.
                        let us = to_us(v);
                        let naive = chrono::DateTime::from_timestamp_micros(us)
                            .map(|d| d.naive_utc())
                            .ok_or((Reason::UnparseableTime, v.to_string()))?;
                        super::timeparse::localize_naive(naive, *tz).map_err(|p| {
                            let r = if p == TimeProblem::Ambiguous {
                                Reason::AmbiguousLocalTime
                            } else {
                                Reason::NonexistentLocalTime
                            };
                            (r, naive.to_string())
                        })
                    }
                }
            }
        }
    }
}

/// The time column of a frame. A text column in which every value is an unreadable
/// timestamp is an error for the whole file.
fn time_values<'s>(
    study: &'s Study,
    path: &Path,
    df: &DataFrame,
    name: &str,
) -> Result<Times<'s>, IngestError> {
    let s = df
        .column(name)
        .map_err(|e| read_error(path, e))?
        .as_materialized_series();
    let tz = study.timezone();
    let format = study.time_format();
    match s.dtype().clone() {
        DataType::String => {
            let ca = s.str().map_err(|e| read_error(path, e))?;
            let times = Times::Text {
                ca: one_chunk(ca),
                tz,
                format,
            };
            // Stops at the first row that is not an unreadable timestamp (usually the
            // first row), so the check costs next to nothing on a good file.
            let n = ca.len();
            let all_unreadable =
                n > 0 && (0..n).all(|i| matches!(times.get(i), Err((Reason::UnparseableTime, _))));
            if all_unreadable {
                let first = match times.get(0) {
                    Err((_, t)) => t,
                    Ok(_) => String::new(),
                };
                return Err(IngestError::ColumnType {
                    path: path.to_path_buf(),
                    column: name.to_string(),
                    reason: format!(
                        "no value is a timestamp (first value {first:?}); write ISO 8601 \
                         (2024-05-01 13:45:00) or set `fixes.time_format`"
                    ),
                });
            }
            Ok(times)
        }
        DataType::Datetime(unit, zone) => {
            let phys = s.cast(&DataType::Int64).map_err(|e| read_error(path, e))?;
            let ca = phys.i64().map_err(|e| read_error(path, e))?;
            Ok(Times::Datetime {
                ca: one_chunk(ca),
                unit,
                zoned: zone.is_some(),
                tz,
            })
        }
        other => Err(IngestError::ColumnType {
            path: path.to_path_buf(),
            column: name.to_string(),
            reason: format!("holds {other}; expected datetimes or ISO 8601 text"),
        }),
    }
}

fn read_rows(
    study: &Study,
    input: &InputFile,
    file_index: u16,
    df: &DataFrame,
    ids: &mut HashMap<String, u32>,
    out: &mut Ingested,
) -> Result<usize, IngestError> {
    let path = &input.path;
    let cols = study.columns();
    let n = df.height();
    if n > u32::MAX as usize {
        return Err(IngestError::TooLarge {
            path: path.clone(),
            max: u64::from(u32::MAX),
        });
    }
    let animal = text_values(path, df, &cols.animal)?;
    let time = time_values(study, path, df, &cols.time)?;
    let lon = numeric_values(path, df, &cols.lon)?;
    let lat = numeric_values(path, df, &cols.lat)?;
    let class = match &cols.class {
        Some(c) => Some(text_values(path, df, c)?),
        None => None,
    };
    let tag = match &cols.tag {
        Some(c) => Some(text_values(path, df, c)?),
        None => None,
    };
    let ellipse = match (
        &cols.ellipse_major,
        &cols.ellipse_minor,
        &cols.ellipse_orientation,
    ) {
        (Some(a), Some(b), Some(o)) => Some((
            numeric_values(path, df, a)?,
            numeric_values(path, df, b)?,
            numeric_values(path, df, o)?,
        )),
        _ => None,
    };
    let file_label = input.path.display().to_string();
    let default_class = study.default_class();
    out.fixes.reserve(n);
    let mut last_id: Option<(&str, u32)> = None;

    for i in 0..n {
        let row = i as u32 + 1;
        let id = animal.get(i).map(str::trim).unwrap_or("");
        let mut exclude = |column: &str, reason: Reason, detail: String| {
            out.exclusions.push(Exclusion {
                file: file_label.clone(),
                row: u64::from(row),
                animal: id.to_string(),
                column: column.to_string(),
                reason,
                detail,
            });
        };
        if id.is_empty() {
            exclude(&cols.animal, Reason::EmptyId, "empty".to_string());
            continue;
        }
        let time_us = match time.get(i) {
            Ok(t) => t,
            Err((r, d)) => {
                exclude(&cols.time, r, d);
                continue;
            }
        };
        let lon_v = match lon.get(i) {
            Ok(v) if (-180.0..=180.0).contains(&v) => v,
            Ok(v) => {
                exclude(&cols.lon, Reason::LonOutOfRange, v.to_string());
                continue;
            }
            Err((r, d)) => {
                exclude(&cols.lon, r, d);
                continue;
            }
        };
        let lat_v = match lat.get(i) {
            Ok(v) if (-90.0..=90.0).contains(&v) => v,
            Ok(v) => {
                exclude(&cols.lat, Reason::LatOutOfRange, v.to_string());
                continue;
            }
            Err((r, d)) => {
                exclude(&cols.lat, r, d);
                continue;
            }
        };
        let loc_class = match row_class(
            class.as_ref().map(|c| c.get(i)),
            tag.as_ref().map(|t| t.get(i)),
            default_class,
        ) {
            Ok(c) => c,
            Err((which, detail)) => {
                let column = match which {
                    ClassSource::Class => cols.class.as_deref().unwrap_or(""),
                    ClassSource::Tag => cols.tag.as_deref().unwrap_or(""),
                };
                exclude(column, Reason::UnknownClass, detail);
                continue;
            }
        };
        let mut row_ellipse = None;
        if let Some((a, b, o)) = &ellipse {
            let empties = [a, b, o].iter().filter(|c| c.is_empty_at(i)).count();
            if empties == 0 {
                match (a.get(i), b.get(i), o.get(i)) {
                    (Ok(x), Ok(y), Ok(z)) if x >= 0.0 && y >= 0.0 && x >= y => {
                        row_ellipse = Some(Ellipse {
                            semi_major: x,
                            semi_minor: y,
                            orientation: z,
                        });
                    }
                    (Ok(x), Ok(y), Ok(_)) => {
                        exclude(
                            cols.ellipse_major.as_deref().unwrap_or(""),
                            Reason::BadEllipse,
                            format!("semi-major {x} m, semi-minor {y} m: need major ≥ minor ≥ 0"),
                        );
                        continue;
                    }
                    (ra, rb, _) => {
                        let (col, d) = match (ra, rb) {
                            (Err((_, d)), _) => (cols.ellipse_major.as_deref(), d),
                            (_, Err((_, d))) => (cols.ellipse_minor.as_deref(), d),
                            _ => (
                                cols.ellipse_orientation.as_deref(),
                                "orientation is not a finite number".to_string(),
                            ),
                        };
                        exclude(col.unwrap_or(""), Reason::BadEllipse, d);
                        continue;
                    }
                }
            } else if empties != 3 {
                exclude(
                    cols.ellipse_major.as_deref().unwrap_or(""),
                    Reason::BadEllipse,
                    "give all three ellipse values or none".to_string(),
                );
                continue;
            }
        }
        // Rows usually come grouped by animal: compare with the previous row's id before
        // hashing, and allocate an id's text only the first time it is seen.
        let animal_index = match last_id {
            Some((text, index)) if text == id => index,
            _ => {
                let index = match ids.get(id) {
                    Some(&index) => index,
                    None => {
                        let index = ids.len() as u32;
                        ids.insert(id.to_string(), index);
                        index
                    }
                };
                last_id = Some((id, index));
                index
            }
        };
        let ellipse_index = match row_ellipse {
            Some(e) => {
                if out.ellipses.len() >= NO_ELLIPSE as usize {
                    return Err(IngestError::TooLarge {
                        path: path.clone(),
                        max: u64::from(NO_ELLIPSE),
                    });
                }
                out.ellipses.push(e);
                out.ellipses.len() as u32 - 1
            }
            None => NO_ELLIPSE,
        };
        out.fixes.push(Fix {
            animal: animal_index,
            time_us,
            lon: lon_v,
            lat: lat_v,
            class: loc_class,
            file: file_index,
            row,
            ellipse: ellipse_index,
        });
    }
    Ok(n)
}

enum ClassSource {
    Class,
    Tag,
}

/// The class of a row from its class and tag-type values.
///
/// A tag type of `GPS` or `Fastloc` (any spelling [`LocClass::parse`] accepts) decides
/// the class on its own; `Argos` (or an empty tag) defers to the class column; with
/// neither column the study's default class applies.
fn row_class(
    class: Option<Option<&str>>,
    tag: Option<Option<&str>>,
    default: LocClass,
) -> Result<LocClass, (ClassSource, String)> {
    if let Some(t) = tag.flatten().map(str::trim).filter(|t| !t.is_empty())
        && !t.eq_ignore_ascii_case("argos")
    {
        return match LocClass::parse(t) {
            Some(c @ (LocClass::Gps | LocClass::FastlocGps)) => Ok(c),
            _ => Err((
                ClassSource::Tag,
                format!("tag type {t:?} is not GPS, Fastloc or Argos"),
            )),
        };
    }
    match class {
        None => Ok(default),
        Some(v) => match v.map(str::trim).filter(|s| !s.is_empty()) {
            None => Err((ClassSource::Class, "empty location class".to_string())),
            Some(s) => LocClass::parse(s).ok_or_else(|| {
                (
                    ClassSource::Class,
                    format!("{s:?} is not a location class (3, 2, 1, 0, A, B, Z, GPS, FGPS)"),
                )
            }),
        },
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn header_splitting_handles_quotes() {
        assert_eq!(
            split_header("\"a;b\";c;\"d \"\"x\"\"\"", ';'),
            vec!["a;b", "c", "d \"x\""]
        );
    }

    #[test]
    fn class_from_tag_and_class_columns() {
        let d = LocClass::Gps;
        assert!(matches!(row_class(None, None, d), Ok(LocClass::Gps)));
        assert!(matches!(
            row_class(Some(Some("B")), None, d),
            Ok(LocClass::ArgosB)
        ));
        assert!(matches!(
            row_class(Some(Some("")), Some(Some("Fastloc")), d),
            Ok(LocClass::FastlocGps)
        ));
        assert!(matches!(
            row_class(Some(Some("A")), Some(Some("argos")), d),
            Ok(LocClass::ArgosA)
        ));
        assert!(row_class(Some(Some("")), Some(Some("argos")), d).is_err());
        assert!(row_class(Some(Some("7")), None, d).is_err());
        assert!(row_class(None, Some(Some("radio")), d).is_err());
    }
}
