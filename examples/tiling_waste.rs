//! How much each tiling transforms per footprint pixel: for the survey mask of the speed
//! benchmark (`examples/measure_speed_limit.rs`: galactic latitude |b| > 20° less 40 circular
//! holes of 0.5–2.5°, within −70° < δ < +10°, f_sky ≈ 0.37; our own scenario) it prints, per
//! NSIDE, J and cell layout, the tiles, the tile size chosen and the tile pixels sampled and
//! transformed per footprint pixel.
//!
//!     cargo run --release --example tiling_waste [NSIDE ...]

use planisphere::measure::measurement::MeasurementSettings;
use planisphere::simulate::scenario::benchmark_survey_mask;
use planisphere::{Footprint, Pixelization};

/// The footprint of the example and of the speed benchmark (the map in galactic coordinates).
fn survey_footprint(nside: u32) -> Footprint {
    let pix = Pixelization::new(nside, planisphere::Ordering::Ring).expect("valid NSIDE");
    benchmark_survey_mask(pix).expect("one pixelization")
}

fn main() {
    let nsides: Vec<u32> = std::env::args()
        .skip(1)
        .filter_map(|a| a.parse().ok())
        .collect();
    let nsides = if nsides.is_empty() {
        vec![1024]
    } else {
        nsides
    };
    println!(
        "| NSIDE | f_sky | J | cells | tiles | n | tile ° | tile px per footprint px | tile area / footprint area |"
    );
    println!("|---|---|---|---|---|---|---|---|---|");
    for nside in nsides {
        let fp = survey_footprint(nside);
        let pix = fp.pixelization();
        for scales in [4usize, 5, 6] {
            for coarse in [None, Some("old")] {
                let mut s = MeasurementSettings {
                    scales,
                    ..MeasurementSettings::default()
                };
                let label = if coarse.is_some() {
                    // the former default: coarse HEALPix pixels, the coarsest that fits, 2^(J+1)…
                    s.tile_pixels = Some(if scales >= 5 { 128 } else { 64 });
                    let mut found = None;
                    let mut c = 4;
                    while c <= nside && found.is_none() {
                        s.coarse_nside = Some(c);
                        found = s.plan(pix, &fp).ok();
                        c *= 2;
                    }
                    found.map(|p| (p, "HEALPix pixels"))
                } else {
                    s.plan(pix, &fp).ok().map(|p| (p, "latitude bands"))
                };
                let Some((plan, name)) = label else {
                    println!("| {nside} | | {scales} | no plan | | | | | |");
                    continue;
                };
                let sm = plan.summary(1);
                println!(
                    "| {nside} | {:.3} | {scales} | {name}{} | {} | {} | {:.1} | {:.3} | {:.3} |",
                    fp.f_sky(),
                    sm.coarse_nside.map(|c| format!(" {c}")).unwrap_or_default(),
                    sm.tiles,
                    sm.tile_pixels,
                    sm.tile_width_deg,
                    sm.tile_pixels_per_footprint_pixel,
                    sm.tile_area_per_footprint_area
                );
            }
        }
    }
}
