//! The tiling of a footprint by gnomonic tangent-plane tiles.
//!
//! The footprint is cut into *cores* that partition it exactly: every footprint map pixel lies in
//! exactly one core. Each core gets a tile: a square n × n grid of plane pixels of side Δ
//! (radians of the tangent plane, i.e. the angular size at the tangent point), tangent at the
//! core's centre and wide enough for the core plus a halo. A plane pixel belongs to the core of
//! its tile when the map pixel containing its direction does ([`TilingPlan::owner`]), so every
//! sky position is pooled in exactly one tile.
//!
//! Two layouts of cores ([`CellLayout`]):
//! - **latitude bands** (default, [`latitude_bands`]): polar caps and equal-height bands of
//!   HEALPix rings, cut in longitude over the footprint's runs into cells sized to fill the
//!   tile up to the halo, so little of each tile is spent outside its core;
//! - **HEALPix pixels** of a coarse NSIDE (a power of two ≤ the map's): the core is exactly the
//!   fine pixels that descend from the coarse pixel in the NESTED hierarchy (Górski et al. 2005,
//!   §4: the fine nested index shifted right by 2·(depth_fine − depth_coarse) bits is the coarse
//!   nested index). Diamond-shaped cores in square tiles transform about twice the area.
//!
//! Plane pixel (ix, iy) has its centre at x = (ix − n/2 + ½)Δ, y = (iy − n/2 + ½)Δ: the tangent
//! point is the corner shared by the four central pixels; x grows toward increasing longitude and
//! y toward the north (see [`crate::tiles::projection`]). Grids are row-major with one row per y value,
//! row 0 the southernmost.
//!
//! Only the plan (centres, cells, figures) is held; the grids are made on demand, one tile at a
//! time, by [`crate::tiles::sampling::TileSampler`].

pub mod latitude_bands;

use crate::error::{Error, Result};
use crate::sky::footprint::FootprintOf;
use crate::sky::pixelization::{Direction, Ordering, Pixelization};
use crate::tiles::projection::Gnomonic;
use latitude_bands::LatitudeBands;
use std::f64::consts::FRAC_PI_2;

/// Default plane pixel size as a multiple of the map's mean pixel spacing h: 3, so the finest
/// scale's wavelength (8/3)·Δ = 8h is the shortest that ring-cubic (and the default ring-quintic) sampling carries within 2%
/// ([`crate::tiles::sampling::SamplingMethod::trusted_wavelength_map_spacings`]) and every default
/// coefficient is trusted. The map is read on a grid of spacing h and band-limited to the plane
/// grid ([`crate::tiles::sampling::fine_sampling_factor`]), so nothing aliases; finer plane pixels
/// only reach scales the sampling smooths, at 9× the tile pixels.
pub const DEFAULT_PIXEL_FRACTION: f64 = 3.0;

/// Default halo around the core, in plane pixels.
pub const DEFAULT_HALO: usize = 16;

/// Largest angular distance from the tangent point allowed for a grid corner (60°, where the
/// radial stretch sec²ρ reaches 4); beyond, a gnomonic grid is too distorted to be useful.
pub const MAX_CORNER_DISTANCE: f64 = std::f64::consts::FRAC_PI_3;

/// Largest number of plane pixels per tile side accepted (8192: one tile's grids then take
/// 1.6 GiB, see [`sampled_grid_bytes`]).
pub const MAX_TILE_PIXELS: usize = 8192;

/// Bytes held by the sampled grids of one n × n tile (the field, mask and solid-angle f64 grids
/// and the in-core bool grid of [`crate::tiles::sampling::TileGrids`]): the plan's memory cost
/// per tile, n²(3·8 + 1).
pub fn sampled_grid_bytes(n: usize) -> u64 {
    (n * n * (3 * std::mem::size_of::<f64>() + std::mem::size_of::<bool>())) as u64
}

/// Widest tile, in degrees across, that [`automatic_tile_pixels`] picks while a smaller power
/// of two would still leave a core: beyond, the gnomonic distortion sec²ρ at the grid corners
/// passes 1.15.
pub const MAX_AUTOMATIC_TILE_WIDTH_DEG: f64 = 32.0;

/// Largest radial scale distortion sec²ρ = 1 + 2·(nΔ/2)² at a grid corner that the tool's
/// own tile-size choice accepts: 1.53, a tile at most 54.5° across. The evidence: the flat-sky
/// bias of trusted coefficients does not depend on the tile width from 7° to 29°
/// (`examples/sphere_flat_bias.rs`, NSIDE 256), and `compare-flat --nside 64 --tile-pixels
/// 32,64 -J 3` (`examples/pictures/flat_bias_nside64.png`) finds S1 and P at the trusted scale
/// j = 2 within 2σ (±2%) of flat sky on 54.2° tiles (corner sec²ρ = 1.52) as on 28.7° tiles;
/// wider tiles have not been measured. The choice still prefers tiles of at most
/// [`MAX_AUTOMATIC_TILE_WIDTH_DEG`]; when the J scales and their halo need a wider tile than
/// this limit allows, `MeasurementSettings::plan` refuses (an explicit tile size is the user's
/// choice, limited only by [`MAX_CORNER_DISTANCE`]).
pub const MAX_AUTOMATIC_CORNER_DISTORTION: f64 = 1.53;

/// The radial scale distortion sec²ρ = 1 + tan²ρ at the corner of an n × n gnomonic grid of
/// pixel side Δ: tan²ρ = 2·(nΔ/2)² (gnomonic projection, Calabretta & Greisen 2002, A&A 395,
/// 1077, TAN: R = tan ρ).
pub fn corner_distortion(n: usize, pixel_size: f64) -> f64 {
    let t = n as f64 / 2.0 * pixel_size;
    1.0 + 2.0 * t * t
}

/// The smallest tile the tool's choice would use for a halo: the smallest engine size
/// ([`crate::limits::is_tile_size`]) of at least 4 halos (a core at least as wide as both
/// halos together, the floor of [`automatic_tile_pixels`]) and of `min_pixels`.
pub fn smallest_automatic_tile_pixels(halo: usize, min_pixels: usize) -> usize {
    let mut n = (4 * halo).max(min_pixels).max(8);
    while !crate::limits::is_tile_size(n) {
        n += 1;
    }
    n
}

/// How the footprint is cut into tile cores.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum CellLayout {
    /// Latitude bands cut in longitude over the footprint's runs, sized so that each core nearly
    /// fills its tile ([`latitude_bands`]); the default.
    LatitudeBands,
    /// The pixels of a coarse HEALPix grid of this NSIDE (a power of two ≤ the map's): the core
    /// of a tile is its coarse pixel, exactly the fine pixels that descend from it in the NESTED
    /// hierarchy (Górski et al. 2005, §4).
    HealpixPixels { coarse_nside: u32 },
}

impl CellLayout {
    /// A short description, e.g. "latitude bands" or "HEALPix NSIDE 8 pixels".
    pub fn describe(&self) -> String {
        match self {
            CellLayout::LatitudeBands => "latitude bands".to_string(),
            CellLayout::HealpixPixels { coarse_nside } => {
                format!("HEALPix NSIDE {coarse_nside} pixels")
            }
        }
    }
}

/// What the user chooses about a tiling.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TilingSettings {
    /// How the footprint is cut into cores.
    pub cells: CellLayout,
    /// Plane pixels per side n (even); `None`: for latitude bands [`automatic_tile_pixels`], for
    /// HEALPix cells the smallest even 2^a·3^b that holds the largest core plus the halo.
    pub tile_pixels: Option<usize>,
    /// Plane pixel size Δ in radians; `None`: the map's mean pixel spacing (a measurement's
    /// own default, [`DEFAULT_PIXEL_FRACTION`] of it, is set by
    /// [`crate::measure::measurement::MeasurementSettings::pixel_size`]).
    pub pixel_size: Option<f64>,
    /// Halo width in plane pixels kept around the core on every side.
    pub halo: usize,
}

impl TilingSettings {
    /// Latitude-band cells with the default halo, pixel size and tile size.
    pub fn latitude_bands() -> Self {
        TilingSettings {
            cells: CellLayout::LatitudeBands,
            tile_pixels: None,
            pixel_size: None,
            halo: DEFAULT_HALO,
        }
    }

    /// Coarse HEALPix pixels of NSIDE `coarse_nside` as cells, with the defaults for everything
    /// else.
    pub fn healpix_pixels(coarse_nside: u32) -> Self {
        TilingSettings {
            cells: CellLayout::HealpixPixels { coarse_nside },
            ..Self::latitude_bands()
        }
    }
}

/// The tile size chosen when the user leaves it open: the smallest power of two n ≥ 8·halo
/// (so the core, n − 2·halo pixels across, holds at least 56% of the tile's pixels) and ≥
/// `min_pixels`, halved while the tile is wider than [`MAX_AUTOMATIC_TILE_WIDTH_DEG`] and the
/// half still leaves a core of at least 2·halo pixels and `min_pixels`.
///
/// ```
/// use planisphere::tiles::tiling::automatic_tile_pixels;
/// let arcmin = (1.0f64 / 60.0).to_radians();
/// // J = 5 halo (8 + 13 pixels) at 3.44′: 8 · 21 = 168 → 256 pixels, 14.7° across
/// assert_eq!(automatic_tile_pixels(21, 3.435 * arcmin, 64), 256);
/// // at 13.7′ a 256-pixel tile would be 58° wide: halved to 128 (29°)
/// assert_eq!(automatic_tile_pixels(21, 13.74 * arcmin, 64), 128);
/// ```
pub fn automatic_tile_pixels(halo: usize, pixel_size: f64, min_pixels: usize) -> usize {
    let mut n = (8 * halo).max(min_pixels).max(8).next_power_of_two();
    let width = |n: usize| 2.0 * (n as f64 / 2.0 * pixel_size).atan().to_degrees();
    while width(n) > MAX_AUTOMATIC_TILE_WIDTH_DEG
        && n / 2 >= 4 * halo
        && n / 2 >= min_pixels
        && n / 2 >= 8
    {
        n /= 2;
    }
    n
}

/// The tile sizes tried when the user leaves the size open: every size the engine accepts
/// ([`crate::limits::is_tile_size`]: 2^k·m, m = 1, 3, 5, 7, 9) from ¾ to 5⁄4 of
/// [`automatic_tile_pixels`], at least `min_pixels`, and no wider than
/// [`MAX_AUTOMATIC_TILE_WIDTH_DEG`] (the power of two itself is always tried). Which one wastes
/// least depends on how the footprint's edges fall across the tiles, so the plan of each is
/// measured (`MeasurementSettings::plan` keeps the one transforming the fewest tile pixels).
///
/// ```
/// use planisphere::tiles::tiling::automatic_tile_candidates;
/// let arcmin = (1.0f64 / 60.0).to_radians();
/// // J = 5 halo at 3.44′: around 256 pixels
/// assert_eq!(automatic_tile_candidates(21, 3.435 * arcmin, 64), vec![192, 224, 256, 288, 320]);
/// ```
pub fn automatic_tile_candidates(halo: usize, pixel_size: f64, min_pixels: usize) -> Vec<usize> {
    let base = automatic_tile_pixels(halo, pixel_size, min_pixels);
    let width = |n: usize| 2.0 * (n as f64 / 2.0 * pixel_size).atan().to_degrees();
    ((3 * base / 4)..=(5 * base / 4))
        .filter(|&n| crate::limits::is_tile_size(n) && n >= min_pixels)
        .filter(|&n| n == base || width(n) <= MAX_AUTOMATIC_TILE_WIDTH_DEG)
        .collect()
}

/// One tile of a plan.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Tile {
    /// Identifier of the tile's cell: the NESTED index of the coarse pixel for HEALPix cells,
    /// the cell's number in the layout (bands north to south, longitude increasing) for
    /// latitude bands.
    pub cell: u64,
    /// Tangent point: the centre of the cell.
    pub center: Direction,
    /// Σ footprint weights over the core's map pixels / number of core pixels.
    pub footprint_fraction: f64,
    /// Number of core pixels with positive footprint weight.
    pub footprint_pixels: u64,
    /// Number of map pixels in the core.
    pub core_pixels: u64,
    /// Largest |x| or |y| of the core's boundary on the plane, radians of the tangent plane.
    pub core_half_width: f64,
    /// Largest radial scale distortion sec²ρ over the core (at its farthest boundary point).
    pub core_distortion: f64,
}

/// The cells of a plan.
#[derive(Debug, Clone)]
enum Cells {
    Healpix {
        coarse: Pixelization,
        /// 2·(depth_fine − depth_coarse).
        shift: u32,
        /// Tile index of each coarse pixel (u32::MAX: none).
        tile_of_coarse: Vec<u32>,
    },
    Bands(LatitudeBands),
}

/// A tiling plan: which tiles, their grids' geometry and the overall figures.
#[derive(Debug, Clone)]
pub struct TilingPlan {
    map: Pixelization,
    layout: CellLayout,
    cells: Cells,
    n: usize,
    pixel_size: f64,
    halo: usize,
    tiles: Vec<Tile>,
    footprint_weight: f64,
    footprint_pixels: u64,
}

/// The figures a user checks before running a tiling.
#[derive(Debug, Clone, serde::Serialize)]
pub struct TilingSummary {
    pub map_nside: u32,
    /// How the footprint is cut into cores ("latitude bands", "HEALPix NSIDE 8 pixels").
    pub cells: String,
    /// NSIDE of the coarse grid for HEALPix cells, `None` for latitude bands.
    pub coarse_nside: Option<u32>,
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
    /// Map pixels with positive footprint weight.
    pub footprint_pixels: u64,
    /// Footprint area inside the kept tiles' cores (equals the footprint area: every footprint
    /// pixel lies in exactly one kept core).
    pub covered_footprint_area_sr: f64,
    /// Total area of the kept cores (steradians).
    pub core_area_sr: f64,
    /// Mean footprint fraction of the kept cores.
    pub mean_footprint_fraction: f64,
    /// Tile pixels sampled and transformed per footprint map pixel: tiles · n² / footprint
    /// pixels (how often each sky position is worked on, times (h/Δ)²).
    pub tile_pixels_per_footprint_pixel: f64,
    /// Tile area per footprint area: tiles · Ω_tile / footprint pixels · Ω_pix, with Ω_tile the
    /// solid angle of an n × n grid (independent of the plane pixel size).
    pub tile_area_per_footprint_area: f64,
    /// Radial scale distortion sec²ρ at a grid corner (the same for every tile).
    pub grid_corner_distortion: f64,
    /// Largest sec²ρ over all kept cores.
    pub worst_core_distortion: f64,
    /// Bytes of one tile's sampled grids (see [`sampled_grid_bytes`]).
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

/// Checks n (positive, even, at most [`MAX_TILE_PIXELS`]).
fn check_tile_pixels(n: usize) -> Result<()> {
    if n == 0 || !n.is_multiple_of(2) || n > MAX_TILE_PIXELS {
        return Err(Error::Setting(format!(
            "tile pixels must be a positive even number up to {MAX_TILE_PIXELS}, got {n}"
        )));
    }
    Ok(())
}

/// Largest |x| or |y| and largest x² + y² of the outline of coarse NESTED pixel `c` of NSIDE
/// `nc` (sampled with `segments` points a side) in the gnomonic projection about `center`.
fn coarse_cell_extent(center: Direction, nc: u32, c: u64, segments: u32) -> Result<(f64, f64)> {
    let proj = Gnomonic::new(center);
    let mut half = 0.0f64;
    let mut r2max = 0.0f64;
    let path = cdshealpix::nested::path_along_cell_edge(
        cdshealpix::depth(nc),
        c,
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
    Ok((half, r2max))
}

/// Tile side for coarse HEALPix cells: the given size, checked, or the smallest FFT-friendly even
/// size that holds the widest core plus the halo.
fn coarse_tile_pixels(tiles: &[Tile], pixel_size: f64, settings: &TilingSettings) -> Result<usize> {
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
    Ok(match settings.tile_pixels {
        Some(n) => {
            check_tile_pixels(n)?;
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
    })
}

impl TilingPlan {
    /// Plans the tiles of `footprint` (at the map's NSIDE, any ordering) for a map of
    /// pixelization `map`. Keeps the cells that hold a footprint pixel of positive weight.
    pub fn new(
        map: Pixelization,
        footprint: &FootprintOf<'_>,
        settings: &TilingSettings,
    ) -> Result<Self> {
        let nside = map.nside();
        if !nside.is_power_of_two() {
            return Err(Error::Geometry(format!(
                "map NSIDE {nside} is not a power of two, which tiling needs"
            )));
        }
        footprint.check_map_nside(nside)?;
        let pixel_size = settings.pixel_size.unwrap_or(map.mean_spacing());
        if !(pixel_size.is_finite() && pixel_size > 0.0) {
            return Err(Error::Setting(format!(
                "the tile pixel size must be positive, got {} arcmin",
                pixel_size.to_degrees() * 60.0
            )));
        }
        let (footprint_weight, footprint_pixels) = footprint
            .weights()
            .iter()
            .filter(|&&w| w > 0.0)
            .fold((0.0, 0u64), |(s, c), &w| (s + w, c + 1));
        if footprint_weight <= 0.0 {
            return Err(Error::Data(
                "the mask is empty (no pixel has positive weight)".to_string(),
            ));
        }
        let (cells, tiles, n) = match settings.cells {
            CellLayout::HealpixPixels { coarse_nside } => {
                Self::healpix_cells(map, footprint, coarse_nside, pixel_size, settings)?
            }
            CellLayout::LatitudeBands => {
                Self::latitude_band_cells(map, footprint, pixel_size, settings)?
            }
        };
        let half_width = n as f64 / 2.0 * pixel_size;
        if (half_width * std::f64::consts::SQRT_2).atan() > MAX_CORNER_DISTANCE {
            return Err(Error::Setting(format!(
                "tiles of {n} pixels of {:.4} arcmin reach {:.1}° from their centre at the corners \
                 (at most {:.0}° allowed); use fewer or smaller pixels",
                pixel_size.to_degrees() * 60.0,
                (half_width * std::f64::consts::SQRT_2).atan().to_degrees(),
                MAX_CORNER_DISTANCE.to_degrees()
            )));
        }
        Ok(TilingPlan {
            map,
            layout: settings.cells,
            cells,
            n,
            pixel_size,
            halo: settings.halo,
            tiles,
            footprint_weight,
            footprint_pixels,
        })
    }

    /// Cells of the latitude-band layout, their tiles, and the tile size (given, or the
    /// automatic choice).
    fn latitude_band_cells(
        map: Pixelization,
        footprint: &FootprintOf<'_>,
        pixel_size: f64,
        settings: &TilingSettings,
    ) -> Result<(Cells, Vec<Tile>, usize)> {
        let n = match settings.tile_pixels {
            Some(n) => n,
            None => automatic_tile_pixels(settings.halo, pixel_size, 16),
        };
        check_tile_pixels(n)?;
        if n <= 2 * settings.halo {
            return Err(Error::Setting(format!(
                "tiles of {n} × {n} pixels leave no core inside a halo of {} pixels; use \
                 larger tiles or a smaller halo",
                settings.halo
            )));
        }
        let core_half = (n / 2 - settings.halo) as f64 * pixel_size;
        let (layout, cells) = LatitudeBands::new(footprint, core_half, map.mean_spacing())?;
        let tiles = cells
            .iter()
            .enumerate()
            .map(|(i, c)| Tile {
                cell: i as u64,
                center: c.center,
                footprint_fraction: c.footprint_weight / c.pixels.max(1) as f64,
                footprint_pixels: c.footprint_pixels,
                core_pixels: c.pixels,
                core_half_width: c.half_width,
                core_distortion: c.distortion,
            })
            .collect();
        Ok((Cells::Bands(layout), tiles, n))
    }

    /// Cells from the coarse HEALPix pixels holding footprint, and the tile size.
    fn healpix_cells(
        map: Pixelization,
        footprint: &FootprintOf<'_>,
        nc: u32,
        pixel_size: f64,
        settings: &TilingSettings,
    ) -> Result<(Cells, Vec<Tile>, usize)> {
        let nside = map.nside();
        if nc == 0 || !nc.is_power_of_two() || nc > nside {
            return Err(Error::Setting(format!(
                "coarse NSIDE {nc} must be a power of two between 1 and the map NSIDE {nside}"
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
        let core_len = 1u64 << shift;
        let segments = (1u32 << (shift / 2)).clamp(8, 256);
        let mut tiles = Vec::new();
        let mut tile_of_coarse = vec![u32::MAX; ncoarse];
        for c in 0..ncoarse {
            if count[c] == 0 {
                continue;
            }
            let center = coarse.center(c as u64);
            let (half, r2max) = coarse_cell_extent(center, nc, c as u64, segments)?;
            tile_of_coarse[c] = tiles.len() as u32;
            tiles.push(Tile {
                cell: c as u64,
                center,
                footprint_fraction: weight[c] / core_len as f64,
                footprint_pixels: count[c],
                core_pixels: core_len,
                core_half_width: half,
                core_distortion: 1.0 + r2max,
            });
        }
        let n = coarse_tile_pixels(&tiles, pixel_size, settings)?;
        Ok((
            Cells::Healpix {
                coarse,
                shift,
                tile_of_coarse,
            },
            tiles,
            n,
        ))
    }

    /// Pixelization of the map the plan is for.
    pub fn map_pixelization(&self) -> Pixelization {
        self.map
    }

    /// How the footprint was cut into cores.
    pub fn cell_layout(&self) -> CellLayout {
        self.layout
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

    /// The kept tiles, in plan order.
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

    /// The tile whose core holds the map pixel containing `dir`, if any: every direction lies in
    /// at most one core, and every direction of a footprint pixel in exactly one.
    pub fn owner(&self, dir: Direction) -> Option<usize> {
        let (lon, lat) = dir.lonlat();
        let nside = self.map.nside();
        match &self.cells {
            Cells::Healpix {
                shift,
                tile_of_coarse,
                ..
            } => {
                let nested = cdshealpix::nested::get(cdshealpix::depth(nside)).hash(lon, lat);
                let t = *tile_of_coarse.get((nested >> shift) as usize)?;
                (t != u32::MAX).then_some(t as usize)
            }
            Cells::Bands(bands) => {
                bands.owner_of_ring_pixel(cdshealpix::ring::hash(nside, lon, lat))
            }
        }
    }

    /// The map pixels (in the map's ordering) of the core of tile `index`, in increasing NESTED
    /// index (HEALPix cells) or ring by ring (latitude bands).
    pub fn core_pixels(&self, index: usize) -> Result<Vec<u64>> {
        let tile = self.tile(index)?;
        match &self.cells {
            Cells::Healpix { shift, .. } => {
                let c = tile.cell;
                ((c << shift)..((c + 1) << shift))
                    .map(|q| self.map.from_nested(q))
                    .collect()
            }
            Cells::Bands(bands) => {
                let ring = Pixelization::new(self.map.nside(), Ordering::Ring)?;
                bands
                    .core_ring_pixels(index)
                    .into_iter()
                    .map(|p| match self.map.ordering() {
                        Ordering::Ring => Ok(p),
                        Ordering::Nested => ring.to_nested(p),
                    })
                    .collect()
            }
        }
    }

    /// The outlines of tile `index`'s core on the sphere (closed paths, one per cell of the
    /// core, for pictures).
    pub fn core_outlines(&self, index: usize) -> Result<Vec<Vec<Direction>>> {
        let tile = self.tile(index)?;
        match &self.cells {
            Cells::Healpix { coarse, .. } => {
                let depth = cdshealpix::depth(coarse.nside());
                let edge = cdshealpix::nested::path_along_cell_edge(
                    depth,
                    tile.cell,
                    &cdshealpix::compass_point::Cardinal::S,
                    false,
                    16,
                );
                let mut core: Vec<Direction> = edge
                    .iter()
                    .map(|&(lon, lat)| Direction::new(FRAC_PI_2 - lat, lon))
                    .collect();
                if let Some(&first) = core.first() {
                    core.push(first);
                }
                Ok(vec![core])
            }
            Cells::Bands(bands) => Ok(bands.outlines(index)),
        }
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
        let covered: f64 = self
            .tiles
            .iter()
            .map(|t| t.footprint_fraction * t.core_pixels as f64)
            .sum::<f64>()
            * pixel_area;
        let core_area = self.tiles.iter().map(|t| t.core_pixels).sum::<u64>() as f64 * pixel_area;
        let bytes = sampled_grid_bytes(self.n);
        let deg2 = (180.0 / std::f64::consts::PI).powi(2);
        let footprint_area = self.footprint_weight * pixel_area;
        let half = self.n as f64 / 2.0 * self.pixel_size;
        let tile_solid_angle =
            crate::tiles::projection::rectangle_solid_angle(-half, half, -half, half);
        let tile_pixels = (self.tiles.len() * self.n * self.n) as f64;
        let fp_pixels = self.footprint_pixels.max(1) as f64;
        TilingSummary {
            map_nside: self.map.nside(),
            cells: self.layout.describe(),
            coarse_nside: match self.layout {
                CellLayout::HealpixPixels { coarse_nside } => Some(coarse_nside),
                CellLayout::LatitudeBands => None,
            },
            tiles: self.tiles.len(),
            tile_pixels: self.n,
            pixel_size_arcmin: self.pixel_size.to_degrees() * 60.0,
            pixel_size_in_map_spacings: self.pixel_size / self.map.mean_spacing(),
            halo_pixels: self.halo,
            tile_width_deg: 2.0 * (self.n as f64 / 2.0 * self.pixel_size).atan().to_degrees(),
            footprint_area_sr: footprint_area,
            footprint_area_deg2: footprint_area * deg2,
            footprint_pixels: self.footprint_pixels,
            covered_footprint_area_sr: covered,
            core_area_sr: core_area,
            mean_footprint_fraction: self.tiles.iter().map(|t| t.footprint_fraction).sum::<f64>()
                / self.tiles.len().max(1) as f64,
            tile_pixels_per_footprint_pixel: tile_pixels / fp_pixels,
            tile_area_per_footprint_area: self.tiles.len() as f64 * tile_solid_angle
                / (fp_pixels * pixel_area),
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
