//! End-to-end: the real binary on the bundled example study, in a temporary folder.

use std::path::Path;
use std::process::Command;

fn cairn(args: &[&str]) -> (i32, String, String) {
    let out = Command::new(env!("CARGO_BIN_EXE_cairn"))
        .args(args)
        .output()
        .unwrap();
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

fn copy_example(dir: &Path) -> String {
    for f in ["study.toml", "fixes.csv"] {
        std::fs::copy(Path::new("examples/mini").join(f), dir.join(f)).unwrap();
    }
    dir.join("study.toml").display().to_string()
}

#[test]
fn check_reports_the_planted_problems_and_exits_1() {
    let d = tempfile::tempdir().unwrap();
    let study = copy_example(d.path());
    let (code, out, err) = cairn(&["check", &study]);
    assert_eq!(code, 1, "{out}{err}");
    for want in [
        "rows read: 535",
        "duplicate_time           1",
        "empty_id                 1",
        "invalid_class_z          1",
        "lat_out_of_range         1",
        "unparseable_time         1",
        "brine-03",
    ] {
        assert!(out.contains(want), "missing {want:?} in\n{out}");
    }
    // check writes nothing.
    assert!(!d.path().join("cairn-out").exists());
}

#[test]
fn prepare_writes_every_table_atomically() {
    use polars::prelude::*;
    let d = tempfile::tempdir().unwrap();
    let study = copy_example(d.path());
    let (code, out, err) = cairn(&["prepare", &study, "--csv"]);
    assert_eq!(code, 1, "{out}{err}");
    let o = d.path().join("cairn-out");
    for f in [
        "fixes_clean.parquet",
        "steps.parquet",
        "exclusions.csv",
        "prepare_summary.json",
        "fixes_clean.csv",
        "steps.csv",
    ] {
        assert!(o.join(f).is_file(), "{f} missing");
    }
    // No temporary files are left behind.
    let leftovers: Vec<_> = std::fs::read_dir(&o)
        .unwrap()
        .filter_map(|e| e.ok())
        .filter(|e| e.file_name().to_string_lossy().starts_with('.'))
        .collect();
    assert!(leftovers.is_empty());
    let steps = ParquetReader::new(std::fs::File::open(o.join("steps.parquet")).unwrap())
        .finish()
        .unwrap();
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(o.join("prepare_summary.json")).unwrap())
            .unwrap();
    assert_eq!(steps.height() as u64, summary["steps"].as_u64().unwrap());
    // Kept + excluded = read, for every animal.
    for a in summary["animals"].as_array().unwrap() {
        let excluded: u64 = a["excluded"]
            .as_object()
            .unwrap()
            .values()
            .map(|v| v.as_u64().unwrap())
            .sum();
        assert_eq!(
            a["fixes_kept"].as_u64().unwrap() + excluded,
            a["rows_read"].as_u64().unwrap()
        );
    }
    let log = std::fs::read_to_string(o.join("exclusions.csv")).unwrap();
    assert!(log.starts_with("file,row,animal,column,stage,reason,detail"));
    assert_eq!(log.lines().count() - 1, 8);
}

#[test]
fn init_writes_a_template_that_validates_once_data_exist() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path().join("new");
    let (code, _, err) = cairn(&["init", dir.to_str().unwrap()]);
    assert_eq!(code, 0, "{err}");
    // The template names fixes.csv, which is not there yet: a clear error, exit 2.
    let (code, _, err) = cairn(&["check", dir.join("study.toml").to_str().unwrap()]);
    assert_eq!(code, 2);
    assert!(
        err.contains("fixes.csv") && err.contains("does not exist"),
        "{err}"
    );
    std::fs::write(
        dir.join("fixes.csv"),
        "animal,time,lon,lat\nx,2024-01-01 00:00,1,2\nx,2024-01-01 01:00,1.01,2\n",
    )
    .unwrap();
    let (code, out, err) = cairn(&["check", dir.join("study.toml").to_str().unwrap()]);
    assert_eq!(code, 0, "{out}{err}");
    // A second init does not overwrite.
    let (code, _, err) = cairn(&["init", dir.to_str().unwrap()]);
    assert_eq!(code, 2);
    assert!(err.contains("already exists"), "{err}");
}

#[test]
fn unusable_input_exits_2_naming_file_and_column() {
    let d = tempfile::tempdir().unwrap();
    let study = copy_example(d.path());
    let text = std::fs::read_to_string(&study)
        .unwrap()
        .replace("lat = \"lat\"", "lat = \"latitude\"");
    std::fs::write(&study, text).unwrap();
    let (code, _, err) = cairn(&["check", &study]);
    assert_eq!(code, 2);
    assert!(
        err.contains("fixes.csv") && err.contains("column `latitude`"),
        "{err}"
    );
}

#[test]
fn prepare_fit_simulate_end_to_end() {
    use polars::prelude::*;
    let d = tempfile::tempdir().unwrap();
    let study = copy_example(d.path());
    // fit before prepare: a clear error.
    let (code, _, err) = cairn(&["fit", &study]);
    assert_eq!(code, 2);
    assert!(
        err.contains("steps.parquet") && err.contains("run `cairn prepare` first"),
        "{err}"
    );
    let (code, out, err) = cairn(&["prepare", &study]);
    assert_eq!(code, 1, "{out}{err}");
    assert!(out.contains("smoothed onto a regular grid"), "{out}");
    let (code, out, err) = cairn(&["fit", &study]);
    assert!(code == 0 || code == 1, "{out}{err}");
    assert!(out.contains("selected: no covariates"), "{out}");
    let o = d.path().join("cairn-out");
    let cmp = std::fs::read_to_string(o.join("model_comparison.csv")).unwrap();
    assert_eq!(cmp.lines().count(), 4, "{cmp}");
    assert!(
        cmp.lines().nth(1).unwrap().starts_with("no covariates,2,"),
        "{cmp}"
    );
    let steps = ParquetReader::new(std::fs::File::open(o.join("steps.parquet")).unwrap())
        .finish()
        .unwrap();
    let decoded = ParquetReader::new(std::fs::File::open(o.join("decoded.parquet")).unwrap())
        .finish()
        .unwrap();
    assert_eq!(steps.height(), decoded.height());
    for c in ["state", "state_index", "p_slow", "p_fast"] {
        assert!(decoded.column(c).is_ok(), "{c} missing");
    }
    // Probabilities of each step sum to one.
    let a = decoded.column("p_slow").unwrap().f64().unwrap().clone();
    let b = decoded.column("p_fast").unwrap().f64().unwrap().clone();
    for (x, y) in a.iter().zip(b.iter()) {
        assert!((x.unwrap() + y.unwrap() - 1.0).abs() < 1e-9);
    }
    assert!(o.join("models/no-covariates.json").is_file());
    // The covariate model starts from the model without covariates, so its optimum is at
    // least as high (it nests it).
    let loglik = |name: &str| -> f64 {
        let line = cmp.lines().find(|l| l.starts_with(name)).unwrap();
        line.split(',').nth(4).unwrap().parse().unwrap()
    };
    assert!(
        loglik("time of day") >= loglik("no covariates") - 1e-6,
        "{cmp}"
    );
    let (code, out, err) = cairn(&["simulate", &study, "--seed", "3"]);
    assert_eq!(code, 0, "{out}{err}");
    let sim = std::fs::read_to_string(o.join("simulated_no-covariates.csv")).unwrap();
    assert_eq!(sim.lines().count() - 1, steps.height());
}
