mod common;

use DielPhase::*;
use cairn::summaries::budgets::{BootstrapOptions, BudgetOptions, activity_budgets};
use cairn::summaries::{CountMethod, Decoded, DielPhase, SummaryError};
use common::{Row, columns, decoded, row};

fn r(
    animal: &'static str,
    t: i64,
    hour: f64,
    diel: DielPhase,
    elev: f64,
    season: &'static str,
    (state, probs): (usize, [f64; 3]),
) -> Row {
    Row {
        season,
        state,
        probs: probs.to_vec(),
        ..row(animal, t, hour, diel, elev)
    }
}

/// Ten fixes of two animals with hand-countable budgets (see the expected values).
fn table() -> Decoded {
    decoded(
        &["rest", "forage", "travel"],
        &[
            r("A", 0, 2.5, Night, -30.0, "winter", (0, [0.8, 0.1, 0.1])),
            r("A", 1, 2.7, Night, -30.0, "winter", (0, [0.6, 0.2, 0.2])),
            r("A", 2, 2.9, Night, -30.0, "winter", (1, [0.2, 0.7, 0.1])),
            r("A", 3, 12.0, Day, 20.0, "winter", (2, [0.0, 0.5, 0.5])),
            r("A", 4, 12.5, Day, 40.0, "summer", (2, [0.1, 0.1, 0.8])),
            r("A", 5, 6.0, Dawn, -3.0, "summer", (1, [0.3, 0.6, 0.1])),
            r("B", 0, 2.1, Night, -0.5, "summer", (1, [0.1, 0.9, 0.0])),
            r("B", 1, 12.9, Day, 50.0, "summer", (2, [0.0, 0.0, 1.0])),
            r("B", 2, 18.0, Dusk, -2.0, "summer", (0, [0.5, 0.25, 0.25])),
            r("B", 3, 18.2, Dusk, -1.0, "summer", (0, [1.0, 0.0, 0.0])),
        ],
    )
}

fn opts(method: CountMethod) -> BudgetOptions {
    BudgetOptions {
        method,
        bootstrap: None,
        ..Default::default()
    }
}

fn close(a: &[f64], b: &[f64]) {
    assert_eq!(a.len(), b.len());
    for (x, y) in a.iter().zip(b) {
        assert!((x - y).abs() < 1e-12, "{a:?} vs {b:?}");
    }
}

#[test]
fn viterbi_budgets_are_exact_counts() {
    let b = activity_budgets(&table(), &opts(CountMethod::Viterbi)).unwrap();
    let h = &b.hourly.rows;
    assert_eq!(h.len(), 24);
    assert_eq!(h[2].n_fixes, 4);
    assert_eq!(h[2].n_animals, 2);
    assert_eq!(h[2].weight, vec![2.0, 2.0, 0.0]);
    assert_eq!(h[2].proportion, vec![0.5, 0.5, 0.0]);
    assert_eq!(h[12].proportion, vec![0.0, 0.0, 1.0]);
    assert_eq!(h[6].proportion, vec![0.0, 1.0, 0.0]);
    assert_eq!(h[18].proportion, vec![1.0, 0.0, 0.0]);
    assert_eq!(h[18].n_animals, 1);
    assert_eq!(h[0].n_fixes, 0);
    assert!(h[0].proportion.iter().all(|p| p.is_nan()));

    let labels: Vec<&str> = b.diel.rows.iter().map(|r| r.group.as_str()).collect();
    assert_eq!(labels, ["dawn", "day", "dusk", "night"]);
    assert_eq!(b.diel.rows[0].proportion, vec![0.0, 1.0, 0.0]);
    assert_eq!(b.diel.rows[1].proportion, vec![0.0, 0.0, 1.0]);
    assert_eq!(b.diel.rows[2].proportion, vec![1.0, 0.0, 0.0]);
    assert_eq!(b.diel.rows[3].proportion, vec![0.5, 0.5, 0.0]);

    let s: Vec<&str> = b.season.rows.iter().map(|r| r.group.as_str()).collect();
    assert_eq!(s, ["winter", "summer"]);
    assert_eq!(b.season.rows[0].proportion, vec![0.5, 0.25, 0.25]);
    assert_eq!(b.season.rows[1].proportion, vec![2.0 / 6.0; 3]);
    assert_eq!(b.season.rows[0].n_animals, 1);
    assert_eq!(b.season.rows[1].n_fixes, 6);
}

#[test]
fn probability_budgets_sum_local_probabilities() {
    let b = activity_budgets(&table(), &opts(CountMethod::LocalProbabilities)).unwrap();
    assert_eq!(b.hourly.method, CountMethod::LocalProbabilities);
    close(&b.hourly.rows[2].weight, &[1.7, 1.9, 0.4]);
    close(&b.hourly.rows[2].proportion, &[0.425, 0.475, 0.1]);
    close(
        &b.hourly.rows[12].proportion,
        &[0.1 / 3.0, 0.6 / 3.0, 2.3 / 3.0],
    );
    close(&b.hourly.rows[18].proportion, &[0.75, 0.125, 0.125]);
    close(&b.season.rows[0].proportion, &[0.4, 0.375, 0.225]);
    close(
        &b.season.rows[1].proportion,
        &[2.0 / 6.0, 1.85 / 6.0, 2.15 / 6.0],
    );
    close(&b.diel.rows[0].proportion, &[0.3, 0.6, 0.1]);
}

#[test]
fn night_fraction_follows_sun_elevation_threshold() {
    let b = activity_budgets(&table(), &opts(CountMethod::Viterbi)).unwrap();
    // Hour 2: three fixes at -30°, one at -0.5° (above -0.833°).
    assert_eq!(b.hourly.rows[2].night_fraction, Some(0.75));
    assert_eq!(b.hourly.rows[12].night_fraction, Some(0.0));
    assert_eq!(b.hourly.rows[18].night_fraction, Some(1.0));
    assert!(b.hourly.rows[0].night_fraction.unwrap().is_nan());
    assert_eq!(b.night_elevation_deg, -0.833);
    let o = BudgetOptions {
        night_elevation_deg: -0.4,
        ..opts(CountMethod::Viterbi)
    };
    let b = activity_budgets(&table(), &o).unwrap();
    assert_eq!(b.hourly.rows[2].night_fraction, Some(1.0));
    let o = BudgetOptions {
        night_elevation_deg: -1.5,
        ..opts(CountMethod::Viterbi)
    };
    let b = activity_budgets(&table(), &o).unwrap();
    assert_eq!(b.hourly.rows[18].night_fraction, Some(0.5));
}

#[test]
fn season_order_can_be_given() {
    let mut c = columns(
        &["rest", "forage", "travel"],
        &[
            r("A", 0, 2.5, Night, -30.0, "winter", (0, [0.8, 0.1, 0.1])),
            r("A", 1, 2.7, Night, -30.0, "summer", (0, [0.6, 0.2, 0.2])),
        ],
    );
    c.season_order = vec!["spring".into(), "summer".into()];
    let d = Decoded::new(c).unwrap();
    let b = activity_budgets(&d, &opts(CountMethod::Viterbi)).unwrap();
    let s: Vec<&str> = b.season.rows.iter().map(|r| r.group.as_str()).collect();
    assert_eq!(s, ["spring", "summer", "winter"]);
    assert_eq!(b.season.rows[0].n_fixes, 0);
}

#[test]
fn bootstrap_over_animals_is_seeded_and_thread_independent() {
    let d = common::synthetic(12, 200);
    let o = BudgetOptions {
        bootstrap: Some(BootstrapOptions {
            replicates: 200,
            seed: 42,
            level: 0.9,
        }),
        ..opts(CountMethod::Viterbi)
    };
    let one = rayon::ThreadPoolBuilder::new()
        .num_threads(1)
        .build()
        .unwrap();
    let two = rayon::ThreadPoolBuilder::new()
        .num_threads(2)
        .build()
        .unwrap();
    let a = one.install(|| activity_budgets(&d, &o).unwrap());
    let b = two.install(|| activity_budgets(&d, &o).unwrap());
    // Debug text compares NaN shares of empty groups as equal, and floats exactly.
    assert_eq!(format!("{a:?}"), format!("{b:?}"));
    let other = activity_budgets(
        &d,
        &BudgetOptions {
            bootstrap: Some(BootstrapOptions {
                seed: 43,
                ..o.bootstrap.unwrap()
            }),
            ..o
        },
    )
    .unwrap();
    assert_ne!(a.hourly.rows[3].interval, other.hourly.rows[3].interval);
    for t in [&a.hourly, &a.diel, &a.season] {
        for row in &t.rows {
            if row.n_fixes == 0 {
                assert!(row.interval.is_none());
                continue;
            }
            let iv = row
                .interval
                .as_ref()
                .expect("groups with fixes have intervals");
            for (s, &(lo, hi)) in iv.iter().enumerate() {
                assert!(0.0 <= lo && lo <= hi && hi <= 1.0);
                // The point estimate pools all animals; with 12 animals and 200
                // replicates it lies inside its 90 % percentile interval.
                assert!(lo - 1e-12 <= row.proportion[s] && row.proportion[s] <= hi + 1e-12);
            }
        }
    }
}

#[test]
fn bootstrap_interval_is_degenerate_when_one_animal_fills_a_bin() {
    // Hour 6 has one fix of animal A in state "forage": every replicate that has a
    // fix there has share exactly 1 for forage.
    let o = BudgetOptions {
        bootstrap: Some(BootstrapOptions {
            replicates: 50,
            seed: 1,
            level: 0.95,
        }),
        ..opts(CountMethod::Viterbi)
    };
    let b = activity_budgets(&table(), &o).unwrap();
    assert_eq!(b.hourly.rows[6].interval.as_ref().unwrap()[1], (1.0, 1.0));
    assert!(b.hourly.rows[0].interval.is_none());
}

#[test]
fn rejects_bad_options() {
    let d = table();
    let bad =
        |o: BudgetOptions| matches!(activity_budgets(&d, &o), Err(SummaryError::Option { .. }));
    assert!(bad(BudgetOptions {
        night_elevation_deg: f64::NAN,
        ..opts(CountMethod::Viterbi)
    }));
    assert!(bad(BudgetOptions {
        bootstrap: Some(BootstrapOptions {
            replicates: 5,
            ..Default::default()
        }),
        ..opts(CountMethod::Viterbi)
    }));
    assert!(bad(BudgetOptions {
        bootstrap: Some(BootstrapOptions {
            level: 1.0,
            ..Default::default()
        }),
        ..opts(CountMethod::Viterbi)
    }));
    let mut c = columns(
        &["a", "b", "c"],
        &[r("A", 0, 1.0, Night, -30.0, "w", (0, [1.0, 0.0, 0.0]))],
    );
    c.probabilities.clear();
    let d = Decoded::new(c).unwrap();
    assert!(matches!(
        activity_budgets(&d, &opts(CountMethod::LocalProbabilities)),
        Err(SummaryError::ProbabilitiesMissing)
    ));
}

#[test]
fn csv_has_one_line_per_group() {
    let b = activity_budgets(&table(), &opts(CountMethod::Viterbi)).unwrap();
    let mut out = Vec::new();
    b.hourly.write_csv(&mut out).unwrap();
    let text = String::from_utf8(out).unwrap();
    let lines: Vec<&str> = text.lines().collect();
    assert_eq!(lines.len(), 25);
    assert!(
        lines[0].starts_with("method,grouping,group,n_fixes,n_animals,night_fraction,share_rest,")
    );
    assert_eq!(
        lines[3].split(',').take(7).collect::<Vec<_>>(),
        ["viterbi", "local_hour", "02", "4", "2", "0.75", "0.5"]
    );
}
