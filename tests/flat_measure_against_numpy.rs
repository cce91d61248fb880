//! `planisphere measure FIELD.npy --pixel-arcmin A [--mask MASK.npy]`: flat fields measured by
//! the command line against the independent numpy implementation
//! (reference-values/flat_measure_reference.py, numpy 2.4.6: pixel-space Morlet filters on the
//! torus, numpy FFT circular convolution; fields written by numpy's own .npy writer, float64 and
//! float32), the masked path against the library's `flat::masked_coefficients` (the numpy
//! reference has no mask-aware estimator), and bad flat inputs refused in one line.

mod common;

use ndarray::Array2;
use planisphere::measure::flat::{masked_coefficients, FlatMap};
use planisphere::scattering::transform::{ScatteringEngine, TransformSettings};
use serde_json::Value;
use std::path::{Path, PathBuf};
use std::process::Command;

fn planisphere(args: &[&str], cwd: &Path) -> (Option<i32>, String, String) {
    let out = Command::new(env!("CARGO_BIN_EXE_planisphere"))
        .args(args)
        .current_dir(cwd)
        .output()
        .expect("run planisphere");
    (
        out.status.code(),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

fn reference(name: &str) -> (PathBuf, Value) {
    let dir = common::reference_path("flat_measure");
    let json = common::read_json(&format!("flat_measure/{name}.json"));
    (dir.join(format!("{name}.npy")), json)
}

fn read(path: &Path) -> Value {
    serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap()
}

fn num(v: &Value) -> f64 {
    v.as_f64().expect("number")
}

fn usize_of(v: &Value) -> Option<usize> {
    v.as_u64().map(|x| x as usize)
}

/// Largest relative deviation of every coefficient and band power of a `measure` document
/// from the numpy reference (mean: absolute), and how many were compared.
fn deviation(doc: &Value, reference: &Value) -> (f64, usize) {
    let mut worst: f64 = 0.0;
    let mut compared = 0;
    let mut check = |expected: f64, got: f64| {
        worst = worst.max(((got - expected) / expected).abs());
        compared += 1;
    };
    for c in doc["coefficients"].as_array().unwrap() {
        let value = num(&c["value"]);
        match (c["kind"].as_str().unwrap(), usize_of(&c["order"]).unwrap()) {
            ("mean", _) => {
                assert!((value - num(&reference["mean"])).abs() < 1e-12, "mean");
                check(1.0, 1.0);
            }
            ("variance", _) => check(num(&reference["variance"]), value),
            (_, 1) => {
                let (j, l) = (usize_of(&c["j1"]).unwrap(), usize_of(&c["l1"]).unwrap());
                check(num(&reference["first_order"][j][l]), value);
            }
            (_, 2) => {
                let (j1, l1) = (usize_of(&c["j1"]).unwrap(), usize_of(&c["l1"]).unwrap());
                let (j2, l2) = (usize_of(&c["j2"]).unwrap(), usize_of(&c["l2"]).unwrap());
                check(num(&reference["second_order"][j1][l1][j2][l2]), value);
            }
            other => panic!("unexpected coefficient {other:?}"),
        }
    }
    for c in doc["band_powers"].as_array().unwrap() {
        let (j, l) = (usize_of(&c["j1"]).unwrap(), usize_of(&c["l1"]).unwrap());
        check(num(&reference["band_power"][j][l]), num(&c["value"]));
    }
    (worst, compared)
}

const CASES: [&str; 2] = ["field_n48_J4_L4_float64", "field_n64_J5_L3_float32"];

fn measure_reference(name: &str, extra: &[&str]) -> (Value, Value) {
    let (npy, reference) = reference(name);
    let dir = tempfile::tempdir().unwrap();
    let arcmin = num(&reference["pixel_arcmin"]).to_string();
    let scales = reference["scales"].to_string();
    let orientations = reference["orientations"].to_string();
    let npy = npy.to_string_lossy().into_owned();
    let mut args = vec![
        "measure",
        &npy,
        "--pixel-arcmin",
        &arcmin,
        "-J",
        &scales,
        "-L",
        &orientations,
        "-o",
        "out.json",
    ];
    args.extend_from_slice(extra);
    let (code, out, err) = planisphere(&args, dir.path());
    assert_eq!(code, Some(0), "{err}");
    print!("{out}");
    (read(&dir.path().join("out.json")), reference)
}

#[test]
fn periodic_flat_measure_matches_numpy_reference_to_1e_10_at_full_resolution() {
    for name in CASES {
        let (doc, reference) = measure_reference(name, &["--full-resolution"]);
        let (worst, compared) = deviation(&doc, &reference);
        println!("{name}: {compared} values, max relative deviation {worst:.3e}");
        let n = usize_of(&reference["size"]).unwrap();
        let (j, l) = (
            usize_of(&reference["scales"]).unwrap(),
            usize_of(&reference["orientations"]).unwrap(),
        );
        // 2 + J·L + L²·J(J−1)/2 coefficients and J·L band powers
        assert_eq!(compared, 2 + j * l + l * l * j * (j - 1) / 2 + j * l);
        assert!(worst < 1e-10, "{name}: {worst:e}");
        // the document says what was measured, in the sphere's layout
        assert_eq!(doc["input"]["kind"], "flat field");
        assert_eq!(usize_of(&doc["input"]["pixels"]), Some(n));
        assert_eq!(doc["input"]["periodic"], true);
        assert_eq!(doc["settings"]["fourier_cropping"], false);
        assert_eq!(usize_of(&doc["settings"]["tile_pixels"]), Some(n));
        assert_eq!(usize_of(&doc["tiles_measured"]), Some(1));
        assert!(doc["summary"].as_array().is_some_and(|s| !s.is_empty()));
        assert!(doc["tile_power_spectrum"].is_object());
        // a periodic field keeps all its weight at every scale: everything is trusted
        for c in doc["coefficients"].as_array().unwrap() {
            assert_eq!(c["trusted"], true, "{c}");
        }
    }
}

#[test]
fn periodic_flat_measure_with_default_fourier_cropping_is_within_1e_3_of_numpy() {
    for name in CASES {
        let (doc, reference) = measure_reference(name, &[]);
        let (worst, compared) = deviation(&doc, &reference);
        println!("{name}: {compared} values, cropped, max relative deviation {worst:.3e}");
        assert_eq!(doc["settings"]["fourier_cropping"], true);
        assert!(worst < 1e-3, "{name}: {worst:e}");
    }
}

/// The "kind" a coefficient record carries (band powers carry none).
fn kind_name(kind: planisphere::scattering::statistics::CoefficientKind) -> Option<&'static str> {
    use planisphere::scattering::statistics::CoefficientKind::*;
    match kind {
        Mean => Some("mean"),
        Variance => Some("variance"),
        FirstOrder | SecondOrder => Some("scattering"),
        BandPower => None,
    }
}

#[test]
fn masked_flat_measure_equals_the_library_masked_estimator() {
    let (npy, reference) = reference("field_n48_J4_L4_float64");
    let n = 48;
    let field: Array2<f64> = ndarray_npy::read_npy(&npy).unwrap();
    let taper = common::holey_taper(n, 2.0, &[(30.0, 18.0, 5.0)], 6.0);
    let dir = tempfile::tempdir().unwrap();
    let mask = Array2::from_shape_vec((n, n), taper.clone()).unwrap();
    ndarray_npy::write_npy(dir.path().join("mask.npy"), &mask).unwrap();
    // a NaN where the mask is 0 is allowed (the taper removes it)
    let mut values: Vec<f64> = field.iter().copied().collect();
    let hole = taper.iter().position(|&a| a == 0.0).unwrap();
    values[hole] = f64::NAN;
    let with_nan = Array2::from_shape_vec((n, n), values.clone()).unwrap();
    ndarray_npy::write_npy(dir.path().join("field.npy"), &with_nan).unwrap();
    let arcmin = num(&reference["pixel_arcmin"]);
    let (code, out, err) = planisphere(
        &[
            "measure",
            "field.npy",
            "--mask",
            "mask.npy",
            "--pixel-arcmin",
            "2",
            "-J",
            "4",
            "-L",
            "4",
            "-o",
            "masked.json",
        ],
        dir.path(),
    );
    assert_eq!(code, Some(0), "{err}");
    print!("{out}");
    let doc = read(&dir.path().join("masked.json"));
    assert_eq!(doc["input"]["periodic"], false);
    values[hole] = 0.0;
    let map = FlatMap::new(n, (arcmin / 60.0).to_radians(), values)
        .unwrap()
        .with_mask(taper, None)
        .unwrap();
    let engine = ScatteringEngine::with_settings(n, 4, 4, TransformSettings::default()).unwrap();
    let set = masked_coefficients(&engine, &map).unwrap();
    let written: Vec<&Value> = doc["coefficients"]
        .as_array()
        .unwrap()
        .iter()
        .chain(doc["band_powers"].as_array().unwrap())
        .collect();
    let mut worst: f64 = 0.0;
    let mut untrusted = 0;
    for c in &set.coefficients {
        let l = &c.label;
        let w = written
            .iter()
            .find(|w| {
                usize_of(&w["order"]) == Some(l.order as usize)
                    && usize_of(&w["j1"]) == l.path.j1
                    && usize_of(&w["l1"]) == l.path.l1
                    && usize_of(&w["j2"]) == l.path.j2
                    && usize_of(&w["l2"]) == l.path.l2
                    && w.get("kind").and_then(Value::as_str) == kind_name(l.kind)
            })
            .unwrap_or_else(|| panic!("{l:?} not written"));
        worst = worst.max(((num(&w["value"]) - c.value) / c.value).abs());
        assert_eq!(w["trusted"], c.trusted, "{l:?}");
        untrusted += usize::from(!c.trusted);
    }
    println!(
        "masked 48²: {} values, {untrusted} untrusted, max relative difference from the library {worst:.3e}",
        set.coefficients.len()
    );
    assert_eq!(written.len(), set.coefficients.len());
    assert!(worst <= 1e-15, "{worst:e}");
}

#[test]
fn bad_flat_inputs_are_refused_in_one_line_without_output() {
    let dir = tempfile::tempdir().unwrap();
    let p = |name: &str| dir.path().join(name);
    let square = Array2::from_shape_fn((32, 32), |(i, j)| (i * 32 + j) as f64 * 1e-3);
    ndarray_npy::write_npy(p("field.npy"), &square).unwrap();
    ndarray_npy::write_npy(p("wide.npy"), &Array2::<f64>::zeros((32, 64))).unwrap();
    ndarray_npy::write_npy(p("ints.npy"), &Array2::<i64>::zeros((32, 32))).unwrap();
    ndarray_npy::write_npy(p("odd.npy"), &Array2::<f64>::zeros((50, 50))).unwrap();
    ndarray_npy::write_npy(p("mask16.npy"), &Array2::<f64>::ones((16, 16))).unwrap();
    let mut over = Array2::<f64>::ones((32, 32));
    over[[3, 5]] = 1.5;
    ndarray_npy::write_npy(p("mask_over.npy"), &over).unwrap();
    ndarray_npy::write_npy(p("mask_zero.npy"), &Array2::<f64>::zeros((32, 32))).unwrap();
    let mut nan = square.clone();
    nan[[2, 7]] = f64::NAN;
    ndarray_npy::write_npy(p("nan.npy"), &nan).unwrap();
    std::fs::write(p("text.npy"), "not an array\n").unwrap();
    let a = "--pixel-arcmin";
    let cases: Vec<(Vec<&str>, &str)> = vec![
        (
            vec!["wide.npy", a, "1"],
            "must be square, got 32 rows × 64 columns",
        ),
        (
            vec!["ints.npy", a, "1"],
            "2-D float64 or float32 .npy array",
        ),
        (
            vec!["text.npy", a, "1"],
            "2-D float64 or float32 .npy array",
        ),
        (
            vec!["odd.npy", a, "1"],
            "50 × 50 pixels: the side must be 2^k·m",
        ),
        (vec!["field.npy"], "needs --pixel-arcmin"),
        (vec!["field.npy", a, "-1"], "pixel size must be positive"),
        (
            vec!["field.npy", a, "1", "--mask", "mask16.npy"],
            "mask is 16 × 16 but the field is 32 × 32",
        ),
        (
            vec!["field.npy", a, "1", "--mask", "mask_over.npy"],
            "mask value 1.5 at row 3, column 5 is outside [0, 1]",
        ),
        (
            vec!["field.npy", a, "1", "--mask", "mask_zero.npy"],
            "the mask is 0 everywhere",
        ),
        (vec!["nan.npy", a, "1"], "value NaN at row 2, column 7"),
        (
            vec!["field.npy", a, "1", "--coarse-nside", "4"],
            "--coarse-nside applies to HEALPix maps only",
        ),
        (
            vec!["field.npy", a, "1", "--tile-pixels", "32"],
            "--tile-pixels (the field is the tile) applies to HEALPix maps only",
        ),
        (
            vec!["field.npy", a, "1", "--border-pixels", "4"],
            "--border-pixels applies to HEALPix maps only",
        ),
        (
            vec!["field.npy", a, "1", "--cross", "field.npy"],
            "--cross applies to HEALPix maps only",
        ),
        (
            vec!["field.npy", a, "1", "--taper-arcmin", "30"],
            "a flat mask is used as given",
        ),
        (vec!["field.npy", a, "1", "-J", "5"], "J = 5"),
    ];
    for (args, expected) in cases {
        let mut full = vec!["measure"];
        full.extend(&args);
        full.extend(["-o", "out.json"]);
        let (code, _, err) = planisphere(&full, dir.path());
        println!("{args:?}: {}", err.trim_end());
        assert_eq!(code, Some(2), "{args:?}: {err}");
        assert_eq!(err.trim_end().lines().count(), 1, "{args:?}: {err}");
        assert!(err.starts_with("planisphere: error: "), "{err}");
        assert!(
            err.contains(expected),
            "{args:?}: expected '{expected}' in: {err}"
        );
        assert!(!p("out.json").exists(), "{args:?} left an output");
        assert!(
            std::fs::read_dir(dir.path()).unwrap().all(|e| !e
                .unwrap()
                .file_name()
                .to_string_lossy()
                .contains("out.json")),
            "{args:?} left a temporary file"
        );
    }
}
