//! Sample covariance of an ensemble, its correlation matrix, and the Hartlap-corrected precision
//! matrix.
//!
//! For `n` simulations x_i of a `p`-vector:
//!
//! - mean x̄ = (1/n) Σ_i x_i;
//! - unbiased sample covariance Ĉ = 1/(n − 1) Σ_i (x_i − x̄)(x_i − x̄)ᵀ;
//! - correlation r_jk = Ĉ_jk / √(Ĉ_jj Ĉ_kk);
//! - precision Ψ = h Ĉ⁻¹ with h = (n − p − 2)/(n − 1) (Hartlap, Simon & Schneider 2007, A&A 464,
//!   399, eq. 17). Ĉ⁻¹ is a biased estimate of C⁻¹ (Ĉ⁻¹ follows an inverse Wishart law with mean
//!   C⁻¹ (n − 1)/(n − p − 2)); the factor h removes that bias for Gaussian data. It requires
//!   n > p + 2. A factor below 0.8 (n < 5p + 6) means the precision matrix is noisy: a warning is
//!   returned with the result.

use super::ensemble::{ColumnLabel, Ensemble};
use crate::error::{Error, Result};
use nalgebra::{Cholesky, DMatrix, DVector};

/// Hartlap factors below this value come with a warning.
pub const HARTLAP_WARNING_THRESHOLD: f64 = 0.8;

/// A column whose variance left unexplained by the preceding columns is below this fraction of its
/// own variance (the squared Cholesky pivot of the correlation matrix, 1 − R²) counts as a linear
/// combination of them: the matrix is then treated as not positive definite.
pub const MIN_RELATIVE_PIVOT: f64 = 1e-12;

/// Hartlap, Simon & Schneider 2007 (A&A 464, 399, eq. 17) de-biasing factor
/// h = (n − p − 2)/(n − 1) for the inverse of a sample covariance from `n` simulations of `p`
/// statistics. Errors when n ≤ p + 2, where no unbiased precision matrix exists.
///
/// # Examples
///
/// Worked from eq. 17: n = 100 simulations of p = 10 statistics give h = 88/99 = 0.888…;
/// n = 6, p = 2 give h = 2/5; n = 12, p = 10 is refused.
///
/// ```
/// use planisphere::forecast::hartlap_factor;
/// assert!((hartlap_factor(100, 10)? - 88.0 / 99.0).abs() < 1e-15);
/// assert!((hartlap_factor(6, 2)? - 0.4).abs() < 1e-15);
/// assert!(hartlap_factor(12, 10).is_err());
/// # Ok::<(), planisphere::Error>(())
/// ```
pub fn hartlap_factor(n_simulations: usize, n_statistics: usize) -> Result<f64> {
    let (n, p) = (n_simulations, n_statistics);
    if n <= p + 2 {
        return Err(Error::Data(format!(
            "{n} simulations are too few for {p} statistics: an unbiased precision matrix \
             (Hartlap et al. 2007) needs more than p + 2 = {} simulations",
            p + 2
        )));
    }
    Ok((n - p - 2) as f64 / (n - 1) as f64)
}

/// Sample mean and unbiased sample covariance of an ensemble.
#[derive(Debug, Clone)]
pub struct CovarianceEstimate {
    /// Column labels, one per statistic.
    pub labels: Vec<ColumnLabel>,
    /// Number of simulations n the estimate comes from.
    pub n_simulations: usize,
    /// Sample mean x̄ (length p).
    pub mean: DVector<f64>,
    /// Unbiased sample covariance Ĉ (p × p, divisor n − 1).
    pub covariance: DMatrix<f64>,
}

impl CovarianceEstimate {
    /// Mean and unbiased covariance Ĉ = 1/(n − 1) Σ_i (x_i − x̄)(x_i − x̄)ᵀ of the ensemble's rows.
    /// Needs at least two simulations. A column whose values are all equal gets exactly zero
    /// variance.
    pub fn from_ensemble(ensemble: &Ensemble) -> Result<Self> {
        let n = ensemble.n_simulations();
        if n < 2 {
            return Err(Error::Data(format!(
                "a covariance needs at least 2 simulations, the ensemble has {n}"
            )));
        }
        let values = ensemble.values();
        let mut mean = ensemble.mean();
        for (j, column) in values.column_iter().enumerate() {
            if column.iter().all(|&v| v == column[0]) {
                mean[j] = column[0];
            }
        }
        let mut centred = values.clone();
        for (j, mut column) in centred.column_iter_mut().enumerate() {
            column.add_scalar_mut(-mean[j]);
        }
        let product = centred.tr_mul(&centred) / (n - 1) as f64;
        let covariance = (&product + product.transpose()) * 0.5;
        Ok(CovarianceEstimate {
            labels: ensemble.labels().to_vec(),
            n_simulations: n,
            mean,
            covariance,
        })
    }

    /// Number of statistics p.
    pub fn n_statistics(&self) -> usize {
        self.labels.len()
    }

    /// Correlation matrix r_jk = Ĉ_jk / √(Ĉ_jj Ĉ_kk). Errors if a column has zero variance.
    pub fn correlation(&self) -> Result<DMatrix<f64>> {
        let names: Vec<String> = self.labels.iter().map(|l| l.name.clone()).collect();
        unit_diagonal(&self.covariance)
            .map(|(r, _)| r)
            .map_err(|j| constant_column_error(&names[j], self.n_simulations))
    }

    /// Precision matrix Ψ = h Ĉ⁻¹ with the Hartlap factor h = (n − p − 2)/(n − 1)
    /// (Hartlap, Simon & Schneider 2007, A&A 464, 399, eq. 17), Ĉ⁻¹ from a Cholesky factorisation.
    ///
    /// Errors if n ≤ p + 2, or if Ĉ is not positive definite, naming the first offending column
    /// (zero variance, or a linear combination of earlier columns). Warns if h < 0.8.
    pub fn precision(&self) -> Result<Precision> {
        let n = self.n_simulations;
        let p = self.n_statistics();
        let factor = hartlap_factor(n, p)?;
        let mut warnings = Vec::new();
        if factor < HARTLAP_WARNING_THRESHOLD {
            warnings.push(format!(
                "Hartlap factor {factor:.4} < {HARTLAP_WARNING_THRESHOLD} with n = {n} \
                 simulations and p = {p} statistics: too few simulations, the precision matrix is \
                 noisy (h ≥ {HARTLAP_WARNING_THRESHOLD} needs n ≥ 5p + 6 = {})",
                5 * p + 6
            ));
        }
        let names: Vec<String> = self.labels.iter().map(|l| l.name.clone()).collect();
        let inverse = spd_inverse(&self.covariance).map_err(|failure| match failure {
            SpdFailure::ZeroDiagonal(j) => constant_column_error(&names[j], n),
            SpdFailure::Dependent { index, pivot } => Error::Data(format!(
                "the covariance is not positive definite: column '{}' is (numerically) a linear \
                 combination of the columns before it (unexplained variance fraction {pivot:.3e}); \
                 remove it or use more simulations",
                names[index]
            )),
        })?;
        Ok(Precision {
            labels: self.labels.clone(),
            matrix: inverse * factor,
            n_simulations: Some(n),
            hartlap_factor: factor,
            warnings,
        })
    }
}

fn constant_column_error(name: &str, n: usize) -> Error {
    Error::Data(format!(
        "the covariance is not positive definite: column '{name}' has zero variance over the \
         {n} simulations (a constant column)"
    ))
}

/// A precision (inverse covariance) matrix Ψ used to weight data vectors.
#[derive(Debug, Clone)]
pub struct Precision {
    /// Column labels, one per statistic.
    pub labels: Vec<ColumnLabel>,
    /// Ψ (p × p).
    pub matrix: DMatrix<f64>,
    /// Number of simulations the covariance was estimated from; `None` for a known covariance.
    pub n_simulations: Option<usize>,
    /// Hartlap factor applied (1 for a known covariance).
    pub hartlap_factor: f64,
    /// Warnings about the estimate (e.g. too few simulations).
    pub warnings: Vec<String>,
}

impl Precision {
    /// The precision of an exactly known covariance `covariance` (e.g. an analytic noise model):
    /// Ψ = C⁻¹ by Cholesky, no Hartlap factor.
    pub fn from_known_covariance(
        labels: Vec<ColumnLabel>,
        covariance: &DMatrix<f64>,
    ) -> Result<Self> {
        check_square_finite(covariance, labels.len(), "covariance", "column labels")?;
        let names: Vec<String> = labels.iter().map(|l| l.name.clone()).collect();
        let inverse = spd_inverse(covariance).map_err(|failure| {
            let j = match failure {
                SpdFailure::ZeroDiagonal(j) => j,
                SpdFailure::Dependent { index, .. } => index,
            };
            Error::Data(format!(
                "the covariance is not positive definite (first failing column: '{}')",
                names[j]
            ))
        })?;
        Ok(Precision {
            labels,
            matrix: inverse,
            n_simulations: None,
            hartlap_factor: 1.0,
            warnings: Vec::new(),
        })
    }

    /// Number of statistics p.
    pub fn n_statistics(&self) -> usize {
        self.labels.len()
    }
}

/// Why a symmetric matrix could not be inverted as positive definite.
#[derive(Debug, Clone, Copy)]
pub(crate) enum SpdFailure {
    /// Diagonal entry `j` is zero or negative.
    ZeroDiagonal(usize),
    /// Row/column `index` is a linear combination of the preceding ones: its squared Cholesky
    /// pivot in the unit-diagonal scaling (1 − R²) is `pivot` < [`MIN_RELATIVE_PIVOT`].
    Dependent { index: usize, pivot: f64 },
}

/// Scales a symmetric matrix to unit diagonal: R = D^{-1/2} A D^{-1/2}. Returns R and D^{-1/2},
/// or the index of the first non-positive diagonal entry.
pub(crate) fn unit_diagonal(
    a: &DMatrix<f64>,
) -> std::result::Result<(DMatrix<f64>, DVector<f64>), usize> {
    let p = a.nrows();
    if let Some(j) = (0..p).find(|&j| a[(j, j)] <= 0.0 || !a[(j, j)].is_finite()) {
        return Err(j);
    }
    let scale = DVector::from_iterator(p, (0..p).map(|j| 1.0 / a[(j, j)].sqrt()));
    let r = DMatrix::from_fn(p, p, |i, j| {
        if i == j {
            1.0
        } else {
            a[(i, j)] * scale[i] * scale[j]
        }
    });
    Ok((r, scale))
}

/// Refuses a matrix `name` that is not `n` × `n` for the `n` `items` it should cover, or that
/// holds a value that is not finite (the covariance of p statistics, a Fisher matrix of k
/// parameters).
pub(crate) fn check_square_finite(
    m: &DMatrix<f64>,
    n: usize,
    name: &str,
    items: &str,
) -> Result<()> {
    if m.nrows() != n || m.ncols() != n {
        return Err(Error::Mismatch(format!(
            "{name} is {} × {} but there are {n} {items}",
            m.nrows(),
            m.ncols()
        )));
    }
    if m.iter().any(|v| !v.is_finite()) {
        return Err(Error::Data(format!(
            "the {name} contains a value that is not finite"
        )));
    }
    Ok(())
}

/// Inverse of a symmetric positive-definite matrix through the Cholesky factorisation of its
/// unit-diagonal scaling R = D^{-1/2} A D^{-1/2}: A⁻¹ = D^{-1/2} R⁻¹ D^{-1/2}. The scaling makes
/// the result independent of the units of each row/column. Each squared pivot L_jj² of R is the
/// fraction of variable j not explained by variables 0..j (1 − R²); a pivot below
/// [`MIN_RELATIVE_PIVOT`] is reported as a dependent row.
pub(crate) fn spd_inverse(a: &DMatrix<f64>) -> std::result::Result<DMatrix<f64>, SpdFailure> {
    let (r, scale) = unit_diagonal(a).map_err(SpdFailure::ZeroDiagonal)?;
    let p = r.nrows();
    // Non-positive pivots are replaced by a tiny positive value so that the first failing pivot
    // can be located; any such factorisation is rejected below.
    let chol =
        Cholesky::new_with_substitute(r, f64::MIN_POSITIVE).ok_or(SpdFailure::Dependent {
            index: 0,
            pivot: 0.0,
        })?;
    let l = chol.l();
    if let Some(index) = (0..p).find(|&j| {
        let pivot = l[(j, j)] * l[(j, j)];
        pivot.is_nan() || pivot < MIN_RELATIVE_PIVOT
    }) {
        return Err(SpdFailure::Dependent {
            index,
            pivot: l[(index, index)] * l[(index, index)],
        });
    }
    let r_inverse = chol.inverse();
    let inverse = DMatrix::from_fn(p, p, |i, j| r_inverse[(i, j)] * scale[i] * scale[j]);
    Ok((&inverse + inverse.transpose()) * 0.5)
}
