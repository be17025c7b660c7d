//! The study file as written: plain serde structs, no I/O, no checks beyond TOML syntax.
//!
//! Every key is documented in the commented template (`templates/study.toml`, written by
//! `cairn init`) and in the README. Unknown keys are rejected so that a typo
//! (`max_sped`) is an error, not a silently ignored setting.

use std::collections::BTreeMap;

use serde::Deserialize;

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct RawStudy {
    pub(crate) study: RawHeader,
    pub(crate) fixes: RawFixes,
    #[serde(default)]
    pub(crate) cleaning: RawCleaning,
    #[serde(default)]
    pub(crate) tracks: RawTracks,
    #[serde(default)]
    pub(crate) grid: Option<RawGrid>,
    #[serde(default)]
    pub(crate) model: Option<RawModel>,
    #[serde(default)]
    pub(crate) output: RawOutput,
    #[serde(default)]
    pub(crate) covariates: Option<RawCovariates>,
    #[serde(default)]
    pub(crate) report: RawReport,
}

/// `[report]`: what the summaries, figures and reports show.
#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct RawReport {
    #[serde(default)]
    pub(crate) hotspot_state: Option<String>,
    #[serde(default)]
    pub(crate) cell: Option<String>,
    #[serde(default)]
    pub(crate) brief_factor: Option<u32>,
    #[serde(default)]
    pub(crate) min_hours: Option<String>,
    #[serde(default)]
    pub(crate) min_animals: Option<u32>,
    #[serde(default)]
    pub(crate) count: Option<String>,
    #[serde(default)]
    pub(crate) width: Option<String>,
    #[serde(default)]
    pub(crate) templates: Option<String>,
    #[serde(default)]
    pub(crate) truth: Option<String>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct RawHeader {
    pub(crate) name: String,
    #[serde(default = "default_output")]
    pub(crate) output: String,
}

fn default_output() -> String {
    "cairn-out".to_string()
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct RawFixes {
    pub(crate) files: Vec<String>,
    #[serde(default)]
    pub(crate) delimiter: Option<String>,
    #[serde(default = "default_timezone")]
    pub(crate) timezone: String,
    #[serde(default)]
    pub(crate) time_format: Option<String>,
    #[serde(default)]
    pub(crate) default_class: Option<String>,
    pub(crate) columns: RawColumns,
}

fn default_timezone() -> String {
    "UTC".to_string()
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct RawColumns {
    pub(crate) animal: String,
    pub(crate) time: String,
    pub(crate) lon: String,
    pub(crate) lat: String,
    #[serde(default)]
    pub(crate) class: Option<String>,
    #[serde(default)]
    pub(crate) tag: Option<String>,
    #[serde(default)]
    pub(crate) ellipse_major: Option<String>,
    #[serde(default)]
    pub(crate) ellipse_minor: Option<String>,
    #[serde(default)]
    pub(crate) ellipse_orientation: Option<String>,
}

#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct RawCleaning {
    #[serde(default)]
    pub(crate) max_speed: Option<String>,
    #[serde(default)]
    pub(crate) speed_filter: Option<String>,
    #[serde(default)]
    pub(crate) spike_distances: Option<[String; 2]>,
    #[serde(default)]
    pub(crate) spike_angles: Option<[String; 2]>,
}

#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct RawTracks {
    #[serde(default)]
    pub(crate) gap: Option<String>,
}

/// `[grid]`: smoothing onto a regular time grid.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct RawGrid {
    pub(crate) interval: String,
    #[serde(default)]
    pub(crate) flag_se: Option<String>,
    #[serde(default)]
    pub(crate) estimate_error_scale: bool,
    #[serde(default)]
    pub(crate) outlier_quantile: Option<f64>,
    #[serde(default)]
    pub(crate) drop_outliers: bool,
    #[serde(default)]
    pub(crate) class_errors: std::collections::BTreeMap<String, RawAxisSd>,
}

/// An error standard deviation: one distance for both axes, or `[x, y]`.
#[derive(Debug, Deserialize)]
#[serde(untagged)]
pub(crate) enum RawAxisSd {
    Both(String),
    Axes([String; 2]),
}

#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct RawOutput {
    #[serde(default)]
    pub(crate) csv: bool,
}

/// `[model]`: the behavioural-state models to fit.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct RawModel {
    pub(crate) states: Vec<String>,
    #[serde(default = "default_step")]
    pub(crate) step: String,
    #[serde(default = "default_angle")]
    pub(crate) angle: String,
    #[serde(default)]
    pub(crate) zero_mass: bool,
    #[serde(default = "default_initial")]
    pub(crate) initial: String,
    #[serde(default = "default_starts")]
    pub(crate) starts: usize,
    #[serde(default = "default_seed")]
    pub(crate) seed: u64,
    #[serde(default = "default_share_runs")]
    pub(crate) share_runs: bool,
    #[serde(default = "default_select")]
    pub(crate) select: String,
    #[serde(default)]
    pub(crate) candidate: Vec<RawCandidate>,
}

fn default_step() -> String {
    "gamma".into()
}
fn default_angle() -> String {
    "von-mises".into()
}
fn default_initial() -> String {
    "stationary".into()
}
fn default_starts() -> usize {
    10
}
fn default_seed() -> u64 {
    1
}
fn default_share_runs() -> bool {
    true
}
fn default_select() -> String {
    "aic".into()
}

/// `[[model.candidate]]`: one model in the comparison.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct RawCandidate {
    pub(crate) name: String,
    #[serde(default)]
    pub(crate) states: Option<usize>,
    #[serde(default)]
    pub(crate) covariates: Vec<String>,
}

/// `[covariates]`: what to join to every step.
#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct RawCovariates {
    #[serde(default)]
    pub(crate) hour: Option<String>,
    #[serde(default)]
    pub(crate) diel: Option<RawDiel>,
    #[serde(default)]
    pub(crate) season: Option<Vec<RawSeason>>,
    #[serde(default)]
    pub(crate) raster: Vec<RawRaster>,
    #[serde(default)]
    pub(crate) animals: Option<RawAnimals>,
    #[serde(default)]
    pub(crate) standardise: Option<RawStandardise>,
}

#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct RawDiel {
    #[serde(default)]
    pub(crate) day: Option<String>,
    #[serde(default)]
    pub(crate) civil: Option<String>,
    #[serde(default)]
    pub(crate) nautical: Option<String>,
    #[serde(default)]
    pub(crate) astronomical: Option<String>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct RawSeason {
    pub(crate) name: String,
    pub(crate) from: String,
    pub(crate) to: String,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct RawRaster {
    pub(crate) name: String,
    pub(crate) file: String,
    pub(crate) kind: String,
    #[serde(default)]
    pub(crate) radius: Option<String>,
    #[serde(default)]
    pub(crate) window: Option<String>,
    #[serde(default)]
    pub(crate) classes: Option<BTreeMap<String, Vec<i64>>>,
    #[serde(default)]
    pub(crate) unit: Option<String>,
    #[serde(default)]
    pub(crate) scale: Option<f64>,
    #[serde(default)]
    pub(crate) label: Option<String>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct RawAnimals {
    pub(crate) file: String,
    pub(crate) id: String,
    #[serde(default)]
    pub(crate) columns: Vec<String>,
}

/// `standardise = true` (every numeric covariate) or a list of column names.
#[derive(Debug, Deserialize)]
#[serde(untagged)]
pub(crate) enum RawStandardise {
    All(bool),
    Columns(Vec<String>),
}
