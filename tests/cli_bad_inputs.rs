//! Every command meets bad input with one clear line on stderr, exit code 2, no panic, no hang
//! (each run gets a generous time limit in the harness, not a speed check), no output file
//! (complete or partial) left behind and every file already there unchanged (contents, links,
//! FIFOs and devices compared before and after each run).

mod common;

use planisphere::io::fits_io::{write_footprint, write_map, WriteOptions};
use planisphere::{Footprint, Ordering, Pixelization, SkyMap};
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::Duration;

/// How long a refused command may run before the harness calls it a hang (generous: the
/// machine is shared; a refusal takes well under a second).
const HANG_LIMIT: Duration = Duration::from_secs(120);

struct Fixtures {
    dir: tempfile::TempDir,
}

impl Fixtures {
    fn new() -> Self {
        let dir = tempfile::tempdir().unwrap();
        let p = |n: &str| dir.path().join(n);
        let pix16 = Pixelization::new(16, Ordering::Ring).unwrap();
        let map = SkyMap::from_fn(pix16, |d| d.theta.cos() + 0.1 * (3.0 * d.phi).sin());
        write_map(&p("map16.fits"), "SIGNAL", &map, &WriteOptions::default()).unwrap();
        let nan = SkyMap::new(pix16, vec![f64::NAN; pix16.npix() as usize]).unwrap();
        write_map(
            &p("allbad16.fits"),
            "SIGNAL",
            &nan,
            &WriteOptions::default(),
        )
        .unwrap();
        let nan_north = SkyMap::from_fn(pix16, |d| if d.theta < 1.5 { f64::NAN } else { 1.0 });
        write_map(
            &p("nan_north16.fits"),
            "SIGNAL",
            &nan_north,
            &WriteOptions::default(),
        )
        .unwrap();
        let pix8 = Pixelization::new(8, Ordering::Ring).unwrap();
        let map8 = SkyMap::from_fn(pix8, |d| d.theta.cos());
        write_map(&p("map8.fits"), "SIGNAL", &map8, &WriteOptions::default()).unwrap();
        for (name, north) in [("north16.fits", true), ("south16.fits", false)] {
            let half = Footprint::from_fn(pix16, |d| {
                (d.theta < 1.5) == north && d.theta.cos().abs() > 0.1
            });
            write_footprint(&p(name), "MASK", &half, &WriteOptions::default()).unwrap();
        }
        write_footprint(
            &p("mask8.fits"),
            "MASK",
            &Footprint::full_sky(pix8),
            &WriteOptions::default(),
        )
        .unwrap();
        write_footprint(
            &p("full16.fits"),
            "MASK",
            &Footprint::full_sky(pix16),
            &WriteOptions::default(),
        )
        .unwrap();
        let mut holed = map.values().to_vec();
        holed[100] = f64::NAN;
        let holed = SkyMap::new(pix16, holed).unwrap();
        write_map(&p("nan16.fits"), "SIGNAL", &holed, &WriteOptions::default()).unwrap();
        std::fs::write(p("coefficients.json"), "{\"coefficients\": []}\n").unwrap();
        let empty = Footprint::from_weights(pix16, vec![0.0; pix16.npix() as usize]).unwrap();
        write_footprint(&p("empty16.fits"), "MASK", &empty, &WriteOptions::default()).unwrap();
        std::fs::write(p("notfits.fits"), "this is plain text, not FITS\n").unwrap();
        let bytes = std::fs::read(p("map16.fits")).unwrap();
        std::fs::write(p("truncated.fits"), &bytes[..bytes.len() / 2]).unwrap();
        std::fs::write(p("bad_settings.toml"), "scales = 3\nwavelets = 2\n").unwrap();
        std::fs::write(
            p("bad_recipe.toml"),
            "nside = 16\ncount = 2\ncolour = \"red\"\n",
        )
        .unwrap();
        std::fs::write(p("small_recipe.toml"), "nside = 3\ncount = 2\n").unwrap();
        std::fs::write(p("negative_cl.txt"), "2 1e-5\n3 -1e-6\n").unwrap();
        std::fs::write(p("empty_list.txt"), "# nothing here\n").unwrap();
        std::fs::create_dir(p("not_an_ensemble")).unwrap();
        // special files and other names of the same file
        let status = Command::new("mkfifo").arg(p("pipe")).status().unwrap();
        assert!(status.success(), "mkfifo failed");
        std::os::unix::fs::symlink(p("map16.fits"), p("map_link.fits")).unwrap();
        std::fs::hard_link(p("map16.fits"), p("map_hard.fits")).unwrap();
        std::fs::copy(p("full16.fits"), p("mask_copy.fits")).unwrap();
        std::fs::write(p("cl.txt"), "2 1e-5\n3 1e-5\n4 1e-5\n").unwrap();
        std::fs::write(
            p("huge_lmax.toml"),
            "nside = 16\ncount = 2\nlmax = 1000000000\n",
        )
        .unwrap();
        std::fs::write(p("big_nside.toml"), "nside = 4096\ncount = 2\n").unwrap();
        std::fs::create_dir(p("demo_existing")).unwrap();
        // maps with nothing to measure
        let constant = SkyMap::from_fn(pix16, |_| 3.0);
        write_map(
            &p("constant16.fits"),
            "SIGNAL",
            &constant,
            &WriteOptions::default(),
        )
        .unwrap();
        let mut huge = map.values().to_vec();
        huge[5] = 1e300;
        let huge = SkyMap::new(pix16, huge).unwrap();
        write_map(&p("huge16.fits"), "SIGNAL", &huge, &WriteOptions::default()).unwrap();
        let mut one = vec![f64::NAN; pix16.npix() as usize];
        one[100] = 1.0;
        let one = SkyMap::new(pix16, one).unwrap();
        write_map(
            &p("onepixel16.fits"),
            "SIGNAL",
            &one,
            &WriteOptions::default(),
        )
        .unwrap();
        // coordinate systems stated in the headers (HEALPix FITS convention: COORDSYS)
        let with_sys = |c: &str| WriteOptions {
            coordsys: Some(c.to_string()),
            ..WriteOptions::default()
        };
        write_map(&p("map16_c.fits"), "SIGNAL", &map, &with_sys("C")).unwrap();
        write_map(&p("map16_g.fits"), "SIGNAL", &map, &with_sys("G")).unwrap();
        let north = Footprint::from_fn(pix16, |d| d.theta < 1.2);
        write_footprint(&p("mask16_g.fits"), "MASK", &north, &with_sys("G")).unwrap();
        write_footprint(
            &p("mask16_cel.fits"),
            "MASK",
            &north,
            &with_sys("CELESTIAL"),
        )
        .unwrap();
        write_footprint(
            &p("mask16_none.fits"),
            "MASK",
            &north,
            &WriteOptions::default(),
        )
        .unwrap();
        // a mask with one observed pixel, and weight maps holding +inf in two pixels (the
        // written marker weight 0.123456789 is replaced by the IEEE-754 bytes of +inf)
        let mut single = vec![0.0; pix16.npix() as usize];
        single[1000] = 1.0;
        let single = Footprint::from_weights(pix16, single).unwrap();
        write_footprint(
            &p("onepixel_mask16.fits"),
            "MASK",
            &single,
            &WriteOptions::default(),
        )
        .unwrap();
        let mut marked = vec![1.0; pix16.npix() as usize];
        marked[7] = 0.123456789;
        marked[300] = 0.123456789;
        let marked = Footprint::from_weights(pix16, marked).unwrap();
        write_footprint(
            &p("inf_mask16.fits"),
            "MASK",
            &marked,
            &WriteOptions::default(),
        )
        .unwrap();
        let mut bytes = std::fs::read(p("inf_mask16.fits")).unwrap();
        let marker = 0.123456789f64.to_be_bytes();
        let mut replaced = 0;
        for i in 0..bytes.len() - 7 {
            if bytes[i..i + 8] == marker {
                bytes[i..i + 8].copy_from_slice(&f64::INFINITY.to_be_bytes());
                replaced += 1;
            }
        }
        assert_eq!(replaced, 2, "marker weights not found in the written mask");
        std::fs::write(p("inf_mask16.fits"), &bytes).unwrap();
        Fixtures { dir }
    }

    fn path(&self, name: &str) -> String {
        self.dir.path().join(name).display().to_string()
    }
}

/// Runs `program args` in `cwd`, killing it after [`HANG_LIMIT`]; returns (exit code, stderr).
fn run_program(program: &str, args: &[String], cwd: &Path) -> (Option<i32>, String) {
    run_program_with(program, args, cwd, &[])
}

/// As [`run_program`], with environment variables `env` set.
fn run_program_with(
    program: &str,
    args: &[String],
    cwd: &Path,
    env: &[(&str, &str)],
) -> (Option<i32>, String) {
    let mut command = Command::new(program);
    command
        .args(args)
        .current_dir(cwd)
        .env_remove("SLURM_ARRAY_TASK_ID")
        .env_remove("SLURM_ARRAY_TASK_COUNT")
        .env_remove("SLURM_ARRAY_TASK_MIN");
    for (k, v) in env {
        command.env(k, v);
    }
    let child = command
        .stdin(Stdio::null())
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let out = common::wait_or_fail_as_hang(child, args, HANG_LIMIT);
    (
        out.status.code(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

/// Runs the binary; returns (exit code, stderr).
fn run(args: &[String], cwd: &Path) -> (Option<i32>, String) {
    run_program(env!("CARGO_BIN_EXE_planisphere"), args, cwd)
}

/// Runs the command line under an address-space limit of `kilobytes` (`ulimit -v`).
fn run_under_address_limit(kilobytes: u64, args: &[String], cwd: &Path) -> (Option<i32>, String) {
    let mut line = vec![
        "-c".to_string(),
        format!("ulimit -v {kilobytes} && exec \"$0\" \"$@\""),
        env!("CARGO_BIN_EXE_planisphere").to_string(),
    ];
    line.extend(args.iter().cloned());
    run_program("sh", &line, cwd)
}

/// An NSIDE 1024 sky (a 100 MB f64 column) band-limited to `lmax`, made by `sky` in the
/// fixture directory; its path.
fn nside_1024_sky(f: &Fixtures, lmax: &str) -> String {
    let big = f.path("map1024.fits");
    let (code, stderr) = run(
        &strings(&["sky", "--nside", "1024", "--lmax", lmax, "-o", &big]),
        f.dir.path(),
    );
    assert_eq!(code, Some(0), "{stderr}");
    big
}

/// What a directory entry is, compared before and after a run: a file's bytes, a link's
/// target, or the kind of a directory or special file (a FIFO is never opened).
#[derive(Debug, PartialEq, Eq)]
enum Entry {
    File(Vec<u8>),
    Link(PathBuf),
    Other(String),
}

fn snapshot(dir: &Path) -> BTreeMap<PathBuf, Entry> {
    use std::os::unix::fs::FileTypeExt;
    files_in(dir)
        .into_iter()
        .map(|p| {
            let t = std::fs::symlink_metadata(&p).unwrap().file_type();
            let e = if t.is_symlink() {
                Entry::Link(std::fs::read_link(&p).unwrap())
            } else if t.is_file() {
                Entry::File(std::fs::read(&p).unwrap())
            } else if t.is_fifo() {
                Entry::Other("fifo".into())
            } else {
                Entry::Other("directory".into())
            };
            (p, e)
        })
        .collect()
}

/// Checks one refused run: exit code 2, one line naming `words`, no panic, nothing created
/// (but the directories an ensemble creates before it reads its members), nothing changed.
fn assert_refused(
    args: &[String],
    code: Option<i32>,
    stderr: &str,
    words: &str,
    before: &BTreeMap<PathBuf, Entry>,
    dir: &Path,
) {
    assert_eq!(code, Some(2), "{args:?}: exit {code:?}: {stderr}");
    assert!(!stderr.contains("panicked"), "{args:?}: {stderr}");
    assert_eq!(
        stderr.trim_end().lines().count(),
        1,
        "{args:?}: not one line: {stderr}"
    );
    assert!(
        stderr.starts_with("planisphere: error: "),
        "{args:?}: {stderr}"
    );
    assert!(
        stderr.contains(words),
        "{args:?}: expected '{words}' in: {stderr}"
    );
    let after = snapshot(dir);
    for (p, e) in before {
        assert_eq!(after.get(p), Some(e), "{args:?} changed {}", p.display());
    }
    let ensemble = args.first().map(String::as_str) == Some("ensemble");
    let new: Vec<&PathBuf> = after
        .keys()
        .filter(|p| !before.contains_key(*p))
        .filter(|p| !(ensemble && p.is_dir()))
        .collect();
    assert!(new.is_empty(), "{args:?} left {new:?}");
}

fn files_in(dir: &Path) -> Vec<PathBuf> {
    let mut v: Vec<PathBuf> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().path())
        .collect();
    v.sort();
    v
}

#[test]
fn bad_inputs_across_commands_give_one_line_errors_and_no_output() {
    let f = Fixtures::new();
    let out = f.path("out.json");
    let s = |v: &[&str]| v.iter().map(|x| x.to_string()).collect::<Vec<String>>();
    let map = f.path("map16.fits");
    let cases: Vec<(Vec<String>, &str)> = vec![
        // files and headers
        (s(&["inspect", &f.path("missing.fits")]), "no such file"),
        (s(&["inspect", &f.path("notfits.fits")]), "not a FITS file"),
        (
            s(&["inspect", &f.path("truncated.fits")]),
            "truncated FITS file",
        ),
        (
            s(&["inspect", &map, "--column", "5"]),
            "there is no value column 5",
        ),
        (
            s(&["measure", &map, "-o", &out, "--column", "KAPPA"]),
            "no column named 'KAPPA'",
        ),
        // masks and footprints
        (
            s(&["measure", &map, "-o", &out, "--mask", &f.path("mask8.fits")]),
            "mask NSIDE 8 does not match map NSIDE 16",
        ),
        (
            s(&[
                "measure",
                &map,
                "-o",
                &out,
                "--mask",
                &f.path("empty16.fits"),
            ]),
            "the mask is empty",
        ),
        (
            s(&["measure", &f.path("allbad16.fits"), "-o", &out]),
            "every pixel is bad (UNSEEN or NaN): nothing to measure",
        ),
        (
            s(&["spectra", &map, "--mask", &f.path("mask8.fits")]),
            "does not match",
        ),
        // measure --cross: a second map that cannot be paired with the first
        (
            s(&["measure", &map, "-o", &out, "--cross", &f.path("map8.fits")]),
            "has NSIDE 16 but",
        ),
        (
            s(&[
                "measure",
                &map,
                "-o",
                &out,
                "--cross",
                &map,
                "--cross-mask",
                &f.path("mask8.fits"),
            ]),
            "mask NSIDE 8 does not match map NSIDE 16",
        ),
        (
            s(&[
                "measure",
                &map,
                "-o",
                &out,
                "--mask",
                &f.path("north16.fits"),
                "--cross",
                &map,
                "--cross-mask",
                &f.path("south16.fits"),
            ]),
            "the two footprints do not overlap",
        ),
        (
            s(&[
                "measure",
                &map,
                "-o",
                &out,
                "--mask",
                &f.path("north16.fits"),
                "--cross",
                &f.path("nan_north16.fits"),
            ]),
            "the two footprints do not overlap",
        ),
        (
            s(&[
                "measure",
                &map,
                "-o",
                &out,
                "--cross",
                &f.path("allbad16.fits"),
            ]),
            "every pixel is bad (UNSEEN or NaN)",
        ),
        (
            s(&[
                "measure",
                &map,
                "-o",
                &out,
                "--cross-mask",
                &f.path("north16.fits"),
            ]),
            "--cross",
        ),
        // options
        (
            s(&[
                "measure",
                &map,
                "-o",
                &out,
                "-J",
                "7",
                "--tile-pixels",
                "64",
            ]),
            "J = 7 is too large for 64-pixel tiles",
        ),
        (
            s(&["measure", &map, "-o", &out, "-J", "40"]),
            "J = 40 scales is too many: at most 12",
        ),
        (
            s(&["measure", &map, "-o", &out, "--tile-pixels", "44"]),
            "tile pixels must be 2^k·m (m = 1, 3, 5, 7 or 9",
        ),
        (
            s(&["measure", &map, "-o", &out, "-L", "0"]),
            "J and L must be at least 1",
        ),
        (
            s(&["measure", &map, "-o", &out, "--taper-arcmin", "-5"]),
            "--taper-arcmin must be a non-negative number",
        ),
        (
            s(&[
                "measure",
                &map,
                "-o",
                &out,
                "--settings",
                &f.path("bad_settings.toml"),
            ]),
            "unknown field `wavelets`",
        ),
        (
            s(&["measure", &map, "-o", &out, "-J", "many"]),
            "invalid value 'many'",
        ),
        (
            s(&["sky", "-o", &out, "--nside", "3"]),
            "--nside must be a power of two",
        ),
        (
            s(&["sky", "-o", &f.path("s.fits"), "--count", "2"]),
            "must contain {index}",
        ),
        (
            s(&["sky", "-o", &f.path("s.fits"), "--lognormal-shift", "-1"]),
            "the lognormal shift must be positive",
        ),
        (
            s(&[
                "sky",
                "-o",
                &f.path("s.fits"),
                "--spectrum",
                &f.path("negative_cl.txt"),
            ]),
            "line 2: C_ell = -1e-6 is negative",
        ),
        (
            s(&["sky", "-o", &f.path("s.fits"), "--shape-noise", "0.26"]),
            "--shape-noise expects",
        ),
        (
            s(&["spectra", &map, "--lmax", "1000"]),
            "--lmax 1000 is above 3·NSIDE − 1 = 47",
        ),
        (
            s(&["spectra", &map, "--bin-width", "0"]),
            "--bin-width must be from 1",
        ),
        (
            s(&["spectra", &map, "--beam-arcmin", "-5"]),
            "--beam-arcmin must be a finite number >= 0",
        ),
        (
            s(&["spectra", &map, "--beam-arcmin", "inf"]),
            "--beam-arcmin must be a finite number >= 0",
        ),
        (
            s(&["spectra", &map, "--beam-arcmin", "1e7"]),
            "beam times pixel window at ell",
        ),
        (
            s(&["spectra", &map, "--bin-weighting", "flat"]),
            "invalid value 'flat' for '--bin-weighting",
        ),
        (s(&["tiles", &map, "--coarse-nside", "3"]), "power of two"),
        (
            s(&[
                "forecast",
                "--plan",
                &f.path("bad_settings.toml"),
                "-o",
                &f.path("fc.json"),
            ]),
            "not a forecast plan",
        ),
        (
            s(&[
                "plot",
                "flat-bias",
                &f.path("notfits.fits"),
                "-o",
                &f.path("bias.png"),
            ]),
            "not a compare-flat table",
        ),
        (
            s(&[
                "compare-flat",
                "-o",
                &f.path("cf.csv"),
                "--picture",
                &f.path("cf.gif"),
            ]),
            "must end in .png or .svg",
        ),
        (
            s(&[
                "compare-flat",
                "--tile-pixels",
                "32,64",
                "--reference-pixels",
                "48",
                "-o",
                &f.path("cf.csv"),
            ]),
            "the flat reference fields (48 pixels) must be at least as large as the largest tile (64 pixels)",
        ),
        (
            s(&["demo", "--nside", "3", "-o", &f.path("demo")]),
            "--nside must be a power of two",
        ),
        // manifests and ensembles
        (
            s(&[
                "ensemble",
                "-o",
                &f.path("e1"),
                "--maps",
                &f.path("nomatch_*.fits"),
            ]),
            "no files match",
        ),
        (
            s(&[
                "ensemble",
                "-o",
                &f.path("e2"),
                "--map-list",
                &f.path("empty_list.txt"),
            ]),
            "the map list names no files",
        ),
        (
            s(&[
                "ensemble",
                "-o",
                &f.path("e3"),
                "--maps",
                &map,
                "--simulate",
                &f.path("small_recipe.toml"),
            ]),
            "cannot be used with",
        ),
        (
            s(&[
                "ensemble",
                "-o",
                &f.path("e4"),
                "--simulate",
                &f.path("bad_recipe.toml"),
            ]),
            "unknown field `colour`",
        ),
        (
            s(&[
                "ensemble",
                "-o",
                &f.path("e5"),
                "--simulate",
                &f.path("small_recipe.toml"),
            ]),
            "recipe nside must be a power of two",
        ),
        (
            s(&[
                "ensemble",
                "-o",
                &f.path("e6"),
                "--maps",
                &map,
                "--shard",
                "5/5",
            ]),
            "--shard expects INDEX/COUNT",
        ),
        (s(&["merge", &f.path("not_an_ensemble")]), "ensemble.json"),
        (
            s(&[
                "forecast",
                "--fiducial",
                &f.path("nowhere"),
                "--derivative",
                "a,0.1,x,y",
                "-o",
                &out,
            ]),
            "ensemble.json",
        ),
        (
            s(&[
                "forecast",
                "--fiducial",
                &f.path("not_an_ensemble"),
                "--derivative",
                "a,zero,x,y",
                "-o",
                &out,
            ]),
            "--derivative expects NAME,STEP,PLUS_DIR,MINUS_DIR",
        ),
        // unwritable outputs
        (
            s(&["measure", &map, "-o", &f.path("no/such/dir/out.json")]),
            "its directory does not exist",
        ),
        (
            s(&["measure", &map, "-o", &f.path("not_an_ensemble")]),
            "is a directory, not a file path",
        ),
        (
            s(&[
                "measure",
                &map,
                "-o",
                &out,
                "-J",
                "4",
                "--tile-pixels",
                "64",
            ]),
            "reach 70.9° from their centre",
        ),
        (
            s(&["sky", "-o", &f.path("no/such/dir/s.fits"), "--nside", "8"]),
            "does not exist",
        ),
        // sphere synthesis
        (
            s(&[
                "synthesize",
                "--target",
                &map,
                "--mask",
                &f.path("mask8.fits"),
                "-o",
                &f.path("synth.fits"),
            ]),
            "mask NSIDE 8 does not match target map NSIDE 16",
        ),
        (
            s(&[
                "synthesize",
                "--target",
                &map,
                "--mask",
                &f.path("empty16.fits"),
                "-o",
                &f.path("synth.fits"),
            ]),
            "the mask is empty",
        ),
        (
            s(&[
                "synthesize",
                "--target",
                &f.path("nan16.fits"),
                "--mask",
                &f.path("full16.fits"),
                "-o",
                &f.path("synth.fits"),
            ]),
            "no value (NaN or UNSEEN) at 1 pixels inside the mask",
        ),
        (
            s(&[
                "synthesize",
                "--target",
                &f.path("allbad16.fits"),
                "-o",
                &f.path("synth.fits"),
            ]),
            "the target map has no valid pixel",
        ),
        (
            s(&[
                "synthesize",
                "--target",
                &f.path("coefficients.json"),
                "-o",
                &f.path("synth.fits"),
            ]),
            "needs --mask",
        ),
        (
            s(&[
                "synthesize",
                "--target",
                &map,
                "-o",
                &f.path("synth.fits"),
                "--scales",
                "4",
                "--tile-pixels",
                "64",
            ]),
            "reach 70.9° from their centre",
        ),
        (
            s(&["synthesize", "--target", &map, "-o", &f.path("tile.npy")]),
            "needs --tile INDEX",
        ),
        (
            s(&[
                "synthesize",
                "--target",
                &map,
                "-o",
                &f.path("tile.npy"),
                "--tile",
                "9999",
                "--scales",
                "2",
                "--tile-pixels",
                "16",
                "--border-pixels",
                "2",
            ]),
            "--tile 9999 does not exist",
        ),
        // synthesize shares measure's settings and their one validation
        (
            s(&[
                "synthesize",
                "--target",
                &map,
                "-o",
                &f.path("synth.fits"),
                "--spectrum-bins",
                "3",
            ]),
            "--spectrum-bins and --no-bispectrum do not apply to synthesize",
        ),
        (
            s(&[
                "synthesize",
                "--target",
                &f.path("coefficients.json"),
                "--size",
                "64",
                "-o",
                &f.path("x.npy"),
                "--scales",
                "13",
            ]),
            "J = 13 scales is too many: at most 12",
        ),
        (
            s(&[
                "synthesize",
                "--target",
                &map,
                "-o",
                &f.path("synth.fits"),
                "--tile-pixels",
                "44",
            ]),
            "tile pixels must be 2^k·m (m = 1, 3, 5, 7 or 9",
        ),
    ];
    assert!(cases.len() >= 25);
    refuse_all(&f, &cases);
}

/// Runs every case of a table in the fixtures' directory and checks each refusal.
fn refuse_all(f: &Fixtures, cases: &[(Vec<String>, &str)]) {
    for (args, words) in cases {
        let before = snapshot(f.dir.path());
        let (code, stderr) = run(args, f.dir.path());
        assert_refused(args, code, &stderr, words, &before, f.dir.path());
    }
}

#[test]
fn bad_derivative_specification_is_reported() {
    let f = Fixtures::new();
    // a real (tiny) ensemble so that the fiducial loads and the derivative text is parsed
    let recipe = f.path("r.toml");
    std::fs::write(&recipe, "nside = 16\ncount = 3\n").unwrap();
    let e = f.path("fid");
    let args: Vec<String> = [
        "ensemble",
        "-o",
        &e,
        "--simulate",
        &recipe,
        "-J",
        "2",
        "--tile-pixels",
        "16",
        "--border-pixels",
        "2",
        "--quiet",
        "--no-bispectrum",
    ]
    .iter()
    .map(|s| s.to_string())
    .collect();
    let (code, stderr) = run(&args, f.dir.path());
    assert_eq!(code, Some(0), "{stderr}");
    let args: Vec<String> = [
        "forecast",
        "--fiducial",
        &e,
        "--derivative",
        "a,zero,x,y",
        "-o",
        &f.path("fc.json"),
    ]
    .iter()
    .map(|s| s.to_string())
    .collect();
    let (code, stderr) = run(&args, f.dir.path());
    assert_eq!(code, Some(2));
    assert_eq!(
        stderr.trim_end(),
        "planisphere: error: --derivative expects NAME,STEP,PLUS_DIR,MINUS_DIR; got 'a,zero,x,y'"
    );
    assert!(!Path::new(&f.path("fc.json")).exists());
}

fn strings(v: &[&str]) -> Vec<String> {
    v.iter().map(|x| x.to_string()).collect()
}

#[test]
fn outputs_that_would_replace_an_input_or_a_special_file_are_refused() {
    let f = Fixtures::new();
    let map = f.path("map16.fits");
    let mask = f.path("mask_copy.fits");
    let cl = f.path("cl.txt");
    let same = "is the same file as the input";
    let cases: Vec<(Vec<String>, &str)> = vec![
        // the same path, another spelling, a symbolic link and a hard link
        (strings(&["measure", &map, "-o", &map]), same),
        (
            strings(&["measure", "map16.fits", "-o", "./map16.fits"]),
            same,
        ),
        (
            strings(&["measure", &map, "-o", &f.path("../").replace("//", "/")]),
            "is a directory",
        ),
        (
            strings(&["measure", &map, "-o", &f.path("map_link.fits")]),
            same,
        ),
        (
            strings(&["measure", &map, "-o", &f.path("map_hard.fits")]),
            same,
        ),
        (strings(&["spectra", &map, "--csv", &map]), same),
        (
            strings(&["spectra", &map, "--json", &f.path("map_link.fits")]),
            same,
        ),
        (strings(&["tiles", &map, "--json", &map]), same),
        (strings(&["tiles", &map, "--png", &map]), same),
        (strings(&["synthesize", "--target", &map, "-o", &map]), same),
        (
            strings(&["measure", &map, "--mask", &mask, "-o", &mask]),
            "the input --mask",
        ),
        (
            strings(&["sky", "--nside", "8", "--spectrum", &cl, "-o", &cl]),
            "the input --spectrum",
        ),
        (strings(&["plot", "flat-bias", &cl, "-o", &cl]), same),
        // two outputs onto one file
        (
            strings(&[
                "tiles",
                &map,
                "--json",
                &f.path("plan.out"),
                "--png",
                "./plan.out",
            ]),
            "name the same output file",
        ),
        // special files as outputs: replaced by a regular file if written
        (
            strings(&["measure", &map, "-o", "/dev/null"]),
            "exists and is a character device, not a regular file",
        ),
        (
            strings(&["measure", &map, "-o", &f.path("pipe")]),
            "exists and is a FIFO",
        ),
        (
            strings(&["sky", "--nside", "8", "-o", &f.path("pipe")]),
            "exists and is a FIFO",
        ),
        // an output directory that is a file
        (
            strings(&["demo", "-o", &map]),
            "already exists and is a regular file, not a directory",
        ),
        (
            strings(&["ensemble", "-o", &map, "--maps", &map]),
            "already exists and is a regular file, not a directory",
        ),
        // a run refused before any work leaves no empty directory behind
        (
            strings(&["demo", "--scales", "0", "-o", &f.path("new_demo")]),
            "--scales must be at least 1",
        ),
    ];
    refuse_all(&f, &cases);
    assert!(!Path::new(&f.path("new_demo")).exists());
}

#[test]
fn outputs_in_a_directory_that_cannot_be_written_are_refused_before_any_work() {
    // /sys refuses new files even to root (common practice on Linux); the check must come
    // before the measurement, so a bad mask later on the line is never reached
    let f = Fixtures::new();
    let cases: Vec<(Vec<String>, &str)> = vec![(
        strings(&[
            "measure",
            &f.path("map16.fits"),
            "-o",
            "/sys/planisphere-output.json",
            "--mask",
            &f.path("mask8.fits"),
        ]),
        "cannot write in its directory",
    )];
    refuse_all(&f, &cases);
}

#[test]
fn an_output_through_a_symbolic_link_rewrites_the_target_and_keeps_the_link() {
    let f = Fixtures::new();
    let target = f.path("sky_target.fits");
    std::fs::write(&target, "old contents").unwrap();
    let link = f.path("sky_link.fits");
    std::os::unix::fs::symlink(&target, &link).unwrap();
    let (code, stderr) = run(
        &strings(&["sky", "--nside", "8", "-o", &link]),
        f.dir.path(),
    );
    assert_eq!(code, Some(0), "{stderr}");
    assert!(std::fs::symlink_metadata(&link)
        .unwrap()
        .file_type()
        .is_symlink());
    let (map, _) = planisphere::io::fits_io::read_map(
        Path::new(&target),
        &planisphere::io::fits_io::ColumnChoice::default(),
    )
    .unwrap();
    assert_eq!(map.nside(), 8);
}

#[test]
fn special_files_given_as_inputs_are_refused_without_blocking() {
    // a FIFO with no writer blocks any reader forever: each of these would hang
    let f = Fixtures::new();
    let map = f.path("map16.fits");
    let pipe = f.path("pipe");
    let out = f.path("out.json");
    let words = "is a FIFO (named pipe), not a regular file";
    let cases: Vec<(Vec<String>, &str)> = vec![
        (strings(&["inspect", &pipe]), words),
        (strings(&["measure", &pipe, "-o", &out]), words),
        (
            strings(&["measure", &map, "--mask", &pipe, "-o", &out]),
            words,
        ),
        (
            strings(&["measure", &map, "--settings", &pipe, "-o", &out]),
            words,
        ),
        (
            strings(&["measure", &map, "--cross", &pipe, "-o", &out]),
            words,
        ),
        (strings(&["spectra", &map, "--mask", &pipe]), words),
        (strings(&["tiles", &map, "--mask", &pipe]), words),
        (
            strings(&[
                "sky",
                "--nside",
                "8",
                "--spectrum",
                &pipe,
                "-o",
                &f.path("s.fits"),
            ]),
            words,
        ),
        (
            strings(&["ensemble", "-o", &f.path("e_pipe"), "--simulate", &pipe]),
            words,
        ),
        (
            strings(&["ensemble", "-o", &f.path("e_pipe2"), "--map-list", &pipe]),
            words,
        ),
        (
            strings(&["ensemble", "-o", &f.path("e_pipe3"), "--maps", &pipe]),
            words,
        ),
        (
            strings(&["synthesize", "--target", &pipe, "-o", &f.path("x.fits")]),
            words,
        ),
        (strings(&["forecast", "--plan", &pipe, "-o", &out]), words),
        (
            strings(&["plot", "flat-bias", &pipe, "-o", &f.path("b.png")]),
            words,
        ),
        (
            strings(&["compare-flat", "--spectrum", &pipe, "-o", &f.path("cf.csv")]),
            words,
        ),
    ];
    refuse_all(&f, &cases);
}

#[test]
fn sizes_and_counts_beyond_their_limits_are_refused_with_the_limit() {
    let f = Fixtures::new();
    let map = f.path("map16.fits");
    let sky = f.path("s{index}.fits");
    let cases: Vec<(Vec<String>, &str)> = vec![
        (
            strings(&["sky", "--nside", "16", "--lmax", "10000000000", "-o", &sky]),
            "--lmax 10000000000 is above 3·NSIDE − 1 = 47",
        ),
        (
            strings(&[
                "ensemble",
                "-o",
                &f.path("e_lmax"),
                "--simulate",
                &f.path("huge_lmax.toml"),
            ]),
            "recipe lmax 1000000000 is above 3·NSIDE − 1 = 47",
        ),
        (
            strings(&["sky", "--nside", "16", "--count", "1000000000", "-o", &sky]),
            "--count must be from 1 to 1000000, got 1000000000",
        ),
        (
            strings(&[
                "sky",
                "--nside",
                "16",
                "--first-index",
                "18446744073709551615",
                "--count",
                "2",
                "-o",
                &sky,
            ]),
            "goes past the largest sky index 999999",
        ),
        (
            strings(&[
                "measure",
                &map,
                "-o",
                &f.path("m.json"),
                "-L",
                "1000",
                "-J",
                "2",
                "--tile-pixels",
                "16",
                "--border-pixels",
                "2",
            ]),
            "L = 1000 orientations is more than a 16-pixel grid can tell apart: at most 18",
        ),
        (
            strings(&["spectra", &map, "--iterations", "1000000000"]),
            "--iterations 1000000000 is more than 100",
        ),
        (
            strings(&[
                "compare-flat",
                "--skies",
                "1000000000",
                "-o",
                &f.path("cf.csv"),
            ]),
            "--skies must be from 1 to 1000000",
        ),
        (
            strings(&[
                "synthesize",
                "--target",
                &f.path("coefficients.json"),
                "--size",
                "1048576",
                "-o",
                &f.path("x.npy"),
            ]),
            "a flat synthesis of 1048576 × 1048576 pixels",
        ),
        (
            strings(&[
                "synthesize",
                "--target",
                &f.path("coefficients.json"),
                "--size",
                "1000",
                "-o",
                &f.path("x.npy"),
            ]),
            "--size must be a power of two",
        ),
    ];
    refuse_all(&f, &cases);
}

#[test]
fn skies_beyond_the_memory_limit_are_refused_with_the_limit() {
    // under an address-space limit of 2 GB (ulimit -v), a NSIDE 8192 sky (6.4 GB per map) and
    // a recipe at NSIDE 4096 are refused up front instead of aborting in an allocation
    let f = Fixtures::new();
    let cases: Vec<(Vec<String>, &str)> = vec![
        (
            strings(&["sky", "--nside", "8192", "-o", &f.path("big.fits")]),
            "a NSIDE 8192 sky up to ℓ = 24575 needs about",
        ),
        (
            strings(&[
                "ensemble",
                "-o",
                &f.path("e_big"),
                "--simulate",
                &f.path("big_nside.toml"),
            ]),
            "a NSIDE 4096 sky up to ℓ = 12287 needs about",
        ),
    ];
    for (args, words) in &cases {
        let before = snapshot(f.dir.path());
        let (code, stderr) = run_under_address_limit(2_000_000, args, f.dir.path());
        assert_refused(args, code, &stderr, words, &before, f.dir.path());
        assert!(
            stderr.contains("address-space limit (ulimit -v)"),
            "{stderr}"
        );
    }
}

/// Fast measurement options for the runs that must succeed.
const QUICK: [&str; 7] = [
    "-J",
    "2",
    "--tile-pixels",
    "16",
    "--border-pixels",
    "2",
    "--no-bispectrum",
];

#[test]
fn maps_and_masks_in_different_coordinate_systems_are_refused() {
    let f = Fixtures::new();
    let map_c = f.path("map16_c.fits");
    let map_g = f.path("map16_g.fits");
    let mask_g = f.path("mask16_g.fits");
    let out = f.path("out.json");
    let words = "is in equatorial coordinates (COORDSYS 'C') but";
    let with_quick = |v: &[&str]| {
        let mut a = strings(v);
        a.extend(strings(&QUICK));
        a
    };
    let cases: Vec<(Vec<String>, &str)> = vec![
        (
            with_quick(&["measure", &map_c, "--mask", &mask_g, "-o", &out]),
            words,
        ),
        (
            with_quick(&["measure", &map_c, "--cross", &map_g, "-o", &out]),
            words,
        ),
        (
            with_quick(&[
                "measure",
                &map_c,
                "--cross",
                &map_c,
                "--cross-mask",
                &mask_g,
                "-o",
                &out,
            ]),
            words,
        ),
        (strings(&["spectra", &map_c, "--mask", &mask_g]), words),
        (strings(&["spectra", &map_c, "--cross", &map_g]), words),
        (with_quick(&["tiles", &map_c, "--mask", &mask_g]), words),
        (
            strings(&[
                "synthesize",
                "--target",
                &map_c,
                "--mask",
                &mask_g,
                "-o",
                &f.path("x.fits"),
            ]),
            words,
        ),
        (
            with_quick(&[
                "ensemble",
                "-o",
                &f.path("e_sys"),
                "--maps",
                &map_c,
                "--mask",
                &mask_g,
            ]),
            "the first map is in equatorial coordinates (COORDSYS 'C') but",
        ),
        (
            with_quick(&[
                "plot",
                "tile-map",
                &map_c,
                "--mask",
                &mask_g,
                "--statistic",
                "mean",
                "-o",
                &f.path("t.png"),
            ]),
            words,
        ),
    ];
    refuse_all(&f, &cases);
}

#[test]
fn coordinate_systems_that_agree_or_are_unstated_or_overridden_are_measured() {
    // 'C' and 'CELESTIAL' name one system; a file without COORDSYS is not compared; the
    // override accepts a stated mismatch
    let f = Fixtures::new();
    let map_c = f.path("map16_c.fits");
    for (mask, extra) in [
        ("mask16_cel.fits", None),
        ("mask16_none.fits", None),
        ("mask16_g.fits", Some("--allow-coordsys-mismatch")),
    ] {
        let out = f.path(&format!("{mask}.json"));
        let mut args = strings(&["measure", &map_c, "--mask", &f.path(mask), "-o", &out]);
        args.extend(strings(&QUICK));
        args.extend(extra.map(str::to_string));
        let (code, stderr) = run(&args, f.dir.path());
        assert_eq!(code, Some(0), "{args:?}: {stderr}");
        assert!(Path::new(&out).is_file(), "{args:?}");
    }
    let (code, stderr) = run(
        &strings(&[
            "measure",
            &f.path("map16.fits"),
            "--mask",
            &f.path("mask16_g.fits"),
            "-o",
            &f.path("plain.json"),
            "-J",
            "2",
            "--tile-pixels",
            "16",
            "--border-pixels",
            "2",
            "--no-bispectrum",
        ]),
        f.dir.path(),
    );
    assert_eq!(code, Some(0), "a map without COORDSYS: {stderr}");
}

#[test]
fn maps_without_anything_to_measure_are_refused_with_the_reason() {
    let f = Fixtures::new();
    let out = f.path("out.json");
    let constant = f.path("constant16.fits");
    let huge = f.path("huge16.fits");
    let one = f.path("onepixel16.fits");
    let allbad = f.path("allbad16.fits");
    let flat = "the map has no fluctuations on its footprint (every valid pixel is 3)";
    let big = "pixel 5 holds 1e300, beyond ±1e90";
    let single = "only one valid pixel on its footprint";
    let with_quick = |v: &[&str]| {
        let mut a = strings(v);
        a.extend(strings(&QUICK));
        a
    };
    let cases: Vec<(Vec<String>, &str)> = vec![
        (with_quick(&["measure", &constant, "-o", &out]), flat),
        (strings(&["spectra", &constant]), flat),
        (
            with_quick(&[
                "measure",
                &f.path("map16.fits"),
                "--cross",
                &constant,
                "-o",
                &out,
            ]),
            flat,
        ),
        (
            strings(&["spectra", &f.path("map16.fits"), "--cross", &constant]),
            flat,
        ),
        (
            strings(&["synthesize", "--target", &constant, "-o", &f.path("x.fits")]),
            flat,
        ),
        (
            with_quick(&["ensemble", "-o", &f.path("e_flat"), "--maps", &constant]),
            "the map has no fluctuations in the map",
        ),
        (with_quick(&["measure", &huge, "-o", &out]), big),
        (strings(&["spectra", &huge]), big),
        (with_quick(&["measure", &one, "-o", &out]), single),
        (strings(&["spectra", &one]), single),
        (
            with_quick(&["measure", &allbad, "-o", &out]),
            "every pixel is bad (UNSEEN or NaN): nothing to measure",
        ),
        (
            strings(&["spectra", &allbad]),
            "every pixel is bad (UNSEEN or NaN): nothing to measure",
        ),
    ];
    refuse_all(&f, &cases);
}

#[test]
fn option_and_file_mistakes_are_named_precisely() {
    let f = Fixtures::new();
    let map = f.path("map16.fits");
    let out = f.path("out.json");
    let write = |name: &str, text: &str| {
        std::fs::write(f.dir.path().join(name), text).unwrap();
        f.path(name)
    };
    let settings = write("typed.toml", "scales = 3\norientations = \"four\"\n");
    let recipe = write("negative.toml", "nside = 16\ncount = -2\n");
    let plan = write("plan.toml", "paired = true\n\n[[case]]\nname = 3\n");
    let list = write(
        "twice.txt",
        "map16.fits\n# the same map again\n./map_link.fits\n",
    );
    let cases: Vec<(Vec<String>, &str)> = vec![
        (
            strings(&["measure", &map, "-o", &out, "--settings", &settings]),
            "bad settings: line 2, key `orientations`: invalid type: string \"four\"",
        ),
        (
            strings(&["ensemble", "-o", &f.path("e_neg"), "--simulate", &recipe]),
            "bad recipe: line 2, key `count`: invalid value: integer `-2`",
        ),
        (
            strings(&["forecast", "--plan", &plan, "-o", &out]),
            "not a forecast plan: line 4, key `name`",
        ),
        (
            strings(&["ensemble", "-o", &f.path("e_twice"), "--map-list", &list]),
            "lines 1 and 3 name the same file",
        ),
        (
            strings(&[
                "forecast",
                "--fiducial",
                &f.path("not_an_ensemble"),
                "--derivative",
                "a,0.1,x,y",
                "--derivative",
                "a,0.2,x,y",
                "-o",
                &out,
            ]),
            "--derivative names parameter 'a' twice",
        ),
        (
            strings(&[
                "forecast",
                "--fiducial",
                &f.path("not_an_ensemble"),
                "--derivative",
                "a,0.1,x,y",
                "--scale-min-arcmin",
                "-5",
                "-o",
                &out,
            ]),
            "cannot be negative, got -5",
        ),
        (
            strings(&["spectra", &map, "--lmax", "0"]),
            "--lmax must be at least 1",
        ),
    ];
    refuse_all(&f, &cases);
}

#[test]
fn an_array_task_id_without_a_task_count_is_refused() {
    // without the count every array task would measure the whole ensemble
    let f = Fixtures::new();
    let args = strings(&[
        "ensemble",
        "-o",
        &f.path("e_slurm"),
        "--maps",
        &f.path("map16.fits"),
    ]);
    let before = snapshot(f.dir.path());
    let (code, stderr) = run_program_with(
        env!("CARGO_BIN_EXE_planisphere"),
        &args,
        f.dir.path(),
        &[("SLURM_ARRAY_TASK_ID", "3")],
    );
    assert_refused(
        &args,
        code,
        &stderr,
        "SLURM_ARRAY_TASK_ID=3 is set but SLURM_ARRAY_TASK_COUNT is not",
        &before,
        f.dir.path(),
    );
}

#[test]
fn masks_with_a_single_or_an_infinite_weight_are_refused_with_the_reason() {
    let f = Fixtures::new();
    let map = f.path("map16.fits");
    let out = f.path("out.json");
    let with_quick = |v: &[&str]| {
        let mut a = strings(v);
        a.extend(strings(&QUICK));
        a
    };
    let one = f.path("onepixel_mask16.fits");
    let inf = f.path("inf_mask16.fits");
    let single = "the mask has only one observed pixel (pixel 1000): there are no fluctuations";
    let infinite = "inf_mask16.fits: the mask holds +inf in 2 pixels (first: pixel 7)";
    let cases: Vec<(Vec<String>, &str)> = vec![
        (
            with_quick(&["measure", &map, "--mask", &one, "-o", &out]),
            single,
        ),
        (
            with_quick(&[
                "measure", &map, "--mask", &one, "--taper", "none", "-o", &out,
            ]),
            single,
        ),
        (strings(&["spectra", &map, "--mask", &one]), single),
        (
            with_quick(&["measure", &map, "--mask", &inf, "-o", &out]),
            infinite,
        ),
        (strings(&["spectra", &map, "--mask", &inf]), infinite),
    ];
    refuse_all(&f, &cases);
}

#[test]
fn user_numbers_in_messages_are_printed_compactly() {
    // a value given with 300 leading zeros comes back in scientific notation, not 300 digits
    let f = Fixtures::new();
    let cases: Vec<(Vec<String>, &str)> = vec![(
        strings(&[
            "sky",
            "--nside",
            "16",
            "--lognormal-shift",
            "1e-300",
            "-o",
            &f.path("s.fits"),
        ]),
        "1e-300",
    )];
    refuse_all(&f, &cases);
    for (args, _) in &cases {
        let (_, stderr) = run(args, f.dir.path());
        assert!(stderr.len() < 300, "{args:?}: {stderr}");
    }
}

/// Measures a simulated ensemble of `count` NSIDE 16 skies (random seed `seed`) into `name`.
fn tiny_ensemble(f: &Fixtures, name: &str, count: u32, seed: u32) -> String {
    let recipe = f.path(&format!("{name}.toml"));
    std::fs::write(
        &recipe,
        format!("nside = 16\ncount = {count}\nseed = {seed}\n"),
    )
    .unwrap();
    let dir = f.path(name);
    let mut args = strings(&["ensemble", "-o", &dir, "--simulate", &recipe, "--quiet"]);
    args.extend(strings(&QUICK));
    let (code, stderr) = run(&args, f.dir.path());
    assert_eq!(code, Some(0), "{stderr}");
    dir
}

#[test]
fn a_forecast_in_which_every_statistic_set_fails_is_refused() {
    // 3 simulations are too few for an unbiased precision matrix of any set (Hartlap et al.
    // 2007 needs more than p + 2); with 6, only the 2-statistic power spectrum succeeds and the
    // run is kept, naming the failed sets on stderr
    let f = Fixtures::new();
    let fid = tiny_ensemble(&f, "fid3", 3, 1);
    let plus = tiny_ensemble(&f, "plus3", 3, 7);
    let derivative = format!("a,0.1,{plus},{fid}");
    let args = strings(&[
        "forecast",
        "--fiducial",
        &fid,
        "--derivative",
        &derivative,
        "-o",
        &f.path("fc.json"),
    ]);
    let before = snapshot(f.dir.path());
    let (code, stderr) = run(&args, f.dir.path());
    assert_refused(
        &args,
        code,
        &stderr,
        "every statistic set failed (6 of 6); the first, power spectrum (pseudo-C_l): 3 simulations are too few",
        &before,
        f.dir.path(),
    );

    let fid = tiny_ensemble(&f, "fid6", 6, 1);
    let plus = tiny_ensemble(&f, "plus6", 6, 7);
    let derivative = format!("a,0.1,{plus},{fid}");
    let out = f.path("fc6.json");
    let args = strings(&[
        "forecast",
        "--fiducial",
        &fid,
        "--derivative",
        &derivative,
        "-o",
        &out,
    ]);
    let (code, stderr) = run(&args, f.dir.path());
    assert_eq!(code, Some(0), "{stderr}");
    assert!(Path::new(&out).is_file());
    assert!(
        stderr.contains("planisphere: warning: 5 of 6 statistic sets failed (tile power spectrum,"),
        "{stderr}"
    );
}

#[test]
fn a_png_that_cannot_be_written_is_refused_in_one_line() {
    // a file-size limit (ulimit -f, its signal ignored) makes the write fail as a full disk
    // does: the system's reason comes back in one line and no partial file is left
    let f = Fixtures::new();
    let bin = env!("CARGO_BIN_EXE_planisphere");
    let mut args = strings(&["tiles", &f.path("map16.fits"), "--png", &f.path("t.png")]);
    args.extend(strings(&QUICK));
    let before = snapshot(f.dir.path());
    let mut line = vec![
        "-c".to_string(),
        "trap '' XFSZ; ulimit -f 8 && exec \"$0\" \"$@\"".to_string(),
        bin.to_string(),
    ];
    line.extend(args.iter().cloned());
    let (code, stderr) = run_program("sh", &line, f.dir.path());
    assert_refused(
        &args,
        code,
        &stderr,
        "t.png: File too large (os error 27)",
        &before,
        f.dir.path(),
    );
}

#[test]
fn a_map_too_large_to_measure_within_the_memory_limit_is_refused_with_the_estimate() {
    // an NSIDE 1024 map (12.6 million pixels) needs about 0.6 GB to measure; under an
    // address-space limit of 400 MB (ulimit -v) it is refused before its pixels are read
    let f = Fixtures::new();
    let big = nside_1024_sky(&f, "64");
    let mut args = strings(&["measure", &big, "-o", &f.path("m.json")]);
    args.extend(strings(&QUICK));
    let before = snapshot(f.dir.path());
    let (code, stderr) = run_under_address_limit(400_000, &args, f.dir.path());
    assert_refused(
        &args,
        code,
        &stderr,
        "measuring a NSIDE 1024 map needs about 0.6 GB, more than the 0.4 GB of the address-space limit (ulimit -v)",
        &before,
        f.dir.path(),
    );
}

#[test]
fn every_command_that_runs_out_of_memory_stops_with_one_line_and_exit_2() {
    // under a small address-space limit (ulimit -v) each command that reads an NSIDE 1024 map
    // (a 100 MB f64 column) either refuses it from its estimate or, where the estimate is
    // missing or low, stops at the failed allocation: one line, exit code 2, no file written,
    // never Rust's abort (exit 134 with a backtrace)
    let f = Fixtures::new();
    let big = nside_1024_sky(&f, "32");
    let cases: Vec<(u64, Vec<String>)> = vec![
        (
            150_000,
            strings(&["spectra", &big, "--json", &f.path("s.json")]),
        ),
        (150_000, strings(&["tiles", &big])),
        (
            150_000,
            strings(&[
                "plot",
                "tile-map",
                &big,
                "--statistic",
                "mean",
                "-o",
                &f.path("t.png"),
            ]),
        ),
        (
            150_000,
            strings(&["synthesize", "--target", &big, "-o", &f.path("s.fits")]),
        ),
        (100_000, strings(&["inspect", &big])),
    ];
    let before = snapshot(f.dir.path());
    for (limit, args) in &cases {
        let (code, stderr) = run_under_address_limit(*limit, args, f.dir.path());
        assert_refused(args, code, &stderr, "", &before, f.dir.path());
        assert!(
            stderr.contains("address-space limit (ulimit -v)"),
            "{args:?}: {stderr}"
        );
    }
}

#[test]
fn pair_ensemble_mistakes_are_refused_in_one_line() {
    // lists that do not pair up, a second list without its first, a correlation outside
    // [-1, 1], and pair and single ensembles mixed in one forecast or one directory
    let f = Fixtures::new();
    std::fs::write(f.path("pair_a.txt"), "map16.fits\nnan_north16.fits\n").unwrap();
    std::fs::write(f.path("pair_b.txt"), "map16.fits\n").unwrap();
    std::fs::write(
        f.path("bad_pair.toml"),
        "nside = 16\ncount = 3\n[pair]\ncorrelation = 1.5\n",
    )
    .unwrap();
    std::fs::write(
        f.path("pair.toml"),
        "nside = 16\ncount = 6\nseed = 3\n[pair]\ncorrelation = 0.5\n",
    )
    .unwrap();
    let mut args = strings(&[
        "ensemble",
        "-o",
        &f.path("pairs"),
        "--simulate",
        &f.path("pair.toml"),
        "--quiet",
    ]);
    args.extend(strings(&QUICK));
    let (code, stderr) = run(&args, f.dir.path());
    assert_eq!(code, Some(0), "{stderr}");
    let single = tiny_ensemble(&f, "single", 6, 1);
    // a pair row copied into a single-map ensemble
    let mixed = f.path("mixed");
    std::fs::create_dir_all(Path::new(&mixed).join("rows")).unwrap();
    std::fs::copy(
        Path::new(&single).join("ensemble.json"),
        Path::new(&mixed).join("ensemble.json"),
    )
    .unwrap();
    std::fs::copy(
        Path::new(&f.path("pairs")).join("rows/row_000000.json"),
        Path::new(&mixed).join("rows/row_000000.json"),
    )
    .unwrap();
    let out = f.path("fc.json");
    let pairs = f.path("pairs");
    let cases = vec![
        (
            strings(&[
                "ensemble",
                "-o",
                &f.path("p1"),
                "--map-list",
                &f.path("pair_a.txt"),
                "--second-map-list",
                &f.path("pair_b.txt"),
            ]),
            "the first map list has 2 maps and the second 1: pairs need lists of equal length",
        ),
        (
            strings(&[
                "ensemble",
                "-o",
                &f.path("p2"),
                "--maps",
                &f.path("*16.fits"),
                "--second-maps",
                &f.path("map8.fits"),
            ]),
            "pairs need lists of equal length",
        ),
        (
            strings(&[
                "ensemble",
                "-o",
                &f.path("p3"),
                "--simulate",
                &f.path("pair.toml"),
                "--second-maps",
                &f.path("map16.fits"),
            ]),
            "--second-maps pairs with --maps: give both lists",
        ),
        (
            strings(&[
                "ensemble",
                "-o",
                &f.path("p4"),
                "--maps",
                &f.path("map16.fits"),
                "--second-map-list",
                &f.path("pair_b.txt"),
            ]),
            "--second-map-list pairs with --map-list",
        ),
        (
            strings(&[
                "ensemble",
                "-o",
                &f.path("p5"),
                "--simulate",
                &f.path("bad_pair.toml"),
            ]),
            "recipe pair.correlation must lie in [-1, 1], got 1.5",
        ),
        (
            strings(&[
                "forecast",
                "--fiducial",
                &pairs,
                "--derivative",
                &format!("a,0.1,{single},{single}"),
                "-o",
                &out,
            ]),
            "holds single maps but the fiducial ensemble",
        ),
        (
            strings(&[
                "forecast",
                "--fiducial",
                &single,
                "--derivative",
                &format!("a,0.1,{pairs},{pairs}"),
                "-o",
                &out,
            ]),
            "holds pairs of maps but the fiducial ensemble",
        ),
        (
            strings(&["merge", &mixed]),
            "row 0 belongs to another job (pairs of maps vs single maps, row vs this job)",
        ),
        (
            {
                let mut v = strings(&[
                    "ensemble",
                    "-o",
                    &single,
                    "--simulate",
                    &f.path("pair.toml"),
                ]);
                v.extend(strings(&QUICK));
                v
            },
            "already holds another ensemble job (single maps vs pairs of maps, there vs here)",
        ),
    ];
    refuse_all(&f, &cases);
}

#[test]
fn galaxy_catalogue_mistakes_are_refused_in_one_line() {
    let f = Fixtures::new();
    let p = |n: &str| f.dir.path().join(n);
    let row = "10.0,-5.0,0.1,0.2,1.0\n";
    std::fs::write(p("good.csv"), format!("RA,DEC,E1,E2,WEIGHT\n{row}{row}")).unwrap();
    std::fs::write(p("no_e1.csv"), "RA,DEC,G1,G2\n10,-5,0.1,0.2\n").unwrap();
    // Dec given as colatitude in degrees: out of range on every row
    std::fs::write(
        p("colatitude.csv"),
        "RA,DEC,E1,E2\n10,95,0.1,0.2\n20,120,0.1,0.2\n30,170,0.0,0.1\n",
    )
    .unwrap();
    std::fs::write(
        p("all_bad.csv"),
        "RA,DEC,E1,E2\n10,5,1.5,0.2\n20,6,nan,0.2\n30,7,0.9,0.9\n",
    )
    .unwrap();
    std::fs::write(p("empty.csv"), "").unwrap();
    std::fs::write(p("header_only.csv"), "RA,DEC,E1,E2\n").unwrap();
    std::fs::write(p("ragged.csv"), "RA,DEC,E1,E2\n10,5,0.1,0.2\n20,6,0.1\n").unwrap();
    let fits = std::fs::read(
        Path::new(env!("CARGO_MANIFEST_DIR"))
            .join("reference-values/catalogue_binning/galaxies.fits"),
    )
    .unwrap();
    std::fs::write(p("truncated_catalogue.fits"), &fits[..fits.len() / 2]).unwrap();
    // the same table with RA declared in radians
    let mut radians = fits.clone();
    let from = b"TUNIT1  = 'deg     '";
    let at = radians
        .windows(from.len())
        .position(|w| w == from)
        .expect("TUNIT1 card in the reference table");
    radians[at..at + from.len()].copy_from_slice(b"TUNIT1  = 'rad     '");
    std::fs::write(p("radians.fits"), &radians).unwrap();
    let out = f.path("maps.fits");
    let shear = |catalogue: &str, extra: &[&str]| -> Vec<String> {
        let mut v = vec!["shear-maps".to_string(), f.path(catalogue)];
        if !extra.contains(&"--nside") {
            v.extend(["--nside".to_string(), "8".to_string()]);
        }
        v.extend(["-o".to_string(), out.clone()]);
        v.extend(extra.iter().map(|s| s.to_string()));
        v
    };
    let cases: Vec<(Vec<String>, &str)> = vec![
        (
            shear("no_e1.csv", &[]),
            "no column 'E1' for e1; the columns are 'RA', 'DEC', 'G1', 'G2'",
        ),
        (
            shear("good.csv", &["--weight-column", "W"]),
            "no weight column 'W'",
        ),
        (
            shear("colatitude.csv", &[]),
            "none of its 3 rows can be used (3 with Dec outside [-90, 90] degrees",
        ),
        (
            shear("all_bad.csv", &[]),
            "none of its 3 rows can be used (2 with |e| >= 1",
        ),
        (shear("empty.csv", &[]), "the catalogue file is empty"),
        (shear("header_only.csv", &[]), "has no galaxy rows"),
        (shear("ragged.csv", &[]), "found record with 3 fields"),
        (
            shear("truncated_catalogue.fits", &[]),
            "truncated FITS file",
        ),
        (shear("radians.fits", &[]), "column 'RA' is in radians"),
        (shear("missing.csv", &[]), "No such file or directory"),
        (
            shear("good.csv", &["--nside", "0"]),
            "NSIDE 0 is out of range",
        ),
        (
            shear("good.csv", &["--nside", "16384"]),
            "NSIDE 16384 is above 8192",
        ),
        (
            shear("good.csv", &["--min-galaxies", "5"]),
            "no NSIDE 8 pixel holds 5 or more galaxies",
        ),
        (
            shear("good.csv", &["--noise-realisations", "2"]),
            "--noise-realisations needs --noise-output",
        ),
        (
            shear(
                "good.csv",
                &[
                    "--noise-realisations",
                    "2",
                    "--noise-output",
                    &f.path("n.fits"),
                ],
            ),
            "must contain {index}",
        ),
        (
            shear("good.csv", &["--block-rows", "0"]),
            "--block-rows must be at least 1",
        ),
        (
            shear("good.csv", &["--lmax", "1000"]),
            "--lmax 1000 is above 3·NSIDE − 1 = 23",
        ),
        (
            shear("good.csv", &["--smooth-arcmin", "-5"]),
            "smoothing FWHM must be a finite number of arcminutes >= 0, got -5",
        ),
    ];
    refuse_all(&f, &cases);
    // ensembles of catalogue noise realisations
    std::fs::write(
        p("noise_with_sky.toml"),
        "nside = 16\ncount = 2\nspectrum = \"cl.txt\"\n[catalogue_noise]\ncatalogue = \"good.csv\"\n",
    )
    .unwrap();
    std::fs::write(
        p("noise_bad_map.toml"),
        "nside = 16\ncount = 2\n[catalogue_noise]\ncatalogue = \"good.csv\"\nmap = \"kappa\"\n",
    )
    .unwrap();
    let ensemble = |recipe: &str| -> Vec<String> {
        strings(&[
            "ensemble",
            "--simulate",
            &f.path(recipe),
            "-o",
            &f.path("noise_ens"),
        ])
    };
    refuse_all(
        &f,
        &[
            (
                ensemble("noise_with_sky.toml"),
                "recipe key 'spectrum' describes a simulated sky and does not apply with [catalogue_noise]",
            ),
            (ensemble("noise_bad_map.toml"), "unknown variant `kappa`"),
        ],
    );
    // the output may not replace the catalogue
    let same = vec![
        "shear-maps".to_string(),
        f.path("good.csv"),
        "--nside".to_string(),
        "8".to_string(),
        "-o".to_string(),
        f.path("good.csv"),
    ];
    let before = snapshot(f.dir.path());
    let (code, stderr) = run(&same, f.dir.path());
    assert_refused(&same, code, &stderr, "good.csv", &before, f.dir.path());
}
