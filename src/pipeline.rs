//! `cairn run`: prepare → fit → report, reusing a stage's outputs when the inputs that
//! determine them are unchanged, and writing `manifest.json` at the end.
//!
//! Reuse is decided by keys: SHA-256 digests of everything a stage reads. The prepare
//! key covers the crate version, every input file (fixes, rasters, animal table) and the
//! study file with its `[model]` and `[report]` sections removed (they do not change the
//! prepared tables); the fit key covers the crate version, the `[model]` section and the
//! prepared step table. The keys and the digests of the outputs they produced are kept in
//! `.cairn-stages.json` in the output folder; a stage is rerun when its key differs, when
//! one of its outputs is missing or no longer has the recorded digest, or when `--force`
//! is given. The report stage always runs (it is quick and its templates may change).

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::time::Instant;

use anyhow::{Context, Result};
use serde::{Deserialize, Serialize};

use crate::report::manifest::{self, Manifest, sha256_bytes, sha256_file};
use crate::study::Study;

/// Options of a pipeline run.
#[derive(Debug, Clone, Copy, Default)]
pub struct RunOptions {
    /// Rerun every stage even when its inputs are unchanged.
    pub force: bool,
}

/// How one stage went.
#[derive(Debug, Clone, PartialEq)]
pub struct StageRecord {
    /// Stage name.
    pub name: &'static str,
    /// Whether it ran or its outputs were reused.
    pub reused: bool,
    /// Wall time, seconds.
    pub seconds: f64,
}

/// What a pipeline run did.
#[derive(Debug)]
pub struct RunOutcome {
    /// Stages in order.
    pub stages: Vec<StageRecord>,
    /// Rows excluded or animals skipped in the prepare stage (from its summary).
    pub exclusions: bool,
    /// Every candidate fitted, converged and has a usable covariance.
    pub fits_clean: bool,
    /// The report stage's output.
    pub report: crate::report::ReportOutput,
    /// Where the manifest was written.
    pub manifest: PathBuf,
}

#[derive(Debug, Default, Serialize, Deserialize)]
struct StageState {
    key: String,
    outputs: BTreeMap<String, String>,
}

#[derive(Debug, Default, Serialize, Deserialize)]
struct StagesFile {
    prepare: Option<StageState>,
    fit: Option<StageState>,
}

const STAGES_FILE: &str = ".cairn-stages.json";

fn study_table(study: &Study) -> Result<toml::Table> {
    let text = std::fs::read_to_string(study.source())
        .with_context(|| format!("reading {}", study.source().display()))?;
    toml::from_str(&text).with_context(|| format!("parsing {}", study.source().display()))
}

fn prepare_key(study: &Study) -> Result<String> {
    let mut t = study_table(study)?;
    t.remove("model");
    t.remove("report");
    let mut text = format!(
        "cairn {}\n{}\n",
        env!("CARGO_PKG_VERSION"),
        toml::to_string(&t)?
    );
    for (role, p) in manifest::input_files(study) {
        if role == "study" || role == "truth" {
            continue;
        }
        let (h, _) = sha256_file(&p).with_context(|| format!("reading {}", p.display()))?;
        text.push_str(&format!("{role} {h}\n"));
    }
    Ok(sha256_bytes(text.as_bytes()))
}

fn fit_key(study: &Study) -> Result<String> {
    let t = study_table(study)?;
    let model = t
        .get("model")
        .map(toml::to_string)
        .transpose()?
        .unwrap_or_default();
    let steps = study.output().join("steps.parquet");
    let (h, _) = sha256_file(&steps).with_context(|| format!("reading {}", steps.display()))?;
    Ok(sha256_bytes(
        format!("cairn {}\n{model}\nsteps {h}\n", env!("CARGO_PKG_VERSION")).as_bytes(),
    ))
}

fn digests(out: &Path, files: &[PathBuf]) -> BTreeMap<String, String> {
    files
        .iter()
        .filter_map(|p| {
            let rel = p
                .strip_prefix(out)
                .unwrap_or(p)
                .to_string_lossy()
                .to_string();
            sha256_file(p).ok().map(|(h, _)| (rel, h))
        })
        .collect()
}

fn still_valid(out: &Path, s: &StageState, key: &str) -> bool {
    s.key == key
        && !s.outputs.is_empty()
        && s.outputs
            .iter()
            .all(|(rel, h)| sha256_file(&out.join(rel)).is_ok_and(|(x, _)| &x == h))
}

fn read_stages(out: &Path) -> StagesFile {
    std::fs::read_to_string(out.join(STAGES_FILE))
        .ok()
        .and_then(|t| serde_json::from_str(&t).ok())
        .unwrap_or_default()
}

fn write_stages(out: &Path, s: &StagesFile) -> Result<()> {
    let text = serde_json::to_string_pretty(s)?;
    crate::io::write_atomic(&out.join(STAGES_FILE), |w| {
        use std::io::Write;
        w.write_all(text.as_bytes()).map_err(|e| e.to_string())
    })?;
    Ok(())
}

/// Whether the prepare summary records exclusions or skipped animals.
fn prepare_had_exclusions(out: &Path) -> bool {
    let Ok(text) = std::fs::read_to_string(out.join("prepare_summary.json")) else {
        return false;
    };
    let Ok(v) = serde_json::from_str::<serde_json::Value>(&text) else {
        return false;
    };
    let excluded: u64 = v["excluded_by_reason"]
        .as_object()
        .map(|m| m.values().filter_map(serde_json::Value::as_u64).sum())
        .unwrap_or(0);
    let skipped = v["smoother"]
        .as_array()
        .is_some_and(|a| a.iter().any(|r| !r["reason"].is_null()));
    excluded > 0 || skipped
}

/// Runs prepare → fit → report.
///
/// `progress` receives one line per step of work (stage starts, candidates being fitted);
/// the caller decides how to show it. `animals(done, total)` is called from worker threads
/// as each animal's track is smoothed.
///
/// # Errors
/// The first stage error, with context naming the stage and file.
pub fn run(
    study: &Study,
    o: RunOptions,
    progress: &mut dyn FnMut(&str),
    animals: &(dyn Fn(usize, usize) + Sync),
) -> Result<RunOutcome> {
    let out = study.output().to_path_buf();
    std::fs::create_dir_all(&out).with_context(|| format!("creating {}", out.display()))?;
    let mut stages_file = read_stages(&out);
    let mut records = Vec::new();

    // Prepare.
    let t0 = Instant::now();
    let key = prepare_key(study)?;
    let reuse = !o.force
        && stages_file
            .prepare
            .as_ref()
            .is_some_and(|s| still_valid(&out, s, &key));
    if reuse {
        progress("prepare: inputs unchanged, reusing the prepared tables");
    } else {
        progress("prepare: ingest, clean, smooth, measure, annotate");
        let p = crate::prepare::run_with_progress(study, animals).context("prepare stage")?;
        let written =
            crate::prepare::write(study, &p, study.write_csv()).context("prepare stage")?;
        let files: Vec<PathBuf> = written.files.iter().map(PathBuf::from).collect();
        stages_file.prepare = Some(StageState {
            key,
            outputs: digests(&out, &files),
        });
        // A new prepare invalidates the fit.
        stages_file.fit = None;
        write_stages(&out, &stages_file)?;
    }
    records.push(StageRecord {
        name: "prepare",
        reused: reuse,
        seconds: t0.elapsed().as_secs_f64(),
    });
    let exclusions = prepare_had_exclusions(&out);

    // Fit.
    let t0 = Instant::now();
    let key = fit_key(study)?;
    let reuse = !o.force
        && stages_file
            .fit
            .as_ref()
            .is_some_and(|s| still_valid(&out, s, &key));
    let fits_clean;
    if reuse {
        progress("fit: model settings and steps unchanged, reusing the fitted models");
        let stage = crate::modelling::load(study).context("fit stage (reused)")?;
        fits_clean = stage.all_clean();
    } else {
        progress("fit: candidate models");
        let stage = crate::modelling::run(study, progress).context("fit stage")?;
        let written = crate::modelling::write(study, &stage).context("fit stage")?;
        fits_clean = stage.all_clean();
        stages_file.fit = Some(StageState {
            key,
            outputs: digests(&out, &written),
        });
        write_stages(&out, &stages_file)?;
    }
    records.push(StageRecord {
        name: "fit",
        reused: reuse,
        seconds: t0.elapsed().as_secs_f64(),
    });

    // Report.
    let t0 = Instant::now();
    progress("report: summaries, figures, templates");
    let report = crate::report::run(study).context("report stage")?;
    records.push(StageRecord {
        name: "report",
        reused: false,
        seconds: t0.elapsed().as_secs_f64(),
    });

    let inputs = manifest::hash_inputs(study)
        .map_err(|(p, e)| anyhow::anyhow!("reading {}: {e}", p.display()))?;
    let m = Manifest::new(
        study,
        inputs,
        records
            .iter()
            .map(|r| {
                (
                    r.name.to_string(),
                    if r.reused { "reused" } else { "ran" }.to_string(),
                )
            })
            .collect(),
        report.files.clone(),
        records
            .iter()
            .map(|r| (r.name.to_string(), r.seconds))
            .collect(),
    );
    let path = out.join("manifest.json");
    let text = serde_json::to_string_pretty(&m)?;
    crate::io::write_atomic(&path, |w| {
        use std::io::Write;
        w.write_all(text.as_bytes()).map_err(|e| e.to_string())
    })?;
    Ok(RunOutcome {
        stages: records,
        exclusions,
        fits_clean,
        report,
        manifest: path,
    })
}
