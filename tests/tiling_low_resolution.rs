//! Low-resolution maps: the tool's tile choice stays within the corner distortion at which the
//! flat-sky bias has been measured small (`tiling::MAX_AUTOMATIC_CORNER_DISTORTION`, evidence in
//! its documentation), and `measure` refuses in one line when the J scales and their halo cannot
//! fit; a value that could not be computed is never written as trusted.

use planisphere::measure::measurement::MeasurementSettings;
use planisphere::tiles::tiling::{corner_distortion, MAX_AUTOMATIC_CORNER_DISTORTION};
use planisphere::{Footprint, Ordering, Pixelization};
use std::path::Path;
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

fn sky32(dir: &Path) {
    let (code, _, err) = planisphere(&["sky", "--nside", "32", "-o", "sky32.fits"], dir);
    assert_eq!(code, Some(0), "{err}");
}

/// Every coefficient and band power of a `measure` JSON whose value is null is untrusted;
/// returns (values, nulls).
fn nulls_are_untrusted(path: &Path) -> (usize, usize) {
    let doc: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap();
    let mut count = (0, 0);
    for section in ["coefficients", "band_powers"] {
        for c in doc[section].as_array().unwrap() {
            count.0 += 1;
            if c["value"].is_null() {
                count.1 += 1;
                assert_eq!(
                    c["trusted"],
                    false,
                    "{}: null value flagged trusted: {c}",
                    path.display()
                );
            }
        }
    }
    count
}

#[test]
fn nside_32_with_default_scales_is_refused_in_one_line_naming_what_fits() {
    let dir = tempfile::tempdir().unwrap();
    sky32(dir.path());
    let (code, _, err) = planisphere(&["measure", "sky32.fits", "-o", "out.json"], dir.path());
    println!("{err}");
    assert_eq!(code, Some(2));
    assert_eq!(err.trim_end().lines().count(), 1, "{err}");
    // J = 4 needs 4 halos of 15 → 64 pixels of 110′; J ≤ 3 fits 32-pixel tiles (54°) only with
    // a border of at most 4 pixels (halo 4 + 4 = 8); NSIDE 64 holds J = 4 in 64-pixel tiles
    for part in [
        "J = 4 needs tiles of at least 64 pixels",
        "J ≤ 3 does with --border-pixels 4",
        "NSIDE ≥ 64 for J = 4",
    ] {
        assert!(err.contains(part), "missing '{part}' in: {err}");
    }
    assert!(!dir.path().join("out.json").exists());
}

#[test]
fn nside_32_with_the_scales_that_fit_is_measured_within_the_distortion_limit() {
    let dir = tempfile::tempdir().unwrap();
    sky32(dir.path());
    let (code, _, err) = planisphere(
        &[
            "measure",
            "sky32.fits",
            "-J",
            "3",
            "--border-pixels",
            "4",
            "-o",
            "fit.json",
        ],
        dir.path(),
    );
    assert_eq!(code, Some(0), "{err}");
    let doc: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.path().join("fit.json")).unwrap())
            .unwrap();
    let distortion = doc["tiling"]["grid_corner_distortion"].as_f64().unwrap();
    println!(
        "NSIDE 32, J = 3, border 4: {} pixels, {:.1}° across, corner sec²ρ {distortion:.4}",
        doc["settings"]["tile_pixels"], doc["tiling"]["tile_width_deg"]
    );
    assert!(distortion <= MAX_AUTOMATIC_CORNER_DISTORTION);
    let (values, nulls) = nulls_are_untrusted(&dir.path().join("fit.json"));
    println!("{values} values, {nulls} null");
    // an explicit tile size is the user's choice: 64-pixel tiles, 91° across, are measured, and
    // any value that cannot be computed there is written null and untrusted
    let (code, _, err) = planisphere(
        &[
            "measure",
            "sky32.fits",
            "--tile-pixels",
            "64",
            "-o",
            "wide.json",
        ],
        dir.path(),
    );
    assert_eq!(code, Some(0), "{err}");
    let (values, nulls) = nulls_are_untrusted(&dir.path().join("wide.json"));
    println!("explicit 64-pixel tiles: {values} values, {nulls} null");
}

#[test]
fn automatic_tiles_never_exceed_the_distortion_limit() {
    // every (NSIDE, J, border) either plans within the limit or is refused with the reason
    let mut planned = 0;
    let mut refused = 0;
    for nside in [32u32, 64, 128, 256] {
        let pix = Pixelization::new(nside, Ordering::Ring).unwrap();
        let footprint = Footprint::from_fn(pix, |d| d.theta < 0.6);
        for scales in 1..=6 {
            for border in [2usize, 4, 8] {
                let settings = MeasurementSettings {
                    scales,
                    border_pixels: border,
                    ..Default::default()
                };
                match settings.plan(pix, &footprint) {
                    Ok(plan) => {
                        planned += 1;
                        let d = corner_distortion(plan.tile_pixels(), plan.pixel_size());
                        assert!(
                            d <= MAX_AUTOMATIC_CORNER_DISTORTION,
                            "NSIDE {nside}, J = {scales}, border {border}: {} pixels, sec²ρ {d}",
                            plan.tile_pixels()
                        );
                    }
                    Err(e) => {
                        refused += 1;
                        let msg = e.to_string();
                        assert!(msg.contains("flat-sky bias"), "{msg}");
                        assert!(!msg.contains('\n'));
                    }
                }
            }
        }
    }
    println!("{planned} planned, {refused} refused");
    assert!(planned > 0 && refused > 0);
}
