//! Sampling a smooth field onto tiles, and back, within the bilinear interpolation error bound;
//! solid-angle weights; bad pixels; determinism across thread counts.

use planisphere::tiles::projection::{rectangle_solid_angle, solid_angle_density};
use planisphere::tiles::sampling::{assemble, back_project, SamplingMethod, TileSampler};
use planisphere::tiles::tiling::{TilingPlan, TilingSettings};
use planisphere::{Direction, Footprint, Ordering, Pixelization, SkyMap};

/// f(v) = a·v + vᵀBv on the unit sphere, B symmetric traceless: a sum of real spherical
/// harmonics of degree 1 and 2 (the degree-ℓ harmonics are the restrictions of harmonic
/// homogeneous polynomials of degree ℓ; e.g. Arfken & Weber, Mathematical Methods, §12.6,
/// from memory).
const A: [f64; 3] = [0.3, -0.5, 0.8];
const B: [[f64; 3]; 3] = [[0.2, 0.4, -0.1], [0.4, -0.5, 0.3], [-0.1, 0.3, 0.3]];

fn field(d: Direction) -> f64 {
    let v = d.to_vector();
    let mut f = 0.0;
    for i in 0..3 {
        f += A[i] * v[i];
        for j in 0..3 {
            f += v[i] * B[i][j] * v[j];
        }
    }
    f
}

/// Spectral norm of B (largest |eigenvalue|), by power iteration.
fn norm_b() -> f64 {
    let mut x = [1.0, 0.3, -0.2];
    let mut lambda = 0.0;
    for _ in 0..500 {
        let y: Vec<f64> = (0..3)
            .map(|i| (0..3).map(|j| B[i][j] * x[j]).sum())
            .collect();
        lambda = (y.iter().map(|v| v * v).sum::<f64>()).sqrt();
        x = [y[0] / lambda, y[1] / lambda, y[2] / lambda];
    }
    lambda
}

/// Bounds on the field's derivatives along any unit-speed curve on the sphere with geodesic
/// curvature ≤ κ: along a great circle v'' = −v, so (a·v)'' = −a·v and (vᵀBv)'' = 2v'ᵀBv' −
/// 2vᵀBv, giving |f''| ≤ |a| + 4‖B‖; a curve of curvature κ adds κ·|∇f| with |∇f| ≤ |a| + 2‖B‖.
fn second_derivative_bound(kappa: f64) -> f64 {
    let a = (A.iter().map(|v| v * v).sum::<f64>()).sqrt();
    let b = norm_b();
    a + 4.0 * b + kappa * (a + 2.0 * b)
}

/// Largest distance between a pixel centre and its four grid-axis neighbours (NE, NW, SE, SW:
/// the cells of the HEALPix projection plane in which interpolation is bilinear).
fn largest_cell_side(pix: Pixelization) -> f64 {
    let mut h = 0.0f64;
    for p in 0..pix.npix() {
        let c = pix.center(p);
        let nb = pix.neighbours(p).unwrap();
        for k in [0, 2, 4, 6] {
            if let Some(q) = nb[k] {
                h = h.max(c.distance(&pix.center(q)));
            }
        }
    }
    h
}

// Bilinear interpolation error bound (common practice, derived by Taylor expansion): on a cell of
// sides h_u, h_v, e = −½[s(1−s) h_u² f_uu + t(1−t) h_v² f_vv] + O(h³), and s(1−s) ≤ ¼, so
// |e| ≤ (h²/8)(|f_uu| + |f_vv|) ≤ (h²/4)·M with M bounding second derivatives along the cell's
// grid lines. HEALPix grid lines are not great circles; their geodesic curvature on the unit
// sphere is O(1) (κ ≤ 2 taken here) and enters M through second_derivative_bound.
// This second-order bound is checked in the equatorial zone |z| ≤ 2/3 (Górski et al. 2005, §4),
// where the HEALPix projection plane is one regular grid. In the polar caps, measured with
// cdshealpix 0.10.1, the error next to the base-pixel seams (meridians 0°, 90°, 180°, 270°) is
// only first order (it halves, not quarters, from NSIDE 128 to 256); there the check is the
// convex-combination bound |e| ≤ D·max|∇f|, D ≤ √2·h the largest distance from a direction to
// the four pixel centres of its cell.
const KAPPA: f64 = 2.0;

fn sampled_plan(nside: u32, coarse: u32, ordering: Ordering) -> (SkyMap, Footprint, TilingPlan) {
    let pix = Pixelization::new(nside, ordering).unwrap();
    let map = SkyMap::from_fn(pix, field);
    let fp = Footprint::full_sky(pix);
    let plan = TilingPlan::new(pix, &fp, &TilingSettings::healpix_pixels(coarse)).unwrap();
    (map, fp, plan)
}

fn gradient_bound() -> f64 {
    (A.iter().map(|v| v * v).sum::<f64>()).sqrt() + 2.0 * norm_b()
}

/// Is the direction inside the equatorial zone |z| = |cos θ| ≤ 2/3 (Górski et al. 2005, §4),
/// with a margin (|z| ≤ 0.6, about 4° of latitude) so that its cell holds no cap pixel?
fn equatorial(d: Direction) -> bool {
    d.theta.cos().abs() <= 0.6
}

#[test]
fn bilinear_sampling_of_smooth_field_is_within_interpolation_bound() {
    let nside = 128;
    let (map, fp, plan) = sampled_plan(nside, 8, Ordering::Ring);
    let h = largest_cell_side(map.pixelization());
    let second_order = h * h / 4.0 * second_derivative_bound(KAPPA);
    let first_order = 2f64.sqrt() * h * gradient_bound();
    let sampler = TileSampler::new(&plan, &map, &fp, SamplingMethod::Bilinear).unwrap();
    let (mut worst_eq, mut worst) = (0.0f64, 0.0f64);
    for i in 0..plan.len() {
        let proj = plan.projection(i).unwrap();
        let g = sampler.sample(i).unwrap();
        for iy in 0..g.n {
            for ix in 0..g.n {
                let d = proj.inverse(plan.plane_coordinate(ix), plan.plane_coordinate(iy));
                let e = (g.field[iy * g.n + ix] - field(d)).abs();
                worst = worst.max(e);
                if equatorial(d) {
                    worst_eq = worst_eq.max(e);
                }
            }
        }
    }
    assert!(
        worst_eq <= second_order,
        "equatorial zone: worst error {worst_eq:e} exceeds the h² bound {second_order:e}"
    );
    // The bound is not slack by orders of magnitude: the error is of order h².
    assert!(
        worst_eq > second_order / 50.0,
        "{worst_eq:e} vs {second_order:e}"
    );
    assert!(worst <= first_order, "{worst:e} vs {first_order:e}");
}

#[test]
fn nearest_sampling_error_is_within_pixel_radius_times_gradient() {
    // |f(d) − f(centre)| ≤ (distance to centre)·max|∇f|, distance ≤ the largest pixel radius,
    // which is below the largest cell side (a centre-to-neighbour distance).
    let nside = 64;
    let (map, fp, plan) = sampled_plan(nside, 4, Ordering::Nested);
    let bound = largest_cell_side(map.pixelization()) * gradient_bound();
    let sampler = TileSampler::new(&plan, &map, &fp, SamplingMethod::Nearest).unwrap();
    let mut worst = 0.0f64;
    for i in (0..plan.len()).step_by(7) {
        let proj = plan.projection(i).unwrap();
        let g = sampler.sample(i).unwrap();
        for iy in 0..g.n {
            for ix in 0..g.n {
                let d = proj.inverse(plan.plane_coordinate(ix), plan.plane_coordinate(iy));
                worst = worst.max((g.field[iy * g.n + ix] - field(d)).abs());
            }
        }
    }
    assert!(worst <= bound, "{worst:e} vs {bound:e}");
    assert!(worst > bound / 20.0, "{worst:e} vs {bound:e}");
}

#[test]
fn back_projection_returns_core_pixel_values_within_bound() {
    // Sphere → plane (bound above) then plane → sphere: bilinear in the plane grid adds at most
    // (Δ²/4)·M_plane, with M_plane ≤ M·(sec²ρ)² the field's second derivatives in plane
    // coordinates (the projection stretches distances by at most sec²ρ, Snyder 1987 §22) plus
    // the gnomonic map's own curvature term, bounded here by the same κ allowance.
    let nside = 128;
    let (map, fp, plan) = sampled_plan(nside, 8, Ordering::Ring);
    let h = largest_cell_side(map.pixelization());
    let m = second_derivative_bound(KAPPA);
    let delta = plan.pixel_size();
    let stretch = plan.grid_corner_distortion();
    let bound = h * h / 4.0 * m + delta * delta / 4.0 * m * stretch * stretch;
    let sampler = TileSampler::new(&plan, &map, &fp, SamplingMethod::Bilinear).unwrap();
    let mut worst = 0.0f64;
    let mut count = 0usize;
    let mut worst_all = 0.0f64;
    for i in 0..plan.len() {
        let g = sampler.sample(i).unwrap();
        for (p, v) in back_project(&plan, i, &g.field).unwrap() {
            let e = (v - map.get(p).unwrap()).abs();
            worst_all = worst_all.max(e);
            // Second-order bound where the sphere step is second order (see above): cores
            // inside the equatorial zone with a margin of one tile half-width.
            if plan.tiles()[i].center.theta.cos().abs() < 0.5 {
                worst = worst.max(e);
            }
            count += 1;
        }
    }
    assert_eq!(count as u64, map.pixelization().npix());
    let first_order =
        2f64.sqrt() * h * gradient_bound() + delta * delta / 4.0 * m * stretch * stretch;
    assert!(worst_all <= first_order, "{worst_all:e} vs {first_order:e}");
    assert!(worst <= bound, "{worst:e} vs {bound:e}");
    assert!(worst > bound / 50.0, "{worst:e} vs {bound:e}");
}

#[test]
fn assembled_back_projection_matches_per_tile_values_and_leaves_rest_invalid() {
    let pix = Pixelization::new(64, Ordering::Nested).unwrap();
    let map = SkyMap::from_fn(pix, field);
    let fp = Footprint::from_fn(pix, |d| d.lat() > 30f64.to_radians());
    let plan = TilingPlan::new(pix, &fp, &TilingSettings::healpix_pixels(4)).unwrap();
    let sampler = TileSampler::new(&plan, &map, &fp, SamplingMethod::Bilinear).unwrap();
    let whole = assemble(&plan, |i| Ok(sampler.sample(i)?.field)).unwrap();
    let mut in_cores = vec![false; pix.npix() as usize];
    for i in 0..plan.len() {
        let g = sampler.sample(i).unwrap();
        for (p, v) in back_project(&plan, i, &g.field).unwrap() {
            in_cores[p as usize] = true;
            assert_eq!(whole.get(p), Some(v));
        }
    }
    for (p, &inside) in in_cores.iter().enumerate() {
        assert_eq!(whole.valid()[p], inside, "pixel {p}");
        if fp.weight(p as u64) > 0.0 {
            assert!(inside);
        }
    }
}

#[test]
fn solid_angle_weights_sum_to_the_tile_solid_angle() {
    // A gnomonic square of half-widths tan α = tan β = nΔ/2 subtends Ω = 4·asin(sin α sin β)
    // (spherical rectangle; equivalently 4·atan(t²/√(1+2t²)), checked in projection tests).
    let (map, fp, plan) = sampled_plan(128, 4, Ordering::Ring);
    let sampler = TileSampler::new(&plan, &map, &fp, SamplingMethod::Nearest).unwrap();
    let g = sampler.sample(17).unwrap();
    let t = g.n as f64 / 2.0 * g.pixel_size;
    let alpha = t.atan();
    let exact = 4.0 * (alpha.sin() * alpha.sin()).asin();
    let sum: f64 = g.solid_angle.iter().sum();
    assert!((sum - exact).abs() <= 1e-6 * exact, "{sum} vs {exact}");
    // Each weight is the plane pixel area × (1 + x² + y²)^(−3/2) at its centre up to the
    // midpoint rule's relative error ≤ (Δ²/24)·max|∇²ρ_Ω|/ρ_Ω ≤ Δ²·(6 + 15 t²)/24 (second
    // derivatives of (1 + r²)^(−3/2), common practice).
    let d = g.pixel_size;
    let mut worst = 0.0f64;
    for iy in 0..g.n {
        for ix in 0..g.n {
            let (x, y) = (plan.plane_coordinate(ix), plan.plane_coordinate(iy));
            let mid = d * d * solid_angle_density(x, y);
            worst = worst.max((g.solid_angle[iy * g.n + ix] / mid - 1.0).abs());
        }
    }
    assert!(worst <= d * d * (6.0 + 15.0 * t * t) / 24.0, "{worst:e}");
    assert!(worst > 0.0);
    // Cross-check one weight against the rectangle formula directly.
    let (x0, y0) = (
        plan.plane_coordinate(3) - d / 2.0,
        plan.plane_coordinate(5) - d / 2.0,
    );
    assert_eq!(
        g.solid_angle[5 * g.n + 3],
        rectangle_solid_angle(x0, x0 + d, y0, y0 + d)
    );
}

#[test]
fn bad_map_pixels_count_as_masked() {
    let pix = Pixelization::new(128, Ordering::Ring).unwrap();
    let reach = 2f64.sqrt() * largest_cell_side(pix).to_degrees();
    let hole = Direction::from_lonlat_deg(45.0, 0.0);
    // The map is bad within 3° of (45°, 0°); the mask is the full sky.
    let map = SkyMap::from_fn(pix, |d| {
        if d.distance(&hole) < 3f64.to_radians() {
            f64::NAN
        } else {
            field(d)
        }
    });
    let fp = Footprint::full_sky(pix);
    let plan = TilingPlan::new(pix, &fp, &TilingSettings::healpix_pixels(4)).unwrap();
    let tile = plan.owner(hole).unwrap();
    for method in [
        SamplingMethod::Bilinear,
        SamplingMethod::RingLinear,
        SamplingMethod::Nearest,
    ] {
        let sampler = TileSampler::new(&plan, &map, &fp, method).unwrap();
        let g = sampler.sample(tile).unwrap();
        let proj = plan.projection(tile).unwrap();
        let (mut zeros, mut ones) = (0, 0);
        for iy in 0..g.n {
            for ix in 0..g.n {
                let k = iy * g.n + ix;
                let d = proj.inverse(plan.plane_coordinate(ix), plan.plane_coordinate(iy));
                let dist = d.distance(&hole).to_degrees();
                assert!(g.field[k].is_finite());
                assert!((0.0..=1.0 + 1e-12).contains(&g.mask[k]));
                // A direction's bilinear cell lies within √2·(largest cell side) of it.
                if dist < 3.0 - reach {
                    assert_eq!(g.mask[k], 0.0, "{method:?} at {dist}°");
                    zeros += 1;
                } else if dist > 3.0 + reach {
                    assert!((g.mask[k] - 1.0).abs() < 1e-12, "{method:?} at {dist}°");
                    ones += 1;
                }
            }
        }
        assert!(zeros > 10 && ones > 10, "{zeros} {ones}");
    }
}

#[test]
fn sampling_is_identical_for_one_and_two_threads() {
    let pix = Pixelization::new(64, Ordering::Ring).unwrap();
    let map = SkyMap::from_fn(pix, field);
    let fp = Footprint::from_fn(pix, |d| d.lat().abs() > 20f64.to_radians());
    let plan = TilingPlan::new(pix, &fp, &TilingSettings::healpix_pixels(4)).unwrap();
    let run = |threads: usize| {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap();
        pool.install(|| {
            let sampler = TileSampler::new(&plan, &map, &fp, SamplingMethod::Bilinear).unwrap();
            sampler
                .map_tiles(|g| {
                    Ok(g.field
                        .iter()
                        .zip(&g.mask)
                        .zip(&g.solid_angle)
                        .map(|((f, m), w)| f * m * w)
                        .sum::<f64>())
                })
                .unwrap()
        })
    };
    let one = run(1);
    assert_eq!(one.len(), plan.len());
    assert_eq!(one, run(2));
}

/// Largest side of the ring-wise interpolation cells: the spacing of pixel centres along a ring
/// and the colatitude gap between neighbouring rings (RING order lists each ring's pixels
/// consecutively, Górski et al. 2005, §4).
fn largest_ring_cell_side(pix: Pixelization) -> f64 {
    let mut h = 0.0f64;
    let mut prev = pix.center(0);
    for p in 1..pix.npix() {
        let c = pix.center(p);
        if (c.theta - prev.theta).abs() < 1e-12 {
            h = h.max(c.distance(&prev));
        } else {
            h = h.max((c.theta - prev.theta).abs());
        }
        prev = c;
    }
    h
}

#[test]
fn ring_linear_sampling_is_second_order_up_to_latitude_80() {
    // Same Taylor bound as above, |e| ≤ (h²/4)·M, with the cell lines now iso-latitude rings
    // (small circles of geodesic curvature cot θ ≤ cot 10° for |b| ≤ 80°) and meridians
    // (κ = 0). Within 10° of the poles the pole value (mean of the first ring's four pixels)
    // makes it first order, so there the convex-combination bound D·|∇f| is checked.
    let nside = 128;
    let (map, fp, plan) = sampled_plan(nside, 8, Ordering::Nested);
    let h = largest_ring_cell_side(Pixelization::new(nside, Ordering::Ring).unwrap());
    let kappa = 1.0 / 10f64.to_radians().tan();
    let second_order = h * h / 4.0 * second_derivative_bound(kappa);
    let first_order = 2f64.sqrt() * h * gradient_bound();
    let sampler = TileSampler::new(&plan, &map, &fp, SamplingMethod::RingLinear).unwrap();
    let (mut worst_low, mut worst) = (0.0f64, 0.0f64);
    for i in 0..plan.len() {
        let proj = plan.projection(i).unwrap();
        let g = sampler.sample(i).unwrap();
        for iy in 0..g.n {
            for ix in 0..g.n {
                let d = proj.inverse(plan.plane_coordinate(ix), plan.plane_coordinate(iy));
                let e = (g.field[iy * g.n + ix] - field(d)).abs();
                worst = worst.max(e);
                if d.lat().abs() <= 80f64.to_radians() {
                    worst_low = worst_low.max(e);
                }
            }
        }
    }
    assert!(
        worst_low <= second_order,
        "{worst_low:e} vs {second_order:e}"
    );
    assert!(
        worst_low > second_order / 100.0,
        "{worst_low:e} vs {second_order:e}"
    );
    assert!(worst <= first_order, "{worst:e} vs {first_order:e}");
}
