//! `forecast --plan`: several cases (here two noise levels) and scale cuts in one table, each
//! entry checked against the analytic Fisher matrix of a linear-Gaussian model.

mod forecast_support;

use forecast_support::{GaussianSampler, LinearModel};
use nalgebra::{DMatrix, DVector};
use planisphere::ensemble::{EnsembleDescription, EnsembleJob, MemberSource, Shard};
use std::path::Path;
use std::process::Command;

const MEMBERS: usize = 400;
const STEP: f64 = 0.05;

/// Column names the forecast recognises as scattering order 1, with scales 10, 20, … arcmin.
fn names(p: usize) -> Vec<String> {
    (0..p).map(|j| format!("full.S1_j{j}")).collect()
}

fn scales(p: usize) -> Vec<f64> {
    (0..p).map(|j| 10.0 * (j + 1) as f64).collect()
}

/// Writes an ensemble directory holding the given rows.
fn write_ensemble(dir: &Path, rows: &[Vec<f64>]) {
    let p = rows[0].len();
    let description = EnsembleDescription {
        program_version: "test".into(),
        members: (0..rows.len() as u64)
            .map(MemberSource::Simulation)
            .collect(),
        labels: names(p),
        settings: serde_json::json!({"label_scales_arcmin": scales(p)}),
    };
    EnsembleJob::create_or_open(dir, description)
        .unwrap()
        .run(Shard::ALL, |i, _| Ok(rows[i].clone()), false)
        .unwrap();
}

/// Fiducial and paired ± ensembles of d = Mθ + n, n ~ N(0, cov): with shared noise the
/// differences are exact, so the derivatives are M and only the covariance is estimated.
fn write_case(dir: &Path, model: &LinearModel, cov: &DMatrix<f64>, seed: u64) {
    let mut sampler = GaussianSampler::new(seed, cov);
    let zero = DVector::zeros(model.p());
    let noise = sampler.ensemble(&zero, MEMBERS);
    let fid = model.mean(&model.theta);
    let rows = |mean: &DVector<f64>| -> Vec<Vec<f64>> {
        (0..MEMBERS)
            .map(|i| {
                (0..model.p())
                    .map(|k| mean[k] + noise.values()[(i, k)])
                    .collect()
            })
            .collect()
    };
    write_ensemble(&dir.join("fid"), &rows(&fid));
    for (a, name) in ["a", "b"].iter().enumerate() {
        write_ensemble(
            &dir.join(format!("{name}_plus")),
            &rows(&model.shifted_mean(a, STEP)),
        );
        write_ensemble(
            &dir.join(format!("{name}_minus")),
            &rows(&model.shifted_mean(a, -STEP)),
        );
    }
}

/// Marginalised errors √(F⁻¹)_aa of the columns `keep`, F = Mᵀ C⁻¹ M (Fisher 1935; Tegmark,
/// Taylor & Heavens 1997, ApJ 480, 22, eq. 15 for a Gaussian likelihood with fixed covariance).
fn exact_errors(model: &LinearModel, cov: &DMatrix<f64>, keep: &[usize]) -> Vec<f64> {
    let m = DMatrix::from_fn(keep.len(), 2, |r, a| model.m[(keep[r], a)]);
    let c = DMatrix::from_fn(keep.len(), keep.len(), |r, s| cov[(keep[r], keep[s])]);
    let f = m.transpose() * c.try_inverse().unwrap() * m;
    let fi = f.try_inverse().unwrap();
    (0..2).map(|a| fi[(a, a)].sqrt()).collect()
}

#[test]
fn plan_forecasts_each_noise_level_and_scale_cut_as_the_analytic_fisher_matrix() {
    let tmp = tempfile::tempdir().unwrap();
    let model = LinearModel::new();
    let p = model.p();
    let quiet = model.c.clone();
    let noisy = &model.c + DMatrix::identity(p, p) * 0.1;
    write_case(&tmp.path().join("quiet"), &model, &quiet, 11);
    write_case(&tmp.path().join("noisy"), &model, &noisy, 12);
    let case = |label: &str, dir: &str| {
        format!(
            "[[case]]\nlabel = \"{label}\"\nfiducial = \"{dir}/fid\"\n\
             [[case.derivative]]\nparameter = \"a\"\nstep = {STEP}\nplus = \"{dir}/a_plus\"\nminus = \"{dir}/a_minus\"\n\
             [[case.derivative]]\nparameter = \"b\"\nstep = {STEP}\nplus = \"{dir}/b_plus\"\nminus = \"{dir}/b_minus\"\n"
        )
    };
    let plan = format!(
        "paired = true\nscale_cuts = [{{}}, {{ min_arcmin = 45 }}]\n{}{}",
        case("no noise", "quiet"),
        case("noise 0.1", "noisy")
    );
    std::fs::write(tmp.path().join("plan.toml"), plan).unwrap();
    let out = Command::new(env!("CARGO_BIN_EXE_planisphere"))
        .args([
            "forecast",
            "--plan",
            "plan.toml",
            "-o",
            "fc.json",
            "--csv",
            "fc.csv",
        ])
        .current_dir(tmp.path())
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let doc: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(tmp.path().join("fc.json")).unwrap())
            .unwrap();
    assert_eq!(doc["parameters"], serde_json::json!(["a", "b"]));
    let sets = doc["sets"].as_array().unwrap();
    // two statistic sets (order 1, orders 1+2: the same columns here) × 2 cases × 2 cuts
    assert_eq!(sets.len(), 8, "{sets:?}");
    let all: Vec<usize> = (0..p).collect();
    let large: Vec<usize> = (0..p).filter(|&j| scales(p)[j] >= 45.0).collect();
    // Relative scatter of an error estimated from n simulations: about 1/√(2(n − p)) (the
    // Wishart spread of the precision matrix, Taylor, Joachimi & Kitching 2013, MNRAS 432,
    // 1928); 4 of them.
    let tolerance = 4.0 / (2.0 * (MEMBERS - p) as f64).sqrt();
    for (label, cov) in [("no noise", &quiet), ("noise 0.1", &noisy)] {
        for (cut, keep) in [("all scales", &all), ("scales ≥ 45′", &large)] {
            let name = format!("scattering order 1 [{label}; {cut}]");
            let set = sets
                .iter()
                .find(|s| s["name"] == name.as_str())
                .unwrap_or_else(|| panic!("no set {name}"));
            assert_eq!(set["statistics"].as_u64().unwrap() as usize, keep.len());
            let exact = exact_errors(&model, cov, keep);
            for a in 0..2 {
                let got = set["marginalised_errors"][a].as_f64().unwrap();
                assert!(
                    (got / exact[a] - 1.0).abs() < tolerance,
                    "{name} parameter {a}: {got} vs exact {}",
                    exact[a]
                );
            }
        }
    }
    // noise and scale cuts can only lose information
    let sigma = |name: &str| {
        sets.iter().find(|s| s["name"] == name).unwrap()["marginalised_errors"][0]
            .as_f64()
            .unwrap()
    };
    assert!(
        sigma("scattering order 1 [noise 0.1; all scales]")
            > sigma("scattering order 1 [no noise; all scales]")
    );
    let csv = std::fs::read_to_string(tmp.path().join("fc.csv")).unwrap();
    assert!(csv.starts_with("case,scale_cut,set,"), "{csv}");
    assert_eq!(csv.lines().count(), 1 + 8);
}
