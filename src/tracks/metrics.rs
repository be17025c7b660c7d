//! Movement metrics: segments, step lengths, bearings and turning angles.
//!
//! A track is split into **segments** wherever two consecutive fixes are more than the
//! study's gap threshold apart; nothing is computed across a gap. Within a segment, row
//! `k` of the step table is the step from fix `k` to fix `k + 1`: it carries the start
//! fix's time and position, the step's geodesic length and bearing, and the turning angle
//! at fix `k`. A segment of `n` fixes gives `n − 1` steps; the first step of each segment
//! has no turning angle (missing, never zero).
//!
//! # Formula
//! Step length and azimuths solve the inverse geodesic problem on the WGS84 ellipsoid
//! (Karney 2013, *Algorithms for geodesics*, J. Geodesy 87:43–55) via `geographiclib-rs`.
//! The **bearing** of a step is its departure azimuth α₁ (degrees clockwise from north,
//! in [0, 360)). The **turning angle** at the fix shared by steps k−1 and k is
//!
//! ```text
//! turn_k = wrap( α₂(k−1) − α₁(k) )   in radians, wrapped to (−π, π]
//! ```
//!
//! i.e. the departure heading of the next step minus the arrival heading of the previous
//! step, with headings measured counter-clockwise: **positive for a left
//! (counter-clockwise) turn**, negative for a right turn, ±π for a reversal. Using the
//! arrival azimuth of the previous step (not its departure azimuth) keeps straight
//! geodesic travel at zero turn even on long steps at high latitude. A step of length zero
//! has no direction: its bearing and the turning angles on both sides of it are missing.

use geographiclib_rs::{Geodesic, InverseGeodesic};
use rayon::prelude::*;

use super::class::LocClass;
use super::clean::Track;

/// Steps in columnar form; one row per step.
#[derive(Debug, Clone, Default)]
pub struct Steps {
    /// Animal ids, one per track (indexed by [`Steps::animal`]).
    pub animals: Vec<String>,
    /// Track index per row.
    pub animal: Vec<u32>,
    /// Segment number within the animal, from 1.
    pub segment: Vec<u32>,
    /// Start time, UTC microseconds.
    pub time_us: Vec<i64>,
    /// Start longitude, degrees.
    pub lon: Vec<f64>,
    /// Start latitude, degrees.
    pub lat: Vec<f64>,
    /// Geodesic step length, metres.
    pub step_m: Vec<f64>,
    /// Departure azimuth, degrees clockwise from north in [0, 360) (NaN for a zero step).
    pub bearing_deg: Vec<f64>,
    /// Turning angle at the start fix, radians in (−π, π] (NaN when undefined).
    pub turn_rad: Vec<f64>,
    /// Duration of the step, seconds.
    pub dt_s: Vec<f64>,
    /// Location class of the start fix (`None` for a smoothed location).
    pub class: Vec<Option<LocClass>>,
    /// Location error (1-σ ellipse semi-major axis, m) of a smoothed start location; NaN
    /// for an observed fix.
    pub se_m: Vec<f64>,
}

impl Steps {
    /// Number of steps.
    pub fn len(&self) -> usize {
        self.time_us.len()
    }
    /// Whether there are no steps.
    pub fn is_empty(&self) -> bool {
        self.time_us.is_empty()
    }
}

/// Wraps an angle in degrees to (−180, 180].
pub fn wrap_deg(x: f64) -> f64 {
    let w = x - 360.0 * ((x + 180.0) / 360.0).floor();
    if w == -180.0 { 180.0 } else { w }
}

/// Geodesic length (m) and departure/arrival azimuths (degrees) from 1 to 2 on WGS84.
///
/// # Examples
/// ```
/// // One degree of longitude along the equator: a·π/180 with a = 6 378 137 m.
/// let (s, a1, a2) = cairn::tracks::metrics::inverse(0.0, 0.0, 1.0, 0.0);
/// assert!((s - 111_319.490_793).abs() < 1e-5);
/// assert!((a1 - 90.0).abs() < 1e-12 && (a2 - 90.0).abs() < 1e-12);
/// ```
pub fn inverse(lon1: f64, lat1: f64, lon2: f64, lat2: f64) -> (f64, f64, f64) {
    let g = Geodesic::wgs84();
    let (s12, azi1, azi2, _a12): (f64, f64, f64, f64) = g.inverse(lat1, lon1, lat2, lon2);
    (s12, azi1, azi2)
}

/// Turning angle (radians, (−π, π], positive left) between a step arriving with azimuth
/// `arrive_deg` and the next step departing with azimuth `depart_deg`.
///
/// # Examples
/// ```
/// use cairn::tracks::metrics::turning_angle;
/// use std::f64::consts::FRAC_PI_2;
/// // Heading north, then west: a left turn of +90°.
/// assert!((turning_angle(0.0, 270.0) - FRAC_PI_2).abs() < 1e-12);
/// ```
pub fn turning_angle(arrive_deg: f64, depart_deg: f64) -> f64 {
    wrap_deg(arrive_deg - depart_deg).to_radians()
}

/// A located instant on a path: a cleaned fix or a smoothed grid point.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PathPoint {
    /// UTC microseconds.
    pub time_us: i64,
    /// Longitude, degrees.
    pub lon: f64,
    /// Latitude, degrees.
    pub lat: f64,
    /// Location class of an observed fix; `None` for a smoothed location.
    pub class: Option<LocClass>,
    /// Semi-major axis of the 1-σ location error ellipse of a smoothed location, metres
    /// (NaN for an observed fix).
    pub se_m: f64,
}

/// One animal's path, already split into segments.
#[derive(Debug, Clone)]
pub struct Path {
    /// Animal id.
    pub animal: String,
    /// Segments in time order; each in time order.
    pub segments: Vec<Vec<PathPoint>>,
}

impl Path {
    /// The path of a cleaned track, split at gaps longer than `gap_s`.
    pub fn from_track(track: &Track, gap_s: f64) -> Path {
        let segments = segments(track, gap_s)
            .into_iter()
            .map(|(a, b)| {
                track.fixes[a..b]
                    .iter()
                    .map(|f| PathPoint {
                        time_us: f.time_us,
                        lon: f.lon,
                        lat: f.lat,
                        class: Some(f.class),
                        se_m: f64::NAN,
                    })
                    .collect()
            })
            .collect();
        Path {
            animal: track.animal.clone(),
            segments,
        }
    }
}

/// Computes the step table for cleaned tracks, split at gaps longer than `gap_s`.
pub fn steps(tracks: &[Track], gap_s: f64) -> Steps {
    let paths: Vec<Path> = tracks.iter().map(|t| Path::from_track(t, gap_s)).collect();
    steps_of_paths(&paths)
}

/// Computes the step table of paths (parallel over paths; the result does not depend on
/// the thread count).
pub fn steps_of_paths(paths: &[Path]) -> Steps {
    let parts: Vec<Steps> = paths
        .par_iter()
        .enumerate()
        .map(|(i, p)| path_steps(i as u32, p))
        .collect();
    let total: usize = parts.iter().map(Steps::len).sum();
    let mut out = Steps {
        animals: paths.iter().map(|p| p.animal.clone()).collect(),
        ..Steps::default()
    };
    macro_rules! reserve_extend {
        ($($f:ident),*) => {
            $( out.$f.reserve(total); )*
            for p in parts {
                $( out.$f.extend(p.$f); )*
            }
        };
    }
    reserve_extend!(
        animal,
        segment,
        time_us,
        lon,
        lat,
        step_m,
        bearing_deg,
        turn_rad,
        dt_s,
        class,
        se_m
    );
    out
}

/// Segment boundaries of a track: `(start, end)` index ranges (end exclusive) of runs of
/// fixes with no interval above `gap_s`.
pub fn segments(track: &Track, gap_s: f64) -> Vec<(usize, usize)> {
    let f = &track.fixes;
    let mut out = Vec::new();
    let mut start = 0;
    for k in 1..=f.len() {
        let split = k == f.len() || (f[k].time_us - f[k - 1].time_us) as f64 * 1e-6 > gap_s;
        if split {
            out.push((start, k));
            start = k;
        }
    }
    out
}

fn path_steps(animal: u32, path: &Path) -> Steps {
    let mut s = Steps::default();
    for (seg_no, seg) in path.segments.iter().enumerate() {
        let mut prev_arrive: Option<f64> = None;
        for w in seg.windows(2) {
            let (p, q) = (&w[0], &w[1]);
            let (len, azi1, azi2) = inverse(p.lon, p.lat, q.lon, q.lat);
            let moved = len > 0.0;
            let turn = match (prev_arrive, moved) {
                (Some(arr), true) => turning_angle(arr, azi1),
                _ => f64::NAN,
            };
            s.animal.push(animal);
            s.segment.push(seg_no as u32 + 1);
            s.time_us.push(p.time_us);
            s.lon.push(p.lon);
            s.lat.push(p.lat);
            s.step_m.push(len);
            s.bearing_deg.push(if moved {
                azi1.rem_euclid(360.0)
            } else {
                f64::NAN
            });
            s.turn_rad.push(turn);
            s.dt_s.push((q.time_us - p.time_us) as f64 * 1e-6);
            s.class.push(p.class);
            s.se_m.push(p.se_m);
            prev_arrive = moved.then_some(azi2);
        }
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn wrap_is_half_open() {
        assert_eq!(wrap_deg(180.0), 180.0);
        assert_eq!(wrap_deg(-180.0), 180.0);
        assert_eq!(wrap_deg(190.0), -170.0);
        assert_eq!(wrap_deg(-190.0), 170.0);
        assert_eq!(wrap_deg(720.0), 0.0);
    }
}
