//! Covariate annotation throughput: prints figures, asserts nothing.
//!
//! 10^6 locations against a 6-class 5 000 × 5 000 categorical raster of 30 m cells
//! (class proportions within 500 m), a 5 000 × 5 000 float raster (bilinear), and the
//! sun (position + diel phase + solar hour) — once with 10^6 distinct instants, once
//! on a regular grid shared by 1 000 animals. Also times reading a 10 000 × 10 000
//! GeoTIFF. Figures depend on what else runs on the machine: the load average is
//! printed with them.

use std::time::Instant;

use cairn::geo::focal::{ClassGroup, ClassProportions, Window};
use cairn::geo::interp::bilinear_many_xy;
use cairn::geo::proj::Projection;
use cairn::geo::raster::{GeoTransform, Raster, RasterCrs, RasterData};
use cairn::geo::sun::{DielThresholds, annotate_fixes};
use chrono::{Duration, TimeZone, Utc};

#[path = "../tests/support/bench_landscape.rs"]
mod bench_landscape;
use bench_landscape::{Rng, load_average, patchy_classes};

#[path = "../tests/support/geotiff_writer.rs"]
mod geotiff_writer;
use geotiff_writer::{U8GeoTiff, write_u8_geotiff};

fn per_loc(secs: f64, n: usize) -> String {
    format!("{:.3} s ({:.0} ns/location)", secs, secs * 1e9 / n as f64)
}

fn main() {
    let n = 1_000_000;
    let side = 5_000usize;
    let (x0, y0, cell) = (400_000.0, 6_700_000.0, 30.0);
    let dir = std::env::temp_dir().join(format!("cairn-geo-bench-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    println!(
        "threads: {}, load average before: {}",
        rayon::current_num_threads(),
        load_average()
    );

    // Patchy 6-class landscape: classes in 10-cell blocks plus noise; 255 = nodata.
    let mut rng = Rng(2024);
    let classes = patchy_classes(side, &mut rng);
    let path = dir.join("classes.tif");
    let spec = |w: usize| U8GeoTiff {
        width: w as u32,
        height: w as u32,
        x0,
        y0,
        cell,
        epsg: 32633,
        geographic: false,
        nodata: "255",
        matrix: None,
        pixel_is_point: false,
    };
    write_u8_geotiff(&path, &spec(side), &classes).unwrap();
    drop(classes);
    let t = Instant::now();
    let raster = Raster::read(&path).unwrap();
    println!(
        "read 5000x5000 u8 GeoTIFF: {:.3} s",
        t.elapsed().as_secs_f64()
    );

    // Locations: uniform over the raster, as longitude/latitude (generated untimed).
    let utm = Projection::utm(33, false).unwrap();
    let extent = side as f64 * cell;
    let (lons, lats): (Vec<f64>, Vec<f64>) = (0..n)
        .map(|_| {
            utm.inverse(x0 + extent * rng.next(), y0 - extent * rng.next())
                .unwrap()
        })
        .unzip();

    let mut total = 0.0;
    let t = Instant::now();
    let (xs, ys) = raster.crs().from_lonlat_many(&lons, &lats);
    let proj_s = t.elapsed().as_secs_f64();
    total += proj_s;
    println!(
        "project 10^6 lon/lat to UTM (once, shared by both rasters): {}",
        per_loc(proj_s, n)
    );

    let groups: Vec<ClassGroup> = (0..6)
        .map(|k| ClassGroup::new(format!("class{k}"), [k]))
        .collect();
    for window in [Window::Square, Window::Circle] {
        let t = Instant::now();
        let cp = ClassProportions::build(&raster, groups.clone(), 500.0, window).unwrap();
        let pre = t.elapsed().as_secs_f64();
        let t = Instant::now();
        let out = cp.counts_many_xy(&xs, &ys);
        let q = t.elapsed().as_secs_f64();
        let ok = out.iter().filter(|r| r.is_ok()).count();
        println!(
            "class proportions {window:?} r=500 m: pre-pass {pre:.3} s; 10^6 locations {} ({ok} annotated)",
            per_loc(q, n)
        );
        if window == Window::Square {
            total += pre + q;
        }
    }
    drop(raster);

    // Float raster, bilinear.
    let floats: Vec<f32> = (0..side * side)
        .map(|i| ((i % 7919) as f32).sin() * 100.0)
        .collect();
    let fr = Raster::from_parts(
        "float",
        side,
        side,
        GeoTransform {
            x0,
            y0,
            dx: cell,
            dy: -cell,
        },
        RasterCrs::Projected(utm.clone()),
        Some(-9999.0),
        RasterData::F32(floats),
    )
    .unwrap();
    let t = Instant::now();
    let vals = bilinear_many_xy(&fr, &xs, &ys);
    let b = t.elapsed().as_secs_f64();
    total += b;
    println!(
        "bilinear f32 5000x5000: 10^6 locations {} ({} valued)",
        per_loc(b, n),
        vals.iter().filter(|v| v.is_ok()).count()
    );
    drop(fr);

    // Sun: distinct instants (worst case) and a shared regular grid.
    let start = Utc.with_ymd_and_hms(2023, 3, 1, 0, 0, 0).unwrap();
    let th = DielThresholds::default();
    let times: Vec<_> = (0..n)
        .map(|i| start + Duration::seconds(i as i64 * 37))
        .collect();
    let t = Instant::now();
    let sun = annotate_fixes(&times, &lons, &lats, &th).unwrap();
    let s1 = t.elapsed().as_secs_f64();
    total += s1;
    let twilight = sun.iter().filter(|a| a.phase.is_twilight()).count();
    println!(
        "sun, 10^6 distinct instants over 428 days: {} ({twilight} in twilight)",
        per_loc(s1, n)
    );
    let grid: Vec<_> = (0..n)
        .map(|i| start + Duration::hours((i % 1000) as i64))
        .collect();
    let t = Instant::now();
    annotate_fixes(&grid, &lons, &lats, &th).unwrap();
    println!(
        "sun, 1000 animals on a shared 1000-step hourly grid: {}",
        per_loc(t.elapsed().as_secs_f64(), n)
    );
    println!(
        "total (projection + square pre-pass + proportions + bilinear + sun distinct): {total:.3} s (target <= 5 s)"
    );

    // 10 000 x 10 000 read.
    let big: Vec<u8> = (0..10_000usize * 10_000).map(|i| (i % 6) as u8).collect();
    let bpath = dir.join("big.tif");
    write_u8_geotiff(&bpath, &spec(10_000), &big).unwrap();
    drop(big);
    let t = Instant::now();
    let r = Raster::read(&bpath).unwrap();
    println!(
        "read 10000x10000 u8 GeoTIFF: {:.3} s ({} MB of samples)",
        t.elapsed().as_secs_f64(),
        r.data().len() / 1_000_000
    );
    drop(r);
    std::fs::remove_dir_all(&dir).unwrap();
    println!("load average after: {}", load_average());
}
