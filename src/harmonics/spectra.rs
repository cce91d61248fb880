//! Measured angular power spectra of maps, for comparison with the scattering coefficients:
//! full-sky C_ℓ and cross-spectra, and pseudo-C_ℓ on a masked sky with the w2 correction.
//!
//! Pseudo-C_ℓ (Hivon et al. 2002, ApJ 567, 2, eqs. 2–4 and §3): the map times the weights W,
//! with its W-weighted mean removed first, is transformed; well above the mask's scale
//! ⟨C̃_ℓ⟩ ≈ w2 · C_ℓ with w_i = mean over the sky of W^i, so Ĉ_ℓ = C̃_ℓ / w2. Binned with
//! Δℓ-wide bins, the error of a bin is Ĉ_b · √(2/ν_b) with ν_b = Σ_{ℓ∈b} (2ℓ+1) · w2²/w4
//! effective modes (Hivon et al. 2002 eq. 17).
//!
//! MASTER band powers ([`master_spectrum`]): the same pseudo-spectrum deconvolved by the binned
//! mode-coupling matrix of the weights, with beam and pixel window ([`crate::harmonics::mode_coupling`]).

use crate::error::{Error, Result};
use crate::harmonics::mode_coupling::{
    healpix_pixel_window, weight_spectrum, BinWeighting, Binning, CouplingMatrix,
    MasterDeconvolution,
};
use crate::harmonics::{gaussian_beam, HarmonicTransform};
use crate::sky::footprint::FootprintOf;
use crate::sky::pixelization::Ordering;
use crate::sky::skymap::SkyMap;
use std::borrow::Cow;
use std::fmt::Write as _;

/// One bin of a binned spectrum.
#[derive(Debug, Clone, serde::Serialize)]
pub struct SpectrumBin {
    /// First multipole of the bin.
    pub ell_min: usize,
    /// Last multipole of the bin (inclusive).
    pub ell_max: usize,
    /// Mode-weighted mean multipole Σ(2ℓ+1)ℓ / Σ(2ℓ+1).
    pub ell_mean: f64,
    /// Estimated C_ℓ averaged over the bin (uniform in ℓ).
    pub cl: f64,
    /// Gaussian error of `cl`: cl · √(2/ν) with ν the effective number of modes.
    pub error: f64,
    /// Effective number of modes ν.
    pub modes: f64,
}

/// A measured spectrum: per-ℓ values and bins, with the sky fractions used.
#[derive(Debug, Clone, serde::Serialize)]
pub struct MeasuredSpectrum {
    /// C_ℓ for ℓ = 0..=ℓmax (already divided by w2 for a masked sky).
    pub cl: Vec<f64>,
    /// Binned values.
    pub bins: Vec<SpectrumBin>,
    /// mean(W²) over the sky (1 for a full sky).
    pub w2: f64,
    /// mean(W⁴) over the sky.
    pub w4: f64,
}

/// Bins `cl` in `width`-wide bins from `ell_min` to `cl.len() − 1`, with ν = Σ(2ℓ+1)·w2²/w4.
pub fn bin_spectrum(
    cl: &[f64],
    ell_min: usize,
    width: usize,
    w2: f64,
    w4: f64,
) -> Vec<SpectrumBin> {
    let width = width.max(1);
    let mut bins = Vec::new();
    let mut start = ell_min;
    while start < cl.len() {
        let end = (start + width - 1).min(cl.len() - 1);
        let modes_full: f64 = (start..=end).map(|l| (2 * l + 1) as f64).sum();
        let modes = modes_full * w2 * w2 / w4;
        let mean_c = cl[start..=end].iter().sum::<f64>() / (end - start + 1) as f64;
        let ell_mean = (start..=end)
            .map(|l| (2 * l + 1) as f64 * l as f64)
            .sum::<f64>()
            / modes_full;
        bins.push(SpectrumBin {
            ell_min: start,
            ell_max: end,
            ell_mean,
            cl: mean_c,
            error: mean_c.abs() * (2.0 / modes).sqrt(),
            modes,
        });
        start = end + 1;
    }
    bins
}

/// Full-sky C_ℓ (no mask) or the w2-corrected pseudo-C_ℓ (with `weights`), binned in
/// `bin_width`-wide bins from ℓ = 2.
pub fn angular_spectrum(
    map: &SkyMap,
    weights: Option<&FootprintOf<'_>>,
    sht: &HarmonicTransform,
    iterations: usize,
    bin_width: usize,
) -> Result<MeasuredSpectrum> {
    cross_spectrum(map, map, weights, sht, iterations, bin_width)
}

/// Cross-spectrum of two maps on the same footprint (see [`angular_spectrum`]).
pub fn cross_spectrum(
    a: &SkyMap,
    b: &SkyMap,
    weights: Option<&FootprintOf<'_>>,
    sht: &HarmonicTransform,
    iterations: usize,
    bin_width: usize,
) -> Result<MeasuredSpectrum> {
    let pseudo = pseudo_spectrum(a, b, weights, sht, iterations)?;
    Ok(MeasuredSpectrum::from_pseudo(&pseudo, bin_width))
}

impl MeasuredSpectrum {
    /// The w2-corrected spectrum C̃_ℓ/w2 of a pseudo-spectrum, binned in `bin_width`-wide bins
    /// from ℓ = 2.
    pub fn from_pseudo(pseudo: &PseudoSpectrum, bin_width: usize) -> Self {
        let (w2, w4) = (pseudo.w2, pseudo.w4);
        let cl: Vec<f64> = pseudo.raw.iter().map(|c| c / w2).collect();
        let bins = bin_spectrum(&cl, 2, bin_width, w2, w4);
        MeasuredSpectrum { cl, bins, w2, w4 }
    }
}

/// The raw pseudo-spectrum C̃_ℓ of two maps on a footprint (the spectrum of the weighted,
/// mean-removed maps, not divided by w2) with the weights W used (RING order).
#[derive(Debug, Clone)]
pub struct PseudoSpectrum {
    /// C̃_ℓ, ℓ = 0 … ℓmax of the transform.
    pub raw: Vec<f64>,
    /// The weights W in RING order (both maps' bad pixels have weight 0); `None` when W ≡ 1
    /// (no footprint given: a full sky without bad pixels).
    pub weights: Option<Vec<f64>>,
    /// mean(W²) over the sky.
    pub w2: f64,
    /// mean(W⁴) over the sky.
    pub w4: f64,
}

/// C̃_ℓ of the maps a·W and b·W after removing their W-weighted means (Hivon et al. 2002 eq. 2).
pub fn pseudo_spectrum(
    a: &SkyMap,
    b: &SkyMap,
    weights: Option<&FootprintOf<'_>>,
    sht: &HarmonicTransform,
    iterations: usize,
) -> Result<PseudoSpectrum> {
    // An auto-spectrum reads its map once.
    let b = (!std::ptr::eq(a, b)).then_some(b);
    weighted_pseudo_spectrum(Cow::Borrowed(a), b, weights, sht, iterations)
}

/// [`pseudo_spectrum`] of a map with itself, the map given up: it is weighted and transformed
/// in its own storage, so that beside it only the coefficients are held.
pub fn auto_pseudo_spectrum_owned(
    map: SkyMap,
    weights: Option<&FootprintOf<'_>>,
    sht: &HarmonicTransform,
    iterations: usize,
) -> Result<PseudoSpectrum> {
    weighted_pseudo_spectrum(Cow::Owned(map), None, weights, sht, iterations)
}

/// `map` in RING order (a copy only when it is in another ordering).
fn in_ring_order(map: Cow<'_, SkyMap>) -> Result<Cow<'_, SkyMap>> {
    Ok(if map.ordering() == Ordering::Ring {
        map
    } else {
        Cow::Owned(map.to_ordering(Ordering::Ring)?)
    })
}

/// The pseudo-spectrum of `a` with `b` (with itself when `b` is `None`). The weights are read
/// pixel by pixel: W_p is the footprint's weight (1 without a footprint) where both maps are
/// valid and 0 elsewhere, exactly the weights of the footprint restricted to both maps; the
/// weighted map (v_p − mean)·W_p, v_p = 0 where W_p = 0, is the only full-sky array made (none
/// for an owned auto-spectrum, weighted in place). The weights are stored as one array only
/// for the result (with a footprint), after the transforms.
fn weighted_pseudo_spectrum(
    a: Cow<'_, SkyMap>,
    b: Option<&SkyMap>,
    weights: Option<&FootprintOf<'_>>,
    sht: &HarmonicTransform,
    iterations: usize,
) -> Result<PseudoSpectrum> {
    for m in std::iter::once(&*a).chain(b) {
        if m.nside() != a.nside() {
            return Err(Error::Mismatch(format!(
                "maps of NSIDE {} and {} cannot be cross-correlated",
                a.nside(),
                m.nside()
            )));
        }
        if sht.nside() != m.nside() as usize {
            return Err(Error::Mismatch(format!(
                "transform set up for NSIDE {} but the map has NSIDE {}",
                sht.nside(),
                m.nside()
            )));
        }
        if weights.is_none() && m.valid_count() != m.pixelization().npix() {
            return Err(Error::Data(format!(
                "the map has {} bad pixels: give a mask to measure a pseudo-spectrum",
                m.pixelization().npix() - m.valid_count()
            )));
        }
    }
    let a = in_ring_order(a)?;
    let b = b.map(|b| in_ring_order(Cow::Borrowed(b))).transpose()?;
    let footprint = match weights {
        Some(fp) => {
            fp.check_map_nside(a.nside())?;
            Some(if fp.pixelization().ordering() == Ordering::Ring {
                Cow::Borrowed(fp)
            } else {
                Cow::Owned(fp.to_ordering(Ordering::Ring)?)
            })
        }
        None => None,
    };
    let footprint_weights = footprint.as_ref().map(|fp| fp.weights());
    // W_p of a pixel valid (or not) in both maps.
    let weight = |p: usize, valid: bool| match &footprint_weights {
        None => 1.0,
        Some(w) if valid => w.get(p),
        Some(_) => 0.0,
    };
    let valid = |p: usize| a.valid()[p] && b.as_ref().is_none_or(|b| b.valid()[p]);
    let npix = a.values().len();
    let (mut wsum, mut sum2, mut sum4) = (0.0f64, 0.0f64, 0.0f64);
    for p in 0..npix {
        let w = weight(p, valid(p));
        wsum += w;
        sum2 += w * w;
        sum4 += w.powi(4);
    }
    if wsum <= 0.0 {
        if let (Some(fp), false) = (weights, b.is_some()) {
            // the footprint's own message (an empty mask, or one on bad pixels only)
            fp.restricted_to(&a)?;
        }
        return Err(Error::Data("the footprint is empty".into()));
    }
    let w2 = sum2 / npix as f64;
    let w4 = sum4 / npix as f64;
    // The W-weighted mean of v, then (v − mean)·W.
    let mean_of = |m: &SkyMap| {
        let mut sum = 0.0f64;
        for (p, &x) in m.values().iter().enumerate() {
            let w = weight(p, valid(p));
            let v = if w > 0.0 { x } else { 0.0 };
            sum += v * w;
        }
        sum / wsum
    };
    let weighted_copy = |m: &SkyMap, mean: f64| -> Vec<f64> {
        let values = m.values();
        (0..npix)
            .map(|p| {
                let w = weight(p, valid(p));
                let v = if w > 0.0 { values[p] } else { 0.0 };
                (v - mean) * w
            })
            .collect()
    };
    // Stored before an owned map is given up (its valid pixels go with it).
    let weights: Option<Vec<f64>> = footprint
        .as_ref()
        .map(|_| (0..npix).map(|p| weight(p, valid(p))).collect());
    let mean_a = mean_of(&a);
    let raw = match a {
        Cow::Owned(a) if b.is_none() => {
            let mut values = a.into_values();
            for (p, x) in values.iter_mut().enumerate() {
                // an owned map holds NaN exactly at its invalid pixels
                let w = weight(p, !x.is_nan());
                let v = if w > 0.0 { *x } else { 0.0 };
                *x = (v - mean_a) * w;
            }
            sht.analysis_owned(values, iterations)?.power_spectrum()
        }
        _ => {
            let alm_a = sht.analysis_owned(weighted_copy(&a, mean_a), iterations)?;
            match b.as_deref() {
                None => alm_a.power_spectrum(),
                Some(b) => {
                    let alm_b = sht.analysis_owned(weighted_copy(b, mean_of(b)), iterations)?;
                    alm_a.cross_spectrum(&alm_b)?
                }
            }
        }
    };
    Ok(PseudoSpectrum {
        raw,
        weights,
        w2,
        w4,
    })
}

/// Choices of the MASTER band powers ([`master_spectrum`]).
#[derive(Debug, Clone, PartialEq)]
pub struct MasterSettings {
    /// Width of the ℓ bins (bins start at ℓ = 2, as [`bin_spectrum`]'s).
    pub bin_width: usize,
    /// Band powers of C_ℓ or of D_ℓ = ℓ(ℓ+1)C_ℓ/2π.
    pub weighting: BinWeighting,
    /// Gaussian beam FWHM in arcmin (0: no beam).
    pub beam_fwhm_arcmin: f64,
    /// Divide out the HEALPix pixel window.
    pub pixel_window: bool,
}

/// One band power, w2-corrected and MASTER-deconvolved.
#[derive(Debug, Clone, serde::Serialize)]
pub struct BandPower {
    /// First multipole of the bin.
    pub ell_min: usize,
    /// Last multipole of the bin (inclusive).
    pub ell_max: usize,
    /// Mode-weighted mean multipole Σ(2ℓ+1)ℓ / Σ(2ℓ+1).
    pub ell_mean: f64,
    /// Σ_ℓ P_bℓ C̃_ℓ / (w2 T_ℓ²): the w2 estimate with beam and pixel window divided out per ℓ.
    pub w2_estimate: f64,
    /// Gaussian error of the w2 estimate, |value| · √(2/ν).
    pub w2_error: f64,
    /// Σ_b' (K⁻¹)_bb' Σ_ℓ P_b'ℓ C̃_ℓ (Hivon et al. 2002 eq. 20).
    pub master: f64,
    /// Gaussian error of the MASTER value, |value| · √(2/ν) (Hivon et al. 2002 eq. 17's ν, an
    /// approximation: the deconvolution correlates neighbouring bins).
    pub master_error: f64,
    /// Effective number of modes ν = Σ_{ℓ∈b}(2ℓ+1) · w2²/w4.
    pub modes: f64,
}

/// MASTER band powers next to the w2 estimate in the same bins.
#[derive(Debug, Clone, serde::Serialize)]
pub struct MasterSpectrum {
    /// Band powers of C_ℓ or of D_ℓ.
    pub weighting: BinWeighting,
    /// The bins.
    pub bins: Vec<BandPower>,
    /// Pseudo-spectrum W_ℓ of the weight map used for the coupling matrix.
    pub weight_cl: Vec<f64>,
    /// T_ℓ = B_ℓ p_ℓ divided out.
    pub transfer: Vec<f64>,
    /// mean(W²) over the sky.
    pub w2: f64,
    /// mean(W⁴) over the sky.
    pub w4: f64,
}

/// MASTER deconvolution (Hivon et al. 2002; [`crate::harmonics::mode_coupling`]) of a pseudo-spectrum: W_ℓ
/// of `pseudo.weights` up to min(2ℓmax, 3·NSIDE − 1) with `iterations` Jacobi refinements
/// (for a full sky, W ≡ 1, the exact W_ℓ = 4π δ_ℓ0, so that M = I), the
/// coupling matrix up to ℓmax = `pseudo.raw.len() − 1`, bins from ℓ = 2, transfer T_ℓ = B_ℓ p_ℓ.
pub fn master_spectrum(
    pseudo: &PseudoSpectrum,
    nside: usize,
    iterations: usize,
    settings: &MasterSettings,
) -> Result<MasterSpectrum> {
    let lmax = pseudo.raw.len().saturating_sub(1);
    if lmax < 2 {
        return Err(Error::Setting(format!(
            "MASTER band powers need lmax >= 2, got {lmax}"
        )));
    }
    let fwhm = settings.beam_fwhm_arcmin;
    if !(fwhm.is_finite() && fwhm >= 0.0) {
        return Err(Error::Setting(format!(
            "beam FWHM must be a finite number of arcmin >= 0, got {}",
            crate::error::compact(fwhm)
        )));
    }
    let binning = Binning::uniform(2, lmax, settings.bin_width, settings.weighting)?;
    let transfer = beam_and_pixel_transfer(fwhm, settings.pixel_window, nside, lmax)?;
    let lmax_w = (2 * lmax).min(3 * nside - 1);
    let weight_cl = match &pseudo.weights {
        Some(w) if w.iter().any(|&w| w != 1.0) => {
            weight_spectrum(w, &HarmonicTransform::new(nside, lmax_w)?, iterations)?
        }
        _ => {
            // W ≡ 1: W_ℓ = 4π δ_ℓ0 exactly (the quadrature would add ~1e-7 relative noise at
            // even ℓ)
            let mut exact = vec![0.0; lmax_w + 1];
            exact[0] = 4.0 * std::f64::consts::PI;
            exact
        }
    };
    let coupling = CouplingMatrix::new(&weight_cl, lmax)?;
    let master = MasterDeconvolution::new(&coupling, binning.clone(), &transfer)?;
    let deconvolved = master.apply(&pseudo.raw)?;
    let w2_per_ell: Vec<f64> = pseudo
        .raw
        .iter()
        .zip(&transfer)
        .map(|(c, t)| c / (pseudo.w2 * t * t))
        .collect();
    let w2_binned = binning.bin(&w2_per_ell)?;
    let bins = binning
        .ranges()
        .iter()
        .enumerate()
        .map(|(b, &(lo, hi))| {
            let modes_full: f64 = (lo..=hi).map(|l| (2 * l + 1) as f64).sum();
            let modes = modes_full * pseudo.w2 * pseudo.w2 / pseudo.w4;
            let ell_mean = (lo..=hi)
                .map(|l| (2 * l + 1) as f64 * l as f64)
                .sum::<f64>()
                / modes_full;
            let factor = (2.0 / modes).sqrt();
            BandPower {
                ell_min: lo,
                ell_max: hi,
                ell_mean,
                w2_estimate: w2_binned[b],
                w2_error: w2_binned[b].abs() * factor,
                master: deconvolved[b],
                master_error: deconvolved[b].abs() * factor,
                modes,
            }
        })
        .collect();
    Ok(MasterSpectrum {
        weighting: settings.weighting,
        bins,
        weight_cl,
        transfer,
        w2: pseudo.w2,
        w4: pseudo.w4,
    })
}

/// T_ℓ = B_ℓ p_ℓ up to `lmax`: the Gaussian beam of FWHM `fwhm` arcmin, times the HEALPix pixel
/// window of `nside` when `pixel_window`.
fn beam_and_pixel_transfer(
    fwhm: f64,
    pixel_window: bool,
    nside: usize,
    lmax: usize,
) -> Result<Vec<f64>> {
    let mut transfer = gaussian_beam((fwhm / 60.0).to_radians(), lmax)?;
    if pixel_window {
        let nside32 = u32::try_from(nside)
            .map_err(|_| Error::Geometry(format!("NSIDE {nside} is out of range")))?;
        let p = healpix_pixel_window(nside32, lmax)?;
        for (t, p) in transfer.iter_mut().zip(p) {
            *t *= p;
        }
    }
    Ok(transfer)
}

impl MasterSettings {
    /// Refuses a bin width outside 1 … 10000 or a beam that is not a finite number ≥ 0.
    pub fn check(&self) -> Result<()> {
        if self.bin_width == 0 || self.bin_width > 10_000 {
            return Err(Error::Setting(format!(
                "--bin-width must be from 1 to 10000, got {}",
                self.bin_width
            )));
        }
        if !(self.beam_fwhm_arcmin.is_finite() && self.beam_fwhm_arcmin >= 0.0) {
            return Err(Error::Setting(format!(
                "--beam-arcmin must be a finite number >= 0, got {}",
                crate::error::compact(self.beam_fwhm_arcmin)
            )));
        }
        Ok(())
    }
}

/// What `spectra` measures: the pseudo-spectrum of `map` (or its cross-spectrum with `other`)
/// on `footprint` up to `lmax` (default 2·NSIDE) and its band powers ([`master_spectrum`]),
/// after the checks of the command (settings, ℓmax, iterations, something to measure on the
/// footprint, a power-of-two NSIDE for the pixel window). Maps come with the names their
/// messages use; `map` is given up (an auto-spectrum is weighted and transformed in its
/// storage).
pub fn measure_spectra(
    map: (SkyMap, &str),
    other: Option<(&SkyMap, &str)>,
    footprint: &FootprintOf<'_>,
    lmax: Option<usize>,
    iterations: usize,
    settings: &MasterSettings,
) -> Result<(PseudoSpectrum, MasterSpectrum)> {
    settings.check()?;
    crate::limits::check_harmonic_iterations(iterations)?;
    let (map, label) = map;
    let nside = map.nside() as usize;
    let lmax = lmax.unwrap_or(2 * nside);
    if lmax == 0 {
        return Err(Error::Setting(
            "--lmax must be at least 1: ℓ = 0 alone is only the map's mean".into(),
        ));
    }
    crate::limits::check_lmax("--lmax", lmax, map.nside())?;
    crate::sky::measurable::check_measurable(&map, Some(footprint), label)?;
    if let Some((o, name)) = other {
        crate::sky::measurable::check_measurable(o, Some(footprint), name)?;
    }
    let weights = (footprint.f_sky() < 1.0).then_some(footprint);
    if settings.pixel_window && !nside.is_power_of_two() {
        return Err(Error::Setting(format!(
            "--pixel-window needs a power-of-two NSIDE, the map has {nside}"
        )));
    }
    let sht = HarmonicTransform::new(nside, lmax)?;
    let pseudo = match other {
        None => auto_pseudo_spectrum_owned(map, weights, &sht, iterations)?,
        Some((o, _)) => pseudo_spectrum(&map, o, weights, &sht, iterations)?,
    };
    let master = master_spectrum(&pseudo, nside, iterations, settings)?;
    Ok((pseudo, master))
}

/// What `spectra --json` writes: the w2-corrected C_ℓ per ℓ and the band powers.
#[derive(Debug, serde::Serialize)]
pub struct SpectraDocument<'a> {
    /// C̃_ℓ / w2 for ℓ = 0 … ℓmax (no beam or pixel window divided out).
    pub cl: Vec<f64>,
    /// Band powers, weight spectrum and transfer function.
    pub band_powers: &'a MasterSpectrum,
}

impl<'a> SpectraDocument<'a> {
    /// The document of a measured pseudo-spectrum and its band powers.
    pub fn new(pseudo: &PseudoSpectrum, band_powers: &'a MasterSpectrum) -> Self {
        SpectraDocument {
            cl: pseudo.raw.iter().map(|c| c / pseudo.w2).collect(),
            band_powers,
        }
    }
}

/// The band powers as CSV text: per bin the w2 estimate and the MASTER value with their errors.
pub fn spectrum_csv(s: &MasterSpectrum) -> String {
    let q = match s.weighting {
        BinWeighting::Cl => "cl",
        BinWeighting::Dl => "dl",
    };
    let mut out =
        format!("ell_min,ell_max,ell_mean,{q}_w2,error_w2,{q}_master,error_master,modes\n");
    for b in &s.bins {
        let _ = writeln!(
            out,
            "{},{},{:.3},{:.10e},{:.10e},{:.10e},{:.10e},{:.3}",
            b.ell_min,
            b.ell_max,
            b.ell_mean,
            b.w2_estimate,
            b.w2_error,
            b.master,
            b.master_error,
            b.modes
        );
    }
    out
}
