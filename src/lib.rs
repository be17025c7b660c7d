//! cairn: from raw telemetry fixes to a defended answer to "what drives this behaviour".
//!
//! The library follows the data: [`study`] validates the study file, [`tracks`] ingests,
//! cleans, smooths and measures tracks, [`geo`] holds sun position, projections and
//! rasters, [`covariates`] annotates every step with sun, calendar, raster and per-animal
//! terms, [`prepare`] runs those stages and writes their tables atomically, [`hmm`] is the
//! behavioural-state engine and [`modelling`] its fit stage, [`summaries`] and [`report`]
//! turn results into tables and figures, [`demo`] writes an invented demo study with
//! its true model, and [`cli`] is the command-line front end. See
//! ARCHITECTURE.md for the map.

#![forbid(unsafe_code)]

pub mod cli;
pub mod covariates;
pub mod demo;
pub mod geo;
pub mod hmm;
pub mod io;
pub mod modelling;
pub mod pipeline;
pub mod prec;
pub mod prepare;
pub mod report;
pub mod study;
pub mod summaries;
pub mod tracks;
