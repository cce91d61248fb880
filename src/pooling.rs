//! Weighted pooling: per-tile weighted sums, their exact combination over tiles, and the final
//! pooled coefficients.
//!
//! A coefficient c pooled over tiles t is c = Σ_t Σ_x W_t(x) h_t(x) / Σ_t Σ_x W_t(x), where W_t
//! is the tile's trusted pooling weight for that coefficient and h_t the per-pixel quantity
//! (the field, its square, or a normalised wavelet modulus). Each tile therefore returns the two
//! sums, and combining adds them in the order the tiles are given, so the result is bitwise
//! identical however the tiles were computed (any thread count). Order 0: the mean is
//! Σwf/Σw and the variance Σwf²/Σw − mean² (population variance of the pooled pixels).

use crate::statistics::{
    Coefficient, CoefficientKind, CoefficientSet, CrossCoefficient, CrossCoefficientSet,
};
use crate::transform::ScatteringEngine;
use crate::{Error, Result};

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
/// cross sums, in the order of [`ScatteringEngine::cross_labels`].
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

/// Turn (combined) sums into pooled coefficients, with the trust flag of the engine settings.
pub fn pooled_coefficients(engine: &ScatteringEngine, sums: &TileSums) -> Result<CoefficientSet> {
    let labels = engine.labels();
    if sums.sums.len() != labels.len() || sums.weights.len() != labels.len() {
        return Err(Error::Mismatch(format!(
            "tile sums hold {} coefficients but the engine defines {}",
            sums.sums.len(),
            labels.len()
        )));
    }
    if sums.footprint_weight <= 0.0 {
        return Err(Error::Data(
            "pooling weights sum to zero: no pixel to pool".into(),
        ));
    }
    let min_fraction = engine.settings().trusted_fraction;
    let mean = sums.sums[0] / sums.weights[0];
    let coefficients = labels
        .iter()
        .enumerate()
        .map(|(i, label)| {
            let weight = sums.weights[i];
            let fraction = weight / sums.footprint_weight;
            let value = if weight > 0.0 {
                match label.kind {
                    CoefficientKind::Variance => sums.sums[i] / weight - mean * mean,
                    _ => sums.sums[i] / weight,
                }
            } else {
                f64::NAN
            };
            Coefficient {
                label: *label,
                value,
                trusted: weight > 0.0 && fraction >= min_fraction,
                kept_weight_fraction: fraction,
            }
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
    engine: &ScatteringEngine,
    sums: &TileSums,
) -> Result<CrossCoefficientSet> {
    let labels = engine.cross_labels();
    if sums.sums.len() != labels.len() || sums.weights.len() != labels.len() {
        return Err(Error::Mismatch(format!(
            "cross tile sums hold {} coefficients but the engine defines {}",
            sums.sums.len(),
            labels.len()
        )));
    }
    if sums.footprint_weight <= 0.0 {
        return Err(Error::Data(
            "pooling weights sum to zero: no pixel to pool".into(),
        ));
    }
    let min_fraction = engine.settings().trusted_fraction;
    let coefficients = labels
        .iter()
        .enumerate()
        .map(|(i, label)| {
            let weight = sums.weights[i];
            let fraction = weight / sums.footprint_weight;
            CrossCoefficient {
                label: *label,
                value: if weight > 0.0 {
                    sums.sums[i] / weight
                } else {
                    f64::NAN
                },
                trusted: weight > 0.0 && fraction >= min_fraction,
                kept_weight_fraction: fraction,
            }
        })
        .collect();
    Ok(CrossCoefficientSet {
        scale_count: engine.scale_count(),
        orientation_count: engine.orientation_count(),
        coefficients,
    })
}
