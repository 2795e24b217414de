//! Checked settings: the error every settings constructor returns, and its checks.

use thiserror::Error;

/// A setting out of its range.
#[derive(Debug, Error, Clone, PartialEq)]
#[non_exhaustive]
pub enum SettingsError {
    #[error("`{name}` must be {expected}, got {got}")]
    OutOfRange {
        name: &'static str,
        expected: &'static str,
        got: f64,
    },
}

/// `v` if it is positive and finite.
pub(crate) fn positive(name: &'static str, v: f64) -> Result<f64, SettingsError> {
    if v.is_finite() && v > 0.0 {
        Ok(v)
    } else {
        Err(SettingsError::OutOfRange {
            name,
            expected: "positive and finite",
            got: v,
        })
    }
}

/// `v` if it is a share: between 0 and 1 (both included).
pub(crate) fn share(name: &'static str, v: f64) -> Result<f64, SettingsError> {
    if (0.0..=1.0).contains(&v) {
        Ok(v)
    } else {
        Err(SettingsError::OutOfRange {
            name,
            expected: "between 0 and 1",
            got: v,
        })
    }
}
