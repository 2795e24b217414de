//! Keep-level: an axis of a frame held vertical (equality) or within an angle of vertical
//! (inequality, a one-sided row).

use nalgebra::{Unit, Vector3};

use super::frame_match::perpendicular_basis;
use super::swing::swing;
use super::{Constraint, ConstraintError, EvalContext, FrameRef, JacobianRows};
use crate::math::skew;

/// Axis `axis` (in the frame) kept along the world direction `up`, exactly when
/// `max_angle == 0` (2 equality rows) or within `max_angle` radians (1 one-sided row
/// `max(0, angle - max_angle)`, no codimension).
#[derive(Clone, Debug)]
pub struct KeepLevel {
    pub frame: FrameRef,
    pub axis: Unit<Vector3<f64>>,
    pub up: Unit<Vector3<f64>>,
    pub max_angle: f64,
    pub label: String,
}

impl KeepLevel {
    pub fn new(
        frame: FrameRef,
        axis: Vector3<f64>,
        up: Vector3<f64>,
        max_angle: f64,
        label: impl Into<String>,
    ) -> Result<Self, ConstraintError> {
        if !(max_angle.is_finite() && (0.0..std::f64::consts::PI).contains(&max_angle)) {
            return Err(ConstraintError::BadParameter {
                what: "keep-level angle",
                expected: "in [0, pi)",
                got: max_angle,
            });
        }
        let (na, nu) = (axis.norm(), up.norm());
        if !(na.is_finite() && na > 0.0) {
            return Err(ConstraintError::BadParameter {
                what: "keep-level axis length",
                expected: "positive",
                got: na,
            });
        }
        if !(nu.is_finite() && nu > 0.0) {
            return Err(ConstraintError::BadParameter {
                what: "keep-level up length",
                expected: "positive",
                got: nu,
            });
        }
        Ok(KeepLevel {
            frame,
            axis: Unit::new_normalize(axis),
            up: Unit::new_normalize(up),
            max_angle,
            label: label.into(),
        })
    }
}

impl Constraint for KeepLevel {
    fn rows(&self) -> usize {
        if self.max_angle == 0.0 {
            2
        } else {
            1
        }
    }
    fn codimension(&self) -> usize {
        if self.max_angle == 0.0 {
            2
        } else {
            0
        }
    }
    fn max_link(&self) -> crate::model::LinkId {
        self.frame.link
    }
    fn describe(&self) -> String {
        if self.max_angle == 0.0 {
            format!("{} (axis level, 2 rows)", self.label)
        } else {
            format!(
                "{} (axis within {:.3} rad of level, 1 one-sided row)",
                self.label, self.max_angle
            )
        }
    }

    fn evaluate(
        &self,
        ctx: &mut EvalContext<'_>,
        residual: &mut [f64],
        jacobian: Option<JacobianRows<'_>>,
    ) -> Result<(), ConstraintError> {
        let pose = self.frame.pose(ctx.poses);
        let a = pose.rotation * self.axis.into_inner();
        let up = self.up.into_inner();
        let mut grad = [Vector3::zeros(), Vector3::zeros()]; // d residual / d w (world)
        if self.max_angle == 0.0 {
            let (s, ds_da) = swing(&up, &a);
            let (u1, u2) = perpendicular_basis(&up);
            residual[0] = u1.dot(&s);
            residual[1] = u2.dot(&s);
            let sa = ds_da * (-skew(&a));
            grad[0] = (u1.transpose() * sa).transpose();
            grad[1] = (u2.transpose() * sa).transpose();
        } else {
            let c = up.cross(&a);
            let n = c.norm();
            let angle = n.atan2(up.dot(&a));
            let excess = (angle - self.max_angle).max(0.0);
            residual[0] = excess;
            if excess > 0.0 && n > 1e-12 {
                grad[0] = c / n; // d angle / d w = (up x a) / |up x a|
            }
        }
        if let Some(mut jac) = jacobian {
            if self.frame.is_fixed() {
                jac.fill(0.0);
                return Ok(());
            }
            ctx.frame_jacobian(&self.frame)?;
            let w = ctx.scratch.rows(3, 3);
            for (r, g) in grad.iter().take(self.rows()).enumerate() {
                jac.row_mut(r).copy_from(&(g.transpose() * w));
            }
        }
        Ok(())
    }
}
