//! Mask-aware estimator on the sphere: on Gaussian skies, trusted coefficients measured on a
//! partial sky with holes agree with the full-sky coefficients of the same skies (design
//! property of the estimator in src/scattering/transform.rs; the tolerance, 0.5 σ of the partial-sky
//! ensemble scatter, is this crate's acceptance criterion, as in tests/scattering_masked.rs).

mod sphere_support;

use planisphere::measure::measurement::{MeasurementSettings, SphereMeasurer};
use planisphere::scattering::statistics::CoefficientSet;
use planisphere::simulate::skies::SkyRecipe;
use planisphere::{Footprint, Ordering, Pixelization};

/// How the tiles are laid out: coarse HEALPix cells of one NSIDE for both footprints at one map
/// spacing per plane pixel, so that only the mask differs.
#[derive(Clone, Copy)]
enum Layout {
    SameHealpixCells,
    /// The default latitude-band plan of the full sky, used for both footprints.
    FullSkyBands,
}

/// `check_order_means`: also require the mean relative bias of each order (averaged over its
/// trusted coefficients, then over skies) within 2 standard errors of zero.
fn compare(
    nside: u32,
    scales: usize,
    skies: u64,
    hole_deg: f64,
    apo_deg: f64,
    layout: Layout,
    check_order_means: bool,
) {
    let pix = Pixelization::new(nside, Ordering::Ring).unwrap();
    let full = Footprint::full_sky(pix);
    let partial = sphere_support::holed_cap(nside, hole_deg, apo_deg);
    println!(
        "NSIDE {nside}, J = {scales}, {skies} skies, f_sky = {:.3}",
        partial.f_sky()
    );
    assert!((0.25..0.35).contains(&partial.f_sky()));
    // The default trust rule applies: below λ_j ≈ 8 map spacings the interpolated field's
    // power depends on where the tile sits on the HEALPix grid (measured: with the rule
    // lifted, S1(j = 0, l = 0) differs by 3.5 σ between the two footprints), which is not a
    // property of the mask estimator.
    let settings = match layout {
        // The same tile geometry for both footprints.
        Layout::SameHealpixCells => MeasurementSettings {
            scales,
            bispectrum: false,
            coarse_nside: Some(match nside {
                0..=64 => 4,
                65..=128 => 8,
                _ => 16,
            }),
            pixel_arcmin: Some(pix.mean_spacing().to_degrees() * 60.0),
            ..Default::default()
        },
        // The defaults: plane pixels of three map spacings, the map read on a grid three times
        // finer and band-limited, ring-quintic sampling.
        Layout::FullSkyBands => MeasurementSettings {
            scales,
            bispectrum: false,
            ..Default::default()
        },
    };
    let on_full = SphereMeasurer::new(pix, &full, settings).unwrap();
    let on_partial = match layout {
        Layout::SameHealpixCells => SphereMeasurer::new(pix, &partial, settings).unwrap(),
        Layout::FullSkyBands => SphereMeasurer::new(pix, &full, settings).unwrap(),
    };
    let recipe = SkyRecipe::gaussian(nside, sphere_support::spectrum(nside), 77);
    let transform = recipe.transform().unwrap();
    let mut full_sets: Vec<CoefficientSet> = Vec::new();
    let mut partial_sets: Vec<CoefficientSet> = Vec::new();
    for i in 0..skies {
        let map = recipe.realise(&transform, i).unwrap();
        full_sets.push(on_full.measure(&map, &full).unwrap().coefficients);
        partial_sets.push(on_partial.measure(&map, &partial).unwrap().coefficients);
    }
    let count = full_sets[0].coefficients.len();
    let k = skies as f64;
    let mut compared = 0;
    let mut worst = (0.0f64, String::new());
    let mut failures = Vec::new();
    // per order (kind): for every sky, the mean over the kind's trusted coefficients of the
    // relative difference (partial − full) / ⟨full⟩
    let mut per_order: std::collections::BTreeMap<String, (Vec<f64>, usize)> = Default::default();
    for i in 0..count {
        if !partial_sets.iter().all(|s| s.coefficients[i].trusted) {
            continue;
        }
        let label = partial_sets[0].coefficients[i].label;
        let f: Vec<f64> = full_sets.iter().map(|s| s.coefficients[i].value).collect();
        let p: Vec<f64> = partial_sets
            .iter()
            .map(|s| s.coefficients[i].value)
            .collect();
        let mean = |v: &[f64]| v.iter().sum::<f64>() / k;
        let sd = |v: &[f64]| {
            let m = mean(v);
            (v.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (k - 1.0)).sqrt()
        };
        // σ: the partial-sky ensemble scatter, the error a user of the partial sky has.
        let sigma = sd(&p);
        let diff: Vec<f64> = p.iter().zip(&f).map(|(a, b)| a - b).collect();
        let z = (mean(&p) - mean(&f)).abs() / sigma;
        let se = sd(&diff) / k.sqrt() / sigma;
        compared += 1;
        if label.order > 0 {
            let entry = per_order
                .entry(format!("{:?}", label.kind))
                .or_insert((vec![0.0; skies as usize], 0));
            let full_mean = mean(&f);
            for (acc, d) in entry.0.iter_mut().zip(&diff) {
                *acc += d / full_mean;
            }
            entry.1 += 1;
        }
        if z > worst.0 {
            worst = (
                z,
                format!(
                    "{label:?} (kept fraction {:.2}, standard error of the paired difference {se:.2} σ)",
                    partial_sets[0].coefficients[i].kept_weight_fraction
                ),
            );
        }
        if z > 0.5 {
            failures.push(format!("{label:?}: {z:.2} σ"));
        }
    }
    // The mean bias of each order, over skies, within 2 standard errors of zero.
    for (kind, (sums, c)) in &per_order {
        let rel: Vec<f64> = sums.iter().map(|x| x / *c as f64).collect();
        let m = rel.iter().sum::<f64>() / k;
        let se = (rel.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (k - 1.0)).sqrt() / k.sqrt();
        println!(
            "  {kind}: mean relative bias {:+.3}% ± {:.3}% over {c} coefficients",
            100.0 * m,
            100.0 * se
        );
        if check_order_means && m.abs() > 2.0 * se {
            failures.push(format!(
                "{kind}: mean relative bias {:+.3}% beyond 2 standard errors ({:.3}%)",
                100.0 * m,
                100.0 * se
            ));
        }
    }
    println!(
        "{compared} of {count} coefficients trusted; worst |partial − full| = {:.3} σ at {}",
        worst.0, worst.1
    );
    // Every first-order coefficient and band power of the resolved scales, and every order-2
    // coefficient between them, must be testable.
    let l = settings.orientations;
    let resolved = (0..scales)
        .filter(|&j| on_partial.scale_is_resolved(j))
        .count();
    assert!(resolved >= 2, "only {resolved} resolved scales");
    let expected = 1 + 2 * resolved * l + resolved * (resolved - 1) / 2 * l * l;
    assert!(
        compared >= expected,
        "only {compared} trusted coefficients, expected {expected}"
    );
    assert!(failures.is_empty(), "{failures:?}");
}

#[test]
fn partial_sky_trusted_coefficients_agree_with_full_sky_within_half_sigma() {
    // 32 skies: the paired difference of ensemble means has a standard error of about
    // 0.15 σ (printed for the worst coefficient), so a 0.5 σ bias stands out at > 3 standard
    // errors while chance excursions past 0.5 σ stay rare over the ~30 coefficients compared.
    compare(64, 4, 32, 4.0, 3.0, Layout::SameHealpixCells, false);
}

#[test]
fn partial_sky_agrees_with_full_sky_within_half_sigma_at_nside_256() {
    // NSIDE 256, J = 4, 48 skies, both footprints measured with the default settings (3h plane
    // pixels read at h and band-limited, ring-quintic sampling, every coefficient trusted) on
    // the latitude-band plan of the full sky (the same tiles, so only the mask differs; a
    // change of plan is checked in tests/sphere_plan_layouts.rs). 48 skies: the paired
    // difference has a standard error of about 0.11 σ, so a 0.5 σ bias stands out at 4
    // standard errors. Measured: worst 0.38 σ (band power j = 0, l = 3); mean relative biases
    // +0.07% ± 0.15% (S1), +0.23% ± 0.29% (band power), −0.01% ± 0.13% (S2). With ring-cubic
    // sampling the same skies gave worst 0.54 σ (band power j = 0, l = 0): its power transfer
    // at 8h varies with latitude (0.978 at the equator, 0.990 at 42°), and the cap averages
    // other latitudes than the full sky (tests/sphere_ring_quintic.rs). About 2.5 minutes of
    // CPU in release mode.
    compare(256, 4, 48, 2.5, 2.0, Layout::FullSkyBands, true);
}

#[test]
#[ignore = "heavier variant (about 4.5 minutes): NSIDE 128, 32 skies"]
fn partial_sky_trusted_coefficients_agree_with_full_sky_within_half_sigma_nside_128() {
    compare(128, 4, 32, 2.5, 2.0, Layout::SameHealpixCells, false);
}
