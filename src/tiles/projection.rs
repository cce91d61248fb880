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
    ///
    /// # Examples
    ///
    /// Worked values of Snyder 1987, §22, eqs. 22-4 and 22-5 with the tangent point at
    /// (α0, δ0) = (0°, 0°): (30°, 30°) has cos c = cos 30° cos 30° = 3/4, so
    /// x = cos 30° sin 30°/(3/4) = 1/√3 and y = sin 30°/(3/4) = 2/3; (45°, 0°) is 45° from the
    /// tangent point and lands at R = tan 45° = 1 (Calabretta & Greisen 2002, §5.1.3).
    ///
    /// ```
    /// use planisphere::tiles::projection::Gnomonic;
    /// use planisphere::Direction;
    /// let tan = Gnomonic::new(Direction::from_lonlat_deg(0.0, 0.0));
    /// let (x, y) = tan.forward(Direction::from_lonlat_deg(30.0, 30.0)).unwrap();
    /// assert!((x - 1.0 / 3f64.sqrt()).abs() < 1e-12 && (y - 2.0 / 3.0).abs() < 1e-12);
    /// let (x, y) = tan.forward(Direction::from_lonlat_deg(45.0, 0.0)).unwrap();
    /// assert!((x - 1.0).abs() < 1e-12 && y.abs() < 1e-12);
    /// // The far hemisphere has no image.
    /// assert!(tan.forward(Direction::from_lonlat_deg(120.0, 0.0)).is_none());
    /// // The inverse returns the direction.
    /// let back = tan.inverse(1.0 / 3f64.sqrt(), 2.0 / 3.0);
    /// assert!(back.distance(&Direction::from_lonlat_deg(30.0, 30.0)) < 1e-12);
    /// ```
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
///
/// # Examples
///
/// At ρ = 60°, sec ρ = 2: radial scale 4, tangential scale 2, area scale 8 (worked from the
/// formulas above).
///
/// ```
/// use planisphere::tiles::projection::{area_scale, radial_scale, tangential_scale};
/// let rho = 60f64.to_radians();
/// assert!((radial_scale(rho) - 4.0).abs() < 1e-12);
/// assert!((tangential_scale(rho) - 2.0).abs() < 1e-12);
/// assert!((area_scale(rho) - 8.0).abs() < 1e-12);
/// ```
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
///
/// # Examples
///
/// The square |x|, |y| ≤ 1 is one face of a cube seen from its centre, so it subtends a sixth
/// of the sphere, 4π/6 = 4·atan(1/√3) (common practice); a small square of side 2t at the
/// tangent point subtends ≈ 4t².
///
/// ```
/// use planisphere::tiles::projection::rectangle_solid_angle;
/// use std::f64::consts::PI;
/// assert!((rectangle_solid_angle(-1.0, 1.0, -1.0, 1.0) - 4.0 * PI / 6.0).abs() < 1e-12);
/// let t = 1e-3;
/// assert!((rectangle_solid_angle(-t, t, -t, t) / (4.0 * t * t) - 1.0).abs() < 1e-5);
/// ```
pub fn rectangle_solid_angle(x0: f64, x1: f64, y0: f64, y1: f64) -> f64 {
    let f = |x: f64, y: f64| (x * y / (1.0 + x * x + y * y).sqrt()).atan();
    f(x1, y1) - f(x0, y1) - f(x1, y0) + f(x0, y0)
}

/// Angular distance ρ from the tangent point of plane point (x, y): ρ = atan √(x² + y²).
pub fn angular_distance(x: f64, y: f64) -> f64 {
    (x * x + y * y).sqrt().atan()
}
