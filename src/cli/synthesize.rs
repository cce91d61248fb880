//! `planisphere synthesize`: a new flat field whose scattering statistics match a target flat
//! map (.npy, 2D float64, square, periodic) or a coefficient file (JSON with a `coefficients`
//! array, see [`crate::synthesis::coefficients_from_json`]). Writes the field as .npy and a PNG
//! panel: target, a Gaussian field with the target's power spectrum, and the synthesised field.
//! Method and loss: [`crate::synthesis`].

use crate::cli::output::write_atomically;
use crate::error::{Error, Result};
use crate::synthesis::{
    coefficients_from_json, gaussian_counterpart, one_point_moments, FlatSynthesis, StartField,
    StatisticChoice, SynthesisSettings,
};
use ndarray::Array2;
use std::path::{Path, PathBuf};

/// Which statistics to match.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum StatisticsOption {
    /// Every coefficient but the mean: variance, S1, P, S2.
    Full,
    /// Variance, amplitude per scale, sparsity and anisotropy per scale pair.
    Compact,
}

/// Start field of the optimisation.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum StartOption {
    /// White noise with the target's mean and variance.
    White,
    /// Gaussian field with the target map's power spectrum.
    Gaussian,
}

/// Synthesise a new flat field whose scattering statistics match a target.
#[derive(Debug, clap::Args)]
pub struct SynthesizeArgs {
    /// Target: a flat map as .npy (2D float64, n × n, n a power of two) or a coefficient .json.
    #[arg(long, value_name = "PATH")]
    pub target: PathBuf,
    /// Output field (.npy, float64, n × n).
    #[arg(long, short, value_name = "PATH")]
    pub output: PathBuf,
    /// PNG panel (default: the output path with extension .png).
    #[arg(long, value_name = "PATH")]
    pub picture: Option<PathBuf>,
    /// Field side in pixels, needed with a coefficient-file target.
    #[arg(long, value_name = "PIXELS")]
    pub size: Option<usize>,
    /// Pixel side in arcmin (scales the power spectrum only).
    #[arg(long, default_value_t = 1.0, value_name = "ARCMIN")]
    pub pixel_arcmin: f64,
    /// Number of scales J.
    #[arg(long, default_value_t = 4)]
    pub scales: usize,
    /// Number of orientations L.
    #[arg(long, default_value_t = 4)]
    pub orientations: usize,
    /// Statistics to match.
    #[arg(long, value_enum, default_value_t = StatisticsOption::Full)]
    pub statistics: StatisticsOption,
    /// Also match the field–envelope correlations (sign-sensitive; target maps only).
    #[arg(long)]
    pub field_envelope_correlation: bool,
    /// Also match the power spectrum in this many logarithmic bins (target maps only).
    #[arg(long, value_name = "BINS")]
    pub power_bins: Option<usize>,
    /// Maximum number of L-BFGS iterations.
    #[arg(long, default_value_t = 200)]
    pub iterations: u64,
    /// Seed of the start field.
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// Start field (default: gaussian for a target map, white for a coefficient file).
    #[arg(long, value_enum)]
    pub start: Option<StartOption>,
}

enum Target {
    Map { size: usize, values: Vec<f64> },
    Coefficients(String),
}

fn read_target(path: &Path) -> Result<Target> {
    let extension = path
        .extension()
        .map(|e| e.to_string_lossy().to_lowercase())
        .unwrap_or_default();
    match extension.as_str() {
        "npy" => {
            if !path.is_file() {
                return Err(Error::io(path, "no such file"));
            }
            let array: Array2<f64> = ndarray_npy::read_npy(path)
                .map_err(|e| Error::io(path, format!("not a 2D float64 .npy array ({e})")))?;
            let (rows, cols) = array.dim();
            if rows != cols {
                return Err(Error::io(
                    path,
                    format!("the target map must be square, got {rows} x {cols}"),
                ));
            }
            if let Some(v) = array.iter().find(|v| !v.is_finite()) {
                return Err(Error::io(
                    path,
                    format!("the target map holds a non-finite value ({v})"),
                ));
            }
            Ok(Target::Map {
                size: rows,
                values: array.iter().copied().collect(),
            })
        }
        "json" => std::fs::read_to_string(path)
            .map(Target::Coefficients)
            .map_err(|e| Error::io(path, e)),
        _ => Err(Error::io(
            path,
            "the target must be a .npy flat map or a .json coefficient file",
        )),
    }
}

fn write_field(path: &Path, size: usize, values: &[f64]) -> Result<()> {
    let array = Array2::from_shape_vec((size, size), values.to_vec())
        .map_err(|e| Error::io(path, format!("cannot shape the field: {e}")))?;
    write_atomically(path, |tmp| {
        ndarray_npy::write_npy(tmp, &array).map_err(|e| Error::io(path, e))
    })
}

/// Images side by side, each on the colour scale of the first (its 0.5 and 99.5 percentiles).
fn write_panel(path: &Path, size: usize, panels: &[(&str, &[f64])]) -> Result<()> {
    use plotters::prelude::*;
    crate::plotting::register_font()?;
    let zoom = (256 / size).max(1) as u32;
    let side = size as u32 * zoom;
    let (margin, title_h) = (10u32, 30u32);
    let width = panels.len() as u32 * (side + margin) + margin;
    let height = side + title_h + margin;
    let mut sorted = panels[0].1.to_vec();
    sorted.sort_by(f64::total_cmp);
    let pick = |q: f64| sorted[((sorted.len() - 1) as f64 * q).round() as usize];
    let (lo, hi) = (pick(0.005), pick(0.995));
    let span = if hi > lo { hi - lo } else { 1.0 };
    write_atomically(path, |tmp| {
        let mut png = tmp.as_os_str().to_owned();
        png.push(".png");
        let png = PathBuf::from(png);
        let fail = |e: &dyn std::fmt::Display| Error::io(path, format!("cannot draw: {e}"));
        let draw = || -> Result<()> {
            let root = BitMapBackend::new(&png, (width, height)).into_drawing_area();
            root.fill(&WHITE).map_err(|e| fail(&e))?;
            for (p, (title, values)) in panels.iter().enumerate() {
                let x0 = margin + p as u32 * (side + margin);
                root.draw(&Text::new(
                    title.to_string(),
                    (x0 as i32, 6),
                    (crate::plotting::FONT_FAMILY, 18).into_font(),
                ))
                .map_err(|e| fail(&e))?;
                for iy in 0..size {
                    for ix in 0..size {
                        let [r, g, b] =
                            crate::plotting::colour_ramp((values[iy * size + ix] - lo) / span);
                        let px = x0 + ix as u32 * zoom;
                        // Row 0 at the top.
                        let py = title_h + iy as u32 * zoom;
                        root.draw(&Rectangle::new(
                            [
                                (px as i32, py as i32),
                                ((px + zoom) as i32, (py + zoom) as i32),
                            ],
                            RGBColor(r, g, b).filled(),
                        ))
                        .map_err(|e| fail(&e))?;
                    }
                }
            }
            root.present().map_err(|e| fail(&e))
        };
        let result =
            draw().and_then(|()| std::fs::rename(&png, tmp).map_err(|e| Error::io(path, e)));
        if result.is_err() {
            let _ = std::fs::remove_file(&png);
        }
        result
    })
}

/// Runs the command.
pub fn run(args: &SynthesizeArgs) -> Result<()> {
    if !(args.pixel_arcmin.is_finite() && args.pixel_arcmin > 0.0) {
        return Err(Error::Setting(format!(
            "--pixel-arcmin must be a positive number, got {}",
            args.pixel_arcmin
        )));
    }
    let output_ext = args
        .output
        .extension()
        .map(|e| e.to_string_lossy().to_lowercase());
    if output_ext.as_deref() != Some("npy") {
        return Err(Error::Setting(format!(
            "--output '{}' must end in .npy",
            args.output.display()
        )));
    }
    let picture = args
        .picture
        .clone()
        .unwrap_or_else(|| args.output.with_extension("png"));
    let target_input = read_target(&args.target)?;
    let size = match (&target_input, args.size) {
        (Target::Map { size, .. }, None) => *size,
        (Target::Map { size, .. }, Some(s)) if s == *size => s,
        (Target::Map { size, .. }, Some(s)) => {
            return Err(Error::Setting(format!(
                "--size {s} disagrees with the {size} x {size} target map"
            )))
        }
        (Target::Coefficients(_), Some(s)) => s,
        (Target::Coefficients(_), None) => {
            return Err(Error::Setting(
                "a coefficient-file target needs --size (field side in pixels)".into(),
            ))
        }
    };
    let start = match (args.start, &target_input) {
        (Some(StartOption::White), _) | (None, Target::Coefficients(_)) => StartField::White,
        (Some(StartOption::Gaussian), _) | (None, Target::Map { .. }) => StartField::Gaussian,
    };
    let settings = SynthesisSettings {
        statistics: match args.statistics {
            StatisticsOption::Full => StatisticChoice::Full,
            StatisticsOption::Compact => StatisticChoice::Compact,
        },
        field_envelope_correlation: args.field_envelope_correlation,
        power_spectrum_bins: args.power_bins,
        iterations: args.iterations,
        seed: args.seed,
        start,
        progress: true,
        ..SynthesisSettings::default()
    };
    let pixel = args.pixel_arcmin.to_radians() / 60.0;
    let synthesis = FlatSynthesis::new(size, args.scales, args.orientations, pixel, settings)?;
    let (target, target_map) = match &target_input {
        Target::Map { values, .. } => (synthesis.target_from_map(values)?, Some(values)),
        Target::Coefficients(text) => {
            let c = coefficients_from_json(text, args.scales, args.orientations)
                .map_err(|e| Error::io(&args.target, e))?;
            (synthesis.target_from_coefficients(&c)?, None)
        }
    };
    let outcome = synthesis.synthesise(&target)?;
    write_field(&args.output, size, &outcome.field)?;
    let (_, _, skew, kurt) = one_point_moments(&outcome.field);
    match target_map {
        Some(values) => {
            let gaussian = gaussian_counterpart(values, size, args.seed.wrapping_add(1))?;
            write_panel(
                &picture,
                size,
                &[
                    ("target", values),
                    ("Gaussian, same spectrum", &gaussian),
                    ("synthesised", &outcome.field),
                ],
            )?;
            let (_, _, ts, tk) = one_point_moments(values);
            println!("target: skewness {ts:.4}, excess kurtosis {tk:.4}");
        }
        None => write_panel(
            &picture,
            size,
            &[
                ("synthesised", &outcome.field),
                ("start (white noise)", &outcome.start),
            ],
        )?,
    }
    println!(
        "loss {:.4e} -> {:.4e} after {} iterations ({})",
        outcome.initial_loss, outcome.final_loss, outcome.iterations, outcome.termination
    );
    println!(
        "max normalised deviation |s - t|/sigma over {} statistics: {:.4e}",
        target.values.len(),
        outcome.max_relative_deviation
    );
    println!("synthesised: skewness {skew:.4}, excess kurtosis {kurt:.4}");
    println!("field: {}", args.output.display());
    println!("picture: {}", picture.display());
    Ok(())
}
