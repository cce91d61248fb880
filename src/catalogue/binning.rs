//! Galaxies binned into HEALPix maps: counts, weights, mean shear, shape-noise variance, density
//! contrast and footprint, streamed block by block so a catalogue need not fit in memory.
//!
//! Galaxy i at (RA_i, Dec_i) falls in the RING pixel p(i) containing θ = 90° − Dec, φ = RA
//! ([`Pixelization::pixel_of`], cdshealpix). Per pixel p, over the galaxies i ∈ p that pass
//! [`super::screening`], with weights w_i and ellipticities e_i = e1_i + i e2_i:
//!
//! * N_p, the number of galaxies, and W_p = Σ w_i;
//! * γ_p = Σ w_i e_i / W_p, the weighted mean ellipticity, an estimate of the reduced shear
//!   (Bartelmann & Schneider 2001, Phys. Rep. 340, 291, eq. 4.14: ⟨e⟩ ≈ g);
//! * σ²_p = Σ w_i² |e_i|² / (2 W_p²), the variance of each shear component under random
//!   rotations of the galaxies (for unit weights and σ_e² = ⟨|e|²⟩/2 per component, σ_e²/N_p;
//!   common practice);
//! * δ_p = N_p / n̄ − 1 with n̄ the mean of N_p over the footprint, the galaxy density contrast
//!   (unweighted counts; common practice);
//! * the footprint: the pixels with N_p ≥ the chosen minimum count (default 1).
//!
//! Outside the footprint γ, σ² and δ are invalid (UNSEEN in a file, HEALPix FITS convention);
//! N, W and the footprint are 0 there, as counts and masks are stored.
//!
//! Sums run over the galaxies in catalogue order, one block after another: the rows of a block
//! are screened and their pixels found in parallel, then each pixel's sums take its rows in row
//! order (with several threads, each thread adds the rows of its own range of pixels), so the
//! maps are bitwise the same for any block size and thread count.

use super::rotation::{rotate_ellipticity, RotationAngles};
use super::screening::{check_row, GalaxyBlock, ScreeningReport};
use super::source::CatalogueSource;
use crate::error::{Error, Result};
use crate::io::fits_io::MAX_READ_NSIDE;
use crate::sky::footprint::Footprint;
use crate::sky::pixelization::{Direction, Ordering, Pixelization};
use crate::sky::skymap::SkyMap;
use rayon::prelude::*;

/// Rows whose pixels one parallel task finds (fixed, so the work split never depends on the
/// thread count; the results are the same either way).
const PIXEL_TASK_ROWS: usize = 8192;

/// Blocks of fewer rows are added to the sums by one thread (see [`add_in_row_order`]).
const PARALLEL_MIN_ROWS: usize = 256;

/// Shape-noise realisations to bin beside the data (see [`super::rotation`]).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct NoiseRealisations {
    /// Seed of the rotation angles.
    pub seed: u64,
    /// Indices k of the realisations.
    pub indices: Vec<u64>,
}

/// How to bin a catalogue.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct BinningPlan {
    /// NSIDE of the maps (RING ordering).
    pub nside: u32,
    /// Pixels with at least this many galaxies form the footprint (≥ 1).
    pub min_galaxies: u64,
    /// Rows read per block.
    pub block_rows: usize,
    /// Noise realisations, if any.
    pub noise: Option<NoiseRealisations>,
}

impl BinningPlan {
    /// A plan at `nside` with footprint threshold 1, default blocks and no noise realisations.
    pub fn new(nside: u32) -> Self {
        BinningPlan {
            nside,
            min_galaxies: 1,
            block_rows: super::source::DEFAULT_BLOCK_ROWS,
            noise: None,
        }
    }
}

/// The sums of one pixel.
#[derive(Debug, Clone, Copy, Default)]
struct PixelSums {
    galaxies: u64,
    weight: f64,
    weight_e1: f64,
    weight_e2: f64,
    weight_sq_e_sq: f64,
}

/// One noise realisation's sums Σ w e'1, Σ w e'2 per pixel.
#[derive(Debug, Clone)]
struct NoiseSums {
    index: u64,
    sums: Vec<[f64; 2]>,
}

/// Mean shear maps of one noise realisation (invalid outside the footprint).
#[derive(Debug, Clone)]
pub struct NoiseMaps {
    /// The realisation index k.
    pub realisation: u64,
    /// γ1 of the rotated galaxies.
    pub gamma1: SkyMap,
    /// γ2 of the rotated galaxies.
    pub gamma2: SkyMap,
}

/// The maps of a binned catalogue (see the module doc for each formula).
#[derive(Debug, Clone)]
pub struct CatalogueMaps {
    /// N_p, galaxies per pixel.
    pub galaxies: SkyMap,
    /// W_p = Σ w.
    pub weight: SkyMap,
    /// γ1 = Σ w e1 / W on the footprint.
    pub gamma1: SkyMap,
    /// γ2 = Σ w e2 / W on the footprint.
    pub gamma2: SkyMap,
    /// σ²_p = Σ w²|e|² / (2 W²) on the footprint.
    pub noise_variance: SkyMap,
    /// δ = N / n̄ − 1 on the footprint.
    pub density_contrast: SkyMap,
    /// 1 on the footprint (N ≥ the minimum count), 0 elsewhere.
    pub footprint: Footprint,
    /// n̄, the mean galaxy count of the footprint's pixels.
    pub mean_galaxies: f64,
    /// Rows read, used and left out.
    pub report: ScreeningReport,
    /// The noise realisations binned beside the data, in the plan's order.
    pub noise: Vec<NoiseMaps>,
}

/// Streams galaxies into per-pixel sums ([`CatalogueBinner::add_block`]) and makes the maps
/// ([`CatalogueBinner::maps`]).
#[derive(Debug, Clone)]
pub struct CatalogueBinner {
    pix: Pixelization,
    sums: Vec<PixelSums>,
    noise_seed: u64,
    noise: Vec<NoiseSums>,
    report: ScreeningReport,
    /// Per row of the current block: its pixel, or `u64::MAX − problem` for a row left out.
    codes: Vec<u64>,
    /// Per row of the current block: w·e of the rotated ellipticity of one noise realisation.
    rotated: Vec<[f64; 2]>,
}

fn allocate<T: Clone>(what: &str, len: usize, fill: T) -> Result<Vec<T>> {
    let mut v = Vec::new();
    v.try_reserve_exact(len)
        .map_err(|_| Error::Setting(format!("not enough memory for {what}")))?;
    v.resize(len, fill);
    Ok(v)
}

/// The estimated bytes to bin at `nside` with `realisations` noise realisations: the sums
/// (40 + 16·R bytes per pixel) and the output maps (9 bytes per pixel and map).
pub fn binning_bytes(nside: u32, realisations: usize) -> f64 {
    let npix = 12.0 * (nside as f64).powi(2);
    npix * (40.0 + 16.0 * realisations as f64 + 9.0 * (7.0 + 2.0 * realisations as f64))
}

impl CatalogueBinner {
    /// Empty sums at `nside` (RING), with room for the given noise realisations.
    pub fn new(nside: u32, noise: Option<&NoiseRealisations>) -> Result<Self> {
        if nside > MAX_READ_NSIDE {
            return Err(Error::Setting(format!(
                "NSIDE {nside} is above {MAX_READ_NSIDE}, the largest map planisphere holds in memory"
            )));
        }
        let pix = Pixelization::new(nside, Ordering::Ring)?;
        let indices = noise.map_or(&[][..], |n| &n.indices[..]);
        if !indices.is_empty() {
            crate::limits::check_count("noise realisations", indices.len() as u64)?;
        }
        crate::limits::check_memory(
            &format!("binning at NSIDE {nside}"),
            binning_bytes(nside, indices.len()),
        )?;
        let npix = pix.npix() as usize;
        let what = format!("the NSIDE {nside} maps");
        let sums = allocate(&what, npix, PixelSums::default())?;
        let noise_sums = indices
            .iter()
            .map(|&index| {
                Ok(NoiseSums {
                    index,
                    sums: allocate(&what, npix, [0.0; 2])?,
                })
            })
            .collect::<Result<Vec<_>>>()?;
        Ok(CatalogueBinner {
            pix,
            sums,
            noise_seed: noise.map_or(0, |n| n.seed),
            noise: noise_sums,
            report: ScreeningReport::default(),
            codes: Vec::new(),
            rotated: Vec::new(),
        })
    }

    /// The pixelization of the maps.
    pub fn pixelization(&self) -> Pixelization {
        self.pix
    }

    /// The rows seen so far.
    pub fn report(&self) -> &ScreeningReport {
        &self.report
    }

    /// Screens a block, finds the pixels of its usable rows, and adds them to the sums in row
    /// order (the noise realisations too, with the angles of the block's catalogue rows).
    ///
    /// Three passes, so the random-access one stays short: the rows are screened and their
    /// pixels found in tasks of 8192 rows (each with its own report, merged in task order);
    /// the noise rotations are computed the same way; then a loop that does nothing else adds
    /// each row to its pixel's sums.
    pub fn add_block(&mut self, block: &GalaxyBlock) {
        let n = block.len();
        let pix = self.pix;
        self.codes.clear();
        self.codes.resize(n, 0);
        let reports: Vec<ScreeningReport> = self
            .codes
            .par_chunks_mut(PIXEL_TASK_ROWS)
            .enumerate()
            .map(|(t, codes)| screen_rows(pix, block, t * PIXEL_TASK_ROWS, codes))
            .collect();
        for r in &reports {
            self.report.merge(r);
        }
        let (w, e1, e2) = (&block.weight[..n], &block.e1[..n], &block.e2[..n]);
        add_in_row_order(&mut self.sums, &self.codes, |s, i| {
            let (w, e1, e2) = (w[i], e1[i], e2[i]);
            s.galaxies += 1;
            s.weight += w;
            s.weight_e1 += w * e1;
            s.weight_e2 += w * e2;
            s.weight_sq_e_sq += w * w * (e1 * e1 + e2 * e2);
        });
        let seed = self.noise_seed;
        for noise in &mut self.noise {
            // w·e' of every row (left-out rows too: row r always has word r of the stream)
            self.rotated.clear();
            self.rotated.resize(n, [0.0; 2]);
            self.rotated
                .par_chunks_mut(PIXEL_TASK_ROWS)
                .enumerate()
                .for_each(|(t, out)| {
                    let start = t * PIXEL_TASK_ROWS;
                    let mut angles =
                        RotationAngles::new(seed, noise.index, block.first_row + start as u64);
                    for (k, o) in out.iter_mut().enumerate() {
                        let i = start + k;
                        let alpha = angles.next_angle();
                        let (r1, r2) = rotate_ellipticity(e1[i], e2[i], alpha);
                        *o = [w[i] * r1, w[i] * r2];
                    }
                });
            let rotated = &self.rotated;
            add_in_row_order(&mut noise.sums, &self.codes, |s, i| {
                s[0] += rotated[i][0];
                s[1] += rotated[i][1];
            });
        }
    }

    /// The maps, with the footprint of pixels holding at least `min_galaxies` galaxies; an error
    /// when no row was usable or no pixel reaches the minimum.
    pub fn maps(&self, min_galaxies: u64, what: &str) -> Result<CatalogueMaps> {
        if self.report.used == 0 {
            return Err(self.report.nothing_usable(what));
        }
        let min_galaxies = min_galaxies.max(1);
        let inside: Vec<bool> = self
            .sums
            .iter()
            .map(|s| s.galaxies >= min_galaxies && s.weight > 0.0)
            .collect();
        let footprint_pixels = inside.iter().filter(|&&b| b).count();
        if footprint_pixels == 0 {
            return Err(Error::Data(format!(
                "{what}: no NSIDE {} pixel holds {min_galaxies} or more galaxies; lower the minimum or the NSIDE",
                self.pix.nside()
            )));
        }
        let total: u64 = self
            .sums
            .iter()
            .zip(&inside)
            .filter(|(_, &b)| b)
            .map(|(s, _)| s.galaxies)
            .sum();
        let mean_galaxies = total as f64 / footprint_pixels as f64;
        let on = |f: &dyn Fn(&PixelSums) -> f64| -> Result<SkyMap> {
            let values = self
                .sums
                .iter()
                .zip(&inside)
                .map(|(s, &b)| if b { f(s) } else { f64::NAN })
                .collect();
            SkyMap::new(self.pix, values)
        };
        let everywhere = |f: &dyn Fn(&PixelSums) -> f64| -> Result<SkyMap> {
            SkyMap::new(self.pix, self.sums.iter().map(f).collect())
        };
        let noise = self
            .noise
            .iter()
            .map(|n| {
                let component = |c: usize| -> Result<SkyMap> {
                    let values = n
                        .sums
                        .iter()
                        .zip(&self.sums)
                        .zip(&inside)
                        .map(|((r, s), &b)| if b { r[c] / s.weight } else { f64::NAN })
                        .collect();
                    SkyMap::new(self.pix, values)
                };
                Ok(NoiseMaps {
                    realisation: n.index,
                    gamma1: component(0)?,
                    gamma2: component(1)?,
                })
            })
            .collect::<Result<Vec<_>>>()?;
        Ok(CatalogueMaps {
            galaxies: everywhere(&|s| s.galaxies as f64)?,
            weight: everywhere(&|s| s.weight)?,
            gamma1: on(&|s| s.weight_e1 / s.weight)?,
            gamma2: on(&|s| s.weight_e2 / s.weight)?,
            noise_variance: on(&|s| s.weight_sq_e_sq / (2.0 * s.weight * s.weight))?,
            density_contrast: on(&|s| s.galaxies as f64 / mean_galaxies - 1.0)?,
            footprint: Footprint::from_weights(
                self.pix,
                inside.iter().map(|&b| if b { 1.0 } else { 0.0 }).collect(),
            )?,
            mean_galaxies,
            report: self.report.clone(),
            noise,
        })
    }
}

/// Screens rows `start..start + codes.len()` of `block`: each code is the row's RING pixel, or
/// `u64::MAX − problem` for a row left out; returns the rows' report.
fn screen_rows(
    pix: Pixelization,
    block: &GalaxyBlock,
    start: usize,
    codes: &mut [u64],
) -> ScreeningReport {
    let mut report = ScreeningReport::default();
    // the used rows' ranges, kept in registers (as `ScreeningReport::extend_ranges` would)
    let (mut ra_lo, mut ra_hi) = (f64::INFINITY, f64::NEG_INFINITY);
    let (mut dec_lo, mut dec_hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for (k, code) in codes.iter_mut().enumerate() {
        let i = start + k;
        let (ra, dec) = (block.ra[i], block.dec[i]);
        match check_row(ra, dec, block.e1[i], block.e2[i], block.weight[i]) {
            Some(problem) => {
                report.record(Some(problem));
                *code = u64::MAX - problem as u64;
            }
            None => {
                let wrapped = if (0.0..360.0).contains(&ra) {
                    ra
                } else {
                    report.ra_wrapped += 1;
                    ra.rem_euclid(360.0)
                };
                ra_lo = ra_lo.min(wrapped);
                ra_hi = ra_hi.max(wrapped);
                dec_lo = dec_lo.min(dec);
                dec_hi = dec_hi.max(dec);
                *code = pix.pixel_of(Direction::from_lonlat_deg(ra, dec));
            }
        }
    }
    let used = codes.len() as u64 - report.left_out.iter().sum::<u64>();
    report.rows += used;
    report.used += used;
    if used > 0 {
        report.ra_range = Some((ra_lo, ra_hi));
        report.dec_range = Some((dec_lo, dec_hi));
    }
    report
}

/// Calls `add(&mut sums[p], i)` for every row i whose code p is a pixel (`p < sums.len()`), in
/// row order for each pixel, so every pixel's sum is the same for any thread count.
///
/// With several threads each thread owns a contiguous range of the pixels the block touches
/// and scans all the rows for its own; one thread makes one pass. Either way the only random
/// access is to the sums, in a loop that does nothing else.
fn add_in_row_order<T: Send>(sums: &mut [T], codes: &[u64], add: impl Fn(&mut T, usize) + Sync) {
    let npix = sums.len() as u64;
    let threads = rayon::current_num_threads();
    if threads <= 1 || codes.len() < PARALLEL_MIN_ROWS {
        add_to_range(sums, 0, codes, &add);
        return;
    }
    let (lo, hi) = codes
        .iter()
        .filter(|&&c| c < npix)
        .fold((u64::MAX, 0), |(lo, hi), &c| (lo.min(c), hi.max(c)));
    if lo > hi {
        return;
    }
    let width = ((hi - lo + 1) as usize).div_ceil(threads);
    sums[lo as usize..=hi as usize]
        .par_chunks_mut(width)
        .enumerate()
        .for_each(|(k, part)| add_to_range(part, lo + (k * width) as u64, codes, &add));
}

/// How many rows ahead [`add_to_range`] asks the processor for a pixel's sums: enough rows
/// to cover a main-memory access, so that the sums of a random-order catalogue arrive while the
/// rows before them are added.
const PREFETCH_ROWS: usize = 16;

/// [`add_in_row_order`] for the pixels `first..first + part.len()`, held by `part`.
#[inline]
fn add_to_range<T>(part: &mut [T], first: u64, codes: &[u64], add: &impl Fn(&mut T, usize)) {
    let len = part.len() as u64;
    for (i, &code) in codes.iter().enumerate() {
        if let Some(&ahead) = codes.get(i + PREFETCH_ROWS) {
            let k = ahead.wrapping_sub(first);
            if k < len {
                prefetch(&part[k as usize]);
            }
        }
        // codes of left-out rows are ≥ the pixel count, so they wrap to ≥ len
        let k = code.wrapping_sub(first);
        if k < len {
            add(&mut part[k as usize], i);
        }
    }
}

/// Asks the processor to bring the cache lines of `value` closer (a hint: no effect on any
/// result; nothing on processors other than x86-64).
#[inline(always)]
fn prefetch<T>(value: &T) {
    #[cfg(target_arch = "x86_64")]
    {
        use std::arch::x86_64::{_mm_prefetch, _MM_HINT_T0};
        let first = (value as *const T).cast::<i8>();
        let last = first.wrapping_add(std::mem::size_of::<T>().saturating_sub(1));
        // SAFETY: a prefetch never faults and never changes memory, whatever the address; SSE,
        // which it needs, is part of every x86-64 processor.
        unsafe {
            _mm_prefetch::<_MM_HINT_T0>(first);
            _mm_prefetch::<_MM_HINT_T0>(last);
        }
    }
    #[cfg(not(target_arch = "x86_64"))]
    let _ = value;
}

/// Reads a whole catalogue block by block and bins it by `plan`.
pub fn bin_catalogue(source: &mut CatalogueSource, plan: &BinningPlan) -> Result<CatalogueMaps> {
    let mut binner = CatalogueBinner::new(plan.nside, plan.noise.as_ref())?;
    let mut block = GalaxyBlock::default();
    while source.read_block(&mut block, plan.block_rows)? {
        binner.add_block(&block);
    }
    binner.maps(
        plan.min_galaxies,
        &format!("catalogue {}", source.path().display()),
    )
}

/// Shape-noise realisation `realisation` of a catalogue: the γ1, γ2 maps of its galaxies each
/// rotated by its own angle (see [`super::rotation`]), on the data's footprint. The same
/// (seed, realisation) gives the same maps for any block size and thread count.
pub fn noise_realisation(
    source: &mut CatalogueSource,
    plan: &BinningPlan,
    seed: u64,
    realisation: u64,
) -> Result<NoiseMaps> {
    let plan = BinningPlan {
        noise: Some(NoiseRealisations {
            seed,
            indices: vec![realisation],
        }),
        ..plan.clone()
    };
    let mut maps = bin_catalogue(source, &plan)?;
    maps.noise
        .pop()
        .ok_or_else(|| Error::Data("no noise realisation was binned".to_string()))
}
