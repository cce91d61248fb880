//! Gnomonic (TAN) projection checked against worked values, astropy 8.0.2's TAN WCS and the
//! scale factors of the projection.

use planisphere::tiles::projection::{
    angular_distance, area_scale, radial_scale, rectangle_solid_angle, solid_angle_density,
    tangential_scale, Gnomonic,
};
use planisphere::Direction;

fn plane_deg(g: &Gnomonic, lon: f64, lat: f64) -> (f64, f64) {
    let (x, y) = g
        .forward(Direction::from_lonlat_deg(lon, lat))
        .expect("on the near hemisphere");
    (x.to_degrees(), y.to_degrees())
}

fn read_rows(name: &str) -> Vec<[f64; 6]> {
    let path = format!(
        "{}/reference-values/projection/{name}",
        env!("CARGO_MANIFEST_DIR")
    );
    let text = std::fs::read_to_string(&path).expect("reference file present");
    text.lines()
        .filter(|l| !l.starts_with('#') && !l.starts_with("lon0"))
        .map(|l| {
            let v: Vec<f64> = l.split(',').map(|s| s.parse().unwrap()).collect();
            [v[0], v[1], v[2], v[3], v[4], v[5]]
        })
        .collect()
}

/// Sign of the plane axes relative to astropy's: at a tangent point exactly on the north pole
/// the FITS default LONPOLE is 0° instead of 180° (Calabretta & Greisen 2002, §2.4: φp = 0 when
/// δ0 ≥ θ0, from memory; confirmed by astropy 8.0.2 output), which turns the axes by 180°; we
/// keep the limit δ0 → 90° from below, the continuous choice.
fn astropy_axis_sign(lat0: f64) -> f64 {
    if lat0 >= 90.0 {
        -1.0
    } else {
        1.0
    }
}

#[test]
fn worked_values_match_snyder_closed_form() {
    // Worked values for tangent point (30°, 40°), shared reference facts [checked with astropy
    // 8.0.2]; closed form of Snyder 1987 (USGS Prof. Paper 1395, §22).
    let g = Gnomonic::new(Direction::from_lonlat_deg(30.0, 40.0));
    let (x, y) = plane_deg(&g, 35.0, 42.0);
    assert!((x - 3.7213382154).abs() < 1e-9, "{x}");
    assert!((y - 2.1095974020).abs() < 1e-9, "{y}");
    let (x, y) = plane_deg(&g, 30.0, 50.0);
    assert!(x.abs() < 1e-12, "{x}");
    assert!((y - 10.1027918089).abs() < 1e-9, "{y}");
    // (180/π)·tan 10°: R = tan ρ on the meridian (Calabretta & Greisen 2002, eq. 54).
    assert!((y - 10f64.to_radians().tan().to_degrees()).abs() < 1e-12);
}

#[test]
fn forward_agrees_with_astropy_tan_wcs_to_1e10_deg() {
    // reference-values/projection_reference.py, astropy 8.0.2 TAN WCS, 12 000 points.
    let rows = read_rows("forward.csv");
    assert!(rows.len() >= 10_000);
    let mut worst = 0.0f64;
    for [lon0, lat0, lon, lat, x, y] in rows {
        let g = Gnomonic::new(Direction::from_lonlat_deg(lon0, lat0));
        let (px, py) = plane_deg(&g, lon, lat);
        let s = astropy_axis_sign(lat0);
        worst = worst.max((s * px - x).abs()).max((s * py - y).abs());
    }
    assert!(worst <= 1e-10, "worst plane difference {worst} deg");
}

#[test]
fn inverse_agrees_with_astropy_tan_wcs_to_1e10_deg() {
    // reference-values/projection_reference.py, astropy 8.0.2 TAN WCS, 12 000 points; compared
    // as angular distance on the sphere, in degrees.
    let rows = read_rows("inverse.csv");
    assert!(rows.len() >= 10_000);
    let mut worst = 0.0f64;
    for [lon0, lat0, x, y, lon, lat] in rows {
        let g = Gnomonic::new(Direction::from_lonlat_deg(lon0, lat0));
        let s = astropy_axis_sign(lat0);
        let d = g.inverse(s * x.to_radians(), s * y.to_radians());
        let dist = d
            .distance(&Direction::from_lonlat_deg(lon, lat))
            .to_degrees();
        worst = worst.max(dist);
    }
    assert!(worst <= 1e-10, "worst sky difference {worst} deg");
}

#[test]
fn forward_after_inverse_returns_plane_point_to_1e12() {
    // Round trip of the projection and its inverse (an identity of the closed form, Snyder 1987).
    let mut worst = 0.0f64;
    let mut state = 12345u64;
    let mut uniform = || {
        state = state
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        (state >> 11) as f64 / (1u64 << 53) as f64
    };
    for _ in 0..20_000 {
        let center = Direction::from_lonlat_deg(360.0 * uniform(), 180.0 * uniform() - 90.0);
        let g = Gnomonic::new(center);
        let (x, y) = (2.0 * uniform() - 1.0, 2.0 * uniform() - 1.0);
        let (bx, by) = g.forward(g.inverse(x, y)).unwrap();
        worst = worst.max((bx - x).abs()).max((by - y).abs());
    }
    assert!(worst <= 1e-12, "worst round-trip error {worst}");
}

#[test]
fn far_hemisphere_has_no_image() {
    // cos c ≤ 0: no gnomonic image (Snyder 1987, §22: the projection shows less than a hemisphere).
    let g = Gnomonic::new(Direction::from_lonlat_deg(30.0, 40.0));
    assert!(g
        .forward(Direction::from_lonlat_deg(210.0, -40.0))
        .is_none());
    assert!(g.forward(Direction::from_lonlat_deg(121.0, 0.0)).is_none());
    assert!(g.forward(Direction::from_lonlat_deg(119.0, 0.0)).is_some());
}

#[test]
fn scale_factors_at_five_and_ten_degrees_match_reference() {
    // Shared reference facts [checked]: radial sec²ρ, tangential sec ρ, area sec³ρ.
    let cases = [
        (5.0, 1.00765, 1.00382, 1.01150),
        (10.0, 1.0311, 1.0154, 1.0470),
    ];
    for (deg, radial, tangential, area) in cases {
        let rho = f64::to_radians(deg);
        assert!((radial_scale(rho) - radial).abs() < 6e-5, "{deg}");
        assert!((tangential_scale(rho) - tangential).abs() < 6e-5, "{deg}");
        assert!((area_scale(rho) - area).abs() < 6e-5, "{deg}");
        // Solid angle per plane area is the inverse of the area scale at the same distance.
        let t = rho.tan();
        assert!((solid_angle_density(t, 0.0) * area_scale(rho) - 1.0).abs() < 1e-14);
        assert!((angular_distance(t / 2f64.sqrt(), t / 2f64.sqrt()) - rho).abs() < 1e-14);
    }
}

#[test]
fn scale_factors_match_numerical_derivatives_of_the_projection() {
    // Radial scale = d(plane radius)/dρ, tangential = (plane radius)/sin ρ along a small circle
    // (definitions of the scale factors, Snyder 1987, §4), by central differences.
    let g = Gnomonic::new(Direction::from_lonlat_deg(200.0, -35.0));
    let rho = 10f64.to_radians();
    let h = 1e-6;
    let radius_at = |r: f64| {
        // Walk along the meridian south of the centre: latitude −35° − r.
        let (x, y) = g
            .forward(Direction::from_lonlat_deg(200.0, -35.0 - r.to_degrees()))
            .unwrap();
        (x * x + y * y).sqrt()
    };
    let radial = (radius_at(rho + h) - radius_at(rho - h)) / (2.0 * h);
    assert!((radial - radial_scale(rho)).abs() < 1e-7, "{radial}");
    assert!((radius_at(rho) / rho.sin() - tangential_scale(rho)).abs() < 1e-12);
}

#[test]
fn cube_face_subtends_one_sixth_of_the_sphere() {
    // The plane square |x|, |y| ≤ 1 is a face of the cube seen from its centre: 4π/6 sr
    // (elementary geometry); also Ω = 4·asin(sin α sin β) with tan α = tan β = 1 (spherical
    // rectangle, α = β = 45°: 4·asin(½) = 2π/3).
    let omega = rectangle_solid_angle(-1.0, 1.0, -1.0, 1.0);
    assert!(
        (omega - 4.0 * std::f64::consts::PI / 6.0).abs() < 1e-14,
        "{omega}"
    );
    for t in [0.01, 0.1, 0.3, 0.7] {
        let (a, b) = (f64::atan(t), f64::atan(t * 0.6));
        let spherical = 4.0 * (a.sin() * b.sin()).asin();
        assert!((rectangle_solid_angle(-t, t, -0.6 * t, 0.6 * t) - spherical).abs() < 1e-14);
    }
}

#[test]
fn rectangle_solid_angle_matches_quadrature_of_density() {
    // ∫∫ (1 + x² + y²)^(−3/2) dx dy by a fine 2-D midpoint rule (common
    // practice), on an off-centre rectangle.
    let (x0, x1, y0, y1) = (0.1, 0.45, -0.3, 0.2);
    let m = 2000;
    let (dx, dy) = ((x1 - x0) / m as f64, (y1 - y0) / m as f64);
    let mut sum = 0.0;
    for i in 0..m {
        for j in 0..m {
            sum += solid_angle_density(x0 + (i as f64 + 0.5) * dx, y0 + (j as f64 + 0.5) * dy);
        }
    }
    sum *= dx * dy;
    let exact = rectangle_solid_angle(x0, x1, y0, y1);
    assert!((sum - exact).abs() / exact < 1e-7, "{sum} vs {exact}");
}
