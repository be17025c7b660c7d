//! The fit stage: the prepared step table → candidate models → comparison → decoding.
//!
//! [`run`] reads `steps.parquet` from the study's output folder, cuts it into series
//! (one per animal and segment: independent series sharing parameters), builds each
//! candidate's transition design from the table's columns, fits every candidate with the
//! study's random starts, compares them (AIC, BIC), picks one by the study's rule and
//! decodes it (Viterbi path and local state probabilities) and, when it has covariates,
//! computes its occupancy and transition curves with 95% intervals
//! ([`crate::summaries::occupancy`]). [`write`] saves each model as JSON, the comparison
//! table, the decoded step table and the curves, each atomically.
//!
//! Streams: the step length (`step_m`, the study's step family, with a per-state zero mass
//! when `model.zero_mass = true`) and, unless `model.angle = "none"`, the turning angle
//! (`turn_rad`; missing at the first step of each segment, which the likelihood integrates
//! out). The covariate value recorded at step t governs the transition from the state at t
//! to the state at t + 1.

use std::collections::BTreeMap;
use std::fs::File;
use std::path::{Path, PathBuf};

use polars::prelude::*;

use crate::hmm::design::{Design, RawColumn};
use crate::hmm::error::HmmError;
use crate::hmm::fit::{FitProgress, fit_objective_with_progress};
use crate::hmm::inference::{ComparisonRow, compare};
use crate::hmm::io::CovariateScaling;
use crate::hmm::{
    Data, Family, FitOptions, FittedModel, InitialDistribution, ModelSpec, Objective, Series,
    StreamSpec,
};
use crate::io::{self, WriteError};
use crate::study::Study;
use crate::study::model::{AngleFamily, Candidate, ModelSettings, Selection, StepFamily, Term};
use crate::summaries::occupancy::{CurveRow, Occupancy, OccupancyOptions, occupancy_curves};

/// Problems of the fit stage.
#[derive(Debug, thiserror::Error)]
pub enum FitStageError {
    #[error("study {path} has no [model] section: add one (see `cairn init` for a template)")]
    NoModel { path: PathBuf },
    #[error("{path} does not exist: run `cairn prepare` first")]
    MissingSteps { path: PathBuf },
    #[error("cannot read {path}: {reason}")]
    Read { path: PathBuf, reason: String },
    #[error("{path}, column `{column}`: {reason}")]
    Column {
        path: PathBuf,
        column: String,
        reason: String,
    },
    #[error("model `{candidate}`: {source}")]
    Model { candidate: String, source: HmmError },
    #[error("every candidate model failed:\n{0}")]
    AllFailed(String),
    #[error("the selected model `{0}` could not be fitted (see above)")]
    SelectedFailed(String),
    #[error(transparent)]
    Write(#[from] WriteError),
}

/// One candidate and its outcome.
#[derive(Debug)]
pub struct CandidateFit {
    /// The candidate as the study declares it.
    pub candidate: Candidate,
    /// The design's column names (after expanding cyclic and factor terms).
    pub covariates: Vec<String>,
    /// The fitted model, or why it could not be fitted.
    pub result: Result<FittedModel, String>,
}

/// Decoded states of the selected model, row-aligned with the step table.
#[derive(Debug, Clone)]
pub struct Decoded {
    /// Viterbi state per step (0-based, model state order).
    pub state: Vec<usize>,
    /// Local state probabilities per step, row-major (steps × states).
    pub probs: Vec<f64>,
    /// State labels.
    pub labels: Vec<String>,
}

/// Everything the fit stage produced.
#[derive(Debug)]
pub struct FitStage {
    /// Every candidate, in study order.
    pub fits: Vec<CandidateFit>,
    /// Comparison of the candidates that were fitted (sorted by AIC).
    pub comparison: Vec<ComparisonRow>,
    /// Index into `fits` of the selected model.
    pub selected: usize,
    /// Decoded states of the selected model.
    pub decoded: Decoded,
    /// The step table the models were fitted to (rows with a missing covariate of any
    /// candidate left out; a `series` column names the independent series).
    pub steps: DataFrame,
    /// Steps left out because a covariate of some candidate was missing.
    pub dropped_steps: usize,
    /// Occupancy and transition curves of the selected model (when it has covariates and
    /// a usable covariance), or why they could not be computed.
    pub curves: Option<Occupancy>,
    /// Why the curves are absent, when the selected model has covariates.
    pub curves_note: Option<String>,
}

impl FitStage {
    /// Whether every fitted candidate converged and has a usable covariance.
    pub fn all_clean(&self) -> bool {
        self.fits.iter().all(|f| match &f.result {
            Ok(m) => m.convergence().converged && m.covariance().problem().is_none(),
            Err(_) => false,
        })
    }
}

fn read_err(path: &Path, e: impl std::fmt::Display) -> FitStageError {
    FitStageError::Read {
        path: path.to_path_buf(),
        reason: e.to_string(),
    }
}

/// Reads the prepared step table.
///
/// # Errors
/// [`FitStageError`] when the file is missing or unreadable.
pub fn read_steps(study: &Study) -> Result<(PathBuf, DataFrame), FitStageError> {
    let path = study.output().join("steps.parquet");
    if !path.is_file() {
        return Err(FitStageError::MissingSteps { path });
    }
    let f = File::open(&path).map_err(|e| read_err(&path, e))?;
    let df = ParquetReader::new(f)
        .finish()
        .map_err(|e| read_err(&path, e))?;
    Ok((path, df))
}

pub(crate) fn f64_column(
    path: &Path,
    df: &DataFrame,
    name: &str,
) -> Result<Vec<f64>, FitStageError> {
    let col = df.column(name).map_err(|_| FitStageError::Column {
        path: path.to_path_buf(),
        column: name.to_string(),
        reason: format!(
            "no such column; the table has: {}",
            df.get_column_names()
                .iter()
                .map(|c| c.as_str())
                .collect::<Vec<_>>()
                .join(", ")
        ),
    })?;
    let s = col
        .as_materialized_series()
        .cast(&DataType::Float64)
        .map_err(|e| FitStageError::Column {
            path: path.to_path_buf(),
            column: name.to_string(),
            reason: format!("not numeric: {e}"),
        })?;
    let ca = s.f64().map_err(|e| read_err(path, e))?;
    Ok(ca.iter().map(|v| v.unwrap_or(f64::NAN)).collect())
}

pub(crate) fn text_column(
    path: &Path,
    df: &DataFrame,
    name: &str,
) -> Result<Vec<String>, FitStageError> {
    let s = df
        .column(name)
        .map_err(|e| read_err(path, e))?
        .as_materialized_series()
        .cast(&DataType::String)
        .map_err(|e| read_err(path, e))?;
    let ca = s.str().map_err(|e| read_err(path, e))?;
    Ok(ca.iter().map(|v| v.unwrap_or("").to_string()).collect())
}

/// Series boundaries: runs of equal series id, `(id, start, end)`.
fn series_bounds(series: &[String]) -> Vec<(String, usize, usize)> {
    let mut out = Vec::new();
    let mut start = 0;
    for k in 1..=series.len() {
        if k == series.len() || series[k] != series[start] {
            out.push((series[start].clone(), start, k));
            start = k;
        }
    }
    out
}

/// The steps every candidate can use: rows where a covariate of any candidate is missing
/// (a location outside a raster or on its nodata, an animal absent from the attribute
/// table…) are left out of every candidate, so that all candidates are fitted to the same
/// steps and their AIC and BIC stay comparable; nothing is filled in. A series (animal and
/// segment) is split where rows were left out, and the `series` column added to the
/// table names the pieces (`animal#segment`, then `animal#segment.2`, … after a hole).
/// Returns the table of usable rows and the number left out.
fn complete_steps(
    path: &Path,
    df: DataFrame,
    settings: &ModelSettings,
) -> Result<(DataFrame, usize), FitStageError> {
    let terms: Vec<Term> = settings
        .candidates
        .iter()
        .flat_map(|c| c.terms.iter().cloned())
        .collect();
    let raw = raw_columns(path, &df, &terms)?;
    let n = df.height();
    let mut keep = vec![true; n];
    for col in raw.values() {
        match col {
            RawColumn::Numeric(v) => {
                for (k, x) in keep.iter_mut().zip(v) {
                    *k &= x.is_finite();
                }
            }
            RawColumn::Categorical(v) => {
                for (k, x) in keep.iter_mut().zip(v) {
                    *k &= !x.is_empty();
                }
            }
        }
    }
    let animal = text_column(path, &df, "animal")?;
    let segment = f64_column(path, &df, "segment")?;
    let mut series = Vec::with_capacity(n);
    let mut piece = 1;
    for i in 0..n {
        if i > 0 && (animal[i] != animal[i - 1] || segment[i] != segment[i - 1]) {
            piece = 1;
        } else if i > 0 && !keep[i - 1] && keep[i] {
            piece += 1;
        }
        series.push(if piece == 1 {
            format!("{}#{}", animal[i], segment[i])
        } else {
            format!("{}#{}.{piece}", animal[i], segment[i])
        });
    }
    let dropped = keep.iter().filter(|k| !**k).count();
    let mut df = df;
    df.with_column(Column::new("series".into(), series))
        .map_err(|e| read_err(path, e))?;
    let mask = BooleanChunked::from_slice("keep".into(), &keep);
    let df = df.filter(&mask).map_err(|e| read_err(path, e))?;
    if df.height() == 0 {
        return Err(read_err(
            path,
            "every step has a missing covariate of some candidate; see covariate_missing.csv",
        ));
    }
    Ok((df, dropped))
}

pub(crate) fn design_of(terms: &[Term]) -> Design {
    terms.iter().fold(Design::new(), |d, t| match t {
        Term::Numeric { column } => d.numeric(column),
        Term::Cyclic { column, period } => d.cyclic(column, *period),
        Term::Factor { column, reference } => d.categorical(column, reference),
        Term::Interaction { a, b } => d.interaction(a, b),
    })
}

/// Raw columns the terms read, from the step table (original scale).
fn raw_columns(
    path: &Path,
    df: &DataFrame,
    terms: &[Term],
) -> Result<BTreeMap<String, RawColumn>, FitStageError> {
    let mut cols = BTreeMap::new();
    for t in terms {
        for c in t.columns() {
            if cols.contains_key(c) {
                continue;
            }
            let raw = match t {
                Term::Factor { .. } => RawColumn::Categorical(text_column(path, df, c)?),
                _ => RawColumn::Numeric(f64_column(path, df, c)?),
            };
            cols.insert(c.to_string(), raw);
        }
    }
    Ok(cols)
}

/// Centres and scales, in place, every column that a plain numeric term reads, and returns
/// the (centre, scale) used: the mean and standard deviation of its finite values.
///
/// Fitting on standardised covariates keeps the transition coefficients of one order of
/// magnitude (a raw latitude of 69 with a slope would otherwise swamp the intercept and
/// stall the optimiser); coefficients are reported per standard deviation and per unit,
/// and curves are drawn on the original scale. Cyclic and categorical columns are left as
/// they are (their terms are bounded by construction).
pub(crate) fn standardise(
    terms: &[Term],
    cols: &mut BTreeMap<String, RawColumn>,
) -> Vec<CovariateScaling> {
    let mut out = Vec::new();
    for t in terms {
        let Term::Numeric { column } = t else {
            continue;
        };
        if out.iter().any(|s: &CovariateScaling| &s.name == column) {
            continue;
        }
        if let Some(RawColumn::Numeric(v)) = cols.get_mut(column) {
            let finite: Vec<f64> = v.iter().copied().filter(|x| x.is_finite()).collect();
            if finite.len() < 2 {
                continue;
            }
            let n = finite.len() as f64;
            let mean = finite.iter().sum::<f64>() / n;
            let sd = (finite.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (n - 1.0)).sqrt();
            if sd.partial_cmp(&0.0) != Some(std::cmp::Ordering::Greater) {
                // A constant column: left as it is, so the engine reports it as constant.
                continue;
            }
            for x in v.iter_mut() {
                *x = (*x - mean) / sd;
            }
            out.push(CovariateScaling {
                name: column.clone(),
                center: mean,
                scale: sd,
            });
        }
    }
    out
}

/// Design column names, row-major values and the scaling applied.
type DesignValues = (Vec<String>, Vec<f64>, Vec<CovariateScaling>);

/// Parameters of a model without covariates, extended with zero coefficients for `p`
/// covariates (transition rows are `[intercept, covariates…]` per off-diagonal pair).
fn with_zero_covariates(base: &crate::hmm::Params, n: usize, p: usize) -> crate::hmm::Params {
    let rows = n * (n - 1);
    let mut beta = Vec::with_capacity(rows * (1 + p));
    for r in 0..rows {
        beta.push(base.beta[r]);
        beta.extend(std::iter::repeat_n(0.0, p));
    }
    crate::hmm::Params {
        streams: base.streams.clone(),
        beta,
        delta: base.delta.clone(),
    }
}

/// The candidate's design on standardised numeric columns: column names, row-major
/// values (empty without terms) and the scaling used.
fn design_values(
    path: &Path,
    df: &DataFrame,
    c: &Candidate,
) -> Result<DesignValues, FitStageError> {
    if c.terms.is_empty() {
        return Ok((Vec::new(), Vec::new(), Vec::new()));
    }
    let mut raw = raw_columns(path, df, &c.terms)?;
    let scaling = standardise(&c.terms, &mut raw);
    let m = design_of(&c.terms)
        .build(&raw)
        .map_err(|source| FitStageError::Model {
            candidate: c.name.clone(),
            source,
        })?;
    Ok((m.names().to_vec(), m.values().to_vec(), scaling))
}

fn spec_of(settings: &ModelSettings, c: &Candidate, covariates: &[String]) -> ModelSpec {
    let family = match settings.step {
        StepFamily::Gamma => Family::Gamma,
        StepFamily::Weibull => Family::Weibull,
        StepFamily::LogNormal => Family::LogNormal,
    };
    let mut step = StreamSpec::new("step", family);
    if settings.zero_mass {
        step = step.with_zero_mass();
    }
    let mut streams = vec![step];
    if let Some(a) = settings.angle {
        streams.push(StreamSpec::new(
            "angle",
            match a {
                AngleFamily::VonMises => Family::VonMises,
                AngleFamily::WrappedCauchy => Family::WrappedCauchy,
            },
        ));
    }
    let names: Vec<&str> = covariates.iter().map(String::as_str).collect();
    let labels: Vec<&str> = c.labels.iter().map(String::as_str).collect();
    ModelSpec::new(c.n_states, streams)
        .with_covariates(&names)
        .with_initial(if settings.stationary_start {
            InitialDistribution::Stationary
        } else {
            InitialDistribution::Estimated
        })
        .with_labels(&labels)
}

/// The data of one candidate: series with the streams and the candidate's design.
fn data_of(
    settings: &ModelSettings,
    bounds: &[(String, usize, usize)],
    step: &[f64],
    angle: &[f64],
    covariates: &[String],
    values: &[f64],
) -> Result<Data, HmmError> {
    let p = covariates.len();
    let series = bounds
        .iter()
        .map(|(id, a, b)| {
            let mut streams = vec![step[*a..*b].to_vec()];
            if settings.angle.is_some() {
                streams.push(angle[*a..*b].to_vec());
            }
            Series::new(id.clone(), streams, values[a * p..b * p].to_vec())
        })
        .collect();
    let mut names = vec!["step".to_string()];
    if settings.angle.is_some() {
        names.push("angle".to_string());
    }
    Data::new(names, covariates.to_vec(), series)
}

/// What both fitting and reloading a fit start from: the settings, the usable steps and
/// their series.
struct FitInputs<'a> {
    settings: &'a ModelSettings,
    path: PathBuf,
    df: DataFrame,
    dropped: usize,
    bounds: Vec<(String, usize, usize)>,
    step: Vec<f64>,
    angle: Vec<f64>,
}

fn fit_inputs(study: &Study) -> Result<FitInputs<'_>, FitStageError> {
    let settings = study.model().ok_or_else(|| FitStageError::NoModel {
        path: study.source().to_path_buf(),
    })?;
    let (path, df) = read_steps(study)?;
    let (df, dropped) = complete_steps(&path, df, settings)?;
    let series = text_column(&path, &df, "series")?;
    let step = f64_column(&path, &df, "step_m")?;
    let angle = f64_column(&path, &df, "turn_rad")?;
    let bounds = series_bounds(&series);
    Ok(FitInputs {
        settings,
        path,
        df,
        dropped,
        bounds,
        step,
        angle,
    })
}

/// Fits every candidate of the study and decodes the selected one.
///
/// `progress` is called with a line of text before each candidate, after each of its
/// random starts and before its Hessian.
///
/// # Errors
/// [`FitStageError`] when the study has no `[model]`, the step table is missing or a term
/// names a column it does not have, or no candidate (or not the selected one) could be
/// fitted.
pub fn run(study: &Study, progress: &mut dyn FnMut(&str)) -> Result<FitStage, FitStageError> {
    let FitInputs {
        settings,
        path,
        df,
        dropped,
        bounds,
        step,
        angle,
    } = fit_inputs(study)?;

    // Candidates without covariates are fitted first: their estimates, with every
    // covariate coefficient at zero, are the first start of the covariate candidates with
    // the same number of states. A nested model then starts where the simpler one ended,
    // so it cannot end below it for want of a good start.
    let mut order: Vec<usize> = (0..settings.candidates.len()).collect();
    order.sort_by_key(|&i| !settings.candidates[i].terms.is_empty());
    let mut slots: Vec<Option<CandidateFit>> = settings.candidates.iter().map(|_| None).collect();
    let mut bases: BTreeMap<usize, crate::hmm::Params> = BTreeMap::new();
    for i in order {
        let c = &settings.candidates[i];
        progress(&format!(
            "fitting `{}`: {} states, {} covariate term(s), {} starts",
            c.name,
            c.n_states,
            c.terms.len(),
            settings.starts
        ));
        let (covariates, values, scaling) = design_values(&path, &df, c)?;
        let spec = spec_of(settings, c, &covariates);
        let start = bases
            .get(&c.n_states)
            .map(|b| with_zero_covariates(b, c.n_states, covariates.len()));
        let mut best: Option<f64> = None;
        let mut on_progress = |p: FitProgress| match p {
            FitProgress::StartDone { index, of, loglik } => {
                if let Some(l) = loglik {
                    best = Some(best.map_or(l, |b| b.max(l)));
                }
                progress(&format!(
                    "fitting `{}`: start {} of {of} done{}",
                    c.name,
                    index + 1,
                    best.map_or(String::new(), |b| format!(", best log L so far {b:.2}"))
                ));
            }
            FitProgress::Hessian => progress(&format!(
                "fitting `{}`: Hessian and standard errors at the best optimum",
                c.name
            )),
        };
        let result = data_of(settings, &bounds, &step, &angle, &covariates, &values)
            .and_then(|data| {
                let obj = Objective::new(&spec, &data)?;
                fit_objective_with_progress(
                    &obj,
                    &FitOptions {
                        n_starts: settings.starts,
                        seed: settings.seed,
                        share_full_runs: settings.share_runs,
                        start,
                        ..FitOptions::default()
                    },
                    &mut on_progress,
                )
            })
            .map(|mut m| {
                m.set_covariate_scaling(scaling);
                m
            })
            .map_err(|e| e.to_string());
        match &result {
            Err(e) => progress(&format!("  `{}` could not be fitted: {e}", c.name)),
            Ok(m) if c.terms.is_empty() => {
                bases
                    .entry(c.n_states)
                    .or_insert_with(|| m.params().clone());
            }
            Ok(_) => {}
        }
        slots[i] = Some(CandidateFit {
            candidate: c.clone(),
            covariates,
            result,
        });
    }
    let fits: Vec<CandidateFit> = slots.into_iter().flatten().collect();
    finish(settings, &path, df, dropped, &bounds, &step, &angle, fits)
}

/// Compares the fitted candidates, selects one by the study's rule, decodes it and
/// computes its occupancy curves.
#[allow(clippy::too_many_arguments)]
fn finish(
    settings: &ModelSettings,
    path: &Path,
    df: DataFrame,
    dropped: usize,
    bounds: &[(String, usize, usize)],
    step: &[f64],
    angle: &[f64],
    fits: Vec<CandidateFit>,
) -> Result<FitStage, FitStageError> {
    let ok: Vec<(&str, &FittedModel)> = fits
        .iter()
        .filter_map(|f| {
            f.result
                .as_ref()
                .ok()
                .map(|m| (f.candidate.name.as_str(), m))
        })
        .collect();
    if ok.is_empty() {
        let why: Vec<String> = fits
            .iter()
            .map(|f| {
                format!(
                    "  {}: {}",
                    f.candidate.name,
                    f.result.as_ref().err().map_or("", |s| s)
                )
            })
            .collect();
        return Err(FitStageError::AllFailed(why.join("\n")));
    }
    let comparison = compare(&ok);
    let selected = match &settings.select {
        Selection::Aic | Selection::Bic => {
            let key = |m: &FittedModel| match settings.select {
                Selection::Bic => m.bic(),
                _ => m.aic(),
            };
            fits.iter()
                .enumerate()
                .filter_map(|(i, f)| f.result.as_ref().ok().map(|m| (i, key(m))))
                .min_by(|a, b| a.1.total_cmp(&b.1))
                .map(|(i, _)| i)
                .unwrap_or(0)
        }
        Selection::Named(name) => {
            let i = fits
                .iter()
                .position(|f| &f.candidate.name == name)
                .unwrap_or(0);
            if fits[i].result.is_err() {
                return Err(FitStageError::SelectedFailed(name.clone()));
            }
            i
        }
    };
    let chosen = &fits[selected];
    let model = chosen
        .result
        .as_ref()
        .map_err(|_| FitStageError::SelectedFailed(chosen.candidate.name.clone()))?;
    let (_, values, _) = design_values(path, &df, &chosen.candidate)?;
    let data =
        data_of(settings, bounds, step, angle, &chosen.covariates, &values).map_err(|source| {
            FitStageError::Model {
                candidate: chosen.candidate.name.clone(),
                source,
            }
        })?;
    let m = model.model();
    let model_err = |source| FitStageError::Model {
        candidate: chosen.candidate.name.clone(),
        source,
    };
    let paths = m.viterbi(&data).map_err(model_err)?;
    let probs = m.state_probabilities(&data).map_err(model_err)?;
    let decoded = Decoded {
        state: paths
            .iter()
            .flat_map(|p| p.states.iter().copied())
            .collect(),
        probs: probs.iter().flat_map(|p| p.probs.iter().copied()).collect(),
        labels: chosen.candidate.labels.clone(),
    };
    let (curves, curves_note) = if chosen.candidate.terms.is_empty() {
        (None, None)
    } else {
        let observed = raw_columns(path, &df, &chosen.candidate.terms)?;
        match occupancy_curves(
            model,
            &chosen.candidate.terms,
            &observed,
            &OccupancyOptions::default(),
        ) {
            Ok(c) => (Some(c), None),
            Err(e) => (None, Some(format!("occupancy curves not computed: {e}"))),
        }
    };
    Ok(FitStage {
        fits,
        comparison,
        selected,
        decoded,
        steps: df,
        dropped_steps: dropped,
        curves,
        curves_note,
    })
}

/// Rebuilds the fit stage from what `fit` wrote: the step table, `fit_summary.json` and
/// `models/<candidate>.json`. The selected model is decoded and its curves computed again
/// (both deterministic), so a report drawn from the files equals one drawn in memory.
///
/// # Errors
/// [`FitStageError`] when the study has no `[model]`, a file is missing or unreadable, or
/// a candidate of the study was neither fitted nor recorded as failed (run `cairn fit`).
pub fn load(study: &Study) -> Result<FitStage, FitStageError> {
    let FitInputs {
        settings,
        path,
        df,
        dropped,
        bounds,
        step,
        angle,
    } = fit_inputs(study)?;
    let summary_path = study.output().join("fit_summary.json");
    let text = std::fs::read_to_string(&summary_path).map_err(|e| read_err(&summary_path, e))?;
    let summary: serde_json::Value =
        serde_json::from_str(&text).map_err(|e| read_err(&summary_path, e))?;
    let recorded = summary["candidates"]
        .as_array()
        .cloned()
        .unwrap_or_default();
    let mut fits = Vec::new();
    for c in &settings.candidates {
        let rec = recorded
            .iter()
            .find(|r| r["name"].as_str() == Some(c.name.as_str()));
        let Some(rec) = rec else {
            return Err(read_err(
                &summary_path,
                format!(
                    "candidate `{}` is not in the fit summary; run `cairn fit` again",
                    c.name
                ),
            ));
        };
        let covariates: Vec<String> = rec["covariates"]
            .as_array()
            .map(|a| {
                a.iter()
                    .filter_map(|v| v.as_str().map(String::from))
                    .collect()
            })
            .unwrap_or_default();
        let result = if rec["fitted"].as_bool() == Some(true) {
            let mp = study
                .output()
                .join("models")
                .join(format!("{}.json", c.slug()));
            Ok(FittedModel::load(&mp).map_err(|e| read_err(&mp, e))?)
        } else {
            Err(rec["error"].as_str().unwrap_or("not fitted").to_string())
        };
        fits.push(CandidateFit {
            candidate: c.clone(),
            covariates,
            result,
        });
    }
    finish(settings, &path, df, dropped, &bounds, &step, &angle, fits)
}

/// The data of the selected model (its series and design), e.g. for pseudo-residuals.
///
/// # Errors
/// [`FitStageError`] when the design cannot be rebuilt from the step table.
pub fn selected_data(study: &Study, stage: &FitStage) -> Result<Data, FitStageError> {
    let settings = study.model().ok_or_else(|| FitStageError::NoModel {
        path: study.source().to_path_buf(),
    })?;
    let path = study.output().join("steps.parquet");
    let df = &stage.steps;
    let series = text_column(&path, df, "series")?;
    let step = f64_column(&path, df, "step_m")?;
    let angle = f64_column(&path, df, "turn_rad")?;
    let bounds = series_bounds(&series);
    let chosen = &stage.fits[stage.selected];
    let (_, values, _) = design_values(&path, df, &chosen.candidate)?;
    data_of(
        settings,
        &bounds,
        &step,
        &angle,
        &chosen.covariates,
        &values,
    )
    .map_err(|source| FitStageError::Model {
        candidate: chosen.candidate.name.clone(),
        source,
    })
}

fn curve_frame(rows: &[CurveRow]) -> PolarsResult<DataFrame> {
    DataFrame::new_infer_height(vec![
        Column::new(
            "covariate".into(),
            rows.iter()
                .map(|r| r.covariate.as_str())
                .collect::<Vec<_>>(),
        ),
        Column::new(
            "value".into(),
            rows.iter()
                .map(|r| (!r.value.is_nan()).then_some(r.value))
                .collect::<Vec<_>>(),
        ),
        Column::new(
            "level".into(),
            rows.iter().map(|r| r.level.as_deref()).collect::<Vec<_>>(),
        ),
        Column::new(
            "quantity".into(),
            rows.iter().map(|r| r.quantity.as_str()).collect::<Vec<_>>(),
        ),
        Column::new(
            "estimate".into(),
            rows.iter().map(|r| r.estimate).collect::<Vec<_>>(),
        ),
        Column::new("se".into(), rows.iter().map(|r| r.se).collect::<Vec<_>>()),
        Column::new(
            "lower_95".into(),
            rows.iter().map(|r| r.lower).collect::<Vec<_>>(),
        ),
        Column::new(
            "upper_95".into(),
            rows.iter().map(|r| r.upper).collect::<Vec<_>>(),
        ),
    ])
}

/// Writes `models/<candidate>.json`, `model_comparison.csv`, `decoded.parquet` and
/// `fit_summary.json` into the study's output folder.
///
/// # Errors
/// [`FitStageError::Write`] naming the file that could not be written.
pub fn write(study: &Study, stage: &FitStage) -> Result<Vec<PathBuf>, FitStageError> {
    let out = study.output();
    let mut written = Vec::new();
    for f in &stage.fits {
        if let Ok(m) = &f.result {
            let path = out
                .join("models")
                .join(format!("{}.json", f.candidate.slug()));
            let json = m.to_json().map_err(|e| WriteError {
                path: path.clone(),
                reason: e.to_string(),
            })?;
            io::write_atomic(&path, |w| {
                use std::io::Write;
                w.write_all(json.as_bytes()).map_err(|e| e.to_string())
            })?;
            written.push(path);
        }
    }
    // Comparison table.
    let by_name: BTreeMap<&str, &CandidateFit> = stage
        .fits
        .iter()
        .map(|f| (f.candidate.name.as_str(), f))
        .collect();
    let rows = &stage.comparison;
    let get = |r: &ComparisonRow| {
        by_name
            .get(r.name.as_str())
            .and_then(|f| f.result.as_ref().ok())
    };
    let frame = DataFrame::new_infer_height(vec![
        Column::new(
            "model".into(),
            rows.iter().map(|r| r.name.clone()).collect::<Vec<_>>(),
        ),
        Column::new(
            "states".into(),
            rows.iter().map(|r| r.n_states as u32).collect::<Vec<_>>(),
        ),
        Column::new(
            "covariates".into(),
            rows.iter()
                .map(|r| {
                    by_name
                        .get(r.name.as_str())
                        .map(|f| f.covariates.join(" + "))
                        .unwrap_or_default()
                })
                .collect::<Vec<_>>(),
        ),
        Column::new(
            "parameters".into(),
            rows.iter().map(|r| r.n_params as u32).collect::<Vec<_>>(),
        ),
        Column::new(
            "log_likelihood".into(),
            rows.iter().map(|r| r.loglik).collect::<Vec<_>>(),
        ),
        Column::new("aic".into(), rows.iter().map(|r| r.aic).collect::<Vec<_>>()),
        Column::new(
            "delta_aic".into(),
            rows.iter().map(|r| r.delta_aic).collect::<Vec<_>>(),
        ),
        Column::new("bic".into(), rows.iter().map(|r| r.bic).collect::<Vec<_>>()),
        Column::new(
            "delta_bic".into(),
            rows.iter().map(|r| r.delta_bic).collect::<Vec<_>>(),
        ),
        Column::new(
            "starts_at_best".into(),
            rows.iter()
                .map(|r| get(r).map_or(0, |m| m.convergence().n_at_best as u32))
                .collect::<Vec<_>>(),
        ),
        Column::new(
            "converged".into(),
            rows.iter().map(|r| r.converged).collect::<Vec<_>>(),
        ),
        Column::new(
            "covariance".into(),
            rows.iter()
                .map(|r| {
                    get(r)
                        .map(|m| m.covariance().problem().unwrap_or_else(|| "ok".to_string()))
                        .unwrap_or_default()
                })
                .collect::<Vec<_>>(),
        ),
    ]);
    let mut frame = frame.map_err(|e| WriteError {
        path: out.join("model_comparison.csv"),
        reason: e.to_string(),
    })?;
    let p = out.join("model_comparison.csv");
    io::write_csv(&p, &mut frame)?;
    written.push(p);

    // Decoded step table: the step table plus state, label and probabilities.
    let d = &stage.decoded;
    let n = d.labels.len();
    let mut df = stage.steps.clone();
    let frame_err = |e: PolarsError| WriteError {
        path: out.join("decoded.parquet"),
        reason: e.to_string(),
    };
    df.with_column(Column::new(
        "state".into(),
        d.state
            .iter()
            .map(|&s| d.labels[s].clone())
            .collect::<Vec<_>>(),
    ))
    .map_err(frame_err)?;
    df.with_column(Column::new(
        "state_index".into(),
        d.state.iter().map(|&s| s as u32 + 1).collect::<Vec<_>>(),
    ))
    .map_err(frame_err)?;
    for (j, label) in d.labels.iter().enumerate() {
        let name = format!("p_{}", label.replace(' ', "_"));
        let col: Vec<f64> = (0..d.state.len()).map(|t| d.probs[t * n + j]).collect();
        df.with_column(Column::new(name.into(), col))
            .map_err(frame_err)?;
    }
    let p = out.join("decoded.parquet");
    io::write_parquet(&p, &mut df)?;
    written.push(p);
    if study.write_csv() {
        let p = out.join("decoded.csv");
        io::write_csv(&p, &mut df)?;
        written.push(p);
    }

    // Occupancy and transition curves of the selected model across its covariates.
    if let Some(curves) = stage.curves.as_ref() {
        for (name, rows) in [
            ("occupancy_curves.csv", &curves.stationary),
            ("transition_curves.csv", &curves.transitions),
        ] {
            let p = out.join(name);
            let mut frame = curve_frame(rows).map_err(|e| WriteError {
                path: p.clone(),
                reason: e.to_string(),
            })?;
            io::write_csv(&p, &mut frame)?;
            written.push(p);
        }
    }

    // Which model was selected and how.
    let sel = &stage.fits[stage.selected];
    let summary = serde_json::json!({
        "study": study.name(),
        "cairn_version": env!("CARGO_PKG_VERSION"),
        "selection": study.model().map(|m| &m.select),
        "selected": sel.candidate.name,
        "selected_file": format!("models/{}.json", sel.candidate.slug()),
        "steps_used": stage.steps.height(),
        "steps_left_out_missing_covariate": stage.dropped_steps,
        "candidates": stage.fits.iter().map(|f| serde_json::json!({
            "name": f.candidate.name,
            "states": f.candidate.n_states,
            "labels": f.candidate.labels,
            "terms": f.candidate.terms,
            "covariates": f.covariates,
            "fitted": f.result.is_ok(),
            "error": f.result.as_ref().err(),
            "converged": f.result.as_ref().ok().map(|m| m.convergence().converged),
        })).collect::<Vec<_>>(),
    });
    let p = out.join("fit_summary.json");
    let text = serde_json::to_string_pretty(&summary).map_err(|e| WriteError {
        path: p.clone(),
        reason: e.to_string(),
    })?;
    io::write_atomic(&p, |w| {
        use std::io::Write;
        w.write_all(text.as_bytes()).map_err(|e| e.to_string())
    })?;
    written.push(p);
    Ok(written)
}

/// Simulates from a fitted candidate at the observed covariates and series lengths of the
/// prepared step table, and writes `simulated_<candidate>.csv` (series, step index, true
/// state, step length, turning angle). Used for checks of the fitted model against the
/// data and for synthetic studies.
///
/// # Errors
/// [`FitStageError`] when the study has no such candidate or it has not been fitted.
pub fn simulate(
    study: &Study,
    candidate: Option<&str>,
    seed: u64,
) -> Result<PathBuf, FitStageError> {
    use crate::hmm::simulate::SeriesDesign;
    let settings = study.model().ok_or_else(|| FitStageError::NoModel {
        path: study.source().to_path_buf(),
    })?;
    let c = match candidate {
        Some(name) => settings
            .candidates
            .iter()
            .find(|c| c.name == name)
            .ok_or_else(|| FitStageError::SelectedFailed(name.to_string()))?,
        None => {
            // The model `fit` selected, from fit_summary.json.
            let p = study.output().join("fit_summary.json");
            let text = std::fs::read_to_string(&p)
                .map_err(|_| FitStageError::MissingSteps { path: p.clone() })?;
            let v: serde_json::Value = serde_json::from_str(&text).map_err(|e| read_err(&p, e))?;
            let name = v["selected"].as_str().unwrap_or_default().to_string();
            settings
                .candidates
                .iter()
                .find(|c| c.name == name)
                .ok_or(FitStageError::SelectedFailed(name))?
        }
    };
    let model_path = study
        .output()
        .join("models")
        .join(format!("{}.json", c.slug()));
    if !model_path.is_file() {
        return Err(FitStageError::MissingSteps { path: model_path });
    }
    let fitted = FittedModel::load(&model_path).map_err(|source| FitStageError::Model {
        candidate: c.name.clone(),
        source,
    })?;
    let (path, df) = read_steps(study)?;
    let (df, _) = complete_steps(&path, df, settings)?;
    let series = text_column(&path, &df, "series")?;
    let bounds = series_bounds(&series);
    let (names, values, _) = design_values(&path, &df, c)?;
    let p = names.len();
    let designs: Vec<SeriesDesign> = bounds
        .iter()
        .map(|(id, a, b)| SeriesDesign {
            id: id.clone(),
            len: b - a,
            covariates: values[a * p..b * p].to_vec(),
        })
        .collect();
    let drawn = fitted
        .model()
        .simulate(&designs, seed)
        .map_err(|source| FitStageError::Model {
            candidate: c.name.clone(),
            source,
        })?;
    let mut series = Vec::new();
    let mut t = Vec::new();
    let mut state = Vec::new();
    let mut step = Vec::new();
    let mut angle = Vec::new();
    for (s, states) in drawn.data.series().iter().zip(&drawn.states) {
        for (k, &st) in states.iter().enumerate() {
            series.push(s.id().to_string());
            t.push(k as u32 + 1);
            state.push(c.labels[st].clone());
            step.push(s.streams()[0][k]);
            angle.push(s.streams().get(1).map_or(f64::NAN, |a| a[k]));
        }
    }
    let out = study.output().join(format!("simulated_{}.csv", c.slug()));
    let mut frame = DataFrame::new_infer_height(vec![
        Column::new("series".into(), series),
        Column::new("t".into(), t),
        Column::new("state".into(), state),
        Column::new("step_m".into(), step),
        Column::new("turn_rad".into(), angle),
    ])
    .map_err(|e| read_err(&out, e))?;
    io::write_csv(&out, &mut frame)?;
    Ok(out)
}
