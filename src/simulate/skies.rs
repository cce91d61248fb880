//! Simulated skies: Gaussian and shifted-lognormal HEALPix maps of a given angular spectrum,
//! with optional Gaussian beam and white pixel noise, reproducible from a seed.
//!
//! - Gaussian: a_ℓm drawn from C_ℓ (`harmonics::alm_from_cl`), synthesised on the RING grid.
//! - Shifted lognormal (Hilbert, Hartlap & Schneider 2011, A&A 536, A85; Xavier et al. 2016,
//!   MNRAS 459, 3693): κ = κ0 (exp(g − σ_g²/2) − 1) with g a zero-mean Gaussian field whose
//!   spectrum follows from ξ_g = ln(1 + ξ_κ/κ0²) (`correlation::lognormal_gaussian_spectrum`) and
//!   σ_g² = Σ (2ℓ+1)/(4π) C_ℓ^g its variance, so that ⟨κ⟩ = 0, σ_κ² = κ0²(e^{σ_g²} − 1) and the
//!   skewness is 3r + r³ with r = σ_κ/κ0.
//! - Noise: independent N(0, σ²) per pixel (e.g. σ from `spectrum::shape_noise_per_pixel`).
//!
//! Every random draw comes from one ChaCha8 stream per sky, seeded from (seed, sky index) by
//! SplitMix64 mixing, and is taken sequentially, so skies are bitwise identical for any thread
//! count.

use crate::error::{Error, Result};
use crate::harmonics::correlation::lognormal_gaussian_spectrum;
use crate::harmonics::spectrum::AngularSpectrum;
use crate::harmonics::{alm_from_cl, gaussian_beam, HarmonicTransform};
use crate::sky::pixelization::{Ordering, Pixelization};
use crate::sky::skymap::SkyMap;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};

/// How to make a simulated sky.
#[derive(Debug, Clone, serde::Serialize)]
pub struct SkyRecipe {
    /// NSIDE of the output maps (RING ordering).
    pub nside: u32,
    /// Largest multipole synthesised (default 3·NSIDE − 1).
    pub lmax: usize,
    /// Target angular spectrum of the signal.
    pub spectrum: AngularSpectrum,
    /// Lognormal shift κ0; `None` for a Gaussian sky.
    pub lognormal_shift: Option<f64>,
    /// With a lognormal shift: `spectrum` is that of the Gaussian field g itself (so κ's
    /// spectrum follows from ξ_κ = κ0²(e^{ξ_g} − 1)), instead of the target spectrum of κ.
    pub spectrum_is_gaussian: bool,
    /// Gaussian beam FWHM in arcmin applied to the signal; `None` for no beam.
    pub beam_fwhm_arcmin: Option<f64>,
    /// Per-pixel white-noise standard deviation added after the beam; `None` for no noise.
    pub noise_sigma: Option<f64>,
    /// Base seed; sky `i` uses a stream derived from (seed, i).
    pub seed: u64,
}

/// The seed of sky `index` of an ensemble with base seed `seed` (SplitMix64 finaliser of
/// Steele, Lea & Flood 2014, applied to seed ⊕ golden-ratio multiple of the index).
pub fn sky_seed(seed: u64, index: u64) -> u64 {
    let mut z = seed ^ index.wrapping_add(1).wrapping_mul(0x9E37_79B9_7F4A_7C15);
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

impl SkyRecipe {
    /// A Gaussian sky recipe with ℓmax = 3·NSIDE − 1 and no beam or noise.
    pub fn gaussian(nside: u32, spectrum: AngularSpectrum, seed: u64) -> Self {
        SkyRecipe {
            nside,
            lmax: 3 * nside as usize - 1,
            spectrum,
            lognormal_shift: None,
            spectrum_is_gaussian: false,
            beam_fwhm_arcmin: None,
            noise_sigma: None,
            seed,
        }
    }

    fn check(&self) -> Result<()> {
        if self.spectrum.cl.len() < 2 {
            return Err(Error::Data(
                "the sky spectrum has fewer than two multipoles".into(),
            ));
        }
        if self.lmax > 4 * self.nside as usize {
            return Err(Error::Setting(format!(
                "lmax {} is beyond 4·NSIDE = {} for NSIDE {}",
                self.lmax,
                4 * self.nside,
                self.nside
            )));
        }
        if let Some(s) = self.noise_sigma {
            if !(s.is_finite() && s >= 0.0) {
                return Err(Error::Setting(format!("noise sigma must be >= 0, got {s}")));
            }
        }
        Ok(())
    }

    /// The spectrum cut or zero-padded to ℓmax.
    fn cl(&self) -> Vec<f64> {
        let mut cl = self.spectrum.cl.clone();
        cl.resize(self.lmax + 1, 0.0);
        cl
    }

    /// A transform object for this recipe, to share across many skies.
    pub fn transform(&self) -> Result<HarmonicTransform> {
        HarmonicTransform::new(self.nside as usize, self.lmax)
    }

    /// The Gaussian spectrum actually drawn and the lognormal shift (if any).
    fn gaussian_spectrum(&self) -> Result<(Vec<f64>, Option<f64>)> {
        self.check()?;
        let cl = self.cl();
        match self.lognormal_shift {
            None => Ok((cl, None)),
            Some(k0) if self.spectrum_is_gaussian => {
                if !(k0.is_finite() && k0 > 0.0) {
                    return Err(Error::Setting(format!(
                        "the lognormal shift must be positive, got {}",
                        crate::error::compact(k0)
                    )));
                }
                Ok((cl, Some(k0)))
            }
            Some(k0) => {
                let ln = lognormal_gaussian_spectrum(&cl, k0)?;
                Ok((ln.gaussian_cl, Some(k0)))
            }
        }
    }

    /// Sky number `index` of the ensemble.
    pub fn realise(&self, transform: &HarmonicTransform, index: u64) -> Result<SkyMap> {
        let (gauss_cl, shift) = self.gaussian_spectrum()?;
        let mut rng = ChaCha8Rng::seed_from_u64(sky_seed(self.seed, index));
        let alm = alm_from_cl(&gauss_cl, self.lmax, &mut rng)?;
        self.finish(transform, alm, &gauss_cl, shift, self.noise_sigma, &mut rng)
    }

    /// Pair number `index` of a correlated-pair ensemble: map A is exactly
    /// [`Self::realise`]`(index)`; map B is made from the Gaussian harmonic coefficients
    /// a_B = r a_A + √(1 − r²) a_Y, with a_Y an independent draw of the same spectrum (ChaCha8
    /// stream 1 of the same seed), then passed through the same lognormal transform and beam,
    /// with its own white noise of `second_noise_sigma`. For Gaussian skies
    /// ⟨a_A a_B*⟩ = r C_ℓ and ⟨a_B a_B*⟩ = C_ℓ, so the two signal maps have correlation
    /// coefficient r at every ℓ and in pixel space (common practice: the Cholesky factor of
    /// [[1, r], [r, 1]]); for lognormal skies r is the correlation of the underlying Gaussian
    /// fields. `correlation` must lie in [−1, 1].
    pub fn realise_pair(
        &self,
        transform: &HarmonicTransform,
        index: u64,
        correlation: f64,
        second_noise_sigma: Option<f64>,
    ) -> Result<(SkyMap, SkyMap)> {
        if !(correlation.is_finite() && (-1.0..=1.0).contains(&correlation)) {
            return Err(Error::Setting(format!(
                "the pair correlation must lie in [-1, 1], got {}",
                crate::error::compact(correlation)
            )));
        }
        if let Some(s) = second_noise_sigma {
            if !(s.is_finite() && s >= 0.0) {
                return Err(Error::Setting(format!(
                    "the second map's noise sigma must be >= 0, got {}",
                    crate::error::compact(s)
                )));
            }
        }
        let (gauss_cl, shift) = self.gaussian_spectrum()?;
        let mut rng = ChaCha8Rng::seed_from_u64(sky_seed(self.seed, index));
        let alm_a = alm_from_cl(&gauss_cl, self.lmax, &mut rng)?;
        let mut rng_b = ChaCha8Rng::seed_from_u64(sky_seed(self.seed, index));
        rng_b.set_stream(1);
        let alm_y = alm_from_cl(&gauss_cl, self.lmax, &mut rng_b)?;
        let s = (1.0 - correlation * correlation).max(0.0).sqrt();
        let mut alm_b = alm_a.clone();
        for (b, y) in alm_b.as_mut_slice().iter_mut().zip(alm_y.as_slice()) {
            *b = *b * correlation + *y * s;
        }
        let a = self.finish(
            transform,
            alm_a,
            &gauss_cl,
            shift,
            self.noise_sigma,
            &mut rng,
        )?;
        let b = self.finish(
            transform,
            alm_b,
            &gauss_cl,
            shift,
            second_noise_sigma,
            &mut rng_b,
        )?;
        Ok((a, b))
    }

    /// The map from Gaussian harmonic coefficients: synthesis, lognormal transform, beam, noise
    /// (drawn from `rng`).
    fn finish(
        &self,
        transform: &HarmonicTransform,
        mut alm: crate::harmonics::HarmonicCoefficients,
        gauss_cl: &[f64],
        shift: Option<f64>,
        noise_sigma: Option<f64>,
        rng: &mut ChaCha8Rng,
    ) -> Result<SkyMap> {
        let mut values = if let Some(k0) = shift {
            // The lognormal transform is applied before the beam: the beam belongs to the
            // instrument, the lognormal shape to the sky.
            let var_g: f64 = gauss_cl
                .iter()
                .enumerate()
                .map(|(l, c)| (2 * l + 1) as f64 / (4.0 * std::f64::consts::PI) * c)
                .sum();
            // κ from g in place
            let mut kappa = transform.synthesis(&alm)?;
            for x in kappa.iter_mut() {
                *x = k0 * ((*x - 0.5 * var_g).exp() - 1.0);
            }
            if let Some(fwhm) = self.beam_fwhm_arcmin {
                alm = transform.analysis(&kappa, crate::harmonics::DEFAULT_ANALYSIS_ITERATIONS)?;
                alm.apply_beam(&gaussian_beam((fwhm / 60.0).to_radians(), self.lmax)?)?;
                transform.synthesis(&alm)?
            } else {
                kappa
            }
        } else {
            if let Some(fwhm) = self.beam_fwhm_arcmin {
                alm.apply_beam(&gaussian_beam((fwhm / 60.0).to_radians(), self.lmax)?)?;
            }
            transform.synthesis(&alm)?
        };
        // the coefficients are not needed any more: the map's valid-pixel record is made
        // without them beside it
        drop(alm);
        if let Some(sigma) = noise_sigma {
            for v in values.iter_mut() {
                let n: f64 = StandardNormal.sample(&mut *rng);
                *v += sigma * n;
            }
        }
        SkyMap::new(Pixelization::new(self.nside, Ordering::Ring)?, values)
    }
}

/// The band limit of a sky of `nside`: `lmax`, or 3·NSIDE − 1 when not given, checked against
/// the NSIDE ([`crate::limits::check_lmax`], the value named `what`) and against the memory a
/// sky up to it needs (lognormal or not).
pub fn checked_lmax(nside: u32, lmax: Option<usize>, lognormal: bool, what: &str) -> Result<usize> {
    let lmax = lmax.unwrap_or(3 * nside as usize - 1);
    crate::limits::check_lmax(what, lmax, nside)?;
    crate::limits::check_memory(
        &format!("a NSIDE {nside} sky up to ℓ = {lmax}"),
        crate::limits::sky_bytes(nside, lmax, lognormal),
    )?;
    Ok(lmax)
}

/// Where a simulated sky's spectrum comes from.
#[derive(Debug, Clone)]
pub enum SpectrumChoice {
    /// The built-in demo model ([`AngularSpectrum::demo_model`]) with this variance.
    Model { variance: f64 },
    /// A text table `ell C_ell` ([`AngularSpectrum::read_text`]).
    File(std::path::PathBuf),
    /// C_ℓ for ℓ = 0, 1, … given as numbers (finite, ≥ 0).
    Table(Vec<f64>),
}

/// What `sky` is asked for, before its checks: [`SkyOptions::recipe`] checks it and makes the
/// recipe, for the command line and for bindings alike.
#[derive(Debug, Clone)]
pub struct SkyOptions {
    /// NSIDE, a power of two from 1 to 8192.
    pub nside: u32,
    /// Largest multipole (default 3·NSIDE − 1).
    pub lmax: Option<usize>,
    pub spectrum: SpectrumChoice,
    pub lognormal_shift: Option<f64>,
    /// With `lognormal_shift`: the spectrum is the underlying Gaussian field's.
    pub gaussian_spectrum: bool,
    pub beam_arcmin: Option<f64>,
    /// White noise per pixel (standard deviation); `shape_noise` wins when both are given.
    pub noise_sigma: Option<f64>,
    /// Shape noise (σ_e, galaxies per arcmin²): σ_pix = σ_e/√(n_gal·A_pix).
    pub shape_noise: Option<(f64, f64)>,
    pub seed: u64,
    /// First sky index and number of skies (checked against the index range).
    pub first_index: u64,
    pub count: u64,
}

impl SkyOptions {
    /// The recipe, after the checks of `sky`: NSIDE, index range, ℓmax, memory, spectrum,
    /// noise and beam.
    pub fn recipe(&self) -> Result<SkyRecipe> {
        if self.nside == 0 || !self.nside.is_power_of_two() || self.nside > 8192 {
            return Err(Error::Setting(format!(
                "--nside must be a power of two from 1 to 8192, got {}",
                self.nside
            )));
        }
        crate::limits::check_index_range(self.first_index, self.count)?;
        let lognormal = self.lognormal_shift.is_some();
        let lmax = checked_lmax(self.nside, self.lmax, lognormal, "--lmax")?;
        let spectrum = match &self.spectrum {
            SpectrumChoice::File(path) => AngularSpectrum::read_text(path)?,
            SpectrumChoice::Table(cl) => {
                if let Some((ell, c)) = cl
                    .iter()
                    .enumerate()
                    .find(|(_, c)| !(c.is_finite() && **c >= 0.0))
                {
                    return Err(Error::Data(format!(
                        "the spectrum's C_ell at ell = {ell} is {c}: it must be finite and >= 0"
                    )));
                }
                if cl.is_empty() {
                    return Err(Error::Data("the spectrum is empty".into()));
                }
                AngularSpectrum { cl: cl.clone() }
            }
            SpectrumChoice::Model { variance } => {
                if !(variance.is_finite() && *variance > 0.0) {
                    return Err(Error::Setting(format!(
                        "--model-variance must be positive, got {}",
                        crate::error::compact(*variance)
                    )));
                }
                AngularSpectrum::demo_model(lmax, *variance)
            }
        };
        let pixel_area = 4.0 * std::f64::consts::PI / (12.0 * (self.nside as f64).powi(2));
        let noise_sigma = match (self.shape_noise, self.noise_sigma) {
            (Some((s, n)), _) => Some(crate::harmonics::spectrum::shape_noise_per_pixel(
                s, n, pixel_area,
            )?),
            (None, s) => s,
        };
        if let Some(b) = self.beam_arcmin {
            if !(b.is_finite() && b >= 0.0) {
                return Err(Error::Setting(format!(
                    "--beam-arcmin must be >= 0, got {}",
                    crate::error::compact(b)
                )));
            }
        }
        Ok(SkyRecipe {
            nside: self.nside,
            lmax,
            spectrum,
            lognormal_shift: self.lognormal_shift,
            spectrum_is_gaussian: self.gaussian_spectrum,
            beam_fwhm_arcmin: self.beam_arcmin,
            noise_sigma,
            seed: self.seed,
        })
    }
}
