//! The FFT census of a tile transform (`ScatteringEngine::fft_census`) against the FFTs the
//! transform actually performs (the counter of `transform_tile_timed`), and, without Fourier
//! cropping, against the closed-form count of the transform's module documentation ("Work and
//! memory": 2 real FFTs + J coverage inverses + J·L first-layer inverses + one real FFT per
//! (j1, l1) with j1 < J − 1 + one inverse per (j1, l1, j2, l2), j2 > j1).

mod common;

use common::{holey_taper, SplitMix64};
use planisphere::transform::{ScatteringEngine, TileView, TransformSettings};

fn engine(n: usize, j: usize, l: usize, cropping: bool) -> ScatteringEngine {
    ScatteringEngine::with_settings(
        n,
        j,
        l,
        TransformSettings {
            fourier_cropping: cropping,
            ..Default::default()
        },
    )
    .expect("valid engine")
}

fn counted_by_transform(engine: &ScatteringEngine) -> usize {
    let n = engine.size();
    let mut rng = SplitMix64(17);
    let field: Vec<f64> = (0..n * n).map(|_| rng.next_f64() - 0.5).collect();
    let b = n as f64 / 16.0;
    let taper = holey_taper(n, b, &[(0.4 * n as f64, 0.6 * n as f64, b)], b);
    let (_, timing) = engine
        .transform_tile_timed(&TileView {
            field: &field,
            taper: &taper,
            weight: &taper,
        })
        .expect("transform");
    timing.fft_count
}

fn census_total(engine: &ScatteringEngine, pair: bool) -> usize {
    engine.fft_census(pair).iter().map(|c| c.count).sum()
}

const CASES: [(usize, usize, usize); 6] = [
    (32, 3, 4),
    (64, 4, 4),
    (64, 5, 4),
    (64, 5, 6),
    (128, 5, 4),
    (128, 6, 8),
];

#[test]
fn census_total_equals_the_ffts_the_transform_counts_with_and_without_cropping() {
    for &(n, j, l) in &CASES {
        for cropping in [true, false] {
            let e = engine(n, j, l, cropping);
            assert_eq!(
                census_total(&e, false),
                counted_by_transform(&e),
                "n = {n}, J = {j}, L = {l}, cropping {cropping}, levels {:?}",
                e.crop_levels()
            );
        }
    }
}

#[test]
fn census_without_cropping_matches_the_documented_closed_form_at_full_size() {
    for &(n, j, l) in &CASES {
        let e = engine(n, j, l, false);
        let second = l * l * j * (j - 1) / 2;
        let single = 2 + j + j * l + (j - 1) * l + second;
        // The pair shares the squared taper's FFT and the coverage and adds no low-pass
        // without cropping (module documentation, "Cross statistics", cost).
        let pair = 3 + j + 2 * j * l + 2 * (j - 1) * l + 2 * second;
        assert_eq!(census_total(&e, false), single, "n = {n}, J = {j}, L = {l}");
        assert_eq!(
            census_total(&e, true),
            pair,
            "pair, n = {n}, J = {j}, L = {l}"
        );
        assert!(e.fft_census(true).iter().all(|c| c.size == n));
    }
}

#[test]
fn census_sizes_follow_the_crop_levels() {
    let e = engine(128, 6, 4, true);
    let sizes: Vec<usize> = e.crop_levels().iter().map(|d| 128 >> d).collect();
    let census = e.fft_census(false);
    for c in &census {
        assert!(sizes.contains(&c.size), "size {} not a level grid", c.size);
        assert!(c.count > 0);
        assert!(
            !(c.real_input && c.inverse),
            "no real-input inverse is performed"
        );
    }
    // Every first-layer grid gets at least L inverse FFTs.
    for &s in &sizes {
        let inverses: usize = census
            .iter()
            .filter(|c| c.size == s && c.inverse)
            .map(|c| c.count)
            .sum();
        assert!(inverses >= 4, "size {s}: {inverses} inverse FFTs");
    }
}
