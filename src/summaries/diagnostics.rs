//! Data for residual diagnostics: normal quantile–quantile pairs and the sample
//! autocorrelation function of pseudo-residuals, per data stream.
//!
//! Under a correct model the (ordinary normal) pseudo-residuals of each stream are
//! independent standard normal; the QQ data compare their order statistics with
//! normal quantiles, and the ACF shows remaining serial dependence. Residuals that
//! are missing (NaN, e.g. a missing step length) are dropped from the QQ data and
//! counted; in the ACF they follow the "conservative" rule: the mean and variance use
//! the observed values, and lagged products with a missing member are left out, so
//! gaps neither shift lags nor invent values. Series of several animals are passed as
//! separate segments so that no lag spans two animals.
//!
//! # Formula
//! Inverse normal CDF: Wichura, M. J. (1988), "Algorithm AS 241: The percentage
//! points of the normal distribution", *Applied Statistics* 37(3): 477–484 (PPND16,
//! relative accuracy about 1e-16). Plotting positions (i − 3/8)/(n + 1/4): Blom, G.
//! (1958), *Statistical Estimates and Transformed Beta-Variables*, Wiley. Sample
//! ACF r_k = Σ_t (x_t − x̄)(x_{t+k} − x̄) / Σ_t (x_t − x̄)²: Box, Jenkins & Reinsel
//! (2008), *Time Series Analysis*, 4th ed., §2.1.5.

use super::SummaryError;
use serde::Serialize;

/// Quantile function of the standard normal distribution (AS 241, PPND16).
///
/// Returns −∞ at 0, +∞ at 1 and NaN outside [0, 1].
///
/// # Formula
/// Rational approximations in three regions of p (Wichura 1988): |p − ½| ≤ 0.425;
/// r = √(−ln min(p, 1−p)) ≤ 5; r > 5.
///
/// # Examples
/// ```
/// use cairn::summaries::diagnostics::inverse_normal_cdf;
/// assert!((inverse_normal_cdf(0.975) - 1.959963984540054).abs() < 1e-14);
/// ```
pub fn inverse_normal_cdf(p: f64) -> f64 {
    if !(0.0..=1.0).contains(&p) {
        return f64::NAN;
    }
    if p == 0.0 {
        return f64::NEG_INFINITY;
    }
    if p == 1.0 {
        return f64::INFINITY;
    }
    let q = p - 0.5;
    if q.abs() <= 0.425 {
        let r = 0.180625 - q * q;
        return q * horner(&AS241_A, r) / horner(&AS241_B, r);
    }
    let r = (-(if q < 0.0 { p } else { 1.0 - p }).ln()).sqrt();
    let value = if r <= 5.0 {
        let r = r - 1.6;
        horner(&AS241_C, r) / horner(&AS241_D, r)
    } else {
        let r = r - 5.0;
        horner(&AS241_E, r) / horner(&AS241_F, r)
    };
    if q < 0.0 { -value } else { value }
}

/// Polynomial with coefficients in increasing powers, by Horner's rule.
fn horner(c: &[f64; 8], x: f64) -> f64 {
    c.iter().rev().fold(0.0, |acc, &k| acc * x + k)
}

// AS 241 (PPND16) coefficients, in increasing powers, with the digits as published
// (Wichura 1988, Table); the compiler rounds each to the nearest f64.
#[allow(clippy::excessive_precision)]
const AS241_A: [f64; 8] = [
    3.3871328727963666080e0,
    1.3314166789178437745e2,
    1.9715909503065514427e3,
    1.3731693765509461125e4,
    4.5921953931549871457e4,
    6.7265770927008700853e4,
    3.3430575583588128105e4,
    2.5090809287301226727e3,
];
#[allow(clippy::excessive_precision)]
const AS241_B: [f64; 8] = [
    1.0,
    4.2313330701600911252e1,
    6.8718700749205790830e2,
    5.3941960214247511077e3,
    2.1213794301586595867e4,
    3.9307895800092710610e4,
    2.8729085735721942674e4,
    5.2264952788528545610e3,
];
#[allow(clippy::excessive_precision)]
const AS241_C: [f64; 8] = [
    1.42343711074968357734e0,
    4.63033784615654529590e0,
    5.76949722146069140550e0,
    3.64784832476320460504e0,
    1.27045825245236838258e0,
    2.41780725177450611770e-1,
    2.27238449892691845833e-2,
    7.74545014278341407640e-4,
];
#[allow(clippy::excessive_precision)]
const AS241_D: [f64; 8] = [
    1.0,
    2.05319162663775882187e0,
    1.67638483018380384940e0,
    6.89767334985100004550e-1,
    1.48103976427480074590e-1,
    1.51986665636164571966e-2,
    5.47593808499534494600e-4,
    1.05075007164441684324e-9,
];
#[allow(clippy::excessive_precision)]
const AS241_E: [f64; 8] = [
    6.65790464350110377720e0,
    5.46378491116411436990e0,
    1.78482653991729133580e0,
    2.96560571828504891230e-1,
    2.65321895265761230930e-2,
    1.24266094738807843860e-3,
    2.71155556874348757815e-5,
    2.01033439929228813265e-7,
];
#[allow(clippy::excessive_precision)]
const AS241_F: [f64; 8] = [
    1.0,
    5.99832206555887937690e-1,
    1.36929880922735805310e-1,
    1.48753612908506148525e-2,
    7.86869131145613259100e-4,
    1.84631831751005468180e-5,
    1.42151175831644588870e-7,
    2.04426310338993978564e-15,
];

/// Normal QQ data for one stream.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct QqData {
    /// Theoretical standard normal quantiles at the Blom plotting positions.
    pub theoretical: Vec<f64>,
    /// Sorted observed residuals.
    pub sample: Vec<f64>,
    /// Residuals left out because they were not finite.
    pub dropped: usize,
}

/// Normal QQ pairs of the finite residuals.
///
/// # Errors
/// [`SummaryError::Empty`] when no residual is finite.
///
/// # Formula
/// Theoretical quantile of the i-th smallest of n: Φ⁻¹((i − 3/8)/(n + 1/4)) (Blom 1958).
pub fn normal_qq(residuals: &[f64]) -> Result<QqData, SummaryError> {
    let mut sample: Vec<f64> = residuals
        .iter()
        .copied()
        .filter(|x| x.is_finite())
        .collect();
    if sample.is_empty() {
        return Err(SummaryError::Empty("no finite pseudo-residuals"));
    }
    sample.sort_by(f64::total_cmp);
    let n = sample.len() as f64;
    let theoretical = (1..=sample.len())
        .map(|i| inverse_normal_cdf((i as f64 - 0.375) / (n + 0.25)))
        .collect();
    Ok(QqData {
        theoretical,
        dropped: residuals.len() - sample.len(),
        sample,
    })
}

/// Sample autocorrelation at lags 0..=max_lag of a series made of independent
/// segments (e.g. one per animal); NaN marks a missing value.
///
/// # Errors
/// [`SummaryError::Empty`] when no value is finite or the variance is zero;
/// [`SummaryError::Option`] when `max_lag` is not below the longest segment.
///
/// # Formula
/// With x̄ the mean of all finite values and y_t = x_t − x̄ (0 where missing):
/// r_k = Σ_segments Σ_t y_t y_{t+k} / Σ_segments Σ_t y_t² (Box, Jenkins & Reinsel 2008).
///
/// # Examples
/// ```
/// use cairn::summaries::diagnostics::acf;
/// let r = acf(&[&[1.0, -1.0, 1.0, -1.0]], 1).unwrap();
/// assert_eq!(r[0], 1.0);
/// assert!((r[1] + 0.75).abs() < 1e-12);
/// ```
pub fn acf(segments: &[&[f64]], max_lag: usize) -> Result<Vec<f64>, SummaryError> {
    let longest = segments.iter().map(|s| s.len()).max().unwrap_or(0);
    if max_lag >= longest {
        return Err(SummaryError::option(
            "max_lag",
            format!("{max_lag} but the longest series has {longest} values; use a smaller lag"),
        ));
    }
    let (sum, count) = segments
        .iter()
        .flat_map(|s| s.iter())
        .filter(|x| x.is_finite())
        .fold((0.0, 0usize), |(s, c), &x| (s + x, c + 1));
    if count == 0 {
        return Err(SummaryError::Empty("no finite pseudo-residuals"));
    }
    let mean = sum / count as f64;
    let mut acov = vec![0.0; max_lag + 1];
    for seg in segments {
        let y: Vec<f64> = seg
            .iter()
            .map(|&x| if x.is_finite() { x - mean } else { 0.0 })
            .collect();
        for (k, a) in acov.iter_mut().enumerate() {
            if k >= y.len() {
                break;
            }
            *a += y[k..]
                .iter()
                .zip(&y[..y.len() - k])
                .map(|(a, b)| a * b)
                .sum::<f64>();
        }
    }
    if acov[0] <= 0.0 {
        return Err(SummaryError::Empty("pseudo-residuals have zero variance"));
    }
    let c0 = acov[0];
    Ok(acov.into_iter().map(|a| a / c0).collect())
}

/// QQ data and ACF of one data stream.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StreamDiagnostics {
    /// Stream name (e.g. "step", "angle").
    pub stream: String,
    /// Normal QQ data.
    pub qq: QqData,
    /// Autocorrelation at lags 0..=max_lag.
    pub acf: Vec<f64>,
    /// Finite residuals used.
    pub n: usize,
}

/// QQ data and ACF for a stream given as per-animal segments of pseudo-residuals.
///
/// # Errors
/// As [`normal_qq`] and [`acf`].
pub fn stream_diagnostics(
    stream: &str,
    segments: &[&[f64]],
    max_lag: usize,
) -> Result<StreamDiagnostics, SummaryError> {
    let all: Vec<f64> = segments.iter().flat_map(|s| s.iter().copied()).collect();
    let qq = normal_qq(&all)?;
    let acf = acf(segments, max_lag)?;
    Ok(StreamDiagnostics {
        stream: stream.to_string(),
        n: qq.sample.len(),
        qq,
        acf,
    })
}
