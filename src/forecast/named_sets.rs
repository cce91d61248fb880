//! The statistic sets a forecast compares (by the prefixes of their column names), the
//! forecast of each, and the JSON document `forecast` writes: one producer for the command
//! line, the demo and bindings.

use crate::error::{Error, Result};
use crate::forecast::{
    compare_statistic_sets, CovarianceEstimate, DerivativeEnsembles, Ensemble, FisherForecast,
    ScaleCut, SetComparison, StatisticSet,
};

/// The statistic sets compared, by the prefixes of their column names.
pub const STATISTIC_SETS: &[(&str, &[&str])] = &[
    ("power spectrum (pseudo-C_l)", &["cl."]),
    ("tile power spectrum", &["tile_power."]),
    ("band powers", &["full.bandpower_"]),
    ("scattering order 1", &["full.S1_"]),
    ("scattering orders 1+2", &["full.S1_", "full.S2_"]),
    (
        "orientation-harmonic summary",
        &[
            "summary.modulus_j",
            "summary.intermittency_",
            "summary.alignment_",
        ],
    ),
    ("bispectrum", &["bispectrum."]),
];

/// The statistic families of ensembles of map pairs: name, prefixes of each map's own columns
/// (after `a.` or `b.`), prefixes of the cross columns (after `cross.`). Each family gives the
/// sets `NAME [A]`, `NAME [B]`, `NAME [cross]` and `NAME [A+B+cross]` (jointly, one covariance
/// of all three); a family without cross columns gives `[A]`, `[B]` and `[A+B]`. The cross
/// part of a scattering family is the cross band powers (the second moment both maps share)
/// with the envelope terms of the same orders.
pub const PAIR_STATISTIC_SETS: &[(&str, &[&str], &[&str])] = &[
    ("power spectrum (pseudo-C_l)", &["cl."], &["cl."]),
    ("tile power spectrum", &["tile_power."], &[]),
    ("band powers", &["full.bandpower_"], &["cross_bandpower_"]),
    (
        "scattering order 1",
        &["full.S1_"],
        &["cross_bandpower_", "cross_envelope1_"],
    ),
    (
        "scattering orders 1+2",
        &["full.S1_", "full.S2_"],
        &["cross_bandpower_", "cross_envelope1_", "cross_envelope2_"],
    ),
    (
        "orientation-harmonic summary",
        &[
            "summary.modulus_j",
            "summary.intermittency_",
            "summary.alignment_",
        ],
        &[],
    ),
    ("bispectrum", &["bispectrum."], &[]),
];

/// The statistic sets of a pair ensemble (see [`PAIR_STATISTIC_SETS`]), as names with column
/// prefixes, in the order: each family's A, B, cross, joint.
pub fn pair_statistic_sets() -> Vec<(String, Vec<String>)> {
    let mut out = Vec::new();
    for (name, own, cross) in PAIR_STATISTIC_SETS {
        let with = |prefix: &str, list: &[&str]| -> Vec<String> {
            list.iter().map(|p| format!("{prefix}{p}")).collect()
        };
        let (a, b, c) = (with("a.", own), with("b.", own), with("cross.", cross));
        out.push((format!("{name} [A]"), a.clone()));
        out.push((format!("{name} [B]"), b.clone()));
        if c.is_empty() {
            out.push((format!("{name} [A+B]"), [a, b].concat()));
        } else {
            out.push((format!("{name} [cross]"), c.clone()));
            out.push((format!("{name} [A+B+cross]"), [a, b, c].concat()));
        }
    }
    out
}

/// The forecast of every statistic set, with the parameter covariance for ellipses.
pub struct ForecastResult {
    pub comparison: SetComparison,
    pub per_set: Vec<(String, Option<FisherForecast>)>,
}

/// Runs the comparison for given ensembles: the sets of [`STATISTIC_SETS`], or for ensembles
/// of map pairs (`pairs`) those of [`pair_statistic_sets`].
pub fn forecast_sets(
    fiducial: &Ensemble,
    derivatives: &[DerivativeEnsembles],
    cut: Option<&ScaleCut>,
    pairs: bool,
) -> Result<ForecastResult> {
    if pairs {
        forecast_prefix_sets(fiducial, derivatives, cut, &pair_statistic_sets())
    } else {
        forecast_named_sets(fiducial, derivatives, cut, STATISTIC_SETS)
    }
}

/// As [`forecast_sets`], for the given statistic sets (name, column-name prefixes).
pub fn forecast_named_sets(
    fiducial: &Ensemble,
    derivatives: &[DerivativeEnsembles],
    cut: Option<&ScaleCut>,
    named: &[(&str, &[&str])],
) -> Result<ForecastResult> {
    let owned: Vec<(String, Vec<String>)> = named
        .iter()
        .map(|(n, p)| (n.to_string(), p.iter().map(|s| s.to_string()).collect()))
        .collect();
    forecast_prefix_sets(fiducial, derivatives, cut, &owned)
}

/// As [`forecast_named_sets`], with owned names and prefixes. A set none of whose prefixes
/// matches a column (or that a scale cut empties) is left out.
pub fn forecast_prefix_sets(
    fiducial: &Ensemble,
    derivatives: &[DerivativeEnsembles],
    cut: Option<&ScaleCut>,
    named: &[(String, Vec<String>)],
) -> Result<ForecastResult> {
    let labels = fiducial.labels().to_vec();
    let mut sets = Vec::new();
    for (name, prefixes) in named {
        let prefixes: Vec<&str> = prefixes.iter().map(String::as_str).collect();
        let Ok(set) = StatisticSet::with_prefixes(name, &labels, &prefixes) else {
            continue; // the ensemble does not have this statistic
        };
        let set = match cut {
            Some(c) => match set.with_scale_cut(&labels, c) {
                Ok(s) => s,
                Err(_) => continue,
            },
            None => set,
        };
        if !set.is_empty() {
            sets.push(set);
        }
    }
    if sets.is_empty() {
        return Err(Error::Data(
            "no statistic set is left to compare (check the scale cuts)".into(),
        ));
    }
    let comparison = compare_statistic_sets(fiducial, derivatives, &sets)?;
    let mut per_set = Vec::new();
    for set in &sets {
        let fc = (|| -> Result<FisherForecast> {
            let fid = fiducial.select(&set.columns)?;
            let precision = CovarianceEstimate::from_ensemble(&fid)?.precision()?;
            let fds = derivatives
                .iter()
                .map(|d| d.finite_difference()?.select(&set.columns))
                .collect::<Result<Vec<_>>>()?;
            FisherForecast::from_derivatives(&precision, &fds)
        })();
        per_set.push((set.name.clone(), fc.ok()));
    }
    Ok(ForecastResult {
        comparison,
        per_set,
    })
}

/// The JSON document of a forecast.
pub fn forecast_document(
    result: &ForecastResult,
    fiducial_values: &[f64],
    settings: serde_json::Value,
) -> serde_json::Value {
    let sets: Vec<serde_json::Value> = result
        .per_set
        .iter()
        .zip(&result.comparison.rows)
        .map(|((name, fc), row)| {
            serde_json::json!({
                "name": name,
                "statistics": row.n_statistics,
                "simulations": row.n_simulations,
                "hartlap_factor": row.hartlap_factor,
                "marginalised_errors": row.marginalised_errors,
                "conditional_errors": row.conditional_errors,
                "derivative_bias_fraction": row.derivative_bias_fraction,
                "parameter_covariance": fc.as_ref().map(|f| f.parameter_covariance.clone()),
                "parameter_correlation": fc.as_ref().map(|f| f.parameter_correlation.clone()),
                "warnings": row.warnings,
                "error": row.error,
            })
        })
        .collect();
    serde_json::json!({
        "program": "planisphere",
        "program_version": env!("CARGO_PKG_VERSION"),
        "parameters": result.comparison.parameters,
        "fiducial": fiducial_values,
        "settings": settings,
        "sets": sets,
    })
}

/// Refuses a forecast in which every statistic set failed (naming the first set and why); when
/// only some failed, the warning to show (which sets, and the first reason).
pub fn check_sets_forecast(comparison: &SetComparison) -> Result<Option<String>> {
    let failed: Vec<(&str, &str)> = comparison
        .rows
        .iter()
        .filter_map(|r| r.error.as_deref().map(|e| (r.set.as_str(), e)))
        .collect();
    let Some((first, why)) = failed.first() else {
        return Ok(None);
    };
    let why = why.split_whitespace().collect::<Vec<_>>().join(" ");
    if failed.len() == comparison.rows.len() {
        return Err(Error::Data(format!(
            "every statistic set failed ({} of {}); the first, {first}: {why}",
            failed.len(),
            comparison.rows.len()
        )));
    }
    let names: Vec<&str> = failed.iter().map(|(n, _)| *n).collect();
    Ok(Some(format!(
        "{} of {} statistic sets failed ({}); the first: {why}",
        failed.len(),
        comparison.rows.len(),
        names.join(", ")
    )))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::scattering::layout::{CoefficientKind, CoefficientSpelling};

    /// The scattering sets pick the ensemble's columns by the stems of the one coefficient
    /// layout (`full.` + short stem + `_`), so a renamed stem cannot leave a set empty.
    #[test]
    fn scattering_prefixes_are_the_layout_stems() {
        let stems: Vec<String> = [
            CoefficientKind::FirstOrder,
            CoefficientKind::BandPower,
            CoefficientKind::SecondOrder,
        ]
        .iter()
        .map(|k| format!("full.{}_", k.stem(CoefficientSpelling::Short)))
        .collect();
        let own = STATISTIC_SETS.iter().flat_map(|(_, p)| p.iter());
        let pair = PAIR_STATISTIC_SETS.iter().flat_map(|(_, p, _)| p.iter());
        let full: Vec<&&str> = own.chain(pair).filter(|p| p.starts_with("full.")).collect();
        assert!(full.len() >= 6, "{full:?}");
        for prefix in full {
            assert!(
                stems.iter().any(|s| s == prefix),
                "{prefix} is no layout stem"
            );
        }
    }
}
