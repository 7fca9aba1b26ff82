//! Checks against outside references: scipy fixtures for Kendall's tau-b and the exponential
//! convergence fit (generators in tests/reference/features_*.py).

use approx::assert_relative_eq;
use ensemble_features::fit::fit_exponential;
use ensemble_features::trend::kendall_tau_b;
use serde_json::Value;

fn fixture(name: &str) -> Value {
    let path = format!(
        "{}/../../tests/reference/fixtures/{name}",
        env!("CARGO_MANIFEST_DIR")
    );
    let text = std::fs::read_to_string(&path).unwrap_or_else(|e| panic!("read {path}: {e}"));
    serde_json::from_str(&text).expect("fixture is JSON")
}

fn floats(v: &Value) -> Vec<f64> {
    v.as_array()
        .expect("array")
        .iter()
        .map(|x| x.as_f64().expect("number"))
        .collect()
}

/// Kendall tau-b and two-sided p-value against scipy.stats.kendalltau (scipy 1.14.1, method
/// 'auto': exact for small untied samples, tie-corrected normal approximation otherwise).
#[test]
fn kendall_tau_b_matches_scipy() {
    let fx = fixture("features_kendall.json");
    for case in fx["cases"].as_array().unwrap() {
        let name = case["name"].as_str().unwrap();
        let x = floats(&case["x"]);
        let y = floats(&case["y"]);
        let got = kendall_tau_b(&x, &y).unwrap_or_else(|| panic!("{name}: no tau"));
        let tau = case["tau"].as_f64().unwrap();
        let p = case["p_value"].as_f64().unwrap();
        assert_relative_eq!(got.tau, tau, epsilon = 1e-12);
        // The normal tail uses an erfc approximation with fractional error below 1.2e-7
        // (Press et al. 1992), hence the relative tolerance.
        assert!(
            (got.p_value - p).abs() <= 1e-6 * p.max(1e-300),
            "{name}: p {} vs scipy {p}",
            got.p_value
        );
    }
}

/// The exponential convergence fit reaches the same least-squares minimum as
/// scipy.optimize.curve_fit (scipy 1.14.1) on noisy synthetic curves.
#[test]
fn exponential_fit_matches_scipy_curve_fit() {
    let fx = fixture("features_expfit.json");
    for case in fx["cases"].as_array().unwrap() {
        let name = case["name"].as_str().unwrap();
        let fit = fit_exponential(&floats(&case["x"]), &floats(&case["y"]))
            .unwrap_or_else(|| panic!("{name}: no fit"));
        let want = |k: &str| case[k].as_f64().unwrap();
        assert_relative_eq!(fit.asymptote, want("asymptote"), max_relative = 1e-4);
        assert_relative_eq!(fit.amplitude, want("amplitude"), max_relative = 1e-4);
        assert_relative_eq!(fit.rate, want("rate"), max_relative = 1e-4);
        assert_relative_eq!(
            fit.r_squared.unwrap(),
            want("r_squared"),
            max_relative = 1e-6
        );
        assert_relative_eq!(fit.rmse, want("rmse"), max_relative = 1e-4);
    }
}

/// Curve features of a seeded ensemble with undefined skills, against an independent numpy
/// 2.1.3 / scipy 1.14.1 computation (nanmean, nanmedian, nanstd ddof=1, nanpercentile,
/// polyfit, kendalltau) of the definitions in docs/features.md.
#[test]
fn curve_features_match_numpy_recomputation() {
    use ensemble_features::{Ensemble, PairEvidence, compute, index_of};
    let fx = fixture("features_summary.json");
    let library_sizes = fx["library_sizes"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_u64().unwrap() as usize)
        .collect();
    let skills = fx["skills"]
        .as_array()
        .unwrap()
        .iter()
        .map(|row| {
            row.as_array()
                .unwrap()
                .iter()
                .map(|v| v.as_f64().unwrap_or(f64::NAN))
                .collect()
        })
        .collect();
    let ensemble = Ensemble {
        library_sizes,
        skills,
    };
    ensemble.validate().unwrap();
    let row = compute(&PairEvidence::curve_only(ensemble, None));
    let want = fx["features"].as_object().unwrap();
    assert!(want.len() >= 20);
    for (name, value) in want {
        let got = row[index_of(name).unwrap_or_else(|| panic!("{name} not in schema"))]
            .unwrap_or_else(|| panic!("{name} undefined"));
        assert_relative_eq!(
            got,
            value.as_f64().unwrap(),
            epsilon = 1e-10,
            max_relative = 1e-10
        );
    }
}
