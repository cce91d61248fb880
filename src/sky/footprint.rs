//! Survey footprints: binary masks or fractional weight maps with values in [0, 1].
//!
//! A pixel belongs to the footprint when its weight is positive. The footprint area is
//! Σ w_p · Ω_pix and f_sky = Σ w_p / Npix (HEALPix pixels are equal-area, Górski et al. 2005).
//!
//! A footprint owns its weights ([`Footprint`]) or reads its caller's weights in place
//! ([`FootprintOf::borrowing`]) and keeps, beside them, only the weights it changes (bad values
//! set to 0, the taper near the mask's edges, the map's bad pixels): stored by blocks of
//! [`WEIGHT_BLOCK`] consecutive pixel indices, found through a table of one entry per block, so
//! a read costs one table look-up. Every read ([`FootprintOf::weights`]) gives the values an
//! owned copy would hold, bit for bit.

use crate::error::{Error, Result};
use crate::sky::pixelization::{Direction, Ordering, Pixelization};
use crate::sky::skymap::{is_bad_value, SkyMap, SkyMapOf};
use rayon::prelude::*;
use std::borrow::Cow;

/// Pixels per stored block of changed weights (consecutive pixel indices).
pub const WEIGHT_BLOCK: usize = 1 << BLOCK_BITS;
const BLOCK_BITS: u32 = 6;
const NO_BLOCK: u32 = u32::MAX;
/// The slot of a block whose values are all 1 (held without storage: the inside of a mask).
const ONES_BLOCK: u32 = u32::MAX - 1;
static ONES: [f64; WEIGHT_BLOCK] = [1.0; WEIGHT_BLOCK];

/// Values stored by blocks of [`WEIGHT_BLOCK`] consecutive pixel indices over a full sky of
/// `len` pixels; the other pixels read from elsewhere (the caller's weights, or a fill value).
#[derive(Debug, Clone, Default)]
pub(crate) struct BlockStore {
    /// Per block: the position of its values in `values` (in blocks), `ONES_BLOCK` for a
    /// block of ones, or `NO_BLOCK`; empty while no block is stored.
    slot: Vec<u32>,
    values: Vec<f64>,
}

impl BlockStore {
    /// The stored value of pixel `i`, if its block is stored.
    #[inline]
    pub(crate) fn get(&self, i: usize) -> Option<&f64> {
        match self.slot.get(i >> BLOCK_BITS) {
            Some(&s) if s < ONES_BLOCK => {
                Some(&self.values[((s as usize) << BLOCK_BITS) | (i & (WEIGHT_BLOCK - 1))])
            }
            Some(&ONES_BLOCK) => Some(&ONES[0]),
            _ => None,
        }
    }

    /// The stored values of block `b`, if stored.
    pub(crate) fn block(&self, b: usize) -> Option<&[f64]> {
        match self.slot.get(b) {
            Some(&s) if s < ONES_BLOCK => {
                let start = (s as usize) << BLOCK_BITS;
                Some(&self.values[start..start + WEIGHT_BLOCK])
            }
            Some(&ONES_BLOCK) => Some(&ONES),
            _ => None,
        }
    }

    /// The value slot of pixel `i` of a sky of `len` pixels, storing its block first (filled
    /// by `fill` with the values of pixels `start..start + n`) when it is not stored yet.
    pub(crate) fn slot_mut(
        &mut self,
        len: usize,
        i: usize,
        fill: impl FnOnce(usize, &mut [f64]),
    ) -> &mut f64 {
        let b = i >> BLOCK_BITS;
        if self.slot.is_empty() {
            self.slot = vec![NO_BLOCK; len.div_ceil(WEIGHT_BLOCK)];
        }
        if self.slot[b] >= ONES_BLOCK {
            let ones = self.slot[b] == ONES_BLOCK;
            let stored = self.values.len() / WEIGHT_BLOCK;
            // fewer than 2³² − 2 blocks: a sky of 2³⁸ pixels would take 2 TB of weights
            self.slot[b] = stored as u32;
            let start = b << BLOCK_BITS;
            let n = WEIGHT_BLOCK.min(len - start);
            let at = self.values.len();
            self.values
                .resize(at + WEIGHT_BLOCK, if ones { 1.0 } else { 0.0 });
            if !ones {
                fill(start, &mut self.values[at..at + n]);
            }
        }
        let s = self.slot[b] as usize;
        &mut self.values[(s << BLOCK_BITS) | (i & (WEIGHT_BLOCK - 1))]
    }

    /// Holds block `b` of a sky of `len` pixels as all ones, without storage, when it is not
    /// held yet.
    pub(crate) fn hold_ones(&mut self, len: usize, b: usize) {
        if self.slot.is_empty() {
            self.slot = vec![NO_BLOCK; len.div_ceil(WEIGHT_BLOCK)];
        }
        if self.slot[b] == NO_BLOCK {
            self.slot[b] = ONES_BLOCK;
        }
    }

    /// Number of stored values (whole blocks; blocks of ones are held without storage).
    pub(crate) fn stored(&self) -> usize {
        self.values.len()
    }

    /// The stored blocks in increasing block order: (block index, its 64 values).
    pub(crate) fn stored_blocks(&self) -> impl Iterator<Item = (usize, &[f64])> + '_ {
        self.slot.iter().enumerate().filter_map(|(b, &s)| match s {
            NO_BLOCK => None,
            ONES_BLOCK => Some((b, &ONES[..])),
            _ => {
                let start = (s as usize) << BLOCK_BITS;
                Some((b, &self.values[start..start + WEIGHT_BLOCK]))
            }
        })
    }
}

/// Per pixel, the smallest value recorded there, over a fill value for pixels never recorded;
/// stored by blocks near the recorded pixels only.
pub(crate) struct SparseMinimum {
    len: usize,
    fill: f64,
    store: BlockStore,
}

impl SparseMinimum {
    /// Every pixel of a sky of `len` pixels at `fill`.
    pub(crate) fn new(len: usize, fill: f64) -> Self {
        SparseMinimum {
            len,
            fill,
            store: BlockStore::default(),
        }
    }

    /// Lowers pixel `i` to `value` when that is smaller.
    pub(crate) fn record(&mut self, i: usize, value: f64) {
        let fill = self.fill;
        let slot = self
            .store
            .slot_mut(self.len, i, |_, block| block.fill(fill));
        if value < *slot {
            *slot = value;
        }
    }

    /// The value of pixel `i`.
    pub(crate) fn get(&self, i: usize) -> f64 {
        self.store.get(i).copied().unwrap_or(self.fill)
    }

    /// Is pixel `i` in a stored block (a pixel outside every stored block holds the fill)?
    pub(crate) fn is_stored(&self, i: usize) -> bool {
        self.store.get(i).is_some()
    }
}

/// A read-only view of a footprint's weights, pixel by pixel in the footprint's ordering: the
/// caller's weights where the footprint keeps them (a bad value, UNSEEN or NaN, read as 0),
/// its own stored values elsewhere.
#[derive(Clone, Copy)]
pub struct Weights<'w> {
    /// The caller's or the footprint's own weights; empty for a footprint held by blocks
    /// ([`FootprintOf::from_weight_chunks`]), whose pixels outside `changed` weigh 0.
    base: &'w [f64],
    /// Number of pixels.
    len: usize,
    changed: &'w BlockStore,
    /// `base` holds no bad value (the footprint's own weights).
    clean: bool,
}

/// The weight 0 a bad value reads as.
static ZERO: f64 = 0.0;

/// The weights of a block not stored by a footprint held by blocks.
static ZEROS: [f64; WEIGHT_BLOCK] = [0.0; WEIGHT_BLOCK];

/// `w` as a weight: a bad value (NaN, or UNSEEN, the only negative values a checked mask
/// holds) is 0.
#[inline]
fn as_weight(w: &f64) -> &f64 {
    if *w >= 0.0 {
        w
    } else {
        &ZERO
    }
}

impl<'w> Weights<'w> {
    /// The weight of pixel `i` (panics beyond the last pixel, as a slice does).
    #[inline]
    pub fn get(&self, i: usize) -> f64 {
        match self.changed.get(i) {
            Some(&w) => w,
            // held by blocks: a pixel outside them weighs 0
            None if self.base.is_empty() => 0.0,
            None => {
                let w = self.base[i];
                if self.clean || w >= 0.0 {
                    w
                } else {
                    0.0
                }
            }
        }
    }

    #[inline]
    fn at(&self, i: usize) -> &'w f64 {
        match self.changed.get(i) {
            Some(w) => w,
            None if self.base.is_empty() => &ZERO,
            None if self.clean => &self.base[i],
            None => as_weight(&self.base[i]),
        }
    }

    /// Number of pixels.
    pub fn len(&self) -> usize {
        self.len
    }

    /// No pixel at all?
    pub fn is_empty(&self) -> bool {
        self.len == 0
    }

    /// The weights as one slice, when the footprint holds them so (its own weights, or the
    /// caller's without a bad value and with no value changed).
    pub fn as_slice(&self) -> Option<&'w [f64]> {
        (self.clean && self.changed.slot.is_empty() && self.base.len() == self.len)
            .then_some(self.base)
    }

    /// The weights in pixel order.
    pub fn iter(&self) -> WeightsIter<'w> {
        WeightsIter {
            weights: *self,
            next_block: 0,
            current: [].iter(),
        }
    }

    /// A copy of the weights as one vector.
    pub fn to_vec(&self) -> Vec<f64> {
        match self.as_slice() {
            Some(s) => s.to_vec(),
            None => self.iter().copied().collect(),
        }
    }

    /// The weights of block `b` (pixels `b·WEIGHT_BLOCK ..`, fewer in the last block).
    fn block(&self, b: usize) -> &'w [f64] {
        let start = b << BLOCK_BITS;
        let end = (start + WEIGHT_BLOCK).min(self.len);
        match self.changed.block(b) {
            Some(stored) => &stored[..end - start],
            None if self.base.is_empty() => &ZEROS[..end - start],
            None => &self.base[start..end],
        }
    }
}

impl std::ops::Index<usize> for Weights<'_> {
    type Output = f64;
    #[inline]
    fn index(&self, i: usize) -> &f64 {
        self.at(i)
    }
}

impl std::fmt::Debug for Weights<'_> {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_list().entries(self.iter()).finish()
    }
}

impl PartialEq for Weights<'_> {
    fn eq(&self, other: &Self) -> bool {
        self.len() == other.len() && self.iter().eq(other.iter())
    }
}

impl PartialEq<&[f64]> for Weights<'_> {
    fn eq(&self, other: &&[f64]) -> bool {
        self.len() == other.len() && self.iter().eq(other.iter())
    }
}

/// The weights of a [`Weights`] view in pixel order.
#[derive(Clone)]
pub struct WeightsIter<'w> {
    weights: Weights<'w>,
    next_block: usize,
    current: std::slice::Iter<'w, f64>,
}

impl<'w> WeightsIter<'w> {
    /// The next weight once the current run is used up: the next block (or, when the
    /// weights are one slice, that slice once).
    #[inline(never)]
    fn next_run(&mut self) -> Option<&'w f64> {
        loop {
            let w = self.weights;
            if let Some(all) = w.as_slice() {
                if self.next_block > 0 {
                    return None;
                }
                self.next_block = 1;
                self.current = all.iter();
            } else {
                if self.next_block << BLOCK_BITS >= w.len() {
                    return None;
                }
                self.current = w.block(self.next_block).iter();
                self.next_block += 1;
            }
            if let Some(x) = self.current.next() {
                return Some(if w.clean { x } else { as_weight(x) });
            }
        }
    }
}

impl<'w> Iterator for WeightsIter<'w> {
    type Item = &'w f64;
    #[inline]
    fn next(&mut self) -> Option<&'w f64> {
        match self.current.next() {
            Some(w) if self.weights.clean => Some(w),
            Some(w) => Some(as_weight(w)),
            None => self.next_run(),
        }
    }

    fn size_hint(&self) -> (usize, Option<usize>) {
        let w = self.weights;
        let rest = if w.as_slice().is_some() {
            if self.next_block > 0 {
                0
            } else {
                w.len()
            }
        } else {
            w.len().saturating_sub(self.next_block << BLOCK_BITS)
        };
        let n = rest + self.current.len();
        (n, Some(n))
    }
}

impl ExactSizeIterator for WeightsIter<'_> {}

impl<'w> IntoIterator for Weights<'w> {
    type Item = &'w f64;
    type IntoIter = WeightsIter<'w>;
    fn into_iter(self) -> WeightsIter<'w> {
        self.iter()
    }
}

/// A mask or weight map on a HEALPix pixelization that owns its weights.
pub type Footprint = FootprintOf<'static>;

/// A mask or weight map on a HEALPix pixelization, owning its weights or reading them in place
/// from the caller for `'a` (see the module documentation); [`Footprint`] is the owned kind.
#[derive(Debug, Clone)]
pub struct FootprintOf<'a> {
    pixelization: Pixelization,
    base: Cow<'a, [f64]>,
    /// Weights that differ from `base` (only when `base` is borrowed: owned weights are
    /// changed in place).
    changed: BlockStore,
    /// `base` holds no bad value (UNSEEN, NaN): always so for owned weights.
    clean: bool,
}

/// Area figures of a footprint.
#[derive(Debug, Clone, serde::Serialize)]
pub struct FootprintSummary {
    pub nside: u32,
    pub observed_pixels: u64,
    pub binary: bool,
    pub area_sr: f64,
    pub area_deg2: f64,
    pub f_sky: f64,
}

/// Refuses weights that are not a mask: ±inf is an error naming how many pixels hold it,
/// anything else outside [0, 1] but a bad value (UNSEEN, NaN) an error naming the first
/// offending pixel.
fn check_weights(weights: &[f64]) -> Result<()> {
    for sign in [1.0, -1.0] {
        let infinite = sign * f64::INFINITY;
        let mut hits = weights.iter().enumerate().filter(|(_, &w)| w == infinite);
        if let Some((first, _)) = hits.next() {
            let count = 1 + hits.count();
            return Err(infinite_weights(infinite, count, first));
        }
    }
    for (p, &w) in weights.iter().enumerate() {
        if !is_bad_value(w) && !(0.0..=1.0).contains(&w) {
            return Err(out_of_range(p, w));
        }
    }
    Ok(())
}

/// The refusal of a mask holding `infinite` in `count` pixels, the first `first`.
fn infinite_weights(infinite: f64, count: usize, first: usize) -> Error {
    let pixels = if count == 1 { "pixel" } else { "pixels" };
    Error::Data(format!(
        "the mask holds {infinite:+} in {count} {pixels} (first: pixel {first}): \
         weights must lie in [0, 1], with 0, UNSEEN or NaN for unobserved pixels"
    ))
}

fn out_of_range(p: usize, w: f64) -> Error {
    Error::Data(format!(
        "mask pixel {p} has weight {}, outside [0, 1]",
        crate::error::compact(w)
    ))
}

fn check_length(pixelization: Pixelization, len: usize) -> Result<()> {
    if len as u64 != pixelization.npix() {
        return Err(Error::Mismatch(format!(
            "a mask at NSIDE {} needs {} pixels but {} values were given",
            pixelization.nside(),
            pixelization.npix(),
            len
        )));
    }
    Ok(())
}

impl Footprint {
    /// A footprint from weights in [0, 1]; bad values (UNSEEN, NaN) count as 0, ±inf is an
    /// error naming how many pixels hold it, anything else outside [0, 1] is an error naming
    /// the first offending pixel.
    pub fn from_weights(pixelization: Pixelization, mut weights: Vec<f64>) -> Result<Self> {
        check_length(pixelization, weights.len())?;
        check_weights(&weights)?;
        for w in weights.iter_mut() {
            if is_bad_value(*w) {
                *w = 0.0;
            }
        }
        Ok(FootprintOf::owning(pixelization, weights))
    }

    /// The binary footprint `inside(centre of pixel)`.
    pub fn from_fn(pixelization: Pixelization, inside: impl Fn(Direction) -> bool + Sync) -> Self {
        let weights = (0..pixelization.npix())
            .into_par_iter()
            .map(|p| f64::from(u8::from(inside(pixelization.center(p)))))
            .collect();
        FootprintOf::owning(pixelization, weights)
    }

    /// The whole sky, weight 1 everywhere.
    pub fn full_sky(pixelization: Pixelization) -> Self {
        FootprintOf::owning(pixelization, vec![1.0; pixelization.npix() as usize])
    }

    /// The valid pixels of a map as a binary footprint.
    pub fn of_valid_pixels(map: &SkyMapOf<'_>) -> Self {
        FootprintOf::owning(
            map.pixelization(),
            map.valid()
                .iter()
                .map(|&v| f64::from(u8::from(v)))
                .collect(),
        )
    }

    fn owning(pixelization: Pixelization, weights: Vec<f64>) -> Self {
        FootprintOf {
            pixelization,
            base: Cow::Owned(weights),
            changed: BlockStore::default(),
            clean: true,
        }
    }

    /// A footprint from its weights given chunk by chunk, in pixel order from pixel 0, each
    /// chunk a whole number of [`WEIGHT_BLOCK`] pixels but the last, held by blocks: only the
    /// blocks holding a weight other than +0 are held, and those of ones (the inside of a
    /// binary mask) without storage, so a binary mask takes little more than its edges. The same checks, in the same order, and the same weights bit for bit as
    /// [`Footprint::from_weights`] of the whole array; an error of a chunk is returned as it is.
    pub fn from_weight_chunks<I>(pixelization: Pixelization, chunks: I) -> Result<Self>
    where
        I: IntoIterator<Item = Result<Vec<f64>>>,
    {
        let npix = pixelization.npix() as usize;
        let mut fp = FootprintOf {
            pixelization,
            base: Cow::Owned(Vec::new()),
            changed: BlockStore::default(),
            clean: true,
        };
        let mut at = 0usize;
        // (first pixel, count) of +inf and of −inf; the first weight outside [0, 1]
        let mut infinite = [(0usize, 0u64); 2];
        let mut outside: Option<(usize, f64)> = None;
        for chunk in chunks {
            let chunk = chunk?;
            if !at.is_multiple_of(WEIGHT_BLOCK) || at + chunk.len() > npix {
                return Err(check_length(pixelization, at + chunk.len())
                    .err()
                    .unwrap_or_else(|| {
                        Error::Mismatch("mask chunks not aligned to blocks of pixels".into())
                    }));
            }
            for (k, &w) in chunk.iter().enumerate() {
                let sign = if w == f64::INFINITY {
                    0
                } else if w == f64::NEG_INFINITY {
                    1
                } else {
                    if outside.is_none() && !is_bad_value(w) && !(0.0..=1.0).contains(&w) {
                        outside = Some((at + k, w));
                    }
                    continue;
                };
                if infinite[sign].1 == 0 {
                    infinite[sign].0 = at + k;
                }
                infinite[sign].1 += 1;
            }
            for (j, block) in chunk.chunks(WEIGHT_BLOCK).enumerate() {
                if block.iter().all(|&w| w.to_bits() == 1f64.to_bits()) {
                    // the inside of a mask, held without storage
                    fp.changed
                        .hold_ones(npix, (at + j * WEIGHT_BLOCK) / WEIGHT_BLOCK);
                } else if block.iter().any(|&w| !is_bad_value(w) && w.to_bits() != 0) {
                    fp.changed
                        .slot_mut(npix, at + j * WEIGHT_BLOCK, |_, stored| {
                            for (s, &w) in stored.iter_mut().zip(block) {
                                *s = if is_bad_value(w) { 0.0 } else { w };
                            }
                        });
                }
            }
            at += chunk.len();
        }
        check_length(pixelization, at)?;
        for (sign, (first, count)) in infinite.into_iter().enumerate() {
            if count > 0 {
                let infinite = if sign == 0 {
                    f64::INFINITY
                } else {
                    f64::NEG_INFINITY
                };
                return Err(infinite_weights(infinite, count as usize, first));
            }
        }
        if let Some((p, w)) = outside {
            return Err(out_of_range(p, w));
        }
        Ok(fp)
    }
}

impl<'a> FootprintOf<'a> {
    /// A footprint reading the caller's `weights` (in the pixelization's ordering) in place:
    /// the same checks and the same weights as [`Footprint::from_weights`] of a copy (bad
    /// values, UNSEEN or NaN, read as 0). The weights it changes later (restricted to a map,
    /// tapered) are stored beside the caller's, by blocks; when those would cover more than
    /// half the sky it holds one copy of its weights instead.
    pub fn borrowing(pixelization: Pixelization, weights: &'a [f64]) -> Result<Self> {
        check_length(pixelization, weights.len())?;
        check_weights(weights)?;
        Ok(FootprintOf {
            pixelization,
            base: Cow::Borrowed(weights),
            changed: BlockStore::default(),
            clean: !weights.iter().any(|&w| is_bad_value(w)),
        })
    }

    /// Does the footprint read its caller's weights in place (made by [`Self::borrowing`])?
    pub fn is_borrowed(&self) -> bool {
        matches!(self.base, Cow::Borrowed(_))
    }

    /// Number of weights the footprint holds itself: all pixels when it owns its weights, the
    /// pixels of the stored blocks of changed weights when it reads its caller's.
    pub fn stored_weights(&self) -> usize {
        match &self.base {
            Cow::Owned(w) if !w.is_empty() => w.len(),
            _ => self.changed.stored(),
        }
    }

    /// Is the footprint held by blocks ([`Footprint::from_weight_chunks`]): its weights stored
    /// only by blocks holding a positive weight, 0 elsewhere?
    pub fn is_held_by_blocks(&self) -> bool {
        self.base.is_empty()
    }

    /// The indices of the blocks of [`WEIGHT_BLOCK`] pixels that may hold a positive weight,
    /// in increasing order: the stored blocks of a footprint held by blocks, every block
    /// otherwise.
    pub fn weighted_blocks(&self) -> Box<dyn Iterator<Item = usize> + '_> {
        if self.is_held_by_blocks() {
            Box::new(self.changed.stored_blocks().map(|(b, _)| b))
        } else {
            Box::new(0..self.len().div_ceil(WEIGHT_BLOCK))
        }
    }

    /// Number of pixels.
    fn len(&self) -> usize {
        self.pixelization.npix() as usize
    }

    /// The weights, giving up the footprint (no copy when it owns them unchanged).
    pub fn into_weights(self) -> Vec<f64> {
        if self.weights().as_slice().is_some() {
            self.base.into_owned()
        } else {
            self.weights().to_vec()
        }
    }

    /// Sets the weight of pixel `p`: in place when the footprint owns its weights, else in the
    /// stored block of `p` (stored when the value differs from what the pixel holds).
    fn set(&mut self, p: usize, value: f64) {
        let len = self.len();
        match &mut self.base {
            Cow::Owned(w) if w.is_empty() => {
                if self.changed.get(p).is_none() && value.to_bits() == 0 {
                    return;
                }
                *self.changed.slot_mut(len, p, |_, block| block.fill(0.0)) = value;
            }
            Cow::Owned(w) => w[p] = value,
            Cow::Borrowed(base) => {
                let base: &[f64] = base;
                if self.changed.get(p).is_none() && as_weight(&base[p]).to_bits() == value.to_bits()
                {
                    return;
                }
                let slot = self.changed.slot_mut(base.len(), p, |start, block| {
                    for (w, b) in block.iter_mut().zip(&base[start..]) {
                        *w = *as_weight(b);
                    }
                });
                *slot = value;
            }
        }
    }

    /// This footprint, holding one copy of its weights instead when its stored blocks cover
    /// more than half the sky (the blocks and their table would then outweigh the copy).
    fn settled(self) -> Self {
        if self.is_borrowed() && 2 * self.changed.stored() > self.base.len() {
            let weights = self.weights().to_vec();
            return Footprint::owning(self.pixelization, weights);
        }
        self
    }

    /// The footprint's pixelization.
    pub fn pixelization(&self) -> Pixelization {
        self.pixelization
    }

    /// Weights in the footprint's ordering.
    pub fn weights(&self) -> Weights<'_> {
        Weights {
            base: &self.base,
            len: self.len(),
            changed: &self.changed,
            clean: self.clean,
        }
    }

    /// Weight of `pixel` (0 outside the index range).
    pub fn weight(&self, pixel: u64) -> f64 {
        match usize::try_from(pixel) {
            Ok(i) if i < self.len() => self.weights().get(i),
            _ => 0.0,
        }
    }

    /// Number of pixels with positive weight.
    pub fn observed_pixels(&self) -> u64 {
        self.weights().iter().filter(|&&w| w > 0.0).count() as u64
    }

    /// Are all weights 0 or 1?
    pub fn is_binary(&self) -> bool {
        self.weights().iter().all(|&w| w == 0.0 || w == 1.0)
    }

    /// Σ w_p · Ω_pix in steradians.
    pub fn area_sr(&self) -> f64 {
        self.weights().iter().sum::<f64>() * self.pixelization.pixel_area()
    }

    /// Σ w_p / Npix.
    pub fn f_sky(&self) -> f64 {
        self.weights().iter().sum::<f64>() / self.pixelization.npix() as f64
    }

    /// Area figures.
    pub fn summary(&self) -> FootprintSummary {
        let area = self.area_sr();
        FootprintSummary {
            nside: self.pixelization.nside(),
            observed_pixels: self.observed_pixels(),
            binary: self.is_binary(),
            area_sr: area,
            area_deg2: area * (180.0 / std::f64::consts::PI).powi(2),
            f_sky: self.f_sky(),
        }
    }

    /// The same footprint in another ordering (a copy of the weights when the ordering
    /// changes; a footprint reading its caller's weights stays so in its own ordering).
    pub fn to_ordering(&self, ordering: Ordering) -> Result<FootprintOf<'a>> {
        // one copy of the weights, never more (NSIDE 1024: 100 MB each)
        if self.pixelization.ordering() == ordering {
            return Ok(self.clone());
        }
        let as_map = SkyMap::new(self.pixelization, self.weights().to_vec())?;
        let moved = as_map.to_ordering(ordering)?;
        Ok(Footprint::owning(moved.pixelization(), moved.into_values()))
    }

    /// The common footprint of two masks: the smaller of the two weights per pixel (for binary
    /// masks, pixels observed in both), in this footprint's ordering. Errors when the NSIDEs
    /// differ or the two footprints share no pixel.
    pub fn intersection(&self, other: &FootprintOf<'_>) -> Result<FootprintOf<'a>> {
        if self.pixelization.nside() != other.pixelization.nside() {
            return Err(Error::Mismatch(format!(
                "footprints of NSIDE {} and {} cannot be intersected",
                self.pixelization.nside(),
                other.pixelization.nside()
            )));
        }
        let moved;
        let other = if other.pixelization.ordering() == self.pixelization.ordering() {
            other
        } else {
            moved = other.to_ordering(self.pixelization.ordering())?;
            &moved
        };
        let fp = if self.is_borrowed() || self.is_held_by_blocks() {
            // this footprint's weights in place (or its blocks), the pixels where the other's
            // are smaller stored beside them
            let mut fp = self.clone();
            let (mine, theirs) = (self.weights(), other.weights());
            for (p, (a, b)) in mine.iter().zip(theirs.iter()).enumerate() {
                let m = a.min(*b);
                if m.to_bits() != a.to_bits() {
                    fp.set(p, m);
                }
            }
            fp.settled()
        } else {
            let weights: Vec<f64> = self
                .weights()
                .iter()
                .zip(other.weights().iter())
                .map(|(a, b)| a.min(*b))
                .collect();
            Footprint::owning(self.pixelization, weights)
        };
        if fp.observed_pixels() == 0 {
            return Err(Error::Data(
                "the two footprints do not overlap: no pixel is observed in both".into(),
            ));
        }
        Ok(fp)
    }

    /// The footprint to use with `map`: this mask brought to the map's ordering, with the map's
    /// invalid pixels removed. Errors when the NSIDEs differ or nothing of the footprint is left.
    pub fn restricted_to(&self, map: &SkyMapOf<'_>) -> Result<FootprintOf<'a>> {
        self.check_map_nside(map.nside())?;
        self.to_ordering(map.ordering())?.without_bad_pixels_of(map)
    }

    /// As [`Self::restricted_to`], giving up this footprint: in the map's ordering its weights
    /// are changed in place (no second full-sky array).
    pub fn into_restricted_to(self, map: &SkyMapOf<'_>) -> Result<FootprintOf<'a>> {
        self.check_map_nside(map.nside())?;
        let fp = if self.pixelization.ordering() == map.ordering() {
            self
        } else {
            self.to_ordering(map.ordering())?
        };
        fp.without_bad_pixels_of(map)
    }

    /// Refuses a map of another NSIDE than the footprint's.
    pub fn check_map_nside(&self, map_nside: u32) -> Result<()> {
        if self.pixelization.nside() != map_nside {
            return Err(Error::Mismatch(format!(
                "mask NSIDE {} does not match map NSIDE {map_nside}",
                self.pixelization.nside(),
            )));
        }
        Ok(())
    }

    /// This footprint (in `map`'s ordering) with weight 0 at the map's invalid pixels; errors
    /// when nothing is left, saying whether the mask was empty or lies on bad pixels only.
    fn without_bad_pixels_of(self, map: &SkyMapOf<'_>) -> Result<FootprintOf<'a>> {
        let valid = map.valid();
        self.without_invalid_pixels((0..valid.len()).filter(|&p| !valid[p]))
    }

    /// This footprint with weight 0 at the `invalid` pixels (a map's bad pixels, in increasing
    /// order; those of weight 0 may be left out); errors when nothing is left, saying whether
    /// the mask was empty or lies on bad pixels only.
    pub(crate) fn without_invalid_pixels(
        mut self,
        invalid: impl Iterator<Item = usize>,
    ) -> Result<FootprintOf<'a>> {
        let mut lost = 0u64;
        for p in invalid {
            if self.weights().get(p) > 0.0 {
                self.set(p, 0.0);
                lost += 1;
            }
        }
        let fp = self.settled();
        if fp.observed_pixels() == 0 {
            // nothing observed is left, so the mask's observed pixels were the `lost` ones
            let reason = if lost == 0 {
                "the mask is empty (no pixel has positive weight)".to_string()
            } else {
                format!(
                    "the mask's footprint does not overlap the map's valid pixels ({lost} footprint pixels are bad in the map)"
                )
            };
            return Err(Error::Data(reason));
        }
        Ok(fp)
    }

    /// The footprint with the weight of every pixel `p` replaced by `new(p, w_p)` (pixels in
    /// increasing order): in place when it owns its weights, else stored beside the caller's
    /// where the value changes. A bad result (NaN) weighs 0; a result outside [0, 1] is an
    /// error naming the pixel, as [`Footprint::from_weights`] gives.
    pub(crate) fn reweighted(mut self, mut new: impl FnMut(usize, f64) -> f64) -> Result<Self> {
        for p in 0..self.len() {
            let w = self.weights().get(p);
            let mut v = new(p, w);
            if is_bad_value(v) {
                v = 0.0;
            } else if !(0.0..=1.0).contains(&v) {
                return Err(out_of_range(p, v));
            }
            if v.to_bits() != w.to_bits() {
                self.set(p, v);
            }
        }
        Ok(self.settled())
    }
}

/// Refuses a mask with a single observed pixel: one value has no fluctuations to measure
/// (the statistics of one pixel are 0/0).
pub fn refuse_single_pixel_mask(mask: &FootprintOf<'_>) -> Result<()> {
    if mask.observed_pixels() == 1 {
        let pixel = mask.weights().iter().position(|&w| w > 0.0).unwrap_or(0);
        return Err(Error::Data(format!(
            "the mask has only one observed pixel (pixel {pixel}): there are no fluctuations to measure"
        )));
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn out_of_range_weight_is_reported_with_its_pixel() {
        let pix = Pixelization::new(1, Ordering::Ring).unwrap();
        let mut w = vec![1.0; 12];
        w[5] = 1.5;
        let err = Footprint::from_weights(pix, w).unwrap_err().to_string();
        assert_eq!(err, "mask pixel 5 has weight 1.5, outside [0, 1]");
    }

    #[test]
    fn full_sky_has_f_sky_one_and_area_four_pi() {
        // Σ Ω_pix = 4π for equal-area pixels (Górski et al. 2005).
        let fp = Footprint::full_sky(Pixelization::new(4, Ordering::Ring).unwrap());
        assert!((fp.f_sky() - 1.0).abs() < 1e-15);
        assert!((fp.area_sr() - 4.0 * std::f64::consts::PI).abs() < 1e-12);
    }

    #[test]
    fn intersection_keeps_the_smaller_weight_and_rejects_disjoint_footprints() {
        let pix = Pixelization::new(1, Ordering::Ring).unwrap();
        let a = Footprint::from_weights(pix, (0..12).map(|p| f64::from(p < 6)).collect()).unwrap();
        let b = Footprint::from_weights(
            pix,
            (0..12).map(|p| if p >= 4 { 0.5 } else { 0.0 }).collect(),
        )
        .unwrap();
        let both = a.intersection(&b).unwrap();
        let expected: Vec<f64> = (0..12)
            .map(|p| if (4..6).contains(&p) { 0.5 } else { 0.0 })
            .collect();
        assert_eq!(both.weights(), &expected[..]);
        let c = Footprint::from_weights(pix, (0..12).map(|p| f64::from(p >= 6)).collect()).unwrap();
        let err = a.intersection(&c).unwrap_err().to_string();
        assert_eq!(
            err,
            "the two footprints do not overlap: no pixel is observed in both"
        );
    }

    #[test]
    fn mask_of_other_nside_is_rejected() {
        let map =
            SkyMap::new(Pixelization::new(2, Ordering::Ring).unwrap(), vec![0.0; 48]).unwrap();
        let fp = Footprint::full_sky(Pixelization::new(4, Ordering::Ring).unwrap());
        let err = fp.restricted_to(&map).unwrap_err().to_string();
        assert_eq!(err, "mask NSIDE 4 does not match map NSIDE 2");
    }

    #[test]
    fn borrowed_weights_read_as_their_owned_copy_in_partial_and_whole_blocks() {
        // A view must give the numbers of the copy it replaces (common practice). NSIDE 1 and 2
        // hold fewer pixels than one block, whose storing would outweigh a copy, so the
        // footprint holds a copy; NSIDE 4 and 8 hold 3 and 12 whole blocks, of which the map's
        // bad pixels (in the first block) change one.
        use crate::sky::skymap::UNSEEN;
        for nside in [1u32, 2, 4, 8] {
            let pix = Pixelization::new(nside, Ordering::Ring).unwrap();
            let n = pix.npix() as usize;
            let w: Vec<f64> = (0..n)
                .map(|p| match p % 7 {
                    0 => UNSEEN,
                    3 => f64::NAN,
                    1 => 0.25,
                    _ => 1.0,
                })
                .collect();
            let values: Vec<f64> = (0..n)
                .map(|p| {
                    if p < 64 && p % 5 == 2 {
                        f64::NAN
                    } else {
                        p as f64
                    }
                })
                .collect();
            let map = SkyMap::new(pix, values).unwrap();
            let owned = Footprint::from_weights(pix, w.clone())
                .unwrap()
                .into_restricted_to(&map)
                .unwrap();
            let borrowed = FootprintOf::borrowing(pix, &w)
                .unwrap()
                .into_restricted_to(&map)
                .unwrap();
            assert_eq!(borrowed.is_borrowed(), nside >= 4, "NSIDE {nside}");
            if nside >= 4 {
                assert_eq!(borrowed.stored_weights(), WEIGHT_BLOCK, "NSIDE {nside}");
                assert!(borrowed.weights().as_slice().is_none(), "NSIDE {nside}");
            }
            let bits = |v: Vec<f64>| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
            let (a, b) = (owned.weights(), borrowed.weights());
            assert_eq!(bits(a.to_vec()), bits(b.to_vec()), "NSIDE {nside}");
            assert_eq!(bits((0..n).map(|p| b[p]).collect()), bits(a.to_vec()));
            assert_eq!(bits((0..n).map(|p| b.get(p)).collect()), bits(a.to_vec()));
            assert_eq!(b.iter().len(), n);
            assert_eq!(a, b);
            assert_eq!(borrowed.weight(n as u64), 0.0);
            assert_eq!(owned.f_sky().to_bits(), borrowed.f_sky().to_bits());
        }
    }
}
