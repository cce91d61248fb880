//! The tiling's cores partition the footprint exactly, and the plan's settings are checked.

use planisphere::sampling::{SamplingMethod, TileSampler};
use planisphere::tiling::{TilingPlan, TilingSettings};
use planisphere::{Direction, Footprint, Ordering, Pixelization, SkyMap};

fn galactic_cut(nside: u32, ordering: Ordering) -> Footprint {
    // |b| > 20° plus a hole at (l, b) = (100°, 50°) of radius 8°.
    let hole = Direction::from_lonlat_deg(100.0, 50.0);
    Footprint::from_fn(Pixelization::new(nside, ordering).unwrap(), |d| {
        d.lat().abs() > 20f64.to_radians() && d.distance(&hole) > 8f64.to_radians()
    })
}

#[test]
fn every_footprint_pixel_lies_in_exactly_one_core() {
    // NESTED hierarchy (Górski et al. 2005, §4): each fine pixel descends from one coarse pixel.
    for ordering in [Ordering::Ring, Ordering::Nested] {
        let nside = 64;
        let fp = galactic_cut(nside, ordering);
        let plan = TilingPlan::new(fp.pixelization(), &fp, &TilingSettings::new(4)).unwrap();
        let pix = fp.pixelization();
        let mut hits = vec![0u32; pix.npix() as usize];
        for i in 0..plan.len() {
            for q in plan.core_nested_range(i).unwrap() {
                hits[pix.from_nested(q).unwrap() as usize] += 1;
            }
        }
        for (p, &h) in hits.iter().enumerate() {
            if fp.weight(p as u64) > 0.0 {
                assert_eq!(h, 1, "footprint pixel {p} ({ordering}) lies in {h} cores");
            } else {
                assert!(h <= 1, "pixel {p} lies in {h} cores");
            }
        }
        // Some coarse pixels (in |b| < 20°, away from the cut's edge) hold no footprint at all.
        assert!(plan.len() < 12 * 16);
    }
}

#[test]
fn core_solid_angles_sum_to_footprint_area_to_the_pixel() {
    // HEALPix is equal-area (Górski et al. 2005): Ω_coarse = 4^d Ω_fine, so areas are pixel
    // counts. For a footprint that is a union of coarse pixels the kept cores are exactly it.
    let nside = 128;
    let fine = Pixelization::new(nside, Ordering::Ring).unwrap();
    let coarse = Pixelization::new(8, Ordering::Nested).unwrap();
    let union = Footprint::from_fn(fine, |d| {
        let c = coarse.center(coarse.pixel_of(d));
        c.lat() > 10f64.to_radians()
    });
    let plan = TilingPlan::new(fine, &union, &TilingSettings::new(8)).unwrap();
    let cores = plan.len() as f64 * coarse.pixel_area();
    assert!(
        (cores - union.area_sr()).abs() <= 1e-12 * cores,
        "{cores} vs {}",
        union.area_sr()
    );
    // General footprint: kept cores hold the footprint area exactly, and their total area is the
    // footprint area plus the non-footprint pixels they contain, counted pixel by pixel.
    let fp = galactic_cut(nside, Ordering::Ring);
    let plan = TilingPlan::new(fine, &fp, &TilingSettings::new(8)).unwrap();
    let in_cores: u64 = plan.tiles().iter().map(|t| t.footprint_pixels).sum();
    assert_eq!(in_cores, fp.observed_pixels());
    let summary = plan.summary(1);
    let omega = fine.pixel_area();
    assert!((summary.covered_footprint_area_sr - fp.area_sr()).abs() <= 1e-9 * omega);
    let outside = (summary.core_area_sr - fp.area_sr()) / omega;
    let mut counted = 0u64;
    for i in 0..plan.len() {
        for q in plan.core_nested_range(i).unwrap() {
            if fp.weight(fine.from_nested(q).unwrap()) == 0.0 {
                counted += 1;
            }
        }
    }
    assert!(
        (outside - counted as f64).abs() < 1e-6,
        "{outside} vs {counted}"
    );
}

#[test]
fn full_sky_keeps_all_coarse_pixels() {
    // 12 NSIDE_coarse² coarse pixels (Górski et al. 2005, eq. 2).
    let pix = Pixelization::new(32, Ordering::Nested).unwrap();
    let plan = TilingPlan::new(pix, &Footprint::full_sky(pix), &TilingSettings::new(2)).unwrap();
    assert_eq!(plan.len(), 48);
    let s = plan.summary(2);
    assert!((s.core_area_sr - 4.0 * std::f64::consts::PI).abs() < 1e-12);
    assert!((s.mean_footprint_fraction - 1.0).abs() < 1e-15);
    assert_eq!(s.bytes_in_flight, 2 * s.bytes_per_tile);
}

#[test]
fn in_core_plane_pixels_cover_the_core_solid_angle() {
    // The plane pixels whose direction lies in the core tile the core up to a boundary strip:
    // |Σ_in-core Ω − Ω_core| ≤ ½·(core perimeter ≈ 4√Ω_core)·Δ (one half pixel along the edge,
    // common practice for pixelised areas).
    let nside = 64;
    let pix = Pixelization::new(nside, Ordering::Ring).unwrap();
    let fp = Footprint::full_sky(pix);
    let settings = TilingSettings {
        pixel_size: Some(0.5 * pix.mean_spacing()),
        ..TilingSettings::new(4)
    };
    let plan = TilingPlan::new(pix, &fp, &settings).unwrap();
    let map = SkyMap::from_fn(pix, |_| 1.0);
    let sampler = TileSampler::new(&plan, &map, &fp, SamplingMethod::Bilinear).unwrap();
    let omega_core = plan.coarse_pixelization().pixel_area();
    let tol = 0.5 * 4.0 * omega_core.sqrt() * plan.pixel_size();
    // Tiles at the north pole, in the equatorial belt and at a south-cap base-pixel corner.
    for tile in [0usize, 70, 100, 191] {
        let g = sampler.sample(tile).unwrap();
        let covered: f64 = g
            .solid_angle
            .iter()
            .zip(&g.in_core)
            .filter(|(_, &c)| c)
            .map(|(w, _)| w)
            .sum();
        assert!(
            (covered - omega_core).abs() <= tol,
            "tile {tile}: {covered} vs {omega_core} (tol {tol})"
        );
        // The halo ring of the grid is outside the core.
        let n = g.n;
        for k in 0..n {
            for idx in [k, (n - 1) * n + k, k * n, k * n + n - 1] {
                assert!(
                    !g.in_core[idx],
                    "tile {tile}: grid edge pixel {idx} in the core"
                );
            }
        }
    }
}

#[test]
fn too_small_grid_is_rejected_with_the_size_needed() {
    let pix = Pixelization::new(64, Ordering::Ring).unwrap();
    let fp = Footprint::full_sky(pix);
    let settings = TilingSettings {
        tile_pixels: Some(32),
        ..TilingSettings::new(4)
    };
    let err = TilingPlan::new(pix, &fp, &settings)
        .unwrap_err()
        .to_string();
    assert!(err.contains("n must be at least"), "{err}");
    // The size it asks for is accepted.
    let need: usize = err.rsplit(' ').next().unwrap().parse().unwrap();
    let ok = TilingSettings {
        tile_pixels: Some(need),
        ..settings
    };
    assert_eq!(TilingPlan::new(pix, &fp, &ok).unwrap().tile_pixels(), need);
    let smaller = TilingSettings {
        tile_pixels: Some(need - 2),
        ..settings
    };
    assert!(TilingPlan::new(pix, &fp, &smaller).is_err());
}

#[test]
fn bad_settings_are_one_line_errors() {
    let pix = Pixelization::new(64, Ordering::Ring).unwrap();
    let fp = Footprint::full_sky(pix);
    let cases = [
        (TilingSettings::new(3), "power of two"),
        (
            TilingSettings::new(128),
            "power of two between 1 and the map NSIDE 64",
        ),
        (
            TilingSettings {
                tile_pixels: Some(101),
                ..TilingSettings::new(4)
            },
            "even",
        ),
        (
            TilingSettings {
                pixel_size: Some(-1.0),
                ..TilingSettings::new(4)
            },
            "positive",
        ),
        (TilingSettings::new(1), "corners"),
        (
            TilingSettings {
                halo: usize::MAX,
                ..TilingSettings::new(4)
            },
            "more than 8192 pixels",
        ),
        (
            TilingSettings {
                pixel_size: Some(1e-9),
                ..TilingSettings::new(4)
            },
            "use larger pixels",
        ),
    ];
    for (settings, words) in cases {
        let err = TilingPlan::new(pix, &fp, &settings)
            .unwrap_err()
            .to_string();
        assert!(err.contains(words), "{err}");
        assert!(!err.contains('\n'));
    }
    let empty = Footprint::from_fn(pix, |_| false);
    let err = TilingPlan::new(pix, &empty, &TilingSettings::new(4))
        .unwrap_err()
        .to_string();
    assert!(err.contains("empty"), "{err}");
}

#[test]
fn distortion_figures_follow_sec_squared_at_the_corner() {
    // Radial scale sec²ρ = 1 + x² + y² at plane point (x, y) (Snyder 1987, §22).
    let pix = Pixelization::new(128, Ordering::Ring).unwrap();
    let fp = galactic_cut(128, Ordering::Ring);
    let plan = TilingPlan::new(pix, &fp, &TilingSettings::new(8)).unwrap();
    let half = plan.tile_pixels() as f64 / 2.0 * plan.pixel_size();
    let rho = (half * 2f64.sqrt()).atan();
    let s = plan.summary(1);
    assert!((s.grid_corner_distortion - 1.0 / rho.cos().powi(2)).abs() < 1e-12);
    assert!(s.worst_core_distortion > 1.0 && s.worst_core_distortion < s.grid_corner_distortion);
    for t in plan.tiles() {
        assert!(t.core_half_width < half);
        assert!(t.footprint_fraction > 0.0 && t.footprint_fraction <= 1.0);
    }
}
