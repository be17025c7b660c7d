//! Recovery of known parameters: for simulated studies, the true values beside the
//! estimates, so a reader can judge how well the whole chain (cleaning, smoothing,
//! covariates, fitting) recovers the model the data were simulated from.
//!
//! The comparison uses the candidate whose form is the true model (named in the truth
//! file) when it was fitted, else the selected model. Step-length and turning-angle
//! parameters are compared per state (matched by label); transition slopes per raw unit
//! of their covariate (a standardised slope divided by the column's sd, with its Wald
//! interval scaled alike). Intercepts depend on the standardisation centre and are not
//! compared.

use std::path::Path;

use statrs::distribution::{ContinuousCDF, Normal};

use super::build::sig;
use super::context::{RecoverySection, Table};
use crate::demo::read_truth;
use crate::hmm::FittedModel;
use crate::hmm::inference::IntervalMethod;
use crate::modelling::FitStage;
use crate::summaries::association::association_table;

fn row(name: String, truth: f64, est: f64, lo: f64, hi: f64) -> Vec<String> {
    let covered = lo <= truth && truth <= hi;
    vec![
        name,
        sig(truth),
        format!("{} [{}, {}]", sig(est), sig(lo), sig(hi)),
        if covered { "yes" } else { "no" }.to_string(),
    ]
}

/// Compares the fitted model with the truth file.
///
/// # Errors
/// A message when the file cannot be read or its states do not match the model's.
pub fn recovery_section(
    path: &Path,
    stage: &FitStage,
    selected: &FittedModel,
    labels: &[String],
) -> Result<RecoverySection, String> {
    let truth = read_truth(path).map_err(|e| e.to_string())?;
    let fit = stage
        .fits
        .iter()
        .find(|f| f.candidate.name == truth.true_candidate && f.result.is_ok());
    let (model, name, labels): (&FittedModel, String, Vec<String>) = match fit {
        Some(f) => (
            f.result.as_ref().map_err(Clone::clone)?,
            f.candidate.name.clone(),
            f.candidate.labels.clone(),
        ),
        None => (
            selected,
            stage.fits[stage.selected].candidate.name.clone(),
            labels.to_vec(),
        ),
    };
    let z = Normal::new(0.0, 1.0)
        .map_err(|e| e.to_string())?
        .inverse_cdf(0.975);
    let intervals = model
        .natural_intervals(0.95, IntervalMethod::Delta)
        .map_err(|e| format!("the model `{name}` has no intervals: {e}"))?;
    let find = |n: &str| intervals.iter().find(|i| i.name == n);
    let mut rows = Vec::new();
    for s in &truth.states {
        let Some(k) = labels.iter().position(|l| l == &s.label) else {
            continue;
        };
        for (param, value) in [
            ("step: mean", s.step_mean_m),
            ("step: sd", s.step_sd_m),
            ("angle: concentration", s.angle_concentration),
        ] {
            if let Some(i) = find(&format!("{param} [state {}]", k + 1)) {
                rows.push(row(
                    format!("{param} [{}]", s.label),
                    value,
                    i.estimate,
                    i.lower,
                    i.upper,
                ));
            }
        }
    }
    // Transition slopes per raw unit, from the association table's coefficients.
    if let Ok(table) = association_table(model, &labels, &|_| None, 0.95) {
        for t in &truth.transitions {
            for c in &t.coefficients {
                let Some(r) = table
                    .rows
                    .iter()
                    .find(|r| r.from == t.from && r.to == t.to && r.term == c.covariate)
                else {
                    continue;
                };
                let sd = r.sd.unwrap_or(1.0);
                rows.push(row(
                    format!("{} → {}: {} ({})", t.from, t.to, c.covariate, c.per),
                    c.value,
                    r.coefficient / sd,
                    (r.coefficient - z * r.se) / sd,
                    (r.coefficient + z * r.se) / sd,
                ));
            }
        }
    }
    let covered = rows.iter().filter(|r| r[3] == "yes").count();
    Ok(RecoverySection {
        note: format!(
            "The data were simulated from a known model (seed {}; {}). Compared with the fitted candidate `{name}`: {covered} of {} true values lie inside the 95% interval of their estimate (about 95% would if the chain recovered the model perfectly; smoothing, location error, the land rule and covariates measured on smoothed positions all pull estimates away from the truth). Intercepts are not compared: they depend on the standardisation centre.",
            truth.seed,
            truth.scenario,
            rows.len()
        ),
        table: Table {
            header: vec![
                "parameter".into(),
                "true".into(),
                "estimate [95%]".into(),
                "covered".into(),
            ],
            rows,
        },
    })
}
