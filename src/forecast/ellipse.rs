//! Confidence ellipses for a pair of parameters from the forecast parameter covariance.
//!
//! From the 2 × 2 block of F⁻¹ for parameters (x, y), with variances σx², σy² and covariance σxy,
//! the 1σ ellipse has (Coe 2009, arXiv:0906.4123)
//!
//!   a², b² = (σx² + σy²)/2 ± √((σx² − σy²)²/4 + σxy²),
//!   tan 2θ = 2σxy / (σx² − σy²),
//!
//! with a the semi-major and b the semi-minor axis and θ the angle from the x axis to the major
//! axis (counter-clockwise; taken as θ = ½ atan2(2σxy, σx² − σy²), which picks the major axis).
//! a² and b² are the eigenvalues of the 2 × 2 block.
//!
//! For a Gaussian posterior the region holding probability P is the 1σ ellipse scaled by
//! k = √(Δχ²) with Δχ² the P-quantile of χ² with 2 degrees of freedom: k = √(−2 ln(1 − P)).
//! Coe 2009 tabulates k = 1.52, 2.48, 3.44 for P = 68.3%, 95.4%, 99.73%
//! (Δχ² ≈ 2.30, 6.17, 11.8); the exact values are 1.5158, 2.4816, 3.4393.

use super::fisher::FisherForecast;
use crate::error::{Error, Result};

/// The usual confidence levels of two-parameter contours.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub enum ConfidenceLevel {
    /// 68.3% (the probability within ±1σ in one dimension).
    OneSigma,
    /// 95.4% (±2σ).
    TwoSigma,
    /// 99.73% (±3σ).
    ThreeSigma,
}

impl ConfidenceLevel {
    /// Probability enclosed: 0.683, 0.954, 0.9973.
    pub fn probability(self) -> f64 {
        match self {
            ConfidenceLevel::OneSigma => 0.683,
            ConfidenceLevel::TwoSigma => 0.954,
            ConfidenceLevel::ThreeSigma => 0.9973,
        }
    }

    /// Axis scale factor as tabulated by Coe 2009 (arXiv:0906.4123): 1.52, 2.48, 3.44.
    pub fn tabulated_scale(self) -> f64 {
        match self {
            ConfidenceLevel::OneSigma => 1.52,
            ConfidenceLevel::TwoSigma => 2.48,
            ConfidenceLevel::ThreeSigma => 3.44,
        }
    }

    /// Exact axis scale factor √(−2 ln(1 − P)) for the level's probability P.
    pub fn exact_scale(self) -> f64 {
        (-2.0 * (1.0 - self.probability()).ln()).sqrt()
    }
}

/// Exact axis scale factor k = √(−2 ln(1 − P)) of the two-parameter Gaussian region enclosing
/// probability P (the square root of the χ²₂ quantile). Errors unless 0 < P < 1.
pub fn ellipse_scale(probability: f64) -> Result<f64> {
    if !(probability > 0.0 && probability < 1.0) {
        return Err(Error::Setting(format!(
            "confidence probability must lie strictly between 0 and 1, got {probability}"
        )));
    }
    Ok((-2.0 * (1.0 - probability).ln()).sqrt())
}

/// A 1σ confidence ellipse of two parameters (Coe 2009, arXiv:0906.4123).
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct ConfidenceEllipse {
    /// Name of the parameter on the x axis.
    pub x_parameter: String,
    /// Name of the parameter on the y axis.
    pub y_parameter: String,
    /// Centre (fiducial values) of the ellipse.
    pub centre: (f64, f64),
    /// Semi-major axis a of the 1σ ellipse.
    pub semi_major: f64,
    /// Semi-minor axis b of the 1σ ellipse.
    pub semi_minor: f64,
    /// Angle θ from the x axis to the major axis, counter-clockwise, radians, in (−π/2, π/2].
    pub angle: f64,
}

impl ConfidenceEllipse {
    /// The ellipse of the 2 × 2 parameter covariance [[σx², σxy], [σxy, σy²]] centred on `centre`.
    /// Errors unless the block is positive definite.
    pub fn from_covariance(
        x_parameter: &str,
        y_parameter: &str,
        centre: (f64, f64),
        var_x: f64,
        var_y: f64,
        cov_xy: f64,
    ) -> Result<Self> {
        let finite = [var_x, var_y, cov_xy, centre.0, centre.1]
            .iter()
            .all(|v| v.is_finite());
        if !(finite && var_x > 0.0 && var_y > 0.0 && var_x * var_y > cov_xy * cov_xy) {
            return Err(Error::Data(format!(
                "the covariance of '{x_parameter}' and '{y_parameter}' ([{var_x}, {cov_xy}; \
                 {cov_xy}, {var_y}]) is not positive definite: no ellipse"
            )));
        }
        let mean = 0.5 * (var_x + var_y);
        let root = (0.25 * (var_x - var_y).powi(2) + cov_xy * cov_xy).sqrt();
        let major_sq = mean + root;
        let minor_sq = (mean - root).max(0.0);
        Ok(ConfidenceEllipse {
            x_parameter: x_parameter.to_string(),
            y_parameter: y_parameter.to_string(),
            centre,
            semi_major: major_sq.sqrt(),
            semi_minor: minor_sq.sqrt(),
            angle: 0.5 * (2.0 * cov_xy).atan2(var_x - var_y),
        })
    }

    /// The ellipse of parameters `x` and `y` of a forecast, from the 2 × 2 block of F⁻¹.
    pub fn from_forecast(
        forecast: &FisherForecast,
        x: &str,
        y: &str,
        centre: (f64, f64),
    ) -> Result<Self> {
        let (i, j) = (forecast.parameter_index(x)?, forecast.parameter_index(y)?);
        if i == j {
            return Err(Error::Setting(format!(
                "an ellipse needs two different parameters, got '{x}' twice"
            )));
        }
        let c = &forecast.parameter_covariance;
        Self::from_covariance(x, y, centre, c[i][i], c[j][j], c[i][j])
    }

    /// Semi-axes (a k, b k) of the ellipse scaled by `scale` = k.
    pub fn scaled_axes(&self, scale: f64) -> (f64, f64) {
        (self.semi_major * scale, self.semi_minor * scale)
    }

    /// `n_points` points on the ellipse scaled by `scale` (e.g. [`ConfidenceLevel::exact_scale`]),
    /// at parametric angles t_i = 2π i / n: centre + R(θ) (k a cos t_i, k b sin t_i). The first
    /// point is not repeated at the end. Errors for fewer than 3 points or a non-positive scale.
    pub fn polyline(&self, scale: f64, n_points: usize) -> Result<Vec<(f64, f64)>> {
        if n_points < 3 {
            return Err(Error::Setting(format!(
                "an ellipse polyline needs at least 3 points, got {n_points}"
            )));
        }
        if !(scale.is_finite() && scale > 0.0) {
            return Err(Error::Setting(format!(
                "ellipse scale must be a positive number, got {scale}"
            )));
        }
        let (a, b) = self.scaled_axes(scale);
        let (s, c) = self.angle.sin_cos();
        Ok((0..n_points)
            .map(|i| {
                let t = std::f64::consts::TAU * i as f64 / n_points as f64;
                let (u, v) = (a * t.cos(), b * t.sin());
                (self.centre.0 + c * u - s * v, self.centre.1 + s * u + c * v)
            })
            .collect())
    }
}
