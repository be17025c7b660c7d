//! Ordinary pseudo-residuals, one series of residuals per data stream: the conditional
//! CDF of each observation given all other observations (of the same series, including
//! the other streams at the same step), mapped to the standard normal scale. For counts
//! and for zero step lengths under a zero mass the CDF jumps, and the mid-pseudo-residual
//! Φ⁻¹((F(x⁻) + F(x))/2) is reported. Missing observations get NaN.
//!
//! Circular convention: angles are taken in (−π, π] and their CDF is integrated from −π,
//! so a residual near ±π corresponds to an angle near the cut at ±π.
//!
//! # Formula
//! Zucchini, MacDonald & Langrock (2016), *Hidden Markov Models for Time Series*,
//! 2nd ed., ch. 6: Pr(X_t ≤ x | X^{(−t)}) = Σ_j w_t(j) F_j(x) with
//! w_t(j) ∝ (α_{t−1} Γ(t−1))_j β_t(j) (δ_j at t = 0).

use statrs::distribution::{ContinuousCDF, Normal};

use super::data::Data;
use super::dists::{CircularCdf, cdf_pair};
use super::error::HmmError;
use super::model::Model;
use super::transitions::fill_gamma;

/// Pseudo-residuals of one series: one vector per stream (model stream order).
#[derive(Debug, Clone, PartialEq)]
pub struct SeriesResiduals {
    pub id: String,
    pub streams: Vec<Vec<f64>>,
}

impl Model {
    /// Ordinary pseudo-residuals of every (non-empty) series.
    ///
    /// # Errors
    /// Bad input against the spec.
    pub fn pseudo_residuals(&self, data: &Data) -> Result<Vec<SeriesResiduals>, HmmError> {
        let spec = self.valid_spec();
        let prep = spec.prepare(data)?;
        let n = spec.n_states();
        let p = spec.n_covariates();
        let k_streams = spec.spec().streams.len();
        let params = self.params();
        let std_normal = Normal::new(0.0, 1.0).expect("unit normal");
        let mut out = Vec::new();
        // circular CDF tables, one per (stream, state), built once for all series
        let circ: Vec<Option<Vec<Option<CircularCdf>>>> = spec
            .spec()
            .streams
            .iter()
            .enumerate()
            .map(|(k, sk)| {
                sk.family.is_circular().then(|| {
                    params.streams[k]
                        .per_state
                        .iter()
                        .map(|nat| CircularCdf::new(sk.family, nat))
                        .collect()
                })
            })
            .collect();
        for s in &prep.series {
            let t_len = s.len;
            // per-stream state log-densities, via a one-stream evaluator per stream
            let mut ld = vec![0.0; t_len * k_streams * n];
            let ev = super::forward::Evaluator::new(spec, self.working());
            for t in 0..t_len {
                for k in 0..k_streams {
                    ev.log_dens_stream(s, t, k, &mut ld[(t * k_streams + k) * n..][..n]);
                }
            }
            let total = |t: usize, j: usize| {
                (0..k_streams)
                    .map(|k| ld[(t * k_streams + k) * n + j])
                    .sum::<f64>()
            };
            let gam_at = |t: usize| {
                let mut g = vec![0.0; n * n];
                fill_gamma(&params.beta, n, &s.cov[t * p..t * p + p], &mut g);
                g
            };
            let g0 = gam_at(0);
            let delta = ev.initial(s, &g0).unwrap_or_else(|_| vec![f64::NAN; n]);
            // normalised forward and backward vectors
            let mut alpha = vec![0.0; t_len * n];
            let mut beta = vec![1.0 / n as f64; t_len * n];
            for t in 0..t_len {
                let lt: Vec<f64> = (0..n).map(|j| total(t, j)).collect();
                let m = lt.iter().copied().fold(f64::NEG_INFINITY, f64::max);
                let pred: Vec<f64> = if t == 0 {
                    delta.clone()
                } else {
                    let g = gam_at(t - 1);
                    (0..n)
                        .map(|j| (0..n).map(|i| alpha[(t - 1) * n + i] * g[i * n + j]).sum())
                        .collect()
                };
                let a: Vec<f64> = (0..n).map(|j| pred[j] * (lt[j] - m).exp()).collect();
                let c: f64 = a.iter().sum();
                for j in 0..n {
                    alpha[t * n + j] = a[j] / c;
                }
            }
            for t in (0..t_len.saturating_sub(1)).rev() {
                let l1: Vec<f64> = (0..n).map(|j| total(t + 1, j)).collect();
                let m = l1.iter().copied().fold(f64::NEG_INFINITY, f64::max);
                let g = gam_at(t);
                let b: Vec<f64> = (0..n)
                    .map(|i| {
                        (0..n)
                            .map(|j| g[i * n + j] * (l1[j] - m).exp() * beta[(t + 1) * n + j])
                            .sum()
                    })
                    .collect();
                let c: f64 = b.iter().sum();
                for i in 0..n {
                    beta[t * n + i] = b[i] / c;
                }
            }
            let mut res = vec![vec![f64::NAN; t_len]; k_streams];
            for t in 0..t_len {
                let pred: Vec<f64> = if t == 0 {
                    delta.clone()
                } else {
                    let g = gam_at(t - 1);
                    (0..n)
                        .map(|j| (0..n).map(|i| alpha[(t - 1) * n + i] * g[i * n + j]).sum())
                        .collect()
                };
                for k in 0..k_streams {
                    let [u, v] = s.feats[k][t];
                    if u.is_nan() {
                        continue;
                    }
                    let sk = &spec.spec().streams[k];
                    let x = if sk.family.is_circular() {
                        v.atan2(u)
                    } else {
                        u
                    };
                    // weights: everything at t except stream k itself
                    let lo: Vec<f64> = (0..n)
                        .map(|j| total(t, j) - ld[(t * k_streams + k) * n + j])
                        .collect();
                    let m = lo.iter().copied().fold(f64::NEG_INFINITY, f64::max);
                    let mut w: Vec<f64> = (0..n)
                        .map(|j| pred[j] * (lo[j] - m).exp() * beta[t * n + j])
                        .collect();
                    let ws: f64 = w.iter().sum();
                    w.iter_mut().for_each(|x| *x /= ws);
                    let (mut hi, mut lo_c) = (0.0, 0.0);
                    for j in 0..n {
                        let nat = &params.streams[k].per_state[j];
                        let z = params.streams[k].zero_mass.as_ref().map_or(0.0, |z| z[j]);
                        let (fh, fl) = if sk.family.is_positive() && x == 0.0 {
                            (z, 0.0)
                        } else if let Some(tables) = &circ[k] {
                            let a = tables[j].as_ref().map_or(f64::NAN, |c| c.cdf(x));
                            (a, a)
                        } else {
                            let (a, b) = cdf_pair(sk.family, nat, x);
                            (z + (1.0 - z) * a, z + (1.0 - z) * b)
                        };
                        hi += w[j] * fh;
                        lo_c += w[j] * fl;
                    }
                    let u_mid = 0.5 * (hi + lo_c);
                    // keep Φ⁻¹ finite when the CDF rounds to 0 or 1 (|r| ≤ ~37 and ~8.2)
                    res[k][t] = std_normal.inverse_cdf(u_mid.clamp(1e-300, 1.0 - 1e-16));
                }
            }
            out.push(SeriesResiduals {
                id: s.id.clone(),
                streams: res,
            });
        }
        Ok(out)
    }
}
