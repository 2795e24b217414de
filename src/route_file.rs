//! Reading a route (or motion) file back: the JSON that `clamber plan` writes, turned into
//! the pieces an independent re-check needs (stance, waypoints and residual tolerance of every
//! leg; pose and both stances of every switch). Hold names are resolved against the scenario
//! the file is checked with; nothing is trusted that the verifier re-computes (residuals,
//! clearances and times in the file are ignored).
//!
//! Every malformed input is a [`RouteFileError`] naming the JSON field (`legs[2].path[7]`)
//! and what was expected; this module never panics on any input (fuzzed: `fuzz/`).

use serde_json::Value;
use thiserror::Error;

use crate::scenario::Scenario;
use crate::scene::{SceneError, Stance};

/// A route or motion file that cannot be read back.
#[derive(Debug, Error, Clone, PartialEq)]
#[non_exhaustive]
pub enum RouteFileError {
    /// Not JSON at all (line and column of the JSON parser, 1-based).
    #[error("line {line}, column {column}: not JSON: {message}")]
    Json {
        line: usize,
        column: usize,
        message: String,
    },
    /// A field is missing or has the wrong type or value.
    #[error("`{field}`: expected {expected}")]
    Field { field: String, expected: String },
    /// A stance names a hold the scenario's scene does not have.
    #[error("`{field}`: {source}")]
    Hold {
        field: String,
        #[source]
        source: SceneError,
    },
    /// Neither a route (`legs`) nor a motion (`path`).
    #[error("neither `legs` (a route) nor `path` (a motion) at the top level")]
    NotARoute,
}

/// One stretch of path to re-check against one stance.
#[derive(Clone, Debug, PartialEq)]
pub struct PathPiece {
    /// `leg 3` or `motion`.
    pub label: String,
    pub stance: Stance,
    pub path: Vec<Vec<f64>>,
    /// Residual allowed between waypoints (the file's `path_tolerance`, or the scenario's
    /// tolerance when the file has none).
    pub tolerance: f64,
}

/// One grab or release: `pose` must hold both stances.
#[derive(Clone, Debug, PartialEq)]
pub struct SwitchPoint {
    pub index: usize,
    pub pose: Vec<f64>,
    pub from: Stance,
    pub to: Stance,
}

/// What a route file says, ready to be re-checked.
#[derive(Clone, Debug, PartialEq)]
pub struct RouteDocument {
    pub pieces: Vec<PathPiece>,
    pub switches: Vec<SwitchPoint>,
}

fn field(field: impl Into<String>, expected: &str) -> RouteFileError {
    RouteFileError::Field {
        field: field.into(),
        expected: expected.to_string(),
    }
}

/// Read a route (top-level `legs`, optional `switches`) or a single-stance motion (top-level
/// `path`) written for `scenario`. Configurations must have `scenario.robot.nq()` numbers.
pub fn parse_route(text: &str, scenario: &Scenario) -> Result<RouteDocument, RouteFileError> {
    let doc: Value = serde_json::from_str(text).map_err(|e| RouteFileError::Json {
        line: e.line(),
        column: e.column(),
        message: e.to_string(),
    })?;
    let nq = scenario.robot.nq();
    let mut pieces = Vec::new();
    let mut switches = Vec::new();
    if let Some(ls) = doc.get("legs") {
        let ls = ls
            .as_array()
            .ok_or_else(|| field("legs", "a list of legs"))?;
        let tol = tolerance(&doc, "path_tolerance", scenario.limits.tolerance)?;
        for (i, l) in ls.iter().enumerate() {
            let stance = stance_of(scenario, l.get("stance"), &format!("legs[{i}].stance"))?;
            let what = format!("legs[{i}].path");
            let path = configurations(l.get("path"), &what, nq)?;
            pieces.push(PathPiece {
                label: format!("leg {i}"),
                stance,
                path,
                tolerance: tol,
            });
        }
        if let Some(ws) = doc.get("switches") {
            let ws = ws
                .as_array()
                .ok_or_else(|| field("switches", "a list of switches"))?;
            for (i, w) in ws.iter().enumerate() {
                let what = format!("switches[{i}].pose");
                let pose = configuration(w.get("pose"), &what, nq)?;
                let from = stance_of(scenario, w.get("from"), &format!("switches[{i}].from"))?;
                let to = stance_of(scenario, w.get("to"), &format!("switches[{i}].to"))?;
                switches.push(SwitchPoint {
                    index: i,
                    pose,
                    from,
                    to,
                });
            }
        }
    } else if let Some(p) = doc.get("path") {
        let tol = match doc.get("tolerances") {
            Some(t) => tolerance(t, "tolerance", scenario.limits.tolerance)?,
            None => scenario.limits.tolerance,
        };
        pieces.push(PathPiece {
            label: "motion".into(),
            stance: scenario.start.stance.clone(),
            path: configurations(Some(p), "path", nq)?,
            tolerance: tol,
        });
    } else {
        return Err(RouteFileError::NotARoute);
    }
    Ok(RouteDocument { pieces, switches })
}

/// `obj[key]` as a positive finite tolerance, or `default` when absent.
fn tolerance(obj: &Value, key: &str, default: f64) -> Result<f64, RouteFileError> {
    match obj.get(key) {
        None => Ok(default),
        Some(v) => match v.as_f64() {
            Some(t) if t.is_finite() && t > 0.0 => Ok(t),
            _ => Err(field(key, "a positive number")),
        },
    }
}

fn stance_of(s: &Scenario, v: Option<&Value>, what: &str) -> Result<Stance, RouteFileError> {
    let map = v
        .and_then(Value::as_object)
        .ok_or_else(|| field(what, "an object effector -> hold name"))?;
    let mut st = Stance::new();
    for (e, h) in map {
        let name = h
            .as_str()
            .ok_or_else(|| field(format!("{what}.{e}"), "a hold name (a string)"))?;
        let (i, _) = s.scene.hold(name).map_err(|source| RouteFileError::Hold {
            field: format!("{what}.{e}"),
            source,
        })?;
        st = st.with(e.clone(), i);
    }
    Ok(st)
}

fn configuration(v: Option<&Value>, what: &str, nq: usize) -> Result<Vec<f64>, RouteFileError> {
    let q = v
        .and_then(Value::as_array)
        .and_then(|a| a.iter().map(Value::as_f64).collect::<Option<Vec<f64>>>())
        .ok_or_else(|| field(what, "a list of numbers"))?;
    if q.len() != nq {
        return Err(field(
            what,
            &format!(
                "{nq} numbers (one per coordinate of the robot), got {}",
                q.len()
            ),
        ));
    }
    Ok(q)
}

fn configurations(
    v: Option<&Value>,
    what: &str,
    nq: usize,
) -> Result<Vec<Vec<f64>>, RouteFileError> {
    let rows = v
        .and_then(Value::as_array)
        .ok_or_else(|| field(what, "a list of configurations"))?;
    if rows.is_empty() {
        return Err(field(what, "at least one configuration"));
    }
    rows.iter()
        .enumerate()
        .map(|(i, r)| configuration(Some(r), &format!("{what}[{i}]"), nq))
        .collect()
}
