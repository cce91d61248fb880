//! A HEALPix map held only where it is read: values stored by blocks of
//! [`crate::sky::footprint::WEIGHT_BLOCK`] consecutive pixel indices, found through a table of one
//! entry per block (the scheme of a footprint's changed weights), so a measurement holds the
//! footprint and the tiles' halos instead of the whole sky (NSIDE 8192: 6.4 GB of f64 values).
//!
//! A stored value is the value an owned [`crate::sky::SkyMap`] of the same file holds, bit for
//! bit: NaN at an invalid pixel (UNSEEN, NaN or ±∞ in the file), the file's value elsewhere.
//! A pixel outside the stored blocks is invalid when the whole file was scanned
//! ([`OutsideBlocks::Invalid`]); when only some ranges were read ([`OutsideBlocks::NotRead`]) it
//! reads as invalid too, and the first such read is recorded ([`BlockSkyMap::first_unread`]) so
//! that a caller reading beyond what it loaded gets an error instead of a quiet difference.

use crate::sky::footprint::{BlockStore, WEIGHT_BLOCK};
use crate::sky::pixelization::Pixelization;
use crate::sky::skymap::is_bad_value;
use std::sync::atomic::{AtomicU64, Ordering as AtomicOrdering};

/// What a pixel outside the stored blocks is.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum OutsideBlocks {
    /// Invalid: every block holding a valid pixel is stored.
    Invalid,
    /// Not read from the file: reading it is recorded as an error of the caller.
    NotRead,
}

/// A map whose values are stored by blocks of 64 pixels (module documentation).
#[derive(Debug)]
pub struct BlockSkyMap {
    pixelization: Pixelization,
    store: BlockStore,
    outside: OutsideBlocks,
    /// The smallest pixel read outside the stored blocks while `outside` is `NotRead`
    /// (`u64::MAX`: none).
    unread: AtomicU64,
    /// Coordinate system from the FITS `COORDSYS` keyword (`G`, `E`, `C`), when known.
    pub coordsys: Option<String>,
}

impl BlockSkyMap {
    /// An empty map of `pixelization` (no block stored).
    pub fn new(pixelization: Pixelization, outside: OutsideBlocks) -> Self {
        BlockSkyMap {
            pixelization,
            store: BlockStore::default(),
            outside,
            unread: AtomicU64::new(u64::MAX),
            coordsys: None,
        }
    }

    /// The map's pixelization.
    pub fn pixelization(&self) -> Pixelization {
        self.pixelization
    }

    /// NSIDE.
    pub fn nside(&self) -> u32 {
        self.pixelization.nside()
    }

    /// What pixels outside the stored blocks are.
    pub fn outside(&self) -> OutsideBlocks {
        self.outside
    }

    /// Stores block `block` (pixels `block·64 ..`) from the file's `values` of those pixels (64,
    /// fewer in the last block): bad values (UNSEEN, NaN, ±∞) become NaN, as in
    /// [`crate::sky::SkyMap::new`]. A block already stored is left as it is.
    pub fn store_block(&mut self, block: usize, values: &[f64]) {
        let npix = self.pixelization.npix() as usize;
        let start = block * WEIGHT_BLOCK;
        if self.store.block(block).is_some() {
            return;
        }
        self.store.slot_mut(npix, start, |_, stored| {
            for (s, &v) in stored.iter_mut().zip(values) {
                *s = if is_bad_value(v) { f64::NAN } else { v };
            }
        });
    }

    /// Is block `block` stored?
    pub fn has_block(&self, block: usize) -> bool {
        self.store.block(block).is_some()
    }

    /// Number of stored values (whole blocks of 64).
    pub fn stored_values(&self) -> usize {
        self.store.stored()
    }

    /// Is pixel `i` valid (stored and not bad)? A pixel outside the stored blocks is not; when
    /// its block was not read, the read is recorded ([`Self::first_unread`]).
    #[inline]
    pub fn is_valid(&self, i: usize) -> bool {
        match self.store.get(i) {
            Some(v) => !v.is_nan(),
            None => {
                if self.outside == OutsideBlocks::NotRead {
                    self.unread.fetch_min(i as u64, AtomicOrdering::Relaxed);
                }
                false
            }
        }
    }

    /// The stored value of pixel `i` (NaN when invalid or outside the stored blocks).
    #[inline]
    pub fn value(&self, i: usize) -> f64 {
        self.store.get(i).copied().unwrap_or(f64::NAN)
    }

    /// Value of a valid pixel, `None` for an invalid one (as [`crate::sky::SkyMapOf::get`]).
    pub fn get(&self, pixel: u64) -> Option<f64> {
        let i = usize::try_from(pixel).ok()?;
        (i < self.pixelization.npix() as usize && self.is_valid(i)).then(|| self.value(i))
    }

    /// The stored blocks in increasing pixel order: (first pixel, values with NaN at invalid
    /// pixels; fewer than 64 in the last block of the sky).
    pub fn blocks(&self) -> impl Iterator<Item = (usize, &[f64])> + '_ {
        let npix = self.pixelization.npix() as usize;
        self.store.stored_blocks().map(move |(b, values)| {
            let start = b * WEIGHT_BLOCK;
            (start, &values[..WEIGHT_BLOCK.min(npix - start)])
        })
    }

    /// Number of valid pixels among the stored blocks (all valid pixels when pixels outside
    /// are invalid).
    pub fn stored_valid_count(&self) -> u64 {
        self.blocks()
            .map(|(_, v)| v.iter().filter(|x| !x.is_nan()).count() as u64)
            .sum()
    }

    /// The footprint to use with this map: `footprint` (same pixelization) with weight 0 at
    /// the map's invalid pixels, as [`crate::sky::FootprintOf::restricted_to`] gives for the
    /// whole map (the same weights and errors). The map must hold the footprint's weighted
    /// blocks ([`crate::sky::FootprintOf::weighted_blocks`]).
    pub fn restrict<'a>(
        &self,
        footprint: crate::sky::FootprintOf<'a>,
    ) -> crate::error::Result<crate::sky::FootprintOf<'a>> {
        footprint.check_map_nside(self.nside())?;
        let npix = self.pixelization.npix() as usize;
        let blocks: Vec<usize> = footprint.weighted_blocks().collect();
        let invalid = blocks
            .into_iter()
            .flat_map(|b| b * WEIGHT_BLOCK..(b * WEIGHT_BLOCK + WEIGHT_BLOCK).min(npix))
            .filter(|&p| !self.is_valid(p));
        footprint.without_invalid_pixels(invalid)
    }

    /// The map's valid pixels as a binary footprint held by blocks (as
    /// [`crate::sky::Footprint::of_valid_pixels`] of the whole map, bit for bit).
    pub fn valid_footprint(&self) -> crate::error::Result<crate::sky::Footprint> {
        let npix = self.pixelization.npix() as usize;
        let blocks = npix.div_ceil(WEIGHT_BLOCK);
        let per_chunk = 1024;
        let chunks = (0..blocks).step_by(per_chunk).map(|b0| {
            let end = (b0 + per_chunk).min(blocks);
            let mut w = Vec::with_capacity((end - b0) * WEIGHT_BLOCK);
            for b in b0..end {
                let start = b * WEIGHT_BLOCK;
                let n = WEIGHT_BLOCK.min(npix - start);
                match self.store.block(b) {
                    Some(v) => w.extend(v[..n].iter().map(|x| f64::from(u8::from(!x.is_nan())))),
                    None => w.extend(std::iter::repeat_n(0.0, n)),
                }
            }
            Ok(w)
        });
        crate::sky::Footprint::from_weight_chunks(self.pixelization, chunks)
    }

    /// Forgets the reads recorded outside the stored blocks (before a new measurement).
    pub fn forget_unread(&self) {
        self.unread.store(u64::MAX, AtomicOrdering::Relaxed);
    }

    /// The smallest pixel read outside the stored blocks although its block was not read
    /// from the file, if any.
    pub fn first_unread(&self) -> Option<u64> {
        let p = self.unread.load(AtomicOrdering::Relaxed);
        (p != u64::MAX).then_some(p)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::sky::pixelization::Ordering;
    use crate::sky::skymap::{SkyMap, UNSEEN};

    #[test]
    fn stored_blocks_read_as_the_owned_map_and_unread_pixels_are_recorded() {
        // A view must give the numbers of the copy it replaces (common practice).
        let pix = Pixelization::new(4, Ordering::Ring).unwrap();
        let values: Vec<f64> = (0..192)
            .map(|p| match p % 11 {
                3 => UNSEEN,
                5 => f64::NAN,
                _ => p as f64 * 0.25 - 3.0,
            })
            .collect();
        let owned = SkyMap::new(pix, values.clone()).unwrap();
        let mut blocks = BlockSkyMap::new(pix, OutsideBlocks::NotRead);
        blocks.store_block(2, &values[128..192]);
        blocks.store_block(0, &values[0..64]);
        assert_eq!(blocks.stored_values(), 128);
        for i in (0..64).chain(128..192) {
            assert_eq!(blocks.is_valid(i), owned.valid()[i], "pixel {i}");
            assert_eq!(blocks.get(i as u64), owned.get(i as u64), "pixel {i}");
        }
        assert_eq!(blocks.first_unread(), None);
        assert!(!blocks.is_valid(100) && !blocks.is_valid(70));
        assert_eq!(blocks.first_unread(), Some(70));
        let starts: Vec<usize> = blocks.blocks().map(|(s, _)| s).collect();
        assert_eq!(starts, [0, 128]);
        let n = owned.valid().len();
        let valid = owned
            .valid()
            .range(0..64)
            .chain(owned.valid().range(128..n));
        assert_eq!(
            blocks.stored_valid_count(),
            valid.filter(|&&v| v).count() as u64
        );
    }

    #[test]
    fn footprints_of_a_map_held_by_blocks_equal_those_of_the_whole_map() {
        // The valid-pixel footprint and a mask restricted to the map must be the whole map's,
        // bit for bit (a view gives the numbers of the copy it replaces; common practice).
        use crate::sky::footprint::Footprint;
        let pix = Pixelization::new(8, Ordering::Ring).unwrap();
        let n = pix.npix() as usize;
        let values: Vec<f64> = (0..n)
            .map(|p| {
                if p < 256 || p % 9 == 4 {
                    UNSEEN
                } else {
                    p as f64
                }
            })
            .collect();
        let owned = SkyMap::new(pix, values.clone()).unwrap();
        let mut blocks = BlockSkyMap::new(pix, OutsideBlocks::Invalid);
        for b in 4..n / 64 {
            blocks.store_block(b, &values[b * 64..(b + 1) * 64]);
        }
        let bits = |w: Vec<f64>| w.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
        let whole = Footprint::of_valid_pixels(&owned);
        let held = blocks.valid_footprint().unwrap();
        assert!(held.is_held_by_blocks());
        assert_eq!(
            bits(held.weights().to_vec()),
            bits(whole.weights().to_vec())
        );
        let weights: Vec<f64> = (0..n).map(|p| if p % 5 == 0 { 0.0 } else { 0.5 }).collect();
        let mask = Footprint::from_weights(pix, weights.clone()).unwrap();
        let chunks = weights.chunks(128).map(|c| Ok(c.to_vec()));
        let mask_blocks = Footprint::from_weight_chunks(pix, chunks).unwrap();
        let a = mask.restricted_to(&owned).unwrap();
        let b = blocks.restrict(mask_blocks).unwrap();
        assert_eq!(bits(a.weights().to_vec()), bits(b.weights().to_vec()));
        assert_eq!(a.f_sky().to_bits(), b.f_sky().to_bits());
    }
}
