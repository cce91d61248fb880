//! One child process timed for the examples that run a binary: wall time around it, CPU time
//! (user + sys) and peak resident memory (`ru_maxrss`) of that child alone, from `wait4`, so
//! that children do not mix. Included by `#[path]` (Unix only).

use std::process::{Command, Stdio};
use std::time::Instant;

/// Wall time, CPU time (user + sys) and peak resident memory of one finished child.
pub struct ChildCost {
    pub wall: f64,
    pub cpu: f64,
    pub peak_bytes: f64,
}

/// Runs `cmd` (its output discarded) to its end and measures it; an error naming `what` when
/// it cannot start or fails.
pub fn run_child(cmd: &mut Command, what: &str) -> Result<ChildCost, String> {
    let start = Instant::now();
    let child = cmd
        .stdout(Stdio::null())
        .spawn()
        .map_err(|e| format!("{what}: cannot start: {e}"))?;
    let pid = child.id() as libc::pid_t;
    let mut status: libc::c_int = 0;
    // SAFETY: rusage is plain old data; wait4 fills it for the child we just started.
    let mut usage: libc::rusage = unsafe { std::mem::zeroed() };
    let waited = unsafe { libc::wait4(pid, &mut status, 0, &mut usage) };
    let wall = start.elapsed().as_secs_f64();
    if waited != pid {
        return Err(format!("{what}: wait4 failed"));
    }
    if !(libc::WIFEXITED(status) && libc::WEXITSTATUS(status) == 0) {
        return Err(format!("{what}: failed (wait status {status})"));
    }
    let secs = |t: libc::timeval| t.tv_sec as f64 + t.tv_usec as f64 * 1e-6;
    Ok(ChildCost {
        wall,
        cpu: secs(usage.ru_utime) + secs(usage.ru_stime),
        // Linux reports ru_maxrss in KiB.
        peak_bytes: usage.ru_maxrss as f64 * 1024.0,
    })
}
