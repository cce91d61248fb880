//! Sampling the sky onto tile grids, and projecting tile fields back onto the sphere.
//!
//! For each plane pixel of a tile (see [`crate::tiles::tiling`] for the grid layout) the direction is
//! the inverse gnomonic projection of its centre; the map and the mask are read there by
//! bilinear interpolation on the sphere (HEALPix-plane bilinear weights of
//! [`crate::Pixelization::bilinear_weights`], as in [`SkyMap::interpolate`]), by ring-wise linear
//! interpolation ([`ring_interpolation_weights`]) or by nearest pixel. The projection-plane
//! bilinear weights are only first-order accurate next to the polar base-pixel seams
//! (meridians 0°, 90°, 180°, 270° at |z| > 2/3); the ring-wise ones are second order up to
//! |b| = 80° but more anisotropic (see `examples/sampling_transfer.rs`). Ring-wise cubic
//! interpolation ([`ring_cubic_interpolation_weights`], the default of a measurement) keeps
//! much more small-scale power (`tests/sphere_ring_cubic.rs`).
//! Invalid (bad) map pixels count as masked: their mask weight is 0, and the field is averaged
//! over the valid ones of the four neighbours only.
//!
//! With the valid pixels fixed, every scheme is linear in the map values: f_t = S_t m.
//! [`TileSampler::operator`] returns S_t as a sparse [`TileSamplingOperator`] (for each tile
//! pixel the map pixels and weights it reads), with its adjoint, the scatter-add
//! `m̄[p] += w·f̄[k]`, used to send tile-field gradients back to the sphere
//! (`tests/sampling_adjoint.rs`: equal to the sampler bit for bit, ⟨S m, y⟩ = ⟨m, Sᵀ y⟩).

use crate::error::{Error, Result};
use crate::sky::block_map::BlockSkyMap;
use crate::sky::footprint::{FootprintOf, Weights};
use crate::sky::pixelization::{ring_info, ring_theta, Ordering, Pixelization};
use crate::sky::skymap::{SkyMap, SkyMapOf};
use crate::tiles::projection::{rectangle_solid_angle, Gnomonic};
use crate::tiles::tiling::TilingPlan;
use rayon::prelude::*;

/// How map values are read at a plane pixel's direction. The kebab-case names
/// (`ring-quintic`, `ring-cubic`, `bilinear`, `ring-linear`, `nearest`) are those of the
/// `--sampling` flag, of the `sampling` key of a settings file and of the Python keyword; the
/// short `value(help)` lines are the command line's descriptions.
#[derive(
    Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum, serde::Serialize, serde::Deserialize,
)]
#[serde(rename_all = "kebab-case")]
pub enum SamplingMethod {
    /// Six-point (quintic) Lagrange interpolation along each of four iso-latitude rings, then
    /// four-point across them ([`ring_quintic_interpolation_weights`], our design; the default):
    /// the ring-cubic scheme with the extra order where the pixels are farther apart, so the
    /// power kept at the finest scales hardly depends on latitude; the mask is read with the
    /// ring-wise linear weights.
    #[value(
        help = "Six-point (quintic) Lagrange along four iso-latitude rings, then four-point across them (the default)"
    )]
    RingQuintic,
    /// Four-point cubic (Lagrange) interpolation along each of four iso-latitude rings, then
    /// across the rings ([`ring_cubic_interpolation_weights`], our design); the mask is still
    /// read with the ring-wise linear weights (a weight must not ring). Keeps far more
    /// small-scale power than the linear schemes (table in `tests/sphere_ring_cubic.rs`).
    #[value(help = "Four-point cubic (Lagrange) along four iso-latitude rings, then across them")]
    RingCubic,
    /// Bilinear on the sphere over the four surrounding pixels.
    #[value(help = "Bilinear over the four surrounding HEALPix pixels")]
    Bilinear,
    /// Linear along and between iso-latitude rings ([`ring_interpolation_weights`], healpy's
    /// scheme); second order everywhere, including the polar base-pixel seams.
    #[value(help = "Linear along and between iso-latitude rings")]
    RingLinear,
    /// The value of the pixel containing the direction.
    #[value(help = "The value of the pixel containing the direction")]
    Nearest,
}

impl SamplingMethod {
    /// Shortest wavelength, in mean map pixel spacings h, that this sampling carries with a
    /// first-order coefficient S1 within 2% of its flat-sky value in every orientation, as
    /// measured by `examples/sphere_flat_bias.rs` (demo spectrum, NSIDE 256, tiles 7°–29°, plane
    /// pixels h, h/2 and h/4; the measured biases are tabulated in the contributor guide).
    /// The wavelength of scale j is λ_j = (8/3)·2^j plane pixels. Nearest-pixel sampling has
    /// no such scale: its pixel-sized jumps bias every scale.
    pub fn trusted_wavelength_map_spacings(self) -> f64 {
        match self {
            SamplingMethod::Bilinear | SamplingMethod::RingLinear => 16.0,
            SamplingMethod::RingCubic | SamplingMethod::RingQuintic => 8.0,
            SamplingMethod::Nearest => f64::INFINITY,
        }
    }

    /// The most map pixels one read of the field combines: 1 (nearest), 4 (bilinear,
    /// ring-linear), 16 (ring-cubic), 24 (ring-quintic).
    pub fn stencil_pixels(self) -> usize {
        match self {
            SamplingMethod::Nearest => 1,
            SamplingMethod::Bilinear | SamplingMethod::RingLinear => 4,
            SamplingMethod::RingCubic => 16,
            SamplingMethod::RingQuintic => 24,
        }
    }
}

/// The grids of one tile, n × n, row-major with one row per y (row 0 southernmost).
#[derive(Debug, Clone, PartialEq)]
pub struct TileGrids {
    /// Index of the tile in its plan.
    pub tile: usize,
    /// Pixels per side.
    pub n: usize,
    /// Plane pixel size Δ (radians of the tangent plane).
    pub pixel_size: f64,
    /// Map values at the plane pixels' directions (0 where all neighbouring map pixels are bad).
    pub field: Vec<f64>,
    /// Mask weights in [0, 1] at the same directions, 0 over bad map pixels.
    pub mask: Vec<f64>,
    /// Solid angle of each plane pixel in steradians (exact, see [`rectangle_solid_angle`];
    /// equal to Δ²(1 + x² + y²)^(−3/2) at the pixel centre up to a relative O(Δ²)).
    pub solid_angle: Vec<f64>,
    /// Does the plane pixel's direction fall in the tile's core?
    pub in_core: Vec<bool>,
}

impl TileGrids {
    /// Bytes held by the grids of one n × n tile: three f64 grids and one bool grid (the plan
    /// counts them with [`crate::tiles::tiling::sampled_grid_bytes`]).
    pub fn bytes_for(n: usize) -> u64 {
        crate::tiles::tiling::sampled_grid_bytes(n)
    }

    /// Pooling weights taper × solid angle × [in core], for a taper grid of the same layout.
    pub fn pooling_weights(&self, taper: &[f64]) -> Result<Vec<f64>> {
        if taper.len() != self.solid_angle.len() {
            return Err(Error::Mismatch(format!(
                "a taper of {} values does not fit a {} × {} tile",
                taper.len(),
                self.n,
                self.n
            )));
        }
        Ok(taper
            .iter()
            .zip(&self.solid_angle)
            .zip(&self.in_core)
            .map(|((&t, &w), &c)| if c { t * w } else { 0.0 })
            .collect())
    }
}

/// The fine-sampling factor s for plane pixels of size Δ on a map of mean spacing h:
/// s = round(Δ/h), at least 1. With s > 1 the field is read on a grid s times finer than the
/// plane grid (about one read per map pixel) and band-limited to the plane grid
/// (the private `BandLimit`: Fourier cropping), so no map power above the plane grid's Nyquist frequency aliases into
/// the finest wavelet scales; with s = 1 each plane pixel reads the map directly.
///
/// ```
/// use planisphere::tiles::sampling::fine_sampling_factor;
/// assert_eq!(fine_sampling_factor(1.0, 1.0), 1);
/// assert_eq!(fine_sampling_factor(3.0, 1.0), 3);
/// assert_eq!(fine_sampling_factor(0.5, 1.0), 1);
/// assert_eq!(fine_sampling_factor(2.6, 1.0), 3);
/// ```
pub fn fine_sampling_factor(pixel_size: f64, map_spacing: f64) -> usize {
    let s = (pixel_size / map_spacing).round();
    if s.is_finite() && s >= 2.0 {
        s.min(64.0) as usize
    } else {
        1
    }
}

/// An exact low-pass from a fine grid to the plane grid of a tile, by Fourier cropping.
///
/// The n × n plane grid (spacing Δ) is extended by a margin of e ≥ 8 pixels on each side
/// (N = n + 2e, chosen so N has only the factors 2, 3, 5 and 7). The field is read on the
/// M × M grid of spacing Δ/s over that extended square, fine point q = s·K + r sitting r/s of
/// a plane pixel past plane point K; it is multiplied by the separable window w(q) that is 1
/// over the tile and rises as the C1 taper of Grain et al. 2009 (eq. 31),
/// t − sin(2πt)/(2π), across the margin (so the periodic transform sees no edge); its discrete
/// Fourier transform F_k (k = (kx, ky), |kx|, |ky| < M/2) is cut to the N × N frequencies of
/// the plane grid (−N/2 ≤ kx, ky < N/2); and g_K = Re (1/M²) Σ_k F_k e^{2πi k·K/N} is the
/// field at plane point K (the band-limited interpolant evaluated at the fine points
/// q = s·K; Nyquist's sampling theorem, e.g. Bracewell, *The Fourier Transform and its
/// Applications*, ch. 10). The tile's n × n centre is kept. A field already band-limited to
/// the plane grid passes unchanged (`band_limit_keeps_a_band_limited_field`).
#[derive(Clone)]
struct BandLimit {
    /// Fine points per plane pixel, s.
    factor: usize,
    /// Plane pixels per tile side, n.
    n: usize,
    /// Margin in plane pixels, e.
    margin: usize,
    /// Extended plane grid side, N = n + 2e.
    extended: usize,
    /// Window over the fine grid's M = s·N points of one side.
    window: Vec<f64>,
    fine_forward: std::sync::Arc<dyn rustfft::Fft<f64>>,
    coarse_inverse: std::sync::Arc<dyn rustfft::Fft<f64>>,
}

impl BandLimit {
    /// The low-pass for n-pixel tiles read s times finer.
    fn new(n: usize, factor: usize) -> Self {
        let margin = Self::margin(n);
        let extended = n + 2 * margin;
        let fine = factor * extended;
        let ramp = (factor * margin) as f64;
        let window = (0..fine)
            .map(|q| {
                let t = q.min(fine - 1 - q) as f64;
                // q = s·e (first tile point) and beyond: 1; q = 0: 0
                crate::sky::apodization::c1(t / ramp)
            })
            .collect();
        let mut planner = rustfft::FftPlanner::<f64>::new();
        BandLimit {
            factor,
            n,
            margin,
            extended,
            window,
            fine_forward: planner.plan_fft_forward(fine),
            coarse_inverse: planner.plan_fft_inverse(extended),
        }
    }

    /// The margin e of n-pixel tiles: at least 8 plane pixels (the window's leakage past the
    /// band then stays below 1e-3 of the field beyond the tile-border ramp, see the tests),
    /// grown until N = n + 2e is 7-smooth (fast transforms).
    fn margin(n: usize) -> usize {
        let smooth = |mut m: usize| {
            for p in [2, 3, 5, 7] {
                while m.is_multiple_of(p) {
                    m /= p;
                }
            }
            m == 1
        };
        let mut margin = 8;
        while !smooth(n + 2 * margin) {
            margin += 1;
        }
        margin
    }

    /// The band-limited n × n field (row-major, one row per y) of the function `read(x, y)`,
    /// evaluated at plane offsets (x, y) from the tile's first plane point.
    fn apply<F>(&self, delta: f64, read: F) -> Result<Vec<f64>>
    where
        F: Fn(f64, f64) -> Result<f64>,
    {
        use num_complex::Complex64;
        let s = self.factor;
        let big_n = self.extended;
        let m = s * big_n;
        let offset = |q: usize| (q as f64 / s as f64 - self.margin as f64) * delta;
        // kept frequency indices of an M-point transform: 0..N/2 and M − N/2..M
        let kept: Vec<usize> = (0..big_n)
            .map(|k| if k < big_n / 2 { k } else { m - big_n + k })
            .collect();
        let mut scratch = vec![
            Complex64::default();
            self.fine_forward
                .get_inplace_scratch_len()
                .max(self.coarse_inverse.get_inplace_scratch_len(),)
        ];
        // rows: read, window, transform, keep N columns
        let mut cropped_rows = vec![Complex64::default(); m * big_n];
        let mut row = vec![Complex64::default(); m];
        for qy in 0..m {
            let wy = self.window[qy];
            let y = offset(qy);
            for (qx, r) in row.iter_mut().enumerate() {
                let w = wy * self.window[qx];
                *r = if w > 0.0 {
                    Complex64::new(w * read(offset(qx), y)?, 0.0)
                } else {
                    Complex64::default()
                };
            }
            self.fine_forward
                .process_with_scratch(&mut row, &mut scratch);
            for (c, &k) in kept.iter().enumerate() {
                cropped_rows[qy * big_n + c] = row[k];
            }
        }
        // columns: transform the N kept columns, keep N rows
        let mut spectrum = vec![Complex64::default(); big_n * big_n];
        let mut column = vec![Complex64::default(); m];
        for c in 0..big_n {
            for (qy, v) in column.iter_mut().enumerate() {
                *v = cropped_rows[qy * big_n + c];
            }
            self.fine_forward
                .process_with_scratch(&mut column, &mut scratch);
            for (r, &k) in kept.iter().enumerate() {
                spectrum[r * big_n + c] = column[k];
            }
        }
        // the inverse on the N × N grid: kept indices map to 0..N/2 and N/2..N
        let mut line = vec![Complex64::default(); big_n];
        for c in 0..big_n {
            for r in 0..big_n {
                line[r] = spectrum[r * big_n + c];
            }
            self.coarse_inverse
                .process_with_scratch(&mut line, &mut scratch);
            for r in 0..big_n {
                spectrum[r * big_n + c] = line[r];
            }
        }
        let norm = 1.0 / (m as f64 * m as f64);
        let mut out = Vec::with_capacity(self.n * self.n);
        for r in 0..big_n {
            let line = &mut spectrum[r * big_n..(r + 1) * big_n];
            self.coarse_inverse.process_with_scratch(line, &mut scratch);
            if r >= self.margin && r < self.margin + self.n {
                out.extend(
                    line[self.margin..self.margin + self.n]
                        .iter()
                        .map(|v| v.re * norm),
                );
            }
        }
        Ok(out)
    }
}

/// The geometry of one NSIDE's rings as the ring interpolations read it: ring colatitude θ_i
/// (Górski et al. 2005, eqs. 4–5, as [`ring_theta`]), first RING index, pixel count and
/// longitude offset ([`ring_info`]), and longitude spacing 2π/n_i. (The harmonic transforms'
/// table, `harmonics::geometry::RingGeometry`, holds z = cos θ instead; θ from it would not be
/// the interpolations' [`ring_theta`] bit for bit.)
trait RingLookup {
    /// θ_i of ring `i` (1 ≤ i ≤ 4 NSIDE − 1).
    fn theta(&self, i: u64) -> f64;
    /// (first RING index, pixel count, shifted by half a pixel) of ring `i`.
    fn info(&self, i: u64) -> (u64, u64, bool);
    /// The longitude spacing 2π/n_i of ring `i`.
    fn spacing(&self, i: u64) -> f64 {
        2.0 * std::f64::consts::PI / self.info(i).1 as f64
    }
}

/// Ring geometry evaluated from the formulas at each read.
struct RingFormulas(u64);

impl RingLookup for RingFormulas {
    fn theta(&self, i: u64) -> f64 {
        ring_theta(self.0, i)
    }
    fn info(&self, i: u64) -> (u64, u64, bool) {
        ring_info(self.0, i)
    }
}

/// The same ring geometry computed once per map (the values of [`RingFormulas`] bit for bit),
/// so the sampler's reads take no arcsine, arccosine or division per ring (4 NSIDE entries of 32
/// bytes: 1 MB at NSIDE 8192).
struct RingTable(Vec<RingEntry>);

#[derive(Clone, Copy)]
struct RingEntry {
    theta: f64,
    first: u64,
    count: u64,
    spacing: f64,
    shifted: bool,
}

impl RingTable {
    fn new(nside: u32) -> Self {
        let formulas = RingFormulas(nside as u64);
        RingTable(
            (0..4 * nside as u64)
                .map(|i| {
                    if i == 0 {
                        RingEntry {
                            theta: 0.0,
                            first: 0,
                            count: 1,
                            spacing: 0.0,
                            shifted: false,
                        }
                    } else {
                        let (first, count, shifted) = formulas.info(i);
                        RingEntry {
                            theta: formulas.theta(i),
                            first,
                            count,
                            spacing: formulas.spacing(i),
                            shifted,
                        }
                    }
                })
                .collect(),
        )
    }
}

impl RingLookup for RingTable {
    fn theta(&self, i: u64) -> f64 {
        self.0[i as usize].theta
    }
    fn info(&self, i: u64) -> (u64, u64, bool) {
        let e = &self.0[i as usize];
        (e.first, e.count, e.shifted)
    }
    fn spacing(&self, i: u64) -> f64 {
        self.0[i as usize].spacing
    }
}

/// ⌊t⌋ as an integer for |t| < 2⁶³, equal to `t.floor() as i64` (truncation, one step down for
/// negative non-integers), without a call to the library's `floor`.
fn floor_i64(t: f64) -> i64 {
    let j = t as i64;
    if (j as f64) > t {
        j - 1
    } else {
        j
    }
}

/// `j` brought into 0 … count − 1 for −count ≤ j < 2·count: `j.rem_euclid(count)` without a
/// division.
fn wrap(j: i64, count: u64) -> u64 {
    let c = count as i64;
    (if j < 0 {
        j + c
    } else if j >= c {
        j - c
    } else {
        j
    }) as u64
}

/// Half the side, in plane coordinates (radians), of the square around each tile's tangent
/// point over which a sampler of `plan` reads the map: the tile grid, widened by the band
/// limit's margin when the plane pixels are coarser than the map's ([`fine_sampling_factor`]),
/// plus one plane pixel. The interpolation stencils reach a few map pixels further
/// ([`crate::tiles::reach`] adds them).
pub fn read_half_width(plan: &TilingPlan) -> f64 {
    let n = plan.tile_pixels();
    let delta = plan.pixel_size();
    let margin = if fine_sampling_factor(delta, plan.map_pixelization().mean_spacing()) > 1 {
        BandLimit::margin(n)
    } else {
        0
    };
    (n as f64 / 2.0 + margin as f64 + 1.0) * delta
}

/// A sampler's mask weights in the map's ordering.
enum MaskWeights<'a> {
    /// The footprint's weights as one slice (it owns them, or reads its caller's unchanged).
    Slice(&'a [f64]),
    /// The footprint's weights, read where they are (its caller's and its own changed ones).
    Footprint(Weights<'a>),
    /// The footprint's weights brought to the map's ordering.
    Reordered(Vec<f64>),
}

impl MaskWeights<'_> {
    /// The weight of map pixel `i`.
    #[inline]
    fn get(&self, i: usize) -> f64 {
        match self {
            MaskWeights::Slice(w) => w[i],
            MaskWeights::Footprint(w) => w.get(i),
            MaskWeights::Reordered(w) => w[i],
        }
    }
}

/// The map a sampler reads: a whole [`SkyMapOf`], or a [`BlockSkyMap`] holding only the blocks
/// the plan's tiles read ([`crate::tiles::reach`]). Both give the same values at the same
/// pixels, so the samples are the same bit for bit.
#[derive(Clone, Copy)]
pub enum MapSource<'a> {
    /// Every pixel in memory.
    Whole(&'a SkyMapOf<'a>),
    /// Only the stored blocks.
    Blocks(&'a BlockSkyMap),
}

impl<'a, 'b: 'a> From<&'a SkyMapOf<'b>> for MapSource<'a> {
    fn from(map: &'a SkyMapOf<'b>) -> Self {
        MapSource::Whole(map)
    }
}

impl<'a> From<&'a BlockSkyMap> for MapSource<'a> {
    fn from(map: &'a BlockSkyMap) -> Self {
        MapSource::Blocks(map)
    }
}

impl MapSource<'_> {
    /// The map's pixelization.
    pub fn pixelization(&self) -> Pixelization {
        match self {
            MapSource::Whole(m) => m.pixelization(),
            MapSource::Blocks(m) => m.pixelization(),
        }
    }

    /// Is pixel `i` valid?
    #[inline]
    fn is_valid(&self, i: usize) -> bool {
        match self {
            MapSource::Whole(m) => m.valid()[i],
            MapSource::Blocks(m) => m.is_valid(i),
        }
    }

    /// The value of pixel `i` (read only where [`Self::is_valid`]).
    #[inline]
    fn value(&self, i: usize) -> f64 {
        match self {
            MapSource::Whole(m) => m.values()[i],
            MapSource::Blocks(m) => m.value(i),
        }
    }

    /// Is every pixel valid (a whole map without bad pixels)?
    fn all_valid(&self) -> bool {
        match self {
            MapSource::Whole(m) => m.valid().all(),
            MapSource::Blocks(_) => false,
        }
    }

    /// Is some valid pixel `i` `wanted(i)`?
    fn any_valid(&self, wanted: impl Fn(usize) -> bool + Sync) -> bool {
        match self {
            MapSource::Whole(m) => (0..m.valid().len())
                .into_par_iter()
                .any(|i| m.valid().get(i) && wanted(i)),
            MapSource::Blocks(m) => m.blocks().any(|(start, values)| {
                values
                    .iter()
                    .enumerate()
                    .any(|(k, v)| !v.is_nan() && wanted(start + k))
            }),
        }
    }
}

/// Reads a map and a mask onto the tiles of a plan, one tile at a time.
pub struct TileSampler<'a> {
    plan: &'a TilingPlan,
    map: MapSource<'a>,
    /// Mask weights in the map's ordering (the footprint's own when the orderings agree); the
    /// map's bad pixels are treated as weight 0 when read.
    mask: MaskWeights<'a>,
    method: SamplingMethod,
    /// Solid angles of the plane pixels, the same for every tile.
    solid_angle: Vec<f64>,
    /// The band limit when the plane pixels are coarser than the map (see [`BandLimit`]).
    band_limit: Option<BandLimit>,
    /// The map's ring geometry.
    rings: RingTable,
    /// Every map pixel valid (no UNSEEN/NaN): the stencil reads skip the check.
    all_valid: bool,
}

impl<'a> TileSampler<'a> {
    /// A sampler for `map` (a [`SkyMapOf`] or a [`BlockSkyMap`]) and `mask` (same NSIDE as the
    /// plan's map) on the tiles of `plan`.
    pub fn new(
        plan: &'a TilingPlan,
        map: impl Into<MapSource<'a>>,
        mask: &'a FootprintOf<'a>,
        method: SamplingMethod,
    ) -> Result<Self> {
        let map: MapSource<'a> = map.into();
        if map.pixelization().nside() != plan.map_pixelization().nside() {
            return Err(Error::Mismatch(format!(
                "map NSIDE {} does not match the tiling's NSIDE {}",
                map.pixelization().nside(),
                plan.map_pixelization().nside()
            )));
        }
        let map_pix = map.pixelization();
        let mask_pix = mask.pixelization();
        mask.check_map_nside(map_pix.nside())?;
        let weights = if mask_pix.ordering() == map_pix.ordering() {
            let w = mask.weights();
            match w.as_slice() {
                Some(all) => MaskWeights::Slice(all),
                None => MaskWeights::Footprint(w),
            }
        } else {
            MaskWeights::Reordered(
                (0..map_pix.npix())
                    .into_par_iter()
                    .map(|p| Ok(mask.weight(mask_pix.from_nested(map_pix.to_nested(p)?)?)))
                    .collect::<Result<Vec<f64>>>()?,
            )
        };
        let overlap = map.any_valid(|i| weights.get(i) > 0.0);
        if !overlap {
            return Err(Error::Data(
                "the mask's footprint does not overlap the map's valid pixels".to_string(),
            ));
        }
        let n = plan.tile_pixels();
        let delta = plan.pixel_size();
        let edges: Vec<f64> = (0..=n)
            .map(|k| (k as f64 - n as f64 / 2.0) * delta)
            .collect();
        let mut solid_angle = Vec::with_capacity(n * n);
        for iy in 0..n {
            for ix in 0..n {
                solid_angle.push(rectangle_solid_angle(
                    edges[ix],
                    edges[ix + 1],
                    edges[iy],
                    edges[iy + 1],
                ));
            }
        }
        let factor = fine_sampling_factor(delta, map_pix.mean_spacing());
        let band_limit = if factor > 1 {
            Some(BandLimit::new(n, factor))
        } else {
            None
        };
        Ok(TileSampler {
            plan,
            map,
            mask: weights,
            method,
            solid_angle,
            band_limit,
            rings: RingTable::new(map_pix.nside()),
            all_valid: map.all_valid(),
        })
    }

    /// The plan.
    pub fn plan(&self) -> &TilingPlan {
        self.plan
    }

    /// The fine-sampling factor s of this sampler: 1 when the plane pixels read the map
    /// directly, s > 1 when the field is read on a grid s times finer and band-limited to the
    /// plane grid ([`fine_sampling_factor`]; Fourier cropping).
    pub fn fine_sampling(&self) -> usize {
        self.band_limit.as_ref().map_or(1, |b| b.factor)
    }

    /// The grids of tile `index`.
    pub fn sample(&self, index: usize) -> Result<TileGrids> {
        let plan = self.plan;
        let tile = plan.tile(index)?;
        let proj = Gnomonic::new(tile.center);
        let n = plan.tile_pixels();
        let delta = plan.pixel_size();
        let coords: Vec<f64> = (0..n).map(|k| plan.plane_coordinate(k)).collect();
        let mut field = Vec::with_capacity(n * n);
        let mut mask = Vec::with_capacity(n * n);
        let mut in_core = Vec::with_capacity(n * n);
        for &y in &coords {
            for &x in &coords {
                let dir = proj.inverse(x, y);
                // with a band limit the field is read on the fine grid below: here the mask only
                let (f, m) = self.read(dir, self.band_limit.is_none())?;
                field.push(f);
                mask.push(m);
                in_core.push(plan.owner(dir) == Some(index));
            }
        }
        if let Some(band) = &self.band_limit {
            // the field read on the fine grid and cut to the plane grid's band
            let start = plan.plane_coordinate(0);
            field = band.apply(delta, |xf, yf| {
                self.read_field_at(proj.inverse(start + xf, start + yf))
            })?;
        }
        Ok(TileGrids {
            tile: index,
            n,
            pixel_size: delta,
            field,
            mask,
            solid_angle: self.solid_angle.clone(),
            in_core,
        })
    }

    /// The field value at direction `dir`, equal to `read_at(dir)?.0` bit for bit: the ring-wise
    /// higher-order samplings compute the linear weights only where a neighbour is bad.
    fn read_field_at(&self, dir: crate::sky::pixelization::Direction) -> Result<f64> {
        if let Some(f) = self.high_order_value(dir)? {
            return Ok(f);
        }
        Ok(self.read_at(dir)?.0)
    }

    /// The ring-cubic or ring-quintic interpolated field at `dir`, or `None` for the other
    /// methods and when one of the stencil's pixels is bad (the caller then falls back to the
    /// linear value over the valid ones).
    fn high_order_value(&self, dir: crate::sky::pixelization::Direction) -> Result<Option<f64>> {
        let nside = self.map.pixelization().nside();
        match self.method {
            SamplingMethod::RingCubic => self.stencil_value(&ring_lagrange_weights_with::<4, 16>(
                nside,
                dir,
                &self.rings,
                lagrange4_uniform,
            )),
            SamplingMethod::RingQuintic => self.stencil_value(
                &ring_lagrange_weights_with::<6, 24>(nside, dir, &self.rings, lagrange6_uniform),
            ),
            _ => Ok(None),
        }
    }

    /// Σ w·value over the (RING pixel, weight) pairs of a stencil, or `None` when a pixel of
    /// non-zero weight is bad.
    fn stencil_value(&self, weights: &[(u64, f64)]) -> Result<Option<f64>> {
        let pix = self.map.pixelization();
        let map = self.map;
        let mut sum = 0.0;
        for &(p, wt) in weights {
            if wt != 0.0 {
                let i = ring_to_map(pix, p)? as usize;
                if !self.all_valid && !map.is_valid(i) {
                    return Ok(None);
                }
                sum += wt * map.value(i);
            }
        }
        Ok(Some(sum))
    }

    /// The field and mask values at direction `dir` by the sampling method.
    fn read_at(&self, dir: crate::sky::pixelization::Direction) -> Result<(f64, f64)> {
        self.read(dir, true)
    }

    /// [`Self::read_at`], with the ring-cubic field left out (0) when `with_field` is false
    /// (the mask value is the same).
    fn read(
        &self,
        dir: crate::sky::pixelization::Direction,
        with_field: bool,
    ) -> Result<(f64, f64)> {
        let pix = self.map.pixelization();
        let map = self.map;
        Ok(match self.method {
            SamplingMethod::Bilinear => {
                let w = pix.bilinear_weights(dir)?.map(|(p, wt)| (p as usize, wt));
                let (sum, wsum, msum) = self.linear_sums(&w);
                let f = if wsum > 0.0 { sum / wsum } else { 0.0 };
                (f, msum)
            }
            SamplingMethod::Nearest => {
                let i = pix.pixel_of(dir) as usize;
                if map.is_valid(i) {
                    (map.value(i), self.mask.get(i))
                } else {
                    (0.0, 0.0)
                }
            }
            SamplingMethod::RingLinear => {
                let (sum, wsum, msum) = self.linear_sums(&self.ring_linear_stencil(dir)?);
                let f = if wsum > 0.0 { sum / wsum } else { 0.0 };
                (f, msum)
            }
            SamplingMethod::RingCubic | SamplingMethod::RingQuintic => {
                let (lsum, lw, msum) = self.linear_sums(&self.ring_linear_stencil(dir)?);
                // next to bad pixels, fall back to the linear value over the valid ones
                if !with_field {
                    return Ok((0.0, msum));
                }
                let f = match self.high_order_value(dir)? {
                    Some(f) => f,
                    None if lw > 0.0 => lsum / lw,
                    None => 0.0,
                };
                (f, msum)
            }
        })
    }

    /// The ring-linear stencil at `dir` as (map index, weight) pairs.
    fn ring_linear_stencil(
        &self,
        dir: crate::sky::pixelization::Direction,
    ) -> Result<[(usize, f64); 4]> {
        let pix = self.map.pixelization();
        let mut out = [(0usize, 0.0f64); 4];
        for (slot, (p, wt)) in out.iter_mut().zip(ring_interpolation_weights_with(
            pix.nside(),
            dir,
            &self.rings,
        )) {
            *slot = (ring_to_map(pix, p)? as usize, wt);
        }
        Ok(out)
    }

    /// Over the valid pixels of positive weight of a linear stencil: Σ w·value, Σ w and
    /// Σ w·mask.
    fn linear_sums(&self, stencil: &[(usize, f64)]) -> (f64, f64, f64) {
        let map = self.map;
        let (mut sum, mut wsum, mut msum) = (0.0, 0.0, 0.0);
        for &(i, wt) in stencil {
            if wt > 0.0 && map.is_valid(i) {
                sum += wt * map.value(i);
                wsum += wt;
                msum += wt * self.mask.get(i);
            }
        }
        (sum, wsum, msum)
    }

    /// The tiles' grids one after the other, each made when the iterator reaches it.
    pub fn iter(&self) -> impl Iterator<Item = Result<TileGrids>> + '_ {
        (0..self.plan.len()).map(move |i| self.sample(i))
    }

    /// Runs `work` on every tile's grids, in parallel over tiles (rayon), each worker holding one
    /// tile's grids at a time; results come back in tile order.
    pub fn map_tiles<R, F>(&self, work: F) -> Result<Vec<R>>
    where
        R: Send,
        F: Fn(TileGrids) -> Result<R> + Sync + Send,
    {
        (0..self.plan.len())
            .into_par_iter()
            .map(|i| work(self.sample(i)?))
            .collect()
    }
}

/// The sampling of one tile as a sparse linear operator on the map values: with the map's
/// valid-pixel pattern fixed, tile pixel k reads f_k = (Σ_e w_e m\[p_e\]) / d_k over its entries
/// e (HEALPix pixels p_e in the map's ordering and weights w_e, in the order
/// [`TileSampler::sample`] reads them) and a divisor d_k (the sum of the weights of the valid
/// neighbours for the renormalised linear schemes, 1 otherwise). So f = S m exactly as the
/// sampler computes it, and the adjoint m̄\[p_e\] += (w_e / d_k)·f̄_k (scatter-add) gives the
/// gradient of any function of the tile field with respect to the map (definition of the
/// adjoint, ⟨S m, y⟩ = ⟨m, Sᵀ y⟩; common practice).
#[derive(Debug, Clone, PartialEq)]
pub struct TileSamplingOperator {
    tile: usize,
    npix: usize,
    /// Entries of tile pixel k: `pixels[starts[k]..starts[k + 1]]`, same for `weights`.
    starts: Vec<usize>,
    pixels: Vec<u64>,
    weights: Vec<f64>,
    divisors: Vec<f64>,
}

impl TileSamplingOperator {
    /// Index of the tile in its plan.
    pub fn tile(&self) -> usize {
        self.tile
    }

    /// Number of tile pixels (rows of S).
    pub fn rows(&self) -> usize {
        self.divisors.len()
    }

    /// Number of map pixels (columns of S).
    pub fn columns(&self) -> usize {
        self.npix
    }

    /// Tile pixel `k`'s entries as (map pixel, effective weight w/d) pairs.
    pub fn row(&self, k: usize) -> impl Iterator<Item = (u64, f64)> + '_ {
        let (a, b) = (self.starts[k], self.starts[k + 1]);
        let d = self.divisors[k];
        self.pixels[a..b]
            .iter()
            .zip(&self.weights[a..b])
            .map(move |(&p, &w)| (p, w / d))
    }

    /// Every map pixel the tile reads (sorted, without repeats).
    pub fn touched_pixels(&self) -> Vec<u64> {
        let mut v = self.pixels.clone();
        v.sort_unstable();
        v.dedup();
        v
    }

    fn check_columns(&self, len: usize) -> Result<()> {
        if len != self.npix {
            return Err(Error::Mismatch(format!(
                "{len} map values given, the tile sampling reads a map of {} pixels",
                self.npix
            )));
        }
        Ok(())
    }

    /// f = S m: the tile field of map values `values` (map ordering, bad pixels as the sampler
    /// saw them are never read).
    pub fn apply(&self, values: &[f64]) -> Result<Vec<f64>> {
        self.check_columns(values.len())?;
        Ok((0..self.rows())
            .map(|k| {
                let mut sum = 0.0;
                for e in self.starts[k]..self.starts[k + 1] {
                    sum += self.weights[e] * values[self.pixels[e] as usize];
                }
                sum / self.divisors[k]
            })
            .collect())
    }

    /// m̄ += Sᵀ f̄: adds (w_e/d_k)·f̄_k to `map_values[p_e]` for every entry, tile pixels in
    /// order (a fixed-order scatter-add, so the result does not depend on threads).
    pub fn adjoint_add(&self, tile_values: &[f64], map_values: &mut [f64]) -> Result<()> {
        self.check_columns(map_values.len())?;
        if tile_values.len() != self.rows() {
            return Err(Error::Mismatch(format!(
                "{} tile values given, the tile has {} pixels",
                tile_values.len(),
                self.rows()
            )));
        }
        for (k, &y) in tile_values.iter().enumerate() {
            if y == 0.0 {
                continue;
            }
            let yd = y / self.divisors[k];
            for e in self.starts[k]..self.starts[k + 1] {
                map_values[self.pixels[e] as usize] += self.weights[e] * yd;
            }
        }
        Ok(())
    }

    /// Sᵀ f̄ as a new map-sized vector.
    pub fn adjoint(&self, tile_values: &[f64]) -> Result<Vec<f64>> {
        let mut out = vec![0.0; self.npix];
        self.adjoint_add(tile_values, &mut out)?;
        Ok(out)
    }
}

impl TileSampler<'_> {
    /// The sampling of tile `index` as a sparse operator (see [`TileSamplingOperator`]): for
    /// the map this sampler was made with, `operator(i)?.apply(map.values())` equals
    /// `sample(i)?.field` bit for bit, and it stays the exact sampling of any map with the
    /// same valid pixels.
    pub fn operator(&self, index: usize) -> Result<TileSamplingOperator> {
        if self.band_limit.is_some() {
            return Err(Error::Setting(format!(
                "the sampling as an operator needs plane pixels no coarser than the map's ({:.2}′ against {:.2}′ spacing): use --pixel-arcmin at most the map spacing",
                self.plan.pixel_size().to_degrees() * 60.0,
                self.map.pixelization().mean_spacing().to_degrees() * 60.0
            )));
        }
        let plan = self.plan;
        let tile = plan.tile(index)?;
        let proj = Gnomonic::new(tile.center);
        let n = plan.tile_pixels();
        let pix = self.map.pixelization();
        let coords: Vec<f64> = (0..n).map(|k| plan.plane_coordinate(k)).collect();
        let mut starts = Vec::with_capacity(n * n + 1);
        let mut pixels = Vec::with_capacity(n * n * 4);
        let mut weights = Vec::with_capacity(n * n * 4);
        let mut divisors = Vec::with_capacity(n * n);
        starts.push(0);
        for &y in &coords {
            for &x in &coords {
                let divisor = self.point_entries(proj.inverse(x, y), &mut pixels, &mut weights)?;
                divisors.push(divisor);
                starts.push(pixels.len());
            }
        }
        Ok(TileSamplingOperator {
            tile: index,
            npix: pix.npix() as usize,
            starts,
            pixels,
            weights,
            divisors,
        })
    }

    /// Appends the entries (map pixel, weight) of the plane point in direction `dir` to
    /// `pixels` and `weights` and returns the divisor of their sum.
    fn point_entries(
        &self,
        dir: crate::sky::pixelization::Direction,
        pixels: &mut Vec<u64>,
        weights: &mut Vec<f64>,
    ) -> Result<f64> {
        let pix = self.map.pixelization();
        let valid = |i: usize| self.map.is_valid(i);
        Ok(match self.method {
            SamplingMethod::Bilinear => {
                push_linear(&pix.bilinear_weights(dir)?, valid, pixels, weights)
            }
            SamplingMethod::Nearest => {
                let i = pix.pixel_of(dir);
                if valid(i as usize) {
                    pixels.push(i);
                    weights.push(1.0);
                }
                1.0
            }
            SamplingMethod::RingLinear => {
                push_linear(&ring_linear_pairs(pix, dir)?, valid, pixels, weights)
            }
            SamplingMethod::RingCubic | SamplingMethod::RingQuintic => {
                let cubic = high_order_weights(self.method, pix.nside(), dir)
                    .iter()
                    .filter(|&&(_, wt)| wt != 0.0)
                    .map(|&(p, wt)| Ok((ring_to_map(pix, p)?, wt)))
                    .collect::<Result<Vec<_>>>()?;
                if cubic.iter().all(|&(i, _)| valid(i as usize)) {
                    for (i, wt) in cubic {
                        pixels.push(i);
                        weights.push(wt);
                    }
                    1.0
                } else {
                    // next to bad pixels: the linear value over the valid ones
                    push_linear(&ring_linear_pairs(pix, dir)?, valid, pixels, weights)
                }
            }
        })
    }
}

/// Renormalised linear weights over the valid neighbours: appends the entries of positive
/// weight at valid pixels and returns their sum (1 when there is none).
fn push_linear(
    pairs: &[(u64, f64)],
    valid: impl Fn(usize) -> bool,
    pixels: &mut Vec<u64>,
    weights: &mut Vec<f64>,
) -> f64 {
    let mut wsum = 0.0;
    for &(i, wt) in pairs {
        if wt > 0.0 && valid(i as usize) {
            pixels.push(i);
            weights.push(wt);
            wsum += wt;
        }
    }
    if wsum > 0.0 {
        wsum
    } else {
        1.0
    }
}

/// The ring-linear interpolation weights at `dir`, with pixels in `pix`'s ordering.
fn ring_linear_pairs(
    pix: Pixelization,
    dir: crate::sky::pixelization::Direction,
) -> Result<Vec<(u64, f64)>> {
    ring_interpolation_weights(pix.nside(), dir)
        .iter()
        .map(|&(p, wt)| Ok((ring_to_map(pix, p)?, wt)))
        .collect()
}

/// Index in `pix`'s ordering of RING pixel `p`.
fn ring_to_map(pix: Pixelization, p: u64) -> Result<u64> {
    match pix.ordering() {
        Ordering::Ring => Ok(p),
        Ordering::Nested => Pixelization::new(pix.nside(), Ordering::Ring)?.to_nested(p),
    }
}

/// Bilinear interpolation in an n × n plane grid at plane point (x, y) (radians); points beyond
/// the outermost pixel centres are extrapolated from the edge cell. `None` outside the grid.
pub fn plane_interpolate(field: &[f64], n: usize, pixel_size: f64, x: f64, y: f64) -> Option<f64> {
    let half = n as f64 / 2.0;
    let u = x / pixel_size + half - 0.5;
    let v = y / pixel_size + half - 0.5;
    if !(u >= -0.5 && v >= -0.5 && u <= n as f64 - 0.5 && v <= n as f64 - 0.5) || n < 2 {
        return None;
    }
    let i0 = (u.floor().max(0.0) as usize).min(n - 2);
    let j0 = (v.floor().max(0.0) as usize).min(n - 2);
    let (tu, tv) = (u - i0 as f64, v - j0 as f64);
    let at = |i: usize, j: usize| field[j * n + i];
    Some(
        (1.0 - tv) * ((1.0 - tu) * at(i0, j0) + tu * at(i0 + 1, j0))
            + tv * ((1.0 - tu) * at(i0, j0 + 1) + tu * at(i0 + 1, j0 + 1)),
    )
}

/// A field on tile `index` (n × n, the grid layout of [`TileGrids`]) taken back to the sphere:
/// for every fine pixel of the tile's core, its centre is projected onto the plane and the field
/// interpolated bilinearly there. Returns (pixel in the map's ordering, value) pairs.
pub fn back_project(plan: &TilingPlan, index: usize, field: &[f64]) -> Result<Vec<(u64, f64)>> {
    let n = plan.tile_pixels();
    if field.len() != n * n {
        return Err(Error::Mismatch(format!(
            "a tile field of {} values does not fit a {n} × {n} tile",
            field.len()
        )));
    }
    let proj = plan.projection(index)?;
    let map = plan.map_pixelization();
    let mut out = Vec::new();
    for p in plan.core_pixels(index)? {
        let dir = map.center(p);
        let value = proj
            .forward(dir)
            .and_then(|(x, y)| plane_interpolate(field, n, plan.pixel_size(), x, y))
            .ok_or_else(|| {
                Error::Setting(format!(
                    "core pixel {p} of tile {index} falls outside its grid"
                ))
            })?;
        out.push((p, value));
    }
    Ok(out)
}

/// One map from the back-projections of every tile's field: `field_of(index)` gives tile
/// `index`'s field (computed on demand, in parallel over tiles); pixels outside all kept cores
/// are invalid.
pub fn assemble<F>(plan: &TilingPlan, field_of: F) -> Result<SkyMap>
where
    F: Fn(usize) -> Result<Vec<f64>> + Sync + Send,
{
    let parts: Vec<Vec<(u64, f64)>> = (0..plan.len())
        .into_par_iter()
        .map(|i| back_project(plan, i, &field_of(i)?))
        .collect::<Result<_>>()?;
    let map = plan.map_pixelization();
    let mut values = vec![f64::NAN; map.npix() as usize];
    for part in parts {
        for (p, v) in part {
            values[p as usize] = v;
        }
    }
    SkyMap::new(map, values)
}

/// Power transfer of sampling for one plane wave, see [`plane_wave_transfer`].
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct PlaneWaveTransfer {
    /// |G|², with G = Σ s·t̄ / Σ |t|² the gain of the sampled wave s on the true wave t.
    pub power: f64,
    /// Σ |s − G t|² / Σ |t|²: power moved to other wavevectors (aliasing, position-dependent
    /// smoothing), relative to the wave's power.
    pub scattered: f64,
}

/// Measures how sampling a map of pixelization `map` onto an n × n tile grid of pixel size
/// `pixel_size`, tangent at `center`, transfers a plane wave of `wavelength` (radians of the
/// tangent plane) travelling at `angle` from the x axis (east) toward y (north).
///
/// The true field is t(x, y) = exp(i k·(x, y)) in the tile's plane coordinates, a smooth field on
/// the sphere. The map holds t at its pixel centres (point samples, as a simulated map does);
/// s is that map read at the plane pixels' directions with `method`, and t is evaluated there
/// exactly. The gain G = Σ s·t̄ / Σ |t|² is the Fourier coefficient of s at the wave's own
/// wavevector divided by that of t, so |G|² = |FFT(s)|²/|FFT(t)|² at k (without needing k on the
/// FFT's lattice). For 1-D linear interpolation at spacing h the gain is
/// ∫₀¹ [(1−u) e^{−ikhu} + u e^{ikh(1−u)}] du = sinc²(kh/2) (sinc x = sin x / x; derivation by
/// direct integration).
pub fn plane_wave_transfer(
    map: Pixelization,
    center: crate::sky::pixelization::Direction,
    n: usize,
    pixel_size: f64,
    wavelength: f64,
    angle: f64,
    method: SamplingMethod,
) -> Result<PlaneWaveTransfer> {
    let proj = Gnomonic::new(center);
    let k = 2.0 * std::f64::consts::PI / wavelength;
    let (kx, ky) = (k * angle.cos(), k * angle.sin());
    let wave = |x: f64, y: f64| {
        let ph = kx * x + ky * y;
        num_complex::Complex64::new(ph.cos(), ph.sin())
    };
    let wave_at_pixel = |p: u64| -> Result<num_complex::Complex64> {
        let (x, y) = proj.forward(map.center(p)).ok_or_else(|| {
            Error::Setting("the tile reaches the far hemisphere of its centre".to_string())
        })?;
        Ok(wave(x, y))
    };
    let coord = |k: usize| (k as f64 - n as f64 / 2.0 + 0.5) * pixel_size;
    let mut sampled = Vec::with_capacity(n * n);
    let mut truth = Vec::with_capacity(n * n);
    for iy in 0..n {
        for ix in 0..n {
            let (x, y) = (coord(ix), coord(iy));
            let dir = proj.inverse(x, y);
            let s = match method {
                SamplingMethod::Bilinear => {
                    let mut s = num_complex::Complex64::new(0.0, 0.0);
                    for (p, w) in map.bilinear_weights(dir)? {
                        if w > 0.0 {
                            s += w * wave_at_pixel(p)?;
                        }
                    }
                    s
                }
                SamplingMethod::Nearest => wave_at_pixel(map.pixel_of(dir))?,
                SamplingMethod::RingLinear => {
                    let mut s = num_complex::Complex64::new(0.0, 0.0);
                    for (p, w) in ring_interpolation_weights(map.nside(), dir) {
                        if w > 0.0 {
                            s += w * wave_at_pixel(ring_to_map(map, p)?)?;
                        }
                    }
                    s
                }
                SamplingMethod::RingCubic | SamplingMethod::RingQuintic => {
                    let mut s = num_complex::Complex64::new(0.0, 0.0);
                    for (p, w) in high_order_weights(method, map.nside(), dir) {
                        if w != 0.0 {
                            s += w * wave_at_pixel(ring_to_map(map, p)?)?;
                        }
                    }
                    s
                }
            };
            sampled.push(s);
            truth.push(wave(x, y));
        }
    }
    Ok(transfer_of(&sampled, &truth))
}

/// The gain G = Σ s·t̄ / Σ |t|² of sampled values s against the true wave t, as |G|², and the
/// power scattered away from the wave, Σ |s − G t|² / Σ |t|².
fn transfer_of(
    sampled: &[num_complex::Complex64],
    truth: &[num_complex::Complex64],
) -> PlaneWaveTransfer {
    let norm: f64 = truth.iter().map(|t| t.norm_sqr()).sum();
    let gain = sampled
        .iter()
        .zip(truth)
        .map(|(s, t)| s * t.conj())
        .sum::<num_complex::Complex64>()
        / norm;
    let scattered: f64 = sampled
        .iter()
        .zip(truth)
        .map(|(s, t)| (s - gain * t).norm_sqr())
        .sum::<f64>()
        / norm;
    PlaneWaveTransfer {
        power: gain.norm_sqr(),
        scattered,
    }
}

/// Index (1-based, HEALPix ring numbering) of the iso-latitude ring just north of colatitude
/// `theta` (0 when above the first ring), clamped to 4·NSIDE − 1 (Górski et al. 2005, ring
/// latitudes: z = 4/3 − 2i/(3 NSIDE) in the equatorial belt, 1 − z = 2 sin²(θ/2) = i²/(3 NSIDE²)
/// in the caps).
fn ring_above(n: u64, theta: f64) -> u64 {
    let z = theta.cos();
    let above = if z.abs() <= 2.0 / 3.0 {
        (n as f64 * (2.0 - 1.5 * z)) as u64
    } else if z > 0.0 {
        (n as f64 * (6.0f64).sqrt() * (theta / 2.0).sin()) as u64
    } else {
        let k = (n as f64 * (6.0f64).sqrt() * (theta / 2.0).cos()) as u64;
        4 * n - k - 1
    };
    above.min(4 * n - 1)
}

/// Ring-wise linear interpolation weights at `dir`, as four (RING pixel, weight) pairs summing
/// to 1: linear in φ between the two nearest pixel centres on the ring just north of `dir` and
/// on the ring just south, then linear in θ between the two rings; above the first (below the
/// last) ring the missing ring is replaced by the pole value, the mean of the first (last)
/// ring's four pixels. This is the scheme of healpy 1.20.1 `get_interp_weights` (HEALPix C++
/// `get_interpol`), against which it is checked to 1e-12 (reference-values/
/// ring_interpolation_reference.py). Unlike the bilinear weights of the HEALPix projection plane,
/// it has no seams at the polar base-pixel boundaries.
pub fn ring_interpolation_weights(
    nside: u32,
    dir: crate::sky::pixelization::Direction,
) -> [(u64, f64); 4] {
    ring_interpolation_weights_with(nside, dir, &RingFormulas(nside as u64))
}

/// [`ring_interpolation_weights`] with the rings' geometry from `rings` (formulas or a
/// [`RingTable`]: the same values).
fn ring_interpolation_weights_with(
    nside: u32,
    dir: crate::sky::pixelization::Direction,
    rings: &impl RingLookup,
) -> [(u64, f64); 4] {
    let n = nside as u64;
    let theta = dir.theta.clamp(0.0, std::f64::consts::PI);
    let phi = dir.lon();
    let above = ring_above(n, theta);
    let on_ring = |i: u64| -> ([(u64, f64); 2], f64) {
        let (first, count, shifted) = rings.info(i);
        let dphi = rings.spacing(i);
        let t = phi / dphi - if shifted { 0.5 } else { 0.0 };
        let j = floor_i64(t);
        let w = t - j as f64;
        let j1 = wrap(j, count);
        let j2 = if j1 + 1 == count { 0 } else { j1 + 1 };
        ([(first + j1, 1.0 - w), (first + j2, w)], rings.theta(i))
    };
    let npix = 12 * n * n;
    if above == 0 {
        let ([a, b], theta2) = on_ring(1);
        let wt = theta / theta2;
        let fac = (1.0 - wt) * 0.25;
        [
            ((a.0 + 2) & 3, fac),
            ((b.0 + 2) & 3, fac),
            (a.0, a.1 * wt + fac),
            (b.0, b.1 * wt + fac),
        ]
    } else if above == 4 * n - 1 {
        let ([a, b], theta1) = on_ring(above);
        let wt = (theta - theta1) / (std::f64::consts::PI - theta1);
        let fac = wt * 0.25;
        [
            (a.0, a.1 * (1.0 - wt) + fac),
            (b.0, b.1 * (1.0 - wt) + fac),
            (((a.0 + 2) & 3) + npix - 4, fac),
            (((b.0 + 2) & 3) + npix - 4, fac),
        ]
    } else {
        let ([a, b], theta1) = on_ring(above);
        let ([c, d], theta2) = on_ring(above + 1);
        let wt = (theta - theta1) / (theta2 - theta1);
        [
            (a.0, a.1 * (1.0 - wt)),
            (b.0, b.1 * (1.0 - wt)),
            (c.0, c.1 * wt),
            (d.0, d.1 * wt),
        ]
    }
}

/// N-point Lagrange weights at abscissa `x` for the nodes `t` (exact for polynomials of degree
/// N − 1): w_i = Π_{k≠i} (x − t_k)/(t_i − t_k) (Abramowitz & Stegun 25.2.2).
fn lagrange<const N: usize>(t: [f64; N], x: f64) -> [f64; N] {
    let mut w = [1.0; N];
    for (i, wi) in w.iter_mut().enumerate() {
        for (k, &tk) in t.iter().enumerate() {
            if k != i {
                *wi *= (x - tk) / (t[i] - tk);
            }
        }
    }
    w
}

/// Ring-wise cubic interpolation weights at `dir`, as sixteen (RING pixel, weight) pairs summing
/// to 1. Our design, extending the ring-wise linear scheme of [`ring_interpolation_weights`] to
/// third order: on each of the four rings i−1, i, i+1, i+2 around `dir` (i the ring just north),
/// the value at the longitude of `dir` is the four-point Lagrange interpolation
/// (Abramowitz & Stegun 25.2.2) of the ring's four nearest pixel centres (uniform spacing
/// 2π/n_ring, so the weights at fractional offset u are −u(u−1)(u−2)/6, (u+1)(u−1)(u−2)/2,
/// −(u+1)u(u−2)/2, (u+1)u(u−1)/6); the four ring values are then Lagrange-interpolated in
/// colatitude at the rings' true θ (uneven in the polar caps). Where the four rings do not exist
/// (within two rings of a pole) the linear weights are returned, padded with zero weights.
/// For a plane wave of wavelength λ ≫ h the power lost is O((h/λ)⁴) instead of the linear
/// schemes' O((h/λ)²).
pub fn ring_cubic_interpolation_weights(
    nside: u32,
    dir: crate::sky::pixelization::Direction,
) -> [(u64, f64); 16] {
    ring_lagrange_weights_with::<4, 16>(nside, dir, &RingFormulas(nside as u64), lagrange4_uniform)
}

/// Four-point Lagrange weights at offset u ∈ [0, 1) for the unit-spaced nodes −1, 0, 1, 2
/// ([`lagrange`]).
fn lagrange4_uniform(u: f64) -> [f64; 4] {
    lagrange([-1.0, 0.0, 1.0, 2.0], u)
}

/// Six-point Lagrange weights at offset u ∈ [0, 1) for the unit-spaced nodes −2 … 3:
/// w_i = c_i · Π_{k≠i} (u − t_k) with c_i = 1/Π_{k≠i} (t_i − t_k) = −1/120, 1/24, −1/12, 1/12,
/// −1/24, 1/120 (Abramowitz & Stegun 25.2.2; the products from prefix and suffix products, so
/// no division per read).
fn lagrange6_uniform(u: f64) -> [f64; 6] {
    const C: [f64; 6] = [
        -1.0 / 120.0,
        1.0 / 24.0,
        -1.0 / 12.0,
        1.0 / 12.0,
        -1.0 / 24.0,
        1.0 / 120.0,
    ];
    let d = [u + 2.0, u + 1.0, u, u - 1.0, u - 2.0, u - 3.0];
    let mut prefix = [1.0; 6];
    for i in 1..6 {
        prefix[i] = prefix[i - 1] * d[i - 1];
    }
    let mut w = [0.0; 6];
    let mut suffix = 1.0;
    for i in (0..6).rev() {
        w[i] = C[i] * prefix[i] * suffix;
        suffix *= d[i];
    }
    w
}

/// Ring-wise interpolation weights at `dir` with A-point Lagrange interpolation along each of the
/// four rings i−1 … i+2 (A = 4: [`ring_cubic_interpolation_weights`]; A = 6:
/// [`ring_quintic_interpolation_weights`]) and four-point across them, as M = 4A (RING pixel,
/// weight) pairs; the rings' geometry from `rings`. Within two rings of a pole, the linear
/// weights padded with zero weights.
fn ring_lagrange_weights_with<const A: usize, const M: usize>(
    nside: u32,
    dir: crate::sky::pixelization::Direction,
    rings: &impl RingLookup,
    along_weights: fn(f64) -> [f64; A],
) -> [(u64, f64); M] {
    debug_assert_eq!(M, 4 * A);
    let n = nside as u64;
    let theta = dir.theta.clamp(0.0, std::f64::consts::PI);
    let phi = dir.lon();
    let above = ring_above(n, theta);
    let mut out = [(0u64, 0.0f64); M];
    if above < 2 || above + 2 > 4 * n - 1 {
        for (slot, pair) in out
            .iter_mut()
            .zip(ring_interpolation_weights_with(nside, dir, rings))
        {
            *slot = pair;
        }
        return out;
    }
    let around = [above - 1, above, above + 1, above + 2];
    let thetas = around.map(|i| rings.theta(i));
    let across = lagrange(thetas, theta);
    // the A nodes along a ring, in pixels from the pixel just west of `dir`: 1 − A/2 … A/2
    let first_node = 1 - (A / 2) as i64;
    for (r, (&i, &wr)) in around.iter().zip(&across).enumerate() {
        let (first, count, shifted) = rings.info(i);
        let dphi = rings.spacing(i);
        let t = phi / dphi - if shifted { 0.5 } else { 0.0 };
        let j = floor_i64(t);
        let u = t - j as f64;
        let along = along_weights(u);
        for (k, &wk) in along.iter().enumerate() {
            let idx = wrap(j + first_node + k as i64, count);
            out[A * r + k] = (first + idx, wr * wk);
        }
    }
    out
}

/// The stencil of the ring-wise higher-order `method` at `dir` (ring-cubic: 16 pairs,
/// ring-quintic: 24); empty for the other methods.
fn high_order_weights(
    method: SamplingMethod,
    nside: u32,
    dir: crate::sky::pixelization::Direction,
) -> Vec<(u64, f64)> {
    match method {
        SamplingMethod::RingCubic => ring_cubic_interpolation_weights(nside, dir).to_vec(),
        SamplingMethod::RingQuintic => ring_quintic_interpolation_weights(nside, dir).to_vec(),
        _ => Vec::new(),
    }
}

/// Ring-wise quintic interpolation weights at `dir`, as twenty-four (RING pixel, weight) pairs
/// summing to 1. Our design: as [`ring_cubic_interpolation_weights`], with six-point Lagrange
/// interpolation (Abramowitz & Stegun 25.2.2, degree 5) along each of the four rings i−1 … i+2
/// and the same four-point interpolation across them. Along a ring the pixel spacing
/// (2π sin θ / n_ring: 1.5 h at the equator, 1.1–1.3 h elsewhere) is the coarser one, so the
/// extra order goes there: for a plane wave of wavelength 8 h (the default finest scale) the
/// power kept is 0.994–0.997 at every latitude, against 0.978–0.990 with four points, whose
/// latitude dependence biased a comparison of footprints at different latitudes
/// (`tests/sphere_ring_quintic.rs`).
pub fn ring_quintic_interpolation_weights(
    nside: u32,
    dir: crate::sky::pixelization::Direction,
) -> [(u64, f64); 24] {
    ring_lagrange_weights_with::<6, 24>(nside, dir, &RingFormulas(nside as u64), lagrange6_uniform)
}

#[cfg(test)]
mod tests {
    use super::BandLimit;

    #[test]
    fn six_point_weights_give_the_midpoint_rule_and_reproduce_quintics() {
        // At u = ½ the six-point Lagrange weights are (3, −25, 150, 150, −25, 3)/256 (the
        // midpoint rule of A&S 25.2.2, evaluated by hand); at any u they reproduce every
        // polynomial of degree ≤ 5 at the nodes −2 … 3 (A&S 25.2.2).
        let w = super::lagrange6_uniform(0.5);
        let expected = [3.0, -25.0, 150.0, 150.0, -25.0, 3.0].map(|x: f64| x / 256.0);
        for (a, b) in w.iter().zip(expected) {
            assert!((a - b).abs() < 1e-15, "{w:?}");
        }
        for u in [0.0, 0.13, 0.5, 0.77, 0.999] {
            let w = super::lagrange6_uniform(u);
            for degree in 0..=5 {
                let p = |x: f64| (x + 0.3).powi(degree);
                let interpolated: f64 = (0..6).map(|k| w[k] * p(k as f64 - 2.0)).sum();
                assert!(
                    (interpolated - p(u)).abs() < 1e-12,
                    "degree {degree} at {u}"
                );
            }
            let generic = super::lagrange([-2.0, -1.0, 0.0, 1.0, 2.0, 3.0], u);
            for (a, b) in w.iter().zip(generic) {
                assert!((a - b).abs() < 1e-14);
            }
        }
    }
    use std::f64::consts::PI;

    /// Largest deviation, more than 8 plane pixels (the tile-border ramp) inside the tile, of the band-limited field of a plane wave of wavenumber
    /// (kx, ky) (radians per plane pixel) from `expected(x, y)`.
    fn worst(band: &BandLimit, kx: f64, ky: f64, expected: impl Fn(f64, f64) -> f64) -> f64 {
        let out = band
            .apply(1.0, |x, y| Ok((kx * x + ky * y + 0.3).cos()))
            .unwrap();
        let n = band.n;
        let mut worst: f64 = 0.0;
        for iy in 8..n - 8 {
            for ix in 8..n - 8 {
                let e = expected(ix as f64, iy as f64);
                worst = worst.max((out[iy * n + ix] - e).abs());
            }
        }
        worst
    }

    #[test]
    fn band_limit_keeps_a_band_limited_field() {
        // Sampling theorem (Bracewell, ch. 10): a wave below the plane grid's Nyquist
        // frequency π per pixel passes; only the window's leakage (margin) perturbs it.
        // Measured: at most 3.4e-4 (wave at 0.6π), 5e-5 at 0.2π.
        for s in [2, 3] {
            let band = BandLimit::new(48, s);
            for (kx, ky) in [(0.2 * PI, 0.1 * PI), (0.5 * PI, -0.3 * PI), (0.0, 0.6 * PI)] {
                let w = worst(&band, kx, ky, |x, y| (kx * x + ky * y + 0.3).cos());
                assert!(
                    w < 1e-3,
                    "s = {s}, k = ({kx:.2}, {ky:.2}): worst deviation {w:.2e}"
                );
            }
        }
    }

    #[test]
    fn band_limit_removes_what_the_plane_grid_cannot_carry() {
        // A wave between the plane grid's Nyquist (π per pixel) and the fine grid's would
        // alias onto the plane grid when read directly; cut to the band it is gone.
        let band = BandLimit::new(48, 3);
        for (kx, ky) in [
            (1.4 * PI, 0.2 * PI),
            (0.3 * PI, 1.8 * PI),
            (2.2 * PI, 2.2 * PI),
        ] {
            let w = worst(&band, kx, ky, |_, _| 0.0);
            assert!(w < 1e-3, "k = ({kx:.2}, {ky:.2}): residual {w:.2e}");
        }
    }
}
