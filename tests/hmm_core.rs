//! Invariant tests of the engine: brute-force enumeration of state paths, exact gradient
//! against finite differences for every family, stationary distribution against an
//! independent null-space computation, long series, thread-count independence.

use cairn::hmm::dists::log_density;
use cairn::hmm::simulate::SeriesDesign;
use cairn::hmm::transitions::{stationary, transition_matrix};
use cairn::hmm::{
    Data, Family, InitialDistribution, Model, ModelSpec, Objective, Params, Series, StreamParams,
    StreamSpec,
};
use nalgebra::DMatrix;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

/// A 3-state model with gamma (zero mass) + von Mises streams and 2 covariates.
fn model3(initial: InitialDistribution) -> (ModelSpec, Params) {
    let spec = ModelSpec::new(
        3,
        vec![
            StreamSpec::new("step", Family::Gamma).with_zero_mass(),
            StreamSpec::new("angle", Family::VonMises),
        ],
    )
    .with_covariates(&["x1", "x2"])
    .with_initial(initial);
    let params = Params {
        streams: vec![
            StreamParams {
                per_state: vec![vec![0.5, 0.4], vec![2.0, 1.5], vec![6.0, 3.0]],
                zero_mass: Some(vec![0.1, 0.05, 0.02]),
            },
            StreamParams {
                per_state: vec![vec![3.0, 0.5], vec![0.1, 2.0], vec![-0.2, 5.0]],
                zero_mass: None,
            },
        ],
        beta: vec![
            -1.5, 0.4, -0.3, -2.0, 0.2, 0.1, -1.0, -0.5, 0.3, -1.8, 0.0, 0.6, -2.2, 0.3, -0.2,
            -1.2, 0.1, 0.4,
        ],
        delta: match initial {
            InitialDistribution::Estimated => Some(vec![0.5, 0.3, 0.2]),
            InitialDistribution::Stationary => None,
        },
    };
    (spec, params)
}

fn short_data() -> Data {
    // 2 series, with missing values in both streams and a zero step
    let s1 = Series::new(
        "a",
        vec![
            vec![0.3, f64::NAN, 2.5, 0.0, 7.1, 1.2],
            vec![0.2, -2.9, f64::NAN, 1.0, 0.05, f64::NAN],
        ],
        vec![
            0.1, -1.0, 0.5, 0.3, -0.7, 1.2, 1.5, 0.0, 0.2, -0.4, -1.1, 0.9,
        ],
    );
    let s2 = Series::new(
        "b",
        vec![
            vec![4.0, 0.8, f64::NAN, 3.3, 0.6],
            vec![0.0, 2.0, -1.0, f64::NAN, 3.1],
        ],
        vec![0.0, 0.0, 1.0, 1.0, -1.0, 2.0, 0.5, -0.5, 0.25, 0.75],
    );
    Data::new(
        vec!["step".into(), "angle".into()],
        vec!["x1".into(), "x2".into()],
        vec![s1, s2],
    )
    .unwrap()
}

/// log f_j(x_t) for the brute-force reference, written from the natural parameters.
fn brute_log_dens(p: &Params, j: usize, step: f64, angle: f64) -> f64 {
    let mut l = 0.0;
    if !step.is_nan() {
        let z = p.streams[0].zero_mass.as_ref().unwrap()[j];
        l += if step == 0.0 {
            z.ln()
        } else {
            (1.0 - z).ln() + log_density(Family::Gamma, &p.streams[0].per_state[j], step)
        };
    }
    if !angle.is_nan() {
        l += log_density(Family::VonMises, &p.streams[1].per_state[j], angle);
    }
    l
}

// Reference: direct enumeration of all N^T state paths, Pr(x) = Σ_s Pr(s) Pr(x | s)
// (the definition of the HMM likelihood, Zucchini, MacDonald & Langrock 2016, ch. 2).
#[test]
fn brute_force_enumeration_matches_forward_viterbi_and_posteriors() {
    for initial in [
        InitialDistribution::Estimated,
        InitialDistribution::Stationary,
    ] {
        let (spec, params) = model3(initial);
        let model = Model::new(&spec, params).unwrap();
        let p = model.params().clone();
        let data = short_data();
        let n = 3;
        let mut total_ll = 0.0;
        let vit = model.viterbi(&data).unwrap();
        let post = model.state_probabilities(&data).unwrap();
        for (si, s) in data.series().iter().enumerate() {
            let t_len = s.len();
            let cov = |t: usize| &s.covariates()[t * 2..t * 2 + 2];
            let delta = match &p.delta {
                Some(d) => d.clone(),
                None => stationary(&transition_matrix(&p, n, cov(0))).unwrap(),
            };
            let gams: Vec<DMatrix<f64>> = (0..t_len)
                .map(|t| transition_matrix(&p, n, cov(t)))
                .collect();
            let mut lik = 0.0;
            let mut best = (f64::NEG_INFINITY, vec![]);
            let mut marg = vec![0.0; t_len * n];
            for code in 0..n.pow(t_len as u32) {
                let path: Vec<usize> = (0..t_len).map(|t| (code / n.pow(t as u32)) % n).collect();
                let mut lp = delta[path[0]].ln();
                for t in 0..t_len {
                    if t > 0 {
                        lp += gams[t - 1][(path[t - 1], path[t])].ln();
                    }
                    lp += brute_log_dens(&p, path[t], s.stream(0)[t], s.stream(1)[t]);
                }
                lik += lp.exp();
                for t in 0..t_len {
                    marg[t * n + path[t]] += lp.exp();
                }
                if lp > best.0 {
                    best = (lp, path);
                }
            }
            total_ll += lik.ln();
            assert_eq!(
                vit[si].states, best.1,
                "Viterbi path, series {si}, {initial:?}"
            );
            assert!((vit[si].log_prob - best.0).abs() < 1e-12 * best.0.abs().max(1.0));
            for t in 0..t_len {
                for j in 0..n {
                    let want = marg[t * n + j] / lik;
                    assert!(
                        (post[si].get(t, j) - want).abs() < 1e-12,
                        "state probability t={t} j={j}: {} vs {want}",
                        post[si].get(t, j)
                    );
                }
            }
        }
        let ll = model.log_likelihood(&data).unwrap();
        assert!(
            (ll - total_ll).abs() < 1e-12 * total_ll.abs(),
            "{ll} vs {total_ll} ({initial:?})"
        );
    }
}

fn spec_for(family: Family, initial: InitialDistribution) -> (ModelSpec, Params) {
    let zero = family.is_positive();
    let mut ss = StreamSpec::new("y", family);
    if zero {
        ss = ss.with_zero_mass();
    }
    let per_state = match family {
        Family::Gamma => vec![vec![1.0, 0.7], vec![4.0, 2.0]],
        Family::Weibull => vec![vec![0.9, 1.0], vec![2.0, 4.0]],
        Family::LogNormal => vec![vec![0.0, 0.5], vec![1.2, 0.8]],
        Family::Normal => vec![vec![-1.0, 0.7], vec![2.0, 1.5]],
        Family::Poisson => vec![vec![2.0], vec![9.0]],
        Family::VonMises => vec![vec![2.5, 0.8], vec![0.2, 4.0]],
        Family::WrappedCauchy => vec![vec![-2.8, 0.3], vec![0.3, 0.8]],
    };
    let spec = ModelSpec::new(2, vec![ss, StreamSpec::new("z", Family::Normal)])
        .with_covariates(&["c"])
        .with_initial(initial);
    let params = Params {
        streams: vec![
            StreamParams {
                per_state,
                zero_mass: zero.then(|| vec![0.05, 0.15]),
            },
            StreamParams {
                per_state: vec![vec![0.0, 1.0], vec![0.5, 2.0]],
                zero_mass: None,
            },
        ],
        beta: vec![-1.5, 0.8, -1.0, -0.6],
        delta: (initial == InitialDistribution::Estimated).then(|| vec![0.3, 0.7]),
    };
    (spec, params)
}

fn designs(n_series: usize, len: usize, p: usize, seed: u64) -> Vec<SeriesDesign> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    (0..n_series)
        .map(|k| SeriesDesign {
            id: format!("s{k}"),
            len,
            covariates: (0..len * p).map(|_| rng.random_range(-1.5..1.5)).collect(),
        })
        .collect()
}

/// Punches NaN holes into the simulated streams (every 7th value of each stream).
fn with_missing(data: &Data) -> Data {
    let series = data
        .series()
        .iter()
        .map(|s| {
            let streams = s
                .streams()
                .iter()
                .enumerate()
                .map(|(k, v)| {
                    v.iter()
                        .enumerate()
                        .map(|(t, &x)| if (t + 3 * k) % 7 == 0 { f64::NAN } else { x })
                        .collect()
                })
                .collect();
            Series::new(s.id(), streams, s.covariates().to_vec())
        })
        .collect();
    Data::new(
        data.stream_names().to_vec(),
        data.covariate_names().to_vec(),
        series,
    )
    .unwrap()
}

// Reference: central finite differences of the forward-algorithm log-likelihood
// (Nocedal & Wright 2006, ch. 8); the analytic gradient comes from forward–backward.
#[test]
fn gradient_matches_finite_differences_for_every_family() {
    let families = [
        Family::Gamma,
        Family::Weibull,
        Family::LogNormal,
        Family::Normal,
        Family::Poisson,
        Family::VonMises,
        Family::WrappedCauchy,
    ];
    for family in families {
        for initial in [
            InitialDistribution::Estimated,
            InitialDistribution::Stationary,
        ] {
            let (spec, params) = spec_for(family, initial);
            let model = Model::new(&spec, params).unwrap();
            let drawn = model.simulate(&designs(3, 80, 1, 7), 11).unwrap();
            let data = with_missing(&drawn.data);
            let obj = Objective::new(&spec, &data).unwrap();
            // evaluate away from the truth so that the gradient is not ~0
            let mut rng = ChaCha8Rng::seed_from_u64(3);
            let th: Vec<f64> = model
                .working()
                .iter()
                .map(|w| w + rng.random_range(-0.3..0.3))
                .collect();
            let (ll, g) = obj.evaluate(&th);
            assert!(ll.is_finite());
            let names = obj.valid_spec().working_names();
            for k in 0..th.len() {
                let h = 1e-5 * th[k].abs().max(1.0);
                let mut tp = th.clone();
                tp[k] += h;
                let mut tm = th.clone();
                tm[k] -= h;
                let fd = (obj.loglik(&tp) - obj.loglik(&tm)) / (2.0 * h);
                let tol = 1e-6 * fd.abs().max(1.0);
                assert!(
                    (g[k] - fd).abs() < tol,
                    "{family:?} {initial:?} {}: analytic {} vs finite difference {fd}",
                    names[k],
                    g[k]
                );
            }
        }
    }
}

// Reference: the left eigenvector of Γ for eigenvalue 1, computed as the null space of
// (Γᵀ − I) by nalgebra's SVD — a different method from our linear solve.
#[test]
fn stationary_distribution_is_left_eigenvector() {
    let mut rng = ChaCha8Rng::seed_from_u64(42);
    for n in 2..=6 {
        for _ in 0..5 {
            let mut g = DMatrix::from_fn(n, n, |_, _| rng.random_range(0.01..1.0));
            for i in 0..n {
                let s = g.row(i).sum();
                g.row_mut(i).iter_mut().for_each(|x| *x /= s);
            }
            let d = stationary(&g).unwrap();
            let m = g.transpose() - DMatrix::identity(n, n);
            let svd = m.svd(false, true);
            let v_t = svd.v_t.unwrap();
            let (k, _) = svd
                .singular_values
                .iter()
                .enumerate()
                .min_by(|a, b| a.1.total_cmp(b.1))
                .unwrap();
            let v: Vec<f64> = v_t.row(k).iter().copied().collect();
            let s: f64 = v.iter().sum();
            for j in 0..n {
                assert!((d[j] - v[j] / s).abs() < 1e-12, "n={n}: {d:?} vs {v:?}");
            }
            let dg = nalgebra::RowDVector::from_vec(d.clone()) * &g;
            for j in 0..n {
                assert!((dg[j] - d[j]).abs() < 1e-13);
            }
        }
    }
}

// Reference: rows of a multinomial logit sum to one by construction (ZML 2016, chapter on covariate-dependent transitions).
#[test]
fn transition_rows_sum_to_one() {
    let (spec, params) = model3(InitialDistribution::Estimated);
    let model = Model::new(&spec, params).unwrap();
    for x in [[0.0, 0.0], [30.0, -40.0], [-1.0, 2.5]] {
        let g = model.transition_matrix(&x);
        for i in 0..3 {
            assert!((g.row(i).sum() - 1.0).abs() < 1e-14);
            assert!(g.row(i).iter().all(|&v| (0.0..=1.0).contains(&v)));
        }
    }
}

// Reference: ZML 2016, ch. 3 — the scaled forward algorithm does not underflow; a series
// of 10^6 steps must give a finite log-likelihood.
#[test]
fn million_step_series_has_finite_loglik() {
    let (spec, params) = model3(InitialDistribution::Stationary);
    let model = Model::new(&spec, params).unwrap();
    let drawn = model.simulate(&designs(1, 1_000_000, 2, 5), 9).unwrap();
    let ll = model.log_likelihood(&drawn.data).unwrap();
    assert!(ll.is_finite(), "{ll}");
    assert!(ll < 0.0);
}

// Invariant (style guide §10): the thread count changes nothing, bitwise.
#[test]
fn thread_count_does_not_change_results() {
    let (spec, params) = model3(InitialDistribution::Estimated);
    let model = Model::new(&spec, params).unwrap();
    let drawn = model.simulate(&designs(9, 500, 2, 1), 2).unwrap();
    let obj = Objective::new(&spec, &drawn.data).unwrap();
    let th = model.working().to_vec();
    let run = |threads: usize| {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap();
        pool.install(|| obj.evaluate(&th))
    };
    let (l1, g1) = run(1);
    let (l2, g2) = run(2);
    let (l3, g3) = run(3);
    assert_eq!(l1.to_bits(), l2.to_bits());
    assert_eq!(l1.to_bits(), l3.to_bits());
    for k in 0..g1.len() {
        assert_eq!(g1[k].to_bits(), g2[k].to_bits());
        assert_eq!(g1[k].to_bits(), g3[k].to_bits());
    }
}

// Invariant: series are independent — the total is the sum over series, whatever
// their order.
#[test]
fn reordering_series_changes_only_rounding() {
    let (spec, params) = model3(InitialDistribution::Stationary);
    let model = Model::new(&spec, params).unwrap();
    let drawn = model.simulate(&designs(5, 200, 2, 3), 4).unwrap();
    let mut rev: Vec<Series> = drawn.data.series().to_vec();
    rev.reverse();
    let data2 = Data::new(
        drawn.data.stream_names().to_vec(),
        drawn.data.covariate_names().to_vec(),
        rev,
    )
    .unwrap();
    let a = model.log_likelihood(&drawn.data).unwrap();
    let b = model.log_likelihood(&data2).unwrap();
    assert!((a - b).abs() < 1e-9 * a.abs());
}

// Invariant (style guide §10): the scaled forward pass equals a log-space forward pass
// (log-sum-exp recursion, ZML 2016, ch. 3) written here from the public densities and
// transition matrices, on long series with covariates and missing values.
#[test]
fn scaled_and_log_space_forward_agree() {
    let (spec, params) = model3(InitialDistribution::Stationary);
    let model = Model::new(&spec, params).unwrap();
    let drawn = model.simulate(&designs(3, 3000, 2, 21), 22).unwrap();
    let data = with_missing(&drawn.data);
    let p = model.params().clone();
    let n = 3;
    let mut total = 0.0;
    for s in data.series() {
        let cov = |t: usize| &s.covariates()[t * 2..t * 2 + 2];
        let delta = stationary(&transition_matrix(&p, n, cov(0))).unwrap();
        let mut la: Vec<f64> = (0..n)
            .map(|j| delta[j].ln() + brute_log_dens(&p, j, s.stream(0)[0], s.stream(1)[0]))
            .collect();
        for t in 1..s.len() {
            let g = transition_matrix(&p, n, cov(t - 1));
            la = (0..n)
                .map(|j| {
                    let terms: Vec<f64> = (0..n).map(|i| la[i] + g[(i, j)].ln()).collect();
                    let m = terms.iter().copied().fold(f64::NEG_INFINITY, f64::max);
                    m + terms.iter().map(|x| (x - m).exp()).sum::<f64>().ln()
                        + brute_log_dens(&p, j, s.stream(0)[t], s.stream(1)[t])
                })
                .collect();
        }
        let m = la.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        total += m + la.iter().map(|x| (x - m).exp()).sum::<f64>().ln();
    }
    let ll = model.log_likelihood(&data).unwrap();
    assert!(
        (ll - total).abs() < 1e-10 * total.abs(),
        "scaled {ll} vs log-space {total}"
    );
}
