//! Small rigid-body helpers on top of nalgebra: the pose type used everywhere and the
//! SO(3) exponential/logarithm used by the floating joint.

use nalgebra::{IsometryMatrix3, Matrix3, Rotation3, Translation3, UnitQuaternion, Vector3};

/// A rigid transform. Rotation is stored as a 3x3 matrix: composing and rotating vectors
/// with a matrix is cheaper than with a quaternion, and FK does little else.
pub type Pose = IsometryMatrix3<f64>;

/// Pose from a translation and roll-pitch-yaw angles (URDF convention: fixed axes X, then Y, then Z).
pub fn pose_from_xyz_rpy(xyz: [f64; 3], rpy: [f64; 3]) -> Pose {
    Pose::from_parts(
        Translation3::new(xyz[0], xyz[1], xyz[2]),
        Rotation3::from_euler_angles(rpy[0], rpy[1], rpy[2]),
    )
}

/// Roll-pitch-yaw of a rotation (URDF convention), such that
/// `pose_from_xyz_rpy(_, rpy_of(r))` gives `r` back to rounding error, also at and near
/// pitch = +-pi/2 (gimbal lock). Only used for writing files; the model never stores
/// Euler angles.
///
/// Written by hand because `Rotation3::euler_angles` takes the pitch from `asin(-r20)`,
/// which loses about half the digits near gimbal lock. Here every angle comes from an
/// `atan2` of well-conditioned entries: with `R = Rz(yaw) Ry(pitch) Rx(roll)`, the yaw
/// turns the first column into the xz plane (any yaw works when that column is +-z), then
/// `Rz(-yaw) R = Ry(pitch) Rx(roll)`, whose first column gives the pitch and whose middle
/// row is `(0, cos roll, -sin roll)`.
pub fn rpy_of(r: &Rotation3<f64>) -> [f64; 3] {
    let m = r.matrix();
    let yaw = m[(1, 0)].atan2(m[(0, 0)]);
    let (sy, cy) = yaw.sin_cos();
    // Rows of Rz(-yaw) * m that are needed: row 0 (first entry) and row 1.
    let c0 = cy * m[(0, 0)] + sy * m[(1, 0)];
    let pitch = (-m[(2, 0)]).atan2(c0);
    let r11 = -sy * m[(0, 1)] + cy * m[(1, 1)];
    let r12 = -sy * m[(0, 2)] + cy * m[(1, 2)];
    let roll = (-r12).atan2(r11);
    [roll, pitch, yaw]
}

/// Rotation about a unit axis by `angle` (Rodrigues' formula), written out because it is on
/// the FK hot path and avoids building an intermediate quaternion.
#[inline]
pub fn axis_angle(axis: &Vector3<f64>, angle: f64) -> Rotation3<f64> {
    let (s, c) = angle.sin_cos();
    let t = 1.0 - c;
    let (x, y, z) = (axis.x, axis.y, axis.z);
    Rotation3::from_matrix_unchecked(Matrix3::new(
        t * x * x + c,
        t * x * y - s * z,
        t * x * z + s * y,
        t * x * y + s * z,
        t * y * y + c,
        t * y * z - s * x,
        t * x * z - s * y,
        t * y * z + s * x,
        t * z * z + c,
    ))
}

/// Exponential map of so(3): rotation vector to unit quaternion.
#[inline]
pub fn so3_exp(w: &Vector3<f64>) -> UnitQuaternion<f64> {
    UnitQuaternion::from_scaled_axis(*w)
}

/// Logarithm of SO(3) on the shortest arc (angle in [0, pi]).
#[inline]
pub fn so3_log(q: &UnitQuaternion<f64>) -> Vector3<f64> {
    q.scaled_axis()
}

/// Skew-symmetric matrix `[w]x` with `[w]x v = w x v`.
#[inline]
pub fn skew(w: &Vector3<f64>) -> Matrix3<f64> {
    Matrix3::new(0.0, -w.z, w.y, w.z, 0.0, -w.x, -w.y, w.x, 0.0)
}

/// Logarithm of a rotation matrix (rotation vector, angle in [0, pi]).
#[inline]
pub fn rotation_log(r: &Rotation3<f64>) -> Vector3<f64> {
    UnitQuaternion::from_rotation_matrix(r).scaled_axis()
}

/// Inverse of the right Jacobian of SO(3) at rotation vector `phi`:
/// `d/dt log(R) = Jr^-1(log R) * w_body` when `dR/dt = R [w_body]x`.
/// Closed form from J. Sola, J. Deray, D. Atchuthan, "A micro Lie theory for state
/// estimation in robotics" (2018), eq. (144): `Jr^-1 = I + 1/2 [phi]x +
/// (1/theta^2 - (1 + cos theta) / (2 theta sin theta)) [phi]x^2`; its Taylor series
/// (coefficient 1/12 + theta^2/720) below theta = 1e-4.
pub fn so3_right_jacobian_inv(phi: &Vector3<f64>) -> Matrix3<f64> {
    let theta2 = phi.norm_squared();
    let k = skew(phi);
    let coeff = if theta2 < 1e-8 {
        1.0 / 12.0 + theta2 / 720.0
    } else {
        let theta = theta2.sqrt();
        1.0 / theta2 - (1.0 + theta.cos()) / (2.0 * theta * theta.sin())
    };
    Matrix3::identity() + 0.5 * k + coeff * k * k
}
