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
//! ([`crate::geo::geodesic`]): Karney 2013, *Algorithms for geodesics*, J. Geodesy
//! 87:43–55, via `geographiclib-rs`, with lines of chord ≤ 20 km away from the poles
//! solved in closed form from the chord, which agrees with Karney's to 10 µm.
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

use geographiclib_rs::Geodesic;
use rayon::prelude::*;

use crate::geo::geodesic::{Site, inverse_sites};

use super::class::LocClass;
use super::clean::Track;
use super::ingest::Fix;

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

pub use crate::geo::geodesic::inverse;

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
///
/// Works on the tracks' fixes directly (no copy of the positions); the result is the same
/// as [`steps_of_paths`] over [`Path::from_track`] of every track.
pub fn steps(tracks: &[Track], gap_s: f64) -> Steps {
    let segs: Vec<Vec<(usize, usize)>> = tracks.par_iter().map(|t| segments(t, gap_s)).collect();
    let counts: Vec<usize> = segs
        .iter()
        .map(|s| s.iter().map(|&(a, b)| (b - a).saturating_sub(1)).sum())
        .collect();
    let animals = tracks.iter().map(|t| t.animal.clone()).collect();
    fill_steps(animals, &counts, |i, out| {
        let f = &tracks[i].fixes;
        path_steps(i as u32, segs[i].iter().map(|&(a, b)| &f[a..b]), out);
    })
}

/// Computes the step table of paths (parallel over paths; the result does not depend on
/// the thread count).
pub fn steps_of_paths(paths: &[Path]) -> Steps {
    let counts: Vec<usize> = paths
        .iter()
        .map(|p| p.segments.iter().map(|s| s.len().saturating_sub(1)).sum())
        .collect();
    let animals = paths.iter().map(|p| p.animal.clone()).collect();
    fill_steps(animals, &counts, |i, out| {
        path_steps(i as u32, paths[i].segments.iter().map(Vec::as_slice), out);
    })
}

/// Allocates the step table once at its final size (`counts[i]` rows for path `i`) and
/// lets `fill(i, rows)` write path `i`'s rows, in parallel over paths.
fn fill_steps(
    animals: Vec<String>,
    counts: &[usize],
    fill: impl Fn(usize, StepsMut<'_>) + Sync,
) -> Steps {
    let total: usize = counts.iter().sum();
    let mut out = Steps {
        animals,
        animal: vec![0; total],
        segment: vec![0; total],
        time_us: vec![0; total],
        lon: vec![0.0; total],
        lat: vec![0.0; total],
        step_m: vec![0.0; total],
        bearing_deg: vec![0.0; total],
        turn_rad: vec![0.0; total],
        dt_s: vec![0.0; total],
        class: vec![None; total],
        se_m: vec![0.0; total],
    };
    let mut parts = Vec::with_capacity(counts.len());
    let mut rest = StepsMut::of(&mut out);
    for &n in counts {
        let (head, tail) = rest.split_at(n);
        parts.push(head);
        rest = tail;
    }
    parts
        .into_par_iter()
        .enumerate()
        .for_each(|(i, rows)| fill(i, rows));
    out
}

/// Mutable views of the same rows of every column of a [`Steps`].
struct StepsMut<'a> {
    animal: &'a mut [u32],
    segment: &'a mut [u32],
    time_us: &'a mut [i64],
    lon: &'a mut [f64],
    lat: &'a mut [f64],
    step_m: &'a mut [f64],
    bearing_deg: &'a mut [f64],
    turn_rad: &'a mut [f64],
    dt_s: &'a mut [f64],
    class: &'a mut [Option<LocClass>],
    se_m: &'a mut [f64],
}

macro_rules! steps_columns {
    ($m:ident) => {
        $m!(
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
        )
    };
}

impl<'a> StepsMut<'a> {
    fn of(s: &'a mut Steps) -> StepsMut<'a> {
        macro_rules! all {
            ($($f:ident),*) => { StepsMut { $( $f: &mut s.$f[..], )* } };
        }
        steps_columns!(all)
    }

    /// Rows `..n` and rows `n..`.
    fn split_at(self, n: usize) -> (StepsMut<'a>, StepsMut<'a>) {
        macro_rules! split {
            ($($f:ident),*) => {{
                $( let $f = self.$f.split_at_mut(n); )*
                (StepsMut { $( $f: $f.0, )* }, StepsMut { $( $f: $f.1, )* })
            }};
        }
        steps_columns!(split)
    }
}

/// A point a step can start or end at.
trait Located {
    fn time_us(&self) -> i64;
    fn lon(&self) -> f64;
    fn lat(&self) -> f64;
    fn class(&self) -> Option<LocClass>;
    fn se_m(&self) -> f64;
}

impl Located for PathPoint {
    fn time_us(&self) -> i64 {
        self.time_us
    }
    fn lon(&self) -> f64 {
        self.lon
    }
    fn lat(&self) -> f64 {
        self.lat
    }
    fn class(&self) -> Option<LocClass> {
        self.class
    }
    fn se_m(&self) -> f64 {
        self.se_m
    }
}

impl Located for Fix {
    fn time_us(&self) -> i64 {
        self.time_us
    }
    fn lon(&self) -> f64 {
        self.lon
    }
    fn lat(&self) -> f64 {
        self.lat
    }
    fn class(&self) -> Option<LocClass> {
        Some(self.class)
    }
    fn se_m(&self) -> f64 {
        f64::NAN
    }
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

/// Writes the steps of one path's segments into `out`, which has exactly as many rows.
/// One inverse geodesic per step gives its length and both azimuths; each fix is
/// prepared once ([`Site`]) for the two steps that share it.
fn path_steps<'p, P: Located + 'p>(
    animal: u32,
    segments: impl Iterator<Item = &'p [P]>,
    out: StepsMut<'_>,
) {
    let g = Geodesic::wgs84();
    let mut r = 0usize;
    for (seg_no, seg) in segments.enumerate() {
        let mut prev_arrive: Option<f64> = None;
        let Some(first) = seg.first() else { continue };
        let mut sp = Site::new(first.lon(), first.lat());
        for w in seg.windows(2) {
            let (p, q) = (&w[0], &w[1]);
            let sq = Site::new(q.lon(), q.lat());
            let (len, azi1, azi2) = inverse_sites(&g, &sp, &sq);
            sp = sq;
            let moved = len > 0.0;
            let turn = match (prev_arrive, moved) {
                (Some(arr), true) => turning_angle(arr, azi1),
                _ => f64::NAN,
            };
            out.animal[r] = animal;
            out.segment[r] = seg_no as u32 + 1;
            out.time_us[r] = p.time_us();
            out.lon[r] = p.lon();
            out.lat[r] = p.lat();
            out.step_m[r] = len;
            out.bearing_deg[r] = if moved {
                azi1.rem_euclid(360.0)
            } else {
                f64::NAN
            };
            out.turn_rad[r] = turn;
            out.dt_s[r] = (q.time_us() - p.time_us()) as f64 * 1e-6;
            out.class[r] = p.class();
            out.se_m[r] = p.se_m();
            prev_arrive = moved.then_some(azi2);
            r += 1;
        }
    }
    debug_assert_eq!(r, out.animal.len());
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
