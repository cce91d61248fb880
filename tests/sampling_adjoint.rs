//! The tile sampling as a sparse linear operator S_t (`TileSampler::operator`): it reproduces
//! `TileSampler::sample` for every sampling method, with and without bad map pixels, and its
//! scatter-add adjoint satisfies ⟨S m, y⟩ = ⟨m, Sᵀ y⟩ (definition of the adjoint; common
//! practice for checking hand-written adjoints).

use planisphere::tiles::sampling::{SamplingMethod, TileSampler};
use planisphere::tiles::tiling::{TilingPlan, TilingSettings};
use planisphere::{Direction, Footprint, Ordering, Pixelization, SkyMap};

const METHODS: [SamplingMethod; 4] = [
    SamplingMethod::Bilinear,
    SamplingMethod::Nearest,
    SamplingMethod::RingLinear,
    SamplingMethod::RingCubic,
];

/// A smooth-plus-rough test map (invented data) with, optionally, a patch of bad pixels.
fn test_map(nside: u32, ordering: Ordering, with_bad: bool) -> SkyMap {
    let pix = Pixelization::new(nside, ordering).unwrap();
    let hole = Direction::from_lonlat_deg(40.0, 30.0);
    SkyMap::from_fn(pix, |d| {
        if with_bad && d.distance(&hole) < 4f64.to_radians() {
            f64::NAN
        } else {
            (3.0 * d.phi).sin() * d.theta.sin() + 0.3 * (7.0 * d.theta).cos() + 0.1 * d.phi
        }
    })
}

/// Cap of 25° around (40°, 30°), in the map's ordering.
fn cap(pix: Pixelization) -> Footprint {
    let c = Direction::from_lonlat_deg(40.0, 30.0);
    Footprint::from_fn(pix, |d| d.distance(&c) < 25f64.to_radians())
}

fn plan_for(map: &SkyMap, fp: &Footprint) -> TilingPlan {
    let settings = TilingSettings {
        cells: planisphere::tiles::tiling::CellLayout::LatitudeBands,
        tile_pixels: Some(32),
        pixel_size: None,
        halo: 8,
    };
    TilingPlan::new(map.pixelization(), fp, &settings).unwrap()
}

#[test]
fn operator_reproduces_the_sampler_bit_for_bit() {
    for ordering in [Ordering::Ring, Ordering::Nested] {
        for with_bad in [false, true] {
            let map = test_map(32, ordering, with_bad);
            let fp = cap(map.pixelization());
            let plan = plan_for(&map, &fp);
            assert!(plan.len() >= 3);
            for method in METHODS {
                let sampler = TileSampler::new(&plan, &map, &fp, method).unwrap();
                for tile in 0..plan.len() {
                    let expected = sampler.sample(tile).unwrap().field;
                    let op = sampler.operator(tile).unwrap();
                    assert_eq!(op.rows(), expected.len());
                    let got = op.apply(map.values()).unwrap();
                    for (k, (a, b)) in got.iter().zip(&expected).enumerate() {
                        assert!(
                            a.to_bits() == b.to_bits() || a == b,
                            "{method:?} {ordering:?} bad={with_bad} tile {tile} pixel {k}: {a} vs {b}"
                        );
                    }
                }
            }
        }
    }
}

#[test]
fn operator_never_reads_bad_pixels() {
    let map = test_map(32, Ordering::Ring, true);
    let fp = cap(map.pixelization());
    let plan = plan_for(&map, &fp);
    for method in METHODS {
        let sampler = TileSampler::new(&plan, &map, &fp, method).unwrap();
        for tile in 0..plan.len() {
            let op = sampler.operator(tile).unwrap();
            for p in op.touched_pixels() {
                assert!(map.valid()[p as usize], "{method:?} reads bad pixel {p}");
            }
        }
    }
}

/// Deterministic pseudo-random values in [−1, 1) (64-bit LCG, Knuth MMIX constants).
fn pseudo_random(len: usize, seed: u64) -> Vec<f64> {
    let mut s = seed;
    (0..len)
        .map(|_| {
            s = s
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            (s >> 11) as f64 / (1u64 << 52) as f64 - 1.0
        })
        .collect()
}

#[test]
fn adjoint_satisfies_the_dot_product_identity() {
    for with_bad in [false, true] {
        let map = test_map(16, Ordering::Ring, with_bad);
        let fp = cap(map.pixelization());
        let plan = plan_for(&map, &fp);
        for method in METHODS {
            let sampler = TileSampler::new(&plan, &map, &fp, method).unwrap();
            for tile in 0..plan.len() {
                let op = sampler.operator(tile).unwrap();
                let m = pseudo_random(op.columns(), 7 + tile as u64);
                let y = pseudo_random(op.rows(), 1000 + tile as u64);
                let sm = op.apply(&m).unwrap();
                let sty = op.adjoint(&y).unwrap();
                let lhs: f64 = sm.iter().zip(&y).map(|(a, b)| a * b).sum();
                let rhs: f64 = m.iter().zip(&sty).map(|(a, b)| a * b).sum();
                let scale: f64 = sm
                    .iter()
                    .zip(&y)
                    .map(|(a, b)| (a * b).abs())
                    .sum::<f64>()
                    .max(1e-300);
                assert!(
                    (lhs - rhs).abs() <= 1e-12 * scale,
                    "{method:?} tile {tile}: {lhs} vs {rhs}"
                );
                // the adjoint is not trivially zero: the tile reads the map
                assert!(sty.iter().any(|&v| v != 0.0));
            }
        }
    }
}

#[test]
fn operator_rejects_wrong_lengths() {
    let map = test_map(16, Ordering::Ring, false);
    let fp = cap(map.pixelization());
    let plan = plan_for(&map, &fp);
    let sampler = TileSampler::new(&plan, &map, &fp, SamplingMethod::RingCubic).unwrap();
    let op = sampler.operator(0).unwrap();
    assert!(op.apply(&[0.0; 5]).is_err());
    let mut out = vec![0.0; op.columns()];
    assert!(op.adjoint_add(&[1.0; 3], &mut out).is_err());
}
