//! `planisphere tiles`: plan the tangent-plane tiling of a map's footprint and report what it
//! will cost, optionally as JSON and as a Mollweide picture.

use super::inputs::load_map;
use super::measure::MeasureOptions;
use crate::error::Result;
use crate::figures::plotting::SkyPicture;
use crate::io::fits_io::{read_footprint, ColumnChoice};
use crate::measure::measurement::MeasurementSettings;
use crate::sky::footprint::Footprint;
use crate::sky::skymap::SkyMap;
use crate::tiles::tiling::{TilingPlan, TilingSummary};
use std::path::{Path, PathBuf};

/// Options of `planisphere tiles`.
#[derive(Debug, clap::Args)]
pub struct TilesArgs {
    /// HEALPix map (FITS).
    pub map: PathBuf,
    /// Mask or weight map (FITS) of the same NSIDE; without it, the map's valid pixels.
    #[arg(long)]
    pub mask: Option<PathBuf>,
    /// Column of the map to read: 0-based position or name.
    #[arg(long, default_value = "0")]
    pub column: ColumnChoice,
    /// Column of the mask file: 0-based position or name.
    #[arg(long, default_value = "0")]
    pub mask_column: ColumnChoice,
    /// The measurement options of `measure`: the plan shown is the one `measure`, `ensemble`
    /// and `synthesize` use with the same options.
    #[command(flatten)]
    pub options: MeasureOptions,
    /// Use a mask whose COORDSYS header names another coordinate system than the map's.
    #[arg(long)]
    pub allow_coordsys_mismatch: bool,
    /// Write the plan and its summary as JSON to this file.
    #[arg(long)]
    pub json: Option<PathBuf>,
    /// Draw the tiling over the footprint (Mollweide, PNG) to this file.
    #[arg(long)]
    pub png: Option<PathBuf>,
}

/// One tile in the report.
#[derive(Debug, Clone, serde::Serialize)]
pub struct TileRecord {
    pub index: usize,
    /// The tile's cell (for HEALPix cells the NESTED index of the coarse pixel).
    pub cell: u64,
    pub center_lon_deg: f64,
    pub center_lat_deg: f64,
    pub footprint_fraction: f64,
    pub footprint_pixels: u64,
    /// sec²ρ at the core's farthest point from the tile centre.
    pub core_distortion: f64,
}

/// What `planisphere tiles` reports.
#[derive(Debug, Clone, serde::Serialize)]
pub struct Report {
    pub summary: TilingSummary,
    pub tiles: Vec<TileRecord>,
}

/// The plan for `map` over the footprint `mask` (restricted to the map's valid pixels), its
/// summary for the current rayon thread count, and its tiles.
pub fn tiles_report(
    map: &SkyMap,
    mask: &Footprint,
    settings: &MeasurementSettings,
) -> Result<Report> {
    let (plan, report) = plan_and_report(map, mask, settings)?;
    drop(plan);
    Ok(report)
}

fn plan_and_report(
    map: &SkyMap,
    mask: &Footprint,
    settings: &MeasurementSettings,
) -> Result<(TilingPlan, Report)> {
    let footprint = mask.restricted_to(map)?;
    let plan = settings.plan(map.pixelization(), &footprint)?;
    let tiles = plan
        .tiles()
        .iter()
        .enumerate()
        .map(|(index, t)| TileRecord {
            index,
            cell: t.cell,
            center_lon_deg: t.center.lon().to_degrees(),
            center_lat_deg: t.center.lat().to_degrees(),
            footprint_fraction: t.footprint_fraction,
            footprint_pixels: t.footprint_pixels,
            core_distortion: t.core_distortion,
        })
        .collect();
    let summary = plan.summary(rayon::current_num_threads());
    Ok((plan, Report { summary, tiles }))
}

/// The summary as the lines printed by the command.
pub fn summary_lines(s: &TilingSummary) -> Vec<String> {
    let mib = |b: u64| b as f64 / (1024.0 * 1024.0);
    vec![
        format!(
            "tiles: {} ({} on map NSIDE {})",
            s.tiles, s.cells, s.map_nside
        ),
        format!(
            "tile grid: {} × {} pixels of {:.3} arcmin ({:.3} map spacings), {:.2}° across, halo {} pixels",
            s.tile_pixels,
            s.tile_pixels,
            s.pixel_size_arcmin,
            s.pixel_size_in_map_spacings,
            s.tile_width_deg,
            s.halo_pixels
        ),
        format!(
            "footprint: {:.2} deg² ({:.6} sr), covered by the cores: {:.6} sr; cores total {:.6} sr, mean footprint fraction {:.3}",
            s.footprint_area_deg2,
            s.footprint_area_sr,
            s.covered_footprint_area_sr,
            s.core_area_sr,
            s.mean_footprint_fraction
        ),
        format!(
            "work: {:.2} tile pixels per footprint pixel ({} footprint pixels), tile area {:.2}× the footprint area",
            s.tile_pixels_per_footprint_pixel, s.footprint_pixels, s.tile_area_per_footprint_area
        ),
        format!(
            "distortion sec²ρ: {:.4} at the grid corners, {:.4} at worst over the cores",
            s.grid_corner_distortion, s.worst_core_distortion
        ),
        format!(
            "memory: {:.2} MiB of grids per tile, {:.2} MiB with {} workers",
            mib(s.bytes_per_tile),
            mib(s.bytes_in_flight),
            s.threads
        ),
    ]
}

/// Draws the footprint (grey shades by weight), each tile's core outline and grid square, and
/// the tile centres, in a Mollweide view.
pub fn draw_tiling(plan: &TilingPlan, footprint: &Footprint, path: &Path) -> Result<()> {
    let fp_pix = footprint.pixelization();
    let s = plan.summary(1);
    let mut picture = SkyPicture::new(1600, "Tangent-plane tiles over the footprint").fill(|d| {
        let w = footprint.weight(fp_pix.pixel_of(d));
        (w > 0.0).then(|| {
            let t = 1.0 - w;
            [
                (150.0 + 60.0 * t) as u8,
                (175.0 + 45.0 * t) as u8,
                (200.0 + 30.0 * t) as u8,
            ]
        })
    });
    let n = plan.tile_pixels();
    let half = n as f64 / 2.0 * plan.pixel_size();
    for (i, t) in plan.tiles().iter().enumerate() {
        for core in plan.core_outlines(i)? {
            picture.line(core, [200, 40, 30], 2);
        }
        let proj = plan.projection(i)?;
        let mut square = Vec::new();
        let steps = 32;
        for k in 0..4 * steps {
            let u = -half + 2.0 * half * (k % steps) as f64 / steps as f64;
            let (x, y) = match k / steps {
                0 => (u, -half),
                1 => (half, u),
                2 => (-u, half),
                _ => (-half, -u),
            };
            square.push(proj.inverse(x, y));
        }
        square.push(proj.inverse(-half, -half));
        picture.line(square, [120, 140, 230], 1);
        picture.point(t.center, [20, 20, 20], 3);
    }
    picture.note(format!(
        "{} tiles ({}), grids {} × {} of {:.2}′ ({:.1}° across), halo {}; map NSIDE {}",
        s.tiles, s.cells, n, n, s.pixel_size_arcmin, s.tile_width_deg, s.halo_pixels, s.map_nside
    ));
    picture.note(format!(
        "footprint {:.0} deg² (shaded); red: cores; blue: tile grids; worst sec²ρ {:.3}",
        s.footprint_area_deg2, s.grid_corner_distortion
    ));
    picture.write_png(path)
}

/// Runs the command.
pub fn run(args: &TilesArgs) -> Result<()> {
    let map = load_map(&args.map, &args.column)?;
    let mask = match &args.mask {
        Some(path) => {
            let (mask, header) = read_footprint(path, &args.mask_column)?;
            super::inputs::check_same_coordsys(
                (&args.map.display().to_string(), map.coordsys.as_deref()),
                (&path.display().to_string(), header.coordsys.as_deref()),
                args.allow_coordsys_mismatch,
            )?;
            mask
        }
        None => Footprint::of_valid_pixels(&map),
    };
    let settings = args.options.settings()?;
    let (plan, report) = plan_and_report(&map, &mask, &settings)?;
    for line in summary_lines(&report.summary) {
        println!("{line}");
    }
    if let Some(path) = &args.json {
        crate::files::write_json(path, &report)?;
        println!("plan written to {}", path.display());
    }
    if let Some(path) = &args.png {
        draw_tiling(&plan, &mask.restricted_to(&map)?, path)?;
        println!("picture written to {}", path.display());
    }
    Ok(())
}
