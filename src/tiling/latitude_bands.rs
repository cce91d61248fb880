//! Latitude-band cells: an exact partition of the footprint into cores that nearly fill their
//! tiles.
//!
//! The sphere is cut into two polar caps of colatitude radius R and nb bands of equal height H
//! between them; a HEALPix ring belongs to the band that holds its colatitude, so every map pixel
//! lies in exactly one band (Górski et al. 2005, §4: all pixel centres of a ring share one
//! colatitude). A cap is one cell (a disc of radius R around the pole). A band is cut in
//! longitude into cells of equal width, but only over the longitude runs where the footprint
//! lies: the footprint pixels of the band are binned in longitude, runs of occupied bins closer
//! than half a cell are merged, and each run is split into ⌈length / w_max⌉ equal cells. A map
//! pixel belongs to the cell whose longitude range holds its centre; pixels of a band outside
//! every run (never footprint pixels) belong to no cell. Cells holding no footprint pixel are
//! dropped.
//!
//! Sizes follow from the tile: a cell must fit, in the gnomonic projection about its centre, in
//! the square |x|, |y| ≤ c = (n/2 − halo)·Δ left by the halo, with a margin m of one map spacing
//! all round (plane pixels read the map pixel containing them, whose centre may be up to about
//! one spacing outside the cell). A shift by m on the sphere moves a point by at most
//! m·sec²ρ ≤ m(1 + 2c²) on the plane inside the square (radial scale of the gnomonic projection,
//! Snyder 1987, §22), so the ungrown cell must fit in c' = c − m(1 + 2c²). Hence the caps have
//! R = 0.995·atan c', the bands cover the footprint's colatitudes (from its northernmost to its
//! southernmost ring, or from a cap's edge) in nb bands of equal height H, nb the smallest count
//! with H ≤ 0.96 · 2 atan c' (the 4% left absorb the curvature of the parallels), and w_max per
//! band is the widest longitude range whose cell still fits, found by bisection on the projected
//! outline. Meridians and the cap edge are straight lines or a circle
//! in the gnomonic plane, parallels are conics; the outline is sampled at 24 points per side.
//!
//! Because cells follow the footprint and are nearly square in the tile frame, the plane pixels
//! transformed per footprint pixel approach (n / (n − 2·halo))² instead of the factor of about
//! two of a diamond-shaped core plus its surrounding square.

use crate::error::{Error, Result};
use crate::footprint::Footprint;
use crate::pixelization::{
    ring_and_position, ring_info, ring_pixel_phi, ring_theta, Direction, Ordering, Pixelization,
};
use crate::projection::Gnomonic;
use std::f64::consts::{PI, TAU};

/// Points sampled along each side of a cell's outline when fitting it into its tile.
const OUTLINE_SAMPLES: usize = 24;

/// Fraction of the largest fitting height given to a band (the rest absorbs the curvature of
/// its parallels at the cell corners).
const BAND_HEIGHT_FILL: f64 = 0.96;

/// One band of rings and its cells.
#[derive(Debug, Clone)]
struct Band {
    /// First and last ring (inclusive, HEALPix ring numbers).
    rings: (u64, u64),
    /// Colatitudes of the band's northern and southern edges.
    theta: (f64, f64),
    /// Colatitude of the tangent points of the band's cells.
    theta_center: f64,
    /// Cells in increasing longitude: cell k spans [start_k, end_k); starts lie in
    /// [starts[0], starts[0] + 2π).
    starts: Vec<f64>,
    ends: Vec<f64>,
    /// Tile index of each cell (None: the cell holds no footprint pixel and is dropped).
    tiles: Vec<Option<usize>>,
    /// Is the band a polar cap (one cell, tangent at the pole)?
    cap: bool,
}

impl Band {
    /// The cell holding longitude φ ∈ [0, 2π), if any.
    fn cell_of(&self, phi: f64) -> Option<usize> {
        if self.cap {
            return Some(0);
        }
        let first = *self.starts.first()?;
        let p = if phi < first { phi + TAU } else { phi };
        let k = self.starts.partition_point(|&s| s <= p).checked_sub(1)?;
        (p < self.ends[k]).then_some(k)
    }
}

/// A cell of the layout, as seen by the plan.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct BandCell {
    pub center: Direction,
    pub footprint_weight: f64,
    pub footprint_pixels: u64,
    pub pixels: u64,
    pub half_width: f64,
    pub distortion: f64,
}

/// The latitude-band layout of one footprint.
#[derive(Debug, Clone)]
pub(crate) struct LatitudeBands {
    nside: u64,
    bands: Vec<Band>,
    /// Band of each ring (index ring − 1).
    band_of_ring: Vec<usize>,
    /// (band, cell) of each tile.
    tile_cells: Vec<(usize, usize)>,
}

/// Largest |x| or |y| and largest x² + y² of the outline of the region θ ∈ [t0, t1],
/// φ ∈ [p0, p1] (p0 < p1, relative to the tangent point's longitude) in the gnomonic projection
/// about `proj`; `None` when part of it is a hemisphere away.
fn outline_extent(proj: &Gnomonic, t0: f64, t1: f64, p0: f64, p1: f64) -> Option<(f64, f64)> {
    let phi0 = proj.center().phi;
    let mut half = 0.0f64;
    let mut r2 = 0.0f64;
    let k = OUTLINE_SAMPLES;
    for s in 0..=k {
        let u = s as f64 / k as f64;
        let theta = t0 + (t1 - t0) * u;
        let phi = p0 + (p1 - p0) * u;
        for (t, p) in [(theta, p0), (theta, p1), (t0, phi), (t1, phi)] {
            let (x, y) = proj.forward(Direction::new(t.clamp(0.0, PI), phi0 + p))?;
            half = half.max(x.abs()).max(y.abs());
            r2 = r2.max(x * x + y * y);
        }
    }
    Some((half, r2))
}

impl LatitudeBands {
    /// Lays out the cells of `footprint` (a map of NSIDE `nside`) for tiles whose cores must fit
    /// in |x|, |y| ≤ `core_half` (radians of the tangent plane), with a margin of `margin`
    /// radians all round. Returns the layout and its cells, one per tile, in tile order (bands
    /// from north to south, cells in increasing longitude).
    pub(crate) fn new(
        footprint: &Footprint,
        core_half: f64,
        margin: f64,
    ) -> Result<(Self, Vec<BandCell>)> {
        let fp_pix = footprint.pixelization();
        let nside = fp_pix.nside() as u64;
        // Room for the ungrown cell: moving a point by m on the sphere moves it by at most
        // m·sec²ρ ≤ m(1 + 2c²) on the plane within the square (radial scale, Snyder 1987, §22).
        let room = core_half - margin * (1.0 + 2.0 * core_half * core_half);
        if room.is_nan() || room <= 0.0 {
            return Err(Error::Setting(format!(
                "the tile leaves no room for a core: its core half-width of {:.4}° is below the \
                 margin of one map spacing ({:.4}°); use larger tiles or a smaller halo",
                core_half.atan().to_degrees(),
                margin.to_degrees()
            )));
        }
        let reach = room.atan();
        // The footprint's extent in colatitude, by rings.
        let to_ring = |p: u64| -> Result<u64> {
            match fp_pix.ordering() {
                Ordering::Ring => Ok(p),
                Ordering::Nested => fp_pix.to_ring(p),
            }
        };
        let mut ring_range = (u64::MAX, 0u64);
        for (p, &w) in footprint.weights().iter().enumerate() {
            if w > 0.0 {
                let (i, _) = ring_and_position(nside, to_ring(p as u64)?);
                ring_range = (ring_range.0.min(i), ring_range.1.max(i));
            }
        }
        if ring_range.0 > ring_range.1 {
            return Err(Error::Data(
                "the mask is empty (no pixel has positive weight)".into(),
            ));
        }
        // Band edges: equal bands over the footprint's colatitudes, replaced near a pole by a
        // cap of radius R when the footprint reaches it.
        let cap_radius = (0.995 * reach).min(PI / 2.0);
        let north = ring_theta(nside, ring_range.0) - 0.5 * margin;
        let south = ring_theta(nside, ring_range.1) + 0.5 * margin;
        let top = if north < cap_radius {
            cap_radius
        } else {
            north
        };
        let bottom = if south > PI - cap_radius {
            PI - cap_radius
        } else {
            south
        };
        let middle = (bottom - top).max(0.0);
        let band_count = if middle > 0.0 {
            (middle / (BAND_HEIGHT_FILL * 2.0 * reach)).ceil().max(1.0) as usize
        } else {
            0
        };
        let mut edges = vec![0.0, top];
        for b in 1..=band_count {
            edges.push(top + middle * b as f64 / band_count as f64);
        }
        edges.push(PI);
        let north_cap = north < cap_radius;
        let south_cap = south > PI - cap_radius;
        // Rings to bands (a band without rings is skipped).
        let ring_count = 4 * nside - 1;
        let mut bands: Vec<Band> = Vec::new();
        let mut band_of_ring = Vec::with_capacity(ring_count as usize);
        let slots = edges.len() - 1;
        let mut slot_band: Vec<Option<usize>> = vec![None; slots];
        for i in 1..=ring_count {
            let theta = ring_theta(nside, i);
            let slot = edges[1..].partition_point(|&e| e <= theta).min(slots - 1);
            let b = match slot_band[slot] {
                Some(b) => b,
                None => {
                    let cap = (slot == 0 && north_cap) || (slot == slots - 1 && south_cap);
                    let (t0, t1) = (edges[slot], edges[slot + 1]);
                    bands.push(Band {
                        rings: (i, i),
                        theta: (t0, t1),
                        theta_center: if cap && slot == 0 {
                            0.0
                        } else if cap {
                            PI
                        } else {
                            0.5 * (t0 + t1)
                        },
                        starts: Vec::new(),
                        ends: Vec::new(),
                        tiles: Vec::new(),
                        cap,
                    });
                    slot_band[slot] = Some(bands.len() - 1);
                    bands.len() - 1
                }
            };
            bands[b].rings.1 = i;
            band_of_ring.push(b);
        }
        // Footprint longitudes per band, binned (bins of one equatorial pixel width).
        let bin_count = (4 * nside as usize).max(64);
        let mut occupied: Vec<Vec<bool>> = vec![vec![false; bin_count]; bands.len()];
        let ring_pix = Pixelization::new(nside as u32, Ordering::Ring)?;
        let nb = bin_count as f64;
        for (p, &w) in footprint.weights().iter().enumerate() {
            if w <= 0.0 {
                continue;
            }
            let (i, j) = ring_and_position(nside, to_ring(p as u64)?);
            let b = band_of_ring[(i - 1) as usize];
            if bands[b].cap {
                occupied[b][0] = true;
                continue;
            }
            let phi = ring_pixel_phi(nside, i, j);
            let theta = ring_theta(nside, i);
            let spread = (2.0 * margin / theta.sin().max(1e-9)).min(PI);
            let lo = ((phi - spread) / TAU * nb).floor() as i64;
            let hi = ((phi + spread) / TAU * nb).floor() as i64;
            for k in lo..=hi {
                occupied[b][k.rem_euclid(bin_count as i64) as usize] = true;
            }
        }
        // The widest cell of every band holding footprint.
        let mut widths = vec![0.0; bands.len()];
        for (b, band) in bands.iter().enumerate() {
            if occupied[b].iter().any(|&o| o) {
                widths[b] = Self::widest_cell(band, room)?;
            }
        }
        // Cells of every band.
        for (b, band) in bands.iter_mut().enumerate() {
            if !occupied[b].iter().any(|&o| o) {
                continue;
            }
            if band.cap {
                if occupied[b][0] {
                    band.starts = vec![0.0];
                    band.ends = vec![TAU];
                }
                continue;
            }
            let (starts, ends) = Self::cells_over_runs(&occupied[b], widths[b]);
            band.starts = starts;
            band.ends = ends;
        }
        // Count pixels and footprint weight per cell.
        let mut weight: Vec<Vec<f64>> = bands.iter().map(|b| vec![0.0; b.starts.len()]).collect();
        let mut count: Vec<Vec<u64>> = bands.iter().map(|b| vec![0; b.starts.len()]).collect();
        let mut pixels: Vec<Vec<u64>> = bands.iter().map(|b| vec![0; b.starts.len()]).collect();
        for (b, band) in bands.iter().enumerate() {
            if band.starts.is_empty() {
                continue;
            }
            for i in band.rings.0..=band.rings.1 {
                let (first, len, _) = ring_info(nside, i);
                for j in 0..len {
                    if let Some(k) = band.cell_of(ring_pixel_phi(nside, i, j)) {
                        pixels[b][k] += 1;
                        let p = first + j;
                        let q = match fp_pix.ordering() {
                            Ordering::Ring => p,
                            Ordering::Nested => fp_pix.from_nested(ring_pix.to_nested(p)?)?,
                        };
                        let w = footprint.weight(q);
                        if w > 0.0 {
                            weight[b][k] += w;
                            count[b][k] += 1;
                        }
                    }
                }
            }
        }
        // Tiles: cells with footprint, in band order then longitude.
        let mut cells = Vec::new();
        let mut tile_cells = Vec::new();
        for (b, band) in bands.iter_mut().enumerate() {
            band.tiles = vec![None; band.starts.len()];
            for k in 0..band.starts.len() {
                if count[b][k] == 0 {
                    continue;
                }
                let (phi_c, p0, p1) = if band.cap {
                    (0.0, -PI, PI)
                } else {
                    let half = 0.5 * (band.ends[k] - band.starts[k]);
                    (band.starts[k] + half, -half, half)
                };
                let center = Direction::new(band.theta_center, phi_c.rem_euclid(TAU));
                let proj = Gnomonic::new(center);
                let (t0, t1) = band.theta;
                let (half_width, r2) = outline_extent(&proj, t0, t1, p0, p1).ok_or_else(|| {
                    Error::Geometry("a cell reaches a hemisphere from its centre".into())
                })?;
                band.tiles[k] = Some(cells.len());
                tile_cells.push((b, k));
                cells.push(BandCell {
                    center,
                    footprint_weight: weight[b][k],
                    footprint_pixels: count[b][k],
                    pixels: pixels[b][k],
                    half_width,
                    distortion: 1.0 + r2,
                });
            }
        }
        Ok((
            LatitudeBands {
                nside,
                bands,
                band_of_ring,
                tile_cells,
            },
            cells,
        ))
    }

    /// The widest longitude range (radians) of a cell of `band` that fits in |x|, |y| ≤ `room`
    /// about its centre (2π for a cap that fits).
    fn widest_cell(band: &Band, room: f64) -> Result<f64> {
        let (t0, t1) = band.theta;
        let center = Direction::new(band.theta_center, 0.0);
        let proj = Gnomonic::new(center);
        let fits = |w: f64| -> bool {
            let half = (0.5 * w).min(PI - 1e-9);
            outline_extent(&proj, t0, t1, -half, half).is_some_and(|(h, _)| h <= room)
        };
        if band.cap {
            return if fits(TAU) {
                Ok(TAU)
            } else {
                Err(Error::Geometry(format!(
                    "the polar cap of {:.3}° does not fit its tile",
                    (t1 - t0).to_degrees()
                )))
            };
        }
        let tiny = 1e-6;
        if !fits(tiny) {
            return Err(Error::Geometry(format!(
                "a band of {:.3}° at colatitude {:.2}° does not fit its tile",
                (t1 - t0).to_degrees(),
                band.theta_center.to_degrees()
            )));
        }
        let (mut lo, mut hi) = (tiny, PI);
        if fits(hi) {
            return Ok(hi);
        }
        for _ in 0..50 {
            let mid = 0.5 * (lo + hi);
            if fits(mid) {
                lo = mid;
            } else {
                hi = mid;
            }
        }
        Ok(lo)
    }

    /// Cells over the runs of occupied longitude bins (circular), each run split into equal cells
    /// no wider than `widest`; runs closer than half a cell are merged. Returns (starts, ends)
    /// sorted by start, starts in [starts[0], starts[0] + 2π).
    fn cells_over_runs(occupied: &[bool], widest: f64) -> (Vec<f64>, Vec<f64>) {
        let nb = occupied.len();
        let bw = TAU / nb as f64;
        if occupied.iter().all(|&o| !o) {
            return (Vec::new(), Vec::new());
        }
        // Runs as (first bin, bin count), found from a free bin so none wraps.
        let mut runs: Vec<(usize, usize)> = Vec::new();
        match occupied.iter().position(|&o| !o) {
            None => runs.push((0, nb)),
            Some(free) => {
                let mut k = 0;
                while k < nb {
                    let b = (free + k) % nb;
                    if occupied[b] {
                        let start = b;
                        let mut len = 0;
                        while k < nb && occupied[(free + k) % nb] {
                            len += 1;
                            k += 1;
                        }
                        runs.push((start, len));
                    } else {
                        k += 1;
                    }
                }
            }
        }
        // Merge runs separated by gaps narrower than half a cell (circularly).
        let merge_gap = ((0.5 * widest) / bw).floor() as usize;
        let mut merged: Vec<(usize, usize)> = Vec::new();
        for &(s, l) in &runs {
            if let Some(last) = merged.last_mut() {
                let end = last.0 + last.1;
                let gap = (s + nb - end % nb) % nb;
                if gap <= merge_gap {
                    last.1 += gap + l;
                    continue;
                }
            }
            merged.push((s, l));
        }
        if merged.len() > 1 {
            let (s0, _) = merged[0];
            let last = merged[merged.len() - 1];
            let gap = (s0 + nb - (last.0 + last.1) % nb) % nb;
            if gap <= merge_gap {
                let first = merged.remove(0);
                if let Some(l) = merged.last_mut() {
                    l.1 += gap + first.1;
                }
            }
        }
        let mut cells: Vec<(f64, f64)> = Vec::new();
        for (s, l) in merged {
            let len = (l.min(nb)) as f64 * bw;
            let start = s as f64 * bw;
            let k = (len / widest).ceil().max(1.0) as usize;
            let w = len / k as f64;
            for t in 0..k {
                cells.push((start + t as f64 * w, start + (t + 1) as f64 * w));
            }
        }
        // Sort by start, taken into [first, first + 2π).
        for c in cells.iter_mut() {
            let shift = (c.0 / TAU).floor() * TAU;
            c.0 -= shift;
            c.1 -= shift;
        }
        cells.sort_by(|a, b| a.0.total_cmp(&b.0));
        let starts = cells.iter().map(|c| c.0).collect();
        let ends = cells.iter().map(|c| c.1).collect();
        (starts, ends)
    }

    /// Tile index owning RING pixel `p`, if any.
    pub(crate) fn owner_of_ring_pixel(&self, p: u64) -> Option<usize> {
        let (i, j) = ring_and_position(self.nside, p);
        let band = &self.bands[*self.band_of_ring.get((i - 1) as usize)?];
        let k = band.cell_of(ring_pixel_phi(self.nside, i, j))?;
        band.tiles.get(k).copied().flatten()
    }

    /// RING indices of the pixels of tile `tile`'s core.
    pub(crate) fn core_ring_pixels(&self, tile: usize) -> Vec<u64> {
        let Some(&(b, k)) = self.tile_cells.get(tile) else {
            return Vec::new();
        };
        let band = &self.bands[b];
        let mut out = Vec::new();
        for i in band.rings.0..=band.rings.1 {
            let (first, len, _) = ring_info(self.nside, i);
            for j in 0..len {
                if band.cell_of(ring_pixel_phi(self.nside, i, j)) == Some(k) {
                    out.push(first + j);
                }
            }
        }
        out
    }

    /// The outline of tile `tile`'s cell on the sphere, closed.
    pub(crate) fn outline(&self, tile: usize) -> Vec<Direction> {
        let Some(&(b, k)) = self.tile_cells.get(tile) else {
            return Vec::new();
        };
        let band = &self.bands[b];
        let (t0, t1) = band.theta;
        let steps = 32;
        if band.cap {
            let t = if band.theta_center == 0.0 { t1 } else { t0 };
            return (0..=steps)
                .map(|s| Direction::new(t, TAU * s as f64 / steps as f64))
                .collect();
        }
        let (p0, p1) = (band.starts[k], band.ends[k]);
        let mut out = Vec::new();
        for s in 0..steps {
            out.push(Direction::new(t0, p0 + (p1 - p0) * s as f64 / steps as f64));
        }
        for s in 0..steps {
            out.push(Direction::new(t0 + (t1 - t0) * s as f64 / steps as f64, p1));
        }
        for s in 0..steps {
            out.push(Direction::new(t1, p1 - (p1 - p0) * s as f64 / steps as f64));
        }
        for s in 0..=steps {
            out.push(Direction::new(t1 - (t1 - t0) * s as f64 / steps as f64, p0));
        }
        out.iter_mut().for_each(|d| d.phi = d.phi.rem_euclid(TAU));
        out
    }
}
