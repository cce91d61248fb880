//! How much each tiling transforms per footprint pixel: for a survey-like footprint (a tilted
//! galactic-plane cut of ±20°, declinations from −65° to +15° and 40 circular holes of 0.5–2.5°,
//! f_sky ≈ 0.37; our own scenario) it prints, per NSIDE, J and cell layout, the tiles, the tile
//! size chosen and the tile pixels sampled and transformed per footprint pixel.
//!
//!     cargo run --release --example tiling_waste [NSIDE ...]

use planisphere::measurement::MeasurementSettings;
use planisphere::{Direction, Footprint, Ordering, Pixelization};
use rand::{Rng, SeedableRng};

/// The footprint of the example (and of the speed benchmarks).
fn survey_footprint(nside: u32) -> Footprint {
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(11);
    let holes: Vec<([f64; 3], f64)> = (0..40)
        .map(|_| {
            let z: f64 = rng.gen_range(-1.0..1.0);
            let phi: f64 = rng.gen_range(0.0..std::f64::consts::TAU);
            let r: f64 = rng.gen_range(0.5..2.5);
            (
                Direction::new(z.acos(), phi).to_vector(),
                r.to_radians().cos(),
            )
        })
        .collect();
    // a plane tilted by 62.9° about the x axis stands in for the galactic plane
    let tilt = 62.9f64.to_radians();
    let pole = [0.0, -tilt.sin(), tilt.cos()];
    let pix = Pixelization::new(nside, Ordering::Ring).expect("valid NSIDE");
    Footprint::from_fn(pix, |d| {
        let v = d.to_vector();
        let b = (v[0] * pole[0] + v[1] * pole[1] + v[2] * pole[2]).asin();
        let dec = d.lat().to_degrees();
        b.abs() > 20f64.to_radians()
            && (-65.0..15.0).contains(&dec)
            && !holes
                .iter()
                .any(|(h, c)| v[0] * h[0] + v[1] * h[1] + v[2] * h[2] > *c)
    })
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
                    "| {nside} | {:.3} | {scales} | {name}{} | {} | {} | {:.1} | {:.2} | {:.2} |",
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
