//! Cleaning: speed filters and spikes on hand-built tracks whose answers are known.

use cairn::study::SpeedFilter;
use cairn::tracks::class::LocClass;
use cairn::tracks::clean::{Labels, clean_animal, sphere_distance};
use cairn::tracks::exclusions::Reason;
use cairn::tracks::ingest::{Fix, NO_ELLIPSE};

/// Fixes at hourly intervals; positions in (lon, lat) degrees.
fn fixes(points: &[(f64, f64)]) -> Vec<Fix> {
    points
        .iter()
        .enumerate()
        .map(|(i, &(lon, lat))| Fix {
            animal: 0,
            time_us: i as i64 * 3_600_000_000,
            lon,
            lat,
            class: LocClass::Argos2,
            file: 0,
            row: i as u32 + 1,
            ellipse: NO_ELLIPSE,
        })
        .collect()
}

/// A track heading north along 10° E at ~0.93 m/s (0.03° latitude per hour).
fn steady(n: usize) -> Vec<(f64, f64)> {
    (0..n).map(|i| (10.0, 60.0 + 0.03 * i as f64)).collect()
}

fn removed(points: &[(f64, f64)], filter: SpeedFilter) -> Vec<(u32, Reason)> {
    let (_, ex) = clean_animal(
        "a",
        fixes(points),
        &[],
        &Labels::generic(&["f.csv"]),
        filter,
    );
    ex.iter().map(|e| (e.row as u32, e.reason)).collect()
}

#[test]
fn haversine_matches_a_known_arc() {
    // A quarter of a great circle on the sphere: π/2 · R.
    let d = sphere_distance(0.0, 0.0, 90.0, 0.0);
    assert!((d - std::f64::consts::FRAC_PI_2 * 6_371_008.8).abs() < 1e-6);
}

#[test]
fn a_steady_track_loses_nothing() {
    for f in [
        SpeedFilter::MaxSpeed { max_speed: 2.0 },
        SpeedFilter::SpeedDistanceAngle {
            max_speed: 2.0,
            distances: [2500.0, 5000.0],
            angles: [15.0, 25.0],
        },
    ] {
        assert!(removed(&steady(30), f).is_empty());
    }
}

#[test]
fn max_speed_removes_the_outlier_not_its_neighbours() {
    let mut p = steady(20);
    p[10].0 += 0.5; // ~19 km east of the line: ~5 m/s from both neighbours
    assert_eq!(
        removed(&p, SpeedFilter::MaxSpeed { max_speed: 2.0 }),
        vec![(11, Reason::SpeedFilter)]
    );
}

#[test]
fn root_mean_square_filter_removes_two_adjacent_outliers() {
    // Two consecutive bad fixes: a filter that judged each fix by one neighbour would keep
    // them (they are close to each other); the RMS over two fixes either side does not.
    let mut p = steady(30);
    p[12].0 += 0.6;
    p[13].0 += 0.6;
    let r = removed(
        &p,
        SpeedFilter::SpeedDistanceAngle {
            max_speed: 2.0,
            distances: [2500.0, 5000.0],
            angles: [15.0, 25.0],
        },
    );
    assert_eq!(
        r,
        vec![(13, Reason::SpeedFilter), (14, Reason::SpeedFilter)]
    );
}

#[test]
fn spikes_are_removed_by_distance_and_angle() {
    // A fix 3 km off a slow track and back: both distances > 2.5 km, angle ≈ 2·atan(0.5/3)
    // ≈ 19° → not a spike under (2.5 km, 15°); but a 6 km excursion (angle ≈ 9.5°) is.
    let slow: Vec<(f64, f64)> = (0..12).map(|i| (10.0, 60.0 + 0.0045 * i as f64)).collect();
    let filter = SpeedFilter::SpeedDistanceAngle {
        max_speed: 5.0,
        distances: [2500.0, 5000.0],
        angles: [15.0, 25.0],
    };
    let mut a = slow.clone();
    a[6].0 += 3000.0 / (111_320.0 * 60f64.to_radians().cos());
    let r = removed(&a, filter);
    assert!(
        r.is_empty(),
        "a 19° excursion of 3 km is below both rules: {r:?}"
    );
    let mut b = slow.clone();
    b[6].0 += 6000.0 / (111_320.0 * 60f64.to_radians().cos());
    assert_eq!(removed(&b, filter), vec![(7, Reason::SpikeFilter)]);
}

#[test]
fn z_and_duplicates_are_logged_with_rows() {
    let mut f = fixes(&steady(5));
    f[2].class = LocClass::ArgosZ;
    let mut dup = f[3];
    dup.class = LocClass::ArgosB;
    dup.row = 99;
    f.push(dup);
    let (t, ex) = clean_animal("a", f, &[], &Labels::generic(&["f.csv"]), SpeedFilter::None);
    let r: Vec<(u64, Reason)> = ex.iter().map(|e| (e.row, e.reason)).collect();
    assert_eq!(
        r,
        vec![(3, Reason::InvalidClassZ), (99, Reason::DuplicateTime)]
    );
    assert_eq!(t.fixes.len(), 4);
    assert!(t.fixes.windows(2).all(|w| w[0].time_us < w[1].time_us));
}

#[test]
fn ellipses_follow_their_fixes_through_cleaning() {
    use cairn::tracks::ingest::Ellipse;
    let ellipse = |m: f64| Ellipse {
        semi_major: m,
        semi_minor: m / 2.0,
        orientation: 30.0,
    };
    // Rows 1–4 at hours 0–3, given in reverse time order; row 2 (hour 1) is class Z;
    // row 5 duplicates hour 2 with the same class and a smaller ellipse, so it is kept
    // instead of row 3. Row 4 has no ellipse.
    let mut f = fixes(&steady(4));
    f.reverse();
    let table = vec![
        ellipse(900.0),
        ellipse(800.0),
        ellipse(700.0),
        ellipse(300.0),
    ];
    f[3].ellipse = 0; // row 1
    f[2].ellipse = 1; // row 2
    f[2].class = LocClass::ArgosZ;
    f[1].ellipse = 2; // row 3
    let mut dup = f[1];
    dup.row = 5;
    dup.ellipse = 3;
    f.push(dup);
    let (t, ex) = clean_animal(
        "a",
        f,
        &table,
        &Labels::generic(&["f.csv"]),
        SpeedFilter::None,
    );
    let r: Vec<(u64, Reason)> = ex.iter().map(|e| (e.row, e.reason)).collect();
    assert_eq!(
        r,
        vec![(2, Reason::InvalidClassZ), (3, Reason::DuplicateTime)]
    );
    let kept: Vec<(u32, Option<f64>)> = t
        .fixes
        .iter()
        .map(|x| (x.row, t.ellipse(x).map(|e| e.semi_major)))
        .collect();
    assert_eq!(kept, vec![(1, Some(900.0)), (5, Some(300.0)), (4, None)]);
    assert_eq!(t.ellipses.len(), 2);
}
