//! Regularisation of irregular, error-prone fixes onto a regular time grid with a
//! continuous-time state-space smoother.
//!
//! For each animal the fixes are split into segments wherever two consecutive fixes are
//! more than the gap threshold apart. The movement model is a continuous-time correlated
//! random walk (velocity an Ornstein–Uhlenbeck process on each axis; Johnson, London, Lea
//! & Durban 2008, Ecology 89:1208–1215) discretised exactly between arbitrary times
//! ([`axis_step`]). Each fix's observation error is the covariance of its location class
//! or of its own error ellipse. The process parameters β and σ (and optionally a common
//! multiplier on all error standard deviations) are fitted by maximum likelihood on the
//! Kalman-filter likelihood summed over segments, each segment starting from a diffuse
//! position prior at its first fix ([`StatePrior::diffuse_position`]; the first fix's
//! own likelihood term is kept and, the prior position variance being fixed, does not
//! depend on β or σ). With the fitted parameters, the filter is run over the union of fix
//! times and grid times and the Rauch–Tung–Striebel smoother gives the location and its
//! covariance at each grid time. Standard errors of the parameters come from the observed
//! information ([`FitRecord::working_se`]).
//!
//! **Grid rule.** Grid times are `anchor + k · interval` for integer `k`, where `anchor` is
//! midnight UTC of the day of the animal's first fix (times are taken as seconds since
//! the Unix epoch, so `anchor = ⌊t₀ / 86400⌋ · 86400`). A segment receives the grid times
//! inside its observed span `[first fix, last fix]` (inclusive); nothing is predicted
//! inside a gap.
//!
//! **Outliers (optional).** After the fit, each fix's innovation `ν` from the forward
//! filter is standardised by its covariance `S`; `d² = νᵀ S⁻¹ ν` is χ² with 2 degrees of
//! freedom under the model, whose quantile has the closed form `−2 ln(1 − q)`. Fixes with
//! `d²` above the `q` quantile are flagged and, if asked, dropped, and the animal is
//! refitted once (from the first estimates) and smoothed without them.
//!
//! Animals are independent and are processed in parallel with rayon by
//! [`regularise_many`]; the result of each animal does not depend on the thread count.

mod fit;
mod kalman;
mod observation;
mod process;

use rayon::prelude::*;
use serde::{Deserialize, Serialize};

pub use kalman::{
    Epoch, FilterFailure, Observation, SmootherOutput, StatePrior, filter_smooth, log_likelihood,
};
pub use observation::{AxisSd, ClassErrors, ErrorCovariance, ObservationError};
pub use process::{AxisStep, ProcessParams, axis_step};

use crate::tracks::class::LocClass;
use fit::{FitOutcome, Problem, SegmentData};

/// Fewest fix-to-fix intervals inside segments for which a fit is attempted: two
/// parameters (three with the error scale) need several increments to be identified.
pub const MIN_INTERVALS: usize = 4;

/// Seconds in a UTC day, for the grid anchor.
const DAY_S: f64 = 86_400.0;

/// Why an animal could not be regularised. The caller logs it and goes on.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum RegularError {
    /// Not enough fixes inside segments to fit the model.
    #[error(
        "too few fixes: {intervals} fix-to-fix interval(s) within segments, at least {needed} needed (check the gap threshold or drop this animal)"
    )]
    TooFewFixes {
        /// Intervals available.
        intervals: usize,
        /// Intervals required.
        needed: usize,
    },
    /// Every fix has the same time.
    #[error("all {n} fixes are at one instant ({time} s); nothing to fit")]
    SingleInstant {
        /// Number of fixes.
        n: usize,
        /// Their common time.
        time: f64,
    },
    /// Fix times are not strictly increasing.
    #[error(
        "fix {index} at {time} s is not later than the fix before it; sort and de-duplicate fixes first"
    )]
    NotIncreasing {
        /// Index of the offending fix.
        index: usize,
        /// Its time.
        time: f64,
    },
    /// A fix has a non-finite time or coordinate.
    #[error("fix {index} has a non-finite {field}")]
    NonFinite {
        /// Index of the offending fix.
        index: usize,
        /// Which value.
        field: &'static str,
    },
    /// A covariance is not positive definite.
    #[error("error covariance (xx {xx}, xy {xy}, yy {yy}) is not positive definite")]
    InvalidCovariance {
        /// Variance on x.
        xx: f64,
        /// Covariance.
        xy: f64,
        /// Variance on y.
        yy: f64,
    },
    /// An error ellipse is malformed.
    #[error(
        "error ellipse (semi-major {semi_major}, semi-minor {semi_minor}, orientation {orientation_deg}°) is invalid: axes must be positive with major ≥ minor"
    )]
    InvalidEllipse {
        /// Semi-major axis (m).
        semi_major: f64,
        /// Semi-minor axis (m).
        semi_minor: f64,
        /// Orientation (degrees clockwise from north).
        orientation_deg: f64,
    },
    /// A process parameter is not positive and finite.
    #[error("process parameter {name} = {value} must be finite and positive")]
    InvalidParameter {
        /// Parameter name.
        name: &'static str,
        /// Its value.
        value: f64,
    },
    /// A fix's location class has no observation error (Argos class Z; cleaning drops
    /// those fixes before smoothing).
    #[error(
        "fix {index} has location class {class}, which has no observation error; drop Argos class Z fixes before smoothing"
    )]
    UnusableClass {
        /// Index of the offending fix.
        index: usize,
        /// Its class.
        class: LocClass,
    },
    /// The likelihood could not be maximised or evaluated.
    #[error("the likelihood could not be maximised: {reason}")]
    FitFailed {
        /// What went wrong.
        reason: String,
    },
}

/// A rejected setting.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum ConfigError {
    /// A setting must be finite and positive.
    #[error("setting `{name}` = {value} must be finite and positive")]
    NotPositive {
        /// Setting name.
        name: String,
        /// Its value.
        value: f64,
    },
    /// The outlier quantile must lie strictly between 0 and 1.
    #[error("setting `outliers.quantile` = {0} must lie strictly between 0 and 1")]
    Quantile(f64),
}

/// Optional outlier rule (see the module note).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct OutlierSettings {
    /// Quantile of χ²₂ above which a fix is flagged (e.g. 0.999).
    pub quantile: f64,
    /// Drop flagged fixes and refit once.
    pub drop_and_refit: bool,
}

/// Settings as read from the study file (no checks yet); [`RegularSettings::validate`]
/// turns them into a [`RegularConfig`].
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct RegularSettings {
    /// Per-class observation-error standard deviations.
    pub class_errors: ClassErrors,
    /// Grid interval (s).
    pub interval_s: f64,
    /// Consecutive fixes further apart than this (s) start a new segment.
    pub gap_threshold_s: f64,
    /// A grid point is flagged when the semi-major axis of its 1-σ error ellipse exceeds
    /// this (m).
    pub se_flag_m: f64,
    /// Also estimate a multiplier applied to every fix's error standard deviations.
    pub estimate_error_scale: bool,
    /// Prior standard deviation of the position at each segment's first fix (m).
    pub position_prior_sd_m: f64,
    /// Optional outlier rule.
    pub outliers: Option<OutlierSettings>,
}

impl Default for RegularSettings {
    fn default() -> Self {
        Self {
            class_errors: ClassErrors::default(),
            interval_s: 7_200.0,
            gap_threshold_s: 86_400.0,
            se_flag_m: 5_000.0,
            estimate_error_scale: false,
            position_prior_sd_m: 50_000.0,
            outliers: None,
        }
    }
}

impl RegularSettings {
    /// Check every setting.
    ///
    /// # Errors
    /// [`ConfigError`] naming the first rejected setting.
    pub fn validate(&self) -> Result<RegularConfig, ConfigError> {
        let mut checks: Vec<(String, f64)> = vec![
            ("interval_s".into(), self.interval_s),
            ("gap_threshold_s".into(), self.gap_threshold_s),
            ("se_flag_m".into(), self.se_flag_m),
            ("position_prior_sd_m".into(), self.position_prior_sd_m),
        ];
        for (class, sd) in self.class_errors.iter() {
            checks.push((format!("class_errors.{class:?}.x_m"), sd.x_m));
            checks.push((format!("class_errors.{class:?}.y_m"), sd.y_m));
        }
        for (name, value) in checks {
            if !(value.is_finite() && value > 0.0) {
                return Err(ConfigError::NotPositive { name, value });
            }
        }
        if let Some(o) = &self.outliers
            && !(o.quantile > 0.0 && o.quantile < 1.0)
        {
            return Err(ConfigError::Quantile(o.quantile));
        }
        Ok(RegularConfig {
            settings: self.clone(),
        })
    }
}

/// Validated settings.
#[derive(Debug, Clone, PartialEq)]
pub struct RegularConfig {
    settings: RegularSettings,
}

impl RegularConfig {
    /// The settings this configuration was validated from.
    pub fn settings(&self) -> &RegularSettings {
        &self.settings
    }
}

/// One observed fix in projected metres.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Fix {
    /// Seconds since the Unix epoch (UTC).
    pub time: f64,
    /// Projected x / easting (m).
    pub x: f64,
    /// Projected y / northing (m).
    pub y: f64,
    /// Observation error.
    pub error: ObservationError,
}

/// Number of fixes used in the fit, per location class and with their own covariance.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FixCounts {
    by_class: Vec<(LocClass, usize)>,
    with_covariance: usize,
}

impl FixCounts {
    fn count(fixes: &[Fix]) -> Self {
        let mut per = [0usize; LocClass::ALL.len()];
        let mut with_covariance = 0;
        for f in fixes {
            match f.error {
                ObservationError::Class(c) => per[c.index()] += 1,
                ObservationError::Covariance(_) => with_covariance += 1,
            }
        }
        Self {
            by_class: LocClass::ALL
                .iter()
                .zip(per)
                .filter(|(_, n)| *n > 0)
                .map(|(c, n)| (*c, n))
                .collect(),
            with_covariance,
        }
    }

    /// (class, count) for every class present, best class first.
    pub fn by_class(&self) -> &[(LocClass, usize)] {
        &self.by_class
    }
    /// Fixes whose error came as an explicit covariance.
    pub fn with_covariance(&self) -> usize {
        self.with_covariance
    }
    /// All fixes counted.
    pub fn total(&self) -> usize {
        self.with_covariance + self.by_class.iter().map(|(_, n)| n).sum::<usize>()
    }
}

/// The fitted model of one animal.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FitRecord {
    params: ProcessParams,
    error_scale: Option<f64>,
    log_likelihood: f64,
    converged: bool,
    iterations: u64,
    termination: String,
    optimiser: String,
    refitted: bool,
    fixes: FixCounts,
    gradient_norm: f64,
    working_se: Result<Vec<f64>, String>,
}

/// Two-sided normal quantile for 95 % intervals.
const Z_95: f64 = 1.959_963_984_540_054;

impl FitRecord {
    /// Fitted β and σ (natural scale).
    pub fn params(&self) -> &ProcessParams {
        &self.params
    }
    /// Velocity autocorrelation rate β (s⁻¹).
    pub fn beta(&self) -> f64 {
        self.params.beta()
    }
    /// Velocity variability σ (m s^-3/2).
    pub fn sigma(&self) -> f64 {
        self.params.sigma()
    }
    /// Fitted multiplier on error standard deviations, when it was estimated.
    pub fn error_scale(&self) -> Option<f64> {
        self.error_scale
    }
    /// Maximised log-likelihood of the fixes used.
    pub fn log_likelihood(&self) -> f64 {
        self.log_likelihood
    }
    /// Whether the fit converged: the optimiser reported convergence and the gradient
    /// norm ([`FitRecord::gradient_norm`]) is below 1e-5. A fit that merely stopped
    /// (iteration cap, stalled line search) reports `false`.
    pub fn converged(&self) -> bool {
        self.converged
    }
    /// Optimiser iterations.
    pub fn iterations(&self) -> u64 {
        self.iterations
    }
    /// The optimiser's termination message.
    pub fn termination(&self) -> &str {
        &self.termination
    }
    /// Which optimiser produced the estimate ("L-BFGS", or "Nelder-Mead" when L-BFGS
    /// failed or did not converge and the fallback did better).
    pub fn optimiser(&self) -> &str {
        &self.optimiser
    }
    /// Whether the animal was refitted after dropping outliers.
    pub fn refitted(&self) -> bool {
        self.refitted
    }
    /// Fixes used, by class.
    pub fn fixes(&self) -> &FixCounts {
        &self.fixes
    }
    /// Norm of the gradient of the per-fix negative log-likelihood in the working
    /// parameters (ln β, ln σ[, ln s]) at the estimate.
    pub fn gradient_norm(&self) -> f64 {
        self.gradient_norm
    }
    /// Standard errors of the working parameters (ln β, ln σ[, ln s]) from the inverse
    /// observed information.
    ///
    /// # Errors
    /// The reason they are unavailable (e.g. the information matrix is singular at a flat
    /// or boundary optimum).
    pub fn working_se(&self) -> Result<&[f64], &str> {
        self.working_se.as_deref().map_err(String::as_str)
    }
    /// 95 % interval for β, `exp(ln β̂ ± 1.96 se)`, when standard errors exist.
    pub fn beta_interval(&self) -> Option<(f64, f64)> {
        self.interval(0, self.beta())
    }
    /// 95 % interval for σ, `exp(ln σ̂ ± 1.96 se)`, when standard errors exist.
    pub fn sigma_interval(&self) -> Option<(f64, f64)> {
        self.interval(1, self.sigma())
    }
    /// 95 % interval for the error scale, when it was estimated and standard errors exist.
    pub fn error_scale_interval(&self) -> Option<(f64, f64)> {
        self.error_scale.and_then(|s| self.interval(2, s))
    }
    fn interval(&self, i: usize, estimate: f64) -> Option<(f64, f64)> {
        let se = *self.working_se.as_ref().ok()?.get(i)?;
        Some((estimate * (-Z_95 * se).exp(), estimate * (Z_95 * se).exp()))
    }
}

/// A smoothed location on the regular grid.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct GridPoint {
    /// Time (s since the Unix epoch).
    pub time: f64,
    /// Smoothed x (m).
    pub x: f64,
    /// Smoothed y (m).
    pub y: f64,
    /// Standard error of x (m).
    pub sd_x: f64,
    /// Standard error of y (m).
    pub sd_y: f64,
    /// Covariance of x and y (m²).
    pub cov_xy: f64,
    /// The 1-σ error ellipse's semi-major axis exceeds the SE flag threshold.
    pub large_se: bool,
}

/// A run of fixes with no gap above the threshold, and its grid points.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Segment {
    first_fix_time: f64,
    last_fix_time: f64,
    n_fixes: usize,
    points: Vec<GridPoint>,
}

impl Segment {
    /// Time of the segment's first fix.
    pub fn first_fix_time(&self) -> f64 {
        self.first_fix_time
    }
    /// Time of the segment's last fix.
    pub fn last_fix_time(&self) -> f64 {
        self.last_fix_time
    }
    /// Fixes in the segment (after any outlier removal).
    pub fn n_fixes(&self) -> usize {
        self.n_fixes
    }
    /// Grid points in time order (empty when no grid time falls in the span).
    pub fn points(&self) -> &[GridPoint] {
        &self.points
    }
}

/// A fix whose standardised innovation exceeded the outlier threshold.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct OutlierFlag {
    /// Index of the fix in the input.
    pub fix_index: usize,
    /// Its squared Mahalanobis innovation length.
    pub d2: f64,
    /// Whether it was dropped before the refit.
    pub dropped: bool,
}

/// The result for one animal.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RegularTrack {
    fit: FitRecord,
    segments: Vec<Segment>,
    outliers: Vec<OutlierFlag>,
}

impl RegularTrack {
    /// The fitted model.
    pub fn fit(&self) -> &FitRecord {
        &self.fit
    }
    /// Segments in time order.
    pub fn segments(&self) -> &[Segment] {
        &self.segments
    }
    /// Fixes flagged by the outlier rule (empty when the rule is off).
    pub fn outliers(&self) -> &[OutlierFlag] {
        &self.outliers
    }
    /// All grid points of all segments, in time order.
    pub fn points(&self) -> impl Iterator<Item = &GridPoint> {
        self.segments.iter().flat_map(|s| s.points.iter())
    }
}

/// Check the fixes; return the segment boundaries `[start, end)` as index ranges.
fn check_and_split(fixes: &[Fix], gap: f64) -> Result<Vec<(usize, usize)>, RegularError> {
    for (index, f) in fixes.iter().enumerate() {
        for (field, v) in [("time", f.time), ("x", f.x), ("y", f.y)] {
            if !v.is_finite() {
                return Err(RegularError::NonFinite { index, field });
            }
        }
    }
    if fixes.len() >= 2 && fixes.iter().all(|f| f.time == fixes[0].time) {
        return Err(RegularError::SingleInstant {
            n: fixes.len(),
            time: fixes[0].time,
        });
    }
    let mut bounds = Vec::new();
    let mut start = 0;
    for i in 1..fixes.len() {
        let dt = fixes[i].time - fixes[i - 1].time;
        if dt <= 0.0 {
            return Err(RegularError::NotIncreasing {
                index: i,
                time: fixes[i].time,
            });
        }
        if dt > gap {
            bounds.push((start, i));
            start = i;
        }
    }
    if !fixes.is_empty() {
        bounds.push((start, fixes.len()));
    }
    let intervals = bounds.iter().map(|(a, b)| b - a - 1).sum::<usize>();
    if intervals < MIN_INTERVALS {
        return Err(RegularError::TooFewFixes {
            intervals,
            needed: MIN_INTERVALS,
        });
    }
    Ok(bounds)
}

/// The observation of a fix; `index` is its position in the input, for the error.
fn observation(fix: &Fix, index: usize, errors: &ClassErrors) -> Result<Observation, RegularError> {
    let error = match fix.error {
        ObservationError::Class(class) => {
            let sd = errors
                .get(class)
                .ok_or(RegularError::UnusableClass { index, class })?;
            ErrorCovariance::diagonal(sd.x_m, sd.y_m)?
        }
        ObservationError::Covariance(c) => ErrorCovariance::new(c.xx(), c.xy(), c.yy())?,
    };
    Ok(Observation {
        x: fix.x,
        y: fix.y,
        error,
    })
}

/// Grid times in `[from, to]` on the rule of the module note.
fn grid_times(anchor: f64, interval: f64, from: f64, to: f64) -> Vec<f64> {
    let k0 = ((from - anchor) / interval).ceil() as i64;
    let k1 = ((to - anchor) / interval).floor() as i64;
    (k0..=k1)
        .map(|k| anchor + k as f64 * interval)
        .filter(|t| *t >= from && *t <= to)
        .collect()
}

/// One animal's kept fixes as likelihood segments, with each epoch's index in the input.
struct Prepared {
    segments: Vec<SegmentData>,
    fix_index: Vec<Vec<usize>>,
}

fn prepare(fixes: &[Fix], keep: &[bool], config: &RegularConfig) -> Result<Prepared, RegularError> {
    let kept: Vec<usize> = (0..fixes.len()).filter(|&i| keep[i]).collect();
    let kept_fixes: Vec<Fix> = kept.iter().map(|&i| fixes[i]).collect();
    let bounds = check_and_split(&kept_fixes, config.settings.gap_threshold_s)?;
    let mut segments = Vec::with_capacity(bounds.len());
    let mut fix_index = Vec::with_capacity(bounds.len());
    for (a, b) in bounds {
        let epochs = kept_fixes[a..b]
            .iter()
            .enumerate()
            .map(|(j, f)| {
                Ok(Epoch {
                    time: f.time,
                    observation: Some(observation(f, kept[a + j], &config.settings.class_errors)?),
                })
            })
            .collect::<Result<Vec<_>, RegularError>>()?;
        segments.push(SegmentData { epochs });
        fix_index.push(kept[a..b].to_vec());
    }
    Ok(Prepared {
        segments,
        fix_index,
    })
}

fn run_fit(
    prepared: &Prepared,
    config: &RegularConfig,
    previous: Option<&FitOutcome>,
) -> Result<FitOutcome, RegularError> {
    let n_fixes = prepared.segments.iter().map(|s| s.epochs.len()).sum();
    let problem = Problem {
        segments: &prepared.segments,
        position_sd: config.settings.position_prior_sd_m,
        estimate_error_scale: config.settings.estimate_error_scale,
        n_fixes,
        gradient_cache: std::cell::RefCell::new(None),
    };
    let start = problem.start(previous);
    if !problem.log_likelihood_at(&start).is_finite() {
        return Err(RegularError::FitFailed {
            reason: "the log-likelihood is not finite at the start values".into(),
        });
    }
    problem.fit(start).ok_or_else(|| RegularError::FitFailed {
        reason: "both L-BFGS and Nelder-Mead failed to reach a finite optimum".into(),
    })
}

fn scaled_epochs(epochs: &[Epoch], error_scale: f64) -> Vec<Epoch> {
    let v = error_scale * error_scale;
    epochs
        .iter()
        .map(|e| Epoch {
            time: e.time,
            observation: e.observation.map(|mut o| {
                o.error = o.error.scaled(v);
                o
            }),
        })
        .collect()
}

fn filter_failure(f: FilterFailure) -> RegularError {
    RegularError::FitFailed {
        reason: format!("the filter failed at the fitted parameters: {f:?}"),
    }
}

/// Regularise one animal.
///
/// # Errors
/// [`RegularError`] when the fixes are unusable (too few, one instant, unsorted,
/// non-finite, bad covariance, Argos class Z) or the likelihood cannot be maximised.
///
/// # Examples
/// ```
/// use cairn::tracks::class::LocClass;
/// use cairn::tracks::regular::{Fix, ObservationError, RegularSettings, regularise};
/// let fixes: Vec<Fix> = (0..40)
///     .map(|i| {
///         let t = 1_700_000_000.0 + 1_800.0 * i as f64;
///         let wiggle = if i % 2 == 0 { 150.0 } else { -150.0 };
///         Fix { time: t, x: 500.0 * i as f64 + wiggle, y: 100.0 * i as f64 - wiggle,
///               error: ObservationError::Class(LocClass::Argos2) }
///     })
///     .collect();
/// let config = RegularSettings::default().validate().unwrap();
/// let track = regularise(&fixes, &config).unwrap();
/// assert_eq!(track.segments().len(), 1);
/// assert!(track.points().count() >= 9);
/// ```
pub fn regularise(fixes: &[Fix], config: &RegularConfig) -> Result<RegularTrack, RegularError> {
    let settings = &config.settings;
    let mut keep = vec![true; fixes.len()];
    let mut prepared = prepare(fixes, &keep, config)?;
    let mut outcome = run_fit(&prepared, config, None)?;
    let mut outliers = Vec::new();
    let mut refitted = false;
    if let Some(rule) = &settings.outliers {
        let threshold = -2.0 * (-rule.quantile).ln_1p();
        for (seg, idx) in prepared.segments.iter().zip(&prepared.fix_index) {
            let epochs = scaled_epochs(&seg.epochs, outcome.error_scale);
            let first = epochs[0].observation.expect("segments start with a fix");
            let prior = StatePrior::diffuse_position(
                first.x,
                first.y,
                settings.position_prior_sd_m,
                &outcome.params,
            );
            let out = filter_smooth(&epochs, &outcome.params, &prior).map_err(filter_failure)?;
            for (k, d2) in out.innovation_d2.iter().enumerate() {
                if let Some(d2) = *d2
                    && d2 > threshold
                {
                    outliers.push(OutlierFlag {
                        fix_index: idx[k],
                        d2,
                        dropped: rule.drop_and_refit,
                    });
                }
            }
        }
        if rule.drop_and_refit && !outliers.is_empty() {
            for o in &outliers {
                keep[o.fix_index] = false;
            }
            prepared = prepare(fixes, &keep, config)?;
            outcome = run_fit(&prepared, config, Some(&outcome))?;
            refitted = true;
        }
    }

    let anchor = (fixes[0].time / DAY_S).floor() * DAY_S;
    let mut segments = Vec::with_capacity(prepared.segments.len());
    for seg in &prepared.segments {
        let epochs = scaled_epochs(&seg.epochs, outcome.error_scale);
        let (from, to) = (epochs[0].time, epochs[epochs.len() - 1].time);
        let grid = grid_times(anchor, settings.interval_s, from, to);
        // Merge fix epochs and grid epochs in time order; a grid time equal to a fix
        // time shares that fix's epoch.
        let mut merged = Vec::with_capacity(epochs.len() + grid.len());
        let mut is_grid = Vec::with_capacity(epochs.len() + grid.len());
        let (mut i, mut j) = (0, 0);
        while i < epochs.len() || j < grid.len() {
            if j == grid.len() || (i < epochs.len() && epochs[i].time < grid[j]) {
                merged.push(epochs[i]);
                is_grid.push(false);
                i += 1;
            } else if i < epochs.len() && epochs[i].time == grid[j] {
                merged.push(epochs[i]);
                is_grid.push(true);
                i += 1;
                j += 1;
            } else {
                merged.push(Epoch {
                    time: grid[j],
                    observation: None,
                });
                is_grid.push(true);
                j += 1;
            }
        }
        let first = epochs[0].observation.expect("segments start with a fix");
        let prior = StatePrior::diffuse_position(
            first.x,
            first.y,
            settings.position_prior_sd_m,
            &outcome.params,
        );
        let out = filter_smooth(&merged, &outcome.params, &prior).map_err(filter_failure)?;
        let points = merged
            .iter()
            .zip(&is_grid)
            .enumerate()
            .filter(|(_, (_, g))| **g)
            .map(|(k, (e, _))| {
                let m = &out.smoothed_mean[k];
                let p = &out.smoothed_cov[k];
                let (vxx, vxy, vyy) = (p[(0, 0)], p[(0, 2)], p[(2, 2)]);
                let half_trace = 0.5 * (vxx + vyy);
                let largest = half_trace + (0.25 * (vxx - vyy) * (vxx - vyy) + vxy * vxy).sqrt();
                GridPoint {
                    time: e.time,
                    x: m[0],
                    y: m[2],
                    sd_x: vxx.max(0.0).sqrt(),
                    sd_y: vyy.max(0.0).sqrt(),
                    cov_xy: vxy,
                    large_se: largest.sqrt() > settings.se_flag_m,
                }
            })
            .collect();
        segments.push(Segment {
            first_fix_time: from,
            last_fix_time: to,
            n_fixes: epochs.len(),
            points,
        });
    }
    let kept_fixes: Vec<Fix> = (0..fixes.len())
        .filter(|&i| keep[i])
        .map(|i| fixes[i])
        .collect();
    Ok(RegularTrack {
        fit: FitRecord {
            params: outcome.params,
            error_scale: settings.estimate_error_scale.then_some(outcome.error_scale),
            log_likelihood: outcome.log_likelihood,
            converged: outcome.converged,
            iterations: outcome.iterations,
            termination: outcome.termination,
            optimiser: outcome.optimiser.to_owned(),
            refitted,
            fixes: FixCounts::count(&kept_fixes),
            gradient_norm: outcome.gradient_norm,
            working_se: outcome.working_se,
        },
        segments,
        outliers,
    })
}

/// Regularise many animals in parallel; results are in input order, one per animal.
///
/// # Examples
/// ```
/// use cairn::tracks::regular::{Fix, RegularSettings, regularise_many};
/// let config = RegularSettings::default().validate().unwrap();
/// let animals: Vec<Vec<Fix>> = vec![vec![]];
/// let results = regularise_many(&animals, &config);
/// assert!(results[0].is_err());
/// ```
pub fn regularise_many<A>(
    animals: &[A],
    config: &RegularConfig,
) -> Vec<Result<RegularTrack, RegularError>>
where
    A: AsRef<[Fix]> + Sync,
{
    animals
        .par_iter()
        .map(|a| regularise(a.as_ref(), config))
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn an_argos_z_fix_is_rejected_naming_the_fix() {
        let mut fixes: Vec<Fix> = (0..20)
            .map(|i| Fix {
                time: 1_700_000_000.0 + 1_800.0 * i as f64,
                x: 500.0 * i as f64,
                y: 0.0,
                error: ObservationError::Class(LocClass::Argos2),
            })
            .collect();
        fixes[7].error = ObservationError::Class(LocClass::ArgosZ);
        let config = RegularSettings::default().validate().unwrap();
        assert_eq!(
            regularise(&fixes, &config).unwrap_err(),
            RegularError::UnusableClass {
                index: 7,
                class: LocClass::ArgosZ
            }
        );
    }
}
