//! Cleaning: per-animal time order, invalid classes, duplicate times, outlier filters.
//!
//! For each animal, in this order:
//! 1. sort fixes by time;
//! 2. drop Argos class Z (invalid locations);
//! 3. resolve duplicate timestamps: of the fixes sharing an instant, keep the best by the
//!    quality order in [`super::class`] (class, then smaller error ellipse, then the one
//!    read first) and log the others with the fix kept;
//! 4. run the study's outlier filter:
//!    - **max-speed**: a fix is an outlier when it can be reached from *both* of its
//!      neighbours only faster than the limit (an end fix: from its one neighbour);
//!    - **speed–distance–angle** (Freitas, Lydersen, Fedak & Kovacs 2008, Marine Mammal
//!      Science 24:315–325): first the speed filter of McConnell, Chambers & Fedak (1992)
//!      — a fix is an outlier when the root-mean-square of its speeds to the two previous
//!      and two next fixes exceeds the limit — then, in one pass over what is left, a fix is
//!      a spike when both its distances to its neighbours exceed the first distance limit
//!      and the angle at the fix is below the first angle limit, or both exceed the
//!      second distance limit and the angle is below the second angle limit.
//!
//!   Both speed filters remove the worst outlier first and then re-score its neighbours
//!   (a max-heap with lazy invalidation), so a good fix next to a bad one is not removed
//!   for its neighbour's fault, and the cost is O(n log n) per animal.
//!
//! Filter distances are great-circle distances on the mean Earth sphere (radius
//! 6 371 008.8 m, the IUGG mean radius R1 — value from memory): the thresholds are coarse
//! and the spherical error (< 0.5 %) is immaterial to them, while ellipsoidal geodesics
//! would cost several times more. Step lengths ([`super::metrics`]) use the ellipsoid.

use std::cmp::Ordering;
use std::collections::BinaryHeap;

use rayon::prelude::*;

use super::class::LocClass;
use super::exclusions::{Exclusion, Reason};
use super::ingest::{Ellipse, Fix, Ingested, NO_ELLIPSE, ellipse_of};
use crate::study::SpeedFilter;

/// Mean Earth radius R1 = (2a + b)/3 of WGS84, metres (IUGG; value from memory).
pub const MEAN_EARTH_RADIUS_M: f64 = 6_371_008.8;

/// One animal's cleaned fixes, in time order with strictly increasing times.
#[derive(Debug, Clone)]
pub struct Track {
    /// Animal id.
    pub animal: String,
    /// Fixes kept.
    pub fixes: Vec<Fix>,
    /// Error ellipses of the fixes kept that have one, indexed by [`Fix::ellipse`].
    pub ellipses: Vec<Ellipse>,
}

impl Track {
    /// The error ellipse of one of this track's fixes, if it has one.
    pub fn ellipse(&self, fix: &Fix) -> Option<&Ellipse> {
        ellipse_of(fix, &self.ellipses)
    }
}

/// The result of cleaning.
#[derive(Debug)]
pub struct Cleaned {
    /// Tracks sorted by animal id.
    pub tracks: Vec<Track>,
    /// Fixes removed by cleaning (ingest exclusions are not repeated here).
    pub exclusions: Vec<Exclusion>,
}

/// Names used in exclusion entries: input files and the data columns at fault.
#[derive(Debug, Clone)]
pub struct Labels {
    /// Input files, indexed by [`Fix::file`].
    pub files: Vec<String>,
    /// Time column (duplicates).
    pub time: String,
    /// Class column, or tag column when there is no class column (class Z).
    pub class: String,
    /// Longitude and latitude columns (filters), e.g. `lon+lat`.
    pub position: String,
}

impl Labels {
    /// Labels from a study's inputs and column mapping.
    pub fn from_study(study: &crate::study::Study) -> Labels {
        let c = study.columns();
        Labels {
            files: study
                .inputs()
                .iter()
                .map(|i| i.path.display().to_string())
                .collect(),
            time: c.time.clone(),
            class: c
                .class
                .clone()
                .or_else(|| c.tag.clone())
                .unwrap_or_default(),
            position: format!("{}+{}", c.lon, c.lat),
        }
    }

    /// Generic labels (`time`, `class`, `lon+lat`) for the given files.
    pub fn generic(files: &[&str]) -> Labels {
        Labels {
            files: files.iter().map(|f| f.to_string()).collect(),
            time: "time".into(),
            class: "class".into(),
            position: "lon+lat".into(),
        }
    }
}

/// Great-circle distance (haversine) on the mean sphere, metres.
pub fn sphere_distance(lon1: f64, lat1: f64, lon2: f64, lat2: f64) -> f64 {
    let (p1, p2) = (lat1.to_radians(), lat2.to_radians());
    let dp = p2 - p1;
    let dl = (lon2 - lon1).to_radians();
    let h = (dp / 2.0).sin().powi(2) + p1.cos() * p2.cos() * (dl / 2.0).sin().powi(2);
    2.0 * MEAN_EARTH_RADIUS_M * h.sqrt().min(1.0).asin()
}

/// Initial great-circle bearing on the sphere, degrees clockwise from north (the formula
/// [`Points::bearing`] evaluates with precomputed sines and cosines; kept as its check).
#[cfg(test)]
fn sphere_bearing(lon1: f64, lat1: f64, lon2: f64, lat2: f64) -> f64 {
    let (p1, p2) = (lat1.to_radians(), lat2.to_radians());
    let dl = (lon2 - lon1).to_radians();
    let y = dl.sin() * p2.cos();
    let x = p1.cos() * p2.sin() - p1.sin() * p2.cos() * dl.cos();
    y.atan2(x).to_degrees()
}

/// Cleans every animal's fixes (in parallel; the result does not depend on thread count).
///
/// The fixes are sorted in place (animal id, then time, then quality) and each animal's
/// run is moved into its own vector from the end of the table, shrinking the table as it
/// goes, so cleaning holds about one copy of the fixes rather than two.
pub fn clean(ingested: Ingested, labels: &Labels, filter: SpeedFilter) -> Cleaned {
    let Ingested {
        animals,
        mut fixes,
        ellipses,
        ..
    } = ingested;
    // Position of each animal in id order.
    let mut by_id: Vec<usize> = (0..animals.len()).collect();
    by_id.sort_by(|&a, &b| animals[a].cmp(&animals[b]));
    let mut rank = vec![0usize; animals.len()];
    for (r, &a) in by_id.iter().enumerate() {
        rank[a] = r;
    }
    // Ingest gives every fix its own (file, row), so this order is total and an unstable
    // (allocation-free) sort gives the same result as a stable one; on input already
    // grouped by animal and in time order it is a linear scan.
    fixes.sort_unstable_by(|a, b| {
        rank[a.animal as usize]
            .cmp(&rank[b.animal as usize])
            .then(a.time_us.cmp(&b.time_us))
            .then_with(|| quality(a, b, &ellipses))
    });
    let mut jobs: Vec<(usize, Vec<Fix>)> = Vec::with_capacity(animals.len());
    for &a in by_id.iter().rev() {
        let start = fixes.partition_point(|f| rank[f.animal as usize] < rank[a]);
        let run = fixes.split_off(start);
        fixes.shrink_to_fit();
        jobs.push((a, run));
    }
    drop(fixes);
    jobs.reverse();
    let results: Vec<(Track, Vec<Exclusion>)> = jobs
        .into_par_iter()
        .map(|(a, fixes)| clean_animal(&animals[a], fixes, &ellipses, labels, filter))
        .collect();
    let mut tracks = Vec::with_capacity(results.len());
    let mut exclusions = Vec::new();
    for (t, e) in results {
        exclusions.extend(e);
        tracks.push(t);
    }
    Cleaned { tracks, exclusions }
}

fn log(
    labels: &Labels,
    animal: &str,
    f: &Fix,
    column: &str,
    reason: Reason,
    detail: String,
) -> Exclusion {
    Exclusion {
        file: labels
            .files
            .get(f.file as usize)
            .cloned()
            .unwrap_or_default(),
        row: u64::from(f.row),
        animal: animal.to_string(),
        column: column.to_string(),
        reason,
        detail,
    }
}

/// Quality order for fixes at the same instant: better first. `ellipses` is the list
/// the fixes' [`Fix::ellipse`] indexes.
fn quality(a: &Fix, b: &Fix, ellipses: &[Ellipse]) -> Ordering {
    let ellipse = |f: &Fix| ellipse_of(f, ellipses).map_or(f64::INFINITY, |e| e.semi_major);
    a.class
        .rank()
        .cmp(&b.class.rank())
        .then(ellipse(a).total_cmp(&ellipse(b)))
        .then(a.file.cmp(&b.file))
        .then(a.row.cmp(&b.row))
}

/// Cleans one animal's fixes. `ellipses` is the list their [`Fix::ellipse`] indexes
/// (empty when no fix has an ellipse); the track gets its own list of the ellipses of the
/// fixes it keeps.
pub fn clean_animal(
    animal: &str,
    mut fixes: Vec<Fix>,
    ellipses: &[Ellipse],
    labels: &Labels,
    filter: SpeedFilter,
) -> (Track, Vec<Exclusion>) {
    let mut excl = Vec::new();
    let order = |a: &Fix, b: &Fix| {
        a.time_us
            .cmp(&b.time_us)
            .then_with(|| quality(a, b, ellipses))
    };
    // [`clean`] hands over runs already in this order: check before sorting, so that no
    // sort buffer is allocated for them.
    if !fixes.is_sorted_by(|a, b| order(a, b) != Ordering::Greater) {
        fixes.sort_by(order);
    }
    // Class Z and duplicate times, compacting in place: `kept` fixes are `fixes[..kept]`.
    let mut kept = 0usize;
    for r in 0..fixes.len() {
        let f = fixes[r];
        if f.class == LocClass::ArgosZ {
            excl.push(log(
                labels,
                animal,
                &f,
                &labels.class,
                Reason::InvalidClassZ,
                "Argos class Z".into(),
            ));
            continue;
        }
        if kept > 0 && fixes[kept - 1].time_us == f.time_us {
            let k = &fixes[kept - 1];
            let detail = format!(
                "same time as {} row {} (class {}), which was kept",
                labels
                    .files
                    .get(k.file as usize)
                    .map(String::as_str)
                    .unwrap_or("?"),
                k.row,
                k.class
            );
            excl.push(log(
                labels,
                animal,
                &f,
                &labels.time,
                Reason::DuplicateTime,
                detail,
            ));
            continue;
        }
        fixes[kept] = f;
        kept += 1;
    }
    fixes.truncate(kept);
    let removed = match filter {
        SpeedFilter::None => Vec::new(),
        SpeedFilter::MaxSpeed { max_speed } => {
            let pts = Points::new(&fixes);
            speed_filter(&pts, max_speed, SpeedScore::BothNeighbours)
        }
        SpeedFilter::SpeedDistanceAngle {
            max_speed,
            distances,
            angles,
        } => {
            let pts = Points::new(&fixes);
            let mut r = speed_filter(&pts, max_speed, SpeedScore::RootMeanSquare);
            let mut gone = vec![false; fixes.len()];
            for &(i, _, _) in &r {
                gone[i] = true;
            }
            let alive: Vec<usize> = (0..fixes.len()).filter(|&i| !gone[i]).collect();
            r.extend(spikes(&pts, &alive, distances, angles));
            r
        }
    };
    if !removed.is_empty() {
        let mut drop = vec![false; fixes.len()];
        for (i, reason, detail) in removed {
            drop[i] = true;
            excl.push(log(
                labels,
                animal,
                &fixes[i],
                &labels.position,
                reason,
                detail,
            ));
        }
        let mut k = 0usize;
        fixes.retain(|_| {
            k += 1;
            !drop[k - 1]
        });
    }
    if fixes.len() < fixes.capacity() {
        fixes.shrink_to_fit();
    }
    let mut own = Vec::new();
    for f in fixes.iter_mut().filter(|f| f.ellipse != NO_ELLIPSE) {
        if let Some(e) = ellipse_of(f, ellipses) {
            own.push(*e);
            f.ellipse = own.len() as u32 - 1;
        } else {
            f.ellipse = NO_ELLIPSE;
        }
    }
    (
        Track {
            animal: animal.to_string(),
            fixes,
            ellipses: own,
        },
        excl,
    )
}

/// What the outlier filters need of the fixes, with the latitude's radians and their cosine
/// and sine computed once per fix rather than once per distance. Distances and bearings
/// come out bit for bit as [`sphere_distance`] and the spherical bearing compute them.
struct Points {
    time_us: Vec<i64>,
    lon: Vec<f64>,
    lat_rad: Vec<f64>,
    cos_lat: Vec<f64>,
    sin_lat: Vec<f64>,
}

impl Points {
    fn new(fixes: &[Fix]) -> Points {
        let lat_rad: Vec<f64> = fixes.iter().map(|f| f.lat.to_radians()).collect();
        Points {
            time_us: fixes.iter().map(|f| f.time_us).collect(),
            lon: fixes.iter().map(|f| f.lon).collect(),
            cos_lat: lat_rad.iter().map(|p| p.cos()).collect(),
            sin_lat: lat_rad.iter().map(|p| p.sin()).collect(),
            lat_rad,
        }
    }

    fn len(&self) -> usize {
        self.time_us.len()
    }

    /// [`sphere_distance`] from fix `a` to fix `b`.
    fn distance(&self, a: usize, b: usize) -> f64 {
        let dp = self.lat_rad[b] - self.lat_rad[a];
        let dl = (self.lon[b] - self.lon[a]).to_radians();
        let h =
            (dp / 2.0).sin().powi(2) + self.cos_lat[a] * self.cos_lat[b] * (dl / 2.0).sin().powi(2);
        2.0 * MEAN_EARTH_RADIUS_M * h.sqrt().min(1.0).asin()
    }

    /// [`sphere_bearing`] from fix `a` to fix `b`.
    fn bearing(&self, a: usize, b: usize) -> f64 {
        let dl = (self.lon[b] - self.lon[a]).to_radians();
        let y = dl.sin() * self.cos_lat[b];
        let x = self.cos_lat[a] * self.sin_lat[b] - self.sin_lat[a] * self.cos_lat[b] * dl.cos();
        y.atan2(x).to_degrees()
    }

    /// Speed between fixes `a` and `b`, m/s.
    fn speed(&self, a: usize, b: usize) -> f64 {
        self.speed_over(a, b, self.distance(a, b))
    }

    /// Speed between fixes `a` and `b` given their distance `d`, m/s.
    fn speed_over(&self, a: usize, b: usize, d: f64) -> f64 {
        let dt = (self.time_us[b] - self.time_us[a]).abs() as f64 * 1e-6;
        d / dt
    }
}

/// Distances from each fix to the next one and the one after (by position in the track,
/// before any removal): what the speed filters' scores need unless a removal has made
/// more distant fixes neighbours. [`Points::distance`] is symmetric to the bit (its
/// terms are squares of sines of negated arguments and a product), so a cached value
/// is the one a direct call with the arguments either way round would give.
struct NearDistances {
    next: Vec<f64>,
    after_next: Vec<f64>,
}

impl NearDistances {
    fn new(p: &Points) -> NearDistances {
        let n = p.len();
        NearDistances {
            next: (0..n.saturating_sub(1))
                .map(|i| p.distance(i, i + 1))
                .collect(),
            after_next: (0..n.saturating_sub(2))
                .map(|i| p.distance(i, i + 2))
                .collect(),
        }
    }

    /// Speed between fixes `a` and `b`, m/s, from the cache when they are near.
    fn speed(&self, p: &Points, a: usize, b: usize) -> f64 {
        let (lo, hi) = if a < b { (a, b) } else { (b, a) };
        match hi - lo {
            1 => p.speed_over(a, b, self.next[lo]),
            2 => p.speed_over(a, b, self.after_next[lo]),
            _ => p.speed(a, b),
        }
    }
}

#[derive(Clone, Copy)]
enum SpeedScore {
    /// min(speed from previous, speed to next); one neighbour at the ends.
    BothNeighbours,
    /// McConnell et al. (1992): RMS of speeds to up to two fixes either side.
    RootMeanSquare,
}

#[derive(PartialEq)]
struct Candidate {
    score: f64,
    index: usize,
    version: u32,
}
impl Eq for Candidate {}
impl PartialOrd for Candidate {
    fn partial_cmp(&self, other: &Self) -> Option<Ordering> {
        Some(self.cmp(other))
    }
}
impl Ord for Candidate {
    fn cmp(&self, other: &Self) -> Ordering {
        // Highest score first; ties broken towards the earlier fix, so results are exact
        // and reproducible.
        self.score
            .total_cmp(&other.score)
            .then(other.index.cmp(&self.index))
    }
}

/// Iterative speed filter. Returns `(index, reason, detail)` of removed fixes.
fn speed_filter(fixes: &Points, vmax: f64, kind: SpeedScore) -> Vec<(usize, Reason, String)> {
    let n = fixes.len();
    if n < 2 {
        return Vec::new();
    }
    // Doubly linked list over the fixes still kept.
    let mut prev: Vec<Option<usize>> = (0..n).map(|i| i.checked_sub(1)).collect();
    let mut next: Vec<Option<usize>> = (0..n).map(|i| (i + 1 < n).then_some(i + 1)).collect();
    let mut version = vec![0u32; n];
    let mut alive = vec![true; n];
    let near = NearDistances::new(fixes);

    let score = |i: usize, prev: &[Option<usize>], next: &[Option<usize>]| -> f64 {
        let p1 = prev[i];
        let n1 = next[i];
        match kind {
            SpeedScore::BothNeighbours => match (p1, n1) {
                (Some(p), Some(q)) => near.speed(fixes, p, i).min(near.speed(fixes, i, q)),
                (Some(p), None) => near.speed(fixes, p, i),
                (None, Some(q)) => near.speed(fixes, i, q),
                (None, None) => 0.0,
            },
            SpeedScore::RootMeanSquare => {
                let p2 = p1.and_then(|p| prev[p]);
                let n2 = n1.and_then(|q| next[q]);
                let (mut sum, mut k) = (0.0, 0u32);
                for j in [p2, p1, n1, n2].into_iter().flatten() {
                    sum += near.speed(fixes, j, i).powi(2);
                    k += 1;
                }
                if k == 0 {
                    0.0
                } else {
                    (sum / f64::from(k)).sqrt()
                }
            }
        }
    };
    let hops = match kind {
        SpeedScore::BothNeighbours => 1,
        SpeedScore::RootMeanSquare => 2,
    };
    // A fix scoring at or under the limit is never removed unless a removal re-scores
    // it (which pushes it anew), and popping it would end the loop: leaving it out of
    // the heap changes nothing but the heap's size.
    let mut heap: BinaryHeap<Candidate> = (0..n)
        .map(|i| Candidate {
            score: score(i, &prev, &next),
            index: i,
            version: 0,
        })
        // Exactly the entries the loop's `c.score <= vmax` test would not stop at.
        .filter(|c| {
            c.score
                .partial_cmp(&vmax)
                .is_none_or(|o| o == Ordering::Greater)
        })
        .collect();
    let mut removed = Vec::new();
    while let Some(c) = heap.pop() {
        if !alive[c.index] || c.version != version[c.index] {
            continue;
        }
        if c.score <= vmax {
            break;
        }
        let i = c.index;
        alive[i] = false;
        let detail = match kind {
            SpeedScore::BothNeighbours => format!(
                "reached from its neighbours only at ≥ {:.2} m/s (limit {vmax:.2} m/s)",
                c.score
            ),
            SpeedScore::RootMeanSquare => format!(
                "root-mean-square speed to neighbouring fixes {:.2} m/s (limit {vmax:.2} m/s)",
                c.score
            ),
        };
        removed.push((i, Reason::SpeedFilter, detail));
        // Unlink and re-score the fixes whose neighbourhood changed.
        let (p, q) = (prev[i], next[i]);
        if let Some(p) = p {
            next[p] = q;
        }
        if let Some(q) = q {
            prev[q] = p;
        }
        let mut touched = Vec::with_capacity(4);
        let (mut a, mut b) = (p, q);
        for _ in 0..hops {
            if let Some(x) = a {
                touched.push(x);
                a = prev[x];
            }
            if let Some(x) = b {
                touched.push(x);
                b = next[x];
            }
        }
        for j in touched {
            version[j] += 1;
            heap.push(Candidate {
                score: score(j, &prev, &next),
                index: j,
                version: version[j],
            });
        }
    }
    removed.sort_by_key(|r| r.0);
    removed
}

/// Spike step of the speed–distance–angle filter over the fixes `alive` (in order).
fn spikes(
    fixes: &Points,
    alive: &[usize],
    dist: [f64; 2],
    ang: [f64; 2],
) -> Vec<(usize, Reason, String)> {
    let mut out = Vec::new();
    // The distance into a fix is the distance out of the one before (same arguments, so
    // the same value): computed once.
    let mut into: Option<f64> = None;
    for w in alive.windows(3) {
        let (a, b, c) = (w[0], w[1], w[2]);
        let d1 = into.unwrap_or_else(|| fixes.distance(a, b));
        let d2 = fixes.distance(b, c);
        into = Some(d2);
        let angle = {
            let back = fixes.bearing(b, a);
            let fwd = fixes.bearing(b, c);
            let d = (back - fwd).rem_euclid(360.0);
            if d > 180.0 { 360.0 - d } else { d }
        };
        let spike = (d1 > dist[0] && d2 > dist[0] && angle < ang[0])
            || (d1 > dist[1] && d2 > dist[1] && angle < ang[1]);
        if spike {
            out.push((
                b,
                Reason::SpikeFilter,
                format!(
                    "spike: {:.0} m and {:.0} m to its neighbours with an angle of {angle:.1}°",
                    d1, d2
                ),
            ));
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn precomputed_points_match_the_plain_formulas() {
        let pts = [
            (10.0, 60.0),
            (10.01, 60.02),
            (-179.9, -45.0),
            (179.95, -44.9),
            (0.0, 89.99),
            (120.0, 0.0),
        ];
        let fixes: Vec<Fix> = pts
            .iter()
            .enumerate()
            .map(|(i, &(lon, lat))| Fix {
                animal: 0,
                time_us: i as i64 * 1_000_000,
                lon,
                lat,
                class: LocClass::Gps,
                file: 0,
                row: i as u32 + 1,
                ellipse: NO_ELLIPSE,
            })
            .collect();
        let p = Points::new(&fixes);
        for (a, &(lon1, lat1)) in pts.iter().enumerate() {
            for (b, &(lon2, lat2)) in pts.iter().enumerate() {
                // The speed filters' cache of near distances relies on this symmetry.
                assert_eq!(p.distance(a, b).to_bits(), p.distance(b, a).to_bits());
                assert_eq!(
                    p.distance(a, b).to_bits(),
                    sphere_distance(lon1, lat1, lon2, lat2).to_bits()
                );
                assert_eq!(
                    p.bearing(a, b).to_bits(),
                    sphere_bearing(lon1, lat1, lon2, lat2).to_bits()
                );
            }
        }
    }
}
