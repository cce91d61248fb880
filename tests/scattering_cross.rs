//! Cross statistics of two flat fields on one tile (`ScatteringEngine::transform_tile_pair`):
//! identities of the cross band power, the Gaussian correlation identity, and vanishing of the
//! cross moments where Gaussian statistics say they vanish (definitions in src/scattering/transform.rs).

mod common;

use common::holey_taper;
use planisphere::measure::flat::{gaussian_random_field, wavenumber};
use planisphere::scattering::pooling::{pooled_coefficients, pooled_cross_coefficients};
use planisphere::scattering::statistics::{
    CoefficientSet, CrossCoefficientSet, CrossDirection, CrossKind,
};
use planisphere::scattering::transform::{ScatteringEngine, TilePairView, TileView};

const N: usize = 64;
const J: usize = 4;
const L: usize = 4;
const PIXEL: f64 = 2.0e-4;

fn spectrum(k: f64) -> f64 {
    1.0e-8 / (1.0 + (k / 4000.0).powi(2))
}

/// A 64² footprint: 4-pixel masked border and two holes, C2-apodized over 4 pixels.
fn holed_taper() -> Vec<f64> {
    holey_taper(N, 4.0, &[(20.0, 22.0, 6.0), (44.0, 40.0, 5.0)], 4.0)
}

fn field(seed: u64) -> Vec<f64> {
    gaussian_random_field(N, PIXEL, &spectrum, seed)
        .unwrap()
        .values()
        .to_vec()
}

struct Pair {
    first: CoefficientSet,
    second: CoefficientSet,
    cross: CrossCoefficientSet,
}

fn pair(engine: &ScatteringEngine, a: &[f64], b: &[f64], taper: &[f64]) -> Pair {
    let sums = engine
        .transform_tile_pair(&TilePairView {
            first: a,
            second: b,
            taper,
            weight: taper,
        })
        .unwrap();
    Pair {
        first: pooled_coefficients(engine, &sums.first).unwrap(),
        second: pooled_coefficients(engine, &sums.second).unwrap(),
        cross: pooled_cross_coefficients(engine, &sums.cross).unwrap(),
    }
}

/// Ensemble mean and standard error of each entry of equally long rows.
fn mean_se(rows: &[Vec<f64>]) -> (Vec<f64>, Vec<f64>) {
    let k = rows.len() as f64;
    let m = rows[0].len();
    let mean: Vec<f64> = (0..m)
        .map(|i| rows.iter().map(|r| r[i]).sum::<f64>() / k)
        .collect();
    let se = (0..m)
        .map(|i| {
            let var = rows.iter().map(|r| (r[i] - mean[i]).powi(2)).sum::<f64>() / (k - 1.0);
            (var / k).sqrt()
        })
        .collect();
    (mean, se)
}

#[test]
fn pair_transform_reproduces_both_auto_transforms_bitwise_and_cross_band_power_of_a_map_with_itself_is_its_band_power(
) {
    // Identity: with B = A, Re[g_A conj g_A]/N = |g_A|²/N, the auto band power (definition).
    let engine = ScatteringEngine::new(N, J, L).unwrap();
    let ones = vec![1.0; N * N];
    let holed = holed_taper();
    let (a, b) = (field(11), field(12));
    for taper in [&ones, &holed] {
        let sums = engine
            .transform_tile_pair(&TilePairView {
                first: &a,
                second: &b,
                taper,
                weight: taper,
            })
            .unwrap();
        for (f, got) in [(&a, &sums.first), (&b, &sums.second)] {
            let alone = engine
                .transform_tile(&TileView {
                    field: f,
                    taper,
                    weight: taper,
                })
                .unwrap();
            assert_eq!(
                &alone, got,
                "auto sums of the pair path differ from the single path"
            );
        }
        let same = pair(&engine, &a, &a, taper);
        for j in 0..J {
            for l in 0..L {
                let p = same.first.band_power(j, l);
                let x = same.cross.band_power(j, l);
                assert!(
                    ((x.value - p.value) / p.value).abs() < 1e-12,
                    "j {j} l {l}: {} vs {}",
                    x.value,
                    p.value
                );
                assert_eq!(x.trusted, p.trusted);
                assert_eq!(x.kept_weight_fraction, p.kept_weight_fraction);
            }
        }
    }
}

#[test]
fn cross_statistics_are_linear_in_the_field_and_scale_with_the_modulus() {
    // Linearity of convolution (common practice): g_{cB} = c g_B, U^{cB} = |c| U^B, so
    // P_{A,cB} = c P_AB, X1_{A←cB} = |c| X1_{A←B}, X1_{cB←A} = c X1_{B←A}, and
    // P_{A+A',B} = P_AB + P_{A'B}.
    let engine = ScatteringEngine::new(N, J, L).unwrap();
    let taper = holed_taper();
    let (a, a2, b) = (field(21), field(22), field(23));
    let c = -2.5;
    let cb: Vec<f64> = b.iter().map(|v| c * v).collect();
    let sum: Vec<f64> = a.iter().zip(&a2).map(|(x, y)| x + y).collect();
    let base = pair(&engine, &a, &b, &taper).cross;
    let scaled = pair(&engine, &a, &cb, &taper).cross;
    let other = pair(&engine, &a2, &b, &taper).cross;
    let summed = pair(&engine, &sum, &b, &taper).cross;
    let close = |x: f64, y: f64, size: f64| (x - y).abs() <= 1e-10 * size;
    let size = base
        .coefficients
        .iter()
        .fold(0.0f64, |m, c| m.max(c.value.abs()));
    assert!(size > 0.0);
    for (i, x) in base.coefficients.iter().enumerate() {
        let expected = match (x.label.kind, x.label.direction) {
            (CrossKind::CrossBandPower, _) => c * x.value,
            (_, CrossDirection::FirstAgainstSecondModulus) => c.abs() * x.value,
            _ => c * x.value,
        };
        let got = scaled.coefficients[i].value;
        assert!(
            close(got, expected, size * c.abs()),
            "{}: {got} vs {expected}",
            x.label.name()
        );
    }
    for j in 0..J {
        for l in 0..L {
            let lhs = summed.band_power(j, l).value;
            let rhs = base.band_power(j, l).value + other.band_power(j, l).value;
            assert!(close(lhs, rhs, size), "j {j} l {l}: {lhs} vs {rhs}");
        }
    }
}

#[test]
fn correlated_gaussian_fields_have_cross_band_power_r_times_the_geometric_mean_of_the_autos() {
    // For A = X, B = r X + √(1 − r²) Y with X, Y independent Gaussian fields of one spectrum P,
    // the cross spectrum is r P, so E[P_AB] = r √(E P_AA · E P_BB) (Gaussian identity, common
    // practice; the √ of the per-field product is biased, so the check uses ensemble means) and E[P_AB] = r Σ_q P(k_q) ψ̂_q² / (nΔ)² (Parseval, as the auto band power in
    // tests/scattering_gaussian.rs). Checked periodic and on a holed footprint.
    let engine = ScatteringEngine::new(N, J, L).unwrap();
    let bank = engine.bank();
    let r = 0.6;
    let s = (1.0f64 - r * r).sqrt();
    let fields = 96;
    let ones = vec![1.0; N * N];
    let holed = holed_taper();
    for (name, taper) in [("periodic", &ones), ("holed", &holed)] {
        let mut rows = Vec::new();
        let mut ratio_rows = Vec::new();
        let mut trusted = [true; J * L];
        for k in 0..fields {
            let x = field(1000 + 2 * k);
            let y = field(1001 + 2 * k);
            let b: Vec<f64> = x.iter().zip(&y).map(|(x, y)| r * x + s * y).collect();
            let p = pair(&engine, &x, &b, taper);
            let mut row = Vec::new();
            let mut ratio = Vec::new();
            for j in 0..J {
                for l in 0..L {
                    let pab = p.cross.band_power(j, l);
                    let paa = p.first.band_power(j, l).value;
                    let pbb = p.second.band_power(j, l).value;
                    trusted[j * L + l] &= pab.trusted;
                    row.push(pab.value);
                    // E P_AA = E P_BB (r² + s² = 1), so r√(E P_AA E P_BB) = r (E P_AA + E P_BB)/2:
                    // a linear per-field statistic with an unbiased ensemble mean
                    ratio.push(pab.value - r * (paa + pbb) / 2.0);
                    ratio.push(paa);
                    ratio.push(pbb);
                }
            }
            rows.push(row);
            ratio_rows.push(ratio);
        }
        let (mean, se) = mean_se(&rows);
        let (dmean, dse) = mean_se(&ratio_rows);
        for j in 0..J {
            for l in 0..L {
                let i = j * L + l;
                if !trusted[i] {
                    continue;
                }
                let psi = bank.wavelet(j, l);
                let mut parseval = 0.0;
                for iy in 0..N {
                    for ix in 0..N {
                        if ix + iy > 0 {
                            parseval +=
                                spectrum(wavenumber(ix, iy, N, PIXEL)) * psi[iy * N + ix].powi(2);
                        }
                    }
                }
                let expected = r * parseval / (N as f64 * PIXEL).powi(2);
                let geometric = r * (dmean[3 * i + 1] * dmean[3 * i + 2]).sqrt();
                if l == 0 {
                    println!(
                    "{name} j {j} l {l}: P_AB {:.4e} ± {:.1e}, r·√(P_AA P_BB) {geometric:.4e}, r·Parseval {expected:.4e}, t = {:.2}",
                    mean[i], se[i], dmean[3 * i] / dse[3 * i]
                );
                }
                assert!(
                    (mean[i] - expected).abs() < 3.5 * se[i] + 0.02 * expected,
                    "{name} j {j} l {l}: {} vs {expected} ± {}",
                    mean[i],
                    se[i]
                );
                assert!(
                    dmean[3 * i].abs() < 3.5 * dse[3 * i],
                    "{name} j {j} l {l}: P_AB − r (P_AA + P_BB)/2 = {} ± {}",
                    dmean[3 * i],
                    dse[3 * i]
                );
                // a wrong r is rejected: the check has power
                assert!((mean[i] - geometric / r * 0.4).abs() > 3.5 * se[i]);
            }
        }
    }
}

/// Mean and standard error of every cross coefficient over pairs (fa(k), fb(k)).
fn cross_ensemble(
    engine: &ScatteringEngine,
    taper: &[f64],
    pairs: u64,
    make: impl Fn(u64) -> (Vec<f64>, Vec<f64>),
) -> (CrossCoefficientSet, Vec<f64>, Vec<f64>) {
    let mut rows = Vec::new();
    let mut last = None;
    for k in 0..pairs {
        let (a, b) = make(k);
        let p = pair(engine, &a, &b, taper);
        rows.push(p.cross.coefficients.iter().map(|c| c.value).collect());
        last = Some(p.cross);
    }
    let (mean, se) = mean_se(&rows);
    (last.expect("at least one pair"), mean, se)
}

/// Asserts every trusted coefficient of the kinds selected is within 4 standard errors of
/// zero, their mean squared t-statistic is below 2, and returns the largest |t|.
fn assert_consistent_with_zero(
    name: &str,
    set: &CrossCoefficientSet,
    mean: &[f64],
    se: &[f64],
    select: impl Fn(CrossKind) -> bool,
) -> f64 {
    let mut worst = 0.0f64;
    let mut t2 = 0.0;
    let mut count = 0;
    for (i, c) in set.coefficients.iter().enumerate() {
        if !c.trusted || !select(c.label.kind) {
            continue;
        }
        assert!(se[i] > 0.0, "{name}: {} has no scatter", c.label.name());
        let t = mean[i] / se[i];
        assert!(
            t.abs() < 4.0,
            "{name}: {} = {} ± {} ({t:.2} σ)",
            c.label.name(),
            mean[i],
            se[i]
        );
        worst = worst.max(t.abs());
        t2 += t * t;
        count += 1;
    }
    assert!(count > 0, "{name}: nothing trusted to check");
    let mean_t2 = t2 / count as f64;
    println!("{name}: {count} coefficients, worst |t| = {worst:.2}, mean t² = {mean_t2:.2}");
    assert!(mean_t2 < 2.0, "{name}: mean t² = {mean_t2}");
    worst
}

#[test]
fn independent_gaussian_fields_have_cross_statistics_consistent_with_zero() {
    // Independent fields: each cross statistic has a zero-mean factor independent of the other
    // (definitions in src/scattering/transform.rs), so its expectation is 0 (common practice).
    let engine = ScatteringEngine::new(N, J, L).unwrap();
    let taper = holed_taper();
    let (set, mean, se) = cross_ensemble(&engine, &taper, 32, |k| {
        (field(5000 + 2 * k), field(5001 + 2 * k))
    });
    assert_consistent_with_zero("independent", &set, &mean, &se, |_| true);
}

#[test]
fn gaussian_field_against_its_own_modulus_vanishes_but_a_lognormal_field_does_not() {
    // A = B Gaussian: X1 and X2 are odd under I → −I, which leaves U unchanged, so both have
    // zero expectation (odd moments of a Gaussian vanish, common practice). A lognormal field
    // exp(g) is positively skewed: its fluctuations are larger where it is high, so
    // X1_{A←A} > 0 — the check detects a cross moment that is there.
    let engine = ScatteringEngine::new(N, J, L).unwrap();
    let taper = holed_taper();
    let envelope = |kind| kind != CrossKind::CrossBandPower;
    let (set, mean, se) = cross_ensemble(&engine, &taper, 32, |k| {
        let f = field(7000 + k);
        (f.clone(), f)
    });
    assert_consistent_with_zero("A = B Gaussian", &set, &mean, &se, envelope);

    let (set, mean, se) = cross_ensemble(&engine, &taper, 16, |k| {
        let g = field(7000 + k);
        let sd = (g.iter().map(|v| v * v).sum::<f64>() / g.len() as f64).sqrt();
        let f: Vec<f64> = g.iter().map(|v| (v / sd).exp()).collect();
        (f.clone(), f)
    });
    let mut detected = 0;
    for (i, c) in set.coefficients.iter().enumerate() {
        if c.trusted && c.label.kind == CrossKind::EnvelopeFirstOrder {
            let t = mean[i] / se[i];
            if c.label.path.l1 == Some(0)
                && c.label.direction == CrossDirection::FirstAgainstSecondModulus
            {
                println!(
                    "lognormal X1 j {}: {:.4e} ({t:.1} σ)",
                    c.label.path.j1.unwrap_or(0),
                    mean[i]
                );
            }
            if t > 5.0 {
                detected += 1;
            }
        }
    }
    assert!(detected > 0, "no positive X1 found for a lognormal field");
}

/// Separable plain DFT of a row-major n × n complex array (sign −1 forward, +1 inverse,
/// unnormalised), written from the definition, independent of the crate's FFT code.
fn dft2(data: &[(f64, f64)], n: usize, inverse: bool) -> Vec<(f64, f64)> {
    let sign = if inverse { 1.0 } else { -1.0 };
    let tw: Vec<(f64, f64)> = (0..n)
        .map(|t| {
            let ang = sign * 2.0 * std::f64::consts::PI * t as f64 / n as f64;
            (ang.cos(), ang.sin())
        })
        .collect();
    let pass = |src: &[(f64, f64)], rows: bool| -> Vec<(f64, f64)> {
        let mut out = vec![(0.0, 0.0); n * n];
        for a in 0..n {
            for k in 0..n {
                let (mut re, mut im) = (0.0, 0.0);
                for x in 0..n {
                    let v = if rows { src[a * n + x] } else { src[x * n + a] };
                    let w = tw[(k * x) % n];
                    re += v.0 * w.0 - v.1 * w.1;
                    im += v.0 * w.1 + v.1 * w.0;
                }
                if rows {
                    out[a * n + k] = (re, im);
                } else {
                    out[k * n + a] = (re, im);
                }
            }
        }
        out
    };
    pass(&pass(data, true), false)
}

/// Periodic convolution of a real field with the wavelet whose Fourier transform is `psi_hat`.
fn convolve(field: &[f64], psi_hat: &[f64], n: usize) -> Vec<(f64, f64)> {
    let spec = dft2(
        &field.iter().map(|&v| (v, 0.0)).collect::<Vec<_>>(),
        n,
        false,
    );
    let prod: Vec<(f64, f64)> = spec
        .iter()
        .zip(psi_hat)
        .map(|(s, p)| (s.0 * p, s.1 * p))
        .collect();
    let nn = (n * n) as f64;
    dft2(&prod, n, true)
        .into_iter()
        .map(|(re, im)| (re / nn, im / nn))
        .collect()
}

#[test]
fn periodic_cross_statistics_match_a_direct_implementation_of_their_definitions() {
    // With taper 1 and weight 1 the coverage is 1 and the definitions in src/scattering/transform.rs reduce
    // to plain periodic convolutions and means, computed here from the formulas with a plain
    // DFT. Without Fourier cropping the engine must agree to rounding; with cropping (scale 4
    // on a 32² grid) within 1e-3 of the largest value of each kind (the cropping error of the
    // auto path, tests/scattering_cropping.rs, is 2.3e-4).
    let n = N;
    let jn = 5;
    let full = ScatteringEngine::with_settings(
        n,
        jn,
        L,
        planisphere::scattering::transform::TransformSettings {
            fourier_cropping: false,
            ..Default::default()
        },
    )
    .unwrap();
    let cropped = ScatteringEngine::new(n, jn, L).unwrap();
    assert!(cropped.crop_levels().iter().any(|&d| d > 0));
    let bank = full.bank();
    let a = field(31);
    let y = field(32);
    // B correlated with A and modulated by it, so that every cross statistic is non-zero
    let b: Vec<f64> = a
        .iter()
        .zip(&y)
        .map(|(x, y)| 0.5 * x + y * (1.0 + 20.0 * x))
        .collect();
    let mean = |v: &[f64]| v.iter().sum::<f64>() / v.len() as f64;
    let centred = |v: &[f64]| {
        let m = mean(v);
        v.iter().map(|x| x - m).collect::<Vec<f64>>()
    };
    let inputs = [centred(&a), centred(&b)];
    let g: Vec<Vec<Vec<(f64, f64)>>> = inputs
        .iter()
        .map(|i| {
            (0..jn * L)
                .map(|k| convolve(i, bank.wavelet(k / L, k % L), n))
                .collect()
        })
        .collect();
    let u: Vec<Vec<Vec<f64>>> = g
        .iter()
        .map(|gs| {
            gs.iter()
                .map(|g| g.iter().map(|z| z.0.hypot(z.1)).collect())
                .collect()
        })
        .collect();
    let mut reference = Vec::with_capacity(full.cross_labels().len());
    for lab in full.cross_labels() {
        let (j1, l1) = (lab.path.j1.unwrap(), lab.path.l1.unwrap());
        let k1 = j1 * L + l1;
        let (field, envelope) = match lab.direction {
            CrossDirection::SecondAgainstFirstModulus => (1, 0),
            _ => (0, 1),
        };
        let value = match lab.kind {
            CrossKind::CrossBandPower => mean(
                &g[0][k1]
                    .iter()
                    .zip(&g[1][k1])
                    .map(|(p, q)| p.0 * q.0 + p.1 * q.1)
                    .collect::<Vec<f64>>(),
            ),
            CrossKind::EnvelopeFirstOrder => {
                let du = centred(&u[envelope][k1]);
                mean(
                    &inputs[field]
                        .iter()
                        .zip(&du)
                        .map(|(i, d)| i * d)
                        .collect::<Vec<f64>>(),
                )
            }
            CrossKind::EnvelopeSecondOrder => {
                let k2 = lab.path.j2.unwrap() * L + lab.path.l2.unwrap();
                let second = convolve(&centred(&u[envelope][k1]), bank.wavelet(k2 / L, k2 % L), n);
                mean(
                    &g[field][k2]
                        .iter()
                        .zip(&second)
                        .map(|(p, q)| p.0 * q.0 + p.1 * q.1)
                        .collect::<Vec<f64>>(),
                )
            }
        };
        reference.push(value);
    }
    let ones = vec![1.0; n * n];
    for engine in [&full, &cropped] {
        let sums = engine
            .transform_tile_pair(&TilePairView {
                first: &a,
                second: &b,
                taper: &ones,
                weight: &ones,
            })
            .unwrap();
        let set = pooled_cross_coefficients(engine, &sums.cross).unwrap();
        let is_full = std::ptr::eq(engine, &full);
        for kind in [
            CrossKind::CrossBandPower,
            CrossKind::EnvelopeFirstOrder,
            CrossKind::EnvelopeSecondOrder,
        ] {
            let idx: Vec<usize> = (0..reference.len())
                .filter(|&i| set.coefficients[i].label.kind == kind)
                .collect();
            let size = idx.iter().fold(0.0f64, |m, &i| m.max(reference[i].abs()));
            assert!(size > 0.0);
            let worst = idx.iter().fold(0.0f64, |m, &i| {
                m.max((set.coefficients[i].value - reference[i]).abs() / size)
            });
            println!(
                "{} {kind:?}: worst |engine − direct| / largest = {worst:.1e}",
                if is_full { "uncropped" } else { "cropped" }
            );
            let tol = if is_full { 1e-10 } else { 1e-3 };
            assert!(worst < tol, "{kind:?}: {worst}");
        }
    }
}
