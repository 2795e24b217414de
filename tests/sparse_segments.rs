//! Acceptance 4: a constrained path whose waypoints all satisfy the constraint but whose
//! straight segments do not is rejected by the verifier, and `plan_motion` output never has
//! that defect.
//!
//! The sparse path: a point robot (three slides) holding a door handle by position (a
//! tether, 3 rows), with the door passive. Two waypoints on the manifold with the door at 0
//! and at theta: the handle is on the hinge circle at both, and so is the point. Halfway
//! along the straight segment in joint space the hinge is at theta / 2 and the point is at
//! the midpoint of the chord. Elementary geometry: the chord midpoint lies on the bisector
//! at r cos(theta / 2) from the axis, the handle at r, so the residual there is exactly
//! r (1 - cos(theta / 2)).

mod common;

use clamber::constraint::{ConstraintStack, FrameMatch, FrameRef, MatchMode};
use clamber::demo::{bar_slide, carry, door, lever};
use clamber::math::{pose_from_xyz_rpy, Pose};
use clamber::model::{EffectorSpec, JointType, LinkSpec, RobotSpec};
use clamber::motion::{plan_motion, MotionSettings};
use clamber::scenario::Scenario;
use clamber::verify::{verify_path, Defect, VerifySettings};
use common::joint;

const R: f64 = 0.7;
const HINGE: [f64; 3] = [1.0, 0.5, 0.0];
const H: f64 = 0.9;

#[test]
fn waypoints_on_the_circle_with_a_chord_between_them_are_rejected() {
    let mut links = vec![LinkSpec {
        name: "world".into(),
        shapes: vec![],
    }];
    let mut joints = vec![];
    let mut parent = "world".to_string();
    for (name, axis) in [
        ("x", [1.0, 0.0, 0.0]),
        ("y", [0.0, 1.0, 0.0]),
        ("z", [0.0, 0.0, 1.0]),
    ] {
        let child = format!("slide_{name}");
        links.push(LinkSpec {
            name: child.clone(),
            shapes: vec![],
        });
        joints.push(joint(
            name,
            JointType::Prismatic,
            &parent,
            &child,
            [0.0; 3],
            axis,
            Some((-3.0, 3.0)),
        ));
        parent = child;
    }
    links.push(LinkSpec {
        name: "door_panel".into(),
        shapes: vec![],
    });
    let mut hinge = joint(
        "hinge",
        JointType::Revolute,
        "world",
        "door_panel",
        HINGE,
        [0.0, 0.0, 1.0],
        Some((-0.1, 3.0)),
    );
    hinge.passive = true;
    joints.push(hinge);
    let robot = RobotSpec {
        name: "point_at_door".into(),
        links,
        joints,
        effectors: vec![EffectorSpec {
            name: "tip".into(),
            link: "slide_z".into(),
            grip: Pose::identity(),
        }],
        ..Default::default()
    }
    .build()
    .unwrap();
    let handle = pose_from_xyz_rpy([R, 0.0, H], [0.0; 3]);
    let tether = FrameMatch::new(
        FrameRef::effector(&robot, "tip").unwrap(),
        FrameRef::on_link(&robot, "door_panel", handle).unwrap(),
        MatchMode::Position,
        "tip on handle",
    );
    let stack = ConstraintStack::new().with(tether);
    let qi = |name: &str| robot.joints()[robot.joint_id(name).unwrap()].q_index;
    let on_circle = |a: f64| {
        let mut q = vec![0.0; robot.nq()];
        q[qi("x")] = HINGE[0] + R * a.cos();
        q[qi("y")] = HINGE[1] + R * a.sin();
        q[qi("z")] = H;
        q[qi("hinge")] = a;
        q
    };
    let mut buf = stack.buffer(&robot);
    let tol = 1e-6;
    for theta in [0.3, std::f64::consts::FRAC_PI_2, 2.0] {
        let (a, b) = (on_circle(0.0), on_circle(theta));
        for q in [&a, &b] {
            assert!(stack.evaluate(&robot, q, &mut buf, false).unwrap() < 1e-12);
        }
        // An even number of checks per segment: the midpoint is one of them.
        let d = robot.distance(&a, &b).unwrap();
        let v = VerifySettings::new(d / 20.0, tol, 10.0).unwrap();
        let rep = verify_path(&robot, &stack, None, &[a.clone(), b.clone()], &v).unwrap();
        let expected = R * (1.0 - (theta / 2.0).cos());
        println!(
            "theta {theta:.3}: verifier max residual {:.9e}, analytic r(1 - cos(theta/2)) = {expected:.9e}; {}",
            rep.max_residual,
            rep.defects.first().map(|d| d.to_string()).unwrap_or_default()
        );
        assert!((rep.max_residual - expected).abs() <= 1e-12 * (1.0 + expected));
        assert!(matches!(
            rep.defects.first(),
            Some(Defect::OffManifold { at, .. }) if at.segment == 0 && at.fraction > 0.0 && at.fraction < 1.0
        ));
        // Densely placed waypoints on the same arc (each on the manifold) pass: the chord
        // error shrinks as r (1 - cos(step / 2)).
        let n = 2000;
        let dense: Vec<Vec<f64>> = (0..=n)
            .map(|k| on_circle(theta * k as f64 / n as f64))
            .collect();
        let rep = verify_path(
            &robot,
            &stack,
            None,
            &dense,
            &VerifySettings::new(1e-3, tol, 10.0).unwrap(),
        )
        .unwrap();
        let step_err = R * (1.0 - (theta / n as f64 / 2.0).cos());
        assert!(rep.passed(), "{:?}", rep.defects.first());
        assert!(rep.max_residual <= step_err * (1.0 + 1e-6) + 1e-15);
    }
}

/// Residual norm at points spaced at most `spacing` along every straight segment of `path`,
/// computed here (interpolation and evaluation) rather than by the verifier.
fn worst_along(s: &Scenario, path: &[Vec<f64>], spacing: f64) -> (f64, usize) {
    let stack = s
        .start
        .stance
        .constraints(&s.robot, &s.scene, &s.constant)
        .unwrap();
    let mut buf = stack.buffer(&s.robot);
    let mut q = vec![0.0; s.robot.nq()];
    let (mut worst, mut points) = (0.0f64, 0usize);
    for w in path.windows(2) {
        let d = s.robot.distance(&w[0], &w[1]).unwrap();
        let n = ((d / spacing).ceil() as usize).max(1);
        for k in 0..=n {
            s.robot
                .interpolate(&w[0], &w[1], k as f64 / n as f64, &mut q)
                .unwrap();
            worst = worst.max(stack.evaluate(&s.robot, &q, &mut buf, false).unwrap());
            points += 1;
        }
    }
    (worst, points)
}

#[test]
fn plan_motion_output_has_no_off_manifold_segment() {
    for s in [
        door::scenario().unwrap(),
        lever::scenario().unwrap(),
        bar_slide::scenario().unwrap(),
        carry::scenario().unwrap(),
    ] {
        for seed in [11, 12] {
            let mut s = s.clone();
            s.limits.seed = seed;
            let m = plan_motion(&s, &MotionSettings::default()).unwrap();
            let spacing = s.limits.stride / 10.0;
            let samples: Vec<Vec<f64>> = m.samples.iter().map(|x| x.q.clone()).collect();
            let (wp, np) = worst_along(&s, &m.path, spacing);
            let (ws, ns) = worst_along(&s, &samples, spacing);
            println!(
                "{} seed {seed}: path {} points, worst residual {wp:.2e} over {np} checks; \
                 samples {} at {} s, worst {ws:.2e} over {ns} checks (tolerance {:.0e}, planned \
                 waypoints {})",
                s.name,
                m.path.len(),
                m.samples.len(),
                m.tolerances.time_step,
                s.limits.tolerance,
                m.stats.planned_waypoints
            );
            assert!(wp <= s.limits.tolerance, "{}: path {wp}", s.name);
            assert!(ws <= s.limits.tolerance, "{}: samples {ws}", s.name);
            // The planner's own waypoints are farther apart: the densification did work.
            assert!(m.path.len() > m.stats.planned_waypoints);
        }
    }
}
