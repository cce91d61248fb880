//! `SphereMeasurer::measure` on a small footprint, reported per footprint pixel: NSIDE 128,
//! a 20° cap at (l, b) = (60°, 45°) less four 2° holes, C2-apodized over 1°; J = 4, L = 4,
//! tiles of the size the tool chooses at the map spacing (27.5′), ring-cubic sampling, no bispectrum; a Gaussian sky
//! of the built-in demo spectrum.
//!
//! The throughput is set to the number of footprint pixels, so criterion's "elem/s" is footprint
//! pixels per second and the time per iteration divided by that count (printed once at start)
//! is the cost per footprint pixel that `examples/measure_speed_limit.rs` reports for whole
//! surveys. Run: `cargo bench --bench measure_per_pixel`.

use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use planisphere::harmonics::spectrum::AngularSpectrum;
use planisphere::measure::measurement::{MeasurementSettings, SphereMeasurer};
use planisphere::simulate::skies::SkyRecipe;
use planisphere::sky::apodization::{apodize, TaperKind};
use planisphere::{Direction, Footprint, Ordering, Pixelization};
use std::hint::black_box;

fn measure_per_pixel(c: &mut Criterion) {
    let nside = 128;
    let pix = Pixelization::new(nside, Ordering::Ring).expect("valid NSIDE");
    let centre = Direction::from_lonlat_deg(60.0, 45.0);
    let holes = [
        Direction::from_lonlat_deg(55.0, 40.0),
        Direction::from_lonlat_deg(68.0, 50.0),
        Direction::from_lonlat_deg(62.0, 33.0),
        Direction::from_lonlat_deg(48.0, 52.0),
    ];
    let cap = Footprint::from_fn(pix, |d| {
        d.distance(&centre) < 20f64.to_radians()
            && holes.iter().all(|h| d.distance(h) > 2f64.to_radians())
    });
    let footprint = apodize(&cap, TaperKind::C2, 1f64.to_radians()).expect("apodization");
    let footprint_pixels = cap.observed_pixels();
    let recipe = SkyRecipe::gaussian(
        nside,
        AngularSpectrum::demo_model(3 * nside as usize - 1, 4e-4),
        5,
    );
    let map = recipe
        .realise(&recipe.transform().expect("transform"), 0)
        .expect("sky");
    let settings = MeasurementSettings {
        scales: 4,
        orientations: 4,
        tile_pixels: None,
        bispectrum: false,
        ..Default::default()
    };
    let measurer = SphereMeasurer::new(pix, &footprint, settings).expect("measurer");
    let tiles = measurer.plan().len();
    let n = measurer.plan().tile_pixels();
    println!(
        "measure_per_pixel: {footprint_pixels} footprint pixels, {tiles} tiles of {n}², {:.1} tile pixels per footprint pixel",
        (tiles * n * n) as f64 / footprint_pixels as f64
    );
    let mut group = c.benchmark_group("measure_nside128_cap20deg_J4_L4");
    group.sample_size(10);
    group.throughput(Throughput::Elements(footprint_pixels));
    group.bench_function(
        format!("per_footprint_pixel_{footprint_pixels}px_{tiles}tiles"),
        |b| b.iter(|| black_box(measurer.measure(&map, &footprint).expect("measure"))),
    );
    group.finish();
}

criterion_group!(benches, measure_per_pixel);
criterion_main!(benches);
