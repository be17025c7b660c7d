//! Class proportions in a radius against a brute-force count over every cell.

use cairn::geo::focal::{
    ClassGroup, ClassProportions, FocalError, FocalMiss, Window, WindowCounts,
};
use cairn::geo::proj::{Projection, metres_per_degree};
use cairn::geo::raster::{GeoTransform, Raster, RasterCrs, RasterData};

/// Small seeded generator (xorshift64*), so the test is reproducible.
struct Rng(u64);
impl Rng {
    fn next(&mut self) -> f64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        (self.0.wrapping_mul(0x2545_F491_4F6C_DD1D) >> 11) as f64 / (1u64 << 53) as f64
    }
    fn below(&mut self, n: usize) -> usize {
        (self.next() * n as f64) as usize % n
    }
}

/// Count by visiting every cell and testing its centre against the window definition.
fn brute_force(
    r: &Raster,
    groups: &[ClassGroup],
    radius: f64,
    window: Window,
    x: f64,
    y: f64,
) -> WindowCounts {
    let (mx, my) = match r.crs() {
        RasterCrs::Geographic => metres_per_degree(y),
        RasterCrs::Projected(_) => (1.0, 1.0),
    };
    let mut c = WindowCounts {
        cells: 0,
        nodata: 0,
        per_group: vec![0; groups.len()],
    };
    for row in 0..r.height() {
        for col in 0..r.width() {
            let (cx, cy) = r.cell_centre(col, row);
            let (ex, ey) = ((cx - x) * mx, (cy - y) * my);
            let inside = match window {
                Window::Square => ex.abs() <= radius && ey.abs() <= radius,
                Window::Circle => ex * ex + ey * ey <= radius * radius,
            };
            if !inside {
                continue;
            }
            c.cells += 1;
            match r.cell_value(col, row) {
                None => c.nodata += 1,
                Some(v) => {
                    for (g, group) in groups.iter().enumerate() {
                        if group.codes.contains(&(v as i64)) {
                            c.per_group[g] += 1;
                        }
                    }
                }
            }
        }
    }
    c
}

fn random_raster(rng: &mut Rng, geographic: bool, kind: usize) -> Raster {
    let (w, h) = (1 + rng.below(35), 1 + rng.below(35));
    random_raster_sized(rng, geographic, kind, w, h)
}

fn random_raster_sized(rng: &mut Rng, geographic: bool, kind: usize, w: usize, h: usize) -> Raster {
    let n = w * h;
    // Codes 0..6; nodata code 6 (or none) sprinkled at random.
    let codes: Vec<i64> = (0..n).map(|_| rng.below(7) as i64).collect();
    let nodata = if rng.next() < 0.8 { Some(6.0) } else { None };
    let data = match kind {
        0 => RasterData::U8(codes.iter().map(|&v| v as u8).collect()),
        1 => RasterData::U16(codes.iter().map(|&v| v as u16 * 300).collect()),
        2 => RasterData::I16(codes.iter().map(|&v| v as i16 - 3).collect()),
        _ => RasterData::I32(codes.iter().map(|&v| v as i32 * 100_000 - 7).collect()),
    };
    let nodata = nodata.map(|nd| match kind {
        0 => nd,
        1 => nd * 300.0,
        2 => nd - 3.0,
        _ => nd * 100_000.0 - 7.0,
    });
    let (crs, t) = if geographic {
        let d = 0.0005 + 0.002 * rng.next();
        let lat0 = -70.0 + 140.0 * rng.next();
        (
            RasterCrs::Geographic,
            GeoTransform {
                x0: 20.0,
                y0: lat0,
                dx: d,
                dy: -d * (0.5 + rng.next()),
            },
        )
    } else {
        let d = 10.0 + 40.0 * rng.next();
        let crs = RasterCrs::Projected(Projection::utm(33, rng.next() < 0.5).unwrap());
        (
            crs,
            GeoTransform {
                x0: 400_000.0,
                y0: 5_000_000.0,
                dx: d,
                dy: -d * (0.5 + rng.next()),
            },
        )
    };
    Raster::from_parts("random", w, h, t, crs, nodata, data).unwrap()
}

fn groups_for(r: &Raster) -> Vec<ClassGroup> {
    let code = |k: i64| match r.data() {
        RasterData::U8(_) => k,
        RasterData::U16(_) => k * 300,
        RasterData::I16(_) => k - 3,
        _ => k * 100_000 - 7,
    };
    vec![
        ClassGroup::new("a", [code(0), code(1)]),
        ClassGroup::new("b", [code(2)]),
        ClassGroup::new("c", [code(3), code(4), code(5)]),
        // Nodata code listed in a group must still never count as that group.
        ClassGroup::new("d", [code(5), code(6)]),
    ]
}

#[test]
fn summed_area_counts_equal_brute_force() {
    let mut rng = Rng(0x0c1a_55e5);
    let mut compared = 0;
    let mut edge_windows = 0;
    for trial in 0..240 {
        let geographic = trial % 3 == 0;
        let r = random_raster(&mut rng, geographic, trial % 4);
        let groups = groups_for(&r);
        let t = *r.transform();
        let cell_m = if geographic {
            t.dx.abs() * metres_per_degree(t.y0).1
        } else {
            t.dx.abs()
        };
        let radius = cell_m * (0.3 + 8.0 * rng.next());
        let window = if trial % 2 == 0 {
            Window::Square
        } else {
            Window::Circle
        };
        let cp = ClassProportions::build(&r, groups.clone(), radius, window).unwrap();
        for _ in 0..25 {
            // Anywhere inside the extent, so many windows cross the edge.
            let (x, y) = t.to_world(
                rng.next() * r.width() as f64,
                rng.next() * r.height() as f64,
            );
            let got = cp.counts_xy(x, y).unwrap();
            let want = brute_force(&r, &groups, radius, window, x, y);
            assert_eq!(
                got, want,
                "trial {trial} at ({x}, {y}), radius {radius}, {window:?}"
            );
            if (got.cells as usize) < r.width().min(r.height()) {
                edge_windows += 1;
            }
            if let Some(f) = got.nodata_fraction() {
                assert!((0.0..=1.0).contains(&f));
            }
            let total: f64 = (0..3).filter_map(|g| got.proportion(g)).sum();
            assert!(total <= 1.0 + 1e-12);
            compared += 1;
        }
    }
    assert_eq!(compared, 240 * 25);
    assert!(
        edge_windows > 100,
        "too few windows at the edge: {edge_windows}"
    );
}

#[test]
fn proportions_in_a_known_window() {
    // 4 x 4 cells of 30 m; codes by row: 1 1 2 2 / 1 0 2 2 / 3 3 3 3 / 1 1 1 1; 0 = nodata.
    let data = RasterData::U8(vec![1, 1, 2, 2, 1, 0, 2, 2, 3, 3, 3, 3, 1, 1, 1, 1]);
    let t = GeoTransform {
        x0: 500_000.0,
        y0: 5_000_120.0,
        dx: 30.0,
        dy: -30.0,
    };
    let crs = RasterCrs::Projected(Projection::utm(32, false).unwrap());
    let r = Raster::from_parts("known", 4, 4, t, crs, Some(0.0), data).unwrap();
    let groups = vec![ClassGroup::new("one", [1]), ClassGroup::new("three", [3])];
    let cp = ClassProportions::build(&r, groups, 31.0, Window::Square).unwrap();
    // At the centre of cell (1,1) the window is cells 0..=2 × 0..=2: one nodata, of the
    // eight valid cells three are code 1 and three are code 3.
    let c = cp.counts_xy(500_045.0, 5_000_075.0).unwrap();
    assert_eq!((c.cells, c.nodata), (9, 1));
    assert_eq!(c.proportion(0), Some(3.0 / 8.0));
    assert_eq!(c.proportion(1), Some(3.0 / 8.0));
    assert_eq!(c.nodata_fraction(), Some(1.0 / 9.0));
    // Corner cell (0,0): only the 2 x 2 cells inside the raster count.
    let c = cp.counts_xy(500_015.0, 5_000_105.0).unwrap();
    assert_eq!((c.cells, c.nodata, c.per_group.clone()), (4, 1, vec![3, 0]));
    // A 30 m circle from a cell centre reaches the four edge neighbours, not the diagonals.
    let disc = ClassProportions::build(&r, vec![ClassGroup::new("one", [1])], 30.0, Window::Circle)
        .unwrap();
    assert_eq!(disc.counts_xy(500_045.0, 5_000_075.0).unwrap().cells, 5);
    // Outside the raster: no proportions, and the reason.
    assert_eq!(
        cp.counts_xy(499_990.0, 5_000_075.0),
        Err(FocalMiss::OutsideRaster)
    );
    assert_eq!(cp.counts_lonlat(f64::NAN, 0.0), Err(FocalMiss::Coordinate));
}

#[test]
fn lonlat_batch_matches_single_queries() {
    let mut rng = Rng(7);
    let r = random_raster(&mut rng, false, 0);
    let cp = ClassProportions::build(&r, groups_for(&r), 75.0, Window::Circle).unwrap();
    let p = match r.crs() {
        RasterCrs::Projected(p) => p.clone(),
        RasterCrs::Geographic => unreachable!(),
    };
    let (mut lons, mut lats) = (Vec::new(), Vec::new());
    for _ in 0..200 {
        let t = r.transform();
        let (x, y) = t.to_world(
            rng.next() * 1.2 * r.width() as f64,
            rng.next() * r.height() as f64,
        );
        let (lon, lat) = p.inverse(x, y).unwrap();
        lons.push(lon);
        lats.push(lat);
    }
    let batch = cp.counts_many_lonlat(&lons, &lats);
    for i in 0..lons.len() {
        assert_eq!(batch[i], cp.counts_lonlat(lons[i], lats[i]));
    }
}

#[test]
fn invalid_settings_are_refused() {
    let t = GeoTransform {
        x0: 0.0,
        y0: 1.0,
        dx: 0.5,
        dy: -0.5,
    };
    let float = Raster::from_parts(
        "f.tif",
        2,
        2,
        t,
        RasterCrs::Geographic,
        None,
        RasterData::F32(vec![0.0; 4]),
    )
    .unwrap();
    let e = ClassProportions::build(
        &float,
        vec![ClassGroup::new("x", [1])],
        10.0,
        Window::Square,
    )
    .unwrap_err();
    assert!(matches!(e, FocalError::NotCategorical { .. }) && e.to_string().contains("f.tif"));
    let ints = Raster::from_parts(
        "i.tif",
        2,
        2,
        t,
        RasterCrs::Geographic,
        None,
        RasterData::U8(vec![0; 4]),
    )
    .unwrap();
    assert!(matches!(
        ClassProportions::build(&ints, vec![ClassGroup::new("x", [1])], 0.0, Window::Square),
        Err(FocalError::Radius { .. })
    ));
    assert!(matches!(
        ClassProportions::build(&ints, vec![], 10.0, Window::Square),
        Err(FocalError::Groups { .. })
    ));
    assert!(matches!(
        ClassProportions::build(
            &ints,
            vec![ClassGroup::new("empty", Vec::<i64>::new())],
            10.0,
            Window::Square
        ),
        Err(FocalError::Groups { .. })
    ));
}

#[test]
fn sixty_four_groups_keep_nodata_apart() {
    // The largest number of groups allowed: nodata must stay out of every group even
    // when its table is the 65th.
    let t = GeoTransform {
        x0: 500_000.0,
        y0: 5_000_030.0,
        dx: 10.0,
        dy: -10.0,
    };
    let crs = RasterCrs::Projected(Projection::utm(33, false).unwrap());
    let data = RasterData::U8(vec![0, 1, 2, 3, 200, 5, 63, 64, 0]);
    let r = Raster::from_parts("g64", 3, 3, t, crs, Some(200.0), data).unwrap();
    let groups: Vec<ClassGroup> = (0..64)
        .map(|k| ClassGroup::new(format!("g{k}"), [k]))
        .collect();
    for window in [Window::Square, Window::Circle] {
        let cp = ClassProportions::build(&r, groups.clone(), 15.0, window).unwrap();
        let got = cp.counts_xy(500_015.0, 5_000_015.0).unwrap();
        let want = brute_force(&r, &groups, 15.0, window, 500_015.0, 5_000_015.0);
        assert_eq!(got, want, "{window:?}");
        assert_eq!(got.nodata, 1);
        assert_eq!((got.cells, got.per_group[0], got.per_group[63]), (9, 2, 1));
    }
}

#[test]
fn wide_circle_windows_equal_brute_force() {
    // Rows longer than one 64-cell word, widths on and around multiples of 64, and
    // discs from under one cell to over two words across, so runs start and end in
    // every position relative to the words (including the raster's last column).
    let mut rng = Rng(0x5eed_f0ca_1d15);
    let widths = [63, 64, 65, 127, 128, 129, 192, 200, 257];
    let mut multi_word = 0;
    for trial in 0..90 {
        let geographic = trial % 3 == 0;
        let w = widths[trial % widths.len()];
        let h = 1 + rng.below(40);
        let r = random_raster_sized(&mut rng, geographic, trial % 4, w, h);
        let groups = groups_for(&r);
        let t = *r.transform();
        let cell_m = if geographic {
            t.dx.abs() * metres_per_degree(t.y0).1
        } else {
            t.dx.abs()
        };
        let radius = cell_m * (0.4 + 90.0 * rng.next() * rng.next());
        let cp = ClassProportions::build(&r, groups.clone(), radius, Window::Circle).unwrap();
        for _ in 0..20 {
            let (x, y) = t.to_world(rng.next() * w as f64, rng.next() * h as f64);
            let got = cp.counts_xy(x, y).unwrap();
            let want = brute_force(&r, &groups, radius, Window::Circle, x, y);
            assert_eq!(
                got, want,
                "trial {trial} ({w} x {h}) at ({x}, {y}), radius {radius}"
            );
            if got.cells as usize > 64 * h {
                multi_word += 1;
            }
        }
    }
    assert!(
        multi_word > 100,
        "too few windows with rows over 64 cells: {multi_word}"
    );
}

#[test]
fn circle_at_the_pole_equals_brute_force() {
    // A geographic raster reaching 90° N, 150 columns of 0.5° and 30 rows of 0.0005°
    // (1.65 km): a degree of longitude shrinks to at most 29 m there, so the raster is
    // at most 2.2 km wide and a 3 km disc centred anywhere on it holds every cell,
    // its column spans running far past both edges.
    let mut rng = Rng(90);
    let (w, h) = (150, 30);
    let data = RasterData::U8((0..w * h).map(|_| rng.below(7) as u8).collect());
    let t = GeoTransform {
        x0: -20.0,
        y0: 90.0,
        dx: 0.5,
        dy: -0.0005,
    };
    let r = Raster::from_parts("pole", w, h, t, RasterCrs::Geographic, Some(6.0), data).unwrap();
    let groups = groups_for(&r);
    let cp = ClassProportions::build(&r, groups.clone(), 3_000.0, Window::Circle).unwrap();
    for _ in 0..60 {
        let (x, y) = t.to_world(rng.next() * w as f64, rng.next() * h as f64);
        let got = cp.counts_xy(x, y).unwrap();
        assert_eq!(
            got,
            brute_force(&r, &groups, 3_000.0, Window::Circle, x, y),
            "at ({x}, {y})"
        );
        assert_eq!(got.cells as usize, w * h, "at ({x}, {y})");
    }
}
