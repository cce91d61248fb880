//! The `planisphere` command line: see `planisphere --help`.

use std::alloc::{GlobalAlloc, Layout, System};

/// The system allocator, except that a request it cannot meet ends the program with one line on
/// stderr and exit code 2, as every other refusal does, instead of Rust's abort (a multi-line
/// message, a backtrace and exit code 134). The commands estimate their memory up front
/// ([`planisphere::limits::check_memory`]); this is the backstop for what an estimate misses.
struct RefusingAllocator;

// SAFETY: every call is forwarded to `System` unchanged; only a null result is acted on, and
// `refuse` never returns.
unsafe impl GlobalAlloc for RefusingAllocator {
    unsafe fn alloc(&self, layout: Layout) -> *mut u8 {
        let p = unsafe { System.alloc(layout) };
        if p.is_null() {
            refuse(layout.size());
        }
        p
    }

    unsafe fn alloc_zeroed(&self, layout: Layout) -> *mut u8 {
        let p = unsafe { System.alloc_zeroed(layout) };
        if p.is_null() {
            refuse(layout.size());
        }
        p
    }

    unsafe fn dealloc(&self, ptr: *mut u8, layout: Layout) {
        unsafe { System.dealloc(ptr, layout) }
    }

    unsafe fn realloc(&self, ptr: *mut u8, layout: Layout, new_size: usize) -> *mut u8 {
        let p = unsafe { System.realloc(ptr, layout, new_size) };
        if p.is_null() {
            refuse(new_size);
        }
        p
    }
}

#[global_allocator]
static ALLOCATOR: RefusingAllocator = RefusingAllocator;

/// A fixed buffer that `write!` fills without allocating (the heap is what ran out).
struct LineBuffer {
    bytes: [u8; 320],
    len: usize,
}

impl std::fmt::Write for LineBuffer {
    fn write_str(&mut self, s: &str) -> std::fmt::Result {
        let n = s.len().min(self.bytes.len() - self.len);
        self.bytes[self.len..self.len + n].copy_from_slice(&s.as_bytes()[..n]);
        self.len += n;
        Ok(())
    }
}

/// Writes the one-line refusal for an allocation of `bytes` and ends the process with exit code
/// 2 (outputs are written through temporary files renamed into place, so no partial output
/// file is left under its name).
fn refuse(bytes: usize) -> ! {
    use std::fmt::Write;
    let mut line = LineBuffer {
        bytes: [0; 320],
        len: 0,
    };
    let mib = |b: f64| b / (1u64 << 20) as f64;
    let _ = write!(
        line,
        "planisphere: error: out of memory: {:.1} MiB more could not be allocated",
        mib(bytes as f64)
    );
    if let Some(limit) = address_space_limit() {
        let _ = write!(
            line,
            " under the address-space limit (ulimit -v) of {:.1} MiB",
            mib(limit as f64)
        );
    }
    let _ = writeln!(
        line,
        "; use a smaller NSIDE, --lmax, tile size or number of threads (RAYON_NUM_THREADS)"
    );
    #[cfg(unix)]
    // SAFETY: write(2) and _exit(2) need no heap; the buffer is valid for `len` bytes.
    unsafe {
        libc::write(2, line.bytes.as_ptr().cast(), line.len);
        libc::_exit(2)
    }
    #[cfg(not(unix))]
    {
        use std::io::Write as _;
        let _ = std::io::stderr().write_all(&line.bytes[..line.len]);
        std::process::exit(2)
    }
}

/// The soft address-space limit, when one is set (getrlimit needs no heap).
#[cfg(unix)]
fn address_space_limit() -> Option<u64> {
    let mut limit = libc::rlimit {
        rlim_cur: 0,
        rlim_max: 0,
    };
    // SAFETY: getrlimit writes into the local struct it is given.
    let status = unsafe { libc::getrlimit(libc::RLIMIT_AS, &mut limit) };
    #[allow(clippy::unnecessary_cast)] // rlim_t is not u64 on every platform
    (status == 0 && limit.rlim_cur != libc::RLIM_INFINITY).then_some(limit.rlim_cur as u64)
}

#[cfg(not(unix))]
fn address_space_limit() -> Option<u64> {
    None
}

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
