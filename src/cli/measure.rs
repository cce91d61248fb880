//! `planisphere measure`: scattering coefficients, compact set, band powers, tile power spectrum
//! and bispectrum of one map on its footprint, written as JSON.

use super::inputs::{load_map, MaskArgs};
use super::output::write_json;
use crate::error::{Error, Result};
use crate::fits_io::ColumnChoice;
use crate::measurement::{MapStatistics, MeasurementSettings, SphereMeasurer};
use crate::sampling::SamplingMethod;
use crate::statistics::CoefficientKind;
use std::path::{Path, PathBuf};

/// How the sky is read at tile pixels.
#[derive(
    Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum, serde::Deserialize, serde::Serialize,
)]
#[serde(rename_all = "kebab-case")]
pub enum SamplingChoice {
    /// Bilinear over the four surrounding HEALPix pixels.
    Bilinear,
    /// Linear along and between iso-latitude rings.
    RingLinear,
    /// The value of the pixel containing the direction.
    Nearest,
    /// Cubic along and between iso-latitude rings (keeps the most small-scale power).
    RingCubic,
}

impl From<SamplingChoice> for SamplingMethod {
    fn from(c: SamplingChoice) -> Self {
        match c {
            SamplingChoice::Bilinear => SamplingMethod::Bilinear,
            SamplingChoice::RingLinear => SamplingMethod::RingLinear,
            SamplingChoice::Nearest => SamplingMethod::Nearest,
            SamplingChoice::RingCubic => SamplingMethod::RingCubic,
        }
    }
}

/// Measurement options shared by `measure`, `ensemble` and `compare-flat`; flags override the
/// values of a `--settings` TOML file, which override the defaults.
#[derive(Debug, Clone, Default, clap::Args)]
pub struct MeasureOptions {
    /// TOML file with any of: scales, orientations, tile_pixels, coarse_nside, pixel_arcmin,
    /// border_pixels, sampling, spectrum_bins, bispectrum.
    #[arg(long, value_name = "FILE.toml")]
    pub settings: Option<PathBuf>,
    /// Number of dyadic wavelet scales J [default: 4].
    #[arg(long, short = 'J')]
    pub scales: Option<usize>,
    /// Number of wavelet orientations L [default: 4].
    #[arg(long, short = 'L')]
    pub orientations: Option<usize>,
    /// Plane pixels per tile side, a power of two [default: 64].
    #[arg(long)]
    pub tile_pixels: Option<usize>,
    /// NSIDE of the coarse grid of tile centres [default: the coarsest that fits, at least 4].
    #[arg(long)]
    pub coarse_nside: Option<u32>,
    /// Tile pixel size in arcmin [default: the map's mean pixel spacing].
    #[arg(long, allow_negative_numbers = true)]
    pub pixel_arcmin: Option<f64>,
    /// Width of the tile-border taper in tile pixels [default: 8].
    #[arg(long)]
    pub border_pixels: Option<usize>,
    /// How the sky is read at tile pixels [default: ring-cubic].
    #[arg(long, value_enum)]
    pub sampling: Option<SamplingChoice>,
    /// Number of wavenumber bins of the tile power spectrum and bispectrum [default: 6].
    #[arg(long)]
    pub spectrum_bins: Option<usize>,
    /// Skip the tile bispectrum.
    #[arg(long)]
    pub no_bispectrum: bool,
}

/// The keys a `--settings` file may hold.
#[derive(Debug, Default, serde::Deserialize)]
#[serde(deny_unknown_fields)]
struct SettingsFile {
    scales: Option<usize>,
    orientations: Option<usize>,
    tile_pixels: Option<usize>,
    coarse_nside: Option<u32>,
    pixel_arcmin: Option<f64>,
    border_pixels: Option<usize>,
    sampling: Option<SamplingChoice>,
    spectrum_bins: Option<usize>,
    bispectrum: Option<bool>,
}

fn read_settings_file(path: &Path) -> Result<SettingsFile> {
    let text = std::fs::read_to_string(path).map_err(|e| Error::io(path, e))?;
    toml::from_str(&text).map_err(|e| {
        let msg = e.message().replace('\n', " ");
        Error::io(path, format!("bad settings: {msg}"))
    })
}

impl MeasureOptions {
    /// The measurement settings these options describe.
    pub fn settings(&self) -> Result<MeasurementSettings> {
        let file = match &self.settings {
            Some(p) => read_settings_file(p)?,
            None => SettingsFile::default(),
        };
        let mut s = MeasurementSettings::default();
        let pick = |flag: Option<usize>, file: Option<usize>, default: usize| {
            flag.or(file).unwrap_or(default)
        };
        s.scales = pick(self.scales, file.scales, s.scales);
        s.orientations = pick(self.orientations, file.orientations, s.orientations);
        s.tile_pixels = pick(self.tile_pixels, file.tile_pixels, s.tile_pixels);
        s.border_pixels = pick(self.border_pixels, file.border_pixels, s.border_pixels);
        s.spectrum_bins = pick(self.spectrum_bins, file.spectrum_bins, s.spectrum_bins);
        s.coarse_nside = self.coarse_nside.or(file.coarse_nside);
        s.pixel_arcmin = self.pixel_arcmin.or(file.pixel_arcmin);
        if let Some(c) = self.sampling.or(file.sampling) {
            s.sampling = c.into();
        }
        s.bispectrum = !self.no_bispectrum && file.bispectrum.unwrap_or(true);
        Ok(s)
    }
}

/// Measure the scattering statistics of a map on its (masked) footprint.
#[derive(Debug, clap::Args)]
pub struct MeasureArgs {
    /// The map (HEALPix FITS).
    #[arg(value_name = "MAP.fits")]
    pub map: PathBuf,
    /// Column of the map file: 0-based position or name.
    #[arg(long, default_value = "0")]
    pub column: ColumnChoice,
    #[command(flatten)]
    pub mask: MaskArgs,
    #[command(flatten)]
    pub options: MeasureOptions,
    /// Output JSON file.
    #[arg(long, short, value_name = "FILE.json")]
    pub output: PathBuf,
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

/// The JSON document of one measurement.
pub fn measurement_document(
    measurer: &SphereMeasurer,
    stats: &MapStatistics,
    source: &str,
    taper: &serde_json::Value,
) -> serde_json::Value {
    let record = |c: &crate::statistics::Coefficient| CoefficientRecord {
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
    let s = measurer.settings();
    serde_json::json!({
        "program": "planisphere",
        "program_version": env!("CARGO_PKG_VERSION"),
        "map": source,
        "settings": {
            "scales": s.scales,
            "orientations": s.orientations,
            "tile_pixels": s.tile_pixels,
            "coarse_nside": measurer.plan().coarse_pixelization().nside(),
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
        "compact": stats.compact,
        "band_powers": band_powers,
        "tile_power_spectrum": stats.tile_power,
        "tile_bispectrum": stats.tile_bispectrum,
    })
}

/// Measures one map and writes the JSON document.
pub fn run(args: &MeasureArgs) -> Result<()> {
    super::output::check_output_path(&args.output)?;
    let settings = args.options.settings()?;
    let map = load_map(&args.map, &args.column)?;
    let footprint = args.mask.footprint_for(&map)?;
    let measurer = SphereMeasurer::new(map.pixelization(), &footprint, settings)?;
    let summary = measurer.summary();
    let stats = measurer.measure(&map, &footprint)?;
    let taper = serde_json::json!({
        "kind": format!("{:?}", args.mask.taper),
        "width_arcmin": args.mask.taper_arcmin,
        "mask": args.mask.mask.as_ref().map(|p| p.display().to_string()),
    });
    let doc = measurement_document(&measurer, &stats, &args.map.display().to_string(), &taper);
    write_json(&args.output, &doc)?;
    let trusted = stats
        .coefficients
        .coefficients
        .iter()
        .filter(|c| c.trusted)
        .count();
    println!(
        "{} tiles (coarse NSIDE {}, {}² pixels of {:.2}′): {} coefficients ({} trusted), {} compact, written to {}",
        stats.tiles,
        summary.coarse_nside,
        summary.tile_pixels,
        summary.pixel_size_arcmin,
        stats.coefficients.coefficients.len(),
        trusted,
        stats.compact.len(),
        args.output.display()
    );
    for c in &stats.compact {
        println!(
            "  {:<32} {:>13.6e}{}",
            c.name,
            c.value,
            if c.trusted { "" } else { "  (untrusted)" }
        );
    }
    Ok(())
}
