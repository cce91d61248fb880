//! Time and peak memory to sample every tile of a NSIDE 1024 map over the mask |b| > 20°, for
//! coarse NSIDE 4 and 8 (or the ones given), with the tiling summary of each case.
//!
//! cargo run --release --example sampling_timing [COARSE_NSIDE ...]
//! Each case runs in its own child process so that its peak memory (VmHWM) is its own.

use planisphere::tiles::sampling::{SamplingMethod, TileSampler};
use planisphere::tiles::tiling::{TilingPlan, TilingSettings};
use planisphere::{Direction, Footprint, Ordering, Pixelization, SkyMap};
use std::time::Instant;

/// Peak resident memory of this process (VmHWM of /proc/self/status), in MiB.
fn peak_mib() -> f64 {
    std::fs::read_to_string("/proc/self/status")
        .ok()
        .and_then(|s| {
            s.lines().find(|l| l.starts_with("VmHWM:")).and_then(|l| {
                l.split_whitespace()
                    .nth(1)
                    .and_then(|v| v.parse::<f64>().ok())
            })
        })
        .map(|kib| kib / 1024.0)
        .unwrap_or(f64::NAN)
}

fn run_case(coarse: u32, method: SamplingMethod) -> planisphere::Result<()> {
    let nside = 1024;
    let pix = Pixelization::new(nside, Ordering::Ring)?;
    let t0 = Instant::now();
    let map = SkyMap::from_fn(pix, |d: Direction| {
        (3.0 * d.theta).cos() + (5.0 * d.phi).sin()
    });
    let mask = Footprint::from_fn(pix, |d| d.lat().abs() > 20f64.to_radians());
    let setup = t0.elapsed().as_secs_f64();
    let base = peak_mib();
    let t1 = Instant::now();
    let plan = TilingPlan::new(pix, &mask, &TilingSettings::healpix_pixels(coarse))?;
    let planning = t1.elapsed().as_secs_f64();
    let s = plan.summary(rayon::current_num_threads());
    let sampler = TileSampler::new(&plan, &map, &mask, method)?;
    let t2 = Instant::now();
    let sums = sampler.map_tiles(|g| {
        // Σ mask·Ω over the core's plane pixels: the tile's share of the footprint area.
        Ok(g.mask
            .iter()
            .zip(&g.solid_angle)
            .zip(&g.in_core)
            .map(|((m, w), &c)| if c { m * w } else { 0.0 })
            .sum::<f64>())
    })?;
    let sampling = t2.elapsed().as_secs_f64();
    let total: f64 = sums.iter().sum();
    let plane_pixels = (s.tiles * s.tile_pixels * s.tile_pixels) as f64;
    println!(
        "| {coarse:>2} | {method:?} | {} | {} × {} | {:.3}′ | {:.2}° | {:.4} | {:.4} | {:.1} / {:.1} | {:.3} s | {:.2} s | {:.0} ns | {:.0} MiB | {:.0} MiB | {:.2} MiB |",
        s.tiles,
        s.tile_pixels,
        s.tile_pixels,
        s.pixel_size_arcmin,
        s.tile_width_deg,
        s.grid_corner_distortion,
        s.worst_core_distortion,
        s.covered_footprint_area_sr * (180.0 / std::f64::consts::PI).powi(2),
        s.core_area_sr * (180.0 / std::f64::consts::PI).powi(2),
        planning,
        sampling,
        sampling / plane_pixels * 1e9 * rayon::current_num_threads() as f64,
        base,
        peak_mib(),
        s.bytes_per_tile as f64 / (1024.0 * 1024.0),
    );
    eprintln!(
        "(map and mask set-up {setup:.1} s; Σ mask·Ω over the cores' plane pixels = {total:.5} sr vs footprint {:.5} sr; {} threads)",
        s.footprint_area_sr,
        rayon::current_num_threads()
    );
    Ok(())
}

fn main() -> planisphere::Result<()> {
    let args: Vec<String> = std::env::args().skip(1).collect();
    if let Some(pos) = args.iter().position(|a| a == "--case") {
        let coarse: u32 = args[pos + 1].parse().unwrap_or(4);
        let method = match args.get(pos + 2).map(String::as_str) {
            Some("nearest") => SamplingMethod::Nearest,
            Some("ring") => SamplingMethod::RingLinear,
            _ => SamplingMethod::Bilinear,
        };
        return run_case(coarse, method);
    }
    let coarse: Vec<String> = if args.is_empty() {
        vec!["4".into(), "8".into()]
    } else {
        args
    };
    println!("NSIDE 1024, mask |b| > 20°, defaults (plane pixel = map spacing, halo 16, n auto)");
    println!("| coarse NSIDE | method | tiles | grid | pixel | tile width | corner sec²ρ | worst core sec²ρ | footprint / cores (deg²) | plan | sample all | per plane pixel (CPU) | VmHWM before | VmHWM after | grids per tile |");
    println!("|---|---|---|---|---|---|---|---|---|---|---|---|---|---|---|");
    let exe = std::env::current_exe().expect("own path");
    for c in coarse {
        for method in ["bilinear", "ring", "nearest"] {
            let status = std::process::Command::new(&exe)
                .args(["--case", &c, method])
                .status()
                .expect("child runs");
            if !status.success() {
                eprintln!("case coarse NSIDE {c} {method} failed");
            }
        }
    }
    Ok(())
}
