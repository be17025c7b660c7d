//! Output files, written atomically, and the polars frames behind the tables.
//!
//! Every output is first written to a hidden temporary file in the destination folder and
//! then renamed over the destination, so a reader (or a crash) never sees a half-written
//! file, and an older complete file stays in place until the new one is whole.

use std::fs::{self, File};
use std::io::{BufWriter, Write};
use std::path::{Path, PathBuf};

use polars::prelude::*;

use crate::covariates::{Annotated, Values};
use crate::tracks::clean::Track;
use crate::tracks::exclusions::Exclusion;
use crate::tracks::metrics::Steps;

/// A failure to write an output.
#[derive(Debug, thiserror::Error)]
#[error("cannot write {path}: {reason}")]
pub struct WriteError {
    /// The destination.
    pub path: PathBuf,
    /// What went wrong.
    pub reason: String,
}

fn werr(path: &Path, e: impl std::fmt::Display) -> WriteError {
    WriteError {
        path: path.to_path_buf(),
        reason: e.to_string(),
    }
}

/// Writes `path` atomically: `fill` writes into a temporary file beside it, which is then
/// flushed, synced and renamed over `path`. On any error the temporary file is removed and
/// `path` is untouched.
///
/// # Errors
/// [`WriteError`] naming `path`.
pub fn write_atomic<F>(path: &Path, fill: F) -> Result<(), WriteError>
where
    F: FnOnce(&mut BufWriter<File>) -> Result<(), String>,
{
    let dir = path
        .parent()
        .filter(|p| !p.as_os_str().is_empty())
        .unwrap_or(Path::new("."));
    fs::create_dir_all(dir).map_err(|e| werr(path, e))?;
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    let tmp = dir.join(format!(".{name}.partial-{}", std::process::id()));
    let result = (|| {
        let file = File::create(&tmp).map_err(|e| e.to_string())?;
        let mut w = BufWriter::new(file);
        fill(&mut w)?;
        w.flush().map_err(|e| e.to_string())?;
        w.get_ref().sync_all().map_err(|e| e.to_string())?;
        drop(w);
        fs::rename(&tmp, path).map_err(|e| e.to_string())
    })();
    if let Err(reason) = result {
        let _ = fs::remove_file(&tmp);
        return Err(WriteError {
            path: path.to_path_buf(),
            reason,
        });
    }
    Ok(())
}

/// Writes a frame as Parquet (zstd), atomically.
///
/// # Errors
/// [`WriteError`] naming `path`.
pub fn write_parquet(path: &Path, df: &mut DataFrame) -> Result<(), WriteError> {
    write_atomic(path, |w| {
        ParquetWriter::new(w)
            .with_compression(ParquetCompression::Zstd(None))
            .finish(df)
            .map(|_| ())
            .map_err(|e| e.to_string())
    })
}

/// Writes a value as pretty-printed JSON with a final newline, atomically.
///
/// # Errors
/// [`WriteError`] naming `path`.
pub fn write_json<T: serde::Serialize>(path: &Path, value: &T) -> Result<(), WriteError> {
    let json = serde_json::to_string_pretty(value).map_err(|e| werr(path, e))?;
    write_atomic(path, |w| {
        w.write_all(json.as_bytes()).map_err(|e| e.to_string())?;
        w.write_all(b"\n").map_err(|e| e.to_string())
    })
}

/// Writes a frame as comma-separated text with a header, atomically.
///
/// # Errors
/// [`WriteError`] naming `path`.
pub fn write_csv(path: &Path, df: &mut DataFrame) -> Result<(), WriteError> {
    write_atomic(path, |w| {
        CsvWriter::new(w)
            .include_header(true)
            .finish(df)
            .map_err(|e| e.to_string())
    })
}

fn utc_column(name: &str, us: Vec<i64>) -> PolarsResult<Column> {
    Series::new(name.into(), us)
        .cast(&DataType::Datetime(TimeUnit::Microseconds, None))
        .map(Column::from)
}

/// The cleaned fixes as a frame (time column `time_utc`, a UTC datetime without zone).
///
/// # Errors
/// A polars error if the frame cannot be built.
pub fn fixes_frame(tracks: &[Track], files: &[String]) -> PolarsResult<DataFrame> {
    let n: usize = tracks.iter().map(|t| t.fixes.len()).sum();
    let mut animal = Vec::with_capacity(n);
    let mut time = Vec::with_capacity(n);
    let mut lon = Vec::with_capacity(n);
    let mut lat = Vec::with_capacity(n);
    let mut class = Vec::with_capacity(n);
    let mut smaj = Vec::with_capacity(n);
    let mut smin = Vec::with_capacity(n);
    let mut orient = Vec::with_capacity(n);
    let mut file = Vec::with_capacity(n);
    let mut row = Vec::with_capacity(n);
    for t in tracks {
        for f in &t.fixes {
            animal.push(t.animal.as_str());
            time.push(f.time_us);
            lon.push(f.lon);
            lat.push(f.lat);
            class.push(f.class.code());
            let e = t.ellipse(f);
            smaj.push(e.map(|e| e.semi_major));
            smin.push(e.map(|e| e.semi_minor));
            orient.push(e.map(|e| e.orientation));
            file.push(files.get(f.file as usize).map(String::as_str).unwrap_or(""));
            row.push(f.row);
        }
    }
    DataFrame::new_infer_height(vec![
        Column::new("animal".into(), animal),
        utc_column("time_utc", time)?,
        Column::new("lon".into(), lon),
        Column::new("lat".into(), lat),
        Column::new("class".into(), class),
        Column::new("ellipse_major_m".into(), smaj),
        Column::new("ellipse_minor_m".into(), smin),
        Column::new("ellipse_orientation_deg".into(), orient),
        Column::new("source_file".into(), file),
        Column::new("source_row".into(), row),
    ])
}

/// The step table as a frame. Missing bearings and turning angles are nulls.
///
/// # Errors
/// A polars error if the frame cannot be built.
pub fn steps_frame(steps: &Steps) -> PolarsResult<DataFrame> {
    let nullable =
        |v: &[f64]| -> Vec<Option<f64>> { v.iter().map(|x| (!x.is_nan()).then_some(*x)).collect() };
    let animal: Vec<&str> = steps
        .animal
        .iter()
        .map(|&i| steps.animals[i as usize].as_str())
        .collect();
    let class: Vec<Option<&str>> = steps.class.iter().map(|c| c.map(|c| c.code())).collect();
    DataFrame::new_infer_height(vec![
        Column::new("animal".into(), animal),
        Column::new("segment".into(), steps.segment.clone()),
        utc_column("time_utc", steps.time_us.clone())?,
        Column::new("lon".into(), steps.lon.clone()),
        Column::new("lat".into(), steps.lat.clone()),
        Column::new("step_m".into(), steps.step_m.clone()),
        Column::new("bearing_deg".into(), nullable(&steps.bearing_deg)),
        Column::new("turn_rad".into(), nullable(&steps.turn_rad)),
        Column::new("dt_s".into(), steps.dt_s.clone()),
        Column::new("class".into(), class),
        Column::new("location_se_m".into(), nullable(&steps.se_m)),
    ])
}

/// The smoothed locations as a frame.
///
/// # Errors
/// A polars error if the frame cannot be built.
pub fn smoothed_frame(s: &crate::tracks::grid::Smoothed) -> PolarsResult<DataFrame> {
    let p = &s.points;
    let animal: Vec<&str> = p
        .iter()
        .map(|q| s.paths[q.animal as usize].animal.as_str())
        .collect();
    let col = |name: &str, f: fn(&crate::tracks::grid::SmoothedPoint) -> f64| {
        Column::new(name.into(), p.iter().map(f).collect::<Vec<f64>>())
    };
    DataFrame::new_infer_height(vec![
        Column::new("animal".into(), animal),
        Column::new(
            "segment".into(),
            p.iter().map(|q| q.segment).collect::<Vec<_>>(),
        ),
        utc_column("time_utc", p.iter().map(|q| q.time_us).collect())?,
        col("lon", |q| q.lon),
        col("lat", |q| q.lat),
        col("sd_x_m", |q| q.sd_x),
        col("sd_y_m", |q| q.sd_y),
        col("cov_xy_m2", |q| q.cov_xy),
        col("se_m", |q| q.se_m),
        Column::new(
            "large_se".into(),
            p.iter().map(|q| q.large_se).collect::<Vec<_>>(),
        ),
    ])
}

/// The exclusions log as a frame: file, row, animal, column, stage, reason, detail.
///
/// # Errors
/// A polars error if the frame cannot be built.
pub fn exclusions_frame(ex: &[Exclusion]) -> PolarsResult<DataFrame> {
    DataFrame::new_infer_height(vec![
        Column::new(
            "file".into(),
            ex.iter().map(|e| e.file.as_str()).collect::<Vec<_>>(),
        ),
        Column::new("row".into(), ex.iter().map(|e| e.row).collect::<Vec<_>>()),
        Column::new(
            "animal".into(),
            ex.iter().map(|e| e.animal.as_str()).collect::<Vec<_>>(),
        ),
        Column::new(
            "column".into(),
            ex.iter().map(|e| e.column.as_str()).collect::<Vec<_>>(),
        ),
        Column::new(
            "stage".into(),
            ex.iter().map(|e| e.reason.stage()).collect::<Vec<_>>(),
        ),
        Column::new(
            "reason".into(),
            ex.iter().map(|e| e.reason.code()).collect::<Vec<_>>(),
        ),
        Column::new(
            "detail".into(),
            ex.iter().map(|e| e.detail.as_str()).collect::<Vec<_>>(),
        ),
    ])
}

/// The step table with its covariate columns appended (missing values are nulls).
///
/// # Errors
/// A polars error if the frame cannot be built.
pub fn annotated_steps_frame(steps: &Steps, cov: &Annotated) -> PolarsResult<DataFrame> {
    let mut df = steps_frame(steps)?;
    let mut extra = Vec::with_capacity(cov.columns.len());
    for c in &cov.columns {
        let name = c.name.as_str().into();
        extra.push(match &c.values {
            Values::Float(v) => Column::new(
                name,
                v.iter()
                    .map(|x| (!x.is_nan()).then_some(*x))
                    .collect::<Vec<Option<f64>>>(),
            ),
            Values::Int(v) => Column::new(name, v.clone()),
            Values::Labels { levels, codes } => Column::new(
                name,
                codes
                    .iter()
                    .map(|k| k.map(|k| levels[k as usize].as_str()))
                    .collect::<Vec<Option<&str>>>(),
            ),
        });
    }
    df.hstack_mut(&extra)?;
    Ok(df)
}

/// The missing-covariate log: animal, time_utc, column, reason, detail.
///
/// # Errors
/// A polars error if the frame cannot be built.
pub fn missing_frame(steps: &Steps, cov: &Annotated) -> PolarsResult<DataFrame> {
    let m = &cov.missing;
    let animal: Vec<&str> = m
        .iter()
        .map(|c| steps.animals[steps.animal[c.row] as usize].as_str())
        .collect();
    let time: Vec<i64> = m.iter().map(|c| steps.time_us[c.row]).collect();
    let column: Vec<&str> = m
        .iter()
        .map(|c| cov.columns[c.column].name.as_str())
        .collect();
    let reason: Vec<&str> = m.iter().map(|c| c.reason.code()).collect();
    let detail: Vec<String> = m
        .iter()
        .map(|c| c.reason.detail(&cov.columns[c.column].source))
        .collect();
    DataFrame::new_infer_height(vec![
        Column::new("animal".into(), animal),
        utc_column("time_utc", time)?,
        Column::new("column".into(), column),
        Column::new("reason".into(), reason),
        Column::new("detail".into(), detail),
    ])
}
