//! Timing of every summary and figure on a synthetic 3-state decoded table of
//! 10^6 steps (50 animals × 20 000 hourly fixes). Prints timings; asserts nothing.
//! Target: all of it in ≤ 10 s (release build, 2 cores).

use cairn::report::figures::FigureOptions;
use cairn::report::figures::budget::{grouped_budget, hourly_budget};
use cairn::report::figures::curves::{CurvePanel, IntervalSeries, interval_curves};
use cairn::report::figures::distributions::{
    DensityCurve, DistributionPanel, fitted_distributions,
};
use cairn::report::figures::map::{TrackOverlay, hotspot_map};
use cairn::report::figures::models::{ModelScore, model_comparison};
use cairn::report::figures::residuals::residual_diagnostics;
use cairn::summaries::animals::animal_table;
use cairn::summaries::budgets::{BootstrapOptions, BudgetOptions, activity_budgets};
use cairn::summaries::diagnostics::{inverse_normal_cdf, stream_diagnostics};
use cairn::summaries::hotspots::{HotspotOptions, hotspot_grids};
use cairn::summaries::{CountMethod, Decoded, DecodedColumns, DielPhase};
use std::time::Instant;

const ANIMALS: usize = 50;
const PER_ANIMAL: usize = 20_000;
const HOUR_US: i64 = 3_600_000_000;

/// xorshift64 uniform in [0, 1): a fixed stream so every run times the same data.
struct Uniform(u64);
impl Uniform {
    fn next(&mut self) -> f64 {
        self.0 ^= self.0 << 13;
        self.0 ^= self.0 >> 7;
        self.0 ^= self.0 << 17;
        (self.0 >> 11) as f64 / (1u64 << 53) as f64
    }
}

fn synthetic() -> DecodedColumns {
    let n = ANIMALS * PER_ANIMAL;
    let mut u = Uniform(0x9E37_79B9_7F4A_7C15);
    let mut c = DecodedColumns {
        state_labels: vec!["rest".into(), "forage".into(), "travel".into()],
        season_order: vec![
            "spring".into(),
            "summer".into(),
            "autumn".into(),
            "winter".into(),
        ],
        ..Default::default()
    };
    c.animal.reserve(n);
    c.probabilities.reserve(3 * n);
    for a in 0..ANIMALS {
        let id = format!("animal{a:03}");
        let (mut lon, mut lat) = (4.0 + (a % 10) as f64 * 0.4, 44.0 + (a / 10) as f64 * 0.4);
        let mut s = 0usize;
        for t in 0..PER_ANIMAL {
            if u.next() < 0.08 {
                s = (s + 1 + (u.next() * 2.0) as usize) % 3;
            }
            let step = [40.0, 300.0, 1500.0][s] * (0.5 + u.next());
            let ang = (u.next() - 0.5) * std::f64::consts::TAU * 0.999;
            // Drift back towards the start so tracks stay in a study area.
            lon += step / 78_000.0 * ang.cos() + (4.0 + (a % 10) as f64 * 0.4 - lon) * 0.002;
            lat += step / 111_000.0 * ang.sin() + (44.0 + (a / 10) as f64 * 0.4 - lat) * 0.002;
            let hour = ((t + a) % 24) as f64 + 0.5;
            let day = (t / 24) as f64;
            let elev = 55.0 * ((hour - 12.0) / 12.0 * std::f64::consts::PI).cos()
                + 10.0 * (day / 365.0 * std::f64::consts::TAU).sin()
                - 5.0;
            let diel = if elev > -0.833 {
                DielPhase::Day
            } else if elev > -6.0 {
                if hour < 12.0 {
                    DielPhase::Dawn
                } else {
                    DielPhase::Dusk
                }
            } else {
                DielPhase::Night
            };
            let mut p = [0.04, 0.04, 0.04];
            p[s] = 0.92;
            c.animal.push(id.clone());
            c.time_us.push(t as i64 * HOUR_US);
            c.lon.push(lon);
            c.lat.push(lat);
            c.local_hour.push(hour);
            c.diel.push(diel);
            c.sun_elevation_deg.push(elev);
            c.season.push(c.season_order[(t / (24 * 91)) % 4].clone());
            c.viterbi.push(s);
            c.probabilities.extend_from_slice(&p);
            c.step_m.push(step);
            c.angle_rad.push(ang);
        }
    }
    c
}

fn time<T>(label: &str, total: &mut f64, f: impl FnOnce() -> T) -> T {
    let t0 = Instant::now();
    let out = f();
    let s = t0.elapsed().as_secs_f64();
    *total += s;
    println!("{label:<48} {s:>8.3} s");
    out
}

fn main() {
    let t_gen = Instant::now();
    let cols = synthetic();
    println!(
        "synthetic table: {} steps, {} animals (generated in {:.2} s, not counted)",
        cols.animal.len(),
        ANIMALS,
        t_gen.elapsed().as_secs_f64()
    );
    println!("rayon threads: {}", rayon::current_num_threads());
    let mut total = 0.0;
    let d: Decoded = time("validate decoded table", &mut total, || {
        Decoded::new(cols).unwrap()
    });

    let boot = Some(BootstrapOptions {
        replicates: 1000,
        seed: 7,
        level: 0.95,
    });
    let bv = time("budgets, Viterbi, 1000 bootstrap reps", &mut total, || {
        activity_budgets(
            &d,
            &BudgetOptions {
                method: CountMethod::Viterbi,
                bootstrap: boot,
                ..Default::default()
            },
        )
        .unwrap()
    });
    time(
        "budgets, local probabilities, 1000 reps",
        &mut total,
        || {
            activity_budgets(
                &d,
                &BudgetOptions {
                    method: CountMethod::LocalProbabilities,
                    bootstrap: boot,
                    ..Default::default()
                },
            )
            .unwrap()
        },
    );
    let opts = HotspotOptions {
        state: 1,
        cell_km: 5.0,
        min_hours_per_day: 2.0,
        min_animals: 3,
        ..Default::default()
    };
    let grids = time("hotspot grids ×1 ×2 ×4, Viterbi", &mut total, || {
        hotspot_grids(&d, &opts, &[1, 2, 4]).unwrap()
    });
    time(
        "hotspot grids ×1 ×2 ×4, probabilities",
        &mut total,
        || {
            hotspot_grids(
                &d,
                &HotspotOptions {
                    method: CountMethod::LocalProbabilities,
                    ..opts.clone()
                },
                &[1, 2, 4],
            )
            .unwrap()
        },
    );
    println!(
        "    5 km grid: {} cells, {} shareable, {} suppressed",
        grids[0].cells().len(),
        grids[0].shareable_cells().count(),
        grids[0].suppressed_count()
    );
    time(
        "hotspot outputs (CSV + GeoJSON, 3 sizes)",
        &mut total,
        || {
            for g in &grids {
                let mut csv = Vec::new();
                g.write_csv(&mut csv).unwrap();
                let _ = serde_json::to_string(&g.to_geojson()).unwrap();
            }
        },
    );
    time("per-animal table (both methods)", &mut total, || {
        animal_table(&d, CountMethod::Viterbi).unwrap();
        animal_table(&d, CountMethod::LocalProbabilities).unwrap()
    });
    // Pseudo-residual stand-ins: normal scores of the step ranks within animals.
    let resid: Vec<Vec<f64>> = d
        .animal_rows()
        .iter()
        .map(|r| {
            let n = r.len() as f64;
            r.clone()
                .map(|i| {
                    inverse_normal_cdf(
                        ((i - r.start) as f64 * 0.618_034 % 1.0) * (n - 1.0) / n + 0.5 / n,
                    )
                })
                .collect()
        })
        .collect();
    let segs: Vec<&[f64]> = resid.iter().map(|v| v.as_slice()).collect();
    let diags = time(
        "diagnostics: QQ + ACF(30), 2 streams of 10^6",
        &mut total,
        || {
            vec![
                stream_diagnostics("step", &segs, 30).unwrap(),
                stream_diagnostics("angle", &segs, 30).unwrap(),
            ]
        },
    );

    let o = FigureOptions::default();
    let o2 = FigureOptions::double();
    time("figure: hourly budget", &mut total, || {
        hourly_budget(&bv, &o).unwrap()
    });
    time("figure: diel + season budgets", &mut total, || {
        grouped_budget(&[&bv.diel, &bv.season], &o2).unwrap()
    });
    let tracks = TrackOverlay::from_decoded(&d, 500);
    time(
        "figure: hotspot map + tracks (500/animal)",
        &mut total,
        || hotspot_map(&grids[1], Some(&tracks), &o2).unwrap(),
    );
    let x: Vec<f64> = (0..=100).map(|i| i as f64 * 0.5).collect();
    let panels: Vec<CurvePanel> = (0..3)
        .map(|from| CurvePanel {
            title: format!("from {}", d.state_labels()[from]),
            x_label: "Sea surface temperature (°C)".into(),
            y_label: "Transition probability".into(),
            x: x.clone(),
            series: (0..3)
                .map(|to| {
                    let mean: Vec<f64> = x
                        .iter()
                        .map(|v| {
                            1.0 / 3.0 + 0.2 * ((v / 10.0 + (from * 3 + to) as f64).sin()) / 3.0
                        })
                        .collect();
                    IntervalSeries {
                        state: to,
                        label: d.state_labels()[to].clone(),
                        lower: mean.iter().map(|m| m - 0.05).collect(),
                        upper: mean.iter().map(|m| m + 0.05).collect(),
                        mean,
                    }
                })
                .collect(),
            y_range: None,
        })
        .collect();
    time("figure: transition curves (3 panels)", &mut total, || {
        interval_curves(&panels, 3, &o2).unwrap()
    });
    let scores: Vec<ModelScore> = (0..12)
        .map(|i| ModelScore {
            name: format!("candidate {i}"),
            aic: 10_000.0 + (i * i) as f64 * 3.7,
        })
        .collect();
    time("figure: model comparison (12)", &mut total, || {
        model_comparison(&scores, &o).unwrap()
    });
    time("figure: QQ + ACF (2 streams)", &mut total, || {
        residual_diagnostics(&diags, &o2).unwrap()
    });
    let xs: Vec<f64> = (0..=200).map(|i| i as f64 * 15.0).collect();
    let xa: Vec<f64> = (0..=200)
        .map(|i| -std::f64::consts::PI + i as f64 * std::f64::consts::TAU / 200.0)
        .collect();
    let dens = |x: &[f64], s: usize, f: &dyn Fn(f64) -> f64| DensityCurve {
        state: s,
        label: d.state_labels()[s].clone(),
        y: x.iter().map(|&v| f(v) / 3.0).collect(),
    };
    let dp = vec![
        DistributionPanel {
            x_label: "Step length (m)".into(),
            observed: d.step_m().to_vec(),
            bins: 60,
            range: (0.0, 3000.0),
            x: xs.clone(),
            densities: (0..3)
                .map(|s| {
                    let m = [40.0, 300.0, 1500.0][s];
                    dens(&xs, s, &move |v| {
                        if (0.5 * m..1.5 * m).contains(&v) {
                            1.0 / m
                        } else {
                            0.0
                        }
                    })
                })
                .collect(),
            show_total: true,
        },
        DistributionPanel {
            x_label: "Turning angle (rad)".into(),
            observed: d.angle_rad().to_vec(),
            bins: 36,
            range: (-std::f64::consts::PI, std::f64::consts::PI),
            x: xa.clone(),
            densities: (0..3)
                .map(|s| dens(&xa, s, &|_| 1.0 / std::f64::consts::TAU))
                .collect(),
            show_total: true,
        },
    ];
    time(
        "figure: step + angle histograms (10^6 each)",
        &mut total,
        || fitted_distributions(&dp, &o2).unwrap(),
    );
    println!("{:<48} {total:>8.3} s  (target ≤ 10 s)", "TOTAL");
}
