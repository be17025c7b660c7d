//! Typed errors of the behavioural-state engine. Every variant names what is wrong
//! (stream, covariate, series id, row) and what to do about it; input problems are
//! reported by validation before any fitting starts.

use thiserror::Error;

/// Everything that can go wrong when building, fitting or using a hidden Markov model.
#[derive(Debug, Error, Clone, PartialEq)]
pub enum HmmError {
    #[error("the number of states must be between 1 and 6, got {0}")]
    InvalidStateCount(usize),
    #[error("the model needs at least one data stream")]
    NoStreams,
    #[error("the data contain no series (or only empty series)")]
    NoData,
    #[error("series '{series}': {what} (expected {expected}, found {found})")]
    Shape {
        series: String,
        what: String,
        expected: usize,
        found: usize,
    },
    #[error("duplicate name '{0}' among the data streams or covariates")]
    DuplicateName(String),
    #[error("unknown data stream '{name}'; the data have: {available}")]
    UnknownStream { name: String, available: String },
    #[error("unknown covariate '{name}'; the data have: {available}")]
    UnknownCovariate { name: String, available: String },
    #[error(
        "covariate '{0}' is constant over all rows; it cannot be estimated beside the intercept — drop it"
    )]
    ConstantCovariate(String),
    #[error(
        "covariate '{name}' is not finite ({value}) in series '{series}', row {row}; impute or drop that row"
    )]
    NonFiniteCovariate {
        name: String,
        series: String,
        row: usize,
        value: f64,
    },
    #[error("stream '{0}' is missing (NaN) in every row of every series")]
    StreamAllMissing(String),
    #[error(
        "stream '{stream}' has a zero in series '{series}', row {row}, but the model has no zero mass for it; enable the zero mass or remove zero steps"
    )]
    ZeroWithoutZeroMass {
        stream: String,
        series: String,
        row: usize,
    },
    #[error(
        "stream '{stream}' ({family}) must be non-negative, found {value} in series '{series}', row {row}"
    )]
    NegativeValue {
        stream: String,
        family: String,
        series: String,
        row: usize,
        value: f64,
    },
    #[error(
        "stream '{stream}' has an invalid value {value} in series '{series}', row {row}: {reason}"
    )]
    InvalidValue {
        stream: String,
        series: String,
        row: usize,
        value: f64,
        reason: String,
    },
    #[error(
        "a zero mass is only available for step-length families (gamma, Weibull, log-normal); stream '{0}' is not one"
    )]
    ZeroMassNotAllowed(String),
    #[error("{n_states} states need {needed} but the data allow it only {available}: {what}")]
    TooManyStates {
        n_states: usize,
        what: String,
        needed: usize,
        available: usize,
    },
    #[error("{0} state labels given for {1} states")]
    LabelCount(usize, usize),
    #[error("invalid parameter '{name}': {reason}")]
    InvalidParameter { name: String, reason: String },
    #[error("the design: {0}")]
    Design(String),
    #[error("every random start failed: {0}")]
    AllStartsFailed(String),
    #[error("the optimiser could not be set up: {0}")]
    Optimizer(String),
    #[error("no covariance matrix: {0}")]
    NoCovariance(String),
    #[error("model file: {0}")]
    Io(String),
}
