//! Time per loss-plus-gradient evaluation and per L-BFGS iteration of flat-field synthesis
//! (J = 6, L = 4, full set) for 128² and 256² fields, on the full-resolution periodic path and
//! on the Fourier-cropped path (the measuring engine's default estimator), measured in one run,
//! with their ratio.
//! Run: `cargo run --release --example synthesis_timing`.

use planisphere::flat::gaussian_random_field;
use planisphere::synthesis::{FlatSynthesis, StartField, SynthesisSettings};
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
        per_iteration: total / out.iterations.max(1) as f64,
        iterations: out.iterations,
        evaluations: out.evaluations,
        loss_ratio: out.final_loss / out.initial_loss,
    }
}

fn main() {
    let threads = rayon::current_num_threads();
    println!("threads: {threads}");
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
