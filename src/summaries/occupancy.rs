//! State-occupancy curves: the stationary state distribution δ(x) and the transition
//! probabilities Γ(x) across each covariate's observed range, with intervals.
//!
//! For each covariate column a fitted model uses, the column is varied over a grid while
//! every other column is held at a documented reference:
//! - a numeric column at the mean of its observed values,
//! - a cyclic column (e.g. hour of day) at the chosen reference value (default 12, noon),
//! - a categorical column at its reference level.
//!
//! Numeric columns are varied over their observed range (`points` values from the
//! minimum to the maximum), cyclic columns over one period, categorical columns over their
//! observed levels. At each value the design row is rebuilt from the model's own terms
//! (so cos/sin expansions, reference coding and interactions follow the fitted model
//! exactly) and δ(x) is the stationary distribution of Γ(x): the solution of δΓ = δ with
//! Σδ = 1 (Zucchini, MacDonald & Langrock 2016, §2.3). Grids are on the original scale;
//! a model fitted on standardised columns (its recorded covariate scaling) gets the same
//! transformation before its design row is built. Intervals come from the model's
//! covariance: by default as percentiles of 1000 seeded draws from the estimates'
//! approximate sampling distribution N(θ̂, Σ̂) (so they stay within [0, 1]), or by the
//! delta method.

use std::collections::BTreeMap;

use serde::Serialize;

use crate::hmm::design::RawColumn;
use crate::hmm::error::HmmError;
use crate::hmm::inference::IntervalMethod;
use crate::hmm::io::CovariateScaling;
use crate::hmm::{FittedModel, Model};
use crate::study::model::Term;

/// Errors of the occupancy computation.
#[derive(Debug, thiserror::Error)]
pub enum OccupancyError {
    #[error("covariate `{0}` is not among the observed columns")]
    MissingColumn(String),
    #[error("covariate `{0}` has no finite observed value")]
    NoValues(String),
    #[error(transparent)]
    Model(#[from] HmmError),
}

/// Settings of the curves.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct OccupancyOptions {
    /// Grid points per numeric or cyclic covariate.
    pub points: usize,
    /// Interval level, e.g. 0.95.
    pub level: f64,
    /// Value at which cyclic covariates are held when another covariate varies.
    pub cyclic_reference: f64,
    /// How intervals are computed.
    pub method: IntervalMethod,
}

impl Default for OccupancyOptions {
    fn default() -> Self {
        OccupancyOptions {
            points: 41,
            level: 0.95,
            cyclic_reference: 12.0,
            // Percentile intervals from draws of the estimates stay inside [0, 1], which
            // symmetric delta-method intervals on probabilities near 0 or 1 do not.
            method: IntervalMethod::Simulation {
                draws: 1000,
                seed: 1,
            },
        }
    }
}

/// How a raw column enters the model.
#[derive(Debug, Clone, PartialEq)]
enum Kind {
    Numeric,
    Cyclic(f64),
    Factor(String),
}

/// One value of a curve.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CurveRow {
    /// The covariate column varied.
    pub covariate: String,
    /// Its value (numeric and cyclic columns; NaN for a categorical level).
    pub value: f64,
    /// The level (categorical columns).
    pub level: Option<String>,
    /// The state (stationary curves) or `from → to` (transition curves).
    pub quantity: String,
    pub estimate: f64,
    pub se: f64,
    pub lower: f64,
    pub upper: f64,
}

/// The curves of one model.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Occupancy {
    /// Stationary state probabilities along each covariate.
    pub stationary: Vec<CurveRow>,
    /// Transition probabilities along each covariate.
    pub transitions: Vec<CurveRow>,
    /// The reference at which the other covariates are held: (column, value).
    pub reference: Vec<(String, String)>,
}

/// A value of one raw column.
#[derive(Debug, Clone, PartialEq)]
enum Value {
    Number(f64),
    Level(String),
}

/// The kind of every raw column the terms read, in first-use order.
fn kinds(terms: &[Term]) -> Vec<(String, Kind)> {
    let mut out: Vec<(String, Kind)> = Vec::new();
    for t in terms {
        let (c, k) = match t {
            Term::Numeric { column } => (column, Kind::Numeric),
            Term::Cyclic { column, period } => (column, Kind::Cyclic(*period)),
            Term::Factor { column, reference } => (column, Kind::Factor(reference.clone())),
            Term::Interaction { .. } => continue,
        };
        if !out.iter().any(|(n, _)| n == c) {
            out.push((c.clone(), k));
        }
    }
    out
}

/// Builds the model's design row for one set of raw values (original scale).
///
/// The design is built from two rows — the values, and the same values with every
/// categorical column at its reference level — because reference coding needs the
/// reference level to occur; only the first row is returned.
fn design_row(
    terms: &[Term],
    values: &BTreeMap<String, Value>,
    scaling: &[CovariateScaling],
) -> Result<Vec<f64>, HmmError> {
    let mut cols = BTreeMap::new();
    for (name, v) in values {
        let col = match v {
            Value::Number(x) => {
                // The model was fitted on standardised columns: transform the same way.
                let z = scaling
                    .iter()
                    .find(|s| &s.name == name)
                    .map_or(*x, |s| (*x - s.center) / s.scale);
                RawColumn::Numeric(vec![z, z])
            }
            Value::Level(l) => {
                let reference = terms
                    .iter()
                    .find_map(|t| match t {
                        Term::Factor { column, reference } if column == name => {
                            Some(reference.clone())
                        }
                        _ => None,
                    })
                    .unwrap_or_else(|| l.clone());
                RawColumn::Categorical(vec![l.clone(), reference])
            }
        };
        cols.insert(name.clone(), col);
    }
    let m = crate::modelling::design_of(terms).build(&cols)?;
    Ok(m.rows(0, 1).to_vec())
}

/// The reference values and the grids of every column.
#[allow(clippy::type_complexity)]
fn grids(
    terms: &[Term],
    observed: &BTreeMap<String, RawColumn>,
    opts: &OccupancyOptions,
) -> Result<(BTreeMap<String, Value>, Vec<(String, Vec<Value>)>), OccupancyError> {
    let mut reference = BTreeMap::new();
    let mut axes = Vec::new();
    let n = opts.points.max(2);
    for (name, kind) in kinds(terms) {
        let col = observed
            .get(&name)
            .ok_or_else(|| OccupancyError::MissingColumn(name.clone()))?;
        match (&kind, col) {
            (Kind::Factor(r), RawColumn::Categorical(v)) => {
                reference.insert(name.clone(), Value::Level(r.clone()));
                let mut levels: Vec<&String> = v.iter().collect();
                levels.sort();
                levels.dedup();
                axes.push((
                    name,
                    levels
                        .into_iter()
                        .map(|l| Value::Level(l.clone()))
                        .collect(),
                ));
            }
            (Kind::Cyclic(period), RawColumn::Numeric(_)) => {
                reference.insert(name.clone(), Value::Number(opts.cyclic_reference));
                let g = (0..n)
                    .map(|k| Value::Number(period * k as f64 / (n - 1) as f64))
                    .collect();
                axes.push((name, g));
            }
            (_, RawColumn::Numeric(v)) => {
                let finite: Vec<f64> = v.iter().copied().filter(|x| x.is_finite()).collect();
                if finite.is_empty() {
                    return Err(OccupancyError::NoValues(name));
                }
                let mean = finite.iter().sum::<f64>() / finite.len() as f64;
                let lo = finite.iter().copied().fold(f64::INFINITY, f64::min);
                let hi = finite.iter().copied().fold(f64::NEG_INFINITY, f64::max);
                reference.insert(name.clone(), Value::Number(mean));
                let g = (0..n)
                    .map(|k| Value::Number(lo + (hi - lo) * k as f64 / (n - 1) as f64))
                    .collect();
                axes.push((name, g));
            }
            (_, RawColumn::Categorical(_)) => {
                return Err(OccupancyError::Model(HmmError::Design(format!(
                    "column '{name}' is categorical, a number was expected"
                ))));
            }
        }
    }
    Ok((reference, axes))
}

fn describe(v: &Value) -> String {
    match v {
        Value::Number(x) => format!("{x:.6}"),
        Value::Level(l) => l.clone(),
    }
}

/// Stationary distribution along each covariate, without intervals, for any model (e.g.
/// one built from chosen parameters), whose covariates are used unscaled.
///
/// # Errors
/// [`OccupancyError`] when a column is missing or Γ(x) has no stationary distribution.
pub fn stationary_curves(
    model: &Model,
    terms: &[Term],
    observed: &BTreeMap<String, RawColumn>,
    opts: &OccupancyOptions,
) -> Result<Vec<(String, f64, Vec<f64>)>, OccupancyError> {
    let (reference, axes) = grids(terms, observed, opts)?;
    let mut out = Vec::new();
    for (name, grid) in axes {
        for v in grid {
            let mut values = reference.clone();
            values.insert(name.clone(), v.clone());
            let x = design_row(terms, &values, &[])?;
            let value = match v {
                Value::Number(x) => x,
                Value::Level(_) => f64::NAN,
            };
            out.push((name.clone(), value, model.stationary(&x)?));
        }
    }
    Ok(out)
}

/// Stationary and transition curves of a fitted model, with intervals.
///
/// # Errors
/// [`OccupancyError`] when a column is missing or the model has no covariance (then the
/// error says which parameters are to blame).
pub fn occupancy_curves(
    fitted: &FittedModel,
    terms: &[Term],
    observed: &BTreeMap<String, RawColumn>,
    opts: &OccupancyOptions,
) -> Result<Occupancy, OccupancyError> {
    let (reference, axes) = grids(terms, observed, opts)?;
    let labels = fitted.model().valid_spec().state_labels();
    let scaling = fitted.covariate_scaling().unwrap_or(&[]);
    let n = labels.len();
    let mut stationary = Vec::new();
    let mut transitions = Vec::new();
    for (name, grid) in axes {
        for v in grid {
            let mut values = reference.clone();
            values.insert(name.clone(), v.clone());
            let x = design_row(terms, &values, scaling)?;
            let (value, level) = match &v {
                Value::Number(x) => (*x, None),
                Value::Level(l) => (f64::NAN, Some(l.clone())),
            };
            let row = |quantity: String, i: &crate::hmm::inference::Interval| CurveRow {
                covariate: name.clone(),
                value,
                level: level.clone(),
                quantity,
                estimate: i.estimate,
                se: i.se,
                lower: i.lower,
                upper: i.upper,
            };
            for (k, i) in fitted
                .stationary_intervals(&x, opts.level, opts.method)?
                .iter()
                .enumerate()
            {
                stationary.push(row(labels[k].clone(), i));
            }
            for (k, i) in fitted
                .transition_intervals(&x, opts.level, opts.method)?
                .iter()
                .enumerate()
            {
                transitions.push(row(format!("{} → {}", labels[k / n], labels[k % n]), i));
            }
        }
    }
    Ok(Occupancy {
        stationary,
        transitions,
        reference: reference
            .iter()
            .map(|(k, v)| (k.clone(), describe(v)))
            .collect(),
    })
}
