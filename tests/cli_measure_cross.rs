//! `planisphere measure MAP --cross OTHER`: the JSON holds both maps' statistics and the cross
//! set; a map crossed with a NESTED copy of itself gives cross band powers equal to its band
//! powers (identity of the definition in src/scattering/transform.rs, after re-ordering per Górski et al.
//! 2005), and the first map's statistics equal those of `measure` alone on the same footprint.

use planisphere::io::fits_io::{write_map, WriteOptions};
use planisphere::{Ordering, Pixelization, SkyMap};
use serde_json::Value;
use std::process::Command;

fn measure(dir: &std::path::Path, args: &[&str]) -> Value {
    let out = dir.join("out.json");
    let _ = std::fs::remove_file(&out);
    let status = Command::new(env!("CARGO_BIN_EXE_planisphere"))
        .arg("measure")
        .args(args)
        .args(["-J", "3", "--tile-pixels", "32", "--no-bispectrum", "-o"])
        .arg(&out)
        .current_dir(dir)
        .output()
        .unwrap();
    assert!(
        status.status.success(),
        "{}",
        String::from_utf8_lossy(&status.stderr)
    );
    serde_json::from_str(&std::fs::read_to_string(&out).unwrap()).unwrap()
}

fn values(records: &Value) -> Vec<f64> {
    records
        .as_array()
        .unwrap()
        .iter()
        .map(|r| r["value"].as_f64().unwrap_or(f64::NAN))
        .collect()
}

#[test]
fn map_crossed_with_its_nested_copy_has_cross_band_powers_equal_to_its_band_powers() {
    let dir = tempfile::tempdir().unwrap();
    let pix = Pixelization::new(32, Ordering::Ring).unwrap();
    // invented smooth test sky with structure at several scales
    let map = SkyMap::from_fn(pix, |d| {
        (3.0 * d.phi).sin() * d.theta.sin() + 0.3 * (11.0 * d.theta).cos() * (7.0 * d.phi).cos()
    });
    let nested = map.to_ordering(Ordering::Nested).unwrap();
    let other = SkyMap::from_fn(pix, |d| (5.0 * d.phi + 2.0 * d.theta).cos());
    let opts = WriteOptions::default();
    write_map(&dir.path().join("a.fits"), "SIGNAL", &map, &opts).unwrap();
    write_map(&dir.path().join("a_nest.fits"), "SIGNAL", &nested, &opts).unwrap();
    write_map(&dir.path().join("b.fits"), "SIGNAL", &other, &opts).unwrap();

    let alone = measure(dir.path(), &["a.fits"]);
    let with_self = measure(dir.path(), &["a.fits", "--cross", "a_nest.fits"]);
    let cross = &with_self["cross"];
    let bands = values(&with_self["band_powers"]);
    let cross_bands = values(&cross["cross_band_powers"]);
    assert_eq!(bands.len(), 3 * 4);
    assert_eq!(cross_bands.len(), bands.len());
    for (x, p) in cross_bands.iter().zip(&bands) {
        assert!(((x - p) / p).abs() < 1e-12, "{x} vs {p}");
    }
    // the second map's own statistics are those of the first (same sky)
    assert_eq!(
        values(&cross["map_statistics"]["band_powers"]),
        bands,
        "re-ordered copy measured differently"
    );
    // the first map's statistics do not change when a second map is measured with it
    assert_eq!(
        values(&alone["coefficients"]),
        values(&with_self["coefficients"])
    );
    assert_eq!(values(&alone["band_powers"]), bands);

    // a different second map: every section present, with its labels, sizes and names
    let pair = measure(dir.path(), &["a.fits", "--cross", "b.fits"]);
    let cross = &pair["cross"];
    assert_eq!(
        cross["envelope_first_order"].as_array().unwrap().len(),
        2 * 3 * 4
    );
    assert_eq!(
        cross["envelope_second_order"].as_array().unwrap().len(),
        2 * 3 * 4 * 4
    );
    let first = &cross["envelope_first_order"][0];
    assert_eq!(first["field"], "first");
    assert_eq!(first["modulus_of"], "second");
    assert_eq!(first["name"], "cross_envelope1_a_on_b_j0_l0");
    let last = cross["envelope_second_order"]
        .as_array()
        .unwrap()
        .last()
        .unwrap();
    assert_eq!(last["field"], "second");
    assert_eq!(last["name"], "cross_envelope2_b_on_a_j1_l3_j2_l3");
    let pb = values(&cross["cross_band_powers"]);
    assert!(pb
        .iter()
        .zip(&bands)
        .any(|(x, p)| (x - p).abs() > 1e-3 * p.abs()));
}
