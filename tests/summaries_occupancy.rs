//! State-occupancy curves: invariants of the stationary distribution (Zucchini, MacDonald
//! & Langrock 2016, §2.3: δΓ = δ, Σδ = 1), flatness without a covariate effect, and
//! intervals that shrink with more data (seeded simulation).

use std::collections::BTreeMap;

use cairn::hmm::design::RawColumn;
use cairn::hmm::simulate::SeriesDesign;
use cairn::hmm::{
    Family, FitOptions, InitialDistribution, Model, ModelSpec, Params, StreamParams, StreamSpec,
    fit,
};
use cairn::study::model::Term;
use cairn::summaries::occupancy::{OccupancyOptions, occupancy_curves, stationary_curves};

fn spec() -> ModelSpec {
    ModelSpec::new(2, vec![StreamSpec::new("step", Family::Gamma)])
        .with_covariates(&["temp"])
        .with_initial(InitialDistribution::Stationary)
}

/// Two states (slow 100 ± 80 m, fast 900 ± 500 m); warmer water raises the odds of
/// switching from slow to fast by exp(slope) per unit (and lower those of the way back).
fn params(slope: f64) -> Params {
    Params {
        streams: vec![StreamParams {
            per_state: vec![vec![100.0, 80.0], vec![900.0, 500.0]],
            zero_mass: None,
        }],
        beta: vec![-2.0, slope, -1.5, -0.3 * slope],
        delta: None,
    }
}

fn covariate(series: usize, len: usize) -> Vec<f64> {
    // A smooth, deterministic temperature signal in [-2, 2].
    (0..series * len)
        .map(|k| 2.0 * ((k as f64) * 0.013).sin())
        .collect()
}

fn fitted(series: usize, len: usize) -> (cairn::hmm::FittedModel, BTreeMap<String, RawColumn>) {
    let truth = Model::new(&spec(), params(1.0)).unwrap();
    let temp = covariate(series, len);
    let designs: Vec<SeriesDesign> = (0..series)
        .map(|s| SeriesDesign {
            id: format!("a{s}"),
            len,
            covariates: temp[s * len..(s + 1) * len].to_vec(),
        })
        .collect();
    let drawn = truth.simulate(&designs, 7).unwrap();
    let f = fit(
        &spec(),
        &drawn.data,
        &FitOptions {
            n_starts: 2,
            seed: 3,
            ..FitOptions::default()
        },
    )
    .unwrap();
    let mut obs = BTreeMap::new();
    obs.insert("temp".to_string(), RawColumn::Numeric(temp));
    (f, obs)
}

fn terms() -> Vec<Term> {
    vec![Term::Numeric {
        column: "temp".into(),
    }]
}

#[test]
fn stationary_curve_is_stationary_and_sums_to_one() {
    let (f, obs) = fitted(6, 400);
    let occ = occupancy_curves(&f, &terms(), &obs, &OccupancyOptions::default()).unwrap();
    assert_eq!(occ.stationary.len(), 41 * 2);
    assert_eq!(occ.transitions.len(), 41 * 4);
    for pair in occ.stationary.chunks(2) {
        let x = pair[0].value;
        let d = [pair[0].estimate, pair[1].estimate];
        assert!((d[0] + d[1] - 1.0).abs() < 1e-12);
        let g = f.model().transition_matrix(&[x]);
        for j in 0..2 {
            let dg: f64 = (0..2).map(|i| d[i] * g[(i, j)]).sum();
            assert!((dg - d[j]).abs() < 1e-12, "δΓ ≠ δ at x = {x}");
        }
        for r in pair {
            assert!(r.lower <= r.estimate && r.estimate <= r.upper);
        }
    }
    // Transition rows sum to one.
    for row in occ.transitions.chunks(2) {
        assert!((row[0].estimate + row[1].estimate - 1.0).abs() < 1e-12);
    }
    // The grid spans the observed range of the covariate.
    let xs: Vec<f64> = occ.stationary.iter().map(|r| r.value).collect();
    let obs_max = match &obs["temp"] {
        RawColumn::Numeric(v) => v.iter().copied().fold(f64::MIN, f64::max),
        RawColumn::Categorical(_) => unreachable!(),
    };
    assert!((xs.last().unwrap() - obs_max).abs() < 1e-12);
}

#[test]
fn no_covariate_effect_gives_a_flat_curve() {
    let obs: BTreeMap<String, RawColumn> =
        [("temp".to_string(), RawColumn::Numeric(covariate(1, 500)))].into();
    let flat = Model::new(&spec(), params(0.0)).unwrap();
    let curve = stationary_curves(&flat, &terms(), &obs, &OccupancyOptions::default()).unwrap();
    let first = &curve[0].2;
    assert!(
        curve
            .iter()
            .all(|(_, _, d)| (d[0] - first[0]).abs() < 1e-12)
    );
    // With an effect the same grid is not flat: the check can fail.
    let sloped = Model::new(&spec(), params(1.0)).unwrap();
    let curve = stationary_curves(&sloped, &terms(), &obs, &OccupancyOptions::default()).unwrap();
    let spread = curve.iter().map(|c| c.2[0]).fold(f64::MIN, f64::max)
        - curve.iter().map(|c| c.2[0]).fold(f64::MAX, f64::min);
    assert!(spread > 0.1, "{spread}");
}

#[test]
fn intervals_shrink_with_more_data() {
    let width = |series: usize| {
        let (f, obs) = fitted(series, 400);
        let occ = occupancy_curves(&f, &terms(), &obs, &OccupancyOptions::default()).unwrap();
        occ.stationary
            .iter()
            .map(|r| r.upper - r.lower)
            .sum::<f64>()
            / occ.stationary.len() as f64
    };
    let small = width(3);
    let large = width(12);
    assert!(
        large < 0.75 * small,
        "mean width {large} (12 series) vs {small} (3 series)"
    );
}
