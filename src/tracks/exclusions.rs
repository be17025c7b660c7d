//! The exclusions log: every input row that did not reach the cleaned track, and why.
//!
//! Nothing is dropped silently. Ingest logs rows that cannot be read (bad time, position
//! out of range, unknown class…); cleaning logs fixes it removes (Argos class Z,
//! duplicate timestamps, speed and spike filters). Each entry names the input file, the
//! data row (1-based, header not counted), the animal, the column at fault and a reason
//! code with a human-readable detail. One entry per row: the first problem found, in the
//! order animal, time, lon, lat, class/tag, ellipse.

use serde::Serialize;

/// Why a row was excluded. The `code` is stable and is what tables and reports group by.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Reason {
    /// The animal id is empty.
    EmptyId,
    /// The timestamp is in no accepted shape.
    UnparseableTime,
    /// A wall-clock time made ambiguous by a daylight-saving change.
    AmbiguousLocalTime,
    /// A wall-clock time skipped by a daylight-saving change.
    NonexistentLocalTime,
    /// A required value is empty.
    MissingValue,
    /// A numeric column holds text that is not a number.
    NotANumber,
    /// A number that is infinite or NaN.
    NonFinite,
    /// Longitude outside [−180, 180].
    LonOutOfRange,
    /// Latitude outside [−90, 90].
    LatOutOfRange,
    /// A location class or tag type that is not recognised.
    UnknownClass,
    /// Argos class Z: an invalid location.
    InvalidClassZ,
    /// Error-ellipse values that are not usable.
    BadEllipse,
    /// Another fix of the same animal at the same instant was of better quality.
    DuplicateTime,
    /// Removed by the maximum-speed filter.
    SpeedFilter,
    /// Removed as a spike by the speed–distance–angle filter.
    SpikeFilter,
}

impl Reason {
    /// Every reason, in table order.
    pub const ALL: [Reason; 15] = [
        Reason::EmptyId,
        Reason::UnparseableTime,
        Reason::AmbiguousLocalTime,
        Reason::NonexistentLocalTime,
        Reason::MissingValue,
        Reason::NotANumber,
        Reason::NonFinite,
        Reason::LonOutOfRange,
        Reason::LatOutOfRange,
        Reason::UnknownClass,
        Reason::InvalidClassZ,
        Reason::BadEllipse,
        Reason::DuplicateTime,
        Reason::SpeedFilter,
        Reason::SpikeFilter,
    ];

    /// The reason whose [`Reason::code`] is `code`.
    pub fn from_code(code: &str) -> Option<Reason> {
        Reason::ALL.into_iter().find(|r| r.code() == code)
    }

    /// A sentence for reports.
    pub fn meaning(self) -> &'static str {
        match self {
            Reason::EmptyId => "the animal id is empty",
            Reason::UnparseableTime => "the timestamp could not be read",
            Reason::AmbiguousLocalTime => {
                "a wall-clock time that a daylight-saving change makes ambiguous"
            }
            Reason::NonexistentLocalTime => "a wall-clock time that a daylight-saving change skips",
            Reason::MissingValue => "a required value is empty",
            Reason::NotANumber => "a numeric column holds text",
            Reason::NonFinite => "a number is infinite or not a number",
            Reason::LonOutOfRange => "longitude outside [-180, 180]",
            Reason::LatOutOfRange => "latitude outside [-90, 90]",
            Reason::UnknownClass => "the location class or tag type is not recognised",
            Reason::InvalidClassZ => "Argos class Z (an invalid location)",
            Reason::BadEllipse => "the error-ellipse values are unusable",
            Reason::DuplicateTime => {
                "another fix of the animal at the same instant was of better quality"
            }
            Reason::SpeedFilter => "reachable only faster than the species' top speed",
            Reason::SpikeFilter => "a spike (speed-distance-angle filter)",
        }
    }

    /// Stable code used in tables.
    pub fn code(self) -> &'static str {
        match self {
            Reason::EmptyId => "empty_id",
            Reason::UnparseableTime => "unparseable_time",
            Reason::AmbiguousLocalTime => "ambiguous_local_time",
            Reason::NonexistentLocalTime => "nonexistent_local_time",
            Reason::MissingValue => "missing_value",
            Reason::NotANumber => "not_a_number",
            Reason::NonFinite => "non_finite",
            Reason::LonOutOfRange => "lon_out_of_range",
            Reason::LatOutOfRange => "lat_out_of_range",
            Reason::UnknownClass => "unknown_class",
            Reason::InvalidClassZ => "invalid_class_z",
            Reason::BadEllipse => "bad_ellipse",
            Reason::DuplicateTime => "duplicate_time",
            Reason::SpeedFilter => "speed_filter",
            Reason::SpikeFilter => "spike_filter",
        }
    }

    /// Stage that logs this reason: `ingest` or `clean`.
    pub fn stage(self) -> &'static str {
        match self {
            Reason::InvalidClassZ
            | Reason::DuplicateTime
            | Reason::SpeedFilter
            | Reason::SpikeFilter => "clean",
            _ => "ingest",
        }
    }
}

/// One excluded row.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Exclusion {
    /// Input file as listed in the study.
    pub file: String,
    /// Data row in that file, 1-based, header not counted.
    pub row: u64,
    /// Animal id as read (may be empty).
    pub animal: String,
    /// Column at fault (the data file's column name).
    pub column: String,
    /// Reason code.
    pub reason: Reason,
    /// Details: the offending value, the fix kept instead, the speed found…
    pub detail: String,
}
