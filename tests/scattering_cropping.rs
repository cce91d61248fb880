//! Error of the Fourier-cropped computation (each scale on the grid its band needs, boxes
//! centred on the wavelet's band) against the full-resolution computation of the same
//! estimator, on every coefficient. Budget (design choice of this crate, written down in the
//! module documentation of `transform.rs`): every coefficient within 1e-3 relative of the
//! full-resolution value AND within 0.1 of its single-sky scatter (the standard deviation of
//! that coefficient over an ensemble of Gaussian fields of the same spectrum). The reference is
//! the same estimator with `fourier_cropping: false`; the scatter estimate is the sample
//! standard deviation (common practice). The worst relative error is reported separately for
//! coefficients flagged untrusted (less than half of the footprint weight kept by the trust
//! cut, pooled over few samples next to sharp trust-mask edges); the limits are the same.

mod common;

use common::holey_taper;
use planisphere::measure::flat::gaussian_random_field;
use planisphere::scattering::pooling::pooled_coefficients;
use planisphere::scattering::transform::{
    ScatteringEngine, TilePairView, TileView, TransformSettings,
};

const SEEDS: u64 = 4;

/// Pooled value and trust flag of every coefficient.
fn values(engine: &ScatteringEngine, field: &[f64], taper: &[f64]) -> Vec<(f64, bool)> {
    let sums = engine
        .transform_tile(&TileView {
            field,
            taper,
            weight: taper,
        })
        .unwrap();
    pooled_coefficients(engine, &sums)
        .unwrap()
        .coefficients
        .iter()
        .map(|c| (c.value, c.trusted))
        .collect()
}

/// Worst relative error and worst error in units of the single-sky scatter, over every
/// coefficient and every field of a small Gaussian ensemble, with the label of each.
struct Budget {
    relative: f64,
    relative_at: String,
    relative_untrusted: f64,
    relative_untrusted_at: String,
    in_scatter: f64,
    in_scatter_at: String,
}

fn error_budget(
    n: usize,
    big_j: usize,
    big_l: usize,
    settings: TransformSettings,
    red: bool,
    masked: bool,
) -> Budget {
    let cropped = ScatteringEngine::with_settings(n, big_j, big_l, settings).unwrap();
    let full = ScatteringEngine::with_settings(
        n,
        big_j,
        big_l,
        TransformSettings {
            fourier_cropping: false,
            ..settings
        },
    )
    .unwrap();
    let s = n as f64 / 128.0;
    let taper = if masked {
        holey_taper(
            n,
            4.0,
            &[
                (40.0 * s, 50.0 * s, 10.0 * s),
                (90.0 * s, 80.0 * s, 14.0 * s),
            ],
            8.0,
        )
    } else {
        vec![1.0; n * n]
    };
    // White noise, or a red spectrum P ∝ 1/(1 + (k/k0)²) with k0 = 2000 at 1′ pixels.
    let pix = 1.0f64.to_radians() / 60.0;
    let spectrum = move |k: f64| {
        if red {
            1.0 / (1.0 + (k / 2000.0).powi(2))
        } else {
            1.0
        }
    };
    let mut full_values = Vec::new();
    let mut cropped_values = Vec::new();
    for seed in 0..SEEDS {
        let map = gaussian_random_field(n, pix, &spectrum, 100 + seed).unwrap();
        full_values.push(values(&full, map.values(), &taper));
        cropped_values.push(values(&cropped, map.values(), &taper));
    }
    let labels = cropped.labels();
    let mut budget = Budget {
        relative: 0.0,
        relative_at: String::new(),
        relative_untrusted: 0.0,
        relative_untrusted_at: String::new(),
        in_scatter: 0.0,
        in_scatter_at: String::new(),
    };
    for i in 0..labels.len() {
        let column: Vec<f64> = full_values.iter().map(|v| v[i].0).collect();
        if column.iter().any(|v| !v.is_finite()) {
            continue;
        }
        let mean = column.iter().sum::<f64>() / SEEDS as f64;
        let sd =
            (column.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (SEEDS - 1) as f64).sqrt();
        for (f, c) in full_values.iter().zip(&cropped_values) {
            assert_eq!(c[i].1, f[i].1, "trust flag changed at {:?}", labels[i]);
            let diff = (c[i].0 - f[i].0).abs();
            let rel = diff / f[i].0.abs();
            let at = format!("{:?}", labels[i]);
            if f[i].1 && rel > budget.relative {
                budget.relative = rel;
                budget.relative_at = at.clone();
            }
            if !f[i].1 && rel > budget.relative_untrusted {
                budget.relative_untrusted = rel;
                budget.relative_untrusted_at = at.clone();
            }
            let z = if sd > 0.0 { diff / sd } else { 0.0 };
            if z > budget.in_scatter {
                budget.in_scatter = z;
                budget.in_scatter_at = at;
            }
        }
    }
    budget
}

/// Run the budget over spectra (white, red) and footprints (periodic, holes with an apodized
/// border) for one (n, J, L) and check both limits.
fn check_budget(n: usize, big_j: usize, big_l: usize) {
    let settings = TransformSettings::default();
    let engine = ScatteringEngine::with_settings(n, big_j, big_l, settings).unwrap();
    assert!(
        engine.crop_levels().iter().any(|&d| d > 0),
        "n = {n}, J = {big_j}: nothing is cropped"
    );
    for red in [false, true] {
        for masked in [false, true] {
            let b = error_budget(n, big_j, big_l, settings, red, masked);
            println!(
                "n {n} J {big_j} L {big_l} levels {:?} / first layer {:?} {} {}: relative {:.2e} ({}), untrusted {:.2e} ({}), in scatter {:.2e} ({})",
                engine.crop_levels(),
                engine.first_layer_levels(),
                if red { "red" } else { "white" },
                if masked { "masked" } else { "periodic" },
                b.relative,
                b.relative_at,
                b.relative_untrusted,
                b.relative_untrusted_at,
                b.in_scatter,
                b.in_scatter_at
            );
            assert!(
                b.relative < 1e-3,
                "relative {:e} at {}",
                b.relative,
                b.relative_at
            );
            assert!(
                b.relative_untrusted < 1e-3,
                "untrusted: relative {:e} at {}",
                b.relative_untrusted,
                b.relative_untrusted_at
            );
            assert!(
                b.in_scatter < 0.1,
                "{:e} of the scatter at {}",
                b.in_scatter,
                b.in_scatter_at
            );
        }
    }
}

#[test]
fn cropping_stays_within_budget_at_128_pixels_j5_j6_four_orientations() {
    check_budget(128, 5, 4);
    check_budget(128, 6, 4);
}

#[test]
fn cropping_stays_within_budget_at_256_pixels_j5_j6_four_orientations() {
    check_budget(256, 5, 4);
    check_budget(256, 6, 4);
}

#[test]
fn cropping_stays_within_budget_with_three_orientations() {
    check_budget(128, 5, 3);
    check_budget(128, 6, 3);
    check_budget(256, 6, 3);
}

#[test]
fn shifted_boxes_crop_more_scales_than_origin_centred_boxes() {
    // J = 6 at 256²: boxes centred on the band put the second layer of scales 2..4 on coarser
    // grids than the origin-centred rule (one level for both layers).
    let shifted = ScatteringEngine::new(256, 6, 4).unwrap();
    let centred = ScatteringEngine::with_settings(
        256,
        6,
        4,
        TransformSettings {
            shifted_boxes: false,
            modulus_oversampling: 1,
            first_layer_oversampling: 0,
            crop_tolerance: 1e-6,
            ..Default::default()
        },
    )
    .unwrap();
    println!(
        "levels shifted {:?}, origin-centred {:?}",
        shifted.crop_levels(),
        centred.crop_levels()
    );
    let (a, b) = (shifted.crop_levels(), centred.crop_levels());
    assert!(a.iter().zip(b).all(|(x, y)| x >= y));
    assert!(a.iter().sum::<usize>() > b.iter().sum::<usize>());
}

#[test]
fn fft_census_counts_the_transforms_a_tile_performs() {
    // The census is a prediction from (n, J, L, settings); the clock counts the calls made.
    let n = 64;
    let taper = holey_taper(n, 4.0, &[(30.0, 34.0, 6.0)], 6.0);
    let map = gaussian_random_field(n, 1e-3, &|_k: f64| 1.0, 5).unwrap();
    let other = gaussian_random_field(n, 1e-3, &|_k: f64| 1.0, 6).unwrap();
    for (big_j, big_l, shifted) in [(5, 4, true), (5, 4, false), (4, 3, true), (2, 4, true)] {
        let settings = TransformSettings {
            shifted_boxes: shifted,
            ..Default::default()
        };
        let engine = ScatteringEngine::with_settings(n, big_j, big_l, settings).unwrap();
        let tile = TileView {
            field: map.values(),
            taper: &taper,
            weight: &taper,
        };
        let (_, timing, performed) = engine.transform_tile_census(&tile).unwrap();
        let census = engine.fft_census(false);
        let total: usize = census.iter().map(|c| c.count).sum();
        assert_eq!(total, timing.fft_count, "J {big_j} L {big_l}: {census:?}");
        assert_eq!(census, performed);
        let pair = TilePairView {
            first: map.values(),
            second: other.values(),
            taper: &taper,
            weight: &taper,
        };
        let (_, timing, performed) = engine.transform_tile_pair_census(&pair).unwrap();
        let census_pair = engine.fft_census(true);
        let total_pair: usize = census_pair.iter().map(|c| c.count).sum();
        assert_eq!(total_pair, timing.fft_count);
        assert_eq!(census_pair, performed);
        assert!(total_pair > total);
    }
}

#[test]
fn cropping_stays_within_budget_on_tiles_of_mixed_radix_sizes() {
    // 288 = 2^5·9 and 160 = 2^5·5: the tool's choice of tile size may pick these (the cropped
    // grids n/2^d stay even); the same budget against the full-resolution path.
    check_budget(288, 5, 4);
    check_budget(160, 4, 4);
}
