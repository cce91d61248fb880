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
//! Sums run over the galaxies in catalogue order, one block after another, and the pixel
//! indices of a block are found in parallel but added in row order: the maps are bitwise the
//! same for any block size and thread count.

use super::rotation::{rotate_ellipticity, RotationAngles};
use super::screening::{check_row, GalaxyBlock, RowProblem, ScreeningReport};
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
    pub fn add_block(&mut self, block: &GalaxyBlock) {
        let n = block.len();
        let pix = self.pix;
        self.codes.clear();
        self.codes.resize(n, 0);
        self.codes
            .par_chunks_mut(PIXEL_TASK_ROWS)
            .enumerate()
            .for_each(|(t, codes)| {
                let start = t * PIXEL_TASK_ROWS;
                for (k, code) in codes.iter_mut().enumerate() {
                    let i = start + k;
                    let (ra, dec) = (block.ra[i], block.dec[i]);
                    *code = match check_row(ra, dec, block.e1[i], block.e2[i], block.weight[i]) {
                        Some(problem) => u64::MAX - problem as u64,
                        None => pix.pixel_of(Direction::from_lonlat_deg(ra, dec)),
                    };
                }
            });
        let npix = pix.npix();
        for (i, &code) in self.codes.iter().enumerate() {
            if code >= npix {
                let problem = RowProblem::ALL[(u64::MAX - code) as usize];
                self.report.record(Some(problem));
                continue;
            }
            let (ra, dec) = (block.ra[i], block.dec[i]);
            self.report.record(None);
            let ra = if (0.0..360.0).contains(&ra) {
                ra
            } else {
                self.report.ra_wrapped += 1;
                ra.rem_euclid(360.0)
            };
            self.report.extend_ranges(ra, dec);
            let (w, e1, e2) = (block.weight[i], block.e1[i], block.e2[i]);
            let s = &mut self.sums[code as usize];
            s.galaxies += 1;
            s.weight += w;
            s.weight_e1 += w * e1;
            s.weight_e2 += w * e2;
            s.weight_sq_e_sq += w * w * (e1 * e1 + e2 * e2);
        }
        for noise in &mut self.noise {
            let mut angles = RotationAngles::new(self.noise_seed, noise.index, block.first_row);
            for (i, &code) in self.codes.iter().enumerate() {
                // every row draws its angle, so row r always has word r of the stream
                let alpha = angles.next_angle();
                if code >= npix {
                    continue;
                }
                let w = block.weight[i];
                let (r1, r2) = rotate_ellipticity(block.e1[i], block.e2[i], alpha);
                let s = &mut noise.sums[code as usize];
                s[0] += w * r1;
                s[1] += w * r2;
            }
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
