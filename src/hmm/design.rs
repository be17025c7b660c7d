//! A small formula helper that turns named raw columns into the transition design
//! matrix and records the names of its columns: numeric columns as they are,
//! categorical columns in reference coding (one indicator per non-reference level,
//! levels in sorted order), cyclic columns as cos(2πh/period) and sin(2πh/period), and
//! interactions of two earlier terms (every product of their columns). The engine itself
//! only ever sees the resulting numeric matrix.
//!
//! # Formula
//! Reference (treatment) coding and harmonic terms for a cyclic covariate: Zucchini,
//! MacDonald & Langrock (2016), *Hidden Markov Models for Time Series*, 2nd ed.,
//! chapter on covariates in the transition probabilities.

use std::collections::{BTreeMap, BTreeSet};
use std::f64::consts::PI;

use super::error::HmmError;

/// A named built column.
type Column = (String, Vec<f64>);

/// A raw column: numbers, or category labels.
#[derive(Debug, Clone, PartialEq)]
pub enum RawColumn {
    Numeric(Vec<f64>),
    Categorical(Vec<String>),
}

#[derive(Debug, Clone, PartialEq)]
enum Term {
    Numeric(String),
    Categorical { name: String, reference: String },
    Cyclic { name: String, period: f64 },
    Interaction(String, String),
}

impl Term {
    fn name(&self) -> String {
        match self {
            Term::Numeric(n) | Term::Categorical { name: n, .. } | Term::Cyclic { name: n, .. } => {
                n.clone()
            }
            Term::Interaction(a, b) => format!("{a}:{b}"),
        }
    }
}

/// The terms of a transition formula, in order.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Design {
    terms: Vec<Term>,
}

/// The built design matrix (row-major, n_rows × names.len()).
#[derive(Debug, Clone, PartialEq)]
pub struct DesignMatrix {
    names: Vec<String>,
    n_rows: usize,
    values: Vec<f64>,
}

impl DesignMatrix {
    pub fn names(&self) -> &[String] {
        &self.names
    }
    pub fn n_rows(&self) -> usize {
        self.n_rows
    }
    pub fn n_cols(&self) -> usize {
        self.names.len()
    }
    /// Row-major values.
    pub fn values(&self) -> &[f64] {
        &self.values
    }
    /// Row-major values of rows `start..end` (e.g. one series).
    pub fn rows(&self, start: usize, end: usize) -> &[f64] {
        &self.values[start * self.n_cols()..end * self.n_cols()]
    }
}

impl Design {
    pub fn new() -> Self {
        Design::default()
    }
    /// A numeric covariate used as it is.
    pub fn numeric(mut self, name: &str) -> Self {
        self.terms.push(Term::Numeric(name.into()));
        self
    }
    /// A categorical covariate in reference coding against `reference`.
    pub fn categorical(mut self, name: &str, reference: &str) -> Self {
        self.terms.push(Term::Categorical {
            name: name.into(),
            reference: reference.into(),
        });
        self
    }
    /// A cyclic covariate (e.g. hour of day with period 24) as cos and sin terms.
    pub fn cyclic(mut self, name: &str, period: f64) -> Self {
        self.terms.push(Term::Cyclic {
            name: name.into(),
            period,
        });
        self
    }
    /// Interaction of two terms declared earlier (by their raw column names).
    pub fn interaction(mut self, a: &str, b: &str) -> Self {
        self.terms.push(Term::Interaction(a.into(), b.into()));
        self
    }

    /// Builds the design matrix from raw columns of equal length.
    ///
    /// # Errors
    /// [`HmmError::Design`] for a missing column, a column of the wrong kind, unequal
    /// lengths, a reference level that does not occur, a non-positive period or an
    /// interaction with an undeclared term; [`HmmError::UnknownCovariate`] for an
    /// unknown column name.
    ///
    /// # Examples
    /// ```
    /// use std::collections::BTreeMap;
    /// use cairn::hmm::design::{Design, RawColumn};
    /// let mut cols = BTreeMap::new();
    /// cols.insert("hour".to_string(), RawColumn::Numeric(vec![0.0, 6.0]));
    /// cols.insert("habitat".to_string(),
    ///             RawColumn::Categorical(vec!["forest".into(), "open".into()]));
    /// let m = Design::new().cyclic("hour", 24.0).categorical("habitat", "forest")
    ///     .build(&cols)?;
    /// assert_eq!(m.names(), ["cos(2*pi*hour/24)", "sin(2*pi*hour/24)", "habitat=open"]);
    /// assert!((m.values()[4] - 1.0).abs() < 1e-15); // sin(π/2) in row 1
    /// # Ok::<(), cairn::hmm::error::HmmError>(())
    /// ```
    pub fn build(&self, columns: &BTreeMap<String, RawColumn>) -> Result<DesignMatrix, HmmError> {
        let n_rows = columns.values().next().map_or(0, |c| match c {
            RawColumn::Numeric(v) => v.len(),
            RawColumn::Categorical(v) => v.len(),
        });
        let get = |name: &str| {
            columns.get(name).ok_or_else(|| HmmError::UnknownCovariate {
                name: name.into(),
                available: columns.keys().cloned().collect::<Vec<_>>().join(", "),
            })
        };
        let numeric = |name: &str| -> Result<&Vec<f64>, HmmError> {
            match get(name)? {
                RawColumn::Numeric(v) if v.len() == n_rows => Ok(v),
                RawColumn::Numeric(_) => Err(HmmError::Design(format!(
                    "column '{name}' has a different length"
                ))),
                RawColumn::Categorical(_) => Err(HmmError::Design(format!(
                    "column '{name}' is categorical, a number was expected"
                ))),
            }
        };
        // built columns of each term, by term name
        let mut built: Vec<(String, Vec<Column>)> = Vec::new();
        for term in &self.terms {
            let cols: Vec<(String, Vec<f64>)> = match term {
                Term::Numeric(n) => vec![(n.clone(), numeric(n)?.clone())],
                Term::Cyclic { name, period } => {
                    if !(*period > 0.0 && period.is_finite()) {
                        return Err(HmmError::Design(format!(
                            "period of '{name}' must be positive"
                        )));
                    }
                    let v = numeric(name)?;
                    let pn = format!("{period}");
                    vec![
                        (
                            format!("cos(2*pi*{name}/{pn})"),
                            v.iter().map(|h| (2.0 * PI * h / period).cos()).collect(),
                        ),
                        (
                            format!("sin(2*pi*{name}/{pn})"),
                            v.iter().map(|h| (2.0 * PI * h / period).sin()).collect(),
                        ),
                    ]
                }
                Term::Categorical { name, reference } => {
                    let v = match get(name)? {
                        RawColumn::Categorical(v) if v.len() == n_rows => v,
                        RawColumn::Categorical(_) => {
                            return Err(HmmError::Design(format!(
                                "column '{name}' has a different length"
                            )));
                        }
                        RawColumn::Numeric(_) => {
                            return Err(HmmError::Design(format!(
                                "column '{name}' is numeric, categories were expected"
                            )));
                        }
                    };
                    let levels: BTreeSet<&String> = v.iter().collect();
                    if !levels.contains(reference) {
                        return Err(HmmError::Design(format!(
                            "reference level '{reference}' does not occur in '{name}'"
                        )));
                    }
                    levels
                        .into_iter()
                        .filter(|l| *l != reference)
                        .map(|l| {
                            (
                                format!("{name}={l}"),
                                v.iter().map(|x| if x == l { 1.0 } else { 0.0 }).collect(),
                            )
                        })
                        .collect()
                }
                Term::Interaction(a, b) => {
                    let find = |n: &str| {
                        built
                            .iter()
                            .find(|(t, _)| t == n)
                            .map(|(_, c)| c)
                            .ok_or_else(|| {
                                HmmError::Design(format!(
                                    "interaction with '{n}', which is not an earlier term"
                                ))
                            })
                    };
                    let (ca, cb) = (find(a)?, find(b)?);
                    let mut out = Vec::new();
                    for (na, va) in ca {
                        for (nb, vb) in cb {
                            out.push((
                                format!("{na}:{nb}"),
                                va.iter().zip(vb).map(|(x, y)| x * y).collect(),
                            ));
                        }
                    }
                    out
                }
            };
            built.push((term.name(), cols));
        }
        let cols: Vec<&(String, Vec<f64>)> = built.iter().flat_map(|(_, c)| c.iter()).collect();
        let names: Vec<String> = cols.iter().map(|c| c.0.clone()).collect();
        let mut values = Vec::with_capacity(n_rows * cols.len());
        for t in 0..n_rows {
            for c in &cols {
                values.push(c.1[t]);
            }
        }
        Ok(DesignMatrix {
            names,
            n_rows,
            values,
        })
    }
}
