//! The inverse geodesic problem on WGS84 for the steps of a track: length and the
//! azimuths at both ends, fast for the short lines that steps almost always are.
//!
//! Lines whose chord is at most [`SHORT_CHORD_M`] long, between points no closer than
//! 0.1° to a pole, are solved in closed form from the chord; everything else goes to
//! Karney's algorithm (`geographiclib-rs`). Over that range the closed form agrees with
//! Karney's solution to better than 10 µm in length, and its azimuths point to within
//! 2 µm of the far end (error in radians × length: up to ~1e-5° on centimetre
//! lines, where Earth-centred coordinates round at the nanometre, ~1e-9° beyond a km).
//! `tests/geodesic.rs` checks this against geographiclib on random lines at every
//! latitude and azimuth. That is far inside any telemetry error, and it is several times
//! faster: a track's steps are dominated by this computation.
//!
//! # Formula
//! Each point goes to Earth-centred Cartesian coordinates P = (N cos φ cos λ,
//! N cos φ sin λ, N(1 − e²) sin φ), N = a/√(1 − e² sin² φ), with its local east and north
//! unit vectors. The chord d = P₂ − P₁ lies in the normal section through P₁ and P₂, so
//! its components along P₁'s east and north vectors give that section's azimuth at P₁
//! exactly; likewise −d at P₂ gives the reverse section's azimuth there, whose opposite is
//! the arrival azimuth. The geodesic is turned from these sections by
//! δ = e′² (s/N)² cos² φ sin 2α / 12 at both ends (the classical normal-section–geodesic
//! relation, e.g. Bomford, *Geodesy*, 4th ed., 1980, ch. 2 — quoted from memory; the
//! sign and size were confirmed against geographiclib, which they match to ~1e-11 rad),
//! up to 3e-7° at 20 km, and is subtracted. The length is the arc of a circle of the section's radius of curvature,
//! s = 2R asin(c/2R), with 1/R = cos² α/M + sin² α/N at the mid-latitude and mid-azimuth
//! (Euler's theorem; M and N the meridian and prime-vertical radii). The residual from the
//! curvature varying along the line is of order e² c³/R² · c/R, below a micrometre here.

use geographiclib_rs::{Geodesic, InverseGeodesic};

use super::laea::{WGS84_A, WGS84_E2};

/// Longest chord (metres) solved in closed form; longer lines use Karney's algorithm.
pub const SHORT_CHORD_M: f64 = 20_000.0;

/// Points closer than this to a pole (degrees of latitude) use Karney's algorithm: the
/// local east direction is undefined at the pole itself.
const POLAR_LIMIT_DEG: f64 = 89.9;

/// A point prepared for the closed-form solution: Earth-centred coordinates (m) and its
/// local east and north unit vectors. Made once per fix and shared by its two steps.
#[derive(Debug, Clone, Copy)]
pub struct Site {
    lat: f64,
    lon: f64,
    p: [f64; 3],
    east: [f64; 3],
    north: [f64; 3],
}

impl Site {
    /// Prepares (`lon`, `lat`) in degrees.
    pub fn new(lon: f64, lat: f64) -> Site {
        let (sp, cp) = lat.to_radians().sin_cos();
        let (sl, cl) = lon.to_radians().sin_cos();
        let n = WGS84_A / (1.0 - WGS84_E2 * sp * sp).sqrt();
        Site {
            lat,
            lon,
            p: [n * cp * cl, n * cp * sl, n * (1.0 - WGS84_E2) * sp],
            east: [-sl, cl, 0.0],
            north: [-sp * cl, -sp * sl, cp],
        }
    }
}

fn dot(a: [f64; 3], b: [f64; 3]) -> f64 {
    a[0] * b[0] + a[1] * b[1] + a[2] * b[2]
}

/// Length (m), departure and arrival azimuths (degrees, as Karney's algorithm gives them:
/// (−180, 180]) of the geodesic from `a` to `b`. Coincident points give length 0.
pub fn inverse_sites(g: &Geodesic, a: &Site, b: &Site) -> (f64, f64, f64) {
    match short_line(a, b) {
        Some(r) => r,
        None => {
            let (s12, azi1, azi2, _a12): (f64, f64, f64, f64) =
                g.inverse(a.lat, a.lon, b.lat, b.lon);
            (s12, azi1, azi2)
        }
    }
}

/// The closed-form solution, or `None` when the line is too long or too near a pole.
fn short_line(a: &Site, b: &Site) -> Option<(f64, f64, f64)> {
    if a.lat.abs() > POLAR_LIMIT_DEG || b.lat.abs() > POLAR_LIMIT_DEG {
        return None;
    }
    let d = [b.p[0] - a.p[0], b.p[1] - a.p[1], b.p[2] - a.p[2]];
    let c = dot(d, d).sqrt();
    if c.is_nan() || c > SHORT_CHORD_M {
        return None;
    }
    if c == 0.0 {
        return Some((0.0, 0.0, 0.0));
    }
    let az1 = dot(d, a.east).atan2(dot(d, a.north));
    // the reverse section leaves b along −d; the arrival direction is its opposite
    let az2 = dot(d, b.east).atan2(dot(d, b.north));
    // section radius at the mid-latitude and mid-azimuth (the two azimuths differ by the
    // convergence of the meridians, a fraction of a degree here)
    let half =
        (az2 - az1 + std::f64::consts::PI).rem_euclid(std::f64::consts::TAU) - std::f64::consts::PI;
    let am = az1 + 0.5 * half;
    let sm = (0.5 * (a.lat + b.lat)).to_radians().sin();
    let w2 = 1.0 - WGS84_E2 * sm * sm;
    let inv_n = w2.sqrt() / WGS84_A;
    let inv_m = inv_n * w2 / (1.0 - WGS84_E2);
    let (sa, ca) = am.sin_cos();
    let r = 1.0 / (ca * ca * inv_m + sa * sa * inv_n);
    let s = 2.0 * r * (c / (2.0 * r)).asin();
    // the geodesic leaves and arrives turned from the normal sections by
    // e′² (s/N)² cos² φ sin 2α / 12 (same sign at both ends)
    let cn = c * inv_n;
    let turn = WGS84_E2 / (1.0 - WGS84_E2) * cn * cn * (1.0 - sm * sm) * 2.0 * sa * ca / 12.0;
    Some((s, (az1 - turn).to_degrees(), (az2 - turn).to_degrees()))
}

/// Geodesic length (m) and departure/arrival azimuths (degrees) from point 1 to point 2
/// on WGS84, given as degrees ([`inverse_sites`] for one line).
///
/// # Examples
/// ```
/// // One degree of longitude along the equator: a·π/180 with a = 6 378 137 m.
/// let (s, a1, a2) = cairn::geo::geodesic::inverse(0.0, 0.0, 1.0, 0.0);
/// assert!((s - 111_319.490_793).abs() < 1e-5);
/// assert!((a1 - 90.0).abs() < 1e-12 && (a2 - 90.0).abs() < 1e-12);
/// ```
pub fn inverse(lon1: f64, lat1: f64, lon2: f64, lat2: f64) -> (f64, f64, f64) {
    inverse_sites(
        &Geodesic::wgs84(),
        &Site::new(lon1, lat1),
        &Site::new(lon2, lat2),
    )
}
