//! Time per loss-plus-gradient evaluation and per L-BFGS iteration of flat-field synthesis
//! (J = 6, L = 4, full set) for 128² and 256² fields, on the full-resolution periodic path and
//! on the Fourier-cropped path (the measuring engine's default estimator), measured in one run,
//! with their ratio; and of sphere synthesis on an NSIDE 256 masked footprint (J = 6, L = 4,
//! 128² tiles, the smallest that holds J = 6 with the default border), with the tile and pixel
//! counts.
//! Run: `cargo run --release --example synthesis_timing [flat|sphere]` (both by default).

use planisphere::harmonics::spectrum::AngularSpectrum;
use planisphere::measure::flat::gaussian_random_field;
use planisphere::measure::measurement::{MeasurementSettings, SphereMeasurer};
use planisphere::simulate::skies::SkyRecipe;
use planisphere::sky::apodization::{apodize, TaperKind};
use planisphere::synthesis::sphere::SphereSynthesis;
use planisphere::synthesis::{FlatSynthesis, StartField, SynthesisSettings};
use planisphere::{Direction, Footprint, Ordering, Pixelization};
use std::time::Instant;

struct Timing {
    forward: f64,
    gradient: f64,
    per_iteration: f64,
    iterations: u64,
    evaluations: u64,
    loss_ratio: f64,
}

fn measure(n: usize, iterations: u64, cropping: bool, target: &[f64], pixel: f64) -> Timing {
    let settings = SynthesisSettings {
        iterations,
        start: StartField::Gaussian,
        seed: 2,
        fourier_cropping: cropping,
        ..SynthesisSettings::default()
    };
    let s = FlatSynthesis::new(n, 6, 4, pixel, settings).unwrap();
    assert_eq!(s.uses_fourier_cropping(), cropping);
    let t = s.target_from_map(target).unwrap();
    let reps = 3;
    s.coefficients(target).unwrap(); // warm-up
    let clock = Instant::now();
    for _ in 0..reps {
        std::hint::black_box(s.coefficients(target).unwrap());
    }
    let forward = clock.elapsed().as_secs_f64() / reps as f64;
    // At the start field (at the target itself every weight vanishes and the backward pass
    // has nothing to do).
    let start = s.start_field(&t, StartField::Gaussian, 2).unwrap();
    let clock = Instant::now();
    for _ in 0..reps {
        std::hint::black_box(s.loss_and_gradient(&t, &start).unwrap());
    }
    let gradient = clock.elapsed().as_secs_f64() / reps as f64;
    let clock = Instant::now();
    let out = s.synthesise(&t).unwrap();
    let total = clock.elapsed().as_secs_f64();
    Timing {
        forward,
        gradient,
        per_iteration: total / out.report.iterations.max(1) as f64,
        iterations: out.report.iterations,
        evaluations: out.report.evaluations,
        loss_ratio: out.report.final_loss / out.report.initial_loss,
    }
}

fn flat() {
    println!("| n | J | L | path | forward (s) | loss + gradient (s) | iterations | evaluations | s / iteration | final / initial loss |");
    println!("|---|---|---|---|---|---|---|---|---|---|");
    let mut ratios = Vec::new();
    for (n, iterations) in [(128usize, 20u64), (256, 8)] {
        let pixel = 1f64.to_radians() / 60.0;
        let k_nyquist = std::f64::consts::PI / pixel;
        let spectrum =
            move |k: f64| (k / k_nyquist).powf(-1.5) * (-(k / (0.2 * k_nyquist)).powi(2)).exp();
        let g = gaussian_random_field(n, pixel, &spectrum, 1).unwrap();
        let sd = (g.values().iter().map(|v| v * v).sum::<f64>() / (n * n) as f64).sqrt();
        let target: Vec<f64> = g
            .values()
            .iter()
            .map(|v| (0.6 * v / sd - 0.18).exp() - 1.0)
            .collect();
        let full = measure(n, iterations, false, &target, pixel);
        let cropped = measure(n, iterations, true, &target, pixel);
        for (name, t) in [("full resolution", &full), ("Fourier-cropped", &cropped)] {
            println!(
                "| {n} | 6 | 4 | {name} | {:.3} | {:.3} | {} | {} | {:.3} | {:.2e} |",
                t.forward, t.gradient, t.iterations, t.evaluations, t.per_iteration, t.loss_ratio
            );
        }
        ratios.push((
            n,
            full.forward / cropped.forward,
            full.gradient / cropped.gradient,
            full.per_iteration / cropped.per_iteration,
        ));
    }
    println!();
    println!("| n | forward: full / cropped | loss + gradient: full / cropped | s / iteration: full / cropped |");
    println!("|---|---|---|---|");
    for (n, f, g, i) in ratios {
        println!("| {n} | {f:.2} | {g:.2} | {i:.2} |");
    }
}

fn main() {
    let threads = rayon::current_num_threads();
    println!("threads: {threads}");
    let which = std::env::args().nth(1).unwrap_or_default();
    if which != "sphere" {
        flat();
    }
    if which != "flat" {
        sphere();
    }
}

/// NSIDE 256, a 25° cap at (lon 60°, lat 40°) with six 2°–3° holes, C2-apodized over 1°
/// (invented footprint); target a Gaussian sky of the demo spectrum; Gaussian start.
fn sphere() {
    let nside = 256;
    let pix = Pixelization::new(nside, Ordering::Ring).unwrap();
    let centre = Direction::from_lonlat_deg(60.0, 40.0);
    let holes: Vec<(Direction, f64)> = (0..6)
        .map(|i| {
            let lon = 60.0 + 12.0 * (i as f64 - 2.5);
            let lat = 40.0 + if i % 2 == 0 { 8.0 } else { -8.0 };
            (
                Direction::from_lonlat_deg(lon, lat),
                (2.0 + (i % 2) as f64).to_radians(),
            )
        })
        .collect();
    let binary = Footprint::from_fn(pix, |d| {
        d.distance(&centre) < 25f64.to_radians() && !holes.iter().any(|(h, r)| d.distance(h) < *r)
    });
    let footprint = apodize(&binary, TaperKind::C2, 1f64.to_radians()).unwrap();
    let recipe = SkyRecipe::gaussian(
        nside,
        AngularSpectrum::demo_model(3 * nside as usize - 1, 1.0),
        5,
    );
    let sky = recipe.realise(&recipe.transform().unwrap(), 0).unwrap();
    let measurement = MeasurementSettings {
        scales: 6,
        orientations: 4,
        tile_pixels: Some(128),
        bispectrum: false,
        ..MeasurementSettings::default()
    };
    let iterations = 3;
    let settings = SynthesisSettings {
        iterations,
        start: StartField::Gaussian,
        seed: 2,
        ..SynthesisSettings::default()
    };
    let clock = Instant::now();
    let s = SphereSynthesis::new(pix, &footprint, measurement, settings).unwrap();
    let setup = clock.elapsed().as_secs_f64();
    let measurer = SphereMeasurer::new(pix, &footprint, measurement).unwrap();
    let clock = Instant::now();
    std::hint::black_box(measurer.measure(&sky, &footprint).unwrap());
    let measure = clock.elapsed().as_secs_f64();
    let t = s.target_from_map(&sky).unwrap();
    let start = s.start_map(&t, StartField::Gaussian, 2).unwrap();
    let clock = Instant::now();
    std::hint::black_box(s.statistics(start.values()).unwrap());
    let forward = clock.elapsed().as_secs_f64();
    let clock = Instant::now();
    std::hint::black_box(s.loss_and_gradient(&t, start.values()).unwrap());
    let gradient = clock.elapsed().as_secs_f64();
    let clock = Instant::now();
    let out = s.synthesise_from(&t, start).unwrap();
    let total = clock.elapsed().as_secs_f64();
    println!();
    println!(
        "sphere: NSIDE {nside}, f_sky {:.4}, J = 6, L = 4, {}² tiles, {} tiles, {} pixels optimised, {} statistics",
        footprint.f_sky(),
        128,
        s.tile_count(),
        s.variables().len(),
        t.matched.values.len()
    );
    // The wall time of a synthesis includes the loss at the start and at the end.
    let per_iteration =
        out.report.evaluations as f64 * gradient / out.report.iterations.max(1) as f64;
    println!("| set-up (s) | measure, engine (s) | forward (s) | loss + gradient (s) | gradient / forward | iterations | evaluations | s / iteration (evaluations × loss + gradient) | per tile (s) | synthesis wall (s) | final / initial loss |");
    println!("|---|---|---|---|---|---|---|---|---|---|---|");
    println!(
        "| {setup:.2} | {measure:.2} | {forward:.2} | {gradient:.2} | {:.2} | {} | {} | {per_iteration:.2} | {:.3} | {total:.1} | {:.2e} |",
        gradient / forward,
        out.report.iterations,
        out.report.evaluations,
        per_iteration / s.tile_count() as f64,
        out.report.final_loss / out.report.initial_loss
    );
}
