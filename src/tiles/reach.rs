//! Which map pixels the tiles of a plan can read: for a RING map, a list of ranges of pixel
//! indices ([`read_ranges`]), and for either ordering the blocks of
//! [`WEIGHT_BLOCK`] consecutive indices holding them ([`read_blocks`]), so that a measurement
//! reads only those from the file ([`crate::sky::block_map::BlockSkyMap`]).
//!
//! A sampler reads the map over a square of half-side a ([`read_half_width`]) on the tangent
//! plane of each tile. The square is cut into 4 × 4 sub-squares; the gnomonic projection maps
//! straight lines to great circles (Calabretta & Greisen 2002, A&A 395, 1077, §5.1.1), so each
//! sub-square is a geodesic quadrilateral on the sphere and lies within the cap around its
//! centre's direction whose radius ρ is the distance to its farthest corner. Each plane point
//! reads map pixels within a few pixel spacings of its direction (the ring-wise stencils reach
//! three pixels along a ring and two rings across; the bilinear and nearest-pixel reads one
//! pixel). So the pixels read lie within the caps of radius r = ρ + 6h (h the mean pixel
//! spacing, over seven ring spacings anywhere on the sphere, Górski et al. 2005 §4), widened
//! on each ring by 4 pixels each side.
//!
//! On ring i of colatitude θ_i, the cap of centre (θ_c, φ_c) covers the longitudes
//! |φ − φ_c| ≤ Δφ with cos Δφ = (cos r − cos θ_i cos θ_c)/(sin θ_i sin θ_c) (spherical law of
//! cosines); the whole ring when the right side is ≤ −1, none when |θ_i − θ_c| > r.

use crate::error::{Error, Result};
use crate::sky::footprint::WEIGHT_BLOCK;
use crate::sky::pixelization::{ring_info, ring_theta, Ordering, Pixelization};
use crate::tiles::projection::Gnomonic;
use crate::tiles::sampling::read_half_width;
use crate::tiles::tiling::TilingPlan;
use std::f64::consts::TAU;

/// Pixels each side added to every ring's range (the stencils reach three).
const RING_PAD: i64 = 4;

/// Mean pixel spacings added to the cap radius (over seven ring spacings).
const RADIUS_PAD: f64 = 6.0;

/// Each tile's square is covered by the caps of SPLIT × SPLIT sub-squares, which hug it more
/// closely than one cap: one cap around a square of half-side a reaches (√2 − 1)·a past its
/// edges (and adds π/2 − 1 = 57% to its area, on the plane), the caps of the sub-squares a
/// quarter as far.
const SPLIT: usize = 4;

/// The RING pixel indices the tiles of `plan` can read, as sorted, disjoint, non-adjacent
/// half-open ranges `start..end` (module documentation). Errors for a NESTED plan.
pub fn read_ranges(plan: &TilingPlan) -> Result<Vec<(u64, u64)>> {
    if plan.map_pixelization().ordering() != Ordering::Ring {
        return Err(Error::Setting(
            "the pixels read by the tiles are listed for RING maps only".into(),
        ));
    }
    Ok(ring_ranges(plan))
}

/// The blocks of [`WEIGHT_BLOCK`] consecutive pixel indices, in the ordering of the plan's map,
/// holding every pixel the tiles of `plan` can read, increasing, each once. For a RING map
/// these are the blocks of [`read_ranges`]; for a NESTED map, the blocks of the NESTED indices
/// of the same pixels (block b holds the 64 pixels of one cell of NSIDE/8, Górski et al. 2005
/// §4), found by converting each RING index of the ranges.
pub fn read_blocks(plan: &TilingPlan) -> Result<Vec<usize>> {
    let pix = plan.map_pixelization();
    let ranges = ring_ranges(plan);
    match pix.ordering() {
        Ordering::Ring => Ok(blocks_of_ranges(&ranges)),
        Ordering::Nested => {
            let ring = Pixelization::new(pix.nside(), Ordering::Ring)?;
            let nblocks = (pix.npix() as usize).div_ceil(WEIGHT_BLOCK);
            let mut read = vec![false; nblocks];
            for &(a, b) in &ranges {
                for p in a..b {
                    read[ring.to_nested(p)? as usize / WEIGHT_BLOCK] = true;
                }
            }
            Ok((0..nblocks).filter(|&b| read[b]).collect())
        }
    }
}

/// The blocks of [`WEIGHT_BLOCK`] pixels covering the pixel ranges `ranges` (sorted half-open
/// ranges, as [`read_ranges`] gives), in increasing order, each once.
pub fn blocks_of_ranges(ranges: &[(u64, u64)]) -> Vec<usize> {
    let mut blocks: Vec<usize> = Vec::new();
    for &(a, b) in ranges {
        if b <= a {
            continue;
        }
        let first = (a as usize) / WEIGHT_BLOCK;
        let last = ((b - 1) as usize) / WEIGHT_BLOCK;
        let from = match blocks.last() {
            Some(&l) if l >= first => l + 1,
            _ => first,
        };
        blocks.extend(from..=last);
    }
    blocks
}

/// [`read_ranges`] in RING indices whatever the ordering of the plan's map.
fn ring_ranges(plan: &TilingPlan) -> Vec<(u64, u64)> {
    let pix = plan.map_pixelization();
    let nside = pix.nside() as u64;
    let half = read_half_width(plan);
    let pad = RADIUS_PAD * pix.mean_spacing();
    let rings: Vec<(f64, u64, u64, bool)> = (1..4 * nside)
        .map(|i| {
            let (first, count, shifted) = ring_info(nside, i);
            (ring_theta(nside, i), first, count, shifted)
        })
        .collect();
    let mut ranges: Vec<(u64, u64)> = Vec::new();
    let side = half / SPLIT as f64;
    for tile in plan.tiles() {
        let proj = Gnomonic::new(tile.center);
        for iy in 0..SPLIT {
            for ix in 0..SPLIT {
                // the cap around one of SPLIT² sub-squares: its centre's direction, and the
                // farthest of its corners and edge midpoints (a sub-square is a geodesic
                // quadrilateral, whose farthest point from an inner point is a corner)
                let (xc, yc) = (
                    -half + (2 * ix + 1) as f64 * side,
                    -half + (2 * iy + 1) as f64 * side,
                );
                let centre = proj.inverse(xc, yc);
                let reach = [-1.0, 0.0, 1.0]
                    .iter()
                    .flat_map(|&u| [-1.0, 0.0, 1.0].map(|v| (u, v)))
                    .map(|(u, v)| centre.distance(&proj.inverse(xc + u * side, yc + v * side)))
                    .fold(0.0, f64::max);
                let radius = reach * (1.0 + 1e-9) + pad;
                cap_ranges(&rings, centre.theta, centre.phi, radius, &mut ranges);
            }
        }
    }
    ranges.sort_unstable();
    let mut merged: Vec<(u64, u64)> = Vec::with_capacity(ranges.len());
    for (a, b) in ranges {
        match merged.last_mut() {
            Some(last) if a <= last.1 => last.1 = last.1.max(b),
            _ => merged.push((a, b)),
        }
    }
    merged
}

/// Appends to `ranges` the RING pixel ranges of the rings `rings` (θ, first pixel, count,
/// shifted) within the cap of centre (θ_c, φ_c) and `radius`, each widened by [`RING_PAD`]
/// pixels each side (module documentation).
fn cap_ranges(
    rings: &[(f64, u64, u64, bool)],
    tc: f64,
    pc: f64,
    radius: f64,
    ranges: &mut Vec<(u64, u64)>,
) {
    // rings within r of the centre in colatitude (θ increases with the ring number)
    let lo = rings.partition_point(|r| r.0 < tc - radius);
    let hi = rings.partition_point(|r| r.0 <= tc + radius);
    for &(theta, first, count, shifted) in &rings[lo..hi] {
        let denominator = theta.sin() * tc.sin();
        let cos_dphi = if denominator > 1e-300 {
            (radius.cos() - theta.cos() * tc.cos()) / denominator
        } else {
            -1.0
        };
        if cos_dphi <= -1.0 || radius >= std::f64::consts::PI {
            ranges.push((first, first + count));
            continue;
        }
        let dphi = cos_dphi.min(1.0).acos();
        let spacing = TAU / count as f64;
        let offset = if shifted { 0.5 } else { 0.0 };
        let a = ((pc - dphi) / spacing - offset).floor() as i64 - RING_PAD;
        let b = ((pc + dphi) / spacing - offset).ceil() as i64 + RING_PAD;
        if b - a + 1 >= count as i64 {
            ranges.push((first, first + count));
            continue;
        }
        let (a, b) = (
            a.rem_euclid(count as i64) as u64,
            b.rem_euclid(count as i64) as u64,
        );
        if a <= b {
            ranges.push((first + a, first + b + 1));
        } else {
            ranges.push((first, first + b + 1));
            ranges.push((first + a, first + count));
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::sky::footprint::Footprint;
    use crate::sky::pixelization::Pixelization;
    use crate::sky::skymap::SkyMap;
    use crate::tiles::sampling::{SamplingMethod, TileSampler};
    use crate::tiles::tiling::TilingSettings;

    #[test]
    fn blocks_of_ranges_cover_each_range_once() {
        // ranges within one block, across blocks, sharing a block, and empty
        let blocks = blocks_of_ranges(&[(0, 3), (60, 70), (100, 130), (130, 131), (400, 400)]);
        assert_eq!(blocks, [0, 1, 2]);
        assert_eq!(blocks_of_ranges(&[(64, 128), (640, 641)]), [1, 10]);
    }

    #[test]
    fn every_pixel_a_sampling_operator_reads_lies_in_the_ranges() {
        // The operator lists, for every tile pixel, the map pixels the sampler reads
        // (sampling::TileSamplingOperator, equal to the sampler bit for bit): each must be in
        // a range, for caps at a pole and at the equator, every sampling method.
        let pix = Pixelization::new(32, Ordering::Ring).unwrap();
        let map = SkyMap::from_fn(pix, |d| d.theta.cos());
        for (cap_theta, cap_radius) in [(0.1, 0.4), (1.5, 0.3), (2.9, 0.2)] {
            let centre = crate::sky::pixelization::Direction::new(cap_theta, 2.0);
            let fp = Footprint::from_fn(pix, |d| d.distance(&centre) < cap_radius);
            let settings = TilingSettings {
                pixel_size: Some(pix.mean_spacing()),
                ..TilingSettings::latitude_bands()
            };
            let plan = TilingPlan::new(pix, &fp, &settings).unwrap();
            let ranges = read_ranges(&plan).unwrap();
            let inside = |p: u64| {
                let k = ranges.partition_point(|r| r.1 <= p);
                k < ranges.len() && ranges[k].0 <= p
            };
            let covered: u64 = ranges.iter().map(|r| r.1 - r.0).sum();
            assert!(
                covered < pix.npix(),
                "cap at θ = {cap_theta}: the ranges cover the sky"
            );
            for method in [
                SamplingMethod::RingQuintic,
                SamplingMethod::RingCubic,
                SamplingMethod::Bilinear,
                SamplingMethod::Nearest,
                SamplingMethod::RingLinear,
            ] {
                let sampler = TileSampler::new(&plan, &map, &fp, method).unwrap();
                for t in 0..plan.len() {
                    let op = sampler.operator(t).unwrap();
                    for p in op.touched_pixels() {
                        assert!(
                            inside(p),
                            "θ = {cap_theta}, {method:?}, tile {t}: pixel {p}"
                        );
                    }
                }
            }
        }
    }
}
