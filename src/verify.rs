//! The verifier: an independent re-check of a finished path before anyone sees it.
//!
//! It shares no state with planning: given the robot, the constraints that must hold, the
//! collision model and the path's waypoints, it walks every segment at a spacing no larger
//! than `resolution` (joint-space distance) and checks, at every checked point, the residual
//! against `tolerance`, the position limits and collisions; between waypoints it checks
//! continuity (no gap longer than `max_gap`). A segment is the straight line in the tangent
//! space (`Robot::interpolate`) — the motion a controller executing the waypoints would make —
//! so a path whose waypoints lie on the manifold but whose segments leave it is rejected.
//! Every defect is reported with where it is (segment, fraction along it, and what failed).

use thiserror::Error;

use crate::collision::{Body, CollisionError, CollisionModel, CollisionScratch};
use crate::constraint::{ConstraintError, ConstraintStack};
use crate::model::{JointKind, Robot};
use crate::settings::{positive, SettingsError};

/// What the verifier checks against. Build with [`VerifySettings::new`] (checked).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct VerifySettings {
    /// Largest joint-space distance between two checked points.
    pub resolution: f64,
    /// Largest allowed residual norm at a checked point.
    pub tolerance: f64,
    /// Largest allowed joint-space distance between consecutive waypoints.
    pub max_gap: f64,
}

impl VerifySettings {
    pub fn new(resolution: f64, tolerance: f64, max_gap: f64) -> Result<Self, SettingsError> {
        Ok(VerifySettings {
            resolution: positive("resolution", resolution)?,
            tolerance: positive("tolerance", tolerance)?,
            max_gap: positive("max_gap", max_gap)?,
        })
    }
}

/// Where along the path: waypoint `segment` plus `fraction` of the way to the next one.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct PathPoint {
    pub segment: usize,
    pub fraction: f64,
}

impl std::fmt::Display for PathPoint {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "segment {} at {:.3}", self.segment, self.fraction)
    }
}

/// One thing wrong with a path.
#[derive(Clone, Debug, PartialEq)]
#[non_exhaustive]
pub enum Defect {
    /// A waypoint that is not a valid configuration (length, non-finite value).
    BadWaypoint { index: usize, reason: String },
    /// Consecutive waypoints farther apart than `max_gap`.
    Gap {
        segment: usize,
        distance: f64,
        max_gap: f64,
    },
    /// The active constraints do not hold: residual norm above the tolerance.
    OffManifold {
        at: PathPoint,
        residual: f64,
        tolerance: f64,
    },
    /// A coordinate outside its position limits.
    OutsideLimits {
        at: PathPoint,
        joint: String,
        value: f64,
        lower: f64,
        upper: f64,
    },
    /// Two bodies in contact or overlapping (`distance` <= 0 is penetration).
    Collision {
        at: PathPoint,
        first: Body,
        second: Body,
    },
}

impl std::fmt::Display for Defect {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            Defect::BadWaypoint { index, reason } => write!(f, "waypoint {index}: {reason}"),
            Defect::Gap {
                segment,
                distance,
                max_gap,
            } => {
                write!(
                    f,
                    "segment {segment}: waypoints {distance:.6} apart, more than {max_gap}"
                )
            }
            Defect::OffManifold {
                at,
                residual,
                tolerance,
            } => {
                write!(
                    f,
                    "{at}: constraint residual {residual:.3e} above tolerance {tolerance:.1e}"
                )
            }
            Defect::OutsideLimits {
                at,
                joint,
                value,
                lower,
                upper,
            } => {
                write!(
                    f,
                    "{at}: joint `{joint}` at {value:.6}, outside [{lower}, {upper}]"
                )
            }
            Defect::Collision { at, first, second } => write!(f, "{at}: {first} touches {second}"),
        }
    }
}

/// The verdict on a path, with what was checked.
#[derive(Clone, Debug, PartialEq)]
pub struct VerifyReport {
    pub settings: VerifySettings,
    /// Points checked (waypoints and the points between them).
    pub checked: usize,
    /// Largest residual norm seen.
    pub max_residual: f64,
    /// Every defect found, in path order (at most one of each kind per segment).
    pub defects: Vec<Defect>,
}

impl VerifyReport {
    pub fn passed(&self) -> bool {
        self.defects.is_empty()
    }
}

/// The verifier itself could not run.
#[derive(Debug, Error, Clone, PartialEq)]
#[non_exhaustive]
pub enum VerifyError {
    #[error("the path has no waypoints")]
    Empty,
    #[error(transparent)]
    Constraint(#[from] ConstraintError),
    #[error(transparent)]
    Collision(#[from] CollisionError),
}

/// Check `path` densely. `collision` may be `None` when there is nothing to collide with.
pub fn verify_path(
    robot: &Robot,
    stack: &ConstraintStack,
    collision: Option<&CollisionModel>,
    path: &[Vec<f64>],
    settings: &VerifySettings,
) -> Result<VerifyReport, VerifyError> {
    if path.is_empty() {
        return Err(VerifyError::Empty);
    }
    let mut report = VerifyReport {
        settings: *settings,
        checked: 0,
        max_residual: 0.0,
        defects: Vec::new(),
    };
    let bad: Vec<usize> = path
        .iter()
        .enumerate()
        .filter_map(|(i, q)| {
            robot.check_configuration(q).err().map(|e| {
                report.defects.push(Defect::BadWaypoint {
                    index: i,
                    reason: e.to_string(),
                });
                i
            })
        })
        .collect();
    if !bad.is_empty() {
        return Ok(report);
    }
    let mut buf = stack.buffer(robot);
    let mut scratch = CollisionScratch::new();
    let mut q = vec![0.0; robot.nq()];
    let segments = path.len().saturating_sub(1).max(1);
    for seg in 0..segments {
        let a = &path[seg];
        let b = path.get(seg + 1).unwrap_or(a);
        let d = robot.distance(a, b).map_err(ConstraintError::from)?;
        if d.is_nan() || d > settings.max_gap {
            // Reported, and the segment is still checked so other defects on it show too.
            report.defects.push(Defect::Gap {
                segment: seg,
                distance: d,
                max_gap: settings.max_gap,
            });
        }
        // The last segment includes its end waypoint; the others stop short of it. A segment
        // longer than `max_gap` is already a defect: it is checked at no more points than a
        // segment of length `max_gap` gets, so a far-off waypoint (a route file read back can
        // say anything) cannot make the check run without bound.
        let span = if d.is_finite() {
            d.min(settings.max_gap)
        } else {
            settings.max_gap
        };
        let steps = ((span / settings.resolution).ceil() as usize).max(1);
        let last = if seg + 1 == segments {
            steps
        } else {
            steps - 1
        };
        let (mut off, mut limits, mut hit) = (false, false, false);
        for k in 0..=last {
            let fraction = k as f64 / steps as f64;
            robot
                .interpolate(a, b, fraction, &mut q)
                .map_err(ConstraintError::from)?;
            let at = PathPoint {
                segment: seg,
                fraction,
            };
            report.checked += 1;
            let r = stack.evaluate(robot, &q, &mut buf, false)?;
            report.max_residual = report.max_residual.max(r);
            if !off && (r.is_nan() || r > settings.tolerance) {
                off = true;
                report.defects.push(Defect::OffManifold {
                    at,
                    residual: r,
                    tolerance: settings.tolerance,
                });
            }
            if !limits {
                if let Some(defect) = limit_defect(robot, &q, at) {
                    limits = true;
                    report.defects.push(defect);
                }
            }
            if let (false, Some(model)) = (hit, collision) {
                if let Some(&(first, second)) =
                    model.colliding_pairs(&buf.poses, &mut scratch)?.first()
                {
                    hit = true;
                    report.defects.push(Defect::Collision { at, first, second });
                }
            }
        }
    }
    Ok(report)
}

/// The first coordinate of `q` outside its position limits, as a defect.
fn limit_defect(robot: &Robot, q: &[f64], at: PathPoint) -> Option<Defect> {
    robot.joints().iter().find_map(|j| {
        j.bounded_coordinates()
            .find(|(i, l)| q[*i] < l.lower || q[*i] > l.upper)
            .map(|(i, l)| {
                let joint = if matches!(j.kind, JointKind::Floating) {
                    format!("{}[{}]", j.name, i - j.q_index)
                } else {
                    j.name.clone()
                };
                Defect::OutsideLimits {
                    at,
                    joint,
                    value: q[i],
                    lower: l.lower,
                    upper: l.upper,
                }
            })
    })
}
