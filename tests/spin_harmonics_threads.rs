//! Thread-count independence of the spin-2 transforms and the mass mapping (crate rule: results
//! bitwise identical for any thread count; common practice for reproducible pipelines).

use num_complex::Complex64;
use planisphere::harmonics::{
    HarmonicCoefficients, MassMapper, MassMappingSettings, SpinTransform,
};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha20Rng;

fn random_alm(lmax: usize, seed: u64) -> HarmonicCoefficients {
    let mut rng = ChaCha20Rng::seed_from_u64(seed);
    let mut alm = HarmonicCoefficients::zeros(lmax);
    for m in 0..=lmax {
        for l in m..=lmax {
            let im = if m == 0 {
                0.0
            } else {
                rng.gen_range(-1.0..1.0)
            };
            alm.set(
                l,
                m,
                Complex64::new(rng.gen_range(-1.0..1.0), im) / (l as f64 + 2.0),
            );
        }
    }
    alm
}

fn bits(values: &[f64]) -> Vec<u64> {
    values.iter().map(|v| v.to_bits()).collect()
}

fn alm_bits(alm: &HarmonicCoefficients) -> Vec<u64> {
    alm.as_slice()
        .iter()
        .flat_map(|c| [c.re.to_bits(), c.im.to_bits()])
        .collect()
}

#[test]
fn spin_transforms_and_mass_maps_are_bitwise_identical_on_one_two_and_three_threads() {
    // NSIDE 64 and lmax 3·NSIDE − 1: several blocks of rings, scaled starting values near the
    // poles, more orders than one band.
    let (nside, lmax) = (64, 191);
    let e = random_alm(lmax, 1);
    let b = random_alm(lmax, 2);
    let run = |threads: usize| {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap();
        pool.install(|| {
            let t = SpinTransform::new(nside, lmax, 2).unwrap();
            let (q, u) = t.synthesis(&e, &b).unwrap();
            let (ea, ba) = t.analysis(&q, &u, 1).unwrap();
            let mapper = MassMapper::new(nside, lmax).unwrap();
            let kappa = mapper
                .convergence_from_shear(&q, &u, &MassMappingSettings::default())
                .unwrap();
            (
                bits(&q),
                bits(&u),
                alm_bits(&ea),
                alm_bits(&ba),
                bits(&kappa.e),
                bits(&kappa.b),
            )
        })
    };
    let one = run(1);
    assert!(one.0.iter().any(|&x| x != 0), "the maps are not all zero");
    assert_eq!(one, run(2));
    assert_eq!(one, run(3));
}
