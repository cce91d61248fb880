//! `planisphere synthesize`: a new field whose scattering statistics match a target.
//!
//! * Flat mode (output `.npy`): the target is a flat map (.npy, 2D float64, square, periodic),
//!   one tile of a HEALPix map (`--target map.fits --tile INDEX`, the tile's sampled field) or a
//!   coefficient file (JSON with a `coefficients` array, see
//!   [`crate::synthesis::coefficients_from_json`]). Writes the field as .npy and a PNG panel:
//!   target, a Gaussian field with the target's power spectrum, and the synthesised field.
//!   Method and loss: [`crate::synthesis`].
//! * Sphere mode (output `.fits`): the target is a HEALPix map with its mask, or a coefficient
//!   file with `--mask`; the pixels inside the footprint are synthesised so that the pooled
//!   coefficients of the masked footprint match ([`crate::synthesis::sphere`]). Writes a HEALPix
//!   FITS map (UNSEEN outside the footprint) and a PNG picture (module `picture`): target, a
//!   Gaussian sky with the target's pseudo-C_ℓ and the synthesised map in Mollweide view and
//!   zoomed into one region in gnomonic view, with their one-point histograms and peak counts.

mod picture;

use crate::cli::inputs::{load_map, MaskArgs};
use crate::error::{Error, Result};
use crate::figures::plotting::{write_pictures_in_a_row, SkyPicture};
use crate::files::{check_output_path, write_atomically};
use crate::io::fits_io::{read_footprint, write_map, ColumnChoice, WriteOptions};
use crate::measure::measurement::{MeasurementSettings, SphereMeasurer};
use crate::measure::settings::MeasurementChoices;
use crate::sky::footprint::Footprint;
use crate::sky::skymap::SkyMap;
use crate::synthesis::sphere::{
    gaussian_sky, peak_counts_in, values_in, SphereSynthesis, SphereTarget,
};
use crate::synthesis::{
    coefficients_from_json, gaussian_counterpart, one_point_moments, FlatSynthesis,
    OptimisationReport, StartField, StatisticChoice, SynthesisSettings,
};
use crate::tiles::sampling::TileSampler;
use ndarray::Array2;
use std::path::{Path, PathBuf};

/// Which statistics to match.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum StatisticsOption {
    /// Every coefficient but the mean: variance, S1, P, S2.
    Full,
    /// The orientation-harmonic summary without the mean: rms; per scale the mean modulus and
    /// its anisotropy; per scale pair the intermittency and the alignment.
    Summary,
}

/// On or off.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum Switch {
    /// Turned on.
    On,
    /// Turned off.
    Off,
}

/// Start field of the optimisation.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum StartOption {
    /// White noise with the target's mean and variance.
    White,
    /// Gaussian field with the target map's power spectrum.
    Gaussian,
}

/// Synthesise a flat field or a HEALPix map on a footprint whose scattering statistics match a
/// target map, tile or coefficient file.
#[derive(Debug, clap::Args)]
pub struct SynthesizeArgs {
    /// Target: a flat map as .npy (2D float64, n × n, n a power of two), a HEALPix map as .fits
    /// (sphere mode, or one tile of it with --tile), or a coefficient .json (as written by
    /// `measure`).
    #[arg(long, value_name = "PATH")]
    pub target: PathBuf,
    /// Output: .npy for a flat field (n × n float64), .fits for a HEALPix map synthesised on
    /// the footprint (UNSEEN outside it).
    #[arg(long, short, value_name = "PATH")]
    pub output: PathBuf,
    /// PNG panel (default: the output path with extension .png).
    #[arg(long, value_name = "PATH")]
    pub picture: Option<PathBuf>,
    /// Flat mode: field side in pixels, needed with a coefficient-file target.
    #[arg(long, value_name = "PIXELS")]
    pub size: Option<usize>,
    /// The measurement choices of `measure` (J, L, tiles, pixel size, border, sampling) with
    /// this command's defaults ([`synthesis_defaults`], [`FLAT_PIXEL_ARCMIN`]) and help;
    /// `--spectrum-bins` and `--no-bispectrum` are refused.
    #[command(flatten)]
    pub measurement: MeasurementChoices,
    /// Statistics to match.
    #[arg(long, value_enum, default_value_t = StatisticsOption::Full)]
    pub statistics: StatisticsOption,
    /// Also match the field–envelope correlations ⟨(f − μ)|f∗ψ_j|⟩, one per scale (on the
    /// sphere also ⟨(f − μ)|f − μ|⟩): the only matched statistics that change sign with
    /// f → −f, so they put the peaks on the target's side and carry its skewness [default: on
    /// with a target map; unavailable with a coefficient file]. On a 128² lognormal target of
    /// skewness 1.55 (J = 4, Gaussian start, 200 iterations) they raise the result's skewness
    /// from 0.13 (off) to 1.49 (on). On the sphere the switch also matches the skewness and
    /// kurtosis of the field on the tiles, which the other statistics leave free on small
    /// footprints: on an NSIDE 64 lognormal cap (skewness 1.99, excess kurtosis 5.69, J = 3)
    /// the result has 1.90 and 5.37 with them, 1.53 and 2.84 without; details in README.md.
    #[arg(long, value_enum, value_name = "on|off", num_args = 0..=1, default_missing_value = "on")]
    pub field_envelope_correlation: Option<Switch>,
    /// Flat mode: also match the power spectrum in this many logarithmic bins (target maps
    /// only).
    #[arg(long, value_name = "BINS")]
    pub power_bins: Option<usize>,
    /// Maximum number of L-BFGS iterations.
    #[arg(long, default_value_t = 200)]
    pub iterations: u64,
    /// Seed of the start field.
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// Start field [default: gaussian for a target map, white for a coefficient file]. The
    /// Gaussian start already has the target's power spectrum, so the optimisation only adds
    /// the non-Gaussian texture instead of building the spectrum from noise: on the same 128²
    /// target (excess kurtosis 3.56) it gives excess kurtosis 3.03 where a white start
    /// overshoots to 6.29 (details in README.md).
    #[arg(long, value_enum)]
    pub start: Option<StartOption>,
    /// Column of a HEALPix target map: 0-based position or name.
    #[arg(long, default_value = "0")]
    pub column: ColumnChoice,
    #[command(flatten)]
    pub mask: MaskArgs,
    /// Flat mode with a HEALPix target: synthesise a flat field like tile INDEX of the map's
    /// tiling (as `planisphere tiles` numbers them).
    #[arg(long, value_name = "INDEX")]
    pub tile: Option<usize>,
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
            crate::files::require_regular_input(path)?;
            if !path.exists() {
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
        "json" => crate::files::read_text(path).map(Target::Coefficients),
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
    crate::figures::plotting::register_font()?;
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
    let fail = |e: &dyn std::fmt::Display| Error::io(path, format!("cannot draw: {e}"));
    crate::figures::plotting::write_png_atomically(path, (width, height), |root, _| {
        for (p, (title, values)) in panels.iter().enumerate() {
            let x0 = margin + p as u32 * (side + margin);
            root.draw(&Text::new(
                title.to_string(),
                (x0 as i32, 6),
                (crate::figures::plotting::FONT_FAMILY, 18).into_font(),
            ))
            .map_err(|e| fail(&e))?;
            for iy in 0..size {
                for ix in 0..size {
                    let [r, g, b] =
                        crate::figures::plotting::colour_ramp((values[iy * size + ix] - lo) / span);
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
        Ok(())
    })
}

/// Thresholds ν (in rms above the mean) of the peak counts shown and printed in sphere mode.
const PEAK_THRESHOLDS: [f64; 4] = [0.0, 1.0, 2.0, 3.0];

/// Flat mode: the pixel side in arcmin when `--pixel-arcmin` is not given (it only scales the
/// power spectrum of a flat field; a tile of a HEALPix map keeps its own).
pub const FLAT_PIXEL_ARCMIN: f64 = 1.0;

/// This command's defaults for the measurement choices: those of `measure`, without the tile
/// bispectrum (no tile spectra are matched) and without Fourier cropping (the path the
/// masked-tile gradient differentiates).
pub fn synthesis_defaults() -> MeasurementSettings {
    let mut s = MeasurementSettings {
        bispectrum: false,
        ..MeasurementSettings::default()
    };
    s.transform.fourier_cropping = false;
    s
}

/// The measurement settings of a run: the choices over [`synthesis_defaults`]. In flat mode
/// without `--tile` the pixel size is `--pixel-arcmin` or [`FLAT_PIXEL_ARCMIN`]; a sphere
/// synthesis left to the default reads the map at one map spacing
/// ([`crate::synthesis::sphere`]).
fn measurement_settings(args: &SynthesizeArgs) -> MeasurementSettings {
    args.measurement.resolve(synthesis_defaults())
}

/// The command's own help for the measurement flags it shares with `measure`: the flat-mode
/// pixel size, the tile flags marked as sphere-mode ones, no short `-J`/`-L`, and the
/// tile-spectrum flags hidden (they are refused).
pub(crate) fn shared_flag_help(arg: clap::Arg) -> clap::Arg {
    match arg.get_id().as_str() {
        "pixel_arcmin" => arg.value_name("ARCMIN").help(
            "Pixel side in arcmin [flat: 1 (scales the power spectrum only); sphere: the map's mean pixel spacing; --tile: as `measure`]",
        ),
        "scales" => arg.short(None).help("Number of scales J [default: 4]"),
        "orientations" => arg.short(None).help("Number of orientations L [default: 4]"),
        "tile_pixels" | "coarse_nside" | "border_pixels" | "sampling" => {
            let help = arg.get_help().map(|h| h.to_string()).unwrap_or_default();
            let mut chars = help.chars();
            let first = chars.next().map(|c| c.to_lowercase().to_string());
            let help = first.unwrap_or_default() + chars.as_str();
            arg.help(format!("Sphere mode and --tile: {help}"))
        }
        "spectrum_bins" | "bispectrum" => arg.hide(true),
        _ => arg,
    }
}

/// Refuses the measurement choices this command has no use for, and checks the others with
/// the one validation of measurement settings.
fn check_measurement_choices(args: &SynthesizeArgs) -> Result<()> {
    if args.measurement.spectrum_bins.is_some() || args.measurement.bispectrum.is_some() {
        return Err(Error::Setting(
            "--spectrum-bins and --no-bispectrum do not apply to synthesize: it matches no tile spectra".into(),
        ));
    }
    measurement_settings(args).validate()
}

/// Refuses `--field-envelope-correlation on` with a coefficient-file target (the correlations
/// need the target map).
fn check_correlation_target(args: &SynthesizeArgs, map_target: bool) -> Result<()> {
    if args.field_envelope_correlation == Some(Switch::On) && !map_target {
        return Err(Error::Setting(
            "--field-envelope-correlation on needs a target map: a coefficient file does not hold the correlations".into(),
        ));
    }
    Ok(())
}

/// The settings of one run; `map_target` says whether the target is a map (the field–envelope
/// correlations are then on unless turned off).
fn synthesis_settings(
    args: &SynthesizeArgs,
    start: StartField,
    map_target: bool,
) -> SynthesisSettings {
    SynthesisSettings {
        statistics: match args.statistics {
            StatisticsOption::Full => StatisticChoice::Full,
            StatisticsOption::Summary => StatisticChoice::Summary,
        },
        field_envelope_correlation: match args.field_envelope_correlation {
            Some(Switch::On) => true,
            Some(Switch::Off) => false,
            None => map_target,
        },
        power_spectrum_bins: args.power_bins,
        iterations: args.iterations,
        seed: args.seed,
        start,
        progress: true,
        ..SynthesisSettings::default()
    }
}

fn extension_of(path: &Path) -> String {
    path.extension()
        .map(|e| e.to_string_lossy().to_lowercase())
        .unwrap_or_default()
}

/// Runs the command.
pub fn run(args: &SynthesizeArgs) -> Result<()> {
    check_measurement_choices(args)?;
    let picture = args
        .picture
        .clone()
        .unwrap_or_else(|| args.output.with_extension("png"));
    match extension_of(&args.output).as_str() {
        "npy" => {
            check_output_path(&args.output)?;
            check_output_path(&picture)?;
            run_flat(args, &picture)
        }
        "fits" | "fit" => {
            check_output_path(&args.output)?;
            check_output_path(&picture)?;
            run_sphere(args, &picture)
        }
        _ => Err(Error::Setting(format!(
            "--output '{}' must end in .npy (flat field) or .fits (HEALPix map)",
            args.output.display()
        ))),
    }
}

/// The sampled field of tile `index` of `map` (with the mask options) and its pixel size.
fn tile_of_sphere_map(args: &SynthesizeArgs, index: usize) -> Result<(usize, Vec<f64>, f64)> {
    let map = load_map(&args.target, &args.column)?;
    let footprint = args.mask.footprint_for(&map, &args.target)?;
    let settings = measurement_settings(args);
    let measurer = SphereMeasurer::new(map.pixelization(), &footprint, settings)?;
    let plan = measurer.plan();
    if index >= plan.len() {
        return Err(Error::Setting(format!(
            "--tile {index} does not exist: the footprint has tiles 0 to {}",
            plan.len() - 1
        )));
    }
    let sampler = TileSampler::new(plan, &map, &footprint, settings.sampling)?;
    let grids = sampler.sample(index)?;
    Ok((grids.n, grids.field, plan.pixel_size()))
}

/// The target of a flat synthesis: a tile of a HEALPix map (with its pixel size, radians), a
/// .npy field or a coefficient file.
fn flat_target(args: &SynthesizeArgs) -> Result<(Target, Option<f64>)> {
    let fits_target = matches!(extension_of(&args.target).as_str(), "fits" | "fit");
    Ok(match (fits_target, args.tile) {
        (true, Some(index)) => {
            let (size, values, pixel) = tile_of_sphere_map(args, index)?;
            (Target::Map { size, values }, Some(pixel))
        }
        (true, None) => {
            return Err(Error::Setting(
                "a HEALPix target with a .npy output needs --tile INDEX (or write a .fits output for the sphere mode)".into(),
            ))
        }
        (false, Some(_)) => {
            return Err(Error::Setting(
                "--tile needs a HEALPix .fits target".into(),
            ))
        }
        (false, None) => (read_target(&args.target)?, None),
    })
}

/// The field side: the target map's, or `--size` for a coefficient file.
fn flat_size(args: &SynthesizeArgs, target_input: &Target) -> Result<usize> {
    Ok(match (target_input, args.size) {
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
    })
}

fn run_flat(args: &SynthesizeArgs, picture: &Path) -> Result<()> {
    let m = measurement_settings(args);
    let (target_input, tile_pixel) = flat_target(args)?;
    let size = flat_size(args, &target_input)?;
    if size < 8 || !size.is_power_of_two() {
        return Err(Error::Setting(format!(
            "--size must be a power of two of at least 8 pixels, got {size}"
        )));
    }
    crate::limits::check_memory(
        &format!(
            "a flat synthesis of {size} × {size} pixels with J = {}, L = {}",
            m.scales, m.orientations
        ),
        crate::limits::flat_synthesis_bytes(size, m.scales, m.orientations),
    )?;
    let start = match (args.start, &target_input) {
        (Some(StartOption::White), _) | (None, Target::Coefficients(_)) => StartField::White,
        (Some(StartOption::Gaussian), _) | (None, Target::Map { .. }) => StartField::Gaussian,
    };
    let map_target = matches!(target_input, Target::Map { .. });
    check_correlation_target(args, map_target)?;
    let settings = synthesis_settings(args, start, map_target);
    let arcmin = m.pixel_arcmin.unwrap_or(FLAT_PIXEL_ARCMIN);
    let pixel = tile_pixel.unwrap_or_else(|| arcmin.to_radians() / 60.0);
    let synthesis = FlatSynthesis::new(size, m.scales, m.orientations, pixel, settings)?;
    let (target, target_map) = match &target_input {
        Target::Map { values, .. } => (synthesis.target_from_map(values)?, Some(values)),
        Target::Coefficients(text) => {
            let c = coefficients_from_json(text, m.scales, m.orientations)
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
                picture,
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
            picture,
            size,
            &[
                ("synthesised", &outcome.field),
                ("start (white noise)", &outcome.start),
            ],
        )?,
    }
    print_convergence(&outcome.report, target.matched.values.len());
    println!("synthesised: skewness {skew:.4}, excess kurtosis {kurt:.4}");
    println!("field: {}", args.output.display());
    println!("picture: {}", picture.display());
    Ok(())
}

/// The raw mask of sphere mode, checked against the target map: same NSIDE, and the map valid
/// wherever the mask has positive weight.
fn checked_mask(args: &SynthesizeArgs, map: &SkyMap) -> Result<Option<Footprint>> {
    let Some(path) = &args.mask.mask else {
        return Ok(None);
    };
    let (raw, header) = read_footprint(path, &args.mask.mask_column)?;
    for w in &header.warnings {
        eprintln!("planisphere: warning: {}: {w}", path.display());
    }
    crate::cli::inputs::check_same_coordsys(
        (&args.target.display().to_string(), map.coordsys.as_deref()),
        (&path.display().to_string(), header.coordsys.as_deref()),
        args.mask.allow_coordsys_mismatch,
    )?;
    if raw.pixelization().nside() != map.nside() {
        return Err(Error::Mismatch(format!(
            "mask NSIDE {} does not match target map NSIDE {}",
            raw.pixelization().nside(),
            map.nside()
        )));
    }
    let inside = raw.to_ordering(map.ordering())?;
    let bad = inside
        .weights()
        .iter()
        .zip(map.valid())
        .filter(|(&w, &ok)| w > 0.0 && !ok)
        .count();
    if bad > 0 {
        return Err(Error::io(
            &args.target,
            format!("the target map has no value (NaN or UNSEEN) at {bad} pixels inside the mask"),
        ));
    }
    Ok(Some(raw))
}

/// `values` inside the footprint, bad elsewhere.
fn on_footprint(map: &SkyMap, footprint: &Footprint) -> Result<SkyMap> {
    let values = map
        .values()
        .iter()
        .zip(footprint.weights())
        .map(|(&v, &w)| if w > 0.0 { v } else { f64::NAN })
        .collect();
    SkyMap::new(map.pixelization(), values)
}

/// 0.5 and 99.5 percentiles of the valid values.
fn colour_range(map: &SkyMap) -> (f64, f64) {
    let mut v: Vec<f64> = map
        .values()
        .iter()
        .zip(map.valid())
        .filter(|(_, &ok)| ok)
        .map(|(&v, _)| v)
        .collect();
    if v.is_empty() {
        return (0.0, 1.0);
    }
    v.sort_by(f64::total_cmp);
    let pick = |q: f64| v[((v.len() - 1) as f64 * q).round() as usize];
    (pick(0.005), pick(0.995))
}

/// Longitude (radians) of the footprint's weighted mean direction, to centre the pictures.
fn footprint_longitude(footprint: &Footprint) -> f64 {
    let pix = footprint.pixelization();
    let (mut x, mut y) = (0.0, 0.0);
    for (p, &w) in footprint.weights().iter().enumerate() {
        if w > 0.0 {
            let d = pix.center(p as u64);
            x += w * d.theta.sin() * d.phi.cos();
            y += w * d.theta.sin() * d.phi.sin();
        }
    }
    if x == 0.0 && y == 0.0 {
        0.0
    } else {
        y.atan2(x)
    }
}

fn run_sphere(args: &SynthesizeArgs, picture: &Path) -> Result<()> {
    if args.tile.is_some() {
        return Err(Error::Setting(
            "--tile selects a flat target: use a .npy output with it".into(),
        ));
    }
    if args.size.is_some() {
        return Err(Error::Setting(
            "--size is for flat fields; a sphere synthesis takes its size from the map".into(),
        ));
    }
    let measurement = measurement_settings(args);
    let (target_map, footprint) = sphere_target_and_footprint(args)?;
    let start = match (args.start, &target_map) {
        (Some(StartOption::White), _) | (None, None) => StartField::White,
        (Some(StartOption::Gaussian), _) | (None, Some(_)) => StartField::Gaussian,
    };
    check_correlation_target(args, target_map.is_some())?;
    let settings = synthesis_settings(args, start, target_map.is_some());
    let pixelization = match &target_map {
        Some(m) => m.pixelization(),
        None => footprint.pixelization(),
    };
    let synthesis = SphereSynthesis::new(pixelization, &footprint, measurement, settings)?;
    let target = match &target_map {
        Some(map) => synthesis.target_from_map(map)?,
        None => {
            let text = crate::files::read_text(&args.target)?;
            let c = coefficients_from_json(&text, measurement.scales, measurement.orientations)
                .map_err(|e| Error::io(&args.target, e))?;
            synthesis.target_from_coefficients(&c)?
        }
    };
    eprintln!(
        "planisphere: synthesising {} footprint pixels on {} tiles of {}² pixels",
        synthesis.variables().len(),
        synthesis.tile_count(),
        synthesis.tile_pixels()
    );
    let outcome = synthesis.synthesise(&target)?;
    let fp = synthesis.footprint();
    let result = on_footprint(&outcome.map, fp)?;
    write_map(&args.output, "SIGNAL", &result, &WriteOptions::default())?;
    match &target_map {
        Some(map) => draw_beside_target(args, picture, map, &target, &result, fp)?,
        None => {
            let lon = footprint_longitude(fp);
            let (lo, hi) = colour_range(&result);
            let shown_start = on_footprint(&outcome.start, fp)?;
            let pictures = [
                sphere_panel("synthesised", lon, &result, lo, hi),
                sphere_panel("start (white noise)", lon, &shown_start, lo, hi),
            ];
            write_pictures_in_a_row(picture, &pictures)?;
        }
    }
    print_convergence(&outcome.report, target.matched.values.len());
    println!("map: {}", args.output.display());
    println!("picture: {}", picture.display());
    Ok(())
}

/// The target map of a sphere synthesis (none for a coefficient file) and the tapered
/// footprint: the mask's, or the target map's valid pixels.
fn sphere_target_and_footprint(args: &SynthesizeArgs) -> Result<(Option<SkyMap>, Footprint)> {
    match extension_of(&args.target).as_str() {
        "fits" | "fit" => {
            let map = load_map(&args.target, &args.column)?;
            if map.valid_count() == 0 {
                return Err(Error::io(
                    &args.target,
                    "the target map has no valid pixel (all NaN or UNSEEN)",
                ));
            }
            let raw = match checked_mask(args, &map)? {
                Some(raw) => raw.restricted_to(&map)?,
                None => Footprint::of_valid_pixels(&map).restricted_to(&map)?,
            };
            let footprint = args.mask.taper_footprint(raw)?;
            crate::cli::inputs::check_measurable(
                &map,
                Some(&footprint),
                &args.target.display().to_string(),
            )?;
            Ok((Some(map), footprint))
        }
        "json" => {
            let path = args.mask.mask.as_ref().ok_or_else(|| {
                Error::Setting(
                    "a coefficient-file target on the sphere needs --mask (it gives NSIDE and the footprint)".into(),
                )
            })?;
            let (raw, header) = read_footprint(path, &args.mask.mask_column)?;
            for w in &header.warnings {
                eprintln!("planisphere: warning: {}: {w}", path.display());
            }
            Ok((None, args.mask.taper_footprint(raw)?))
        }
        _ => Err(Error::io(
            &args.target,
            "a sphere synthesis needs a HEALPix .fits map or a .json coefficient file as target",
        )),
    }
}

/// One panel of the row of sky pictures: the same width and centre for every map.
fn sphere_panel<'m>(title: &str, lon: f64, map: &'m SkyMap, lo: f64, hi: f64) -> SkyPicture<'m> {
    SkyPicture::new(640, title)
        .central_longitude(lon)
        .fill_map(map, lo, hi)
}

/// Draws the target, a Gaussian sky of the target's spectrum and the synthesised map side by
/// side with their one-point distributions and peak counts, and prints their moments.
fn draw_beside_target(
    args: &SynthesizeArgs,
    picture: &Path,
    map: &SkyMap,
    target: &SphereTarget,
    result: &SkyMap,
    fp: &Footprint,
) -> Result<()> {
    let lon = footprint_longitude(fp);
    let map = map.to_ordering(result.ordering())?;
    let shown_target = on_footprint(&map, fp)?;
    let (lo, hi) = colour_range(&shown_target);
    let spectrum = target
        .spectrum
        .clone()
        .ok_or_else(|| Error::Data("the target map's spectrum is missing".into()))?;
    let gaussian = gaussian_sky(map.nside(), spectrum, args.seed.wrapping_add(1))?
        .to_ordering(result.ordering())?;
    let gaussian: Vec<f64> = gaussian
        .values()
        .iter()
        .map(|v| v + target.matched.mean)
        .collect();
    let shown_gaussian = on_footprint(&SkyMap::new(result.pixelization(), gaussian)?, fp)?;
    let pictures = [
        sphere_panel("target", lon, &shown_target, lo, hi),
        sphere_panel("Gaussian, same spectrum", lon, &shown_gaussian, lo, hi),
        sphere_panel("synthesised", lon, result, lo, hi),
    ];
    let shown = |title, map, colour| -> Result<picture::ShownMap<'_>> {
        Ok(picture::ShownMap {
            title,
            map,
            values: values_in(map, fp)?,
            peaks: peak_counts_in(map, fp, &PEAK_THRESHOLDS)?,
            colour,
        })
    };
    let maps = [
        shown("target", &shown_target, [0, 0, 0])?,
        shown("Gaussian, same spectrum", &shown_gaussian, [150, 150, 150])?,
        shown("synthesised", result, [200, 40, 40])?,
    ];
    picture::write_sphere_picture(
        picture,
        &pictures,
        &maps,
        picture::zoom_centre(fp),
        (lo, hi),
        &PEAK_THRESHOLDS,
    )?;
    for m in &maps {
        let (_, _, skew, kurt) = one_point_moments(&m.values);
        println!(
            "{}: skewness {skew:.4}, excess kurtosis {kurt:.4}, peaks above mean + {PEAK_THRESHOLDS:?} rms: {:?}",
            m.title, m.peaks
        );
    }
    Ok(())
}

/// Prints the loss at the start and the end, the iterations and why they stopped, and the
/// largest normalised deviation over the `statistics` matched statistics.
fn print_convergence(report: &OptimisationReport, statistics: usize) {
    let r = report;
    println!(
        "loss {:.4e} -> {:.4e} after {} iterations ({})",
        r.initial_loss, r.final_loss, r.iterations, r.termination
    );
    println!(
        "max normalised deviation |s - t|/sigma over {statistics} statistics: {:.4e}",
        r.max_relative_deviation
    );
}
