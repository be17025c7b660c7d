//! Bench: 100 simulated animals × 5 000 irregular fixes of mixed quality (Argos classes,
//! GPS, and every tenth fix with its own error ellipse), fitted and smoothed to a 2 h
//! grid in parallel. Prints figures; asserts nothing (the target, ≤ 10 s on a 2-core
//! machine, is read off the output).

#[path = "../tests/regular_sim/mod.rs"]
mod regular_sim;

use std::time::Instant;

use cairn::tracks::regular::{
    ClassErrors, Epoch, ErrorCovariance, Observation, ObservationError, RegularSettings,
    StatePrior, log_likelihood, regularise,
};
use rayon::prelude::*;

/// CPU seconds (user + system) this process has used, from /proc/self/stat (Linux; clock
/// ticks of 1/100 s, the kernel's USER_HZ). `None` elsewhere. Printed beside wall time
/// because the bench machine is shared: CPU time divided by the core count is what the
/// run would take on idle cores.
fn cpu_seconds() -> Option<f64> {
    let stat = std::fs::read_to_string("/proc/self/stat").ok()?;
    let after = &stat[stat.rfind(')')? + 2..];
    let fields: Vec<&str> = after.split_whitespace().collect();
    let utime: f64 = fields.get(11)?.parse().ok()?;
    let stime: f64 = fields.get(12)?.parse().ok()?;
    Some((utime + stime) / 100.0)
}

fn load_average() -> String {
    std::fs::read_to_string("/proc/loadavg")
        .map(|s| s.split_whitespace().take(3).collect::<Vec<_>>().join(" "))
        .unwrap_or_else(|_| "unknown".to_owned())
}

fn main() {
    const ANIMALS: u64 = 100;
    const FIXES: usize = 5_000;
    let beta = 1.0 / (4.0 * 3600.0);
    let sigma = (2.0 * beta * 0.25_f64).sqrt();
    let errors = ClassErrors::default();
    let t_sim = Instant::now();
    let animals: Vec<_> = (0..ANIMALS)
        .into_par_iter()
        .map(|seed| {
            let mut fixes =
                regular_sim::simulate(seed, FIXES, 3_600.0, beta, sigma, &errors, 1.0).fixes;
            for f in fixes.iter_mut().step_by(10) {
                let ObservationError::Class(c) = f.error else {
                    continue;
                };
                let sd = errors.get(c).expect("simulated classes are usable");
                let major = sd.x_m.max(sd.y_m);
                let minor = sd.x_m.min(sd.y_m);
                f.error = ObservationError::Covariance(
                    ErrorCovariance::from_ellipse(major, minor, 30.0 + f.time % 90.0).unwrap(),
                );
            }
            fixes
        })
        .collect();
    println!(
        "simulated {ANIMALS} animals × {FIXES} fixes in {:.2} s",
        t_sim.elapsed().as_secs_f64()
    );
    let config = RegularSettings {
        interval_s: 7_200.0,
        ..RegularSettings::default()
    }
    .validate()
    .unwrap();
    let cpu0 = cpu_seconds();
    let t0 = Instant::now();
    let results: Vec<_> = animals
        .par_iter()
        .map(|fixes| {
            let t = Instant::now();
            let r = regularise(fixes, &config);
            (r, t.elapsed().as_secs_f64())
        })
        .collect();
    let total = t0.elapsed().as_secs_f64();
    let cpu = cpu_seconds().zip(cpu0).map(|(b, a)| b - a);
    let mut per: Vec<f64> = results.iter().map(|(_, t)| *t).collect();
    per.sort_by(f64::total_cmp);
    let ok: Vec<_> = results
        .iter()
        .filter_map(|(r, _)| r.as_ref().ok())
        .collect();
    let converged = ok.iter().filter(|t| t.fit().converged()).count();
    let points: usize = ok.iter().map(|t| t.points().count()).sum();
    let mut iters: Vec<u64> = ok.iter().map(|t| t.fit().iterations()).collect();
    iters.sort_unstable();
    println!(
        "threads {}: total {total:.2} s; per animal median {:.3} s, max {:.3} s",
        rayon::current_num_threads(),
        per[per.len() / 2],
        per[per.len() - 1]
    );
    if let Some(cpu) = cpu {
        println!(
            "CPU time {cpu:.2} s (÷ {} threads = {:.2} s on idle cores); load average at end {}",
            rayon::current_num_threads(),
            cpu / rayon::current_num_threads() as f64,
            load_average()
        );
    }
    let nelder_mead = ok
        .iter()
        .filter(|t| t.fit().optimiser() == "Nelder-Mead")
        .count();
    println!(
        "fitted {}/{ANIMALS} (converged {converged}, Nelder-Mead fallback {nelder_mead}); median iterations {}; grid points {points}",
        ok.len(),
        iters.get(iters.len() / 2).copied().unwrap_or(0)
    );

    // Cost of one likelihood evaluation (the unit the optimiser spends).
    if let Some(track) = ok.first() {
        let epochs: Vec<Epoch> = animals[0]
            .iter()
            .map(|f| {
                let error = match f.error {
                    ObservationError::Class(c) => {
                        let sd = errors.get(c).expect("simulated classes are usable");
                        ErrorCovariance::diagonal(sd.x_m, sd.y_m).unwrap()
                    }
                    ObservationError::Covariance(c) => c,
                };
                Epoch {
                    time: f.time,
                    observation: Some(Observation {
                        x: f.x,
                        y: f.y,
                        error,
                    }),
                }
            })
            .collect();
        let params = *track.fit().params();
        let prior =
            StatePrior::diffuse_position(epochs[0].observation.unwrap().x, 0.0, 5e4, &params);
        let reps = 200;
        let t = Instant::now();
        let mut sink = 0.0;
        for _ in 0..reps {
            sink += log_likelihood(&epochs, &params, &prior).unwrap();
        }
        let per_eval = t.elapsed().as_secs_f64() / reps as f64;
        println!(
            "one likelihood evaluation over {FIXES} fixes: {:.3} ms ({:.0} ns per fix; checksum {sink:.3e})",
            per_eval * 1e3,
            per_eval * 1e9 / FIXES as f64
        );
    }
}
