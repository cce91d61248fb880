//! Synthesis of flat fields: the synthesised field reproduces the target statistics, and on a
//! lognormal target it carries the target's non-Gaussian features (one-point skewness and
//! kurtosis, peak counts) far better than a Gaussian field of the same power spectrum, while
//! keeping the target's power spectrum within cosmic variance.
//!
//! Lognormal target (Hilbert, Hartlap & Schneider 2011, A&A 536, A85): κ = e^y − κ0 with y
//! Gaussian, ⟨y⟩ = ln κ0 − σ_y²/2 so that ⟨κ⟩ = 0; skewness 3r + r³ with r = σ_κ/κ0 and
//! σ_κ² = κ0²(e^{σ_y²} − 1).

use planisphere::measure::flat::{gaussian_random_field, periodic_coefficients, FlatMap};
use planisphere::measure::tile_spectra::{FourierStatistics, WavenumberBins};
use planisphere::scattering::transform::{ScatteringEngine, TransformSettings};
use planisphere::synthesis::{
    coefficients_from_json, gaussian_counterpart, one_point_moments, peak_counts,
    DifferentiableScattering, FlatSynthesis, StartField, StatisticChoice, SynthesisOutcome,
    SynthesisSettings,
};
use std::sync::OnceLock;

const N: usize = 64;
const PIXEL: f64 = 2.908882086657216e-4; // 1 arcmin in radians
const KAPPA0: f64 = 1.0;
const SIGMA_Y: f64 = 0.6;
/// Logarithmic power-spectrum bins, in the loss and in the check.
const POWER_BINS: usize = 10;
const THRESHOLDS: [f64; 4] = [0.0, 1.0, 2.0, 3.0];

/// Shifted lognormal field of a Gaussian y with a smooth red spectrum.
fn lognormal_target(seed: u64) -> Vec<f64> {
    let k_nyquist = std::f64::consts::PI / PIXEL;
    let spectrum =
        move |k: f64| (k / k_nyquist).powf(-1.5) * (-(k / (0.25 * k_nyquist)).powi(2)).exp();
    let g = gaussian_random_field(N, PIXEL, &spectrum, seed).unwrap();
    let g = g.values();
    let sd = (g.iter().map(|v| v * v).sum::<f64>() / g.len() as f64).sqrt();
    let mean_y = KAPPA0.ln() - SIGMA_Y * SIGMA_Y / 2.0;
    g.iter()
        .map(|v| (mean_y + SIGMA_Y * v / sd).exp() - KAPPA0)
        .collect()
}

struct Run {
    target: Vec<f64>,
    gaussian: Vec<f64>,
    outcome: SynthesisOutcome,
    synthesis: FlatSynthesis,
}

fn full_set_run() -> &'static Run {
    static RUN: OnceLock<Run> = OnceLock::new();
    RUN.get_or_init(|| {
        let target = lognormal_target(5);
        let settings = SynthesisSettings {
            statistics: StatisticChoice::Full,
            iterations: 500,
            field_envelope_correlation: true,
            power_spectrum_bins: Some(POWER_BINS),
            seed: 17,
            start: StartField::Gaussian,
            ..SynthesisSettings::default()
        };
        let synthesis = FlatSynthesis::new(N, 4, 4, PIXEL, settings).unwrap();
        let t = synthesis.target_from_map(&target).unwrap();
        let outcome = synthesis.synthesise(&t).unwrap();
        println!(
            "full set: loss {:.3e} -> {:.3e} in {} iterations ({}), max relative deviation {:.2e}, reflected {}",
            outcome.report.initial_loss,
            outcome.report.final_loss,
            outcome.report.iterations,
            outcome.report.termination,
            outcome.report.max_relative_deviation,
            outcome.reflected
        );
        let gaussian = gaussian_counterpart(&target, N, 99).unwrap();
        Run {
            target,
            gaussian,
            outcome,
            synthesis,
        }
    })
}

/// Norm: max_i |s_i − t_i| / |t_i| over the full set (variance, S1, P, S2; J = 4, L = 4). The
/// run also matches the field–envelope correlations and the binned power spectrum (printed).
#[test]
fn synthesised_field_reproduces_full_set_within_one_percent() {
    let run = full_set_run();
    assert!(run.outcome.report.final_loss < run.outcome.report.initial_loss);
    let names = run.synthesis.statistic_names();
    let t = run.synthesis.target_from_map(&run.target).unwrap();
    let s = run.synthesis.statistics(&run.outcome.field).unwrap();
    let extra = names
        .iter()
        .zip(s.iter().zip(&t.matched.values).zip(&t.matched.sigma))
        .filter(|(nm, _)| nm.starts_with("power_bin") || nm.starts_with("field_envelope"))
        .map(|(_, ((a, b), sg))| ((a - b) / sg).abs())
        .fold(0.0, f64::max);
    println!("correlations and power bins: max normalised deviation {extra:.3e}");
    let (worst, at) = s
        .iter()
        .zip(&t.matched.values)
        .enumerate()
        .filter(|(i, _)| {
            !names[*i].starts_with("power_bin") && !names[*i].starts_with("field_envelope")
        })
        .map(|(i, (a, b))| (((a - b) / b).abs(), i))
        .fold((0.0, 0), |m, x| if x.0 > m.0 { x } else { m });
    println!("worst relative deviation {worst:.3e} at {}", names[at]);
    assert!(worst <= 0.01, "{worst} at {}", names[at]);
    // The start field (Gaussian, same spectrum) does not already satisfy it.
    let s0 = run.synthesis.statistics(&run.outcome.start).unwrap();
    let start_worst = s0
        .iter()
        .zip(&t.matched.values)
        .map(|(a, b)| ((a - b) / b).abs())
        .fold(0.0, f64::max);
    println!("start field: worst relative deviation {start_worst:.3e}");
    assert!(start_worst > 0.05);
}

#[test]
fn lognormal_target_skewness_follows_the_lognormal_formula() {
    // Hilbert, Hartlap & Schneider 2011: skewness 3r + r³. One 64² map of a field correlated
    // over a few pixels: sampling scatter is large, so only a 35% agreement is asked.
    let r = (SIGMA_Y * SIGMA_Y).exp_m1().sqrt();
    let expected = 3.0 * r + r * r * r;
    let (_, _, skew, _) = one_point_moments(&full_set_run().target);
    println!("target skewness {skew:.3}, lognormal formula {expected:.3}");
    assert!((skew - expected).abs() < 0.35 * expected);
}

#[test]
fn synthesised_lognormal_field_has_target_skewness_kurtosis_and_peak_counts() {
    let run = full_set_run();
    let (_, _, st, kt) = one_point_moments(&run.target);
    let (_, _, sg, kg) = one_point_moments(&run.gaussian);
    let (_, _, ss, ks) = one_point_moments(&run.outcome.field);
    println!("skewness: target {st:.3}, gaussian {sg:.3}, synthesised {ss:.3}");
    println!("excess kurtosis: target {kt:.3}, gaussian {kg:.3}, synthesised {ks:.3}");
    let pt = peak_counts(&run.target, N, &THRESHOLDS);
    let pg = peak_counts(&run.gaussian, N, &THRESHOLDS);
    let ps = peak_counts(&run.outcome.field, N, &THRESHOLDS);
    println!("peaks above nu = {THRESHOLDS:?}: target {pt:?}, gaussian {pg:?}, synthesised {ps:?}");
    assert!((ss - st).abs() < 0.3 * (sg - st).abs());
    // The kurtosis of a 64² map with a few dominant spikes is recovered less well: asked
    // only to close 40% of the Gaussian field's gap.
    assert!((ks - kt).abs() < 0.6 * (kg - kt).abs());
    let distance = |p: &[usize]| -> f64 {
        p.iter()
            .zip(&pt)
            .map(|(a, b)| (*a as f64 - *b as f64).abs())
            .sum()
    };
    println!(
        "peak-count L1 distance to target: gaussian {}, synthesised {}",
        distance(&pg),
        distance(&ps)
    );
    assert!(distance(&ps) < 0.5 * distance(&pg));
}

/// Binned periodogram of the synthesised field against the target's: within 3 standard
/// deviations of the Gaussian cosmic variance of a binned periodogram, σ_P/P = √(2/n_b) for
/// n_b Fourier cells (both halves of the plane) in the bin (common practice). The binned
/// spectrum is part of the loss here: the scattering set alone (J = 4 band powers) left the
/// steep high-k end of this target 35% off in a bin of 776 cells (σ = 5%).
#[test]
fn synthesised_power_spectrum_matches_target_within_cosmic_variance() {
    let run = full_set_run();
    let bins = WavenumberBins::logarithmic(N, PIXEL, POWER_BINS).unwrap();
    let fs = FourierStatistics::new(N, PIXEL, bins).unwrap();
    let ones = vec![1.0; N * N];
    let pt = fs.power_spectrum(&run.target, &ones, 1.0).unwrap();
    let ps = fs.power_spectrum(&run.outcome.field, &ones, 1.0).unwrap();
    for b in 0..pt.power.len() {
        if pt.modes[b] == 0 {
            continue;
        }
        let sigma = (2.0 / pt.modes[b] as f64).sqrt();
        let dev = (ps.power[b] - pt.power[b]) / pt.power[b];
        println!(
            "bin {b}: k = {:.0}, modes {}, relative difference {dev:+.3}, cosmic variance {sigma:.3}",
            pt.k[b], pt.modes[b]
        );
        assert!(dev.abs() < 3.0 * sigma, "bin {b}: {dev} vs {sigma}");
    }
}

/// Norm: max_i |s_i − t_i| / σ_i over the orientation-harmonic summary without the mean
/// (rms, moduli, modulus anisotropies, intermittencies, alignments), σ_i = |t_i|, or
/// max(|t_i|, 0.1) for the items that sit near 0 (`Normalisation::Relative`).
#[test]
fn synthesised_field_reproduces_summary_within_one_percent() {
    let target = lognormal_target(6);
    let settings = SynthesisSettings {
        statistics: StatisticChoice::Summary,
        iterations: 200,
        seed: 3,
        start: StartField::White,
        ..SynthesisSettings::default()
    };
    let s = FlatSynthesis::new(N, 4, 4, PIXEL, settings).unwrap();
    let t = s.target_from_map(&target).unwrap();
    let out = s.synthesise(&t).unwrap();
    println!(
        "summary: loss {:.3e} -> {:.3e} in {} iterations, max relative deviation {:.2e}",
        out.report.initial_loss,
        out.report.final_loss,
        out.report.iterations,
        out.report.max_relative_deviation
    );
    for ((name, v), (tv, sg)) in s
        .statistic_names()
        .iter()
        .zip(&out.report.statistics)
        .zip(t.matched.values.iter().zip(&t.matched.sigma))
    {
        println!("{name:<24} target {tv:+.5e} got {v:+.5e} sigma {sg:.3e}");
    }
    assert!(out.report.max_relative_deviation <= 0.01);
}

#[test]
fn synthesis_is_reproducible_for_a_seed() {
    let target = lognormal_target(8)[..32 * 32].to_vec();
    let settings = SynthesisSettings {
        iterations: 15,
        seed: 4,
        ..SynthesisSettings::default()
    };
    let s = FlatSynthesis::new(32, 3, 4, PIXEL, settings.clone()).unwrap();
    let t = s.target_from_map(&target).unwrap();
    let a = s.synthesise(&t).unwrap();
    let b = s.synthesise(&t).unwrap();
    assert_eq!(a.field, b.field);
    let other = FlatSynthesis::new(
        32,
        3,
        4,
        PIXEL,
        SynthesisSettings {
            seed: 5,
            ..settings
        },
    )
    .unwrap();
    let c = other.synthesise(&t).unwrap();
    assert_ne!(a.field, c.field);
}

/// A coefficient file as serialised from a measured CoefficientSet is read back into the same
/// coefficients, and gives the same target as the map itself.
#[test]
fn coefficient_json_target_equals_map_target() {
    let n = 32;
    let field = lognormal_target(9)[..n * n].to_vec();
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
    let set =
        periodic_coefficients(&engine, &FlatMap::new(n, PIXEL, field.clone()).unwrap()).unwrap();
    let text = serde_json::to_string(&set).unwrap();
    let read = coefficients_from_json(&text, 3, 4).unwrap();
    let direct = DifferentiableScattering::new(n, 3, 4)
        .unwrap()
        .coefficients(&field)
        .unwrap();
    for (a, b) in read.iter().zip(&direct) {
        assert!(((a - b) / b).abs() < 1e-10);
    }
    // Asking for more scales than the file holds is an error naming what is missing.
    let err = coefficients_from_json(&text, 4, 4).unwrap_err().to_string();
    assert!(err.contains("lacks"), "{err}");
    assert!(coefficients_from_json("{\"coefficients\": 3}", 3, 4).is_err());
}

/// Peaks are strict local maxima over the 8 periodic neighbours: a spike next to a higher one
/// across the wrap-around edge is not a peak; plateaus are not peaks.
#[test]
fn peak_counts_use_periodic_strict_maxima() {
    let n = 32;
    let mut f = vec![0.0; n * n];
    f[10 * n + 10] = 100.0;
    f[0] = 50.0; // (0, 0)
    f[31] = 20.0; // (0, 31): neighbour of (0, 0) across the edge
    let (mean, sd, _, _) = one_point_moments(&f);
    let heights: Vec<f64> = [100.0, 50.0].iter().map(|v| (v - mean) / sd).collect();
    assert!(heights[0] > 20.0 && heights[1] > 10.0 && heights[1] < 20.0);
    assert_eq!(
        peak_counts(&f, n, &[0.0, 10.0, 20.0, 40.0]),
        vec![2, 2, 1, 0]
    );
}

/// Without the sign-sensitive correlations the set is blind to f → 2μ − f; the result is then
/// reflected to carry the sign of the target's skewness, which leaves the loss unchanged.
#[test]
fn reflection_gives_the_target_skewness_sign_at_equal_loss() {
    let target = lognormal_target(12)[..32 * 32].to_vec();
    for seed in [1u64, 2, 3] {
        let settings = SynthesisSettings {
            iterations: 40,
            seed,
            start: StartField::White,
            ..SynthesisSettings::default()
        };
        let s = FlatSynthesis::new(32, 3, 4, PIXEL, settings).unwrap();
        let t = s.target_from_map(&target).unwrap();
        let out = s.synthesise(&t).unwrap();
        let (_, _, skew, _) = one_point_moments(&out.field);
        assert!(skew > 0.0, "seed {seed}: skewness {skew}");
        let (mean, _, _, _) = one_point_moments(&out.field);
        let mirrored: Vec<f64> = out.field.iter().map(|v| 2.0 * mean - v).collect();
        let (l1, _) = s.loss_and_gradient(&t, &out.field).unwrap();
        let (l2, _) = s.loss_and_gradient(&t, &mirrored).unwrap();
        assert!((l1 - l2).abs() <= 1e-9 * l1.max(1e-300), "{l1} vs {l2}");
    }
}
