//! Derivatives of the mean data vector with respect to a parameter, by central finite differences
//! of simulation sets, and the noise they carry.
//!
//! With simulations at θ_a + Δ_a (n₊ of them) and θ_a − Δ_a (n₋):
//!
//!   μ,a = (x̄₊ − x̄₋) / (2Δ_a).
//!
//! For independent simulation sets the covariance of this estimate is
//!
//!   Σ_a = (C₊/n₊ + C₋/n₋) / (4Δ_a²),
//!
//! with C± the sample covariances of the two sets (= (C₊ + C₋)/(4 n_d Δ²) for n₊ = n₋ = n_d).
//! This noise inflates the Fisher matrix built from μ,a by tr(Ψ Σ_a) on average
//! (Coulton & Wandelt 2023, arXiv:2305.08994): see [`crate::forecast::fisher`].
//!
//! When the two sets share their random seeds (simulation i at +Δ and at −Δ from the same seed),
//! most of the cosmic variance cancels in the difference and the derivative is much less noisy;
//! its noise is then estimated from the per-seed differences: Σ_a = Cov(x₊ᵢ − x₋ᵢ)/(4 n Δ²)
//! ([`FiniteDifference::from_sets`] with `paired`).

use super::covariance::CovarianceEstimate;
use super::ensemble::{ColumnLabel, Ensemble};
use crate::error::{Error, Result};
use nalgebra::{DMatrix, DVector};

/// A finite-difference derivative μ,a of the mean data vector with the covariance of its noise.
#[derive(Debug, Clone)]
pub struct FiniteDifference {
    /// Name of the parameter θ_a.
    pub parameter: String,
    /// Half step Δ_a (simulations at θ_a ± Δ_a).
    pub step: f64,
    /// Column labels of the data vector.
    pub labels: Vec<ColumnLabel>,
    /// μ,a = (x̄₊ − x̄₋)/(2Δ_a).
    pub derivative: DVector<f64>,
    /// Σ_a, the covariance of the noise in μ,a estimated from the simulation sets themselves.
    pub noise_covariance: DMatrix<f64>,
    /// Number of simulations at θ_a + Δ_a.
    pub n_plus: usize,
    /// Number of simulations at θ_a − Δ_a.
    pub n_minus: usize,
    /// Whether the two sets share seeds (noise estimated from per-seed differences).
    pub paired: bool,
}

fn check_inputs(parameter: &str, step: f64, plus: &Ensemble, minus: &Ensemble) -> Result<()> {
    if !(step.is_finite() && step > 0.0) {
        return Err(Error::Setting(format!(
            "finite-difference step for parameter '{parameter}' must be a positive number, got {step}"
        )));
    }
    plus.check_same_columns(
        minus,
        &format!("derivative sets of parameter '{parameter}' (+step against −step)"),
    )?;
    for (sign, set) in [("+", plus), ("−", minus)] {
        if set.n_simulations() < 2 {
            return Err(Error::Data(format!(
                "derivative set {sign}step of parameter '{parameter}' has {} simulation(s); at \
                 least 2 are needed to estimate its noise",
                set.n_simulations()
            )));
        }
    }
    Ok(())
}

impl FiniteDifference {
    /// Central difference from the simulation sets at θ_a ± Δ_a (`step` = Δ_a > 0), `paired`
    /// when row i of `plus` and row i of `minus` come from the same seed:
    ///
    /// * independent sets: μ,a = (x̄₊ − x̄₋)/(2Δ_a), Σ_a = (C₊/n₊ + C₋/n₋)/(4Δ_a²);
    /// * paired sets (same number of rows): μ,a = mean(x₊ᵢ − x₋ᵢ)/(2Δ_a) and
    ///   Σ_a = Cov(x₊ᵢ − x₋ᵢ)/(4 n Δ_a²).
    pub fn from_sets(
        parameter: &str,
        step: f64,
        plus: &Ensemble,
        minus: &Ensemble,
        paired: bool,
    ) -> Result<Self> {
        check_inputs(parameter, step, plus, minus)?;
        let (np, nm) = (plus.n_simulations(), minus.n_simulations());
        let (derivative, noise_covariance) = if paired {
            if nm != np {
                return Err(Error::Mismatch(format!(
                    "paired derivative sets of parameter '{parameter}' have {np} and {nm} \
                     simulations; pairing by seed needs equal counts"
                )));
            }
            let differences = plus.values() - minus.values();
            let p = plus.n_statistics();
            let flat: Vec<f64> = (0..np)
                .flat_map(|i| (0..p).map(move |j| (i, j)))
                .map(|(i, j)| differences[(i, j)])
                .collect();
            let diff_ensemble = Ensemble::from_row_major(plus.labels().to_vec(), np, flat)?;
            let cd = CovarianceEstimate::from_ensemble(&diff_ensemble)?;
            (
                cd.mean / (2.0 * step),
                cd.covariance / (4.0 * step * step * np as f64),
            )
        } else {
            let cp = CovarianceEstimate::from_ensemble(plus)?;
            let cm = CovarianceEstimate::from_ensemble(minus)?;
            (
                (&cp.mean - &cm.mean) / (2.0 * step),
                (cp.covariance / np as f64 + cm.covariance / nm as f64) / (4.0 * step * step),
            )
        };
        Ok(FiniteDifference {
            parameter: parameter.to_string(),
            step,
            labels: plus.labels().to_vec(),
            derivative,
            noise_covariance,
            n_plus: np,
            n_minus: nm,
            paired,
        })
    }

    /// Number of statistics p.
    pub fn n_statistics(&self) -> usize {
        self.labels.len()
    }

    /// The derivative restricted to the given columns (in the given order).
    pub fn select(&self, columns: &[usize]) -> Result<Self> {
        if let Some(&j) = columns.iter().find(|&&j| j >= self.n_statistics()) {
            return Err(Error::Setting(format!(
                "column index {j} is out of range: the derivative of '{}' has {} columns",
                self.parameter,
                self.n_statistics()
            )));
        }
        Ok(FiniteDifference {
            parameter: self.parameter.clone(),
            step: self.step,
            labels: columns.iter().map(|&j| self.labels[j].clone()).collect(),
            derivative: self.derivative.select_rows(columns),
            noise_covariance: self
                .noise_covariance
                .select_rows(columns)
                .select_columns(columns),
            n_plus: self.n_plus,
            n_minus: self.n_minus,
            paired: self.paired,
        })
    }
}
