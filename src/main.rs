//! The `planisphere` command line: see `planisphere --help`.

fn main() {
    std::process::exit(planisphere::cli::main());
}
