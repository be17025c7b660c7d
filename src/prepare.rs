//! The prepare stage: ingest → clean → steps, with a per-animal account, and its outputs.
//!
//! [`run`] does the work in memory and returns [`Prepared`]; [`write`] puts the tables in
//! the study's output folder (each file atomically):
//!
//! | file | content |
//! |---|---|
//! | `fixes_clean.parquet` | cleaned fixes, one row per fix, with source file and row |
//! | `track_smoothed.parquet` | with `[grid]`: smoothed locations on the regular grid, with standard errors |
//! | `steps.parquet` | one row per step (see [`crate::tracks::metrics`]; of the smoothed path with `[grid]`) with its covariates (see [`crate::covariates`]) |
//! | `columns.json` | the column dictionary of `steps.parquet` and the standardisation table |
//! | `covariate_missing.csv` | every missing covariate cell: animal, time, column, reason |
//! | `exclusions.csv` | every input row that was not kept, with reason |
//! | `prepare_summary.json` | per-animal counts, spans, intervals, class mix |
//! | `*.csv` | CSV copies of the Parquet tables when `output.csv = true` or `--csv` |

use std::collections::BTreeMap;

use serde::Serialize;

use crate::covariates::{self, Annotated, CovariateError, CovariateSummary};
use crate::io::{self, WriteError};
use crate::study::Study;
use crate::tracks::clean::{self, Track};
use crate::tracks::exclusions::Exclusion;
use crate::tracks::grid::{self, Smoothed, SmootherRecord};
use crate::tracks::ingest::{self, IngestError};
use crate::tracks::metrics::{self, Steps};
use crate::tracks::timeparse::format_utc;

/// What the prepare stage produced.
#[derive(Debug)]
pub struct Prepared {
    /// Cleaned tracks, sorted by animal.
    pub tracks: Vec<Track>,
    /// Smoothed paths on the regular grid, when the study asks for them.
    pub smoothed: Option<Smoothed>,
    /// Step table (of the smoothed paths when there are any, else of the cleaned fixes).
    pub steps: Steps,
    /// Covariate columns of the step table.
    pub covariates: Annotated,
    /// Every excluded row: ingest first (file order), then cleaning (animal order).
    pub exclusions: Vec<Exclusion>,
    /// The account of it all.
    pub summary: Summary,
}

/// Per-input-file row count.
#[derive(Debug, Clone, Serialize)]
pub struct FileSummary {
    pub file: String,
    pub rows: usize,
}

/// Per-animal account.
#[derive(Debug, Clone, Serialize)]
pub struct AnimalSummary {
    /// Animal id (`(no id)` collects rows whose id was empty).
    pub animal: String,
    /// Data rows attributed to this animal.
    pub rows_read: usize,
    /// Fixes kept after cleaning.
    pub fixes_kept: usize,
    /// Excluded rows by reason code.
    pub excluded: BTreeMap<String, usize>,
    /// First and last kept fix (UTC, ISO 8601), if any.
    pub first_utc: Option<String>,
    pub last_utc: Option<String>,
    /// Span of the kept fixes, days.
    pub span_days: f64,
    /// Median interval between consecutive kept fixes, seconds (None with < 2 fixes).
    pub median_interval_s: Option<f64>,
    /// Kept fixes by location class code.
    pub classes: BTreeMap<String, usize>,
    /// Segments after gap splitting, and steps.
    pub segments: usize,
    pub steps: usize,
}

/// The account of a prepare run, written as `prepare_summary.json`.
#[derive(Debug, Clone, Serialize)]
pub struct Summary {
    pub study: String,
    pub cairn_version: String,
    pub files: Vec<FileSummary>,
    pub speed_filter: String,
    pub gap_s: f64,
    pub rows_read: usize,
    pub fixes_kept: usize,
    pub steps: usize,
    pub excluded_by_reason: BTreeMap<String, usize>,
    pub animals: Vec<AnimalSummary>,
    /// The smoother's record per animal, when `[grid]` is set.
    pub smoother: Option<Vec<SmootherRecord>>,
    /// Covariate columns, missing cells by reason, unknown class codes, unmatched ids,
    /// standardisation.
    pub covariates: CovariateSummary,
}

impl Summary {
    /// Number of rows excluded in total.
    pub fn excluded(&self) -> usize {
        self.excluded_by_reason.values().sum()
    }
    /// Animals the smoother skipped, with the reason.
    pub fn skipped(&self) -> Vec<(&str, &str)> {
        self.smoother
            .iter()
            .flatten()
            .filter_map(|r| r.reason.as_deref().map(|why| (r.animal.as_str(), why)))
            .collect()
    }
}

/// Label used for rows without an animal id.
pub const NO_ID: &str = "(no id)";

/// Why the prepare stage stopped.
#[derive(Debug, thiserror::Error)]
pub enum PrepareError {
    /// An input file is unusable as a whole.
    #[error(transparent)]
    Ingest(#[from] IngestError),
    /// A covariate layer or setting cannot be applied to these tracks.
    #[error(transparent)]
    Covariates(#[from] CovariateError),
}

/// Runs ingest, cleaning, step computation and covariate annotation.
///
/// # Errors
/// [`PrepareError`] when an input file is unusable as a whole, or a covariate layer
/// cannot be read or applied.
pub fn run(study: &Study) -> Result<Prepared, PrepareError> {
    run_with_progress(study, &|_, _| {})
}

/// As [`run`], calling `progress(done, total)` as each animal's track is smoothed.
///
/// # Errors
/// As [`run`].
pub fn run_with_progress(
    study: &Study,
    progress: &(dyn Fn(usize, usize) + Sync),
) -> Result<Prepared, PrepareError> {
    let mut ingested = ingest::read_fixes(study)?;
    let files: Vec<String> = study
        .inputs()
        .iter()
        .map(|i| i.path.display().to_string())
        .collect();
    let file_rows: Vec<FileSummary> = files
        .iter()
        .zip(&ingested.rows_per_file)
        .map(|(f, &rows)| FileSummary {
            file: f.clone(),
            rows,
        })
        .collect();
    let mut exclusions = std::mem::take(&mut ingested.exclusions);
    let cleaned = clean::clean(
        ingested,
        &clean::Labels::from_study(study),
        study.speed_filter(),
    );
    exclusions.extend(cleaned.exclusions);
    let smoothed = study
        .grid()
        .map(|cfg| grid::smooth_with_progress(&cleaned.tracks, cfg, progress));
    let steps = match &smoothed {
        Some(s) => metrics::steps_of_paths(&s.paths),
        None => metrics::steps(&cleaned.tracks, study.gap_s()),
    };
    let annotated = covariates::annotate(&steps, study.covariates(), study.timezone())?;
    let mut summary = summarise(
        study,
        file_rows,
        &cleaned.tracks,
        &steps,
        &exclusions,
        annotated.summary.clone(),
    );
    summary.smoother = smoothed.as_ref().map(|s| s.records.clone());
    Ok(Prepared {
        tracks: cleaned.tracks,
        smoothed,
        steps,
        covariates: annotated,
        exclusions,
        summary,
    })
}

fn median(v: &mut [f64]) -> Option<f64> {
    if v.is_empty() {
        return None;
    }
    v.sort_by(f64::total_cmp);
    let m = v.len() / 2;
    Some(if v.len() % 2 == 1 {
        v[m]
    } else {
        0.5 * (v[m - 1] + v[m])
    })
}

fn summarise(
    study: &Study,
    files: Vec<FileSummary>,
    tracks: &[Track],
    steps: &Steps,
    exclusions: &[Exclusion],
    covariates: CovariateSummary,
) -> Summary {
    let mut animals: BTreeMap<String, AnimalSummary> = BTreeMap::new();
    let blank = |name: &str| AnimalSummary {
        animal: name.to_string(),
        rows_read: 0,
        fixes_kept: 0,
        excluded: BTreeMap::new(),
        first_utc: None,
        last_utc: None,
        span_days: 0.0,
        median_interval_s: None,
        classes: BTreeMap::new(),
        segments: 0,
        steps: 0,
    };
    // Steps and segments per animal, from the step table (smoothed or not).
    let mut steps_per: BTreeMap<&str, (usize, std::collections::BTreeSet<u32>)> = BTreeMap::new();
    for (&a, &seg) in steps.animal.iter().zip(&steps.segment) {
        let e = steps_per
            .entry(steps.animals[a as usize].as_str())
            .or_default();
        e.0 += 1;
        e.1.insert(seg);
    }
    for t in tracks {
        let mut s = blank(&t.animal);
        s.fixes_kept = t.fixes.len();
        s.rows_read = t.fixes.len();
        if let (Some(a), Some(b)) = (t.fixes.first(), t.fixes.last()) {
            s.first_utc = Some(format_utc(a.time_us));
            s.last_utc = Some(format_utc(b.time_us));
            s.span_days = (b.time_us - a.time_us) as f64 * 1e-6 / 86_400.0;
        }
        let mut dts: Vec<f64> = t
            .fixes
            .windows(2)
            .map(|w| (w[1].time_us - w[0].time_us) as f64 * 1e-6)
            .collect();
        s.median_interval_s = median(&mut dts);
        for f in &t.fixes {
            *s.classes.entry(f.class.code().to_string()).or_default() += 1;
        }
        if let Some((n, segs)) = steps_per.get(t.animal.as_str()) {
            s.steps = *n;
            s.segments = segs.len();
        }
        animals.insert(t.animal.clone(), s);
    }
    let mut by_reason: BTreeMap<String, usize> = BTreeMap::new();
    for e in exclusions {
        let name = if e.animal.is_empty() {
            NO_ID
        } else {
            e.animal.as_str()
        };
        let s = animals
            .entry(name.to_string())
            .or_insert_with(|| blank(name));
        s.rows_read += 1;
        *s.excluded.entry(e.reason.code().to_string()).or_default() += 1;
        *by_reason.entry(e.reason.code().to_string()).or_default() += 1;
    }
    let animals: Vec<AnimalSummary> = animals.into_values().collect();
    Summary {
        study: study.name().to_string(),
        cairn_version: env!("CARGO_PKG_VERSION").to_string(),
        rows_read: files.iter().map(|f| f.rows).sum(),
        files,
        speed_filter: study.speed_filter().to_string(),
        gap_s: study.gap_s(),
        fixes_kept: tracks.iter().map(|t| t.fixes.len()).sum(),
        steps: steps.len(),
        excluded_by_reason: by_reason,
        animals,
        smoother: None,
        covariates,
    }
}

/// Files written by [`write`].
#[derive(Debug, Clone, Serialize)]
pub struct Written {
    pub files: Vec<String>,
}

/// Writes the prepare outputs into the study's output folder.
///
/// # Errors
/// [`WriteError`] naming the file that could not be written; files already written stay
/// complete (each is written atomically).
pub fn write(study: &Study, p: &Prepared, csv: bool) -> Result<Written, WriteError> {
    let out = study.output();
    let files: Vec<String> = study
        .inputs()
        .iter()
        .map(|i| i.path.display().to_string())
        .collect();
    let frame_err = |name: &str, e: polars::prelude::PolarsError| WriteError {
        path: out.join(name),
        reason: e.to_string(),
    };
    let mut fixes = io::fixes_frame(&p.tracks, &files).map_err(|e| frame_err("fixes_clean", e))?;
    let mut steps =
        io::annotated_steps_frame(&p.steps, &p.covariates).map_err(|e| frame_err("steps", e))?;
    let mut missing = io::missing_frame(&p.steps, &p.covariates)
        .map_err(|e| frame_err("covariate_missing", e))?;
    let mut excl = io::exclusions_frame(&p.exclusions).map_err(|e| frame_err("exclusions", e))?;
    let mut written = Vec::new();
    let mut put = |name: &str| {
        written.push(out.join(name).display().to_string());
        out.join(name)
    };
    io::write_parquet(&put("fixes_clean.parquet"), &mut fixes)?;
    io::write_parquet(&put("steps.parquet"), &mut steps)?;
    io::write_csv(&put("exclusions.csv"), &mut excl)?;
    let mut smoothed = match &p.smoothed {
        Some(s) => Some(io::smoothed_frame(s).map_err(|e| frame_err("track_smoothed", e))?),
        None => None,
    };
    if let Some(df) = smoothed.as_mut() {
        io::write_parquet(&put("track_smoothed.parquet"), df)?;
    }
    io::write_csv(&put("covariate_missing.csv"), &mut missing)?;
    if csv {
        io::write_csv(&put("fixes_clean.csv"), &mut fixes)?;
        io::write_csv(&put("steps.csv"), &mut steps)?;
        if let Some(df) = smoothed.as_mut() {
            io::write_csv(&put("track_smoothed.csv"), df)?;
        }
    }
    io::write_json(
        &put("columns.json"),
        &covariates::dictionary::dictionary(&p.covariates),
    )?;
    io::write_json(&put("prepare_summary.json"), &p.summary)?;
    Ok(Written { files: written })
}
