//! Large harmonic transforms (lmax = 3 NSIDE − 1) checked against healpy 1.20.1 and ducc0 0.42.0
//! summaries written by reference-values/harmonics_large_reference.py (manifest in
//! reference-values/harmonics_large/): synthesis at a few pixels and the map's sum of squares,
//! analysis with 0 and 3 Jacobi iterations at a few coefficients and its round-trip error, and
//! the power spectra. NSIDE 256 runs in CI; NSIDE 2048 (lmax 6143, a few minutes on two cores)
//! is ignored: `cargo test --release --test harmonics_large_against_healpy -- --ignored`.

use std::path::Path;

use num_complex::Complex64;
use planisphere::harmonics::{HarmonicCoefficients, HarmonicTransform};
use serde_json::Value;

/// Relative tolerance of every check (against the largest map value, the largest coefficient
/// or, for C_ℓ, the value itself).
const TOLERANCE: f64 = 1e-10;

fn case(nside: usize) -> Value {
    let path = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("reference-values/harmonics_large/manifest.json");
    let manifest: Value = serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap();
    manifest["cases"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["nside"].as_u64() == Some(nside as u64))
        .unwrap()
        .clone()
}

fn floats(v: &Value) -> Vec<f64> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_f64().unwrap())
        .collect()
}

fn complexes(v: &Value) -> Vec<Complex64> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|x| Complex64::new(x[0].as_f64().unwrap(), x[1].as_f64().unwrap()))
        .collect()
}

/// The script's formula: a_ℓm = ((7ℓ + 13m) mod 101 − 50)/50/(ℓ + 1)
/// + i((11ℓ + 5m) mod 97 − 48)/48/(ℓ + 1), real at m = 0 (same operations, same bits).
fn formula_alm(lmax: usize) -> HarmonicCoefficients {
    let mut alm = HarmonicCoefficients::zeros(lmax);
    for m in 0..=lmax {
        for l in m..=lmax {
            let re = (((7 * l + 13 * m) % 101) as f64 - 50.0) / 50.0 / (l + 1) as f64;
            let im = if m == 0 {
                0.0
            } else {
                (((11 * l + 5 * m) % 97) as f64 - 48.0) / 48.0 / (l + 1) as f64
            };
            alm.set(l, m, Complex64::new(re, im));
        }
    }
    alm
}

/// Σ_ℓm w_m |a − b|², m > 0 counted twice (both signs of m).
fn sum_squares(a: &HarmonicCoefficients, b: &HarmonicCoefficients) -> f64 {
    let lmax = a.lmax();
    let mut s = 0.0;
    for m in 0..=lmax {
        let w = if m == 0 { 1.0 } else { 2.0 };
        for l in m..=lmax {
            s += w * (a.get(l, m) - b.get(l, m)).norm_sqr();
        }
    }
    s
}

fn check(nside: usize) {
    let c = case(nside);
    let lmax = c["lmax"].as_u64().unwrap() as usize;
    assert_eq!(lmax, 3 * nside - 1);
    let t = HarmonicTransform::new(nside, lmax).unwrap();
    let alm = formula_alm(lmax);

    // Synthesis (healpy alm2map, ducc0 synthesis) at the listed pixels.
    let map = t.synthesis(&alm).unwrap();
    let map_scale = c["map_max_abs"].as_f64().unwrap();
    let pixels: Vec<usize> = c["pixels"]
        .as_array()
        .unwrap()
        .iter()
        .map(|p| p.as_u64().unwrap() as usize)
        .collect();
    for key in ["map_at_pixels", "ducc0_map_at_pixels"] {
        for (p, want) in pixels.iter().zip(floats(&c[key])) {
            let err = (map[*p] - want).abs() / map_scale;
            assert!(err < TOLERANCE, "NSIDE {nside} {key} pixel {p}: {err:e}");
        }
    }
    let ours: f64 = map.iter().map(|v| v * v).sum();
    let want = c["map_sum_squares"].as_f64().unwrap();
    let err = (ours - want).abs() / want;
    println!("NSIDE {nside}: map sum of squares relative difference {err:.2e}");
    assert!(err < TOLERANCE, "NSIDE {nside} map sum of squares: {err:e}");

    // Analysis with 0 and 3 iterations (healpy map2alm use_weights=False; ducc0
    // adjoint_synthesis × 4π/Npix for 0), the round trip and the spectra.
    let alm_scale = c["alm_max_abs"].as_f64().unwrap();
    let picks: Vec<(usize, usize)> = c["coefficients"]
        .as_array()
        .unwrap()
        .iter()
        .map(|p| {
            (
                p[0].as_u64().unwrap() as usize,
                p[1].as_u64().unwrap() as usize,
            )
        })
        .collect();
    let ells: Vec<usize> = c["ells"]
        .as_array()
        .unwrap()
        .iter()
        .map(|l| l.as_u64().unwrap() as usize)
        .collect();
    let cl_in = alm.power_spectrum();
    for (l, want) in ells.iter().zip(floats(&c["cl_input_at"])) {
        assert!((cl_in[*l] - want).abs() <= TOLERANCE * want, "input C_{l}");
    }
    for (iterations, keys) in [
        (0, vec!["analysis_iter0_at", "ducc0_analysis_iter0_at"]),
        (3, vec!["analysis_iter3_at"]),
    ] {
        let back = t.analysis(&map, iterations).unwrap();
        for key in keys {
            for (&(l, m), want) in picks.iter().zip(complexes(&c[key])) {
                let err = (back.get(l, m) - want).norm() / alm_scale;
                assert!(
                    err < TOLERANCE,
                    "NSIDE {nside} {key} (l {l}, m {m}): {err:e}"
                );
            }
        }
        let trip = sum_squares(&back, &alm);
        let want = c[format!("round_trip_iter{iterations}_sum_squares").as_str()]
            .as_f64()
            .unwrap();
        let total = sum_squares(&alm, &HarmonicCoefficients::zeros(lmax));
        println!(
            "NSIDE {nside} iter {iterations}: round trip Σ|Δa|² ours {trip:.6e}, healpy {want:.6e} (Σ|a|² {total:.3e})"
        );
        // Both round-trip errors are quadrature errors of the same size; they agree to
        // 1e-10 of Σ|a|².
        assert!(
            (trip - want).abs() < TOLERANCE * total,
            "NSIDE {nside} iter {iterations} round trip"
        );
        let cl = back.power_spectrum();
        let key = format!("cl_iter{iterations}_at");
        for (l, want) in ells.iter().zip(floats(&c[key.as_str()])) {
            let err = (cl[*l] - want).abs() / want;
            assert!(err < TOLERANCE, "NSIDE {nside} {key} C_{l}: {err:e}");
        }
        let sum: f64 = cl.iter().sum();
        let want = c[format!("cl_iter{iterations}_sum").as_str()]
            .as_f64()
            .unwrap();
        assert!((sum - want).abs() < TOLERANCE * want, "NSIDE {nside} ΣC_ℓ");
    }
}

// Source: healpy 1.20.1 and ducc0 0.42.0 (reference-values/harmonics_large_reference.py).
#[test]
fn transforms_at_nside_256_match_healpy_and_ducc0() {
    check(256);
}

// Source: as above, NSIDE 2048, lmax 6143 (slow: run with --ignored).
#[test]
#[ignore]
fn transforms_at_nside_2048_match_healpy_and_ducc0() {
    check(2048);
}
