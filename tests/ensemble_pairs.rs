//! Ensembles of map pairs: correlated pairs have the requested correlation; a pair row holds
//! exactly map A's, map B's and the cross statistics; pairs from files equal simulated pairs;
//! shards and stale second maps behave as for single maps; the joint auto + cross forecast
//! equals numpy's from the written tables, and information adds.

use ndarray::Array2;
use planisphere::harmonics::spectrum::AngularSpectrum;
use planisphere::harmonics::HarmonicTransform;
use planisphere::io::fits_io::{write_map, WriteOptions};
use planisphere::simulate::skies::SkyRecipe;
use std::path::{Path, PathBuf};
use std::process::Command;
use std::sync::OnceLock;

const QUICK: [&str; 7] = [
    "-J",
    "2",
    "--tile-pixels",
    "16",
    "--border-pixels",
    "2",
    "--no-bispectrum",
];

fn planisphere(args: &[&str]) -> String {
    let out = Command::new(env!("CARGO_BIN_EXE_planisphere"))
        .args(args)
        .env_remove("SLURM_ARRAY_TASK_ID")
        .env_remove("SLURM_ARRAY_TASK_COUNT")
        .output()
        .unwrap();
    let stderr = String::from_utf8_lossy(&out.stderr).into_owned();
    assert!(out.status.success(), "{args:?}: {stderr}");
    String::from_utf8_lossy(&out.stdout).into_owned()
}

fn ensemble(dir: &Path, extra: &[&str]) {
    let d = dir.display().to_string();
    let mut args = vec!["ensemble", "-o", d.as_str(), "--quiet"];
    args.extend(extra);
    args.extend(QUICK);
    planisphere(&args);
}

fn table(dir: &Path) -> (Vec<String>, Array2<f64>) {
    let a: Array2<f64> = ndarray_npy::read_npy(dir.join("statistics.npy")).unwrap();
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("statistics.json")).unwrap())
            .unwrap();
    let columns = json["columns"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c.as_str().unwrap().to_string())
        .collect();
    (columns, a)
}

fn recipe_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("reference-values/pair_forecast")
}

/// Sample correlation of pairs (x, y) with known zero mean, Σxy/√(Σx² Σy²), with its standard
/// error (1 − r²)/√N for N independent bivariate normal pairs (Fisher 1915, Biometrika 10, 507:
/// the large-N variance of the sample correlation; common practice).
fn correlation(x: &[f64], y: &[f64]) -> (f64, f64) {
    let sxy: f64 = x.iter().zip(y).map(|(a, b)| a * b).sum();
    let sxx: f64 = x.iter().map(|a| a * a).sum();
    let syy: f64 = y.iter().map(|b| b * b).sum();
    let r = sxy / (sxx * syy).sqrt();
    (r, (1.0 - r * r) / (x.len() as f64).sqrt())
}

#[test]
fn correlated_pairs_have_the_requested_correlation() {
    // NSIDE 32, ℓ ≤ 64, no beam or noise: each real degree of freedom of a_ℓm (ℓ ≥ 2),
    // divided by its expected deviation √C_ℓ (m = 0) or √(C_ℓ/2) (real and imaginary parts,
    // m > 0), is a standard normal; map A's and map B's are pairs with correlation r. The
    // a_ℓm are recovered from the maps by the (tested) harmonic analysis; its quadrature error
    // is linear in the map, so it cannot change the correlation of B = rA + sY.
    let nside = 32;
    let lmax = 64;
    let spectrum = AngularSpectrum::demo_model(lmax, 1e-4);
    let mut recipe = SkyRecipe::gaussian(nside, spectrum.clone(), 21);
    recipe.lmax = lmax;
    let sht = HarmonicTransform::new(nside as usize, lmax).unwrap();
    for r in [0.6, -0.3, 0.95] {
        let (mut xs, mut ys) = (Vec::new(), Vec::new());
        for index in 0..3 {
            let (a, b) = recipe.realise_pair(&sht, index, r, None).unwrap();
            // map A is the single sky of the same index, bit for bit
            let single = recipe.realise(&sht, index).unwrap();
            assert!(a
                .values()
                .iter()
                .zip(single.values())
                .all(|(x, y)| x.to_bits() == y.to_bits()));
            let alm_a = sht.analysis(a.values(), 3).unwrap();
            let alm_b = sht.analysis(b.values(), 3).unwrap();
            for l in 2..=lmax {
                let c = spectrum.cl[l];
                for m in 0..=l {
                    let (u, v) = (alm_a.get(l, m), alm_b.get(l, m));
                    if m == 0 {
                        xs.push(u.re / c.sqrt());
                        ys.push(v.re / c.sqrt());
                    } else {
                        let s = (c / 2.0).sqrt();
                        xs.extend([u.re / s, u.im / s]);
                        ys.extend([v.re / s, v.im / s]);
                    }
                }
            }
        }
        let (estimate, se) = correlation(&xs, &ys);
        let t = (estimate - r) / se;
        eprintln!(
            "r = {r}: sample correlation {estimate:.5} ± {se:.5} over {} pairs (t = {t:.2})",
            xs.len()
        );
        assert!(t.abs() < 3.0, "r = {r}: {estimate} ± {se}");
    }
    // out of range
    for r in [1.5, f64::NAN] {
        let e = recipe.realise_pair(&sht, 0, r, None).unwrap_err();
        assert!(e.to_string().contains("[-1, 1]"), "{e}");
    }
}

#[test]
fn pair_rows_hold_each_maps_own_statistics_and_pairs_from_files_equal_simulated_pairs() {
    let tmp = tempfile::tempdir().unwrap();
    let p = |n: &str| tmp.path().join(n);
    let recipe = "nside = 16\ncount = 6\nseed = 5\nnoise_sigma = 0.003\n";
    std::fs::write(p("single.toml"), recipe).unwrap();
    std::fs::write(
        p("pair.toml"),
        format!("{recipe}[pair]\ncorrelation = 0.7\nnoise_sigma = 0.004\n"),
    )
    .unwrap();
    let path_text = |n: &str| p(n).display().to_string();
    ensemble(&p("single"), &["--simulate", &path_text("single.toml")]);
    ensemble(&p("pair"), &["--simulate", &path_text("pair.toml")]);
    let (single_cols, single) = table(&p("single"));
    let (pair_cols, pair) = table(&p("pair"));
    // columns: a.<single>, b.<single>, then the cross set and the cross pseudo-C_ℓ
    let n = single_cols.len();
    for (k, c) in single_cols.iter().enumerate() {
        assert_eq!(pair_cols[k], format!("a.{c}"));
        assert_eq!(pair_cols[n + k], format!("b.{c}"));
    }
    let cross: Vec<&String> = pair_cols[2 * n..].iter().collect();
    assert!(cross.iter().all(|c| c.starts_with("cross.")));
    let cl_bins = single_cols.iter().filter(|c| c.starts_with("cl.")).count();
    // J = 2, L = 4: P_AB 8, X1 both ways 16, X2 both ways 2·16; then the cross pseudo-C_ℓ
    assert_eq!(cross.len(), 8 + 16 + 32 + cl_bins);
    // map A of a pair is the single sky of the same recipe: its columns are bit for bit equal
    for i in 0..6 {
        for k in 0..n {
            assert_eq!(
                pair[[i, k]].to_bits(),
                single[[i, k]].to_bits(),
                "member {i}, {}",
                single_cols[k]
            );
        }
    }
    // the same pairs written to FITS files and measured from two map lists: the same table
    // (P_AB of a map with itself is its band power, so the cross columns are checked too)
    let transform = {
        let mut r = SkyRecipe::gaussian(16, AngularSpectrum::demo_model(47, 1e-4), 5);
        r.noise_sigma = Some(0.003);
        r
    };
    let sht = transform.transform().unwrap();
    let (mut list_a, mut list_b) = (String::new(), String::new());
    for i in 0..6u64 {
        let (a, b) = transform.realise_pair(&sht, i, 0.7, Some(0.004)).unwrap();
        write_map(
            &p(&format!("a_{i}.fits")),
            "SIGNAL",
            &a,
            &WriteOptions::default(),
        )
        .unwrap();
        write_map(
            &p(&format!("b_{i}.fits")),
            "SIGNAL",
            &b,
            &WriteOptions::default(),
        )
        .unwrap();
        list_a.push_str(&format!("a_{i}.fits\n"));
        list_b.push_str(&format!("b_{i}.fits\n"));
    }
    std::fs::write(p("a.txt"), list_a).unwrap();
    std::fs::write(p("b.txt"), list_b).unwrap();
    ensemble(
        &p("files"),
        &[
            "--map-list",
            &path_text("a.txt"),
            "--second-map-list",
            &path_text("b.txt"),
        ],
    );
    let (file_cols, files) = table(&p("files"));
    assert_eq!(file_cols, pair_cols);
    let worst = files
        .iter()
        .zip(pair.iter())
        .map(|(x, y)| (x - y).abs() / y.abs().max(1e-300))
        .fold(0.0, f64::max);
    assert!(worst < 1e-12, "files against simulated pairs: {worst:e}");

    // two shards of the file pairs merge to the same table bit for bit
    for k in ["0/2", "1/2"] {
        ensemble(
            &p("sharded"),
            &[
                "--maps",
                &path_text("a_*.fits"),
                "--second-maps",
                &path_text("b_*.fits"),
                "--shard",
                k,
            ],
        );
    }
    planisphere(&["merge", &path_text("sharded")]);
    let (_, sharded) = table(&p("sharded"));
    assert!(sharded
        .iter()
        .zip(files.iter())
        .all(|(x, y)| x.to_bits() == y.to_bits()));
    // a changed second map is found: merge refuses, a rerun measures that pair again
    let (_, b3) = transform.realise_pair(&sht, 3, 0.7, Some(0.004)).unwrap();
    let doubled = planisphere::SkyMap::new(
        b3.pixelization(),
        b3.values().iter().map(|v| 2.0 * v).collect(),
    )
    .unwrap();
    write_map(&p("b_3.fits"), "SIGNAL", &doubled, &WriteOptions::default()).unwrap();
    let out = Command::new(env!("CARGO_BIN_EXE_planisphere"))
        .args(["merge", &path_text("sharded")])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(stderr.contains("b_3.fits changed after row 3"), "{stderr}");
    let report = {
        let d = path_text("sharded");
        let a = path_text("a_*.fits");
        let b = path_text("b_*.fits");
        let mut args = vec![
            "ensemble",
            "-o",
            &d,
            "--quiet",
            "--maps",
            &a,
            "--second-maps",
            &b,
        ];
        args.extend(QUICK);
        planisphere(&args)
    };
    assert!(
        report.contains("1 of them again because their map file changed"),
        "{report}"
    );
    let (_, again) = table(&p("sharded"));
    let k = pair_cols
        .iter()
        .position(|c| c == "cross.cross_bandpower_ab_j1_l0")
        .unwrap();
    let ratio = again[[3, k]] / files[[3, k]];
    assert!(
        (ratio - 2.0).abs() < 1e-12,
        "P_AB of a doubled B: ratio {ratio}"
    );
}

/// The five pair ensembles of `reference-values/pair_forecast/` and their forecast, made once.
fn forecast_run() -> &'static (tempfile::TempDir, serde_json::Value) {
    static RUN: OnceLock<(tempfile::TempDir, serde_json::Value)> = OnceLock::new();
    RUN.get_or_init(|| {
        let tmp = tempfile::tempdir().unwrap();
        for e in ["fiducial", "A_plus", "A_minus", "beam_plus", "beam_minus"] {
            let recipe = recipe_dir().join(format!("{e}.toml"));
            ensemble(
                &tmp.path().join(e),
                &["--simulate", &recipe.display().to_string()],
            );
        }
        let d = |e: &str| tmp.path().join(e).display().to_string();
        let out = tmp.path().join("fc.json");
        planisphere(&[
            "forecast",
            "--fiducial",
            &d("fiducial"),
            "--derivative",
            &format!("A,1e-5,{},{}", d("A_plus"), d("A_minus")),
            "--derivative",
            &format!("beam,30,{},{}", d("beam_plus"), d("beam_minus")),
            "--paired",
            "-o",
            &out.display().to_string(),
        ]);
        let doc = serde_json::from_str(&std::fs::read_to_string(&out).unwrap()).unwrap();
        (tmp, doc)
    })
}

fn numbers(v: &serde_json::Value) -> Option<Vec<f64>> {
    v.as_array().map(|a| {
        a.iter()
            .map(|x| match x {
                serde_json::Value::String(s) => s.parse().unwrap(),
                other => other.as_f64().unwrap(),
            })
            .collect()
    })
}

#[test]
fn joint_auto_and_cross_errors_equal_numpy_from_the_written_tables() {
    // reference: reference-values/pair_forecast_reference.py (numpy 2.4; Hartlap et al. 2007
    // eq. 17; Tegmark, Taylor & Heavens 1997 eq. 15), run on these recipes' tables
    let dir = recipe_dir();
    let reference: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(dir.join("pair_forecast_reference.json")).unwrap(),
    )
    .unwrap();
    let (tmp, doc) = forecast_run();
    // our tables are the script's inputs
    for e in ["fiducial", "A_plus", "A_minus", "beam_plus", "beam_minus"] {
        let (cols, ours) = table(&tmp.path().join(e));
        let theirs: Array2<f64> = ndarray_npy::read_npy(dir.join(format!("{e}.npy"))).unwrap();
        assert_eq!(
            cols,
            numbers_or_names(&reference["columns"]),
            "{e}: other columns"
        );
        assert_eq!(ours.dim(), theirs.dim());
        let worst = ours
            .iter()
            .zip(theirs.iter())
            .map(|(x, y)| (x - y).abs() / y.abs().max(1e-300))
            .fold(0.0, f64::max);
        assert!(
            worst < 1e-12,
            "{e}: table differs from the stored one by {worst:e}"
        );
    }
    let sets = doc["sets"].as_array().unwrap();
    let expected = reference["sets"].as_array().unwrap();
    assert_eq!(sets.len(), expected.len());
    let mut worst = 0.0f64;
    let mut joint_sets = 0;
    for (ours, theirs) in sets.iter().zip(expected) {
        assert_eq!(ours["name"], theirs["name"]);
        assert_eq!(ours["statistics"], theirs["statistics"]);
        if ours["name"].as_str().unwrap().contains("[A+B+cross]") {
            joint_sets += 1;
        }
        for key in ["marginalised_errors", "conditional_errors"] {
            let (a, b) = (numbers(&ours[key]), numbers(&theirs[key]));
            assert_eq!(a.is_some(), b.is_some(), "{}", ours["name"]);
            for (x, y) in a.unwrap_or_default().iter().zip(b.unwrap_or_default()) {
                worst = worst.max((x - y).abs() / y.abs());
            }
        }
    }
    eprintln!(
        "{} sets, {joint_sets} joint auto + cross; worst relative difference {worst:e}",
        sets.len()
    );
    assert_eq!(joint_sets, 4);
    assert!(worst < 1e-12, "{worst:e}");
}

fn numbers_or_names(v: &serde_json::Value) -> Vec<String> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|c| c.as_str().unwrap().to_string())
        .collect()
}

#[test]
fn a_joint_set_constrains_at_least_as_well_as_each_of_its_parts() {
    // Fisher information adds (Tegmark, Taylor & Heavens 1997): for any positive-definite
    // covariance, F of a superset of statistics minus F of a subset is positive semi-definite,
    // so the marginalised error without the Hartlap factor, σ·√h, of the joint set is at most
    // that of A, B and cross alone. With the factor, the joint set pays for its larger p
    // (h = (n − p − 2)/(n − 1)); where its h is at least 0.5 the measured errors themselves are
    // checked too (the 104-statistic orders 1+2 set, h = 0.12 with 120 simulations, is not).
    let (_, doc) = forecast_run();
    let sets = doc["sets"].as_array().unwrap();
    let find = |name: &str| sets.iter().find(|s| s["name"] == name);
    let mut compared = 0;
    let mut plain = 0;
    for s in sets {
        let name = s["name"].as_str().unwrap();
        let Some(family) = name
            .strip_suffix(" [A+B+cross]")
            .or(name.strip_suffix(" [A+B]"))
        else {
            continue;
        };
        let hj = s["hartlap_factor"].as_f64().unwrap();
        let joint = numbers(&s["marginalised_errors"]).unwrap();
        for part in ["A", "B", "cross"] {
            let Some(single) = find(&format!("{family} [{part}]")) else {
                continue;
            };
            let hs = single["hartlap_factor"].as_f64().unwrap();
            let errors = numbers(&single["marginalised_errors"]).unwrap();
            for (k, (j, e)) in joint.iter().zip(&errors).enumerate() {
                assert!(
                    j * hj.sqrt() <= e * hs.sqrt() * (1.0 + 1e-12),
                    "{name} against {part}, parameter {k}: {j} (h {hj}) vs {e} (h {hs})"
                );
                compared += 1;
                if hj >= 0.5 {
                    assert!(j <= e, "{name} against {part}, parameter {k}: {j} vs {e}");
                    plain += 1;
                }
            }
        }
    }
    eprintln!("{compared} joint-against-part comparisons, {plain} of them with the Hartlap factor");
    assert_eq!(compared, 32);
    assert!(plain >= 24);
}
