//! A HEALPix sky map: f64 values on a [`Pixelization`], with a record of which pixels are valid.
//!
//! Invalid pixels are those holding the HEALPix bad-value sentinel UNSEEN = −1.6375e30 (within
//! healpy's tolerance |m − UNSEEN| ≤ 1e-8 + 1e-5·|UNSEEN|, so that a float32 sentinel counts),
//! NaN or ±∞. An owned map stores NaN there; a map borrowing its caller's values
//! ([`SkyMapOf::borrowing`]) leaves them as given and is read only where [`SkyMapOf::valid`].

use crate::error::{Error, Result};
use crate::sky::pixelization::{Direction, Ordering, Pixelization};
use crate::sky::valid_pixels::ValidPixels;
use rayon::prelude::*;
use std::borrow::Cow;

/// The HEALPix bad-pixel sentinel (HEALPix FITS convention; healpy `UNSEEN`).
pub const UNSEEN: f64 = -1.6375e30;

/// Is `value` a bad pixel: the UNSEEN sentinel (healpy's tolerance, common practice), NaN or ±∞?
pub fn is_bad_value(value: f64) -> bool {
    !value.is_finite() || (value - UNSEEN).abs() <= 1e-8 + 1e-5 * UNSEEN.abs()
}

/// A full-sky HEALPix map that owns its values.
pub type SkyMap = SkyMapOf<'static>;

/// A full-sky HEALPix map whose values are its own or borrowed for `'a` from the caller (no
/// copy of a large map the caller keeps anyway); [`SkyMap`] is the owned kind. Which pixels
/// are valid is always the map's own record.
#[derive(Debug, Clone)]
pub struct SkyMapOf<'a> {
    pixelization: Pixelization,
    values: Cow<'a, [f64]>,
    valid: ValidPixels,
    /// Coordinate system from the FITS `COORDSYS` keyword (`G`, `E`, `C`), when known.
    pub coordsys: Option<String>,
}

/// What a user checks first about a map (`inspect` prints it; its JSON keys are the field
/// names, the ordering as its FITS keyword value).
#[derive(Debug, Clone, serde::Serialize)]
pub struct MapSummary {
    /// NSIDE.
    pub nside: u32,
    /// `RING` or `NESTED`.
    #[serde(serialize_with = "ordering_fits_name")]
    pub ordering: Ordering,
    /// 12·NSIDE².
    pub npix: u64,
    /// Pixels with a usable value.
    pub valid_pixels: u64,
    /// valid_pixels / npix.
    pub valid_fraction: f64,
    /// Mean over valid pixels.
    pub mean: Option<f64>,
    /// Root mean square (about zero) over valid pixels.
    pub rms: Option<f64>,
    /// Minimum over valid pixels.
    pub min: Option<f64>,
    /// Maximum over valid pixels.
    pub max: Option<f64>,
    /// COORDSYS, when given.
    pub coordsys: Option<String>,
    /// Pixel solid angle 4π/Npix in steradians.
    pub pixel_area_sr: f64,
    /// Mean pixel spacing √(4π/Npix) in arcminutes (common practice).
    #[serde(rename = "pixel_size_arcmin")]
    pub mean_spacing_arcmin: f64,
}

fn ordering_fits_name<S: serde::Serializer>(
    o: &Ordering,
    s: S,
) -> std::result::Result<S::Ok, S::Error> {
    s.serialize_str(o.fits_name())
}

/// The error of `count` values given for `pixelization`, if it needs another number.
fn check_length(pixelization: Pixelization, count: usize) -> Result<()> {
    let npix = pixelization.npix();
    if count as u64 != npix {
        return Err(Error::Mismatch(format!(
            "NSIDE {} needs {} pixels but {} values were given",
            pixelization.nside(),
            npix,
            count
        )));
    }
    Ok(())
}

impl SkyMap {
    /// A map from values in the pixelization's ordering; bad values become invalid pixels.
    pub fn new(pixelization: Pixelization, mut values: Vec<f64>) -> Result<Self> {
        check_length(pixelization, values.len())?;
        let valid = ValidPixels::from_fn(values.len(), |p| !is_bad_value(values[p]));
        for (v, &ok) in values.iter_mut().zip(&valid) {
            if !ok {
                *v = f64::NAN;
            }
        }
        Ok(SkyMap {
            pixelization,
            values: Cow::Owned(values),
            valid,
            coordsys: None,
        })
    }

    /// A map whose pixel values are `f(centre of pixel)`.
    pub fn from_fn(pixelization: Pixelization, f: impl Fn(Direction) -> f64 + Sync) -> Self {
        let values: Vec<f64> = (0..pixelization.npix())
            .into_par_iter()
            .map(|p| f(pixelization.center(p)))
            .collect();
        let valid = ValidPixels::from_fn(values.len(), |p| !is_bad_value(values[p]));
        SkyMap {
            pixelization,
            values: Cow::Owned(values),
            valid,
            coordsys: None,
        }
    }
}

impl<'a> SkyMapOf<'a> {
    /// A map reading the caller's `values` (in the pixelization's ordering) where they are,
    /// without copying them: the same valid pixels as [`SkyMap::new`] of a copy and the same
    /// values at the valid ones, while the bad pixels keep the caller's value (UNSEEN, NaN
    /// or ±∞) instead of NaN. Everything that takes a `SkyMapOf` reads values only where
    /// [`Self::valid`].
    pub fn borrowing(pixelization: Pixelization, values: &'a [f64]) -> Result<Self> {
        check_length(pixelization, values.len())?;
        Ok(SkyMapOf {
            pixelization,
            valid: ValidPixels::from_fn(values.len(), |p| !is_bad_value(values[p])),
            values: Cow::Borrowed(values),
            coordsys: None,
        })
    }

    /// Does the map read its caller's values in place (made by [`Self::borrowing`])?
    pub fn is_borrowed(&self) -> bool {
        matches!(self.values, Cow::Borrowed(_))
    }

    /// The map's pixelization.
    pub fn pixelization(&self) -> Pixelization {
        self.pixelization
    }

    /// NSIDE.
    pub fn nside(&self) -> u32 {
        self.pixelization.nside()
    }

    /// Ordering of the stored values.
    pub fn ordering(&self) -> Ordering {
        self.pixelization.ordering()
    }

    /// Pixel values in the map's ordering: NaN at invalid pixels for an owned map, the
    /// caller's values there for a borrowing one (see [`Self::borrowing`]).
    pub fn values(&self) -> &[f64] {
        &self.values
    }

    /// The pixel values with NaN at invalid pixels, giving up the map (no copy when it owns
    /// them).
    pub fn into_values(self) -> Vec<f64> {
        match self.values {
            Cow::Owned(values) => values,
            Cow::Borrowed(values) => values
                .iter()
                .zip(&self.valid)
                .map(|(&v, &ok)| if ok { v } else { f64::NAN })
                .collect(),
        }
    }

    /// Which pixels are valid.
    pub fn valid(&self) -> &ValidPixels {
        &self.valid
    }

    /// Value of a valid pixel, `None` for an invalid one or an index out of range.
    pub fn get(&self, pixel: u64) -> Option<f64> {
        let i = usize::try_from(pixel).ok()?;
        (i < self.valid.len() && self.valid.get(i)).then(|| self.values[i])
    }

    /// Number of valid pixels.
    pub fn valid_count(&self) -> u64 {
        self.valid.count()
    }

    /// The same map in another ordering (Górski et al. 2005 RING ↔ NESTED, via `cdshealpix`);
    /// in its own ordering a copy (a borrowing map's copy borrows the same values). A reordered
    /// map owns its values, NaN at the invalid pixels.
    pub fn to_ordering(&self, ordering: Ordering) -> Result<SkyMapOf<'a>> {
        if ordering == self.ordering() {
            return Ok(self.clone());
        }
        let target = self.pixelization.with_ordering(ordering)?;
        let source = self.pixelization;
        let npix = target.npix();
        let index: Vec<usize> = (0..npix)
            .into_par_iter()
            .map(|p| {
                let src = match ordering {
                    Ordering::Ring => source.from_nested(target.to_nested(p)?)?,
                    Ordering::Nested => source.from_nested(p)?,
                };
                Ok(src as usize)
            })
            .collect::<Result<Vec<usize>>>()?;
        Ok(SkyMapOf {
            pixelization: target,
            values: Cow::Owned(
                index
                    .iter()
                    .map(|&i| {
                        if self.valid[i] {
                            self.values[i]
                        } else {
                            f64::NAN
                        }
                    })
                    .collect(),
            ),
            valid: ValidPixels::from_fn(index.len(), |p| self.valid.get(index[p])),
            coordsys: self.coordsys.clone(),
        })
    }

    /// Value at the pixel containing `dir` (nearest-pixel sampling); `None` when it is invalid.
    pub fn nearest(&self, dir: Direction) -> Option<f64> {
        self.get(self.pixelization.pixel_of(dir))
    }

    /// Bilinear interpolation at `dir` over the valid ones of the four surrounding pixels, their
    /// weights renormalised to sum to 1 (see [`Pixelization::bilinear_weights`]); `None` when all
    /// four are invalid.
    pub fn interpolate(&self, dir: Direction) -> Result<Option<f64>> {
        let w = self.pixelization.bilinear_weights(dir)?;
        let (mut sum, mut wsum) = (0.0, 0.0);
        for (p, wt) in w {
            if wt > 0.0 {
                if let Some(v) = self.get(p) {
                    sum += wt * v;
                    wsum += wt;
                }
            }
        }
        Ok((wsum > 0.0).then(|| sum / wsum))
    }

    /// Values with invalid pixels written as the UNSEEN sentinel, as HEALPix files store them.
    pub fn values_with_sentinel(&self) -> Vec<f64> {
        self.values_filled(UNSEEN)
    }

    /// Values with invalid pixels written as `fill` (0 before a harmonic transform, say).
    pub fn values_filled(&self, fill: f64) -> Vec<f64> {
        self.values
            .iter()
            .zip(&self.valid)
            .map(|(&v, &ok)| if ok { v } else { fill })
            .collect()
    }

    /// [`Self::values_with_sentinel`], giving up the map: an owned map's values are rewritten
    /// in place (no second full-sky array).
    pub fn into_values_with_sentinel(self) -> Vec<f64> {
        match self.values {
            Cow::Owned(mut values) => {
                for (v, &ok) in values.iter_mut().zip(&self.valid) {
                    if !ok {
                        *v = UNSEEN;
                    }
                }
                values
            }
            Cow::Borrowed(_) => self.values_with_sentinel(),
        }
    }

    /// NSIDE, ordering, valid fraction, mean, rms (about zero), min, max and coordinate system.
    pub fn summary(&self) -> MapSummary {
        let mut n = 0u64;
        let (mut sum, mut sum2) = (0.0, 0.0);
        let (mut min, mut max) = (f64::INFINITY, f64::NEG_INFINITY);
        for (&v, &ok) in self.values.iter().zip(&self.valid) {
            if ok {
                n += 1;
                sum += v;
                sum2 += v * v;
                min = min.min(v);
                max = max.max(v);
            }
        }
        let some = |x: f64| (n > 0).then_some(x);
        MapSummary {
            nside: self.nside(),
            ordering: self.ordering(),
            npix: self.pixelization.npix(),
            valid_pixels: n,
            valid_fraction: n as f64 / self.pixelization.npix() as f64,
            mean: some(sum / n as f64),
            rms: some((sum2 / n as f64).sqrt()),
            min: some(min),
            max: some(max),
            coordsys: self.coordsys.clone(),
            pixel_area_sr: self.pixelization.pixel_area(),
            mean_spacing_arcmin: self.pixelization.mean_spacing().to_degrees() * 60.0,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn float32_sentinel_counts_as_bad() {
        // UNSEEN stored as float32 reads back as −1.637499996306027e30 (healpy 1.20.1, see
        // shared reference facts); healpy's tolerance accepts it.
        assert!(is_bad_value(-1.637499996306027e30));
        assert!(is_bad_value(f64::NAN));
        assert!(!is_bad_value(-1.6e30));
        assert!(!is_bad_value(0.0));
    }

    #[test]
    fn wrong_length_is_rejected_with_counts() {
        let pix = Pixelization::new(2, Ordering::Ring).unwrap();
        let err = SkyMap::new(pix, vec![0.0; 47]).unwrap_err().to_string();
        assert!(err.contains("needs 48 pixels but 47"), "{err}");
    }

    #[test]
    fn borrowing_map_reads_the_callers_values_with_the_owned_maps_valid_pixels() {
        // the same bad-value rule as an owned map (UNSEEN, NaN, ±∞; healpy's tolerance)
        let pix = Pixelization::new(2, Ordering::Ring).unwrap();
        let mut values: Vec<f64> = (0..48).map(|i| i as f64 - 7.5).collect();
        values[3] = UNSEEN;
        values[9] = f64::NAN;
        values[20] = f64::INFINITY;
        let owned = SkyMap::new(pix, values.clone()).unwrap();
        let borrowed = SkyMapOf::borrowing(pix, &values).unwrap();
        assert!(borrowed.is_borrowed() && !owned.is_borrowed());
        assert_eq!(borrowed.values().as_ptr(), values.as_ptr());
        assert_eq!(borrowed.valid(), owned.valid());
        assert_eq!(borrowed.valid_count(), 45);
        assert_eq!(borrowed.values()[3], UNSEEN);
        let nested = borrowed.to_ordering(Ordering::Nested).unwrap();
        let nested_owned = owned.to_ordering(Ordering::Nested).unwrap();
        assert_eq!(
            nested.values_with_sentinel(),
            nested_owned.values_with_sentinel()
        );
        assert!(nested.values()[nested_owned.valid().iter().position(|&ok| !ok).unwrap()].is_nan());
        let same = borrowed.clone().into_values();
        assert_eq!(same.iter().filter(|v| v.is_nan()).count(), 3);
        assert_eq!(
            borrowed.clone().into_values_with_sentinel(),
            owned.values_with_sentinel()
        );
        assert_eq!(
            owned.clone().into_values_with_sentinel(),
            owned.values_with_sentinel()
        );
        assert_eq!(
            SkyMapOf::borrowing(pix, &values[..47])
                .unwrap_err()
                .to_string(),
            "NSIDE 2 needs 48 pixels but 47 values were given"
        );
    }

    #[test]
    fn ring_nested_round_trip_is_identity() {
        let pix = Pixelization::new(8, Ordering::Ring).unwrap();
        let map = SkyMap::new(pix, (0..768).map(|i| i as f64).collect()).unwrap();
        let back = map
            .to_ordering(Ordering::Nested)
            .unwrap()
            .to_ordering(Ordering::Ring)
            .unwrap();
        assert_eq!(back.values(), map.values());
    }
}
