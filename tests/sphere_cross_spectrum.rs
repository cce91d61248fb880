//! Cross statistics of two correlated Gaussian skies on the sphere
//! (`SphereMeasurer::measure_pair`): the cross band power against the band power predicted
//! from the cross spectrum C_ℓ^{AB}, and the vanishing of the cross moments of Gaussian skies.

mod sphere_support;

use planisphere::measure::flat::wavenumber;
use planisphere::measure::measurement::{MeasurementSettings, PairStatistics, SphereMeasurer};
use planisphere::scattering::statistics::CrossKind;
use planisphere::simulate::skies::SkyRecipe;
use planisphere::SkyMap;

const NSIDE: u32 = 64;
const J: usize = 4;
const L: usize = 4;

#[test]
fn cross_band_power_of_correlated_skies_follows_the_cross_spectrum_and_cross_moments_vanish() {
    // A = X, B = r X + √(1 − r²) Y with X, Y independent Gaussian skies of spectrum C_ℓ, so
    // C_ℓ^{AB} = r C_ℓ (common practice). Prediction of the band power, as for the auto band
    // power in tests/scattering_gaussian.rs (Parseval): E[P_AB(j,l)] = Σ_q P_AB(k_q) ψ̂_q² / (nΔ)²
    // with the flat counterpart P_AB(k) = C^{AB}_{k−½} (LoVerde & Afshordi 2008). Sampling the
    // map onto tiles smooths it (transfer within a few per cent at trusted scales, contributor
    // guide), so the absolute check allows 6%; the ratio P_AB / √(P_AA P_BB) = r is free of it.
    let r = 0.7;
    let s = (1.0f64 - r * r).sqrt();
    let skies = 24;
    let footprint = sphere_support::cap(NSIDE, 30.0, 40.0, 40.0);
    let settings = MeasurementSettings {
        scales: J,
        orientations: L,
        bispectrum: false,
        ..Default::default()
    };
    let measurer = SphereMeasurer::new(footprint.pixelization(), &footprint, settings).unwrap();
    let recipe = SkyRecipe::gaussian(NSIDE, sphere_support::spectrum(NSIDE), 4242);
    let transform = recipe.transform().unwrap();
    let pairs: Vec<PairStatistics> = (0..skies)
        .map(|i| {
            let x = recipe.realise(&transform, i).unwrap();
            let y = recipe.realise(&transform, 1000 + i).unwrap();
            let b: Vec<f64> = x
                .values()
                .iter()
                .zip(y.values())
                .map(|(x, y)| r * x + s * y)
                .collect();
            let b = SkyMap::new(x.pixelization(), b).unwrap();
            measurer.measure_pair(&x, &b, &footprint).unwrap()
        })
        .collect();
    let k = skies as f64;
    let mean_se = |v: &[f64]| {
        let m = v.iter().sum::<f64>() / k;
        let sd = (v.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (k - 1.0)).sqrt();
        (m, sd / k.sqrt())
    };
    let cl = sphere_support::spectrum(NSIDE).cl;
    let n = measurer.plan().tile_pixels();
    let pixel = measurer.plan().pixel_size();
    let bank = measurer.engine().bank();
    let mut checked = 0;
    for j in 0..J {
        for l in 0..L {
            if !pairs.iter().all(|p| p.cross.band_power(j, l).trusted) {
                continue;
            }
            let pab: Vec<f64> = pairs
                .iter()
                .map(|p| p.cross.band_power(j, l).value)
                .collect();
            let ratio: Vec<f64> = pairs
                .iter()
                .map(|p| {
                    let paa = p.first.coefficients.band_power(j, l).value;
                    let pbb = p.second.coefficients.band_power(j, l).value;
                    p.cross.band_power(j, l).value / (paa * pbb).sqrt()
                })
                .collect();
            let psi = bank.wavelet(j, l);
            let mut parseval = 0.0;
            for iy in 0..n {
                for ix in 0..n {
                    let p = sphere_support::flat_power(&cl, wavenumber(ix, iy, n, pixel));
                    parseval += p * psi[iy * n + ix].powi(2);
                }
            }
            let expected = r * parseval / (n as f64 * pixel).powi(2);
            let (m, se) = mean_se(&pab);
            let (rm, rse) = mean_se(&ratio);
            println!(
                "j {j} l {l}: P_AB {m:.4e} ± {se:.1e} vs r·Parseval {expected:.4e} ({:+.1}%); P_AB/√(P_AA P_BB) {rm:.4} ± {rse:.4} vs r = {r}",
                100.0 * (m / expected - 1.0)
            );
            assert!(
                (m - expected).abs() < 3.0 * se + 0.06 * expected,
                "j {j} l {l}: {m} vs {expected} ± {se}"
            );
            assert!(
                (rm - r).abs() < 3.0 * rse + 0.01,
                "j {j} l {l}: ratio {rm} ± {rse} vs {r}"
            );
            checked += 1;
        }
    }
    assert!(checked >= L, "too few trusted scales checked ({checked})");

    // Gaussian skies: X1 and X2 in both directions have zero expectation (odd moments).
    let count = pairs[0].cross.coefficients.len();
    let mut worst = 0.0f64;
    let mut tested = 0;
    for i in 0..count {
        let label = pairs[0].cross.coefficients[i].label;
        if label.kind == CrossKind::CrossBandPower
            || !pairs.iter().all(|p| p.cross.coefficients[i].trusted)
        {
            continue;
        }
        let v: Vec<f64> = pairs
            .iter()
            .map(|p| p.cross.coefficients[i].value)
            .collect();
        let (m, se) = mean_se(&v);
        let t = m / se;
        assert!(t.abs() < 4.5, "{}: {m} ± {se} ({t:.1} σ)", label.name());
        worst = worst.max(t.abs());
        tested += 1;
    }
    println!("{tested} trusted X1/X2 coefficients, worst |t| = {worst:.2}");
    assert!(tested > 0);
}
