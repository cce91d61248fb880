//! `planisphere measure`: scattering coefficients, orientation-harmonic summary, band powers, tile power spectrum
//! and bispectrum of one map on its footprint, written as JSON; with `--cross OTHER.fits`, the
//! same for both maps on their common footprint plus their cross statistics. A flat field
//! (`FIELD.npy --pixel-arcmin A [--mask MASK.npy]`) is measured as one periodic or masked tile
//! with the same estimator, settings and JSON layout ([`crate::measure::flat::measure`]).

use super::inputs::{load_map, untapered_footprint, MaskArgs};
use crate::error::{Error, Result};
use crate::files::write_json;
use crate::io::fits_io::{ColumnChoice, HealpixFitsReader};
use crate::io::footprint_read::{
    empty_map, holds_a_valid_pixel, read_footprint_by_blocks, read_map_blocks, read_valid_blocks,
    reads_by_blocks,
};
pub use crate::io::measurement_document::measurement_document;
use crate::io::measurement_document::pair_document;
use crate::measure::measurement::{MapStatistics, MeasurementSettings, SphereMeasurer};
use crate::measure::settings::MeasurementChoices;
use crate::sky::block_map::OutsideBlocks;
use crate::sky::footprint::{Footprint, WEIGHT_BLOCK};
use crate::sky::measurable::check_measurable_blocks;
use crate::sky::skymap::SkyMap;
use crate::tiles::tiling::TilingSummary;
use std::path::{Path, PathBuf};

/// How one map is measured, shared by `measure` and `plot tile-map`: the column of its file,
/// its mask and taper, and the measurement options.
#[derive(Debug, Clone, clap::Args)]
pub struct MapMeasurementArgs {
    /// Column of the map file: 0-based position or name.
    #[arg(long, default_value = "0")]
    pub column: ColumnChoice,
    #[command(flatten)]
    pub mask: MaskArgs,
    #[command(flatten)]
    pub options: MeasureOptions,
}

/// Measurement options shared by `measure`, `ensemble`, `tiles` and `plot`: the measurement
/// choices as flags ([`MeasurementChoices`]) and a `--settings` TOML file of the same keys;
/// flags override the values of the file, which override the defaults.
#[derive(Debug, Clone, Default, clap::Args)]
pub struct MeasureOptions {
    /// TOML file with any of: scales, orientations, tile_pixels, coarse_nside, pixel_arcmin,
    /// border_pixels, sampling, spectrum_bins, bispectrum.
    #[arg(long, value_name = "FILE.toml")]
    pub settings: Option<PathBuf>,
    #[command(flatten)]
    pub choices: MeasurementChoices,
}

/// The choices of a `--settings` file.
fn read_settings_file(path: &Path) -> Result<MeasurementChoices> {
    let text = crate::files::read_text(path)?;
    toml::from_str(&text).map_err(|e| super::inputs::toml_error(path, &text, &e, "bad settings"))
}

impl MeasureOptions {
    /// The measurement settings these options describe: flag, else file, else default.
    pub fn settings(&self) -> Result<MeasurementSettings> {
        let file = match &self.settings {
            Some(p) => read_settings_file(p)?,
            None => MeasurementChoices::default(),
        };
        Ok(self
            .choices
            .or(&file)
            .resolve(MeasurementSettings::default()))
    }
}

/// Measure the scattering statistics of a map on its (masked) footprint; with `--cross`, of two
/// maps on their common footprint plus their cross statistics.
#[derive(Debug, clap::Args)]
pub struct MeasureArgs {
    /// The map: HEALPix FITS, or a flat field as .npy (2-D float64 or float32, n × n with n =
    /// 2^k·m, m = 1, 3, 5, 7, 9, at least 8 and 16·m when m > 1), which needs --pixel-arcmin
    /// and is periodic unless --mask gives a .npy mask of the same shape (values in [0, 1],
    /// 0 = masked, used as taper and weight as given).
    #[arg(value_name = "MAP.fits|FIELD.npy")]
    pub map: PathBuf,
    #[command(flatten)]
    pub measuring: MapMeasurementArgs,
    /// A second map (same NSIDE; another ordering is converted): measure both maps on their
    /// common footprint and add their cross statistics (cross band powers, each map against
    /// the other's wavelet modulus at orders 1 and 2) under "cross" in the JSON.
    #[arg(long, value_name = "OTHER.fits")]
    pub cross: Option<PathBuf>,
    /// Column of the second map's file: 0-based position or name.
    #[arg(long, value_name = "COLUMN", default_value = "0", requires = "cross")]
    pub cross_column: ColumnChoice,
    /// Mask or weight map of the second map [default: its valid pixels]; the common footprint
    /// is the smaller of the two weights per pixel, then tapered by --taper.
    #[arg(long, value_name = "MASK.fits", requires = "cross")]
    pub cross_mask: Option<PathBuf>,
    /// Column of the second mask file: 0-based position or name.
    #[arg(
        long,
        value_name = "COLUMN",
        default_value = "0",
        requires = "cross_mask"
    )]
    pub cross_mask_column: ColumnChoice,
    /// Compute every layer on the full tile grid (no Fourier cropping): slower, exact to
    /// rounding instead of within about 1e-3.
    #[arg(long)]
    pub full_resolution: bool,
    /// Output JSON file.
    #[arg(long, short, value_name = "FILE.json")]
    pub output: PathBuf,
}

/// Measures one map (or a pair with `--cross`) and writes the JSON document. One map in a
/// full-sky file, with a full-sky mask of its NSIDE and ordering or without a mask, is read at
/// the size of its footprint (`run_on_footprint`): the same document, byte for byte, in
/// about f_sky of the memory; other inputs are read whole ([`run_reading_whole_map`]).
pub fn run(args: &MeasureArgs) -> Result<()> {
    crate::files::check_output_path(&args.output)?;
    let mut settings = args.measuring.options.settings()?;
    if args.full_resolution {
        settings.transform.fourier_cropping = false;
    }
    if args.cross.is_none() && !super::flat_input::is_flat_field(&args.map)? {
        let map_reader = HealpixFitsReader::open(&args.map)?;
        if reads_by_blocks(map_reader.header()) {
            // a mask that cannot be read by blocks (or not opened: the whole reading then
            // reports it in its own order) leaves the map to be read whole
            let mask_reader = match &args.measuring.mask.mask {
                None => Some(None),
                Some(path) => HealpixFitsReader::open(path)
                    .ok()
                    .filter(|r| {
                        reads_by_blocks(r.header())
                            && r.header().nside == map_reader.header().nside
                            && r.header().ordering == map_reader.header().ordering
                    })
                    .map(Some),
            };
            if let Some(mask_reader) = mask_reader {
                return run_on_footprint(args, settings, map_reader, mask_reader);
            }
        }
    }
    run_reading_whole_map(args)
}

/// [`run`] for one map read by blocks: the mask by chunks into the blocks holding a positive
/// weight, the map on those blocks (without a mask, on the blocks holding a valid pixel), then
/// on the blocks the planned tiles read ([`crate::tiles::reach::read_ranges`]). The same
/// checks, refusals and document as [`run_reading_whole_map`].
fn run_on_footprint(
    args: &MeasureArgs,
    settings: MeasurementSettings,
    mut map_reader: HealpixFitsReader,
    mask_reader: Option<HealpixFitsReader>,
) -> Result<()> {
    let label = args.map.display().to_string();
    let every_pixel_bad = || {
        Error::Data(format!(
            "{label}: every pixel is bad (UNSEEN or NaN): nothing to measure"
        ))
    };
    // the column's refusals before anything else, as when the map is read whole
    map_reader.read_value_range(&args.measuring.column, 0, 1)?;
    for w in &map_reader.header().warnings {
        eprintln!("planisphere: warning: {label}: {w}");
    }
    let (mut map, raw) = match mask_reader {
        None => {
            let map = read_valid_blocks(&mut map_reader, &args.measuring.column)?;
            if map.stored_valid_count() == 0 {
                return Err(every_pixel_bad());
            }
            check_footprint_memory(map.nside(), map.stored_values())?;
            let raw = map.restrict(map.valid_footprint()?)?;
            (map, raw)
        }
        Some(mut mask_reader) => {
            let mask_path = args
                .measuring
                .mask
                .mask
                .as_deref()
                .unwrap_or(Path::new("mask"));
            let mask = match read_footprint_by_blocks(
                &mut mask_reader,
                &args.measuring.mask.mask_column,
            ) {
                Ok(mask) => mask,
                // a map without a valid pixel is refused first, as when read whole
                Err(_) if !holds_a_valid_pixel(&mut map_reader, &args.measuring.column)? => {
                    return Err(every_pixel_bad());
                }
                Err(e) => return Err(e),
            };
            let header = mask_reader.header();
            for w in &header.warnings {
                eprintln!("planisphere: warning: {}: {w}", mask_path.display());
            }
            let held = mask.weighted_blocks().count() * WEIGHT_BLOCK;
            check_footprint_memory(header.nside, held)?;
            let mut map = empty_map(map_reader.header())?;
            read_map_blocks(
                &mut map_reader,
                &args.measuring.column,
                &mut map,
                mask.weighted_blocks(),
            )?;
            if map.stored_valid_count() == 0
                && !holds_a_valid_pixel(&mut map_reader, &args.measuring.column)?
            {
                return Err(every_pixel_bad());
            }
            super::inputs::check_same_coordsys(
                (&label, map.coordsys.as_deref()),
                (&mask_path.display().to_string(), header.coordsys.as_deref()),
                args.measuring.mask.allow_coordsys_mismatch,
            )?;
            let raw = map.restrict(mask)?;
            super::inputs::refuse_single_pixel_mask(&raw)?;
            (map, raw)
        }
    };
    let footprint = args.measuring.mask.taper_footprint(raw)?;
    check_measurable_blocks(&map, &footprint, &label)?;
    let measurer = SphereMeasurer::new(map.pixelization(), &footprint, settings)?;
    if map.outside() == OutsideBlocks::NotRead {
        let blocks = crate::tiles::reach::read_blocks(measurer.plan())?;
        read_map_blocks(&mut map_reader, &args.measuring.column, &mut map, blocks)?;
    }
    let stats = measurer.measure_blocks(&map, &footprint)?;
    write_single(args, &measurer, &stats)
}

/// Refuses a measurement whose footprint holds `held` pixels (blocks of 64) of an NSIDE `nside`
/// map when it would not fit the memory limit: the estimate of the whole map
/// ([`crate::limits::measurement_bytes`]) scaled by the fraction of the sky held.
fn check_footprint_memory(nside: u32, held: usize) -> Result<()> {
    let npix = 12.0 * (nside as f64).powi(2);
    crate::limits::check_memory(
        &format!("measuring a NSIDE {nside} map"),
        crate::limits::measurement_bytes(nside, 1) * (held as f64 / npix).min(1.0),
    )
}

/// Writes the document of one map's statistics and prints its summary.
fn write_single(
    args: &MeasureArgs,
    measurer: &SphereMeasurer,
    stats: &MapStatistics,
) -> Result<()> {
    let taper = args.measuring.mask.taper_record();
    let doc = measurement_document(measurer, stats, &args.map.display().to_string(), &taper);
    write_json(&args.output, &doc)?;
    print_measurement(stats, &measurer.summary(), None, &args.output);
    Ok(())
}

/// [`run`] with the map and mask read whole into memory (the path before footprint-sized
/// reading; kept for maps it does not cover and for the memory benchmark).
pub fn run_reading_whole_map(args: &MeasureArgs) -> Result<()> {
    crate::files::check_output_path(&args.output)?;
    let mut settings = args.measuring.options.settings()?;
    if args.full_resolution {
        settings.transform.fourier_cropping = false;
    }
    if super::flat_input::is_flat_field(&args.map)? {
        return run_flat(args, settings);
    }
    let nside = crate::io::fits_io::HealpixFitsReader::open(&args.map)?
        .header()
        .nside;
    let maps = if args.cross.is_some() { 2 } else { 1 };
    crate::limits::check_memory(
        &format!("measuring a NSIDE {nside} map"),
        crate::limits::measurement_bytes(nside, maps),
    )?;
    let map = load_map(&args.map, &args.measuring.column)?;
    let other = match &args.cross {
        Some(path) => Some(load_second_map(args, &map, path)?),
        None => None,
    };
    let footprint = measurement_footprint(args, &map, other.as_ref())?;
    super::inputs::check_measurable(&map, Some(&footprint), &args.map.display().to_string())?;
    if let (Some(other), Some(path)) = (&other, &args.cross) {
        super::inputs::check_measurable(other, Some(&footprint), &path.display().to_string())?;
    }
    let measurer = SphereMeasurer::new(map.pixelization(), &footprint, settings)?;
    let summary = measurer.summary();
    let taper = args.measuring.mask.taper_record();
    let source = args.map.display().to_string();
    let (stats, doc, cross) = match &other {
        None => {
            let stats = measurer.measure(&map, &footprint)?;
            let doc = measurement_document(&measurer, &stats, &source, &taper);
            (stats, doc, None)
        }
        Some(other) => {
            let pair = measurer.measure_pair(&map, other, &footprint)?;
            let path = args.cross.as_deref().unwrap_or(Path::new(""));
            let doc = pair_document(
                &measurer,
                &pair,
                &source,
                &path.display().to_string(),
                args.cross_mask.as_deref(),
                &taper,
            );
            let trusted = pair.cross.coefficients.iter().filter(|c| c.trusted).count();
            let count = pair.cross.coefficients.len();
            (pair.first, doc, Some((count, trusted)))
        }
    };
    write_json(&args.output, &doc)?;
    print_measurement(&stats, &summary, cross, &args.output);
    Ok(())
}

/// The second map of `--cross`, in the first map's ordering, refused when it has no valid
/// pixel or another NSIDE or coordinate system.
fn load_second_map(args: &MeasureArgs, map: &SkyMap, path: &Path) -> Result<SkyMap> {
    let other = load_map(path, &args.cross_column)?;
    if other.valid_count() == 0 {
        return Err(Error::Data(format!(
            "{}: every pixel is bad (UNSEEN or NaN): nothing to cross-correlate",
            path.display()
        )));
    }
    if other.nside() != map.nside() {
        return Err(Error::Mismatch(format!(
            "{} has NSIDE {} but {} has NSIDE {}: cross statistics need one pixelization",
            args.map.display(),
            map.nside(),
            path.display(),
            other.nside()
        )));
    }
    super::inputs::check_same_coordsys(
        (&args.map.display().to_string(), map.coordsys.as_deref()),
        (&path.display().to_string(), other.coordsys.as_deref()),
        args.measuring.mask.allow_coordsys_mismatch,
    )?;
    other.to_ordering(map.ordering())
}

/// The footprint of the map, or with a second map the common footprint of both, tapered.
fn measurement_footprint(
    args: &MeasureArgs,
    map: &SkyMap,
    other: Option<&SkyMap>,
) -> Result<Footprint> {
    let Some(other) = other else {
        return args.measuring.mask.footprint_for(map, &args.map);
    };
    let first = untapered_footprint(
        map,
        &args.map,
        args.measuring.mask.mask.as_deref(),
        &args.measuring.mask,
        &args.measuring.mask.mask_column,
    )?;
    let other_path = args.cross.as_deref().unwrap_or(Path::new("second map"));
    let second = untapered_footprint(
        other,
        other_path,
        args.cross_mask.as_deref(),
        &args.measuring.mask,
        &args.cross_mask_column,
    )
    .map_err(|e| match e {
        Error::Data(m) => Error::Data(format!("second map: {m}")),
        e => e,
    })?;
    args.measuring
        .mask
        .taper_footprint(first.intersection(&second)?)
}

/// Prints the tiles, the file written, the cross-statistic count (count, trusted) and the
/// summary coefficients.
fn print_measurement(
    stats: &MapStatistics,
    summary: &TilingSummary,
    cross: Option<(usize, usize)>,
    output: &Path,
) {
    println!(
        "{} tiles ({}, {}² pixels of {:.2}′): {}",
        stats.tiles,
        summary.cells,
        summary.tile_pixels,
        summary.pixel_size_arcmin,
        written_line(stats, output)
    );
    if let Some((count, trusted)) = &cross {
        println!("  cross statistics with the second map: {count} ({trusted} trusted)");
    }
    for c in &stats.summary {
        println!(
            "  {:<32} {:>13.6e}{}",
            c.name,
            c.value,
            if c.trusted { "" } else { "  (untrusted)" }
        );
    }
}

/// Measures a flat field (.npy) as one periodic or masked tile and writes the JSON document.
fn run_flat(args: &MeasureArgs, settings: MeasurementSettings) -> Result<()> {
    let o = &args.measuring.options.choices;
    let sphere_only = [
        (args.cross.is_some(), "--cross"),
        (
            o.coarse_nside.is_some() || settings.coarse_nside.is_some(),
            "--coarse-nside",
        ),
        (
            o.tile_pixels.is_some() || settings.tile_pixels.is_some(),
            "--tile-pixels (the field is the tile)",
        ),
        (o.sampling.is_some(), "--sampling"),
        (o.border_pixels.is_some(), "--border-pixels"),
        (
            args.measuring.mask.allow_coordsys_mismatch,
            "--allow-coordsys-mismatch",
        ),
        (
            args.measuring.mask.taper != crate::sky::apodization::TaperKind::C2
                || args.measuring.mask.taper_arcmin != 60.0,
            "--taper/--taper-arcmin (a flat mask is used as given)",
        ),
    ];
    if let Some((_, name)) = sphere_only.iter().find(|(given, _)| *given) {
        return Err(Error::Setting(format!(
            "{name} applies to HEALPix maps only, not to the flat field {}",
            args.map.display()
        )));
    }
    let Some(arcmin) = settings.pixel_arcmin else {
        return Err(Error::Setting(format!(
            "the flat field {} needs --pixel-arcmin A (the side of its pixels in arcmin)",
            args.map.display()
        )));
    };
    settings.validate()?;
    let field = super::flat_input::read_field(&args.map)?;
    let n = field.size;
    let mask = match &args.measuring.mask.mask {
        Some(path) => Some(super::flat_input::read_mask(path, n)?),
        None => None,
    };
    let values = super::flat_input::field_values(&args.map, field.values, mask.as_deref())?;
    let pixel = (arcmin / 60.0).to_radians();
    let mut map = crate::measure::flat::FlatMap::new(n, pixel, values)?;
    if let Some(m) = &mask {
        map = map.with_mask(m.clone(), None)?;
    }
    let stats = crate::measure::flat::measure(&map, &settings)?;
    let doc = crate::io::measurement_document::flat_measurement_document(
        &stats,
        &settings,
        &args.map.display().to_string(),
        n,
        arcmin,
        mask.as_deref(),
        args.measuring
            .mask
            .mask
            .as_ref()
            .map(|p| p.display().to_string())
            .as_deref(),
    );
    let periodic = mask.is_none();
    write_json(&args.output, &doc)?;
    println!(
        "flat field {n}² pixels of {arcmin}′ ({}): {}",
        if periodic { "periodic" } else { "masked" },
        written_line(&stats, &args.output)
    );
    Ok(())
}

/// The end of `measure`'s report line: coefficient, trusted and summary counts and the output.
fn written_line(stats: &MapStatistics, output: &Path) -> String {
    let trusted = stats
        .coefficients
        .coefficients
        .iter()
        .filter(|c| c.trusted)
        .count();
    format!(
        "{} coefficients ({trusted} trusted), {} summary items, written to {}",
        stats.coefficients.coefficients.len(),
        stats.summary.len(),
        output.display()
    )
}
