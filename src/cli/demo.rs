//! `planisphere demo`: runs the job on the built-in scenario, with no input files.

use crate::error::Result;
use crate::pixelization::{Ordering, Pixelization};
use crate::scenario::{synthetic_waves, MockFootprint};

/// Run planisphere on a built-in mock survey: no input files needed.
#[derive(Debug, clap::Args)]
pub struct DemoArgs {
    /// NSIDE of the demo's maps.
    #[arg(long, default_value_t = 128)]
    pub nside: u32,
}

/// Builds the mock footprint and a synthetic map and prints their summaries.
pub fn run(args: &DemoArgs) -> Result<()> {
    let pix = Pixelization::new(args.nside, Ordering::Ring)?;
    let footprint = MockFootprint::default();
    let mask = footprint.build(pix);
    let map = synthetic_waves(pix, 200, 1);
    let m = map.summary();
    let f = mask.summary();
    println!("planisphere demo: a mock survey of our own invention");
    println!(
        "footprint: |b| > {}° with {} star holes of {}–{}°",
        footprint.latitude_cut_deg,
        footprint.star_holes,
        footprint.hole_radius_deg.0,
        footprint.hole_radius_deg.1
    );
    println!(
        "  NSIDE {}  observed pixels {}  area {:.1} deg²  f_sky {:.4}",
        f.nside, f.observed_pixels, f.area_deg2, f.f_sky
    );
    println!("synthetic sky: 200 random plane waves on the sphere");
    println!(
        "  NSIDE {}  {}  pixels {}  mean {:.4e}  rms {:.4e}  min {:.4e}  max {:.4e}",
        m.nside,
        m.ordering,
        m.npix,
        m.mean.unwrap_or(f64::NAN),
        m.rms.unwrap_or(f64::NAN),
        m.min.unwrap_or(f64::NAN),
        m.max.unwrap_or(f64::NAN)
    );
    Ok(())
}
