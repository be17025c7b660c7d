//! The study file as written: plain serde structs, no I/O, no checks beyond TOML syntax.
//!
//! Every key is documented in the commented template (`templates/study.toml`, written by
//! `cairn init`) and in the README. Unknown keys are rejected so that a typo
//! (`max_sped`) is an error, not a silently ignored setting.

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
    pub(crate) output: RawOutput,
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

#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct RawOutput {
    #[serde(default)]
    pub(crate) csv: bool,
}
