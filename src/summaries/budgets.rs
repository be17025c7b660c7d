//! Activity budgets: the share of time spent in each state by local hour (24 one-hour
//! bins), by diel phase and by season.
//!
//! Each fix stands for one sampling interval of the regular track, so shares are
//! shares of fixes; with [`CountMethod::Viterbi`] a fix adds 1 to its decoded state,
//! with [`CountMethod::LocalProbabilities`] it adds its local state probabilities.
//! The hourly table also carries, per hour bin, the fraction of fixes with the sun
//! below a chosen elevation (default −0.833°, the conventional sunrise/sunset
//! altitude allowing for refraction and the solar semi-diameter), which the hourly
//! figure draws as a night mask; it is measured from the fixes, not assumed from
//! clock hours.
//!
//! Uncertainty comes from a bootstrap over animals: steps of one animal are
//! autocorrelated, so the animal is the independent unit, and a per-bin binomial
//! interval on steps would be far too narrow. Each replicate draws animals with
//! replacement (seeded, so the interval is reproducible), pools their weights and
//! recomputes the shares; the interval is the percentile interval of the replicates.
//!
//! # Formula
//! Share of state s in bin b: p̂_bs = Σ_{i∈b} w_is / Σ_{i∈b} Σ_r w_ir, with w_is the
//! Viterbi indicator or local probability. Percentile bootstrap over independent
//! units: Efron & Tibshirani (1993), *An Introduction to the Bootstrap*, ch. 13;
//! resampling clusters (animals) rather than observations: Davison & Hinkley (1997),
//! *Bootstrap Methods and their Application*, §3.8.

use super::rng::SplitMix64;
use super::{CountMethod, Decoded, DielPhase, SummaryError, csv_num, csv_text, quantile_sorted};
use rayon::prelude::*;
use serde::Serialize;
use std::io::Write;

/// Default sun elevation (degrees) below which a fix counts as night for the mask.
pub const DEFAULT_NIGHT_ELEVATION_DEG: f64 = -0.833;

/// Bootstrap settings.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct BootstrapOptions {
    /// Number of replicates (≥ 10).
    pub replicates: usize,
    /// Seed of the resampling stream.
    pub seed: u64,
    /// Coverage of the percentile interval, in (0, 1).
    pub level: f64,
}

impl Default for BootstrapOptions {
    fn default() -> Self {
        BootstrapOptions {
            replicates: 1000,
            seed: 20_260_101,
            level: 0.95,
        }
    }
}

/// Settings for [`activity_budgets`].
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct BudgetOptions {
    /// How time in a state is counted.
    pub method: CountMethod,
    /// Sun elevation (degrees) below which a fix counts towards the night mask.
    pub night_elevation_deg: f64,
    /// Bootstrap over animals; `None` gives point estimates only.
    pub bootstrap: Option<BootstrapOptions>,
}

impl Default for BudgetOptions {
    fn default() -> Self {
        BudgetOptions {
            method: CountMethod::Viterbi,
            night_elevation_deg: DEFAULT_NIGHT_ELEVATION_DEG,
            bootstrap: Some(BootstrapOptions::default()),
        }
    }
}

/// What the rows of a [`BudgetTable`] are.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum Grouping {
    /// 24 bins of local hour, `[h, h+1)`.
    LocalHour,
    /// Dawn, day, dusk, night.
    DielPhase,
    /// Season labels in table order.
    Season,
}

impl Grouping {
    /// Name used in tables.
    pub fn as_str(self) -> &'static str {
        match self {
            Grouping::LocalHour => "local_hour",
            Grouping::DielPhase => "diel_phase",
            Grouping::Season => "season",
        }
    }
}

/// One row of a budget table.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct BudgetRow {
    /// Group label ("00".."23", a diel phase, or a season).
    pub group: String,
    /// Fixes in the group.
    pub n_fixes: u64,
    /// Animals with at least one fix in the group.
    pub n_animals: usize,
    /// Summed weight per state (fix counts for Viterbi, summed probabilities otherwise).
    pub weight: Vec<f64>,
    /// Share per state (NaN when the group has no fixes).
    pub proportion: Vec<f64>,
    /// Bootstrap percentile interval per state, when requested and defined.
    pub interval: Option<Vec<(f64, f64)>>,
    /// Fraction of fixes with sun elevation below the night threshold (hourly table only).
    pub night_fraction: Option<f64>,
}

/// A budget table for one grouping.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct BudgetTable {
    /// What the rows are.
    pub grouping: Grouping,
    /// How time in a state was counted.
    pub method: CountMethod,
    /// State labels (columns).
    pub state_labels: Vec<String>,
    /// Rows in table order.
    pub rows: Vec<BudgetRow>,
    /// Bootstrap settings used for the intervals, if any.
    pub bootstrap: Option<BootstrapOptions>,
}

/// Hourly, diel and seasonal budgets computed together.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ActivityBudgets {
    /// 24 rows of local hour, with night fractions.
    pub hourly: BudgetTable,
    /// Four rows: dawn, day, dusk, night.
    pub diel: BudgetTable,
    /// One row per season label.
    pub season: BudgetTable,
    /// Night threshold used for the hourly mask, degrees.
    pub night_elevation_deg: f64,
}

/// Per-animal accumulators: weights per (bin, state), fixes per bin, night fixes per
/// hour bin. Bins: 24 hours, then 4 diel phases, then the seasons.
struct AnimalSums {
    weight: Vec<f64>,
    fixes: Vec<u64>,
    night: [u64; 24],
}

/// Hour bin of a local hour in [0, 24).
#[inline]
pub(crate) fn hour_bin(h: f64) -> usize {
    (h.floor() as usize).min(23)
}

/// Compute activity budgets by local hour, diel phase and season.
///
/// # Errors
/// [`SummaryError::ProbabilitiesMissing`] for the probability method without
/// probabilities; [`SummaryError::Option`] for a non-finite night threshold or
/// bootstrap settings out of range.
///
/// # Formula
/// See the module documentation (share of summed weights; percentile bootstrap over
/// animals).
///
/// # Examples
/// ```
/// use cairn::summaries::{Decoded, DecodedColumns, DielPhase, CountMethod};
/// use cairn::summaries::budgets::{activity_budgets, BudgetOptions};
/// let cols = DecodedColumns {
///     state_labels: vec!["rest".into(), "travel".into()],
///     animal: vec!["a".into(); 3],
///     time_us: vec![0, 1, 2],
///     lon: vec![0.0; 3], lat: vec![0.0; 3],
///     local_hour: vec![5.0, 5.5, 6.0],
///     diel: vec![DielPhase::Dawn; 3],
///     sun_elevation_deg: vec![-3.0, -1.0, 2.0],
///     season: vec!["spring".into(); 3],
///     viterbi: vec![0, 1, 1],
///     step_m: vec![1.0; 3], angle_rad: vec![0.0; 3],
///     ..Default::default()
/// };
/// let d = Decoded::new(cols).unwrap();
/// let opts = BudgetOptions { method: CountMethod::Viterbi, bootstrap: None, ..Default::default() };
/// let b = activity_budgets(&d, &opts).unwrap();
/// assert_eq!(b.hourly.rows[5].proportion, vec![0.5, 0.5]);
/// assert_eq!(b.hourly.rows[5].night_fraction, Some(1.0));
/// ```
pub fn activity_budgets(
    d: &Decoded,
    opts: &BudgetOptions,
) -> Result<ActivityBudgets, SummaryError> {
    d.ensure_method(opts.method)?;
    if !opts.night_elevation_deg.is_finite() {
        return Err(SummaryError::option(
            "night_elevation_deg",
            "must be a finite angle in degrees (default -0.833)",
        ));
    }
    if let Some(b) = &opts.bootstrap {
        if b.replicates < 10 {
            return Err(SummaryError::option(
                "bootstrap.replicates",
                format!(
                    "{} is too few; use at least 10 (1000 is usual)",
                    b.replicates
                ),
            ));
        }
        if !(b.level > 0.0 && b.level < 1.0) {
            return Err(SummaryError::option(
                "bootstrap.level",
                format!("{} is not in (0, 1)", b.level),
            ));
        }
    }
    let n = d.n_states();
    let n_season = d.season_labels().len();
    let n_bins = 24 + 4 + n_season;
    let method = opts.method;
    let threshold = opts.night_elevation_deg;

    // Per-animal sums in parallel; each animal's sums are in row order, and the
    // pooling below runs in animal order, so results do not depend on thread count.
    let per_animal: Vec<AnimalSums> = d
        .animal_rows()
        .par_iter()
        .map(|rows| {
            let mut s = AnimalSums {
                weight: vec![0.0; n_bins * n],
                fixes: vec![0; n_bins],
                night: [0; 24],
            };
            for i in rows.clone() {
                let (hour, diel, season, elev) = d.row_parts(i);
                let hb = hour_bin(hour);
                for bin in [hb, 24 + diel.index(), 28 + season] {
                    s.fixes[bin] += 1;
                    d.add_weights(i, method, 1.0, &mut s.weight[bin * n..(bin + 1) * n]);
                }
                if elev < threshold {
                    s.night[hb] += 1;
                }
            }
            s
        })
        .collect();

    let mut total = vec![0.0; n_bins * n];
    let mut fixes = vec![0u64; n_bins];
    let mut animals = vec![0usize; n_bins];
    let mut night = [0u64; 24];
    for a in &per_animal {
        for (t, w) in total.iter_mut().zip(&a.weight) {
            *t += w;
        }
        for (b, &f) in a.fixes.iter().enumerate() {
            fixes[b] += f;
            animals[b] += usize::from(f > 0);
        }
        for (t, &x) in night.iter_mut().zip(&a.night) {
            *t += x;
        }
    }

    let intervals = opts
        .bootstrap
        .map(|b| bootstrap_intervals(&per_animal, n_bins, n, &b));

    let make_row = |bin: usize, group: String, night_fraction: Option<f64>| {
        let w = total[bin * n..(bin + 1) * n].to_vec();
        let sum: f64 = w.iter().sum();
        let proportion = w
            .iter()
            .map(|&x| if sum > 0.0 { x / sum } else { f64::NAN })
            .collect();
        BudgetRow {
            group,
            n_fixes: fixes[bin],
            n_animals: animals[bin],
            weight: w,
            proportion,
            interval: intervals.as_ref().and_then(|iv| iv[bin].clone()),
            night_fraction,
        }
    };
    let table = |grouping, rows| BudgetTable {
        grouping,
        method,
        state_labels: d.state_labels().to_vec(),
        rows,
        bootstrap: opts.bootstrap,
    };

    let hourly_rows = (0..24)
        .map(|h| {
            let nf = if fixes[h] > 0 {
                night[h] as f64 / fixes[h] as f64
            } else {
                f64::NAN
            };
            make_row(h, format!("{h:02}"), Some(nf))
        })
        .collect();
    let diel_rows = DielPhase::ALL
        .iter()
        .map(|p| make_row(24 + p.index(), p.as_str().to_string(), None))
        .collect();
    let season_rows = d
        .season_labels()
        .iter()
        .enumerate()
        .map(|(k, s)| make_row(28 + k, s.clone(), None))
        .collect();

    Ok(ActivityBudgets {
        hourly: table(Grouping::LocalHour, hourly_rows),
        diel: table(Grouping::DielPhase, diel_rows),
        season: table(Grouping::Season, season_rows),
        night_elevation_deg: threshold,
    })
}

/// Percentile intervals per (bin, state); `None` for bins with no fixes.
fn bootstrap_intervals(
    per_animal: &[AnimalSums],
    n_bins: usize,
    n: usize,
    b: &BootstrapOptions,
) -> Vec<Option<Vec<(f64, f64)>>> {
    let a = per_animal.len();
    // Draw all replicates' animal indices up front from one stream so the result
    // depends only on the seed, then evaluate replicates in parallel.
    let mut rng = SplitMix64::new(b.seed);
    let draws: Vec<Vec<usize>> = (0..b.replicates)
        .map(|_| (0..a).map(|_| rng.below(a)).collect())
        .collect();
    // replicate × bin × state shares; NaN where the replicate has no fixes in the bin.
    let reps: Vec<Vec<f64>> = draws
        .par_iter()
        .map(|idx| {
            let mut w = vec![0.0; n_bins * n];
            for &k in idx {
                for (t, x) in w.iter_mut().zip(&per_animal[k].weight) {
                    *t += x;
                }
            }
            for chunk in w.chunks_exact_mut(n) {
                let s: f64 = chunk.iter().sum();
                for x in chunk.iter_mut() {
                    *x = if s > 0.0 { *x / s } else { f64::NAN };
                }
            }
            w
        })
        .collect();
    let alpha = (1.0 - b.level) / 2.0;
    (0..n_bins)
        .map(|bin| {
            let mut out = Vec::with_capacity(n);
            for s in 0..n {
                let mut v: Vec<f64> = reps
                    .iter()
                    .map(|r| r[bin * n + s])
                    .filter(|x| x.is_finite())
                    .collect();
                if v.is_empty() {
                    return None;
                }
                v.sort_by(f64::total_cmp);
                out.push((quantile_sorted(&v, alpha), quantile_sorted(&v, 1.0 - alpha)));
            }
            Some(out)
        })
        .collect()
}

impl BudgetTable {
    /// Write the table as CSV: grouping, group, fixes, animals, night fraction, then
    /// per state the share, interval bounds and summed weight.
    ///
    /// # Errors
    /// [`SummaryError::Io`] when writing fails.
    pub fn write_csv<W: Write>(&self, mut w: W) -> Result<(), SummaryError> {
        let io = SummaryError::io("activity budget CSV");
        let mut header = vec![
            "method".to_string(),
            "grouping".into(),
            "group".into(),
            "n_fixes".into(),
            "n_animals".into(),
            "night_fraction".into(),
        ];
        for l in &self.state_labels {
            for suffix in ["", "_lower", "_upper"] {
                header.push(csv_text(&format!("share_{l}{suffix}")));
            }
            header.push(csv_text(&format!("weight_{l}")));
        }
        let mut out = header.join(",");
        out.push('\n');
        for r in &self.rows {
            let mut f = vec![
                self.method.as_str().to_string(),
                self.grouping.as_str().to_string(),
                csv_text(&r.group),
                r.n_fixes.to_string(),
                r.n_animals.to_string(),
                r.night_fraction.map(csv_num).unwrap_or_default(),
            ];
            for s in 0..self.state_labels.len() {
                let (lo, hi) = r
                    .interval
                    .as_ref()
                    .map(|iv| iv[s])
                    .unwrap_or((f64::NAN, f64::NAN));
                f.push(csv_num(r.proportion[s]));
                f.push(csv_num(lo));
                f.push(csv_num(hi));
                f.push(csv_num(r.weight[s]));
            }
            out.push_str(&f.join(","));
            out.push('\n');
        }
        w.write_all(out.as_bytes()).map_err(io)
    }
}
