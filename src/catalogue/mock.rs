//! Mock galaxy catalogues of our own invention, for the demo and tests: galaxies uniform on the
//! sphere inside a footprint, each with the shear of its pixel plus shape noise, written as CSV.
//!
//! Galaxy i: a direction uniform on the sphere (z = cos θ uniform in [−1, 1], φ uniform),
//! kept when its pixel of the footprint has weight > 0; ellipticity e = γ(p) + n with n two
//! independent N(0, σ_e²) components (redrawn until |e| < 1), γ(p) the shear map's value in the
//! galaxy's pixel — the weak-lensing limit e ≈ γ + e_intrinsic (Bartelmann & Schneider 2001,
//! Phys. Rep. 340, 291, eq. 4.14). Unit weights. One ChaCha8 stream from `seed`.

use super::screening::GalaxyBlock;
use crate::error::{Error, Result};
use crate::harmonics::mass_mapping::{MassMapper, ShearAxes};
use crate::harmonics::{HarmonicTransform, DEFAULT_ANALYSIS_ITERATIONS};
use crate::sky::footprint::Footprint;
use crate::sky::pixelization::Direction;
use crate::sky::skymap::SkyMap;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, Normal};
use std::f64::consts::PI;
use std::io::Write;
use std::path::Path;

/// `count` mock galaxies in `footprint` with shear (`gamma1`, `gamma2`) and shape noise
/// `sigma_e` per component.
pub fn mock_catalogue(
    gamma1: &SkyMap,
    gamma2: &SkyMap,
    footprint: &Footprint,
    count: usize,
    sigma_e: f64,
    seed: u64,
) -> Result<GalaxyBlock> {
    let pix = gamma1.pixelization();
    if !(sigma_e.is_finite() && (0.0..0.7).contains(&sigma_e)) {
        return Err(Error::Setting(format!(
            "shape noise sigma_e must lie in [0, 0.7), got {}",
            crate::error::compact(sigma_e)
        )));
    }
    let weights = footprint.weights();
    if !weights.iter().any(|&w| w > 0.0) {
        return Err(Error::Data("the mock footprint is empty".to_string()));
    }
    let noise = Normal::new(0.0, sigma_e.max(f64::MIN_POSITIVE))
        .map_err(|e| Error::Setting(e.to_string()))?;
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let mut block = GalaxyBlock::default();
    while block.len() < count {
        let z: f64 = rng.gen_range(-1.0..1.0);
        let phi: f64 = rng.gen_range(0.0..2.0 * PI);
        let dir = Direction::new(z.acos(), phi);
        let p = pix.pixel_of(dir);
        if weights.get(p as usize) <= 0.0 {
            continue;
        }
        let (g1, g2) = match (gamma1.get(p), gamma2.get(p)) {
            (Some(a), Some(b)) => (a, b),
            _ => continue,
        };
        let (e1, e2) = loop {
            let (n1, n2) = if sigma_e > 0.0 {
                (noise.sample(&mut rng), noise.sample(&mut rng))
            } else {
                (0.0, 0.0)
            };
            let (e1, e2) = (g1 + n1, g2 + n2);
            if e1 * e1 + e2 * e2 < 1.0 {
                break (e1, e2);
            }
        };
        let (lon, lat) = dir.lonlat();
        block.push(lon.to_degrees(), lat.to_degrees(), e1, e2, 1.0);
    }
    Ok(block)
}

/// Shear maps γ1, γ2 (east-north axes) of a convergence map up to `lmax`: its harmonic
/// analysis (3 Jacobi iterations) through the inverse Kaiser–Squires factors of
/// [`MassMapper::shear_from_convergence`].
pub fn shear_of_convergence(kappa: &SkyMap, lmax: usize) -> Result<(SkyMap, SkyMap)> {
    let nside = kappa.nside() as usize;
    let values = kappa.values_filled(0.0);
    let alm =
        HarmonicTransform::new(nside, lmax)?.analysis(&values, DEFAULT_ANALYSIS_ITERATIONS)?;
    let (g1, g2) =
        MassMapper::new(nside, lmax)?.shear_from_convergence(&alm, ShearAxes::EastNorth)?;
    Ok((
        SkyMap::new(kappa.pixelization(), g1)?,
        SkyMap::new(kappa.pixelization(), g2)?,
    ))
}

/// Writes galaxies as CSV with the default column names (RA, DEC, E1, E2, WEIGHT), each value
/// printed so that it reads back to the same f64, through a temporary file renamed into place.
pub fn write_catalogue_csv(path: &Path, galaxies: &GalaxyBlock) -> Result<()> {
    crate::files::write_atomically(path, |tmp| {
        let file = std::fs::File::create(tmp).map_err(|e| Error::io(path, e))?;
        let mut out = std::io::BufWriter::new(file);
        let io = |e: std::io::Error| Error::io(path, e);
        writeln!(out, "RA,DEC,E1,E2,WEIGHT").map_err(io)?;
        for i in 0..galaxies.len() {
            writeln!(
                out,
                "{:?},{:?},{:?},{:?},{:?}",
                galaxies.ra[i], galaxies.dec[i], galaxies.e1[i], galaxies.e2[i], galaxies.weight[i]
            )
            .map_err(io)?;
        }
        out.flush().map_err(io)
    })
}
