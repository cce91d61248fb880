//! The `planisphere` command line: see `planisphere --help`.

fn main() {
    restore_default_broken_pipe();
    std::process::exit(planisphere::cli::main());
}

/// Rust ignores SIGPIPE, so a closed pipe (`planisphere … | head`) would make the next print
/// panic; restoring the default action ends the program quietly instead, as Unix tools do
/// (common practice).
#[cfg(unix)]
fn restore_default_broken_pipe() {
    // SAFETY: called once at start-up, before any thread exists; SIG_DFL is a valid action.
    unsafe {
        libc::signal(libc::SIGPIPE, libc::SIG_DFL);
    }
}

#[cfg(not(unix))]
fn restore_default_broken_pipe() {}
