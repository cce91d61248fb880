//! Time one 128 × 128 tile (J = 6, L = 4, full coefficient set) and the share spent in FFT calls.
//! Run: cargo run --release --example scattering_profile

use planisphere::measure::flat::gaussian_random_field;
use planisphere::scattering::transform::{ScatteringEngine, TileView};
use std::time::Instant;

fn main() -> planisphere::Result<()> {
    for (size, scales) in [(128, 6), (256, 7), (512, 8)] {
        let t = Instant::now();
        let e = ScatteringEngine::new(size, scales, 4)?;
        println!(
            "engine for n = {size}, J = {scales}, L = 4 built in {:.0} ms (crop levels {:?})",
            t.elapsed().as_secs_f64() * 1e3,
            e.crop_levels()
        );
    }
    let n = 128;
    let engine = ScatteringEngine::new(n, 6, 4)?;
    let lp = engine.bank().littlewood_paley_range();
    println!("crop levels per scale: {:?}", engine.crop_levels());
    println!(
        "Littlewood-Paley sum over {:.4} <= |k| <= {:.4} rad/pixel: min {:.4}, max {:.4}",
        lp.band_low, lp.band_high, lp.min, lp.max
    );
    let map = gaussian_random_field(n, 1e-3, &|k: f64| 1.0 / (1.0 + (k / 500.0).powi(2)), 1)?;
    let ones = vec![1.0; n * n];
    // Masked taper: a disc, to exercise the coverage path as well.
    let taper: Vec<f64> = (0..n * n)
        .map(|i| {
            let (x, y) = ((i % n) as f64 - 64.0, (i / n) as f64 - 64.0);
            let r = x.hypot(y);
            ((60.0 - r) / 8.0).clamp(0.0, 1.0)
        })
        .collect();
    println!("| case | time per tile (ms) | FFT time (ms) | FFT share | FFT calls |");
    println!("|---|---|---|---|---|");
    for (name, a, w) in [("periodic", &ones, &ones), ("masked", &taper, &taper)] {
        let tile = TileView {
            field: map.values(),
            taper: a,
            weight: w,
        };
        let reps = 20;
        let _ = engine.transform_tile(&tile)?;
        let t0 = Instant::now();
        for _ in 0..reps {
            std::hint::black_box(engine.transform_tile(&tile)?);
        }
        let total = t0.elapsed().as_secs_f64() / reps as f64;
        let mut fft = 0.0;
        let mut calls = 0;
        let t1 = Instant::now();
        for _ in 0..reps {
            let (_, timing) = engine.transform_tile_timed(&tile)?;
            fft += timing.fft_time.as_secs_f64();
            calls = timing.fft_count;
        }
        let timed_total = t1.elapsed().as_secs_f64();
        println!(
            "| {name} | {:.2} | {:.2} | {:.0}% | {calls} |",
            total * 1e3,
            fft / reps as f64 * 1e3,
            100.0 * fft / timed_total
        );
    }
    let full = ScatteringEngine::with_settings(
        n,
        6,
        4,
        planisphere::scattering::transform::TransformSettings {
            fourier_cropping: false,
            ..Default::default()
        },
    )?;
    let tile = TileView {
        field: map.values(),
        taper: &ones,
        weight: &ones,
    };
    let t0 = Instant::now();
    for _ in 0..5 {
        std::hint::black_box(full.transform_tile(&tile)?);
    }
    println!(
        "without Fourier cropping: {:.2} ms per tile",
        t0.elapsed().as_secs_f64() / 5.0 * 1e3
    );
    Ok(())
}
