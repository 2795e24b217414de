//! Robot files: our own TOML format ([`toml_format`], documented in `docs/robot-format.md`)
//! and URDF ([`urdf`]), both read into a [`RobotSpec`] and built into a [`Robot`]; URDF
//! can also be written from any loaded robot. Meshes referenced by either are read by
//! [`mesh`].

use std::path::{Path, PathBuf};

use thiserror::Error;

use crate::model::{ModelError, Robot, RobotSpec};

pub mod mesh;
pub mod toml_format;
pub mod urdf;

/// A robot file that could not be loaded. Every variant names the file; those about one
/// place give its line and column (1-based) and the field at fault.
#[derive(Debug, Error)]
#[non_exhaustive]
pub enum RobotFileError {
    #[error("{path}: cannot read the file: {source}")]
    Io {
        path: PathBuf,
        source: std::io::Error,
    },
    #[error("{path}: unknown robot file type; expected a `.toml` or `.urdf` file")]
    UnknownFormat { path: PathBuf },
    /// Malformed TOML or XML, or a value of the wrong type or form.
    #[error("{path}:{line}:{column}: {message}")]
    Syntax {
        path: PathBuf,
        line: usize,
        column: usize,
        message: String,
    },
    /// Well-formed file whose content cannot make a robot.
    #[error("{path}:{line}:{column}: `{field}`: {source}")]
    Model {
        path: PathBuf,
        line: usize,
        column: usize,
        field: String,
        source: Box<ModelError>,
    },
    /// A mesh file referenced by the robot file is missing or unreadable.
    #[error("{path}:{line}:{column}: `{field}`: mesh `{mesh}`: {message}")]
    Mesh {
        path: PathBuf,
        line: usize,
        column: usize,
        field: String,
        mesh: PathBuf,
        message: String,
    },
}

impl RobotFileError {
    /// The model error behind a `Model` error.
    pub fn model_error(&self) -> Option<&ModelError> {
        match self {
            RobotFileError::Model { source, .. } => Some(source),
            _ => None,
        }
    }

    /// (line, column) of the fault in the robot file, when there is one.
    pub fn position(&self) -> Option<(usize, usize)> {
        match self {
            RobotFileError::Syntax { line, column, .. }
            | RobotFileError::Model { line, column, .. }
            | RobotFileError::Mesh { line, column, .. } => Some((*line, *column)),
            _ => None,
        }
    }
}

/// The formats a robot file can be in, by file extension.
enum Format {
    Toml,
    Urdf,
}

/// Read a robot file's text and tell its format from the extension.
fn read(path: &Path) -> Result<(String, Format), RobotFileError> {
    let ext = path
        .extension()
        .and_then(|e| e.to_str())
        .map(|e| e.to_ascii_lowercase());
    let format = match ext.as_deref() {
        Some("toml") => Format::Toml,
        Some("urdf") | Some("xml") => Format::Urdf,
        _ => {
            return Err(RobotFileError::UnknownFormat {
                path: path.to_path_buf(),
            })
        }
    };
    let text = std::fs::read_to_string(path).map_err(|source| RobotFileError::Io {
        path: path.to_path_buf(),
        source,
    })?;
    Ok((text, format))
}

/// Read a robot description from a `.toml` or `.urdf` file without building it.
pub fn load_robot_spec(path: &Path) -> Result<RobotSpec, RobotFileError> {
    match read(path)? {
        (text, Format::Toml) => toml_format::parse(&text, path).map(|(spec, _)| spec),
        (text, Format::Urdf) => urdf::parse(&text, path).map(|(spec, _)| spec),
    }
}

/// Load and build a robot from a `.toml` or `.urdf` file.
pub fn load_robot(path: &Path) -> Result<Robot, RobotFileError> {
    match read(path)? {
        (text, Format::Toml) => toml_format::load_str(&text, path),
        (text, Format::Urdf) => urdf::load_str(&text, path),
    }
}

/// 1-based (line, column) of a byte offset in `text`; the column counts characters, not
/// bytes. Offsets past the end give the position just after the last character. Shared
/// by the TOML and URDF readers.
pub(crate) fn line_col(text: &str, byte_offset: usize) -> (usize, usize) {
    let mut end = byte_offset.min(text.len());
    while !text.is_char_boundary(end) {
        end -= 1;
    }
    let before = &text[..end];
    let line = before.matches('\n').count() + 1;
    let line_start = before.rfind('\n').map_or(0, |i| i + 1);
    let column = before[line_start..].chars().count() + 1;
    (line, column)
}
