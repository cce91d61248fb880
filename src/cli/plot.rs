//! `planisphere plot`: pictures of measurements, forecasts and per-tile statistics.
//!
//! - `plot coefficients M.json [MORE.json …]`: one panel per order of the measurement files
//!   written by `measure` — the orientation-harmonic summary ([`crate::scattering::statistics`]): the mean
//!   modulus and its anisotropy against the wavelet's angular scale in arcmin, and two
//!   triangles of (j1, j2) cells coloured by the intermittency and the alignment (crossed out
//!   where untrusted, one strip per file); the band powers ⟨P(j,l)⟩_l against j, and the tile
//!   power spectrum P(k); several files overlaid.
//! - `plot ellipses FORECAST.json`: 68% and 95% Fisher ellipses of each statistic set.
//! - `plot tile-map MAP.fits`: a Mollweide map of one statistic measured tile by tile.
//! - `plot flat-bias TABLE.csv`: the flat-sky bias measured by `compare-flat`, per
//!   coefficient and tile size ([`flat_bias`]).
//!
//! The angular scale of wavelet scale j is its wavelength (8/3)·2^j plane pixels
//! (see [`SphereMeasurer::wavelet_scale_arcmin`]).

use super::inputs::load_map;
use super::measure::MapMeasurementArgs;
use crate::error::{Error, Result};
use crate::figures::charts::{
    append_colour_bar, palette, Axis, AxisScale, Cell, ChartPoint, ColourBar, Figure, ImageFormat,
    MarkerShape, Panel, Series,
};
use crate::figures::plotting::SkyPicture;
use crate::figures::plotting::{colour_ramp, Rgb};
use crate::files::write_bytes;
use crate::forecast::{ConfidenceEllipse, ConfidenceLevel};
use crate::measure::measurement::SphereMeasurer;
use crate::measure::tile_statistic::{measured_tiles, paint_tiles, tile_values, TileStatistic};
use crate::scattering::statistics::{
    CoefficientLayout, OrientationSummary, SummaryKind, SummaryStatistic,
};
use clap::Subcommand;
use std::path::{Path, PathBuf};

pub mod flat_bias;
pub use flat_bias::{run_flat_bias, FlatBiasArgs};

/// Draw pictures of measurements, forecasts and per-tile statistics.
#[derive(Debug, clap::Args)]
pub struct PlotArgs {
    #[command(subcommand)]
    pub picture: Picture,
}

/// The pictures `plot` can draw.
#[derive(Debug, Subcommand)]
#[allow(clippy::large_enum_variant)] // parsed once per run
pub enum Picture {
    /// The orientation-harmonic summary (modulus, anisotropy, intermittency and alignment
    /// triangles), band powers and tile power spectrum of measurement files (written by
    /// `measure`), overlaid.
    Coefficients(CoefficientsArgs),
    /// 68% and 95% Fisher ellipses of the statistic sets of a forecast file.
    Ellipses(EllipsesArgs),
    /// A Mollweide map of one statistic measured tile by tile.
    TileMap(TileMapArgs),
    /// The flat-sky bias per coefficient and tile size, from a `compare-flat` table.
    FlatBias(FlatBiasArgs),
}

/// Options of `plot coefficients`.
#[derive(Debug, clap::Args)]
pub struct CoefficientsArgs {
    /// Measurement files (JSON written by `measure`); several are overlaid.
    #[arg(value_name = "MEASURE.json", required = true)]
    pub inputs: Vec<PathBuf>,
    /// Output picture (.png or .svg).
    #[arg(long, short, value_name = "FILE.png|svg")]
    pub output: PathBuf,
    /// Width of the picture in pixels.
    #[arg(long, default_value_t = 1400)]
    pub width: u32,
}

/// Options of `plot ellipses`.
#[derive(Debug, clap::Args)]
pub struct EllipsesArgs {
    /// Forecast file (JSON with parameters, fiducial and sets).
    #[arg(value_name = "FORECAST.json")]
    pub input: PathBuf,
    /// Output picture (.png or .svg).
    #[arg(long, short, value_name = "FILE.png|svg")]
    pub output: PathBuf,
    /// The two parameters on the x and y axes [default: the first two].
    #[arg(long, value_name = "A,B")]
    pub parameters: Option<String>,
    /// Width of the picture in pixels.
    #[arg(long, default_value_t = 900)]
    pub width: u32,
}

/// Options of `plot tile-map`.
#[derive(Debug, clap::Args)]
pub struct TileMapArgs {
    /// The map (HEALPix FITS).
    #[arg(value_name = "MAP.fits")]
    pub map: PathBuf,
    #[command(flatten)]
    pub measuring: MapMeasurementArgs,
    /// The statistic: `mean`, `variance`, `S1_j<j>` (averaged over orientations), `S1_j<j>_l<l>`,
    /// `bandpower_j<j>[_l<l>]`, `S2_j<j1>_j<j2>` (averaged over l1, l2) or `S2_j<j1>_l<l1>_j<j2>_l<l2>`.
    #[arg(long, value_name = "NAME")]
    pub statistic: String,
    /// Output picture (.png).
    #[arg(long, short, value_name = "FILE.png")]
    pub output: PathBuf,
    /// Width of the picture in pixels.
    #[arg(long, default_value_t = 1200)]
    pub width: u32,
}

/// Runs `plot`.
pub fn run(args: &PlotArgs) -> Result<()> {
    match &args.picture {
        Picture::Coefficients(a) => run_coefficients(a),
        Picture::Ellipses(a) => run_ellipses(a),
        Picture::TileMap(a) => run_tile_map(a),
        Picture::FlatBias(a) => run_flat_bias(a),
    }
}

/// Narrowest picture width accepted, in pixels.
pub const MIN_WIDTH: u32 = 400;
/// Widest picture width accepted, in pixels.
pub const MAX_WIDTH: u32 = 8000;

/// Refuses a width outside [`MIN_WIDTH`] … [`MAX_WIDTH`] and an output path whose directory does not exist, before any work is done (the write
/// itself checks again, see [`crate::files::write_atomically`]).
fn check_output(path: &Path, width: u32) -> Result<ImageFormat> {
    if !(MIN_WIDTH..=MAX_WIDTH).contains(&width) {
        return Err(Error::Setting(format!(
            "--width must be from {MIN_WIDTH} to {MAX_WIDTH} pixels, got {width}"
        )));
    }
    let format = ImageFormat::from_path(path)?;
    if let Some(dir) = path.parent().filter(|d| !d.as_os_str().is_empty()) {
        if !dir.is_dir() {
            return Err(Error::io(path, "its directory does not exist"));
        }
    }
    Ok(format)
}

// ---------------------------------------------------------------------------------------------
// Measurement files

pub use crate::io::measurement_document::{CoefficientRecord, MeasurementFile, RecordedSettings};

/// An orientation-averaged value at one scale, with the per-orientation values it came from.
#[derive(Debug, Clone, PartialEq)]
pub struct ScaleAverage {
    pub j: usize,
    /// Mean over the orientations with a value; `None` when none has one.
    pub mean: Option<f64>,
    /// True when every orientation has a trusted value.
    pub trusted: bool,
    /// (l, value, trusted) of each orientation with a value.
    pub per_orientation: Vec<(usize, f64, bool)>,
}

fn scale_averages(
    records: &[CoefficientRecord],
    order: u8,
    scales: usize,
    orientations: usize,
) -> Vec<ScaleAverage> {
    (0..scales)
        .map(|j| {
            let mine: Vec<&CoefficientRecord> = records
                .iter()
                .filter(|c| c.order == order && c.path.j1 == Some(j) && c.path.j2.is_none())
                .filter(|c| c.kind.as_deref().is_none_or(|k| k == "scattering"))
                .collect();
            let per: Vec<(usize, f64, bool)> = mine
                .iter()
                .filter_map(|c| Some((c.path.l1?, c.value.filter(|v| v.is_finite())?, c.trusted)))
                .collect();
            let mean =
                (!per.is_empty()).then(|| per.iter().map(|p| p.1).sum::<f64>() / per.len() as f64);
            ScaleAverage {
                j,
                mean,
                trusted: per.len() == orientations && per.iter().all(|p| p.2),
                per_orientation: per,
            }
        })
        .collect()
}

/// ⟨S1(j,l)⟩_l for j = 0 … J−1.
pub fn first_order_by_scale(file: &MeasurementFile) -> Vec<ScaleAverage> {
    let s = &file.settings;
    scale_averages(&file.coefficients, 1, s.scales, s.orientations)
}

/// ⟨P(j,l)⟩_l for j = 0 … J−1.
pub fn band_power_by_scale(file: &MeasurementFile) -> Vec<ScaleAverage> {
    let s = &file.settings;
    scale_averages(&file.band_powers, 1, s.scales, s.orientations)
}

/// The orientation-harmonic summary ([`crate::scattering::statistics`]) of a measurement file, computed
/// from its coefficient records; a coefficient missing from the file makes the items built on
/// it NaN and untrusted.
pub fn file_summary(file: &MeasurementFile) -> Vec<SummaryStatistic> {
    let (jn, ln) = (file.settings.scales, file.settings.orientations);
    let Ok(layout) = OrientationSummary::new(jn, ln) else {
        return Vec::new();
    };
    let positions = CoefficientLayout::new(jn, ln);
    let count = positions.len();
    let mut values = vec![f64::NAN; count];
    let mut trusted = vec![false; count];
    for c in &file.coefficients {
        let slot = c.label(false).ok().and_then(|l| positions.position(&l));
        if let Some(i) = slot {
            values[i] = c.value.unwrap_or(f64::NAN);
            trusted[i] = c.trusted && values[i].is_finite();
        }
    }
    let mut items = layout.statistics(&values, &trusted);
    for item in items.iter_mut() {
        item.trusted &= item.value.is_finite();
    }
    items
}

/// The summary of a file with each item's label, in label order.
fn labelled_summary(
    file: &MeasurementFile,
) -> Vec<(
    crate::scattering::statistics::SummaryLabel,
    SummaryStatistic,
)> {
    let Ok(layout) = OrientationSummary::new(file.settings.scales, file.settings.orientations)
    else {
        return Vec::new();
    };
    layout
        .labels()
        .into_iter()
        .zip(file_summary(file))
        .collect()
}

/// One scale-pair item of the summary (intermittency or alignment) of a measurement file.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PairItem {
    pub j1: usize,
    pub j2: usize,
    pub value: f64,
    pub trusted: bool,
}

/// The scale-pair items of one kind (`SummaryKind::Intermittency` or `Alignment`) of a file.
pub fn pair_items(file: &MeasurementFile, kind: SummaryKind) -> Vec<PairItem> {
    labelled_summary(file)
        .into_iter()
        .filter_map(|(label, item)| match (label.j1, label.j2) {
            (Some(j1), Some(j2)) if label.kind == kind => Some(PairItem {
                j1,
                j2,
                value: item.value,
                trusted: item.trusted,
            }),
            _ => None,
        })
        .collect()
}

/// Per-scale items of one kind (`SummaryKind::Modulus` or `ModulusAnisotropy`) of a file, as
/// (j, value, trusted).
pub fn scale_items(file: &MeasurementFile, kind: SummaryKind) -> Vec<(usize, f64, bool)> {
    labelled_summary(file)
        .into_iter()
        .filter_map(|(label, item)| {
            (label.kind == kind && label.j2.is_none()).then_some((
                label.j1?,
                item.value,
                item.trusted,
            ))
        })
        .collect()
}

/// A diverging colour for `t` in [−1, 1] (clamped): blue through white to red; NaN gives grey.
pub fn diverging_colour(t: f64) -> Rgb {
    if t.is_nan() {
        return [150, 150, 150];
    }
    let t = t.clamp(-1.0, 1.0);
    let (far, f) = if t < 0.0 {
        ([33.0, 102.0, 172.0], -t)
    } else {
        ([178.0, 24.0, 43.0], t)
    };
    let mut out = [0u8; 3];
    for k in 0..3 {
        out[k] = (247.0 * (1.0 - f) + far[k] * f).round() as u8;
    }
    out
}

/// How the cells of a scale-pair panel are coloured.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum CellColours {
    /// Sequential ramp from `lo` (dark) to `hi` (yellow).
    Ramp { lo: f64, hi: f64 },
    /// Diverging around 0: blue for −`half_range`, white for 0, red for +`half_range`.
    Diverging { half_range: f64 },
}

impl CellColours {
    fn colour(&self, v: f64) -> Rgb {
        match *self {
            CellColours::Ramp { lo, hi } => {
                colour_ramp(if hi > lo { (v - lo) / (hi - lo) } else { 0.5 })
            }
            CellColours::Diverging { half_range } => diverging_colour(if half_range > 0.0 {
                v / half_range
            } else {
                0.0
            }),
        }
    }
}

/// A triangle of (j1, j2) cells, j1 < j2: row j1 (first wavelet), column j2 (second wavelet),
/// each cell split into one vertical strip per file, coloured by the item and labelled with
/// its value; untrusted cells are crossed out.
pub fn pair_panel(
    title: &str,
    files: &[MeasurementFile],
    kind: SummaryKind,
    colours: CellColours,
) -> Panel {
    let jn = files.iter().map(|f| f.settings.scales).max().unwrap_or(1);
    let axis = |label: &str, lo: usize, hi: usize| {
        let ticks = (lo..hi)
            .map(|j| {
                let text = match files.first() {
                    Some(f) if files.len() == 1 => {
                        format!("{j} ({})", format_arcmin(f.scale_arcmin(j)))
                    }
                    _ => j.to_string(),
                };
                (j as f64, text)
            })
            .collect();
        Axis {
            label: label.to_string(),
            scale: AxisScale::Linear,
            range: Some((lo as f64 - 0.5, hi.max(lo + 1) as f64 - 0.5)),
            ticks: Some(ticks),
        }
    };
    let mut panel = Panel::new(
        title,
        axis("second wavelet scale j2", 1, jn),
        axis("first wavelet scale j1", 0, jn.saturating_sub(1)),
    );
    let strips = files.len().max(1) as f64;
    for (i, f) in files.iter().enumerate() {
        for item in pair_items(f, kind) {
            let x0 = item.j2 as f64 - 0.5 + i as f64 / strips;
            let text = item.value.is_finite().then(|| {
                if files.len() > 2 {
                    String::new()
                } else {
                    let v = format!("{:.3}", item.value);
                    if item.trusted {
                        v
                    } else {
                        format!("({v})")
                    }
                }
            });
            panel.cells.push(Cell {
                x: (x0, x0 + 1.0 / strips),
                y: (item.j1 as f64 - 0.5, item.j1 as f64 + 0.5),
                fill: colours.colour(item.value),
                text: text.filter(|t| !t.is_empty()),
                marked: !item.trusted,
            });
        }
    }
    if jn < 2 {
        panel.title.push_str(" — needs J ≥ 2");
    }
    panel
}

/// A panel of one per-scale summary item against the wavelet's angular scale in arcmin, one
/// line per file; hollow markers for untrusted values.
fn scale_item_panel(
    title: &str,
    y: Axis,
    files: &[MeasurementFile],
    names: &[String],
    kind: SummaryKind,
) -> Panel {
    let mut panel = Panel::new(title, Axis::log("wavelet scale (8/3)·2^j·Δ (arcmin)"), y);
    for (i, (f, name)) in files.iter().zip(names).enumerate() {
        let points = scale_items(f, kind)
            .into_iter()
            .map(|(j, v, t)| ChartPoint {
                x: f.scale_arcmin(j),
                y: v,
                solid: t,
            })
            .collect();
        let mut line = Series::line(Some(name.clone()), points, palette(i), 2);
        line.marker_radius = 5;
        line.marker = MarkerShape::nth(i);
        panel.series.push(line);
    }
    panel
}

/// Legend names of input files: their stems, numbered where two coincide.
pub fn legend_names(paths: &[PathBuf]) -> Vec<String> {
    let stems: Vec<String> = paths
        .iter()
        .map(|p| {
            p.file_stem()
                .map(|s| s.to_string_lossy().into_owned())
                .unwrap_or_else(|| p.display().to_string())
        })
        .collect();
    stems
        .iter()
        .enumerate()
        .map(|(i, s)| {
            if stems.iter().filter(|t| *t == s).count() > 1 {
                format!("{s} ({})", i + 1)
            } else {
                s.clone()
            }
        })
        .collect()
}

/// An axis of wavelet scales 0 … J−1, its ticks reading "j (scale′)" when every file has the
/// same pixel size.
fn scale_axis(files: &[MeasurementFile], label: &str) -> Axis {
    let jn = files.iter().map(|f| f.settings.scales).max().unwrap_or(1);
    let same_pixels = files.windows(2).all(|w| {
        (w[0].settings.pixel_arcmin - w[1].settings.pixel_arcmin).abs()
            <= 1e-9 * w[0].settings.pixel_arcmin
    });
    let ticks = (0..jn)
        .map(|j| {
            let text = match (same_pixels, files.first()) {
                (true, Some(f)) => format!("{j} ({})", format_arcmin(f.scale_arcmin(j))),
                _ => j.to_string(),
            };
            (j as f64, text)
        })
        .collect();
    let desc = if same_pixels {
        format!("{label} (angular scale (8/3)·2^j·Δ in arcmin)")
    } else {
        format!("{label} (files differ in pixel size Δ)")
    };
    Axis {
        label: desc,
        scale: AxisScale::Linear,
        range: Some((-0.4, jn as f64 - 0.6)),
        ticks: Some(ticks),
    }
}

fn format_value(v: f64) -> String {
    if !v.is_finite() {
        "–".into()
    } else if v != 0.0 && (v.abs() < 1e-2 || v.abs() >= 1e4) {
        format!("{v:.2e}")
    } else {
        format!("{v:.3}")
    }
}

fn format_arcmin(a: f64) -> String {
    if a >= 10.0 {
        format!("{:.0}′", a)
    } else {
        format!("{:.1}′", a)
    }
}

fn averages_panel(
    title: &str,
    y_label: &str,
    files: &[MeasurementFile],
    names: &[String],
    values: impl Fn(&MeasurementFile) -> Vec<ScaleAverage>,
) -> Panel {
    let mut panel = Panel::new(
        title,
        scale_axis(files, "wavelet scale j"),
        Axis::log(y_label),
    );
    let many = files.len() > 1;
    for (i, (f, name)) in files.iter().zip(names).enumerate() {
        let colour = palette(i);
        let avg = values(f);
        let ln = f.settings.orientations.max(1) as f64;
        // Per-orientation values as faint points, spread a little in x by orientation.
        let faint: Vec<ChartPoint> = avg
            .iter()
            .flat_map(|a| {
                a.per_orientation.iter().map(move |&(l, v, t)| ChartPoint {
                    x: a.j as f64 + 0.12 * ((l as f64 + 0.5) / ln - 0.5),
                    y: v,
                    solid: t,
                })
            })
            .collect();
        let dots_label = (!many).then(|| "single orientations l".to_string());
        let mut dots = Series::markers(dots_label, faint, colour, 3);
        dots.opacity = 0.4;
        panel.series.push(dots);
        let points = avg
            .iter()
            .map(|a| ChartPoint {
                x: a.j as f64,
                y: a.mean.unwrap_or(f64::NAN),
                solid: a.trusted,
            })
            .collect();
        let label = if many {
            Some(name.clone())
        } else {
            Some("mean over orientations".to_string())
        };
        let mut line = Series::line(label, points, colour, 2);
        line.marker_radius = 5;
        line.marker = MarkerShape::nth(i);
        panel.series.push(line);
    }
    panel
}

/// The scale-pair triangles of intermittency (on one colour ramp over every file) and alignment
/// (on a diverging scale symmetric about 0), one strip per file.
fn pair_panels(files: &[MeasurementFile], names: &[String]) -> [Panel; 2] {
    let many = files.len() > 1;
    let all = |kind| -> Vec<f64> {
        files
            .iter()
            .flat_map(|f| pair_items(f, kind))
            .map(|p| p.value)
            .filter(|v| v.is_finite())
            .collect()
    };
    let inter = all(SummaryKind::Intermittency);
    let (lo, hi) = inter
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &v| {
            (a.min(v), b.max(v))
        });
    let strips = if many {
        format!("; strips left to right: {}", names.join(", "))
    } else {
        String::new()
    };
    let intermittency = pair_panel(
        &format!(
            "intermittency ⟨S2⟩/⟨S1⟩ (dark {} … yellow {}){strips}",
            format_value(lo),
            format_value(hi)
        ),
        files,
        SummaryKind::Intermittency,
        CellColours::Ramp { lo, hi },
    );
    let half = all(SummaryKind::Alignment)
        .iter()
        .fold(0.0_f64, |a, v| a.max(v.abs()));
    let alignment = pair_panel(
        &format!(
            "alignment (blue −{h}: across … red +{h}: along){strips}",
            h = format_value(half)
        ),
        files,
        SummaryKind::Alignment,
        CellColours::Diverging { half_range: half },
    );
    [intermittency, alignment]
}

/// The tile power spectrum of every file that has one.
fn tile_power_panel(files: &[MeasurementFile], names: &[String]) -> Panel {
    let many = files.len() > 1;
    let mut power = Panel::new(
        "tile power spectrum",
        Axis::log("wavenumber k (rad⁻¹)"),
        Axis::log("P(k) (sr · field units²)"),
    );
    for (i, (f, name)) in files.iter().zip(names).enumerate() {
        if let Some(p) = &f.tile_power_spectrum {
            let points =
                p.k.iter()
                    .zip(&p.power)
                    .filter_map(|(&k, &v)| Some(ChartPoint::new(k, v?)))
                    .collect();
            let mut s = Series::line(many.then(|| name.clone()), points, palette(i), 2);
            s.marker_radius = 4;
            s.marker = MarkerShape::nth(i);
            power.series.push(s);
        }
    }
    power
}

/// The figure of `plot coefficients` for measurement files with legend names `names`.
pub fn coefficients_figure(
    files: &[MeasurementFile],
    names: &[String],
    width: u32,
) -> Result<Figure> {
    if files.is_empty() || files.len() != names.len() {
        return Err(Error::Setting(
            "plot coefficients needs at least one measurement file".into(),
        ));
    }
    let many = files.len() > 1;
    let mut panels = vec![scale_item_panel(
        "mean modulus ⟨S1(j,·)⟩ over orientations",
        Axis::log("modulus (field units)"),
        files,
        names,
        SummaryKind::Modulus,
    )];
    panels.push(scale_item_panel(
        "modulus anisotropy |first orientation harmonic of S1| / mean",
        Axis::linear("anisotropy (0: isotropic)"),
        files,
        names,
        SummaryKind::ModulusAnisotropy,
    ));
    panels.extend(pair_panels(files, names));
    panels.push(averages_panel(
        "band powers: ⟨P(j,l)⟩ = ⟨|I∗ψ(j,l)|²⟩ over l",
        "P (field units²)",
        files,
        names,
        band_power_by_scale,
    ));
    panels.push(tile_power_panel(files, names));
    let width = width.clamp(400, 8000);
    Ok(Figure {
        title: format!(
            "Scattering statistics of {} — hollow markers and crossed cells: untrusted (too little kept pooling weight)",
            if many {
                format!("{} measurements", files.len())
            } else {
                names[0].clone()
            }
        ),
        panels,
        columns: 3,
        panel_size: (width / 3, width / 4),
    })
}

pub fn run_coefficients(args: &CoefficientsArgs) -> Result<()> {
    check_output(&args.output, args.width)?;
    let files = args
        .inputs
        .iter()
        .map(|p| MeasurementFile::read(p))
        .collect::<Result<Vec<_>>>()?;
    let names = legend_names(&args.inputs);
    let figure = coefficients_figure(&files, &names, args.width)?;
    figure.write(&args.output)?;
    println!(
        "{} measurement file(s) drawn in {}",
        files.len(),
        args.output.display()
    );
    Ok(())
}

// ---------------------------------------------------------------------------------------------
// Forecast files

/// One statistic set of a forecast file.
#[derive(Debug, Clone, serde::Deserialize)]
pub struct ForecastSet {
    pub name: String,
    #[serde(default)]
    pub parameter_covariance: Option<Vec<Vec<f64>>>,
}

/// The parts of a forecast file the ellipse picture uses.
#[derive(Debug, Clone, serde::Deserialize)]
pub struct ForecastFile {
    pub parameters: Vec<String>,
    pub fiducial: Vec<f64>,
    pub sets: Vec<ForecastSet>,
}

impl ForecastFile {
    /// Reads a forecast file.
    pub fn read(path: &Path) -> Result<Self> {
        let text = crate::files::read_text(path)?;
        let file: ForecastFile = serde_json::from_str(&text)
            .map_err(|e| Error::io(path, format!("not a forecast file: {e}")))?;
        if file.fiducial.len() != file.parameters.len() {
            return Err(Error::io(
                path,
                format!(
                    "{} parameters but {} fiducial values",
                    file.parameters.len(),
                    file.fiducial.len()
                ),
            ));
        }
        Ok(file)
    }
}

/// The two confidence levels drawn, with the Coe 2009 (arXiv:0906.4123) axis scales.
pub const ELLIPSE_LEVELS: [(ConfidenceLevel, &str); 2] = [
    (ConfidenceLevel::OneSigma, "68%"),
    (ConfidenceLevel::TwoSigma, "95%"),
];

/// Points per ellipse outline.
pub const ELLIPSE_POINTS: usize = 180;

/// The ellipses of one set: the set name, its 1σ ellipse and the outline per level.
#[derive(Debug, Clone, PartialEq)]
pub struct SetEllipses {
    pub name: String,
    pub ellipse: ConfidenceEllipse,
    /// (level, outline points) for each of [`ELLIPSE_LEVELS`].
    pub outlines: Vec<(ConfidenceLevel, Vec<(f64, f64)>)>,
}

/// Indices of the parameters named in `choice` ("A,B"), or the first two.
pub fn parameter_pair(file: &ForecastFile, choice: Option<&str>) -> Result<(usize, usize)> {
    let find = |name: &str| {
        file.parameters
            .iter()
            .position(|p| p == name.trim())
            .ok_or_else(|| {
                Error::Setting(format!(
                    "parameter '{}' is not in the forecast (it has: {})",
                    name.trim(),
                    file.parameters.join(", ")
                ))
            })
    };
    let (a, b) = match choice {
        Some(text) => {
            let parts: Vec<&str> = text.split(',').collect();
            if parts.len() != 2 {
                return Err(Error::Setting(format!(
                    "--parameters takes two names separated by a comma, got '{text}'"
                )));
            }
            (find(parts[0])?, find(parts[1])?)
        }
        None if file.parameters.len() >= 2 => (0, 1),
        None => {
            return Err(Error::Data(format!(
                "an ellipse needs two parameters; the forecast has {}",
                file.parameters.len()
            )))
        }
    };
    if a == b {
        return Err(Error::Setting(
            "--parameters needs two different parameters".to_string(),
        ));
    }
    Ok((a, b))
}

/// The ellipses of every set with a parameter covariance, for parameters (a, b), with the
/// reasons sets were skipped.
pub fn set_ellipses(
    file: &ForecastFile,
    a: usize,
    b: usize,
) -> Result<(Vec<SetEllipses>, Vec<String>)> {
    let np = file.parameters.len();
    let (pa, pb) = (&file.parameters[a], &file.parameters[b]);
    let centre = (file.fiducial[a], file.fiducial[b]);
    let mut out = Vec::new();
    let mut skipped = Vec::new();
    for set in &file.sets {
        let Some(c) = &set.parameter_covariance else {
            skipped.push(format!("set '{}' has no parameter covariance", set.name));
            continue;
        };
        if c.len() != np || c.iter().any(|row| row.len() != np) {
            skipped.push(format!(
                "set '{}': its parameter covariance is not {np} × {np}",
                set.name
            ));
            continue;
        }
        match ConfidenceEllipse::from_covariance(pa, pb, centre, c[a][a], c[b][b], c[a][b]) {
            Ok(ellipse) => {
                let outlines = ELLIPSE_LEVELS
                    .iter()
                    .map(|(level, _)| {
                        Ok((
                            *level,
                            ellipse.polyline(level.tabulated_scale(), ELLIPSE_POINTS)?,
                        ))
                    })
                    .collect::<Result<Vec<_>>>()?;
                out.push(SetEllipses {
                    name: set.name.clone(),
                    ellipse,
                    outlines,
                });
            }
            Err(e) => skipped.push(format!("set '{}': {e}", set.name)),
        }
    }
    if out.is_empty() {
        let why = if skipped.is_empty() {
            "the forecast has no sets".to_string()
        } else {
            skipped.join("; ")
        };
        return Err(Error::Data(format!("no ellipse to draw: {why}")));
    }
    Ok((out, skipped))
}

/// The figure of `plot ellipses`.
pub fn ellipses_figure(
    file: &ForecastFile,
    a: usize,
    b: usize,
    ellipses: &[SetEllipses],
    width: u32,
) -> Figure {
    let (pa, pb) = (&file.parameters[a], &file.parameters[b]);
    // Room above the ellipses for the legend.
    let all: Vec<(f64, f64)> = ellipses
        .iter()
        .flat_map(|e| e.outlines.iter().flat_map(|o| o.1.iter().copied()))
        .collect();
    let range = |v: Vec<f64>, top: f64| {
        let lo = v.iter().copied().fold(f64::INFINITY, f64::min);
        let hi = v.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        let span = hi - lo;
        (span > 0.0 && span.is_finite()).then_some((lo - 0.06 * span, hi + top * span))
    };
    let mut x_axis = Axis::linear(pa.clone());
    x_axis.range = range(all.iter().map(|p| p.0).collect(), 0.06);
    let mut y_axis = Axis::linear(pb.clone());
    y_axis.range = range(
        all.iter().map(|p| p.1).collect(),
        0.1 + 0.09 * (ellipses.len() + 1) as f64,
    );
    let mut panel = Panel::new(format!("{pb} against {pa}"), x_axis, y_axis);
    for (i, set) in ellipses.iter().enumerate() {
        for (k, (_, outline)) in set.outlines.iter().enumerate() {
            let points = outline
                .iter()
                .map(|&(x, y)| ChartPoint::new(x, y))
                .collect();
            let label = (k == 0).then(|| set.name.clone());
            let mut s = Series::line(label, points, palette(i), if k == 0 { 3 } else { 2 });
            s.closed = true;
            if k > 0 {
                s.opacity = 0.45;
            }
            panel.series.push(s);
        }
    }
    let mut fid = Series::markers(
        Some("fiducial".to_string()),
        vec![ChartPoint::new(file.fiducial[a], file.fiducial[b])],
        [0, 0, 0],
        4,
    );
    fid.marker = MarkerShape::Diamond;
    panel.series.push(fid);
    let width = width.clamp(300, 8000);
    Figure {
        title:
            "Fisher forecast — solid: 68%, faint: 95% regions (1σ ellipse × 1.52, × 2.48; Coe 2009)"
                .to_string(),
        panels: vec![panel],
        columns: 1,
        panel_size: (width, width * 4 / 5),
    }
}

pub fn run_ellipses(args: &EllipsesArgs) -> Result<()> {
    check_output(&args.output, args.width)?;
    let file = ForecastFile::read(&args.input)?;
    let (a, b) = parameter_pair(&file, args.parameters.as_deref())?;
    let (ellipses, skipped) = set_ellipses(&file, a, b)?;
    for s in &skipped {
        eprintln!("planisphere: note: {s}: not drawn");
    }
    ellipses_figure(&file, a, b, &ellipses, args.width).write(&args.output)?;
    println!(
        "{} set(s) drawn in {} ({} against {})",
        ellipses.len(),
        args.output.display(),
        file.parameters[b],
        file.parameters[a]
    );
    Ok(())
}

// ---------------------------------------------------------------------------------------------
// Per-tile statistics

pub fn run_tile_map(args: &TileMapArgs) -> Result<()> {
    if check_output(&args.output, args.width)? != ImageFormat::Png {
        return Err(Error::Setting(format!(
            "{}: tile maps are written as PNG only",
            args.output.display()
        )));
    }
    let statistic = TileStatistic::parse(&args.statistic)?;
    let settings = args.measuring.options.settings()?;
    statistic.check(settings.scales, settings.orientations)?;
    let map = load_map(&args.map, &args.measuring.column)?;
    let footprint = args.measuring.mask.footprint_for(&map, &args.map)?;
    super::inputs::check_measurable(&map, Some(&footprint), &args.map.display().to_string())?;
    let measurer = SphereMeasurer::new(map.pixelization(), &footprint, settings)?;
    let stats = measurer.measure(&map, &footprint)?;
    let tiles = measured_tiles(&measurer, &map, &footprint, &stats)?;
    let values = tile_values(&measurer, &stats, &tiles, &statistic)?;
    let painted = paint_tiles(&measurer, &values)?;
    let finite: Vec<f64> = values.iter().filter_map(|v| v.1).collect();
    if finite.is_empty() {
        return Err(Error::Data(format!(
            "no tile has a value of '{}': every tile lost its pooling weight",
            statistic.name
        )));
    }
    let lo = finite.iter().copied().fold(f64::INFINITY, f64::min);
    let hi = finite.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let summary = measurer.summary();
    let mut picture = SkyPicture::new(
        args.width,
        format!("{} per tile — {}", statistic.name, args.map.display()),
    )
    .fill_map(&painted, lo, hi);
    picture.note(format!(
        "colour: {} per tile, linear from {lo:.4e} (dark blue) to {hi:.4e} (yellow); light grey: no tile or no pooling weight",
        statistic.name
    ));
    picture.note(format!(
        "{} of {} tiles with a value; cells: {}, {}² pixels of {:.2}′ per tile",
        finite.len(),
        measurer.plan().len(),
        summary.cells,
        summary.tile_pixels,
        summary.pixel_size_arcmin
    ));
    // The sky picture goes to a temporary file beside the output, then gains a colour bar.
    let sky_png = args.output.with_file_name(format!(
        ".{}.{}.sky.png",
        args.output
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_default(),
        std::process::id()
    ));
    let drawn = picture
        .write_png(&sky_png)
        .and_then(|()| std::fs::read(&sky_png).map_err(|e| Error::io(&sky_png, e)));
    let _ = std::fs::remove_file(&sky_png);
    let bar = ColourBar {
        title: statistic.name.clone(),
        lo,
        hi,
    };
    write_bytes(&args.output, &append_colour_bar(&drawn?, &bar)?)?;
    println!(
        "{} per tile ({} tiles, {lo:.4e} … {hi:.4e}) drawn in {}",
        statistic.name,
        finite.len(),
        args.output.display()
    );
    Ok(())
}
