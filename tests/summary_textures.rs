//! The orientation-harmonic summary on textures of known geometry (design properties stated in
//! src/scattering/statistics.rs; the fields are generated here).

use planisphere::measure::flat::{periodic_coefficients, FlatMap};
use planisphere::scattering::statistics::SummaryStatistic;
use planisphere::scattering::transform::ScatteringEngine;
use rand::{Rng, SeedableRng};

const N: usize = 128;

/// Sum of `count` objects at uniformly random positions and orientations on a periodic grid.
/// `profile(along, across)` is the object's value at offsets along and across its axis.
fn scatter(count: usize, seed: u64, profile: &dyn Fn(f64, f64) -> f64) -> FlatMap {
    let mut rng = rand_chacha::ChaCha20Rng::seed_from_u64(seed);
    let mut v = vec![0.0; N * N];
    let wrap = |d: f64| d - N as f64 * (d / N as f64).round();
    for _ in 0..count {
        let (cx, cy): (f64, f64) = (rng.gen_range(0.0..N as f64), rng.gen_range(0.0..N as f64));
        let t: f64 = rng.gen_range(0.0..std::f64::consts::PI);
        for iy in 0..N {
            for ix in 0..N {
                let (dx, dy) = (wrap(ix as f64 - cx), wrap(iy as f64 - cy));
                let along = dx * t.cos() + dy * t.sin();
                let across = -dx * t.sin() + dy * t.cos();
                v[iy * N + ix] += profile(along, across);
            }
        }
    }
    FlatMap::new(N, 1e-3, v).unwrap()
}

/// A thin segment of length 2·half: Gaussian cross-section of width 1 pixel, soft ends.
fn segment(half: f64) -> impl Fn(f64, f64) -> f64 {
    move |along: f64, across: f64| {
        (-(across * across) / 2.0).exp() * (-(along / half).powi(8)).exp()
    }
}

/// A round blob of the same extent 2·half: a disk with the same soft edge profile.
fn disk(half: f64) -> impl Fn(f64, f64) -> f64 {
    move |along: f64, across: f64| {
        (-((along * along + across * across).sqrt() / half).powi(8)).exp()
    }
}

fn summary(engine: &ScatteringEngine, map: &FlatMap) -> Vec<SummaryStatistic> {
    periodic_coefficients(engine, map)
        .unwrap()
        .summary()
        .unwrap()
}

fn pick(s: &[SummaryStatistic], name: &str) -> f64 {
    s.iter().find(|i| i.name == name).unwrap().value
}

#[test]
fn line_segments_align_positively_and_round_disks_negatively_at_the_objects_scale() {
    // Design property of `alignment` (src/scattering/statistics.rs): an envelope elongated along the first
    // wavelet's wave fronts (a line) varies along its wave vector (> 0); a disk's envelope at a
    // small scale is two arcs facing each other along the wave vector, which at the disk's own
    // scale is a pattern stretched along the wave vector, varying across it (< 0). Same objects,
    // positions and orientations; extent 2·half = 12 and 24 pixels, second scale j2 = 4
    // (wavelength (8/3)·16 ≈ 43 pixels, larger than the objects), every j1 < j2.
    let engine = ScatteringEngine::new(N, 5, 4).unwrap();
    for half in [6.0, 12.0] {
        let lines = summary(&engine, &scatter(40, 1, &segment(half)));
        let disks = summary(&engine, &scatter(40, 1, &disk(half)));
        for j1 in 0..4 {
            let name = format!("alignment_j{j1}_j4");
            let (a, b) = (pick(&lines, &name), pick(&disks, &name));
            println!("extent {}: {name} lines {a:+.4}, disks {b:+.4}", 2.0 * half);
            assert!(a > 0.0 && b < 0.0, "{name}: lines {a}, disks {b}");
        }
    }
}

#[test]
fn sparse_poisson_blobs_are_more_intermittent_than_dense_ones() {
    // Design property of `intermittency` (src/scattering/statistics.rs). Both fields are Poisson
    // (uniform, independent) placements of the same Gaussian blob (σ = 2 pixels), 15 against
    // 1500 on 128²: their power spectra have the same form, count·|b̂(k)|² plus the mean,
    // so only where the power sits differs. Every scale pair must order them.
    let engine = ScatteringEngine::new(N, 5, 4).unwrap();
    let blob = |along: f64, across: f64| (-(along * along + across * across) / 8.0).exp();
    let sparse = summary(&engine, &scatter(15, 3, &blob));
    let dense = summary(&engine, &scatter(1500, 3, &blob));
    let mut pairs = 0;
    for (a, b) in sparse.iter().zip(&dense) {
        if a.name.starts_with("intermittency") {
            println!("{:<22} sparse {:.4}, dense {:.4}", a.name, a.value, b.value);
            assert!(
                a.value > 1.5 * b.value,
                "{}: {} vs {}",
                a.name,
                a.value,
                b.value
            );
            pairs += 1;
        }
    }
    assert_eq!(pairs, 10);
}
