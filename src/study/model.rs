//! The `[model]` section: which behavioural-state models to fit and compare.
//!
//! Each candidate names its transition covariates as terms:
//!
//! | term | meaning |
//! |---|---|
//! | `depth` | a numeric column of the step table, used as it is |
//! | `cyclic(hour_local, 24)` | cos and sin of 2π·x/period |
//! | `factor(habitat, sand)` | a categorical column in reference coding against `sand` |
//! | `depth:factor(habitat, sand)` or `depth:kelp` | the interaction of two terms of the same candidate |
//!
//! Terms are checked against the step table's columns when the models are fitted (the
//! table is written by `prepare`, after the study is validated).

use serde::Serialize;

use super::StudyError;

/// Distribution family of the step-length stream.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum StepFamily {
    Gamma,
    Weibull,
    LogNormal,
}

/// Distribution family of the turning-angle stream.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum AngleFamily {
    VonMises,
    WrappedCauchy,
}

/// How the model to report is chosen.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Selection {
    /// Lowest AIC.
    Aic,
    /// Lowest BIC.
    Bic,
    /// The candidate of this name.
    Named(String),
}

/// One transition covariate term.
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "kebab-case")]
pub enum Term {
    Numeric { column: String },
    Cyclic { column: String, period: f64 },
    Factor { column: String, reference: String },
    Interaction { a: String, b: String },
}

impl Term {
    /// The raw columns of the step table this term reads.
    pub fn columns(&self) -> Vec<&str> {
        match self {
            Term::Numeric { column }
            | Term::Cyclic { column, .. }
            | Term::Factor { column, .. } => {
                vec![column.as_str()]
            }
            Term::Interaction { .. } => Vec::new(),
        }
    }
}

/// One candidate model.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Candidate {
    /// Name used in tables and file names.
    pub name: String,
    /// Number of states.
    pub n_states: usize,
    /// State labels, in the documented state order (increasing mean step length).
    pub labels: Vec<String>,
    /// Transition covariate terms.
    pub terms: Vec<Term>,
}

impl Candidate {
    /// A file-name-safe form of the name.
    pub fn slug(&self) -> String {
        let s: String = self
            .name
            .chars()
            .map(|c| {
                if c.is_ascii_alphanumeric() {
                    c.to_ascii_lowercase()
                } else {
                    '-'
                }
            })
            .collect();
        s.trim_matches('-').to_string()
    }
}

/// The validated `[model]` section.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ModelSettings {
    pub step: StepFamily,
    /// `None` when turning angles are not modelled.
    pub angle: Option<AngleFamily>,
    /// Allow zero step lengths through a per-state zero mass.
    pub zero_mass: bool,
    /// Initial distribution: stationary at the first covariates (`true`) or estimated.
    pub stationary_start: bool,
    /// Random starts per candidate.
    pub starts: usize,
    /// Seed of the random starts.
    pub seed: u64,
    /// On large data, let a start whose warm-up ends where an earlier start's did share
    /// that start's full-data run (see [`crate::hmm::fit`]); false runs every start in full.
    pub share_runs: bool,
    pub select: Selection,
    pub candidates: Vec<Candidate>,
}

impl ModelSettings {
    /// Every state label used by some candidate, in first-use order.
    pub fn all_labels(&self) -> Vec<String> {
        let mut out: Vec<String> = Vec::new();
        for l in self.candidates.iter().flat_map(|c| &c.labels) {
            if !out.contains(l) {
                out.push(l.clone());
            }
        }
        out
    }
}

fn invalid(key: &str, reason: impl Into<String>) -> StudyError {
    StudyError::Invalid {
        key: key.to_string(),
        reason: reason.into(),
    }
}

/// Parses one term; `key` names it in errors.
pub(crate) fn parse_term(key: &str, text: &str) -> Result<Term, StudyError> {
    let t = text.trim();
    if let Some((a, b)) = split_top_level_colon(t) {
        let a = parse_term(key, a)?;
        let b = parse_term(key, b)?;
        if matches!(a, Term::Interaction { .. }) || matches!(b, Term::Interaction { .. }) {
            return Err(invalid(key, "an interaction joins exactly two terms"));
        }
        return Ok(Term::Interaction {
            a: a.columns()[0].to_string(),
            b: b.columns()[0].to_string(),
        });
    }
    let call = |name: &str| -> Option<Vec<String>> {
        let inner = t
            .strip_prefix(name)?
            .trim()
            .strip_prefix('(')?
            .strip_suffix(')')?;
        Some(inner.split(',').map(|s| s.trim().to_string()).collect())
    };
    if let Some(args) = call("cyclic") {
        let [column, period] = args.as_slice() else {
            return Err(invalid(key, format!("{t:?}: write cyclic(column, period)")));
        };
        let period: f64 = period
            .parse()
            .ok()
            .filter(|p: &f64| p.is_finite() && *p > 0.0)
            .ok_or_else(|| invalid(key, format!("{t:?}: the period must be a positive number")))?;
        return Ok(Term::Cyclic {
            column: column.clone(),
            period,
        });
    }
    if let Some(args) = call("factor") {
        let [column, reference] = args.as_slice() else {
            return Err(invalid(
                key,
                format!("{t:?}: write factor(column, reference level)"),
            ));
        };
        return Ok(Term::Factor {
            column: column.clone(),
            reference: reference.clone(),
        });
    }
    let ok = !t.is_empty()
        && t.chars()
            .all(|c| c.is_alphanumeric() || c == '_' || c == '.' || c == '-');
    if !ok {
        return Err(invalid(
            key,
            format!(
                "{t:?} is not a column name, cyclic(column, period), factor(column, level) or a:b"
            ),
        ));
    }
    Ok(Term::Numeric {
        column: t.to_string(),
    })
}

/// Splits `a:b` at a colon outside parentheses.
fn split_top_level_colon(t: &str) -> Option<(&str, &str)> {
    let mut depth = 0i32;
    for (i, c) in t.char_indices() {
        match c {
            '(' => depth += 1,
            ')' => depth -= 1,
            ':' if depth == 0 => return Some((&t[..i], &t[i + 1..])),
            _ => {}
        }
    }
    None
}

pub(crate) fn resolve(m: &super::raw::RawModel) -> Result<ModelSettings, StudyError> {
    let n = m.states.len();
    if !(1..=6).contains(&n) {
        return Err(invalid("model.states", "give 1 to 6 state labels"));
    }
    let mut seen = std::collections::BTreeSet::new();
    for l in &m.states {
        if l.trim().is_empty() || !seen.insert(l.trim()) {
            return Err(invalid(
                "model.states",
                format!("labels must be non-empty and distinct ({l:?})"),
            ));
        }
    }
    let step = match m.step.as_str() {
        "gamma" => StepFamily::Gamma,
        "weibull" => StepFamily::Weibull,
        "lognormal" | "log-normal" => StepFamily::LogNormal,
        o => {
            return Err(invalid(
                "model.step",
                format!("{o:?} is not gamma, weibull or lognormal"),
            ));
        }
    };
    let angle = match m.angle.as_str() {
        "von-mises" => Some(AngleFamily::VonMises),
        "wrapped-cauchy" => Some(AngleFamily::WrappedCauchy),
        "none" => None,
        o => {
            return Err(invalid(
                "model.angle",
                format!("{o:?} is not von-mises, wrapped-cauchy or none"),
            ));
        }
    };
    let stationary_start = match m.initial.as_str() {
        "stationary" => true,
        "estimated" => false,
        o => {
            return Err(invalid(
                "model.initial",
                format!("{o:?} is not stationary or estimated"),
            ));
        }
    };
    if m.starts == 0 {
        return Err(invalid("model.starts", "at least one start"));
    }
    let mut candidates = Vec::new();
    let raw_candidates: Vec<(String, Option<usize>, Vec<String>)> = if m.candidate.is_empty() {
        vec![("no covariates".to_string(), None, Vec::new())]
    } else {
        m.candidate
            .iter()
            .map(|c| (c.name.clone(), c.states, c.covariates.clone()))
            .collect()
    };
    let mut names = std::collections::BTreeSet::new();
    for (i, (name, states, covs)) in raw_candidates.into_iter().enumerate() {
        let key = format!("model.candidate[{i}]");
        if name.trim().is_empty() || !names.insert(name.clone()) {
            return Err(invalid(
                &key,
                format!("names must be non-empty and distinct ({name:?})"),
            ));
        }
        let n_states = states.unwrap_or(n);
        if !(1..=6).contains(&n_states) {
            return Err(invalid(&format!("{key}.states"), "1 to 6 states"));
        }
        let labels = if n_states == n {
            m.states.iter().map(|s| s.trim().to_string()).collect()
        } else {
            (1..=n_states).map(|k| format!("state {k}")).collect()
        };
        let terms = covs
            .iter()
            .map(|c| parse_term(&format!("{key}.covariates"), c))
            .collect::<Result<Vec<_>, _>>()?;
        candidates.push(Candidate {
            name,
            n_states,
            labels,
            terms,
        });
    }
    let select = match m.select.as_str() {
        "aic" => Selection::Aic,
        "bic" => Selection::Bic,
        other => {
            if !candidates.iter().any(|c| c.name == other) {
                return Err(invalid(
                    "model.select",
                    format!("{other:?} is neither aic, bic nor the name of a candidate"),
                ));
            }
            Selection::Named(other.to_string())
        }
    };
    Ok(ModelSettings {
        step,
        angle,
        zero_mass: m.zero_mass,
        stationary_start,
        starts: m.starts,
        seed: m.seed,
        share_runs: m.share_runs,
        select,
        candidates,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn terms_parse() {
        assert_eq!(
            parse_term("k", "depth").unwrap(),
            Term::Numeric {
                column: "depth".into()
            }
        );
        assert_eq!(
            parse_term("k", "cyclic(hour_local, 24)").unwrap(),
            Term::Cyclic {
                column: "hour_local".into(),
                period: 24.0
            }
        );
        assert_eq!(
            parse_term("k", "factor( habitat , sand )").unwrap(),
            Term::Factor {
                column: "habitat".into(),
                reference: "sand".into()
            }
        );
        assert_eq!(
            parse_term("k", "depth:factor(habitat, sand)").unwrap(),
            Term::Interaction {
                a: "depth".into(),
                b: "habitat".into()
            }
        );
        assert!(parse_term("k", "cyclic(hour)").is_err());
        assert!(parse_term("k", "cyclic(hour, -1)").is_err());
        assert!(parse_term("k", "depth + kelp").is_err());
        assert!(parse_term("k", "a:b:c").is_err());
    }
}
