//! `planisphere spectra`: angular power spectrum of a map (pseudo-C_ℓ on a masked sky), or the
//! cross-spectrum of two maps, as CSV and JSON tables: per bin the w2 estimate and the MASTER
//! band power (mode-coupling deconvolution with optional beam and pixel window).

use super::inputs::{load_map, MaskArgs};
use super::output::{write_bytes, write_json};
use crate::error::{Error, Result};
use crate::fits_io::ColumnChoice;
use crate::harmonics::HarmonicTransform;
use crate::mode_coupling::BinWeighting;
use crate::spectra::{master_spectrum, pseudo_spectrum, MasterSettings, MasterSpectrum};
use std::fmt::Write as _;
use std::path::PathBuf;

/// Measure the angular power spectrum of a map on its footprint: pseudo-C_ℓ with the w2
/// correction and MASTER band powers (Hivon et al. 2002) side by side.
#[derive(Debug, clap::Args)]
pub struct SpectraArgs {
    /// The map (HEALPix FITS).
    #[arg(value_name = "MAP.fits")]
    pub map: PathBuf,
    /// Column of the map file: 0-based position or name.
    #[arg(long, default_value = "0")]
    pub column: ColumnChoice,
    /// A second map: measure the cross-spectrum of the two.
    #[arg(long, value_name = "OTHER.fits")]
    pub cross: Option<PathBuf>,
    #[command(flatten)]
    pub mask: MaskArgs,
    /// Largest multipole (default 2·NSIDE).
    #[arg(long)]
    pub lmax: Option<usize>,
    /// Width of the ℓ bins.
    #[arg(long, default_value_t = 16)]
    pub bin_width: usize,
    /// What a bin averages: C_ell (flat C_ell inside a bin) or D_ell = l(l+1)C_ell/2pi.
    #[arg(long, value_enum, default_value_t = BinWeighting::Cl)]
    pub bin_weighting: BinWeighting,
    /// Gaussian beam FWHM of the map in arcmin, divided out (0: no beam).
    #[arg(
        long,
        value_name = "ARCMIN",
        default_value_t = 0.0,
        allow_negative_numbers = true
    )]
    pub beam_arcmin: f64,
    /// Divide out the HEALPix pixel window of the map's NSIDE.
    #[arg(long)]
    pub pixel_window: bool,
    /// Jacobi iterations of the harmonic analysis (0 for a masked sky is common practice).
    #[arg(long, default_value_t = 0)]
    pub iterations: usize,
    /// Write the binned spectrum as CSV.
    #[arg(long, value_name = "FILE")]
    pub csv: Option<PathBuf>,
    /// Write the per-ℓ and binned spectrum as JSON.
    #[arg(long, value_name = "FILE")]
    pub json: Option<PathBuf>,
}

/// The band powers as CSV text: per bin the w2 estimate and the MASTER value with their errors.
pub fn spectrum_csv(s: &MasterSpectrum) -> String {
    let q = match s.weighting {
        BinWeighting::Cl => "cl",
        BinWeighting::Dl => "dl",
    };
    let mut out =
        format!("ell_min,ell_max,ell_mean,{q}_w2,error_w2,{q}_master,error_master,modes\n");
    for b in &s.bins {
        let _ = writeln!(
            out,
            "{},{},{:.3},{:.10e},{:.10e},{:.10e},{:.10e},{:.3}",
            b.ell_min,
            b.ell_max,
            b.ell_mean,
            b.w2_estimate,
            b.w2_error,
            b.master,
            b.master_error,
            b.modes
        );
    }
    out
}

/// What `--json` writes: the w2-corrected C_ℓ per ℓ and the band powers.
#[derive(Debug, serde::Serialize)]
struct SpectraReport<'a> {
    /// C̃_ℓ / w2 for ℓ = 0 … ℓmax (no beam or pixel window divided out).
    cl: Vec<f64>,
    /// Band powers, weight spectrum and transfer function.
    band_powers: &'a MasterSpectrum,
}

/// Measures and writes the spectrum.
pub fn run(args: &SpectraArgs) -> Result<()> {
    if args.bin_width == 0 || args.bin_width > 10_000 {
        return Err(Error::Setting(format!(
            "--bin-width must be from 1 to 10000, got {}",
            args.bin_width
        )));
    }
    if !(args.beam_arcmin.is_finite() && args.beam_arcmin >= 0.0) {
        return Err(Error::Setting(format!(
            "--beam-arcmin must be a finite number >= 0, got {}",
            crate::error::compact(args.beam_arcmin)
        )));
    }
    for p in args.csv.iter().chain(args.json.iter()) {
        super::output::check_output_path(p)?;
    }
    crate::limits::check_harmonic_iterations(args.iterations)?;
    let map = load_map(&args.map, &args.column)?;
    let other = match &args.cross {
        Some(p) => {
            let other = load_map(p, &args.column)?;
            super::inputs::check_same_coordsys(
                (&args.map.display().to_string(), map.coordsys.as_deref()),
                (&p.display().to_string(), other.coordsys.as_deref()),
                args.mask.allow_coordsys_mismatch,
            )?;
            Some(other)
        }
        None => None,
    };
    let nside = map.nside() as usize;
    let lmax = args.lmax.unwrap_or(2 * nside);
    if lmax == 0 {
        return Err(Error::Setting(
            "--lmax must be at least 1: ℓ = 0 alone is only the map's mean".into(),
        ));
    }
    crate::limits::check_lmax("--lmax", lmax, map.nside())?;
    let footprint = args.mask.footprint_for(&map, &args.map)?;
    super::inputs::check_measurable(&map, Some(&footprint), &args.map.display().to_string())?;
    if let (Some(other), Some(path)) = (&other, &args.cross) {
        super::inputs::check_measurable(other, Some(&footprint), &path.display().to_string())?;
    }
    let weights = (footprint.f_sky() < 1.0).then_some(&footprint);
    if args.pixel_window && !nside.is_power_of_two() {
        return Err(Error::Setting(format!(
            "--pixel-window needs a power-of-two NSIDE, the map has {nside}"
        )));
    }
    let sht = HarmonicTransform::new(nside, lmax)?;
    let pseudo = pseudo_spectrum(
        &map,
        other.as_ref().unwrap_or(&map),
        weights,
        &sht,
        args.iterations,
    )?;
    let settings = MasterSettings {
        bin_width: args.bin_width,
        weighting: args.bin_weighting,
        beam_fwhm_arcmin: args.beam_arcmin,
        pixel_window: args.pixel_window,
    };
    let s = master_spectrum(&pseudo, nside, args.iterations, &settings)?;
    let csv = spectrum_csv(&s);
    if let Some(p) = &args.csv {
        write_bytes(p, csv.as_bytes())?;
    }
    if let Some(p) = &args.json {
        let report = SpectraReport {
            cl: pseudo.raw.iter().map(|c| c / pseudo.w2).collect(),
            band_powers: &s,
        };
        write_json(p, &report)?;
    }
    println!(
        "f_sky {:.4}  w2 {:.4}  w4 {:.4}  lmax {lmax}  beam {} arcmin  pixel window {}",
        footprint.f_sky(),
        s.w2,
        s.w4,
        args.beam_arcmin,
        if args.pixel_window { "on" } else { "off" }
    );
    print!("{csv}");
    Ok(())
}
