//! Projections against pyproj, round trips, and the equal-area property.

use cairn::geo::proj::{ProjError, Projection, ProjectionKind, metres_per_degree, utm_zone};

fn projection_for(crs: &str) -> Projection {
    if let Some(code) = crs.strip_prefix("EPSG:") {
        Projection::from_epsg(code.parse().unwrap()).unwrap()
    } else {
        // "laea:<lat0>:<lon0>"
        let f: Vec<f64> = crs.split(':').skip(1).map(|v| v.parse().unwrap()).collect();
        Projection::laea(f[1], f[0]).unwrap()
    }
}

#[test]
fn forward_and_inverse_match_pyproj() {
    // Source: pyproj 3.7.2 (PROJ 9.5.1), tests/fixtures/proj_pyproj/points.csv.
    let text = include_str!("fixtures/proj_pyproj/points.csv");
    let mut n = 0;
    for line in text.lines().skip(1) {
        let f: Vec<&str> = line.split(',').collect();
        let p = projection_for(f[0]);
        let v: Vec<f64> = f[1..].iter().map(|s| s.parse().unwrap()).collect();
        let (lon, lat, x, y) = (v[0], v[1], v[2], v[3]);
        let (px, py) = p.forward(lon, lat).unwrap();
        // 1 mm: both are PROJ's algorithms; agreement is usually ~1e-9 m.
        assert!(
            (px - x).abs() < 1e-3 && (py - y).abs() < 1e-3,
            "{line}: got {px}, {py}"
        );
        let (ilon, ilat) = p.inverse(x, y).unwrap();
        // 1e-8° ≈ 1 mm on the ground.
        assert!(
            (ilon - lon).abs() < 1e-8 && (ilat - lat).abs() < 1e-8,
            "{line}: inverse {ilon}, {ilat}"
        );
        n += 1;
    }
    assert!(n >= 16);
}

/// Small seeded generator (xorshift64*), so the test is reproducible.
struct Rng(u64);
impl Rng {
    fn next(&mut self) -> f64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        (self.0.wrapping_mul(0x2545_F491_4F6C_DD1D) >> 11) as f64 / (1u64 << 53) as f64
    }
}

#[test]
fn utm_round_trip_within_a_millimetre() {
    let mut rng = Rng(0x5eed_1234);
    for _ in 0..5_000 {
        let lat = -80.0 + 164.0 * rng.next();
        let lon = -180.0 + 360.0 * rng.next();
        let p = Projection::utm_for_points(&[lon], &[lat]).unwrap();
        let (x, y) = p.forward(lon, lat).unwrap();
        let (lon2, lat2) = p.inverse(x, y).unwrap();
        let (mlon, mlat) = metres_per_degree(lat);
        let err_m = (((lon2 - lon) * mlon).powi(2) + ((lat2 - lat) * mlat).powi(2)).sqrt();
        assert!(err_m < 1e-3, "({lon}, {lat}) came back {err_m} m away");
    }
}

#[test]
fn laea_round_trip_within_a_millimetre() {
    let mut rng = Rng(42);
    let p = Projection::laea(-60.0, -10.0).unwrap();
    for _ in 0..2_000 {
        let lon = -60.0 + 40.0 * (rng.next() - 0.5);
        let lat = -10.0 + 40.0 * (rng.next() - 0.5);
        let (x, y) = p.forward(lon, lat).unwrap();
        let (lon2, lat2) = p.inverse(x, y).unwrap();
        let (mlon, mlat) = metres_per_degree(lat);
        assert!(((lon2 - lon) * mlon).abs() < 1e-3 && ((lat2 - lat) * mlat).abs() < 1e-3);
    }
}

fn shoelace(xy: &[(f64, f64)]) -> f64 {
    let n = xy.len();
    (0..n)
        .map(|i| {
            let (x0, y0) = xy[i];
            let (x1, y1) = xy[(i + 1) % n];
            x0 * y1 - x1 * y0
        })
        .sum::<f64>()
        .abs()
        / 2.0
}

#[test]
fn equal_area_projections_preserve_geodesic_area() {
    // Source: pyproj 3.7.2 Geod(ellps="WGS84").polygon_area_perimeter on the same
    // densified vertices (tests/fixtures/proj_pyproj/areas.csv, vertices.csv).
    let areas: Vec<(String, f64)> = include_str!("fixtures/proj_pyproj/areas.csv")
        .lines()
        .skip(1)
        .map(|l| {
            let f: Vec<&str> = l.split(',').collect();
            (f[0].to_string(), f[1].parse().unwrap())
        })
        .collect();
    let vertices: Vec<(String, f64, f64)> = include_str!("fixtures/proj_pyproj/vertices.csv")
        .lines()
        .skip(1)
        .map(|l| {
            let f: Vec<&str> = l.split(',').collect();
            (
                f[0].to_string(),
                f[1].parse().unwrap(),
                f[2].parse().unwrap(),
            )
        })
        .collect();
    for (cell, geodesic) in areas {
        let (lons, lats): (Vec<f64>, Vec<f64>) = vertices
            .iter()
            .filter(|v| v.0 == cell)
            .map(|v| (v.1, v.2))
            .unzip();
        let centred = Projection::laea_for_points(&lons, &lats).unwrap();
        let mut projections = vec![centred];
        if lons[0] > -10.0 && lats[0] > 35.0 {
            projections.push(Projection::etrs89_laea().unwrap()); // European cells
        }
        for p in projections {
            let xy: Vec<(f64, f64)> = lons
                .iter()
                .zip(&lats)
                .map(|(&lo, &la)| p.forward(lo, la).unwrap())
                .collect();
            let rel = (shoelace(&xy) - geodesic).abs() / geodesic;
            // Required 0.1 %; equal-area maps with 200 vertices a side land near 1e-7,
            // the remainder being straight chords versus geodesic edges.
            assert!(rel < 1e-5, "{cell} in {p}: relative area error {rel}");
        }
        // A conformal projection is *not* equal-area: UTM's scale factor 0.9996 alone
        // shrinks areas by 0.08 %, so this check can tell the two apart.
        let utm = Projection::utm_for_points(&lons, &lats).unwrap();
        let xy: Vec<(f64, f64)> = lons
            .iter()
            .zip(&lats)
            .map(|(&lo, &la)| utm.forward(lo, la).unwrap())
            .collect();
        assert!((shoelace(&xy) - geodesic).abs() / geodesic > 1e-5);
    }
}

#[test]
fn automatic_zone_choice() {
    assert_eq!(utm_zone(-180.0), 1);
    assert_eq!(utm_zone(180.0), 60);
    assert_eq!(utm_zone(15.0), 33);
    // A set straddling the date line centres on it, not on Greenwich.
    let p = Projection::utm_for_points(&[179.5, -179.8, 179.9], &[-17.0, -16.5, -17.2]).unwrap();
    assert!(matches!(
        p.kind(),
        ProjectionKind::Utm {
            zone: 60 | 1,
            south: true
        }
    ));
    let q = Projection::utm_for_points(&[15.2, 16.1], &[60.0, 61.0]).unwrap();
    assert_eq!(q.epsg(), Some(32633));
    let c = Projection::laea_for_points(&[179.0, -179.0], &[10.0, 20.0]).unwrap();
    match c.kind() {
        ProjectionKind::Laea { lon0, lat0 } => {
            assert!((lon0.abs() - 180.0).abs() < 1e-9 && (lat0 - 15.0).abs() < 1e-12)
        }
        other => panic!("{other:?}"),
    }
}

#[test]
fn rejections_say_why() {
    assert_eq!(
        Projection::utm(0, false).unwrap_err(),
        ProjError::Zone { zone: 0 }
    );
    assert!(matches!(
        Projection::from_epsg(3857),
        Err(ProjError::Epsg { code: 3857 })
    ));
    assert_eq!(
        Projection::utm_for_points(&[], &[]).unwrap_err(),
        ProjError::NoPoints
    );
    let p = Projection::utm(33, false).unwrap();
    assert!(matches!(
        p.forward(200.0, 10.0),
        Err(ProjError::Coordinate { .. })
    ));
    assert!(matches!(
        p.inverse(f64::NAN, 0.0),
        Err(ProjError::Projected { .. })
    ));
}

#[test]
fn metres_per_degree_match_geodesic_lengths() {
    // Source: pyproj 3.7.2 Geod(ellps="WGS84").inv over 0.001° steps
    // (tests/fixtures/proj_pyproj/metres_per_degree.csv).
    for line in include_str!("fixtures/proj_pyproj/metres_per_degree.csv")
        .lines()
        .skip(1)
    {
        let v: Vec<f64> = line.split(',').map(|s| s.parse().unwrap()).collect();
        let (dlon, dlat) = metres_per_degree(v[0]);
        // Relative 1e-6: the radii of curvature are exact; the fixture's finite
        // 0.001° chord differs from the derivative by ~1e-9 relative.
        assert!((dlon - v[1]).abs() / v[1] < 1e-6, "{line}: {dlon}");
        assert!((dlat - v[2]).abs() / v[2] < 1e-6, "{line}: {dlat}");
    }
}
