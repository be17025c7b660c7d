//! Covariate-driven transition probabilities and stationary distributions.
//!
//! Each off-diagonal entry of the transition probability matrix Γ(x) has a linear
//! predictor η_ij = β_ij · (1, x); the diagonal is the reference (η_ii = 0) and each row
//! is a multinomial logit: Γ_ij = exp(η_ij) / Σ_k exp(η_ik). The covariate row recorded
//! at step t governs the transition from the state at t to the state at t + 1.
//!
//! # Formula
//! Multinomial-logit transition probabilities: Zucchini, MacDonald & Langrock (2016),
//! *Hidden Markov Models for Time Series*, 2nd ed., chapter on covariate-dependent transition probabilities. The stationary distribution
//! solves δ(I − Γ + U) = 1 with U the matrix of ones (ibid., ch. 2, Exercise 2.8).

use nalgebra::{DMatrix, DVector};

use super::spec::Params;

/// Fills `out` (N × N, row-major) with Γ(x) for coefficients `beta` (layout of
/// [`Params::beta`]) and covariate row `x` (length p).
#[inline]
pub(crate) fn fill_gamma(beta: &[f64], n: usize, x: &[f64], out: &mut [f64]) {
    match n {
        1 => fill_gamma_n::<1>(beta, x, out),
        2 => fill_gamma_n::<2>(beta, x, out),
        3 => fill_gamma_n::<3>(beta, x, out),
        4 => fill_gamma_n::<4>(beta, x, out),
        5 => fill_gamma_n::<5>(beta, x, out),
        _ => fill_gamma_n::<6>(beta, x, out),
    }
}

/// [`fill_gamma`] with a compile-time state count (unrolled loops in the hot path).
#[inline]
pub(crate) fn fill_gamma_n<const N: usize>(beta: &[f64], x: &[f64], out: &mut [f64]) {
    let n = N;
    let k = 1 + x.len();
    // the off-diagonal rows of `beta` come in the order of this double loop (i-major,
    // j ascending skipping i), so the row index simply advances
    let mut rows = beta.chunks_exact(k);
    for i in 0..n {
        let row = &mut out[i * n..(i + 1) * n];
        let mut mx = 0.0_f64;
        for (j, r) in row.iter_mut().enumerate() {
            if j == i {
                *r = 0.0;
                continue;
            }
            let b = rows.next().expect("beta has N(N-1) rows");
            let mut eta = b[0];
            for (bc, xc) in b[1..].iter().zip(x) {
                eta += bc * xc;
            }
            *r = eta;
            mx = mx.max(eta);
        }
        let mut s = 0.0;
        if mx < EXP_SAFE {
            // common case: exp(η) cannot overflow, the diagonal is exp(0) = 1
            for (j, r) in row.iter_mut().enumerate() {
                *r = if j == i { 1.0 } else { r.exp() };
                s += *r;
            }
        } else {
            // subtracting the row maximum keeps exp() finite for any coefficients
            for r in row.iter_mut() {
                *r = (*r - mx).exp();
                s += *r;
            }
        }
        let inv = 1.0 / s;
        row.iter_mut().for_each(|r| *r *= inv);
    }
}

/// Γ(x_t) for every row t of a T × p covariate matrix `cov` (T = `out.len() / N²`),
/// written as consecutive row-major N × N blocks: the batch form of [`fill_gamma_n`]
/// for the forward pass.
///
/// `bt` holds the coefficients transposed, one array per term of (1, x): `bt[c][r]` is
/// coefficient c of off-diagonal row r (M = N(N − 1) rows in the layout of
/// [`Params::beta`]), so that the M linear predictors of a step are built by 1 + p
/// vector multiply-adds. All T·M predictors go through one vectorised exponential
/// ([`crate::hmm::vexp`]) in the scratch `eta`; a row with a predictor large enough to
/// risk overflow (≥ ~299, never in practice) is redone by the shifted softmax of
/// [`fill_gamma_n`].
pub(crate) fn fill_gammas<const N: usize, const M: usize>(
    beta: &[f64],
    bt: &[[f64; M]],
    cov: &[f64],
    eta: &mut Vec<f64>,
    out: &mut [f64],
) {
    let p = bt.len() - 1;
    let nn = N * N;
    let n_t = out.len() / nn;
    if M == 0 {
        // one state: Γ = (1)
        out.iter_mut().for_each(|g| *g = 1.0);
        return;
    }
    if eta.len() < n_t * M {
        eta.resize(n_t * M, 0.0);
    }
    // every element of eta[..T·M] is written below before it is read
    let eta = &mut eta[..n_t * M];
    // linear predictors, same summation order as fill_gamma_n: b₀ + b₁x₁ + … + b_p x_p
    if p == 0 {
        for e in eta.chunks_exact_mut(M) {
            e.copy_from_slice(&bt[0]);
        }
    } else {
        for (e, x) in eta.chunks_exact_mut(M).zip(cov.chunks_exact(p)) {
            let mut acc = bt[0];
            for (b, &xc) in bt[1..].iter().zip(x) {
                for (a, bc) in acc.iter_mut().zip(b) {
                    *a += bc * xc;
                }
            }
            e.copy_from_slice(&acc);
        }
    }
    super::vexp::exp_in_place(eta);
    for (t, (g, e)) in out
        .chunks_exact_mut(nn)
        .zip(eta.chunks_exact(M))
        .enumerate()
    {
        // off-diagonal exponentials of row i are e[i(N−1)..(i+1)(N−1)]
        let mut safe = true;
        for (i, row) in g.chunks_exact_mut(N).enumerate() {
            let er = &e[i * (N - 1)..(i + 1) * (N - 1)];
            let mut s = 0.0;
            for (j, r) in row.iter_mut().enumerate() {
                *r = match j.cmp(&i) {
                    std::cmp::Ordering::Less => er[j],
                    std::cmp::Ordering::Equal => 1.0,
                    std::cmp::Ordering::Greater => er[j - 1],
                };
                s += *r;
            }
            safe &= s < EXP_SAFE_SUM;
            let inv = 1.0 / s;
            row.iter_mut().for_each(|r| *r *= inv);
        }
        if !safe {
            fill_gamma_n::<N>(beta, &cov[t * p..t * p + p], g);
        }
    }
}

/// A row sum of exponentials above this (≈ e^299) sends the row to the shifted softmax;
/// below it the unshifted one is exact to rounding, as with [`EXP_SAFE`].
const EXP_SAFE_SUM: f64 = 1e130;

/// Largest linear predictor for which the unshifted softmax is used: exp(300) × 6 is far
/// from overflow (≈1.8e308) and the row sum stays accurate.
const EXP_SAFE: f64 = 300.0;

/// Transition probability matrix Γ(x) for natural parameters `p` and covariate row `x`.
///
/// # Examples
/// ```
/// use cairn::hmm::spec::{Params, StreamParams};
/// use cairn::hmm::transitions::transition_matrix;
/// let p = Params { streams: vec![], beta: vec![-2.0, -1.0], delta: None };
/// let g = transition_matrix(&p, 2, &[]);
/// assert!((g[(0, 1)] - 1.0 / (1.0 + 2f64.exp())).abs() < 1e-15);
/// assert!((g.row(1).sum() - 1.0).abs() < 1e-15);
/// ```
pub fn transition_matrix(p: &Params, n_states: usize, x: &[f64]) -> DMatrix<f64> {
    let mut g = vec![0.0; n_states * n_states];
    fill_gamma(&p.beta, n_states, x, &mut g);
    DMatrix::from_row_slice(n_states, n_states, &g)
}

/// Stationary distribution of a row-stochastic Γ given row-major.
///
/// # Formula
/// δ = 1ᵀ (I − Γ + U)⁻¹ (Zucchini, MacDonald & Langrock 2016, ch. 2).
///
/// # Errors
/// A message when I − Γ + U is singular (Γ reducible).
pub(crate) fn stationary_flat(g: &[f64], n: usize) -> Result<Vec<f64>, String> {
    let a = stationary_system(g, n);
    let lu = a.transpose().lu();
    let d = lu
        .solve(&DVector::from_element(n, 1.0))
        .ok_or_else(|| "I − Γ + U is singular: the chain is not irreducible".to_string())?;
    Ok(d.iter().copied().collect())
}

/// The matrix A = I − Γ + U of the stationary system δA = 1ᵀ.
pub(crate) fn stationary_system(g: &[f64], n: usize) -> DMatrix<f64> {
    DMatrix::from_fn(
        n,
        n,
        |i, j| if i == j { 1.0 } else { 0.0 } - g[i * n + j] + 1.0,
    )
}

/// Stationary distribution of a transition probability matrix.
///
/// # Errors
/// A message when the chain is reducible.
pub fn stationary(gamma: &DMatrix<f64>) -> Result<Vec<f64>, String> {
    let n = gamma.nrows();
    let flat: Vec<f64> = (0..n * n).map(|k| gamma[(k / n, k % n)]).collect();
    stationary_flat(&flat, n)
}
