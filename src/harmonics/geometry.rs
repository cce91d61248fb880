//! HEALPix RING-scheme geometry: the 4·Nside − 1 iso-latitude rings, their colatitudes, pixel
//! counts, first pixel indices and azimuth of the first pixel.
//!
//! Formulas (Górski et al. 2005, ApJ 622, 759, pixel centres of the RING scheme, their §4,
//! section number from memory), with the
//! ring number i = 1 … 4 Nside − 1 counted from the north pole:
//!
//! * north polar cap, 1 ≤ i < Nside: z = cos θ = 1 − i²/(3 Nside²), 4i pixels, first pixel
//!   2i(i − 1), azimuths φ_j = π/(2i)·(j + ½), j = 0 … 4i − 1;
//! * equatorial belt, Nside ≤ i ≤ 3 Nside: z = (4/3) − 2i/(3 Nside), 4 Nside pixels, first
//!   pixel 2 Nside(Nside − 1) + 4 Nside(i − Nside), azimuths φ_j = π/(2 Nside)·(j + ½) when
//!   i + Nside is even and φ_j = π/(2 Nside)·j when it is odd;
//! * south polar cap, 3 Nside < i: mirror image of ring 4 Nside − i (z → −z, same pixel count
//!   and azimuths), first pixel 12 Nside² − 2i'(i' + 1) with i' = 4 Nside − i.
//!
//! The paper writes the equatorial azimuths as π/(2 Nside)(j − s/2) with s = (i − Nside + 1)
//! mod 2 and j = 1 … 4 Nside; the pixel set is the same, and the numbering above (first pixel
//! of an unshifted ring at φ = 0) is the one of the HEALPix RING index, as healpy 1.20.1's
//! `pix2ang` gives it (checked in tests/harmonics_against_healpy.rs).

use std::f64::consts::PI;

use crate::error::{Error, Result};

/// One iso-latitude ring of a HEALPix map.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Ring {
    /// z = cos θ of the ring's pixel centres.
    pub z: f64,
    /// sin θ, computed as √((1 − z)(1 + z)) with 1 − z taken exactly in the polar caps.
    pub sin_theta: f64,
    /// Number of pixels on the ring.
    pub pixel_count: usize,
    /// RING-scheme index of the ring's first pixel.
    pub first_pixel: usize,
    /// Azimuth of the first pixel, 0 or π / pixel_count (half a pixel).
    pub phi0: f64,
    /// Whether the ring is shifted by half a pixel (phi0 = π / pixel_count).
    pub half_pixel_shift: bool,
}

/// All 4·Nside − 1 rings of a HEALPix map, north to south.
#[derive(Debug, Clone)]
pub struct RingGeometry {
    nside: usize,
    rings: Vec<Ring>,
}

impl RingGeometry {
    /// Geometry for any `nside` ≥ 1 (powers of two are not required by the RING scheme).
    pub fn new(nside: usize) -> Result<Self> {
        if nside == 0 {
            return Err(Error::Geometry("NSIDE must be at least 1".into()));
        }
        if nside > (1 << 20) {
            return Err(Error::Geometry(format!(
                "NSIDE {nside} is too large for a harmonic transform (at most 2^20)"
            )));
        }
        let n = nside as f64;
        let npix = 12 * nside * nside;
        let ring_count = 4 * nside - 1;
        let mut rings = Vec::with_capacity(ring_count);
        for i in 1..=ring_count {
            // North-side ring number and mirror sign.
            let (i_n, sign) = if i <= 2 * nside {
                (i, 1.0)
            } else {
                (4 * nside - i, -1.0)
            };
            let (z_north, one_minus_z, pixel_count, shifted) = if i_n < nside {
                let d = (i_n * i_n) as f64 / (3.0 * n * n);
                (1.0 - d, d, 4 * i_n, true)
            } else {
                let z = (2 * nside - i_n) as f64 * 2.0 / (3.0 * n);
                (z, 1.0 - z, 4 * nside, (i_n + nside).is_multiple_of(2))
            };
            let z = sign * z_north;
            let sin_theta = (one_minus_z * (2.0 - one_minus_z)).sqrt();
            let first_pixel = if i < nside {
                2 * i * (i - 1)
            } else if i <= 3 * nside {
                2 * nside * (nside - 1) + 4 * nside * (i - nside)
            } else {
                let ip = 4 * nside - i;
                npix - 2 * ip * (ip + 1)
            };
            let phi0 = if shifted {
                PI / pixel_count as f64
            } else {
                0.0
            };
            rings.push(Ring {
                z,
                sin_theta,
                pixel_count,
                first_pixel,
                phi0,
                half_pixel_shift: shifted,
            });
        }
        Ok(RingGeometry { nside, rings })
    }

    /// HEALPix resolution parameter.
    pub fn nside(&self) -> usize {
        self.nside
    }

    /// Number of pixels, 12 Nside².
    pub fn pixel_count(&self) -> usize {
        12 * self.nside * self.nside
    }

    /// The rings, north to south (index 0 is ring number 1).
    pub fn rings(&self) -> &[Ring] {
        &self.rings
    }

    /// Colatitude θ and azimuth φ of every pixel centre, in RING order.
    pub fn pixel_centres(&self) -> Vec<(f64, f64)> {
        let mut out = Vec::with_capacity(self.pixel_count());
        for ring in &self.rings {
            let theta = ring.z.acos();
            let dphi = 2.0 * PI / ring.pixel_count as f64;
            for j in 0..ring.pixel_count {
                out.push((theta, ring.phi0 + dphi * j as f64));
            }
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // Górski et al. 2005: 4 Nside − 1 rings, 12 Nside² pixels, ring pixel counts sum to Npix,
    // first pixels are contiguous.
    #[test]
    fn rings_tile_the_pixel_range_contiguously() {
        for nside in [1, 2, 3, 5, 16] {
            let g = RingGeometry::new(nside).unwrap();
            assert_eq!(g.rings().len(), 4 * nside - 1);
            let mut next = 0;
            for r in g.rings() {
                assert_eq!(r.first_pixel, next);
                next += r.pixel_count;
            }
            assert_eq!(next, 12 * nside * nside);
        }
    }

    #[test]
    fn zero_nside_is_rejected() {
        assert!(RingGeometry::new(0).is_err());
    }
}
