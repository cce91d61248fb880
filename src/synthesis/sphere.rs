//! Synthesis of a HEALPix map on a masked footprint whose pooled scattering statistics match a
//! target.
//!
//! # Problem
//!
//! The variables are the values m_p of the map pixels p inside the footprint (weight > 0);
//! every other pixel keeps its start value and is never changed. The statistics are the pooled
//! coefficients of [`crate::measure::measurement::SphereMeasurer::measure`]: per tile t, the field is
//! f_t = S_t m (the tile sampling as a sparse linear operator,
//! [`crate::tiles::sampling::TileSamplingOperator`]), the taper a_t = footprint × border window and the
//! pooling weight w_t = a_t·Ω·[core] are fixed by the footprint, and the masked-tile transform
//! returns per coefficient i a weighted sum Σ_t,i and a kept weight W_t,i (which depends on the
//! taper only). Pooled over tiles (in plan order, [`crate::scattering::pooling`]):
//!
//! c_i = Σ_t Σ_t,i / Σ_t W_t,i (and the variance c_1 = Σ_t Σ_t,1 / W_1 − c_0²).
//!
//! The loss is L(m) = Σ_k ((s_k − t_k)/σ_k)² on the full set without the mean (s = c_1..) or
//! the orientation-harmonic summary without the mean ([`super::StatisticChoice`]), with σ_k = |t_k| or given, as in the flat
//! synthesis ([`super`]).
//!
//! # Sign-sensitive terms
//!
//! The coefficients above do not change under m → 2μ − m, so they leave the sign of the
//! skewness free. With [`SynthesisSettings::field_envelope_correlation`] the statistics are
//! followed by the J field–envelope correlations
//!
//! C_j = (1/L) Σ_l (Σ_t E_t,jl) / (Σ_t W_t,jl), E_t,jl = 4^{d_j} Σ_X W̃_j I_t u_t,jl,
//!
//! the tile sums of [`super::tile_gradient`] (I_t = a_t(f_t − μ_a), u the normalised envelope,
//! W the pooling weight of S1(j,l)): the masked-sky version of the flat synthesis's C_j. Their
//! relative normalisation is the Cauchy–Schwarz bound σ_j = √(c_var · (1/L) Σ_l P(j,l)), as in
//! the flat synthesis. After them comes the one-point member of the family,
//! C_pix = Σ_t Σ_x w I_t|I_t| / Σ_t Σ_x w (the field correlated with its own modulus), with
//! σ = c_var (|⟨x|x|⟩| ≤ ⟨x²⟩); on the lognormal check of `tests/synthesis_texture_against_scipy.rs`
//! it raised the result's skewness from 1.38 to 1.53 (target 1.99).
//! Adjoint: ∂L/∂E_t,jl = (∂L/∂C_j)/(L Σ_t W_t,jl) and ∂L/∂E_t,pix = (∂L/∂C_pix)/Σ_t Σ w for
//! every tile, passed to
//! [`super::DifferentiableScattering::backward_tile_with_correlations`]. For a target map the
//! correlations are computed on the target with this differentiable path (pixels outside the
//! footprint set to the target's pooled mean).
//!
//! # One-point shape
//!
//! With the same switch the last two statistics are the skewness γ₁ and the kurtosis β₂ of the
//! tile fields f_t, every plane pixel weighted by its pooling weight w (taper × solid angle ×
//! core), i.e. of the one-point distribution the pooled coefficients average over
//! ([`super::one_point`]; per-tile central sums merged in plan order). Their scales are the
//! target's Pearson bound √(β₂ − 1) ≥ |γ₁| (Pearson 1916, Phil. Trans. A 216, 429) and β₂
//! itself. Their gradient is the per-pixel polynomial of [`super::one_point::ShapeAdjoint`] on
//! every tile grid, added to the tile's backward pass before the sampling adjoint. Why: on a
//! small footprint the coefficients and the correlations above leave the tails of the
//! one-point distribution free. On the NSIDE 64 lognormal check of
//! `tests/synthesis_texture_against_scipy.rs` (3286 pixels, J = 3, 64² tiles, skewness 1.99,
//! excess kurtosis 5.69) every statistic was matched (loss 2.8 → 3e-11) with skewness 1.05 and
//! excess kurtosis 1.78 over the cap, and 1.10 and 1.87 over the pixels of footprint weight 1
//! alone (target there 1.96, 5.37), so the taper band is not the cause; the tile fields
//! themselves had skewness 1.06 (target's 1.98), so neither is the sampling. Matching γ₁ alone
//! gave skewness 2.00 but excess kurtosis 8.0, β₂ alone skewness 1.28 and kurtosis 5.83; both:
//! 1.98 and 5.68 with the peak counts still within Poisson errors (Portilla & Simoncelli 2000,
//! IJCV 40, 49, match these marginal moments in texture synthesis for the same reason).
//!
//! # Gradient (chain rule, reverse mode)
//!
//! ∂L/∂s_k = 2 (s_k − t_k)/σ_k²; the summary's adjoint (or the identity for the full set) gives ∂L/∂c_i; since the W_i do not
//! depend on m, ∂L/∂Σ_i = (∂L/∂c_i)/W_i for every tile alike, plus −2 c_0 (∂L/∂c_1)/W_0 on the
//! mean's sum (from the variance's −c_0²). These per-sum weights go into the masked-tile
//! backward pass ([`super::DifferentiableScattering::backward_tile`]), which returns ∂L/∂f_t on
//! the tile grid, and the adjoint of the sampling scatters it back to the sphere:
//! ∂L/∂m = Σ_t S_tᵀ ∂L/∂f_t (Griewank & Walther 2008, *Evaluating Derivatives*, ch. 3). Tiles are
//! processed in parallel in chunks, and their sums and scatter-adds are applied in plan order,
//! so loss and gradient are bitwise identical for any thread count. One evaluation costs two
//! forward passes and one backward pass per tile (the forward intermediates are recomputed
//! rather than kept for every tile at once).
//!
//! # Optimisation and start
//!
//! L-BFGS with the Moré–Thuente line search (`super::minimise`, the flat synthesis's
//! optimiser), in the units x = (m − μ_t)/σ_t of the target's pooled mean and standard
//! deviation. Start maps (seeded): a Gaussian sky with the target map's pseudo-C_ℓ on the
//! footprint (w2-corrected, Hivon et al. 2002 first-order correction as in
//! [`crate::harmonics::spectra::angular_spectrum`]) synthesised by [`crate::simulate::skies::SkyRecipe`], plus the
//! target mean; or white noise of the target's mean and variance. The reflection remedy of the
//! flat synthesis is not applied: reflecting the footprint alone would change the tiles that
//! straddle its edge.

use super::{
    checked_target_variance, correlation_bounds, matched_statistics, matched_statistics_adjoint,
    minimise, relative_loss, MatchedTarget, Normalisation, OptimisationReport, StartField,
    StatisticChoice, SummaryMap, SynthesisSettings,
};
use crate::harmonics::spectrum::AngularSpectrum;
use crate::harmonics::HarmonicTransform;
use crate::measure::measurement::{MeasurementSettings, SphereMeasurer};
use crate::scattering::pooling::{combine_tiles, TileSums};
use crate::simulate::skies::SkyRecipe;
use crate::sky::footprint::Footprint;
use crate::sky::pixelization::Pixelization;
use crate::sky::skymap::SkyMap;
use crate::tiles::sampling::{TileSampler, TileSamplingOperator};
use crate::{Error, Result};
use rand::SeedableRng;
use rand_chacha::ChaCha20Rng;
use rand_distr::{Distribution, StandardNormal};
use rayon::prelude::*;

use super::one_point::CentralSums;
use super::tile_gradient::{pooled_values, pooled_values_adjoint};
use super::{DifferentiableScattering, TileGeometry};

/// Sampling operators and tile geometries are kept for every tile when together they need at
/// most about this many bytes; otherwise they are rebuilt, tile by tile, at each evaluation.
const CACHE_BYTES: usize = 3 << 30;

/// What the synthesised map must reproduce on the footprint.
#[derive(Debug, Clone, PartialEq)]
pub struct SphereTarget {
    /// The matched statistics, their widths and the target's pooled mean and standard
    /// deviation.
    pub matched: MatchedTarget,
    /// Pseudo-C_ℓ of the target map on the footprint, when the target is a map.
    pub spectrum: Option<AngularSpectrum>,
}

/// Result of a sphere synthesis.
#[derive(Debug, Clone)]
pub struct SphereSynthesisOutcome {
    /// The synthesised map: optimised inside the footprint, the start map elsewhere.
    pub map: SkyMap,
    /// The start map.
    pub start: SkyMap,
    /// How it converged (its statistics are the matched statistics of `map`; the largest
    /// relative deviation uses σ = |t|).
    pub report: OptimisationReport,
}

/// One tile's fixed pieces: taper, pooling weight and (when cached) its sampling operator and
/// estimator geometry.
struct SphereTile {
    index: usize,
    taper: Vec<f64>,
    weight: Vec<f64>,
    cached: Option<(TileSamplingOperator, TileGeometry)>,
}

/// A tile's operator and geometry, cached or built for one use.
type TileParts<'a> = std::borrow::Cow<'a, (TileSamplingOperator, TileGeometry)>;

/// Synthesis of HEALPix maps on one footprint with one set of measurement settings; owns the
/// measurer (plan, engine), the differentiable tile transform and the tiles' fixed pieces.
pub struct SphereSynthesis {
    measurer: SphereMeasurer,
    transform: DifferentiableScattering,
    settings: SynthesisSettings,
    footprint: Footprint,
    /// A map of the same pixelization with every pixel valid: the sampling geometry.
    geometry: SkyMap,
    tiles: Vec<SphereTile>,
    variables: Vec<usize>,
    summary: Option<SummaryMap>,
}

impl std::fmt::Debug for SphereSynthesis {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(
            f,
            "SphereSynthesis({} tiles, {} pixels optimised)",
            self.tiles.len(),
            self.variables.len()
        )
    }
}

/// Refuses settings a sphere synthesis cannot run with.
fn check_sphere_settings(settings: &SynthesisSettings) -> Result<()> {
    settings.check_optimiser()?;
    if settings.power_spectrum_bins.is_some() {
        return Err(Error::Setting(
            "the power-spectrum term is only available for flat fields".into(),
        ));
    }
    Ok(())
}

/// Keeps every tile's sampling operator and estimator geometry when together they fit in
/// [`CACHE_BYTES`] (tiles of n × n pixels); otherwise they are rebuilt at each evaluation.
fn cache_tile_parts(
    tiles: &mut [SphereTile],
    sampler: &TileSampler<'_>,
    transform: &DifferentiableScattering,
    measurement: &MeasurementSettings,
    n: usize,
) -> Result<()> {
    // operator rows read up to `stencil_pixels` pixels (16 bytes per entry); the geometry
    // holds about 2J + J(J−1)/2 + 4 grids
    let jn = measurement.scales;
    let stencil = measurement.sampling.stencil_pixels();
    let per_tile = n * n * (stencil * 16 + 8 * (2 * jn + jn * jn.saturating_sub(1) / 2 + 4));
    if tiles.len() * per_tile <= CACHE_BYTES {
        let parts: Vec<(TileSamplingOperator, TileGeometry)> = tiles
            .par_iter()
            .map(|t| {
                Ok((
                    sampler.operator(t.index)?,
                    transform.tile_geometry(&t.taper, &t.weight, &measurement.transform)?,
                ))
            })
            .collect::<Result<_>>()?;
        for (t, part) in tiles.iter_mut().zip(parts) {
            t.cached = Some(part);
        }
    }
    Ok(())
}

impl SphereSynthesis {
    /// Plans the tiles of `footprint` for maps of pixelization `map` with `measurement`
    /// settings and prepares the synthesis. The power-spectrum term of the flat synthesis is
    /// not available on the sphere; the field–envelope correlations are (module
    /// documentation). The gradient runs through the direct sampling operator
    /// ([`TileSampler::operator`]), so plane pixels left to the default (`pixel_arcmin`
    /// `None`) are one map spacing here, not the measurement's band-limited three; coarser
    /// ones are refused.
    pub fn new(
        map: Pixelization,
        footprint: &Footprint,
        measurement: MeasurementSettings,
        settings: SynthesisSettings,
    ) -> Result<Self> {
        check_sphere_settings(&settings)?;
        footprint.check_map_nside(map.nside())?;
        let footprint = footprint.to_ordering(map.ordering())?;
        let measurement = measurement.at_map_spacing_unless_set(map);
        let summary = match settings.statistics {
            StatisticChoice::Full => None,
            StatisticChoice::Summary => Some(SummaryMap::new(
                measurement.scales,
                measurement.orientations,
            )?),
        };
        let measurer = SphereMeasurer::new(map, &footprint, measurement)?;
        let transform = DifferentiableScattering::new(
            measurer.plan().tile_pixels(),
            measurement.scales,
            measurement.orientations,
        )?;
        let geometry = SkyMap::new(map, vec![0.0; map.npix() as usize])?;
        let sampler =
            TileSampler::new(measurer.plan(), &geometry, &footprint, measurement.sampling)?;
        let fixed: Vec<Option<SphereTile>> = sampler.map_tiles(|grids| {
            // exactly as SphereMeasurer::measure tapers and weights the tile
            Ok(measurer.taper_and_weight(&grids)?.map(|t| SphereTile {
                index: grids.tile,
                taper: t.taper,
                weight: t.weight,
                cached: None,
            }))
        })?;
        let mut tiles: Vec<SphereTile> = fixed.into_iter().flatten().collect();
        if tiles.is_empty() {
            return Err(Error::Data(
                "no tile has positive pooling weight: the apodized footprint is empty".into(),
            ));
        }
        cache_tile_parts(
            &mut tiles,
            &sampler,
            &transform,
            &measurement,
            measurer.plan().tile_pixels(),
        )?;
        drop(sampler);
        let variables: Vec<usize> = footprint
            .weights()
            .iter()
            .enumerate()
            .filter(|(_, &w)| w > 0.0)
            .map(|(p, _)| p)
            .collect();
        Ok(Self {
            measurer,
            transform,
            settings,
            footprint,
            geometry,
            tiles,
            variables,
            summary,
        })
    }

    /// The measurer whose pooled coefficients are matched.
    pub fn measurer(&self) -> &SphereMeasurer {
        &self.measurer
    }

    /// The footprint, in the map's ordering.
    pub fn footprint(&self) -> &Footprint {
        &self.footprint
    }

    /// The settings.
    pub fn settings(&self) -> &SynthesisSettings {
        &self.settings
    }

    /// Number of tiles with positive pooling weight.
    pub fn tile_count(&self) -> usize {
        self.tiles.len()
    }

    /// Plane pixels per tile side of the plan.
    pub fn tile_pixels(&self) -> usize {
        self.measurer.plan().tile_pixels()
    }

    /// The optimised pixels (footprint weight > 0), in the map's ordering, increasing.
    pub fn variables(&self) -> &[usize] {
        &self.variables
    }

    /// Number of matched statistics.
    pub fn statistic_count(&self) -> usize {
        let set = match &self.summary {
            None => self.measurer.engine().labels().len() - 1,
            Some(m) => m.len(),
        };
        set + self.correlation_count() + self.shape_count()
    }

    /// Number of one-point shape statistics matched: skewness γ₁ and kurtosis β₂ of the tile
    /// fields (module documentation) with the sign-sensitive terms on, else none.
    pub fn shape_count(&self) -> usize {
        if self.settings.field_envelope_correlation {
            2
        } else {
            0
        }
    }

    /// Number of sign-sensitive correlations matched (J + 1, or 0 when they are off).
    pub fn correlation_count(&self) -> usize {
        if self.settings.field_envelope_correlation {
            self.measurer.settings().scales + 1
        } else {
            0
        }
    }

    /// Pooled field–envelope correlations C_j from combined sums and combined E (module
    /// documentation).
    fn correlations(&self, total: &TileSums, envelope: &[f64]) -> Vec<f64> {
        let (jn, ln) = (
            self.measurer.settings().scales,
            self.measurer.settings().orientations,
        );
        let layout = crate::scattering::layout::CoefficientLayout::new(jn, ln);
        let mut c: Vec<f64> = (0..jn)
            .map(|j| {
                (0..ln)
                    .map(|l| {
                        envelope[layout.pair_offset(j, l)] / total.weights[layout.first_order(j, l)]
                    })
                    .sum::<f64>()
                    / ln as f64
            })
            .collect();
        c.push(envelope[jn * ln] / total.weights[0]);
        c
    }

    fn select(&self, c: &[f64]) -> Vec<f64> {
        matched_statistics(self.summary.as_ref(), c)
    }

    fn select_adjoint(&self, c: &[f64], ds: &[f64]) -> Vec<f64> {
        matched_statistics_adjoint(self.summary.as_ref(), c, ds)
    }

    fn check_map(&self, values: &[f64]) -> Result<()> {
        if values.len() != self.geometry.values().len() {
            return Err(Error::Mismatch(format!(
                "{} map values given, the synthesis works on {} pixels",
                values.len(),
                self.geometry.values().len()
            )));
        }
        crate::error::check_finite(values, |p| {
            format!("map value at pixel {p} is not a finite number")
        })?;
        Ok(())
    }

    /// The operator and geometry of a tile: cached, or built now from `sampler`.
    fn parts<'s>(
        &'s self,
        tile: &'s SphereTile,
        sampler: Option<&TileSampler<'_>>,
    ) -> Result<TileParts<'s>> {
        match (&tile.cached, sampler) {
            (Some(parts), _) => Ok(std::borrow::Cow::Borrowed(parts)),
            (None, Some(s)) => Ok(std::borrow::Cow::Owned((
                s.operator(tile.index)?,
                self.transform.tile_geometry(
                    &tile.taper,
                    &tile.weight,
                    &self.measurer.settings().transform,
                )?,
            ))),
            (None, None) => Err(Error::Data("tile sampling operator missing".into())),
        }
    }

    /// Runs `work` on every tile's operator, geometry and pooling weight in parallel, in chunks,
    /// and hands the results with the tile's operator to `consume` one by one in plan order.
    fn for_each_tile<R, W, C>(&self, work: W, mut consume: C) -> Result<()>
    where
        R: Send,
        W: Fn(&TileSamplingOperator, &TileGeometry, &[f64]) -> Result<R> + Sync,
        C: FnMut(&TileSamplingOperator, R) -> Result<()>,
    {
        let uncached = self.tiles.iter().any(|t| t.cached.is_none());
        let sampler = if uncached {
            Some(TileSampler::new(
                self.measurer.plan(),
                &self.geometry,
                &self.footprint,
                self.measurer.settings().sampling,
            )?)
        } else {
            None
        };
        let chunk = (4 * rayon::current_num_threads()).max(8);
        for group in self.tiles.chunks(chunk) {
            let results: Vec<(TileParts<'_>, R)> = group
                .par_iter()
                .map(|t| {
                    let parts = self.parts(t, sampler.as_ref())?;
                    let r = work(&parts.0, &parts.1, &t.weight)?;
                    Ok((parts, r))
                })
                .collect::<Result<_>>()?;
            for (parts, r) in results {
                consume(&parts.0, r)?;
            }
        }
        Ok(())
    }

    /// Combined tile sums of a full map (map ordering), the combined field–envelope sums and
    /// the merged one-point central sums, combined in plan order.
    fn combined_sums(&self, values: &[f64]) -> Result<(TileSums, Vec<f64>, CentralSums)> {
        let mut sums = Vec::with_capacity(self.tiles.len());
        let mut envelope: Vec<f64> = Vec::new();
        let mut one_point = CentralSums::default();
        self.for_each_tile(
            |op, geometry, weight| {
                let field = op.apply(values)?;
                let pass = self.transform.forward_tile_with(geometry, &field)?;
                let moments = CentralSums::of(&field, weight);
                Ok((pass.field_envelope_sums().to_vec(), pass.sums, moments))
            },
            |_, (e, s, m)| {
                if envelope.is_empty() {
                    envelope = e;
                } else {
                    envelope.iter_mut().zip(&e).for_each(|(a, b)| *a += b);
                }
                sums.push(s);
                one_point = one_point.merge(m);
                Ok(())
            },
        )?;
        Ok((combine_tiles(&sums)?, envelope, one_point))
    }

    /// The one-point shape statistics matched: [γ₁, β₂] ([`super::one_point`]).
    fn shape_values(one_point: &CentralSums) -> Vec<f64> {
        one_point.shape().to_vec()
    }

    /// Pooled coefficients and the matched statistics (with correlations when on).
    fn pooled(&self, values: &[f64]) -> Result<(TileSums, Vec<f64>, Vec<f64>, CentralSums)> {
        self.check_map(values)?;
        let (total, envelope, one_point) = self.combined_sums(values)?;
        let c = pooled_values(&total);
        crate::error::check_finite(&c, |i| {
            format!("pooled coefficient {i} has no pooling weight on this footprint (use fewer scales or larger tiles)")
        })?;
        let mut s = self.select(&c);
        if self.settings.field_envelope_correlation {
            s.extend(self.correlations(&total, &envelope));
            s.extend(Self::shape_values(&one_point));
        }
        Ok((total, c, s, one_point))
    }

    /// The pooled coefficients (engine label order) of a full map.
    pub fn pooled_coefficients(&self, values: &[f64]) -> Result<Vec<f64>> {
        Ok(self.pooled(values)?.1)
    }

    /// The pooled field–envelope correlations C_j of a full map (module documentation),
    /// whether or not they are matched.
    pub fn field_envelope_correlations(&self, values: &[f64]) -> Result<Vec<f64>> {
        self.check_map(values)?;
        let (total, envelope, _) = self.combined_sums(values)?;
        Ok(self.correlations(&total, &envelope))
    }

    /// The matched statistics of a full map (the chosen set, then the correlations when on).
    pub fn statistics(&self, values: &[f64]) -> Result<Vec<f64>> {
        Ok(self.pooled(values)?.2)
    }

    /// Loss L(m) = Σ ((s_k − t_k)/σ_k)² of a full map and its gradient ∂L/∂m_p for every pixel
    /// (module documentation); pixels no tile reads get 0.
    pub fn loss_and_gradient(
        &self,
        target: &SphereTarget,
        values: &[f64],
    ) -> Result<(f64, Vec<f64>)> {
        self.check_map(values)?;
        if target.matched.values.len() != self.statistic_count()
            || target.matched.sigma.len() != target.matched.values.len()
        {
            return Err(Error::Mismatch(format!(
                "target has {} statistics, the synthesis matches {}",
                target.matched.values.len(),
                self.statistic_count()
            )));
        }
        let (total, c, s, one_point) = self.pooled(values)?;
        let (loss, ds) = relative_loss(&s, &target.matched.values, &target.matched.sigma);
        let set_len = s.len() - self.correlation_count() - self.shape_count();
        let dc = self.select_adjoint(&c, &ds[..set_len]);
        // ∂L/∂f_x of the one-point shape, the same polynomial for every tile
        let shape_adjoint = (self.shape_count() > 0).then(|| {
            let first = set_len + self.correlation_count();
            one_point.adjoint([ds[first], ds[first + 1]])
        });
        // ∂L/∂Σ_i, the same for every tile
        let sum_weights = pooled_values_adjoint(&total, &dc)?;
        // ∂L/∂E_jl = (∂L/∂C_j) / (L W_jl), the same for every tile
        let envelope_weights: Option<Vec<f64>> = (self.correlation_count() > 0).then(|| {
            let (jn, ln) = (
                self.measurer.settings().scales,
                self.measurer.settings().orientations,
            );
            let mut e: Vec<f64> = ds[set_len..set_len + jn]
                .iter()
                .enumerate()
                .flat_map(|(j, d)| {
                    let total = &total;
                    (0..ln).map(move |l| {
                        let w = total.weights[crate::scattering::layout::CoefficientLayout::new(
                            jn, ln,
                        )
                        .first_order(j, l)];
                        if w > 0.0 {
                            d / (ln as f64 * w)
                        } else {
                            0.0
                        }
                    })
                })
                .collect();
            e.push(ds[set_len + jn] / total.weights[0]);
            e
        });
        let mut grad = vec![0.0; values.len()];
        self.for_each_tile(
            |op, geometry, weight| {
                let field = op.apply(values)?;
                let pass = self.transform.forward_tile_with(geometry, &field)?;
                let mut tile_grad = self.transform.backward_tile_with_correlations(
                    &pass,
                    &sum_weights,
                    envelope_weights.as_deref(),
                )?;
                if let Some(a) = &shape_adjoint {
                    a.add_to(&field, weight, &mut tile_grad);
                }
                Ok(tile_grad)
            },
            |op, tile_grad| op.adjoint_add(&tile_grad, &mut grad),
        )?;
        Ok((loss, grad))
    }

    /// σ_k for target values `values` (the chosen set, then the correlations and the shape
    /// when on; full pooled coefficients `c` give the correlations' Cauchy–Schwarz bound, the
    /// target's kurtosis β₂ the skewness's Pearson bound |γ₁| ≤ √(β₂ − 1)).
    fn sigma_for(&self, values: &[f64], c: &[f64], kurtosis: f64) -> Result<Vec<f64>> {
        let sigma = match &self.settings.normalisation {
            Normalisation::Given(s) => {
                if s.len() != values.len() {
                    return Err(Error::Mismatch(format!(
                        "{} normalisation scales given, the chosen statistics have {}",
                        s.len(),
                        values.len()
                    )));
                }
                s.clone()
            }
            Normalisation::Relative => {
                let set_len = values.len() - self.correlation_count() - self.shape_count();
                let mut sigma: Vec<f64> = match &self.summary {
                    Some(m) => m.distance_scales(&values[..set_len]),
                    None => values[..set_len].iter().map(|t| t.abs()).collect(),
                };
                let (jn, ln) = (
                    self.measurer.settings().scales,
                    self.measurer.settings().orientations,
                );
                if self.correlation_count() > 0 {
                    sigma.extend(correlation_bounds(c, jn, ln));
                    // |⟨x|x|⟩| ≤ ⟨x²⟩
                    sigma.push(c[1]);
                }
                if self.shape_count() > 0 {
                    // γ₁² ≤ β₂ − 1 (Pearson 1916), then β₂ relative to itself
                    sigma.extend_from_slice(&[(kurtosis - 1.0).sqrt(), kurtosis]);
                }
                sigma
            }
        };
        if let Some(i) = sigma.iter().position(|v| !(v.is_finite() && *v > 0.0)) {
            return Err(Error::Data(format!(
                "target statistic {i} is {}: its normalisation scale must be positive",
                values[i]
            )));
        }
        Ok(sigma)
    }

    /// Target from full pooled coefficients (engine label order), e.g. from a coefficient file.
    /// Not with the field–envelope correlations, which need a target map.
    pub fn target_from_coefficients(&self, coefficients: &[f64]) -> Result<SphereTarget> {
        if self.settings.field_envelope_correlation {
            return Err(Error::Setting(
                "the field-envelope term needs a target map, not a coefficient file".into(),
            ));
        }
        self.target_from_pooled(coefficients, Vec::new(), f64::NAN)
    }

    /// Target from full pooled coefficients and the target's sign-sensitive terms and shape
    /// (empty when off; `kurtosis` the target's β₂ for the skewness's scale).
    fn target_from_pooled(
        &self,
        coefficients: &[f64],
        correlations: Vec<f64>,
        kurtosis: f64,
    ) -> Result<SphereTarget> {
        let variance = checked_target_variance(coefficients, self.measurer.engine().labels())?;
        let mut values = self.select(coefficients);
        values.extend(correlations);
        let sigma = self.sigma_for(&values, coefficients, kurtosis)?;
        Ok(SphereTarget {
            matched: MatchedTarget::of_coefficients(values, sigma, coefficients, variance),
            spectrum: None,
        })
    }

    /// Target from a map of the same NSIDE, measured on the synthesis footprint with the same
    /// settings (through [`SphereMeasurer::measure`]), with its pseudo-C_ℓ for a Gaussian start.
    pub fn target_from_map(&self, map: &SkyMap) -> Result<SphereTarget> {
        let pix = self.geometry.pixelization();
        if map.nside() != pix.nside() {
            return Err(Error::Mismatch(format!(
                "target map NSIDE {} does not match the synthesis NSIDE {}",
                map.nside(),
                pix.nside()
            )));
        }
        let map = map.to_ordering(pix.ordering())?;
        if let Some(p) = self.variables.iter().find(|&&p| !map.valid()[p]) {
            return Err(Error::Data(format!(
                "the target map has no valid value at footprint pixel {p}"
            )));
        }
        let stats = self.measurer.measure(&map, &self.footprint)?;
        let c: Vec<f64> = stats
            .coefficients
            .coefficients
            .iter()
            .map(|c| c.value)
            .collect();
        let (extra, kurtosis) = if self.settings.field_envelope_correlation {
            let filled = map.values_filled(c[0]);
            let (total, envelope, one_point) = self.combined_sums(&filled)?;
            let mut extra = self.correlations(&total, &envelope);
            extra.extend(Self::shape_values(&one_point));
            (extra, one_point.shape()[1])
        } else {
            (Vec::new(), f64::NAN)
        };
        let mut target = self.target_from_pooled(&c, extra, kurtosis)?;
        target.spectrum = Some(footprint_spectrum(&map, &self.footprint)?);
        Ok(target)
    }

    /// The start map (seeded): Gaussian sky with the target's pseudo-C_ℓ plus its mean, or
    /// white noise of its mean and variance (module documentation). RING-ordered skies are
    /// re-ordered to the synthesis ordering.
    pub fn start_map(&self, target: &SphereTarget, start: StartField, seed: u64) -> Result<SkyMap> {
        let pix = self.geometry.pixelization();
        match start {
            StartField::White => {
                let mut rng = ChaCha20Rng::seed_from_u64(seed);
                let values: Vec<f64> = (0..pix.npix())
                    .map(|_| {
                        let z: f64 = StandardNormal.sample(&mut rng);
                        target.matched.mean + target.matched.standard_deviation * z
                    })
                    .collect();
                SkyMap::new(pix, values)
            }
            StartField::Gaussian => {
                let spectrum = target.spectrum.clone().ok_or_else(|| {
                    Error::Setting(
                        "a Gaussian start needs a target map (its power spectrum); use a white start with a coefficient file".into(),
                    )
                })?;
                let sky = gaussian_sky(pix.nside(), spectrum, seed)?;
                let values: Vec<f64> = sky
                    .values()
                    .iter()
                    .map(|v| v + target.matched.mean)
                    .collect();
                SkyMap::new(sky.pixelization(), values)?.to_ordering(pix.ordering())
            }
        }
    }

    /// Runs the synthesis from the settings' start map.
    pub fn synthesise(&self, target: &SphereTarget) -> Result<SphereSynthesisOutcome> {
        let start = self.start_map(target, self.settings.start, self.settings.seed)?;
        self.synthesise_from(target, start)
    }

    /// Runs the synthesis from a given start map (same pixelization, finite everywhere).
    pub fn synthesise_from(
        &self,
        target: &SphereTarget,
        start: SkyMap,
    ) -> Result<SphereSynthesisOutcome> {
        let start = start.to_ordering(self.geometry.ordering())?;
        if start.nside() != self.geometry.nside() {
            return Err(Error::Mismatch(format!(
                "start map NSIDE {} does not match the synthesis NSIDE {}",
                start.nside(),
                self.geometry.nside()
            )));
        }
        let base: Vec<f64> = start.values().to_vec();
        self.check_map(&base)?;
        let (mu, sd) = (target.matched.mean, target.matched.standard_deviation);
        let x0: Vec<f64> = self
            .variables
            .iter()
            .map(|&p| (base[p] - mu) / sd)
            .collect();
        let with = |x: &[f64]| -> Vec<f64> {
            let mut m = base.clone();
            for (&p, v) in self.variables.iter().zip(x) {
                m[p] = mu + sd * v;
            }
            m
        };
        let (initial_loss, _) = self.loss_and_gradient(target, &base)?;
        let evaluate = |x: &[f64]| -> Result<(f64, Vec<f64>)> {
            let (loss, g) = self.loss_and_gradient(target, &with(x))?;
            Ok((loss, self.variables.iter().map(|&p| g[p] * sd).collect()))
        };
        let run = minimise(&evaluate, x0, initial_loss, &self.settings)?;
        let values = with(&run.best);
        let (final_loss, _) = self.loss_and_gradient(target, &values)?;
        let statistics = self.statistics(&values)?;
        Ok(SphereSynthesisOutcome {
            map: SkyMap::new(self.geometry.pixelization(), values)?,
            start,
            report: OptimisationReport::new(
                run,
                (initial_loss, final_loss),
                statistics,
                (&target.matched.values, &target.matched.sigma),
            ),
        })
    }
}

/// Pseudo-C_ℓ of `map` on `footprint` (w2-corrected, [`crate::harmonics::spectra::angular_spectrum`], ℓmax
/// = 3·NSIDE − 1, 3 Jacobi iterations, per ℓ), monopole and dipole set to 0 and negative
/// estimates clipped to 0 so that it can colour a Gaussian sky.
pub fn footprint_spectrum(map: &SkyMap, footprint: &Footprint) -> Result<AngularSpectrum> {
    let nside = map.nside() as usize;
    let sht = HarmonicTransform::new(nside, 3 * nside - 1)?;
    let measured = crate::harmonics::spectra::angular_spectrum(map, Some(footprint), &sht, 3, 1)?;
    let cl = measured
        .cl
        .iter()
        .enumerate()
        .map(|(l, c)| {
            if l < 2 || !c.is_finite() {
                0.0
            } else {
                c.max(0.0)
            }
        })
        .collect();
    Ok(AngularSpectrum { cl })
}

/// A Gaussian sky of `spectrum` at `nside` (RING, zero mean), seeded ([`SkyRecipe::gaussian`]).
pub fn gaussian_sky(nside: u32, spectrum: AngularSpectrum, seed: u64) -> Result<SkyMap> {
    let recipe = SkyRecipe::gaussian(nside, spectrum, seed);
    let sht = recipe.transform()?;
    recipe.realise(&sht, 0)
}

/// The values of `map` at the pixels where `region` has positive weight (region re-ordered to
/// the map's ordering), in increasing pixel order; an error if one of them is not valid.
pub fn values_in(map: &SkyMap, region: &Footprint) -> Result<Vec<f64>> {
    if region.pixelization().nside() != map.nside() {
        return Err(Error::Mismatch(format!(
            "region NSIDE {} does not match map NSIDE {}",
            region.pixelization().nside(),
            map.nside()
        )));
    }
    let region = region.to_ordering(map.ordering())?;
    let mut out = Vec::new();
    for (p, &w) in region.weights().iter().enumerate() {
        if w > 0.0 {
            if !map.valid()[p] {
                return Err(Error::Data(format!(
                    "the map has no value at region pixel {p}"
                )));
            }
            out.push(map.values()[p]);
        }
    }
    if out.len() < 2 {
        return Err(Error::Data("the region holds fewer than 2 pixels".into()));
    }
    Ok(out)
}

/// Peak counts of a HEALPix map inside `region` (weight > 0): pixels strictly higher than each
/// of their 8 neighbours (7 at the corners of the base pixels,
/// [`Pixelization::neighbours`]), all of which lie in the region, whose height exceeds
/// μ + ν σ for each ν in `thresholds` (μ, σ the population mean and standard deviation of the
/// region's pixels). Common practice for weak-lensing peak counts, on the HEALPix
/// neighbourhood.
pub fn peak_counts_in(map: &SkyMap, region: &Footprint, thresholds: &[f64]) -> Result<Vec<usize>> {
    let values = values_in(map, region)?;
    let (mean, sd, _, _) = super::one_point_moments(&values);
    let region = region.to_ordering(map.ordering())?;
    let pix = map.pixelization();
    let inside = |p: u64| region.weights()[p as usize] > 0.0;
    let mut heights = Vec::new();
    for p in 0..pix.npix() {
        if !inside(p) {
            continue;
        }
        let v = map.values()[p as usize];
        let mut peak = true;
        for q in pix.neighbours(p)?.into_iter().flatten() {
            if !inside(q) || map.values()[q as usize] >= v {
                peak = false;
                break;
            }
        }
        if peak {
            heights.push((v - mean) / sd);
        }
    }
    Ok(thresholds
        .iter()
        .map(|&nu| heights.iter().filter(|&&h| h > nu).count())
        .collect())
}
