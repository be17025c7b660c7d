//! A model with known parameter values: a checked specification plus natural-scale
//! parameters. Everything that needs parameters but not a fit lives here — the
//! log-likelihood and its gradient, decoding, residuals, simulation — so that the same
//! calls serve a fitted model ([`crate::hmm::fit::FittedModel::model`]) and a model
//! with parameters from elsewhere (a published table, a simulation study).

use super::data::Data;
use super::error::HmmError;
use super::forward::loglik_grad;
use super::spec::{ModelSpec, Params, ValidSpec};
use super::transitions::{stationary, transition_matrix};
use nalgebra::DMatrix;

/// A checked specification with parameter values.
#[derive(Debug, Clone, PartialEq)]
pub struct Model {
    spec: ValidSpec,
    params: Params,
    working: Vec<f64>,
}

impl Model {
    /// # Errors
    /// Any structural problem of the spec, or a parameter outside its domain.
    pub fn new(spec: &ModelSpec, params: Params) -> Result<Self, HmmError> {
        let spec = spec.check()?;
        let working = spec.to_working(&params)?;
        // round-trip so that stored natural values are exactly what θ implies
        let params = spec.to_natural(&working);
        Ok(Model {
            spec,
            params,
            working,
        })
    }
    pub(crate) fn from_working(spec: ValidSpec, working: Vec<f64>) -> Self {
        let params = spec.to_natural(&working);
        Model {
            spec,
            params,
            working,
        }
    }
    pub fn spec(&self) -> &ModelSpec {
        self.spec.spec()
    }
    pub fn valid_spec(&self) -> &ValidSpec {
        &self.spec
    }
    pub fn params(&self) -> &Params {
        &self.params
    }
    /// Working-scale parameter vector (layout in [`crate::hmm::spec`]).
    pub fn working(&self) -> &[f64] {
        &self.working
    }
    pub fn n_states(&self) -> usize {
        self.spec.n_states()
    }

    /// Log-likelihood of `data`.
    ///
    /// # Errors
    /// Any bad-input error of the data against the spec.
    pub fn log_likelihood(&self, data: &Data) -> Result<f64, HmmError> {
        let prep = self.spec.prepare(data)?;
        Ok(loglik_grad(&self.spec, &prep, &self.working, false).0)
    }

    /// Log-likelihood and its exact gradient with respect to the working parameters.
    ///
    /// # Errors
    /// Any bad-input error of the data against the spec.
    pub fn log_likelihood_gradient(&self, data: &Data) -> Result<(f64, Vec<f64>), HmmError> {
        let prep = self.spec.prepare(data)?;
        Ok(loglik_grad(&self.spec, &prep, &self.working, true))
    }

    /// Γ(x) for a covariate row x (model order, length p).
    pub fn transition_matrix(&self, x: &[f64]) -> DMatrix<f64> {
        transition_matrix(&self.params, self.n_states(), x)
    }

    /// Stationary distribution of Γ(x).
    ///
    /// # Errors
    /// When Γ(x) is reducible.
    pub fn stationary(&self, x: &[f64]) -> Result<Vec<f64>, HmmError> {
        stationary(&self.transition_matrix(x)).map_err(|e| HmmError::InvalidParameter {
            name: "transition matrix".into(),
            reason: e,
        })
    }
}
