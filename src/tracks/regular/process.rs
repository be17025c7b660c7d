//! The movement process: a continuous-time correlated random walk whose velocity on
//! each axis is an Ornstein–Uhlenbeck process, and its exact discretisation between
//! two arbitrary times.
//!
//! Each axis carries a position `μ` and a velocity `v` with
//! `dv = −β v dt + σ dW`, `dμ = v dt` (Johnson, London, Lea & Durban 2008, Ecology
//! 89:1208–1215, with the mean drift set to zero). The two axes are independent and share
//! `β` and `σ`, so the four-dimensional transition and process covariance are block
//! diagonal with one 2 × 2 block per axis; this module computes that block.

use nalgebra::Matrix2;

use super::RegularError;

/// Below this value of `β Δt` the position variance is summed as a power series, because
/// the closed form subtracts numbers of order `β Δt` to get a result of order `(β Δt)³`
/// and would lose up to ten significant digits at `β Δt = 1e-3`. At 0.5 the series
/// terms fall as `1/k!` and at most 25 terms reach machine precision.
const SERIES_BELOW: f64 = 0.5;
const SERIES_TERMS: usize = 25;
/// The series stops once a term is below this fraction of the sum (below the rounding
/// unit, so stopping changes nothing).
const SERIES_REL_STOP: f64 = 1e-17;

/// Parameters of the velocity Ornstein–Uhlenbeck process, on the natural scale.
///
/// `beta` (s⁻¹) is the rate at which velocity autocorrelation decays (`1/β` is the
/// persistence time); `sigma` (m s^-3/2) scales the velocity's random forcing. The
/// stationary velocity variance per axis is `σ² / (2β)`.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct ProcessParams {
    beta: f64,
    sigma: f64,
}

impl ProcessParams {
    /// Checked constructor.
    ///
    /// # Errors
    /// [`RegularError::InvalidParameter`] when either value is not finite and positive.
    ///
    /// # Examples
    /// ```
    /// use cairn::tracks::regular::ProcessParams;
    /// let p = ProcessParams::new(1.0 / 3600.0, 0.01).unwrap();
    /// assert!((p.stationary_velocity_variance() - 0.18).abs() < 1e-12);
    /// ```
    pub fn new(beta: f64, sigma: f64) -> Result<Self, RegularError> {
        for (name, value) in [("beta", beta), ("sigma", sigma)] {
            if !(value.is_finite() && value > 0.0) {
                return Err(RegularError::InvalidParameter { name, value });
            }
        }
        Ok(Self { beta, sigma })
    }

    /// Velocity autocorrelation rate β (s⁻¹).
    pub fn beta(&self) -> f64 {
        self.beta
    }

    /// Velocity variability σ (m s^-3/2).
    pub fn sigma(&self) -> f64 {
        self.sigma
    }

    /// Stationary variance of the velocity on one axis, `σ² / (2β)` (m² s⁻²).
    pub fn stationary_velocity_variance(&self) -> f64 {
        self.sigma * self.sigma / (2.0 * self.beta)
    }
}

/// One axis's exact transition over a time step: state `(μ, v)` at `t + Δt` is
/// `transition · (μ, v)(t)` plus a zero-mean Gaussian with covariance `covariance`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct AxisStep {
    /// 2 × 2 transition matrix.
    pub transition: Matrix2<f64>,
    /// 2 × 2 process-noise covariance.
    pub covariance: Matrix2<f64>,
}

/// `x − 2(1 − e^{−x}) + (1 − e^{−2x})/2`, accurate for every `x ≥ 0`; `a = 1 − e^{−x}`
/// and `b = 1 − e^{−2x}` are passed in because the caller has them already.
fn position_variance_kernel(x: f64, a: f64, b: f64) -> f64 {
    if x < SERIES_BELOW {
        // Series Σ_{k≥3} (−1)^k (2 − 2^{k−1}) x^k / k!.
        let mut sum = 0.0;
        let mut xk_over_fact = x * x / 2.0; // x^2 / 2!
        let mut pow2 = 2.0; // 2^{k-1} for k = 2
        for k in 3..(3 + SERIES_TERMS) {
            xk_over_fact *= x / k as f64;
            pow2 *= 2.0;
            let sign = if k % 2 == 0 { 1.0 } else { -1.0 };
            let term = sign * (2.0 - pow2) * xk_over_fact;
            sum += term;
            if term.abs() < SERIES_REL_STOP * sum.abs() {
                break;
            }
        }
        sum
    } else {
        x - 2.0 * a + 0.5 * b
    }
}

/// Exact transition and process covariance of one axis over `dt ≥ 0` seconds.
///
/// # Formula
/// With `x = β Δt` (Johnson et al. 2008, Ecology 89:1208–1215, eqs. for the integrated
/// Ornstein–Uhlenbeck velocity with zero drift):
///
/// ```text
/// T = [[1, (1 − e^{−x})/β], [0, e^{−x}]]
/// Var v  = σ²/(2β) (1 − e^{−2x})
/// Var μ  = σ²/β³ (x − 2(1 − e^{−x}) + (1 − e^{−2x})/2)
/// Cov μv = σ²/(2β²) (1 − e^{−x})²
/// ```
///
/// # Examples
/// ```
/// use cairn::tracks::regular::{ProcessParams, axis_step};
/// let p = ProcessParams::new(1e-4, 0.01).unwrap();
/// let s = axis_step(&p, 0.0);
/// assert_eq!(s.covariance.norm(), 0.0);
/// ```
pub fn axis_step(params: &ProcessParams, dt: f64) -> AxisStep {
    let (beta, sigma) = (params.beta, params.sigma);
    let x = beta * dt;
    let a = -(-x).exp_m1(); // 1 − e^{−x}, accurate for small x
    let b = a * (2.0 - a); // 1 − e^{−2x} = (1 − e^{−x})(1 + e^{−x}), as accurate as a
    let s2 = sigma * sigma;
    let var_v = s2 / (2.0 * beta) * b;
    let var_mu = s2 / (beta * beta * beta) * position_variance_kernel(x, a, b);
    let cov = s2 / (2.0 * beta * beta) * a * a;
    AxisStep {
        transition: Matrix2::new(1.0, a / beta, 0.0, 1.0 - a),
        covariance: Matrix2::new(var_mu, cov, cov, var_v),
    }
}

/// `1 − e^{−βΔt}`, `e^{−βΔt}` and the axis covariance (var μ, cov μv, var v), the
/// minimum the filter's hand-unrolled prediction needs.
#[inline]
pub(crate) fn step_terms(params: &ProcessParams, dt: f64) -> (f64, f64, [f64; 3]) {
    let s = axis_step(params, dt);
    (
        s.transition[(0, 1)],
        s.transition[(1, 1)],
        [
            s.covariance[(0, 0)],
            s.covariance[(0, 1)],
            s.covariance[(1, 1)],
        ],
    )
}
