//! Covariate annotation of 10^6 steps, end to end through `covariates::annotate`:
//! prints figures, asserts nothing.
//!
//! 1 000 animals × 1 000 steps spread over a 6-class 5 000 × 5 000 categorical raster of
//! 30 m cells (UTM 33N; proportions of every class within a 500 m circle), a
//! 5 000 × 5 000 f32 bathymetry raster on the same grid (bilinear), the sun (position,
//! diel phase, solar hour), clock hour in Europe/Oslo, cyclic terms, day of year,
//! meteorological season and two standardised columns. The raster pre-pass
//! (per-row class bit planes + class census) is printed separately from the look-ups. The
//! load average is printed with the figures, which depend on what else runs.

use std::path::PathBuf;
use std::time::Instant;

use cairn::covariates::config::{CovariateConfig, RasterKind, RasterLayer};
use cairn::covariates::{HourKind, annotate};
use cairn::geo::focal::{ClassGroup, Window};
use cairn::geo::proj::Projection;
use cairn::tracks::class::LocClass;
use cairn::tracks::metrics::Steps;

#[path = "../tests/support/bench_landscape.rs"]
mod bench_landscape;
use bench_landscape::{Rng, load_average, patchy_classes};

#[path = "../tests/support/geotiff_writer.rs"]
mod geotiff_writer;
use geotiff_writer::{U8GeoTiff, write_f32_geotiff, write_u8_geotiff};

fn main() {
    let (animals, per_animal) = (1_000usize, 1_000usize);
    let n = animals * per_animal;
    let side = 5_000usize;
    let (x0, y0, cell) = (400_000.0, 6_700_000.0, 30.0);
    let dir = std::env::temp_dir().join(format!("cairn-cov-bench-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    println!(
        "threads: {}, load average before: {}",
        rayon::current_num_threads(),
        load_average()
    );

    // Patchy 6-class landscape (classes in 10-cell blocks plus noise; 255 = nodata),
    // and a smooth bathymetry with a nodata "island".
    let mut rng = Rng(2024);
    let classes = patchy_classes(side, &mut rng);
    let spec = U8GeoTiff {
        width: side as u32,
        height: side as u32,
        x0,
        y0,
        cell,
        epsg: 32633,
        geographic: false,
        nodata: "255",
        matrix: None,
        pixel_is_point: false,
    };
    let class_path = dir.join("habitat.tif");
    write_u8_geotiff(&class_path, &spec, &classes).unwrap();
    drop(classes);
    let depth: Vec<f32> = (0..side * side)
        .map(|i| {
            let (c, r) = ((i % side) as f32, (i / side) as f32);
            let island = (c - 2500.0).powi(2) + (r - 2500.0).powi(2) < 300.0f32.powi(2);
            if island {
                -9999.0
            } else {
                5.0 + 0.01 * c + 20.0 * (r / 700.0).sin()
            }
        })
        .collect();
    let depth_path = dir.join("depth.tif");
    write_f32_geotiff(
        &depth_path,
        &U8GeoTiff {
            nodata: "-9999",
            ..spec
        },
        &depth,
    )
    .unwrap();
    drop(depth);

    // Steps: random walks inside the raster, hourly, each animal starting on its own day.
    let utm = Projection::utm(33, false).unwrap();
    let extent = side as f64 * cell;
    let mut steps = Steps {
        animals: (0..animals).map(|a| format!("animal{a:04}")).collect(),
        ..Steps::default()
    };
    let t0 = 1_672_531_200_000_000i64; // 2023-01-01T00:00:00Z
    for a in 0..animals {
        let (mut x, mut y) = (
            x0 + extent * (0.05 + 0.9 * rng.next()),
            y0 - extent * (0.05 + 0.9 * rng.next()),
        );
        for k in 0..per_animal {
            x = (x + 300.0 * (rng.next() - 0.5)).clamp(x0 + 1.0, x0 + extent - 1.0);
            y = (y + 300.0 * (rng.next() - 0.5)).clamp(y0 - extent + 1.0, y0 - 1.0);
            let (lon, lat) = utm.inverse(x, y).unwrap();
            steps.animal.push(a as u32);
            steps.segment.push(1);
            steps
                .time_us
                .push(t0 + (a as i64 * 86_400 + k as i64 * 3_637) * 1_000_000);
            steps.lon.push(lon);
            steps.lat.push(lat);
            steps.step_m.push(100.0);
            steps.bearing_deg.push(0.0);
            steps.turn_rad.push(0.0);
            steps.dt_s.push(3_637.0);
            steps.class.push(Some(LocClass::Gps));
            steps.se_m.push(f64::NAN);
        }
    }

    let groups: Vec<ClassGroup> = (0..6)
        .map(|k| ClassGroup::new(format!("class{k}"), [k]))
        .collect();
    let cfg = CovariateConfig {
        hour: HourKind::Clock,
        rasters: vec![
            RasterLayer {
                name: "habitat".into(),
                file: "habitat.tif".into(),
                path: PathBuf::from(&class_path),
                kind: RasterKind::Classes {
                    radius_m: 500.0,
                    window: Window::Circle,
                    groups,
                },
            },
            RasterLayer {
                name: "depth".into(),
                file: "depth.tif".into(),
                path: PathBuf::from(&depth_path),
                kind: RasterKind::Value {
                    unit: "m".into(),
                    scale: 1.0,
                    label: None,
                },
            },
        ],
        standardise: vec!["habitat_class0".into(), "depth".into()],
        ..CovariateConfig::default()
    };

    let t = Instant::now();
    let a = annotate(&steps, &cfg, chrono_tz::Europe::Oslo).unwrap();
    let total = t.elapsed().as_secs_f64();
    let tm = &a.timings;
    let ns = |s: f64| s * 1e9 / n as f64;
    println!("10^6 steps, {} covariate columns", a.columns.len());
    println!(
        "  sun + calendar (position, diel phase, clock/solar hour, cyclic, day, season): {:.3} s ({:.0} ns/step)",
        tm.sun_calendar_s,
        ns(tm.sun_calendar_s)
    );
    println!(
        "  raster files read (5000x5000 u8 + f32):     {:.3} s",
        tm.raster_read_s
    );
    println!(
        "  projection to UTM (once for both rasters):   {:.3} s",
        tm.projection_s
    );
    println!(
        "  class raster pre-pass (row bit planes of 6 classes + nodata, class census): {:.3} s",
        tm.raster_prepass_s
    );
    println!(
        "  look-ups (500 m circle proportions + bilinear depth): {:.3} s ({:.0} ns/step)",
        tm.raster_lookup_s,
        ns(tm.raster_lookup_s)
    );
    println!(
        "  standardisation (2 columns):                {:.3} s",
        tm.attributes_standardise_s
    );
    println!(
        "  missing cells: {} ({:?})",
        a.missing.len(),
        a.summary.missing
    );
    println!(
        "total annotate: {total:.3} s; without reading the files: {:.3} s (target <= 5 s)",
        total - tm.raster_read_s
    );
    std::fs::remove_dir_all(&dir).unwrap();
    println!("load average after: {}", load_average());
}
