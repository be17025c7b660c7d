//! Simulation from a model for given covariates: a Markov chain of states with
//! covariate-dependent transition matrices (row t of the covariates drives the step
//! t → t + 1), and each stream drawn from its state's distribution (zero steps with the
//! zero mass, missing values never produced). Deterministic for a seed (ChaCha8).
//!
//! # Formula
//! Von Mises draws: Best & Fisher (1979), *Applied Statistics* 28(2), 152–157. Wrapped
//! Cauchy: a Cauchy(μ, −ln ρ) draw wrapped onto the circle (Mardia & Jupp 2000, ch. 3).
//! The other families use rand_distr.

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, Gamma, LogNormal, Normal, Poisson, Weibull};
use std::f64::consts::PI;

use super::data::{Data, Series};
use super::dists::{Family, wrap_angle};
use super::error::HmmError;
use super::model::Model;
use super::transitions::{fill_gamma, stationary_flat};

/// Covariates of one series to simulate: `len` steps, `covariates` row-major len × p in
/// the model's covariate order.
#[derive(Debug, Clone, PartialEq)]
pub struct SeriesDesign {
    pub id: String,
    pub len: usize,
    pub covariates: Vec<f64>,
}

/// Simulated data with the true states.
#[derive(Debug, Clone, PartialEq)]
pub struct Simulated {
    pub data: Data,
    pub states: Vec<Vec<usize>>,
}

pub(crate) fn draw(family: Family, nat: &[f64], rng: &mut ChaCha8Rng) -> f64 {
    match family {
        Family::Gamma => {
            let shape = (nat[0] / nat[1]).powi(2);
            let scale = nat[1] * nat[1] / nat[0];
            Gamma::new(shape, scale).map_or(f64::NAN, |d| d.sample(rng))
        }
        Family::Weibull => Weibull::new(nat[1], nat[0]).map_or(f64::NAN, |d| d.sample(rng)),
        Family::LogNormal => LogNormal::new(nat[0], nat[1]).map_or(f64::NAN, |d| d.sample(rng)),
        Family::Normal => Normal::new(nat[0], nat[1]).map_or(f64::NAN, |d| d.sample(rng)),
        Family::Poisson => Poisson::new(nat[0]).map_or(f64::NAN, |d| d.sample(rng)),
        Family::VonMises => von_mises(nat[0], nat[1], rng),
        Family::WrappedCauchy => {
            let (mu, rho) = (nat[0], nat[1]);
            if rho <= 0.0 {
                return rng.random_range(-PI..PI);
            }
            let u: f64 = rng.random();
            wrap_angle(mu + (-rho.ln()) * (PI * (u - 0.5)).tan())
        }
    }
}

fn von_mises(mu: f64, kappa: f64, rng: &mut ChaCha8Rng) -> f64 {
    if kappa < 1e-8 {
        return rng.random_range(-PI..PI);
    }
    let tau = 1.0 + (1.0 + 4.0 * kappa * kappa).sqrt();
    let rho = (tau - (2.0 * tau).sqrt()) / (2.0 * kappa);
    let r = (1.0 + rho * rho) / (2.0 * rho);
    loop {
        let u1: f64 = rng.random();
        let u2: f64 = rng.random();
        let u3: f64 = rng.random();
        let z = (PI * u1).cos();
        let f = (1.0 + r * z) / (r + z);
        let c = kappa * (r - f);
        if c * (2.0 - c) - u2 > 0.0 || (c / u2).ln() + 1.0 - c >= 0.0 {
            let th = f.clamp(-1.0, 1.0).acos();
            return wrap_angle(mu + if u3 > 0.5 { th } else { -th });
        }
    }
}

pub(crate) fn pick(probs: &[f64], rng: &mut ChaCha8Rng) -> usize {
    let u: f64 = rng.random();
    let mut acc = 0.0;
    for (j, &p) in probs.iter().enumerate() {
        acc += p;
        if u < acc {
            return j;
        }
    }
    probs.len() - 1
}

impl Model {
    /// Simulates one series per design entry.
    ///
    /// # Errors
    /// [`HmmError::Shape`] when a design's covariates are not len × p;
    /// [`HmmError::InvalidParameter`] when a stationary start is requested from a
    /// reducible Γ.
    pub fn simulate(&self, designs: &[SeriesDesign], seed: u64) -> Result<Simulated, HmmError> {
        let spec = self.valid_spec();
        let n = spec.n_states();
        let p = spec.n_covariates();
        let params = self.params();
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let mut series = Vec::new();
        let mut all_states = Vec::new();
        for d in designs {
            if d.covariates.len() != d.len * p {
                return Err(HmmError::Shape {
                    series: d.id.clone(),
                    what: "covariate values (steps × covariates)".into(),
                    expected: d.len * p,
                    found: d.covariates.len(),
                });
            }
            let mut g = vec![0.0; n * n];
            let mut states = Vec::with_capacity(d.len);
            if d.len > 0 {
                fill_gamma(&params.beta, n, &d.covariates[..p], &mut g);
                let delta = match &params.delta {
                    Some(dl) => dl.clone(),
                    None => stationary_flat(&g, n).map_err(|e| HmmError::InvalidParameter {
                        name: "transition matrix".into(),
                        reason: e,
                    })?,
                };
                states.push(pick(&delta, &mut rng));
                for t in 1..d.len {
                    fill_gamma(&params.beta, n, &d.covariates[(t - 1) * p..t * p], &mut g);
                    let i = states[t - 1];
                    states.push(pick(&g[i * n..(i + 1) * n], &mut rng));
                }
            }
            let mut streams = Vec::new();
            for (k, sk) in spec.spec().streams.iter().enumerate() {
                let sp = &params.streams[k];
                let x: Vec<f64> = states
                    .iter()
                    .map(|&j| {
                        if let Some(z) = &sp.zero_mass
                            && rng.random::<f64>() < z[j]
                        {
                            return 0.0;
                        }
                        draw(sk.family, &sp.per_state[j], &mut rng)
                    })
                    .collect();
                streams.push(x);
            }
            series.push(Series::new(d.id.clone(), streams, d.covariates.clone()));
            all_states.push(states);
        }
        let data = Data::new(
            spec.spec().streams.iter().map(|s| s.name.clone()).collect(),
            spec.spec().covariates.clone(),
            series,
        )?;
        Ok(Simulated {
            data,
            states: all_states,
        })
    }
}
