//! From the stage outputs to the report context, its figures and its tables.
//!
//! Every section is computed independently; a section that cannot be produced (a study
//! with one animal has no shareable hotspot cell, a model without covariates has no
//! association table) carries its reason instead of stopping the report.

use std::collections::BTreeMap;
use std::path::Path;

use serde_json::Value;

use super::context::*;
use super::figures::curves::{CurvePanel, IntervalSeries, interval_curves};
use super::figures::distributions::{DensityCurve, DistributionPanel, fitted_distributions};
use super::figures::map::{TrackOverlay, hotspot_map};
use super::figures::models::{ModelScore, model_comparison};
use super::figures::palette::state_hex;
use super::figures::residuals::residual_diagnostics;
use super::figures::{Figure, FigureOptions, FigureWidth};
use super::manifest::InputHash;
use crate::hmm::FittedModel;
use crate::hmm::dists::log_density;
use crate::hmm::inference::IntervalMethod;
use crate::modelling::{self, FitStage};
use crate::study::Study;
use crate::study::model::Selection;
use crate::study::report::{Counting, Width};
use crate::summaries::association::{AssociationTable, TermKind, association_table};
use crate::summaries::budgets::{ActivityBudgets, BudgetOptions, BudgetTable, activity_budgets};
use crate::summaries::diagnostics::stream_diagnostics;
use crate::summaries::hotspots::{DayBasis, HotspotGrid, HotspotOptions, hotspot_grids};
use crate::summaries::{CountMethod, Decoded, DecodedColumns, DielPhase, animals::animal_table};
use crate::tracks::exclusions::Reason;

/// What the report stage computed, before anything is written.
pub struct Built {
    /// The template context.
    pub context: ReportContext,
    /// Figures by file stem.
    pub figures: Vec<(String, Figure)>,
    /// CSV/GeoJSON tables by file name.
    pub tables: Vec<(String, Vec<u8>)>,
}

/// Formats with `d` decimals; "–" for NaN.
pub(crate) fn f(x: f64, d: usize) -> String {
    if x.is_finite() {
        format!("{x:.d$}")
    } else {
        "–".to_string()
    }
}

/// Three significant figures, plain notation for ordinary magnitudes.
pub(crate) fn sig(x: f64) -> String {
    if !x.is_finite() {
        return "–".into();
    }
    if x == 0.0 {
        return "0".into();
    }
    let a = x.abs();
    if !(1e-3..1e6).contains(&a) {
        return format!("{x:.2e}");
    }
    let d = (2 - a.log10().floor() as i32).max(0) as usize;
    format!("{x:.d$}")
}

fn pct(x: f64) -> String {
    if x.is_finite() {
        format!("{:.1}%", 100.0 * x)
    } else {
        "–".into()
    }
}

fn figure_options(study: &Study) -> FigureOptions {
    FigureOptions {
        width: match study.report().width {
            Width::Single => FigureWidth::Single,
            Width::Double => FigureWidth::Double,
        },
        ..Default::default()
    }
}

/// Reads a JSON file written by an earlier stage.
fn read_json(path: &Path) -> Result<Value, String> {
    let text = std::fs::read_to_string(path)
        .map_err(|e| format!("{}: {e}; run `cairn prepare` first", path.display()))?;
    serde_json::from_str(&text).map_err(|e| format!("{}: {e}", path.display()))
}

fn diel_of(s: &str) -> DielPhase {
    if s == "day" {
        DielPhase::Day
    } else if s.ends_with("dawn") {
        DielPhase::Dawn
    } else if s.ends_with("dusk") {
        DielPhase::Dusk
    } else {
        DielPhase::Night
    }
}

/// The validated decoded table of the selected model, for the summaries.
fn decoded_table(study: &Study, stage: &FitStage) -> Result<Decoded, String> {
    let df = &stage.steps;
    let path = study.output().join("steps.parquet");
    let e = |x: modelling::FitStageError| x.to_string();
    let hour_col = match study.covariates().hour {
        crate::covariates::config::HourKind::Solar => "solar_hour",
        crate::covariates::config::HourKind::Clock => "local_hour",
    };
    let time = df
        .column("time_utc")
        .and_then(|c| {
            c.as_materialized_series()
                .cast(&polars::prelude::DataType::Int64)
        })
        .map_err(|x| format!("{}: time_utc: {x}", path.display()))?;
    let time_us: Vec<i64> = time
        .i64()
        .map_err(|x| x.to_string())?
        .iter()
        .map(|v| v.unwrap_or(0))
        .collect();
    let d = &stage.decoded;
    let cols = DecodedColumns {
        state_labels: d.labels.clone(),
        animal: modelling::text_column(&path, df, "animal").map_err(e)?,
        time_us,
        lon: modelling::f64_column(&path, df, "lon").map_err(e)?,
        lat: modelling::f64_column(&path, df, "lat").map_err(e)?,
        local_hour: modelling::f64_column(&path, df, hour_col)
            .map_err(e)?
            .into_iter()
            .map(|h| {
                if h.is_finite() {
                    h.rem_euclid(24.0)
                } else {
                    0.0
                }
            })
            .collect(),
        diel: modelling::text_column(&path, df, "diel_phase")
            .map_err(e)?
            .iter()
            .map(|s| diel_of(s))
            .collect(),
        sun_elevation_deg: modelling::f64_column(&path, df, "sun_elevation_deg").map_err(e)?,
        season: modelling::text_column(&path, df, "season").map_err(e)?,
        season_order: Vec::new(),
        viterbi: d.state.clone(),
        probabilities: d.probs.clone(),
        step_m: modelling::f64_column(&path, df, "step_m").map_err(e)?,
        angle_rad: modelling::f64_column(&path, df, "turn_rad").map_err(e)?,
    };
    Decoded::new(cols).map_err(|x| x.to_string())
}

fn method_of(study: &Study) -> CountMethod {
    match study.report().count {
        Counting::Probabilities => CountMethod::LocalProbabilities,
        Counting::Viterbi => CountMethod::Viterbi,
    }
}

fn method_words(m: CountMethod) -> String {
    match m {
        CountMethod::LocalProbabilities => "time in a state is the sum of the local state probabilities of the steps (each step shares its time among the states by how likely each is)".into(),
        CountMethod::Viterbi => "time in a state counts the steps of the most likely state sequence (Viterbi path)".into(),
    }
}

fn unit_lookup(study: &Study) -> BTreeMap<String, String> {
    let mut m = BTreeMap::new();
    if let Ok(v) = read_json(&study.output().join("columns.json")) {
        for c in v["columns"].as_array().into_iter().flatten() {
            if let (Some(n), Some(u)) = (c["name"].as_str(), c["unit"].as_str()) {
                m.insert(n.to_string(), u.to_string());
            }
        }
    }
    m
}

/// Builds the report context, figures and tables.
///
/// # Errors
/// A message when the stage outputs the report needs are missing or inconsistent.
pub fn build(study: &Study, stage: &FitStage, inputs: &[InputHash]) -> Result<Built, String> {
    let o = figure_options(study);
    let mut figures: Vec<(String, Figure)> = Vec::new();
    let mut tables: Vec<(String, Vec<u8>)> = Vec::new();
    let mut missing: Vec<Missing> = Vec::new();
    let account = read_json(&study.output().join("prepare_summary.json"))?;
    let units = unit_lookup(study);
    let chosen_fit = &stage.fits[stage.selected];
    let model = chosen_fit
        .result
        .as_ref()
        .map_err(|e| format!("the selected model was not fitted: {e}"))?;
    let labels = stage.decoded.labels.clone();
    let method = method_of(study);

    let mut add_fig = |stem: &str, caption: String, fig: Figure| -> FigureRef {
        let r = FigureRef {
            stem: stem.to_string(),
            svg: responsive_svg(fig.svg()),
            caption,
        };
        figures.push((stem.to_string(), fig));
        r
    };

    let data = data_section(&account);
    let models = model_section(study, stage, &mut add_fig, &o);
    let chosen = chosen_section(stage, model, &labels, &mut add_fig, &o)?;
    let decoded = decoded_table(study, stage)?;

    // What drives the states.
    let drivers = drivers_section(stage, model, &labels, &units, &mut add_fig, &mut tables, &o);
    if let Some(r) = &drivers.reason {
        missing.push(Missing {
            section: "What drives the states".into(),
            reason: r.clone(),
        });
    }

    // Budgets.
    let budgets = Section::from_result(budget_section(
        &decoded,
        method,
        &mut add_fig,
        &mut tables,
        &o,
    ));
    if let Some(r) = &budgets.reason {
        missing.push(Missing {
            section: "Activity budgets".into(),
            reason: r.clone(),
        });
    }

    // Hotspots.
    let hotspots = Section::from_result(hotspot_section(
        study,
        &decoded,
        method,
        &mut add_fig,
        &mut tables,
        &o,
    ));
    if let Some(r) = &hotspots.reason {
        missing.push(Missing {
            section: "Hotspots".into(),
            reason: r.clone(),
        });
    }

    // Animals.
    let animals = animal_section(&decoded, method, &mut tables)?;

    // Diagnostics.
    let diagnostics =
        Section::from_result(diagnostics_section(study, stage, model, &mut add_fig, &o));
    if let Some(r) = &diagnostics.reason {
        missing.push(Missing {
            section: "Diagnostics".into(),
            reason: r.clone(),
        });
    }

    let recovery = match &study.report().truth {
        Some(p) => match super::recovery::recovery_section(p, stage, model, &labels) {
            Ok(r) => Some(r),
            Err(e) => {
                missing.push(Missing {
                    section: "Recovery of the simulated truth".into(),
                    reason: e,
                });
                None
            }
        },
        None => None,
    };

    let findings = findings(
        &drivers,
        budgets.content.as_ref(),
        hotspots.content.as_ref(),
        &labels,
    );
    let supports = supports(&decoded, hotspots.content.as_ref());
    let methods = super::text::methods(study, stage, model, method);
    let n_animals = decoded.animal_ids().len();
    let study_info = StudyInfo {
        name: study.name().to_string(),
        file: study
            .source()
            .file_name()
            .map(|s| s.to_string_lossy().to_string())
            .unwrap_or_default(),
        timezone: study.timezone().name().to_string(),
        version: env!("CARGO_PKG_VERSION").to_string(),
        overview: format!(
            "{} animals, {} steps on the analysis grid; the selected model ({}) has {} states ({}).",
            n_animals,
            decoded.n_steps(),
            chosen.name,
            chosen.n_states,
            labels.join(", ")
        ),
    };
    let reproducibility = Reproducibility {
        version: env!("CARGO_PKG_VERSION").to_string(),
        seed: study
            .model()
            .map(|m| m.seed.to_string())
            .unwrap_or_else(|| "–".into()),
        inputs: Table {
            header: vec![
                "role".into(),
                "file".into(),
                "bytes".into(),
                "SHA-256".into(),
            ],
            rows: inputs
                .iter()
                .map(|i| {
                    vec![
                        i.role.clone(),
                        i.file.clone(),
                        i.bytes.to_string(),
                        i.sha256.clone(),
                    ]
                })
                .collect(),
        },
    };
    let context = ReportContext {
        study: study_info,
        data,
        models,
        chosen,
        drivers,
        budgets,
        hotspots,
        animals,
        diagnostics,
        recovery,
        methods,
        references: super::text::references(study),
        cautions: super::text::cautions(),
        findings,
        supports,
        missing,
        reproducibility,
    };
    Ok(Built {
        context,
        figures,
        tables,
    })
}

/// Makes a fixed-size SVG scale with the page: adds a viewBox from its width and height
/// and lets CSS size it.
fn responsive_svg(svg: &str) -> String {
    let attr = |name: &str| -> Option<String> {
        let key = format!("{name}=\"");
        let head = &svg[..svg.find('>')?];
        let i = head.find(&key)? + key.len();
        let j = head[i..].find('"')? + i;
        Some(head[i..j].to_string())
    };
    match (attr("width"), attr("height")) {
        (Some(w), Some(h)) if !svg[..svg.find('>').unwrap_or(0)].contains("viewBox") => svg
            .replacen(
                "<svg ",
                &format!("<svg viewBox=\"0 0 {w} {h}\" preserveAspectRatio=\"xMidYMid meet\" "),
                1,
            ),
        _ => svg.to_string(),
    }
}

fn data_section(a: &Value) -> DataSection {
    let n = |k: &str| a[k].as_u64().unwrap_or(0);
    let files = Table {
        header: vec!["file".into(), "data rows".into()],
        rows: a["files"]
            .as_array()
            .into_iter()
            .flatten()
            .map(|f| {
                let name = f["file"].as_str().unwrap_or("");
                let short = Path::new(name)
                    .file_name()
                    .map(|s| s.to_string_lossy().to_string())
                    .unwrap_or_else(|| name.to_string());
                vec![short, f["rows"].as_u64().unwrap_or(0).to_string()]
            })
            .collect(),
    };
    let excluded: u64 = a["excluded_by_reason"]
        .as_object()
        .map(|m| m.values().filter_map(Value::as_u64).sum())
        .unwrap_or(0);
    let animals = a["animals"].as_array().map_or(0, |v| {
        v.iter()
            .filter(|x| x["animal"].as_str() != Some(crate::prepare::NO_ID))
            .count()
    });
    let counts = Table {
        header: vec!["".into(), "count".into()],
        rows: vec![
            vec!["rows read".into(), n("rows_read").to_string()],
            vec!["rows excluded".into(), excluded.to_string()],
            vec!["fixes kept".into(), n("fixes_kept").to_string()],
            vec!["animals".into(), animals.to_string()],
            vec!["steps on the analysis grid".into(), n("steps").to_string()],
        ],
    };
    let exclusions = Table {
        header: vec!["reason".into(), "rows".into(), "meaning".into()],
        rows: a["excluded_by_reason"]
            .as_object()
            .into_iter()
            .flatten()
            .map(|(k, v)| {
                vec![
                    k.clone(),
                    v.as_u64().unwrap_or(0).to_string(),
                    Reason::from_code(k)
                        .map(Reason::meaning)
                        .unwrap_or("")
                        .to_string(),
                ]
            })
            .collect(),
    };
    let smoother = a["smoother"].as_array();
    let grid = smoother.map(|recs| {
        let ok = recs
            .iter()
            .filter(|r| r["reason"].is_null())
            .count();
        let points: u64 = recs.iter().filter_map(|r| r["grid_points"].as_u64()).sum();
        format!(
            "Tracks were put on a regular time grid by a continuous-time correlated random walk fitted with its location error (Kalman filter and smoother): {ok} of {} animals smoothed, {points} grid points.",
            recs.len()
        )
    });
    let skipped = smoother
        .into_iter()
        .flatten()
        .filter_map(|r| {
            r["reason"]
                .as_str()
                .map(|why| format!("{}: {why}", r["animal"].as_str().unwrap_or("")))
        })
        .collect();
    DataSection {
        files,
        counts,
        exclusions,
        speed_filter: a["speed_filter"].as_str().unwrap_or("").to_string(),
        grid,
        skipped,
    }
}

fn model_section(
    study: &Study,
    stage: &FitStage,
    add_fig: &mut dyn FnMut(&str, String, Figure) -> FigureRef,
    o: &FigureOptions,
) -> ModelSection {
    let rule = match study.model().map(|m| &m.select) {
        Some(Selection::Bic) => "lowest BIC".to_string(),
        Some(Selection::Named(n)) => format!("named in the study file (`{n}`)"),
        _ => "lowest AIC".to_string(),
    };
    let by_name: BTreeMap<&str, &modelling::CandidateFit> = stage
        .fits
        .iter()
        .map(|f| (f.candidate.name.as_str(), f))
        .collect();
    let rows = stage
        .comparison
        .iter()
        .map(|r| {
            let fit = by_name.get(r.name.as_str());
            let m = fit.and_then(|f| f.result.as_ref().ok());
            vec![
                r.name.clone(),
                r.n_states.to_string(),
                fit.map(|f| {
                    if f.covariates.is_empty() {
                        "none".to_string()
                    } else {
                        f.covariates.join(" + ")
                    }
                })
                .unwrap_or_default(),
                r.n_params.to_string(),
                f(r.loglik, 1),
                f(r.aic, 1),
                f(r.delta_aic, 1),
                f(r.bic, 1),
                m.map(|m| format!("{}/{}", m.convergence().n_at_best, m.convergence().n_starts))
                    .unwrap_or_default(),
                if r.converged { "yes" } else { "no" }.to_string(),
            ]
        })
        .collect();
    let failed = stage
        .fits
        .iter()
        .filter_map(|f| {
            f.result
                .as_ref()
                .err()
                .map(|e| format!("{}: {e}", f.candidate.name))
        })
        .collect();
    let scores: Vec<ModelScore> = stage
        .comparison
        .iter()
        .map(|r| ModelScore {
            name: r.name.clone(),
            aic: r.aic,
        })
        .collect();
    let figure = model_comparison(&scores, o).ok().map(|fig| {
        add_fig(
            "model_comparison",
            "Difference in AIC from the best candidate (smaller is better).".into(),
            fig,
        )
    });
    ModelSection {
        rule,
        selected: stage.fits[stage.selected].candidate.name.clone(),
        table: Table {
            header: [
                "model",
                "states",
                "covariates",
                "parameters",
                "log L",
                "AIC",
                "ΔAIC",
                "BIC",
                "starts at best",
                "converged",
            ]
            .iter()
            .map(|s| s.to_string())
            .collect(),
            rows,
        },
        failed,
        left_out: (stage.dropped_steps > 0).then(|| {
            format!(
                "{} steps with a missing covariate of some candidate (a location outside a raster or on its nodata cells, see covariate_missing.csv) were left out of every candidate, so that all were fitted to the same {} steps; series were split where steps were left out.",
                stage.dropped_steps,
                stage.steps.height()
            )
        }),
        figure,
    }
}

/// Replaces "state k" in engine parameter names by the state labels.
fn label_name(name: &str, labels: &[String]) -> String {
    let mut s = name.to_string();
    for (k, l) in labels.iter().enumerate().rev() {
        s = s.replace(&format!("[state {}]", k + 1), &format!("[{l}]"));
        s = s.replace(&format!("delta {}", k + 1), &format!("delta {l}"));
    }
    if let Some(rest) = s.strip_prefix("beta ")
        && let Some((pair, term)) = rest.split_once(": ")
        && let Some((a, b)) = pair.split_once("->")
        && let (Ok(i), Ok(j)) = (a.parse::<usize>(), b.parse::<usize>())
        && i >= 1
        && j >= 1
        && i <= labels.len()
        && j <= labels.len()
    {
        return format!("beta {} → {}: {term}", labels[i - 1], labels[j - 1]);
    }
    s
}

fn chosen_section(
    stage: &FitStage,
    model: &FittedModel,
    labels: &[String],
    add_fig: &mut dyn FnMut(&str, String, Figure) -> FigureRef,
    o: &FigureOptions,
) -> Result<ChosenSection, String> {
    let cand = &stage.fits[stage.selected].candidate;
    let n = labels.len();
    let states = (0..n)
        .map(|k| StateSwatch {
            label: labels[k].clone(),
            colour: state_hex(k).unwrap_or_else(|_| "#777777".into()),
        })
        .collect();
    let intervals = model.natural_intervals(0.95, IntervalMethod::Delta).ok();
    let spec = model.model().valid_spec().spec().clone();
    let params = model.params();
    // Distributions table: one row per state, one column per stream parameter.
    let mut header = vec!["state".to_string()];
    for s in &spec.streams {
        for p in s.family.param_names() {
            header.push(format!("{} {p}", s.name));
        }
    }
    let find = |name: &str| -> Option<&crate::hmm::inference::Interval> {
        intervals.as_ref()?.iter().find(|i| i.name == name)
    };
    let rows = (0..n)
        .map(|j| {
            let mut row = vec![labels[j].clone()];
            for (si, s) in spec.streams.iter().enumerate() {
                for (pi, p) in s.family.param_names().iter().enumerate() {
                    let est = params.streams[si].per_state[j][pi];
                    let name = format!("{}: {p} [state {}]", s.name, j + 1);
                    row.push(match find(&name) {
                        Some(i) => format!("{} [{}, {}]", sig(est), sig(i.lower), sig(i.upper)),
                        None => sig(est),
                    });
                }
            }
            row
        })
        .collect();
    let parameters = Table {
        header: vec![
            "parameter".into(),
            "estimate".into(),
            "SE".into(),
            "95% interval".into(),
        ],
        rows: intervals
            .iter()
            .flatten()
            .map(|i| {
                vec![
                    label_name(&i.name, labels),
                    sig(i.estimate),
                    sig(i.se),
                    format!("[{}, {}]", sig(i.lower), sig(i.upper)),
                ]
            })
            .collect(),
    };
    let c = model.convergence();
    let convergence = format!(
        "{} after {} iterations ({}); largest gradient component {:.1e}; {} of {} random starts reached the best log-likelihood (within 1e-4){}{}.",
        if c.converged {
            "Converged"
        } else {
            "Did NOT converge"
        },
        c.iterations,
        c.termination,
        c.gradient_norm,
        c.n_at_best,
        c.n_starts,
        if c.n_shared > 0 {
            format!(
                "; {} of the starts ended their warm-up (on a tenth of the data) where an earlier start's had ended, and shared that start's full-data run",
                c.n_shared
            )
        } else {
            String::new()
        },
        if c.n_failed > 0 {
            format!("; {} starts failed", c.n_failed)
        } else {
            String::new()
        }
    );
    let figure = distribution_figure(stage, model, labels, o)
        .ok()
        .map(|fig| {
            add_fig(
                "distributions",
                "Observed step lengths and turning angles (histograms) with the fitted state-dependent densities, each weighted by the state's share of the steps; the black line is their sum.".into(),
                fig,
            )
        });
    Ok(ChosenSection {
        name: cand.name.clone(),
        n_states: n,
        states,
        distributions: Table { header, rows },
        parameters,
        convergence,
        covariance_problem: model.covariance().problem(),
        figure,
    })
}

fn distribution_figure(
    stage: &FitStage,
    model: &FittedModel,
    labels: &[String],
    o: &FigureOptions,
) -> Result<Figure, String> {
    let spec = model.model().valid_spec().spec().clone();
    let params = model.params();
    let n = labels.len();
    let d = &stage.decoded;
    let t = d.state.len();
    let mut share = vec![0.0; n];
    for row in d.probs.chunks(n.max(1)) {
        for (s, p) in share.iter_mut().zip(row) {
            *s += p;
        }
    }
    share.iter_mut().for_each(|s| *s /= t.max(1) as f64);
    let path = Path::new("steps.parquet");
    let mut panels = Vec::new();
    for (si, s) in spec.streams.iter().enumerate() {
        let column = if s.name == "step" {
            "step_m"
        } else {
            "turn_rad"
        };
        let observed =
            modelling::f64_column(path, &stage.steps, column).map_err(|e| e.to_string())?;
        let (range, x_label) = if s.family.is_circular() {
            (
                (-std::f64::consts::PI, std::f64::consts::PI),
                "Turning angle (rad)".to_string(),
            )
        } else {
            let mut fin: Vec<f64> = observed.iter().copied().filter(|x| x.is_finite()).collect();
            fin.sort_by(f64::total_cmp);
            let hi = crate::summaries::quantile_sorted(&fin, 0.99);
            (
                (0.0, if hi > 0.0 { hi } else { 1.0 }),
                "Step length (m)".to_string(),
            )
        };
        let m = 200;
        let x: Vec<f64> = (0..m)
            .map(|k| range.0 + (range.1 - range.0) * (k as f64 + 0.5) / m as f64)
            .collect();
        let densities = (0..n)
            .map(|j| {
                let nat = &params.streams[si].per_state[j];
                let zero = params.streams[si].zero_mass.as_ref().map_or(0.0, |z| z[j]);
                DensityCurve {
                    state: j,
                    label: labels[j].clone(),
                    y: x.iter()
                        .map(|&v| share[j] * (1.0 - zero) * log_density(s.family, nat, v).exp())
                        .collect(),
                }
            })
            .collect();
        panels.push(DistributionPanel {
            x_label,
            observed,
            bins: 40,
            range,
            x,
            densities,
            show_total: true,
        });
    }
    fitted_distributions(&panels, o).map_err(|e| e.to_string())
}

#[allow(clippy::too_many_arguments)]
fn drivers_section(
    stage: &FitStage,
    model: &FittedModel,
    labels: &[String],
    units: &BTreeMap<String, String>,
    add_fig: &mut dyn FnMut(&str, String, Figure) -> FigureRef,
    tables: &mut Vec<(String, Vec<u8>)>,
    o: &FigureOptions,
) -> DriversSection {
    let mut out = DriversSection {
        association: None,
        readings: Vec::new(),
        occupancy: Vec::new(),
        transitions: Vec::new(),
        levels: None,
        reference: String::new(),
        reason: None,
    };
    let cand = &stage.fits[stage.selected].candidate;
    if cand.terms.is_empty() {
        out.reason = Some(format!(
            "The selected model (`{}`) has no covariates, so the data did not support a covariate effect on switching among the candidates fitted{}",
            cand.name,
            if stage.fits.iter().any(|f| !f.candidate.terms.is_empty()) {
                " (see the model comparison)"
            } else {
                ""
            }
        ));
        return out;
    }
    let unit_of = |c: &str| units.get(c).cloned();
    match association_table(model, labels, &unit_of, 0.95) {
        Ok(t) => {
            let mut buf = Vec::new();
            if t.write_csv(&mut buf).is_ok() {
                tables.push(("association.csv".into(), buf));
            }
            out.readings = readings(&t);
            out.association = Some(association_rows(&t));
        }
        Err(e) => out.reason = Some(format!("No association table: {e}")),
    }
    let Some(curves) = &stage.curves else {
        let why = stage
            .curves_note
            .clone()
            .unwrap_or_else(|| "occupancy curves were not computed".into());
        out.reason = Some(match out.reason.take() {
            Some(r) => format!("{r}; {why}"),
            None => why,
        });
        return out;
    };
    out.reference = curves
        .reference
        .iter()
        .map(|(c, v)| match v.parse::<f64>() {
            Ok(x) => format!("{c} at {}", sig(x)),
            Err(_) => format!("{c} at {v}"),
        })
        .collect::<Vec<_>>()
        .join(", ");
    // Group rows by covariate (in first-appearance order).
    let mut covs: Vec<String> = Vec::new();
    for r in &curves.stationary {
        if !covs.contains(&r.covariate) {
            covs.push(r.covariate.clone());
        }
    }
    let mut level_rows = Vec::new();
    for (ci, cov) in covs.iter().enumerate() {
        let rows: Vec<_> = curves
            .stationary
            .iter()
            .filter(|r| &r.covariate == cov)
            .collect();
        if rows.iter().any(|r| r.level.is_some()) {
            for r in rows {
                level_rows.push(vec![
                    cov.clone(),
                    r.level.clone().unwrap_or_default(),
                    r.quantity.clone(),
                    f(r.estimate, 3),
                    format!("[{}, {}]", f(r.lower, 3), f(r.upper, 3)),
                ]);
            }
            continue;
        }
        let unit = units.get(cov).cloned().unwrap_or_default();
        let x_label = if unit.is_empty() {
            cov.clone()
        } else {
            format!("{cov} ({unit})")
        };
        let panel =
            |rows: &[&crate::summaries::occupancy::CurveRow], qs: &[String], title: String| {
                let mut x: Vec<f64> = Vec::new();
                for r in rows {
                    if !x.contains(&r.value) {
                        x.push(r.value);
                    }
                }
                let series = qs
                    .iter()
                    .enumerate()
                    .map(|(k, q)| {
                        let sel: Vec<_> = rows.iter().filter(|r| &r.quantity == q).collect();
                        IntervalSeries {
                            state: k,
                            label: q.clone(),
                            mean: sel.iter().map(|r| r.estimate).collect(),
                            lower: sel.iter().map(|r| r.lower).collect(),
                            upper: sel.iter().map(|r| r.upper).collect(),
                        }
                    })
                    .collect();
                CurvePanel {
                    title,
                    x_label: x_label.clone(),
                    y_label: "Probability".into(),
                    x,
                    series,
                    y_range: None,
                }
            };
        let p = panel(&rows, labels, String::new());
        let p = CurvePanel {
            y_label: "Stationary probability of state".into(),
            ..p
        };
        if let Ok(fig) = interval_curves(&[p], 1, o) {
            out.occupancy.push(add_fig(
                &format!("occupancy_{}", ci + 1),
                format!(
                    "Long-run share of time in each state (stationary distribution) across {cov}, other covariates held at their reference; ribbons are 95% intervals from 1000 draws of the estimates."
                ),
                fig,
            ));
        }
        // Transition curves: one panel per from-state, the switches out of it.
        let trows: Vec<_> = curves
            .transitions
            .iter()
            .filter(|r| &r.covariate == cov)
            .collect();
        let panels: Vec<CurvePanel> = labels
            .iter()
            .map(|from| {
                let qs: Vec<String> = labels.iter().map(|to| format!("{from} → {to}")).collect();
                let mut p = panel(&trows, &qs, format!("from {from}"));
                for (k, s) in p.series.iter_mut().enumerate() {
                    s.state = k;
                    s.label = labels[k].clone();
                }
                p
            })
            .collect();
        if let Ok(fig) = interval_curves(&panels, labels.len().min(3), o) {
            out.transitions.push(add_fig(
                &format!("transitions_{}", ci + 1),
                format!("Probability of each next state across {cov}, one panel per current state, with 95% intervals."),
                fig,
            ));
        }
    }
    if !level_rows.is_empty() {
        out.levels = Some(Table {
            header: vec![
                "covariate".into(),
                "level".into(),
                "state".into(),
                "stationary probability".into(),
                "95% interval".into(),
            ],
            rows: level_rows,
        });
    }
    out
}

fn association_rows(t: &AssociationTable) -> Table {
    Table {
        header: [
            "switch",
            "term",
            "coefficient (SE)",
            "odds ratio [95%]",
            "per unit [95%]",
            "p",
        ]
        .iter()
        .map(|s| s.to_string())
        .collect(),
        rows: t
            .rows
            .iter()
            .map(|r| {
                vec![
                    format!("{} → {}", r.from, r.to),
                    match r.kind {
                        TermKind::Standardised => format!("{} (per sd)", r.term),
                        _ => r.term.clone(),
                    },
                    format!("{} ({})", sig(r.coefficient), sig(r.se)),
                    format!(
                        "{} [{}, {}]",
                        sig(r.odds_ratio.estimate),
                        sig(r.odds_ratio.lower),
                        sig(r.odds_ratio.upper)
                    ),
                    r.odds_ratio_per_unit
                        .map(|u| {
                            format!(
                                "{} [{}, {}]{}",
                                sig(u.estimate),
                                sig(u.lower),
                                sig(u.upper),
                                if r.unit.is_empty() {
                                    String::new()
                                } else {
                                    format!(" per {}", r.unit)
                                }
                            )
                        })
                        .unwrap_or_else(|| "–".into()),
                    if r.p < 1e-4 {
                        "<0.0001".into()
                    } else {
                        f(r.p, 4)
                    },
                ]
            })
            .collect(),
    }
}

/// Plain readings of the associations whose interval excludes 1, strongest first.
fn readings(t: &AssociationTable) -> Vec<String> {
    let mut rows: Vec<_> = t
        .rows
        .iter()
        .filter(|r| {
            matches!(
                r.kind,
                TermKind::Standardised | TermKind::Numeric | TermKind::Level
            ) && r.odds_ratio.excludes_one()
        })
        .collect();
    rows.sort_by(|a, b| {
        b.odds_ratio
            .estimate
            .ln()
            .abs()
            .total_cmp(&a.odds_ratio.estimate.ln().abs())
            .then(a.from.cmp(&b.from))
            .then(a.to.cmp(&b.to))
    });
    rows.iter()
        .map(|r| format!("{}.", capitalise(&r.reading)))
        .collect()
}

fn capitalise(s: &str) -> String {
    let mut c = s.chars();
    match c.next() {
        Some(f) => f.to_uppercase().collect::<String>() + c.as_str(),
        None => String::new(),
    }
}

fn budget_table(t: &BudgetTable) -> Table {
    let mut header = vec![
        t.grouping.as_str().replace('_', " "),
        "fixes".into(),
        "animals".into(),
    ];
    header.extend(t.state_labels.iter().map(|l| format!("{l} [95%]")));
    Table {
        header,
        rows: t
            .rows
            .iter()
            .map(|r| {
                let mut row = vec![
                    r.group.clone(),
                    r.n_fixes.to_string(),
                    r.n_animals.to_string(),
                ];
                for (k, p) in r.proportion.iter().enumerate() {
                    row.push(match r.interval.as_ref().and_then(|v| v.get(k)) {
                        Some((lo, hi)) if lo.is_finite() && hi.is_finite() => {
                            format!("{} [{}, {}]", pct(*p), pct(*lo), pct(*hi))
                        }
                        _ => pct(*p),
                    });
                }
                row
            })
            .collect(),
    }
}

fn budget_section(
    d: &Decoded,
    method: CountMethod,
    add_fig: &mut dyn FnMut(&str, String, Figure) -> FigureRef,
    tables: &mut Vec<(String, Vec<u8>)>,
    o: &FigureOptions,
) -> Result<BudgetSection, String> {
    let b: ActivityBudgets = activity_budgets(
        d,
        &BudgetOptions {
            method,
            ..Default::default()
        },
    )
    .map_err(|e| e.to_string())?;
    for (t, name) in [
        (&b.hourly, "budget_hourly.csv"),
        (&b.diel, "budget_diel.csv"),
        (&b.season, "budget_season.csv"),
    ] {
        let mut buf = Vec::new();
        t.write_csv(&mut buf).map_err(|e| e.to_string())?;
        tables.push((name.into(), buf));
    }
    let hourly = super::figures::budget::hourly_budget(&b, o).map_err(|e| e.to_string())?;
    let grouped = super::figures::budget::grouped_budget(&[&b.diel, &b.season], o)
        .map_err(|e| e.to_string())?;
    let boot = b
        .hourly
        .bootstrap
        .map(|s| {
            format!(
                "; intervals are {:.0}% percentiles of {} bootstrap resamples of animals",
                s.level * 100.0,
                s.replicates
            )
        })
        .unwrap_or_default();
    Ok(BudgetSection {
        method: format!("{}{boot}", method_words(method)),
        hourly: add_fig(
            "budget_hourly",
            "Share of time in each state by local hour; grey shading is the fraction of fixes in that hour with the sun below the horizon (from the sun's elevation at each fix, so it follows the season and latitude of the data).".into(),
            hourly,
        ),
        grouped: add_fig(
            "budget_diel_season",
            "Share of time in each state by diel phase (from the sun's elevation) and by season.".into(),
            grouped,
        ),
        diel: budget_table(&b.diel),
        season: budget_table(&b.season),
    })
}

fn hotspot_state(study: &Study, labels: &[String]) -> Result<usize, String> {
    match &study.report().hotspot_state {
        Some(l) => labels.iter().position(|x| x == l).ok_or_else(|| {
            format!(
                "report.hotspot_state {l:?} is not a state of the selected model ({})",
                labels.join(", ")
            )
        }),
        None => Ok(if labels.len() >= 3 { 1 } else { 0 }),
    }
}

fn hotspot_section(
    study: &Study,
    d: &Decoded,
    method: CountMethod,
    add_fig: &mut dyn FnMut(&str, String, Figure) -> FigureRef,
    tables: &mut Vec<(String, Vec<u8>)>,
    o: &FigureOptions,
) -> Result<HotspotSection, String> {
    let r = study.report();
    let state = hotspot_state(study, d.state_labels())?;
    let opts = HotspotOptions {
        state,
        cell_km: r.cell_km,
        method,
        min_hours_per_day: r.min_hours,
        day_basis: DayBasis::LocalDate,
        min_animals: r.min_animals,
        max_interval_hours: study.gap_s() / 3600.0,
        ..Default::default()
    };
    let grids = hotspot_grids(d, &opts, &[1, r.brief_factor]).map_err(|e| e.to_string())?;
    let (fine, coarse): (&HotspotGrid, &HotspotGrid) = (&grids[0], &grids[1]);
    let label = d.state_labels()[state].clone();
    for (g, stem) in [(fine, "hotspots"), (coarse, "hotspots_brief")] {
        let mut buf = Vec::new();
        g.write_csv(&mut buf).map_err(|e| e.to_string())?;
        tables.push((format!("{stem}.csv"), buf));
        let gj = serde_json::to_vec_pretty(&g.to_geojson()).map_err(|e| e.to_string())?;
        tables.push((format!("{stem}.geojson"), gj));
    }
    let tracks = TrackOverlay::from_decoded(d, 400);
    let figure = hotspot_map(fine, Some(&tracks), o).ok().map(|fig| {
        add_fig(
            "hotspots",
            format!(
                "Animal-days with at least {} h in the {label} state per {} km equal-area cell (cells with fewer than {} animals suppressed), over the tracks coloured by decoded state.",
                sig(r.min_hours),
                sig(r.cell_km),
                r.min_animals
            ),
            fig,
        )
    });
    let brief_figure = hotspot_map(coarse, None, o).ok().map(|fig| {
        add_fig(
            "hotspots_brief",
            format!(
                "Generalised for sharing: {} km cells, only cells used by at least {} animals, no tracks.",
                sig(coarse.cell_km()),
                r.min_animals
            ),
            fig,
        )
    });
    let shown: Vec<_> = fine.shareable_cells().collect();
    let note = if shown.is_empty() {
        Some(format!(
            "no cell was used by {} or more animals, so no cell can be shown; lower report.min_animals only if the data are not sensitive",
            r.min_animals
        ))
    } else {
        None
    };
    let mut top: Vec<_> = shown.clone();
    top.sort_by(|a, b| {
        b.animal_days
            .cmp(&a.animal_days)
            .then(b.animals.cmp(&a.animals))
            .then(a.col.cmp(&b.col))
            .then(a.row.cmp(&b.row))
    });
    let top = Table {
        header: vec![
            "cell centre (lon, lat)".into(),
            "animal-days".into(),
            "animals".into(),
            "hours".into(),
        ],
        rows: top
            .iter()
            .take(5)
            .map(|c| {
                vec![
                    format!("{:.3}, {:.3}", c.centre.0, c.centre.1),
                    c.animal_days.to_string(),
                    c.animals.to_string(),
                    f(c.hours, 1),
                ]
            })
            .collect(),
    };
    Ok(HotspotSection {
        state: label.clone(),
        rule: format!(
            "an animal-day counts in a cell when the animal spent at least {} h in the {label} state there that (local) day; {} km equal-area cells; cells used by fewer than {} animals are suppressed",
            sig(r.min_hours),
            sig(r.cell_km),
            r.min_animals
        ),
        figure,
        brief_figure,
        note,
        top,
        shown: shown.len(),
        suppressed: fine.suppressed_count(),
        brief_rule: format!(
            "{} km cells, {} shown, {} suppressed",
            sig(coarse.cell_km()),
            coarse.shareable_cells().count(),
            coarse.suppressed_count()
        ),
    })
}

fn animal_section(
    d: &Decoded,
    method: CountMethod,
    tables: &mut Vec<(String, Vec<u8>)>,
) -> Result<AnimalSection, String> {
    let t = animal_table(d, method).map_err(|e| e.to_string())?;
    let mut buf = Vec::new();
    t.write_csv(&mut buf).map_err(|e| e.to_string())?;
    tables.push(("animals.csv".into(), buf));
    let mut header = vec![
        "animal".to_string(),
        "first fix (UTC)".into(),
        "days".into(),
        "steps".into(),
    ];
    header.extend(t.state_labels.iter().map(|l| format!("{l} share")));
    header.extend(t.state_labels.iter().map(|l| format!("{l} mean step (m)")));
    let rows = t
        .rows
        .iter()
        .map(|r| {
            let first = chrono::DateTime::from_timestamp_micros(r.first_time_us)
                .map(|t| t.format("%Y-%m-%d").to_string())
                .unwrap_or_default();
            let mut row = vec![
                r.animal.clone(),
                first,
                f(r.span_days, 1),
                r.steps.to_string(),
            ];
            row.extend(r.share.iter().map(|s| pct(*s)));
            row.extend(r.mean_step_m.iter().map(|s| f(*s, 0)));
            row
        })
        .collect();
    Ok(AnimalSection {
        method: method_words(method),
        table: Table { header, rows },
    })
}

fn diagnostics_section(
    study: &Study,
    stage: &FitStage,
    model: &FittedModel,
    add_fig: &mut dyn FnMut(&str, String, Figure) -> FigureRef,
    o: &FigureOptions,
) -> Result<DiagnosticsSection, String> {
    let data = modelling::selected_data(study, stage).map_err(|e| e.to_string())?;
    let res = model
        .model()
        .pseudo_residuals(&data)
        .map_err(|e| e.to_string())?;
    let names = &model.model().valid_spec().spec().streams;
    let shortest_long = res
        .iter()
        .map(|r| r.streams.first().map_or(0, Vec::len))
        .max()
        .unwrap_or(0);
    let max_lag = 20.min(shortest_long.saturating_sub(1));
    if max_lag == 0 {
        return Err("series too short for autocorrelation".into());
    }
    let mut streams = Vec::new();
    let mut notes = Vec::new();
    for (k, s) in names.iter().enumerate() {
        let segs: Vec<&[f64]> = res.iter().map(|r| r.streams[k].as_slice()).collect();
        let sd = stream_diagnostics(&s.name, &segs, max_lag).map_err(|e| e.to_string())?;
        let lag1 = sd.acf.get(1).copied().unwrap_or(f64::NAN);
        let band = 1.96 / (sd.n as f64).sqrt();
        notes.push(format!(
            "{}: {} pseudo-residuals; lag-1 autocorrelation {} ({} the ±{} band expected without autocorrelation).",
            s.name,
            sd.n,
            f(lag1, 3),
            if lag1.abs() > band { "outside" } else { "inside" },
            f(band, 3)
        ));
        streams.push(sd);
    }
    let fig = residual_diagnostics(&streams, o).map_err(|e| e.to_string())?;
    Ok(DiagnosticsSection {
        figure: add_fig(
            "diagnostics",
            "Pseudo-residuals of each data stream: normal quantile–quantile plot (points near the line mean the model describes the marginal distribution) and autocorrelation function (bars within the band mean little residual autocorrelation).".into(),
            fig,
        ),
        notes,
    })
}

fn findings(
    drivers: &DriversSection,
    budgets: Option<&BudgetSection>,
    hotspots: Option<&HotspotSection>,
    labels: &[String],
) -> Vec<String> {
    let mut out: Vec<String> = drivers.readings.iter().take(2).cloned().collect();
    if out.is_empty()
        && let Some(r) = &drivers.reason
    {
        out.push(format!(
            "No covariate effect on switching between states is reported. {r}."
        ));
    }
    if let Some(b) = budgets {
        // Night vs day share of each state, from the diel table (rows dawn, day, dusk, night).
        let day = b.diel.rows.iter().find(|r| r[0] == "day");
        let night = b.diel.rows.iter().find(|r| r[0] == "night");
        let has_fixes = |r: &&Vec<String>| r[1] != "0";
        match (day.filter(has_fixes), night.filter(has_fixes)) {
            (Some(day), Some(night)) => {
                let parts: Vec<String> = labels
                    .iter()
                    .enumerate()
                    .map(|(k, l)| format!("{l} {} by day vs {} at night", day[3 + k], night[3 + k]))
                    .collect();
                out.push(format!(
                    "Share of time per state (95% intervals): {}.",
                    parts.join("; ")
                ));
            }
            (Some(day), None) => {
                let parts: Vec<String> = labels
                    .iter()
                    .enumerate()
                    .map(|(k, l)| format!("{l} {}", day[3 + k]))
                    .collect();
                out.push(format!(
                    "Share of daylight time per state (95% intervals; the data hold no night-time fixes): {}.",
                    parts.join("; ")
                ));
            }
            _ => {}
        }
    }
    if let Some(h) = hotspots {
        if h.shown > 0 {
            out.push(format!(
                "{} grid cells each had {} state-days of several animals; the busiest cells are listed in the hotspot table ({}).",
                h.shown, h.state, h.rule
            ));
        } else if let Some(n) = &h.note {
            out.push(format!("Hotspots: {n}."));
        }
    }
    out
}

fn supports(d: &Decoded, hotspots: Option<&HotspotSection>) -> Vec<String> {
    let n = d.animal_ids().len();
    let mut v = vec![
        format!(
            "Can support: statements about how the odds of switching between the modelled states change with the covariates in the selected model, for the {n} tracked animals and the period and area they cover."
        ),
        "Cannot support: claims that an animal was observed doing a behaviour (states are inferred from movement alone), causal claims, or extrapolation to other areas, seasons or populations without further data.".to_string(),
    ];
    if n < 5 {
        v.push(format!(
            "With {n} animals, differences between individuals cannot be separated from the covariate effects; treat the results as preliminary."
        ));
    }
    if let Some(h) = hotspots {
        v.push(format!(
            "The map in this brief is generalised ({}); share only generalised locations of sensitive species.",
            h.brief_rule
        ));
    }
    v
}
