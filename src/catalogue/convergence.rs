//! Convergence maps κ_E, κ_B of a binned catalogue: its mean-shear maps, set to 0 outside the
//! footprint, through the full-sky Kaiser–Squires inversion of
//! [`crate::harmonics::mass_mapping`] (κ_ℓm = −√(ℓ(ℓ+1)/((ℓ+2)(ℓ−1))) γ_ℓm for the E and B
//! parts, Kaiser & Squires 1993, ApJ 404, 441; optional Gaussian smoothing), then kept on the
//! footprint only (invalid, UNSEEN in a file, outside). κ_E is the mass map; κ_B is a null test,
//! zero for pure lensing shear up to noise and the leakage of the footprint's edges.
//!
//! One [`MassMapper`] (its transforms built once) serves the data and every noise realisation.

use crate::error::Result;
use crate::harmonics::mass_mapping::{MassMapper, MassMappingSettings};
use crate::sky::footprint::Footprint;
use crate::sky::skymap::SkyMap;

/// κ_E and κ_B on the footprint.
#[derive(Debug, Clone)]
pub struct ConvergenceOnFootprint {
    /// E-mode convergence (the mass map).
    pub e: SkyMap,
    /// B-mode convergence (a null test).
    pub b: SkyMap,
}

/// The mass mapper for maps of `nside` up to `lmax` (3·NSIDE − 1 when `None`).
pub fn mass_mapper(nside: u32, lmax: Option<usize>) -> Result<MassMapper> {
    let lmax = lmax.unwrap_or(3 * nside as usize - 1);
    crate::limits::check_lmax("--lmax", lmax, nside)?;
    MassMapper::new(nside as usize, lmax)
}

/// κ_E, κ_B of shear maps `gamma1`, `gamma2` (invalid pixels taken as 0), kept on `footprint`.
pub fn convergence_on_footprint(
    mapper: &MassMapper,
    gamma1: &SkyMap,
    gamma2: &SkyMap,
    footprint: &Footprint,
    settings: &MassMappingSettings,
) -> Result<ConvergenceOnFootprint> {
    let kappa = mapper.convergence_from_shear(
        &gamma1.values_filled(0.0),
        &gamma2.values_filled(0.0),
        settings,
    )?;
    let keep = |values: Vec<f64>| -> Result<SkyMap> {
        let kept = values
            .into_iter()
            .zip(footprint.weights().iter())
            .map(|(v, &w)| if w > 0.0 { v } else { f64::NAN })
            .collect();
        SkyMap::new(gamma1.pixelization(), kept)
    };
    Ok(ConvergenceOnFootprint {
        e: keep(kappa.e)?,
        b: keep(kappa.b)?,
    })
}
