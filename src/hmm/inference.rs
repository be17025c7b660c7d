//! Uncertainty after a fit: the Hessian of −log L at the optimum (central finite
//! differences of the exact gradient), the covariance of the working parameters and, when
//! the Hessian is not positive definite, which parameters are to blame (the loadings of
//! the eigenvectors of its smallest eigenvalues). Intervals for natural parameters and
//! for derived quantities (transition probabilities, stationary distribution at chosen
//! covariate values) by the delta method or by simulation from the estimated sampling
//! distribution N(θ̂, Σ̂) of the working parameters; AIC/BIC comparison tables.
//!
//! # Formula
//! Observed information and the delta method: Zucchini, MacDonald & Langrock (2016),
//! *Hidden Markov Models for Time Series*, 2nd ed., §3.6; parametric simulation of
//! derived quantities: ibid. §3.6 and Mandel (2013), *The American Statistician* 67(2),
//! 76–81.

use nalgebra::{DMatrix, DVector};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};
use serde::{Deserialize, Serialize};
use statrs::distribution::{ContinuousCDF, Normal};

use super::error::HmmError;
use super::fit::{FittedModel, Objective};
use super::transitions::{fill_gamma, stationary_flat};
use crate::prec;

/// A parameter that an eigenvector of a (near-)singular Hessian loads on.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Culprit {
    pub eigenvalue: f64,
    /// (working-parameter name, loading), largest absolute loadings first (at most 4)
    pub loadings: Vec<(String, f64)>,
}

/// Covariance of the working parameters, or why there is none.
#[derive(Debug, Clone, PartialEq)]
pub enum Covariance {
    /// Inverse of the observed information (Hessian of −log L).
    Available {
        covariance: DMatrix<f64>,
        hessian: DMatrix<f64>,
    },
    /// The Hessian is not positive definite: estimates on a boundary or not identified.
    NotPositiveDefinite {
        message: String,
        culprits: Vec<Culprit>,
        hessian: DMatrix<f64>,
    },
    /// The Hessian was not requested.
    NotComputed,
}

impl Covariance {
    pub fn matrix(&self) -> Option<&DMatrix<f64>> {
        match self {
            Covariance::Available { covariance, .. } => Some(covariance),
            _ => None,
        }
    }
    /// Why there is no covariance (None when there is one).
    pub fn problem(&self) -> Option<String> {
        match self {
            Covariance::Available { .. } => None,
            Covariance::NotComputed => Some("the Hessian was not computed".into()),
            Covariance::NotPositiveDefinite {
                message, culprits, ..
            } => {
                let parts: Vec<String> = culprits
                    .iter()
                    .map(|c| {
                        let l: Vec<String> = c
                            .loadings
                            .iter()
                            .map(|(n, v)| format!("{n} ({v:+.2})"))
                            .collect();
                        format!("eigenvalue {:.3e}: {}", c.eigenvalue, l.join(", "))
                    })
                    .collect();
                Some(format!("{message}; {}", parts.join("; ")))
            }
        }
    }
}

/// Hessian of −log L by central differences of the exact gradient, then its inverse.
pub(crate) fn hessian_covariance(obj: &Objective, theta: &[f64]) -> Covariance {
    let k = theta.len();
    let mut h = DMatrix::zeros(k, k);
    let mut th = theta.to_vec();
    for j in 0..k {
        let step = prec::HESSIAN_STEP * theta[j].abs().max(1.0);
        th[j] = theta[j] + step;
        let gp = obj.evaluate(&th).1;
        th[j] = theta[j] - step;
        let gm = obj.evaluate(&th).1;
        th[j] = theta[j];
        for i in 0..k {
            h[(i, j)] = -(gp[i] - gm[i]) / (2.0 * step);
        }
    }
    let h = (&h + h.transpose()) * 0.5;
    if h.iter().any(|v| !v.is_finite()) {
        return Covariance::NotPositiveDefinite {
            message: "the Hessian has non-finite entries".into(),
            culprits: vec![],
            hessian: h,
        };
    }
    let eig = h.clone().symmetric_eigen();
    let max_ev = eig.eigenvalues.iter().fold(0.0_f64, |m, v| m.max(v.abs()));
    let threshold = prec::HESSIAN_PD_REL * max_ev.max(1.0);
    let names = obj.valid_spec().working_names();
    let mut culprits: Vec<Culprit> = Vec::new();
    for (e, &ev) in eig.eigenvalues.iter().enumerate() {
        if ev <= threshold {
            let v = eig.eigenvectors.column(e);
            let mut l: Vec<(String, f64)> = v
                .iter()
                .enumerate()
                .map(|(i, &x)| (names[i].clone(), x))
                .collect();
            l.sort_by(|a, b| b.1.abs().total_cmp(&a.1.abs()));
            l.truncate(4);
            culprits.push(Culprit {
                eigenvalue: ev,
                loadings: l,
            });
        }
    }
    if !culprits.is_empty() {
        culprits.sort_by(|a, b| a.eigenvalue.total_cmp(&b.eigenvalue));
        return Covariance::NotPositiveDefinite {
            message: format!(
                "the Hessian is not positive definite ({} eigenvalue(s) ≤ {threshold:.1e}); \
                 estimates may be on a boundary or not identified",
                culprits.len()
            ),
            culprits,
            hessian: h,
        };
    }
    match h.clone().cholesky() {
        Some(ch) => Covariance::Available {
            covariance: ch.inverse(),
            hessian: h,
        },
        None => Covariance::NotPositiveDefinite {
            message: "Cholesky factorisation of the Hessian failed".into(),
            culprits,
            hessian: h,
        },
    }
}

/// How intervals are computed.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub enum IntervalMethod {
    /// First-order delta method (symmetric intervals on the natural scale).
    Delta,
    /// Percentile intervals from `draws` draws of θ ~ N(θ̂, Σ̂), seeded.
    Simulation { draws: usize, seed: u64 },
}

/// An estimate with its standard error and interval.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Interval {
    pub name: String,
    pub estimate: f64,
    pub se: f64,
    pub lower: f64,
    pub upper: f64,
}

impl FittedModel {
    /// Standard errors of the working parameters (None without a covariance).
    pub fn working_standard_errors(&self) -> Option<Vec<f64>> {
        self.covariance
            .matrix()
            .map(|c| (0..c.nrows()).map(|i| c[(i, i)].sqrt()).collect())
    }

    /// Intervals for every natural-scale parameter (names from
    /// [`crate::hmm::spec::ValidSpec::natural_names`]).
    ///
    /// # Errors
    /// [`HmmError::NoCovariance`] when the Hessian was not positive definite (with the
    /// culprits) or not computed.
    pub fn natural_intervals(
        &self,
        level: f64,
        method: IntervalMethod,
    ) -> Result<Vec<Interval>, HmmError> {
        let spec = self.model.valid_spec().clone();
        let names = spec.natural_names();
        self.derived_intervals(
            &names,
            |th| spec.natural_vector(&spec.to_natural(th)),
            level,
            method,
        )
    }

    /// Intervals for the transition probabilities Γ_ij(x), row-major, at covariate row x.
    ///
    /// # Errors
    /// As [`FittedModel::natural_intervals`].
    pub fn transition_intervals(
        &self,
        x: &[f64],
        level: f64,
        method: IntervalMethod,
    ) -> Result<Vec<Interval>, HmmError> {
        let n = self.model.n_states();
        let spec = self.model.valid_spec().clone();
        let names: Vec<String> = (0..n * n)
            .map(|k| format!("Gamma {}->{}", k / n + 1, k % n + 1))
            .collect();
        let x = x.to_vec();
        self.derived_intervals(
            &names,
            |th| {
                let p = spec.to_natural(th);
                let mut g = vec![0.0; n * n];
                fill_gamma(&p.beta, n, &x, &mut g);
                g
            },
            level,
            method,
        )
    }

    /// Intervals for the stationary distribution of Γ(x).
    ///
    /// # Errors
    /// As [`FittedModel::natural_intervals`].
    pub fn stationary_intervals(
        &self,
        x: &[f64],
        level: f64,
        method: IntervalMethod,
    ) -> Result<Vec<Interval>, HmmError> {
        let n = self.model.n_states();
        let spec = self.model.valid_spec().clone();
        let names: Vec<String> = spec.state_labels();
        let x = x.to_vec();
        self.derived_intervals(
            &names,
            |th| {
                let p = spec.to_natural(th);
                let mut g = vec![0.0; n * n];
                fill_gamma(&p.beta, n, &x, &mut g);
                stationary_flat(&g, n).unwrap_or_else(|_| vec![f64::NAN; n])
            },
            level,
            method,
        )
    }

    fn derived_intervals(
        &self,
        names: &[String],
        f: impl Fn(&[f64]) -> Vec<f64>,
        level: f64,
        method: IntervalMethod,
    ) -> Result<Vec<Interval>, HmmError> {
        let cov = self
            .covariance
            .matrix()
            .ok_or_else(|| HmmError::NoCovariance(self.covariance.problem().unwrap_or_default()))?;
        if !(level > 0.0 && level < 1.0) {
            return Err(HmmError::InvalidParameter {
                name: "level".into(),
                reason: format!("must be in (0, 1), got {level}"),
            });
        }
        let theta = self.model.working();
        let est = f(theta);
        let z = Normal::new(0.0, 1.0)
            .expect("unit normal")
            .inverse_cdf(0.5 + level / 2.0);
        match method {
            IntervalMethod::Delta => {
                let k = theta.len();
                let m = est.len();
                let mut jac = DMatrix::zeros(m, k);
                let mut th = theta.to_vec();
                for j in 0..k {
                    let h = prec::JACOBIAN_STEP * theta[j].abs().max(1.0);
                    th[j] = theta[j] + h;
                    let fp = f(&th);
                    th[j] = theta[j] - h;
                    let fm = f(&th);
                    th[j] = theta[j];
                    for i in 0..m {
                        jac[(i, j)] = (fp[i] - fm[i]) / (2.0 * h);
                    }
                }
                let v = &jac * cov * jac.transpose();
                Ok((0..m)
                    .map(|i| {
                        let se = v[(i, i)].max(0.0).sqrt();
                        Interval {
                            name: names[i].clone(),
                            estimate: est[i],
                            se,
                            lower: est[i] - z * se,
                            upper: est[i] + z * se,
                        }
                    })
                    .collect())
            }
            IntervalMethod::Simulation { draws, seed } => {
                let chol = cov.clone().cholesky().ok_or_else(|| {
                    HmmError::NoCovariance("covariance is not positive definite".into())
                })?;
                let l = chol.l();
                let mut rng = ChaCha8Rng::seed_from_u64(seed);
                let m = est.len();
                let mut samples: Vec<Vec<f64>> = vec![Vec::with_capacity(draws); m];
                let th0 = DVector::from_column_slice(theta);
                for _ in 0..draws.max(2) {
                    let zv = DVector::from_fn(theta.len(), |_, _| StandardNormal.sample(&mut rng));
                    let th = &th0 + &l * zv;
                    let v = f(th.as_slice());
                    for (s, x) in samples.iter_mut().zip(v) {
                        s.push(x);
                    }
                }
                Ok(samples
                    .into_iter()
                    .enumerate()
                    .map(|(i, mut s)| {
                        s.retain(|x| x.is_finite());
                        s.sort_by(f64::total_cmp);
                        let mean = s.iter().sum::<f64>() / s.len().max(1) as f64;
                        let var = s.iter().map(|x| (x - mean).powi(2)).sum::<f64>()
                            / (s.len().max(2) - 1) as f64;
                        let q = |p: f64| {
                            if s.is_empty() {
                                f64::NAN
                            } else {
                                s[((p * (s.len() - 1) as f64).round() as usize).min(s.len() - 1)]
                            }
                        };
                        Interval {
                            name: names[i].clone(),
                            estimate: est[i],
                            se: var.sqrt(),
                            lower: q(0.5 - level / 2.0),
                            upper: q(0.5 + level / 2.0),
                        }
                    })
                    .collect())
            }
        }
    }
}

/// One row of a model-comparison table.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ComparisonRow {
    pub name: String,
    pub n_states: usize,
    pub n_params: usize,
    pub loglik: f64,
    pub aic: f64,
    pub bic: f64,
    pub delta_aic: f64,
    pub delta_bic: f64,
    pub converged: bool,
}

/// AIC/BIC table over candidate models fitted to the same data, sorted by AIC.
pub fn compare(models: &[(&str, &FittedModel)]) -> Vec<ComparisonRow> {
    let min_aic = models
        .iter()
        .map(|m| m.1.aic())
        .fold(f64::INFINITY, f64::min);
    let min_bic = models
        .iter()
        .map(|m| m.1.bic())
        .fold(f64::INFINITY, f64::min);
    let mut rows: Vec<ComparisonRow> = models
        .iter()
        .map(|(name, m)| ComparisonRow {
            name: name.to_string(),
            n_states: m.model().n_states(),
            n_params: m.n_params(),
            loglik: m.loglik(),
            aic: m.aic(),
            bic: m.bic(),
            delta_aic: m.aic() - min_aic,
            delta_bic: m.bic() - min_bic,
            converged: m.convergence().converged,
        })
        .collect();
    rows.sort_by(|a, b| a.aic.total_cmp(&b.aic));
    rows
}
