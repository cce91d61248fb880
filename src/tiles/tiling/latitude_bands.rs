//! Latitude-band cells: an exact partition of the footprint into cores that nearly fill their
//! tiles.
//!
//! The sphere is cut into two polar caps of colatitude radius R and bands of HEALPix rings
//! between them; a ring belongs to the band that holds its colatitude, so every map pixel lies
//! in exactly one band (Górski et al. 2005, §4: all pixel centres of a ring share one
//! colatitude). A cap is one cell (a disc of radius R around the pole). Bands cover only the
//! footprint's colatitude spans (runs of rings holding footprint): each span gets the fewest
//! bands of equal height H that fit, and two spans share their bands when that takes no more
//! bands than laying them out apart, so a wide gap such as a galactic-plane cut gets no band.
//!
//! A band is cut in longitude along its footprint. Its footprint pixel centres are binned in
//! longitude (4·NSIDE bins of one equatorial pixel), each bin keeping the colatitude range of
//! its centres (a "column"). Starting after a bin without footprint, each cell takes the
//! longest stretch of bins whose columns fit, in the gnomonic projection about the centre of
//! their colatitude and longitude range, in the square left by the halo (below); bins without
//! footprint are free, so a cell may span a gap. Greedy covering gives the fewest cells of a
//! band when a stretch that fits also fits when shortened, as it does here up to the choice of
//! tangent point. A map pixel belongs to the cell of its longitude bin (found by the same
//! arithmetic that binned the footprint, so a centre on a bin edge lands in the cell fitted
//! around it); pixels of bins outside every cell are never footprint pixels and belong to no
//! cell. Finally, cells are taken from the fewest footprint pixels up and each joins the
//! nearest tile whose columns and its own still fit one square together (caps excepted): a
//! tile may then own a few cells.
//!
//! Sizes follow from the tile: the footprint pixel centres of a core must fit, in the gnomonic
//! projection about its tangent point, in the square |x|, |y| ≤ c = (n/2 − halo)·Δ left by the
//! halo, with a margin m of one map spacing all round (plane pixels read the map pixel
//! containing them, whose centre may be up to about one spacing away). A shift by m on the
//! sphere moves a point by at most m·sec²ρ ≤ m(1 + 2c²) on the plane inside the square (radial
//! scale of the gnomonic projection, Snyder 1987, §22), so the centres must fit in
//! c' = c − m(1 + 2c²). Hence the caps have R = 0.995·atan c' and the bands H ≤ 0.96 ·
//! 2 atan c' (the 4% left let a full-height cell still grow in longitude). Meridians are
//! straight lines in the gnomonic plane and parallels conics; a column's outline is checked at
//! its corners and the middle of its top and bottom (a bin is one equatorial pixel wide).
//!
//! Because cells follow the footprint and nearly fill their squares, the plane pixels
//! transformed per footprint pixel approach (n / (n − 2·halo))² instead of the factor of about
//! two of a diamond-shaped core plus its surrounding square.

use crate::error::{Error, Result};
use crate::sky::footprint::{FootprintOf, Weights};
use crate::sky::pixelization::{
    ring_and_position, ring_info, ring_pixel_phi, ring_theta, Direction, Ordering, Pixelization,
};
use crate::tiles::projection::Gnomonic;
use std::f64::consts::{PI, TAU};

/// Points sampled along each side of a cell's outline when fitting it into its tile.
const OUTLINE_SAMPLES: usize = 24;

/// Fraction of the largest fitting height given to a band (the rest absorbs the curvature of
/// its parallels at the cell corners).
const BAND_HEIGHT_FILL: f64 = 0.96;

/// A tile of merged cells: its (band, cell) members, tangent point, largest |x| or |y| and
/// largest x² + y² of its footprint.
type MergedTile = (Vec<(usize, usize)>, Direction, f64, f64);

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
    /// Tangent point of each cell (for a cap, the pole).
    centers: Vec<Direction>,
    /// Largest |x| or |y| and largest x² + y² of each cell's footprint in its tile's plane
    /// (radians).
    reach: Vec<(f64, f64)>,
    /// Footprint columns of each cell: [θ_min, θ_max, φ_0, φ_1] of the footprint pixel centres
    /// in each longitude bin (φ unwrapped within the cell; empty for a cap).
    columns: Vec<Vec<[f64; 4]>>,
    /// Cell of each longitude bin (empty for a cap or a band without cells).
    bin_cell: Vec<Option<u32>>,
    /// Is the band a polar cap (one cell, tangent at the pole)?
    cap: bool,
}

impl Band {
    /// The cell holding longitude φ ∈ [0, 2π), if any.
    /// The longitude bin is found by the same arithmetic that binned the footprint, so a pixel
    /// centre on a bin edge lands in the cell that was fitted around it.
    fn cell_of(&self, phi: f64) -> Option<usize> {
        if self.cap {
            return Some(0);
        }
        let nb = self.bin_cell.len();
        if nb == 0 {
            return None;
        }
        // (φ ≥ 0: truncation is the floor)
        let k = ((phi / TAU * nb as f64) as usize).min(nb - 1);
        self.bin_cell[k].map(|c| c as usize)
    }

    /// Stretches of longitude bins that belong to one cell: (first bin, end bin, cell); none
    /// for a cap.
    fn cell_stretches(&self) -> Vec<(usize, usize, usize)> {
        let mut stretches: Vec<(usize, usize, usize)> = Vec::new();
        if !self.cap {
            for (k, c) in self.bin_cell.iter().enumerate() {
                match (c, stretches.last_mut()) {
                    (Some(c), Some(last)) if last.1 == k && last.2 == *c as usize => last.1 = k + 1,
                    (Some(c), _) => stretches.push((k, k + 1, *c as usize)),
                    (None, _) => {}
                }
            }
        }
        stretches
    }

    /// The number of positions of ring `i` (of `len` pixels) whose longitude bin is below `k`.
    /// The bin of pixel j (the arithmetic of [`Band::cell_of`]) does not decrease with j, so the
    /// pixels of a stretch of bins are one range of positions, found by bisection.
    fn ring_positions_below(&self, nside: u64, i: u64, len: u64, k: usize) -> u64 {
        let nb = self.bin_cell.len();
        let bin_of =
            |j: u64| ((ring_pixel_phi(nside, i, j) / TAU * nb as f64) as usize).min(nb - 1);
        let (mut lo, mut hi) = (0u64, len);
        while lo < hi {
            let mid = lo + (hi - lo) / 2;
            if bin_of(mid) < k {
                lo = mid + 1;
            } else {
                hi = mid;
            }
        }
        lo
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
    /// (band, cell) of the cells of each tile.
    tile_cells: Vec<Vec<(usize, usize)>>,
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

/// The half-width left for the ungrown footprint of a core of half-width `core_half` with a
/// margin `margin` (radians of the tangent plane): moving a point by m on the sphere moves it by
/// at most m·sec²ρ ≤ m(1 + 2c²) on the plane within the square (radial scale, Snyder 1987, §22).
fn core_room(core_half: f64, margin: f64) -> Result<f64> {
    let room = core_half - margin * (1.0 + 2.0 * core_half * core_half);
    if room.is_nan() || room <= 0.0 {
        return Err(Error::Setting(format!(
            "the tile leaves no room for a core: its core half-width of {:.4}° is below the \
             margin of one map spacing ({:.4}°); use larger tiles or a smaller halo",
            core_half.atan().to_degrees(),
            margin.to_degrees()
        )));
    }
    Ok(room)
}

/// The footprint ring by ring: its weights read in RING order and its runs of pixels.
struct RingFootprint<'a> {
    nside: u64,
    pixelization: Pixelization,
    ring_pixelization: Pixelization,
    weights: Weights<'a>,
    /// Runs of footprint pixels (positive weight) along every ring (index ring − 1):
    /// half-open position ranges [j0, j1), in increasing j. The loops visit footprint pixels
    /// through them.
    runs: Vec<Vec<(u64, u64)>>,
}

/// Footprint weight, footprint pixel count and pixel count of every cell of every band.
struct CellSums {
    weight: Vec<Vec<f64>>,
    count: Vec<Vec<u64>>,
    pixels: Vec<Vec<u64>>,
}

impl<'a> RingFootprint<'a> {
    fn new(footprint: &'a FootprintOf<'_>) -> Result<Self> {
        let pixelization = footprint.pixelization();
        let nside = pixelization.nside() as u64;
        let mut rings = RingFootprint {
            nside,
            pixelization,
            ring_pixelization: Pixelization::new(nside as u32, Ordering::Ring)?,
            weights: footprint.weights(),
            runs: Vec::new(),
        };
        let mut runs: Vec<Vec<(u64, u64)>> = Vec::with_capacity(rings.ring_count() as usize);
        for i in 1..=rings.ring_count() {
            let (first, len, _) = ring_info(nside, i);
            let mut ring_runs = Vec::new();
            let mut j = 0;
            while j < len {
                if rings.weight_at(first + j)? > 0.0 {
                    let start = j;
                    while j < len && rings.weight_at(first + j)? > 0.0 {
                        j += 1;
                    }
                    ring_runs.push((start, j));
                } else {
                    j += 1;
                }
            }
            runs.push(ring_runs);
        }
        rings.runs = runs;
        Ok(rings)
    }

    fn ring_count(&self) -> u64 {
        4 * self.nside - 1
    }

    /// Weight of the footprint at RING pixel p.
    fn weight_at(&self, p: u64) -> Result<f64> {
        Ok(match self.pixelization.ordering() {
            Ordering::Ring => self.weights[p as usize],
            Ordering::Nested => {
                self.weights[self
                    .pixelization
                    .from_nested(self.ring_pixelization.to_nested(p)?)?
                    as usize]
            }
        })
    }

    /// Does ring `i` hold footprint?
    fn occupied(&self, i: u64) -> bool {
        !self.runs[(i - 1) as usize].is_empty()
    }

    /// The footprint's colatitude spans: runs of rings holding footprint, each grown by half
    /// the margin.
    fn colatitude_spans(&self, margin: f64) -> Vec<(f64, f64)> {
        let ring_occupied: Vec<bool> = self.runs.iter().map(|r| !r.is_empty()).collect();
        let mut spans: Vec<(f64, f64)> = Vec::new();
        let mut i = 0usize;
        while i < ring_occupied.len() {
            if !ring_occupied[i] {
                i += 1;
                continue;
            }
            let first = i;
            while i < ring_occupied.len() && ring_occupied[i] {
                i += 1;
            }
            spans.push((
                ring_theta(self.nside, first as u64 + 1) - 0.5 * margin,
                ring_theta(self.nside, i as u64) + 0.5 * margin,
            ));
        }
        spans
    }

    /// Footprint pixel centres per band, binned in longitude (bins of one equatorial pixel
    /// width): the colatitude range of the footprint pixels whose centre lies in each bin (empty
    /// for a band without footprint or a cap), and whether each cap holds footprint.
    #[allow(clippy::type_complexity)]
    fn footprint_columns(
        &self,
        bands: &[Band],
        band_of_ring: &[usize],
        ring_thetas: &[f64],
    ) -> (Vec<Vec<Option<(f64, f64)>>>, Vec<bool>) {
        let nside = self.nside;
        let bin_count = (4 * nside as usize).max(64);
        let mut extents: Vec<Vec<Option<(f64, f64)>>> = vec![Vec::new(); bands.len()];
        let mut cap_occupied = vec![false; bands.len()];
        let nb = bin_count as f64;
        for i in 1..=self.ring_count() {
            let b = band_of_ring[(i - 1) as usize];
            if !self.occupied(i) {
                continue;
            }
            if bands[b].cap {
                cap_occupied[b] = true;
                continue;
            }
            if extents[b].is_empty() {
                extents[b] = vec![None; bin_count];
            }
            let theta = ring_thetas[(i - 1) as usize];
            for j in self.runs[(i - 1) as usize].iter().flat_map(|&(a, e)| a..e) {
                let phi = ring_pixel_phi(nside, i, j);
                // (φ ≥ 0: truncation is the floor, as in `Band::cell_of`)
                let k = ((phi / TAU * nb) as usize).min(bin_count - 1);
                let e = &mut extents[b][k];
                *e = Some(match *e {
                    Some((lo, hi)) => (lo.min(theta), hi.max(theta)),
                    None => (theta, theta),
                });
            }
        }
        (extents, cap_occupied)
    }

    /// Counts pixels and footprint weight per cell.
    fn cell_sums(&self, bands: &[Band]) -> Result<CellSums> {
        let nside = self.nside;
        let mut sums = CellSums {
            weight: bands.iter().map(|b| vec![0.0; b.starts.len()]).collect(),
            count: bands.iter().map(|b| vec![0; b.starts.len()]).collect(),
            pixels: bands.iter().map(|b| vec![0; b.starts.len()]).collect(),
        };
        for (b, band) in bands.iter().enumerate() {
            if band.starts.is_empty() {
                continue;
            }
            let stretches = band.cell_stretches();
            for i in band.rings.0..=band.rings.1 {
                let (first, len, _) = ring_info(nside, i);
                if band.cap {
                    sums.pixels[b][0] += len;
                } else {
                    for &(k0, k1, c) in &stretches {
                        sums.pixels[b][c] += band.ring_positions_below(nside, i, len, k1)
                            - band.ring_positions_below(nside, i, len, k0);
                    }
                }
                // the footprint pixels, in increasing position as before (the same sums)
                for j in self.runs[(i - 1) as usize].iter().flat_map(|&(a, e)| a..e) {
                    if let Some(k) = band.cell_of(ring_pixel_phi(nside, i, j)) {
                        sums.weight[b][k] += self.weight_at(first + j)?;
                        sums.count[b][k] += 1;
                    }
                }
            }
        }
        Ok(sums)
    }
}

/// Slot edges in colatitude: the north cap (or nothing) down to the first span, bands of equal
/// height over each span, the gaps between spans (no footprint: empty slots), down to the south
/// cap (or nothing). Two spans share their bands when that takes no more bands than laying them
/// out apart (so a wide gap, such as a galactic-plane cut, gets no band, and a narrow one costs
/// nothing).
fn slot_edges(
    spans: Vec<(f64, f64)>,
    cap_radius: f64,
    north_cap: bool,
    south_cap: bool,
    reach: f64,
) -> Vec<f64> {
    let spans: Vec<(f64, f64)> = spans
        .into_iter()
        .map(|(a, b)| (a.max(cap_radius), b.min(PI - cap_radius)))
        .filter(|(a, b)| b > a)
        .collect();
    let height = BAND_HEIGHT_FILL * 2.0 * reach;
    let bands_for = |a: f64, b: f64| ((b - a) / height).ceil().max(1.0);
    let mut merged: Vec<(f64, f64)> = Vec::new();
    for (a, b) in spans {
        if let Some(last) = merged.last_mut() {
            if a <= last.1 || bands_for(last.0, b) <= bands_for(last.0, last.1) + bands_for(a, b) {
                last.1 = last.1.max(b);
                continue;
            }
        }
        merged.push((a, b));
    }
    let mut edges = vec![0.0];
    if north_cap {
        edges.push(cap_radius);
    }
    for &(a, b) in &merged {
        if a > edges[edges.len() - 1] {
            edges.push(a);
        }
        let count = bands_for(a, b) as usize;
        for k in 1..=count {
            edges.push(a + (b - a) * k as f64 / count as f64);
        }
    }
    if south_cap && edges[edges.len() - 1] < PI - cap_radius {
        edges.push(PI - cap_radius);
    }
    if edges[edges.len() - 1] < PI {
        edges.push(PI);
    }
    edges
}

/// Rings to bands: each ring joins the band of the slot holding its colatitude (a slot without
/// rings gets no band). Returns the bands, without cells yet, and the band of each ring.
fn bands_of_rings(
    edges: &[f64],
    ring_thetas: &[f64],
    north_cap: bool,
    south_cap: bool,
) -> (Vec<Band>, Vec<usize>) {
    let mut bands: Vec<Band> = Vec::new();
    let mut band_of_ring = Vec::with_capacity(ring_thetas.len());
    let slots = edges.len() - 1;
    let mut slot_band: Vec<Option<usize>> = vec![None; slots];
    for (i, &theta) in (1u64..).zip(ring_thetas) {
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
                    centers: Vec::new(),
                    reach: Vec::new(),
                    columns: Vec::new(),
                    bin_cell: Vec::new(),
                    cap,
                });
                slot_band[slot] = Some(bands.len() - 1);
                bands.len() - 1
            }
        };
        bands[b].rings.1 = i;
        band_of_ring.push(b);
    }
    (bands, band_of_ring)
}

/// Cells merged into one tile so far, with their joint footprint columns and extent.
struct MergeGroup {
    cells: Vec<(usize, usize)>,
    columns: Vec<[f64; 4]>,
    center: Direction,
    half: f64,
    r2: f64,
    pixels: u64,
    cap: bool,
    alive: bool,
}

impl MergeGroup {
    /// One group per cell with footprint pixels (`count` per band and cell), in band and cell
    /// order.
    fn of_cells(bands: &[Band], count: &[Vec<u64>]) -> Vec<MergeGroup> {
        let mut groups: Vec<MergeGroup> = Vec::new();
        for (b, (band, band_count)) in bands.iter().zip(count).enumerate() {
            for (k, &pixels) in band_count.iter().enumerate() {
                if pixels == 0 {
                    continue;
                }
                groups.push(MergeGroup {
                    cells: vec![(b, k)],
                    columns: band.columns[k].clone(),
                    center: band.centers[k],
                    half: band.reach[k].0,
                    r2: band.reach[k].1,
                    pixels,
                    cap: band.cap,
                    alive: true,
                });
            }
        }
        groups
    }
}

impl LatitudeBands {
    /// Lays out the cells of `footprint` (a map of NSIDE `nside`) for tiles whose cores must fit
    /// in |x|, |y| ≤ `core_half` (radians of the tangent plane), with a margin of `margin`
    /// radians all round. Returns the layout and its cells, one per tile, in tile order (bands
    /// from north to south, cells in increasing longitude).
    pub(crate) fn new(
        footprint: &FootprintOf<'_>,
        core_half: f64,
        margin: f64,
    ) -> Result<(Self, Vec<BandCell>)> {
        let room = core_room(core_half, margin)?;
        let reach = room.atan();
        let rings = RingFootprint::new(footprint)?;
        let nside = rings.nside;
        // The footprint's colatitude spans, cut to the caps of radius R at the poles (a cap is
        // one cell).
        let cap_radius = (0.995 * reach).min(PI / 2.0);
        let spans = rings.colatitude_spans(margin);
        let (Some(&(north, _)), Some(&(_, south))) = (spans.first(), spans.last()) else {
            return Err(Error::Data(
                "the mask is empty (no pixel has positive weight)".into(),
            ));
        };
        let north_cap = north < cap_radius;
        let south_cap = south > PI - cap_radius;
        let edges = slot_edges(spans, cap_radius, north_cap, south_cap, reach);
        let ring_thetas: Vec<f64> = (1..=rings.ring_count())
            .map(|i| ring_theta(nside, i))
            .collect();
        let (mut bands, band_of_ring) = bands_of_rings(&edges, &ring_thetas, north_cap, south_cap);
        let (extents, cap_occupied) = rings.footprint_columns(&bands, &band_of_ring, &ring_thetas);
        Self::cut_cells(&mut bands, &extents, &cap_occupied, room)?;
        let sums = rings.cell_sums(&bands)?;
        let (tile_cells, cells) = Self::assign_tiles(&mut bands, &sums, room);
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

    /// Cells of every band: caps whole, other bands cut greedily along the footprint.
    fn cut_cells(
        bands: &mut [Band],
        extents: &[Vec<Option<(f64, f64)>>],
        cap_occupied: &[bool],
        room: f64,
    ) -> Result<()> {
        for (b, band) in bands.iter_mut().enumerate() {
            if band.cap {
                if cap_occupied[b] {
                    band.starts = vec![0.0];
                    band.ends = vec![TAU];
                    let center = Direction::new(band.theta_center, 0.0);
                    let (t0, t1) = band.theta;
                    let reach = outline_extent(&Gnomonic::new(center), t0, t1, -PI, PI)
                        .filter(|&(half, _)| half <= room)
                        .ok_or_else(|| {
                            Error::Geometry(format!(
                                "the polar cap of {:.3}° does not fit its tile",
                                (t1 - t0).to_degrees()
                            ))
                        })?;
                    band.reach = vec![reach];
                    band.centers = vec![center];
                    band.columns = vec![Vec::new()];
                }
                continue;
            }
            if extents[b].is_empty() {
                continue;
            }
            // (a band whose single longitude bin does not fit is refused there)
            Self::greedy_cells(band, &extents[b], room)?;
        }
        Ok(())
    }

    /// Tiles: cells with footprint, small ones merged into their neighbours' tiles. Returns the
    /// (band, cell) members of each tile and the tiles as the plan sees them.
    fn assign_tiles(
        bands: &mut [Band],
        sums: &CellSums,
        room: f64,
    ) -> (Vec<Vec<(usize, usize)>>, Vec<BandCell>) {
        let mut cells = Vec::new();
        let mut tile_cells = Vec::new();
        for band in bands.iter_mut() {
            band.tiles = vec![None; band.starts.len()];
        }
        for (members, center, half_width, r2) in Self::merge_cells(bands, &sums.count, room) {
            let mut cell = BandCell {
                center,
                footprint_weight: 0.0,
                footprint_pixels: 0,
                pixels: 0,
                half_width,
                distortion: 1.0 + r2,
            };
            for &(b, k) in &members {
                bands[b].tiles[k] = Some(cells.len());
                cell.footprint_weight += sums.weight[b][k];
                cell.footprint_pixels += sums.count[b][k];
                cell.pixels += sums.pixels[b][k];
            }
            tile_cells.push(members);
            cells.push(cell);
        }
        (tile_cells, cells)
    }

    /// Cuts a band into cells along its footprint: starting after a free longitude bin, each
    /// cell takes the longest stretch of bins whose footprint pixel centres fit, in the gnomonic
    /// projection about the centre of their colatitude and longitude range, in |x|, |y| ≤ `room`
    /// (bins without footprint are free: a cell may span a gap, or end before it). Greedy covering
    /// of an interval by feasible pieces gives the fewest cells when feasibility is inherited by
    /// sub-intervals, as it is here up to the choice of tangent point. Fills the band's `starts`,
    /// `ends` (radians, sorted by start, in [starts[0], starts[0] + 2π)) and `centers`.
    fn greedy_cells(band: &mut Band, bins: &[Option<(f64, f64)>], room: f64) -> Result<()> {
        let nb = bins.len();
        let bw = TAU / nb as f64;
        let Some(first_free) = bins.iter().position(|e| e.is_none()) else {
            // every bin holds footprint: start anywhere
            return Self::cover(band, bins, 0, nb, bw, room);
        };
        // start at the first occupied bin after a free one (no cell then wraps past its start)
        let mut start = None;
        for k in 1..=nb {
            let i = (first_free + k) % nb;
            if bins[i].is_some() {
                start = Some(first_free + k);
                break;
            }
        }
        match start {
            Some(s) => Self::cover(band, bins, s, s + nb - (s - first_free), bw, room),
            None => Ok(()),
        }
    }

    /// The footprint columns of bins [s, e) (indices modulo the bin count, longitudes
    /// unwrapped from bin s on).
    fn bin_columns(bins: &[Option<(f64, f64)>], s: usize, e: usize, bw: f64) -> Vec<[f64; 4]> {
        let nb = bins.len();
        (s..e)
            .filter_map(|k| bins[k % nb].map(|(a, b)| [a, b, k as f64 * bw, (k + 1) as f64 * bw]))
            .collect()
    }

    /// The tangent point of a set of footprint columns (the centre of their colatitude and
    /// longitude range) and the largest |x| or |y| and x² + y² of the columns' outlines in the
    /// gnomonic projection about it; `None` when there is no column or some point is a
    /// hemisphere away.
    fn columns_extent(columns: &[[f64; 4]]) -> Option<(Direction, f64, f64)> {
        let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
        let (mut p0, mut p1) = (f64::INFINITY, f64::NEG_INFINITY);
        for c in columns {
            lo = lo.min(c[0]);
            hi = hi.max(c[1]);
            p0 = p0.min(c[2]);
            p1 = p1.max(c[3]);
        }
        if columns.is_empty() || p1 - p0 >= PI {
            return None;
        }
        let center = Direction::new(0.5 * (lo + hi), (0.5 * (p0 + p1)).rem_euclid(TAU));
        let proj = Gnomonic::new(center);
        let (mut half, mut r2) = (0.0f64, 0.0f64);
        for c in columns {
            for t in [c[0], c[1]] {
                for q in [c[2], 0.5 * (c[2] + c[3]), c[3]] {
                    let (x, y) = proj.forward(Direction::new(t, q.rem_euclid(TAU)))?;
                    half = half.max(x.abs()).max(y.abs());
                    r2 = r2.max(x * x + y * y);
                }
            }
        }
        Some((center, half, r2))
    }

    /// The cells [s, e) of bins [from, to) (indices modulo the bin count) of [`Self::cover`]:
    /// from each footprint bin on, the longest stretch that fits (found by doubling, then
    /// bisection), ended after its last footprint bin.
    fn greedy_bin_cells(
        band: &Band,
        bins: &[Option<(f64, f64)>],
        (from, to): (usize, usize),
        bw: f64,
        room: f64,
    ) -> Result<Vec<(usize, usize)>> {
        let nb = bins.len();
        let fits = |s: usize, e: usize| {
            Self::columns_extent(&Self::bin_columns(bins, s, e, bw))
                .is_some_and(|(_, h, _)| h <= room)
        };
        let mut cells: Vec<(usize, usize)> = Vec::new();
        let mut s = from;
        while s < to {
            if bins[s % nb].is_none() {
                s += 1;
                continue;
            }
            if !fits(s, s + 1) {
                return Err(Error::Geometry(format!(
                    "a band of {:.3}° at colatitude {:.2}° does not fit its tile",
                    (band.theta.1 - band.theta.0).to_degrees(),
                    band.theta_center.to_degrees()
                )));
            }
            // largest e ≤ to with [s, e) fitting: doubling, then bisection
            let (mut good, mut step) = (s + 1, 1usize);
            let mut bad = loop {
                let e = (s + 1 + step).min(to);
                if !fits(s, e) {
                    break e;
                }
                good = e;
                if e == to {
                    break to + 1;
                }
                step *= 2;
            };
            while bad > good + 1 {
                let mid = (good + bad) / 2;
                if fits(s, mid) {
                    good = mid;
                } else {
                    bad = mid;
                }
            }
            // end the cell after its last footprint bin
            let mut e = good;
            while e > s + 1 && bins[(e - 1) % nb].is_none() {
                e -= 1;
            }
            cells.push((s, e));
            s = e;
        }
        Ok(cells)
    }

    /// Greedy cells over bins [from, to) (indices modulo the bin count); see
    /// [`LatitudeBands::greedy_cells`].
    fn cover(
        band: &mut Band,
        bins: &[Option<(f64, f64)>],
        from: usize,
        to: usize,
        bw: f64,
        room: f64,
    ) -> Result<()> {
        let nb = bins.len();
        let cells = Self::greedy_bin_cells(band, bins, (from, to), bw, room)?;
        type Span = (
            f64,
            f64,
            Direction,
            (f64, f64),
            Vec<[f64; 4]>,
            (usize, usize),
        );
        let mut spans: Vec<Span> = Vec::with_capacity(cells.len());
        for (s, e) in cells {
            let columns = Self::bin_columns(bins, s, e, bw);
            let (center, half, r2) = Self::columns_extent(&columns).ok_or_else(|| {
                Error::Geometry("a cell reaches a hemisphere from its centre".into())
            })?;
            let shift = ((s as f64 * bw) / TAU).floor() * TAU;
            spans.push((
                s as f64 * bw - shift,
                e as f64 * bw - shift,
                center,
                (half, r2),
                columns,
                (s, e),
            ));
        }
        spans.sort_by_key(|c| c.5 .0 % nb);
        band.bin_cell = vec![None; nb];
        for (c, span) in spans.iter().enumerate() {
            for k in span.5 .0..span.5 .1 {
                band.bin_cell[k % nb] = Some(c as u32);
            }
        }
        band.starts = spans.iter().map(|c| c.0).collect();
        band.ends = spans.iter().map(|c| c.1).collect();
        band.centers = spans.iter().map(|c| c.2).collect();
        band.reach = spans.iter().map(|c| c.3).collect();
        band.columns = spans.into_iter().map(|c| c.4).collect();
        Ok(())
    }

    /// Merges small cells into neighbouring tiles: cells are taken from the fewest footprint
    /// pixels up (ties by band and cell), and each joins the nearest tile (by tangent point)
    /// whose footprint columns and its own still fit together in |x|, |y| ≤ `room` about the
    /// centre of their joint range. Caps take no part. Returns the tiles as lists of
    /// (band, cell) with their tangent point and extent, in the order of their first cell.
    fn merge_cells(bands: &[Band], count: &[Vec<u64>], room: f64) -> Vec<MergedTile> {
        let mut groups = MergeGroup::of_cells(bands, count);
        // a tile's core reaches at most √2·atan(room) from its tangent point: two cores can
        // only share a square when their tangent points are closer than twice that
        let near = 2.0 * std::f64::consts::SQRT_2 * room.atan();
        let mut order: Vec<usize> = (0..groups.len()).filter(|&g| !groups[g].cap).collect();
        order.sort_by_key(|&g| (groups[g].pixels, groups[g].cells[0]));
        for g in order {
            if !groups[g].alive {
                continue;
            }
            let mut partners: Vec<(f64, usize)> = groups
                .iter()
                .enumerate()
                .filter(|(h, o)| *h != g && o.alive && !o.cap)
                .map(|(h, o)| (o.center.distance(&groups[g].center), h))
                .filter(|&(d, _)| d < near)
                .collect();
            partners.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
            for (_, h) in partners {
                // all longitudes unwrapped next to the partner's first column
                let base = groups[h].columns.first().map_or(0.0, |c| c[2]);
                let joint: Vec<[f64; 4]> = groups[h]
                    .columns
                    .iter()
                    .chain(&groups[g].columns)
                    .map(|c| {
                        let t = ((c[2] - base) / TAU).round() * TAU;
                        [c[0], c[1], c[2] - t, c[3] - t]
                    })
                    .collect();
                let Some((center, half, r2)) = Self::columns_extent(&joint) else {
                    continue;
                };
                if half > room {
                    continue;
                }
                let moved = std::mem::take(&mut groups[g].cells);
                let moved_pixels = groups[g].pixels;
                groups[g].alive = false;
                let target = &mut groups[h];
                target.cells.extend(moved);
                target.cells.sort_unstable();
                target.columns = joint;
                target.center = center;
                target.half = half;
                target.r2 = r2;
                target.pixels += moved_pixels;
                break;
            }
        }
        let mut tiles: Vec<MergedTile> = groups
            .into_iter()
            .filter(|g| g.alive)
            .map(|g| (g.cells, g.center, g.half, g.r2))
            .collect();
        tiles.sort_by_key(|t| t.0[0]);
        tiles
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
        let Some(members) = self.tile_cells.get(tile) else {
            return Vec::new();
        };
        let mut out = Vec::new();
        for &(b, k) in members {
            let band = &self.bands[b];
            for i in band.rings.0..=band.rings.1 {
                let (first, len, _) = ring_info(self.nside, i);
                for j in 0..len {
                    if band.cell_of(ring_pixel_phi(self.nside, i, j)) == Some(k) {
                        out.push(first + j);
                    }
                }
            }
        }
        out.sort_unstable();
        out
    }

    /// The outlines of tile `tile`'s cells on the sphere, each closed.
    pub(crate) fn outlines(&self, tile: usize) -> Vec<Vec<Direction>> {
        self.tile_cells
            .get(tile)
            .map(|members| {
                members
                    .iter()
                    .map(|&(b, k)| self.cell_outline(b, k))
                    .collect()
            })
            .unwrap_or_default()
    }

    /// The outline of cell k of band b on the sphere, closed.
    fn cell_outline(&self, b: usize, k: usize) -> Vec<Direction> {
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
