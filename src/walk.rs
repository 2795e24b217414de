//! Manifold walk: move from `qa` toward `qb` along the manifold of a constraint stack in
//! steps no longer than a stride, projecting each step. This is the local planner that
//! constrained planning uses.
//!
//! Guards against jumping to another branch of the manifold: the walk stops when a
//! projection fails, when a projected point lands farther from its unprojected step than
//! `max_deviation` times the step length, when a projected step is longer than the stride,
//! or when the distance to the target stops shrinking.

use crate::constraint::{ConstraintError, ConstraintStack};
use crate::model::Robot;
use crate::projection::{
    positive, project, ProjectionBuffer, ProjectionSettings, SettingsError, StopReason,
};

/// Walk settings. Build with [`WalkSettings::new`] (checked).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct WalkSettings {
    /// Longest joint-space distance between consecutive points.
    pub stride: f64,
    /// Largest allowed ratio of (projected point - unprojected step) to the step length.
    pub max_deviation: f64,
    /// Stop after this many steps (a walk of length L needs about L / stride).
    pub max_steps: usize,
    pub projection: ProjectionSettings,
}

impl WalkSettings {
    pub fn new(
        stride: f64,
        max_deviation: f64,
        max_steps: usize,
        projection: ProjectionSettings,
    ) -> Result<Self, SettingsError> {
        projection.validate()?;
        if max_steps == 0 {
            return Err(SettingsError::OutOfRange {
                name: "max_steps",
                expected: "at least 1",
                got: 0.0,
            });
        }
        Ok(WalkSettings {
            stride: positive("stride", stride)?,
            max_deviation: positive("max_deviation", max_deviation)?,
            max_steps,
            projection,
        })
    }
}

impl Default for WalkSettings {
    fn default() -> Self {
        WalkSettings {
            stride: 0.05,
            max_deviation: 1.0,
            max_steps: 10_000,
            projection: ProjectionSettings::default(),
        }
    }
}

/// Why a walk ended.
#[derive(Clone, Copy, Debug, PartialEq)]
#[non_exhaustive]
pub enum WalkStop {
    /// The last point is `qb`.
    Reached,
    /// `qa` itself is not on the manifold (residual given).
    StartOffManifold { residual: f64 },
    /// A step could not be projected.
    ProjectionFailed { reason: StopReason, residual: f64 },
    /// A projected point moved too far from its step (ratio to the step length): probably a
    /// jump to another branch.
    Deviated { ratio: f64 },
    /// A projected step was longer than the stride even after halving the step.
    StrideExceeded { length: f64 },
    /// The distance to `qb` did not shrink: the walk got as close as it can.
    NoProgress { distance: f64 },
    /// `max_steps` reached.
    StepLimit,
}

/// A walk: the points visited (starting with `qa`) and why it ended. Each consecutive pair is
/// at most `stride` apart and every point is on the manifold within the tolerance.
#[derive(Clone, Debug)]
pub struct Walk {
    pub path: Vec<Vec<f64>>,
    pub stop: WalkStop,
    pub projections: usize,
}

impl Walk {
    pub fn reached(&self) -> bool {
        self.stop == WalkStop::Reached
    }
}

/// Walk from `qa` toward `qb`. `qa` must be on the manifold; `qb` need not be (the walk then
/// gets as close as it can and ends with `NoProgress`).
pub fn walk(
    robot: &Robot,
    stack: &ConstraintStack,
    qa: &[f64],
    qb: &[f64],
    settings: &WalkSettings,
    buf: &mut ProjectionBuffer,
) -> Result<Walk, ConstraintError> {
    let tol = settings.projection.tolerance;
    let mut projections = 0;
    let start_res = stack.evaluate(robot, qa, &mut buf.stack, false)?;
    let mut path = vec![qa.to_vec()];
    if start_res > tol {
        return Ok(Walk {
            path,
            stop: WalkStop::StartOffManifold {
                residual: start_res,
            },
            projections,
        });
    }
    let nv = robot.nv();
    let mut dir = vec![0.0; nv];
    let mut q = qa.to_vec();
    let mut step_q = vec![0.0; robot.nq()];
    let mut dist = robot.distance(&q, qb)?;
    for _ in 0..settings.max_steps {
        if dist == 0.0 {
            return Ok(Walk {
                path,
                stop: WalkStop::Reached,
                projections,
            });
        }
        // Last stride: take qb itself if it is on the manifold.
        if dist <= settings.stride
            && stack.evaluate(robot, qb, &mut buf.stack, false)? <= tol
            && robot.within_limits(qb, 0.0)
        {
            path.push(qb.to_vec());
            return Ok(Walk {
                path,
                stop: WalkStop::Reached,
                projections,
            });
        }
        robot.difference(&q, qb, &mut dir)?;
        let mut frac = (settings.stride / dist).min(1.0);
        let mut accepted = None;
        for _halving in 0..4 {
            let scaled: Vec<f64> = dir.iter().map(|d| d * frac).collect();
            let step_len = dist * frac;
            robot.integrate(&q, &scaled, &mut step_q)?;
            let unprojected = step_q.clone();
            let rep = project(robot, stack, &settings.projection, &mut step_q, buf)?;
            projections += 1;
            if !rep.converged() {
                return Ok(Walk {
                    path,
                    stop: WalkStop::ProjectionFailed {
                        reason: rep.stop,
                        residual: rep.residual,
                    },
                    projections,
                });
            }
            let deviation = robot.distance(&unprojected, &step_q)?;
            if deviation > settings.max_deviation * step_len {
                return Ok(Walk {
                    path,
                    stop: WalkStop::Deviated {
                        ratio: deviation / step_len,
                    },
                    projections,
                });
            }
            let moved = robot.distance(&q, &step_q)?;
            if moved <= settings.stride {
                accepted = Some(step_q.clone());
                break;
            }
            frac *= 0.5;
            if _halving == 3 {
                return Ok(Walk {
                    path,
                    stop: WalkStop::StrideExceeded { length: moved },
                    projections,
                });
            }
        }
        let Some(next) = accepted else {
            return Ok(Walk {
                path,
                stop: WalkStop::StepLimit,
                projections,
            });
        };
        let new_dist = robot.distance(&next, qb)?;
        if new_dist >= dist {
            return Ok(Walk {
                path,
                stop: WalkStop::NoProgress { distance: dist },
                projections,
            });
        }
        dist = new_dist;
        q.copy_from_slice(&next);
        path.push(next);
    }
    Ok(Walk {
        path,
        stop: WalkStop::StepLimit,
        projections,
    })
}
