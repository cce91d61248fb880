//! One map per shape-noise realisation of a catalogue, for ensembles: realisation k binned as
//! the data are ([`super::binning`], galaxies rotated by [`super::rotation`]) and turned into
//! the chosen map — γ1, γ2, or κ_E, κ_B through [`super::convergence`] — on the data's footprint.
//! Realisation k depends only on (catalogue, seed, k), so the members of an ensemble can be
//! made in any order, on any shard.

use super::binning::{bin_catalogue, BinningPlan, NoiseRealisations};
use super::convergence::{convergence_on_footprint, mass_mapper};
use super::source::{CatalogueColumns, CatalogueSource};
use crate::error::{Error, Result};
use crate::harmonics::mass_mapping::{MassMapper, MassMappingSettings};
use crate::sky::skymap::SkyMap;
use std::path::PathBuf;

/// Which map of a noise realisation.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum NoiseMapKind {
    /// Mean shear γ1 of the rotated galaxies.
    Gamma1,
    /// Mean shear γ2 of the rotated galaxies.
    Gamma2,
    /// E-mode convergence of the rotated galaxies' shear.
    KappaE,
    /// B-mode convergence of the rotated galaxies' shear.
    KappaB,
}

/// How to make the noise map of realisation k of a catalogue.
#[derive(Debug, Clone)]
pub struct NoiseMapRecipe {
    /// The catalogue file.
    pub catalogue: PathBuf,
    /// Its columns.
    pub columns: CatalogueColumns,
    /// NSIDE, footprint threshold and block size (its `noise` field is ignored).
    pub plan: BinningPlan,
    /// Seed of the rotation angles.
    pub seed: u64,
    /// The map made.
    pub map: NoiseMapKind,
    /// Largest multipole of κ (3·NSIDE − 1 when `None`).
    pub lmax: Option<usize>,
    /// Smoothing and shear axes of κ.
    pub settings: MassMappingSettings,
}

impl NoiseMapRecipe {
    /// The mass mapper κ maps need (build once, share across realisations); `None` for γ maps.
    pub fn mapper(&self) -> Result<Option<MassMapper>> {
        match self.map {
            NoiseMapKind::Gamma1 | NoiseMapKind::Gamma2 => Ok(None),
            NoiseMapKind::KappaE | NoiseMapKind::KappaB => {
                mass_mapper(self.plan.nside, self.lmax).map(Some)
            }
        }
    }

    /// The map of realisation `k` (invalid outside the data's footprint); `mapper` from
    /// [`NoiseMapRecipe::mapper`].
    pub fn realise(&self, mapper: Option<&MassMapper>, k: u64) -> Result<SkyMap> {
        let mut source = CatalogueSource::open(&self.catalogue, &self.columns)?;
        let plan = BinningPlan {
            noise: Some(NoiseRealisations {
                seed: self.seed,
                indices: vec![k],
            }),
            ..self.plan.clone()
        };
        let mut maps = bin_catalogue(&mut source, &plan)?;
        let noise = maps
            .noise
            .pop()
            .ok_or_else(|| Error::Data("no noise realisation was binned".to_string()))?;
        let kappa = |mapper: Option<&MassMapper>| {
            let mapper = mapper.ok_or_else(|| {
                Error::Setting("a convergence noise map needs its mass mapper".to_string())
            })?;
            convergence_on_footprint(
                mapper,
                &noise.gamma1,
                &noise.gamma2,
                &maps.footprint,
                &self.settings,
            )
        };
        Ok(match self.map {
            NoiseMapKind::Gamma1 => noise.gamma1,
            NoiseMapKind::Gamma2 => noise.gamma2,
            NoiseMapKind::KappaE => kappa(mapper)?.e,
            NoiseMapKind::KappaB => kappa(mapper)?.b,
        })
    }
}
