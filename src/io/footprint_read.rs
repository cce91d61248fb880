//! Reading a measurement's inputs at the size of its footprint: a mask read by chunks into the
//! blocks of 64 pixels that hold a positive weight ([`read_footprint_by_blocks`]), and a map
//! read only on given blocks ([`read_map_blocks`]) or, without a mask, on the blocks holding a
//! valid pixel ([`read_valid_blocks`]). With the tiles' reach
//! ([`crate::tiles::reach::read_ranges`]) a measurement of a survey map holds about f_sky of
//! the sky instead of all of it, and gives the same numbers bit for bit
//! (`tests/sphere_partial_storage.rs`).
//!
//! Full-sky (`INDXSCHM = 'IMPLICIT'`) files only, RING or NESTED ([`reads_by_blocks`]);
//! partial-sky files are read whole.

use crate::error::{Error, Result};
use crate::io::fits_io::{ColumnChoice, Coverage, HealpixFitsReader, HealpixHeader};
use crate::sky::block_map::{BlockSkyMap, OutsideBlocks};
use crate::sky::footprint::{Footprint, WEIGHT_BLOCK};
use crate::sky::pixelization::Pixelization;
pub use crate::tiles::reach::blocks_of_ranges;

/// Pixels read from the file at a time: 2²⁰ (8 MiB of f64 values).
pub const CHUNK_PIXELS: u64 = 1 << 20;

/// Can the file of `header` be read by blocks (full sky, either ordering)?
pub fn reads_by_blocks(header: &HealpixHeader) -> bool {
    header.coverage == Coverage::FullSky
}

/// The pixelization of a file's header.
fn pixelization(header: &HealpixHeader) -> Result<Pixelization> {
    Pixelization::new(header.nside, header.ordering)
        .map_err(|e| Error::fits(&header.path, e.to_string()))
}

/// The values of one column by chunks of [`CHUNK_PIXELS`], from pixel 0.
fn chunks<'r>(
    reader: &'r mut HealpixFitsReader,
    column: &'r ColumnChoice,
) -> impl Iterator<Item = Result<Vec<f64>>> + 'r {
    let npix = 12 * (reader.header().nside as u64).pow(2);
    (0..npix.div_ceil(CHUNK_PIXELS)).map(move |k| {
        let start = k * CHUNK_PIXELS;
        reader.read_value_range(column, start, CHUNK_PIXELS.min(npix - start))
    })
}

/// One column of a full-sky file as a mask or weight map held by blocks: the same weights
/// and the same refusals as [`HealpixFitsReader::read_footprint`], holding only the blocks
/// with a weight other than 0 ([`Footprint::from_weight_chunks`]).
pub fn read_footprint_by_blocks(
    reader: &mut HealpixFitsReader,
    column: &ColumnChoice,
) -> Result<Footprint> {
    let path = reader.header().path.clone();
    let pix = pixelization(reader.header())?;
    Footprint::from_weight_chunks(pix, chunks(reader, column)).map_err(|e| match e {
        e @ (Error::Fits { .. } | Error::Io { .. }) => e,
        e => Error::fits(&path, e.to_string()),
    })
}

/// An empty map of the file's pixelization and coordinate system, for [`read_map_blocks`].
pub fn empty_map(header: &HealpixHeader) -> Result<BlockSkyMap> {
    let mut map = BlockSkyMap::new(pixelization(header)?, OutsideBlocks::NotRead);
    map.coordsys = header.coordsys.clone();
    Ok(map)
}

/// Stores in `map` the blocks `blocks` (increasing block indices; those already stored are
/// skipped) of one column, reading runs of consecutive blocks as ranges of the file.
pub fn read_map_blocks(
    reader: &mut HealpixFitsReader,
    column: &ColumnChoice,
    map: &mut BlockSkyMap,
    blocks: impl IntoIterator<Item = usize>,
) -> Result<()> {
    let npix = map.pixelization().npix();
    let max_run = (CHUNK_PIXELS as usize) / WEIGHT_BLOCK;
    let mut run: Option<(usize, usize)> = None;
    let mut flush = |run: (usize, usize), map: &mut BlockSkyMap| -> Result<()> {
        let start = (run.0 * WEIGHT_BLOCK) as u64;
        let end = ((run.1 * WEIGHT_BLOCK) as u64).min(npix);
        let values = reader.read_value_range(column, start, end - start)?;
        for (k, block) in values.chunks(WEIGHT_BLOCK).enumerate() {
            map.store_block(run.0 + k, block);
        }
        Ok(())
    };
    for b in blocks {
        if map.has_block(b) {
            continue;
        }
        run = match run {
            Some((a, e)) if e == b && e - a < max_run => Some((a, b + 1)),
            Some(r) => {
                flush(r, map)?;
                Some((b, b + 1))
            }
            None => Some((b, b + 1)),
        };
    }
    if let Some(r) = run {
        flush(r, map)?;
    }
    Ok(())
}

/// One column of a full-sky file held on the blocks that hold a valid pixel (a pixel outside
/// them is invalid), read by chunks.
pub fn read_valid_blocks(
    reader: &mut HealpixFitsReader,
    column: &ColumnChoice,
) -> Result<BlockSkyMap> {
    let mut map = BlockSkyMap::new(pixelization(reader.header())?, OutsideBlocks::Invalid);
    map.coordsys = reader.header().coordsys.clone();
    let mut at = 0usize;
    for chunk in chunks(reader, column) {
        let chunk = chunk?;
        for (k, block) in chunk.chunks(WEIGHT_BLOCK).enumerate() {
            if block.iter().any(|&v| !crate::sky::skymap::is_bad_value(v)) {
                map.store_block(at / WEIGHT_BLOCK + k, block);
            }
        }
        at += chunk.len();
    }
    Ok(map)
}

/// Does one column of a full-sky file hold a valid pixel (not UNSEEN, NaN, ±∞ or BAD_DATA)?
pub fn holds_a_valid_pixel(reader: &mut HealpixFitsReader, column: &ColumnChoice) -> Result<bool> {
    for chunk in chunks(reader, column) {
        if chunk?.iter().any(|&v| !crate::sky::skymap::is_bad_value(v)) {
            return Ok(true);
        }
    }
    Ok(false)
}
