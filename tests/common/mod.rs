//! Helpers shared by the integration tests: reading reference files written by the scripts in
//! reference-values/, the SplitMix64 stream those scripts use for pseudo-random inputs, and flat
//! test footprints (a masked border and circular holes with a C2 taper).
#![allow(dead_code)]

use std::path::PathBuf;

/// Path of a file under reference-values/.
pub fn reference_path(rel: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("reference-values")
        .join(rel)
}

/// Reads a JSON reference file.
pub fn read_json(rel: &str) -> serde_json::Value {
    let path = reference_path(rel);
    let text = std::fs::read_to_string(&path)
        .unwrap_or_else(|e| panic!("cannot read {}: {e}", path.display()));
    serde_json::from_str(&text).unwrap_or_else(|e| panic!("bad JSON in {}: {e}", path.display()))
}

fn read_bytes(rel: &str) -> Vec<u8> {
    let path = reference_path(rel);
    std::fs::read(&path).unwrap_or_else(|e| panic!("cannot read {}: {e}", path.display()))
}

/// Little-endian u32 array.
pub fn read_u32(rel: &str) -> Vec<u32> {
    read_bytes(rel)
        .chunks_exact(4)
        .map(|c| u32::from_le_bytes([c[0], c[1], c[2], c[3]]))
        .collect()
}

/// Little-endian i64 array.
pub fn read_i64(rel: &str) -> Vec<i64> {
    read_bytes(rel)
        .chunks_exact(8)
        .map(|c| i64::from_le_bytes(c.try_into().unwrap()))
        .collect()
}

/// Little-endian f64 array.
pub fn read_f64(rel: &str) -> Vec<f64> {
    read_bytes(rel)
        .chunks_exact(8)
        .map(|c| f64::from_le_bytes(c.try_into().unwrap()))
        .collect()
}

/// SplitMix64 (Steele, Lea & Flood 2014, OOPSLA), as in reference-values/healpix_reference.py.
pub struct SplitMix64(pub u64);

impl SplitMix64 {
    pub fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }

    /// Uniform in [0, 1) with 53 random bits.
    pub fn next_f64(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 * (-53f64).exp2()
    }
}

/// C2 apodization of Grain, Tristram & Stompor 2009 (PRD 79, 123515): f = (1 − cos πx)/2 for
/// x = distance / width < 1, in pixel units (flat geometry).
pub fn c2(distance: f64, width: f64) -> f64 {
    let x = distance / width;
    if x <= 0.0 {
        0.0
    } else if x >= 1.0 {
        1.0
    } else {
        (1.0 - (std::f64::consts::PI * x).cos()) / 2.0
    }
}

/// An n × n footprint with a masked border of `border` pixels and circular holes (cx, cy, r),
/// C2-apodized over `width` pixels.
pub fn holey_taper(n: usize, border: f64, holes: &[(f64, f64, f64)], width: f64) -> Vec<f64> {
    (0..n * n)
        .map(|i| {
            let (x, y) = ((i % n) as f64, (i / n) as f64);
            let far = n as f64 - 1.0 - border;
            let to_edge = (x - border).min(y - border).min(far - x).min(far - y);
            let to_hole = holes
                .iter()
                .map(|&(cx, cy, r)| (x - cx).hypot(y - cy) - r)
                .fold(f64::INFINITY, f64::min);
            c2(to_edge.min(to_hole), width)
        })
        .collect()
}

/// Waits for `child` (started with `args`), killing it and failing the test as a hang when it
/// runs longer than `limit`; returns its output.
pub fn wait_or_fail_as_hang(
    mut child: std::process::Child,
    args: &[String],
    limit: std::time::Duration,
) -> std::process::Output {
    let start = std::time::Instant::now();
    while child.try_wait().unwrap().is_none() {
        if start.elapsed() > limit {
            let _ = child.kill();
            let _ = child.wait();
            panic!("{args:?}: still running after {limit:?} (a hang)");
        }
        std::thread::sleep(std::time::Duration::from_millis(20));
    }
    child.wait_with_output().unwrap()
}
