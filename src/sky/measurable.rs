//! Whether a sky map has anything to measure on a footprint: the check every measurement and
//! spectrum runs on its input maps before any work starts.

use crate::error::{Error, Result};
use crate::sky::block_map::BlockSkyMap;
use crate::sky::footprint::{FootprintOf, WEIGHT_BLOCK};
use crate::sky::skymap::SkyMapOf;

/// Checks that `map` (named `label` in messages) has something to measure on `footprint`
/// (pixels of positive weight; all valid pixels without one): values within
/// ±[`crate::limits::MAX_ABS_VALUE`], more than one valid pixel, and not all equal (a map
/// without fluctuations has scattering coefficients that are ratios of rounding errors).
pub fn check_measurable(
    map: &SkyMapOf<'_>,
    footprint: Option<&FootprintOf<'_>>,
    label: &str,
) -> Result<()> {
    let weights = footprint
        .filter(|f| f.pixelization() == map.pixelization())
        .map(FootprintOf::weights);
    let measured = map
        .values()
        .iter()
        .zip(map.valid())
        .enumerate()
        .filter(|&(i, (_, &ok))| ok && !weights.is_some_and(|w| w[i] <= 0.0))
        .map(|(i, (&v, _))| (i, v));
    check_values(measured, weights.is_some(), label)
}

/// [`check_measurable`] of a map held by blocks on `footprint` (its pixelization), which the
/// map holds: the same checks and messages as for the whole map.
pub fn check_measurable_blocks(
    map: &BlockSkyMap,
    footprint: &FootprintOf<'_>,
    label: &str,
) -> Result<()> {
    let npix = map.pixelization().npix() as usize;
    let w = footprint.weights();
    let measured = footprint
        .weighted_blocks()
        .flat_map(|b| b * WEIGHT_BLOCK..(b * WEIGHT_BLOCK + WEIGHT_BLOCK).min(npix))
        .filter(|&i| w.get(i) > 0.0 && map.is_valid(i))
        .map(|i| (i, map.value(i)));
    check_values(measured, true, label)
}

/// The checks of [`check_measurable`] over the measured (pixel, value) pairs, in increasing
/// pixel order; `on_footprint` names where they lie in the messages.
fn check_values(
    measured: impl Iterator<Item = (usize, f64)>,
    on_footprint: bool,
    label: &str,
) -> Result<()> {
    let mut count = 0u64;
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for (i, v) in measured {
        if v.abs() > crate::limits::MAX_ABS_VALUE {
            return Err(Error::Data(format!(
                "{label}: pixel {i} holds {v:e}, beyond ±{:e}: the statistics (up to third powers summed over the sky) would overflow; rescale the map",
                crate::limits::MAX_ABS_VALUE
            )));
        }
        count += 1;
        lo = lo.min(v);
        hi = hi.max(v);
    }
    let place = if on_footprint {
        "on its footprint"
    } else {
        "in the map"
    };
    match count {
        0 => Err(Error::Data(format!(
            "{label}: no valid pixel {place} (all UNSEEN or NaN there)"
        ))),
        1 => Err(Error::Data(format!(
            "{label}: only one valid pixel {place}: there are no fluctuations to measure"
        ))),
        _ if hi - lo <= 1e-12 * lo.abs().max(hi.abs()) => Err(Error::Data(format!(
            "{label}: the map has no fluctuations {place} (every valid pixel is {lo}): nothing to measure"
        ))),
        _ => Ok(()),
    }
}
