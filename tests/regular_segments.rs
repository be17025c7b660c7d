//! Gap splitting, the grid rule, the outlier rule, input guards and settings validation
//! of `tracks::regular` (behaviour specified in the module documentation).

mod regular_sim;

use cairn::tracks::class::LocClass;
use cairn::tracks::regular::{
    ClassErrors, ConfigError, ErrorCovariance, Fix, ObservationError, OutlierSettings,
    RegularError, RegularSettings, regularise, regularise_many,
};
use regular_sim::{START_S, simulate};

const BETA: f64 = 1.0 / (4.0 * 3600.0);
const DAY: f64 = 86_400.0;

fn sigma() -> f64 {
    (2.0 * BETA * 0.25_f64).sqrt()
}

/// A simulated track with every fix after `cut` shifted later by `shift` seconds.
fn with_gap(cut: usize, shift: f64) -> Vec<Fix> {
    let mut fixes = simulate(3, 300, 1_800.0, BETA, sigma(), &ClassErrors::default(), 1.0).fixes;
    for f in &mut fixes[cut..] {
        f.time += shift;
    }
    fixes
}

#[test]
fn long_gaps_split_segments_and_hold_no_prediction() {
    let settings = RegularSettings {
        gap_threshold_s: DAY,
        ..RegularSettings::default()
    };
    let config = settings.validate().unwrap();
    let fixes = with_gap(150, 3.0 * DAY);
    let track = regularise(&fixes, &config).unwrap();
    let segs = track.segments();
    assert_eq!(segs.len(), 2);
    assert_eq!(segs[0].n_fixes() + segs[1].n_fixes(), fixes.len());
    assert_eq!(segs[0].last_fix_time(), fixes[149].time);
    assert_eq!(segs[1].first_fix_time(), fixes[150].time);
    for p in track.points() {
        assert!(
            !(p.time > fixes[149].time && p.time < fixes[150].time),
            "prediction at {} inside the gap",
            p.time
        );
    }
    for s in segs {
        assert!(!s.points().is_empty());
        for p in s.points() {
            assert!(p.time >= s.first_fix_time() && p.time <= s.last_fix_time());
        }
    }
}

#[test]
fn gap_at_the_threshold_does_not_split() {
    // The rule is "exceeds": a gap exactly equal to the threshold stays in one segment.
    let fixes = with_gap(150, 0.0);
    let exact = fixes[150].time - fixes[149].time;
    let settings = RegularSettings {
        gap_threshold_s: exact,
        ..RegularSettings::default()
    };
    let track = regularise(&fixes, &settings.validate().unwrap()).unwrap();
    let expected = fixes
        .windows(2)
        .filter(|w| w[1].time - w[0].time > exact)
        .count()
        + 1;
    assert_eq!(track.segments().len(), expected);
}

#[test]
fn grid_is_aligned_to_midnight_utc_of_the_first_fix() {
    let config = RegularSettings::default().validate().unwrap();
    let fixes = with_gap(0, 0.0);
    let track = regularise(&fixes, &config).unwrap();
    let anchor = (fixes[0].time / DAY).floor() * DAY;
    let interval = config.settings().interval_s;
    let times: Vec<f64> = track.points().map(|p| p.time).collect();
    for t in &times {
        let k = (t - anchor) / interval;
        assert_eq!(k, k.round(), "grid time {t} off the rule");
    }
    // Consecutive and complete: every grid time in the span is present.
    for w in times.windows(2) {
        assert_eq!(w[1] - w[0], interval);
    }
    let first_expected = anchor + ((fixes[0].time - anchor) / interval).ceil() * interval;
    assert_eq!(times[0], first_expected);
    assert!(times[times.len() - 1] + interval > fixes[fixes.len() - 1].time);
    // START_S is 05:00 UTC, so the first grid time is 06:00 UTC.
    assert_eq!(times[0] - START_S, 3600.0);
}

#[test]
fn large_standard_errors_are_flagged() {
    // A threshold between the smallest and the largest semi-major axis must flag some
    // points but not all; points with small errors stay unflagged.
    let fixes = with_gap(0, 0.0);
    let base = regularise(&fixes, &RegularSettings::default().validate().unwrap()).unwrap();
    let major = |p: &cairn::tracks::regular::GridPoint| {
        let (a, b, c) = (p.sd_x * p.sd_x, p.sd_y * p.sd_y, p.cov_xy);
        (0.5 * (a + b) + (0.25 * (a - b).powi(2) + c * c).sqrt()).sqrt()
    };
    let mut majors: Vec<f64> = base.points().map(major).collect();
    majors.sort_by(f64::total_cmp);
    let threshold = majors[majors.len() / 2];
    let settings = RegularSettings {
        se_flag_m: threshold,
        ..RegularSettings::default()
    };
    let track = regularise(&fixes, &settings.validate().unwrap()).unwrap();
    for p in track.points() {
        assert_eq!(p.large_se, major(p) > threshold);
    }
    let flagged = track.points().filter(|p| p.large_se).count();
    assert!(flagged > 0 && flagged < majors.len());
}

#[test]
fn outlier_is_flagged_dropped_and_refitted() {
    let mut fixes = with_gap(0, 0.0);
    fixes[120].x += 60_000.0; // 60 km off: far beyond any class's error
    let settings = RegularSettings {
        outliers: Some(OutlierSettings {
            quantile: 0.999,
            drop_and_refit: true,
        }),
        ..RegularSettings::default()
    };
    let track = regularise(&fixes, &settings.validate().unwrap()).unwrap();
    let flagged: Vec<usize> = track.outliers().iter().map(|o| o.fix_index).collect();
    assert!(flagged.contains(&120), "flagged {flagged:?}");
    // Gaussian errors put about 0.1 % of fixes over the 0.999 quantile by chance.
    assert!(flagged.len() <= 4, "flagged {flagged:?}");
    assert!(track.fit().refitted());
    assert_eq!(track.fit().fixes().total(), fixes.len() - flagged.len());
    // Flag only: nothing dropped.
    let settings = RegularSettings {
        outliers: Some(OutlierSettings {
            quantile: 0.999,
            drop_and_refit: false,
        }),
        ..RegularSettings::default()
    };
    let kept = regularise(&fixes, &settings.validate().unwrap()).unwrap();
    assert!(!kept.fit().refitted());
    assert_eq!(kept.fit().fixes().total(), fixes.len());
    assert!(
        kept.outliers()
            .iter()
            .any(|o| o.fix_index == 120 && !o.dropped)
    );
}

#[test]
fn fix_counts_are_reported_by_class() {
    let mut fixes = with_gap(0, 0.0);
    fixes[10].error =
        ObservationError::Covariance(ErrorCovariance::from_ellipse(900.0, 300.0, 45.0).unwrap());
    let track = regularise(&fixes, &RegularSettings::default().validate().unwrap()).unwrap();
    let counts = track.fit().fixes();
    assert_eq!(counts.with_covariance(), 1);
    assert_eq!(counts.total(), fixes.len());
    for (class, n) in counts.by_class() {
        let expected = fixes
            .iter()
            .filter(|f| f.error == ObservationError::Class(*class))
            .count();
        assert_eq!(*n, expected, "{class:?}");
    }
}

fn fix(time: f64, x: f64) -> Fix {
    Fix {
        time,
        x,
        y: 0.0,
        error: ObservationError::Class(LocClass::Gps),
    }
}

#[test]
fn unusable_animals_give_typed_errors() {
    let config = RegularSettings::default().validate().unwrap();
    let run = |fixes: &[Fix]| regularise(fixes, &config).unwrap_err();
    assert!(matches!(
        run(&[]),
        RegularError::TooFewFixes { intervals: 0, .. }
    ));
    let few: Vec<Fix> = (0..4)
        .map(|i| fix(START_S + 600.0 * i as f64, 10.0 * i as f64))
        .collect();
    assert!(matches!(
        run(&few),
        RegularError::TooFewFixes { intervals: 3, .. }
    ));
    let instant: Vec<Fix> = (0..10).map(|i| fix(START_S, i as f64)).collect();
    assert!(matches!(
        run(&instant),
        RegularError::SingleInstant { n: 10, .. }
    ));
    let mut unsorted: Vec<Fix> = (0..10)
        .map(|i| fix(START_S + 600.0 * i as f64, 0.0))
        .collect();
    unsorted.swap(4, 5);
    assert!(matches!(
        run(&unsorted),
        RegularError::NotIncreasing { index: 5, .. }
    ));
    let mut duplicate = unsorted.clone();
    duplicate.swap(4, 5);
    duplicate[6].time = duplicate[5].time;
    assert!(matches!(
        run(&duplicate),
        RegularError::NotIncreasing { index: 6, .. }
    ));
    let mut nan = duplicate.clone();
    nan[6].time += 300.0;
    nan[3].y = f64::NAN;
    assert!(matches!(
        run(&nan),
        RegularError::NonFinite {
            index: 3,
            field: "y"
        }
    ));
    // Every fix isolated by gaps above the threshold: no interval left to fit.
    let isolated: Vec<Fix> = (0..10)
        .map(|i| fix(START_S + 2.0 * DAY * i as f64, 0.0))
        .collect();
    assert!(matches!(
        run(&isolated),
        RegularError::TooFewFixes { intervals: 0, .. }
    ));
}

#[test]
fn one_bad_animal_does_not_sink_the_batch() {
    let config = RegularSettings::default().validate().unwrap();
    let good = with_gap(0, 0.0);
    let bad: Vec<Fix> = (0..3)
        .map(|i| fix(START_S + 60.0 * i as f64, 0.0))
        .collect();
    let results = regularise_many(&[good.clone(), bad, good], &config);
    assert!(results[0].is_ok());
    assert!(matches!(results[1], Err(RegularError::TooFewFixes { .. })));
    assert_eq!(results[0], results[2]);
}

#[test]
fn invalid_ellipses_and_covariances_are_rejected() {
    assert!(ErrorCovariance::from_ellipse(100.0, 200.0, 0.0).is_err()); // minor > major
    assert!(ErrorCovariance::from_ellipse(100.0, 0.0, 0.0).is_err());
    assert!(ErrorCovariance::from_ellipse(100.0, 50.0, f64::NAN).is_err());
    assert!(ErrorCovariance::new(1.0, 2.0, 1.0).is_err()); // not positive definite
    assert!(ErrorCovariance::diagonal(-1.0, 1.0).is_err()); // negative sd
    assert!(ErrorCovariance::diagonal(1.0, f64::NAN).is_err());
    assert!(ErrorCovariance::new(1.0, 0.5, 1.0).is_ok());
    // Orientation: 0° puts the major axis on y (north), 45° splits it evenly.
    let c = ErrorCovariance::from_ellipse(300.0, 100.0, 0.0).unwrap();
    assert!((c.yy() - 90_000.0).abs() < 1e-6 && (c.xx() - 10_000.0).abs() < 1e-6);
    let c = ErrorCovariance::from_ellipse(300.0, 100.0, 45.0).unwrap();
    assert!((c.xx() - c.yy()).abs() < 1e-6 && (c.xy() - 40_000.0).abs() < 1e-6);
    // Clockwise from north: 135° points south-east, negative x–y covariance.
    let c = ErrorCovariance::from_ellipse(300.0, 100.0, 135.0).unwrap();
    assert!((c.xy() + 40_000.0).abs() < 1e-6);
}

#[test]
fn each_invalid_setting_is_rejected_by_name() {
    let rejects = |settings: RegularSettings, name: &str| match settings.validate() {
        Err(ConfigError::NotPositive { name: n, .. }) => assert_eq!(n, name),
        other => panic!("{name}: {other:?}"),
    };
    let d = RegularSettings::default;
    rejects(
        RegularSettings {
            interval_s: 0.0,
            ..d()
        },
        "interval_s",
    );
    rejects(
        RegularSettings {
            gap_threshold_s: -1.0,
            ..d()
        },
        "gap_threshold_s",
    );
    rejects(
        RegularSettings {
            se_flag_m: f64::NAN,
            ..d()
        },
        "se_flag_m",
    );
    rejects(
        RegularSettings {
            position_prior_sd_m: f64::INFINITY,
            ..d()
        },
        "position_prior_sd_m",
    );
    let mut s = d();
    s.class_errors.argos_b.y_m = 0.0;
    rejects(s, "class_errors.ArgosB.y_m");
    for q in [0.0, 1.0, f64::NAN] {
        let s = RegularSettings {
            outliers: Some(OutlierSettings {
                quantile: q,
                drop_and_refit: true,
            }),
            ..d()
        };
        assert!(matches!(s.validate(), Err(ConfigError::Quantile(_))), "{q}");
    }
    assert!(d().validate().is_ok());
}

#[test]
fn settings_read_from_a_partial_table_keep_defaults() {
    // The study file may give only what differs from the defaults, down to one class.
    let s: RegularSettings = serde_json::from_str(
        r#"{"interval_s": 3600, "class_errors": {"argos_b": {"x_m": 9000, "y_m": 7000}}}"#,
    )
    .unwrap();
    let d = RegularSettings::default();
    assert_eq!(s.interval_s, 3600.0);
    assert_eq!(s.gap_threshold_s, d.gap_threshold_s);
    assert_eq!(s.class_errors.argos_b.x_m, 9000.0);
    assert_eq!(s.class_errors.argos3, d.class_errors.argos3);
    assert!(s.validate().is_ok());
}

#[test]
fn motionless_animal_gives_locations_but_no_standard_errors() {
    // Every fix at the same place: the likelihood is flat towards σ → 0 (no movement),
    // a boundary optimum. The track is still usable; the parameter standard errors are
    // absent and say why.
    let fixes: Vec<Fix> = (0..50)
        .map(|i| Fix {
            time: START_S + 900.0 * i as f64,
            x: 1_000.0,
            y: 2_000.0,
            error: ObservationError::Class(LocClass::Argos1),
        })
        .collect();
    let track = regularise(&fixes, &RegularSettings::default().validate().unwrap()).unwrap();
    let reason = track.fit().working_se().unwrap_err();
    assert!(reason.contains("not positive definite"), "{reason}");
    assert!(track.fit().beta_interval().is_none());
    for p in track.points() {
        // Smoothed locations sit on the fixes (to 1 mm: rounding of metre-scale sums).
        assert!((p.x - 1_000.0).abs() < 1e-3 && (p.y - 2_000.0).abs() < 1e-3);
    }
}
