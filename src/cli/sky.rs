//! `planisphere sky`: simulated HEALPix skies (Gaussian or lognormal) written as FITS maps.

use crate::error::{Error, Result};
use crate::io::fits_io::{write_map, ValuePrecision, WriteOptions};
use crate::simulate::skies::{SkyOptions, SkyRecipe, SpectrumChoice};
use std::path::PathBuf;

/// Make simulated skies of a given angular spectrum and write them as HEALPix FITS maps.
#[derive(Debug, clap::Args)]
pub struct SkyArgs {
    /// Output path; with --count above 1 it must contain `{index}`, replaced by 0, 1, 2, …
    #[arg(long, short, value_name = "PATH")]
    pub output: PathBuf,
    /// NSIDE of the maps (RING ordering).
    #[arg(long, default_value_t = 128)]
    pub nside: u32,
    /// Spectrum table: rows `ell C_ell` (text). Without it the built-in demo model is used.
    #[arg(long, value_name = "FILE")]
    pub spectrum: Option<PathBuf>,
    /// Variance of the built-in model spectrum (ignored with --spectrum).
    #[arg(long, default_value_t = 1e-4, allow_negative_numbers = true)]
    pub model_variance: f64,
    /// Largest multipole synthesised (default 3·NSIDE − 1).
    #[arg(long)]
    pub lmax: Option<usize>,
    /// Lognormal shift κ0: makes κ = κ0(exp(g − σ²/2) − 1) with the requested spectrum.
    #[arg(long, value_name = "KAPPA0", allow_negative_numbers = true)]
    pub lognormal_shift: Option<f64>,
    /// With --lognormal-shift: the spectrum is that of the underlying Gaussian field g, not of
    /// the lognormal map.
    #[arg(long, requires = "lognormal_shift")]
    pub gaussian_spectrum: bool,
    /// Gaussian beam FWHM in arcmin.
    #[arg(long, value_name = "ARCMIN", allow_negative_numbers = true)]
    pub beam_arcmin: Option<f64>,
    /// White noise per pixel, standard deviation.
    #[arg(
        long,
        value_name = "SIGMA",
        conflicts_with = "shape_noise",
        allow_negative_numbers = true
    )]
    pub noise_sigma: Option<f64>,
    /// Shape noise from `SIGMA_E,GALAXIES_PER_ARCMIN2`: σ_pix = σ_e/√(n_gal·A_pix).
    #[arg(long, value_name = "SIGMA_E,N_GAL")]
    pub shape_noise: Option<String>,
    /// Seed of the first sky; sky i uses a stream derived from (seed, i).
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// How many skies.
    #[arg(long, default_value_t = 1)]
    pub count: u64,
    /// First sky index (to continue an ensemble).
    #[arg(long, default_value_t = 0)]
    pub first_index: u64,
    /// Store float32 values (half the file size).
    #[arg(long)]
    pub float32: bool,
}

/// The output path of sky `index`.
pub fn indexed_path(pattern: &std::path::Path, index: u64, count: u64) -> Result<PathBuf> {
    let text = pattern.to_string_lossy();
    if text.contains("{index}") {
        Ok(PathBuf::from(
            text.replace("{index}", &format!("{index:04}")),
        ))
    } else if count == 1 {
        Ok(pattern.to_path_buf())
    } else {
        Err(Error::Setting(format!(
            "--output '{text}' must contain {{index}} when --count is {count}"
        )))
    }
}

fn parse_shape_noise(text: &str) -> Result<(f64, f64)> {
    let parts: Vec<&str> = text.split(',').map(str::trim).collect();
    let bad = || {
        Error::Setting(format!(
            "--shape-noise expects SIGMA_E,GALAXIES_PER_ARCMIN2 (e.g. 0.26,30), got '{text}'"
        ))
    };
    if parts.len() != 2 {
        return Err(bad());
    }
    let s: f64 = parts[0].parse().map_err(|_| bad())?;
    let n: f64 = parts[1].parse().map_err(|_| bad())?;
    Ok((s, n))
}

/// The recipe the options describe ([`SkyOptions::recipe`], with its checks).
pub fn recipe(args: &SkyArgs) -> Result<SkyRecipe> {
    let shape_noise = match &args.shape_noise {
        Some(text) => Some(parse_shape_noise(text)?),
        None => None,
    };
    SkyOptions {
        nside: args.nside,
        lmax: args.lmax,
        spectrum: match &args.spectrum {
            Some(path) => SpectrumChoice::File(path.clone()),
            None => SpectrumChoice::Model {
                variance: args.model_variance,
            },
        },
        lognormal_shift: args.lognormal_shift,
        gaussian_spectrum: args.gaussian_spectrum,
        beam_arcmin: args.beam_arcmin,
        noise_sigma: args.noise_sigma,
        shape_noise,
        seed: args.seed,
        first_index: args.first_index,
        count: args.count,
    }
    .recipe()
}

/// The output paths of every sky of a run (after checking the index range).
pub fn output_paths(args: &SkyArgs) -> Result<Vec<PathBuf>> {
    crate::limits::check_index_range(args.first_index, args.count)?;
    (0..args.count)
        .map(|i| indexed_path(&args.output, args.first_index + i, args.count))
        .collect()
}

/// Makes and writes the skies.
pub fn run(args: &SkyArgs) -> Result<()> {
    let recipe = recipe(args)?;
    // every output path is checked before any work (see `cli::output::command_files`)
    let paths = output_paths(args)?;
    let sht = recipe.transform()?;
    let options = WriteOptions {
        precision: if args.float32 {
            ValuePrecision::Float32
        } else {
            ValuePrecision::Float64
        },
        ..WriteOptions::default()
    };
    for (k, path) in paths.iter().enumerate() {
        let index = args.first_index + k as u64;
        let map = recipe.realise(&sht, index)?;
        write_map(path, "SIGNAL", &map, &options)?;
        let s = map.summary();
        println!(
            "{}: NSIDE {} sky {index} mean {:.3e} rms {:.3e}",
            path.display(),
            s.nside,
            s.mean.unwrap_or(f64::NAN),
            s.rms.unwrap_or(f64::NAN)
        );
    }
    Ok(())
}
