//! The differentiable periodic scattering transform used for synthesis: its forward pass against
//! the measuring engine, and every gradient against central finite differences.
//!
//! Finite-difference check (common practice; e.g. Nocedal & Wright 2006, Numerical
//! Optimization, §8.1): along a random direction v, the analytic directional derivative ⟨∇c, v⟩
//! must equal (c(f + hv) − c(f − hv)) / 2h, whose truncation error is O(h²).

use planisphere::measure::flat::{gaussian_random_field, periodic_coefficients, FlatMap};
use planisphere::measure::tile_spectra::{FourierStatistics, WavenumberBins};
use planisphere::scattering::statistics::CoefficientKind;
use planisphere::scattering::transform::{ScatteringEngine, TransformSettings};
use planisphere::synthesis::{
    DifferentiableScattering, FlatSynthesis, Normalisation, StatisticChoice, SynthesisSettings,
};
use rand::SeedableRng;
use rand_chacha::ChaCha20Rng;
use rand_distr::{Distribution, StandardNormal};

fn gaussian(n: usize, seed: u64) -> Vec<f64> {
    let spectrum = |k: f64| 1.0 / (1.0 + (k / 40.0).powi(2));
    let g = gaussian_random_field(n, 0.01, &spectrum, seed)
        .unwrap()
        .values()
        .to_vec();
    // Scaled to unit pixel variance.
    let sd = (g.iter().map(|v| v * v).sum::<f64>() / g.len() as f64).sqrt();
    g.iter().map(|v| v / sd).collect()
}

fn lognormal(n: usize, seed: u64) -> Vec<f64> {
    gaussian(n, seed).iter().map(|y| (y * 0.8).exp()).collect()
}

fn random_direction(n: usize, seed: u64) -> Vec<f64> {
    let mut rng = ChaCha20Rng::seed_from_u64(seed);
    (0..n * n)
        .map(|_| StandardNormal.sample(&mut rng))
        .collect()
}

fn shifted(f: &[f64], v: &[f64], h: f64) -> Vec<f64> {
    f.iter().zip(v).map(|(a, b)| a + h * b).collect()
}

fn dot(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}

/// Engine without Fourier cropping, periodic (taper 1, weight 1): the same estimator.
#[test]
fn forward_pass_matches_periodic_engine_to_1e_10() {
    for (n, j, seed) in [(32usize, 3usize, 3u64), (64, 4, 4)] {
        let settings = TransformSettings {
            fourier_cropping: false,
            ..TransformSettings::default()
        };
        let engine = ScatteringEngine::with_settings(n, j, 4, settings).unwrap();
        let field = lognormal(n, seed);
        let map = FlatMap::new(n, 0.01, field.clone()).unwrap();
        let reference = periodic_coefficients(&engine, &map).unwrap();
        let ours = DifferentiableScattering::new(n, j, 4).unwrap();
        assert_eq!(ours.labels(), engine.labels());
        let values = ours.coefficients(&field).unwrap();
        let mut worst = 0.0f64;
        for (c, v) in reference.coefficients.iter().zip(&values) {
            worst = worst.max(((c.value - v) / c.value).abs());
        }
        println!("n = {n}, J = {j}: max relative difference {worst:.2e}");
        assert!(worst < 1e-10, "max relative difference {worst}");
    }
}

/// Gradient of single coefficients of each kind (weights e_i), and of a random combination of
/// all of them, on 32 × 32 and 16 × 16 random inputs.
#[test]
fn coefficient_gradients_match_central_differences() {
    for (n, big_j, seed) in [(16usize, 2usize, 10u64), (32, 3, 11)] {
        let t = DifferentiableScattering::new(n, big_j, 4).unwrap();
        let f = lognormal(n, seed);
        let v = random_direction(n, seed + 100);
        let pass = t.forward(&f).unwrap();
        let count = t.labels().len();
        let mut picks: Vec<usize> = Vec::new();
        for kind in [
            CoefficientKind::Mean,
            CoefficientKind::Variance,
            CoefficientKind::FirstOrder,
            CoefficientKind::BandPower,
            CoefficientKind::SecondOrder,
        ] {
            let of_kind: Vec<usize> = (0..count).filter(|&i| t.labels()[i].kind == kind).collect();
            picks.push(of_kind[0]);
            picks.push(*of_kind.last().unwrap());
        }
        // Step: small enough for the O(h²) error near the modulus's small values (|z| ≈ 1e-3
        // occurs at a few pixels), large enough for rounding (≈ 1e-16/h relative).
        let h = 1e-6;
        let plus = t.coefficients(&shifted(&f, &v, h)).unwrap();
        let minus = t.coefficients(&shifted(&f, &v, -h)).unwrap();
        let mut worst = 0.0f64;
        for &i in &picks {
            let mut w = vec![0.0; count];
            w[i] = 1.0;
            let g = t.backward(&pass, &w).unwrap();
            let analytic = dot(&g, &v);
            let numeric = (plus[i] - minus[i]) / (2.0 * h);
            let err = (analytic - numeric).abs() / numeric.abs().max(analytic.abs());
            println!(
                "n={n} {:?}: analytic {analytic:.10e} numeric {numeric:.10e} rel {err:.1e}",
                t.labels()[i]
            );
            worst = worst.max(err);
        }
        // Random combination of every coefficient.
        let mut rng = ChaCha20Rng::seed_from_u64(seed + 7);
        let w: Vec<f64> = (0..count)
            .map(|_| StandardNormal.sample(&mut rng))
            .collect();
        let g = t.backward(&pass, &w).unwrap();
        let analytic = dot(&g, &v);
        let numeric = (dot(&w, &plus) - dot(&w, &minus)) / (2.0 * h);
        let err = (analytic - numeric).abs() / numeric.abs();
        println!("n={n} random combination: rel {err:.1e}");
        worst = worst.max(err);
        // Field–envelope correlations C(j,l), with and without the coefficients.
        let cp = t.forward(&shifted(&f, &v, h)).unwrap().field_envelope;
        let cm = t.forward(&shifted(&f, &v, -h)).unwrap().field_envelope;
        let cw: Vec<f64> = (0..cp.len())
            .map(|_| StandardNormal.sample(&mut rng))
            .collect();
        let zero = vec![0.0; count];
        for (coef_w, label) in [
            (&zero, "correlations"),
            (&w, "correlations and coefficients"),
        ] {
            let g = t
                .backward_with_correlations(&pass, coef_w, Some(&cw))
                .unwrap();
            let analytic = dot(&g, &v);
            let numeric = (dot(&cw, &cp) - dot(&cw, &cm) + dot(coef_w, &plus)
                - dot(coef_w, &minus))
                / (2.0 * h);
            let err = (analytic - numeric).abs() / numeric.abs();
            println!("n={n} {label}: rel {err:.1e}");
            worst = worst.max(err);
        }
        worst = worst.max(err);
        assert!(worst <= 1e-6, "worst relative error {worst}");
    }
}

/// Gradient of the synthesis loss (full set, orientation-harmonic summary, with power-spectrum bins).
#[test]
fn loss_gradients_match_central_differences() {
    let n = 32;
    let target_map = lognormal(n, 21);
    let f = gaussian(n, 22)
        .iter()
        .map(|v| 1.0 + 0.8 * v)
        .collect::<Vec<_>>();
    let v = random_direction(n, 23);
    for (choice, bins, corr) in [
        (StatisticChoice::Full, None, false),
        (StatisticChoice::Summary, None, false),
        (StatisticChoice::Full, Some(6), false),
        (StatisticChoice::Summary, Some(6), true),
        (StatisticChoice::Full, Some(6), true),
    ] {
        let settings = SynthesisSettings {
            statistics: choice,
            power_spectrum_bins: bins,
            field_envelope_correlation: corr,
            ..SynthesisSettings::default()
        };
        let s = FlatSynthesis::new(n, 3, 4, 0.01, settings).unwrap();
        let target = s.target_from_map(&target_map).unwrap();
        let (_, g) = s.loss_and_gradient(&target, &f).unwrap();
        let h = 1e-5;
        let (lp, _) = s.loss_and_gradient(&target, &shifted(&f, &v, h)).unwrap();
        let (lm, _) = s.loss_and_gradient(&target, &shifted(&f, &v, -h)).unwrap();
        let numeric = (lp - lm) / (2.0 * h);
        let analytic = dot(&g, &v);
        let err = (analytic - numeric).abs() / numeric.abs();
        println!("{choice:?}, power bins {bins:?}, correlations {corr}: analytic {analytic:.10e} numeric {numeric:.10e} rel {err:.1e}");
        assert!(err <= 1e-6, "{choice:?} {bins:?}: relative error {err}");
    }
}

/// The summary items and power bins used by the synthesis are those of the measuring
/// code: CoefficientSet::summary (minus the mean) and FourierStatistics::power_spectrum with
/// taper 1.
#[test]
fn synthesis_statistics_match_measured_summary_and_power_spectrum() {
    let n = 32;
    let field = lognormal(n, 31);
    let settings = SynthesisSettings {
        statistics: StatisticChoice::Summary,
        power_spectrum_bins: Some(5),
        ..SynthesisSettings::default()
    };
    let s = FlatSynthesis::new(n, 3, 4, 0.01, settings).unwrap();
    let ours = s.statistics(&field).unwrap();
    let names = s.statistic_names();
    let engine = ScatteringEngine::with_settings(
        n,
        3,
        4,
        TransformSettings {
            fourier_cropping: false,
            ..TransformSettings::default()
        },
    )
    .unwrap();
    let summary = periodic_coefficients(&engine, &FlatMap::new(n, 0.01, field.clone()).unwrap())
        .unwrap()
        .summary()
        .unwrap();
    assert_eq!(summary.len() - 1, names.len() - 5);
    for item in summary.iter().skip(1) {
        let i = names.iter().position(|x| x == &item.name).unwrap();
        let rel = ((ours[i] - item.value) / item.value.abs().max(1e-3)).abs();
        assert!(rel < 1e-10, "{}: {} vs {}", item.name, ours[i], item.value);
    }
    let bins = WavenumberBins::logarithmic(n, 0.01, 5).unwrap();
    let fs = FourierStatistics::new(n, 0.01, bins).unwrap();
    let ps = fs.power_spectrum(&field, &vec![1.0; n * n], 1.0).unwrap();
    let kept: Vec<f64> = ps.power.iter().copied().filter(|p| p.is_finite()).collect();
    let ours_power: Vec<f64> = names
        .iter()
        .zip(&ours)
        .filter(|(nm, _)| nm.starts_with("power_bin_"))
        .map(|(_, v)| *v)
        .collect();
    assert_eq!(kept.len(), ours_power.len());
    for (a, b) in kept.iter().zip(&ours_power) {
        assert!(((a - b) / a).abs() < 1e-10, "{a} vs {b}");
    }
}

#[test]
fn given_normalisation_with_wrong_length_is_an_error() {
    let settings = SynthesisSettings {
        normalisation: Normalisation::Given(vec![1.0; 3]),
        ..SynthesisSettings::default()
    };
    assert!(FlatSynthesis::new(32, 3, 4, 0.01, settings).is_err());
}
