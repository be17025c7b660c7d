//! Scaled forward algorithm for the log-likelihood and the backward pass that turns it
//! into the exact gradient with respect to the working parameters.
//!
//! The forward pass keeps α̂_t (normalised forward probabilities) and the scale factors
//! c_t; log L = Σ_t (ln c_t + m_t), where m_t is the largest state log-density at step t
//! (subtracted before exponentiating so that no density underflows). The backward pass
//! runs the scaled backward recursion and, in the same sweep, accumulates the expected
//! sufficient statistics: state probabilities γ_t(j) = α̂_t(j) β̂_t(j) weight the
//! derivatives of the log-densities, and pair probabilities
//! ξ_t(i,j) = α̂_t(i) Γ_ij(t) f_j(t+1) β̂_{t+1}(j) / c_{t+1} weight the derivatives of
//! log Γ_ij, which for the multinomial logit collapse to (ξ_t(i,j) − Γ_ij γ_t(i))·(1, x_t).
//! Memory per series is O(T·N) plus, with covariates, a per-series scratch of the T
//! transition matrices that is freed when the series is done (at most one per thread);
//! nothing of size T × N × N is kept across series.
//!
//! Series are independent and share the parameters: they are evaluated in parallel with
//! rayon into a vector and summed in series order, so the result is bitwise identical
//! for any number of threads.
//!
//! # Formula
//! Scaled forward–backward: Zucchini, MacDonald & Langrock (2016), *Hidden Markov Models
//! for Time Series*, 2nd ed., ch. 3 and 4; gradient by the Fisher identity
//! ∇ log L = E[∇ log p(x, s) | x] (Cappé, Moulines & Rydén 2005, *Inference in Hidden
//! Markov Models*, ch. 10); stationary-start derivative from δ(I − Γ + U) = 1:
//! dδ = δ dΓ (I − Γ + U)⁻¹.

use nalgebra::DVector;
use rayon::prelude::*;

use super::dists::StateDist;
use super::spec::{PSeries, Prepared, ValidSpec, beta_row, softmax_ref};
use super::transitions::{fill_gamma_n, stationary_flat, stationary_system};

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

    #[inline]
    fn add_density_grad<const N: usize>(
        &self,
        s: &PSeries,
        t: usize,
        gam: &[f64; N],
        grad: &mut [f64],
    ) {
        let spec = self.spec;
        for (k, d) in self.dists.iter().enumerate() {
            let [u, v] = s.feats[k][t];
            if u.is_nan() {
                continue;
            }
            let np = spec.spec().streams[k].family.n_params();
            let off = spec.stream_offset[k];
            if let (Some(z), Some(zo)) = (&self.zero[k], spec.zero_offset[k]) {
                if u == 0.0 {
                    for (j, &w) in gam.iter().enumerate() {
                        grad[zo + j] += w * (1.0 - z[j][2]);
                    }
                    continue;
                }
                for (j, &w) in gam.iter().enumerate() {
                    grad[zo + j] -= w * z[j][2];
                }
            }
            let block = &mut grad[off..off + N * np];
            for (j, (&w, dj)) in gam.iter().zip(&d[..N]).enumerate() {
                dj.add_grad(u, v, w, &mut block[j * np..(j + 1) * np]);
            }
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
        // a compile-time state count lets the compiler unroll the O(N²) inner loops
        match self.spec.n_states() {
            1 => self.series_pass_n::<1>(s, grad, post),
            2 => self.series_pass_n::<2>(s, grad, post),
            3 => self.series_pass_n::<3>(s, grad, post),
            4 => self.series_pass_n::<4>(s, grad, post),
            5 => self.series_pass_n::<5>(s, grad, post),
            _ => self.series_pass_n::<6>(s, grad, post),
        }
    }

    fn series_pass_n<const N: usize>(
        &self,
        s: &PSeries,
        mut grad: Option<&mut [f64]>,
        post: Option<&mut [f64]>,
    ) -> f64 {
        let n = N;
        debug_assert_eq!(n, self.spec.n_states());
        let p = self.spec.n_covariates();
        let t_len = s.len;
        let nn = n * n;
        // Γ(x_t) for t = 0..T−1 (row 0 also serves the stationary start); one matrix
        // when there are no covariates.
        let n_gam = if p == 0 {
            1
        } else {
            t_len.saturating_sub(1).max(1)
        };
        let mut gam = vec![0.0; n_gam * nn];
        for (t, g) in gam.chunks_exact_mut(nn).enumerate() {
            fill_gamma_n::<N>(&self.beta, &s.cov[t * p..t * p + p], g);
        }
        let gidx = |t: usize| if p == 0 { 0 } else { t * nn };
        let delta = match self.initial(s, &gam[..nn]) {
            Ok(d) => d,
            Err(_) => return f64::NAN,
        };
        let mut alpha = vec![0.0; t_len * n];
        let mut dens = vec![0.0; t_len * n];
        // 1 / c_t
        let mut scale = vec![0.0; t_len];
        let mut ll = 0.0;
        // Π c_t is accumulated and its logarithm taken only when it gets small, which
        // saves a logarithm per step (c_t ≤ 1 because the densities are scaled to max 1).
        let mut prod_c = 1.0_f64;
        for t in 0..t_len {
            let f = &mut dens[t * n..(t + 1) * n];
            self.log_dens_n::<N>(s, t, f);
            let m = f.iter().copied().fold(f64::NEG_INFINITY, f64::max);
            if !m.is_finite() {
                // an observation impossible in every state (or a NaN density)
                return if m.is_nan() {
                    f64::NAN
                } else {
                    f64::NEG_INFINITY
                };
            }
            // the largest is exactly 1: one exp() saved per step
            f.iter_mut()
                .for_each(|x| *x = if *x == m { 1.0 } else { (*x - m).exp() });
            ll += m;
            let (prev, cur) = alpha.split_at_mut(t * n);
            let a = &mut cur[..n];
            if t == 0 {
                for j in 0..n {
                    a[j] = delta[j] * f[j];
                }
            } else {
                let ap = &prev[(t - 1) * n..];
                let g = &gam[gidx(t - 1)..gidx(t - 1) + nn];
                a.iter_mut().for_each(|x| *x = 0.0);
                for i in 0..n {
                    let ai = ap[i];
                    for j in 0..n {
                        a[j] += ai * g[i * n + j];
                    }
                }
                for j in 0..n {
                    a[j] *= f[j];
                }
            }
            let c: f64 = a.iter().sum();
            if !(c > 0.0 && c.is_finite()) {
                return if c.is_nan() {
                    f64::NAN
                } else {
                    f64::NEG_INFINITY
                };
            }
            let inv = 1.0 / c;
            a.iter_mut().for_each(|x| *x *= inv);
            scale[t] = inv;
            if c < 1e-100 {
                ll += c.ln();
            } else {
                // stays ≥ 1e-200 · 1e-100, far above the smallest normal f64
                prod_c *= c;
                if prod_c < 1e-200 {
                    ll += prod_c.ln();
                    prod_c = 1.0;
                }
            }
        }
        ll += prod_c.ln();
        if grad.is_none() && post.is_none() {
            return ll;
        }
        let mut post = post;
        let k = 1 + p;
        let bo = self.spec.beta_offset;
        let mut bhat = [1.0; N];
        let mut bnew = [0.0; N];
        let mut w = [0.0; N];
        let mut gvec = [0.0; N];
        let mut coef = vec![0.0; nn];
        for t in (0..t_len).rev() {
            let at = &alpha[t * n..(t + 1) * n];
            for j in 0..n {
                gvec[j] = at[j] * bhat[j];
            }
            if let Some(ps) = post.as_deref_mut() {
                ps[t * n..(t + 1) * n].copy_from_slice(&gvec);
            }
            if let Some(g) = grad.as_deref_mut() {
                self.add_density_grad::<N>(s, t, &gvec, g);
            }
            let f = &dens[t * n..(t + 1) * n];
            if t > 0 {
                for j in 0..n {
                    w[j] = f[j] * bhat[j] * scale[t];
                }
                let gm = &gam[gidx(t - 1)..gidx(t - 1) + nn];
                let ap = &alpha[(t - 1) * n..t * n];
                for i in 0..n {
                    let mut b = 0.0;
                    for j in 0..n {
                        b += gm[i * n + j] * w[j];
                    }
                    bnew[i] = b;
                }
                if let Some(g) = grad.as_deref_mut() {
                    let x = &s.cov[(t - 1) * p..t * p];
                    // off-diagonal pairs in the layout order: the row index advances
                    let mut r = 0;
                    for i in 0..n {
                        let gi = ap[i] * bnew[i];
                        let ai = ap[i];
                        for j in 0..n {
                            if j == i {
                                continue;
                            }
                            // ξ(i,j) − Γ_ij γ(i)
                            let gij = gm[i * n + j];
                            let c = gij * (ai * w[j] - gi);
                            if p == 0 {
                                coef[r] += c;
                            } else {
                                let gr = &mut g[bo + r * k..bo + (r + 1) * k];
                                gr[0] += c;
                                for (gc, xc) in gr[1..].iter_mut().zip(x) {
                                    *gc += c * xc;
                                }
                            }
                            r += 1;
                        }
                    }
                }
                std::mem::swap(&mut bhat, &mut bnew);
            } else if let Some(g) = grad.as_deref_mut() {
                self.add_initial_grad(s, &gvec, f, &bhat, 1.0 / scale[0], &delta, &gam[..nn], g);
            }
        }
        if let (Some(g), 0) = (grad, p) {
            {
                for (r, c) in coef.iter().enumerate().take(n * (n - 1)) {
                    g[bo + r] += c;
                }
            }
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

/// Total log-likelihood (and gradient) over all series, parallel over series, summed in
/// series order so that the result does not depend on the number of threads.
pub(crate) fn loglik_grad(
    spec: &ValidSpec,
    data: &Prepared,
    th: &[f64],
    want_grad: bool,
) -> (f64, Vec<f64>) {
    let ev = Evaluator::new(spec, th);
    let np = spec.n_params();
    let parts: Vec<(f64, Vec<f64>)> = data
        .series
        .par_iter()
        .map(|s| {
            if want_grad {
                let mut g = vec![0.0; np];
                let ll = ev.series_pass(s, Some(&mut g), None);
                (ll, g)
            } else {
                (ev.series_pass(s, None, None), Vec::new())
            }
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
