//! Calendar and sun terms through `Study::load` + `prepare::run`: study-defined seasons
//! that wrap the year end, the leap day, southern-hemisphere labels, the day of year in
//! the study's zone, cyclic hour encodings, diel thresholds, standardisation limits.

use cairn::covariates::Annotated;
use cairn::geo::sun::local_solar_hour;
use cairn::prepare;
use cairn::study::Study;
use chrono::{DateTime, Utc};

/// A study with one animal `x` and the given fixes (`time,lon,lat` lines), one segment.
fn run(timezone: &str, covariates: &str, fixes: &[&str]) -> (Vec<DateTime<Utc>>, Annotated) {
    let d = tempfile::tempdir().unwrap();
    let mut csv = String::from("animal,time,lon,lat\n");
    for f in fixes {
        csv += &format!("x,{f}\n");
    }
    std::fs::write(d.path().join("fixes.csv"), csv).unwrap();
    let study = format!(
        "[study]\nname = \"calendar\"\n[fixes]\nfiles = [\"fixes.csv\"]\ntimezone = \"{timezone}\"\n\
         [fixes.columns]\nanimal = \"animal\"\ntime = \"time\"\nlon = \"lon\"\nlat = \"lat\"\n\
         [tracks]\ngap = \"800 d\"\n{covariates}"
    );
    let path = d.path().join("study.toml");
    std::fs::write(&path, study).unwrap();
    let s = Study::load(&path).unwrap();
    let p = prepare::run(&s).unwrap();
    let times = p
        .steps
        .time_us
        .iter()
        .map(|&t| DateTime::from_timestamp_micros(t).unwrap())
        .collect();
    (times, p.covariates)
}

fn labels(a: &Annotated, col: &str) -> Vec<String> {
    let c = a.column(col).unwrap();
    (0..count(a))
        .map(|i| c.values.label(i).unwrap().to_string())
        .collect()
}

fn count(a: &Annotated) -> usize {
    match &a.column("hour_cos").unwrap().values {
        cairn::covariates::Values::Float(v) => v.len(),
        _ => unreachable!(),
    }
}

const WET_DRY: &str = "[[covariates.season]]\nname = \"wet\"\nfrom = \"11-01\"\nto = \"04-30\"\n\
                       [[covariates.season]]\nname = \"dry\"\nfrom = \"05-01\"\nto = \"10-31\"\n";

#[test]
fn study_seasons_wrap_the_year_end() {
    let (_, a) = run(
        "UTC",
        WET_DRY,
        &[
            "2023-10-31 12:00,15,60",
            "2023-11-01 12:00,15.001,60",
            "2023-12-31 23:59,15.002,60",
            "2024-01-01 00:00,15.003,60",
            "2024-04-30 12:00,15.004,60",
            "2024-05-01 12:00,15.005,60",
            "2024-05-02 12:00,15.006,60",
        ],
    );
    assert_eq!(
        labels(&a, "season"),
        ["dry", "wet", "wet", "wet", "wet", "dry"]
    );
    assert_eq!(a.summary.seasons, "study-defined");
}

#[test]
fn the_leap_day_goes_with_february_28_unless_named() {
    let seasons = "[[covariates.season]]\nname = \"cold\"\nfrom = \"12-01\"\nto = \"02-28\"\n\
                   [[covariates.season]]\nname = \"warm\"\nfrom = \"03-01\"\nto = \"11-30\"\n";
    let fixes = [
        "2024-02-28 12:00,15,60",
        "2024-02-29 12:00,15.001,60",
        "2024-03-01 12:00,15.002,60",
        "2024-12-31 12:00,15.003,60",
        "2025-01-01 12:00,15.004,60",
    ];
    let (_, a) = run("UTC", seasons, &fixes);
    assert_eq!(labels(&a, "season"), ["cold", "cold", "warm", "cold"]);
    let doy = a.column("day_of_year").unwrap();
    let days: Vec<f64> = (0..4).map(|i| doy.values.float(i).unwrap()).collect();
    assert_eq!(days, [59.0, 60.0, 61.0, 366.0]);

    // A season may name 02-29 itself; then it is not added to February 28's season.
    let seasons = "[[covariates.season]]\nname = \"cold\"\nfrom = \"12-01\"\nto = \"02-28\"\n\
                   [[covariates.season]]\nname = \"warm\"\nfrom = \"02-29\"\nto = \"11-30\"\n";
    let (_, a) = run("UTC", seasons, &fixes);
    assert_eq!(labels(&a, "season"), ["cold", "warm", "warm", "cold"]);

    // Meteorological: 29 February is winter in the north.
    let (_, a) = run("UTC", "", &fixes);
    assert_eq!(
        labels(&a, "season"),
        ["winter", "winter", "spring", "winter"]
    );
}

#[test]
fn meteorological_seasons_follow_the_latitude_sign() {
    let (_, a) = run(
        "UTC",
        "",
        &[
            "2024-01-15 12:00,151.2,-33.9",
            "2024-04-15 12:00,151.2,-33.9",
            "2024-07-15 12:00,151.2,-33.9",
            "2024-10-15 12:00,151.2,-33.9",
            "2024-10-16 12:00,151.2,0.0",
            "2024-10-17 12:00,10.0,0.0",
        ],
    );
    assert_eq!(
        labels(&a, "season"),
        ["summer", "autumn", "winter", "spring", "autumn"]
    );
}

#[test]
fn day_of_year_and_season_use_the_local_date() {
    // 23:30 UTC on 31 December is already 1 January in Auckland (UTC+13 in summer).
    let (_, a) = run(
        "Pacific/Auckland",
        "",
        &[
            "2024-12-31T23:30:00Z,174.8,-36.8",
            "2025-01-01T02:00:00Z,174.81,-36.8",
        ],
    );
    assert_eq!(a.column("day_of_year").unwrap().values.float(0), Some(1.0));
    assert_eq!(a.column("local_hour").unwrap().values.float(0), Some(12.5));
    assert_eq!(labels(&a, "season"), ["summer"]);
}

#[test]
fn solar_hour_drives_the_cyclic_terms_when_chosen() {
    let fixes = [
        "2024-03-01 00:00,-120,45",
        "2024-03-01 05:00,-119.9,45",
        "2024-03-01 10:00,-119.8,45",
        "2024-03-01 17:00,-119.7,45",
        "2024-03-01 23:00,-119.6,45",
    ];
    let (times, a) = run("UTC", "[covariates]\nhour = \"solar\"\n", &fixes);
    let lon = [-120.0, -119.9, -119.8, -119.7];
    let solar = a.column("solar_hour").unwrap();
    let (c, s) = (a.column("hour_cos").unwrap(), a.column("hour_sin").unwrap());
    for i in 0..4 {
        let h = solar.values.float(i).unwrap();
        // Independent route: UTC + λ/15 + equation of time (a few seconds apart).
        assert!(
            (h - local_solar_hour(&times[i], lon[i])).abs() < 0.01,
            "{i}: {h}"
        );
        let ang = std::f64::consts::TAU * h / 24.0;
        assert!((c.values.float(i).unwrap() - ang.cos()).abs() < 1e-12);
        assert!((s.values.float(i).unwrap() - ang.sin()).abs() < 1e-12);
        // cos² + sin² = 1: a point on the circle, so 23:59 and 00:01 are close.
        let (x, y) = (c.values.float(i).unwrap(), s.values.float(i).unwrap());
        assert!((x * x + y * y - 1.0).abs() < 1e-12);
    }
    assert!(
        a.column("hour_cos")
            .unwrap()
            .transformation
            .contains("solar_hour")
    );

    // The clock hour in UTC is the wall time itself.
    let (_, a) = run("UTC", "", &fixes);
    let clock: Vec<f64> = (0..4)
        .map(|i| a.column("local_hour").unwrap().values.float(i).unwrap())
        .collect();
    assert_eq!(clock, [0.0, 5.0, 10.0, 17.0]);
    let c0 = a.column("hour_cos").unwrap().values.float(0).unwrap();
    assert_eq!(c0, 1.0);
}

#[test]
fn diel_thresholds_from_the_study_file_are_used() {
    // Oslo, spring equinox: the sun crosses 0–10° in the morning.
    let mut fixes = Vec::new();
    for m in 0..40 {
        fixes.push(format!(
            "2024-03-20T{:02}:{:02}:00Z,10.75,59.9",
            4 + m / 6,
            (m % 6) * 10
        ));
    }
    let fixes: Vec<&str> = fixes.iter().map(String::as_str).collect();
    let (_, a) = run(
        "UTC",
        "[covariates.diel]\nday = \"10 deg\"\ncivil = \"-6 deg\"\n",
        &fixes,
    );
    let elev = a.column("sun_elevation_deg").unwrap();
    let phase = labels(&a, "diel_phase");
    let mut low_sun_twilight = 0;
    for (i, p) in phase.iter().enumerate() {
        let e = elev.values.float(i).unwrap();
        if e >= 10.0 {
            assert_eq!(p, "day");
        } else if e >= -6.0 {
            assert_eq!(p, "civil_dawn", "rising in the morning");
            low_sun_twilight += usize::from(e > 0.0);
        }
    }
    assert!(
        low_sun_twilight > 0,
        "some fixes between 0° and 10° are twilight now"
    );
}

#[test]
fn a_constant_column_cannot_be_standardised() {
    let d = tempfile::tempdir().unwrap();
    std::fs::write(
        d.path().join("fixes.csv"),
        "animal,time,lon,lat\nx,2024-01-01 00:00,15,60\nx,2024-01-01 01:00,15.01,60\nx,2024-01-01 02:00,15.02,60\n",
    )
    .unwrap();
    std::fs::write(d.path().join("animals.csv"), "animal,mass_kg\nx,10\n").unwrap();
    let path = d.path().join("study.toml");
    std::fs::write(
        &path,
        "[study]\nname = \"z\"\n[fixes]\nfiles = [\"fixes.csv\"]\n[fixes.columns]\nanimal = \"animal\"\n\
         time = \"time\"\nlon = \"lon\"\nlat = \"lat\"\n[tracks]\ngap = \"3 h\"\n\
         [covariates]\nstandardise = [\"mass_kg\"]\n[covariates.animals]\nfile = \"animals.csv\"\n\
         id = \"animal\"\ncolumns = [\"mass_kg\"]\n",
    )
    .unwrap();
    let s = Study::load(&path).unwrap();
    let e = prepare::run(&s).unwrap_err().to_string();
    assert!(
        e.contains("mass_kg") && e.contains("covariates.standardise") && e.contains("spread"),
        "{e}"
    );
}

#[test]
fn sun_elevation_standardises_and_back_transforms() {
    let fixes: Vec<String> = (0..24)
        .map(|h| format!("2024-06-01T{h:02}:00:00Z,5.0,52.0"))
        .collect();
    let fixes: Vec<&str> = fixes.iter().map(String::as_str).collect();
    let (_, a) = run("UTC", "[covariates]\nstandardise = true\n", &fixes);
    let s = &a.summary.standardisation[0];
    assert_eq!(s.column, "sun_elevation_deg");
    let x = a.column("sun_elevation_deg").unwrap();
    let z = a.column("sun_elevation_deg_z").unwrap();
    let n = count(&a);
    let xs: Vec<f64> = (0..n).map(|i| x.values.float(i).unwrap()).collect();
    let mean = xs.iter().sum::<f64>() / n as f64;
    assert!((s.mean - mean).abs() < 1e-12);
    let zs: Vec<f64> = (0..n).map(|i| z.values.float(i).unwrap()).collect();
    for (x, z) in xs.iter().zip(&zs) {
        assert!((s.back(*z) - x).abs() < 1e-9);
    }
    let zm = zs.iter().sum::<f64>() / n as f64;
    let zsd = (zs.iter().map(|v| (v - zm).powi(2)).sum::<f64>() / (n - 1) as f64).sqrt();
    assert!(zm.abs() < 1e-12 && (zsd - 1.0).abs() < 1e-12);
}
