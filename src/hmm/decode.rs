//! State decoding after a fit: the most probable state sequence of each series (Viterbi,
//! in log space so that long series cannot underflow) and the local state probabilities
//! Pr(S_t = j | all observations of the series) from the forward–backward pass.
//!
//! # Formula
//! Viterbi (1967), IEEE Trans. Inf. Theory 13(2), 260–269, as in Zucchini, MacDonald &
//! Langrock (2016), *Hidden Markov Models for Time Series*, 2nd ed., ch. 5; local
//! decoding ibid. ch. 5.

use serde::{Deserialize, Serialize};

use super::data::Data;
use super::error::HmmError;
use super::forward::Evaluator;
use super::model::Model;
use super::transitions::fill_gamma;

/// Most probable state path of one series (states 0-based, in the model's state order).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DecodedSeries {
    pub id: String,
    pub states: Vec<usize>,
    /// log Pr(path, observations) of the decoded path
    pub log_prob: f64,
}

/// Local state probabilities of one series: T rows × N columns, row-major.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct StateProbabilities {
    pub id: String,
    pub n_states: usize,
    pub probs: Vec<f64>,
}

impl StateProbabilities {
    /// Pr(S_t = j | observations).
    pub fn get(&self, t: usize, j: usize) -> f64 {
        self.probs[t * self.n_states + j]
    }
}

impl Model {
    /// Viterbi path of every (non-empty) series, in data order.
    ///
    /// # Errors
    /// Bad input against the spec.
    pub fn viterbi(&self, data: &Data) -> Result<Vec<DecodedSeries>, HmmError> {
        let spec = self.valid_spec();
        let prep = spec.prepare(data)?;
        let ev = Evaluator::new(spec, self.working());
        let n = spec.n_states();
        let p = spec.n_covariates();
        let out = prep
            .series
            .iter()
            .map(|s| {
                let t_len = s.len;
                let mut g = vec![0.0; n * n];
                fill_gamma(&ev.beta, n, &s.cov[..p], &mut g);
                let delta = ev.initial(s, &g).unwrap_or_else(|_| vec![f64::NAN; n]);
                let mut l = vec![0.0; n];
                let mut v: Vec<f64> = vec![0.0; n];
                let mut vn = vec![0.0; n];
                let mut back = vec![0u8; t_len * n];
                ev.log_dens(s, 0, &mut l);
                for j in 0..n {
                    v[j] = delta[j].ln() + l[j];
                }
                for t in 1..t_len {
                    fill_gamma(&ev.beta, n, &s.cov[(t - 1) * p..t * p], &mut g);
                    ev.log_dens(s, t, &mut l);
                    for j in 0..n {
                        let mut best = f64::NEG_INFINITY;
                        let mut arg = 0;
                        for i in 0..n {
                            let c = v[i] + g[i * n + j].ln();
                            // strict > keeps the lowest index on ties (deterministic)
                            if c > best {
                                best = c;
                                arg = i;
                            }
                        }
                        vn[j] = best + l[j];
                        back[t * n + j] = arg as u8;
                    }
                    std::mem::swap(&mut v, &mut vn);
                }
                let mut states = vec![0usize; t_len];
                let (mut arg, mut best) = (0, f64::NEG_INFINITY);
                for (j, &x) in v.iter().enumerate() {
                    if x > best {
                        best = x;
                        arg = j;
                    }
                }
                states[t_len - 1] = arg;
                for t in (1..t_len).rev() {
                    states[t - 1] = back[t * n + states[t]] as usize;
                }
                DecodedSeries {
                    id: s.id.clone(),
                    states,
                    log_prob: best,
                }
            })
            .collect();
        Ok(out)
    }

    /// Local state probabilities of every (non-empty) series, in data order.
    ///
    /// # Errors
    /// Bad input against the spec.
    pub fn state_probabilities(&self, data: &Data) -> Result<Vec<StateProbabilities>, HmmError> {
        let spec = self.valid_spec();
        let prep = spec.prepare(data)?;
        let ev = Evaluator::new(spec, self.working());
        let n = spec.n_states();
        Ok(prep
            .series
            .iter()
            .map(|s| {
                let mut probs = vec![0.0; s.len * n];
                ev.series_pass(s, None, Some(&mut probs));
                StateProbabilities {
                    id: s.id.clone(),
                    n_states: n,
                    probs,
                }
            })
            .collect())
    }
}
