//! Projection: pull a configuration onto the manifold where a constraint stack holds, by
//! damped Newton steps (Levenberg-Marquardt: K. Levenberg 1944, D. Marquardt 1963).
//!
//! Each step solves `(J J^T + lambda I) y = -F`, `dq = J^T y` (the damped minimum-norm step,
//! through a Cholesky factorization; no explicit inverse), moves `q <- q ⊕ dq`, and clamps the
//! result into the joint limits, so no returned configuration is outside them. The damping
//! `lambda` shrinks after a step that lowers the residual and grows after one that does not.

use nalgebra::{Cholesky, DMatrix, DVector};

use crate::configuration::ConfigurationError;
use crate::constraint::{ConstraintError, ConstraintStack, StackBuffer};
use crate::model::{JointKind, Robot};

use crate::settings::positive;
pub use crate::settings::SettingsError;

/// How hard to try. Build with [`ProjectionSettings::new`] (checked) or `default()`.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ProjectionSettings {
    /// Converged when the residual's Euclidean norm is at most this (metres and radians).
    pub tolerance: f64,
    /// Newton steps at most.
    pub max_iterations: usize,
    /// Longest single step (norm of `dq`), to keep steps on the local branch.
    pub max_step: f64,
}

impl Default for ProjectionSettings {
    fn default() -> Self {
        ProjectionSettings {
            tolerance: 1e-9,
            max_iterations: 50,
            max_step: 0.5,
        }
    }
}

impl ProjectionSettings {
    pub fn new(
        tolerance: f64,
        max_iterations: usize,
        max_step: f64,
    ) -> Result<Self, SettingsError> {
        if max_iterations == 0 {
            return Err(SettingsError::OutOfRange {
                name: "max_iterations",
                expected: "at least 1",
                got: 0.0,
            });
        }
        Ok(ProjectionSettings {
            tolerance: positive("tolerance", tolerance)?,
            max_iterations,
            max_step: positive("max_step", max_step)?,
        })
    }
    /// Check settings that were built field by field.
    pub fn validate(&self) -> Result<(), SettingsError> {
        Self::new(self.tolerance, self.max_iterations, self.max_step).map(|_| ())
    }
}

/// Why projection stopped.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[non_exhaustive]
pub enum StopReason {
    /// Residual norm at or below the tolerance.
    Converged,
    /// `max_iterations` steps without converging.
    IterationCap,
    /// No step lowers the residual any more (a local minimum off the manifold).
    Stalled,
    /// As `Stalled`, with coordinates held at their joint limits: the manifold is probably
    /// reachable only outside the limits.
    BlockedByLimits,
    /// The damped system could not be factorized.
    Singular,
}

/// The outcome of one projection.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ProjectionReport {
    pub stop: StopReason,
    pub iterations: usize,
    /// Residual norm at the returned configuration.
    pub residual: f64,
    /// Evaluations of the constraint stack (with Jacobian) spent, rejected steps included.
    pub evaluations: usize,
}

impl ProjectionReport {
    pub fn converged(&self) -> bool {
        self.stop == StopReason::Converged
    }
}

/// Buffers for projecting onto one stack on one robot. Create once per thread, reuse.
#[derive(Clone, Debug)]
pub struct ProjectionBuffer {
    pub stack: StackBuffer,
    normal: Option<DMatrix<f64>>,
    y: DVector<f64>,
    dq: DVector<f64>,
    q_try: Vec<f64>,
    /// For each tangent coordinate of a one-DOF joint: its `q` index and position limits.
    bounds: Vec<Option<(usize, f64, f64)>>,
    /// Tangent coordinates held at a limit during the current step.
    held: Vec<bool>,
}

impl ProjectionBuffer {
    pub fn new(robot: &Robot, stack: &ConstraintStack) -> Self {
        let m = stack.rows();
        let mut bounds = vec![None; robot.nv()];
        for j in robot.joints() {
            if matches!(
                j.kind,
                JointKind::Revolute { .. } | JointKind::Prismatic { .. }
            ) {
                bounds[j.v_index] = Some((j.q_index, j.limits[0].lower, j.limits[0].upper));
            }
        }
        ProjectionBuffer {
            stack: stack.buffer(robot),
            normal: Some(DMatrix::zeros(m, m)),
            y: DVector::zeros(m),
            dq: DVector::zeros(robot.nv()),
            q_try: vec![0.0; robot.nq()],
            bounds,
            held: vec![false; robot.nv()],
        }
    }
}

const LAMBDA_START: f64 = 1e-6;
const LAMBDA_MIN: f64 = 1e-12;
const LAMBDA_MAX: f64 = 1e8;
/// A coordinate this close to a limit (radians or metres) counts as at the limit.
const AT_LIMIT: f64 = 1e-12;
/// Times the step is re-solved with more coordinates held at their limits.
const HOLD_PASSES: usize = 4;

/// One damped step: `(J J^T + lambda I) y = -F`, `dq = J^T y`, with the columns of coordinates
/// held at a limit removed. `false` if the system could not be factorized.
///
/// `J J^T` and `J^T y` are written out as loops over the column-major Jacobian: for the small
/// shapes here (6 x 7) nalgebra's dynamically sized gemm/transpose took about a quarter of
/// the projection time (measured with callgrind, see docs/performance.md).
fn damped_step(buf: &mut ProjectionBuffer, lambda: f64) -> bool {
    let m = buf.stack.jacobian.nrows();
    let Some(mut a) = buf.normal.take() else {
        return false;
    };
    a.fill(0.0);
    {
        let jd = buf.stack.jacobian.as_slice();
        let ad = a.as_mut_slice();
        for (c, held) in buf.held.iter().enumerate() {
            if *held {
                continue;
            }
            let col = &jd[c * m..c * m + m];
            // Lower triangle of the rank-one update col col^T (Cholesky reads only that).
            for k in 0..m {
                let ck = col[k];
                if ck == 0.0 {
                    continue;
                }
                let out = &mut ad[k * m..k * m + m];
                for i in k..m {
                    out[i] += col[i] * ck;
                }
            }
        }
    }
    for i in 0..m {
        a[(i, i)] += lambda;
    }
    match Cholesky::new(a) {
        Some(chol) => {
            buf.y.copy_from(&buf.stack.residual);
            buf.y.neg_mut();
            chol.solve_mut(&mut buf.y);
            buf.normal = Some(chol.unpack_dirty());
            let jd = buf.stack.jacobian.as_slice();
            let y = buf.y.as_slice();
            for (c, (dq, held)) in buf.dq.iter_mut().zip(&buf.held).enumerate() {
                *dq = if *held {
                    0.0
                } else {
                    jd[c * m..c * m + m].iter().zip(y).map(|(j, y)| j * y).sum()
                };
            }
            true
        }
        None => {
            buf.normal = Some(DMatrix::zeros(m, m));
            false
        }
    }
}

/// Hold every one-DOF coordinate that sits at a limit and whose step points out of it.
/// Returns true if a coordinate was newly held.
fn hold_outward(q: &[f64], buf: &mut ProjectionBuffer) -> bool {
    let mut changed = false;
    for (i, b) in buf.bounds.iter().enumerate() {
        if let Some((qi, lo, hi)) = *b {
            let d = buf.dq[i];
            if !buf.held[i]
                && ((q[qi] <= lo + AT_LIMIT && d < 0.0) || (q[qi] >= hi - AT_LIMIT && d > 0.0))
            {
                buf.held[i] = true;
                changed = true;
            }
        }
    }
    changed
}

/// Project `q` (in place) onto the manifold of `stack`. `q` stays within the joint limits
/// (it is clamped into them first; coordinates at a limit whose step points outward are
/// held there and the step is re-solved without them). Errors for invalid settings, a
/// configuration that is not finite or has the wrong length, and mismatched buffers.
pub fn project(
    robot: &Robot,
    stack: &ConstraintStack,
    settings: &ProjectionSettings,
    q: &mut [f64],
    buf: &mut ProjectionBuffer,
) -> Result<ProjectionReport, ConstraintError> {
    settings.validate()?;
    robot.check_configuration(q).or_else(|e| match e {
        // Quaternions off unit length are renormalized below; anything else is an error.
        ConfigurationError::NotUnit { .. } => Ok(()),
        e => Err(e),
    })?;
    if buf.bounds.len() != robot.nv() {
        return Err(ConstraintError::WrongRobot {
            expected: buf.bounds.len(),
            got: robot.nv(),
        });
    }
    if buf.q_try.len() != robot.nq() {
        let e = ConfigurationError::Length {
            what: "projection buffer configuration",
            got: buf.q_try.len(),
            expected: robot.nq(),
        };
        return Err(e.into());
    }
    robot.clamp_to_limits(q);
    let mut err = stack.evaluate(robot, q, &mut buf.stack, true)?;
    let mut evaluations = 1;
    let mut lambda = LAMBDA_START;
    let mut iterations = 0;
    loop {
        if err <= settings.tolerance {
            return Ok(ProjectionReport {
                stop: StopReason::Converged,
                iterations,
                residual: err,
                evaluations,
            });
        }
        if iterations >= settings.max_iterations {
            return Ok(ProjectionReport {
                stop: StopReason::IterationCap,
                iterations,
                residual: err,
                evaluations,
            });
        }
        iterations += 1;
        // Retry with more damping until the residual goes down.
        loop {
            buf.held.iter_mut().for_each(|h| *h = false);
            let mut solved = damped_step(buf, lambda);
            for _ in 0..HOLD_PASSES {
                if !solved || !hold_outward(q, buf) {
                    break;
                }
                solved = damped_step(buf, lambda);
            }
            let any_held = buf.held.iter().any(|h| *h);
            if !solved {
                if lambda >= LAMBDA_MAX {
                    return Ok(ProjectionReport {
                        stop: StopReason::Singular,
                        iterations,
                        residual: err,
                        evaluations,
                    });
                }
                lambda *= 10.0;
                continue;
            }
            let norm = buf.dq.norm();
            if norm > settings.max_step {
                buf.dq *= settings.max_step / norm;
            }
            robot.integrate(q, buf.dq.as_slice(), &mut buf.q_try)?;
            let clamped = robot.clamp_to_limits(&mut buf.q_try);
            let trial = stack.evaluate(robot, &buf.q_try, &mut buf.stack, true)?;
            evaluations += 1;
            if trial < err {
                q.copy_from_slice(&buf.q_try);
                err = trial;
                lambda = (lambda * 0.1).max(LAMBDA_MIN);
                break;
            }
            // Rejected: restore the Jacobian at q and damp harder.
            stack.evaluate(robot, q, &mut buf.stack, true)?;
            evaluations += 1;
            if lambda >= LAMBDA_MAX {
                let stop = if clamped || any_held {
                    StopReason::BlockedByLimits
                } else {
                    StopReason::Stalled
                };
                return Ok(ProjectionReport {
                    stop,
                    iterations,
                    residual: err,
                    evaluations,
                });
            }
            lambda *= 10.0;
        }
    }
}
