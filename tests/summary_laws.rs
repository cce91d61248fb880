//! Exact laws of the orientation-harmonic summary (src/scattering/statistics.rs) and its adjoint.
//!
//! Sources: a quarter turn of a periodic square grid maps the sampled filter bank onto itself,
//! shifting l by L/2 (common practice; the coefficient-level law is in
//! tests/scattering_symmetry.rs); θ_l = πl/L with the modulus π-periodic in θ, so a turn by
//! π/L is the cyclic shift l → l + 1 of every orientation index (definition of the bank);
//! the modulus is homogeneous of degree 1 and circular convolution commutes with integer
//! translations (common practice); the adjoint is checked against central differences
//! (definition of the derivative).

use planisphere::measure::flat::{gaussian_random_field, periodic_coefficients, FlatMap};
use planisphere::scattering::statistics::{
    CoefficientLayout, CoefficientSet, OrientationSummary, SummaryStatistic,
};
use planisphere::scattering::transform::{ScatteringEngine, TransformSettings};

const N: usize = 64;
const J: usize = 5;

/// A non-Gaussian, anisotropic periodic field: a squared Gaussian field stretched along x, plus
/// a weaker isotropic part and a mean.
fn map(seed: u64) -> FlatMap {
    let g =
        gaussian_random_field(N, 1e-3, &|k: f64| 1.0 / (1.0 + (k / 800.0).powi(2)), seed).unwrap();
    let v = g.values();
    let out = (0..N * N)
        .map(|i| {
            let (x, y) = (i % N, i / N);
            let smear = (v[i] + v[y * N + (x + 1) % N] + v[y * N + (x + 2) % N]) / 3.0;
            smear * smear + 0.3 * v[i] + 2.0
        })
        .collect();
    FlatMap::new(N, 1e-3, out).unwrap()
}

fn transformed(m: &FlatMap, f: impl Fn(usize, usize) -> (usize, usize)) -> FlatMap {
    let v = m.values();
    let out = (0..N * N)
        .map(|i| {
            let (sx, sy) = f(i % N, i / N);
            v[sy * N + sx]
        })
        .collect();
    FlatMap::new(N, m.pixel_size(), out).unwrap()
}

fn engines(l_count: usize) -> Vec<ScatteringEngine> {
    let full = ScatteringEngine::with_settings(
        N,
        J,
        l_count,
        TransformSettings {
            fourier_cropping: false,
            ..Default::default()
        },
    )
    .unwrap();
    vec![full, ScatteringEngine::new(N, J, l_count).unwrap()]
}

fn is_amplitude(name: &str) -> bool {
    name == "mean" || name == "rms" || (name.starts_with("modulus_j"))
}

/// Largest deviation: relative for amplitudes, absolute for the dimensionless items (all O(1)).
fn worst(a: &[SummaryStatistic], b: &[SummaryStatistic]) -> f64 {
    a.iter()
        .zip(b)
        .map(|(x, y)| {
            assert_eq!(x.name, y.name);
            let d = (x.value - y.value).abs();
            if is_amplitude(&x.name) {
                d / y.value.abs()
            } else {
                d
            }
        })
        .fold(0.0, f64::max)
}

fn summary(engine: &ScatteringEngine, m: &FlatMap) -> Vec<SummaryStatistic> {
    periodic_coefficients(engine, m).unwrap().summary().unwrap()
}

#[test]
fn quarter_turn_leaves_every_item_unchanged_for_two_and_four_orientations() {
    // L = 4: a quarter turn is a shift by 2 orientations; L = 2: it is the turn by π/L itself.
    let m = map(4);
    let rotated = transformed(&m, |x, y| (y, (N - x) % N));
    for l_count in [2usize, 4] {
        for engine in engines(l_count) {
            let a = summary(&engine, &m);
            let b = summary(&engine, &rotated);
            let d = worst(&b, &a);
            // not a no-op: the field is anisotropic
            let aniso = a
                .iter()
                .find(|s| s.name == "modulus_anisotropy_j1")
                .unwrap()
                .value;
            println!(
                "L = {l_count} {:?}: worst {d:.2e}, modulus_anisotropy_j1 {aniso:.3}",
                engine.crop_levels()
            );
            assert!(d < 1e-12, "L = {l_count}: {d}");
            assert!(aniso > 1e-3);
        }
    }
}

/// The full set with every orientation index moved by one: what a turn by π/L does.
fn shifted_by_one(set: &CoefficientSet) -> CoefficientSet {
    let ln = set.orientation_count;
    let mut out = set.clone();
    for (c, label) in out
        .coefficients
        .iter_mut()
        .zip(CoefficientLayout::new(set.scale_count, ln).labels())
    {
        let from = |l: Option<usize>| l.map(|l| (l + ln - 1) % ln);
        let src = planisphere::scattering::statistics::CoefficientLabel {
            path: planisphere::scattering::WaveletPath {
                l1: from(label.path.l1),
                l2: from(label.path.l2),
                ..label.path
            },
            ..label
        };
        *c = *set.get(&src).unwrap();
        c.label = label;
    }
    out
}

#[test]
fn turn_by_pi_over_l_leaves_every_item_unchanged_for_any_orientation_count() {
    for l_count in [2usize, 3, 4, 5, 6, 8] {
        let engine = ScatteringEngine::new(N, 4, l_count).unwrap();
        let set = periodic_coefficients(&engine, &map(7)).unwrap();
        let turned = shifted_by_one(&set);
        assert_ne!(turned.coefficients, set.coefficients);
        let d = worst(&turned.summary().unwrap(), &set.summary().unwrap());
        println!("L = {l_count}: worst {d:.2e}");
        assert!(d < 1e-13, "L = {l_count}: {d}");
    }
}

#[test]
fn scaling_the_field_scales_amplitudes_and_leaves_dimensionless_items_unchanged() {
    let m = map(5);
    for a in [3.7f64, -0.4] {
        let scaled = FlatMap::new(
            N,
            m.pixel_size(),
            m.values().iter().map(|v| a * v).collect(),
        )
        .unwrap();
        for engine in engines(4) {
            let base = summary(&engine, &m);
            let s = summary(&engine, &scaled);
            let mut worst: f64 = 0.0;
            for (x, y) in s.iter().zip(&base) {
                let want = match x.name.as_str() {
                    "mean" => a * y.value,
                    n if is_amplitude(n) => a.abs() * y.value,
                    _ => y.value,
                };
                worst = worst.max((x.value - want).abs() / want.abs().max(1.0));
            }
            println!("a = {a}: worst {worst:.2e}");
            assert!(worst < 1e-12, "a = {a}: {worst}");
        }
    }
}

#[test]
fn translating_the_field_leaves_every_item_unchanged() {
    let m = map(3);
    let engines = engines(4);
    // full-resolution path: any integer shift; cropped path: multiples of its coarsest stride
    let stride = 1 << engines[1].crop_levels().iter().max().unwrap();
    for (engine, (dx, dy)) in engines.iter().zip([(5, N - 11), (3 * stride, stride)]) {
        let shifted = transformed(&m, |x, y| ((x + dx) % N, (y + dy) % N));
        let d = worst(&summary(engine, &shifted), &summary(engine, &m));
        println!("shift ({dx}, {dy}): worst {d:.2e}");
        assert!(d < 1e-12, "{d}");
    }
}

#[test]
fn adjoint_matches_central_differences() {
    for l_count in [2usize, 3, 4] {
        let engine = ScatteringEngine::new(N, 3, l_count).unwrap();
        let set = periodic_coefficients(&engine, &map(9)).unwrap();
        let c: Vec<f64> = set.coefficients.iter().map(|x| x.value).collect();
        let layout = OrientationSummary::new(3, l_count).unwrap();
        // weights of a generic linear functional of the items
        let dv: Vec<f64> = (0..layout.len())
            .map(|k| ((k * 7919 % 13) as f64 - 6.0) / 5.0)
            .collect();
        let f = |c: &[f64]| -> f64 { layout.values(c).iter().zip(&dv).map(|(v, w)| v * w).sum() };
        let grad = layout.adjoint(&c, &dv);
        let scale = grad.iter().fold(0.0_f64, |a, g| a.max(g.abs()));
        let mut worst: f64 = 0.0;
        for i in 0..c.len() {
            let h = 1e-5 * c[i].abs().max(1e-12);
            let (mut p, mut m) = (c.clone(), c.clone());
            p[i] += h;
            m[i] -= h;
            let numeric = (f(&p) - f(&m)) / (2.0 * h);
            worst = worst.max((numeric - grad[i]).abs() / scale);
        }
        println!(
            "L = {l_count}: worst |adjoint − central difference| / max |gradient| = {worst:.2e}"
        );
        assert!(worst < 1e-7, "L = {l_count}: {worst}");
        assert!(scale > 0.0);
    }
}
