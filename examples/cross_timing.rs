//! Cost of the cross statistics: one pair transform (both auto sets plus the cross set) against
//! two single-map transforms of the same tile, 128 × 128, J = 6, L = 4, with a masked taper.
//! Run: cargo run --release --example cross_timing

use planisphere::measure::flat::gaussian_random_field;
use planisphere::scattering::transform::{ScatteringEngine, TilePairView, TileView};
use std::time::Instant;

fn main() -> planisphere::Result<()> {
    let n = 128;
    let engine = ScatteringEngine::new(n, 6, 4)?;
    let spectrum = |k: f64| 1.0 / (1.0 + (k / 500.0).powi(2));
    let a = gaussian_random_field(n, 1e-3, &spectrum, 1)?;
    let b = gaussian_random_field(n, 1e-3, &spectrum, 2)?;
    let taper: Vec<f64> = (0..n * n)
        .map(|i| {
            let (x, y) = ((i % n) as f64 - 64.0, (i / n) as f64 - 64.0);
            ((60.0 - x.hypot(y)) / 8.0).clamp(0.0, 1.0)
        })
        .collect();
    let repeats = 20;
    let mut best_single = f64::INFINITY;
    let mut best_pair = f64::INFINITY;
    for _ in 0..repeats {
        let t = Instant::now();
        for f in [a.values(), b.values()] {
            engine.transform_tile(&TileView {
                field: f,
                taper: &taper,
                weight: &taper,
            })?;
        }
        best_single = best_single.min(t.elapsed().as_secs_f64());
        let t = Instant::now();
        engine.transform_tile_pair(&TilePairView {
            first: a.values(),
            second: b.values(),
            taper: &taper,
            weight: &taper,
        })?;
        best_pair = best_pair.min(t.elapsed().as_secs_f64());
    }
    println!(
        "| two single-map transforms | pair transform (autos + {} cross) | ratio |",
        engine.cross_labels().len()
    );
    println!("|---|---|---|");
    println!(
        "| {:.1} ms | {:.1} ms | {:.2} |",
        best_single * 1e3,
        best_pair * 1e3,
        best_pair / best_single
    );
    Ok(())
}
