//! Peak memory and time of `planisphere measure` reading the whole map against reading it only
//! where the tiles sample it, side by side in one run, with the two JSON documents compared
//! byte for byte.
//!
//! ```text
//! cargo run --release --example measure_memory                          # NSIDE 1024, 2048
//! cargo run --release --example measure_memory -- --nside 1024,2048,4096 --inputs /tmp/mm
//! ```
//!
//! Options: `--nside A,B,…` (default 1024,2048; powers of two from 64 to 8192), `--inputs DIR`
//! (where the generated maps and masks are cached, default `target/measure-memory`; an NSIDE
//! 8192 map takes 6.4 GB there, its mask 3.2 GB), `-J` (default 5), `--keep` (keep the inputs;
//! by default each NSIDE's files are deleted after its rows, the smallest two excepted),
//! `--paths whole,footprint` (which paths to run, default both; at NSIDE 8192 the whole-map
//! path needs about 19 GiB, so `--paths footprint` measures the footprint path alone and the
//! documents are not compared).
//!
//! Inputs (made here, reproducible): a map of f64 values in RING order, white noise from a
//! hash of the pixel index plus a few long waves (not a cosmological sky: what is measured is
//! memory and time, and the equality of the two documents), and the f_sky ≈ 0.37 survey mask
//! of `scenario::benchmark_survey_mask` (|b| > 20° less 40 holes, within −70° < δ < +10°),
//! stored as float32.
//!
//! Rows, per NSIDE, each a child process of this example (peak RSS = the child's `ru_maxrss`
//! from `wait4`, CPU = user + sys), run in the order whole, footprint, whole, footprint:
//! **whole map** — the command's path before footprint-sized reading
//! (`cli::measure::run_reading_whole_map`: map and mask read whole into memory);
//! **footprint** — `cli::measure::run`, which reads the mask by chunks into blocks of 64
//! pixels holding a positive weight and the map only on the blocks the tiles read. Both run
//! `measure MAP --mask MASK -J <J> --no-bispectrum -o OUT`; the table shows the second run of
//! each, and whether the documents are equal byte for byte.

#[cfg(unix)]
#[path = "support/child_cost.rs"]
mod child_cost;

#[cfg(unix)]
fn main() {
    if let Err(e) = memory::run() {
        eprintln!("measure_memory: {e}");
        std::process::exit(2);
    }
}

#[cfg(not(unix))]
fn main() {
    eprintln!("measure_memory: needs a Unix system (child rusage through wait4)");
    std::process::exit(2);
}

#[cfg(unix)]
mod memory {
    use crate::child_cost::{run_child, ChildCost};
    use clap::Parser;
    use planisphere::cli::measure::MeasureArgs;
    use planisphere::io::fits_io::{write_footprint, write_map, ValuePrecision, WriteOptions};
    use planisphere::{Ordering, Pixelization, SkyMap};
    use std::path::{Path, PathBuf};
    use std::process::Command;

    type Res<T> = std::result::Result<T, String>;

    /// The `measure` arguments of a child run.
    #[derive(Parser)]
    struct ChildArgs {
        #[command(flatten)]
        measure: MeasureArgs,
    }

    struct Options {
        nsides: Vec<u32>,
        inputs: PathBuf,
        scales: usize,
        keep: bool,
        paths: Vec<&'static str>,
    }

    fn parse_options(mut args: impl Iterator<Item = String>) -> Res<Options> {
        let here = std::env::current_exe().map_err(|e| format!("cannot locate myself: {e}"))?;
        let target = here
            .parent()
            .and_then(Path::parent)
            .and_then(Path::parent)
            .ok_or("cannot locate the target folder")?
            .to_path_buf();
        let mut o = Options {
            nsides: vec![1024, 2048],
            inputs: target.join("measure-memory"),
            scales: 5,
            keep: false,
            paths: vec!["whole", "footprint"],
        };
        while let Some(a) = args.next() {
            let mut value = |name: &str| args.next().ok_or(format!("{name} needs a value"));
            match a.as_str() {
                "--nside" => {
                    o.nsides = value("--nside")?
                        .split(',')
                        .map(|s| {
                            s.trim()
                                .parse::<u32>()
                                .ok()
                                .filter(|n| n.is_power_of_two() && (64..=8192).contains(n))
                                .ok_or(format!("--nside: bad NSIDE '{s}'"))
                        })
                        .collect::<Res<_>>()?
                }
                "--inputs" => o.inputs = PathBuf::from(value("--inputs")?),
                "-J" => {
                    o.scales = value("-J")?
                        .parse()
                        .map_err(|_| "-J needs an integer".to_string())?
                }
                "--keep" => o.keep = true,
                "--paths" => {
                    o.paths = value("--paths")?
                        .split(',')
                        .map(|s| match s.trim() {
                            "whole" => Ok("whole"),
                            "footprint" => Ok("footprint"),
                            other => Err(format!("--paths: unknown path '{other}'")),
                        })
                        .collect::<Res<_>>()?
                }
                other => return Err(format!("unknown argument '{other}'")),
            }
        }
        Ok(o)
    }

    /// A hash of `p` as a uniform number in [0, 1) (SplitMix64 finaliser, common practice).
    fn uniform(p: u64, stream: u64) -> f64 {
        let mut z = p
            .wrapping_mul(0x9E37_79B9_7F4A_7C15)
            .wrapping_add(stream.wrapping_mul(0xBF58_476D_1CE4_E5B9));
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^= z >> 31;
        (z >> 11) as f64 / (1u64 << 53) as f64
    }

    /// The map and mask files of one NSIDE, made when absent.
    fn make_inputs(nside: u32, dir: &Path) -> Res<(PathBuf, PathBuf)> {
        std::fs::create_dir_all(dir).map_err(|e| format!("{}: {e}", dir.display()))?;
        let map_path = dir.join(format!("map_nside{nside}.fits"));
        let mask_path = dir.join(format!("mask_nside{nside}.fits"));
        let pix = Pixelization::new(nside, Ordering::Ring).map_err(|e| e.to_string())?;
        if !mask_path.is_file() {
            let mask = planisphere::simulate::scenario::benchmark_survey_mask(pix)
                .map_err(|e| e.to_string())?;
            let options = WriteOptions {
                precision: ValuePrecision::Float32,
                coordsys: Some("G".into()),
                ..Default::default()
            };
            write_footprint(&mask_path, "MASK", &mask, &options).map_err(|e| e.to_string())?;
        }
        if !map_path.is_file() {
            let map = SkyMap::from_fn(pix, |d| {
                let p = pix.pixel_of(d);
                // Box–Muller normal deviate from two hashes, plus long waves
                let (u1, u2) = (uniform(p, 1).max(1e-300), uniform(p, 2));
                let noise = (-2.0 * u1.ln()).sqrt() * (std::f64::consts::TAU * u2).cos();
                let waves = (3.0 * d.theta).sin() * (5.0 * d.phi).cos()
                    + 0.5 * (11.0 * d.theta).cos() * (7.0 * d.phi).sin();
                0.01 * noise + 0.02 * waves
            });
            let mut map = map;
            map.coordsys = Some("G".into());
            write_map(&map_path, "VALUE", &map, &WriteOptions::default())
                .map_err(|e| e.to_string())?;
        }
        Ok((map_path, mask_path))
    }

    /// Runs one child: `child whole|footprint <measure arguments>`.
    fn child(mut args: impl Iterator<Item = String>) -> Res<()> {
        let path = args.next().ok_or("child needs whole or footprint")?;
        let parsed = ChildArgs::try_parse_from(std::iter::once("measure".to_string()).chain(args))
            .map_err(|e| e.to_string())?;
        match path.as_str() {
            "whole" => planisphere::cli::measure::run_reading_whole_map(&parsed.measure),
            "footprint" => planisphere::cli::measure::run(&parsed.measure),
            other => return Err(format!("unknown path '{other}'")),
        }
        .map_err(|e| e.to_string())
    }

    pub fn run() -> Res<()> {
        let mut args = std::env::args().skip(1).peekable();
        if args.peek().map(String::as_str) == Some("child") {
            args.next();
            return child(args);
        }
        if args.peek().map(String::as_str) == Some("inputs") {
            args.next();
            let o = parse_options(args)?;
            for &nside in &o.nsides {
                make_inputs(nside, &o.inputs)?;
            }
            return Ok(());
        }
        let o = parse_options(args)?;
        let me = std::env::current_exe().map_err(|e| format!("cannot locate myself: {e}"))?;
        println!(
            "measure MAP --mask MASK -J {} --no-bispectrum, threads {}; map f64 RING, mask float32 f_sky ≈ 0.37",
            o.scales,
            std::thread::available_parallelism().map_or(1, |n| n.get())
        );
        println!("| NSIDE | map file | path | peak RSS | wall | CPU | peak ratio | documents |");
        println!("|---|---|---|---|---|---|---|---|");
        for &nside in &o.nsides {
            let (map, mask) = make_inputs(nside, &o.inputs)?;
            let map_bytes = std::fs::metadata(&map).map_err(|e| e.to_string())?.len();
            let out = |which: &str| o.inputs.join(format!("out_{which}_nside{nside}.json"));
            let mut costs: Vec<(&str, ChildCost)> = Vec::new();
            let order: Vec<&str> = o.paths.iter().chain(o.paths.iter()).copied().collect();
            for which in order {
                let mut cmd = Command::new(&me);
                cmd.arg("child")
                    .arg(which)
                    .arg(&map)
                    .arg("--mask")
                    .arg(&mask)
                    .args(["-J", &o.scales.to_string(), "--no-bispectrum", "-o"])
                    .arg(out(which));
                let cost = run_child(&mut cmd, &format!("{which} NSIDE {nside}"))?;
                costs.retain(|(w, _)| *w != which);
                costs.push((which, cost));
            }
            let read = |w: &str| std::fs::read(out(w)).map_err(|e| e.to_string());
            let same = if o.paths.len() == 2 {
                if read("whole")? == read("footprint")? {
                    "equal"
                } else {
                    "DIFFER"
                }
            } else {
                "not compared (one path)"
            };
            let whole_peak = costs[0].1.peak_bytes;
            for (which, c) in &costs {
                println!(
                    "| {nside} | {:.0} MB | {} | {:.1} MiB | {:.1} s | {:.1} s | {:.3} | {} |",
                    map_bytes as f64 / 1e6,
                    if *which == "whole" {
                        "whole map"
                    } else {
                        "footprint"
                    },
                    c.peak_bytes / (1024.0 * 1024.0),
                    c.wall,
                    c.cpu,
                    c.peak_bytes / whole_peak,
                    same
                );
            }
            if !o.keep && nside > 2048 {
                for p in [&map, &mask] {
                    let _ = std::fs::remove_file(p);
                }
            }
        }
        Ok(())
    }
}
