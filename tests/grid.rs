//! Smoothing inside `prepare`: one animal that cannot be fitted is skipped with its
//! reason, the others go on, and no location is predicted across a gap.

use cairn::prepare;
use cairn::study::Study;

#[test]
fn an_animal_with_too_few_fixes_is_skipped_and_the_rest_go_on() {
    let d = tempfile::tempdir().unwrap();
    std::fs::copy("examples/mini/fixes.csv", d.path().join("fixes.csv")).unwrap();
    // Add an animal with three fixes: too few to fit the movement model.
    let mut text = std::fs::read_to_string(d.path().join("fixes.csv")).unwrap();
    text.push_str("lone-01,2026-05-02 00:00:00,17.40,69.40,,GPS\n");
    text.push_str("lone-01,2026-05-02 01:00:00,17.41,69.40,,GPS\n");
    text.push_str("lone-01,2026-05-02 02:00:00,17.42,69.40,,GPS\n");
    std::fs::write(d.path().join("fixes.csv"), text).unwrap();
    std::fs::copy("examples/mini/study.toml", d.path().join("study.toml")).unwrap();
    let s = Study::load(&d.path().join("study.toml")).unwrap();
    let p = prepare::run(&s).unwrap();
    let skipped = p.summary.skipped();
    assert_eq!(skipped.len(), 1, "{skipped:?}");
    assert_eq!(skipped[0].0, "lone-01");
    assert!(skipped[0].1.contains("too few fixes"), "{}", skipped[0].1);
    let sm = p.smoothed.as_ref().unwrap();
    assert_eq!(sm.paths.len(), 3);
    assert!(!p.steps.animals.iter().any(|a| a == "lone-01"));
    // brine-03 has a two-day gap (> tracks.gap = 12 h): two segments, and no grid point
    // falls inside the gap.
    let b3 = sm.paths.iter().find(|p| p.animal == "brine-03").unwrap();
    assert_eq!(b3.segments.len(), 2);
    let end_first = b3.segments[0].last().unwrap().time_us;
    let start_second = b3.segments[1].first().unwrap().time_us;
    assert!((start_second - end_first) as f64 * 1e-6 > 12.0 * 3600.0);
    // Grid points are at multiples of the 2 h interval (from midnight UTC).
    for seg in &b3.segments {
        for q in seg {
            assert_eq!(q.time_us % 7_200_000_000, 0);
        }
    }
}

#[test]
fn bad_grid_settings_are_rejected_with_their_key() {
    let d = tempfile::tempdir().unwrap();
    std::fs::copy("examples/mini/fixes.csv", d.path().join("fixes.csv")).unwrap();
    let base = std::fs::read_to_string("examples/mini/study.toml").unwrap();
    for (from, to, key) in [
        ("interval = \"2 h\"", "interval = \"2\"", "grid.interval"),
        ("interval = \"2 h\"", "interval = \"13 h\"", "grid.interval"),
        (
            "flag_se = \"3 km\"",
            "flag_se = \"3 km\"\noutlier_quantile = 1.5",
            "grid.outlier_quantile",
        ),
        (
            "flag_se = \"3 km\"",
            "flag_se = \"3 km\"\ndrop_outliers = true",
            "grid.drop_outliers",
        ),
        (
            "flag_se = \"3 km\"",
            "flag_se = \"3 km\"\n[grid.class_errors]\nZ = \"1 km\"",
            "grid.class_errors.Z",
        ),
    ] {
        std::fs::write(d.path().join("study.toml"), base.replace(from, to)).unwrap();
        let e = Study::load(&d.path().join("study.toml"))
            .unwrap_err()
            .to_string();
        assert!(e.contains(key), "{key}: {e}");
    }
}
