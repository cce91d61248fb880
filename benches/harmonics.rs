//! Spherical harmonic synthesis and analysis (iter = 0) at Nside 256, 512, 1024 with
//! lmax = 2 Nside, and at Nside 1024 and 2048 with lmax = 3 Nside − 1 (the `sky` default; about
//! ten minutes). Run with `cargo bench --bench harmonics` (or `-- full_lmax` for the second
//! group only). The same transforms beside ducc0, and at NSIDE 4096, are in
//! `examples/harmonics_ducc0_comparison.rs`.

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion};
use planisphere::harmonics::{alm_from_cl, HarmonicTransform};
use rand::SeedableRng;
use rand_chacha::ChaCha20Rng;

/// Synthesis and analysis of one random sky per NSIDE, with lmax = `lmax_of(nside)` and
/// C_ℓ = `cl(ℓ)`.
fn bench_sizes(
    c: &mut Criterion,
    name: &str,
    sizes: &[usize],
    lmax_of: fn(usize) -> usize,
    cl: fn(usize) -> f64,
    seed: u64,
) {
    let mut group = c.benchmark_group(name);
    group.sample_size(10);
    for &nside in sizes {
        let lmax = lmax_of(nside);
        let transform = HarmonicTransform::new(nside, lmax).expect("valid sizes");
        let cl: Vec<f64> = (0..=lmax).map(cl).collect();
        let alm = alm_from_cl(&cl, lmax, &mut ChaCha20Rng::seed_from_u64(seed)).expect("valid Cl");
        let map = transform.synthesis(&alm).expect("matching lmax");
        group.bench_with_input(BenchmarkId::new("synthesis", nside), &nside, |b, _| {
            b.iter(|| transform.synthesis(&alm).expect("matching lmax"))
        });
        group.bench_with_input(BenchmarkId::new("analysis_iter0", nside), &nside, |b, _| {
            b.iter(|| transform.analysis(&map, 0).expect("valid map"))
        });
    }
    group.finish();
}

fn transforms(c: &mut Criterion) {
    bench_sizes(
        c,
        "harmonics",
        &[256, 512, 1024],
        |nside| 2 * nside,
        |l| 1.0 / (l as f64 + 10.0).powi(2),
        1,
    );
}

fn transforms_full_lmax(c: &mut Criterion) {
    bench_sizes(
        c,
        "harmonics_full_lmax",
        &[1024, 2048],
        |nside| 3 * nside - 1,
        |_| 1.0,
        7,
    );
}

criterion_group!(benches, transforms, transforms_full_lmax);
criterion_main!(benches);
