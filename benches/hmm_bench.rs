//! Benchmark W1 of the behavioural-state engine (prints figures, asserts nothing):
//! 50 animals × 20 000 steps, 3 states, gamma step lengths + von Mises turning angles,
//! 4 transition covariates (two numeric, cos/sin of the hour of day).
//! Run with `cargo bench --bench hmm_bench` (release profile).

use std::time::Instant;

use cairn::hmm::fit::fit_objective;
use cairn::hmm::simulate::SeriesDesign;
use cairn::hmm::{
    Family, FitOptions, InitialDistribution, Model, ModelSpec, Objective, Params, StreamParams,
    StreamSpec,
};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, Normal};

/// W1's shape; `CAIRN_W1_SHAPE=ANIMALSxSTEPS` overrides it (e.g. to see the effect of
/// series length on cache use; the figures quoted for W1 use the default).
fn shape() -> (usize, usize) {
    std::env::var("CAIRN_W1_SHAPE")
        .ok()
        .and_then(|s| {
            let (a, b) = s.split_once('x')?;
            Some((a.parse().ok()?, b.parse().ok()?))
        })
        .unwrap_or((50, 20_000))
}

fn peak_memory_mib() -> Option<f64> {
    let s = std::fs::read_to_string("/proc/self/status").ok()?;
    let line = s.lines().find(|l| l.starts_with("VmHWM:"))?;
    let kb: f64 = line.split_whitespace().nth(1)?.parse().ok()?;
    Some(kb / 1024.0)
}

/// CPU time of the calling thread in seconds (utime + stime from /proc/thread-self/stat,
/// clock ticks of 10 ms), so that figures are less sensitive to other load on the machine.
fn thread_cpu_seconds() -> Option<f64> {
    let s = std::fs::read_to_string("/proc/thread-self/stat").ok()?;
    let rest = &s[s.rfind(')')? + 2..];
    let f: Vec<&str> = rest.split_whitespace().collect();
    let ut: f64 = f.get(11)?.parse().ok()?;
    let st: f64 = f.get(12)?.parse().ok()?;
    Some((ut + st) / 100.0)
}

fn main() {
    let (animals, steps) = shape();
    let spec = ModelSpec::new(
        3,
        vec![
            StreamSpec::new("step", Family::Gamma),
            StreamSpec::new("angle", Family::VonMises),
        ],
    )
    .with_covariates(&["temp", "wind", "cos_hour", "sin_hour"])
    .with_initial(InitialDistribution::Estimated);
    let mut beta = Vec::new();
    for r in 0..6 {
        beta.extend_from_slice(&[-2.0 - 0.1 * r as f64, 0.3, -0.2, 0.4, -0.3]);
    }
    let params = Params {
        streams: vec![
            StreamParams {
                per_state: vec![vec![0.1, 0.08], vec![0.8, 0.5], vec![3.0, 1.5]],
                zero_mass: None,
            },
            StreamParams {
                per_state: vec![vec![3.1, 0.3], vec![0.0, 1.0], vec![0.0, 5.0]],
                zero_mass: None,
            },
        ],
        beta,
        delta: Some(vec![0.5, 0.3, 0.2]),
    };
    let model = Model::new(&spec, params).expect("valid model");
    let mut rng = ChaCha8Rng::seed_from_u64(1);
    let nd = Normal::new(0.0, 1.0).unwrap();
    let designs: Vec<SeriesDesign> = (0..animals)
        .map(|k| {
            let (mut a, mut b) = (0.0_f64, 0.0_f64);
            let mut cov = Vec::with_capacity(4 * steps);
            for t in 0..steps {
                a = 0.95 * a + 0.31 * nd.sample(&mut rng);
                b = 0.9 * b + 0.44 * nd.sample(&mut rng);
                let h = 2.0 * std::f64::consts::PI * ((t % 24) as f64) / 24.0;
                cov.extend_from_slice(&[a, b, h.cos(), h.sin()]);
            }
            SeriesDesign {
                id: format!("animal-{k:02}"),
                len: steps,
                covariates: cov,
            }
        })
        .collect();
    let drawn = model.simulate(&designs, 2).expect("simulate");
    drop(designs);
    let obj = Objective::new(&spec, &drawn.data).expect("valid data");
    let n = obj.n_steps() as f64;
    let th = model.working().to_vec();
    // machine calibration: the cost of one libm exp() here and now (the forward pass
    // needs about 8 per step with 3 states), to read the figures below against the load
    let t0 = Instant::now();
    let mut acc = 0.0;
    for i in 0..10_000_000 {
        acc += std::hint::black_box(-(i as f64) * 1e-7).exp();
    }
    std::hint::black_box(acc);
    println!(
        "calibration: {:.1} ns per exp()",
        t0.elapsed().as_secs_f64() * 1e2
    );
    println!("W1: {animals} animals x {steps} steps, 3 states, gamma + von Mises, 4 covariates");
    // a digest of the bits of log L and gradient at the true and at a perturbed parameter
    // vector: a change to the evaluation code that should not change results must leave
    // it as it was (and it must not depend on the number of threads)
    let th2: Vec<f64> = th
        .iter()
        .enumerate()
        .map(|(i, x)| x + 0.05 * ((i % 7) as f64 - 3.0))
        .collect();
    let mut digest: u64 = 0xcbf2_9ce4_8422_2325;
    for t in [&th, &th2] {
        let (ll, g) = obj.evaluate(t);
        for x in std::iter::once(ll).chain(g) {
            digest = (digest ^ x.to_bits()).wrapping_mul(0x0100_0000_01b3);
        }
    }
    println!(
        "evaluation digest: {digest:016x} (log L at the truth {:.6})",
        obj.loglik(&th)
    );
    for threads in [1, 2] {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap();
        pool.install(|| {
            let _ = obj.evaluate(&th); // warm-up
            let reps = 10;
            let t0 = Instant::now();
            let c0 = thread_cpu_seconds();
            for _ in 0..reps {
                std::hint::black_box(obj.evaluate(&th));
            }
            let ns = t0.elapsed().as_secs_f64() * 1e9 / (reps as f64 * n);
            let cpu = match (c0, thread_cpu_seconds()) {
                (Some(a), Some(b)) if threads == 1 => {
                    format!(
                        " (CPU time of the worker: {:.1} ns/step)",
                        (b - a) * 1e9 / (reps as f64 * n)
                    )
                }
                _ => String::new(),
            };
            println!("loglik+gradient, {threads} thread(s): {ns:.1} ns/step wall{cpu}");
            let t0 = Instant::now();
            for _ in 0..reps {
                std::hint::black_box(obj.loglik(&th));
            }
            let ns = t0.elapsed().as_secs_f64() * 1e9 / (reps as f64 * n);
            println!("loglik only,      {threads} thread(s): {ns:.1} ns/step");
        });
    }
    if std::env::var_os("CAIRN_BENCH_EVAL_ONLY").is_some() {
        return;
    }
    let before = obj.evaluations();
    let t0 = Instant::now();
    let opts = FitOptions {
        n_starts: 10,
        seed: 7,
        hessian: false,
        ..FitOptions::default()
    };
    let f = fit_objective(&obj, &opts).expect("fit");
    let secs = t0.elapsed().as_secs_f64();
    let c = f.convergence();
    println!(
        "10-start fit (2 threads available, no Hessian): {secs:.1} s, {} evaluations \
         (+ {} warm-up evaluations on a tenth of the steps), converged {}, \
         {} of {} starts at the best optimum ({} of them sharing an earlier start's \
         full-data run), {} failed, log L {:.3}",
        obj.evaluations() - before,
        c.warmup_evaluations,
        c.converged,
        c.n_at_best,
        c.n_starts,
        c.n_shared,
        c.n_failed,
        f.loglik()
    );
    // the same fit with every start's full-data run done (no sharing), for comparison
    let before = obj.evaluations();
    let t0 = Instant::now();
    let g = fit_objective(
        &obj,
        &FitOptions {
            share_full_runs: false,
            ..opts.clone()
        },
    )
    .expect("fit");
    println!(
        "10-start fit, every start's full-data run done (share_full_runs = false): {:.1} s, \
         {} evaluations (+ {} warm-up), {} of {} starts at the best optimum, log L {:.3}",
        t0.elapsed().as_secs_f64(),
        obj.evaluations() - before,
        g.convergence().warmup_evaluations,
        g.convergence().n_at_best,
        g.convergence().n_starts,
        g.loglik()
    );
    let t0 = Instant::now();
    let before = obj.evaluations();
    let f1 = fit_objective(
        &obj,
        &FitOptions {
            n_starts: 1,
            seed: 7,
            hessian: true,
            ..FitOptions::default()
        },
    )
    .expect("fit");
    println!(
        "1-start fit with Hessian: {:.1} s, {} evaluations (+ {} warm-up), covariance \
         available: {}",
        t0.elapsed().as_secs_f64(),
        obj.evaluations() - before,
        f1.convergence().warmup_evaluations,
        f1.covariance().matrix().is_some()
    );
    match peak_memory_mib() {
        Some(m) => println!("peak memory (VmHWM): {m:.0} MiB"),
        None => println!("peak memory: /proc/self/status not readable"),
    }
}
