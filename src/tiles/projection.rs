//! The gnomonic (TAN) projection of the sphere onto the plane tangent at a chosen point.
//!
//! Convention of the FITS WCS standard, Paper II (Calabretta & Greisen 2002, A&A 395, 1077,
//! §5.1.3, zenithal TAN with the default LONPOLE = 180°): a direction at angular distance ρ from
//! the tangent point lands at plane radius R = tan ρ (here in radians of the tangent plane, not
//! the standard's degrees). The plane axes are x toward increasing longitude (east as seen on the
//! sky from inside the sphere, the standard's ξ) and y toward the north (η).
//!
//! Closed form (Snyder 1987, USGS Prof. Paper 1395, §22, eqs. 5-3, 22-4, 22-5, 20-14, 20-15):
//! cos c = sin δ0 sin δ + cos δ0 cos δ cos(α−α0), x = cos δ sin(α−α0)/cos c,
//! y = [cos δ0 sin δ − sin δ0 cos δ cos(α−α0)]/cos c. We evaluate the same expressions as dot
//! products of the unit vector v of the direction with the orthonormal frame (e_c, e_east, e_north)
//! at the tangent point: cos c = v·e_c, x = v·e_east / cos c, y = v·e_north / cos c, because
//! v·e_east = cos δ sin(α−α0) and v·e_north = cos δ0 sin δ − sin δ0 cos δ cos(α−α0). The inverse
//! is the normalised vector e_c + x e_east + y e_north, which is Snyder's inverse in vector form.

use crate::sky::pixelization::Direction;

/// The gnomonic projection about one tangent point.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Gnomonic {
    center: Direction,
    /// Unit vector of the tangent point.
    e_center: [f64; 3],
    /// Unit vector toward increasing longitude at the tangent point (plane x axis).
    e_east: [f64; 3],
    /// Unit vector toward the north at the tangent point (plane y axis).
    e_north: [f64; 3],
}

fn dot(a: [f64; 3], b: [f64; 3]) -> f64 {
    a[0] * b[0] + a[1] * b[1] + a[2] * b[2]
}

impl Gnomonic {
    /// The projection tangent at `center`. At a pole the x axis points toward longitude φ + 90°
    /// and the y axis toward the meridian φ + 180° (north pole) or φ (south pole), the limits of
    /// the general case, with φ the longitude given in `center`.
    pub fn new(center: Direction) -> Self {
        let (sin_lat, cos_lat) = center.lat().sin_cos();
        let (sin_lon, cos_lon) = center.phi.sin_cos();
        Gnomonic {
            center,
            e_center: [cos_lat * cos_lon, cos_lat * sin_lon, sin_lat],
            e_east: [-sin_lon, cos_lon, 0.0],
            e_north: [-sin_lat * cos_lon, -sin_lat * sin_lon, cos_lat],
        }
    }

    /// The tangent point.
    pub fn center(&self) -> Direction {
        self.center
    }

    /// Plane coordinates (x, y), in radians of the tangent plane, of `dir`; `None` when
    /// cos c ≤ 0, i.e. the direction is 90° or more away from the tangent point.
    pub fn forward(&self, dir: Direction) -> Option<(f64, f64)> {
        self.forward_vector(dir.to_vector())
    }

    /// [`Gnomonic::forward`] for a unit vector.
    pub fn forward_vector(&self, v: [f64; 3]) -> Option<(f64, f64)> {
        let cos_c = dot(v, self.e_center);
        if cos_c <= 0.0 {
            return None;
        }
        Some((dot(v, self.e_east) / cos_c, dot(v, self.e_north) / cos_c))
    }

    /// The unit vector of the direction at plane coordinates (x, y).
    pub fn inverse_vector(&self, x: f64, y: f64) -> [f64; 3] {
        let norm = (1.0 + x * x + y * y).sqrt();
        let mut v = [0.0; 3];
        for (k, item) in v.iter_mut().enumerate() {
            *item = (self.e_center[k] + x * self.e_east[k] + y * self.e_north[k]) / norm;
        }
        v
    }

    /// The direction at plane coordinates (x, y) (radians of the tangent plane).
    pub fn inverse(&self, x: f64, y: f64) -> Direction {
        Direction::from_vector(self.inverse_vector(x, y))
    }
}

/// Radial scale factor at angular distance ρ from the tangent point: dR/dρ = sec²ρ
/// (Snyder 1987, §22, eq. 22-2 in the form h' = 1/cos²c).
pub fn radial_scale(rho: f64) -> f64 {
    1.0 / rho.cos().powi(2)
}

/// Tangential scale factor at angular distance ρ: R / sin ρ = sec ρ (Snyder 1987, §22, k' = 1/cos c).
pub fn tangential_scale(rho: f64) -> f64 {
    1.0 / rho.cos()
}

/// Plane area per solid angle at angular distance ρ: sec³ρ, the product of the two scale factors.
pub fn area_scale(rho: f64) -> f64 {
    radial_scale(rho) * tangential_scale(rho)
}

/// Solid angle per unit plane area at plane point (x, y): (1 + x² + y²)^(−3/2) = cos³ρ, with
/// tan ρ = √(x² + y²) (the inverse of [`area_scale`]).
pub fn solid_angle_density(x: f64, y: f64) -> f64 {
    (1.0 + x * x + y * y).powf(-1.5)
}

/// Exact solid angle of the plane rectangle [x0, x1] × [y0, y1]:
/// Ω = F(x1, y1) − F(x0, y1) − F(x1, y0) + F(x0, y0) with F(x, y) = atan(x y / √(1 + x² + y²)),
/// an antiderivative of (1 + x² + y²)^(−3/2) (∂²F/∂x∂y = (1 + x² + y²)^(−3/2), checked by
/// differentiation). For the square |x|, |y| ≤ t this is 4·atan(t²/√(1 + 2t²)) =
/// 4·asin(sin α sin β) with tan α = tan β = t, the spherical-rectangle formula.
pub fn rectangle_solid_angle(x0: f64, x1: f64, y0: f64, y1: f64) -> f64 {
    let f = |x: f64, y: f64| (x * y / (1.0 + x * x + y * y).sqrt()).atan();
    f(x1, y1) - f(x0, y1) - f(x1, y0) + f(x0, y0)
}

/// Angular distance ρ from the tangent point of plane point (x, y): ρ = atan √(x² + y²).
pub fn angular_distance(x: f64, y: f64) -> f64 {
    (x * x + y * y).sqrt().atan()
}
