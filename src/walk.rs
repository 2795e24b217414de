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
use crate::projection::{project, ProjectionBuffer, ProjectionSettings, SettingsError, StopReason};
use crate::settings::positive;

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
    /// Check settings that were built field by field.
    pub fn validate(&self) -> Result<(), SettingsError> {
        Self::new(
            self.stride,
            self.max_deviation,
            self.max_steps,
            self.projection,
        )
        .map(|_| ())
    }

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
    /// The caller's check refused the next point ([`walk_checked`]).
    Refused,
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

/// A step must bring the walk closer to the target by at least this fraction of its length.
const MIN_PROGRESS: f64 = 1e-3;
/// Times a step that projects longer than the stride is halved before the walk gives up.
const MAX_HALVINGS: usize = 4;

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
    walk_checked(robot, stack, qa, qb, settings, buf, |_, _| {
        Ok::<_, ConstraintError>(true)
    })
}

/// [`walk`], asking `keep(previous, next)` about each new point before it is taken: when it
/// answers false the walk ends there with [`WalkStop::Refused`] (the refused point is not in
/// the path), so a caller that checks collisions spends no projections beyond the first
/// blocked step.
pub fn walk_checked<E: From<ConstraintError>>(
    robot: &Robot,
    stack: &ConstraintStack,
    qa: &[f64],
    qb: &[f64],
    settings: &WalkSettings,
    buf: &mut ProjectionBuffer,
    mut keep: impl FnMut(&[f64], &[f64]) -> Result<bool, E>,
) -> Result<Walk, E> {
    settings.validate().map_err(ConstraintError::from)?;
    robot
        .check_configuration(qa)
        .map_err(ConstraintError::from)?;
    robot
        .check_configuration(qb)
        .map_err(ConstraintError::from)?;
    let tol = settings.projection.tolerance;
    let mut projections = 0;
    let start_res = stack.evaluate(robot, qa, &mut buf.stack, false)?;
    let mut path = vec![qa.to_vec()];
    let done = |path, stop, projections| {
        Ok(Walk {
            path,
            stop,
            projections,
        })
    };
    if start_res.is_nan() || start_res > tol {
        return done(
            path,
            WalkStop::StartOffManifold {
                residual: start_res,
            },
            projections,
        );
    }
    let mut dir = vec![0.0; robot.nv()];
    let mut scaled = vec![0.0; robot.nv()];
    let mut q = qa.to_vec();
    let mut step_q = vec![0.0; robot.nq()];
    let mut unprojected = vec![0.0; robot.nq()];
    let mut dist = robot.distance(&q, qb).map_err(ConstraintError::from)?;
    for _ in 0..settings.max_steps {
        if dist == 0.0 {
            return done(path, WalkStop::Reached, projections);
        }
        // Last stride: take qb itself if it is on the manifold.
        if dist <= settings.stride
            && stack.evaluate(robot, qb, &mut buf.stack, false)? <= tol
            && robot.within_limits(qb, 0.0)
        {
            if !keep(&q, qb)? {
                return done(path, WalkStop::Refused, projections);
            }
            path.push(qb.to_vec());
            return done(path, WalkStop::Reached, projections);
        }
        robot
            .difference(&q, qb, &mut dir)
            .map_err(ConstraintError::from)?;
        let mut frac = (settings.stride / dist).min(1.0);
        let mut halvings = 0;
        let new_dist = loop {
            let step_len = dist * frac;
            scaled.iter_mut().zip(&dir).for_each(|(s, d)| *s = d * frac);
            robot
                .integrate(&q, &scaled, &mut step_q)
                .map_err(ConstraintError::from)?;
            unprojected.copy_from_slice(&step_q);
            let rep = project(robot, stack, &settings.projection, &mut step_q, buf)?;
            projections += 1;
            if !rep.converged() {
                let stop = WalkStop::ProjectionFailed {
                    reason: rep.stop,
                    residual: rep.residual,
                };
                return done(path, stop, projections);
            }
            // Progress first: near the closest point to an off-manifold target the step is
            // almost normal to the manifold and projection undoes it; that is the end of the
            // walk, not a branch jump.
            let new_dist = robot.distance(&step_q, qb).map_err(ConstraintError::from)?;
            if dist - new_dist < MIN_PROGRESS * step_len {
                return done(path, WalkStop::NoProgress { distance: dist }, projections);
            }
            let deviation = robot
                .distance(&unprojected, &step_q)
                .map_err(ConstraintError::from)?;
            if deviation > settings.max_deviation * step_len {
                return done(
                    path,
                    WalkStop::Deviated {
                        ratio: deviation / step_len,
                    },
                    projections,
                );
            }
            let moved = robot.distance(&q, &step_q).map_err(ConstraintError::from)?;
            if moved <= settings.stride {
                break new_dist;
            }
            halvings += 1;
            if halvings > MAX_HALVINGS {
                return done(
                    path,
                    WalkStop::StrideExceeded { length: moved },
                    projections,
                );
            }
            frac *= 0.5;
        };
        if !keep(&q, &step_q)? {
            return done(path, WalkStop::Refused, projections);
        }
        dist = new_dist;
        q.copy_from_slice(&step_q);
        path.push(step_q.clone());
    }
    Ok(Walk {
        path,
        stop: WalkStop::StepLimit,
        projections,
    })
}
