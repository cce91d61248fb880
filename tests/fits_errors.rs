//! Every bad HEALPix FITS input gives a clear one-line error (never a panic), checked by its text.
//! Malformed files are made in a temporary directory from good ones: header cards edited,
//! files truncated, or tables written by hand with the `fitsio` crate.

mod fits_support;

use fits_support::*;
use planisphere::io::fits_io::{read_footprint, read_map, ColumnChoice, HealpixFitsReader};
use planisphere::{Footprint, Ordering};
use std::path::Path;

fn read_error(path: &Path) -> String {
    read_error_for(path, &ColumnChoice::default())
}

fn read_error_for(path: &Path, column: &ColumnChoice) -> String {
    let err = read_map(path, column)
        .expect_err("reading should fail")
        .to_string();
    assert!(!err.contains('\n'), "error is not one line: {err}");
    err
}

fn expect(path: &Path, reason: &str) -> String {
    format!("{}: {reason}", path.display())
}

#[test]
fn missing_file_is_reported_as_missing() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("absent.fits");
    assert_eq!(read_error(&path), expect(&path, "no such file"));
}

#[test]
fn directory_is_not_a_fits_file() {
    let dir = tempfile::tempdir().unwrap();
    assert_eq!(
        read_error(dir.path()),
        expect(dir.path(), "is a directory, not a FITS file")
    );
}

#[test]
fn empty_file_is_not_a_fits_file() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("empty.fits");
    std::fs::write(&path, b"").unwrap();
    assert_eq!(
        read_error(&path),
        expect(&path, "not a FITS file: the file is empty")
    );
}

#[test]
fn text_file_is_not_a_fits_file() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("notes.fits");
    std::fs::write(&path, b"pixel,value\n0,1.5\n").unwrap();
    assert_eq!(
        read_error(&path),
        expect(
            &path,
            "not a FITS file: it does not begin with the FITS keyword SIMPLE"
        )
    );
}

#[test]
fn gzip_file_asks_to_be_decompressed() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("map.fits.gz");
    std::fs::write(&path, [0x1f, 0x8b, 8, 0, 0, 0, 0, 0, 0, 3]).unwrap();
    assert_eq!(
        read_error(&path),
        expect(
            &path,
            "is gzip-compressed; decompress it first (gunzip), planisphere reads plain FITS files"
        )
    );
}

#[test]
fn file_truncated_inside_the_data_is_reported_with_byte_counts() {
    // NSIDE 16 float64, rows of 1024: 3 rows × 8192 bytes = 24576 bytes of data after a primary
    // HDU and a one-block table header (2 × 2880 bytes).
    let dir = tempfile::tempdir().unwrap();
    let path = good_file(dir.path(), "map.fits", 16, Ordering::Ring);
    truncate(&path, 2 * 2880 + 10000);
    assert_eq!(
        read_error(&path),
        expect(
            &path,
            "truncated FITS file: the table in HDU 1 declares 24576 bytes of data but only 10000 are present"
        )
    );
}

#[test]
fn file_truncated_at_a_block_boundary_inside_the_data_is_truncated() {
    let dir = tempfile::tempdir().unwrap();
    let path = good_file(dir.path(), "map.fits", 16, Ordering::Ring);
    truncate(&path, 4 * 2880);
    assert_eq!(
        read_error(&path),
        expect(
            &path,
            "truncated FITS file: the table in HDU 1 declares 24576 bytes of data but only 5760 are present"
        )
    );
}

#[test]
fn file_truncated_inside_the_table_header_is_truncated() {
    let dir = tempfile::tempdir().unwrap();
    let path = good_file(dir.path(), "map.fits", 16, Ordering::Ring);
    truncate(&path, 2880 + 1000);
    let err = read_error(&path);
    assert!(
        err.starts_with(&expect(
            &path,
            "truncated FITS file: its 3880 bytes are not a whole number of 2880-byte FITS blocks"
        )),
        "{err}"
    );
}

#[test]
fn image_only_file_has_no_binary_table() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("image.fits");
    fitsio::FitsFile::create(&path).open().unwrap();
    assert_eq!(
        read_error(&path),
        expect(
            &path,
            "no binary-table extension, so no HEALPix map (1 HDU in the file)"
        )
    );
}

#[test]
fn pixtype_other_than_healpix_is_rejected() {
    let dir = tempfile::tempdir().unwrap();
    let path = good_file(dir.path(), "map.fits", 8, Ordering::Ring);
    edit_card(&path, "PIXTYPE", Some("'CAR     '"));
    assert_eq!(
        read_error(&path),
        expect(
            &path,
            "PIXTYPE is 'CAR' in HDU 1, not 'HEALPIX': this is not a HEALPix map"
        )
    );
}

#[test]
fn missing_pixtype_is_read_with_a_warning() {
    let dir = tempfile::tempdir().unwrap();
    let path = good_file(dir.path(), "map.fits", 8, Ordering::Ring);
    edit_card(&path, "PIXTYPE", None);
    let reader = HealpixFitsReader::open(&path).unwrap();
    assert_eq!(
        reader.header().warnings,
        vec!["HDU 1 has no PIXTYPE keyword; reading it as a HEALPix table".to_string()]
    );
}

#[test]
fn missing_nside_is_rejected() {
    let dir = tempfile::tempdir().unwrap();
    let path = good_file(dir.path(), "map.fits", 8, Ordering::Ring);
    edit_card(&path, "NSIDE", None);
    assert_eq!(
        read_error(&path),
        expect(
            &path,
            "HDU 1 has no NSIDE keyword, which the HEALPix FITS convention requires"
        )
    );
}

#[test]
fn non_integer_nside_is_rejected() {
    let dir = tempfile::tempdir().unwrap();
    let path = good_file(dir.path(), "map.fits", 8, Ordering::Ring);
    edit_card(&path, "NSIDE", Some("8.5"));
    assert_eq!(
        read_error(&path),
        expect(&path, "NSIDE = 8.5 is not an integer")
    );
}

#[test]
fn nside_zero_and_above_two_to_the_29_are_out_of_range() {
    let dir = tempfile::tempdir().unwrap();
    let path = good_file(dir.path(), "map.fits", 8, Ordering::Ring);
    edit_card(&path, "NSIDE", Some("0"));
    assert_eq!(
        read_error(&path),
        expect(&path, "NSIDE 0 is out of range (1 to 536870912)")
    );
    edit_card(&path, "NSIDE", Some("1073741824"));
    assert_eq!(
        read_error(&path),
        expect(&path, "NSIDE 1073741824 is out of range (1 to 536870912)")
    );
}

#[test]
fn nested_ordering_with_nside_not_a_power_of_two_is_rejected() {
    // NSIDE 12 is a valid RING map (1728 pixels, one per row); NESTED needs a power of two
    // (Górski et al. 2005, §4).
    let dir = tempfile::tempdir().unwrap();
    let path = good_file(dir.path(), "map.fits", 12, Ordering::Ring);
    assert!(read_map(&path, &ColumnChoice::default()).is_ok());
    edit_card(&path, "ORDERING", Some("'NESTED  '"));
    assert_eq!(
        read_error(&path),
        expect(
            &path,
            "NSIDE 12 is not a power of two, which NESTED ordering requires"
        )
    );
}

#[test]
fn unknown_ordering_is_rejected() {
    let dir = tempfile::tempdir().unwrap();
    let path = good_file(dir.path(), "map.fits", 8, Ordering::Ring);
    edit_card(&path, "ORDERING", Some("'SPIRAL  '"));
    assert_eq!(
        read_error(&path),
        expect(&path, "ORDERING 'SPIRAL' is neither RING nor NESTED")
    );
}

#[test]
fn nside_inconsistent_with_data_length_is_rejected() {
    let dir = tempfile::tempdir().unwrap();
    let path = good_file(dir.path(), "map.fits", 8, Ordering::Ring);
    edit_card(&path, "NSIDE", Some("16"));
    edit_card(&path, "LASTPIX", Some("3071"));
    assert_eq!(
        read_error(&path),
        expect(
            &path,
            "NSIDE 16 needs 3072 pixels but column 'T' holds 768 values (768 rows × 1)"
        )
    );
}

#[test]
fn huge_consistent_header_is_refused_before_allocating() {
    // NSIDE 2^20 with NAXIS2 = 12·2^40 rows of one value: consistent, but 1.3e13 pixels.
    let dir = tempfile::tempdir().unwrap();
    let path = good_file(dir.path(), "map.fits", 8, Ordering::Ring);
    edit_card(&path, "NSIDE", Some("1048576"));
    edit_card(&path, "NAXIS2", Some("13194139533312"));
    edit_card(&path, "LASTPIX", Some("13194139533311"));
    assert_eq!(
        read_error(&path),
        expect(
            &path,
            "NSIDE 1048576 is above 8192, the largest map planisphere reads into memory"
        )
    );
}

#[test]
fn header_claiming_more_data_than_the_file_holds_is_truncated() {
    // NSIDE 4096 with a matching row count passes the size limit but the file is 14 kB.
    let dir = tempfile::tempdir().unwrap();
    let path = good_file(dir.path(), "map.fits", 8, Ordering::Ring);
    edit_card(&path, "NSIDE", Some("4096"));
    edit_card(&path, "NAXIS2", Some("201326592"));
    edit_card(&path, "LASTPIX", Some("201326591"));
    assert_eq!(
        read_error(&path),
        expect(
            &path,
            "truncated FITS file: the table in HDU 1 declares 1610612736 bytes of data but only 8640 are present"
        )
    );
}

#[test]
fn firstpix_lastpix_not_spanning_the_sky_are_rejected() {
    let dir = tempfile::tempdir().unwrap();
    let path = good_file(dir.path(), "map.fits", 8, Ordering::Ring);
    edit_card(&path, "FIRSTPIX", Some("1"));
    assert_eq!(
        read_error(&path),
        expect(
            &path,
            "FIRSTPIX 1 and LASTPIX 767 do not match a full-sky NSIDE 8 map (expected 0 and 767)"
        )
    );
}

#[test]
fn unknown_indexing_scheme_is_rejected() {
    let dir = tempfile::tempdir().unwrap();
    let path = good_file(dir.path(), "map.fits", 8, Ordering::Ring);
    edit_card(&path, "INDXSCHM", Some("'WEIRD   '"));
    assert_eq!(
        read_error(&path),
        expect(&path, "INDXSCHM 'WEIRD' is neither IMPLICIT nor EXPLICIT")
    );
}

#[test]
fn object_contradicting_indexing_scheme_is_rejected() {
    // healpy 1.20.1 rejects the same contradiction ("Incompatible INDXSCHM keyword").
    let dir = tempfile::tempdir().unwrap();
    let path = good_file(dir.path(), "map.fits", 8, Ordering::Ring);
    edit_card(&path, "INDXSCHM", Some("'EXPLICIT'"));
    assert_eq!(
        read_error(&path),
        expect(&path, "OBJECT 'FULLSKY' contradicts INDXSCHM 'EXPLICIT'")
    );
}

#[test]
fn column_position_beyond_the_table_lists_the_columns() {
    let path = Path::new("reference-values/fits/iqu_nside8_float32.fits");
    assert_eq!(
        read_error_for(path, &ColumnChoice::Position(3)),
        expect(
            path,
            "there is no value column 3 (0-based); the file has 3: 0 'TEMPERATURE', 1 'Q_POLARISATION', 2 'U_POLARISATION'"
        )
    );
}

#[test]
fn unknown_column_name_lists_the_columns() {
    let path = Path::new("reference-values/fits/iqu_nside8_float32.fits");
    assert_eq!(
        read_error_for(path, &ColumnChoice::parse("KAPPA")),
        expect(
            path,
            "no column named 'KAPPA'; value columns: 0 'TEMPERATURE', 1 'Q_POLARISATION', 2 'U_POLARISATION'"
        )
    );
}

#[test]
fn text_column_is_not_numeric() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("text.fits");
    table_with_text_column(&path, 2);
    assert!(read_map(&path, &ColumnChoice::parse("T")).is_ok());
    assert_eq!(
        read_error_for(&path, &ColumnChoice::parse("name")),
        expect(
            &path,
            "column 'NAME' holds text (TFORM '8A'), not real numbers"
        )
    );
}

#[test]
fn partial_pixel_out_of_range_is_rejected() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("partial.fits");
    partial_table(&path, &[3, 4, 800], &[1.0, 2.0, 3.0], &partial_keys());
    assert_eq!(
        read_error(&path),
        expect(&path, "PIXEL entry 2 is 800, outside 0..=767 for NSIDE 8")
    );
    let negative = dir.path().join("negative.fits");
    partial_table(&negative, &[-1, 4], &[1.0, 2.0], &partial_keys());
    assert_eq!(
        read_error(&negative),
        expect(
            &negative,
            "PIXEL entry 0 is -1, outside 0..=767 for NSIDE 8"
        )
    );
}

#[test]
fn partial_pixel_listed_twice_is_rejected() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("partial.fits");
    partial_table(&path, &[3, 5, 9, 5], &[1.0, 2.0, 3.0, 4.0], &partial_keys());
    assert_eq!(
        read_error(&path),
        expect(
            &path,
            "pixel 5 is listed twice in the PIXEL column (entries 1 and 3)"
        )
    );
}

#[test]
fn partial_with_more_rows_than_pixels_is_rejected() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("partial.fits");
    let pixels: Vec<i64> = (0..769).map(|p| p % 768).collect();
    partial_table(&path, &pixels, &vec![0.0; 769], &partial_keys());
    assert_eq!(
        read_error(&path),
        expect(
            &path,
            "the PIXEL column lists 769 pixels but NSIDE 8 has only 768"
        )
    );
}

#[test]
fn partial_firstpix_after_lastpix_is_rejected() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("partial.fits");
    let mut keys = partial_keys();
    keys.push(("FIRSTPIX", KeyText::Int(10)));
    keys.push(("LASTPIX", KeyText::Int(5)));
    partial_table(&path, &[6, 7], &[1.0, 2.0], &keys);
    assert_eq!(
        read_error(&path),
        expect(
            &path,
            "FIRSTPIX 10 and LASTPIX 5 are not a pixel range of NSIDE 8 (0 to 767)"
        )
    );
}

#[test]
fn partial_pixel_outside_firstpix_lastpix_is_rejected() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("partial.fits");
    let mut keys = partial_keys();
    keys.push(("FIRSTPIX", KeyText::Int(5)));
    keys.push(("LASTPIX", KeyText::Int(10)));
    partial_table(&path, &[6, 11], &[1.0, 2.0], &keys);
    assert_eq!(
        read_error(&path),
        expect(
            &path,
            "PIXEL entry 1 is 11, outside FIRSTPIX..=LASTPIX = 5..=10"
        )
    );
}

#[test]
fn pixel_column_name_is_not_a_value_column() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("partial.fits");
    partial_table(&path, &[1, 2], &[1.0, 2.0], &partial_keys());
    assert_eq!(
        read_error_for(&path, &ColumnChoice::parse("pixel")),
        expect(
            &path,
            "PIXEL is the pixel-index column of this partial-sky file, not a value column; value columns: 0 'SIGNAL'"
        )
    );
}

#[test]
fn weights_outside_zero_one_are_not_a_mask() {
    let dir = tempfile::tempdir().unwrap();
    let path = good_file(dir.path(), "map.fits", 8, Ordering::Ring);
    let err = read_footprint(&path, &ColumnChoice::default())
        .unwrap_err()
        .to_string();
    // Pixel 0 of the ramp map holds 0.25·0 − 3 = −3.
    assert_eq!(
        err,
        expect(&path, "mask pixel 0 has weight -3, outside [0, 1]")
    );
}

#[test]
fn mask_of_another_nside_does_not_fit_the_map() {
    let (map, _) = read_map(
        Path::new("reference-values/fits/ring_nside8_float64.fits"),
        &ColumnChoice::default(),
    )
    .unwrap();
    let (mask, _) = read_footprint(
        Path::new("reference-values/fits/mask_nside16_uint8.fits"),
        &ColumnChoice::default(),
    )
    .unwrap();
    assert_eq!(
        mask.restricted_to(&map).unwrap_err().to_string(),
        "mask NSIDE 16 does not match map NSIDE 8"
    );
}

#[test]
fn mask_outside_the_maps_valid_pixels_leaves_no_footprint() {
    // The partial fixture covers θ < 60°; a mask of the southern cap θ > 120° misses it.
    let (map, _) = read_map(
        Path::new("reference-values/fits/partial_nside16_ring.fits"),
        &ColumnChoice::default(),
    )
    .unwrap();
    let south = Footprint::from_fn(map.pixelization(), |d| {
        d.theta > 2.0 * std::f64::consts::FRAC_PI_3
    });
    let err = south.restricted_to(&map).unwrap_err().to_string();
    assert!(
        err.starts_with("the mask's footprint does not overlap the map's valid pixels ("),
        "{err}"
    );
}

/// Keywords of a full-sky NSIDE 1 RING map (12 pixels), integer values given as text.
fn nside1_keys() -> Vec<(&'static str, &'static str)> {
    vec![("PIXTYPE", "HEALPIX"), ("ORDERING", "RING")]
}

fn with_nside(path: &Path, value: &str) {
    edit_card(path, "NSIDE", Some(value));
}

#[test]
fn ascii_table_is_not_a_binary_table() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("ascii.fits");
    let mut keys = nside1_keys();
    keys.push(("NSIDE", "1"));
    raw_table(&path, false, 12, &[("T", "F8.3")], &keys);
    assert_eq!(
        read_error(&path),
        expect(
            &path,
            "no binary-table extension, so no HEALPix map (2 HDUs in the file)"
        )
    );
}

#[test]
fn complex_logical_and_variable_length_columns_are_not_numeric() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("odd.fits");
    let mut keys = nside1_keys();
    keys.push(("NSIDE", "1"));
    raw_table(
        &path,
        true,
        12,
        &[("T", "1E"), ("Z", "1C"), ("FLAG", "1L"), ("V", "1PE(4)")],
        &keys,
    );
    // NSIDE was written as a string keyword; make it a number as the convention has it.
    with_nside(&path, "1");
    assert!(read_map(&path, &ColumnChoice::parse("T")).is_ok());
    for (column, reason) in [
        (
            "Z",
            "column 'Z' holds complex numbers (TFORM '1C'), not real numbers",
        ),
        (
            "FLAG",
            "column 'FLAG' holds logical values (TFORM '1L'), not real numbers",
        ),
        (
            "V",
            "column 'V' holds variable-length arrays (TFORM '1PE(4)'), not real numbers",
        ),
    ] {
        assert_eq!(
            read_error_for(&path, &ColumnChoice::parse(column)),
            expect(&path, reason)
        );
    }
}

#[test]
fn partial_pixel_column_of_floats_is_rejected() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("floatpix.fits");
    let mut keys = nside1_keys();
    keys.push(("NSIDE", "1"));
    keys.push(("INDXSCHM", "EXPLICIT"));
    raw_table(&path, true, 3, &[("PIXEL", "1E"), ("SIGNAL", "1D")], &keys);
    with_nside(&path, "1");
    assert_eq!(
        read_error(&path),
        expect(
            &path,
            "the pixel-index column 'PIXEL' has TFORM '1E'; pixel indices must be integers"
        )
    );
}

#[test]
fn corrupted_header_bytes_never_panic() {
    // Deterministic corruption of every 11th byte of the table header of a good file, each to a
    // few troublesome characters; every read must end in Ok or a one-line error.
    let dir = tempfile::tempdir().unwrap();
    let good = good_file(dir.path(), "good.fits", 8, Ordering::Ring);
    let original = std::fs::read(&good).unwrap();
    let path = dir.path().join("bad.fits");
    let mut failures = 0;
    for offset in (2880..2 * 2880).step_by(11) {
        for byte in [b'9', b'-', b'\'', b' ', 0u8] {
            let mut bytes = original.clone();
            bytes[offset] = byte;
            std::fs::write(&path, &bytes).unwrap();
            match read_map(&path, &ColumnChoice::default()) {
                Ok(_) => {}
                Err(e) => {
                    failures += 1;
                    let text = e.to_string();
                    assert!(!text.contains('\n'), "{text}");
                    assert!(text.starts_with(&path.display().to_string()), "{text}");
                }
            }
        }
    }
    // Many corruptions hit keyword values or structure and must be reported.
    assert!(failures > 30, "only {failures} corruptions were detected");
}
