mod common;

use cairn::summaries::{Decoded, DielPhase, SummaryError};
use common::{Row, columns, row};

fn base() -> Vec<Row> {
    vec![
        Row {
            probs: vec![0.9, 0.1],
            ..row("A", 0, 1.0, DielPhase::Night, -20.0)
        },
        Row {
            probs: vec![0.2, 0.8],
            ..row("A", 1, 2.0, DielPhase::Night, -20.0)
        },
        Row {
            probs: vec![0.5, 0.5],
            ..row("B", 0, 1.0, DielPhase::Night, -20.0)
        },
    ]
}

fn err(rows: Vec<Row>) -> SummaryError {
    Decoded::new(columns(&["rest", "travel"], &rows)).unwrap_err()
}

#[test]
fn accepts_a_valid_table_and_computes_intervals() {
    let d = Decoded::new(columns(&["rest", "travel"], &base())).unwrap();
    assert_eq!(d.animal_ids(), ["A", "B"]);
    // A: one interval of 1 h, last fix gets the median (1 h); B: a single fix gets 0.
    assert_eq!(d.interval_s(), [3600.0, 3600.0, 0.0]);
}

#[test]
fn rejects_column_length_mismatch() {
    let mut c = columns(&["rest", "travel"], &base());
    c.lat.pop();
    assert!(matches!(
        Decoded::new(c),
        Err(SummaryError::ColumnLength { column: "lat", .. })
    ));
}

#[test]
fn rejects_latitude_out_of_range() {
    let mut rows = base();
    rows[1].lat = 91.0;
    assert!(matches!(
        err(rows),
        SummaryError::OutOfRange {
            column: "lat",
            row: 1,
            ..
        }
    ));
}

#[test]
fn rejects_local_hour_24() {
    let mut rows = base();
    rows[0].hour = 24.0;
    assert!(matches!(
        err(rows),
        SummaryError::OutOfRange {
            column: "local_hour",
            ..
        }
    ));
}

#[test]
fn rejects_negative_step() {
    let mut rows = base();
    rows[2].step = -1.0;
    assert!(matches!(
        err(rows),
        SummaryError::OutOfRange {
            column: "step_m",
            row: 2,
            ..
        }
    ));
}

#[test]
fn rejects_state_out_of_range() {
    let mut rows = base();
    rows[0].state = 2;
    assert!(matches!(
        err(rows),
        SummaryError::OutOfRange {
            column: "viterbi",
            ..
        }
    ));
}

#[test]
fn rejects_probability_row_not_summing_to_one() {
    let mut rows = base();
    rows[1].probs = vec![0.5, 0.4];
    assert!(matches!(
        err(rows),
        SummaryError::ProbabilityRow { row: 1, .. }
    ));
}

#[test]
fn rejects_non_contiguous_animal() {
    let mut rows = base();
    rows.push(row("A", 5, 3.0, DielPhase::Night, -20.0));
    rows[3].probs = vec![1.0, 0.0];
    assert!(matches!(err(rows), SummaryError::Order { row: 3, .. }));
}

#[test]
fn rejects_time_not_increasing() {
    let mut rows = base();
    rows[1].time_us = rows[0].time_us;
    assert!(matches!(err(rows), SummaryError::Order { row: 1, .. }));
}

#[test]
fn rejects_empty_table() {
    assert!(matches!(err(vec![]), SummaryError::Empty(_)));
}
