//! Clamber's own robot file format (TOML). OWNER: toml helper. To be written.
use super::RobotFileError;
use crate::model::{Robot, RobotSpec};
use std::path::Path;

/// Source positions of items, used to map a [`crate::model::Locator`] to line/column.
pub struct SourceMap;

pub fn parse(_text: &str, path: &Path) -> Result<(RobotSpec, SourceMap), RobotFileError> {
    Err(RobotFileError::UnknownFormat {
        path: path.to_path_buf(),
    })
}

pub fn load_str(text: &str, path: &Path) -> Result<Robot, RobotFileError> {
    let (spec, _) = parse(text, path)?;
    spec.build().map_err(|source| RobotFileError::Model {
        path: path.to_path_buf(),
        line: 0,
        column: 0,
        field: String::new(),
        source,
    })
}
