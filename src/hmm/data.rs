//! Input data of the engine, independent of any data-frame library: a set of
//! independent series (animals or track segments), each with its data streams (one
//! `Vec<f64>` per stream, NaN = missing) and a row-major covariate design matrix
//! (T × p). The caller builds the design matrix (see [`crate::hmm::design`]).
//!
//! Row t of the covariates governs the transition from the state at step t to the state
//! at step t + 1; the last row of a series therefore enters only the stationary initial
//! distribution when the series has a single step, and otherwise is not used for
//! transitions (row 0 also sets the stationary initial distribution).

use super::error::HmmError;
use std::collections::HashSet;

/// One independent series (an animal or a track segment).
#[derive(Debug, Clone, PartialEq)]
pub struct Series {
    id: String,
    streams: Vec<Vec<f64>>,
    covariates: Vec<f64>,
}

impl Series {
    /// A series from its id, one vector per data stream (same order as the data's
    /// stream names; NaN = missing) and a row-major covariate matrix (T × p, same
    /// column order as the data's covariate names; empty when p = 0).
    pub fn new(id: impl Into<String>, streams: Vec<Vec<f64>>, covariates: Vec<f64>) -> Self {
        Series {
            id: id.into(),
            streams,
            covariates,
        }
    }
    pub fn id(&self) -> &str {
        &self.id
    }
    /// Number of steps T.
    pub fn len(&self) -> usize {
        self.streams.first().map_or(0, Vec::len)
    }
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }
    pub fn stream(&self, k: usize) -> &[f64] {
        &self.streams[k]
    }
    pub fn streams(&self) -> &[Vec<f64>] {
        &self.streams
    }
    /// Row-major covariates (T × p).
    pub fn covariates(&self) -> &[f64] {
        &self.covariates
    }
}

/// A data set: named streams, named covariate columns and the series.
#[derive(Debug, Clone, PartialEq)]
pub struct Data {
    stream_names: Vec<String>,
    covariate_names: Vec<String>,
    series: Vec<Series>,
}

impl Data {
    /// Checks the shapes (every series has every stream, equal lengths, T × p covariates).
    ///
    /// # Errors
    /// [`HmmError::Shape`] naming the series, [`HmmError::DuplicateName`], [`HmmError::NoData`].
    pub fn new(
        stream_names: Vec<String>,
        covariate_names: Vec<String>,
        series: Vec<Series>,
    ) -> Result<Self, HmmError> {
        let mut seen = HashSet::new();
        for n in stream_names.iter().chain(&covariate_names) {
            if !seen.insert(n.as_str()) {
                return Err(HmmError::DuplicateName(n.clone()));
            }
        }
        if series.iter().all(Series::is_empty) {
            return Err(HmmError::NoData);
        }
        let p = covariate_names.len();
        for s in &series {
            if s.streams.len() != stream_names.len() {
                return Err(HmmError::Shape {
                    series: s.id.clone(),
                    what: "number of data streams".into(),
                    expected: stream_names.len(),
                    found: s.streams.len(),
                });
            }
            let t = s.len();
            for (k, v) in s.streams.iter().enumerate() {
                if v.len() != t {
                    return Err(HmmError::Shape {
                        series: s.id.clone(),
                        what: format!("length of stream '{}'", stream_names[k]),
                        expected: t,
                        found: v.len(),
                    });
                }
            }
            if s.covariates.len() != t * p {
                return Err(HmmError::Shape {
                    series: s.id.clone(),
                    what: "covariate values (steps × covariates)".into(),
                    expected: t * p,
                    found: s.covariates.len(),
                });
            }
        }
        Ok(Data {
            stream_names,
            covariate_names,
            series,
        })
    }
    pub fn stream_names(&self) -> &[String] {
        &self.stream_names
    }
    pub fn covariate_names(&self) -> &[String] {
        &self.covariate_names
    }
    pub fn series(&self) -> &[Series] {
        &self.series
    }
    /// Total number of steps over all series.
    pub fn n_steps(&self) -> usize {
        self.series.iter().map(Series::len).sum()
    }
}
