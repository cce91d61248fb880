//! `plot flat-bias TABLE`: the bias of the flat-sky approximation measured by `compare-flat`,
//! per coefficient and tile size.
//!
//! Three columns of panels (order 1 S1, band powers P, order 2 S2) and two rows: the bias of
//! the mean in units of the statistical error of the difference,
//! (⟨S⟩_sphere − ⟨S⟩_flat)/√(σ²_sphere + σ²_flat), and the relative bias
//! (⟨S⟩_sphere − ⟨S⟩_flat)/⟨S⟩_flat in percent, against the scale j1 of the coefficient (the
//! smaller scale of an S2). One colour per tile size; hollow markers are coefficients flagged
//! untrusted on the sphere (below the sampling's trusted wavelength). The ±2σ lines mark
//! where a bias becomes significant at about 95% (common practice).

use super::check_output;
use crate::error::{Error, Result};
use crate::figures::charts::{palette, Axis, ChartPoint, Figure, MarkerShape, Panel, Series};
use crate::measure::flat_comparison::FlatComparisonRow;
use crate::scattering::layout::{CoefficientKind, CoefficientLabel, CoefficientSpelling};
use std::path::{Path, PathBuf};

/// Options of `plot flat-bias`.
#[derive(Debug, clap::Args)]
pub struct FlatBiasArgs {
    /// The table written by `compare-flat` (its CSV output, or the file of its --json option).
    #[arg(value_name = "TABLE.csv|json")]
    pub input: PathBuf,
    /// Output picture (.png or .svg).
    #[arg(long, short, value_name = "FILE.png|svg")]
    pub output: PathBuf,
    /// Width of the picture in pixels.
    #[arg(long, default_value_t = 1500)]
    pub width: u32,
}

/// Runs `plot flat-bias`.
pub fn run_flat_bias(args: &FlatBiasArgs) -> Result<()> {
    check_output(&args.output, args.width)?;
    let rows = read_rows(&args.input)?;
    let figure = flat_bias_figure(&rows, args.width)?;
    figure.write(&args.output)?;
    println!(
        "{} coefficient(s) at {} tile size(s) drawn in {}",
        rows.len(),
        tile_sizes(&rows).len(),
        args.output.display()
    );
    Ok(())
}

/// Reads a `compare-flat` table: JSON (an array of rows) or our CSV (columns found by name).
pub fn read_rows(path: &Path) -> Result<Vec<FlatComparisonRow>> {
    let text = crate::files::read_text(path)?;
    let rows = if text.trim_start().starts_with('[') {
        serde_json::from_str::<Vec<FlatComparisonRow>>(&text)
            .map_err(|e| Error::io(path, format!("not a compare-flat table: {e}")))?
    } else {
        parse_csv(&text).map_err(|e| Error::io(path, format!("not a compare-flat table: {e}")))?
    };
    if rows.is_empty() {
        return Err(Error::io(path, "the compare-flat table has no rows"));
    }
    Ok(rows)
}

/// The columns every compare-flat table has, in the order [`parse_row`] reads them.
const COLUMNS: [&str; 14] = [
    "tile_pixels",
    "tile_width_deg",
    "cells",
    "coefficient",
    "order",
    "j1",
    "sphere_mean",
    "sphere_error",
    "flat_mean",
    "flat_error",
    "relative_bias",
    "bias_in_errors",
    "bias_per_sky_scatter",
    "trusted",
];

/// One data row of the table: `cells` split at commas, `idx` the positions of [`COLUMNS`],
/// `k` the row number from 0, `optional` the cell of a column that older tables lack.
fn parse_row(
    cells: &[&str],
    idx: &[usize],
    k: usize,
    optional: &dyn Fn(&[&str], &str) -> Option<String>,
) -> std::result::Result<FlatComparisonRow, String> {
    let optional_number =
        |cells: &[&str], name: &str, k: usize| -> std::result::Result<f64, String> {
            match optional(cells, name).as_deref() {
                None | Some("") => Ok(f64::NAN),
                Some(c) => c
                    .parse::<f64>()
                    .map_err(|_| format!("row {}: bad {name} '{c}'", k + 1)),
            }
        };
    let cell = |i: usize| cells[idx[i]];
    let bad = |i: usize| format!("row {}: bad {} '{}'", k + 1, COLUMNS[i], cell(i));
    let num = |i: usize| cell(i).parse::<f64>().map_err(|_| bad(i));
    let int = |i: usize| cell(i).parse::<usize>().map_err(|_| bad(i));
    Ok(FlatComparisonRow {
        tile_pixels: int(0)?,
        tile_width_deg: num(1)?,
        cells: cell(2).to_string(),
        coefficient: cell(3).to_string(),
        order: cell(4).parse::<u8>().map_err(|_| bad(4))?,
        j1: if cell(5).is_empty() {
            None
        } else {
            Some(int(5)?)
        },
        sphere_mean: num(6)?,
        sphere_error: num(7)?,
        flat_mean: num(8)?,
        flat_error: num(9)?,
        relative_bias: num(10)?,
        bias_in_errors: num(11)?,
        bias_per_sky_scatter: num(12)?,
        trusted: cell(13).parse::<bool>().map_err(|_| bad(13))?,
        // the reference's doubling check (absent from tables of older versions)
        reference_pixels: optional(cells, "reference_pixels")
            .map(|c| {
                c.parse::<usize>()
                    .map_err(|_| format!("row {}: bad reference_pixels '{c}'", k + 1))
            })
            .transpose()?
            .unwrap_or(0),
        reference_change: optional_number(cells, "reference_change", k)?,
        reference_change_in_errors: optional_number(cells, "reference_change_in_errors", k)?,
        reference_converged: match optional(cells, "reference_converged").as_deref() {
            None | Some("") => None,
            Some(c) => Some(
                c.parse::<bool>()
                    .map_err(|_| format!("row {}: bad reference_converged '{c}'", k + 1))?,
            ),
        },
    })
}

fn parse_csv(text: &str) -> std::result::Result<Vec<FlatComparisonRow>, String> {
    let mut lines = text.lines().filter(|l| !l.trim().is_empty());
    let header: Vec<&str> = lines.next().ok_or("empty file")?.split(',').collect();
    let col = |name: &str| {
        header
            .iter()
            .position(|h| h.trim() == name)
            .ok_or(format!("no column '{name}'"))
    };
    let idx = COLUMNS
        .iter()
        .map(|n| col(n))
        .collect::<std::result::Result<Vec<_>, _>>()?;
    let optional = |cells: &[&str], name: &str| -> Option<String> {
        header
            .iter()
            .position(|h| h.trim() == name)
            .and_then(|i| cells.get(i).map(|c| c.to_string()))
    };
    let mut rows = Vec::new();
    for (k, line) in lines.enumerate() {
        let cells: Vec<&str> = line.split(',').map(str::trim).collect();
        if cells.len() != header.len() {
            return Err(format!(
                "row {} has {} cells, the header {}",
                k + 1,
                cells.len(),
                header.len()
            ));
        }
        rows.push(parse_row(&cells, &idx, k, &optional)?);
    }
    Ok(rows)
}

fn tile_sizes(rows: &[FlatComparisonRow]) -> Vec<(usize, f64)> {
    let mut sizes: Vec<(usize, f64)> = Vec::new();
    for r in rows {
        if !sizes.iter().any(|(t, _)| *t == r.tile_pixels) {
            sizes.push((r.tile_pixels, r.tile_width_deg));
        }
    }
    sizes.sort_by_key(|s| s.0);
    sizes
}

/// The three coefficient families drawn, by the kind their names stand for.
const FAMILIES: [(CoefficientKind, &str); 3] = [
    (CoefficientKind::FirstOrder, "order 1, S1(j, l)"),
    (CoefficientKind::BandPower, "band power P(j, l)"),
    (CoefficientKind::SecondOrder, "order 2, S2(j1, l1, j2, l2)"),
];

/// True when a table's coefficient name is one of this kind.
fn is_kind(name: &str, kind: CoefficientKind) -> bool {
    CoefficientLabel::parse(name, CoefficientSpelling::Short).is_some_and(|l| l.kind == kind)
}

/// The panel of one coefficient family (kind, title): the bias per scale of every tile
/// size, relative (in %) or in σ of the difference, with reference levels; `None` when the table
/// has no coefficient of the family.
fn family_panel(
    rows: &[FlatComparisonRow],
    sizes: &[(usize, f64)],
    (kind, title): (CoefficientKind, &str),
    relative: bool,
) -> Option<Panel> {
    let spread = 0.5 / sizes.len().max(1) as f64;
    let family: Vec<&FlatComparisonRow> = rows
        .iter()
        .filter(|r| is_kind(&r.coefficient, kind) && r.j1.is_some())
        .collect();
    let y_label = if relative {
        "(sphere − flat) / flat  [%]"
    } else {
        "(sphere − flat) / σ of the difference"
    };
    let j_max = family.iter().filter_map(|r| r.j1).max().unwrap_or(0);
    let mut x_axis = Axis::linear("scale j (j1 for S2)");
    x_axis.range = Some((-0.5, j_max as f64 + 0.5));
    x_axis.ticks = Some((0..=j_max).map(|j| (j as f64, j.to_string())).collect());
    let mut panel = Panel::new(
        format!("{title}: {}", if relative { "relative" } else { "in σ" }),
        x_axis,
        Axis::linear(y_label),
    );
    for (k, (tile, width_deg)) in sizes.iter().enumerate() {
        let offset = (k as f64 - (sizes.len() as f64 - 1.0) / 2.0) * spread;
        let points: Vec<ChartPoint> = family
            .iter()
            .filter(|r| r.tile_pixels == *tile)
            .map(|r| {
                let j = r.j1.unwrap_or(0);
                ChartPoint {
                    x: j as f64 + offset,
                    y: if relative {
                        100.0 * r.relative_bias
                    } else {
                        r.bias_in_errors
                    },
                    solid: r.trusted,
                }
            })
            .collect();
        if points.is_empty() {
            continue;
        }
        let mut s = Series::markers(
            Some(format!("{tile}² tiles ({width_deg:.1}°)")),
            points,
            palette(k),
            4,
        );
        s.marker = MarkerShape::nth(k);
        panel.series.push(s);
    }
    let (lo, hi) = (-0.5, j_max as f64 + 0.5);
    let levels: &[(f64, &str)] = if relative {
        &[(0.0, "no bias")]
    } else {
        &[(2.0, "±2σ"), (-2.0, "")]
    };
    for (y, label) in levels {
        let label = (!label.is_empty()).then(|| label.to_string());
        panel.series.push(Series::line(
            label,
            vec![ChartPoint::new(lo, *y), ChartPoint::new(hi, *y)],
            [120, 120, 120],
            1,
        ));
    }
    (!family.is_empty()).then_some(panel)
}

/// The figure of a compare-flat table (module documentation).
pub fn flat_bias_figure(rows: &[FlatComparisonRow], width: u32) -> Result<Figure> {
    let sizes = tile_sizes(rows);
    let mut panels = Vec::new();
    for relative in [false, true] {
        for (kind, title) in FAMILIES {
            panels.extend(family_panel(rows, &sizes, (kind, title), relative));
        }
    }
    if panels.is_empty() {
        return Err(Error::Data(
            "the compare-flat table holds no S1, band-power or S2 coefficient".into(),
        ));
    }
    let columns = panels.len() / 2;
    let panel_w = (width / columns.max(1) as u32).max(200);
    Ok(Figure {
        title:
            "Flat-sky approximation: sphere − flat, per tile size (hollow: untrusted on the sphere)"
                .into(),
        panels,
        columns: columns.max(1),
        panel_size: (panel_w, (panel_w * 3 / 4).max(150)),
    })
}
