//! General x–y charts drawn with `plotters`: line and point series on linear or logarithmic
//! axes, several panels in one figure, closed curves such as confidence ellipses, and legends.
//!
//! A [`Figure`] is plain data (panels of series of points), so what a picture shows can be
//! checked without looking at pixels. It is rendered in memory — an RGB buffer encoded as PNG,
//! or an SVG string — and written with [`write_bytes`], i.e. to a temporary file renamed into
//! place, so a failed write never leaves a partial picture behind and plotters never touches
//! the file system itself.
//!
//! Axes are our own [`ChartAxis`] coordinate: linear or base-10 logarithmic, with tick
//! positions chosen at 1, 2, 5 × 10^k (common practice) or given explicitly with their text.

use crate::error::{Error, Result};
use crate::figures::plotting::{register_font, Rgb, FONT_FAMILY};
use crate::files::write_bytes;
use plotters::coord::ranged1d::{KeyPointHint, NoDefaultFormatting, Ranged, ValueFormatter};
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};
use std::ops::Range;
use std::path::Path;

/// A colour cycle that stays distinguishable on white (common practice: the "tab10" hues).
pub const PALETTE: [Rgb; 8] = [
    [31, 119, 180],
    [214, 39, 40],
    [44, 160, 44],
    [255, 127, 14],
    [148, 103, 189],
    [140, 86, 75],
    [227, 119, 194],
    [23, 190, 207],
];

/// The `i`-th colour of [`PALETTE`], cycling.
pub fn palette(i: usize) -> Rgb {
    PALETTE[i % PALETTE.len()]
}

/// The file formats a figure can be written in.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ImageFormat {
    /// Portable Network Graphics (raster).
    Png,
    /// Scalable Vector Graphics.
    Svg,
}

impl ImageFormat {
    /// The format named by a path's extension (`.png` or `.svg`, any case).
    pub fn from_path(path: &Path) -> Result<Self> {
        let ext = path
            .extension()
            .map(|e| e.to_string_lossy().to_ascii_lowercase());
        match ext.as_deref() {
            Some("png") => Ok(ImageFormat::Png),
            Some("svg") => Ok(ImageFormat::Svg),
            _ => Err(Error::Setting(format!(
                "{}: the picture's file name must end in .png or .svg",
                path.display()
            ))),
        }
    }
}

/// Linear or logarithmic axis.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum AxisScale {
    Linear,
    /// Base-10 logarithmic; only positive values are drawn.
    Log,
}

/// What the user sees of one axis.
#[derive(Debug, Clone, PartialEq)]
pub struct Axis {
    /// Axis title, with units.
    pub label: String,
    pub scale: AxisScale,
    /// Fixed range; `None`: fitted to the data with a margin.
    pub range: Option<(f64, f64)>,
    /// Fixed tick positions and their text; `None`: chosen automatically.
    pub ticks: Option<Vec<(f64, String)>>,
}

impl Axis {
    /// A linear axis fitted to the data.
    pub fn linear(label: impl Into<String>) -> Self {
        Axis {
            label: label.into(),
            scale: AxisScale::Linear,
            range: None,
            ticks: None,
        }
    }

    /// A logarithmic axis fitted to the data.
    pub fn log(label: impl Into<String>) -> Self {
        Axis {
            scale: AxisScale::Log,
            ..Axis::linear(label)
        }
    }
}

/// Shape of point markers.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum MarkerShape {
    Circle,
    Triangle,
    Square,
    Diamond,
}

impl MarkerShape {
    /// The `i`-th shape, cycling.
    pub fn nth(i: usize) -> Self {
        [
            MarkerShape::Circle,
            MarkerShape::Triangle,
            MarkerShape::Square,
            MarkerShape::Diamond,
        ][i % 4]
    }
}

/// One point of a series; `solid` false draws its marker hollow (e.g. an untrusted value).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ChartPoint {
    pub x: f64,
    pub y: f64,
    pub solid: bool,
}

impl ChartPoint {
    /// A solid point.
    pub fn new(x: f64, y: f64) -> Self {
        ChartPoint { x, y, solid: true }
    }
}

/// A series: points joined by a line, drawn as markers, or both. A non-finite y (or a
/// non-positive one on a log axis) breaks the line.
#[derive(Debug, Clone, PartialEq)]
pub struct Series {
    /// Legend text; `None` keeps the series out of the legend.
    pub label: Option<String>,
    pub points: Vec<ChartPoint>,
    pub colour: Rgb,
    /// Opacity in [0, 1].
    pub opacity: f64,
    /// Line width in pixels; 0: no line.
    pub line_width: u32,
    /// Marker radius in pixels; 0: no markers.
    pub marker_radius: u32,
    pub marker: MarkerShape,
    /// Join the last point back to the first (closed curves).
    pub closed: bool,
}

impl Series {
    /// A line without markers.
    pub fn line(label: Option<String>, points: Vec<ChartPoint>, colour: Rgb, width: u32) -> Self {
        Series {
            label,
            points,
            colour,
            opacity: 1.0,
            line_width: width,
            marker_radius: 0,
            marker: MarkerShape::Circle,
            closed: false,
        }
    }

    /// Markers without a line.
    pub fn markers(
        label: Option<String>,
        points: Vec<ChartPoint>,
        colour: Rgb,
        radius: u32,
    ) -> Self {
        Series {
            line_width: 0,
            marker_radius: radius,
            ..Series::line(label, points, colour, 0)
        }
    }
}

/// A text placed at data coordinates.
#[derive(Debug, Clone, PartialEq)]
pub struct Annotation {
    pub x: f64,
    pub y: f64,
    pub text: String,
    pub colour: Rgb,
}

/// A filled rectangle in data coordinates (e.g. one cell of a table of values), with an
/// optional centred text; `marked` crosses it out with two grey diagonals (e.g. an untrusted
/// value).
#[derive(Debug, Clone, PartialEq)]
pub struct Cell {
    /// Lower and upper x edges.
    pub x: (f64, f64),
    /// Lower and upper y edges.
    pub y: (f64, f64),
    pub fill: Rgb,
    pub text: Option<String>,
    pub marked: bool,
}

/// One chart: axes, filled cells, series, annotations.
#[derive(Debug, Clone, PartialEq)]
pub struct Panel {
    pub title: String,
    pub x: Axis,
    pub y: Axis,
    /// Filled cells, drawn first (under the series).
    pub cells: Vec<Cell>,
    pub series: Vec<Series>,
    pub annotations: Vec<Annotation>,
}

impl Panel {
    /// An empty panel.
    pub fn new(title: impl Into<String>, x: Axis, y: Axis) -> Self {
        Panel {
            title: title.into(),
            x,
            y,
            cells: Vec::new(),
            series: Vec::new(),
            annotations: Vec::new(),
        }
    }

    /// The points a series would draw: finite, and positive on log axes.
    fn drawable(&self, p: &ChartPoint) -> bool {
        let ok = |v: f64, s: AxisScale| v.is_finite() && (s == AxisScale::Linear || v > 0.0);
        ok(p.x, self.x.scale) && ok(p.y, self.y.scale)
    }

    /// The corner of the plotting area where the legend hides the fewest points (upper right
    /// first on ties), for a box sized by the number of legend entries.
    pub fn legend_corner(&self) -> SeriesLabelPosition {
        let (xc, yc) = self.coordinates();
        let entries = self.series.iter().filter(|s| s.label.is_some()).count();
        let (bw, bh) = (0.42, (0.06 + 0.075 * entries as f64).min(0.9));
        let frac = |a: &ChartAxis, v: f64| {
            (a.transform(v) - a.transform(a.lo)) / (a.transform(a.hi) - a.transform(a.lo))
        };
        let points: Vec<(f64, f64)> = self
            .series
            .iter()
            .flat_map(|s| s.points.iter())
            .filter(|p| self.drawable(p))
            .map(|p| (frac(&xc, p.x), frac(&yc, p.y)))
            .collect();
        let corners = [
            (SeriesLabelPosition::UpperRight, true, true),
            (SeriesLabelPosition::UpperLeft, false, true),
            (SeriesLabelPosition::LowerRight, true, false),
            (SeriesLabelPosition::LowerLeft, false, false),
        ];
        let hidden = |right: bool, upper: bool| {
            points
                .iter()
                .filter(|(x, y)| {
                    let in_x = if right { *x > 1.0 - bw } else { *x < bw };
                    let in_y = if upper { *y > 1.0 - bh } else { *y < bh };
                    in_x && in_y
                })
                .count()
        };
        let mut best = (usize::MAX, SeriesLabelPosition::UpperRight);
        for (pos, right, upper) in corners {
            let n = hidden(right, upper);
            if n < best.0 {
                best = (n, pos);
            }
        }
        best.1
    }

    fn has_data(&self) -> bool {
        !self.cells.is_empty()
            || self
                .series
                .iter()
                .any(|s| s.points.iter().any(|p| self.drawable(p)))
    }

    /// The axis coordinates the panel is drawn in (ranges fitted to the data where not fixed).
    pub fn coordinates(&self) -> (ChartAxis, ChartAxis) {
        let pts: Vec<&ChartPoint> = self
            .series
            .iter()
            .flat_map(|s| s.points.iter())
            .filter(|p| self.drawable(p))
            .collect();
        let xs: Vec<f64> = pts.iter().map(|p| p.x).collect();
        let ys: Vec<f64> = pts.iter().map(|p| p.y).collect();
        (ChartAxis::fit(&self.x, &xs), ChartAxis::fit(&self.y, &ys))
    }
}

/// Several panels in a grid under a title.
#[derive(Debug, Clone, PartialEq)]
pub struct Figure {
    pub title: String,
    pub panels: Vec<Panel>,
    /// Panels per row.
    pub columns: usize,
    /// Size of one panel in pixels.
    pub panel_size: (u32, u32),
}

impl Figure {
    /// Total size in pixels (title band included).
    pub fn size(&self) -> (u32, u32) {
        let cols = self.columns.clamp(1, self.panels.len().max(1));
        let rows = self.panels.len().div_ceil(cols).max(1);
        let (w, h) = self.panel_size;
        (w * cols as u32, h * rows as u32 + self.title_height())
    }

    fn title_height(&self) -> u32 {
        if self.title.is_empty() {
            0
        } else {
            (self.panel_size.0 / 22).max(28)
        }
    }

    fn check(&self) -> Result<()> {
        if self.panels.is_empty() {
            return Err(Error::Data("a figure needs at least one panel".into()));
        }
        let (w, h) = self.size();
        if self.panel_size.0 < 200 || self.panel_size.1 < 150 || w > 20000 || h > 20000 {
            return Err(Error::Setting(format!(
                "picture size {w} × {h} pixels (panels {} × {}) is outside 200 × 150 … 20000 × 20000",
                self.panel_size.0, self.panel_size.1
            )));
        }
        Ok(())
    }

    /// The figure as PNG bytes.
    pub fn render_png(&self) -> Result<Vec<u8>> {
        self.check()?;
        register_font()?;
        let (w, h) = self.size();
        let mut buffer = vec![255u8; w as usize * h as usize * 3];
        guarded(|| {
            let root = BitMapBackend::with_buffer(&mut buffer, (w, h)).into_drawing_area();
            self.draw_on(&root)?;
            root.present().map_err(drawing_error)
        })?;
        encode_png(w, h, buffer)
    }

    /// The figure as an SVG document.
    pub fn render_svg(&self) -> Result<String> {
        self.check()?;
        register_font()?;
        let size = self.size();
        let mut text = String::new();
        guarded(|| {
            let root = SVGBackend::with_string(&mut text, size).into_drawing_area();
            self.draw_on(&root)?;
            root.present().map_err(drawing_error)
        })?;
        Ok(text)
    }

    /// Writes the figure to `path` in the format of its extension, atomically.
    pub fn write(&self, path: &Path) -> Result<()> {
        let bytes = match ImageFormat::from_path(path)? {
            ImageFormat::Png => self.render_png()?,
            ImageFormat::Svg => self.render_svg()?.into_bytes(),
        };
        write_bytes(path, &bytes)
    }

    fn draw_on<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, plotters::coord::Shift>,
    ) -> Result<()> {
        root.fill(&WHITE).map_err(drawing_error)?;
        let th = self.title_height();
        let body = if th > 0 {
            let (top, body) = root.split_vertically(th);
            let size = (th as f64 * 0.55).round();
            top.draw_text(
                &self.title,
                &(FONT_FAMILY, size).into_font().color(&BLACK),
                (12, (th as f64 * 0.2) as i32),
            )
            .map_err(drawing_error)?;
            body
        } else {
            root.clone()
        };
        let cols = self.columns.clamp(1, self.panels.len());
        let rows = self.panels.len().div_ceil(cols);
        let areas = body.split_evenly((rows, cols));
        for (panel, area) in self.panels.iter().zip(areas.iter()) {
            draw_panel(area, panel, self.panel_size)?;
        }
        Ok(())
    }
}

/// A horizontal colour bar: the ramp [`crate::figures::plotting::colour_ramp`] from `lo` (left) to `hi`
/// (right), with a title and five value ticks.
#[derive(Debug, Clone, PartialEq)]
pub struct ColourBar {
    pub title: String,
    pub lo: f64,
    pub hi: f64,
}

impl ColourBar {
    /// The five tick values and texts, lo … hi in equal steps.
    pub fn ticks(&self) -> Vec<(f64, String)> {
        (0..5)
            .map(|k| {
                let v = self.lo + (self.hi - self.lo) * k as f64 / 4.0;
                (v, format!("{v:.4e}"))
            })
            .collect()
    }
}

/// A PNG picture with `bar` drawn in a band added under it.
pub fn append_colour_bar(png: &[u8], bar: &ColourBar) -> Result<Vec<u8>> {
    register_font()?;
    let image = image::load_from_memory_with_format(png, image::ImageFormat::Png)
        .map_err(|e| Error::Data(format!("cannot read back the sky picture: {e}")))?
        .to_rgb8();
    let (w, h) = image.dimensions();
    let band = (w / 14).max(60);
    let mut buffer = vec![255u8; w as usize * (h + band) as usize * 3];
    buffer[..image.as_raw().len()].copy_from_slice(image.as_raw());
    let font = (w as f64 / 70.0).max(10.0);
    guarded(|| {
        let root = BitMapBackend::with_buffer(&mut buffer, (w, h + band)).into_drawing_area();
        let (x0, x1) = ((w / 5) as i32, (w * 4 / 5) as i32);
        let (y0, y1) = (h as i32 + 4, h as i32 + (band as i32) / 3);
        for x in x0..x1 {
            let t = (x - x0) as f64 / (x1 - x0 - 1).max(1) as f64;
            let [r, g, b] = crate::figures::plotting::colour_ramp(t);
            root.draw(&PathElement::new(
                vec![(x, y0), (x, y1)],
                RGBColor(r, g, b).stroke_width(1),
            ))
            .map_err(drawing_error)?;
        }
        root.draw(&Rectangle::new([(x0, y0), (x1, y1)], BLACK.stroke_width(1)))
            .map_err(drawing_error)?;
        let style = (FONT_FAMILY, font).into_font().color(&BLACK);
        for (k, (_, text)) in bar.ticks().iter().enumerate() {
            let x = x0 + (x1 - x0) * k as i32 / 4;
            root.draw(&PathElement::new(
                vec![(x, y1), (x, y1 + 5)],
                BLACK.stroke_width(1),
            ))
            .map_err(drawing_error)?;
            let (tw, _) = root
                .estimate_text_size(text, &style)
                .map_err(drawing_error)?;
            root.draw_text(text, &style, (x - tw as i32 / 2, y1 + 8))
                .map_err(drawing_error)?;
        }
        let (tw, _) = root
            .estimate_text_size(&bar.title, &style)
            .map_err(drawing_error)?;
        root.draw_text(&bar.title, &style, (x0 - tw as i32 - 12, y0))
            .map_err(drawing_error)?;
        root.present().map_err(drawing_error)
    })?;
    encode_png(w, h + band, buffer)
}

fn encode_png(w: u32, h: u32, buffer: Vec<u8>) -> Result<Vec<u8>> {
    let image = image::RgbImage::from_raw(w, h, buffer)
        .ok_or_else(|| Error::Data("the picture buffer has the wrong size".into()))?;
    let mut bytes = std::io::Cursor::new(Vec::new());
    image
        .write_to(&mut bytes, image::ImageFormat::Png)
        .map_err(|e| Error::Data(format!("cannot encode the PNG picture: {e}")))?;
    Ok(bytes.into_inner())
}

/// Runs plotters drawing code, turning a panic inside it into an error.
fn guarded(draw: impl FnOnce() -> Result<()>) -> Result<()> {
    std::panic::catch_unwind(std::panic::AssertUnwindSafe(draw)).unwrap_or_else(|_| {
        Err(Error::Data(
            "the plotting library failed while drawing the picture".into(),
        ))
    })
}

fn drawing_error(e: impl std::fmt::Display) -> Error {
    Error::Data(format!("cannot draw the picture: {e}"))
}

fn style(colour: Rgb, opacity: f64) -> RGBAColor {
    RGBColor(colour[0], colour[1], colour[2]).mix(opacity.clamp(0.0, 1.0))
}

fn draw_panel<DB: DrawingBackend>(
    area: &DrawingArea<DB, plotters::coord::Shift>,
    panel: &Panel,
    size: (u32, u32),
) -> Result<()> {
    let (xc, yc) = panel.coordinates();
    let base = (size.0.min(size.1 * 4 / 3) as f64 / 40.0).clamp(10.0, 30.0);
    let (label_px, desc_px, title_px) = (base, base * 1.1, base * 1.3);
    let (nx, ny) = (xc.ticks.len(), yc.ticks.len());
    let mut chart = ChartBuilder::on(area)
        .caption(&panel.title, (FONT_FAMILY, title_px))
        .margin(base as u32)
        .margin_right((base * 1.5) as u32)
        .x_label_area_size((base * 3.6) as u32)
        .y_label_area_size((base * 5.6) as u32)
        .build_cartesian_2d(xc, yc)
        .map_err(drawing_error)?;
    chart
        .configure_mesh()
        .x_desc(panel.x.label.as_str())
        .y_desc(panel.y.label.as_str())
        .x_labels(nx.max(1))
        .y_labels(ny.max(1))
        .label_style((FONT_FAMILY, label_px))
        .axis_desc_style((FONT_FAMILY, desc_px))
        .bold_line_style(RGBColor(215, 215, 215))
        .light_line_style(RGBColor(240, 240, 240))
        .draw()
        .map_err(drawing_error)?;
    for c in &panel.cells {
        draw_cell(&mut chart, c, label_px)?;
    }
    let mut any_label = false;
    for s in &panel.series {
        draw_series(&mut chart, panel, s)?;
        any_label |= s.label.is_some();
    }
    for a in &panel.annotations {
        if !panel.drawable(&ChartPoint::new(a.x, a.y)) {
            continue;
        }
        chart
            .draw_series(std::iter::once(Text::new(
                a.text.clone(),
                (a.x, a.y),
                (FONT_FAMILY, label_px)
                    .into_font()
                    .color(&style(a.colour, 1.0)),
            )))
            .map_err(drawing_error)?;
    }
    if !panel.has_data() {
        let (w, h) = area.dim_in_pixel();
        area.draw_text(
            "no values to draw",
            &(FONT_FAMILY, desc_px)
                .into_font()
                .color(&RGBColor(150, 150, 150)),
            (w as i32 / 2 - (desc_px * 4.0) as i32, h as i32 / 2),
        )
        .map_err(drawing_error)?;
    }
    if any_label {
        chart
            .configure_series_labels()
            .position(panel.legend_corner())
            .background_style(WHITE.mix(0.85))
            .border_style(RGBColor(170, 170, 170))
            .label_font((FONT_FAMILY, label_px))
            .draw()
            .map_err(drawing_error)?;
    }
    Ok(())
}

/// One filled cell of a grid panel: its fill, a white outline, a grey cross when marked, and
/// its text in ink that stands out from the fill.
fn draw_cell<DB: DrawingBackend>(chart: &mut Chart<'_, DB>, c: &Cell, label_px: f64) -> Result<()> {
    let corners = [(c.x.0, c.y.0), (c.x.1, c.y.1)];
    chart
        .draw_series(std::iter::once(Rectangle::new(
            corners,
            style(c.fill, 1.0).filled(),
        )))
        .map_err(drawing_error)?;
    chart
        .draw_series(std::iter::once(Rectangle::new(
            corners,
            WHITE.stroke_width(2),
        )))
        .map_err(drawing_error)?;
    if c.marked {
        for (a, b) in [
            ((c.x.0, c.y.0), (c.x.1, c.y.1)),
            ((c.x.0, c.y.1), (c.x.1, c.y.0)),
        ] {
            chart
                .draw_series(std::iter::once(PathElement::new(
                    vec![a, b],
                    RGBColor(160, 160, 160).stroke_width(1),
                )))
                .map_err(drawing_error)?;
        }
    }
    if let Some(text) = &c.text {
        // dark text on light fills, white on dark ones (Rec. 601 luma)
        let luma = 0.299 * c.fill[0] as f64 + 0.587 * c.fill[1] as f64 + 0.114 * c.fill[2] as f64;
        let ink = if luma > 140.0 { BLACK } else { WHITE };
        let font = (FONT_FAMILY, label_px)
            .into_font()
            .color(&ink)
            .pos(Pos::new(HPos::Center, VPos::Center));
        chart
            .draw_series(std::iter::once(Text::new(
                text.clone(),
                ((c.x.0 + c.x.1) / 2.0, (c.y.0 + c.y.1) / 2.0),
                font,
            )))
            .map_err(drawing_error)?;
    }
    Ok(())
}

/// One series: its line, cut where a point cannot be drawn (closed when it has no gap), its
/// markers, and its legend entry.
fn draw_series<'a, DB: DrawingBackend + 'a>(
    chart: &mut Chart<'a, DB>,
    panel: &Panel,
    s: &Series,
) -> Result<()> {
    let colour = style(s.colour, s.opacity);
    let width = s.line_width;
    if width > 0 {
        for piece in line_pieces(panel, s).into_iter().filter(|p| p.len() > 1) {
            chart
                .draw_series(std::iter::once(PathElement::new(
                    piece,
                    colour.stroke_width(width),
                )))
                .map_err(drawing_error)?;
        }
    }
    if s.marker_radius > 0 {
        for p in s.points.iter().filter(|p| panel.drawable(p)) {
            draw_marker(
                chart,
                (p.x, p.y),
                s.marker,
                s.marker_radius,
                colour,
                p.solid,
            )?;
        }
    }
    if let Some(label) = &s.label {
        let (marker, radius) = (s.marker, s.marker_radius);
        chart
            .draw_series(std::iter::empty::<PathElement<(f64, f64)>>())
            .map_err(drawing_error)?
            .label(label.as_str())
            .legend(move |(x, y)| {
                let line = if width > 0 {
                    vec![(-10, 0), (10, 0)]
                } else {
                    Vec::new()
                };
                EmptyElement::at((x, y))
                    + PathElement::new(line, colour.stroke_width(width.max(1)))
                    + Polygon::new(marker_outline(marker, radius), colour.filled())
            });
    }
    Ok(())
}

/// The line pieces of a series between the points that cannot be drawn; a closed series
/// without a gap returns to its first point.
fn line_pieces(panel: &Panel, s: &Series) -> Vec<Vec<(f64, f64)>> {
    let mut pieces: Vec<Vec<(f64, f64)>> = vec![Vec::new()];
    for p in &s.points {
        if panel.drawable(p) {
            if let Some(last) = pieces.last_mut() {
                last.push((p.x, p.y));
            }
        } else if pieces.last().is_some_and(|l| !l.is_empty()) {
            pieces.push(Vec::new());
        }
    }
    if s.closed && pieces.len() == 1 {
        if let Some(first) = pieces[0].first().copied() {
            pieces[0].push(first);
        }
    }
    pieces
}

type Chart<'a, DB> = ChartContext<'a, DB, Cartesian2d<ChartAxis, ChartAxis>>;

fn draw_marker<DB: DrawingBackend>(
    chart: &mut Chart<'_, DB>,
    at: (f64, f64),
    shape: MarkerShape,
    radius: u32,
    colour: RGBAColor,
    solid: bool,
) -> Result<()> {
    let fill = if solid {
        colour.filled()
    } else {
        colour.stroke_width(2)
    };
    let r = radius as i32;
    let elem = EmptyElement::at(at);
    if !solid && shape != MarkerShape::Circle {
        // plotters fills triangles, rectangles and polygons whatever the style: draw the
        // outline as a closed path instead
        let mut outline = marker_outline(shape, radius);
        outline.push(outline[0]);
        return chart
            .draw_series(std::iter::once(elem + PathElement::new(outline, fill)))
            .map(|_| ())
            .map_err(drawing_error);
    }
    let result = match shape {
        MarkerShape::Circle => chart
            .draw_series(std::iter::once(elem + Circle::new((0, 0), radius, fill)))
            .map(|_| ()),
        MarkerShape::Triangle => chart
            .draw_series(std::iter::once(
                elem + TriangleMarker::new((0, 0), radius + 1, fill),
            ))
            .map(|_| ()),
        MarkerShape::Square => chart
            .draw_series(std::iter::once(
                elem + Rectangle::new([(-r, -r), (r, r)], fill),
            ))
            .map(|_| ()),
        MarkerShape::Diamond => chart
            .draw_series(std::iter::once(
                elem + Polygon::new(vec![(0, -r - 1), (r + 1, 0), (0, r + 1), (-r - 1, 0)], fill),
            ))
            .map(|_| ()),
    };
    result.map_err(drawing_error)
}

/// Vertices of a marker of `shape` and `radius` around (0, 0), in pixels.
fn marker_outline(shape: MarkerShape, radius: u32) -> Vec<(i32, i32)> {
    let r = radius as f64;
    let corners = |n: usize, r: f64, start: f64| -> Vec<(i32, i32)> {
        (0..n)
            .map(|k| {
                let t = start + std::f64::consts::TAU * k as f64 / n as f64;
                ((r * t.cos()).round() as i32, (-r * t.sin()).round() as i32)
            })
            .collect()
    };
    match shape {
        MarkerShape::Circle => corners(16, r, 0.0),
        MarkerShape::Triangle => corners(3, r + 1.0, std::f64::consts::FRAC_PI_2),
        MarkerShape::Square => {
            corners(4, r * std::f64::consts::SQRT_2, std::f64::consts::FRAC_PI_4)
        }
        MarkerShape::Diamond => corners(4, r + 1.0, 0.0),
    }
}

/// A coordinate of a chart axis: the value range, linear or logarithmic mapping, and the ticks.
#[derive(Debug, Clone, PartialEq)]
pub struct ChartAxis {
    /// Lower and upper ends of the axis.
    pub lo: f64,
    pub hi: f64,
    pub scale: AxisScale,
    /// Major ticks and their text.
    pub ticks: Vec<(f64, String)>,
    /// Minor tick positions (for light grid lines).
    pub minor: Vec<f64>,
}

impl ChartAxis {
    /// The axis for `values` under the choices of `axis`: a fixed range or the data's range
    /// with 6% margin (a factor on log axes); ticks fixed or at 1, 2, 5 × 10^k.
    pub fn fit(axis: &Axis, values: &[f64]) -> Self {
        let (lo, hi) = match axis.range {
            Some((a, b)) if a.is_finite() && b.is_finite() && b > a => (a, b),
            _ => padded_range(values, axis.scale),
        };
        let (lo, hi) = if axis.scale == AxisScale::Log {
            (
                lo.max(f64::MIN_POSITIVE),
                hi.max(lo.max(f64::MIN_POSITIVE) * 10.0_f64.powf(0.1)),
            )
        } else {
            (lo, hi)
        };
        let (ticks, minor) = match &axis.ticks {
            Some(t) => (
                t.iter()
                    .filter(|(v, _)| *v >= lo && *v <= hi)
                    .cloned()
                    .collect(),
                Vec::new(),
            ),
            None => match axis.scale {
                AxisScale::Linear => linear_ticks(lo, hi),
                AxisScale::Log => log_ticks(lo, hi),
            },
        };
        ChartAxis {
            lo,
            hi,
            scale: axis.scale,
            ticks,
            minor,
        }
    }

    fn transform(&self, v: f64) -> f64 {
        match self.scale {
            AxisScale::Linear => v,
            AxisScale::Log => v.log10(),
        }
    }
}

fn padded_range(values: &[f64], scale: AxisScale) -> (f64, f64) {
    let good: Vec<f64> = values
        .iter()
        .copied()
        .filter(|v| v.is_finite() && (scale == AxisScale::Linear || *v > 0.0))
        .collect();
    let lo = good.iter().copied().fold(f64::INFINITY, f64::min);
    let hi = good.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    match scale {
        AxisScale::Linear => {
            if good.is_empty() {
                return (0.0, 1.0);
            }
            let span = if hi > lo {
                hi - lo
            } else {
                lo.abs().max(1.0) * 0.1
            };
            (lo - 0.06 * span, hi + 0.06 * span)
        }
        AxisScale::Log => {
            if good.is_empty() {
                return (1.0, 10.0);
            }
            let (a, b) = (lo.log10(), hi.log10());
            let span = if b > a { b - a } else { 0.5 };
            (10f64.powf(a - 0.06 * span), 10f64.powf(b + 0.06 * span))
        }
    }
}

/// Ticks every 1, 2 or 5 × 10^k so that about five fall in [lo, hi] (common practice).
fn linear_ticks(lo: f64, hi: f64) -> (Vec<(f64, String)>, Vec<f64>) {
    let raw = (hi - lo) / 5.0;
    let mag = 10f64.powf(raw.log10().floor());
    let step = [1.0, 2.0, 5.0, 10.0]
        .iter()
        .map(|m| m * mag)
        .find(|s| *s >= raw)
        .unwrap_or(10.0 * mag);
    let first = (lo / step).ceil() as i64;
    let last = (hi / step).floor() as i64;
    let ticks = (first..=last)
        .map(|k| {
            let v = k as f64 * step;
            let v = if v.abs() < step * 1e-9 { 0.0 } else { v };
            (v, format_linear(v, step))
        })
        .collect();
    let minor_step = step / 5.0;
    let minor = ((lo / minor_step).ceil() as i64..=(hi / minor_step).floor() as i64)
        .map(|k| k as f64 * minor_step)
        .collect();
    (ticks, minor)
}

fn format_linear(v: f64, step: f64) -> String {
    if v == 0.0 {
        return "0".to_string();
    }
    let big = v.abs().max(step);
    if !(1e-3..1e5).contains(&big) {
        let exp = v.abs().log10().floor() as i32;
        let mantissa = v / 10f64.powi(exp);
        let digits = ((step / 10f64.powi(exp)).log10().floor() as i32)
            .min(0)
            .unsigned_abs() as usize;
        return format!("{mantissa:.digits$}×10{}", superscript(exp));
    }
    let digits = (-(step.log10().floor() as i32)).max(0) as usize;
    format!("{v:.digits$}")
}

/// Ticks at 10^k when the range spans two decades or more, else at 1, 2, 5 × 10^k; minor
/// ticks at 1…9 × 10^k.
fn log_ticks(lo: f64, hi: f64) -> (Vec<(f64, String)>, Vec<f64>) {
    let (a, b) = (lo.log10().floor() as i32, hi.log10().ceil() as i32);
    let decades = hi.log10() - lo.log10();
    let mantissas: &[f64] = if decades >= 2.0 {
        &[1.0]
    } else if decades >= 0.7 {
        &[1.0, 2.0, 5.0]
    } else {
        &[1.0, 1.5, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0, 8.0, 9.0]
    };
    let step = if decades > 12.0 {
        (decades / 6.0).ceil() as i32
    } else {
        1
    };
    let mut ticks = Vec::new();
    let mut minor = Vec::new();
    for e in a..=b {
        for m in 1..10 {
            let v = m as f64 * 10f64.powi(e);
            if v >= lo && v <= hi {
                minor.push(v);
            }
        }
        if (e - a) % step != 0 {
            continue;
        }
        for &m in mantissas {
            let v = m * 10f64.powi(e);
            if v >= lo && v <= hi {
                ticks.push((v, format_log(m, e)));
            }
        }
    }
    (ticks, minor)
}

fn format_log(m: f64, e: i32) -> String {
    let v = m * 10f64.powi(e);
    if (-2..=3).contains(&e) {
        let digits = (-e).max(0) as usize + usize::from(m.fract() != 0.0);
        return format!("{v:.digits$}");
    }
    if m == 1.0 {
        format!("10{}", superscript(e))
    } else {
        format!("{m}×10{}", superscript(e))
    }
}

fn superscript(e: i32) -> String {
    e.to_string()
        .chars()
        .map(|c| match c {
            '-' => '⁻',
            '0' => '⁰',
            '1' => '¹',
            '2' => '²',
            '3' => '³',
            '4' => '⁴',
            '5' => '⁵',
            '6' => '⁶',
            '7' => '⁷',
            '8' => '⁸',
            '9' => '⁹',
            other => other,
        })
        .collect()
}

impl Ranged for ChartAxis {
    type FormatOption = NoDefaultFormatting;
    type ValueType = f64;

    fn map(&self, value: &f64, limit: (i32, i32)) -> i32 {
        let (a, b) = (self.transform(self.lo), self.transform(self.hi));
        let t = (self.transform(*value) - a) / (b - a);
        let t = if t.is_finite() {
            t.clamp(-10.0, 11.0)
        } else {
            -10.0
        };
        limit.0 + (t * (limit.1 - limit.0) as f64).round() as i32
    }

    fn key_points<Hint: KeyPointHint>(&self, hint: Hint) -> Vec<f64> {
        if hint.weight().allow_light_points() {
            self.minor.clone()
        } else {
            self.ticks.iter().map(|t| t.0).collect()
        }
    }

    fn range(&self) -> Range<f64> {
        self.lo..self.hi
    }
}

impl ValueFormatter<f64> for ChartAxis {
    fn format(value: &f64) -> String {
        format!("{value}")
    }

    fn format_ext(&self, value: &f64) -> String {
        self.ticks
            .iter()
            .find(|(v, _)| v == value)
            .map(|(_, s)| s.clone())
            .unwrap_or_default()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn linear_ticks_fall_on_one_two_five_steps() {
        // span 0.94 / 5 = 0.188 rounds up to a step of 0.2
        let (t, _) = linear_ticks(0.03, 0.97);
        let v: Vec<f64> = t.iter().map(|x| x.0).collect();
        assert_eq!(v.len(), 4, "{v:?}");
        for (k, x) in v.iter().enumerate() {
            assert!((x - 0.2 * (k + 1) as f64).abs() < 1e-12, "{v:?}");
        }
        assert_eq!(t[0].1, "0.2");
        // span 1.4e-5 / 5 rounds up to 5e-6; small numbers are written with powers of ten
        let (t, _) = linear_ticks(-3.0e-6, 1.1e-5);
        let labels: Vec<&str> = t.iter().map(|x| x.1.as_str()).collect();
        assert_eq!(labels, vec!["0", "5×10⁻⁶", "1.0×10⁻⁵"]);
    }

    #[test]
    fn log_ticks_label_powers_of_ten() {
        let (t, minor) = log_ticks(3e-5, 2e-1);
        let labels: Vec<&str> = t.iter().map(|x| x.1.as_str()).collect();
        assert_eq!(labels, vec!["10⁻⁴", "10⁻³", "0.01", "0.1"]);
        assert!(minor.contains(&(2e-5f64 * 10.0)));
    }

    #[test]
    fn log_axis_maps_decades_to_equal_lengths() {
        let axis = ChartAxis::fit(
            &Axis {
                range: Some((1.0, 100.0)),
                ..Axis::log("y")
            },
            &[],
        );
        assert_eq!(axis.map(&1.0, (0, 200)), 0);
        assert_eq!(axis.map(&10.0, (0, 200)), 100);
        assert_eq!(axis.map(&100.0, (0, 200)), 200);
    }

    #[test]
    fn a_panic_while_drawing_becomes_an_error() {
        let err = guarded(|| panic!("backend failure"))
            .unwrap_err()
            .to_string();
        assert!(err.contains("failed while drawing"), "{err}");
    }

    #[test]
    fn colour_bar_adds_a_band_under_the_picture() {
        let fig = Figure {
            title: String::new(),
            panels: vec![Panel::new("p", Axis::linear("x"), Axis::linear("y"))],
            columns: 1,
            panel_size: (400, 300),
        };
        let png = fig.render_png().unwrap();
        let bar = ColourBar {
            title: "S1".into(),
            lo: 1.0,
            hi: 3.0,
        };
        assert_eq!(bar.ticks()[2], (2.0, "2.0000e0".to_string()));
        let out = append_colour_bar(&png, &bar).unwrap();
        let img = image::load_from_memory(&out).unwrap().to_rgb8();
        assert_eq!(img.dimensions(), (400, 300 + 60));
        // Column x of the bar (x0 = 80 … x1 = 320, framed in black at both ends) has the
        // ramp's colour at t = (x − x0)/(x1 − x0 − 1): its first colour on the left, its last
        // on the right.
        let y = 300 + 4 + 10;
        let ramp = crate::figures::plotting::colour_ramp;
        assert_eq!(img.get_pixel(80, y).0, [0, 0, 0]);
        assert_eq!(img.get_pixel(81, y).0, ramp(1.0 / 239.0));
        assert_eq!(img.get_pixel(200, y).0, ramp(120.0 / 239.0));
        assert_eq!(img.get_pixel(319, y).0, ramp(1.0));
    }

    #[test]
    fn extension_picks_the_format() {
        assert_eq!(
            ImageFormat::from_path(Path::new("a/b.PNG")).unwrap(),
            ImageFormat::Png
        );
        assert_eq!(
            ImageFormat::from_path(Path::new("b.svg")).unwrap(),
            ImageFormat::Svg
        );
        assert!(ImageFormat::from_path(Path::new("b.jpg")).is_err());
    }
}
