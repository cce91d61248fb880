//! Weighted pooling: per-tile weighted sums, their exact combination over tiles, and the final
//! pooled coefficients.
//!
//! A coefficient c pooled over tiles t is c = Σ_t Σ_x W_t(x) h_t(x) / Σ_t Σ_x W_t(x), where W_t
//! is the tile's trusted pooling weight for that coefficient and h_t the per-pixel quantity
//! (the field, its square, or a normalised wavelet modulus). Each tile therefore returns the two
//! sums, and combining adds them in the order the tiles are given, so the result is bitwise
//! identical however the tiles were computed (any thread count). Order 0: the mean is
//! Σwf/Σw and the variance Σwf²/Σw − mean² (population variance of the pooled pixels).

use crate::scattering::statistics::{
    Coefficient, CoefficientKind, CoefficientLabel, CoefficientSet, CrossCoefficient,
    CrossCoefficientSet, CrossLabel,
};
use crate::{Error, Result};

/// What pooling needs to know of the transform that filled the sums: the label of each sum, the
/// layout's size (J, L) and the trust threshold. The scattering engine
/// ([`crate::scattering::transform::ScatteringEngine`]) provides it, so pooling reads these
/// without depending on the transform.
pub trait SumLabels {
    /// Labels of the coefficients, in the order of [`TileSums::sums`].
    fn labels(&self) -> &[CoefficientLabel];
    /// Labels of the cross coefficients, in the order of [`PairTileSums::cross`].
    fn cross_labels(&self) -> &[CrossLabel];
    /// Number of scales J.
    fn scale_count(&self) -> usize;
    /// Number of orientations L.
    fn orientation_count(&self) -> usize;
    /// Smallest kept fraction of the footprint weight for a coefficient to be trusted.
    fn trusted_fraction(&self) -> f64;
}

/// Weighted sums of one tile (or of several combined tiles), in the engine's label order.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct TileSums {
    /// Σ w over the tile: the footprint weight.
    pub footprint_weight: f64,
    /// Σ W h per coefficient (for the mean Σ w f, for the variance Σ w f²).
    pub sums: Vec<f64>,
    /// Σ W per coefficient: the pooling weight kept after the trust cut.
    pub weights: Vec<f64>,
}

impl TileSums {
    /// Add another tile's sums to these (same engine layout required).
    pub fn add(&mut self, other: &TileSums) -> Result<()> {
        if other.sums.len() != self.sums.len() || other.weights.len() != self.weights.len() {
            return Err(Error::Mismatch(format!(
                "cannot combine tiles with {} and {} coefficients",
                self.sums.len(),
                other.sums.len()
            )));
        }
        self.footprint_weight += other.footprint_weight;
        for (a, b) in self.sums.iter_mut().zip(&other.sums) {
            *a += b;
        }
        for (a, b) in self.weights.iter_mut().zip(&other.weights) {
            *a += b;
        }
        Ok(())
    }
}

/// Sums of one tile (or of combined tiles) of a pair of maps: each map's own sums and the
/// cross sums, in the order of [`SumLabels::cross_labels`].
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct PairTileSums {
    /// The first map's sums (engine label order).
    pub first: TileSums,
    /// The second map's sums (engine label order).
    pub second: TileSums,
    /// The cross sums (cross label order).
    pub cross: TileSums,
}

/// Combine tiles by adding their sums sequentially in the given order (deterministic).
pub fn combine_tiles(tiles: &[TileSums]) -> Result<TileSums> {
    let first = tiles
        .first()
        .ok_or_else(|| Error::Data("no tiles to combine".into()))?;
    let mut total = first.clone();
    for t in &tiles[1..] {
        total.add(t)?;
    }
    Ok(total)
}

/// One pooled entry: Σ W h / Σ W (NaN when nothing was kept), and the kept weight fraction
/// Σ W / Σ w with its trust flag (fraction ≥ `min_fraction`).
struct PooledEntry {
    value: f64,
    trusted: bool,
    fraction: f64,
}

/// The pooled entries of combined sums holding `count` coefficients (`what` names them in
/// the error when the counts disagree).
fn pooled_entries(
    sums: &TileSums,
    count: usize,
    what: &str,
    min_fraction: f64,
) -> Result<Vec<PooledEntry>> {
    if sums.sums.len() != count || sums.weights.len() != count {
        return Err(Error::Mismatch(format!(
            "{what} tile sums hold {} coefficients but the engine defines {count}",
            sums.sums.len()
        )));
    }
    if sums.footprint_weight <= 0.0 {
        return Err(Error::Data(
            "pooling weights sum to zero: no pixel to pool".into(),
        ));
    }
    Ok(sums
        .sums
        .iter()
        .zip(&sums.weights)
        .map(|(&s, &weight)| {
            let fraction = weight / sums.footprint_weight;
            PooledEntry {
                value: if weight > 0.0 { s / weight } else { f64::NAN },
                trusted: weight > 0.0 && fraction >= min_fraction,
                fraction,
            }
        })
        .collect())
}

/// Turn (combined) sums into pooled coefficients, with the trust flag of the engine settings.
/// The variance is the pooled ⟨f²⟩ less the square of the pooled mean.
pub fn pooled_coefficients(engine: &impl SumLabels, sums: &TileSums) -> Result<CoefficientSet> {
    let labels = engine.labels();
    let entries = pooled_entries(sums, labels.len(), "scattering", engine.trusted_fraction())?;
    let mean = entries[0].value;
    let coefficients = labels
        .iter()
        .zip(entries)
        .map(|(label, e)| Coefficient {
            label: *label,
            value: match label.kind {
                CoefficientKind::Variance => e.value - mean * mean,
                _ => e.value,
            },
            trusted: e.trusted,
            kept_weight_fraction: e.fraction,
        })
        .collect();
    Ok(CoefficientSet {
        scale_count: engine.scale_count(),
        orientation_count: engine.orientation_count(),
        coefficients,
    })
}

/// Turn combined cross sums into pooled cross coefficients: each value is Σ W h / Σ W over the
/// kept weight of its scales, trusted as in [`pooled_coefficients`].
pub fn pooled_cross_coefficients(
    engine: &impl SumLabels,
    sums: &TileSums,
) -> Result<CrossCoefficientSet> {
    let labels = engine.cross_labels();
    let entries = pooled_entries(sums, labels.len(), "cross", engine.trusted_fraction())?;
    let coefficients = labels
        .iter()
        .zip(entries)
        .map(|(label, e)| CrossCoefficient {
            label: *label,
            value: e.value,
            trusted: e.trusted,
            kept_weight_fraction: e.fraction,
        })
        .collect();
    Ok(CrossCoefficientSet {
        scale_count: engine.scale_count(),
        orientation_count: engine.orientation_count(),
        coefficients,
    })
}
