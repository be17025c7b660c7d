//! Builders shared by the integration tests.
#![allow(dead_code)]

use cairn::summaries::{Decoded, DecodedColumns, DielPhase};

pub const HOUR_US: i64 = 3_600_000_000;

/// One hand-written row.
#[derive(Clone)]
pub struct Row {
    pub animal: &'static str,
    pub time_us: i64,
    pub lon: f64,
    pub lat: f64,
    pub hour: f64,
    pub diel: DielPhase,
    pub elev: f64,
    pub season: &'static str,
    pub state: usize,
    pub probs: Vec<f64>,
    pub step: f64,
}

pub fn row(animal: &'static str, time_h: i64, hour: f64, diel: DielPhase, elev: f64) -> Row {
    Row {
        animal,
        time_us: time_h * HOUR_US,
        lon: 10.0,
        lat: 50.0,
        hour,
        diel,
        elev,
        season: "s",
        state: 0,
        probs: vec![],
        step: 100.0,
    }
}

pub fn columns(labels: &[&str], rows: &[Row]) -> DecodedColumns {
    let with_probs = rows.iter().all(|r| !r.probs.is_empty());
    DecodedColumns {
        state_labels: labels.iter().map(|s| s.to_string()).collect(),
        animal: rows.iter().map(|r| r.animal.to_string()).collect(),
        time_us: rows.iter().map(|r| r.time_us).collect(),
        lon: rows.iter().map(|r| r.lon).collect(),
        lat: rows.iter().map(|r| r.lat).collect(),
        local_hour: rows.iter().map(|r| r.hour).collect(),
        diel: rows.iter().map(|r| r.diel).collect(),
        sun_elevation_deg: rows.iter().map(|r| r.elev).collect(),
        season: rows.iter().map(|r| r.season.to_string()).collect(),
        season_order: vec![],
        viterbi: rows.iter().map(|r| r.state).collect(),
        probabilities: if with_probs {
            rows.iter().flat_map(|r| r.probs.iter().copied()).collect()
        } else {
            vec![]
        },
        step_m: rows.iter().map(|r| r.step).collect(),
        angle_rad: rows.iter().map(|_| 0.1).collect(),
    }
}

pub fn decoded(labels: &[&str], rows: &[Row]) -> Decoded {
    Decoded::new(columns(labels, rows)).expect("valid hand-built table")
}

/// A synthetic 3-state table: `animals` animals × `per_animal` hourly fixes, states
/// from a deterministic sticky sequence, positions on a slow random-walk-like path.
pub fn synthetic(animals: usize, per_animal: usize) -> Decoded {
    let labels = ["rest", "forage", "travel"];
    let n = animals * per_animal;
    let mut c = DecodedColumns {
        state_labels: labels.iter().map(|s| s.to_string()).collect(),
        ..Default::default()
    };
    c.animal.reserve(n);
    let mut x: u64 = 0x2545_F491_4F6C_DD1D;
    let mut next = move || {
        x ^= x << 13;
        x ^= x >> 7;
        x ^= x << 17;
        (x >> 11) as f64 / (1u64 << 53) as f64
    };
    for a in 0..animals {
        let id = format!("animal{a:03}");
        let mut lon = 5.0 + (a % 10) as f64 * 0.3;
        let mut lat = 45.0 + (a / 10) as f64 * 0.3;
        let mut s = 0usize;
        for t in 0..per_animal {
            if next() < 0.1 {
                s = (s + 1 + (next() * 2.0) as usize) % 3;
            }
            let step = [50.0, 400.0, 2000.0][s] * (0.5 + next());
            let ang = (next() - 0.5) * std::f64::consts::TAU * 0.999;
            lon = (lon + step / 70_000.0 * ang.cos()).clamp(-179.0, 179.0);
            lat = (lat + step / 111_000.0 * ang.sin()).clamp(-80.0, 80.0);
            let hour = (t % 24) as f64 + 0.25;
            let elev = 50.0 * ((hour - 12.0) / 12.0 * std::f64::consts::PI).cos();
            let diel = if elev > 0.0 {
                DielPhase::Day
            } else if elev > -6.0 {
                if hour < 12.0 {
                    DielPhase::Dawn
                } else {
                    DielPhase::Dusk
                }
            } else {
                DielPhase::Night
            };
            let mut p = [0.05, 0.05, 0.05];
            p[s] = 0.9;
            c.animal.push(id.clone());
            c.time_us.push(t as i64 * HOUR_US);
            c.lon.push(lon);
            c.lat.push(lat);
            c.local_hour.push(hour);
            c.diel.push(diel);
            c.sun_elevation_deg.push(elev);
            c.season
                .push(["spring", "summer", "autumn", "winter"][(t / (24 * 30)) % 4].into());
            c.viterbi.push(s);
            c.probabilities.extend_from_slice(&p);
            c.step_m.push(step);
            c.angle_rad.push(ang);
        }
    }
    Decoded::new(c).expect("valid synthetic table")
}
