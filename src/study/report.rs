//! The validated `[report]` section: which state the hotspot maps count, the grid cells,
//! the sharing rule for sensitive locations, how time in a state is counted, figure
//! width, user templates and (for simulated studies) the file of true parameters.

use std::path::{Path, PathBuf};

use serde::Serialize;

use super::raw::RawReport;
use super::{StudyError, invalid, units};

/// How time in a state is counted in budgets, hotspots and per-animal shares.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Counting {
    /// Local state probabilities (each step spreads over the states).
    Probabilities,
    /// The Viterbi path (each step wholly in one state).
    Viterbi,
}

/// Journal figure width.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Width {
    /// One column, about 85 mm.
    Single,
    /// Two columns, about 175 mm.
    Double,
}

/// The validated `[report]` section.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ReportSettings {
    /// Label of the state whose days the hotspot grid counts; `None`: the default rule
    /// (the second-slowest state of a model with three or more states, else the slowest).
    pub hotspot_state: Option<String>,
    /// Hotspot cell edge, km.
    pub cell_km: f64,
    /// The brief's cells are this many times coarser (sensitive-location generalisation).
    pub brief_factor: u32,
    /// Minimum hours in the state for an animal-day to count in a cell.
    pub min_hours: f64,
    /// Cells with fewer distinct animals are suppressed in shared outputs.
    pub min_animals: u32,
    /// How time in a state is counted.
    pub count: Counting,
    /// Figure width.
    pub width: Width,
    /// Folder of user templates overriding the built-in ones.
    pub templates: Option<PathBuf>,
    /// File of true parameters (simulated studies), for a recovery table.
    pub truth: Option<PathBuf>,
}

impl Default for ReportSettings {
    fn default() -> Self {
        ReportSettings {
            hotspot_state: None,
            cell_km: 5.0,
            brief_factor: 4,
            min_hours: 1.0,
            min_animals: 3,
            count: Counting::Probabilities,
            width: Width::Double,
            templates: None,
            truth: None,
        }
    }
}

pub(crate) fn resolve(
    raw: RawReport,
    root: &Path,
    state_labels: Option<&[String]>,
) -> Result<ReportSettings, StudyError> {
    let d = ReportSettings::default();
    let hotspot_state = match raw.hotspot_state {
        None => None,
        Some(s) => {
            let s = s.trim().to_string();
            match state_labels {
                None => {
                    return Err(invalid(
                        "report.hotspot_state",
                        "names a state but the study has no [model] section",
                    ));
                }
                Some(labels) if !labels.contains(&s) => {
                    return Err(invalid(
                        "report.hotspot_state",
                        format!(
                            "{s:?} is not one of the model's state labels ({})",
                            labels.join(", ")
                        ),
                    ));
                }
                Some(_) => Some(s),
            }
        }
    };
    let cell_km = match raw.cell {
        None => d.cell_km,
        Some(t) => units::parse_distance("report.cell", &t)? / 1000.0,
    };
    if !(cell_km > 0.0 && cell_km.is_finite()) {
        return Err(invalid(
            "report.cell",
            "give a positive cell size, e.g. \"5 km\"",
        ));
    }
    let brief_factor = raw.brief_factor.unwrap_or(d.brief_factor);
    if brief_factor == 0 {
        return Err(invalid(
            "report.brief_factor",
            "use 1 or more (1: the same cells)",
        ));
    }
    let min_hours = match raw.min_hours {
        None => d.min_hours,
        Some(t) => units::parse_duration("report.min_hours", &t)? / 3600.0,
    };
    let count = match raw.count.as_deref().map(str::trim) {
        None => d.count,
        Some("probabilities") => Counting::Probabilities,
        Some("viterbi") => Counting::Viterbi,
        Some(o) => {
            return Err(invalid(
                "report.count",
                format!("{o:?}; use \"probabilities\" or \"viterbi\""),
            ));
        }
    };
    let width = match raw.width.as_deref().map(str::trim) {
        None => d.width,
        Some("single") => Width::Single,
        Some("double") => Width::Double,
        Some(o) => {
            return Err(invalid(
                "report.width",
                format!("{o:?}; use \"single\" (85 mm) or \"double\" (175 mm)"),
            ));
        }
    };
    let templates = match raw.templates {
        None => None,
        Some(t) => {
            let p = root.join(t.trim());
            if !p.is_dir() {
                return Err(invalid(
                    "report.templates",
                    format!("{} is not a folder", p.display()),
                ));
            }
            Some(p)
        }
    };
    let truth = match raw.truth {
        None => None,
        Some(t) => {
            let p = root.join(t.trim());
            if !p.is_file() {
                return Err(invalid(
                    "report.truth",
                    format!("{} does not exist", p.display()),
                ));
            }
            Some(p)
        }
    };
    Ok(ReportSettings {
        hotspot_state,
        cell_km,
        brief_factor,
        min_hours,
        min_animals: raw.min_animals.unwrap_or(d.min_animals),
        count,
        width,
        templates,
        truth,
    })
}
