//! An ensemble directory holds one job and nothing stale: two different jobs started at once on
//! one directory never mix their rows (one is refused); rows or descriptions copied in from
//! another job, and unreadable row files, are refused with one line naming what differs (exit 2,
//! nothing created or changed); a map file changed after it was measured is measured again on
//! resume and refused by `merge`; `forecast` refuses ensembles measured with other settings.
//! (Expectations: the rules of `src/ensemble/mod.rs`; exit code 2 and one-line errors are the
//! program's own convention for bad input.)

mod common;

use planisphere::io::fits_io::{write_map, WriteOptions};
use planisphere::{Ordering, Pixelization, SkyMap};
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::time::Duration;

/// How long one run may take before the harness calls it a hang (generous: the machine is
/// shared; these runs take about a second). Not a speed check.
const HANG_LIMIT: Duration = Duration::from_secs(300);

fn spawn(args: &[String]) -> Child {
    Command::new(env!("CARGO_BIN_EXE_planisphere"))
        .args(args)
        .env_remove("SLURM_ARRAY_TASK_ID")
        .env_remove("SLURM_ARRAY_TASK_COUNT")
        .env_remove("SLURM_ARRAY_TASK_MIN")
        .env("RAYON_NUM_THREADS", "2")
        .stdin(Stdio::null())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap()
}

/// Waits for a child with the hang limit; returns (exit code, stdout, stderr).
fn finish(child: Child, args: &[String]) -> (Option<i32>, String, String) {
    let out = common::wait_or_fail_as_hang(child, args, HANG_LIMIT);
    (
        out.status.code(),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

fn run(args: &[String]) -> (Option<i32>, String, String) {
    finish(spawn(args), args)
}

fn run_ok(args: &[String]) -> String {
    let (code, out, err) = run(args);
    assert_eq!(code, Some(0), "{args:?}: {err}");
    out
}

/// Every file under `dir` (recursively) with its bytes.
fn snapshot(dir: &Path) -> BTreeMap<PathBuf, Vec<u8>> {
    let mut out = BTreeMap::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        for e in std::fs::read_dir(&d).unwrap() {
            let p = e.unwrap().path();
            if p.is_dir() {
                stack.push(p);
            } else {
                let bytes = std::fs::read(&p).unwrap();
                out.insert(p, bytes);
            }
        }
    }
    out
}

/// A refused run: exit 2, one line containing `words`, no panic, every file under `dir`
/// unchanged and none added.
fn assert_refused(args: &[String], words: &str, dir: &Path) -> String {
    let before = snapshot(dir);
    let (code, _, stderr) = run(args);
    assert_eq!(code, Some(2), "{args:?}: {stderr}");
    assert!(!stderr.contains("panicked"), "{stderr}");
    assert_eq!(
        stderr.trim_end().lines().count(),
        1,
        "not one line: {stderr}"
    );
    assert!(stderr.starts_with("planisphere: error: "), "{stderr}");
    assert!(stderr.contains(words), "expected '{words}' in: {stderr}");
    assert_eq!(snapshot(dir), before, "{args:?} changed or added files");
    stderr.trim_end().to_string()
}

fn s(v: &[&str]) -> Vec<String> {
    v.iter().map(|x| x.to_string()).collect()
}

/// A small, quick measurement (NSIDE 16 maps) of members given by `members` into `dir`.
fn ensemble(dir: &Path, members: &[&str], extra: &[&str]) -> Vec<String> {
    let d = dir.display().to_string();
    let mut v = s(&["ensemble", "-o", &d]);
    v.extend(s(members));
    v.extend(s(&[
        "-J",
        "2",
        "--tile-pixels",
        "16",
        "--border-pixels",
        "2",
        "--quiet",
        "--no-bispectrum",
    ]));
    v.extend(s(extra));
    v
}

fn recipe(dir: &Path, name: &str, seed: u64, count: u64) -> String {
    let p = dir.join(name);
    std::fs::write(&p, format!("nside = 16\ncount = {count}\nseed = {seed}\n")).unwrap();
    p.display().to_string()
}

fn write_sky(path: &Path, k: f64) {
    let pix = Pixelization::new(16, Ordering::Ring).unwrap();
    let map = SkyMap::from_fn(pix, |d| {
        d.theta.cos() + 0.1 * (k * d.phi).sin() + 0.05 * (2.0 * k * d.theta).cos()
    });
    write_map(path, "SIGNAL", &map, &WriteOptions::default()).unwrap();
}

fn row_file(dir: &Path, i: usize) -> PathBuf {
    dir.join("rows").join(format!("row_{i:06}.json"))
}

fn job_identity_of_rows(dir: &Path) -> Vec<String> {
    let mut ids: Vec<String> = std::fs::read_dir(dir.join("rows"))
        .unwrap()
        .filter_map(|e| e.ok())
        .filter(|e| e.path().extension().is_some_and(|x| x == "json"))
        .map(|e| {
            let v: serde_json::Value =
                serde_json::from_str(&std::fs::read_to_string(e.path()).unwrap()).unwrap();
            v["job"]["identity"].as_str().unwrap().to_string()
        })
        .collect();
    ids.sort();
    ids.dedup();
    ids
}

#[test]
fn two_different_jobs_started_at_once_on_one_directory_never_mix_rows() {
    let tmp = tempfile::tempdir().unwrap();
    let r7 = recipe(tmp.path(), "seed7.toml", 7, 6);
    let r9 = recipe(tmp.path(), "seed9.toml", 9, 6);
    for attempt in 0..4 {
        let dir = tmp.path().join(format!("shared{attempt}"));
        let a = ensemble(&dir, &["--simulate", &r7], &["--shard", "0/2"]);
        let b = ensemble(&dir, &["--simulate", &r9], &["--shard", "1/2"]);
        // started together; which one wins the directory is up to the scheduler
        let (ca, cb) = (spawn(&a), spawn(&b));
        let (code_a, _, err_a) = finish(ca, &a);
        let (code_b, _, err_b) = finish(cb, &b);
        let codes = [code_a, code_b];
        assert!(
            codes.contains(&Some(0)) && codes.contains(&Some(2)),
            "exactly one job must run: {codes:?}\n{err_a}\n{err_b}"
        );
        let refusal = if code_a == Some(2) { &err_a } else { &err_b };
        let (there, here) = if code_a == Some(2) { (9, 7) } else { (7, 9) };
        assert!(
            refusal.trim_end().ends_with(&format!(
                "already holds another ensemble job (recipe.seed {there} vs {here}, there vs here); choose another output directory"
            )),
            "{refusal}"
        );
        assert_eq!(refusal.trim_end().lines().count(), 1);
        // the directory holds one job's rows only, and merge sees the other shard missing
        assert_eq!(job_identity_of_rows(&dir).len(), 1);
        let m = s(&["merge", &dir.display().to_string()]);
        assert_refused(&m, "3 of 6 maps are not measured yet", &dir);
    }
}

#[test]
fn two_shards_of_one_job_at_once_merge_to_the_unsharded_table() {
    let tmp = tempfile::tempdir().unwrap();
    let r = recipe(tmp.path(), "r.toml", 3, 6);
    let whole = tmp.path().join("whole");
    run_ok(&ensemble(&whole, &["--simulate", &r], &[]));
    let dir = tmp.path().join("sharded");
    let a = ensemble(&dir, &["--simulate", &r], &["--shard", "0/2"]);
    let b = ensemble(&dir, &["--simulate", &r], &["--shard", "1/2"]);
    let (ca, cb) = (spawn(&a), spawn(&b));
    let (code_a, _, err_a) = finish(ca, &a);
    let (code_b, _, err_b) = finish(cb, &b);
    assert_eq!((code_a, code_b), (Some(0), Some(0)), "{err_a}\n{err_b}");
    run_ok(&s(&["merge", &dir.display().to_string()]));
    assert_eq!(
        std::fs::read(whole.join("statistics.npy")).unwrap(),
        std::fs::read(dir.join("statistics.npy")).unwrap(),
        "shards run at once differ from the unsharded table"
    );
}

#[test]
fn rows_and_descriptions_of_another_job_are_refused_naming_the_difference() {
    let tmp = tempfile::tempdir().unwrap();
    let r7 = recipe(tmp.path(), "seed7.toml", 7, 3);
    let r9 = recipe(tmp.path(), "seed9.toml", 9, 3);
    let (a, b) = (tmp.path().join("a"), tmp.path().join("b"));
    let args_a = ensemble(&a, &["--simulate", &r7], &[]);
    run_ok(&args_a);
    run_ok(&ensemble(&b, &["--simulate", &r9], &[]));
    let merge_a = s(&["merge", &a.display().to_string()]);

    // a row copied in from the other job: merge and resume refuse it
    let good_row = std::fs::read(row_file(&a, 1)).unwrap();
    std::fs::copy(row_file(&b, 1), row_file(&a, 1)).unwrap();
    let e = assert_refused(&merge_a, "row 1 belongs to another job", &a);
    assert!(
        e.ends_with(
            "row_000001.json: row 1 belongs to another job (recipe.seed 9 vs 7, row vs this job)"
        ),
        "{e}"
    );
    assert_refused(
        &args_a,
        "row 1 belongs to another job (recipe.seed 9 vs 7, row vs this job)",
        &a,
    );
    std::fs::write(row_file(&a, 1), &good_row).unwrap();

    // a row measured with another sampling: the setting is named
    let c = tmp.path().join("c");
    run_ok(&ensemble(
        &c,
        &["--simulate", &r7],
        &["--sampling", "nearest"],
    ));
    std::fs::copy(row_file(&c, 2), row_file(&a, 2)).unwrap();
    let e = assert_refused(&merge_a, "row 2 belongs to another job", &a);
    assert!(e.contains("sampling"), "{e}");
    assert!(e.contains("nearest") || e.contains("Nearest"), "{e}");
    // member 1's row under member 2's name: refused as the wrong member
    std::fs::write(row_file(&a, 2), &good_row).unwrap();
    assert_refused(&merge_a, "holds member 1 (simulation 1), not member 2", &a);
    // without the row file the member is simply measured again
    std::fs::remove_file(row_file(&a, 2)).unwrap();
    run_ok(&args_a);

    // the other job's ensemble.json copied in: the rows no longer belong to it
    let own = std::fs::read(a.join("ensemble.json")).unwrap();
    std::fs::copy(b.join("ensemble.json"), a.join("ensemble.json")).unwrap();
    assert_refused(
        &merge_a,
        "row 0 belongs to another job (recipe.seed 7 vs 9, row vs this job)",
        &a,
    );
    // an ensemble.json edited by hand no longer matches its recorded identity
    let text = String::from_utf8(own.clone()).unwrap();
    std::fs::write(
        a.join("ensemble.json"),
        text.replace("\"seed\": 7", "\"seed\": 8"),
    )
    .unwrap();
    assert_refused(
        &merge_a,
        "its recorded job identity does not match its contents",
        &a,
    );
    std::fs::write(a.join("ensemble.json"), &own).unwrap();
    run_ok(&merge_a);
}

#[test]
fn an_unreadable_row_file_is_named_not_reported_as_unmeasured() {
    let tmp = tempfile::tempdir().unwrap();
    let r = recipe(tmp.path(), "r.toml", 4, 3);
    let dir = tmp.path().join("e");
    let args = ensemble(&dir, &["--simulate", &r], &[]);
    run_ok(&args);
    let merge = s(&["merge", &dir.display().to_string()]);
    for garbage in [
        &b"{\"member\": 2, \"values\": [1.0"[..],
        b"\x00\xff not json",
        b"",
    ] {
        std::fs::write(row_file(&dir, 2), garbage).unwrap();
        for a in [&merge, &args] {
            let e = assert_refused(a, "row_000002.json: not a readable row file", &dir);
            assert!(!e.contains("not measured yet"), "{e}");
            assert!(e.contains("delete it to measure member 2 again"), "{e}");
        }
    }
}

#[test]
fn a_map_file_changed_after_measuring_is_measured_again_and_never_merged_stale() {
    let tmp = tempfile::tempdir().unwrap();
    let maps: Vec<PathBuf> = (0..3)
        .map(|i| tmp.path().join(format!("sky{i}.fits")))
        .collect();
    for (i, p) in maps.iter().enumerate() {
        write_sky(p, 2.0 + i as f64);
    }
    let list = tmp.path().join("maps.txt");
    std::fs::write(&list, "sky0.fits\nsky1.fits\nsky2.fits\n").unwrap();
    let list = list.display().to_string();
    let dir = tmp.path().join("e");
    let args = ensemble(&dir, &["--map-list", &list], &[]);
    run_ok(&args);
    let first_table = std::fs::read(dir.join("statistics.npy")).unwrap();
    let old_row = std::fs::read(row_file(&dir, 1)).unwrap();

    // the map changes after it was measured
    write_sky(&maps[1], 7.5);
    let merge = s(&["merge", &dir.display().to_string()]);
    let e = assert_refused(&merge, "sky1.fits changed after row 1 was measured", &dir);
    assert!(
        e.ends_with("run the ensemble again to re-measure it"),
        "{e}"
    );

    // a rerun measures that member again, and only that one
    let out = run_ok(&args);
    assert!(
        out.contains(
            "3 maps, 2 already done, 1 measured (1 of them again because their map file changed)"
        ),
        "{out}"
    );
    assert_ne!(std::fs::read(row_file(&dir, 1)).unwrap(), old_row);
    let rerun_table = std::fs::read(dir.join("statistics.npy")).unwrap();
    assert_ne!(rerun_table, first_table, "the stale row was kept");
    // … and the table equals a fresh run on the files as they are now
    let fresh = tmp.path().join("fresh");
    run_ok(&ensemble(&fresh, &["--map-list", &list], &[]));
    assert_eq!(
        std::fs::read(fresh.join("statistics.npy")).unwrap(),
        rerun_table
    );
    run_ok(&merge);
}

#[test]
fn forecast_refuses_ensembles_measured_with_other_settings() {
    let tmp = tempfile::tempdir().unwrap();
    let r = recipe(tmp.path(), "fid.toml", 1, 3);
    let rp = recipe(tmp.path(), "plus.toml", 2, 3);
    let (fid, plus, plus_nearest) = (
        tmp.path().join("fid"),
        tmp.path().join("plus"),
        tmp.path().join("plus_nearest"),
    );
    run_ok(&ensemble(&fid, &["--simulate", &r], &[]));
    run_ok(&ensemble(&plus, &["--simulate", &rp], &[]));
    run_ok(&ensemble(
        &plus_nearest,
        &["--simulate", &rp],
        &["--sampling", "nearest"],
    ));
    let out = tmp.path().join("fc.json").display().to_string();
    let d = |p: &Path| p.display().to_string();
    let args = s(&[
        "forecast",
        "--fiducial",
        &d(&fid),
        "--derivative",
        &format!("a,0.1,{},{}", d(&plus_nearest), d(&fid)),
        "-o",
        &out,
    ]);
    let e = assert_refused(
        &args,
        "was measured differently from the fiducial ensemble",
        tmp.path(),
    );
    assert!(e.contains("sampling"), "{e}");
    assert!(e.contains("nearest") || e.contains("Nearest"), "{e}");
    // the recipe alone may differ: the same pair with equal settings gets past this check
    let args = s(&[
        "forecast",
        "--fiducial",
        &d(&fid),
        "--derivative",
        &format!("a,0.1,{},{}", d(&plus), d(&fid)),
        "-o",
        &out,
    ]);
    let (_, _, err) = run(&args);
    assert!(!err.contains("measured differently"), "{err}");
}

/// A catalogue CSV of two galaxies at the centre of every NSIDE 16 pixel (so every pixel is
/// seen), with ellipticities turned by `twist` (invented data).
fn write_catalogue(path: &Path, twist: f64) {
    let pix = Pixelization::new(16, Ordering::Ring).unwrap();
    let mut text = String::from("RA,DEC,E1,E2\n");
    for p in 0..pix.npix() {
        let d = pix.center(p);
        let (ra, dec) = (d.lon().to_degrees(), d.lat().to_degrees());
        for k in 0..2 {
            let a = 0.1 * p as f64 + twist + k as f64;
            text.push_str(&format!("{ra},{dec},{},{}\n", 0.3 * a.cos(), 0.3 * a.sin()));
        }
    }
    std::fs::write(path, text).unwrap();
}

#[test]
fn a_catalogue_replaced_under_the_same_name_is_another_job() {
    let tmp = tempfile::tempdir().unwrap();
    let catalogue = tmp.path().join("galaxies.csv");
    let recipe = tmp.path().join("noise.toml");
    std::fs::write(
        &recipe,
        "nside = 16\ncount = 2\nseed = 4\n[catalogue_noise]\ncatalogue = \"galaxies.csv\"\nmap = \"gamma1\"\n",
    )
    .unwrap();
    let r = recipe.display().to_string();
    let (a, b) = (tmp.path().join("a"), tmp.path().join("b"));
    let identity = |dir: &Path| -> (String, String) {
        let v: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(dir.join("ensemble.json")).unwrap())
                .unwrap();
        (
            v["identity"].as_str().unwrap().to_string(),
            v["settings"]["catalogue_sha256"]
                .as_str()
                .unwrap()
                .to_string(),
        )
    };
    // the recorded checksum is the file's SHA-256 as GNU coreutils sha256sum computes it
    let sha256sum = |path: &Path| -> String {
        let out = Command::new("sha256sum").arg(path).output().unwrap();
        String::from_utf8(out.stdout).unwrap()[..64].to_string()
    };

    write_catalogue(&catalogue, 0.0);
    let first = sha256sum(&catalogue);
    run_ok(&ensemble(&a, &["--simulate", &r], &["--shard", "0/2"]));
    // the same name, other galaxies
    write_catalogue(&catalogue, 0.5);
    let second = sha256sum(&catalogue);
    assert_ne!(first, second);
    run_ok(&ensemble(&b, &["--simulate", &r], &[]));
    let (id_a, sum_a) = identity(&a);
    let (id_b, sum_b) = identity(&b);
    assert_eq!(
        (sum_a.as_str(), sum_b.as_str()),
        (first.as_str(), second.as_str())
    );
    assert_ne!(id_a, id_b, "two catalogues gave one job identity");

    // the second shard, run after the catalogue changed, is refused
    assert_refused(
        &ensemble(&a, &["--simulate", &r], &["--shard", "1/2"]),
        &format!("catalogue_sha256 '{}", &first[..8]),
        &a,
    );
    // a row of the other catalogue's job copied in: merge refuses it
    std::fs::copy(row_file(&b, 1), row_file(&a, 1)).unwrap();
    let e = assert_refused(
        &s(&["merge", &a.display().to_string()]),
        "row 1 belongs to another job (catalogue_sha256",
        &a,
    );
    assert!(e.contains(&second[..8]) && e.contains(&first[..8]), "{e}");
}
