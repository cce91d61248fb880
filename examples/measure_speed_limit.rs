//! How far `planisphere measure` is from its speed limit: one table, every number measured in
//! this run on the same inputs.
//!
//! ```text
//! cargo build --release            # the `planisphere` binary is run as a child process
//! cargo run --release --example measure_speed_limit                 # NSIDE 256, about a minute
//! cargo run --release --example measure_speed_limit -- --nside 256,1024 [--no-numpy]
//! ```
//!
//! Options: `--nside A,B,…` (default 256; any of 256, 1024, 2048 or another power of two ≥ 64),
//! `--no-numpy` (skip the numpy + healpy pipeline), `--inputs DIR` (cache of the generated maps
//! and masks, default `target/speed-limit`), `--binary PATH` (default: the `planisphere` binary
//! next to this example's `examples/` folder), `-J`, `-L` (default 5 and 4).
//!
//! Inputs (made here, cached in the inputs folder, reproducible from fixed seeds): a Gaussian
//! convergence-like map (RING, f64; `skies::SkyRecipe` with the built-in demo spectrum, σ = 0.02,
//! ℓmax = 3·NSIDE − 1) and a binary survey mask of f_sky ≈ 0.37: galactic latitude |b| > 20°
//! (`scenario::benchmark_survey_mask`, the map being in galactic coordinates) less 40 circular holes of
//! 0.5°–2.5° at seeded random positions, intersected with the declination band −70° < δ < +10°
//! (δ from the galactic direction through the J2000 equatorial → galactic rotation of the
//! Hipparcos catalogue, ESA 1997, vol. 1 §1.5.3; `Footprint::intersection`).
//!
//! Rows, per NSIDE:
//! * **planisphere measure** — the release binary, `planisphere measure MAP --mask MASK -J 5 -L 4
//!   --pixel-arcmin <map spacing> --no-bispectrum -o out.json`, run as a child process; wall time
//!   around the child, CPU = user + sys and peak memory = ru_maxrss of that child alone (from
//!   `wait4`, so children do not mix); tiles and tile size from the JSON's tiling summary.
//! * **numpy + healpy** — `reference-values/measure_pipeline_numpy.py` on the same files, timed
//!   the same way (skipped with a message when healpy is not importable).
//! * **floor** — what the transform cannot go below with today's algorithm and FFT library:
//!   per tile, every 2-D FFT of `ScatteringEngine::fft_census` × the time rustfft/realfft take
//!   for one 2-D FFT of that size and kind, timed here (rows in one batched call, one transpose,
//!   columns in one batched call; real input: row r2c transforms, then n/2 + 1 columns), plus
//!   one sampling per tile pixel (the library's `TileSampler::sample` timed on 24 tiles, per tile
//!   pixel; it reads map and mask and sets solid angles), times the number of tiles. One core;
//!   the tile power spectrum that `measure` also computes is not in the floor.
//!
//! Columns: wall s, CPU s, peak MiB, tiles (patches for numpy), tile px / fp px (plane pixels
//! transformed per footprint pixel: tiles × n² / footprint pixels), CPU µs / fp px (CPU time
//! per footprint pixel; it should stay flat from NSIDE to NSIDE).
//!
//! Ratios printed under the table, with their targets: numpy CPU / ours ≥ 20, ours / floor ≤ 2,
//! peak memory ≤ map + mask + 100 MiB per worker (worker = thread of the child's pool); then
//! the floor's split per tile (FFTs, sampling) and the floor scaled to one tile pixel per
//! footprint pixel (what the same per-tile work would cost on a plan whose tiles do not
//! overlap).

#[cfg(unix)]
#[path = "support/child_cost.rs"]
mod child_cost;

#[cfg(unix)]
fn main() {
    if let Err(e) = speed_limit::run() {
        eprintln!("measure_speed_limit: {e}");
        std::process::exit(2);
    }
}

#[cfg(not(unix))]
fn main() {
    eprintln!("measure_speed_limit: needs a Unix system (child rusage through wait4)");
    std::process::exit(2);
}

#[cfg(unix)]
mod speed_limit {
    use crate::child_cost::{run_child, ChildCost};
    use num_complex::Complex64;
    use planisphere::harmonics::spectrum::AngularSpectrum;
    use planisphere::io::fits_io::{
        read_map, write_footprint, write_map, ColumnChoice, WriteOptions,
    };
    use planisphere::measure::measurement::{MeasurementSettings, SphereMeasurer};
    use planisphere::scattering::transform::{FftCount, ScatteringEngine};
    use planisphere::simulate::skies::SkyRecipe;
    use planisphere::tiles::sampling::TileSampler;
    use planisphere::{Footprint, Ordering, Pixelization};
    use realfft::RealFftPlanner;
    use rustfft::FftPlanner;
    use std::collections::BTreeMap;
    use std::path::{Path, PathBuf};
    use std::process::{Command, Stdio};
    use std::time::{Duration, Instant};

    type Res<T> = Result<T, String>;

    const MIB: f64 = 1024.0 * 1024.0;

    struct Options {
        nsides: Vec<u32>,
        numpy: bool,
        inputs: PathBuf,
        binary: PathBuf,
        scales: usize,
        orientations: usize,
    }

    fn parse_options() -> Res<Options> {
        let here = std::env::current_exe().map_err(|e| format!("cannot locate myself: {e}"))?;
        // target/<profile>/examples/measure_speed_limit → target/<profile>/planisphere
        let profile_dir = here
            .parent()
            .and_then(Path::parent)
            .ok_or("cannot locate the target folder")?
            .to_path_buf();
        let mut o = Options {
            nsides: vec![256],
            numpy: true,
            inputs: profile_dir
                .parent()
                .map(|t| t.join("speed-limit"))
                .unwrap_or_else(|| PathBuf::from("speed-limit")),
            binary: profile_dir.join("planisphere"),
            scales: 5,
            orientations: 4,
        };
        let mut args = std::env::args().skip(1);
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
                                .filter(|n| n.is_power_of_two() && *n >= 64)
                                .ok_or(format!("--nside: bad NSIDE '{s}'"))
                        })
                        .collect::<Res<_>>()?
                }
                "--no-numpy" => o.numpy = false,
                "--inputs" => o.inputs = PathBuf::from(value("--inputs")?),
                "--binary" => o.binary = PathBuf::from(value("--binary")?),
                "-J" => {
                    o.scales = value("-J")?
                        .parse()
                        .map_err(|_| "-J needs an integer".to_string())?
                }
                "-L" => {
                    o.orientations = value("-L")?
                        .parse()
                        .map_err(|_| "-L needs an integer".to_string())?
                }
                other => return Err(format!("unknown argument '{other}'")),
            }
        }
        if !o.binary.is_file() {
            return Err(format!(
                "{} not found: run `cargo build --release` first or pass --binary",
                o.binary.display()
            ));
        }
        Ok(o)
    }

    /// The generated inputs of one NSIDE.
    struct Inputs {
        map: PathBuf,
        mask: PathBuf,
        footprint_pixels: u64,
        f_sky: f64,
        npix: u64,
    }

    /// The survey mask: |b| > 20° less 40 holes of 0.5°–2.5° (seed 11), within −70° < δ < +10°
    /// (`scenario::benchmark_survey_mask`).
    fn survey_mask(pix: Pixelization) -> Res<Footprint> {
        planisphere::simulate::scenario::benchmark_survey_mask(pix).map_err(|e| e.to_string())
    }

    fn make_inputs(nside: u32, dir: &Path) -> Res<Inputs> {
        std::fs::create_dir_all(dir).map_err(|e| format!("{}: {e}", dir.display()))?;
        let map = dir.join(format!("kappa_nside{nside}.fits"));
        let mask = dir.join(format!("mask_nside{nside}.fits"));
        let facts = dir.join(format!("inputs_nside{nside}.json"));
        let npix = 12 * nside as u64 * nside as u64;
        if map.is_file() && mask.is_file() {
            if let Ok(text) = std::fs::read_to_string(&facts) {
                if let Ok(v) = serde_json::from_str::<serde_json::Value>(&text) {
                    if let (Some(p), Some(f)) =
                        (v["footprint_pixels"].as_u64(), v["f_sky"].as_f64())
                    {
                        return Ok(Inputs {
                            map,
                            mask,
                            footprint_pixels: p,
                            f_sky: f,
                            npix,
                        });
                    }
                }
            }
        }
        eprintln!("  making the NSIDE {nside} inputs in {}", dir.display());
        let pix = Pixelization::new(nside, Ordering::Ring).map_err(|e| e.to_string())?;
        let footprint = survey_mask(pix)?;
        let recipe = SkyRecipe::gaussian(
            nside,
            AngularSpectrum::demo_model(3 * nside as usize - 1, 0.02 * 0.02),
            20_261_205,
        );
        let transform = recipe.transform().map_err(|e| e.to_string())?;
        let mut sky = recipe.realise(&transform, 0).map_err(|e| e.to_string())?;
        sky.coordsys = Some("G".into());
        let options = WriteOptions {
            coordsys: Some("G".into()),
            ..Default::default()
        };
        write_map(&map, "KAPPA", &sky, &options).map_err(|e| e.to_string())?;
        write_footprint(&mask, "MASK", &footprint, &options).map_err(|e| e.to_string())?;
        let summary = footprint.summary();
        let doc = serde_json::json!({
            "nside": nside,
            "footprint_pixels": summary.observed_pixels,
            "f_sky": summary.f_sky,
        });
        std::fs::write(&facts, doc.to_string()).map_err(|e| format!("{}: {e}", facts.display()))?;
        Ok(Inputs {
            map,
            mask,
            footprint_pixels: summary.observed_pixels,
            f_sky: summary.f_sky,
            npix,
        })
    }

    struct Ours {
        cost: ChildCost,
        tiles: usize,
        tile_pixels: usize,
        pixel_arcmin: f64,
        workers: usize,
    }

    /// Our `measure` on the job (J, L of the options, plane pixel = map spacing), or with
    /// `defaults` on the tool's defaults (J = 4, L = 4, plane pixel 3h band-limited).
    fn run_ours(o: &Options, inputs: &Inputs, nside: u32, dir: &Path, defaults: bool) -> Res<Ours> {
        let spacing_arcmin = (std::f64::consts::PI / 3.0).sqrt() / nside as f64 * 60.0 * 180.0
            / std::f64::consts::PI;
        let out = dir.join(format!(
            "measure_nside{nside}{}.json",
            if defaults { "_defaults" } else { "" }
        ));
        let mut cmd = Command::new(&o.binary);
        cmd.arg("measure")
            .arg(&inputs.map)
            .arg("--mask")
            .arg(&inputs.mask);
        if !defaults {
            cmd.args([
                "-J",
                &o.scales.to_string(),
                "-L",
                &o.orientations.to_string(),
            ])
            .args(["--pixel-arcmin", &format!("{spacing_arcmin:.4}")]);
        }
        let cost = run_child(
            cmd.arg("--no-bispectrum").arg("-o").arg(&out),
            "planisphere measure",
        )?;
        let text = std::fs::read_to_string(&out).map_err(|e| format!("{}: {e}", out.display()))?;
        let v: serde_json::Value =
            serde_json::from_str(&text).map_err(|e| format!("{}: {e}", out.display()))?;
        let t = &v["tiling"];
        let get = |key: &str| {
            t[key]
                .as_u64()
                .ok_or(format!("{}: no tiling.{key}", out.display()))
        };
        Ok(Ours {
            cost,
            tiles: get("tiles")? as usize,
            tile_pixels: get("tile_pixels")? as usize,
            pixel_arcmin: t["pixel_size_arcmin"].as_f64().unwrap_or(spacing_arcmin),
            workers: get("threads")? as usize,
        })
    }

    struct Numpy {
        cost: ChildCost,
        patches: usize,
        patch_pixels: usize,
    }

    fn healpy_available() -> bool {
        Command::new("python3")
            .args(["-c", "import numpy, healpy"])
            .stdout(Stdio::null())
            .stderr(Stdio::null())
            .status()
            .map(|s| s.success())
            .unwrap_or(false)
    }

    fn run_numpy(o: &Options, inputs: &Inputs, nside: u32, dir: &Path) -> Res<Numpy> {
        let script = Path::new(env!("CARGO_MANIFEST_DIR"))
            .join("reference-values")
            .join("measure_pipeline_numpy.py");
        let out = dir.join(format!("numpy_nside{nside}.json"));
        let cost = run_child(
            Command::new("python3")
                .arg(&script)
                .arg(&inputs.map)
                .arg(&inputs.mask)
                .args([
                    "-J",
                    &o.scales.to_string(),
                    "-L",
                    &o.orientations.to_string(),
                ])
                .arg("-o")
                .arg(&out),
            "numpy pipeline",
        )?;
        let text = std::fs::read_to_string(&out).map_err(|e| format!("{}: {e}", out.display()))?;
        let v: serde_json::Value =
            serde_json::from_str(&text).map_err(|e| format!("{}: {e}", out.display()))?;
        Ok(Numpy {
            cost,
            patches: v["patches"].as_u64().unwrap_or(0) as usize,
            patch_pixels: v["patch_pixels"].as_u64().unwrap_or(128) as usize,
        })
    }

    /// Seconds per call of `work`: best of three batches of at least 50 ms each.
    fn best_time(mut work: impl FnMut()) -> f64 {
        work();
        let mut reps = 1usize;
        loop {
            let t = Instant::now();
            for _ in 0..reps {
                work();
            }
            if t.elapsed() >= Duration::from_millis(50) {
                break;
            }
            reps *= 2;
        }
        (0..3)
            .map(|_| {
                let t = Instant::now();
                for _ in 0..reps {
                    work();
                }
                t.elapsed().as_secs_f64() / reps as f64
            })
            .fold(f64::INFINITY, f64::min)
    }

    fn transpose(from: &[Complex64], to: &mut [Complex64], rows: usize, cols: usize) {
        for r in 0..rows {
            for c in 0..cols {
                to[c * rows + r] = from[r * cols + c];
            }
        }
    }

    /// Seconds for one 2-D FFT of m × m values of the given kind with rustfft / realfft: the
    /// input is copied in (the transforms work in place), rows are transformed in one batched
    /// call, transposed once, and columns transformed in one batched call.
    fn fft2_seconds(m: usize, real_input: bool, inverse: bool) -> f64 {
        let mut planner = FftPlanner::<f64>::new();
        let fft = if inverse {
            planner.plan_fft_inverse(m)
        } else {
            planner.plan_fft_forward(m)
        };
        let mut scratch = vec![Complex64::default(); fft.get_inplace_scratch_len()];
        let src: Vec<f64> = (0..m * m)
            .map(|i| ((i * 7919) % 1013) as f64 / 1013.0)
            .collect();
        if real_input {
            let r2c = RealFftPlanner::<f64>::new().plan_fft_forward(m);
            let h = m / 2 + 1;
            let mut rows = vec![0.0; m * m];
            let mut half = vec![Complex64::default(); m * h];
            let mut cols = vec![Complex64::default(); h * m];
            let mut rscratch = r2c.make_scratch_vec();
            best_time(|| {
                rows.copy_from_slice(&src);
                for (r, out) in rows.chunks_exact_mut(m).zip(half.chunks_exact_mut(h)) {
                    if r2c.process_with_scratch(r, out, &mut rscratch).is_err() {
                        unreachable!("buffers have the planned lengths");
                    }
                }
                transpose(&half, &mut cols, m, h);
                fft.process_with_scratch(&mut cols, &mut scratch);
            })
        } else {
            let src: Vec<Complex64> = src.iter().map(|&v| Complex64::new(v, -v)).collect();
            let mut a = vec![Complex64::default(); m * m];
            let mut b = vec![Complex64::default(); m * m];
            best_time(|| {
                a.copy_from_slice(&src);
                fft.process_with_scratch(&mut a, &mut scratch);
                transpose(&a, &mut b, m, m);
                fft.process_with_scratch(&mut b, &mut scratch);
            })
        }
    }

    struct Floor {
        cpu: f64,
        fft_per_tile: f64,
        fft_count: usize,
        sampling_per_tile: f64,
    }

    /// The floor of one measurement: census FFTs × timed FFTs + sampling, times the tiles.
    fn floor(
        o: &Options,
        inputs: &Inputs,
        ours: &Ours,
        fft_times: &mut BTreeMap<(usize, bool, bool), f64>,
    ) -> Res<Floor> {
        let n = ours.tile_pixels;
        let engine =
            ScatteringEngine::new(n, o.scales, o.orientations).map_err(|e| e.to_string())?;
        let census: Vec<FftCount> = engine.fft_census(false);
        let mut fft_per_tile = 0.0;
        let mut fft_count = 0;
        for c in &census {
            let t = *fft_times
                .entry((c.size, c.real_input, c.inverse))
                .or_insert_with(|| fft2_seconds(c.size, c.real_input, c.inverse));
            fft_per_tile += t * c.count as f64;
            fft_count += c.count;
        }
        // Sampling: the library's sampler on 24 tiles spread over the footprint's plan.
        let (map, _) =
            read_map(&inputs.map, &ColumnChoice::default()).map_err(|e| e.to_string())?;
        let (mask, _) =
            planisphere::io::fits_io::read_footprint(&inputs.mask, &ColumnChoice::default())
                .map_err(|e| e.to_string())?;
        let settings = MeasurementSettings {
            scales: o.scales,
            orientations: o.orientations,
            tile_pixels: Some(n),
            pixel_arcmin: Some(ours.pixel_arcmin),
            bispectrum: false,
            ..Default::default()
        };
        let measurer =
            SphereMeasurer::new(map.pixelization(), &mask, settings).map_err(|e| e.to_string())?;
        // the sampling `measure` uses (its default)
        let sampler = TileSampler::new(measurer.plan(), &map, &mask, settings.sampling)
            .map_err(|e| e.to_string())?;
        let len = measurer.plan().len();
        let picks: Vec<usize> = (0..24).map(|i| i * len / 24).collect();
        let t = Instant::now();
        for &i in &picks {
            std::hint::black_box(sampler.sample(i).map_err(|e| e.to_string())?);
        }
        let per_pixel = t.elapsed().as_secs_f64() / (picks.len() * n * n) as f64;
        let sampling_per_tile = per_pixel * (n * n) as f64;
        Ok(Floor {
            cpu: ours.tiles as f64 * (fft_per_tile + sampling_per_tile),
            fft_per_tile,
            fft_count,
            sampling_per_tile,
        })
    }

    fn load_average() -> String {
        std::fs::read_to_string("/proc/loadavg")
            .ok()
            .and_then(|s| s.split_whitespace().next().map(str::to_string))
            .unwrap_or_else(|| "?".into())
    }

    struct Block {
        nside: u32,
        inputs: Inputs,
        ours: Ours,
        /// Our `measure` at the tool's defaults on the same inputs.
        defaults: Ours,
        numpy: Option<Numpy>,
        floor: Floor,
    }

    pub fn run() -> Res<()> {
        let o = parse_options()?;
        let numpy = o.numpy && healpy_available();
        if o.numpy && !numpy {
            println!(
                "numpy pipeline skipped: healpy is not importable (install it with `pip install healpy numpy`)"
            );
        }
        let load_start = load_average();
        let mut fft_times = BTreeMap::new();
        let mut blocks = Vec::new();
        for &nside in &o.nsides {
            let inputs = make_inputs(nside, &o.inputs)?;
            eprintln!("  NSIDE {nside}: planisphere measure …");
            let ours = run_ours(&o, &inputs, nside, &o.inputs, false)?;
            eprintln!("  NSIDE {nside}: planisphere measure at its defaults …");
            let defaults = run_ours(&o, &inputs, nside, &o.inputs, true)?;
            let np = if numpy {
                eprintln!("  NSIDE {nside}: numpy pipeline …");
                Some(run_numpy(&o, &inputs, nside, &o.inputs)?)
            } else {
                None
            };
            eprintln!("  NSIDE {nside}: floor …");
            let floor = floor(&o, &inputs, &ours, &mut fft_times)?;
            blocks.push(Block {
                nside,
                inputs,
                ours,
                defaults,
                numpy: np,
                floor,
            });
        }
        let load_end = load_average();

        println!(
            "measure speed limit: J = {}, L = {}, plane pixel = map spacing, ring-quintic sampling, no bispectrum; load average {load_start} at start, {load_end} at end",
            o.scales, o.orientations
        );
        println!(
            "{:>5} {:>6} {:>11}  {:<22} {:>8} {:>8} {:>8} {:>7} {:>9} {:>9}",
            "NSIDE",
            "f_sky",
            "fp pixels",
            "pipeline",
            "wall s",
            "CPU s",
            "peak MiB",
            "tiles",
            "tpx/fppx",
            "µs/fppx"
        );
        for b in &blocks {
            let fp = b.inputs.footprint_pixels as f64;
            let n2 = (b.ours.tile_pixels * b.ours.tile_pixels) as f64;
            let ours_density = b.ours.tiles as f64 * n2 / fp;
            println!(
                "{:>5} {:>6.3} {:>11}  {:<22} {:>8.1} {:>8.1} {:>8.0} {:>7} {:>9.2} {:>9.2}",
                b.nside,
                b.inputs.f_sky,
                b.inputs.footprint_pixels,
                format!("planisphere ({}²)", b.ours.tile_pixels),
                b.ours.cost.wall,
                b.ours.cost.cpu,
                b.ours.cost.peak_bytes / MIB,
                b.ours.tiles,
                ours_density,
                b.ours.cost.cpu / fp * 1e6
            );
            if let Some(np) = &b.numpy {
                let n2 = (np.patch_pixels * np.patch_pixels) as f64;
                println!(
                    "{:>5} {:>6} {:>11}  {:<22} {:>8.1} {:>8.1} {:>8.0} {:>7} {:>9.2} {:>9.2}",
                    "",
                    "",
                    "",
                    format!("numpy + healpy ({}²)", np.patch_pixels),
                    np.cost.wall,
                    np.cost.cpu,
                    np.cost.peak_bytes / MIB,
                    np.patches,
                    np.patches as f64 * n2 / fp,
                    np.cost.cpu / fp * 1e6
                );
            }
            let d = &b.defaults;
            let dn2 = (d.tile_pixels * d.tile_pixels) as f64;
            println!(
                "{:>5} {:>6} {:>11}  {:<22} {:>8.1} {:>8.1} {:>8.0} {:>7} {:>9.2} {:>9.2}",
                "",
                "",
                "",
                format!("defaults ({}², {:.1}′)", d.tile_pixels, d.pixel_arcmin),
                d.cost.wall,
                d.cost.cpu,
                d.cost.peak_bytes / MIB,
                d.tiles,
                d.tiles as f64 * dn2 / fp,
                d.cost.cpu / fp * 1e6
            );
            println!(
                "{:>5} {:>6} {:>11}  {:<22} {:>8} {:>8.1} {:>8} {:>7} {:>9.2} {:>9.2}",
                "",
                "",
                "",
                "floor (FFT + sampling)",
                "-",
                b.floor.cpu,
                "-",
                b.ours.tiles,
                ours_density,
                b.floor.cpu / fp * 1e6
            );
        }
        println!();
        println!("ratios (targets in brackets):");
        for b in &blocks {
            let numpy_ratio = b
                .numpy
                .as_ref()
                .map(|np| {
                    let r = np.cost.cpu / b.ours.cost.cpu;
                    if r >= 1.0 {
                        format!("{r:.1}×")
                    } else {
                        format!("{r:.3}× (numpy {:.1}× faster)", 1.0 / r)
                    }
                })
                .unwrap_or_else(|| "not run".into());
            let input_bytes = 2.0 * b.inputs.npix as f64 * 8.0;
            let limit = input_bytes + 100.0 * MIB * b.ours.workers as f64;
            println!(
                "  NSIDE {:>4}: numpy CPU / ours {numpy_ratio} [≥ 20×]; ours / floor {:.2}× [≤ 2×]; peak {:.0} MiB vs map + mask + 100 MiB × {} workers = {:.0} MiB [≤]",
                b.nside,
                b.ours.cost.cpu / b.floor.cpu,
                b.ours.cost.peak_bytes / MIB,
                b.ours.workers,
                limit / MIB
            );
            println!(
                "              floor per tile: {} FFTs {:.2} ms + sampling {:.2} ms ({:.1} ns per tile pixel); ours {:.2} ms CPU per tile",
                b.floor.fft_count,
                b.floor.fft_per_tile * 1e3,
                b.floor.sampling_per_tile * 1e3,
                b.floor.sampling_per_tile / (b.ours.tile_pixels * b.ours.tile_pixels) as f64 * 1e9,
                b.ours.cost.cpu / b.ours.tiles as f64 * 1e3
            );
            let n2 = (b.ours.tile_pixels * b.ours.tile_pixels) as f64;
            let density = b.ours.tiles as f64 * n2 / b.inputs.footprint_pixels as f64;
            println!(
                "              the same floor at 1 tile px per footprint px (no overlap): {:.1} s CPU, {:.2} µs per footprint px; ours / that {:.1}×",
                b.floor.cpu / density,
                b.floor.cpu / density / b.inputs.footprint_pixels as f64 * 1e6,
                b.ours.cost.cpu / (b.floor.cpu / density)
            );
        }
        println!("FFT timings used (one 2-D transform, µs):");
        for ((size, real, inverse), t) in &fft_times {
            println!(
                "  {size:>4}² {:<8} {:<8} {:>9.1}",
                if *real { "real" } else { "complex" },
                if *inverse { "inverse" } else { "forward" },
                t * 1e6
            );
        }
        Ok(())
    }
}
