//! Maximum-likelihood fit of the process parameters (and optionally a multiplier on all
//! observation-error standard deviations) for one animal.
//!
//! The optimiser works on `θ = (ln β, ln σ[, ln s])` and minimises the negative
//! log-likelihood per fix, so tolerances mean the same for short and long tracks. The
//! gradient is a central finite difference. L-BFGS (More–Thuente line search) runs
//! first; if it fails or does not converge, Nelder–Mead restarts from its best point
//! (or the start) and the better of the two estimates is kept. A fit counts as converged only when the optimiser reports convergence
//! *and* the gradient norm at the estimate is below [`CONVERGED_GRAD`]. At the optimum
//! the observed information (minus the finite-difference Hessian of the total
//! log-likelihood in θ) gives standard errors of θ, hence log-scale Wald intervals
//! `exp(θ ± z se)` for β and σ. Starts: β from a short list of multiples of the median
//! fix interval, σ matched to the apparent velocity variance after removing the error
//! contribution; the start with the best likelihood is used.

use std::cell::RefCell;

use argmin::core::{
    CostFunction, Error as ArgminError, Executor, Gradient, State, TerminationReason,
};
use argmin::solver::linesearch::MoreThuenteLineSearch;
use argmin::solver::neldermead::NelderMead;
use argmin::solver::quasinewton::LBFGS;
use nalgebra::{DMatrix, DVector};

use super::kalman::{Epoch, StatePrior, log_likelihood};
use super::process::ProcessParams;

/// Central-difference step on the log scale: truncation error ~h² ≈ 1e-10 relative,
/// rounding error ~ε|f|/h ≈ 1e-11 for a per-fix cost of order 10.
const GRADIENT_STEP: f64 = 1e-5;
/// Working parameters beyond ±60 (e.g. β < 1e-26 s⁻¹) mean the optimiser has run off
/// to a boundary; the cost is infinite there so line searches step back.
const WORKING_BOUND: f64 = 60.0;
/// Gradient-norm tolerance on the per-fix cost: a change of 1e-7 per fix in θ units.
const TOL_GRAD: f64 = 1e-7;
/// Absolute change of the per-fix cost (of order 10) at which L-BFGS stops: ~1e-14
/// relative, i.e. only at an optimum or a stalled line search; the gradient check of
/// [`CONVERGED_GRAD`] tells the two apart.
const TOL_COST: f64 = 1e-13;
/// Largest gradient norm of the per-fix cost accepted as converged. Its effect on θ is
/// about this over the per-fix curvature (≳ 0.01 for these parameters), ≤ 1e-3, well
/// below the standard errors of tracks long enough to fit (≳ 0.03).
pub(crate) const CONVERGED_GRAD: f64 = 1e-5;
/// Second-difference step for the Hessian (θ units). Rounding error of a second
/// difference is ~4ε|ℓ|/h² ≈ 1e-7 of the curvature for a track of thousands of fixes,
/// truncation ~h²/12 relative: 1e-3 balances the two.
const HESSIAN_STEP: f64 = 1e-3;
const MAX_ITERS_LBFGS: u64 = 200;
const MAX_ITERS_NELDER_MEAD: u64 = 1_000;
/// Nelder–Mead stops when the simplex's cost standard deviation falls below this.
const NM_SD_TOL: f64 = 1e-12;

/// One segment's epochs, every one with a fix, in time order.
pub(crate) struct SegmentData {
    pub epochs: Vec<Epoch>,
}

/// The likelihood problem of one animal.
pub(crate) struct Problem<'a> {
    pub segments: &'a [SegmentData],
    pub position_sd: f64,
    pub estimate_error_scale: bool,
    pub n_fixes: usize,
    /// The last gradient computed and where (see `Gradient::gradient`).
    pub gradient_cache: RefCell<Option<(Vec<f64>, Vec<f64>)>>,
}

/// What the optimiser returned.
pub(crate) struct FitOutcome {
    pub params: ProcessParams,
    pub error_scale: f64,
    pub log_likelihood: f64,
    pub converged: bool,
    pub iterations: u64,
    pub termination: String,
    pub optimiser: &'static str,
    /// Euclidean norm of the per-fix cost gradient at the estimate.
    pub gradient_norm: f64,
    /// Standard errors of θ, or why there are none.
    pub working_se: Result<Vec<f64>, String>,
}

impl Problem<'_> {
    fn unpack(&self, theta: &[f64]) -> Option<(ProcessParams, f64)> {
        if theta
            .iter()
            .any(|v| !v.is_finite() || v.abs() > WORKING_BOUND)
        {
            return None;
        }
        let params = ProcessParams::new(theta[0].exp(), theta[1].exp()).ok()?;
        let scale = if self.estimate_error_scale {
            theta[2].exp()
        } else {
            1.0
        };
        Some((params, scale))
    }

    /// Total log-likelihood at working parameters (−∞ where it cannot be evaluated).
    pub fn log_likelihood_at(&self, theta: &[f64]) -> f64 {
        let Some((params, scale)) = self.unpack(theta) else {
            return f64::NEG_INFINITY;
        };
        let variance_factor = scale * scale;
        let mut total = 0.0;
        let mut scaled = Vec::new();
        for seg in self.segments {
            let epochs: &[Epoch] = if self.estimate_error_scale {
                scaled.clear();
                scaled.extend(seg.epochs.iter().map(|e| Epoch {
                    time: e.time,
                    observation: e.observation.map(|mut o| {
                        o.error = o.error.scaled(variance_factor);
                        o
                    }),
                }));
                &scaled
            } else {
                &seg.epochs
            };
            let first = epochs[0].observation.expect("segments start with a fix");
            let prior = StatePrior::diffuse_position(first.x, first.y, self.position_sd, &params);
            match log_likelihood(epochs, &params, &prior) {
                Ok(ll) if ll.is_finite() => total += ll,
                _ => return f64::NEG_INFINITY,
            }
        }
        total
    }

    fn cost_at(&self, theta: &[f64]) -> f64 {
        let ll = self.log_likelihood_at(theta);
        if ll.is_finite() {
            -ll / self.n_fixes as f64
        } else {
            f64::INFINITY
        }
    }

    /// Start values (see the module note).
    pub fn start(&self, previous: Option<&FitOutcome>) -> Vec<f64> {
        if let Some(prev) = previous {
            return self.pack(prev);
        }
        let mut dts = Vec::new();
        let mut apparent = Vec::new();
        for seg in self.segments {
            for pair in seg.epochs.windows(2) {
                let (a, b) = (pair[0].observation.unwrap(), pair[1].observation.unwrap());
                let dt = pair[1].time - pair[0].time;
                dts.push(dt);
                let (dx, dy) = (b.x - a.x, b.y - a.y);
                let raw = 0.5 * (dx * dx + dy * dy);
                let noise = 0.5 * (a.error.xx() + a.error.yy() + b.error.xx() + b.error.yy());
                // Keep at least a tenth of the raw spread so the start stays positive.
                apparent.push((raw - noise).max(0.1 * raw) / (dt * dt));
            }
        }
        let median = |v: &mut Vec<f64>| {
            v.sort_by(f64::total_cmp);
            v[v.len() / 2]
        };
        let dt_med = median(&mut dts).max(1.0);
        let v_var = median(&mut apparent).max(1e-12);
        let mut best: Option<(f64, Vec<f64>)> = None;
        for multiple in [1.0, 10.0, 100.0] {
            let beta = 1.0 / (multiple * dt_med);
            let sigma = (2.0 * beta * v_var).sqrt();
            let mut theta = vec![beta.ln(), sigma.ln()];
            if self.estimate_error_scale {
                theta.push(0.0);
            }
            let c = self.cost_at(&theta);
            if best.as_ref().is_none_or(|(bc, _)| c < *bc) {
                best = Some((c, theta));
            }
        }
        best.expect("three starts tried").1
    }

    /// L-BFGS; if it fails or does not converge, Nelder–Mead from L-BFGS's best point
    /// (or the start), keeping whichever estimate has the higher likelihood.
    pub fn fit(&self, start: Vec<f64>) -> Option<FitOutcome> {
        let first = self.fit_lbfgs(start.clone());
        if first.as_ref().is_some_and(|o| o.converged) {
            return first;
        }
        let restart = first.as_ref().map_or(start, |o| self.pack(o));
        let second = self.fit_nelder_mead(restart);
        match (first, second) {
            (Some(a), Some(b)) => Some(if b.log_likelihood >= a.log_likelihood {
                b
            } else {
                a
            }),
            (a, b) => a.or(b),
        }
    }

    fn pack(&self, outcome: &FitOutcome) -> Vec<f64> {
        let mut theta = vec![outcome.params.beta().ln(), outcome.params.sigma().ln()];
        if self.estimate_error_scale {
            theta.push(outcome.error_scale.ln());
        }
        theta
    }

    fn outcome(
        &self,
        theta: &[f64],
        iterations: u64,
        reason: Option<&TerminationReason>,
        optimiser: &'static str,
    ) -> Option<FitOutcome> {
        let (params, error_scale) = self.unpack(theta)?;
        let ll = self.log_likelihood_at(theta);
        if !ll.is_finite() {
            return None;
        }
        let gradient_norm = self
            .central_gradient(theta)
            .iter()
            .map(|g| g * g)
            .sum::<f64>()
            .sqrt();
        let converged = matches!(reason, Some(TerminationReason::SolverConverged))
            && gradient_norm < CONVERGED_GRAD;
        Some(FitOutcome {
            gradient_norm,
            working_se: self.working_se(theta),
            params,
            error_scale,
            log_likelihood: ll,
            converged,
            iterations,
            termination: reason.map_or_else(|| "unknown".to_owned(), |r| r.text().to_owned()),
            optimiser,
        })
    }

    fn fit_lbfgs(&self, start: Vec<f64>) -> Option<FitOutcome> {
        let linesearch = MoreThuenteLineSearch::new();
        let solver = LBFGS::new(linesearch, 7)
            .with_tolerance_grad(TOL_GRAD)
            .ok()?
            .with_tolerance_cost(TOL_COST)
            .ok()?;
        let result = Executor::new(self, solver)
            .configure(|s| s.param(DVector::from_vec(start)).max_iters(MAX_ITERS_LBFGS))
            .run()
            .ok()?;
        let state = result.state();
        let best = state.get_best_param()?;
        if !state.get_best_cost().is_finite() {
            return None;
        }
        self.outcome(
            best.as_slice(),
            state.get_iter(),
            state.get_termination_reason(),
            "L-BFGS",
        )
    }

    fn fit_nelder_mead(&self, start: Vec<f64>) -> Option<FitOutcome> {
        let mut simplex = vec![DVector::from_vec(start.clone())];
        for i in 0..start.len() {
            let mut v = start.clone();
            v[i] += 0.5;
            simplex.push(DVector::from_vec(v));
        }
        let solver = NelderMead::new(simplex).with_sd_tolerance(NM_SD_TOL).ok()?;
        let result = Executor::new(self, solver)
            .configure(|s| s.max_iters(MAX_ITERS_NELDER_MEAD))
            .run()
            .ok()?;
        let state = result.state();
        let best = state.get_best_param()?;
        self.outcome(
            best.as_slice(),
            state.get_iter(),
            state.get_termination_reason(),
            "Nelder-Mead",
        )
    }
}

impl Problem<'_> {
    fn central_gradient(&self, theta: &[f64]) -> Vec<f64> {
        let mut probe = theta.to_vec();
        (0..theta.len())
            .map(|i| {
                probe[i] = theta[i] + GRADIENT_STEP;
                let up = self.cost_at(&probe);
                probe[i] = theta[i] - GRADIENT_STEP;
                let down = self.cost_at(&probe);
                probe[i] = theta[i];
                (up - down) / (2.0 * GRADIENT_STEP)
            })
            .collect()
    }

    /// Standard errors of θ from the inverse observed information.
    fn working_se(&self, theta: &[f64]) -> Result<Vec<f64>, String> {
        let p = theta.len();
        let h = HESSIAN_STEP;
        let f = |d: &[(usize, f64)]| {
            let mut t = theta.to_vec();
            for &(i, step) in d {
                t[i] += step;
            }
            self.log_likelihood_at(&t)
        };
        let f0 = f(&[]);
        let mut info = DMatrix::zeros(p, p);
        for i in 0..p {
            let second = (f(&[(i, h)]) - 2.0 * f0 + f(&[(i, -h)])) / (h * h);
            info[(i, i)] = -second;
            for j in 0..i {
                let cross = (f(&[(i, h), (j, h)]) - f(&[(i, h), (j, -h)]) - f(&[(i, -h), (j, h)])
                    + f(&[(i, -h), (j, -h)]))
                    / (4.0 * h * h);
                info[(i, j)] = -cross;
                info[(j, i)] = -cross;
            }
        }
        if info.iter().any(|v| !v.is_finite()) {
            return Err("the log-likelihood is not finite next to the estimate".into());
        }
        let chol = info.cholesky().ok_or_else(|| {
            "the observed information is not positive definite (flat or boundary optimum)"
                .to_owned()
        })?;
        let cov = chol.inverse();
        Ok((0..p).map(|i| cov[(i, i)].sqrt()).collect())
    }
}

impl CostFunction for &Problem<'_> {
    type Param = DVector<f64>;
    type Output = f64;
    fn cost(&self, theta: &Self::Param) -> Result<f64, ArgminError> {
        Ok(self.cost_at(theta.as_slice()))
    }
}

impl Gradient for &Problem<'_> {
    type Param = DVector<f64>;
    type Gradient = DVector<f64>;
    fn gradient(&self, theta: &Self::Param) -> Result<DVector<f64>, ArgminError> {
        // L-BFGS asks for the gradient at each accepted point twice (once in the line
        // search, once in its own step); each costs 2p likelihood passes, so the last
        // one is remembered. Exact equality of θ is the right key: same θ, same value.
        let mut cache = self.gradient_cache.borrow_mut();
        if let Some((at, g)) = cache.as_ref()
            && at.as_slice() == theta.as_slice()
        {
            return Ok(DVector::from_vec(g.clone()));
        }
        let g = self.central_gradient(theta.as_slice());
        *cache = Some((theta.as_slice().to_vec(), g.clone()));
        Ok(DVector::from_vec(g))
    }
}

#[cfg(test)]
mod tests {
    //! The two optimisers must agree: L-BFGS is the everyday path, Nelder–Mead the
    //! fallback, and a fallback that finds a different optimum would go unnoticed.

    use super::*;
    use crate::tracks::regular::kalman::Observation;
    use crate::tracks::regular::observation::ErrorCovariance;
    use crate::tracks::regular::process::axis_step;
    use rand::SeedableRng;
    use rand_chacha::ChaCha8Rng;
    use rand_distr::{Distribution, Normal};

    fn simulated_segment(n: usize) -> SegmentData {
        let mut rng = ChaCha8Rng::seed_from_u64(11);
        let std = Normal::new(0.0, 1.0).unwrap();
        let params = ProcessParams::new(1.0 / 7200.0, 0.008).unwrap();
        let mut state = [0.0, 0.3, 0.0, -0.2];
        let mut time = 0.0;
        let mut epochs = Vec::with_capacity(n);
        for k in 0..n {
            let dt = 600.0 + 3000.0 * ((k * 7919) % 13) as f64 / 13.0;
            let step = axis_step(&params, dt);
            let l = step.covariance.cholesky().unwrap().l();
            for o in [0, 2] {
                let (z0, z1) = (std.sample(&mut rng), std.sample(&mut rng));
                let (p, v) = (state[o], state[o + 1]);
                state[o] = p + step.transition[(0, 1)] * v + l[(0, 0)] * z0;
                state[o + 1] = step.transition[(1, 1)] * v + l[(1, 0)] * z0 + l[(1, 1)] * z1;
            }
            time += dt;
            let error = ErrorCovariance::diagonal(400.0, 250.0).unwrap();
            epochs.push(Epoch {
                time,
                observation: Some(Observation {
                    x: state[0] + 400.0 * std.sample(&mut rng),
                    y: state[2] + 250.0 * std.sample(&mut rng),
                    error,
                }),
            });
        }
        SegmentData { epochs }
    }

    #[test]
    fn lbfgs_and_nelder_mead_reach_the_same_optimum() {
        let segments = [simulated_segment(400)];
        let problem = Problem {
            segments: &segments,
            position_sd: 5e4,
            estimate_error_scale: false,
            n_fixes: 400,
            gradient_cache: RefCell::new(None),
        };
        let start = problem.start(None);
        let a = problem.fit_lbfgs(start.clone()).unwrap();
        let b = problem.fit_nelder_mead(start).unwrap();
        assert!(a.converged && b.converged);
        // Both stop within ~1e-6 of the optimum in θ; the likelihoods, flat there,
        // agree far more closely than that.
        assert!((a.log_likelihood - b.log_likelihood).abs() < 1e-6);
        assert!((a.params.beta() / b.params.beta()).ln().abs() < 1e-4);
        assert!((a.params.sigma() / b.params.sigma()).ln().abs() < 1e-4);
    }
}
