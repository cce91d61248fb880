//! HEALPix pixel geometry: NSIDE, RING/NESTED ordering, pixel centres, direction → pixel,
//! neighbours and bilinear interpolation weights.
//!
//! All geometry goes through the `cdshealpix` crate (0.10). Conventions follow Górski et al. 2005
//! (ApJ 622, 759) and healpy: a direction is (θ, φ) with θ the colatitude in [0, π] and φ the
//! longitude in [0, 2π); `cdshealpix` works in (lon, lat) = (φ, π/2 − θ).

use crate::error::{Error, Result};
use cdshealpix::compass_point::MainWind;
use cdshealpix::nested::Layer;
use std::f64::consts::{FRAC_PI_2, PI};
use std::fmt;

/// Largest NSIDE accepted (2^29, the largest depth `cdshealpix` supports).
pub const NSIDE_MAX: u32 = cdshealpix::NSIDE_MAX;

/// Pixel numbering scheme of a HEALPix map.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub enum Ordering {
    /// Pixels numbered along iso-latitude rings from north to south.
    Ring,
    /// Pixels numbered hierarchically inside each of the 12 base pixels.
    Nested,
}

impl Ordering {
    /// The value of the FITS `ORDERING` keyword for this scheme.
    pub fn fits_name(self) -> &'static str {
        match self {
            Ordering::Ring => "RING",
            Ordering::Nested => "NESTED",
        }
    }

    /// Parses `RING` / `NESTED` (also `NEST`), case-insensitively, as the FITS keyword allows.
    pub fn parse(text: &str) -> Option<Ordering> {
        match text.trim().to_ascii_uppercase().as_str() {
            "RING" => Some(Ordering::Ring),
            "NESTED" | "NEST" => Some(Ordering::Nested),
            _ => None,
        }
    }
}

impl fmt::Display for Ordering {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.fits_name())
    }
}

/// A direction on the unit sphere: colatitude `theta` ∈ [0, π] and longitude `phi`, in radians.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Direction {
    /// Colatitude θ (0 at the north pole).
    pub theta: f64,
    /// Longitude φ.
    pub phi: f64,
}

impl Direction {
    /// A direction from colatitude and longitude in radians.
    pub fn new(theta: f64, phi: f64) -> Self {
        Direction { theta, phi }
    }

    /// A direction from longitude and latitude in degrees (e.g. galactic l, b).
    pub fn from_lonlat_deg(lon: f64, lat: f64) -> Self {
        Direction {
            theta: FRAC_PI_2 - lat.to_radians(),
            phi: lon.to_radians(),
        }
    }

    /// Latitude π/2 − θ in radians.
    pub fn lat(&self) -> f64 {
        FRAC_PI_2 - self.theta
    }

    /// Longitude reduced to [0, 2π) (a longitude already in range is returned as it is, the
    /// value `rem_euclid` gives, without its floating-point remainder).
    pub fn lon(&self) -> f64 {
        if (0.0..2.0 * PI).contains(&self.phi) {
            self.phi
        } else {
            self.phi.rem_euclid(2.0 * PI)
        }
    }

    /// Unit vector (sin θ cos φ, sin θ sin φ, cos θ).
    pub fn to_vector(&self) -> [f64; 3] {
        let (st, ct) = self.theta.sin_cos();
        let (sp, cp) = self.phi.sin_cos();
        [st * cp, st * sp, ct]
    }

    /// The direction of a (not necessarily normalised) non-zero vector.
    pub fn from_vector(v: [f64; 3]) -> Self {
        let rho = (v[0] * v[0] + v[1] * v[1]).sqrt();
        let theta = rho.atan2(v[2]);
        let phi = if rho == 0.0 {
            0.0
        } else {
            v[1].atan2(v[0]).rem_euclid(2.0 * PI)
        };
        Direction { theta, phi }
    }

    /// Great-circle distance to `other` in radians (haversine form, accurate at small angles).
    pub fn distance(&self, other: &Direction) -> f64 {
        cdshealpix::haversine_dist(self.lon(), self.lat(), other.lon(), other.lat())
    }

    /// The (lon, lat) pair in radians that `cdshealpix` expects, with lat clamped to [−π/2, π/2].
    pub fn lonlat(&self) -> (f64, f64) {
        (self.lon(), self.lat().clamp(-FRAC_PI_2, FRAC_PI_2))
    }
}

/// The pixelization of a HEALPix map: its NSIDE and ordering.
#[derive(Clone, Copy)]
pub struct Pixelization {
    nside: u32,
    ordering: Ordering,
    /// The NESTED layer of the same NSIDE, present when NSIDE is a power of two.
    layer: Option<&'static Layer>,
}

impl fmt::Debug for Pixelization {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "Pixelization(NSIDE={}, {})", self.nside, self.ordering)
    }
}

impl PartialEq for Pixelization {
    fn eq(&self, other: &Self) -> bool {
        self.nside == other.nside && self.ordering == other.ordering
    }
}

impl Pixelization {
    /// A pixelization; NSIDE must be in 1..=2^29, and a power of two for NESTED (Górski et al.
    /// 2005, §4: the nested scheme subdivides each base pixel into NSIDE² = 4^k pixels).
    pub fn new(nside: u32, ordering: Ordering) -> Result<Self> {
        if nside == 0 || nside > NSIDE_MAX {
            return Err(Error::Geometry(format!(
                "NSIDE {nside} is out of range (1 to {NSIDE_MAX})"
            )));
        }
        let power_of_two = nside.is_power_of_two();
        if ordering == Ordering::Nested && !power_of_two {
            return Err(Error::Geometry(format!(
                "NSIDE {nside} is not a power of two, which NESTED ordering requires"
            )));
        }
        let layer = power_of_two.then(|| cdshealpix::nested::get(cdshealpix::depth(nside)));
        Ok(Pixelization {
            nside,
            ordering,
            layer,
        })
    }

    /// NSIDE.
    pub fn nside(&self) -> u32 {
        self.nside
    }

    /// Pixel ordering.
    pub fn ordering(&self) -> Ordering {
        self.ordering
    }

    /// The same NSIDE in another ordering.
    pub fn with_ordering(&self, ordering: Ordering) -> Result<Self> {
        Pixelization::new(self.nside, ordering)
    }

    /// Number of pixels, Npix = 12 NSIDE² (Górski et al. 2005, eq. 2).
    pub fn npix(&self) -> u64 {
        npix_of(self.nside)
    }

    /// Number of iso-latitude rings, 4 NSIDE − 1 (Górski et al. 2005, §4).
    pub fn nrings(&self) -> u32 {
        4 * self.nside - 1
    }

    /// Solid angle of one pixel, 4π / Npix = π / (3 NSIDE²) steradians (equal-area pixels).
    ///
    /// # Examples
    ///
    /// Npix = 12 NSIDE² equal-area pixels (Górski et al. 2005, ApJ 622, 759; from memory):
    /// NSIDE 1 has 12 pixels of π/3 = 1.0471976 sr, NSIDE 1024 has 12 582 912 pixels of
    /// 4π/12 582 912 = 9.98685e-7 sr, whose mean spacing √Ω is 3517.94′/1024 = 3.43549′.
    ///
    /// ```
    /// use planisphere::{Ordering, Pixelization};
    /// let one = Pixelization::new(1, Ordering::Ring)?;
    /// assert_eq!(one.npix(), 12);
    /// assert!((one.pixel_area() - 1.0471976).abs() < 1e-7);
    /// let fine = Pixelization::new(1024, Ordering::Nested)?;
    /// assert_eq!(fine.npix(), 12_582_912);
    /// assert!((fine.pixel_area() / 9.98685e-7 - 1.0).abs() < 1e-5);
    /// assert!((fine.mean_spacing().to_degrees() * 60.0 - 3.43549).abs() < 1e-5);
    /// # Ok::<(), planisphere::Error>(())
    /// ```
    pub fn pixel_area(&self) -> f64 {
        4.0 * PI / self.npix() as f64
    }

    /// Mean pixel spacing √(pixel area) in radians (≈ 3517.94′ / NSIDE, common practice).
    pub fn mean_spacing(&self) -> f64 {
        self.pixel_area().sqrt()
    }

    /// Is `pixel` a valid index (0 ≤ pixel < Npix)?
    pub fn contains(&self, pixel: u64) -> bool {
        pixel < self.npix()
    }

    /// The NESTED layer; an error when NSIDE is not a power of two.
    fn layer(&self) -> Result<&'static Layer> {
        self.layer.ok_or_else(|| {
            Error::Geometry(format!(
                "NSIDE {} is not a power of two: neighbours, interpolation and re-ordering need one",
                self.nside
            ))
        })
    }

    /// Centre of `pixel` (which must satisfy [`Pixelization::contains`]).
    pub fn center(&self, pixel: u64) -> Direction {
        let (lon, lat) = match self.ordering {
            Ordering::Ring => cdshealpix::ring::center(self.nside, pixel),
            Ordering::Nested => self.layer.map(|l| l.center(pixel)).unwrap_or((0.0, 0.0)),
        };
        Direction::new(FRAC_PI_2 - lat, lon)
    }

    /// The pixel containing direction `dir`.
    pub fn pixel_of(&self, dir: Direction) -> u64 {
        let (lon, lat) = dir.lonlat();
        match (self.ordering, self.layer) {
            (Ordering::Nested, Some(layer)) => layer.hash(lon, lat),
            _ => cdshealpix::ring::hash(self.nside, lon, lat),
        }
    }

    /// NESTED index of `pixel` given in this pixelization's ordering.
    pub fn to_nested(&self, pixel: u64) -> Result<u64> {
        match self.ordering {
            Ordering::Nested => Ok(pixel),
            Ordering::Ring => Ok(self.layer()?.from_ring(pixel)),
        }
    }

    /// RING index of `pixel` given in this pixelization's ordering.
    pub fn to_ring(&self, pixel: u64) -> Result<u64> {
        match self.ordering {
            Ordering::Ring => Ok(pixel),
            Ordering::Nested => Ok(self.layer()?.to_ring(pixel)),
        }
    }

    /// Index in this ordering of a NESTED index.
    pub fn from_nested(&self, nested: u64) -> Result<u64> {
        match self.ordering {
            Ordering::Nested => Ok(nested),
            Ordering::Ring => Ok(self.layer()?.to_ring(nested)),
        }
    }

    /// The eight neighbours of `pixel` in healpy's order (SW, W, NW, N, NE, E, SE, S); `None`
    /// where a pixel at a base-pixel corner has only seven neighbours.
    pub fn neighbours(&self, pixel: u64) -> Result<[Option<u64>; 8]> {
        let layer = self.layer()?;
        let nested = self.to_nested(pixel)?;
        let map = layer.neighbours(nested, false);
        let order = [
            MainWind::SW,
            MainWind::W,
            MainWind::NW,
            MainWind::N,
            MainWind::NE,
            MainWind::E,
            MainWind::SE,
            MainWind::S,
        ];
        let mut out = [None; 8];
        for (slot, wind) in out.iter_mut().zip(order) {
            if let Some(&n) = map.get(wind) {
                *slot = Some(self.from_nested(n)?);
            }
        }
        Ok(out)
    }

    /// Bilinear interpolation weights at `dir`: four (pixel, weight) pairs summing to 1, from
    /// `cdshealpix::nested::Layer::bilinear_interpolation` (bilinear in the HEALPix projection
    /// plane of Calabretta & Roukema 2007, MNRAS 381, 865; weights of missing corner neighbours are
    /// shared between the two adjacent pixels).
    pub fn bilinear_weights(&self, dir: Direction) -> Result<[(u64, f64); 4]> {
        let layer = self.layer()?;
        let (lon, lat) = dir.lonlat();
        let mut w = layer.bilinear_interpolation(lon, lat);
        if self.ordering == Ordering::Ring {
            for (p, _) in w.iter_mut() {
                *p = layer.to_ring(*p);
            }
        }
        Ok(w)
    }
}

/// 12 NSIDE², the number of pixels of a map of that NSIDE.
pub fn npix_of(nside: u32) -> u64 {
    12 * (nside as u64) * (nside as u64)
}

/// The NSIDE whose map has `npix` pixels, if any.
pub fn nside_of_npix(npix: u64) -> Option<u32> {
    if !npix.is_multiple_of(12) {
        return None;
    }
    let n2 = npix / 12;
    let n = (n2 as f64).sqrt().round() as u64;
    (n * n == n2 && n >= 1 && n <= NSIDE_MAX as u64).then_some(n as u32)
}

/// Colatitude of the centres of RING ring `i` (1 ≤ i ≤ 4 NSIDE − 1), from Górski et al. 2005
/// (§4, eqs. 4–5): z = 1 − i²/(3N²) in the north cap (i < N), z = 4/3 − 2i/(3N) in the
/// equatorial zone, mirrored in the south cap; the caps use θ = 2·asin(i/(√6 N)) (the same
/// relation, stable near the poles).
pub(crate) fn ring_theta(nside: u64, i: u64) -> f64 {
    let n = nside as f64;
    if i < nside {
        2.0 * (i as f64 / (6f64.sqrt() * n)).asin()
    } else if i <= 3 * nside {
        (4.0 / 3.0 - 2.0 * i as f64 / (3.0 * n)).acos()
    } else {
        let j = 4 * nside - i;
        std::f64::consts::PI - 2.0 * (j as f64 / (6f64.sqrt() * n)).asin()
    }
}

/// First RING index, number of pixels and whether the ring's pixel centres are shifted by half
/// a pixel in longitude (φ_j = (j + ½)·2π/n) or not (φ_j = j·2π/n), for ring `i`
/// (Górski et al. 2005, §4: 4i pixels in cap ring i, 4N in equatorial rings, where every other
/// ring starts at φ = 0).
pub(crate) fn ring_info(nside: u64, i: u64) -> (u64, u64, bool) {
    if i < nside {
        (2 * i * (i - 1), 4 * i, true)
    } else if i <= 3 * nside {
        (
            2 * nside * (nside - 1) + 4 * nside * (i - nside),
            4 * nside,
            (i - nside).is_multiple_of(2),
        )
    } else {
        let j = 4 * nside - i;
        (12 * nside * nside - 2 * j * (j + 1), 4 * j, true)
    }
}

/// Ring number i (1 ≤ i ≤ 4 NSIDE − 1) and position j (0-based, in increasing longitude) of
/// RING pixel `p`: the inverse of [`ring_info`] (Górski et al. 2005, §4: the north cap holds
/// 2i(i − 1) pixels before ring i, the equatorial rings 4 NSIDE each, the south cap mirrors the
/// north).
pub(crate) fn ring_and_position(nside: u64, p: u64) -> (u64, u64) {
    let cap = 2 * nside * (nside - 1);
    let npix = 12 * nside * nside;
    let north_ring = |q: u64| -> u64 {
        // largest i with 2i(i − 1) ≤ q
        let mut i = ((1.0 + (1.0 + 2.0 * q as f64).sqrt()) / 2.0) as u64;
        i = i.max(1);
        while 2 * (i + 1) * i <= q {
            i += 1;
        }
        while 2 * i * (i - 1) > q {
            i -= 1;
        }
        i
    };
    if p < cap {
        let i = north_ring(p);
        (i, p - 2 * i * (i - 1))
    } else if p < npix - cap {
        let i = nside + (p - cap) / (4 * nside);
        (i, (p - cap) % (4 * nside))
    } else {
        let q = npix - 1 - p;
        let k = north_ring(q);
        let i = 4 * nside - k;
        let (first, _, _) = ring_info(nside, i);
        (i, p - first)
    }
}

/// Longitude of the centre of pixel j on ring i: (j + ½)·2π/n_i on shifted rings, j·2π/n_i
/// otherwise (Górski et al. 2005, §4).
pub(crate) fn ring_pixel_phi(nside: u64, i: u64, j: u64) -> f64 {
    let (_, count, shifted) = ring_info(nside, i);
    let offset = if shifted { 0.5 } else { 0.0 };
    (j as f64 + offset) * std::f64::consts::TAU / count as f64
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::f64::consts::FRAC_PI_4;

    #[test]
    fn ring_and_position_agree_with_healpy_pix2ang_and_invert_ring_info() {
        // healpy 1.20.1 pix2ang(16, [0, 427, 1440, 1520, 3068]) in RING (shared reference facts).
        let theta = [0.05103658, 0.78550497, 1.52911759, FRAC_PI_2, 3.09055608];
        let phi = [FRAC_PI_4, FRAC_PI_4, 0.0, 1.61988371, FRAC_PI_4];
        for (k, p) in [0u64, 427, 1440, 1520, 3068].into_iter().enumerate() {
            let (i, j) = ring_and_position(16, p);
            assert!((ring_theta(16, i) - theta[k]).abs() < 1e-8, "pixel {p}");
            assert!(
                (ring_pixel_phi(16, i, j) - phi[k]).abs() < 1e-8,
                "pixel {p}"
            );
        }
        // every RING index is ring_info's first pixel of its ring plus its position
        for nside in [1u64, 2, 8, 64] {
            for p in 0..12 * nside * nside {
                let (i, j) = ring_and_position(nside, p);
                let (first, len, _) = ring_info(nside, i);
                assert!(j < len && first + j == p, "NSIDE {nside}, pixel {p}");
            }
        }
    }

    #[test]
    fn nested_requires_power_of_two_nside() {
        let err = Pixelization::new(12, Ordering::Nested).unwrap_err();
        assert!(err.to_string().contains("not a power of two"), "{err}");
        assert!(Pixelization::new(12, Ordering::Ring).is_ok());
    }

    #[test]
    fn nside_zero_and_huge_are_rejected() {
        assert!(Pixelization::new(0, Ordering::Ring)
            .unwrap_err()
            .to_string()
            .contains("out of range"));
        assert!(Pixelization::new(1 << 30, Ordering::Ring).is_err());
    }

    #[test]
    fn npix_inverse_recovers_nside() {
        // Npix = 12 NSIDE² (Górski et al. 2005, eq. 2).
        for nside in [1u32, 2, 3, 16, 1000, 8192] {
            assert_eq!(nside_of_npix(npix_of(nside)), Some(nside));
        }
        assert_eq!(nside_of_npix(13), None);
        assert_eq!(nside_of_npix(12 * 5), None);
    }
}
