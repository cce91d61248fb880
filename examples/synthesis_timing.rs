//! Time per L-BFGS iteration of flat-field synthesis (J = 6, L = 4, full set) for 128² and 256²
//! fields, with the cost of one forward transform and one loss-plus-gradient evaluation.
//! Run: `cargo run --release --example synthesis_timing`.

use planisphere::flat::gaussian_random_field;
use planisphere::synthesis::{FlatSynthesis, StartField, SynthesisSettings};
use std::time::Instant;

fn main() {
    let threads = rayon::current_num_threads();
    println!("threads: {threads}");
    println!("| n | J | L | forward (s) | loss + gradient (s) | iterations | evaluations | s / iteration | final / initial loss |");
    println!("|---|---|---|---|---|---|---|---|---|");
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
        let settings = SynthesisSettings {
            iterations,
            start: StartField::Gaussian,
            seed: 2,
            ..SynthesisSettings::default()
        };
        let s = FlatSynthesis::new(n, 6, 4, pixel, settings).unwrap();
        let t = s.target_from_map(&target).unwrap();
        let reps = 3;
        s.transform().coefficients(&target).unwrap(); // warm-up
        let clock = Instant::now();
        for _ in 0..reps {
            std::hint::black_box(s.transform().coefficients(&target).unwrap());
        }
        let forward = clock.elapsed().as_secs_f64() / reps as f64;
        // At the start field (at the target itself every weight vanishes and the backward
        // pass has nothing to do).
        let start = s.start_field(&t, StartField::Gaussian, 2).unwrap();
        let clock = Instant::now();
        for _ in 0..reps {
            std::hint::black_box(s.loss_and_gradient(&t, &start).unwrap());
        }
        let gradient = clock.elapsed().as_secs_f64() / reps as f64;
        let clock = Instant::now();
        let out = s.synthesise(&t).unwrap();
        let total = clock.elapsed().as_secs_f64();
        println!(
            "| {n} | 6 | 4 | {forward:.3} | {gradient:.3} | {} | {} | {:.3} | {:.2e} |",
            out.iterations,
            out.evaluations,
            total / out.iterations.max(1) as f64,
            out.final_loss / out.initial_loss
        );
    }
}
