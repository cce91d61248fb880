//! Safe file handling for the library and the command line: outputs are written to a temporary
//! file beside the target and renamed into place only once complete (no half-written output is
//! ever left behind), inputs must be regular files (a FIFO or a device would block a read or
//! never end), and an output may not be an existing FIFO, device or socket.

use crate::error::{Error, Result};
use std::io::Write;
use std::path::{Path, PathBuf};

/// What kind of thing a non-regular file is, for messages ("a FIFO", "a directory", …).
pub fn kind_of(meta: &std::fs::Metadata) -> &'static str {
    let t = meta.file_type();
    if t.is_dir() {
        return "a directory";
    }
    if t.is_file() {
        return "a regular file";
    }
    #[cfg(unix)]
    {
        use std::os::unix::fs::FileTypeExt;
        if t.is_fifo() {
            return "a FIFO (named pipe)";
        }
        if t.is_char_device() {
            return "a character device";
        }
        if t.is_block_device() {
            return "a block device";
        }
        if t.is_socket() {
            return "a socket";
        }
    }
    "not a regular file"
}

/// Checks that an input `path`, when it exists, is a regular file (symbolic links followed).
/// A missing path passes: the reader reports it in its own words.
pub fn require_regular_input(path: &Path) -> Result<()> {
    match std::fs::metadata(path) {
        Ok(meta) if meta.is_file() => Ok(()),
        Ok(meta) if meta.is_dir() => Err(Error::io(path, "is a directory, not a file")),
        Ok(meta) => Err(Error::io(
            path,
            format!(
                "is {}, not a regular file: inputs must be regular files",
                kind_of(&meta)
            ),
        )),
        Err(_) => Ok(()),
    }
}

/// Reads a text input after checking that it is a regular file.
pub fn read_text(path: &Path) -> Result<String> {
    require_regular_input(path)?;
    std::fs::read_to_string(path).map_err(|e| match e.kind() {
        std::io::ErrorKind::NotFound => Error::io(path, "no such file"),
        _ => Error::io(path, e),
    })
}

/// The temporary path used while writing `path` (same directory, so the rename is atomic).
pub fn temporary_path(path: &Path) -> PathBuf {
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| "output".to_string());
    path.with_file_name(format!(".{name}.{}.partial", std::process::id()))
}

/// The file a write to `path` replaces: the target of a symbolic link (so that the link stays
/// a link), else `path` itself.
fn write_target(path: &Path) -> PathBuf {
    match std::fs::symlink_metadata(path) {
        Ok(m) if m.file_type().is_symlink() => {
            std::fs::canonicalize(path).unwrap_or_else(|_| path.to_path_buf())
        }
        _ => path.to_path_buf(),
    }
}

/// Writes a file through `write` into a temporary file, then renames it to `path` (to the
/// target of `path` when it is a symbolic link). On any error the temporary file is removed
/// and `path` is left untouched.
pub fn write_atomically(path: &Path, write: impl FnOnce(&Path) -> Result<()>) -> Result<()> {
    check_output_path(path)?;
    let target = write_target(path);
    let tmp = temporary_path(&target);
    let _ = std::fs::remove_file(&tmp);
    let result =
        write(&tmp).and_then(|()| std::fs::rename(&tmp, &target).map_err(|e| Error::io(path, e)));
    if result.is_err() {
        let _ = std::fs::remove_file(&tmp);
    }
    result
}

/// Checks, before any work is done, that `path` could be written: not empty, not a directory
/// nor any other existing non-regular file (a FIFO, a device, a socket would be replaced by a
/// regular file), and in an existing directory.
pub fn check_output_path(path: &Path) -> Result<()> {
    if path.as_os_str().is_empty() {
        return Err(Error::Setting("an output path is empty".to_string()));
    }
    match std::fs::metadata(path) {
        Ok(meta) if meta.is_dir() => {
            return Err(Error::io(path, "is a directory, not a file path"));
        }
        Ok(meta) if !meta.is_file() => {
            return Err(Error::io(
                path,
                format!(
                    "exists and is {}, not a regular file: refusing to replace it with an output file",
                    kind_of(&meta)
                ),
            ));
        }
        _ => {}
    }
    if let Some(dir) = path.parent().filter(|d| !d.as_os_str().is_empty()) {
        if !dir.is_dir() {
            return Err(Error::io(path, "its directory does not exist"));
        }
    }
    Ok(())
}

/// Checks that a file can be created beside `path` (its directory exists and is writable) by
/// creating and removing the temporary file a write would use.
pub fn check_directory_writable(path: &Path) -> Result<()> {
    check_output_path(path)?;
    let probe = temporary_path(&write_target(path));
    let _ = std::fs::remove_file(&probe);
    match std::fs::OpenOptions::new()
        .write(true)
        .create_new(true)
        .open(&probe)
    {
        Ok(f) => {
            drop(f);
            let _ = std::fs::remove_file(&probe);
            Ok(())
        }
        Err(e) => Err(Error::io(
            path,
            format!("cannot write in its directory ({e})"),
        )),
    }
}

/// Writes bytes atomically (see [`write_atomically`]).
pub fn write_bytes(path: &Path, bytes: &[u8]) -> Result<()> {
    write_atomically(path, |tmp| {
        let mut f = std::fs::File::create(tmp).map_err(|e| Error::io(path, e))?;
        f.write_all(bytes).map_err(|e| Error::io(path, e))?;
        f.sync_all().map_err(|e| Error::io(path, e))
    })
}

/// Writes `bytes` to `path` only if nothing is there yet, atomically: the whole file appears at
/// once (a temporary file hard-linked into place) and an existing file is never replaced, even
/// by a process racing for the same path. Returns `false` (and writes nothing) when `path`
/// already exists.
pub fn write_new(path: &Path, bytes: &[u8]) -> Result<bool> {
    check_output_path(path)?;
    let tmp = temporary_path(path);
    let _ = std::fs::remove_file(&tmp);
    let written = (|| -> Result<bool> {
        let mut f = std::fs::File::create(&tmp).map_err(|e| Error::io(path, e))?;
        f.write_all(bytes).map_err(|e| Error::io(path, e))?;
        f.sync_all().map_err(|e| Error::io(path, e))?;
        match std::fs::hard_link(&tmp, path) {
            Ok(()) => Ok(true),
            Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => Ok(false),
            Err(e) => Err(Error::io(path, e)),
        }
    })();
    let _ = std::fs::remove_file(&tmp);
    written
}

/// Writes a value as pretty JSON atomically.
pub fn write_json<T: serde::Serialize>(path: &Path, value: &T) -> Result<()> {
    let text = serde_json::to_string_pretty(value)
        .map_err(|e| Error::io(path, format!("cannot encode JSON: {e}")))?;
    write_bytes(path, text.as_bytes())
}

/// The identity of an existing file (device and inode on Unix), shared by every path that
/// names it: the path itself, a symbolic link to it, a hard link, a path through `..`.
#[cfg(unix)]
pub fn file_identity(path: &Path) -> Option<(u64, u64)> {
    use std::os::unix::fs::MetadataExt;
    std::fs::metadata(path).ok().map(|m| (m.dev(), m.ino()))
}

/// The identity of an existing file: its canonical path where inodes are not available.
#[cfg(not(unix))]
pub fn file_identity(path: &Path) -> Option<PathBuf> {
    std::fs::canonicalize(path).ok()
}

/// Where a (possibly not yet existing) output would be: its directory canonicalised plus its
/// file name, so two spellings of one output path compare equal.
pub fn output_location(path: &Path) -> PathBuf {
    let target = write_target(path);
    let dir = target
        .parent()
        .filter(|d| !d.as_os_str().is_empty())
        .unwrap_or(Path::new("."));
    let dir = std::fs::canonicalize(dir).unwrap_or_else(|_| dir.to_path_buf());
    match target.file_name() {
        Some(name) => dir.join(name),
        None => target,
    }
}
