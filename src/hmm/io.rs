//! Saving and loading fitted models as JSON, in a schema of our own (`format` =
//! "cairn-hmm-model", `schema_version` = 1): the specification, the natural-scale
//! estimates and the working vector (authoritative on load), the covariance (or the
//! Hessian and the reason there is no covariance), a placeholder for the covariate
//! scaling applied before fitting, the convergence record, the starts, the seed and the
//! crate version that wrote the file. Floating-point values are written with the
//! shortest representation that reads back to the same bits.

use nalgebra::DMatrix;
use serde::{Deserialize, Serialize};
use std::path::Path;

use super::error::HmmError;
use super::fit::{Convergence, FittedModel, StartRecord};
use super::inference::{Covariance, Culprit};
use super::model::Model;
use super::spec::{ModelSpec, Params};

const FORMAT: &str = "cairn-hmm-model";
const SCHEMA_VERSION: u32 = 1;

/// How a covariate was standardised before fitting (centre and scale), kept so that
/// estimates can be back-transformed. Filled by the caller; the engine only stores it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CovariateScaling {
    pub name: String,
    pub center: f64,
    pub scale: f64,
}

#[derive(Serialize, Deserialize)]
struct ModelFile {
    format: String,
    schema_version: u32,
    crate_version: String,
    spec: ModelSpec,
    estimates: Params,
    working: Vec<f64>,
    working_names: Vec<String>,
    loglik: f64,
    aic: f64,
    bic: f64,
    n_obs: usize,
    covariance: Option<Vec<Vec<f64>>>,
    hessian: Option<Vec<Vec<f64>>>,
    covariance_problem: Option<String>,
    culprits: Vec<Culprit>,
    covariate_scaling: Option<Vec<CovariateScaling>>,
    convergence: Convergence,
    starts: Vec<StartRecord>,
    seed: u64,
}

fn rows(m: &DMatrix<f64>) -> Vec<Vec<f64>> {
    (0..m.nrows())
        .map(|i| m.row(i).iter().copied().collect())
        .collect()
}

fn matrix(r: &[Vec<f64>]) -> Result<DMatrix<f64>, HmmError> {
    let n = r.len();
    if r.iter().any(|x| x.len() != n) {
        return Err(HmmError::Io("a stored matrix is not square".into()));
    }
    Ok(DMatrix::from_fn(n, n, |i, j| r[i][j]))
}

impl FittedModel {
    /// The model as a JSON document.
    ///
    /// # Errors
    /// [`HmmError::Io`] if serialisation fails (e.g. a non-finite value).
    pub fn to_json(&self) -> Result<String, HmmError> {
        let (covariance, hessian, culprits) = match &self.covariance {
            Covariance::Available {
                covariance,
                hessian,
            } => (Some(rows(covariance)), Some(rows(hessian)), vec![]),
            Covariance::NotPositiveDefinite {
                culprits, hessian, ..
            } => (None, Some(rows(hessian)), culprits.clone()),
            Covariance::NotComputed => (None, None, vec![]),
        };
        let file = ModelFile {
            format: FORMAT.into(),
            schema_version: SCHEMA_VERSION,
            crate_version: env!("CARGO_PKG_VERSION").into(),
            spec: self.model.spec().clone(),
            estimates: self.model.params().clone(),
            working: self.model.working().to_vec(),
            working_names: self.model.valid_spec().working_names(),
            loglik: self.loglik,
            aic: self.aic(),
            bic: self.bic(),
            n_obs: self.n_obs,
            covariance,
            hessian,
            covariance_problem: self.covariance.problem(),
            culprits,
            covariate_scaling: self.covariate_scaling.clone(),
            convergence: self.convergence.clone(),
            starts: self.starts.clone(),
            seed: self.seed,
        };
        serde_json::to_string_pretty(&file).map_err(|e| HmmError::Io(e.to_string()))
    }

    /// Reads a model written by [`FittedModel::to_json`].
    ///
    /// # Errors
    /// [`HmmError::Io`] for malformed JSON, another format or a newer schema; any spec
    /// error of the stored specification.
    pub fn from_json(s: &str) -> Result<FittedModel, HmmError> {
        let f: ModelFile = serde_json::from_str(s).map_err(|e| HmmError::Io(e.to_string()))?;
        if f.format != FORMAT {
            return Err(HmmError::Io(format!(
                "not a {FORMAT} file (format '{}')",
                f.format
            )));
        }
        if f.schema_version > SCHEMA_VERSION {
            return Err(HmmError::Io(format!(
                "schema version {} is newer than this program's {SCHEMA_VERSION}; upgrade",
                f.schema_version
            )));
        }
        let vspec = f.spec.check()?;
        if f.working.len() != vspec.n_params() {
            return Err(HmmError::Io(format!(
                "{} working parameters stored, the spec needs {}",
                f.working.len(),
                vspec.n_params()
            )));
        }
        let covariance = match (f.covariance, f.hessian) {
            (Some(c), Some(h)) => Covariance::Available {
                covariance: matrix(&c)?,
                hessian: matrix(&h)?,
            },
            (None, Some(h)) => Covariance::NotPositiveDefinite {
                message: f.covariance_problem.unwrap_or_default(),
                culprits: f.culprits,
                hessian: matrix(&h)?,
            },
            _ => Covariance::NotComputed,
        };
        Ok(FittedModel {
            model: Model::from_working(vspec, f.working),
            loglik: f.loglik,
            n_obs: f.n_obs,
            convergence: f.convergence,
            starts: f.starts,
            covariance,
            seed: f.seed,
            covariate_scaling: f.covariate_scaling,
        })
    }

    /// Writes the model to `path` as JSON.
    ///
    /// # Errors
    /// [`HmmError::Io`] naming the path.
    pub fn save(&self, path: &Path) -> Result<(), HmmError> {
        std::fs::write(path, self.to_json()?)
            .map_err(|e| HmmError::Io(format!("{}: {e}", path.display())))
    }

    /// Reads a model from `path`.
    ///
    /// # Errors
    /// [`HmmError::Io`] naming the path, or as [`FittedModel::from_json`].
    pub fn load(path: &Path) -> Result<FittedModel, HmmError> {
        let s = std::fs::read_to_string(path)
            .map_err(|e| HmmError::Io(format!("{}: {e}", path.display())))?;
        FittedModel::from_json(&s)
    }
}
