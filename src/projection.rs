//! Projection: pull a configuration onto the manifold where a constraint stack holds, by
//! damped Newton steps (Levenberg-Marquardt: K. Levenberg 1944, D. Marquardt 1963).
//!
//! Each step solves `(J J^T + lambda I) y = -F`, `dq = J^T y` (the damped minimum-norm step,
//! through a Cholesky factorization; no explicit inverse), moves `q <- q ⊕ dq`, and clamps the
//! result into the joint limits, so no returned configuration is outside them. The damping
//! `lambda` shrinks after a step that lowers the residual and grows after one that does not.

use nalgebra::DVector;

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
    /// Evaluations of the constraint stack (forward kinematics and residual) spent, rejected
    /// steps included. The Jacobian is computed at the start and at every accepted point
    /// that is not the last.
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
    /// After [`project`], `stack.residual` is the residual at the returned configuration;
    /// `stack.jacobian` may be that of an earlier point.
    pub stack: StackBuffer,
    /// `J J^T + lambda I`, then its Cholesky factor (`rows x rows`, column-major).
    normal: Vec<f64>,
    y: Vec<f64>,
    dq: DVector<f64>,
    q_try: Vec<f64>,
    /// The residual at the current configuration, kept while a trial step overwrites the
    /// stack's residual.
    residual_at_q: Vec<f64>,
    /// For each tangent coordinate of a one-DOF joint: its `q` index and position limits.
    bounds: Vec<Option<(usize, f64, f64)>>,
    /// When every joint has at most one coordinate (no floating joint): `(q index, tangent
    /// index, lower, upper)` of each moving joint, so a step is integrated and clamped in one
    /// pass. `Robot::integrate` and `Robot::clamp_to_limits` do the same for these joints
    /// through their general per-joint dispatch (a tenth of a projection, callgrind).
    one_dof: Option<Vec<(usize, usize, f64, f64)>>,
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
        let mut one_dof = Some(Vec::with_capacity(robot.nv()));
        for j in robot.joints() {
            match (&j.kind, j.limits.first()) {
                (JointKind::Revolute { .. } | JointKind::Prismatic { .. }, Some(l)) => {
                    if let Some(v) = one_dof.as_mut() {
                        v.push((j.q_index, j.v_index, l.lower, l.upper));
                    }
                }
                (JointKind::Fixed, _) => {}
                _ => one_dof = None,
            }
        }
        ProjectionBuffer {
            one_dof,
            stack: stack.buffer(robot),
            normal: vec![0.0; m * m],
            y: vec![0.0; m],
            dq: DVector::zeros(robot.nv()),
            q_try: vec![0.0; robot.nq()],
            residual_at_q: vec![0.0; m],
            bounds,
            held: vec![false; robot.nv()],
        }
    }
}

impl ProjectionBuffer {
    /// Hold the one-coordinate joint with tangent index `v_index` at `value` in projections
    /// that use this buffer (its limits become `[value, value]`; the robot's are unchanged).
    /// Returns false, changing nothing, for a coordinate that is not a revolute or prismatic
    /// joint's or a value outside the joint's limits.
    pub fn pin(&mut self, v_index: usize, value: f64) -> bool {
        let Some(Some((qi, lo, hi))) = self.bounds.get(v_index).copied() else {
            return false;
        };
        if !(lo..=hi).contains(&value) {
            return false;
        }
        self.bounds[v_index] = Some((qi, value, value));
        if let Some(coords) = &mut self.one_dof {
            for c in coords.iter_mut().filter(|c| c.1 == v_index) {
                c.2 = value;
                c.3 = value;
            }
        }
        true
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
/// `J J^T`, the Cholesky factorization, the two triangular solves and `J^T y` are written out
/// as loops over flat column-major slices: for the small shapes here (6 x 7) nalgebra's
/// dynamically sized gemm and its `Cholesky` (generic code working through matrix views)
/// took about a third of the projection time (measured with callgrind, see
/// docs/performance.md).
///
/// The row counts of the common stacks (a position grip, an axis grip, a point grip) get
/// their own copies on fixed-size stack arrays ([`damped_step_fixed`]): the loops unroll and
/// the bounds checks go away. Both versions do the same operations in the same order, so
/// they give the same step to the last bit (tests/projection_equivalence.rs).
fn damped_step(buf: &mut ProjectionBuffer, lambda: f64) -> bool {
    match buf.stack.jacobian.nrows() {
        3 => damped_step_fixed::<3>(buf, lambda),
        5 => damped_step_fixed::<5>(buf, lambda),
        6 => damped_step_fixed::<6>(buf, lambda),
        m => damped_step_rows(buf, lambda, m),
    }
}

/// [`damped_step`] for a Jacobian of `M` rows, on stack arrays. `a[k]` is column `k` of
/// `J J^T + lambda I` (lower triangle used), then of its Cholesky factor.
#[inline(always)]
fn damped_step_fixed<const M: usize>(buf: &mut ProjectionBuffer, lambda: f64) -> bool {
    let jd = buf.stack.jacobian.as_slice();
    let cols = || {
        jd.chunks_exact(M)
            .filter_map(|c| <&[f64; M]>::try_from(c).ok())
    };
    let mut a = [[0.0; M]; M];
    for (col, held) in cols().zip(&buf.held) {
        if *held {
            continue;
        }
        // Lower triangle of the rank-one update col col^T, skipping zero entries of `col`
        // like `damped_step_rows` (same sums in the same order).
        for (k, &ck) in col.iter().enumerate() {
            if ck == 0.0 {
                continue;
            }
            for i in k..M {
                a[k][i] += col[i] * ck;
            }
        }
    }
    for (i, c) in a.iter_mut().enumerate() {
        c[i] += lambda;
    }
    // Cholesky, column by column (the order of `cholesky_in_place`).
    for j in 0..M {
        for k in 0..j {
            let ak = a[k];
            let f = ak[j];
            for i in j..M {
                a[j][i] -= f * ak[i];
            }
        }
        let d = a[j][j];
        // A NaN pivot fails too (it is not greater than zero).
        if d.partial_cmp(&0.0) != Some(std::cmp::Ordering::Greater) {
            return false;
        }
        let d = d.sqrt();
        a[j][j] = d;
        for x in &mut a[j][j + 1..] {
            *x /= d;
        }
    }
    let mut y = [0.0; M];
    for (y, f) in y.iter_mut().zip(buf.stack.residual.as_slice()) {
        *y = -f;
    }
    // L z = y, forward; then L^T x = z, backward (as `cholesky_solve_in_place`).
    for i in 0..M {
        let zi = y[i] / a[i][i];
        y[i] = zi;
        for r in i + 1..M {
            y[r] -= zi * a[i][r];
        }
    }
    for i in (0..M).rev() {
        let mut dot = 0.0;
        for r in i + 1..M {
            dot += a[i][r] * y[r];
        }
        y[i] = (y[i] - dot) / a[i][i];
    }
    for ((dq, col), held) in buf.dq.as_mut_slice().iter_mut().zip(cols()).zip(&buf.held) {
        *dq = if *held {
            0.0
        } else {
            let mut s = 0.0;
            for r in 0..M {
                s += col[r] * y[r];
            }
            s
        };
    }
    true
}

/// [`damped_step`] for a Jacobian of `m` rows.
fn damped_step_rows(buf: &mut ProjectionBuffer, lambda: f64, m: usize) -> bool {
    if m == 0 {
        buf.dq.fill(0.0);
        return true;
    }
    let jd = buf.stack.jacobian.as_slice();
    let a = &mut buf.normal;
    a.fill(0.0);
    for (col, held) in jd.chunks_exact(m).zip(&buf.held) {
        if *held {
            continue;
        }
        // Lower triangle of the rank-one update col col^T (the factorization reads only that).
        for (k, &ck) in col.iter().enumerate() {
            if ck == 0.0 {
                continue;
            }
            let out = &mut a[k * m + k..k * m + m];
            for (o, c) in out.iter_mut().zip(&col[k..]) {
                *o += c * ck;
            }
        }
    }
    for i in 0..m {
        a[i * m + i] += lambda;
    }
    if !cholesky_in_place(a, m) {
        return false;
    }
    let y = &mut buf.y;
    for (y, f) in y.iter_mut().zip(buf.stack.residual.as_slice()) {
        *y = -f;
    }
    cholesky_solve_in_place(a, m, y);
    let dq = buf.dq.as_mut_slice();
    for ((dq, col), held) in dq.iter_mut().zip(jd.chunks_exact(m)).zip(&buf.held) {
        *dq = if *held {
            0.0
        } else {
            col.iter().zip(y.iter()).map(|(j, y)| j * y).sum()
        };
    }
    true
}

/// Cholesky factorization `A = L L^T` in place: `a` is `m x m`, column-major; its lower
/// triangle is read and overwritten by `L` (the upper triangle is left alone). `false` if `A`
/// is not positive definite (a pivot that is not positive, or NaN). Column by column, the
/// same order of operations as nalgebra's `Cholesky::new`.
#[inline(always)]
fn cholesky_in_place(a: &mut [f64], m: usize) -> bool {
    for j in 0..m {
        for k in 0..j {
            let f = a[k * m + j];
            for i in j..m {
                a[j * m + i] -= f * a[k * m + i];
            }
        }
        let d = a[j * m + j];
        // A NaN pivot fails too (it is not greater than zero).
        if d.partial_cmp(&0.0) != Some(std::cmp::Ordering::Greater) {
            return false;
        }
        let d = d.sqrt();
        a[j * m + j] = d;
        for x in &mut a[j * m + j + 1..j * m + m] {
            *x /= d;
        }
    }
    true
}

/// Solve `L L^T x = b` in place (`b` becomes `x`) with the factor from [`cholesky_in_place`].
#[inline(always)]
fn cholesky_solve_in_place(l: &[f64], m: usize, b: &mut [f64]) {
    // L z = b, forward.
    for i in 0..m {
        let col = &l[i * m..i * m + m];
        let zi = b[i] / col[i];
        b[i] = zi;
        for (br, lr) in b[i + 1..m].iter_mut().zip(&col[i + 1..]) {
            *br -= zi * lr;
        }
    }
    // L^T x = z, backward.
    for i in (0..m).rev() {
        let col = &l[i * m..i * m + m];
        let dot: f64 = col[i + 1..]
            .iter()
            .zip(&b[i + 1..m])
            .map(|(l, x)| l * x)
            .sum();
        b[i] = (b[i] - dot) / col[i];
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
    // Sized for the stack's rows (a buffer's stack part may have been replaced).
    let m = buf.stack.jacobian.nrows();
    buf.normal.resize(m * m, 0.0);
    buf.y.resize(m, 0.0);
    buf.residual_at_q.resize(m, 0.0);
    robot.clamp_to_limits(q);
    let mut err = stack.evaluate(robot, q, &mut buf.stack, true)?;
    buf.residual_at_q
        .copy_from_slice(buf.stack.residual.as_slice());
    let mut evaluations = 1;
    let mut lambda = LAMBDA_START;
    let mut iterations = 0;
    // At the top of the loop `buf.stack` holds the residual and the Jacobian at `q`, and
    // `buf.residual_at_q` a copy of that residual.
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
            let clamped = match &buf.one_dof {
                Some(coords) if buf.q_try.len() == q.len() => {
                    let (dq, q_try) = (buf.dq.as_slice(), &mut buf.q_try);
                    q_try.copy_from_slice(q);
                    let mut moved = false;
                    for &(qi, vi, lo, hi) in coords {
                        let x = q[qi] + dq[vi];
                        let c = x.clamp(lo, hi);
                        moved |= c != x;
                        q_try[qi] = c;
                    }
                    moved
                }
                _ => {
                    robot.integrate(q, buf.dq.as_slice(), &mut buf.q_try)?;
                    robot.clamp_to_limits(&mut buf.q_try)
                }
            };
            // The trial needs the residual alone: the Jacobian at `q` stays in the buffer in
            // case the step is rejected, and the one at the new point is computed (from the
            // link poses this evaluation leaves behind) only once the step is accepted and
            // another step will follow.
            let trial = stack.evaluate(robot, &buf.q_try, &mut buf.stack, false)?;
            evaluations += 1;
            if trial < err {
                q.copy_from_slice(&buf.q_try);
                err = trial;
                lambda = (lambda * 0.1).max(LAMBDA_MIN);
                if err > settings.tolerance && iterations < settings.max_iterations {
                    stack.evaluate_at_poses(robot, &mut buf.stack, true)?;
                    buf.residual_at_q
                        .copy_from_slice(buf.stack.residual.as_slice());
                }
                break;
            }
            // Rejected: put back the residual at q (its Jacobian was not touched) and damp
            // harder.
            buf.stack
                .residual
                .as_mut_slice()
                .copy_from_slice(&buf.residual_at_q);
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
