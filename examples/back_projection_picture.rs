//! Samples a smooth map onto tiles, takes every tile back to the sphere, and draws the
//! assembled map and its difference from the input in Mollweide pictures.
//!
//! cargo run --release --example back_projection_picture [OUT_DIR]

use planisphere::figures::plotting::SkyPicture;
use planisphere::tiles::sampling::{assemble, SamplingMethod, TileSampler};
use planisphere::tiles::tiling::{TilingPlan, TilingSettings};
use planisphere::{Direction, Footprint, Ordering, Pixelization, SkyMap};
use std::path::PathBuf;

fn main() -> planisphere::Result<()> {
    let out = PathBuf::from(std::env::args().nth(1).unwrap_or_else(|| ".".into()));
    let pix = Pixelization::new(128, Ordering::Ring)?;
    let map = SkyMap::from_fn(pix, |d: Direction| {
        (3.0 * d.theta).cos() + 0.5 * (4.0 * d.phi).sin() * d.theta.sin()
    });
    let mask = Footprint::from_fn(pix, |d| d.lat().abs() > 20f64.to_radians());
    let plan = TilingPlan::new(pix, &mask, &TilingSettings::healpix_pixels(4))?;
    let sampler = TileSampler::new(&plan, &map, &mask, SamplingMethod::Bilinear)?;
    let back = assemble(&plan, |i| Ok(sampler.sample(i)?.field))?;
    let diff: Vec<f64> = back
        .values()
        .iter()
        .zip(map.values())
        .map(|(b, m)| b - m)
        .collect();
    let worst = diff
        .iter()
        .filter(|v| v.is_finite())
        .fold(0.0f64, |a, v| a.max(v.abs()));
    let diff = SkyMap::new(pix, diff)?;
    let mut a = SkyPicture::new(1200, "Map sampled onto tiles and taken back to the sphere")
        .fill_map(&back, -1.5, 1.5);
    a.note(format!(
        "{} tiles, NSIDE 128, colour range −1.5 … 1.5",
        plan.len()
    ));
    a.write_png(&out.join("back_projection.png"))?;
    let mut b = SkyPicture::new(1200, "Back-projected minus input").fill_map(&diff, -worst, worst);
    b.note(format!(
        "largest |difference| {worst:.2e}; colour range ± that"
    ));
    b.write_png(&out.join("back_projection_difference.png"))?;
    println!("largest |back-projected − input| = {worst:.3e}");
    Ok(())
}
