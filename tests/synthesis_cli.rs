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
                "3",
                "--statistics",
                "compact",
            ],
            "even number",
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
    use planisphere::flat::{periodic_coefficients, FlatMap};
    use planisphere::transform::ScatteringEngine;
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
