//! The whole job from the command line on small inputs: the demo end to end, and compare-flat.

use std::process::Command;

fn planisphere(args: &[&str], cwd: &std::path::Path) -> (bool, String, String) {
    let out = Command::new(env!("CARGO_BIN_EXE_planisphere"))
        .args(args)
        .current_dir(cwd)
        .output()
        .unwrap();
    (
        out.status.success(),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

#[test]
fn demo_runs_the_whole_job_and_its_scattering_set_beats_the_power_spectrum_on_non_gaussianity() {
    let tmp = tempfile::tempdir().unwrap();
    let (ok, stdout, stderr) = planisphere(
        &[
            "demo",
            "-o",
            "d",
            "--nside",
            "64",
            "--fiducial-count",
            "52",
            "--derivative-count",
            "4",
            "--quiet",
        ],
        tmp.path(),
    );
    assert!(ok, "{stderr}");
    assert!(stdout.contains("orientation-harmonic summary"), "{stdout}");
    let d = tmp.path().join("d");
    for f in [
        "forecast.json",
        "ellipses.png",
        "coefficients.png",
        "tile_map.png",
        "comparison.csv",
        "example_sky.fits",
        "mock_mask.fits",
        "example_measurement.json",
        "fiducial/statistics.npy",
    ] {
        assert!(d.join(f).is_file(), "{f} missing");
    }
    let fc: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(d.join("forecast.json")).unwrap()).unwrap();
    assert_eq!(fc["parameters"], serde_json::json!(["amplitude", "shift"]));
    let summary = fc["sets"]
        .as_array()
        .unwrap()
        .iter()
        .find(|s| s["name"] == "orientation-harmonic summary")
        .unwrap();
    let errs = summary["marginalised_errors"].as_array().unwrap();
    assert!(errs.iter().all(|e| e.as_f64().unwrap() > 0.0));
    // The demo's claim: the power spectrum alone nearly only sees κ0²·A, so its marginalised
    // error on the non-Gaussianity parameter A is much larger than the scattering set's
    // (the property the scattering statistics are known for). With these 52 + 4·4 skies at
    // NSIDE 64 (J = 3: 9 summary numbers, 9 pseudo-C_ℓ bins, Hartlap factor 0.82).
    let sigma_amplitude = |name: &str| {
        fc["sets"]
            .as_array()
            .unwrap()
            .iter()
            .find(|s| s["name"] == name)
            .unwrap()["marginalised_errors"][0]
            .as_f64()
            .unwrap()
    };
    let ratio = sigma_amplitude("power spectrum (pseudo-C_l)")
        / sigma_amplitude("orientation-harmonic summary");
    assert!(
        ratio > 2.0,
        "σ(A) power spectrum / orientation-harmonic summary = {ratio}"
    );
    // a rerun resumes: nothing is measured again and the table is unchanged
    let before = std::fs::read(d.join("fiducial/statistics.npy")).unwrap();
    let (ok, _, stderr) = planisphere(
        &[
            "demo",
            "-o",
            "d",
            "--nside",
            "64",
            "--fiducial-count",
            "52",
            "--derivative-count",
            "4",
            "--quiet",
        ],
        tmp.path(),
    );
    assert!(ok, "{stderr}");
    assert_eq!(
        before,
        std::fs::read(d.join("fiducial/statistics.npy")).unwrap()
    );
}

#[test]
fn compare_flat_reports_less_sampling_bias_at_larger_scales() {
    let tmp = tempfile::tempdir().unwrap();
    let (ok, _, stderr) = planisphere(
        &[
            "compare-flat",
            "--nside",
            "64",
            "--tile-pixels",
            "32",
            "--skies",
            "3",
            "--flat-fields",
            "30",
            "-J",
            "3",
            "-o",
            "cf.csv",
            "--json",
            "cf.json",
            "--picture",
            "cf.png",
        ],
        tmp.path(),
    );
    assert!(ok, "{stderr}");
    let png = std::fs::read(tmp.path().join("cf.png")).unwrap();
    assert_eq!(&png[..8], b"\x89PNG\r\n\x1a\n"); // PNG signature (PNG specification, sec. 5.2)
                                                 // `plot flat-bias` draws the same table from either file
    for table in ["cf.csv", "cf.json"] {
        let (ok, stdout, stderr) =
            planisphere(&["plot", "flat-bias", table, "-o", "again.svg"], tmp.path());
        assert!(ok, "{stderr}");
        assert!(
            stdout.contains("72 coefficient(s) at 1 tile size(s)"),
            "{stdout}"
        );
        let svg = std::fs::read_to_string(tmp.path().join("again.svg")).unwrap();
        assert!(svg.starts_with("<svg") || svg.starts_with("<?xml"));
    }
    let csv = std::fs::read_to_string(tmp.path().join("cf.csv")).unwrap();
    let rows: Vec<Vec<String>> = csv
        .lines()
        .skip(1)
        .map(|l| l.split(',').map(String::from).collect())
        .collect();
    // 3 scales × 4 orientations of S1 and of band powers, 3 pairs × 16 of S2
    assert_eq!(rows.len(), 12 + 12 + 48);
    // mean |relative bias| of S1 per scale: the sampling smooths small scales most
    // (interpolation transfer, see docs/validation.md)
    let bias = |j: &str| {
        let v: Vec<f64> = rows
            .iter()
            .filter(|r| r[3].starts_with("S1_") && r[5] == j)
            .map(|r| r[10].parse::<f64>().unwrap().abs())
            .collect();
        v.iter().sum::<f64>() / v.len() as f64
    };
    assert!(bias("0") > bias("2"), "j0 {} j2 {}", bias("0"), bias("2"));
}
