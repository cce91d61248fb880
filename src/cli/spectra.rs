//! `planisphere spectra`: angular power spectrum of a map (pseudo-C_ℓ on a masked sky), or the
//! cross-spectrum of two maps, as CSV and JSON tables.

use super::inputs::{load_map, MaskArgs};
use super::output::{write_bytes, write_json};
use crate::error::{Error, Result};
use crate::fits_io::ColumnChoice;
use crate::harmonics::HarmonicTransform;
use crate::spectra::{cross_spectrum, MeasuredSpectrum};
use std::fmt::Write as _;
use std::path::PathBuf;

/// Measure the angular power spectrum of a map on its footprint (pseudo-C_ℓ with the w2
/// correction of Hivon et al. 2002 when masked).
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

/// The binned spectrum as CSV text.
pub fn spectrum_csv(s: &MeasuredSpectrum) -> String {
    let mut out = String::from("ell_min,ell_max,ell_mean,cl,error,modes\n");
    for b in &s.bins {
        let _ = writeln!(
            out,
            "{},{},{:.3},{:.10e},{:.10e},{:.3}",
            b.ell_min, b.ell_max, b.ell_mean, b.cl, b.error, b.modes
        );
    }
    out
}

/// Measures and writes the spectrum.
pub fn run(args: &SpectraArgs) -> Result<()> {
    if args.bin_width == 0 || args.bin_width > 10_000 {
        return Err(Error::Setting(format!(
            "--bin-width must be from 1 to 10000, got {}",
            args.bin_width
        )));
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
    let sht = HarmonicTransform::new(nside, lmax)?;
    let s = cross_spectrum(
        &map,
        other.as_ref().unwrap_or(&map),
        weights,
        &sht,
        args.iterations,
        args.bin_width,
    )?;
    let csv = spectrum_csv(&s);
    if let Some(p) = &args.csv {
        write_bytes(p, csv.as_bytes())?;
    }
    if let Some(p) = &args.json {
        write_json(p, &s)?;
    }
    println!(
        "f_sky {:.4}  w2 {:.4}  w4 {:.4}  lmax {lmax}",
        footprint.f_sky(),
        s.w2,
        s.w4
    );
    print!("{csv}");
    Ok(())
}
