//! `planisphere plot` run as a user runs it: the built binary writes PNG and SVG pictures from
//! files made here, and refuses bad inputs with one line and exit code 2, leaving no file.

use planisphere::harmonics::spectrum::AngularSpectrum;
use planisphere::io::fits_io::{write_map, WriteOptions};
use planisphere::simulate::skies::SkyRecipe;
use std::path::{Path, PathBuf};
use std::process::Command;

/// The PNG signature (PNG specification, ISO/IEC 15948:2004, §5.2).
const PNG_SIGNATURE: [u8; 8] = [0x89, b'P', b'N', b'G', 0x0D, 0x0A, 0x1A, 0x0A];

struct Run {
    code: i32,
    stdout: String,
    stderr: String,
}

fn planisphere(args: &[&str]) -> Run {
    let out = Command::new(env!("CARGO_BIN_EXE_planisphere"))
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

fn s(p: &Path) -> &str {
    p.to_str().unwrap()
}

/// A Gaussian NSIDE 32 sky written as FITS, and its measurement JSON (written by `measure`).
fn sky_and_measurement(dir: &Path, name: &str, seed: u64) -> (PathBuf, PathBuf) {
    let recipe = SkyRecipe::gaussian(32, AngularSpectrum::demo_model(95, 1e-4), seed);
    let map = recipe.realise(&recipe.transform().unwrap(), 0).unwrap();
    let fits = dir.join(format!("{name}.fits"));
    write_map(&fits, "SIGNAL", &map, &WriteOptions::default()).unwrap();
    let json = dir.join(format!("{name}.json"));
    let run = planisphere(&[
        "measure",
        s(&fits),
        "-J",
        "3",
        "--tile-pixels",
        "32",
        "--no-bispectrum",
        "-o",
        s(&json),
    ]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    (fits, json)
}

fn assert_png(path: &Path) {
    let bytes = std::fs::read(path).unwrap();
    assert!(bytes.len() > 1000, "{} bytes", bytes.len());
    assert_eq!(bytes[..8], PNG_SIGNATURE);
}

fn assert_svg(path: &Path) {
    let text = std::fs::read_to_string(path).unwrap();
    assert!(
        text.starts_with("<svg") || text.starts_with("<?xml"),
        "{}",
        &text[..40.min(text.len())]
    );
    assert!(text.trim_end().ends_with("</svg>"));
    assert!(text.contains("<text"), "an SVG without any text");
}

/// Exit code 2, one stderr line `planisphere: error: …` containing `needle`, nothing written.
fn assert_refused(args: &[&str], needle: &str, output: &Path) {
    let run = planisphere(args);
    assert_eq!(run.code, 2, "stderr: {}", run.stderr);
    assert_eq!(run.stderr.lines().count(), 1, "{}", run.stderr);
    assert!(
        run.stderr.starts_with("planisphere: error: ") && run.stderr.contains(needle),
        "{}",
        run.stderr
    );
    assert!(run.stdout.is_empty(), "{}", run.stdout);
    assert!(!output.exists(), "{} was written", output.display());
}

/// No temporary file is left beside the outputs.
fn assert_no_partial_files(dir: &Path) {
    for e in std::fs::read_dir(dir).unwrap() {
        let name = e.unwrap().file_name().to_string_lossy().into_owned();
        assert!(!name.contains(".partial"), "left behind: {name}");
    }
}

const FORECAST: &str = r#"{"parameters": ["amplitude", "shift"], "fiducial": [1.0, 0.02],
 "sets": [
  {"name": "power spectrum", "parameter_covariance": [[0.01, 0.0008], [0.0008, 0.0001]],
   "marginalised_errors": [0.1, 0.01]},
  {"name": "scattering", "parameter_covariance": [[0.0025, -0.0001], [-0.0001, 0.00004]],
   "marginalised_errors": [0.05, 0.0063]},
  {"name": "summary", "parameter_covariance": null, "marginalised_errors": null}]}"#;

#[test]
fn each_picture_is_written_as_png_or_svg() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let (fits, a) = sky_and_measurement(d, "gaussian_a", 1);
    let (_, b) = sky_and_measurement(d, "gaussian_b", 2);

    let png = d.join("coefficients.png");
    let run = planisphere(&["plot", "coefficients", s(&a), s(&b), "-o", s(&png)]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    assert_png(&png);
    let svg = d.join("coefficients.svg");
    let run = planisphere(&["plot", "coefficients", s(&a), "--output", s(&svg)]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    assert_svg(&svg);
    // The legend names are the file stems.
    let overlay = d.join("overlay.svg");
    let run = planisphere(&["plot", "coefficients", s(&a), s(&b), "-o", s(&overlay)]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    let text = std::fs::read_to_string(&overlay).unwrap();
    assert!(text.contains("gaussian_a") && text.contains("gaussian_b"));

    let forecast = d.join("forecast.json");
    std::fs::write(&forecast, FORECAST).unwrap();
    for name in ["ellipses.png", "ellipses.svg"] {
        let out = d.join(name);
        let run = planisphere(&["plot", "ellipses", s(&forecast), "-o", s(&out)]);
        assert_eq!(run.code, 0, "{}", run.stderr);
        // The set without a covariance is named on stderr and skipped.
        assert!(run.stderr.contains("summary"), "{}", run.stderr);
        if name.ends_with(".png") {
            assert_png(&out);
        } else {
            assert_svg(&out);
            let text = std::fs::read_to_string(&out).unwrap();
            assert!(text.contains("power spectrum") && text.contains("scattering"));
        }
    }

    let map_png = d.join("tile_map.png");
    let run = planisphere(&[
        "plot",
        "tile-map",
        s(&fits),
        "-J",
        "3",
        "--tile-pixels",
        "32",
        "--no-bispectrum",
        "--statistic",
        "S1_j1",
        "-o",
        s(&map_png),
    ]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    assert!(run.stdout.contains("S1_j1 per tile"), "{}", run.stdout);
    assert_png(&map_png);
    assert_no_partial_files(d);
}

#[test]
fn bad_inputs_get_one_line_and_leave_no_file() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let (fits, good) = sky_and_measurement(d, "sky", 3);
    let out = d.join("out.png");
    let missing = d.join("missing.json");
    let malformed = d.join("malformed.json");
    std::fs::write(&malformed, "{\"coefficients\": [1, 2").unwrap();
    let wrong_shape = d.join("wrong.json");
    std::fs::write(&wrong_shape, "{\"parameters\": [\"a\"]}").unwrap();
    let forecast = d.join("forecast.json");
    std::fs::write(&forecast, FORECAST).unwrap();
    let a_file = d.join("plain.txt");
    std::fs::write(&a_file, "not a directory").unwrap();

    // Missing and malformed inputs.
    assert_refused(
        &["plot", "coefficients", s(&good), s(&missing), "-o", s(&out)],
        "missing.json",
        &out,
    );
    assert_refused(
        &["plot", "coefficients", s(&malformed), "-o", s(&out)],
        "not a measurement file",
        &out,
    );
    assert_refused(
        &["plot", "coefficients", s(&wrong_shape), "-o", s(&out)],
        "not a measurement file",
        &out,
    );
    assert_refused(
        &["plot", "ellipses", s(&missing), "-o", s(&out)],
        "missing.json",
        &out,
    );
    assert_refused(
        &["plot", "ellipses", s(&malformed), "-o", s(&out)],
        "not a forecast file",
        &out,
    );
    assert_refused(
        &["plot", "ellipses", s(&good), "-o", s(&out)],
        "not a forecast file",
        &out,
    );
    assert_refused(
        &[
            "plot",
            "ellipses",
            s(&forecast),
            "--parameters",
            "amplitude,mass",
            "-o",
            s(&out),
        ],
        "'mass' is not in the forecast",
        &out,
    );
    assert_refused(
        &[
            "plot",
            "tile-map",
            s(&missing),
            "--statistic",
            "S1_j1",
            "-o",
            s(&out),
        ],
        "missing.json",
        &out,
    );
    // Unknown or out-of-range statistics, refused before the map is measured.
    for (stat, needle) in [
        ("S4_j1", "unknown statistic 'S4_j1'"),
        ("S1_j9", "outside J = 3 scales"),
        ("S2_j2_j1", "needs j1 < j2"),
    ] {
        assert_refused(
            &[
                "plot",
                "tile-map",
                s(&fits),
                "-J",
                "3",
                "--tile-pixels",
                "32",
                "--statistic",
                stat,
                "-o",
                s(&out),
            ],
            needle,
            &out,
        );
    }
    // Unwritable outputs: a directory that does not exist, a "directory" that is a file, and
    // file names of the wrong kind.
    let inputs: [Vec<&str>; 3] = [
        vec!["plot", "coefficients", s(&good)],
        vec!["plot", "ellipses", s(&forecast)],
        vec![
            "plot",
            "tile-map",
            s(&fits),
            "-J",
            "3",
            "--tile-pixels",
            "32",
            "--statistic",
            "variance",
        ],
    ];
    let no_dir = d.join("no/such/dir/out.png");
    let under_file = a_file.join("out.png");
    let jpeg = d.join("out.jpg");
    for base in &inputs {
        for (target, needle) in [
            (&no_dir, "its directory does not exist"),
            (&under_file, "its directory does not exist"),
            (&jpeg, "must end in .png or .svg"),
        ] {
            let mut args = base.clone();
            args.extend(["-o", s(target)]);
            assert_refused(&args, needle, target);
        }
    }
    for width in ["10", "100000"] {
        assert_refused(
            &[
                "plot",
                "ellipses",
                s(&forecast),
                "--width",
                width,
                "-o",
                s(&out),
            ],
            "--width must be from 400 to 8000",
            &out,
        );
    }
    let svg = d.join("map.svg");
    assert_refused(
        &[
            "plot",
            "tile-map",
            s(&fits),
            "--statistic",
            "mean",
            "-o",
            s(&svg),
        ],
        "PNG only",
        &svg,
    );
    assert_no_partial_files(d);
}
