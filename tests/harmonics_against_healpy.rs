//! Spherical harmonic transforms checked against healpy 1.20.1 and scipy 1.17.1 reference data
//! written by reference-values/harmonics_reference.py (files in reference-values/harmonics/).

use std::path::{Path, PathBuf};

use num_complex::Complex64;
use planisphere::harmonics::{
    HarmonicCoefficients, HarmonicTransform, LegendreKernel, RingGeometry,
};
use serde_json::Value;

fn reference_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("reference-values/harmonics")
}

fn manifest() -> Value {
    let text = std::fs::read_to_string(reference_dir().join("manifest.json")).unwrap();
    serde_json::from_str(&text).unwrap()
}

fn read_f64(name: &str) -> Vec<f64> {
    let bytes = std::fs::read(reference_dir().join(name)).unwrap();
    bytes
        .chunks_exact(8)
        .map(|c| f64::from_le_bytes(c.try_into().unwrap()))
        .collect()
}

fn read_alm(name: &str, lmax: usize) -> HarmonicCoefficients {
    let raw = read_f64(name);
    let data = raw
        .chunks_exact(2)
        .map(|c| Complex64::new(c[0], c[1]))
        .collect();
    HarmonicCoefficients::from_vec(lmax, data).unwrap()
}

/// max |a − b| / max |b|.
fn relative_max_error(a: &[f64], b: &[f64]) -> f64 {
    assert_eq!(a.len(), b.len());
    let err = a
        .iter()
        .zip(b)
        .map(|(x, y)| (x - y).abs())
        .fold(0.0, f64::max);
    let scale = b.iter().map(|y| y.abs()).fold(0.0, f64::max);
    err / scale
}

fn relative_alm_error(a: &HarmonicCoefficients, b: &HarmonicCoefficients) -> f64 {
    let err = a
        .as_slice()
        .iter()
        .zip(b.as_slice())
        .map(|(x, y)| (x - y).norm())
        .fold(0.0, f64::max);
    let scale = b.as_slice().iter().map(|y| y.norm()).fold(0.0, f64::max);
    err / scale
}

fn cases() -> Vec<Value> {
    manifest()["transform_cases"].as_array().unwrap().clone()
}

fn usize_of(v: &Value, key: &str) -> usize {
    v[key].as_u64().unwrap() as usize
}

// Source: healpy 1.20.1 pix2ang at the first pixel of every ring (cos θ, φ0), ring starts and
// pixel counts; also reference-facts.md (Górski et al. 2005, checked with healpy): RING pixels
// [0, 427, 1440, 1520, 3068] at Nside 16.
#[test]
fn ring_geometry_matches_healpy_pix2ang_at_ring_starts() {
    for case in manifest()["geometry_cases"].as_array().unwrap() {
        let nside = usize_of(case, "nside");
        let g = RingGeometry::new(nside).unwrap();
        let rings = g.rings();
        let first: Vec<u64> = case["first_pixel"]
            .as_array()
            .unwrap()
            .iter()
            .map(|v| v.as_u64().unwrap())
            .collect();
        assert_eq!(rings.len(), first.len(), "nside {nside}");
        for (i, ring) in rings.iter().enumerate() {
            assert_eq!(ring.first_pixel as u64, first[i], "nside {nside} ring {i}");
            assert_eq!(
                ring.pixel_count as u64,
                case["pixel_count"][i].as_u64().unwrap()
            );
            let z = case["cos_theta"][i].as_f64().unwrap();
            let phi0 = case["phi0"][i].as_f64().unwrap();
            assert!((ring.z - z).abs() < 1e-14, "nside {nside} ring {i} z");
            assert!(
                (ring.phi0 - phi0).abs() < 1e-14,
                "nside {nside} ring {i} phi0"
            );
            assert!((ring.sin_theta - (1.0 - z * z).sqrt()).abs() < 1e-12);
        }
    }
    // reference-facts.md, HEALPix RING pix2ang at Nside 16 [checked with healpy].
    let centres = RingGeometry::new(16).unwrap().pixel_centres();
    let expect = [
        (0usize, 0.05103658, std::f64::consts::FRAC_PI_4),
        (427, 0.78550497, std::f64::consts::FRAC_PI_4),
        (1440, 1.52911759, 0.0),
        (1520, std::f64::consts::FRAC_PI_2, 1.61988371), // listed as 1.57079633
        (3068, 3.09055608, std::f64::consts::FRAC_PI_4),
    ];
    for (p, theta, phi) in expect {
        assert!((centres[p].0 - theta).abs() < 1e-8, "pixel {p} theta");
        assert!((centres[p].1 - phi).abs() < 1e-8, "pixel {p} phi");
    }
}

// Source: healpy 1.20.1 alm2map of random coefficients (seeded, Cℓ = 1/(ℓ+10)²), Nside 4, 12,
// 16, 32, 64 (12 is not a power of two); tolerance 1e-10 relative to the map's maximum.
#[test]
fn synthesis_matches_healpy_alm2map() {
    for case in cases() {
        let (nside, lmax) = (usize_of(&case, "nside"), usize_of(&case, "lmax"));
        let alm = read_alm(case["alm"].as_str().unwrap(), lmax);
        let expect = read_f64(case["map"].as_str().unwrap());
        for kernel in LegendreKernel::available() {
            let t = HarmonicTransform::with_kernel(nside, lmax, kernel).unwrap();
            let map = t.synthesis(&alm).unwrap();
            let err = relative_max_error(&map, &expect);
            let name = kernel.name();
            println!("synthesis nside {nside} lmax {lmax} kernel {name}: {err:.3e}");
            assert!(err < 1e-10, "nside {nside} lmax {lmax}: {err:e}");
        }
    }
}

// Source: healpy 1.20.1 alm2cl(alm) and alm2cl(alm, map2alm(map, iter=0)).
#[test]
fn power_and_cross_spectra_match_healpy_alm2cl() {
    for case in cases() {
        let lmax = usize_of(&case, "lmax");
        let alm = read_alm(case["alm"].as_str().unwrap(), lmax);
        let other = read_alm(case["analysis_iter0"].as_str().unwrap(), lmax);
        let cl = read_f64(case["cl"].as_str().unwrap());
        let cross = read_f64(case["cross_cl_input_iter0"].as_str().unwrap());
        assert!(relative_max_error(&alm.power_spectrum(), &cl) < 1e-13);
        assert!(relative_max_error(&alm.cross_spectrum(&other).unwrap(), &cross) < 1e-13);
    }
}

// Source: healpy 1.20.1 map2alm(map, iter=0 and iter=3, use_weights=False) of the alm2map maps
// above; tolerance 1e-10 relative to the largest coefficient.
#[test]
fn analysis_matches_healpy_map2alm_for_zero_and_three_iterations() {
    for case in cases() {
        let (nside, lmax) = (usize_of(&case, "nside"), usize_of(&case, "lmax"));
        let map = read_f64(case["map"].as_str().unwrap());
        let t = HarmonicTransform::new(nside, lmax).unwrap();
        for (iterations, key) in [(0, "analysis_iter0"), (3, "analysis_iter3")] {
            let expect = read_alm(case[key].as_str().unwrap(), lmax);
            let alm = t.analysis(&map, iterations).unwrap();
            let err = relative_alm_error(&alm, &expect);
            println!("analysis nside {nside} lmax {lmax} iter {iterations}: {err:.3e}");
            assert!(
                err < 1e-10,
                "nside {nside} lmax {lmax} iter {iterations}: {err:e}"
            );
        }
    }
}

// Source: healpy 1.20.1's own round-trip error max|map2alm(alm2map(a)) − a| / max|a| for the
// same coefficients (recorded by the reference script); ours must be no worse than 1.01× it.
#[test]
fn round_trip_error_is_no_worse_than_healpys() {
    for case in cases() {
        let (nside, lmax) = (usize_of(&case, "nside"), usize_of(&case, "lmax"));
        let alm = read_alm(case["alm"].as_str().unwrap(), lmax);
        let t = HarmonicTransform::new(nside, lmax).unwrap();
        let map = t.synthesis(&alm).unwrap();
        for (iterations, key) in [
            (0, "healpy_roundtrip_error_iter0"),
            (3, "healpy_roundtrip_error_iter3"),
        ] {
            let ours = relative_alm_error(&t.analysis(&map, iterations).unwrap(), &alm);
            let healpy = case[key].as_f64().unwrap();
            println!("round trip nside {nside} lmax {lmax} iter {iterations}: ours {ours:.3e}, healpy {healpy:.3e}");
            assert!(
                ours <= 1.01 * healpy + 1e-13,
                "ours {ours:e} healpy {healpy:e}"
            );
        }
    }
}

// Source: healpy 1.20.1 alm2map and map2alm(iter=0, use_weights=False) at Nside 256,
// lmax 767 = 3 Nside − 1 for coefficients given by a closed formula (reference script), at a
// subset of pixels (all of the four polar rings at each end, every 97th elsewhere) and of
// coefficients (all ℓ for m in {0, 1, 100, 383, 600, 700, 760, 767}, every 53rd elsewhere).
// Exercises the rescaled recurrence near the poles and aliasing of high m on small rings.
#[test]
fn high_lmax_transforms_match_healpy_near_the_poles() {
    let case = &manifest()["formula_case"];
    let lmax = usize_of(case, "lmax");
    let mut alm = HarmonicCoefficients::zeros(lmax);
    for m in 0..=lmax {
        for l in m..=lmax {
            let (lf, mf) = (l as f64, m as f64);
            let re = (0.1 * lf + 0.37 * mf + 0.013 * lf * mf).cos() / (lf + 1.0);
            let im = if m == 0 {
                0.0
            } else {
                (0.23 * lf - 0.11 * mf).sin() / (lf + 1.0)
            };
            alm.set(l, m, Complex64::new(re, im));
        }
    }
    for kernel in LegendreKernel::available() {
        high_lmax_case(case, &alm, kernel);
    }
}

fn high_lmax_case(case: &Value, alm: &HarmonicCoefficients, kernel: LegendreKernel) {
    let (nside, lmax) = (usize_of(case, "nside"), usize_of(case, "lmax"));
    let t = HarmonicTransform::with_kernel(nside, lmax, kernel).unwrap();
    let map = t.synthesis(alm).unwrap();
    let pixels = read_f64(case["pixels"].as_str().unwrap());
    let values = read_f64(case["map_values"].as_str().unwrap());
    let map_scale = case["map_max_abs"].as_f64().unwrap();
    let map_err = pixels
        .iter()
        .zip(&values)
        .map(|(p, v)| (map[*p as usize] - v).abs())
        .fold(0.0, f64::max)
        / map_scale;
    println!("formula synthesis error {map_err:.3e} ({})", kernel.name());
    assert!(map_err < 1e-10, "{map_err:e}");
    let analysed = t.analysis(&map, 0).unwrap();
    let indices = read_f64(case["alm_indices"].as_str().unwrap());
    let expect: Vec<Complex64> = read_f64(case["analysis_iter0_values"].as_str().unwrap())
        .chunks_exact(2)
        .map(|c| Complex64::new(c[0], c[1]))
        .collect();
    let alm_scale = case["analysis_max_abs"].as_f64().unwrap();
    let alm_err = indices
        .iter()
        .zip(&expect)
        .map(|(i, v)| (analysed.as_slice()[*i as usize] - v).norm())
        .fold(0.0, f64::max)
        / alm_scale;
    println!("formula analysis error {alm_err:.3e} ({})", kernel.name());
    assert!(alm_err < 1e-10, "{alm_err:e}");
}
