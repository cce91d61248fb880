//! Angular power spectra and correlation functions of isotropic fields on the sphere, and the
//! Gaussian spectrum behind a shifted lognormal field.
//!
//! ξ(θ) = Σ_ℓ (2ℓ + 1)/(4π) · C_ℓ · P_ℓ(cos θ) and C_ℓ = 2π ∫_{−1}^{1} ξ(μ) P_ℓ(μ) dμ
//! (common practice; e.g. Peebles 1980 §46), the integral evaluated by Gauss–Legendre quadrature
//! (exact for polynomial ξ of degree < 2n − ℓ with n nodes), Legendre polynomials by Bonnet's
//! recurrence (ℓ+1) P_{ℓ+1} = (2ℓ+1) μ P_ℓ − ℓ P_{ℓ−1}.
//!
//! A shifted lognormal field κ = e^y − κ0 with Gaussian y has
//! ξ_y = ln(1 + ξ_κ/κ0²) (Hilbert, Hartlap & Schneider 2011, A&A 536, A85, eq. 9; Xavier et al.
//! 2016, MNRAS 459, 3693).

use crate::error::{Error, Result};
use std::f64::consts::PI;

/// Gauss–Legendre nodes μ_i and weights w_i on [−1, 1] for `n` points: the roots of P_n found by
/// Newton's method from the Tricomi initial guess cos(π(i − 1/4)/(n + 1/2)), weights
/// w_i = 2 / ((1 − μ_i²) P_n′(μ_i)²) (Abramowitz & Stegun 1964, eq. 25.4.29).
pub fn gauss_legendre(n: usize) -> (Vec<f64>, Vec<f64>) {
    let mut nodes = vec![0.0; n];
    let mut weights = vec![0.0; n];
    let m = n.div_ceil(2);
    for i in 0..m {
        let mut z = (PI * (i as f64 + 0.75) / (n as f64 + 0.5)).cos();
        let mut dp = 1.0;
        for _ in 0..100 {
            let (p, d) = legendre_and_derivative(n, z);
            dp = d;
            let dz = p / d;
            z -= dz;
            if dz.abs() < 1e-16 {
                break;
            }
        }
        let (_, d) = legendre_and_derivative(n, z);
        if d.is_finite() {
            dp = d;
        }
        let w = 2.0 / ((1.0 - z * z) * dp * dp);
        nodes[i] = z;
        nodes[n - 1 - i] = -z;
        weights[i] = w;
        weights[n - 1 - i] = w;
    }
    // nodes ascending
    nodes.reverse();
    weights.reverse();
    (nodes, weights)
}

/// P_n(μ) and P_n′(μ) by Bonnet's recurrence; P_n′ = n (μ P_n − P_{n−1})/(μ² − 1).
fn legendre_and_derivative(n: usize, mu: f64) -> (f64, f64) {
    let (mut p0, mut p1) = (1.0, mu);
    if n == 0 {
        return (1.0, 0.0);
    }
    for l in 1..n {
        let p2 = ((2 * l + 1) as f64 * mu * p1 - l as f64 * p0) / (l + 1) as f64;
        p0 = p1;
        p1 = p2;
    }
    (p1, n as f64 * (mu * p1 - p0) / (mu * mu - 1.0))
}

/// P_0(x), P_1(x), P_2(x), … without end, by Bonnet's recurrence
/// ℓ P_ℓ = (2ℓ − 1) x P_{ℓ−1} − (ℓ − 1) P_{ℓ−2} (Abramowitz & Stegun 1964, 8.5.3).
fn legendre_series(x: f64) -> impl Iterator<Item = f64> {
    let (mut p0, mut p1) = (1.0, x);
    (0usize..).map(move |l| match l {
        0 => 1.0,
        1 => x,
        _ => {
            let p2 = ((2 * l - 1) as f64 * x * p1 - (l - 1) as f64 * p0) / l as f64;
            p0 = p1;
            p1 = p2;
            p2
        }
    })
}

/// ξ(μ_i) = Σ_ℓ (2ℓ+1)/(4π) C_ℓ P_ℓ(μ_i) at each μ_i.
pub fn correlation_from_spectrum(cl: &[f64], mu: &[f64]) -> Vec<f64> {
    mu.iter()
        .map(|&x| {
            let mut sum = 0.0;
            for ((l, &c), p) in cl.iter().enumerate().zip(legendre_series(x)) {
                sum += (2 * l + 1) as f64 / (4.0 * PI) * c * p;
            }
            sum
        })
        .collect()
}

/// C_ℓ = 2π Σ_i w_i ξ(μ_i) P_ℓ(μ_i) for ℓ = 0..=lmax.
pub fn spectrum_from_correlation(xi: &[f64], mu: &[f64], w: &[f64], lmax: usize) -> Vec<f64> {
    let mut cl = vec![0.0; lmax + 1];
    for ((&x, &wi), &f) in mu.iter().zip(w).zip(xi) {
        for (c, p) in cl.iter_mut().zip(legendre_series(x)) {
            *c += 2.0 * PI * wi * f * p;
        }
    }
    cl
}

/// The Gaussian field y behind a shifted lognormal κ = e^y − κ0 with spectrum `cl_kappa`.
#[derive(Debug, Clone)]
pub struct LognormalSpectrum {
    /// C_ℓ of the Gaussian field y (negative values, which no Gaussian field can have, set to 0).
    pub gaussian_cl: Vec<f64>,
    /// Variance σ_y² = ξ_y(0) = ln(1 + σ_κ²/κ0²).
    pub gaussian_variance: f64,
    /// How many C_ℓ of y came out negative and were set to 0.
    pub clipped: usize,
}

/// C_ℓ of y for κ = e^y − κ0 whose spectrum is `cl_kappa`: ξ_y = ln(1 + ξ_κ/κ0²)
/// (Hilbert, Hartlap & Schneider 2011, eq. 9), transformed on 2(ℓmax + 1) Gauss–Legendre nodes.
pub fn lognormal_gaussian_spectrum(cl_kappa: &[f64], shift: f64) -> Result<LognormalSpectrum> {
    if !(shift.is_finite() && shift > 0.0) {
        return Err(Error::Setting(format!(
            "the lognormal shift must be positive, got {}",
            crate::error::compact(shift)
        )));
    }
    if cl_kappa.is_empty() {
        return Err(Error::Data("the spectrum is empty".into()));
    }
    let lmax = cl_kappa.len() - 1;
    let (mu, w) = gauss_legendre(2 * (lmax + 1));
    let xi = correlation_from_spectrum(cl_kappa, &mu);
    let s2 = shift * shift;
    let mut xi_g = Vec::with_capacity(xi.len());
    for &x in &xi {
        let a = 1.0 + x / s2;
        if a <= 0.0 {
            return Err(Error::Setting(format!(
                "lognormal shift {} is too small for this spectrum (1 + ξ/κ0² ≤ 0)",
                crate::error::compact(shift)
            )));
        }
        xi_g.push(a.ln());
    }
    let mut gaussian_cl = spectrum_from_correlation(&xi_g, &mu, &w, lmax);
    let mut clipped = 0;
    for c in gaussian_cl.iter_mut() {
        if *c < 0.0 {
            *c = 0.0;
            clipped += 1;
        }
    }
    let variance: f64 = cl_kappa
        .iter()
        .enumerate()
        .map(|(l, c)| (2 * l + 1) as f64 / (4.0 * PI) * c)
        .sum();
    Ok(LognormalSpectrum {
        gaussian_cl,
        gaussian_variance: (1.0 + variance / s2).ln(),
        clipped,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn quadrature_integrates_polynomials_exactly() {
        // n-point Gauss–Legendre is exact for degree ≤ 2n − 1 (Abramowitz & Stegun 25.4.29).
        let (mu, w) = gauss_legendre(6);
        for k in 0..=11u32 {
            let got: f64 = mu.iter().zip(&w).map(|(x, wi)| wi * x.powi(k as i32)).sum();
            let exact = if k % 2 == 0 {
                2.0 / (k as f64 + 1.0)
            } else {
                0.0
            };
            assert!((got - exact).abs() < 1e-14, "x^{k}: {got} vs {exact}");
        }
    }
}
