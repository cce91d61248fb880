//! Writing then reading HEALPix FITS files gives back the map; failed writes leave no trace.

mod fits_support;

use fits_support::*;
use planisphere::io::fits_io::{
    read_footprint, read_map, write_footprint, write_map, write_maps, ColumnChoice, Coverage,
    HealpixFitsReader, PixelIndexWidth, ValuePrecision, WriteLayout, WriteOptions,
};
use planisphere::sky::skymap::UNSEEN;
use planisphere::{Footprint, Ordering, Pixelization, SkyMap};

/// A map with a smooth pattern and every seventh pixel invalid (NaN or UNSEEN alternately).
fn patterned_map(nside: u32, ordering: Ordering) -> SkyMap {
    let pix = Pixelization::new(nside, ordering).unwrap();
    let values = (0..pix.npix())
        .map(|p| match p % 14 {
            0 => f64::NAN,
            7 => UNSEEN,
            _ => {
                let d = pix.center(p);
                d.theta.cos() * 3.0 + (2.0 * d.phi).sin() / 7.0
            }
        })
        .collect();
    SkyMap::new(pix, values).unwrap()
}

fn assert_same_map(a: &SkyMap, b: &SkyMap) {
    assert_eq!(a.pixelization(), b.pixelization());
    assert_eq!(a.valid(), b.valid());
    for p in 0..a.values().len() as u64 {
        assert_eq!(a.get(p), b.get(p), "pixel {p}");
    }
}

#[test]
fn full_sky_float64_round_trip_is_exact_with_rows_of_1024() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("m.fits");
    let mut map = patterned_map(16, Ordering::Ring);
    map.coordsys = Some("C".to_string());
    write_map(&path, "TEMPERATURE", &map, &WriteOptions::default()).unwrap();
    let reader = HealpixFitsReader::open(&path).unwrap();
    let h = reader.header();
    // Rows of 1024 values, as the HEALPix FITS convention and healpy 1.20.1 write them.
    assert_eq!(h.columns[0].format, "1024D");
    assert_eq!(h.rows, 3);
    assert_eq!(h.coordsys.as_deref(), Some("C"));
    assert_eq!(h.coverage, Coverage::FullSky);
    assert!(h.warnings.is_empty(), "{:?}", h.warnings);
    let (back, _) = read_map(&path, &ColumnChoice::default()).unwrap();
    assert_same_map(&map, &back);
    assert_eq!(back.coordsys.as_deref(), Some("C"));
}

#[test]
fn float32_round_trip_rounds_each_value_to_float32() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("m.fits");
    let map = patterned_map(16, Ordering::Nested);
    let options = WriteOptions {
        precision: ValuePrecision::Float32,
        ..WriteOptions::default()
    };
    write_map(&path, "KAPPA", &map, &options).unwrap();
    let (back, h) = read_map(&path, &ColumnChoice::default()).unwrap();
    assert_eq!(h.columns[0].format, "1024E");
    assert_eq!(back.ordering(), Ordering::Nested);
    assert_eq!(back.valid(), map.valid());
    for p in 0..map.values().len() as u64 {
        assert_eq!(
            back.get(p),
            map.get(p).map(|v| v as f32 as f64),
            "pixel {p}"
        );
    }
}

#[test]
fn maps_below_1024_pixels_or_not_a_multiple_have_one_value_per_row() {
    let dir = tempfile::tempdir().unwrap();
    for nside in [8u32, 12] {
        let path = dir.path().join(format!("m{nside}.fits"));
        let map = patterned_map(nside, Ordering::Ring);
        write_map(&path, "T", &map, &WriteOptions::default()).unwrap();
        let (back, h) = read_map(&path, &ColumnChoice::default()).unwrap();
        assert_eq!(h.columns[0].format, "1D");
        assert_eq!(h.rows, 12 * (nside as u64).pow(2));
        assert_same_map(&map, &back);
    }
}

#[test]
fn partial_sky_round_trip_keeps_only_valid_pixels_with_32_and_64_bit_indices() {
    let dir = tempfile::tempdir().unwrap();
    let map = patterned_map(16, Ordering::Nested);
    for width in [PixelIndexWidth::Int32, PixelIndexWidth::Int64] {
        let path = dir.path().join(format!("p{width:?}.fits"));
        let options = WriteOptions {
            layout: WriteLayout::Partial(width),
            ..WriteOptions::default()
        };
        write_map(&path, "SIGNAL", &map, &options).unwrap();
        let (back, h) = read_map(&path, &ColumnChoice::parse("signal")).unwrap();
        assert_eq!(h.coverage, Coverage::Partial);
        assert_eq!(h.rows, map.valid_count());
        assert_eq!(h.column_names(), vec!["SIGNAL".to_string()]);
        assert_same_map(&map, &back);
    }
}

#[test]
fn several_named_columns_are_selected_by_position_or_any_case_name() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("iqu.fits");
    let i = patterned_map(8, Ordering::Ring);
    let q = ramp_map(8, Ordering::Ring);
    let u = SkyMap::new(i.pixelization(), vec![0.5; 768]).unwrap();
    write_maps(
        &path,
        &[("I", &i), ("Q", &q), ("U", &u)],
        &WriteOptions::default(),
    )
    .unwrap();
    for (k, (name, want)) in [("i", &i), ("q", &q), ("U", &u)].into_iter().enumerate() {
        let (by_name, h) = read_map(&path, &ColumnChoice::parse(name)).unwrap();
        let (by_position, _) = read_map(&path, &ColumnChoice::Position(k)).unwrap();
        assert_eq!(h.column_names(), vec!["I", "Q", "U"]);
        assert_same_map(want, &by_name);
        assert_same_map(want, &by_position);
    }
}

#[test]
fn fractional_footprint_round_trip_is_exact() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("w.fits");
    let pix = Pixelization::new(8, Ordering::Ring).unwrap();
    let weights: Vec<f64> = (0..768).map(|p| (p % 5) as f64 / 4.0).collect();
    let fp = Footprint::from_weights(pix, weights).unwrap();
    write_footprint(&path, "WEIGHT", &fp, &WriteOptions::default()).unwrap();
    let (back, _) = read_footprint(&path, &ColumnChoice::default()).unwrap();
    assert_eq!(back.weights(), fp.weights());
}

#[test]
fn successful_write_replaces_an_existing_file() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("m.fits");
    write_map(
        &path,
        "T",
        &ramp_map(8, Ordering::Ring),
        &WriteOptions::default(),
    )
    .unwrap();
    let other = patterned_map(16, Ordering::Nested);
    write_map(&path, "T", &other, &WriteOptions::default()).unwrap();
    let (back, _) = read_map(&path, &ColumnChoice::default()).unwrap();
    assert_same_map(&other, &back);
}

#[test]
fn failed_write_keeps_the_existing_file_and_leaves_no_partial_file() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("m.fits");
    write_map(
        &path,
        "T",
        &ramp_map(8, Ordering::Ring),
        &WriteOptions::default(),
    )
    .unwrap();
    let before = std::fs::read(&path).unwrap();
    // 1e39 exceeds float32's range (3.4e38): refused while writing the second column, after
    // the first one is already in the temporary file.
    let pix = Pixelization::new(8, Ordering::Ring).unwrap();
    let mut values = vec![1.0; 768];
    values[700] = 1e39;
    let huge = SkyMap::new(pix, values).unwrap();
    let fine = ramp_map(8, Ordering::Ring);
    let options = WriteOptions {
        precision: ValuePrecision::Float32,
        ..WriteOptions::default()
    };
    let err = write_maps(&path, &[("A", &fine), ("B", &huge)], &options)
        .unwrap_err()
        .to_string();
    assert_eq!(
        err,
        format!(
            "{}: pixel 700 of column 'B' holds 1e39, beyond the float32 range (±3.4e38); write float64 instead",
            path.display()
        )
    );
    assert_eq!(std::fs::read(&path).unwrap(), before);
    let names: Vec<_> = std::fs::read_dir(dir.path())
        .unwrap()
        .map(|e| e.unwrap().file_name())
        .collect();
    assert_eq!(names, vec![std::ffi::OsString::from("m.fits")]);
}

#[test]
fn writing_into_a_missing_directory_is_an_error() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("nowhere/m.fits");
    let err = write_map(
        &path,
        "T",
        &ramp_map(1, Ordering::Ring),
        &WriteOptions::default(),
    )
    .unwrap_err()
    .to_string();
    assert_eq!(
        err,
        format!("{}: its directory does not exist", path.display())
    );
}

#[test]
fn bad_column_sets_are_refused_before_writing() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("m.fits");
    let a = ramp_map(8, Ordering::Ring);
    let b = ramp_map(16, Ordering::Ring);
    let msg = |r: planisphere::Result<()>| r.unwrap_err().to_string();
    let full = WriteOptions::default();
    let partial = WriteOptions {
        layout: WriteLayout::Partial(PixelIndexWidth::Int64),
        ..WriteOptions::default()
    };
    assert_eq!(
        msg(write_maps(&path, &[("I", &a), ("i", &a)], &full)),
        "column name 'i' is used twice"
    );
    assert_eq!(
        msg(write_maps(&path, &[("I", &a), ("Q", &b)], &full)),
        "column 'Q' has NSIDE 16 RING but column 'I' has NSIDE 8 RING"
    );
    assert_eq!(
        msg(write_maps(&path, &[], &full)),
        "a HEALPix FITS file needs at least one map column"
    );
    assert_eq!(
        msg(write_map(&path, " ", &a, &full)),
        "a column name is empty"
    );
    assert_eq!(
        msg(write_map(&path, "pixel", &a, &partial)),
        "'PIXEL' names the pixel-index column of a partial-sky file; choose another column name"
    );
    let empty = SkyMap::new(a.pixelization(), vec![f64::NAN; 768]).unwrap();
    assert_eq!(
        msg(write_map(&path, "T", &empty, &partial)),
        "a partial-sky file needs at least one valid pixel, and every pixel is invalid"
    );
    assert!(!path.exists());
}

/// A file whose HDU 1 is another binary table (`pixtype` given or absent) and HDU 2 a HEALPix
/// NSIDE 1 map with values 0..12.
fn map_after_a_catalogue(path: &std::path::Path, pixtype: Option<&str>) {
    use fitsio::tables::{ColumnDataType, ColumnDescription};
    let mut f = fitsio::FitsFile::create(path).open().unwrap();
    let ra = [ColumnDescription::new("RA")
        .with_type(ColumnDataType::Double)
        .create()
        .unwrap()];
    let cat = f.create_table("CATALOGUE", &ra).unwrap();
    cat.write_col(&mut f, "RA", &[1.0f64, 2.0]).unwrap();
    if let Some(p) = pixtype {
        cat.write_key(&mut f, "PIXTYPE", p).unwrap();
    }
    let t = [ColumnDescription::new("T")
        .with_type(ColumnDataType::Double)
        .create()
        .unwrap()];
    let hdu = f.create_table("SKY_MAP", &t).unwrap();
    let values: Vec<f64> = (0..12).map(f64::from).collect();
    hdu.write_col(&mut f, "T", &values).unwrap();
    hdu.write_key(&mut f, "PIXTYPE", "HEALPIX").unwrap();
    hdu.write_key(&mut f, "ORDERING", "NESTED").unwrap();
    hdu.write_key(&mut f, "NSIDE", 1i64).unwrap();
}

#[test]
fn healpix_table_after_another_binary_table_is_found() {
    let dir = tempfile::tempdir().unwrap();
    for (name, pixtype) in [("unlabelled.fits", None), ("other.fits", Some("CAR"))] {
        let path = dir.path().join(name);
        map_after_a_catalogue(&path, pixtype);
        let (map, h) = read_map(&path, &ColumnChoice::default()).unwrap();
        assert_eq!(h.hdu, 2, "{name}");
        assert!(h.warnings.is_empty(), "{name}: {:?}", h.warnings);
        assert_eq!(map.ordering(), Ordering::Nested);
        assert_eq!(map.get(11), Some(11.0));
    }
}

#[test]
fn any_repeat_count_that_fills_the_sky_is_read_in_pixel_order() {
    // The HEALPix FITS convention stores the Npix values row after row; 1024 per row is usual
    // but any repeat count with rows × repeat = 12·NSIDE² describes the same map.
    use fitsio::tables::{ColumnDataType, ColumnDescription};
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("repeat48.fits");
    let mut f = fitsio::FitsFile::create(&path).open().unwrap();
    let col = [ColumnDescription::new("T")
        .with_type(ColumnDataType::Double)
        .that_repeats(48)
        .create()
        .unwrap()];
    let hdu = f.create_table("SKY_MAP", &col).unwrap();
    let values: Vec<f64> = (0..192).map(|p| p as f64 * 0.5).collect();
    hdu.write_col(&mut f, "T", &values).unwrap();
    hdu.write_key(&mut f, "PIXTYPE", "HEALPIX").unwrap();
    hdu.write_key(&mut f, "ORDERING", "RING").unwrap();
    hdu.write_key(&mut f, "NSIDE", 4i64).unwrap();
    drop(f);
    let (map, h) = read_map(&path, &ColumnChoice::default()).unwrap();
    assert_eq!((h.rows, h.columns[0].values_per_row), (4, 48));
    assert_eq!(map.values(), &values[..]);
}
