//! The sphere-mode picture of `synthesize`: a row of Mollweide views (target | Gaussian sky of
//! the same pseudo-C_ℓ | synthesised), under it the same three maps in a zoomed gnomonic view
//! of one region of the footprint, where the texture is visible pixel by pixel, and the
//! one-point histograms and the peak counts of target, Gaussian sky and result beside them.

use crate::error::{Error, Result};
use crate::figures::plotting::{colour_ramp, SkyPicture, FONT_FAMILY};
use crate::sky::footprint::Footprint;
use crate::sky::pixelization::Direction;
use crate::sky::skymap::SkyMap;
use crate::tiles::projection::Gnomonic;
use plotters::coord::ranged1d::ValueFormatter;
use plotters::prelude::*;
use std::path::Path;

/// Side of a zoomed panel, picture pixels.
const ZOOM_SIDE: u32 = 300;
/// Half-width of the zoomed region in map spacings (the region is 2 × 16 spacings across).
const ZOOM_HALF_SPACINGS: f64 = 16.0;

/// One map of the picture: title, map (invalid outside the footprint) and its values on the
/// footprint, peak counts at the thresholds.
pub(super) struct ShownMap<'a> {
    pub title: &'a str,
    pub map: &'a SkyMap,
    pub values: Vec<f64>,
    pub peaks: Vec<usize>,
    pub colour: [u8; 3],
}

/// The centre of the zoomed region: among the footprint pixels of nearly full weight
/// (≥ 0.99 of the largest), the one nearest to the footprint's weighted mean direction.
pub(super) fn zoom_centre(footprint: &Footprint) -> Direction {
    let pix = footprint.pixelization();
    let w = footprint.weights();
    let top = w.iter().copied().fold(0.0, f64::max);
    let mut v = [0.0; 3];
    for (p, &wp) in w.iter().enumerate() {
        if wp > 0.0 {
            let d = pix.center(p as u64).to_vector();
            for k in 0..3 {
                v[k] += wp * d[k];
            }
        }
    }
    let mean = Direction::from_vector(v);
    let mut best = (f64::INFINITY, mean);
    for (p, &wp) in w.iter().enumerate() {
        if wp >= 0.99 * top && wp > 0.0 {
            let d = pix.center(p as u64);
            let r = d.distance(&mean);
            if r < best.0 {
                best = (r, d);
            }
        }
    }
    best.1
}

fn draw_error(path: &Path) -> impl Fn(&dyn std::fmt::Display) -> Error + '_ {
    move |e| Error::io(path, format!("cannot draw: {e}"))
}

/// Writes the picture (atomically). `mollweide` holds the three Mollweide views; `maps` the
/// same three maps; `lo`, `hi` the colour range; `thresholds` the ν of the peak counts.
pub(super) fn write_sphere_picture(
    path: &Path,
    mollweide: &[SkyPicture<'_>],
    maps: &[ShownMap<'_>],
    centre: Direction,
    (lo, hi): (f64, f64),
    thresholds: &[f64],
) -> Result<()> {
    crate::figures::plotting::register_font()?;
    let top_w: u32 = mollweide.iter().map(|p| p.size().0).sum();
    let top_h = mollweide.iter().map(|p| p.size().1).max().unwrap_or(0);
    let margin = 12u32;
    let title_h = 28u32;
    let chart_w = 470u32;
    let chart_h = ZOOM_SIDE + title_h + 4;
    let zoom_w = maps.len() as u32 * (ZOOM_SIDE + margin) + margin;
    let width = top_w.max(zoom_w + 2 * (chart_w + margin));
    let height = top_h + chart_h + 2 * margin;
    let spacing = maps
        .first()
        .map(|m| m.map.pixelization().mean_spacing())
        .unwrap_or(1.0);
    let half = (ZOOM_HALF_SPACINGS * spacing).tan();
    let projection = Gnomonic::new(centre);
    let span = if hi > lo { hi - lo } else { 1.0 };
    let fail = draw_error(path);
    crate::figures::plotting::write_png_atomically(path, (width, height), |root, png| {
        let mut x0 = 0i32;
        for p in mollweide {
            let (w, h) = p.size();
            let area = root.clone().shrink((x0, 0), (w, h));
            p.render_on(&area, png)?;
            x0 += w as i32;
        }
        // zoomed gnomonic panels
        let y0 = top_h as i32;
        let (lon, lat) = centre.lonlat();
        root.draw(&Text::new(
            format!(
                "zoom: gnomonic view {:.1}° across, centred on lon {:.1}°, lat {:.1}°",
                2.0 * ZOOM_HALF_SPACINGS * spacing.to_degrees(),
                lon.to_degrees(),
                lat.to_degrees()
            ),
            (margin as i32, y0),
            (FONT_FAMILY, 16).into_font(),
        ))
        .map_err(|e| fail(&e))?;
        for (k, m) in maps.iter().enumerate() {
            let px0 = (margin + k as u32 * (ZOOM_SIDE + margin)) as i32;
            let py0 = y0 + title_h as i32;
            root.draw(&Text::new(
                m.title.to_string(),
                (px0, py0 - 8),
                (FONT_FAMILY, 15).into_font(),
            ))
            .map_err(|e| fail(&e))?;
            draw_zoomed_map(
                root,
                m.map,
                (px0, py0 + 4),
                (&projection, half),
                (lo, span),
                &fail,
            )?;
        }
        // histograms and peak counts, right of the zoomed views
        let cy = top_h as i32;
        let cx = zoom_w as i32;
        let hist_area = root.clone().shrink((cx, cy), (chart_w, chart_h));
        draw_histograms(&hist_area, maps).map_err(|e| fail(&e))?;
        let peak_area = root
            .clone()
            .shrink((cx + (chart_w + margin) as i32, cy), (chart_w, chart_h));
        draw_peaks(&peak_area, maps, thresholds).map_err(|e| fail(&e))?;
        Ok(())
    })
}

/// Draws `map` as seen in the gnomonic `projection` over |x|, |y| ≤ `half` (nearest pixel,
/// colours over `lo` … `lo + span`) in a square of [`ZOOM_SIDE`] pixels from `(x0, y0)`.
fn draw_zoomed_map(
    root: &Area<'_>,
    map: &SkyMap,
    (x0, y0): (i32, i32),
    (projection, half): (&Gnomonic, f64),
    (lo, span): (f64, f64),
    fail: &dyn Fn(&dyn std::fmt::Display) -> Error,
) -> Result<()> {
    for iy in 0..ZOOM_SIDE {
        for ix in 0..ZOOM_SIDE {
            // x to the east (left on the sky as seen from inside: drawn mirrored
            // like the Mollweide views, east to the left), y to the north
            let x = -half + 2.0 * half * (ix as f64 + 0.5) / ZOOM_SIDE as f64;
            let y = half - 2.0 * half * (iy as f64 + 0.5) / ZOOM_SIDE as f64;
            let d = projection.inverse(-x, y);
            let [r, g, b] = match map.nearest(d) {
                Some(v) => colour_ramp((v - lo) / span),
                None => [235, 235, 235],
            };
            root.draw_pixel((x0 + ix as i32, y0 + iy as i32), &RGBColor(r, g, b))
                .map_err(|e| fail(&e))?;
        }
    }
    Ok(())
}

type Area<'b> = DrawingArea<BitMapBackend<'b>, plotters::coord::Shift>;
type DrawResult = std::result::Result<(), String>;

/// The chart of one panel of the summary picture: its caption, margin and axis label areas.
fn panel_builder<'a, 'b>(
    area: &'a Area<'b>,
    caption: &str,
) -> ChartBuilder<'a, 'static, BitMapBackend<'b>> {
    let mut builder = ChartBuilder::on(area);
    builder
        .caption(caption, (FONT_FAMILY, 18))
        .margin(8)
        .x_label_area_size(40)
        .y_label_area_size(50);
    builder
}

/// A panel's grid, tick labels and axis titles.
fn draw_mesh<X, Y>(
    chart: &mut ChartContext<'_, BitMapBackend<'_>, Cartesian2d<X, Y>>,
    x_desc: &str,
    y_desc: &str,
) -> DrawResult
where
    X: Ranged + ValueFormatter<X::ValueType>,
    Y: Ranged + ValueFormatter<Y::ValueType>,
{
    chart
        .configure_mesh()
        .x_desc(x_desc)
        .y_desc(y_desc)
        .label_style((FONT_FAMILY, 13))
        .axis_desc_style((FONT_FAMILY, 14))
        .draw()
        .map_err(|e| e.to_string())
}

/// A panel's legend, upper right.
fn draw_legend<'a, 'b: 'a, X: Ranged, Y: Ranged>(
    chart: &mut ChartContext<'a, BitMapBackend<'b>, Cartesian2d<X, Y>>,
) -> DrawResult {
    chart
        .configure_series_labels()
        .position(SeriesLabelPosition::UpperRight)
        .label_font((FONT_FAMILY, 13))
        .background_style(WHITE.mix(0.8))
        .border_style(BLACK)
        .draw()
        .map_err(|e| e.to_string())
}

/// Histograms of the footprint values in units of the first map's standard deviation around
/// its mean (40 bins over the union of the ranges), counts on a logarithmic axis.
fn draw_histograms(area: &Area<'_>, maps: &[ShownMap<'_>]) -> DrawResult {
    let first = &maps[0].values;
    let (mean, sd, _, _) = crate::synthesis::one_point_moments(first);
    let sd = if sd > 0.0 { sd } else { 1.0 };
    let scaled: Vec<Vec<f64>> = maps
        .iter()
        .map(|m| m.values.iter().map(|v| (v - mean) / sd).collect())
        .collect();
    let lo = scaled
        .iter()
        .flatten()
        .copied()
        .fold(f64::INFINITY, f64::min);
    let hi = scaled
        .iter()
        .flatten()
        .copied()
        .fold(f64::NEG_INFINITY, f64::max);
    let bins = 40usize;
    let width = if hi > lo {
        (hi - lo) / bins as f64
    } else {
        1.0
    };
    let counts: Vec<Vec<usize>> = scaled
        .iter()
        .map(|vals| {
            let mut c = vec![0usize; bins];
            for v in vals {
                let b = (((v - lo) / width) as usize).min(bins - 1);
                c[b] += 1;
            }
            c
        })
        .collect();
    let top = counts.iter().flatten().copied().max().unwrap_or(1).max(1) as f64;
    let mut chart = panel_builder(area, "one-point histogram")
        .build_cartesian_2d(lo..hi + width, (0.8..top * 1.5).log_scale())
        .map_err(|e| e.to_string())?;
    draw_mesh(&mut chart, "(value − target mean) / target rms", "pixels")?;
    for (m, c) in maps.iter().zip(&counts) {
        let colour = RGBColor(m.colour[0], m.colour[1], m.colour[2]);
        let mut points = Vec::new();
        for (b, &n) in c.iter().enumerate() {
            if n > 0 {
                let x = lo + (b as f64 + 0.5) * width;
                points.push((x, n as f64));
            }
        }
        chart
            .draw_series(LineSeries::new(points, colour.stroke_width(2)))
            .map_err(|e| e.to_string())?
            .label(m.title.to_string())
            .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 18, y)], colour));
    }
    draw_legend(&mut chart)
}

/// Peak counts against the threshold ν, with Poisson error bars √N.
fn draw_peaks(area: &Area<'_>, maps: &[ShownMap<'_>], thresholds: &[f64]) -> DrawResult {
    let top = maps
        .iter()
        .flat_map(|m| m.peaks.iter())
        .copied()
        .max()
        .unwrap_or(1)
        .max(1) as f64;
    let (x_lo, x_hi) = (
        thresholds.iter().copied().fold(f64::INFINITY, f64::min) - 0.5,
        thresholds.iter().copied().fold(f64::NEG_INFINITY, f64::max) + 0.5,
    );
    let mut chart = panel_builder(area, "peak counts (± Poisson)")
        .build_cartesian_2d(x_lo..x_hi, 0.0..(top + 2.0 * top.sqrt()) * 1.1)
        .map_err(|e| e.to_string())?;
    draw_mesh(&mut chart, "peaks above mean + ν rms: ν", "peaks")?;
    let n = maps.len() as f64;
    for (k, m) in maps.iter().enumerate() {
        let colour = RGBColor(m.colour[0], m.colour[1], m.colour[2]);
        let shift = 0.08 * (k as f64 - (n - 1.0) / 2.0);
        let points: Vec<(f64, f64)> = thresholds
            .iter()
            .zip(&m.peaks)
            .map(|(&nu, &c)| (nu + shift, c as f64))
            .collect();
        chart
            .draw_series(points.iter().map(|&(x, y)| {
                let e = y.sqrt();
                PathElement::new(vec![(x, y - e), (x, y + e)], colour.stroke_width(2))
            }))
            .map_err(|e| e.to_string())?;
        chart
            .draw_series(points.iter().map(|&p| Circle::new(p, 4, colour.filled())))
            .map_err(|e| e.to_string())?
            .label(m.title.to_string())
            .legend(move |(x, y)| Circle::new((x + 9, y), 4, colour.filled()));
    }
    draw_legend(&mut chart)
}
