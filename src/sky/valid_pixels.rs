//! Which pixels of a sky map hold a usable value: one bit per pixel (an NSIDE 8192 map's record
//! takes 100 MB instead of the 805 MB of one byte per pixel).
//!
//! ```
//! use planisphere::sky::valid_pixels::ValidPixels;
//! let valid = ValidPixels::from_fn(70, |p| p % 3 != 0);
//! assert_eq!(valid.count(), 46);
//! assert!(valid[1] && !valid[69]);
//! assert_eq!(valid.iter().position(|&ok| ok), Some(1));
//! ```

/// One bit per pixel: is the pixel's value usable?
#[derive(Clone, PartialEq, Eq)]
pub struct ValidPixels {
    words: Vec<u64>,
    len: usize,
}

impl ValidPixels {
    /// The record of `len` pixels, pixel `p` valid when `valid(p)`.
    pub fn from_fn(len: usize, mut valid: impl FnMut(usize) -> bool) -> Self {
        let words = (0..len.div_ceil(64))
            .map(|w| {
                let start = w * 64;
                (start..len.min(start + 64))
                    .fold(0u64, |word, p| word | (u64::from(valid(p)) << (p - start)))
            })
            .collect();
        ValidPixels { words, len }
    }

    /// Is pixel `p` valid (panics beyond the last pixel, as a slice does)?
    #[inline]
    pub fn get(&self, p: usize) -> bool {
        assert!(p < self.len, "pixel {p} of {}", self.len);
        self.words[p >> 6] >> (p & 63) & 1 == 1
    }

    /// Number of pixels.
    pub fn len(&self) -> usize {
        self.len
    }

    /// No pixel at all?
    pub fn is_empty(&self) -> bool {
        self.len == 0
    }

    /// Number of valid pixels.
    pub fn count(&self) -> u64 {
        self.words.iter().map(|w| u64::from(w.count_ones())).sum()
    }

    /// Is every pixel valid?
    pub fn all(&self) -> bool {
        self.count() == self.len as u64
    }

    /// Validity in pixel order (references to `true` and `false`, as a slice of `bool` gives).
    pub fn iter(&self) -> Iter<'_> {
        self.range(0..self.len)
    }

    /// Validity of the pixels `pixels`, in order (panics beyond the last pixel, as a slice
    /// does).
    pub fn range(&self, pixels: std::ops::Range<usize>) -> Iter<'_> {
        assert!(
            pixels.start <= pixels.end && pixels.end <= self.len,
            "pixels {pixels:?} of {}",
            self.len
        );
        Iter {
            valid: self,
            next: pixels.start,
            end: pixels.end,
        }
    }
}

impl std::ops::Index<usize> for ValidPixels {
    type Output = bool;
    #[inline]
    fn index(&self, p: usize) -> &bool {
        if self.get(p) {
            &true
        } else {
            &false
        }
    }
}

impl std::fmt::Debug for ValidPixels {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "ValidPixels({} of {})", self.count(), self.len)
    }
}

/// The pixels' validity in order (see [`ValidPixels::iter`]).
#[derive(Clone)]
pub struct Iter<'v> {
    valid: &'v ValidPixels,
    next: usize,
    end: usize,
}

impl Iterator for Iter<'_> {
    type Item = &'static bool;
    #[inline]
    fn next(&mut self) -> Option<&'static bool> {
        (self.next < self.end).then(|| {
            let ok = self.valid.get(self.next);
            self.next += 1;
            if ok {
                &true
            } else {
                &false
            }
        })
    }

    fn size_hint(&self) -> (usize, Option<usize>) {
        let n = self.end - self.next;
        (n, Some(n))
    }
}

impl ExactSizeIterator for Iter<'_> {}

impl DoubleEndedIterator for Iter<'_> {
    fn next_back(&mut self) -> Option<&'static bool> {
        (self.next < self.end).then(|| {
            self.end -= 1;
            if self.valid.get(self.end) {
                &true
            } else {
                &false
            }
        })
    }
}

impl<'v> IntoIterator for &'v ValidPixels {
    type Item = &'static bool;
    type IntoIter = Iter<'v>;
    fn into_iter(self) -> Iter<'v> {
        self.iter()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bits_read_back_as_the_flags_they_were_made_from() {
        for len in [0usize, 1, 63, 64, 65, 200] {
            let flags: Vec<bool> = (0..len).map(|p| (p * 7919) % 5 < 2).collect();
            let valid = ValidPixels::from_fn(len, |p| flags[p]);
            assert_eq!(valid.len(), len);
            assert_eq!(valid.iter().copied().collect::<Vec<_>>(), flags);
            assert_eq!(valid.iter().rev().copied().collect::<Vec<_>>(), {
                let mut r = flags.clone();
                r.reverse();
                r
            });
            assert_eq!(valid.count(), flags.iter().filter(|&&f| f).count() as u64);
            assert_eq!(valid.all(), flags.iter().all(|&f| f));
            let (a, b) = (len / 3, 2 * len / 3);
            assert_eq!(valid.range(a..b).copied().collect::<Vec<_>>(), flags[a..b]);
        }
    }
}
