mod common;

use cairn::report::figures::budget::{grouped_budget, hourly_budget};
use cairn::report::figures::curves::{CurvePanel, IntervalSeries, interval_curves};
use cairn::report::figures::distributions::{
    DensityCurve, DistributionPanel, fitted_distributions,
};
use cairn::report::figures::map::{TrackOverlay, hotspot_map, km_per_degree_lon};
use cairn::report::figures::models::{ModelScore, model_comparison};
use cairn::report::figures::palette::state_hex;
use cairn::report::figures::residuals::residual_diagnostics;
use cairn::report::figures::{Figure, FigureError, FigureOptions, FigureWidth};
use cairn::summaries::CountMethod;
use cairn::summaries::budgets::{BudgetOptions, activity_budgets};
use cairn::summaries::diagnostics::stream_diagnostics;
use cairn::summaries::hotspots::{HotspotOptions, hotspot_grid};

/// Parse the SVG (well-formedness), check its physical width, and return all text
/// content and all fill/stroke colours.
fn inspect(fig: &Figure, width_mm: &str, name: &str) -> (Vec<String>, Vec<String>) {
    // Set CAIRN_FIGURE_DIR to keep the rendered figures for a look by eye.
    if let Ok(dir) = std::env::var("CAIRN_FIGURE_DIR") {
        fig.write(std::path::Path::new(&dir), name).unwrap();
    }
    let doc = roxmltree::Document::parse(fig.svg()).expect("SVG is well-formed XML");
    let root = doc.root_element();
    assert_eq!(root.tag_name().name(), "svg");
    assert_eq!(root.attribute("width"), Some(width_mm));
    let (w, h) = fig.pixels();
    assert_eq!(
        root.attribute("viewBox"),
        Some(format!("0 0 {w} {h}").as_str())
    );
    let mut texts = Vec::new();
    let mut colours = Vec::new();
    for n in doc.descendants() {
        if n.tag_name().name() == "text" {
            texts.push(n.text().unwrap_or("").trim().to_string());
        }
        for a in ["fill", "stroke"] {
            if let Some(c) = n.attribute(a) {
                colours.push(c.to_string());
            }
        }
    }
    (texts, colours)
}

/// PNG signature, IHDR size and pHYs resolution.
fn png_info(png: &[u8]) -> (u32, u32, u32) {
    assert_eq!(&png[..8], b"\x89PNG\r\n\x1a\n");
    assert_eq!(&png[12..16], b"IHDR");
    let be = |i: usize| u32::from_be_bytes([png[i], png[i + 1], png[i + 2], png[i + 3]]);
    let phys = png
        .windows(4)
        .position(|w| w == b"pHYs")
        .expect("pHYs chunk");
    (be(16), be(20), be(phys + 4))
}

fn has(texts: &[String], s: &str) -> bool {
    texts.iter().any(|t| t.contains(s))
}

fn ribbon_panel() -> CurvePanel {
    let x: Vec<f64> = (0..=20).map(|i| i as f64).collect();
    let series = (0..3)
        .map(|s| {
            let mean: Vec<f64> = x
                .iter()
                .map(|&v| (0.2 + 0.1 * s as f64 + 0.01 * v).min(1.0))
                .collect();
            IntervalSeries {
                state: s,
                label: ["rest", "forage", "travel"][s].to_string(),
                lower: mean.iter().map(|m| m - 0.05).collect(),
                upper: mean.iter().map(|m| m + 0.05).collect(),
                mean,
            }
        })
        .collect();
    CurvePanel {
        title: String::new(),
        x_label: "Distance to colony (km)".into(),
        y_label: "Stationary state probability".into(),
        x,
        series,
        y_range: None,
    }
}

#[test]
fn interval_curves_single_column() {
    let fig = interval_curves(&[ribbon_panel()], 1, &FigureOptions::default()).unwrap();
    let (texts, colours) = inspect(&fig, "85.00mm", "curves1");
    assert!(has(&texts, "Distance to colony (km)"));
    assert!(has(&texts, "Stationary state probability"));
    for l in ["rest", "forage", "travel"] {
        assert!(has(&texts, l), "legend {l}");
    }
    for s in 0..3 {
        assert!(colours.contains(&state_hex(s).unwrap()));
    }
    let (w, h, ppm) = png_info(fig.png());
    // 85 mm at 300 dpi = 1003.9 px.
    assert_eq!(w, 1004);
    assert_eq!((w, h), fig.pixels());
    assert_eq!(ppm, 11811);
    // Deterministic output.
    let again = interval_curves(&[ribbon_panel()], 1, &FigureOptions::default()).unwrap();
    assert_eq!(fig.svg(), again.svg());
    assert_eq!(fig.png(), again.png());
}

#[test]
fn interval_curves_double_column_panels() {
    let mut panels = vec![ribbon_panel(), ribbon_panel()];
    panels[1].title = "from travel".into();
    let fig = interval_curves(&panels, 2, &FigureOptions::double()).unwrap();
    let (texts, _) = inspect(&fig, "175.00mm", "curves2");
    assert!(has(&texts, "from travel"));
    // 175 mm at 300 dpi = 2066.9 px.
    assert_eq!(png_info(fig.png()).0, 2067);
    let mut bad = ribbon_panel();
    bad.series[0].lower.pop();
    assert!(matches!(
        interval_curves(&[bad], 1, &FigureOptions::default()),
        Err(FigureError::Input { .. })
    ));
    let mut many = ribbon_panel();
    many.series[0].state = 8;
    assert!(matches!(
        interval_curves(&[many], 1, &FigureOptions::default()),
        Err(FigureError::TooManyStates(9))
    ));
}

#[test]
fn budget_figures() {
    let d = common::synthetic(6, 24 * 40);
    let b = activity_budgets(
        &d,
        &BudgetOptions {
            bootstrap: None,
            method: CountMethod::Viterbi,
            ..Default::default()
        },
    )
    .unwrap();
    let fig = hourly_budget(&b, &FigureOptions::default()).unwrap();
    let (texts, colours) = inspect(&fig, "85.00mm", "hourly");
    assert!(has(&texts, "Local hour (h"));
    assert!(has(&texts, "Proportion of time"));
    assert!(has(&texts, "share of fixes at night (sun < -0.833°)"));
    assert!(colours.contains(&"#6E6E6E".to_string()), "night mask grey");
    for s in 0..3 {
        assert!(colours.contains(&state_hex(s).unwrap()));
    }
    let fig = grouped_budget(&[&b.diel, &b.season], &FigureOptions::double()).unwrap();
    let (texts, _) = inspect(&fig, "175.00mm", "grouped");
    for l in [
        "Diel phase",
        "Season",
        "day",
        "night",
        "spring",
        "summer",
        "rest",
    ] {
        assert!(has(&texts, l), "{l}");
    }
    assert!(grouped_budget(&[&b.hourly], &FigureOptions::default()).is_err());
}

#[test]
fn hotspot_map_with_tracks() {
    let d = common::synthetic(8, 24 * 20);
    let g = hotspot_grid(
        &d,
        &HotspotOptions {
            state: 0,
            cell_km: 10.0,
            min_hours_per_day: 1.0,
            min_animals: 2,
            ..Default::default()
        },
    )
    .unwrap();
    assert!(g.shareable_cells().count() > 0);
    let tracks = TrackOverlay::from_decoded(&d, 200);
    let fig = hotspot_map(&g, Some(&tracks), &FigureOptions::default()).unwrap();
    let (texts, colours) = inspect(&fig, "85.00mm", "map");
    assert!(has(&texts, "Longitude (°E)"));
    assert!(has(&texts, "Latitude (°N)"));
    assert!(has(&texts, " km"), "scale bar label");
    assert!(texts.iter().any(|t| t == "N"), "north arrow");
    assert!(has(
        &texts,
        &format!(
            "{} cell(s) with < 2 animals not shown",
            g.suppressed_count()
        )
    ));
    // Track lines in all three state colours, cells in the state's colour.
    for s in 0..3 {
        assert!(colours.contains(&state_hex(s).unwrap()));
    }
    // One degree of longitude at the equator is 111.32 km on WGS84.
    assert!((km_per_degree_lon(0.0) - 111.319_490_793).abs() < 1e-6);
}

#[test]
fn model_comparison_figure() {
    let scores = vec![
        ModelScore {
            name: "2 states".into(),
            aic: 1510.0,
        },
        ModelScore {
            name: "3 states + sst".into(),
            aic: 1402.5,
        },
        ModelScore {
            name: "3 states".into(),
            aic: 1420.0,
        },
    ];
    let fig = model_comparison(&scores, &FigureOptions::default()).unwrap();
    let (texts, _) = inspect(&fig, "85.00mm", "models");
    assert!(has(&texts, "ΔAIC"));
    for s in [
        "2 states",
        "3 states + sst",
        "3 states",
        "107.5",
        "17.5",
        "0.0",
    ] {
        assert!(texts.iter().any(|t| t == s), "{s}");
    }
    assert!(
        model_comparison(
            &[ModelScore {
                name: "x".into(),
                aic: f64::NAN
            }],
            &FigureOptions::default()
        )
        .is_err()
    );
}

#[test]
fn residual_figure() {
    let a: Vec<f64> = (0..3000).map(|i| ((i as f64) * 0.7).sin() * 1.3).collect();
    let b: Vec<f64> = (0..500).map(|i| ((i as f64) * 1.3).cos()).collect();
    let s1 = stream_diagnostics("step", &[&a], 15).unwrap();
    let s2 = stream_diagnostics("angle", &[&b], 15).unwrap();
    let fig = residual_diagnostics(&[s1, s2], &FigureOptions::double()).unwrap();
    let (texts, _) = inspect(&fig, "175.00mm", "residuals");
    for s in [
        "step: normal QQ",
        "angle: autocorrelation",
        "Lag (steps)",
        "Theoretical quantile (standard normal)",
        "Pseudo-residual",
    ] {
        assert!(has(&texts, s), "{s}");
    }
    // The QQ panel of 3000 residuals is thinned to at most 2000 points.
    assert!(fig.svg().matches("<circle").count() <= 2000 + 500);
}

#[test]
fn distribution_figure() {
    let steps: Vec<f64> = (0..5000)
        .map(|i| ((i * 7919) % 1000) as f64 * 2.0)
        .collect();
    let angles: Vec<f64> = (0..5000)
        .map(|i| (((i * 104_729) % 628) as f64 / 100.0) - std::f64::consts::PI)
        .collect();
    let xs: Vec<f64> = (0..=100).map(|i| i as f64 * 20.0).collect();
    let xa: Vec<f64> = (0..=100)
        .map(|i| -std::f64::consts::PI + i as f64 * std::f64::consts::TAU / 100.0)
        .collect();
    let dens = |x: &[f64], s: usize, scale: f64| DensityCurve {
        state: s,
        label: ["rest", "forage", "travel"][s].into(),
        y: x.iter()
            .map(|v| (-(v / scale).abs()).exp() / (3.0 * 2.0 * scale))
            .collect(),
    };
    let panels = vec![
        DistributionPanel {
            x_label: "Step length (m)".into(),
            observed: steps,
            bins: 40,
            range: (0.0, 2000.0),
            x: xs.clone(),
            densities: (0..3)
                .map(|s| dens(&xs, s, 200.0 * (s + 1) as f64))
                .collect(),
            show_total: true,
        },
        DistributionPanel {
            x_label: "Turning angle (rad)".into(),
            observed: angles,
            bins: 36,
            range: (-std::f64::consts::PI, std::f64::consts::PI),
            x: xa.clone(),
            densities: (0..3).map(|s| dens(&xa, s, 0.5 * (s + 1) as f64)).collect(),
            show_total: false,
        },
    ];
    let fig = fitted_distributions(
        &panels,
        &FigureOptions {
            width: FigureWidth::Mm(120.0),
            ..Default::default()
        },
    )
    .unwrap();
    let (texts, colours) = inspect(&fig, "120.00mm", "distributions");
    for s in [
        "Step length (m)",
        "Turning angle (rad)",
        "Density",
        "all states",
        "travel",
    ] {
        assert!(has(&texts, s), "{s}");
    }
    for s in 0..3 {
        assert!(colours.contains(&state_hex(s).unwrap()));
    }
    assert_eq!(png_info(fig.png()).0, 1417);
}

#[test]
fn rejects_bad_sizes() {
    let o = FigureOptions {
        dpi: 10,
        ..Default::default()
    };
    assert!(matches!(
        interval_curves(&[ribbon_panel()], 1, &o),
        Err(FigureError::Input { what: "dpi", .. })
    ));
    let o = FigureOptions {
        width: FigureWidth::Mm(5.0),
        ..Default::default()
    };
    assert!(matches!(
        interval_curves(&[ribbon_panel()], 1, &o),
        Err(FigureError::Input { what: "width", .. })
    ));
}
