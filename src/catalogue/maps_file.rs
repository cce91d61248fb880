//! The maps of a binned catalogue as one HEALPix FITS file (HEALPix FITS convention, through
//! [`crate::io::fits_io::write_maps`]: RING, full sky, written to a temporary file renamed into
//! place), with `COORDSYS = 'C'` since catalogue positions are celestial (ICRS).
//!
//! Columns, in order ([`MAP_COLUMNS`]): `GALAXIES` (N), `WEIGHT` (Σw), `GAMMA1`, `GAMMA2`,
//! `NOISE_VAR` (σ² of each shear component), `DELTA` (density contrast) and `MASK` (footprint);
//! κ maps, when made, follow as `KAPPA_E`, `KAPPA_B`. Pixels outside the footprint hold UNSEEN
//! in the γ, σ², δ and κ columns and 0 in the others. A noise realisation's file holds
//! `GAMMA1`, `GAMMA2` and `MASK` (then its κ columns).

use super::binning::{CatalogueMaps, NoiseMaps};
use crate::error::Result;
use crate::io::fits_io::{write_maps, WriteOptions};
use crate::sky::skymap::SkyMap;
use std::path::Path;

/// The column names of a catalogue's map file, in order.
pub const MAP_COLUMNS: [&str; 7] = [
    "GALAXIES",
    "WEIGHT",
    "GAMMA1",
    "GAMMA2",
    "NOISE_VAR",
    "DELTA",
    "MASK",
];

/// Celestial coordinates (HEALPix FITS convention, `COORDSYS = 'C'`).
const CELESTIAL: &str = "C";

fn options() -> WriteOptions {
    WriteOptions {
        coordsys: Some(CELESTIAL.to_string()),
        ..WriteOptions::default()
    }
}

fn mask_map(maps_footprint: &crate::sky::footprint::Footprint) -> Result<SkyMap> {
    SkyMap::new(
        maps_footprint.pixelization(),
        maps_footprint.weights().to_vec(),
    )
}

/// Writes the maps of [`MAP_COLUMNS`], then `extra` columns (e.g. κ maps), to `path`.
pub fn write_catalogue_maps(
    path: &Path,
    maps: &CatalogueMaps,
    extra: &[(&str, &SkyMap)],
) -> Result<()> {
    let mask = mask_map(&maps.footprint)?;
    let mut columns: Vec<(&str, &SkyMap)> = vec![
        (MAP_COLUMNS[0], &maps.galaxies),
        (MAP_COLUMNS[1], &maps.weight),
        (MAP_COLUMNS[2], &maps.gamma1),
        (MAP_COLUMNS[3], &maps.gamma2),
        (MAP_COLUMNS[4], &maps.noise_variance),
        (MAP_COLUMNS[5], &maps.density_contrast),
        (MAP_COLUMNS[6], &mask),
    ];
    columns.extend_from_slice(extra);
    write_maps(path, &columns, &options())
}

/// Writes one noise realisation (`GAMMA1`, `GAMMA2`, `MASK`, then `extra` columns) to `path`.
pub fn write_noise_maps(
    path: &Path,
    noise: &NoiseMaps,
    maps: &CatalogueMaps,
    extra: &[(&str, &SkyMap)],
) -> Result<()> {
    let mask = mask_map(&maps.footprint)?;
    let mut columns: Vec<(&str, &SkyMap)> = vec![
        ("GAMMA1", &noise.gamma1),
        ("GAMMA2", &noise.gamma2),
        ("MASK", &mask),
    ];
    columns.extend_from_slice(extra);
    write_maps(path, &columns, &options())
}
