//! A frame on one link held at a frame on another (or in the world): the constraint behind a
//! point grip (effector on a fixed hold), a tether (effector on a mechanism handle: a closed
//! chain) and a carried object (two effectors at a fixed relative pose).

use nalgebra::{Matrix3, Unit, Vector3};

use super::swing::swing;
use super::{Constraint, ConstraintError, EvalContext, FrameRef, JacobianRows};
use crate::math::{rotation_log, skew, so3_right_jacobian_inv, Pose};
use crate::model::Robot;

/// Which parts of the pose must match.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum MatchMode {
    /// Position and orientation: 6 rows `[p_a - p_b; log(R_b^T R_a)]`.
    Full,
    /// Position, and the given axis (in frame `b`, unit) of both frames aligned; free to turn
    /// about it: 5 rows `[p_a - p_b; swing components]`.
    TurnAbout(Unit<Vector3<f64>>),
    /// Position only: 3 rows.
    Position,
}

/// Frame `a` held at frame `b`.
#[derive(Clone, Debug)]
pub struct FrameMatch {
    pub a: FrameRef,
    pub b: FrameRef,
    pub mode: MatchMode,
    pub label: String,
}

impl FrameMatch {
    pub fn new(a: FrameRef, b: FrameRef, mode: MatchMode, label: impl Into<String>) -> Self {
        FrameMatch {
            a,
            b,
            mode,
            label: label.into(),
        }
    }

    /// Point grip: the grip frame of `effector` on a fixed hold frame `hold` (world pose).
    pub fn point_grip(
        robot: &Robot,
        effector: &str,
        hold: Pose,
        mode: MatchMode,
    ) -> Result<Self, ConstraintError> {
        Ok(Self::new(
            FrameRef::effector(robot, effector)?,
            FrameRef::world(hold),
            mode,
            format!("grip {effector}"),
        ))
    }

    /// Tether (closed chain): the grip frame of `effector` on the handle frame `handle` fixed on
    /// mechanism link `link` (whose joints are passive joints of the robot).
    pub fn handle_tether(
        robot: &Robot,
        effector: &str,
        link: &str,
        handle: Pose,
    ) -> Result<Self, ConstraintError> {
        Ok(Self::new(
            FrameRef::effector(robot, effector)?,
            FrameRef::on_link(robot, link, handle)?,
            MatchMode::Full,
            format!("tether {effector} to {link}"),
        ))
    }

    /// Carried object: the grip frame of `second` stays at `relative` in the grip frame of
    /// `first` (two effectors on one rigid object).
    pub fn carried_object(
        robot: &Robot,
        first: &str,
        second: &str,
        relative: Pose,
    ) -> Result<Self, ConstraintError> {
        let f = FrameRef::effector(robot, first)?;
        let a = FrameRef {
            link: f.link,
            offset: f.offset * relative,
        };
        Ok(Self::new(
            a,
            FrameRef::effector(robot, second)?,
            MatchMode::Full,
            format!("carry {first}+{second}"),
        ))
    }

    fn orientation_rows(&self) -> usize {
        match self.mode {
            MatchMode::Full => 3,
            MatchMode::TurnAbout(_) => 2,
            MatchMode::Position => 0,
        }
    }
}

/// Two unit vectors spanning the plane perpendicular to unit `h`.
pub(crate) fn perpendicular_basis(h: &Vector3<f64>) -> (Vector3<f64>, Vector3<f64>) {
    let p = if h.x.abs() < 0.6 {
        Vector3::x()
    } else {
        Vector3::y()
    };
    let u1 = h.cross(&p).normalize();
    let u2 = h.cross(&u1);
    (u1, u2)
}

impl Constraint for FrameMatch {
    fn rows(&self) -> usize {
        3 + self.orientation_rows()
    }
    fn codimension(&self) -> usize {
        self.rows()
    }
    fn max_link(&self) -> crate::model::LinkId {
        self.a.link.max(self.b.link)
    }
    fn describe(&self) -> String {
        let kind = match self.mode {
            MatchMode::Full => "pose",
            MatchMode::TurnAbout(_) => "position + axis",
            MatchMode::Position => "position",
        };
        format!("{} ({kind}, {} rows)", self.label, self.rows())
    }

    fn evaluate(
        &self,
        ctx: &mut EvalContext<'_>,
        residual: &mut [f64],
        jacobian: Option<JacobianRows<'_>>,
    ) -> Result<(), ConstraintError> {
        let pa = self.a.pose(ctx.poses);
        let pb = self.b.pose(ctx.poses);
        let dp = pa.translation.vector - pb.translation.vector;
        residual[..3].copy_from_slice(dp.as_slice());
        let (ra, rb) = (pa.rotation.matrix(), pb.rotation.matrix());

        // Orientation residual, and the 3x3 maps taking each frame's world angular velocity to
        // the residual's rate (for `b` also the extra term of a moving basis). The maps are
        // needed only for the Jacobian: projection's trial steps ask for the residual alone.
        let want_maps = jacobian.is_some();
        let mut map_a = Matrix3::zeros();
        let mut map_b = Matrix3::zeros();
        match self.mode {
            MatchMode::Position => {}
            MatchMode::Full => {
                let phi = rotation_log(&(pb.rotation.inverse() * pa.rotation));
                residual[3..6].copy_from_slice(phi.as_slice());
                if want_maps {
                    // d phi = Jr^-1(phi) R_a^T (w_a - w_b)
                    map_a = so3_right_jacobian_inv(&phi) * ra.transpose();
                    map_b = -map_a;
                }
            }
            MatchMode::TurnAbout(axis) => {
                let h = rb * axis.into_inner();
                let a = ra * axis.into_inner();
                let (s, ds_da) = swing(&h, &a);
                let (u1b, u2b) = perpendicular_basis(&axis);
                let (u1, u2) = (rb * u1b, rb * u2b);
                residual[3] = u1.dot(&s);
                residual[4] = u2.dot(&s);
                if want_maps {
                    let (_, ds_dh_neg) = swing(&a, &h); // swing(h, a) = -swing(a, h)
                                                        // da = -[a]x w_a, dh = -[h]x w_b, du = w_b x u.
                    let sa = ds_da * (-skew(&a));
                    let sb = -ds_dh_neg * (-skew(&h));
                    for (k, u) in [u1, u2].iter().enumerate() {
                        let ra_row = u.transpose() * sa;
                        let rb_row = u.transpose() * sb + u.cross(&s).transpose();
                        map_a.set_row(k, &ra_row);
                        map_b.set_row(k, &rb_row);
                    }
                }
            }
        }

        if let Some(mut jac) = jacobian {
            let no = self.orientation_rows();
            if jac.ncols() != ctx.robot.nv() {
                return Err(ConstraintError::WrongRobot {
                    expected: jac.ncols(),
                    got: ctx.robot.nv(),
                });
            }
            if jac.nrows() != 3 + no {
                return Err(ConstraintError::BadParameter {
                    what: "Jacobian rows of a frame match",
                    expected: "rows() of the constraint",
                    got: jac.nrows() as f64,
                });
            }
            // Column by column over slices (a column of the stack Jacobian's row block is
            // contiguous): nalgebra's fill, zip_apply and gemm on dynamically sized strided
            // views cost several times more here (callgrind, docs/performance.md).
            for c in 0..jac.ncols() {
                jac.column_mut(c).as_mut_slice().fill(0.0);
            }
            for (frame, sign, map) in [(&self.a, 1.0, &map_a), (&self.b, -1.0, &map_b)] {
                if frame.is_fixed() {
                    continue;
                }
                ctx.frame_jacobian(frame)?;
                // Frame Jacobian column [v; w]: the position rows get `sign * v`, the
                // orientation rows `map * w` (`map` already carries the sign of frame b).
                for (c, s) in ctx.scratch.as_slice().chunks_exact(6).enumerate() {
                    let r = map * Vector3::new(s[3], s[4], s[5]);
                    let mut col = jac.column_mut(c);
                    let col = col.as_mut_slice();
                    for k in 0..3 {
                        col[k] += sign * s[k];
                    }
                    for k in 0..no {
                        col[3 + k] += r[k];
                    }
                }
            }
        }
        Ok(())
    }
}
