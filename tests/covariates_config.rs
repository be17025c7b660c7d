//! Bad `[covariates]` settings are rejected at study validation, naming the key.
//! One test per rejected value.

use cairn::study::Study;

const BASE: &str = r#"
[study]
name = "config"

[fixes]
files = ["fixes.csv"]

[fixes.columns]
animal = "animal"
time = "time"
lon = "lon"
lat = "lat"

[tracks]
gap = "3 h"
"#;

const RASTER: &str = r#"
[[covariates.raster]]
name = "habitat"
file = "habitat.tif"
kind = "classes"
radius = "500 m"
classes = { kelp = [1], rock = [2, 3] }

[[covariates.raster]]
name = "depth"
file = "depth.tif"
kind = "value"
unit = "m"
"#;

/// Loads a study whose `[covariates]` part is `cov`; returns the error text.
fn rejected(cov: &str) -> String {
    let d = tempfile::tempdir().unwrap();
    std::fs::write(
        d.path().join("fixes.csv"),
        "animal,time,lon,lat\na,2024-01-01 00:00,15,60\na,2024-01-01 01:00,15.01,60\n",
    )
    .unwrap();
    // Validation checks that layer files exist; their contents are read by prepare.
    std::fs::write(d.path().join("habitat.tif"), b"placeholder").unwrap();
    std::fs::write(d.path().join("depth.tif"), b"placeholder").unwrap();
    std::fs::write(
        d.path().join("animals.csv"),
        "animal,sex,mass_kg\na,F,10\nb,M,12\n",
    )
    .unwrap();
    let path = d.path().join("study.toml");
    std::fs::write(&path, format!("{BASE}\n{cov}")).unwrap();
    match Study::load(&path) {
        Ok(_) => panic!("accepted:\n{cov}"),
        Err(e) => e.to_string(),
    }
}

fn accepted(cov: &str) -> Study {
    let d = tempfile::tempdir().unwrap();
    std::fs::write(
        d.path().join("fixes.csv"),
        "animal,time,lon,lat\na,2024-01-01 00:00,15,60\n",
    )
    .unwrap();
    std::fs::write(d.path().join("habitat.tif"), b"placeholder").unwrap();
    std::fs::write(d.path().join("depth.tif"), b"placeholder").unwrap();
    std::fs::write(d.path().join("animals.csv"), "animal,sex,mass_kg\na,F,10\n").unwrap();
    let path = d.path().join("study.toml");
    std::fs::write(&path, format!("{BASE}\n{cov}")).unwrap();
    Study::load(&path).unwrap()
}

fn has(e: &str, parts: &[&str]) {
    for p in parts {
        assert!(e.contains(p), "{p:?} not in: {e}");
    }
}

#[test]
fn the_valid_baseline_is_accepted() {
    let s = accepted(&format!(
        "[covariates]\nhour = \"solar\"\nstandardise = true\n{RASTER}\n[covariates.animals]\nfile = \"animals.csv\"\nid = \"animal\"\ncolumns = [\"sex\", \"mass_kg\"]\n"
    ));
    assert_eq!(
        s.covariates().standardise,
        [
            "sun_elevation_deg",
            "habitat_kelp",
            "habitat_rock",
            "depth",
            "mass_kg"
        ]
    );
}

#[test]
fn unknown_hour() {
    has(
        &rejected("[covariates]\nhour = \"sidereal\"\n"),
        &["covariates.hour", "sidereal"],
    );
}

#[test]
fn unknown_key_in_section() {
    has(&rejected("[covariates]\nhours = \"clock\"\n"), &["hours"]);
}

#[test]
fn diel_threshold_without_unit() {
    has(
        &rejected("[covariates.diel]\ncivil = \"-6\"\n"),
        &["covariates.diel.civil", "deg"],
    );
}

#[test]
fn diel_thresholds_out_of_order() {
    has(
        &rejected("[covariates.diel]\ncivil = \"-13 deg\"\n"),
        &["covariates.diel", "strictly decreasing"],
    );
}

#[test]
fn unknown_raster_kind() {
    let cov = RASTER.replace("kind = \"value\"", "kind = \"continuous\"");
    has(
        &rejected(&cov),
        &["covariates.raster[1].kind", "continuous"],
    );
}

#[test]
fn missing_raster_file() {
    let cov = RASTER.replace("depth.tif", "bathymetry.tif");
    has(
        &rejected(&cov),
        &[
            "covariates.raster[1].file",
            "bathymetry.tif",
            "does not exist",
        ],
    );
}

#[test]
fn radius_without_unit() {
    let cov = RASTER.replace("\"500 m\"", "\"500\"");
    has(&rejected(&cov), &["covariates.raster[0].radius", "unit"]);
}

#[test]
fn radius_in_an_unknown_unit() {
    let cov = RASTER.replace("\"500 m\"", "\"500 ft\"");
    has(&rejected(&cov), &["covariates.raster[0].radius", "m, km"]);
}

#[test]
fn class_raster_without_radius() {
    let cov = RASTER.replace("radius = \"500 m\"\n", "");
    has(
        &rejected(&cov),
        &["covariates.raster[0].radius", "required"],
    );
}

#[test]
fn unknown_window_shape() {
    let cov = RASTER.replace(
        "radius = \"500 m\"",
        "radius = \"500 m\"\nwindow = \"hexagon\"",
    );
    has(&rejected(&cov), &["covariates.raster[0].window", "hexagon"]);
}

#[test]
fn class_code_in_two_groups() {
    let cov = RASTER.replace("rock = [2, 3]", "rock = [1, 3]");
    has(&rejected(&cov), &["covariates.raster[0].classes", "code 1"]);
}

#[test]
fn value_raster_without_unit() {
    let cov = RASTER.replace("unit = \"m\"\n", "");
    has(&rejected(&cov), &["covariates.raster[1].unit", "required"]);
}

#[test]
fn value_raster_with_class_table() {
    let cov = RASTER.replace("unit = \"m\"", "unit = \"m\"\nclasses = { deep = [1] }");
    has(
        &rejected(&cov),
        &["covariates.raster[1].classes", "not used"],
    );
}

#[test]
fn zero_scale() {
    let cov = RASTER.replace("unit = \"m\"", "unit = \"m\"\nscale = 0.0");
    has(&rejected(&cov), &["covariates.raster[1].scale"]);
}

#[test]
fn raster_name_not_a_column_name() {
    let cov = RASTER.replace("name = \"depth\"", "name = \"Water depth\"");
    has(
        &rejected(&cov),
        &["covariates.raster[1].name", "Water depth"],
    );
}

#[test]
fn two_layers_with_one_name() {
    let cov = RASTER.replace("name = \"depth\"", "name = \"habitat_kelp\"");
    has(
        &rejected(&cov),
        &["covariates.raster[1].name", "habitat_kelp", "twice"],
    );
}

#[test]
fn overlapping_seasons() {
    let cov = "[[covariates.season]]\nname = \"wet\"\nfrom = \"11-01\"\nto = \"04-30\"\n\
               [[covariates.season]]\nname = \"dry\"\nfrom = \"04-30\"\nto = \"10-31\"\n";
    has(
        &rejected(cov),
        &["covariates.season[1]", "overlaps", "wet", "04-30"],
    );
}

#[test]
fn uncovered_season_days() {
    let cov = "[[covariates.season]]\nname = \"wet\"\nfrom = \"11-01\"\nto = \"04-30\"\n\
               [[covariates.season]]\nname = \"dry\"\nfrom = \"05-02\"\nto = \"10-31\"\n";
    has(&rejected(cov), &["covariates.season", "05-01", "no season"]);
}

#[test]
fn impossible_season_date() {
    let cov = "[[covariates.season]]\nname = \"wet\"\nfrom = \"11-31\"\nto = \"04-30\"\n\
               [[covariates.season]]\nname = \"dry\"\nfrom = \"05-01\"\nto = \"10-31\"\n";
    has(&rejected(cov), &["covariates.season[0].from", "11-31"]);
}

#[test]
fn unknown_standardise_column() {
    let cov = format!("[covariates]\nstandardise = [\"depth\", \"slope\"]\n{RASTER}");
    has(
        &rejected(&cov),
        &["covariates.standardise", "slope", "depth"],
    );
}

#[test]
fn standardising_a_text_attribute() {
    let cov = "[covariates]\nstandardise = [\"sex\"]\n[covariates.animals]\nfile = \"animals.csv\"\nid = \"animal\"\ncolumns = [\"sex\"]\n";
    has(&rejected(cov), &["covariates.standardise", "sex"]);
}

#[test]
fn animal_table_missing() {
    let cov = "[covariates.animals]\nfile = \"tags.csv\"\nid = \"animal\"\ncolumns = [\"sex\"]\n";
    has(&rejected(cov), &["covariates.animals.file", "tags.csv"]);
}

#[test]
fn animal_table_without_the_column() {
    let cov = "[covariates.animals]\nfile = \"animals.csv\"\nid = \"animal\"\ncolumns = [\"age_class\"]\n";
    has(
        &rejected(cov),
        &["covariates.animals.columns", "age_class", "animals.csv"],
    );
}

#[test]
fn animal_table_without_the_id_column() {
    let cov = "[covariates.animals]\nfile = \"animals.csv\"\nid = \"tag\"\ncolumns = [\"sex\"]\n";
    has(&rejected(cov), &["covariates.animals.id", "tag"]);
}

#[test]
fn unknown_time_zone_is_still_rejected() {
    let e = {
        let d = tempfile::tempdir().unwrap();
        std::fs::write(d.path().join("fixes.csv"), "animal,time,lon,lat\n").unwrap();
        let path = d.path().join("study.toml");
        let text = BASE.replace(
            "[fixes.columns]",
            "timezone = \"Mars/Olympus\"\n[fixes.columns]",
        );
        std::fs::write(&path, format!("{text}\n[covariates]\nhour = \"clock\"\n")).unwrap();
        Study::load(&path).unwrap_err().to_string()
    };
    has(&e, &["fixes.timezone", "Mars/Olympus"]);
}

#[test]
fn animal_table_with_a_duplicated_id() {
    let d = tempfile::tempdir().unwrap();
    std::fs::write(
        d.path().join("fixes.csv"),
        "animal,time,lon,lat\na,2024-01-01 00:00,15,60\n",
    )
    .unwrap();
    std::fs::write(d.path().join("animals.csv"), "animal,sex\na,F\nb,M\na,M\n").unwrap();
    let path = d.path().join("study.toml");
    let cov =
        "[covariates.animals]\nfile = \"animals.csv\"\nid = \"animal\"\ncolumns = [\"sex\"]\n";
    std::fs::write(&path, format!("{BASE}\n{cov}")).unwrap();
    let e = Study::load(&path).unwrap_err().to_string();
    has(&e, &["animals.csv", "data row 3", "\"a\"", "twice"]);
}

#[test]
fn class_raster_with_a_value_key() {
    let cov = RASTER.replace("radius = \"500 m\"", "radius = \"500 m\"\nscale = 0.1");
    has(
        &rejected(&cov),
        &["covariates.raster[0].scale", "not used", "classes"],
    );
}
