//! Flat sky versus sphere: Gaussian skies of spectrum C_ℓ measured through tangent-plane tiles
//! against flat Gaussian fields of P(k) = C_{k−½} (LoVerde & Afshordi 2008, PRD 78, 123506) at
//! the same plane pixel size; and the trust rule for scales the sampling cannot carry.

mod sphere_support;

use planisphere::measure::measurement::{MeasurementSettings, SphereMeasurer};
use planisphere::scattering::statistics::CoefficientKind;
use planisphere::tiles::sampling::SamplingMethod;
use planisphere::{Footprint, Ordering, Pixelization};

#[test]
fn trusted_first_order_coefficients_match_flat_sky_within_two_percent_at_default_settings() {
    // Default settings (J = 4, L = 4, plane pixels of three map spacings read one spacing
    // apart and band-limited to the plane grid, ring-cubic sampling) at NSIDE 512: tiles of the
    // automatic size (the candidate whose plan transforms the fewest tile pixels, 27.5°
    // across, within the 54.5° distortion limit). Every coefficient of the defaults is
    // trusted, so every S1 is tested. Tolerance: the 2%
    // acceptance level of this crate plus
    // 2.5 standard errors of the sphere mean (3 skies on a 30° cap; the flat reference, eight
    // 256-pixel maps, is far more precise). Scales below the sampling limit must be flagged.
    let nside = 512;
    let skies = 3;
    let footprint = sphere_support::cap(nside, 30.0, 40.0, 30.0);
    let settings = MeasurementSettings {
        bispectrum: false,
        ..Default::default()
    };
    let (measurer, sets) = sphere_support::sphere_sets(nside, &footprint, settings, skies, 101);
    let pixel = measurer.plan().pixel_size();
    let h = measurer.plan().map_pixelization().mean_spacing();
    let width = (measurer.plan().tile_pixels() as f64 * pixel).to_degrees();
    println!(
        "tiles of {} pixels, {width:.1}° across",
        measurer.plan().tile_pixels()
    );
    assert!(width <= 54.5, "tiles are {width}° across");
    let flat = sphere_support::flat_sets(nside, 256, pixel, settings.scales, 4, 8, 9000);
    let (sm, ssd) = sphere_support::mean_sd(&sets);
    let (fm, _) = sphere_support::mean_sd(&flat);
    let mut tested = 0;
    let mut failures = Vec::new();
    for j in 0..settings.scales {
        for l in 0..settings.orientations {
            let c = sets[0].first_order(j, l);
            let i = 2 + j * settings.orientations + l;
            let bias = sm[i] / fm[i] - 1.0;
            let se = ssd[i] / sm[i] / (skies as f64).sqrt();
            let trusted = sets.iter().all(|s| s.first_order(j, l).trusted);
            println!(
                "j = {j}, l = {l}: S1 sphere/flat − 1 = {:+.2}% ± {:.2}% (trusted {trusted}, λ_j/h = {:.1})",
                100.0 * bias,
                100.0 * se,
                8.0 / 3.0 * (1u64 << j) as f64 * pixel / h
            );
            assert_eq!(c.label.kind, CoefficientKind::FirstOrder);
            if trusted {
                tested += 1;
                if bias.abs() > 0.02 + 2.5 * se {
                    failures.push(format!(
                        "j {j} l {l}: {:.2}% ± {:.2}%",
                        100.0 * bias,
                        100.0 * se
                    ));
                }
            }
        }
    }
    assert_eq!(
        tested,
        settings.scales * settings.orientations,
        "every S1 of the defaults is trusted"
    );
    assert!(failures.is_empty(), "{failures:?}");
}

#[test]
fn scales_below_the_sampling_limit_are_flagged_untrusted() {
    // The rule of MeasurementSettings::min_trusted_wavelength: a coefficient involving a scale
    // of wavelength (8/3)·2^j·Δ below the limit (in map spacings h) is untrusted, and so is the
    // variance when scale 0 is. Bilinear sampling at Δ = h: limit 16 h, so j ≤ 2 are flagged.
    let nside = 64;
    let pix = Pixelization::new(nside, Ordering::Ring).unwrap();
    let footprint = Footprint::full_sky(pix);
    let map = planisphere::simulate::scenario::synthetic_waves(pix, 20, 1);
    for (method, first) in [
        (SamplingMethod::Bilinear, 3),
        (SamplingMethod::RingCubic, 2),
    ] {
        let settings = MeasurementSettings {
            sampling: method,
            bispectrum: false,
            pixel_arcmin: Some(pix.mean_spacing().to_degrees() * 60.0),
            ..Default::default()
        };
        let m = SphereMeasurer::new(pix, &footprint, settings).unwrap();
        let set = m.measure(&map, &footprint).unwrap().coefficients;
        for c in &set.coefficients {
            let smallest = [c.label.path.j1, c.label.path.j2]
                .iter()
                .flatten()
                .copied()
                .min();
            let expected = match c.label.kind {
                CoefficientKind::Mean => true,
                CoefficientKind::Variance => first == 0,
                _ => smallest.is_some_and(|j| j >= first),
            };
            assert_eq!(c.trusted, expected, "{method:?}: {:?}", c.label);
        }
        // Lifting the rule restores the trust of the full sky.
        let lifted = MeasurementSettings {
            min_trusted_wavelength: Some(0.0),
            ..settings
        };
        let m = SphereMeasurer::new(pix, &footprint, lifted).unwrap();
        let set = m.measure(&map, &footprint).unwrap().coefficients;
        assert!(set.coefficients.iter().all(|c| c.trusted));
    }
}
