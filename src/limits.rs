//! Upper limits on the sizes and counts a user can ask for, kept in one place so that every
//! command refuses the same requests with the same reasons, before any memory is taken or any
//! work starts.
//!
//! * Memory: an estimate of the bytes a request needs is compared with the memory this process
//!   may use: the smallest of `MemAvailable` in /proc/meminfo, the address-space limit
//!   (`ulimit -v`) and the cgroup limit (/sys/fs/cgroup/memory.max). Where none can be read the
//!   check passes.
//! * Multipoles: a HEALPix ring grid of NSIDE n carries multipoles up to 3n − 1 (common
//!   practice; Górski et al. 2005), so ℓmax above that describes nothing the map can hold.
//! * Counts: skies, members and sky indices stay below [`MAX_COUNT`], so an index
//!   (first index + count) cannot overflow and a run's table stays within memory.
//! * Orientations: the bank's orientations are π/L apart; at the finest scale (central
//!   frequency ξ₀ = 3π/4 rad per pixel) two neighbouring filters are ξ₀·π/L apart in frequency,
//!   and below one Fourier grid spacing 2π/n they are the same filter on the grid, so
//!   L ≤ ξ₀·n/2 = 3πn/8 (our rule, from the filter definitions in `filters.rs`).
//! * Iterations: the harmonic analysis iterations and L-BFGS iterations are capped at numbers
//!   far beyond where they stop improving anything.
//! * Scales: J ≤ [`MAX_SCALES`] = 12, wavelengths up to (8/3)·2^12 tile pixels (our rule: the
//!   largest scale must fit a tile of 2^(J+1) pixels, and 2^13-pixel tiles are already far beyond
//!   any sky tile or flat field that fits in memory with its filtered fields).
//! * Tile sizes: n = 2^k·m with m ∈ {1, 3, 5, 7, 9} ([`is_tile_size`]), the sizes the tiling
//!   picks and the scattering engine accepts.

use crate::error::{Error, Result};

/// Largest magnitude of a map value: the statistics take up to third powers of the values
/// (tile bispectrum) summed over up to ~10⁹ pixels, which must stay below the f64 limit
/// 1.8e308: (10⁹⁰)³ · 10⁹ = 10²⁷⁹.
pub const MAX_ABS_VALUE: f64 = 1e90;

/// Largest number of dyadic scales J of a measurement, a synthesis, a filter bank or a
/// measurement file.
pub const MAX_SCALES: usize = 12;

/// Largest number of skies of one run, members of one ensemble, or sky index.
pub const MAX_COUNT: u64 = 1_000_000;

/// Largest number of Jacobi iterations of a harmonic analysis (each is a synthesis and an
/// analysis of the whole map; 3 is common practice and the residual stops falling after ~10).
pub const MAX_HARMONIC_ITERATIONS: usize = 100;

/// Checks a count given by `option`: from 1 to [`MAX_COUNT`].
pub fn check_count(option: &str, count: u64) -> Result<()> {
    if count == 0 || count > MAX_COUNT {
        return Err(Error::Setting(format!(
            "{option} must be from 1 to {MAX_COUNT}, got {count} (at most {MAX_COUNT} per run, so indices and tables stay bounded)"
        )));
    }
    Ok(())
}

/// Checks that indices `first .. first + count` stay within [`MAX_COUNT`] and `u64`.
pub fn check_index_range(first: u64, count: u64) -> Result<()> {
    check_count("--count", count)?;
    match first.checked_add(count) {
        Some(end) if end <= MAX_COUNT => Ok(()),
        _ => Err(Error::Setting(format!(
            "--first-index {first} with --count {count} goes past the largest sky index {}: indices must stay below {MAX_COUNT}",
            MAX_COUNT - 1
        ))),
    }
}

/// Checks that `lmax` fits a ring grid of NSIDE `nside`: at most 3·NSIDE − 1.
pub fn check_lmax(option: &str, lmax: usize, nside: u32) -> Result<()> {
    let top = 3 * nside as usize - 1;
    if lmax > top {
        return Err(Error::Setting(format!(
            "{option} {lmax} is above 3·NSIDE − 1 = {top}: a NSIDE {nside} map carries no higher multipoles"
        )));
    }
    Ok(())
}

/// Checks a number of harmonic-analysis iterations.
pub fn check_harmonic_iterations(iterations: usize) -> Result<()> {
    if iterations > MAX_HARMONIC_ITERATIONS {
        return Err(Error::Setting(format!(
            "--iterations {iterations} is more than {MAX_HARMONIC_ITERATIONS}: each is a full pair of harmonic transforms and the residual stops falling after about 10"
        )));
    }
    Ok(())
}

/// Largest number of orientations a bank on an n-pixel grid can tell apart: ⌊3πn/8⌋.
pub fn max_orientations(tile_pixels: usize) -> usize {
    (3.0 * std::f64::consts::PI * tile_pixels as f64 / 8.0).floor() as usize
}

/// Checks the number of orientations L against [`max_orientations`].
pub fn check_orientations(orientations: usize, tile_pixels: usize) -> Result<()> {
    let top = max_orientations(tile_pixels);
    if orientations > top {
        return Err(Error::Setting(format!(
            "L = {orientations} orientations is more than a {tile_pixels}-pixel grid can tell apart: at most {top} (3π·n/8; closer orientations fall within one Fourier cell at the finest scale)"
        )));
    }
    Ok(())
}

/// The memory this process may use, in bytes, and where that number comes from.
pub fn memory_budget() -> Option<(u64, &'static str)> {
    let mut best: Option<(u64, &'static str)> = None;
    let mut take = |bytes: u64, source: &'static str| {
        if best.is_none_or(|(b, _)| bytes < b) {
            best = Some((bytes, source));
        }
    };
    if let Ok(text) = std::fs::read_to_string("/proc/meminfo") {
        if let Some(kb) = text
            .lines()
            .find_map(|l| l.strip_prefix("MemAvailable:"))
            .and_then(|v| v.trim().trim_end_matches("kB").trim().parse::<u64>().ok())
        {
            take(kb.saturating_mul(1024), "available memory (MemAvailable)");
        }
    }
    if let Ok(text) = std::fs::read_to_string("/sys/fs/cgroup/memory.max") {
        if let Ok(bytes) = text.trim().parse::<u64>() {
            take(bytes, "the cgroup memory limit");
        }
    }
    #[cfg(unix)]
    {
        let mut limit = libc::rlimit {
            rlim_cur: 0,
            rlim_max: 0,
        };
        // SAFETY: getrlimit writes into the local struct it is given.
        let status = unsafe { libc::getrlimit(libc::RLIMIT_AS, &mut limit) };
        if status == 0 && limit.rlim_cur != libc::RLIM_INFINITY {
            #[allow(clippy::unnecessary_cast)] // rlim_t is not u64 on every platform
            take(limit.rlim_cur as u64, "the address-space limit (ulimit -v)");
        }
    }
    best
}

fn gigabytes(bytes: f64) -> String {
    format!("{:.1} GB", bytes / 1e9)
}

/// The clause that names the memory a process ran out of, for messages of allocations that
/// failed outside our estimates (a C library's): "out of memory within the 0.2 GB of the
/// address-space limit (ulimit -v)"; without a known budget, "out of memory".
pub fn out_of_memory_clause() -> String {
    match memory_budget() {
        Some((bytes, source)) => format!(
            "out of memory within the {} of {source}",
            gigabytes(bytes as f64)
        ),
        None => "out of memory".into(),
    }
}

/// Checks that `what` (e.g. "a NSIDE 8192 sky"), estimated to need `bytes`, fits the memory
/// this process may use ([`memory_budget`]).
pub fn check_memory(what: &str, bytes: f64) -> Result<()> {
    if let Some((budget, source)) = memory_budget() {
        if bytes.is_nan() || bytes > budget as f64 {
            return Err(Error::Setting(format!(
                "{what} needs about {}, more than the {} of {source}",
                gigabytes(bytes),
                gigabytes(budget as f64)
            )));
        }
    }
    Ok(())
}

/// Estimated bytes to simulate one sky of NSIDE `nside` up to `lmax`: the map and its validity
/// flags (9 bytes per pixel) and the a_ℓm (16 bytes × (ℓmax+1)(ℓmax+2)/2); a lognormal sky
/// adds a second map (the analysis of its beam step) and a second set of a_ℓm. The ring sums
/// and FFT plans of the transform are a few MB.
pub fn sky_bytes(nside: u32, lmax: usize, lognormal: bool) -> f64 {
    let npix = 12.0 * (nside as f64).powi(2);
    let alm = (lmax as f64 + 1.0) * (lmax as f64 + 2.0) / 2.0;
    let copies = if lognormal { 2.0 } else { 1.0 };
    npix + copies * (8.0 * npix + 16.0 * alm)
}

/// Estimated bytes of a flat synthesis of an n × n field with J scales and L orientations:
/// the complex first-layer fields (16 bytes × J·L per pixel) and about 32 real work fields
/// (field, gradient, optimiser history).
pub fn flat_synthesis_bytes(size: usize, scales: usize, orientations: usize) -> f64 {
    let n2 = (size as f64).powi(2);
    n2 * (16.0 * scales as f64 * orientations as f64 + 8.0 * 32.0)
}

/// Estimated bytes to measure `maps` maps (1, or 2 with a cross map) of NSIDE `nside` on a
/// footprint: per map the read buffer and the values (2 × 8 bytes per pixel) and the validity
/// flags (1 byte); for the footprint the mask as read, restricted to the map, tapered and the
/// taper's distance field (4 × 8 bytes per pixel). The tiles are small beside these.
pub fn measurement_bytes(nside: u32, maps: usize) -> f64 {
    let npix = 12.0 * (nside as f64).powi(2);
    npix * (17.0 * maps as f64 + 32.0)
}

/// Estimated bytes to measure the spectra of `maps` maps (1, or 2 with a cross map) of NSIDE
/// `nside` up to `lmax`: per map its values and validity flags (9 bytes per pixel; the analysis
/// works in the map's own array) and its a_ℓm (16 bytes × (ℓmax+1)(ℓmax+2)/2); with a mask
/// (`masked`), the mask as read, the footprint and the taper's work (24 bytes per pixel; without
/// a mask the footprint is held by blocks). Measured at NSIDE 1024 (docs/benchmarks.md): 126.6
/// MB without a mask at ℓmax 767, 198 MB at 3071, 353 MB with a float32 mask at 767.
///
/// ```
/// use planisphere::limits::spectra_bytes;
/// // NSIDE 8192 up to ℓ = 24575 without a mask: 9 × 805 306 368 + 16 × 302 002 176 bytes
/// let bytes = spectra_bytes(8192, 24575, 1, false);
/// assert!((bytes - 1.2080e10).abs() < 1e7);
/// ```
pub fn spectra_bytes(nside: u32, lmax: usize, maps: usize, masked: bool) -> f64 {
    let npix = 12.0 * (nside as f64).powi(2);
    let alm = (lmax as f64 + 1.0) * (lmax as f64 + 2.0) / 2.0;
    let footprint = if masked { 24.0 * npix } else { 0.0 };
    maps as f64 * (9.0 * npix + 16.0 * alm) + footprint
}

/// Is n a tile size the engine accepts: n = 2^k·m with m ∈ {1, 3, 5, 7, 9}, at least 8, and
/// k ≥ 4 when m > 1 (so that the Fourier-cropped grids n/2^d stay even)? FFTs of these sizes
/// factor into radices 2, 3, 5 and 7 (mixed-radix Cooley–Tukey, common practice).
///
/// ```
/// use planisphere::limits::is_tile_size;
/// assert!(is_tile_size(256) && is_tile_size(288) && is_tile_size(448));
/// assert!(!is_tile_size(100) && !is_tile_size(264) && !is_tile_size(24));
/// ```
pub fn is_tile_size(n: usize) -> bool {
    if n < 8 {
        return false;
    }
    let k = n.trailing_zeros();
    let m = n >> k;
    m == 1 || (matches!(m, 3 | 5 | 7 | 9) && k >= 4)
}
