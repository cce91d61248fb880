//! Flat-sky versus sphere bias of the first-order coefficients S1(j,l), by tile size and tile
//! pixel size. Gaussian skies of the demo spectrum are measured on a cap (default 30°); flat Gaussian
//! fields with P(k) = C_{k−½} (LoVerde & Afshordi 2008, PRD 78, 123506) at the same plane pixel
//! size give the flat-sky values (periodic transform, 256-pixel maps). Prints, for every
//! (tile pixels, Δ/h, j): λ_j/h, the orientation-mean and worst-orientation relative bias
//! S1_sphere/S1_flat − 1 with the standard errors of the sphere means (the standard error of
//! the orientation mean is the mean of the per-orientation ones, an upper bound), and whether
//! the measurement flags the scale trusted.
//!
//! cargo run --release --example sphere_flat_bias [NSIDE] [SKIES] [bilinear|ring|cubic|nearest] [CAP RADIUS°]
//! (NSIDE 256, 4 skies, a 45° cap: about 5 minutes on two cores.)

#[path = "../tests/sphere_support/mod.rs"]
mod support;

use planisphere::measure::measurement::MeasurementSettings;
use planisphere::tiles::sampling::SamplingMethod;

fn main() -> planisphere::Result<()> {
    let mut args = std::env::args().skip(1);
    let nside: u32 = args.next().and_then(|s| s.parse().ok()).unwrap_or(256);
    let skies: u64 = args.next().and_then(|s| s.parse().ok()).unwrap_or(3);
    let method = match args.next().as_deref() {
        Some("ring") => SamplingMethod::RingLinear,
        Some("nearest") => SamplingMethod::Nearest,
        Some("cubic") => SamplingMethod::RingCubic,
        _ => SamplingMethod::Bilinear,
    };
    let radius: f64 = args.next().and_then(|s| s.parse().ok()).unwrap_or(30.0);
    let footprint = support::cap(nside, 30.0, 40.0, radius);
    let h = footprint.pixelization().mean_spacing();
    println!(
        "NSIDE {nside} (h = {:.2} arcmin), {skies} skies on a {radius}° cap, sampling {method:?}, L = 4",
        h.to_degrees() * 60.0
    );
    println!(
        "{:>6} {:>6} {:>9} {:>3} {:>7} {:>10} {:>8} {:>10} {:>8} {:>8}",
        "tile", "Δ/h", "width°", "j", "λ_j/h", "mean bias", "± se", "worst l", "± se", "trusted"
    );
    let configs: [(usize, f64, usize, usize); 6] = [
        (32, 1.0, 3, 4),
        (64, 1.0, 4, 8),
        (128, 1.0, 4, 8),
        (64, 0.5, 4, 8),
        (128, 0.5, 5, 8),
        (128, 0.25, 5, 8),
    ];
    for (n, fraction, scales, border) in configs {
        let settings = MeasurementSettings {
            scales,
            orientations: 4,
            tile_pixels: Some(n),
            pixel_arcmin: Some(fraction * h.to_degrees() * 60.0),
            border_pixels: border,
            sampling: method,
            bispectrum: false,
            ..Default::default()
        };
        let (measurer, sets) = support::sphere_sets(nside, &footprint, settings, skies, 11);
        let pixel = measurer.plan().pixel_size();
        let flat = support::flat_sets(nside, 256, pixel, scales, 4, 8, 5000);
        let (sm, ssd) = support::mean_sd(&sets);
        let (fm, _) = support::mean_sd(&flat);
        let width = (n as f64 * pixel).to_degrees();
        for j in 0..scales {
            let mut mean_bias = 0.0;
            let mut worst: f64 = 0.0;
            let mut worst_se = 0.0;
            let mut se = 0.0;
            for l in 0..4 {
                let i = 2 + j * 4 + l;
                let b = sm[i] / fm[i] - 1.0;
                mean_bias += b / 4.0;
                let se_l = ssd[i] / sm[i] / (skies as f64).sqrt();
                if b.abs() > worst.abs() {
                    worst = b;
                    worst_se = se_l;
                }
                se += se_l / 4.0;
            }
            let trusted = sets[0].first_order(j, 0).trusted;
            println!(
                "{n:>6} {fraction:>6} {width:>9.2} {j:>3} {:>7.2} {:>9.2}% {:>7.2}% {:>9.2}% {:>7.2}% {:>8}",
                8.0 / 3.0 * (1u64 << j) as f64 * pixel / h,
                100.0 * mean_bias,
                100.0 * se,
                100.0 * worst,
                100.0 * worst_se,
                trusted
            );
        }
    }
    Ok(())
}
