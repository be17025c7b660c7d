//! The behavioural-state engine: hidden Markov models for animal movement data with
//! several data streams (step length, turning angle, generic normal and count streams),
//! covariate-driven transition probabilities (multinomial logit, diagonal as reference)
//! and independent series that share parameters.
//!
//! How it fits together: [`spec::ModelSpec`] says what to fit; [`data::Data`] holds the
//! series (built by the caller, e.g. from a data frame, with a design matrix from
//! [`design::Design`]); [`fit::fit`] checks both (typed [`error::HmmError`] before any
//! computation), runs seeded random starts of L-BFGS on the working parameters with the
//! exact gradient of the scaled forward algorithm ([`forward`]), orders the states by a
//! documented rule and computes the Hessian and covariance ([`inference`]). A
//! [`model::Model`] (a fitted one via [`fit::FittedModel::model`]) decodes
//! ([`decode`]: Viterbi, local state probabilities), gives pseudo-residuals
//! ([`residuals`]), simulates ([`simulate`]) and gives Γ(x) and its stationary
//! distribution ([`transitions`]). [`io`] saves and loads fitted models as JSON.
//!
//! Conventions: states are 0-based in code and "state 1…N" in names; the covariate row
//! recorded at step t governs the transition from the state at t to the state at t + 1;
//! NaN in any stream is a missing value and contributes density 1.

pub mod data;
pub mod decode;
pub mod design;
pub mod dists;
pub mod error;
pub mod fit;
pub(crate) mod forward;
pub mod inference;
pub mod io;
pub mod model;
pub mod residuals;
pub mod simulate;
pub mod spec;
pub mod transitions;
pub(crate) mod vexp;

pub use data::{Data, Series};
pub use dists::Family;
pub use error::HmmError;
pub use fit::{FitOptions, FittedModel, Objective, fit};
pub use model::Model;
pub use spec::{InitialDistribution, ModelSpec, Params, StreamParams, StreamSpec};
