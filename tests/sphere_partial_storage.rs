//! A map read from its FITS file only on the blocks of 64 pixels its tiles read
//! (`BlockSkyMap`, `io::footprint_read`, `tiles::reach`), with the mask read by chunks into
//! the blocks holding a positive weight, is measured exactly as the whole map read into memory:
//! the same footprint, the same plan and the same statistics bit for bit, for every sampling
//! method, with and without a mask, and `planisphere measure` writes the same document byte
//! for byte (common practice: a view and a copy of the same numbers give the same result).
//! Reading fewer blocks than the tiles need is an error, not a quiet difference. The same holds
//! for NESTED files, whose blocks of 64 indices are cells of NSIDE/8 (Górski et al. 2005 §4).

mod sphere_support;

use clap::Parser;
use planisphere::cli::measure::MeasureArgs;
use planisphere::io::fits_io::{
    read_footprint, read_map, write_map, ColumnChoice, HealpixFitsReader, ValuePrecision,
    WriteOptions,
};
use planisphere::io::footprint_read::{
    blocks_of_ranges, empty_map, read_footprint_by_blocks, read_map_blocks,
};
use planisphere::measure::measurement::{MeasurementSettings, SphereMeasurer};
use planisphere::sky::apodization::{taper_footprint, TaperKind};
use planisphere::sky::block_map::BlockSkyMap;
use planisphere::sky::skymap::UNSEEN;
use planisphere::tiles::reach::{read_blocks, read_ranges};
use planisphere::tiles::sampling::SamplingMethod;
use planisphere::{Direction, Footprint, Ordering, Pixelization, SkyMap};
use sphere_support::bits;
use std::path::{Path, PathBuf};

const NSIDE: u32 = 128;

/// A map of long waves and hashed noise with a stripe of UNSEEN (5° of longitude) and a few
/// NaN pixels, and a mask of f_sky ≈ 0.3 (30° < latitude < 75°, two holes) with UNSEEN and NaN
/// among its unobserved pixels, stored as float32; both RING, full sky.
fn write_inputs(dir: &Path) -> (PathBuf, PathBuf) {
    write_inputs_in(dir, Ordering::Ring)
}

/// [`write_inputs`] with both files in `ordering` (the same values, reordered).
fn write_inputs_in(dir: &Path, ordering: Ordering) -> (PathBuf, PathBuf) {
    let pix = Pixelization::new(NSIDE, Ordering::Ring).unwrap();
    let map = SkyMap::from_fn(pix, |d| {
        let lon = d.lon().to_degrees();
        let p = pix.pixel_of(d);
        if (100.0..105.0).contains(&lon) {
            UNSEEN
        } else if p % 1013 == 7 {
            f64::NAN
        } else {
            let noise = ((p.wrapping_mul(2654435761) % 1000) as f64 / 1000.0 - 0.5) * 0.3;
            (3.0 * d.theta).sin() * (4.0 * d.phi).cos() + 0.5 * (9.0 * d.theta).cos() + noise
        }
    });
    let holes = [
        (Direction::from_lonlat_deg(40.0, 50.0), 4f64.to_radians()),
        (Direction::from_lonlat_deg(250.0, 40.0), 6f64.to_radians()),
    ];
    let weights: Vec<f64> = (0..pix.npix())
        .map(|p| {
            let d = pix.center(p);
            let lat = d.lat().to_degrees();
            if lat > 30.0 && lat < 75.0 && !holes.iter().any(|(h, r)| d.distance(h) < *r) {
                1.0
            } else if lat < -50.0 {
                UNSEEN
            } else if p % 89 == 0 {
                f64::NAN
            } else {
                0.0
            }
        })
        .collect();
    let mask = SkyMap::new(pix, weights).unwrap();
    let (map, mask) = (
        map.to_ordering(ordering).unwrap(),
        mask.to_ordering(ordering).unwrap(),
    );
    let map_path = dir.join(format!("map_{}.fits", ordering.fits_name()));
    let mask_path = dir.join(format!("mask_{}.fits", ordering.fits_name()));
    write_map(&map_path, "VALUE", &map, &WriteOptions::default()).unwrap();
    let float32 = WriteOptions {
        precision: ValuePrecision::Float32,
        ..Default::default()
    };
    write_map(&mask_path, "MASK", &mask, &float32).unwrap();
    (map_path, mask_path)
}

/// The inputs of [`write_inputs_in`] read both ways: whole (map, mask and the tapered
/// footprint) and by blocks (the mask by blocks, the map on the mask's blocks and its reader for
/// the tiles' halos).
struct Both {
    map: SkyMap,
    mask: Footprint,
    whole_fp: Footprint,
    map_reader: HealpixFitsReader,
    mask_blocks: Footprint,
    held: BlockSkyMap,
    column: ColumnChoice,
}

fn read_both_ways(dir: &Path, ordering: Ordering) -> Both {
    let (map_path, mask_path) = write_inputs_in(dir, ordering);
    let column = ColumnChoice::default();
    // the whole map and mask in memory
    let (map, _) = read_map(&map_path, &column).unwrap();
    let (mask, _) = read_footprint(&mask_path, &column).unwrap();
    let whole_fp =
        taper_footprint(mask.restricted_to(&map).unwrap(), TaperKind::C2, 120.0).unwrap();
    // the mask by blocks, the map on the mask's blocks
    let mut map_reader = HealpixFitsReader::open(&map_path).unwrap();
    let mut mask_reader = HealpixFitsReader::open(&mask_path).unwrap();
    let mask_blocks = read_footprint_by_blocks(&mut mask_reader, &column).unwrap();
    let mut held = empty_map(map_reader.header()).unwrap();
    read_map_blocks(
        &mut map_reader,
        &column,
        &mut held,
        mask_blocks.weighted_blocks(),
    )
    .unwrap();
    Both {
        map,
        mask,
        whole_fp,
        map_reader,
        mask_blocks,
        held,
        column,
    }
}

/// The five sampling methods.
const EVERY_SAMPLING: [SamplingMethod; 5] = [
    SamplingMethod::RingQuintic,
    SamplingMethod::RingCubic,
    SamplingMethod::Bilinear,
    SamplingMethod::RingLinear,
    SamplingMethod::Nearest,
];

/// Settings with J = 3 for each of `methods`: the default tile pixel with the default
/// (quintic) sampling, which also measures the bispectrum, and the map's spacing with the
/// others.
fn settings_per_sampling(map: &SkyMap, methods: &[SamplingMethod]) -> Vec<MeasurementSettings> {
    let spacing = map.pixelization().mean_spacing().to_degrees() * 60.0;
    methods
        .iter()
        .map(|&sampling| {
            let quintic = sampling == SamplingMethod::RingQuintic;
            MeasurementSettings {
                scales: 3,
                sampling,
                pixel_arcmin: (!quintic).then_some(spacing),
                bispectrum: quintic,
                ..Default::default()
            }
        })
        .collect()
}

#[test]
fn a_map_held_by_blocks_measures_bit_for_bit_as_the_whole_map() {
    let dir = tempfile::tempdir().unwrap();
    let Both {
        map,
        mask,
        whole_fp,
        mut map_reader,
        mask_blocks,
        mut held,
        column,
    } = read_both_ways(dir.path(), Ordering::Ring);
    assert!(mask_blocks.is_held_by_blocks());
    let npix = map.pixelization().npix() as usize;
    // the blocks of ones inside the binary mask are held without storage: fewer values than
    // the mask's observed pixels
    assert!(
        (mask_blocks.stored_weights() as u64) < mask.observed_pixels(),
        "{} values held for {} observed pixels",
        mask_blocks.stored_weights(),
        mask.observed_pixels()
    );
    assert_eq!(bits(mask_blocks.weights()), bits(mask.weights()));
    let raw = held.restrict(mask_blocks).unwrap();
    let fp = taper_footprint(raw, TaperKind::C2, 120.0).unwrap();
    assert_eq!(bits(fp.weights()), bits(whole_fp.weights()));
    let mut first = true;
    for settings in settings_per_sampling(&map, &EVERY_SAMPLING) {
        let sampling = settings.sampling;
        let whole = SphereMeasurer::new(map.pixelization(), &whole_fp, settings).unwrap();
        let measurer = SphereMeasurer::new(held.pixelization(), &fp, settings).unwrap();
        let centres = |m: &SphereMeasurer| {
            m.plan()
                .tiles()
                .iter()
                .flat_map(|t| [t.center.theta.to_bits(), t.center.phi.to_bits()])
                .collect::<Vec<_>>()
        };
        assert_eq!(centres(&whole), centres(&measurer), "{sampling:?}: plans");
        if first {
            // the footprint's blocks alone miss the tiles' halos: an error, not a difference
            let err = measurer.measure_blocks(&held, &fp).unwrap_err().to_string();
            assert!(err.contains("whose block was not read"), "{err}");
            first = false;
        }
        let ranges = read_ranges(measurer.plan()).unwrap();
        read_map_blocks(
            &mut map_reader,
            &column,
            &mut held,
            blocks_of_ranges(&ranges),
        )
        .unwrap();
        let a = whole.measure(&map, &whole_fp).unwrap();
        let b = measurer.measure_blocks(&held, &fp).unwrap();
        assert_eq!(bits(&a.vector()), bits(&b.vector()), "{sampling:?}");
        assert_eq!(a.tiles, b.tiles, "{sampling:?}");
    }
    // footprint and halos, not the whole sky
    assert!(
        held.stored_values() < npix * 3 / 4,
        "{} of {npix}",
        held.stored_values()
    );
}

/// `planisphere measure` arguments.
#[derive(Parser)]
struct Measure {
    #[command(flatten)]
    args: MeasureArgs,
}

/// The document `planisphere measure MAP EXTRA… -J 3 -o OUT` writes, reading the map whole
/// (`whole`) or only where its tiles read it.
fn measure_document(map_path: &Path, extra: &[&str], out: &Path, whole: bool) -> Vec<u8> {
    let mut argv: Vec<String> = vec!["measure".into(), map_path.display().to_string()];
    argv.extend(extra.iter().map(|s| s.to_string()));
    argv.extend([
        "-J".into(),
        "3".into(),
        "-o".into(),
        out.display().to_string(),
    ]);
    let m = Measure::try_parse_from(&argv).unwrap();
    if whole {
        planisphere::cli::measure::run_reading_whole_map(&m.args).unwrap();
    } else {
        planisphere::cli::measure::run(&m.args).unwrap();
    }
    std::fs::read(out).unwrap()
}

#[test]
fn measure_writes_the_same_document_reading_by_blocks_and_whole() {
    let dir = tempfile::tempdir().unwrap();
    let (map_path, mask_path) = write_inputs(dir.path());
    let run = |extra: &[&str], whole: bool| -> Vec<u8> {
        let out = dir
            .path()
            .join(format!("out_{}_{}.json", whole, extra.len()));
        measure_document(&map_path, extra, &out, whole)
    };
    let mask = mask_path.display().to_string();
    for extra in [
        vec!["--mask", mask.as_str()],
        vec![
            "--mask",
            mask.as_str(),
            "--taper",
            "gaussian",
            "--taper-arcmin",
            "90",
        ],
        // without a mask the footprint is the map's valid pixels: all but the stripe
        vec![],
    ] {
        let a = run(&extra, true);
        let b = run(&extra, false);
        assert!(!a.is_empty());
        assert!(a == b, "{extra:?}: the documents differ");
    }
}

#[test]
fn a_nested_map_held_by_blocks_measures_bit_for_bit_as_the_whole_map() {
    let dir = tempfile::tempdir().unwrap();
    let Both {
        map,
        whole_fp,
        mut map_reader,
        mask_blocks,
        mut held,
        column,
        ..
    } = read_both_ways(dir.path(), Ordering::Nested);
    assert_eq!(map.ordering(), Ordering::Nested);
    let fp = taper_footprint(held.restrict(mask_blocks).unwrap(), TaperKind::C2, 120.0).unwrap();
    assert_eq!(bits(fp.weights()), bits(whole_fp.weights()));
    let methods = [
        SamplingMethod::RingQuintic,
        SamplingMethod::Bilinear,
        SamplingMethod::Nearest,
    ];
    for settings in settings_per_sampling(&map, &methods) {
        let sampling = settings.sampling;
        let whole = SphereMeasurer::new(map.pixelization(), &whole_fp, settings).unwrap();
        let measurer = SphereMeasurer::new(held.pixelization(), &fp, settings).unwrap();
        // RING ranges are refused for a NESTED plan; the blocks are listed in NESTED indices
        assert!(read_ranges(measurer.plan()).is_err());
        let blocks = read_blocks(measurer.plan()).unwrap();
        assert!(blocks.windows(2).all(|w| w[0] < w[1]), "{sampling:?}");
        read_map_blocks(&mut map_reader, &column, &mut held, blocks).unwrap();
        let a = whole.measure(&map, &whole_fp).unwrap();
        let b = measurer.measure_blocks(&held, &fp).unwrap();
        assert_eq!(bits(&a.vector()), bits(&b.vector()), "{sampling:?}");
        assert_eq!(a.tiles, b.tiles, "{sampling:?}");
    }
    let npix = map.pixelization().npix() as usize;
    assert!(
        held.stored_values() < npix * 3 / 4,
        "{} of {npix}",
        held.stored_values()
    );
}

#[test]
fn measure_writes_the_same_document_for_a_nested_map_by_blocks_and_whole() {
    let dir = tempfile::tempdir().unwrap();
    let (map_path, mask_path) = write_inputs_in(dir.path(), Ordering::Nested);
    let mask = mask_path.display().to_string();
    let run = |whole: bool| -> Vec<u8> {
        let out = dir.path().join(format!("out_nested_{whole}.json"));
        measure_document(&map_path, &["--mask", &mask], &out, whole)
    };
    let a = run(true);
    assert!(!a.is_empty());
    assert!(a == run(false), "the documents differ");
}
