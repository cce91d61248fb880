//! Input and output paths of a command: [`CommandFiles`], the one check of every path a command
//! reads or writes, run before any work starts. The commands write through the atomic writers of
//! [`crate::files`].

use crate::error::{Error, Result};
use crate::files::{
    check_directory_writable, check_output_path, file_identity, kind_of, output_location,
    require_regular_input,
};
use std::path::{Path, PathBuf};

/// What a path of a command is.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Role {
    /// A file that is read.
    InputFile,
    /// A directory that is read (an ensemble).
    InputDirectory,
    /// A file that is written.
    OutputFile,
    /// A directory that is created (if needed) and written into.
    OutputDirectory,
}

/// Every input and output path of one command, each with the option that named it, checked
/// together before the command starts ([`CommandFiles::check`]).
#[derive(Debug, Default)]
pub struct CommandFiles {
    paths: Vec<(Role, String, PathBuf)>,
}

impl CommandFiles {
    fn add(&mut self, role: Role, option: &str, path: Option<&Path>) -> &mut Self {
        if let Some(p) = path {
            self.paths.push((role, option.to_string(), p.to_path_buf()));
        }
        self
    }

    /// A file the command reads (given by `option`, e.g. "--mask"), if given.
    pub fn input(&mut self, option: &str, path: Option<&Path>) -> &mut Self {
        self.add(Role::InputFile, option, path)
    }

    /// A directory the command reads, if given.
    pub fn input_directory(&mut self, option: &str, path: Option<&Path>) -> &mut Self {
        self.add(Role::InputDirectory, option, path)
    }

    /// A file the command writes, if given.
    pub fn output(&mut self, option: &str, path: Option<&Path>) -> &mut Self {
        self.add(Role::OutputFile, option, path)
    }

    /// A directory the command creates and writes into, if given.
    pub fn output_directory(&mut self, option: &str, path: Option<&Path>) -> &mut Self {
        self.add(Role::OutputDirectory, option, path)
    }

    fn of(&self, role: Role) -> impl Iterator<Item = &(Role, String, PathBuf)> {
        self.paths.iter().filter(move |(r, _, _)| *r == role)
    }

    /// Refuses, with one line each: an input file that is not a regular file (a FIFO or device
    /// would block or never end); an output that is an existing non-regular file, that is the
    /// same file as one of the inputs (same path, another spelling, a symbolic or hard link), or
    /// that is named twice; an output whose directory is missing or not writable; an output
    /// directory that exists as something else.
    pub fn check(&self) -> Result<()> {
        for (_, _, path) in self.of(Role::InputFile) {
            require_regular_input(path)?;
        }
        let inputs: Vec<_> = self
            .of(Role::InputFile)
            .filter_map(|(_, option, path)| file_identity(path).map(|id| (id, option, path)))
            .collect();
        let outputs: Vec<_> = self.of(Role::OutputFile).collect();
        // where each output lands, to find one named twice (a map, so that a million skies
        // are checked in linear time)
        let mut landing: std::collections::HashMap<PathBuf, (&str, &Path)> =
            std::collections::HashMap::new();
        for (_, option, path) in outputs.iter() {
            check_output_path(path)?;
            if let Some(id) = file_identity(path) {
                if let Some((_, in_option, in_path)) = inputs.iter().find(|(i, _, _)| *i == id) {
                    return Err(Error::Setting(format!(
                        "the output {option} {} is the same file as the input {in_option} {}: \
                         writing it would destroy the input; choose another output path",
                        path.display(),
                        in_path.display()
                    )));
                }
            }
            if let Some((other_option, other)) =
                landing.insert(output_location(path), (option, path))
            {
                return Err(Error::Setting(format!(
                    "{option} {} and {other_option} {} name the same output file; give each output its own path",
                    path.display(),
                    other.display()
                )));
            }
        }
        for (_, option, path) in self.of(Role::OutputDirectory) {
            match std::fs::metadata(path) {
                Ok(meta) if !meta.is_dir() => {
                    return Err(Error::io(
                        path,
                        format!(
                            "already exists and is {}, not a directory: {option} needs a directory (new or from an earlier run)",
                            kind_of(&meta)
                        ),
                    ))
                }
                Ok(_) => {}
                Err(_) => {
                    if let Some(parent) = path.parent().filter(|d| !d.as_os_str().is_empty()) {
                        if !parent.is_dir() {
                            return Err(Error::io(
                                path,
                                "its parent directory does not exist",
                            ));
                        }
                    }
                }
            }
        }
        // one probe file per directory
        let mut probed = std::collections::HashSet::new();
        for (_, _, path) in outputs {
            if probed.insert(output_location(path).parent().map(Path::to_path_buf)) {
                check_directory_writable(path)?;
            }
        }
        Ok(())
    }
}

/// The paths of a command line, as [`CommandFiles`]: the single list of what each command reads
/// and writes.
pub fn command_files(command: &super::Command) -> Result<CommandFiles> {
    use super::Command;
    let mut f = CommandFiles::default();
    match command {
        Command::Demo(a) => {
            f.output_directory("--output-dir", Some(&a.output_dir));
        }
        Command::Sky(a) => {
            f.input("--spectrum", a.spectrum.as_deref());
            for p in super::sky::output_paths(a)? {
                f.output("--output", Some(&p));
            }
        }
        Command::Spectra(a) => {
            f.input("map", Some(&a.map))
                .input("--cross", a.cross.as_deref())
                .input("--mask", a.mask.mask.as_deref())
                .output("--csv", a.csv.as_deref())
                .output("--json", a.json.as_deref());
        }
        Command::Tiles(a) => {
            f.input("map", Some(&a.map))
                .input("--mask", a.mask.as_deref())
                .input("--settings", a.options.settings.as_deref())
                .output("--json", a.json.as_deref())
                .output("--png", a.png.as_deref());
        }
        Command::Inspect(a) => {
            f.input("map", Some(&a.map));
        }
        Command::Measure(a) => {
            f.input("map", Some(&a.map))
                .input("--mask", a.measuring.mask.mask.as_deref())
                .input("--settings", a.measuring.options.settings.as_deref())
                .input("--cross", a.cross.as_deref())
                .input("--cross-mask", a.cross_mask.as_deref())
                .output("--output", Some(&a.output));
        }
        Command::Ensemble(a) => {
            f.input("--map-list", a.map_list.as_deref())
                .input("--second-map-list", a.second_map_list.as_deref())
                .input("--simulate", a.simulate.as_deref())
                .input("--mask", a.mask.mask.as_deref())
                .input("--settings", a.options.settings.as_deref())
                .output_directory("--output-dir", Some(&a.output_dir));
        }
        Command::Merge(a) => {
            f.input_directory("ensemble", Some(&a.dir));
        }
        Command::Forecast(a) => {
            f.input_directory("--fiducial", a.fiducial.as_deref())
                .input("--plan", a.plan.as_deref())
                .output("--output", Some(&a.output))
                .output("--csv", a.csv.as_deref());
        }
        Command::CompareFlat(a) => {
            f.input("--spectrum", a.spectrum.as_deref())
                .output("--output", Some(&a.output))
                .output("--json", a.json.as_deref())
                .output("--picture", a.picture.as_deref());
        }
        Command::Plot(p) => plot_files(&mut f, &p.picture),
        Command::Synthesize(a) => {
            let picture = a
                .picture
                .clone()
                .unwrap_or_else(|| a.output.with_extension("png"));
            f.input("--target", Some(&a.target))
                .input("--mask", a.mask.mask.as_deref())
                .output("--output", Some(&a.output))
                .output("--picture", Some(&picture));
        }
        Command::ShearMaps(a) => {
            f.input("catalogue", Some(&a.catalogue))
                .output("--output", Some(&a.output));
            for p in super::shear_maps::noise_paths(a)? {
                f.output("--noise-output", Some(&p));
            }
        }
    }
    Ok(f)
}

/// The paths of `plot`'s pictures (see [`command_files`]).
fn plot_files(f: &mut CommandFiles, picture: &super::plot::Picture) {
    use super::plot::Picture;
    match picture {
        Picture::Coefficients(a) => {
            for i in &a.inputs {
                f.input("input", Some(i));
            }
            f.output("--output", Some(&a.output));
        }
        Picture::Ellipses(a) => {
            f.input("input", Some(&a.input))
                .output("--output", Some(&a.output));
        }
        Picture::TileMap(a) => {
            f.input("map", Some(&a.map))
                .input("--mask", a.measuring.mask.mask.as_deref())
                .input("--settings", a.measuring.options.settings.as_deref())
                .output("--output", Some(&a.output));
        }
        Picture::FlatBias(a) => {
            f.input("input", Some(&a.input))
                .output("--output", Some(&a.output));
        }
    }
}
