//! Scaled forward algorithm for the log-likelihood and the backward pass that turns it
//! into the exact gradient with respect to the working parameters.
//!
//! The forward pass keeps α̂_t (forward probabilities times a power-of-two scale) and
//! the scale factors s_t; log L = Σ_t m_t − Σ_t ln s_t + ln Σ_j α̂_{T−1}(j), where m_t is
//! the largest state log-density at step t (subtracted before exponentiating so that no
//! density underflows). The backward pass runs the scaled backward recursion from
//! β̂_{T−1} = 1/Σ_j α̂_{T−1}(j) with the same s_t, so that γ_t(j) = α̂_t(j) β̂_t(j) are the
//! state probabilities; in the same sweep it accumulates the pair terms
//! ξ_t(i,j) = α̂_t(i) Γ_ij(t) f_j(t+1) β̂_{t+1}(j) s_{t+1}, which weight the derivatives of
//! log Γ_ij; for the multinomial logit these collapse to (ξ_t(i,j) − Γ_ij γ_t(i))·(1, x_t).
//! The γ_t then weight the derivatives of the log-densities.
//!
//! # Hot-path layout (why it looks like this)
//! One evaluation of W1 (10⁶ steps, 3 states, 4 covariates) needs about 10⁷
//! exponentials, and the recursions are serial in t. The pass is therefore split into
//! whole-series phases, each a simple loop that the compiler vectorises or that has a
//! short loop-carried dependency:
//! 1. **Γ(x_t) for all t** ([`fill_gammas`]): the N(N − 1) linear predictors of a step
//!    are 1 + p vector multiply-adds of transposed coefficients; all T·N(N − 1)
//!    predictors then go through one vectorised exponential ([`crate::hmm::vexp`],
//!    full double precision, no libm call) and the rows are normalised.
//! 2. **State log-densities for all t**, stream by stream with the family matched once
//!    per stream (the per-state constants — ln Γ(k), ln I₀(κ), … — come from
//!    [`StateDist`], built once per evaluation; ln x, cos θ, sin θ of the data are
//!    features computed once when the data are prepared). Then the per-step maximum is
//!    subtracted and the whole T × N block is exponentiated in one vectorised call.
//! 3. **Forward recursion**: per step an N × N vector–matrix product and a multiply by
//!    the densities, on fixed-size arrays (the state count is a const generic, N = 1…6
//!    dispatched by a `match`, so the loops unroll and nothing is bounds-checked).
//!    Rescaling is by an exact power of two and only when the sum falls below 2⁻¹²⁸, so
//!    that the branch is predicted and the next step never waits for a division or a
//!    logarithm; log L needs one logarithm per series.
//! 4. **Backward recursion** with the transition part of the gradient: per step the
//!    N(N − 1) coefficients (ξ − Γγ) go into the rows of the predictor buffer (free by
//!    then), and γ_t overwrites f_t. Their products with (1, x_t) are summed after the
//!    loop ([`pair_sums`]) in blocks that stay in L1 cache, one term of (1, x) at a
//!    time, so that the sums stay in registers (same terms, same order: the result is
//!    bit for bit that of summing inside the loop, and the loop carries only β̂).
//! 5. **Density gradients** from the γ_t, stream by stream: for the families whose
//!    log-density gradient is linear in two features of the observation (gamma, von
//!    Mises, Poisson, normal, log-normal) only Σγ, Σγa, Σγb per state are accumulated and
//!    the gradient is formed once per series; Weibull and wrapped Cauchy go per step.
//!
//! Memory: per series O(T·N²) work buffers (Γ, predictors, densities, α̂/γ, scales —
//! 22 doubles per step for N = 3) in a [`Scratch`] that a thread takes from a pool and
//! reuses for the next series, so at most one exists per thread and nothing of size
//! T × N × N is kept per series; the buffers are grown, never zeroed (every element is
//! written before it is read). An [`crate::hmm::Objective`] keeps its pool between
//! evaluations (a few MiB per thread for W1), which saves re-faulting the pages.
//!
//! Series are independent and share the parameters: they are evaluated in parallel with
//! rayon into a vector and summed in series order, so the result is bitwise identical
//! for any number of threads (no buffer content ever leaks into a result).
//!
//! # Formula
//! Scaled forward–backward: Zucchini, MacDonald & Langrock (2016), *Hidden Markov Models
//! for Time Series*, 2nd ed., ch. 3 and 4; gradient by the Fisher identity
//! ∇ log L = E[∇ log p(x, s) | x] (Cappé, Moulines & Rydén 2005, *Inference in Hidden
//! Markov Models*, ch. 10); stationary-start derivative from δ(I − Γ + U) = 1:
//! dδ = δ dΓ (I − Γ + U)⁻¹.

use std::sync::Mutex;

use nalgebra::DVector;
use rayon::prelude::*;

use super::dists::{Family, StateDist, log_density_of};
use super::spec::{PSeries, Prepared, ValidSpec, beta_row, softmax_ref};
use super::transitions::{fill_gammas, stationary_flat, stationary_system};
use super::vexp::exp_in_place;

/// Per-thread work buffers of [`Evaluator::series_pass`], reused from one series to the
/// next so that the hot path allocates nothing per series. Every buffer is resized and
/// fully overwritten before it is read: results never depend on what a buffer held.
#[derive(Default)]
pub(crate) struct Scratch {
    /// Γ(x_t), T × N × N
    gam: Vec<f64>,
    /// linear predictors, then their exponentials; in the backward pass the pair
    /// coefficients ξ − Γγ of each transition; T × N(N − 1)
    eta: Vec<f64>,
    /// scaled state densities, replaced by γ_t during the backward pass, T × N
    dens: Vec<f64>,
    /// α̂_t, T × N
    alpha: Vec<f64>,
    /// power-of-two scale factor s_t of each step
    scale: Vec<f64>,
}

/// The forward sums are rescaled (by a power of two) when they fall below this. Far
/// enough above the smallest normal number (2⁻¹⁰²²) that one more step cannot underflow
/// unless a transition probability is below ~e⁻⁶⁵⁰.
const RESCALE_BELOW: f64 = f64::from_bits((1023 - 128) << 52); // 2⁻¹²⁸

/// Makes `v` at least `len` long. Existing contents are kept: callers overwrite the
/// first `len` elements before reading them, so no zeroing pass is needed.
fn grow(v: &mut Vec<f64>, len: usize) {
    if v.len() < len {
        v.resize(len, 0.0);
    }
}

/// Everything one parameter vector implies, computed once per evaluation.
pub(crate) struct Evaluator<'a> {
    pub spec: &'a ValidSpec,
    /// [stream][state]
    dists: Vec<Vec<StateDist>>,
    /// [stream] → per state (ln z, ln(1 − z), z)
    zero: Vec<Option<Vec<[f64; 3]>>>,
    pub beta: Vec<f64>,
    delta_est: Option<Vec<f64>>,
}

impl<'a> Evaluator<'a> {
    pub fn new(spec: &'a ValidSpec, th: &[f64]) -> Self {
        let n = spec.n_states();
        let mut dists = Vec::new();
        let mut zero = Vec::new();
        for (k, s) in spec.spec().streams.iter().enumerate() {
            let np = s.family.n_params();
            dists.push(
                (0..n)
                    .map(|j| {
                        let o = spec.stream_offset[k] + j * np;
                        StateDist::new(s.family, &th[o..o + np])
                    })
                    .collect(),
            );
            zero.push(spec.zero_offset[k].map(|o| {
                (0..n)
                    .map(|j| {
                        let w = th[o + j];
                        // ln σ(w) and ln(1 − σ(w)) without cancellation
                        let lz = -(-w).exp().ln_1p();
                        let l1z = -w.exp().ln_1p();
                        [lz, l1z, lz.exp()]
                    })
                    .collect()
            }));
        }
        let nb = n * (n - 1) * (1 + spec.n_covariates());
        let beta = th[spec.beta_offset..spec.beta_offset + nb].to_vec();
        let delta_est = spec.delta_offset.map(|o| softmax_ref(&th[o..o + n - 1]));
        Evaluator {
            spec,
            dists,
            zero,
            beta,
            delta_est,
        }
    }

    /// State log-densities at step t (sum over streams; missing values contribute 0).
    #[inline]
    pub fn log_dens(&self, s: &PSeries, t: usize, out: &mut [f64]) {
        match out.len() {
            1 => self.log_dens_n::<1>(s, t, out),
            2 => self.log_dens_n::<2>(s, t, out),
            3 => self.log_dens_n::<3>(s, t, out),
            4 => self.log_dens_n::<4>(s, t, out),
            5 => self.log_dens_n::<5>(s, t, out),
            _ => self.log_dens_n::<6>(s, t, out),
        }
    }

    #[inline]
    fn log_dens_n<const N: usize>(&self, s: &PSeries, t: usize, out: &mut [f64]) {
        let out = &mut out[..N];
        out.iter_mut().for_each(|o| *o = 0.0);
        for (k, d) in self.dists.iter().enumerate() {
            let [u, v] = s.feats[k][t];
            if u.is_nan() {
                continue;
            }
            match &self.zero[k] {
                Some(z) if u == 0.0 => {
                    for (o, zj) in out.iter_mut().zip(z) {
                        *o += zj[0];
                    }
                }
                Some(z) => {
                    for ((o, zj), dj) in out.iter_mut().zip(z).zip(d) {
                        *o += zj[1] + dj.log_density(u, v);
                    }
                }
                None => {
                    for (o, dj) in out.iter_mut().zip(d) {
                        *o += dj.log_density(u, v);
                    }
                }
            }
        }
    }

    /// State log-densities of one stream at step t (0 when missing).
    pub fn log_dens_stream(&self, s: &PSeries, t: usize, k: usize, out: &mut [f64]) {
        out.iter_mut().for_each(|o| *o = 0.0);
        let [u, v] = s.feats[k][t];
        if u.is_nan() {
            return;
        }
        let d = &self.dists[k];
        match &self.zero[k] {
            Some(z) if u == 0.0 => {
                for (o, zj) in out.iter_mut().zip(z) {
                    *o = zj[0];
                }
            }
            Some(z) => {
                for ((o, zj), dj) in out.iter_mut().zip(z).zip(d) {
                    *o = zj[1] + dj.log_density(u, v);
                }
            }
            None => {
                for (o, dj) in out.iter_mut().zip(d) {
                    *o = dj.log_density(u, v);
                }
            }
        }
    }

    /// Initial distribution of a series, given its first transition matrix Γ(x₀).
    pub fn initial(&self, _s: &PSeries, g0: &[f64]) -> Result<Vec<f64>, String> {
        match &self.delta_est {
            Some(d) => Ok(d.clone()),
            None => stationary_flat(g0, self.spec.n_states()),
        }
    }

    /// Log-likelihood of one series and, if `grad` is given, its gradient added into it;
    /// if `post` is given (length T·N) it receives the state probabilities.
    pub fn series_pass(
        &self,
        s: &PSeries,
        grad: Option<&mut [f64]>,
        post: Option<&mut [f64]>,
    ) -> f64 {
        self.series_pass_with(s, grad, post, &mut Scratch::default())
    }

    /// [`Evaluator::series_pass`] with caller-owned scratch buffers (one per thread).
    fn series_pass_with(
        &self,
        s: &PSeries,
        grad: Option<&mut [f64]>,
        post: Option<&mut [f64]>,
        sc: &mut Scratch,
    ) -> f64 {
        // a compile-time state count (and off-diagonal count M = N(N − 1)) lets the
        // compiler unroll the O(N²) inner loops and keep rows in registers
        match self.spec.n_states() {
            1 => self.series_pass_n::<1, 0>(s, grad, post, sc),
            2 => self.series_pass_n::<2, 2>(s, grad, post, sc),
            3 => self.series_pass_n::<3, 6>(s, grad, post, sc),
            4 => self.series_pass_n::<4, 12>(s, grad, post, sc),
            5 => self.series_pass_n::<5, 20>(s, grad, post, sc),
            _ => self.series_pass_n::<6, 30>(s, grad, post, sc),
        }
    }

    /// State log-densities of the whole series into `ld` (T × N), stream by stream, with
    /// the family matched once per stream rather than once per observation.
    fn fill_log_dens<const N: usize>(&self, s: &PSeries, ld: &mut [f64]) {
        if self.dists.is_empty() {
            ld.iter_mut().for_each(|x| *x = 0.0);
        }
        for (k, d) in self.dists.iter().enumerate() {
            // the first stream overwrites (the buffer holds stale values), later ones add
            let first = k == 0;
            let fam = d[0].family();
            let c: [[f64; 6]; N] = std::array::from_fn(|j| *d[j].consts());
            let zero = self.zero[k].as_deref();
            let feats = &s.feats[k];
            // one monomorphised loop per family: `log_density_of` inlines with the match
            // resolved at compile time
            macro_rules! stream_loop {
                ($fam:expr) => {
                    for (l, &[u, v]) in ld.chunks_exact_mut(N).zip(feats) {
                        if first {
                            l.iter_mut().for_each(|x| *x = 0.0);
                        }
                        if u.is_nan() {
                            continue;
                        }
                        match zero {
                            Some(z) if u == 0.0 => {
                                for (o, zj) in l.iter_mut().zip(z) {
                                    *o += zj[0];
                                }
                            }
                            Some(z) => {
                                for ((o, zj), cj) in l.iter_mut().zip(z).zip(&c) {
                                    *o += zj[1] + log_density_of($fam, cj, u, v);
                                }
                            }
                            None => {
                                for (o, cj) in l.iter_mut().zip(&c) {
                                    *o += log_density_of($fam, cj, u, v);
                                }
                            }
                        }
                    }
                };
            }
            match fam {
                Family::Gamma => stream_loop!(Family::Gamma),
                Family::Weibull => stream_loop!(Family::Weibull),
                Family::LogNormal => stream_loop!(Family::LogNormal),
                Family::VonMises => stream_loop!(Family::VonMises),
                Family::WrappedCauchy => stream_loop!(Family::WrappedCauchy),
                Family::Normal => stream_loop!(Family::Normal),
                Family::Poisson => stream_loop!(Family::Poisson),
            }
        }
    }

    /// Adds the gradient of Σ_t Σ_j γ_t(j) log f_j(x_t) (all streams, zero masses
    /// included) from the state probabilities `gam` (T × N).
    fn add_density_grads<const N: usize>(&self, s: &PSeries, gam: &[f64], grad: &mut [f64]) {
        let spec = self.spec;
        for (k, d) in self.dists.iter().enumerate() {
            let feats = &s.feats[k];
            let np = spec.spec().streams[k].family.n_params();
            let off = spec.stream_offset[k];
            let has_zero = self.zero[k].is_some();
            // Σ γ over zeros and over positive values (zero-mass gradient)
            let mut zsum = [[0.0; 2]; N];
            let block = &mut grad[off..off + N * np];
            if d[0].has_linear_gradient() {
                // (Σ γ, Σ γ a, Σ γ b) per state, (a, b) the features the gradient is linear
                // in (see `add_grad_from_sums`); one loop per feature map, no match inside
                let mut sums = [[0.0; 3]; N];
                macro_rules! sums_loop {
                    ($feat:expr) => {
                        for (w, &[u, v]) in gam.chunks_exact(N).zip(feats) {
                            if u.is_nan() {
                                continue;
                            }
                            if has_zero && u == 0.0 {
                                for (z, &wj) in zsum.iter_mut().zip(w) {
                                    z[0] += wj;
                                }
                                continue;
                            }
                            for (j, (sm, &wj)) in sums.iter_mut().zip(w).enumerate() {
                                let (a, b) = $feat(j, u, v);
                                sm[0] += wj;
                                sm[1] += wj * a;
                                sm[2] += wj * b;
                            }
                            if has_zero {
                                for (z, &wj) in zsum.iter_mut().zip(w) {
                                    z[1] += wj;
                                }
                            }
                        }
                    };
                }
                let mu: [f64; N] = std::array::from_fn(|j| d[j].consts()[0]);
                match d[0].family() {
                    // deviations d = x − μ_j and d² (no cancellation for small spreads)
                    Family::Normal => sums_loop!(|j: usize, u: f64, _v: f64| {
                        let e = u - mu[j];
                        (e, e * e)
                    }),
                    Family::LogNormal => sums_loop!(|j: usize, _u: f64, v: f64| {
                        let e = v - mu[j];
                        (e, e * e)
                    }),
                    // gamma, von Mises, Poisson: the features themselves
                    _ => sums_loop!(|_j: usize, u: f64, v: f64| (u, v)),
                }
                for (j, sm) in sums.iter().enumerate() {
                    d[j].add_grad_from_sums(*sm, &mut block[j * np..(j + 1) * np]);
                }
            } else {
                // gradient not linear in the features: per observation
                let mut acc = [[0.0; 2]; N];
                for (w, &[u, v]) in gam.chunks_exact(N).zip(feats) {
                    if u.is_nan() {
                        continue;
                    }
                    if has_zero && u == 0.0 {
                        for (z, &wj) in zsum.iter_mut().zip(w) {
                            z[0] += wj;
                        }
                        continue;
                    }
                    for ((a, &wj), dd) in acc.iter_mut().zip(w).zip(d) {
                        dd.add_grad(u, v, wj, &mut a[..np]);
                    }
                    if has_zero {
                        for (z, &wj) in zsum.iter_mut().zip(w) {
                            z[1] += wj;
                        }
                    }
                }
                for (j, a) in acc.iter().enumerate() {
                    for (o, x) in block[j * np..(j + 1) * np].iter_mut().zip(a) {
                        *o += x;
                    }
                }
            }
            if let (Some(z), Some(zo)) = (&self.zero[k], spec.zero_offset[k]) {
                // ∂/∂w_j: (1 − z_j) at a zero, −z_j at a positive value
                for (j, zs) in zsum.iter().enumerate() {
                    grad[zo + j] += zs[0] * (1.0 - z[j][2]) - zs[1] * z[j][2];
                }
            }
        }
    }

    fn series_pass_n<const N: usize, const M: usize>(
        &self,
        s: &PSeries,
        mut grad: Option<&mut [f64]>,
        post: Option<&mut [f64]>,
        sc: &mut Scratch,
    ) -> f64 {
        debug_assert_eq!(N, self.spec.n_states());
        debug_assert_eq!(M, N * (N - 1));
        let p = self.spec.n_covariates();
        let t_len = s.len;
        if t_len == 0 {
            return 0.0;
        }
        let nn = N * N;
        // --- 1. Γ(x_t), t = 0..T−2 (block 0 also serves the stationary start). Without
        // covariates the one matrix is computed once and copied, so that the recursions
        // below walk one matrix per step either way.
        let n_gam = t_len.saturating_sub(1).max(1);
        let n_fill = if p == 0 { 1 } else { n_gam };
        let k = 1 + p;
        // coefficients transposed: bt[c][r] (see fill_gammas)
        let bt: Vec<[f64; M]> = (0..k)
            .map(|c| std::array::from_fn(|r| self.beta[r * k + c]))
            .collect();
        grow(&mut sc.gam, n_gam * nn);
        fill_gammas::<N, M>(
            &self.beta,
            &bt,
            &s.cov[..n_fill * p],
            &mut sc.eta,
            &mut sc.gam[..n_fill * nn],
        );
        if n_fill < n_gam {
            let (first, rest) = sc.gam[..n_gam * nn].split_at_mut(nn);
            for g in rest.chunks_exact_mut(nn) {
                g.copy_from_slice(first);
            }
        }
        // --- 2. state densities of the whole series, each step scaled so that its
        // largest density is exactly 1 (ln of that maximum, m_t, is added to log L)
        grow(&mut sc.dens, t_len * N);
        self.fill_log_dens::<N>(s, &mut sc.dens[..t_len * N]);
        let mut ll_m = 0.0;
        for f in sc.dens[..t_len * N].chunks_exact_mut(N) {
            let m = f.iter().copied().fold(f64::NEG_INFINITY, f64::max);
            if !m.is_finite() {
                // an observation impossible in every state (or a NaN density)
                return if m.is_nan() {
                    f64::NAN
                } else {
                    f64::NEG_INFINITY
                };
            }
            ll_m += m;
            f.iter_mut().for_each(|x| *x -= m);
        }
        exp_in_place(&mut sc.dens[..t_len * N]);
        let delta = match self.initial(s, &sc.gam[..nn]) {
            Ok(d) => d,
            Err(_) => return f64::NAN,
        };
        // Γ(x_t) as N × N arrays, one per transition t → t + 1
        let gms: &[[[f64; N]; N]] = sc.gam[..(t_len - 1) * nn]
            .as_chunks::<N>()
            .0
            .as_chunks::<N>()
            .0;
        // --- 3. forward recursion: α̂_t = (α̂_{t−1} Γ(x_{t−1})) ∘ f_t · s_t with s_t a
        // power of two (exact; 1 at most steps)
        grow(&mut sc.alpha, t_len * N);
        grow(&mut sc.scale, t_len);
        let alpha: &mut [[f64; N]] = sc.alpha[..t_len * N].as_chunks_mut::<N>().0;
        let dens: &[[f64; N]] = sc.dens[..t_len * N].as_chunks::<N>().0;
        let scale = &mut sc.scale[..t_len];
        let mut esum: i64 = 0;
        // Rescale only when the sum has fallen below 2⁻¹²⁸ (the sums never grow: Γ is
        // stochastic and f ≤ 1), by s_t = 2^(1023−e) for the biased exponent e of c, which
        // brings it into [1, 2) exactly (a subnormal c has e = 0 and is scaled by 2¹⁰²³,
        // still exact). The test is a well-predicted branch, so the next step does not
        // wait for the scaling: the loop-carried dependency is just the N × N product and
        // the density multiply. A sum that is 0 or negative (an impossible sequence, or a
        // start distribution with a negative entry) ends the pass here; NaN and +∞ do not
        // take the branch and reach the final sum, which is checked once.
        let rescale = |a: &mut [f64; N], esum: &mut i64| -> Option<f64> {
            let c: f64 = a.iter().sum();
            if c < RESCALE_BELOW {
                if c.partial_cmp(&0.0) != Some(std::cmp::Ordering::Greater) {
                    return None;
                }
                let e = c.to_bits() >> 52;
                *esum += e as i64 - 1023;
                let sf = f64::from_bits((2046 - e) << 52);
                a.iter_mut().for_each(|x| *x *= sf);
                Some(sf)
            } else {
                Some(1.0)
            }
        };
        let mut ap: [f64; N] = std::array::from_fn(|j| delta[j] * dens[0][j]);
        let Some(s0) = rescale(&mut ap, &mut esum) else {
            return f64::NEG_INFINITY;
        };
        scale[0] = s0;
        alpha[0] = ap;
        for (((a_out, f), st), g) in alpha[1..]
            .iter_mut()
            .zip(&dens[1..])
            .zip(scale[1..].iter_mut())
            .zip(gms)
        {
            let mut a = [0.0; N];
            for (&ai, gi) in ap.iter().zip(g) {
                for (aj, gij) in a.iter_mut().zip(gi) {
                    *aj += ai * gij;
                }
            }
            for (aj, fj) in a.iter_mut().zip(f) {
                *aj *= fj;
            }
            let Some(sf) = rescale(&mut a, &mut esum) else {
                return f64::NEG_INFINITY;
            };
            *a_out = a;
            *st = sf;
            ap = a;
        }
        let a_sum: f64 = ap.iter().sum();
        if !(a_sum > 0.0 && a_sum.is_finite()) {
            return if a_sum.is_nan() {
                f64::NAN
            } else {
                f64::NEG_INFINITY
            };
        }
        let ll = ll_m + esum as f64 * std::f64::consts::LN_2 + a_sum.ln();
        if grad.is_none() && post.is_none() {
            return ll;
        }
        // --- 4. backward recursion with β̂_{T−1} = 1/Σα̂_{T−1}, so that
        // γ_t = α̂_t ∘ β̂_t exactly (no further normalisation). γ_t overwrites the densities
        // f_t once step t has used them. With the gradient, the pair coefficients
        // ξ_{t−1}(i,j) − Γ_ij γ_{t−1}(i) of each transition go into the rows of `eta`
        // (free since step 1), to be multiplied by (1, x_{t−1}) after the loop.
        // one row of pair coefficients per transition, or none (no gradient, one state)
        let n_cr = if grad.is_some() && M > 0 {
            (t_len - 1) * M
        } else {
            0
        };
        grow(&mut sc.eta, n_cr);
        let mut cr_rows = sc.eta[..n_cr].chunks_exact_mut(M.max(1)).rev();
        let dens: &mut [[f64; N]] = sc.dens[..t_len * N].as_chunks_mut::<N>().0;
        let alpha: &[[f64; N]] = sc.alpha[..t_len * N].as_chunks::<N>().0;
        let scale = &sc.scale[..t_len];
        let mut bhat = [1.0 / a_sum; N];
        for ((((fg, at), ap), &st), gm) in dens[1..]
            .iter_mut()
            .rev()
            .zip(alpha[1..].iter().rev())
            .zip(alpha[..t_len - 1].iter().rev())
            .zip(scale[1..].iter().rev())
            .zip(gms.iter().rev())
        {
            // w_j = f_j β̂_j s_t, computed as (f_j s_t) β̂_j: s_t is a power of two, so
            // both orders give the same product, and this one keeps a multiplication off
            // the chain that carries β̂ from step to step
            let mut w = [0.0; N];
            for ((wj, fj), bj) in w.iter_mut().zip(fg.iter()).zip(&bhat) {
                *wj = (fj * st) * bj;
            }
            // γ_t replaces f_t, which is no longer needed
            for ((g, a), b) in fg.iter_mut().zip(at).zip(&bhat) {
                *g = a * b;
            }
            let mut bnew = [0.0; N];
            for (bi, gi) in bnew.iter_mut().zip(gm) {
                let mut b = gi[0] * w[0];
                for (gij, wj) in gi.iter().zip(&w).skip(1) {
                    b += gij * wj;
                }
                *bi = b;
            }
            if let Some(cr) = cr_rows.next() {
                // off-diagonal pairs in the layout order: the row index advances
                let mut r = 0;
                for i in 0..N {
                    let ai = ap[i];
                    let gi = ai * bnew[i];
                    for j in 0..N {
                        if j == i {
                            continue;
                        }
                        // ξ(i,j) − Γ_ij γ(i)
                        cr[r] = gm[i][j] * (ai * w[j] - gi);
                        r += 1;
                    }
                }
            }
            bhat = bnew;
        }
        // step 0: γ_0 and the gradient of the initial distribution
        let f0 = dens[0];
        let gam0: [f64; N] = std::array::from_fn(|j| alpha[0][j] * bhat[j]);
        dens[0] = gam0;
        if let Some(g) = grad.as_deref_mut() {
            self.add_initial_grad(
                s,
                &gam0,
                &f0,
                &bhat,
                1.0 / scale[0],
                &delta,
                &sc.gam[..nn],
                g,
            );
        }
        let gam_post = &sc.dens[..t_len * N];
        if let Some(g) = grad {
            if n_cr > 0 {
                let acc = pair_sums::<M>(&sc.eta[..n_cr], &s.cov[..(t_len - 1) * p], p);
                let bo = self.spec.beta_offset;
                for (c, ac) in acc.iter().enumerate() {
                    for (r, a) in ac.iter().enumerate() {
                        g[bo + r * k + c] += a;
                    }
                }
            }
            self.add_density_grads::<N>(s, gam_post, g);
        }
        if let Some(ps) = post {
            ps[..t_len * N].copy_from_slice(gam_post);
        }
        ll
    }

    #[allow(clippy::too_many_arguments)]
    fn add_initial_grad(
        &self,
        s: &PSeries,
        gam0: &[f64],
        f0: &[f64],
        bhat0: &[f64],
        c0: f64,
        delta: &[f64],
        g0: &[f64],
        grad: &mut [f64],
    ) {
        let n = self.spec.n_states();
        let p = self.spec.n_covariates();
        let k = 1 + p;
        if let Some(o) = self.spec.delta_offset {
            for j in 1..n {
                grad[o + j - 1] += gam0[j] - delta[j];
            }
            return;
        }
        // ∂ log L/∂δ_j = f_0(j) β̂_0(j) / c_0, then through δ = 1ᵀ(I − Γ + U)⁻¹.
        let gd = DVector::from_fn(n, |j, _| f0[j] * bhat0[j] / c0);
        let a = stationary_system(g0, n);
        let Some(v) = a.lu().solve(&gd) else { return };
        let x = &s.cov[..p];
        let bo = self.spec.beta_offset;
        for i in 0..n {
            let gv: f64 = (0..n).map(|j| g0[i * n + j] * v[j]).sum();
            for j in (0..n).filter(|&j| j != i) {
                let c = delta[i] * g0[i * n + j] * (v[j] - gv);
                let r = bo + beta_row(n, i, j) * k;
                grad[r] += c;
                for (gc, xc) in grad[r + 1..r + k].iter_mut().zip(x) {
                    *gc += c * xc;
                }
            }
        }
    }
}

/// Σ_t cr_t · (1, x_t) over the transitions of a series: `cr` holds one row of M pair
/// coefficients per transition (row t: t → t + 1), `cov` the matching T − 1 covariate
/// rows of length p; returns the sums in the layout acc[c][r] (c = 0 the intercept).
///
/// Each accumulator adds its terms in decreasing t, the order of the backward pass that
/// produced them. The rows are taken in blocks that stay in L1 cache, and within a block
/// one term of (1, x) at a time, so that the M accumulators of that term stay in
/// registers.
fn pair_sums<const M: usize>(cr: &[f64], cov: &[f64], p: usize) -> Vec<[f64; M]> {
    const B: usize = 256;
    let rows: &[[f64; M]] = cr.as_chunks::<M>().0;
    let mut acc = vec![[0.0; M]; 1 + p];
    let n_blocks = rows.len().div_ceil(B);
    for b in (0..n_blocks).rev() {
        let blk = &rows[b * B..((b + 1) * B).min(rows.len())];
        let mut a = acc[0];
        for row in blk.iter().rev() {
            for (ar, x) in a.iter_mut().zip(row) {
                *ar += x;
            }
        }
        acc[0] = a;
        if p == 0 {
            continue;
        }
        let xb = &cov[b * B * p..(b * B + blk.len()) * p];
        for c in 0..p {
            let mut a = acc[1 + c];
            for (row, x) in blk.iter().rev().zip(xb.chunks_exact(p).rev()) {
                let xc = x[c];
                for (ar, y) in a.iter_mut().zip(row) {
                    *ar += y * xc;
                }
            }
            acc[1 + c] = a;
        }
    }
    acc
}

/// Work buffers shared by the threads of an evaluation: a thread takes one for a series
/// and returns it, so at most one per thread exists and it is reused from series to
/// series (and, when the pool is kept, from evaluation to evaluation: the fit keeps one
/// in its [`crate::hmm::Objective`], which saves re-faulting the pages each time).
#[derive(Default)]
pub(crate) struct ScratchPool(Mutex<Vec<Scratch>>);

/// Total log-likelihood (and gradient) over all series, parallel over series, summed in
/// series order so that the result does not depend on the number of threads.
pub(crate) fn loglik_grad(
    spec: &ValidSpec,
    data: &Prepared,
    th: &[f64],
    want_grad: bool,
) -> (f64, Vec<f64>) {
    loglik_grad_pooled(spec, data, th, want_grad, &ScratchPool::default())
}

/// [`loglik_grad`] with a caller-kept [`ScratchPool`].
pub(crate) fn loglik_grad_pooled(
    spec: &ValidSpec,
    data: &Prepared,
    th: &[f64],
    want_grad: bool,
    pool: &ScratchPool,
) -> (f64, Vec<f64>) {
    let ev = Evaluator::new(spec, th);
    let np = spec.n_params();
    let pool = &pool.0;
    let parts: Vec<(f64, Vec<f64>)> = data
        .series
        .par_iter()
        .map(|s| {
            let mut sc = pool
                .lock()
                .map(|mut p| p.pop())
                .ok()
                .flatten()
                .unwrap_or_default();
            let out = if want_grad {
                let mut g = vec![0.0; np];
                let ll = ev.series_pass_with(s, Some(&mut g), None, &mut sc);
                (ll, g)
            } else {
                (ev.series_pass_with(s, None, None, &mut sc), Vec::new())
            };
            if let Ok(mut p) = pool.lock() {
                p.push(sc);
            }
            out
        })
        .collect();
    let mut ll = 0.0;
    let mut grad = vec![0.0; if want_grad { np } else { 0 }];
    for (l, g) in parts {
        ll += l;
        for (a, b) in grad.iter_mut().zip(&g) {
            *a += b;
        }
    }
    (ll, grad)
}
