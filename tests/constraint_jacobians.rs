//! Every constraint's analytic Jacobian against central finite differences taken through
//! `Robot::integrate` (so the floating joint is differentiated on its manifold).
//! Step h = 1e-6: truncation error O(h^2) ~ 1e-12 and round-off ~ eps/h ~ 1e-10, so agreement
//! to 1e-6 (absolute, on entries of order 1) leaves a wide margin while catching any wrong term.

mod common;

use std::sync::Arc;

use clamber::constraint::{
    BarGrip, Constraint, ConstraintStack, FrameMatch, FrameRef, KeepLevel, MatchMode,
};
use clamber::kinematics::forward_kinematics;
use clamber::math::{pose_from_xyz_rpy, Pose};
use clamber::model::Robot;
use nalgebra::{Point3, Unit, Vector3};
use proptest::prelude::*;
use rand::SeedableRng;

const H: f64 = 1e-6;
const TOL: f64 = 1e-6;

fn check(robot: &Robot, c: Arc<dyn Constraint>, q: &[f64]) -> Result<(), TestCaseError> {
    let mut stack = ConstraintStack::new();
    stack.push(c.clone());
    let mut buf = stack.buffer(robot);
    stack.evaluate(robot, q, &mut buf, true).unwrap();
    let jac = buf.jacobian.clone();
    let r0 = buf.residual.clone();
    let mut v = vec![0.0; robot.nv()];
    let (mut qp, mut qm) = (vec![0.0; robot.nq()], vec![0.0; robot.nq()]);
    for k in 0..robot.nv() {
        v.iter_mut().for_each(|x| *x = 0.0);
        v[k] = H;
        robot.integrate(q, &v, &mut qp).unwrap();
        v[k] = -H;
        robot.integrate(q, &v, &mut qm).unwrap();
        stack.evaluate(robot, &qp, &mut buf, false).unwrap();
        let rp = buf.residual.clone();
        stack.evaluate(robot, &qm, &mut buf, false).unwrap();
        let rm = buf.residual.clone();
        for r in 0..stack.rows() {
            // One-sided rows have a kink where they switch on; skip the column if the row is
            // active on one side only.
            if (rp[r] == 0.0) != (rm[r] == 0.0) || (r0[r] == 0.0 && (rp[r] != 0.0 || rm[r] != 0.0))
            {
                continue;
            }
            let fd = (rp[r] - rm[r]) / (2.0 * H);
            prop_assert!(
                (fd - jac[(r, k)]).abs() <= TOL * (1.0 + fd.abs()),
                "{}: row {r} col {k}: analytic {} vs finite difference {fd}",
                c.describe(),
                jac[(r, k)]
            );
        }
    }
    Ok(())
}

fn q_near(robot: &Robot, seed: u64) -> Vec<f64> {
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
    robot.random_configuration(&mut rng)
}

/// A world frame near the effector's current frame (so the orientation error stays well
/// below pi, where the logarithm is smooth).
fn hold_near(robot: &Robot, q: &[f64], eff: &str, d: [f64; 6]) -> Pose {
    let mut poses = vec![Pose::identity(); robot.links().len()];
    forward_kinematics(robot, q, &mut poses).unwrap();
    let e = robot.effector(eff).unwrap();
    poses[e.link] * e.grip * pose_from_xyz_rpy([d[0], d[1], d[2]], [d[3], d[4], d[5]])
}

fn small() -> impl Strategy<Value = [f64; 6]> {
    prop::array::uniform6(-0.8f64..0.8)
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(64))]

    #[test]
    fn frame_match_jacobians(seed in 0u64..1_000_000, d in small()) {
        let robot = common::twin();
        let q = q_near(&robot, seed);
        let hold = hold_near(&robot, &q, "left", d);
        for mode in [MatchMode::Full, MatchMode::Position, MatchMode::TurnAbout(Unit::new_normalize(Vector3::new(0.2, 1.0, -0.3)))] {
            check(&robot, Arc::new(FrameMatch::point_grip(&robot, "left", hold, mode).unwrap()), &q)?;
            // Both frames moving: left grip against a frame on the right arm.
            let right = FrameRef::effector(&robot, "right").unwrap();
            let left = FrameRef::effector(&robot, "left").unwrap();
            let rel = {
                let mut poses = vec![Pose::identity(); robot.links().len()];
                forward_kinematics(&robot, &q, &mut poses).unwrap();
                right.pose(&poses).inverse() * left.pose(&poses) * pose_from_xyz_rpy([d[0], d[1], d[2]], [d[3], d[4], d[5]])
            };
            let moving = FrameMatch::new(left, FrameRef { link: right.link, offset: right.offset * rel }, mode, "two moving frames");
            check(&robot, Arc::new(moving), &q)?;
        }
        check(&robot, Arc::new(FrameMatch::handle_tether(&robot, "right", "door", pose_from_xyz_rpy([0.5, 0.0, 1.0], [d[0], d[1], d[2]])).unwrap()), &q)?;
        check(&robot, Arc::new(FrameMatch::carried_object(&robot, "left", "right", pose_from_xyz_rpy([0.0, -0.4, 0.0], [d[3], d[4], d[5]])).unwrap()), &q)?;
    }

    #[test]
    fn bar_grip_jacobians(seed in 0u64..1_000_000, d in small(), len in 0.2f64..2.0, free in any::<bool>()) {
        let robot = common::twin();
        let q = q_near(&robot, seed);
        let hold = hold_near(&robot, &q, "right", d);
        let start = Point3::from(hold.translation.vector) - hold.rotation * Vector3::x() * (len * (0.5 + d[0]));
        let end = start + hold.rotation * Vector3::x() * len;
        let bar = BarGrip::new(&robot, "right", start, end, hold.rotation * Vector3::z(), free).unwrap();
        check(&robot, Arc::new(bar), &q)?;
    }

    #[test]
    fn keep_level_jacobians(seed in 0u64..1_000_000, angle in prop_oneof![Just(0.0), 0.05f64..1.5]) {
        let robot = common::twin();
        let q = q_near(&robot, seed);
        let f = FrameRef::effector(&robot, "left").unwrap();
        let c = KeepLevel::new(f, Vector3::new(0.1, 0.2, 1.0), Vector3::z(), angle, "level").unwrap();
        // Equality form: skip configurations far from level (the swing is smooth below pi).
        check(&robot, Arc::new(c), &q)?;
    }
}
