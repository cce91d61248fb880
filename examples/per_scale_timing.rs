//! Per-tile time of the scattering transform with origin-centred crop boxes (the previous
//! levels: `shifted_boxes: false`, crop tolerance 1e-6, one level for both layers) against the
//! default settings (boxes centred on each wavelet's band, per-layer levels), side by side in
//! one run, with the FFT census of each.
//! Single thread is what the per-tile numbers mean: run with RAYON_NUM_THREADS=1.
//!
//! Run: RAYON_NUM_THREADS=1 cargo run --release --example per_scale_timing [reps]

use planisphere::measure::flat::gaussian_random_field;
use planisphere::scattering::transform::{FftCount, ScatteringEngine, TileView, TransformSettings};
use std::time::Instant;

fn census_text(census: &[FftCount]) -> String {
    census
        .iter()
        .map(|c| {
            let kind = match (c.real_input, c.inverse) {
                (false, false) => "c2c fwd",
                (false, true) => "c2c inv",
                (true, false) => "r2c",
                (true, true) => "c2r",
            };
            format!("{}x {}² {kind}", c.count, c.size)
        })
        .collect::<Vec<_>>()
        .join(", ")
}

/// Cost of a census in full-size complex FFT equivalents, counting m² log₂ m per transform and
/// half for a real-data one (a rough model; the measured times are what counts).
fn equivalents(census: &[FftCount], n: usize) -> f64 {
    let unit = (n * n) as f64 * (n as f64).log2();
    census
        .iter()
        .map(|c| {
            let m = c.size as f64;
            let w = if c.real_input { 0.5 } else { 1.0 };
            c.count as f64 * w * m * m * m.log2() / unit
        })
        .sum()
}

fn main() -> planisphere::Result<()> {
    let reps: usize = std::env::args()
        .nth(1)
        .and_then(|s| s.parse().ok())
        .unwrap_or(5);
    let previous = TransformSettings {
        shifted_boxes: false,
        crop_tolerance: 1e-6,
        first_layer_oversampling: 0,
        modulus_oversampling: 1,
        ..Default::default()
    };
    let current = TransformSettings::default();
    println!("| n | J | L | settings | crop levels | ms per tile | FFT ms | FFTs | full-size equivalents | census |");
    println!("|---|---|---|---|---|---|---|---|---|---|");
    for (n, big_j, big_l) in [(128, 5, 4), (128, 6, 4), (256, 5, 4), (256, 6, 4)] {
        let map = gaussian_random_field(n, 1e-3, &|k: f64| 1.0 / (1.0 + (k / 500.0).powi(2)), 1)?;
        let half = n as f64 / 2.0;
        let taper: Vec<f64> = (0..n * n)
            .map(|i| {
                let (x, y) = ((i % n) as f64 - half, (i / n) as f64 - half);
                ((0.9 * half - x.hypot(y)) / 8.0).clamp(0.0, 1.0)
            })
            .collect();
        let tile = TileView {
            field: map.values(),
            taper: &taper,
            weight: &taper,
        };
        let engines = [
            (
                "previous",
                ScatteringEngine::with_settings(n, big_j, big_l, previous)?,
            ),
            (
                "default",
                ScatteringEngine::with_settings(n, big_j, big_l, current)?,
            ),
        ];
        let mut times = [0.0; 2];
        // Interleave the two engines so that load changes hit both alike.
        for e in &engines {
            std::hint::black_box(e.1.transform_tile(&tile)?);
        }
        for _ in 0..reps {
            for (k, (_, e)) in engines.iter().enumerate() {
                let t = Instant::now();
                std::hint::black_box(e.transform_tile(&tile)?);
                times[k] += t.elapsed().as_secs_f64() / reps as f64;
            }
        }
        for (k, (name, e)) in engines.iter().enumerate() {
            let (_, timing, _) = e.transform_tile_census(&tile)?;
            let census = e.fft_census(false);
            println!(
                "| {n} | {big_j} | {big_l} | {name} | {:?} | {:.1} | {:.1} | {} | {:.1} | {} |",
                e.crop_levels(),
                times[k] * 1e3,
                timing.fft_time.as_secs_f64() * 1e3,
                timing.fft_count,
                equivalents(&census, n),
                census_text(&census)
            );
        }
        println!(
            "| {n} | {big_j} | {big_l} | ratio previous / default | | {:.2} | | | | |",
            times[0] / times[1]
        );
    }
    Ok(())
}
