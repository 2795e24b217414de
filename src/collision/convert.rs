//! Conversions between the model's nalgebra types and the collision library's glam-based
//! types. This is the only place in the crate where the two meet; everything else in
//! [`crate::collision`] calls these functions.
//!
//! All conversions are exact up to floating-point rounding, except the rotation matrix to
//! quaternion step, which uses nalgebra's `UnitQuaternion::from_rotation_matrix` (error of
//! a few ulps for a proper rotation matrix).

use nalgebra::{Point3, UnitQuaternion, Vector3};
use parry3d_f64::math::{Pose as PPose, Rotation as PRotation, Vector as PVector};

use crate::math::Pose;

/// A model pose as a collision-library pose.
#[inline]
pub fn pose_to_parry(p: &Pose) -> PPose {
    let q = UnitQuaternion::from_rotation_matrix(&p.rotation);
    let t = &p.translation.vector;
    PPose::from_parts(
        PVector::new(t.x, t.y, t.z),
        PRotation::from_xyzw(q.i, q.j, q.k, q.w),
    )
}

/// A collision-library pose as a model pose.
#[inline]
pub fn pose_from_parry(p: &PPose) -> Pose {
    let q = UnitQuaternion::from_quaternion(nalgebra::Quaternion::new(
        p.rotation.w,
        p.rotation.x,
        p.rotation.y,
        p.rotation.z,
    ));
    Pose::from_parts(
        nalgebra::Translation3::new(p.translation.x, p.translation.y, p.translation.z),
        q.to_rotation_matrix(),
    )
}

#[inline]
pub fn point_to_parry(p: &Point3<f64>) -> PVector {
    PVector::new(p.x, p.y, p.z)
}

#[inline]
pub fn vector_to_parry(v: &Vector3<f64>) -> PVector {
    PVector::new(v.x, v.y, v.z)
}

#[inline]
pub fn point_from_parry(v: PVector) -> Point3<f64> {
    Point3::new(v.x, v.y, v.z)
}

#[inline]
pub fn vector_from_parry(v: PVector) -> Vector3<f64> {
    Vector3::new(v.x, v.y, v.z)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::math::pose_from_xyz_rpy;

    #[test]
    fn pose_round_trip_and_point_mapping_agree() {
        let p = pose_from_xyz_rpy([0.3, -1.2, 2.5], [0.7, -1.1, 2.9]);
        let pp = pose_to_parry(&p);
        let x = Point3::new(0.11, -0.4, 0.9);
        let a = p * x;
        let b = point_from_parry(pp * point_to_parry(&x));
        assert!((a - b).norm() < 1e-14, "{a} vs {b}");
        let back = pose_from_parry(&pp);
        assert!((back.to_homogeneous() - p.to_homogeneous()).norm() < 1e-14);
        let v = Vector3::new(1.0, 2.0, 3.0);
        assert_eq!(vector_from_parry(vector_to_parry(&v)), v);
    }
}
