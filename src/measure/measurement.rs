//! Measuring one HEALPix map on its footprint: the tiles of a [`TilingPlan`] are sampled
//! ([`crate::tiles::sampling`]), tapered, transformed by one shared [`ScatteringEngine`], pooled over
//! their cores ([`crate::scattering::pooling`]) and summarised ([`crate::scattering::statistics`]); the tile power
//! spectrum and bispectrum ([`crate::measure::tile_spectra`]) are measured on the same tiles with the
//! same weights.
//!
//! Per tile, with m the apodized footprint interpolated onto the plane grid, b the tile-border
//! window, Ω the solid angle of each plane pixel and c the indicator of the tile's core:
//!
//! - taper a = m · b, applied to the field before filtering. The border window b is a C2 ramp
//!   (Grain, Tristram & Stompor 2009 profile) over the outer `border_pixels` of the grid, so the
//!   circular convolutions of the transform never wrap sky from one side of the tile to the other;
//! - pooling weight w = a · Ω · c: every footprint position is pooled in exactly one tile (cores
//!   partition the sphere), weighted by its solid angle and apodized footprint weight.
//!
//! The halo around each core is the border ramp plus the margin the largest wavelet needs to
//! see unit taper, one envelope width σ_{J−1} = 0.8·2^{J−1} pixels. Cores that fill their
//! tiles (latitude bands) put pooled positions where the coverage normalisation is only
//! approximate: the largest-scale band power differs from the same skies measured on small
//! HEALPix-cell cores by 0.30 of its single-sky scatter (24 skies, NSIDE 128); a margin of two
//! envelope widths brings that to 0.13 but costs tiles (`tests/sphere_plan_layouts.rs`,
//! ignored). Positions too close to a
//! mask or tile edge at a given scale drop out of the pooling there by the transform's coverage
//! cut, and a coefficient whose kept weight is too small is flagged untrusted.
//!
//! Two maps ([`SphereMeasurer::measure_pair`]) are measured on the same tiles with the taper and
//! weights of their common footprint (the footprint restricted to pixels valid in both maps), in
//! one pass: each map's own statistics plus the cross coefficients of
//! [`crate::scattering::transform`] ("Cross statistics of two maps"), with the same trust rules.
//!
//! Interpolating the map onto tile pixels smooths it at the scale of the map's pixels; a
//! coefficient involving a scale whose wavelength is below
//! [`MeasurementSettings::min_trusted_wavelength`] map spacings is also flagged untrusted
//! (measured biases against flat sky: `examples/sphere_flat_bias.rs`).

use crate::error::{Error, Result};
use crate::measure::tile_spectra::{
    combine_bispectra, combine_power, FourierStatistics, TileBispectrum, TilePowerSpectrum,
    Triangle, WavenumberBins,
};
use crate::scattering::pooling::{
    combine_tiles, pooled_coefficients, pooled_cross_coefficients, TileSums,
};
use crate::scattering::statistics::{
    CoefficientKind, CoefficientSet, CoefficientSpelling, CrossCoefficientSet, OrientationSummary,
    SummaryStatistic,
};
use crate::scattering::transform::{ScatteringEngine, TilePairView, TransformSettings};
use crate::sky::apodization::c2;
use crate::sky::block_map::BlockSkyMap;
use crate::sky::footprint::FootprintOf;
use crate::sky::pixelization::Pixelization;
use crate::sky::skymap::SkyMapOf;
use crate::tiles::sampling::{MapSource, SamplingMethod, TileGrids, TileSampler};
use crate::tiles::tiling::{CellLayout, TilingPlan, TilingSettings, TilingSummary};

/// Everything that defines a measurement.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct MeasurementSettings {
    /// Number of dyadic scales J.
    pub scales: usize,
    /// Number of orientations L.
    pub orientations: usize,
    /// Plane pixels per tile side (a size of [`crate::limits::is_tile_size`], ≥ 2^{J+1});
    /// `None`: the tool's choice, the candidate of [`crate::tiles::tiling::automatic_tile_candidates`]
    /// for the halo of J scales whose plan transforms the fewest tile pixels.
    pub tile_pixels: Option<usize>,
    /// Cut the footprint into the pixels of a coarse HEALPix grid of this NSIDE instead of
    /// latitude bands (`None`, the default; see [`crate::tiles::tiling::CellLayout`]).
    pub coarse_nside: Option<u32>,
    /// Plane pixel size in arcmin; `None`: the map's mean pixel spacing
    /// ([`MeasurementSettings::pixel_size`]).
    pub pixel_arcmin: Option<f64>,
    /// Width of the tile-border ramp in plane pixels.
    pub border_pixels: usize,
    /// How the sky is interpolated onto tiles.
    #[serde(skip)]
    pub sampling: SamplingMethod,
    /// Estimator choices of the transform (coverage threshold, trusted fraction, cropping).
    #[serde(skip)]
    pub transform: TransformSettings,
    /// Number of logarithmic wavenumber bins of the tile power spectrum and bispectrum.
    pub spectrum_bins: usize,
    /// Measure the tile bispectrum too.
    pub bispectrum: bool,
    /// Shortest wavelength, in mean map pixel spacings h, at which a coefficient may be
    /// trusted. Interpolating the map onto tile pixels smooths it (a transfer |G|² < 1 that
    /// grows toward small scales), so a coefficient involving a scale j whose wavelength
    /// λ_j = (8/3)·2^j·Δ is below this many h is flagged untrusted (its value is still
    /// reported); so is the variance (a pixel-scale statistic) whenever scale 0 is. `None`:
    /// [`SamplingMethod::trusted_wavelength_map_spacings`] of `sampling`, the measured limit
    /// for S1 within 2% of flat sky.
    pub min_trusted_wavelength: Option<f64>,
}

impl Default for MeasurementSettings {
    fn default() -> Self {
        MeasurementSettings {
            scales: 4,
            orientations: 4,
            tile_pixels: None,
            coarse_nside: None,
            pixel_arcmin: None,
            border_pixels: 8,
            sampling: SamplingMethod::RingQuintic,
            transform: TransformSettings::default(),
            spectrum_bins: 6,
            bispectrum: true,
            min_trusted_wavelength: None,
        }
    }
}

impl MeasurementSettings {
    /// The halo: border ramp plus one largest-scale envelope width, 0.8·2^{J−1} pixels.
    pub fn halo(&self) -> usize {
        let sigma = 0.8 * (1u64 << self.scales.saturating_sub(1).min(20)) as f64;
        self.border_pixels + sigma.ceil() as usize
    }

    /// Checks a tile size against J and the halo.
    fn check_tile_pixels(&self, n: usize) -> Result<()> {
        if !crate::limits::is_tile_size(n) {
            return Err(Error::Setting(format!(
                "tile pixels must be 2^k·m (m = 1, 3, 5, 7 or 9; at least 8, and 16·m when m > 1), got {n}"
            )));
        }
        if (1usize << (self.scales + 1)) > n {
            return Err(Error::Setting(format!(
                "J = {} is too large for {n}-pixel tiles: it needs 2^(J+1) ≤ tile pixels",
                self.scales
            )));
        }
        if 2 * self.halo() >= n {
            return Err(Error::Setting(format!(
                "{n}-pixel tiles leave no core inside a halo of {} pixels (border {} + scale margin); use larger tiles or a smaller J",
                self.halo(),
                self.border_pixels
            )));
        }
        Ok(())
    }

    /// The shortest trusted wavelength in map spacings: [`Self::min_trusted_wavelength`], or
    /// the sampling method's own limit.
    pub fn trusted_wavelength(&self) -> f64 {
        self.min_trusted_wavelength
            .unwrap_or_else(|| self.sampling.trusted_wavelength_map_spacings())
    }

    /// The plane pixel size Δ (radians) for maps of pixelization `map`: `pixel_arcmin`, or by
    /// default three map spacings 3h ([`crate::tiles::tiling::DEFAULT_PIXEL_FRACTION`]), which puts
    /// the finest scale at the shortest wavelength ring-cubic and ring-quintic sampling carry (8h). At low
    /// resolution, where the J scales at 3h would need tiles wider than the distortion limit
    /// (J = 4 below NSIDE 256), the default is the coarsest of 2h and h at which they fit; the
    /// finest scales are then flagged untrusted as the sampling rule says.
    ///
    /// A plane grid coarser than the map read directly would alias the map's power between
    /// Δ/2 and h into the finest scales (measured at NSIDE 512, Δ = 3h: S1 at j = 0 16–17%
    /// above flat sky); the sampler therefore reads such tiles one map spacing apart and
    /// band-limits them ([`crate::tiles::sampling::fine_sampling_factor`]): S1 at j = 0 then agrees
    /// with flat sky within 1.2% (`tests/sphere_flat_versus_sphere.rs`).
    ///
    /// ```
    /// use planisphere::measure::measurement::MeasurementSettings;
    /// use planisphere::{Ordering, Pixelization};
    /// let map = Pixelization::new(1024, Ordering::Ring).unwrap();
    /// let delta = MeasurementSettings::default().pixel_size(map);
    /// assert!((delta / map.mean_spacing() - 3.0).abs() < 1e-12); // 10.3′ at NSIDE 1024
    /// let low = Pixelization::new(64, Ordering::Ring).unwrap();
    /// let delta = MeasurementSettings::default().pixel_size(low);
    /// assert!((delta / low.mean_spacing() - 1.0).abs() < 1e-12); // J = 4 fits only at h
    /// ```
    pub fn pixel_size(&self, map: Pixelization) -> f64 {
        match self.pixel_arcmin {
            Some(a) => (a / 60.0).to_radians(),
            None => {
                // 3h, or at low resolution the coarsest of 2h and h at which the J scales still
                // fit the tool's tiles (or the given tile size) within the distortion limit
                let h = map.mean_spacing();
                [crate::tiles::tiling::DEFAULT_PIXEL_FRACTION, 2.0]
                    .into_iter()
                    .map(|f| f * h)
                    .find(|&d| match self.tile_pixels {
                        Some(n) => {
                            crate::tiles::tiling::corner_distortion(n, d)
                                <= crate::tiles::tiling::MAX_AUTOMATIC_CORNER_DISTORTION
                        }
                        None => Self::scales_fit(self.scales, self.border_pixels, d),
                    })
                    .unwrap_or(h)
            }
        }
    }

    /// These settings with plane pixels of one map spacing of `map`, read directly, where
    /// `pixel_arcmin` is left to the default: for paths that need the direct sampling (the
    /// synthesis gradient) or every scale the map's grid reaches (the flat-sky comparison).
    pub fn at_map_spacing_unless_set(self, map: Pixelization) -> Self {
        MeasurementSettings {
            pixel_arcmin: self
                .pixel_arcmin
                .or(Some(map.mean_spacing().to_degrees() * 60.0)),
            ..self
        }
    }

    /// The tiling plan these settings give for maps of pixelization `map` on `footprint`: the
    /// one plan `measure`, `ensemble`, `synthesize` and `tiles` use.
    pub fn plan(&self, map: Pixelization, footprint: &FootprintOf<'_>) -> Result<TilingPlan> {
        self.validate()?;
        let delta = self.pixel_size(map);
        let pixel_size = Some(delta);
        let halo = self.halo();
        let plan = match self.coarse_nside {
            None => {
                let settings = |n: usize| TilingSettings {
                    cells: CellLayout::LatitudeBands,
                    tile_pixels: Some(n),
                    pixel_size,
                    halo,
                };
                match self.tile_pixels {
                    Some(n) => TilingPlan::new(map, footprint, &settings(n))?,
                    None => {
                        // of the candidate sizes within the distortion limit, the plan that
                        // transforms the fewest tile pixels (the first, i.e. the smallest size,
                        // on a tie); a refusal when even the smallest tile is too wide
                        let min = 1usize << (self.scales + 1);
                        let smallest =
                            crate::tiles::tiling::smallest_automatic_tile_pixels(halo, min);
                        let limit = crate::tiles::tiling::MAX_AUTOMATIC_CORNER_DISTORTION;
                        if crate::tiles::tiling::corner_distortion(smallest, delta) > limit {
                            return Err(self.too_wide_error(map, delta, smallest));
                        }
                        let mut candidates: Vec<usize> =
                            crate::tiles::tiling::automatic_tile_candidates(halo, delta, min)
                                .into_iter()
                                .filter(|&n| {
                                    crate::tiles::tiling::corner_distortion(n, delta) <= limit
                                })
                                .collect();
                        if candidates.is_empty() {
                            candidates.push(smallest);
                        }
                        let fallback = candidates[0];
                        let mut best: Option<TilingPlan> = None;
                        for n in candidates {
                            let Ok(plan) = TilingPlan::new(map, footprint, &settings(n)) else {
                                continue;
                            };
                            let cost = |p: &TilingPlan| p.len() * p.tile_pixels().pow(2);
                            if best.as_ref().is_none_or(|b| cost(&plan) < cost(b)) {
                                best = Some(plan);
                            }
                        }
                        match best {
                            Some(plan) => plan,
                            None => TilingPlan::new(map, footprint, &settings(fallback))?,
                        }
                    }
                }
            }
            Some(c) => {
                let settings = |n: Option<usize>| TilingSettings {
                    cells: CellLayout::HealpixPixels { coarse_nside: c },
                    tile_pixels: n,
                    pixel_size,
                    halo,
                };
                match self.tile_pixels {
                    Some(n) => TilingPlan::new(map, footprint, &settings(Some(n)))?,
                    None => {
                        let need = TilingPlan::new(map, footprint, &settings(None))?.tile_pixels();
                        let n = need.next_power_of_two().max(1usize << (self.scales + 1));
                        TilingPlan::new(map, footprint, &settings(Some(n)))?
                    }
                }
            }
        };
        self.check_tile_pixels(plan.tile_pixels())?;
        Ok(plan)
    }

    /// Would the tool's own tile choice fit J = `scales` with a `border`-pixel ramp in tiles of
    /// pixel side `delta` within [`crate::tiles::tiling::MAX_AUTOMATIC_CORNER_DISTORTION`]?
    fn scales_fit(scales: usize, border: usize, delta: f64) -> bool {
        let halo = MeasurementSettings {
            scales,
            border_pixels: border,
            ..Default::default()
        }
        .halo();
        let n = crate::tiles::tiling::smallest_automatic_tile_pixels(halo, 1usize << (scales + 1));
        crate::tiles::tiling::corner_distortion(n, delta)
            <= crate::tiles::tiling::MAX_AUTOMATIC_CORNER_DISTORTION
    }

    /// The one-line refusal when J scales and their halo need tiles wider than the distortion
    /// limit: what fits at this resolution and what to do.
    fn too_wide_error(&self, map: Pixelization, delta: f64, smallest: usize) -> Error {
        let limit = crate::tiles::tiling::MAX_AUTOMATIC_CORNER_DISTORTION;
        let width = |n: usize, d: f64| 2.0 * (n as f64 / 2.0 * d).atan().to_degrees();
        let max_width = 2.0 * ((limit - 1.0) / 2.0).sqrt().atan().to_degrees();
        let b = self.border_pixels;
        let fitting = (1..self.scales)
            .rev()
            .find(|&j| Self::scales_fit(j, b, delta));
        let what_fits = match fitting {
            Some(j) => format!("J ≤ {j} fits"),
            None => {
                // the most scales any thinner border allows, with the widest such border
                let thinner = (1..self.scales).rev().find_map(|j| {
                    (0..b)
                        .rev()
                        .find(|&b2| Self::scales_fit(j, b2, delta))
                        .map(|b2| (j, b2))
                });
                match thinner {
                    Some((j, b2)) => format!(
                        "no J fits with the {b}-pixel border (J ≤ {j} does with --border-pixels {b2})"
                    ),
                    None => "no J fits".to_string(),
                }
            }
        };
        let remedy = match self.pixel_arcmin {
            None => {
                let nside = (map.nside()..=(1 << 29))
                    .filter(|n| n.is_power_of_two())
                    .find(|&n| {
                        Pixelization::new(n, map.ordering())
                            .map(|p| Self::scales_fit(self.scales, b, p.mean_spacing()))
                            .unwrap_or(false)
                    });
                match nside {
                    Some(n) => format!("a map of NSIDE ≥ {n}"),
                    None => "a higher-NSIDE map".to_string(),
                }
            }
            Some(_) => {
                let d = 2.0 * ((limit - 1.0) / 2.0).sqrt() / smallest as f64;
                format!("--pixel-arcmin ≤ {:.2}", d.to_degrees() * 60.0)
            }
        };
        Error::Setting(format!(
            "J = {} needs tiles of at least {smallest} pixels (4 halos of {}) of {:.1}′, {:.0}° across, beyond the {:.1}° (corner distortion sec²ρ ≤ {limit}) within which flat-sky bias has been measured small; at NSIDE {} {what_fits}; use fewer scales, {remedy} for J = {}, or --tile-pixels to accept wider tiles",
            self.scales,
            self.halo(),
            delta.to_degrees() * 60.0,
            width(smallest, delta),
            max_width,
            map.nside(),
            self.scales
        ))
    }

    /// The one validation of measurement settings, used by every command that measures
    /// (`measure`, `ensemble`, `tiles`, `plot`, `compare-flat`, `synthesize`) and by the Python
    /// module: J from 1 to [`crate::limits::MAX_SCALES`] (12), L at least 1, a given tile size a size of
    /// [`crate::limits::is_tile_size`] holding 2^(J+1) pixels and a core inside the halo
    /// (border plus one largest-scale envelope width), a positive finite pixel size, a
    /// non-negative trusted wavelength, and 1 to 64 spectrum bins. Each refusal is one line
    /// ([`Error::Setting`]). Limits that depend on the grid a command builds (L against the
    /// tile size, J against a flat field's side) are checked where the grid is known.
    pub fn validate(&self) -> Result<()> {
        if self.scales == 0 || self.orientations == 0 {
            return Err(Error::Setting(format!(
                "J and L must be at least 1 (got J = {}, L = {})",
                self.scales, self.orientations
            )));
        }
        if self.scales > crate::limits::MAX_SCALES {
            return Err(Error::Setting(format!(
                "J = {} scales is too many: at most {max} (wavelengths up to 2^{max} tile pixels)",
                self.scales,
                max = crate::limits::MAX_SCALES
            )));
        }
        if let Some(n) = self.tile_pixels {
            self.check_tile_pixels(n)?;
        }
        if let Some(a) = self.pixel_arcmin {
            if !(a.is_finite() && a > 0.0) {
                return Err(Error::Setting(format!(
                    "pixel size must be positive, got {} arcmin (--pixel-arcmin)",
                    crate::error::compact(a)
                )));
            }
        }
        if let Some(w) = self.min_trusted_wavelength {
            if w.is_nan() || w < 0.0 {
                return Err(Error::Setting(format!(
                    "the shortest trusted wavelength must be at least 0 map spacings, got {}",
                    crate::error::compact(w)
                )));
            }
        }
        if self.spectrum_bins == 0 || self.spectrum_bins > 64 {
            return Err(Error::Setting(format!(
                "spectrum bins must be from 1 to 64, got {}",
                self.spectrum_bins
            )));
        }
        Ok(())
    }
}

/// The taper and pooling weight of one tile ([`SphereMeasurer::taper_and_weight`]).
#[derive(Debug, Clone)]
pub struct TileTaper {
    /// Taper a(x) ∈ [0, 1] applied before filtering.
    pub taper: Vec<f64>,
    /// Pooling weight w(x) ≥ 0.
    pub weight: Vec<f64>,
    /// Σ w (positive).
    pub weight_sum: f64,
}

/// The results of the tiles kept (those with pooling weight), in plan order; an error naming
/// the `footprint` ("apodized", "common") when no tile was kept.
fn kept_tiles<T>(per_tile: Vec<Option<T>>, footprint: &str) -> Result<Vec<T>> {
    let kept: Vec<T> = per_tile.into_iter().flatten().collect();
    if kept.is_empty() {
        return Err(Error::Data(format!(
            "no tile has positive pooling weight: the {footprint} footprint is empty"
        )));
    }
    Ok(kept)
}

/// The C2 window of the tile border: 1 inside, rising over `border` pixels from the edge.
pub fn border_window(n: usize, border: usize) -> Vec<f64> {
    let ramp = |i: usize| {
        let d = i.min(n - 1 - i) as f64 + 0.5;
        if border == 0 {
            1.0
        } else {
            c2(d / border as f64)
        }
    };
    let r: Vec<f64> = (0..n).map(ramp).collect();
    (0..n * n).map(|k| r[k % n] * r[k / n]).collect()
}

/// A column of a statistics vector: its name and the angular scale it probes (arcmin).
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct StatisticLabel {
    pub name: String,
    pub scale_arcmin: Option<f64>,
}

/// All statistics of one map.
#[derive(Debug, Clone, serde::Serialize)]
pub struct MapStatistics {
    /// The full labelled scattering set (orders 0–2 and band powers) with trust flags.
    pub coefficients: CoefficientSet,
    /// The orientation-harmonic summary ([`crate::scattering::statistics`]); empty when L = 1.
    pub summary: Vec<SummaryStatistic>,
    /// Tile power spectrum, combined over tiles by core weight.
    pub tile_power: TilePowerSpectrum,
    /// Tile bispectrum, combined over tiles by core weight.
    pub tile_bispectrum: Option<TileBispectrum>,
    /// Number of tiles measured.
    pub tiles: usize,
    /// Per-tile sums (for maps of a statistic and jackknife errors), in plan order.
    #[serde(skip)]
    pub per_tile: Vec<TileSums>,
}

/// The statistics of two maps measured together on their common footprint
/// ([`SphereMeasurer::measure_pair`]).
#[derive(Debug, Clone, serde::Serialize)]
pub struct PairStatistics {
    /// The first map's own statistics on the common footprint.
    pub first: MapStatistics,
    /// The second map's own statistics on the common footprint.
    pub second: MapStatistics,
    /// The cross coefficients (cross band powers, X1 and X2 in both directions).
    pub cross: CrossCoefficientSet,
    /// Per-tile cross sums, in plan order.
    #[serde(skip)]
    pub per_tile_cross: Vec<TileSums>,
}

/// One tile's scattering sums, power spectrum and bispectrum.
type TileResult = (TileSums, TilePowerSpectrum, Option<TileBispectrum>);

/// Measures maps of one pixelization and footprint: owns the plan, the engine and the Fourier
/// plans, shared by every map (and thread) measured with it.
pub struct SphereMeasurer {
    settings: MeasurementSettings,
    plan: TilingPlan,
    engine: ScatteringEngine,
    fourier: FourierStatistics,
    triangles: Vec<Triangle>,
    window: Vec<f64>,
}

impl std::fmt::Debug for SphereMeasurer {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(
            f,
            "SphereMeasurer({} tiles, {:?})",
            self.plan.len(),
            self.settings
        )
    }
}

impl SphereMeasurer {
    /// Plans the tiles of `footprint` for maps of pixelization `map` and builds the engine.
    pub fn new(
        map: Pixelization,
        footprint: &FootprintOf<'_>,
        settings: MeasurementSettings,
    ) -> Result<Self> {
        settings.validate()?;
        if footprint.observed_pixels() == 0 {
            return Err(Error::Data(
                "the footprint is empty: no pixel has positive weight".into(),
            ));
        }
        let plan = settings.plan(map, footprint)?;
        let n = plan.tile_pixels();
        if plan.is_empty() {
            return Err(Error::Data("no tile meets the footprint".into()));
        }
        let engine = ScatteringEngine::with_settings(
            n,
            settings.scales,
            settings.orientations,
            settings.transform,
        )?;
        let bins = WavenumberBins::logarithmic(n, plan.pixel_size(), settings.spectrum_bins)?;
        let fourier =
            FourierStatistics::with_plans(engine.tile_fft().clone(), plan.pixel_size(), bins)?;
        let triangles = if settings.bispectrum {
            fourier.triangles()
        } else {
            Vec::new()
        };
        let window = border_window(n, settings.border_pixels);
        Ok(SphereMeasurer {
            settings,
            plan,
            engine,
            fourier,
            triangles,
            window,
        })
    }

    /// The settings.
    pub fn settings(&self) -> &MeasurementSettings {
        &self.settings
    }

    /// The tiling plan.
    pub fn plan(&self) -> &TilingPlan {
        &self.plan
    }

    /// The shared scattering engine.
    pub fn engine(&self) -> &ScatteringEngine {
        &self.engine
    }

    /// The tiling summary.
    pub fn summary(&self) -> TilingSummary {
        self.plan.summary(rayon::current_num_threads())
    }

    /// A sampled tile's taper a = clamp(m, 0, 1) · b (interpolation may overshoot 1 by rounding)
    /// and pooling weight w = a · Ω · [core] (module documentation); `None` when the tile has
    /// nothing to pool.
    pub fn taper_and_weight(&self, grids: &TileGrids) -> Result<Option<TileTaper>> {
        let taper: Vec<f64> = grids
            .mask
            .iter()
            .zip(&self.window)
            .map(|(m, b)| m.clamp(0.0, 1.0) * b)
            .collect();
        let weight = grids.pooling_weights(&taper)?;
        let weight_sum: f64 = weight.iter().sum();
        Ok((weight_sum > 0.0).then_some(TileTaper {
            taper,
            weight,
            weight_sum,
        }))
    }

    /// Measures `map` on `footprint` (the apodized footprint the plan was made for, or another
    /// of the same NSIDE whose positive pixels lie in the planned tiles' cores).
    pub fn measure(
        &self,
        map: &SkyMapOf<'_>,
        footprint: &FootprintOf<'_>,
    ) -> Result<MapStatistics> {
        self.measure_source(MapSource::Whole(map), footprint)
    }

    /// [`Self::measure`] of a map held by blocks: the same statistics bit for bit when `map`
    /// holds every block the plan's tiles read ([`crate::tiles::reach::read_ranges`]); an error
    /// when the tiles read a pixel whose block was not read from the file. (The map records
    /// such reads for one measurement at a time.)
    pub fn measure_blocks(
        &self,
        map: &BlockSkyMap,
        footprint: &FootprintOf<'_>,
    ) -> Result<MapStatistics> {
        map.forget_unread();
        let stats = self.measure_source(MapSource::Blocks(map), footprint)?;
        match map.first_unread() {
            Some(p) => Err(Error::Data(format!(
                "the tiles read map pixel {p}, whose block was not read from the file"
            ))),
            None => Ok(stats),
        }
    }

    /// [`Self::measure`] of either kind of map.
    fn measure_source(
        &self,
        map: MapSource<'_>,
        footprint: &FootprintOf<'_>,
    ) -> Result<MapStatistics> {
        let sampler = TileSampler::new(&self.plan, map, footprint, self.settings.sampling)?;
        let per_tile: Vec<Option<TileResult>> = sampler.map_tiles(|grids| {
            let Some(t) = self.taper_and_weight(&grids)? else {
                return Ok(None);
            };
            let view = crate::scattering::transform::TileView {
                field: &grids.field,
                taper: &t.taper,
                weight: &t.weight,
            };
            let sums = self.engine.transform_tile(&view)?;
            let (power, bis) = self.tile_fourier(&grids.field, &t)?;
            Ok(Some((sums, power, bis)))
        })?;
        self.assemble(kept_tiles(per_tile, "apodized")?)
    }

    /// Pools the per-tile results of one map (in plan order) into its statistics.
    fn assemble(&self, kept: Vec<TileResult>) -> Result<MapStatistics> {
        let sums: Vec<TileSums> = kept.iter().map(|t| t.0.clone()).collect();
        let total = combine_tiles(&sums)?;
        let mut coefficients = pooled_coefficients(&self.engine, &total)?;
        self.flag_unresolved_scales(&mut coefficients);
        // defined for L ≥ 2; with a single orientation there is nothing to summarise over
        // orientations and the summary (and its columns in `vector_labels`) is empty
        let summary = coefficients.summary().unwrap_or_default();
        let powers: Vec<TilePowerSpectrum> = kept.iter().map(|t| t.1.clone()).collect();
        let tile_power = combine_power(&powers)?;
        let tile_bispectrum = if self.settings.bispectrum {
            let b: Vec<TileBispectrum> = kept.iter().filter_map(|t| t.2.clone()).collect();
            Some(combine_bispectra(&b)?)
        } else {
            None
        };
        Ok(MapStatistics {
            coefficients,
            summary,
            tile_power,
            tile_bispectrum,
            tiles: kept.len(),
            per_tile: sums,
        })
    }

    /// The tile power spectrum and (if enabled) bispectrum of one tile's field under the
    /// tile's taper.
    fn tile_fourier(
        &self,
        field: &[f64],
        t: &TileTaper,
    ) -> Result<(TilePowerSpectrum, Option<TileBispectrum>)> {
        let (taper, wsum) = (t.taper.as_slice(), t.weight_sum);
        let power = self.fourier.power_spectrum(field, taper, wsum)?;
        let bis = if self.settings.bispectrum {
            Some(
                self.fourier
                    .bispectrum(field, taper, wsum, &self.triangles)?,
            )
        } else {
            None
        };
        Ok((power, bis))
    }

    /// Measures two maps on their common footprint: each map's own statistics (as
    /// [`Self::measure`] would give on that footprint) and their cross coefficients
    /// ([`crate::scattering::transform`], "Cross statistics of two maps"), computed in one pass that shares
    /// tiles, taper, weights and FFTs. `footprint` is restricted to the pixels valid in both
    /// maps; the second map is brought to the first's ordering. Errors on different NSIDEs and
    /// when no footprint pixel is valid in both maps.
    pub fn measure_pair(
        &self,
        first: &SkyMapOf<'_>,
        second: &SkyMapOf<'_>,
        footprint: &FootprintOf<'_>,
    ) -> Result<PairStatistics> {
        if first.nside() != second.nside() {
            return Err(Error::Mismatch(format!(
                "the two maps have NSIDE {} and {}: cross statistics need one pixelization",
                first.nside(),
                second.nside()
            )));
        }
        let second = second.to_ordering(first.ordering())?;
        let common = footprint
            .restricted_to(first)?
            .restricted_to(&second)
            .map_err(|e| match e {
                Error::Data(_) => Error::Data(
                    "the two maps have no valid pixel in common on the footprint".into(),
                ),
                other => other,
            })?;
        let method = self.settings.sampling;
        let sampler_a = TileSampler::new(&self.plan, first, &common, method)?;
        let sampler_b = TileSampler::new(&self.plan, &second, &common, method)?;
        let per_tile = sampler_a.map_tiles(|grids| {
            let other = sampler_b.sample(grids.tile)?;
            // the common footprint is zero on both maps' bad pixels, so both read the same mask
            let Some(t) = self.taper_and_weight(&grids)? else {
                return Ok(None);
            };
            let sums = self.engine.transform_tile_pair(&TilePairView {
                first: &grids.field,
                second: &other.field,
                taper: &t.taper,
                weight: &t.weight,
            })?;
            let (pa, ba) = self.tile_fourier(&grids.field, &t)?;
            let (pb, bb) = self.tile_fourier(&other.field, &t)?;
            Ok(Some((
                (sums.first, pa, ba),
                (sums.second, pb, bb),
                sums.cross,
            )))
        })?;
        let kept = kept_tiles(per_tile, "common")?;
        let mut firsts = Vec::with_capacity(kept.len());
        let mut seconds = Vec::with_capacity(kept.len());
        let mut crosses = Vec::with_capacity(kept.len());
        for (a, b, c) in kept {
            firsts.push(a);
            seconds.push(b);
            crosses.push(c);
        }
        let total = combine_tiles(&crosses)?;
        let mut cross = pooled_cross_coefficients(&self.engine, &total)?;
        for c in cross.coefficients.iter_mut() {
            let resolved = c.label.path.scales().all(|j| self.scale_is_resolved(j));
            c.trusted &= resolved && c.value.is_finite();
        }
        Ok(PairStatistics {
            first: self.assemble(firsts)?,
            second: self.assemble(seconds)?,
            cross,
            per_tile_cross: crosses,
        })
    }

    /// The shortest trusted wavelength in map spacings (the setting, or the sampling's own).
    pub fn min_trusted_wavelength(&self) -> f64 {
        self.settings.trusted_wavelength()
    }

    /// Does the sampling carry scale j well enough to trust its coefficients:
    /// λ_j = (8/3)·2^j·Δ ≥ [`Self::min_trusted_wavelength`] × the map's mean spacing?
    pub fn scale_is_resolved(&self, j: usize) -> bool {
        let lambda = 8.0 / 3.0 * (1u64 << j.min(40)) as f64 * self.plan.pixel_size();
        lambda >= self.min_trusted_wavelength() * self.plan.map_pixelization().mean_spacing()
    }

    /// Flags untrusted every coefficient involving a scale the sampling does not carry (and the
    /// variance when scale 0 is one of them), and every value that is not finite.
    fn flag_unresolved_scales(&self, set: &mut CoefficientSet) {
        for c in set.coefficients.iter_mut() {
            // a value that could not be computed (no weight kept) is never trusted
            c.trusted &= c.value.is_finite();
            let resolved = match c.label.kind {
                CoefficientKind::Mean => true,
                CoefficientKind::Variance => self.scale_is_resolved(0),
                _ => c.label.path.scales().all(|j| self.scale_is_resolved(j)),
            };
            c.trusted &= resolved;
        }
    }

    /// The angular scale (arcmin) of wavelet scale j: its wavelength 2π/ξ_j = (8/3)·2^j pixels.
    pub fn wavelet_scale_arcmin(&self, j: usize) -> f64 {
        8.0 / 3.0 * (1u64 << j) as f64 * self.plan.pixel_size().to_degrees() * 60.0
    }

    /// Column labels of [`MapStatistics::vector`], in the same order.
    pub fn vector_labels(&self) -> Vec<StatisticLabel> {
        let mut out = Vec::new();
        for l in self.engine.labels() {
            let name = l.name(CoefficientSpelling::Short);
            let scale = match l.kind {
                CoefficientKind::Mean | CoefficientKind::Variance => None,
                _ => l.path.j1.map(|j| self.wavelet_scale_arcmin(j)),
            };
            out.push(StatisticLabel {
                name: format!("full.{name}"),
                scale_arcmin: scale,
            });
        }
        if let Ok(layout) =
            OrientationSummary::new(self.engine.scale_count(), self.engine.orientation_count())
        {
            for label in layout.labels() {
                out.push(StatisticLabel {
                    name: format!("summary.{}", label.name()),
                    scale_arcmin: label.j1.map(|j| self.wavelet_scale_arcmin(j)),
                });
            }
        }
        let bins = self.fourier.bins();
        for b in 0..bins.len() {
            let k = bins.centre(b);
            out.push(StatisticLabel {
                name: format!("tile_power.k{b}"),
                scale_arcmin: Some((2.0 * std::f64::consts::PI / k).to_degrees() * 60.0),
            });
        }
        for t in &self.triangles {
            let k = bins.centre(t.b3);
            out.push(StatisticLabel {
                name: format!("bispectrum.k{}_k{}_k{}", t.b1, t.b2, t.b3),
                scale_arcmin: Some((2.0 * std::f64::consts::PI / k).to_degrees() * 60.0),
            });
        }
        out
    }
}

impl MapStatistics {
    /// Every statistic as one vector, in the order of [`SphereMeasurer::vector_labels`]:
    /// the full set, the orientation-harmonic summary, the tile power spectrum and the tile bispectrum.
    pub fn vector(&self) -> Vec<f64> {
        let mut v: Vec<f64> = self
            .coefficients
            .coefficients
            .iter()
            .map(|c| c.value)
            .collect();
        v.extend(self.summary.iter().map(|c| c.value));
        v.extend(self.tile_power.power.iter().copied());
        if let Some(b) = &self.tile_bispectrum {
            v.extend(b.bispectrum.iter().copied());
        }
        v
    }
}
