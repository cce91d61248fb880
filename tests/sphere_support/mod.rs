//! Shared pieces of the sphere-level checks: spectra, footprints and flat-sky counterparts.
#![allow(dead_code)]

use planisphere::harmonics::spectrum::AngularSpectrum;
use planisphere::measure::flat::{gaussian_random_field, periodic_coefficients};
use planisphere::measure::measurement::{MeasurementSettings, SphereMeasurer};
use planisphere::scattering::statistics::CoefficientSet;
use planisphere::scattering::transform::ScatteringEngine;
use planisphere::simulate::skies::SkyRecipe;
use planisphere::sky::apodization::{apodize, TaperKind};
use planisphere::{Direction, Footprint, Ordering, Pixelization};

/// The spectrum of every sphere check: the demo model (ℓ² C_ℓ falling slowly, so the smallest
/// scales carry power and interpolation losses show), unit variance, to ℓmax = 3·NSIDE − 1.
pub fn spectrum(nside: u32) -> AngularSpectrum {
    AngularSpectrum::demo_model(3 * nside as usize - 1, 1.0)
}

/// Flat-sky counterpart P(k) = C_{k−½} (LoVerde & Afshordi 2008, PRD 78, 123506), linear in ℓ
/// between integers, zero beyond ℓmax + ½ (the sphere field has no power there).
pub fn flat_power(cl: &[f64], k: f64) -> f64 {
    let l = k - 0.5;
    if l < 0.0 || l > (cl.len() - 1) as f64 {
        return 0.0;
    }
    let i = l.floor() as usize;
    if i + 1 >= cl.len() {
        return cl[cl.len() - 1];
    }
    let t = l - i as f64;
    cl[i] * (1.0 - t) + cl[i + 1] * t
}

/// Binary cap of `radius_deg` around (lon, lat), RING ordering.
pub fn cap(nside: u32, lon: f64, lat: f64, radius_deg: f64) -> Footprint {
    let pix = Pixelization::new(nside, Ordering::Ring).expect("valid NSIDE");
    let c = Direction::from_lonlat_deg(lon, lat);
    let r = radius_deg.to_radians();
    Footprint::from_fn(pix, |d| d.distance(&c) < r)
}

/// Partial sky of f_sky ≈ 0.3: the cap of latitude > 15° with 12 circular holes of radius
/// `hole_deg`, 1.5 and 2 × `hole_deg` (mock stars), C2-apodized over `apo_deg`
/// (Grain, Tristram & Stompor 2009 profile).
pub fn holed_cap(nside: u32, hole_deg: f64, apo_deg: f64) -> Footprint {
    let pix = Pixelization::new(nside, Ordering::Ring).expect("valid NSIDE");
    let holes: Vec<(Direction, f64)> = (0..12)
        .map(|i| {
            let lon = 30.0 * i as f64 + 7.0;
            let lat = if i % 2 == 0 { 55.0 } else { 38.0 };
            (
                Direction::from_lonlat_deg(lon, lat),
                (hole_deg * (1.0 + 0.5 * (i % 3) as f64)).to_radians(),
            )
        })
        .collect();
    let binary = Footprint::from_fn(pix, |d| {
        d.lat() > 15f64.to_radians() && !holes.iter().any(|(h, r)| d.distance(h) < *r)
    });
    apodize(&binary, TaperKind::C2, apo_deg.to_radians()).expect("apodization")
}

/// Ensemble mean and standard deviation of every coefficient (value vectors in label order).
pub fn mean_sd(sets: &[CoefficientSet]) -> (Vec<f64>, Vec<f64>) {
    let n = sets.len() as f64;
    let count = sets[0].coefficients.len();
    let mut mean = vec![0.0; count];
    for s in sets {
        for (m, c) in mean.iter_mut().zip(&s.coefficients) {
            *m += c.value / n;
        }
    }
    let mut sd = vec![0.0; count];
    for s in sets {
        for (v, (c, m)) in sd.iter_mut().zip(s.coefficients.iter().zip(&mean)) {
            *v += (c.value - m).powi(2) / (n - 1.0).max(1.0);
        }
    }
    (mean, sd.into_iter().map(f64::sqrt).collect())
}

/// Sphere coefficient sets of `skies` Gaussian skies of [`spectrum`] measured on `footprint`.
pub fn sphere_sets(
    nside: u32,
    footprint: &Footprint,
    settings: MeasurementSettings,
    skies: u64,
    seed: u64,
) -> (SphereMeasurer, Vec<CoefficientSet>) {
    let recipe = SkyRecipe::gaussian(nside, spectrum(nside), seed);
    let transform = recipe.transform().expect("transform");
    let measurer =
        SphereMeasurer::new(footprint.pixelization(), footprint, settings).expect("measurer");
    let sets = (0..skies)
        .map(|i| {
            let map = recipe.realise(&transform, i).expect("sky");
            measurer
                .measure(&map, footprint)
                .expect("measurement")
                .coefficients
        })
        .collect();
    (measurer, sets)
}

/// Periodic coefficient sets of `fields` flat Gaussian fields of `size` pixels of side
/// `pixel` (radians) with P(k) = C_{k−½} of [`spectrum`].
pub fn flat_sets(
    nside: u32,
    size: usize,
    pixel: f64,
    scales: usize,
    orientations: usize,
    fields: u64,
    seed: u64,
) -> Vec<CoefficientSet> {
    let cl = spectrum(nside).cl;
    let engine = ScatteringEngine::new(size, scales, orientations).expect("engine");
    (0..fields)
        .map(|s| {
            let map = gaussian_random_field(size, pixel, &|k| flat_power(&cl, k), seed + s)
                .expect("field");
            periodic_coefficients(&engine, &map).expect("coefficients")
        })
        .collect()
}

/// The bit patterns of a run of values, for bit-for-bit comparisons.
pub fn bits<'v>(v: impl IntoIterator<Item = &'v f64>) -> Vec<u64> {
    v.into_iter().map(|x| x.to_bits()).collect()
}

/// Asserts that two lists of numbers are the same bit for bit; on a difference the message
/// names `what`, how many entries differ and the first few with both values (a whole-sky
/// list printed in full would bury them).
pub fn assert_same_bits<'v>(
    what: &str,
    a: impl IntoIterator<Item = &'v f64>,
    b: impl IntoIterator<Item = &'v f64>,
) {
    let (a, b): (Vec<f64>, Vec<f64>) = (
        a.into_iter().copied().collect(),
        b.into_iter().copied().collect(),
    );
    assert_eq!(a.len(), b.len(), "{what}: lengths");
    let differ: Vec<(usize, f64, f64)> = (0..a.len())
        .filter(|&i| a[i].to_bits() != b[i].to_bits())
        .map(|i| (i, a[i], b[i]))
        .collect();
    assert!(
        differ.is_empty(),
        "{what}: {} of {} entries differ, first (index, left, right): {:?}",
        differ.len(),
        a.len(),
        &differ[..differ.len().min(6)]
    );
}

/// The bit patterns of a pair measurement's cross coefficients.
pub fn cross_bits(p: &planisphere::measure::measurement::PairStatistics) -> Vec<u64> {
    p.cross
        .coefficients
        .iter()
        .map(|c| c.value.to_bits())
        .collect()
}
