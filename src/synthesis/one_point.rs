//! Weighted one-point shape of a field read on tiles: skewness and kurtosis, with their
//! gradient, for the sphere synthesis ([`super::sphere`]).
//!
//! With weights w_x ≥ 0 (the pooling weights taper × solid angle × core of every tile), W = Σ w,
//! μ = Σ w f / W and the central moments m_k = Σ w (f − μ)^k / W, the shape is
//!
//! γ₁ = m₃ / m₂^{3/2} (skewness), β₂ = m₄ / m₂² (kurtosis; excess kurtosis β₂ − 3),
//!
//! the population moments of the weighted one-point distribution (with w ≡ 1 those of
//! `scipy.stats.skew` and `scipy.stats.kurtosis(fisher=False)`). Per-tile central sums are
//! merged in plan order by the pairwise update of Chan, Golub & LeVeque (1979, *Updating formulae
//! and a pairwise algorithm for computing sample variances*) extended to the third and fourth
//! moments (Pébay 2008, SAND2008-6212, eqs. 2.1–2.4; weights in place of counts), so no
//! raw power sums lose digits to a large mean.
//!
//! Gradient (∂μ/∂f_x = w_x / W, ∂m_k/∂μ = −k m_{k−1}, m₁ = 0):
//! ∂m_k/∂f_x = (w_x / W) k ((f_x − μ)^{k−1} − m_{k−1}), so for adjoints g₁ = ∂L/∂γ₁ and
//! g₂ = ∂L/∂β₂, with A₂ = −(3/2) g₁ m₃ m₂^{−5/2} − 2 g₂ m₄ m₂^{−3}, A₃ = g₁ m₂^{−3/2},
//! A₄ = g₂ m₂^{−2}:
//!
//! ∂L/∂f_x = (w_x / W) (2 A₂ d + 3 A₃ (d² − m₂) + 4 A₄ (d³ − m₃)), d = f_x − μ.

/// Weighted central sums of a set of values: W = Σ w, μ, and S_k = Σ w (f − μ)^k, k = 2, 3, 4.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct CentralSums {
    /// Σ w.
    pub weight: f64,
    /// Weighted mean μ.
    pub mean: f64,
    /// Σ w (f − μ)².
    pub s2: f64,
    /// Σ w (f − μ)³.
    pub s3: f64,
    /// Σ w (f − μ)⁴.
    pub s4: f64,
}

impl CentralSums {
    /// The sums of `values` with `weights` (two passes: the mean, then the central sums).
    ///
    /// # Examples
    ///
    /// Values 0, 0, 3 with unit weights: μ = 1, m₂ = 2, m₃ = 2, m₄ = 18/3 = 6, so γ₁ = 2/2^{3/2}
    /// = 0.7071 and β₂ = 6/4 = 1.5 (worked by hand from the definitions).
    ///
    /// ```
    /// use planisphere::synthesis::one_point::CentralSums;
    /// let s = CentralSums::of(&[0.0, 0.0, 3.0], &[1.0, 1.0, 1.0]);
    /// let [g1, b2] = s.shape();
    /// assert!((g1 - 0.5f64.sqrt()).abs() < 1e-12 && (b2 - 1.5).abs() < 1e-12);
    /// ```
    pub fn of(values: &[f64], weights: &[f64]) -> Self {
        let weight: f64 = weights.iter().sum();
        if weight <= 0.0 {
            return Self::default();
        }
        let mean = values.iter().zip(weights).map(|(f, w)| w * f).sum::<f64>() / weight;
        let (mut s2, mut s3, mut s4) = (0.0, 0.0, 0.0);
        for (f, w) in values.iter().zip(weights) {
            let d = f - mean;
            let d2 = d * d;
            s2 += w * d2;
            s3 += w * d2 * d;
            s4 += w * d2 * d2;
        }
        Self {
            weight,
            mean,
            s2,
            s3,
            s4,
        }
    }

    /// The sums of the union of two sets (Pébay 2008, eqs. 2.1–2.4, with weights as counts).
    pub fn merge(self, b: Self) -> Self {
        let a = self;
        if a.weight <= 0.0 {
            return b;
        }
        if b.weight <= 0.0 {
            return a;
        }
        let (na, nb) = (a.weight, b.weight);
        let n = na + nb;
        let delta = b.mean - a.mean;
        let d2 = delta * delta;
        let s2 = a.s2 + b.s2 + d2 * na * nb / n;
        let s3 = a.s3
            + b.s3
            + d2 * delta * na * nb * (na - nb) / (n * n)
            + 3.0 * delta * (na * b.s2 - nb * a.s2) / n;
        let s4 = a.s4
            + b.s4
            + d2 * d2 * na * nb * (na * na - na * nb + nb * nb) / (n * n * n)
            + 6.0 * d2 * (na * na * b.s2 + nb * nb * a.s2) / (n * n)
            + 4.0 * delta * (na * b.s3 - nb * a.s3) / n;
        Self {
            weight: n,
            mean: a.mean + delta * nb / n,
            s2,
            s3,
            s4,
        }
    }

    /// Central moments (m₂, m₃, m₄).
    fn moments(&self) -> (f64, f64, f64) {
        (
            self.s2 / self.weight,
            self.s3 / self.weight,
            self.s4 / self.weight,
        )
    }

    /// [γ₁, β₂]: skewness and kurtosis (module documentation).
    pub fn shape(&self) -> [f64; 2] {
        let (m2, m3, m4) = self.moments();
        [m3 / (m2 * m2.sqrt()), m4 / (m2 * m2)]
    }

    /// The per-pixel adjoint of the shape for adjoints `d_shape` = [∂L/∂γ₁, ∂L/∂β₂] of these
    /// (merged) sums: ∂L/∂f_x = w_x · p(f_x) (module documentation).
    pub fn adjoint(&self, d_shape: [f64; 2]) -> ShapeAdjoint {
        let (m2, m3, m4) = self.moments();
        let [g1, g2] = d_shape;
        let a2 = -1.5 * g1 * m3 / (m2 * m2 * m2.sqrt()) - 2.0 * g2 * m4 / (m2 * m2 * m2);
        let a3 = g1 / (m2 * m2.sqrt());
        let a4 = g2 / (m2 * m2);
        ShapeAdjoint {
            mean: self.mean,
            m2,
            m3,
            coefficients: [2.0 * a2, 3.0 * a3, 4.0 * a4],
            inverse_weight: 1.0 / self.weight,
        }
    }
}

/// ∂L/∂f_x = (w_x / W) (c₁ d + c₂ (d² − m₂) + c₃ (d³ − m₃)), d = f_x − μ (module documentation).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ShapeAdjoint {
    mean: f64,
    m2: f64,
    m3: f64,
    coefficients: [f64; 3],
    inverse_weight: f64,
}

impl ShapeAdjoint {
    /// Adds ∂L/∂f_x to `gradient` for values `values` of weights `weights`.
    pub fn add_to(&self, values: &[f64], weights: &[f64], gradient: &mut [f64]) {
        let [c1, c2, c3] = self.coefficients;
        for ((g, f), w) in gradient.iter_mut().zip(values).zip(weights) {
            if *w > 0.0 {
                let d = f - self.mean;
                let d2 = d * d;
                *g += w
                    * self.inverse_weight
                    * (c1 * d + c2 * (d2 - self.m2) + c3 * (d2 * d - self.m3));
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn merged_sums_equal_the_sums_of_the_union() {
        let a: Vec<f64> = (0..17).map(|i| ((i * 7) % 5) as f64 + 100.0).collect();
        let b: Vec<f64> = (0..11).map(|i| ((i * 3) % 7) as f64 * 1.5 + 98.0).collect();
        let wa: Vec<f64> = (0..17).map(|i| 0.2 + (i % 3) as f64).collect();
        let wb: Vec<f64> = (0..11).map(|i| 0.5 + (i % 4) as f64).collect();
        let merged = CentralSums::of(&a, &wa).merge(CentralSums::of(&b, &wb));
        let all = CentralSums::of(&[a, b].concat(), &[wa, wb].concat());
        for (x, y) in [
            (merged.weight, all.weight),
            (merged.mean, all.mean),
            (merged.s2, all.s2),
            (merged.s3, all.s3),
            (merged.s4, all.s4),
        ] {
            assert!((x - y).abs() <= 1e-10 * y.abs().max(1.0), "{x} against {y}");
        }
    }

    #[test]
    fn shape_adjoint_equals_finite_differences() {
        let f: Vec<f64> = (0..23).map(|i| ((i * i) % 11) as f64 * 0.3 - 1.0).collect();
        let w: Vec<f64> = (0..23).map(|i| 0.1 + (i % 5) as f64 * 0.4).collect();
        let d_shape = [0.7, -0.3];
        let loss = |f: &[f64]| {
            let [g1, b2] = CentralSums::of(f, &w).shape();
            d_shape[0] * g1 + d_shape[1] * b2
        };
        let mut grad = vec![0.0; f.len()];
        CentralSums::of(&f, &w)
            .adjoint(d_shape)
            .add_to(&f, &w, &mut grad);
        let h = 1e-6;
        for x in 0..f.len() {
            let (mut up, mut down) = (f.clone(), f.clone());
            up[x] += h;
            down[x] -= h;
            let fd = (loss(&up) - loss(&down)) / (2.0 * h);
            assert!(
                (fd - grad[x]).abs() < 1e-7,
                "pixel {x}: {fd} against {}",
                grad[x]
            );
        }
    }
}
