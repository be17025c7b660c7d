//! End to end through `Study::load` + `prepare`: a tiny study with a class raster (UTM)
//! and a value raster (geographic), an animal table and standardisation. Expected values
//! are computed here by other routes (see tests/fixtures/covariates_tiny/PROVENANCE.md).

use std::path::{Path, PathBuf};

use cairn::geo::proj::Projection;
use cairn::prepare;
use cairn::study::Study;
use polars::prelude::*;

#[path = "support/geotiff_writer.rs"]
mod geotiff_writer;
use geotiff_writer::{U8GeoTiff, write_u8_geotiff};

const FIXTURE: &str = "tests/fixtures/covariates_tiny";

// Class raster: UTM 33N, 30 m cells, 300 x 300, upper-left corner (500 000, 6 662 000).
const CX0: f64 = 500_000.0;
const CY0: f64 = 6_662_000.0;
const CELL: f64 = 30.0;
const CSIDE: usize = 300;

/// Class code of cell (col, row); 255 is nodata, 7 is listed in no group.
fn class_code(col: usize, row: usize) -> u8 {
    if (100..=110).contains(&row) && (50..=60).contains(&col) {
        255
    } else if row < 10 {
        3
    } else if (200..=205).contains(&col) {
        7
    } else if col < 150 {
        1
    } else {
        2
    }
}

// Depth raster: EPSG:4326, 0.001° cells, 100 x 100 from (15.0 E, 60.1 N); stored value
// col + 1 (× 0.5 m by the study's scale), nodata 255 in columns 0..=9 ("land").
const DX0: f64 = 15.0;
const DY0: f64 = 60.1;
const DCELL: f64 = 0.001;
const DSIDE: usize = 100;

fn depth_code(col: usize) -> u8 {
    if col < 10 { 255 } else { (col + 1) as u8 }
}

fn write_rasters(dir: &Path) {
    let classes: Vec<u8> = (0..CSIDE * CSIDE)
        .map(|i| class_code(i % CSIDE, i / CSIDE))
        .collect();
    write_u8_geotiff(
        &dir.join("habitat.tif"),
        &U8GeoTiff {
            width: CSIDE as u32,
            height: CSIDE as u32,
            x0: CX0,
            y0: CY0,
            cell: CELL,
            epsg: 32633,
            geographic: false,
            nodata: "255",
            matrix: None,
            pixel_is_point: false,
        },
        &classes,
    )
    .unwrap();
    let depth: Vec<u8> = (0..DSIDE * DSIDE).map(|i| depth_code(i % DSIDE)).collect();
    write_u8_geotiff(
        &dir.join("depth.tif"),
        &U8GeoTiff {
            width: DSIDE as u32,
            height: DSIDE as u32,
            x0: DX0,
            y0: DY0,
            cell: DCELL,
            epsg: 4326,
            geographic: true,
            nodata: "255",
            matrix: None,
            pixel_is_point: false,
        },
        &depth,
    )
    .unwrap();
}

/// a1 in January (first fix on "land" for the depth layer), a2 in July (summer time in
/// Oslo), a3 in January running south off the class raster; hourly fixes.
fn write_fixes(dir: &Path) {
    let mut s = String::from("animal,time,lon,lat\n");
    for k in 0..10 {
        let lon = if k == 0 {
            15.005
        } else {
            15.02 + 0.007 * k as f64
        };
        s += &format!(
            "a1,2024-01-15T{:02}:30:00Z,{lon:.6},{:.6}\n",
            6 + k,
            60.03 + 0.001 * k as f64
        );
    }
    for k in 0..10 {
        s += &format!(
            "a2,2024-07-01T{:02}:00:00Z,{:.6},60.070000\n",
            8 + k,
            15.06 - 0.003 * k as f64
        );
    }
    for k in 0..8 {
        s += &format!(
            "a3,2024-01-20T{:02}:15:00Z,15.050000,{:.6}\n",
            10 + k,
            60.03 - 0.004 * k as f64
        );
    }
    std::fs::write(dir.join("fixes.csv"), s).unwrap();
}

fn setup() -> (tempfile::TempDir, PathBuf) {
    let d = tempfile::tempdir().unwrap();
    for f in ["study.toml", "animals.csv"] {
        std::fs::copy(Path::new(FIXTURE).join(f), d.path().join(f)).unwrap();
    }
    write_rasters(d.path());
    write_fixes(d.path());
    let study = d.path().join("study.toml");
    (d, study)
}

fn f64s(df: &DataFrame, name: &str) -> Vec<Option<f64>> {
    let c = df.column(name).unwrap().cast(&DataType::Float64).unwrap();
    let ca = c.f64().unwrap();
    (0..ca.len()).map(|i| ca.get(i)).collect()
}

fn strs(df: &DataFrame, name: &str) -> Vec<Option<String>> {
    let ca = df.column(name).unwrap().str().unwrap();
    (0..ca.len())
        .map(|i| ca.get(i).map(str::to_string))
        .collect()
}

/// Brute-force window counts: every cell whose centre is within 500 m of (x, y).
fn brute_counts(x: f64, y: f64) -> Option<(u32, u32, u32, u32)> {
    let inside =
        x >= CX0 && x <= CX0 + CSIDE as f64 * CELL && y <= CY0 && y >= CY0 - CSIDE as f64 * CELL;
    if !inside {
        return None;
    }
    let (mut cells, mut nodata, mut kelp, mut rock) = (0, 0, 0, 0);
    for row in 0..CSIDE {
        for col in 0..CSIDE {
            let cx = CX0 + (col as f64 + 0.5) * CELL;
            let cy = CY0 - (row as f64 + 0.5) * CELL;
            if (cx - x).powi(2) + (cy - y).powi(2) > 500.0 * 500.0 {
                continue;
            }
            cells += 1;
            match class_code(col, row) {
                255 => nodata += 1,
                1 => kelp += 1,
                2 | 3 => rock += 1,
                _ => {}
            }
        }
    }
    Some((cells, nodata, kelp, rock))
}

#[test]
fn prepare_writes_covariates_dictionary_and_missing_log() {
    let (d, study_path) = setup();
    let study = Study::load(&study_path).unwrap();
    let p = prepare::run(&study).unwrap();
    prepare::write(&study, &p, false).unwrap();
    let out = d.path().join("cairn-out");
    let df = ParquetReader::new(std::fs::File::open(out.join("steps.parquet")).unwrap())
        .finish()
        .unwrap();
    assert_eq!(df.height(), 9 + 9 + 7);
    let lon = f64s(&df, "lon");
    let lat = f64s(&df, "lat");
    let animal = strs(&df, "animal");
    let kelp = f64s(&df, "habitat_kelp");
    let rock = f64s(&df, "habitat_rock");
    let ndf = f64s(&df, "habitat_nodata_fraction");
    let depth = f64s(&df, "depth");
    let utm = Projection::utm(33, false).unwrap();

    let (mut outside, mut partial_rock, mut with_nodata) = (0, 0, 0);
    for i in 0..df.height() {
        let (lo, la) = (lon[i].unwrap(), lat[i].unwrap());
        let (x, y) = utm.forward(lo, la).unwrap();
        match brute_counts(x, y) {
            None => {
                outside += 1;
                assert_eq!((kelp[i], rock[i], ndf[i]), (None, None, None), "row {i}");
            }
            Some((cells, nodata, k, r)) => {
                let valid = f64::from(cells - nodata);
                assert!(
                    (kelp[i].unwrap() - f64::from(k) / valid).abs() < 1e-12,
                    "row {i}"
                );
                assert!(
                    (rock[i].unwrap() - f64::from(r) / valid).abs() < 1e-12,
                    "row {i}"
                );
                let nd = f64::from(nodata) / f64::from(cells);
                assert!((ndf[i].unwrap() - nd).abs() < 1e-12, "row {i}");
                partial_rock += usize::from(r > 0 && k > 0);
                with_nodata += usize::from(nodata > 0);
            }
        }
        // Depth: values linear in the column, so bilinear = 0.5·(u + 0.5) away from land.
        let u = (lo - DX0) / DCELL;
        if u - 0.5 < 10.0 {
            assert_eq!(depth[i], None, "row {i}: the neighbourhood touches land");
        } else {
            assert!(
                (depth[i].unwrap() - 0.5 * (u + 0.5)).abs() < 1e-9,
                "row {i}"
            );
        }
    }
    // The fixture exercises every branch.
    assert!(
        outside >= 2 && partial_rock >= 1 && with_nodata >= 1,
        "{outside} {partial_rock} {with_nodata}"
    );

    // Missing log: one row per missing cell, reasons as in the summary.
    let log = std::fs::read_to_string(out.join("covariate_missing.csv")).unwrap();
    let mut lines = log.lines();
    assert_eq!(lines.next(), Some("animal,time_utc,column,reason,detail"));
    let rows: Vec<Vec<&str>> = lines.map(|l| l.splitn(5, ',').collect()).collect();
    let count = |col: &str, reason: &str| {
        rows.iter()
            .filter(|r| r[2] == col && r[3] == reason)
            .count()
    };
    assert_eq!(count("habitat_kelp", "outside_raster"), outside);
    assert_eq!(count("habitat_nodata_fraction", "outside_raster"), outside);
    assert_eq!(count("depth", "nodata"), 1);
    assert!(
        rows.iter()
            .any(|r| r[0] == "a1" && r[2] == "depth" && r[4].contains("depth.tif"))
    );
    let a3_steps = animal.iter().filter(|a| a.as_deref() == Some("a3")).count();
    assert_eq!(count("sex", "animal_not_in_table"), a3_steps);
    assert_eq!(count("mass_kg", "animal_not_in_table"), a3_steps);

    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("prepare_summary.json")).unwrap())
            .unwrap();
    let cov = &summary["covariates"];
    assert_eq!(
        cov["missing"]["habitat_kelp"]["outside_raster"],
        outside as u64
    );
    assert_eq!(cov["missing"]["depth"]["nodata"], 1);
    assert_eq!(
        cov["missing"]["sex"]["animal_not_in_table"],
        a3_steps as u64
    );
    // Code 7 fills columns 200..=205 below row 9, except nothing else: 6 × 290 cells.
    assert_eq!(cov["unknown_class_codes"]["habitat"]["7"], 6 * 290);
    assert_eq!(cov["animals_without_attributes"], serde_json::json!(["a3"]));
    assert_eq!(
        cov["attribute_ids_without_steps"],
        serde_json::json!(["ghost"])
    );

    // Attributes joined by id.
    let sex = strs(&df, "sex");
    let mass = f64s(&df, "mass_kg");
    for i in 0..df.height() {
        let (s, m) = match animal[i].as_deref() {
            Some("a1") => (Some("F"), Some(10.5)),
            Some("a2") => (Some("M"), Some(14.0)),
            _ => (None, None),
        };
        assert_eq!(sex[i].as_deref(), s);
        assert_eq!(mass[i], m);
    }

    // Standardisation: recorded in columns.json, back-transformable.
    let dict: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("columns.json")).unwrap()).unwrap();
    let names: Vec<&str> = dict["columns"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c["name"].as_str().unwrap())
        .collect();
    let parquet_names: Vec<&str> = df.get_column_names().iter().map(|s| s.as_str()).collect();
    assert_eq!(
        names, parquet_names,
        "the dictionary lists every column in order"
    );
    for c in dict["columns"].as_array().unwrap() {
        assert!(c["source"].as_str().is_some_and(|s| !s.is_empty()), "{c}");
        assert!(
            c["transformation"].as_str().is_some_and(|s| !s.is_empty()),
            "{c}"
        );
    }
    let entry = |n: &str| {
        dict["columns"]
            .as_array()
            .unwrap()
            .iter()
            .find(|c| c["name"] == n)
            .unwrap()
            .clone()
    };
    assert_eq!(entry("depth")["unit"], "m");
    assert_eq!(entry("depth")["source"], "depth.tif");
    assert!(
        entry("habitat_kelp")["transformation"]
            .as_str()
            .unwrap()
            .contains("within 500 m (circle)")
    );
    assert_eq!(entry("sun_elevation_deg")["source"], "sun");
    assert_eq!(entry("season")["source"], "calendar");
    assert_eq!(entry("step_m")["source"], "tracks");
    let table = dict["standardisation"].as_array().unwrap();
    assert_eq!(table.len(), 2);
    for s in table {
        let col = s["column"].as_str().unwrap();
        let (mean, sd) = (s["mean"].as_f64().unwrap(), s["sd"].as_f64().unwrap());
        let x: Vec<f64> = f64s(&df, col).into_iter().flatten().collect();
        let n = x.len() as f64;
        let m = x.iter().sum::<f64>() / n;
        let v = x.iter().map(|a| (a - m).powi(2)).sum::<f64>() / (n - 1.0);
        assert!(
            (mean - m).abs() < 1e-12 && (sd - v.sqrt()).abs() < 1e-12,
            "{col}"
        );
        assert!(
            entry(&format!("{col}_z"))["transformation"]
                .as_str()
                .unwrap()
                .contains(&format!("({col} − {mean}) / {sd}"))
        );
        for (xi, zi) in f64s(&df, col).iter().zip(f64s(&df, &format!("{col}_z"))) {
            match (xi, zi) {
                (Some(x), Some(z)) => assert!((z * sd + mean - x).abs() < 1e-9),
                (None, None) => {}
                other => panic!("{col}: value and z disagree on missingness: {other:?}"),
            }
        }
    }
}

#[test]
fn clock_hour_season_and_cyclic_terms_follow_the_study_zone() {
    let (_d, study_path) = setup();
    let study = Study::load(&study_path).unwrap();
    let p = prepare::run(&study).unwrap();
    let c = &p.covariates;
    let hour = c.column("local_hour").unwrap();
    let cos = c.column("hour_cos").unwrap();
    let sin = c.column("hour_sin").unwrap();
    let season = c.column("season").unwrap();
    let doy = c.column("day_of_year").unwrap();
    for i in 0..p.steps.len() {
        let t = chrono::DateTime::from_timestamp_micros(p.steps.time_us[i]).unwrap();
        let local = t.with_timezone(&chrono_tz::Europe::Oslo);
        use chrono::{Datelike, Timelike};
        let h = f64::from(local.hour()) + f64::from(local.minute()) / 60.0;
        assert!((hour.values.float(i).unwrap() - h).abs() < 1e-12);
        let a = 2.0 * std::f64::consts::PI * h / 24.0;
        assert!((cos.values.float(i).unwrap() - a.cos()).abs() < 1e-12);
        assert!((sin.values.float(i).unwrap() - a.sin()).abs() < 1e-12);
        let want = if local.month() == 7 {
            "summer"
        } else {
            "winter"
        };
        assert_eq!(season.values.label(i), Some(want));
        assert_eq!(doy.values.float(i).unwrap(), f64::from(local.ordinal()));
    }
    // July in Oslo is UTC+2: the 08:00Z fix of a2 is at 10:00 local.
    let a2 = p.steps.animals.iter().position(|a| a == "a2").unwrap() as u32;
    let first = p.steps.animal.iter().position(|&a| a == a2).unwrap();
    assert_eq!(hour.values.float(first), Some(10.0));
}

#[test]
fn a_raster_that_covers_no_step_is_an_error_naming_the_file() {
    let (d, study_path) = setup();
    // Move the depth raster 10 degrees east: valid, but nowhere near the tracks.
    let depth: Vec<u8> = (0..DSIDE * DSIDE).map(|i| depth_code(i % DSIDE)).collect();
    write_u8_geotiff(
        &d.path().join("depth.tif"),
        &U8GeoTiff {
            width: DSIDE as u32,
            height: DSIDE as u32,
            x0: DX0 + 10.0,
            y0: DY0,
            cell: DCELL,
            epsg: 4326,
            geographic: true,
            nodata: "255",
            matrix: None,
            pixel_is_point: false,
        },
        &depth,
    )
    .unwrap();
    let study = Study::load(&study_path).unwrap();
    let e = prepare::run(&study).unwrap_err().to_string();
    assert!(e.contains("depth.tif") && e.contains("covers none"), "{e}");
}

#[test]
fn a_raster_in_an_unsupported_crs_is_an_error_naming_the_file() {
    let (d, study_path) = setup();
    std::fs::copy(
        "tests/fixtures/rasters/unsupported_3857.tif",
        d.path().join("habitat.tif"),
    )
    .unwrap();
    let study = Study::load(&study_path).unwrap();
    let e = prepare::run(&study).unwrap_err().to_string();
    assert!(
        e.contains("habitat.tif") && e.contains("not supported"),
        "{e}"
    );
}

#[test]
fn thread_count_changes_no_covariate() {
    let (_d, study_path) = setup();
    let study = Study::load(&study_path).unwrap();
    let run = |threads| {
        rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap()
            .install(|| prepare::run(&study).unwrap())
    };
    let (a, b) = (run(1), run(3));
    // Debug text compares floats exactly and treats the NaN of a missing value as equal.
    assert_eq!(
        format!("{:?}", a.covariates.columns),
        format!("{:?}", b.covariates.columns)
    );
    assert_eq!(a.covariates.missing, b.covariates.missing);
    assert_eq!(a.covariates.summary, b.covariates.summary);
}

#[test]
fn a_raster_without_georeferencing_is_an_error_naming_the_file() {
    let (d, study_path) = setup();
    std::fs::copy(
        "tests/fixtures/rasters/no_georef.tif",
        d.path().join("depth.tif"),
    )
    .unwrap();
    let study = Study::load(&study_path).unwrap();
    let e = prepare::run(&study).unwrap_err().to_string();
    assert!(
        e.contains("depth.tif") && e.contains("no georeferencing"),
        "{e}"
    );
}

#[test]
fn the_binary_prints_the_covariate_account_and_writes_the_new_files() {
    let (d, study_path) = setup();
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_cairn"))
        .args(["prepare", study_path.to_str().unwrap()])
        .output()
        .unwrap();
    let stdout = String::from_utf8_lossy(&out.stdout);
    // Nothing was excluded: missing covariates are reported, not counted as exclusions.
    assert_eq!(
        out.status.code(),
        Some(0),
        "{stdout}{}",
        String::from_utf8_lossy(&out.stderr)
    );
    for want in [
        "covariates: 17 columns",
        "missing depth",
        "nodata 1",
        "layer habitat: class codes in no group: 7 (1740 cells)",
        "animals missing from the attribute table: a3",
        "attribute-table ids without steps: ghost",
        "standardised depth",
        "standardised mass_kg",
    ] {
        assert!(stdout.contains(want), "{want:?} not in\n{stdout}");
    }
    for f in [
        "steps.parquet",
        "columns.json",
        "covariate_missing.csv",
        "prepare_summary.json",
    ] {
        assert!(d.path().join("cairn-out").join(f).is_file(), "{f}");
    }
}
