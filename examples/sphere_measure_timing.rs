//! Timing of a full sphere measurement: NSIDE 1024 Gaussian sky on the mock survey footprint
//! (scenario::MockFootprint: |b| > 20° with 60 star holes, C2-apodized over 1°), J = 6, L = 4,
//! 128-pixel tiles. Prints the plan, a profiled pass (sampling, transform and FFT time per
//! tile, summed over tiles) and the wall time of `SphereMeasurer::measure` on 1 and 2 threads,
//! with the peak resident memory (VmHWM of /proc/self/status).
//!
//! By default only the part of the footprint in the longitude wedge 0° ≤ φ < 60° is measured
//! (about a sixth of it), so that the three passes run in a few minutes; per-tile figures do not
//! depend on the wedge, and the whole footprint's wall time scales with its tile count
//! (printed). A span of 360 measures all of it.
//!
//! cargo run --release --example sphere_measure_timing [NSIDE] [LONGITUDE SPAN°]

use planisphere::harmonics::spectrum::AngularSpectrum;
use planisphere::measure::measurement::{border_window, MeasurementSettings, SphereMeasurer};
use planisphere::scattering::transform::TileView;
use planisphere::simulate::scenario::MockFootprint;
use planisphere::simulate::skies::SkyRecipe;
use planisphere::sky::apodization::{apodize, TaperKind};
use planisphere::tiles::sampling::TileSampler;
use planisphere::{Ordering, Pixelization};
use std::time::{Duration, Instant};

/// Peak resident set size in MiB (VmHWM of /proc/self/status; Linux only).
fn peak_mib() -> Option<f64> {
    let status = std::fs::read_to_string("/proc/self/status").ok()?;
    let line = status.lines().find(|l| l.starts_with("VmHWM:"))?;
    let kb: f64 = line.split_whitespace().nth(1)?.parse().ok()?;
    Some(kb / 1024.0)
}

fn mib(v: Option<f64>) -> String {
    v.map(|m| format!("{m:.0} MiB"))
        .unwrap_or_else(|| "n/a".into())
}

fn main() -> planisphere::Result<()> {
    let nside: u32 = std::env::args()
        .nth(1)
        .and_then(|s| s.parse().ok())
        .unwrap_or(1024);
    let span: f64 = std::env::args()
        .nth(2)
        .and_then(|s| s.parse().ok())
        .unwrap_or(60.0);
    let pix = Pixelization::new(nside, Ordering::Ring)?;
    let t = Instant::now();
    let mock = MockFootprint::default().build(pix);
    let whole_tiles = {
        let m = SphereMeasurer::new(
            pix,
            &mock,
            MeasurementSettings {
                scales: 6,
                tile_pixels: Some(128),
                ..Default::default()
            },
        )?;
        m.plan().len()
    };
    let wedge: Vec<f64> = (0..pix.npix())
        .map(|p| {
            let lon = pix.center(p).lon().to_degrees().rem_euclid(360.0);
            if lon < span {
                mock.weight(p)
            } else {
                0.0
            }
        })
        .collect();
    let binary = planisphere::Footprint::from_weights(pix, wedge)?;
    let footprint = apodize(&binary, TaperKind::C2, 1f64.to_radians())?;
    let t_footprint = t.elapsed();
    let t = Instant::now();
    let recipe = SkyRecipe::gaussian(
        nside,
        AngularSpectrum::demo_model(3 * nside as usize - 1, 1.0),
        1,
    );
    let map = recipe.realise(&recipe.transform()?, 0)?;
    let t_sky = t.elapsed();
    println!(
        "NSIDE {nside}: mock footprint f_sky {:.3} ({whole_tiles} tiles); measured part: longitudes [0°, {span}°), f_sky {:.3} (build + apodize {:.1} s); Gaussian sky {:.1} s; peak memory so far {}",
        mock.f_sky(),
        footprint.f_sky(),
        t_footprint.as_secs_f64(),
        t_sky.as_secs_f64(),
        mib(peak_mib())
    );
    let settings = MeasurementSettings {
        scales: 6,
        orientations: 4,
        tile_pixels: Some(128),
        ..Default::default()
    };
    let t = Instant::now();
    let measurer = SphereMeasurer::new(pix, &footprint, settings)?;
    let t_plan = t.elapsed();
    let s = measurer.summary();
    println!(
        "plan {:.2} s: {}, {} tiles of {} px ({:.2} arcmin, {:.2}° across), halo {} px (border {} + scale margin {}), sampling {:?}",
        t_plan.as_secs_f64(),
        s.cells,
        s.tiles,
        s.tile_pixels,
        s.pixel_size_arcmin,
        s.tile_width_deg,
        s.halo_pixels,
        settings.border_pixels,
        s.halo_pixels - settings.border_pixels,
        settings.sampling
    );

    // Profiled pass: the per-tile pipeline of `measure` (sampling, taper, scattering transform),
    // with the transform's FFT calls timed; tile spectra are left out of this pass.
    let window = border_window(128, settings.border_pixels);
    let sampler = TileSampler::new(measurer.plan(), &map, &footprint, settings.sampling)?;
    let t = Instant::now();
    let sampled: usize = sampler.map_tiles(|g| Ok(g.field.len()))?.iter().sum();
    let t_sampling_only = t.elapsed();
    let t = Instant::now();
    let profiled = {
        use rayon::prelude::*;
        (0..measurer.plan().len())
            .into_par_iter()
            .map(
                |i| -> planisphere::Result<(Duration, Duration, Duration, usize)> {
                    let t0 = Instant::now();
                    let grids = sampler.sample(i)?;
                    let t_sample = t0.elapsed();
                    let taper: Vec<f64> = grids
                        .mask
                        .iter()
                        .zip(&window)
                        .map(|(m, b)| m.clamp(0.0, 1.0) * b)
                        .collect();
                    let weight = grids.pooling_weights(&taper)?;
                    let t1 = Instant::now();
                    let (_, fft) = measurer.engine().transform_tile_timed(&TileView {
                        field: &grids.field,
                        taper: &taper,
                        weight: &weight,
                    })?;
                    Ok((t_sample, t1.elapsed(), fft.fft_time, fft.fft_count))
                },
            )
            .collect::<planisphere::Result<Vec<_>>>()?
    };
    let t_profiled = t.elapsed();
    let tiles = profiled.len() as f64;
    /// Per tile: sampling time, transform time, time inside FFTs, FFT count.
    type TileTiming = (Duration, Duration, Duration, usize);
    let sum = |f: &dyn Fn(&TileTiming) -> Duration| {
        profiled.iter().map(f).sum::<Duration>().as_secs_f64()
    };
    let (sample_s, transform_s, fft_s) = (sum(&|p| p.0), sum(&|p| p.1), sum(&|p| p.2));
    let ffts = profiled.iter().map(|p| p.3).sum::<usize>() as f64 / tiles;
    println!(
        "\nprofiled pass ({} threads, wall {:.1} s; a sampling-only pass of {sampled} plane pixels took {:.1} s wall):",
        rayon::current_num_threads(),
        t_profiled.as_secs_f64(),
        t_sampling_only.as_secs_f64()
    );
    println!(
        "{:<34} {:>12} {:>14}",
        "stage", "summed (s)", "per tile (ms)"
    );
    for (name, v) in [
        ("sampling (interpolation, core)", sample_s),
        ("scattering transform", transform_s),
        ("  of which inside FFT calls", fft_s),
    ] {
        println!("{name:<34} {v:>12.2} {:>14.2}", 1e3 * v / tiles);
    }
    println!(
        "FFT share of the transform {:.0}%, of sampling + transform {:.0}%; {ffts:.0} FFTs per tile",
        100.0 * fft_s / transform_s,
        100.0 * fft_s / (transform_s + sample_s)
    );

    println!("\nfull measurement (scattering + tile power spectrum + bispectrum):");
    println!(
        "{:>8} {:>10} {:>15} {:>10} {:>12}",
        "threads", "wall (s)", "per tile (ms)", "speed-up", "peak memory"
    );
    let mut single = None;
    for threads in [1usize, 2] {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .map_err(|e| planisphere::Error::Setting(format!("thread pool: {e}")))?;
        let t = Instant::now();
        let stats = pool.install(|| measurer.measure(&map, &footprint))?;
        let wall = t.elapsed().as_secs_f64();
        let base = *single.get_or_insert(wall);
        println!(
            "{threads:>8} {wall:>10.1} {:>15.2} {:>10.2} {:>12}",
            1e3 * wall / stats.tiles as f64,
            base / wall,
            mib(peak_mib())
        );
    }
    Ok(())
}
