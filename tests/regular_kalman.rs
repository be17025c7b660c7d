//! The filter, likelihood and smoother against statsmodels' general-purpose state-space
//! Kalman smoother on the same time-varying system (fixture
//! `tests/fixtures/regular_kalman_statsmodels`, see its PROVENANCE.md).

use cairn::tracks::regular::{
    Epoch, ErrorCovariance, Observation, ProcessParams, StatePrior, filter_smooth, log_likelihood,
};
use nalgebra::{Matrix4, Vector4};

const DIR: &str = concat!(
    env!("CARGO_MANIFEST_DIR"),
    "/tests/fixtures/regular_kalman_statsmodels"
);

/// Relative agreement asked of every value. The reference builds T and Q by a matrix
/// exponential rather than our closed forms (≈1e-13 apart), and both filters accumulate
/// rounding over ~100 steps, so 1e-8 leaves ample room while still catching any algebra
/// slip (which shows at 1e-3 or worse).
const REL_TOL: f64 = 1e-8;

fn read_csv(name: &str) -> (Vec<String>, Vec<Vec<String>>) {
    let text = std::fs::read_to_string(format!("{DIR}/{name}")).expect("fixture present");
    let mut lines = text.lines();
    let header = lines
        .next()
        .unwrap()
        .split(',')
        .map(str::to_owned)
        .collect();
    let rows = lines
        .map(|l| l.split(',').map(str::to_owned).collect())
        .collect();
    (header, rows)
}

fn col(header: &[String], name: &str) -> usize {
    header.iter().position(|h| h == name).unwrap()
}

struct Fixture {
    epochs: Vec<Epoch>,
    params: ProcessParams,
    prior: StatePrior,
    log_likelihood: f64,
    python_cov: Vec<Option<[f64; 3]>>,
}

fn load() -> Fixture {
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(format!("{DIR}/params.json")).unwrap())
            .unwrap();
    let params = ProcessParams::new(
        json["beta"].as_f64().unwrap(),
        json["sigma"].as_f64().unwrap(),
    )
    .unwrap();
    let (h, rows) = read_csv("epochs.csv");
    let f = |r: &Vec<String>, name: &str| -> f64 { r[col(&h, name)].parse().unwrap() };
    let mut epochs = Vec::new();
    let mut python_cov = Vec::new();
    for r in &rows {
        let observation = if r[col(&h, "has_obs")] == "1" {
            let error = if r[col(&h, "kind")] == "ellipse" {
                ErrorCovariance::from_ellipse(f(r, "a"), f(r, "b"), f(r, "orientation_deg"))
                    .unwrap()
            } else {
                ErrorCovariance::diagonal(f(r, "a"), f(r, "b")).unwrap()
            };
            Some(Observation {
                x: f(r, "x"),
                y: f(r, "y"),
                error,
            })
        } else {
            None
        };
        python_cov.push(observation.map(|_| [f(r, "r_xx"), f(r, "r_xy"), f(r, "r_yy")]));
        epochs.push(Epoch {
            time: f(r, "time"),
            observation,
        });
    }
    let first = epochs[0].observation.unwrap();
    let prior = StatePrior::diffuse_position(
        first.x,
        first.y,
        json["position_sd"].as_f64().unwrap(),
        &params,
    );
    Fixture {
        epochs,
        params,
        prior,
        log_likelihood: json["log_likelihood"].as_f64().unwrap(),
        python_cov,
    }
}

fn upper_index() -> Vec<(usize, usize)> {
    (0..4).flat_map(|i| (i..4).map(move |j| (i, j))).collect()
}

/// Means are compared on the scale of the value plus its standard deviation, and
/// covariances on the scale of the value plus √(Pᵢᵢ Pⱼⱼ): an off-diagonal that is
/// nearly zero is judged against the variances it derives from.
fn check_moments(label: &str, k: usize, mean: &Vector4<f64>, cov: &Matrix4<f64>, expected: &[f64]) {
    for i in 0..4 {
        let scale = expected[i].abs() + cov[(i, i)].sqrt();
        assert!(
            (mean[i] - expected[i]).abs() <= REL_TOL * scale,
            "{label} mean[{i}] at epoch {k}: ours {} statsmodels {}",
            mean[i],
            expected[i]
        );
    }
    for (n, (i, j)) in upper_index().into_iter().enumerate() {
        let e = expected[4 + n];
        let scale = e.abs() + (cov[(i, i)] * cov[(j, j)]).sqrt();
        assert!(
            (cov[(i, j)] - e).abs() <= REL_TOL * scale,
            "{label} cov[{i},{j}] at epoch {k}: ours {} statsmodels {e}",
            cov[(i, j)]
        );
    }
}

#[test]
fn filter_and_smoother_match_statsmodels() {
    let fx = load();
    let out = filter_smooth(&fx.epochs, &fx.params, &fx.prior).unwrap();
    let rel = (out.log_likelihood - fx.log_likelihood).abs() / fx.log_likelihood.abs();
    assert!(
        rel < REL_TOL,
        "log-likelihood: ours {} statsmodels {}",
        out.log_likelihood,
        fx.log_likelihood
    );
    let (_, rows) = read_csv("expected.csv");
    assert_eq!(rows.len(), fx.epochs.len());
    for (k, r) in rows.iter().enumerate() {
        let v: Vec<f64> = r.iter().map(|s| s.parse().unwrap()).collect();
        check_moments(
            "filtered",
            k,
            &out.filtered_mean[k],
            &out.filtered_cov[k],
            &v[..14],
        );
        check_moments(
            "smoothed",
            k,
            &out.smoothed_mean[k],
            &out.smoothed_cov[k],
            &v[14..],
        );
    }
}

#[test]
fn likelihood_only_pass_equals_full_pass() {
    // The fit uses the storage-free pass; it must be the same number as the full one.
    let fx = load();
    let full = filter_smooth(&fx.epochs, &fx.params, &fx.prior).unwrap();
    let lean = log_likelihood(&fx.epochs, &fx.params, &fx.prior).unwrap();
    assert_eq!(full.log_likelihood, lean);
}

#[test]
fn ellipse_conversion_matches_rotation_matrix_form() {
    // Python built R diag(a², b²) Rᵀ; we use the expanded trigonometric form.
    let fx = load();
    let mut checked = 0;
    for (e, py) in fx.epochs.iter().zip(&fx.python_cov) {
        if let (Some(o), Some([xx, xy, yy])) = (e.observation, py) {
            let scale = (xx * yy).sqrt();
            // 1e-12: both are a handful of double-precision products of the same inputs.
            assert!((o.error.xx() - xx).abs() <= 1e-12 * scale);
            assert!((o.error.xy() - xy).abs() <= 1e-12 * scale);
            assert!((o.error.yy() - yy).abs() <= 1e-12 * scale);
            checked += usize::from(*xy != 0.0);
        }
    }
    assert!(checked > 20, "fixture must contain correlated errors");
}

#[test]
fn correlated_error_changes_the_answer() {
    // Guard against an update that silently ignores the off-diagonal term: dropping it
    // must move the likelihood.
    let fx = load();
    let diagonalised: Vec<Epoch> = fx
        .epochs
        .iter()
        .map(|e| Epoch {
            time: e.time,
            observation: e.observation.map(|mut o| {
                o.error = ErrorCovariance::new(o.error.xx(), 0.0, o.error.yy()).unwrap();
                o
            }),
        })
        .collect();
    let a = log_likelihood(&fx.epochs, &fx.params, &fx.prior).unwrap();
    let b = log_likelihood(&diagonalised, &fx.params, &fx.prior).unwrap();
    assert!((a - b).abs() > 1.0, "{a} vs {b}");
}
