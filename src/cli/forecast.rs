//! `planisphere forecast`: Fisher forecasts from ensembles — covariance from a fiducial
//! ensemble (with the Hartlap factor), derivatives from ensembles at θ ± Δθ, and a comparison of
//! statistic sets (power spectrum, band powers, order 1, orders 1+2, compact set, bispectrum).

use super::output::{write_bytes, write_json};
use crate::ensemble::{EnsembleJob, MergedTable};
use crate::error::{Error, Result};
use crate::forecast::{
    compare_statistic_sets, ColumnLabel, CovarianceEstimate, DerivativeEnsembles, Ensemble,
    FisherForecast, ScaleCut, SetComparison, StatisticSet,
};
use std::path::{Path, PathBuf};

/// Compare how well statistic sets constrain parameters (Fisher forecast from ensembles).
#[derive(Debug, clap::Args)]
pub struct ForecastArgs {
    /// Ensemble directory at the fiducial parameters (for the covariance).
    #[arg(long, value_name = "DIR")]
    pub fiducial: PathBuf,
    /// A parameter's derivative ensembles: NAME,STEP,PLUS_DIR,MINUS_DIR (ensembles at
    /// θ + STEP and θ − STEP). Repeat for each parameter.
    #[arg(long, value_name = "NAME,STEP,PLUS,MINUS", required = true)]
    pub derivative: Vec<String>,
    /// The ± ensembles share seeds member by member (paired differences, less noise).
    #[arg(long)]
    pub paired: bool,
    /// Fiducial value of a parameter, NAME=VALUE (centres of the ellipses; default 0).
    #[arg(long, value_name = "NAME=VALUE")]
    pub fiducial_value: Vec<String>,
    /// Keep only statistics probing angular scales of at least this many arcmin.
    #[arg(long, value_name = "ARCMIN")]
    pub scale_min_arcmin: Option<f64>,
    /// Keep only statistics probing angular scales of at most this many arcmin.
    #[arg(long, value_name = "ARCMIN")]
    pub scale_max_arcmin: Option<f64>,
    /// Output JSON (comparison table, per-set parameter covariances, settings).
    #[arg(long, short, value_name = "FILE.json")]
    pub output: PathBuf,
    /// Also write the comparison table as CSV.
    #[arg(long, value_name = "FILE.csv")]
    pub csv: Option<PathBuf>,
}

/// The statistic sets compared, by the prefixes of their column names.
pub const STATISTIC_SETS: &[(&str, &[&str])] = &[
    ("power spectrum (pseudo-C_l)", &["cl."]),
    ("tile power spectrum", &["tile_power."]),
    ("band powers", &["full.bandpower_"]),
    ("scattering order 1", &["full.S1_"]),
    ("scattering orders 1+2", &["full.S1_", "full.S2_"]),
    (
        "compact scattering set",
        &["compact.amplitude", "compact.sparsity", "compact.shape"],
    ),
    ("bispectrum", &["bispectrum."]),
];

/// A merged ensemble as forecast input.
pub fn load_ensemble(dir: &Path) -> Result<(Ensemble, MergedTable)> {
    let table = EnsembleJob::merge(dir)?;
    let scales: Vec<Option<f64>> = table.description.settings["label_scales_arcmin"]
        .as_array()
        .map(|a| a.iter().map(|v| v.as_f64()).collect())
        .unwrap_or_default();
    let labels: Vec<ColumnLabel> = table
        .description
        .labels
        .iter()
        .enumerate()
        .map(|(i, name)| match scales.get(i).copied().flatten() {
            Some(s) => ColumnLabel::with_scale(name.clone(), s),
            None => ColumnLabel::new(name.clone()),
        })
        .collect();
    let rows: Vec<Vec<f64>> = table.rows.iter().map(|r| r.values.clone()).collect();
    let ensemble = Ensemble::from_rows(labels, &rows)
        .map_err(|e| Error::Data(format!("{}: {e}", dir.display())))?;
    Ok((ensemble, table))
}

fn parse_derivative(text: &str) -> Result<(String, f64, PathBuf, PathBuf)> {
    let parts: Vec<&str> = text.split(',').collect();
    let bad = || {
        Error::Setting(format!(
            "--derivative expects NAME,STEP,PLUS_DIR,MINUS_DIR; got '{text}'"
        ))
    };
    if parts.len() != 4 || parts[0].trim().is_empty() {
        return Err(bad());
    }
    let step: f64 = parts[1].trim().parse().map_err(|_| bad())?;
    if !(step.is_finite() && step > 0.0) {
        return Err(Error::Setting(format!(
            "the step of '{}' must be positive, got {}",
            parts[0].trim(),
            parts[1].trim()
        )));
    }
    Ok((
        parts[0].trim().to_string(),
        step,
        PathBuf::from(parts[2].trim()),
        PathBuf::from(parts[3].trim()),
    ))
}

/// The forecast of every statistic set, with the parameter covariance for ellipses.
pub struct ForecastResult {
    pub comparison: SetComparison,
    pub per_set: Vec<(String, Option<FisherForecast>)>,
}

/// Runs the comparison for given ensembles.
pub fn forecast_sets(
    fiducial: &Ensemble,
    derivatives: &[DerivativeEnsembles],
    cut: Option<&ScaleCut>,
) -> Result<ForecastResult> {
    let labels = fiducial.labels().to_vec();
    let mut sets = Vec::new();
    for (name, prefixes) in STATISTIC_SETS {
        let Ok(set) = StatisticSet::with_prefixes(name, &labels, prefixes) else {
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

/// Runs the command.
pub fn run(args: &ForecastArgs) -> Result<()> {
    super::output::check_output_path(&args.output)?;
    if let Some(p) = &args.csv {
        super::output::check_output_path(p)?;
    }
    let (fiducial, _) = load_ensemble(&args.fiducial)?;
    let mut derivatives = Vec::new();
    for d in &args.derivative {
        let (name, step, plus, minus) = parse_derivative(d)?;
        let (p, _) = load_ensemble(&plus)?;
        let (m, _) = load_ensemble(&minus)?;
        derivatives.push(DerivativeEnsembles {
            parameter: name,
            step,
            plus: p,
            minus: m,
            paired: args.paired,
        });
    }
    let mut fiducial_values = vec![0.0; derivatives.len()];
    for fv in &args.fiducial_value {
        let (name, value) = fv.split_once('=').ok_or_else(|| {
            Error::Setting(format!("--fiducial-value expects NAME=VALUE, got '{fv}'"))
        })?;
        let i = derivatives
            .iter()
            .position(|d| d.parameter == name.trim())
            .ok_or_else(|| {
                Error::Setting(format!(
                    "--fiducial-value names '{}', which has no --derivative",
                    name.trim()
                ))
            })?;
        fiducial_values[i] = value.trim().parse().map_err(|_| {
            Error::Setting(format!(
                "--fiducial-value '{fv}': '{}' is not a number",
                value.trim()
            ))
        })?;
    }
    let cut = match (args.scale_min_arcmin, args.scale_max_arcmin) {
        (None, None) => None,
        (a, b) => Some(ScaleCut::new(a.unwrap_or(0.0), b.unwrap_or(f64::INFINITY))?),
    };
    let result = forecast_sets(&fiducial, &derivatives, cut.as_ref())?;
    let settings = serde_json::json!({
        "fiducial": args.fiducial.display().to_string(),
        "derivatives": args.derivative,
        "paired": args.paired,
        "scale_min_arcmin": args.scale_min_arcmin,
        "scale_max_arcmin": args.scale_max_arcmin,
    });
    write_json(
        &args.output,
        &forecast_document(&result, &fiducial_values, settings),
    )?;
    if let Some(p) = &args.csv {
        write_bytes(p, result.comparison.to_csv().as_bytes())?;
    }
    print!("{}", result.comparison.to_text());
    Ok(())
}
