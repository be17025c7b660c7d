//! Per-animal table: tracking span, fixes and steps used, share of time per state and
//! mean step length per state.
//!
//! "Fixes" are the animal's rows in the decoded table; "steps" are the rows with a
//! defined step length (the last fix of each track segment has none). Shares follow
//! the chosen [`CountMethod`]; the mean step per state is the Viterbi-state mean, or
//! the probability-weighted mean Σ p_is ℓ_i / Σ p_is for the probability method.

use super::{CountMethod, Decoded, SummaryError, csv_num, csv_text};
use chrono::DateTime;
use serde::Serialize;
use std::io::Write;

/// One animal's row.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct AnimalRow {
    /// Animal identifier.
    pub animal: String,
    /// First fix, UTC microseconds.
    pub first_time_us: i64,
    /// Last fix, UTC microseconds.
    pub last_time_us: i64,
    /// Span from first to last fix, days.
    pub span_days: f64,
    /// Rows (fixes) in the decoded table.
    pub fixes: usize,
    /// Rows with a defined step length.
    pub steps: usize,
    /// Share of fixes per state.
    pub share: Vec<f64>,
    /// Mean step length per state, metres (NaN when no step is in the state).
    pub mean_step_m: Vec<f64>,
}

/// The per-animal table.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct AnimalTable {
    /// How shares and means were weighted.
    pub method: CountMethod,
    /// State labels.
    pub state_labels: Vec<String>,
    /// One row per animal, in the decoded table's animal order.
    pub rows: Vec<AnimalRow>,
}

/// Build the per-animal table.
///
/// # Errors
/// [`SummaryError::ProbabilitiesMissing`] for the probability method without
/// probabilities.
pub fn animal_table(d: &Decoded, method: CountMethod) -> Result<AnimalTable, SummaryError> {
    d.ensure_method(method)?;
    let n = d.n_states();
    let rows = d
        .animal_ids()
        .iter()
        .zip(d.animal_rows())
        .map(|(id, r)| {
            let mut share = vec![0.0; n];
            let mut step_w = vec![0.0; n];
            let mut step_sum = vec![0.0; n];
            let mut steps = 0;
            for i in r.clone() {
                d.add_weights(i, method, 1.0, &mut share);
                let l = d.step_m()[i];
                if l.is_finite() {
                    steps += 1;
                    for s in 0..n {
                        let w = d.weight(i, s, method);
                        step_w[s] += w;
                        step_sum[s] += w * l;
                    }
                }
            }
            let fixes = r.len();
            for x in &mut share {
                *x /= fixes as f64;
            }
            let mean_step_m = step_sum
                .iter()
                .zip(&step_w)
                .map(|(&s, &w)| if w > 0.0 { s / w } else { f64::NAN })
                .collect();
            let first = d.time_us()[r.start];
            let last = d.time_us()[r.end - 1];
            AnimalRow {
                animal: id.clone(),
                first_time_us: first,
                last_time_us: last,
                span_days: (last - first) as f64 / 86_400e6,
                fixes,
                steps,
                share,
                mean_step_m,
            }
        })
        .collect();
    Ok(AnimalTable {
        method,
        state_labels: d.state_labels().to_vec(),
        rows,
    })
}

fn iso(us: i64) -> String {
    DateTime::from_timestamp_micros(us)
        .map(|t| t.format("%Y-%m-%dT%H:%M:%SZ").to_string())
        .unwrap_or_default()
}

impl AnimalTable {
    /// Write as CSV (times as ISO 8601 UTC).
    ///
    /// # Errors
    /// [`SummaryError::Io`] when writing fails.
    pub fn write_csv<W: Write>(&self, mut w: W) -> Result<(), SummaryError> {
        let mut head = vec![
            "animal".to_string(),
            "first_fix_utc".into(),
            "last_fix_utc".into(),
            "span_days".into(),
            "fixes".into(),
            "steps".into(),
        ];
        for l in &self.state_labels {
            head.push(csv_text(&format!("share_{l}")));
        }
        for l in &self.state_labels {
            head.push(csv_text(&format!("mean_step_m_{l}")));
        }
        let mut out = head.join(",");
        out.push('\n');
        for r in &self.rows {
            let mut f = vec![
                csv_text(&r.animal),
                iso(r.first_time_us),
                iso(r.last_time_us),
                csv_num(r.span_days),
                r.fixes.to_string(),
                r.steps.to_string(),
            ];
            f.extend(r.share.iter().map(|&x| csv_num(x)));
            f.extend(r.mean_step_m.iter().map(|&x| csv_num(x)));
            out.push_str(&f.join(","));
            out.push('\n');
        }
        w.write_all(out.as_bytes())
            .map_err(SummaryError::io("per-animal CSV"))
    }
}
