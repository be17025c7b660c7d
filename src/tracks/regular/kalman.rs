//! Kalman filter, its Gaussian log-likelihood, and the Rauch–Tung–Striebel smoother for
//! the four-state (x, vx, y, vy) movement model over an irregular sequence of epochs.
//!
//! An epoch is a time with or without a fix. Epochs without a fix (the regular grid
//! times) get a prediction step only, so running the filter over the union of fix times
//! and grid times and then smoothing backwards yields the smoothed location at every grid
//! time. The observation picks the two positions; its covariance may be full, and the
//! update is the joint two-dimensional one, so correlated (ellipse) errors are handled
//! exactly.

use nalgebra::{Matrix4, Vector4};

use super::observation::ErrorCovariance;
use super::process::{ProcessParams, step_terms};

const LN_2PI: f64 = 1.837_877_066_409_345_3;

/// A fix as the filter sees it: position and error covariance (already scaled).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Observation {
    /// Projected x (m).
    pub x: f64,
    /// Projected y (m).
    pub y: f64,
    /// Observation-error covariance (m²).
    pub error: ErrorCovariance,
}

/// A time at which the filter produces a state, with the fix observed then, if any.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Epoch {
    /// Time (s); epochs must be non-decreasing.
    pub time: f64,
    /// The fix at this time, or `None` for a prediction-only epoch.
    pub observation: Option<Observation>,
}

/// Gaussian distribution of the state at the first epoch, before its fix is used.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct StatePrior {
    /// Mean of (x, vx, y, vy).
    pub mean: Vector4<f64>,
    /// Covariance of (x, vx, y, vy).
    pub cov: Matrix4<f64>,
}

impl StatePrior {
    /// The prior used for every segment: position centred on the segment's first fix with
    /// a large standard deviation `position_sd` (m) on each axis, so the first fix
    /// (rather than the prior) sets the position; velocity centred on zero with the
    /// process's stationary variance `σ²/(2β)`, which is what the velocity would have
    /// if the animal had been moving under the model long before tracking began.
    pub fn diffuse_position(x: f64, y: f64, position_sd: f64, params: &ProcessParams) -> Self {
        let pv = position_sd * position_sd;
        let vv = params.stationary_velocity_variance();
        Self {
            mean: Vector4::new(x, 0.0, y, 0.0),
            cov: Matrix4::from_diagonal(&Vector4::new(pv, vv, pv, vv)),
        }
    }
}

/// Why a filter pass failed.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum FilterFailure {
    /// The innovation covariance at this epoch was not positive definite.
    SingularInnovation(usize),
    /// The one-step predicted covariance at this epoch could not be inverted (smoother).
    SingularPrediction(usize),
    /// Epoch times decrease at this epoch.
    TimeReversal(usize),
}

/// Filtered and smoothed moments at every epoch, and the log-likelihood of the fixes.
#[derive(Debug, Clone)]
pub struct SmootherOutput {
    /// Filtered means (given fixes up to and including the epoch).
    pub filtered_mean: Vec<Vector4<f64>>,
    /// Filtered covariances.
    pub filtered_cov: Vec<Matrix4<f64>>,
    /// Smoothed means (given all fixes).
    pub smoothed_mean: Vec<Vector4<f64>>,
    /// Smoothed covariances.
    pub smoothed_cov: Vec<Matrix4<f64>>,
    /// Squared Mahalanobis length of each fix's innovation (`None` at fix-less epochs).
    pub innovation_d2: Vec<Option<f64>>,
    /// Gaussian log-likelihood of all fixes.
    pub log_likelihood: f64,
}

/// One predict step for the joint state.
///
/// The transition is block diagonal with the same upper-triangular block
/// `A = [[1, a], [0, e]]` on both axes, so `T P Tᵀ` is computed block by block
/// (`A B Aᵀ` for the xx, xy and yy blocks, yx by symmetry): about a fifth of the work of
/// two general 4 × 4 products, which matters because this runs once per fix per
/// likelihood evaluation. Returns the block terms `(a, e)` so the smoother can rebuild
/// the transition.
#[inline]
fn predict(
    mean: &mut Vector4<f64>,
    cov: &mut Matrix4<f64>,
    params: &ProcessParams,
    dt: f64,
) -> (f64, f64) {
    let (a, e, q) = step_terms(params, dt);
    for o in [0, 2] {
        mean[o] += a * mean[o + 1];
        mean[o + 1] *= e;
    }
    // A B Aᵀ for a 2 × 2 block B at rows r, columns c.
    let block = |p: &Matrix4<f64>, r: usize, c: usize| {
        let (b00, b01, b10, b11) = (p[(r, c)], p[(r, c + 1)], p[(r + 1, c)], p[(r + 1, c + 1)]);
        [
            b00 + a * (b01 + b10) + a * a * b11,
            e * (b01 + a * b11),
            e * (b10 + a * b11),
            e * e * b11,
        ]
    };
    let xx = block(cov, 0, 0);
    let xy = block(cov, 0, 2);
    let yy = block(cov, 2, 2);
    let p = cov;
    p[(0, 0)] = xx[0] + q[0];
    p[(0, 1)] = xx[1] + q[1];
    p[(1, 0)] = xx[2] + q[1];
    p[(1, 1)] = xx[3] + q[2];
    p[(2, 2)] = yy[0] + q[0];
    p[(2, 3)] = yy[1] + q[1];
    p[(3, 2)] = yy[2] + q[1];
    p[(3, 3)] = yy[3] + q[2];
    p[(0, 2)] = xy[0];
    p[(0, 3)] = xy[1];
    p[(1, 2)] = xy[2];
    p[(1, 3)] = xy[3];
    p[(2, 0)] = xy[0];
    p[(3, 0)] = xy[1];
    p[(2, 1)] = xy[2];
    p[(3, 1)] = xy[3];
    (a, e)
}

/// The full 4 × 4 transition from the block terms `(a, e)`.
fn transition_matrix((a, e): (f64, f64)) -> Matrix4<f64> {
    let mut t = Matrix4::identity();
    for o in [0, 2] {
        t[(o, o + 1)] = a;
        t[(o + 1, o + 1)] = e;
    }
    t
}

/// One update step; returns (log-likelihood term, squared Mahalanobis innovation).
#[inline]
fn update(
    mean: &mut Vector4<f64>,
    cov: &mut Matrix4<f64>,
    obs: &Observation,
) -> Option<(f64, f64)> {
    let (v0, v1) = (obs.x - mean[0], obs.y - mean[2]);
    // C = P Hᵀ: columns 0 and 2 of P.
    let c0 = [cov[(0, 0)], cov[(1, 0)], cov[(2, 0)], cov[(3, 0)]];
    let c1 = [cov[(0, 2)], cov[(1, 2)], cov[(2, 2)], cov[(3, 2)]];
    let s00 = c0[0] + obs.error.xx();
    let s01 = c0[2] + obs.error.xy();
    let s11 = c1[2] + obs.error.yy();
    let det = s00 * s11 - s01 * s01;
    if !(det > 0.0 && s00 > 0.0 && det.is_finite()) {
        return None;
    }
    let (i00, i01, i11) = (s11 / det, -s01 / det, s00 / det);
    let d2 = v0 * (i00 * v0 + i01 * v1) + v1 * (i01 * v0 + i11 * v1);
    // Gain K = C S⁻¹; P ← P − K Cᵀ, written on the upper triangle and mirrored so the
    // covariance stays exactly symmetric.
    let mut k0 = [0.0; 4];
    let mut k1 = [0.0; 4];
    for i in 0..4 {
        k0[i] = c0[i] * i00 + c1[i] * i01;
        k1[i] = c0[i] * i01 + c1[i] * i11;
        mean[i] += k0[i] * v0 + k1[i] * v1;
    }
    for i in 0..4 {
        for j in i..4 {
            let v = cov[(i, j)] - (k0[i] * c0[j] + k1[i] * c1[j]);
            cov[(i, j)] = v;
            cov[(j, i)] = v;
        }
    }
    Some((-0.5 * (2.0 * LN_2PI + det.ln() + d2), d2))
}

/// Log-likelihood of the fixes in `epochs` (fix-less epochs are skipped), without
/// storing anything: the cost function of the fit.
///
/// # Formula
/// Prediction-error decomposition (Harvey 1989, *Forecasting, Structural Time Series
/// Models and the Kalman Filter*, §3.4): `ℓ = Σ −½ (2 ln 2π + ln|Sₖ| + νₖᵀ Sₖ⁻¹ νₖ)`, with
/// innovation `νₖ` and innovation covariance `Sₖ = H Pₖ⁻ Hᵀ + Rₖ`.
///
/// # Errors
/// [`FilterFailure`] when an innovation covariance is not positive definite or times
/// decrease.
pub fn log_likelihood(
    epochs: &[Epoch],
    params: &ProcessParams,
    prior: &StatePrior,
) -> Result<f64, FilterFailure> {
    let mut mean = prior.mean;
    let mut cov = prior.cov;
    let mut total = 0.0;
    let mut last_time = epochs.first().map_or(0.0, |e| e.time);
    for (k, epoch) in epochs.iter().enumerate() {
        let dt = epoch.time - last_time;
        if dt < 0.0 {
            return Err(FilterFailure::TimeReversal(k));
        }
        if dt > 0.0 {
            predict(&mut mean, &mut cov, params, dt);
        }
        last_time = epoch.time;
        if let Some(obs) = &epoch.observation {
            let (ll, _) =
                update(&mut mean, &mut cov, obs).ok_or(FilterFailure::SingularInnovation(k))?;
            total += ll;
        }
    }
    Ok(total)
}

/// Kalman filter forward, Rauch–Tung–Striebel smoother backward.
///
/// # Formula
/// Filter as in [`log_likelihood`]. Smoother (Rauch, Tung & Striebel 1965, AIAA
/// Journal 3:1445–1450): `Gₖ = Pₖ Tₖ₊₁ᵀ (Pₖ₊₁⁻)⁻¹`,
/// `m̂ₖ = mₖ + Gₖ (m̂ₖ₊₁ − mₖ₊₁⁻)`, `P̂ₖ = Pₖ + Gₖ (P̂ₖ₊₁ − Pₖ₊₁⁻) Gₖᵀ`.
///
/// # Errors
/// [`FilterFailure`] as for [`log_likelihood`], or when a predicted covariance cannot be
/// inverted in the backward pass.
pub fn filter_smooth(
    epochs: &[Epoch],
    params: &ProcessParams,
    prior: &StatePrior,
) -> Result<SmootherOutput, FilterFailure> {
    let n = epochs.len();
    let mut filtered_mean = Vec::with_capacity(n);
    let mut filtered_cov = Vec::with_capacity(n);
    let mut predicted_mean = Vec::with_capacity(n);
    let mut predicted_cov = Vec::with_capacity(n);
    let mut transitions = Vec::with_capacity(n);
    let mut innovation_d2 = Vec::with_capacity(n);
    let mut mean = prior.mean;
    let mut cov = prior.cov;
    let mut total = 0.0;
    let mut last_time = epochs.first().map_or(0.0, |e| e.time);
    for (k, epoch) in epochs.iter().enumerate() {
        let dt = epoch.time - last_time;
        if dt < 0.0 {
            return Err(FilterFailure::TimeReversal(k));
        }
        let t = if dt > 0.0 {
            transition_matrix(predict(&mut mean, &mut cov, params, dt))
        } else {
            Matrix4::identity()
        };
        last_time = epoch.time;
        transitions.push(t);
        predicted_mean.push(mean);
        predicted_cov.push(cov);
        let d2 = match &epoch.observation {
            Some(obs) => {
                let (ll, d2) =
                    update(&mut mean, &mut cov, obs).ok_or(FilterFailure::SingularInnovation(k))?;
                total += ll;
                Some(d2)
            }
            None => None,
        };
        innovation_d2.push(d2);
        filtered_mean.push(mean);
        filtered_cov.push(cov);
    }
    let mut smoothed_mean = filtered_mean.clone();
    let mut smoothed_cov = filtered_cov.clone();
    for k in (0..n.saturating_sub(1)).rev() {
        let p_pred = predicted_cov[k + 1];
        let chol = p_pred
            .cholesky()
            .ok_or(FilterFailure::SingularPrediction(k + 1))?;
        // G = P Tᵀ (P⁻)⁻¹, computed as (P⁻)⁻¹ (T P) transposed since P⁻ is symmetric.
        let gain = chol
            .solve(&(transitions[k + 1] * filtered_cov[k]))
            .transpose();
        smoothed_mean[k] = filtered_mean[k] + gain * (smoothed_mean[k + 1] - predicted_mean[k + 1]);
        let c = filtered_cov[k] + gain * (smoothed_cov[k + 1] - p_pred) * gain.transpose();
        smoothed_cov[k] = (c + c.transpose()) * 0.5;
    }
    Ok(SmootherOutput {
        filtered_mean,
        filtered_cov,
        smoothed_mean,
        smoothed_cov,
        innovation_d2,
        log_likelihood: total,
    })
}
