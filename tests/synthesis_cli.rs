//! `planisphere synthesize` run as a user runs it: the built binary on a small target map and on
//! bad inputs (one-line error, exit code 2, no output left behind).

use ndarray::Array2;
use std::path::Path;
use std::process::Command;

struct Run {
    code: i32,
    stdout: String,
    stderr: String,
}

fn synthesize(dir: &Path, args: &[&str]) -> Run {
    let out = Command::new(env!("CARGO_BIN_EXE_planisphere"))
        .current_dir(dir)
        .arg("synthesize")
        .args(args)
        .output()
        .unwrap();
    let run = Run {
        code: out.status.code().unwrap_or(-1),
        stdout: String::from_utf8_lossy(&out.stdout).into_owned(),
        stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
    };
    assert!(!run.stderr.contains("panicked"), "{}", run.stderr);
    run
}

/// A smooth positive-skewed 32 × 32 periodic test map (exponential of a sum of sinusoids).
fn write_target(path: &Path) {
    let n = 32;
    let map = Array2::from_shape_fn((n, n), |(iy, ix)| {
        let (x, y) = (ix as f64, iy as f64);
        let t = 2.0 * std::f64::consts::PI / n as f64;
        let g = (t * x).sin()
            + (2.0 * t * y + 1.0).cos()
            + 0.5 * (3.0 * t * (x + y)).sin()
            + 0.3 * (5.0 * t * x - 7.0 * t * y).cos();
        (0.7 * g).exp()
    });
    ndarray_npy::write_npy(path, &map).unwrap();
}

#[test]
fn synthesize_writes_field_and_panel() {
    let dir = tempfile::tempdir().unwrap();
    write_target(&dir.path().join("target.npy"));
    let run = synthesize(
        dir.path(),
        &[
            "--target",
            "target.npy",
            "-o",
            "field.npy",
            "--scales",
            "3",
            "--iterations",
            "40",
            "--seed",
            "3",
        ],
    );
    assert_eq!(run.code, 0, "{}", run.stderr);
    let field: Array2<f64> = ndarray_npy::read_npy(dir.path().join("field.npy")).unwrap();
    assert_eq!(field.dim(), (32, 32));
    assert!(field.iter().all(|v| v.is_finite()));
    let png = std::fs::read(dir.path().join("field.png")).unwrap();
    assert_eq!(&png[..8], b"\x89PNG\r\n\x1a\n");
    // The loss went down: "loss A -> B".
    let line = run.stdout.lines().find(|l| l.starts_with("loss ")).unwrap();
    let parts: Vec<&str> = line.split_whitespace().collect();
    let (a, b): (f64, f64) = (parts[1].parse().unwrap(), parts[3].parse().unwrap());
    assert!(b < 0.1 * a, "{line}");
    // No temporary files left.
    let names: Vec<String> = std::fs::read_dir(dir.path())
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    assert!(names.iter().all(|n| !n.contains("partial")), "{names:?}");
}

#[test]
fn synthesize_rejects_bad_input_with_one_line_error() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    write_target(&d.join("target.npy"));
    ndarray_npy::write_npy(d.join("rect.npy"), &Array2::<f64>::zeros((8, 16))).unwrap();
    ndarray_npy::write_npy(
        d.join("cube.npy"),
        &ndarray::Array3::<f64>::zeros((2, 2, 2)),
    )
    .unwrap();
    ndarray_npy::write_npy(d.join("odd.npy"), &Array2::<f64>::ones((24, 24))).unwrap();
    std::fs::write(d.join("coeffs.json"), "{\"coefficients\": []}").unwrap();
    std::fs::write(d.join("notes.txt"), "hello").unwrap();
    let cases: Vec<(Vec<&str>, &str)> = vec![
        (
            vec!["--target", "missing.npy", "-o", "f.npy"],
            "missing.npy",
        ),
        (vec!["--target", "rect.npy", "-o", "f.npy"], "square"),
        (vec!["--target", "cube.npy", "-o", "f.npy"], "2D float64"),
        (vec!["--target", "odd.npy", "-o", "f.npy"], "power of two"),
        (
            vec!["--target", "notes.txt", "-o", "f.npy"],
            ".npy flat map",
        ),
        (
            vec!["--target", "target.npy", "-o", "f.txt"],
            "must end in .npy",
        ),
        (
            vec!["--target", "target.npy", "-o", "f.npy", "--scales", "5"],
            "too large",
        ),
        (
            vec![
                "--target",
                "target.npy",
                "-o",
                "f.npy",
                "--orientations",
                "1",
                "--statistics",
                "summary",
            ],
            "at least 2 orientations",
        ),
        (
            vec!["--target", "target.npy", "-o", "f.npy", "--iterations", "0"],
            "iterations",
        ),
        (
            vec!["--target", "target.npy", "-o", "f.npy", "--pixel-arcmin=-1"],
            "pixel-arcmin",
        ),
        (vec!["--target", "coeffs.json", "-o", "f.npy"], "--size"),
        (
            vec![
                "--target",
                "coeffs.json",
                "-o",
                "f.npy",
                "--size",
                "32",
                "--scales",
                "3",
            ],
            "lacks",
        ),
        (
            vec![
                "--target",
                "coeffs.json",
                "-o",
                "f.npy",
                "--size",
                "32",
                "--start",
                "gaussian",
            ],
            "lacks",
        ),
        (
            vec![
                "--target",
                "coeffs.json",
                "-o",
                "f.npy",
                "--size",
                "32",
                "--field-envelope-correlation",
                "on",
            ],
            "needs a target map",
        ),
        (
            vec![
                "--target",
                "target.npy",
                "-o",
                "f.npy",
                "--field-envelope-correlation",
                "maybe",
            ],
            "maybe",
        ),
        (
            vec![
                "--target",
                "target.npy",
                "-o",
                "nodir/f.npy",
                "--iterations",
                "2",
            ],
            "directory",
        ),
    ];
    for (args, needle) in cases {
        let run = synthesize(d, &args);
        assert_eq!(run.code, 2, "{args:?}: {}", run.stderr);
        assert_eq!(run.stderr.lines().count(), 1, "{args:?}: {}", run.stderr);
        assert!(
            run.stderr.starts_with("planisphere: error: "),
            "{}",
            run.stderr
        );
        assert!(run.stderr.contains(needle), "{args:?}: {}", run.stderr);
        assert!(!d.join("f.npy").exists(), "{args:?}");
    }
}

/// A coefficient file (as serialised from a measured coefficient set) as the target: white
/// start, two-image panel.
#[test]
fn synthesize_accepts_a_coefficient_file_target() {
    use planisphere::measure::flat::{periodic_coefficients, FlatMap};
    use planisphere::scattering::transform::ScatteringEngine;
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    write_target(&d.join("target.npy"));
    let map: Array2<f64> = ndarray_npy::read_npy(d.join("target.npy")).unwrap();
    let engine = ScatteringEngine::new(32, 3, 4).unwrap();
    let flat = FlatMap::new(32, 1e-3, map.iter().copied().collect()).unwrap();
    let set = periodic_coefficients(&engine, &flat).unwrap();
    std::fs::write(d.join("coeffs.json"), serde_json::to_string(&set).unwrap()).unwrap();
    let run = synthesize(
        d,
        &[
            "--target",
            "coeffs.json",
            "-o",
            "field.npy",
            "--size",
            "32",
            "--scales",
            "3",
            "--iterations",
            "40",
        ],
    );
    assert_eq!(run.code, 0, "{}", run.stderr);
    let field: Array2<f64> = ndarray_npy::read_npy(d.join("field.npy")).unwrap();
    assert_eq!(field.dim(), (32, 32));
    assert!(d.join("field.png").is_file());
    let line = run.stdout.lines().find(|l| l.starts_with("loss ")).unwrap();
    let parts: Vec<&str> = line.split_whitespace().collect();
    let (a, b): (f64, f64) = (parts[1].parse().unwrap(), parts[3].parse().unwrap());
    assert!(b < 0.1 * a, "{line}");
}

/// HEALPix fixtures of the sphere mode: a Gaussian sky (demo spectrum, NSIDE 32) and a binary
/// 20° cap mask (invented data).
fn write_sphere_fixtures(dir: &Path) {
    use planisphere::harmonics::spectrum::AngularSpectrum;
    use planisphere::io::fits_io::{write_footprint, write_map, WriteOptions};
    use planisphere::simulate::skies::SkyRecipe;
    use planisphere::{Direction, Footprint, Ordering, Pixelization};
    let recipe = SkyRecipe::gaussian(32, AngularSpectrum::demo_model(95, 1.0), 4);
    let sky = recipe.realise(&recipe.transform().unwrap(), 0).unwrap();
    write_map(
        &dir.join("sky32.fits"),
        "SIGNAL",
        &sky,
        &WriteOptions::default(),
    )
    .unwrap();
    let pix = Pixelization::new(32, Ordering::Ring).unwrap();
    let c = Direction::from_lonlat_deg(40.0, 30.0);
    let cap = Footprint::from_fn(pix, |d| d.distance(&c) < 20f64.to_radians());
    write_footprint(
        &dir.join("cap32.fits"),
        "MASK",
        &cap,
        &WriteOptions::default(),
    )
    .unwrap();
}

const SPHERE_SETTINGS: [&str; 8] = [
    "--scales",
    "3",
    "--tile-pixels",
    "32",
    "--border-pixels",
    "4",
    "--taper-arcmin",
    "240",
];

fn loss_drop(stdout: &str) -> (f64, f64) {
    let line = stdout.lines().find(|l| l.starts_with("loss ")).unwrap();
    let parts: Vec<&str> = line.split_whitespace().collect();
    (parts[1].parse().unwrap(), parts[3].parse().unwrap())
}

#[test]
fn sphere_mode_writes_a_healpix_map_on_the_footprint_and_a_mollweide_panel() {
    use planisphere::io::fits_io::{read_footprint, read_map, ColumnChoice};
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    write_sphere_fixtures(d);
    let mut args = vec![
        "--target",
        "sky32.fits",
        "--mask",
        "cap32.fits",
        "-o",
        "synth.fits",
        "--iterations",
        "30",
    ];
    args.extend(SPHERE_SETTINGS);
    let run = synthesize(d, &args);
    assert_eq!(run.code, 0, "{}", run.stderr);
    let (a, b) = loss_drop(&run.stdout);
    assert!(b < 0.1 * a, "{}", run.stdout);
    let (map, _) = read_map(&d.join("synth.fits"), &ColumnChoice::parse("0")).unwrap();
    let (mask, _) = read_footprint(&d.join("cap32.fits"), &ColumnChoice::parse("0")).unwrap();
    assert_eq!(map.nside(), 32);
    let mask = mask.to_ordering(map.ordering()).unwrap();
    // valid exactly on the mask's footprint (UNSEEN elsewhere)
    for (p, (&ok, &w)) in map.valid().iter().zip(mask.weights()).enumerate() {
        assert_eq!(ok, w > 0.0, "pixel {p}");
    }
    let png = std::fs::read(d.join("synth.png")).unwrap();
    assert_eq!(&png[..8], b"\x89PNG\r\n\x1a\n");
    // the picture's one-point numbers are printed for target, Gaussian sky and result
    for who in ["target", "Gaussian, same spectrum", "synthesised"] {
        assert!(
            run.stdout
                .lines()
                .any(|l| l.starts_with(&format!("{who}: skewness"))
                    && l.contains("peaks above mean")),
            "{}",
            run.stdout
        );
    }
    let names: Vec<String> = std::fs::read_dir(d)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    assert!(names.iter().all(|n| !n.contains("partial")), "{names:?}");
}

/// The coefficient file of `planisphere measure` as a sphere target (white start).
#[test]
fn sphere_mode_accepts_a_measured_coefficient_file() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    write_sphere_fixtures(d);
    let out = Command::new(env!("CARGO_BIN_EXE_planisphere"))
        .current_dir(d)
        .args([
            "measure",
            "sky32.fits",
            "--mask",
            "cap32.fits",
            "--taper-arcmin",
            "240",
            "-J",
            "3",
            "--tile-pixels",
            "32",
            "--border-pixels",
            "4",
            "--no-bispectrum",
            "-o",
            "stats.json",
        ])
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let mut args = vec![
        "--target",
        "stats.json",
        "--mask",
        "cap32.fits",
        "-o",
        "synth.fits",
        "--iterations",
        "30",
    ];
    args.extend(SPHERE_SETTINGS);
    let run = synthesize(d, &args);
    assert_eq!(run.code, 0, "{}", run.stderr);
    let (a, b) = loss_drop(&run.stdout);
    assert!(b < 0.1 * a, "{}", run.stdout);
    assert!(d.join("synth.fits").is_file() && d.join("synth.png").is_file());
}

/// One tile of a HEALPix map as a flat target.
#[test]
fn flat_mode_takes_a_tile_of_a_sphere_map() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    write_sphere_fixtures(d);
    let mut args = vec![
        "--target",
        "sky32.fits",
        "--mask",
        "cap32.fits",
        "--tile",
        "1",
        "-o",
        "tile.npy",
        "--iterations",
        "30",
    ];
    args.extend(SPHERE_SETTINGS);
    let run = synthesize(d, &args);
    assert_eq!(run.code, 0, "{}", run.stderr);
    let field: Array2<f64> = ndarray_npy::read_npy(d.join("tile.npy")).unwrap();
    assert_eq!(field.dim(), (32, 32));
    let (a, b) = loss_drop(&run.stdout);
    assert!(b < 0.1 * a, "{}", run.stdout);
}
