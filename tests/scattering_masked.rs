//! Mask-aware estimator: on a stationary Gaussian field, trusted coefficients computed on a
//! footprint with holes and edges agree with the periodic full-map coefficients of the same
//! fields (design property of the estimator in src/scattering/transform.rs; the tolerance, 0.5 σ of the
//! per-field ensemble scatter, is this crate's acceptance criterion).

mod common;

use common::holey_taper;
use planisphere::measure::flat::{
    gaussian_random_field, masked_coefficients, periodic_coefficients,
};
use planisphere::scattering::statistics::{CoefficientKind, CoefficientSet};
use planisphere::scattering::transform::ScatteringEngine;

const N: usize = 128;
const J: usize = 4;
const L: usize = 4;
const PIXEL: f64 = 2.0e-4;

fn spectrum(k: f64) -> f64 {
    1.0e-8 / (1.0 + (k / 4000.0).powi(2))
}

/// Footprint: 6-pixel masked border and circular holes, C2-apodized over 6 pixels.
fn taper() -> Vec<f64> {
    let holes = [
        (30.0, 35.0, 12.0),
        (85.0, 30.0, 9.0),
        (60.0, 75.0, 15.0),
        (100.0, 100.0, 11.0),
        (25.0, 100.0, 8.0),
    ];
    holey_taper(N, 6.0, &holes, 6.0)
}

#[test]
fn masked_trusted_coefficients_agree_with_full_map_within_half_sigma() {
    let engine = ScatteringEngine::new(N, J, L).unwrap();
    let a = taper();
    let removed = a.iter().filter(|&&v| v == 0.0).count() as f64 / (N * N) as f64;
    let tapered = a.iter().filter(|&&v| v < 1.0).count() as f64 / (N * N) as f64;
    println!("removed (taper 0) fraction {removed:.3}, tapered (taper < 1) fraction {tapered:.3}");
    assert!((0.3..=0.5).contains(&removed));
    // 64 fields: the paired masked − full difference of ensemble means then has a standard
    // error of about 0.1–0.15 σ, small enough to resolve a 0.5 σ bias.
    let fields: u64 = 64;
    let mut full_sets: Vec<CoefficientSet> = Vec::new();
    let mut masked_sets: Vec<CoefficientSet> = Vec::new();
    for s in 0..fields {
        let map = gaussian_random_field(N, PIXEL, &spectrum, 7000 + s).unwrap();
        full_sets.push(periodic_coefficients(&engine, &map).unwrap());
        let masked = map.with_mask(a.clone(), None).unwrap();
        masked_sets.push(masked_coefficients(&engine, &masked).unwrap());
    }
    let count = engine.labels().len();
    let mut compared = 0;
    let mut worst: (f64, String) = (0.0, String::new());
    let mut failures = Vec::new();
    for i in 0..count {
        let trusted = masked_sets.iter().all(|s| s.coefficients[i].trusted);
        if !trusted {
            continue;
        }
        let label = engine.labels()[i];
        let full: Vec<f64> = full_sets.iter().map(|s| s.coefficients[i].value).collect();
        let masked: Vec<f64> = masked_sets
            .iter()
            .map(|s| s.coefficients[i].value)
            .collect();
        let fm = full.iter().sum::<f64>() / fields as f64;
        let mm = masked.iter().sum::<f64>() / fields as f64;
        let spread = |v: &[f64], m: f64| {
            (v.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (fields - 1) as f64).sqrt()
        };
        // The full-map mean is zero by construction (no q = 0 mode): use the masked scatter.
        let sd = if label.kind == CoefficientKind::Mean {
            spread(&masked, mm)
        } else {
            spread(&full, fm)
        };
        let z = (mm - fm).abs() / sd;
        let diffs: Vec<f64> = masked.iter().zip(&full).map(|(m, f)| m - f).collect();
        let standard_error = spread(&diffs, mm - fm) / (fields as f64).sqrt() / sd;
        compared += 1;
        if z > worst.0 {
            worst = (
                z,
                format!(
                    "{label:?} (kept fraction {:.2}, standard error of the difference {standard_error:.3} σ)",
                    masked_sets[0].coefficients[i].kept_weight_fraction
                ),
            );
        }
        if z > 0.5 {
            failures.push(format!("{label:?}: {z:.2} sigma"));
        }
    }
    println!(
        "{compared} of {count} coefficients trusted; worst |masked − full| = {:.3} σ at {}",
        worst.0, worst.1
    );
    // Every first-order coefficient up to j = 2 and a good share of order 2 must be testable.
    assert!(
        compared >= 2 + 2 * 3 * L + 40,
        "only {compared} trusted coefficients"
    );
    assert!(failures.is_empty(), "{failures:?}");
}
