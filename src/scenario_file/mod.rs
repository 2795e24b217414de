//! Scenario files (`*.scenario.toml`): a robot reference, a scene, a start, a goal, the
//! limits to plan within and where outputs go. Documented field by field in
//! `docs/scenario-format.md`, with a JSON Schema for editors in `docs/scenario.schema.json`.
//!
//! Reading ([`load_scenario`], [`parse_scenario`]) follows the robot file reader: serde
//! reads the document into raw tables that keep every value's span (unknown keys are
//! rejected there, with a "did you mean" suggestion), then [`read`] checks each value's
//! type, form and references by hand so every error names the file, line, column, key and
//! the expected form. The TOML machinery (raw values, span to line/column, suggestions, the
//! robot-format tables of an inline mechanism, obstacle shapes) is shared with
//! `robot_file::toml_format`. Writing ([`to_toml`]) turns a [`Scenario`] back into a file so
//! scenarios built in code can be exported.

use std::path::{Path, PathBuf};

use thiserror::Error;

use crate::robot_file::RobotFileError;
use crate::scenario::Scenario;

mod raw;
mod read;
mod write;

pub use raw::{
    FILE_KEYS, GOAL_KEYS, GRIP_KEYS, HOLD_KEYS, LIMITS_KEYS, MECHANISM_KEYS, OBSTACLE_KEYS,
    OUTPUTS_KEYS, REGION_KEYS, SCENE_KEYS, START_KEYS,
};
pub use write::{to_toml, ScenarioWriteError};

/// Largest number of Newton steps used to settle a start onto its stance (`settle = true`).
pub const SETTLE_ITERATIONS: usize = 200;

/// A scenario file that could not be read. Every variant names the file; those about one
/// place give its line and column (1-based), and [`ScenarioFileError::field`] names the key.
#[derive(Debug, Error)]
#[non_exhaustive]
pub enum ScenarioFileError {
    #[error("{path}: cannot read the file: {source}")]
    Io {
        path: PathBuf,
        source: std::io::Error,
    },
    /// Malformed TOML, an unknown or duplicate key, or a table written in the wrong form.
    #[error("{path}:{line}:{column}: {message}")]
    Syntax {
        path: PathBuf,
        line: usize,
        column: usize,
        message: String,
    },
    /// A value of the wrong type, form or range, or a name that refers to nothing. The
    /// message says what was expected.
    #[error("{path}:{line}:{column}: `{field}`: {message}")]
    Field {
        path: PathBuf,
        line: usize,
        column: usize,
        field: String,
        message: String,
    },
    /// A file the scenario refers to (robot or mechanism) exists but cannot be loaded; the
    /// position is that of the reference, `source` has the position inside the other file.
    #[error("{path}:{line}:{column}: `{field}`: {source}")]
    Referenced {
        path: PathBuf,
        line: usize,
        column: usize,
        field: String,
        source: Box<RobotFileError>,
    },
}

impl ScenarioFileError {
    /// (line, column) of the fault in the scenario file, when there is one.
    pub fn position(&self) -> Option<(usize, usize)> {
        match self {
            ScenarioFileError::Syntax { line, column, .. }
            | ScenarioFileError::Field { line, column, .. }
            | ScenarioFileError::Referenced { line, column, .. } => Some((*line, *column)),
            ScenarioFileError::Io { .. } => None,
        }
    }

    /// The key at fault, when the error is about one value.
    pub fn field(&self) -> Option<&str> {
        match self {
            ScenarioFileError::Field { field, .. }
            | ScenarioFileError::Referenced { field, .. } => Some(field),
            _ => None,
        }
    }

    /// The scenario file.
    pub fn path(&self) -> &Path {
        match self {
            ScenarioFileError::Io { path, .. }
            | ScenarioFileError::Syntax { path, .. }
            | ScenarioFileError::Field { path, .. }
            | ScenarioFileError::Referenced { path, .. } => path,
        }
    }

    /// The message without the `path:line:column:` prefix (for renderers that show the
    /// place themselves).
    pub fn message(&self) -> String {
        match self {
            ScenarioFileError::Io { source, .. } => format!("cannot read the file: {source}"),
            ScenarioFileError::Syntax { message, .. } => message.clone(),
            ScenarioFileError::Field { field, message, .. } => format!("`{field}`: {message}"),
            ScenarioFileError::Referenced { field, source, .. } => format!("`{field}`: {source}"),
        }
    }
}

/// Where the outputs of a run go (each optional; the command decides what to do without
/// one). Paths are resolved against the scenario file's directory when read.
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct Outputs {
    /// The planned route (`route.json`).
    pub route: Option<PathBuf>,
    /// Time-sampled joint trajectory (CSV).
    pub trajectory: Option<PathBuf>,
    /// Short human-readable summary (text).
    pub summary: Option<PathBuf>,
    /// A picture of the route (PNG).
    pub picture: Option<PathBuf>,
    /// Directory for the plots of the route (`joints`, `residual`, `clearance`, each as
    /// PNG and SVG).
    pub plots: Option<PathBuf>,
}

/// A scenario read from a file, with what the file says beyond the [`Scenario`] itself.
#[derive(Clone, Debug)]
pub struct ScenarioFile {
    pub scenario: Scenario,
    /// The robot file, resolved against the scenario file's directory.
    pub robot_file: PathBuf,
    pub outputs: Outputs,
    /// Whether the start was projected onto its stance while reading (`settle = true`).
    pub settled: bool,
}

/// Read and check a scenario file. Relative paths in it (robot, mechanism and mesh files,
/// outputs) are relative to the file's directory.
pub fn load_scenario(path: &Path) -> Result<ScenarioFile, ScenarioFileError> {
    let text = std::fs::read_to_string(path).map_err(|source| ScenarioFileError::Io {
        path: path.to_path_buf(),
        source,
    })?;
    parse_scenario(&text, path)
}

/// Read and check a scenario file's text; `path` names it in messages and anchors its
/// relative paths.
pub fn parse_scenario(text: &str, path: &Path) -> Result<ScenarioFile, ScenarioFileError> {
    read::read(text, path)
}
