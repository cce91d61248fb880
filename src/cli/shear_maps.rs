//! `planisphere shear-maps`: a galaxy catalogue (CSV or FITS table) binned into HEALPix maps of
//! counts, mean shear, shape-noise variance, density contrast and footprint, with optional
//! shape-noise realisations by random rotation. The science is in [`crate::catalogue`].

use crate::catalogue::convergence::{
    convergence_on_footprint, mass_mapper, ConvergenceOnFootprint,
};
use crate::catalogue::maps_file::{write_catalogue_maps, write_noise_maps};
use crate::catalogue::source::{
    DEFAULT_BLOCK_ROWS, DEFAULT_DEC_COLUMN, DEFAULT_E1_COLUMN, DEFAULT_E2_COLUMN,
    DEFAULT_RA_COLUMN, DEFAULT_WEIGHT_COLUMN,
};
use crate::catalogue::{
    bin_catalogue, BinningPlan, CatalogueColumns, CatalogueFormat, CatalogueSource,
    NoiseRealisations, WeightChoice,
};
use crate::error::{Error, Result};
use crate::harmonics::mass_mapping::{MassMappingSettings, ShearAxes};
use crate::sky::skymap::SkyMap;
use std::path::PathBuf;

/// Bin a galaxy catalogue (CSV with a header row, or a FITS binary table) into HEALPix maps:
/// galaxies, weight, mean shear γ1 γ2, its noise variance, density contrast δ and footprint mask.
#[derive(Debug, clap::Args)]
pub struct ShearMapsArgs {
    /// The catalogue: CSV text with a header row, or a FITS binary table.
    pub catalogue: PathBuf,
    /// Output HEALPix FITS file (columns GALAXIES, WEIGHT, GAMMA1, GAMMA2, NOISE_VAR, DELTA, MASK).
    #[arg(long, short, value_name = "PATH")]
    pub output: PathBuf,
    /// NSIDE of the maps (RING ordering).
    #[arg(long)]
    pub nside: u32,
    /// Column of right ascension, degrees (ICRS).
    #[arg(long, default_value = DEFAULT_RA_COLUMN, value_name = "NAME")]
    pub ra_column: String,
    /// Column of declination, degrees (ICRS).
    #[arg(long, default_value = DEFAULT_DEC_COLUMN, value_name = "NAME")]
    pub dec_column: String,
    /// Column of the first ellipticity component.
    #[arg(long, default_value = DEFAULT_E1_COLUMN, value_name = "NAME")]
    pub e1_column: String,
    /// Column of the second ellipticity component.
    #[arg(long, default_value = DEFAULT_E2_COLUMN, value_name = "NAME")]
    pub e2_column: String,
    /// Column of the weights [default: WEIGHT when the catalogue has it, else unit weights].
    #[arg(long, value_name = "NAME", conflicts_with = "unit_weights")]
    pub weight_column: Option<String>,
    /// Give every galaxy weight 1, even when the catalogue has a weight column.
    #[arg(long)]
    pub unit_weights: bool,
    /// Pixels with at least this many galaxies form the footprint.
    #[arg(long, default_value_t = 1, value_name = "N")]
    pub min_galaxies: u64,
    /// Catalogue rows read and binned at a time (memory: 40 bytes per row).
    #[arg(long, default_value_t = DEFAULT_BLOCK_ROWS, value_name = "ROWS")]
    pub block_rows: usize,
    /// Also bin this many shape-noise realisations (each galaxy's ellipticity turned by a random
    /// angle), written to --noise-output.
    #[arg(long, default_value_t = 0, value_name = "COUNT")]
    pub noise_realisations: u64,
    /// First realisation index (to continue a series).
    #[arg(long, default_value_t = 0, value_name = "INDEX")]
    pub first_realisation: u64,
    /// Seed of the rotation angles; realisation k of row r is the same for any block size.
    #[arg(long, default_value_t = 1)]
    pub noise_seed: u64,
    /// Path of each noise realisation, with `{index}` replaced by 0000, 0001, …
    /// (columns GAMMA1, GAMMA2, MASK, and KAPPA_E, KAPPA_B unless --no-kappa).
    #[arg(long, value_name = "PATH", requires = "noise_realisations")]
    pub noise_output: Option<PathBuf>,
    /// Do not make the convergence maps KAPPA_E, KAPPA_B (full-sky Kaiser–Squires on the
    /// footprint), which cost two spin-2 harmonic transforms per map.
    #[arg(long)]
    pub no_kappa: bool,
    /// Largest multipole of the convergence maps [default: 3·NSIDE − 1].
    #[arg(long, conflicts_with = "no_kappa")]
    pub lmax: Option<usize>,
    /// Gaussian smoothing of the convergence maps, FWHM in arcminutes.
    #[arg(
        long,
        value_name = "ARCMIN",
        conflicts_with = "no_kappa",
        allow_negative_numbers = true
    )]
    pub smooth_arcmin: Option<f64>,
    /// Axes of e1, e2: east-north (e1 > 0 along RA, e2 > 0 between increasing RA and Dec) or
    /// west-north (e2 of the opposite sign, as on a sky image with east to the left).
    #[arg(long, value_enum, default_value_t = AxesChoice::EastNorth)]
    pub shear_axes: AxesChoice,
}

/// The axes the ellipticities refer to (see [`crate::harmonics::mass_mapping::ShearAxes`]).
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum AxesChoice {
    /// x = increasing RA (east), y = increasing Dec (north).
    EastNorth,
    /// x = decreasing RA (west), y = north.
    WestNorth,
}

/// The column choice the options describe.
pub fn columns(args: &ShearMapsArgs) -> CatalogueColumns {
    CatalogueColumns {
        ra: args.ra_column.clone(),
        dec: args.dec_column.clone(),
        e1: args.e1_column.clone(),
        e2: args.e2_column.clone(),
        weight: match (&args.weight_column, args.unit_weights) {
            (_, true) => WeightChoice::Unit,
            (Some(name), false) => WeightChoice::Column(name.clone()),
            (None, false) => WeightChoice::Default,
        },
    }
}

/// The noise realisation files, one per realisation (checked before any work).
pub fn noise_paths(args: &ShearMapsArgs) -> Result<Vec<PathBuf>> {
    if args.noise_realisations == 0 {
        return Ok(Vec::new());
    }
    crate::limits::check_index_range(args.first_realisation, args.noise_realisations)?;
    let Some(pattern) = &args.noise_output else {
        return Err(Error::Setting(
            "--noise-realisations needs --noise-output PATH (with {index})".to_string(),
        ));
    };
    if !pattern.to_string_lossy().contains("{index}") {
        return Err(Error::Setting(format!(
            "--noise-output '{}' must contain {{index}}",
            pattern.display()
        )));
    }
    (0..args.noise_realisations)
        .map(|i| {
            super::sky::indexed_path(pattern, args.first_realisation + i, args.noise_realisations)
        })
        .collect()
}

/// Bins the catalogue and writes the maps.
pub fn run(args: &ShearMapsArgs) -> Result<()> {
    if args.block_rows == 0 {
        return Err(Error::Setting(
            "--block-rows must be at least 1".to_string(),
        ));
    }
    if args.min_galaxies == 0 {
        return Err(Error::Setting(
            "--min-galaxies must be at least 1".to_string(),
        ));
    }
    let noise_paths = noise_paths(args)?;
    let plan = BinningPlan {
        nside: args.nside,
        min_galaxies: args.min_galaxies,
        block_rows: args.block_rows,
        noise: (!noise_paths.is_empty()).then(|| NoiseRealisations {
            seed: args.noise_seed,
            indices: (0..args.noise_realisations)
                .map(|i| args.first_realisation + i)
                .collect(),
        }),
    };
    let settings = MassMappingSettings {
        smoothing_fwhm_arcmin: args.smooth_arcmin.unwrap_or(0.0),
        axes: match args.shear_axes {
            AxesChoice::EastNorth => ShearAxes::EastNorth,
            AxesChoice::WestNorth => ShearAxes::WestNorth,
        },
        ..MassMappingSettings::default()
    };
    let mut source = CatalogueSource::open(&args.catalogue, &columns(args))?;
    let maps = bin_catalogue(&mut source, &plan)?;
    // every map is made before the first file is written
    let mapper = if args.no_kappa {
        None
    } else {
        Some(mass_mapper(args.nside, args.lmax)?)
    };
    let kappa = |g1: &SkyMap, g2: &SkyMap| -> Result<Option<ConvergenceOnFootprint>> {
        mapper
            .as_ref()
            .map(|m| convergence_on_footprint(m, g1, g2, &maps.footprint, &settings))
            .transpose()
    };
    let columns_of = |k: &Option<ConvergenceOnFootprint>| -> Vec<(&'static str, SkyMap)> {
        k.iter()
            .flat_map(|k| [("KAPPA_E", k.e.clone()), ("KAPPA_B", k.b.clone())])
            .collect()
    };
    let data_kappa = columns_of(&kappa(&maps.gamma1, &maps.gamma2)?);
    let noise_kappa = maps
        .noise
        .iter()
        .map(|n| Ok(columns_of(&kappa(&n.gamma1, &n.gamma2)?)))
        .collect::<Result<Vec<_>>>()?;
    write_catalogue_maps(&args.output, &maps, &borrowed(&data_kappa))?;
    for ((noise, path), extra) in maps.noise.iter().zip(&noise_paths).zip(&noise_kappa) {
        write_noise_maps(path, noise, &maps, &borrowed(extra))?;
    }
    let weights = match source.weight_column() {
        Some(name) => format!("weights from column '{name}'"),
        None if matches!(columns(args).weight, WeightChoice::Default) => {
            format!("unit weights (no column '{DEFAULT_WEIGHT_COLUMN}')")
        }
        None => "unit weights".to_string(),
    };
    let footprint = maps.footprint.summary();
    let format = match source.format() {
        CatalogueFormat::Csv => "CSV",
        CatalogueFormat::Fits => "FITS table",
    };
    println!(
        "{} ({format}): {}; {weights}",
        args.catalogue.display(),
        maps.report.summary(),
    );
    if let Some(ranges) = maps.report.ranges() {
        println!("used galaxies span {ranges}");
    }
    if let Some(warning) = maps.report.radians_warning() {
        eprintln!("planisphere: {warning}");
    }
    if let Some(m) = &mapper {
        println!(
            "convergence KAPPA_E, KAPPA_B up to l = {}{}",
            m.lmax(),
            args.smooth_arcmin.map_or(String::new(), |s| format!(
                ", smoothed by a {s} arcmin FWHM Gaussian"
            ))
        );
    }
    println!(
        "{}: NSIDE {}, footprint {} pixels ({:.2} deg², f_sky {:.4}), {:.3} galaxies per footprint pixel",
        args.output.display(),
        args.nside,
        footprint.observed_pixels,
        footprint.area_deg2,
        footprint.f_sky,
        maps.mean_galaxies
    );
    for path in &noise_paths {
        println!("{}: noise realisation", path.display());
    }
    Ok(())
}

/// The (name, map) pairs of `columns`, borrowed as the writers take them.
fn borrowed<'a>(columns: &'a [(&'static str, SkyMap)]) -> Vec<(&'static str, &'a SkyMap)> {
    columns.iter().map(|(n, m)| (*n, m)).collect()
}
