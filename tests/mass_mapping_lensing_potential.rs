//! Sign and axis conventions of the mass mapping, checked against the shear and convergence of
//! a known lensing potential ψ on the sphere: with the covariant Hessian H of ψ on an
//! orthonormal frame (x, y), γ1 = ½(H_xx − H_yy), γ2 = H_xy and κ = ½(H_xx + H_yy) (Kaiser &
//! Squires 1993, ApJ 404, 441, eq. 2.2-2.3 on the plane, equation numbers from memory; on the
//! sphere the covariant derivatives, e.g. Castro, Heavens & Kitching 2005, PRD 72, 023516).
//! Frame: x = east (increasing RA = φ), y = north (increasing Dec = 90° − θ), the default
//! `ShearAxes::EastNorth`; a stretched image has γ1 > 0 along RA (common practice).

use planisphere::harmonics::{MassMapper, MassMappingSettings, RingGeometry, ShearAxes};

/// ψ = A(3cos²θ − 1) + B sinθ cosθ cosφ + C sin²θ sin2φ (ℓ = 2, ∇²ψ = −6ψ) +
/// D(5cos³θ − 3cosθ) (ℓ = 3, ∇² = −12): value, ψ_θ, ψ_θθ, ψ_φ, ψ_φφ, ψ_θφ.
fn potential(theta: f64, phi: f64) -> [f64; 6] {
    let (a, b, c, d) = (0.3, 0.7, -0.5, 0.4);
    let (s, co) = theta.sin_cos();
    let (s2, c2) = (2.0 * theta).sin_cos();
    let value = a * (3.0 * co * co - 1.0)
        + b * 0.5 * s2 * phi.cos()
        + c * s * s * (2.0 * phi).sin()
        + d * (5.0 * co.powi(3) - 3.0 * co);
    let d_t = a * (-3.0 * s2) + b * c2 * phi.cos() + c * s2 * (2.0 * phi).sin()
        - d * (15.0 * co * co - 3.0) * s;
    let d_tt = a * (-6.0 * c2) - b * 2.0 * s2 * phi.cos()
        + c * 2.0 * c2 * (2.0 * phi).sin()
        + d * (30.0 * co * s * s - 15.0 * co.powi(3) + 3.0 * co);
    let d_p = -b * 0.5 * s2 * phi.sin() + c * 2.0 * s * s * (2.0 * phi).cos();
    let d_pp = -b * 0.5 * s2 * phi.cos() - c * 4.0 * s * s * (2.0 * phi).sin();
    let d_tp = -b * c2 * phi.sin() + c * 2.0 * s2 * (2.0 * phi).cos();
    [value, d_t, d_tt, d_p, d_pp, d_tp]
}

/// (γ1, γ2, κ) on the east/north frame from the covariant Hessian: on (e_θ, e_φ),
/// H_θθ = ψ_θθ, H_φφ = (ψ_φφ + sinθ cosθ ψ_θ)/sin²θ, H_θφ = (ψ_θφ − cotθ ψ_φ)/sinθ; east = e_φ
/// and north = −e_θ, so H_xx = H_φφ, H_yy = H_θθ, H_xy = −H_θφ.
fn lensing_fields(theta: f64, phi: f64) -> (f64, f64, f64) {
    let [_, d_t, d_tt, d_p, d_pp, d_tp] = potential(theta, phi);
    let (s, c) = theta.sin_cos();
    let h_tt = d_tt;
    let h_pp = (d_pp + s * c * d_t) / (s * s);
    let h_tp = (d_tp - c / s * d_p) / s;
    let (h_xx, h_yy, h_xy) = (h_pp, h_tt, -h_tp);
    (0.5 * (h_xx - h_yy), h_xy, 0.5 * (h_xx + h_yy))
}

fn rms(v: &[f64]) -> f64 {
    (v.iter().map(|x| x * x).sum::<f64>() / v.len() as f64).sqrt()
}

#[test]
fn shear_of_a_known_potential_maps_to_its_convergence() {
    let (nside, lmax) = (32, 64);
    let centres = RingGeometry::new(nside).unwrap().pixel_centres();
    let mut g1 = Vec::new();
    let mut g2 = Vec::new();
    let mut kappa = Vec::new();
    for &(theta, phi) in &centres {
        let (a, b, k) = lensing_fields(theta, phi);
        g1.push(a);
        g2.push(b);
        kappa.push(k);
        // The Hessian is right: ½∇²ψ = −3ψ₂ − 6ψ₃ (spherical harmonics of degree 2 and 3).
        let psi = potential(theta, phi)[0];
        let d = 0.4 * (5.0 * theta.cos().powi(3) - 3.0 * theta.cos());
        assert!((k - (-3.0 * (psi - d) - 6.0 * d)).abs() < 1e-12);
    }
    let mapper = MassMapper::new(nside, lmax).unwrap();
    let settings = MassMappingSettings {
        iterations: 8,
        ..Default::default()
    };
    let maps = mapper.convergence_from_shear(&g1, &g2, &settings).unwrap();
    let scale = rms(&kappa);
    let err = maps
        .e
        .iter()
        .zip(&kappa)
        .map(|(a, b)| (a - b).abs())
        .fold(0.0, f64::max);
    let b_max = maps.b.iter().fold(0.0f64, |a, x| a.max(x.abs()));
    println!(
        "κ_E error {:.1e}, κ_B {:.1e} of the rms",
        err / scale,
        b_max / scale
    );
    assert!(err < 1e-8 * scale, "κ_E error {err:e}");
    assert!(b_max < 1e-8 * scale, "κ_B {b_max:e}");
    // The same shear on west/north axes has γ2 of the opposite sign and gives the same κ.
    let g2_west: Vec<f64> = g2.iter().map(|g| -g).collect();
    let west = MassMappingSettings {
        axes: ShearAxes::WestNorth,
        ..settings
    };
    let maps_west = mapper.convergence_from_shear(&g1, &g2_west, &west).unwrap();
    assert_eq!(maps_west, maps);
    // Reading the shear with the opposite sign (e.g. healpy's COSMO Q, U = −γ1, −γ2 without
    // the sign) gives −κ: the test distinguishes the conventions.
    let n1: Vec<f64> = g1.iter().map(|g| -g).collect();
    let n2: Vec<f64> = g2.iter().map(|g| -g).collect();
    let flipped = mapper.convergence_from_shear(&n1, &n2, &settings).unwrap();
    let err_flip = flipped
        .e
        .iter()
        .zip(&kappa)
        .map(|(a, b)| (a + b).abs())
        .fold(0.0, f64::max);
    assert!(err_flip < 1e-8 * scale);
}
