//! Finite-difference derivatives, Fisher matrices, marginalised and conditional errors, and the
//! derivative-noise bias, on a linear-Gaussian model whose Fisher matrix is known exactly.

mod common;
mod forecast_support;

use forecast_support::{labels, GaussianSampler, LinearModel};
use nalgebra::{DMatrix, DVector};
use planisphere::forecast::{
    ColumnLabel, CovarianceEstimate, Ensemble, FiniteDifference, FisherForecast, Precision,
};

fn derivatives(
    model: &LinearModel,
    sampler: &mut GaussianSampler,
    steps: &[f64],
    n_d: usize,
) -> Vec<FiniteDifference> {
    steps
        .iter()
        .enumerate()
        .map(|(a, &step)| {
            let plus = sampler.ensemble(&model.shifted_mean(a, step), n_d);
            let minus = sampler.ensemble(&model.shifted_mean(a, -step), n_d);
            FiniteDifference::from_sets(&format!("theta{a}"), step, &plus, &minus, false).unwrap()
        })
        .collect()
}

fn mean_and_se(v: &[f64]) -> (f64, f64, f64) {
    let n = v.len() as f64;
    let m = v.iter().sum::<f64>() / n;
    let sd = (v.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (n - 1.0)).sqrt();
    (m, sd / n.sqrt(), sd)
}

// Source: numpy 2.4.6 np.linalg.inv via reference-values/forecast_reference.py; formulas of
// Tegmark, Taylor & Heavens 1997 (ApJ 480, 22): σ_marg = √((F⁻¹)_aa), σ_cond = 1/√F_aa.
#[test]
fn errors_from_a_fisher_matrix_match_numpy() {
    let r = common::read_json("forecast/forecast_reference.json");
    let case = &r["fisher"];
    let rows: Vec<Vec<f64>> = case["fisher"]
        .as_array()
        .unwrap()
        .iter()
        .map(|r| {
            r.as_array()
                .unwrap()
                .iter()
                .map(|x| x.as_f64().unwrap())
                .collect()
        })
        .collect();
    let f = DMatrix::from_fn(3, 3, |i, j| rows[i][j]);
    let names = vec!["a".to_string(), "b".into(), "c".into()];
    let forecast = FisherForecast::from_fisher_matrix(names, &f).unwrap();
    for a in 0..3 {
        let m = case["marginalised_errors"][a].as_f64().unwrap();
        let c = case["conditional_errors"][a].as_f64().unwrap();
        assert!(
            (forecast.marginalised_errors[a] / m - 1.0).abs() < 1e-13,
            "marg {a}"
        );
        assert!(
            (forecast.conditional_errors[a] / c - 1.0).abs() < 1e-13,
            "cond {a}"
        );
        for b in 0..3 {
            let rho = case["parameter_correlation"][a][b].as_f64().unwrap();
            assert!(
                (forecast.parameter_correlation[a][b] - rho).abs() < 1e-13,
                "rho {a}{b}"
            );
        }
    }
}

// Source: Tegmark, Taylor & Heavens 1997 (ApJ 480, 22): for d = Mθ + n, n ~ N(0, C), the
// Fisher matrix is Mᵀ C⁻¹ M exactly. Expected relative scatter of the recovered σ_marg:
// ≈ 1/√(2(n − p)) = 0.036 for n = 400, p = 10 from the estimated precision (from memory; the
// Hartlap factor makes the precision unbiased), plus derivative noise: F_aa fluctuates by
// 2μ,aᵀΨ e (variance 4 F_aa b/p with b = p/(2 n_d Δ²) its mean inflation, Coulton & Wandelt 2023,
// arXiv:2305.08994), i.e. σ by ≈ √(f/p) with f = b/F_aa = 0.8% here (approximate for the
// marginalised error); the mean inflation shifts σ by ≈ −f/2 = −0.4%.
#[test]
fn linear_gaussian_model_recovers_analytic_marginalised_errors() {
    let model = LinearModel::new();
    let p = model.p();
    let exact =
        FisherForecast::from_fisher_matrix(vec!["theta0".into(), "theta1".into()], &model.fisher())
            .unwrap();
    let (n, n_d, trials) = (400, 100, 40);
    let steps: Vec<f64> = exact.conditional_errors.iter().map(|s| 2.5 * s).collect();
    let mut sampler = GaussianSampler::new(2026, &model.c);
    let mut ratios = [Vec::new(), Vec::new()];
    let mut bias_fraction = [Vec::new(), Vec::new()];
    for _ in 0..trials {
        let fiducial = sampler.ensemble(&model.mean(&model.theta), n);
        let precision = CovarianceEstimate::from_ensemble(&fiducial)
            .unwrap()
            .precision()
            .unwrap();
        let ders = derivatives(&model, &mut sampler, &steps, n_d);
        let f = FisherForecast::from_derivatives(&precision, &ders).unwrap();
        for a in 0..2 {
            ratios[a].push(f.marginalised_errors[a] / exact.marginalised_errors[a]);
            bias_fraction[a].push(f.derivative_bias_fraction.as_ref().unwrap()[a]);
        }
    }
    let f_expected = 0.008;
    let expected_scatter = (1.0 / (2.0 * (n - p) as f64) + f_expected / p as f64).sqrt();
    for a in 0..2 {
        let (m, se, sd) = mean_and_se(&ratios[a]);
        let (bf, _, _) = mean_and_se(&bias_fraction[a]);
        println!(
            "theta{a}: σ_marg exact {:.5}, first trial ratio {:.4}, mean ratio {m:.4} ± {se:.4}, \
             scatter {sd:.4} (expected ≈ {expected_scatter:.4}), derivative bias fraction {bf:.4}",
            exact.marginalised_errors[a], ratios[a][0]
        );
        assert!(
            (ratios[a][0] - 1.0).abs() < 4.0 * expected_scatter,
            "first trial"
        );
        let shift = -0.5 * bf;
        assert!(
            (m - 1.0 - shift).abs() < 4.0 * se + 0.005,
            "mean ratio {m} ± {se}"
        );
        assert!(
            sd > 0.7 * expected_scatter && sd < 1.4 * expected_scatter,
            "scatter {sd}"
        );
        // Estimated derivative bias: p/(2 n_d Δ² F_aa) = 10/(200 · 6.25) = 0.008 in expectation.
        assert!((bf - f_expected).abs() < 0.0015, "bias fraction {bf}");
    }
}

// Source: Coulton & Wandelt 2023 (arXiv:2305.08994): with independent sets of n_d simulations at
// θ ± Δ and Ψ = C⁻¹, E[F̂_aa] − F_aa = tr(Ψ Σ_a) = p/(2 n_d Δ²).
#[test]
fn derivative_noise_bias_estimate_matches_measured_inflation() {
    let model = LinearModel::new();
    let p = model.p();
    let f_exact = model.fisher();
    let precision = Precision::from_known_covariance(labels(p), &model.c).unwrap();
    let n_d = 20;
    // Δ chosen so that the expected inflation equals F_aa.
    let steps: Vec<f64> = (0..2)
        .map(|a| (p as f64 / (2.0 * n_d as f64 * f_exact[(a, a)])).sqrt())
        .collect();
    let trials = 400;
    let mut sampler = GaussianSampler::new(11, &model.c);
    let mut inflation = [Vec::new(), Vec::new()];
    let mut estimate = [Vec::new(), Vec::new()];
    for _ in 0..trials {
        let ders = derivatives(&model, &mut sampler, &steps, n_d);
        let f = FisherForecast::from_derivatives(&precision, &ders).unwrap();
        for a in 0..2 {
            inflation[a].push(f.fisher[a][a] - f_exact[(a, a)]);
            estimate[a].push(f.derivative_bias.as_ref().unwrap()[a]);
        }
        assert!(f
            .warnings
            .iter()
            .any(|w| w.contains("noisy derivative of 'theta0'")));
    }
    for a in 0..2 {
        let analytic = p as f64 / (2.0 * n_d as f64 * steps[a] * steps[a]);
        let (mi, sei, _) = mean_and_se(&inflation[a]);
        let (me, see, _) = mean_and_se(&estimate[a]);
        println!(
            "theta{a}: F_aa {:.3}, analytic bias {analytic:.3}, measured inflation {mi:.3} ± \
             {sei:.3}, mean estimate {me:.3} ± {see:.3}",
            f_exact[(a, a)]
        );
        assert!(analytic > 5.0 * sei, "the test must resolve the bias");
        assert!(
            (mi - analytic).abs() < 4.0 * sei,
            "measured inflation {mi} ± {sei}"
        );
        assert!((me - analytic).abs() < 4.0 * see, "estimate {me} ± {see}");
        assert!((mi - me).abs() < 4.0 * (sei * sei + see * see).sqrt());
    }
}

// Source: common practice — with shared seeds at ±Δ the sample noise cancels in the difference;
// for a linear model it cancels exactly, so the paired derivative equals M and Σ_a ≈ 0.
#[test]
fn paired_seeds_cancel_noise_in_a_linear_model() {
    let model = LinearModel::new();
    let p = model.p();
    let noise = GaussianSampler::new(5, &model.c).ensemble(&DVector::zeros(p), 30);
    let step = 0.1;
    let shifted = |shift: f64| {
        let mu = model.shifted_mean(0, shift);
        let mut values = Vec::new();
        for i in 0..30 {
            values.extend((0..p).map(|j| mu[j] + noise.values()[(i, j)]));
        }
        Ensemble::from_row_major(labels(p), 30, values).unwrap()
    };
    let (plus, minus) = (shifted(step), shifted(-step));
    let paired = FiniteDifference::from_sets("theta0", step, &plus, &minus, true).unwrap();
    let independent = FiniteDifference::from_sets("theta0", step, &plus, &minus, false).unwrap();
    for j in 0..p {
        assert!((paired.derivative[j] - model.m[(j, 0)]).abs() < 1e-12);
    }
    let psi = model.c.clone().try_inverse().unwrap();
    let bias_paired = psi.component_mul(&paired.noise_covariance).sum();
    let bias_independent = psi.component_mul(&independent.noise_covariance).sum();
    assert!(bias_paired < 1e-20, "{bias_paired}");
    assert!(bias_independent > 1.0, "{bias_independent}");
}

// Source: Tegmark, Taylor & Heavens 1997 — proportional derivatives make F singular.
#[test]
fn degenerate_parameters_report_the_condition_number() {
    let f = DMatrix::from_row_slice(2, 2, &[4.0, 2.0, 2.0, 1.0]);
    let err = FisherForecast::from_fisher_matrix(vec!["a".into(), "b".into()], &f).unwrap_err();
    let err = err.to_string();
    assert!(
        err.contains("the Fisher matrix is singular (condition number"),
        "{err}"
    );
    assert!(err.contains("degenerate"), "{err}");
    // Derivative vectors with μ,b = 2 μ,a.
    let p = 5;
    let precision = Precision::from_known_covariance(labels(p), &DMatrix::identity(p, p)).unwrap();
    let mu = DVector::from_fn(p, |j, _| 1.0 + j as f64);
    let make = |name: &str, scale: f64| {
        let rows_p: Vec<Vec<f64>> = (0..2)
            .map(|i| mu.iter().map(|m| scale * m + 0.01 * i as f64).collect())
            .collect();
        let rows_m: Vec<Vec<f64>> = (0..2)
            .map(|i| mu.iter().map(|m| -scale * m + 0.01 * i as f64).collect())
            .collect();
        FiniteDifference::from_sets(
            name,
            1.0,
            &Ensemble::from_rows(labels(p), &rows_p).unwrap(),
            &Ensemble::from_rows(labels(p), &rows_m).unwrap(),
            false,
        )
        .unwrap()
    };
    let err = FisherForecast::from_derivatives(&precision, &[make("a", 1.0), make("b", 2.0)])
        .unwrap_err()
        .to_string();
    assert!(err.contains("singular (condition number"), "{err}");
}

// Source: common practice — a parameter with zero derivative carries no information.
#[test]
fn unconstrained_parameter_is_named() {
    let f = DMatrix::from_row_slice(2, 2, &[4.0, 0.0, 0.0, 0.0]);
    let err = FisherForecast::from_fisher_matrix(vec!["a".into(), "b".into()], &f).unwrap_err();
    assert!(
        err.to_string().contains("parameter 'b' is not constrained"),
        "{err}"
    );
}

// Source: common practice — a finite difference needs a non-zero step.
#[test]
fn zero_step_is_rejected() {
    let e = Ensemble::from_rows(labels(2), &[vec![1.0, 2.0], vec![2.0, 1.0]]).unwrap();
    let err = FiniteDifference::from_sets("omega_m", 0.0, &e, &e, false).unwrap_err();
    assert!(
        err.to_string().contains(
            "finite-difference step for parameter 'omega_m' must be a positive number, got 0"
        ),
        "{err}"
    );
    let err = FiniteDifference::from_sets("omega_m", f64::NAN, &e, &e, false).unwrap_err();
    assert!(err.to_string().contains("got NaN"), "{err}");
}

// Source: common practice — derivative sets must describe the same statistics.
#[test]
fn mismatched_column_counts_between_sets_are_rejected() {
    let a = Ensemble::from_rows(labels(2), &[vec![1.0, 2.0], vec![2.0, 1.0]]).unwrap();
    let b = Ensemble::from_rows(labels(3), &[vec![1.0, 2.0, 3.0], vec![2.0, 1.0, 0.0]]).unwrap();
    let err = FiniteDifference::from_sets("s8", 0.1, &a, &b, false)
        .unwrap_err()
        .to_string();
    assert!(err.contains("derivative sets of parameter 's8'"), "{err}");
    assert!(err.contains("2 columns against 3 columns"), "{err}");
    let renamed = Ensemble::from_rows(
        vec![ColumnLabel::new("d0"), ColumnLabel::new("x")],
        &[vec![1.0, 2.0], vec![2.0, 1.0]],
    )
    .unwrap();
    let err = FiniteDifference::from_sets("s8", 0.1, &a, &renamed, false).unwrap_err();
    assert!(
        err.to_string()
            .contains("column 1 is 'd1' in one ensemble and 'x'"),
        "{err}"
    );
    // A derivative of 2 statistics against a precision of 3.
    let d = FiniteDifference::from_sets("s8", 0.1, &a, &a, false).unwrap();
    let precision = Precision::from_known_covariance(labels(3), &DMatrix::identity(3, 3)).unwrap();
    let err = FisherForecast::from_derivatives(&precision, &[d]).unwrap_err();
    assert!(
        err.to_string()
            .contains("has 2 statistics but the precision matrix has 3"),
        "{err}"
    );
}
