//! Named subsets of statistics, scale cuts, and the comparison of Fisher forecasts between subsets.
//!
//! A [`StatisticSet`] is a name and a list of column indices into the data vector, chosen by
//! predicates on the column labels (a prefix, a list of names, any closure), so that forecasts can
//! be compared between e.g. "power spectrum alone", "order 1", "orders 1+2" or "bispectrum".
//! A [`ScaleCut`] keeps the columns whose label scale lies within [min, max].
//! [`compare_statistic_sets`] computes, for every set, the covariance and Hartlap-corrected
//! precision of that set's columns (never a sub-block of a larger precision matrix), the Fisher
//! matrix from the same derivative simulations, and the marginalised and conditional errors.

use super::covariance::{hartlap_factor, CovarianceEstimate};
use super::derivative::FiniteDifference;
use super::ensemble::{ColumnLabel, Ensemble};
use super::fisher::FisherForecast;
use crate::error::{Error, Result};

/// A named subset of the statistics (columns) of a data vector.
#[derive(Debug, Clone, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub struct StatisticSet {
    /// Name shown in comparisons, e.g. "orders 1+2".
    pub name: String,
    /// Selected column indices, in increasing order, without repeats.
    pub columns: Vec<usize>,
}

impl StatisticSet {
    /// A set of explicit column indices (sorted, repeats removed). Errors if it is empty or an
    /// index is out of range for `labels`.
    pub fn from_columns(
        name: &str,
        labels: &[ColumnLabel],
        mut columns: Vec<usize>,
    ) -> Result<Self> {
        if let Some(&j) = columns.iter().find(|&&j| j >= labels.len()) {
            return Err(Error::Setting(format!(
                "statistic set '{name}': column index {j} is out of range (there are {} columns)",
                labels.len()
            )));
        }
        columns.sort_unstable();
        columns.dedup();
        if columns.is_empty() {
            return Err(Error::Setting(format!(
                "statistic set '{name}' selects no column"
            )));
        }
        Ok(StatisticSet {
            name: name.to_string(),
            columns,
        })
    }

    /// The columns whose label satisfies `keep`. Errors if none does.
    pub fn matching(
        name: &str,
        labels: &[ColumnLabel],
        keep: impl Fn(&ColumnLabel) -> bool,
    ) -> Result<Self> {
        let columns = (0..labels.len()).filter(|&j| keep(&labels[j])).collect();
        Self::from_columns(name, labels, columns)
    }

    /// All columns.
    pub fn all(name: &str, labels: &[ColumnLabel]) -> Result<Self> {
        Self::matching(name, labels, |_| true)
    }

    /// The columns whose name starts with any of `prefixes`.
    pub fn with_prefixes(name: &str, labels: &[ColumnLabel], prefixes: &[&str]) -> Result<Self> {
        Self::matching(name, labels, |l| {
            prefixes.iter().any(|p| l.name.starts_with(p))
        })
    }

    /// The columns with exactly the given names. Errors naming the first unknown name.
    pub fn with_names(name: &str, labels: &[ColumnLabel], names: &[&str]) -> Result<Self> {
        let mut columns = Vec::with_capacity(names.len());
        for wanted in names {
            match labels.iter().position(|l| l.name == *wanted) {
                Some(j) => columns.push(j),
                None => {
                    return Err(Error::Setting(format!(
                        "statistic set '{name}': no column is labelled '{wanted}'"
                    )))
                }
            }
        }
        Self::from_columns(name, labels, columns)
    }

    /// This set restricted to the columns kept by `cut`. Errors if none is left.
    pub fn with_scale_cut(&self, labels: &[ColumnLabel], cut: &ScaleCut) -> Result<Self> {
        let columns = self
            .columns
            .iter()
            .copied()
            .filter(|&j| j < labels.len() && cut.keeps(&labels[j]))
            .collect();
        Self::from_columns(&self.name, labels, columns).map_err(|_| {
            Error::Setting(format!(
                "statistic set '{}': no column left after the scale cut [{}, {}]",
                self.name, cut.min, cut.max
            ))
        })
    }

    /// Number of selected columns.
    pub fn len(&self) -> usize {
        self.columns.len()
    }

    /// Whether no column is selected (never true for a set built by the constructors).
    pub fn is_empty(&self) -> bool {
        self.columns.is_empty()
    }
}

/// A scale cut: keep the columns whose label scale s satisfies min ≤ s ≤ max. Use infinities for
/// one-sided cuts.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct ScaleCut {
    /// Smallest scale kept.
    pub min: f64,
    /// Largest scale kept.
    pub max: f64,
    /// Whether columns without a scale are kept (e.g. a total variance) or dropped.
    pub keep_unscaled: bool,
}

impl ScaleCut {
    /// A cut keeping scales in [min, max] and columns without a scale. Errors if a bound is NaN or
    /// min > max.
    pub fn new(min: f64, max: f64) -> Result<Self> {
        if min.is_nan() || max.is_nan() || min > max {
            return Err(Error::Setting(format!(
                "scale cut needs min ≤ max, got [{min}, {max}]"
            )));
        }
        Ok(ScaleCut {
            min,
            max,
            keep_unscaled: true,
        })
    }

    /// Whether the column with this label passes the cut.
    pub fn keeps(&self, label: &ColumnLabel) -> bool {
        match label.scale {
            Some(s) => s >= self.min && s <= self.max,
            None => self.keep_unscaled,
        }
    }

    /// Indices of the columns passing the cut.
    pub fn filter(&self, labels: &[ColumnLabel]) -> Vec<usize> {
        (0..labels.len())
            .filter(|&j| self.keeps(&labels[j]))
            .collect()
    }
}

/// Simulations at θ_a ± Δ_a for one parameter.
#[derive(Debug, Clone)]
pub struct DerivativeEnsembles {
    /// Parameter name.
    pub parameter: String,
    /// Half step Δ_a.
    pub step: f64,
    /// Simulations at θ_a + Δ_a.
    pub plus: Ensemble,
    /// Simulations at θ_a − Δ_a.
    pub minus: Ensemble,
    /// Whether row i of `plus` and of `minus` share a seed.
    pub paired: bool,
}

impl DerivativeEnsembles {
    /// The finite-difference derivative of these sets.
    pub fn finite_difference(&self) -> Result<FiniteDifference> {
        FiniteDifference::from_sets(
            &self.parameter,
            self.step,
            &self.plus,
            &self.minus,
            self.paired,
        )
    }
}

/// The forecast of one statistic set in a [`SetComparison`].
#[derive(Debug, Clone, serde::Serialize)]
pub struct SetComparisonRow {
    /// Name of the statistic set.
    pub set: String,
    /// Number of data points p in the set.
    pub n_statistics: usize,
    /// Number of simulations n for the covariance.
    pub n_simulations: usize,
    /// Hartlap factor (n − p − 2)/(n − 1); `None` when n ≤ p + 2.
    pub hartlap_factor: Option<f64>,
    /// Marginalised errors, one per parameter; `None` when the forecast failed.
    pub marginalised_errors: Option<Vec<f64>>,
    /// Conditional errors, one per parameter.
    pub conditional_errors: Option<Vec<f64>>,
    /// Estimated derivative-noise inflation tr(Ψ Σ_a)/F_aa, one per parameter.
    pub derivative_bias_fraction: Option<Vec<f64>>,
    /// Warnings (too few simulations, noisy derivatives).
    pub warnings: Vec<String>,
    /// Why the forecast failed for this set, if it did.
    pub error: Option<String>,
}

/// Forecasts of several statistic sets side by side.
#[derive(Debug, Clone, serde::Serialize)]
pub struct SetComparison {
    /// Parameter names, in the order of the error columns.
    pub parameters: Vec<String>,
    /// One row per statistic set, in the order given.
    pub rows: Vec<SetComparisonRow>,
}

/// For each statistic set: covariance of the set's columns in `fiducial`, Hartlap-corrected
/// precision, Fisher matrix from the derivative simulations, marginalised and conditional errors,
/// derivative-noise bias, warnings.
///
/// Errors (for the whole comparison) when the inputs disagree: a derivative ensemble whose columns
/// differ from the fiducial ensemble's, an invalid step, a set index out of range. A failure
/// specific to one set (too few simulations for its size, a singular covariance or Fisher matrix)
/// is recorded in that set's row.
pub fn compare_statistic_sets(
    fiducial: &Ensemble,
    derivatives: &[DerivativeEnsembles],
    sets: &[StatisticSet],
) -> Result<SetComparison> {
    if derivatives.is_empty() {
        return Err(Error::Setting(
            "a comparison needs at least one parameter".into(),
        ));
    }
    if sets.is_empty() {
        return Err(Error::Setting(
            "a comparison needs at least one statistic set".into(),
        ));
    }
    let mut differences = Vec::with_capacity(derivatives.len());
    for d in derivatives {
        for (sign, set) in [("+", &d.plus), ("−", &d.minus)] {
            fiducial.check_same_columns(
                set,
                &format!(
                    "fiducial ensemble against the {sign}step set of '{}'",
                    d.parameter
                ),
            )?;
        }
        differences.push(d.finite_difference()?);
    }
    let n = fiducial.n_simulations();
    let mut rows = Vec::with_capacity(sets.len());
    for set in sets {
        let selected = fiducial
            .select(&set.columns)
            .map_err(|e| Error::Setting(format!("statistic set '{}': {e}", set.name)))?;
        let p = selected.n_statistics();
        let outcome = (|| -> Result<FisherForecast> {
            let precision = CovarianceEstimate::from_ensemble(&selected)?.precision()?;
            let sub: Vec<FiniteDifference> = differences
                .iter()
                .map(|d| d.select(&set.columns))
                .collect::<Result<_>>()?;
            FisherForecast::from_derivatives(&precision, &sub)
        })();
        let factor = hartlap_factor(n, p).ok();
        rows.push(match outcome {
            Ok(f) => SetComparisonRow {
                set: set.name.clone(),
                n_statistics: p,
                n_simulations: n,
                hartlap_factor: factor,
                marginalised_errors: Some(f.marginalised_errors),
                conditional_errors: Some(f.conditional_errors),
                derivative_bias_fraction: f.derivative_bias_fraction,
                warnings: f.warnings,
                error: None,
            },
            Err(e) => SetComparisonRow {
                set: set.name.clone(),
                n_statistics: p,
                n_simulations: n,
                hartlap_factor: factor,
                marginalised_errors: None,
                conditional_errors: None,
                derivative_bias_fraction: None,
                warnings: Vec::new(),
                error: Some(e.to_string()),
            },
        });
    }
    Ok(SetComparison {
        parameters: derivatives.iter().map(|d| d.parameter.clone()).collect(),
        rows,
    })
}

fn csv_field(text: &str) -> String {
    if text.contains([',', '"', '\n']) {
        format!("\"{}\"", text.replace('"', "\"\""))
    } else {
        text.to_string()
    }
}

impl SetComparison {
    fn header(&self) -> Vec<String> {
        let mut h = vec!["set".to_string(), "p".into(), "n".into(), "hartlap".into()];
        for prefix in ["sigma_marg", "sigma_cond", "deriv_bias"] {
            h.extend(self.parameters.iter().map(|a| format!("{prefix}({a})")));
        }
        h
    }

    fn cells(&self, row: &SetComparisonRow, exact: bool) -> Vec<String> {
        let k = self.parameters.len();
        let number = |v: f64| {
            if exact {
                format!("{v}")
            } else {
                format!("{v:.4e}")
            }
        };
        let mut c = vec![
            row.set.clone(),
            row.n_statistics.to_string(),
            row.n_simulations.to_string(),
            row.hartlap_factor
                .map(|h| {
                    if exact {
                        format!("{h}")
                    } else {
                        format!("{h:.4}")
                    }
                })
                .unwrap_or_default(),
        ];
        for values in [&row.marginalised_errors, &row.conditional_errors] {
            match values {
                Some(v) => c.extend(v.iter().map(|&x| number(x))),
                None => c.extend(std::iter::repeat_n(String::new(), k)),
            }
        }
        match &row.derivative_bias_fraction {
            Some(v) => c.extend(v.iter().map(|&x| {
                if exact {
                    format!("{x}")
                } else {
                    format!("{:.2}%", 100.0 * x)
                }
            })),
            None => c.extend(std::iter::repeat_n(String::new(), k)),
        }
        c
    }

    /// Plain-text table with aligned columns (set name left-aligned, numbers right-aligned),
    /// followed by the warnings and errors of each set. `deriv_bias` is tr(ΨΣ_a)/F_aa in percent.
    pub fn to_text(&self) -> String {
        let mut table = vec![self.header()];
        for row in &self.rows {
            let mut cells = self.cells(row, false);
            if row.error.is_some() {
                cells[4] = "failed".into();
            }
            table.push(cells);
        }
        let ncol = table[0].len();
        let widths: Vec<usize> = (0..ncol)
            .map(|j| {
                table
                    .iter()
                    .map(|r| r[j].chars().count())
                    .max()
                    .unwrap_or(0)
            })
            .collect();
        let mut out = String::new();
        for r in &table {
            let line: Vec<String> = (0..ncol)
                .map(|j| {
                    if j == 0 {
                        format!("{:<w$}", r[j], w = widths[j])
                    } else {
                        format!("{:>w$}", r[j], w = widths[j])
                    }
                })
                .collect();
            out.push_str(line.join("  ").trim_end());
            out.push('\n');
        }
        for row in &self.rows {
            for w in &row.warnings {
                out.push_str(&format!("warning [{}]: {w}\n", row.set));
            }
            if let Some(e) = &row.error {
                out.push_str(&format!("error [{}]: {e}\n", row.set));
            }
        }
        out
    }

    /// CSV with a header line, one line per set, numbers at full precision (shortest round-trip
    /// form), bias as a fraction; the last two fields are the warnings (joined by "; ") and the
    /// error, quoted when needed.
    pub fn to_csv(&self) -> String {
        let mut header = self.header();
        header.push("warnings".into());
        header.push("error".into());
        let mut out = header
            .iter()
            .map(|h| csv_field(h))
            .collect::<Vec<_>>()
            .join(",");
        out.push('\n');
        for row in &self.rows {
            let mut cells = self.cells(row, true);
            cells.push(row.warnings.join("; "));
            cells.push(row.error.clone().unwrap_or_default());
            out.push_str(
                &cells
                    .iter()
                    .map(|c| csv_field(c))
                    .collect::<Vec<_>>()
                    .join(","),
            );
            out.push('\n');
        }
        out
    }
}
