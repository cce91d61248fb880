//! Transfer of power by sampling a HEALPix map onto tangent-plane tiles, per wavelength and
//! direction, for tile pixel sizes of 1, ½ and ¼ of the map's mean spacing, near the equator and
//! at high latitude. Prints a table.
//!
//! cargo run --release --example sampling_transfer [NSIDE]

use planisphere::tiles::sampling::{plane_wave_transfer, SamplingMethod};
use planisphere::{Direction, Ordering, Pixelization};

fn main() -> planisphere::Result<()> {
    let nside: u32 = std::env::args()
        .nth(1)
        .and_then(|s| s.parse().ok())
        .unwrap_or(256);
    let map = Pixelization::new(nside, Ordering::Ring)?;
    let h = map.mean_spacing();
    let wavelengths = [2.0, 3.0, 4.0, 6.0, 8.0, 12.0, 16.0, 24.0, 32.0];
    let angles = [0.0, 45.0, 90.0, 135.0];
    println!(
        "NSIDE {nside}, mean spacing h = {:.3} arcmin; power transfer |G|^2 (scattered power in brackets)",
        h.to_degrees() * 60.0
    );
    for method in [
        SamplingMethod::Bilinear,
        SamplingMethod::RingLinear,
        SamplingMethod::Nearest,
    ] {
        for (place, lon, lat) in [("equator", 45.3, 0.4), ("latitude 60", 10.2, 60.3)] {
            for fraction in [1.0, 0.5, 0.25] {
                let pixel = fraction * h;
                // About 64 map spacings across, whatever the plane pixel size.
                let n = ((64.0 / fraction) as usize).min(256);
                println!("\n{method:?}, {place}, plane pixel = {fraction} h, n = {n}");
                print!("{:>8}", "λ/h");
                for a in angles {
                    print!("{:>18}", format!("{a}°"));
                }
                println!();
                for lambda in wavelengths {
                    if lambda * h < 2.0 * pixel {
                        continue;
                    }
                    print!("{lambda:>8}");
                    for a in angles {
                        let t = plane_wave_transfer(
                            map,
                            Direction::from_lonlat_deg(lon, lat),
                            n,
                            pixel,
                            lambda * h,
                            f64::to_radians(a),
                            method,
                        )?;
                        print!("{:>18}", format!("{:.4} ({:.4})", t.power, t.scattered));
                    }
                    println!();
                }
            }
        }
    }
    Ok(())
}
