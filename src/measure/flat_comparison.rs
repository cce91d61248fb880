//! How far is a flat-sky answer off? Gaussian (or lognormal) skies of a spectrum C_ℓ measured on
//! the sphere through tangent-plane tiles, against flat fields with P(k) = C_{k−½} (LoVerde &
//! Afshordi 2008, PRD 78, 123506) measured by the same engine with the same tile taper and core
//! size, at the same pixel scale. The bias of each coefficient is reported relative to its value,
//! in units of the error of the difference of the two ensemble means, and in units of the
//! scatter of one sky.
//!
//! **The flat reference.** A sphere tile is a window on a sky much larger than the tile, so the
//! flat reference is too: each flat sample is an m × m periodic field (m ≥ n, the *reference
//! size*) of which the n × n corner is measured with the sphere tile's taper and pooling
//! weight. A periodic field only as large as the tile (m = n) holds modes on a grid of spacing
//! 2π/(nΔ) and none below it, which shifts the largest scales (S1 at j = 3 of a 64-pixel tile
//! by about 3.5%). By default m is [`automatic_reference_pixels`]; every comparison also
//! measures the reference at 2m and reports, per coefficient, how much it changed and whether
//! the change is within [`CONVERGENCE_ERRORS`] standard errors of the difference (the
//! reference has converged when doubling its size does not move it beyond its noise).

use crate::error::{Error, Result};
use crate::harmonics::spectrum::AngularSpectrum;
use crate::measure::flat::gaussian_random_field;
use crate::measure::measurement::{border_window, MeasurementSettings, SphereMeasurer};
use crate::scattering::pooling::pooled_coefficients;
use crate::scattering::statistics::{CoefficientKind, CoefficientSet, CoefficientSpelling};
use crate::scattering::transform::TileView;
use crate::simulate::skies::SkyRecipe;
use crate::sky::footprint::Footprint;
use crate::sky::pixelization::{Ordering, Pixelization};
use crate::tiles::tiling::TilingSummary;

/// What to compare.
#[derive(Debug, Clone)]
pub struct FlatComparisonSettings {
    /// NSIDE of the sphere skies.
    pub nside: u32,
    /// C_ℓ of the field (of the Gaussian field g for lognormal skies).
    pub spectrum: AngularSpectrum,
    /// Lognormal shift κ0 (κ = κ0(exp(g − σ²/2) − 1)); `None` for Gaussian fields.
    pub lognormal_shift: Option<f64>,
    /// Tile sizes (pixels per side) to compare.
    pub tile_pixels: Vec<usize>,
    /// Sphere skies per tile size.
    pub skies: usize,
    /// Flat fields per tile size.
    pub flat_fields: usize,
    /// Scales, orientations, border and estimator settings (tile_pixels is replaced per size).
    pub measurement: MeasurementSettings,
    /// Size m of the periodic flat fields the reference tiles are cut from; `None`:
    /// [`automatic_reference_pixels`] for each tile size.
    pub reference_pixels: Option<usize>,
    /// Base seed.
    pub seed: u64,
}

/// One coefficient at one tile size.
#[derive(Debug, Clone, serde::Serialize, serde::Deserialize)]
pub struct FlatComparisonRow {
    pub tile_pixels: usize,
    pub tile_width_deg: f64,
    /// How the footprint was cut into cores (e.g. "latitude bands").
    pub cells: String,
    pub coefficient: String,
    pub order: u8,
    pub j1: Option<usize>,
    pub sphere_mean: f64,
    pub sphere_error: f64,
    pub flat_mean: f64,
    pub flat_error: f64,
    /// (sphere − flat) / flat.
    pub relative_bias: f64,
    /// (sphere − flat) / √(σ_sphere² + σ_flat²) of the two means.
    pub bias_in_errors: f64,
    /// (sphere − flat) / scatter of one full-footprint sky.
    pub bias_per_sky_scatter: f64,
    /// Trusted on the sphere in every sky.
    pub trusted: bool,
    /// Size m of the periodic flat fields the reference tiles were cut from (0: not recorded).
    #[serde(default)]
    pub reference_pixels: usize,
    /// Relative change of the flat mean when the reference fields are doubled to 2m:
    /// (flat(2m) − flat(m)) / flat(m).
    #[serde(default = "not_measured")]
    pub reference_change: f64,
    /// The same change in units of its standard error √(σ_m² + σ_2m²).
    #[serde(default = "not_measured")]
    pub reference_change_in_errors: f64,
    /// Whether the change is within [`CONVERGENCE_ERRORS`] standard errors (`None`: not
    /// checked).
    #[serde(default)]
    pub reference_converged: Option<bool>,
}

fn not_measured() -> f64 {
    f64::NAN
}

/// A reference is called converged when doubling its field size moves a coefficient's mean by
/// less than this many standard errors of the change (2: about 5% of coefficients of a
/// converged reference are flagged by chance, for Gaussian errors).
pub const CONVERGENCE_ERRORS: f64 = 2.0;

/// The default size of the periodic flat fields for n-pixel tiles and J scales: the smallest
/// n·2^k (k ≥ 1) of at least 32·2^{J−1} pixels, i.e. 12 wavelengths of the largest wavelet
/// ((8/3)·2^{J−1} pixels). Measured: see docs/validation.md, "compare-flat".
pub fn automatic_reference_pixels(n: usize, scales: usize) -> usize {
    let need = 32usize << scales.saturating_sub(1).min(20);
    let mut m = 2 * n;
    while m < need {
        m *= 2;
    }
    m
}

fn mean_and_std(x: &[f64]) -> (f64, f64) {
    let n = x.len() as f64;
    let m = x.iter().sum::<f64>() / n;
    let v = if x.len() > 1 {
        x.iter().map(|y| (y - m).powi(2)).sum::<f64>() / (n - 1.0)
    } else {
        0.0
    };
    (m, v.sqrt())
}

/// C(ℓ) at non-integer ℓ by linear interpolation, 0 outside the table.
fn spectrum_at(cl: &[f64], ell: f64) -> f64 {
    if ell < 0.0 || ell > (cl.len() - 1) as f64 {
        return 0.0;
    }
    let i = ell.floor() as usize;
    if i + 1 >= cl.len() {
        return cl[cl.len() - 1];
    }
    let t = ell - i as f64;
    cl[i] * (1.0 - t) + cl[i + 1] * t
}

/// Runs the comparison.
/// The doubling check of the flat reference for one scale: the orientation mean of S1 or of the
/// band power at scale j, per flat field, at reference sizes m and 2m.
#[derive(Debug, Clone, serde::Serialize)]
pub struct ScaleConvergence {
    pub tile_pixels: usize,
    /// "S1" or "bandpower".
    pub kind: String,
    pub j: usize,
    /// Size m of the reference fields.
    pub reference_pixels: usize,
    /// Orientation mean at m, with its standard error.
    pub mean: f64,
    pub error: f64,
    /// Orientation mean at 2m, with its standard error.
    pub doubled_mean: f64,
    pub doubled_error: f64,
    /// (doubled − mean)/mean.
    pub change: f64,
    /// (doubled − mean)/√(error² + doubled_error²).
    pub change_in_errors: f64,
    /// |change_in_errors| < [`CONVERGENCE_ERRORS`].
    pub converged: bool,
}

/// Everything a comparison measures: one row per coefficient and tile size, and the doubling
/// check of the flat reference per scale.
#[derive(Debug, Clone)]
pub struct FlatComparison {
    pub rows: Vec<FlatComparisonRow>,
    pub scales: Vec<ScaleConvergence>,
}

/// The per-scale doubling checks of one tile size (see [`ScaleConvergence`]).
fn scale_convergence(
    n: usize,
    m: usize,
    flat: &[crate::scattering::statistics::CoefficientSet],
    doubled: &[crate::scattering::statistics::CoefficientSet],
) -> Vec<ScaleConvergence> {
    let mut out = Vec::new();
    let Some(first) = flat.first() else {
        return out;
    };
    let labels: Vec<_> = first.coefficients.iter().map(|c| c.label).collect();
    for (kind, name) in [CoefficientKind::FirstOrder, CoefficientKind::BandPower]
        .map(|kind| (kind, kind.stem(CoefficientSpelling::Short)))
    {
        let mut scales: Vec<usize> = labels
            .iter()
            .filter(|l| l.kind == kind)
            .filter_map(|l| l.path.j1)
            .collect();
        scales.dedup();
        for j in scales {
            let columns: Vec<usize> = (0..labels.len())
                .filter(|&k| labels[k].kind == kind && labels[k].path.j1 == Some(j))
                .collect();
            let per_field = |sets: &[crate::scattering::statistics::CoefficientSet]| -> Vec<f64> {
                sets.iter()
                    .map(|set| {
                        columns
                            .iter()
                            .map(|&k| set.coefficients[k].value)
                            .sum::<f64>()
                            / columns.len() as f64
                    })
                    .collect()
            };
            let (a, b) = (per_field(flat), per_field(doubled));
            let (ma, sa) = mean_and_std(&a);
            let (mb, sb) = mean_and_std(&b);
            let (ea, eb) = (sa / (a.len() as f64).sqrt(), sb / (b.len() as f64).sqrt());
            let t = (mb - ma) / (ea * ea + eb * eb).sqrt();
            out.push(ScaleConvergence {
                tile_pixels: n,
                kind: name.to_string(),
                j,
                reference_pixels: m,
                mean: ma,
                error: ea,
                doubled_mean: mb,
                doubled_error: eb,
                change: (mb - ma) / ma,
                change_in_errors: t,
                converged: t.abs() < CONVERGENCE_ERRORS,
            });
        }
    }
    out
}

/// Runs the comparison.
pub fn compare_flat(settings: &FlatComparisonSettings) -> Result<FlatComparison> {
    check_settings(settings)?;
    let pix = Pixelization::new(settings.nside, Ordering::Ring)?;
    let full = Footprint::full_sky(pix);
    let mut recipe = SkyRecipe::gaussian(settings.nside, settings.spectrum.clone(), settings.seed);
    recipe.lognormal_shift = settings.lognormal_shift;
    recipe.spectrum_is_gaussian = true;
    let sht = recipe.transform()?;
    let skies: Vec<_> = (0..settings.skies as u64)
        .map(|i| recipe.realise(&sht, i))
        .collect::<Result<_>>()?;
    let cl = &settings.spectrum.cl;
    let mut rows = Vec::new();
    let mut scales = Vec::new();
    for &n in &settings.tile_pixels {
        // plane pixels of one map spacing, read directly, unless set: the comparison shows what
        // the sampling and the projection do to every scale the map's grid reaches
        let ms = MeasurementSettings {
            tile_pixels: Some(n),
            bispectrum: false,
            ..settings.measurement.at_map_spacing_unless_set(pix)
        };
        let measurer = SphereMeasurer::new(pix, &full, ms)?;
        let summary = measurer.summary();
        let sphere: Vec<_> = skies
            .iter()
            .map(|m| measurer.measure(m, &full).map(|s| s.coefficients))
            .collect::<Result<_>>()?;
        // flat fields: same engine, same border taper, pooled over a central square as large as
        // the interior the sphere cores use
        let engine = measurer.engine();
        let delta = measurer.plan().pixel_size();
        let taper = border_window(n, ms.border_pixels);
        let halo = ms.halo();
        let weight = central_square_weight(n, halo);
        let power = |k: f64| spectrum_at(cl, k - 0.5);
        let m = settings
            .reference_pixels
            .unwrap_or_else(|| automatic_reference_pixels(n, settings.measurement.scales));
        if m < n {
            return Err(Error::Setting(format!(
                "the flat reference fields ({m} pixels) must be at least as large as the largest tile ({n} pixels)"
            )));
        }
        crate::limits::check_memory(
            &format!("flat reference fields of {} pixels", 2 * m),
            (4 * m * m * 16) as f64,
        )?;
        let reference = |size: usize, stream: u64| {
            flat_reference(
                engine,
                &FlatTile {
                    n,
                    taper: &taper,
                    weight: &weight,
                },
                size,
                delta,
                &power,
                settings.lognormal_shift,
                settings.flat_fields,
                settings.seed ^ stream,
            )
        };
        let flat = reference(m, 0xF1A7)?;
        let doubled = reference(2 * m, 0x0002_F1A7_0000)?;
        scales.extend(scale_convergence(n, m, &flat, &doubled));
        rows.extend(comparison_rows((n, m), &summary, &sphere, &flat, &doubled));
    }
    Ok(FlatComparison { rows, scales })
}

/// Refuses too few skies or flat fields, no tile size, measurement settings the one validation
/// refuses ([`MeasurementSettings::validate`], per tile size), or reference fields smaller than
/// the largest tile.
fn check_settings(settings: &FlatComparisonSettings) -> Result<()> {
    if settings.skies < 2 || settings.flat_fields < 2 {
        return Err(Error::Setting(
            "the comparison needs at least 2 skies and 2 flat fields".into(),
        ));
    }
    if settings.tile_pixels.is_empty() {
        return Err(Error::Setting("give at least one tile size".into()));
    }
    if let (Some(m), Some(&n)) = (settings.reference_pixels, settings.tile_pixels.iter().max()) {
        if m < n {
            return Err(Error::Setting(format!(
                "the flat reference fields ({m} pixels) must be at least as large as the largest tile ({n} pixels)"
            )));
        }
    }
    for &n in &settings.tile_pixels {
        MeasurementSettings {
            tile_pixels: Some(n),
            ..settings.measurement
        }
        .validate()?;
    }
    Ok(())
}

/// Pooling weight of a flat n × n tile: 1 on the central square inside the halo, 0 outside.
fn central_square_weight(n: usize, halo: usize) -> Vec<f64> {
    (0..n * n)
        .map(|k| {
            let (x, y) = (k % n, k / n);
            let inside = |i: usize| i >= halo && i < n - halo;
            if inside(x) && inside(y) {
                1.0
            } else {
                0.0
            }
        })
        .collect()
}

/// One row per coefficient (mean and variance left out) of tile size n: the sphere ensemble
/// against the flat reference fields of m pixels, and the change of the reference at 2m.
fn comparison_rows(
    (n, m): (usize, usize),
    summary: &TilingSummary,
    sphere: &[CoefficientSet],
    flat: &[CoefficientSet],
    doubled: &[CoefficientSet],
) -> Vec<FlatComparisonRow> {
    let mut rows = Vec::new();
    for (k, c) in sphere[0].coefficients.iter().enumerate() {
        if matches!(
            c.label.kind,
            CoefficientKind::Mean | CoefficientKind::Variance
        ) {
            continue;
        }
        let s: Vec<f64> = sphere.iter().map(|set| set.coefficients[k].value).collect();
        let f: Vec<f64> = flat.iter().map(|set| set.coefficients[k].value).collect();
        let f2: Vec<f64> = doubled
            .iter()
            .map(|set| set.coefficients[k].value)
            .collect();
        let (sm, ss) = mean_and_std(&s);
        let (fm, fs) = mean_and_std(&f);
        let (fm2, fs2) = mean_and_std(&f2);
        let se = ss / (s.len() as f64).sqrt();
        let fe = fs / (f.len() as f64).sqrt();
        let fe2 = fs2 / (f2.len() as f64).sqrt();
        let change_in_errors = (fm2 - fm) / (fe * fe + fe2 * fe2).sqrt();
        let diff = sm - fm;
        let l = c.label;
        rows.push(FlatComparisonRow {
            tile_pixels: n,
            tile_width_deg: summary.tile_width_deg,
            cells: summary.cells.clone(),
            coefficient: l.name(CoefficientSpelling::Short),
            order: l.order,
            j1: l.path.j1,
            sphere_mean: sm,
            sphere_error: se,
            flat_mean: fm,
            flat_error: fe,
            relative_bias: diff / fm,
            bias_in_errors: diff / (se * se + fe * fe).sqrt(),
            bias_per_sky_scatter: if ss > 0.0 { diff / ss } else { f64::NAN },
            trusted: sphere.iter().all(|set| set.coefficients[k].trusted),
            reference_pixels: m,
            reference_change: (fm2 - fm) / fm,
            reference_change_in_errors: change_in_errors,
            reference_converged: change_in_errors
                .is_finite()
                .then_some(change_in_errors.abs() < CONVERGENCE_ERRORS),
        });
    }
    rows
}

/// The taper and pooling weight of a flat reference tile (those of the sphere tiles).
struct FlatTile<'a> {
    n: usize,
    taper: &'a [f64],
    weight: &'a [f64],
}

/// `count` flat reference samples: periodic Gaussian fields of `size` × `size` pixels with
/// P(k) = `power`(k) ([`gaussian_random_field`], seeds `seed` ⊕ (i + 1)·2^20), made lognormal
/// κ = κ0(exp(g − σ²/2) − 1) when asked (σ² the field's variance Σ_q P(k_q)/(size·Δ)²), each
/// measured on its n × n corner with the tile's taper and weight.
#[allow(clippy::too_many_arguments)]
fn flat_reference(
    engine: &crate::scattering::transform::ScatteringEngine,
    tile: &FlatTile,
    size: usize,
    delta: f64,
    power: &dyn Fn(f64) -> f64,
    lognormal_shift: Option<f64>,
    count: usize,
    seed: u64,
) -> Result<Vec<crate::scattering::statistics::CoefficientSet>> {
    let n = tile.n;
    // variance of the flat Gaussian field: Σ_q P(k_q) / (size Δ)²
    let var_g: f64 = (1..size * size)
        .map(|q| {
            power(crate::measure::flat::wavenumber(
                q % size,
                q / size,
                size,
                delta,
            ))
        })
        .sum::<f64>()
        / (size as f64 * delta).powi(2);
    (0..count as u64)
        .map(|i| {
            let g = gaussian_random_field(size, delta, power, seed ^ ((i + 1) << 20))?;
            let corner: Vec<f64> = (0..n * n)
                .map(|k| g.values()[(k / n) * size + k % n])
                .collect();
            let values: Vec<f64> = match lognormal_shift {
                Some(k0) => corner
                    .iter()
                    .map(|x| k0 * ((x - 0.5 * var_g).exp() - 1.0))
                    .collect(),
                None => corner,
            };
            let sums = engine.transform_tile(&TileView {
                field: &values,
                taper: tile.taper,
                weight: tile.weight,
            })?;
            pooled_coefficients(engine, &sums)
        })
        .collect()
}

/// The rows as CSV.
pub fn rows_csv(rows: &[FlatComparisonRow]) -> String {
    let mut s = String::from(
        "tile_pixels,tile_width_deg,cells,coefficient,order,j1,sphere_mean,sphere_error,flat_mean,flat_error,relative_bias,bias_in_errors,bias_per_sky_scatter,trusted,reference_pixels,reference_change,reference_change_in_errors,reference_converged\n",
    );
    for r in rows {
        s.push_str(&format!(
            "{},{:.3},{},{},{},{},{:.8e},{:.3e},{:.8e},{:.3e},{:.5},{:.3},{:.3},{},{},{:.5},{:.3},{}\n",
            r.tile_pixels,
            r.tile_width_deg,
            r.cells,
            r.coefficient,
            r.order,
            r.j1.map(|j| j.to_string()).unwrap_or_default(),
            r.sphere_mean,
            r.sphere_error,
            r.flat_mean,
            r.flat_error,
            r.relative_bias,
            r.bias_in_errors,
            r.bias_per_sky_scatter,
            r.trusted,
            r.reference_pixels,
            r.reference_change,
            r.reference_change_in_errors,
            r.reference_converged
                .map(|c| c.to_string())
                .unwrap_or_default()
        ));
    }
    s
}
