//! The JSON document of a measurement, as `measure` writes it: settings, tiling, labelled
//! coefficients with trust flags, orientation-harmonic summary, band powers, tile spectra and,
//! for two maps, the cross statistics. One producer for every caller (the command line, the
//! demo, bindings), so that the same measurement always gives the same document.

use crate::measure::measurement::{
    MapStatistics, MeasurementSettings, PairStatistics, SphereMeasurer,
};
use crate::scattering::statistics::{CoefficientKind, CrossCoefficient, CrossDirection, CrossKind};
use std::path::Path;

/// One cross coefficient as written to the JSON file.
#[derive(Debug, serde::Serialize)]
pub struct CrossRecord {
    name: String,
    /// The map whose field enters linearly ("first", "second"; "both" for band powers).
    field: &'static str,
    /// The map whose wavelet modulus is used (absent for band powers).
    modulus_of: Option<&'static str>,
    order: u8,
    j1: usize,
    l1: usize,
    j2: Option<usize>,
    l2: Option<usize>,
    value: Option<f64>,
    trusted: bool,
    kept_weight_fraction: f64,
}

pub fn cross_record(c: &CrossCoefficient) -> CrossRecord {
    let (field, modulus_of) = match c.label.direction {
        CrossDirection::Both => ("both", None),
        CrossDirection::FirstAgainstSecondModulus => ("first", Some("second")),
        CrossDirection::SecondAgainstFirstModulus => ("second", Some("first")),
    };
    CrossRecord {
        name: c.label.name(),
        field,
        modulus_of,
        order: c.label.order,
        j1: c.label.j1,
        l1: c.label.l1,
        j2: c.label.j2,
        l2: c.label.l2,
        value: c.value.is_finite().then_some(c.value),
        trusted: c.trusted,
        kept_weight_fraction: c.kept_weight_fraction,
    }
}

/// The "cross" section of a pair measurement: the second map's own statistics and the cross
/// coefficients grouped by kind.
pub fn cross_section(
    measurer: &SphereMeasurer,
    pair: &PairStatistics,
    other: &str,
    other_mask: Option<&Path>,
    taper: &serde_json::Value,
) -> serde_json::Value {
    let own = measurement_document(measurer, &pair.second, other, taper);
    let pick = |kind: CrossKind| -> Vec<CrossRecord> {
        pair.cross
            .coefficients
            .iter()
            .filter(|c| c.label.kind == kind)
            .map(cross_record)
            .collect()
    };
    serde_json::json!({
        "map": other,
        "mask": other_mask.map(|p| p.display().to_string()),
        "footprint": "common footprint of both maps (smaller weight per pixel), tapered",
        "map_statistics": {
            "coefficients": own["coefficients"],
            "summary": own["summary"],
            "band_powers": own["band_powers"],
            "tile_power_spectrum": own["tile_power_spectrum"],
            "tile_bispectrum": own["tile_bispectrum"],
        },
        "cross_band_powers": pick(CrossKind::CrossBandPower),
        "envelope_first_order": pick(CrossKind::EnvelopeFirstOrder),
        "envelope_second_order": pick(CrossKind::EnvelopeSecondOrder),
    })
}

/// One coefficient as written to the JSON file.
#[derive(Debug, serde::Serialize)]
struct CoefficientRecord {
    order: u8,
    j1: Option<usize>,
    l1: Option<usize>,
    j2: Option<usize>,
    l2: Option<usize>,
    value: Option<f64>,
    trusted: bool,
    kept_weight_fraction: f64,
}

/// The "coefficients" (orders 0–2, each with its kind) and "band_powers" arrays of a
/// measurement.
pub fn coefficient_sections(stats: &MapStatistics) -> (serde_json::Value, serde_json::Value) {
    let record = |c: &crate::scattering::statistics::Coefficient| CoefficientRecord {
        order: c.label.order,
        j1: c.label.j1,
        l1: c.label.l1,
        j2: c.label.j2,
        l2: c.label.l2,
        value: c.value.is_finite().then_some(c.value),
        trusted: c.trusted,
        kept_weight_fraction: c.kept_weight_fraction,
    };
    let coefficients: Vec<_> = stats
        .coefficients
        .coefficients
        .iter()
        .filter(|c| c.label.kind != CoefficientKind::BandPower)
        .map(|c| {
            let mut v = serde_json::to_value(record(c)).unwrap_or_default();
            if let Some(o) = v.as_object_mut() {
                let kind = match c.label.kind {
                    CoefficientKind::Mean => "mean",
                    CoefficientKind::Variance => "variance",
                    _ => "scattering",
                };
                o.insert("kind".into(), kind.into());
            }
            v
        })
        .collect();
    let band_powers: Vec<_> = stats
        .coefficients
        .coefficients
        .iter()
        .filter(|c| c.label.kind == CoefficientKind::BandPower)
        .map(record)
        .collect();
    (
        serde_json::to_value(coefficients).unwrap_or_default(),
        serde_json::to_value(band_powers).unwrap_or_default(),
    )
}

/// The JSON document of one measurement.
pub fn measurement_document(
    measurer: &SphereMeasurer,
    stats: &MapStatistics,
    source: &str,
    taper: &serde_json::Value,
) -> serde_json::Value {
    let (coefficients, band_powers) = coefficient_sections(stats);
    let s = measurer.settings();
    serde_json::json!({
        "program": "planisphere",
        "program_version": env!("CARGO_PKG_VERSION"),
        "map": source,
        "settings": {
            "scales": s.scales,
            "orientations": s.orientations,
            "tile_pixels": measurer.plan().tile_pixels(),
            "cells": measurer.plan().cell_layout().describe(),
            "coarse_nside": s.coarse_nside,
            "pixel_arcmin": measurer.plan().pixel_size().to_degrees() * 60.0,
            "border_pixels": s.border_pixels,
            "halo_pixels": s.halo(),
            "sampling": format!("{:?}", s.sampling),
            "coverage_threshold": s.transform.coverage_threshold,
            "trusted_fraction": s.transform.trusted_fraction,
            "fourier_cropping": s.transform.fourier_cropping,
            "spectrum_bins": s.spectrum_bins,
            "bispectrum": s.bispectrum,
            "taper": taper,
        },
        "tiling": measurer.summary(),
        "tiles_measured": stats.tiles,
        "coefficients": coefficients,
        "summary": stats.summary,
        "band_powers": band_powers,
        "tile_power_spectrum": stats.tile_power,
        "tile_bispectrum": stats.tile_bispectrum,
    })
}

/// The taper block of a sphere measurement's settings: kind, width and mask file (if any).
pub fn taper_description(
    kind: crate::sky::apodization::TaperKind,
    width_arcmin: f64,
    mask: Option<&str>,
) -> serde_json::Value {
    serde_json::json!({
        "kind": format!("{kind:?}"),
        "width_arcmin": width_arcmin,
        "mask": mask,
    })
}

/// The document of a pair measurement: the first map's document with the "cross" section of
/// [`cross_section`] added.
pub fn pair_document(
    measurer: &SphereMeasurer,
    pair: &PairStatistics,
    first: &str,
    second: &str,
    second_mask: Option<&Path>,
    taper: &serde_json::Value,
) -> serde_json::Value {
    let section = cross_section(measurer, pair, second, second_mask, taper);
    let mut doc = measurement_document(measurer, &pair.first, first, taper);
    if let Some(o) = doc.as_object_mut() {
        o.insert("cross".into(), section);
    }
    doc
}

/// The document of a flat field measured as one tile ([`crate::measure::flat::measure`]): the sphere
/// layout plus an "input" block; `mask` is the flat mask (None: periodic), `mask_name` how
/// the document names it.
pub fn flat_measurement_document(
    stats: &MapStatistics,
    settings: &MeasurementSettings,
    source: &str,
    pixels: usize,
    pixel_arcmin: f64,
    mask: Option<&[f64]>,
    mask_name: Option<&str>,
) -> serde_json::Value {
    let n = pixels;
    let (coefficients, band_powers) = coefficient_sections(stats);
    let periodic = mask.is_none();
    let observed = mask.map_or(n * n, |m| m.iter().filter(|&&v| v > 0.0).count());
    let mask_mean = mask.map_or(1.0, |m| m.iter().sum::<f64>() / (n * n) as f64);
    let layout = if periodic {
        "one periodic flat tile"
    } else {
        "one masked flat tile"
    };
    let s = settings;
    serde_json::json!({
        "program": "planisphere",
        "program_version": env!("CARGO_PKG_VERSION"),
        "map": source,
        "input": {
            "kind": "flat field",
            "pixels": n,
            "pixel_arcmin": pixel_arcmin,
            "periodic": periodic,
        },
        "settings": {
            "scales": s.scales,
            "orientations": s.orientations,
            "tile_pixels": n,
            "cells": layout,
            "coarse_nside": null,
            "pixel_arcmin": pixel_arcmin,
            "border_pixels": null,
            "halo_pixels": null,
            "sampling": null,
            "coverage_threshold": s.transform.coverage_threshold,
            "trusted_fraction": s.transform.trusted_fraction,
            "fourier_cropping": s.transform.fourier_cropping,
            "spectrum_bins": s.spectrum_bins,
            "bispectrum": s.bispectrum,
            "taper": {
                "kind": if periodic { "none (periodic)" } else { "mask as given" },
                "width_arcmin": null,
                "mask": mask_name,
            },
        },
        "tiling": {
            "cells": layout,
            "tiles": 1,
            "tile_pixels": n,
            "pixel_size_arcmin": pixel_arcmin,
            "tile_width_deg": n as f64 * pixel_arcmin / 60.0,
            "periodic": periodic,
            "footprint_pixels": observed,
            "mean_mask_weight": mask_mean,
        },
        "tiles_measured": stats.tiles,
        "coefficients": coefficients,
        "summary": stats.summary,
        "band_powers": band_powers,
        "tile_power_spectrum": stats.tile_power,
        "tile_bispectrum": stats.tile_bispectrum,
    })
}
