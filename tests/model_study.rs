//! The `[model]` section: every rejected value names its key.

use cairn::study::Study;

#[test]
fn bad_model_settings_are_rejected_with_their_key() {
    let d = tempfile::tempdir().unwrap();
    std::fs::copy("examples/mini/fixes.csv", d.path().join("fixes.csv")).unwrap();
    let base = std::fs::read_to_string("examples/mini/study.toml").unwrap();
    for (from, to, key) in [
        (
            "states = [\"slow\", \"fast\"]",
            "states = []",
            "model.states",
        ),
        (
            "states = [\"slow\", \"fast\"]",
            "states = [\"a\", \"a\"]",
            "model.states",
        ),
        (
            "states = [\"slow\", \"fast\"]",
            "states = [\"1\",\"2\",\"3\",\"4\",\"5\",\"6\",\"7\"]",
            "model.states",
        ),
        ("step = \"gamma\"", "step = \"pareto\"", "model.step"),
        (
            "angle = \"von-mises\"",
            "angle = \"uniform\"",
            "model.angle",
        ),
        ("starts = 4", "starts = 0", "model.starts"),
        (
            "seed = 11",
            "seed = 11\ninitial = \"guess\"",
            "model.initial",
        ),
        ("seed = 11", "seed = 11\nselect = \"best\"", "model.select"),
        (
            "name = \"one state\"",
            "name = \"no covariates\"",
            "model.candidate[2]",
        ),
        ("states = 1", "states = 9", "model.candidate[2].states"),
        (
            "states = 1",
            "covariates = [\"cyclic(hour)\"]",
            "model.candidate[2].covariates",
        ),
        (
            "states = 1",
            "covariates = [\"depth + kelp\"]",
            "model.candidate[2].covariates",
        ),
    ] {
        let text = base.replace(from, to);
        assert_ne!(text, base, "{from}");
        std::fs::write(d.path().join("study.toml"), text).unwrap();
        let e = Study::load(&d.path().join("study.toml"))
            .unwrap_err()
            .to_string();
        assert!(e.contains(key), "{key}: {e}");
    }
}

#[test]
fn a_term_naming_a_missing_column_is_a_clear_fit_error() {
    let d = tempfile::tempdir().unwrap();
    std::fs::copy("examples/mini/fixes.csv", d.path().join("fixes.csv")).unwrap();
    let base = std::fs::read_to_string("examples/mini/study.toml").unwrap();
    let text = base.replace("states = 1", "covariates = [\"depth\"]");
    std::fs::write(d.path().join("study.toml"), text).unwrap();
    let s = Study::load(&d.path().join("study.toml")).unwrap();
    let p = cairn::prepare::run(&s).unwrap();
    cairn::prepare::write(&s, &p, false).unwrap();
    let e = cairn::modelling::run(&s, &mut |_| {})
        .unwrap_err()
        .to_string();
    assert!(
        e.contains("steps.parquet, column `depth`: no such column"),
        "{e}"
    );
}

#[test]
fn share_runs_defaults_to_true_and_reads_false() {
    let d = tempfile::tempdir().unwrap();
    std::fs::copy("examples/mini/fixes.csv", d.path().join("fixes.csv")).unwrap();
    let base = std::fs::read_to_string("examples/mini/study.toml").unwrap();
    let load = |text: &str| {
        std::fs::write(d.path().join("study.toml"), text).unwrap();
        Study::load(&d.path().join("study.toml"))
    };
    assert!(!base.contains("share_runs"));
    assert!(load(&base).unwrap().model().unwrap().share_runs);
    let off = base.replace("seed = 11", "seed = 11\nshare_runs = false");
    assert!(!load(&off).unwrap().model().unwrap().share_runs);
    let bad = base.replace("seed = 11", "seed = 11\nshare_runs = \"no\"");
    let e = load(&bad).unwrap_err().to_string();
    assert!(e.contains("share_runs"), "{e}");
}
