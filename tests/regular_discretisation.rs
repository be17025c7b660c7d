//! The closed-form discretisation of Johnson et al. (2008, Ecology 89:1208–1215) against
//! Van Loan's (1978, IEEE Trans. Automatic Control 23:395–404) matrix-exponential method,
//! and against direct numerical quadrature of the covariance integral
//! `Q = ∫₀^Δt e^{As} G Gᵀ e^{Aᵀs} ds` (composite Simpson rule), two independent numerical
//! routes to the same transition and process covariance. Van Loan's block matrix holds
//! `e^{+βΔt}` and loses digits once `βΔt` is large, so it is used up to `βΔt = 5`; the
//! quadrature covers every regime.

use cairn::tracks::regular::{ProcessParams, axis_step};
use nalgebra::{Matrix2, Matrix4};

/// A reference discretisation: (β, σ, Δt) → (transition, process covariance).
type Reference = fn(f64, f64, f64) -> (Matrix2<f64>, Matrix2<f64>);

/// Van Loan: with F = [[−A, G Gᵀ], [0, Aᵀ]] Δt, e^F = [[·, M₁₂], [0, M₂₂]], the transition
/// is M₂₂ᵀ and the process covariance is M₂₂ᵀ M₁₂.
fn van_loan(beta: f64, sigma: f64, dt: f64) -> (Matrix2<f64>, Matrix2<f64>) {
    let a = Matrix2::new(0.0, 1.0, 0.0, -beta);
    let gg = Matrix2::new(0.0, 0.0, 0.0, sigma * sigma);
    let mut f = Matrix4::zeros();
    f.fixed_view_mut::<2, 2>(0, 0).copy_from(&(-a * dt));
    f.fixed_view_mut::<2, 2>(0, 2).copy_from(&(gg * dt));
    f.fixed_view_mut::<2, 2>(2, 2)
        .copy_from(&(a.transpose() * dt));
    let e = f.exp();
    let phi = e.fixed_view::<2, 2>(2, 2).transpose();
    let q = phi * e.fixed_view::<2, 2>(0, 2);
    (phi, (q + q.transpose()) * 0.5)
}

/// Composite Simpson quadrature of the covariance integral, with `e^{As}` from the
/// matrix exponential.
fn quadrature(beta: f64, sigma: f64, dt: f64) -> (Matrix2<f64>, Matrix2<f64>) {
    const INTERVALS: usize = 20_000;
    let a = Matrix2::new(0.0, 1.0, 0.0, -beta);
    let gg = Matrix2::new(0.0, 0.0, 0.0, sigma * sigma);
    let h = dt / INTERVALS as f64;
    let mut q = Matrix2::zeros();
    for i in 0..=INTERVALS {
        let e = (a * (i as f64 * h)).exp();
        let w = if i == 0 || i == INTERVALS {
            1.0
        } else if i % 2 == 1 {
            4.0
        } else {
            2.0
        };
        q += e * gg * e.transpose() * w;
    }
    ((a * dt).exp(), q * (h / 3.0))
}

/// Entry-wise agreement judged on the scale of √(Qᵢᵢ Qⱼⱼ) (covariances) or 1 + |T|
/// (transition).
fn assert_close(reference: Reference, beta: f64, sigma: f64, dt: f64, tol: f64) {
    let ours = axis_step(&ProcessParams::new(beta, sigma).unwrap(), dt);
    let (t, q) = reference(beta, sigma, dt);
    for i in 0..2 {
        for j in 0..2 {
            let ts = 1.0 + t[(i, j)].abs();
            assert!(
                (ours.transition[(i, j)] - t[(i, j)]).abs() <= tol * ts,
                "T[{i},{j}] β={beta} Δt={dt}: {} vs {}",
                ours.transition[(i, j)],
                t[(i, j)]
            );
            let qs = (q[(i, i)] * q[(j, j)]).sqrt();
            assert!(
                (ours.covariance[(i, j)] - q[(i, j)]).abs() <= tol * qs,
                "Q[{i},{j}] β={beta} Δt={dt}: {} vs {}",
                ours.covariance[(i, j)],
                q[(i, j)]
            );
        }
    }
}

#[test]
fn closed_forms_match_van_loan_for_small_and_moderate_beta_dt() {
    // Unit Δt and σ keep all blocks of F of order one; up to βΔt = 5 the e^{βΔt} inside
    // Van Loan's matrix costs at most ~2 digits, so 1e-11 is met with margin and is far
    // below any formula slip.
    for &x in &[1e-6, 1e-4, 1e-3, 0.01, 0.1, 0.3, 0.49, 0.51, 1.0, 2.0, 5.0] {
        assert_close(van_loan, x, 1.0, 1.0, 1e-11);
    }
}

#[test]
fn closed_forms_match_quadrature_in_every_regime() {
    // Simpson with 20 000 panels: the fastest-varying integrand term is e^{−2βs}, with
    // relative truncation error ~(2βh)⁴/180 ≈ 7e-12 at
    // βΔt = 60, hence 1e-9.
    for &x in &[1e-4, 0.01, 0.5, 1.0, 5.0, 30.0, 60.0] {
        assert_close(quadrature, x, 1.0, 1.0, 1e-9);
    }
    // Field scales: persistence 2 h, steps from a minute to two days, σ for a 0.5 m/s
    // velocity sd per axis.
    let beta = 1.0 / 7200.0;
    let sigma = (2.0 * beta * 0.25_f64).sqrt();
    for &dt in &[60.0, 600.0, 3600.0, 7200.0, 86_400.0, 172_800.0] {
        assert_close(quadrature, beta, sigma, dt, 1e-9);
    }
}

#[test]
fn series_and_closed_form_branches_meet() {
    // The position variance switches from a power series to the closed form at
    // β Δt = 0.5. Across a step of 2e-12 it must change by its slope,
    // d Var μ / dΔt = σ²/β² (1 − e^{−βΔt})², and nothing more (1e-14 relative: the
    // closed form loses about one digit to cancellation at 0.5).
    let p = ProcessParams::new(1.0, 1.0).unwrap();
    let step = 1e-12;
    let below = axis_step(&p, 0.5 - step).covariance[(0, 0)];
    let above = axis_step(&p, 0.5 + step).covariance[(0, 0)];
    let slope = (1.0 - (-0.5_f64).exp()).powi(2);
    let jump = above - below - slope * 2.0 * step;
    assert!(jump.abs() <= 1e-14 * above, "{below} vs {above}");
}

#[test]
fn limits_are_brownian_velocity_and_stationary() {
    // Short steps: velocity is a Brownian motion, Var μ → σ² Δt³/3 (Johnson et al. 2008).
    let p = ProcessParams::new(1e-3, 2.0).unwrap();
    let dt = 1e-3;
    let q = axis_step(&p, dt).covariance;
    let expected = 4.0 * dt.powi(3) / 3.0;
    // Next series term is relative β Δt · 3/4 = 7.5e-7.
    assert!((q[(0, 0)] - expected).abs() <= 1e-6 * expected);
    // Long steps: velocity forgets its start and reaches its stationary variance.
    let q = axis_step(&p, 1e5).covariance;
    assert!((q[(1, 1)] - p.stationary_velocity_variance()).abs() <= 1e-12 * q[(1, 1)]);
}
