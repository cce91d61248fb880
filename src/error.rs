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
