//! Gaussian-field properties of the first-order coefficients.

use planisphere::measure::flat::{gaussian_random_field, periodic_coefficients, wavenumber};
use planisphere::scattering::filters::MorletBank;
use planisphere::scattering::transform::{ScatteringEngine, TransformSettings};

const N: usize = 128;
const PIXEL: f64 = 2.0e-4; // radians

fn spectrum(k: f64) -> f64 {
    1.0e-8 / (1.0 + (k / 3000.0).powi(2))
}

/// Complete elliptic integral of the second kind E(m) = ∫_0^{π/2} √(1 − m sin²t) dt
/// (Abramowitz & Stegun 17.3.3), by composite Simpson rule with 2000 intervals.
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

/// Leakage ρ = Σ_q P ψ̂(q) ψ̂(−q) / Σ_q P ψ̂(q)²: the pseudo-covariance E[g²] over the
/// covariance E[|g|²] of g = f∗ψ for a real field f (ψ̂ real).
fn leakage(bank: &MorletBank, j: usize, l: usize) -> f64 {
    let psi = bank.wavelet(j, l);
    let (mut num, mut den) = (0.0, 0.0);
    for iy in 0..N {
        for ix in 0..N {
            let p = spectrum(wavenumber(ix, iy, N, PIXEL));
            let a = psi[iy * N + ix];
            let b = psi[((N - iy) % N) * N + (N - ix) % N];
            num += p * a * b;
            den += p * a * a;
        }
    }
    num / den
}

#[test]
fn gaussian_field_first_order_ratio_is_pi_over_4() {
    // Source: the modulus of a circular complex Gaussian is Rayleigh distributed, so
    // (E|g|)² / E|g|² = π/4 (standard property of the Rayleigh distribution). Morlet wavelets are
    // not exactly analytic: for real f, g has pseudo-covariance E[g²] = ρ E|g|², so Re g and Im g
    // have variances (1 ± ρ)/2 · E|g|², and E|g| = √(2/π) a E(1 − b²/a²) (mean modulus of an
    // elliptical Gaussian, A&S 17.3.3 for E) gives the expected ratio (1 + ρ) E(m)² / π with
    // m = 2ρ/(1 + ρ). The deviation from π/4 is second order in ρ.
    let engine = ScatteringEngine::new(N, 5, 4).unwrap();
    let fields = 12;
    let sets: Vec<_> = (0..fields)
        .map(|s| {
            let map = gaussian_random_field(N, PIXEL, &spectrum, 500 + s).unwrap();
            periodic_coefficients(&engine, &map).unwrap()
        })
        .collect();
    for j in 1..5 {
        let mut expected = 0.0;
        let mut worst_rho: f64 = 0.0;
        for l in 0..4 {
            let rho = leakage(engine.bank(), j, l);
            worst_rho = worst_rho.max(rho.abs());
            let m = 2.0 * rho.abs() / (1.0 + rho.abs());
            expected += (1.0 + rho.abs()) * elliptic_e(m).powi(2) / std::f64::consts::PI / 4.0;
        }
        // Per-field orientation-averaged ratios; their ensemble scatter sets the tolerance.
        let ratios: Vec<f64> = sets
            .iter()
            .map(|set| {
                (0..4)
                    .map(|l| set.first_order(j, l).value.powi(2) / set.band_power(j, l).value)
                    .sum::<f64>()
                    / 4.0
            })
            .collect();
        let mean = ratios.iter().sum::<f64>() / fields as f64;
        let sd =
            (ratios.iter().map(|r| (r - mean).powi(2)).sum::<f64>() / (fields - 1) as f64).sqrt();
        let err = sd / (fields as f64).sqrt();
        println!(
            "j = {j}: S1²/P = {mean:.5} ± {err:.5}, expected {expected:.5} (π/4 = {:.5}, max |ρ| = {worst_rho:.4})",
            std::f64::consts::FRAC_PI_4
        );
        assert!(err < 0.01, "ensemble too small to test the ratio");
        assert!(
            (mean - expected).abs() < 3.0 * err + 1e-3,
            "j = {j}: {mean} vs {expected} ± {err}"
        );
    }
}

#[test]
fn band_power_equals_parseval_sum_of_field_spectrum_times_filter() {
    // Source: Parseval's theorem for the DFT. For one field, mean_x |f∗ψ|² = (1/n⁴) Σ_q
    // |f̂_q|² ψ̂_q² exactly (checked to 1e-10 on the full-resolution path); over the ensemble,
    // E = Σ_q P(k_q) ψ̂_q² / (n² Δ²) with the flat convention ⟨|f̂_q|²⟩ = n² P / Δ² (flat.rs).
    let full = ScatteringEngine::with_settings(
        N,
        5,
        4,
        TransformSettings {
            fourier_cropping: false,
            ..Default::default()
        },
    )
    .unwrap();
    let cropped = ScatteringEngine::new(N, 5, 4).unwrap();
    let bank = full.bank();
    let fields = 12;
    let mut ensemble = vec![vec![0.0; 20]; fields];
    for (s, row) in ensemble.iter_mut().enumerate() {
        let map = gaussian_random_field(N, PIXEL, &spectrum, 900 + s as u64).unwrap();
        let set = periodic_coefficients(&full, &map).unwrap();
        let cset = periodic_coefficients(&cropped, &map).unwrap();
        // Exact per-field Parseval sum, with an independent plain DFT of the map.
        let spec = dft_power(map.values());
        for j in 0..5 {
            for l in 0..4 {
                let psi = bank.wavelet(j, l);
                let exact: f64 =
                    spec.iter().zip(psi).map(|(p, h)| p * h * h).sum::<f64>() / (N as f64).powi(4);
                let got = set.band_power(j, l).value;
                assert!(
                    ((got - exact) / exact).abs() < 1e-10,
                    "j {j} l {l}: {got} vs {exact}"
                );
                let gotc = cset.band_power(j, l).value;
                assert!(((gotc - exact) / exact).abs() < 1e-3);
                row[j * 4 + l] = got;
            }
        }
    }
    for j in 0..5 {
        for l in 0..4 {
            let psi = bank.wavelet(j, l);
            let mut expected = 0.0;
            for iy in 0..N {
                for ix in 0..N {
                    if ix == 0 && iy == 0 {
                        continue; // generated fields have no q = 0 mode
                    }
                    expected += spectrum(wavenumber(ix, iy, N, PIXEL)) * psi[iy * N + ix].powi(2);
                }
            }
            expected /= (N as f64 * PIXEL).powi(2);
            let vals: Vec<f64> = ensemble.iter().map(|e| e[j * 4 + l]).collect();
            let mean = vals.iter().sum::<f64>() / fields as f64;
            let sd =
                (vals.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (fields - 1) as f64).sqrt();
            let err = sd / (fields as f64).sqrt();
            if l == 0 {
                println!("j = {j}: band power {mean:.4e} ± {err:.1e}, expected {expected:.4e}");
            }
            assert!(
                (mean - expected).abs() < 3.5 * err,
                "j {j} l {l}: {mean} vs {expected} ± {err}"
            );
        }
    }
}

/// |f̂_q|² by a direct separable DFT (independent of the crate's FFT code).
fn dft_power(values: &[f64]) -> Vec<f64> {
    use std::f64::consts::PI;
    let n = N;
    let (cs, sn): (Vec<f64>, Vec<f64>) = (0..n)
        .map(|t| {
            let a = 2.0 * PI * t as f64 / n as f64;
            (a.cos(), a.sin())
        })
        .unzip();
    // rows first
    let mut re = vec![0.0; n * n];
    let mut im = vec![0.0; n * n];
    for y in 0..n {
        for k in 0..n {
            let (mut a, mut b) = (0.0, 0.0);
            for x in 0..n {
                let t = (k * x) % n;
                a += values[y * n + x] * cs[t];
                b -= values[y * n + x] * sn[t];
            }
            re[y * n + k] = a;
            im[y * n + k] = b;
        }
    }
    let mut out = vec![0.0; n * n];
    for kx in 0..n {
        for ky in 0..n {
            let (mut a, mut b) = (0.0, 0.0);
            for y in 0..n {
                let t = (ky * y) % n;
                let (c, s) = (cs[t], -sn[t]);
                a += re[y * n + kx] * c - im[y * n + kx] * s;
                b += re[y * n + kx] * s + im[y * n + kx] * c;
            }
            out[ky * n + kx] = a * a + b * b;
        }
    }
    out
}
