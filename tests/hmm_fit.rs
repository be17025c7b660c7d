//! Fitting end to end: simulate-then-fit recovers the parameters inside their intervals,
//! random starts really differ, a non-identified model says which parameters are to
//! blame, intervals by the delta method and by simulation agree, pseudo-residuals of the
//! true model are standard normal, and the comparison table ranks models.

use std::time::Instant;

use cairn::hmm::inference::{Covariance, IntervalMethod, compare};
use cairn::hmm::simulate::SeriesDesign;
use cairn::hmm::{
    Data, Family, FitOptions, InitialDistribution, Model, ModelSpec, Objective, Params, Series,
    StreamParams, StreamSpec, fit,
};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, Normal};

fn truth() -> (ModelSpec, Params) {
    let spec = ModelSpec::new(
        3,
        vec![
            StreamSpec::new("step", Family::Gamma),
            StreamSpec::new("angle", Family::VonMises),
        ],
    )
    .with_covariates(&["temp", "wind"])
    .with_labels(&["resting", "foraging", "travelling"]);
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
        // rows: 1->2, 1->3, 2->1, 2->3, 3->1, 3->2; columns: intercept, temp, wind
        beta: vec![
            -2.0, 0.6, 0.0, -3.0, 0.3, -0.4, -1.8, -0.5, 0.2, -2.0, 0.0, 0.5, -3.0, 0.4, 0.0, -1.5,
            -0.3, -0.3,
        ],
        delta: Some(vec![0.5, 0.3, 0.2]),
    };
    (spec, params)
}

fn designs(n: usize, len: usize, seed: u64) -> Vec<SeriesDesign> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let nd = Normal::new(0.0, 1.0).unwrap();
    (0..n)
        .map(|k| {
            // smooth covariates: AR(1) so that they change slowly like weather
            let (mut a, mut b) = (0.0_f64, 0.0_f64);
            let mut cov = Vec::with_capacity(2 * len);
            for _ in 0..len {
                a = 0.95 * a + 0.31 * nd.sample(&mut rng);
                b = 0.9 * b + 0.44 * nd.sample(&mut rng);
                cov.push(a);
                cov.push(b);
            }
            SeriesDesign {
                id: format!("animal-{k:02}"),
                len,
                covariates: cov,
            }
        })
        .collect()
}

/// The true model's spec and data drawn from it for 8 animals × 1 500 steps (the
/// warm-up tests: enough data for a warm-up on a tenth of each series).
fn eight_animals() -> (ModelSpec, Data) {
    let (spec, params) = truth();
    let model = Model::new(&spec, params).unwrap();
    let drawn = model.simulate(&designs(8, 1500, 3), 4).unwrap();
    (spec, drawn.data)
}

fn no_hessian() -> FitOptions {
    FitOptions {
        hessian: false,
        ..FitOptions::default()
    }
}

fn wrap(x: f64) -> f64 {
    cairn::hmm::dists::wrap_angle(x)
}

// Simulate-then-fit (style guide §10): 3 states, 2 covariates, 20 animals × 2000 steps.
// Coverage of nominal 95% Wald intervals (ZML 2016, §3.6): with ~40 parameters a couple
// may miss by chance, so the test allows up to 10% outside the 95% interval and none
// outside the 99.9% interval (z = 3.29).
#[test]
fn simulate_then_fit_recovers_truth_within_intervals() {
    let (spec, params) = truth();
    let model = Model::new(&spec, params).unwrap();
    let drawn = model.simulate(&designs(20, 2000, 1), 2).unwrap();
    let t0 = Instant::now();
    let opts = FitOptions {
        n_starts: 3,
        seed: 5,
        ..FitOptions::default()
    };
    let f = fit(&spec, &drawn.data, &opts).unwrap();
    eprintln!(
        "recovery fit: {:.2} s, {:?}",
        t0.elapsed().as_secs_f64(),
        f.convergence()
    );
    assert!(f.convergence().converged, "{:?}", f.convergence());
    assert!(f.convergence().n_at_best >= 1);
    let ci95 = f.natural_intervals(0.95, IntervalMethod::Delta).unwrap();
    let ci999 = f.natural_intervals(0.999, IntervalMethod::Delta).unwrap();
    let true_nat = model.valid_spec().natural_vector(model.params());
    let mut outside = Vec::new();
    for ((c95, c999), &t) in ci95.iter().zip(&ci999).zip(&true_nat) {
        let circular_mean = c95.name.starts_with("angle: mean");
        let d = if circular_mean {
            wrap(t - c95.estimate)
        } else {
            t - c95.estimate
        };
        if d.abs() > c95.upper - c95.estimate {
            outside.push(format!(
                "{} est {:.4} true {t:.4} se {:.4}",
                c95.name, c95.estimate, c95.se
            ));
        }
        assert!(
            d.abs() <= c999.upper - c999.estimate,
            "{}: truth {t} far outside",
            c999.name
        );
    }
    assert!(
        outside.len() * 10 <= ci95.len(),
        "outside 95%: {outside:#?}"
    );
    // documented state order: increasing mean step length
    let means: Vec<f64> = f.params().streams[0]
        .per_state
        .iter()
        .map(|s| s[0])
        .collect();
    assert!(means.windows(2).all(|w| w[0] < w[1]));
    // derived quantities at chosen covariate values, both interval methods
    let x = [0.5, -0.5];
    let d = f
        .stationary_intervals(&x, 0.95, IntervalMethod::Delta)
        .unwrap();
    let s = f
        .stationary_intervals(
            &x,
            0.95,
            IntervalMethod::Simulation {
                draws: 400,
                seed: 3,
            },
        )
        .unwrap();
    let true_stat = model.stationary(&x).unwrap();
    for j in 0..3 {
        assert!(
            (d[j].se / s[j].se - 1.0).abs() < 0.3,
            "{:?} vs {:?}",
            d[j],
            s[j]
        );
        assert!((true_stat[j] - d[j].estimate).abs() < 3.29 * d[j].se);
    }
    let g = f
        .transition_intervals(&x, 0.95, IntervalMethod::Delta)
        .unwrap();
    assert_eq!(g.len(), 9);
    let row: f64 = g[..3].iter().map(|i| i.estimate).sum();
    assert!((row - 1.0).abs() < 1e-12);
}

// Random starts (style guide §10): successive starts differ from each other and from
// the deterministic first start.
// The warm-up on the first tenth of each series only moves the starting point: the
// full-data run still ends at the full-data optimum (same log L to the tolerance that
// defines "the same optimum", same state-dependent distributions), and its cost is
// reported apart.
#[test]
fn warm_up_reaches_the_same_optimum() {
    let (spec, data) = eight_animals();
    let run = |warmup_min_steps: usize| {
        let opts = FitOptions {
            n_starts: 2,
            seed: 3,
            warmup_min_steps,
            ..no_hessian()
        };
        fit(&spec, &data, &opts).unwrap()
    };
    let cold = run(usize::MAX);
    let warm = run(0);
    for f in [&cold, &warm] {
        assert!(f.convergence().converged, "{:?}", f.convergence());
    }
    assert_eq!(cold.convergence().warmup_evaluations, 0);
    assert!(warm.convergence().warmup_evaluations > 0);
    assert!(
        (cold.loglik() - warm.loglik()).abs() < 1e-4,
        "{} vs {}",
        cold.loglik(),
        warm.loglik()
    );
    // the state-dependent distributions are well identified (some transition
    // coefficients of these data sit on a flat ridge towards −∞ and are not compared)
    for (sa, sb) in cold.params().streams.iter().zip(&warm.params().streams) {
        for (pa, pb) in sa.per_state.iter().zip(&sb.per_state) {
            for (a, b) in pa.iter().zip(pb) {
                assert!((a - b).abs() < 1e-3 * a.abs().max(1.0), "{a} vs {b}");
            }
        }
    }
}

// A start whose warm-up ends where an earlier one's did shares that start's full-data
// run; run in full, it would have ended at the same optimum (same log L to the
// tolerance that defines "the same optimum"). Checked against the same fit with every
// start run in full.
#[test]
fn shared_full_runs_end_where_their_own_would() {
    let (spec, data) = eight_animals();
    let run = |share_full_runs: bool| {
        let opts = FitOptions {
            n_starts: 5,
            seed: 5,
            warmup_min_steps: 0,
            share_full_runs,
            ..no_hessian()
        };
        fit(&spec, &data, &opts).unwrap()
    };
    let on = run(true);
    let off = run(false);
    assert_eq!(off.convergence().n_shared, 0);
    assert!(off.starts().iter().all(|s| s.shared_with.is_none()));
    let shared: Vec<_> = on
        .starts()
        .iter()
        .filter(|s| s.shared_with.is_some())
        .collect();
    assert_eq!(on.convergence().n_shared, shared.len());
    assert!(
        !shared.is_empty(),
        "no start shared a run: {:?}",
        on.starts()
    );
    for s in shared {
        let j = s.shared_with.unwrap();
        assert!(j < s.index);
        let first = &on.starts()[j];
        assert!(first.shared_with.is_none() && first.failure.is_none());
        assert_eq!(s.loglik, first.loglik);
        assert_eq!(s.iterations, 0);
        let own = off.starts()[s.index].loglik.unwrap();
        assert!(
            (own - s.loglik.unwrap()).abs() < 1e-4,
            "start {}: own run {own}, shared {:?}",
            s.index,
            s.loglik
        );
    }
    // the unshared starts ran exactly as without sharing
    for s in on.starts().iter().filter(|s| s.shared_with.is_none()) {
        assert_eq!(s, &off.starts()[s.index]);
    }
    assert!((on.loglik() - off.loglik()).abs() < 1e-4);
    assert!(on.convergence().evaluations < off.convergence().evaluations);
}

#[test]
fn random_starts_really_restart() {
    let (spec, params) = truth();
    let model = Model::new(&spec, params).unwrap();
    let drawn = model.simulate(&designs(2, 300, 3), 4).unwrap();
    let obj = Objective::new(&spec, &drawn.data).unwrap();
    let mut rng = ChaCha8Rng::seed_from_u64(1);
    let s0 = obj.start_values(None);
    let s1 = obj.start_values(Some(&mut rng));
    let s2 = obj.start_values(Some(&mut rng));
    assert_ne!(s0, s1);
    assert_ne!(s1, s2);
    assert_ne!(s0.beta, s2.beta);
    // and the same seed gives the same starts
    let mut rng2 = ChaCha8Rng::seed_from_u64(1);
    assert_eq!(obj.start_values(Some(&mut rng2)), s1);
}

/// The progress hook hears of every start once, in order, with the log-likelihood the
/// fit records for it, and then of the Hessian.
#[test]
fn progress_reports_each_start_then_the_hessian() {
    use cairn::hmm::fit::{FitProgress, fit_objective_with_progress};
    let (spec, params) = truth();
    let model = Model::new(&spec, params).unwrap();
    let drawn = model.simulate(&designs(2, 300, 3), 4).unwrap();
    let obj = Objective::new(&spec, &drawn.data).unwrap();
    let mut heard = Vec::new();
    let opts = FitOptions {
        n_starts: 3,
        seed: 2,
        ..FitOptions::default()
    };
    let f = fit_objective_with_progress(&obj, &opts, &mut |p| heard.push(p)).unwrap();
    assert_eq!(heard.len(), 4, "{heard:?}");
    for (k, (p, rec)) in heard.iter().zip(f.starts()).enumerate() {
        assert_eq!(
            *p,
            FitProgress::StartDone {
                index: k,
                of: 3,
                loglik: rec.loglik
            }
        );
    }
    assert_eq!(heard[3], FitProgress::Hessian);
    // without a Hessian there is nothing to announce after the starts
    let mut n = 0;
    let no_h = FitOptions {
        hessian: false,
        ..opts
    };
    fit_objective_with_progress(&obj, &no_h, &mut |p| {
        assert_ne!(p, FitProgress::Hessian);
        n += 1;
    })
    .unwrap();
    assert_eq!(n, 3);
}

// A non-identified model (two perfectly collinear covariates) must report a Hessian that
// is not positive definite and name the collinear coefficients (ZML 2016, §3.6 on the
// observed information).
#[test]
fn singular_hessian_names_the_culprits() {
    let spec1 =
        ModelSpec::new(2, vec![StreamSpec::new("step", Family::Gamma)]).with_covariates(&["a"]);
    let p1 = Params {
        streams: vec![StreamParams {
            per_state: vec![vec![1.0, 0.5], vec![5.0, 2.0]],
            zero_mass: None,
        }],
        beta: vec![-2.0, 1.0, -2.0, -1.0],
        delta: Some(vec![0.5, 0.5]),
    };
    let m = Model::new(&spec1, p1).unwrap();
    let drawn = m
        .simulate(
            &designs(3, 400, 8)
                .iter()
                .map(|d| SeriesDesign {
                    id: d.id.clone(),
                    len: d.len,
                    covariates: d.covariates.iter().step_by(2).copied().collect(),
                })
                .collect::<Vec<_>>(),
            5,
        )
        .unwrap();
    // add a second covariate b = 2a
    let series: Vec<Series> = drawn
        .data
        .series()
        .iter()
        .map(|s| {
            let cov: Vec<f64> = s.covariates().iter().flat_map(|&a| [a, 2.0 * a]).collect();
            Series::new(s.id(), s.streams().to_vec(), cov)
        })
        .collect();
    let data = Data::new(vec!["step".into()], vec!["a".into(), "b".into()], series).unwrap();
    let spec2 = ModelSpec::new(2, vec![StreamSpec::new("step", Family::Gamma)])
        .with_covariates(&["a", "b"]);
    let f = fit(
        &spec2,
        &data,
        &FitOptions {
            n_starts: 2,
            ..FitOptions::default()
        },
    )
    .unwrap();
    match f.covariance() {
        Covariance::NotPositiveDefinite { culprits, .. } => {
            assert!(!culprits.is_empty());
            let names: Vec<&str> = culprits[0]
                .loadings
                .iter()
                .take(2)
                .map(|l| l.0.as_str())
                .collect();
            assert!(
                names
                    .iter()
                    .all(|n| n.ends_with(": a") || n.ends_with(": b")),
                "{culprits:?}"
            );
        }
        other => panic!(
            "expected a non-positive-definite Hessian, got {:?}",
            other.problem()
        ),
    }
    assert!(f.natural_intervals(0.95, IntervalMethod::Delta).is_err());
}

// Pseudo-residuals of the true model are standard normal (ZML 2016 ch. 6), and those of a
// wrong model are not.
#[test]
fn pseudo_residuals_of_true_model_are_standard_normal() {
    let (spec, params) = truth();
    let model = Model::new(&spec, params.clone()).unwrap();
    let drawn = model.simulate(&designs(2, 2500, 9), 10).unwrap();
    let res = model.pseudo_residuals(&drawn.data).unwrap();
    for k in 0..2 {
        let r: Vec<f64> = res
            .iter()
            .flat_map(|s| s.streams[k].iter().copied())
            .collect();
        let n = r.len() as f64;
        let mean = r.iter().sum::<f64>() / n;
        let sd = (r.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / n).sqrt();
        assert!(
            mean.abs() < 0.06 && (sd - 1.0).abs() < 0.05,
            "stream {k}: mean {mean} sd {sd}"
        );
    }
    let mut wrong = params;
    for s in &mut wrong.streams[0].per_state {
        s[0] *= 1.5;
    }
    let wm = Model::new(&spec, wrong).unwrap();
    let r: Vec<f64> = wm
        .pseudo_residuals(&drawn.data)
        .unwrap()
        .iter()
        .flat_map(|s| s.streams[0].clone())
        .collect();
    let mean = r.iter().sum::<f64>() / r.len() as f64;
    assert!(
        mean < -0.2,
        "a model with too long steps gives negative residuals: {mean}"
    );
}

// AIC/BIC comparison (ZML 2016 ch. 6): a 2-state model beats 1 state on 2-state data.
#[test]
fn comparison_table_ranks_models() {
    let spec2 = ModelSpec::new(2, vec![StreamSpec::new("step", Family::Gamma)])
        .with_initial(InitialDistribution::Stationary);
    let p = Params {
        streams: vec![StreamParams {
            per_state: vec![vec![1.0, 0.5], vec![5.0, 2.0]],
            zero_mass: None,
        }],
        beta: vec![-2.5, -2.0],
        delta: None,
    };
    let m = Model::new(&spec2, p).unwrap();
    let d: Vec<SeriesDesign> = (0..3)
        .map(|k| SeriesDesign {
            id: format!("{k}"),
            len: 300,
            covariates: vec![],
        })
        .collect();
    let drawn = m.simulate(&d, 12).unwrap();
    let opts = FitOptions {
        n_starts: 2,
        hessian: false,
        ..FitOptions::default()
    };
    let f1 = fit(
        &ModelSpec {
            n_states: 1,
            ..spec2.clone()
        },
        &drawn.data,
        &opts,
    )
    .unwrap();
    let f2 = fit(&spec2, &drawn.data, &opts).unwrap();
    let table = compare(&[("one state", &f1), ("two states", &f2)]);
    assert_eq!(table[0].name, "two states");
    assert_eq!(table[0].delta_aic, 0.0);
    assert!(table[1].delta_aic > 10.0 && table[1].delta_bic > 10.0);
    assert_eq!(table[0].n_params, 6); // 2 × (mean, sd) + 2 off-diagonal intercepts
    assert!((f2.aic() - (-2.0 * f2.loglik() + 12.0)).abs() < 1e-9);
    assert!((f2.bic() - (-2.0 * f2.loglik() + 6.0 * 900f64.ln())).abs() < 1e-9);
}
