//! Shared helpers of the forecast tests: a seeded Gaussian sampler with a given covariance, and a
//! linear-Gaussian model d = M θ + n whose Fisher matrix Mᵀ C⁻¹ M is known exactly.
#![allow(dead_code)]

use nalgebra::{DMatrix, DVector};
use planisphere::forecast::{ColumnLabel, Ensemble};
use rand::SeedableRng;
use rand_chacha::ChaCha20Rng;
use rand_distr::{Distribution, StandardNormal};

/// Labels "d0", "d1", ... with scale = index.
pub fn labels(p: usize) -> Vec<ColumnLabel> {
    (0..p)
        .map(|j| ColumnLabel::with_scale(format!("d{j}"), j as f64))
        .collect()
}

/// Draws Gaussian vectors with mean `mean` and covariance L Lᵀ (L lower triangular).
pub struct GaussianSampler {
    rng: ChaCha20Rng,
    chol: DMatrix<f64>,
}

impl GaussianSampler {
    pub fn new(seed: u64, covariance: &DMatrix<f64>) -> Self {
        let chol = nalgebra::Cholesky::new(covariance.clone())
            .expect("test covariance is positive definite")
            .l();
        GaussianSampler {
            rng: ChaCha20Rng::seed_from_u64(seed),
            chol,
        }
    }

    /// `n` draws as an ensemble.
    pub fn ensemble(&mut self, mean: &DVector<f64>, n: usize) -> Ensemble {
        let p = mean.len();
        let mut values = Vec::with_capacity(n * p);
        for _ in 0..n {
            let z = DVector::from_iterator(p, (0..p).map(|_| StandardNormal.sample(&mut self.rng)));
            let x = mean + &self.chol * z;
            values.extend(x.iter().copied());
        }
        Ensemble::from_row_major(labels(p), n, values).expect("finite test data")
    }
}

/// The linear-Gaussian test model: p = 10 data points, 2 parameters, d = M θ + n with
/// n ~ N(0, C), C_jk = σ_j σ_k ρ^|j−k| (ρ = 0.6, σ_j = 0.2 (1 + 0.1 j)).
pub struct LinearModel {
    pub m: DMatrix<f64>,
    pub c: DMatrix<f64>,
    pub theta: DVector<f64>,
}

impl LinearModel {
    pub fn new() -> Self {
        let p = 10;
        let m = DMatrix::from_fn(p, 2, |j, a| {
            if a == 0 {
                (0.3 * j as f64).cos()
            } else {
                0.5 + 0.05 * j as f64
            }
        });
        let sigma = |j: usize| 0.2 * (1.0 + 0.1 * j as f64);
        let c = DMatrix::from_fn(p, p, |j, k| {
            sigma(j) * sigma(k) * 0.6f64.powi((j as i32 - k as i32).abs())
        });
        LinearModel {
            m,
            c,
            theta: DVector::from_vec(vec![1.0, 2.0]),
        }
    }

    pub fn p(&self) -> usize {
        self.m.nrows()
    }

    /// Mean data vector M θ.
    pub fn mean(&self, theta: &DVector<f64>) -> DVector<f64> {
        &self.m * theta
    }

    /// The exact Fisher matrix Mᵀ C⁻¹ M.
    pub fn fisher(&self) -> DMatrix<f64> {
        let ci = self.c.clone().try_inverse().expect("invertible");
        self.m.transpose() * ci * &self.m
    }

    /// Mean at θ with parameter `a` shifted by `shift`.
    pub fn shifted_mean(&self, a: usize, shift: f64) -> DVector<f64> {
        let mut t = self.theta.clone();
        t[a] += shift;
        self.mean(&t)
    }
}
