//! Writing output files safely: everything goes to a temporary file beside the target, which is
//! renamed into place only once complete, so no half-written output is ever left behind.

use crate::error::{Error, Result};
use std::io::Write;
use std::path::{Path, PathBuf};

/// The temporary path used while writing `path` (same directory, so the rename is atomic).
pub fn temporary_path(path: &Path) -> PathBuf {
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| "output".to_string());
    path.with_file_name(format!(".{name}.{}.partial", std::process::id()))
}

/// Writes a file through `write` into a temporary file, then renames it to `path`.
/// On any error the temporary file is removed and `path` is left untouched.
pub fn write_atomically(path: &Path, write: impl FnOnce(&Path) -> Result<()>) -> Result<()> {
    check_output_path(path)?;
    let tmp = temporary_path(path);
    let _ = std::fs::remove_file(&tmp);
    let result =
        write(&tmp).and_then(|()| std::fs::rename(&tmp, path).map_err(|e| Error::io(path, e)));
    if result.is_err() {
        let _ = std::fs::remove_file(&tmp);
    }
    result
}

/// Checks, before any work is done, that `path` could be written: not empty, not a directory,
/// and in an existing directory.
pub fn check_output_path(path: &Path) -> Result<()> {
    if path.as_os_str().is_empty() {
        return Err(Error::Setting("an output path is empty".to_string()));
    }
    if path.is_dir() {
        return Err(Error::io(path, "is a directory, not a file path"));
    }
    if let Some(dir) = path.parent().filter(|d| !d.as_os_str().is_empty()) {
        if !dir.is_dir() {
            return Err(Error::io(path, "its directory does not exist"));
        }
    }
    Ok(())
}

/// Writes bytes atomically (see [`write_atomically`]).
pub fn write_bytes(path: &Path, bytes: &[u8]) -> Result<()> {
    write_atomically(path, |tmp| {
        let mut f = std::fs::File::create(tmp).map_err(|e| Error::io(path, e))?;
        f.write_all(bytes).map_err(|e| Error::io(path, e))?;
        f.sync_all().map_err(|e| Error::io(path, e))
    })
}

/// Writes a value as pretty JSON atomically.
pub fn write_json<T: serde::Serialize>(path: &Path, value: &T) -> Result<()> {
    let text = serde_json::to_string_pretty(value)
        .map_err(|e| Error::io(path, format!("cannot encode JSON: {e}")))?;
    write_bytes(path, text.as_bytes())
}
