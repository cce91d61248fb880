//! CPU and wall time of our harmonic synthesis and analysis (iterations 0) at lmax = 3 NSIDE − 1
//! on one thread, to set beside reference-values/harmonics_ducc0_timing.py (ducc0's spin-0
//! synthesis and adjoint synthesis on the same sizes). One process per size, so that
//! `/usr/bin/time -v` gives each its own peak RSS:
//!
//!     cargo build --release --example harmonics_ducc0_comparison
//!     /usr/bin/time -v target/release/examples/harmonics_ducc0_comparison 1024
//!
//! CPU time is from getrusage (the process's user + system time); on a loaded machine it is
//! the figure to compare, wall time swings. Best of a few repetitions (one from NSIDE 2048 up). The last column
//! fingerprints the bits of the synthesised map and of its analysis, to check that a speed-up
//! left the results unchanged.

use std::time::Instant;

use planisphere::harmonics::{alm_from_cl, HarmonicTransform};
use rand::SeedableRng;
use rand_chacha::ChaCha20Rng;

#[path = "support/process_cpu.rs"]
mod process_cpu;
use process_cpu::cpu_seconds;

/// FNV-1a hash of the bit patterns: equal fingerprints mean bit-identical results.
fn fingerprint(values: impl Iterator<Item = f64>) -> u64 {
    values.fold(0xcbf2_9ce4_8422_2325, |h, v| {
        (h ^ v.to_bits()).wrapping_mul(0x0000_0100_0000_01b3)
    })
}

/// Best (CPU, wall) seconds over `reps` runs (at least one), with the last run's result.
fn best_of<T, F: FnMut() -> T>(reps: usize, mut f: F) -> (f64, f64, T) {
    let (mut cpu, mut wall) = (f64::INFINITY, f64::INFINITY);
    let mut out = None;
    for _ in 0..reps.max(1) {
        let (c0, w0) = (cpu_seconds(), Instant::now());
        out = Some(std::hint::black_box(f()));
        wall = wall.min(w0.elapsed().as_secs_f64());
        cpu = cpu.min(cpu_seconds() - c0);
    }
    (cpu, wall, out.expect("at least one run"))
}

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let sizes: Vec<usize> = std::env::args()
        .skip(1)
        .map(|s| s.parse())
        .collect::<Result<_, _>>()?;
    let sizes = if sizes.is_empty() {
        vec![512, 1024]
    } else {
        sizes
    };
    let pool = rayon::ThreadPoolBuilder::new().num_threads(1).build()?;
    println!("planisphere, 1 thread");
    println!(
        "{:>6} {:>6} {:>14} {:>15} {:>16} {:>17}   {:>16}",
        "nside",
        "lmax",
        "synth cpu [s]",
        "synth wall [s]",
        "analysis cpu [s]",
        "analysis wall [s]",
        "bit fingerprint"
    );
    for nside in sizes {
        let lmax = 3 * nside - 1;
        let transform = HarmonicTransform::new(nside, lmax)?;
        let cl: Vec<f64> = (0..=lmax).map(|_| 1.0).collect();
        let alm = alm_from_cl(&cl, lmax, &mut ChaCha20Rng::seed_from_u64(7))?;
        // Repetitions: fewer for large maps (one at NSIDE 2048 and above, minutes each).
        let reps = match nside {
            0..=512 => 3,
            513..=1024 => 2,
            _ => 1,
        };
        let (c_syn, w_syn, map) = pool.install(|| best_of(reps, || transform.synthesis(&alm)));
        let map = map?;
        let (c_ana, w_ana, back) = pool.install(|| best_of(reps, || transform.analysis(&map, 0)));
        let back = back?;
        let bits = fingerprint(map.iter().copied())
            ^ fingerprint(back.as_slice().iter().flat_map(|c| [c.re, c.im])).rotate_left(1);
        println!(
            "{nside:>6} {lmax:>6} {c_syn:>14.3} {w_syn:>15.3} {c_ana:>16.3} {w_ana:>17.3}   {bits:016x}"
        );
    }
    Ok(())
}
