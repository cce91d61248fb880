//! `planisphere compare-flat`: the bias of the flat-sky approximation per coefficient and tile
//! size, for skies of a given spectrum.

use super::plot::flat_bias::flat_bias_figure;
use crate::error::{Error, Result};
use crate::figures::charts::ImageFormat;
use crate::files::{check_output_path, write_bytes, write_json};
use crate::harmonics::spectrum::AngularSpectrum;
use crate::measure::flat_comparison::{
    compare_flat, rows_csv, FlatComparisonRow, FlatComparisonSettings, ScaleConvergence,
};
use crate::measure::measurement::MeasurementSettings;
use crate::scattering::layout::{CoefficientKind, CoefficientLabel, CoefficientSpelling};
use std::path::PathBuf;

/// Measure how far flat-sky coefficients are from sphere coefficients, per tile size.
#[derive(Debug, clap::Args)]
pub struct CompareFlatArgs {
    /// Spectrum table (rows `ell C_ell`); default: the built-in model.
    #[arg(long, value_name = "FILE")]
    pub spectrum: Option<PathBuf>,
    /// Variance of the built-in model spectrum.
    #[arg(long, default_value_t = 1e-4)]
    pub model_variance: f64,
    /// NSIDE of the sphere skies.
    #[arg(long, default_value_t = 128)]
    pub nside: u32,
    /// Tile sizes in pixels per side, comma separated (powers of two); plane pixels of one map
    /// spacing, read directly.
    #[arg(long, value_delimiter = ',', default_value = "32,64")]
    pub tile_pixels: Vec<usize>,
    /// Lognormal skies with this shift (the spectrum is then that of the Gaussian field).
    #[arg(long, value_name = "KAPPA0")]
    pub lognormal_shift: Option<f64>,
    /// Sphere skies per tile size.
    #[arg(long, default_value_t = 8)]
    pub skies: usize,
    /// Flat fields per tile size.
    #[arg(long, default_value_t = 200)]
    pub flat_fields: usize,
    /// Number of wavelet scales J.
    #[arg(long, short = 'J', default_value_t = 3)]
    pub scales: usize,
    /// Number of orientations L.
    #[arg(long, short = 'L', default_value_t = 4)]
    pub orientations: usize,
    /// Width of the tile-border taper in pixels.
    #[arg(long, default_value_t = 4)]
    pub border_pixels: usize,
    /// Size in pixels of the periodic flat fields whose corner tiles make the flat reference
    /// (at least the largest tile); default: per tile size, the smallest n·2^k (k ≥ 1) of at
    /// least 32·2^(J−1) pixels. The reference is also measured at twice this size and the
    /// change is reported per coefficient (reference_converged).
    #[arg(long, value_name = "PIXELS")]
    pub reference_pixels: Option<usize>,
    /// Seed.
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// Output CSV table (one row per coefficient and tile size).
    #[arg(long, short, value_name = "FILE.csv")]
    pub output: PathBuf,
    /// Also write the table as JSON.
    #[arg(long, value_name = "FILE.json")]
    pub json: Option<PathBuf>,
    /// Also draw the table (as `plot flat-bias` does) into this picture.
    #[arg(long, value_name = "FILE.png|svg")]
    pub picture: Option<PathBuf>,
}

/// Runs the comparison.
pub fn run(args: &CompareFlatArgs) -> Result<()> {
    check_output_path(&args.output)?;
    if let Some(p) = &args.json {
        check_output_path(p)?;
    }
    if let Some(p) = &args.picture {
        check_output_path(p)?;
        ImageFormat::from_path(p)?;
    }
    if args.nside < 8 || !args.nside.is_power_of_two() || args.nside > 2048 {
        return Err(Error::Setting(format!(
            "--nside must be a power of two from 8 to 2048, got {}",
            args.nside
        )));
    }
    crate::limits::check_count("--skies", args.skies as u64)?;
    crate::limits::check_count("--flat-fields", args.flat_fields as u64)?;
    let lmax = 3 * args.nside as usize - 1;
    let spectrum = match &args.spectrum {
        Some(p) => AngularSpectrum::read_text(p)?,
        None => AngularSpectrum::demo_model(lmax, args.model_variance),
    };
    let settings = FlatComparisonSettings {
        nside: args.nside,
        spectrum,
        lognormal_shift: args.lognormal_shift,
        tile_pixels: args.tile_pixels.clone(),
        skies: args.skies,
        flat_fields: args.flat_fields,
        measurement: MeasurementSettings {
            scales: args.scales,
            orientations: args.orientations,
            border_pixels: args.border_pixels,
            ..MeasurementSettings::default()
        },
        seed: args.seed,
        reference_pixels: args.reference_pixels,
    };
    let comparison = compare_flat(&settings)?;
    let rows = comparison.rows;
    write_bytes(&args.output, rows_csv(&rows).as_bytes())?;
    if let Some(p) = &args.json {
        write_json(p, &rows)?;
    }
    if let Some(p) = &args.picture {
        flat_bias_figure(&rows, 1500)?.write(p)?;
    }
    print_tables(&rows, &comparison.scales);
    let flagged: Vec<String> = rows
        .iter()
        .filter(|r| r.reference_converged == Some(false))
        .map(|r| format!("{} ({} px)", r.coefficient, r.tile_pixels))
        .collect();
    if !flagged.is_empty() {
        println!(
            "{} of {} coefficients moved by more than {} standard errors when the reference was doubled (first: {}); see reference_converged",
            flagged.len(),
            rows.len(),
            crate::measure::flat_comparison::CONVERGENCE_ERRORS,
            flagged[0]
        );
    }
    println!(
        "full table ({} rows) in {}",
        rows.len(),
        args.output.display()
    );
    if let Some(p) = &args.picture {
        println!("picture in {}", p.display());
    }
    Ok(())
}

/// Prints the flat-sky bias of S1 per tile size and the doubling check of the flat reference.
fn print_tables(rows: &[FlatComparisonRow], scales: &[ScaleConvergence]) {
    println!("flat-sky bias of S1 (sphere − flat), per tile size: relative, and in errors of the difference");
    println!(
        "{:>6} {:>8} {:>12} {:>10} {:>9} {:>8}",
        "tile", "width°", "coefficient", "rel.bias", "in σ", "trusted"
    );
    let first_order = |name: &str| {
        CoefficientLabel::parse(name, CoefficientSpelling::Short)
            .is_some_and(|l| l.kind == CoefficientKind::FirstOrder)
    };
    for r in rows.iter().filter(|r| first_order(&r.coefficient)) {
        println!(
            "{:>6} {:>8.1} {:>12} {:>9.2}% {:>9.2} {:>8}",
            r.tile_pixels,
            r.tile_width_deg,
            r.coefficient,
            100.0 * r.relative_bias,
            r.bias_in_errors,
            r.trusted
        );
    }
    println!(
        "flat reference doubled (m → 2m pixels), orientation means: converged when the change is within {} standard errors",
        crate::measure::flat_comparison::CONVERGENCE_ERRORS
    );
    println!(
        "{:>6} {:>6} {:>10} {:>3} {:>9} {:>8} {:>10}",
        "tile", "m", "statistic", "j", "change", "in σ", "converged"
    );
    for c in scales {
        println!(
            "{:>6} {:>6} {:>10} {:>3} {:>8.2}% {:>8.2} {:>10}",
            c.tile_pixels,
            c.reference_pixels,
            c.kind,
            c.j,
            100.0 * c.change,
            c.change_in_errors,
            c.converged
        );
    }
}
