//! Properties of every projection (proptest): a converged projection's residual, evaluated
//! again independently by `ConstraintStack::evaluate` with a fresh buffer, is within the
//! tolerance; and no projection returns a configuration outside the joint limits, even when
//! started outside them or aimed at an unreachable manifold. For `arm7()` and `twin()` with
//! point grips, bar grips, keep-level, a tether and a carried object.

mod common;

use clamber::constraint::{BarGrip, ConstraintStack, FrameMatch, FrameRef, KeepLevel, MatchMode};
use clamber::kinematics::forward_kinematics;
use clamber::math::{pose_from_xyz_rpy, Pose};
use clamber::model::{JointKind, Robot};
use clamber::projection::{project, ProjectionBuffer, ProjectionSettings};
use nalgebra::{Point3, Unit, Vector3};
use proptest::prelude::*;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

fn poses_at(robot: &Robot, q: &[f64]) -> Vec<Pose> {
    let mut poses = vec![Pose::identity(); robot.links().len()];
    forward_kinematics(robot, q, &mut poses).unwrap();
    poses
}

fn grip_at(robot: &Robot, poses: &[Pose], eff: &str) -> Pose {
    FrameRef::effector(robot, eff).unwrap().pose(poses)
}

fn jitter(rng: &mut ChaCha8Rng, lin: f64, ang: f64) -> Pose {
    let mut r = |s: f64| rng.random_range(-s..=s);
    pose_from_xyz_rpy([r(lin), r(lin), r(lin)], [r(ang), r(ang), r(ang)])
}

/// Moves some bounded coordinates outside their limits (by up to 1 rad or m).
fn push_outside(robot: &Robot, q: &mut [f64], rng: &mut ChaCha8Rng) {
    for j in robot.joints() {
        if matches!(
            j.kind,
            JointKind::Revolute { .. } | JointKind::Prismatic { .. }
        ) && j.limits[0].lower.is_finite()
            && rng.random_bool(0.5)
        {
            let l = &j.limits[0];
            q[j.q_index] = if rng.random_bool(0.5) {
                l.upper + rng.random_range(0.01..1.0)
            } else {
                l.lower - rng.random_range(0.01..1.0)
            };
        }
    }
}

fn bar_through(robot: &Robot, eff: &str, at: &Pose, len: f64, free: bool) -> BarGrip {
    let x = at.rotation * Vector3::x();
    let start = Point3::from(at.translation.vector) - x * (0.4 * len);
    BarGrip::new(
        robot,
        eff,
        start,
        start + x * len,
        at.rotation * Vector3::z(),
        free,
    )
    .unwrap()
}

/// A stack of kind `kind` for arm7, built around the configuration `q_ref` (so it is
/// reachable) or moved 5 m away (unreachable: the arm's reach is under 1 m).
fn arm_stack(
    robot: &Robot,
    q_ref: &[f64],
    kind: u8,
    far: bool,
    rng: &mut ChaCha8Rng,
) -> ConstraintStack {
    let poses = poses_at(robot, q_ref);
    let off = if far {
        pose_from_xyz_rpy([5.0, 0.0, 0.0], [0.0; 3])
    } else {
        Pose::identity()
    };
    let hold = off * grip_at(robot, &poses, "hand") * jitter(rng, 0.05, 0.2);
    let hand = FrameRef::effector(robot, "hand").unwrap();
    // "Up" for keep-level: the hand's z axis at q_ref, tilted a little (reachable).
    let up = (hand.pose(&poses) * jitter(rng, 0.0, 0.1)).rotation * Vector3::z();
    let s = ConstraintStack::new();
    match kind % 6 {
        0 => s.with(FrameMatch::point_grip(robot, "hand", hold, MatchMode::Full).unwrap()),
        1 => s.with(
            FrameMatch::point_grip(robot, "hand", hold, MatchMode::TurnAbout(Vector3::z_axis()))
                .unwrap(),
        ),
        2 => s.with(FrameMatch::point_grip(robot, "hand", hold, MatchMode::Position).unwrap()),
        3 => s.with(bar_through(robot, "hand", &hold, 0.6, false)),
        4 => s
            .with(bar_through(robot, "hand", &hold, 0.6, true))
            .with(KeepLevel::new(hand, Vector3::z(), up, 0.4, "tilt").unwrap()),
        _ => s
            .with(FrameMatch::point_grip(robot, "hand", hold, MatchMode::Position).unwrap())
            .with(KeepLevel::new(hand, Vector3::z(), up, 0.0, "level").unwrap()),
    }
}

/// A stack for twin (floating torso, two arms, passive door hinge). Unreachable variants put
/// the two hands' targets 5 m apart: the left target 5 m higher (a handle on the door stays
/// at its height whatever the hinge angle), or the carried object 5 m long. The arms span
/// about 2 m, so the floating torso cannot help.
fn twin_stack(
    robot: &Robot,
    q_ref: &[f64],
    kind: u8,
    far: bool,
    rng: &mut ChaCha8Rng,
) -> ConstraintStack {
    let poses = poses_at(robot, q_ref);
    let off = if far {
        pose_from_xyz_rpy([0.0, 0.0, 5.0], [0.0; 3])
    } else {
        Pose::identity()
    };
    let left = off * grip_at(robot, &poses, "left") * jitter(rng, 0.03, 0.1);
    let right = grip_at(robot, &poses, "right") * jitter(rng, 0.03, 0.1);
    let torso = FrameRef::on_link(robot, "torso", Pose::identity()).unwrap();
    let lframe = FrameRef::effector(robot, "left").unwrap();
    // Keep-level "up" directions: the frames' axes at q_ref, tilted a little (reachable).
    let torso_up = (torso.pose(&poses) * jitter(rng, 0.0, 0.1)).rotation * Vector3::z();
    let left_up = (lframe.pose(&poses) * jitter(rng, 0.0, 0.1)).rotation * Vector3::x();
    let s = ConstraintStack::new();
    match kind % 5 {
        0 => s
            .with(FrameMatch::point_grip(robot, "left", left, MatchMode::Full).unwrap())
            .with(FrameMatch::point_grip(robot, "right", right, MatchMode::Position).unwrap()),
        1 => s
            .with(bar_through(robot, "left", &left, 1.0, true))
            .with(FrameMatch::point_grip(robot, "right", right, MatchMode::Full).unwrap())
            .with(KeepLevel::new(torso, Vector3::z(), torso_up, 0.0, "torso level").unwrap()),
        2 => {
            // Tether: the left hand on a handle of the door (passive hinge); handle placed
            // where the left hand is at q_ref (or 5 m above).
            let door = robot.link_id("door").unwrap();
            let handle = poses[door].inverse() * left;
            s.with(FrameMatch::handle_tether(robot, "left", "door", handle).unwrap())
                .with(FrameMatch::point_grip(robot, "right", right, MatchMode::Full).unwrap())
        }
        3 => {
            let rel = grip_at(robot, &poses, "left").inverse() * right;
            let rel = if far {
                rel * pose_from_xyz_rpy([5.0, 0.0, 0.0], [0.0; 3])
            } else {
                rel
            };
            s.with(FrameMatch::carried_object(robot, "left", "right", rel).unwrap())
                .with(
                    FrameMatch::point_grip(
                        robot,
                        "left",
                        left,
                        MatchMode::TurnAbout(Unit::new_normalize(Vector3::new(1.0, 0.0, 1.0))),
                    )
                    .unwrap(),
                )
        }
        _ => s
            .with(bar_through(robot, "right", &right, 0.8, false))
            .with(KeepLevel::new(lframe, Vector3::x(), left_up, 0.3, "left tilt").unwrap())
            .with(FrameMatch::point_grip(robot, "left", left, MatchMode::Position).unwrap()),
    }
}

struct Tally {
    converged: usize,
}

fn check(
    robot: &Robot,
    stack: &ConstraintStack,
    q_start: &[f64],
    tally: &mut Tally,
) -> Result<(), TestCaseError> {
    let settings = ProjectionSettings::default();
    let mut buf = ProjectionBuffer::new(robot, stack);
    let mut q = q_start.to_vec();
    let rep = project(robot, stack, &settings, &mut q, &mut buf).unwrap();
    prop_assert!(
        robot.within_limits(&q, 0.0),
        "{:?}: returned q outside the limits: {q:?}",
        rep
    );
    if rep.converged() {
        tally.converged += 1;
        prop_assert!(rep.residual <= settings.tolerance);
        let mut fresh = stack.buffer(robot);
        let r = stack.evaluate(robot, &q, &mut fresh, false).unwrap();
        prop_assert!(
            r <= settings.tolerance,
            "reported {}, re-evaluated {r}",
            rep.residual
        );
    }
    Ok(())
}

fn start_near(robot: &Robot, q_ref: &[f64], outside: bool, rng: &mut ChaCha8Rng) -> Vec<f64> {
    let mut v = vec![0.0; robot.nv()];
    v.iter_mut().for_each(|x| *x = rng.random_range(-0.3..0.3));
    let mut q = vec![0.0; robot.nq()];
    robot.integrate(q_ref, &v, &mut q).unwrap();
    if outside {
        push_outside(robot, &mut q, rng);
    }
    q
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(96))]

    #[test]
    fn arm7_projection(seed in any::<u64>(), kind in 0u8..6, far in any::<bool>(), outside in any::<bool>()) {
        let robot = common::arm7();
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let q_ref = robot.random_configuration(&mut rng);
        let stack = arm_stack(&robot, &q_ref, kind, far, &mut rng);
        let q0 = start_near(&robot, &q_ref, outside, &mut rng);
        let mut t = Tally { converged: 0 };
        check(&robot, &stack, &q0, &mut t)?;
        if far {
            prop_assert_eq!(t.converged, 0, "converged onto an unreachable manifold");
        }
    }

    #[test]
    fn twin_projection(seed in any::<u64>(), kind in 0u8..5, far in any::<bool>(), outside in any::<bool>()) {
        let robot = common::twin();
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let q_ref = robot.random_configuration(&mut rng);
        let stack = twin_stack(&robot, &q_ref, kind, far, &mut rng);
        let q0 = start_near(&robot, &q_ref, outside, &mut rng);
        let mut t = Tally { converged: 0 };
        check(&robot, &stack, &q0, &mut t)?;
        if far {
            prop_assert_eq!(t.converged, 0, "converged onto an unreachable manifold");
        }
    }
}

/// The properties above must not hold vacuously: a good share of the reachable cases
/// converge (so the residual property is exercised). This is a floor against vacuity, not a
/// quality target: with the current clamped steps, cases that start with a coordinate at a
/// limit often run out of iterations (see the ignored test below).
#[test]
fn reachable_cases_mostly_converge() {
    let mut rng = ChaCha8Rng::seed_from_u64(99);
    for (name, robot) in [("arm7", common::arm7()), ("twin", common::twin())] {
        let (mut conv, mut total) = (0, 0);
        for i in 0..120u32 {
            let q_ref = robot.random_configuration(&mut rng);
            let kind = (i % 6) as u8;
            let stack = if name == "arm7" {
                arm_stack(&robot, &q_ref, kind, false, &mut rng)
            } else {
                twin_stack(&robot, &q_ref, kind, false, &mut rng)
            };
            let q0 = start_near(&robot, &q_ref, false, &mut rng);
            let mut t = Tally { converged: 0 };
            check(&robot, &stack, &q0, &mut t).unwrap();
            conv += t.converged;
            total += 1;
        }
        println!("{name}: {conv}/{total} reachable projections converged");
        assert!(conv * 3 >= total, "{name}: {conv}/{total}");
    }
}
/// Projection near a joint limit: the step is clamped into the limits, which throws away the
/// blocked coordinate's share of the step, so progress crawls. Case: arm7 at a random
/// configuration (ChaCha8 seed 99), hold at the hand's pose jittered by <= 5 cm / 0.2 rad,
/// started at the reference configuration; the first such case where the default 50
/// iterations fail although 5000 iterations converge (so a solution inside the limits
/// exists and projection finds it, slowly).
#[test]
fn projection_at_a_joint_limit_converges_within_default_iterations() {
    let mut rng = ChaCha8Rng::seed_from_u64(99);
    let robot = common::arm7();
    let long = ProjectionSettings::new(1e-9, 5000, 0.5).unwrap();
    for _ in 0..300 {
        let q_ref = robot.random_configuration(&mut rng);
        let stack = arm_stack(&robot, &q_ref, 0, false, &mut rng);
        let mut buf = ProjectionBuffer::new(&robot, &stack);
        let mut q = q_ref.clone();
        let rep = project(
            &robot,
            &stack,
            &ProjectionSettings::default(),
            &mut q,
            &mut buf,
        )
        .unwrap();
        let at_limit = robot
            .joints()
            .iter()
            .filter(|j| (q[j.q_index].abs() - 2.9).abs() < 1e-12)
            .count();
        let mut q2 = q_ref.clone();
        let rep2 = project(&robot, &stack, &long, &mut q2, &mut buf).unwrap();
        if !rep.converged() && rep2.converged() && at_limit > 0 {
            panic!(
                "default settings: {rep:?} with {at_limit} joint(s) at a limit; 5000 iterations: \
                 {rep2:?}"
            );
        }
    }
}
