//! Helpers shared by the integration tests: reading reference files written by the scripts in
//! reference-values/, and the SplitMix64 stream those scripts use for pseudo-random inputs.
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
