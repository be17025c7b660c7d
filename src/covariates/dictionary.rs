//! The column dictionary written as `columns.json`: for every column of
//! `steps.parquet`, its unit, its source and how it was computed, plus the
//! standardisation table needed to back-transform `<name>_z` columns.

use serde::Serialize;

use super::{Annotated, Scaling};

/// One entry of the dictionary.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ColumnEntry {
    /// Column name.
    pub name: String,
    /// Unit ("" for labels and identifiers).
    pub unit: String,
    /// "tracks", "sun", "calendar", or the layer / table file.
    pub source: String,
    /// How the value was obtained.
    pub transformation: String,
}

/// The whole of `columns.json`.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Dictionary {
    /// Every column of `steps.parquet`, in order.
    pub columns: Vec<ColumnEntry>,
    /// Mean and sd of every standardised column: x = z·sd + mean.
    pub standardisation: Vec<Scaling>,
}

/// The step columns that come from the tracks, with unit and meaning.
const STEP_ENTRIES: [(&str, &str, &str); 11] = [
    ("animal", "", "animal id"),
    (
        "segment",
        "",
        "segment number within the animal, from 1; segments break at gaps longer than tracks.gap",
    ),
    ("time_utc", "UTC", "time of the step's start fix"),
    ("lon", "deg", "WGS84 longitude of the step's start fix"),
    ("lat", "deg", "WGS84 latitude of the step's start fix"),
    (
        "step_m",
        "m",
        "geodesic distance to the next fix on the WGS84 ellipsoid",
    ),
    (
        "bearing_deg",
        "deg",
        "departure azimuth of the step, clockwise from north in [0, 360); missing for a zero-length step",
    ),
    (
        "turn_rad",
        "rad",
        "turning angle at the start fix in (−π, π], positive to the left; missing at a segment's first step",
    ),
    ("dt_s", "s", "time to the next fix"),
    (
        "class",
        "",
        "location class of the start fix (empty for a smoothed location)",
    ),
    (
        "location_se_m",
        "m",
        "semi-major axis of the 1-σ error ellipse of a smoothed start location (empty for an observed fix)",
    ),
];

/// Builds the dictionary for a step table annotated with `a`.
pub fn dictionary(a: &Annotated) -> Dictionary {
    let mut columns: Vec<ColumnEntry> = STEP_ENTRIES
        .iter()
        .map(|(name, unit, how)| ColumnEntry {
            name: name.to_string(),
            unit: unit.to_string(),
            source: "tracks".to_string(),
            transformation: how.to_string(),
        })
        .collect();
    columns.extend(a.columns.iter().map(|c| ColumnEntry {
        name: c.name.clone(),
        unit: c.unit.clone(),
        source: c.source.clone(),
        transformation: c.transformation.clone(),
    }));
    Dictionary {
        columns,
        standardisation: a.summary.standardisation.clone(),
    }
}
