//! Seeded simulation of tracks for the tests and the bench.
//!
//! The velocity on each axis follows the Ornstein–Uhlenbeck process through its exact
//! one-step velocity transition on a fine clock of `FINE_STEP_S` seconds
//! (`v ← v e^{−βh} + N(0, σ²(1 − e^{−2βh})/(2β))`), and position is integrated with the
//! trapezoid rule. This is independent of the module's position-velocity covariance
//! formulas: its only error is the trapezoid rule's, of order `h² · acceleration`,
//! centimetres against observation errors of tens to thousands of metres.

#![allow(dead_code)]

use cairn::tracks::class::LocClass;
use cairn::tracks::regular::{ClassErrors, Fix, ObservationError};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, Exp, Normal};

/// Fine simulation clock (s).
pub const FINE_STEP_S: f64 = 60.0;
/// Start time: a whole number of fine steps after a UTC midnight (2023-11-14 00:00 UTC
/// + 5 h), so grid times fall on the fine clock.
pub const START_S: f64 = 1_699_920_000.0 + 5.0 * 3600.0;

/// A simulated animal.
pub struct Simulated {
    /// Observed fixes, strictly increasing in time.
    pub fixes: Vec<Fix>,
    /// True location on the fine clock starting at `START_S`.
    pub truth: Vec<(f64, f64)>,
}

impl Simulated {
    /// True location at a time on the fine clock.
    pub fn truth_at(&self, time: f64) -> (f64, f64) {
        let k = ((time - START_S) / FINE_STEP_S).round() as usize;
        assert!(
            ((time - START_S) - k as f64 * FINE_STEP_S).abs() < 1e-6,
            "time off the fine clock"
        );
        self.truth[k]
    }
}

/// Class mix used by the tests: mostly Argos with some GPS.
pub const MIX: [(LocClass, f64); 8] = [
    (LocClass::Gps, 0.10),
    (LocClass::FastlocGps, 0.10),
    (LocClass::Argos3, 0.15),
    (LocClass::Argos2, 0.15),
    (LocClass::Argos1, 0.15),
    (LocClass::Argos0, 0.05),
    (LocClass::ArgosA, 0.15),
    (LocClass::ArgosB, 0.15),
];

/// Simulate one animal: `n_fixes` fixes at exponential gaps of mean `mean_gap_s`
/// (rounded up to the fine clock), class drawn from `MIX`, Gaussian errors with the
/// class standard deviations of `errors` multiplied by `error_multiplier`.
pub fn simulate(
    seed: u64,
    n_fixes: usize,
    mean_gap_s: f64,
    beta: f64,
    sigma: f64,
    errors: &ClassErrors,
    error_multiplier: f64,
) -> Simulated {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let gap = Exp::new(1.0 / mean_gap_s).unwrap();
    let std = Normal::new(0.0, 1.0).unwrap();
    let mut fix_steps = Vec::with_capacity(n_fixes);
    let mut k = 0usize;
    for _ in 0..n_fixes {
        fix_steps.push(k);
        k += ((gap.sample(&mut rng) / FINE_STEP_S).ceil() as usize).max(1);
    }
    let n_fine = fix_steps[n_fixes - 1] + 1;
    let decay = (-beta * FINE_STEP_S).exp();
    let v_sd = (sigma * sigma * (1.0 - decay * decay) / (2.0 * beta)).sqrt();
    let stationary_sd = sigma / (2.0 * beta).sqrt();
    let (mut vx, mut vy) = (
        stationary_sd * std.sample(&mut rng),
        stationary_sd * std.sample(&mut rng),
    );
    let (mut x, mut y) = (400_000.0, 6_000_000.0);
    let mut truth = Vec::with_capacity(n_fine);
    truth.push((x, y));
    for _ in 1..n_fine {
        let nvx = vx * decay + v_sd * std.sample(&mut rng);
        let nvy = vy * decay + v_sd * std.sample(&mut rng);
        x += 0.5 * (vx + nvx) * FINE_STEP_S;
        y += 0.5 * (vy + nvy) * FINE_STEP_S;
        (vx, vy) = (nvx, nvy);
        truth.push((x, y));
    }
    let fixes = fix_steps
        .iter()
        .map(|&k| {
            let u: f64 = rng.random();
            let mut acc = 0.0;
            let mut class = MIX[MIX.len() - 1].0;
            for (c, p) in MIX {
                acc += p;
                if u < acc {
                    class = c;
                    break;
                }
            }
            let sd = errors.get(class).expect("MIX holds usable classes only");
            let (tx, ty) = truth[k];
            Fix {
                time: START_S + k as f64 * FINE_STEP_S,
                x: tx + error_multiplier * sd.x_m * std.sample(&mut rng),
                y: ty + error_multiplier * sd.y_m * std.sample(&mut rng),
                error: ObservationError::Class(class),
            }
        })
        .collect();
    Simulated { fixes, truth }
}
