//! `planisphere inspect` run as a user runs it: the built binary on fixture files and bad inputs.
//! Expected statistics are recomputed here from healpy 1.20.1's values of the same files
//! (reference-values/fits/expected.json, written by reference-values/fits_reference.py).

use serde_json::Value;
use std::path::{Path, PathBuf};
use std::process::Command;

fn fixture(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("reference-values/fits")
        .join(name)
}

struct Run {
    code: i32,
    stdout: String,
    stderr: String,
}

fn inspect(args: &[&str]) -> Run {
    let out = Command::new(env!("CARGO_BIN_EXE_planisphere"))
        .arg("inspect")
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

/// Exit code 2 and exactly one stderr line `planisphere: error: <path>: <reason>`.
fn assert_fails_with(args: &[&str], path: &Path, reason: &str) {
    let run = inspect(args);
    assert_eq!(run.code, 2, "stderr: {}", run.stderr);
    assert_eq!(
        run.stderr,
        format!("planisphere: error: {}: {reason}\n", path.display())
    );
    assert!(run.stdout.is_empty(), "{}", run.stdout);
}

/// The number printed for `key` in pretty JSON output, parsed from its text with Rust's exactly
/// rounded parser (serde_json's default float parsing is not always correctly rounded).
fn json_number(stdout: &str, key: &str) -> f64 {
    let tag = format!("\"{key}\": ");
    let line = stdout
        .lines()
        .find_map(|l| l.trim().strip_prefix(&tag))
        .unwrap_or_else(|| panic!("no {key} in {stdout}"));
    line.trim_end_matches(',').parse().unwrap()
}

/// healpy 1.20.1's values of one column, bad pixels as None.
fn healpy_values(file: &str, column: &str) -> Vec<Option<f64>> {
    let text = std::fs::read_to_string(fixture("expected.json")).unwrap();
    let v: Value = serde_json::from_str(&text).unwrap();
    v["files"][file]["values"][column]
        .as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_str().map(|t| t.parse::<f64>().unwrap()))
        .collect()
}

#[test]
fn json_report_matches_statistics_of_healpy_values() {
    let file = "partial_nside16_ring.fits";
    let run = inspect(&[fixture(file).to_str().unwrap(), "--json"]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    assert!(run.stderr.is_empty());
    let r: Value = serde_json::from_str(&run.stdout).unwrap();
    let values: Vec<f64> = healpy_values(file, "SIGNAL")
        .into_iter()
        .flatten()
        .collect();
    // Sums in pixel order, as SkyMap::summary accumulates, so the results are bit-identical.
    let n = values.len() as f64;
    let mean = values.iter().sum::<f64>() / n;
    let rms = (values.iter().map(|v| v * v).sum::<f64>() / n).sqrt();
    let min = values.iter().cloned().fold(f64::INFINITY, f64::min);
    let max = values.iter().cloned().fold(f64::NEG_INFINITY, f64::max);
    assert_eq!(r["nside"], 16);
    assert_eq!(r["ordering"], "RING");
    assert_eq!(r["npix"], 3072);
    assert_eq!(r["coverage"], "partial sky");
    assert_eq!(r["valid_pixels"], values.len());
    assert_eq!(json_number(&run.stdout, "valid_fraction"), n / 3072.0);
    assert_eq!(json_number(&run.stdout, "mean").to_bits(), mean.to_bits());
    assert_eq!(json_number(&run.stdout, "rms").to_bits(), rms.to_bits());
    assert_eq!(json_number(&run.stdout, "min"), min);
    assert_eq!(json_number(&run.stdout, "max"), max);
    assert_eq!(r["columns"], serde_json::json!(["SIGNAL"]));
    // Mean spacing √(4π/Npix) ≈ 3517.94′/NSIDE (Górski et al. 2005; shared reference facts).
    let size = r["pixel_size_arcmin"].as_f64().unwrap();
    assert!((size - 3517.94 / 16.0).abs() < 0.01, "{size}");
}

#[test]
fn text_report_shows_nside_ordering_counts_and_coordinates() {
    let run = inspect(&[fixture("nested_nside16_float32.fits").to_str().unwrap()]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    let lines: Vec<&str> = run.stdout.lines().collect();
    for want in [
        "NSIDE         16",
        "ordering      NESTED",
        "pixels        3072",
        "valid pixels  3072 (100.0000% of the sky)",
        "coordinates   G (galactic)",
        "columns       0 KAPPA",
        "column        KAPPA (position 0, stored as 1024E)",
    ] {
        assert!(lines.contains(&want), "missing {want:?} in\n{}", run.stdout);
    }
}

#[test]
fn bad_pixels_lower_the_valid_fraction() {
    // 6 of 768 pixels are UNSEEN or NaN (fits_reference.py).
    let run = inspect(&[
        fixture("bad_pixels_nside8_float32.fits").to_str().unwrap(),
        "--json",
    ]);
    let r: Value = serde_json::from_str(&run.stdout).unwrap();
    assert_eq!(r["valid_pixels"], 762);
    assert_eq!(json_number(&run.stdout, "valid_fraction"), 762.0 / 768.0);
}

#[test]
fn missing_ordering_warning_is_printed_in_text_and_json() {
    let path = fixture("no_ordering_nside8.fits");
    let text = inspect(&[path.to_str().unwrap()]);
    assert_eq!(text.code, 0);
    assert!(text
        .stdout
        .lines()
        .any(|l| l == "warning       no ORDERING keyword: assuming RING, as healpy 1.20.1 does"));
    let json = inspect(&[path.to_str().unwrap(), "--json"]);
    let r: Value = serde_json::from_str(&json.stdout).unwrap();
    assert_eq!(
        r["warnings"],
        serde_json::json!(["no ORDERING keyword: assuming RING, as healpy 1.20.1 does"])
    );
    assert_eq!(r["ordering"], "RING");
}

#[test]
fn column_chosen_by_name_or_position_gives_the_same_report() {
    let path = fixture("iqu_nside8_float32.fits");
    let p = path.to_str().unwrap();
    let by_name = inspect(&[p, "--column", "q_polarisation", "--json"]);
    let by_position = inspect(&[p, "--column", "1", "--json"]);
    assert_eq!(by_name.code, 0, "{}", by_name.stderr);
    assert_eq!(by_name.stdout, by_position.stdout);
    let r: Value = serde_json::from_str(&by_name.stdout).unwrap();
    assert_eq!(r["column"], "Q_POLARISATION");
    let q: Vec<f64> = healpy_values("iqu_nside8_float32.fits", "Q_POLARISATION")
        .into_iter()
        .flatten()
        .collect();
    assert_eq!(
        json_number(&by_name.stdout, "mean"),
        q.iter().sum::<f64>() / q.len() as f64
    );
}

#[test]
fn unknown_column_lists_the_available_ones() {
    let path = fixture("iqu_nside8_float32.fits");
    assert_fails_with(
        &[path.to_str().unwrap(), "--column", "KAPPA"],
        &path,
        "no column named 'KAPPA'; value columns: 0 'TEMPERATURE', 1 'Q_POLARISATION', 2 'U_POLARISATION'",
    );
}

#[test]
fn missing_file_fails_with_one_line() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("absent.fits");
    assert_fails_with(&[path.to_str().unwrap()], &path, "no such file");
}

#[test]
fn non_fits_file_fails_with_one_line() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("notes.fits");
    std::fs::write(&path, "not a map\n").unwrap();
    assert_fails_with(
        &[path.to_str().unwrap()],
        &path,
        "not a FITS file: it does not begin with the FITS keyword SIMPLE",
    );
}

#[test]
fn truncated_file_fails_with_one_line() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("cut.fits");
    let bytes = std::fs::read(fixture("ring_nside16_float64.fits")).unwrap();
    std::fs::write(&path, &bytes[..2 * 2880 + 5000]).unwrap();
    assert_fails_with(
        &[path.to_str().unwrap()],
        &path,
        "truncated FITS file: the table in HDU 1 declares 24576 bytes of data but only 5000 are present",
    );
}

#[test]
fn help_explains_the_column_and_json_options() {
    let run = inspect(&["--help"]);
    assert_eq!(run.code, 0);
    for want in [
        "Usage: planisphere inspect [OPTIONS] <MAP.fits>",
        "--column <NAME_OR_INDEX>",
        "0-based position among the value columns",
        "--json",
        "ORDERING taken as RING",
    ] {
        assert!(
            run.stdout.contains(want),
            "missing {want:?} in\n{}",
            run.stdout
        );
    }
}
