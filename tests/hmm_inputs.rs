//! Bad input is rejected with a typed error before any fitting (one test per case), the
//! design helper builds the documented columns, and fitted models survive a JSON round
//! trip.

use std::collections::BTreeMap;

use cairn::hmm::design::{Design, RawColumn};
use cairn::hmm::{
    Data, Family, FitOptions, FittedModel, HmmError, InitialDistribution, ModelSpec, Series,
    StreamSpec, fit,
};

fn steps() -> Vec<f64> {
    (0..40)
        .map(|t| {
            if (t / 5) % 2 == 0 {
                0.5 + 0.01 * t as f64
            } else {
                5.0 + 0.1 * t as f64
            }
        })
        .collect()
}
fn angles() -> Vec<f64> {
    (0..40)
        .map(|t| ((t * 37) % 60) as f64 / 10.0 - 3.0)
        .collect()
}
fn cov(k: usize) -> Vec<f64> {
    (0..40 * k).map(|i| ((i * 13) % 17) as f64 / 17.0).collect()
}
fn data_with(step: Vec<f64>, covs: Vec<f64>, names: &[&str]) -> Data {
    Data::new(
        vec!["step".into(), "angle".into()],
        names.iter().map(|s| s.to_string()).collect(),
        vec![Series::new("animal-1", vec![step, angles()], covs)],
    )
    .unwrap()
}
fn spec2() -> ModelSpec {
    ModelSpec::new(
        2,
        vec![
            StreamSpec::new("step", Family::Gamma),
            StreamSpec::new("angle", Family::VonMises),
        ],
    )
}
fn quick() -> FitOptions {
    FitOptions {
        n_starts: 1,
        hessian: false,
        ..FitOptions::default()
    }
}

#[test]
fn unknown_covariate() {
    let d = data_with(steps(), cov(1), &["temp"]);
    let e = fit(&spec2().with_covariates(&["tmp"]), &d, &quick()).unwrap_err();
    assert!(
        matches!(e, HmmError::UnknownCovariate { ref name, .. } if name == "tmp"),
        "{e}"
    );
    assert!(
        e.to_string().contains("temp"),
        "the message lists what is available: {e}"
    );
}

#[test]
fn unknown_stream() {
    let d = data_with(steps(), vec![], &[]);
    let spec = ModelSpec::new(2, vec![StreamSpec::new("speed", Family::Gamma)]);
    assert!(matches!(
        fit(&spec, &d, &quick()),
        Err(HmmError::UnknownStream { .. })
    ));
}

#[test]
fn constant_covariate() {
    let d = data_with(steps(), vec![1.0; 40], &["const"]);
    let e = fit(&spec2().with_covariates(&["const"]), &d, &quick()).unwrap_err();
    assert_eq!(e, HmmError::ConstantCovariate("const".into()));
}

#[test]
fn non_finite_covariate_names_series_and_row() {
    let mut c = cov(1);
    c[17] = f64::NAN;
    let d = data_with(steps(), c, &["temp"]);
    let e = fit(&spec2().with_covariates(&["temp"]), &d, &quick()).unwrap_err();
    match e {
        HmmError::NonFiniteCovariate {
            name, series, row, ..
        } => {
            assert_eq!(
                (name.as_str(), series.as_str(), row),
                ("temp", "animal-1", 17)
            );
        }
        other => panic!("{other}"),
    }
}

#[test]
fn too_many_states_for_the_data() {
    let short = Data::new(
        vec!["step".into(), "angle".into()],
        vec![],
        vec![Series::new(
            "a",
            vec![vec![1.0, 2.0, 3.0, 4.0], vec![0.1, 0.2, 0.3, 0.4]],
            vec![],
        )],
    )
    .unwrap();
    let spec = ModelSpec::new(
        6,
        vec![
            StreamSpec::new("step", Family::Gamma),
            StreamSpec::new("angle", Family::VonMises),
        ],
    );
    assert!(matches!(
        fit(&spec, &short, &quick()),
        Err(HmmError::TooManyStates { .. })
    ));
    let bad = ModelSpec {
        n_states: 7,
        ..spec2()
    };
    assert_eq!(
        fit(&bad, &short, &quick()).unwrap_err(),
        HmmError::InvalidStateCount(7)
    );
}

#[test]
fn stream_entirely_missing() {
    let d = data_with(vec![f64::NAN; 40], vec![], &[]);
    assert_eq!(
        fit(&spec2(), &d, &quick()).unwrap_err(),
        HmmError::StreamAllMissing("step".into())
    );
}

#[test]
fn zero_step_without_zero_mass() {
    let mut s = steps();
    s[3] = 0.0;
    let d = data_with(s, vec![], &[]);
    let e = fit(&spec2(), &d, &quick()).unwrap_err();
    assert!(
        matches!(e, HmmError::ZeroWithoutZeroMass { row: 3, .. }),
        "{e}"
    );
    // with a zero mass the same data fit
    let spec = ModelSpec::new(
        2,
        vec![
            StreamSpec::new("step", Family::Gamma).with_zero_mass(),
            StreamSpec::new("angle", Family::VonMises),
        ],
    );
    let mut s = steps();
    s[3] = 0.0;
    s[30] = 0.0;
    let f = fit(&spec, &data_with(s, vec![], &[]), &quick()).unwrap();
    assert!(f.params().streams[0].zero_mass.is_some());
}

#[test]
fn negative_step_length() {
    let mut s = steps();
    s[9] = -0.2;
    let d = data_with(s, vec![], &[]);
    let e = fit(&spec2(), &d, &quick()).unwrap_err();
    assert!(matches!(e, HmmError::NegativeValue { row: 9, .. }), "{e}");
}

#[test]
fn zero_mass_on_an_angle_is_rejected() {
    let spec = ModelSpec::new(
        2,
        vec![StreamSpec::new("angle", Family::VonMises).with_zero_mass()],
    );
    assert_eq!(
        spec.check().unwrap_err(),
        HmmError::ZeroMassNotAllowed("angle".into())
    );
}

#[test]
fn shape_errors_name_the_series() {
    let e = Data::new(
        vec!["step".into()],
        vec!["c".into()],
        vec![Series::new("x7", vec![vec![1.0, 2.0]], vec![0.5])],
    )
    .unwrap_err();
    assert!(matches!(e, HmmError::Shape { ref series, .. } if series == "x7"));
}

// Reference coding and harmonic columns as defined in ZML (2016), chapter on covariate-dependent transitions.
#[test]
fn design_helper_builds_named_columns() {
    let mut cols = BTreeMap::new();
    cols.insert("temp".to_string(), RawColumn::Numeric(vec![1.0, 2.0, 3.0]));
    cols.insert("hour".to_string(), RawColumn::Numeric(vec![0.0, 6.0, 12.0]));
    cols.insert(
        "habitat".to_string(),
        RawColumn::Categorical(vec!["open".into(), "forest".into(), "wet".into()]),
    );
    let m = Design::new()
        .numeric("temp")
        .categorical("habitat", "forest")
        .cyclic("hour", 24.0)
        .interaction("temp", "habitat")
        .build(&cols)
        .unwrap();
    assert_eq!(
        m.names(),
        [
            "temp",
            "habitat=open",
            "habitat=wet",
            "cos(2*pi*hour/24)",
            "sin(2*pi*hour/24)",
            "temp:habitat=open",
            "temp:habitat=wet"
        ]
    );
    let row2 = m.rows(2, 3);
    assert_eq!(row2[0], 3.0);
    assert_eq!((row2[1], row2[2]), (0.0, 1.0));
    assert!((row2[3] + 1.0).abs() < 1e-15 && row2[4].abs() < 1e-15);
    assert_eq!((row2[5], row2[6]), (0.0, 3.0));
    let e = Design::new()
        .categorical("habitat", "desert")
        .build(&cols)
        .unwrap_err();
    assert!(matches!(e, HmmError::Design(_)));
    let e = Design::new().numeric("depth").build(&cols).unwrap_err();
    assert!(matches!(e, HmmError::UnknownCovariate { .. }));
}

#[test]
fn fitted_model_json_round_trip() {
    let d = data_with(steps(), cov(1), &["temp"]);
    let spec = spec2()
        .with_covariates(&["temp"])
        .with_initial(InitialDistribution::Stationary)
        .with_labels(&["resting", "travelling"]);
    let f = fit(
        &spec,
        &d,
        &FitOptions {
            n_starts: 2,
            ..FitOptions::default()
        },
    )
    .unwrap();
    let dir = std::env::temp_dir().join(format!("cairn-hmm-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let path = dir.join("model.json");
    f.save(&path).unwrap();
    let g = FittedModel::load(&path).unwrap();
    std::fs::remove_dir_all(&dir).ok();
    assert_eq!(f.model(), g.model());
    assert_eq!(f.loglik().to_bits(), g.loglik().to_bits());
    assert_eq!(f.covariance(), g.covariance());
    assert_eq!(f.convergence(), g.convergence());
    assert_eq!(
        g.model().valid_spec().state_labels(),
        ["resting", "travelling"]
    );
    let text = f.to_json().unwrap();
    assert!(text.contains("\"format\": \"cairn-hmm-model\""));
    assert!(text.contains("\"covariate_scaling\": null"));
    let bad = text.replace("cairn-hmm-model", "something-else");
    assert!(matches!(FittedModel::from_json(&bad), Err(HmmError::Io(_))));
}

#[test]
fn a_failing_start_is_recorded_and_all_failing_is_an_error() {
    let d = data_with(steps(), vec![], &[]);
    let spec = ModelSpec::new(1, vec![StreamSpec::new("step", Family::Gamma)]);
    let bad_start = cairn::hmm::Params {
        streams: vec![cairn::hmm::StreamParams {
            per_state: vec![vec![1.0, -1.0]],
            zero_mass: None,
        }],
        beta: vec![],
        delta: Some(vec![1.0]),
    };
    let only_bad = FitOptions {
        n_starts: 1,
        start: Some(bad_start.clone()),
        ..quick()
    };
    match fit(&spec, &d, &only_bad).unwrap_err() {
        HmmError::AllStartsFailed(why) => assert!(why.contains("sd"), "{why}"),
        other => panic!("{other}"),
    }
    // with a second (data-driven random) start the fit goes on and records the failure
    let two = FitOptions {
        n_starts: 2,
        start: Some(bad_start),
        ..quick()
    };
    let f = fit(&spec, &d, &two).unwrap();
    assert_eq!(f.convergence().n_failed, 1);
    assert!(f.starts()[0].failure.is_some() && f.starts()[1].loglik.is_some());
}
