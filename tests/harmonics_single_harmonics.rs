//! A map synthesised from a single a_ℓm equals the analytic spherical harmonic at the pixel
//! centres of our ring geometry.

use std::f64::consts::PI;
use std::path::{Path, PathBuf};

use num_complex::Complex64;
use planisphere::harmonics::{HarmonicCoefficients, HarmonicTransform};
use serde_json::Value;

fn reference_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("reference-values/harmonics")
}

fn read_f64(name: &str) -> Vec<f64> {
    let bytes = std::fs::read(reference_dir().join(name)).unwrap();
    bytes
        .chunks_exact(8)
        .map(|c| f64::from_le_bytes(c.try_into().unwrap()))
        .collect()
}

fn single(lmax: usize, l: usize, m: usize, a: Complex64) -> HarmonicCoefficients {
    let mut alm = HarmonicCoefficients::zeros(lmax);
    alm.set(l, m, a);
    alm
}

// Source: scipy 1.17.1 scipy.special.sph_harm_y(l, m, θ, φ) (Condon–Shortley phase included)
// at healpy 1.20.1 pix2ang pixel centres, Nside 16, written by
// reference-values/harmonics_reference.py as a Y_l0 (m = 0) or 2 Re(a Y_lm) (m > 0).
#[test]
fn single_coefficient_maps_match_scipy_spherical_harmonics() {
    let text = std::fs::read_to_string(reference_dir().join("manifest.json")).unwrap();
    let manifest: Value = serde_json::from_str(&text).unwrap();
    for case in manifest["single_harmonic_cases"].as_array().unwrap() {
        let nside = case["nside"].as_u64().unwrap() as usize;
        let lmax = case["lmax"].as_u64().unwrap() as usize;
        let l = case["l"].as_u64().unwrap() as usize;
        let m = case["m"].as_u64().unwrap() as usize;
        let a = Complex64::new(case["re"].as_f64().unwrap(), case["im"].as_f64().unwrap());
        let expect = read_f64(case["map"].as_str().unwrap());
        let t = HarmonicTransform::new(nside, lmax).unwrap();
        let map = t.synthesis(&single(lmax, l, m, a)).unwrap();
        let scale = expect.iter().map(|v| v.abs()).fold(0.0, f64::max);
        let err = map
            .iter()
            .zip(&expect)
            .map(|(x, y)| (x - y).abs())
            .fold(0.0, f64::max)
            / scale;
        println!("Y_{l},{m}: {err:.3e}");
        assert!(err < 1e-12, "l={l} m={m}: {err:e}");
    }
}

// Closed forms (standard tables, e.g. Jackson, Classical Electrodynamics §3.6; from memory):
// Y_10 = √(3/4π) cos θ, Y_11 = −√(3/8π) sin θ e^{iφ}, Y_22 = √(15/32π) sin²θ e^{2iφ}; a real
// map from a_ℓm with m > 0 is 2 Re(a_ℓm Y_ℓm). Pixel centres from our own ring geometry, at
// Nside 5 (not a power of two).
#[test]
fn low_degree_maps_match_closed_form_harmonics_at_pixel_centres() {
    let (nside, lmax) = (5, 14);
    let t = HarmonicTransform::new(nside, lmax).unwrap();
    let centres = t.geometry().pixel_centres();
    let a = Complex64::new(0.4, -1.3);
    type Closed = fn(f64, f64, Complex64) -> f64;
    let cases: [(usize, usize, Closed); 3] = [
        (1, 0, |th, _, a| a.re * (3.0 / (4.0 * PI)).sqrt() * th.cos()),
        (1, 1, |th, ph, a| {
            2.0 * (a * Complex64::from_polar(-(3.0 / (8.0 * PI)).sqrt() * th.sin(), ph)).re
        }),
        (2, 2, |th, ph, a| {
            2.0 * (a * Complex64::from_polar(
                (15.0 / (32.0 * PI)).sqrt() * th.sin().powi(2),
                2.0 * ph,
            ))
            .re
        }),
    ];
    for (l, m, closed) in cases {
        let coefficient = if m == 0 { Complex64::new(a.re, 0.0) } else { a };
        let map = t.synthesis(&single(lmax, l, m, coefficient)).unwrap();
        for (p, (theta, phi)) in centres.iter().enumerate() {
            let want = closed(*theta, *phi, coefficient);
            assert!(
                (map[p] - want).abs() < 1e-13,
                "l={l} m={m} pixel {p}: {} vs {want}",
                map[p]
            );
        }
    }
}
