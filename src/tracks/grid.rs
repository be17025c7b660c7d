//! From cleaned tracks to smoothed paths on a regular time grid.
//!
//! The glue between [`super::clean`] and [`super::regular`]: each animal's fixes are
//! projected to metres with a Lambert azimuthal equal-area projection centred on that
//! animal's fixes (distances and areas are true near the centre, whatever the latitude),
//! given their observation error (the fix's own error ellipse when the data carry one,
//! otherwise its location class), smoothed, and the grid points are projected back to
//! longitude and latitude. An animal that cannot be smoothed is skipped with its reason;
//! the others go on.

use std::collections::BTreeMap;

use rayon::prelude::*;
use serde::Serialize;

use super::clean::Track;
use super::metrics::{Path, PathPoint};
use super::regular::{self, ErrorCovariance, ObservationError, RegularConfig, RegularTrack};
use crate::geo::proj::Projection;

/// The smoother's account of one animal, written to the prepare summary.
#[derive(Debug, Clone, Serialize)]
pub struct SmootherRecord {
    /// Animal id.
    pub animal: String,
    /// `fitted` or `skipped`.
    pub status: String,
    /// Why the animal was skipped.
    pub reason: Option<String>,
    /// Projection used, e.g. `LAEA centred at 17.3500, 69.4200`.
    pub projection: Option<String>,
    /// Velocity autocorrelation rate β (1/s).
    pub beta: Option<f64>,
    /// Velocity variability σ (m/s^1.5).
    pub sigma: Option<f64>,
    /// Estimated multiplier on every error standard deviation, when asked for.
    pub error_scale: Option<f64>,
    /// Log-likelihood at the estimate.
    pub log_likelihood: Option<f64>,
    /// Whether the optimiser converged (gradient small and the optimiser said so).
    pub converged: Option<bool>,
    /// Optimiser iterations.
    pub iterations: Option<u64>,
    /// Fixes used, by class code.
    pub fixes_by_class: BTreeMap<String, usize>,
    /// Fixes with their own error ellipse.
    pub fixes_with_ellipse: usize,
    /// Grid points predicted, and how many were flagged for a large standard error.
    pub grid_points: usize,
    pub large_se_points: usize,
    /// Fixes flagged as outliers by the innovation rule, and how many were dropped.
    pub outliers_flagged: usize,
    pub outliers_dropped: usize,
}

/// One smoothed grid point, as written to `track_smoothed.parquet`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SmoothedPoint {
    /// Index into the smoothed animals.
    pub animal: u32,
    /// Segment within the animal, from 1.
    pub segment: u32,
    /// UTC microseconds.
    pub time_us: i64,
    /// Smoothed position, degrees.
    pub lon: f64,
    pub lat: f64,
    /// Standard errors on the projected east and north axes (m) and their covariance (m²).
    pub sd_x: f64,
    pub sd_y: f64,
    pub cov_xy: f64,
    /// Semi-major axis of the 1-σ error ellipse (m).
    pub se_m: f64,
    /// Flagged: `se_m` above the study's threshold.
    pub large_se: bool,
}

/// Everything the smoothing stage produced.
#[derive(Debug, Clone)]
pub struct Smoothed {
    /// Paths of the animals that were smoothed (input order, skipped animals left out).
    pub paths: Vec<Path>,
    /// Grid points of those paths, with their errors.
    pub points: Vec<SmoothedPoint>,
    /// One record per input track, in input order.
    pub records: Vec<SmootherRecord>,
}

/// Semi-major axis of the ellipse of a 2 × 2 covariance: the square root of its larger
/// eigenvalue.
fn semi_major(xx: f64, xy: f64, yy: f64) -> f64 {
    let m = 0.5 * (xx + yy);
    let d = (0.25 * (xx - yy).powi(2) + xy * xy).sqrt();
    (m + d).max(0.0).sqrt()
}

fn skipped(animal: &str, reason: String, projection: Option<String>) -> SmootherRecord {
    SmootherRecord {
        animal: animal.to_string(),
        status: "skipped".into(),
        reason: Some(reason),
        projection,
        beta: None,
        sigma: None,
        error_scale: None,
        log_likelihood: None,
        converged: None,
        iterations: None,
        fixes_by_class: BTreeMap::new(),
        fixes_with_ellipse: 0,
        grid_points: 0,
        large_se_points: 0,
        outliers_flagged: 0,
        outliers_dropped: 0,
    }
}

/// Projects, smooths and back-projects one track.
fn smooth_track(
    track: &Track,
    config: &RegularConfig,
) -> Result<(Projection, RegularTrack), (String, Option<String>)> {
    if track.fixes.is_empty() {
        return Err(("no fixes".into(), None));
    }
    let lons: Vec<f64> = track.fixes.iter().map(|f| f.lon).collect();
    let lats: Vec<f64> = track.fixes.iter().map(|f| f.lat).collect();
    let proj = Projection::laea_for_points(&lons, &lats).map_err(|e| (e.to_string(), None))?;
    let label = Some(proj.to_string());
    let mut fixes = Vec::with_capacity(track.fixes.len());
    for f in &track.fixes {
        let (x, y) = proj
            .forward(f.lon, f.lat)
            .map_err(|e| (e.to_string(), label.clone()))?;
        let ellipse = track
            .ellipse(f)
            .filter(|e| e.semi_minor > 0.0)
            .and_then(|e| {
                ErrorCovariance::from_ellipse(e.semi_major, e.semi_minor, e.orientation).ok()
            });
        let error = match ellipse {
            Some(c) => ObservationError::Covariance(c),
            None if f.class.is_valid() => ObservationError::Class(f.class),
            None => return Err(("Argos class Z fix reached the smoother".into(), label)),
        };
        fixes.push(regular::Fix {
            time: f.time_us as f64 * 1e-6,
            x,
            y,
            error,
        });
    }
    regular::regularise(&fixes, config)
        .map(|r| (proj, r))
        .map_err(|e| (e.to_string(), label))
}

/// Smooths every track onto the study's regular grid (in parallel; the result does not
/// depend on the thread count).
pub fn smooth(tracks: &[Track], config: &RegularConfig) -> Smoothed {
    smooth_with_progress(tracks, config, &|_, _| {})
}

/// As [`smooth`], calling `progress(done, total)` as each animal's track is finished
/// (from the worker threads, in completion order).
pub fn smooth_with_progress(
    tracks: &[Track],
    config: &RegularConfig,
    progress: &(dyn Fn(usize, usize) + Sync),
) -> Smoothed {
    let done = std::sync::atomic::AtomicUsize::new(0);
    let total = tracks.len();
    let results: Vec<_> = tracks
        .par_iter()
        .map(|t| {
            let r = smooth_track(t, config);
            let k = done.fetch_add(1, std::sync::atomic::Ordering::Relaxed) + 1;
            progress(k, total);
            r
        })
        .collect();
    let mut out = Smoothed {
        paths: Vec::new(),
        points: Vec::new(),
        records: Vec::new(),
    };
    for (track, result) in tracks.iter().zip(results) {
        let (proj, reg) = match result {
            Ok(v) => v,
            Err((reason, projection)) => {
                out.records.push(skipped(&track.animal, reason, projection));
                continue;
            }
        };
        let animal_index = out.paths.len() as u32;
        let mut segments = Vec::with_capacity(reg.segments().len());
        let mut points = Vec::new();
        let mut failed = None;
        for (k, seg) in reg.segments().iter().enumerate() {
            let mut path = Vec::with_capacity(seg.points().len());
            for g in seg.points() {
                let (lon, lat) = match proj.inverse(g.x, g.y) {
                    Ok(v) => v,
                    Err(e) => {
                        failed = Some(e.to_string());
                        break;
                    }
                };
                let se = semi_major(g.sd_x * g.sd_x, g.cov_xy, g.sd_y * g.sd_y);
                let time_us = (g.time * 1e6).round() as i64;
                path.push(PathPoint {
                    time_us,
                    lon,
                    lat,
                    class: None,
                    se_m: se,
                });
                points.push(SmoothedPoint {
                    animal: animal_index,
                    segment: k as u32 + 1,
                    time_us,
                    lon,
                    lat,
                    sd_x: g.sd_x,
                    sd_y: g.sd_y,
                    cov_xy: g.cov_xy,
                    se_m: se,
                    large_se: g.large_se,
                });
            }
            segments.push(path);
        }
        if let Some(reason) = failed {
            out.records.push(skipped(
                &track.animal,
                format!("a smoothed location could not be projected back: {reason}"),
                Some(proj.to_string()),
            ));
            continue;
        }
        let fit = reg.fit();
        let counts = fit.fixes();
        out.records.push(SmootherRecord {
            animal: track.animal.clone(),
            status: "fitted".into(),
            reason: None,
            projection: Some(proj.to_string()),
            beta: Some(fit.beta()),
            sigma: Some(fit.sigma()),
            error_scale: fit.error_scale(),
            log_likelihood: Some(fit.log_likelihood()),
            converged: Some(fit.converged()),
            iterations: Some(fit.iterations()),
            fixes_by_class: counts
                .by_class()
                .iter()
                .filter(|(_, n)| *n > 0)
                .map(|(c, n)| (c.code().to_string(), *n))
                .collect(),
            fixes_with_ellipse: counts.with_covariance(),
            grid_points: points.len(),
            large_se_points: points.iter().filter(|p| p.large_se).count(),
            outliers_flagged: reg.outliers().len(),
            outliers_dropped: reg.outliers().iter().filter(|o| o.dropped).count(),
        });
        out.points.extend(points);
        out.paths.push(Path {
            animal: track.animal.clone(),
            segments,
        });
    }
    out
}

#[cfg(test)]
mod tests {
    use super::semi_major;

    #[test]
    fn semi_major_of_diagonal_and_rotated_ellipses() {
        assert!((semi_major(9.0, 0.0, 4.0) - 3.0).abs() < 1e-12);
        // A 3 × 1 ellipse rotated by 45°: covariance [[5, 4], [4, 5]], eigenvalues 9 and 1.
        assert!((semi_major(5.0, 4.0, 5.0) - 3.0).abs() < 1e-12);
    }
}
