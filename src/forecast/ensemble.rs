//! Ensembles of data vectors: one row per simulation, one labelled column per statistic.

use crate::error::{Error, Result};
use nalgebra::{DMatrix, DVector};

/// The label of one statistic (one column of an ensemble): a name, and optionally the scale the
/// statistic belongs to (a multipole, a wavelet scale j, an angular scale, ...) so that scale cuts
/// can be applied with [`crate::forecast::ScaleCut`].
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct ColumnLabel {
    /// Name of the statistic, e.g. `"S1_j3"` or `"cl_ell_120"`.
    pub name: String,
    /// Scale attached to the statistic, in whatever unit the caller uses consistently.
    pub scale: Option<f64>,
}

impl ColumnLabel {
    /// A label without a scale.
    pub fn new(name: impl Into<String>) -> Self {
        ColumnLabel {
            name: name.into(),
            scale: None,
        }
    }

    /// A label with a scale.
    pub fn with_scale(name: impl Into<String>, scale: f64) -> Self {
        ColumnLabel {
            name: name.into(),
            scale: Some(scale),
        }
    }
}

/// An ensemble of simulated data vectors: `n` rows (simulations) × `p` columns (statistics).
///
/// All values are finite and there is one label per column; both are checked on construction.
#[derive(Debug, Clone)]
pub struct Ensemble {
    labels: Vec<ColumnLabel>,
    values: DMatrix<f64>,
}

impl Ensemble {
    /// Builds an ensemble from rows (one `Vec` per simulation).
    ///
    /// Errors if there are no rows or no labels, if a row's length differs from the number of
    /// labels, or if a value is not finite (NaN or infinite), naming the row and column.
    pub fn from_rows(labels: Vec<ColumnLabel>, rows: &[Vec<f64>]) -> Result<Self> {
        let p = labels.len();
        if let Some((i, row)) = rows.iter().enumerate().find(|(_, r)| r.len() != p) {
            return Err(Error::Mismatch(format!(
                "ensemble row {i} has {} values but there are {p} column labels",
                row.len()
            )));
        }
        let flat: Vec<f64> = rows.iter().flat_map(|r| r.iter().copied()).collect();
        Self::from_row_major(labels, rows.len(), flat)
    }

    /// Builds an ensemble from `n_rows` rows stored one after the other in `values`.
    pub fn from_row_major(
        labels: Vec<ColumnLabel>,
        n_rows: usize,
        values: Vec<f64>,
    ) -> Result<Self> {
        let p = labels.len();
        if p == 0 {
            return Err(Error::Data("ensemble has no columns".into()));
        }
        if n_rows == 0 {
            return Err(Error::Data("ensemble has no simulations (rows)".into()));
        }
        if values.len() != n_rows * p {
            return Err(Error::Mismatch(format!(
                "ensemble has {} values, expected {n_rows} rows × {p} columns = {}",
                values.len(),
                n_rows * p
            )));
        }
        crate::error::check_finite(&values, |k| {
            let (i, j) = (k / p, k % p);
            format!(
                "ensemble value {} at row {i}, column {j} ('{}') is not a finite number",
                values[k], labels[j].name
            )
        })?;
        Ok(Ensemble {
            labels,
            values: DMatrix::from_row_slice(n_rows, p, &values),
        })
    }

    /// Number of simulations `n` (rows).
    pub fn n_simulations(&self) -> usize {
        self.values.nrows()
    }

    /// Number of statistics `p` (columns).
    pub fn n_statistics(&self) -> usize {
        self.values.ncols()
    }

    /// The column labels.
    pub fn labels(&self) -> &[ColumnLabel] {
        &self.labels
    }

    /// The values, `n × p`.
    pub fn values(&self) -> &DMatrix<f64> {
        &self.values
    }

    /// Sample mean of each column, x̄_j = (1/n) Σ_i x_ij, summed over rows in order.
    pub fn mean(&self) -> DVector<f64> {
        let n = self.n_simulations() as f64;
        DVector::from_iterator(
            self.n_statistics(),
            self.values
                .column_iter()
                .map(|c| c.iter().fold(0.0, |s, v| s + v) / n),
        )
    }

    /// The ensemble restricted to the given columns, in the given order.
    pub fn select(&self, columns: &[usize]) -> Result<Ensemble> {
        if columns.is_empty() {
            return Err(Error::Setting("no columns selected".into()));
        }
        if let Some(&j) = columns.iter().find(|&&j| j >= self.n_statistics()) {
            return Err(Error::Setting(format!(
                "column index {j} is out of range: the ensemble has {} columns",
                self.n_statistics()
            )));
        }
        Ok(Ensemble {
            labels: columns.iter().map(|&j| self.labels[j].clone()).collect(),
            values: self.values.select_columns(columns),
        })
    }

    /// Checks that `other` has the same columns (same count and same label names, in order).
    pub fn check_same_columns(&self, other: &Ensemble, what: &str) -> Result<()> {
        if self.n_statistics() != other.n_statistics() {
            return Err(Error::Mismatch(format!(
                "{what}: {} columns against {} columns",
                self.n_statistics(),
                other.n_statistics()
            )));
        }
        if let Some(j) =
            (0..self.n_statistics()).find(|&j| self.labels[j].name != other.labels[j].name)
        {
            return Err(Error::Mismatch(format!(
                "{what}: column {j} is '{}' in one ensemble and '{}' in the other",
                self.labels[j].name, other.labels[j].name
            )));
        }
        Ok(())
    }
}
