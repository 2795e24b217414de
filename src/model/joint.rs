//! Joints: how a child link moves relative to its parent.

use nalgebra::{Unit, Vector3};

use crate::math::Pose;

/// Index of a joint in [`crate::model::Robot::joints`].
pub type JointId = usize;

/// The motion a joint allows.
#[derive(Clone, Debug, PartialEq)]
#[non_exhaustive]
pub enum JointKind {
    /// Rotation about `axis` (unit, in the joint frame). One coordinate, radians.
    Revolute { axis: Unit<Vector3<f64>> },
    /// Translation along `axis` (unit, in the joint frame). One coordinate, metres.
    Prismatic { axis: Unit<Vector3<f64>> },
    /// No motion. No coordinates.
    Fixed,
    /// A free rigid body (6 DOF). Seven configuration coordinates `x y z qx qy qz qw`
    /// (translation of the child frame in the parent, then a unit quaternion) and six
    /// tangent coordinates `vx vy vz wx wy wz`: linear then angular velocity, both in the
    /// child (body) frame. A unit quaternion has no singular configuration, unlike Euler
    /// angles; see `docs/kinematics.md`.
    Floating,
}

impl JointKind {
    /// Number of configuration coordinates (entries of `q`).
    pub fn nq(&self) -> usize {
        match self {
            JointKind::Revolute { .. } | JointKind::Prismatic { .. } => 1,
            JointKind::Fixed => 0,
            JointKind::Floating => 7,
        }
    }

    /// Number of tangent coordinates (degrees of freedom, columns of a Jacobian).
    pub fn nv(&self) -> usize {
        match self {
            JointKind::Revolute { .. } | JointKind::Prismatic { .. } => 1,
            JointKind::Fixed => 0,
            JointKind::Floating => 6,
        }
    }

    /// Short lowercase name used in files and reports.
    pub fn type_name(&self) -> &'static str {
        match self {
            JointKind::Revolute { .. } => "revolute",
            JointKind::Prismatic { .. } => "prismatic",
            JointKind::Fixed => "fixed",
            JointKind::Floating => "floating",
        }
    }
}

/// Limits of one tangent coordinate. Position bounds may be infinite (an unbounded
/// revolute joint, the rotation of a floating joint); velocity and acceleration bounds are
/// positive and may be infinite when a file gives none.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Limits {
    pub lower: f64,
    pub upper: f64,
    pub velocity: f64,
    pub acceleration: f64,
}

impl Limits {
    pub const UNBOUNDED: Limits = Limits {
        lower: f64::NEG_INFINITY,
        upper: f64::INFINITY,
        velocity: f64::INFINITY,
        acceleration: f64::INFINITY,
    };

    /// Width of the position range (infinite when either bound is).
    pub fn span(&self) -> f64 {
        self.upper - self.lower
    }
}

impl Joint {
    /// Configuration coordinates with position limits, paired with those limits: for a
    /// one-DOF joint its coordinate, for a floating joint its translation `x y z` (the
    /// quaternion has none), for a fixed joint nothing. Yields `(index into q, limits)`.
    pub fn bounded_coordinates(&self) -> impl Iterator<Item = (usize, &Limits)> {
        let n = match self.kind {
            JointKind::Floating => 3,
            JointKind::Fixed => 0,
            _ => 1,
        };
        self.limits
            .iter()
            .take(n)
            .enumerate()
            .map(move |(k, l)| (self.q_index + k, l))
    }
}

/// A joint joining `parent` link to `child` link. The child link's frame is the joint frame
/// after the joint's motion: `T_child = T_parent * origin * motion(q)` (the URDF convention).
#[derive(Clone, Debug)]
pub struct Joint {
    pub name: String,
    pub kind: JointKind,
    pub parent: usize,
    pub child: usize,
    /// Placement of the joint frame in the parent link frame, at zero motion.
    pub origin: Pose,
    /// One entry per tangent coordinate (`kind.nv()` entries). For a floating joint the
    /// first three bound the translation coordinates `x y z` and the last three are
    /// unbounded in position (rotation has no limits).
    pub limits: Vec<Limits>,
    /// A passive joint is not driven by the robot: a mechanism joint (door hinge, lever
    /// pivot, drawer slide) whose value follows from the constraints.
    pub passive: bool,
    /// Offset of this joint's coordinates in `q`.
    pub q_index: usize,
    /// Offset of this joint's tangent coordinates (Jacobian columns).
    pub v_index: usize,
}
