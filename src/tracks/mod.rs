//! Tracks: from rows in input files to cleaned per-animal tracks and a step table.
//!
//! [`ingest`] reads and validates rows, [`clean`] orders, de-duplicates and filters each
//! animal's fixes, [`grid`] (with the state-space smoother in [`regular`]) optionally puts
//! them on a regular time grid, and [`metrics`] splits tracks at gaps and computes step
//! lengths, bearings and turning angles. Every row that does not make it is an [`exclusions::Exclusion`].

pub mod class;
pub mod clean;
pub mod exclusions;
pub mod grid;
pub mod ingest;
pub mod metrics;
pub mod regular;
pub mod timeparse;
