//! The tiling of a footprint by gnomonic tangent-plane tiles.
//!
//! Tile centres are the centres of the pixels of a coarse HEALPix grid (NSIDE_coarse a power of
//! two ≤ the map's NSIDE). The *core* of a tile is its coarse pixel: exactly the fine map pixels
//! that descend from it in the NESTED hierarchy (Górski et al. 2005, §4: the fine nested index
//! shifted right by 2·(depth_fine − depth_coarse) bits is the coarse nested index), so the cores
//! partition the sphere. Each tile carries a square n × n grid of plane pixels of side Δ (radians of the tangent plane,
//! i.e. the angular size at the tangent point), wide enough for its core plus a halo.
//!
//! Plane pixel (ix, iy) has its centre at x = (ix − n/2 + ½)Δ, y = (iy − n/2 + ½)Δ: the tangent
//! point is the corner shared by the four central pixels; x grows toward increasing longitude and
//! y toward the north (see [`crate::projection`]). Grids are row-major with one row per y value,
//! row 0 the southernmost.
//!
//! Only the plan (centres, indices, figures) is held; the grids are made on demand, one tile at a
//! time, by [`crate::sampling::TileSampler`].

use crate::error::{Error, Result};
use crate::footprint::Footprint;
use crate::pixelization::{Direction, Ordering, Pixelization};
use crate::projection::Gnomonic;
use std::f64::consts::FRAC_PI_2;
use std::ops::Range;

/// Default plane pixel size as a fraction of the map's mean pixel spacing: 1. The transfer of
/// power by sampling (`examples/sampling_transfer.rs`) is set by the interpolation between map
/// pixels and is the same, to 10⁻³, for plane pixels of 1, ½ and ¼ map spacing; finer plane
/// pixels only cost memory (×4 per halving) and push the smallest wavelet scales below the map's
/// resolution.
pub const DEFAULT_PIXEL_FRACTION: f64 = 1.0;

/// Default halo around the core, in plane pixels.
pub const DEFAULT_HALO: usize = 16;

/// Largest angular distance from the tangent point allowed for a grid corner (60°, where the
/// radial stretch sec²ρ reaches 4); beyond, a gnomonic grid is too distorted to be useful.
pub const MAX_CORNER_DISTANCE: f64 = std::f64::consts::FRAC_PI_3;

/// Largest number of plane pixels per tile side accepted (8192: one tile's grids then take
/// 1.6 GiB, see [`crate::sampling::TileGrids::bytes_for`]).
pub const MAX_TILE_PIXELS: usize = 8192;

/// What the user chooses about a tiling.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TilingSettings {
    /// NSIDE of the coarse grid whose pixel centres are the tile centres (a power of two ≤ the
    /// map's NSIDE).
    pub coarse_nside: u32,
    /// Plane pixels per side n (even); `None`: the smallest even 2^a·3^b that holds the largest
    /// core plus the halo.
    pub tile_pixels: Option<usize>,
    /// Plane pixel size Δ in radians; `None`: [`DEFAULT_PIXEL_FRACTION`] × the map's mean
    /// pixel spacing.
    pub pixel_size: Option<f64>,
    /// Halo width in plane pixels kept around the core on every side.
    pub halo: usize,
}

impl TilingSettings {
    /// Settings with the given coarse NSIDE and the defaults for everything else.
    pub fn new(coarse_nside: u32) -> Self {
        TilingSettings {
            coarse_nside,
            tile_pixels: None,
            pixel_size: None,
            halo: DEFAULT_HALO,
        }
    }
}

/// One tile of a plan.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Tile {
    /// NESTED index of the tile's coarse pixel.
    pub coarse_pixel: u64,
    /// Tangent point: the centre of the coarse pixel.
    pub center: Direction,
    /// Σ footprint weights over the core's fine pixels / number of core pixels.
    pub footprint_fraction: f64,
    /// Number of core pixels with positive footprint weight.
    pub footprint_pixels: u64,
    /// Largest |x| or |y| of the core's boundary on the plane, radians of the tangent plane.
    pub core_half_width: f64,
    /// Largest radial scale distortion sec²ρ over the core (at its farthest boundary point).
    pub core_distortion: f64,
}

/// A tiling plan: which tiles, their grids' geometry and the overall figures.
#[derive(Debug, Clone)]
pub struct TilingPlan {
    map: Pixelization,
    coarse: Pixelization,
    /// 2·(depth_fine − depth_coarse).
    shift: u32,
    n: usize,
    pixel_size: f64,
    halo: usize,
    tiles: Vec<Tile>,
    footprint_weight: f64,
}

/// The figures a user checks before running a tiling.
#[derive(Debug, Clone, serde::Serialize)]
pub struct TilingSummary {
    pub map_nside: u32,
    pub coarse_nside: u32,
    pub tiles: usize,
    pub tile_pixels: usize,
    pub pixel_size_arcmin: f64,
    /// Plane pixel size / the map's mean pixel spacing.
    pub pixel_size_in_map_spacings: f64,
    pub halo_pixels: usize,
    /// Angular width of a tile through its centre, 2·atan(nΔ/2), in degrees.
    pub tile_width_deg: f64,
    /// Footprint area Σ w Ω_pix (steradians).
    pub footprint_area_sr: f64,
    pub footprint_area_deg2: f64,
    /// Footprint area inside the kept tiles' cores (equals the footprint area: cores partition
    /// the sphere and every core meeting the footprint is kept).
    pub covered_footprint_area_sr: f64,
    /// Total area of the kept cores (steradians).
    pub core_area_sr: f64,
    /// Mean footprint fraction of the kept cores.
    pub mean_footprint_fraction: f64,
    /// Radial scale distortion sec²ρ at a grid corner (the same for every tile).
    pub grid_corner_distortion: f64,
    /// Largest sec²ρ over all kept cores.
    pub worst_core_distortion: f64,
    /// Bytes of one tile's sampled grids (see [`crate::sampling::TileGrids::bytes_for`]).
    pub bytes_per_tile: u64,
    /// Peak bytes of grids alive at once with `threads` workers, one tile each.
    pub bytes_in_flight: u64,
    pub threads: usize,
}

/// Smallest even number ≥ `m` of the form 2^a·3^b (sizes the FFT handles fastest).
pub fn fft_friendly_even(m: usize) -> usize {
    let target = m.max(2);
    let mut best = usize::MAX;
    let mut p2 = 2usize;
    while p2 < best {
        let mut v = p2;
        while v < target {
            v *= 3;
        }
        best = best.min(v);
        match p2.checked_mul(2) {
            Some(next) => p2 = next,
            None => break,
        }
    }
    best
}

impl TilingPlan {
    /// Plans the tiles of `footprint` (at the map's NSIDE, any ordering) for a map of
    /// pixelization `map`. Keeps the coarse pixels whose core holds a footprint pixel of
    /// positive weight.
    pub fn new(
        map: Pixelization,
        footprint: &Footprint,
        settings: &TilingSettings,
    ) -> Result<Self> {
        let nside = map.nside();
        if !nside.is_power_of_two() {
            return Err(Error::Geometry(format!(
                "map NSIDE {nside} is not a power of two, which tiling by the NESTED hierarchy needs"
            )));
        }
        let nc = settings.coarse_nside;
        if nc == 0 || !nc.is_power_of_two() || nc > nside {
            return Err(Error::Setting(format!(
                "coarse NSIDE {nc} must be a power of two between 1 and the map NSIDE {nside}"
            )));
        }
        if footprint.pixelization().nside() != nside {
            return Err(Error::Mismatch(format!(
                "mask NSIDE {} does not match map NSIDE {nside}",
                footprint.pixelization().nside()
            )));
        }
        let pixel_size = settings
            .pixel_size
            .unwrap_or(DEFAULT_PIXEL_FRACTION * map.mean_spacing());
        if !(pixel_size.is_finite() && pixel_size > 0.0) {
            return Err(Error::Setting(format!(
                "the tile pixel size must be positive, got {} arcmin",
                pixel_size.to_degrees() * 60.0
            )));
        }
        let coarse = Pixelization::new(nc, Ordering::Nested)?;
        let shift = 2 * (cdshealpix::depth(nside) - cdshealpix::depth(nc)) as u32;

        // Footprint weight and observed count per coarse pixel.
        let ncoarse = coarse.npix() as usize;
        let mut weight = vec![0.0f64; ncoarse];
        let mut count = vec![0u64; ncoarse];
        let fp_pix = footprint.pixelization();
        for (p, &w) in footprint.weights().iter().enumerate() {
            if w > 0.0 {
                let c = (fp_pix.to_nested(p as u64)? >> shift) as usize;
                weight[c] += w;
                count[c] += 1;
            }
        }
        let footprint_weight: f64 = weight.iter().sum();
        if footprint_weight <= 0.0 {
            return Err(Error::Data(
                "the mask is empty (no pixel has positive weight)".to_string(),
            ));
        }
        let core_len = 1u64 << shift;
        let segments = (1u32 << (shift / 2)).clamp(8, 256);
        let depth_coarse = cdshealpix::depth(nc);
        let mut tiles = Vec::new();
        for c in 0..ncoarse {
            if count[c] == 0 {
                continue;
            }
            let center = coarse.center(c as u64);
            let proj = Gnomonic::new(center);
            let mut half = 0.0f64;
            let mut r2max = 0.0f64;
            let path = cdshealpix::nested::path_along_cell_edge(
                depth_coarse,
                c as u64,
                &cdshealpix::compass_point::Cardinal::S,
                false,
                segments,
            );
            for &(lon, lat) in path.iter() {
                let d = Direction::new(FRAC_PI_2 - lat, lon);
                match proj.forward(d) {
                    Some((x, y)) => {
                        half = half.max(x.abs()).max(y.abs());
                        r2max = r2max.max(x * x + y * y);
                    }
                    None => {
                        return Err(Error::Setting(format!(
                        "coarse NSIDE {nc} gives tiles wider than a hemisphere; use a larger one"
                    )))
                    }
                }
            }
            tiles.push(Tile {
                coarse_pixel: c as u64,
                center,
                footprint_fraction: weight[c] / core_len as f64,
                footprint_pixels: count[c],
                core_half_width: half,
                core_distortion: 1.0 + r2max,
            });
        }
        let widest = tiles.iter().map(|t| t.core_half_width).fold(0.0, f64::max);
        let core_half = (widest / pixel_size).ceil();
        let need_half = if core_half < (MAX_TILE_PIXELS / 2) as f64 {
            (core_half as usize).saturating_add(settings.halo)
        } else {
            usize::MAX / 2
        };
        let need = 2 * need_half;
        if need > MAX_TILE_PIXELS {
            return Err(Error::Setting(format!(
                "the core plus a halo of {} pixels needs more than {MAX_TILE_PIXELS} pixels per \
                 tile side at {:.4} arcmin per pixel; use larger pixels, a smaller halo or a \
                 larger coarse NSIDE",
                settings.halo,
                pixel_size.to_degrees() * 60.0
            )));
        }
        let n = match settings.tile_pixels {
            Some(n) => {
                if n == 0 || n % 2 != 0 || n > MAX_TILE_PIXELS {
                    return Err(Error::Setting(format!(
                        "tile pixels must be a positive even number up to {MAX_TILE_PIXELS}, got {n}"
                    )));
                }
                if n < need {
                    return Err(Error::Setting(format!(
                        "tiles of {n} × {n} pixels cannot hold the core plus a halo of {} pixels: \
                         the widest core spans ±{} pixels of {:.4} arcmin, so n must be at least {need}",
                        settings.halo,
                        need_half - settings.halo,
                        pixel_size.to_degrees() * 60.0
                    )));
                }
                n
            }
            None => fft_friendly_even(need),
        };
        let half_width = n as f64 / 2.0 * pixel_size;
        if (half_width * std::f64::consts::SQRT_2).atan() > MAX_CORNER_DISTANCE {
            return Err(Error::Setting(format!(
                "tiles of {n} pixels of {:.4} arcmin reach {:.1}° from their centre at the corners \
                 (at most {:.0}° allowed); use a larger coarse NSIDE or fewer pixels",
                pixel_size.to_degrees() * 60.0,
                (half_width * std::f64::consts::SQRT_2).atan().to_degrees(),
                MAX_CORNER_DISTANCE.to_degrees()
            )));
        }
        Ok(TilingPlan {
            map,
            coarse,
            shift,
            n,
            pixel_size,
            halo: settings.halo,
            tiles,
            footprint_weight,
        })
    }

    /// Pixelization of the map the plan is for.
    pub fn map_pixelization(&self) -> Pixelization {
        self.map
    }

    /// The coarse (NESTED) pixelization of the tile centres.
    pub fn coarse_pixelization(&self) -> Pixelization {
        self.coarse
    }

    /// Plane pixels per side n.
    pub fn tile_pixels(&self) -> usize {
        self.n
    }

    /// Plane pixel size Δ (radians of the tangent plane).
    pub fn pixel_size(&self) -> f64 {
        self.pixel_size
    }

    /// Halo width in plane pixels.
    pub fn halo(&self) -> usize {
        self.halo
    }

    /// The kept tiles, in increasing coarse NESTED index.
    pub fn tiles(&self) -> &[Tile] {
        &self.tiles
    }

    /// Number of kept tiles.
    pub fn len(&self) -> usize {
        self.tiles.len()
    }

    /// Is the plan without tiles? (Never true for a plan built by [`TilingPlan::new`].)
    pub fn is_empty(&self) -> bool {
        self.tiles.is_empty()
    }

    /// Tile `index`, or an error naming the valid range.
    pub fn tile(&self, index: usize) -> Result<&Tile> {
        self.tiles.get(index).ok_or_else(|| {
            Error::Setting(format!(
                "tile {index} does not exist (the plan has {} tiles)",
                self.tiles.len()
            ))
        })
    }

    /// The projection of tile `index`.
    pub fn projection(&self, index: usize) -> Result<Gnomonic> {
        Ok(Gnomonic::new(self.tile(index)?.center))
    }

    /// Fine NESTED indices of the core of tile `index`: c·4^d … (c+1)·4^d − 1.
    pub fn core_nested_range(&self, index: usize) -> Result<Range<u64>> {
        let c = self.tile(index)?.coarse_pixel;
        Ok((c << self.shift)..((c + 1) << self.shift))
    }

    /// Does the fine NESTED pixel `nested` belong to the core of a tile of coarse pixel `coarse`?
    pub fn nested_in_core(&self, nested: u64, coarse: u64) -> bool {
        nested >> self.shift == coarse
    }

    /// Plane coordinate of the centre of grid column (or row) `k`: (k − n/2 + ½)Δ.
    pub fn plane_coordinate(&self, k: usize) -> f64 {
        (k as f64 - self.n as f64 / 2.0 + 0.5) * self.pixel_size
    }

    /// Radial scale distortion sec²ρ = 1 + x² + y² at a grid corner (x = y = nΔ/2).
    pub fn grid_corner_distortion(&self) -> f64 {
        let h = self.n as f64 / 2.0 * self.pixel_size;
        1.0 + 2.0 * h * h
    }

    /// The overall figures; `threads` is the number of workers that will sample at once.
    pub fn summary(&self, threads: usize) -> TilingSummary {
        let pixel_area = self.map.pixel_area();
        let core_area = self.coarse.pixel_area();
        let covered: f64 = self
            .tiles
            .iter()
            .map(|t| t.footprint_fraction * (1u64 << self.shift) as f64)
            .sum::<f64>()
            * pixel_area;
        let bytes = crate::sampling::TileGrids::bytes_for(self.n);
        let deg2 = (180.0 / std::f64::consts::PI).powi(2);
        let footprint_area = self.footprint_weight * pixel_area;
        TilingSummary {
            map_nside: self.map.nside(),
            coarse_nside: self.coarse.nside(),
            tiles: self.tiles.len(),
            tile_pixels: self.n,
            pixel_size_arcmin: self.pixel_size.to_degrees() * 60.0,
            pixel_size_in_map_spacings: self.pixel_size / self.map.mean_spacing(),
            halo_pixels: self.halo,
            tile_width_deg: 2.0 * (self.n as f64 / 2.0 * self.pixel_size).atan().to_degrees(),
            footprint_area_sr: footprint_area,
            footprint_area_deg2: footprint_area * deg2,
            covered_footprint_area_sr: covered,
            core_area_sr: core_area * self.tiles.len() as f64,
            mean_footprint_fraction: self.tiles.iter().map(|t| t.footprint_fraction).sum::<f64>()
                / self.tiles.len().max(1) as f64,
            grid_corner_distortion: self.grid_corner_distortion(),
            worst_core_distortion: self
                .tiles
                .iter()
                .map(|t| t.core_distortion)
                .fold(1.0, f64::max),
            bytes_per_tile: bytes,
            bytes_in_flight: bytes * threads.max(1) as u64,
            threads: threads.max(1),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fft_friendly_sizes_are_smallest_even_two_three_smooth() {
        // 2^a·3^b numbers (common practice for FFT sizes).
        assert_eq!(fft_friendly_even(1), 2);
        assert_eq!(fft_friendly_even(7), 8);
        assert_eq!(fft_friendly_even(100), 108);
        assert_eq!(fft_friendly_even(129), 144);
        assert_eq!(fft_friendly_even(724), 768);
    }
}
