//! Helpers shared by the FITS tests: small maps, header-card editing and hand-made tables.
#![allow(dead_code)]

use fitsio::tables::{ColumnDataType, ColumnDescription};
use fitsio::FitsFile;
use planisphere::io::fits_io::{write_map, WriteOptions};
use planisphere::{Ordering, Pixelization, SkyMap};
use std::path::{Path, PathBuf};

/// A map whose value at pixel p is 0.25·p − 3 (exact in float32 and float64 for small p).
pub fn ramp_map(nside: u32, ordering: Ordering) -> SkyMap {
    let pix = Pixelization::new(nside, ordering).unwrap();
    SkyMap::new(
        pix,
        (0..pix.npix()).map(|p| 0.25 * p as f64 - 3.0).collect(),
    )
    .unwrap()
}

/// Writes `ramp_map` as a float64 full-sky file named `name` in `dir` with column 'T'.
pub fn good_file(dir: &Path, name: &str, nside: u32, ordering: Ordering) -> PathBuf {
    let path = dir.join(name);
    write_map(
        &path,
        "T",
        &ramp_map(nside, ordering),
        &WriteOptions::default(),
    )
    .unwrap();
    path
}

/// Replaces the first header card whose keyword is `key` by `key = value` (or by a blank card
/// when `value` is `None`). Panics if the keyword is absent (a test set-up error).
pub fn edit_card(path: &Path, key: &str, value: Option<&str>) {
    let mut bytes = std::fs::read(path).unwrap();
    let wanted = format!("{key:<8}");
    let at = (0..bytes.len() / 80)
        .map(|i| i * 80)
        .find(|&o| &bytes[o..o + 8] == wanted.as_bytes())
        .unwrap_or_else(|| panic!("no {key} card in {}", path.display()));
    let card = match value {
        Some(v) => format!("{key:<8}= {v}"),
        None => String::new(),
    };
    let card = format!("{card:<80}");
    assert_eq!(card.len(), 80, "card too long: {card}");
    bytes[at..at + 80].copy_from_slice(card.as_bytes());
    std::fs::write(path, bytes).unwrap();
}

/// Keeps only the first `len` bytes of a file.
pub fn truncate(path: &Path, len: u64) {
    let f = std::fs::OpenOptions::new().write(true).open(path).unwrap();
    f.set_len(len).unwrap();
}

/// A partial-sky table written with the `fitsio` crate: a 64-bit PIXEL column and a float64
/// 'SIGNAL' column, with the given header keywords (string values quoted by the caller's choice).
pub fn partial_table(path: &Path, pixels: &[i64], values: &[f64], keys: &[(&str, KeyText)]) {
    let mut f = FitsFile::create(path).open().unwrap();
    let cols = [
        ColumnDescription::new("PIXEL")
            .with_type(ColumnDataType::LongLong)
            .create()
            .unwrap(),
        ColumnDescription::new("SIGNAL")
            .with_type(ColumnDataType::Double)
            .create()
            .unwrap(),
    ];
    let hdu = f.create_table("SKY_MAP", &cols).unwrap();
    hdu.write_col(&mut f, "PIXEL", pixels).unwrap();
    hdu.write_col(&mut f, "SIGNAL", values).unwrap();
    write_keys(&mut f, &hdu, keys);
}

/// A full-sky table of `rows` rows with a float64 column 'T' and an 8-character text column
/// 'NAME', written with the `fitsio` crate.
pub fn table_with_text_column(path: &Path, nside: i64) {
    let npix = (12 * nside * nside) as usize;
    let mut f = FitsFile::create(path).open().unwrap();
    let cols = [
        ColumnDescription::new("T")
            .with_type(ColumnDataType::Double)
            .create()
            .unwrap(),
        ColumnDescription::new("NAME")
            .with_type(ColumnDataType::String)
            .that_repeats(8)
            .create()
            .unwrap(),
    ];
    let hdu = f.create_table("SKY_MAP", &cols).unwrap();
    hdu.write_col(&mut f, "T", &vec![1.0f64; npix]).unwrap();
    hdu.write_col(&mut f, "NAME", &vec!["abc".to_string(); npix])
        .unwrap();
    write_keys(
        &mut f,
        &hdu,
        &[
            ("PIXTYPE", KeyText::Text("HEALPIX")),
            ("ORDERING", KeyText::Text("RING")),
            ("NSIDE", KeyText::Int(nside)),
        ],
    );
}

/// A header value for the hand-made tables.
pub enum KeyText {
    Text(&'static str),
    Int(i64),
}

fn write_keys(f: &mut FitsFile, hdu: &fitsio::hdu::FitsHdu, keys: &[(&str, KeyText)]) {
    for (k, v) in keys {
        match v {
            KeyText::Text(t) => hdu.write_key(f, k, *t).unwrap(),
            KeyText::Int(i) => hdu.write_key(f, k, *i).unwrap(),
        }
    }
}

/// The standard keywords of a partial-sky NSIDE 8 RING table.
pub fn partial_keys() -> Vec<(&'static str, KeyText)> {
    vec![
        ("PIXTYPE", KeyText::Text("HEALPIX")),
        ("ORDERING", KeyText::Text("RING")),
        ("NSIDE", KeyText::Int(8)),
        ("INDXSCHM", KeyText::Text("EXPLICIT")),
        ("OBJECT", KeyText::Text("PARTIAL")),
    ]
}

/// A table made with raw cfitsio calls: `binary` or ASCII, `rows` rows of zero bytes, columns
/// given as (name, TFORM), and string keywords. Lets tests build tables the `fitsio` crate cannot
/// (ASCII tables, complex or logical or variable-length columns).
pub fn raw_table(
    path: &Path,
    binary: bool,
    rows: i64,
    columns: &[(&str, &str)],
    keys: &[(&str, &str)],
) {
    use fitsio::sys;
    use std::ffi::CString;
    let c = |s: &str| CString::new(s).unwrap();
    let cpath = c(path.to_str().unwrap());
    let names: Vec<CString> = columns.iter().map(|(n, _)| c(n)).collect();
    let forms: Vec<CString> = columns.iter().map(|(_, f)| c(f)).collect();
    let mut name_ptrs: Vec<*mut std::os::raw::c_char> =
        names.iter().map(|s| s.as_ptr() as *mut _).collect();
    let mut form_ptrs: Vec<*mut std::os::raw::c_char> =
        forms.iter().map(|s| s.as_ptr() as *mut _).collect();
    let mut fptr = std::ptr::null_mut();
    let mut status = 0;
    let ext = c("RAW");
    // SAFETY: plain cfitsio calls on a new file with valid NUL-terminated strings.
    unsafe {
        sys::ffdkinit(&mut fptr, cpath.as_ptr(), &mut status);
        sys::ffcrim(fptr, 8, 0, std::ptr::null_mut(), &mut status);
        sys::ffcrtb(
            fptr,
            if binary { 2 } else { 1 },
            rows,
            names.len() as i32,
            name_ptrs.as_mut_ptr(),
            form_ptrs.as_mut_ptr(),
            std::ptr::null_mut(),
            ext.as_ptr(),
            &mut status,
        );
        for (k, v) in keys {
            let (k, v) = (c(k), c(v));
            sys::ffpkys(fptr, k.as_ptr(), v.as_ptr(), std::ptr::null(), &mut status);
        }
        sys::ffclos(fptr, &mut status);
    }
    assert_eq!(
        status,
        0,
        "cfitsio status {status} making {}",
        path.display()
    );
}
