//! The invented demo study: the files it writes, that cairn reads them, determinism, and
//! the simulator checked against its own truth (these test the generator, not a fit).

use std::path::Path;

use cairn::demo::movement::{STATES, STEP_GAMMA, true_model};
use cairn::demo::{Demo, DemoOptions, DemoSize, TRUE_CANDIDATE, generate, read_truth, write};
use cairn::geo::focal::{ClassGroup, ClassProportions, Window};
use cairn::geo::raster::Raster;
use cairn::geo::sun::sun_position;
use cairn::prepare;
use cairn::study::Study;
use chrono::{TimeZone, Utc};

fn small(seed: u64) -> DemoOptions {
    DemoOptions {
        size: DemoSize::Small,
        seed,
    }
}

fn names(d: &Demo) -> Vec<String> {
    d.truth.covariates.iter().map(|c| c.name.clone()).collect()
}

#[test]
fn small_demo_writes_every_file_and_cairn_prepares_it() {
    let dir = tempfile::tempdir().unwrap();
    let files = write(dir.path(), &small(11)).unwrap();
    for f in files.all() {
        let len = std::fs::metadata(f).unwrap().len();
        assert!(len > 0, "{} is empty", f.display());
    }
    let study = Study::load(&files.study).unwrap();
    let model = study.model().expect("the demo study has a [model]");
    let truth_candidate = model
        .candidates
        .iter()
        .find(|c| c.name == TRUE_CANDIDATE)
        .expect("the true model is a candidate");
    assert_eq!(truth_candidate.labels, STATES);
    assert_eq!(truth_candidate.terms.len(), 3);

    let truth = read_truth(&files.truth).unwrap();
    assert_eq!(truth, generate(&small(11)).unwrap().truth);

    let p = prepare::run(&study).unwrap();
    let ex = &p.summary.excluded_by_reason;
    let planted = |kind: &str| truth.faults.iter().filter(|f| f.kind == kind).count();
    assert_eq!(
        ex.get("unparseable_time").copied(),
        Some(planted("unparseable_time"))
    );
    assert!(ex.get("duplicate_time").copied().unwrap_or(0) >= planted("duplicate_time"));
    assert!(
        ex.get("invalid_class_z").copied().unwrap_or(0) >= 1,
        "{ex:?}"
    );
    let filtered =
        ex.get("spike_filter").copied().unwrap_or(0) + ex.get("speed_filter").copied().unwrap_or(0);
    assert!(filtered >= planted("spike"), "{ex:?}");
    // Every planted spike row is gone from the cleaned tracks.
    for f in truth.faults.iter().filter(|f| f.kind == "spike") {
        let t = chrono::DateTime::parse_from_rfc3339(&f.time).unwrap();
        let kept = p
            .tracks
            .iter()
            .filter(|tr| tr.animal == f.animal)
            .flat_map(|tr| tr.fixes.iter())
            .any(|x| x.time_us == t.timestamp_micros());
        assert!(
            !kept,
            "spike of {} at {} survived cleaning",
            f.animal, f.time
        );
    }
    assert!(p.smoothed.is_some());
    assert!(p.steps.len() > 500, "{} steps", p.steps.len());
    let kelp = p.covariates.column("habitat_kelp").unwrap();
    let present = (0..p.steps.len())
        .filter(|&i| kelp.values.float(i).is_some_and(|v| !v.is_nan()))
        .count();
    assert!(
        present * 10 > p.steps.len() * 9,
        "kelp present at {present} steps"
    );
    assert!(p.covariates.column("depth").is_some());
}

#[test]
fn same_seed_gives_identical_files_and_another_seed_different_ones() {
    let (a, b, c) = (
        tempfile::tempdir().unwrap(),
        tempfile::tempdir().unwrap(),
        tempfile::tempdir().unwrap(),
    );
    let fa = write(a.path(), &small(5)).unwrap();
    let fb = write(b.path(), &small(5)).unwrap();
    let fc = write(c.path(), &small(6)).unwrap();
    let read = |p: &Path| std::fs::read(p).unwrap();
    for (x, y) in fa.all().iter().zip(fb.all()) {
        assert!(read(x) == read(y), "{} differs between runs", x.display());
    }
    for (x, y) in [
        (&fa.fixes, &fc.fixes),
        (&fa.true_track, &fc.true_track),
        (&fa.habitat, &fc.habitat),
        (&fa.depth, &fc.depth),
        (&fa.truth, &fc.truth),
    ] {
        assert!(
            read(x) != read(y),
            "{} is the same for seeds 5 and 6",
            x.display()
        );
    }
}

#[test]
fn rasters_on_disk_are_the_grids_the_animals_moved_on() {
    let dir = tempfile::tempdir().unwrap();
    let files = write(dir.path(), &small(3)).unwrap();
    let d = generate(&small(3)).unwrap();
    let habitat = Raster::read(&files.habitat).unwrap();
    let depth = Raster::read(&files.depth).unwrap();
    assert_eq!(habitat.data(), d.landscape.habitat.data());
    assert_eq!(depth.data(), d.landscape.depth.data());
    assert_eq!((habitat.crs().epsg(), depth.crs().epsg()), (32634, 32634));
    assert_eq!(habitat.transform(), d.landscape.habitat.transform());
    assert_eq!(habitat.nodata(), Some(255.0));
    // The kelp proportion and depth recorded at each true position are what cairn's
    // own calculators give on the files as read back.
    let kelp = ClassProportions::build(
        &habitat,
        vec![ClassGroup::new("kelp", [1])],
        250.0,
        Window::Circle,
    )
    .unwrap();
    for a in &d.animals {
        for p in a.track.points.iter().step_by(7) {
            let k = kelp.counts_xy(p.x, p.y).unwrap().proportion(0).unwrap();
            let z = cairn::geo::interp::bilinear(&depth, p.x, p.y).unwrap();
            assert_eq!((k, z), (p.kelp, p.depth_m), "{} at {}", a.id, p.time_us);
        }
    }
    let sizes: u64 = files
        .all()
        .iter()
        .map(|f| std::fs::metadata(f).unwrap().len())
        .sum();
    assert!(sizes < 5_000_000, "small demo takes {sizes} bytes");
}

#[test]
fn every_state_occurs_and_the_small_demo_spans_polar_night_and_day() {
    let d = generate(&small(2)).unwrap();
    let mut seen = [0usize; 3];
    for a in &d.animals {
        for p in &a.track.points {
            seen[p.state] += 1;
        }
    }
    assert!(seen.iter().all(|&n| n > 20), "states seen {seen:?}");
    // Local noon of the first animal's first day is dark, local midnight of a
    // midsummer animal light.
    let noon_sun = |a: usize, hour_utc: u32| {
        let p = &d.animals[a].track.points[0];
        let t = Utc.timestamp_micros(p.time_us).unwrap();
        let t = t
            .date_naive()
            .and_hms_opt(hour_utc, 0, 0)
            .unwrap()
            .and_utc();
        let (lon, lat) = d.landscape.utm.inverse(p.x, p.y).unwrap();
        sun_position(&t, lon, lat).unwrap().elevation_deg
    };
    assert!(noon_sun(0, 11) < 0.0, "polar night in December");
    assert!(noon_sun(2, 23) > 0.0, "midnight sun in June");
}

#[test]
fn every_true_position_is_in_open_water_and_steps_avoid_land() {
    let d = generate(&small(4)).unwrap();
    for a in &d.animals {
        for w in a.track.points.windows(2) {
            assert!(d.landscape.depth_at(w[1].x, w[1].y).is_some());
            let len = (w[1].x - w[0].x).hypot(w[1].y - w[0].y);
            if w[0].moved {
                assert!((len - w[0].step_m).abs() < 1e-6 * w[0].step_m.max(1.0));
            } else {
                assert_eq!(len, 0.0);
            }
            for k in 1..20 {
                let f = f64::from(k) / 20.0;
                let (x, y) = (
                    w[0].x + f * (w[1].x - w[0].x),
                    w[0].y + f * (w[1].y - w[0].y),
                );
                assert!(
                    d.landscape.depth_at(x, y).is_some(),
                    "{} crosses land after {}",
                    a.id,
                    w[0].time_us
                );
            }
        }
    }
}

/// Pools the small demos of a few seeds for the statistical checks.
fn pooled() -> Vec<Demo> {
    (21..=24).map(|s| generate(&small(s)).unwrap()).collect()
}

#[test]
fn state_switches_follow_gamma_at_the_covariates_of_the_step() {
    // For each from-state i and to-state j: the number of switches i → j against its
    // expectation Σₜ Γᵢⱼ(xₜ) over the steps in state i, with the binomial-sum variance
    // Σₜ Γᵢⱼ(1 − Γᵢⱼ). Four standard errors.
    let demos = pooled();
    let model = true_model(&names(&demos[0])).unwrap();
    let n = STATES.len();
    let mut observed = vec![0.0; n * n];
    let mut expected = vec![0.0; n * n];
    let mut variance = vec![0.0; n * n];
    for d in &demos {
        for a in &d.animals {
            for w in a.track.points.windows(2) {
                let (i, j) = (w[0].state, w[1].state);
                let g = model.transition_matrix(&w[0].covariates());
                observed[i * n + j] += 1.0;
                for k in 0..n {
                    expected[i * n + k] += g[(i, k)];
                    variance[i * n + k] += g[(i, k)] * (1.0 - g[(i, k)]);
                }
            }
        }
    }
    for k in 0..n * n {
        let z = (observed[k] - expected[k]) / variance[k].sqrt();
        assert!(
            z.abs() < 4.0,
            "{} → {}: observed {} expected {:.1} (z = {z:.2})",
            STATES[k / n],
            STATES[k % n],
            observed[k],
            expected[k]
        );
    }
    // Switches out of resting really depend on the hour: more at noon than at midnight.
    let g_noon = model.transition_matrix(&[0.5, 15.0, -1.0, 0.0]);
    let g_midnight = model.transition_matrix(&[0.5, 15.0, 1.0, 0.0]);
    assert!(g_noon[(0, 0)] < g_midnight[(0, 0)]);
}

#[test]
fn drawn_step_lengths_match_each_states_gamma_mean() {
    let demos = pooled();
    for (s, &(mean, sd)) in STEP_GAMMA.iter().enumerate() {
        let steps: Vec<f64> = demos
            .iter()
            .flat_map(|d| d.animals.iter())
            .flat_map(|a| a.track.points.iter())
            .filter(|p| p.state == s && !p.step_m.is_nan())
            .map(|p| p.step_m)
            .collect();
        let m = steps.iter().sum::<f64>() / steps.len() as f64;
        let se = sd / (steps.len() as f64).sqrt();
        assert!(
            (m - mean).abs() < 4.0 * se,
            "{}: mean step {m:.1} m over {} steps, truth {mean} ± {se:.1}",
            STATES[s],
            steps.len()
        );
    }
}

#[test]
fn truth_states_the_model_in_raw_units() {
    let d = generate(&small(1)).unwrap();
    let t = &d.truth;
    assert!(t.synthetic);
    assert_eq!(
        names(&d),
        [
            "habitat_kelp",
            "depth",
            "cos(2*pi*local_hour/24)",
            "sin(2*pi*local_hour/24)"
        ]
    );
    assert_eq!(t.transitions.len(), 6);
    assert!(t.transitions.iter().all(|r| r.coefficients.len() == 4));
    assert_eq!(t.transitions[0].coefficients[1].per, "per metre");
    assert_eq!(t.states.len(), 3);
    assert_eq!(t.animals.len(), 4);
    let steps: usize = t.animals.iter().map(|a| a.steps).sum();
    let per_state: usize = t.animals.iter().flat_map(|a| &a.steps_per_state).sum();
    assert_eq!(steps, per_state);
    // The truth's coefficients are the ones the simulating model uses.
    let model = true_model(&names(&d)).unwrap();
    let beta = &model.params().beta;
    let from_truth: Vec<f64> = t
        .transitions
        .iter()
        .flat_map(|r| std::iter::once(r.intercept).chain(r.coefficients.iter().map(|c| c.value)))
        .collect();
    assert_eq!(from_truth.len(), beta.len());
    for (a, b) in from_truth.iter().zip(beta) {
        assert!((a - b).abs() < 1e-12, "{a} vs {b}");
    }
}

#[test]
fn full_demo_has_about_ten_thousand_steps_across_the_year() {
    let d = generate(&DemoOptions {
        size: DemoSize::Full,
        seed: 1,
    })
    .unwrap();
    let steps: usize = d.truth.animals.iter().map(|a| a.steps).sum();
    assert_eq!(d.animals.len(), 12);
    assert!((7_000..=12_000).contains(&steps), "{steps} steps");
    let months: std::collections::BTreeSet<String> = d
        .truth
        .animals
        .iter()
        .map(|a| a.start_utc[5..7].to_string())
        .collect();
    assert!(months.len() >= 8, "{months:?}");
}
