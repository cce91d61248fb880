//! The JSON document of a measurement, as `measure` writes it: settings, tiling, labelled
//! coefficients with trust flags, orientation-harmonic summary, band powers, tile spectra and,
//! for two maps, the cross statistics. One producer for every caller (the command line, the
//! demo, bindings), so that the same measurement always gives the same document.
//!
//! The schema is [`MeasurementFile`] and the records it holds; the writers below fill it and
//! the readers (`plot coefficients`, synthesis targets) deserialize into it, so a field is
//! named and typed in one place. Keys are written in alphabetical order (a `serde_json`
//! object), numbers as `serde_json` writes an `f64` or an integer, and a value that could not
//! be computed as `null`. Fields a reader does not need may be absent when read.

use crate::measure::measurement::{
    MapStatistics, MeasurementSettings, PairStatistics, SphereMeasurer,
};
use crate::measure::tile_spectra::{TileBispectrum, TilePowerSpectrum};
use crate::scattering::statistics::{
    Coefficient, CoefficientKind, CoefficientLabel, CrossCoefficient, CrossDirection, CrossKind,
    SummaryStatistic, WaveletPath,
};
use crate::{Error, Result};
use serde::{Deserialize, Serialize};
use std::path::Path;

/// A measurement file: what [`measurement_document`], [`pair_document`] and
/// [`flat_measurement_document`] write and what the readers read.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct MeasurementFile {
    /// "planisphere".
    #[serde(default)]
    pub program: String,
    /// Version of the program that wrote the file.
    #[serde(default)]
    pub program_version: String,
    /// The measured map (its path, or the name the caller gave it).
    #[serde(default)]
    pub map: String,
    /// For a flat field measured as one tile: what the input was (absent for sphere maps).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub input: Option<FlatInputRecord>,
    /// The settings of the measurement.
    pub settings: RecordedSettings,
    /// The tiling: the plan's summary for a sphere map, the one tile for a flat field.
    #[serde(default)]
    pub tiling: serde_json::Value,
    /// Number of tiles measured.
    #[serde(default)]
    pub tiles_measured: usize,
    /// Mean, variance (kind `mean`, `variance`) and S1, S2 (kind `scattering`).
    pub coefficients: Vec<CoefficientRecord>,
    /// The orientation-harmonic summary.
    #[serde(default)]
    pub summary: Vec<SummaryRecord>,
    /// Band powers P(j,l) (no kind).
    #[serde(default)]
    pub band_powers: Vec<CoefficientRecord>,
    /// The tile power spectrum (always written).
    #[serde(default)]
    pub tile_power_spectrum: Option<TilePowerRecord>,
    /// The tile bispectrum (null when not measured).
    #[serde(default)]
    pub tile_bispectrum: Option<TileBispectrumRecord>,
    /// For two maps: the second map's statistics and the cross statistics.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub cross: Option<CrossSection>,
}

/// The input block of a flat-field measurement.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct FlatInputRecord {
    /// "flat field".
    pub kind: String,
    /// Side of the square field in pixels.
    pub pixels: usize,
    /// Pixel side in arcmin.
    pub pixel_arcmin: f64,
    /// True when the field is periodic (no mask).
    pub periodic: bool,
}

/// The settings block of a measurement file (null entries do not apply to flat fields).
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct RecordedSettings {
    /// Number of scales J.
    pub scales: usize,
    /// Number of orientations L.
    pub orientations: usize,
    /// Side of a tile in plane pixels.
    #[serde(default)]
    pub tile_pixels: usize,
    /// How the footprint is cut into cores.
    #[serde(default)]
    pub cells: String,
    /// NSIDE of the coarse cells, when cells are HEALPix pixels.
    #[serde(default)]
    pub coarse_nside: Option<u32>,
    /// Plane pixel side in arcmin.
    pub pixel_arcmin: f64,
    /// Border of each tile beyond its core, in plane pixels.
    #[serde(default)]
    pub border_pixels: Option<usize>,
    /// Halo of each tile, in plane pixels.
    #[serde(default)]
    pub halo_pixels: Option<usize>,
    /// The sampling method's name.
    #[serde(default)]
    pub sampling: Option<String>,
    /// Coverage below which a pixel of a filtered field is dropped from pooling.
    #[serde(default)]
    pub coverage_threshold: f64,
    /// Kept pooling weight over footprint weight above which a coefficient is trusted.
    #[serde(default)]
    pub trusted_fraction: f64,
    /// True when filtered fields are cropped in Fourier space.
    #[serde(default)]
    pub fourier_cropping: bool,
    /// Number of wavenumber bins of the tile spectra.
    #[serde(default)]
    pub spectrum_bins: usize,
    /// True when the tile bispectrum was measured.
    #[serde(default)]
    pub bispectrum: bool,
    /// The taper: kind, width and mask ([`taper_description`]).
    #[serde(default)]
    pub taper: serde_json::Value,
}

impl RecordedSettings {
    /// The record of resolved settings `s` measured on tiles of `tile_pixels` pixels of
    /// `pixel_arcmin`, cut as `cells`, with `taper`: the one place the record is built from
    /// settings. The tiling entries (coarse NSIDE, border, halo, sampling) are null, as for a
    /// flat field; [`Self::of_sphere`] fills them.
    fn of_settings(
        s: &MeasurementSettings,
        tile_pixels: usize,
        cells: String,
        pixel_arcmin: f64,
        taper: serde_json::Value,
    ) -> Self {
        Self {
            scales: s.scales,
            orientations: s.orientations,
            tile_pixels,
            cells,
            coarse_nside: None,
            pixel_arcmin,
            border_pixels: None,
            halo_pixels: None,
            sampling: None,
            coverage_threshold: s.transform.coverage_threshold,
            trusted_fraction: s.transform.trusted_fraction,
            fourier_cropping: s.transform.fourier_cropping,
            spectrum_bins: s.spectrum_bins,
            bispectrum: s.bispectrum,
            taper,
        }
    }

    /// The settings of a sphere measurement.
    fn of_sphere(measurer: &SphereMeasurer, taper: &serde_json::Value) -> Self {
        let s = measurer.settings();
        let plan = measurer.plan();
        Self {
            coarse_nside: s.coarse_nside,
            border_pixels: Some(s.border_pixels),
            halo_pixels: Some(s.halo()),
            sampling: Some(format!("{:?}", s.sampling)),
            ..Self::of_settings(
                s,
                plan.tile_pixels(),
                plan.cell_layout().describe(),
                plan.pixel_size().to_degrees() * 60.0,
                taper.clone(),
            )
        }
    }
}

/// One coefficient as written to the file: order-0 and scattering coefficients carry a kind
/// (`mean`, `variance`, `scattering`), band powers none. Read back, the kinds of a serialised
/// [`crate::scattering::statistics::CoefficientSet`] (`first_order`, `band_power`,
/// `second_order`) are understood too ([`Self::label`]).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CoefficientRecord {
    /// Number of wavelets applied (0, 1 or 2).
    pub order: u8,
    /// The wavelets applied (the fields j1, l1, j2, l2; absent ones are null).
    #[serde(flatten)]
    pub path: WaveletPath,
    /// Pooled value; null when it could not be computed.
    #[serde(default)]
    pub value: Option<f64>,
    /// True when the coefficient is trusted.
    #[serde(default)]
    pub trusted: bool,
    /// Kept pooling weight over footprint weight.
    #[serde(default)]
    pub kept_weight_fraction: Option<f64>,
    /// `mean`, `variance` or `scattering` (absent for band powers).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub kind: Option<String>,
}

impl CoefficientRecord {
    /// The record of a coefficient; `with_kind` for the `coefficients` array, not for band
    /// powers.
    fn of(c: &Coefficient, with_kind: bool) -> Self {
        let kind = match c.label.kind {
            CoefficientKind::Mean => "mean",
            CoefficientKind::Variance => "variance",
            _ => "scattering",
        };
        Self {
            order: c.label.order,
            path: c.label.path,
            value: c.value.is_finite().then_some(c.value),
            trusted: c.trusted,
            kept_weight_fraction: Some(c.kept_weight_fraction),
            kind: with_kind.then(|| kind.to_string()),
        }
    }

    /// The label this record stands for; `in_band_powers` when it was read from the
    /// `band_powers` array (where an order-1 record without a kind is a band power; elsewhere it
    /// is S1, and an order-2 record without a kind is S2). The error is one line.
    pub fn label(&self, in_band_powers: bool) -> std::result::Result<CoefficientLabel, String> {
        let kind = match (self.order, self.kind.as_deref()) {
            (1, None) if in_band_powers => CoefficientKind::BandPower,
            (0, Some("mean")) => CoefficientKind::Mean,
            (0, Some("variance")) => CoefficientKind::Variance,
            (0, _) => return Err("order 0 needs `kind` mean or variance".into()),
            (1, None | Some("first_order" | "scattering")) => CoefficientKind::FirstOrder,
            (1, Some("band_power")) => CoefficientKind::BandPower,
            (2, None | Some("second_order" | "scattering")) => CoefficientKind::SecondOrder,
            (o, k) => return Err(format!("unknown order {o} / kind {k:?}")),
        };
        Ok(CoefficientLabel {
            kind,
            order: self.order,
            path: self.path,
        })
    }
}

/// The coefficient arrays of a measurement file alone: what a synthesis target needs, read
/// from a measurement file or from a serialised
/// [`crate::scattering::statistics::CoefficientSet`] (which has no `band_powers`).
#[derive(Debug, Clone, Deserialize)]
pub struct CoefficientArrays {
    /// As [`MeasurementFile::coefficients`].
    pub coefficients: Vec<CoefficientRecord>,
    /// As [`MeasurementFile::band_powers`].
    #[serde(default)]
    pub band_powers: Vec<CoefficientRecord>,
}

/// One item of the orientation-harmonic summary.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SummaryRecord {
    /// The item's name ([`crate::scattering::statistics::SummaryLabel::name`]).
    pub name: String,
    /// Its value; null when a coefficient it needs is undefined.
    pub value: Option<f64>,
    /// True when every coefficient it is built from is trusted.
    pub trusted: bool,
}

impl SummaryRecord {
    fn of(s: &SummaryStatistic) -> Self {
        Self {
            name: s.name.clone(),
            value: s.value.is_finite().then_some(s.value),
            trusted: s.trusted,
        }
    }
}

/// The tile power spectrum block ([`TilePowerSpectrum`]).
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct TilePowerRecord {
    /// Bin centres (rad⁻¹).
    pub k: Vec<f64>,
    /// Mean |k| of the cells in each bin (rad⁻¹).
    #[serde(default)]
    pub k_mean: Vec<f64>,
    /// P̂(k) per bin (sr · field²); null where undefined.
    pub power: Vec<Option<f64>>,
    /// Fourier cells per bin.
    #[serde(default)]
    pub modes: Vec<usize>,
    /// Combination weight.
    #[serde(default)]
    pub weight: Option<f64>,
}

impl TilePowerRecord {
    fn of(p: &TilePowerSpectrum) -> Self {
        Self {
            k: p.k.clone(),
            k_mean: p.k_mean.clone(),
            power: p
                .power
                .iter()
                .map(|&v| v.is_finite().then_some(v))
                .collect(),
            modes: p.modes.clone(),
            weight: p.weight.is_finite().then_some(p.weight),
        }
    }
}

/// One bispectrum configuration: bin indices b1 ≤ b2 ≤ b3.
#[derive(Debug, Clone, Copy, Serialize, Deserialize)]
pub struct TriangleRecord {
    /// First bin.
    pub b1: usize,
    /// Second bin.
    pub b2: usize,
    /// Third bin.
    pub b3: usize,
}

/// The tile bispectrum block ([`TileBispectrum`]).
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct TileBispectrumRecord {
    /// The configurations.
    pub triangles: Vec<TriangleRecord>,
    /// B̂ per configuration (sr² · field³); null where undefined.
    pub bispectrum: Vec<Option<f64>>,
    /// Closed triangles per configuration.
    pub triangle_counts: Vec<Option<f64>>,
    /// Combination weight.
    pub weight: Option<f64>,
}

impl TileBispectrumRecord {
    fn of(b: &TileBispectrum) -> Self {
        let finite = |v: &[f64]| v.iter().map(|&x| x.is_finite().then_some(x)).collect();
        Self {
            triangles: b
                .triangles
                .iter()
                .map(|t| TriangleRecord {
                    b1: t.b1,
                    b2: t.b2,
                    b3: t.b3,
                })
                .collect(),
            bispectrum: finite(&b.bispectrum),
            triangle_counts: finite(&b.triangle_counts),
            weight: b.weight.is_finite().then_some(b.weight),
        }
    }
}

/// The statistics of one map: its coefficients, summary, band powers and tile spectra (the
/// second map's block of a pair measurement).
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct MapStatisticsRecord {
    /// As [`MeasurementFile::coefficients`].
    pub coefficients: Vec<CoefficientRecord>,
    /// As [`MeasurementFile::summary`].
    pub summary: Vec<SummaryRecord>,
    /// As [`MeasurementFile::band_powers`].
    pub band_powers: Vec<CoefficientRecord>,
    /// As [`MeasurementFile::tile_power_spectrum`].
    pub tile_power_spectrum: Option<TilePowerRecord>,
    /// As [`MeasurementFile::tile_bispectrum`].
    pub tile_bispectrum: Option<TileBispectrumRecord>,
}

impl MapStatisticsRecord {
    fn of(stats: &MapStatistics) -> Self {
        let all = &stats.coefficients.coefficients;
        Self {
            coefficients: all
                .iter()
                .filter(|c| c.label.kind != CoefficientKind::BandPower)
                .map(|c| CoefficientRecord::of(c, true))
                .collect(),
            summary: stats.summary.iter().map(SummaryRecord::of).collect(),
            band_powers: all
                .iter()
                .filter(|c| c.label.kind == CoefficientKind::BandPower)
                .map(|c| CoefficientRecord::of(c, false))
                .collect(),
            tile_power_spectrum: Some(TilePowerRecord::of(&stats.tile_power)),
            tile_bispectrum: stats.tile_bispectrum.as_ref().map(TileBispectrumRecord::of),
        }
    }
}

/// One cross coefficient as written to the file.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct CrossRecord {
    /// Its name ([`crate::scattering::statistics::CrossLabel::name`]).
    pub name: String,
    /// The map whose field enters linearly ("first", "second"; "both" for band powers).
    pub field: String,
    /// The map whose wavelet modulus is used (absent for band powers).
    pub modulus_of: Option<String>,
    /// Number of wavelets applied.
    pub order: u8,
    /// The wavelets applied (the fields j1, l1, j2, l2; absent ones are null).
    #[serde(flatten)]
    pub path: WaveletPath,
    /// Pooled value; null when it could not be computed.
    pub value: Option<f64>,
    /// True when the coefficient is trusted.
    pub trusted: bool,
    /// Kept pooling weight over footprint weight.
    pub kept_weight_fraction: Option<f64>,
}

impl CrossRecord {
    fn of(c: &CrossCoefficient) -> Self {
        let (field, modulus_of) = match c.label.direction {
            CrossDirection::Both => ("both", None),
            CrossDirection::FirstAgainstSecondModulus => ("first", Some("second")),
            CrossDirection::SecondAgainstFirstModulus => ("second", Some("first")),
        };
        Self {
            name: c.label.name(),
            field: field.into(),
            modulus_of: modulus_of.map(String::from),
            order: c.label.order,
            path: c.label.path,
            value: c.value.is_finite().then_some(c.value),
            trusted: c.trusted,
            kept_weight_fraction: Some(c.kept_weight_fraction),
        }
    }
}

/// The "cross" section of a pair measurement: the second map's own statistics and the cross
/// coefficients grouped by kind.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct CrossSection {
    /// The second map.
    pub map: String,
    /// The second map's mask, if any.
    pub mask: Option<String>,
    /// Which footprint the pair was measured on.
    pub footprint: String,
    /// The second map's own statistics on that footprint.
    pub map_statistics: MapStatisticsRecord,
    /// P_AB(j,l).
    pub cross_band_powers: Vec<CrossRecord>,
    /// X1 in both directions.
    pub envelope_first_order: Vec<CrossRecord>,
    /// X2 in both directions.
    pub envelope_second_order: Vec<CrossRecord>,
}

impl CrossSection {
    fn of(pair: &PairStatistics, other: &str, other_mask: Option<&Path>) -> Self {
        let pick = |kind: CrossKind| -> Vec<CrossRecord> {
            pair.cross
                .coefficients
                .iter()
                .filter(|c| c.label.kind == kind)
                .map(CrossRecord::of)
                .collect()
        };
        Self {
            map: other.to_string(),
            mask: other_mask.map(|p| p.display().to_string()),
            footprint: "common footprint of both maps (smaller weight per pixel), tapered".into(),
            map_statistics: MapStatisticsRecord::of(&pair.second),
            cross_band_powers: pick(CrossKind::CrossBandPower),
            envelope_first_order: pick(CrossKind::EnvelopeFirstOrder),
            envelope_second_order: pick(CrossKind::EnvelopeSecondOrder),
        }
    }
}

impl MeasurementFile {
    /// The file of one map's statistics with the given settings and tiling blocks.
    fn of(
        stats: &MapStatistics,
        source: &str,
        settings: RecordedSettings,
        tiling: serde_json::Value,
    ) -> Self {
        let own = MapStatisticsRecord::of(stats);
        Self {
            program: "planisphere".into(),
            program_version: env!("CARGO_PKG_VERSION").into(),
            map: source.to_string(),
            input: None,
            settings,
            tiling,
            tiles_measured: stats.tiles,
            coefficients: own.coefficients,
            summary: own.summary,
            band_powers: own.band_powers,
            tile_power_spectrum: own.tile_power_spectrum,
            tile_bispectrum: own.tile_bispectrum,
            cross: None,
        }
    }

    /// The JSON value of the file (keys in alphabetical order).
    pub fn to_value(&self) -> serde_json::Value {
        serde_json::to_value(self).unwrap_or_default()
    }

    /// Reads and checks a measurement file.
    pub fn read(path: &Path) -> Result<Self> {
        let text = crate::files::read_text(path)?;
        Self::parse(&text).map_err(|reason| Error::io(path, reason))
    }

    /// Parses the text of a measurement file and checks that J, L, the pixel size and every
    /// coefficient's indices make sense; the error is one line.
    pub fn parse(text: &str) -> std::result::Result<Self, String> {
        let file: MeasurementFile = serde_json::from_str(text)
            .map_err(|e| format!("not a measurement file written by `measure`: {e}"))?;
        let (jn, ln) = (file.settings.scales, file.settings.orientations);
        if jn == 0 || ln == 0 || jn > crate::limits::MAX_SCALES || ln > 1000 {
            return Err(format!(
                "settings give J = {jn}, L = {ln}: not a measurement"
            ));
        }
        if !(file.settings.pixel_arcmin.is_finite() && file.settings.pixel_arcmin > 0.0) {
            return Err("settings.pixel_arcmin must be a positive number".into());
        }
        for c in file.coefficients.iter().chain(&file.band_powers) {
            if !c.path.within(jn, ln) {
                return Err(format!(
                    "a coefficient has scale or orientation indices beyond J = {jn}, L = {ln}"
                ));
            }
        }
        Ok(file)
    }

    /// Angular scale (arcmin) of wavelet scale j: (8/3)·2^j·pixel size (the wavelength of
    /// the Morlet wavelet of scale j, [`SphereMeasurer::wavelet_scale_arcmin`]).
    pub fn scale_arcmin(&self, j: usize) -> f64 {
        8.0 / 3.0 * 2f64.powi(j as i32) * self.settings.pixel_arcmin
    }
}

/// The JSON document of one measurement.
pub fn measurement_document(
    measurer: &SphereMeasurer,
    stats: &MapStatistics,
    source: &str,
    taper: &serde_json::Value,
) -> serde_json::Value {
    measurement_file(measurer, stats, source, taper).to_value()
}

/// The [`MeasurementFile`] of one measurement.
fn measurement_file(
    measurer: &SphereMeasurer,
    stats: &MapStatistics,
    source: &str,
    taper: &serde_json::Value,
) -> MeasurementFile {
    let tiling = serde_json::to_value(measurer.summary()).unwrap_or_default();
    let settings = RecordedSettings::of_sphere(measurer, taper);
    MeasurementFile::of(stats, source, settings, tiling)
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
/// [`CrossSection`] added.
pub fn pair_document(
    measurer: &SphereMeasurer,
    pair: &PairStatistics,
    first: &str,
    second: &str,
    second_mask: Option<&Path>,
    taper: &serde_json::Value,
) -> serde_json::Value {
    let mut file = measurement_file(measurer, &pair.first, first, taper);
    file.cross = Some(CrossSection::of(pair, second, second_mask));
    file.to_value()
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
    let periodic = mask.is_none();
    let observed = mask.map_or(n * n, |m| m.iter().filter(|&&v| v > 0.0).count());
    let mask_mean = mask.map_or(1.0, |m| m.iter().sum::<f64>() / (n * n) as f64);
    let layout = if periodic {
        "one periodic flat tile"
    } else {
        "one masked flat tile"
    };
    let settings = RecordedSettings::of_settings(
        settings,
        n,
        layout.into(),
        pixel_arcmin,
        serde_json::json!({
            "kind": if periodic { "none (periodic)" } else { "mask as given" },
            "width_arcmin": null,
            "mask": mask_name,
        }),
    );
    let tiling = serde_json::json!({
        "cells": layout,
        "tiles": 1,
        "tile_pixels": n,
        "pixel_size_arcmin": pixel_arcmin,
        "tile_width_deg": n as f64 * pixel_arcmin / 60.0,
        "periodic": periodic,
        "footprint_pixels": observed,
        "mean_mask_weight": mask_mean,
    });
    let mut file = MeasurementFile::of(stats, source, settings, tiling);
    file.input = Some(FlatInputRecord {
        kind: "flat field".into(),
        pixels: n,
        pixel_arcmin,
        periodic,
    });
    file.to_value()
}
