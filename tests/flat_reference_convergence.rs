//! compare-flat's flat reference: fields as small as the tile miss the power on scales beyond
//! it and the doubling check says so; the default reference size is converged (doubling it
//! moves nothing beyond its noise).
//!
//! The sky has most of its power on scales larger than a tile: C_ℓ = 3e-3·exp(−(ℓ/5)²) +
//! 1e-5·(ℓ/10)^−2 (an invented spectrum chosen for this check), NSIDE 64, 32-pixel tiles of
//! 55′ (29°, fundamental ℓ ≈ 12), J = 3. A tile cut from the sky, or from a flat field much
//! larger than the tile, carries the large-scale modes across its tapered border into every
//! wavelet band; a periodic field the size of the tile has none of them. Expectation: the
//! flat-sky approximation (LoVerde & Afshordi 2008, P(k) = C_{k−½}) holds for the large field,
//! so its change on doubling is within noise, while the tile-sized field changes by many
//! standard errors; that a windowed estimate picks up power from scales beyond the window is
//! common practice (leakage through the window function).

use planisphere::harmonics::spectrum::AngularSpectrum;
use planisphere::measure::flat_comparison::{
    automatic_reference_pixels, compare_flat, FlatComparisonSettings, CONVERGENCE_ERRORS,
};
use planisphere::measure::measurement::MeasurementSettings;

fn settings(reference_pixels: Option<usize>) -> FlatComparisonSettings {
    let cl = (0..192)
        .map(|l| {
            if l < 2 {
                0.0
            } else {
                let x = l as f64;
                3e-3 * (-(x / 5.0).powi(2)).exp() + 1e-5 * (x / 10.0).powi(-2)
            }
        })
        .collect();
    FlatComparisonSettings {
        nside: 64,
        spectrum: AngularSpectrum { cl },
        lognormal_shift: None,
        tile_pixels: vec![32],
        skies: 2,
        flat_fields: 200,
        measurement: MeasurementSettings {
            scales: 3,
            orientations: 4,
            border_pixels: 4,
            ..MeasurementSettings::default()
        },
        seed: 1,
        reference_pixels,
    }
}

#[test]
fn a_reference_the_size_of_the_tile_is_flagged_unconverged() {
    let c = compare_flat(&settings(Some(32))).unwrap();
    for s in &c.scales {
        eprintln!(
            "m = 32: {} j = {}: change {:+.2}% ({:+.2} σ) converged {}",
            s.kind,
            s.j,
            100.0 * s.change,
            s.change_in_errors,
            s.converged
        );
        assert_eq!(s.reference_pixels, 32);
    }
    // the largest scale moves by many standard errors when the fields are doubled
    for kind in ["S1", "bandpower"] {
        let s = c
            .scales
            .iter()
            .find(|s| s.kind == kind && s.j == 2)
            .unwrap();
        assert!(!s.converged);
        assert!(s.change_in_errors > 3.0 * CONVERGENCE_ERRORS, "{s:?}");
    }
    // and every coefficient of it is flagged in the table
    let largest: Vec<_> = c
        .rows
        .iter()
        .filter(|r| r.coefficient.starts_with("S1_j2") || r.coefficient.starts_with("bandpower_j2"))
        .collect();
    assert_eq!(largest.len(), 8);
    assert!(largest
        .iter()
        .all(|r| r.reference_converged == Some(false) && r.reference_pixels == 32));
}

#[test]
fn the_default_reference_is_converged_when_doubled() {
    let m = automatic_reference_pixels(32, 3);
    assert_eq!(m, 128); // 32·2^(J−1) = 128 ≥ 2n
    let c = compare_flat(&settings(None)).unwrap();
    for s in &c.scales {
        eprintln!(
            "m = {m}: {} j = {}: change {:+.2}% ({:+.2} σ) converged {}",
            s.kind,
            s.j,
            100.0 * s.change,
            s.change_in_errors,
            s.converged
        );
        assert_eq!(s.reference_pixels, m);
        assert!(s.converged, "{s:?}");
    }
    // per coefficient, a 2σ flag is raised by chance for about 5% of converged coefficients
    let flagged = c
        .rows
        .iter()
        .filter(|r| r.reference_converged != Some(true))
        .count();
    eprintln!("{flagged} of {} coefficients flagged", c.rows.len());
    assert!(
        flagged * 10 <= c.rows.len(),
        "{flagged} of {}",
        c.rows.len()
    );
}

#[test]
fn the_default_reference_size_grows_with_the_largest_wavelet() {
    // smallest n·2^k (k ≥ 1) of at least 32·2^(J−1) pixels
    assert_eq!(automatic_reference_pixels(64, 4), 256);
    assert_eq!(automatic_reference_pixels(64, 3), 128);
    assert_eq!(automatic_reference_pixels(128, 3), 256);
    assert_eq!(automatic_reference_pixels(96, 6), 1536);
    assert_eq!(automatic_reference_pixels(32, 1), 64);
}
