//! The masked-tile scattering estimator of [`crate::scattering::transform`] made differentiable: its
//! weighted sums on one tile (taper a, pooling weight w, optional Fourier cropping) and the
//! gradient of any linear combination of them with respect to the field (reverse mode, by
//! hand).
//!
//! # Forward pass
//!
//! Exactly the estimator of [`crate::scattering::transform::ScatteringEngine::transform_tile`], with the
//! same settings and layout ([`crate::scattering::pooling::TileSums`]). With n the tile side, N = n²,
//! first-layer level d_j and second-layer level d′_j of scale j, m_j = n/2^{d_j},
//! m′_j = n/2^{d′_j}, M_j = m_j², lower-case x the fine pixels and upper-case X the pixels of a
//! coarse grid (every 2^d-th fine pixel):
//!
//! * order 0: Σ w f and Σ w f² (weight Σ w);
//! * I = a (f − μ_a), μ_a = Σ a f / Σ a; F = DFT_n(I) (unnormalised DFT);
//! * g₁ = IDFT_{m1}(B_{n→m1}(ψ̂_{j1,l1} · F)) / N, with B the m × m box of spectrum bins of
//!   the engine (centred on the band of ψ_{j1,l1}, or the central box with its Nyquist row and
//!   column zeroed; the identity when m = n) and IDFT unnormalised;
//! * u = |g₁| · c_{j1}, c_j(X) = 1/√max(N_j(X), 0.01) the coverage normalisation;
//! * S1 sum = 4^{d1} Σ_X W̃_{j1}(X) u(X), P sum = 4^{d1} Σ_X W̃_{j1} u², where W̃_j is the
//!   trusted weight W_j = w·[N_j ≥ τ] low-passed to the grid of level d_j;
//! * I₂ = ã (u − μ_u), ã the taper sampled on the grid of j1, μ_u = Σ ã u / Σ ã;
//!   F₂ = DFT_{m1}(I₂); g₂ = IDFT_{m′2}(B_{m1→m′2}(ψ̂_{j2,l2} · F₂)) / M_1 (ψ̂ on the m1 grid);
//! * S2 sum = 4^{d′2} Σ_X W̃_{j1,j2}(X) |g₂(X)| c_{j2}(X), W̃_{j1,j2} and c_{j2} on the grid of
//!   level d′_{j2};
//! * field–envelope sum (sign-sensitive, not part of the engine's set):
//!   E_{j,l} = 4^{d_j} Σ_X W̃_j(X) I(X) u_{j,l}(X), with I read at the fine pixel of each coarse
//!   pixel X; pooled over tiles with the weight Σ W_j of S1(j,l) it is the tile estimator of
//!   the correlation ⟨(f − μ) |f∗ψ_{j,l}|⟩ of [`super::gradient`] (equal to it for a ≡ 1,
//!   w ≡ 1 without cropping). It changes sign with f → −f, which the sums above cannot see;
//! * the one-point member of that family, the field correlated with its own modulus,
//!   E_pix = Σ_x w I |I| (pooling weight Σ w), sign-sensitive as well.
//!
//! The coverage N_j, the trust masks, c_j and the low-passed weights depend on a and w only;
//! they are computed once per tile in a [`TileGeometry`] and reused for every field (the
//! trust cut is piecewise constant in a, and a, w are not optimised, so these are constants of
//! the derivative).
//!
//! # Backward pass (adjoints)
//!
//! For L = Σ_i b_i · sums_i, with the real inner product Re⟨·,·⟩ on complex arrays, the adjoint
//! Z̄ of a complex intermediate z is ∂L/∂Re z + i ∂L/∂Im z and each linear step A is undone by
//! A^H (Griewank & Walther 2008, *Evaluating Derivatives*, SIAM, ch. 3):
//!
//! * weighted pooling s = κ Σ_X W̃ h: h̄ = κ W̃ b (κ = 4^{d}, or 4^{d2}/M_1 for S2 folded into g₂);
//!   P: h̄ = 2 κ W̃ u b;
//! * modulus with normalisation h = c|z|: z̄ = h̄ c z/|z| (0 where z = 0, a subgradient);
//! * z = IDFT_m(Y) / K: Ȳ = DFT_m(z̄) / K, because (IDFT_m)^H = DFT_m for the unnormalised
//!   pair (ψ̂ is real, so it passes through the box step above unchanged);
//! * box Y = B(ψ̂ · F), a gather of bins: F̄\[s(p)\] += ψ̂\[s(p)\] Ȳ\[p\] (a scatter-add back into
//!   the m × m spectrum; zeroed Nyquist lines receive nothing);
//! * F = DFT_m(I) of a real I: Ī = Re IDFT_m(F̄);
//! * field–envelope sum E = κ Σ_X W̃ I u: ū += κ W̃ I b_E and Ī(x_X) += κ W̃ u b_E;
//!   E_pix = Σ w I |I|: Ī += 2 w |I| b_pix;
//! * tapered mean removal I = a (h − Σ a h / Σ a): h̄ = a Ī − a (Σ a Ī) / Σ a;
//! * order 0: ∂(Σ w f)/∂f = w, ∂(Σ w f²)/∂f = 2 w f.
//!
//! The adjoints of the pixels of a coarse grid are gathered in Fourier space per (j1, l1),
//! zero-padded back to n × n and summed in a fixed order, then one inverse DFT gives Ī; so
//! the gradient is bitwise identical for any thread count. The g₂ are recomputed in the
//! backward pass from the stored F₂ (memory: two arrays per (j1, l1)). With a ≡ 1, w ≡ 1 and
//! no cropping this is the periodic transform of [`super::gradient`] up to the pooling by sums
//! instead of means.

use super::gradient::DifferentiableScattering;
use crate::scattering::layout::CoefficientLayout;
use crate::scattering::pooling::TileSums;
use crate::scattering::transform::{
    band_boxes, check_taper_and_weight, check_values, crop_box, crop_levels_for,
    pair_trusted_weights, subsample, validate_settings, BandBox, Boxes, Coverage, TileView,
    TransformSettings,
};
use crate::{Error, Result};
use num_complex::Complex64;
use rayon::prelude::*;
use std::sync::Arc;

struct GeometryData {
    size: usize,
    scale_count: usize,
    orientation_count: usize,
    settings: TransformSettings,
    /// First-layer level of each scale.
    levels: Vec<usize>,
    /// Second-layer level of each scale (the engine's `crop_levels`).
    second_levels: Vec<usize>,
    taper: Vec<f64>,
    taper_sum: f64,
    weight: Vec<f64>,
    weight_sum: f64,
    /// Per level d: the taper sampled on the grid and its sum.
    level_tapers: Vec<(Vec<f64>, f64)>,
    /// Per scale: c_j = 1/√max(N_j, floor) on the first-layer grid of j.
    inv_sqrt_coverage: Vec<Vec<f64>>,
    /// Per scale: c_j on the second-layer grid of j.
    inv_sqrt_coverage_second: Vec<Vec<f64>>,
    /// Per scale: low-passed W_j on the grid of d_j, and Σ W_j.
    first_weights: Vec<(Vec<f64>, f64)>,
    /// Per j1, per j2 > j1: low-passed W_{j1,j2} on the second-layer grid of j2, and Σ W_{j1,j2}.
    pair_weights: Vec<Vec<(Vec<f64>, f64)>>,
    /// The spectrum bins of each first-layer and second-layer band, as the engine's.
    boxes: Boxes,
}

impl GeometryData {
    fn band(&self, d_src: usize, j: usize, l: usize) -> &BandBox {
        match &self.boxes.1[d_src][j * self.orientation_count + l] {
            Some(b) => b,
            None => unreachable!("a box is built for every source level up to d_j"),
        }
    }
}

/// What the masked estimator needs from a tile's taper and weight (coverage, trust cut,
/// low-passed pooling weights), computed once and reused for every field on that tile.
/// Cheap to clone (shared).
#[derive(Clone)]
pub struct TileGeometry {
    inner: Arc<GeometryData>,
}

impl std::fmt::Debug for TileGeometry {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("TileGeometry")
            .field("size", &self.inner.size)
            .field("levels", &self.inner.levels)
            .field("footprint_weight", &self.inner.weight_sum)
            .finish()
    }
}

impl TileGeometry {
    /// Tile side n.
    pub fn size(&self) -> usize {
        self.inner.size
    }

    /// Crop level d_j of each scale, as [`crate::scattering::transform::ScatteringEngine::crop_levels`]
    /// (all zero without Fourier cropping).
    pub fn crop_levels(&self) -> &[usize] {
        &self.inner.second_levels
    }

    /// First-layer level of each scale, as
    /// [`crate::scattering::transform::ScatteringEngine::first_layer_levels`].
    pub fn first_layer_levels(&self) -> &[usize] {
        &self.inner.levels
    }

    /// The estimator settings the geometry was built with.
    pub fn settings(&self) -> &TransformSettings {
        &self.inner.settings
    }

    /// Σ w over the tile.
    pub fn footprint_weight(&self) -> f64 {
        self.inner.weight_sum
    }
}

/// A forward pass of the masked estimator on one tile, with what its backward pass needs.
pub struct TileForward {
    /// Weighted sums and weights, as [`crate::scattering::transform::ScatteringEngine::transform_tile`].
    pub sums: TileSums,
    geometry: TileGeometry,
    field: Vec<f64>,
    /// F = DFT_n(a (f − μ_a)).
    spectrum: Vec<Complex64>,
    /// I = a (f − μ_a) on the full grid.
    input: Vec<f64>,
    /// Field–envelope sums E_{j,l}, index j·L + l, then E_pix (module documentation).
    field_envelope: Vec<f64>,
    /// Per (j1, l1): g₁ on its grid and F₂ = DFT(I₂) (empty for the last scale).
    first: Vec<(Vec<Complex64>, Vec<Complex64>)>,
}

impl std::fmt::Debug for TileForward {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("TileForward")
            .field("geometry", &self.geometry)
            .field("sums", &self.sums)
            .finish()
    }
}

impl TileForward {
    /// The geometry the pass was computed with.
    pub fn geometry(&self) -> &TileGeometry {
        &self.geometry
    }

    /// F = DFT_n(a (f − μ_a)), unnormalised (for a ≡ 1 the DFT of the mean-removed field).
    pub fn spectrum(&self) -> &[Complex64] {
        &self.spectrum
    }

    /// Field–envelope sums E_{j,l} = 4^{d_j} Σ_X W̃_j I u_{j,l}, index j·L + l (module
    /// documentation), whose pooling weight is that of S1(j, l),
    /// `sums.weights[CoefficientLayout::first_order(j, l)]`;
    /// then (index J·L) the one-point sum E_pix = Σ w I |I|, pooling weight Σ w.
    pub fn field_envelope_sums(&self) -> &[f64] {
        &self.field_envelope
    }
}

/// Pooled values of (combined) tile sums, as [`crate::scattering::pooling::pooled_coefficients`]:
/// c_i = Σ W h / Σ W, and for the variance Σ w f² / Σ w − c_0². NaN where the weight is zero.
pub fn pooled_values(sums: &TileSums) -> Vec<f64> {
    let mean = sums.sums[0] / sums.weights[0];
    sums.sums
        .iter()
        .zip(&sums.weights)
        .enumerate()
        .map(|(i, (s, w))| {
            if *w > 0.0 {
                if i == 1 {
                    s / w - mean * mean
                } else {
                    s / w
                }
            } else {
                f64::NAN
            }
        })
        .collect()
}

/// Adjoint of [`pooled_values`] (weights are constants): given ∂L/∂c_i, returns ∂L/∂sums_i,
/// i.e. ∂L/∂c_i / Σ W_i, plus −2 c_0 ∂L/∂c_1 / Σ w on the mean's sum. Zero where the weight is
/// zero.
pub fn pooled_values_adjoint(sums: &TileSums, coefficient_weights: &[f64]) -> Result<Vec<f64>> {
    if coefficient_weights.len() != sums.sums.len() {
        return Err(Error::Mismatch(format!(
            "{} coefficient weights given, the sums hold {}",
            coefficient_weights.len(),
            sums.sums.len()
        )));
    }
    let mut out: Vec<f64> = coefficient_weights
        .iter()
        .zip(&sums.weights)
        .map(|(b, w)| if *w > 0.0 { b / w } else { 0.0 })
        .collect();
    if sums.weights.len() > 1 && sums.weights[0] > 0.0 && sums.weights[1] > 0.0 {
        let mean = sums.sums[0] / sums.weights[0];
        out[0] -= 2.0 * mean * coefficient_weights[1] / sums.weights[0];
    }
    Ok(out)
}

impl DifferentiableScattering {
    fn wavelet_at(&self, j: usize, l: usize, d: usize) -> &[f64] {
        if d == 0 {
            self.bank().wavelet(j, l)
        } else {
            &self.grids.wavelets[d][j * self.bank().orientation_count() + l]
        }
    }

    /// Low-pass a full-resolution real array to level d by cropping its spectrum:
    /// Re IDFT_m(B_{n→m} DFT_n(h)) / N on the m × m grid.
    fn low_pass(&self, data: &[f64], d: usize) -> Vec<f64> {
        if d == 0 {
            return data.to_vec();
        }
        let n = self.size();
        let spec = self.square_fft().spectrum_of(data);
        let mut c = crop_box(&spec, n, n >> d);
        self.grids.ffts[d].inverse_unnormalised(&mut c);
        let scale = 1.0 / (n * n) as f64;
        c.iter().map(|z| z.re * scale).collect()
    }

    /// Precompute the coverage N_j = a² ∗ K_j, the trust cut, the normalisation c_j and the
    /// low-passed pooling weights of a tile (module documentation of [`crate::scattering::transform`]).
    /// Errors as the engine does on a bad taper or weight or settings out of range.
    pub fn tile_geometry(
        &self,
        taper: &[f64],
        weight: &[f64],
        settings: &TransformSettings,
    ) -> Result<TileGeometry> {
        validate_settings(settings)?;
        let bank = self.bank();
        let n = bank.size();
        let (big_j, big_l) = (bank.scale_count(), bank.orientation_count());
        let (weight_sum, taper_sum) = check_taper_and_weight(taper, weight, n)?;
        let levels = crop_levels_for(bank, settings, settings.first_layer_oversampling);
        let second_levels = crop_levels_for(bank, settings, 0);
        let coverage = self.coverage(taper, &levels, &second_levels, settings.coverage_threshold);
        let first_weights = self.first_trusted_weights(weight, &coverage.trust, &levels);
        let pair_weights = pair_trusted_weights(weight, &coverage.trust, |wp, j2| {
            self.low_pass(wp, second_levels[j2])
        });
        let top = levels.iter().copied().max().unwrap_or(0);
        let boxes = band_boxes(bank, &levels, &second_levels, settings);
        Ok(TileGeometry {
            inner: Arc::new(GeometryData {
                size: n,
                scale_count: big_j,
                orientation_count: big_l,
                settings: *settings,
                levels,
                second_levels,
                taper: taper.to_vec(),
                taper_sum,
                weight: weight.to_vec(),
                weight_sum,
                level_tapers: level_tapers(taper, n, top),
                inv_sqrt_coverage: coverage.first,
                inv_sqrt_coverage_second: coverage.second,
                first_weights,
                pair_weights,
                boxes,
            }),
        })
    }

    /// Per scale j: the trust mask [N_j ≥ τ] on the full grid and c_j = 1/√max(N_j, floor) on
    /// the first-layer and second-layer grids of j.
    fn coverage(
        &self,
        taper: &[f64],
        levels: &[usize],
        second_levels: &[usize],
        tau: f64,
    ) -> Coverage {
        let n = self.size();
        let big_j = levels.len();
        let a2: Vec<f64> = taper.iter().map(|a| a * a).collect();
        let a2_spec = self.square_fft().spectrum_of(&a2);
        let mut coverage = Coverage::with_capacity(big_j);
        for (j, &level) in levels.iter().enumerate() {
            let cov = self.scale_coverage(&a2_spec, j);
            coverage.push_scale(&cov, n, tau, (level, second_levels[j]));
        }
        coverage
    }

    /// The coverage N_j = a² ∗ K_j of scale j on the full grid, from the DFT of a²; K_j =
    /// (1/L) Σ_l |ψ_{j,l}|², normalised to unit sum (its DFT at 0).
    fn scale_coverage(&self, a2_spec: &[Complex64], j: usize) -> Vec<f64> {
        let bank = self.bank();
        let nn = bank.size() * bank.size();
        let mut kernel = vec![0.0; nn];
        for l in 0..bank.orientation_count() {
            for (k, v) in kernel.iter_mut().zip(bank.squared_modulus(j, l)) {
                *k += v;
            }
        }
        let dc = kernel[0];
        kernel.iter_mut().for_each(|k| *k /= dc);
        let mut c: Vec<Complex64> = a2_spec.iter().zip(&kernel).map(|(s, k)| s * k).collect();
        self.square_fft().inverse_unnormalised(&mut c);
        c.iter().map(|z| z.re / nn as f64).collect()
    }

    /// Per scale j: the trusted weight W_j = w·[N_j ≥ τ] low-passed to the first-layer grid of
    /// j, and Σ W_j.
    fn first_trusted_weights(
        &self,
        weight: &[f64],
        trust: &[Vec<bool>],
        levels: &[usize],
    ) -> Vec<(Vec<f64>, f64)> {
        trust
            .iter()
            .zip(levels)
            .map(|(tj, &level)| {
                let wj: Vec<f64> = weight
                    .iter()
                    .zip(tj)
                    .map(|(&w, &t)| if t { w } else { 0.0 })
                    .collect();
                let total = wj.iter().sum::<f64>();
                (self.low_pass(&wj, level), total)
            })
            .collect()
    }

    /// Forward pass of the masked estimator on one tile: the sums equal
    /// [`crate::scattering::transform::ScatteringEngine::transform_tile`] with the same settings (Fourier
    /// cropping included when the settings ask for it).
    pub fn forward_tile(
        &self,
        tile: &TileView<'_>,
        settings: &TransformSettings,
    ) -> Result<TileForward> {
        let geometry = self.tile_geometry(tile.taper, tile.weight, settings)?;
        self.forward_tile_with(&geometry, tile.field)
    }

    fn check_geometry(&self, geometry: &TileGeometry) -> Result<()> {
        let g = &geometry.inner;
        let bank = self.bank();
        if g.size != bank.size()
            || g.scale_count != bank.scale_count()
            || g.orientation_count != bank.orientation_count()
        {
            return Err(Error::Mismatch(format!(
                "tile geometry was built for n = {}, J = {}, L = {}, the transform has n = {}, J = {}, L = {}",
                g.size,
                g.scale_count,
                g.orientation_count,
                bank.size(),
                bank.scale_count(),
                bank.orientation_count()
            )));
        }
        Ok(())
    }

    /// Forward pass on a field with a precomputed [`TileGeometry`] (same result as
    /// [`Self::forward_tile`] with that taper, weight and settings).
    pub fn forward_tile_with(&self, geometry: &TileGeometry, field: &[f64]) -> Result<TileForward> {
        self.check_geometry(geometry)?;
        let g = &geometry.inner;
        let n = g.size;
        let nn = n * n;
        check_values("field", field, nn, n)?;
        let (a, w) = (&g.taper, &g.weight);
        let mut swf = 0.0;
        let mut swf2 = 0.0;
        for i in 0..nn {
            swf += w[i] * field[i];
            swf2 += w[i] * field[i] * field[i];
        }
        let mu = a.iter().zip(field).map(|(a, f)| a * f).sum::<f64>() / g.taper_sum;
        let input: Vec<f64> = a.iter().zip(field).map(|(a, f)| a * (f - mu)).collect();
        let spectrum = self.square_fft().spectrum_of(&input);
        let items = first_layer_bands(g);
        let bands: Vec<ForwardBand> = items
            .par_iter()
            .map(|&(j1, l1)| self.forward_band(g, &spectrum, &input, j1, l1))
            .collect();
        let mut sums = vec![0.0; self.labels().len()];
        let mut weights = vec![0.0; self.labels().len()];
        sums[0] = swf;
        weights[0] = g.weight_sum;
        sums[1] = swf2;
        weights[1] = g.weight_sum;
        let mut field_envelope = Vec::with_capacity(items.len());
        let mut first = Vec::with_capacity(items.len());
        for (&(j1, l1), band) in items.iter().zip(bands) {
            field_envelope.push(band.envelope);
            place_band_sums(g, j1, l1, &band, &mut sums, &mut weights);
            first.push((band.g1, band.spec2));
        }
        field_envelope.push(
            input
                .iter()
                .zip(w)
                .map(|(i, w)| w * i * i.abs())
                .sum::<f64>(),
        );
        Ok(TileForward {
            sums: TileSums {
                footprint_weight: g.weight_sum,
                sums,
                weights,
            },
            geometry: geometry.clone(),
            field: field.to_vec(),
            spectrum,
            input,
            field_envelope,
            first,
        })
    }

    /// The forward pass of one first-layer band (j1, l1): g₁ = IDFT(B(ψ̂ · F)) / N, u = |g₁| c,
    /// the S1, P and field–envelope sums over the band's grid, then the second order.
    fn forward_band(
        &self,
        g: &GeometryData,
        spectrum: &[Complex64],
        input: &[f64],
        j1: usize,
        l1: usize,
    ) -> ForwardBand {
        let n = g.size;
        let scale = 1.0 / (n * n) as f64;
        let d1 = g.levels[j1];
        let m1 = n >> d1;
        let factor1 = (1usize << (2 * d1)) as f64;
        let mut g1: Vec<Complex64> = Vec::with_capacity(m1 * m1);
        let big_l = g.orientation_count;
        g.boxes.0[j1 * big_l + l1].gather(spectrum, self.wavelet_at(j1, l1, 0), &mut g1);
        self.grids.ffts[d1].inverse_unnormalised(&mut g1);
        g1.iter_mut().for_each(|z| *z *= scale);
        let c1 = &g.inv_sqrt_coverage[j1];
        let u: Vec<f64> = g1.iter().zip(c1).map(|(z, &c)| z.norm() * c).collect();
        let (wl, _) = &g.first_weights[j1];
        let input_here = subsample(input, n, m1);
        let mut s1 = 0.0;
        let mut p = 0.0;
        let mut e = 0.0;
        for ((wv, uv), iv) in wl.iter().zip(&u).zip(&input_here) {
            s1 += wv * uv;
            p += wv * uv * uv;
            e += wv * iv * uv;
        }
        let (s2, spec2) = if j1 + 1 < g.scale_count {
            self.second_order_sums(g, &u, j1)
        } else {
            (Vec::new(), Vec::new())
        };
        ForwardBand {
            s1: s1 * factor1,
            band_power: p * factor1,
            envelope: e * factor1,
            s2,
            g1,
            spec2,
        }
    }

    /// The second order of a band of scale j1 < J − 1 from its normalised modulus u:
    /// I₂ = ã (u − μ_u), F₂ = DFT(I₂), and the S2 sums 4^{d′2} Σ W̃_{j1,j2} c_{j2} |g₂| / M_1 of
    /// every (j2 > j1, l2) in layout order; returns them with F₂.
    fn second_order_sums(
        &self,
        g: &GeometryData,
        u: &[f64],
        j1: usize,
    ) -> (Vec<f64>, Vec<Complex64>) {
        let d1 = g.levels[j1];
        let m1 = g.size >> d1;
        let (ad, sad) = &g.level_tapers[d1];
        let mu_u = if *sad > 0.0 {
            ad.iter().zip(u).map(|(a, u)| a * u).sum::<f64>() / sad
        } else {
            0.0
        };
        let second_input: Vec<f64> = ad.iter().zip(u).map(|(a, u)| a * (u - mu_u)).collect();
        let spec2 = self.grids.ffts[d1].spectrum_of(&second_input);
        let scale2 = 1.0 / (m1 * m1) as f64;
        let mut s2 = Vec::new();
        for (pair, j2) in ((j1 + 1)..g.scale_count).enumerate() {
            let factor2 = (1usize << (2 * g.second_levels[j2])) as f64;
            let c2 = &g.inv_sqrt_coverage_second[j2];
            let (wp, _) = &g.pair_weights[j1][pair];
            for l2 in 0..g.orientation_count {
                let g2 = self.second_layer_grid(g, &spec2, d1, j2, l2);
                let mut acc = 0.0;
                for ((z, &c), wv) in g2.iter().zip(c2).zip(wp) {
                    acc += wv * z.norm() * c;
                }
                s2.push(acc * factor2 * scale2);
            }
        }
        (s2, spec2)
    }

    /// The unscaled second-layer grid IDFT_{m′2}(B_{m1→m′2}(ψ̂_{j2,l2} · F₂)) of a band whose
    /// first layer sits at level `d1` (g₂ times M_1).
    fn second_layer_grid(
        &self,
        g: &GeometryData,
        spec2: &[Complex64],
        d1: usize,
        j2: usize,
        l2: usize,
    ) -> Vec<Complex64> {
        let d2 = g.second_levels[j2];
        let m2 = g.size >> d2;
        let mut g2: Vec<Complex64> = Vec::with_capacity(m2 * m2);
        g.band(d1, j2, l2)
            .gather(spec2, self.wavelet_at(j2, l2, d1), &mut g2);
        self.grids.ffts[d2].inverse_unnormalised(&mut g2);
        g2
    }

    /// Gradient ∂(Σ_i b_i · sums_i)/∂f of a linear combination of a tile's sums
    /// (b = `sum_weights`, layout of [`Self::labels`]), from a forward pass of this transform;
    /// taper, weight and trust cut are constants (module documentation).
    pub fn backward_tile(&self, pass: &TileForward, sum_weights: &[f64]) -> Result<Vec<f64>> {
        self.backward_tile_with_correlations(pass, sum_weights, None)
    }

    /// As [`Self::backward_tile`], with weights b_E of the field–envelope sums too (layout of
    /// [`TileForward::field_envelope_sums`]): ∂(Σ_i b_i sums_i + Σ b_E E)/∂f.
    pub fn backward_tile_with_correlations(
        &self,
        pass: &TileForward,
        sum_weights: &[f64],
        envelope_weights: Option<&[f64]>,
    ) -> Result<Vec<f64>> {
        self.check_backward_weights(pass, sum_weights, envelope_weights)?;
        let g = &pass.geometry.inner;
        let items = first_layer_bands(g);
        let parts: Vec<BandAdjoint> = items
            .par_iter()
            .zip(&pass.first)
            .map(|(&(j1, l1), (g1, spec2))| {
                let weights = BandWeights::of(g, sum_weights, envelope_weights, j1, l1);
                self.band_adjoint(pass, &weights, j1, g1, spec2)
            })
            .collect();
        let (total, direct_total) = self.summed_band_adjoints(g, &items, &parts);
        Ok(self.field_adjoint(pass, total, direct_total, sum_weights, envelope_weights))
    }

    /// Errors unless the weights fit the transform's sums and the pass's field–envelope sums.
    fn check_backward_weights(
        &self,
        pass: &TileForward,
        sum_weights: &[f64],
        envelope_weights: Option<&[f64]>,
    ) -> Result<()> {
        self.check_geometry(&pass.geometry)?;
        if let Some(e) = envelope_weights {
            if e.len() != pass.field_envelope.len() {
                return Err(Error::Mismatch(format!(
                    "{} field-envelope weights given, the tile has {} sums",
                    e.len(),
                    pass.field_envelope.len()
                )));
            }
        }
        if sum_weights.len() != self.labels().len() {
            return Err(Error::Mismatch(format!(
                "{} sum weights given, the transform has {} coefficients",
                sum_weights.len(),
                self.labels().len()
            )));
        }
        Ok(())
    }

    /// The adjoint of one first-layer band (j1, l1): ū from S1, P, the field–envelope sum and
    /// the second order, then z̄₁ = ū c z/|z| carried back through the IDFT to the cropped
    /// spectrum B_{n→m1} F (on the m1² box), with the direct adjoint of I at the coarse pixels
    /// from the field–envelope sum.
    fn band_adjoint(
        &self,
        pass: &TileForward,
        b: &BandWeights<'_>,
        j1: usize,
        g1: &[Complex64],
        spec2: &[Complex64],
    ) -> BandAdjoint {
        let g = &pass.geometry.inner;
        let n = g.size;
        let d1 = g.levels[j1];
        let m1 = n >> d1;
        let factor1 = (1usize << (2 * d1)) as f64;
        let c1 = &g.inv_sqrt_coverage[j1];
        let (wl, _) = &g.first_weights[j1];
        // ū from S1 and P.
        let mut u_adj: Vec<f64> = g1
            .iter()
            .zip(c1)
            .zip(wl)
            .map(|((z, &c), &wv)| factor1 * wv * (b.s1 + 2.0 * b.band_power * z.norm() * c))
            .collect();
        // ū and Ī from E = κ Σ_X W̃ I u.
        let be = b.envelope;
        let direct = (be != 0.0).then(|| {
            let input_here = subsample(&pass.input, n, m1);
            let mut direct = Vec::with_capacity(m1 * m1);
            for (((ua, z), &c), (&wv, iv)) in u_adj
                .iter_mut()
                .zip(g1)
                .zip(c1)
                .zip(wl.iter().zip(&input_here))
            {
                *ua += factor1 * wv * iv * be;
                direct.push(factor1 * wv * z.norm() * c * be);
            }
            direct
        });
        if j1 + 1 < g.scale_count {
            self.add_second_order_adjoint(g, b, j1, spec2, &mut u_adj);
        }
        let mut z1: Vec<Complex64> = g1
            .iter()
            .zip(c1)
            .zip(&u_adj)
            .map(|((z, &c), &ua)| {
                let r = z.norm();
                if r > 0.0 {
                    *z * (ua * c / r)
                } else {
                    Complex64::default()
                }
            })
            .collect();
        // g₁ = IDFT(ψ̂ · B F) / N.
        self.grids.ffts[d1].forward(&mut z1);
        let scale = 1.0 / (n * n) as f64;
        z1.iter_mut().for_each(|z| *z *= scale);
        (z1, direct)
    }

    /// Adds to ū of a band of scale j1 < J − 1 the adjoint of its S2 sums: each g₂ is
    /// recomputed from F₂, z̄₂ = b κ W̃ c z/|z| goes back through its IDFT and box into F̄₂, and
    /// Ī₂ = Re IDFT(F̄₂) through the tapered mean removal into ū.
    fn add_second_order_adjoint(
        &self,
        g: &GeometryData,
        b: &BandWeights<'_>,
        j1: usize,
        spec2: &[Complex64],
        u_adj: &mut [f64],
    ) {
        let d1 = g.levels[j1];
        let m1 = g.size >> d1;
        let scale2 = 1.0 / (m1 * m1) as f64;
        let mut spec2_adj = vec![Complex64::default(); m1 * m1];
        let mut any_second = false;
        for (pair, j2) in ((j1 + 1)..g.scale_count).enumerate() {
            let d2 = g.second_levels[j2];
            let factor2 = (1usize << (2 * d2)) as f64;
            let c2 = &g.inv_sqrt_coverage_second[j2];
            let (wp, _) = &g.pair_weights[j1][pair];
            for l2 in 0..g.orientation_count {
                let weight = b.second_order(j2, l2);
                if weight == 0.0 {
                    continue;
                }
                any_second = true;
                let mut g2 = self.second_layer_grid(g, spec2, d1, j2, l2);
                // g₂ = raw · scale2; s2 = κ Σ W̃ c |g₂|, κ = 4^{d2}.
                let k = weight * factor2 * scale2;
                for ((z, &c), &wv) in g2.iter_mut().zip(c2).zip(wp) {
                    let r = z.norm();
                    *z = if r > 0.0 {
                        *z * (k * wv * c / r)
                    } else {
                        Complex64::default()
                    };
                }
                self.grids.ffts[d2].forward(&mut g2);
                g.band(d1, j2, l2)
                    .scatter_add(&mut spec2_adj, self.wavelet_at(j2, l2, d1), &g2);
            }
        }
        if any_second {
            self.grids.ffts[d1].inverse_unnormalised(&mut spec2_adj);
            let (ad, sad) = &g.level_tapers[d1];
            let i2_adj: Vec<f64> = spec2_adj.iter().zip(ad).map(|(z, a)| z.re * a).collect();
            let m = if *sad > 0.0 {
                i2_adj.iter().sum::<f64>() / sad
            } else {
                0.0
            };
            for ((ua, ia), a) in u_adj.iter_mut().zip(&i2_adj).zip(ad) {
                *ua += ia - a * m;
            }
        }
    }

    /// The bands' adjoints summed in a fixed order (bitwise identical for any thread count):
    /// the spectra scattered back into the n × n spectrum, the direct adjoints of I onto the
    /// fine pixel of each coarse pixel.
    fn summed_band_adjoints(
        &self,
        g: &GeometryData,
        items: &[(usize, usize)],
        parts: &[BandAdjoint],
    ) -> (Vec<Complex64>, Vec<f64>) {
        let n = g.size;
        let mut total = vec![Complex64::default(); n * n];
        let mut direct_total = vec![0.0; n * n];
        for (&(j1, l1), (part, direct)) in items.iter().zip(parts) {
            let band = &g.boxes.0[j1 * g.orientation_count + l1];
            band.scatter_add(&mut total, self.wavelet_at(j1, l1, 0), part);
            if let Some(direct) = direct {
                let stride = 1usize << g.levels[j1];
                let m1 = n / stride;
                for (k, v) in direct.iter().enumerate() {
                    let (cy, cx) = (k / m1, k % m1);
                    direct_total[cy * stride * n + cx * stride] += v;
                }
            }
        }
        (total, direct_total)
    }

    /// The gradient with respect to the field from the summed adjoints: Ī = a (Re IDFT(F̄) +
    /// direct), with 2 w |I| b_pix of E_pix in the direct part, through the tapered mean
    /// removal, plus the order-0 terms b_0 w + 2 b_v w f.
    fn field_adjoint(
        &self,
        pass: &TileForward,
        mut total: Vec<Complex64>,
        mut direct_total: Vec<f64>,
        sum_weights: &[f64],
        envelope_weights: Option<&[f64]>,
    ) -> Vec<f64> {
        let g = &pass.geometry.inner;
        if let Some(e) = envelope_weights {
            let bp = e[g.scale_count * g.orientation_count];
            if bp != 0.0 {
                for ((d, i), w) in direct_total.iter_mut().zip(&pass.input).zip(&g.weight) {
                    *d += 2.0 * w * i.abs() * bp;
                }
            }
        }
        self.square_fft().inverse_unnormalised(&mut total);
        let a = &g.taper;
        let i_adj: Vec<f64> = total
            .iter()
            .zip(&direct_total)
            .zip(a)
            .map(|((z, d), a)| (z.re + d) * a)
            .collect();
        let m = i_adj.iter().sum::<f64>() / g.taper_sum;
        let (b0, bv) = (sum_weights[0], sum_weights[1]);
        i_adj
            .iter()
            .zip(a)
            .zip(&g.weight)
            .zip(&pass.field)
            .map(|(((ia, a), w), f)| ia - a * m + b0 * w + 2.0 * bv * w * f)
            .collect()
    }
}

/// Per level d up to `top`: the taper sampled on the grid of level d, and its sum.
fn level_tapers(taper: &[f64], n: usize, top: usize) -> Vec<(Vec<f64>, f64)> {
    (0..=top)
        .map(|d| {
            let t = subsample(taper, n, n >> d);
            let s = t.iter().sum::<f64>();
            (t, s)
        })
        .collect()
}

/// The first-layer bands (j, l), in layout order.
fn first_layer_bands(g: &GeometryData) -> Vec<(usize, usize)> {
    let big_l = g.orientation_count;
    (0..g.scale_count)
        .flat_map(|j| (0..big_l).map(move |l| (j, l)))
        .collect()
}

/// The forward pass of one first-layer band (j1, l1).
struct ForwardBand {
    /// S1 sum 4^{d1} Σ W̃ u.
    s1: f64,
    /// P sum 4^{d1} Σ W̃ u².
    band_power: f64,
    /// Field–envelope sum 4^{d1} Σ W̃ I u.
    envelope: f64,
    /// S2 sums of every (j2 > j1, l2), in layout order.
    s2: Vec<f64>,
    /// g₁ on its grid.
    g1: Vec<Complex64>,
    /// F₂ = DFT(I₂) (empty for the last scale).
    spec2: Vec<Complex64>,
}

/// Writes a band's sums and their pooling weights (Σ W_j, Σ W_{j1,j2}) at their layout places.
fn place_band_sums(
    g: &GeometryData,
    j1: usize,
    l1: usize,
    band: &ForwardBand,
    sums: &mut [f64],
    weights: &mut [f64],
) {
    let layout = CoefficientLayout::new(g.scale_count, g.orientation_count);
    let trusted = g.first_weights[j1].1;
    sums[layout.first_order(j1, l1)] = band.s1;
    weights[layout.first_order(j1, l1)] = trusted;
    sums[layout.band_power(j1, l1)] = band.band_power;
    weights[layout.band_power(j1, l1)] = trusted;
    let mut k = 0;
    for (pair, j2) in ((j1 + 1)..g.scale_count).enumerate() {
        for l2 in 0..g.orientation_count {
            let i = layout.second_order(j1, l1, j2, l2);
            sums[i] = band.s2[k];
            weights[i] = g.pair_weights[j1][pair].1;
            k += 1;
        }
    }
}

/// The adjoint of one band: that of its cropped spectrum on the m1² box, and the direct
/// adjoint of I at its coarse pixels (when its field–envelope weight is not zero).
type BandAdjoint = (Vec<Complex64>, Option<Vec<f64>>);

/// The weights ∂L/∂sum of one first-layer band (j1, l1): of its S1, P and field–envelope sums,
/// and of its S2 sums.
struct BandWeights<'a> {
    s1: f64,
    band_power: f64,
    envelope: f64,
    layout: CoefficientLayout,
    sum_weights: &'a [f64],
    j1: usize,
    l1: usize,
}

impl<'a> BandWeights<'a> {
    fn of(
        g: &GeometryData,
        sum_weights: &'a [f64],
        envelope_weights: Option<&[f64]>,
        j1: usize,
        l1: usize,
    ) -> Self {
        let layout = CoefficientLayout::new(g.scale_count, g.orientation_count);
        Self {
            s1: sum_weights[layout.first_order(j1, l1)],
            band_power: sum_weights[layout.band_power(j1, l1)],
            envelope: envelope_weights.map_or(0.0, |e| e[j1 * g.orientation_count + l1]),
            layout,
            sum_weights,
            j1,
            l1,
        }
    }

    /// The weight of S2(j1, l1, j2, l2).
    fn second_order(&self, j2: usize, l2: usize) -> f64 {
        self.sum_weights[self.layout.second_order(self.j1, self.l1, j2, l2)]
    }
}
