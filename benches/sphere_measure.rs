//! Sphere measurement at NSIDE 1024 on the mock survey footprint (scenario::MockFootprint,
//! C2-apodized over 1°), J = 6, L = 4, 128-pixel tiles: one tile (sampling + taper + scattering
//! transform) and a whole measurement of a small patch of the footprint (a 6° cap of it).
//! The full-footprint timing table is `examples/sphere_measure_timing.rs`.

use criterion::{criterion_group, criterion_main, Criterion};
use planisphere::harmonics::spectrum::AngularSpectrum;
use planisphere::measure::measurement::{border_window, MeasurementSettings, SphereMeasurer};
use planisphere::scattering::transform::TileView;
use planisphere::simulate::scenario::MockFootprint;
use planisphere::simulate::skies::SkyRecipe;
use planisphere::sky::apodization::{apodize, TaperKind};
use planisphere::tiles::sampling::TileSampler;
use planisphere::{Direction, Footprint, Ordering, Pixelization};
use std::hint::black_box;

fn sphere(c: &mut Criterion) {
    let nside = 1024;
    let pix = Pixelization::new(nside, Ordering::Ring).expect("valid NSIDE");
    let mock = MockFootprint::default().build(pix);
    let centre = Direction::from_lonlat_deg(40.0, 50.0);
    let patch: Vec<f64> = (0..pix.npix())
        .map(|p| {
            if pix.center(p).distance(&centre) < 6f64.to_radians() {
                mock.weight(p)
            } else {
                0.0
            }
        })
        .collect();
    let patch = Footprint::from_weights(pix, patch).expect("patch");
    let footprint = apodize(&patch, TaperKind::C2, 1f64.to_radians()).expect("apodization");
    let recipe = SkyRecipe::gaussian(
        nside,
        AngularSpectrum::demo_model(3 * nside as usize - 1, 1.0),
        1,
    );
    let map = recipe
        .realise(&recipe.transform().expect("transform"), 0)
        .expect("sky");
    let settings = MeasurementSettings {
        scales: 6,
        orientations: 4,
        tile_pixels: Some(128),
        ..Default::default()
    };
    let measurer = SphereMeasurer::new(pix, &footprint, settings).expect("measurer");
    let sampler =
        TileSampler::new(measurer.plan(), &map, &footprint, settings.sampling).expect("sampler");
    let window = border_window(128, settings.border_pixels);
    let tile = measurer.plan().len() / 2;
    let mut group = c.benchmark_group("sphere_nside1024_J6_L4_128px");
    group.sample_size(10);
    group.bench_function("one_tile_sample_and_transform", |b| {
        b.iter(|| {
            let grids = sampler.sample(tile).expect("tile");
            let taper: Vec<f64> = grids
                .mask
                .iter()
                .zip(&window)
                .map(|(m, w)| m.clamp(0.0, 1.0) * w)
                .collect();
            let weight = grids.pooling_weights(&taper).expect("weights");
            black_box(
                measurer
                    .engine()
                    .transform_tile(&TileView {
                        field: &grids.field,
                        taper: &taper,
                        weight: &weight,
                    })
                    .expect("transform"),
            )
        })
    });
    group.bench_function(
        format!("measure_6deg_patch_{}_tiles", measurer.plan().len()),
        |b| b.iter(|| black_box(measurer.measure(&map, &footprint).expect("measure"))),
    );
    group.finish();
}

criterion_group!(benches, sphere);
criterion_main!(benches);
