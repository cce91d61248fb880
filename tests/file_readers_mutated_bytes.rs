//! The readers of user files never panic: a small valid HEALPix FITS map, a measurement
//! settings TOML file and a simulation recipe, with random bytes changed, inserted or cut off,
//! are read to `Ok` or to an `Err` with a one-line message. A bounded property run (200 cases
//! per reader, fixed seed, no failure files), so it is repeatable and takes seconds.
//! (The property is the program's own rule for bad input: an error, never a panic.)

use planisphere::cli::ensemble::RecipeFile;
use planisphere::cli::measure::MeasureOptions;
use planisphere::io::fits_io::{read_map, write_map, ColumnChoice, WriteOptions};
use planisphere::{Ordering, Pixelization, SkyMap};
use proptest::prelude::*;
use proptest::test_runner::{Config, RngSeed, TestRunner};
use std::path::Path;

const SETTINGS: &str = "scales = 3\norientations = 4\ntile_pixels = 32\nborder_pixels = 4\nsampling = \"nearest\"\nspectrum_bins = 8\nbispectrum = false\n";
const RECIPE: &str = "nside = 16\ncount = 4\nseed = 7\nlmax = 40\nlognormal_shift = 0.02\nbeam_arcmin = 30.0\nnoise_sigma = 0.001\n";

fn runner(seed: u64) -> TestRunner {
    TestRunner::new(Config {
        cases: 200,
        rng_seed: RngSeed::Fixed(seed),
        failure_persistence: None,
        ..Config::default()
    })
}

/// An edit of a byte string: (position as a fraction of the length, new bytes, bytes cut at
/// the end).
fn edits() -> impl Strategy<Value = (Vec<(f64, Vec<u8>)>, usize)> {
    let byte = prop_oneof![
        any::<u8>(),
        // characters that mean something in FITS cards and TOML
        prop::sample::select(b" =/'\"-+.0123456789EeTFNAXIS[]#\n\t".to_vec()),
    ];
    (
        prop::collection::vec((0.0..1.0f64, prop::collection::vec(byte, 0..4)), 1..12),
        prop_oneof![3 => Just(0usize), 1 => 0usize..4000],
    )
}

/// Applies the edits: at each position the bytes overwrite (or, if empty, delete one byte).
fn mutate(original: &[u8], (edits, cut): &(Vec<(f64, Vec<u8>)>, usize)) -> Vec<u8> {
    let mut b = original.to_vec();
    for (at, bytes) in edits {
        if b.is_empty() {
            break;
        }
        let i = ((*at * b.len() as f64) as usize).min(b.len() - 1);
        if bytes.is_empty() {
            b.remove(i);
        } else {
            for (k, &x) in bytes.iter().enumerate() {
                if i + k < b.len() {
                    b[i + k] = x;
                }
            }
        }
    }
    let keep = b.len().saturating_sub(*cut);
    b.truncate(keep);
    b
}

fn one_line(e: &planisphere::Error) -> Result<(), TestCaseError> {
    let text = e.to_string();
    prop_assert!(
        !text.trim_end().contains('\n'),
        "error of more than one line: {text}"
    );
    Ok(())
}

#[test]
fn fits_map_reader_never_panics_on_mutated_files() {
    let tmp = tempfile::tempdir().unwrap();
    let good = tmp.path().join("good.fits");
    let pix = Pixelization::new(4, Ordering::Nested).unwrap();
    let map = SkyMap::from_fn(pix, |d| d.theta.cos() + 0.3 * d.phi.sin());
    write_map(&good, "SIGNAL", &map, &WriteOptions::default()).unwrap();
    let original = std::fs::read(&good).unwrap();
    // the fixture itself reads back (so the mutated cases exercise a working reader)
    let (back, _) = read_map(&good, &ColumnChoice::Position(0)).unwrap();
    assert_eq!(back.values(), map.values());
    // mutations in the header (first 2880-byte blocks) are the interesting ones: bias there
    let header_len = original.len().min(2 * 2880);
    let path = tmp.path().join("mutated.fits");
    let ok = std::cell::Cell::new(0usize);
    runner(0x5eed_0001)
        .run(&(edits(), any::<bool>()), |(e, in_header)| {
            let bytes = if in_header {
                let mut head = mutate(&original[..header_len], &(e.0.clone(), 0));
                head.extend_from_slice(&original[header_len..]);
                let keep = head.len().saturating_sub(e.1);
                head.truncate(keep);
                head
            } else {
                mutate(&original, &e)
            };
            std::fs::write(&path, &bytes).unwrap();
            match read_map(&path, &ColumnChoice::Position(0)) {
                Ok(_) => ok.set(ok.get() + 1),
                Err(err) => one_line(&err)?,
            }
            Ok(())
        })
        .unwrap();
    // some mutations (in data values or comments) still read: the run is not all refusals
    // of an unreadable fixture
    assert!(ok.get() > 0, "no mutated file was readable");
}

fn settings_of(
    path: &Path,
) -> planisphere::Result<planisphere::measure::measurement::MeasurementSettings> {
    MeasureOptions {
        settings: Some(path.to_path_buf()),
        ..MeasureOptions::default()
    }
    .settings()
}

#[test]
fn settings_and_recipe_readers_never_panic_on_mutated_toml() {
    let tmp = tempfile::tempdir().unwrap();
    let path = tmp.path().join("file.toml");
    std::fs::write(&path, SETTINGS).unwrap();
    settings_of(&path).unwrap();
    std::fs::write(&path, RECIPE).unwrap();
    RecipeFile::read(&path).unwrap().recipe().unwrap();
    for (k, original) in [SETTINGS, RECIPE].into_iter().enumerate() {
        runner(0x5eed_0010 + k as u64)
            .run(&edits(), |e| {
                std::fs::write(&path, mutate(original.as_bytes(), &e)).unwrap();
                let result = if k == 0 {
                    settings_of(&path).map(|_| ())
                } else {
                    RecipeFile::read(&path).and_then(|r| r.recipe()).map(|_| ())
                };
                if let Err(err) = result {
                    one_line(&err)?;
                }
                Ok(())
            })
            .unwrap();
    }
}
