//! Invariants of the prepare stage: thread count and input row order change nothing.

use cairn::prepare;
use cairn::study::Study;
use cairn::tracks::metrics::Steps;

/// Bitwise equality (NaN marks missing angles, and NaN != NaN under `==`).
fn same(a: &Steps, b: &Steps) -> bool {
    let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
    a.animals == b.animals
        && a.animal == b.animal
        && a.segment == b.segment
        && a.time_us == b.time_us
        && a.class == b.class
        && [
            (&a.lon, &b.lon),
            (&a.lat, &b.lat),
            (&a.step_m, &b.step_m),
            (&a.bearing_deg, &b.bearing_deg),
            (&a.turn_rad, &b.turn_rad),
            (&a.dt_s, &b.dt_s),
            (&a.se_m, &b.se_m),
        ]
        .iter()
        .all(|(x, y)| bits(x) == bits(y))
}

fn run_in_pool(threads: usize, study: &Study) -> prepare::Prepared {
    rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .unwrap()
        .install(|| prepare::run(study).unwrap())
}

fn mini(dir: &std::path::Path, shuffle: bool) -> Study {
    std::fs::copy("examples/mini/study.toml", dir.join("study.toml")).unwrap();
    let text = std::fs::read_to_string("examples/mini/fixes.csv").unwrap();
    let mut lines: Vec<&str> = text.lines().collect();
    if shuffle {
        // Reverse the data rows: a deterministic, maximal reordering.
        lines[1..].reverse();
    }
    std::fs::write(dir.join("fixes.csv"), lines.join("\n") + "\n").unwrap();
    Study::load(&dir.join("study.toml")).unwrap()
}

#[test]
fn thread_count_changes_nothing() {
    let d = tempfile::tempdir().unwrap();
    let s = mini(d.path(), false);
    let a = run_in_pool(1, &s);
    let b = run_in_pool(2, &s);
    assert!(same(&a.steps, &b.steps));
    assert!(a.exclusions == b.exclusions);
}

#[test]
fn row_order_changes_nothing_but_row_numbers() {
    let d1 = tempfile::tempdir().unwrap();
    let d2 = tempfile::tempdir().unwrap();
    let a = prepare::run(&mini(d1.path(), false)).unwrap();
    let b = prepare::run(&mini(d2.path(), true)).unwrap();
    // Steps carry no row numbers: identical bit for bit.
    assert!(same(&a.steps, &b.steps));
    let key = |p: &prepare::Prepared| {
        let mut v: Vec<(String, String)> = p
            .exclusions
            .iter()
            .map(|e| (e.animal.clone(), e.reason.code().to_string()))
            .collect();
        v.sort();
        v
    };
    assert_eq!(key(&a), key(&b));
}
