//! Fisher matrices and the parameter errors they forecast.
//!
//! For a Gaussian likelihood whose covariance does not depend on the parameters, the Fisher
//! matrix is (Tegmark, Taylor & Heavens 1997, ApJ 480, 22: the mean-derivative term of the Gaussian
//! Fisher matrix)
//!
//!   F_ab = μ,aᵀ Ψ μ,b,
//!
//! with μ,a the derivative of the mean data vector and Ψ the precision matrix. Its inverse bounds
//! the parameter covariance (Cramér–Rao): the marginalised error of θ_a is √((F⁻¹)_aa), the
//! conditional error (all other parameters fixed) is 1/√F_aa, and the parameter correlation is
//! (F⁻¹)_ab / √((F⁻¹)_aa (F⁻¹)_bb).
//!
//! Noisy derivatives. When μ,a is estimated from simulations with noise covariance Σ_a
//! (see [`crate::forecast::derivative`]), E[μ̂,aᵀ Ψ μ̂,a] = μ,aᵀ Ψ μ,a + tr(Ψ Σ_a): the Fisher
//! matrix is inflated and the errors come out too small (Coulton & Wandelt 2023,
//! arXiv:2305.08994). For independent sets of n_d simulations at ±Δ with the same covariance C
//! and Ψ = C⁻¹ this is p/(2 n_d Δ²). The estimate tr(Ψ Σ_a) is reported beside each F_aa, and as
//! a fraction of it; a fraction above 10% also gives a warning.

use super::covariance::{check_square_finite, spd_inverse, unit_diagonal, Precision};
use super::derivative::FiniteDifference;
use crate::error::{Error, Result};
use nalgebra::{DMatrix, SymmetricEigen};

/// Fisher matrices whose unit-diagonal scaling has a larger condition number than this count as
/// singular (degenerate parameters).
pub const MAX_CONDITION_NUMBER: f64 = 1e12;

/// Derivative-noise bias fractions tr(Ψ Σ_a)/F_aa above this value come with a warning.
pub const DERIVATIVE_BIAS_WARNING: f64 = 0.1;

/// A Fisher forecast: the Fisher matrix, its inverse and the errors derived from them.
#[derive(Debug, Clone, serde::Serialize)]
pub struct FisherForecast {
    /// Parameter names, in the order of the matrix rows.
    pub parameters: Vec<String>,
    /// Fisher matrix F (k × k), row-major as nested rows.
    pub fisher: Vec<Vec<f64>>,
    /// Forecast parameter covariance F⁻¹ (k × k).
    pub parameter_covariance: Vec<Vec<f64>>,
    /// Marginalised errors √((F⁻¹)_aa).
    pub marginalised_errors: Vec<f64>,
    /// Conditional errors 1/√F_aa.
    pub conditional_errors: Vec<f64>,
    /// Parameter correlation (F⁻¹)_ab / √((F⁻¹)_aa (F⁻¹)_bb).
    pub parameter_correlation: Vec<Vec<f64>>,
    /// Condition number of F scaled to unit diagonal (independent of parameter units).
    pub condition_number: f64,
    /// Estimated derivative-noise bias of each F_aa, tr(Ψ Σ_a) (when derivatives are simulated).
    pub derivative_bias: Option<Vec<f64>>,
    /// tr(Ψ Σ_a) / F_aa.
    pub derivative_bias_fraction: Option<Vec<f64>>,
    /// Number of statistics p in the data vector (0 when built from a given Fisher matrix).
    pub n_statistics: usize,
    /// Hartlap factor of the precision matrix (1 for a known covariance or a given matrix).
    pub hartlap_factor: f64,
    /// Warnings from the precision matrix and about the derivatives.
    pub warnings: Vec<String>,
}

fn to_rows(m: &DMatrix<f64>) -> Vec<Vec<f64>> {
    m.row_iter().map(|r| r.iter().copied().collect()).collect()
}

/// Refuses a Fisher matrix that is not k × k for the k `parameters` (at least one), not finite,
/// or not symmetric to 1e-10 of √(F_aa F_bb).
fn check_fisher_matrix(parameters: &[String], fisher: &DMatrix<f64>) -> Result<()> {
    let k = parameters.len();
    if k == 0 {
        return Err(Error::Setting(
            "a Fisher forecast needs at least one parameter".into(),
        ));
    }
    check_square_finite(fisher, k, "Fisher matrix", "parameters")?;
    for a in 0..k {
        for b in 0..a {
            let (x, y) = (fisher[(a, b)], fisher[(b, a)]);
            if (x - y).abs() > 1e-10 * (fisher[(a, a)] * fisher[(b, b)]).abs().sqrt() {
                return Err(Error::Data(format!(
                    "the Fisher matrix is not symmetric: F[{a}][{b}] = {x} but F[{b}][{a}] = {y}"
                )));
            }
        }
    }
    Ok(())
}

impl FisherForecast {
    /// F_ab = μ,aᵀ Ψ μ,b from finite-difference derivatives and a precision matrix, with the
    /// derivative-noise bias tr(Ψ Σ_a) of each F_aa.
    ///
    /// Errors if there are no derivatives, if parameter names repeat, if a derivative's columns
    /// differ from the precision matrix's, or if F is singular.
    pub fn from_derivatives(
        precision: &Precision,
        derivatives: &[FiniteDifference],
    ) -> Result<Self> {
        if derivatives.is_empty() {
            return Err(Error::Setting(
                "a Fisher forecast needs at least one parameter".into(),
            ));
        }
        let p = precision.n_statistics();
        for (a, d) in derivatives.iter().enumerate() {
            if derivatives[..a].iter().any(|e| e.parameter == d.parameter) {
                return Err(Error::Setting(format!(
                    "parameter '{}' is given more than once",
                    d.parameter
                )));
            }
            if d.n_statistics() != p {
                return Err(Error::Mismatch(format!(
                    "the derivative of '{}' has {} statistics but the precision matrix has {p}",
                    d.parameter,
                    d.n_statistics()
                )));
            }
            if let Some(j) = (0..p).find(|&j| d.labels[j].name != precision.labels[j].name) {
                return Err(Error::Mismatch(format!(
                    "column {j} is '{}' in the derivative of '{}' but '{}' in the precision matrix",
                    d.labels[j].name, d.parameter, precision.labels[j].name
                )));
            }
        }
        let k = derivatives.len();
        let psi = &precision.matrix;
        let mut jacobian = DMatrix::zeros(p, k);
        for (a, d) in derivatives.iter().enumerate() {
            jacobian.set_column(a, &d.derivative);
        }
        let weighted = psi * &jacobian;
        let product = jacobian.tr_mul(&weighted);
        let fisher = (&product + product.transpose()) * 0.5;
        let bias: Vec<f64> = derivatives
            .iter()
            .map(|d| psi.component_mul(&d.noise_covariance).sum())
            .collect();
        let names: Vec<String> = derivatives.iter().map(|d| d.parameter.clone()).collect();
        let mut forecast = Self::from_fisher_matrix(names, &fisher)?;
        let fraction: Vec<f64> = bias
            .iter()
            .enumerate()
            .map(|(a, b)| b / fisher[(a, a)])
            .collect();
        let mut warnings = precision.warnings.clone();
        for (a, &f) in fraction.iter().enumerate() {
            if f > DERIVATIVE_BIAS_WARNING {
                warnings.push(format!(
                    "noisy derivative of '{}': its simulation noise inflates F_aa by an estimated \
                     {:.1}% (tr(ΨΣ) = {:.4e}); use more derivative simulations, a larger step or \
                     paired seeds",
                    forecast.parameters[a],
                    100.0 * f,
                    bias[a]
                ));
            }
        }
        forecast.derivative_bias = Some(bias);
        forecast.derivative_bias_fraction = Some(fraction);
        forecast.n_statistics = p;
        forecast.hartlap_factor = precision.hartlap_factor;
        forecast.warnings = warnings;
        Ok(forecast)
    }

    /// Errors and correlations from a given Fisher matrix (symmetric, k × k).
    ///
    /// Errors if the matrix is not square, not finite, not symmetric, has a non-positive diagonal
    /// entry (an unconstrained parameter), or is singular: condition number of its unit-diagonal
    /// scaling above [`MAX_CONDITION_NUMBER`]; the message gives the condition number and the
    /// most degenerate parameter combination.
    pub fn from_fisher_matrix(parameters: Vec<String>, fisher: &DMatrix<f64>) -> Result<Self> {
        check_fisher_matrix(&parameters, fisher)?;
        let k = parameters.len();
        let (scaled, _) = unit_diagonal(fisher).map_err(|a| {
            Error::Data(format!(
                "parameter '{}' is not constrained: F_aa = {} (its derivative vanishes for these \
                 statistics)",
                parameters[a],
                fisher[(a, a)]
            ))
        })?;
        let eigen = SymmetricEigen::new(scaled);
        let (mut lo, mut hi) = (0, 0);
        for i in 0..k {
            if eigen.eigenvalues[i] < eigen.eigenvalues[lo] {
                lo = i;
            }
            if eigen.eigenvalues[i] > eigen.eigenvalues[hi] {
                hi = i;
            }
        }
        let (lmin, lmax) = (eigen.eigenvalues[lo], eigen.eigenvalues[hi]);
        let condition_number = if lmin > 0.0 {
            lmax / lmin
        } else {
            f64::INFINITY
        };
        let singular = |condition_number: f64| {
            let combination: Vec<String> = (0..k)
                .map(|i| format!("{:+.3}·{}", eigen.eigenvectors[(i, lo)], parameters[i]))
                .collect();
            Error::Data(format!(
                "the Fisher matrix is singular (condition number {condition_number:.3e} after \
                 scaling to unit diagonal): the parameters are degenerate for these statistics, \
                 along {} (in units of each conditional error)",
                combination.join(" ")
            ))
        };
        if condition_number.is_nan() || condition_number > MAX_CONDITION_NUMBER {
            return Err(singular(condition_number));
        }
        let covariance = spd_inverse(fisher).map_err(|_| singular(condition_number))?;
        let marginalised: Vec<f64> = (0..k).map(|a| covariance[(a, a)].sqrt()).collect();
        let conditional: Vec<f64> = (0..k).map(|a| 1.0 / fisher[(a, a)].sqrt()).collect();
        let correlation = DMatrix::from_fn(k, k, |a, b| {
            if a == b {
                1.0
            } else {
                covariance[(a, b)] / (marginalised[a] * marginalised[b])
            }
        });
        Ok(FisherForecast {
            parameters,
            fisher: to_rows(fisher),
            parameter_covariance: to_rows(&covariance),
            marginalised_errors: marginalised,
            conditional_errors: conditional,
            parameter_correlation: to_rows(&correlation),
            condition_number,
            derivative_bias: None,
            derivative_bias_fraction: None,
            n_statistics: 0,
            hartlap_factor: 1.0,
            warnings: Vec::new(),
        })
    }

    /// Index of a parameter by name.
    pub fn parameter_index(&self, name: &str) -> Result<usize> {
        self.parameters
            .iter()
            .position(|p| p == name)
            .ok_or_else(|| {
                Error::Setting(format!(
                    "unknown parameter '{name}' (known: {})",
                    self.parameters.join(", ")
                ))
            })
    }

    /// F⁻¹ as a matrix.
    pub fn parameter_covariance_matrix(&self) -> DMatrix<f64> {
        let k = self.parameters.len();
        DMatrix::from_fn(k, k, |a, b| self.parameter_covariance[a][b])
    }

    /// F as a matrix.
    pub fn fisher_matrix(&self) -> DMatrix<f64> {
        let k = self.parameters.len();
        DMatrix::from_fn(k, k, |a, b| self.fisher[a][b])
    }
}
