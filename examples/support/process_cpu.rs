//! CPU time of this process for the examples that time calls in-process. Included by `#[path]`.

/// User + system CPU time of this process, in seconds (NaN where getrusage is missing).
#[cfg(unix)]
pub fn cpu_seconds() -> f64 {
    // SAFETY: getrusage writes into the zero-initialised struct we pass.
    let mut usage: libc::rusage = unsafe { std::mem::zeroed() };
    unsafe { libc::getrusage(libc::RUSAGE_SELF, &mut usage) };
    let seconds = |t: libc::timeval| t.tv_sec as f64 + t.tv_usec as f64 * 1e-6;
    seconds(usage.ru_utime) + seconds(usage.ru_stime)
}

/// User + system CPU time of this process, in seconds (NaN where getrusage is missing).
#[cfg(not(unix))]
pub fn cpu_seconds() -> f64 {
    f64::NAN
}
