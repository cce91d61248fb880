//! Tile power spectrum and bispectrum against laws with known answers: white noise of variance σ²
//! on pixels of size Δ has P(k) = σ²Δ² and, when its one-point distribution is skewed with third
//! central moment μ3, B(k1, k2, k3) = μ3 Δ⁴ for every triangle (white field: all polyspectra are
//! constant; common practice); a Gaussian field has zero bispectrum; and the FFT shell-filtering
//! estimator (Scoccimarro 2015, PRD 92, 083532) equals a brute-force sum over closed triangles.

use num_complex::Complex64;
use planisphere::measure::tile_spectra::{FourierStatistics, WavenumberBins};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};

const DELTA: f64 = 1e-3; // pixel size in radians

fn white(n: usize, seed: u64) -> Vec<f64> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    (0..n * n)
        .map(|_| StandardNormal.sample(&mut rng))
        .collect()
}

fn mean_err(x: &[f64]) -> (f64, f64) {
    let n = x.len() as f64;
    let m = x.iter().sum::<f64>() / n;
    let v = x.iter().map(|y| (y - m).powi(2)).sum::<f64>() / (n - 1.0);
    (m, (v / n).sqrt())
}

/// A smooth taper: 1 in the middle, cosine roll-off over the outer 12 pixels.
fn taper(n: usize) -> Vec<f64> {
    let edge = |i: usize| {
        let d = i.min(n - 1 - i) as f64;
        if d >= 12.0 {
            1.0
        } else {
            0.5 * (1.0 - (std::f64::consts::PI * d / 12.0).cos())
        }
    };
    (0..n * n).map(|i| edge(i % n) * edge(i / n)).collect()
}

#[test]
fn white_noise_power_is_variance_times_pixel_area_with_and_without_taper() {
    let n = 64;
    let stats = FourierStatistics::new(n, DELTA, WavenumberBins::logarithmic(n, DELTA, 8).unwrap())
        .unwrap();
    let sigma = 0.3;
    for t in [vec![1.0; n * n], taper(n)] {
        let spectra: Vec<Vec<f64>> = (0..40)
            .map(|s| {
                let f: Vec<f64> = white(n, s).iter().map(|x| sigma * x).collect();
                stats.power_spectrum(&f, &t, 1.0).unwrap().power
            })
            .collect();
        for b in 1..8 {
            let (m, e) = mean_err(&spectra.iter().map(|p| p[b]).collect::<Vec<_>>());
            let expected = sigma * sigma * DELTA * DELTA;
            assert!(
                (m - expected).abs() < 4.0 * e,
                "bin {b}: {m} ± {e} vs {expected}"
            );
            assert!(e < 0.1 * expected);
        }
    }
}

#[test]
fn skewed_white_noise_bispectrum_is_third_moment_times_pixel_area_squared() {
    // x = exp(s g), g ~ N(0, 1): μ3 = (e^{s²} + 2)·√(e^{s²} − 1)·Var^{3/2}, Var = (e^{s²} − 1)e^{s²}
    // (lognormal distribution, common practice).
    let n = 32;
    let stats = FourierStatistics::new(n, DELTA, WavenumberBins::logarithmic(n, DELTA, 5).unwrap())
        .unwrap();
    let tri = stats.triangles();
    let s: f64 = 0.5;
    let var = (s * s).exp_m1() * (s * s).exp();
    let mu3 = ((s * s).exp() + 2.0) * (s * s).exp_m1().sqrt() * var.powf(1.5);
    let ones = vec![1.0; n * n];
    let per_field: Vec<Vec<f64>> = (0..60)
        .map(|k| {
            let f: Vec<f64> = white(n, 100 + k).iter().map(|g| (s * g).exp()).collect();
            stats.bispectrum(&f, &ones, 1.0, &tri).unwrap().bispectrum
        })
        .collect();
    let expected = mu3 * DELTA.powi(4);
    let mut checked = 0;
    for (t, cfg) in tri.iter().enumerate() {
        let vals: Vec<f64> = per_field
            .iter()
            .map(|b| b[t])
            .filter(|v| v.is_finite())
            .collect();
        if vals.len() < 60 {
            continue;
        }
        let (m, e) = mean_err(&vals);
        assert!(
            (m - expected).abs() < 4.5 * e,
            "{cfg:?}: {m} ± {e} vs {expected}"
        );
        checked += 1;
    }
    assert!(checked >= 10, "only {checked} configurations checked");
}

#[test]
fn gaussian_field_bispectrum_is_zero_within_its_scatter() {
    let n = 32;
    let stats = FourierStatistics::new(n, DELTA, WavenumberBins::logarithmic(n, DELTA, 5).unwrap())
        .unwrap();
    let tri = stats.triangles();
    let ones = vec![1.0; n * n];
    let per_field: Vec<Vec<f64>> = (0..60)
        .map(|k| {
            stats
                .bispectrum(&white(n, 500 + k), &ones, 1.0, &tri)
                .unwrap()
                .bispectrum
        })
        .collect();
    let mut pulls = Vec::new();
    for t in 0..tri.len() {
        let vals: Vec<f64> = per_field
            .iter()
            .map(|b| b[t])
            .filter(|v| v.is_finite())
            .collect();
        if vals.len() == 60 {
            let (m, e) = mean_err(&vals);
            pulls.push(m / e);
        }
    }
    assert!(pulls.len() >= 10);
    assert!(pulls.iter().all(|p| p.abs() < 4.5), "{pulls:?}");
    // and the pulls scatter like a unit normal (not all identically zero)
    let rms = (pulls.iter().map(|p| p * p).sum::<f64>() / pulls.len() as f64).sqrt();
    assert!((0.4..1.8).contains(&rms), "rms pull {rms}");
}

#[test]
fn shell_filtering_estimator_equals_brute_force_triangle_sum() {
    // Brute force: mean over all (k1, k2) with k1 ∈ b1, k2 ∈ b2, k3 = −k1 − k2 ∈ b3 of
    // Re F(k1)F(k2)F(k3), times Δ⁴ / Σa³ (the definition the estimator evaluates with FFTs).
    let n = 16;
    let bins = WavenumberBins::logarithmic(n, DELTA, 4).unwrap();
    let stats = FourierStatistics::new(n, DELTA, bins.clone()).unwrap();
    let tri = stats.triangles();
    let f: Vec<f64> = white(n, 9).iter().map(|g| (0.7 * g).exp()).collect();
    let ones = vec![1.0; n * n];
    let fast = stats.bispectrum(&f, &ones, 1.0, &tri).unwrap();
    // DFT by direct summation
    let mean = f.iter().sum::<f64>() / (n * n) as f64;
    let tw = 2.0 * std::f64::consts::PI / n as f64;
    let mut ft = vec![Complex64::new(0.0, 0.0); n * n];
    for ky in 0..n {
        for kx in 0..n {
            let mut s = Complex64::new(0.0, 0.0);
            for y in 0..n {
                for x in 0..n {
                    s += (f[y * n + x] - mean)
                        * Complex64::from_polar(1.0, -tw * (kx * x + ky * y) as f64);
                }
            }
            ft[ky * n + kx] = s;
        }
    }
    let dk = 2.0 * std::f64::consts::PI / (n as f64 * DELTA);
    let sf = |i: usize| {
        if i <= n / 2 {
            i as f64
        } else {
            i as f64 - n as f64
        }
    };
    let bin = |kx: usize, ky: usize| bins.bin_of(dk * (sf(kx).powi(2) + sf(ky).powi(2)).sqrt());
    for (t, cfg) in tri.iter().enumerate() {
        let (mut sum, mut count) = (0.0, 0usize);
        for a in 0..n * n {
            if bin(a % n, a / n) != Some(cfg.b1) {
                continue;
            }
            for b in 0..n * n {
                if bin(b % n, b / n) != Some(cfg.b2) {
                    continue;
                }
                let cx = (2 * n - a % n - b % n) % n;
                let cy = (2 * n - a / n - b / n) % n;
                if bin(cx, cy) != Some(cfg.b3) {
                    continue;
                }
                sum += (ft[a] * ft[b] * ft[cy * n + cx]).re;
                count += 1;
            }
        }
        assert!(
            (fast.triangle_counts[t] - count as f64).abs() < 1e-6 * (count as f64).max(1.0),
            "{cfg:?} count"
        );
        if count > 0 {
            let brute = DELTA.powi(4) * sum / count as f64 / (n * n) as f64;
            assert!(
                (fast.bispectrum[t] - brute).abs() < 1e-9 * brute.abs().max(1e-30),
                "{cfg:?}: {} vs {brute}",
                fast.bispectrum[t]
            );
        }
    }
}
