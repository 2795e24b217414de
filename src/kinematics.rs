//! Forward kinematics and Jacobians: pure functions of the robot and a configuration `q`,
//! writing into buffers the caller owns (no allocation on the hot path).
//!
//! Frame Jacobian convention (see `docs/kinematics.md`): a 6 x nv matrix whose rows are
//! `[v; w]`, the linear velocity of the frame's origin and the angular velocity of the
//! frame, both expressed in world axes; column `k` is the effect of tangent coordinate `k`
//! (for a floating joint: body-frame linear then angular velocity).

use nalgebra::{
    DMatrix, Matrix3, Point3, Quaternion, Rotation3, Translation3, UnitQuaternion, Vector3,
};
use thiserror::Error;

use crate::configuration::{check_len, ConfigurationError};
use crate::math::{axis_angle, Pose};
use crate::model::{Joint, JointKind, LinkId, Robot};

/// Wrong buffer sizes or ids given to a kinematics function.
#[derive(Debug, Error, Clone, PartialEq)]
#[non_exhaustive]
pub enum KinematicsError {
    #[error(transparent)]
    Configuration(#[from] ConfigurationError),
    #[error("pose buffer has {got} entries, the robot has {expected} links")]
    PoseBuffer { got: usize, expected: usize },
    #[error("Jacobian buffer is {rows}x{cols}, expected {expected_rows}x{expected_cols}")]
    JacobianShape {
        rows: usize,
        cols: usize,
        expected_rows: usize,
        expected_cols: usize,
    },
    #[error("link id {0} is out of range")]
    NoSuchLink(LinkId),
}

/// `r * R(axis, angle)` for a rotation about a unit axis, given `(sin, cos)` of the angle.
/// Axes along +x, +y, +z (the common case) take 12 multiplications instead of a full 3x3
/// product; any other axis goes through Rodrigues' formula.
#[inline]
fn rotate_about(r: &Matrix3<f64>, axis: &Vector3<f64>, angle: f64) -> Matrix3<f64> {
    let (s, c) = angle.sin_cos();
    let (c0, c1, c2) = (r.column(0), r.column(1), r.column(2));
    if axis.x == 0.0 && axis.y == 0.0 && axis.z == 1.0 {
        Matrix3::from_columns(&[c0 * c + c1 * s, c1 * c - c0 * s, c2.into_owned()])
    } else if axis.x == 0.0 && axis.y == 1.0 && axis.z == 0.0 {
        Matrix3::from_columns(&[c0 * c - c2 * s, c1.into_owned(), c0 * s + c2 * c])
    } else if axis.x == 1.0 && axis.y == 0.0 && axis.z == 0.0 {
        Matrix3::from_columns(&[c0.into_owned(), c1 * c + c2 * s, c2 * c - c1 * s])
    } else {
        r * axis_angle(axis, angle).matrix()
    }
}

/// World pose of a joint's child given the parent's world pose and the joint coordinates.
#[inline]
fn child_pose(parent: &Pose, j: &Joint, q: &[f64]) -> Pose {
    let pr = parent.rotation.matrix();
    let pt = &parent.translation.vector;
    let or = j.origin.rotation.matrix();
    let ot = &j.origin.translation.vector;
    let i = j.q_index;
    // Most joint origins carry no rotation (robot files often give only `xyz`): skip the 3x3
    // product then (27 multiplications against at most nine comparisons). Multiplying by the
    // identity is exact, so the result is the same either way.
    let w = if *or == Matrix3::identity() {
        *pr
    } else {
        pr * or
    };
    let (r, t) = match &j.kind {
        JointKind::Revolute { axis } => (rotate_about(&w, axis, q[i]), pr * ot + pt),
        JointKind::Prismatic { axis } => (w, pr * ot + pt + w * (axis.into_inner() * q[i])),
        JointKind::Fixed => (w, pr * ot + pt),
        JointKind::Floating => {
            let rq = UnitQuaternion::new_normalize(Quaternion::new(
                q[i + 6],
                q[i + 3],
                q[i + 4],
                q[i + 5],
            ));
            (
                w * rq.to_rotation_matrix().matrix(),
                pr * ot + pt + w * Vector3::new(q[i], q[i + 1], q[i + 2]),
            )
        }
    };
    Pose::from_parts(Translation3::from(t), Rotation3::from_matrix_unchecked(r))
}

/// World pose of every link at `q`, in one pass over the tree (root at the world origin).
/// `poses` must have one entry per link. `q` is not checked for unit quaternions (they are
/// normalized on the fly); use [`Robot::check_configuration`] on untrusted input.
pub fn forward_kinematics(
    robot: &Robot,
    q: &[f64],
    poses: &mut [Pose],
) -> Result<(), KinematicsError> {
    check_len("configuration", q.len(), robot.nq())?;
    if poses.len() != robot.links().len() {
        return Err(KinematicsError::PoseBuffer {
            got: poses.len(),
            expected: robot.links().len(),
        });
    }
    poses[0] = Pose::identity();
    for j in robot.joints() {
        // Joints are ordered like their child links and parents come first.
        poses[j.child] = child_pose(&poses[j.parent], j, q);
    }
    Ok(())
}

fn check_jacobian(
    robot: &Robot,
    poses: &[Pose],
    link: LinkId,
    jac: &DMatrix<f64>,
    rows: usize,
) -> Result<(), KinematicsError> {
    if poses.len() != robot.links().len() {
        return Err(KinematicsError::PoseBuffer {
            got: poses.len(),
            expected: robot.links().len(),
        });
    }
    if link >= robot.links().len() {
        return Err(KinematicsError::NoSuchLink(link));
    }
    if jac.nrows() != rows || jac.ncols() != robot.nv() {
        return Err(KinematicsError::JacobianShape {
            rows: jac.nrows(),
            cols: jac.ncols(),
            expected_rows: rows,
            expected_cols: robot.nv(),
        });
    }
    Ok(())
}

/// Walk the joints that move `link` (its support) from the link up to the root, writing
/// each joint's column(s) for the point `p` (world) into `jac`; `angular` also writes rows
/// 3..6.
#[inline]
fn fill_columns(
    robot: &Robot,
    poses: &[Pose],
    link: LinkId,
    p: &Point3<f64>,
    jac: &mut DMatrix<f64>,
    angular: bool,
) {
    let rows = jac.nrows();
    let data = jac.as_mut_slice(); // column-major: column c is data[c * rows..][..rows]
                                   // On the slice: `DMatrix::fill` walks a strided iterator, ~10x the instructions (callgrind).
    data.fill(0.0);
    let mut put = |col: usize, lin: &Vector3<f64>, ang: &Vector3<f64>| {
        let c = &mut data[col * rows..col * rows + rows];
        c[..3].copy_from_slice(lin.as_slice());
        if angular {
            c[3..6].copy_from_slice(ang.as_slice());
        }
    };
    let mut l = link;
    while let Some(ji) = robot.links()[l].parent_joint {
        let j = &robot.joints()[ji];
        let frame = &poses[j.child]; // joint frame after its motion
        let r = frame.rotation.matrix();
        let arm = p.coords - frame.translation.vector;
        match &j.kind {
            JointKind::Revolute { axis } => {
                let w = r * axis.into_inner();
                put(j.v_index, &w.cross(&arm), &w);
            }
            JointKind::Prismatic { axis } => {
                put(j.v_index, &(r * axis.into_inner()), &Vector3::zeros())
            }
            JointKind::Fixed => {}
            JointKind::Floating => {
                for k in 0..3 {
                    let e = r.column(k).into_owned();
                    put(j.v_index + k, &e, &Vector3::zeros());
                    put(j.v_index + 3 + k, &e.cross(&arm), &e);
                }
            }
        }
        l = j.parent;
    }
}

/// 6 x nv Jacobian of the frame `frame_in_link` fixed on `link` (see the module docs for the
/// convention). `poses` must be [`forward_kinematics`] at the same `q`.
pub fn frame_jacobian(
    robot: &Robot,
    poses: &[Pose],
    link: LinkId,
    frame_in_link: &Pose,
    jac: &mut DMatrix<f64>,
) -> Result<(), KinematicsError> {
    check_jacobian(robot, poses, link, jac, 6)?;
    let p = Point3::from((poses[link] * frame_in_link).translation.vector);
    fill_columns(robot, poses, link, &p, jac, true);
    Ok(())
}

/// 3 x nv Jacobian of the world velocity of a point fixed on `link` (`point` in link
/// coordinates). `poses` must be [`forward_kinematics`] at the same `q`.
pub fn point_jacobian(
    robot: &Robot,
    poses: &[Pose],
    link: LinkId,
    point: &Point3<f64>,
    jac: &mut DMatrix<f64>,
) -> Result<(), KinematicsError> {
    check_jacobian(robot, poses, link, jac, 3)?;
    let p = poses[link] * point;
    fill_columns(robot, poses, link, &p, jac, false);
    Ok(())
}

/// Caller-owned scratch for repeated kinematics on one robot: link poses and a frame
/// Jacobian, sized once.
#[derive(Clone, Debug)]
pub struct KinematicsBuffer {
    pub poses: Vec<Pose>,
    pub jacobian: DMatrix<f64>,
}

impl KinematicsBuffer {
    pub fn new(robot: &Robot) -> Self {
        KinematicsBuffer {
            poses: vec![Pose::identity(); robot.links().len()],
            jacobian: DMatrix::zeros(6, robot.nv()),
        }
    }
}
