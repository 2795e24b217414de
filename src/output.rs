//! Writing output files atomically: a reader (or a later run) sees either the old file or
//! the whole new one, never a partial file, even when the writer is interrupted.
//!
//! The bytes go to a temporary file in the target's directory (same file system, so the
//! final rename is atomic on POSIX), which is flushed to disk (`fsync`) and then renamed
//! over the target; the directory is then synced so the rename itself survives a crash.
//! The temporary file is created by the `tempfile` crate, which also removes it when
//! anything fails before the rename (including an unwinding panic). A process killed by a
//! signal cannot run that cleanup, so the temporary file's name starts with `.` and ends
//! with [`TEMP_SUFFIX`] and can be recognised and removed.

use std::io::Write;
use std::path::{Path, PathBuf};

use thiserror::Error;

/// Ending of the temporary files `write_atomic` creates next to its targets.
pub const TEMP_SUFFIX: &str = ".clamber-partial";

/// An output file that could not be written. The target is unchanged.
#[derive(Debug, Error)]
#[non_exhaustive]
pub enum OutputError {
    #[error("{path}: cannot write: {what}: {source}")]
    Io {
        path: PathBuf,
        what: &'static str,
        source: std::io::Error,
    },
    #[error("{path}: cannot write: the path names no file")]
    NoFileName { path: PathBuf },
}

/// Write `bytes` to `path` atomically (see the module docs). An existing file is replaced
/// whole; its permissions are not carried over. Missing parent directories are not created.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> Result<(), OutputError> {
    let io = |what: &'static str| {
        move |source| OutputError::Io {
            path: path.to_path_buf(),
            what,
            source,
        }
    };
    let file_name = path
        .file_name()
        .ok_or_else(|| OutputError::NoFileName {
            path: path.to_path_buf(),
        })?
        .to_string_lossy()
        .into_owned();
    let dir = match path.parent() {
        Some(d) if !d.as_os_str().is_empty() => d.to_path_buf(),
        _ => PathBuf::from("."),
    };
    let mut tmp = tempfile::Builder::new()
        .prefix(&format!(".{file_name}."))
        .suffix(TEMP_SUFFIX)
        .tempfile_in(&dir)
        .map_err(io("creating a temporary file in its directory"))?;
    tmp.write_all(bytes).map_err(io("writing"))?;
    tmp.as_file().sync_all().map_err(io("flushing to disk"))?;
    tmp.persist(path)
        .map_err(|e| io("renaming the temporary file over it")(e.error))?;
    sync_dir(&dir).map_err(io("flushing the directory"))?;
    Ok(())
}

/// Sync a directory so a rename in it is on disk (POSIX; a no-op elsewhere).
#[cfg(unix)]
fn sync_dir(dir: &Path) -> std::io::Result<()> {
    std::fs::File::open(dir)?.sync_all()
}

#[cfg(not(unix))]
fn sync_dir(_dir: &Path) -> std::io::Result<()> {
    Ok(())
}
