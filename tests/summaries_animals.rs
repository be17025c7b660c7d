mod common;

use cairn::summaries::animals::animal_table;
use cairn::summaries::{CountMethod, DielPhase};
use common::{HOUR_US, Row, decoded, row};

fn r(animal: &'static str, t: i64, state: usize, p0: f64, step: f64) -> Row {
    Row {
        state,
        probs: vec![p0, 1.0 - p0],
        step,
        ..row(animal, t, 1.0, DielPhase::Night, -20.0)
    }
}

#[test]
fn per_animal_spans_shares_and_mean_steps() {
    let d = decoded(
        &["rest", "travel"],
        &[
            r("A", 0, 0, 1.0, 10.0),
            r("A", 1, 0, 0.5, 30.0),
            r("A", 2, 1, 0.0, 1000.0),
            r("A", 50, 1, 0.0, f64::NAN),
            r("B", 5, 1, 0.25, 400.0),
            r("B", 6, 1, 0.25, f64::NAN),
        ],
    );
    let tv = animal_table(&d, CountMethod::Viterbi).unwrap();
    let a = &tv.rows[0];
    assert_eq!(a.animal, "A");
    assert_eq!((a.first_time_us, a.last_time_us), (0, 50 * HOUR_US));
    assert_eq!(a.span_days, 50.0 / 24.0);
    assert_eq!((a.fixes, a.steps), (4, 3));
    assert_eq!(a.share, vec![0.5, 0.5]);
    assert_eq!(a.mean_step_m, vec![20.0, 1000.0]);
    let b = &tv.rows[1];
    assert_eq!(b.share, vec![0.0, 1.0]);
    assert!(b.mean_step_m[0].is_nan());
    assert_eq!(b.mean_step_m[1], 400.0);

    let t = animal_table(&d, CountMethod::LocalProbabilities).unwrap();
    let a = &t.rows[0];
    assert_eq!(a.share, vec![1.5 / 4.0, 2.5 / 4.0]);
    // rest: (1·10 + 0.5·30) / 1.5; travel: (0.5·30 + 1·1000) / 1.5.
    assert!((a.mean_step_m[0] - 25.0 / 1.5).abs() < 1e-12);
    assert!((a.mean_step_m[1] - 1015.0 / 1.5).abs() < 1e-12);

    let mut csv = Vec::new();
    tv.write_csv(&mut csv).unwrap();
    let csv = String::from_utf8(csv).unwrap();
    let lines: Vec<&str> = csv.lines().collect();
    assert_eq!(
        lines[0],
        "animal,first_fix_utc,last_fix_utc,span_days,fixes,steps,share_rest,share_travel,mean_step_m_rest,mean_step_m_travel"
    );
    assert!(lines[2].starts_with("B,1970-01-01T05:00:00Z,1970-01-01T06:00:00Z,"));
    assert!(lines[2].ends_with(",,400"));
}
