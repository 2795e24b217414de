//! The viewer's typed errors.

use std::path::PathBuf;

use thiserror::Error;

/// Why the viewer could not show or render a route.
#[derive(Debug, Error)]
#[non_exhaustive]
pub enum ViewError {
    #[error("{path}: cannot read")]
    Io {
        path: PathBuf,
        source: std::io::Error,
    },
    #[error("{path}: line {line}, column {column}: not valid JSON: {message}")]
    RouteJson {
        path: PathBuf,
        line: usize,
        column: usize,
        message: String,
    },
    #[error("{path}: field `{field}`: expected {expected}")]
    RouteFile {
        path: PathBuf,
        field: String,
        expected: String,
    },
    #[error("{what}: expected {expected}")]
    Option {
        what: &'static str,
        expected: String,
    },
    #[error("rendering: {0}")]
    Render(String),
    #[error(transparent)]
    Output(#[from] clamber::output::OutputError),
    #[error(transparent)]
    Scenario(#[from] clamber::scenario_file::ScenarioFileError),
}
