//! A differentiable periodic scattering transform: the coefficients of a flat periodic field and
//! the gradient of any scalar function of them with respect to the pixels (reverse mode, by
//! hand).
//!
//! # Forward pass
//!
//! On an n × n periodic field f (taper ≡ 1, weight ≡ 1, N = n² pixels) this is the estimator of
//! [`crate::scattering::transform`] without Fourier cropping, with the same Morlet bank
//! ([`crate::scattering::filters::MorletBank`]) and the same coefficient layout:
//!
//! * mean μ = Σf/N, variance Σf²/N − μ²;
//! * I = f − μ, g₁ = IDFT(ψ̂_{j1,l1} · DFT(I)) (unnormalised DFT, 1/N-normalised IDFT),
//!   u = |g₁|, S1(j1,l1) = ⟨u⟩, P(j1,l1) = ⟨u²⟩;
//! * v = u − ⟨u⟩, g₂ = IDFT(ψ̂_{j2,l2} · DFT(v)), S2(j1,l1,j2,l2) = ⟨|g₂|⟩ for j2 > j1;
//!
//! ⟨·⟩ is the plain mean over the N pixels. Besides the coefficients, the pass returns the
//! field–envelope correlations C(j,l) = ⟨(f − μ) u_{j,l}⟩, which change sign with f → −f
//! while every coefficient above is blind to it (|−z| = |z|).
//!
//! # Backward pass (adjoints)
//!
//! Given the weights a_i = ∂L/∂c_i of a loss L on the coefficients c, the gradient ∂L/∂f is the
//! chain of the adjoints of each step (for a complex intermediate z the adjoint is
//! Z = ∂L/∂Re z + i ∂L/∂Im z):
//!
//! * mean pooling c = ⟨h⟩: ∂L/∂h = a/N at every pixel;
//! * modulus h = |z|: Z = (∂L/∂h) · z/|z|, since d|z| = Re(z̄ dz)/|z|; at z = 0 the gradient is
//!   taken as 0 (a subgradient);
//! * filtering z = C h, C = IDFT · diag(ψ̂) · DFT acting on a real h: with the real inner
//!   product Re⟨Z, C h⟩ = ⟨Re(C^H Z), h⟩ and C^H = IDFT · diag(conj ψ̂) · DFT (because
//!   DFT^H = N · IDFT), ∂L/∂h = Re IDFT(conj(ψ̂) · DFT(Z)); the Morlet ψ̂ here is real, so
//!   conj(ψ̂) = ψ̂ (convolution with the conjugate, reversed filter);
//! * mean removal h − ⟨h⟩ is an orthogonal projection, its own adjoint;
//! * variance: ∂/∂f (Σf²/N − μ²) = 2(f − μ)/N; mean: 1/N;
//! * correlation C = ⟨(f − μ) u⟩: ∂C/∂u = (f − μ)/N and, explicitly, ∂C/∂f = (u − ⟨u⟩)/N.
//!
//! The contributions of every (j1, l1) are gathered in Fourier space and sent back to pixels by
//! one inverse DFT. The g₂ are recomputed in the backward pass rather than stored (memory
//! stays a few arrays per (j1, l1)), so one gradient costs about three forward transforms.
//! Reference for reverse-mode differentiation: Griewank & Walther 2008, *Evaluating
//! Derivatives*, SIAM, ch. 3. The masked, Fourier-cropped tile estimator and its adjoint are in
//! [`super::tile_gradient`].

use crate::scattering::fft::{SquareFft, SquareFftPlanner};
use crate::scattering::filters::MorletBank;
use crate::scattering::statistics::CoefficientLabel;
use crate::scattering::transform::crop_box;
use crate::{Error, Result};
use num_complex::Complex64;
use rayon::prelude::*;

/// FFT plans of every coarse grid and the wavelets cropped to them (built once per transform).
pub(crate) struct CoarseGrids {
    /// Plans of the grids n / 2^d, d = 0 ..= log2(n) − 3.
    pub(crate) ffts: Vec<SquareFft>,
    /// `wavelets[d][j·L + l]`: ψ̂_{j,l} cropped to the (n/2^d)² box; empty for d = 0 or d > j.
    pub(crate) wavelets: Vec<Vec<Vec<f64>>>,
}

impl CoarseGrids {
    /// Plans from `planner` (shared with the caller's full-size plans) and crops of the bank.
    pub(crate) fn new(bank: &MorletBank, planner: &mut SquareFftPlanner) -> Self {
        let n = bank.size();
        let (jn, ln) = (bank.scale_count(), bank.orientation_count());
        let max_level = crate::scattering::filters::coarsest_level(n, 8);
        let ffts = (0..=max_level).map(|d| planner.plan(n >> d)).collect();
        let wavelets = (0..=max_level)
            .map(|d| {
                (0..jn * ln)
                    .map(|i| {
                        let j = i / ln;
                        if d == 0 || d > j {
                            Vec::new()
                        } else {
                            crop_box(bank.wavelet(j, i % ln), n, n >> d)
                        }
                    })
                    .collect()
            })
            .collect();
        Self { ffts, wavelets }
    }
}

/// Intermediate values kept from a forward pass for the backward pass.
pub struct ForwardPass {
    /// Coefficients in the layout of [`DifferentiableScattering::labels`].
    pub coefficients: Vec<f64>,
    /// Field–envelope correlations C(j,l) = ⟨(f − μ) u_{j,l}⟩, index j·L + l.
    pub field_envelope: Vec<f64>,
    centred: Vec<f64>,
    spectrum: Vec<Complex64>,
    /// Per (j1, l1): g₁ and DFT(u − ⟨u⟩).
    first: Vec<(Vec<Complex64>, Vec<Complex64>)>,
}

/// The periodic scattering transform with its reverse-mode gradient (module documentation).
/// Owns the filter bank and FFT plans; `Send + Sync`, shared by reference.
pub struct DifferentiableScattering {
    bank: MorletBank,
    fft: SquareFft,
    labels: Vec<CoefficientLabel>,
    /// FFT plans of the coarse grids and cropped wavelets, for the tile path.
    pub(crate) grids: CoarseGrids,
}

impl std::fmt::Debug for DifferentiableScattering {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        let mut d = f.debug_struct("DifferentiableScattering");
        self.bank.debug_shape(&mut d);
        d.finish()
    }
}

/// Index of S2(j1,l1,j2,l2) in the engine's layout (for j1 { l1 { j2 > j1 { l2 } } }).
pub(crate) fn second_order_index(
    jn: usize,
    ln: usize,
    j1: usize,
    l1: usize,
    j2: usize,
    l2: usize,
) -> usize {
    crate::scattering::layout::CoefficientLayout::new(jn, ln).second_order(j1, l1, j2, l2)
}

impl DifferentiableScattering {
    /// Build for n × n fields, J scales, L orientations (same limits as [`MorletBank::new`]).
    pub fn new(size: usize, scale_count: usize, orientation_count: usize) -> Result<Self> {
        let bank = MorletBank::new(size, scale_count, orientation_count)?;
        Ok(Self::from_bank(bank))
    }

    /// Build around an existing bank (e.g. a clone of a [`crate::scattering::transform::ScatteringEngine`]'s).
    pub fn from_bank(bank: MorletBank) -> Self {
        let (jn, ln) = (bank.scale_count(), bank.orientation_count());
        let labels = crate::scattering::layout::CoefficientLayout::new(jn, ln).labels();
        let mut planner = SquareFftPlanner::new();
        let fft = planner.plan(bank.size());
        let grids = CoarseGrids::new(&bank, &mut planner);
        Self {
            bank,
            fft,
            labels,
            grids,
        }
    }

    /// The filter bank.
    pub fn bank(&self) -> &MorletBank {
        &self.bank
    }

    /// Field side n.
    pub fn size(&self) -> usize {
        self.bank.size()
    }

    /// Coefficient labels, same order as [`crate::scattering::transform::ScatteringEngine::labels`].
    pub fn labels(&self) -> &[CoefficientLabel] {
        &self.labels
    }

    pub(crate) fn square_fft(&self) -> &SquareFft {
        &self.fft
    }

    fn check(&self, field: &[f64]) -> Result<()> {
        let n = self.size();
        if field.len() != n * n {
            return Err(Error::Mismatch(format!(
                "field has {} values, expected {} for a {n} x {n} grid",
                field.len(),
                n * n
            )));
        }
        crate::error::check_finite(field, |i| {
            format!("field holds a non-finite value ({}) at pixel {i}", field[i])
        })?;
        Ok(())
    }

    /// The coefficients of a periodic field (row-major n × n).
    pub fn coefficients(&self, field: &[f64]) -> Result<Vec<f64>> {
        Ok(self.forward(field)?.coefficients)
    }

    /// Forward pass keeping what the backward pass needs.
    pub fn forward(&self, field: &[f64]) -> Result<ForwardPass> {
        self.check(field)?;
        let n = self.size();
        let nn = (n * n) as f64;
        let (jn, ln) = (self.bank.scale_count(), self.bank.orientation_count());
        let mean = field.iter().sum::<f64>() / nn;
        let centred: Vec<f64> = field.iter().map(|f| f - mean).collect();
        let variance = field.iter().map(|f| f * f).sum::<f64>() / nn - mean * mean;
        let spectrum = self.fft.spectrum_of(&centred);
        let items: Vec<(usize, usize)> =
            (0..jn).flat_map(|j| (0..ln).map(move |l| (j, l))).collect();
        type Item = (f64, f64, f64, Vec<f64>, Vec<Complex64>, Vec<Complex64>);
        let results: Vec<Item> = items
            .par_iter()
            .map(|&(j1, l1)| {
                let g1 = self.filtered(&spectrum, j1, l1);
                let u: Vec<f64> = g1.iter().map(|z| z.norm()).collect();
                let s1 = u.iter().sum::<f64>() / nn;
                let p = u.iter().map(|v| v * v).sum::<f64>() / nn;
                let corr = u.iter().zip(&centred).map(|(a, b)| a * b).sum::<f64>() / nn;
                let v: Vec<f64> = u.iter().map(|x| x - s1).collect();
                let vhat = self.fft.spectrum_of(&v);
                let mut s2 = Vec::with_capacity((jn - j1 - 1) * ln);
                for j2 in (j1 + 1)..jn {
                    for l2 in 0..ln {
                        let g2 = self.filtered(&vhat, j2, l2);
                        s2.push(g2.iter().map(|z| z.norm()).sum::<f64>() / nn);
                    }
                }
                (s1, p, corr, s2, g1, vhat)
            })
            .collect();
        let mut coefficients = vec![0.0; self.labels.len()];
        coefficients[0] = mean;
        coefficients[1] = variance;
        let mut first = Vec::with_capacity(items.len());
        let mut field_envelope = Vec::with_capacity(items.len());
        for ((j1, l1), (s1, p, corr, s2, g1, vhat)) in items.iter().zip(results) {
            field_envelope.push(corr);
            coefficients
                [crate::scattering::layout::CoefficientLayout::new(jn, ln).first_order(*j1, *l1)] =
                s1;
            coefficients
                [crate::scattering::layout::CoefficientLayout::new(jn, ln).band_power(*j1, *l1)] =
                p;
            let mut k = 0;
            for j2 in (j1 + 1)..jn {
                for l2 in 0..ln {
                    coefficients[second_order_index(jn, ln, *j1, *l1, j2, l2)] = s2[k];
                    k += 1;
                }
            }
            first.push((g1, vhat));
        }
        Ok(ForwardPass {
            coefficients,
            field_envelope,
            centred,
            spectrum,
            first,
        })
    }

    /// Gradient ∂L/∂f of L with ∂L/∂c_i = `weights[i]` (a vector–Jacobian product), from a
    /// forward pass of the same transform.
    pub fn backward(&self, pass: &ForwardPass, weights: &[f64]) -> Result<Vec<f64>> {
        self.backward_with_correlations(pass, weights, None)
    }

    /// As [`Self::backward`], with weights ∂L/∂C(j,l) of the field–envelope correlations too
    /// (index j·L + l).
    pub fn backward_with_correlations(
        &self,
        pass: &ForwardPass,
        weights: &[f64],
        correlation_weights: Option<&[f64]>,
    ) -> Result<Vec<f64>> {
        self.check_periodic_weights(pass, weights, correlation_weights)?;
        let (jn, ln) = (self.bank.scale_count(), self.bank.orientation_count());
        let items: Vec<(usize, usize)> =
            (0..jn).flat_map(|j| (0..ln).map(move |l| (j, l))).collect();
        // Per (j1, l1): contribution conj(ψ̂₁)·DFT(Z₁) to the Fourier adjoint of I.
        let parts: Vec<(Vec<Complex64>, Option<Vec<f64>>)> = items
            .par_iter()
            .zip(&pass.first)
            .map(|(&(j1, l1), (g1, vhat))| {
                let ac = correlation_weights.map_or(0.0, |cw| cw[j1 * ln + l1]);
                self.periodic_band_adjoint(pass, weights, ac, (j1, l1), g1, vhat)
            })
            .collect();
        Ok(self.periodic_field_adjoint(pass, weights, &parts))
    }

    /// Errors unless the weights fit the coefficients and the field–envelope correlations.
    fn check_periodic_weights(
        &self,
        pass: &ForwardPass,
        weights: &[f64],
        correlation_weights: Option<&[f64]>,
    ) -> Result<()> {
        if let Some(cw) = correlation_weights {
            if cw.len() != pass.field_envelope.len() {
                return Err(Error::Mismatch(format!(
                    "{} correlation weights given, the transform has {}",
                    cw.len(),
                    pass.field_envelope.len()
                )));
            }
        }
        if weights.len() != self.labels.len() {
            return Err(Error::Mismatch(format!(
                "{} coefficient weights given, the transform has {} coefficients",
                weights.len(),
                self.labels.len()
            )));
        }
        Ok(())
    }

    /// The adjoint of one first-layer band (j1, l1) with correlation weight `ac`: ū from the
    /// second order and the correlation, Z₁ = (ū + a₁/N + 2 a_P |g₁|/N) g₁/|g₁|, returned as
    /// ψ̂₁·DFT(Z₁), with the correlation's explicit adjoint of the centred field.
    fn periodic_band_adjoint(
        &self,
        pass: &ForwardPass,
        weights: &[f64],
        ac: f64,
        (j1, l1): (usize, usize),
        g1: &[Complex64],
        vhat: &[Complex64],
    ) -> (Vec<Complex64>, Option<Vec<f64>>) {
        let n = self.size();
        let nn = (n * n) as f64;
        let (jn, ln) = (self.bank.scale_count(), self.bank.orientation_count());
        let mut u_adj = self.second_order_adjoint(weights, (j1, l1), vhat);
        let mut explicit = None;
        if ac != 0.0 {
            for (u, c) in u_adj.iter_mut().zip(&pass.centred) {
                *u += ac * c / nn;
            }
            let u: Vec<f64> = g1.iter().map(|z| z.norm()).collect();
            let ubar = u.iter().sum::<f64>() / nn;
            explicit = Some(u.iter().map(|v| ac * (v - ubar) / nn).collect());
        }
        let layout = crate::scattering::layout::CoefficientLayout::new(jn, ln);
        let a1 = weights[layout.first_order(j1, l1)];
        let ap = weights[layout.band_power(j1, l1)];
        let mut z1: Vec<Complex64> = g1
            .iter()
            .zip(&u_adj)
            .map(|(z, ua)| {
                let r = z.norm();
                if r > 0.0 {
                    let du = ua + a1 / nn + 2.0 * ap * r / nn;
                    *z * (du / r)
                } else {
                    Complex64::default()
                }
            })
            .collect();
        self.fft.forward(&mut z1);
        let psi = self.bank.wavelet(j1, l1);
        z1.iter_mut().zip(psi).for_each(|(z, p)| *z *= p);
        (z1, explicit)
    }

    /// The adjoint ū of the modulus u of band (j1, l1) from its second-order coefficients:
    /// Z₂ = (a/N) g₂/|g₂| per (j2 > j1, l2), gathered in Fourier space as Σ ψ̂₂·DFT(Z₂), back
    /// through the IDFT and the mean removal. Zero when no weight of the band is non-zero.
    fn second_order_adjoint(
        &self,
        weights: &[f64],
        (j1, l1): (usize, usize),
        vhat: &[Complex64],
    ) -> Vec<f64> {
        let n = self.size();
        let nn = (n * n) as f64;
        let (jn, ln) = (self.bank.scale_count(), self.bank.orientation_count());
        let mut v_adj_hat = vec![Complex64::default(); n * n];
        let mut any_second = false;
        for j2 in (j1 + 1)..jn {
            for l2 in 0..ln {
                let a = weights[second_order_index(jn, ln, j1, l1, j2, l2)];
                if a == 0.0 {
                    continue;
                }
                any_second = true;
                let mut g2 = self.filtered(vhat, j2, l2);
                // Z₂ = (a/N) g₂/|g₂|, zero where g₂ = 0.
                for z in g2.iter_mut() {
                    let r = z.norm();
                    *z = if r > 0.0 {
                        *z * (a / (nn * r))
                    } else {
                        Complex64::default()
                    };
                }
                self.fft.forward(&mut g2);
                for ((acc, z), p) in v_adj_hat.iter_mut().zip(&g2).zip(self.bank.wavelet(j2, l2)) {
                    *acc += z * p; // conj(ψ̂₂) = ψ̂₂ (real)
                }
            }
        }
        let mut u_adj = vec![0.0; n * n];
        if any_second {
            self.fft.inverse(&mut v_adj_hat);
            let re: Vec<f64> = v_adj_hat.iter().map(|z| z.re).collect();
            let m = re.iter().sum::<f64>() / nn; // adjoint of mean removal
            for (u, r) in u_adj.iter_mut().zip(&re) {
                *u = r - m;
            }
        }
        u_adj
    }

    /// ∂L/∂f from the bands' adjoints, summed in a fixed order (bitwise identical for any
    /// thread count): Re IDFT(Σ parts) plus the explicit terms, through the mean removal, plus
    /// the mean's a/N and the variance's 2 a (f − f̄)/N.
    fn periodic_field_adjoint(
        &self,
        pass: &ForwardPass,
        weights: &[f64],
        parts: &[(Vec<Complex64>, Option<Vec<f64>>)],
    ) -> Vec<f64> {
        let n = self.size();
        let nn = (n * n) as f64;
        let mut total = vec![Complex64::default(); n * n];
        for (part, _) in parts {
            for (t, p) in total.iter_mut().zip(part) {
                *t += p;
            }
        }
        self.fft.inverse(&mut total);
        let mut re: Vec<f64> = total.iter().map(|z| z.re).collect();
        for (_, explicit) in parts {
            if let Some(e) = explicit {
                for (r, v) in re.iter_mut().zip(e) {
                    *r += v;
                }
            }
        }
        let m = re.iter().sum::<f64>() / nn;
        let (a_mean, a_var) = (weights[0], weights[1]);
        re.iter()
            .zip(&pass.centred)
            .map(|(r, c)| r - m + a_mean / nn + a_var * 2.0 * c / nn)
            .collect()
    }

    /// IDFT(ψ̂_{j,l} · spectrum): a spectrum filtered by one wavelet, on the full grid.
    fn filtered(&self, spectrum: &[Complex64], j: usize, l: usize) -> Vec<Complex64> {
        let psi = self.bank.wavelet(j, l);
        let mut g: Vec<Complex64> = spectrum.iter().zip(psi).map(|(s, p)| s * p).collect();
        self.fft.inverse(&mut g);
        g
    }

    /// The DFT of the mean-removed field from a forward pass (used by the power-spectrum terms).
    pub(crate) fn centred_spectrum<'a>(&self, pass: &'a ForwardPass) -> &'a [Complex64] {
        &pass.spectrum
    }
}
