//! Malformed-input suite: each case asserts the exact exclusion reason or error text.

use std::path::{Path, PathBuf};

use cairn::prepare;
use cairn::study::Study;
use cairn::tracks::exclusions::Reason;

/// Writes a study with the given data file content and extra TOML lines; returns its path.
fn study_with(dir: &Path, data_name: &str, data: &[u8], extra: &str) -> PathBuf {
    std::fs::write(dir.join(data_name), data).unwrap();
    let toml = format!(
        r#"
[study]
name = "suite"
output = "out"
[fixes]
files = ["{data_name}"]
{extra}
[fixes.columns]
animal = "id"
time = "t"
lon = "lon"
lat = "lat"
class = "lc"
[tracks]
gap = "6 h"
"#
    );
    let p = dir.join("study.toml");
    std::fs::write(&p, toml).unwrap();
    p
}

fn reasons(csv: &str, extra: &str) -> Vec<(u64, Reason, String, String)> {
    let d = tempfile::tempdir().unwrap();
    let s = Study::load(&study_with(d.path(), "f.csv", csv.as_bytes(), extra)).unwrap();
    let p = prepare::run(&s).unwrap();
    p.exclusions
        .into_iter()
        .map(|e| (e.row, e.reason, e.column, e.detail))
        .collect()
}

const HEAD: &str = "id,t,lon,lat,lc\n";

#[test]
fn bad_dates_are_excluded_with_their_text() {
    let csv = format!(
        "{HEAD}a,2024-01-01 00:00,10,60,3\na,2024-02-30 00:00,10,60,3\na,noon,10,60,3\na,,10,60,3\n"
    );
    let r = reasons(&csv, "");
    assert_eq!(
        r,
        vec![
            (
                2,
                Reason::UnparseableTime,
                "t".into(),
                "2024-02-30 00:00".into()
            ),
            (3, Reason::UnparseableTime, "t".into(), "noon".into()),
            (4, Reason::MissingValue, "t".into(), "empty".into()),
        ]
    );
}

#[test]
fn positions_out_of_range_and_non_finite() {
    let csv = format!(
        "{HEAD}a,2024-01-01 00:00,10,60,3\na,2024-01-01 01:00,60,-120,3\na,2024-01-01 02:00,-181,60,3\n\
         a,2024-01-01 03:00,inf,60,3\na,2024-01-01 04:00,10,NaN,3\na,2024-01-01 05:00,ten,60,3\n"
    );
    let r = reasons(&csv, "");
    assert_eq!(
        r,
        vec![
            (2, Reason::LatOutOfRange, "lat".into(), "-120".into()),
            (3, Reason::LonOutOfRange, "lon".into(), "-181".into()),
            (4, Reason::NonFinite, "lon".into(), "inf".into()),
            (5, Reason::NonFinite, "lat".into(), "NaN".into()),
            (6, Reason::NotANumber, "lon".into(), "ten".into()),
        ]
    );
}

#[test]
fn empty_ids_unknown_classes_and_class_z() {
    let csv = format!(
        "{HEAD}a,2024-01-01 00:00,10,60,3\n ,2024-01-01 01:00,10,60,3\na,2024-01-01 02:00,10,60,4\n\
         a,2024-01-01 03:00,10,60.001,Z\na,2024-01-01 04:00,10,60,\n"
    );
    let r = reasons(&csv, "");
    assert_eq!(
        r,
        vec![
            (2, Reason::EmptyId, "id".into(), "empty".into()),
            (
                3,
                Reason::UnknownClass,
                "lc".into(),
                "\"4\" is not a location class (3, 2, 1, 0, A, B, Z, GPS, FGPS)".into()
            ),
            (
                5,
                Reason::UnknownClass,
                "lc".into(),
                "empty location class".into()
            ),
            (
                4,
                Reason::InvalidClassZ,
                "lc".into(),
                "Argos class Z".into()
            ),
        ]
    );
}

#[test]
fn duplicate_times_keep_the_better_class() {
    // Row 2 (class B) and row 3 (class 1) share an instant: row 3 is kept.
    let csv = format!(
        "{HEAD}a,2024-01-01 00:00,10,60,3\na,2024-01-01 01:00,10,60.01,B\na,2024-01-01 01:00,10,60.011,1\n"
    );
    let d = tempfile::tempdir().unwrap();
    let s = Study::load(&study_with(d.path(), "f.csv", csv.as_bytes(), "")).unwrap();
    let p = prepare::run(&s).unwrap();
    assert_eq!(p.exclusions.len(), 1);
    let e = &p.exclusions[0];
    assert_eq!((e.row, e.reason), (2, Reason::DuplicateTime));
    assert!(e.detail.contains("row 3 (class 1)"), "{}", e.detail);
    let kept: Vec<u32> = p.tracks[0].fixes.iter().map(|f| f.row).collect();
    assert_eq!(kept, vec![1, 3]);
}

#[test]
fn bom_and_crlf_are_read() {
    let csv = "\u{feff}id,t,lon,lat,lc\r\na,2024-01-01 00:00,10,60,3\r\na,2024-01-01 01:00,10.01,60,2\r\n";
    let r = reasons(csv, "");
    assert!(r.is_empty(), "{r:?}");
}

#[test]
fn missing_column_names_file_and_column() {
    let d = tempfile::tempdir().unwrap();
    let p = study_with(
        d.path(),
        "f.csv",
        b"id,t,lon,latitude,lc\na,2024-01-01 00:00,10,60,3\n",
        "",
    );
    let e = Study::load(&p).unwrap_err().to_string();
    assert!(e.contains("f.csv"), "{e}");
    assert!(
        e.contains("column `lat` (study key `fixes.columns.lat`) is missing"),
        "{e}"
    );
    assert!(e.contains("id, t, lon, latitude, lc"), "{e}");
}

#[test]
fn semicolon_file_gets_a_clear_message_then_reads_with_the_setting() {
    let d = tempfile::tempdir().unwrap();
    let data = b"id;t;lon;lat;lc\na;2024-01-01 00:00;10;60;3\n";
    let p = study_with(d.path(), "f.csv", data, "");
    let e = Study::load(&p).unwrap_err().to_string();
    assert!(
        e.contains("semicolon-delimited: set `fixes.delimiter = \";\"`"),
        "{e}"
    );
    let p = study_with(d.path(), "f.csv", data, "delimiter = \";\"");
    let s = Study::load(&p).unwrap();
    assert_eq!(prepare::run(&s).unwrap().tracks[0].fixes.len(), 1);
}

#[test]
fn a_wholly_non_numeric_column_is_fatal() {
    let d = tempfile::tempdir().unwrap();
    let data =
        b"id,t,lon,lat,lc\na,2024-01-01 00:00,\"10,5\",60,3\na,2024-01-01 01:00,\"10,6\",60,3\n";
    let s = Study::load(&study_with(d.path(), "f.csv", data, "")).unwrap();
    let e = prepare::run(&s).unwrap_err().to_string();
    assert!(
        e.contains("f.csv, column `lon`: no value is a number"),
        "{e}"
    );
    assert!(e.contains("decimal comma"), "{e}");
}

#[test]
fn missing_input_file_and_bad_units_are_study_errors() {
    let d = tempfile::tempdir().unwrap();
    let p = d.path().join("study.toml");
    std::fs::write(
        &p,
        "[study]\nname='x'\n[fixes]\nfiles=['nope.csv']\n[fixes.columns]\nanimal='a'\ntime='t'\nlon='x'\nlat='y'\n[tracks]\ngap='6 h'\n",
    )
    .unwrap();
    let e = Study::load(&p).unwrap_err().to_string();
    assert!(
        e.contains("nope.csv") && e.contains("does not exist"),
        "{e}"
    );

    let p = study_with(d.path(), "f.csv", HEAD.as_bytes(), "");
    let text = std::fs::read_to_string(&p)
        .unwrap()
        .replace("gap = \"6 h\"", "gap = \"6\"");
    std::fs::write(&p, text).unwrap();
    let e = Study::load(&p).unwrap_err().to_string();
    assert!(
        e.contains("tracks.gap") && e.contains("s, min, h, d"),
        "{e}"
    );

    let p = study_with(
        d.path(),
        "f.csv",
        HEAD.as_bytes(),
        "timezone = \"Mars/Olympus\"",
    );
    let e = Study::load(&p).unwrap_err().to_string();
    assert!(e.contains("unknown time zone \"Mars/Olympus\""), "{e}");
}

#[test]
fn daylight_saving_gaps_and_folds_are_excluded_not_guessed() {
    // Europe/Oslo: 2024-03-31 02:30 never happened; 2024-10-27 02:30 happened twice.
    let csv = format!(
        "{HEAD}a,2024-03-31 01:30,10,60,3\na,2024-03-31 02:30,10,60,3\na,2024-10-27 02:30,10,60,3\na,2024-10-27T02:30:00+01:00,10,60,3\n"
    );
    let r = reasons(&csv, "timezone = \"Europe/Oslo\"");
    assert_eq!(
        r,
        vec![
            (
                2,
                Reason::NonexistentLocalTime,
                "t".into(),
                "2024-03-31 02:30".into()
            ),
            (
                3,
                Reason::AmbiguousLocalTime,
                "t".into(),
                "2024-10-27 02:30".into()
            ),
        ]
    );
}

#[test]
fn parquet_input_with_typed_columns() {
    use polars::prelude::*;
    let d = tempfile::tempdir().unwrap();
    let times = Series::new(
        "t".into(),
        vec![
            1_704_067_200_000_000i64,
            1_704_070_800_000_000,
            1_704_074_400_000_000,
        ],
    )
    .cast(&DataType::Datetime(TimeUnit::Microseconds, None))
    .unwrap();
    let mut df = DataFrame::new_infer_height(vec![
        Column::new("id".into(), vec!["a", "a", ""]),
        times.into(),
        Column::new("lon".into(), vec![Some(10.0), None, Some(10.0)]),
        Column::new("lat".into(), vec![60.0, 60.0, 60.0]),
        Column::new("lc".into(), vec!["G", "G", "G"]),
    ])
    .unwrap();
    let path = d.path().join("f.parquet");
    ParquetWriter::new(std::fs::File::create(&path).unwrap())
        .finish(&mut df)
        .unwrap();
    let s = Study::load(&study_with(
        d.path(),
        "f.parquet",
        &std::fs::read(&path).unwrap(),
        "",
    ))
    .unwrap();
    let p = prepare::run(&s).unwrap();
    let r: Vec<_> = p.exclusions.iter().map(|e| (e.row, e.reason)).collect();
    assert_eq!(r, vec![(2, Reason::MissingValue), (3, Reason::EmptyId)]);
    // 2024-01-01T00:00:00Z, naive datetime read in the study zone (UTC here).
    assert_eq!(p.tracks[0].fixes[0].time_us, 1_704_067_200_000_000);
}
