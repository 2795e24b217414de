//! Settings out of range and mismatched dimensions are typed errors, not panics (house rule:
//! bad input gets a clear typed error). Each check names the variant it expects.

mod common;

use std::panic::{catch_unwind, AssertUnwindSafe};

use clamber::configuration::ConfigurationError;
use clamber::constraint::{ConstraintError, ConstraintStack, FrameMatch, FrameRef, MatchMode};
use clamber::kinematics::{forward_kinematics, KinematicsError};
use clamber::math::{pose_from_xyz_rpy, Pose};
use clamber::model::{JointSpec, JointType, LinkSpec, Robot, RobotSpec};
use clamber::projection::{project, ProjectionBuffer, ProjectionSettings, SettingsError};
use clamber::walk::{walk, WalkSettings};
use nalgebra::Vector3;

fn out_of_range_name(e: SettingsError) -> &'static str {
    match e {
        SettingsError::OutOfRange { name, .. } => name,
        other => panic!("unexpected {other:?}"),
    }
}

/// arm7 holding its hand where it is at the neutral configuration (so `neutral` is on the
/// manifold).
fn arm_and_grip() -> (Robot, ConstraintStack, Vec<f64>) {
    let robot = common::arm7();
    let q = robot.neutral();
    let mut poses = vec![Pose::identity(); robot.links().len()];
    forward_kinematics(&robot, &q, &mut poses).unwrap();
    let e = robot.effector("hand").unwrap();
    let hold = poses[e.link] * e.grip;
    let stack = ConstraintStack::new()
        .with(FrameMatch::point_grip(&robot, "hand", hold, MatchMode::Full).unwrap());
    (robot, stack, q)
}

fn is_length_error(e: &ConstraintError) -> bool {
    matches!(
        e,
        ConstraintError::Configuration(ConfigurationError::Length { .. })
            | ConstraintError::Kinematics(KinematicsError::Configuration(
                ConfigurationError::Length { .. }
            ))
    )
}

#[test]
fn projection_settings_out_of_range() {
    let ok = ProjectionSettings::new(1e-9, 50, 0.5).unwrap();
    assert_eq!(ok, ProjectionSettings::default());
    for tol in [-1e-9, 0.0, f64::NAN, f64::INFINITY] {
        let e = ProjectionSettings::new(tol, 50, 0.5).unwrap_err();
        assert_eq!(out_of_range_name(e), "tolerance", "tolerance {tol}");
    }
    let e = ProjectionSettings::new(1e-9, 0, 0.5).unwrap_err();
    assert_eq!(out_of_range_name(e), "max_iterations");
    for step in [-0.5, 0.0, f64::NAN, f64::INFINITY] {
        let e = ProjectionSettings::new(1e-9, 50, step).unwrap_err();
        assert_eq!(out_of_range_name(e), "max_step", "max_step {step}");
    }
    // Settings built field by field are checked by `validate`.
    let bad = ProjectionSettings {
        tolerance: f64::NAN,
        ..Default::default()
    };
    assert_eq!(out_of_range_name(bad.validate().unwrap_err()), "tolerance");
}

#[test]
fn walk_settings_out_of_range() {
    let p = ProjectionSettings::default();
    assert!(WalkSettings::new(0.05, 1.0, 100, p).is_ok());
    for stride in [-0.05, 0.0, f64::NAN, f64::INFINITY] {
        let e = WalkSettings::new(stride, 1.0, 100, p).unwrap_err();
        assert_eq!(out_of_range_name(e), "stride", "stride {stride}");
    }
    for dev in [-1.0, 0.0, f64::NAN] {
        let e = WalkSettings::new(0.05, dev, 100, p).unwrap_err();
        assert_eq!(out_of_range_name(e), "max_deviation", "max_deviation {dev}");
    }
    let e = WalkSettings::new(0.05, 1.0, 0, p).unwrap_err();
    assert_eq!(out_of_range_name(e), "max_steps");
    // An invalid projection inside is reported too.
    let bad = ProjectionSettings {
        max_iterations: 0,
        ..Default::default()
    };
    let e = WalkSettings::new(0.05, 1.0, 100, bad).unwrap_err();
    assert_eq!(out_of_range_name(e), "max_iterations");
}

#[test]
fn wrong_configuration_length_is_an_error() {
    let (robot, stack, q) = arm_and_grip();
    let mut buf = ProjectionBuffer::new(&robot, &stack);
    let settings = ProjectionSettings::default();
    for n in [0, robot.nq() - 1, robot.nq() + 1] {
        let mut short = vec![0.1; n];
        let e = project(&robot, &stack, &settings, &mut short, &mut buf).unwrap_err();
        assert!(is_length_error(&e), "project, length {n}: {e:?}");
        let e = stack
            .evaluate(&robot, &short, &mut buf.stack, true)
            .unwrap_err();
        assert!(is_length_error(&e), "evaluate, length {n}: {e:?}");
        let w = WalkSettings::default();
        let e = walk(&robot, &stack, &short, &q, &w, &mut buf).unwrap_err();
        assert!(is_length_error(&e), "walk start, length {n}: {e:?}");
        let e = walk(&robot, &stack, &q, &short, &w, &mut buf).unwrap_err();
        assert!(is_length_error(&e), "walk target, length {n}: {e:?}");
    }
}

#[test]
fn buffer_from_another_robot_or_stack_is_an_error() {
    let (robot, stack, q) = arm_and_grip();
    let other = common::twin();
    let settings = ProjectionSettings::default();
    // A stack buffer sized for another robot.
    let mut foreign = stack.buffer(&other);
    let e = stack.evaluate(&robot, &q, &mut foreign, true).unwrap_err();
    assert!(matches!(e, ConstraintError::WrongRobot { .. }), "{e:?}");
    // A projection buffer sized for another robot.
    let mut pbuf = ProjectionBuffer::new(&other, &stack);
    let mut qq = q.clone();
    let e = project(&robot, &stack, &settings, &mut qq, &mut pbuf).unwrap_err();
    assert!(matches!(e, ConstraintError::WrongRobot { .. }), "{e:?}");
    let e = walk(&robot, &stack, &q, &q, &WalkSettings::default(), &mut pbuf).unwrap_err();
    assert!(matches!(e, ConstraintError::WrongRobot { .. }), "{e:?}");
    // A projection buffer sized for another stack (5 rows instead of 6).
    let hold = pose_from_xyz_rpy([0.3, 0.0, 0.5], [0.0; 3]);
    let five = ConstraintStack::new().with(
        FrameMatch::point_grip(
            &robot,
            "hand",
            hold,
            MatchMode::TurnAbout(Vector3::z_axis()),
        )
        .unwrap(),
    );
    let mut pbuf = ProjectionBuffer::new(&robot, &five);
    let mut qq = q.clone();
    let e = project(&robot, &stack, &settings, &mut qq, &mut pbuf).unwrap_err();
    assert!(matches!(e, ConstraintError::WrongRobot { .. }), "{e:?}");
}

/// Two robots with the same number of links and tangent coordinates but different `nq`
/// (a floating body vs six revolute joints): the buffer passes the stack's shape check, so
/// the configuration-sized scratch must be checked too.
#[test]
fn buffer_from_robot_with_same_nv_but_other_nq_is_an_error() {
    let link = |n: &str| LinkSpec {
        name: n.into(),
        shapes: vec![],
    };
    let names = ["l0", "l1", "l2", "l3", "l4", "l5", "l6"];
    let chain = RobotSpec {
        name: "chain6".into(),
        links: names.iter().map(|n| link(n)).collect(),
        joints: (0..6)
            .map(|i| {
                common::joint(
                    &format!("j{i}"),
                    JointType::Revolute,
                    names[i],
                    names[i + 1],
                    [0.0, 0.0, 0.2],
                    [0.0, (i % 2) as f64, ((i + 1) % 2) as f64],
                    Some((-3.0, 3.0)),
                )
            })
            .collect(),
        ..Default::default()
    }
    .build()
    .unwrap();
    let mut joints = vec![JointSpec {
        name: "float".into(),
        joint_type: JointType::Floating,
        parent: "l0".into(),
        child: "l1".into(),
        origin: Pose::identity(),
        axis: Vector3::z(),
        limits: vec![],
        passive: false,
    }];
    for i in 1..6 {
        joints.push(common::joint(
            &format!("f{i}"),
            JointType::Fixed,
            names[i],
            names[i + 1],
            [0.0, 0.0, 0.1],
            [0.0; 3],
            None,
        ));
    }
    let body = RobotSpec {
        name: "body".into(),
        links: names.iter().map(|n| link(n)).collect(),
        joints,
        ..Default::default()
    }
    .build()
    .unwrap();
    assert_eq!(chain.nv(), body.nv());
    assert_ne!(chain.nq(), body.nq());
    assert_eq!(chain.links().len(), body.links().len());
    let target = pose_from_xyz_rpy([0.1, 0.2, 0.6], [0.0; 3]);
    for (robot, other) in [(&chain, &body), (&body, &chain)] {
        let tip = FrameRef::on_link(robot, "l6", Pose::identity()).unwrap();
        let stack = ConstraintStack::new().with(FrameMatch::new(
            tip,
            FrameRef::world(target),
            MatchMode::Position,
            "reach",
        ));
        let mut pbuf = ProjectionBuffer::new(other, &stack);
        let mut q = robot.neutral();
        let e = project(
            robot,
            &stack,
            &ProjectionSettings::default(),
            &mut q,
            &mut pbuf,
        )
        .unwrap_err();
        assert!(is_length_error(&e), "{}: {e:?}", robot.name());
    }
}

/// Bug (src/projection.rs, src/walk.rs): settings built field by field (the fields are
/// public) are not validated by `project` / `walk`: a NaN tolerance, zero iterations, a
/// negative stride or zero steps give silent non-answers (`IterationCap`, `StrideExceeded`,
/// `StepLimit`) instead of a typed error.
#[test]
fn project_and_walk_reject_invalid_settings() {
    let (robot, stack, q) = arm_and_grip();
    let mut buf = ProjectionBuffer::new(&robot, &stack);
    let bad_projection = [
        ProjectionSettings {
            tolerance: f64::NAN,
            ..Default::default()
        },
        ProjectionSettings {
            tolerance: -1.0,
            ..Default::default()
        },
        ProjectionSettings {
            max_iterations: 0,
            ..Default::default()
        },
        ProjectionSettings {
            max_step: 0.0,
            ..Default::default()
        },
    ];
    let mut accepted = vec![];
    for s in bad_projection {
        let mut qq = q.clone();
        qq[0] += 0.1;
        let r = project(&robot, &stack, &s, &mut qq, &mut buf);
        if r.is_ok() {
            accepted.push(format!("project {s:?} -> {r:?}"));
        }
    }
    let mut target = q.clone();
    target[2] += 0.3;
    let bad_walk = [
        WalkSettings {
            stride: -0.05,
            ..Default::default()
        },
        WalkSettings {
            stride: f64::NAN,
            ..Default::default()
        },
        WalkSettings {
            max_steps: 0,
            ..Default::default()
        },
        WalkSettings {
            max_deviation: f64::NAN,
            ..Default::default()
        },
    ];
    for s in bad_walk {
        let r = walk(&robot, &stack, &q, &target, &s, &mut buf);
        if let Ok(w) = r {
            accepted.push(format!(
                "walk stride {} max_deviation {} max_steps {} -> {:?} ({} points)",
                s.stride,
                s.max_deviation,
                s.max_steps,
                w.stop,
                w.path.len()
            ));
        }
    }
    assert!(accepted.is_empty(), "accepted:\n{}", accepted.join("\n"));
}

/// Bug (src/projection.rs, src/walk.rs): a non-finite configuration is not rejected:
/// `project` returns `Ok` with NaN coordinates (outside every limit), and `walk` starts
/// from a NaN `qa` because `NaN > tolerance` is false, so `StartOffManifold` is skipped.
#[test]
fn non_finite_configuration_is_an_error() {
    let (robot, stack, q) = arm_and_grip();
    let mut buf = ProjectionBuffer::new(&robot, &stack);
    let mut bad = q.clone();
    bad[3] = f64::NAN;
    let mut qq = bad.clone();
    let r = project(
        &robot,
        &stack,
        &ProjectionSettings::default(),
        &mut qq,
        &mut buf,
    );
    assert!(
        matches!(
            r,
            Err(ConstraintError::Configuration(
                ConfigurationError::NotFinite { .. }
            ))
        ),
        "project from NaN: {r:?}, q = {qq:?}"
    );
    let r = walk(&robot, &stack, &bad, &q, &WalkSettings::default(), &mut buf);
    assert!(r.is_err(), "walk from NaN: {:?}", r.map(|w| w.stop));
}

/// Bug (src/constraint): a constraint built for another robot indexes the link poses with
/// its own link ids (`FrameRef::pose` is `poses[self.link]`), so evaluating it on a robot
/// with fewer links panics instead of returning an error.
#[test]
fn constraint_from_another_robot_is_an_error() {
    let twin = common::twin();
    let arm = common::arm7();
    let f = FrameRef::effector(&twin, "right").unwrap();
    assert!(
        f.link >= arm.links().len(),
        "precondition: link id out of arm7's range"
    );
    let stack = ConstraintStack::new()
        .with(FrameMatch::point_grip(&twin, "right", Pose::identity(), MatchMode::Full).unwrap());
    let mut buf = stack.buffer(&arm);
    let q = arm.neutral();
    let r = catch_unwind(AssertUnwindSafe(|| {
        stack.evaluate(&arm, &q, &mut buf, true).map(|_| ())
    }));
    match r {
        Err(_) => panic!("evaluate panicked"),
        Ok(res) => assert!(res.is_err(), "evaluate accepted a foreign constraint"),
    }
}
