//! How far is a flat-sky answer off? Gaussian (or lognormal) skies of a spectrum C_ℓ measured on
//! the sphere through tangent-plane tiles, against flat fields with P(k) = C_{k−½} (LoVerde &
//! Afshordi 2008, PRD 78, 123506) measured by the same engine with the same tile taper and core
//! size, at the same pixel scale. The bias of each coefficient is reported relative to its value,
//! in units of the error of the difference of the two ensemble means, and in units of the
//! scatter of one sky.

use crate::error::{Error, Result};
use crate::flat::gaussian_random_field;
use crate::footprint::Footprint;
use crate::measurement::{border_window, MeasurementSettings, SphereMeasurer};
use crate::pixelization::{Ordering, Pixelization};
use crate::pooling::pooled_coefficients;
use crate::skies::SkyRecipe;
use crate::spectrum::AngularSpectrum;
use crate::statistics::CoefficientKind;
use crate::transform::TileView;

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
pub fn compare_flat(settings: &FlatComparisonSettings) -> Result<Vec<FlatComparisonRow>> {
    if settings.skies < 2 || settings.flat_fields < 2 {
        return Err(Error::Setting(
            "the comparison needs at least 2 skies and 2 flat fields".into(),
        ));
    }
    if settings.tile_pixels.is_empty() {
        return Err(Error::Setting("give at least one tile size".into()));
    }
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
    for &n in &settings.tile_pixels {
        let ms = MeasurementSettings {
            tile_pixels: Some(n),
            bispectrum: false,
            ..settings.measurement
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
        let weight: Vec<f64> = (0..n * n)
            .map(|k| {
                let (x, y) = (k % n, k / n);
                let inside = |i: usize| i >= halo && i < n - halo;
                if inside(x) && inside(y) {
                    1.0
                } else {
                    0.0
                }
            })
            .collect();
        let power = |k: f64| spectrum_at(cl, k - 0.5);
        // variance of the flat Gaussian field: Σ_q P(k_q) / (n Δ)²
        let var_g: f64 = (0..n * n)
            .map(|q| {
                let k = crate::flat::wavenumber(q % n, q / n, n, delta);
                if q == 0 {
                    0.0
                } else {
                    power(k)
                }
            })
            .sum::<f64>()
            / (n as f64 * delta).powi(2);
        let flat: Vec<_> = (0..settings.flat_fields as u64)
            .map(|i| {
                let g = gaussian_random_field(n, delta, &power, settings.seed ^ (0xF1A7 + i))?;
                let values: Vec<f64> = match settings.lognormal_shift {
                    Some(k0) => g
                        .values()
                        .iter()
                        .map(|x| k0 * ((x - 0.5 * var_g).exp() - 1.0))
                        .collect(),
                    None => g.values().to_vec(),
                };
                let sums = engine.transform_tile(&TileView {
                    field: &values,
                    taper: &taper,
                    weight: &weight,
                })?;
                pooled_coefficients(engine, &sums)
            })
            .collect::<Result<_>>()?;
        for (k, c) in sphere[0].coefficients.iter().enumerate() {
            if matches!(
                c.label.kind,
                CoefficientKind::Mean | CoefficientKind::Variance
            ) {
                continue;
            }
            let s: Vec<f64> = sphere.iter().map(|set| set.coefficients[k].value).collect();
            let f: Vec<f64> = flat.iter().map(|set| set.coefficients[k].value).collect();
            let (sm, ss) = mean_and_std(&s);
            let (fm, fs) = mean_and_std(&f);
            let se = ss / (s.len() as f64).sqrt();
            let fe = fs / (f.len() as f64).sqrt();
            let diff = sm - fm;
            let l = c.label;
            let name = match l.kind {
                CoefficientKind::FirstOrder => {
                    format!("S1_j{}_l{}", l.j1.unwrap_or(0), l.l1.unwrap_or(0))
                }
                CoefficientKind::BandPower => {
                    format!("bandpower_j{}_l{}", l.j1.unwrap_or(0), l.l1.unwrap_or(0))
                }
                _ => format!(
                    "S2_j{}_l{}_j{}_l{}",
                    l.j1.unwrap_or(0),
                    l.l1.unwrap_or(0),
                    l.j2.unwrap_or(0),
                    l.l2.unwrap_or(0)
                ),
            };
            rows.push(FlatComparisonRow {
                tile_pixels: n,
                tile_width_deg: summary.tile_width_deg,
                cells: summary.cells.clone(),
                coefficient: name,
                order: l.order,
                j1: l.j1,
                sphere_mean: sm,
                sphere_error: se,
                flat_mean: fm,
                flat_error: fe,
                relative_bias: diff / fm,
                bias_in_errors: diff / (se * se + fe * fe).sqrt(),
                bias_per_sky_scatter: if ss > 0.0 { diff / ss } else { f64::NAN },
                trusted: sphere.iter().all(|set| set.coefficients[k].trusted),
            });
        }
    }
    Ok(rows)
}

/// The rows as CSV.
pub fn rows_csv(rows: &[FlatComparisonRow]) -> String {
    let mut s = String::from(
        "tile_pixels,tile_width_deg,cells,coefficient,order,j1,sphere_mean,sphere_error,flat_mean,flat_error,relative_bias,bias_in_errors,bias_per_sky_scatter,trusted\n",
    );
    for r in rows {
        s.push_str(&format!(
            "{},{:.3},{},{},{},{},{:.8e},{:.3e},{:.8e},{:.3e},{:.5},{:.3},{:.3},{}\n",
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
            r.trusted
        ));
    }
    s
}
