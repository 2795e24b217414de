//! Projection: pull a configuration onto the manifold where a constraint stack holds, by
//! damped Newton steps (Levenberg-Marquardt: K. Levenberg 1944, D. Marquardt 1963).
//!
//! Each step solves `(J J^T + lambda I) y = -F`, `dq = J^T y` (the damped minimum-norm step,
//! through a Cholesky factorization; no explicit inverse), moves `q <- q ⊕ dq`, and clamps the
//! result into the joint limits, so no returned configuration is outside them. The damping
//! `lambda` shrinks after a step that lowers the residual and grows after one that does not.

use nalgebra::{Cholesky, DMatrix, DVector};
use thiserror::Error;

use crate::constraint::{ConstraintError, ConstraintStack, StackBuffer};
use crate::model::Robot;

/// Settings that are out of range.
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
    jt: DMatrix<f64>,
    y: DVector<f64>,
    dq: DVector<f64>,
    q_try: Vec<f64>,
}

impl ProjectionBuffer {
    pub fn new(robot: &Robot, stack: &ConstraintStack) -> Self {
        let m = stack.rows();
        ProjectionBuffer {
            stack: stack.buffer(robot),
            normal: Some(DMatrix::zeros(m, m)),
            jt: DMatrix::zeros(robot.nv(), m),
            y: DVector::zeros(m),
            dq: DVector::zeros(robot.nv()),
            q_try: vec![0.0; robot.nq()],
        }
    }
}

const LAMBDA_START: f64 = 1e-6;
const LAMBDA_MIN: f64 = 1e-12;
const LAMBDA_MAX: f64 = 1e8;

/// Project `q` (in place) onto the manifold of `stack`. `q` stays within the joint limits
/// (it is clamped into them first). Errors only for mismatched sizes.
pub fn project(
    robot: &Robot,
    stack: &ConstraintStack,
    settings: &ProjectionSettings,
    q: &mut [f64],
    buf: &mut ProjectionBuffer,
) -> Result<ProjectionReport, ConstraintError> {
    robot.clamp_to_limits(q);
    let mut err = stack.evaluate(robot, q, &mut buf.stack, true)?;
    let mut lambda = LAMBDA_START;
    let mut iterations = 0;
    loop {
        if err <= settings.tolerance {
            return Ok(ProjectionReport {
                stop: StopReason::Converged,
                iterations,
                residual: err,
            });
        }
        if iterations >= settings.max_iterations {
            return Ok(ProjectionReport {
                stop: StopReason::IterationCap,
                iterations,
                residual: err,
            });
        }
        iterations += 1;
        // Damped step: (J J^T + lambda I) y = -F, dq = J^T y. Retry with more damping until the
        // residual goes down.
        loop {
            let j = &buf.stack.jacobian;
            let Some(mut a) = buf.normal.take() else {
                return Ok(ProjectionReport {
                    stop: StopReason::Singular,
                    iterations,
                    residual: err,
                });
            };
            j.transpose_to(&mut buf.jt);
            a.gemm_tr(1.0, &buf.jt, &buf.jt, 0.0); // J J^T
            for i in 0..a.nrows() {
                a[(i, i)] += lambda;
            }
            let chol = match Cholesky::new(a) {
                Some(c) => c,
                None => {
                    buf.normal = Some(DMatrix::zeros(stack.rows(), stack.rows()));
                    if lambda >= LAMBDA_MAX {
                        return Ok(ProjectionReport {
                            stop: StopReason::Singular,
                            iterations,
                            residual: err,
                        });
                    }
                    lambda *= 10.0;
                    continue;
                }
            };
            buf.y.copy_from(&buf.stack.residual);
            buf.y.neg_mut();
            chol.solve_mut(&mut buf.y);
            buf.normal = Some(chol.unpack_dirty());
            buf.dq.gemv(1.0, &buf.jt, &buf.y, 0.0);
            let norm = buf.dq.norm();
            if norm > settings.max_step {
                buf.dq *= settings.max_step / norm;
            }
            robot.integrate(q, buf.dq.as_slice(), &mut buf.q_try)?;
            let clamped = robot.clamp_to_limits(&mut buf.q_try);
            let trial = stack.evaluate(robot, &buf.q_try, &mut buf.stack, true)?;
            if trial < err {
                q.copy_from_slice(&buf.q_try);
                err = trial;
                lambda = (lambda * 0.1).max(LAMBDA_MIN);
                break;
            }
            // Rejected: restore the Jacobian at q and damp harder.
            if lambda >= LAMBDA_MAX {
                stack.evaluate(robot, q, &mut buf.stack, true)?;
                let stop = if clamped {
                    StopReason::BlockedByLimits
                } else {
                    StopReason::Stalled
                };
                return Ok(ProjectionReport {
                    stop,
                    iterations,
                    residual: err,
                });
            }
            lambda *= 10.0;
            stack.evaluate(robot, q, &mut buf.stack, true)?;
        }
    }
}
