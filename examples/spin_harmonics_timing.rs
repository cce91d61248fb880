//! CPU time of the spin-2 synthesis and analysis (iterations 0) beside the scalar ones, of the
//! two-field scalar synthesis (two maps in one pass, as the mass map makes κ_E and κ_B), and of
//! the Kaiser–Squires mass mapping (shear maps → κ_E and κ_B maps: one spin-2 analysis and one
//! two-field synthesis) beside one scalar synthesis plus one scalar analysis, at
//! lmax = 3 NSIDE − 1, in one run (repetitions interleaved, best of each kept), so the ratios
//! compare like with like:
//!
//!     cargo build --release --example spin_harmonics_timing
//!     RAYON_NUM_THREADS=1 target/release/examples/spin_harmonics_timing 512 1024
//!
//! CPU time is from getrusage (the process's user + system time; with one thread it is the
//! transform's own time even on a loaded machine).

use planisphere::harmonics::{
    alm_from_cl, HarmonicTransform, MassMapper, MassMappingSettings, SpinTransform,
};
use rand::SeedableRng;
use rand_chacha::ChaCha20Rng;

#[path = "support/process_cpu.rs"]
mod process_cpu;
use process_cpu::cpu_seconds;

/// CPU seconds of one call, kept as the minimum over repetitions in `best`.
fn timed<T>(best: &mut f64, f: impl FnOnce() -> T) -> T {
    let t0 = cpu_seconds();
    let out = f();
    *best = best.min(cpu_seconds() - t0);
    out
}

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let sizes: Vec<usize> = std::env::args()
        .skip(1)
        .map(|s| s.parse())
        .collect::<Result<_, _>>()?;
    let sizes = if sizes.is_empty() {
        vec![256, 1024]
    } else {
        sizes
    };
    println!("threads {}", rayon::current_num_threads());
    println!(
        "| NSIDE | lmax | scalar synthesis [s] | spin-2 synthesis [s] | ratio | scalar analysis [s] | spin-2 analysis [s] | ratio | two-field synthesis [s] | ratio | mass map [s] | / (scalar synthesis + analysis) |"
    );
    println!("| --- | --- | --- | --- | --- | --- | --- | --- | --- | --- | --- | --- |");
    for nside in sizes {
        let lmax = 3 * nside - 1;
        let scalar = HarmonicTransform::new(nside, lmax)?;
        let spin = SpinTransform::new(nside, lmax, 2)?;
        let mapper = MassMapper::new(nside, lmax)?;
        let cl: Vec<f64> = (0..=lmax)
            .map(|l| 1.0 / (l as f64 + 10.0).powi(2))
            .collect();
        let mut rng = ChaCha20Rng::seed_from_u64(1);
        let alm = alm_from_cl(&cl, lmax, &mut rng)?;
        let alm_b = alm_from_cl(&cl, lmax, &mut rng)?;
        let settings = MassMappingSettings {
            iterations: 0,
            ..Default::default()
        };
        let reps = if nside >= 1024 { 2 } else { 3 };
        let mut best = [f64::INFINITY; 6];
        for _ in 0..reps {
            let map = timed(&mut best[0], || scalar.synthesis(&alm))?;
            let (q, u) = timed(&mut best[1], || spin.synthesis(&alm, &alm_b))?;
            std::hint::black_box(timed(&mut best[2], || scalar.analysis(&map, 0))?);
            std::hint::black_box(timed(&mut best[3], || spin.analysis(&q, &u, 0))?);
            std::hint::black_box(timed(&mut best[4], || {
                spin.scalar_pair_synthesis(&alm, &alm_b)
            })?);
            std::hint::black_box(timed(&mut best[5], || {
                mapper.convergence_from_shear(&q, &u, &settings)
            })?);
        }
        let [s_syn, p_syn, s_ana, p_ana, pair, mass] = best;
        println!(
            "| {nside} | {lmax} | {s_syn:.3} | {p_syn:.3} | {:.2} | {s_ana:.3} | {p_ana:.3} | {:.2} | {pair:.3} | {:.2} | {mass:.3} | {:.2} |",
            p_syn / s_syn,
            p_ana / s_ana,
            pair / s_syn,
            mass / (s_syn + s_ana)
        );
    }
    Ok(())
}
