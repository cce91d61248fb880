//! Options shared by the commands that read a map and a mask, and how they are loaded.

use crate::error::{Error, Result};
use crate::io::fits_io::{read_footprint, read_map, ColumnChoice};
use crate::sky::apodization::TaperKind;
use crate::sky::footprint::Footprint;
use crate::sky::skymap::SkyMap;
use std::path::{Path, PathBuf};

/// A mask (or weight map) and how to taper its edges.
#[derive(Debug, Clone, clap::Args)]
pub struct MaskArgs {
    /// Mask or weight map (HEALPix FITS, values in [0, 1]); without it the map's valid pixels
    /// are the footprint.
    #[arg(long, value_name = "MASK.fits")]
    pub mask: Option<PathBuf>,
    /// Column of the mask file: 0-based position or name.
    #[arg(long, value_name = "COLUMN", default_value = "0")]
    pub mask_column: ColumnChoice,
    /// Taper applied to binary masks near their edges (weight maps are used as they are).
    #[arg(long, value_enum, default_value_t = TaperKind::C2)]
    pub taper: TaperKind,
    /// Width of the edge taper in arcmin.
    #[arg(
        long,
        value_name = "ARCMIN",
        default_value_t = 60.0,
        allow_negative_numbers = true
    )]
    pub taper_arcmin: f64,
    /// Use a mask (or second map) whose COORDSYS header names another coordinate system than
    /// the map's (for a header known to be wrong; the pixels are not rotated).
    #[arg(long)]
    pub allow_coordsys_mismatch: bool,
}

pub use crate::io::fits_io::check_same_coordsys;

/// A TOML file's parse error as one line: `{path}: {what}: line N, key `K`: reason` (line and
/// key from the error's position in `text`, when it has one).
pub fn toml_error(path: &Path, text: &str, e: &toml::de::Error, what: &str) -> Error {
    let reason = e.message().split_whitespace().collect::<Vec<_>>().join(" ");
    let place = e.span().map(|span| {
        let start = span.start.min(text.len());
        let line_start = text[..start].rfind('\n').map_or(0, |i| i + 1);
        let line_no = text[..start].matches('\n').count() + 1;
        let line = text[line_start..].lines().next().unwrap_or("");
        let key = line
            .split_once('=')
            .map(|(k, _)| k.trim().trim_matches('"').to_string())
            .filter(|k| !k.is_empty() && !k.starts_with('['));
        match key {
            Some(k) => format!("line {line_no}, key `{k}`"),
            None => format!("line {line_no}"),
        }
    });
    match place {
        Some(p) => Error::io(path, format!("{what}: {p}: {reason}")),
        None => Error::io(path, format!("{what}: {reason}")),
    }
}

pub use crate::sky::measurable::check_measurable;

/// Reads a map column, reporting a file's warnings (e.g. an assumed ordering) on stderr.
pub fn load_map(path: &std::path::Path, column: &ColumnChoice) -> Result<SkyMap> {
    let (map, header) = read_map(path, column)?;
    for w in &header.warnings {
        eprintln!("planisphere: warning: {}: {w}", path.display());
    }
    Ok(map)
}

impl MaskArgs {
    /// The taper block of a measurement's settings: kind, width and mask file
    /// ([`crate::io::measurement_document::taper_description`]).
    pub fn taper_record(&self) -> serde_json::Value {
        let mask_name = self.mask.as_ref().map(|p| p.display().to_string());
        crate::io::measurement_document::taper_description(
            self.taper,
            self.taper_arcmin,
            mask_name.as_deref(),
        )
    }

    /// The footprint to use with `map`: the mask (or the map's valid pixels), matched to the
    /// map and tapered.
    pub fn footprint_for(&self, map: &SkyMap, map_path: &Path) -> Result<Footprint> {
        let raw =
            untapered_footprint(map, map_path, self.mask.as_deref(), self, &self.mask_column)?;
        self.taper_footprint(raw)
    }

    /// `raw` with this taper applied (binary masks only; a full sky or `--taper none` as is).
    pub fn taper_footprint(&self, raw: Footprint) -> Result<Footprint> {
        crate::sky::apodization::taper_footprint(raw, self.taper, self.taper_arcmin)
    }
}

pub use crate::sky::footprint::refuse_single_pixel_mask;

/// The untapered footprint of `map` (read from `map_path`): the mask file (or the map's valid
/// pixels), brought to the map's ordering, without the map's bad pixels. A mask whose COORDSYS
/// differs from the map's is refused unless `options.allow_coordsys_mismatch`.
pub fn untapered_footprint(
    map: &SkyMap,
    map_path: &Path,
    mask: Option<&Path>,
    options: &MaskArgs,
    column: &ColumnChoice,
) -> Result<Footprint> {
    if map.valid_count() == 0 {
        return Err(Error::Data(format!(
            "{}: every pixel is bad (UNSEEN or NaN): nothing to measure",
            map_path.display()
        )));
    }
    match mask {
        Some(path) => {
            let (fp, header) = read_footprint(path, column)?;
            for w in &header.warnings {
                eprintln!("planisphere: warning: {}: {w}", path.display());
            }
            check_same_coordsys(
                (&map_path.display().to_string(), map.coordsys.as_deref()),
                (&path.display().to_string(), header.coordsys.as_deref()),
                options.allow_coordsys_mismatch,
            )?;
            let fp = fp.restricted_to(map)?;
            refuse_single_pixel_mask(&fp)?;
            Ok(fp)
        }
        None => Footprint::of_valid_pixels(map).restricted_to(map),
    }
}
