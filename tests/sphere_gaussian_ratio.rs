//! Gaussian skies on the sphere: the first-order coefficient squared over the band power of
//! the same (j, l) follows the Rayleigh law, full sky and on a masked partial sky.

mod sphere_support;

use planisphere::measure::flat::wavenumber;
use planisphere::measure::measurement::MeasurementSettings;
use planisphere::scattering::filters::MorletBank;
use planisphere::scattering::statistics::CoefficientSet;
use planisphere::Footprint;

const NSIDE: u32 = 64;
const J: usize = 4;
const L: usize = 4;

/// Complete elliptic integral of the second kind E(m) = ∫_0^{π/2} √(1 − m sin²t) dt
/// (Abramowitz & Stegun 17.3.3), composite Simpson rule with 2000 intervals.
fn elliptic_e(m: f64) -> f64 {
    let steps = 2000;
    let h = std::f64::consts::FRAC_PI_2 / steps as f64;
    let f = |t: f64| (1.0 - m * t.sin().powi(2)).sqrt();
    let mut s = f(0.0) + f(std::f64::consts::FRAC_PI_2);
    for i in 1..steps {
        s += f(i as f64 * h) * if i % 2 == 1 { 4.0 } else { 2.0 };
    }
    s * h / 3.0
}

/// Leakage ρ = Σ_q P ψ̂(q) ψ̂(−q) / Σ_q P ψ̂(q)² of the tile's wavelet for the flat counterpart
/// P(k) = C_{k−½} of the sky spectrum (as in tests/scattering_gaussian.rs).
fn leakage(bank: &MorletBank, n: usize, pixel: f64, cl: &[f64], j: usize, l: usize) -> f64 {
    let psi = bank.wavelet(j, l);
    let (mut num, mut den) = (0.0, 0.0);
    for iy in 0..n {
        for ix in 0..n {
            let p = sphere_support::flat_power(cl, wavenumber(ix, iy, n, pixel));
            let a = psi[iy * n + ix];
            let b = psi[((n - iy) % n) * n + (n - ix) % n];
            num += p * a * b;
            den += p * a * a;
        }
    }
    num / den
}

/// For real f, g = f∗ψ has pseudo-covariance E[g²] = ρ E|g|²; the mean modulus of the elliptical
/// Gaussian gives (E|g|)²/E|g|² = (1 + ρ) E(m)²/π with m = 2ρ/(1 + ρ), which is π/4 at ρ = 0
/// (Rayleigh distribution). Derivation in tests/scattering_gaussian.rs.
fn expected_ratio(rho: f64) -> f64 {
    let r = rho.abs();
    (1.0 + r) * elliptic_e(2.0 * r / (1.0 + r)).powi(2) / std::f64::consts::PI
}

fn check_ratios(name: &str, footprint: &Footprint, skies: u64, seed: u64) {
    let settings = MeasurementSettings {
        scales: J,
        orientations: L,
        bispectrum: false,
        ..Default::default()
    };
    let (measurer, sets) = sphere_support::sphere_sets(NSIDE, footprint, settings, skies, seed);
    let n = measurer.plan().tile_pixels();
    let pixel = measurer.plan().pixel_size();
    let cl = sphere_support::spectrum(NSIDE).cl;
    for j in 1..J {
        let expected = (0..L)
            .map(|l| expected_ratio(leakage(measurer.engine().bank(), n, pixel, &cl, j, l)))
            .sum::<f64>()
            / L as f64;
        // Per-sky orientation-averaged ratio; the sky-to-sky scatter sets the tolerance.
        let ratio = |set: &CoefficientSet| {
            (0..L)
                .map(|l| set.first_order(j, l).value.powi(2) / set.band_power(j, l).value)
                .sum::<f64>()
                / L as f64
        };
        let ratios: Vec<f64> = sets.iter().map(ratio).collect();
        let k = ratios.len() as f64;
        let mean = ratios.iter().sum::<f64>() / k;
        let sd = (ratios.iter().map(|r| (r - mean).powi(2)).sum::<f64>() / (k - 1.0)).sqrt();
        let err = sd / k.sqrt();
        let kept = sets[0].first_order(j, 0).kept_weight_fraction;
        println!(
            "{name}, j = {j}: S1²/P = {mean:.5} ± {err:.5}, expected {expected:.5} (π/4 = {:.5}), kept weight {kept:.2}",
            std::f64::consts::FRAC_PI_4
        );
        assert!(err < 0.01, "{name}: ensemble too small ({err})");
        // 3 standard errors, plus 2e-3 for the pixel-level non-Gaussianity of the sampled field
        // within a tile (neighbouring interpolated pixels share map pixels) and the ρ prediction
        // being made for the flat counterpart spectrum rather than the sampled one.
        assert!(
            (mean - expected).abs() < 3.0 * err + 2e-3,
            "{name}, j = {j}: {mean} vs {expected} ± {err}"
        );
    }
}

#[test]
fn gaussian_sky_first_order_ratio_is_pi_over_4_full_sky() {
    let footprint = Footprint::full_sky(
        planisphere::Pixelization::new(NSIDE, planisphere::Ordering::Ring).unwrap(),
    );
    check_ratios("full sky", &footprint, 4, 21);
}

#[test]
fn gaussian_sky_first_order_ratio_is_pi_over_4_on_a_masked_sky() {
    let footprint = sphere_support::holed_cap(NSIDE, 4.0, 3.0);
    println!("f_sky = {:.3}", footprint.f_sky());
    check_ratios("masked", &footprint, 6, 31);
}
