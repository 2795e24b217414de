//! `clamber show` and `clamber render`: run the separate `clamber-view` executable (the
//! core never links a graphics stack). It is looked for next to the running `clamber`
//! executable first, then on `PATH`; its exit code is passed through.

use std::ffi::{OsStr, OsString};
use std::path::{Path, PathBuf};
use std::process::Command;

/// The viewer executable's file name on this platform.
pub const VIEWER: &str = if cfg!(windows) {
    "clamber-view.exe"
} else {
    "clamber-view"
};

/// Failures of the forwarding itself (the viewer's own errors come back as its exit code).
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum ViewerError {
    #[error(
        "the viewer executable `{VIEWER}` was not found next to {exe} nor on PATH; build it \
         with `cargo build --release -p clamber-view` (it lands beside `clamber` in \
         target/release) or put it on PATH"
    )]
    Missing { exe: String },
    #[error("cannot run {path}: {source}")]
    Spawn {
        path: PathBuf,
        source: std::io::Error,
    },
    #[error("{path} was stopped by a signal")]
    Killed { path: PathBuf },
}

/// The viewer next to `exe`, else the first on `path_var` (a PATH-style list).
pub fn find_viewer(exe: Option<&Path>, path_var: Option<&OsStr>) -> Option<PathBuf> {
    let beside = exe
        .and_then(Path::parent)
        .map(|d| d.join(VIEWER))
        .filter(|p| p.is_file());
    beside.or_else(|| {
        path_var.and_then(|p| {
            std::env::split_paths(p)
                .map(|d| d.join(VIEWER))
                .find(|c| c.is_file())
        })
    })
}

/// Run `clamber-view SUBCOMMAND ARGS...` and return its exit code.
pub fn forward(subcommand: &str, args: &[OsString]) -> Result<u8, ViewerError> {
    let exe = std::env::current_exe().ok();
    let path_var = std::env::var_os("PATH");
    let viewer =
        find_viewer(exe.as_deref(), path_var.as_deref()).ok_or_else(|| ViewerError::Missing {
            exe: exe
                .as_deref()
                .map_or("the clamber executable".into(), |e| e.display().to_string()),
        })?;
    let status = Command::new(&viewer)
        .arg(subcommand)
        .args(args)
        .status()
        .map_err(|source| ViewerError::Spawn {
            path: viewer.clone(),
            source,
        })?;
    match status.code() {
        Some(c) => Ok(u8::try_from(c).unwrap_or(1)),
        None => Err(ViewerError::Killed { path: viewer }),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn finds_the_viewer_beside_the_executable_before_path() {
        let dir = tempfile::tempdir().unwrap();
        let bin = dir.path().join("bin");
        let other = dir.path().join("other");
        std::fs::create_dir_all(&bin).unwrap();
        std::fs::create_dir_all(&other).unwrap();
        let exe = bin.join("clamber");
        let path_var = std::env::join_paths([&other]).unwrap();
        assert_eq!(find_viewer(Some(&exe), Some(&path_var)), None);
        std::fs::write(other.join(VIEWER), b"").unwrap();
        assert_eq!(
            find_viewer(Some(&exe), Some(&path_var)),
            Some(other.join(VIEWER))
        );
        std::fs::write(bin.join(VIEWER), b"").unwrap();
        assert_eq!(
            find_viewer(Some(&exe), Some(&path_var)),
            Some(bin.join(VIEWER))
        );
    }
}
