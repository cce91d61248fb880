//! `planisphere spectra`: angular power spectrum of a map (pseudo-C_ℓ on a masked sky), or the
//! cross-spectrum of two maps, as CSV and JSON tables: per bin the w2 estimate and the MASTER
//! band power (mode-coupling deconvolution with optional beam and pixel window).

use super::inputs::{load_map, MaskArgs};
use crate::error::Result;
use crate::files::{write_bytes, write_json};
use crate::harmonics::mode_coupling::BinWeighting;
pub use crate::harmonics::spectra::spectrum_csv;
use crate::harmonics::spectra::{measure_spectra, MasterSettings, SpectraDocument};
use crate::io::fits_io::ColumnChoice;
use crate::sky::footprint::{Footprint, WEIGHT_BLOCK};
use crate::sky::skymap::SkyMap;
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

/// The binary footprint of `map`'s valid pixels, held by blocks (blocks of ones without storage):
/// the same weights as the footprint of its valid pixels restricted to it.
fn valid_pixels_by_blocks(map: &SkyMap) -> Result<Footprint> {
    let valid = map.valid();
    Footprint::from_weight_chunks(
        map.pixelization(),
        (0..valid.len()).step_by(WEIGHT_BLOCK).map(|start| {
            let end = (start + WEIGHT_BLOCK).min(valid.len());
            Ok(valid
                .range(start..end)
                .map(|&v| f64::from(u8::from(v)))
                .collect())
        }),
    )
}

/// Measures and writes the spectrum.
pub fn run(args: &SpectraArgs) -> Result<()> {
    let settings = MasterSettings {
        bin_width: args.bin_width,
        weighting: args.bin_weighting,
        beam_fwhm_arcmin: args.beam_arcmin,
        pixel_window: args.pixel_window,
    };
    settings.check()?;
    for p in args.csv.iter().chain(args.json.iter()) {
        crate::files::check_output_path(p)?;
    }
    crate::limits::check_harmonic_iterations(args.iterations)?;
    let nside = crate::io::fits_io::HealpixFitsReader::open(&args.map)?
        .header()
        .nside;
    let lmax = args.lmax.unwrap_or(2 * nside as usize);
    crate::limits::check_lmax("--lmax", lmax, nside)?;
    crate::limits::check_memory(
        &format!("the spectra of a NSIDE {nside} map up to ℓ = {lmax}"),
        crate::limits::spectra_bytes(
            nside,
            lmax,
            1 + usize::from(args.cross.is_some()),
            args.mask.mask.is_some(),
        ),
    )?;
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
    let footprint = match &args.mask.mask {
        // Without a mask the footprint is the map's valid pixels, held by blocks: a full sky
        // needs no full-sky array of ones (the whole map is valid in the common case).
        None if map.valid_count() > 0 => {
            args.mask.taper_footprint(valid_pixels_by_blocks(&map)?)?
        }
        _ => args.mask.footprint_for(&map, &args.map)?,
    };
    let other_name = args.cross.as_ref().map(|p| p.display().to_string());
    let (pseudo, s) = measure_spectra(
        (map, &args.map.display().to_string()),
        other.as_ref().zip(other_name.as_deref()),
        &footprint,
        args.lmax,
        args.iterations,
        &settings,
    )?;
    let lmax = pseudo.raw.len() - 1;
    let csv = spectrum_csv(&s);
    if let Some(p) = &args.csv {
        write_bytes(p, csv.as_bytes())?;
    }
    if let Some(p) = &args.json {
        write_json(p, &SpectraDocument::new(&pseudo, &s))?;
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
