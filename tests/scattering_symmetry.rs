//! Symmetry laws of the scattering transform on periodic flat maps (common practice: the
//! circular convolution commutes with integer translations and with the 90° rotations that map
//! the sampled filter bank onto itself, ψ_{l+L/2} = ψ_l rotated by 90°; the modulus is
//! homogeneous of degree 1).

use planisphere::measure::flat::{gaussian_random_field, periodic_coefficients, FlatMap};
use planisphere::scattering::statistics::{CoefficientKind, CoefficientSet};
use planisphere::scattering::transform::{ScatteringEngine, TransformSettings};

const N: usize = 64;
const J: usize = 5;

fn map(seed: u64) -> FlatMap {
    // Non-Gaussian: squared Gaussian field plus a mean offset.
    let g =
        gaussian_random_field(N, 1e-3, &|k: f64| 1.0 / (1.0 + (k / 800.0).powi(2)), seed).unwrap();
    let v = g.values().iter().map(|x| x * x + 0.3 * x + 2.0).collect();
    FlatMap::new(N, 1e-3, v).unwrap()
}

fn engines(l_count: usize) -> [ScatteringEngine; 2] {
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
    let cropped = ScatteringEngine::new(N, J, l_count).unwrap();
    assert!(cropped.crop_levels().iter().any(|&d| d > 0));
    [full, cropped]
}

fn relative(a: f64, b: f64) -> f64 {
    (a - b).abs() / b.abs().max(1e-300)
}

fn max_deviation(a: &CoefficientSet, b: &CoefficientSet) -> f64 {
    a.coefficients
        .iter()
        .zip(&b.coefficients)
        .map(|(x, y)| relative(x.value, y.value))
        .fold(0.0, f64::max)
}

fn transformed(m: &FlatMap, f: impl Fn(usize, usize) -> (usize, usize)) -> FlatMap {
    // new(x, y) = old(f(x, y))
    let v = m.values();
    let out = (0..N * N)
        .map(|i| {
            let (sx, sy) = f(i % N, i / N);
            v[sy * N + sx]
        })
        .collect();
    FlatMap::new(N, m.pixel_size(), out).unwrap()
}

#[test]
fn integer_translation_leaves_periodic_coefficients_unchanged() {
    let m = map(3);
    let [full, cropped] = engines(4);
    let base = periodic_coefficients(&full, &m).unwrap();
    let shifted = transformed(&m, |x, y| ((x + 5) % N, (y + N - 11) % N));
    let d = max_deviation(&periodic_coefficients(&full, &shifted).unwrap(), &base);
    println!("full-resolution path, shift (5, -11): {d:.2e}");
    assert!(d < 1e-12, "{d}");
    // The cropped path samples coarse scales every 2^d pixels: shifts by multiples of the
    // coarsest stride are exact symmetries of it too.
    let stride = 1 << cropped.crop_levels().iter().max().unwrap();
    let base_c = periodic_coefficients(&cropped, &m).unwrap();
    let shifted = transformed(&m, |x, y| ((x + 3 * stride) % N, (y + stride) % N));
    let d = max_deviation(&periodic_coefficients(&cropped, &shifted).unwrap(), &base_c);
    println!("cropped path, shift by multiples of {stride}: {d:.2e}");
    assert!(d < 1e-12, "{d}");
}

#[test]
fn quarter_turn_rotation_shifts_orientation_by_half_of_l() {
    for l_count in [4usize, 8] {
        let m = map(4);
        // new(x, y) = old(y, −x mod N): a quarter turn about pixel (0, 0) (determinant +1), which
        // maps every coarse sampling lattice onto itself.
        let rotated = transformed(&m, |x, y| (y, (N - x) % N));
        for engine in engines(l_count).iter() {
            let a = periodic_coefficients(engine, &m).unwrap();
            let b = periodic_coefficients(engine, &rotated).unwrap();
            let h = l_count / 2;
            let mut worst: f64 = relative(b.variance().value, a.variance().value);
            for j1 in 0..J {
                for l1 in 0..l_count {
                    let r1 = (l1 + h) % l_count;
                    worst = worst
                        .max(relative(
                            b.first_order(j1, r1).value,
                            a.first_order(j1, l1).value,
                        ))
                        .max(relative(
                            b.band_power(j1, r1).value,
                            a.band_power(j1, l1).value,
                        ));
                    for j2 in (j1 + 1)..J {
                        for l2 in 0..l_count {
                            let r2 = (l2 + h) % l_count;
                            worst = worst.max(relative(
                                b.second_order(j1, r1, j2, r2).value,
                                a.second_order(j1, l1, j2, l2).value,
                            ));
                        }
                    }
                }
            }
            // And the shift is not a no-op: orientations do differ on this map.
            let spread = relative(a.first_order(1, 0).value, a.first_order(1, h).value);
            println!(
                "L = {l_count} {:?}: worst {worst:.2e}, orientation spread {spread:.2e}",
                engine.crop_levels()
            );
            assert!(worst < 1e-12, "L = {l_count}: {worst}");
            assert!(spread > 1e-6);
        }
    }
}

#[test]
fn scaling_the_map_scales_coefficients_by_their_degree() {
    let m = map(5);
    let a = -2.5f64;
    let scaled = FlatMap::new(
        N,
        m.pixel_size(),
        m.values().iter().map(|v| a * v).collect(),
    )
    .unwrap();
    for engine in engines(4).iter() {
        let base = periodic_coefficients(engine, &m).unwrap();
        let s = periodic_coefficients(engine, &scaled).unwrap();
        for (x, y) in s.coefficients.iter().zip(&base.coefficients) {
            let factor = match x.label.kind {
                CoefficientKind::Mean => a,
                CoefficientKind::Variance | CoefficientKind::BandPower => a * a,
                CoefficientKind::FirstOrder | CoefficientKind::SecondOrder => a.abs(),
            };
            let d = relative(x.value, factor * y.value);
            assert!(d < 1e-12, "{:?}: {d}", x.label);
        }
    }
}
