//! The `tiles` command: its report computed directly, and the command line end to end on small
//! HEALPix FITS files (binary table in HDU 1 with NSIDE/ORDERING keys, HEALPix FITS convention,
//! Hivon et al., HEALPix documentation).

use planisphere::cli::tiles::{draw_tiling, summary_lines, tiles_report};
use planisphere::measure::measurement::MeasurementSettings;
use planisphere::tiles::tiling::{TilingPlan, TilingSettings};
use planisphere::{Direction, Footprint, Ordering, Pixelization, SkyMap};
use std::path::Path;
use std::process::Command;

fn galactic_cut(pix: Pixelization) -> Footprint {
    Footprint::from_fn(pix, |d: Direction| d.lat().abs() > 20f64.to_radians())
}

fn write_healpix(path: &Path, nside: u32, ordering: &str, values: &[f64]) {
    use fitsio::tables::{ColumnDataType, ColumnDescription};
    let _ = std::fs::remove_file(path);
    let mut f = fitsio::FitsFile::create(path).open().unwrap();
    let col = ColumnDescription::new("SIGNAL")
        .with_type(ColumnDataType::Double)
        .create()
        .unwrap();
    let hdu = f.create_table("xtension".to_string(), &[col]).unwrap();
    hdu.write_key(&mut f, "PIXTYPE", "HEALPIX").unwrap();
    hdu.write_key(&mut f, "ORDERING", ordering).unwrap();
    hdu.write_key(&mut f, "NSIDE", nside as i64).unwrap();
    hdu.write_key(&mut f, "INDXSCHM", "IMPLICIT").unwrap();
    hdu.write_col(&mut f, "SIGNAL", values).unwrap();
}

#[test]
fn report_counts_tiles_and_areas_of_the_footprint() {
    // |b| > 20° covers 1 − sin 20° of the sphere (spherical zone area, elementary geometry),
    // to the pixelisation at NSIDE 64.
    let pix = Pixelization::new(64, Ordering::Ring).unwrap();
    let map = SkyMap::from_fn(pix, |d| d.theta.cos());
    let mask = galactic_cut(pix);
    let healpix4 = MeasurementSettings {
        coarse_nside: Some(4),
        scales: 2,
        border_pixels: 2,
        ..MeasurementSettings::default()
    };
    let report = tiles_report(&map, &mask, &healpix4).unwrap();
    let s = &report.summary;
    let exact = 4.0 * std::f64::consts::PI * (1.0 - 20f64.to_radians().sin());
    assert!(
        (s.footprint_area_sr - exact).abs() < 0.01 * exact,
        "{}",
        s.footprint_area_sr
    );
    assert_eq!(s.tiles, report.tiles.len());
    // Coarse NSIDE 4 rings at |b| < 20° are partly kept: between the 96 fully-observed-side
    // pixels and all 192.
    assert!(s.tiles > 96 && s.tiles < 192, "{}", s.tiles);
    let fraction_sum: f64 = report.tiles.iter().map(|t| t.footprint_pixels as f64).sum();
    assert_eq!(fraction_sum as u64, mask.observed_pixels());
    assert_eq!(summary_lines(s).len(), 6);
    // Bad map pixels shrink the footprint.
    let holed = SkyMap::from_fn(pix, |d| {
        if d.lat() > 60f64.to_radians() {
            f64::NAN
        } else {
            1.0
        }
    });
    let less = tiles_report(&holed, &mask, &healpix4).unwrap();
    assert!(less.summary.footprint_area_sr < s.footprint_area_sr);
    assert!(less.summary.tiles < s.tiles);
}

#[test]
fn tiling_picture_is_a_png_and_leaves_no_partial_file() {
    let dir = tempfile::tempdir().unwrap();
    let pix = Pixelization::new(32, Ordering::Nested).unwrap();
    let mask = galactic_cut(pix);
    let plan = TilingPlan::new(pix, &mask, &TilingSettings::healpix_pixels(2)).unwrap();
    let path = dir.path().join("tiles.png");
    draw_tiling(&plan, &mask, &path).unwrap();
    let bytes = std::fs::read(&path).unwrap();
    // PNG signature (PNG specification, ISO/IEC 15948, §5.2).
    assert_eq!(&bytes[..8], &[137, 80, 78, 71, 13, 10, 26, 10]);
    let names: Vec<_> = std::fs::read_dir(dir.path()).unwrap().collect();
    assert_eq!(names.len(), 1, "{names:?}");
    // A missing directory is a one-line error, not a panic.
    let err = draw_tiling(&plan, &mask, &dir.path().join("nope/tiles.png")).unwrap_err();
    assert!(
        err.to_string().contains("directory does not exist"),
        "{err}"
    );
}

#[test]
fn command_prints_summary_and_writes_json_and_png() {
    let dir = tempfile::tempdir().unwrap();
    let nside = 32;
    let pix = Pixelization::new(nside, Ordering::Ring).unwrap();
    let values: Vec<f64> = (0..pix.npix()).map(|p| pix.center(p).theta.cos()).collect();
    let mask: Vec<f64> = (0..pix.npix())
        .map(|p| f64::from(u8::from(pix.center(p).lat().abs() > 20f64.to_radians())))
        .collect();
    let (map_path, mask_path) = (dir.path().join("map.fits"), dir.path().join("mask.fits"));
    write_healpix(&map_path, nside, "RING", &values);
    write_healpix(&mask_path, nside, "RING", &mask);
    let (json, png) = (dir.path().join("plan.json"), dir.path().join("plan.png"));
    let out = Command::new(env!("CARGO_BIN_EXE_planisphere"))
        .arg("tiles")
        .arg(&map_path)
        .arg("--mask")
        .arg(&mask_path)
        .args(["-J", "2", "--border-pixels", "2", "--json"])
        .arg(&json)
        .arg("--png")
        .arg(&png)
        .output()
        .unwrap();
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert!(
        out.status.success(),
        "{stdout} {}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(stdout.contains("tiles: "), "{stdout}");
    let plan: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&json).unwrap()).unwrap();
    let tiles = plan["summary"]["tiles"].as_u64().unwrap();
    assert_eq!(plan["tiles"].as_array().unwrap().len() as u64, tiles);
    assert_eq!(plan["summary"]["map_nside"].as_u64(), Some(32));
    assert!(std::fs::metadata(&png).unwrap().len() > 1000);
    // `measure` with the same options works on exactly the plan `tiles` previewed.
    let measured = dir.path().join("measured.json");
    let out = Command::new(env!("CARGO_BIN_EXE_planisphere"))
        .arg("measure")
        .arg(&map_path)
        .arg("--mask")
        .arg(&mask_path)
        .args(["-J", "2", "--border-pixels", "2", "--no-bispectrum", "-o"])
        .arg(&measured)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let m: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&measured).unwrap()).unwrap();
    for key in [
        "tiles",
        "tile_pixels",
        "cells",
        "halo_pixels",
        "pixel_size_arcmin",
        "tile_pixels_per_footprint_pixel",
    ] {
        assert_eq!(m["tiling"][key], plan["summary"][key], "{key}");
    }
}

#[test]
fn command_reports_bad_input_in_one_line() {
    let dir = tempfile::tempdir().unwrap();
    let nside = 16;
    let pix = Pixelization::new(nside, Ordering::Ring).unwrap();
    let map_path = dir.path().join("map.fits");
    write_healpix(&map_path, nside, "RING", &vec![1.0; pix.npix() as usize]);
    let small_mask = dir.path().join("mask8.fits");
    write_healpix(&small_mask, 8, "RING", &vec![1.0; 768]);
    let run = |args: &[&str]| {
        let out = Command::new(env!("CARGO_BIN_EXE_planisphere"))
            .arg("tiles")
            .args(args)
            .output()
            .unwrap();
        (
            out.status.code(),
            String::from_utf8_lossy(&out.stderr).into_owned(),
        )
    };
    let m = map_path.to_str().unwrap();
    let cases: Vec<(Vec<&str>, &str)> = vec![
        (vec!["/nonexistent/map.fits"], "no such file"),
        (vec![m, "--coarse-nside", "3"], "power of two"),
        (vec![m, "--tile-pixels", "8"], "too large for 8-pixel tiles"),
        (vec![m, "--pixel-arcmin", "-2"], "must be positive"),
        (
            vec![m, "--mask", small_mask.to_str().unwrap()],
            "does not match",
        ),
        (vec![m, "--column", "7"], "there is no value column 7"),
    ];
    for (args, words) in cases {
        let (code, stderr) = run(&args);
        assert_eq!(code, Some(2), "{args:?}: {stderr}");
        assert!(stderr.contains(words), "{args:?}: {stderr}");
        assert_eq!(stderr.trim_end().lines().count(), 1, "{stderr}");
    }
}
