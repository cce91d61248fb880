//! `planisphere forecast`: Fisher forecasts from ensembles — covariance from a fiducial
//! ensemble (with the Hartlap factor), derivatives from ensembles at θ ± Δθ, and a comparison of
//! statistic sets (power spectrum, band powers, order 1, orders 1+2, orientation-harmonic summary, bispectrum).

use crate::ensemble::{settings_difference, EnsembleJob, MergedTable};
use crate::error::{Error, Result};
use crate::files::{write_bytes, write_json};
pub use crate::forecast::named_sets::{
    forecast_document, forecast_named_sets, forecast_sets, pair_statistic_sets, ForecastResult,
    PAIR_STATISTIC_SETS, STATISTIC_SETS,
};
use crate::forecast::{ColumnLabel, DerivativeEnsembles, Ensemble, ScaleCut};
use std::path::{Path, PathBuf};

/// Compare how well statistic sets constrain parameters (Fisher forecast from ensembles).
#[derive(Debug, clap::Args)]
pub struct ForecastArgs {
    /// Ensemble directory at the fiducial parameters (for the covariance).
    #[arg(long, value_name = "DIR", required_unless_present = "plan")]
    pub fiducial: Option<PathBuf>,
    /// A parameter's derivative ensembles: NAME,STEP,PLUS_DIR,MINUS_DIR (ensembles at
    /// θ + STEP and θ − STEP). Repeat for each parameter.
    #[arg(
        long,
        value_name = "NAME,STEP,PLUS,MINUS",
        required_unless_present = "plan"
    )]
    pub derivative: Vec<String>,
    /// A TOML plan of several cases (e.g. one per noise level, each with its own ensembles)
    /// and scale cuts, forecast into one table; replaces --fiducial, --derivative, --paired
    /// and the scale cuts. See the README for its keys.
    #[arg(
        long,
        value_name = "PLAN.toml",
        conflicts_with_all = ["fiducial", "derivative", "paired", "scale_min_arcmin", "scale_max_arcmin"]
    )]
    pub plan: Option<PathBuf>,
    /// The ± ensembles share seeds member by member (paired differences, less noise).
    #[arg(long)]
    pub paired: bool,
    /// Fiducial value of a parameter, NAME=VALUE (centres of the ellipses; default 0).
    #[arg(long, value_name = "NAME=VALUE")]
    pub fiducial_value: Vec<String>,
    /// Keep only statistics probing angular scales of at least this many arcmin.
    #[arg(long, value_name = "ARCMIN", allow_negative_numbers = true)]
    pub scale_min_arcmin: Option<f64>,
    /// Keep only statistics probing angular scales of at most this many arcmin.
    #[arg(long, value_name = "ARCMIN", allow_negative_numbers = true)]
    pub scale_max_arcmin: Option<f64>,
    /// Output JSON (comparison table, per-set parameter covariances, settings).
    #[arg(long, short, value_name = "FILE.json")]
    pub output: PathBuf,
    /// Also write the comparison table as CSV.
    #[arg(long, value_name = "FILE.csv")]
    pub csv: Option<PathBuf>,
}

/// A merged ensemble as forecast input.
pub fn load_ensemble(dir: &Path) -> Result<(Ensemble, MergedTable)> {
    let table = EnsembleJob::merge(dir)?;
    let scales = table.label_scales();
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

/// Refuses a forecast in which every set failed, and warns on stderr of the sets that failed
/// when others succeeded.
fn warn_failed_sets(comparison: &crate::forecast::SetComparison) -> Result<()> {
    if let Some(w) = crate::forecast::named_sets::check_sets_forecast(comparison)? {
        eprintln!("planisphere: warning: {w}");
    }
    Ok(())
}

/// Refuses a parameter named by two derivatives (its Fisher row would be counted twice).
fn check_distinct_parameters(list: &[(String, f64, PathBuf, PathBuf)]) -> Result<()> {
    for (k, (name, ..)) in list.iter().enumerate() {
        if list[..k].iter().any(|(other, ..)| other == name) {
            return Err(Error::Setting(format!(
                "--derivative names parameter '{name}' twice: give each parameter once"
            )));
        }
    }
    Ok(())
}

/// Settings that may differ between the ensembles of one forecast: what is simulated or read
/// (the recipe, the map files' column) and the mask's file name (its SHA-256 is compared).
const SETTINGS_FREE_ACROSS_ENSEMBLES: [&str; 4] = ["recipe", "column", "second_column", "mask"];

/// Refuses an ensemble measured differently from the fiducial one (sampling, tiles, scales,
/// mask, bins, ...), naming the first setting that differs.
fn check_same_measurement(
    fiducial: (&Path, &MergedTable),
    other: (&Path, &MergedTable),
) -> Result<()> {
    let kind = |t: &MergedTable| {
        if t.description.is_pair() {
            "pairs of maps"
        } else {
            "single maps"
        }
    };
    if fiducial.1.description.is_pair() != other.1.description.is_pair() {
        return Err(Error::Mismatch(format!(
            "{} holds {} but the fiducial ensemble {} holds {}: a forecast needs one kind of ensemble throughout",
            other.0.display(),
            kind(other.1),
            fiducial.0.display(),
            kind(fiducial.1)
        )));
    }
    let strip = |t: &MergedTable| {
        let mut v = t.description.settings.clone();
        if let Some(o) = v.as_object_mut() {
            for k in SETTINGS_FREE_ACROSS_ENSEMBLES {
                o.remove(k);
            }
        }
        v
    };
    if let Some(d) = settings_difference(&strip(other.1), &strip(fiducial.1)) {
        return Err(Error::Mismatch(format!(
            "{} was measured differently from the fiducial ensemble {}: {d}; a forecast needs one measurement throughout",
            other.0.display(),
            fiducial.0.display()
        )));
    }
    Ok(())
}

fn load_derivatives(
    list: &[(String, f64, PathBuf, PathBuf)],
    paired: bool,
    fiducial: (&Path, &MergedTable),
) -> Result<Vec<DerivativeEnsembles>> {
    check_distinct_parameters(list)?;
    let mut derivatives = Vec::new();
    for (name, step, plus, minus) in list {
        let (p, pt) = load_ensemble(plus)?;
        check_same_measurement(fiducial, (plus, &pt))?;
        let (m, mt) = load_ensemble(minus)?;
        check_same_measurement(fiducial, (minus, &mt))?;
        derivatives.push(DerivativeEnsembles {
            parameter: name.clone(),
            step: *step,
            plus: p,
            minus: m,
            paired,
        });
    }
    Ok(derivatives)
}

/// Runs the command.
pub fn run(args: &ForecastArgs) -> Result<()> {
    crate::files::check_output_path(&args.output)?;
    if let Some(p) = &args.csv {
        crate::files::check_output_path(p)?;
    }
    if let Some(plan) = &args.plan {
        return run_plan(args, plan);
    }
    let Some(fiducial_dir) = &args.fiducial else {
        return Err(Error::Setting(
            "forecast needs --fiducial and --derivative, or --plan".into(),
        ));
    };
    // the options first, before any ensemble is read
    let list = args
        .derivative
        .iter()
        .map(|d| parse_derivative(d))
        .collect::<Result<Vec<_>>>()?;
    check_distinct_parameters(&list)?;
    for (option, value) in [
        ("--scale-min-arcmin", args.scale_min_arcmin),
        ("--scale-max-arcmin", args.scale_max_arcmin),
    ] {
        if let Some(v) = value.filter(|v| v.is_nan() || *v < 0.0) {
            return Err(Error::Setting(format!(
                "{option} is an angular scale in arcmin and cannot be negative, got {v}"
            )));
        }
    }
    let cut = match (args.scale_min_arcmin, args.scale_max_arcmin) {
        (None, None) => None,
        (a, b) => Some(ScaleCut::new(a.unwrap_or(0.0), b.unwrap_or(f64::INFINITY))?),
    };
    let (fiducial, fiducial_table) = load_ensemble(fiducial_dir)?;
    let derivatives = load_derivatives(&list, args.paired, (fiducial_dir, &fiducial_table))?;
    let names: Vec<String> = derivatives.iter().map(|d| d.parameter.clone()).collect();
    let fiducial_values = parse_fiducial_values(&args.fiducial_value, &names)?;
    let result = forecast_sets(
        &fiducial,
        &derivatives,
        cut.as_ref(),
        fiducial_table.description.is_pair(),
    )?;
    warn_failed_sets(&result.comparison)?;
    let settings = serde_json::json!({
        "fiducial": fiducial_dir.display().to_string(),
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

/// `--fiducial-value NAME=VALUE` entries as values in the order of `names` (default 0).
fn parse_fiducial_values(entries: &[String], names: &[String]) -> Result<Vec<f64>> {
    let mut fiducial_values = vec![0.0; names.len()];
    for fv in entries {
        let (name, value) = fv.split_once('=').ok_or_else(|| {
            Error::Setting(format!("--fiducial-value expects NAME=VALUE, got '{fv}'"))
        })?;
        let i = names.iter().position(|d| d == name.trim()).ok_or_else(|| {
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
    Ok(fiducial_values)
}

/// A forecast plan (`--plan`): cases × scale cuts, each forecast for every statistic set.
#[derive(Debug, serde::Deserialize)]
#[serde(deny_unknown_fields)]
struct PlanFile {
    /// Default for the cases: the ± ensembles share seeds member by member.
    #[serde(default)]
    paired: bool,
    /// Scale cuts; empty: all scales.
    #[serde(default)]
    scale_cuts: Vec<PlanCut>,
    /// The cases, e.g. one per noise level.
    #[serde(rename = "case")]
    cases: Vec<PlanCase>,
}

#[derive(Debug, Clone, Copy, serde::Deserialize)]
#[serde(deny_unknown_fields)]
struct PlanCut {
    min_arcmin: Option<f64>,
    max_arcmin: Option<f64>,
}

impl PlanCut {
    fn cut(&self) -> Result<Option<ScaleCut>> {
        match (self.min_arcmin, self.max_arcmin) {
            (None, None) => Ok(None),
            (a, b) => Ok(Some(ScaleCut::new(
                a.unwrap_or(0.0),
                b.unwrap_or(f64::INFINITY),
            )?)),
        }
    }

    fn text(&self) -> String {
        match (self.min_arcmin, self.max_arcmin) {
            (None, None) => "all scales".into(),
            (Some(a), None) => format!("scales ≥ {a}′"),
            (None, Some(b)) => format!("scales ≤ {b}′"),
            (Some(a), Some(b)) => format!("scales {a}′–{b}′"),
        }
    }
}

#[derive(Debug, serde::Deserialize)]
#[serde(deny_unknown_fields)]
struct PlanCase {
    label: String,
    fiducial: PathBuf,
    derivative: Vec<PlanDerivative>,
    paired: Option<bool>,
}

#[derive(Debug, serde::Deserialize)]
#[serde(deny_unknown_fields)]
struct PlanDerivative {
    parameter: String,
    step: f64,
    plus: PathBuf,
    minus: PathBuf,
}

fn read_plan(path: &Path) -> Result<PlanFile> {
    let text = crate::files::read_text(path)?;
    let mut plan: PlanFile = toml::from_str(&text)
        .map_err(|e| super::inputs::toml_error(path, &text, &e, "not a forecast plan"))?;
    if plan.cases.is_empty() {
        return Err(Error::io(path, "the plan has no [[case]]"));
    }
    // relative ensemble paths are relative to the plan's directory
    let base = path.parent().map(Path::to_path_buf).unwrap_or_default();
    let names: Vec<&str> = plan.cases[0]
        .derivative
        .iter()
        .map(|d| d.parameter.as_str())
        .collect::<Vec<_>>();
    let names: Vec<String> = names.iter().map(|s| s.to_string()).collect();
    for case in &mut plan.cases {
        let got: Vec<&str> = case
            .derivative
            .iter()
            .map(|d| d.parameter.as_str())
            .collect();
        if got.is_empty() || got != names.iter().map(String::as_str).collect::<Vec<_>>() {
            return Err(Error::io(
                path,
                format!(
                    "case '{}' has parameters [{}], the first case [{}]: every case needs the same parameters in the same order",
                    case.label,
                    got.join(", "),
                    names.join(", ")
                ),
            ));
        }
        case.fiducial = base.join(&case.fiducial);
        for d in &mut case.derivative {
            if !(d.step.is_finite() && d.step > 0.0) {
                return Err(Error::io(
                    path,
                    format!(
                        "case '{}': the step of '{}' must be positive, got {}",
                        case.label, d.parameter, d.step
                    ),
                ));
            }
            d.plus = base.join(&d.plus);
            d.minus = base.join(&d.minus);
        }
    }
    for c in &plan.scale_cuts {
        c.cut().map_err(|e| Error::io(path, e.to_string()))?;
    }
    if plan.scale_cuts.is_empty() {
        plan.scale_cuts.push(PlanCut {
            min_arcmin: None,
            max_arcmin: None,
        });
    }
    Ok(plan)
}

/// Runs a `--plan`: one comparison per case and scale cut, in one table whose set names carry
/// the case and the cut ("orientation-harmonic summary [noise 0.3; scales ≥ 30′]").
fn run_plan(args: &ForecastArgs, path: &Path) -> Result<()> {
    let plan = read_plan(path)?;
    let names: Vec<String> = plan.cases[0]
        .derivative
        .iter()
        .map(|d| d.parameter.clone())
        .collect();
    let fiducial_values = parse_fiducial_values(&args.fiducial_value, &names)?;
    let mut combined: Option<ForecastResult> = None;
    let mut cases_json = Vec::new();
    let mut csv = String::new();
    let mut text = String::new();
    for case in &plan.cases {
        let (fiducial, fiducial_table) = load_ensemble(&case.fiducial)?;
        let list: Vec<(String, f64, PathBuf, PathBuf)> = case
            .derivative
            .iter()
            .map(|d| (d.parameter.clone(), d.step, d.plus.clone(), d.minus.clone()))
            .collect();
        let derivatives = load_derivatives(
            &list,
            case.paired.unwrap_or(plan.paired),
            (&case.fiducial, &fiducial_table),
        )?;
        for cut in &plan.scale_cuts {
            let tag = format!("{}; {}", case.label, cut.text());
            let pairs = fiducial_table.description.is_pair();
            let mut result = forecast_sets(&fiducial, &derivatives, cut.cut()?.as_ref(), pairs)
                .map_err(|e| Error::Data(format!("case '{}', {}: {e}", case.label, cut.text())))?;
            text.push_str(&format!("\n[{tag}]\n{}", result.comparison.to_text()));
            let part = result.comparison.to_csv();
            let mut lines = part.lines();
            let header = lines.next().unwrap_or_default();
            if csv.is_empty() {
                csv.push_str(&format!("case,scale_cut,{header}\n"));
            }
            for line in lines {
                csv.push_str(&format!(
                    "{},{},{line}\n",
                    csv_quote(&case.label),
                    csv_quote(&cut.text())
                ));
            }
            cases_json.push(serde_json::json!({
                "case": case.label,
                "scale_cut": {"min_arcmin": cut.min_arcmin, "max_arcmin": cut.max_arcmin},
                "fiducial": case.fiducial.display().to_string(),
            }));
            for row in &mut result.comparison.rows {
                row.set = format!("{} [{tag}]", row.set);
            }
            for (name, _) in &mut result.per_set {
                *name = format!("{name} [{tag}]");
            }
            match &mut combined {
                None => combined = Some(result),
                Some(c) => {
                    c.comparison.rows.extend(result.comparison.rows);
                    c.per_set.extend(result.per_set);
                }
            }
        }
    }
    let Some(combined) = combined else {
        return Err(Error::Setting("the plan forecast nothing".into()));
    };
    warn_failed_sets(&combined.comparison)?;
    let settings = serde_json::json!({
        "plan": path.display().to_string(),
        "cases": cases_json,
    });
    write_json(
        &args.output,
        &forecast_document(&combined, &fiducial_values, settings),
    )?;
    if let Some(p) = &args.csv {
        write_bytes(p, csv.as_bytes())?;
    }
    print!("{}", text.trim_start());
    Ok(())
}

/// A CSV field, quoted when it holds a comma or a quote (RFC 4180).
fn csv_quote(s: &str) -> String {
    if s.contains(',') || s.contains('"') {
        format!("\"{}\"", s.replace('"', "\"\""))
    } else {
        s.to_string()
    }
}
