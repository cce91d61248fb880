//! Timing table for spherical harmonic synthesis and analysis (iter = 0) at Nside 256, 512,
//! 1024 with lmax = 2 Nside, on 1 and 2 threads (local rayon pools).
//!
//!     cargo run --release --example harmonics_timing [max_nside] [portable|avx2]
//!
//! Compare with reference-values/harmonics_timing.py (healpy 1.20.1 on the same sizes).

use std::time::Instant;

use planisphere::harmonics::{alm_from_cl, HarmonicTransform, LegendreKernel};
use rand::SeedableRng;
use rand_chacha::ChaCha20Rng;

fn best_of<F: FnMut()>(reps: usize, mut f: F) -> f64 {
    (0..reps)
        .map(|_| {
            let t0 = Instant::now();
            f();
            t0.elapsed().as_secs_f64()
        })
        .fold(f64::INFINITY, f64::min)
}

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let max_nside: usize = match std::env::args().nth(1) {
        Some(s) => s.parse()?,
        None => 1024,
    };
    let kernel = match std::env::args().nth(2).as_deref() {
        Some("portable") => LegendreKernel::Portable,
        Some("avx2") => LegendreKernel::Avx2Fma,
        Some(other) => return Err(format!("unknown kernel '{other}' (portable or avx2)").into()),
        None => LegendreKernel::best_available(),
    };
    println!("Legendre kernel: {}", kernel.name());
    println!(
        "{:>6} {:>6} {:>8} {:>14} {:>14}",
        "nside", "lmax", "threads", "synthesis [s]", "analysis [s]"
    );
    for nside in [256usize, 512, 1024] {
        if nside > max_nside {
            break;
        }
        let lmax = 2 * nside;
        let transform = HarmonicTransform::with_kernel(nside, lmax, kernel)?;
        let cl: Vec<f64> = (0..=lmax)
            .map(|l| 1.0 / (l as f64 + 10.0).powi(2))
            .collect();
        let alm = alm_from_cl(&cl, lmax, &mut ChaCha20Rng::seed_from_u64(1))?;
        let reps = if nside < 1024 { 3 } else { 2 };
        for threads in [1, 2] {
            let pool = rayon::ThreadPoolBuilder::new()
                .num_threads(threads)
                .build()?;
            let map = pool.install(|| transform.synthesis(&alm))?;
            let t_syn = pool.install(|| {
                best_of(reps, || {
                    std::hint::black_box(transform.synthesis(&alm).ok());
                })
            });
            let t_ana = pool.install(|| {
                best_of(reps, || {
                    std::hint::black_box(transform.analysis(&map, 0).ok());
                })
            });
            println!("{nside:>6} {lmax:>6} {threads:>8} {t_syn:>14.4} {t_ana:>14.4}");
        }
    }
    Ok(())
}
