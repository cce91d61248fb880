//! Sky pictures in the Mollweide projection, drawn with `plotters` into PNG files.
//!
//! A [`SkyPicture`] is a raster layer (a colour per direction, e.g. a map or a footprint), plus
//! polylines and points given as directions on the sphere, a title and note lines. It knows
//! nothing of tiles or maps, so any module can draw with it.
//!
//! Mollweide projection (Snyder 1987, USGS Prof. Paper 1395, §31, eqs. 31-1 to 31-6, from
//! memory; equal-area): x = (2√2/π) λ cos ψ, y = √2 sin ψ with 2ψ + sin 2ψ = π sin φ; the inverse
//! is ψ = asin(y/√2), φ = asin((2ψ + sin 2ψ)/π), λ = π x / (2√2 cos ψ). Longitude grows to the
//! left, as the sky is seen from inside the sphere (common practice for sky maps), with the
//! chosen central longitude in the middle.

use crate::error::{Error, Result};
use crate::files::write_atomically;
use crate::sky::pixelization::Direction;
use plotters::prelude::*;
use plotters::style::FontStyle;
use std::f64::consts::{PI, SQRT_2};
use std::path::Path;
use std::sync::OnceLock;

/// The shipped font (DejaVu Sans, Bitstream Vera licence, see assets/fonts/).
static FONT_BYTES: &[u8] = include_bytes!("../../assets/fonts/DejaVuSans.ttf");

/// Font family name under which the shipped font is registered with plotters.
pub const FONT_FAMILY: &str = "sans-serif";

/// Registers the shipped TTF with plotters' ab_glyph font table (once per process); text on a
/// bitmap cannot be drawn without a registered font.
pub fn register_font() -> Result<()> {
    static DONE: OnceLock<bool> = OnceLock::new();
    let ok = *DONE.get_or_init(|| {
        plotters::style::register_font(FONT_FAMILY, FontStyle::Normal, FONT_BYTES).is_ok()
    });
    if ok {
        Ok(())
    } else {
        Err(Error::Data(
            "the shipped font assets/fonts/DejaVuSans.ttf could not be loaded".to_string(),
        ))
    }
}

/// Mollweide plane coordinates (x ∈ [−2√2, 2√2], y ∈ [−√2, √2]) of longitude λ (relative to
/// the central meridian, any value) and latitude φ, in radians; x grows with λ.
/// The auxiliary angle solves 2ψ + sin 2ψ = π sin φ by Newton's method (Snyder 1987, eq. 31-4).
pub fn mollweide_forward(lon: f64, lat: f64) -> (f64, f64) {
    let lam = (lon + PI).rem_euclid(2.0 * PI) - PI;
    let target = PI * lat.sin();
    let mut t = lat; // t = ψ
    if lat.abs() < FRAC_PI_2_MINUS {
        for _ in 0..50 {
            let f = 2.0 * t + (2.0 * t).sin() - target;
            let df = 2.0 + 2.0 * (2.0 * t).cos();
            if df.abs() < 1e-15 {
                break;
            }
            let step = f / df;
            t -= step;
            if step.abs() < 1e-14 {
                break;
            }
        }
    }
    (2.0 * SQRT_2 / PI * lam * t.cos(), SQRT_2 * t.sin())
}

const FRAC_PI_2_MINUS: f64 = std::f64::consts::FRAC_PI_2 - 1e-12;

/// Longitude (relative to the central meridian) and latitude of Mollweide point (x, y), or
/// `None` outside the ellipse (Snyder 1987, eqs. 31-5, 31-6).
pub fn mollweide_inverse(x: f64, y: f64) -> Option<(f64, f64)> {
    if (x / (2.0 * SQRT_2)).powi(2) + (y / SQRT_2).powi(2) > 1.0 {
        return None;
    }
    let psi = (y / SQRT_2).clamp(-1.0, 1.0).asin();
    let lat = ((2.0 * psi + (2.0 * psi).sin()) / PI)
        .clamp(-1.0, 1.0)
        .asin();
    let c = psi.cos();
    let lon = if c.abs() < 1e-15 {
        0.0
    } else {
        PI * x / (2.0 * SQRT_2 * c)
    };
    (lon.abs() <= PI + 1e-12).then_some((lon, lat))
}

/// An RGB colour.
pub type Rgb = [u8; 3];

/// A colour ramp from dark blue through teal and green to yellow for `t` in [0, 1] (clamped),
/// linear between five stops; NaN gives mid-grey.
pub fn colour_ramp(t: f64) -> Rgb {
    if t.is_nan() {
        return [128, 128, 128];
    }
    const STOPS: [Rgb; 5] = [
        [40, 20, 90],
        [40, 90, 150],
        [30, 150, 140],
        [120, 200, 80],
        [250, 230, 40],
    ];
    let s = t.clamp(0.0, 1.0) * (STOPS.len() - 1) as f64;
    let i = (s.floor() as usize).min(STOPS.len() - 2);
    let f = s - i as f64;
    let mut out = [0u8; 3];
    for k in 0..3 {
        out[k] = (STOPS[i][k] as f64 * (1.0 - f) + STOPS[i + 1][k] as f64 * f).round() as u8;
    }
    out
}

type Fill<'a> = Box<dyn Fn(Direction) -> Option<Rgb> + Sync + 'a>;

/// A Mollweide picture of the sky being put together.
pub struct SkyPicture<'a> {
    width: u32,
    central_lon: f64,
    title: String,
    fill: Option<Fill<'a>>,
    lines: Vec<(Vec<Direction>, Rgb, u32)>,
    points: Vec<(Direction, Rgb, u32)>,
    notes: Vec<String>,
}

impl<'a> SkyPicture<'a> {
    /// An empty picture `width` pixels wide (height = width/2 + room for the title and notes).
    pub fn new(width: u32, title: impl Into<String>) -> Self {
        SkyPicture {
            width: width.max(200),
            central_lon: 0.0,
            title: title.into(),
            fill: None,
            lines: Vec::new(),
            points: Vec::new(),
            notes: Vec::new(),
        }
    }

    /// Longitude (radians) at the centre of the picture (default 0).
    pub fn central_longitude(mut self, lon: f64) -> Self {
        self.central_lon = lon;
        self
    }

    /// The raster layer: a colour per direction, `None` for the background.
    pub fn fill(mut self, colour: impl Fn(Direction) -> Option<Rgb> + Sync + 'a) -> Self {
        self.fill = Some(Box::new(colour));
        self
    }

    /// The raster layer from a map: valid pixels coloured by [`colour_ramp`] over [lo, hi],
    /// invalid ones left as background.
    pub fn fill_map(self, map: &'a crate::sky::skymap::SkyMap, lo: f64, hi: f64) -> Self {
        let span = if hi > lo { hi - lo } else { 1.0 };
        self.fill(move |d| map.nearest(d).map(|v| colour_ramp((v - lo) / span)))
    }

    /// A polyline through `points` (joined along straight picture segments; split where it
    /// crosses the picture's edge meridian).
    pub fn line(&mut self, points: Vec<Direction>, colour: Rgb, width: u32) {
        self.lines.push((points, colour, width));
    }

    /// A dot at `dir`.
    pub fn point(&mut self, dir: Direction, colour: Rgb, radius: u32) {
        self.points.push((dir, colour, radius));
    }

    /// A line of text under the map.
    pub fn note(&mut self, text: impl Into<String>) {
        self.notes.push(text.into());
    }

    fn geometry(&self) -> (u32, u32, u32, f64) {
        let w = self.width;
        let title_h = w / 20 + 10;
        let map_h = w / 2;
        let notes_h = (self.notes.len() as u32) * (w / 45 + 6) + 10;
        // Picture pixels per Mollweide unit: the ellipse spans 4√2 across, with a margin.
        let scale = (w as f64 * 0.96) / (4.0 * SQRT_2);
        (title_h, map_h, title_h + map_h + notes_h, scale)
    }

    /// Picture pixel of a direction.
    fn to_pixel(&self, dir: Direction) -> (f64, f64) {
        let (title_h, map_h, _, scale) = self.geometry();
        let (x, y) = mollweide_forward(dir.lon() - self.central_lon, dir.lat());
        (
            self.width as f64 / 2.0 - x * scale,
            title_h as f64 + map_h as f64 / 2.0 - y * scale,
        )
    }

    /// Writes the picture as a PNG file (atomically: a temporary file renamed into place).
    pub fn write_png(&self, path: &Path) -> Result<()> {
        register_font()?;
        write_atomically(path, |tmp| {
            // plotters picks the image format from the extension, so render to `tmp`.png first.
            let mut png = tmp.as_os_str().to_owned();
            png.push(".png");
            let png = std::path::PathBuf::from(png);
            let result = self
                .render(&png)
                .and_then(|()| std::fs::rename(&png, tmp).map_err(|e| Error::io(path, e)));
            if result.is_err() {
                let _ = std::fs::remove_file(&png);
            }
            result.map_err(|e| match e {
                Error::Io { reason, .. } => Error::io(path, reason),
                other => other,
            })
        })
    }

    /// Draws into memory, encodes the PNG there and writes it with one call, so that a failed
    /// write (a full disk) is reported as the system's one-line reason.
    fn render(&self, png: &Path) -> Result<()> {
        use image::ImageEncoder;
        let (_, _, height, _) = self.geometry();
        let mut pixels = vec![0u8; self.width as usize * height as usize * 3];
        {
            let root =
                BitMapBackend::with_buffer(&mut pixels, (self.width, height)).into_drawing_area();
            self.render_on(&root, png)?;
            root.present()
                .map_err(|e| Error::io(png, format!("cannot draw: {e}")))?;
        }
        let mut bytes = Vec::new();
        image::codecs::png::PngEncoder::new(&mut bytes)
            .write_image(&pixels, self.width, height, image::ColorType::Rgb8)
            .map_err(|e| Error::io(png, format!("cannot encode the PNG: {e}")))?;
        std::fs::write(png, bytes).map_err(|e| Error::io(png, e))
    }

    /// Width and height of the picture in pixels.
    pub(crate) fn size(&self) -> (u32, u32) {
        (self.width, self.geometry().2)
    }

    /// Draws the picture on `root` (an area of at least `width` × height pixels).
    pub(crate) fn render_on(
        &self,
        root: &DrawingArea<BitMapBackend<'_>, plotters::coord::Shift>,
        png: &Path,
    ) -> Result<()> {
        let fail = |e: &dyn std::fmt::Display| Error::io(png, format!("cannot draw: {e}"));
        let (title_h, map_h, _, scale) = self.geometry();
        let w = self.width;
        root.fill(&WHITE).map_err(|e| fail(&e))?;
        // Raster layer, computed row by row in parallel, drawn sequentially.
        for (j, row) in self.raster_rows().iter().enumerate() {
            for (i, c) in row.iter().enumerate() {
                if let Some([r, g, b]) = c {
                    root.draw_pixel(
                        (i as i32, (title_h + j as u32) as i32),
                        &RGBColor(*r, *g, *b),
                    )
                    .map_err(|e| fail(&e))?;
                }
            }
        }
        // Outline of the sky ellipse.
        let cx = w as f64 / 2.0;
        let cy = title_h as f64 + map_h as f64 / 2.0;
        let outline: Vec<(i32, i32)> = (0..=360)
            .map(|k| {
                let t = k as f64 / 360.0 * 2.0 * PI;
                (
                    (cx + 2.0 * SQRT_2 * t.cos() * scale).round() as i32,
                    (cy + SQRT_2 * t.sin() * scale).round() as i32,
                )
            })
            .collect();
        root.draw(&PathElement::new(outline, BLACK.stroke_width(1)))
            .map_err(|e| fail(&e))?;
        self.draw_lines_and_points(root, &fail)?;
        let title_size = (w / 36).max(12) as f64;
        // plotters anchors text at its top-left by default; leave a margin above the ascenders.
        root.draw(&Text::new(
            self.title.clone(),
            (12, (title_size * 0.45) as i32),
            (FONT_FAMILY, title_size).into_font().color(&BLACK),
        ))
        .map_err(|e| fail(&e))?;
        let note_size = (w / 55).max(10) as f64;
        for (k, text) in self.notes.iter().enumerate() {
            let y = title_h + map_h + 6 + k as u32 * (w / 45 + 6);
            root.draw(&Text::new(
                text.clone(),
                (10, y as i32),
                (FONT_FAMILY, note_size).into_font().color(&BLACK),
            ))
            .map_err(|e| fail(&e))?;
        }
        Ok(())
    }

    /// The colour of every pixel of the map area, row by row (in parallel); `None` outside the
    /// sky ellipse, light grey where the fill has no value.
    fn raster_rows(&self) -> Vec<Vec<Option<Rgb>>> {
        use rayon::prelude::*;
        let (title_h, map_h, _, scale) = self.geometry();
        let w = self.width;
        let cx = w as f64 / 2.0;
        let cy = title_h as f64 + map_h as f64 / 2.0;
        (0..map_h)
            .into_par_iter()
            .map(|j| {
                (0..w)
                    .map(|i| {
                        let x = -(i as f64 + 0.5 - cx) / scale;
                        let y = -(title_h as f64 + j as f64 + 0.5 - cy) / scale;
                        let (lon, lat) = mollweide_inverse(x, y)?;
                        let dir = Direction::from_lonlat_deg(
                            (lon + self.central_lon).to_degrees(),
                            lat.to_degrees(),
                        );
                        match &self.fill {
                            Some(f) => Some(f(dir).unwrap_or([235, 235, 235])),
                            None => Some([235, 235, 235]),
                        }
                    })
                    .collect()
            })
            .collect()
    }

    /// Draws the polylines, split where they jump across the edge meridian, and the points.
    fn draw_lines_and_points(
        &self,
        root: &DrawingArea<BitMapBackend<'_>, plotters::coord::Shift>,
        fail: &dyn Fn(&dyn std::fmt::Display) -> Error,
    ) -> Result<()> {
        let jump = 0.25 * self.width as f64;
        for (points, [r, g, b], width) in &self.lines {
            let style = RGBColor(*r, *g, *b).stroke_width(*width);
            let mut piece: Vec<(i32, i32)> = Vec::new();
            let mut last: Option<(f64, f64)> = None;
            for &d in points {
                let p = self.to_pixel(d);
                if let Some(q) = last {
                    if (p.0 - q.0).abs() > jump {
                        if piece.len() > 1 {
                            root.draw(&PathElement::new(std::mem::take(&mut piece), style))
                                .map_err(|e| fail(&e))?;
                        }
                        piece.clear();
                    }
                }
                piece.push((p.0.round() as i32, p.1.round() as i32));
                last = Some(p);
            }
            if piece.len() > 1 {
                root.draw(&PathElement::new(piece, style))
                    .map_err(|e| fail(&e))?;
            }
        }
        for (d, [r, g, b], radius) in &self.points {
            let p = self.to_pixel(*d);
            root.draw(&Circle::new(
                (p.0.round() as i32, p.1.round() as i32),
                *radius,
                RGBColor(*r, *g, *b).filled(),
            ))
            .map_err(|e| fail(&e))?;
        }
        Ok(())
    }
}

/// Writes several pictures side by side, left to right, into one PNG file (atomically), e.g.
/// a target, a comparison and a result on the same colour scale.
pub fn write_pictures_in_a_row(path: &Path, pictures: &[SkyPicture<'_>]) -> Result<()> {
    if pictures.is_empty() {
        return Err(Error::Setting("no picture to draw".into()));
    }
    register_font()?;
    let width: u32 = pictures.iter().map(|p| p.width).sum();
    let height = pictures.iter().map(|p| p.geometry().2).max().unwrap_or(1);
    write_png_atomically(path, (width, height), |root, png| {
        let mut x0 = 0i32;
        for p in pictures {
            let (_, _, h, _) = p.geometry();
            let area = root.clone().shrink((x0, 0), (p.width, h));
            p.render_on(&area, png)?;
            x0 += p.width as i32;
        }
        Ok(())
    })
}

/// Draws a PNG of `size` pixels on a white canvas with `draw` (given the canvas and the file
/// plotters writes, for its error messages) and writes it to `path` atomically: plotters picks
/// the format from the extension, so it writes `<temporary>.png`, renamed over the temporary
/// file when drawing succeeds and removed otherwise.
pub(crate) fn write_png_atomically(
    path: &Path,
    size: (u32, u32),
    draw: impl Fn(&DrawingArea<BitMapBackend<'_>, plotters::coord::Shift>, &Path) -> Result<()>,
) -> Result<()> {
    write_atomically(path, |tmp| {
        let mut png = tmp.as_os_str().to_owned();
        png.push(".png");
        let png = std::path::PathBuf::from(png);
        let fail = |e: &dyn std::fmt::Display| Error::io(path, format!("cannot draw: {e}"));
        let drawn = || -> Result<()> {
            let root = BitMapBackend::new(&png, size).into_drawing_area();
            root.fill(&WHITE).map_err(|e| fail(&e))?;
            draw(&root, &png)?;
            root.present().map_err(|e| fail(&e))
        };
        let result =
            drawn().and_then(|()| std::fs::rename(&png, tmp).map_err(|e| Error::io(path, e)));
        if result.is_err() {
            let _ = std::fs::remove_file(&png);
        }
        result
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn mollweide_inverse_undoes_forward() {
        // Round trip of Snyder 1987 eqs. 31-1..31-6.
        for lat in [-80.0f64, -30.0, 0.0, 10.0, 60.0, 89.0] {
            for lon in [-170.0f64, -45.0, 0.0, 90.0, 179.0] {
                let (x, y) = mollweide_forward(lon.to_radians(), lat.to_radians());
                let (l, b) = mollweide_inverse(x, y).unwrap();
                assert!((l.to_degrees() - lon).abs() < 1e-8, "{lon} {lat}");
                assert!((b.to_degrees() - lat).abs() < 1e-8, "{lon} {lat}");
            }
        }
        // The ellipse's extremes: x = ±2√2 on the equator at λ = ±π, y = ±√2 at the poles.
        let (x, _) = mollweide_forward(PI - 1e-12, 0.0);
        assert!((x - 2.0 * SQRT_2).abs() < 1e-9);
        let (_, y) = mollweide_forward(0.0, std::f64::consts::FRAC_PI_2);
        assert!((y - SQRT_2).abs() < 1e-12);
    }

    #[test]
    fn mollweide_is_equal_area() {
        // Equal-area (Snyder 1987, §31): the band 0 ≤ φ < 30° holds (sin 30° − sin 0°)/2 = 1/4
        // of the sphere's area, so 1/4 of the ellipse. Count plane grid points in the band.
        let (mut inside, mut band) = (0u64, 0u64);
        let m = 1000;
        for i in 0..m {
            for j in 0..m {
                let x = (i as f64 + 0.5) / m as f64 * 4.0 * SQRT_2 - 2.0 * SQRT_2;
                let y = (j as f64 + 0.5) / m as f64 * 2.0 * SQRT_2 - SQRT_2;
                if let Some((_, lat)) = mollweide_inverse(x, y) {
                    inside += 1;
                    if (0.0..30f64.to_radians()).contains(&lat) {
                        band += 1;
                    }
                }
            }
        }
        assert!((band as f64 / inside as f64 - 0.25).abs() < 2e-3);
    }
}
