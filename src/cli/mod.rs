//! The command-line interface: one module per command, each with its clap `Args` and a `run`.
//!
//! Every error reaches the user as a single line `planisphere: error: …` on stderr, with exit
//! code 2 for bad input (1 is left to clap's usage errors being 2 as well).

use crate::error::Result;
use clap::{Parser, Subcommand};

pub mod compare_flat;
pub mod demo;
pub mod ensemble;
pub mod flat_input;
pub mod forecast;
pub mod inputs;
pub mod inspect;
pub mod measure;
pub mod output;
pub mod plot;
pub mod shear_maps;
pub mod sky;
pub mod spectra;
pub mod synthesize;
pub mod tiles;

/// Wavelet scattering statistics of HEALPix sky maps on masked survey footprints.
#[derive(Debug, Parser)]
#[command(name = "planisphere", version, about, long_about = None)]
pub struct Cli {
    #[command(subcommand)]
    pub command: Command,
}

/// The commands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Run the whole job on a built-in mock survey (no input files needed).
    Demo(demo::DemoArgs),
    /// Make simulated Gaussian or lognormal skies as HEALPix FITS maps.
    Sky(sky::SkyArgs),
    /// Measure the angular power spectrum (pseudo-C_ell on a masked sky) of a map.
    Spectra(spectra::SpectraArgs),
    /// Plan the tangent-plane tiles of a map's footprint and report their cost.
    Tiles(tiles::TilesArgs),
    Inspect(inspect::InspectArgs),
    /// Measure scattering coefficients, band powers and tile spectra of a map on its footprint
    /// (with --cross, of two maps on their common footprint, plus their cross statistics).
    Measure(measure::MeasureArgs),
    /// Measure many maps (files or simulations) into one table; resumable, shardable.
    Ensemble(ensemble::EnsembleArgs),
    /// Merge the shards of an ensemble into one table.
    Merge(ensemble::MergeArgs),
    /// Fisher forecasts from ensembles: compare statistic sets (power spectrum, scattering, bispectrum).
    Forecast(forecast::ForecastArgs),
    /// Bias of the flat-sky approximation per coefficient and tile size.
    CompareFlat(compare_flat::CompareFlatArgs),
    /// Draw pictures of measurements, forecasts and per-tile statistics.
    Plot(plot::PlotArgs),
    /// Synthesise a flat field or a HEALPix map on a footprint whose scattering statistics match
    /// a target map, tile or coefficient file.
    #[command(mut_args(synthesize::shared_flag_help))]
    Synthesize(synthesize::SynthesizeArgs),
    /// Bin a galaxy catalogue (CSV or FITS table) into HEALPix maps of counts, mean shear,
    /// its noise variance, density contrast and footprint; shape-noise realisations by rotation.
    ShearMaps(shear_maps::ShearMapsArgs),
}

/// Runs the command line and returns the process exit code.
pub fn main() -> i32 {
    let cli = match Cli::try_parse() {
        Ok(cli) => cli,
        Err(e) => {
            use clap::error::ErrorKind;
            let code = e.exit_code();
            match e.kind() {
                ErrorKind::DisplayHelp
                | ErrorKind::DisplayVersion
                | ErrorKind::DisplayHelpOnMissingArgumentOrSubcommand => {
                    let _ = e.print();
                }
                _ => {
                    // one line: clap's first line, without its own "error: " prefix
                    let text = e.render().to_string();
                    let first: Vec<&str> = text
                        .lines()
                        .take_while(|l| !l.trim().is_empty())
                        .map(str::trim)
                        .collect();
                    let first = first.join(" ");
                    let first = first.strip_prefix("error: ").unwrap_or(&first);
                    eprintln!("planisphere: error: {first} (see planisphere --help)");
                }
            }
            return code;
        }
    };
    match run(cli.command) {
        Ok(()) => 0,
        Err(e) => {
            eprintln!("planisphere: error: {e}");
            2
        }
    }
}

/// Starts rayon's global pool of worker threads here, where a refusal can be reported: left to
/// itself, rayon starts the pool at the first parallel call and panics when the system refuses
/// a thread (under an address-space limit each thread's stack is mapped memory). The pool's
/// size is rayon's (RAYON_NUM_THREADS, else one thread per core).
fn start_worker_threads() -> Result<()> {
    rayon::ThreadPoolBuilder::new().build_global().map_err(|e| {
        crate::error::Error::Setting(format!(
            "cannot start the worker threads ({e}); raise the address-space limit (ulimit -v) \
             or set fewer threads with RAYON_NUM_THREADS"
        ))
    })
}

fn run(command: Command) -> Result<()> {
    // every input and output path of the command, checked together before any work
    output::command_files(&command)?.check()?;
    start_worker_threads()?;
    match command {
        Command::Demo(args) => demo::run(&args),
        Command::Sky(args) => sky::run(&args),
        Command::Spectra(args) => spectra::run(&args),
        Command::Tiles(args) => tiles::run(&args),
        Command::Inspect(args) => inspect::run(&args),
        Command::Measure(args) => measure::run(&args),
        Command::Ensemble(args) => ensemble::run(&args),
        Command::Merge(args) => ensemble::run_merge(&args),
        Command::Forecast(args) => forecast::run(&args),
        Command::CompareFlat(args) => compare_flat::run(&args),
        Command::Plot(args) => plot::run(&args),
        Command::Synthesize(args) => synthesize::run(&args),
        Command::ShearMaps(args) => shear_maps::run(&args),
    }
}
