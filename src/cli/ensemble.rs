//! `planisphere ensemble` and `planisphere merge`: statistics of many maps (files or
//! simulations) in one table, resumable and splittable into shards.

use super::inputs::MaskArgs;
use super::measure::MeasureOptions;
use crate::catalogue::noise_maps::{NoiseMapKind, NoiseMapRecipe};
use crate::catalogue::{BinningPlan, CatalogueColumns, WeightChoice};
use crate::ensemble::{
    file_checksum, members_from_glob, members_from_list, pair_members, EnsembleDescription,
    EnsembleJob, MemberSource, Shard,
};
use crate::error::{Error, Result};
use crate::harmonics::mass_mapping::{MassMapper, MassMappingSettings, ShearAxes};
use crate::harmonics::spectra::{angular_spectrum, cross_spectrum};
use crate::harmonics::spectrum::AngularSpectrum;
use crate::harmonics::HarmonicTransform;
use crate::io::fits_io::{read_footprint, read_map, ColumnChoice};
use crate::measure::measurement::{MeasurementSettings, SphereMeasurer, StatisticLabel};
use crate::simulate::skies::SkyRecipe;
use crate::sky::footprint::Footprint;
use crate::sky::pixelization::{Ordering, Pixelization};
use crate::sky::skymap::SkyMap;
use std::path::{Path, PathBuf};

/// Measure every map of an ensemble (files or simulations) into one table.
#[derive(Debug, clap::Args)]
pub struct EnsembleArgs {
    /// Directory of the ensemble: rows of finished maps, and the merged table at the end.
    #[arg(long, short, value_name = "DIR")]
    pub output_dir: PathBuf,
    /// Maps to measure, as a glob pattern (quote it), e.g. 'sims/kappa_*.fits'.
    #[arg(long, value_name = "PATTERN", group = "members")]
    pub maps: Option<String>,
    /// Maps to measure, one path per line (relative to the list file).
    #[arg(long, value_name = "FILE", group = "members")]
    pub map_list: Option<PathBuf>,
    /// Simulate the maps from a recipe (TOML: nside, count, seed, and optionally spectrum,
    /// model_variance, lmax, lognormal_shift, beam_arcmin, noise_sigma; or, instead of a sky,
    /// a catalogue_noise table: catalogue, map = kappa_e | kappa_b | gamma1 | gamma2, and
    /// shear-maps' options — member i is shape-noise realisation i of the catalogue).
    #[arg(long, value_name = "RECIPE.toml", group = "members")]
    pub simulate: Option<PathBuf>,
    /// Column of the map files: 0-based position or name.
    #[arg(long, default_value = "0")]
    pub column: ColumnChoice,
    /// Second maps of pairs, as a glob pattern: pair i is map i of --maps (map A) with map i
    /// of this pattern (map B), both sorted by path. Each row then holds map A's statistics
    /// (columns `a.…`), map B's (`b.…`) and their cross statistics (`cross.…`), measured on
    /// the common footprint.
    #[arg(long, value_name = "PATTERN")]
    pub second_maps: Option<String>,
    /// Second maps of pairs, one path per line, paired line by line with --map-list.
    #[arg(long, value_name = "FILE")]
    pub second_map_list: Option<PathBuf>,
    /// Column of the second maps' files: 0-based position or name.
    #[arg(long, default_value = "0")]
    pub second_column: ColumnChoice,
    #[command(flatten)]
    pub mask: MaskArgs,
    #[command(flatten)]
    pub options: MeasureOptions,
    /// Width of the ℓ bins of the pseudo-C_ℓ columns.
    #[arg(long, default_value_t = 16)]
    pub cl_bin_width: usize,
    /// Measure only shard INDEX of COUNT (0-based, e.g. 2/8); default: from SLURM_ARRAY_TASK_ID
    /// and SLURM_ARRAY_TASK_COUNT when set, else the whole ensemble.
    #[arg(long, value_name = "INDEX/COUNT")]
    pub shard: Option<String>,
    /// Do not draw a progress bar.
    #[arg(long)]
    pub quiet: bool,
}

/// A simulation recipe file.
#[derive(Debug, Clone, serde::Deserialize, serde::Serialize)]
#[serde(deny_unknown_fields)]
pub struct RecipeFile {
    pub nside: u32,
    pub count: u64,
    #[serde(default = "default_seed")]
    pub seed: u64,
    pub spectrum: Option<PathBuf>,
    pub model_variance: Option<f64>,
    pub lmax: Option<usize>,
    pub lognormal_shift: Option<f64>,
    /// With lognormal_shift: the spectrum is that of the underlying Gaussian field.
    pub gaussian_spectrum: Option<bool>,
    pub beam_arcmin: Option<f64>,
    pub noise_sigma: Option<f64>,
    /// Make correlated pairs of maps instead of single maps.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub pair: Option<PairRecipe>,
    /// Members are shape-noise realisations of a galaxy catalogue (member i = realisation i,
    /// seeded by `seed`) instead of simulated skies.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub catalogue_noise: Option<CatalogueNoiseTable>,
}

/// The `[catalogue_noise]` table of a recipe: which catalogue, which map of each realisation
/// (`gamma1`, `gamma2`, `kappa_e` (default), `kappa_b`), and the options of `shear-maps`.
#[derive(Debug, Clone, serde::Deserialize, serde::Serialize)]
#[serde(deny_unknown_fields)]
pub struct CatalogueNoiseTable {
    /// The catalogue (relative to the recipe file).
    pub catalogue: PathBuf,
    /// The map measured.
    #[serde(default = "default_noise_map")]
    pub map: NoiseMapKind,
    pub ra_column: Option<String>,
    pub dec_column: Option<String>,
    pub e1_column: Option<String>,
    pub e2_column: Option<String>,
    pub weight_column: Option<String>,
    #[serde(default)]
    pub unit_weights: bool,
    pub min_galaxies: Option<u64>,
    pub smooth_arcmin: Option<f64>,
    /// `east-north` (default) or `west-north`.
    pub shear_axes: Option<String>,
}

fn default_noise_map() -> NoiseMapKind {
    NoiseMapKind::KappaE
}

impl CatalogueNoiseTable {
    /// The library recipe for maps of `nside` up to `lmax`, seeded by `seed`.
    pub fn recipe(&self, nside: u32, lmax: Option<usize>, seed: u64) -> Result<NoiseMapRecipe> {
        let defaults = CatalogueColumns::default();
        let columns = CatalogueColumns {
            ra: self.ra_column.clone().unwrap_or(defaults.ra),
            dec: self.dec_column.clone().unwrap_or(defaults.dec),
            e1: self.e1_column.clone().unwrap_or(defaults.e1),
            e2: self.e2_column.clone().unwrap_or(defaults.e2),
            weight: match (&self.weight_column, self.unit_weights) {
                (_, true) => WeightChoice::Unit,
                (Some(n), false) => WeightChoice::Column(n.clone()),
                (None, false) => WeightChoice::Default,
            },
        };
        let axes = match self.shear_axes.as_deref().unwrap_or("east-north") {
            "east-north" => ShearAxes::EastNorth,
            "west-north" => ShearAxes::WestNorth,
            other => {
                return Err(Error::Setting(format!(
                    "recipe catalogue_noise.shear_axes must be 'east-north' or 'west-north', got '{other}'"
                )))
            }
        };
        Ok(NoiseMapRecipe {
            catalogue: self.catalogue.clone(),
            columns,
            plan: BinningPlan {
                min_galaxies: self.min_galaxies.unwrap_or(1).max(1),
                ..BinningPlan::new(nside)
            },
            seed,
            map: self.map,
            lmax,
            settings: MassMappingSettings {
                smoothing_fwhm_arcmin: self.smooth_arcmin.unwrap_or(0.0),
                axes,
                ..MassMappingSettings::default()
            },
        })
    }
}

/// The `[pair]` table of a recipe: map B of pair i is made from the Gaussian field of map A and
/// an independent one with correlation coefficient `correlation`
/// ([`SkyRecipe::realise_pair`]).
#[derive(Debug, Clone, serde::Deserialize, serde::Serialize)]
#[serde(deny_unknown_fields)]
pub struct PairRecipe {
    /// Correlation coefficient r of the two Gaussian fields, in [−1, 1].
    pub correlation: f64,
    /// White noise per pixel of map B (default: the recipe's `noise_sigma`).
    pub noise_sigma: Option<f64>,
}

fn default_seed() -> u64 {
    1
}

impl RecipeFile {
    /// Reads a recipe file (paths inside it are relative to the file).
    pub fn read(path: &Path) -> Result<RecipeFile> {
        let text = crate::files::read_text(path)?;
        let mut r: RecipeFile = toml::from_str(&text)
            .map_err(|e| super::inputs::toml_error(path, &text, &e, "bad recipe"))?;
        if let Some(s) = &r.spectrum {
            if s.is_relative() {
                r.spectrum = Some(path.parent().unwrap_or(Path::new("")).join(s));
            }
        }
        if let Some(c) = &mut r.catalogue_noise {
            if c.catalogue.is_relative() {
                c.catalogue = path.parent().unwrap_or(Path::new("")).join(&c.catalogue);
            }
        }
        Ok(r)
    }

    /// The sky recipe.
    pub fn recipe(&self) -> Result<SkyRecipe> {
        if self.nside < 4 || !self.nside.is_power_of_two() || self.nside > 4096 {
            return Err(Error::Setting(format!(
                "recipe nside must be a power of two from 4 to 4096, got {}",
                self.nside
            )));
        }
        crate::limits::check_count("recipe count", self.count)?;
        let lognormal = self.lognormal_shift.is_some();
        let lmax =
            crate::simulate::skies::checked_lmax(self.nside, self.lmax, lognormal, "recipe lmax")?;
        let spectrum = match &self.spectrum {
            Some(p) => AngularSpectrum::read_text(p)?,
            None => AngularSpectrum::demo_model(lmax, self.model_variance.unwrap_or(1e-4)),
        };
        Ok(SkyRecipe {
            nside: self.nside,
            lmax,
            spectrum,
            lognormal_shift: self.lognormal_shift,
            spectrum_is_gaussian: self.gaussian_spectrum.unwrap_or(false),
            beam_fwhm_arcmin: self.beam_arcmin,
            noise_sigma: self.noise_sigma,
            seed: self.seed,
        })
    }
}

/// Everything needed to measure members: the measurer, its footprint and what is shared.
pub struct EnsembleMeasurer {
    pub measurer: SphereMeasurer,
    pub footprint: Footprint,
    pub sht: HarmonicTransform,
    pub cl_bin_width: usize,
}

impl EnsembleMeasurer {
    /// Builds the measurer for maps of `pix` on the (already tapered) `footprint`.
    pub fn new(
        pix: Pixelization,
        footprint: Footprint,
        settings: MeasurementSettings,
        cl_bin_width: usize,
    ) -> Result<Self> {
        if cl_bin_width == 0 || cl_bin_width > 10_000 {
            return Err(Error::Setting(format!(
                "--cl-bin-width must be from 1 to 10000, got {cl_bin_width}"
            )));
        }
        let measurer = SphereMeasurer::new(pix, &footprint, settings)?;
        let sht = HarmonicTransform::new(pix.nside() as usize, 2 * pix.nside() as usize)?;
        Ok(EnsembleMeasurer {
            measurer,
            footprint,
            sht,
            cl_bin_width,
        })
    }

    /// Column labels: the measurer's statistics, then pseudo-C_ℓ bins `cl.ell{min}_{max}`.
    pub fn labels(&self) -> Vec<StatisticLabel> {
        let mut labels = self.measurer.vector_labels();
        let lmax = self.sht.lmax();
        let mut start = 2;
        while start <= lmax {
            let end = (start + self.cl_bin_width - 1).min(lmax);
            let ell = 0.5 * (start + end) as f64;
            labels.push(StatisticLabel {
                name: format!("cl.ell{start}_{end}"),
                scale_arcmin: Some(360.0 * 60.0 / ell),
            });
            start = end + 1;
        }
        labels
    }

    /// Column labels of a pair of maps: every label of [`Self::labels`] for map A (`a.` +
    /// name) and for map B (`b.` + name), then the cross coefficients (`cross.` + the name of
    /// [`crate::scattering::statistics::CrossLabel::name`], at the scale of j1) and the pseudo-C_ℓ bins of
    /// the cross-spectrum (`cross.cl.ell{min}_{max}`).
    pub fn pair_labels(&self) -> Vec<StatisticLabel> {
        let single = self.labels();
        let mut out = Vec::with_capacity(3 * single.len());
        for prefix in ["a.", "b."] {
            out.extend(single.iter().map(|l| StatisticLabel {
                name: format!("{prefix}{}", l.name),
                scale_arcmin: l.scale_arcmin,
            }));
        }
        for c in self.measurer.engine().cross_labels() {
            out.push(StatisticLabel {
                name: format!("cross.{}", c.name()),
                scale_arcmin: c.path.j1.map(|j| self.measurer.wavelet_scale_arcmin(j)),
            });
        }
        out.extend(
            single
                .iter()
                .filter(|l| l.name.starts_with("cl."))
                .map(|l| StatisticLabel {
                    name: format!("cross.{}", l.name),
                    scale_arcmin: l.scale_arcmin,
                }),
        );
        out
    }

    /// The statistics vector of a pair of maps, in the order of [`Self::pair_labels`]: both maps
    /// measured together on the footprint less the bad pixels of either
    /// ([`SphereMeasurer::measure_pair`]), with their pseudo-C_ℓ and cross pseudo-C_ℓ on that
    /// footprint. Map B is brought to map A's ordering.
    pub fn measure_pair(&self, a: &SkyMap, b: &SkyMap) -> Result<Vec<f64>> {
        if a.nside() != b.nside() {
            return Err(Error::Mismatch(format!(
                "the maps of a pair have NSIDE {} and {}",
                a.nside(),
                b.nside()
            )));
        }
        let b = b.to_ordering(a.ordering())?;
        let fp = self.footprint.restricted_to(a)?.restricted_to(&b)?;
        let pair = self.measurer.measure_pair(a, &b, &fp)?;
        let weights = (fp.f_sky() < 1.0).then_some(&fp);
        let cl = |x: &SkyMap, y: &SkyMap| -> Result<Vec<f64>> {
            let s = cross_spectrum(x, y, weights, &self.sht, 0, self.cl_bin_width)?;
            Ok(s.bins.iter().map(|b| b.cl).collect())
        };
        let mut v = pair.first.vector();
        v.extend(cl(a, a)?);
        v.extend(pair.second.vector());
        v.extend(cl(&b, &b)?);
        v.extend(pair.cross.coefficients.iter().map(|c| c.value));
        v.extend(cl(a, &b)?);
        Ok(v)
    }

    /// The statistics vector of one map: scattering and tile spectra, then pseudo-C_ℓ bins.
    pub fn measure(&self, map: &SkyMap) -> Result<Vec<f64>> {
        // the tapered footprint, less the map's own bad pixels
        let fp = if map.valid_count() == map.pixelization().npix() {
            self.footprint.clone()
        } else {
            let moved = self.footprint.to_ordering(map.ordering())?;
            let w: Vec<f64> = moved
                .weights()
                .iter()
                .zip(map.valid())
                .map(|(&w, &ok)| if ok { w } else { 0.0 })
                .collect();
            Footprint::from_weights(moved.pixelization(), w)?
        };
        let stats = self.measurer.measure(map, &fp)?;
        let mut v = stats.vector();
        let weights = (fp.f_sky() < 1.0).then_some(&fp);
        let cl = angular_spectrum(map, weights, &self.sht, 0, self.cl_bin_width)?;
        v.extend(cl.bins.iter().map(|b| b.cl));
        Ok(v)
    }
}

/// The tapered footprint for maps of `pix`: the mask file, or the full sky.
pub fn ensemble_footprint(
    mask: &MaskArgs,
    pix: Pixelization,
    first_map: Option<&SkyMap>,
) -> Result<Footprint> {
    match (&mask.mask, first_map) {
        (Some(path), _) => {
            let (fp, header) = read_footprint(path, &mask.mask_column)?;
            if let Some(map) = first_map {
                super::inputs::check_same_coordsys(
                    ("the first map", map.coordsys.as_deref()),
                    (&path.display().to_string(), header.coordsys.as_deref()),
                    mask.allow_coordsys_mismatch,
                )?;
            }
            fp.check_map_nside(pix.nside())?;
            let fp = fp.to_ordering(pix.ordering())?;
            super::inputs::refuse_single_pixel_mask(&fp)?;
            mask.taper_footprint(fp)
        }
        (None, Some(map)) => mask.footprint_for(map, Path::new("the first map")),
        (None, None) => Ok(Footprint::full_sky(pix)),
    }
}

/// Measures the ensemble.
pub fn run(args: &EnsembleArgs) -> Result<()> {
    let settings = args.options.settings()?;
    let shard = match &args.shard {
        Some(s) => Shard::parse(s)?,
        None => Shard::from_slurm_env()?.unwrap_or(Shard::ALL),
    };
    check_second_lists(args)?;
    let (members, recipe, recipe_file) = ensemble_members(args)?;
    let pair_recipe = recipe_file.as_ref().and_then(|f| f.pair.clone());
    let is_pair =
        args.second_maps.is_some() || args.second_map_list.is_some() || pair_recipe.is_some();
    let loader = MemberLoader {
        column: &args.column,
        second_column: &args.second_column,
        sky_sht: match &recipe {
            Some(r) => Some(r.transform()?),
            None => None,
        },
        recipe,
        pair_recipe,
        catalogue_noise: match recipe_file.as_ref().and_then(|f| {
            f.catalogue_noise
                .as_ref()
                .map(|c| c.recipe(f.nside, f.lmax, f.seed))
        }) {
            Some(r) => {
                let r = r?;
                let mapper = r.mapper()?;
                Some((r, mapper))
            }
            None => None,
        },
    };
    // the pixelization and footprint, from the first member
    let (first_map, _) = loader.load(&members[0])?;
    let pix = first_map.pixelization();
    let footprint = ensemble_footprint(
        &args.mask,
        pix,
        loader.recipe.is_none().then_some(&first_map),
    )?;
    // what the members are checked against, without holding the first map through the run
    let first = FirstMap {
        nside: first_map.nside(),
        coordsys: first_map.coordsys.clone(),
    };
    drop(first_map);
    let em = EnsembleMeasurer::new(pix, footprint, settings, args.cl_bin_width)?;
    let labels = if is_pair {
        em.pair_labels()
    } else {
        em.labels()
    };
    let mut settings_json =
        settings_record(args, &settings, pix, &em, &labels, recipe_file.as_ref())?;
    if is_pair {
        mark_pair(&mut settings_json, args, loader.recipe.is_some());
    }
    let description = EnsembleDescription {
        program_version: env!("CARGO_PKG_VERSION").to_string(),
        members: members.clone(),
        labels: labels.iter().map(|l| l.name.clone()).collect(),
        settings: settings_json,
    };
    let job = EnsembleJob::create_or_open(&args.output_dir, description)?;
    let report = job.run(
        shard,
        |_, source| {
            let (map, second) = loader.load(source)?;
            for (which, m) in
                std::iter::once(("", &map)).chain(second.iter().map(|b| ("map B of ", b)))
            {
                check_member_map(args, &first, source, which, m)?;
            }
            match &second {
                None => em.measure(&map),
                Some(b) => em.measure_pair(&map, b),
            }
        },
        !args.quiet,
    )?;
    print_report(args, &report, shard, labels.len())
}

/// The second list pairs with its own kind of first list, checked before anything is read.
fn check_second_lists(args: &EnsembleArgs) -> Result<()> {
    for (second, first, needs) in [
        (
            args.second_maps.is_some(),
            args.maps.is_some(),
            "--second-maps pairs with --maps",
        ),
        (
            args.second_map_list.is_some(),
            args.map_list.is_some(),
            "--second-map-list pairs with --map-list",
        ),
    ] {
        if second && !first {
            return Err(Error::Setting(format!(
                "{needs}: give both lists (a recipe makes pairs with a [pair] table)"
            )));
        }
    }
    Ok(())
}

/// The members of the ensemble (files, file pairs or simulations) and, for simulations, the
/// recipe and its file.
fn ensemble_members(
    args: &EnsembleArgs,
) -> Result<(Vec<MemberSource>, Option<SkyRecipe>, Option<RecipeFile>)> {
    Ok(match (&args.maps, &args.map_list, &args.simulate) {
        (Some(g), None, None) => {
            let first = members_from_glob(g)?;
            let members = match &args.second_maps {
                Some(g2) => pair_members(first, members_from_glob(g2)?).map_err(|e| {
                    Error::Setting(format!("--maps '{g}' and --second-maps '{g2}': {e}"))
                })?,
                None => first,
            };
            (members, None, None)
        }
        (None, Some(l), None) => {
            let first = members_from_list(l)?;
            let members = match &args.second_map_list {
                Some(l2) => pair_members(first, members_from_list(l2)?).map_err(|e| {
                    Error::Setting(format!(
                        "--map-list {} and --second-map-list {}: {e}",
                        l.display(),
                        l2.display()
                    ))
                })?,
                None => first,
            };
            (members, None, None)
        }
        (None, None, Some(r)) => {
            let file = RecipeFile::read(r)?;
            if file.catalogue_noise.is_some() {
                check_catalogue_noise_recipe(&file)?;
                return Ok((
                    (0..file.count).map(MemberSource::Simulation).collect(),
                    None,
                    Some(file),
                ));
            }
            let recipe = file.recipe()?;
            if let Some(p) = &file.pair {
                // checked before any directory is made
                check_pair_recipe(p)?;
            }
            (
                (0..file.count).map(MemberSource::Simulation).collect(),
                Some(recipe),
                Some(file),
            )
        }
        _ => {
            return Err(Error::Setting(
                "give exactly one of --maps, --map-list or --simulate".into(),
            ))
        }
    })
}

/// A recipe of catalogue noise members makes no sky: only nside, count, seed, lmax and the
/// `[catalogue_noise]` table apply.
fn check_catalogue_noise_recipe(file: &RecipeFile) -> Result<()> {
    let sky_keys = [
        ("spectrum", file.spectrum.is_some()),
        ("model_variance", file.model_variance.is_some()),
        ("lognormal_shift", file.lognormal_shift.is_some()),
        ("gaussian_spectrum", file.gaussian_spectrum.is_some()),
        ("beam_arcmin", file.beam_arcmin.is_some()),
        ("noise_sigma", file.noise_sigma.is_some()),
        ("pair", file.pair.is_some()),
    ];
    if let Some((key, _)) = sky_keys.iter().find(|(_, set)| *set) {
        return Err(Error::Setting(format!(
            "recipe key '{key}' describes a simulated sky and does not apply with [catalogue_noise]"
        )));
    }
    crate::limits::check_count("recipe count", file.count)?;
    Pixelization::new(file.nside, Ordering::Ring)?;
    Ok(())
}

/// Reads or simulates a member's map A and, for pairs, map B.
struct MemberLoader<'a> {
    column: &'a ColumnChoice,
    second_column: &'a ColumnChoice,
    recipe: Option<SkyRecipe>,
    sky_sht: Option<HarmonicTransform>,
    pair_recipe: Option<PairRecipe>,
    /// Catalogue noise members: the recipe and its mass mapper (κ maps only).
    catalogue_noise: Option<(NoiseMapRecipe, Option<MassMapper>)>,
}

impl MemberLoader<'_> {
    fn load(&self, source: &MemberSource) -> Result<(SkyMap, Option<SkyMap>)> {
        if let (MemberSource::Simulation(i), Some((recipe, mapper))) =
            (source, &self.catalogue_noise)
        {
            return Ok((recipe.realise(mapper.as_ref(), *i)?, None));
        }
        match (source, &self.recipe, &self.sky_sht) {
            (MemberSource::File(p), _, _) => Ok((read_map(p, self.column)?.0, None)),
            (MemberSource::FilePair(a, b), _, _) => Ok((
                read_map(a, self.column)?.0,
                Some(read_map(b, self.second_column)?.0),
            )),
            (MemberSource::Simulation(i), Some(r), Some(sht)) => match &self.pair_recipe {
                None => Ok((r.realise(sht, *i)?, None)),
                Some(p) => {
                    let noise = p.noise_sigma.or(r.noise_sigma);
                    let (a, b) = r.realise_pair(sht, *i, p.correlation, noise)?;
                    Ok((a, Some(b)))
                }
            },
            _ => Err(Error::Setting("a simulated member without a recipe".into())),
        }
    }
}

/// The settings that identify the job (a rerun with other settings is refused).
fn settings_record(
    args: &EnsembleArgs,
    settings: &MeasurementSettings,
    pix: Pixelization,
    em: &EnsembleMeasurer,
    labels: &[StatisticLabel],
    recipe_file: Option<&RecipeFile>,
) -> Result<serde_json::Value> {
    let mask_sum = match &args.mask.mask {
        Some(p) => Some(file_checksum(p)?),
        None => None,
    };
    let mut record = serde_json::json!({
        "measurement": settings,
        "sampling": format!("{:?}", settings.sampling),
        "cells": em.measurer.plan().cell_layout().describe(),
        "tile_pixels": em.measurer.plan().tile_pixels(),
        "nside": pix.nside(),
        "ordering": pix.ordering(),
        "column": args.column.to_string(),
        "mask": args.mask.mask.as_ref().map(|p| p.display().to_string()),
        "mask_sha256": mask_sum,
        "taper": format!("{:?}", args.mask.taper),
        "taper_arcmin": args.mask.taper_arcmin,
        "cl_bin_width": args.cl_bin_width,
        "recipe": recipe_file,
        "label_scales_arcmin": labels.iter().map(|l| l.scale_arcmin).collect::<Vec<_>>(),
    });
    // the catalogue's contents, not only its name, make the job: a catalogue replaced under
    // the same name is another job (the key is absent for other ensembles, so that their job
    // identities stay as they were)
    if let Some(c) = recipe_file.and_then(|f| f.catalogue_noise.as_ref()) {
        if let Some(o) = record.as_object_mut() {
            o.insert(
                "catalogue_sha256".into(),
                serde_json::Value::String(file_checksum(&c.catalogue)?),
            );
        }
    }
    Ok(record)
}

/// Marks the job settings of a pair ensemble (absent for single maps, so that their job
/// identities stay as they were), with the second column when the pairs are files.
fn mark_pair(settings_json: &mut serde_json::Value, args: &EnsembleArgs, simulated: bool) {
    if let Some(o) = settings_json.as_object_mut() {
        o.insert("pair".into(), serde_json::Value::Bool(true));
        if !simulated {
            o.insert(
                "second_column".into(),
                serde_json::Value::String(args.second_column.to_string()),
            );
        }
    }
}

/// Refuses a member map (`which` names map B of a pair) of another NSIDE or coordinate system
/// than the first, or, when read from a file, one that cannot be measured.
/// What the members of an ensemble are checked against: the first map's NSIDE and
/// coordinate system.
struct FirstMap {
    nside: u32,
    coordsys: Option<String>,
}

fn check_member_map(
    args: &EnsembleArgs,
    first: &FirstMap,
    source: &MemberSource,
    which: &str,
    m: &SkyMap,
) -> Result<()> {
    if m.nside() != first.nside {
        return Err(Error::Mismatch(format!(
            "{which}{source}: NSIDE {} differs from the ensemble's {}",
            m.nside(),
            first.nside
        )));
    }
    super::inputs::check_same_coordsys(
        ("the first map", first.coordsys.as_deref()),
        (&format!("{which}{source}"), m.coordsys.as_deref()),
        args.mask.allow_coordsys_mismatch,
    )?;
    if !matches!(source, MemberSource::Simulation(_)) {
        super::inputs::check_measurable(m, None, &format!("{which}{source}"))?;
    }
    Ok(())
}

/// Prints what the shard did and, for a single shard, merges the table.
fn print_report(
    args: &EnsembleArgs,
    report: &crate::ensemble::RunReport,
    shard: Shard,
    statistics: usize,
) -> Result<()> {
    let stale = if report.remeasured_stale > 0 {
        format!(
            " ({} of them again because their map file changed)",
            report.remeasured_stale
        )
    } else {
        String::new()
    };
    println!(
        "shard {}/{}: {} maps, {} already done, {} measured{stale}; {} statistics per map",
        report.shard.index,
        report.shard.count,
        report.members_in_shard,
        report.already_done,
        report.measured,
        statistics
    );
    if shard.count == 1 {
        let table = EnsembleJob::write_merged(&args.output_dir)?;
        println!(
            "table {} × {} written to {}",
            table.rows.len(),
            statistics,
            args.output_dir.join("statistics.npy").display()
        );
    } else {
        println!(
            "when every shard is done: planisphere merge {}",
            args.output_dir.display()
        );
    }
    Ok(())
}

/// Refuses a pair recipe whose correlation or noise cannot be realised.
fn check_pair_recipe(p: &PairRecipe) -> Result<()> {
    if !(p.correlation.is_finite() && (-1.0..=1.0).contains(&p.correlation)) {
        return Err(Error::Setting(format!(
            "recipe pair.correlation must lie in [-1, 1], got {}",
            crate::error::compact(p.correlation)
        )));
    }
    if let Some(s) = p.noise_sigma.filter(|s| !(s.is_finite() && *s >= 0.0)) {
        return Err(Error::Setting(format!(
            "recipe pair.noise_sigma must be >= 0, got {}",
            crate::error::compact(s)
        )));
    }
    Ok(())
}

/// Merge the rows of a sharded ensemble into one table.
#[derive(Debug, clap::Args)]
pub struct MergeArgs {
    /// The ensemble directory given to `planisphere ensemble --output-dir`.
    #[arg(value_name = "DIR")]
    pub dir: PathBuf,
}

/// Merges and writes the table.
pub fn run_merge(args: &MergeArgs) -> Result<()> {
    let table = EnsembleJob::write_merged(&args.dir)?;
    println!(
        "table {} × {} written to {} (labels in statistics.json, quick look in statistics.csv)",
        table.rows.len(),
        table.description.labels.len(),
        args.dir.join("statistics.npy").display()
    );
    Ok(())
}

/// The pixelization of simulated maps (RING), for callers that need it before simulating.
pub fn simulation_pixelization(recipe: &SkyRecipe) -> Result<Pixelization> {
    Pixelization::new(recipe.nside, Ordering::Ring)
}
