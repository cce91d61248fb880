//! Synthesis of a HEALPix map on a masked footprint (`synthesis::sphere`): the gradient of the
//! pooled loss against central finite differences, reproduction of a target's pooled
//! coefficients from an unrelated start, pixels outside the footprint left alone, and
//! reproducibility (same seed, any thread count).
//!
//! Sources: central differences f'(x) ≈ (f(x+h) − f(x−h))/2h with error O(h²) (common
//! practice for checking hand-written gradients, Griewank & Walther 2008 ch. 1); the pooled
//! coefficients are recomputed by the measuring path (`SphereMeasurer::measure`), which is
//! independent of the differentiable one; determinism is the crate rule.

use planisphere::harmonics::spectrum::AngularSpectrum;
use planisphere::measure::measurement::{MeasurementSettings, SphereMeasurer};
use planisphere::simulate::skies::SkyRecipe;
use planisphere::sky::apodization::{apodize, TaperKind};
use planisphere::synthesis::sphere::{SphereSynthesis, SphereTarget};
use planisphere::synthesis::{StartField, StatisticChoice, SynthesisSettings};
use planisphere::{Direction, Footprint, Ordering, Pixelization, SkyMap};

const NSIDE: u32 = 32;

fn settings() -> MeasurementSettings {
    MeasurementSettings {
        scales: 3,
        orientations: 4,
        tile_pixels: Some(32),
        border_pixels: 4,
        bispectrum: false,
        ..MeasurementSettings::default()
    }
}

/// A 20° cap around (40°, 30°) with a 4° hole, C2-apodized over 4° (invented footprint).
fn footprint() -> Footprint {
    let pix = Pixelization::new(NSIDE, Ordering::Ring).unwrap();
    let c = Direction::from_lonlat_deg(40.0, 30.0);
    let hole = Direction::from_lonlat_deg(46.0, 26.0);
    let binary = Footprint::from_fn(pix, |d| {
        d.distance(&c) < 20f64.to_radians() && d.distance(&hole) > 4f64.to_radians()
    });
    apodize(&binary, TaperKind::C2, 4f64.to_radians()).unwrap()
}

/// Gaussian sky of the demo spectrum (unit variance) plus 0.5, seeded.
fn sky(seed: u64) -> SkyMap {
    let recipe = SkyRecipe::gaussian(
        NSIDE,
        AngularSpectrum::demo_model(3 * NSIDE as usize - 1, 1.0),
        seed,
    );
    let sht = recipe.transform().unwrap();
    let m = recipe.realise(&sht, 0).unwrap();
    SkyMap::new(
        m.pixelization(),
        m.values().iter().map(|v| v + 0.5).collect(),
    )
    .unwrap()
}

fn synthesis(statistics: StatisticChoice, iterations: u64, start: StartField) -> SphereSynthesis {
    synthesis_with(statistics, iterations, start, false)
}

fn synthesis_with(
    statistics: StatisticChoice,
    iterations: u64,
    start: StartField,
    field_envelope_correlation: bool,
) -> SphereSynthesis {
    let s = SynthesisSettings {
        statistics,
        iterations,
        start,
        seed: 11,
        field_envelope_correlation,
        ..SynthesisSettings::default()
    };
    SphereSynthesis::new(
        Pixelization::new(NSIDE, Ordering::Ring).unwrap(),
        &footprint(),
        settings(),
        s,
    )
    .unwrap()
}

fn loss(s: &SphereSynthesis, target: &SphereTarget, values: &[f64]) -> f64 {
    s.loss_and_gradient(target, values).unwrap().0
}

/// With and without the sign-sensitive terms (field–envelope correlations and the one-point
/// term, whose gradient also runs through the sampling adjoint).
#[test]
fn pooled_loss_gradient_matches_central_differences() {
    for (statistics, correlations) in [
        (StatisticChoice::Full, false),
        (StatisticChoice::Summary, false),
        (StatisticChoice::Full, true),
        (StatisticChoice::Summary, true),
    ] {
        let s = synthesis_with(statistics, 10, StartField::White, correlations);
        let target = s.target_from_map(&sky(1)).unwrap();
        let point = sky(2);
        let values = point.values().to_vec();
        let (value, grad) = s.loss_and_gradient(&target, &values).unwrap();
        // a few footprint pixels: the first, the middle, the last and the largest gradient
        let vars = s.variables();
        let largest = *vars
            .iter()
            .max_by(|&&a, &&b| grad[a].abs().total_cmp(&grad[b].abs()))
            .unwrap();
        let picks = [vars[0], vars[vars.len() / 2], vars[vars.len() - 1], largest];
        let h = 1e-4;
        for &p in &picks {
            let mut up = values.clone();
            up[p] += h;
            let mut down = values.clone();
            down[p] -= h;
            let fd = (loss(&s, &target, &up) - loss(&s, &target, &down)) / (2.0 * h);
            let rel = (grad[p] - fd).abs() / fd.abs().max(1e-12);
            // the rounding error of a central difference, about ε·|f|/h (Nocedal & Wright,
            // Numerical Optimization, 2nd ed., 2006, §8.1), allowed ten times over: it sets the
            // floor of the comparison at pixels whose own derivative is small
            let rounding = 10.0 * f64::EPSILON * value.abs() / h;
            println!(
                "{statistics:?}, correlations {correlations}, pixel {p}: analytic {:.10e}, central difference {fd:.10e}, relative {rel:.1e}, rounding floor {rounding:.1e}",
                grad[p]
            );
            assert!(fd.abs() > 1e-8, "pixel {p} does not move the loss");
            assert!(
                (grad[p] - fd).abs() <= 1e-6 * fd.abs() + rounding,
                "{statistics:?} pixel {p}: relative error {rel}"
            );
        }
        // a pixel far outside the footprint is read by no tile
        let far = point
            .pixelization()
            .pixel_of(Direction::from_lonlat_deg(220.0, -50.0)) as usize;
        assert_eq!(grad[far], 0.0);
    }
}

/// The sign-sensitive part alone: the loss with the correlations minus the loss without them
/// is Σ_j ((C_j − T_j)/σ_j)² plus the one-point shape's two terms, whose gradient (the difference of the two gradients) must match
/// central differences of that difference.
#[test]
fn correlation_part_of_the_loss_gradient_matches_central_differences() {
    let with = synthesis_with(StatisticChoice::Full, 10, StartField::White, true);
    let without = synthesis_with(StatisticChoice::Full, 10, StartField::White, false);
    let target_map = sky(1);
    let t_with = with.target_from_map(&target_map).unwrap();
    let t_without = without.target_from_map(&target_map).unwrap();
    // J = 3 correlations, the one-point C_pix, skewness and kurtosis
    assert_eq!(
        t_with.matched.values.len(),
        t_without.matched.values.len() + 3 + 1 + 2
    );
    let values = sky(2).values().to_vec();
    let part = |v: &[f64]| loss(&with, &t_with, v) - loss(&without, &t_without, v);
    let g_with = with.loss_and_gradient(&t_with, &values).unwrap().1;
    let g_without = without.loss_and_gradient(&t_without, &values).unwrap().1;
    let grad: Vec<f64> = g_with.iter().zip(&g_without).map(|(a, b)| a - b).collect();
    let vars = with.variables();
    let largest = *vars
        .iter()
        .max_by(|&&a, &&b| grad[a].abs().total_cmp(&grad[b].abs()))
        .unwrap();
    let h = 1e-4;
    for p in [vars[0], vars[vars.len() / 2], largest] {
        let mut up = values.clone();
        up[p] += h;
        let mut down = values.clone();
        down[p] -= h;
        let fd = (part(&up) - part(&down)) / (2.0 * h);
        let rel = (grad[p] - fd).abs() / fd.abs().max(1e-12);
        println!(
            "correlation part, pixel {p}: analytic {:.10e}, central difference {fd:.10e}, relative {rel:.1e}",
            grad[p]
        );
        assert!(
            fd.abs() > 1e-8,
            "pixel {p} does not move the correlation part"
        );
        assert!(rel <= 1e-6, "pixel {p}: relative error {rel}");
    }
}

#[test]
fn synthesis_from_white_noise_reproduces_the_pooled_coefficients() {
    let s = synthesis(StatisticChoice::Full, 300, StartField::White);
    let target_map = sky(1);
    let target = s.target_from_map(&target_map).unwrap();
    let outcome = s.synthesise(&target).unwrap();
    // measured again through the measuring engine, independently of the differentiable path
    let measurer =
        SphereMeasurer::new(outcome.map.pixelization(), &footprint(), settings()).unwrap();
    let stats = |m: &SkyMap| -> Vec<f64> {
        measurer
            .measure(m, &footprint())
            .unwrap()
            .coefficients
            .coefficients[1..]
            .iter()
            .map(|c| c.value)
            .collect()
    };
    let worst = |got: &[f64]| {
        got.iter()
            .zip(&target.matched.values)
            .map(|(a, t)| (a - t).abs() / t.abs())
            .fold(0.0, f64::max)
    };
    let before = worst(&stats(&outcome.start));
    let after = worst(&stats(&outcome.map));
    println!(
        "{} statistics, {} pixels, {} tiles: max |s - T|/|T| {before:.3e} at the start, {after:.3e} after {} iterations (loss {:.3e} -> {:.3e})",
        target.matched.values.len(),
        s.variables().len(),
        s.tile_count(),
        outcome.report.iterations,
        outcome.report.initial_loss,
        outcome.report.final_loss
    );
    assert!(before > 0.05, "the start is already close: {before}");
    assert!(after <= 0.01, "max relative deviation {after}");
    assert!((outcome.report.max_relative_deviation - after).abs() < 1e-9);
}

#[test]
fn pixels_outside_the_footprint_are_never_changed() {
    let s = synthesis(StatisticChoice::Summary, 15, StartField::Gaussian);
    let target = s.target_from_map(&sky(1)).unwrap();
    let outcome = s.synthesise(&target).unwrap();
    let fp = s.footprint();
    let mut inside_changed = 0;
    for (p, (&a, &b)) in outcome
        .map
        .values()
        .iter()
        .zip(outcome.start.values())
        .enumerate()
    {
        if fp.weights()[p] > 0.0 {
            inside_changed += usize::from(a != b);
        } else {
            assert_eq!(a.to_bits(), b.to_bits(), "pixel {p} outside changed");
        }
    }
    assert!(inside_changed > s.variables().len() / 2);
}

#[test]
fn same_seed_gives_identical_bits_on_any_thread_count() {
    let run = |threads: usize| {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap();
        pool.install(|| {
            let s = synthesis(StatisticChoice::Full, 5, StartField::Gaussian);
            let target = s.target_from_map(&sky(1)).unwrap();
            s.synthesise(&target).unwrap()
        })
    };
    let a = run(1);
    let b = run(2);
    let c = run(2);
    let bits = |m: &SkyMap| m.values().iter().map(|v| v.to_bits()).collect::<Vec<u64>>();
    assert_eq!(bits(&a.start), bits(&b.start));
    assert_eq!(bits(&a.map), bits(&b.map));
    assert_eq!(bits(&b.map), bits(&c.map));
    assert_eq!(a.report.final_loss.to_bits(), b.report.final_loss.to_bits());
    assert!(a.report.final_loss < a.report.initial_loss);
}

#[test]
fn wrong_inputs_are_errors() {
    let s = synthesis(StatisticChoice::Full, 5, StartField::White);
    let other = Pixelization::new(16, Ordering::Ring).unwrap();
    let small = SkyMap::from_fn(other, |d| d.theta.cos());
    assert!(s.target_from_map(&small).is_err());
    let empty = Footprint::from_weights(
        Pixelization::new(NSIDE, Ordering::Ring).unwrap(),
        vec![0.0; (12 * NSIDE * NSIDE) as usize],
    )
    .unwrap();
    assert!(SphereSynthesis::new(
        Pixelization::new(NSIDE, Ordering::Ring).unwrap(),
        &empty,
        settings(),
        SynthesisSettings::default()
    )
    .is_err());
    let target = s.target_from_map(&sky(1)).unwrap();
    let mut bad = sky(2).values().to_vec();
    bad[s.variables()[0]] = f64::NAN;
    assert!(s.loss_and_gradient(&target, &bad).is_err());
}
