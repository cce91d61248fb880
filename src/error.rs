//! One error type for the whole library: every failure a user can cause ends here, as a clear
//! one-line message, never as a panic.

use std::path::PathBuf;

/// Everything that can go wrong in planisphere, each variant printing as a single line.
#[derive(Debug, thiserror::Error)]
pub enum Error {
    /// A file could not be opened, read or written.
    #[error("{path}: {reason}")]
    Io { path: PathBuf, reason: String },
    /// A FITS file is not a valid HEALPix map by the HEALPix FITS convention.
    #[error("{path}: {reason}")]
    Fits { path: PathBuf, reason: String },
    /// NSIDE, ordering, pixel index or another HEALPix parameter is out of its allowed range.
    #[error("{0}")]
    Geometry(String),
    /// Two inputs that must agree (map and mask, two maps) do not.
    #[error("{0}")]
    Mismatch(String),
    /// An option or setting chosen by the user is outside what makes sense.
    #[error("{0}")]
    Setting(String),
    /// Input values that cannot be used (NaN where numbers are needed, empty footprint, ...).
    #[error("{0}")]
    Data(String),
}

/// Result alias used across the library.
pub type Result<T> = std::result::Result<T, Error>;

impl Error {
    /// An I/O failure on `path`, with the system's reason.
    pub fn io(path: impl Into<PathBuf>, err: impl std::fmt::Display) -> Self {
        Error::Io {
            path: path.into(),
            reason: err.to_string(),
        }
    }

    /// A FITS-convention failure on `path`.
    pub fn fits(path: impl Into<PathBuf>, reason: impl Into<String>) -> Self {
        Error::Fits {
            path: path.into(),
            reason: reason.into(),
        }
    }
}

/// `Ok` when every value is finite; otherwise [`Error::Data`] with the message `describe` writes
/// for the position of the first value that is not (NaN or infinite).
pub fn check_finite(values: &[f64], describe: impl FnOnce(usize) -> String) -> Result<()> {
    match values.iter().position(|v| !v.is_finite()) {
        Some(i) => Err(Error::Data(describe(i))),
        None => Ok(()),
    }
}

/// A number as printed in messages: at most 6 significant digits, in plain notation for
/// magnitudes in [1e-4, 1e6) and in scientific notation (`1e-300`, `2.5e12`) otherwise, so a
/// user's extreme value never prints as hundreds of digits.
pub fn compact(x: f64) -> String {
    if x == 0.0 || !x.is_finite() {
        return format!("{x}");
    }
    let trim = |m: &str| -> String {
        if m.contains('.') {
            m.trim_end_matches('0').trim_end_matches('.').to_string()
        } else {
            m.to_string()
        }
    };
    let magnitude = x.abs();
    if (1e-4..1e6).contains(&magnitude) {
        let digits_before = magnitude.log10().floor() as i32 + 1;
        let decimals = (6 - digits_before).max(0) as usize;
        trim(&format!("{x:.decimals$}"))
    } else {
        let s = format!("{x:.5e}");
        match s.split_once('e') {
            Some((mantissa, exponent)) => format!("{}e{exponent}", trim(mantissa)),
            None => s,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::compact;

    #[test]
    fn compact_numbers_keep_six_significant_digits_and_switch_to_scientific_notation() {
        // expected strings written out by hand from the rule in the doc comment
        assert_eq!(compact(1e-300), "1e-300");
        assert_eq!(compact(-2.5e12), "-2.5e12");
        assert_eq!(compact(0.1 + 0.2), "0.3");
        assert_eq!(compact(123.456789), "123.457");
        assert_eq!(compact(3.0), "3");
        assert_eq!(compact(1.0 / 3.0), "0.333333");
        assert_eq!(compact(0.0), "0");
        assert_eq!(compact(f64::INFINITY), "inf");
    }
}
