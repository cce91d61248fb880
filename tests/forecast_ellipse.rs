//! Confidence ellipses (Coe 2009, arXiv:0906.4123) against an independent eigen-decomposition.

mod common;

use nalgebra::DMatrix;
use planisphere::forecast::{ellipse_scale, ConfidenceEllipse, ConfidenceLevel, FisherForecast};

fn wrap_half_turn(mut a: f64) -> f64 {
    use std::f64::consts::PI;
    while a <= -PI / 2.0 {
        a += PI;
    }
    while a > PI / 2.0 {
        a -= PI;
    }
    a
}

// Source: Coe 2009 (arXiv:0906.4123) closed forms, checked against numpy 2.4.6 np.linalg.eigh of
// the 2 × 2 covariance (semi-axes = √eigenvalues, angle of the major eigenvector), via
// reference-values/forecast_reference.py.
#[test]
fn ellipse_axes_and_angle_match_numpy_eigen_decomposition() {
    let r = common::read_json("forecast/forecast_reference.json");
    for case in r["ellipses"].as_array().unwrap() {
        let g = |k: &str| case[k].as_f64().unwrap();
        let e = ConfidenceEllipse::from_covariance(
            "x",
            "y",
            (0.0, 0.0),
            g("var_x"),
            g("var_y"),
            g("cov_xy"),
        )
        .unwrap();
        assert!(
            (e.semi_major / g("semi_major") - 1.0).abs() < 1e-13,
            "{case}"
        );
        assert!(
            (e.semi_minor / g("semi_minor") - 1.0).abs() < 1e-12,
            "{case}"
        );
        assert!(
            (wrap_half_turn(e.angle - g("angle"))).abs() < 1e-12,
            "{case}: {}",
            e.angle
        );
    }
}

// Source: Coe 2009 (arXiv:0906.4123): scale factors 1.52, 2.48, 3.44 for 68.3%, 95.4%, 99.73%;
// exact √(χ²₂ quantile) from scipy 1.17.1 stats.chi2.ppf via reference-values/forecast_reference.py.
#[test]
fn scale_factors_match_coe_table_and_chi2_quantiles() {
    let r = common::read_json("forecast/forecast_reference.json");
    let levels = [
        ConfidenceLevel::OneSigma,
        ConfidenceLevel::TwoSigma,
        ConfidenceLevel::ThreeSigma,
    ];
    let tabulated = [1.52, 2.48, 3.44];
    for (i, level) in levels.iter().enumerate() {
        let case = &r["chi2_scales"][i];
        let p = case["probability"].as_f64().unwrap();
        let scipy = case["scale"].as_f64().unwrap();
        assert_eq!(level.probability(), p);
        assert!((level.exact_scale() - scipy).abs() < 1e-12, "{level:?}");
        assert!((ellipse_scale(p).unwrap() - scipy).abs() < 1e-12);
        assert_eq!(level.tabulated_scale(), tabulated[i]);
        // Coe's two-digit values agree with the exact ones to rounding.
        assert!((level.tabulated_scale() - scipy).abs() < 0.01);
    }
    assert!(ellipse_scale(1.0).is_err() && ellipse_scale(0.0).is_err());
}

// Source: definition of the k-scaled ellipse: points x with (x − c)ᵀ Σ⁻¹ (x − c) = k² (Coe 2009).
#[test]
fn polyline_points_lie_on_the_scaled_ellipse() {
    let (vx, vy, cxy) = (2.5e-3, 1.0e-3, 1.4e-3);
    let centre = (0.3, 0.8);
    let e = ConfidenceEllipse::from_covariance("om", "s8", centre, vx, vy, cxy).unwrap();
    let k = ConfidenceLevel::TwoSigma.exact_scale();
    let sigma = DMatrix::from_row_slice(2, 2, &[vx, cxy, cxy, vy]);
    let inv = sigma.try_inverse().unwrap();
    let pts = e.polyline(k, 64).unwrap();
    assert_eq!(pts.len(), 64);
    let (mut sx, mut sy) = (0.0, 0.0);
    for &(x, y) in &pts {
        let d = nalgebra::Vector2::new(x - centre.0, y - centre.1);
        let q = (d.transpose() * &inv * d)[(0, 0)];
        assert!((q / (k * k) - 1.0).abs() < 1e-12, "{q}");
        sx += x;
        sy += y;
    }
    // Equally spaced parametric angles: the points average to the centre.
    assert!((sx / 64.0 - centre.0).abs() < 1e-14 && (sy / 64.0 - centre.1).abs() < 1e-14);
    // The farthest point lies at k·a along the major axis.
    let far = pts
        .iter()
        .map(|&(x, y)| ((x - centre.0).powi(2) + (y - centre.1).powi(2)).sqrt())
        .fold(0.0, f64::max);
    assert!((far / (k * e.semi_major) - 1.0).abs() < 1e-12);
    assert!(e.polyline(k, 2).is_err());
    assert!(e.polyline(0.0, 10).is_err());
}

// Source: Coe 2009 — the ellipse uses the marginalised 2 × 2 block of F⁻¹, not of F.
#[test]
fn ellipse_from_forecast_uses_the_inverse_fisher_block() {
    let f = DMatrix::from_row_slice(3, 3, &[40.0, -12.0, 3.0, -12.0, 9.0, 1.5, 3.0, 1.5, 2.0]);
    let names = vec!["a".to_string(), "b".into(), "c".into()];
    let forecast = FisherForecast::from_fisher_matrix(names, &f).unwrap();
    let e = ConfidenceEllipse::from_forecast(&forecast, "a", "c", (1.0, 2.0)).unwrap();
    let cov = f.try_inverse().unwrap();
    let direct = ConfidenceEllipse::from_covariance(
        "a",
        "c",
        (1.0, 2.0),
        cov[(0, 0)],
        cov[(2, 2)],
        cov[(0, 2)],
    )
    .unwrap();
    assert!((e.semi_major / direct.semi_major - 1.0).abs() < 1e-12);
    assert!((e.semi_minor / direct.semi_minor - 1.0).abs() < 1e-12);
    assert!((e.angle - direct.angle).abs() < 1e-12);
    // a² + b² = σx² + σy² (trace) and a b = √det.
    let tr = cov[(0, 0)] + cov[(2, 2)];
    assert!(((e.semi_major.powi(2) + e.semi_minor.powi(2)) / tr - 1.0).abs() < 1e-12);
    let det = cov[(0, 0)] * cov[(2, 2)] - cov[(0, 2)].powi(2);
    assert!((e.semi_major * e.semi_minor / det.sqrt() - 1.0).abs() < 1e-12);
    let err = ConfidenceEllipse::from_forecast(&forecast, "a", "w", (0.0, 0.0)).unwrap_err();
    assert!(err.to_string().contains("unknown parameter 'w'"), "{err}");
}

// Source: common practice — a non-positive-definite 2 × 2 covariance has no ellipse.
#[test]
fn non_positive_definite_block_is_rejected() {
    let err = ConfidenceEllipse::from_covariance("x", "y", (0.0, 0.0), 1.0, 1.0, 1.0).unwrap_err();
    assert!(
        err.to_string()
            .contains("is not positive definite: no ellipse"),
        "{err}"
    );
}
