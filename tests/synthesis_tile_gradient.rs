//! The differentiable masked-tile estimator: its sums against the measuring engine (with and
//! without Fourier cropping) on tiles with holes and an apodized border, its gradient against
//! central finite differences, and its periodic special case against the periodic gradient.
//!
//! Finite-difference check (definition of the derivative; Griewank & Walther 2008, Evaluating
//! Derivatives, SIAM, §1; Nocedal & Wright 2006, Numerical Optimization, §8.1): along a random
//! direction v the analytic directional derivative ⟨∇L, v⟩ must equal
//! (L(f + hv) − L(f − hv)) / 2h, whose truncation error is O(h²).

use planisphere::measure::flat::{gaussian_random_field, periodic_coefficients, FlatMap};
use planisphere::scattering::statistics::CoefficientKind;
use planisphere::scattering::transform::{ScatteringEngine, TileView, TransformSettings};
use planisphere::synthesis::tile_gradient::{pooled_values, pooled_values_adjoint};
use planisphere::synthesis::{
    DifferentiableScattering, FlatSynthesis, StartField, StatisticChoice, SynthesisSettings,
};
use rand::SeedableRng;
use rand_chacha::ChaCha20Rng;
use rand_distr::{Distribution, StandardNormal};

fn lognormal(n: usize, seed: u64) -> Vec<f64> {
    let spectrum = |k: f64| 1.0 / (1.0 + (k / 40.0).powi(2));
    let g = gaussian_random_field(n, 0.01, &spectrum, seed)
        .unwrap()
        .values()
        .to_vec();
    let sd = (g.iter().map(|v| v * v).sum::<f64>() / g.len() as f64).sqrt();
    g.iter().map(|v| (0.8 * v / sd).exp()).collect()
}

fn cosine_ramp(t: f64) -> f64 {
    if t <= 0.0 {
        0.0
    } else if t >= 1.0 {
        1.0
    } else {
        0.5 * (1.0 - (std::f64::consts::PI * t).cos())
    }
}

/// Taper: zero border margin of 2 pixels, cosine ramp over n/10 pixels, two circular holes
/// with cosine ramps of 4 pixels. Weight: 1 on the footprint (taper > 0), 1.5 on its left
/// third, 0 in the holes and the margin (invented geometry, for the test only).
fn masked_tile(n: usize) -> (Vec<f64>, Vec<f64>) {
    let ramp = (n / 10) as f64;
    let holes = [
        (0.3 * n as f64, 0.6 * n as f64, n as f64 / 10.0),
        (0.7 * n as f64, 0.35 * n as f64, n as f64 / 14.0),
    ];
    let mut taper = vec![0.0; n * n];
    let mut weight = vec![0.0; n * n];
    for iy in 0..n {
        for ix in 0..n {
            let edge = ix.min(iy).min(n - 1 - ix).min(n - 1 - iy) as f64;
            let mut a = cosine_ramp((edge - 2.0) / ramp);
            for (cx, cy, r) in holes {
                let d = ((ix as f64 - cx).powi(2) + (iy as f64 - cy).powi(2)).sqrt();
                a *= cosine_ramp((d - r) / 4.0);
            }
            taper[iy * n + ix] = a;
            if a > 0.0 {
                weight[iy * n + ix] = if ix < n / 3 { 1.5 } else { 1.0 };
            }
        }
    }
    (taper, weight)
}

const H_STEP: f64 = 1e-5;

fn random_vector(len: usize, seed: u64) -> Vec<f64> {
    let mut rng = ChaCha20Rng::seed_from_u64(seed);
    (0..len).map(|_| StandardNormal.sample(&mut rng)).collect()
}

fn shifted(f: &[f64], v: &[f64], h: f64) -> Vec<f64> {
    f.iter().zip(v).map(|(a, b)| a + h * b).collect()
}

fn dot(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}

fn worst_relative(ours: &[f64], reference: &[f64]) -> f64 {
    ours.iter()
        .zip(reference)
        .map(|(a, b)| if a == b { 0.0 } else { (a - b).abs() / b.abs() })
        .fold(0.0, f64::max)
}

fn compare_with_engine(n: usize, big_j: usize, settings: TransformSettings, periodic: bool) {
    let engine = ScatteringEngine::with_settings(n, big_j, 4, settings).unwrap();
    let t = DifferentiableScattering::new(n, big_j, 4).unwrap();
    let (taper, weight) = if periodic {
        (vec![1.0; n * n], vec![1.0; n * n])
    } else {
        masked_tile(n)
    };
    let field = lognormal(n, 5);
    let tile = TileView {
        field: &field,
        taper: &taper,
        weight: &weight,
    };
    let reference = engine.transform_tile(&tile).unwrap();
    let ours = t.forward_tile(&tile, &settings).unwrap();
    assert_eq!(
        ours.geometry().crop_levels(),
        engine.crop_levels(),
        "crop levels"
    );
    assert_eq!(
        ours.geometry().first_layer_levels(),
        engine.first_layer_levels(),
        "first-layer levels"
    );
    let sums = worst_relative(&ours.sums.sums, &reference.sums);
    let weights = worst_relative(&ours.sums.weights, &reference.weights);
    println!(
        "n = {n}, J = {big_j}, cropping {}, shifted boxes {}, levels {:?} / {:?}, periodic {periodic}: sums {sums:.1e}, weights {weights:.1e}",
        settings.fourier_cropping,
        settings.shifted_boxes,
        engine.crop_levels(),
        engine.first_layer_levels()
    );
    assert!(sums <= 1e-12, "sums differ by {sums}");
    assert!(weights <= 1e-12, "weights differ by {weights}");
    assert_eq!(ours.sums.footprint_weight, reference.footprint_weight);
    // Some pooling weight must be cut by the trust rule, or the masked case tests nothing.
    if !periodic {
        assert!(reference
            .weights
            .iter()
            .any(|w| *w > 0.0 && *w < 0.9 * reference.footprint_weight));
    }
}

/// Reference: the measuring engine (crate::scattering::transform) with cropping switched off.
#[test]
fn masked_tile_sums_match_uncropped_engine_to_1e_12() {
    let settings = TransformSettings {
        fourier_cropping: false,
        ..TransformSettings::default()
    };
    compare_with_engine(64, 4, settings, false);
    compare_with_engine(32, 3, settings, true);
}

/// Reference: the measuring engine with its default settings (Fourier cropping on).
#[test]
fn masked_tile_sums_match_cropping_engine_to_1e_12() {
    compare_with_engine(64, 5, TransformSettings::default(), false);
    compare_with_engine(128, 6, TransformSettings::default(), false);
    compare_with_engine(128, 6, TransformSettings::default(), true);
    compare_with_engine(256, 6, TransformSettings::default(), false);
    // Origin-centred boxes, one level for both layers (the earlier crop rule).
    let centred = TransformSettings {
        shifted_boxes: false,
        first_layer_oversampling: 0,
        modulus_oversampling: 1,
        crop_tolerance: 1e-6,
        ..TransformSettings::default()
    };
    compare_with_engine(128, 6, centred, false);
}

/// ∂(Σ b_i sums_i)/∂f along a random direction against central differences, for weights b
/// restricted to each coefficient kind and for all of them at once.
fn check_gradient(n: usize, big_j: usize, settings: TransformSettings, seed: u64) {
    let t = DifferentiableScattering::new(n, big_j, 4).unwrap();
    let (taper, weight) = masked_tile(n);
    let geometry = t.tile_geometry(&taper, &weight, &settings).unwrap();
    let f = lognormal(n, seed);
    let v = random_vector(n * n, seed + 100);
    let count = t.labels().len();
    let pass = t.forward_tile_with(&geometry, &f).unwrap();
    // Normalise the sums by their weights so that every kind weighs alike in the combination.
    let scale: Vec<f64> = pass
        .sums
        .weights
        .iter()
        .map(|w| if *w > 0.0 { 1.0 / w } else { 0.0 })
        .collect();
    // Steps: the mean and Σ w f² are polynomials of degree ≤ 2, for which central
    // differences are exact, so a large step only reduces rounding; for the other kinds the
    // step balances the O(h²) error near small moduli against rounding (≈ 1e-16/h).
    let sums_at = |h: f64| {
        let plus = t.forward_tile_with(&geometry, &shifted(&f, &v, h)).unwrap();
        let minus = t
            .forward_tile_with(&geometry, &shifted(&f, &v, -h))
            .unwrap();
        (plus.sums.sums, minus.sums.sums)
    };
    let (h_poly, h) = (1e-3, H_STEP);
    let (plus_poly, minus_poly) = sums_at(h_poly);
    let (plus, minus) = sums_at(h);
    let random = random_vector(count, seed + 7);
    let mut worst = 0.0f64;
    let kinds = [
        Some(CoefficientKind::Mean),
        Some(CoefficientKind::Variance),
        Some(CoefficientKind::FirstOrder),
        Some(CoefficientKind::BandPower),
        Some(CoefficientKind::SecondOrder),
        None,
    ];
    for kind in kinds {
        let b: Vec<f64> = (0..count)
            .map(|i| {
                if kind.is_none_or(|k| t.labels()[i].kind == k) {
                    random[i] * scale[i]
                } else {
                    0.0
                }
            })
            .collect();
        let g = t.backward_tile(&pass, &b).unwrap();
        let analytic = dot(&g, &v);
        let polynomial = matches!(
            kind,
            Some(CoefficientKind::Mean | CoefficientKind::Variance)
        );
        let numeric = if polynomial {
            (dot(&b, &plus_poly) - dot(&b, &minus_poly)) / (2.0 * h_poly)
        } else {
            (dot(&b, &plus) - dot(&b, &minus)) / (2.0 * h)
        };
        let err = (analytic - numeric).abs() / numeric.abs().max(analytic.abs());
        println!(
            "n = {n}, J = {big_j}, cropping {}, {kind:?}: analytic {analytic:.10e} numeric {numeric:.10e} rel {err:.1e}",
            settings.fourier_cropping
        );
        worst = worst.max(err);
    }
    assert!(worst <= 1e-6, "worst relative error {worst}");
}

#[test]
fn masked_tile_gradient_matches_central_differences_without_cropping() {
    let settings = TransformSettings {
        fourier_cropping: false,
        ..TransformSettings::default()
    };
    check_gradient(32, 3, settings, 21);
    check_gradient(64, 4, settings, 22);
}

#[test]
fn masked_tile_gradient_matches_central_differences_with_cropping() {
    check_gradient(64, 5, TransformSettings::default(), 23);
    check_gradient(128, 6, TransformSettings::default(), 24);
    let centred = TransformSettings {
        shifted_boxes: false,
        first_layer_oversampling: 0,
        modulus_oversampling: 1,
        crop_tolerance: 1e-6,
        ..TransformSettings::default()
    };
    check_gradient(64, 5, centred, 25);
}

/// With a ≡ 1, w ≡ 1 and no cropping the pooled tile values are the periodic coefficients and
/// the gradient of Σ b_i c_i, taken through the sums, is the periodic `backward` (reference:
/// crate::synthesis::gradient, itself checked against finite differences).
#[test]
fn periodic_tile_gradient_reproduces_periodic_backward() {
    let (n, big_j) = (32usize, 3usize);
    let t = DifferentiableScattering::new(n, big_j, 4).unwrap();
    let settings = TransformSettings {
        fourier_cropping: false,
        ..TransformSettings::default()
    };
    let ones = vec![1.0; n * n];
    let geometry = t.tile_geometry(&ones, &ones, &settings).unwrap();
    let f = lognormal(n, 31);
    let periodic = t.forward(&f).unwrap();
    let tile = t.forward_tile_with(&geometry, &f).unwrap();
    let values = pooled_values(&tile.sums);
    let diff = worst_relative(&values, &periodic.coefficients);
    println!("pooled tile values vs periodic coefficients: {diff:.1e}");
    assert!(diff <= 1e-12, "values differ by {diff}");
    let b = random_vector(values.len(), 32);
    let expected = t.backward(&periodic, &b).unwrap();
    let sum_weights = pooled_values_adjoint(&tile.sums, &b).unwrap();
    let got = t.backward_tile(&tile, &sum_weights).unwrap();
    let scale = expected.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    let err = got
        .iter()
        .zip(&expected)
        .map(|(a, e)| (a - e).abs())
        .fold(0.0, f64::max)
        / scale;
    println!("tile gradient vs periodic gradient: {err:.1e} of the largest component");
    assert!(err <= 1e-10, "gradients differ by {err}");
}

#[test]
fn tile_gradient_rejects_mismatched_inputs() {
    let t = DifferentiableScattering::new(32, 3, 4).unwrap();
    let other = DifferentiableScattering::new(64, 3, 4).unwrap();
    let settings = TransformSettings::default();
    let ones = vec![1.0; 32 * 32];
    let geometry = t.tile_geometry(&ones, &ones, &settings).unwrap();
    assert!(other
        .forward_tile_with(&geometry, &vec![0.0; 64 * 64])
        .is_err());
    assert!(t.forward_tile_with(&geometry, &[0.0; 10]).is_err());
    assert!(t
        .tile_geometry(&vec![2.0; 32 * 32], &ones, &settings)
        .is_err());
    assert!(t
        .tile_geometry(&ones, &vec![0.0; 32 * 32], &settings)
        .is_err());
    let pass = t.forward_tile_with(&geometry, &lognormal(32, 1)).unwrap();
    assert!(t.backward_tile(&pass, &[1.0; 3]).is_err());
    assert!(other
        .backward_tile(&pass, &vec![0.0; other.labels().len()])
        .is_err());
}

/// With the default settings the flat synthesis of a 64², J = 5 field (crop levels
/// [0, 0, 1, 1, 1], first layer at full resolution) computes what the measuring engine with
/// its default settings reports for the periodic map (reference: ScatteringEngine through
/// flat::periodic_coefficients).
#[test]
fn cropped_synthesis_coefficients_equal_default_engine_measurement() {
    let (n, big_j) = (64usize, 5usize);
    let s = FlatSynthesis::new(n, big_j, 4, 0.01, SynthesisSettings::default()).unwrap();
    assert!(s.uses_fourier_cropping());
    let field = lognormal(n, 41);
    let engine = ScatteringEngine::new(n, big_j, 4).unwrap();
    assert_eq!(engine.crop_levels(), &[0, 0, 1, 1, 1]);
    assert_eq!(engine.first_layer_levels(), &[0, 0, 0, 0, 0]);
    let reference =
        periodic_coefficients(&engine, &FlatMap::new(n, 0.01, field.clone()).unwrap()).unwrap();
    let ours = s.coefficients(&field).unwrap();
    let values: Vec<f64> = reference.coefficients.iter().map(|c| c.value).collect();
    let diff = worst_relative(&ours, &values);
    println!("cropped synthesis coefficients vs engine: {diff:.1e}");
    assert!(diff <= 1e-12, "coefficients differ by {diff}");
    let uncropped = FlatSynthesis::new(
        n,
        big_j,
        4,
        0.01,
        SynthesisSettings {
            fourier_cropping: false,
            ..SynthesisSettings::default()
        },
    )
    .unwrap();
    assert!(!uncropped.uses_fourier_cropping());
    // The two paths differ (by the cropping error of the coarse scale), so the test above
    // does exercise the cropped path.
    let full = uncropped.coefficients(&field).unwrap();
    assert!(worst_relative(&ours, &full) > 1e-9);
}

/// Gradient of the synthesis loss on the cropped path (full set, orientation-harmonic summary, power bins)
/// against central differences.
#[test]
fn cropped_synthesis_loss_gradient_matches_central_differences() {
    let n = 64;
    let target_map = lognormal(n, 51);
    let f: Vec<f64> = random_vector(n * n, 52)
        .iter()
        .zip(lognormal(n, 53))
        .map(|(r, l)| l + 0.1 * r)
        .collect();
    let v = random_vector(n * n, 54);
    for (choice, bins) in [
        (StatisticChoice::Full, None),
        (StatisticChoice::Summary, Some(6)),
    ] {
        let settings = SynthesisSettings {
            statistics: choice,
            power_spectrum_bins: bins,
            ..SynthesisSettings::default()
        };
        let s = FlatSynthesis::new(n, 5, 4, 0.01, settings).unwrap();
        assert!(s.uses_fourier_cropping());
        let target = s.target_from_map(&target_map).unwrap();
        let (_, g) = s.loss_and_gradient(&target, &f).unwrap();
        let h = H_STEP;
        let (lp, _) = s.loss_and_gradient(&target, &shifted(&f, &v, h)).unwrap();
        let (lm, _) = s.loss_and_gradient(&target, &shifted(&f, &v, -h)).unwrap();
        let numeric = (lp - lm) / (2.0 * h);
        let analytic = dot(&g, &v);
        let err = (analytic - numeric).abs() / numeric.abs();
        println!("{choice:?}, power bins {bins:?}: analytic {analytic:.10e} numeric {numeric:.10e} rel {err:.1e}");
        assert!(err <= 1e-6, "{choice:?}: relative error {err}");
    }
}

/// Norm: max_i |s_i − t_i| / |t_i| over the full set on the cropped path (64², J = 5, L = 4).
#[test]
fn cropped_synthesis_reproduces_full_set_within_one_percent() {
    let n = 64;
    let target = lognormal(n, 61);
    let settings = SynthesisSettings {
        iterations: 150,
        seed: 7,
        start: StartField::Gaussian,
        ..SynthesisSettings::default()
    };
    let s = FlatSynthesis::new(n, 5, 4, 0.01, settings).unwrap();
    assert!(s.uses_fourier_cropping());
    let t = s.target_from_map(&target).unwrap();
    let out = s.synthesise(&t).unwrap();
    println!(
        "cropped full set: loss {:.3e} -> {:.3e} in {} iterations ({}), max relative deviation {:.2e}",
        out.report.initial_loss, out.report.final_loss, out.report.iterations, out.report.termination, out.report.max_relative_deviation
    );
    assert!(out.report.max_relative_deviation <= 0.01);
}

/// The sign-sensitive sums (field–envelope E_{j,l} and the one-point E_pix = Σ w I|I|) along
/// a random direction against central differences, on the masked tile with and without
/// cropping; b_E random and normalised by the pooling weights.
fn check_envelope_gradient(n: usize, big_j: usize, settings: TransformSettings, seed: u64) {
    let t = DifferentiableScattering::new(n, big_j, 4).unwrap();
    let (taper, weight) = masked_tile(n);
    let geometry = t.tile_geometry(&taper, &weight, &settings).unwrap();
    let f = lognormal(n, seed);
    let v = random_vector(n * n, seed + 100);
    let pass = t.forward_tile_with(&geometry, &f).unwrap();
    let e = pass.field_envelope_sums().to_vec();
    assert_eq!(e.len(), big_j * 4 + 1);
    let weights: Vec<f64> = (0..e.len())
        .map(|i| {
            if i < big_j * 4 {
                pass.sums.weights[2 + i]
            } else {
                pass.sums.weights[0]
            }
        })
        .collect();
    let b: Vec<f64> = random_vector(e.len(), seed + 7)
        .iter()
        .zip(&weights)
        .map(|(r, w)| if *w > 0.0 { r / w } else { 0.0 })
        .collect();
    let zero = vec![0.0; t.labels().len()];
    let g = t
        .backward_tile_with_correlations(&pass, &zero, Some(&b))
        .unwrap();
    let analytic = dot(&g, &v);
    let at = |h: f64| {
        let p = t.forward_tile_with(&geometry, &shifted(&f, &v, h)).unwrap();
        dot(&b, p.field_envelope_sums())
    };
    let numeric = (at(H_STEP) - at(-H_STEP)) / (2.0 * H_STEP);
    let err = (analytic - numeric).abs() / numeric.abs().max(analytic.abs());
    println!(
        "n = {n}, J = {big_j}, cropping {}: analytic {analytic:.10e} numeric {numeric:.10e} rel {err:.1e}",
        settings.fourier_cropping
    );
    assert!(err <= 1e-6, "relative error {err}");
}

#[test]
fn field_envelope_sums_gradient_matches_central_differences() {
    let uncropped = TransformSettings {
        fourier_cropping: false,
        ..TransformSettings::default()
    };
    check_envelope_gradient(32, 3, uncropped, 41);
    check_envelope_gradient(64, 5, TransformSettings::default(), 42);
}

/// With a ≡ 1, w ≡ 1 and no cropping, E_{j,l} / Σ W is the periodic correlation
/// ⟨(f − μ) |f∗ψ_{j,l}|⟩ of the periodic transform (itself checked against finite differences
/// in synthesis_gradient.rs), and E_pix / Σ w is ⟨(f − μ)|f − μ|⟩ computed here directly.
#[test]
fn periodic_field_envelope_sums_equal_periodic_correlations() {
    let (n, big_j) = (32usize, 3usize);
    let t = DifferentiableScattering::new(n, big_j, 4).unwrap();
    let settings = TransformSettings {
        fourier_cropping: false,
        ..TransformSettings::default()
    };
    let ones = vec![1.0; n * n];
    let geometry = t.tile_geometry(&ones, &ones, &settings).unwrap();
    let f = lognormal(n, 43);
    let periodic = t.forward(&f).unwrap();
    let tile = t.forward_tile_with(&geometry, &f).unwrap();
    let e = tile.field_envelope_sums();
    let pooled: Vec<f64> = (0..big_j * 4)
        .map(|i| e[i] / tile.sums.weights[2 + i])
        .collect();
    let diff = worst_relative(&pooled, &periodic.field_envelope);
    println!("tile field-envelope correlations vs periodic: {diff:.1e}");
    assert!(diff <= 1e-12, "correlations differ by {diff}");
    let mean = f.iter().sum::<f64>() / f.len() as f64;
    let direct = f.iter().map(|v| (v - mean) * (v - mean).abs()).sum::<f64>() / f.len() as f64;
    let ours = e[big_j * 4] / tile.sums.weights[0];
    println!("one-point term {ours:.15e} direct {direct:.15e}");
    assert!((ours - direct).abs() <= 1e-12 * direct.abs());
}
