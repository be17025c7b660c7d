//! Association table: how each covariate changes the odds of each switch between states.
//!
//! The transition probabilities are a multinomial logit with the diagonal as reference
//! (Zucchini, MacDonald & Langrock 2016, §10.2): for an off-diagonal pair i → j,
//! `log(Γ_ij(x) / Γ_ii(x)) = β_ij0 + Σ_k β_ijk x_k`. So `exp(β_ijk)` is the factor by which
//! one unit of design column k multiplies the odds of switching from i to j *rather than
//! staying in i*, the other columns held fixed. That is the quantity this table reports,
//! with a Wald interval `exp(β ± z·SE)` (SE from the inverse Hessian of the fit).
//!
//! The fit stage standardises numeric columns (x − mean) / sd before fitting and records
//! the centre and scale, so a numeric coefficient is *per standard deviation*; the table
//! also gives it *per unit* of the original column: `β / sd`, interval `(β ± z·SE) / sd`.
//! Other design columns are reported as fitted: a categorical level against its
//! reference level, a cyclic term's cosine or sine (read them as a pair: the hour at which
//! switching peaks is what the transition curves show), and an interaction on the scale
//! of its (standardised) factors.

use std::io::Write;

use serde::Serialize;
use statrs::distribution::{ContinuousCDF, Normal};

use crate::hmm::FittedModel;
use crate::hmm::io::CovariateScaling;
use crate::summaries::{SummaryError, csv_num, csv_text};

/// What kind of design column a coefficient multiplies.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum TermKind {
    /// A numeric column, standardised before fitting.
    Standardised,
    /// A numeric column used as it is (constant, or too few values to standardise).
    Numeric,
    /// One level of a categorical column against its reference level.
    Level,
    /// The cosine or sine of a cyclic column.
    Cyclic,
    /// A product of two terms.
    Interaction,
}

impl TermKind {
    /// Name used in tables.
    pub fn as_str(self) -> &'static str {
        match self {
            TermKind::Standardised => "standardised",
            TermKind::Numeric => "numeric",
            TermKind::Level => "level",
            TermKind::Cyclic => "cyclic",
            TermKind::Interaction => "interaction",
        }
    }
}

/// An odds ratio with its interval.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct OddsRatio {
    /// Point estimate, exp(β·u).
    pub estimate: f64,
    /// Lower limit.
    pub lower: f64,
    /// Upper limit.
    pub upper: f64,
}

impl OddsRatio {
    fn new(beta: f64, se: f64, z: f64, per: f64) -> Self {
        OddsRatio {
            estimate: (beta * per).exp(),
            lower: ((beta - z * se) * per).exp(),
            upper: ((beta + z * se) * per).exp(),
        }
    }

    /// Whether the interval excludes 1 (the data point to a change in the odds).
    pub fn excludes_one(&self) -> bool {
        self.lower > 1.0 || self.upper < 1.0
    }
}

/// One coefficient of the transition model.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct AssociationRow {
    /// Label of the state switched from.
    pub from: String,
    /// Label of the state switched to.
    pub to: String,
    /// Design column as fitted (e.g. `depth`, `cos(2*pi*local_hour/24)`, `habitat=kelp`).
    pub term: String,
    /// What the coefficient multiplies.
    pub kind: TermKind,
    /// Coefficient on the fitted scale (per sd for standardised columns).
    pub coefficient: f64,
    /// Its standard error.
    pub se: f64,
    /// Wald z = coefficient / se.
    pub z: f64,
    /// Two-sided Wald p-value.
    pub p: f64,
    /// Odds ratio per unit of the fitted design column (per sd when standardised).
    pub odds_ratio: OddsRatio,
    /// Odds ratio per unit of the original column (standardised columns only).
    pub odds_ratio_per_unit: Option<OddsRatio>,
    /// Standard deviation used to standardise (standardised columns only).
    pub sd: Option<f64>,
    /// Unit of the original column ("" when unknown or dimensionless).
    pub unit: String,
    /// A sentence a reader can quote.
    pub reading: String,
}

/// The association table of one fitted model.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct AssociationTable {
    /// Interval level, e.g. 0.95.
    pub level: f64,
    /// One row per off-diagonal transition and design column, in the model's order
    /// (from-state, then to-state, then design column).
    pub rows: Vec<AssociationRow>,
}

fn fmt_ratio(x: f64) -> String {
    if !x.is_finite() {
        return format!("{x}");
    }
    let a = x.abs();
    if a >= 100.0 {
        format!("{x:.0}")
    } else if a >= 10.0 {
        format!("{x:.1}")
    } else if a >= 0.01 {
        format!("{x:.2}")
    } else {
        format!("{x:.2e}")
    }
}

/// Formats a standard deviation with three significant figures.
fn fmt_sd(x: f64) -> String {
    if x == 0.0 || !x.is_finite() {
        return format!("{x}");
    }
    let digits = (2 - x.abs().log10().floor() as i32).max(0) as usize;
    format!("{x:.digits$}")
}

fn effect_words(or: &OddsRatio) -> String {
    let range = format!(
        "{} [{}, {}]",
        fmt_ratio(or.estimate),
        fmt_ratio(or.lower),
        fmt_ratio(or.upper)
    );
    if or.excludes_one() {
        format!("by {range}")
    } else {
        format!("by {range}; the interval includes 1, so the direction is not clear")
    }
}

/// Builds the association table of a fitted model.
///
/// `unit_of` returns the unit of an original column (e.g. from the column dictionary),
/// `labels` the state labels in model order. `level` is the interval level (0 < level < 1).
///
/// # Errors
/// [`SummaryError::Option`] when the model has no covariates, has no usable covariance
/// (the Hessian was not positive definite), or `level` is outside (0, 1).
pub fn association_table(
    model: &FittedModel,
    labels: &[String],
    unit_of: &dyn Fn(&str) -> Option<String>,
    level: f64,
) -> Result<AssociationTable, SummaryError> {
    if !(level > 0.0 && level < 1.0) {
        return Err(SummaryError::option(
            "level",
            "must lie strictly between 0 and 1",
        ));
    }
    let spec = model.model().valid_spec();
    let n = spec.n_states();
    let covariates = spec.spec().covariates.clone();
    if covariates.is_empty() {
        return Err(SummaryError::option(
            "model",
            "the model has no covariates, so there are no associations to tabulate",
        ));
    }
    if labels.len() != n {
        return Err(SummaryError::option(
            "labels",
            format!("{} labels for a {n}-state model", labels.len()),
        ));
    }
    let se = model.working_standard_errors().ok_or_else(|| {
        SummaryError::option(
            "model",
            format!(
                "no standard errors: {}",
                model
                    .covariance()
                    .problem()
                    .unwrap_or_else(|| "covariance not computed".into())
            ),
        )
    })?;
    let normal = Normal::new(0.0, 1.0).expect("standard normal");
    let z = normal.inverse_cdf(0.5 + level / 2.0);
    let scaling: &[CovariateScaling] = model.covariate_scaling().unwrap_or(&[]);
    let p = covariates.len();
    let beta = &model.params().beta;
    let offset = spec.beta_offset;
    let pct = format!("{:.0}%", level * 100.0);
    let mut rows = Vec::new();
    for i in 0..n {
        for j in (0..n).filter(|&j| j != i) {
            let r = crate::hmm::spec::beta_row(n, i, j);
            for (k, term) in covariates.iter().enumerate() {
                let idx = r * (1 + p) + 1 + k;
                let b = beta[idx];
                let s = se[offset + idx];
                let zval = b / s;
                let pval = 2.0 * (1.0 - normal.cdf(zval.abs()));
                let scale = scaling.iter().find(|c| &c.name == term);
                let kind = if scale.is_some() {
                    TermKind::Standardised
                } else if term.contains(':') {
                    TermKind::Interaction
                } else if term.starts_with("cos(") || term.starts_with("sin(") {
                    TermKind::Cyclic
                } else if term.contains('=') {
                    TermKind::Level
                } else {
                    TermKind::Numeric
                };
                let or = OddsRatio::new(b, s, z, 1.0);
                let per_unit = scale.map(|c| OddsRatio::new(b, s, z, 1.0 / c.scale));
                let unit = unit_of(term).unwrap_or_default();
                let (from, to) = (&labels[i], &labels[j]);
                let odds = format!(
                    "the odds of switching from {from} to {to} (rather than staying {from})"
                );
                let reading = match kind {
                    TermKind::Standardised => {
                        let sd = scale.map(|c| c.scale).unwrap_or(1.0);
                        let unit_txt = if unit.is_empty() {
                            String::new()
                        } else {
                            format!(" {unit}")
                        };
                        format!(
                            "each +1 sd ({}{unit_txt}) of {term} multiplies {odds} {} ({pct} interval)",
                            fmt_sd(sd),
                            effect_words(&or)
                        )
                    }
                    TermKind::Numeric => format!(
                        "each +1{} of {term} multiplies {odds} {} ({pct} interval)",
                        if unit.is_empty() {
                            String::new()
                        } else {
                            format!(" {unit}")
                        },
                        effect_words(&or)
                    ),
                    TermKind::Level => {
                        let (col, lvl) = term.split_once('=').unwrap_or((term.as_str(), ""));
                        format!(
                            "{col} = {lvl}, rather than the reference level, multiplies {odds} {} ({pct} interval)",
                            effect_words(&or)
                        )
                    }
                    TermKind::Cyclic => format!(
                        "{term} is one half of a time-of-day pair: its effect on {odds} depends on the hour and is shown by the transition curves, not by this coefficient alone"
                    ),
                    TermKind::Interaction => format!(
                        "the interaction {term} (on the standardised scale of its parts) changes how one part's effect on {odds} depends on the other: {}",
                        effect_words(&or)
                    ),
                };
                rows.push(AssociationRow {
                    from: from.clone(),
                    to: to.clone(),
                    term: term.clone(),
                    kind,
                    coefficient: b,
                    se: s,
                    z: zval,
                    p: pval,
                    odds_ratio: or,
                    odds_ratio_per_unit: per_unit,
                    sd: scale.map(|c| c.scale),
                    unit,
                    reading,
                });
            }
        }
    }
    Ok(AssociationTable { level, rows })
}

impl AssociationTable {
    /// Writes the table as CSV (one row per coefficient; empty cells where a column does
    /// not apply).
    ///
    /// # Errors
    /// [`SummaryError::Io`] when writing fails.
    pub fn write_csv<W: Write>(&self, mut w: W) -> Result<(), SummaryError> {
        let e = SummaryError::io;
        writeln!(
            w,
            "from,to,term,kind,coefficient,se,z,p,odds_ratio,or_lower,or_upper,sd,unit,or_per_unit,or_per_unit_lower,or_per_unit_upper,reading"
        )
        .map_err(e("association table"))?;
        for r in &self.rows {
            let opt = |x: Option<f64>| x.map(csv_num).unwrap_or_default();
            let pu = r.odds_ratio_per_unit;
            writeln!(
                w,
                "{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{}",
                csv_text(&r.from),
                csv_text(&r.to),
                csv_text(&r.term),
                r.kind.as_str(),
                r.coefficient,
                r.se,
                r.z,
                r.p,
                r.odds_ratio.estimate,
                r.odds_ratio.lower,
                r.odds_ratio.upper,
                opt(r.sd),
                csv_text(&r.unit),
                opt(pu.map(|o| o.estimate)),
                opt(pu.map(|o| o.lower)),
                opt(pu.map(|o| o.upper)),
                csv_text(&r.reading),
            )
            .map_err(e("association table"))?;
        }
        Ok(())
    }
}
