//! Kaiser–Squires round trip on the full sky: a band-limited convergence κ → shear
//! (γ_E,ℓm = −√((ℓ+2)(ℓ−1)/(ℓ(ℓ+1))) κ_ℓm, spin-2 synthesis) → mass mapping → κ. The two
//! harmonic kernels are inverses (Kaiser & Squires 1993 on the sphere, e.g. Wallis et al. 2017,
//! §2), so κ_E returns to the input for ℓ ≥ 2 and κ_B is zero, up to the accuracy of the spin-2
//! analysis (8 Jacobi iterations on a band-limited map at lmax = 1.5 NSIDE leave about 1e-12 in
//! both; the bounds are 1e-8 for κ_E and 1e-10 for κ_B).

use num_complex::Complex64;
use planisphere::harmonics::mass_mapping::shear_to_convergence_factors;
use planisphere::harmonics::{
    convergence_from_shear, gaussian_beam, HarmonicCoefficients, HarmonicTransform, MassMapper,
    MassMappingSettings, ShearAxes,
};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha20Rng;

/// Random real-field coefficients with a red spectrum, ℓ < 2 zero.
fn random_kappa(lmax: usize, seed: u64) -> HarmonicCoefficients {
    let mut rng = ChaCha20Rng::seed_from_u64(seed);
    let mut alm = HarmonicCoefficients::zeros(lmax);
    for m in 0..=lmax {
        for l in m.max(2)..=lmax {
            let amp = 1.0 / (l as f64 + 3.0);
            let im = if m == 0 {
                0.0
            } else {
                rng.gen_range(-1.0..1.0)
            };
            alm.set(l, m, Complex64::new(rng.gen_range(-1.0..1.0), im) * amp);
        }
    }
    alm
}

fn max_abs(v: &[f64]) -> f64 {
    v.iter().fold(0.0, |a, x| a.max(x.abs()))
}

fn rms(v: &[f64]) -> f64 {
    (v.iter().map(|x| x * x).sum::<f64>() / v.len() as f64).sqrt()
}

#[test]
fn convergence_survives_the_round_trip_through_shear() {
    let (nside, lmax) = (32, 48);
    let mapper = MassMapper::new(nside, lmax).unwrap();
    let scalar = HarmonicTransform::new(nside, lmax).unwrap();
    let kappa = random_kappa(lmax, 7);
    let kappa_map = scalar.synthesis(&kappa).unwrap();
    for axes in [ShearAxes::EastNorth, ShearAxes::WestNorth] {
        let (g1, g2) = mapper.shear_from_convergence(&kappa, axes).unwrap();
        let settings = MassMappingSettings {
            axes,
            iterations: 8,
            ..Default::default()
        };
        // Coefficients: κ_E,ℓm back to 1e-8 of the largest, κ_B at rounding level.
        let (e, b) = mapper
            .convergence_coefficients(&g1, &g2, &settings)
            .unwrap();
        let scale = kappa
            .as_slice()
            .iter()
            .map(|c| c.norm())
            .fold(0.0, f64::max);
        let err_e = e
            .as_slice()
            .iter()
            .zip(kappa.as_slice())
            .map(|(a, b)| (a - b).norm())
            .fold(0.0, f64::max);
        let max_b = b.as_slice().iter().map(|c| c.norm()).fold(0.0, f64::max);
        println!(
            "{axes:?}: κ_E coefficient error {:.1e}, κ_B {:.1e} of the largest",
            err_e / scale,
            max_b / scale
        );
        assert!(err_e < 1e-8 * scale, "{axes:?}: {err_e:e}");
        assert!(max_b < 1e-10 * scale, "{axes:?}: {max_b:e}");
        // Maps: the same through the free function.
        let maps = convergence_from_shear(&g1, &g2, nside, lmax, &settings).unwrap();
        let diff: Vec<f64> = maps.e.iter().zip(&kappa_map).map(|(a, b)| a - b).collect();
        println!(
            "  map error {:.1e} of rms, κ_B {:.1e}",
            max_abs(&diff) / rms(&kappa_map),
            max_abs(&maps.b) / rms(&kappa_map)
        );
        assert!(max_abs(&diff) < 1e-8 * rms(&kappa_map));
        assert!(max_abs(&maps.b) < 1e-10 * rms(&kappa_map));
    }
}

// The axes choice is not a no-op: reading WestNorth shear as EastNorth mixes E into B.
#[test]
fn mirrored_axes_move_the_signal_into_b_modes() {
    let (nside, lmax) = (16, 32);
    let mapper = MassMapper::new(nside, lmax).unwrap();
    let kappa = random_kappa(lmax, 11);
    let (g1, g2) = mapper
        .shear_from_convergence(&kappa, ShearAxes::WestNorth)
        .unwrap();
    let (e, b) = mapper
        .convergence_coefficients(&g1, &g2, &MassMappingSettings::default())
        .unwrap();
    // γ2 → −γ2 conjugates the spin-2 field (₂Y_ℓm turns into ₋₂Y_ℓm patterns): the result is
    // no longer a pure E field, and its B power is comparable to its E power.
    let (pe, pb): (f64, f64) = (
        e.as_slice().iter().map(|c| c.norm_sqr()).sum(),
        b.as_slice().iter().map(|c| c.norm_sqr()).sum(),
    );
    assert!(pb > 0.1 * pe, "B power {pb:e} vs E {pe:e}");
}

// Smoothing multiplies κ_ℓm by the Gaussian beam b_ℓ = exp(−ℓ(ℓ+1)σ²/2) (healpy 1.20.1
// gauss_beam formula, common practice), and the kernel by −√(ℓ(ℓ+1)/((ℓ+2)(ℓ−1))).
#[test]
fn smoothing_applies_the_gaussian_beam_to_the_convergence() {
    let (nside, lmax) = (16, 32);
    let mapper = MassMapper::new(nside, lmax).unwrap();
    let kappa = random_kappa(lmax, 3);
    let (g1, g2) = mapper
        .shear_from_convergence(&kappa, ShearAxes::EastNorth)
        .unwrap();
    let fwhm = 600.0;
    let plain = MassMappingSettings {
        iterations: 8,
        ..Default::default()
    };
    let smooth = MassMappingSettings {
        smoothing_fwhm_arcmin: fwhm,
        ..plain
    };
    let (e0, _) = mapper.convergence_coefficients(&g1, &g2, &plain).unwrap();
    let (e1, _) = mapper.convergence_coefficients(&g1, &g2, &smooth).unwrap();
    let beam = gaussian_beam((fwhm / 60.0f64).to_radians(), lmax).unwrap();
    assert!(
        beam[lmax] < 0.5,
        "beam should matter at lmax: {}",
        beam[lmax]
    );
    for m in 0..=lmax {
        for (l, b_l) in beam.iter().enumerate().skip(m.max(2)) {
            let expect = e0.get(l, m) * b_l;
            assert!((e1.get(l, m) - expect).norm() < 1e-14, "l={l} m={m}");
        }
    }
    // The kernel itself at ℓ = 2: −√(6/4) (Kaiser–Squires factor on the sphere).
    assert!((shear_to_convergence_factors(2)[2] + 1.5f64.sqrt()).abs() < 1e-15);
}

#[test]
fn bad_inputs_are_errors() {
    assert!(MassMapper::new(4, 1).is_err());
    assert!(MassMapper::new(4, 12).is_err());
    let mapper = MassMapper::new(4, 8).unwrap();
    let g = vec![0.0; 192];
    let bad = MassMappingSettings {
        smoothing_fwhm_arcmin: -1.0,
        ..Default::default()
    };
    assert!(mapper.convergence_from_shear(&g, &g, &bad).is_err());
    assert!(mapper
        .convergence_from_shear(&g[..10], &g, &MassMappingSettings::default())
        .is_err());
    let mut nan = g.clone();
    nan[3] = f64::NAN;
    assert!(mapper
        .convergence_from_shear(&g, &nan, &MassMappingSettings::default())
        .is_err());
    assert!(mapper
        .shear_from_convergence(&HarmonicCoefficients::zeros(7), ShearAxes::EastNorth)
        .is_err());
}
