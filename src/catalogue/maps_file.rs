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

/// Writes `columns`, the footprint's weights as `MASK`, then `extra` columns to `path`.
fn write_with_mask(
    path: &Path,
    columns: &[(&str, &SkyMap)],
    maps: &CatalogueMaps,
    extra: &[(&str, &SkyMap)],
) -> Result<()> {
    let mask = SkyMap::new(
        maps.footprint.pixelization(),
        maps.footprint.weights().to_vec(),
    )?;
    let mut all = columns.to_vec();
    all.push((MAP_COLUMNS[6], &mask));
    all.extend_from_slice(extra);
    let options = WriteOptions {
        coordsys: Some(CELESTIAL.to_string()),
        ..WriteOptions::default()
    };
    write_maps(path, &all, &options)
}

/// Writes the maps of [`MAP_COLUMNS`], then `extra` columns (e.g. κ maps), to `path`.
pub fn write_catalogue_maps(
    path: &Path,
    maps: &CatalogueMaps,
    extra: &[(&str, &SkyMap)],
) -> Result<()> {
    let columns = [
        (MAP_COLUMNS[0], &maps.galaxies),
        (MAP_COLUMNS[1], &maps.weight),
        (MAP_COLUMNS[2], &maps.gamma1),
        (MAP_COLUMNS[3], &maps.gamma2),
        (MAP_COLUMNS[4], &maps.noise_variance),
        (MAP_COLUMNS[5], &maps.density_contrast),
    ];
    write_with_mask(path, &columns, maps, extra)
}

/// Writes one noise realisation (`GAMMA1`, `GAMMA2`, `MASK`, then `extra` columns) to `path`.
pub fn write_noise_maps(
    path: &Path,
    noise: &NoiseMaps,
    maps: &CatalogueMaps,
    extra: &[(&str, &SkyMap)],
) -> Result<()> {
    write_with_mask(
        path,
        &[("GAMMA1", &noise.gamma1), ("GAMMA2", &noise.gamma2)],
        maps,
        extra,
    )
}
