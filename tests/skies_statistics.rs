//! Simulated skies against the lognormal formulas of Hilbert, Hartlap & Schneider 2011 (A&A 536,
//! A85): for κ = e^y − κ0, ⟨κ⟩ = 0, σ_κ² = κ0²(e^{σ_y²} − 1), skewness 3r + r³ with r = σ_κ/κ0;
//! their spectra against the target; and reproducibility.

use planisphere::harmonics::correlation::lognormal_gaussian_spectrum;
use planisphere::harmonics::spectrum::AngularSpectrum;
use planisphere::harmonics::HarmonicTransform;
use planisphere::simulate::skies::SkyRecipe;
use std::f64::consts::PI;

fn moments(v: &[f64]) -> (f64, f64, f64) {
    let n = v.len() as f64;
    let mean = v.iter().sum::<f64>() / n;
    let var = v.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / n;
    let skew = v.iter().map(|x| (x - mean).powi(3)).sum::<f64>() / n / var.powf(1.5);
    (mean, var, skew)
}

fn mean_and_error(x: &[f64]) -> (f64, f64) {
    let n = x.len() as f64;
    let m = x.iter().sum::<f64>() / n;
    let s = (x.iter().map(|v| (v - m).powi(2)).sum::<f64>() / (n - 1.0)).sqrt();
    (m, s / n.sqrt())
}

#[test]
fn lognormal_skies_have_the_lognormal_mean_variance_and_skewness() {
    let nside = 64;
    let lmax = 3 * nside as usize - 1;
    let spectrum = AngularSpectrum::demo_model(lmax, 1e-4);
    let shift = 0.02; // r ≈ σ_κ/κ0 = 0.5
    let mut recipe = SkyRecipe::gaussian(nside, spectrum.clone(), 11);
    recipe.lognormal_shift = Some(shift);
    let sht = recipe.transform().unwrap();
    let g = lognormal_gaussian_spectrum(&spectrum.cl, shift).unwrap();
    let var_g: f64 = g
        .gaussian_cl
        .iter()
        .enumerate()
        .map(|(l, c)| (2 * l + 1) as f64 / (4.0 * PI) * c)
        .sum();
    // Hilbert, Hartlap & Schneider 2011: σ_κ² = κ0²(e^{σ_g²} − 1), skewness 3r + r³.
    let var_expected = shift * shift * (var_g.exp() - 1.0);
    let r = var_expected.sqrt() / shift;
    let skew_expected = 3.0 * r + r.powi(3);
    let (mut means, mut vars, mut skews) = (vec![], vec![], vec![]);
    for i in 0..12 {
        let (m, v, s) = moments(sky_values(&recipe, &sht, i).as_slice());
        means.push(m);
        vars.push(v);
        skews.push(s);
    }
    let (m, em) = mean_and_error(&means);
    let (v, ev) = mean_and_error(&vars);
    let (s, es) = mean_and_error(&skews);
    // 12 skies: agreement within 4 standard errors of the ensemble mean.
    assert!(m.abs() < 4.0 * em + 1e-12, "mean {m} ± {em}");
    assert!(
        (v - var_expected).abs() < 4.0 * ev,
        "variance {v} ± {ev} vs {var_expected}"
    );
    assert!(
        (s - skew_expected).abs() < 4.0 * es,
        "skewness {s} ± {es} vs {skew_expected}"
    );
    assert!(
        skew_expected > 1.0,
        "the test must be in a clearly skewed regime"
    );
}

fn sky_values(recipe: &SkyRecipe, sht: &HarmonicTransform, i: u64) -> Vec<f64> {
    recipe.realise(sht, i).unwrap().values().to_vec()
}

#[test]
fn lognormal_sky_spectrum_matches_the_target_within_the_ensemble_scatter() {
    let nside = 32;
    let lmax = 3 * nside as usize - 1;
    let spectrum = AngularSpectrum::demo_model(lmax, 1e-4);
    let mut recipe = SkyRecipe::gaussian(nside, spectrum.clone(), 5);
    recipe.lognormal_shift = Some(0.02);
    let sht = recipe.transform().unwrap();
    let n = 24;
    let cls: Vec<Vec<f64>> = (0..n)
        .map(|i| {
            let v = sky_values(&recipe, &sht, i);
            sht.analysis(&v, 3).unwrap().power_spectrum()
        })
        .collect();
    // ℓ in 10..60 (well below ℓmax where the lognormal mapping is clean), binned in 10s so the
    // scatter estimate is stable: |mean − target| < 4 σ_mean per bin.
    for b in 1..6 {
        let ls = 10 * b..10 * (b + 1);
        let per_sky: Vec<f64> = cls.iter().map(|c| ls.clone().map(|l| c[l]).sum()).collect();
        let target: f64 = ls.clone().map(|l| spectrum.cl[l]).sum();
        let (m, e) = mean_and_error(&per_sky);
        assert!(
            (m - target).abs() < 4.0 * e,
            "ℓ {ls:?}: {m} ± {e} vs {target}"
        );
    }
}

#[test]
fn skies_are_reproducible_and_independent_of_thread_count() {
    let spectrum = AngularSpectrum::demo_model(47, 1e-4);
    let mut recipe = SkyRecipe::gaussian(16, spectrum, 3);
    recipe.lognormal_shift = Some(0.03);
    recipe.noise_sigma = Some(1e-3);
    recipe.beam_fwhm_arcmin = Some(120.0);
    let sht = recipe.transform().unwrap();
    let run = |threads| {
        rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap()
            .install(|| sky_values(&recipe, &sht, 4))
    };
    let a = run(1);
    let b = run(2);
    assert!(a.iter().zip(&b).all(|(x, y)| x.to_bits() == y.to_bits()));
    let other = sky_values(&recipe, &sht, 5);
    assert!(a.iter().zip(&other).any(|(x, y)| x != y));
}

#[test]
fn absurd_sky_settings_are_rejected() {
    let spectrum = AngularSpectrum::demo_model(47, 1e-4);
    let mut recipe = SkyRecipe::gaussian(16, spectrum, 3);
    recipe.lmax = 500;
    let e = recipe
        .realise(&HarmonicTransform::new(16, 47).unwrap(), 0)
        .unwrap_err();
    assert_eq!(
        e.to_string(),
        "lmax 500 is beyond 4·NSIDE = 64 for NSIDE 16"
    );
    recipe.lmax = 47;
    recipe.lognormal_shift = Some(-1.0);
    let e = recipe.realise(&recipe.transform().unwrap(), 0).unwrap_err();
    assert_eq!(
        e.to_string(),
        "the lognormal shift must be positive, got -1"
    );
}
