//! Mask apodization on the sphere: binary masks get a smooth taper of a chosen width near their
//! edges; fractional weight maps are used as they are.
//!
//! With Δ the angular distance from an observed pixel's centre to the nearest masked pixel's
//! centre and θ the apodization width, the C1 and C2 tapers of Grain, Tristram & Stompor 2009
//! (PRD 79, 123515, eqs. 31–32) are, with x = √((1 − cos Δ)/(1 − cos θ)) (≈ Δ/θ):
//!
//! - C1: f(x) = x − sin(2πx)/(2π) for x < 1,
//! - C2: f(x) = (1 − cos πx)/2 for x < 1,
//!
//! and f = 1 for x ≥ 1. The Gaussian taper is the Gaussian smoothing of the mask eroded by θ/2,
//! evaluated in the straight-edge limit where it depends on Δ alone:
//! f(Δ) = Φ((Δ − θ/2)/σ) with σ = θ/6 and Φ the standard normal distribution function, so that
//! f rises from Φ(−3) ≈ 0.001 at the edge to Φ(3) ≈ 0.999 at Δ = θ (common practice for a
//! Gaussian-smoothed mask; the erosion keeps the taper inside the footprint).

use crate::error::{Error, Result};
use crate::sky::footprint::{FootprintOf, SparseMinimum};
use crate::sky::pixelization::Pixelization;
use rayon::prelude::*;

/// The shape of the taper applied near mask edges.
#[derive(
    Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize, clap::ValueEnum,
)]
pub enum TaperKind {
    /// Grain et al. 2009 C1: x − sin(2πx)/(2π).
    C1,
    /// Grain et al. 2009 C2: (1 − cos πx)/2.
    C2,
    /// Gaussian-smoothed eroded mask: Φ((Δ − θ/2)/(θ/6)).
    Gaussian,
    /// No taper: the binary mask as it is.
    None,
}

/// C1 taper of Grain et al. 2009 (eq. 31) at normalised distance x.
///
/// # Examples
///
/// Worked from eq. 31: f(1/2) = 1/2 − sin π/(2π) = 1/2; f(1/4) = 1/4 − 1/(2π) = 0.0908451.
///
/// ```
/// use planisphere::sky::apodization::c1;
/// assert!((c1(0.5) - 0.5).abs() < 1e-15);
/// assert!((c1(0.25) - (0.25 - 1.0 / (2.0 * std::f64::consts::PI))).abs() < 1e-15);
/// assert!((c1(0.25) - 0.0908451).abs() < 1e-7);
/// assert_eq!((c1(0.0), c1(1.0), c1(2.0)), (0.0, 1.0, 1.0));
/// ```
pub fn c1(x: f64) -> f64 {
    clamped_ramp(x, |x| {
        x - (2.0 * std::f64::consts::PI * x).sin() / (2.0 * std::f64::consts::PI)
    })
}

/// A taper rising from 0 at x ≤ 0 to 1 at x ≥ 1, `rise(x)` in between.
fn clamped_ramp(x: f64, rise: impl Fn(f64) -> f64) -> f64 {
    if x >= 1.0 {
        1.0
    } else if x <= 0.0 {
        0.0
    } else {
        rise(x)
    }
}

/// C2 taper of Grain et al. 2009 (eq. 32) at normalised distance x.
///
/// # Examples
///
/// Worked from eq. 32: f(1/2) = (1 − cos(π/2))/2 = 1/2; f(1/4) = (1 − 1/√2)/2 = 0.1464466.
///
/// ```
/// use planisphere::sky::apodization::c2;
/// assert!((c2(0.5) - 0.5).abs() < 1e-15);
/// assert!((c2(0.25) - 0.1464466).abs() < 1e-7);
/// assert_eq!((c2(0.0), c2(1.0)), (0.0, 1.0));
/// ```
pub fn c2(x: f64) -> f64 {
    clamped_ramp(x, |x| 0.5 * (1.0 - (std::f64::consts::PI * x).cos()))
}

/// Standard normal distribution function Φ(z) = erfc(−z/√2)/2, with erfc from the Chebyshev
/// fit of Numerical Recipes (Press et al., 2nd ed., §6.2, `erfcc`; fractional error < 1.2e-7),
/// ample for a taper.
///
/// # Examples
///
/// Table values of the standard normal distribution (Abramowitz & Stegun 1964, table 26.1):
/// Φ(0) = 0.5, Φ(1) = 0.8413447, Φ(−3) = 0.0013499.
///
/// ```
/// use planisphere::sky::apodization::normal_cdf;
/// assert!((normal_cdf(0.0) - 0.5).abs() < 1e-7);
/// assert!((normal_cdf(1.0) - 0.8413447).abs() < 1e-6);
/// assert!((normal_cdf(-3.0) - 0.0013499).abs() < 1e-6);
/// ```
pub fn normal_cdf(z: f64) -> f64 {
    0.5 * erfc(-z / std::f64::consts::SQRT_2)
}

fn erfc(x: f64) -> f64 {
    // Numerical Recipes (2nd ed.) §6.2 `erfcc`: fractional error below 1.2e-7 everywhere.
    let z = x.abs();
    let t = 1.0 / (1.0 + 0.5 * z);
    let poly = -z * z - 1.26551223
        + t * (1.00002368
            + t * (0.37409196
                + t * (0.09678418
                    + t * (-0.18628806
                        + t * (0.27886807
                            + t * (-1.13520398
                                + t * (1.48851587 + t * (-0.82215223 + t * 0.17087277))))))));
    let r = t * poly.exp();
    if x >= 0.0 {
        r
    } else {
        2.0 - r
    }
}

/// The taper value at distance `delta` from the edge for width `width` (both radians).
///
/// # Examples
///
/// With x = √((1 − cos Δ)/(1 − cos θ)) = sin(Δ/2)/sin(θ/2) (half-angle identity), Δ = θ/2
/// gives x = 1/(2 cos(θ/4)), just above 1/2; the Gaussian taper is Φ(0) = 1/2 there and
/// Φ(−3) ≈ 0.00135 at the edge (the formulas of the module documentation).
///
/// ```
/// use planisphere::sky::apodization::{c2, taper, TaperKind};
/// let width = 2f64.to_radians();
/// let x = 1.0 / (2.0 * (width / 4.0).cos());
/// assert!((taper(TaperKind::C2, width / 2.0, width) - c2(x)).abs() < 1e-12);
/// assert!((taper(TaperKind::Gaussian, width / 2.0, width) - 0.5).abs() < 1e-7);
/// assert!((taper(TaperKind::Gaussian, 0.0, width) - 0.0013499).abs() < 1e-6);
/// assert_eq!(taper(TaperKind::C1, width, width), 1.0);
/// ```
pub fn taper(kind: TaperKind, delta: f64, width: f64) -> f64 {
    let x = ((1.0 - delta.cos()) / (1.0 - width.cos())).sqrt();
    match kind {
        TaperKind::C1 => c1(x),
        TaperKind::C2 => c2(x),
        TaperKind::Gaussian => {
            if delta >= width {
                1.0
            } else {
                normal_cdf((delta - 0.5 * width) / (width / 6.0))
            }
        }
        TaperKind::None => 1.0,
    }
}

/// For every pixel, the angular distance (radians) from its centre to the nearest masked
/// pixel's centre, capped at `max_distance`; 0 for masked pixels. Exact: every masked pixel
/// bordering the footprint is a source, and all observed pixels within `max_distance` of it are
/// visited through a HEALPix cone query (`cdshealpix`), keeping the minimum (order-independent,
/// so identical for any thread count). A masked pixel is one of weight 0.
pub fn distance_to_mask(footprint: &FootprintOf<'_>, max_distance: f64) -> Result<Vec<f64>> {
    let near = distances_near_mask(footprint, max_distance)?;
    Ok(footprint
        .weights()
        .iter()
        .enumerate()
        .map(|(p, &x)| if x > 0.0 { near.get(p) } else { 0.0 })
        .collect())
}

/// [`distance_to_mask`] at the observed pixels, stored only by blocks of pixels holding one
/// closer than `max_distance` to the mask (the rest read `max_distance`): the apodized band
/// along the mask's edges and holes, not a full-sky array.
fn distances_near_mask(footprint: &FootprintOf<'_>, max_distance: f64) -> Result<SparseMinimum> {
    if !(max_distance.is_finite() && max_distance > 0.0) {
        return Err(Error::Setting(format!(
            "apodization width must be positive, got {} arcmin",
            crate::error::compact(max_distance.to_degrees() * 60.0)
        )));
    }
    if max_distance > 30f64.to_radians() {
        return Err(Error::Setting(format!(
            "apodization width {:.1}° is larger than 30°",
            max_distance.to_degrees()
        )));
    }
    let pix: Pixelization = footprint.pixelization();
    let w = footprint.weights();
    let mut dist = SparseMinimum::new(w.len(), max_distance);
    // Masked pixels that touch an observed pixel: the sources of the distance.
    // Only the boundary pixels are collected (in pixel order): collecting an entry for every
    // masked pixel first made this step the measurement's peak of memory (about 300 MB at
    // NSIDE 1024, measured with valgrind's massif).
    let sources = boundary_pixels(pix, &w)?;
    let depth = cdshealpix::depth(pix.nside());
    let nested = pix.with_ordering(crate::sky::pixelization::Ordering::Nested)?;
    // Search radius padded by one pixel radius so that cells whose centre lies inside are found.
    let radius = max_distance + 2.0 * pix.mean_spacing();
    for chunk in sources.chunks(4096) {
        let found: Vec<Vec<(u64, f64)>> = chunk
            .par_iter()
            .map(|&s| -> Result<Vec<(u64, f64)>> {
                let c = pix.center(s);
                let cone =
                    cdshealpix::nested::cone_coverage_approx(depth, c.lon(), c.lat(), radius);
                let mut out = Vec::new();
                for n in cone.flat_iter() {
                    let p = pix.from_nested(n)?;
                    if w[p as usize] > 0.0 {
                        let d = c.distance(&nested.center(n));
                        if d < max_distance {
                            out.push((p, d));
                        }
                    }
                }
                Ok(out)
            })
            .collect::<Result<Vec<_>>>()?;
        for (p, d) in found.into_iter().flatten() {
            dist.record(p as usize, d);
        }
    }
    Ok(dist)
}

/// The masked pixels (weight ≤ 0) with at least one observed neighbour (weight > 0), in
/// increasing pixel index.
///
/// For a RING map, a masked pixel whose rings i − 2 … i + 2 hold no observed pixel within
/// longitude φ ± (Δφ_i + Δφ_k) of its own cannot touch the footprint and is passed over without
/// the neighbour query (the windows are marked run by run of observed pixels): a HEALPix pixel's eight neighbours lie within two rings of it, at
/// |φ_k − φ| ≤ (Δφ_i + Δφ_k)/2 away from the three rings nearest each pole (Górski et al. 2005
/// geometry; checked against healpy 1.20.1 `get_all_neighbours` for NSIDE 2–128, largest
/// ratio 0.5), so the window holds every neighbour with a factor 2 to spare. The pixels left
/// are confirmed with the exact neighbour query, so the set equals the exhaustive one.
fn boundary_pixels<W>(pix: Pixelization, w: &W) -> Result<Vec<u64>>
where
    W: std::ops::Index<usize, Output = f64> + Sync + ?Sized,
{
    let touches = |p: u64| -> Result<bool> {
        Ok(pix
            .neighbours(p)?
            .iter()
            .flatten()
            .any(|&q| w[q as usize] > 0.0))
    };
    if pix.ordering() != crate::sky::pixelization::Ordering::Ring {
        return (0..pix.npix())
            .into_par_iter()
            .filter(|&p| w[p as usize] <= 0.0)
            .filter_map(|p| match touches(p) {
                Ok(true) => Some(Ok(p)),
                Ok(false) => None,
                Err(e) => Some(Err(e)),
            })
            .collect();
    }
    let n = pix.nside() as u64;
    let last = 4 * n - 1;
    let spacing = |c: u64| std::f64::consts::TAU / c as f64;
    let offset = |shifted: bool| if shifted { 0.5 } else { 0.0 };
    let per_ring: Vec<Vec<u64>> = (1..=last)
        .into_par_iter()
        .map(|i| -> Result<Vec<u64>> {
            let (first, count, shifted) = crate::sky::pixelization::ring_info(n, i);
            let dphi = spacing(count);
            let near_pole = i <= 3 || i + 3 >= last;
            // near[j]: ring i's pixel j lies within the window of an observed pixel of rings
            // i − 2 … i + 2 (each run of observed pixels widened by the window, mapped onto
            // ring i's pixel positions)
            let mut near = vec![near_pole; count as usize];
            if !near_pole {
                for k in i - 2..=i + 2 {
                    let (first_k, count_k, shifted_k) = crate::sky::pixelization::ring_info(n, k);
                    let dk = spacing(count_k);
                    let reach = dphi + dk;
                    let mut j = 0;
                    while j < count_k {
                        if w[(first_k + j) as usize] <= 0.0 {
                            j += 1;
                            continue;
                        }
                        let a = j;
                        while j < count_k && w[(first_k + j) as usize] > 0.0 {
                            j += 1;
                        }
                        let lo_phi = (a as f64 + offset(shifted_k)) * dk - reach;
                        let hi_phi = ((j - 1) as f64 + offset(shifted_k)) * dk + reach;
                        let lo = (lo_phi / dphi - offset(shifted)).ceil() as i64;
                        let hi = (hi_phi / dphi - offset(shifted)).floor() as i64;
                        if hi - lo + 1 >= count as i64 {
                            near.iter_mut().for_each(|x| *x = true);
                        } else {
                            for q in lo..=hi {
                                near[q.rem_euclid(count as i64) as usize] = true;
                            }
                        }
                    }
                }
            }
            let mut out = Vec::new();
            for j in 0..count {
                let p = first + j;
                if w[p as usize] <= 0.0 && near[j as usize] && touches(p)? {
                    out.push(p);
                }
            }
            Ok(out)
        })
        .collect::<Result<Vec<_>>>()?;
    Ok(per_ring.into_iter().flatten().collect())
}

/// The footprint to pool and filter with: a binary mask multiplied by the taper of `kind` and
/// `width` (radians); a fractional weight map returned as it is; `TaperKind::None` returns the
/// mask unchanged.
pub fn apodize<'a>(
    footprint: &FootprintOf<'a>,
    kind: TaperKind,
    width: f64,
) -> Result<FootprintOf<'a>> {
    if kind == TaperKind::None || !footprint.is_binary() {
        return Ok(footprint.clone());
    }
    if footprint.observed_pixels() == 0 {
        return Err(Error::Data(
            "the footprint is empty: nothing to apodize".into(),
        ));
    }
    tapered(footprint.clone(), kind, width)
}

/// The binary footprint `raw` with each observed pixel's weight w replaced by
/// w · f(Δ) (the taper of `kind` at its distance Δ to the mask, [`taper`]) and each masked
/// one by 0. Only pixels closer than `width` to the mask are changed (f = 1 beyond): a
/// footprint reading its caller's weights stores just that band.
fn tapered<'a>(raw: FootprintOf<'a>, kind: TaperKind, width: f64) -> Result<FootprintOf<'a>> {
    let near = distances_near_mask(&raw, width)?;
    // f at Δ = width, the distance of every pixel not stored in `near` (1 for every taper,
    // bit for bit: x = 1 exactly)
    let far = taper(kind, width, width);
    raw.reweighted(|p, w| {
        if w > 0.0 {
            let f = if near.is_stored(p) {
                taper(kind, near.get(p), width)
            } else {
                far
            };
            w * f
        } else {
            0.0
        }
    })
}

/// `raw` tapered by `kind` over `width_arcmin` (binary masks only; a full sky, a width of 0 or
/// [`TaperKind::None`] leave it as is): the footprint `measure`, `spectra` and `ensemble` use.
/// Its weights are changed in place, or, when it reads its caller's weights, stored beside
/// them only along the mask's edges (no full-sky array).
pub fn taper_footprint<'a>(
    raw: FootprintOf<'a>,
    kind: TaperKind,
    width_arcmin: f64,
) -> Result<FootprintOf<'a>> {
    if !(width_arcmin.is_finite() && width_arcmin >= 0.0) {
        return Err(Error::Setting(format!(
            "--taper-arcmin must be a non-negative number, got {}",
            crate::error::compact(width_arcmin)
        )));
    }
    if raw.observed_pixels() == 0 {
        return Err(Error::Data(
            "the mask is empty (no pixel has positive weight)".into(),
        ));
    }
    if kind == TaperKind::None || width_arcmin == 0.0 || raw.f_sky() == 1.0 {
        return Ok(raw);
    }
    let width = (width_arcmin / 60.0).to_radians();
    if !raw.is_binary() {
        return apodize(&raw, kind, width);
    }
    tapered(raw, kind, width)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn boundary_pixels_of_a_ring_map_equal_the_exhaustive_neighbour_search() {
        // The ring-window shortcut must find exactly the masked pixels that the neighbour query
        // (cdshealpix, the HEALPix neighbour scheme of Górski et al. 2005) finds on every pixel:
        // masks with caps at both poles, thin stripes, single pixels and holes, NSIDE 1 to 32.
        use crate::sky::pixelization::{Direction, Ordering};
        for nside in [1u32, 2, 4, 8, 16, 32] {
            let ring = Pixelization::new(nside, Ordering::Ring).unwrap();
            let nested = Pixelization::new(nside, Ordering::Nested).unwrap();
            let masks: Vec<Box<dyn Fn(Direction, u64) -> bool>> = vec![
                Box::new(|d: Direction, _| d.theta < 0.4 || d.theta > 2.9),
                Box::new(|d: Direction, _| (d.theta - 1.3).abs() < 0.05 || d.lon() < 0.3),
                Box::new(|_, p: u64| p.wrapping_mul(2654435761).is_multiple_of(7)),
                Box::new(|d: Direction, _| {
                    let hole = Direction::new(0.9, 4.0);
                    d.distance(&hole) > 0.35 && d.theta > 0.05
                }),
            ];
            for (m, observed) in masks.iter().enumerate() {
                for pix in [ring, nested] {
                    let w: Vec<f64> = (0..pix.npix())
                        .map(|p| f64::from(u8::from(observed(pix.center(p), p))))
                        .collect();
                    let exhaustive: Vec<u64> = (0..pix.npix())
                        .filter(|&p| {
                            w[p as usize] <= 0.0
                                && pix
                                    .neighbours(p)
                                    .unwrap()
                                    .iter()
                                    .flatten()
                                    .any(|&q| w[q as usize] > 0.0)
                        })
                        .collect();
                    assert_eq!(
                        boundary_pixels(pix, &w).unwrap(),
                        exhaustive,
                        "NSIDE {nside}, mask {m}, {:?}",
                        pix.ordering()
                    );
                }
            }
        }
    }

    #[test]
    fn tapers_match_grain_tristram_stompor_values() {
        // Grain, Tristram & Stompor 2009 eqs. 31–32; values checked in the shared reference facts.
        assert!((c1(0.25) - 0.0908451).abs() < 1e-7);
        assert!((c1(0.75) - 0.9091549).abs() < 1e-7);
        assert!((c2(0.25) - 0.1464466).abs() < 1e-7);
        assert!((c1(0.5) - 0.5).abs() < 1e-15 && (c2(0.5) - 0.5).abs() < 1e-15);
    }

    #[test]
    fn normal_cdf_matches_tabulated_values() {
        // Φ(1) = 0.841344746, Φ(−2) = 0.022750132 (standard normal tables, from memory).
        assert!((normal_cdf(1.0) - 0.841344746).abs() < 2e-7);
        assert!((normal_cdf(-2.0) - 0.022750132).abs() < 2e-7);
        assert!((normal_cdf(0.0) - 0.5).abs() < 1e-7);
    }
}
