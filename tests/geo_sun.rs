//! Sun position, diel phase and solar time against published and library references.

use cairn::geo::sun::{
    DielPhase, DielThresholds, SpaSettings, SunError, annotate_fix, annotate_fixes,
    equation_of_time_minutes, local_solar_hour, sun_position, sun_position_with,
};
use chrono::{DateTime, Duration, TimeZone, Utc};

struct Case {
    label: String,
    time: DateTime<Utc>,
    lon: f64,
    lat: f64,
    elevation: f64,
    azimuth: f64,
    eot_min: f64,
    diel: String,
}

fn pvlib_cases() -> Vec<Case> {
    let text = include_str!("fixtures/sun_pvlib/sun_cases.csv");
    text.lines()
        .skip(1)
        .map(|line| {
            let f: Vec<&str> = line.split(',').collect();
            Case {
                label: f[0].to_string(),
                time: f[1].parse().unwrap(),
                lon: f[2].parse().unwrap(),
                lat: f[3].parse().unwrap(),
                elevation: f[5].parse().unwrap(),
                azimuth: f[7].parse().unwrap(),
                eot_min: f[8].parse().unwrap(),
                diel: f[9].to_string(),
            }
        })
        .collect()
}

fn angle_diff(a: f64, b: f64) -> f64 {
    ((a - b + 540.0).rem_euclid(360.0) - 180.0).abs()
}

#[test]
fn nrel_spa_worked_example() {
    // Source: Reda & Andreas (2004), NREL/TP-560-34302, Table A5.1 / §A.5 worked example:
    // 2003-10-17 12:30:30 local (UTC−7), lat 39.742476, lon −105.1786, 1830.14 m,
    // 820 mbar, 11 °C, ΔT = 67 s → topocentric zenith 50.11162°, azimuth 194.34024°.
    let t = Utc.with_ymd_and_hms(2003, 10, 17, 19, 30, 30).unwrap();
    let settings = SpaSettings {
        height_m: 1830.14,
        delta_t_s: Some(67.0),
        refraction: Some((820.0, 11.0)),
    };
    let p = sun_position_with(&t, -105.1786, 39.742476, &settings).unwrap();
    // The paper prints 5 decimals; 1e-4° allows for rounding of the last digit.
    assert!(
        (90.0 - p.elevation_deg - 50.11162).abs() < 1e-4,
        "zenith {}",
        90.0 - p.elevation_deg
    );
    assert!(
        (p.azimuth_deg - 194.34024).abs() < 1e-4,
        "azimuth {}",
        p.azimuth_deg
    );
}

#[test]
fn elevations_match_pvlib_spa() {
    // Source: pvlib 0.16.1 spa_python, column "elevation" (geometric, no refraction),
    // see tests/fixtures/sun_pvlib/PROVENANCE.md.
    let cases = pvlib_cases();
    assert!(cases.len() >= 15);
    for c in &cases {
        let p = sun_position(&c.time, c.lon, c.lat).unwrap();
        // Requirement is 0.05°; both sides run SPA, differing only in the ΔT model
        // (a few seconds, < 1e-4°), so 0.005° still leaves a wide margin.
        assert!(
            (p.elevation_deg - c.elevation).abs() < 0.005,
            "{}: elevation {} vs pvlib {}",
            c.label,
            p.elevation_deg,
            c.elevation
        );
        // Azimuth is undefined at the poles (every direction is north or south).
        if c.lat.abs() < 89.999 {
            assert!(
                angle_diff(p.azimuth_deg, c.azimuth) < 0.005,
                "{}: azimuth {} vs pvlib {}",
                c.label,
                p.azimuth_deg,
                c.azimuth
            );
        }
    }
}

#[test]
fn diel_classes_match_pvlib_derived_labels() {
    // Source: labels derived in gen_sun.py from pvlib elevations at t and t ± 60 s.
    let th = DielThresholds::default();
    let mut seen = std::collections::BTreeSet::new();
    for c in pvlib_cases() {
        let a = annotate_fix(&c.time, c.lon, c.lat, &th).unwrap();
        assert_eq!(a.phase.label(), c.diel, "{}", c.label);
        seen.insert(a.phase);
    }
    // The fixtures cover every phase, dawn and dusk alike.
    assert_eq!(seen.len(), DielPhase::ALL.len());
}

#[test]
fn equation_of_time_matches_pvlib() {
    // Source: pvlib 0.16.1 spa_python column "equation_of_time" (SPA, minutes).
    for c in pvlib_cases() {
        let e = equation_of_time_minutes(&c.time);
        // Meeus' series is good to a few seconds of time (0.05 min = 3 s).
        assert!(
            (e - c.eot_min).abs() < 0.05,
            "{}: {e} vs {}",
            c.label,
            c.eot_min
        );
    }
}

#[test]
fn solar_noon_puts_sun_on_the_meridian() {
    // Invariant: at local apparent noon the sun is due south (north of the tropics).
    for (month, day) in [(1, 10), (4, 1), (7, 20), (11, 3)] {
        let lon = 10.0;
        let mut t = Utc.with_ymd_and_hms(2021, month, day, 11, 0, 0).unwrap();
        // Step to within a second of solar hour 12.
        for _ in 0..3 {
            let dh = 12.0 - local_solar_hour(&t, lon);
            t += Duration::milliseconds((dh * 3_600_000.0) as i64);
        }
        let p = sun_position(&t, lon, 45.0).unwrap();
        // EoT good to ~3 s; the sun's azimuth moves < 0.05° per 3 s here.
        assert!(
            (p.azimuth_deg - 180.0).abs() < 0.1,
            "{month}-{day}: {}",
            p.azimuth_deg
        );
    }
}

#[test]
fn polar_day_and_night_hold_all_day() {
    let th = DielThresholds::default();
    for h in 0..24 {
        let summer = Utc.with_ymd_and_hms(2023, 6, 21, h, 0, 0).unwrap();
        let winter = Utc.with_ymd_and_hms(2023, 12, 21, h, 0, 0).unwrap();
        // Longyearbyen (78.2°N): midnight sun in June; polar night in December.
        assert_eq!(
            annotate_fix(&summer, 15.6, 78.2, &th).unwrap().phase,
            DielPhase::Day
        );
        assert_ne!(
            annotate_fix(&winter, 15.6, 78.2, &th).unwrap().phase,
            DielPhase::Day
        );
        // South Pole: the reverse, with night all day in June.
        assert_eq!(
            annotate_fix(&summer, 0.0, -90.0, &th).unwrap().phase,
            DielPhase::Night
        );
        assert_eq!(
            annotate_fix(&winter, 0.0, -90.0, &th).unwrap().phase,
            DielPhase::Day
        );
    }
}

#[test]
fn batch_equals_single_fix_in_input_order() {
    let th = DielThresholds::default();
    let cases = pvlib_cases();
    // Reverse the order and repeat every fix so times are shared and unsorted.
    let mut times = Vec::new();
    let mut lons = Vec::new();
    let mut lats = Vec::new();
    for c in cases.iter().rev().chain(cases.iter()) {
        times.push(c.time);
        lons.push(c.lon);
        lats.push(c.lat);
    }
    let batch = annotate_fixes(&times, &lons, &lats, &th).unwrap();
    for i in 0..times.len() {
        assert_eq!(
            batch[i],
            annotate_fix(&times[i], lons[i], lats[i], &th).unwrap()
        );
    }
}

#[test]
fn custom_thresholds_change_the_phase() {
    let t: DateTime<Utc> = "2023-03-15T05:39:00Z".parse().unwrap(); // elevation ≈ −3.31°
    let default = annotate_fix(&t, 5.0, 52.0, &DielThresholds::default()).unwrap();
    assert_eq!(default.phase, DielPhase::CivilDawn);
    let strict = DielThresholds::new(-0.833, -3.0, -12.0, -18.0).unwrap();
    assert_eq!(
        annotate_fix(&t, 5.0, 52.0, &strict).unwrap().phase,
        DielPhase::NauticalDawn
    );
    let lenient = DielThresholds::new(-4.0, -6.0, -12.0, -18.0).unwrap();
    assert_eq!(
        annotate_fix(&t, 5.0, 52.0, &lenient).unwrap().phase,
        DielPhase::Day
    );
}

#[test]
fn thresholds_must_decrease() {
    assert!(DielThresholds::new(-6.0, -0.833, -12.0, -18.0).is_err());
    assert!(DielThresholds::new(-0.833, -6.0, -6.0, -18.0).is_err());
    assert!(DielThresholds::new(f64::NAN, -6.0, -12.0, -18.0).is_err());
    assert!(DielThresholds::new(0.0, -6.0, -12.0, -95.0).is_err());
}

#[test]
fn bad_inputs_are_reported_with_the_fix_index() {
    let th = DielThresholds::default();
    let t = Utc.with_ymd_and_hms(2020, 1, 1, 0, 0, 0).unwrap();
    let err = annotate_fixes(&[t, t], &[10.0, 10.0], &[45.0, 95.0], &th).unwrap_err();
    assert!(
        matches!(err, SunError::Location { index: 1, .. }),
        "{err:?}"
    );
    assert!(err.to_string().contains("swapped"));
    let far = Utc.with_ymd_and_hms(3500, 1, 1, 0, 0, 0).unwrap();
    assert!(matches!(
        sun_position(&far, 0.0, 0.0),
        Err(SunError::Time { .. })
    ));
    assert!(matches!(
        annotate_fixes(&[t], &[1.0, 2.0], &[3.0], &th),
        Err(SunError::Lengths { .. })
    ));
}

#[test]
fn solar_hour_wraps_across_the_date_line() {
    let t = Utc.with_ymd_and_hms(2022, 7, 4, 3, 0, 0).unwrap();
    let east = local_solar_hour(&t, 180.0);
    let west = local_solar_hour(&t, -180.0);
    // ±180° is one meridian: the same solar time, in [0, 24).
    assert!((east - west).abs() < 1e-9);
    assert!((0.0..24.0).contains(&east));
}

#[test]
fn knot_interpolation_agrees_with_full_spa() {
    // Invariant: the fast path (exact SPA at two-hourly knots + per-fix topocentric
    // step) matches full SPA at the instant from the solar-positioning crate.
    let mut state = 0x9e37_79b9_7f4a_7c15u64;
    let mut next = || {
        state ^= state << 13;
        state ^= state >> 7;
        state ^= state << 17;
        (state >> 11) as f64 / (1u64 << 53) as f64
    };
    let th = DielThresholds::default();
    let mut worst: f64 = 0.0;
    for _ in 0..3_000 {
        // 1938–2096, so instants before the Unix epoch are covered too.
        let secs = (-1_000_000_000.0 + 4_000_000_000.0 * next()) as i64;
        let t = Utc.timestamp_opt(secs, 123_000_000).unwrap();
        let (lon, lat) = (-180.0 + 360.0 * next(), -90.0 + 180.0 * next());
        let fast = annotate_fix(&t, lon, lat, &th).unwrap();
        let full = sun_position_with(&t, lon, lat, &SpaSettings::default()).unwrap();
        let de = (fast.position.elevation_deg - full.elevation_deg).abs();
        worst = worst.max(de);
        // Abridged nutation (≤ 0.00014°) plus interpolation (< 1e-5°): 5e-4° bound.
        assert!(de < 5e-4, "{t} ({lon}, {lat}): {de}");
        if lat.abs() < 89.0 && full.elevation_deg.abs() < 89.0 {
            assert!(angle_diff(fast.position.azimuth_deg, full.azimuth_deg) < 5e-3);
        }
        // Rising flag against a ±5 min difference of full SPA, away from culmination.
        let step = Duration::minutes(5);
        let before = sun_position_with(&(t - step), lon, lat, &SpaSettings::default()).unwrap();
        let after = sun_position_with(&(t + step), lon, lat, &SpaSettings::default()).unwrap();
        let change = after.elevation_deg - before.elevation_deg;
        if fast.phase.is_twilight() && change.abs() > 1e-3 {
            let rising = matches!(
                fast.phase,
                DielPhase::CivilDawn | DielPhase::NauticalDawn | DielPhase::AstronomicalDawn
            );
            assert_eq!(rising, change > 0.0, "{t} ({lon}, {lat})");
        }
    }
    assert!(worst > 0.0, "the two paths are independent computations");
}

#[test]
fn first_failing_fix_in_input_order_is_reported() {
    let th = DielThresholds::default();
    let t = Utc.with_ymd_and_hms(2020, 1, 1, 0, 0, 0).unwrap();
    let n = 10_000;
    let times = vec![t; n];
    let lons = vec![10.0; n];
    let mut lats = vec![45.0; n];
    for bad in [7_777, 3_333, 9_999] {
        lats[bad] = 123.0;
    }
    for _ in 0..5 {
        let err = annotate_fixes(&times, &lons, &lats, &th).unwrap_err();
        assert!(
            matches!(err, SunError::Location { index: 3_333, .. }),
            "{err:?}"
        );
    }
}

#[test]
fn annotated_solar_hour_matches_pvlib_equation_of_time() {
    // Source: pvlib 0.16.1 "equation_of_time" (SPA, minutes); apparent solar time is
    // UTC + lon/15 + E/60.
    let th = DielThresholds::default();
    for c in pvlib_cases() {
        let a = annotate_fix(&c.time, c.lon, c.lat, &th).unwrap();
        let utc_h = f64::from(c.time.timestamp().rem_euclid(86_400) as i32) / 3600.0;
        let want = (utc_h + c.lon / 15.0 + c.eot_min / 60.0).rem_euclid(24.0);
        let diff = (a.solar_hour - want + 12.0).rem_euclid(24.0) - 12.0;
        // 1 s: ours comes from SPA's own hour angle (abridged nutation, < 0.03 s).
        assert!(
            diff.abs() < 1.0 / 3600.0,
            "{}: {} vs {want}",
            c.label,
            a.solar_hour
        );
        // The stand-alone helper (Meeus' series) agrees within 3 s.
        let helper = local_solar_hour(&c.time, c.lon);
        let d2 = (helper - a.solar_hour + 12.0).rem_euclid(24.0) - 12.0;
        assert!(d2.abs() < 3.0 / 3600.0, "{}: helper {helper}", c.label);
    }
}
