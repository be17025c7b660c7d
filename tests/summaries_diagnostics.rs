use cairn::summaries::diagnostics::{acf, inverse_normal_cdf, normal_qq, stream_diagnostics};

fn load(path: &str) -> serde_json::Value {
    serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap()
}

fn floats(v: &serde_json::Value) -> Vec<f64> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_f64().unwrap_or(f64::NAN))
        .collect()
}

/// tests/fixtures/normal_quantiles/PROVENANCE.md
#[test]
fn inverse_normal_cdf_matches_scipy() {
    let fx = load("tests/fixtures/normal_quantiles/ppf.json");
    let p = floats(&fx["p"]);
    let q = floats(&fx["q"]);
    assert!(p.len() > 60);
    for (p, q) in p.iter().zip(&q) {
        let ours = inverse_normal_cdf(*p);
        // Both algorithms are accurate to a few ulp; 1e-13 relative (1e-15 absolute
        // near the median) leaves room for that and nothing more.
        let tol = 1e-13 * q.abs() + 1e-15;
        assert!((ours - q).abs() <= tol, "p={p}: {ours} vs {q}");
    }
}

#[test]
fn inverse_normal_cdf_edges() {
    assert_eq!(inverse_normal_cdf(0.5), 0.0);
    assert_eq!(inverse_normal_cdf(0.0), f64::NEG_INFINITY);
    assert_eq!(inverse_normal_cdf(1.0), f64::INFINITY);
    assert!(inverse_normal_cdf(1.5).is_nan());
    assert!(inverse_normal_cdf(f64::NAN).is_nan());
    // Probabilities whose complements are exact in binary, in all three regions.
    for p in [
        2f64.powi(-40),
        2f64.powi(-24),
        2f64.powi(-10),
        0.0625,
        0.375,
    ] {
        assert_eq!(inverse_normal_cdf(p), -inverse_normal_cdf(1.0 - p));
    }
}

/// tests/fixtures/acf/PROVENANCE.md
#[test]
fn acf_matches_statsmodels() {
    let fx = load("tests/fixtures/acf/acf.json");
    let lags = fx["nlags"].as_u64().unwrap() as usize;
    let check = |ours: Vec<f64>, theirs: Vec<f64>| {
        assert_eq!(ours.len(), theirs.len());
        for (k, (o, t)) in ours.iter().zip(&theirs).enumerate() {
            assert!((o - t).abs() < 1e-12, "lag {k}: {o} vs {t}");
        }
    };
    let a = floats(&fx["series_a"]);
    check(acf(&[&a], lags).unwrap(), floats(&fx["acf_a"]));
    let a_nan = floats(&fx["series_a_nan"]);
    check(acf(&[&a_nan], lags).unwrap(), floats(&fx["acf_a_nan"]));
    let b = floats(&fx["series_b"]);
    check(
        acf(&[&a_nan, &b], lags).unwrap(),
        floats(&fx["acf_two_segments"]),
    );
}

#[test]
fn acf_rejects_too_long_lag_and_constant_series() {
    assert!(acf(&[&[1.0, 2.0, 3.0]], 3).is_err());
    assert!(acf(&[&[2.0, 2.0, 2.0]], 1).is_err());
    assert!(acf(&[&[f64::NAN, f64::NAN]], 1).is_err());
}

#[test]
fn qq_uses_blom_positions_and_drops_missing() {
    let q = normal_qq(&[3.0, f64::NAN, 1.0, 2.0]).unwrap();
    assert_eq!(q.sample, vec![1.0, 2.0, 3.0]);
    assert_eq!(q.dropped, 1);
    assert_eq!(q.theoretical[1], 0.0);
    assert_eq!(q.theoretical[0], -q.theoretical[2]);
    assert_eq!(q.theoretical[0], inverse_normal_cdf(0.625 / 3.25));
    let s =
        stream_diagnostics("step", &[&[0.1, -0.3, 0.2], &[1.0, f64::NAN, -1.2, 0.4]], 2).unwrap();
    assert_eq!(s.n, 6);
    assert_eq!(s.acf.len(), 3);
    assert_eq!(s.acf[0], 1.0);
}
