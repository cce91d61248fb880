//! Angular power spectra C_ℓ as inputs: read from a plain text table (ℓ, C_ℓ) or taken from a
//! built-in smooth model for demos, and the shape-noise level of a galaxy survey.

use crate::error::{Error, Result};
use std::path::Path;

/// An angular power spectrum C_ℓ for ℓ = 0..=ℓmax.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct AngularSpectrum {
    /// C_ℓ, indexed by ℓ.
    pub cl: Vec<f64>,
}

impl AngularSpectrum {
    /// ℓmax.
    pub fn lmax(&self) -> usize {
        self.cl.len().saturating_sub(1)
    }

    /// Reads a text table whose rows are `ℓ C_ℓ` (whitespace or comma separated; `#` starts a
    /// comment; further columns are ignored). ℓ must be whole, non-negative and strictly
    /// increasing; missing ℓ are filled by linear interpolation in ℓ and ℓ below the first row
    /// get C_ℓ = 0. Negative or non-finite C_ℓ are errors.
    pub fn read_text(path: &Path) -> Result<Self> {
        let text = crate::files::read_text(path)?;
        Self::parse_text(&text).map_err(|e| Error::io(path, e))
    }

    /// Parses the text of a table (see [`AngularSpectrum::read_text`]); errors name the line.
    pub fn parse_text(text: &str) -> std::result::Result<Self, String> {
        let mut rows: Vec<(usize, f64)> = Vec::new();
        for (i, line) in text.lines().enumerate() {
            let line = line.split('#').next().unwrap_or("").trim();
            if line.is_empty() {
                continue;
            }
            let mut fields = line
                .split(|c: char| c == ',' || c.is_whitespace())
                .filter(|f| !f.is_empty());
            let (Some(a), Some(b)) = (fields.next(), fields.next()) else {
                return Err(format!("line {}: expected two columns `ell C_ell`", i + 1));
            };
            let ell: f64 = a
                .parse()
                .map_err(|_| format!("line {}: `{a}` is not a number", i + 1))?;
            let c: f64 = b
                .parse()
                .map_err(|_| format!("line {}: `{b}` is not a number", i + 1))?;
            if !(ell >= 0.0 && ell.fract() == 0.0 && ell <= 1e6) {
                return Err(format!(
                    "line {}: ell = {a} is not a whole number in 0..=1000000",
                    i + 1
                ));
            }
            if !(c.is_finite() && c >= 0.0) {
                return Err(format!(
                    "line {}: C_ell = {b} is negative or not finite",
                    i + 1
                ));
            }
            let ell = ell as usize;
            if let Some(&(last, _)) = rows.last() {
                if ell <= last {
                    return Err(format!("line {}: ell = {ell} does not increase", i + 1));
                }
            }
            rows.push((ell, c));
        }
        if rows.is_empty() {
            return Err("no (ell, C_ell) rows".to_string());
        }
        let lmax = rows[rows.len() - 1].0;
        let mut cl = vec![0.0; lmax + 1];
        for w in rows.windows(2) {
            let ((l0, c0), (l1, c1)) = (w[0], w[1]);
            for (l, slot) in cl.iter_mut().enumerate().take(l1 + 1).skip(l0) {
                let t = (l - l0) as f64 / (l1 - l0) as f64;
                *slot = c0 + t * (c1 - c0);
            }
        }
        let (l, c) = rows[0];
        cl[l] = c;
        Ok(AngularSpectrum { cl })
    }

    /// The built-in smooth model used by the demo, of our own choosing: a convergence-like
    /// spectrum C_ℓ = A · (ℓ/ℓ₀)² / (1 + (ℓ/ℓ₀)²)^{2.2}, ℓ ≥ 1 (C_0 = 0), with ℓ₀ = 60 and A set
    /// so that the field's variance Σ (2ℓ+1)/(4π) C_ℓ equals `variance`. Not fitted to any data.
    pub fn demo_model(lmax: usize, variance: f64) -> Self {
        let l0 = 60.0;
        let mut cl: Vec<f64> = (0..=lmax)
            .map(|l| {
                if l == 0 {
                    0.0
                } else {
                    let x = l as f64 / l0;
                    x * x / (1.0 + x * x).powf(2.2)
                }
            })
            .collect();
        let v: f64 = cl
            .iter()
            .enumerate()
            .map(|(l, c)| (2 * l + 1) as f64 * c / (4.0 * std::f64::consts::PI))
            .sum();
        if v > 0.0 {
            for c in cl.iter_mut() {
                *c *= variance / v;
            }
        }
        AngularSpectrum { cl }
    }

    /// Variance of a field with this spectrum, Σ (2ℓ+1)/(4π) C_ℓ.
    pub fn variance(&self) -> f64 {
        self.cl
            .iter()
            .enumerate()
            .map(|(l, c)| (2 * l + 1) as f64 * c / (4.0 * std::f64::consts::PI))
            .sum()
    }
}

/// Per-pixel shape noise σ_pix = σ_e / √(n_gal · A_pix) (common practice), with σ_e the
/// per-component ellipticity dispersion, `galaxies_per_arcmin2` the source density and
/// `pixel_area_sr` the pixel solid angle.
pub fn shape_noise_per_pixel(
    sigma_e: f64,
    galaxies_per_arcmin2: f64,
    pixel_area_sr: f64,
) -> Result<f64> {
    if !(sigma_e.is_finite() && sigma_e >= 0.0) {
        return Err(Error::Setting(format!(
            "ellipticity dispersion must be non-negative, got {sigma_e}"
        )));
    }
    if !(galaxies_per_arcmin2.is_finite() && galaxies_per_arcmin2 > 0.0) {
        return Err(Error::Setting(format!(
            "galaxy density must be positive, got {galaxies_per_arcmin2} per arcmin²"
        )));
    }
    let arcmin2 = pixel_area_sr * (180.0 * 60.0 / std::f64::consts::PI).powi(2);
    Ok(sigma_e / (galaxies_per_arcmin2 * arcmin2).sqrt())
}

/// White-noise spectrum N_ℓ = σ_e² / n̄ with n̄ in sr⁻¹ (common practice).
pub fn shape_noise_spectrum(sigma_e: f64, galaxies_per_arcmin2: f64) -> f64 {
    let per_sr = galaxies_per_arcmin2 * (180.0 * 60.0 / std::f64::consts::PI).powi(2);
    sigma_e * sigma_e / per_sr
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn shape_noise_at_nside_1024_matches_the_reference_value() {
        // σ_e = 0.26, n_gal = 30 arcmin⁻², A_pix(NSIDE 1024) = 11.8026 arcmin² → σ = 0.013817
        // (shared reference facts, common practice).
        let area = 4.0 * std::f64::consts::PI / (12.0 * 1024.0 * 1024.0);
        let s = shape_noise_per_pixel(0.26, 30.0, area).unwrap();
        assert!((s - 0.013817).abs() < 5e-7, "{s}");
    }

    #[test]
    fn text_table_gaps_are_interpolated_and_errors_name_the_line() {
        let s = AngularSpectrum::parse_text("# ell cl\n2 4.0\n4, 2.0\n").unwrap();
        assert_eq!(s.cl, vec![0.0, 0.0, 4.0, 3.0, 2.0]);
        let e = AngularSpectrum::parse_text("2 1\n2 3\n").unwrap_err();
        assert_eq!(e, "line 2: ell = 2 does not increase");
        let e = AngularSpectrum::parse_text("2 -1\n").unwrap_err();
        assert_eq!(e, "line 1: C_ell = -1 is negative or not finite");
        let e = AngularSpectrum::parse_text("2.5 1\n").unwrap_err();
        assert!(
            e.starts_with("line 1: ell = 2.5 is not a whole number"),
            "{e}"
        );
        assert_eq!(
            AngularSpectrum::parse_text("# nothing\n").unwrap_err(),
            "no (ell, C_ell) rows"
        );
    }

    #[test]
    fn demo_model_has_the_requested_variance() {
        let s = AngularSpectrum::demo_model(383, 1e-4);
        assert!((s.variance() - 1e-4).abs() < 1e-16);
        assert_eq!(s.cl[0], 0.0);
    }
}
