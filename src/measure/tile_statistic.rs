//! One statistic measured tile by tile: a selection of coefficients by name (an index left out
//! is averaged over), its value in each tile from the tile's pooling sums, and a map painting
//! each tile's value over its core (what `plot tile-map` draws).

use crate::error::{Error, Result};
use crate::measure::measurement::{MapStatistics, SphereMeasurer};
use crate::scattering::pooling::TileSums;
use crate::scattering::statistics::{
    CoefficientKind, CoefficientLabel, CoefficientSpelling, WaveletPath,
};
use crate::sky::footprint::Footprint;
use crate::sky::pixelization::{Ordering, Pixelization};
use crate::sky::skymap::SkyMap;
use crate::tiles::sampling::TileSampler;

/// A statistic measured tile by tile: the labels averaged (each pooled as sums / weights).
#[derive(Debug, Clone, PartialEq)]
pub struct TileStatistic {
    /// The name it was parsed from (without a `full.` prefix).
    pub name: String,
    /// The kind of the coefficients averaged.
    pub kind: CoefficientKind,
    /// Scales/orientations of the coefficients averaged: an index left out (`None`) means
    /// averaged over all ([`WaveletPath::selects`]).
    pub path: WaveletPath,
}

impl TileStatistic {
    /// Parses a statistic name (an optional `full.` prefix is accepted): `mean`, `variance`,
    /// `S1_j<j>[_l<l>]`, `bandpower_j<j>[_l<l>]`, `S2_j<j1>_j<j2>` or
    /// `S2_j<j1>_l<l1>_j<j2>_l<l2>` ([`WaveletPath::parse_parts`]).
    pub fn parse(name: &str) -> Result<Self> {
        let text = name.trim();
        let text = text.strip_prefix("full.").unwrap_or(text);
        let bad = || {
            Error::Setting(format!(
                "unknown statistic '{name}': use mean, variance, S1_j<j>[_l<l>], bandpower_j<j>[_l<l>], S2_j<j1>_j<j2> or S2_j<j1>_l<l1>_j<j2>_l<l2>"
            ))
        };
        let statistic = |kind, path| Self {
            name: text.to_string(),
            kind,
            path,
        };
        match text {
            "mean" => return Ok(statistic(CoefficientKind::Mean, WaveletPath::NONE)),
            "variance" => return Ok(statistic(CoefficientKind::Variance, WaveletPath::NONE)),
            _ => {}
        }
        let parts: Vec<&str> = text.split('_').collect();
        let (head, rest) = parts.split_first().ok_or_else(bad)?;
        // The stems of the coefficient names (`S1`, `bandpower`, `S2`) of the one layout.
        let kind = [
            CoefficientKind::FirstOrder,
            CoefficientKind::BandPower,
            CoefficientKind::SecondOrder,
        ]
        .into_iter()
        .find(|k| k.stem(CoefficientSpelling::Short) == *head)
        .ok_or_else(bad)?;
        let path = WaveletPath::parse_parts(rest).ok_or_else(bad)?;
        let fits = match kind {
            CoefficientKind::SecondOrder => path.j2.is_some(),
            _ => path.has_no_second(),
        };
        fits.then(|| statistic(kind, path)).ok_or_else(bad)
    }

    /// Checks the indices against J scales and L orientations.
    pub fn check(&self, scales: usize, orientations: usize) -> Result<()> {
        if !self.path.within(scales, orientations) {
            return Err(Error::Setting(format!(
                "statistic '{}' is outside J = {scales} scales (j = 0…{}) and L = {orientations} orientations (l = 0…{})",
                self.name,
                scales.saturating_sub(1),
                orientations.saturating_sub(1)
            )));
        }
        if let (Some(a), Some(b)) = (self.path.j1, self.path.j2) {
            if a >= b {
                return Err(Error::Setting(format!(
                    "statistic '{}': second order needs j1 < j2",
                    self.name
                )));
            }
        }
        Ok(())
    }

    fn matches(&self, label: &CoefficientLabel) -> bool {
        label.kind == self.kind && self.path.selects(&label.path)
    }

    /// Positions in the engine's label order of the coefficients averaged.
    pub fn label_indices(&self, labels: &[CoefficientLabel]) -> Vec<usize> {
        labels
            .iter()
            .enumerate()
            .filter(|(_, l)| self.matches(l))
            .map(|(i, _)| i)
            .collect()
    }
}

/// The value of `statistic` in one tile: the mean over its coefficients of sums / weights
/// (those with positive weight); the variance is Σwf²/Σw − (Σwf/Σw)² as in
/// [`crate::scattering::pooling`]. `None` when no coefficient has weight.
pub fn tile_value(statistic: &TileStatistic, indices: &[usize], sums: &TileSums) -> Option<f64> {
    if statistic.kind == CoefficientKind::Variance {
        let (w0, w1) = (*sums.weights.first()?, *sums.weights.get(1)?);
        if w0 <= 0.0 || w1 <= 0.0 {
            return None;
        }
        let mean = sums.sums[0] / w0;
        return Some(sums.sums[1] / w1 - mean * mean);
    }
    let values: Vec<f64> = indices
        .iter()
        .filter_map(|&i| {
            let w = *sums.weights.get(i)?;
            (w > 0.0).then(|| sums.sums[i] / w)
        })
        .filter(|v| v.is_finite())
        .collect();
    (!values.is_empty()).then(|| values.iter().sum::<f64>() / values.len() as f64)
}

/// Which tiles of the plan the measurement kept (positive pooling weight), in plan order:
/// the same test as [`SphereMeasurer::measure`] (taper = clamp(mask) · border window, pooling
/// weight = taper · solid angle over the core).
fn kept_tiles(
    measurer: &SphereMeasurer,
    map: &SkyMap,
    footprint: &Footprint,
) -> Result<Vec<usize>> {
    let s = measurer.settings();
    let sampler = TileSampler::new(measurer.plan(), map, footprint, s.sampling)?;
    let kept =
        sampler.map_tiles(|grids| Ok(measurer.taper_and_weight(&grids)?.map(|_| grids.tile)))?;
    Ok(kept.into_iter().flatten().collect())
}

/// The plan indices of the tiles `stats` holds, in order: every tile of the plan when all were
/// measured, else those the measurement kept.
pub fn measured_tiles(
    measurer: &SphereMeasurer,
    map: &SkyMap,
    footprint: &Footprint,
    stats: &MapStatistics,
) -> Result<Vec<usize>> {
    if stats.per_tile.len() == measurer.plan().len() {
        Ok((0..measurer.plan().len()).collect())
    } else {
        kept_tiles(measurer, map, footprint)
    }
}

/// Per-tile values of a statistic, with the plan index of each measured tile.
pub fn tile_values(
    measurer: &SphereMeasurer,
    stats: &MapStatistics,
    tile_indices: &[usize],
    statistic: &TileStatistic,
) -> Result<Vec<(usize, Option<f64>)>> {
    if tile_indices.len() != stats.per_tile.len() {
        return Err(Error::Mismatch(format!(
            "{} tiles measured but {} tile positions given",
            stats.per_tile.len(),
            tile_indices.len()
        )));
    }
    let indices = statistic.label_indices(measurer.engine().labels());
    if indices.is_empty() && statistic.kind != CoefficientKind::Variance {
        return Err(Error::Setting(format!(
            "statistic '{}' matches no coefficient of this measurement",
            statistic.name
        )));
    }
    Ok(tile_indices
        .iter()
        .zip(&stats.per_tile)
        .map(|(&t, sums)| (t, tile_value(statistic, &indices, sums)))
        .collect())
}

/// A map (NESTED, at the plan's map NSIDE) whose pixels in the core of each tile hold the
/// tile's value; pixels of tiles without a value are invalid.
pub fn paint_tiles(measurer: &SphereMeasurer, values: &[(usize, Option<f64>)]) -> Result<SkyMap> {
    let plan = measurer.plan();
    let pix = Pixelization::new(plan.map_pixelization().nside(), Ordering::Nested)?;
    let mut pixels = vec![f64::NAN; pix.npix() as usize];
    for &(t, v) in values {
        if let Some(v) = v {
            for p in plan.core_pixels(t)? {
                let p = plan.map_pixelization().to_nested(p)?;
                if let Some(slot) = pixels.get_mut(p as usize) {
                    *slot = v;
                }
            }
        }
    }
    SkyMap::new(pix, pixels)
}
