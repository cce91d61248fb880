//! Survey footprints: binary masks or fractional weight maps with values in [0, 1].
//!
//! A pixel belongs to the footprint when its weight is positive. The footprint area is
//! Σ w_p · Ω_pix and f_sky = Σ w_p / Npix (HEALPix pixels are equal-area, Górski et al. 2005).

use crate::error::{Error, Result};
use crate::sky::pixelization::{Direction, Ordering, Pixelization};
use crate::sky::skymap::{is_bad_value, SkyMap, SkyMapOf};
use rayon::prelude::*;

/// A mask or weight map on a HEALPix pixelization.
#[derive(Debug, Clone)]
pub struct Footprint {
    pixelization: Pixelization,
    weights: Vec<f64>,
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

impl Footprint {
    /// The weights, giving up the footprint (no copy).
    pub fn into_weights(self) -> Vec<f64> {
        self.weights
    }

    /// A footprint from weights in [0, 1]; bad values (UNSEEN, NaN) count as 0, ±inf is an
    /// error naming how many pixels hold it, anything else outside [0, 1] is an error naming
    /// the first offending pixel.
    pub fn from_weights(pixelization: Pixelization, mut weights: Vec<f64>) -> Result<Self> {
        if weights.len() as u64 != pixelization.npix() {
            return Err(Error::Mismatch(format!(
                "a mask at NSIDE {} needs {} pixels but {} values were given",
                pixelization.nside(),
                pixelization.npix(),
                weights.len()
            )));
        }
        for sign in [1.0, -1.0] {
            let infinite = sign * f64::INFINITY;
            let mut hits = weights.iter().enumerate().filter(|(_, &w)| w == infinite);
            if let Some((first, _)) = hits.next() {
                let count = 1 + hits.count();
                let pixels = if count == 1 { "pixel" } else { "pixels" };
                return Err(Error::Data(format!(
                    "the mask holds {infinite:+} in {count} {pixels} (first: pixel {first}): \
                     weights must lie in [0, 1], with 0, UNSEEN or NaN for unobserved pixels"
                )));
            }
        }
        for (p, w) in weights.iter_mut().enumerate() {
            if is_bad_value(*w) {
                *w = 0.0;
            } else if !(0.0..=1.0).contains(w) {
                return Err(Error::Data(format!(
                    "mask pixel {p} has weight {}, outside [0, 1]",
                    crate::error::compact(*w)
                )));
            }
        }
        Ok(Footprint {
            pixelization,
            weights,
        })
    }

    /// The binary footprint `inside(centre of pixel)`.
    pub fn from_fn(pixelization: Pixelization, inside: impl Fn(Direction) -> bool + Sync) -> Self {
        let weights = (0..pixelization.npix())
            .into_par_iter()
            .map(|p| f64::from(u8::from(inside(pixelization.center(p)))))
            .collect();
        Footprint {
            pixelization,
            weights,
        }
    }

    /// The whole sky, weight 1 everywhere.
    pub fn full_sky(pixelization: Pixelization) -> Self {
        Footprint {
            pixelization,
            weights: vec![1.0; pixelization.npix() as usize],
        }
    }

    /// The valid pixels of a map as a binary footprint.
    pub fn of_valid_pixels(map: &SkyMapOf<'_>) -> Self {
        Footprint {
            pixelization: map.pixelization(),
            weights: map
                .valid()
                .iter()
                .map(|&v| f64::from(u8::from(v)))
                .collect(),
        }
    }

    /// The footprint's pixelization.
    pub fn pixelization(&self) -> Pixelization {
        self.pixelization
    }

    /// Weights in the footprint's ordering.
    pub fn weights(&self) -> &[f64] {
        &self.weights
    }

    /// Weight of `pixel` (0 outside the index range).
    pub fn weight(&self, pixel: u64) -> f64 {
        usize::try_from(pixel)
            .ok()
            .and_then(|i| self.weights.get(i).copied())
            .unwrap_or(0.0)
    }

    /// Number of pixels with positive weight.
    pub fn observed_pixels(&self) -> u64 {
        self.weights.iter().filter(|&&w| w > 0.0).count() as u64
    }

    /// Are all weights 0 or 1?
    pub fn is_binary(&self) -> bool {
        self.weights.iter().all(|&w| w == 0.0 || w == 1.0)
    }

    /// Σ w_p · Ω_pix in steradians.
    pub fn area_sr(&self) -> f64 {
        self.weights.iter().sum::<f64>() * self.pixelization.pixel_area()
    }

    /// Σ w_p / Npix.
    pub fn f_sky(&self) -> f64 {
        self.weights.iter().sum::<f64>() / self.pixelization.npix() as f64
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

    /// The same footprint in another ordering.
    pub fn to_ordering(&self, ordering: Ordering) -> Result<Footprint> {
        // one copy of the weights, never more (NSIDE 1024: 100 MB each)
        if self.pixelization.ordering() == ordering {
            return Ok(self.clone());
        }
        let as_map = SkyMap::new(self.pixelization, self.weights.clone())?;
        let moved = as_map.to_ordering(ordering)?;
        Ok(Footprint {
            pixelization: moved.pixelization(),
            weights: moved.into_values(),
        })
    }

    /// The common footprint of two masks: the smaller of the two weights per pixel (for binary
    /// masks, pixels observed in both), in this footprint's ordering. Errors when the NSIDEs
    /// differ or the two footprints share no pixel.
    pub fn intersection(&self, other: &Footprint) -> Result<Footprint> {
        if self.pixelization.nside() != other.pixelization.nside() {
            return Err(Error::Mismatch(format!(
                "footprints of NSIDE {} and {} cannot be intersected",
                self.pixelization.nside(),
                other.pixelization.nside()
            )));
        }
        let other = other.to_ordering(self.pixelization.ordering())?;
        let weights: Vec<f64> = self
            .weights
            .iter()
            .zip(&other.weights)
            .map(|(a, b)| a.min(*b))
            .collect();
        let fp = Footprint {
            pixelization: self.pixelization,
            weights,
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
    pub fn restricted_to(&self, map: &SkyMapOf<'_>) -> Result<Footprint> {
        self.check_map_nside(map.nside())?;
        self.to_ordering(map.ordering())?.without_bad_pixels_of(map)
    }

    /// As [`Self::restricted_to`], giving up this footprint: in the map's ordering its weights
    /// are changed in place (no second full-sky array).
    pub fn into_restricted_to(self, map: &SkyMapOf<'_>) -> Result<Footprint> {
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
    fn without_bad_pixels_of(mut self, map: &SkyMapOf<'_>) -> Result<Footprint> {
        let mut lost = 0u64;
        for (w, &ok) in self.weights.iter_mut().zip(map.valid()) {
            if *w > 0.0 && !ok {
                *w = 0.0;
                lost += 1;
            }
        }
        if self.observed_pixels() == 0 {
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
        Ok(self)
    }
}

/// Refuses a mask with a single observed pixel: one value has no fluctuations to measure
/// (the statistics of one pixel are 0/0).
pub fn refuse_single_pixel_mask(mask: &Footprint) -> Result<()> {
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
}
