//! The command-line interface: one module per command, each with its clap `Args` and a `run`.
//!
//! Every error reaches the user as a single line `planisphere: error: …` on stderr, with exit
//! code 2 for bad input (1 is left to clap's usage errors being 2 as well).

use crate::error::Result;
use clap::{Parser, Subcommand};

pub mod demo;
pub mod inputs;
pub mod inspect;
pub mod output;
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
    /// Synthesise a new flat field whose scattering statistics match a target map or file.
    Synthesize(synthesize::SynthesizeArgs),
}

/// Runs the command line and returns the process exit code.
pub fn main() -> i32 {
    let cli = match Cli::try_parse() {
        Ok(cli) => cli,
        Err(e) => {
            let code = e.exit_code();
            let _ = e.print();
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

fn run(command: Command) -> Result<()> {
    match command {
        Command::Demo(args) => demo::run(&args),
        Command::Sky(args) => sky::run(&args),
        Command::Spectra(args) => spectra::run(&args),
        Command::Tiles(args) => tiles::run(&args),
        Command::Inspect(args) => inspect::run(&args),
        Command::Synthesize(args) => synthesize::run(&args),
    }
}
