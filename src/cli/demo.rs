//! `planisphere demo`: the whole job on a built-in scenario of our own invention, with no input
//! files — a mock survey footprint, small ensembles of lognormal convergence skies at a fiducial
//! point and at shifted parameters, their scattering and power-spectrum statistics, and a Fisher
//! comparison of the statistic sets.
//!
//! The two parameters are the amplitude A of the Gaussian field g behind the lognormal sky
//! (its spectrum is A·C_ℓ^model) and the lognormal shift κ0, with κ = κ0 (exp(g − σ_g²/2) − 1).
//! To first order in ξ_g the spectrum of κ is κ0²·A·C_ℓ^model, so the power spectrum constrains
//! nearly only the product κ0²A; the skewness 3r + r³ with r² = e^{σ_g²} − 1 depends on A alone,
//! which the scattering coefficients see.

use super::ensemble::EnsembleMeasurer;
use super::forecast::{forecast_document, forecast_named_sets, ForecastResult};
use super::measure::measurement_document;
use crate::catalogue::mock::{mock_catalogue, shear_of_convergence, write_catalogue_csv};
use crate::ensemble::{EnsembleDescription, EnsembleJob, MemberSource, Shard};
use crate::error::{Error, Result};
use crate::files::{write_bytes, write_json};
use crate::forecast::DerivativeEnsembles;
use crate::harmonics::spectrum::AngularSpectrum;
use crate::io::fits_io::{write_footprint, write_map, WriteOptions};
use crate::measure::measurement::MeasurementSettings;
use crate::simulate::scenario::MockFootprint;
use crate::simulate::skies::SkyRecipe;
use crate::sky::apodization::{apodize, TaperKind};
use crate::sky::footprint::Footprint;
use crate::sky::pixelization::{Ordering, Pixelization};
use std::path::{Path, PathBuf};
use std::time::Instant;

/// Run the whole job on a built-in mock survey: no input files needed.
#[derive(Debug, clap::Args)]
pub struct DemoArgs {
    /// Directory for the demo's outputs (created; a rerun resumes where it stopped).
    #[arg(long, short, default_value = "planisphere-demo")]
    pub output_dir: PathBuf,
    /// NSIDE of the simulated skies.
    #[arg(long, default_value_t = 256)]
    pub nside: u32,
    /// Simulations at the fiducial parameters (for the covariance).
    #[arg(long, default_value_t = 86)]
    pub fiducial_count: u64,
    /// Simulations at each shifted parameter value (paired seeds, for the derivatives).
    #[arg(long, default_value_t = 10)]
    pub derivative_count: u64,
    /// Number of wavelet scales J.
    #[arg(long, default_value_t = 4)]
    pub scales: usize,
    /// Do not draw progress bars.
    #[arg(long)]
    pub quiet: bool,
}

/// The statistic sets the demo compares (name, column-name prefixes): the power spectrum on
/// the sphere and in tiles, the orientation-averaged first order, our orientation-harmonic
/// summary and the tile bispectrum; each has few enough numbers for the demo's ensembles.
pub const DEMO_SETS: &[(&str, &[&str])] = &[
    ("power spectrum (pseudo-C_l)", &["cl."]),
    ("tile power spectrum", &["tile_power."]),
    (
        "scattering order 1, orientation-averaged",
        &["summary.modulus_j"],
    ),
    (
        "orientation-harmonic summary",
        &[
            "summary.modulus_j",
            "summary.intermittency_",
            "summary.alignment_",
        ],
    ),
    ("bispectrum", &["bispectrum."]),
];

/// The demo's parameters: amplitude of the Gaussian field and lognormal shift.
#[derive(Debug, Clone, Copy, serde::Serialize)]
pub struct DemoParameters {
    pub amplitude: f64,
    pub shift: f64,
}

/// Fiducial values and finite-difference steps (our own choice for the demo).
pub const FIDUCIAL: DemoParameters = DemoParameters {
    amplitude: 1.0,
    shift: 0.02,
};
/// Step of each parameter for the derivatives.
pub const STEPS: DemoParameters = DemoParameters {
    amplitude: 0.1,
    shift: 0.002,
};
/// Variance of the Gaussian field g at amplitude 1 (so r = σ_κ/κ0 ≈ 0.53, skewness ≈ 1.7).
pub const GAUSSIAN_VARIANCE: f64 = 0.25;

fn recipe(nside: u32, p: DemoParameters, seed: u64) -> SkyRecipe {
    let lmax = 3 * nside as usize - 1;
    let mut r = SkyRecipe::gaussian(
        nside,
        AngularSpectrum::demo_model(lmax, p.amplitude * GAUSSIAN_VARIANCE),
        seed,
    );
    r.lognormal_shift = Some(p.shift);
    r.spectrum_is_gaussian = true;
    r
}

/// Runs (or resumes) one simulated ensemble and returns it as forecast input.
fn run_ensemble(
    dir: &Path,
    label: &str,
    recipe: &SkyRecipe,
    count: u64,
    em: &EnsembleMeasurer,
    labels: &[String],
    quiet: bool,
) -> Result<crate::forecast::Ensemble> {
    let sht = recipe.transform()?;
    let description = EnsembleDescription {
        program_version: env!("CARGO_PKG_VERSION").to_string(),
        members: (0..count).map(MemberSource::Simulation).collect(),
        labels: labels.to_vec(),
        settings: serde_json::json!({
            "demo_ensemble": label,
            "recipe": recipe,
            "measurement": em.measurer.settings(),
            "label_scales_arcmin": em.labels().iter().map(|l| l.scale_arcmin).collect::<Vec<_>>(),
        }),
    };
    let job = EnsembleJob::create_or_open(dir, description)?;
    if !quiet {
        eprintln!("ensemble '{label}': {count} skies");
    }
    job.run(
        Shard::ALL,
        |_, source| match source {
            MemberSource::Simulation(i) => em.measure(&recipe.realise(&sht, *i)?),
            other => Err(Error::Setting(format!("unexpected file member {other}"))),
        },
        !quiet,
    )?;
    EnsembleJob::write_merged(dir)?;
    Ok(super::forecast::load_ensemble(dir)?.0)
}

/// Runs the demo.
pub fn run(args: &DemoArgs) -> Result<()> {
    let existed = args.output_dir.exists();
    let result = run_in_directory(args);
    if result.is_err() && !existed {
        // a run that stopped before writing anything leaves no empty directory behind
        let _ = std::fs::remove_dir(&args.output_dir);
    }
    result
}

/// Galaxies of the demo's mock catalogue, and their shape noise per component (common
/// practice: σ_e ≈ 0.26).
const MOCK_GALAXIES: usize = 50_000;
const MOCK_SIGMA_E: f64 = 0.26;

/// Width of the C2 taper of the mock footprint, arcminutes.
const TAPER_ARCMIN: f64 = 60.0;

fn run_in_directory(args: &DemoArgs) -> Result<()> {
    let start = Instant::now();
    check_arguments(args)?;
    std::fs::create_dir_all(&args.output_dir).map_err(|e| Error::io(&args.output_dir, e))?;
    let dir = &args.output_dir;
    let pix = Pixelization::new(args.nside, Ordering::Ring)?;
    let scenario = MockFootprint::default();
    let mask = scenario.build(pix);
    let footprint = apodize(&mask, TaperKind::C2, (TAPER_ARCMIN / 60.0).to_radians())?;
    print_scenario(args, &scenario, &mask, &footprint);
    let (settings, pixel_arcmin) = measurement_settings(pix, args.scales);
    // pseudo-C_ℓ up to ℓ = 2 NSIDE in as many bins as the summary has numbers (J²)
    let cl_bin_width = (2 * args.nside as usize).div_ceil(settings.scales * settings.scales);
    let em = EnsembleMeasurer::new(pix, footprint.clone(), settings, cl_bin_width)?;
    let summary = em.measurer.summary();
    println!(
        "  measurement: J = {}, L = {}, {} tiles of {}² pixels of {:.1}′ ({:.1}° across, cells: {})",
        settings.scales,
        settings.orientations,
        summary.tiles,
        summary.tile_pixels,
        pixel_arcmin,
        summary.tile_width_deg,
        summary.cells
    );
    let labels: Vec<String> = em.labels().into_iter().map(|l| l.name).collect();

    let fid_recipe = recipe(args.nside, FIDUCIAL, 1000);
    write_example(dir, &em, &fid_recipe, &mask, &footprint)?;
    let fiducial = run_ensemble(
        &dir.join("fiducial"),
        "fiducial",
        &fid_recipe,
        args.fiducial_count,
        &em,
        &labels,
        args.quiet,
    )?;
    let derivatives = run_derivative_ensembles(args, &em, &labels)?;
    let chosen = sets_with_enough_skies(&fiducial, args.fiducial_count);
    let result = forecast_named_sets(&fiducial, &derivatives, None, &chosen)?;
    write_forecast(dir, args, &result)?;
    print_comparison(&result);
    draw_pictures(dir, &result, &em, &settings, pixel_arcmin)?;
    println!(
        "outputs in {}: forecast.json, comparison.csv, ellipses.png, coefficients.png, tile_map.png, example_sky.fits, mock_mask.fits, mock_catalogue.csv (try: planisphere shear-maps mock_catalogue.csv --nside 32 -o shear_maps.fits), example_measurement.json, ensemble tables",
        dir.display()
    );
    println!("run time {:.1} s", start.elapsed().as_secs_f64());
    Ok(())
}

/// Refuses a resolution, ensemble size or scale count the demo cannot run with.
fn check_arguments(args: &DemoArgs) -> Result<()> {
    if args.nside < 32 || args.nside > 512 || !args.nside.is_power_of_two() {
        return Err(Error::Setting(format!(
            "--nside must be a power of two from 32 to 512, got {}",
            args.nside
        )));
    }
    if args.fiducial_count < 4 || args.derivative_count < 2 {
        return Err(Error::Setting(
            "--fiducial-count must be ≥ 4 and --derivative-count ≥ 2".into(),
        ));
    }
    crate::limits::check_count("--fiducial-count", args.fiducial_count)?;
    crate::limits::check_count("--derivative-count", args.derivative_count)?;
    if args.scales == 0 {
        return Err(Error::Setting("--scales must be at least 1".into()));
    }
    Ok(())
}

/// Prints what the mock survey is: footprint, skies and parameters.
fn print_scenario(
    args: &DemoArgs,
    scenario: &MockFootprint,
    mask: &Footprint,
    footprint: &Footprint,
) {
    println!("planisphere demo: a mock survey of our own invention (no real data)");
    println!(
        "  footprint: |b| > {}° less {} star holes of {}–{}°, C2 taper {TAPER_ARCMIN}′: {:.0} deg², f_sky {:.3}",
        scenario.latitude_cut_deg,
        scenario.star_holes,
        scenario.hole_radius_deg.0,
        scenario.hole_radius_deg.1,
        mask.summary().area_deg2,
        footprint.f_sky()
    );
    println!(
        "  skies: lognormal convergence κ = κ0(exp(g − σ²/2) − 1) at NSIDE {}, g with spectrum A·C_model",
        args.nside
    );
    println!(
        "  parameters: A = {} ± {}, κ0 = {} ± {}; {} fiducial skies, {} per shifted value (paired seeds)",
        FIDUCIAL.amplitude, STEPS.amplitude, FIDUCIAL.shift, STEPS.shift, args.fiducial_count, args.derivative_count
    );
}

/// The demo's measurement settings and the plane pixel size in arcminutes.
///
/// Tiles at most 15° across (the flat-sky picture of a tile stays good: sec²ρ ≤ 1.035 at
/// the corners) at one map spacing per plane pixel: the largest power-of-two grid that fits.
/// At NSIDE 256 that is 64 pixels of 13.7′ and J = 4 covers wavelengths of 37′–290′; the
/// two finest scales fall below the sampling trust limit of 8 map spacings and are flagged,
/// but every ensemble is sampled the same way, so the Fisher comparison stays consistent.
fn measurement_settings(pix: Pixelization, scales: usize) -> (MeasurementSettings, f64) {
    let pixel_arcmin = pix.mean_spacing().to_degrees() * 60.0;
    let mut tile_pixels = 32usize;
    while (2 * tile_pixels) as f64 * pixel_arcmin <= 15.0 * 60.0 {
        tile_pixels *= 2;
    }
    let scales = if tile_pixels <= 32 {
        scales.min(3)
    } else {
        scales
    };
    // A border ramp of 4 pixels (halo 4 + 7 at J = 4) leaves cores of 42 of the 64 pixels.
    let border_pixels = 4;
    let settings = MeasurementSettings {
        scales,
        tile_pixels: Some(tile_pixels),
        border_pixels,
        pixel_arcmin: Some(pixel_arcmin),
        spectrum_bins: 4,
        ..MeasurementSettings::default()
    };
    (settings, pixel_arcmin)
}

/// Writes inputs a user can try the other commands on: one fiducial sky, the mask, and the
/// sky's measurement.
fn write_example(
    dir: &Path,
    em: &EnsembleMeasurer,
    fid_recipe: &SkyRecipe,
    mask: &Footprint,
    footprint: &Footprint,
) -> Result<()> {
    let example = fid_recipe.realise(&fid_recipe.transform()?, 0)?;
    write_map(
        &dir.join("example_sky.fits"),
        "KAPPA",
        &example,
        &WriteOptions::default(),
    )?;
    write_footprint(
        &dir.join("mock_mask.fits"),
        "MASK",
        mask,
        &WriteOptions::default(),
    )?;
    // a mock galaxy catalogue lensed by the example sky, to try `shear-maps` on
    let (gamma1, gamma2) = shear_of_convergence(&example, 2 * example.nside() as usize)?;
    let galaxies = mock_catalogue(&gamma1, &gamma2, mask, MOCK_GALAXIES, MOCK_SIGMA_E, 1001)?;
    write_catalogue_csv(&dir.join("mock_catalogue.csv"), &galaxies)?;
    let stats = em.measurer.measure(&example, footprint)?;
    let taper =
        serde_json::json!({"kind": "C2", "width_arcmin": TAPER_ARCMIN, "mask": "mock_mask.fits"});
    write_json(
        &dir.join("example_measurement.json"),
        &measurement_document(&em.measurer, &stats, "example_sky.fits", &taper),
    )
}

/// Runs the ensembles at each parameter shifted by ± its step (paired seeds).
fn run_derivative_ensembles(
    args: &DemoArgs,
    em: &EnsembleMeasurer,
    labels: &[String],
) -> Result<Vec<DerivativeEnsembles>> {
    let mut derivatives = Vec::new();
    for (name, step) in [("amplitude", STEPS.amplitude), ("shift", STEPS.shift)] {
        let shifted = |sign: f64| {
            let mut p = FIDUCIAL;
            if name == "amplitude" {
                p.amplitude += sign * step;
            } else {
                p.shift += sign * step;
            }
            recipe(args.nside, p, 2000)
        };
        let plus = run_ensemble(
            &args.output_dir.join(format!("{name}_plus")),
            &format!("{name} +"),
            &shifted(1.0),
            args.derivative_count,
            em,
            labels,
            args.quiet,
        )?;
        let minus = run_ensemble(
            &args.output_dir.join(format!("{name}_minus")),
            &format!("{name} −"),
            &shifted(-1.0),
            args.derivative_count,
            em,
            labels,
            args.quiet,
        )?;
        derivatives.push(DerivativeEnsembles {
            parameter: name.to_string(),
            step,
            plus,
            minus,
            paired: true,
        });
    }
    Ok(derivatives)
}

/// The sets of [`DEMO_SETS`] the fiducial ensemble has columns for and enough skies for.
///
/// Every set compared has a Hartlap factor ≥ 0.8 (n ≥ 5p + 6 simulations for p statistics):
/// sets too large for the fiducial ensemble are left out with a note.
fn sets_with_enough_skies(
    fiducial: &crate::forecast::Ensemble,
    fiducial_count: u64,
) -> Vec<(&'static str, &'static [&'static str])> {
    let columns = fiducial.labels();
    let mut chosen: Vec<(&str, &[&str])> = Vec::new();
    for &(name, prefixes) in DEMO_SETS {
        let p = columns
            .iter()
            .filter(|c| prefixes.iter().any(|pre| c.name.starts_with(pre)))
            .count();
        if p == 0 {
            continue;
        }
        let n = fiducial_count as usize;
        if n >= 5 * p + 6 {
            chosen.push((name, prefixes));
        } else {
            println!(
                "  left out: {name} ({p} statistics need at least {} fiducial skies for a Hartlap factor ≥ 0.8)",
                5 * p + 6
            );
        }
    }
    chosen
}

/// Writes forecast.json and comparison.csv.
fn write_forecast(dir: &Path, args: &DemoArgs, result: &ForecastResult) -> Result<()> {
    let doc = forecast_document(
        result,
        &[FIDUCIAL.amplitude, FIDUCIAL.shift],
        serde_json::json!({"demo": true, "nside": args.nside, "fiducial_count": args.fiducial_count, "derivative_count": args.derivative_count}),
    );
    write_json(&dir.join("forecast.json"), &doc)?;
    write_bytes(
        &dir.join("comparison.csv"),
        result.comparison.to_csv().as_bytes(),
    )
}

/// Prints the table of marginalised errors and the power-spectrum-to-summary error ratio.
fn print_comparison(result: &ForecastResult) {
    println!();
    println!(
        "Marginalised 1σ errors by statistic set (Fisher forecast, Hartlap-corrected covariance):"
    );
    print!("{}", result.comparison.to_text());
    let err = |set: &str, k: usize| {
        result
            .comparison
            .rows
            .iter()
            .find(|r| r.set == set)
            .and_then(|r| r.marginalised_errors.as_ref().map(|e| e[k]))
    };
    if let (Some(ps), Some(sc)) = (
        err("power spectrum (pseudo-C_l)", 0),
        err("orientation-harmonic summary", 0),
    ) {
        println!(
            "\nnon-Gaussianity (amplitude A of the Gaussian field): σ(power spectrum) / σ(orientation-harmonic summary) = {:.2}",
            ps / sc
        );
    }
}

/// Pictures: Fisher ellipses of the sets, the example sky's coefficients, a per-tile map.
fn draw_pictures(
    dir: &Path,
    result: &ForecastResult,
    em: &EnsembleMeasurer,
    settings: &MeasurementSettings,
    pixel_arcmin: f64,
) -> Result<()> {
    use super::plot::{
        run_coefficients, run_ellipses, run_tile_map, CoefficientsArgs, EllipsesArgs, TileMapArgs,
    };
    let any_forecast = result
        .comparison
        .rows
        .iter()
        .any(|r| r.marginalised_errors.is_some());
    if any_forecast {
        run_ellipses(&EllipsesArgs {
            input: dir.join("forecast.json"),
            output: dir.join("ellipses.png"),
            parameters: None,
            width: 900,
        })?;
    } else {
        println!("ellipses.png not drawn: no statistic set has enough simulations for a forecast");
    }
    run_coefficients(&CoefficientsArgs {
        inputs: vec![dir.join("example_measurement.json")],
        output: dir.join("coefficients.png"),
        width: 1400,
    })?;
    run_tile_map(&TileMapArgs {
        map: dir.join("example_sky.fits"),
        measuring: super::measure::MapMeasurementArgs {
            column: crate::io::fits_io::ColumnChoice::default(),
            mask: super::inputs::MaskArgs {
                mask: Some(dir.join("mock_mask.fits")),
                mask_column: crate::io::fits_io::ColumnChoice::default(),
                taper: TaperKind::C2,
                taper_arcmin: TAPER_ARCMIN,
                allow_coordsys_mismatch: false,
            },
            options: super::measure::MeasureOptions {
                settings: None,
                choices: crate::measure::settings::MeasurementChoices {
                    scales: Some(settings.scales),
                    tile_pixels: Some(em.measurer.plan().tile_pixels()),
                    border_pixels: Some(settings.border_pixels),
                    pixel_arcmin: Some(pixel_arcmin),
                    bispectrum: Some(false),
                    ..Default::default()
                },
            },
        },
        statistic: format!("S1_j{}", settings.scales - 1),
        output: dir.join("tile_map.png"),
        width: 1200,
    })
}
