//! The true behavioural-state model and the simulation of true tracks on a one-hour grid.
//!
//! Each hour t an animal in state sₜ at position pₜ draws a step length from its state's
//! gamma distribution and a turning angle from its state's von Mises distribution, and
//! moves; then sₜ₊₁ is drawn from row sₜ of Γ(xₜ), where xₜ holds the covariates at pₜ
//! and time t: the kelp proportion within the study's radius (the same summed-area
//! calculation `prepare` runs on `habitat.tif`), the bilinear water depth from
//! `depth.tif`, and cos/sin of 2π·h/24 for the local clock hour h. Γ is the engine's own
//! multinomial logit ([`crate::hmm::Model::transition_matrix`]), so the convention
//! (diagonal as reference, covariates at t govern t → t + 1) is the one the fit assumes.
//!
//! Animals stay in open water: a step that would end outside the study area, where
//! depth or kelp proportion is undefined, or within [`SHORE_BUFFER_M`] of where depth is
//! undefined, or whose straight path crosses land, has its turning angle redrawn,
//! from the state's von Mises [`VON_MISES_TRIES`] times and then uniformly, up to
//! [`MAX_REDRAWS`] times in all, and the animal stays put if none works. Redrawing
//! rejects headings toward the shore, so realised turning angles near coasts are less
//! concentrated around the state's mean than the von Mises says; step lengths are kept.
//! Distances are taken in the UTM plane, whose scale differs from the ellipsoid by less
//! than 0.1 % here.

use chrono::{TimeZone, Utc};
use chrono_tz::Tz;
use rand::Rng;
use rand_chacha::ChaCha8Rng;
use std::f64::consts::PI;

use super::landscape::{HEIGHT_M, Landscape, WIDTH_M, X0, Y0};
use crate::covariates::{fractional_hour, hour_terms};
use crate::geo::focal::ClassProportions;
use crate::hmm::dists::wrap_angle;
use crate::hmm::simulate::{draw, pick};
use crate::hmm::{
    Family, HmmError, InitialDistribution, Model, ModelSpec, Params, StreamParams, StreamSpec,
};

/// State labels, in the engine's order (increasing mean step).
pub const STATES: [&str; 3] = ["resting", "foraging", "travelling"];
/// Gamma step length per state: (mean, sd), metres per hour.
pub const STEP_GAMMA: [(f64, f64); 3] = [(60.0, 45.0), (350.0, 250.0), (1_800.0, 700.0)];
/// Von Mises turning angle per state: (mean, concentration).
pub const ANGLE_VON_MISES: [(f64, f64); 3] = [(0.0, 0.3), (0.0, 1.0), (0.0, 6.0)];
/// The transition terms of the true model, as the study file writes them.
pub const TRUE_TERMS: [&str; 3] = ["habitat_kelp", "depth", "cyclic(local_hour, 24)"];
/// Raw units of the design columns of [`TRUE_TERMS`], in order.
pub const COVARIATE_UNITS: [&str; 4] = ["proportion", "m", "1", "1"];
/// Transition coefficients per off-diagonal pair (from-major, to ascending): intercept,
/// then per unit of kelp proportion, per metre of depth, cos and sin of the clock hour.
/// Foraging is entered in kelp and shallow water, resting at night (cos = 1 at
/// midnight), travelling in deep water away from kelp.
pub const BETA: [[f64; 5]; 6] = [
    [-2.4, 2.2, -0.004, -0.9, 0.4], // resting → foraging
    [-3.6, 0.0, 0.006, -0.5, 0.0],  // resting → travelling
    [-2.4, -1.2, 0.0, 0.9, -0.3],   // foraging → resting
    [-2.6, -1.8, 0.010, 0.0, 0.0],  // foraging → travelling
    [-3.0, 0.0, -0.004, 0.6, 0.0],  // travelling → resting
    [-1.6, 3.0, -0.010, 0.0, 0.0],  // travelling → foraging
];
/// Heading redraws allowed before a step that keeps landing ashore becomes a stay.
pub const MAX_REDRAWS: usize = 50;
/// Redraws that use the state's turning-angle distribution; later ones take a uniform
/// heading, so that a fast, directed animal facing a shore can turn back.
pub const VON_MISES_TRIES: usize = 10;
/// Closest approach to the rasters' edges (the open sea beyond the fjord mouth is
/// outside the study area), metres.
pub const EDGE_MARGIN_M: f64 = 1_000.0;
/// Distance kept from where depth is undefined (the shore), metres, so that positions
/// smoothed from fixes with tens of metres of error still find a depth.
pub const SHORE_BUFFER_M: f64 = 150.0;
/// True step interval, seconds.
pub const STEP_S: i64 = 3_600;

/// The true model as an engine [`Model`] (its Γ(x) drives the simulation).
///
/// # Errors
/// [`HmmError`] only if the constants above were invalid.
pub fn true_model(covariate_names: &[String]) -> Result<Model, HmmError> {
    let names: Vec<&str> = covariate_names.iter().map(String::as_str).collect();
    let spec = ModelSpec::new(
        STATES.len(),
        vec![
            StreamSpec::new("step", Family::Gamma),
            StreamSpec::new("angle", Family::VonMises),
        ],
    )
    .with_covariates(&names)
    .with_initial(InitialDistribution::Stationary)
    .with_labels(&STATES);
    let params = Params {
        streams: vec![
            StreamParams {
                per_state: STEP_GAMMA.iter().map(|&(m, s)| vec![m, s]).collect(),
                zero_mass: None,
            },
            StreamParams {
                per_state: ANGLE_VON_MISES.iter().map(|&(m, k)| vec![m, k]).collect(),
                zero_mass: None,
            },
        ],
        beta: BETA.iter().flatten().copied().collect(),
        delta: None,
    };
    Model::new(&spec, params)
}

/// One hour of a true track: where the animal is, in which state, its covariates there,
/// and the step it draws from there.
#[derive(Debug, Clone, PartialEq)]
pub struct TruePoint {
    /// UTC microseconds.
    pub time_us: i64,
    /// Easting, metres (UTM 34N).
    pub x: f64,
    /// Northing, metres (UTM 34N).
    pub y: f64,
    /// True state (index into [`STATES`]).
    pub state: usize,
    /// Kelp proportion within the study's radius.
    pub kelp: f64,
    /// Water depth, metres.
    pub depth_m: f64,
    /// Local clock hour in the study's time zone.
    pub local_hour: f64,
    /// Step length drawn for the step leaving this point (NaN at the last point).
    pub step_m: f64,
    /// Turning angle of the step leaving this point, as finally accepted (NaN at the
    /// first and last points).
    pub turn_rad: f64,
    /// Whether the animal moved on that step (false when it stayed for want of water).
    pub moved: bool,
}

impl TruePoint {
    /// The covariate row of this point, in the order of the true model's covariates.
    pub fn covariates(&self) -> [f64; 4] {
        let (c, s) = hour_terms(self.local_hour);
        [self.kelp, self.depth_m, c, s]
    }
}

/// A simulated true track.
#[derive(Debug, Clone)]
pub struct TrueTrack {
    /// Points on the hourly grid, first to last.
    pub points: Vec<TruePoint>,
    /// Headings redrawn because a step would have ended on land.
    pub heading_redraws: usize,
    /// Steps on which the animal stayed put.
    pub stays: usize,
}

/// What the simulation needs from the landscape at a position.
pub(crate) struct Env<'a> {
    pub landscape: &'a Landscape,
    pub kelp: ClassProportions<'a>,
    pub tz: Tz,
}

impl Env<'_> {
    /// Kelp proportion and depth at (x, y), `None` where either is undefined.
    pub fn at(&self, x: f64, y: f64) -> Option<(f64, f64)> {
        let depth = self.landscape.depth_at(x, y)?;
        let kelp = self.kelp.counts_xy(x, y).ok()?.proportion(0)?;
        Some((kelp, depth))
    }

    /// Whether the straight path from (x0, y0) to (x1, y1) stays in water, checked every
    /// 50 m (half a depth cell), so steps do not jump across headlands and islands.
    pub fn water_path(&self, x0: f64, y0: f64, x1: f64, y1: f64) -> bool {
        let n = ((x1 - x0).hypot(y1 - y0) / 50.0).ceil() as usize;
        (1..n).all(|k| {
            let f = k as f64 / n as f64;
            let (x, y) = (x0 + f * (x1 - x0), y0 + f * (y1 - y0));
            self.landscape.depth_at(x, y).is_some()
        })
    }

    /// Whether an animal may be at (x, y): inside the study area (at least
    /// [`EDGE_MARGIN_M`] from the rasters' edges) and with water depth defined there and
    /// [`SHORE_BUFFER_M`] north, south, east and west of it.
    pub fn open_water(&self, x: f64, y: f64) -> bool {
        let l = &self.landscape;
        let inside = (X0 + EDGE_MARGIN_M..=X0 + WIDTH_M - EDGE_MARGIN_M).contains(&x)
            && (Y0 - HEIGHT_M + EDGE_MARGIN_M..=Y0 - EDGE_MARGIN_M).contains(&y);
        let b = SHORE_BUFFER_M;
        inside
            && self.at(x, y).is_some()
            && [(b, 0.0), (-b, 0.0), (0.0, b), (0.0, -b)]
                .iter()
                .all(|(dx, dy)| l.depth_at(x + dx, y + dy).is_some())
    }

    fn local_hour(&self, time_us: i64) -> f64 {
        let t = Utc
            .timestamp_micros(time_us)
            .single()
            .expect("simulation times are in range");
        fractional_hour(&t.with_timezone(&self.tz))
    }
}

fn point(env: &Env<'_>, time_us: i64, x: f64, y: f64, state: usize) -> TruePoint {
    let (kelp, depth_m) = env.at(x, y).expect("true positions are kept in water");
    TruePoint {
        time_us,
        x,
        y,
        state,
        kelp,
        depth_m,
        local_hour: env.local_hour(time_us),
        step_m: f64::NAN,
        turn_rad: f64::NAN,
        moved: false,
    }
}

/// Simulates `steps` hourly steps from (x0, y0) at `start_us`.
///
/// # Errors
/// [`HmmError`] when Γ at the start is reducible (not with the true coefficients).
pub(crate) fn simulate_track(
    model: &Model,
    env: &Env<'_>,
    start: (f64, f64),
    start_us: i64,
    steps: usize,
    rng: &mut ChaCha8Rng,
) -> Result<TrueTrack, HmmError> {
    let params = model.params();
    let (step_p, angle_p) = (&params.streams[0].per_state, &params.streams[1].per_state);
    let mut p = point(env, start_us, start.0, start.1, 0);
    let delta = model.stationary(&p.covariates())?;
    p.state = pick(&delta, rng);
    let mut heading: f64 = rng.random_range(-PI..PI);
    let mut points = Vec::with_capacity(steps + 1);
    let (mut redraws, mut stays) = (0, 0);
    for t in 0..steps {
        let s = p.state;
        let len = draw(Family::Gamma, &step_p[s], rng);
        let mut moved = None;
        for attempt in 0..=MAX_REDRAWS {
            let turn = if attempt < VON_MISES_TRIES {
                draw(Family::VonMises, &angle_p[s], rng)
            } else {
                rng.random_range(-PI..PI)
            };
            let h = heading + turn;
            let (nx, ny) = (p.x + len * h.cos(), p.y + len * h.sin());
            if env.open_water(nx, ny) && env.water_path(p.x, p.y, nx, ny) {
                moved = Some((turn, h, nx, ny));
                break;
            }
            if attempt < MAX_REDRAWS {
                redraws += 1;
            }
        }
        p.step_m = len;
        let (nx, ny) = match moved {
            Some((turn, h, nx, ny)) => {
                if t > 0 {
                    p.turn_rad = wrap_angle(turn);
                }
                p.moved = true;
                heading = h;
                (nx, ny)
            }
            None => {
                stays += 1;
                (p.x, p.y)
            }
        };
        let gamma = model.transition_matrix(&p.covariates());
        let row: Vec<f64> = (0..STATES.len()).map(|j| gamma[(s, j)]).collect();
        let next_state = pick(&row, rng);
        let next = point(env, p.time_us + STEP_S * 1_000_000, nx, ny, next_state);
        points.push(std::mem::replace(&mut p, next));
    }
    points.push(p);
    Ok(TrueTrack {
        points,
        heading_redraws: redraws,
        stays,
    })
}
