//! Step lengths, azimuths and turning angles against published examples and an
//! independent implementation (geographiclib, Python) — see tests/fixtures/geodesic.

use std::f64::consts::{FRAC_PI_2, PI};

use cairn::tracks::class::LocClass;
use cairn::tracks::clean::Track;
use cairn::tracks::ingest::{Fix, NO_ELLIPSE};
use cairn::tracks::metrics::{inverse, steps, wrap_deg};
use geographiclib_rs::{DirectGeodesic, Geodesic};

fn dms(d: f64, m: f64, s: f64) -> f64 {
    d + m / 60.0 + s / 3600.0
}

/// Vincenty (1975), Flinders Peak → Buninyong, as published by Geoscience Australia:
/// 54 972.271 m; forward azimuth 306°52′05.37″; reverse azimuth 127°10′25.07″.
/// The published figures are rounded to 1 mm and 0.01″, so those are the tolerances.
#[test]
fn vincenty_flinders_peak_to_buninyong() {
    let (lat1, lon1) = (-dms(37.0, 57.0, 3.72030), dms(144.0, 25.0, 29.52440));
    let (lat2, lon2) = (-dms(37.0, 39.0, 10.15610), dms(143.0, 55.0, 35.38390));
    let (s, a1, a2) = inverse(lon1, lat1, lon2, lat2);
    assert!((s - 54_972.271).abs() < 0.001, "distance {s}");
    let fwd = a1.rem_euclid(360.0);
    assert!(
        (fwd - dms(306.0, 52.0, 5.37)).abs() * 3600.0 < 0.01,
        "forward azimuth {fwd}"
    );
    let rev = (a2 + 180.0).rem_euclid(360.0);
    assert!(
        (rev - dms(127.0, 10.0, 25.07)).abs() * 3600.0 < 0.01,
        "reverse azimuth {rev}"
    );
}

/// Karney (2013), J. Geodesy 87:43–55, inverse example (printed to 1e-11° and 1e-5 m).
#[test]
fn karney_inverse_example() {
    let (s, a1, a2) = inverse(0.0, -30.0, 179.8, 29.9);
    assert!((s - 19_989_832.827_61).abs() < 1e-4, "{s}");
    assert!((a1 - 161.89052473633).abs() < 1e-10, "{a1}");
    assert!((a2 - 18.09073724574).abs() < 1e-10, "{a2}");
}

/// Karney (2013) direct example: the crate's direct solution, which our inverse relies on
/// being the same algorithm, reproduces the printed end point.
#[test]
fn karney_direct_example() {
    let g = Geodesic::wgs84();
    let (lat2, lon2, azi2): (f64, f64, f64) = g.direct(40.0, 0.0, 30.0, 10_000_000.0);
    assert!((lat2 - 41.79331020506).abs() < 1e-10);
    assert!((lon2 - 137.84490004377).abs() < 1e-10);
    assert!((azi2 - 149.09016931807).abs() < 1e-10);
    // And back: the inverse of the direct solution returns the distance and azimuths.
    let (s, a1, _) = inverse(0.0, 40.0, lon2, lat2);
    assert!((s - 10_000_000.0).abs() < 1e-6 && (a1 - 30.0).abs() < 1e-9);
}

/// geographiclib 2.1 (Python) reference pairs: tests/fixtures/geodesic/inverse.csv.
/// Tolerances: 1e-6 m, and 1e-9° for lines solved by Karney's algorithm (the two
/// implementations agree to round-off); lines short enough for the closed form
/// (`cairn::geo::geodesic`, chord ≤ 20 km) are held to its documented accuracy instead:
/// each azimuth within 2 µm sideways at the far end (error in radians × length).
#[test]
fn matches_geographiclib_fixture() {
    let text = std::fs::read_to_string("tests/fixtures/geodesic/inverse.csv").unwrap();
    let mut n = 0;
    for line in text.lines().skip(1) {
        let f: Vec<&str> = line.split(',').collect();
        let v: Vec<f64> = f[1..].iter().map(|x| x.parse().unwrap()).collect();
        let (lat1, lon1, lat2, lon2, s12, azi1, azi2) = (v[0], v[1], v[2], v[3], v[4], v[5], v[6]);
        let (s, a1, a2) = inverse(lon1, lat1, lon2, lat2);
        assert!((s - s12).abs() < 1e-6, "{}: {s} vs {s12}", f[0]);
        // Exactly antipodal equatorial points have no unique geodesic: any meridian is
        // one, so only the distance is defined.
        if f[0] != "exactly_antipodal_equator" {
            for (got, want) in [(a1, azi1), (a2, azi2)] {
                let err = wrap_deg(got - want).abs();
                let ok = if s12 <= cairn::geo::geodesic::SHORT_CHORD_M {
                    err.to_radians() * s12 < 2e-6
                } else {
                    err < 1e-9
                };
                assert!(ok, "{}: azimuth {got} vs {want}", f[0]);
            }
        }
        n += 1;
    }
    assert!(n >= 5);
}

fn track(points: &[(f64, f64)]) -> Track {
    Track {
        animal: "t".into(),
        fixes: points
            .iter()
            .enumerate()
            .map(|(i, &(lon, lat))| Fix {
                animal: 0,
                time_us: i as i64 * 3_600_000_000,
                lon,
                lat,
                class: LocClass::Gps,
                file: 0,
                row: i as u32 + 1,
                ellipse: NO_ELLIPSE,
            })
            .collect(),
        ellipses: Vec::new(),
    }
}

fn turn_at_middle(points: &[(f64, f64)]) -> f64 {
    let s = steps(&[track(points)], 86_400.0);
    assert_eq!(s.len(), 2);
    assert!(
        s.turn_rad[0].is_nan(),
        "first angle of a segment is missing"
    );
    s.turn_rad[1]
}

// Hand-made three-fix cases (0.01° steps near the equator, where a degree of latitude and
// of longitude are within 0.7 % of each other, so right angles stay within 0.01 rad).
#[test]
fn left_right_straight_reversal() {
    let left = turn_at_middle(&[(0.0, 0.0), (0.0, 0.01), (-0.01, 0.01)]);
    assert!((left - FRAC_PI_2).abs() < 0.01, "left turn {left}");
    let right = turn_at_middle(&[(0.0, 0.0), (0.0, 0.01), (0.01, 0.01)]);
    assert!((right + FRAC_PI_2).abs() < 0.01, "right turn {right}");
    let straight = turn_at_middle(&[(0.0, 0.0), (0.0, 0.01), (0.0, 0.02)]);
    assert!(straight.abs() < 1e-12, "straight {straight}");
    let back = turn_at_middle(&[(0.0, 0.0), (0.0, 0.01), (0.0, 0.0)]);
    assert!(
        (back - PI).abs() < 1e-9,
        "reversal {back} must be +π (range is (−π, π])"
    );
}

#[test]
fn turns_across_the_antimeridian() {
    // East across 180° then north: a left turn.
    let left = turn_at_middle(&[(179.99, 0.0), (-179.99, 0.0), (-179.99, 0.02)]);
    assert!((left - FRAC_PI_2).abs() < 0.01, "{left}");
    // East across 180° and on east: straight along the equator.
    let straight = turn_at_middle(&[(179.99, 0.0), (-179.99, 0.0), (-179.97, 0.0)]);
    assert!(straight.abs() < 1e-12, "{straight}");
    // West across 180° then south: a left turn (heading west, turning to the south).
    let left2 = turn_at_middle(&[(-179.99, 0.0), (179.99, 0.0), (179.99, -0.02)]);
    assert!((left2 - FRAC_PI_2).abs() < 0.01, "{left2}");
}

#[test]
fn great_circle_travel_at_high_latitude_is_straight() {
    // Three points on one geodesic (built with the direct solution): the departure azimuth
    // changes along the way, but the turning angle must be zero.
    let g = Geodesic::wgs84();
    let (lat1, lon1, _): (f64, f64, f64) = g.direct(75.0, 10.0, 60.0, 200_000.0);
    let (lat2, lon2, _): (f64, f64, f64) = g.direct(75.0, 10.0, 60.0, 400_000.0);
    let t = turn_at_middle(&[(10.0, 75.0), (lon1, lat1), (lon2, lat2)]);
    assert!(t.abs() < 1e-9, "{t}");
}

#[test]
fn segments_split_at_gaps_and_zero_steps_have_no_direction() {
    let mut tr = track(&[
        (0.0, 0.0),
        (0.0, 0.01),
        (0.0, 0.01),
        (0.0, 0.02),
        (0.0, 0.03),
        (0.0, 0.04),
    ]);
    // A 10-hour gap before the fifth fix; the gap threshold is 6 h.
    tr.fixes[4].time_us += 10 * 3_600_000_000;
    tr.fixes[5].time_us += 10 * 3_600_000_000;
    let s = steps(&[tr], 6.0 * 3600.0);
    assert_eq!(s.segment, vec![1, 1, 1, 2]);
    // Step 2 has length zero: no bearing, and no turning angle at either end of it.
    assert_eq!(s.step_m[1], 0.0);
    assert!(s.bearing_deg[1].is_nan());
    assert!(s.turn_rad[1].is_nan() && s.turn_rad[2].is_nan());
    // First step of the second segment: angle missing, not zero.
    assert!(s.turn_rad[3].is_nan());
    assert_eq!(s.dt_s, vec![3600.0, 3600.0, 3600.0, 3600.0]);
}

/// The closed-form short-line solution (`cairn::geo::geodesic`) against Karney's
/// algorithm (geographiclib-rs, a general-purpose reference library) on random lines up to
/// the short-line limit, at every latitude up to the polar limit and every azimuth.
/// Lengths agree within 10 µm. Azimuths are compared by the sideways offset their error
/// makes at the far end of the line (error in radians × length): within 2 µm. (On
/// centimetre lines the azimuths differ by up to ~1e-5°, which is the rounding of
/// Earth-centred coordinates, nanometres.)
#[test]
fn short_lines_agree_with_karney() {
    use cairn::geo::geodesic::{SHORT_CHORD_M, Site, inverse_sites};
    use geographiclib_rs::InverseGeodesic;
    use rand::{Rng, SeedableRng};
    let g = Geodesic::wgs84();
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(11);
    let (mut worst_s, mut worst_side, mut n) = (0.0_f64, 0.0_f64, 0);
    for i in 0..200_000 {
        let lat1: f64 = rng.random_range(-89.89..89.89);
        let lon1: f64 = rng.random_range(-180.0..180.0);
        // lengths spread over the decades from 1 cm up to the limit, plus the limit
        let s0 = if i % 50 == 0 {
            SHORT_CHORD_M * 0.999_999
        } else {
            10f64.powf(rng.random_range(-2.0..SHORT_CHORD_M.log10()))
        };
        let azi: f64 = rng.random_range(-180.0..180.0);
        let (lat2, lon2): (f64, f64) = g.direct(lat1, lon1, azi, s0);
        if lat2.abs() > 89.89 {
            continue;
        }
        n += 1;
        let (s, a1, a2) = inverse_sites(&g, &Site::new(lon1, lat1), &Site::new(lon2, lat2));
        let (s_ref, a1_ref, a2_ref, _): (f64, f64, f64, f64) = g.inverse(lat1, lon1, lat2, lon2);
        worst_s = worst_s.max((s - s_ref).abs());
        let ea = wrap_deg(a1 - a1_ref)
            .abs()
            .max(wrap_deg(a2 - a2_ref).abs())
            .to_radians();
        worst_side = worst_side.max(ea * s_ref);
    }
    assert!(n > 190_000, "{n} lines");
    eprintln!("short lines: worst length error {worst_s:.2e} m, sideways {worst_side:.2e} m");
    assert!(worst_s < 1e-5, "length error {worst_s} m");
    assert!(worst_side < 2e-6, "sideways error {worst_side} m");
}
