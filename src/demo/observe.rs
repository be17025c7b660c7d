//! The observation model: what tags make of a true track, and the faults planted in it.
//!
//! Fastloc-GPS tags fix at irregular intervals (1 h plus an exponential wait of mean
//! 1.2 h, at most 4 h) with an occasional 9–16 h gap, and err by a normal scatter whose
//! standard deviation is drawn per fix between 30 and 70 m on each axis. Argos tags give
//! locations at satellite passes (5 min plus an exponential wait of mean 1.6 h, an
//! occasional 9–14 h gap) with classes 3, 2, 1, 0, A, B and Z in proportions typical of
//! diving animals (few good classes, many A and B) and errors of the class's default
//! standard deviations in cairn's smoother ([`ClassErrors::default`]) times a Student t
//! variate with 4 degrees of freedom scaled to unit variance (heavier tails than a
//! normal); class Z, which cleaning drops, errs three times as much as B. Positions at
//! observation times are interpolated linearly between the hourly true points.
//!
//! Planted faults, each listed in `truth.json`: two unparseable timestamps, duplicate
//! timestamps (a second, worse fix at the same time), an Argos class Z fix when the
//! draws gave none, and far spikes (a fix 15–25 km off the track).

use chrono::{TimeZone, Utc};
use rand::Rng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, Exp, Normal, StudentT};

use super::movement::TrueTrack;
use super::truth::PlantedFault;
use crate::geo::proj::Projection;
use crate::tracks::regular::ClassErrors;

/// Tag carried by an animal.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Tag {
    /// Fastloc-GPS.
    Fastloc,
    /// Argos.
    Argos,
}

impl Tag {
    /// The text of the `tag` column.
    pub fn label(self) -> &'static str {
        match self {
            Tag::Fastloc => "Fastloc",
            Tag::Argos => "Argos",
        }
    }
}

/// Argos classes and the share of locations in each.
const ARGOS_CLASSES: [(&str, f64); 7] = [
    ("3", 0.07),
    ("2", 0.09),
    ("1", 0.11),
    ("0", 0.16),
    ("A", 0.22),
    ("B", 0.33),
    ("Z", 0.02),
];

/// One row of `fixes.csv`.
#[derive(Debug, Clone, PartialEq)]
pub struct FixRow {
    /// Animal id.
    pub animal: String,
    /// UTC microseconds (for ordering; the written text may be a planted fault).
    pub time_us: i64,
    /// The time as written.
    pub time: String,
    /// Longitude, degrees.
    pub lon: f64,
    /// Latitude, degrees.
    pub lat: f64,
    /// Location class ("" for Fastloc rows).
    pub lc: String,
    /// Tag type.
    pub tag: Tag,
}

/// ISO 8601 UTC text of a time in microseconds, whole seconds.
pub fn iso_utc(time_us: i64) -> String {
    Utc.timestamp_micros(time_us)
        .single()
        .map(|t| t.format("%Y-%m-%dT%H:%M:%SZ").to_string())
        .unwrap_or_default()
}

/// True position at `time_us` by linear interpolation between hourly points.
fn position_at(track: &TrueTrack, time_us: i64) -> (f64, f64) {
    let pts = &track.points;
    let t0 = pts[0].time_us;
    let step = pts[1].time_us - t0;
    let k = (((time_us - t0) / step) as usize).min(pts.len() - 2);
    let f = (time_us - pts[k].time_us) as f64 / step as f64;
    (
        pts[k].x + f * (pts[k + 1].x - pts[k].x),
        pts[k].y + f * (pts[k + 1].y - pts[k].y),
    )
}

fn argos_class(rng: &mut ChaCha8Rng) -> &'static str {
    let u: f64 = rng.random();
    let mut acc = 0.0;
    for (c, p) in ARGOS_CLASSES {
        acc += p;
        if u < acc {
            return c;
        }
    }
    "B"
}

/// Error standard deviations (east, north) of an Argos class, metres.
fn argos_sd(class: &str) -> (f64, f64) {
    let e = ClassErrors::default();
    // Class Z has no entry in the table; it takes B's, scaled below.
    let sd = match class {
        "3" => e.argos3,
        "2" => e.argos2,
        "1" => e.argos1,
        "0" => e.argos0,
        "A" => e.argos_a,
        _ => e.argos_b,
    };
    let z = if class == "Z" { 3.0 } else { 1.0 };
    (sd.x_m * z, sd.y_m * z)
}

/// The fixes a tag records along a true track (no faults yet), in time order.
pub(crate) fn observe(
    id: &str,
    tag: Tag,
    track: &TrueTrack,
    utm: &Projection,
    rng: &mut ChaCha8Rng,
) -> Vec<FixRow> {
    let first = track.points[0].time_us;
    let last = track.points[track.points.len() - 1].time_us;
    let hour = 3_600.0;
    let normal = Normal::new(0.0, 1.0).expect("unit normal");
    // Var(t₄) = 2, so t₄/√2 has unit variance.
    let t4 = StudentT::new(4.0).expect("4 degrees of freedom");
    let (wait, gap_p) = match tag {
        Tag::Fastloc => (Exp::new(1.0 / (1.2 * hour)).expect("rate > 0"), 0.04),
        Tag::Argos => (Exp::new(1.0 / (1.6 * hour)).expect("rate > 0"), 0.03),
    };
    let mut rows = Vec::new();
    let mut t = first + (rng.random::<f64>() * hour * 1e6) as i64;
    while t <= last {
        let (x, y) = position_at(track, t);
        let (lc, ex, ey) = match tag {
            Tag::Fastloc => {
                let sd = 30.0 + 40.0 * rng.random::<f64>();
                let ex = sd * normal.sample(rng);
                ("", ex, sd * normal.sample(rng))
            }
            Tag::Argos => {
                let c = argos_class(rng);
                let (sx, sy) = argos_sd(c);
                let ex = sx * t4.sample(rng) / 2f64.sqrt();
                (c, ex, sy * t4.sample(rng) / 2f64.sqrt())
            }
        };
        let (lon, lat) = utm
            .inverse(x + ex, y + ey)
            .expect("positions near the fjord invert");
        rows.push(FixRow {
            animal: id.to_string(),
            time_us: t,
            time: iso_utc(t),
            lon,
            lat,
            lc: lc.to_string(),
            tag,
        });
        let dt = if rng.random::<f64>() < gap_p {
            let hours = match tag {
                Tag::Fastloc => rng.random_range(9.0..16.0),
                Tag::Argos => rng.random_range(9.0..14.0),
            };
            hours * hour
        } else {
            match tag {
                Tag::Fastloc => (hour + wait.sample(rng)).min(4.0 * hour),
                Tag::Argos => 300.0 + wait.sample(rng),
            }
        };
        // Whole seconds, as tags report them.
        t += dt.round() as i64 * 1_000_000;
    }
    rows
}

/// Which faults an animal's rows receive.
#[derive(Debug, Clone, Copy, Default)]
pub(crate) struct FaultPlan {
    /// Two rows with unparseable timestamps.
    pub unparseable: bool,
    /// A second, worse fix at the time of an existing one.
    pub duplicate: bool,
    /// A fix 15–25 km off the track.
    pub spike: bool,
}

/// Plants the faults of `plan` (and a class Z fix for an Argos track without one) into
/// `rows`, keeping time order, and lists them.
pub(crate) fn plant_faults(
    rows: &mut Vec<FixRow>,
    plan: FaultPlan,
    utm: &Projection,
    rng: &mut ChaCha8Rng,
) -> Vec<PlantedFault> {
    let mut faults = Vec::new();
    if rows.len() < 8 {
        return faults;
    }
    let id = rows[0].animal.clone();
    let tag = rows[0].tag;
    let mut fault = |kind: &str, time: &str, detail: String| {
        faults.push(PlantedFault {
            animal: id.clone(),
            kind: kind.to_string(),
            time: time.to_string(),
            detail,
        })
    };
    let n = rows.len();
    let mut inserts: Vec<(usize, FixRow)> = Vec::new();
    if plan.duplicate {
        let k = n / 3;
        let mut dup = rows[k].clone();
        let (x, y) = utm.forward(dup.lon, dup.lat).expect("fixes project");
        let (lon, lat) = utm.inverse(x + 400.0, y - 300.0).expect("fixes invert");
        (dup.lon, dup.lat) = (lon, lat);
        let detail = if tag == Tag::Argos {
            dup.lc = "B".into();
            "a second fix at the same time, 500 m from the first, class B"
        } else {
            "a second fix at the same time, 500 m from the first"
        };
        fault("duplicate_time", &dup.time, detail.into());
        inserts.push((k + 1, dup));
    }
    if tag == Tag::Argos && !rows.iter().any(|r| r.lc == "Z") {
        let k = n / 2;
        let mut z = rows[k].clone();
        z.time_us += 240 * 1_000_000;
        z.time = iso_utc(z.time_us);
        z.lc = "Z".into();
        fault(
            "argos_class_z",
            &z.time,
            "an Argos class Z location 4 min after a real one".into(),
        );
        inserts.push((k + 1, z));
    }
    if plan.spike {
        let k = 2 * n / 3;
        let (x, y) = utm
            .forward(rows[k].lon, rows[k].lat)
            .expect("fixes project");
        let d = rng.random_range(15_000.0..25_000.0);
        let a = rng.random_range(-std::f64::consts::PI..std::f64::consts::PI);
        let (lon, lat) = utm
            .inverse(x + d * a.cos(), y + d * a.sin())
            .expect("spikes invert");
        (rows[k].lon, rows[k].lat) = (lon, lat);
        let time = rows[k].time.clone();
        fault(
            "spike",
            &time,
            format!("fix moved {:.0} km off the track", d / 1_000.0),
        );
    }
    if plan.unparseable {
        for (k, text) in [(n / 4, "2025-02-30T12:00:00Z"), (3 * n / 4, "not recorded")] {
            let mut bad = rows[k].clone();
            bad.time = text.to_string();
            fault(
                "unparseable_time",
                text,
                "a row whose timestamp cannot be read".into(),
            );
            inserts.push((k + 1, bad));
        }
    }
    // Insert from the back so earlier indices stay valid.
    inserts.sort_by_key(|(k, _)| std::cmp::Reverse(*k));
    for (k, row) in inserts {
        rows.insert(k, row);
    }
    faults
}
