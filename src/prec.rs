//! Numeric tolerances used by the library, gathered in one place (as statrs does in
//! its `prec` module) so that each one carries the reason it has the value it has.

/// Relative step for central finite differences of the exact gradient (Hessian).
/// With an exact gradient the truncation error is O(h²) and the rounding error
/// O(ε/h); h ≈ ε^(1/3) ≈ 6e-6 balances them.
pub const HESSIAN_STEP: f64 = 6e-6;

/// Relative step for numerical Jacobians of natural-scale and derived quantities
/// in the delta method (same balance as [`HESSIAN_STEP`]).
pub const JACOBIAN_STEP: f64 = 6e-6;

/// Two random starts are said to reach the same optimum when their log-likelihoods
/// differ by less than this (the figure the project's issue asks for).
pub const SAME_OPTIMUM_LOGLIK: f64 = 1e-4;

/// Optimiser stop: Euclidean norm of the gradient of the *mean* negative log-likelihood
/// per step. Scaling by the number of steps makes one tolerance serve a 100-step series
/// and a 10⁶-step data set alike; at 1e-7 the remaining change of log L is far below
/// [`SAME_OPTIMUM_LOGLIK`] for well-conditioned problems.
pub const OPTIM_GRAD_TOL: f64 = 1e-7;

/// Optimiser stop: absolute change of the mean negative log-likelihood per observation
/// between iterations (argmin compares successive costs).
pub const OPTIM_COST_TOL: f64 = 1e-14;

/// A fit is accepted as converged when the solver stopped by itself and the sup-norm
/// of the gradient of the total negative log-likelihood is below this times
/// max(1, sqrt(n)); stochastic-scale gradients grow like sqrt(n) near an optimum that
/// is only known to floating-point accuracy.
pub const CONVERGED_GRAD: f64 = 1e-2;

/// Smallest eigenvalue of the Hessian, relative to the largest, below which the
/// Hessian is treated as not positive definite. Central differences of the exact
/// gradient with step ~6e-6 carry a relative error of roughly 1e-10 in each entry, so an
/// exactly singular Hessian shows eigenvalues of that order; 1e-9 separates them.
pub const HESSIAN_PD_REL: f64 = 1e-9;

/// Below this radius the circular-parameter maps switch to their Taylor limits
/// (I1(κ)/(κ I0(κ)) → 1/2 and the tanh-ratio → −2/3) to avoid 0/0.
pub const SMALL_RADIUS: f64 = 1e-5;

/// Number of table cells on [−π, π] for circular CDFs (pseudo-residuals): F is tabulated
/// by Simpson's rule per cell and completed by Simpson's rule over the partial cell. The
/// integrands are analytic and periodic; cells of 1.5e-3 rad resolve a von Mises peak
/// with concentration up to ~10⁴ (width 0.01 rad) and match the closed-form wrapped
/// Cauchy CDF to 1e-9 (unit test in `hmm::dists`).
pub const CIRCULAR_CDF_INTERVALS: usize = 4096;
