//! planisphere reads the files healpy 1.20.1 writes with the values healpy 1.20.1 reads back.
//!
//! Fixtures and expected values: reference-values/fits_reference.py (healpy 1.20.1 write_map /
//! read_map, astropy 8.0.2 for the two edited headers), output in reference-values/fits/.

use planisphere::io::fits_io::{
    read_footprint, read_map, ColumnChoice, Coverage, HealpixFitsReader,
};
use planisphere::Ordering;
use serde_json::Value;
use std::path::{Path, PathBuf};

fn fixtures() -> (PathBuf, Value) {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("reference-values/fits");
    let text = std::fs::read_to_string(dir.join("expected.json")).unwrap();
    (dir, serde_json::from_str(&text).unwrap())
}

/// Checks every column of `name`, selected by position and by lower-cased name, pixel for pixel.
fn check_file(name: &str) {
    let (dir, expected) = fixtures();
    let entry = &expected["files"][name];
    assert!(entry.is_object(), "{name} missing from expected.json");
    let path = dir.join(name);
    let columns: Vec<&str> = entry["columns"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c.as_str().unwrap())
        .collect();
    let reader = HealpixFitsReader::open(&path).unwrap();
    let header = reader.header();
    assert_eq!(header.column_names(), columns, "{name}: column names");
    assert_eq!(header.nside as u64, entry["nside"].as_u64().unwrap());
    assert_eq!(
        header.ordering,
        Ordering::parse(entry["ordering"].as_str().unwrap()).unwrap()
    );
    assert_eq!(header.coordsys.as_deref(), entry["coordsys"].as_str());
    let partial = entry["partial"].as_bool().unwrap();
    assert_eq!(header.coverage == Coverage::Partial, partial);
    for (k, col) in columns.iter().enumerate() {
        let want = entry["values"][col].as_array().unwrap();
        for choice in [
            ColumnChoice::Position(k),
            ColumnChoice::parse(&col.to_ascii_lowercase()),
        ] {
            let (map, _) = read_map(&path, &choice).unwrap();
            assert_eq!(map.values().len(), want.len());
            for (p, w) in want.iter().enumerate() {
                // Values are decimal strings (shortest round-trip repr); Rust's parse is exact.
                match w.as_str().map(|t| t.parse::<f64>().unwrap()) {
                    // Identical values (float32 columns widened exactly), healpy 1.20.1.
                    Some(v) => assert_eq!(map.get(p as u64), Some(v), "{name} {col} pixel {p}"),
                    // Bad pixel by healpy 1.20.1's mask_bad.
                    None => assert_eq!(map.get(p as u64), None, "{name} {col} pixel {p}"),
                }
            }
        }
    }
}

#[test]
fn ring_float64_one_value_per_row_matches_healpy() {
    check_file("ring_nside8_float64.fits");
}

#[test]
fn nested_float32_rows_of_1024_match_healpy() {
    check_file("nested_nside16_float32.fits");
}

#[test]
fn ring_float64_rows_of_1024_match_healpy() {
    check_file("ring_nside16_float64.fits");
}

#[test]
fn partial_sky_with_int16_pixel_column_matches_healpy() {
    check_file("partial_nside16_ring.fits");
    let (map, _) = read_map(
        &fixtures().0.join("partial_nside16_ring.fits"),
        &ColumnChoice::default(),
    )
    .unwrap();
    // healpy 1.20.1 wrote pixels with θ ≤ 60° only: 736 of 3072 at NSIDE 16.
    assert_eq!(map.valid_count(), 736);
}

#[test]
fn unseen_and_nan_pixels_are_invalid_like_healpy() {
    check_file("bad_pixels_nside8_float32.fits");
    let (map, _) = read_map(
        &fixtures().0.join("bad_pixels_nside8_float32.fits"),
        &ColumnChoice::default(),
    )
    .unwrap();
    // UNSEEN at 0, 5, 100, 767 and NaN at 7, 300 (fits_reference.py).
    let invalid: Vec<usize> = (0..768).filter(|&p| !map.valid()[p]).collect();
    assert_eq!(invalid, vec![0, 5, 7, 100, 300, 767]);
}

#[test]
fn three_column_file_matches_healpy_column_by_column() {
    check_file("iqu_nside8_float32.fits");
}

#[test]
fn integer_mask_columns_match_healpy() {
    check_file("mask_nside16_uint8.fits");
    check_file("mask_nside8_int32.fits");
}

#[test]
fn uint8_mask_reads_as_footprint_with_healpy_sky_fraction() {
    let (dir, expected) = fixtures();
    let want = expected["files"]["mask_nside16_uint8.fits"]["values"]["MASK"]
        .as_array()
        .unwrap();
    let ones = want.iter().filter(|v| v.as_str() == Some("1.0")).count();
    let (fp, _) = read_footprint(
        &dir.join("mask_nside16_uint8.fits"),
        &ColumnChoice::default(),
    )
    .unwrap();
    assert_eq!(fp.observed_pixels(), ones as u64);
    assert!(fp.is_binary());
    assert_eq!(fp.f_sky(), ones as f64 / 3072.0);
}

#[test]
fn missing_ordering_is_assumed_ring_with_a_warning() {
    // healpy 1.20.1 assumes RING when ORDERING is absent.
    check_file("no_ordering_nside8.fits");
    let reader = HealpixFitsReader::open(&fixtures().0.join("no_ordering_nside8.fits")).unwrap();
    assert_eq!(
        reader.header().warnings,
        vec!["no ORDERING keyword: assuming RING, as healpy 1.20.1 does".to_string()]
    );
}

#[test]
fn npix_disagreeing_with_nside_trusts_nside_with_a_warning() {
    check_file("npix_disagrees_nside8.fits");
    let reader = HealpixFitsReader::open(&fixtures().0.join("npix_disagrees_nside8.fits")).unwrap();
    assert_eq!(
        reader.header().warnings,
        vec!["NPIX = 700 disagrees with NSIDE 8 (12·NSIDE² = 768); NSIDE is trusted".to_string()]
    );
}

#[test]
fn every_fixture_in_expected_json_is_checked_by_a_test() {
    let (_, expected) = fixtures();
    let names: Vec<&String> = expected["files"].as_object().unwrap().keys().collect();
    assert_eq!(names.len(), 10, "{names:?}");
}

#[test]
fn pixels_equal_to_the_bad_data_keyword_are_read_as_bad() {
    // fixture and expectation: reference-values/fits_bad_data_reference.py (healpy 1.20.1,
    // astropy 8.0.2, numpy 2.4.6); BAD_DATA from the HEALPix FITS convention
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("reference-values/fits");
    let text = std::fs::read_to_string(dir.join("bad_data_expected.json")).unwrap();
    let expected: Value = serde_json::from_str(&text).unwrap();
    let path = dir.join(expected["file"].as_str().unwrap());
    let (map, header) = read_map(&path, &ColumnChoice::default()).unwrap();
    assert_eq!(header.bad_data, expected["bad_data"].as_f64());
    let bad: Vec<u64> = expected["bad_pixels"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_u64().unwrap())
        .collect();
    assert_eq!(bad.len(), 20);
    for p in 0..map.pixelization().npix() {
        assert_eq!(map.get(p).is_none(), bad.contains(&p), "pixel {p}");
    }
    assert_eq!(
        map.valid_count(),
        expected["valid_pixels"].as_u64().unwrap()
    );
    let mean = map.summary().mean.unwrap();
    let want = expected["valid_mean"].as_f64().unwrap();
    assert!(
        (mean - want).abs() <= 1e-12 * want.abs().max(1.0),
        "{mean} vs {want}"
    );
}
