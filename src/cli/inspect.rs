//! `planisphere inspect MAP.fits`: what a user checks first about a HEALPix map file.

use crate::error::{Error, Result};
use crate::io::fits_io::{ColumnChoice, Coverage, HealpixFitsReader};
use crate::sky::skymap::MapSummary;
use std::io::Write;
use std::path::PathBuf;

/// Show what a HEALPix FITS map holds: NSIDE, ordering, valid pixels, statistics, columns.
///
/// Reads one value column of the file's HEALPix table (full or partial sky) and prints its
/// NSIDE, pixel ordering, pixel count, number and fraction of valid pixels (UNSEEN and NaN
/// pixels, and pixels missing from a partial-sky file, are invalid), mean, rms, minimum and
/// maximum over the valid pixels, coordinate system, pixel size, the names of all value columns,
/// and any assumption made while reading (for example a missing ORDERING taken as RING).
#[derive(Debug, clap::Args)]
pub struct InspectArgs {
    /// The HEALPix FITS file to inspect.
    #[arg(value_name = "MAP.fits")]
    pub map: PathBuf,

    /// Which value column to summarise: its 0-based position among the value columns (the
    /// PIXEL column of a partial-sky file does not count) or its name, in any case.
    /// Default: the first value column.
    #[arg(long, value_name = "NAME_OR_INDEX")]
    pub column: Option<String>,

    /// Print the report as one JSON object on stdout instead of text.
    #[arg(long)]
    pub json: bool,
}

/// The report `inspect` prints.
#[derive(Debug, serde::Serialize)]
pub struct InspectReport {
    /// The file read.
    pub file: PathBuf,
    /// 0-based HDU of the HEALPix table.
    pub hdu: usize,
    /// Name of the summarised column.
    pub column: String,
    /// Its 0-based position among the value columns.
    pub column_position: usize,
    /// Its TFORM, e.g. `1024E`.
    pub stored_format: String,
    /// Its TUNIT, when present.
    pub unit: Option<String>,
    /// All value columns, in file order.
    pub columns: Vec<String>,
    /// `full sky` or `partial sky`.
    pub coverage: &'static str,
    /// NSIDE, ordering, valid pixels, moments, coordinates and pixel size.
    #[serde(flatten)]
    pub map: MapSummary,
    /// Assumptions made while reading.
    pub warnings: Vec<String>,
}

/// Builds the report for `args`.
pub fn report(args: &InspectArgs) -> Result<InspectReport> {
    let choice = args
        .column
        .as_deref()
        .map(ColumnChoice::parse)
        .unwrap_or_default();
    let mut reader = HealpixFitsReader::open(&args.map)?;
    let position = reader.header().column_position(&choice)?;
    let map = reader.read_map(&ColumnChoice::Position(position))?;
    let header = reader.header();
    let summary: MapSummary = map.summary();
    let columns = header.column_names();
    let info = &header.columns[position];
    Ok(InspectReport {
        file: args.map.clone(),
        hdu: header.hdu,
        column: columns[position].clone(),
        column_position: position,
        stored_format: info.format.clone(),
        unit: info.unit.clone(),
        columns,
        coverage: match header.coverage {
            Coverage::FullSky => "full sky",
            Coverage::Partial => "partial sky",
        },
        map: summary,
        warnings: header.warnings.clone(),
    })
}

/// What a COORDSYS letter means (HEALPix FITS convention).
fn coordsys_meaning(c: &str) -> &'static str {
    match c.trim().to_ascii_uppercase().as_str() {
        "G" => " (galactic)",
        "E" => " (ecliptic)",
        "C" | "Q" => " (equatorial)",
        _ => "",
    }
}

fn number(x: Option<f64>) -> String {
    x.map(|v| format!("{v:.6e}"))
        .unwrap_or_else(|| "none (no valid pixel)".to_string())
}

/// The report as aligned text lines.
pub fn render_text(r: &InspectReport) -> String {
    let s = &r.map;
    let mut out = String::new();
    let mut line = |label: &str, value: String| {
        out.push_str(&format!("{label:<14}{value}\n"));
    };
    line("file", r.file.display().to_string());
    line(
        "column",
        format!(
            "{} (position {}, stored as {}{})",
            r.column,
            r.column_position,
            r.stored_format,
            r.unit
                .as_deref()
                .map(|u| format!(", unit {u}"))
                .unwrap_or_default()
        ),
    );
    line(
        "columns",
        r.columns
            .iter()
            .enumerate()
            .map(|(i, c)| format!("{i} {c}"))
            .collect::<Vec<_>>()
            .join(", "),
    );
    line("HDU", r.hdu.to_string());
    line("NSIDE", s.nside.to_string());
    line("ordering", s.ordering.fits_name().to_string());
    line("coverage", r.coverage.to_string());
    line("pixels", s.npix.to_string());
    line(
        "valid pixels",
        format!(
            "{} ({:.4}% of the sky)",
            s.valid_pixels,
            100.0 * s.valid_fraction
        ),
    );
    line("mean", number(s.mean));
    line("rms", number(s.rms));
    line("min", number(s.min));
    line("max", number(s.max));
    line(
        "coordinates",
        s.coordsys
            .as_deref()
            .map(|c| format!("{c}{}", coordsys_meaning(c)))
            .unwrap_or_else(|| "not given (no COORDSYS keyword)".to_string()),
    );
    line(
        "pixel size",
        format!(
            "{:.4} arcmin (mean spacing; pixel area {:.6e} sr)",
            s.mean_spacing_arcmin, s.pixel_area_sr
        ),
    );
    for w in &r.warnings {
        line("warning", w.clone());
    }
    out
}

/// Runs `inspect`.
pub fn run(args: &InspectArgs) -> Result<()> {
    let r = report(args)?;
    let text = if args.json {
        let mut t = serde_json::to_string_pretty(&r)
            .map_err(|e| Error::Data(format!("cannot encode the report as JSON: {e}")))?;
        t.push('\n');
        t
    } else {
        render_text(&r)
    };
    let mut stdout = std::io::stdout().lock();
    stdout
        .write_all(text.as_bytes())
        .and_then(|()| stdout.flush())
        .map_err(|e| Error::io("standard output", e))
}
