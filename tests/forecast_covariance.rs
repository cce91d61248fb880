//! Sample covariance, correlation and Hartlap-corrected precision of ensembles.

mod common;
mod forecast_support;

use forecast_support::{labels, GaussianSampler, LinearModel};
use nalgebra::{DMatrix, DVector};
use planisphere::forecast::{hartlap_factor, ColumnLabel, CovarianceEstimate, Ensemble};

fn json_matrix(v: &serde_json::Value) -> Vec<Vec<f64>> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|r| {
            r.as_array()
                .unwrap()
                .iter()
                .map(|x| x.as_f64().unwrap())
                .collect()
        })
        .collect()
}

fn json_vector(v: &serde_json::Value) -> Vec<f64> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_f64().unwrap())
        .collect()
}

fn reference_ensemble() -> (Ensemble, serde_json::Value) {
    let r = common::read_json("forecast/forecast_reference.json");
    let case = r["covariance"].clone();
    let rows = json_matrix(&case["data"]);
    let p = rows[0].len();
    (Ensemble::from_rows(labels(p), &rows).unwrap(), case)
}

fn assert_matrix_close(got: &DMatrix<f64>, want: &[Vec<f64>], rel: f64, what: &str) {
    let scale = want.iter().flatten().fold(0.0f64, |m, v| m.max(v.abs()));
    for (i, row) in want.iter().enumerate() {
        for (j, &w) in row.iter().enumerate() {
            let g = got[(i, j)];
            assert!(
                (g - w).abs() <= rel * scale,
                "{what}[{i}][{j}] = {g}, numpy gives {w}"
            );
        }
    }
}

// Source: Hartlap, Simon & Schneider 2007, A&A 464, 399, eq. 17; values in
// shared reference facts (0.787879, 0.898899).
#[test]
fn hartlap_factor_matches_published_values() {
    assert!((hartlap_factor(100, 20).unwrap() - 0.787879).abs() < 5e-7);
    assert!((hartlap_factor(1000, 100).unwrap() - 0.898899).abs() < 5e-7);
    // (n − p − 2)/(n − 1) at the smallest allowed n = p + 3: 1/(p + 2).
    assert!((hartlap_factor(13, 10).unwrap() - 1.0 / 12.0).abs() < 1e-15);
}

// Source: Hartlap et al. 2007 eq. 17 requires p < n − 2.
#[test]
fn hartlap_factor_rejects_too_few_simulations() {
    let e = hartlap_factor(12, 10).unwrap_err().to_string();
    assert!(
        e.contains("12 simulations are too few for 10 statistics"),
        "{e}"
    );
    assert!(e.contains("more than p + 2 = 12"), "{e}");
}

// Source: numpy 2.4.6 np.mean / np.cov(ddof=1) / np.corrcoef / np.linalg.inv, via
// reference-values/forecast_reference.py.
#[test]
fn mean_covariance_correlation_and_precision_match_numpy() {
    let (ensemble, case) = reference_ensemble();
    let est = CovarianceEstimate::from_ensemble(&ensemble).unwrap();
    let mean = json_vector(&case["mean"]);
    for (j, &m) in mean.iter().enumerate() {
        assert!(
            (est.mean[j] - m).abs() <= 1e-13 * m.abs().max(1.0),
            "mean[{j}]"
        );
    }
    assert_matrix_close(
        &est.covariance,
        &json_matrix(&case["covariance"]),
        1e-12,
        "covariance",
    );
    let corr = est.correlation().unwrap();
    assert_matrix_close(
        &corr,
        &json_matrix(&case["correlation"]),
        1e-12,
        "correlation",
    );
    let precision = est.precision().unwrap();
    let h = case["hartlap_factor"].as_f64().unwrap();
    assert!((precision.hartlap_factor - h).abs() < 1e-15);
    assert_eq!(precision.n_simulations, Some(40));
    // Columns span scales from 0.1 to 30: compare each entry relative to √(Ψ_ii Ψ_jj).
    let want = json_matrix(&case["precision"]);
    for i in 0..6 {
        for j in 0..6 {
            let s = (want[i][i] * want[j][j]).sqrt();
            assert!(
                (precision.matrix[(i, j)] - want[i][j]).abs() <= 1e-10 * s,
                "precision[{i}][{j}] = {}, numpy gives {}",
                precision.matrix[(i, j)],
                want[i][j]
            );
        }
    }
    // n = 40, p = 6: h = 32/39 = 0.82 ≥ 0.8, no warning.
    assert!(precision.warnings.is_empty(), "{:?}", precision.warnings);
}

// Source: Hartlap et al. 2007 eq. 17 — the factor makes the precision unbiased for Gaussian data:
// E[h Ĉ⁻¹] = C⁻¹, so E[tr(C Ψ)]/p = 1, whereas the raw inverse gives 1/h = 1.61 here.
#[test]
fn hartlap_corrected_precision_is_unbiased() {
    let model = LinearModel::new();
    let (n, p, trials) = (30, model.p(), 300);
    let mut sampler = GaussianSampler::new(7, &model.c);
    let mean = DVector::zeros(p);
    let ratios: Vec<f64> = (0..trials)
        .map(|_| {
            let e = sampler.ensemble(&mean, n);
            let psi = CovarianceEstimate::from_ensemble(&e)
                .unwrap()
                .precision()
                .unwrap();
            (&model.c * &psi.matrix).trace() / p as f64
        })
        .collect();
    let avg = ratios.iter().sum::<f64>() / trials as f64;
    let var = ratios.iter().map(|r| (r - avg).powi(2)).sum::<f64>() / (trials - 1) as f64;
    let se = (var / trials as f64).sqrt();
    println!("mean tr(CΨ)/p = {avg:.4} ± {se:.4} over {trials} trials (n = {n}, p = {p})");
    assert!((avg - 1.0).abs() < 4.0 * se, "mean {avg} ± {se}");
    let h = hartlap_factor(n, p).unwrap();
    assert!(
        (avg / h - 1.0).abs() > 10.0 * se,
        "the uncorrected inverse must be visibly biased"
    );
}

// Source: Hartlap et al. 2007 eq. 17 (h = 0.787879 at n = 100, p = 20); the 0.8 threshold is
// common practice.
#[test]
fn few_simulations_give_a_warning_naming_n_and_p() {
    let mut sampler = GaussianSampler::new(3, &DMatrix::identity(20, 20));
    let e = sampler.ensemble(&DVector::zeros(20), 100);
    let psi = CovarianceEstimate::from_ensemble(&e)
        .unwrap()
        .precision()
        .unwrap();
    assert_eq!(psi.warnings.len(), 1);
    let w = &psi.warnings[0];
    assert!(
        w.contains("0.7879") && w.contains("n = 100") && w.contains("p = 20"),
        "{w}"
    );
    assert!(w.contains("too few simulations"), "{w}");
}

// Source: Hartlap et al. 2007 eq. 17 (no unbiased precision for n ≤ p + 2).
#[test]
fn precision_rejects_n_not_above_p_plus_2() {
    let mut sampler = GaussianSampler::new(4, &DMatrix::identity(10, 10));
    let e = sampler.ensemble(&DVector::zeros(10), 12);
    let err = CovarianceEstimate::from_ensemble(&e)
        .unwrap()
        .precision()
        .unwrap_err();
    assert!(
        err.to_string()
            .contains("12 simulations are too few for 10 statistics"),
        "{err}"
    );
}

// Source: common practice — a covariance with a zero-variance column has no inverse.
#[test]
fn constant_column_is_named_in_the_error() {
    let mut sampler = GaussianSampler::new(5, &DMatrix::identity(4, 4));
    let e = sampler.ensemble(&DVector::zeros(4), 50);
    let mut values: Vec<f64> = Vec::new();
    for i in 0..50 {
        for j in 0..4 {
            values.push(if j == 2 { 0.1 } else { e.values()[(i, j)] });
        }
    }
    let mut labels = labels(4);
    labels[2].name = "S1_j2".into();
    let e = Ensemble::from_row_major(labels, 50, values).unwrap();
    let est = CovarianceEstimate::from_ensemble(&e).unwrap();
    assert_eq!(est.covariance[(2, 2)], 0.0);
    let err = est.precision().unwrap_err().to_string();
    assert!(err.contains("column 'S1_j2' has zero variance"), "{err}");
    assert!(err.contains("not positive definite"), "{err}");
    let err = est.correlation().unwrap_err().to_string();
    assert!(err.contains("'S1_j2'"), "{err}");
}

// Source: common practice — a column equal to a sum of others makes the covariance singular.
#[test]
fn linearly_dependent_column_is_named_in_the_error() {
    let mut sampler = GaussianSampler::new(6, &DMatrix::identity(3, 3));
    let e = sampler.ensemble(&DVector::zeros(3), 50);
    let mut values = Vec::new();
    for i in 0..50 {
        let r = e.values().row(i);
        values.extend([r[0], r[1], 0.3 * r[0] - 2.0 * r[1], r[2]]);
    }
    let labels = vec![
        ColumnLabel::new("a"),
        ColumnLabel::new("b"),
        ColumnLabel::new("a_minus_b"),
        ColumnLabel::new("c"),
    ];
    let e = Ensemble::from_row_major(labels, 50, values).unwrap();
    let err = CovarianceEstimate::from_ensemble(&e)
        .unwrap()
        .precision()
        .unwrap_err();
    let err = err.to_string();
    assert!(
        err.contains("column 'a_minus_b' is (numerically) a linear combination"),
        "{err}"
    );
}

// Source: common practice — NaN in a data vector is unusable input.
#[test]
fn nan_in_the_data_is_rejected_with_its_position() {
    let rows = vec![vec![1.0, 2.0], vec![3.0, f64::NAN], vec![0.0, 1.0]];
    let err = Ensemble::from_rows(labels(2), &rows)
        .unwrap_err()
        .to_string();
    assert!(
        err.contains("row 1, column 1 ('d1') is not a finite number"),
        "{err}"
    );
}

// Source: common practice — every data vector must have one value per label.
#[test]
fn rows_of_the_wrong_length_are_rejected() {
    let rows = vec![vec![1.0, 2.0], vec![3.0]];
    let err = Ensemble::from_rows(labels(2), &rows)
        .unwrap_err()
        .to_string();
    assert!(
        err.contains("row 1 has 1 values but there are 2 column labels"),
        "{err}"
    );
}

// Source: common practice — results must not depend on anything but the inputs.
#[test]
fn covariance_is_bitwise_reproducible() {
    let (ensemble, _) = reference_ensemble();
    let a = CovarianceEstimate::from_ensemble(&ensemble)
        .unwrap()
        .precision()
        .unwrap();
    let b = CovarianceEstimate::from_ensemble(&ensemble)
        .unwrap()
        .precision()
        .unwrap();
    assert!(a
        .matrix
        .iter()
        .zip(b.matrix.iter())
        .all(|(x, y)| x.to_bits() == y.to_bits()));
}
