//! Association table: odds ratios of the multinomial-logit transition model (diagonal as
//! reference; Zucchini, MacDonald & Langrock 2016, §10.2) with Wald intervals. The normal
//! quantile 1.959964 for a 95% interval is from the standard normal table (Abramowitz &
//! Stegun 1964, Table 26.1). A seeded simulation checks that the interval covers the true
//! coefficient, and the per-unit column is checked against the recorded standardisation.

use cairn::hmm::io::CovariateScaling;
use cairn::hmm::simulate::SeriesDesign;
use cairn::hmm::{
    Family, FitOptions, InitialDistribution, Model, ModelSpec, Params, StreamParams, StreamSpec,
    fit,
};
use cairn::summaries::association::{TermKind, association_table};

const Z95: f64 = 1.959964;

fn spec(covariates: &[&str]) -> ModelSpec {
    ModelSpec::new(2, vec![StreamSpec::new("step", Family::Gamma)])
        .with_covariates(covariates)
        .with_initial(InitialDistribution::Stationary)
        .with_labels(&["rest", "travel"])
}

/// rest → travel: intercept −2, slope +1 per sd of depth; travel → rest: −1.5, −0.4.
fn truth() -> Params {
    Params {
        streams: vec![StreamParams {
            per_state: vec![vec![100.0, 80.0], vec![900.0, 500.0]],
            zero_mass: None,
        }],
        beta: vec![-2.0, 1.0, -1.5, -0.4],
        delta: None,
    }
}

/// Depth in metres is 40 + 12·z with z the standardised signal the model sees.
const CENTRE: f64 = 40.0;
const SD: f64 = 12.0;

fn fitted() -> cairn::hmm::FittedModel {
    let series = 6;
    let len = 1500;
    let z: Vec<f64> = (0..series * len)
        .map(|k| 1.5 * ((k as f64) * 0.011).sin())
        .collect();
    let designs: Vec<SeriesDesign> = (0..series)
        .map(|s| SeriesDesign {
            id: format!("a{s}"),
            len,
            covariates: z[s * len..(s + 1) * len].to_vec(),
        })
        .collect();
    let model = Model::new(&spec(&["depth"]), truth()).unwrap();
    let drawn = model.simulate(&designs, 11).unwrap();
    let mut f = fit(
        &spec(&["depth"]),
        &drawn.data,
        &FitOptions {
            n_starts: 2,
            seed: 5,
            ..FitOptions::default()
        },
    )
    .unwrap();
    f.set_covariate_scaling(vec![CovariateScaling {
        name: "depth".into(),
        center: CENTRE,
        scale: SD,
    }]);
    f
}

#[test]
fn odds_ratios_follow_the_coefficients_and_cover_the_truth() {
    let f = fitted();
    let labels = vec!["rest".to_string(), "travel".to_string()];
    let unit = |c: &str| (c == "depth").then(|| "m".to_string());
    let t = association_table(&f, &labels, &unit, 0.95).unwrap();
    assert_eq!(
        t.rows.len(),
        2,
        "one row per off-diagonal switch and covariate"
    );
    let truth_beta = [1.0, -0.4];
    for (r, truth) in t.rows.iter().zip(truth_beta) {
        assert_eq!(r.kind, TermKind::Standardised);
        assert_eq!(r.sd, Some(SD));
        assert_eq!(r.unit, "m");
        // Odds ratio per sd and its Wald interval.
        let or = r.odds_ratio;
        assert!((or.estimate - r.coefficient.exp()).abs() < 1e-12);
        assert!((or.lower - (r.coefficient - Z95 * r.se).exp()).abs() < 1e-5 * or.lower);
        assert!((or.upper - (r.coefficient + Z95 * r.se).exp()).abs() < 1e-5 * or.upper);
        // Per metre: the coefficient divided by the sd.
        let pu = r.odds_ratio_per_unit.unwrap();
        assert!((pu.estimate - (r.coefficient / SD).exp()).abs() < 1e-12);
        assert!((pu.estimate.powf(SD) - or.estimate).abs() < 1e-9 * or.estimate);
        assert!((pu.lower.powf(SD) - or.lower).abs() < 1e-9 * or.lower.max(1.0));
        // Wald duality: the 95% interval excludes 1 exactly when p < 0.05.
        assert_eq!(or.excludes_one(), r.p < 0.05, "row {r:?}");
        assert!((r.z - r.coefficient / r.se).abs() < 1e-12);
        // Seeded simulation: the interval covers the true coefficient.
        assert!(
            r.coefficient - Z95 * r.se < truth && truth < r.coefficient + Z95 * r.se,
            "{truth} not in the interval of {r:?}"
        );
    }
    let first = &t.rows[0];
    assert_eq!((first.from.as_str(), first.to.as_str()), ("rest", "travel"));
    assert!(
        first.reading.contains(
            "multiplies the odds of switching from rest to travel (rather than staying rest)"
        ),
        "{}",
        first.reading
    );
    assert!(
        first.reading.contains("each +1 sd (12.0 m) of depth"),
        "{}",
        first.reading
    );
    // The strong effect is clear; the reading says so without a caveat.
    assert!(first.odds_ratio.excludes_one());
    assert!(!first.reading.contains("not clear"));

    let mut csv = Vec::new();
    t.write_csv(&mut csv).unwrap();
    let text = String::from_utf8(csv).unwrap();
    assert_eq!(text.lines().count(), 3);
    assert!(
        text.lines()
            .next()
            .unwrap()
            .starts_with("from,to,term,kind,coefficient,se")
    );
}

#[test]
fn a_model_without_covariates_has_no_association_table() {
    let designs = vec![SeriesDesign {
        id: "a".into(),
        len: 400,
        covariates: vec![],
    }];
    let p = Params {
        streams: truth().streams,
        beta: vec![-2.0, -1.5],
        delta: None,
    };
    let drawn = Model::new(&spec(&[]), p)
        .unwrap()
        .simulate(&designs, 2)
        .unwrap();
    let f = fit(
        &spec(&[]),
        &drawn.data,
        &FitOptions {
            n_starts: 1,
            ..FitOptions::default()
        },
    )
    .unwrap();
    let labels = vec!["rest".to_string(), "travel".to_string()];
    let err = association_table(&f, &labels, &|_| None, 0.95).unwrap_err();
    assert!(err.to_string().contains("no covariates"), "{err}");
    let err = association_table(&f, &labels, &|_| None, 1.5).unwrap_err();
    assert!(err.to_string().contains("level"), "{err}");
}
