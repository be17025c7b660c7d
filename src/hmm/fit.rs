//! Maximum-likelihood fitting: random starts, L-BFGS with the More–Thuente line search
//! (argmin) on the working parameters, exact gradient from the forward–backward pass,
//! then state ordering, Hessian and covariance at the optimum.
//!
//! Starting values are data-driven: state means at quantiles of each stream (the first
//! start at the evenly spaced quantiles (j + ½)/N, the others at sorted uniform quantile
//! levels drawn from a seeded ChaCha8 generator), angles with mean 0 and concentrations
//! spread across states, transitions with intercept −2 (persistence ≈ 0.88 for 2
//! states) plus noise. A start whose evaluation fails numerically is recorded and
//! skipped; if every start fails the error lists why. The fit reports how many starts
//! reached the best optimum (within [`prec::SAME_OPTIMUM_LOGLIK`]), and a fit whose best
//! run did not converge says so in its [`Convergence`] record.
//!
//! Warm-up on a part of the data: with at least [`FitOptions::warmup_min_steps`] steps
//! (default [`WARMUP_MIN_STEPS`]), each start
//! is first optimised (with looser tolerances) on the first 1/[`WARMUP_FRACTION`] of
//! every series, and the full-data L-BFGS run starts from that optimum. Most of an
//! optimisation is spent far from the optimum, where a tenth of the data points the
//! same way at a tenth of the cost; the full-data run then only refines, with the
//! full-data tolerances, so what is reported is a full-data optimum as before. A
//! warm-up that fails leaves the start as it was. Its evaluations are reported apart
//! ([`Convergence::warmup_evaluations`], each on a tenth of the steps).
//!
//! Shared full-data runs: random starts mostly fall into a few basins, and their
//! warm-ups then end at the same few points. A start whose warm-up ends at the same
//! warm-up optimum as an earlier start's (states put in the documented order first;
//! limits [`WARMUP_SAME_LOGLIK`] and [`WARMUP_SAME_PARAM`]) does not repeat the
//! full-data run: L-BFGS would start from the same point, up to the warm-up's own
//! tolerance, and end where the earlier run ended. Its record says so
//! ([`StartRecord::shared_with`]), carries that run's log-likelihood and counts in
//! [`Convergence::n_shared`]. Only warm-ups are compared, so every distinct basin found
//! still gets its own full-data run; without a warm-up (small data) every start runs.
//!
//! # Formula
//! L-BFGS: Nocedal & Wright (2006), *Numerical Optimization*, 2nd ed., Alg. 7.5; line
//! search: Moré & Thuente (1994), ACM TOMS 20(3), 286–307. AIC = −2 log L + 2k,
//! BIC = −2 log L + k ln n with n the number of steps (Zucchini, MacDonald & Langrock
//! 2016, ch. 6).

use std::sync::Mutex;
use std::sync::atomic::{AtomicUsize, Ordering};

use argmin::core::{CostFunction, Error as ArgminError, Executor, Gradient, State};
use argmin::solver::linesearch::MoreThuenteLineSearch;
use argmin::solver::quasinewton::LBFGS;
use nalgebra::DVector;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};
use serde::{Deserialize, Serialize};

use super::data::Data;
use super::dists::Family;
use super::error::HmmError;
use super::forward::{ScratchPool, loglik_grad_pooled};
use super::inference::{Covariance, hessian_covariance};
use super::io::CovariateScaling;
use super::model::Model;
use super::spec::{InitialDistribution, ModelSpec, Params, Prepared, StreamParams, ValidSpec};
use crate::prec;

/// Settings of a fit.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FitOptions {
    /// Number of starts (the first at the data-driven values, the rest random). Default 10.
    pub n_starts: usize,
    /// Seed of the random starts (ChaCha8, portable across platforms).
    pub seed: u64,
    /// Maximum L-BFGS iterations per start. Default 1000.
    pub max_iters: u64,
    /// Optional user starting values, used as the first start.
    pub start: Option<Params>,
    /// Compute the Hessian and covariance at the optimum. Default true.
    pub hessian: bool,
    /// Data sets with at least this many steps get a warm-up of each start on a part of
    /// the data (see the module docs); `usize::MAX` turns it off. Default
    /// [`WARMUP_MIN_STEPS`].
    #[serde(default = "default_warmup_min_steps")]
    pub warmup_min_steps: usize,
    /// Let a start whose warm-up ends where an earlier start's did share that start's
    /// full-data run (see the module docs). Default true; false runs every start in full.
    #[serde(default = "default_share_full_runs")]
    pub share_full_runs: bool,
}

fn default_share_full_runs() -> bool {
    true
}

fn default_warmup_min_steps() -> usize {
    WARMUP_MIN_STEPS
}

impl Default for FitOptions {
    fn default() -> Self {
        FitOptions {
            n_starts: 10,
            seed: 1,
            max_iters: 1000,
            start: None,
            hessian: true,
            warmup_min_steps: WARMUP_MIN_STEPS,
            share_full_runs: true,
        }
    }
}

/// Outcome of one start.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct StartRecord {
    pub index: usize,
    /// Final log-likelihood (None when the start failed).
    pub loglik: Option<f64>,
    pub iterations: u64,
    pub termination: String,
    /// Why the start failed, if it did.
    pub failure: Option<String>,
    /// The earlier start whose full-data run this one shares: its warm-up ended at the
    /// same warm-up optimum (see the module docs), so its full-data run would start
    /// where that start's did.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub shared_with: Option<usize>,
}

/// Convergence record of the selected (best) run.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Convergence {
    pub converged: bool,
    pub iterations: u64,
    /// Sup-norm of the gradient of −log L at the reported estimate.
    pub gradient_norm: f64,
    pub termination: String,
    pub n_starts: usize,
    pub n_failed: usize,
    /// Starts whose log-likelihood is within 1e-4 of the best.
    pub n_at_best: usize,
    /// Log-likelihood + gradient evaluations over all starts (full data).
    pub evaluations: usize,
    /// Starts that shared an earlier start's full-data run because their warm-ups ended
    /// at the same optimum (see the module docs); included in `n_at_best` when that run
    /// is the best.
    #[serde(default)]
    pub n_shared: usize,
    /// Evaluations of the warm-ups on a part of the data (see the module docs), each
    /// over about 1/[`WARMUP_FRACTION`] of the steps.
    #[serde(default)]
    pub warmup_evaluations: usize,
}

/// A fitted model with its diagnostics.
#[derive(Debug, Clone, PartialEq)]
pub struct FittedModel {
    pub(crate) model: Model,
    pub(crate) loglik: f64,
    pub(crate) n_obs: usize,
    pub(crate) convergence: Convergence,
    pub(crate) starts: Vec<StartRecord>,
    pub(crate) covariance: Covariance,
    pub(crate) seed: u64,
    pub(crate) covariate_scaling: Option<Vec<CovariateScaling>>,
}

impl FittedModel {
    /// The model at the estimates (states in the documented order).
    pub fn model(&self) -> &Model {
        &self.model
    }
    pub fn params(&self) -> &Params {
        self.model.params()
    }
    pub fn loglik(&self) -> f64 {
        self.loglik
    }
    /// Number of free parameters k.
    pub fn n_params(&self) -> usize {
        self.model.working().len()
    }
    /// Number of steps n used in the BIC.
    pub fn n_obs(&self) -> usize {
        self.n_obs
    }
    pub fn aic(&self) -> f64 {
        -2.0 * self.loglik + 2.0 * self.n_params() as f64
    }
    pub fn bic(&self) -> f64 {
        -2.0 * self.loglik + self.n_params() as f64 * (self.n_obs as f64).ln()
    }
    pub fn convergence(&self) -> &Convergence {
        &self.convergence
    }
    pub fn starts(&self) -> &[StartRecord] {
        &self.starts
    }
    /// Covariance of the working parameters, or why there is none.
    pub fn covariance(&self) -> &Covariance {
        &self.covariance
    }
    pub fn seed(&self) -> u64 {
        self.seed
    }
    /// Covariate standardisation recorded by the caller (stored in the model file).
    pub fn covariate_scaling(&self) -> Option<&[CovariateScaling]> {
        self.covariate_scaling.as_deref()
    }
    /// Records how the covariates were standardised before fitting.
    pub fn set_covariate_scaling(&mut self, scaling: Vec<CovariateScaling>) {
        self.covariate_scaling = Some(scaling);
    }
}

/// A spec bound to checked data: evaluates log L and its gradient at working vectors.
/// Used by the fit, by the gradient tests and by the benchmark.
pub struct Objective {
    spec: ValidSpec,
    data: Prepared,
    evals: AtomicUsize,
    /// per-thread work buffers of the forward–backward pass, kept between evaluations
    scratch: ScratchPool,
}

impl Objective {
    /// # Errors
    /// Every bad-input error (see [`ValidSpec`]), before any computation.
    pub fn new(spec: &ModelSpec, data: &Data) -> Result<Self, HmmError> {
        let spec = spec.check()?;
        let data = spec.prepare(data)?;
        spec.check_estimable(&data)?;
        Ok(Objective::from_parts(spec, data))
    }
    fn from_parts(spec: ValidSpec, data: Prepared) -> Self {
        Objective {
            spec,
            data,
            evals: AtomicUsize::new(0),
            scratch: ScratchPool::default(),
        }
    }
    /// The objective on the first 1/[`WARMUP_FRACTION`] of every series, when the data
    /// have at least `min_steps` steps.
    fn warmup(&self, min_steps: usize) -> Option<Objective> {
        (self.n_steps() >= min_steps).then(|| {
            let part = self.data.prefixes(|t| t.div_ceil(WARMUP_FRACTION));
            Objective::from_parts(self.spec.clone(), part)
        })
    }
    pub fn valid_spec(&self) -> &ValidSpec {
        &self.spec
    }
    pub fn n_params(&self) -> usize {
        self.spec.n_params()
    }
    pub fn n_steps(&self) -> usize {
        self.data.n_steps
    }
    /// log L and its exact gradient with respect to the working parameters.
    pub fn evaluate(&self, working: &[f64]) -> (f64, Vec<f64>) {
        self.evals.fetch_add(1, Ordering::Relaxed);
        loglik_grad_pooled(&self.spec, &self.data, working, true, &self.scratch)
    }
    /// log L only (forward pass).
    pub fn loglik(&self, working: &[f64]) -> f64 {
        loglik_grad_pooled(&self.spec, &self.data, working, false, &self.scratch).0
    }
    pub fn evaluations(&self) -> usize {
        self.evals.load(Ordering::Relaxed)
    }
    /// Data-driven starting values: `rng = None` gives the deterministic first start.
    pub fn start_values(&self, rng: Option<&mut ChaCha8Rng>) -> Params {
        start_values(&self.spec, &self.data, rng)
    }
}

/// (working vector, mean cost, mean-cost gradient) of the last evaluation.
type CacheEntry = (Vec<f64>, f64, Vec<f64>);

/// argmin's view of the objective: mean −log L per step, with a one-entry cache because
/// the line search asks for the cost and the gradient at the same point.
struct ArgminProblem<'a> {
    obj: &'a Objective,
    scale: f64,
    cache: Mutex<Option<CacheEntry>>,
}

impl ArgminProblem<'_> {
    fn eval(&self, p: &DVector<f64>) -> Result<(f64, Vec<f64>), ArgminError> {
        let x: Vec<f64> = p.iter().copied().collect();
        if let Some((_, c, g)) = self
            .cache
            .lock()
            .expect("cache lock")
            .as_ref()
            .filter(|e| e.0 == x)
        {
            return Ok((*c, g.clone()));
        }
        let (ll, g) = self.obj.evaluate(&x);
        if !ll.is_finite() || g.iter().any(|v| !v.is_finite()) {
            return Err(ArgminError::msg(format!(
                "log-likelihood not finite ({ll}) at the current parameters"
            )));
        }
        let c = -ll / self.scale;
        let g: Vec<f64> = g.iter().map(|v| -v / self.scale).collect();
        *self.cache.lock().expect("cache lock") = Some((x, c, g.clone()));
        Ok((c, g))
    }
}

impl CostFunction for ArgminProblem<'_> {
    type Param = DVector<f64>;
    type Output = f64;
    fn cost(&self, p: &Self::Param) -> Result<f64, ArgminError> {
        Ok(self.eval(p)?.0)
    }
}

impl Gradient for ArgminProblem<'_> {
    type Param = DVector<f64>;
    type Gradient = DVector<f64>;
    fn gradient(&self, p: &Self::Param) -> Result<DVector<f64>, ArgminError> {
        Ok(DVector::from_vec(self.eval(p)?.1))
    }
}

/// Number of correction pairs L-BFGS keeps. The working parameters of these models mix
/// very different curvatures (concentrations, log-scales, logit slopes); a longer memory
/// than the textbook 5–10 cut the iterations of the recovery test from 479 (m = 10) to
/// 133 (m = 25) and 102 (m = 50); the two-loop recursion stays negligible next to one
/// likelihood evaluation.
const LBFGS_MEMORY: usize = 50;

/// Default of [`FitOptions::warmup_min_steps`]: below it a fit is quick anyway.
pub const WARMUP_MIN_STEPS: usize = 100_000;

/// The warm-up uses the first ⌈T/`WARMUP_FRACTION`⌉ steps of each series.
pub const WARMUP_FRACTION: usize = 10;

/// Gradient tolerance of the warm-up (mean per step, as [`prec::OPTIM_GRAD_TOL`]): its
/// optimum differs from the full-data one by sampling error far larger than this, so
/// polishing it further buys nothing.
const WARMUP_GRAD_TOL: f64 = 1e-5;

/// Cost tolerance of the warm-up (mean per step, as [`prec::OPTIM_COST_TOL`]).
const WARMUP_COST_TOL: f64 = 1e-10;

/// Two warm-ups ended at the same optimum when their warm-up log-likelihoods differ by
/// less than [`WARMUP_SAME_LOGLIK`] and no working parameter (states in the documented
/// order) differs by more than [`WARMUP_SAME_PARAM`]. The warm-up stops at a loose
/// tolerance ([`WARMUP_GRAD_TOL`]), so runs that found the same optimum end apart by up
/// to ~2e-3 in the parameters and ~2e-4 in log L (measured on the W1 benchmark, 10
/// starts), while distinct optima there differ by hundreds; the limits are about five
/// times the former.
const WARMUP_SAME_LOGLIK: f64 = 1e-3;

/// See [`WARMUP_SAME_LOGLIK`].
const WARMUP_SAME_PARAM: f64 = 1e-2;

/// Iteration cap of the warm-up.
const WARMUP_MAX_ITERS: u64 = 300;

struct RunResult {
    theta: Vec<f64>,
    loglik: f64,
    iterations: u64,
    termination: String,
    solver_converged: bool,
}

fn run_lbfgs(obj: &Objective, th0: Vec<f64>, max_iters: u64) -> Result<RunResult, String> {
    run_lbfgs_tol(
        obj,
        th0,
        max_iters,
        prec::OPTIM_GRAD_TOL,
        prec::OPTIM_COST_TOL,
    )
}

fn run_lbfgs_tol(
    obj: &Objective,
    th0: Vec<f64>,
    max_iters: u64,
    grad_tol: f64,
    cost_tol: f64,
) -> Result<RunResult, String> {
    let scale = obj.n_steps().max(1) as f64;
    let problem = ArgminProblem {
        obj,
        scale,
        cache: Mutex::new(None),
    };
    let ls = MoreThuenteLineSearch::new();
    let solver = LBFGS::new(ls, LBFGS_MEMORY)
        .with_tolerance_grad(grad_tol)
        .and_then(|s| s.with_tolerance_cost(cost_tol))
        .map_err(|e| e.to_string())?;
    let res = Executor::new(problem, solver)
        .configure(|state| state.param(DVector::from_vec(th0)).max_iters(max_iters))
        .run()
        .map_err(|e| e.to_string())?;
    let state = res.state();
    let theta: Vec<f64> = state
        .get_best_param()
        .ok_or_else(|| "the optimiser returned no parameters".to_string())?
        .iter()
        .copied()
        .collect();
    let reason = state.get_termination_reason().cloned();
    let termination = reason
        .as_ref()
        .map_or("not terminated".into(), |r| r.text().to_string());
    let solver_converged = matches!(
        reason,
        Some(argmin::core::TerminationReason::SolverConverged)
    );
    let loglik = -state.get_best_cost() * scale;
    if !loglik.is_finite() {
        return Err(format!("non-finite log-likelihood at the end ({loglik})"));
    }
    Ok(RunResult {
        theta,
        loglik,
        iterations: state.get_iter(),
        termination,
        solver_converged,
    })
}

/// Fits `spec` to `data` by maximum likelihood.
///
/// # Errors
/// Every bad-input error before any fitting; [`HmmError::AllStartsFailed`] when no start
/// produced a finite optimum (with each start's reason).
///
/// # Examples
/// ```
/// use cairn::hmm::{data::{Data, Series}, dists::Family, fit::{fit, FitOptions},
///                  spec::{ModelSpec, StreamSpec}};
/// let x: Vec<f64> = (0..200).map(|t| if (t / 20) % 2 == 0 { 1.0 + (t % 7) as f64 * 0.1 }
///                                      else { 8.0 + (t % 5) as f64 }).collect();
/// let data = Data::new(vec!["step".into()], vec![], vec![Series::new("a", vec![x], vec![])])?;
/// let spec = ModelSpec::new(2, vec![StreamSpec::new("step", Family::Gamma)]);
/// let opts = FitOptions { n_starts: 2, hessian: false, ..FitOptions::default() };
/// let fitted = fit(&spec, &data, &opts)?;
/// assert!(fitted.params().streams[0].per_state[0][0] < fitted.params().streams[0].per_state[1][0]);
/// # Ok::<(), cairn::hmm::error::HmmError>(())
/// ```
pub fn fit(spec: &ModelSpec, data: &Data, opts: &FitOptions) -> Result<FittedModel, HmmError> {
    let obj = Objective::new(spec, data)?;
    fit_objective(&obj, opts)
}

/// What [`fit_objective_with_progress`] reports while it works.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum FitProgress {
    /// Start `index` (0-based) of `of` has ended, with its log-likelihood (`None` when it
    /// failed).
    StartDone {
        /// Which start.
        index: usize,
        /// How many starts there are.
        of: usize,
        /// Its final log-likelihood.
        loglik: Option<f64>,
    },
    /// Every start has ended; the Hessian at the best optimum is being computed.
    Hessian,
}

/// Fits with an already checked objective (see [`fit`]).
///
/// # Errors
/// As [`fit`].
pub fn fit_objective(obj: &Objective, opts: &FitOptions) -> Result<FittedModel, HmmError> {
    fit_objective_with_progress(obj, opts, &mut |_| {})
}

/// [`fit_objective`], calling `progress` after each start and before the Hessian.
///
/// # Errors
/// As [`fit`].
pub fn fit_objective_with_progress(
    obj: &Objective,
    opts: &FitOptions,
    progress: &mut dyn FnMut(FitProgress),
) -> Result<FittedModel, HmmError> {
    let n_starts = opts.n_starts.max(1);
    let vspec = obj.valid_spec().clone();
    let mut rng = ChaCha8Rng::seed_from_u64(opts.seed);
    let mut starts = Vec::new();
    let mut best: Option<(usize, RunResult)> = None;
    let warm = obj.warmup(opts.warmup_min_steps);
    // distinct warm-up optima so far whose full-data run succeeded, each with the
    // start that reached it first
    let mut warm_ends: Vec<WarmEnd> = Vec::new();
    for k in 0..n_starts {
        let params = match (k, &opts.start) {
            (0, Some(p)) => p.clone(),
            (0, None) => obj.start_values(None),
            _ => obj.start_values(Some(&mut rng)),
        };
        let record = match vspec.to_working(&params) {
            Err(e) => StartRecord {
                index: k,
                loglik: None,
                iterations: 0,
                termination: "invalid start".into(),
                failure: Some(e.to_string()),
                shared_with: None,
            },
            Ok(th0) => {
                // warm-up, then the full-data run unless the warm-up ended where an
                // earlier start's did (whose full-data run then serves for both)
                let mut warm_end = None;
                let th0 = match &warm {
                    Some(w) => match run_lbfgs_tol(
                        w,
                        th0.clone(),
                        WARMUP_MAX_ITERS.min(opts.max_iters),
                        WARMUP_GRAD_TOL,
                        WARMUP_COST_TOL,
                    ) {
                        Ok(r) => {
                            if opts.share_full_runs {
                                warm_end = canonical(&vspec, &r.theta).map(|c| (r.loglik, c));
                            }
                            r.theta
                        }
                        Err(_) => th0,
                    },
                    None => th0,
                };
                let shared = warm_end
                    .as_ref()
                    .and_then(|(ll, c)| warm_ends.iter().find(|e| e.same(*ll, c)));
                match shared {
                    Some(e) => StartRecord {
                        index: k,
                        loglik: Some(e.full_loglik),
                        iterations: 0,
                        termination: format!(
                            "same warm-up optimum as the start of index {}: shares its \
                             full-data run",
                            e.start
                        ),
                        failure: None,
                        shared_with: Some(e.start),
                    },
                    None => match run_lbfgs(obj, th0, opts.max_iters) {
                        Ok(r) => {
                            // only a full-data run that succeeded is shared
                            if let Some((warm_loglik, canon)) = warm_end {
                                warm_ends.push(WarmEnd {
                                    start: k,
                                    warm_loglik,
                                    canon,
                                    full_loglik: r.loglik,
                                });
                            }
                            let record = StartRecord {
                                index: k,
                                loglik: Some(r.loglik),
                                iterations: r.iterations,
                                termination: r.termination.clone(),
                                failure: None,
                                shared_with: None,
                            };
                            if best.as_ref().is_none_or(|(_, b)| r.loglik > b.loglik) {
                                best = Some((k, r));
                            }
                            record
                        }
                        Err(e) => StartRecord {
                            index: k,
                            loglik: None,
                            iterations: 0,
                            termination: "failed".into(),
                            failure: Some(e),
                            shared_with: None,
                        },
                    },
                }
            }
        };
        progress(FitProgress::StartDone {
            index: k,
            of: n_starts,
            loglik: record.loglik,
        });
        starts.push(record);
    }
    let Some((_, best)) = best else {
        let why: Vec<String> = starts
            .iter()
            .map(|s| format!("start {}: {}", s.index, s.failure.as_deref().unwrap_or("?")))
            .collect();
        return Err(HmmError::AllStartsFailed(why.join("; ")));
    };
    let n_at_best = starts
        .iter()
        .filter(|s| {
            s.loglik
                .is_some_and(|l| (l - best.loglik).abs() < prec::SAME_OPTIMUM_LOGLIK)
        })
        .count();
    let n_failed = starts.iter().filter(|s| s.failure.is_some()).count();
    // documented state order, then everything else at the reordered estimate
    let theta = canonical(&vspec, &best.theta).unwrap_or(best.theta.clone());
    let (ll, grad) = obj.evaluate(&theta);
    let gradient_norm = grad.iter().fold(0.0_f64, |m, g| m.max(g.abs()));
    let n = obj.n_steps();
    let converged =
        best.solver_converged && gradient_norm <= prec::CONVERGED_GRAD * (n as f64).sqrt().max(1.0);
    let covariance = if opts.hessian {
        progress(FitProgress::Hessian);
        hessian_covariance(obj, &theta)
    } else {
        Covariance::NotComputed
    };
    let convergence = Convergence {
        converged,
        iterations: best.iterations,
        gradient_norm,
        termination: best.termination.clone(),
        n_starts: starts.len(),
        n_failed,
        n_at_best,
        n_shared: starts.iter().filter(|s| s.shared_with.is_some()).count(),
        evaluations: obj.evaluations(),
        warmup_evaluations: warm.as_ref().map_or(0, Objective::evaluations),
    };
    Ok(FittedModel {
        model: Model::from_working(vspec, theta),
        loglik: ll,
        n_obs: n,
        convergence,
        starts,
        covariance,
        seed: opts.seed,
        covariate_scaling: None,
    })
}

/// Where a start's warm-up ended (its log-likelihood on the warm-up data and its
/// working parameters with the states in the documented order, so that two runs that
/// found the same optimum with the states labelled differently compare equal), and
/// where its full-data run ended.
struct WarmEnd {
    start: usize,
    warm_loglik: f64,
    canon: Vec<f64>,
    full_loglik: f64,
}

impl WarmEnd {
    /// Did a warm-up that ended at (`warm_loglik`, `canon`) reach this same optimum?
    fn same(&self, warm_loglik: f64, canon: &[f64]) -> bool {
        (self.warm_loglik - warm_loglik).abs() < WARMUP_SAME_LOGLIK
            && self
                .canon
                .iter()
                .zip(canon)
                .all(|(a, b)| (a - b).abs() <= WARMUP_SAME_PARAM)
    }
}

/// Working parameters with the states in the documented order (`None` if they cannot
/// be converted back).
fn canonical(spec: &ValidSpec, theta: &[f64]) -> Option<Vec<f64>> {
    let nat = spec.to_natural(theta);
    let perm = spec.order_states(&nat);
    spec.to_working(&spec.permute(&nat, &perm)).ok()
}

fn quantile(sorted: &[f64], q: f64) -> f64 {
    if sorted.is_empty() {
        return f64::NAN;
    }
    let pos = q.clamp(0.0, 1.0) * (sorted.len() - 1) as f64;
    let (lo, hi) = (pos.floor() as usize, pos.ceil() as usize);
    sorted[lo] + (sorted[hi] - sorted[lo]) * (pos - lo as f64)
}

fn start_values(spec: &ValidSpec, data: &Prepared, mut rng: Option<&mut ChaCha8Rng>) -> Params {
    let n = spec.n_states();
    let p = spec.n_covariates();
    let levels: Vec<f64> = match rng.as_deref_mut() {
        None => (0..n).map(|j| (j as f64 + 0.5) / n as f64).collect(),
        Some(r) => {
            let mut v: Vec<f64> = (0..n).map(|_| r.random_range(0.05..0.95)).collect();
            v.sort_by(f64::total_cmp);
            v
        }
    };
    let normal = |r: &mut Option<&mut ChaCha8Rng>, sd: f64| -> f64 {
        match r.as_deref_mut() {
            Some(r) => {
                let z: f64 = StandardNormal.sample(r);
                z * sd
            }
            None => 0.0,
        }
    };
    let mut streams = Vec::new();
    for (k, s) in spec.spec().streams.iter().enumerate() {
        let fam = s.family;
        let mut vals: Vec<f64> = Vec::new();
        let mut zeros = 0usize;
        for ser in &data.series {
            for f in &ser.feats[k] {
                let u = f[0];
                if u.is_nan() {
                    continue;
                }
                match fam {
                    _ if fam.is_circular() => vals.push(f[1].atan2(f[0])),
                    _ if fam.is_positive() && u == 0.0 => zeros += 1,
                    _ => vals.push(u),
                }
            }
        }
        vals.sort_by(f64::total_cmp);
        let mean_all = vals.iter().sum::<f64>() / vals.len().max(1) as f64;
        let sd_all = (vals.iter().map(|v| (v - mean_all).powi(2)).sum::<f64>()
            / vals.len().max(1) as f64)
            .sqrt()
            .max(1e-3);
        let per_state: Vec<Vec<f64>> = (0..n)
            .map(|j| {
                let q = quantile(&vals, levels[j]);
                let kappa_step = (j as f64 + 1.0) / n as f64;
                match fam {
                    Family::Gamma => {
                        let m = q.max(1e-8);
                        vec![m, m * (0.8 * normal(&mut rng, 0.3)).exp()]
                    }
                    Family::Weibull => vec![(normal(&mut rng, 0.3)).exp(), q.max(1e-8)],
                    Family::LogNormal => vec![q.max(1e-8).ln(), 0.8 * normal(&mut rng, 0.3).exp()],
                    Family::Normal => {
                        vec![q, sd_all / (n as f64).sqrt() * normal(&mut rng, 0.3).exp()]
                    }
                    Family::Poisson => vec![q.max(0.1)],
                    Family::VonMises => {
                        vec![
                            normal(&mut rng, 0.3),
                            2.0 * kappa_step * normal(&mut rng, 0.5).exp(),
                        ]
                    }
                    Family::WrappedCauchy => vec![
                        normal(&mut rng, 0.3),
                        (0.7 * kappa_step * normal(&mut rng, 0.3).exp()).min(0.9),
                    ],
                }
            })
            .collect();
        let zero_mass = s.zero_mass.then(|| {
            let total = zeros + vals.len();
            let z = (zeros as f64 / total.max(1) as f64).clamp(1e-3, 0.5);
            vec![z; n]
        });
        streams.push(StreamParams {
            per_state,
            zero_mass,
        });
    }
    let mut beta = Vec::with_capacity(n * (n - 1) * (1 + p));
    for _ in 0..n * (n - 1) {
        beta.push(-2.0 + normal(&mut rng, 0.5));
        for _ in 0..p {
            beta.push(normal(&mut rng, 0.1));
        }
    }
    let delta = match spec.spec().initial {
        InitialDistribution::Estimated => Some(vec![1.0 / n as f64; n]),
        InitialDistribution::Stationary => None,
    };
    Params {
        streams,
        beta,
        delta,
    }
}
