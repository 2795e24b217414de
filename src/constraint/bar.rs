//! Bar grip: an effector holding a straight bar segment anywhere along it.

use nalgebra::{Point3, Rotation3, Unit, Vector3};

use super::frame_match::perpendicular_basis;
use super::swing::swing;
use super::{Constraint, ConstraintError, EvalContext, FrameRef, JacobianRows};
use crate::math::{rotation_log, skew, so3_right_jacobian_inv};
use crate::model::Robot;

/// The effector's grip frame on a fixed bar from `start` along `axis` for `length` metres.
///
/// Convention: the grip frame's x axis lies along the bar (the gripper closes around it).
/// Rows: 2 for the grip point's offset from the bar line; 3 for orientation (the grip frame
/// equals the bar frame `orientation`, whose x axis is the bar axis), or 2 when
/// `turn_free` (only the x axes aligned: the hand may turn about the bar); and 1 one-sided row
/// keeping the grip position along the bar inside `[0, length]`.
#[derive(Clone, Debug)]
pub struct BarGrip {
    pub effector: FrameRef,
    pub start: Point3<f64>,
    pub axis: Unit<Vector3<f64>>,
    pub length: f64,
    /// Bar frame: x along `axis`. Used for the orientation rows when not `turn_free`.
    pub orientation: Rotation3<f64>,
    pub turn_free: bool,
    pub label: String,
}

impl BarGrip {
    /// A bar grip from `start` to `end`. The bar frame's z axis (the grip frame's approach
    /// axis) is chosen perpendicular to the bar and as close as possible to `approach`: the
    /// direction in which the hand moves onto the bar.
    pub fn new(
        robot: &Robot,
        effector: &str,
        start: Point3<f64>,
        end: Point3<f64>,
        approach: Vector3<f64>,
        turn_free: bool,
    ) -> Result<Self, ConstraintError> {
        let d = end - start;
        let length = d.norm();
        if !(length.is_finite() && length > 0.0) {
            return Err(ConstraintError::BadParameter {
                what: "bar length",
                expected: "positive and finite",
                got: length,
            });
        }
        let x = d / length;
        let mut z = approach - x * x.dot(&approach);
        if z.norm() < 1e-9 {
            z = perpendicular_basis(&x).0;
        }
        let z = z.normalize();
        let y = z.cross(&x);
        let orientation = Rotation3::from_basis_unchecked(&[x, y, z]);
        Ok(BarGrip {
            effector: FrameRef::effector(robot, effector)?,
            start,
            axis: Unit::new_unchecked(x),
            length,
            orientation,
            turn_free,
            label: format!("bar grip {effector}"),
        })
    }

    /// Where along the bar (metres from `start`) the grip frame is at link poses `poses`.
    pub fn grip_position(&self, poses: &[crate::math::Pose]) -> f64 {
        let p = self.effector.pose(poses).translation.vector;
        self.axis.dot(&(p - self.start.coords))
    }

    fn orientation_rows(&self) -> usize {
        if self.turn_free {
            2
        } else {
            3
        }
    }
}

impl Constraint for BarGrip {
    fn rows(&self) -> usize {
        2 + self.orientation_rows() + 1
    }
    fn codimension(&self) -> usize {
        2 + self.orientation_rows()
    }
    fn max_link(&self) -> crate::model::LinkId {
        self.effector.link
    }
    fn describe(&self) -> String {
        format!(
            "{} ({} rows, {} m bar{})",
            self.label,
            self.rows(),
            self.length,
            if self.turn_free { ", free to turn" } else { "" }
        )
    }

    fn evaluate(
        &self,
        ctx: &mut EvalContext<'_>,
        residual: &mut [f64],
        jacobian: Option<JacobianRows<'_>>,
    ) -> Result<(), ConstraintError> {
        let pe = self.effector.pose(ctx.poses);
        let d = pe.translation.vector - self.start.coords;
        let u1 = self.orientation.matrix().column(1).into_owned();
        let u2 = self.orientation.matrix().column(2).into_owned();
        let x = self.axis.into_inner();
        residual[0] = u1.dot(&d);
        residual[1] = u2.dot(&d);
        let no = self.orientation_rows();
        let re = pe.rotation.matrix();
        let mut map = nalgebra::Matrix3::zeros();
        if self.turn_free {
            let a = re.column(0).into_owned();
            let (s, ds_da) = swing(&x, &a);
            residual[2] = u1.dot(&s);
            residual[3] = u2.dot(&s);
            let sa = ds_da * (-skew(&a));
            map.set_row(0, &(u1.transpose() * sa));
            map.set_row(1, &(u2.transpose() * sa));
        } else {
            let phi = rotation_log(&(self.orientation.inverse() * pe.rotation));
            residual[2..5].copy_from_slice(phi.as_slice());
            map = so3_right_jacobian_inv(&phi) * re.transpose();
        }
        let t = x.dot(&d);
        let excess = t - t.clamp(0.0, self.length);
        residual[2 + no] = excess;

        if let Some(mut jac) = jacobian {
            ctx.frame_jacobian(&self.effector)?;
            let s = &*ctx.scratch;
            let lin = s.rows(0, 3);
            jac.row_mut(0).copy_from(&(u1.transpose() * lin));
            jac.row_mut(1).copy_from(&(u2.transpose() * lin));
            jac.rows_mut(2, no)
                .gemm(1.0, &map.rows(0, no), &s.rows(3, 3), 0.0);
            if excess != 0.0 {
                jac.row_mut(2 + no).copy_from(&(x.transpose() * lin));
            } else {
                jac.row_mut(2 + no).fill(0.0);
            }
        }
        Ok(())
    }
}
