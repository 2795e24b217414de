//! Equality constraints `F(q) = 0` with analytic Jacobians, and their composition into one
//! stack (one residual vector, one Jacobian).
//!
//! Every constraint writes its residual rows and the matching Jacobian rows (`rows() x nv`)
//! into buffers the caller owns. Inequalities (a grip kept inside a bar segment, an axis
//! within an angle of vertical) are written as **one-sided rows** `max(0, g(q))`: zero, with a
//! zero Jacobian row, while satisfied; the excess and its gradient once violated. They add rows
//! but no codimension. Projection drives them to zero like any other row.

use std::fmt::Debug;
use std::sync::Arc;

use nalgebra::{DMatrix, DVector, Dyn, MatrixViewMut, U1};
use thiserror::Error;

use crate::configuration::ConfigurationError;
use crate::kinematics::{forward_kinematics, frame_jacobian, KinematicsError};
use crate::math::Pose;
use crate::model::{LinkId, Robot};
use crate::settings::SettingsError;

mod bar;
mod frame_match;
mod level;
pub(crate) mod swing;

pub use bar::BarGrip;
pub use frame_match::{FrameMatch, MatchMode};
pub use level::KeepLevel;

/// Rows of a Jacobian a constraint writes into: a view of `rows()` rows of the stack's Jacobian.
pub type JacobianRows<'a> = MatrixViewMut<'a, f64, Dyn, Dyn, U1, Dyn>;

/// A constraint built or evaluated wrongly.
#[derive(Debug, Error, Clone, PartialEq)]
#[non_exhaustive]
pub enum ConstraintError {
    #[error(transparent)]
    Kinematics(#[from] KinematicsError),
    #[error(transparent)]
    Configuration(#[from] ConfigurationError),
    #[error(transparent)]
    Settings(#[from] SettingsError),
    #[error("constraint `{constraint}` refers to link {link}, the robot has {links} links")]
    LinkOutOfRange {
        constraint: String,
        link: usize,
        links: usize,
    },
    #[error("no effector named `{0}`")]
    NoSuchEffector(String),
    #[error("no link named `{0}`")]
    NoSuchLink(String),
    #[error("{what} must be {expected}, got {got}")]
    BadParameter {
        what: &'static str,
        expected: &'static str,
        got: f64,
    },
    #[error("constraint is for a robot with {expected} tangent coordinates, this one has {got}")]
    WrongRobot { expected: usize, got: usize },
}

/// A frame fixed on a link: the link id and the frame's pose in the link. The root link sits
/// at the world origin, so a frame on the root is a fixed world frame (a hold in the scene).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct FrameRef {
    pub link: LinkId,
    pub offset: Pose,
}

impl FrameRef {
    /// A fixed frame in the world.
    pub fn world(pose: Pose) -> Self {
        FrameRef {
            link: 0,
            offset: pose,
        }
    }
    /// The grip frame of a named effector.
    pub fn effector(robot: &Robot, name: &str) -> Result<Self, ConstraintError> {
        let e = robot
            .effector(name)
            .ok_or_else(|| ConstraintError::NoSuchEffector(name.to_string()))?;
        Ok(FrameRef {
            link: e.link,
            offset: e.grip,
        })
    }
    /// A frame on a named link.
    pub fn on_link(robot: &Robot, link: &str, offset: Pose) -> Result<Self, ConstraintError> {
        let l = robot
            .link_id(link)
            .ok_or_else(|| ConstraintError::NoSuchLink(link.to_string()))?;
        Ok(FrameRef { link: l, offset })
    }
    /// World pose at the link poses `poses`.
    #[inline]
    pub fn pose(&self, poses: &[Pose]) -> Pose {
        poses[self.link] * self.offset
    }
    /// True when the frame cannot move (it is on the root link).
    pub fn is_fixed(&self) -> bool {
        self.link == 0
    }
}

/// What a constraint sees when it is evaluated: the robot, the link poses at `q`, and a
/// 6 x nv scratch matrix for frame Jacobians.
pub struct EvalContext<'a> {
    pub robot: &'a Robot,
    pub poses: &'a [Pose],
    pub scratch: &'a mut DMatrix<f64>,
}

impl EvalContext<'_> {
    /// Frame Jacobian of `f` into the scratch matrix (left zero for a fixed frame).
    pub fn frame_jacobian(&mut self, f: &FrameRef) -> Result<(), ConstraintError> {
        if f.is_fixed() {
            self.scratch.fill(0.0);
            return Ok(());
        }
        frame_jacobian(self.robot, self.poses, f.link, &f.offset, self.scratch)?;
        Ok(())
    }
}

/// An equality constraint (plus optional one-sided rows) on a robot's configuration.
pub trait Constraint: Debug + Send + Sync {
    /// Rows this constraint writes (equality rows plus one-sided rows).
    fn rows(&self) -> usize;
    /// Independent equality rows: the dimension the constraint removes from the C-space.
    fn codimension(&self) -> usize;
    /// A short description for reports, e.g. `grip hand on hold h3 (6 rows)`.
    fn describe(&self) -> String;
    /// The largest link id this constraint's frames are on (checked against the robot before
    /// every evaluation, so a constraint built for another robot is an error, not a panic).
    fn max_link(&self) -> LinkId {
        0
    }
    /// Write the residual into `residual` (length `rows()`) and, when given, the Jacobian
    /// rows into `jacobian` (`rows() x nv`).
    fn evaluate(
        &self,
        ctx: &mut EvalContext<'_>,
        residual: &mut [f64],
        jacobian: Option<JacobianRows<'_>>,
    ) -> Result<(), ConstraintError>;
}

/// Buffers for evaluating a constraint stack on one robot. Create once, reuse.
#[derive(Clone, Debug)]
pub struct StackBuffer {
    pub poses: Vec<Pose>,
    pub residual: DVector<f64>,
    pub jacobian: DMatrix<f64>,
    scratch: DMatrix<f64>,
}

/// Several constraints active at once, evaluated as one residual vector and one Jacobian.
#[derive(Clone, Debug, Default)]
pub struct ConstraintStack {
    items: Vec<Arc<dyn Constraint>>,
    rows: usize,
}

impl ConstraintStack {
    pub fn new() -> Self {
        Self::default()
    }
    pub fn push(&mut self, c: Arc<dyn Constraint>) {
        self.rows += c.rows();
        self.items.push(c);
    }
    pub fn with(mut self, c: impl Constraint + 'static) -> Self {
        self.push(Arc::new(c));
        self
    }
    pub fn items(&self) -> &[Arc<dyn Constraint>] {
        &self.items
    }
    pub fn rows(&self) -> usize {
        self.rows
    }
    pub fn codimension(&self) -> usize {
        self.items.iter().map(|c| c.codimension()).sum()
    }
    pub fn is_empty(&self) -> bool {
        self.items.is_empty()
    }
    /// Buffers sized for this stack on `robot`.
    pub fn buffer(&self, robot: &Robot) -> StackBuffer {
        StackBuffer {
            poses: vec![Pose::identity(); robot.links().len()],
            residual: DVector::zeros(self.rows),
            jacobian: DMatrix::zeros(self.rows, robot.nv()),
            scratch: DMatrix::zeros(6, robot.nv()),
        }
    }

    /// Evaluate every constraint at `q`: residual into `buf.residual`, and the Jacobian into
    /// `buf.jacobian` when `with_jacobian`. Returns the residual's Euclidean norm.
    pub fn evaluate(
        &self,
        robot: &Robot,
        q: &[f64],
        buf: &mut StackBuffer,
        with_jacobian: bool,
    ) -> Result<f64, ConstraintError> {
        if buf.jacobian.nrows() != self.rows
            || buf.jacobian.ncols() != robot.nv()
            || buf.residual.len() != self.rows
        {
            return Err(ConstraintError::WrongRobot {
                expected: buf.jacobian.ncols(),
                got: robot.nv(),
            });
        }
        forward_kinematics(robot, q, &mut buf.poses)?;
        self.evaluate_at_poses(robot, buf, with_jacobian)
    }

    /// As [`ConstraintStack::evaluate`], at the link poses already in `buf.poses` (left there
    /// by the last `evaluate` on this buffer). Projection computes the Jacobian this way at a
    /// point whose residual it has just evaluated, without a second forward-kinematics pass.
    pub fn evaluate_at_poses(
        &self,
        robot: &Robot,
        buf: &mut StackBuffer,
        with_jacobian: bool,
    ) -> Result<f64, ConstraintError> {
        if buf.jacobian.nrows() != self.rows
            || buf.jacobian.ncols() != robot.nv()
            || buf.residual.len() != self.rows
        {
            return Err(ConstraintError::WrongRobot {
                expected: buf.jacobian.ncols(),
                got: robot.nv(),
            });
        }
        let n_links = robot.links().len();
        if buf.poses.len() != n_links {
            return Err(KinematicsError::PoseBuffer {
                got: buf.poses.len(),
                expected: n_links,
            }
            .into());
        }
        for c in &self.items {
            let link = c.max_link();
            if link >= n_links {
                return Err(ConstraintError::LinkOutOfRange {
                    constraint: c.describe(),
                    link,
                    links: n_links,
                });
            }
        }
        let mut ctx = EvalContext {
            robot,
            poses: &buf.poses,
            scratch: &mut buf.scratch,
        };
        let mut row = 0;
        for c in &self.items {
            let n = c.rows();
            let res = &mut buf.residual.as_mut_slice()[row..row + n];
            let jac = if with_jacobian {
                Some(buf.jacobian.rows_mut(row, n))
            } else {
                None
            };
            c.evaluate(&mut ctx, res, jac)?;
            row += n;
        }
        Ok(buf.residual.norm())
    }

    /// Residual norm of each constraint at `q` (for reports).
    pub fn residual_norms(
        &self,
        robot: &Robot,
        q: &[f64],
        buf: &mut StackBuffer,
    ) -> Result<Vec<f64>, ConstraintError> {
        self.evaluate(robot, q, buf, false)?;
        let mut out = Vec::with_capacity(self.items.len());
        let mut row = 0;
        for c in &self.items {
            out.push(buf.residual.rows(row, c.rows()).norm());
            row += c.rows();
        }
        Ok(out)
    }
}
