//! Fourier statistics of tiles, for comparison with the scattering coefficients on the same
//! footprint: the binned power spectrum P(k) and the binned bispectrum B(k1, k2, k3).
//!
//! Conventions. A tile is an n × n grid of pixel size Δ (radians), N = n² pixels, with field f,
//! taper a and DFT F_k = Σ_x a(x)(f(x) − μ_a) e^{−ik·x}, k = 2π(i, j)/(nΔ) in rad⁻¹. The flat-sky
//! spectra are defined by ⟨f̃(k) f̃(k')⟩ = (2π)² δ_D(k + k') P(k) and
//! ⟨f̃(k1) f̃(k2) f̃(k3)⟩ = (2π)² δ_D(k1 + k2 + k3) B(k1, k2, k3) (common practice), so that
//! Var f = ∫ d²k/(2π)² P(k). Then, for a taper a,
//!
//! - P̂(k_b) = Δ² · mean_{k ∈ b} |F_k|² / Σ_x a(x)² (periodogram with the taper's w2
//!   normalisation; Peacock & Nicholson 1991, MNRAS 253, 307, for the normalisation),
//! - B̂(b1, b2, b3) = Δ⁴ · Σ_x I1 I2 I3 / (Σ_x J1 J2 J3 · Σ_x a(x)³), with
//!   I_i = IDFT[F · 1_{b_i}] and J_i = IDFT[1_{b_i}] (1/N-normalised inverse DFT): the FFT
//!   shell-filtering estimator (Scoccimarro 2015, PRD 92, 083532, eqs. 20–24; in two
//!   dimensions Watkinson, Majumdar, Pritchard & Mondal 2017, MNRAS 472, 2436), where Σ J1J2J3
//!   counts the closed triangles with sides in the three shells.
//!
//! Tiles are combined with the weight of their core (Σ of the pooling weights), the same weights
//! that pool the scattering coefficients, so every footprint position counts once.

use crate::error::{Error, Result};
use crate::scattering::fft::{wavenumber, SquareFft};
use num_complex::Complex64;

/// Wavenumber bins: `edges[b] ≤ |k| < edges[b+1]` in rad⁻¹.
#[derive(Debug, Clone, serde::Serialize)]
pub struct WavenumberBins {
    pub edges: Vec<f64>,
}

impl WavenumberBins {
    /// `count` bins evenly spaced in log k from the fundamental 2π/(nΔ) to the Nyquist π/Δ.
    pub fn logarithmic(n: usize, pixel_size: f64, count: usize) -> Result<Self> {
        if count == 0 || n < 4 {
            return Err(Error::Setting(
                "wavenumber bins need a count ≥ 1 and a grid of at least 4 pixels".into(),
            ));
        }
        let k0 = 2.0 * std::f64::consts::PI / (n as f64 * pixel_size);
        let k1 = std::f64::consts::PI / pixel_size;
        let edges = (0..=count)
            .map(|i| k0 * (k1 / k0).powf(i as f64 / count as f64))
            .collect();
        Ok(WavenumberBins { edges })
    }

    /// Number of bins.
    pub fn len(&self) -> usize {
        self.edges.len().saturating_sub(1)
    }

    /// Are there no bins?
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// The bin of wavenumber `k`, if any.
    pub fn bin_of(&self, k: f64) -> Option<usize> {
        if k < self.edges[0] || k >= self.edges[self.edges.len() - 1] {
            return None;
        }
        Some(self.edges.partition_point(|&e| e <= k) - 1)
    }

    /// Geometric centre of bin b.
    pub fn centre(&self, b: usize) -> f64 {
        (self.edges[b] * self.edges[b + 1]).sqrt()
    }
}

/// Holds the FFT plans for one tile size (its own, or the engine's); shared by all tiles and
/// threads.
pub struct FourierStatistics {
    n: usize,
    pixel_size: f64,
    bins: WavenumberBins,
    fft: SquareFft,
    /// Bin of every Fourier cell (row-major), `usize::MAX` outside all bins.
    cell_bin: Vec<usize>,
    /// |k| of every Fourier cell.
    cell_k: Vec<f64>,
    /// Shell indicator fields J_b = IDFT[1_b] / N, computed once.
    shells: Vec<Vec<f64>>,
}

impl std::fmt::Debug for FourierStatistics {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(
            f,
            "FourierStatistics(n={}, bins={})",
            self.n,
            self.bins.len()
        )
    }
}

/// Power spectrum of one tile (or of several combined).
#[derive(Debug, Clone, serde::Serialize)]
pub struct TilePowerSpectrum {
    /// Bin centres (rad⁻¹).
    pub k: Vec<f64>,
    /// Mean |k| of the cells in each bin (rad⁻¹).
    pub k_mean: Vec<f64>,
    /// P̂(k) per bin (sr · field²).
    pub power: Vec<f64>,
    /// Fourier cells per bin (both halves of the plane).
    pub modes: Vec<usize>,
    /// Combination weight (core weight of the tile, or the sum over tiles).
    pub weight: f64,
}

/// One bispectrum configuration: three bin indices b1 ≤ b2 ≤ b3 that can close a triangle.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
pub struct Triangle {
    pub b1: usize,
    pub b2: usize,
    pub b3: usize,
}

/// Bispectrum of one tile (or several combined).
#[derive(Debug, Clone, serde::Serialize)]
pub struct TileBispectrum {
    pub triangles: Vec<Triangle>,
    /// B̂ per triangle (sr² · field³).
    pub bispectrum: Vec<f64>,
    /// Number of closed triangles (Σ J1J2J3 · N) per configuration.
    pub triangle_counts: Vec<f64>,
    pub weight: f64,
}

impl FourierStatistics {
    /// Plans for an n × n tile of pixel size `pixel_size` radians with the given bins.
    pub fn new(n: usize, pixel_size: f64, bins: WavenumberBins) -> Result<Self> {
        if n < 4 {
            return Err(Error::Setting(format!("tile size {n} is below 4 pixels")));
        }
        Self::with_plans(SquareFft::new(n), pixel_size, bins)
    }

    /// As [`Self::new`] for the grid of `fft`, using those plans (the engine's, from
    /// [`crate::scattering::ScatteringEngine::tile_fft`], so one object owns the plans of a
    /// measurement).
    pub fn with_plans(fft: SquareFft, pixel_size: f64, bins: WavenumberBins) -> Result<Self> {
        let n = fft.size();
        if n < 4 {
            return Err(Error::Setting(format!("tile size {n} is below 4 pixels")));
        }
        if !(pixel_size.is_finite() && pixel_size > 0.0) {
            return Err(Error::Setting(format!(
                "pixel size must be positive, got {pixel_size}"
            )));
        }
        let mut cell_bin = vec![usize::MAX; n * n];
        let mut cell_k = vec![0.0; n * n];
        for iy in 0..n {
            for ix in 0..n {
                let k = wavenumber(ix, iy, n, pixel_size);
                cell_k[iy * n + ix] = k;
                if let Some(b) = bins.bin_of(k) {
                    cell_bin[iy * n + ix] = b;
                }
            }
        }
        let mut stats = FourierStatistics {
            n,
            pixel_size,
            bins,
            fft,
            cell_bin,
            cell_k,
            shells: Vec::new(),
        };
        stats.shells = stats.shell_fields(None);
        Ok(stats)
    }

    /// The bins.
    pub fn bins(&self) -> &WavenumberBins {
        &self.bins
    }

    fn check(&self, field: &[f64], taper: &[f64]) -> Result<()> {
        let nn = self.n * self.n;
        if field.len() != nn || taper.len() != nn {
            return Err(Error::Mismatch(format!(
                "tile arrays must hold {nn} values (got {} and {})",
                field.len(),
                taper.len()
            )));
        }
        if field
            .iter()
            .zip(taper)
            .any(|(f, a)| *a > 0.0 && !f.is_finite())
        {
            return Err(Error::Data(
                "tile field holds NaN or infinite values".into(),
            ));
        }
        Ok(())
    }

    /// F_k of a·(f − μ_a); μ_a the taper-weighted mean. Returns (F, Σa², Σa³).
    fn tapered_transform(
        &self,
        field: &[f64],
        taper: &[f64],
    ) -> Result<(Vec<Complex64>, f64, f64)> {
        self.check(field, taper)?;
        let sa: f64 = taper.iter().sum();
        if sa <= 0.0 {
            return Err(Error::Data("the tile's taper is zero everywhere".into()));
        }
        let mean = field
            .iter()
            .zip(taper)
            .map(|(f, a)| if *a > 0.0 { f * a } else { 0.0 })
            .sum::<f64>()
            / sa;
        let mut data: Vec<Complex64> = field
            .iter()
            .zip(taper)
            .map(|(f, a)| Complex64::new(if *a > 0.0 { a * (f - mean) } else { 0.0 }, 0.0))
            .collect();
        self.fft.forward(&mut data);
        let a2 = taper.iter().map(|a| a * a).sum();
        let a3 = taper.iter().map(|a| a * a * a).sum();
        Ok((data, a2, a3))
    }

    /// P̂(k) of one tile; `weight` is its combination weight (core weight).
    pub fn power_spectrum(
        &self,
        field: &[f64],
        taper: &[f64],
        weight: f64,
    ) -> Result<TilePowerSpectrum> {
        let (f, a2, _) = self.tapered_transform(field, taper)?;
        let nb = self.bins.len();
        let mut sum = vec![0.0; nb];
        let mut ksum = vec![0.0; nb];
        let mut modes = vec![0usize; nb];
        for (c, (&b, &k)) in f.iter().zip(self.cell_bin.iter().zip(&self.cell_k)) {
            if b != usize::MAX {
                sum[b] += c.norm_sqr();
                ksum[b] += k;
                modes[b] += 1;
            }
        }
        let d2 = self.pixel_size * self.pixel_size;
        Ok(TilePowerSpectrum {
            k: (0..nb).map(|b| self.bins.centre(b)).collect(),
            k_mean: (0..nb)
                .map(|b| {
                    if modes[b] > 0 {
                        ksum[b] / modes[b] as f64
                    } else {
                        f64::NAN
                    }
                })
                .collect(),
            power: (0..nb)
                .map(|b| {
                    if modes[b] > 0 {
                        d2 * sum[b] / modes[b] as f64 / a2
                    } else {
                        f64::NAN
                    }
                })
                .collect(),
            modes,
            weight,
        })
    }

    /// The bin triples b1 ≤ b2 ≤ b3 whose shells close at least one triangle on this grid
    /// (Σ_x J1 J2 J3 · N² ≥ 1; configurations with k3 ≥ k1 + k2 at the outer edges are skipped
    /// without counting).
    pub fn triangles(&self) -> Vec<Triangle> {
        let nb = self.bins.len();
        let e = &self.bins.edges;
        let nn = (self.n * self.n) as f64;
        let mut out = Vec::new();
        for b1 in 0..nb {
            for b2 in b1..nb {
                for b3 in b2..nb {
                    if e[b3] >= e[b1 + 1] + e[b2 + 1] {
                        continue;
                    }
                    let (j1, j2, j3) = (&self.shells[b1], &self.shells[b2], &self.shells[b3]);
                    let count: f64 =
                        (0..j1.len()).map(|x| j1[x] * j2[x] * j3[x]).sum::<f64>() * nn * nn;
                    if count > 0.5 {
                        out.push(Triangle { b1, b2, b3 });
                    }
                }
            }
        }
        out
    }

    /// Shell-filtered real fields IDFT[F · 1_b] / N for every bin.
    fn shell_fields(&self, f: Option<&[Complex64]>) -> Vec<Vec<f64>> {
        let nn = self.n * self.n;
        (0..self.bins.len())
            .map(|b| {
                let mut d: Vec<Complex64> = (0..nn)
                    .map(|i| {
                        if self.cell_bin[i] == b {
                            f.map_or(Complex64::new(1.0, 0.0), |f| f[i])
                        } else {
                            Complex64::new(0.0, 0.0)
                        }
                    })
                    .collect();
                self.fft.inverse_unnormalised(&mut d);
                d.iter().map(|c| c.re / nn as f64).collect()
            })
            .collect()
    }

    /// B̂ of one tile for `triangles` (from [`FourierStatistics::triangles`]).
    pub fn bispectrum(
        &self,
        field: &[f64],
        taper: &[f64],
        weight: f64,
        triangles: &[Triangle],
    ) -> Result<TileBispectrum> {
        let (f, _, a3) = self.tapered_transform(field, taper)?;
        let i = self.shell_fields(Some(&f));
        let j = &self.shells;
        let nn = (self.n * self.n) as f64;
        let d4 = self.pixel_size.powi(4);
        let mut values = Vec::with_capacity(triangles.len());
        let mut counts = Vec::with_capacity(triangles.len());
        for t in triangles {
            let num: f64 = (0..i[0].len())
                .map(|x| i[t.b1][x] * i[t.b2][x] * i[t.b3][x])
                .sum();
            let den: f64 = (0..j[0].len())
                .map(|x| j[t.b1][x] * j[t.b2][x] * j[t.b3][x])
                .sum();
            counts.push(den * nn * nn);
            values.push(if den.abs() * nn * nn > 0.5 {
                d4 * num / (den * a3)
            } else {
                f64::NAN
            });
        }
        Ok(TileBispectrum {
            triangles: triangles.to_vec(),
            bispectrum: values,
            triangle_counts: counts,
            weight,
        })
    }
}

/// Σ_t w_t v_t / Σ_t w_t over tiles, element by element, in the given order; also Σ w.
fn weighted_mean<'a>(
    tiles: impl Iterator<Item = (f64, &'a [f64])> + Clone,
) -> Result<(Vec<f64>, f64)> {
    let w: f64 = tiles.clone().map(|(wt, _)| wt).sum();
    let len = tiles
        .clone()
        .next()
        .map(|(_, v)| v.len())
        .ok_or_else(|| Error::Data("no tiles to combine".into()))?;
    if w <= 0.0 {
        return Err(Error::Data(
            "tiles to combine have zero total weight".into(),
        ));
    }
    let mut mean = vec![0.0; len];
    for (wt, values) in tiles {
        for (m, v) in mean.iter_mut().zip(values) {
            *m += wt * v / w;
        }
    }
    Ok((mean, w))
}

/// Weighted mean of per-tile power spectra (weights: core weights), in the given order.
pub fn combine_power(tiles: &[TilePowerSpectrum]) -> Result<TilePowerSpectrum> {
    let (power, weight) = weighted_mean(tiles.iter().map(|t| (t.weight, t.power.as_slice())))?;
    Ok(TilePowerSpectrum {
        power,
        weight,
        ..tiles[0].clone()
    })
}

/// Weighted mean of per-tile bispectra (weights: core weights), in the given order.
pub fn combine_bispectra(tiles: &[TileBispectrum]) -> Result<TileBispectrum> {
    let (bispectrum, weight) =
        weighted_mean(tiles.iter().map(|t| (t.weight, t.bispectrum.as_slice())))?;
    Ok(TileBispectrum {
        bispectrum,
        weight,
        ..tiles[0].clone()
    })
}
