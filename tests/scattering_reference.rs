//! Agreement with the independent numpy implementation in
//! reference-values/scattering_reference.py (pixel-space Morlet filters wrapped on the torus,
//! numpy FFT circular convolution, numpy 2.4.6), on periodic 32 × 32 maps.

use planisphere::measure::flat::{periodic_coefficients, FlatMap};
use planisphere::scattering::statistics::CoefficientSet;
use planisphere::scattering::transform::{ScatteringEngine, TransformSettings};
use serde_json::Value;

fn load(name: &str) -> Value {
    let path = format!(
        "{}/reference-values/scattering/{name}",
        env!("CARGO_MANIFEST_DIR")
    );
    let text = std::fs::read_to_string(&path).unwrap_or_else(|e| panic!("{path}: {e}"));
    serde_json::from_str(&text).unwrap_or_else(|e| panic!("{path}: {e}"))
}

fn num(v: &Value) -> f64 {
    v.as_f64().expect("number in reference file")
}

/// Largest relative deviation between the Rust coefficients and the reference file.
fn max_relative_deviation(reference: &Value, set: &CoefficientSet) -> (f64, usize) {
    let j_count = reference["scales"].as_u64().unwrap() as usize;
    let l_count = reference["orientations"].as_u64().unwrap() as usize;
    let mut worst: f64 = 0.0;
    let mut compared = 0;
    let mut check = |expected: f64, got: f64| {
        worst = worst.max(((got - expected) / expected).abs());
        compared += 1;
    };
    check(num(&reference["variance"]), set.variance().value);
    for j1 in 0..j_count {
        for l1 in 0..l_count {
            check(
                num(&reference["first_order"][j1][l1]),
                set.first_order(j1, l1).value,
            );
            check(
                num(&reference["band_power"][j1][l1]),
                set.band_power(j1, l1).value,
            );
            for j2 in (j1 + 1)..j_count {
                for l2 in 0..l_count {
                    check(
                        num(&reference["second_order"][j1][l1][j2][l2]),
                        set.second_order(j1, l1, j2, l2).value,
                    );
                }
            }
        }
    }
    let mean = num(&reference["mean"]);
    assert!((set.mean().value - mean).abs() < 1e-12, "mean differs");
    (worst, compared)
}

fn run(name: &str, cropping: bool) -> (f64, usize, usize) {
    let reference = load(name);
    let n = reference["size"].as_u64().unwrap() as usize;
    let j_count = reference["scales"].as_u64().unwrap() as usize;
    let l_count = reference["orientations"].as_u64().unwrap() as usize;
    let values: Vec<f64> = reference["map_row_major"]
        .as_array()
        .unwrap()
        .iter()
        .map(num)
        .collect();
    let map = FlatMap::new(n, 1e-3, values).unwrap();
    let engine = ScatteringEngine::with_settings(
        n,
        j_count,
        l_count,
        TransformSettings {
            fourier_cropping: cropping,
            ..Default::default()
        },
    )
    .unwrap();
    let set = periodic_coefficients(&engine, &map).unwrap();
    assert!(set.coefficients.iter().all(|c| c.trusted));
    let cropped_scales = engine.crop_levels().iter().filter(|&&d| d > 0).count();
    let (worst, compared) = max_relative_deviation(&reference, &set);
    (worst, compared, cropped_scales)
}

const FILES: [&str; 4] = [
    "periodic_n32_J3_L4.json",
    "periodic_n32_J3_L8.json",
    "periodic_n32_J4_L6.json",
    "periodic_n64_J5_L4.json",
];

#[test]
fn full_resolution_coefficients_match_numpy_reference_to_1e_10() {
    for name in FILES {
        let (worst, compared, cropped) = run(name, false);
        assert_eq!(cropped, 0);
        println!("{name}: {compared} coefficients, max relative deviation {worst:.3e}");
        assert!(compared > 50);
        assert!(worst < 1e-10, "{name}: max relative deviation {worst:e}");
    }
}

#[test]
fn fourier_cropped_coefficients_match_numpy_reference_within_1e_3() {
    let mut exercised = 0;
    for name in FILES {
        let (worst, compared, cropped) = run(name, true);
        exercised += cropped;
        println!(
            "{name}: {compared} coefficients, {cropped} cropped scales, max relative deviation {worst:.3e}"
        );
        assert!(worst < 1e-3, "{name}: max relative deviation {worst:e}");
    }
    assert!(
        exercised > 0,
        "no reference case exercises Fourier cropping"
    );
}

#[test]
fn littlewood_paley_range_matches_numpy_reference() {
    for name in FILES {
        let reference = load(name);
        let n = reference["size"].as_u64().unwrap() as usize;
        let j_count = reference["scales"].as_u64().unwrap() as usize;
        let l_count = reference["orientations"].as_u64().unwrap() as usize;
        let bank = planisphere::scattering::filters::MorletBank::new(n, j_count, l_count).unwrap();
        let range = bank.littlewood_paley_range();
        let (lo, hi) = (
            num(&reference["littlewood_paley_min"]),
            num(&reference["littlewood_paley_max"]),
        );
        println!(
            "{name}: LP min {:.6} (numpy {lo:.6}), max {:.6} (numpy {hi:.6})",
            range.min, range.max
        );
        assert!((range.min - lo).abs() < 1e-10 && (range.max - hi).abs() < 1e-10);
    }
}
